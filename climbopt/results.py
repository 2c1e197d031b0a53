"""Result type shared by both solvers: a trajectory with a per-point table and totals.

All arrays are 1-D numpy arrays of equal length, ordered in time, SI units.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

#: Per-point columns every trajectory carries, with their units (also the CSV header order).
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
}


@dataclass(frozen=True)
class Zoom:
    """A constant-energy transition of the energy-state path (instantaneous in that model).

    ``kind`` is "dive" (altitude falls, speed rises) or "climb" (altitude rises, speed falls);
    ``reason`` says why: "branch jump" (the optimal locus jumps), "final" (to the target point),
    "initial" (from the start point onto the locus).
    """

    energy_height_m: float
    from_altitude_m: float
    from_tas_m_s: float
    to_altitude_m: float
    to_tas_m_s: float
    kind: str
    reason: str
    index: int  # index of the point in the per-point table where the zoom ends


@dataclass
class Trajectory:
    """One solution of one method for one objective.

    Attributes
    ----------
    method : str
        "energy-state" or "collocation".
    objective : str
        "time", "fuel" or "weighted".
    table : dict[str, np.ndarray]
        Per-point columns, keys as in :data:`COLUMNS`.
    converged : bool
        True only for a solution the solver reports as optimal (energy-state: always True when
        it returns; collocation: IPOPT success and mesh refinement converged).
    status : str
        Solver status text.
    iterations : int
        Solver iterations (IPOPT iterations summed over the mesh refinements; 0 for energy-state).
    wall_s : float
        Wall-clock time of the solve [s].
    zooms : list[Zoom]
        Constant-energy zooms (energy-state only).
    verification : dict | None
        Re-simulation check (collocation): ``final_state_miss``, ``max_path_violation``, ``ok``.
    notes : list[str]
        Anything the user must know (assumptions used, limits active, dash leg details).
    controls : dict[str, np.ndarray] | None
        Control histories at the table's points (collocation): ``lift_coefficient`` [-],
        ``throttle`` [-], ``load_factor`` [-], ``dynamic_pressure_pa`` [Pa] and, with thrust
        along the body axis, ``angle_of_attack_rad`` [rad]. Used by :mod:`climbopt.verify`.
    """

    method: str
    objective: str
    table: dict[str, np.ndarray]
    converged: bool = True
    status: str = ""
    iterations: int = 0
    wall_s: float = 0.0
    zooms: list[Zoom] = field(default_factory=list)
    verification: dict | None = None
    notes: list[str] = field(default_factory=list)
    controls: dict | None = None

    def __post_init__(self):
        n = None
        for key in COLUMNS:
            if key not in self.table:
                raise ValueError(f"trajectory table misses column {key!r}")
            arr = np.asarray(self.table[key], dtype=float)
            self.table[key] = arr
            if n is None:
                n = arr.shape
            elif arr.shape != n:
                raise ValueError(f"trajectory column {key!r} has shape {arr.shape}, expected {n}")

    @property
    def time_s(self) -> float:
        """Total elapsed time [s]."""
        return float(self.table["time_s"][-1] - self.table["time_s"][0])

    @property
    def fuel_kg(self) -> float:
        """Fuel burnt [kg]."""
        return float(self.table["fuel_used_kg"][-1] - self.table["fuel_used_kg"][0])

    @property
    def distance_m(self) -> float:
        """Ground distance covered [m]."""
        return float(self.table["distance_m"][-1] - self.table["distance_m"][0])

    @property
    def final_mass_kg(self) -> float:
        """Mass at the end [kg]."""
        return float(self.table["mass_kg"][-1])

    def summary(self) -> dict:
        """The stable summary record (keys read by scripts and tests; see ARCHITECTURE.md)."""
        return {
            "method": self.method,
            "objective": self.objective,
            "time_s": self.time_s,
            "fuel_kg": self.fuel_kg,
            "distance_m": self.distance_m,
            "final_mass_kg": self.final_mass_kg,
            "converged": bool(self.converged),
            "status": self.status,
            "iterations": int(self.iterations),
            "wall_s": float(self.wall_s),
            "verification": self.verification,
            "zooms": len(self.zooms),
            "notes": list(self.notes),
        }
