"""Units at the edge: one pint registry, parsing of "30000 ft"-style text into SI floats, and
conversions back to the units people read (ft, kt, lb, nmi) for reports.

Nothing outside this module and :mod:`climbopt.scenario` handles pint objects; everything else in
climbopt works in SI floats (m, s, kg, N, W, Pa, K, rad).

Errors are :class:`UnitError` (a ``ValueError``) carrying one plain-English message naming the
field, the text given and what was expected -- never a pint traceback.

Untrusted text never reaches pint's expression parser. "number unit" text is split here, its
length and magnitude bounded (:data:`MAX_QUANTITY_CHARS`, :data:`MAX_MAGNITUDE`), and the unit
is read by a small parser of our own: a product or quotient of at most :data:`MAX_UNIT_FACTORS`
unit names with small integer powers and at most one level of parentheses (``kg/h``,
``lb/lbf/h``, ``m^2``, ``1/rad``, ``kg/(N s)``). pint is only asked to look up single names
(cached), so no input can make it recurse or run for long.
"""

from __future__ import annotations

import difflib
import functools
import math
import re
from dataclasses import dataclass


def _import_pint():
    """pint, imported without its optional dask support: ``pint.compat`` imports dask whenever
    it is installed (about 0.1 s, a tenth of climbopt's start-up), and climbopt never hands
    pint a dask array. dask stays importable afterwards (sweeps use it); when it is already
    imported, pint is imported as usual."""
    import sys

    if "dask" in sys.modules:
        import pint as module

        return module
    sys.modules["dask"] = None  # pint's "try: import dask" then fails fast
    try:
        import pint as module
    finally:
        del sys.modules["dask"]
    return module


pint = _import_pint()

#: Longest "number unit" text accepted (characters).
MAX_QUANTITY_CHARS = 64
#: Longest unit text accepted (characters), e.g. ``"lb/lbf/h"``.
MAX_UNIT_CHARS = 32
#: Most unit names in one unit expression (``lb/lbf/h`` has three).
MAX_UNIT_FACTORS = 6
#: Largest power of one unit name (``m^2``, ``ft^3``, ``s^-2``).
MAX_UNIT_POWER = 4
#: Largest magnitude of a number written in a scenario (before unit conversion). Real inputs are
#: many orders of magnitude smaller; anything larger is a typing error. (Messages say "1e15".)
MAX_MAGNITUDE = 1e15
#: Longest excerpt of any input echoed in a message (characters).
MAX_SHOWN_CHARS = 60


@functools.lru_cache(maxsize=None)
def registry() -> pint.UnitRegistry:
    """The single unit registry of climbopt, built on first use rather than at import. pint's
    built-in definitions use the international foot (0.3048 m), pound (0.45359237 kg), nautical
    mile (1852 m) and knot (1852 m / 3600 s).

    pint keeps its parsed definitions in ``pint/`` under climbopt's cache folder
    (:func:`climbopt.cache_dir`): about 0.05 s instead of 0.15 s from the second run on. A
    cache that cannot be written or read (a read-only home, a file cut short by a killed
    process) is removed and the registry built without it."""
    import shutil

    from climbopt import cache_dir

    folder = cache_dir() / "pint"
    try:
        folder.mkdir(parents=True, exist_ok=True)
        return pint.UnitRegistry(autoconvert_offset_to_baseunit=False, cache_folder=folder)
    except Exception:  # noqa: BLE001 - any failure of the cache only costs time
        shutil.rmtree(folder, ignore_errors=True)
        return pint.UnitRegistry(autoconvert_offset_to_baseunit=False)


def __getattr__(name: str):
    """``climbopt.units.ureg`` still names the registry (built on first access)."""
    if name == "ureg":
        return registry()
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")


def shorten(value, limit: int = MAX_SHOWN_CHARS) -> str:
    """``value`` as text (strings as they are, other values by ``repr``), cut to ``limit``
    characters with "..." so that a message never echoes a huge input."""
    try:
        text = value if isinstance(value, str) else repr(value)
    except ValueError:  # an integer with more digits than Python converts to text
        text = f"<an integer of about {int(value.bit_length() * 0.30103)} digits>"
    return text if len(text) <= limit else text[: limit - 3] + "..."


