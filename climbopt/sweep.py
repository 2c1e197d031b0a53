"""Trade studies: solve one scenario over a grid (or a list) of changed numeric inputs.

What a sweep does
-----------------
1. :func:`parse_variation` reads ``name=spec`` texts (``mass=60 t:80 t:5`` is a range of five
   evenly spaced values, ends included; ``temperature_offset=-10,0,10,20 K`` is a list; a number
   without a unit takes the unit written elsewhere in the same spec, e.g. ``mass=60:80:5 t``).
   A dimensional input with no unit at all is refused (``mass=13:16:4`` would otherwise be read
   as 13 kg), with a message showing how to write it.
2. :func:`plan_sweep` expands the variations into cases, as the full grid (the last variation
   varies fastest) or, with ``zip_values=True``, as the given combinations. When the cost weight
   is varied (objective "weighted"), two single-objective cases per combination of the other
   inputs are added at the end ("anchors": minimum time and minimum fuel), which mark the ends of
   the time-fuel trade-off curve.
3. :func:`run_sweep` runs the cases not yet in the table, serially, on a local process pool
   (default, all cores) or on a Dask distributed cluster, and appends one CSV row per finished
   case (flushed at once), so an interrupted sweep loses at most the cases in flight. Each case
   has a key, a hash of everything that determines its result (the whole scenario in SI, the
   changed values, the method and the objective); a re-run skips keys already in the table. A
   failing case is recorded with its status and error text and the sweep goes on. At the end the
   table is rewritten sorted by case order.
4. :func:`tradeoff_curve` orders the weighted cases into the time-fuel trade-off curve; the
   figures are drawn by :mod:`climbopt.plots` (``sweep_figures``).

Statuses: ``ok``; ``infeasible`` (:class:`climbopt.rutowski.InfeasibleMission`);
``solver-failure`` (:class:`climbopt.collocation.SolverFailure`); ``bad-input`` (a changed value
out of range, :class:`climbopt.scenario.ScenarioError`, or a point outside the model's data,
:class:`climbopt.fits.ModelDomainError`); ``error`` (anything else, with the exception type).

All values in the table are SI (column names carry the unit). Nothing here prints; the command
line (``climbopt sweep``) shows progress through the ``on_case`` callback.
"""

from __future__ import annotations

import csv
import hashlib
import io
import itertools
import json
import math
import os
import time
from concurrent.futures import FIRST_COMPLETED, ProcessPoolExecutor
from concurrent.futures import wait as _futures_wait
from dataclasses import dataclass, field, replace
from pathlib import Path
from typing import Callable

from climbopt import CAUTION, __version__
from climbopt.scenario import Scenario, ScenarioError, suggest_name
from climbopt.units import (
    UnitError,
    is_flight_level,
    flight_level_ft,
    parse_quantity,
    shorten,
    split_quantity,
)

__all__ = [
    "PARAMETER_NAMES", "STATUSES", "SweepError", "SweepAborted", "Parameter", "Variation", "Case",
    "SweepPlan", "SweepResult", "parameters", "parse_variation", "plan_sweep", "apply_case",
    "run_case", "run_sweep", "read_table", "write_parquet", "tradeoff_curve", "pareto_front",
    "check_optional_packages",
]

#: Names accepted by ``--vary``.
PARAMETER_NAMES = ("mass", "temperature_offset", "thrust_scale", "target_altitude",
                   "target_speed", "cost_weight")

#: Case statuses written to the table.
STATUSES = ("ok", "infeasible", "solver-failure", "bad-input", "error")

#: Solver method names on the command line -> the ``Trajectory.method`` written to the table.
METHODS = {"energy": "energy-state", "collocation": "collocation"}

#: Result columns (after the case, key, method, objective and input columns), SI.
RESULT_COLUMNS = ("status", "time_s", "fuel_kg", "distance_m", "final_mass_kg", "wall_s", "error")

#: Columns of the best constant schedule of each case (``plan_sweep(..., schedules=True)``, SI;
#: ``schedule`` is its name as crews write it, e.g. "250/272/M0.72" in knots; the penalty is in
#: percent of the case's optimum in the sweep's objective).
SCHEDULE_COLUMNS = ("schedule", "schedule_cas_below_restriction_m_s", "schedule_cas_m_s",
                    "schedule_mach", "schedule_time_s", "schedule_fuel_kg",
                    "schedule_distance_m", "schedule_penalty_pct")

#: Columns holding text; every other column holds a number ("case" an integer).
_TEXT_COLUMNS = ("key", "method", "objective", "status", "error", "schedule")

#: Columns holding numbers (besides the input columns); "case" is an integer.
_NUMERIC_RESULTS = ("time_s", "fuel_kg", "distance_m", "final_mass_kg", "wall_s") + \
    SCHEDULE_COLUMNS[1:]

#: Version of the case-key recipe; bump when the recipe changes (old tables are then recomputed).
_KEY_VERSION = 1


class SweepError(ValueError):
    """A sweep cannot be set up: bad ``--vary`` text, a table written by another sweep, a missing
    optional package (Dask, pyarrow), an unreachable cluster."""


class SweepAborted(RuntimeError):
    """A running sweep had to stop: a pool worker process died or the Dask cluster failed. The
    cases finished before are in the table; a re-run continues."""


#: Messages of a missing optional package (the command line's options name them).
_NO_PYARROW = ("--parquet needs the pyarrow package, which is not installed "
               "(pip install pyarrow), or leave out --parquet")
_NO_DISTRIBUTED = ("--cluster needs Dask distributed, which is not installed; install "
                   "the optional extra: pip install 'climbopt[dask]'")


def _import_distributed():
    """The ``distributed`` module (SweepError when Dask distributed is not installed)."""
    try:
        import distributed
    except ImportError:
        raise SweepError(_NO_DISTRIBUTED) from None
    return distributed


