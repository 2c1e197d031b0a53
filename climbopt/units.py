"""Units at the edge: one pint registry, parsing of "30000 ft"-style text into SI floats, and
conversions back to the units people read (ft, kt, lb, nmi) for reports.

Nothing outside this module and :mod:`climbopt.scenario` handles pint objects; everything else in
climbopt works in SI floats (m, s, kg, N, W, Pa, K, rad).

Errors are :class:`UnitError` (a ``ValueError``) carrying one plain-English message naming the
field, the text given and what was expected -- never a pint traceback.
"""

from __future__ import annotations

import difflib
import math
import re
from dataclasses import dataclass

import pint

#: The single unit registry of climbopt. pint's built-in definitions use the international
#: foot (0.3048 m), pound (0.45359237 kg), nautical mile (1852 m) and knot (1852 m / 3600 s).
ureg = pint.UnitRegistry(autoconvert_offset_to_baseunit=False)


@dataclass(frozen=True)
class Dimension:
    """A physical kind of quantity accepted in scenario files.

    ``si`` is the unit every value is converted to; ``example`` is shown in error messages.
    ``angle_power`` marks angle-like quantities (pint counts radians as dimensionless):
    +1 for an angle, -1 for "per angle" (a lift-curve slope), 0 otherwise.
    """

    name: str
    si: str
    example: str
    angle_power: int = 0


#: Dimension names accepted by :func:`parse_quantity`.
DIMENSIONS: dict[str, Dimension] = {
    d.name: d
    for d in (
        Dimension("dimensionless", "dimensionless", "0.78"),
        Dimension("length", "m", "30000 ft"),
        Dimension("area", "m**2", "125 m^2"),
        Dimension("mass", "kg", "5200 kg"),
        Dimension("time", "s", "1600 s"),
        Dimension("speed", "m/s", "250 kt"),
        Dimension("force", "N", "120 kN"),
        Dimension("power", "W", "2000 kW"),
        Dimension("pressure", "Pa", "80 kPa"),
        Dimension("mass_flow", "kg/s", "2500 kg/h"),
        Dimension("tsfc", "kg/N/s", "0.6 lb/lbf/h"),
        Dimension("psfc", "kg/W/s", "0.5 lb/hp/h"),
        Dimension("temperature_difference", "K", "15 K"),
        Dimension("angle", "rad", "3 deg", angle_power=1),
        Dimension("per_angle", "1/rad", "5.2 1/rad", angle_power=-1),
    )
}


class UnitError(ValueError):
    """A value could not be read as a quantity of the expected dimension.

    ``field`` is the dotted name of the input, ``message`` the reason (without the field).
    """

    def __init__(self, field: str, message: str):
        self.field = field
        self.message = message
        super().__init__(f"{field}: {message}" if field else message)


_NUMBER_RE = re.compile(
    r"""^\s*(?P<num>[-+]?(?:
            \d{1,3}(?:,\d{3})+(?:\.\d*)?     # 35,000 or 1,500.5 (thousands separators)
          | \d+\.?\d*(?:[eE][-+]?\d+)?       # 35000, 0.78, 1e5
          | \.\d+(?:[eE][-+]?\d+)?           # .5
          | nan | inf | infinity
        ))\s*(?P<unit>.*?)\s*$""",
    re.VERBOSE | re.IGNORECASE,
)

_OFFSET_HINT = (
    "a temperature *offset* is needed: write e.g. '15 K' or '15 delta_degC' "
    "(plain degC/degF are absolute temperatures)"
)


def _dimension(expected_dimension: str) -> Dimension:
    try:
        return DIMENSIONS[expected_dimension]
    except KeyError:
        raise ValueError(f"unknown dimension name {expected_dimension!r}; known: {sorted(DIMENSIONS)}") from None


def _all_unit_names() -> list[str]:
    names = set()
    for name in dir(ureg):
        if not name.startswith("_"):
            names.add(name)
    return sorted(names)


_UNIT_NAMES: list[str] | None = None


def _suggest_unit(bad: str) -> str:
    """Return ' (did you mean ...?)' for an unknown unit name, or ''."""
    global _UNIT_NAMES
    if _UNIT_NAMES is None:
        try:
            _UNIT_NAMES = _all_unit_names()
        except Exception:  # pragma: no cover - pint internals changed
            _UNIT_NAMES = []
    common = ["ft", "m", "km", "kft", "kt", "kn", "nmi", "kg", "lb", "N", "kN", "lbf", "klbf", "W",
              "kW", "hp", "Pa", "kPa", "psf", "K", "delta_degC", "s", "h", "min", "deg", "rad"]
    close = difflib.get_close_matches(bad, common, n=3, cutoff=0.5)
    if not close:
        close = difflib.get_close_matches(bad, _UNIT_NAMES, n=3, cutoff=0.75)
    return f" (did you mean {', '.join(repr(c) for c in close)}?)" if close else ""