def _q(value) -> str:
    """A value quoted for a message: ``'text'`` (cut to :data:`MAX_SHOWN_CHARS`)."""
    return f"'{shorten(value)}'"


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

#: The unit systems of printed and written output: ``"si"`` (m, km, kg, m/s; airspeeds to fly
#: in km/h), ``"us"`` (ft, nmi, lb, kt, ft/min), ``"crew"`` (ft, nmi, kt, ft/min, masses in kg)
#: and ``"crew-lb"`` (the crew set with masses in lb). The command line offers ``crew`` and
#: picks kg or lb from the unit the scenario file wrote its mass in (:func:`unit_system_for`).
UNIT_SYSTEMS = ("si", "us", "crew", "crew-lb")

#: Display unit of each kind of quantity in each unit system of printed output (kind ->
#: {system: unit text}); the one table for every output module. Kinds are the
#: :data:`DIMENSIONS` names plus "altitude", "distance" (long ground distances), "airspeed"
#: (a speed to fly, as crews read it), "rate" (rate of climb, specific excess power),
#: "fuel_specific_energy" (Ps per unit fuel flow) and "none" (plain numbers).
DISPLAY_UNITS: dict[str, dict[str, str]] = {
    kind: dict(zip(UNIT_SYSTEMS, row)) for kind, row in {
        #                        si         us          crew        crew-lb
        "length":              ("m",      "ft",       "ft",       "ft"),
        "altitude":            ("m",      "ft",       "ft",       "ft"),
        "distance":            ("km",     "nmi",      "nmi",      "nmi"),
        "area":                ("m^2",    "ft^2",     "m^2",      "ft^2"),
        "mass":                ("kg",     "lb",       "kg",       "lb"),
        "time":                ("s",      "s",        "s",        "s"),
        "speed":               ("m/s",    "kt",       "kt",       "kt"),
        "airspeed":            ("km/h",   "kt",       "kt",       "kt"),
        "rate":                ("m/s",    "ft/min",   "ft/min",   "ft/min"),
        "force":               ("N",      "lbf",      "N",        "lbf"),
        "power":               ("W",      "hp",       "W",        "hp"),
        "pressure":            ("Pa",     "lbf/ft^2", "hPa",      "lbf/ft^2"),
        "mass_flow":           ("kg/s",   "lb/h",     "kg/h",     "lb/h"),
        "tsfc":                ("kg/N/s", "lb/lbf/h", "kg/N/h",   "lb/lbf/h"),
        "psfc":                ("kg/W/s", "lb/hp/h",  "kg/kW/h",  "lb/hp/h"),
        "temperature_difference": ("K",   "K",        "K",        "K"),
        "angle":               ("rad",    "deg",      "deg",      "deg"),
        "per_angle":           ("1/rad",  "1/rad",    "1/rad",    "1/rad"),
        "fuel_specific_energy": ("m/kg",  "ft/lb",    "ft/kg",    "ft/lb"),
        "none":                ("",       "",         "",         ""),
    }.items()
}

#: Decimal places of each display unit in written tables (CSV) and printed figures, chosen
#: for what the number means: 0.1 s of time, 0.1 m or 1 ft of altitude, 0.01 km or nmi of
#: ground distance, 0.01 m/s or 0.1 kt of speed (whole kt and km/h for a speed to fly, see
#: :data:`SPEED_TO_FLY_DIGITS`), 0.1 kg or lb of mass, 0.01 m/s or 1 ft/min of climb rate,
#: 1e-5 rad or 0.001 deg of angle, 4 decimals for Mach number and other plain numbers.
UNIT_DIGITS: dict[str, int] = {
    "s": 1, "m": 1, "ft": 0, "km": 2, "nmi": 2, "m/s": 2, "kt": 1, "km/h": 1, "kg": 1, "lb": 1,
    "ft/min": 0, "rad": 5, "deg": 3, "Pa": 0, "N": 0, "lbf": 0, "hPa": 2, "lbf/ft^2": 2, "K": 2, "kg/s": 4,
    "kg/h": 1, "lb/h": 1, "m/kg": 2, "ft/kg": 1, "ft/lb": 1, "%": 2, "": 4,
}

