"""Scenario: the one input of a climbopt run, read from a TOML file with units at the edge.

Everything here is SI: metres, seconds, kilograms, newtons, watts, pascals, kelvin, radians.
Units are parsed once (see :mod:`climbopt.units`) and never travel further.

Table conventions (shared by the model and both solvers):

* 1-D tables are functions of Mach: ``mach`` (strictly increasing) and ``values`` of equal length.
* 2-D engine tables have rows over Mach and columns over pressure altitude:
  ``values[i][j]`` is at ``mach[i]``, ``altitude_m[j]``.

Reading is bounded: a file is at most :data:`MAX_FILE_BYTES`, its nesting, strings, keys, arrays
and numbers are limited (see the constants below) before and after the TOML reader runs, so that
any input up to 1 MiB is answered with a :class:`ScenarioError` or a :class:`Scenario` within a
fraction of a second. Human-readable summaries of a scenario live in :mod:`climbopt.describe`.
"""

from __future__ import annotations

import contextlib
import dataclasses
import difflib
import io
import math
import os
import re
import sys
import tomllib
from dataclasses import dataclass, field
from typing import Literal

import numpy as np

from climbopt.airspeed import cas_from_tas, tas_from_speed
from climbopt.atmosphere import G0, energy_height_m, standard_atmosphere
from climbopt.units import (
    DIMENSIONS,
    MAX_MAGNITUDE,
    UnitError,
    from_si,
    parse_altitude,
    parse_quantity_with_unit,
    shorten,
    unit_factor,
)


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
class RatingStep:
    """One step of a mission's rating schedule: engine rating ``rating`` at ``thrust_fraction``
    of its thrust (a derate; fuel flow in proportion, as for the throttle) up to the altitude
    ``until_m`` [m] (None: to the end of the mission)."""

    rating: str
    until_m: float | None = None
    thrust_fraction: float = 1.0


@dataclass(frozen=True)
class WindProfile:
    """Along-track wind component [m/s] (positive: tailwind, negative: headwind) against
    altitude [m]: one constant value (``altitude_m`` empty) or a table (strictly increasing
    altitudes, one value each; held constant beyond its ends)."""

    along_track_m_s: tuple[float, ...]
    altitude_m: tuple[float, ...] = ()


