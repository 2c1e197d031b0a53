"""Flown climb procedures: a constant CAS-then-Mach schedule flown through the aircraft model,
and the best such schedule for an objective.

Crews fly a climb as constant calibrated airspeed (CAS), then constant Mach above the crossover
altitude where the two are the same speed (common practice, no source). An optimal path's
speeds vary continuously; this module answers what a *flyable* schedule gives and which one is
best.

**A schedule** (:class:`climbopt.scenario.ScheduleSpec`) says which speed to hold at each
altitude: ``cas_below_restriction_m_s`` below the scenario's CAS-restriction altitude (if it has
one), then ``cas_m_s``, then ``mach`` above the crossover (none: CAS all the way), and how speed
changes are made: the *acceleration share* s, the fraction of the specific excess power given
to speed while climbing (s = 1: level acceleration).

**Sequence flown** (:func:`fly_schedule`): from the start state, change speed to the first
scheduled speed (share s); hold the restriction CAS to its altitude; change speed to the climb
CAS (share s); hold it to the crossover; hold the Mach to the target altitude; then at the
target altitude gain (or lose) the speed still missing in level flight (full climb rating to
accelerate, minimum throttle to decelerate), a segment of its own; with a dash distance, cruise
level at the target state with thrust equal to drag until that ground distance from the start.

**Equations** (quasi-steady point mass in the vertical plane, flat Earth, no wind; the same
aircraft model, atmosphere and engine rating as the solvers):

* specific excess power Ps = V (T cos(alpha_T) - D) / (m g0) (Rutowski, J. Aeronaut. Sci.
  21(3), 1954), at lift L = m g0 cos(gamma) - T sin(alpha_T), alpha_T = 0 for thrust along the
  path and CL / CL_alpha(M) for thrust along the body axis;
* holding a speed law V(h) (constant CAS or constant Mach), the energy balance
  d/dt (h + V^2 / (2 g0)) = Ps gives the climb rate with the climb correction factor
  (acceleration factor)::

      dh/dt = Ps / (1 + (V / g0) dV/dh)

  (standard flight-test relation, e.g. US Naval Test Pilot School Flight Test Manual FTM-108,
  *Fixed Wing Performance*, ch. 7; from memory); dV/dh is the exact derivative of the model's
  speed law (CasADi algorithmic differentiation through the model atmosphere and the pitot
  relations of NACA Report 1135, 1953);
* changing speed with share s while climbing: (V / g0) dV/dt = s Ps and dh/dt = (1 - s) Ps;
  slowing down while climbing: (V / g0) dV/dt = -s Ps, dh/dt = (1 + s) Ps (full rating, the
  speed traded for height); level: dh/dt = 0, (V / g0) dV/dt = Ps;
* flight-path angle sin(gamma) = (dh/dt) / V. gamma enters the lift and so Ps; it is obtained
  by fixed-point iteration from gamma = 0 (three passes inside the model evaluation; each pass
  shrinks the error by a factor of about (dPs/dcos gamma) tan(gamma) / V, below 0.01 for
  transport climbs, so the residual is below 1e-6 of cos gamma);
* dm/dt = -fuel flow; dx/dt = V cos(gamma) + w(h), the ground speed with the along-track wind
  w (:func:`_ground_speed`, the one place where air distance becomes ground distance).

Integration: scipy ``solve_ivp`` (RK45, relative tolerance :data:`RTOL`, absolute tolerances
scaled per state) with events for the crossover (Mach reaches the scheduled Mach), the
restriction altitude, the target altitude, the scheduled or target speed, Ps falling to zero
and the fuel capacity. One CasADi function per speed law, evaluated through preallocated
buffers (:func:`climbopt.aircraft.fast_scalar_function`), supplies every scalar model
evaluation; the same function, evaluated on arrays, fills the output table, so the table and
the integration agree to rounding.

**Limits**: every point of the flown path is checked against the scenario's flight envelope
(:func:`climbopt.envelope.envelope_for`, one boundary rule); a schedule that breaks a limit, asks
for less than the CLmax speed (the envelope's stall row), cannot climb (Ps <= 0 before the
target) or burns more than the fuel capacity raises :class:`ScheduleNotFlyable`, naming the
schedule, where (altitude and speed) and why.

**Acceleration share**: ``ScheduleSpec.acceleration_share`` for a named schedule,
``Mission.acceleration_share`` for the best schedule; both default to 0.5 (common practice, no
source: operators keep climbing while accelerating after the restriction altitude, with about
half the excess power going to speed). Measured on the demo transport: see
``docs/methods.md``.

**Best schedule** (:func:`best_schedule`): the constant schedule (restriction CAS, climb CAS,
climb Mach) minimising time, fuel or fuel + w time when flown; see its docstring.

This module reads no files, prints nothing and calls no other solver.
"""

from __future__ import annotations

import math
import time as _time
import weakref
from dataclasses import dataclass, field, replace

import numpy as np
from scipy.integrate import solve_ivp

from climbopt.aircraft import fast_scalar_function, wind_at
from climbopt.airspeed import (cas_from_impact_pressure, impact_pressure_from_cas,
                               impact_pressure_pa, mach_from_cas)
from climbopt.atmosphere import G0, energy_height_m
from climbopt.envelope import INSIDE_TOL, envelope_for, flight_quantities
from climbopt.results import (SPEED_TOLERANCE_M_S, Method, Objective, ReferenceComparison,
                              Segment, Trajectory)
from climbopt.scenario import ScheduleSpec
from climbopt.units import m_s_to_kt, m_to_ft

__all__ = ["ScheduleNotFlyable", "best_schedule", "best_schedule_spec", "fly_schedule",
           "ALTITUDE_STEP_M", "RTOL"]

#: Relative tolerance of the integration of a flown schedule (the search uses SEARCH_RTOL).
RTOL = 1.0e-8
#: Relative tolerance of the flights inside the best-schedule search.
SEARCH_RTOL = 1.0e-6
#: Output points of climbing segments every 100 ft of altitude [m].
ALTITUDE_STEP_M = 30.48
#: Output points of level segments every this many seconds (at least LEVEL_POINTS points).
LEVEL_STEP_S = 2.0
CRUISE_STEP_S = 10.0
LEVEL_POINTS = 10
#: A flight longer than this [s] is given up (Ps tends to zero without crossing it).
MAX_FLIGHT_S = 4.0 * 3600.0
#: Fixed-point passes for the flight-path angle in the lift (see the module docstring).
GAMMA_PASSES = 3
#: Acceleration share used when a scenario gives none (common practice, no source).
DEFAULT_ACCELERATION_SHARE = 0.5

# Rows of the model function's output vector.
_V, _PS, _SIN, _COS, _FF, _MACH, _Q, _P, _QC, _CL, _N, _T, _D, _ALPHA = range(14)
# State scales for the absolute tolerances: altitude, TAS, mass (times start mass), distance.
_SCALE_H, _SCALE_V, _SCALE_X = 1.0e4, 300.0, 1.0e5