#: Decimal places of a speed to fly in crew tables: whole knots and km/h, Mach to 0.01.
SPEED_TO_FLY_DIGITS = {"kt": 0, "km/h": 0, "m/s": 1, "": 2}


def check_unit_system(units: str) -> None:
    """Raise ``ValueError`` unless ``units`` is one of :data:`UNIT_SYSTEMS`."""
    if units not in UNIT_SYSTEMS:
        raise ValueError(f"units must be one of {', '.join(UNIT_SYSTEMS)}, got {units!r}")


def display_unit(kind: str, units: str) -> str:
    """The unit text quantity ``kind`` is shown in for unit system ``units``."""
    check_unit_system(units)
    return DISPLAY_UNITS[kind][units]


def round_display(value, unit: str):
    """``value`` (already in ``unit``) rounded to the decimals of :data:`UNIT_DIGITS` (4 for an
    unknown unit; an int for none); None stays None, NaN stays NaN. Python's ``round``
    (correctly rounded, ties to even)."""
    if value is None:
        return None
    digits = UNIT_DIGITS.get(unit, 4)
    if isinstance(value, float) and not math.isfinite(value):
        return value
    return round(float(value)) if digits == 0 else round(float(value), digits)


def format_min_s(seconds) -> str:
    """A duration as minutes and seconds, ``"16:04"`` for 963.6 s (hours as minutes:
    ``"75:00"``); "-" for None or NaN."""
    if seconds is None or not math.isfinite(float(seconds)):
        return "-"
    sign = "-" if seconds < 0 else ""
    m, s = divmod(int(round(abs(float(seconds)))), 60)
    return f"{sign}{m}:{s:02d}"


#: Unit texts that make a file "US": lengths and altitudes in feet (or flight levels) and
#: speeds in knots.
_US_LENGTHS = ("ft", "kft", "foot", "feet")
_US_SPEEDS = ("kt", "kn", "knot", "knots", "kts")


def unit_system_for(choice: str, display_units: dict[str, str]) -> str:
    """The unit system of an output for the command-line choice ``choice``: ``"file"`` (the
    default) gives ``"us"`` when the file wrote its mission altitudes in ft (or flight levels)
    and its speeds in kt, else ``"si"``; ``"crew"`` gives ``"crew-lb"`` when the file wrote the
    aircraft mass in lb, else ``"crew"``; ``"si"`` and ``"us"`` stay as they are.

    ``display_units`` maps dotted field names to the unit the file used
    (:attr:`climbopt.scenario.Scenario.display_units`).
    """
    if choice == "crew":
        mass = display_units.get("aircraft.mass", "").strip()
        return "crew-lb" if mass in ("lb", "lbs", "pound", "pounds", "klb") else "crew"
    if choice != "file":
        check_unit_system(choice)
        return choice
    lengths = [u for k, u in display_units.items()
               if k.startswith(("mission.", "limits.")) and k.endswith(("altitude", ".below"))]
    speeds = [u for k, u in display_units.items()
              if k.startswith(("mission.", "limits.")) and k.endswith(("cas", "tas", "eas"))]
    us = (bool(lengths) and all(u.strip() in _US_LENGTHS for u in lengths)
          and all(u.strip() in _US_SPEEDS for u in speeds))
    return "us" if us else "si"


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


_COMMON_UNITS = ("ft", "m", "km", "kft", "kt", "kn", "nmi", "kg", "lb", "t", "N", "kN", "lbf",
                 "klbf", "W", "kW", "hp", "Pa", "kPa", "hPa", "psi", "K", "delta_degC", "s", "h",
                 "min", "deg", "rad")