_UNIT_CHARS_RE = re.compile(r"^[\w\s/*^().%°²³µ·-]*$")


def parse_unit(unit_text: str, expected_dimension: str, field: str = "", whole: str | None = None) -> pint.Unit:
    """Parse a unit name (e.g. ``"kft"``, ``"lb/lbf/h"``) and check its dimension.

    Returns the pint unit. Raises :class:`UnitError` with a message naming ``field``.
    """
    dim = _dimension(expected_dimension)
    if not isinstance(unit_text, str):
        raise UnitError(field, f"unit must be a string such as {dim.example.split(' ', 1)[-1]!r}, "
                               f"got {unit_text!r}")
    text = unit_text.strip()
    if not _UNIT_CHARS_RE.match(text):
        raise UnitError(field, f"cannot read unit {unit_text!r}; expected {_describe(dim)}")
    if text == "":
        unit = ureg.dimensionless
    else:
        try:
            unit = ureg.parse_units(text)
        except pint.UndefinedUnitError as exc:
            bad = getattr(exc, "unit_names", None)
            bad_name = bad[0] if isinstance(bad, (list, tuple)) and bad else (bad or text)
            raise UnitError(field, f"unknown unit {str(bad_name)!r} in {unit_text!r}"
                                   f"{_suggest_unit(str(bad_name))}; expected {_describe(dim)}") from None
        except Exception:  # pint raises several types on malformed expressions
            raise UnitError(field, f"cannot read unit {unit_text!r}; expected {_describe(dim)}") from None
    _check_unit(unit, dim, field, unit_text, has_unit=text != "", whole=whole)
    return unit


def _a(words: str) -> str:
    """Prefix an English indefinite article."""
    return ("an " if words[:1].lower() in "aeiou" else "a ") + words


def _describe(dim: Dimension) -> str:
    if dim.name == "dimensionless":
        return "a plain number, e.g. 0.78"
    return f"{_a(dim.name.replace('_', ' '))} such as '{dim.example}'"


def _check_unit(unit: pint.Unit, dim: Dimension, field: str, shown: str, has_unit: bool,
                whole: str | None = None) -> None:
    q = ureg.Quantity(1.0, unit)
    whole = shown if whole is None else whole
    if not q._is_multiplicative:
        if dim.name == "temperature_difference":
            raise UnitError(field, f"{shown!r} is an absolute temperature; {_OFFSET_HINT}")
        raise UnitError(field, f"{shown!r} is an absolute temperature scale; expected {_describe(dim)}")
    if dim.angle_power != 0:
        if not has_unit:
            raise UnitError(field, f"missing unit in {whole!r}; expected {_describe(dim)}")
        root = q.to_root_units()
        wanted = ureg.radian ** dim.angle_power
        if root.units != wanted:
            raise UnitError(field, f"{shown!r} has the wrong dimension; expected {_describe(dim)}")
        return
    if dim.name == "dimensionless":
        if not q.dimensionless or q.to_root_units().units != ureg.dimensionless:
            raise UnitError(field, f"{shown!r} has units ({unit}); expected {_describe(dim)}")
        return
    if not has_unit:
        raise UnitError(field, f"missing unit in {whole!r}; expected {_describe(dim)}")
    if not q.is_compatible_with(dim.si):
        raise UnitError(field, f"unit {str(shown).strip()!r} is {_dimension_words(q)}, not "
                               f"{_a(dim.name.replace('_', ' '))}; expected e.g. '{dim.example}'")


def _dimension_words(q: pint.Quantity) -> str:
    for d in DIMENSIONS.values():
        if d.angle_power == 0 and d.name != "dimensionless" and q.is_compatible_with(d.si):
            return _a(d.name.replace("_", " "))
    if q.dimensionless:
        return "dimensionless"
    return f"of dimension {q.dimensionality}"


def _parse_number(text: str) -> float:
    return float(text.replace(",", ""))


def split_quantity(text: str, field: str = "") -> tuple[float, str]:
    """Split ``"30,000 ft"`` into ``(30000.0, "ft")``; the unit part may be empty."""
    m = _NUMBER_RE.match(text)
    if m is None:
        raise UnitError(field, f"cannot read {text!r}: expected a number followed by a unit, e.g. '30000 ft'")
    return _parse_number(m.group("num")), m.group("unit")


def parse_quantity(text, expected_dimension: str, field: str = "") -> float:
    """Read ``text`` (e.g. ``"30000 ft"``, ``"250 kt"``, ``"0.6 lb/lbf/h"``) as an SI float.

    Parameters
    ----------
    text : str (or a plain int/float for ``"dimensionless"``)
        A number followed by a unit. Thousands separators ("35,000 ft") are accepted.
    expected_dimension : str
        A key of :data:`DIMENSIONS`, e.g. ``"length"``, ``"speed"``, ``"tsfc"``.
    field : str
        Dotted name of the input, used in error messages.

    Returns
    -------
    float
        The value in the SI unit of the dimension (``DIMENSIONS[expected_dimension].si``).

    Raises
    ------
    UnitError
        Unknown unit, wrong dimension, missing unit, an absolute temperature where an offset
        is needed, or a value that is NaN or infinite.
    """
    value, unit = parse_quantity_with_unit(text, expected_dimension, field)
    return value