@dataclass(frozen=True)
class AtmosphereSpec:
    """Standard atmosphere (US 1976) with a temperature offset [K] (ISA + dT) and an optional
    along-track wind."""

    temperature_offset_k: float = 0.0
    wind: WindProfile | None = None


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
    flown at the target state after the climb.

    ``profile``: "procedure" (altitude never decreases and stays between the start and target
    altitudes, as a flown climb) or "free" (the unconstrained optimum, zooms allowed).
    ``acceleration_share``: where a flown schedule changes speed between segments, the fraction
    of the specific excess power given to the speed change (1 = level acceleration), 0 < s <= 1.
    """

    start: FlightPoint
    target: FlightPoint
    dash_distance_m: float | None = None
    rating: str | None = None
    profile: Literal["procedure", "free"] = "procedure"
    acceleration_share: float = 0.5
    rating_schedule: tuple[RatingStep, ...] = ()


@dataclass(frozen=True)
class ScheduleSpec:
    """A named climb schedule (``[[schedules]]``), as crews fly it.

    ``cas_m_s``: climb CAS [m/s]; ``mach``: climb Mach above the crossover altitude (None: CAS
    all the way); ``cas_below_restriction_m_s``: CAS below the CAS-restriction altitude [m/s]
    (None when the scenario has no restriction); ``acceleration_share``: as
    :attr:`Mission.acceleration_share`, for this schedule's speed changes.
    """

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
    buffet_load_factor: float | None = None


@dataclass(frozen=True)
class SolverOptions:
    """Numerical options for both solvers.

    Energy-state grid: ``grid_altitude_points`` x ``grid_speed_points``.
    Collocation: ``intervals`` (initial mesh), ``transcription`` ("hermite-simpson"),
    ``mesh_tolerance`` (relative objective change to stop refining), ``max_mesh_refinements``,
    ``cost_weight_kg_per_s`` (weighted objective fuel + w * time), ``ipopt`` options passed
    straight to IPOPT, ``time_limit_s`` the overall wall-clock limit of a run [s], ``compile``
    whether the collocation solver may compile its point function to C (None: use a compiled
    one already cached, and compile for sweeps of many cases; True: compile now; False: never).
    """

    grid_altitude_points: int = 300
    grid_speed_points: int = 300
    intervals: int = 100
    transcription: Literal["hermite-simpson"] = "hermite-simpson"
    mesh_tolerance: float = 1e-4
    max_mesh_refinements: int = 3
    cost_weight_kg_per_s: float = 0.0
    ipopt: dict = field(default_factory=dict)
    time_limit_s: float = 300.0
    compile: bool | None = None


@dataclass(frozen=True)
class Scenario:
    """A whole scenario in SI.

    ``display_units`` maps dotted field names to the unit string the file used and
    ``display_text`` maps fields to the text to show instead of a converted value (flight
    levels as written, e.g. "FL350"); both are for printing back in the user's units.
    ``schedules`` are the named climb schedules; ``warnings`` the ``(field, message)`` pairs of
    data that are possible but implausible (printed by ``climbopt check``).

    Change a scenario with :meth:`replace` (values as written in a file) or :meth:`replace_si`
    (SI floats): both validate the result exactly as a file is validated.
    """

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
    warnings: tuple[tuple[str, str], ...] = ()
    display_text: dict[str, str] = field(default_factory=dict)

    def replace(self, **changes) -> Scenario:
        """A new scenario with ``changes`` applied, validated exactly like a file.

        Each change is written as in a scenario file (text with a unit, or a plain number), by
        short name -- ``mass``, ``fuel_capacity``, ``temperature_offset``, ``thrust_scale``,
        ``start_altitude``, ``target_altitude``, ``target_speed`` (in the target's kind of
        speed), ``target_mach`` / ``target_tas`` / ``target_cas`` / ``target_eas`` (switching
        the kind), ``cost_weight``, ``time_limit``, ``profile``, ``acceleration_share`` -- or by
        dotted field name, e.g. ``scenario.replace(**{"limits.max_mach": 0.8})``.

        Example: ``scenario.replace(mass="65 t", temperature_offset="10 K", thrust_scale=0.95,
        target_altitude="FL370", target_speed=0.8, cost_weight="0.5 kg/s")``.

        Raises
        ------
        ScenarioError
            Every problem of the changed scenario (each message names the change), or an
            unknown change name.
        """
        return _replaced(self, changes, si=False)

    def replace_si(self, **changes_si) -> Scenario:
        """Like :meth:`replace` with SI floats for the short names: ``mass`` [kg],
        ``fuel_capacity`` [kg], ``temperature_offset`` [K], ``thrust_scale`` [-],
        ``start_altitude`` / ``target_altitude`` [m], ``target_speed`` [Mach number, or m/s for
        a TAS/CAS/EAS target], ``cost_weight`` [kg/s], ``time_limit`` [s],
        ``acceleration_share`` [-]. Used by sweeps; validated exactly like a file."""
        return _replaced(self, changes_si, si=True)


# ============================================================================================
# Reading and validating a scenario file.
#
# Design: one pass over the TOML document with a `_Reader` that records every problem as a
# (dotted field, message) pair and carries on with `None` for the broken value, so that a
# single run reports all problems. Cross-field checks run only on values that parsed.
# ============================================================================================

#: Keys of each section; used for unknown-key errors and "did you mean" suggestions.
_TOP_KEYS = ("scenario", "aircraft", "propulsion", "atmosphere", "mission", "limits", "solver",
             "schedules")
_SCENARIO_KEYS = ("name", "description")
_AIRCRAFT_KEYS = ("name", "reference_area", "mass", "fuel_capacity", "drag", "cl_max")
_DRAG_KEYS = ("model", "mach", "cd0", "k", "cl", "cd", "lift_slope")
_TABLE1D_KEYS = ("mach", "unit", "values")
_PROPULSION_KEYS = ("default_rating", "throttle_min", "throttle_max", "thrust_alignment",
                    "thrust_scale", "ratings")
_RATING_KEYS = ("kind", "mach", "altitude", "thrust", "shaft_power", "propeller_efficiency",
                "fuel_flow", "tsfc", "specific_impulse", "psfc")
_ATMOSPHERE_KEYS = ("temperature_offset", "wind")
_WIND_KEYS = ("along_track", "altitude")
_RATING_STEP_KEYS = ("rating", "until", "thrust_fraction")
_MISSION_KEYS = ("start", "target", "dash_distance", "rating", "profile", "acceleration_share")
_POINT_KEYS = ("altitude", "mach", "tas", "cas", "eas", "flight_path_angle")
_SPEED_KINDS = ("mach", "tas", "cas", "eas")
_LIMITS_KEYS = ("max_dynamic_pressure", "max_mach", "max_cas", "min_altitude", "max_altitude",
                "buffet_load_factor",
                "max_load_factor", "cas_restriction")
_CAS_RESTRICTION_KEYS = ("cas", "below")
_SOLVER_KEYS = ("grid_altitude_points", "grid_speed_points", "intervals", "transcription",
                "mesh_tolerance", "max_mesh_refinements", "cost_weight", "time_limit", "compile",
                "ipopt")
_SCHEDULE_KEYS = ("name", "cas_below_restriction", "cas", "mach", "acceleration_share")

#: Altitudes accepted anywhere in a scenario [m]: from -500 m (below sea level airfields) to 70 km,
#: the top of the smooth atmosphere both solvers use.
_ALTITUDE_RANGE_M = (-500.0, 70_000.0)

#: Relative slack when comparing the mission end points with limits and table edges: a value
#: is beyond a limit only when it exceeds it by more than this fraction of the larger of the two
#: magnitudes (so a point written exactly on a limit, in any unit, is inside).
_REL_TOL = 1e-9

#: At most this many bad elements of one array are listed individually.
_MAX_ELEMENT_PROBLEMS = 3

# ---- limits on the input (nothing may crash or hang on bad input) --------------------------

#: Largest scenario file [bytes] (1 MiB; the bundled files are about 10 kB).
MAX_FILE_BYTES = 1 << 20
#: Most lines in a file.
MAX_LINES = 100_000
#: Most values, keys, tables and brackets in a file (counted before the TOML reader runs).
MAX_ITEMS = 50_000
#: Most problems listed in one error (the rest are counted).
MAX_PROBLEMS = 100
#: Deepest nesting of tables and arrays (sections, dotted keys, inline tables and arrays
#: together); the deepest real field, ``propulsion.ratings.NAME.thrust.values[i][j]``, is a
#: number in the 6th level (propulsion, ratings, NAME, thrust, values, values[i]).
MAX_NESTING = 10
#: Longest string value and longest key [characters].
MAX_STRING_CHARS = 1000
MAX_KEY_CHARS = 64
#: Most keys in one table and most elements in one array.
MAX_TABLE_KEYS = 1000
MAX_ARRAY_ITEMS = 10_000
#: IPOPT's integer options are 32-bit.
_IPOPT_INT_MAX = 2**31 - 1
#: At most this many limit problems are listed (the file is refused at the first).
_MAX_LIMIT_PROBLEMS = 20

#: Plausibility: thrust-to-weight ratios outside this range draw a warning.
_THRUST_TO_WEIGHT_RANGE = (0.1, 2.0)


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
    """Short rendering of a TOML value for messages (at most 60 characters)."""
    if isinstance(value, bool):
        return str(value).lower()
    if isinstance(value, str):
        return repr(shorten(value, 58))
    if isinstance(value, (list, dict)):
        text = str(value)[:200]  # containers are bounded by the input limits
        return shorten(text)
    return shorten(value)


def _beyond(value: float, limit: float) -> bool:
    """``value`` exceeds ``limit`` by more than :data:`_REL_TOL` of the larger magnitude (the
    one boundary rule of the reader: a value exactly on a limit is inside)."""
    return value - limit > _REL_TOL * max(abs(value), abs(limit))


def _fmt(x: float) -> str:
    return f"{x:.6g}"


class _Reader:
    """Collects problems while reading one document; see the module comment above."""

    def __init__(self, path: str, unit_hints: dict[str, str] | None = None):
        self.path = path
        self.problems: list[tuple[str, str]] = []  # the first MAX_PROBLEMS
        self.count = 0  # all problems
        self.warnings: list[tuple[str, str]] = []
        self.units: dict[str, str] = {}
        self.text: dict[str, str] = {}  # fields shown as written (flight levels)
        self.hints = unit_hints or {}  # units to show in messages (Scenario.replace)
        self.rating_names: list[str] | None = None  # names under [propulsion.ratings], once read

    def problem(self, fld: str, message: str) -> None:
        self.count += 1
        if len(self.problems) < MAX_PROBLEMS:
            self.problems.append((fld, message))

    def error(self) -> ScenarioError:
        """The ScenarioError listing the problems found (and how many more were not listed)."""
        more = self.count - len(self.problems)
        tail = [("file", f"... and {more} more problems not listed")] if more else []
        return ScenarioError(self.path, self.problems + tail)

    def warn(self, fld: str, message: str) -> None:
        self.warnings.append((fld, message))

    def unit_of(self, fld: str, default: str = "") -> str:
        """The unit to show ``fld``'s values in: as the user wrote it."""
        return self.hints.get(fld) or self.units.get(fld) or default

    # ---- structure -------------------------------------------------------------------------

    def check_keys(self, node: dict, path: str, allowed: tuple[str, ...]) -> None:
        for key in node:
            if key not in allowed:
                close = (difflib.get_close_matches(key, allowed, n=1, cutoff=0.6)
                         if self.count < MAX_PROBLEMS else None)
                hint = f" (did you mean '{close[0]}'?)" if close else ""
                self.problem(_join(path, key), f"unknown key {_show(key)}{hint}; known keys here: "
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
        """Read a scalar with a unit (or a plain number for dim "dimensionless"); SI float.

        ``dim == "altitude"``: a length or a flight level ("FL350"), kept as written for display.
        """
        fld = _join(path, key)
        if key not in node:
            if required:
                self.problem(fld, f"missing; expected {_expect(dim)}")
            return default
        raw = node[key]
        try:
            value, unit = self._parse(raw, dim, fld)
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

    def _parse(self, raw, dim: str, fld: str) -> tuple[float, str]:
        """(SI value, unit as written) of one scalar; flight levels are remembered as written."""
        if dim != "altitude":
            return parse_quantity_with_unit(raw, dim, fld)
        value, unit, level = parse_altitude(raw, fld)
        if level is not None:
            self.text[fld] = level
        return value, unit

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
            self.problem(fld, f"got {_show(raw)}{hint}; expected one of {', '.join(repr(c) for c in choices)}")
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
                factor = unit_factor(unit_raw, _dimension_of(dim), _join(fld, "unit"))
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
                self.problem(*msg)
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
            value = float(elem) * factor  # |elem| <= MAX_MAGNITUDE (see _limit_problems)
            if not math.isfinite(value):
                converted = " after unit conversion" if math.isfinite(float(elem)) else ""
                bad.append((fld, f"{_show(elem)} is not a finite number{converted}"))
                return None
            return value
        try:
            value, unit = self._parse(elem, dim, fld)
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
        unit = self.unit_of(fld)
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
        unit = self.unit_of(fld)
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


def _dimension_of(dim: str) -> str:
    """The :data:`climbopt.units.DIMENSIONS` name of a reader kind ("altitude" is a length)."""
    return "length" if dim == "altitude" else dim


def _expect(dim: str) -> str:
    if dim == "altitude":
        return "an altitude with a unit or a flight level, e.g. \"30000 ft\" or \"FL300\""
    d = DIMENSIONS[dim]
    if dim == "dimensionless":
        return "a number"
    return f"{d.name.replace('_', ' ')} with a unit, e.g. \"{d.example}\""


def _array_expect(dim: str, ndim: int) -> str:
    d = DIMENSIONS[_dimension_of(dim)]
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
    if fuel is not None and mass is not None and _beyond(fuel, mass):
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
            r.problem("propulsion.default_rating", f"missing; expected one of the ratings {_names(rnode)}")
            default = None
    elif default is not None and rnode is not None and default not in rnode:
        _unknown_rating(r, "propulsion.default_rating", default, rnode)
        default = None
    if not ok or None in (tmin, tmax, alignment, scale, default) or (tmin > tmax):
        return None
    return Propulsion(ratings=ratings, default_rating=default, throttle_min=tmin, throttle_max=tmax,
                      thrust_alignment=alignment, thrust_scale=scale)


def _names(names, most: int = 10) -> str:
    """Quoted names for a message, at most ``most`` of them."""
    names = list(names)
    shown = ", ".join(_show(n) for n in names[:most])
    return shown + (f" and {len(names) - most} more" if len(names) > most else "")


def _unknown_rating(r: _Reader, fld: str, name: str, ratings) -> None:
    close = difflib.get_close_matches(name, list(ratings)[:MAX_TABLE_KEYS], n=1, cutoff=0.5)
    hint = f" (did you mean '{close[0]}'?)" if close else ""
    r.problem(fld, f"unknown rating {_show(name)}{hint}; expected one of {_names(ratings)}")


def _read_rating(r: _Reader, name: str, raw) -> Rating | None:
    """``[propulsion.ratings.NAME]``: a jet rating (thrust table) or a propeller rating (shaft
    power table and propeller efficiency) over Mach x altitude, with exactly one fuel model
    (:func:`_read_fuel_model`). Problems are recorded; None when any."""
    path = f"propulsion.ratings.{name}"
    if not isinstance(raw, dict):
        r.problem(path, f"expected a table [{path}], got {_type_name(raw)} {_show(raw)}")
        return None
    r.check_keys(raw, path, _RATING_KEYS)
    kind = r.string(raw, "kind", path, choices=("jet", "propeller"))
    mach = r.grid(raw, "mach", path, "dimensionless", minimum=0.0)
    alt = r.grid(raw, "altitude", path, "altitude")
    if alt is not None:
        lo, hi = _ALTITUDE_RANGE_M
        if alt[0] < lo or alt[-1] > hi:
            r.problem(_join(path, "altitude"),
                      f"spans {_in_unit(alt[0], r.unit_of(path + '.altitude', 'm'))} to "
                      f"{_in_unit(alt[-1], r.unit_of(path + '.altitude', 'm'))}; expected altitudes within "
                      f"the standard atmosphere, -500 m to 70 km")
            alt = None

    def forbid(keys: tuple[str, ...], why: str) -> None:
        for key in keys:
            if key in raw:
                r.problem(_join(path, key), why)

    thrust = power = eff = None
    if kind == "jet":
        forbid(("shaft_power", "propeller_efficiency", "psfc"),
               "only used with kind = \"propeller\"; a jet rating takes thrust and fuel_flow, tsfc or "
               "specific_impulse")
        thrust = _rating_table(r, raw, path, "thrust", "force", "a thrust >= 0", mach, alt)
        allowed = ("fuel_flow", "tsfc", "specific_impulse")
        main_ok = thrust is not None
    elif kind == "propeller":
        forbid(("thrust", "tsfc", "specific_impulse"),
               "only used with kind = \"jet\"; a propeller rating takes shaft_power, "
               "propeller_efficiency and fuel_flow or psfc")
        power = _rating_table(r, raw, path, "shaft_power", "power", "a shaft power >= 0", mach,
                              alt)
        eff = r.table1d(raw, "propeller_efficiency", path, "dimensionless", default_mach=mach,
                        minimum=0.0, maximum=1.0, strict_min=True,
                        what="a propeller efficiency > 0 and <= 1")
        allowed = ("fuel_flow", "psfc")
        main_ok = power is not None and eff is not None
    else:
        return None
    fuel_ok, fuel_flow, tsfc, psfc = _read_fuel_model(r, raw, path, allowed, mach, alt)
    if not (main_ok and fuel_ok):
        return None
    return Rating(name=name, kind=kind, thrust_n=thrust, shaft_power_w=power, propeller_efficiency=eff,
                  fuel_flow_kg_s=fuel_flow, tsfc_kg_per_n_s=tsfc, psfc_kg_per_w_s=psfc)


def _rating_table(r: _Reader, raw: dict, path: str, key: str, dim: str, what: str, mach,
                  alt) -> Table2D | None:
    """The Mach x altitude table ``key`` of a rating (values >= 0 in quantity ``dim``); None
    (problems recorded) when it or the rating's axes (``mach``, ``alt``; None when invalid) are
    not right."""
    vals = r.array(raw, key, path, dim, ndim=2)
    if vals is None or mach is None or alt is None:
        return None
    fld = _join(path, key)
    if not _check_shape(r, vals, fld, len(mach), len(alt), f"{path}.mach", f"{path}.altitude"):
        return None
    if not r.check_values(vals, fld, minimum=0.0, what=what):
        return None
    return Table2D(tuple(mach), tuple(alt), tuple(tuple(row) for row in vals))


def _read_fuel_model(r: _Reader, raw: dict, path: str, allowed: tuple[str, ...], mach, alt):
    """(ok, fuel flow table [kg/s], TSFC [kg/(N s)], PSFC [kg/(W s)]) of a rating: exactly one of
    the fuel models ``allowed`` for its kind (fuel_flow, tsfc or specific_impulse for a jet,
    fuel_flow or psfc for a propeller), the others None; problems are recorded."""
    fuel_keys = [k for k in ("fuel_flow", "tsfc", "specific_impulse", "psfc")
                 if k in raw and k in allowed]
    fuel_flow = tsfc = psfc = None
    if len(fuel_keys) != 1:
        r.problem(_join(path, "fuel_flow") if not fuel_keys else _join(path, fuel_keys[1]),
                  f"{'missing fuel data' if not fuel_keys else 'more than one fuel model given'}; "
                  f"expected exactly one of {', '.join(allowed)}")
        return False, fuel_flow, tsfc, psfc
    key = fuel_keys[0]
    if key == "fuel_flow":
        fuel_flow = _rating_table(r, raw, path, "fuel_flow", "mass_flow", "a fuel flow >= 0",
                                  mach, alt)
    elif key == "tsfc":
        tsfc = r.quantity(raw, "tsfc", path, "tsfc", minimum=0.0, strict_min=True,
                          expect="a positive thrust-specific fuel consumption, e.g. \"0.6 lb/lbf/h\"")
    elif key == "specific_impulse":
        isp = r.quantity(raw, "specific_impulse", path, "time", minimum=0.0, strict_min=True,
                         expect="a positive specific impulse, e.g. \"1600 s\"")
        if isp is not None:
            tsfc = 1.0 / (G0 * isp)  # Isp = T / (mdot g0)  (definition of specific impulse)
    else:
        psfc = r.quantity(raw, "psfc", path, "psfc", minimum=0.0, strict_min=True,
                          expect="a positive power-specific fuel consumption, e.g. \"0.5 lb/hp/h\"")
    read = fuel_flow if key == "fuel_flow" else psfc if key == "psfc" else tsfc
    return read is not None, fuel_flow, tsfc, psfc


def _read_atmosphere(r: _Reader, doc: dict) -> AtmosphereSpec | None:
    node = r.section(doc, "atmosphere", "", _ATMOSPHERE_KEYS, required=False)
    if node is None:
        return None
    dt = r.quantity(node, "temperature_offset", "atmosphere", "temperature_difference", required=False,
                    default=0.0, minimum=-80.0, maximum=80.0,
                    expect="an offset from the standard temperature between -80 K and +80 K")
    n_before = r.count
    wind = _read_wind(r, node) if "wind" in node else None
    if dt is None or r.count != n_before:
        return None
    return AtmosphereSpec(temperature_offset_k=dt, wind=wind)


#: Largest wind speed accepted [m/s] (about 300 kt: beyond any jet stream).
_MAX_WIND_M_S = 155.0


def _read_wind(r: _Reader, atmosphere: dict) -> WindProfile | None:
    """``[atmosphere.wind]``: ``along_track = "-50 kt"`` (constant; negative is a headwind) or
    ``altitude = [...]`` with an ``along_track = [...]`` column of the same length."""
    path = "atmosphere.wind"
    node = r.section(atmosphere, "wind", "atmosphere", _WIND_KEYS)
    if node is None:
        return None
    expect = "a wind speed within +-300 kt, e.g. \"-50 kt\" (negative: headwind)"
    if "altitude" not in node:
        w = r.quantity(node, "along_track", path, "speed", minimum=-_MAX_WIND_M_S,
                       maximum=_MAX_WIND_M_S, expect=expect)
        return None if w is None else WindProfile((w,))
    alt = r.grid(node, "altitude", path, "altitude")
    values = r.array(node, "along_track", path, "speed")
    if alt is None or values is None:
        return None
    if len(values) != len(alt):
        r.problem(f"{path}.along_track", f"has {len(values)} values but {path}.altitude has "
                                         f"{len(alt)}; expected one wind per altitude")
        return None
    if not r.check_values(values, f"{path}.along_track", minimum=-_MAX_WIND_M_S,
                          maximum=_MAX_WIND_M_S, what=expect):
        return None
    return WindProfile(tuple(values), tuple(alt))


def _read_point(r: _Reader, mission: dict, key: str, dt_k: float | None) -> FlightPoint | None:
    path = f"mission.{key}"
    node = r.section(mission, key, "mission", _POINT_KEYS)
    if node is None:
        return None
    lo, hi = _ALTITUDE_RANGE_M
    alt = r.quantity(node, "altitude", path, "altitude", minimum=lo, maximum=hi,
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
                                     f"{_show(node['altitude'])}: {shorten(str(exc), 200)}")
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
    n_before = r.count
    start = _read_point(r, node, "start", dt_k)
    target = _read_point(r, node, "target", dt_k)
    dash = r.quantity(node, "dash_distance", "mission", "length", required=False, minimum=0.0,
                      strict_min=True, expect="a positive ground distance, e.g. \"150 nmi\"")
    steps = ()
    if isinstance(node.get("rating"), list):
        steps = _read_rating_schedule(r, node["rating"])
        rating = steps[0].rating if steps else None
    else:
        rating = r.string(node, "rating", "mission", required=False)
        if rating is not None and r.rating_names is not None and rating not in r.rating_names:
            _unknown_rating(r, "mission.rating", rating, r.rating_names)
    profile = r.string(node, "profile", "mission", required=False, default="procedure",
                       choices=("procedure", "free"))
    share = r.quantity(node, "acceleration_share", "mission", "dimensionless", required=False,
                       default=0.5, minimum=0.0, maximum=1.0, strict_min=True,
                       expect="a fraction of the excess power > 0 and <= 1 (1 = level acceleration)")
    if r.count != n_before or None in (start, target):
        return None
    return Mission(start=start, target=target, dash_distance_m=dash, rating=rating, profile=profile,
                   acceleration_share=share, rating_schedule=steps)


def _read_rating_schedule(r: _Reader, raw: list) -> tuple[RatingStep, ...]:
    """``mission.rating = [{ rating = "max", until = "1500 ft" }, { rating = "climb" }]``: the
    ratings in force, each up to its altitude (the last one without ``until``), optionally
    derated (``thrust_fraction``). Problems are recorded; () when any."""
    n_before = r.count
    steps, previous = [], None
    if not raw:
        r.problem("mission.rating", "empty array; expected a rating name or an array of "
                                    "{ rating = \"...\", until = \"...\" } tables")
    for i, item in enumerate(raw):
        fld = f"mission.rating[{i}]"
        if not isinstance(item, dict):
            r.problem(fld, f"expected a table {{ rating = \"...\", until = \"...\" }}, got "
                           f"{_type_name(item)} {_show(item)}")
            continue
        r.check_keys(item, fld, _RATING_STEP_KEYS)
        name = r.string(item, "rating", fld)
        if name is not None and r.rating_names is not None and name not in r.rating_names:
            _unknown_rating(r, f"{fld}.rating", name, r.rating_names)
        last = i == len(raw) - 1
        until = None
        if "until" in item:
            until = r.quantity(item, "until", fld, "altitude", minimum=_ALTITUDE_RANGE_M[0],
                               maximum=_ALTITUDE_RANGE_M[1], expect="an altitude, e.g. \"1500 ft\"")
            if last and until is not None:
                r.problem(f"{fld}.until", "the last rating applies to the end of the mission; "
                                          "expected no 'until' on it")
            if until is not None and previous is not None and until <= previous:
                r.problem(f"{fld}.until", f"{_show(item['until'])} is not above the previous "
                                          "step's; expected increasing altitudes")
            previous = until if until is not None else previous
        elif not last:
            r.problem(f"{fld}.until", "missing; expected the altitude up to which this rating "
                                      "applies, e.g. \"1500 ft\"")
        frac = r.quantity(item, "thrust_fraction", fld, "dimensionless", required=False,
                          default=1.0, minimum=0.0, maximum=1.0, strict_min=True,
                          expect="a fraction of the rating's thrust > 0 and <= 1")
        steps.append(RatingStep(name or "", until, frac if frac is not None else 1.0))
    return tuple(steps) if r.count == n_before else ()


def _read_limits(r: _Reader, doc: dict) -> Limits | None:
    path = "limits"
    node = r.section(doc, "limits", "", _LIMITS_KEYS, required=False)
    if node is None:
        return None
    lo, hi = _ALTITUDE_RANGE_M
    n_before = r.count
    q = r.quantity(node, "max_dynamic_pressure", path, "pressure", required=False, minimum=0.0,
                   strict_min=True)
    mach = r.quantity(node, "max_mach", path, "dimensionless", required=False, minimum=0.0,
                      strict_min=True, maximum=10.0, expect="a Mach number > 0 and <= 10")
    cas = r.quantity(node, "max_cas", path, "speed", required=False, minimum=0.0, strict_min=True)
    hmin = r.quantity(node, "min_altitude", path, "altitude", required=False, default=0.0, minimum=lo,
                      maximum=hi, expect="an altitude from -500 m to 70 km")
    hmax = r.quantity(node, "max_altitude", path, "altitude", required=False, minimum=lo, maximum=hi,
                      expect="an altitude from -500 m to 70 km")
    nmax = r.quantity(node, "max_load_factor", path, "dimensionless", required=False, default=3.0,
                      minimum=1.0, maximum=15.0, expect="a load factor >= 1 and <= 15")
    buffet = r.quantity(node, "buffet_load_factor", path, "dimensionless", required=False,
                        minimum=1.0, maximum=2.5,
                        expect="a manoeuvre margin to buffet onset as a load factor from 1 to "
                               "2.5, e.g. 1.3")
    if hmin is not None and hmax is not None and hmax <= hmin:
        r.problem("limits.max_altitude", f"{_show(node['max_altitude'])} is not above min_altitude "
                                         f"{_show(node.get('min_altitude', '0 m'))}; expected max_altitude > "
                                         f"min_altitude")
    restriction = None
    if "cas_restriction" in node:
        sub = r.section(node, "cas_restriction", path, _CAS_RESTRICTION_KEYS)
        if sub is not None:
            rc = r.quantity(sub, "cas", "limits.cas_restriction", "speed", minimum=0.0, strict_min=True)
            rb = r.quantity(sub, "below", "limits.cas_restriction", "altitude", minimum=lo, maximum=hi,
                            expect="an altitude from -500 m to 70 km")
            if rc is not None and rb is not None:
                restriction = (rc, rb)
    if r.count != n_before:
        return None
    return Limits(max_dynamic_pressure_pa=q, max_mach=mach, max_cas_m_s=cas, min_altitude_m=hmin,
                  max_altitude_m=hmax, max_load_factor=nmax, cas_restriction=restriction,
                  buffet_load_factor=buffet)


def _read_solver(r: _Reader, doc: dict) -> SolverOptions | None:
    path = "solver"
    node = r.section(doc, "solver", "", _SOLVER_KEYS, required=False)
    if node is None:
        return None
    n_before = r.count
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
    time_limit = r.quantity(node, "time_limit", path, "time", required=False,
                            default=defaults.time_limit_s, minimum=0.0, strict_min=True,
                            expect="a positive wall-clock time, e.g. \"300 s\" or \"10 min\"")
    ipopt = _read_ipopt(r, node)
    compile_ = node.get("compile")
    if compile_ is not None and not isinstance(compile_, bool):
        r.problem("solver.compile", f"got {_type_name(compile_)} {_show(compile_)}; expected "
                                    "true or false")
    if r.count != n_before:
        return None
    return SolverOptions(grid_altitude_points=gh, grid_speed_points=gv, intervals=intervals,
                         transcription=transcription, mesh_tolerance=tol, max_mesh_refinements=refinements,
                         cost_weight_kg_per_s=weight, ipopt=ipopt, time_limit_s=time_limit,
                         compile=compile_)


def _read_ipopt(r: _Reader, node: dict) -> dict:
    """``[solver.ipopt]``: names with numbers or strings (checked against IPOPT itself by
    :func:`ipopt_option_problems`, which ``climbopt check`` runs)."""
    ipopt: dict = {}
    if "ipopt" not in node:
        return ipopt
    sub = node["ipopt"]
    if not isinstance(sub, dict):
        r.problem("solver.ipopt", f"expected a table [solver.ipopt] of IPOPT options, got "
                                  f"{_type_name(sub)} {_show(sub)}")
        return ipopt
    for key, value in sub.items():
        fld = f"solver.ipopt.{key}"
        if isinstance(value, bool) or not isinstance(value, (int, float, str)):
            r.problem(fld, f"got {_type_name(value)} {_show(value)}; expected a number or a string "
                           f"(IPOPT option values)")
        elif isinstance(value, float) and not math.isfinite(value):
            r.problem(fld, f"{_show(value)} is not a finite number")
        else:
            ipopt[key] = value
    return ipopt


def _read_schedules(r: _Reader, doc: dict, mission: Mission | None, limits: Limits | None,
                    top_mach: float | None) -> tuple[ScheduleSpec, ...] | None:
    """``[[schedules]]``: named climb schedules; see :class:`ScheduleSpec`. ``top_mach`` is the
    highest Mach number all the tables cover (None when the tables did not read)."""
    if "schedules" not in doc:
        return ()
    raw = doc["schedules"]
    if not isinstance(raw, list) or not all(isinstance(x, dict) for x in raw):
        r.problem("schedules", f"expected [[schedules]] tables, got {_type_name(raw)} {_show(raw)}")
        return None
    n_before = r.count
    share_default = mission.acceleration_share if mission is not None else 0.5
    out, names = [], {}
    for i, node in enumerate(raw):
        path = f"schedules[{i}]"
        r.check_keys(node, path, _SCHEDULE_KEYS)
        name = r.string(node, "name", path)
        if name is not None and not name.strip():
            r.problem(f"{path}.name", "is empty; expected a name such as \"250/290/M0.74\"")
        elif name is not None and name in names:
            r.problem(f"{path}.name", f"{_show(name)} is already the name of schedules[{names[name]}]; "
                                      f"expected unique names")
        elif name is not None:
            names[name] = i
        cas = r.quantity(node, "cas", path, "speed", minimum=0.0, strict_min=True,
                         expect="a positive climb CAS, e.g. \"290 kt\"")
        mach_words = f" and <= {_fmt(top_mach)} (the top of the tables)" if top_mach else ""
        mach = r.quantity(node, "mach", path, "dimensionless", required=False, minimum=0.0,
                          maximum=top_mach, strict_min=True,
                          expect=f"a climb Mach number > 0{mach_words}")
        below = r.quantity(node, "cas_below_restriction", path, "speed", required=False, minimum=0.0,
                           strict_min=True, expect="a positive CAS, e.g. \"250 kt\"")
        share = r.quantity(node, "acceleration_share", path, "dimensionless", required=False,
                           default=share_default, minimum=0.0, maximum=1.0, strict_min=True,
                           expect="a fraction of the excess power > 0 and <= 1 (1 = level acceleration)")
        if cas is not None:
            below = _schedule_speeds(r, path, node, cas, mach, below, limits)
        out.append(ScheduleSpec(name=name, cas_m_s=cas, mach=mach, cas_below_restriction_m_s=below,
                                acceleration_share=share))  # kept only when no problem was found
    return None if r.count != n_before else tuple(out)


def _schedule_speeds(r: _Reader, path: str, node: dict, cas: float, mach: float | None,
                     below: float | None, limits: Limits | None) -> float | None:
    """Check a schedule's speeds against the limits; return its CAS below the restriction
    altitude (default: the restriction CAS, or ``cas`` if that is lower; None without one)."""
    restriction = limits.cas_restriction if limits is not None else None
    u = r.unit_of(f"{path}.cas", "kt")
    if limits is not None and limits.max_cas_m_s is not None and _beyond(cas, limits.max_cas_m_s):
        r.problem(f"{path}.cas", f"{_in_unit(cas, u)} is above limits.max_cas "
                                 f"{_in_unit(limits.max_cas_m_s, u)}; expected a schedule inside the limits")
    if limits is not None and limits.max_mach is not None and mach is not None \
            and _beyond(mach, limits.max_mach):
        r.problem(f"{path}.mach", f"{_fmt(mach)} is above limits.max_mach {_fmt(limits.max_mach)}; "
                                  f"expected a schedule inside the limits")
    if below is None:
        return None if restriction is None else min(restriction[0], cas)
    fld = f"{path}.cas_below_restriction"
    ub = r.unit_of(fld, u)
    if restriction is None:
        r.warn(fld, f"{_show(node['cas_below_restriction'])} is ignored: the scenario has no "
                    f"limits.cas_restriction")
        return None
    if _beyond(below, restriction[0]):
        r.problem(fld, f"{_in_unit(below, ub)} is above the restriction {_in_unit(restriction[0], ub)} "
                       f"(limits.cas_restriction.cas); it would break the limit")
    elif _beyond(below, cas):
        r.problem(fld, f"{_in_unit(below, ub)} is above the climb CAS {_in_unit(cas, ub)}; expected "
                       f"cas_below_restriction <= cas")
    return below


def _top_mach(aircraft: AircraftData | None, propulsion: Propulsion | None,
              mission: Mission | None) -> float | None:
    """Highest Mach number covered by the drag, CLmax, lift-slope and mission-rating tables."""
    if aircraft is None or propulsion is None:
        return None
    tops = [m[-1] for _, m in _mach_grids(aircraft, _mission_rating(propulsion, mission))]
    return min(tops) if tops else None


def _mission_rating(propulsion: Propulsion | None, mission: Mission | None) -> Rating | None:
    if propulsion is None:
        return None
    name = (mission.rating if mission is not None else None) or propulsion.default_rating
    return propulsion.ratings.get(name)


def _mach_grids(aircraft: AircraftData | None, rating: Rating | None) -> list[tuple[str, tuple]]:
    """(field, Mach axis) of every table the solvers look up by Mach."""
    grids: list[tuple[str, tuple[float, ...]]] = []
    if aircraft is not None:
        d = aircraft.drag
        grids.append(("aircraft.drag.mach", d.cd0.mach if d.kind == "parabolic" else d.cd_mach))
        grids.append(("aircraft.cl_max", aircraft.cl_max.mach))
        if d.lift_slope_per_rad is not None:
            grids.append(("aircraft.drag.lift_slope", d.lift_slope_per_rad.mach))
    if rating is not None:
        base = f"propulsion.ratings.{rating.name}"
        grids.append((f"{base}.mach", _main_table(rating).mach))
        if rating.propeller_efficiency is not None:
            grids.append((f"{base}.propeller_efficiency", rating.propeller_efficiency.mach))
    return grids


def _main_table(rating: Rating) -> Table2D:
    """The thrust (jet) or shaft-power (propeller) table of a rating."""
    return rating.thrust_n if rating.kind == "jet" else rating.shaft_power_w


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
    if _beyond(he0, he1):
        unit = r.unit_of("mission.target.altitude", "m")
        r.problem("mission.target", f"energy height h + V^2/(2 g0) is {_in_unit(he1, unit)}, below the start's "
                                    f"{_in_unit(he0, unit)}; expected a target at or above the start energy "
                                    f"(this program optimises climbs)")
    h0, h1 = mission.start.altitude_m, mission.target.altitude_m
    if mission.profile == "procedure" and _beyond(h0, h1):
        u = r.unit_of("mission.target.altitude", "m")
        r.problem("mission.target.altitude",
                  f"{_in_unit(h1, u)} is below the start altitude {_in_unit(h0, u)}; a climb with "
                  f"profile = \"procedure\" never descends: expected a target at or above the start "
                  f"altitude, or mission.profile = \"free\"")
    for key, point in (("start", mission.start), ("target", mission.target)):
        _check_point_limits(r, key, point, limits, dt_k)
        _check_point_tables(r, key, point, aircraft, propulsion, mission, dt_k)
        if aircraft is not None and dt_k is not None:
            _check_stall(r, key, point, aircraft, dt_k)


def point_state(point: FlightPoint, dt_k: float) -> tuple[float, float, float, float]:
    """Mach number, dynamic pressure [Pa], CAS [m/s] and density [kg/m^3] of a flight point in the
    US Standard Atmosphere 1976 with temperature offset ``dt_k`` [K]."""
    atm = standard_atmosphere(point.altitude_m, dt_k)
    a = float(atm.speed_of_sound_m_s)
    rho = float(atm.density_kg_m3)
    mach = point.tas_m_s / a
    q = 0.5 * rho * point.tas_m_s**2
    cas = float(cas_from_tas(point.tas_m_s, point.altitude_m, dt_k))
    return mach, q, cas, rho


def level_flight_lift(aircraft: AircraftData, point: FlightPoint, dt_k: float) -> tuple[float, float]:
    """(lift coefficient needed in level flight at the start mass, CLmax at the point's Mach).

    CL = m g0 / (q S) (lift equals weight; common practice, no source); CLmax(M) interpolated
    linearly in the table and held constant beyond its ends.
    """
    mach, q, _, _ = point_state(point, dt_k)
    lift_per_cl = q * aircraft.reference_area_m2  # 0 for a speed so small that V^2 underflows
    cl = aircraft.mass_kg * G0 / lift_per_cl if lift_per_cl > 0 else math.inf
    clmax = float(np.interp(mach, aircraft.cl_max.mach, aircraft.cl_max.values))
    return cl, clmax


def _check_stall(r: _Reader, key: str, point: FlightPoint, aircraft: AircraftData, dt_k: float) -> None:
    """A start or target point below the stall speed (level flight, start mass) cannot be flown."""
    cl, clmax = level_flight_lift(aircraft, point, dt_k)
    if math.isfinite(cl) and not _beyond(cl, clmax):
        return
    fld = f"mission.{key}.{point.speed_kind}"
    if not math.isfinite(cl):
        r.problem(fld, "below the stall speed: the speed is too small to give any lift")
        return
    ratio = math.sqrt(cl / clmax)  # the speed must grow by this factor (q ~ V^2)
    if point.speed_kind == "mach":
        need = f"Mach {point.speed_value * ratio:.3f}"
    else:
        u = r.unit_of(fld, "kt")
        need = f"{point.speed_kind.upper()} {from_si(point.speed_value * ratio, u):.4g} {u}"
    r.problem(fld, f"below the stall speed: level flight at the start mass needs a lift coefficient "
                   f"of {cl:.3f}, above CLmax {clmax:.3f}; expected at least about {need} here, or "
                   f"a lighter aircraft")


def _check_point_limits(r: _Reader, key: str, point: FlightPoint, limits: Limits | None,
                        dt_k: float | None) -> None:
    """The start or target point against the scenario's limits, by the envelope's rows and its
    one boundary rule (:mod:`climbopt.envelope`; the aircraft's stall speed and tables are
    checked separately)."""
    if limits is None or dt_k is None:
        return
    import numpy as np

    from climbopt.envelope import Envelope, FlightQuantities

    fld = f"mission.{key}"
    mach, q, cas, _ = point_state(point, dt_k)
    pressure = float(standard_atmosphere(point.altitude_m, dt_k).pressure_pa)
    fq = FlightQuantities(np.array(point.altitude_m), np.array(mach), np.array(pressure),
                          np.array(q), np.array(0.0), np.array(1.0), np.array(1.0))
    outside = {k for k, m in Envelope(limits).inside(fq).items() if not bool(m)}
    u_alt = r.unit_of(f"{fld}.altitude", "m")
    if "altitude" in outside:
        low = point.altitude_m < limits.min_altitude_m
        which, value = ("below limits.min_altitude", limits.min_altitude_m) if low else \
            ("above limits.max_altitude", limits.max_altitude_m)
        r.problem(f"{fld}.altitude", f"{_in_unit(point.altitude_m, u_alt)} is {which} "
                                     f"{_in_unit(value, u_alt)}; expected a point inside the limits")
    speed_fld = f"{fld}.{point.speed_kind}"
    if "mach" in outside:
        r.problem(speed_fld, f"Mach {mach:.3f} exceeds limits.max_mach {_fmt(limits.max_mach)}")
    u_cas = r.unit_of("limits.max_cas", r.unit_of(speed_fld, "kt"))
    if "cas" in outside:
        r.problem(speed_fld, f"calibrated airspeed {_in_unit(cas, u_cas)} exceeds limits.max_cas "
                             f"{_in_unit(limits.max_cas_m_s, u_cas)}")
    if "dynamic_pressure" in outside:
        u_q = r.unit_of("limits.max_dynamic_pressure", "kPa")
        r.problem(speed_fld, f"dynamic pressure {_in_unit(q, u_q)} exceeds limits.max_dynamic_pressure "
                             f"{_in_unit(limits.max_dynamic_pressure_pa, u_q)}")
    if "cas_restriction" in outside:
        rcas, below = limits.cas_restriction
        u_r = r.unit_of("limits.cas_restriction.cas", "kt")
        r.problem(speed_fld, f"calibrated airspeed {_in_unit(cas, u_r)} exceeds the restriction "
                             f"{_in_unit(rcas, u_r)} below "
                             f"{_in_unit(below, r.unit_of('limits.cas_restriction.below', 'ft'))}")


def _check_point_tables(r: _Reader, key: str, point: FlightPoint, aircraft: AircraftData | None,
                        propulsion: Propulsion | None, mission: Mission, dt_k: float | None) -> None:
    """The solvers treat states outside the table data as infeasible: the end points must lie inside."""
    if dt_k is None:
        return
    fld = f"mission.{key}"
    mach = point_state(point, dt_k)[0]
    rating = _mission_rating(propulsion, mission)
    if rating is not None:
        base = f"propulsion.ratings.{rating.name}"
        alt = _main_table(rating).altitude_m
        u_alt = r.unit_of(f"{base}.altitude", "m")
        if _beyond(alt[0], point.altitude_m) or _beyond(point.altitude_m, alt[-1]):
            r.problem(f"{fld}.altitude", f"{_in_unit(point.altitude_m, u_alt)} lies outside the engine table "
                                         f"{base}.altitude ({_in_unit(alt[0], u_alt)} to {_in_unit(alt[-1], u_alt)}); "
                                         f"expected the table to cover the mission")
    for name, grid in _mach_grids(aircraft, rating):
        if _beyond(grid[0], mach) or _beyond(mach, grid[-1]):
            r.problem(f"{fld}.{point.speed_kind}", f"Mach {mach:.3f} lies outside {name} "
                                                   f"({_fmt(grid[0])} to {_fmt(grid[-1])}); expected the "
                                                   f"table to cover the mission")


# ---- plausibility (warnings: possible, but probably a mistake) --------------------------------


def _plausibility(r: _Reader, aircraft: AircraftData | None, propulsion: Propulsion | None,
                  mission: Mission | None, dt_k: float | None) -> None:
    """Warnings for engine tables whose trends look wrong and for an odd thrust-to-weight ratio."""
    if propulsion is None:
        return
    for name, rating in propulsion.ratings.items():
        base = f"propulsion.ratings.{name}"
        what = "thrust" if rating.kind == "jet" else "shaft power"
        key = "thrust" if rating.kind == "jet" else "shaft_power"
        _table_trend(r, f"{base}.{key}", _main_table(rating), what)
        if rating.fuel_flow_kg_s is not None:
            _table_trend(r, f"{base}.fuel_flow", rating.fuel_flow_kg_s, "fuel flow")
    rating = _mission_rating(propulsion, mission)
    if aircraft is not None and rating is not None and dt_k is not None:
        _thrust_to_weight(r, aircraft, propulsion, rating, dt_k)


def _table_trend(r: _Reader, fld: str, table: Table2D, what: str) -> None:
    """Thrust, power and fuel flow fall with altitude at fixed Mach (air density falls; common
    practice, no source). One warning per table: the steps where a value rises with altitude,
    or, for a square table whose columns fall far more consistently than its rows, that the table
    looks transposed (rows must be Mach, columns altitude)."""
    v = table.values
    n, m = len(v), len(v[0])
    rises = [(i, j) for i in range(n) for j in range(m - 1) if _beyond(v[i][j + 1], v[i][j])]
    if not rises:
        return
    unit, u_alt = r.unit_of(fld), r.unit_of(fld.rsplit(".", 1)[0] + ".altitude", "m")
    if n == m and n >= 3:
        falls_alt = sum(v[i][j + 1] < v[i][j] for i in range(n) for j in range(m - 1)) / (n * (m - 1))
        falls_mach = sum(v[i + 1][j] < v[i][j] for i in range(n - 1) for j in range(m)) / ((n - 1) * m)
        if falls_mach >= 0.9 and falls_mach - falls_alt >= 0.5:
            r.warn(fld, f"looks transposed: {what} falls from row to row (Mach) in {falls_mach:.0%} "
                        f"of the steps but from column to column (altitude) in only {falls_alt:.0%}; "
                        f"expected one row per Mach number and one column per altitude")
            return
    i, j = max(rises, key=lambda ij: v[ij[0]][ij[1] + 1] / v[ij[0]][ij[1]] if v[ij[0]][ij[1]] > 0
               else math.inf)
    r.warn(fld, f"{what} rises with altitude at fixed Mach in {len(rises)} of {n * (m - 1)} steps; "
                f"largest at Mach {_fmt(table.mach[i])}: {_in_unit(v[i][j], unit)} at "
                f"{_in_unit(table.altitude_m[j], u_alt)} to {_in_unit(v[i][j + 1], unit)} at "
                f"{_in_unit(table.altitude_m[j + 1], u_alt)}; {what} normally falls with altitude "
                f"(an extrapolated corner, or a typing error?)")


def _thrust_to_weight(r: _Reader, aircraft: AircraftData, propulsion: Propulsion, rating: Rating,
                      dt_k: float) -> None:
    """Warn when the climb rating's thrust at the lowest table altitude and lowest Mach (static
    when the table starts at Mach 0; for a propeller at the lowest Mach above 0, where
    T = eta P / V) over the start weight lies outside :data:`_THRUST_TO_WEIGHT_RANGE`."""
    table = _main_table(rating)
    base = f"propulsion.ratings.{rating.name}"
    if rating.kind == "jet":
        i, fld = 0, f"{base}.thrust"
        thrust = table.values[0][0]
    else:
        moving = [k for k, m in enumerate(table.mach) if m > 0]
        if not moving:
            return
        i, fld = moving[0], f"{base}.shaft_power"
        a = float(standard_atmosphere(table.altitude_m[0], dt_k).speed_of_sound_m_s)
        eta = float(np.interp(table.mach[i], rating.propeller_efficiency.mach,
                              rating.propeller_efficiency.values))
        thrust = eta * table.values[i][0] / (table.mach[i] * a)
    ratio = propulsion.thrust_scale * thrust / (aircraft.mass_kg * G0)
    lo, hi = _THRUST_TO_WEIGHT_RANGE
    if not lo <= ratio <= hi:
        where = f"Mach {_fmt(table.mach[i])}, {_in_unit(table.altitude_m[0], r.unit_of(base + '.altitude', 'm'))}"
        r.warn(fld, f"thrust-to-weight ratio {ratio:.3g} (thrust at {where} over the start weight); "
                    f"expected {lo:g} to {hi:g} for an aircraft: check the unit, the start mass and that "
                    f"the table is for all engines together")


# ---- entry point ----------------------------------------------------------------------------


_TOML_POS_RE = re.compile(r"^(?P<msg>.*?)\s*\(at line (?P<line>\d+), column (?P<col>\d+)\)\s*$")

#: TOML strings and comments (replaced by a placeholder before counting brackets and items).
_STRINGS_AND_COMMENTS_RE = re.compile(
    r'"""[\s\S]*?"""|\'\'\'[\s\S]*?\'\'\'|"(?:[^"\\\n]++|\\.)*+"|\'[^\'\n]*+\'|#[^\n]*+')
#: A dotted key of more than MAX_NESTING parts (the TOML reader's time and memory grow with the
#: square of the number of parts). Possessive quantifiers and the look-behind keep it linear.
_DEEP_DOTTED_KEY_RE = re.compile(
    r"(?<![A-Za-z0-9_-])[A-Za-z0-9_-]++(?:[ \t]*+\.[ \t]*+[A-Za-z0-9_-]++){%d}" % MAX_NESTING)


def _text_limit_problems(text: str) -> list[tuple[str, str]]:
    """Limits checked on the raw text, before the TOML reader runs: lines, items, bracket depth
    and dotted-key length (strings and comments left out)."""
    lines = text.count("\n")
    if lines > MAX_LINES:
        return [("file", f"has {lines} lines; expected at most {MAX_LINES}")]
    bare = _STRINGS_AND_COMMENTS_RE.sub("s", text)
    items = sum(bare.count(c) for c in ",=[]{}")
    if items > MAX_ITEMS:
        return [("file", f"holds about {items} values, keys and brackets; expected at most {MAX_ITEMS} "
                         f"(a scenario needs a few thousand)")]
    depth = deepest = 0
    for m in re.finditer(r"[\[\]{}]", bare):
        depth = depth + 1 if m.group() in "[{" else max(depth - 1, 0)
        deepest = max(deepest, depth)
    if deepest > MAX_NESTING:
        return [("file", f"brackets nested {deepest} deep; expected at most {MAX_NESTING} levels of "
                         f"tables and arrays")]
    m = _DEEP_DOTTED_KEY_RE.search(bare)
    if m:
        return [("file", f"dotted key {_show(m.group())} has more than {MAX_NESTING} parts; expected at "
                         f"most {MAX_NESTING} levels of tables")]
    return []


def _limit_problems(doc: dict) -> list[tuple[str, str]]:
    """Limits checked on the parsed document (iteratively: no recursion on deep input): nesting,
    table and array sizes, key and string lengths, number magnitudes (integers in
    [solver.ipopt] up to 2^31 - 1, other numbers up to 1e15; NaN and infinity are left to the
    field readers, which explain them)."""
    problems: list[tuple[str, str]] = []
    stack = [("", doc, 0)]
    while stack and len(problems) < _MAX_LIMIT_PROBLEMS:
        path, node, depth = stack.pop()
        where = path or "file"
        if isinstance(node, (dict, list)) and depth > MAX_NESTING:
            problems.append((where, f"nested {depth} levels deep; expected at most {MAX_NESTING} "
                                    f"levels of tables and arrays"))
        elif isinstance(node, dict):
            if len(node) > MAX_TABLE_KEYS:
                problems.append((where, f"has {len(node)} keys; expected at most {MAX_TABLE_KEYS}"))
                continue
            for key, value in node.items():
                if len(key) > MAX_KEY_CHARS:
                    problems.append((_join(path, shorten(key, 40)), f"key of {len(key)} characters; "
                                                                    f"expected at most {MAX_KEY_CHARS}"))
                else:
                    stack.append((_join(path, key), value, depth + 1))
        elif isinstance(node, list):
            if len(node) > MAX_ARRAY_ITEMS:
                problems.append((where, f"has {len(node)} elements; expected at most {MAX_ARRAY_ITEMS}"))
                continue
            stack.extend((f"{path}[{i}]", v, depth + 1) for i, v in enumerate(node))
        elif isinstance(node, str) and len(node) > MAX_STRING_CHARS:
            problems.append((where, f"text of {len(node)} characters ({_show(node)}); expected at most "
                                    f"{MAX_STRING_CHARS}"))
        elif isinstance(node, (int, float)) and not isinstance(node, bool):
            ipopt = path.startswith("solver.ipopt.")
            if isinstance(node, int):  # compared exactly, however many digits
                too_large = abs(node) > (_IPOPT_INT_MAX if ipopt else MAX_MAGNITUDE)
            else:
                too_large = not ipopt and math.isfinite(node) and abs(node) > MAX_MAGNITUDE
            if too_large:
                problems.append((where, f"{_show(node)} is too large; expected a number within "
                                        f"+-{_IPOPT_INT_MAX if ipopt else '1e15'}"))
    return problems


def _read_document(path: str) -> dict:
    """The TOML document of a scenario file, within the limits above (ScenarioError otherwise)."""
    if os.path.isdir(path):
        raise ScenarioError(path, [("file", "is a directory; expected a scenario file (.toml)")])
    try:
        with open(path, "rb") as fh:
            data = fh.read(MAX_FILE_BYTES + 1)
    except FileNotFoundError:
        raise ScenarioError(path, [("file", "no such file")]) from None
    except OSError as exc:
        raise ScenarioError(path, [("file", f"cannot read: {shorten(exc.strerror or str(exc))}")]) from None
    if len(data) > MAX_FILE_BYTES:
        raise ScenarioError(path, [("file", f"larger than {MAX_FILE_BYTES} bytes (1 MiB); expected a "
                                            f"scenario file of at most 1 MiB")])
    try:
        text = data.decode("utf-8")
    except UnicodeDecodeError as exc:
        raise ScenarioError(path, [("file", f"not UTF-8 text (byte {exc.start}); expected a TOML "
                                            f"text file")]) from None
    problems = _text_limit_problems(text)
    if problems:
        raise ScenarioError(path, problems)
    try:
        return tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        m = _TOML_POS_RE.match(str(exc))
        if m:
            where = f"line {m.group('line')}, column {m.group('col')}"
            raise ScenarioError(path, [(where, f"not valid TOML: {shorten(m.group('msg'), 200)}")]) from None
        raise ScenarioError(path, [("file", f"not valid TOML: {shorten(str(exc), 200)}")]) from None
    except (RecursionError, ValueError, OverflowError, MemoryError) as exc:
        # e.g. an integer of more than 4300 digits (Python's limit on converting text to int)
        raise ScenarioError(path, [("file", f"cannot be read as TOML ({type(exc).__name__}: "
                                            f"{shorten(str(exc))})")]) from None


def load_scenario(path) -> Scenario:
    """Read, validate and convert a scenario file to SI.

    Parameters
    ----------
    path : str or os.PathLike
        A TOML file in the format described in ``docs/scenario-format.md``, at most 1 MiB.

    Returns
    -------
    Scenario
        All values in SI; ``display_units`` remembers the unit the file used for each field,
        ``warnings`` lists implausible (but possible) data.

    Raises
    ------
    ScenarioError
        Listing every problem found (missing file, size and nesting limits, TOML syntax with
        line and column, unknown or missing keys, wrong types, bad units, bad tables,
        inconsistent mission). Never any other exception, and within a second for any file.
    """
    path = os.fspath(path)
    return _scenario_from_document(_read_document(path), path)


def _scenario_from_document(doc: dict, path: str, unit_hints: dict[str, str] | None = None) -> Scenario:
    """The reader proper: validate a parsed TOML document and build the :class:`Scenario`."""
    problems = _limit_problems(doc)
    if problems:
        raise ScenarioError(path, problems)
    r = _Reader(path, unit_hints)
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
    schedules = _read_schedules(r, doc, mission, limits, _top_mach(aircraft, propulsion, mission))
    _cross_checks(r, aircraft, propulsion, mission, limits, dt_k)
    if r.count:
        raise r.error()
    _plausibility(r, aircraft, propulsion, mission, dt_k)
    assert None not in (name, description, aircraft, propulsion, atmosphere, mission, limits, solver,
                        schedules)
    return Scenario(name=name, description=description, source_path=path, aircraft=aircraft,
                    propulsion=propulsion, atmosphere=atmosphere, mission=mission, limits=limits,
                    solver=solver, display_units=dict(r.units), schedules=schedules,
                    warnings=tuple(r.warnings), display_text=dict(r.text))


# ---- validated changes (Scenario.replace, Scenario.replace_si) --------------------------------

#: Short names of Scenario.replace -> (dotted field, SI unit of replace_si; "" for plain numbers).
_CHANGES = {
    "mass": ("aircraft.mass", "kg"),
    "fuel_capacity": ("aircraft.fuel_capacity", "kg"),
    "temperature_offset": ("atmosphere.temperature_offset", "K"),
    "thrust_scale": ("propulsion.thrust_scale", ""),
    "start_altitude": ("mission.start.altitude", "m"),
    "target_altitude": ("mission.target.altitude", "m"),
    "cost_weight": ("solver.cost_weight", "kg/s"),
    "time_limit": ("solver.time_limit", "s"),
    "profile": ("mission.profile", None),
    "acceleration_share": ("mission.acceleration_share", ""),
}


#: Words people use for the inputs -> the short name of :meth:`Scenario.replace` (and of
#: ``climbopt sweep --vary``), suggested when such a word is given.
CHANGE_ALIASES = {"weight": "mass", "gross_weight": "mass", "start_mass": "mass",
                  "temperature": "temperature_offset", "isa": "temperature_offset",
                  "delta_isa": "temperature_offset", "dt": "temperature_offset",
                  "thrust": "thrust_scale", "altitude": "target_altitude",
                  "level": "target_altitude", "flight_level": "target_altitude",
                  "speed": "target_speed", "mach": "target_speed", "cost": "cost_weight",
                  "time_cost": "cost_weight"}


def suggest_name(name: str, known) -> str:
    """' (did you mean 'x'?)' for a change or sweep name: a known alias, else a close match."""
    close = CHANGE_ALIASES.get(name.lower())
    if close not in known:
        matches = difflib.get_close_matches(name, list(known), n=1, cutoff=0.5)
        close = matches[0] if matches else None
    return f" (did you mean '{close}'?)" if close else ""


def _replaced(s: Scenario, changes: dict, si: bool) -> Scenario:
    """See :meth:`Scenario.replace`. The scenario is written back to a TOML document in SI (exact:
    every SI unit converts with the factor 1.0), edited and read again by the same reader as a
    file, so every check applies; the display units of the unchanged fields are kept. (Not the
    original file's document: a scenario changed in Python with ``dataclasses.replace``, e.g. a
    coarser solver grid, keeps that change.)"""
    where = s.source_path or "<scenario>"
    doc = _document_of(s)
    edits: dict[str, object] = {}
    cleared: list[str] = []
    for name, value in changes.items():
        fld, value, drop = _change(s, name, value, si)
        target = doc
        *parents, last = fld.split(".")
        for key in parents:
            target = target.setdefault(key, {})
            if not isinstance(target, dict):
                raise ScenarioError(where, [(fld, f"cannot change {fld}: {key} is not a table")])
        for key in drop:  # another kind of speed replaces the target's
            target.pop(key, None)
            cleared.append(f"{'.'.join(parents)}.{key}")
        target[last] = value
        edits[fld] = value
    hints = {k: v for k, v in s.display_units.items() if not _touches(k, [*edits, *cleared])}
    try:
        new = _scenario_from_document(doc, where, unit_hints=hints)
    except ScenarioError as exc:
        note = ", ".join(f"{f} = {_show(v)}" for f, v in edits.items())
        raise ScenarioError(exc.path, [(f, f"{m} (after the change {note})") for f, m in exc.problems]) from None
    changed = [*edits, *cleared]
    units = dict(hints)
    units.update({k: v for k, v in new.display_units.items() if _touches(k, changed)})
    text = {k: v for k, v in s.display_text.items() if not _touches(k, changed)}
    text.update({k: v for k, v in new.display_text.items() if _touches(k, changed)})
    return dataclasses.replace(new, source_path=s.source_path, display_units=units, display_text=text)


def _touches(fld: str, changed) -> bool:
    return any(fld == c or fld.startswith(c + ".") or fld.startswith(c + "[") for c in changed)


def _change(s: Scenario, name: str, value, si: bool) -> tuple[str, object, tuple[str, ...]]:
    """(dotted field, value as written in a file, speed keys to remove) of one change."""
    where = s.source_path or "<scenario>"
    kind = s.mission.target.speed_kind
    if name == "target_speed":
        fld, unit, drop = f"mission.target.{kind}", ("" if kind == "mach" else "m/s"), ()
    elif name.startswith("target_") and name[7:] in _SPEED_KINDS:
        fld, drop = f"mission.target.{name[7:]}", tuple(k for k in _SPEED_KINDS if k != name[7:])
        unit = "" if name == "target_mach" else "m/s"
    elif name in _CHANGES:
        (fld, unit), drop = _CHANGES[name], ()
    elif "." in name and not si:
        return name, value, ()
    else:
        known = ["target_speed", "target_mach", "target_tas", "target_cas", "target_eas", *_CHANGES]
        hint = suggest_name(name, known)
        extra = "" if si else " or a dotted field name such as 'limits.max_mach'"
        raise ScenarioError(where, [(name, f"unknown change {_show(name)}{hint}; expected one of "
                                           f"{', '.join(known)}{extra}")])
    if si:
        if unit is None or isinstance(value, bool) or not isinstance(value, (int, float)):
            raise ScenarioError(where, [(fld, f"replace_si takes SI numbers, got {_show(value)} "
                                              f"for {name}; use replace() for text")])
        value = float(value) if not unit else f"{float(value)!r} {unit}"
    return fld, value, drop


def _si_text(value: float, unit: str) -> str:
    """An SI value as scenario text; read back exactly (the SI units' factor is 1.0)."""
    return f"{float(value)!r} {unit}"


def _table1d_doc(table: Table1D, unit: str = "") -> dict:
    out = {"mach": list(table.mach), "values": list(table.values)}
    if unit:
        out["unit"] = unit
    return out


def _rating_doc(rating: Rating) -> dict:
    main = _main_table(rating)
    out: dict = {"kind": rating.kind, "mach": list(main.mach),
                 "altitude": {"unit": "m", "values": list(main.altitude_m)}}
    rows = [list(row) for row in main.values]
    if rating.kind == "jet":
        out["thrust"] = {"unit": "N", "values": rows}
    else:
        out["shaft_power"] = {"unit": "W", "values": rows}
        out["propeller_efficiency"] = _table1d_doc(rating.propeller_efficiency)
    if rating.fuel_flow_kg_s is not None:
        out["fuel_flow"] = {"unit": "kg/s", "values": [list(row) for row in rating.fuel_flow_kg_s.values]}
    elif rating.tsfc_kg_per_n_s is not None:
        out["tsfc"] = _si_text(rating.tsfc_kg_per_n_s, "kg/N/s")
    else:
        out["psfc"] = _si_text(rating.psfc_kg_per_w_s, "kg/W/s")
    return out


def _point_doc(point: FlightPoint) -> dict:
    speed = point.speed_value if point.speed_kind == "mach" else _si_text(point.speed_value, "m/s")
    return {"altitude": _si_text(point.altitude_m, "m"), point.speed_kind: speed,
            "flight_path_angle": _si_text(point.flight_path_angle_rad, "rad")}


def _atmosphere_doc(atm: AtmosphereSpec) -> dict:
    out: dict = {"temperature_offset": _si_text(atm.temperature_offset_k, "K")}
    w = atm.wind
    if w is not None and not w.altitude_m:
        out["wind"] = {"along_track": _si_text(w.along_track_m_s[0], "m/s")}
    elif w is not None:
        out["wind"] = {"altitude": {"unit": "m", "values": list(w.altitude_m)},
                       "along_track": {"unit": "m/s", "values": list(w.along_track_m_s)}}
    return out


def _optional(pairs) -> dict:
    """A table of the pairs whose value is not None."""
    return {k: v for k, v in pairs if v is not None}


def _document_of(s: Scenario) -> dict:
    """The scenario as a TOML document (nested dicts) in SI units; reads back to an equal
    :class:`Scenario` (display units aside)."""
    ac, d, prop, mis, lim, sol = s.aircraft, s.aircraft.drag, s.propulsion, s.mission, s.limits, s.solver
    drag: dict = {"model": d.kind}
    if d.kind == "parabolic":
        drag.update(mach=list(d.cd0.mach), cd0=list(d.cd0.values), k=list(d.k.values))
    else:
        drag.update(mach=list(d.cd_mach), cl=list(d.cd_cl), cd=[list(row) for row in d.cd_table])
    if d.lift_slope_per_rad is not None:
        drag["lift_slope"] = _table1d_doc(d.lift_slope_per_rad, "1/rad")
    si = _si_text
    aircraft = _optional([("name", ac.name), ("reference_area", si(ac.reference_area_m2, "m^2")),
                          ("mass", si(ac.mass_kg, "kg")), ("drag", drag), ("cl_max", _table1d_doc(ac.cl_max)),
                          ("fuel_capacity", None if ac.fuel_capacity_kg is None else si(ac.fuel_capacity_kg, "kg"))])
    propulsion = {"default_rating": prop.default_rating, "throttle_min": prop.throttle_min,
                  "throttle_max": prop.throttle_max, "thrust_alignment": prop.thrust_alignment,
                  "thrust_scale": prop.thrust_scale,
                  "ratings": {name: _rating_doc(rt) for name, rt in prop.ratings.items()}}
    rating = mis.rating
    if mis.rating_schedule:
        rating = [_optional([("rating", st.rating),
                             ("until", None if st.until_m is None else si(st.until_m, "m")),
                             ("thrust_fraction", st.thrust_fraction)])
                  for st in mis.rating_schedule]
    mission = _optional([("start", _point_doc(mis.start)), ("target", _point_doc(mis.target)),
                         ("rating", rating), ("profile", mis.profile),
                         ("acceleration_share", mis.acceleration_share),
                         ("dash_distance", None if mis.dash_distance_m is None else si(mis.dash_distance_m, "m"))])
    rc = lim.cas_restriction
    limits = _optional([
        ("max_dynamic_pressure", None if lim.max_dynamic_pressure_pa is None else si(lim.max_dynamic_pressure_pa, "Pa")),
        ("max_mach", lim.max_mach), ("max_cas", None if lim.max_cas_m_s is None else si(lim.max_cas_m_s, "m/s")),
        ("min_altitude", si(lim.min_altitude_m, "m")),
        ("max_altitude", None if lim.max_altitude_m is None else si(lim.max_altitude_m, "m")),
        ("max_load_factor", lim.max_load_factor), ("buffet_load_factor", lim.buffet_load_factor),
        ("cas_restriction", None if rc is None else {"cas": si(rc[0], "m/s"), "below": si(rc[1], "m")})])
    solver = {"grid_altitude_points": sol.grid_altitude_points, "grid_speed_points": sol.grid_speed_points,
              "intervals": sol.intervals, "transcription": sol.transcription,
              "mesh_tolerance": sol.mesh_tolerance, "max_mesh_refinements": sol.max_mesh_refinements,
              "cost_weight": si(sol.cost_weight_kg_per_s, "kg/s"), "time_limit": si(sol.time_limit_s, "s"),
              "ipopt": dict(sol.ipopt)}
    if sol.compile is not None:
        solver["compile"] = sol.compile
    doc = {"scenario": {"name": s.name, "description": s.description}, "aircraft": aircraft,
           "propulsion": propulsion, "atmosphere": _atmosphere_doc(s.atmosphere),
           "mission": mission, "limits": limits, "solver": solver}
    if s.schedules:
        doc["schedules"] = [_optional([
            ("name", sc.name), ("cas", si(sc.cas_m_s, "m/s")), ("mach", sc.mach),
            ("cas_below_restriction", None if sc.cas_below_restriction_m_s is None
             else si(sc.cas_below_restriction_m_s, "m/s")),
            ("acceleration_share", sc.acceleration_share)]) for sc in s.schedules]
    return doc


# ---- IPOPT options, checked by IPOPT itself ----------------------------------------------------


def check_solver_options(scenario: Scenario) -> None:
    """Raise :class:`ScenarioError` when IPOPT rejects a name or value of ``[solver.ipopt]``
    (see :func:`ipopt_option_problems`). ``climbopt check`` runs it; it needs CasADi."""
    problems = ipopt_option_problems(scenario.solver.ipopt)
    if problems:
        raise ScenarioError(scenario.source_path or "<scenario>", problems)


def ipopt_option_problems(options: dict) -> list[tuple[str, str]]:
    """``(field, message)`` for each IPOPT option that IPOPT does not accept.

    IPOPT is asked, through CasADi, with a one-variable problem (minimise (x - 1)^2) built and
    solved with each option alone, then with all together: an unknown name or a bad value makes
    CasADi raise, or IPOPT return ``Invalid_Option``. IPOPT's own explanation (printed by its C++
    code) is captured and turned into the message. About 2 ms per option after the first.
    """
    if not options:
        return []
    problems = []
    for key, value in options.items():
        message = _ipopt_rejects({key: value})
        if message:
            problems.append((f"solver.ipopt.{key}", message))
    if not problems and len(options) > 1:
        message = _ipopt_rejects(options)
        if message:
            problems.append(("solver.ipopt", message))
    return problems


def _ipopt_rejects(options: dict) -> str | None:
    """Why IPOPT rejects ``options`` (None when it accepts them)."""
    error, status, printed = _ipopt_try(options, print_level=0)
    if error is None and status == "Invalid_Option" and "Setting:" not in printed:
        _, _, printed = _ipopt_try(options, print_level=5)  # IPOPT says why only when verbose
    return _ipopt_message(error, status, printed)


def _ipopt_try(options: dict, print_level: int) -> tuple[str | None, str, str]:
    """(CasADi's error text or None, IPOPT's return status, what IPOPT printed) of building and
    solving min (x - 1)^2 with ``options``."""
    import casadi as ca

    x = ca.MX.sym("x")
    opts = {"ipopt": {"sb": "yes", "print_level": print_level, **options}, "print_time": False,
            "error_on_fail": False}
    if print_level:
        opts["ipopt"]["print_level"] = print_level
    with _captured_native_output() as printed:
        try:
            solver = ca.nlpsol("option_check", "ipopt", {"x": x, "f": (x - 1) ** 2}, opts)
            solver(x0=0.0)
            status, error = solver.stats().get("return_status", ""), None
        except Exception as exc:  # CasADi raises RuntimeError for unknown names and bad values
            status, error = "", str(exc)
    return error, status, printed[0] if printed else ""


def _ipopt_message(error: str | None, status: str, printed: str) -> str | None:
    """Our message from CasADi's exception text, IPOPT's status and IPOPT's printed text."""
    if error is not None and "No such IPOPT option" in error:
        return "not an IPOPT option (see the IPOPT documentation, 'Options' section)"
    if error is not None and 'Assertion "is_' in error:
        wanted = re.search(r'Assertion "is_(\w+)\(\)"', error).group(1)
        words = {"int": "a whole number", "double": "a number", "string": "a string"}.get(wanted, wanted)
        return f"IPOPT expects {words} for this option"
    if error is None and status != "Invalid_Option":
        return None
    lines = [ln.strip() for ln in printed.splitlines() if ln.strip()]
    setting = next((ln for ln in lines if ln.startswith("Setting:")), None)
    if setting is None:
        detail = next((ln.split(":", 1)[1].strip() for ln in lines if ln.startswith("Exception message:")), "")
        return shorten(f"IPOPT rejects the options ({status or 'error'}){': ' + detail if detail else ''}", 200)
    m = re.match(r'Setting: "(.*)" is not a valid setting for Option: (\S+?)\.', setting)
    message = f"{_show(m.group(1))} is not a valid setting" if m else shorten(setting, 120)
    if "Valid Settings:" in lines:
        start = lines.index("Valid Settings:") + 1
        valid = [ln.split(" ", 1)[0] for ln in lines[start:] if not ln.startswith("Default")][:12]
        message += f"; valid settings: {', '.join(valid)}"
    bounds = next((ln for ln in lines if re.match(r"^[-+]?(inf|[\d.e+-]+)\s*<=?\s*\(", ln)), None)
    if bounds:
        message += f"; IPOPT's range: {re.sub(r'[(].*[)]', 'value', bounds)}"
    return shorten(message, 300)


@contextlib.contextmanager
def _captured_native_output():
    """Send what is printed -- by Python (sys.stdout, sys.stderr) and by native code (file
    descriptors 1 and 2) -- to buffers while the block runs (IPOPT explains rejected options
    there); yields a list that afterwards holds the text."""
    import ctypes
    import tempfile

    try:
        libc = ctypes.CDLL(None)
    except OSError:  # pragma: no cover - no C library handle on this platform
        libc = None
    sys.stdout.flush()
    sys.stderr.flush()
    box: list[str] = []
    python_side = io.StringIO()  # CasADi routes IPOPT's printing to Python's sys.stdout
    with tempfile.TemporaryFile() as tmp:
        saved = (os.dup(1), os.dup(2))
        try:
            if libc is not None:
                libc.fflush(None)
            os.dup2(tmp.fileno(), 1)
            os.dup2(tmp.fileno(), 2)
            with contextlib.redirect_stdout(python_side), contextlib.redirect_stderr(python_side):
                yield box
        finally:
            if libc is not None:
                libc.fflush(None)
            os.dup2(saved[0], 1)
            os.dup2(saved[1], 2)
            os.close(saved[0])
            os.close(saved[1])
            tmp.seek(0)
            native = tmp.read(50_000).decode("utf-8", errors="replace")
            box.append(python_side.getvalue()[:50_000] + native)
