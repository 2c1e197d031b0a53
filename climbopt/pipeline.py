"""The one sequence of a climbopt run, shared by ``climbopt run``, sweeps and notebooks.

For each objective: energy-state solution (the scenario's climb profile) -> warm start ->
collocation -> re-simulation check -> flown schedules (the best constant CAS/Mach schedule and
the scenario's own schedules) -> fallback. With the *procedure* profile the free-profile
energy-state optimum is solved too, to say what the procedure costs.

Every result is assessed the same way (:func:`assess`): a result that is not converged, fails its
re-simulation check or burns more fuel than the tanks hold gets an *issue*; a result with an
issue is labelled, never ranked, and makes the run a solver failure (exit code 4 on the command
line). The solvers never call each other; this module joins them. Nothing here prints.
"""

from __future__ import annotations

import dataclasses
import time
from dataclasses import dataclass

from climbopt.results import FailedRun, Method, Objective, Result, Trajectory

__all__ = ["METHODS", "CommonPoint", "ProcedureCost", "RunResult", "TimeLimitExceeded",
           "assess", "common_point", "run_mission", "solve_case"]

#: Method choices of a run: energy-state only, collocation only (energy-state as its warm start
#: and fallback), or both.
METHODS = ("energy", "collocation", "both")


class TimeLimitExceeded(RuntimeError):
    """The run's wall-clock limit (``solver.time_limit``) was reached; nothing is optimal."""


@dataclass(frozen=True)
class ProcedureCost:
    """What the procedure profile costs against the free optimum (energy-state, one objective).

    ``free`` and ``procedure`` are the two energy-state solutions; the differences are
    procedure minus free [s], [kg].
    """

    objective: Objective
    free: Trajectory
    procedure: Trajectory

    @property
    def time_s(self) -> float:
        """Extra time of the procedure [s]."""
        return self.procedure.time_s - self.free.time_s

    @property
    def fuel_kg(self) -> float:
        """Extra fuel of the procedure [kg]."""
        return self.procedure.fuel_kg - self.free.fuel_kg


@dataclass(frozen=True)
class CommonPoint:
    """Time and fuel of every result to one common downrange point (common practice for a fair
    comparison of climbs that end at different distances): the farthest ground distance at
    which a ranked result reaches its target state; every result that gets there earlier
    continues in level flight at its target state (thrust = drag, :func:`climbopt.cruise.cruise`).

    ``distance_m`` [m]; ``time_s`` [s] and ``fuel_kg`` [kg] per result (aligned with
    ``RunResult.results``; None for a row without a trajectory or that cannot cruise there);
    ``notes`` say why a row has none. ``unusable``: why the comparison cannot use the point
    ("" when it can): a ranked result cannot hold level flight at the target state (an
    interceptor whose target lies above its steady ceiling), so the rows would be compared
    at a point some of them cannot reach; the fuel ranking then uses the fuel to the end of
    each result.
    """

    distance_m: float
    time_s: tuple[float | None, ...]
    fuel_kg: tuple[float | None, ...]
    notes: tuple[str, ...] = ()
    unusable: str = ""


@dataclass(frozen=True)
class RunResult:
    """Everything a run produced.

    ``results``: every row of the comparison, in order; ``errors``: why optimisation rows
    failed (one sentence each); ``warnings``: problems of the scenario's own schedules (they do
    not make the run fail); ``procedure_costs``: one per objective with the procedure profile.
    """

    results: tuple[Result, ...]
    errors: tuple[str, ...] = ()
    warnings: tuple[str, ...] = ()
    procedure_costs: tuple[ProcedureCost, ...] = ()
    common_point: CommonPoint | None = None

    @property
    def solver_failure(self) -> bool:
        """True when an optimisation row (not a scenario's own schedule) is unranked."""
        return any(not r.ranked for r in self.results if r.method is not Method.SCHEDULE)

    def trajectories(self) -> list[Trajectory]:
        """The rows that carry a trajectory."""
        return [r for r in self.results if isinstance(r, Trajectory)]


def assess(trajectory: Trajectory, envelope) -> Trajectory:
    """The trajectory with its issues added: not converged, re-simulation check failed, fuel
    capacity exceeded (``envelope``: :class:`climbopt.envelope.Envelope`)."""
    issues = []
    if not trajectory.converged:
        issues.append("NOT CONVERGED: not an optimum")
    v = trajectory.verification
    if v is not None and not v.ok:
        issues.append(f"re-simulation check FAILED: {v.message}")
    over = envelope.fuel_excess(trajectory.fuel_kg)
    if over > 0.0:
        issues.append(f"fuel burnt {trajectory.fuel_kg:,.0f} kg exceeds the fuel capacity "
                      f"{envelope.fuel_capacity_kg:,.0f} kg")
    new = tuple(i for i in issues if i not in trajectory.issues)
    return trajectory.with_issues(*new) if new else trajectory


