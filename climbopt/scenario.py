"""Scenario: the one input of a climbopt run, read from a TOML file with units at the edge.

Everything here is SI: metres, seconds, kilograms, newtons, watts, pascals, kelvin, radians.
Units are parsed once (see :mod:`climbopt.units`) and never travel further.

Table conventions (shared by the model and both solvers):

* 1-D tables are functions of Mach: ``mach`` (strictly increasing) and ``values`` of equal length.
* 2-D engine tables have rows over Mach and columns over pressure altitude:
  ``values[i][j]`` is at ``mach[i]``, ``altitude_m[j]``.
"""

from __future__ import annotations

import contextvars
import difflib
import math
import os
import re
import tomllib
from dataclasses import dataclass, field
from typing import Literal

from climbopt.airspeed import cas_from_tas, eas_from_tas, tas_from_speed
from climbopt.atmosphere import G0, energy_height_m, standard_atmosphere
from climbopt.units import DIMENSIONS, UnitError, from_si, parse_quantity_with_unit, unit_factor


class ScenarioError(ValueError):
    """A scenario file is wrong. Carries every problem found, each naming file, field and reason.

    Attributes
    ----------
    path : str
        The scenario file.
    problems : list[tuple[str, str]]
        ``(field, message)`` pairs; ``field`` is the dotted TOML path, e.g. ``aircraft.mass``.
    """

    def __init__(self, path: str, problems: list[tuple[str, str]]):
        self.path = str(path)
        self.problems = list(problems)
        lines = [f"{self.path}: {fld}: {msg}" for fld, msg in self.problems]
        super().__init__("\n".join(lines) if lines else f"{self.path}: invalid scenario")


@dataclass(frozen=True)
class Table1D:
    """A quantity tabulated against Mach number."""

    mach: tuple[float, ...]
    values: tuple[float, ...]


@dataclass(frozen=True)
class Table2D:
    """A quantity tabulated against Mach (rows) and pressure altitude [m] (columns)."""

    mach: tuple[float, ...]
    altitude_m: tuple[float, ...]
    values: tuple[tuple[float, ...], ...]


@dataclass(frozen=True)
class DragPolar:
    """Drag polar.

    ``kind == "parabolic"``: CD = CD0(M) + k(M) CL^2 with ``cd0`` and ``k`` tables.
    ``kind == "table"``: CD(CL, M) from ``cd_table`` whose rows are Mach (``cd_mach``) and columns
    lift coefficient (``cd_cl``).
    ``lift_slope_per_rad`` (optional) is CL_alpha(M) [1/rad], needed when thrust acts along the
    body axis (angle of attack = CL / CL_alpha).
    """

    kind: Literal["parabolic", "table"]
    cd0: Table1D | None = None
    k: Table1D | None = None
    cd_mach: tuple[float, ...] | None = None
    cd_cl: tuple[float, ...] | None = None
    cd_table: tuple[tuple[float, ...], ...] | None = None
    lift_slope_per_rad: Table1D | None = None


@dataclass(frozen=True)
class AircraftData:
    """Airframe: reference area [m^2], start mass [kg], drag polar, CLmax(M)."""

    name: str
    reference_area_m2: float
    mass_kg: float
    drag: DragPolar
    cl_max: Table1D
    fuel_capacity_kg: float | None = None


@dataclass(frozen=True)
class Rating:
    """One engine rating (e.g. "max", "climb").

    Jet (``kind == "jet"``): ``thrust_n`` table [N] (all engines together).
    Propeller (``kind == "propeller"``): ``shaft_power_w`` table [W] and ``propeller_efficiency``
    (1-D over Mach, dimensionless); thrust = efficiency * power / TAS.
    Fuel flow at full throttle: exactly one of ``fuel_flow_kg_s`` (table [kg/s], same grid as the
    thrust or power table), ``tsfc_kg_per_n_s`` (jet, constant thrust-specific fuel consumption
    [kg/(N s)]) or ``psfc_kg_per_w_s`` (propeller, constant power-specific fuel consumption
    [kg/(W s)]). At part throttle fuel flow scales with throttle (constant specific consumption
    at a given altitude and Mach; common practice, no source).
    """

    name: str
    kind: Literal["jet", "propeller"]
    thrust_n: Table2D | None = None
    shaft_power_w: Table2D | None = None
    propeller_efficiency: Table1D | None = None
    fuel_flow_kg_s: Table2D | None = None
    tsfc_kg_per_n_s: float | None = None
    psfc_kg_per_w_s: float | None = None


@dataclass(frozen=True)
class Propulsion:
    """Engine ratings, the throttle range (fractions of the rating) and thrust alignment.

    ``thrust_alignment``: "path" (thrust along the velocity vector) or "body" (along the body
    axis, at the angle of attack to the velocity). ``thrust_scale`` multiplies thrust and fuel
    flow of every rating (for trade studies).
    """

    ratings: dict[str, Rating]
    default_rating: str
    throttle_min: float = 0.0
    throttle_max: float = 1.0
    thrust_alignment: Literal["path", "body"] = "path"
    thrust_scale: float = 1.0


@dataclass(frozen=True)
class AtmosphereSpec:
    """Standard atmosphere (US 1976) with a temperature offset [K] (ISA + dT)."""

    temperature_offset_k: float = 0.0


@dataclass(frozen=True)
class FlightPoint:
    """A start or target state. The speed as the user gave it (``speed_kind`` one of "mach",
    "tas", "cas", "eas"; ``speed_value`` in m/s, or dimensionless for Mach) and resolved to true
    airspeed ``tas_m_s`` in the scenario's atmosphere."""

    altitude_m: float
    speed_kind: Literal["mach", "tas", "cas", "eas"]
    speed_value: float
    tas_m_s: float
    flight_path_angle_rad: float = 0.0


@dataclass(frozen=True)
class Mission:
    """Climb from ``start`` to ``target``; optional dash to a ground distance [m] from the start,
    flown at the target state after the climb."""

    start: FlightPoint
    target: FlightPoint
    dash_distance_m: float | None = None
    rating: str | None = None
    profile: str = "free"
    acceleration_share: float = 0.5


@dataclass(frozen=True)
class ScheduleSpec:
    """A named climb schedule to fly: ``cas_below_restriction_m_s`` below the CAS restriction's
    altitude (None: no restriction segment), then ``cas_m_s``, then ``mach`` above the crossover
    (None: CAS all the way). ``acceleration_share``: fraction of the specific excess power given
    to speed while changing speed between segments (1 = level acceleration)."""

    name: str
    cas_m_s: float
    mach: float | None = None
    cas_below_restriction_m_s: float | None = None
    acceleration_share: float = 0.5


@dataclass(frozen=True)
class Limits:
    """Flight envelope limits. ``None`` means no limit.

    ``cas_restriction``: ``(max_cas_m_s, below_altitude_m)``, e.g. 250 kt below 10,000 ft.
    """

    max_dynamic_pressure_pa: float | None = None
    max_mach: float | None = None
    max_cas_m_s: float | None = None
    min_altitude_m: float = 0.0
    max_altitude_m: float | None = None
    max_load_factor: float = 3.0
    cas_restriction: tuple[float, float] | None = None


@dataclass(frozen=True)
class SolverOptions:
    """Numerical options for both solvers.

    Energy-state grid: ``grid_altitude_points`` x ``grid_speed_points``.
    Collocation: ``intervals`` (initial mesh), ``transcription`` ("hermite-simpson"),
    ``mesh_tolerance`` (relative objective change to stop refining), ``max_mesh_refinements``,
    ``cost_weight_kg_per_s`` (weighted objective fuel + w * time), ``ipopt`` options passed
    straight to IPOPT.
    """

    grid_altitude_points: int = 300
    grid_speed_points: int = 300
    intervals: int = 100
    transcription: Literal["hermite-simpson"] = "hermite-simpson"
    mesh_tolerance: float = 1e-4
    max_mesh_refinements: int = 3
    cost_weight_kg_per_s: float = 0.0
    ipopt: dict = field(default_factory=dict)


@dataclass(frozen=True)
class Scenario:
    """A whole scenario in SI. ``display_units`` maps dotted field names to the unit string the
    file used (for printing back in the user's units)."""

    name: str
    description: str
    source_path: str
    aircraft: AircraftData
    propulsion: Propulsion
    atmosphere: AtmosphereSpec
    mission: Mission
    limits: Limits
    solver: SolverOptions
    display_units: dict[str, str] = field(default_factory=dict)
    schedules: tuple[ScheduleSpec, ...] = ()


# ============================================================================================
# Reading and validating a scenario file.
#
# Design: one pass over the TOML document with a `_Reader` that records every problem as a
# (dotted field, message) pair and carries on with `None` for the broken value, so that a
# single run reports all problems. Cross-field checks run only on values that parsed.
# ============================================================================================