@functools.lru_cache(maxsize=512)
def _suggest_unit(bad: str) -> str:
    """Return ' (did you mean ...?)' for an unknown unit name (at most 20 characters), or ''."""
    close = difflib.get_close_matches(bad, _COMMON_UNITS, n=3, cutoff=0.5)
    if not close:
        names = [n for n in dir(registry()) if not n.startswith("_")]
        close = difflib.get_close_matches(bad, names, n=3, cutoff=0.75)
    return f" (did you mean {', '.join(repr(c) for c in close)}?)" if close else ""


# ---- the unit expression parser -------------------------------------------------------------

_UNIT_NAME_RE = r"[A-Za-z_°µΩ][A-Za-z0-9_]*+"
#: Longest unit name (pint's names and prefixes, e.g. "delta_degree_Celsius", are shorter).
_MAX_NAME_CHARS = 20
_UNIT_TOKEN_RE = re.compile(rf"\s*(?:(?P<name>{_UNIT_NAME_RE})|(?P<int>[-+]?\d+)|(?P<op>\*\*|[*/^·()]))")
_SUPERSCRIPTS = {"²": "^2", "³": "^3"}


class _UnitSyntax(Exception):
    """A unit text outside the accepted grammar (the message says why)."""


def _tokens(text: str) -> list[tuple[str, str]]:
    for sup, plain in _SUPERSCRIPTS.items():
        text = text.replace(sup, plain)
    out, pos = [], 0
    while pos < len(text):
        m = _UNIT_TOKEN_RE.match(text, pos)
        if m is None or m.end() == pos:
            if text[pos:].strip() == "":
                break
            raise _UnitSyntax(f"unexpected {text[pos:].strip()[:1]!r}")
        kind = m.lastgroup
        if kind == "name" and len(m.group(kind)) > _MAX_NAME_CHARS:
            raise _UnitSyntax(f"a unit name of more than {_MAX_NAME_CHARS} characters")
        out.append((kind, m.group(kind)))
        pos = m.end()
    return out


def _unit_factors(text: str) -> list[tuple[str, int]]:
    """``"lb/lbf/h"`` -> ``[("lb", 1), ("lbf", -1), ("h", -1)]``.

    Grammar: factors separated by ``*``, ``·``, ``/`` or spaces (multiplication); a factor is a
    unit name or one parenthesised group of names (no nesting), optionally raised to a whole
    power with ``^`` or ``**``; a leading ``1`` stands for a numerator of one (``1/rad``).
    Division applies to the next factor only (``a/b/c`` is a b^-1 c^-1).

    One piece over 60 lines: a single pass over the tokens whose branches share its state (the
    sign, the open group, the factors a power applies to); split, they would pass it around.
    """
    toks = _tokens(text)
    factors: list[tuple[str, int]] = []
    sign, group_sign, group_start = 1, None, None  # group_sign: sign of the open '(' group
    last: list[int] = []  # indices of the factors the next power applies to
    expect_operand = True
    i = 0
    if toks and toks[0] == ("int", "1") and len(toks) > 1 and toks[1] == ("op", "/"):
        toks, expect_operand = toks[1:], False  # "1/rad": a numerator of one
    while i < len(toks):
        kind, val = toks[i]
        outer = 1 if group_sign is None else group_sign
        if kind == "name" or (kind == "op" and val == "(" and expect_operand):
            if not expect_operand:  # "ft lbf": a space multiplies
                sign = 1
            if kind == "name":
                factors.append((val, sign * outer))
                last = [len(factors) - 1]
            else:
                if group_sign is not None:
                    raise _UnitSyntax("nested parentheses")
                group_sign, group_start, sign = sign, len(factors), 1
                expect_operand = True
                i += 1
                continue
            expect_operand = False
        elif kind == "op" and val in ("^", "**"):
            if expect_operand or i + 1 >= len(toks) or toks[i + 1][0] != "int":
                raise _UnitSyntax("a power needs a unit before it and a whole number after it")
            power = int(toks[i + 1][1])
            if power == 0 or abs(power) > MAX_UNIT_POWER:
                raise _UnitSyntax(f"power {power} out of range (whole numbers 1 to {MAX_UNIT_POWER}, "
                                  f"or negative)")
            for j in last:
                factors[j] = (factors[j][0], factors[j][1] * power)
            i += 2
            continue
        elif kind == "op" and val in ("*", "·", "/"):
            if expect_operand:
                raise _UnitSyntax(f"{val!r} needs a unit before it")
            sign = -1 if val == "/" else 1
            expect_operand = True
        elif kind == "op" and val == ")":
            if group_sign is None or expect_operand:
                raise _UnitSyntax("unbalanced parentheses")
            last = list(range(group_start, len(factors)))
            group_sign, sign = None, 1
        elif kind == "op" and val == "(":
            raise _UnitSyntax("nested parentheses" if group_sign is not None else "misplaced '('")
        else:  # a number inside a unit
            raise _UnitSyntax(f"unexpected number {val!r}")
        i += 1
    if group_sign is not None:
        raise _UnitSyntax("unbalanced parentheses")
    if expect_operand and toks:
        raise _UnitSyntax("ends with an operator")
    if len(factors) > MAX_UNIT_FACTORS:
        raise _UnitSyntax(f"more than {MAX_UNIT_FACTORS} unit names")
    for name, power in factors:
        if abs(power) > MAX_UNIT_POWER:
            raise _UnitSyntax(f"power of {name!r} out of range")
    return factors