class ScheduleNotFlyable(ValueError):
    """A schedule that cannot be flown with this aircraft in this scenario.

    Attributes
    ----------
    schedule : str
        The schedule's name.
    altitude_m, tas_m_s, cas_m_s, mach, mass_kg : float
        Where it fails [m, m/s, m/s, -] and the mass there [kg] (NaN when not applicable).
    reason : str
        Why, in words.
    limit : str
        The envelope row broken ("" when the cause is not a limit: "ps" for no climb, "fuel"
        for the fuel capacity, "tables" for leaving the model's data).
    excess : float
        How far beyond [-]: the row's margin for a limit, the fraction of the climb not flown
        for Ps <= 0, the fuel over the capacity as a fraction of it.
    highest_altitude_m : float
        Highest altitude reached [m].
    """

    def __init__(self, schedule: str, reason: str, *, altitude_m=math.nan, tas_m_s=math.nan,
                 cas_m_s=math.nan, mach=math.nan, limit: str = "", excess: float = 1.0,
                 highest_altitude_m=math.nan, mass_kg=math.nan):
        self.schedule = schedule
        self.mass_kg = float(mass_kg)
        self.altitude_m, self.tas_m_s = float(altitude_m), float(tas_m_s)
        self.cas_m_s, self.mach = float(cas_m_s), float(mach)
        self.reason, self.limit, self.excess = reason, limit, float(excess)
        self.highest_altitude_m = float(highest_altitude_m)
        where = ""
        if math.isfinite(self.altitude_m):
            where = f" at {_alt_words(self.altitude_m)}"
            if math.isfinite(self.cas_m_s):
                where += f", CAS {_kt_words(self.cas_m_s)} / Mach {self.mach:.3f}"
        super().__init__(f"schedule {schedule!r} cannot be flown{where}: {reason}")


class _OutsideTables(Exception):
    """Raised inside the integration when a state leaves the model's fitted tables."""

    def __init__(self, altitude_m, tas_m_s):
        super().__init__()
        self.altitude_m, self.tas_m_s = float(altitude_m), float(tas_m_s)


# ------------------------------------------------------------------------------ words

def _alt_words(h_m: float) -> str:
    return f"{m_to_ft(h_m):,.0f} ft ({h_m:,.0f} m)"


def _kt_words(v_m_s: float) -> str:
    kt = float(m_s_to_kt(v_m_s))
    return f"{kt:.0f} kt" if abs(kt - round(kt)) < 0.05 else f"{kt:.1f} kt"


def _law_words(law: str, value: float) -> str:
    if law == "cas":
        return f"CAS {_kt_words(value)}"
    if law == "mach":
        return f"Mach {value:.2f}" if abs(value * 100 - round(value * 100)) < 1e-6 else \
            f"Mach {value:.3f}"
    return f"TAS {value:.1f} m/s"


# ------------------------------------------------------------------------------ model function

_FUNCTIONS: weakref.WeakKeyDictionary = weakref.WeakKeyDictionary()


def _model_function(model, law: str):
    """(CasADi Function, fast scalar call) of the quasi-steady point mass for one speed law.

    Inputs (h [m], u, m [kg], throttle [-], a [-]); ``u`` is the law's value (CAS [m/s] for
    "cas", Mach for "mach") or the TAS [m/s] for "free" (the speed is a state); ``a`` is dh/dt
    over Ps for "free" (ignored otherwise: the climb correction factor of the law is used).
    Output rows: see ``_V`` ... ``_ALPHA``. Built once per model and law; the engine runs at
    the mission's rating or rating schedule (:meth:`climbopt.aircraft.AircraftModel.engine`).
    """
    per_model = _FUNCTIONS.setdefault(model, {})
    if law not in per_model:
        fn = _build_function(model, law, model.thrust_alignment == "body")
        per_model[law] = (fn, fast_scalar_function(fn))
    return per_model[law]


def _build_function(model, law: str, body: bool):
    """The CasADi function of :func:`_model_function` (equations: module docstring), staged:
    SX algebra around the table look-ups (:mod:`climbopt.staging`)."""
    import casadi as ca

    from climbopt.staging import jacobian, staged

    def quasi_steady(h, u, m, thr, a):
        atm = model.atmosphere(h)
        sound = atm.speed_of_sound_m_s
        v = {"cas": lambda: mach_from_cas(u, atm.pressure_pa) * sound,
             "mach": lambda: u * sound}.get(law, lambda: u)()
        if law == "free":
            share = a
        else:
            share = 1.0 / (1.0 + v * jacobian(v, h) / G0)  # climb correction factor
        mach = v / sound
        q = 0.5 * atm.density_kg_m3 * v * v
        q_s = q * model.reference_area_m2
        thrust, ff = model.thrust_and_fuel_flow(h, mach, thr)
        weight = m * G0
        cla = model.lift_slope_per_rad(mach) if body else None
        cos_g = ca.SX(1.0)
        for _ in range(GAMMA_PASSES + 1):
            lift_and_thrust = weight * cos_g  # L + T sin(alpha_T)
            if body:
                cl = lift_and_thrust / (q_s + thrust / cla)  # small-angle start, then one step
                cl = (lift_and_thrust - thrust * ca.sin(cl / cla)) / q_s
                alpha = cl / cla
                t_path = thrust * ca.cos(alpha)
            else:
                cl, alpha, t_path = lift_and_thrust / q_s, ca.SX(0.0), thrust
            drag = q_s * model.drag_coefficient(cl, mach)
            ps = v * (t_path - drag) / weight
            sin_g = ca.fmin(ca.fmax(share * ps / v, -1.0), 1.0)
            cos_g = ca.sqrt(1.0 - sin_g * sin_g)
        return [ca.vertcat(v, ps, sin_g, cos_g, ff, mach, q, atm.pressure_pa,
                           impact_pressure_pa(mach, atm.pressure_pa), cl, q_s * cl / weight,
                           thrust, drag, alpha)]

    return staged(f"quasi_steady_{law}", ("h", "u", "m", "thr", "a"), quasi_steady)


class _Memo:
    """The last evaluation of a fast model call, reused by the events at the same state; also
    stops the integration where the state leaves the model's fitted tables."""

    __slots__ = ("call", "key", "value", "domain", "free")

    def __init__(self, call, domain, free: bool):
        self.call, self.domain, self.free, self.key, self.value = call, domain, free, None, None

    def __call__(self, h, u, m, thr, a):
        key = (h, u, m, thr, a)
        if key != self.key:
            d = self.domain
            if not d.altitude_min_m <= h <= d.altitude_max_m:
                raise _OutsideTables(h, u if self.free else math.nan)
            out = self.call(h, u, m, thr, a)
            if not (d.mach_min <= out[_MACH] <= d.mach_max) or not out[_V] > 0.0:
                raise _OutsideTables(h, out[_V])
            self.key, self.value = key, out
        return self.value


def _ground_speed(model, altitude_m, tas_m_s, cos_gamma):
    """Ground speed [m/s] from true airspeed and flight-path angle: the one place where air
    distance becomes ground distance, V cos(gamma) plus the along-track wind at the altitude
    (:meth:`climbopt.aircraft.AircraftModel.wind_m_s`)."""
    return tas_m_s * cos_gamma + float(wind_at(model, altitude_m))


def _event(fn, direction: float):
    fn.terminal, fn.direction = True, direction
    return fn


# ------------------------------------------------------------------------------ flight

@dataclass
class _Piece:
    """One segment as integrated: its kind and words, the speed law flown (``law`` with value
    ``u``; "free" for a speed that is a state, with ``a`` = dh/dt over Ps), the throttle (NaN:
    thrust = drag) and the output points (times ``t`` [s]; states ``y`` = h, V, m, x, with V
    NaN for a held law until evaluated)."""

    kind: str
    hold: str
    law: str
    u: float
    a: float
    throttle: float
    t: np.ndarray
    y: np.ndarray
    cas_m_s: float | None = None
    mach: float | None = None