def check_optional_packages(*, parquet: bool = False, cluster: bool = False) -> None:
    """Before any case is solved: SweepError when ``parquet`` is asked for without pyarrow or
    ``cluster`` without Dask distributed."""
    if parquet:
        import importlib.util

        if importlib.util.find_spec("pyarrow") is None:
            raise SweepError(_NO_PYARROW)
    if cluster:
        _import_distributed()


# ============================================================================================
# Parameters and variations
# ============================================================================================


@dataclass(frozen=True)
class Parameter:
    """A numeric scenario input that a sweep can change.

    ``dimension`` is a :data:`climbopt.units.DIMENSIONS` key (how values are parsed),
    ``si_unit`` the unit of the table column ``column``, ``label`` words for plot axes.
    """

    name: str
    dimension: str
    si_unit: str
    column: str
    label: str


def parameters(scenario: Scenario) -> dict[str, Parameter]:
    """The sweepable inputs of ``scenario`` by name. ``target_speed`` is in the kind of speed the
    target was given in (Mach number, or TAS/CAS/EAS in m/s)."""
    kind = scenario.mission.target.speed_kind
    if kind == "mach":
        speed = Parameter("target_speed", "dimensionless", "", "target_mach", "target Mach number")
    else:
        speed = Parameter("target_speed", "speed", "m/s", f"target_{kind}_m_s",
                          f"target {kind.upper()}")
    return {p.name: p for p in (
        Parameter("mass", "mass", "kg", "mass_kg", "start mass"),
        Parameter("temperature_offset", "temperature_difference", "K", "temperature_offset_k",
                  "temperature offset from ISA"),
        Parameter("thrust_scale", "dimensionless", "", "thrust_scale", "thrust scale"),
        Parameter("target_altitude", "length", "m", "target_altitude_m", "target altitude"),
        speed,
        Parameter("cost_weight", "mass_flow", "kg/s", "cost_weight_kg_per_s",
                  "cost weight (fuel per second of time)"),
    )}


@dataclass(frozen=True)
class Variation:
    """Values [SI] one parameter takes in a sweep; ``unit`` is the unit the user wrote (for
    plots), empty when none was written."""

    name: str
    values: tuple[float, ...]
    unit: str = ""


def _split_items(text: str, what: str) -> list[tuple[float, str]]:
    """(number, unit as written) of each comma-separated value; a flight level ("FL350") is
    (35000.0, "ft")."""
    items = []
    for part in text.split(","):
        part = part.strip()
        if not part:
            raise SweepError(f"{what}: empty value in '{shorten(text)}'")
        try:
            if is_flight_level(part):
                items.append((float(flight_level_ft(part, what)), "ft"))
            else:
                items.append(split_quantity(part, what))
        except UnitError as exc:
            raise SweepError(f"{what}: {exc.message}") from None
    return items


def _unknown_name(name: str) -> SweepError:
    return SweepError(f"--vary: unknown name '{shorten(name)}'{suggest_name(name, PARAMETER_NAMES)}; known "
                      f"names: {', '.join(PARAMETER_NAMES)}")


def _range_parts(spec: str, what: str) -> tuple[list[tuple[float, str]], int]:
    """START:STOP:COUNT -> the two end items and COUNT; a unit after COUNT ("60:80:5 t")
    belongs to both ends."""
    parts = spec.split(":")
    if len(parts) != 3:
        raise SweepError(f"{what}: a range is START:STOP:COUNT, got '{shorten(spec)}'")
    count_text, _, unit = parts[2].strip().partition(" ")
    try:
        count = int(count_text)
    except ValueError:
        raise SweepError(f"{what}: COUNT must be a whole number, got '{shorten(parts[2].strip())}'") from None
    if count < 1:
        raise SweepError(f"{what}: COUNT must be at least 1, got {count}")
    items = _split_items(parts[0], what) + _split_items(parts[1], what)
    if len(items) != 2:
        raise SweepError(f"{what}: a range is START:STOP:COUNT, got '{shorten(spec)}'")
    unit = unit.strip()
    if unit:
        if any(u for _, u in items):
            raise SweepError(f"{what}: unit written twice in '{shorten(spec)}'; write it on the ends "
                             f"('60 t:80 t:5') or once after COUNT ('60:80:5 t')")
        items = [(number, unit) for number, _ in items]
    return items, count


def parse_variation(text: str, scenario: Scenario) -> Variation:
    """Read one ``NAME=VALUES`` text.

    ``VALUES`` is either ``START:STOP:COUNT`` (COUNT evenly spaced values, both ends included)
    or a comma-separated list. Dimensional inputs need a unit (``60 t``, ``15 K``,
    ``35000 ft``, ``FL350``, ``280 kt``, ``0.5 kg/s``): on every value, or written once -- on
    one value of a list (``-10,0,10,20 K``) or after COUNT (``60:80:5 t``) -- for all. With
    several units written, every value needs its own. Numbers without a unit are accepted only
    for the thrust scale and a Mach-number target speed. No thousands separators (commas
    separate values).

    Raises
    ------
    SweepError
        Unknown name (with a suggestion), a missing unit (with an example), malformed text,
        wrong unit, bad count, repeated value.
    """
    params = parameters(scenario)
    if "=" not in text:
        raise SweepError(f"--vary '{shorten(text)}': expected NAME=VALUES, e.g. 'mass=60 t:80 t:5' or "
                         f"'temperature_offset=-10,0,10 K'")
    name, spec = (s.strip() for s in text.split("=", 1))
    if name not in params:
        raise _unknown_name(name)
    p = params[name]
    what = f"--vary {name}"
    if not spec:
        raise SweepError(f"{what}: no values given")
    if ":" in spec:
        items, count = _range_parts(spec, what)
    else:
        items, count = _split_items(spec, what), None
    written = sorted({u for _, u in items if u})
    if len(written) > 1 and any(not u for _, u in items):
        raise SweepError(f"{what}: several units written ({', '.join(written)}) and some values "
                         f"without one; write the unit on every value")
    if not written and p.dimension != "dimensionless":
        raise SweepError(_missing_unit(name, p, spec))
    default_unit = written[0] if written else p.si_unit
    values = []
    for number, unit in items:
        unit = unit or default_unit
        shown = f"{number!r} {unit}".strip()
        try:
            values.append(parse_quantity(shown if unit else number, p.dimension, what))
        except UnitError as exc:
            raise SweepError(f"{what}: {exc.message}") from None
    if count is not None:
        start, stop = values
        values = [start] if count == 1 else [start + (stop - start) * i / (count - 1)
                                             for i in range(count - 1)] + [stop]
        if count > 1 and start == stop:
            raise SweepError(f"{what}: START and STOP are equal; give COUNT 1 or different ends")
    seen = set()
    for v in values:
        if v in seen:
            raise SweepError(f"{what}: value {v:g} {p.si_unit} appears twice")
        seen.add(v)
    return Variation(name, tuple(float(v) for v in values), written[0] if written else "")