class _Clock:
    """The run's deadline (``scenario.solver.time_limit_s``)."""

    def __init__(self, scenario):
        self.limit_s = float(getattr(scenario.solver, "time_limit_s", 300.0))
        self.start = time.perf_counter()

    def remaining(self, step: str) -> float:
        left = self.limit_s - (time.perf_counter() - self.start)
        if left <= 0.0:
            raise TimeLimitExceeded(
                f"the run's time limit of {self.limit_s:g} s (solver.time_limit) was reached "
                f"before {step}; raise solver.time_limit or simplify the case")
        return left


def _free(scenario):
    """The scenario with the free climb profile (internal what-if; nothing to validate)."""
    return dataclasses.replace(scenario,
                               mission=dataclasses.replace(scenario.mission, profile="free"))


def _energy_state(scenario, model, objective, progress):
    from climbopt import rutowski  # looked up at call time (tests count the calls)

    cb = progress(f"energy-state, minimum {objective}") if progress else None
    return rutowski.solve_energy_state(scenario, objective, model=model, progress=cb)


def _collocation(scenario, model, objective, guess, progress, clock, compile=None,
                 from_neighbour=False):
    """Collocation warm-started from ``guess``, re-simulated; (trajectory or FailedRun, error).
    ``compile``, ``from_neighbour``: see :func:`climbopt.collocation.solve_collocation`."""
    from climbopt.collocation import SolverFailure, solve_collocation
    from climbopt.verify import resimulate

    cb = progress(f"collocation, minimum {objective}") if progress else None
    t0 = time.perf_counter()
    try:
        traj = solve_collocation(scenario, objective, model=model, guess=guess, progress=cb,
                                 time_limit_s=clock.remaining(f"collocation, minimum {objective}"),
                                 compile=compile, from_neighbour=from_neighbour)
    except SolverFailure as exc:
        error = (f"collocation, minimum {objective}: not converged ({exc.status}, "
                 f"{exc.iterations} iterations): {exc}")
        if exc.trajectory is not None:
            return exc.trajectory, error
        return FailedRun(Method.COLLOCATION, objective, status=exc.status, message=str(exc),
                         iterations=exc.iterations, wall_s=time.perf_counter() - t0), error
    verification = resimulate(traj, scenario, model)
    traj = traj.with_(verification=verification)
    if not verification.ok:
        return traj, (f"collocation, minimum {objective}: the re-simulation check failed "
                      f"({verification.message}); the result is not ranked")
    return traj, ""


def _schedules(scenario, model, objectives, references, env, progress):
    """Best flown schedule per objective and the scenario's own schedules."""
    from climbopt import procedure

    rows, errors, warnings = [], [], []
    for obj in objectives:
        cb = progress(f"best schedule, minimum {obj}") if progress else None
        if cb:
            cb("searching", 0.0)
        try:
            rows.append(procedure.best_schedule(scenario, model, obj,
                                                reference=references.get(obj)))
        except procedure.ScheduleNotFlyable as exc:
            errors.append(f"best schedule, minimum {obj}: {exc}")
            rows.append(FailedRun(Method.BEST_SCHEDULE, obj, status="no flyable schedule",
                                  message=str(exc)))
    for spec in scenario.schedules:
        try:
            rows.append(procedure.fly_schedule(scenario, model, spec))
        except procedure.ScheduleNotFlyable as exc:
            warnings.append(f"schedule {spec.name}: {exc}")
            rows.append(FailedRun(Method.SCHEDULE, Objective.NONE, status="not flyable",
                                  message=str(exc), name=spec.name))
    return [assess(r, env) if isinstance(r, Trajectory) else r for r in rows], errors, warnings