@dataclass
class _Flight:
    """A schedule being flown: the scenario's fixed data, the state and the pieces so far."""

    name: str
    model: object
    envelope: object
    law_value: dict  # band -> (law, value): "restriction", "climb", "mach"
    restriction_m: float | None
    target: tuple  # (altitude [m], TAS [m/s])
    share: float
    fuel_capacity_kg: float | None
    dense: bool
    rtol: float
    state: list = field(default_factory=list)  # t, h, V, m, x
    pieces: list = field(default_factory=list)
    crossover_m: float | None = None
    steps: int = 0

    # -------------------------------------------------------------- schedule bands
    def band(self, h: float):
        """(law, value, ceiling altitude [m], Mach cap or None) of the schedule at ``h``."""
        lv, h_t = self.law_value, self.target[0]
        if "restriction" in lv and h < self.restriction_m:
            return (*lv["restriction"], self.restriction_m, None)
        if "mach" in lv:
            p = float(self.model.atmosphere(h).pressure_pa)
            if float(mach_from_cas(lv["climb"][1], p)) >= lv["mach"][1] * (1.0 - 1e-9):
                return (*lv["mach"], h_t, None)
            return (*lv["climb"], h_t, lv["mach"][1])
        return (*lv["climb"], h_t, None)

    def law_tas(self, law: str, value: float, h: float) -> float:
        """TAS [m/s] of a speed law at altitude ``h`` (model atmosphere)."""
        atm = self.model.atmosphere(h)
        if law == "cas":
            return float(mach_from_cas(value, float(atm.pressure_pa)) * atm.speed_of_sound_m_s)
        if law == "mach":
            return float(value * atm.speed_of_sound_m_s)
        return float(value)

    def memo(self, law: str) -> _Memo:
        return _Memo(_model_function(self.model, law)[1], self.model.fit_domain,
                     law == "free")

    # -------------------------------------------------------------- the sequence
    def run(self):
        """Fly the whole sequence (module docstring); returns the pieces."""
        h_t, v_t = self.target
        for _ in range(32):
            _, h, v, _, _ = self.state
            if h >= h_t:
                break
            law, value, ceiling, cap = self.band(h)
            if law == "mach" and self.crossover_m is None:
                # the first altitude flown at the Mach: the crossover, whether a CAS hold ended
                # there, a speed change reached the Mach first, or the start lies above it
                self.crossover_m = float(h)
            if abs(v - self.law_tas(law, value, h)) > SPEED_TOLERANCE_M_S:
                self.change(law, value, ceiling, cap)
            else:
                self.hold(law, value, ceiling, cap)
        else:  # pragma: no cover - each pass ends a band, a speed change or the climb
            raise RuntimeError(f"schedule {self.name!r}: the segment sequence does not end")
        if abs(self.state[2] - v_t) > SPEED_TOLERANCE_M_S:
            self.level_change(v_t)
        return self.pieces

    def hold(self, law, value, ceiling, cap):
        """Climb holding a speed law to ``ceiling`` (or to the crossover at Mach ``cap``)."""
        ev, thr = self.memo(law), float(self.model.throttle_max)

        def rhs(t, y):
            o = ev(y[0], value, y[1], thr, 0.0)
            return [o[_V] * o[_SIN], -o[_FF], _ground_speed(self.model, y[0], o[_V], o[_COS])]

        events = {"altitude": _event(lambda t, y: y[0] - ceiling, 1.0),
                  "ps": _event(lambda t, y: ev(y[0], value, y[1], thr, 0.0)[_PS], -1.0)}
        if cap is not None:
            events["crossover"] = _event(
                lambda t, y: ev(y[0], value, y[1], thr, 0.0)[_MACH] / cap - 1.0, 1.0)
        t0, h, v, m, x = self.state
        if not ev(h, value, m, thr, 0.0)[_PS] > 0.0:
            raise self._stopped("ps", h, v, m)
        sol, what = self.integrate(rhs, [h, m, x], events, [_SCALE_H, self.scale_m, _SCALE_X],
                                   speed=lambda y: ev(y[0], value, y[1], thr, 0.0)[_V])
        y = np.vstack([sol.y[0], np.full(sol.t.size, np.nan), sol.y[1], sol.y[2]])
        if what == "altitude":
            y[0, -1] = ceiling
        o = ev(y[0, -1], value, y[2, -1], thr, 0.0)
        if what == "crossover":
            self.crossover_m = float(y[0, -1])
        self.state = [float(sol.t[-1]), float(y[0, -1]), float(o[_V]), float(y[2, -1]),
                      float(y[3, -1])]
        self.add(_Piece("climb", _law_words(law, value), law, value, 0.0, thr, sol.t, y,
                        value if law == "cas" else None, value if law == "mach" else None),
                 sol, climbing=True)

    def change(self, law, value, ceiling, cap):
        """Change speed to the schedule's speed while climbing (share s of Ps to speed)."""
        _, h, v, _, _ = self.state
        slower = v > self.law_tas(law, value, h)
        a = 1.0 + self.share if slower else 1.0 - self.share
        kind = "decelerate" if slower else ("level acceleration" if a == 0.0 else "accelerate")
        words = f"{'level acceleration' if a == 0.0 else kind} to {_law_words(law, value)}"
        self.free_segment(kind, words, a, float(self.model.throttle_max), (law, value, cap),
                          -1.0 if slower else 1.0, ceiling if a > 0.0 else None,
                          cas=value if law == "cas" else None,
                          mach=value if law == "mach" else cap)

    def level_change(self, v_target: float):
        """Level acceleration (climb rating) or deceleration (minimum throttle) at the target
        altitude to the target TAS."""
        slower = self.state[2] > v_target
        thr = float(self.model.throttle_min if slower else self.model.throttle_max)
        kind = "level deceleration" if slower else "level acceleration"
        mach_t = v_target / float(self.model.atmosphere(self.target[0]).speed_of_sound_m_s)
        self.free_segment(kind, f"{kind} to Mach {mach_t:.3f}", 0.0, thr,
                          ("tas", v_target, None), -1.0 if slower else 1.0, None, cas=None,
                          mach=mach_t)

    def free_segment(self, kind, words, a, thr, target, direction, ceiling, *, cas, mach):
        """Integrate a segment whose speed is a state (dh/dt = a Ps) until the speed reaches
        ``target`` = (law, value, Mach cap) or the altitude reaches ``ceiling``."""
        ev = self.memo("free")

        def out(y):
            return ev(y[0], y[1], y[2], thr, a)

        def rhs(t, y):
            o = out(y)
            dh = y[1] * o[_SIN]
            return [dh, G0 * (o[_PS] - dh) / y[1], -o[_FF],
                    _ground_speed(self.model, y[0], y[1], o[_COS])]

        # Ps must keep the sign that drives the speed change: > 0 to accelerate or climb,
        # < 0 for the level deceleration at minimum throttle
        sign = -1.0 if (a == 0.0 and direction < 0.0) else 1.0
        ps_name = "drag" if sign < 0.0 else "ps"
        events = {"speed": _speed_event(out, *target, direction),
                  ps_name: _event(lambda t, y: out(y)[_PS], sign)}
        if ceiling is not None:
            events["altitude"] = _event(lambda t, y: y[0] - ceiling, 1.0)
        t0, h, v, m, x = self.state
        if not sign * out([h, v, m, x])[_PS] > 0.0:
            raise self._stopped(ps_name, h, v, m)
        sol, what = self.integrate(rhs, [h, v, m, x], events,
                                   [_SCALE_H, _SCALE_V, self.scale_m, _SCALE_X])
        y = sol.y.copy()
        if what == "altitude":
            y[0, -1] = ceiling
        elif a == 0.0:
            y[0] = h  # level: exactly
        self.state = [float(sol.t[-1]), *(float(c) for c in y[:, -1])]
        self.add(_Piece(kind, words, "free", math.nan, a, thr, sol.t, y, cas, mach), sol,
                 climbing=a != 0.0)

    def cruise(self, distance_m: float):
        """Level flight at the target state, thrust = drag, over ``distance_m`` [m] (where the
        drag is below the minimum throttle's thrust, fuel flow at the minimum throttle, the
        surplus thrust ignored, as the energy-state dash does)."""
        ev = self.memo("free")
        t0, h, v, m, x = self.state
        o = ev(h, v, m, 1.0, 0.0)
        thr = o[_D] / (o[_T] * math.cos(o[_ALPHA]))
        if thr > self.model.throttle_max * (1.0 + 1e-9):
            raise self.not_flyable(
                f"level flight at the target state needs throttle {thr:.3f}, more than the "
                f"rating's {self.model.throttle_max:g}", h, v, m, limit="ps",
                excess=thr / self.model.throttle_max - 1.0)

        def rhs(t, y):
            o = ev(y[0], y[1], y[2], 1.0, 0.0)
            throttle = max(o[_D] / (o[_T] * math.cos(o[_ALPHA])), self.model.throttle_min)
            return [0.0, 0.0, -throttle * o[_FF], _ground_speed(self.model, y[0], y[1], 1.0)]

        ground = _ground_speed(self.model, h, v, 1.0)
        if not ground > 0.0:
            raise self.not_flyable(f"the headwind at the target altitude is not below the true "
                                   f"airspeed {v:.1f} m/s: no ground is covered", h, v, m,
                                   limit="ps", excess=0.0)
        sol, _ = self.integrate(rhs, [h, v, m, x], {}, [_SCALE_H, _SCALE_V, self.scale_m,
                                                        _SCALE_X], t_end=t0 + distance_m / ground)
        self.state = [float(sol.t[-1]), *(float(c) for c in sol.y[:, -1])]
        self.add(_Piece("cruise", f"cruise at Mach {o[_MACH]:.3f}", "free", math.nan, 0.0,
                        math.nan, sol.t, sol.y, None, float(o[_MACH])), sol, climbing=False,
                 step_s=CRUISE_STEP_S)

    @property
    def scale_m(self) -> float:
        return float(self.model.mass_kg)

    # -------------------------------------------------------------- integration
    def integrate(self, rhs, y0, events: dict, scales, t_end=None, speed=None):
        """solve_ivp from the current time; returns (solution, name of the event that ended it
        or ""). Ps falling to zero, the fuel capacity, leaving the tables and running out of
        time raise :class:`ScheduleNotFlyable`. ``speed(y)``: TAS [m/s] of a state (default:
        its second component)."""
        t0 = self.state[0]
        names = list(events)
        evs = list(events.values())
        if self.fuel_capacity_kg is not None:
            cap, m0, k = self.fuel_capacity_kg, self.scale_m, len(y0) - 2
            evs.append(_event(lambda t, y: m0 - y[k] - cap, 1.0))
            names.append("fuel")
        span = (t0, MAX_FLIGHT_S if t_end is None else t_end)
        try:
            sol = solve_ivp(rhs, span, y0, method="RK45", rtol=self.rtol,
                            atol=self.rtol * np.asarray(scales), events=evs or None,
                            dense_output=self.dense)
        except _OutsideTables as exc:
            raise self.not_flyable("the flight leaves the model's tables", exc.altitude_m,
                                   exc.tas_m_s, math.nan, limit="tables") from None
        self.steps += sol.t.size - 1
        what = next((n for n, te in zip(names, sol.t_events or []) if te.size), "")
        if sol.status < 0:
            raise self.not_flyable(f"integration failed: {sol.message}",
                                   *self._last(sol, speed))
        if what in ("ps", "drag", "fuel") or (t_end is None and not what):
            raise self._stopped(what, *self._last(sol, speed))
        return sol, what

    @staticmethod
    def _last(sol, speed):
        """(h, V, m) at the end of a solution."""
        y = sol.y[:, -1]
        if speed is None:
            return float(y[0]), float(y[1]), float(y[2])
        return float(y[0]), float(speed(y)), float(y[1])

    def _stopped(self, what, h, v, m):
        if what == "drag":
            return self.not_flyable(
                "at minimum throttle the thrust is not below the drag: the aircraft cannot slow "
                "down to the target speed in level flight", h, v, m, limit="ps", excess=0.5)
        if what == "fuel":
            return self.not_flyable(
                f"the fuel capacity ({self.fuel_capacity_kg:,.0f} kg) is used up before the "
                "end", h, v, m, limit="fuel", excess=1.0 + self._left(h))
        how = ("falls to zero" if what == "ps" else
               f"tends to zero (more than {MAX_FLIGHT_S / 3600:g} h of flight)")
        if h >= self.target[0]:
            v_t = self.target[1]
            return self.not_flyable(
                f"at the target altitude the target speed cannot be reached in level flight: "
                f"specific excess power {how} {100 * (v_t - v) / v_t:.1f} % short of it", h, v,
                m, limit="ps", excess=abs(v_t - v) / v_t)
        return self.not_flyable(
            f"specific excess power {how} below the target altitude (highest altitude reached "
            f"{_alt_words(h)})", h, v, m, limit="ps", excess=self._left(h))

    def _left(self, h: float) -> float:
        """Fraction of the climb not flown [-]."""
        h0 = float(self.pieces[0].y[0, 0]) if self.pieces else self.state[1]
        return max(0.0, (self.target[0] - h) / max(self.target[0] - h0, 1.0))

    def not_flyable(self, reason, h, v, m, *, limit="", excess=1.0,
                    highest=None) -> ScheduleNotFlyable:
        """The error at (h, V, m) [m, m/s, kg]; ``highest`` [m] defaults to the highest altitude
        flown so far."""
        cas = mach = math.nan
        if math.isfinite(h) and math.isfinite(v) and v > 0:
            atm = self.model.atmosphere(min(max(h, self.model.atmosphere.altitude_min_m),
                                            self.model.atmosphere.altitude_max_m))
            mach = v / float(atm.speed_of_sound_m_s)
            cas = float(cas_from_impact_pressure(impact_pressure_pa(mach, float(atm.pressure_pa))))
        if highest is None:
            highest = max([h] + [float(np.max(p.y[0])) for p in self.pieces]) \
                if math.isfinite(h) else math.nan
        return ScheduleNotFlyable(self.name, reason, altitude_m=h, tas_m_s=v, cas_m_s=cas,
                                  mach=mach, limit=limit, excess=excess,
                                  highest_altitude_m=highest, mass_kg=m)

    # -------------------------------------------------------------- output points
    def add(self, piece: _Piece, sol, *, climbing: bool, step_s: float = LEVEL_STEP_S):
        """Keep the piece with its output points: every integrator step (search flights) or
        dense points (every ALTITUDE_STEP_M of climb, every ``step_s`` of level flight)."""
        if sol.t[-1] - sol.t[0] <= 0.0:
            return
        if self.dense:
            t = _output_times(sol, climbing, step_s)
            y = np.array(sol.sol(t))
            if np.isnan(piece.y[1, 0]):  # held law: V is not a state
                y = np.vstack([y[0], np.full(t.size, np.nan), y[1], y[2]])
            y[:, 0], y[:, -1] = piece.y[:, 0], piece.y[:, -1]
            piece.t, piece.y = t, y
        self.pieces.append(piece)


