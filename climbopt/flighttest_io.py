"""Flight-test input: the test plan (TOML) and one CSV time history per test point, read with
units at the edge and validated as strictly as a scenario; every problem found is reported at
once, each naming the file, the field or the line and column, and the reason. Also the CSV
writers of the reduction's outputs. Formats: docs/flighttest-format.md.

CSV columns are named ``<quantity>_<unit>`` (``pressure_altitude_ft``, ``cas_kt``,
``oat_degC``) or, for plain numbers, ``<quantity>`` (``mach``, ``load_factor``); see
:data:`COLUMNS`. Units are read by pint through :mod:`climbopt.units` (absolute temperatures,
which that module leaves out on purpose, through its registry here).
"""

from __future__ import annotations

import csv
import difflib
import math
import os
import tomllib
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from climbopt.flighttest import FlightHistory
from climbopt.units import UnitError, parse_quantity, ureg

__all__ = ["COLUMNS", "KINDS", "FlightTestError", "FlightTestPlan", "PlannedPoint",
           "load_test_plan",
           "read_history", "write_history_csv"]

#: Manoeuvre kinds of a test point.
KINDS = ("level_acceleration", "sawtooth_climb")

#: CSV quantity -> (dimension for climbopt.units, or "temperature" / "" for a plain number,
#: required, allowed range in SI (low, high), description).
COLUMNS = {
    "time": ("time", True, (-math.inf, math.inf), "time"),
    "pressure_altitude": ("length", True, (-600.0, 25_000.0), "pressure altitude"),
    "cas": ("speed", False, (1.0, 500.0), "calibrated airspeed"),
    "mach": ("", False, (0.01, 3.0), "Mach number"),
    "oat": ("temperature", True, (150.0, 350.0), "static (outside) air temperature"),
    "gross_weight": ("mass", False, (100.0, 1.0e6), "gross weight (as mass)"),
    "fuel_used": ("mass", False, (-1.0e3, 5.0e5), "fuel used since the start"),
    "load_factor": ("", False, (0.2, 5.0), "normal load factor"),
    "heading": ("angle", False, (-2.0 * math.pi, 4.0 * math.pi), "heading"),
}

#: At most this many bad lines of one column are listed one by one.
_MAX_LISTED = 3

#: A level acceleration holds pressure altitude within this band [m] (500 ft); a sawtooth climb
#: rises by at least this much.
_LEVEL_BAND_M = 152.4


class FlightTestError(ValueError):
    """A test plan or its data are wrong: ``problems`` is a list of ``(file, where, reason)``."""

    def __init__(self, problems: list[tuple[str, str, str]]):
        self.problems = list(problems)
        super().__init__("\n".join(f"{f}: {w}: {m}" if w else f"{f}: {m}"
                                   for f, w, m in self.problems))


@dataclass(frozen=True)
class PlannedPoint:
    """One entry of ``[[test_point]]``: CSV path, manoeuvre kind, name, optional initial gross
    mass [kg] (for a ``fuel_used`` column)."""

    name: str
    file: str
    kind: str
    initial_mass_kg: float | None = None


@dataclass
class FlightTestPlan:
    """A test plan in SI (see docs/flighttest-format.md); ``histories`` holds the data read."""

    path: str
    name: str
    description: str
    aircraft_name: str
    reference_area_m2: float
    standard_mass_kg: float
    induced_drag_factor: float | None
    predicted_path: str | None
    rating: str | None
    smoothing_window_s: float
    max_gap_s: float
    mach_degree: int | None
    altitude_degree: int | None
    bootstrap: int
    climb_bootstrap: int
    seed: int
    points: list[PlannedPoint]
    predicted: object = None  # climbopt.scenario.Scenario
    histories: list[FlightHistory] = field(default_factory=list)


# ------------------------------------------------------------------------------ plan reader

_SECTIONS = {
    "test_plan": ("name", "description"),
    "aircraft": ("name", "reference_area", "standard_weight", "induced_drag_factor"),
    "predicted": ("scenario", "rating"),
    "reduction": ("smoothing_window", "max_gap", "mach_degree", "altitude_degree", "bootstrap",
                  "climb_bootstrap", "seed"),
}
_POINT_KEYS = ("file", "kind", "name", "initial_gross_weight")