#: A unit for each dimensional input, for the example in the message on a missing unit.
_EXAMPLE_UNITS = {"mass": "t", "temperature_offset": "K", "target_altitude": "ft",
                  "target_speed": "kt", "cost_weight": "kg/s"}


def _missing_unit(name: str, p: Parameter, spec: str) -> str:
    """The message for a dimensional input given without any unit, with the user's numbers."""
    u = _EXAMPLE_UNITS[name]
    parts = [x.strip() for x in spec.split(":")]
    how = (f"'{name}={parts[0]} {u}:{parts[1]} {u}:{parts[2]}' or '{name}={spec} {u}'"
           if len(parts) == 3 else f"'{name}={spec} {u}'")
    return (f"--vary {name}={spec}: no unit given; the {p.label} needs one (a bare number is not "
            f"read as SI), e.g. {how}")


# ============================================================================================
# Cases
# ============================================================================================


@dataclass(frozen=True)
class Case:
    """One solve of a sweep: ``values`` are ``(parameter name, SI value)`` pairs."""

    index: int
    key: str
    method: str  # "energy" | "collocation"
    objective: str  # "time" | "fuel" | "weighted"
    values: tuple[tuple[str, float], ...]
    schedules: bool = False  # also fly the case's best constant schedule


@dataclass(frozen=True)
class SweepPlan:
    """Everything that defines a sweep: the base scenario, the variations and the cases."""

    scenario: Scenario
    variations: tuple[Variation, ...]
    method: str
    objective: str
    zipped: bool
    cases: tuple[Case, ...]
    schedules: bool = False

    @property
    def parameters(self) -> list[Parameter]:
        params = parameters(self.scenario)
        return [params[v.name] for v in self.variations]

    @property
    def header(self) -> list[str]:
        """Table columns, in order."""
        return (["case", "key", "method", "objective"] + [p.column for p in self.parameters]
                + list(RESULT_COLUMNS) + (list(SCHEDULE_COLUMNS) if self.schedules else []))


def scenario_fingerprint(scenario: Scenario) -> str:
    """SHA-256 of everything in ``scenario`` that can change a result (not its name,
    description, file path or display units)."""
    core = replace(scenario, name="", description="", source_path="", display_units={},
                   display_text={}, warnings=())
    return hashlib.sha256(repr(core).encode("utf-8")).hexdigest()


def case_key(fingerprint: str, method: str, objective: str,
             values: tuple[tuple[str, float], ...]) -> str:
    """16-hex-digit key of one case: hash of the climbopt version, the scenario fingerprint,
    method, objective and the changed values (exact float representations). A new climbopt
    version gives new keys, so a resumed sweep never mixes answers of two solver versions."""
    doc = {"v": _KEY_VERSION, "climbopt": __version__, "scenario": fingerprint, "method": method,
           "objective": objective, "values": sorted((n, repr(float(v))) for n, v in values)}
    return hashlib.sha256(json.dumps(doc, sort_keys=True).encode("utf-8")).hexdigest()[:16]


def plan_sweep(scenario: Scenario, variations, *, zip_values: bool = False,
               method: str = "energy", objective: str | None = None,
               schedules: bool = False) -> SweepPlan:
    """Expand variations into cases.

    Parameters
    ----------
    scenario : Scenario
        The base scenario; each case changes only the varied inputs.
    variations : list[Variation]
        At least one; names must not repeat.
    zip_values : bool
        False: the full grid (``itertools.product``, last variation fastest). True: the i-th
        values of all variations together (all must have the same number of values).
    method : str
        "energy" (energy-state, default) or "collocation".
    objective : str or None
        "time", "fuel" or "weighted"; default "weighted" when the cost weight is varied, else
        "time". Varying the cost weight with another objective is an error (it would change
        nothing).
    schedules : bool
        Also fly each case's best constant CAS/Mach schedule for its objective
        (:func:`climbopt.procedure.best_schedule`; columns :data:`SCHEDULE_COLUMNS`).
    """
    variations = tuple(variations)
    objective = _plan_objective(variations, method, objective)
    if zip_values:
        counts = {v.name: len(v.values) for v in variations}
        if len(set(counts.values())) != 1:
            raise SweepError("--zip needs the same number of values for every --vary; got "
                             + ", ".join(f"{n} {c}" for n, c in counts.items()))
        combos = list(zip(*(v.values for v in variations)))
    else:
        combos = list(itertools.product(*(v.values for v in variations)))
    cases = _plan_cases(scenario, [v.name for v in variations], combos, method, objective)
    if schedules:
        cases = [replace(c, schedules=True) for c in cases]
    return SweepPlan(scenario, variations, method, objective, bool(zip_values), tuple(cases),
                     bool(schedules))