@functools.lru_cache(maxsize=1024)
def _unit_of_name(name: str):
    """pint's unit for one vetted name (at most _MAX_NAME_CHARS letters, digits and
    underscores), or None."""
    try:
        unit = registry().parse_units(name)
    except Exception:  # pint raises several types for unknown names
        return None
    return unit if isinstance(unit, pint.Unit) else None


@functools.lru_cache(maxsize=1024)
def _resolve(text: str):
    """pint unit of a stripped unit text of at most :data:`MAX_UNIT_CHARS` characters; raises
    ``_UnitSyntax`` (grammar) or ``LookupError`` (an unknown name, as its argument)."""
    factors = _unit_factors(text)
    if not factors:
        return registry().dimensionless
    units = []
    for name, power in factors:
        unit = _unit_of_name(name)
        if unit is None:
            raise LookupError(name)
        units.append((unit, power))
    if len(units) == 1 and units[0][1] == 1:
        return units[0][0]  # a lone name keeps offset units (degC) intact for the checks
    result = registry().dimensionless
    for unit, power in units:
        result = result * unit**power
    return result


def parse_unit(unit_text: str, expected_dimension: str, field: str = "", whole: str | None = None) -> pint.Unit:
    """Parse a unit text (e.g. ``"kft"``, ``"lb/lbf/h"``, ``"m^2"``) and check its dimension.

    Returns the pint unit. Raises :class:`UnitError` with a message naming ``field``.
    """
    dim = _dimension(expected_dimension)
    if not isinstance(unit_text, str):
        raise UnitError(field, f"unit must be a string such as {dim.example.split(' ', 1)[-1]!r}, "
                               f"got {_q(unit_text)}")
    text = unit_text.strip()
    if len(text) > MAX_UNIT_CHARS:
        raise UnitError(field, f"unit {_q(text)} is {len(text)} characters long; expected a unit "
                               f"of at most {MAX_UNIT_CHARS} characters, e.g. "
                               f"{dim.example.split(' ', 1)[-1]!r}")
    try:
        unit = _resolve(text)
    except LookupError as exc:
        bad = str(exc.args[0])
        raise UnitError(field, f"unknown unit {bad!r} in {_q(whole or unit_text)}{_suggest_unit(bad)}; "
                               f"expected {_describe(dim)}") from None
    except _UnitSyntax as exc:
        raise UnitError(field, f"cannot read unit {_q(unit_text)} ({exc}); expected {_describe(dim)} "
                               f"(unit names joined by '*', '/' or spaces, powers as '^2')") from None
    except Exception:  # pint arithmetic on odd units (e.g. offset units in a product)
        raise UnitError(field, f"cannot read unit {_q(unit_text)}; expected {_describe(dim)}") from None
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
    q = registry().Quantity(1.0, unit)
    whole = shown if whole is None else whole
    if not q._is_multiplicative:
        if dim.name == "temperature_difference":
            raise UnitError(field, f"{_q(shown)} is an absolute temperature; {_OFFSET_HINT}")
        raise UnitError(field, f"{_q(shown)} is an absolute temperature scale; expected {_describe(dim)}")
    if dim.angle_power != 0:
        if not has_unit:
            raise UnitError(field, f"missing unit in {_q(whole)}; expected {_describe(dim)}")
        root = q.to_root_units()
        wanted = registry().radian ** dim.angle_power
        if root.units != wanted:
            raise UnitError(field, f"{_q(shown)} has the wrong dimension; expected {_describe(dim)}")
        return
    if dim.name == "dimensionless":
        if not q.dimensionless or q.to_root_units().units != registry().dimensionless:
            raise UnitError(field, f"{_q(shown)} has units ({shorten(str(unit))}); expected {_describe(dim)}")
        return
    if not has_unit:
        raise UnitError(field, f"missing unit in {_q(whole)}; expected {_describe(dim)}")
    if not q.is_compatible_with(dim.si):
        raise UnitError(field, f"unit {_q(str(shown).strip())} is {_dimension_words(q)}, not "
                               f"{_a(dim.name.replace('_', ' '))}; expected e.g. '{dim.example}'")