#: Keys of each section; used for unknown-key errors and "did you mean" suggestions.
_TOP_KEYS = ("scenario", "aircraft", "propulsion", "atmosphere", "mission", "limits", "solver")
_SCENARIO_KEYS = ("name", "description")
_AIRCRAFT_KEYS = ("name", "reference_area", "mass", "fuel_capacity", "drag", "cl_max")
_DRAG_KEYS = ("model", "mach", "cd0", "k", "cl", "cd", "lift_slope")
_TABLE1D_KEYS = ("mach", "unit", "values")
_PROPULSION_KEYS = ("default_rating", "throttle_min", "throttle_max", "thrust_alignment",
                    "thrust_scale", "ratings")
_RATING_KEYS = ("kind", "mach", "altitude", "thrust", "shaft_power", "propeller_efficiency",
                "fuel_flow", "tsfc", "specific_impulse", "psfc")
_ATMOSPHERE_KEYS = ("temperature_offset",)
_MISSION_KEYS = ("start", "target", "dash_distance", "rating")
_POINT_KEYS = ("altitude", "mach", "tas", "cas", "eas", "flight_path_angle")
_SPEED_KINDS = ("mach", "tas", "cas", "eas")
_LIMITS_KEYS = ("max_dynamic_pressure", "max_mach", "max_cas", "min_altitude", "max_altitude",
                "max_load_factor", "cas_restriction")
_CAS_RESTRICTION_KEYS = ("cas", "below")
_SOLVER_KEYS = ("grid_altitude_points", "grid_speed_points", "intervals", "transcription",
                "mesh_tolerance", "max_mesh_refinements", "cost_weight", "ipopt")

#: Altitudes accepted anywhere in a scenario [m]: from -500 m (below sea level airfields) to 70 km,
#: the top of the smooth atmosphere both solvers use.
_ALTITUDE_RANGE_M = (-500.0, 70_000.0)

#: Relative slack when comparing the mission end points with limits and table edges.
_REL_TOL = 1e-9

#: At most this many bad elements of one array are listed individually.
_MAX_ELEMENT_PROBLEMS = 3


def _type_name(value) -> str:
    if isinstance(value, bool):
        return "boolean"
    if isinstance(value, int):
        return "integer"
    if isinstance(value, float):
        return "number"
    if isinstance(value, str):
        return "string"
    if isinstance(value, list):
        return "array"
    if isinstance(value, dict):
        return "table"
    return type(value).__name__


def _show(value) -> str:
    """Short rendering of a TOML value for messages."""
    text = repr(value) if isinstance(value, str) else str(value)
    if isinstance(value, bool):
        text = str(value).lower()
    return text if len(text) <= 60 else text[:57] + "..."


def _fmt(x: float) -> str:
    return f"{x:.6g}"