def _plan_objective(variations: tuple, method: str, objective: str | None) -> str:
    """The sweep's objective (see :func:`plan_sweep`) after checking the variations (at least
    one, no name twice), the method and the objective against the cost weight."""
    if not variations:
        raise SweepError("nothing to vary: give at least one --vary NAME=VALUES")
    names = [v.name for v in variations]
    for n in names:
        if names.count(n) > 1:
            raise SweepError(f"--vary {n} given more than once")
    if method not in METHODS:
        raise SweepError(f"method must be one of {', '.join(METHODS)}, got {method!r}")
    varies_w = "cost_weight" in names
    if objective is None:
        objective = "weighted" if varies_w else "time"
    if objective not in ("time", "fuel", "weighted"):
        raise SweepError(f"objective must be time, fuel or weighted, got {objective!r}")
    if varies_w and objective != "weighted":
        raise SweepError(f"--vary cost_weight changes only the weighted objective; with "
                         f"--objective {objective} every case would be the same (use "
                         f"--objective weighted)")
    return objective


def _plan_cases(scenario: Scenario, names: list[str], combos: list, method: str,
                objective: str) -> list[Case]:
    """One case per combination of values, and with a varied cost weight the anchors: one
    minimum-time and one minimum-fuel case per combination of the other inputs. A combination
    given twice (the same key) is a SweepError."""
    fp = scenario_fingerprint(scenario)
    cases: list[Case] = []
    keys: dict[str, int] = {}

    def add(objective_: str, values: tuple[tuple[str, float], ...]) -> None:
        key = case_key(fp, method, objective_, values)
        if key in keys:
            shown = ", ".join(f"{n}={v:g}" for n, v in values)
            raise SweepError(f"the combination {shown} appears twice (cases {keys[key]} and "
                             f"{len(cases)})")
        keys[key] = len(cases)
        cases.append(Case(len(cases), key, method, objective_, values))

    for combo in combos:
        add(objective, tuple(zip(names, (float(x) for x in combo))))
    if "cost_weight" in names:  # anchors: one min-time and one min-fuel case per combination
        seen = []  # of the other inputs, in order of first appearance
        for combo in combos:
            rest = tuple((n, float(x)) for n, x in zip(names, combo) if n != "cost_weight")
            if rest not in seen:
                seen.append(rest)
        for rest in seen:
            add("time", rest)
            add("fuel", rest)
    return cases


def apply_case(scenario: Scenario, values) -> Scenario:
    """The scenario with the changed inputs ``values`` (mapping or pairs of name -> SI value),
    built by :meth:`climbopt.scenario.Scenario.replace_si`: validated exactly as a scenario file
    (ranges, fuel capacity against mass, stall speed, limits, table coverage).

    Start and target true airspeeds are recomputed from the speeds as given (Mach, CAS, EAS or
    TAS) in the changed atmosphere and at the changed target altitude and speed.

    Raises
    ------
    ScenarioError
        The changed scenario is not valid (each message names the change).
    """
    values = dict(values)
    unknown = set(values) - set(PARAMETER_NAMES)
    if unknown:
        raise ValueError(f"unknown sweep parameter(s): {', '.join(sorted(unknown))}")
    return scenario.replace_si(**values)


def _classify(exc: BaseException) -> str:
    """Status of a failed case (see the module docstring)."""
    from climbopt.fits import ModelDomainError
    from climbopt.rutowski import InfeasibleMission

    if isinstance(exc, InfeasibleMission):
        return "infeasible"
    if isinstance(exc, (ScenarioError, ModelDomainError, UnitError)):
        return "bad-input"
    from climbopt.collocation import SolverFailure
    from climbopt.pipeline import TimeLimitExceeded

    if isinstance(exc, (SolverFailure, TimeLimitExceeded)):
        return "solver-failure"
    return "error"


def _error_text(exc: BaseException, status: str) -> str:
    text = " ".join(str(exc).split()) or "(no message)"
    return f"{type(exc).__name__}: {text}" if status == "error" else text


def _solve(scenario: Scenario, method: str, objective: str, compile: bool | None = None,
           model=None):
    """The case's result through the one pipeline (:func:`climbopt.pipeline.solve_case`); a
    collocation case starts from the solution of the case this process solved before (same
    optimum to IPOPT's tolerance, about half the iterations of its first mesh pass)."""
    from climbopt.pipeline import solve_case

    return solve_case(scenario, method, objective, model=model, compile=compile,
                      from_neighbour=True)


def run_case(scenario: Scenario, case: Case, *, compile: bool | None = None) -> dict:
    """Solve one case; never raises for a failing case (the status and error text say why).

    ``compile``: collocation from compiled C (see :func:`run_sweep`). Returns the result
    columns (:data:`RESULT_COLUMNS`, and :data:`SCHEDULE_COLUMNS` when the case flies its
    schedule) as a dict of SI floats and strings.
    """
    t0 = time.perf_counter()
    out = {"status": "ok", "time_s": math.nan, "fuel_kg": math.nan, "distance_m": math.nan,
           "final_mass_kg": math.nan, "error": ""}
    try:
        from climbopt.aircraft import build_model

        case_scenario = apply_case(scenario, case.values)
        model = build_model(case_scenario)  # one model for the optimum and the schedule
        traj = _solve(case_scenario, case.method, case.objective, compile, model)
        out.update(time_s=traj.time_s, fuel_kg=traj.fuel_kg, distance_m=traj.distance_m,
                   final_mass_kg=traj.final_mass_kg)
        if not traj.ranked:
            out.update(status="solver-failure",
                       error="; ".join(traj.issues) or f"not converged: {traj.status}")
        elif case.schedules:
            out.update(_schedule_columns(case_scenario, model, case.objective, traj))
    except Exception as exc:  # a failing case is a result, not a crash
        status = _classify(exc)
        out.update(status=status, error=_error_text(exc, status))
    out["wall_s"] = time.perf_counter() - t0
    return out