def _dimension_words(q: pint.Quantity) -> str:
    for d in DIMENSIONS.values():
        if d.angle_power == 0 and d.name != "dimensionless" and q.is_compatible_with(d.si):
            return _a(d.name.replace("_", " "))
    if q.dimensionless:
        return "dimensionless"
    return f"of dimension {shorten(str(q.dimensionality))}"


def _parse_number(text: str) -> float:
    return float(text.replace(",", ""))


def split_quantity(text: str, field: str = "") -> tuple[float, str]:
    """Split ``"30,000 ft"`` into ``(30000.0, "ft")``; the unit part may be empty.

    Texts longer than :data:`MAX_QUANTITY_CHARS` are refused before any pattern is applied.
    """
    if len(text) > MAX_QUANTITY_CHARS:
        raise UnitError(field, f"{_q(text)} is {len(text)} characters long; expected a number and "
                               f"a unit of at most {MAX_QUANTITY_CHARS} characters, e.g. '30000 ft'")
    m = _NUMBER_RE.match(text)
    if m is None:
        raise UnitError(field, f"cannot read {_q(text)}: expected a number followed by a unit, e.g. '30000 ft'")
    return _parse_number(m.group("num")), m.group("unit")


#: A flight level: "FL" and up to three digits (hundreds of feet of pressure altitude); one
#: space after "FL" is allowed.
_FLIGHT_LEVEL_RE = re.compile(r"^FL ?(?P<level>\d{1,3})$", re.IGNORECASE)


def is_flight_level(text) -> bool:
    """True for text that starts like a flight level ("FL..."), well formed or not."""
    return isinstance(text, str) and text.strip()[:2].upper() == "FL"


def flight_level_ft(text: str, field: str = "") -> int:
    """``"FL350"`` -> 35000: a flight level is pressure altitude in hundreds of feet.
    Raises :class:`UnitError` for malformed levels ("FL", "FL-10", "FL35.5", "FL 3 50")."""
    m = _FLIGHT_LEVEL_RE.match(text.strip()) if len(text) <= MAX_QUANTITY_CHARS else None
    if m is None:
        raise UnitError(field, f"cannot read flight level {_q(text)}: expected 'FL' followed by a "
                               f"whole number of hundreds of feet (up to three digits), e.g. "
                               f"'FL350' for 35,000 ft")
    return int(m.group("level")) * 100


def parse_flight_level(text: str, field: str = "") -> float:
    """``"FL350"`` -> 10668 m (35,000 ft, 1 ft = 0.3048 m), exactly as ``"35000 ft"`` is read;
    see :func:`flight_level_ft`."""
    return flight_level_ft(text, field) * _factor("ft", "length")