class _Reader:
    """Collects problems while reading one document; see the module comment above."""

    def __init__(self, path: str):
        self.path = path
        self.problems: list[tuple[str, str]] = []
        self.units: dict[str, str] = {}
        self.rating_names: list[str] | None = None  # names under [propulsion.ratings], once read

    def problem(self, fld: str, message: str) -> None:
        self.problems.append((fld, message))

    # ---- structure -------------------------------------------------------------------------

    def check_keys(self, node: dict, path: str, allowed: tuple[str, ...]) -> None:
        for key in node:
            if key not in allowed:
                close = difflib.get_close_matches(key, allowed, n=1, cutoff=0.6)
                hint = f" (did you mean '{close[0]}'?)" if close else ""
                self.problem(_join(path, key), f"unknown key '{key}'{hint}; known keys here: "
                                               f"{', '.join(allowed)}")

    def section(self, parent: dict, key: str, path: str, allowed: tuple[str, ...], *,
                required: bool = True) -> dict | None:
        fld = _join(path, key)
        if key not in parent:
            if required:
                self.problem(fld, f"missing section [{fld}]")
                return None
            return {}
        node = parent[key]
        if not isinstance(node, dict):
            self.problem(fld, f"expected a table [{fld}], got {_type_name(node)} {_show(node)}")
            return None
        self.check_keys(node, fld, allowed)
        return node

    # ---- scalars ---------------------------------------------------------------------------

    def quantity(self, node: dict, key: str, path: str, dim: str, *, required: bool = True,
                 default: float | None = None, minimum: float | None = None,
                 maximum: float | None = None, strict_min: bool = False,
                 expect: str = "") -> float | None:
        """Read a scalar with a unit (or a plain number for dim "dimensionless"); SI float."""
        fld = _join(path, key)
        if key not in node:
            if required:
                self.problem(fld, f"missing; expected {_expect(dim)}")
            return default
        raw = node[key]
        try:
            value, unit = parse_quantity_with_unit(raw, dim, fld)
        except UnitError as exc:
            self.problem(fld, exc.message)
            return None
        if unit:
            self.units[fld] = unit
        if not self._within(fld, value, raw, minimum, maximum, strict_min, expect):
            return None
        return value

    def _within(self, fld, value, raw, minimum, maximum, strict_min, expect) -> bool:
        bad = False
        if minimum is not None and (value <= minimum if strict_min else value < minimum):
            bad = True
        if maximum is not None and value > maximum:
            bad = True
        if bad:
            self.problem(fld, f"got {_show(raw)}; expected {expect or _range_words(minimum, maximum, strict_min)}")
        return not bad

    def integer(self, node: dict, key: str, path: str, *, default: int, minimum: int,
                maximum: int) -> int:
        fld = _join(path, key)
        if key not in node:
            return default
        raw = node[key]
        if isinstance(raw, bool) or not isinstance(raw, int):
            self.problem(fld, f"expected a whole number from {minimum} to {maximum}, got "
                              f"{_type_name(raw)} {_show(raw)}")
            return default
        if not minimum <= raw <= maximum:
            self.problem(fld, f"got {raw}; expected a whole number from {minimum} to {maximum}")
            return default
        return raw

    def string(self, node: dict, key: str, path: str, *, required: bool = True,
               default: str | None = None, choices: tuple[str, ...] | None = None) -> str | None:
        fld = _join(path, key)
        if key not in node:
            if required:
                what = f"one of {', '.join(repr(c) for c in choices)}" if choices else "a string"
                self.problem(fld, f"missing; expected {what}")
            return default
        raw = node[key]
        if not isinstance(raw, str):
            self.problem(fld, f"expected a string, got {_type_name(raw)} {_show(raw)}")
            return None
        if choices is not None and raw not in choices:
            close = difflib.get_close_matches(raw, choices, n=1, cutoff=0.5)
            hint = f" (did you mean '{close[0]}'?)" if close else ""
            self.problem(fld, f"got {raw!r}{hint}; expected one of {', '.join(repr(c) for c in choices)}")
            return None
        return raw

    # ---- arrays ----------------------------------------------------------------------------

    def array(self, node: dict, key: str, path: str, dim: str, *, required: bool = True,
              ndim: int = 1) -> list | None:
        """Read a 1-D (or 2-D) array with units; return nested lists of SI floats or None.

        Accepted forms: ``{ unit = "kft", values = [...] }``; a list of strings with units
        (``["0 ft", "5000 ft"]``); for dimensionless data a plain list of numbers.
        """
        fld = _join(path, key)
        if key not in node:
            if required:
                self.problem(fld, f"missing; expected {_array_expect(dim, ndim)}")
            return None
        return self.array_value(node[key], fld, dim, ndim=ndim)

    def array_value(self, raw, fld: str, dim: str, *, ndim: int = 1) -> list | None:
        factor = None
        if isinstance(raw, dict):
            extra = [k for k in raw if k not in ("unit", "values")]
            if extra:
                self.check_keys(raw, fld, ("unit", "values"))
                return None
            if "values" not in raw:
                self.problem(_join(fld, "values"), f"missing; expected {_array_expect(dim, ndim)}")
                return None
            unit_raw = raw.get("unit", "")
            if "unit" not in raw and dim != "dimensionless":
                self.problem(_join(fld, "unit"), f"missing; expected the unit of {_expect(dim)}")
                return None
            try:
                factor = unit_factor(unit_raw, dim, _join(fld, "unit"))
            except UnitError as exc:
                self.problem(exc.field, exc.message)
                return None
            if isinstance(unit_raw, str) and unit_raw.strip():
                self.units[fld] = unit_raw.strip()
            raw = raw["values"]
        if not isinstance(raw, list):
            self.problem(fld, f"expected {_array_expect(dim, ndim)}, got {_type_name(raw)} {_show(raw)}")
            return None
        bad: list[str] = []
        nbad = 0
        out: list = []
        if ndim == 2:
            for i, row in enumerate(raw):
                if not isinstance(row, list):
                    self.problem(f"{fld}[{i}]", f"expected a row (an array of numbers), got "
                                                f"{_type_name(row)} {_show(row)}")
                    return None
                vals = []
                for j, elem in enumerate(row):
                    v = self._element(elem, f"{fld}[{i}][{j}]", dim, factor, bad)
                    nbad += v is None
                    vals.append(v)
                out.append(vals)
        else:
            for i, elem in enumerate(raw):
                v = self._element(elem, f"{fld}[{i}]", dim, factor, bad)
                nbad += v is None
                out.append(v)
        if nbad:
            for msg in bad[:_MAX_ELEMENT_PROBLEMS]:
                self.problems.append(tuple(msg))  # type: ignore[arg-type]
            if nbad > _MAX_ELEMENT_PROBLEMS:
                self.problem(fld, f"... and {nbad - _MAX_ELEMENT_PROBLEMS} more bad values")
            return None
        return out

    def _element(self, elem, fld: str, dim: str, factor: float | None, bad: list):
        if factor is not None:  # numbers in the given unit
            if isinstance(elem, bool) or not isinstance(elem, (int, float)):
                bad.append((fld, f"expected a number (the unit is given once for the array), got "
                                 f"{_type_name(elem)} {_show(elem)}"))
                return None
            if not math.isfinite(float(elem)):
                bad.append((fld, f"{_show(elem)} is not a finite number"))
                return None
            return float(elem) * factor
        try:
            value, unit = parse_quantity_with_unit(elem, dim, fld)
        except UnitError as exc:
            msg = exc.message
            if isinstance(elem, (int, float)) and not isinstance(elem, bool) and dim != "dimensionless":
                msg += " (or give the unit once: { unit = \"...\", values = [...] })"
            bad.append((fld, msg))
            return None
        base = fld.split("[", 1)[0]
        if unit and base not in self.units:
            self.units[base] = unit
        return value

    # ---- tables ----------------------------------------------------------------------------

    def grid(self, node: dict, key: str, path: str, dim: str, *, minimum: float | None = None,
             required: bool = True) -> list[float] | None:
        """A table axis: at least two values, strictly increasing, optionally >= minimum."""
        fld = _join(path, key)
        vals = self.array(node, key, path, dim, required=required)
        if vals is None:
            return None
        return vals if self.check_grid(vals, fld, minimum=minimum) else None

    def check_grid(self, vals: list[float], fld: str, *, minimum: float | None = None) -> bool:
        unit = self.units.get(fld, "")
        if len(vals) < 2:
            self.problem(fld, f"has {len(vals)} value(s); a table axis needs at least 2, strictly increasing")
            return False
        ok = True
        for i in range(1, len(vals)):
            if vals[i] == vals[i - 1]:
                self.problem(fld, f"duplicate value {_in_unit(vals[i], unit)} at positions {i - 1} and {i}; "
                                  f"expected strictly increasing values")
                ok = False
                break
            if vals[i] < vals[i - 1]:
                self.problem(fld, f"not increasing: {_in_unit(vals[i], unit)} at position {i} follows "
                                  f"{_in_unit(vals[i - 1], unit)}; expected strictly increasing values")
                ok = False
                break
        if minimum is not None and vals[0] < minimum:
            self.problem(fld, f"first value {_in_unit(vals[0], unit)} is below {_fmt(minimum)}; "
                              f"expected values >= {_fmt(minimum)}")
            ok = False
        return ok

    def check_values(self, vals, fld: str, *, minimum: float | None = None, maximum: float | None = None,
                     strict_min: bool = False, what: str = "") -> bool:
        """Check every element of a 1-D or 2-D array lies in range; one problem per array."""
        flat: list[tuple[str, float]] = []
        if vals and isinstance(vals[0], list):
            for i, row in enumerate(vals):
                for j, v in enumerate(row):
                    flat.append((f"[{i}][{j}]", v))
        else:
            flat = [(f"[{i}]", v) for i, v in enumerate(vals)]
        unit = self.units.get(fld, "")
        for pos, v in flat:
            low = minimum is not None and (v <= minimum if strict_min else v < minimum)
            high = maximum is not None and v > maximum
            if low or high:
                nbad = sum(1 for _, w in flat
                           if (minimum is not None and (w <= minimum if strict_min else w < minimum))
                           or (maximum is not None and w > maximum))
                more = f" ({nbad} values out of range)" if nbad > 1 else ""
                self.problem(f"{fld}{pos}", f"got {_in_unit(v, unit)}{more}; expected "
                                            f"{what or _range_words(minimum, maximum, strict_min)}")
                return False
        return True

    def table1d(self, node: dict, key: str, path: str, dim: str, *, default_mach: list[float] | None,
                required: bool = True, minimum: float | None = None, maximum: float | None = None,
                strict_min: bool = False, what: str = "") -> Table1D | None:
        """A quantity vs Mach: a constant (expanded onto ``default_mach``) or a table
        ``{ mach = [...], values = [...] }`` (plus ``unit = "..."`` for dimensional values)."""
        fld = _join(path, key)
        if key not in node:
            if required:
                self.problem(fld, "missing; expected a constant or a table { mach = [...], values = [...] }")
            return None
        raw = node[key]
        if isinstance(raw, dict):
            self.check_keys(raw, fld, _TABLE1D_KEYS)
            if any(k not in _TABLE1D_KEYS for k in raw):
                return None
            mach = self.grid(raw, "mach", fld, "dimensionless", minimum=0.0)
            if "unit" in raw:
                values = self.array_value({"unit": raw["unit"], "values": raw.get("values")}, _join(fld, "values"),
                                          dim) if "values" in raw else None
                if "values" not in raw:
                    self.problem(_join(fld, "values"), "missing; expected an array of values, one per Mach")
            else:
                values = self.array(raw, "values", fld, dim)
            if mach is None or values is None:
                return None
            if len(values) != len(mach):
                self.problem(_join(fld, "values"), f"has {len(values)} values but {fld}.mach has {len(mach)}; "
                                                   f"expected one value per Mach")
                return None
            if _join(fld, "values") in self.units:
                self.units[fld] = self.units[_join(fld, "values")]
            if not self.check_values(values, _join(fld, "values"), minimum=minimum, maximum=maximum,
                                     strict_min=strict_min, what=what):
                return None
            return Table1D(tuple(mach), tuple(values))
        if isinstance(raw, list):
            self.problem(fld, "expected a constant or a table { mach = [...], values = [...] }, got a bare "
                              "array (which Mach numbers do the values belong to?)")
            return None
        value = self.quantity(node, key, path, dim, minimum=minimum, maximum=maximum,
                              strict_min=strict_min, expect=what)
        if value is None or default_mach is None:
            return None
        return Table1D(tuple(default_mach), tuple(value for _ in default_mach))


def _join(path: str, key: str) -> str:
    return f"{path}.{key}" if path else key


def _in_unit(value_si: float, unit: str) -> str:
    if not unit:
        return _fmt(value_si)
    try:
        return f"{_fmt(from_si(value_si, unit))} {unit}"
    except Exception:  # pragma: no cover - units were validated when read
        return _fmt(value_si)


def _expect(dim: str) -> str:
    d = DIMENSIONS[dim]
    if dim == "dimensionless":
        return "a number"
    return f"{d.name.replace('_', ' ')} with a unit, e.g. \"{d.example}\""


def _array_expect(dim: str, ndim: int) -> str:
    d = DIMENSIONS[dim]
    if dim == "dimensionless":
        return "an array of numbers" if ndim == 1 else "an array of rows of numbers"
    unit = d.example.split(" ", 1)[1]
    body = "[...]" if ndim == 1 else "[[...], [...]]"
    return f"{{ unit = \"{unit}\", values = {body} }}"


def _range_words(minimum, maximum, strict_min) -> str:
    if minimum is not None and maximum is not None:
        lo = ">" if strict_min else ">="
        return f"a value {lo} {_fmt(minimum)} and <= {_fmt(maximum)}"
    if minimum is not None:
        if minimum == 0:
            return "a positive value" if strict_min else "a value >= 0"
        return f"a value {'>' if strict_min else '>='} {_fmt(minimum)}"
    if maximum is not None:
        return f"a value <= {_fmt(maximum)}"
    return "a valid value"


# ---- sections -------------------------------------------------------------------------------