def _schedule_columns(scenario: Scenario, model, objective: str, optimum) -> dict:
    """The best constant schedule of a case, measured against its optimum: the columns of
    :data:`SCHEDULE_COLUMNS` ("schedule" says why when none can be flown; the optimum's row
    stays "ok")."""
    from climbopt.procedure import ScheduleNotFlyable, best_schedule_spec

    try:
        spec, flown = best_schedule_spec(scenario, model, objective, reference=optimum)
    except ScheduleNotFlyable as exc:
        return {"schedule": " ".join(f"none flyable: {exc}".split())[:300]}
    penalty = flown.reference.objective_difference_relative if flown.reference else math.nan
    numbers = {"schedule_cas_below_restriction_m_s": spec.cas_below_restriction_m_s,
               "schedule_cas_m_s": spec.cas_m_s, "schedule_mach": spec.mach,
               "schedule_time_s": flown.time_s, "schedule_fuel_kg": flown.fuel_kg,
               "schedule_distance_m": flown.distance_m, "schedule_penalty_pct": 100.0 * penalty}
    return {"schedule": spec.name,
            **{k: math.nan if v is None else float(v) for k, v in numbers.items()}}


# ============================================================================================
# The table (CSV, appended as cases finish)
# ============================================================================================


def _cell(value) -> str:
    """CSV text of a value: floats exactly (repr), NaN and None empty."""
    if value is None:
        return ""
    if isinstance(value, float):
        return "" if math.isnan(value) else repr(value)
    return str(value)


def _comment_lines(plan: SweepPlan) -> list[str]:
    return [f"# climbopt {__version__} sweep; scenario: {plan.scenario.name}; units: SI "
            f"(column names carry the unit); one row per case",
            f"# caution: {CAUTION}"]


def _read_rows(path: Path) -> tuple[list[str] | None, list[list[str]]]:
    """Header and rows of an existing table (comment lines and torn rows skipped).

    Every complete row ends with a newline (no field holds one: error texts are single lines),
    so text after the last newline is a row torn by a crash and is ignored.
    """
    with open(path, newline="", encoding="utf-8") as fh:
        text = fh.read()
    complete = text[: text.rfind("\n") + 1].split("\n")[:-1]
    lines = [ln + "\n" for ln in complete if not ln.startswith("#")]
    if not lines:
        return None, []
    rows = list(csv.reader(lines))
    header, body = rows[0], rows[1:]
    return header, [r for r in body if len(r) == len(header)]


def _repair_tail(path: Path) -> None:
    """Cut a torn last line (a crash in the middle of a write) so appends start cleanly."""
    with open(path, "rb+") as fh:
        data = fh.read()
        if data and not data.endswith(b"\n"):
            fh.truncate(data.rfind(b"\n") + 1)


def read_table(path) -> list[dict]:
    """Rows of a sweep table as dicts: "case" int, numbers float (NaN for blank), text as is."""
    header, rows = _read_rows(Path(path))
    if header is None:
        return []
    text = set(_TEXT_COLUMNS)
    out = []
    for r in rows:
        d = {}
        for k, v in zip(header, r):
            if k == "case":
                d[k] = int(v)
            elif k in text:
                d[k] = v
            else:
                d[k] = float(v) if v != "" else math.nan
        out.append(d)
    return out


def write_parquet(table_path, parquet_path) -> Path:
    """Write the CSV table ``table_path`` as Parquet (needs pyarrow; SweepError if missing)."""
    try:
        import pyarrow as pa
        import pyarrow.parquet as pq
    except ImportError:
        raise SweepError(_NO_PYARROW) from None
    rows = read_table(table_path)
    header, _ = _read_rows(Path(table_path))
    cols = {}
    for k in header:
        vals = [r[k] for r in rows]
        if k == "case":
            cols[k] = pa.array(vals, pa.int64())
        elif k in _TEXT_COLUMNS:
            cols[k] = pa.array(vals, pa.string())
        else:
            cols[k] = pa.array(vals, pa.float64())
    table = pa.table(cols).replace_schema_metadata({"caution": CAUTION,
                                                    "units": "SI (column names carry the unit)"})
    parquet_path = Path(parquet_path)
    tmp = parquet_path.with_name(f".{parquet_path.name}.tmp")
    pq.write_table(table, tmp)
    os.replace(tmp, parquet_path)
    return parquet_path


# ============================================================================================
# Running
# ============================================================================================


@dataclass
class SweepResult:
    """What a sweep did.

    ``computed`` cases were solved in this run, ``failed`` of them did not give a result,
    ``skipped`` were already in the table, ``remaining`` were left for a later run (max_cases);
    ``foreign_rows`` rows of the table belong to cases not in this sweep (kept at the end).
    """

    table_path: Path
    total: int
    computed: int = 0
    failed: int = 0
    skipped: int = 0
    remaining: int = 0
    foreign_rows: int = 0
    wall_s: float = 0.0
    executor: str = ""
    workers: int = 1
    rows: list[dict] = field(default_factory=list)

    @property
    def cases_per_s(self) -> float:
        return self.computed / self.wall_s if self.wall_s > 0 else math.nan


# -- workers ---------------------------------------------------------------------------------

_WORKER_SCENARIO: Scenario | None = None
_WORKER_COMPILE: bool | None = None


def _init_pool_worker(scenario: Scenario, compile: bool | None = None) -> None:
    """Pool worker start-up: keep the base scenario and the compile choice; leave Ctrl-C to the
    parent process. A worker lives for the whole sweep, so what its first case builds (the
    collocation problem, the loaded compiled point function) serves its later cases."""
    import signal

    global _WORKER_SCENARIO, _WORKER_COMPILE
    _WORKER_SCENARIO = scenario
    _WORKER_COMPILE = compile
    signal.signal(signal.SIGINT, signal.SIG_IGN)