def _speed_event(out, law, value, cap, direction):
    """Event: the speed reaches ``value`` of ``law`` (CAS via the impact pressure, capped by the
    Mach ``cap`` above the crossover; Mach; TAS). ``out(y)`` is the model output at a state."""
    if law == "cas":
        qc_t = float(impact_pressure_from_cas(value))
        if cap is None:
            return _event(lambda t, y: out(y)[_QC] / qc_t - 1.0, direction)

        def both(t, y):
            o = out(y)
            return max(o[_QC] / qc_t - 1.0, o[_MACH] / cap - 1.0)
        return _event(both, direction)
    if law == "mach":
        return _event(lambda t, y: out(y)[_MACH] / value - 1.0, direction)
    return _event(lambda t, y: y[1] / value - 1.0, direction)


def _output_times(sol, climbing: bool, step_s: float) -> np.ndarray:
    """Times of the output points of one segment: where the altitude crosses each multiple of
    ALTITUDE_STEP_M (climbing), or every ``step_s`` seconds (level), plus both ends."""
    t0, t1 = float(sol.t[0]), float(sol.t[-1])
    inner = np.empty(0)
    if climbing:
        h0, h1 = float(sol.y[0, 0]), float(sol.y[0, -1])
        levels = np.arange(math.floor(h0 / ALTITUDE_STEP_M) + 1,
                           math.ceil(h1 / ALTITUDE_STEP_M)) * ALTITUDE_STEP_M
        if levels.size:
            tf = np.linspace(t0, t1, 4 * levels.size + 8)
            hf = np.maximum.accumulate(np.asarray(sol.sol(tf))[0])
            inner = np.interp(levels, hf, tf)
    else:
        n = max(LEVEL_POINTS, int(math.ceil((t1 - t0) / step_s)))
        inner = np.linspace(t0, t1, n + 1)[1:-1]
    gap = 1e-3 * min(step_s, t1 - t0)  # no point within a hair of an end
    inner = np.unique(inner[(inner > t0 + gap) & (inner < t1 - gap)])
    return np.concatenate([[t0], inner, [t1]])