def _read_aircraft(r: _Reader, doc: dict) -> AircraftData | None:
    node = r.section(doc, "aircraft", "", _AIRCRAFT_KEYS)
    if node is None:
        return None
    name = r.string(node, "name", "aircraft")
    area = r.quantity(node, "reference_area", "aircraft", "area", minimum=0.0, strict_min=True)
    mass = r.quantity(node, "mass", "aircraft", "mass", minimum=0.0, strict_min=True)
    fuel = r.quantity(node, "fuel_capacity", "aircraft", "mass", required=False, minimum=0.0,
                      strict_min=True)
    if fuel is not None and mass is not None and fuel > mass:
        r.problem("aircraft.fuel_capacity", f"{_show(node['fuel_capacity'])} exceeds the start mass "
                                            f"{_show(node['mass'])}; expected at most the start mass")
    drag, drag_mach = _read_drag(r, node)
    cl_max = r.table1d(node, "cl_max", "aircraft", "dimensionless", default_mach=drag_mach,
                       minimum=0.0, maximum=5.0, strict_min=True,
                       what="a maximum lift coefficient > 0 and <= 5")
    if None in (name, area, mass, drag, cl_max):
        return None
    return AircraftData(name=name, reference_area_m2=area, mass_kg=mass, drag=drag, cl_max=cl_max,
                        fuel_capacity_kg=fuel)


def _read_drag(r: _Reader, aircraft: dict) -> tuple[DragPolar | None, list[float] | None]:
    path = "aircraft.drag"
    node = r.section(aircraft, "drag", "aircraft", _DRAG_KEYS)
    if node is None:
        return None, None
    model = r.string(node, "model", path, required=False, default="parabolic",
                     choices=("parabolic", "table"))
    mach = r.grid(node, "mach", path, "dimensionless", minimum=0.0)
    lift_slope = None
    if "lift_slope" in node:
        lift_slope = r.table1d(node, "lift_slope", path, "per_angle", default_mach=mach,
                               minimum=0.0, strict_min=True, what="a positive lift-curve slope")
        if lift_slope is None:
            return None, mach
    if model == "parabolic":
        for key in ("cl", "cd"):
            if key in node:
                r.problem(_join(path, key), "only used with model = \"table\"; the parabolic model takes "
                                            "cd0 and k")
        cd0 = _mach_column(r, node, "cd0", path, mach, what="a zero-lift drag coefficient > 0")
        k = _mach_column(r, node, "k", path, mach, what="an induced-drag factor > 0")
        if None in (mach, cd0, k):
            return None, mach
        return DragPolar(kind="parabolic", cd0=Table1D(tuple(mach), tuple(cd0)),
                         k=Table1D(tuple(mach), tuple(k)), lift_slope_per_rad=lift_slope), mach
    if model == "table":
        for key in ("cd0", "k"):
            if key in node:
                r.problem(_join(path, key), "only used with model = \"parabolic\"; the table model takes "
                                            "cl and cd")
        cl = r.grid(node, "cl", path, "dimensionless")
        cd = r.array(node, "cd", path, "dimensionless", ndim=2)
        if None in (mach, cl, cd):
            return None, mach
        if not _check_shape(r, cd, _join(path, "cd"), len(mach), len(cl), f"{path}.mach", f"{path}.cl"):
            return None, mach
        if not r.check_values(cd, _join(path, "cd"), minimum=0.0, strict_min=True,
                              what="a positive drag coefficient"):
            return None, mach
        return DragPolar(kind="table", cd_mach=tuple(mach), cd_cl=tuple(cl),
                         cd_table=tuple(tuple(row) for row in cd), lift_slope_per_rad=lift_slope), mach
    return None, mach


def _mach_column(r: _Reader, node: dict, key: str, path: str, mach: list[float] | None,
                 what: str) -> list[float] | None:
    """A dimensionless coefficient on the drag Mach grid: an array or one constant."""
    fld = _join(path, key)
    if key not in node:
        r.problem(fld, f"missing; expected {what}: an array with one value per Mach, or a constant")
        return None
    raw = node[key]
    if isinstance(raw, list) or isinstance(raw, dict):
        vals = r.array(node, key, path, "dimensionless")
    else:
        v = r.quantity(node, key, path, "dimensionless")
        if v is None or mach is None:
            return None
        vals = [v] * len(mach)
    if vals is None or mach is None:
        return None
    if len(vals) != len(mach):
        r.problem(fld, f"has {len(vals)} values but {path}.mach has {len(mach)}; expected one value per Mach")
        return None
    if not r.check_values(vals, fld, minimum=0.0, strict_min=True, what=what):
        return None
    return vals


def _check_shape(r: _Reader, table: list[list[float]], fld: str, nrows: int, ncols: int,
                 row_name: str, col_name: str) -> bool:
    if len(table) != nrows:
        r.problem(fld, f"has {len(table)} rows but {row_name} has {nrows} values; expected one row per "
                       f"{row_name.rsplit('.', 1)[-1]} value")
        return False
    for i, row in enumerate(table):
        if len(row) != ncols:
            r.problem(f"{fld}[{i}]", f"has {len(row)} values but {col_name} has {ncols}; expected one "
                                     f"value per {col_name.rsplit('.', 1)[-1]} value")
            return False
    return True


def _read_propulsion(r: _Reader, doc: dict) -> Propulsion | None:
    path = "propulsion"
    node = r.section(doc, "propulsion", "", _PROPULSION_KEYS)
    if node is None:
        return None
    tmin = r.quantity(node, "throttle_min", path, "dimensionless", required=False, default=0.0,
                      minimum=0.0, maximum=1.0, expect="a throttle fraction from 0 to 1")
    tmax = r.quantity(node, "throttle_max", path, "dimensionless", required=False, default=1.0,
                      minimum=0.0, maximum=1.0, strict_min=True,
                      expect="a throttle fraction > 0 and <= 1")
    if tmin is not None and tmax is not None and tmin > tmax:
        r.problem("propulsion.throttle_min", f"{_fmt(tmin)} is above throttle_max {_fmt(tmax)}; "
                                             f"expected throttle_min <= throttle_max")
    alignment = r.string(node, "thrust_alignment", path, required=False, default="path",
                         choices=("path", "body"))
    scale = r.quantity(node, "thrust_scale", path, "dimensionless", required=False, default=1.0,
                       minimum=0.0, strict_min=True, expect="a positive factor")
    ratings: dict[str, Rating] = {}
    ok = True
    rnode = node.get("ratings")
    if "ratings" not in node:
        r.problem("propulsion.ratings", "missing; expected at least one [propulsion.ratings.NAME] table")
        rnode = None
    elif not isinstance(rnode, dict):
        r.problem("propulsion.ratings", f"expected tables [propulsion.ratings.NAME], got "
                                        f"{_type_name(rnode)} {_show(rnode)}")
        rnode = None
    if rnode is not None:
        r.rating_names = list(rnode)
        if not rnode:
            r.problem("propulsion.ratings", "no ratings; expected at least one [propulsion.ratings.NAME] table")
            ok = False
        for name, raw in rnode.items():
            rating = _read_rating(r, name, raw)
            if rating is None:
                ok = False
            else:
                ratings[name] = rating
    else:
        ok = False
    default = r.string(node, "default_rating", path, required=False)
    if "default_rating" not in node:
        if rnode is not None and len(rnode) == 1:
            default = next(iter(rnode))
        elif rnode:
            r.problem("propulsion.default_rating", f"missing; expected one of the ratings "
                                                   f"{', '.join(repr(n) for n in rnode)}")
            default = None
    elif default is not None and rnode is not None and default not in rnode:
        _unknown_rating(r, "propulsion.default_rating", default, rnode)
        default = None
    if not ok or None in (tmin, tmax, alignment, scale, default) or (tmin > tmax):
        return None
    return Propulsion(ratings=ratings, default_rating=default, throttle_min=tmin, throttle_max=tmax,
                      thrust_alignment=alignment, thrust_scale=scale)


def _unknown_rating(r: _Reader, fld: str, name: str, ratings) -> None:
    close = difflib.get_close_matches(name, list(ratings), n=1, cutoff=0.5)
    hint = f" (did you mean '{close[0]}'?)" if close else ""
    r.problem(fld, f"unknown rating {name!r}{hint}; expected one of "
                   f"{', '.join(repr(n) for n in ratings)}")