class _Plan:
    """Collects problems while reading one test plan (field-by-field, carrying on)."""

    def __init__(self, path: str):
        self.path = path
        self.problems: list[tuple[str, str, str]] = []

    def problem(self, where: str, message: str, file: str | None = None) -> None:
        self.problems.append((file or self.path, where, message))

    def keys(self, node: dict, where: str, allowed) -> None:
        for key in node:
            if key not in allowed:
                close = difflib.get_close_matches(key, allowed, n=1, cutoff=0.6)
                hint = f" (did you mean '{close[0]}'?)" if close else ""
                self.problem(f"{where}.{key}" if where else key,
                             f"unknown key '{key}'{hint}; known keys here: {', '.join(allowed)}")

    def quantity(self, node, key, where, dim, *, required=True, positive=True):
        fld = f"{where}.{key}"
        if key not in node:
            if required:
                self.problem(fld, f"missing; expected a {dim.replace('_', ' ')} with a unit")
            return None
        try:
            value = parse_quantity(node[key], dim, fld)
        except UnitError as exc:
            self.problem(fld, exc.message)
            return None
        if positive and not value > 0.0:
            self.problem(fld, f"got {node[key]!r}; expected a positive value")
            return None
        return value

    def integer(self, node, key, where, default, low, high):
        raw = node.get(key, default)
        if isinstance(raw, bool) or not isinstance(raw, int) or not low <= raw <= high:
            self.problem(f"{where}.{key}", f"got {raw!r}; expected a whole number from {low} "
                                           f"to {high}")
            return default
        return raw

    def string(self, node, key, where, *, required=True, choices=None):
        fld = f"{where}.{key}"
        raw = node.get(key)
        if raw is None:
            if required:
                self.problem(fld, "missing" + (f"; expected one of {', '.join(choices)}"
                                               if choices else "; expected a string"))
            return None
        if not isinstance(raw, str):
            self.problem(fld, f"expected a string, got {raw!r}")
            return None
        if choices and raw not in choices:
            close = difflib.get_close_matches(raw, choices, n=1, cutoff=0.5)
            hint = f" (did you mean '{close[0]}'?)" if close else ""
            self.problem(fld, f"got {raw!r}{hint}; expected one of {', '.join(choices)}")
            return None
        return raw


def _read_toml(path: str) -> dict:
    try:
        with open(path, "rb") as fh:
            return tomllib.load(fh)
    except FileNotFoundError:
        raise FlightTestError([(path, "", "no such file")]) from None
    except (OSError, UnicodeDecodeError) as exc:
        raise FlightTestError([(path, "", f"cannot read: {exc}")]) from None
    except tomllib.TOMLDecodeError as exc:
        raise FlightTestError([(path, "", f"not valid TOML: {exc}")]) from None


def _sections(r: _Plan, doc: dict) -> dict:
    r.keys(doc, "", tuple(_SECTIONS) + ("test_point",))
    out = {}
    for name, allowed in _SECTIONS.items():
        node = doc.get(name, {})
        if not isinstance(node, dict):
            r.problem(name, f"expected a table [{name}]")
            node = {}
        r.keys(node, name, allowed)
        out[name] = node
    if "aircraft" not in doc:
        r.problem("aircraft", "missing section [aircraft] (reference_area, standard_weight)")
    return out


def _read_predicted(r: _Plan, node: dict):
    """(path, scenario, rating) of ``[predicted]``, or Nones."""
    if not node:
        return None, None, None
    rel = r.string(node, "scenario", "predicted")
    if rel is None:
        return None, None, None
    from climbopt.scenario import ScenarioError, load_scenario

    path = os.path.join(os.path.dirname(os.path.abspath(r.path)), rel)
    try:
        scenario = load_scenario(path)
    except ScenarioError as exc:
        for fld, msg in exc.problems:
            r.problem(f"predicted.scenario ({rel}): {fld}", msg)
        return path, None, None
    rating = r.string(node, "rating", "predicted", required=False,
                      choices=tuple(scenario.propulsion.ratings))
    rating = rating or scenario.mission.rating or scenario.propulsion.default_rating
    return path, scenario, rating


def _read_points(r: _Plan, doc: dict) -> list[PlannedPoint]:
    raw = doc.get("test_point")
    if not isinstance(raw, list) or not raw or not all(isinstance(p, dict) for p in raw):
        r.problem("test_point", "missing or empty; expected one or more [[test_point]] tables "
                                "with file and kind")
        return []
    points = []
    for i, node in enumerate(raw):
        where = f"test_point[{i + 1}]"
        r.keys(node, where, _POINT_KEYS)
        file = r.string(node, "file", where)
        kind = r.string(node, "kind", where, choices=KINDS)
        name = r.string(node, "name", where, required=False)
        mass = r.quantity(node, "initial_gross_weight", where, "mass", required=False)
        if file is not None and kind is not None:
            points.append(PlannedPoint(name or Path(file).stem, file, kind, mass))
    names = [p.name for p in points]
    for n in sorted({n for n in names if names.count(n) > 1}):
        r.problem("test_point", f"the name {n!r} is used more than once")
    return points