# ------------------------------------------------------------------------------ table, limits

def _columns(flight: _Flight) -> tuple[dict, list]:
    """Per-point columns of the flown pieces (one model evaluation per piece, on arrays) and
    their (start, end) index ranges; the boundary state of two pieces appears in both, once
    with each piece's controls (the flight-path angle and throttle may jump there)."""
    m0 = flight.scale_m
    parts, ranges, start = [], [], 0
    for p in flight.pieces:
        fn = _model_function(flight.model, p.law)[0]
        h, v, m, x = p.y
        u = v if p.law == "free" else np.full(h.size, p.u)
        thr = np.full(h.size, p.throttle)
        if math.isnan(p.throttle):  # cruise: thrust = drag
            o1 = np.asarray(fn(h[None], u[None], m[None], 1.0, p.a))
            thr = np.maximum(o1[_D] / (o1[_T] * np.cos(o1[_ALPHA])), flight.model.throttle_min)
        o = np.asarray(fn(h[None], u[None], m[None], thr[None], p.a))
        v = o[_V]
        parts.append({
            "time_s": p.t, "altitude_m": h, "tas_m_s": v, "mach": o[_MACH],
            "cas_m_s": np.asarray(cas_from_impact_pressure(np.maximum(o[_QC], 0.0)), float),
            "energy_height_m": energy_height_m(h, v), "ps_m_s": o[_PS],
            "flight_path_angle_rad": np.arcsin(o[_SIN]), "mass_kg": m,
            "fuel_used_kg": m0 - m, "distance_m": x, "throttle": thr,
            "lift_coefficient": o[_CL], "load_factor": o[_N], "dynamic_pressure_pa": o[_Q],
            "thrust_n": o[_T]})
        ranges.append((start, start + h.size - 1))
        start += h.size
    cols = {k: np.concatenate([pt[k] for pt in parts]) for k in parts[0]}
    return cols, ranges


def _check_limits(flight: _Flight, cols: dict) -> None:
    """Raise :class:`ScheduleNotFlyable` at the first point outside the envelope (one boundary
    rule, :mod:`climbopt.envelope`), naming the row; ``excess`` is the largest margin."""
    fq = flight_quantities(flight.model, cols["altitude_m"], cols["tas_m_s"], cols["mass_kg"],
                           lift_coefficient=cols["lift_coefficient"],
                           flight_path_angle_rad=cols["flight_path_angle_rad"])
    margins = flight.envelope.margins(fq)
    first, row = None, ""
    for name, mg in margins.items():
        bad = np.flatnonzero(mg > INSIDE_TOL)
        if bad.size and (first is None or bad[0] < first):
            first, row = int(bad[0]), name
    if first is None:
        return
    i = first
    worst = max(float(np.max(mg)) for mg in margins.values())
    h, v, m = (float(cols[k][i]) for k in ("altitude_m", "tas_m_s", "mass_kg"))
    r = flight.envelope.row(row)
    if row == "stall":
        reason = (f"slower than the CLmax speed (stall row of the envelope): CL "
                  f"{fq.lift_coefficient[i]:.3f} against CLmax {fq.cl_max[i]:.3f}")
    elif row == "cas_restriction":
        c_r, h_r = flight.envelope.limits.cas_restriction
        reason = f"CAS above the restriction of {_kt_words(c_r)} below {_alt_words(h_r)}"
    elif row == "altitude":
        reason = (f"outside the altitude window by {margins[row][i] * 1000.0:.0f} m "
                  "(altitude limits, table data or climb profile)")
    else:
        reason = (f"beyond the {r.words} limit by {100.0 * margins[row][i]:.2g} % of the "
                  "limit")
    raise flight.not_flyable(reason, h, v, m, limit=row, excess=worst,
                             highest=float(np.max(cols["altitude_m"][: i + 1])))


# ------------------------------------------------------------------------------ flying

def _flight_for(scenario, model, spec: ScheduleSpec, envelope, *, dense: bool,
                rtol: float) -> _Flight:
    """Check the schedule's numbers and set up its flight from the mission's start state."""
    name = spec.name
    share = float(spec.acceleration_share)
    if not 0.0 < share <= 1.0:
        raise ValueError(f"schedule {name!r}: acceleration_share must lie in (0, 1], got {share}")
    speeds = [("cas_m_s", spec.cas_m_s), ("mach", spec.mach),
              ("cas_below_restriction_m_s", spec.cas_below_restriction_m_s)]
    for label, value in speeds:
        if value is not None and not (math.isfinite(value) and value > 0.0):
            raise ValueError(f"schedule {name!r}: {label} must be a positive number, got {value}")
    mission = scenario.mission
    restriction = scenario.limits.cas_restriction
    law_value = {"climb": ("cas", float(spec.cas_m_s))}
    if spec.mach is not None:
        law_value["mach"] = ("mach", float(spec.mach))
    h_r = None
    if spec.cas_below_restriction_m_s is not None:
        if restriction is None:
            raise ValueError(f"schedule {name!r} gives a CAS below the restriction altitude, "
                             "but the scenario has no CAS restriction (limits.cas_restriction)")
        h_r = float(restriction[1])
        if mission.start.altitude_m < h_r:
            law_value["restriction"] = ("cas", float(spec.cas_below_restriction_m_s))
    start, target = mission.start, mission.target
    fl = _Flight(name=name, model=model, envelope=envelope,
                 law_value=law_value,
                 restriction_m=h_r, target=(float(target.altitude_m), float(target.tas_m_s)),
                 share=share, fuel_capacity_kg=scenario.aircraft.fuel_capacity_kg, dense=dense,
                 rtol=rtol)
    fl.state = [0.0, float(start.altitude_m), float(start.tas_m_s), float(model.mass_kg), 0.0]
    return fl


