"""Synthetic flight-test histories: level accelerations and sawtooth climbs flown through an
aircraft model on a chosen day, with optional sensor noise. For demonstrations and tests of the
reduction (:mod:`climbopt.flighttest`); every history made here is synthetic and says so when
written.

Physics (point mass, wings level, no wind, g = g0): the model gives Ps = V (T - D) / (m g0) at
the model altitude whose standard pressure is the recorded pressure altitude, on the model's day
(its temperature offset). The energy-height rate Ps = dh/dt + (V / g0) dV/dt is split into a
true (tapeline) height rate dh/dt and an acceleration; the recorded pressure altitude changes as
dHp/dt = dh/dt T_std(Hp) / T (hydrostatic equation on a non-standard day; common practice, no
source). Level acceleration: dh/dt = 0, load factor 1. Sawtooth climb at constant CAS:
dh/dt = Ps / (1 + (V / g0)(dV/dHp) T_std / T), load factor cos(gamma) with sin(gamma) = dh/dt / V.
Integrated with scipy's ``solve_ivp`` (RK45, relative tolerance 1e-10).
"""

from __future__ import annotations

from dataclasses import dataclass, replace

import numpy as np
from scipy.integrate import solve_ivp

from climbopt.airspeed import cas_from_mach, mach_from_cas
from climbopt.atmosphere import G0, geometric_from_geopotential, standard_atmosphere
from climbopt.flighttest import FlightHistory

__all__ = ["NoiseLevels", "add_noise", "modified_scenario", "simulate_level_acceleration",
           "simulate_sawtooth_climb"]


def modified_scenario(scenario, *, cd0_factor: float = 1.0,
                      temperature_offset_k: float | None = None):
    """The scenario with its zero-lift drag CD0(M) scaled by ``cd0_factor`` (parabolic polars)
    and, if given, another day temperature offset [K]."""
    drag = scenario.aircraft.drag
    if cd0_factor != 1.0:
        if drag.kind != "parabolic":
            raise ValueError("cd0_factor needs a parabolic drag polar")
        cd0 = replace(drag.cd0, values=tuple(v * cd0_factor for v in drag.cd0.values))
        scenario = replace(scenario, aircraft=replace(scenario.aircraft,
                                                      drag=replace(drag, cd0=cd0)))
    if temperature_offset_k is not None:
        scenario = replace(scenario, atmosphere=replace(scenario.atmosphere,
                                                        temperature_offset_k=temperature_offset_k))
    return scenario


def _state(model, hp_m):
    """Model altitude [m], static temperature [K], standard temperature [K], pressure [Pa]."""
    z = geometric_from_geopotential(hp_m)
    atm = model.atmosphere(z)
    t_std = standard_atmosphere(z).temperature_k
    return z, float(atm.temperature_k), float(t_std), float(atm.pressure_pa), float(
        atm.speed_of_sound_m_s)


def _sample(sol, t_end, rate_hz):
    t = np.arange(0.0, t_end + 1e-9, 1.0 / rate_hz)
    return t, sol.sol(t)


def simulate_level_acceleration(model, pressure_altitude_m: float, mass_kg: float, *,
                                start_cas_m_s: float, max_mach: float, max_cas_m_s: float,
                                rate_hz: float = 5.0, rating: str | None = None,
                                min_acceleration_m_s2: float = 0.05, name: str = "",
                                heading_rad: float = 0.0) -> FlightHistory:
    """Level acceleration at full ``rating`` from ``start_cas_m_s`` until Mach ``max_mach``, CAS
    ``max_cas_m_s`` or an acceleration below ``min_acceleration_m_s2`` [m/s^2], whichever comes
    first. Pressure altitude [m, geopotential], mass [kg], sampling rate [Hz]."""
    z, t_k, _, p, a = _state(model, pressure_altitude_m)
    v0 = float(mach_from_cas(start_cas_m_s, p)) * a

    def rhs(_t, y):
        perf = model.evaluate(z, y[0], y[1], 1.0, 1.0, rating)
        return [float(perf.ps_m_s) * G0 / y[0], -float(perf.fuel_flow_kg_s)]

    def at_mach(_t, y):
        return y[0] / a - max_mach

    def at_cas(_t, y):
        return float(cas_from_mach(y[0] / a, p)) - max_cas_m_s

    def slow(t, y):
        return rhs(t, y)[0] - min_acceleration_m_s2

    for ev in (at_mach, at_cas, slow):
        ev.terminal = True
    sol = solve_ivp(rhs, (0.0, 3600.0), [v0, mass_kg], rtol=1e-10, atol=1e-8,
                    dense_output=True, events=(at_mach, at_cas, slow))
    t, (v, m) = _sample(sol, sol.t[-1], rate_hz)
    mach = v / a
    return FlightHistory(name or "level acceleration", "level_acceleration", t,
                         np.full(t.size, pressure_altitude_m), np.full(t.size, t_k), m,
                         cas_m_s=np.asarray(cas_from_mach(mach, p)), mach=mach,
                         load_factor=np.ones(t.size), heading_rad=np.full(t.size, heading_rad))