def load_test_plan(path) -> FlightTestPlan:
    """Read and validate a test plan and every CSV it names; SI values.

    Raises :class:`FlightTestError` listing every problem (plan fields, predicted scenario,
    each CSV's header, units, lines, time order, gaps, ranges, manoeuvre kind).
    """
    path = os.fspath(path)
    doc = _read_toml(path)
    r = _Plan(path)
    sec = _sections(r, doc)
    ac, red = sec["aircraft"], sec["reduction"]
    area = r.quantity(ac, "reference_area", "aircraft", "area")
    mass = r.quantity(ac, "standard_weight", "aircraft", "mass")
    k = ac.get("induced_drag_factor")
    if k is not None and (isinstance(k, bool) or not isinstance(k, (int, float)) or not k > 0):
        r.problem("aircraft.induced_drag_factor", f"got {k!r}; expected a positive number")
        k = None
    pred_path, scenario, rating = _read_predicted(r, sec["predicted"])
    if not sec["predicted"] and k is None:
        r.problem("aircraft.induced_drag_factor", "missing; without a [predicted] scenario "
                  "the weight correction needs the induced-drag factor k")
    if scenario is not None and area is not None:
        s_pred = scenario.aircraft.reference_area_m2
        if abs(area - s_pred) > 1e-3 * s_pred:
            r.problem("aircraft.reference_area", f"{area:.4g} m^2 differs from the predicted "
                                                 f"scenario's {s_pred:.4g} m^2")
    window = r.quantity(red, "smoothing_window", "reduction", "time", required=False) or 20.0
    gap = r.quantity(red, "max_gap", "reduction", "time", required=False) or 5.0
    degrees = [r.integer(red, k_, "reduction", None, 0, 6) if k_ in red else None
               for k_ in ("mach_degree", "altitude_degree")]
    plan = FlightTestPlan(
        path, r.string(sec["test_plan"], "name", "test_plan", required=False) or Path(path).stem,
        r.string(sec["test_plan"], "description", "test_plan", required=False) or "",
        r.string(ac, "name", "aircraft", required=False) or "", area or math.nan,
        mass or math.nan, k, pred_path, rating, window, gap, degrees[0], degrees[1],
        r.integer(red, "bootstrap", "reduction", 400, 20, 100_000),
        r.integer(red, "climb_bootstrap", "reduction", 40, 0, 10_000),
        r.integer(red, "seed", "reduction", 0, 0, 2**32 - 1), _read_points(r, doc), scenario)
    folder = os.path.dirname(path)  # file names in messages as the user would type them
    for p in plan.points:
        csv_path = os.path.join(folder, p.file)
        history, problems = read_history(csv_path, p, max_gap_s=gap, min_duration_s=window)
        r.problems += problems
        if history is not None:
            plan.histories.append(history)
    if r.problems:
        raise FlightTestError(r.problems)
    return plan


# ------------------------------------------------------------------------------ CSV reader


def _parse_header(names: list[str], file: str):
    """{quantity: (column index, column name, SI converter)} and problems for a CSV header."""
    problems, columns, seen = [], {}, set()
    for i, raw in enumerate(names):
        name = raw.strip()
        qty = next((q for q in sorted(COLUMNS, key=len, reverse=True)
                    if name == q or name.startswith(q + "_")), None)
        if qty is None:
            close = difflib.get_close_matches(name, list(COLUMNS), n=1, cutoff=0.5)
            hint = f" (did you mean '{close[0]}_...'?)" if close else ""
            problems.append((file, f"header, column {i + 1}", f"unknown column {name!r}{hint}; "
                             f"known quantities: {', '.join(COLUMNS)}"))
            continue
        if qty in seen:
            problems.append((file, f"column {name}", f"{qty} is given twice"))
            continue
        seen.add(qty)
        try:
            columns[qty] = (i, name, _converter(COLUMNS[qty][0], name[len(qty) + 1:], name))
        except UnitError as exc:
            problems.append((file, f"column {name}", exc.message))
    for qty, (_, required, _, words) in COLUMNS.items():
        if required and qty not in seen:
            problems.append((file, "header", f"missing column {qty}_<unit> ({words})"))
    for a, b in (("cas", "mach"), ("gross_weight", "fuel_used")):
        if a in seen and b in seen:
            problems.append((file, "header", f"give {a} or {b}, not both"))
        elif a not in seen and b not in seen:
            problems.append((file, "header", f"missing column {a}_<unit> or {b}"
                             + ("" if COLUMNS[b][0] == "" else "_<unit>")))
    return columns, problems


