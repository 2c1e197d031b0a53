"""Level unaccelerated flight at a fixed altitude and true airspeed (a dash, or the cruise to a
common downrange point): the throttle that holds it and the fuel burnt over a ground distance.

In level unaccelerated flight lift equals weight and thrust equals drag; thrust is linear in
throttle in the aircraft model, so the throttle is D / T(full) and the fuel flow follows
(common practice, no source). Where the drag is below the thrust at the minimum throttle, the
minimum throttle's fuel flow is burnt (the surplus is taken as spent by speed brakes or a
shallow descent-and-climb a crew would fly; it is stated in the notes of the callers). The mass
falls along the leg: dm/dx = -fuel flow / ground speed, integrated with the classical fourth-order
Runge-Kutta method in distance.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from climbopt.aircraft import wind_at

__all__ = ["CruiseLeg", "LevelFlightImpossible", "cruise", "level_flight"]


class LevelFlightImpossible(ValueError):
    """The thrust of the rating cannot hold level flight at that point (drag too high), or the
    headwind stops any progress over the ground. ``altitude_m``, ``mach``: where."""

    def __init__(self, message: str, altitude_m: float, mach: float):
        super().__init__(message)
        self.altitude_m = float(altitude_m)
        self.mach = float(mach)


@dataclass(frozen=True)
class CruiseLeg:
    """A level leg: arrays from its start of ground ``distance`` [m], ``time`` [s], ``mass``
    [kg], ``fuel`` [kg] burnt and ``throttle`` [-] held, at ``steps + 1`` points."""

    distance: np.ndarray
    time: np.ndarray
    mass: np.ndarray
    fuel: np.ndarray
    throttle: np.ndarray

    @property
    def time_s(self) -> float:
        """Duration [s]."""
        return float(self.time[-1])

    @property
    def fuel_kg(self) -> float:
        """Fuel burnt [kg]."""
        return float(self.fuel[-1])


def level_flight(model, altitude_m: float, tas_m_s: float, mass_kg: float,
                 rating: str | None = None) -> tuple[float, float, float, float]:
    """(throttle needed, drag [N], thrust at full rating [N], Mach) holding level unaccelerated
    flight at a point (lift = weight, thrust = drag). The throttle may exceed the model's
    maximum (the caller decides)."""
    perf = model.evaluate(np.array(altitude_m, dtype=float), np.array(tas_m_s, dtype=float),
                          np.array(mass_kg, dtype=float), 1.0, 1.0, rating, check=False)
    drag, thrust = float(perf.drag_n), float(perf.thrust_n)
    throttle = drag / thrust if thrust > 0.0 else np.inf
    return throttle, drag, thrust, float(perf.mach)


def cruise(model, altitude_m: float, tas_m_s: float, mass_kg: float, distance_m: float, *,
           rating: str | None = None, steps: int = 16) -> CruiseLeg:
    """Level flight at ``altitude_m`` [m] and ``tas_m_s`` [m/s] from ``mass_kg`` [kg] over the
    ground distance ``distance_m`` [m] (along-track wind of the model included).

    Raises :class:`LevelFlightImpossible` when the rating's full thrust cannot hold it, or when
    the headwind is not below the true airspeed.
    """
    wind = float(wind_at(model, altitude_m))
    ground = tas_m_s + wind
    if ground <= 0.0:
        raise LevelFlightImpossible(
            f"the headwind at {altitude_m:,.0f} m ({-wind:.1f} m/s) is not below the true "
            f"airspeed ({tas_m_s:.1f} m/s): no ground is covered", altitude_m,
            tas_m_s / float(model.atmosphere(altitude_m).speed_of_sound_m_s))
    throttle_max, throttle_min = float(model.throttle_max), float(model.throttle_min)

    def rates(m):
        thr, drag, thrust, mach = level_flight(model, altitude_m, tas_m_s, m, rating)
        if thr > throttle_max + 1e-12:
            raise LevelFlightImpossible(
                f"level flight at {altitude_m:,.0f} m, Mach {mach:.2f} needs {drag:,.0f} N of "
                f"thrust, more than the {thrust * throttle_max:,.0f} N available", altitude_m, mach)
        used = max(thr, throttle_min)
        ff = float(model.fuel_flow_kg_s(altitude_m, mach, used, rating, check=False))
        return ff, used

    if not distance_m > 0.0:
        zero = np.zeros(1)
        return CruiseLeg(zero, zero, np.full(1, float(mass_kg)), zero, np.full(1, np.nan))
    x = np.linspace(0.0, float(distance_m), steps + 1)
    m = np.empty_like(x)
    thr = np.empty_like(x)
    m[0] = mass_kg
    for i in range(steps):
        dx = x[i + 1] - x[i]
        ff1, thr[i] = rates(m[i])
        k1 = -ff1 / ground
        k2 = -rates(m[i] + 0.5 * dx * k1)[0] / ground
        k3 = -rates(m[i] + 0.5 * dx * k2)[0] / ground
        k4 = -rates(m[i] + dx * k3)[0] / ground
        m[i + 1] = m[i] + dx * (k1 + 2 * k2 + 2 * k3 + k4) / 6.0
    thr[-1] = rates(m[-1])[1]
    return CruiseLeg(x, x / ground, m, float(mass_kg) - m, thr)