def _run_pooled(case: Case) -> dict:
    return run_case(_WORKER_SCENARIO, case, compile=_WORKER_COMPILE)


def _pool_context():
    """Start method of the pool's processes.

    "fork" while this process runs a single thread: fast (workers inherit the imported modules)
    and no re-import of the main script. Once other threads run (a Dask client, a progress-bar
    monitor), forking could copy a lock held by one of them, so "forkserver" is used instead:
    a clean server process that imports climbopt once and forks the workers (then a calling
    script needs the usual ``if __name__ == "__main__":`` guard). Elsewhere: the platform default.
    """
    import multiprocessing as mp
    import threading

    methods = mp.get_all_start_methods()
    if "fork" in methods and threading.active_count() == 1:
        return mp.get_context("fork")
    if "forkserver" in methods:
        ctx = mp.get_context("forkserver")
        ctx.set_forkserver_preload(["climbopt.sweep", "climbopt.rutowski", "climbopt.aircraft"])
        return ctx
    return mp.get_context()


def default_workers() -> int:
    """Cores this process may use."""
    try:
        return len(os.sched_getaffinity(0))
    except AttributeError:  # pragma: no cover - not Linux
        return os.cpu_count() or 1


def _failure_row(message: str) -> dict:
    return {"status": "error", "time_s": math.nan, "fuel_kg": math.nan, "distance_m": math.nan,
            "final_mass_kg": math.nan, "wall_s": math.nan, "error": " ".join(message.split())}


class _PoolBackend:
    """Local process pool; at most ``2 * workers`` cases in flight (so that stopping early,
    max_cases and Ctrl-C act at once)."""

    def __init__(self, scenario: Scenario, workers: int, compile: bool | None = None):
        self.workers = workers
        self.pool = ProcessPoolExecutor(max_workers=workers, mp_context=_pool_context(),
                                        initializer=_init_pool_worker,
                                        initargs=(scenario, compile))

    def run(self, todo, record, ready) -> None:
        from concurrent.futures.process import BrokenProcessPool

        queue = iter(todo)
        pending = {}
        ok = False
        try:
            for case in itertools.islice(queue, 2 * self.workers):
                pending[self.pool.submit(_run_pooled, case)] = case
            ready()  # the pool processes are started by now (see _pool_context)
            while pending:
                done, _ = _futures_wait(list(pending), return_when=FIRST_COMPLETED)
                for fut in sorted(done, key=lambda f: pending[f].index):
                    case = pending.pop(fut)
                    try:
                        out = fut.result()
                    except BrokenProcessPool as exc:
                        raise SweepAborted(
                            f"a worker process died (case {case.index}): {exc}; the finished "
                            f"cases are in the table, re-run to continue") from None
                    record(case, out)
                for case in itertools.islice(queue, len(done)):
                    pending[self.pool.submit(_run_pooled, case)] = case
            ok = True
        finally:
            self.pool.shutdown(wait=True, cancel_futures=not ok)


class _DaskBackend:
    """Dask distributed: the base scenario is sent to every worker once; cases are handed out
    with a window of ``max(32, 8 * threads)`` in flight (the scheduler round trip, about 10 ms,
    is then hidden) and collected with their results as they complete."""

    def __init__(self, scenario: Scenario, cluster, compile: bool | None = None):
        self.compile = compile
        distributed = self._distributed = _import_distributed()
        if isinstance(cluster, str):
            try:
                self.client = distributed.Client(cluster, timeout="10s")
            except (OSError, TimeoutError, ValueError) as exc:
                raise SweepError(f"cannot connect to the Dask scheduler at {cluster!r}: "
                                 f"{' '.join(str(exc).split())}") from None
            self.own_client = True
        else:
            self.client, self.own_client = cluster, False
        self.workers = max(1, sum(self.client.nthreads().values()))
        self.scenario = self.client.scatter(scenario, broadcast=True)

    def _submit(self, case: Case):
        return self.client.submit(run_case, self.scenario, case, compile=self.compile,
                                  pure=False, retries=0)

    def run(self, todo, record, ready) -> None:
        dd = self._distributed
        queue = iter(todo)
        pending = {}  # future key -> (case, future)
        ok = False
        try:
            for case in itertools.islice(queue, max(32, 8 * self.workers)):
                fut = self._submit(case)
                pending[fut.key] = (case, fut)
            ready()
            while pending:
                # wait(FIRST_COMPLETED) rather than as_completed: the latter was seen to miss
                # completions now and then with two clients in one process (tests, LocalCluster)
                done, _ = dd.wait([f for _, f in pending.values()], return_when="FIRST_COMPLETED")
                finished = [f for f in done if f.status == "finished"]
                results = dict(zip((f.key for f in finished), self.client.gather(finished)))
                for fut in done:
                    case, _ = pending.pop(fut.key)
                    if fut.status == "error":
                        exc = fut.exception()
                        if not isinstance(exc, dd.KilledWorker):
                            raise SweepAborted(f"the Dask cluster failed on case {case.index}: "
                                               f"{type(exc).__name__}: {exc}")
                        out = _failure_row(f"KilledWorker: {exc}")  # the case kept killing workers
                    elif fut.status != "finished":
                        raise SweepAborted(f"the Dask cluster lost case {case.index} ({fut.status})")
                    else:
                        out = results[fut.key]
                    record(case, out)
                    nxt = next(queue, None)
                    if nxt is not None:
                        new = self._submit(nxt)
                        pending[new.key] = (nxt, new)
            ok = True
        finally:
            if not ok and pending:
                try:
                    self.client.cancel([f for _, f in pending.values()])
                except Exception:  # pragma: no cover - broken connection
                    pass
            if self.own_client:
                try:
                    self.client.close()
                except Exception:  # pragma: no cover - closing a broken connection
                    pass