def _read_rating(r: _Reader, name: str, raw) -> Rating | None:
    path = f"propulsion.ratings.{name}"
    if not isinstance(raw, dict):
        r.problem(path, f"expected a table [{path}], got {_type_name(raw)} {_show(raw)}")
        return None
    r.check_keys(raw, path, _RATING_KEYS)
    kind = r.string(raw, "kind", path, choices=("jet", "propeller"))
    mach = r.grid(raw, "mach", path, "dimensionless", minimum=0.0)
    alt = r.grid(raw, "altitude", path, "length")
    if alt is not None:
        lo, hi = _ALTITUDE_RANGE_M
        if alt[0] < lo or alt[-1] > hi:
            r.problem(_join(path, "altitude"),
                      f"spans {_in_unit(alt[0], r.units.get(path + '.altitude', 'm'))} to "
                      f"{_in_unit(alt[-1], r.units.get(path + '.altitude', 'm'))}; expected altitudes within "
                      f"the standard atmosphere, -500 m to 70 km")
            alt = None
    shape_ok = mach is not None and alt is not None

    def table2d(key: str, dim: str, what: str) -> Table2D | None:
        vals = r.array(raw, key, path, dim, ndim=2)
        if vals is None or not shape_ok:
            return None
        fld = _join(path, key)
        if not _check_shape(r, vals, fld, len(mach), len(alt), f"{path}.mach", f"{path}.altitude"):
            return None
        if not r.check_values(vals, fld, minimum=0.0, what=what):
            return None
        return Table2D(tuple(mach), tuple(alt), tuple(tuple(row) for row in vals))

    def forbid(keys: tuple[str, ...], why: str) -> None:
        for key in keys:
            if key in raw:
                r.problem(_join(path, key), why)

    fuel_keys = [k for k in ("fuel_flow", "tsfc", "specific_impulse", "psfc") if k in raw]
    thrust = power = eff = fuel_flow = None
    tsfc = psfc = None
    if kind == "jet":
        forbid(("shaft_power", "propeller_efficiency", "psfc"),
               "only used with kind = \"propeller\"; a jet rating takes thrust and fuel_flow, tsfc or "
               "specific_impulse")
        thrust = table2d("thrust", "force", "a thrust >= 0")
        allowed = ("fuel_flow", "tsfc", "specific_impulse")
        main_ok = thrust is not None
    elif kind == "propeller":
        forbid(("thrust", "tsfc", "specific_impulse"),
               "only used with kind = \"jet\"; a propeller rating takes shaft_power, "
               "propeller_efficiency and fuel_flow or psfc")
        power = table2d("shaft_power", "power", "a shaft power >= 0")
        eff = r.table1d(raw, "propeller_efficiency", path, "dimensionless", default_mach=mach,
                        minimum=0.0, maximum=1.0, strict_min=True,
                        what="a propeller efficiency > 0 and <= 1")
        allowed = ("fuel_flow", "psfc")
        main_ok = power is not None and eff is not None
    else:
        return None
    fuel_keys = [k for k in fuel_keys if k in allowed]
    fuel_ok = False
    if len(fuel_keys) != 1:
        r.problem(_join(path, "fuel_flow") if not fuel_keys else _join(path, fuel_keys[1]),
                  f"{'missing fuel data' if not fuel_keys else 'more than one fuel model given'}; "
                  f"expected exactly one of {', '.join(allowed)}")
    else:
        key = fuel_keys[0]
        if key == "fuel_flow":
            fuel_flow = table2d("fuel_flow", "mass_flow", "a fuel flow >= 0")
            fuel_ok = fuel_flow is not None
        elif key == "tsfc":
            tsfc = r.quantity(raw, "tsfc", path, "tsfc", minimum=0.0, strict_min=True,
                              expect="a positive thrust-specific fuel consumption, e.g. \"0.6 lb/lbf/h\"")
            fuel_ok = tsfc is not None
        elif key == "specific_impulse":
            isp = r.quantity(raw, "specific_impulse", path, "time", minimum=0.0, strict_min=True,
                             expect="a positive specific impulse, e.g. \"1600 s\"")
            if isp is not None:
                tsfc = 1.0 / (G0 * isp)  # Isp = T / (mdot g0)  (definition of specific impulse)
            fuel_ok = tsfc is not None
        else:
            psfc = r.quantity(raw, "psfc", path, "psfc", minimum=0.0, strict_min=True,
                              expect="a positive power-specific fuel consumption, e.g. \"0.5 lb/hp/h\"")
            fuel_ok = psfc is not None
    if not (main_ok and fuel_ok):
        return None
    return Rating(name=name, kind=kind, thrust_n=thrust, shaft_power_w=power, propeller_efficiency=eff,
                  fuel_flow_kg_s=fuel_flow, tsfc_kg_per_n_s=tsfc, psfc_kg_per_w_s=psfc)


def _read_atmosphere(r: _Reader, doc: dict) -> AtmosphereSpec | None:
    node = r.section(doc, "atmosphere", "", _ATMOSPHERE_KEYS, required=False)
    if node is None:
        return None
    dt = r.quantity(node, "temperature_offset", "atmosphere", "temperature_difference", required=False,
                    default=0.0, minimum=-80.0, maximum=80.0,
                    expect="an offset from the standard temperature between -80 K and +80 K")
    return None if dt is None else AtmosphereSpec(temperature_offset_k=dt)


def _read_point(r: _Reader, mission: dict, key: str, dt_k: float | None) -> FlightPoint | None:
    path = f"mission.{key}"
    node = r.section(mission, key, "mission", _POINT_KEYS)
    if node is None:
        return None
    lo, hi = _ALTITUDE_RANGE_M
    alt = r.quantity(node, "altitude", path, "length", minimum=lo, maximum=hi,
                     expect="an altitude from -500 m to 70 km")
    given = [k for k in _SPEED_KINDS if k in node]
    fpa = r.quantity(node, "flight_path_angle", path, "angle", required=False, default=0.0,
                     minimum=-math.pi / 2, maximum=math.pi / 2, strict_min=True,
                     expect="an angle between -90 deg and +90 deg")
    if len(given) != 1:
        r.problem(_join(path, "mach") if not given else _join(path, given[1]),
                  ("missing speed" if not given else f"speed given {len(given)} times ({', '.join(given)})")
                  + "; expected exactly one of mach, tas, cas, eas")
        return None
    kind = given[0]
    if kind == "mach":
        speed = r.quantity(node, "mach", path, "dimensionless", minimum=0.0, maximum=10.0, strict_min=True,
                           expect="a Mach number > 0 and <= 10")
    else:
        speed = r.quantity(node, kind, path, "speed", minimum=0.0, maximum=5000.0, strict_min=True,
                           expect="a positive airspeed, e.g. \"250 kt\"")
    if None in (alt, speed, fpa, dt_k):
        return None
    try:
        tas = float(tas_from_speed(kind, speed, alt, dt_k))
    except Exception as exc:  # the conversion has no meaning for this input (e.g. CAS too high)
        r.problem(_join(path, kind), f"cannot convert {_show(node[kind])} to true airspeed at "
                                     f"{_show(node['altitude'])}: {exc}")
        return None
    if not math.isfinite(tas) or tas <= 0:
        r.problem(_join(path, kind), f"{_show(node[kind])} at {_show(node['altitude'])} gives no valid "
                                     f"true airspeed; expected a speed the standard atmosphere supports")
        return None
    return FlightPoint(altitude_m=alt, speed_kind=kind, speed_value=speed, tas_m_s=tas,
                       flight_path_angle_rad=fpa)


def _read_mission(r: _Reader, doc: dict, dt_k: float | None) -> Mission | None:
    node = r.section(doc, "mission", "", _MISSION_KEYS)
    if node is None:
        return None
    start = _read_point(r, node, "start", dt_k)
    target = _read_point(r, node, "target", dt_k)
    dash = r.quantity(node, "dash_distance", "mission", "length", required=False, minimum=0.0,
                      strict_min=True, expect="a positive ground distance, e.g. \"150 nmi\"")
    bad_dash = "dash_distance" in node and dash is None
    rating = r.string(node, "rating", "mission", required=False)
    if rating is not None and r.rating_names is not None and rating not in r.rating_names:
        _unknown_rating(r, "mission.rating", rating, r.rating_names)
        rating = None
    if None in (start, target) or bad_dash or ("rating" in node and rating is None):
        return None
    return Mission(start=start, target=target, dash_distance_m=dash, rating=rating)


def _read_limits(r: _Reader, doc: dict) -> Limits | None:
    path = "limits"
    node = r.section(doc, "limits", "", _LIMITS_KEYS, required=False)
    if node is None:
        return None
    lo, hi = _ALTITUDE_RANGE_M
    n_before = len(r.problems)
    q = r.quantity(node, "max_dynamic_pressure", path, "pressure", required=False, minimum=0.0,
                   strict_min=True)
    mach = r.quantity(node, "max_mach", path, "dimensionless", required=False, minimum=0.0,
                      strict_min=True, maximum=10.0, expect="a Mach number > 0 and <= 10")
    cas = r.quantity(node, "max_cas", path, "speed", required=False, minimum=0.0, strict_min=True)
    hmin = r.quantity(node, "min_altitude", path, "length", required=False, default=0.0, minimum=lo,
                      maximum=hi, expect="an altitude from -500 m to 70 km")
    hmax = r.quantity(node, "max_altitude", path, "length", required=False, minimum=lo, maximum=hi,
                      expect="an altitude from -500 m to 70 km")
    nmax = r.quantity(node, "max_load_factor", path, "dimensionless", required=False, default=3.0,
                      minimum=1.0, maximum=15.0, expect="a load factor >= 1 and <= 15")
    if hmin is not None and hmax is not None and hmax <= hmin:
        r.problem("limits.max_altitude", f"{_show(node['max_altitude'])} is not above min_altitude "
                                         f"{_show(node.get('min_altitude', '0 m'))}; expected max_altitude > "
                                         f"min_altitude")
    restriction = None
    if "cas_restriction" in node:
        sub = r.section(node, "cas_restriction", path, _CAS_RESTRICTION_KEYS)
        if sub is not None:
            rc = r.quantity(sub, "cas", "limits.cas_restriction", "speed", minimum=0.0, strict_min=True)
            rb = r.quantity(sub, "below", "limits.cas_restriction", "length", minimum=lo, maximum=hi,
                            expect="an altitude from -500 m to 70 km")
            if rc is not None and rb is not None:
                restriction = (rc, rb)
    if len(r.problems) != n_before:
        return None
    return Limits(max_dynamic_pressure_pa=q, max_mach=mach, max_cas_m_s=cas, min_altitude_m=hmin,
                  max_altitude_m=hmax, max_load_factor=nmax, cas_restriction=restriction)