def simulate_sawtooth_climb(model, from_pressure_altitude_m: float, to_pressure_altitude_m: float,
                            cas_m_s: float, mass_kg: float, *, rate_hz: float = 5.0,
                            rating: str | None = None, name: str = "",
                            heading_rad: float = 0.0) -> FlightHistory:
    """Climb at constant CAS [m/s] and full ``rating`` between two pressure altitudes [m,
    geopotential], starting in steady climb. Mass [kg], sampling rate [Hz]."""

    def speeds(hp):
        z, t_k, t_std, p, a = _state(model, hp)
        mach = float(mach_from_cas(cas_m_s, p))
        return z, mach * a, t_k, t_std

    def rates(hp, m):
        z, v, t_k, t_std = speeds(hp)
        dv_dhp = (speeds(hp + 0.5)[1] - speeds(hp - 0.5)[1]) / 1.0
        factor = 1.0 + v / G0 * dv_dhp * t_std / t_k
        n = 1.0
        for _ in range(4):  # load factor cos(gamma) depends on the climb rate it gives
            perf = model.evaluate(z, v, m, n, 1.0, rating)
            climb = float(perf.ps_m_s) / factor
            n = float(np.sqrt(1.0 - (climb / v) ** 2))
        return climb * t_std / t_k, float(perf.fuel_flow_kg_s), n

    def rhs(_t, y):
        dhp, ff, _ = rates(y[0], y[1])
        return [dhp, -ff]

    def top(_t, y):
        return y[0] - to_pressure_altitude_m

    top.terminal = True
    sol = solve_ivp(rhs, (0.0, 1800.0), [from_pressure_altitude_m, mass_kg], rtol=1e-10,
                    atol=1e-8, dense_output=True, events=top)
    if sol.status != 1:
        raise ValueError(f"the sawtooth climb at CAS {cas_m_s:.1f} m/s does not reach "
                         f"{to_pressure_altitude_m:.0f} m within 30 minutes")
    t, (hp, m) = _sample(sol, sol.t[-1], rate_hz)
    z = geometric_from_geopotential(hp)
    atm = model.atmosphere(z)
    mach = np.asarray(mach_from_cas(cas_m_s, atm.pressure_pa))
    n = np.array([rates(h, mm)[2] for h, mm in zip(hp, m, strict=True)])
    return FlightHistory(name or "sawtooth climb", "sawtooth_climb", t, hp,
                         np.asarray(atm.temperature_k, dtype=float), m,
                         cas_m_s=np.full(t.size, cas_m_s), mach=mach, load_factor=n,
                         heading_rad=np.full(t.size, heading_rad))


@dataclass(frozen=True)
class NoiseLevels:
    """One-sigma white sensor noise (SI): pressure altitude [m], CAS [m/s], Mach [-], static air
    temperature [K], mass [kg], load factor [-], heading [rad]."""

    pressure_altitude_m: float = 0.0
    cas_m_s: float = 0.0
    mach: float = 0.0
    oat_k: float = 0.0
    mass_kg: float = 0.0
    load_factor: float = 0.0
    heading_rad: float = 0.0


def add_noise(history: FlightHistory, noise: NoiseLevels,
              rng: np.random.Generator) -> FlightHistory:
    """The history with independent Gaussian noise of ``noise`` added to every recorded channel
    (time is exact)."""
    changes = {}
    for name in ("pressure_altitude_m", "cas_m_s", "mach", "oat_k", "mass_kg", "load_factor",
                 "heading_rad"):
        y = getattr(history, name)
        sigma = getattr(noise, name)
        if y is not None and sigma > 0.0:
            changes[name] = y + rng.normal(0.0, sigma, y.shape)
    return replace(history, **changes)