def run_sweep(plan: SweepPlan, table_path, *, executor: str = "pool", workers: int | None = None,
              cluster=None, max_cases: int | None = None, retry_failed: bool = False,
              on_start: Callable[[int, int], None] | None = None,
              on_case: Callable[[dict], None] | None = None,
              compile: bool | None = None) -> SweepResult:
    """Run the cases of ``plan`` not yet in the table at ``table_path``.

    Parameters
    ----------
    plan : SweepPlan
        From :func:`plan_sweep`.
    table_path : path
        CSV table; created (with its folder) if missing, appended to otherwise. A table with
        other columns (another sweep) is refused.
    executor : str
        "serial", "pool" (local processes, default) or "dask" (needs ``cluster``).
    workers : int, optional
        Pool size (default: all cores this process may use).
    cluster : str or distributed.Client
        Dask scheduler address (e.g. "tcp://10.0.0.5:8786") or a connected client.
    max_cases : int, optional
        Compute at most this many cases in this run (the rest on a re-run).
    retry_failed : bool
        Solve again the cases recorded with a status other than "ok".
    on_start : callable(to_run, skipped), optional
        Called once before the first case.
    on_case : callable(row), optional
        Called after each finished case's row is written (row: dict of the table's columns,
        typed). An exception raised here stops the sweep (cases in flight are cancelled; rows
        already written stay) and propagates.

    Returns
    -------
    SweepResult
        Counts, wall time and the final table rows (current cases in case order, then rows of
        cases not in this sweep).
    """
    _check_run_options(executor, cluster, max_cases)
    table_path = Path(table_path)
    table_path.parent.mkdir(parents=True, exist_ok=True)
    existing = _open_table(plan, table_path)
    todo, skipped, remaining = _cases_to_run(plan, existing, retry_failed, max_cases)
    result = SweepResult(table_path, total=len(plan.cases), skipped=skipped, remaining=remaining,
                         executor=executor)
    fresh: dict[str, list[str]] = {}
    t0 = time.perf_counter()
    with open(table_path, "a", newline="", encoding="utf-8") as fh:
        record = _recorder(plan, fh, result, fresh, on_case)
        compile = _compile_choice(plan, compile, len(todo))

        def started():
            if on_start is not None:
                on_start(len(todo), skipped)

        _run_cases(plan, todo, record, started, result, executor=executor, workers=workers,
                   cluster=cluster, compile=compile)
    result.wall_s = time.perf_counter() - t0
    result.foreign_rows = _rewrite_table(plan, table_path, existing, fresh)
    result.rows = read_table(table_path)
    return result


def _check_run_options(executor: str, cluster, max_cases: int | None) -> None:
    """SweepError for an unknown executor, dask without a cluster or a negative max_cases."""
    if executor not in ("serial", "pool", "dask"):
        raise SweepError(f"executor must be serial, pool or dask, got {executor!r}")
    if executor == "dask" and cluster is None:
        raise SweepError("the dask executor needs a cluster address")
    if max_cases is not None and max_cases < 0:
        raise SweepError(f"max_cases must be 0 or more, got {max_cases}")


def _write_head(fh, plan: SweepPlan) -> None:
    """The table's comment lines and column header."""
    fh.write("\n".join(_comment_lines(plan)) + "\n")
    csv.writer(fh, lineterminator="\n").writerow(plan.header)


def _open_table(plan: SweepPlan, table_path: Path) -> dict[str, list[str]]:
    """The rows already in the table, by case key (the last row of a key); a missing, empty or
    torn-before-its-header table is started anew, a table of another sweep refused."""
    header = plan.header
    existing: dict[str, list[str]] = {}  # key -> last row
    old_header, old_rows = _read_rows(table_path) if table_path.exists() else (None, [])
    if old_header is not None and old_header != header and not old_rows:
        old_header = None  # another sweep's table without a single row: nothing to keep
    if old_header is not None:
        if old_header != header:
            raise SweepError(
                f"{table_path} holds another sweep (columns {', '.join(old_header)}); this "
                f"sweep writes columns {', '.join(header)}: choose another output or remove it")
        _repair_tail(table_path)
        for r in old_rows:
            existing[r[1]] = r
    else:  # new table (or one torn before its header was complete, or an empty one)
        with open(table_path, "w", newline="", encoding="utf-8") as fh:
            _write_head(fh, plan)
    return existing


def _cases_to_run(plan: SweepPlan, existing: dict, retry_failed: bool,
                  max_cases: int | None) -> tuple[list[Case], int, int]:
    """(cases to solve now, cases skipped as already in the table, cases left for a re-run)."""
    status_col = plan.header.index("status")
    todo, skipped = [], 0
    for case in plan.cases:
        row = existing.get(case.key)
        if row is not None and not (retry_failed and row[status_col] != "ok"):
            skipped += 1
        else:
            todo.append(case)
    remaining = 0
    if max_cases is not None and len(todo) > max_cases:
        remaining = len(todo) - max_cases
        todo = todo[:max_cases]
    return todo, skipped, remaining


def _recorder(plan: SweepPlan, fh, result: SweepResult, fresh: dict, on_case):
    """``record(case, out)``: write a finished case's row to the open table ``fh`` (flushed at
    once), keep it in ``fresh`` (key -> cells), count it in ``result``, then call ``on_case``
    with the typed row."""
    header, params, method_name = plan.header, plan.parameters, METHODS[plan.method]
    writer = csv.writer(fh, lineterminator="\n")

    def record(case: Case, out: dict) -> None:
        values = dict(case.values)
        typed = {"case": case.index, "key": case.key, "method": method_name,
                 "objective": case.objective}
        for p in params:
            typed[p.column] = values.get(p.name, math.nan)
        typed.update({k: out.get(k, math.nan if k in _NUMERIC_RESULTS else "")
                      for k in RESULT_COLUMNS + (SCHEDULE_COLUMNS if plan.schedules else ())})
        cells = [_cell(typed[k]) for k in header]
        writer.writerow(cells)
        fh.flush()
        fresh[case.key] = cells
        result.computed += 1
        if typed["status"] != "ok":
            result.failed += 1
        if on_case is not None:
            on_case(typed)

    return record


