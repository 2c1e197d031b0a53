"""Small synthetic trajectories for the report, schedule and plot tests (no solver needed).

``straight_climb`` builds a climb whose columns are consistent with each other: the speed
follows a constant-CAS-then-constant-Mach schedule through the project's own atmosphere and
airspeed conversions, time follows from a fixed rate of climb, distance from the TAS, fuel from a
fixed fuel flow.
"""

from __future__ import annotations

import numpy as np

from climbopt.results import StateValues, Trajectory, Verification, Zoom

G0 = 9.80665


def straight_climb(method="energy-state", objective="time", *, top_m=11000.0, cas_m_s=150.0,
                   mach=0.78, rate_m_s=10.0, fuel_flow_kg_s=1.5, mass0_kg=60000.0, n=120,
                   converged=True, level_s=0.0, temperature_offset_k=0.0, restriction=None):
    """Climb from 0 m to ``top_m`` at ``rate_m_s``: constant CAS, then constant Mach above the
    crossover; optionally a level leg of ``level_s`` seconds at the top and a speed restriction
    ``(cas_m_s, below_m)`` flown below an altitude."""
    from climbopt.airspeed import cas_from_tas, tas_from_speed
    from climbopt.atmosphere import standard_atmosphere

    h = np.linspace(0.0, top_m, n)
    a = standard_atmosphere(h, temperature_offset_k).speed_of_sound_m_s
    v_cas = np.asarray(tas_from_speed("cas", cas_m_s, h, temperature_offset_k), float)
    v = np.minimum(v_cas, mach * a)  # below the crossover the CAS gives the lower Mach
    if restriction is not None:
        v_low = np.asarray(tas_from_speed("cas", restriction[0], h, temperature_offset_k), float)
        v = np.where(h < restriction[1], v_low, v)
    t = h / rate_m_s
    if level_s > 0.0:
        t_level = t[-1] + np.linspace(0.0, level_s, 20)[1:]
        h = np.concatenate([h, np.full(19, top_m)])
        v = np.concatenate([v, np.full(19, v[-1])])
        a = np.concatenate([a, np.full(19, a[-1])])
        t = np.concatenate([t, t_level])
    dist = np.concatenate([[0.0], np.cumsum(0.5 * (v[1:] + v[:-1]) * np.diff(t))])
    fuel = fuel_flow_kg_s * t
    cas = np.asarray(cas_from_tas(v, h, temperature_offset_k), float)
    gamma = np.where(np.gradient(h) > 0, np.arcsin(np.clip(rate_m_s / v, 0, 1)), 0.0)
    table = {
        "time_s": t, "altitude_m": h, "tas_m_s": v, "mach": v / a, "cas_m_s": cas,
        "energy_height_m": h + v**2 / (2 * G0), "ps_m_s": np.full_like(h, rate_m_s),
        "flight_path_angle_rad": gamma, "mass_kg": mass0_kg - fuel, "fuel_used_kg": fuel,
        "distance_m": dist, "throttle": np.ones_like(h),
    }
    table.update(_lift_columns(h, v, mass0_kg - fuel, temperature_offset_k))
    return Trajectory(method=method, objective=objective, table=table, converged=converged,
                      status="optimal" if converged else "max iterations", iterations=0 if
                      method == "energy-state" else 25, wall_s=0.1)


def simple_table(n=50, *, top_m=5000.0, tas_m_s=120.0, duration_s=300.0, fuel_kg=200.0,
                 mass0_kg=5000.0):
    """A table with simple closed-form columns (not physically consistent; for bookkeeping)."""
    t = np.linspace(0.0, duration_s, n)
    h = np.linspace(0.0, top_m, n)
    v = np.full(n, tas_m_s)
    fuel = np.linspace(0.0, fuel_kg, n)
    return {
        "time_s": t, "altitude_m": h, "tas_m_s": v, "mach": v / 340.0, "cas_m_s": v * 0.9,
        "energy_height_m": h + v**2 / (2 * G0), "ps_m_s": np.full(n, top_m / duration_s),
        "flight_path_angle_rad": np.full(n, 0.1), "mass_kg": mass0_kg - fuel,
        "fuel_used_kg": fuel, "distance_m": v * t, "throttle": np.ones(n),
        "lift_coefficient": np.full(n, 0.5), "load_factor": np.ones(n),
        "dynamic_pressure_pa": np.full(n, 8000.0), "thrust_n": np.full(n, 50_000.0),
    }


def _lift_columns(h, v, mass_kg, temperature_offset_k, area_m2=120.0):
    """Dynamic pressure, 1 g lift coefficient (wing area ``area_m2``) and load factor 1."""
    from climbopt.atmosphere import standard_atmosphere

    q = 0.5 * standard_atmosphere(h, temperature_offset_k).density_kg_m3 * v * v
    return {"dynamic_pressure_pa": q, "thrust_n": np.full_like(h, 100_000.0),
            "lift_coefficient": mass_kg * G0 / (q * area_m2),
            "load_factor": np.ones_like(h)}


def with_zoom(traj: Trajectory) -> Trajectory:
    """Copy of ``traj`` with one constant-energy zoom recorded at the middle point."""
    i = len(traj.table["time_s"]) // 2
    tb = traj.table
    zoom = Zoom(energy_height_m=float(tb["energy_height_m"][i]),
                from_altitude_m=float(tb["altitude_m"][i]) + 500.0,
                from_tas_m_s=float(tb["tas_m_s"][i]) - 20.0,
                to_altitude_m=float(tb["altitude_m"][i]), to_tas_m_s=float(tb["tas_m_s"][i]),
                kind="dive", reason="branch jump", index=i)
    return traj.with_(zooms=(zoom,))


def verification(final_miss_relative: float, ok: bool) -> Verification:
    """A re-simulation record with a given final miss (fraction) and verdict (no simulation)."""
    zero = StateValues(0.0, 0.0, 0.0, 0.0, 0.0)
    return Verification(ok=ok, message="synthetic", final_state_miss=zero,
                        simulated_final_state=zero, final_miss_energy_m=final_miss_relative * 1e4,
                        final_miss_relative=final_miss_relative, final_energy_height_m=1e4,
                        largest_departure_relative=final_miss_relative, departure_time_s=None,
                        limit_excess={}, worst_limit="", final_miss_tolerance=1e-3,
                        limit_tolerance=1e-2, steps=0)
