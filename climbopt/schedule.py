"""Crew-style climb schedules: the speed to fly at round altitudes, CAS below the crossover
altitude and Mach above it, with the time, fuel and ground distance from the start.

Crews and flight-management systems fly a climb as constant calibrated airspeed (CAS) until the
Mach number reached at that CAS equals the planned climb Mach, then constant Mach (common
practice, no source). The altitude where a CAS and a Mach number give the same speed is the
*crossover altitude*. It depends only on the static pressure (the impact pressure is a function
of CAS alone, and of Mach and static pressure), so on a non-standard day it is the same pressure
altitude as on a standard day.

Everything here is SI; conversion to feet and knots happens in :mod:`climbopt.report`.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from climbopt.airspeed import impact_pressure_from_cas, impact_pressure_pa, tas_from_speed
from climbopt.atmosphere import altitude_from_pressure, standard_atmosphere
from climbopt.results import Trajectory
from climbopt.units import ft_to_m

#: Row spacing of schedules printed in US units (2,000 ft) and in SI units (500 m).
STEP_US_M = ft_to_m(2000.0)
STEP_SI_M = 500.0

def default_step_m(units: str) -> float:
    """Schedule row spacing for a unit system: 2,000 ft for ``"us"``, 500 m for ``"si"`` [m]."""
    if units == "us":
        return STEP_US_M
    if units == "si":
        return STEP_SI_M
    raise ValueError(f"units must be 'si' or 'us', got {units!r}")


def crossover_altitude_m(cas_m_s: float, mach: float) -> float:
    """Altitude [m, geometric, US Standard Atmosphere 1976 pressure] where ``cas_m_s`` and
    ``mach`` are the same airspeed.

    Solves q_c(CAS) = q_c(M, p(h)) for h, with q_c the impact pressure from the compressible
    pitot formulas of :mod:`climbopt.airspeed` (NACA Report 1135, 1953: isentropic subsonic and
    Rayleigh supersonic pitot relations). Below the returned altitude, flying the CAS gives a Mach
    number below ``mach``; above it, more. A temperature offset does not move it (pressure at a
    given altitude is unchanged by the offset convention used throughout climbopt).

    The altitude is geometric, like every altitude in climbopt; the pressure altitude that crews
    quote is geopotential and about 0.13 % lower near 28,000 ft (US Standard Atmosphere 1976,
    eq. 18). Raises ``ValueError`` when the crossover pressure lies outside the atmosphere model.
    """
    cas_m_s = float(cas_m_s)
    mach = float(mach)
    if not (cas_m_s > 0.0 and mach > 0.0):
        raise ValueError(f"CAS and Mach must be positive, got {cas_m_s} m/s and {mach}")
    # Both pitot formulas (subsonic isentropic, supersonic Rayleigh) are linear in the static
    # pressure, so q_c(M, p) = p * q_c(M, 1 Pa) and the crossover pressure follows directly.
    qc_target = float(impact_pressure_from_cas(cas_m_s))
    pressure_pa = qc_target / float(impact_pressure_pa(mach, 1.0))
    try:
        return float(altitude_from_pressure(pressure_pa))
    except ValueError:
        raise ValueError(
            f"CAS {cas_m_s:.1f} m/s and Mach {mach:.3f} cross over at {pressure_pa:.4g} Pa, "
            "outside the standard atmosphere") from None


@dataclass(frozen=True)
class ScheduleRow:
    """One row of a climb schedule (SI).

    ``fly`` is "CAS" below the crossover altitude and "Mach" at or above it; ``point`` is
    "start", "" (a round altitude), "top of climb" or "end" (end of a level leg after the climb).
    ``time_s``, ``fuel_kg`` and ``distance_m`` are counted from the start of the trajectory.
    """

    altitude_m: float
    fly: str
    cas_m_s: float
    mach: float
    tas_m_s: float
    time_s: float
    fuel_kg: float
    distance_m: float
    point: str = ""


@dataclass
class ClimbSchedule:
    """A crew-style climb schedule derived from one trajectory.

    Attributes
    ----------
    method, objective : str
        Copied from the trajectory.
    rows : list[ScheduleRow]
        Start, every round altitude, top of climb (and end of a level leg, if any).
    step_m : float
        Spacing of the round altitudes [m].
    climb_cas_m_s : float
        The constant CAS [m/s] of the two-segment (CAS, then Mach) schedule closest to the
        trajectory's own speeds.
    climb_mach : float
        The constant Mach number of that schedule.
    crossover_altitude_m : float
        Where ``climb_cas_m_s`` and ``climb_mach`` are the same speed [m]. At or above the top of
        climb means "fly CAS all the way"; at or below the start means "Mach all the way".
    notes : list[str]
        Caveats (descents inside the climb, CAS restrictions left out of the fit, ...).
    """

    method: str
    objective: str
    rows: list[ScheduleRow]
    step_m: float
    climb_cas_m_s: float
    climb_mach: float
    crossover_altitude_m: float
    notes: list[str] = field(default_factory=list)


def _first_passage(altitude_m: np.ndarray, levels_m: np.ndarray) -> np.ndarray:
    """Fractional indices where the altitude first reaches each level (levels ascending, within
    [altitude[0], max(altitude)])."""
    running_max = np.maximum.accumulate(altitude_m)
    out = np.empty(len(levels_m))
    for j, level in enumerate(levels_m):
        i = int(np.searchsorted(running_max, level, side="left"))
        if i == 0:
            out[j] = 0.0
            continue
        i = min(i, len(altitude_m) - 1)
        h0, h1 = altitude_m[i - 1], altitude_m[i]
        # altitude[i-1] < level <= altitude[i] because running_max first exceeds level at i
        frac = 0.0 if h1 == h0 else (level - h0) / (h1 - h0)
        out[j] = (i - 1) + float(np.clip(frac, 0.0, 1.0))
    return out


def _at(column: np.ndarray, fractional_index: np.ndarray) -> np.ndarray:
    """Linear interpolation of a column at fractional indices."""
    return np.interp(fractional_index, np.arange(len(column)), column)


def fit_cas_mach(altitude_m, cas_m_s, mach, tas_m_s, temperature_offset_k: float = 0.0):
    """Best two-segment crew schedule for a climb given as samples ascending in altitude.

    Candidates are the trajectory's own (CAS, Mach) pairs at each sample altitude h_x: flying
    that CAS below h_x and that Mach above it gives a continuous true airspeed. The candidate with
    the least mean squared relative TAS difference to the samples is returned as
    ``(cas_m_s, mach, crossover_altitude_m)``. (A least-squares fit of our own; common practice
    is to pick the pair by hand from the optimal speeds.)
    """
    h = np.asarray(altitude_m, float)
    cas = np.asarray(cas_m_s, float)
    m = np.asarray(mach, float)
    v = np.asarray(tas_m_s, float)
    sound = standard_atmosphere(h, temperature_offset_k).speed_of_sound_m_s
    best = (np.inf, 0)
    for k in range(len(h)):
        v_cas = np.asarray(tas_from_speed("cas", cas[k], h, temperature_offset_k), float)
        v_mach = m[k] * sound
        v_sched = np.where(h < h[k], v_cas, v_mach)
        err = float(np.mean(((v_sched - v) / v) ** 2))
        if err < best[0] - 1e-15:
            best = (err, k)
    k = best[1]
    try:
        h_x = crossover_altitude_m(cas[k], m[k])
    except ValueError:
        h_x = float(h[k])
    return float(cas[k]), float(m[k]), h_x


def climb_schedule(trajectory: Trajectory, step_m: float = STEP_SI_M, *,
                   temperature_offset_k: float = 0.0,
                   fit_above_m: float | None = None) -> ClimbSchedule:
    """Crew-style climb schedule of ``trajectory`` at round altitudes every ``step_m`` metres.

    Each row gives the trajectory's own speed where it first reaches that altitude, to be flown
    as CAS below the crossover altitude and as Mach above it (see :func:`fit_cas_mach` for how
    the crossover is chosen), and the time [s], fuel [kg] and ground distance [m] from the start.
    ``fit_above_m`` leaves out of the fit the part of the climb below that altitude (e.g. a
    250 kt restriction below 10,000 ft, flown separately).
    """
    if not step_m > 0.0:
        raise ValueError(f"step_m must be positive, got {step_m}")
    t = trajectory.table
    h = t["altitude_m"]
    top = int(np.argmax(h))
    h_start, h_top = float(h[0]), float(h[top])
    notes: list[str] = []
    if np.any(np.diff(h[: top + 1]) < -1.0):
        notes.append("the path descends somewhere before the top of climb (a dive to gain speed); "
                     "rows give the first time each altitude is reached")

    first = np.floor(h_start / step_m) * step_m + step_m
    levels = np.arange(first, h_top - 1e-6, step_m) if h_top > first else np.empty(0)
    fine_levels = np.linspace(h_start, h_top, 200) if h_top > h_start else np.array([h_start])
    if fit_above_m is not None:
        kept = fine_levels[fine_levels >= fit_above_m]
        if kept.size >= 2:
            fine_levels = kept
            notes.append("crossover fitted above the speed-restriction altitude only")

    idx_fine = _first_passage(h, fine_levels)
    cas_x, mach_x, h_x = fit_cas_mach(
        _at(h, idx_fine), _at(t["cas_m_s"], idx_fine), _at(t["mach"], idx_fine),
        _at(t["tas_m_s"], idx_fine), temperature_offset_k)

    def row(fidx: float, point: str) -> ScheduleRow:
        fi = np.array([fidx])
        alt = float(_at(h, fi)[0])
        return ScheduleRow(
            altitude_m=alt,
            fly="CAS" if alt < h_x else "Mach",
            cas_m_s=float(_at(t["cas_m_s"], fi)[0]),
            mach=float(_at(t["mach"], fi)[0]),
            tas_m_s=float(_at(t["tas_m_s"], fi)[0]),
            time_s=float(_at(t["time_s"], fi)[0] - t["time_s"][0]),
            fuel_kg=float(_at(t["fuel_used_kg"], fi)[0] - t["fuel_used_kg"][0]),
            distance_m=float(_at(t["distance_m"], fi)[0] - t["distance_m"][0]),
            point=point,
        )

    rows = [row(0.0, "start")]
    rows += [row(fi, "") for fi in _first_passage(h, levels)]
    if top > 0:
        rows.append(row(float(top), "top of climb"))
    last = len(h) - 1
    if last > top:
        rows.append(row(float(last), "end"))
    return ClimbSchedule(
        method=trajectory.method, objective=trajectory.objective, rows=rows, step_m=float(step_m),
        climb_cas_m_s=cas_x, climb_mach=mach_x, crossover_altitude_m=h_x, notes=notes)