def _run_cases(plan: SweepPlan, todo: list[Case], record, started, result: SweepResult, *,
               executor: str, workers: int | None, cluster, compile: bool) -> None:
    """Solve ``todo`` with the executor, passing each case's output to ``record``; ``started()``
    once the workers are up (the pool size goes to ``result.workers``)."""
    if executor == "serial" or not todo:
        result.workers = 1
        started()
        for case in todo:
            record(case, run_case(plan.scenario, case, compile=compile))
        return
    if executor == "pool":
        n = workers or default_workers()
        backend = _PoolBackend(plan.scenario, max(1, min(n, len(todo))), compile)
    else:
        backend = _DaskBackend(plan.scenario, cluster, compile)
    result.workers = backend.workers
    backend.run(todo, record, started)


def _rewrite_table(plan: SweepPlan, table_path: Path, existing: dict, fresh: dict) -> int:
    """Rewrite the table (atomically): this sweep's cases in case order, then rows of other
    cases, the latest row of a key winning. Returns the number of those other rows."""
    merged = dict(existing)
    merged.update(fresh)
    ordered = [merged[c.key] for c in plan.cases if c.key in merged]
    ours = {c.key for c in plan.cases}
    foreign = [r for k, r in merged.items() if k not in ours]
    buf = io.StringIO()
    _write_head(buf, plan)
    csv.writer(buf, lineterminator="\n").writerows(ordered + foreign)
    tmp = table_path.with_name(f".{table_path.name}.tmp")
    tmp.write_text(buf.getvalue(), encoding="utf-8")
    os.replace(tmp, table_path)
    return len(foreign)


#: A collocation sweep with at least this many cases to solve compiles its point function
#: unless told otherwise: a compilation costs about 2 s of CPU once, and saves about 0.35 s per
#: case since the point function is staged (:mod:`climbopt.staging`; 0.6 s before), so it
#: pays from about six cases (measured on the demo transport, benchmarks/bench_speed.py).
COMPILE_MIN_CASES = 8


def _compile_choice(plan: SweepPlan, compile: bool | None, n_todo: int) -> bool:
    """Whether the collocation cases use the compiled point function (see :func:`run_sweep`);
    when they do, it is compiled here once, before the workers start, so that they load it
    from the on-disk cache. A failure to compile is left to the cases, which fall back to
    CasADi's own evaluation and say so in their notes."""
    if plan.method != "collocation" or n_todo == 0 or compile is False:
        return False
    from climbopt import collocation

    if compile is None and not getattr(plan.scenario.solver, "compile", False):
        try:
            cached = collocation.compiled_point_function(plan.scenario, build=False)[0]
        except Exception:  # noqa: BLE001 - a case reports its own problem
            return False
        if cached is None and n_todo < COMPILE_MIN_CASES:
            return False
    try:
        collocation.compiled_point_function(plan.scenario)
    except Exception:  # noqa: BLE001 - a case reports its own problem
        pass
    return True


# ============================================================================================
# Trade-off curve
# ============================================================================================


def pareto_front(times, fuels) -> list[int]:
    """Indices of the points not dominated in (time, fuel), ordered by time.

    A point is dominated when another has time and fuel both no larger and one smaller.
    NaN points are left out.
    """
    pts = [(t, f, i) for i, (t, f) in enumerate(zip(times, fuels))
           if not (math.isnan(t) or math.isnan(f))]
    pts.sort()
    front, best_fuel = [], math.inf
    for _, f, i in pts:
        if f < best_fuel:
            front.append(i)
            best_fuel = f
    return front


def tradeoff_curve(rows: list[dict]) -> dict:
    """The time-fuel trade-off of one group of weighted cases (same other inputs).

    ``rows`` are table rows with objective "weighted" (and optionally the "time" and "fuel"
    anchors). Returns ``cost_weight``, ``time_s``, ``fuel_kg`` (ok cases, by increasing cost
    weight), ``front`` (indices into those arrays of the non-dominated points), ``monotone``
    (time never rises and fuel never falls as the weight grows, to 1e-9 relative), and
    ``min_time`` / ``min_fuel`` anchor rows (or None).
    """
    w = [r for r in rows if r["objective"] == "weighted" and r["status"] == "ok"]
    w.sort(key=lambda r: r["cost_weight_kg_per_s"])
    t = [r["time_s"] for r in w]
    f = [r["fuel_kg"] for r in w]
    tol = 1e-9
    mono = all(t[i + 1] <= t[i] * (1 + tol) and f[i + 1] >= f[i] * (1 - tol)
               for i in range(len(w) - 1))
    anchor = {o: next((r for r in rows if r["objective"] == o and r["status"] == "ok"), None)
              for o in ("time", "fuel")}
    return {"cost_weight": [r["cost_weight_kg_per_s"] for r in w], "time_s": t, "fuel_kg": f,
            "front": pareto_front(t, f), "monotone": mono, "min_time": anchor["time"],
            "min_fuel": anchor["fuel"]}


def _groups(rows: list[dict], columns: list[str]) -> list[tuple[tuple, list[dict]]]:
    """Rows grouped by the values of ``columns`` (order of first appearance)."""
    out: dict[tuple, list[dict]] = {}
    for r in rows:
        out.setdefault(tuple(r[c] for c in columns), []).append(r)
    return list(out.items())