def parse_altitude(text, field: str = "") -> tuple[float, str, str | None]:
    """Read an altitude: a length (``"35,000 ft"``) or a flight level (``"FL350"``).

    Returns ``(metres, unit text, flight level as written or None)``; a flight level's unit is
    ``"ft"``.
    """
    if is_flight_level(text):
        return parse_flight_level(text, field), "ft", text.strip()
    value, unit = parse_quantity_with_unit(text, "length", field)
    return value, unit, None


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
        is needed, a number larger than :data:`MAX_MAGNITUDE`, or a value that is NaN or
        infinite before or after conversion.
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
            raise UnitError(field, f"missing unit in {_q(text)}; write it as a string with a unit, "
                                   f"e.g. '{dim.example}'")
        check_number(text, field)
        return float(text), ""
    if not isinstance(text, str):
        kind = {list: "an array", dict: "a table"}.get(type(text), type(text).__name__)
        raise UnitError(field, f"expected {_describe(dim)} as a string, got {kind} {_q(text)}")
    try:
        number, unit_text = split_quantity(text, field)
    except UnitError:
        if dim.name != "dimensionless":
            raise
        raise UnitError(field, f"cannot read {_q(text)}: expected {_describe(dim)}") from None
    check_number(number, field, text)
    factor = unit_factor(unit_text, expected_dimension, field, whole=text)
    value = number * factor
    check_number(value, field, text, converted=True)
    return value, unit_text


def check_number(value, field: str, shown=None, converted: bool = False) -> None:
    """Raise :class:`UnitError` unless ``value`` is finite and, as written (``converted``
    False), at most :data:`MAX_MAGNITUDE` in size. ``value`` may be an int of any size."""
    shown = value if shown is None else shown
    if isinstance(value, int) and not isinstance(value, bool):
        too_large = abs(value) > MAX_MAGNITUDE
    elif not math.isfinite(value):
        after = " after unit conversion" if converted else ""
        raise UnitError(field, f"{_q(shown)} is not a finite number{after}")
    else:
        too_large = not converted and abs(value) > MAX_MAGNITUDE
    if too_large:
        raise UnitError(field, f"{_q(shown)} is too large; expected a number within +-1e15")


@functools.lru_cache(maxsize=1024)
def _factor(unit_text: str, expected_dimension: str) -> float:
    dim = DIMENSIONS[expected_dimension]
    unit = _resolve(unit_text)
    return float(registry().Quantity(1.0, unit).to(dim.si).magnitude)


def unit_factor(unit_text: str, expected_dimension: str, field: str = "", whole: str | None = None) -> float:
    """SI value of one ``unit_text`` (e.g. ``unit_factor("kft", "length") == 304.8``); 1.0
    exactly for the SI unit itself and for an empty unit (dimensionless)."""
    parse_unit(unit_text, expected_dimension, field, whole=whole)  # validates, with messages
    text = unit_text.strip()
    if not text:
        return 1.0
    return _factor(text, expected_dimension)


# --------------------------------------------------------------------------------------------
# Output conversions (SI <-> the units people read). Factors come from pint's definitions.


def convert(value, from_unit: str, to_unit: str):
    """Convert a float or numpy array between two compatible units (multiplicative units only)."""
    factor = registry().Quantity(1.0, from_unit).to(to_unit).magnitude
    return value * factor


@functools.lru_cache(maxsize=256)
def _si_factor(unit: str) -> float:
    """SI value of one ``unit`` (pint's base units in its default MKS system are SI). For unit
    texts written by the program or already validated by :func:`parse_unit`."""
    q = registry().Quantity(1.0, unit)
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


#: International foot [m], knot [m/s], pound [kg], nautical mile [m] and pound-force [N], exact by
#: definition (International Yard and Pound Agreement, 1959; International Hydrographic
#: Conference, 1929; g0 = 9.80665 m/s^2, 3rd CGPM 1901), the same values pint defines.
FOOT_M = 0.3048
_FT_M = FOOT_M
_KT_M_S = 1852.0 / 3600.0
_LB_KG = 0.45359237
_NMI_M = 1852.0
_LBF_N = 0.45359237 * 9.80665


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
