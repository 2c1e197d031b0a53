"""Typed result records shared by every solver, the pipeline and the outputs.

* :class:`Trajectory`: one solution (or one flown schedule) with its per-point table
  (:class:`PointTable`), controls (:class:`Controls`), re-simulation check
  (:class:`Verification`), segments (:class:`Segment`) and zooms (:class:`Zoom`);
* :class:`FailedRun`: a solve that produced no usable trajectory;
* :class:`Method`, :class:`Objective`: the named values of ``method`` and ``objective``.

Every record is frozen; derive a changed copy with :meth:`Trajectory.with_`. All arrays are 1-D
numpy arrays of equal length, ordered in time, SI units, and read-only.
"""

from __future__ import annotations

import dataclasses
from collections.abc import Iterator, Mapping
from dataclasses import dataclass
from enum import StrEnum

import numpy as np


class Method(StrEnum):
    """Where a result comes from (the strings are those written to ``summary.json``)."""

    ENERGY_STATE = "energy-state"
    COLLOCATION = "collocation"
    SCHEDULE = "schedule"  # a named schedule of the scenario, flown through the model
    BEST_SCHEDULE = "best-schedule"  # the best constant CAS/Mach schedule, flown


class Objective(StrEnum):
    """What a result minimises (``NONE`` for a flown schedule chosen by the user)."""

    TIME = "time"
    FUEL = "fuel"
    WEIGHTED = "weighted"
    NONE = "none"


#: Per-point columns every trajectory carries, with their units (also the CSV column order).
COLUMNS: dict[str, str] = {
    "time_s": "s",
    "altitude_m": "m",
    "tas_m_s": "m/s",
    "mach": "-",
    "cas_m_s": "m/s",
    "energy_height_m": "m",
    "ps_m_s": "m/s",
    "flight_path_angle_rad": "rad",
    "mass_kg": "kg",
    "fuel_used_kg": "kg",
    "distance_m": "m",
    "throttle": "-",
    "lift_coefficient": "-",
    "load_factor": "-",
    "dynamic_pressure_pa": "Pa",
    "thrust_n": "N",
}


class PointTable(Mapping):
    """Read-only per-point table: ``table["altitude_m"]`` or ``table.altitude_m``.

    Holds exactly the columns of :data:`COLUMNS`, each a read-only float array of one length.
    """

    __slots__ = ("_cols",)

    def __init__(self, columns: Mapping):
        cols = {}
        n = None
        for key in COLUMNS:
            if key not in columns:
                raise ValueError(f"trajectory table misses column {key!r}")
            arr = np.array(columns[key], dtype=float, copy=True).reshape(-1)
            arr.setflags(write=False)
            if n is None:
                n = arr.shape
            elif arr.shape != n:
                raise ValueError(f"trajectory column {key!r} has shape {arr.shape}, expected {n}")
            cols[key] = arr
        extra = set(columns) - set(COLUMNS)
        if extra:
            raise ValueError(f"unknown trajectory column(s): {', '.join(sorted(extra))}")
        object.__setattr__(self, "_cols", cols)

    def __getitem__(self, key: str) -> np.ndarray:
        return self._cols[key]

    def __iter__(self) -> Iterator[str]:
        return iter(self._cols)

    def __len__(self) -> int:
        return len(self._cols)

    def __getattr__(self, name: str) -> np.ndarray:
        try:
            return object.__getattribute__(self, "_cols")[name]
        except KeyError:
            raise AttributeError(name) from None

    def __setattr__(self, name, value):
        raise AttributeError("PointTable is read-only")

    def __reduce__(self):
        """Pickle support (process pools): rebuilt from its columns."""
        return (PointTable, (dict(self._cols),))

    @property
    def size(self) -> int:
        """Number of points."""
        return int(self._cols["time_s"].size)

    def replaced(self, **columns) -> PointTable:
        """A copy with some columns replaced."""
        return PointTable({**self._cols, **columns})

    def __repr__(self) -> str:
        return f"PointTable({self.size} points)"


@dataclass(frozen=True)
class Zoom:
    """A constant-energy transition of the energy-state path (instantaneous in that model).

    ``kind`` is "dive" (altitude falls, speed rises) or "climb" (altitude rises, speed falls);
    ``reason`` says why: "branch jump" (the optimal locus jumps), "final" (to the target point),
    "initial" (from the start point onto the locus). ``index``: the point of the per-point
    table where the zoom ends. Energy height and altitudes [m], speeds TAS [m/s].
    """

    energy_height_m: float
    from_altitude_m: float
    from_tas_m_s: float
    to_altitude_m: float
    to_tas_m_s: float
    kind: str
    reason: str
    index: int