def parse_quantity_with_unit(text, expected_dimension: str, field: str = "") -> tuple[float, str]:
    """Like :func:`parse_quantity` but also return the unit text as written (for display)."""
    dim = _dimension(expected_dimension)
    if isinstance(text, bool):
        raise UnitError(field, f"expected {_describe(dim)}, got the boolean {str(text).lower()}")
    if isinstance(text, (int, float)):
        if dim.name != "dimensionless":
            raise UnitError(field, f"missing unit in {text!r}; write it as a string with a unit, "
                                   f"e.g. '{dim.example}'")
        value = float(text)
        _check_finite(value, field, text)
        return value, ""
    if not isinstance(text, str):
        kind = {list: "an array", dict: "a table"}.get(type(text), type(text).__name__)
        raise UnitError(field, f"expected {_describe(dim)} as a string, got {kind} {text!r}")
    number, unit_text = split_quantity(text, field)
    _check_finite(number, field, text)
    unit = parse_unit(unit_text, expected_dimension, field, whole=text)
    try:
        value = float(ureg.Quantity(number, unit).to(dim.si).magnitude) if unit_text else number
    except Exception:  # pragma: no cover - guarded by parse_unit's dimension check
        raise UnitError(field, f"cannot convert {text!r} to {dim.si}") from None
    _check_finite(value, field, text)
    return value, unit_text


def _check_finite(value: float, field: str, shown) -> None:
    if not math.isfinite(value):
        raise UnitError(field, f"{shown!r} is not a finite number")


def unit_factor(unit_text: str, expected_dimension: str, field: str = "") -> float:
    """SI value of one ``unit_text`` (e.g. ``unit_factor("kft", "length") == 304.8``)."""
    dim = _dimension(expected_dimension)
    unit = parse_unit(unit_text, expected_dimension, field)
    if not str(unit_text).strip():
        return 1.0
    return float(ureg.Quantity(1.0, unit).to(dim.si).magnitude)


# --------------------------------------------------------------------------------------------
# Output conversions (SI <-> the units people read). Factors come from pint's definitions.


def convert(value, from_unit: str, to_unit: str):
    """Convert a float or numpy array between two compatible units (multiplicative units only)."""
    factor = ureg.Quantity(1.0, from_unit).to(to_unit).magnitude
    return value * factor


def _si_factor(unit: str) -> float:
    """SI value of one ``unit`` (pint's base units in its default MKS system are SI)."""
    q = ureg.Quantity(1.0, unit)
    if not q._is_multiplicative:
        raise ValueError(f"{unit!r} is an offset unit; use e.g. 'delta_degC' or 'K'")
    return float(q.to_base_units().magnitude)


def from_si(value_si, unit: str):
    """Express an SI value (float or numpy array) in ``unit`` (e.g. ``from_si(304.8, "kft") == 1``).

    An empty unit means dimensionless (returned unchanged).
    """
    if not unit or not unit.strip():
        return value_si
    return value_si / _si_factor(unit)


def to_si(value, unit: str):
    """Convert a value (float or array) given in ``unit`` to SI (the inverse of :func:`from_si`)."""
    if not unit or not unit.strip():
        return value
    return value * _si_factor(unit)


_FT_M = float(ureg.Quantity(1.0, "ft").to("m").magnitude)
_KT_M_S = float(ureg.Quantity(1.0, "kt").to("m/s").magnitude)
_LB_KG = float(ureg.Quantity(1.0, "lb").to("kg").magnitude)
_NMI_M = float(ureg.Quantity(1.0, "nmi").to("m").magnitude)
_LBF_N = float(ureg.Quantity(1.0, "lbf").to("N").magnitude)


def m_to_ft(x):
    """Metres -> international feet."""
    return x / _FT_M


def ft_to_m(x):
    """International feet -> metres."""
    return x * _FT_M


def m_s_to_kt(x):
    """m/s -> knots."""
    return x / _KT_M_S


def kt_to_m_s(x):
    """Knots -> m/s."""
    return x * _KT_M_S


def kg_to_lb(x):
    """Kilograms -> avoirdupois pounds (mass)."""
    return x / _LB_KG


def lb_to_kg(x):
    """Avoirdupois pounds (mass) -> kilograms."""
    return x * _LB_KG


def m_to_nmi(x):
    """Metres -> nautical miles."""
    return x / _NMI_M


def nmi_to_m(x):
    """Nautical miles -> metres."""
    return x * _NMI_M


def n_to_lbf(x):
    """Newtons -> pounds-force."""
    return x / _LBF_N


def lbf_to_n(x):
    """Pounds-force -> newtons."""
    return x * _LBF_N