def _read_solver(r: _Reader, doc: dict) -> SolverOptions | None:
    path = "solver"
    node = r.section(doc, "solver", "", _SOLVER_KEYS, required=False)
    if node is None:
        return None
    n_before = len(r.problems)
    defaults = SolverOptions()
    gh = r.integer(node, "grid_altitude_points", path, default=defaults.grid_altitude_points,
                   minimum=10, maximum=2000)
    gv = r.integer(node, "grid_speed_points", path, default=defaults.grid_speed_points, minimum=10,
                   maximum=2000)
    intervals = r.integer(node, "intervals", path, default=defaults.intervals, minimum=4, maximum=5000)
    transcription = r.string(node, "transcription", path, required=False, default=defaults.transcription,
                             choices=("hermite-simpson",))
    tol = r.quantity(node, "mesh_tolerance", path, "dimensionless", required=False,
                     default=defaults.mesh_tolerance, minimum=0.0, maximum=1.0, strict_min=True,
                     expect="a relative tolerance > 0 and <= 1")
    refinements = r.integer(node, "max_mesh_refinements", path, default=defaults.max_mesh_refinements,
                            minimum=0, maximum=20)
    weight = r.quantity(node, "cost_weight", path, "mass_flow", required=False,
                        default=defaults.cost_weight_kg_per_s, minimum=0.0,
                        expect="a fuel-per-time weight >= 0, e.g. \"0.5 kg/s\"")
    ipopt: dict = {}
    if "ipopt" in node:
        sub = node["ipopt"]
        if not isinstance(sub, dict):
            r.problem("solver.ipopt", f"expected a table [solver.ipopt] of IPOPT options, got "
                                      f"{_type_name(sub)} {_show(sub)}")
        else:
            for key, value in sub.items():
                if isinstance(value, bool) or not isinstance(value, (int, float, str)):
                    r.problem(f"solver.ipopt.{key}", f"got {_type_name(value)} {_show(value)}; expected "
                                                     f"a number or a string (IPOPT option values)")
                elif isinstance(value, float) and not math.isfinite(value):
                    r.problem(f"solver.ipopt.{key}", f"{_show(value)} is not a finite number")
                else:
                    ipopt[key] = value
    if len(r.problems) != n_before:
        return None
    return SolverOptions(grid_altitude_points=gh, grid_speed_points=gv, intervals=intervals,
                         transcription=transcription, mesh_tolerance=tol, max_mesh_refinements=refinements,
                         cost_weight_kg_per_s=weight, ipopt=ipopt)


# ---- cross-field checks ---------------------------------------------------------------------


def _cross_checks(r: _Reader, aircraft: AircraftData | None, propulsion: Propulsion | None,
                  mission: Mission | None, limits: Limits | None, dt_k: float | None) -> None:
    if propulsion is not None and propulsion.thrust_alignment == "body" and aircraft is not None \
            and aircraft.drag.lift_slope_per_rad is None:
        r.problem("aircraft.drag.lift_slope", "missing; thrust_alignment = \"body\" needs the lift-curve "
                                              "slope to find the angle of attack")
    if mission is None:
        return
    he0 = energy_height_m(mission.start.altitude_m, mission.start.tas_m_s)
    he1 = energy_height_m(mission.target.altitude_m, mission.target.tas_m_s)
    if he1 < he0 * (1 - _REL_TOL) - 1e-6:
        unit = r.units.get("mission.target.altitude", "m")
        r.problem("mission.target", f"energy height h + V^2/(2 g0) is {_in_unit(he1, unit)}, below the start's "
                                    f"{_in_unit(he0, unit)}; expected a target at or above the start energy "
                                    f"(this program optimises climbs)")
    for key, point in (("start", mission.start), ("target", mission.target)):
        _check_point_limits(r, key, point, limits, dt_k)
        _check_point_tables(r, key, point, aircraft, propulsion, mission, dt_k)


def _point_state(point: FlightPoint, dt_k: float):
    atm = standard_atmosphere(point.altitude_m, dt_k)
    a = float(atm.speed_of_sound_m_s)
    rho = float(atm.density_kg_m3)
    mach = point.tas_m_s / a
    q = 0.5 * rho * point.tas_m_s**2
    cas = float(cas_from_tas(point.tas_m_s, point.altitude_m, dt_k))
    return mach, q, cas, rho


def _check_point_limits(r: _Reader, key: str, point: FlightPoint, limits: Limits | None,
                        dt_k: float | None) -> None:
    if limits is None or dt_k is None:
        return
    fld = f"mission.{key}"
    mach, q, cas, _ = _point_state(point, dt_k)
    u_alt = r.units.get(f"{fld}.altitude", "m")
    tol = 1 + _REL_TOL
    if point.altitude_m < limits.min_altitude_m - 1e-6:
        r.problem(f"{fld}.altitude", f"{_in_unit(point.altitude_m, u_alt)} is below limits.min_altitude "
                                     f"{_in_unit(limits.min_altitude_m, u_alt)}; expected a point inside the limits")
    if limits.max_altitude_m is not None and point.altitude_m > limits.max_altitude_m + 1e-6:
        r.problem(f"{fld}.altitude", f"{_in_unit(point.altitude_m, u_alt)} is above limits.max_altitude "
                                     f"{_in_unit(limits.max_altitude_m, u_alt)}; expected a point inside the limits")
    speed_fld = f"{fld}.{point.speed_kind}"
    if limits.max_mach is not None and mach > limits.max_mach * tol:
        r.problem(speed_fld, f"Mach {mach:.3f} exceeds limits.max_mach {_fmt(limits.max_mach)}")
    u_cas = r.units.get("limits.max_cas", r.units.get(speed_fld) or "kt")
    if limits.max_cas_m_s is not None and cas > limits.max_cas_m_s * tol:
        r.problem(speed_fld, f"calibrated airspeed {_in_unit(cas, u_cas)} exceeds limits.max_cas "
                             f"{_in_unit(limits.max_cas_m_s, u_cas)}")
    if limits.max_dynamic_pressure_pa is not None and q > limits.max_dynamic_pressure_pa * tol:
        u_q = r.units.get("limits.max_dynamic_pressure", "kPa")
        r.problem(speed_fld, f"dynamic pressure {_in_unit(q, u_q)} exceeds limits.max_dynamic_pressure "
                             f"{_in_unit(limits.max_dynamic_pressure_pa, u_q)}")
    if limits.cas_restriction is not None:
        rcas, below = limits.cas_restriction
        if point.altitude_m < below and cas > rcas * tol:
            u_r = r.units.get("limits.cas_restriction.cas", "kt")
            r.problem(speed_fld, f"calibrated airspeed {_in_unit(cas, u_r)} exceeds the restriction "
                                 f"{_in_unit(rcas, u_r)} below "
                                 f"{_in_unit(below, r.units.get('limits.cas_restriction.below', 'ft'))}")