#: Segment kinds of a climb, in the words the crew tables use.
SEGMENT_KINDS = ("climb", "accelerate", "decelerate", "level acceleration", "level deceleration",
                 "level", "cruise", "dash", "descent", "zoom")

#: Altitude change [m] and speed change [m/s] between two points below which a step counts as
#: level flight, and as constant speed.
LEVEL_TOLERANCE_M = 0.5
SPEED_TOLERANCE_M_S = 0.05


@dataclass(frozen=True)
class Segment:
    """A part of a trajectory flown one way, between two points of its table (inclusive).

    ``kind``: "climb" (climbing at the scheduled or optimal speed), "accelerate" / "decelerate"
    (climbing while changing speed with a share of the excess power), "level acceleration" (level flight, speed
    changing, e.g. at the target altitude), "level" / "cruise" / "dash" (level flight at constant
    speed), "zoom" (an instantaneous energy-state exchange). ``hold``: what is held, e.g.
    "CAS 290 kt" in words chosen by the solver (SI values in ``cas_m_s`` / ``mach``).
    """

    kind: str
    start_index: int
    end_index: int
    hold: str = ""
    cas_m_s: float | None = None
    mach: float | None = None


def derive_segments(table, zooms=()) -> tuple[Segment, ...]:
    """Segments of an optimised path from its table: each step between consecutive points is a
    zoom (listed in ``zooms``), level flight (altitude change within :data:`LEVEL_TOLERANCE_M`:
    "level acceleration", "level deceleration" or "level"), a "climb" or a "descent"; runs of
    steps of one kind form a segment."""
    h = np.asarray(table["altitude_m"], dtype=float)
    v = np.asarray(table["tas_m_s"], dtype=float)
    if h.size < 2:
        return ()
    dh, dv = np.diff(h), np.diff(v)
    kinds = np.where(dh > LEVEL_TOLERANCE_M, "climb",
                     np.where(dh < -LEVEL_TOLERANCE_M, "descent", "level"))
    kinds = kinds.astype(object)
    level = kinds == "level"
    kinds[level & (dv > SPEED_TOLERANCE_M_S)] = "level acceleration"
    kinds[level & (dv < -SPEED_TOLERANCE_M_S)] = "level deceleration"
    for z in zooms:
        if 1 <= z.index <= kinds.size:
            kinds[z.index - 1] = "zoom"
    segments, start = [], 0
    for i in range(1, kinds.size + 1):
        if i == kinds.size or kinds[i] != kinds[start]:
            segments.append(Segment(str(kinds[start]), start, i))
            start = i
    return tuple(segments)


@dataclass(frozen=True)
class Controls:
    """Control histories at the table's points (collocation results).

    ``lift_coefficient`` [-], ``throttle`` [-] (fraction of the rating) and, with thrust along
    the body axis, ``angle_of_attack_rad`` [rad].
    """

    lift_coefficient: np.ndarray
    throttle: np.ndarray
    angle_of_attack_rad: np.ndarray | None = None


@dataclass(frozen=True)
class StateValues:
    """One value per state of the point-mass model: altitude [m], TAS [m/s], flight-path angle
    [rad], mass [kg], ground distance [m]."""

    altitude_m: float
    tas_m_s: float
    flight_path_angle_rad: float
    mass_kg: float
    distance_m: float


@dataclass(frozen=True)
class Verification:
    """Re-simulation check of a trajectory's controls (see :mod:`climbopt.verify`).

    Attributes
    ----------
    ok : bool
        Final miss, every limit excess and the integration within their tolerances.
    message : str
        One sentence saying what was found.
    final_state_miss : StateValues
        Simulated minus planned final state (NaN when the integration failed).
    simulated_final_state : StateValues
        Where the simulation ended.
    final_miss_energy_m : float
        sqrt(dh^2 + (V dV / g0)^2) [m], the miss in altitude and speed as energy height.
    final_miss_relative : float
        ``final_miss_energy_m`` over the final energy height [-].
    final_energy_height_m : float
        Planned final energy height [m].
    largest_departure_relative : float
        Largest distance between simulated and planned states at interval ends, as energy
        height over the final energy height [-].
    departure_time_s : float or None
        Where that distance first exceeded the final-miss tolerance [s] (None if never).
    limit_excess : Mapping[str, float]
        Largest margin of each envelope limit along the simulated path (see
        :mod:`climbopt.envelope`; <= 0 means inside), clipped below at 0.
    worst_limit : str
        Name of the limit with the largest excess ("" when none exceeds 0).
    final_miss_tolerance, limit_tolerance : float
        Tolerances used [-].
    steps : int
        Integrator steps.
    """

    ok: bool
    message: str
    final_state_miss: StateValues
    simulated_final_state: StateValues
    final_miss_energy_m: float
    final_miss_relative: float
    final_energy_height_m: float
    largest_departure_relative: float
    departure_time_s: float | None
    limit_excess: Mapping[str, float]
    worst_limit: str
    final_miss_tolerance: float
    limit_tolerance: float
    steps: int

    @property
    def max_limit_excess(self) -> float:
        """The largest limit excess [-] (0 when every limit is met)."""
        return max(self.limit_excess.values(), default=0.0)

    def as_dict(self) -> dict:
        """JSON-ready record (SI)."""
        d = dataclasses.asdict(self)
        d["limit_excess"] = dict(self.limit_excess)
        d["max_limit_excess"] = self.max_limit_excess
        return d