def _converter(dim: str, unit: str, name: str):
    """Function converting column values to SI (raises UnitError for a bad unit)."""
    if dim == "":
        if unit:
            raise UnitError(name, f"a plain number takes no unit; name the column "
                                  f"'{name[:-len(unit) - 1]}'")
        return lambda x: x
    if not unit:
        raise UnitError(name, "missing unit: name the column <quantity>_<unit>, e.g. "
                              "'pressure_altitude_ft'")
    if dim == "temperature":
        try:
            u = ureg.parse_units(unit)
        except Exception:
            raise UnitError(name, f"unknown temperature unit {unit!r}; expected degC, degF or "
                                  f"K") from None
        if ureg.Quantity(1.0, u).dimensionality != ureg.kelvin.dimensionality:
            raise UnitError(name, f"unit {unit!r} is not a temperature; expected degC, degF or K")
        return lambda x: ureg.Quantity(np.asarray(x), u).to("kelvin").magnitude
    from climbopt.units import unit_factor

    factor = unit_factor(unit, dim, name)
    return lambda x: np.asarray(x) * factor


def _read_rows(path: str, file: str):
    """(header, [(line number, fields)]) of a CSV skipping '#' comments, or raise problems."""
    try:
        with open(path, newline="", encoding="utf-8") as fh:
            lines = list(enumerate(fh, start=1))
    except FileNotFoundError:
        raise FlightTestError([(file, "", "no such file")]) from None
    except (OSError, UnicodeDecodeError) as exc:
        raise FlightTestError([(file, "", f"cannot read: {exc}")]) from None
    body = [(n, ln) for n, ln in lines if ln.strip() and not ln.lstrip().startswith("#")]
    if not body:
        raise FlightTestError([(file, "", "no header line and no data")])
    rows = [(n, next(csv.reader([ln]))) for n, ln in body]
    return rows[0][1], rows[1:]


def _values(rows, col: int, name: str, file: str, ncols: int):
    """Column as floats; NaN where unreadable; problems for those lines (capped)."""
    out = np.full(len(rows), np.nan)
    bad = []
    for j, (line, fields) in enumerate(rows):
        if len(fields) != ncols:
            continue
        text = fields[col].strip()
        try:
            out[j] = float(text)
        except ValueError:
            bad.append((file, f"line {line}, column {name}", f"not a number: {text!r}"))
            continue
        if not math.isfinite(out[j]):
            bad.append((file, f"line {line}, column {name}", f"missing value ({text or 'empty'})"))
            out[j] = np.nan
    return out, _capped(bad, file, f"column {name}")


def _capped(problems, file, where):
    if len(problems) <= _MAX_LISTED:
        return problems
    return problems[:_MAX_LISTED] + [(file, where, f"... and {len(problems) - _MAX_LISTED} more "
                                                   "bad lines")]


def read_history(path, point: PlannedPoint, *, max_gap_s: float = 5.0, min_duration_s: float = 0.0):
    """Read one test point's CSV into a :class:`FlightHistory` (SI).

    Returns ``(history or None, problems)``; problems name the file, the line and column."""
    file = os.fspath(path)
    try:
        header, rows = _read_rows(file, file)
    except FlightTestError as exc:
        return None, exc.problems
    columns, problems = _parse_header(header, file)
    for line, fields in rows:
        if len(fields) != len(header):
            problems.append((file, f"line {line}", f"{len(fields)} values; the header has "
                                                   f"{len(header)} columns"))
    problems = _capped(problems, file, "lines")
    data = {}
    for qty, (col, name, conv) in columns.items():
        raw, bad = _values(rows, col, name, file, len(header))
        problems += bad
        si = conv(raw)
        lo, hi = COLUMNS[qty][2]
        out = [(file, f"line {rows[j][0]}, column {name}", f"{raw[j]:g} is outside the "
                f"plausible range of {COLUMNS[qty][3]}") for j in np.flatnonzero(
                    np.isfinite(si) & ((si < lo) | (si > hi)))]
        problems += _capped(out, file, f"column {name}")
        data[qty] = si
    if "time" in columns and len(rows) >= 2:
        problems += _check_time(data["time"], rows, columns["time"][1], file, max_gap_s,
                                min_duration_s)
    elif "time" in columns:
        problems.append((file, "", f"{len(rows)} data lines; a test point needs a time history"))
    if point.kind and "pressure_altitude" in data and not problems:
        problems += _check_kind(point.kind, data["pressure_altitude"], file)
    if "fuel_used" in columns and point.initial_mass_kg is None:
        problems.append((file, "column " + columns["fuel_used"][1], "a fuel_used column needs "
                         "initial_gross_weight in the test plan's [[test_point]]"))
    if problems:
        return None, problems
    mass = (data["gross_weight"] if "gross_weight" in data
            else point.initial_mass_kg - data["fuel_used"])
    return FlightHistory(point.name, point.kind, data["time"], data["pressure_altitude"],
                         data["oat"], mass, cas_m_s=data.get("cas"), mach=data.get("mach"),
                         load_factor=data.get("load_factor"), heading_rad=data.get("heading")), []