def _check_point_tables(r: _Reader, key: str, point: FlightPoint, aircraft: AircraftData | None,
                        propulsion: Propulsion | None, mission: Mission, dt_k: float | None) -> None:
    """The solvers treat states outside the table data as infeasible: the end points must lie inside."""
    if dt_k is None:
        return
    fld = f"mission.{key}"
    mach, _, _, _ = _point_state(point, dt_k)
    grids: list[tuple[str, tuple[float, ...]]] = []
    if aircraft is not None:
        d = aircraft.drag
        grids.append(("aircraft.drag.mach", d.cd0.mach if d.kind == "parabolic" else d.cd_mach))
        grids.append(("aircraft.cl_max", aircraft.cl_max.mach))
        if d.lift_slope_per_rad is not None:
            grids.append(("aircraft.drag.lift_slope", d.lift_slope_per_rad.mach))
    rating = None
    if propulsion is not None:
        rname = mission.rating or propulsion.default_rating
        rating = propulsion.ratings.get(rname)
    if rating is not None:
        table = rating.thrust_n if rating.kind == "jet" else rating.shaft_power_w
        base = f"propulsion.ratings.{rating.name}"
        grids.append((f"{base}.mach", table.mach))
        alt = table.altitude_m
        u_alt = r.units.get(f"{base}.altitude", "m")
        if not (alt[0] - 1e-6 <= point.altitude_m <= alt[-1] + 1e-6):
            r.problem(f"{fld}.altitude", f"{_in_unit(point.altitude_m, u_alt)} lies outside the engine table "
                                         f"{base}.altitude ({_in_unit(alt[0], u_alt)} to {_in_unit(alt[-1], u_alt)}); "
                                         f"expected the table to cover the mission")
        if rating.propeller_efficiency is not None:
            grids.append((f"{base}.propeller_efficiency", rating.propeller_efficiency.mach))
    for name, grid in grids:
        if not (grid[0] - 1e-9 <= mach <= grid[-1] + 1e-9):
            r.problem(f"{fld}.{point.speed_kind}", f"Mach {mach:.3f} lies outside {name} "
                                                   f"({_fmt(grid[0])} to {_fmt(grid[-1])}); expected the "
                                                   f"table to cover the mission")


# ---- entry point ----------------------------------------------------------------------------


_TOML_POS_RE = re.compile(r"^(?P<msg>.*?)\s*\(at line (?P<line>\d+), column (?P<col>\d+)\)\s*$")


def _read_document(path: str) -> dict:
    if os.path.isdir(path):
        raise ScenarioError(path, [("file", "is a directory; expected a scenario file (.toml)")])
    try:
        with open(path, "rb") as fh:
            data = fh.read()
    except FileNotFoundError:
        raise ScenarioError(path, [("file", "no such file")]) from None
    except OSError as exc:
        raise ScenarioError(path, [("file", f"cannot read: {exc.strerror or exc}")]) from None
    try:
        text = data.decode("utf-8")
    except UnicodeDecodeError as exc:
        raise ScenarioError(path, [("file", f"not UTF-8 text (byte {exc.start}); expected a TOML "
                                            f"text file")]) from None
    try:
        return tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        m = _TOML_POS_RE.match(str(exc))
        if m:
            where = f"line {m.group('line')}, column {m.group('col')}"
            raise ScenarioError(path, [(where, f"not valid TOML: {m.group('msg')}")]) from None
        raise ScenarioError(path, [("file", f"not valid TOML: {exc}")]) from None


def load_scenario(path) -> Scenario:
    """Read, validate and convert a scenario file to SI.

    Parameters
    ----------
    path : str or os.PathLike
        A TOML file in the format described in ``docs/scenario-format.md``.

    Returns
    -------
    Scenario
        All values in SI; ``display_units`` remembers the unit the file used for each field.

    Raises
    ------
    ScenarioError
        Listing every problem found (missing file, TOML syntax with line and column, unknown
        or missing keys, wrong types, bad units, bad tables, inconsistent mission).
    """
    path = os.fspath(path)
    doc = _read_document(path)
    r = _Reader(path)
    r.check_keys(doc, "", _TOP_KEYS)
    scen = r.section(doc, "scenario", "", _SCENARIO_KEYS, required=False)
    name = description = None
    if scen is not None:
        name = r.string(scen, "name", "scenario", required=False,
                        default=os.path.splitext(os.path.basename(path))[0])
        description = r.string(scen, "description", "scenario", required=False, default="")
    aircraft = _read_aircraft(r, doc)
    propulsion = _read_propulsion(r, doc)
    atmosphere = _read_atmosphere(r, doc)
    dt_k = atmosphere.temperature_offset_k if atmosphere is not None else None
    mission = _read_mission(r, doc, dt_k)
    limits = _read_limits(r, doc)
    solver = _read_solver(r, doc)
    _cross_checks(r, aircraft, propulsion, mission, limits, dt_k)
    if r.problems:
        raise ScenarioError(path, r.problems)
    assert None not in (name, description, aircraft, propulsion, atmosphere, mission, limits, solver)
    return Scenario(name=name, description=description, source_path=path, aircraft=aircraft,
                    propulsion=propulsion, atmosphere=atmosphere, mission=mission, limits=limits,
                    solver=solver, display_units=dict(r.units))


# ============================================================================================
# Human-readable summary, in the file's own units (used by `climbopt check`).
# ============================================================================================


#: Unit system of the summary being written: "file" (as written), "si" or "us".
_UNIT_SYSTEM: contextvars.ContextVar[str] = contextvars.ContextVar("climbopt_unit_system", default="file")

#: Display units per kind of quantity for ``units="si"`` and ``units="us"`` (ft, kt, lb, nmi, lbf, hp).
_SYSTEM_UNITS = {
    "si": {"length": "m", "distance": "km", "area": "m^2", "mass": "kg", "speed": "m/s", "force": "N",
           "power": "W", "pressure": "Pa", "mass_flow": "kg/s", "tsfc": "kg/N/s", "psfc": "kg/W/s",
           "time": "s", "temperature_difference": "K", "angle": "deg", "per_angle": "1/rad"},
    "us": {"length": "ft", "distance": "nmi", "area": "ft^2", "mass": "lb", "speed": "kt", "force": "lbf",
           "power": "hp", "pressure": "lbf/ft^2", "mass_flow": "lb/h", "tsfc": "lb/lbf/h",
           "psfc": "lb/hp/h", "time": "s", "temperature_difference": "K", "angle": "deg",
           "per_angle": "1/rad"},
}


def _kind_of_unit(unit: str) -> str | None:
    """Name of the DIMENSIONS entry a unit belongs to (None when it cannot be told)."""
    for name in DIMENSIONS:
        if name == "dimensionless":
            continue
        try:
            unit_factor(unit, name)
        except (UnitError, ValueError):
            continue
        return name
    return None


def _u(scenario: Scenario, fld: str, fallback: str) -> str:
    unit = scenario.display_units.get(fld) or fallback
    system = _UNIT_SYSTEM.get()
    if system == "file" or not unit:
        return unit
    kind = _kind_of_unit(unit)
    if kind is None:
        return unit
    if kind == "length" and fld.endswith("dash_distance"):
        kind = "distance"
    return _SYSTEM_UNITS[system][kind]


def _q(value_si: float, unit: str) -> str:
    """Format an SI value in ``unit`` (empty unit: plain number)."""
    if not unit:
        return _fmt(value_si)
    return f"{_fmt(from_si(value_si, unit))} {unit}"


def _range(values, unit: str) -> str:
    lo, hi = min(values), max(values)
    if lo == hi:
        return f"{_q(lo, unit)} (constant)"
    if not unit:
        return f"{_fmt(lo)} to {_fmt(hi)}"
    return f"{_fmt(from_si(lo, unit))} to {_fmt(from_si(hi, unit))} {unit}"


def _flat(table: Table2D) -> list[float]:
    return [v for row in table.values for v in row]


def _describe_table1d(label: str, table: Table1D, unit: str = "") -> str:
    if min(table.values) == max(table.values):
        return f"{label}: {_q(table.values[0], unit)} at all Mach numbers"
    return (f"{label}: {_range(table.values, unit)} over Mach {_fmt(table.mach[0])} to "
            f"{_fmt(table.mach[-1])} ({len(table.mach)} points)")


def _describe_point(scenario: Scenario, key: str, point: FlightPoint, dt_k: float) -> list[str]:
    fld = f"mission.{key}"
    u_alt = _u(scenario, f"{fld}.altitude", "ft")
    u_speed = _u(scenario, f"{fld}.{point.speed_kind}", "kt")
    mach, q, cas, rho = _point_state(point, dt_k)
    he = energy_height_m(point.altitude_m, point.tas_m_s)
    g0 = G0
    eas = float(eas_from_tas(point.tas_m_s, rho))
    given = (f"Mach {_fmt(point.speed_value)}" if point.speed_kind == "mach"
             else f"{point.speed_kind.upper()} {_q(point.speed_value, u_speed)}")
    lines = [
        f"  {key}: altitude {_q(point.altitude_m, u_alt)}, {given}",
        f"      = Mach {mach:.3f}, TAS {_q(point.tas_m_s, u_speed)}, CAS {_q(cas, u_speed)}, "
        f"EAS {_q(eas, u_speed)}, dynamic pressure {_q(q, _u(scenario, 'limits.max_dynamic_pressure', 'kPa'))}",
        f"      flight-path angle {_q(point.flight_path_angle_rad, _u(scenario, f'{fld}.flight_path_angle', 'deg'))}, "
        f"energy height {_q(he, u_alt)}",
    ]
    ac = scenario.aircraft
    cl = ac.mass_kg * g0 / (q * ac.reference_area_m2)
    clmax = float(_interp(mach, ac.cl_max.mach, ac.cl_max.values))
    note = "" if cl < clmax else "  <-- above CLmax: the start mass cannot fly level here"
    lines.append(f"      lift coefficient in level flight at the start mass {cl:.3f} (CLmax {clmax:.3g}){note}")
    return lines