@dataclass(frozen=True)
class ReferenceComparison:
    """A result measured against a reference result (e.g. a best flyable schedule against the
    collocation optimum of the same objective): differences are result minus reference.

    ``reference``: the reference's label; ``objective``: the objective compared;
    ``time_s`` / ``fuel_kg``: the reference's time [s] and fuel [kg]; ``time_difference_s`` [s],
    ``fuel_difference_kg`` [kg]; ``objective_difference``: in the objective's unit (s for time,
    kg for fuel and for the weighted fuel + w t); ``objective_difference_relative``: that over
    the reference's objective value [-] (the penalty of the result).
    """

    reference: str
    objective: Objective
    time_s: float
    fuel_kg: float
    time_difference_s: float
    fuel_difference_kg: float
    objective_difference: float
    objective_difference_relative: float

    def as_dict(self) -> dict:
        """JSON-ready record (SI)."""
        d = dataclasses.asdict(self)
        d["objective"] = str(self.objective)
        return d


@dataclass(frozen=True)
class Trajectory:
    """One solution of one method for one objective, or one flown schedule.

    Attributes
    ----------
    method : Method
    objective : Objective
    table : PointTable
        Per-point columns (:data:`COLUMNS`).
    converged : bool
        True only for a solution the solver reports as optimal (collocation: IPOPT success and
        mesh refinement settled; energy-state and flown schedules: the computation completed).
    status : str
        Solver status text.
    iterations : int
        Solver iterations (IPOPT iterations over all mesh passes; flights for a schedule search).
    wall_s : float
        Wall-clock time of the solve [s].
    zooms : tuple[Zoom, ...]
        Constant-energy zooms (energy-state only).
    segments : tuple[Segment, ...]
        How the path is flown, in order (may be empty).
    verification : Verification or None
        Re-simulation check (collocation results).
    notes : tuple[str, ...]
        What the user must know (assumptions, active limits, dash details).
    issues : tuple[str, ...]
        Why this result must not be ranked as an answer (not converged, re-simulation failed,
        fuel capacity exceeded, a limit broken); empty for a usable result.
    controls : Controls or None
        Control histories (collocation).
    profile : str
        "procedure" or "free" (the climb profile the result obeys).
    name : str
        Name of a flown schedule ("" otherwise).
    schedule : ScheduleSpec or None
        The schedule flown (:class:`climbopt.scenario.ScheduleSpec`; schedule rows only).
    reference : ReferenceComparison or None
        The comparison with a reference result (best flyable schedules against the
        collocation optimum, when it was given).
    """

    method: Method
    objective: Objective
    table: PointTable
    converged: bool = True
    status: str = ""
    iterations: int = 0
    wall_s: float = 0.0
    zooms: tuple[Zoom, ...] = ()
    segments: tuple[Segment, ...] = ()
    verification: Verification | None = None
    notes: tuple[str, ...] = ()
    issues: tuple[str, ...] = ()
    controls: Controls | None = None
    profile: str = "free"
    name: str = ""
    schedule: object = None
    reference: ReferenceComparison | None = None

    def __post_init__(self):
        object.__setattr__(self, "method", Method(self.method))
        object.__setattr__(self, "objective", Objective(self.objective))
        if not isinstance(self.table, PointTable):
            object.__setattr__(self, "table", PointTable(self.table))
        for key in ("zooms", "segments", "notes", "issues"):
            object.__setattr__(self, key, tuple(getattr(self, key)))

    def with_(self, **changes) -> Trajectory:
        """A copy with some fields changed (``notes``/``issues`` given as sequences)."""
        return dataclasses.replace(self, **changes)

    def with_notes(self, *notes: str) -> Trajectory:
        """A copy with notes appended."""
        return self.with_(notes=self.notes + tuple(notes))

    def with_issues(self, *issues: str) -> Trajectory:
        """A copy with issues appended (each makes the result unranked)."""
        return self.with_(issues=self.issues + tuple(issues))

    @property
    def ranked(self) -> bool:
        """True when the result may be ranked as an answer: converged and free of issues."""
        return bool(self.converged) and not self.issues

    @property
    def label(self) -> str:
        """Short human label, e.g. "collocation, minimum time" or "schedule 250/290/M0.74"."""
        if self.method is Method.SCHEDULE:
            return f"schedule {self.name}"
        if self.method is Method.BEST_SCHEDULE:
            return f"best schedule, minimum {self.objective}"
        return f"{self.method}, minimum {self.objective}"

    @property
    def time_s(self) -> float:
        """Total elapsed time [s]."""
        t = self.table["time_s"]
        return float(t[-1] - t[0])

    @property
    def fuel_kg(self) -> float:
        """Fuel burnt [kg]."""
        f = self.table["fuel_used_kg"]
        return float(f[-1] - f[0])

    @property
    def distance_m(self) -> float:
        """Ground distance covered [m]."""
        x = self.table["distance_m"]
        return float(x[-1] - x[0])

    @property
    def final_mass_kg(self) -> float:
        """Mass at the end [kg]."""
        return float(self.table["mass_kg"][-1])

    def summary(self) -> dict:
        """The stable summary record (keys read by scripts and tests)."""
        return {
            "method": str(self.method),
            "objective": str(self.objective),
            "name": self.name,
            "profile": self.profile,
            "time_s": self.time_s,
            "fuel_kg": self.fuel_kg,
            "distance_m": self.distance_m,
            "final_mass_kg": self.final_mass_kg,
            "converged": bool(self.converged),
            "ranked": self.ranked,
            "status": self.status,
            "iterations": int(self.iterations),
            "wall_s": float(self.wall_s),
            "verification": None if self.verification is None else self.verification.as_dict(),
            "zooms": len(self.zooms),
            "notes": list(self.notes),
            "issues": list(self.issues),
            "schedule": None if self.schedule is None else {
                "name": self.schedule.name,
                "cas_below_restriction_m_s": self.schedule.cas_below_restriction_m_s,
                "cas_m_s": self.schedule.cas_m_s, "mach": self.schedule.mach,
                "acceleration_share": self.schedule.acceleration_share},
            "reference": None if self.reference is None else self.reference.as_dict(),
        }

    def to_dataframe(self):
        """The per-point table as a pandas DataFrame (SI columns of :data:`COLUMNS`, one row per
        point, plus ``segment``: the kind of segment each point starts); ``df.attrs`` holds the
        units, method, objective, name and profile. Needs pandas."""
        try:
            import pandas as pd
        except ImportError:  # pragma: no cover - pandas is an optional dependency
            raise ImportError("Trajectory.to_dataframe needs pandas: pip install pandas") from None
        df = pd.DataFrame({k: np.array(self.table[k]) for k in COLUMNS})
        kinds = np.full(self.table.size, "", dtype=object)
        for seg in self.segments:
            kinds[seg.start_index:seg.end_index] = seg.kind
        if self.segments:
            kinds[-1] = self.segments[-1].kind
        df["segment"] = kinds
        df.attrs.update(units=dict(COLUMNS), method=str(self.method),
                        objective=str(self.objective), name=self.name, profile=self.profile)
        return df


@dataclass(frozen=True)
class FailedRun:
    """A solve that produced no usable trajectory (kept so the table can show the failure).

    ``status`` is the solver's status text, ``message`` the error message.
    """

    method: Method
    objective: Objective
    status: str
    message: str
    iterations: int = 0
    wall_s: float = 0.0
    notes: tuple[str, ...] = ()
    name: str = ""

    converged = False
    ranked = False

    def __post_init__(self):
        object.__setattr__(self, "method", Method(self.method))
        object.__setattr__(self, "objective", Objective(self.objective))
        object.__setattr__(self, "notes", tuple(self.notes))

    @property
    def label(self) -> str:
        """Short human label."""
        if self.method is Method.SCHEDULE:
            return f"schedule {self.name}"
        return f"{self.method}, minimum {self.objective}"


Result = Trajectory | FailedRun

__all__ = ["COLUMNS", "Controls", "FailedRun", "Method", "Objective", "PointTable", "Result",
           "ReferenceComparison",
           "SEGMENT_KINDS", "Segment", "derive_segments", "StateValues", "Trajectory", "Verification", "Zoom"]