def _check_time(t, rows, name, file, max_gap_s, min_duration_s):
    problems = []
    dt = np.diff(t)
    for j in np.flatnonzero(~(dt > 0))[:_MAX_LISTED]:
        problems.append((file, f"line {rows[j + 1][0]}, column {name}", f"time {t[j + 1]:g} s "
                         f"does not follow {t[j]:g} s (time must increase)"))
    n_back = int(np.sum(~(dt > 0)))
    if n_back > _MAX_LISTED:
        problems.append((file, f"column {name}", f"... and {n_back - _MAX_LISTED} more lines "
                                                 "out of time order"))
    for j in np.flatnonzero(dt > max_gap_s)[:_MAX_LISTED]:
        problems.append((file, f"line {rows[j + 1][0]}, column {name}", f"gap of {dt[j]:g} s "
                         f"after {t[j]:g} s; at most {max_gap_s:g} s allowed (reduction."
                         "max_gap)"))
    if not problems and t[-1] - t[0] < min_duration_s:
        problems.append((file, f"column {name}", f"the history lasts {t[-1] - t[0]:g} s, less "
                         f"than one smoothing window ({min_duration_s:g} s)"))
    return problems


def _check_kind(kind, hp, file):
    """The pressure-altitude history must fit the manoeuvre kind."""
    if kind == "level_acceleration" and np.ptp(hp) > _LEVEL_BAND_M:
        return [(file, "column pressure_altitude", f"pressure altitude spans {np.ptp(hp):.0f} m; "
                 f"a level acceleration holds it within {_LEVEL_BAND_M:.0f} m (500 ft)")]
    if kind == "sawtooth_climb" and hp[-1] - hp[0] < _LEVEL_BAND_M:
        return [(file, "column pressure_altitude", f"pressure altitude rises by "
                 f"{hp[-1] - hp[0]:.0f} m; a sawtooth climb rises by at least "
                 f"{_LEVEL_BAND_M:.0f} m (500 ft)")]
    return []


# ------------------------------------------------------------------------------ writers


def write_history_csv(path, history: FlightHistory, comments: list[str]) -> None:
    """Write a history in the CSV format read here, in US flight-test units (ft, kt, degC, lb,
    deg), with ``comments`` as '#' lines on top."""
    from climbopt.units import kg_to_lb, m_s_to_kt, m_to_ft

    cols = {"time_s": history.time_s, "pressure_altitude_ft": m_to_ft(history.pressure_altitude_m)}
    if history.cas_m_s is not None:
        cols["cas_kt"] = m_s_to_kt(history.cas_m_s)
    else:
        cols["mach"] = history.mach
    cols["oat_degC"] = np.asarray(history.oat_k) - 273.15
    cols["gross_weight_lb"] = kg_to_lb(history.mass_kg)
    if history.load_factor is not None:
        cols["load_factor"] = history.load_factor
    if history.heading_rad is not None:
        cols["heading_deg"] = np.degrees(history.heading_rad)
    digits = {"time_s": 2, "pressure_altitude_ft": 1, "cas_kt": 2, "mach": 4, "oat_degC": 2,
              "gross_weight_lb": 0, "load_factor": 4, "heading_deg": 2}
    lines = [f"# {c}" for c in comments] + [",".join(cols)]
    arr = [np.asarray(v, dtype=float) for v in cols.values()]
    for i in range(arr[0].size):
        lines.append(",".join(f"{a[i]:.{digits[k]}f}" for k, a in zip(cols, arr, strict=True)))
    Path(path).write_text("\n".join(lines) + "\n", encoding="utf-8")