def _fly(scenario, model, spec, envelope, *, dense=True, rtol=RTOL):
    """Fly ``spec``: (flight, columns, index ranges); raises :class:`ScheduleNotFlyable`."""
    if envelope is None:
        envelope = envelope_for(scenario, model)
    fl = _flight_for(scenario, model, spec, envelope, dense=dense, rtol=rtol)
    fl.run()
    dash = scenario.mission.dash_distance_m
    if dash and dash > fl.state[4]:
        fl.cruise(dash - fl.state[4])
    if not fl.pieces:
        raise ValueError(f"schedule {spec.name!r}: the start state is the target state; "
                         "there is nothing to fly")
    cols, ranges = _columns(fl)
    _check_limits(fl, cols)
    return fl, cols, ranges


def fly_schedule(scenario, model, spec: ScheduleSpec, *, envelope=None) -> Trajectory:
    """Fly the climb schedule ``spec`` through the aircraft model (see the module docstring).

    Parameters
    ----------
    scenario : climbopt.scenario.Scenario
        Start and target states, limits (the CAS restriction), rating, fuel capacity, optional
        dash distance (cruised level at the target state, thrust = drag, after the climb).
    model : climbopt.aircraft.AircraftModel
        The shared aircraft model.
    spec : climbopt.scenario.ScheduleSpec
        CAS below the restriction altitude [m/s] (or None), climb CAS [m/s], Mach above the
        crossover (or None: CAS all the way) and the acceleration share s in (0, 1] (fraction
        of the specific excess power given to speed while climbing; 1 = level acceleration).
    envelope : climbopt.envelope.Envelope, optional
        The scenario's envelope (built when omitted; pass it to save time in loops).

    Returns
    -------
    Trajectory
        ``method=Method.SCHEDULE``, ``objective=Objective.NONE``, ``name=spec.name``,
        ``profile="procedure"``; every column of :data:`climbopt.results.COLUMNS` at points
        every 100 ft of climb, every 2 s of level acceleration or deceleration, every 10 s of
        cruise and at both ends of every segment (a segment boundary appears twice, once with
        each segment's flight-path angle and throttle); typed ``segments``; notes in words.

    Raises
    ------
    ScheduleNotFlyable
        Below the CLmax speed, beyond any envelope limit, Ps <= 0 before the target (with the
        highest altitude reached), fuel capacity exceeded, or leaving the model's tables.
    ValueError
        Malformed schedule (non-positive speeds, share outside (0, 1], a restriction CAS in a
        scenario without a CAS restriction).
    """
    t_wall = _time.perf_counter()
    fl, cols, ranges = _fly(scenario, model, spec, envelope)
    segments = tuple(Segment(p.kind, a, b, hold=p.hold, cas_m_s=p.cas_m_s, mach=p.mach)
                     for p, (a, b) in zip(fl.pieces, ranges))
    return Trajectory(
        Method.SCHEDULE, Objective.NONE, cols, converged=True,
        status=f"flown: {len(segments)} segments, {fl.steps} integrator steps",
        iterations=1, wall_s=_time.perf_counter() - t_wall, segments=segments,
        notes=_notes(fl, cols, ranges, scenario), profile="procedure", name=spec.name,
        schedule=spec)


def _notes(fl: _Flight, cols: dict, ranges, scenario) -> tuple[str, ...]:
    """The schedule, the method and each segment in words."""
    lv = fl.law_value
    parts = []
    if "restriction" in lv:
        parts.append(f"{_law_words(*lv['restriction'])} below {_alt_words(fl.restriction_m)}")
    parts.append(_law_words(*lv["climb"]))
    if "mach" in lv:
        parts.append(_law_words(*lv["mach"]) + " above the crossover")
    notes = [f"schedule {fl.name!r}: " + ", then ".join(parts)]
    if "mach" in lv:
        notes.append("crossover altitude "
                     + (_alt_words(fl.crossover_m) if fl.crossover_m is not None else
                        "not reached below the target altitude (CAS all the way)"))
    notes.append(
        "flown through the model as a quasi-steady point mass: dh/dt = Ps / (1 + (V/g0) dV/dh) "
        "holding a speed, lift = m g0 cos(gamma) (gamma by fixed-point iteration); speed "
        f"changes while climbing take a share {fl.share:g} of Ps (acceleration share), level "
        "acceleration or deceleration at the target altitude")
    t, h = cols["time_s"], cols["altitude_m"]
    fuel, dist = cols["fuel_used_kg"], cols["distance_m"]
    for k, (p, (a, b)) in enumerate(zip(fl.pieces, ranges), 1):
        where = (f"{_alt_words(h[a])} to {m_to_ft(h[b]):,.0f} ft" if h[b] - h[a] > 0.5
                 else f"at {_alt_words(h[a])}")
        what = f"climb at {p.hold}" if p.kind == "climb" else p.hold
        notes.append(f"segment {k}: {what}, {where}: {t[b] - t[a]:.1f} s, "
                     f"{fuel[b] - fuel[a]:.1f} kg, {(dist[b] - dist[a]) / 1000:.1f} km")
    dash = scenario.mission.dash_distance_m
    if dash and not any(p.kind == "cruise" for p in fl.pieces):
        notes.append(f"the climb alone covers {dist[-1] / 1000:.1f} km, more than the dash "
                     f"distance {dash / 1000:.1f} km; no cruise leg is flown")
    return tuple(notes)


# ------------------------------------------------------------------------------ best schedule

#: Penalty of a best schedule against its reference above which it is called a poor fit [-].
POOR_FIT_PENALTY = 0.10
#: Nelder-Mead stopping tolerances of the best-schedule search, in its scaled variables (knots
#: and hundredths of Mach: 0.5 kt, Mach 0.005) and relative to the objective: the answer is
#: rounded to whole knots and Mach 0.01 and its rounded neighbours are all flown, so a finer
#: stop changes no demo's answer (checked on every demo and the published interceptor) but
#: costs up to twice the flights.
SEARCH_XTOL = 0.5
SEARCH_FTOL = 1.0e-4
#: Penalty of an unflyable candidate: (PENALTY + excess) times the objective's scale.
PENALTY = 2.0
_KT = 1852.0 / 3600.0


def _cost(objective: Objective, w: float):
    """Objective value of a flight from its time [s] and fuel [kg]: s, kg, kg."""
    return {Objective.TIME: lambda t, f: t, Objective.FUEL: lambda t, f: f,
            Objective.WEIGHTED: lambda t, f: f + w * t}[objective]


@dataclass
class _Search:
    """The fixed data of one best-schedule search and its flight counter."""

    scenario: object
    model: object
    envelope: object
    objective: Objective
    cost: object
    share: float
    restriction: bool
    bounds: list  # [(lo, hi)] per scaled variable: restriction CAS [kt], climb CAS [kt], 100 M
    flights: int = 0
    scale: float = math.nan
    closest: tuple | None = None  # (error, schedule) of the candidate that failed least

    def spec(self, x, name="candidate") -> ScheduleSpec:
        """The schedule of scaled variables ``x`` (restriction CAS, climb CAS, 100 Mach)."""
        x = list(x)
        c_r = x.pop(0) * _KT if self.restriction else None
        return ScheduleSpec(name, cas_m_s=x[0] * _KT, mach=x[1] / 100.0,
                            cas_below_restriction_m_s=c_r, acceleration_share=self.share)

    def fly(self, x) -> tuple[float | None, float]:
        """(objective of the flight of ``x`` or None when it cannot be flown, excess)."""
        self.flights += 1
        spec = self.spec(x)
        try:
            fl, _, _ = _fly(self.scenario, self.model, spec, self.envelope, dense=False,
                            rtol=SEARCH_RTOL)
        except ScheduleNotFlyable as exc:
            if self.closest is None or exc.excess < self.closest[0].excess:
                self.closest = (exc, spec)
            return None, min(exc.excess, 10.0)
        return self.cost(fl.state[0], self.model.mass_kg - fl.state[3]), 0.0

    def nothing_flyable(self, what: str) -> ScheduleNotFlyable:
        """The error when no candidate flies: the closest failure, where and why."""
        reason = f"no {what} can be flown"
        if self.closest is None:
            return ScheduleNotFlyable(f"best {self.objective}", reason, limit="envelope")
        c, spec = self.closest
        return ScheduleNotFlyable(
            f"best {self.objective}",
            f"{reason}; the closest, {_schedule_name(spec)}, fails there: {c.reason}",
            altitude_m=c.altitude_m, tas_m_s=c.tas_m_s, cas_m_s=c.cas_m_s, mach=c.mach,
            limit=c.limit, excess=c.excess, highest_altitude_m=c.highest_altitude_m,
            mass_kg=c.mass_kg)

    def value(self, x) -> float:
        """Objective of the flight of ``x``; an unflyable one costs (PENALTY + excess) times
        the scale (the objective of the start)."""
        j, excess = self.fly(x)
        return self.scale * (PENALTY + excess) if j is None else j