def _interp(x: float, xs, ys) -> float:
    """Piecewise-linear lookup, clamped at the ends (display only)."""
    if x <= xs[0]:
        return ys[0]
    for i in range(1, len(xs)):
        if x <= xs[i]:
            t = (x - xs[i - 1]) / (xs[i] - xs[i - 1])
            return ys[i - 1] + t * (ys[i] - ys[i - 1])
    return ys[-1]


def describe_scenario(scenario: Scenario, units: str = "file") -> str:
    """What the program understood from a scenario, as text.

    ``units``: "file" (each value in the unit the file used), "si", or "us" (ft, kt, lb, nmi,
    lbf, hp).
    """
    if units not in ("file", "si", "us"):
        raise ValueError(f"units must be 'file', 'si' or 'us', got {units!r}")
    token = _UNIT_SYSTEM.set(units)
    try:
        return _describe(scenario)
    finally:
        _UNIT_SYSTEM.reset(token)


def _describe(scenario: Scenario) -> str:
    s = scenario
    ac, prop, mis, lim, sol = s.aircraft, s.propulsion, s.mission, s.limits, s.solver
    dt_k = s.atmosphere.temperature_offset_k
    out: list[str] = [f"Scenario: {s.name}"]
    if s.description:
        out.append(f"  {s.description}")
    out.append(f"  file: {s.source_path}")

    out.append("")
    out.append(f"Aircraft: {ac.name}")
    line = (f"  reference area {_q(ac.reference_area_m2, _u(s, 'aircraft.reference_area', 'm^2'))}, "
            f"start mass {_q(ac.mass_kg, _u(s, 'aircraft.mass', 'kg'))}")
    if ac.fuel_capacity_kg is not None:
        line += f", fuel capacity {_q(ac.fuel_capacity_kg, _u(s, 'aircraft.fuel_capacity', _u(s, 'aircraft.mass', 'kg')))}"
    out.append(line)
    d = ac.drag
    if d.kind == "parabolic":
        out.append(f"  drag polar: parabolic, CD = CD0(M) + k(M) CL^2 over Mach {_fmt(d.cd0.mach[0])} to "
                   f"{_fmt(d.cd0.mach[-1])} ({len(d.cd0.mach)} points); CD0 {_range(d.cd0.values, '')}, "
                   f"k {_range(d.k.values, '')}")
    else:
        cds = [v for row in d.cd_table for v in row]
        out.append(f"  drag polar: table CD(CL, M), {len(d.cd_mach)} Mach x {len(d.cd_cl)} CL points, Mach "
                   f"{_fmt(d.cd_mach[0])} to {_fmt(d.cd_mach[-1])}, CL {_fmt(d.cd_cl[0])} to "
                   f"{_fmt(d.cd_cl[-1])}; CD {_range(cds, '')}")
    if d.lift_slope_per_rad is not None:
        out.append("  " + _describe_table1d("lift-curve slope", d.lift_slope_per_rad,
                                            _u(s, "aircraft.drag.lift_slope", "1/rad")))
    out.append("  " + _describe_table1d("maximum lift coefficient", ac.cl_max))

    out.append("")
    align = "along the flight path" if prop.thrust_alignment == "path" else "along the body axis"
    out.append(f"Propulsion: default rating '{prop.default_rating}', throttle {_fmt(prop.throttle_min)} to "
               f"{_fmt(prop.throttle_max)}, thrust {align}, thrust scale {_fmt(prop.thrust_scale)}")
    for name, rt in prop.ratings.items():
        base = f"propulsion.ratings.{name}"
        main = rt.thrust_n if rt.kind == "jet" else rt.shaft_power_w
        u_alt = _u(s, f"{base}.altitude", "ft")
        out.append(f"  rating '{name}' ({rt.kind}): {'thrust' if rt.kind == 'jet' else 'shaft power'} table {len(main.mach)} Mach x {len(main.altitude_m)} "
                   f"altitudes, Mach {_fmt(main.mach[0])} to {_fmt(main.mach[-1])}, altitude "
                   f"{_range(main.altitude_m, u_alt)}")
        if rt.kind == "jet":
            out.append(f"    thrust (all engines) {_range(_flat(rt.thrust_n), _u(s, base + '.thrust', 'kN'))}")
        else:
            out.append(f"    shaft power (all engines) "
                       f"{_range(_flat(rt.shaft_power_w), _u(s, base + '.shaft_power', 'kW'))}")
            out.append("    " + _describe_table1d("propeller efficiency", rt.propeller_efficiency))
        if rt.fuel_flow_kg_s is not None:
            out.append(f"    fuel flow table {_range(_flat(rt.fuel_flow_kg_s), _u(s, base + '.fuel_flow', 'kg/h'))}")
        elif base + ".specific_impulse" in s.display_units:
            isp = 1.0 / (G0 * rt.tsfc_kg_per_n_s)
            out.append(f"    fuel: specific impulse {_q(isp, _u(s, base + '.specific_impulse', 's'))} "
                       f"(TSFC {_q(rt.tsfc_kg_per_n_s, _u(s, base + '.tsfc', 'lb/lbf/h'))})")
        elif rt.tsfc_kg_per_n_s is not None:
            out.append(f"    fuel: TSFC {_q(rt.tsfc_kg_per_n_s, _u(s, base + '.tsfc', 'lb/lbf/h'))}")
        else:
            out.append(f"    fuel: PSFC {_q(rt.psfc_kg_per_w_s, _u(s, base + '.psfc', 'lb/hp/h'))}")

    out.append("")
    out.append(f"Atmosphere: US Standard Atmosphere 1976, temperature offset "
               f"{_q(dt_k, _u(s, 'atmosphere.temperature_offset', 'K'))}")

    out.append("")
    out.append(f"Mission: climb with rating '{mis.rating or prop.default_rating}'")
    out.extend(_describe_point(s, "start", mis.start, dt_k))
    out.extend(_describe_point(s, "target", mis.target, dt_k))
    u_alt = _u(s, "mission.target.altitude", "ft")
    gain = (energy_height_m(mis.target.altitude_m, mis.target.tas_m_s)
            - energy_height_m(mis.start.altitude_m, mis.start.tas_m_s))
    out.append(f"  energy height to gain: {_q(gain, u_alt)}")
    if mis.dash_distance_m is not None:
        out.append(f"  then dash at the target state to a ground distance of "
                   f"{_q(mis.dash_distance_m, _u(s, 'mission.dash_distance', 'nmi'))} from the start")

    out.append("")
    out.append("Limits:")
    none = "none"
    top = (f"to {_q(lim.max_altitude_m, _u(s, 'limits.max_altitude', u_alt))}" if lim.max_altitude_m is not None
           else "(no upper limit)")
    out.append(f"  altitude from {_q(lim.min_altitude_m, _u(s, 'limits.min_altitude', u_alt))} {top}")
    out.append(f"  max Mach {_fmt(lim.max_mach) if lim.max_mach is not None else none}, max CAS "
               f"{_q(lim.max_cas_m_s, _u(s, 'limits.max_cas', 'kt')) if lim.max_cas_m_s is not None else none}, "
               f"max dynamic pressure "
               f"{_q(lim.max_dynamic_pressure_pa, _u(s, 'limits.max_dynamic_pressure', 'kPa')) if lim.max_dynamic_pressure_pa is not None else none}, "
               f"max load factor {_fmt(lim.max_load_factor)}")
    if lim.cas_restriction is not None:
        rc, below = lim.cas_restriction
        out.append(f"  CAS at most {_q(rc, _u(s, 'limits.cas_restriction.cas', 'kt'))} below "
                   f"{_q(below, _u(s, 'limits.cas_restriction.below', 'ft'))}")

    out.append("")
    ipopt = ", ".join(f"{k}={v}" for k, v in sol.ipopt.items()) or "defaults"
    out.append(f"Solver: energy-state grid {sol.grid_altitude_points} altitudes x {sol.grid_speed_points} speeds; "
               f"collocation {sol.intervals} intervals ({sol.transcription}), mesh tolerance "
               f"{_fmt(sol.mesh_tolerance)}, up to {sol.max_mesh_refinements} refinements, cost weight "
               f"{_q(sol.cost_weight_kg_per_s, _u(s, 'solver.cost_weight', 'kg/s'))}; IPOPT options: {ipopt}")
    return "\n".join(out)