def run_mission(scenario, model=None, *, method: str = "both", objectives=("time", "fuel"),
                schedules: bool = True, progress=None) -> RunResult:
    """Solve ``scenario`` for each objective with ``method`` (see :data:`METHODS`).

    Parameters
    ----------
    scenario : Scenario
    model : AircraftModel, optional
        Built from the scenario when omitted.
    method : {"energy", "collocation", "both"}
    objectives : sequence of "time", "fuel", "weighted"
    schedules : bool
        Fly the best schedule per objective and the scenario's own schedules.
    progress : callable(label) -> callable(message, fraction) or None, optional

    Raises
    ------
    climbopt.rutowski.InfeasibleMission
        The target cannot be reached (the message names the highest reachable energy height).
    TimeLimitExceeded
        The run's time limit was reached.

    One piece over 60 lines, most of them this documentation: the body is one loop over the
    objectives that fills the results, errors, costs and references together.
    """
    from climbopt.envelope import envelope_for

    if method not in METHODS:
        raise ValueError(f"method must be one of {', '.join(METHODS)}, got {method!r}")
    if model is None:
        from climbopt.aircraft import build_model

        model = build_model(scenario)
    clock = _Clock(scenario)
    env = envelope_for(scenario, model)
    results, errors, costs, references = [], [], [], {}
    procedure_profile = scenario.mission.profile == "procedure"
    for obj in objectives:
        clock.remaining(f"the energy-state solution, minimum {obj}")
        energy = assess(_energy_state(scenario, model, obj, progress), env)
        if procedure_profile:
            costs.append(ProcedureCost(Objective(obj),
                                       _energy_state(_free(scenario), model, obj, None), energy))
        if method in ("energy", "both"):
            results.append(energy)
        references[obj] = energy
        if method in ("collocation", "both"):
            row, error = _collocation(scenario, model, obj, energy, progress, clock)
            row = assess(row, env) if isinstance(row, Trajectory) else row
            results.append(row)
            if error:
                errors.append(error)
            if row.ranked:
                references[obj] = row
            elif method == "collocation":
                results.append(energy.with_notes(
                    "energy-state result reported because the collocation solve failed"))
    warnings = []
    if schedules:
        clock.remaining("the flown schedules")
        rows, sched_errors, warnings = _schedules(scenario, model, objectives, references, env,
                                                  progress)
        results += rows
        errors += sched_errors
    return RunResult(tuple(results), tuple(errors), tuple(warnings), tuple(costs),
                     common_point(results, scenario, model))


#: Ground distances within this fraction of each other count as the same (no common point).
COMMON_POINT_TOLERANCE = 1e-3


def common_point(results, scenario, model) -> CommonPoint | None:
    """The :class:`CommonPoint` of ``results`` (None when every ranked trajectory covers the same
    ground distance to within :data:`COMMON_POINT_TOLERANCE`, e.g. with a dash distance)."""
    from climbopt.cruise import LevelFlightImpossible, cruise

    ranked = [r.distance_m for r in results if isinstance(r, Trajectory) and r.ranked]
    if not ranked or max(ranked) - min(ranked) <= COMMON_POINT_TOLERANCE * max(ranked):
        return None
    far = max(ranked)
    target = scenario.mission.target
    times, fuels, notes, unusable = [], [], [], ""
    for r in results:
        if not isinstance(r, Trajectory):
            times.append(None)
            fuels.append(None)
            continue
        try:
            leg = cruise(model, target.altitude_m, target.tas_m_s, r.final_mass_kg,
                         max(far - r.distance_m, 0.0))
        except LevelFlightImpossible as exc:
            times.append(None)
            fuels.append(None)
            notes.append(f"{r.label}: no level flight to the common point: {exc}")
            if r.ranked and not unusable:
                unusable = f"level flight at the target state is not possible ({exc})"
            continue
        times.append(r.time_s + leg.time_s)
        fuels.append(r.fuel_kg + leg.fuel_kg)
    return CommonPoint(far, tuple(times), tuple(fuels), tuple(notes), unusable)


def solve_case(scenario, method: str, objective: str, *, model=None,
               compile: bool | None = None, from_neighbour: bool = False) -> Trajectory:
    """One result for a sweep case: the energy-state solution (``method="energy"``), or the
    collocation solution warm-started from it and re-simulated (``"collocation"``), assessed.
    ``compile``: evaluate the collocation point function from compiled C (default: the
    scenario's ``solver.compile``; see :func:`climbopt.collocation.solve_collocation`). The
    collocation problem built for one case is reused by the next cases of the same aircraft in
    the same process (:mod:`climbopt.collocation`); with ``from_neighbour`` its first mesh pass
    also starts from the previous case's solution (same optimum to IPOPT's tolerance).

    Raises the solvers' exceptions (InfeasibleMission, SolverFailure, TimeLimitExceeded); an
    unranked result is returned with its issues.
    """
    from climbopt.collocation import SolverFailure
    from climbopt.envelope import envelope_for

    if model is None:
        from climbopt.aircraft import build_model

        model = build_model(scenario)
    env = envelope_for(scenario, model)
    energy = _energy_state(scenario, model, objective, None)
    if method == "energy":
        return assess(energy, env)
    row, error = _collocation(scenario, model, objective, energy, None, _Clock(scenario),
                              compile, from_neighbour)
    if isinstance(row, FailedRun):
        raise SolverFailure(error, status=row.status, iterations=row.iterations)
    return assess(row, env)