def _cas_range(envelope, model, altitudes, mass_kg, cas_kt) -> tuple[float, float] | None:
    """Lowest and highest CAS [kt] of ``cas_kt`` inside every envelope row at every altitude
    (1 g; the one boundary rule), or None."""
    h = np.asarray(altitudes, float)[:, None]
    p = np.asarray(model.atmosphere(h).pressure_pa, float)
    tas = np.asarray(mach_from_cas(cas_kt[None, :] * _KT, p), float) * \
        np.asarray(model.atmosphere(h).speed_of_sound_m_s, float)
    fq = flight_quantities(model, np.broadcast_to(h, tas.shape), tas, mass_kg)
    ok = np.all(np.broadcast_arrays(*envelope.inside(fq).values()), axis=0).all(axis=0)
    return (float(cas_kt[ok][0]), float(cas_kt[ok][-1])) if ok.any() else None


def _mach_range(envelope, model, altitude_m, mass_kg) -> tuple[float, float] | None:
    """Lowest and highest Mach (0.005 steps) inside every envelope row at ``altitude_m`` (1 g)."""
    mach = np.arange(0.05, 4.0, 0.005)
    a = float(model.atmosphere(altitude_m).speed_of_sound_m_s)
    fq = flight_quantities(model, np.full(mach.size, altitude_m), mach * a, mass_kg)
    ok = np.all(np.broadcast_arrays(*envelope.inside(fq).values()), axis=0)
    return (float(mach[ok][0]), float(mach[ok][-1])) if ok.any() else None


def _best_cas(model, cost_rates, altitudes, mass_kg, lo_kt, hi_kt) -> float:
    """Energy-state start speed: the CAS [kt] in [lo, hi] that maximises Ps over the
    objective's cost rate (1 / s for time, fuel flow for fuel; Rutowski 1954) at 1 g and full
    rating, averaged over ``altitudes`` (no solver: a scan of the model)."""
    cas = np.linspace(lo_kt, hi_kt, 60)
    best = []
    for h in altitudes:
        atm = model.atmosphere(h)
        v = np.asarray(mach_from_cas(cas * _KT, float(atm.pressure_pa)), float) * \
            float(atm.speed_of_sound_m_s)
        f = model.evaluate(np.full(v.size, h), v, mass_kg, throttle=model.throttle_max,
                           check=False)
        best.append(cas[int(np.argmax(f.ps_m_s / cost_rates(f.fuel_flow_kg_s)))])
    return float(np.mean(best))


def _search_setup(scenario, model, objective: Objective, envelope) -> tuple[_Search, list]:
    """Bounds of the search from the envelope and its start from the energy-state speeds."""
    mission = scenario.mission
    h0, ht = float(mission.start.altitude_m), float(mission.target.altitude_m)
    m0 = float(model.mass_kg)
    w = float(scenario.solver.cost_weight_kg_per_s)
    restriction = scenario.limits.cas_restriction
    has_r = restriction is not None and h0 < restriction[1]
    bottom = float(restriction[1]) if has_r else h0
    grid = np.arange(40.0, 1500.0, 1.0)
    ranges = []
    if has_r:
        ranges.append(_cas_range(envelope, model, np.linspace(h0, bottom, 5)[:-1], m0, grid))
    ranges.append(_cas_range(envelope, model, [bottom], m0, grid))
    mach = _mach_range(envelope, model, ht, m0)
    ranges.append(None if mach is None else (100.0 * mach[0], 100.0 * mach[1]))
    if any(r is None for r in ranges):
        raise ScheduleNotFlyable(f"best {objective}", "no constant CAS or Mach lies inside the "
                                 "flight envelope over the climb", limit="envelope")
    rates = {Objective.TIME: lambda ff: 1.0, Objective.FUEL: lambda ff: ff,
             Objective.WEIGHTED: lambda ff: ff + w}[objective]
    x0 = []
    if has_r:
        x0.append(_best_cas(model, rates, np.linspace(h0, bottom, 4)[:-1], m0,
                            *ranges[0]))
    levels = np.linspace(bottom, ht, 6)[1:-1]
    x0.append(_best_cas(model, rates, levels, m0, *ranges[-2]))
    top_cas = _best_cas(model, rates, [ht], m0, *ranges[-2])
    p_t = float(model.atmosphere(ht).pressure_pa)
    x0.append(100.0 * float(mach_from_cas(top_cas * _KT, p_t)))
    x0 = [min(max(x, lo), hi) for x, (lo, hi) in zip(x0, ranges)]
    search = _Search(scenario, model, envelope, objective, _cost(objective, w),
                     float(getattr(mission, "acceleration_share", DEFAULT_ACCELERATION_SHARE)),
                     has_r, ranges)
    return search, x0


def _flyable_start(search: _Search, x0: list) -> list:
    """``x0`` if it can be flown, else the best flyable point of a coarse grid over the box
    (quarters of each range); sets the search's objective scale. Raises
    :class:`ScheduleNotFlyable` when nothing can be flown."""
    best, best_j = x0, search.fly(x0)[0]
    if best_j is None:
        axes = [np.linspace(lo, hi, 5)[1:-1] for lo, hi in search.bounds]
        for x in np.array(np.meshgrid(*axes, indexing="ij")).reshape(len(axes), -1).T:
            j = search.fly(list(x))[0]
            if j is not None and (best_j is None or j < best_j):
                best, best_j = list(x), j
    if best_j is None:
        raise search.nothing_flyable("constant schedule of the search box")
    search.scale = abs(best_j)
    return best


def _rounded(search: _Search, x) -> tuple[list, int]:
    """The best flyable of the whole-knot / 0.01-Mach neighbours of ``x`` (floor and ceiling
    of each variable, kept inside the bounds), and the number of neighbours flown."""
    choices = []
    for v, (lo, hi) in zip(x, search.bounds):
        c = {float(math.floor(v)), float(math.ceil(v))}
        c = {min(max(k, math.ceil(lo - 1e-9)), math.floor(hi + 1e-9)) for k in c}
        choices.append(sorted(c))
    best, best_j, n = None, math.inf, 0
    for cand in np.array(np.meshgrid(*choices, indexing="ij")).reshape(len(choices), -1).T:
        j = search.fly(list(cand))[0]
        n += 1
        if j is not None and j < best_j:
            best, best_j = list(cand), j
    if best is None:
        raise search.nothing_flyable("whole-knot / 0.01-Mach neighbour of the best schedule")
    return best, n


def _schedule_name(spec: ScheduleSpec) -> str:
    """E.g. "250/276/M0.74" (restriction CAS / climb CAS [kt] / Mach), "250/276" CAS only."""
    parts = [] if spec.cas_below_restriction_m_s is None else \
        [f"{m_s_to_kt(spec.cas_below_restriction_m_s):.0f}"]
    parts.append(f"{m_s_to_kt(spec.cas_m_s):.0f}")
    if spec.mach is not None:
        parts.append(f"M{spec.mach:.2f}")
    return "/".join(parts)


def best_schedule_spec(scenario, model, objective, *, reference=None,
                       envelope=None) -> tuple[ScheduleSpec, Trajectory]:
    """The best flyable constant schedule and its flight: see :func:`best_schedule`."""
    t_wall = _time.perf_counter()
    objective = Objective(objective)
    if objective is Objective.NONE:
        raise ValueError("best_schedule needs an objective: 'time', 'fuel' or 'weighted'")
    env = envelope_for(scenario, model) if envelope is None else envelope
    search, x0 = _search_setup(scenario, model, objective, env)
    x0 = _flyable_start(search, x0)
    steps = [8.0] * (len(x0) - 1) + [2.0]  # 8 kt, Mach 0.02
    simplex = [x0] + [[v + (d if v + d <= hi else -d) * (i == k) for i, (v, (lo, hi)) in
                       enumerate(zip(x0, search.bounds))] for k, d in enumerate(steps)]
    from scipy.optimize import minimize

    res = minimize(search.value, x0, method="Nelder-Mead", bounds=search.bounds,
                   options={"xatol": SEARCH_XTOL, "fatol": SEARCH_FTOL * search.scale,
                            "initial_simplex": simplex, "maxfev": 300})
    x, n_round = _rounded(search, res.x)
    spec = search.spec(x)
    fl, _, _ = _fly(scenario, model, spec, env, dense=False, rtol=SEARCH_RTOL)
    if spec.mach is not None and fl.crossover_m is None:
        spec = replace(spec, mach=None)  # crossover above the target: CAS all the way
    spec = replace(spec, name=_schedule_name(spec))
    traj = fly_schedule(scenario, model, spec, envelope=env)
    w = float(scenario.solver.cost_weight_kg_per_s)
    j = search.cost(traj.time_s, traj.fuel_kg)
    notes = [
        f"best constant schedule for minimum {_objective_words(objective, w)}: {spec.name} "
        f"({_objective_words(objective, w)} {j:,.1f} {'s' if objective is Objective.TIME else 'kg'})",
        f"search: Nelder-Mead (scipy) over {'restriction CAS, ' if search.restriction else ''}"
        f"climb CAS and Mach inside the envelope's speed range, from the energy-state speeds "
        f"(best Ps over the cost rate at 1 g); stopped at {SEARCH_XTOL:g} kt / Mach "
        f"{SEARCH_XTOL / 100:g} and {SEARCH_FTOL:g} of the objective ({res.nfev} flights, "
        f"tolerance {SEARCH_RTOL:g}); then the best flyable of the {n_round} whole-knot / "
        "0.01-Mach neighbours, flown again at full accuracy",
        f"acceleration share {search.share:g} (the scenario's mission.acceleration_share)"]
    comparison = None
    if reference is not None:
        comparison = _compare(traj, reference, objective, w)
        notes.append(_comparison_words(comparison))
        if comparison.objective_difference_relative > POOR_FIT_PENALTY:
            notes.append(
                f"no constant CAS/Mach schedule comes near the optimum for this climb (penalty "
                f"{100 * comparison.objective_difference_relative:+.0f} %): the optimum exchanges "
                "speed and altitude (dives, zooms) in ways a constant schedule cannot fly; fly "
                "the optimum's own schedule table instead")
    traj = traj.with_(method=Method.BEST_SCHEDULE, objective=objective,
                      iterations=search.flights + 1, wall_s=_time.perf_counter() - t_wall,
                      status=f"best schedule: {search.flights + 1} flights; {traj.status}",
                      notes=tuple(notes) + traj.notes, reference=comparison)
    return spec, traj


def best_schedule(scenario, model, objective, *, reference=None, envelope=None) -> Trajectory:
    """The constant climb schedule that minimises ``objective`` when flown through the model.

    The schedule is a restriction CAS (when the scenario has a CAS restriction above the start
    altitude; at most the restriction's CAS), a climb CAS and a climb Mach, flown with the
    scenario's acceleration share (``mission.acceleration_share``) as :func:`fly_schedule`
    flies it. Search: scipy's bounded Nelder-Mead over those two or three numbers (knots and
    hundredths of Mach), bounds from the envelope (the CAS range inside every limit at 1 g at
    the bottom of each band, the Mach range at the target altitude), started from the
    energy-state speeds (the CAS that maximises Ps over the objective's cost rate, averaged
    over the band; Rutowski 1954); each evaluation is a flight at relative tolerance
    :data:`SEARCH_RTOL`, an unflyable candidate costs a penalty (:data:`PENALTY` plus how far
    it fails, times the objective). Stops when the simplex is within :data:`SEARCH_XTOL`
    (0.5 kt, Mach 0.005) and the objective within :data:`SEARCH_FTOL` (1e-4 relative). The
    answer is then rounded as flown: the best flyable of the whole-knot / 0.01-Mach
    neighbours, flown again at full accuracy (:data:`RTOL`). When the crossover lies above the
    target altitude the schedule is CAS only (no Mach).

    Parameters
    ----------
    scenario, model
        As for :func:`fly_schedule`.
    objective : str or Objective
        "time" [s], "fuel" [kg] or "weighted" (fuel + ``solver.cost_weight_kg_per_s`` x time
        [kg]).
    reference : Trajectory, optional
        The optimum to compare with (the collocation result of the same objective): time and
        fuel differences go to the notes and to ``trajectory.reference``.
    envelope : Envelope, optional
        Prebuilt :func:`climbopt.envelope.envelope_for` of the scenario.

    Returns
    -------
    Trajectory
        ``method=Method.BEST_SCHEDULE``, ``objective``, ``name`` e.g. "250/276/M0.74"
        (restriction CAS / climb CAS in knots / Mach), ``iterations`` = flights, the flight's
        table, segments and notes (see :func:`fly_schedule`), ``reference`` comparison.

    Raises
    ------
    ScheduleNotFlyable
        No constant schedule inside the envelope can be flown.
    """
    return best_schedule_spec(scenario, model, objective, reference=reference,
                              envelope=envelope)[1]


def _objective_words(objective: Objective, w: float) -> str:
    return {Objective.TIME: "time", Objective.FUEL: "fuel",
            Objective.WEIGHTED: f"fuel + {w:g} kg/s x time"}[objective]


def _compare(traj: Trajectory, reference: Trajectory, objective: Objective,
             w: float) -> ReferenceComparison:
    """``traj`` against ``reference`` (differences are traj minus reference)."""
    cost = _cost(objective, w)
    j_ref = cost(reference.time_s, reference.fuel_kg)
    dj = cost(traj.time_s, traj.fuel_kg) - j_ref
    return ReferenceComparison(
        reference=reference.label, objective=objective, time_s=reference.time_s,
        fuel_kg=reference.fuel_kg, time_difference_s=traj.time_s - reference.time_s,
        fuel_difference_kg=traj.fuel_kg - reference.fuel_kg, objective_difference=dj,
        objective_difference_relative=dj / j_ref if j_ref else math.nan)


def _comparison_words(c: ReferenceComparison) -> str:
    return (f"against the {c.reference}: time {c.time_difference_s:+.1f} s "
            f"({100 * c.time_difference_s / c.time_s:+.2f} %), fuel {c.fuel_difference_kg:+.1f} kg "
            f"({100 * c.fuel_difference_kg / c.fuel_kg:+.2f} %); penalty in the objective "
            f"{100 * c.objective_difference_relative:+.2f} %")
