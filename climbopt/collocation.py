"""Full point-mass climb optimisation by direct collocation (CasADi + IPOPT).

Model (flat non-rotating Earth, point mass in the vertical plane; e.g. Bryson, Desai & Hoffman,
J. Aircraft 6(6), 1969; Betts, *Practical Methods for Optimal Control*, 2nd ed., SIAM 2010,
minimum-time-to-climb example)::

    h'     = V sin(gamma)
    V'     = (T cos(alpha_T) - D) / m - g0 sin(gamma)
    gamma' = (T sin(alpha_T) + L) / (m V) - g0 cos(gamma) / V
    m'     = -fuel flow
    x'     = V cos(gamma)

with L = q S CL, D = q S CD(CL, M), q = rho V^2 / 2, thrust T and fuel flow at the throttle from
the aircraft model, and alpha_T the angle between thrust and velocity: the angle of attack
CL / CL_alpha(M) when thrust acts along the body axis (``thrust_alignment = "body"``), zero when
it acts along the flight path. Air data from the model's smooth US Standard Atmosphere 1976 twin.
States: altitude h [m], true airspeed V [m/s], flight-path angle gamma [rad], mass m [kg],
ground distance x [m]. Controls: lift coefficient CL and, when the scenario's throttle range is
not a single value, the throttle.

Transcription: Hermite-Simpson in separated form (Betts 2010, sec. 4.5) on a mesh over the
normalised time tau = t / t_f in [0, 1] with the final time t_f a decision variable. Every
variable is scaled (altitude / 1e4 m, speed / 300 m/s, mass / start mass, distance / 1e5 m,
t_f / 100 s). Box limits (altitude range, speed range, mass range, CL range, throttle range,
start and end states) are simple bounds, so IPOPT's iterates never leave them. Path constraints
at every node and interval midpoint, each divided by its limit:

* Mach <= min(limits.max_mach, top of the table data) (keeps the tables in their data);
* dynamic pressure <= limits.max_dynamic_pressure_pa;
* impact pressure <= the impact pressure of limits.max_cas_m_s (CAS limit, compressible);
* CAS restriction below an altitude (e.g. 250 kt below 10,000 ft): the impact-pressure limit is
  enforced in full at and below the restriction altitude and relaxed over the band
  ``CAS_RESTRICTION_BAND_M`` above it with a C2 quintic smoothstep, so the constraint is smooth
  and never looser than the rule below the restriction altitude (our choice; documented in the
  result notes);
* -CLmax(M) <= CL <= CLmax(M) (the scenario gives only the positive CLmax; the negative bound
  is taken symmetric);
* -n_max <= L / (m g0) <= n_max (the scenario gives the positive load-factor limit only).

Objectives: ``"time"`` (minimum t_f), ``"fuel"`` (maximum final mass, free t_f), ``"weighted"``
(fuel + ``solver.cost_weight_kg_per_s`` * t_f). Missions: climb to the target altitude, speed and
flight-path angle; with ``mission.dash_distance_m`` the same single phase must also end at that
ground distance (the end state is the target state at the dash distance: the optimiser is free
to shape climb and dash together, which is the true optimum of "be at the target state at the
dash distance"; the energy-state solver instead flies the dash at the target state).

Initial guess: the energy-state path (:func:`climbopt.rutowski.solve_energy_state`) converted to
time, its instantaneous zooms given a duration and smoothed (see :func:`guess_from_trajectory`),
or a straight line between start and target (:func:`straight_line_guess`). Mesh refinement:
after each solve, intervals whose estimated local error (collocation residual of the
interpolating cubic at the quarter points) is large are bisected and the problem re-solved from
the previous solution, until the objective changes by less than ``solver.mesh_tolerance``
(relative), at most ``solver.max_mesh_refinements`` times. Every result is re-simulated
(:func:`climbopt.verify.resimulate`) and the check is attached as ``trajectory.verification``.
"""

from __future__ import annotations

import math
import time as _time
from dataclasses import dataclass

import numpy as np

from climbopt.airspeed import cas_from_mach, impact_pressure_from_cas, impact_pressure_pa
from climbopt.atmosphere import G0
from climbopt.results import Trajectory

__all__ = [
    "SolverFailure",
    "solve_collocation",
    "straight_line_guess",
    "guess_from_trajectory",
    "OBJECTIVES",
    "CAS_RESTRICTION_BAND_M",
    "DEFAULT_IPOPT_OPTIONS",
]

OBJECTIVES = ("time", "fuel", "weighted")

#: Scales of the decision variables (state order h, V, gamma, m, x; m is scaled by start mass).
ALTITUDE_SCALE_M = 1.0e4
SPEED_SCALE_M_S = 300.0
DISTANCE_SCALE_M = 1.0e5
TIME_SCALE_S = 100.0
#: Fuel objectives are divided by this fraction of the start mass.
FUEL_SCALE_FRACTION = 0.01

#: Local error (scaled state units per interval, see :func:`_interval_errors`) above which an
#: interval is split: 1e-3 is 10 m of altitude, 0.3 m/s, 1 mrad, 0.1% of the start mass.
ERROR_TOLERANCE = 1.0e-3

#: Width of the band above a CAS-restriction altitude over which the restriction is released [m].
CAS_RESTRICTION_BAND_M = 300.0

#: Flight-path angle bounds [rad] (+-80 deg; a climb optimum never comes near them).
GAMMA_BOUND_RAD = math.radians(80.0)

#: IPOPT options used unless the scenario (``[solver.ipopt]``) or the caller override them.
DEFAULT_IPOPT_OPTIONS = {
    "print_level": 0,
    "sb": "yes",
    "tol": 1e-8,
    "max_iter": 1000,
    "mu_init": 1e-3,
}


#: Extra IPOPT options for the refinement passes (started from the previous mesh's solution).
REFINE_IPOPT_OPTIONS = {"mu_strategy": "monotone", "mu_init": 1e-9, "bound_push": 1e-10,
                        "bound_frac": 1e-10}


class SolverFailure(RuntimeError):
    """IPOPT did not converge (or the mesh refinement failed); nothing here is optimal.

    Attributes
    ----------
    status : str
        IPOPT's return status, e.g. ``"Maximum_Iterations_Exceeded"``.
    iterations : int
        IPOPT iterations spent (all mesh passes).
    trajectory : Trajectory or None
        The last iterate as a trajectory with ``converged=False`` (for inspection only).
    guess : Trajectory or None
        The trajectory used as the initial guess (the energy-state result when it was used),
        so that a caller can still show that answer, labelled as such.
    """

    def __init__(self, message: str, *, status: str, iterations: int,
                 trajectory: Trajectory | None = None, guess: Trajectory | None = None):
        super().__init__(message)
        self.status = status
        self.iterations = int(iterations)
        self.trajectory = trajectory
        self.guess = guess


# --------------------------------------------------------------------------------------------
# Problem set-up
# --------------------------------------------------------------------------------------------


@dataclass
class _Setup:
    """Everything fixed for one scenario/objective: scales, bounds, path constraints."""

    scenario: object
    model: object
    objective: str
    rating: str
    throttle_free: bool
    body_thrust: bool
    m0: float
    x_scale: np.ndarray  # (5,)
    state_lb: np.ndarray  # (5,) physical
    state_ub: np.ndarray
    cl_bound: float
    x0: np.ndarray  # start state, physical (5,)
    xf: np.ndarray  # end state, physical, NaN where free (5,)
    path_names: list
    path_lb: np.ndarray
    path_ub: np.ndarray
    mach_cap: float
    notes: list
    weight_kg_per_s: float

    @property
    def n_u(self) -> int:
        return 2 if self.throttle_free else 1

    @property
    def fixed_throttle(self) -> float:
        return float(self.model.throttle_max)

    @property
    def fuel_scale_kg(self) -> float:
        return FUEL_SCALE_FRACTION * self.m0


def _sample_speed_of_sound(model, lo_m: float, hi_m: float) -> tuple[float, float]:
    h = np.linspace(lo_m, hi_m, 201)
    a = np.asarray(model.atmosphere(h).speed_of_sound_m_s, dtype=float)
    return float(a.min()), float(a.max())


def _setup(scenario, model, objective: str) -> _Setup:
    lim = scenario.limits
    mis = scenario.mission
    dom = model.domain
    notes: list[str] = []
    m0 = float(model.mass_kg)
    rating = mis.rating or model.default_rating
    throttle_free = float(model.throttle_max) > float(model.throttle_min)
    body = model.thrust_alignment == "body"
    if body and not model.has_lift_slope:
        raise ValueError("thrust along the body axis needs the lift-slope table "
                         "(aircraft.drag.lift_slope)")

    h_lo = max(lim.min_altitude_m, dom.altitude_min_m, model.atmosphere.altitude_min_m)
    h_hi = dom.altitude_max_m
    if lim.max_altitude_m is not None:
        h_hi = min(h_hi, lim.max_altitude_m)
    h_hi = min(h_hi, model.atmosphere.altitude_max_m)

    mach_cap = float(dom.mach_max)
    if lim.max_mach is not None:
        mach_cap = min(mach_cap, float(lim.max_mach))
    a_min, a_max = _sample_speed_of_sound(model, h_lo, h_hi)
    v0, vf = mis.start.tas_m_s, mis.target.tas_m_s
    v_lo = max(1.0, 0.2 * min(v0, vf), float(dom.mach_min) * a_max)
    v_hi = mach_cap * a_max
    fuel = model.fuel_capacity_kg if getattr(model, "fuel_capacity_kg", None) else 0.7 * m0
    m_lo = max(m0 - float(fuel), 1e-3 * m0)
    big_x = 1.0e3 * DISTANCE_SCALE_M
    state_lb = np.array([h_lo, v_lo, -GAMMA_BOUND_RAD, m_lo, 0.0])
    state_ub = np.array([h_hi, v_hi, GAMMA_BOUND_RAD, m0, big_x])

    mach_grid = np.linspace(dom.mach_min, dom.mach_max, 181)
    cl_bound = float(np.max(model.cl_max(mach_grid)))

    x0 = np.array([mis.start.altitude_m, v0, mis.start.flight_path_angle_rad, m0, 0.0])
    xf = np.array([mis.target.altitude_m, vf, mis.target.flight_path_angle_rad, np.nan, np.nan])
    if mis.dash_distance_m is not None:
        xf[4] = float(mis.dash_distance_m)
        notes.append("dash: one phase that must end at the target state at the dash distance "
                     f"({mis.dash_distance_m / 1000:.1f} km); climb and dash are shaped together")
    x_scale = np.array([ALTITUDE_SCALE_M, SPEED_SCALE_M_S, 1.0, m0,
                        max(DISTANCE_SCALE_M, float(mis.dash_distance_m or 0.0) / 5.0)])

    names, lbs, ubs = ["mach"], [float(dom.mach_min) / mach_cap], [1.0]
    if lim.max_dynamic_pressure_pa is not None:
        names.append("dynamic_pressure"); lbs.append(-np.inf); ubs.append(1.0)
    if lim.max_cas_m_s is not None:
        names.append("cas"); lbs.append(-np.inf); ubs.append(1.0)
    if lim.cas_restriction is not None:
        names.append("cas_restriction"); lbs.append(-np.inf); ubs.append(0.0)
        notes.append("CAS restriction enforced in full up to its altitude and released smoothly "
                     f"over the {CAS_RESTRICTION_BAND_M:.0f} m above it")
    names.append("cl_max"); lbs.append(-1.0); ubs.append(1.0)
    names.append("load_factor"); lbs.append(-1.0); ubs.append(1.0)

    if objective == "weighted":
        w = float(scenario.solver.cost_weight_kg_per_s)
    else:
        w = 0.0
    return _Setup(scenario, model, objective, rating, throttle_free, body, m0, x_scale, state_lb,
                  state_ub, cl_bound, x0, xf, names, np.array(lbs), np.array(ubs), mach_cap,
                  notes, w)


def _smoothstep(s):
    """C2 quintic step: 0 for s <= 0, 1 for s >= 1, 6 s^5 - 15 s^4 + 10 s^3 between."""
    import casadi as ca

    c = ca.fmin(ca.fmax(s, 0.0), 1.0)
    return c**3 * (10.0 - 15.0 * c + 6.0 * c**2)


def _point_function(st: _Setup):
    """CasADi Function (x_scaled[5], u[n_u]) -> (dx_scaled/dt [5], path [n_path]).

    The tables (aircraft model and atmosphere, CasADi B-splines) are called in a small MX graph;
    all remaining algebra sits in one SX function, which keeps derivative evaluation cheap.
    """
    import casadi as ca

    model = st.model
    lim = st.scenario.limits
    xs = st.x_scale
    S = float(model.reference_area_m2)

    # SX part: the algebra, with the table values as inputs.
    X = ca.SX.sym("x", 5)
    U = ca.SX.sym("u", st.n_u)
    p_s, rho_s, a_s, cd_s, clmax_s, cla_s, thr_s, ff_s = (ca.SX.sym(n) for n in (
        "p", "rho", "a", "cd", "clmax", "cla", "thrust", "ff"))
    h = X[0] * xs[0]
    v = X[1] * xs[1]
    gam = X[2]
    m = X[3] * xs[3]
    cl = U[0]
    mach = v / a_s
    q = 0.5 * rho_s * v * v
    lift = q * S * cl
    drag = q * S * cd_s
    if st.body_thrust:
        alpha = cl / cla_s
        t_par, t_perp = thr_s * ca.cos(alpha), thr_s * ca.sin(alpha)
    else:
        t_par, t_perp = thr_s, 0.0
    f = ca.vertcat(
        v * ca.sin(gam),
        (t_par - drag) / m - G0 * ca.sin(gam),
        (t_perp + lift) / (m * v) - G0 * ca.cos(gam) / v,
        -ff_s,
        v * ca.cos(gam),
    ) / ca.DM(xs)
    path = []
    for name in st.path_names:
        if name == "mach":
            path.append(mach / st.mach_cap)
        elif name == "dynamic_pressure":
            path.append(q / lim.max_dynamic_pressure_pa)
        elif name == "cas":
            path.append(impact_pressure_pa(mach, p_s)
                        / float(impact_pressure_from_cas(lim.max_cas_m_s)))
        elif name == "cas_restriction":
            cas_r, h_r = lim.cas_restriction
            qc_r = float(impact_pressure_from_cas(cas_r))
            # Largest relative excess possible above the band: at the Mach cap at h_r.
            p_r = float(model.atmosphere(np.array(h_r)).pressure_pa)
            excess = max(float(impact_pressure_pa(st.mach_cap, p_r)) / qc_r - 1.0, 0.1)
            path.append(impact_pressure_pa(mach, p_s) / qc_r - 1.0
                        - excess * _smoothstep((h - h_r) / CAS_RESTRICTION_BAND_M))
        elif name == "cl_max":
            path.append(cl / clmax_s)
        elif name == "load_factor":
            path.append(lift / (m * G0) / lim.max_load_factor)
    algebra = ca.Function("algebra", [X, U, p_s, rho_s, a_s, cd_s, clmax_s, cla_s, thr_s, ff_s],
                          [f, ca.vertcat(*path)])

    # MX part: the tables.
    Xm = ca.MX.sym("x", 5)
    Um = ca.MX.sym("u", st.n_u)
    hm = Xm[0] * xs[0]
    vm = Xm[1] * xs[1]
    atm = model.atmosphere(hm)
    machm = vm / atm.speed_of_sound_m_s
    clm = Um[0]
    thr = Um[1] if st.throttle_free else st.fixed_throttle
    cd = model.drag_coefficient(clm, machm)
    clmax = model.cl_max(machm)
    cla = model.lift_slope_per_rad(machm) if st.body_thrust else ca.MX(1.0)
    thrust = model.thrust_n(hm, machm, thr, st.rating)
    ff = model.fuel_flow_kg_s(hm, machm, thr, st.rating)
    fo, po = algebra(Xm, Um, atm.pressure_pa, atm.density_kg_m3, atm.speed_of_sound_m_s, cd,
                     clmax, cla, thrust, ff)
    return ca.Function("point", [Xm, Um], [fo, po])


# --------------------------------------------------------------------------------------------
# Initial guesses
# --------------------------------------------------------------------------------------------


@dataclass
class _Guess:
    """A guess as functions of normalised time: arrays over ``tau`` in [0, 1] and t_f [s]."""

    tau: np.ndarray
    states: np.ndarray  # (5, n) physical
    cl: np.ndarray
    throttle: np.ndarray
    tf_s: float
    source: str


def _cl_for_path(st: _Setup, h, v, gam, m, tf_s, tau):
    """Lift coefficient that flies a given path: n = cos(gamma) + V gamma' / g0."""
    atm = st.model.atmosphere(np.clip(h, st.state_lb[0], st.state_ub[0]))
    q = 0.5 * np.asarray(atm.density_kg_m3) * v * v
    dgam = np.gradient(gam, tau * tf_s) if len(tau) > 2 else np.zeros_like(gam)
    n = np.cos(gam) + v * dgam / G0
    cl = n * m * G0 / (q * st.model.reference_area_m2)
    return np.clip(cl, -0.9 * st.cl_bound, 0.9 * st.cl_bound)


def straight_line_guess(scenario, model, objective: str = "time", points: int = 201) -> _Guess:
    """Cold start: altitude and speed linear in time from start to target.

    The final time is estimated from the energy-height gain divided by the mean specific excess
    power along the line (at full throttle, positive values only). Flight-path angle from the
    line's climb rate, CL for that path, mass from the mean fuel flow, distance integrated.
    """
    st = _setup(scenario, model, objective)
    return _straight_line(st, points)


def _straight_line(st: _Setup, points: int = 201) -> _Guess:
    model = st.model
    tau = np.linspace(0.0, 1.0, points)
    h = st.x0[0] + (st.xf[0] - st.x0[0]) * tau
    v = st.x0[1] + (st.xf[1] - st.x0[1]) * tau
    h_c = np.clip(h, st.state_lb[0], st.state_ub[0])
    a = np.asarray(model.atmosphere(h_c).speed_of_sound_m_s)
    mach = np.clip(v / a, model.domain.mach_min, model.domain.mach_max)
    perf = model.evaluate(h_c, mach * a, st.m0, 1.0, st.model.throttle_max, st.rating, check=False)
    ps = np.asarray(perf.ps_m_s)
    pos = ps[ps > 0.0]
    ps_mean = float(np.mean(pos)) if pos.size else 1.0
    dhe = abs((st.xf[0] + st.xf[1] ** 2 / (2 * G0)) - (st.x0[0] + st.x0[1] ** 2 / (2 * G0)))
    tf = max(dhe / max(ps_mean, 1.0), 10.0)
    if not np.isnan(st.xf[4]):
        tf = max(tf, st.xf[4] / (0.5 * (st.x0[1] + st.xf[1])))
    ff = float(np.mean(np.asarray(perf.fuel_flow_kg_s)))
    m = st.m0 - ff * tf * tau
    m = np.maximum(m, st.state_lb[3] + 0.01 * st.m0)
    sin_g = np.clip((st.xf[0] - st.x0[0]) / tf / v, -0.5, 0.5)
    gam = np.arcsin(sin_g) * np.ones_like(tau)
    gam[0], gam[-1] = st.x0[2], st.xf[2]
    x = np.concatenate([[0.0], np.cumsum(0.5 * (v[1:] * np.cos(gam[1:]) + v[:-1] * np.cos(gam[:-1]))
                                         * np.diff(tau) * tf)])
    if not np.isnan(st.xf[4]):
        x = x * st.xf[4] / x[-1]
    cl = _cl_for_path(st, h, v, np.zeros_like(gam), m, tf, tau)
    thr = np.full_like(tau, st.model.throttle_max)
    return _Guess(tau, np.vstack([h, v, gam, m, x]), cl, thr, tf, "straight line")


def _moving_average(y: np.ndarray, width: int) -> np.ndarray:
    if width < 2:
        return y
    pad = width // 2
    yp = np.concatenate([np.full(pad, y[0]), y, np.full(pad, y[-1])])
    kernel = np.ones(2 * pad + 1) / (2 * pad + 1)
    return np.convolve(yp, kernel, mode="valid")


def guess_from_trajectory(trajectory: Trajectory, scenario, model, objective: str = "time",
                          points: int = 401, zoom_sin_gamma: float = 0.3) -> _Guess:
    """Warm start from any trajectory (e.g. the energy-state path), converted to time.

    Instantaneous zooms (steps with no elapsed time) get a duration as if flown at a flight-path
    angle with sine ``zoom_sin_gamma`` (|dh| / (V sin gamma)); the path is then resampled evenly in
    time and altitude and speed smoothed with a moving average over 4% of the time (so zooms
    become finite exchanges); flight-path angle from the smoothed climb rate; CL for that path;
    the ends are set to the mission's start and target states. A trajectory with stored controls
    and strictly increasing time (a collocation result) is used as it is.
    """
    st = _setup(scenario, model, objective)
    return _from_trajectory(st, trajectory, points, zoom_sin_gamma)


def _from_trajectory(st: _Setup, tr: Trajectory, points: int = 401,
                     zoom_sin_gamma: float = 0.3) -> _Guess:
    tb = tr.table
    t = np.asarray(tb["time_s"], float) - float(tb["time_s"][0])
    h = np.asarray(tb["altitude_m"], float)
    v = np.asarray(tb["tas_m_s"], float)
    gam = np.asarray(tb["flight_path_angle_rad"], float)
    m = np.asarray(tb["mass_kg"], float)
    x = np.asarray(tb["distance_m"], float) - float(tb["distance_m"][0])
    thr = np.asarray(tb["throttle"], float)
    controls = getattr(tr, "controls", None)
    if controls is not None and np.all(np.diff(t) > 0):
        tau = t / t[-1]
        cl = np.asarray(controls["lift_coefficient"], float)
        thr = np.asarray(controls.get("throttle", thr), float)
        return _Guess(tau, np.vstack([h, v, gam, m, x]), cl, thr, float(t[-1]), tr.method)
    # Give zero-duration steps (zooms) a duration.
    dt = np.diff(t)
    dh = np.abs(np.diff(h))
    vm = 0.5 * (v[1:] + v[:-1])
    zoom_dt = dh / (np.maximum(vm, 1.0) * zoom_sin_gamma)
    tiny = dt <= 1e-9 * max(t[-1], 1.0)
    dt = np.where(tiny, np.maximum(zoom_dt, 1e-3), dt)
    t2 = np.concatenate([[0.0], np.cumsum(dt)])
    tf = float(t2[-1])
    if tf <= 0.0 or not np.isfinite(tf):
        return _straight_line(st, points)
    tg = np.linspace(0.0, tf, points)
    hg = np.interp(tg, t2, h)
    vg = np.interp(tg, t2, v)
    mg = np.interp(tg, t2, m)
    thg = np.interp(tg, t2, thr)
    width = max(int(0.04 * points), 1)
    hg = _moving_average(hg, width)
    vg = _moving_average(vg, width)
    # Ends exactly at start and target; blend the correction in over the first / last 5%.
    ramp = np.clip(tg / (0.05 * tf), 0.0, 1.0)
    hg = hg + (st.x0[0] - hg[0]) * (1 - ramp)
    vg = vg + (st.x0[1] - vg[0]) * (1 - ramp)
    ramp2 = np.clip((tf - tg) / (0.05 * tf), 0.0, 1.0)
    hg = hg + (st.xf[0] - hg[-1]) * (1 - ramp2)
    vg = vg + (st.xf[1] - vg[-1]) * (1 - ramp2)
    hg = np.clip(hg, st.state_lb[0], st.state_ub[0])
    vg = np.clip(vg, st.state_lb[1], st.state_ub[1])
    sin_g = np.clip(np.gradient(hg, tg) / vg, -0.9, 0.9)
    gg = _moving_average(np.arcsin(sin_g), width)
    gg[0], gg[-1] = st.x0[2], st.xf[2]
    xg = np.concatenate([[0.0], np.cumsum(0.5 * (vg[1:] * np.cos(gg[1:]) + vg[:-1] * np.cos(gg[:-1]))
                                          * np.diff(tg))])
    if not np.isnan(st.xf[4]) and xg[-1] > 0:
        xg = xg * st.xf[4] / xg[-1]
    tau = tg / tf
    cl = _cl_for_path(st, hg, vg, gg, mg, tf, tau)
    thg = np.clip(thg, st.model.throttle_min, st.model.throttle_max)
    return _Guess(tau, np.vstack([hg, vg, gg, mg, xg]), cl, thg, tf, tr.method)


# --------------------------------------------------------------------------------------------
# One NLP on one mesh
# --------------------------------------------------------------------------------------------


def _iteration_callback(nx: int, ng: int, report):
    """A CasADi Callback that IPOPT calls once per iteration; forwards (count, objective)."""
    import casadi as ca

    class _Iterations(ca.Callback):
        def __init__(self):
            ca.Callback.__init__(self)
            self.count = 0
            self.construct("iterations", {})

        def get_n_in(self):
            return ca.nlpsol_n_out()

        def get_n_out(self):
            return 1

        def get_name_in(self, i):
            return ca.nlpsol_out(i)

        def get_name_out(self, i):
            return "ret"

        def get_sparsity_in(self, i):
            name = ca.nlpsol_out(i)
            if name == "f":
                return ca.Sparsity.dense(1)
            if name in ("x", "lam_x"):
                return ca.Sparsity.dense(nx)
            if name in ("g", "lam_g"):
                return ca.Sparsity.dense(ng)
            return ca.Sparsity(0, 0)

        def eval(self, arg):
            self.count += 1
            report(self.count, float(arg[1]))
            return [0]

    return _Iterations()


@dataclass
class _Solution:
    tau: np.ndarray  # (2N+1,) normalised times of nodes and midpoints
    states: np.ndarray  # (5, 2N+1) physical
    cl: np.ndarray
    throttle: np.ndarray
    tf_s: float
    objective_value: float  # in user units: s (time) or kg (fuel, weighted)
    status: str
    success: bool
    iterations: int
    ipopt_s: float
    nlp_s: float
    intervals: int


def _objective_value(st: _Setup, states: np.ndarray, tf_s: float) -> float:
    fuel = st.m0 - float(states[3, -1])
    if st.objective == "time":
        return tf_s
    if st.objective == "fuel":
        return fuel
    return fuel + st.weight_kg_per_s * tf_s


def _interp_guess(g: _Guess, tau_pts: np.ndarray):
    states = np.vstack([np.interp(tau_pts, g.tau, g.states[i]) for i in range(5)])
    return states, np.interp(tau_pts, g.tau, g.cl), np.interp(tau_pts, g.tau, g.throttle), g.tf_s


def _solve_mesh(st: _Setup, F, mesh: np.ndarray, init, ipopt_opts: dict, report=None) -> _Solution:
    """Transcribe on ``mesh`` (node taus, increasing from 0 to 1), solve, return the solution.

    ``init`` = (states (5,P) physical, cl (P,), throttle (P,), tf_s) at the mesh's nodes and
    midpoints.
    """
    import casadi as ca

    n_int = len(mesh) - 1
    P = 2 * n_int + 1
    nu = st.n_u
    nv = 5 + nu
    dtau = np.diff(mesh)
    tau_pts = np.empty(P)
    tau_pts[0::2] = mesh
    tau_pts[1::2] = 0.5 * (mesh[:-1] + mesh[1:])

    z = ca.MX.sym("z", nv * P + 1)
    W = ca.reshape(z[:-1], nv, P)
    X = W[:5, :]
    U = W[5:, :]
    tf = z[-1] * TIME_SCALE_S
    Fall, Pall = F.map(P)(X, U)
    Xk, Xm, Xk1 = X[:, 0:-1:2], X[:, 1::2], X[:, 2::2]
    Fk, Fm, Fk1 = Fall[:, 0:-1:2], Fall[:, 1::2], Fall[:, 2::2]
    hk = ca.repmat(ca.DM(dtau).T, 5, 1) * tf
    d_mid = Xm - 0.5 * (Xk + Xk1) - hk / 8.0 * (Fk - Fk1)
    d_simp = Xk1 - Xk - hk / 6.0 * (Fk + 4.0 * Fm + Fk1)
    g = ca.vertcat(ca.vec(ca.vertcat(d_mid, d_simp)), ca.vec(Pall))
    n_def = 10 * n_int
    npth = len(st.path_names)
    lbg = np.concatenate([np.zeros(n_def), np.tile(st.path_lb, P)])
    ubg = np.concatenate([np.zeros(n_def), np.tile(st.path_ub, P)])

    mf_s = X[3, -1]
    if st.objective == "time":
        J = z[-1]
    else:
        fuel_kg = (1.0 - mf_s) * st.m0
        J = (fuel_kg + st.weight_kg_per_s * tf) / st.fuel_scale_kg

    xs = st.x_scale
    lbw = np.zeros((nv, P))
    ubw = np.zeros((nv, P))
    lbw[:5, :] = (st.state_lb / xs)[:, None]
    ubw[:5, :] = (st.state_ub / xs)[:, None]
    lbw[5, :], ubw[5, :] = -st.cl_bound, st.cl_bound
    if st.throttle_free:
        lbw[6, :], ubw[6, :] = st.model.throttle_min, st.model.throttle_max
    lbw[:5, 0] = ubw[:5, 0] = st.x0 / xs
    fixed = ~np.isnan(st.xf)
    lbw[:5, -1][fixed] = (st.xf / xs)[fixed]
    ubw[:5, -1][fixed] = (st.xf / xs)[fixed]
    lbz = np.concatenate([lbw.ravel(order="F"), [1.0 / TIME_SCALE_S]])
    ubz = np.concatenate([ubw.ravel(order="F"), [1.0e5 / TIME_SCALE_S]])

    s0, cl0, th0, tf0 = init
    w0 = np.zeros((nv, P))
    w0[:5, :] = s0 / xs[:, None]
    w0[5, :] = cl0
    if st.throttle_free:
        w0[6, :] = th0
    z0 = np.concatenate([w0.ravel(order="F"), [tf0 / TIME_SCALE_S]])
    z0 = np.clip(z0, lbz, ubz)

    opts = {"ipopt." + k: v for k, v in ipopt_opts.items()}
    opts["print_time"] = False
    cb = None
    if report is not None:
        cb = _iteration_callback(len(z0), g.shape[0], report)
        opts["iteration_callback"] = cb
    t0 = _time.perf_counter()
    solver = ca.nlpsol("climb", "ipopt", {"x": z, "f": J, "g": g}, opts)
    t_build = _time.perf_counter() - t0
    t0 = _time.perf_counter()
    res = solver(x0=z0, lbx=lbz, ubx=ubz, lbg=lbg, ubg=ubg)
    t_solve = _time.perf_counter() - t0
    stats = solver.stats()
    zs = np.asarray(res["x"], float).ravel()
    Ws = zs[:-1].reshape(P, nv).T
    states = Ws[:5, :] * xs[:, None]
    cl = Ws[5, :].copy()
    thr = Ws[6, :].copy() if st.throttle_free else np.full(P, st.fixed_throttle)
    tf_s = float(zs[-1] * TIME_SCALE_S)
    del cb
    return _Solution(
        tau=tau_pts, states=states, cl=cl, throttle=thr, tf_s=tf_s,
        objective_value=_objective_value(st, states, tf_s),
        status=str(stats.get("return_status", "unknown")),
        success=bool(stats.get("success", False)),
        iterations=int(stats.get("iter_count", 0)),
        ipopt_s=t_solve, nlp_s=t_build, intervals=n_int,
    )


# --------------------------------------------------------------------------------------------
# Mesh refinement
# --------------------------------------------------------------------------------------------


def _hermite(x0, x1, f0, f1, h, s):
    """Cubic Hermite interpolant and its derivative at fractions s in [0, 1] of an interval."""
    s2, s3 = s * s, s * s * s
    h00, h10, h01, h11 = 2 * s3 - 3 * s2 + 1, s3 - 2 * s2 + s, -2 * s3 + 3 * s2, s3 - s2
    d00, d10, d01, d11 = 6 * s2 - 6 * s, 3 * s2 - 4 * s + 1, -6 * s2 + 6 * s, 3 * s2 - 2 * s
    x = h00 * x0 + h10 * h * f0 + h01 * x1 + h11 * h * f1
    dx = (d00 * x0 + d01 * x1) / h + d10 * f0 + d11 * f1
    return x, dx


def _quadratic(u0, um, u1, s):
    """Quadratic through (0, u0), (1/2, um), (1, u1) at s."""
    return u0 * (1 - s) * (1 - 2 * s) + um * 4 * s * (1 - s) + u1 * s * (2 * s - 1)


def _interval_errors(st: _Setup, F, sol: _Solution) -> np.ndarray:
    """Local error estimate of each interval [scaled state units]: the collocation residual
    x_interp' - f(x_interp, u_interp) at the quarter points of the Hermite cubic through the
    interval's end states and slopes, integrated over the interval (Simpson-like average)."""
    xs = st.x_scale[:, None]
    X = sol.states / xs
    U = np.vstack([sol.cl, sol.throttle]) if st.throttle_free else sol.cl[None, :]
    Fv = np.asarray(F.map(X.shape[1])(X, U)[0])
    mesh = sol.tau[0::2]
    h = np.diff(mesh) * sol.tf_s
    x0, x1 = X[:, 0:-1:2], X[:, 2::2]
    f0, f1 = Fv[:, 0:-1:2], Fv[:, 2::2]
    u0, um, u1 = U[:, 0:-1:2], U[:, 1::2], U[:, 2::2]
    err = np.zeros(len(h))
    for s in (0.25, 0.75):
        xq, dxq = _hermite(x0, x1, f0, f1, h[None, :], s)
        uq = _quadratic(u0, um, u1, s)
        fq = np.asarray(F.map(xq.shape[1])(xq, uq)[0])
        err = np.maximum(err, np.max(np.abs(dxq - fq), axis=0) * h)
    return err


def _refine(mesh: np.ndarray, err: np.ndarray, max_intervals: int) -> np.ndarray:
    """New mesh: every interval whose error estimate exceeds ``ERROR_TOLERANCE`` is split into
    2 to 4 equal pieces (more for larger errors: ceil((err / tol)^(1/3))); if none exceeds it,
    the 10% of intervals with the largest errors are bisected. Total capped at ``max_intervals``
    (largest errors first)."""
    n = len(err)
    pieces = np.ones(n, int)
    over = err > ERROR_TOLERANCE
    if over.any():
        pieces[over] = np.clip(np.ceil((err[over] / ERROR_TOLERANCE) ** (1.0 / 3.0)), 2, 4)
    else:
        pieces[np.argsort(err)[::-1][: int(math.ceil(0.1 * n))]] = 2
    budget = max(max_intervals - n, 0)
    for i in np.argsort(err)[::-1]:  # keep the largest errors within the budget
        extra = pieces[i] - 1
        if extra > budget:
            pieces[i] = 1 + budget
            extra = budget
        budget -= extra
    new = [mesh[:1]]
    for i in range(n):
        new.append(np.linspace(mesh[i], mesh[i + 1], pieces[i] + 1)[1:])
    return np.concatenate(new)


def _interp_solution(sol: _Solution, F, st: _Setup, tau_new: np.ndarray):
    """Initial values on a new mesh from a solution: states by the Hermite cubic of each old
    interval, controls by its quadratic."""
    xs = st.x_scale[:, None]
    X = sol.states / xs
    U = np.vstack([sol.cl, sol.throttle])
    Uf = U if st.throttle_free else U[:1]
    Fv = np.asarray(F.map(X.shape[1])(X, Uf)[0])
    mesh = sol.tau[0::2]
    idx = np.clip(np.searchsorted(mesh, tau_new, side="right") - 1, 0, len(mesh) - 2)
    h = np.diff(mesh)[idx]
    s = (tau_new - mesh[idx]) / h
    hh = h * sol.tf_s
    x0, x1 = X[:, 2 * idx], X[:, 2 * idx + 2]
    f0, f1 = Fv[:, 2 * idx], Fv[:, 2 * idx + 2]
    xq, _ = _hermite(x0, x1, f0, f1, hh[None, :], s[None, :])
    uq = _quadratic(U[:, 2 * idx], U[:, 2 * idx + 1], U[:, 2 * idx + 2], s[None, :])
    return xq * xs, uq[0], uq[1], sol.tf_s


# --------------------------------------------------------------------------------------------
# Result
# --------------------------------------------------------------------------------------------


def _trajectory(st: _Setup, sol: _Solution, *, converged: bool, status: str, iterations: int,
                wall_s: float, notes: list) -> Trajectory:
    """Per-point table at all nodes and midpoints (numpy model evaluation of the solution)."""
    model = st.model
    h, v, gam, m, x = sol.states
    t = sol.tau * sol.tf_s
    hc = np.clip(h, model.fit_domain.altitude_min_m, model.fit_domain.altitude_max_m)
    atm = model.atmosphere(hc)
    a = np.asarray(atm.speed_of_sound_m_s, float)
    p = np.asarray(atm.pressure_pa, float)
    rho = np.asarray(atm.density_kg_m3, float)
    mach = v / a
    mach_c = np.clip(mach, model.fit_domain.mach_min, model.fit_domain.mach_max)
    q = 0.5 * rho * v * v
    S = model.reference_area_m2
    cd = np.asarray(model.drag_coefficient(sol.cl, mach_c, check=False), float)
    thrust = np.asarray(model.thrust_n(hc, mach_c, sol.throttle, st.rating, check=False), float)
    drag = q * S * cd
    if st.body_thrust:
        alpha = sol.cl / np.asarray(model.lift_slope_per_rad(mach_c, check=False), float)
        t_par = thrust * np.cos(alpha)
    else:
        alpha = None
        t_par = thrust
    ps = v * (t_par - drag) / (m * G0)
    cas = np.asarray(cas_from_mach(np.maximum(mach, 0.0), p), float)
    table = {
        "time_s": t,
        "altitude_m": h,
        "tas_m_s": v,
        "mach": mach,
        "cas_m_s": cas,
        "energy_height_m": h + v * v / (2.0 * G0),
        "ps_m_s": ps,
        "flight_path_angle_rad": gam,
        "mass_kg": m,
        "fuel_used_kg": st.m0 - m,
        "distance_m": x,
        "throttle": sol.throttle,
    }
    controls = {
        "lift_coefficient": sol.cl.copy(),
        "throttle": sol.throttle.copy(),
        "load_factor": q * S * sol.cl / (m * G0),
        "dynamic_pressure_pa": q,
    }
    if alpha is not None:
        controls["angle_of_attack_rad"] = alpha
    return Trajectory(method="collocation", objective=st.objective, table=table,
                      converged=converged, status=status, iterations=iterations, wall_s=wall_s,
                      notes=list(notes), controls=controls)


def _active_bound_notes(st: _Setup, sol: _Solution) -> list:
    """Notes on artificial bounds that ended up active (the answer depends on them)."""
    notes = []
    names = ["altitude", "speed", "flight-path angle", "mass"]
    units = ["m", "m/s", "rad", "kg"]
    for i in range(4):
        inner = sol.states[i, 1:-1]
        for bound, word in ((st.state_lb[i], "lower"), (st.state_ub[i], "upper")):
            tol = 1e-6 * max(abs(bound), st.x_scale[i])
            hit = np.abs(inner - bound) <= max(tol, 1e-4 * st.x_scale[i])
            if np.any(hit):
                frac = float(np.mean(hit))
                notes.append(f"{names[i]} rides its {word} bound {bound:.6g} {units[i]} "
                             f"at {frac:.0%} of the points")
    return notes


# --------------------------------------------------------------------------------------------
# Public entry point
# --------------------------------------------------------------------------------------------


def solve_collocation(scenario, objective: str = "time", *, model=None, guess=None,
                      progress=None, intervals: int | None = None,
                      ipopt_options: dict | None = None, verify: bool = True) -> Trajectory:
    """Optimal climb by Hermite-Simpson collocation and IPOPT (see the module docstring).

    Parameters
    ----------
    scenario : Scenario
    objective : {"time", "fuel", "weighted"}
    model : AircraftModel, optional
        Built from the scenario when omitted.
    guess : None, "energy-state", "straight" or Trajectory
        Initial guess. ``None`` or ``"energy-state"``: the energy-state solution for the same
        objective (if that solver fails, a straight line, said in the notes). ``"straight"``:
        straight line from start to target (cold start). A Trajectory: that trajectory.
    progress : callable(message: str, fraction: float | None), optional
        Receives one message per IPOPT iteration and per mesh pass.
    intervals : int, optional
        Intervals of the first mesh (default ``scenario.solver.intervals``).
    ipopt_options : dict, optional
        IPOPT options; they override ``scenario.solver.ipopt``, which overrides
        :data:`DEFAULT_IPOPT_OPTIONS`.
    verify : bool
        Re-simulate the result (:func:`climbopt.verify.resimulate`) and attach the check.

    Returns
    -------
    Trajectory
        ``method="collocation"``; per-point table at the mesh nodes and midpoints; extra
        attributes ``controls`` (dict of arrays: ``lift_coefficient``, ``throttle``,
        ``load_factor``, ``dynamic_pressure_pa`` and, with body-axis thrust,
        ``angle_of_attack_rad``) and ``interpolation`` ("hermite-simpson"); ``verification``
        (see :mod:`climbopt.verify`). ``converged`` is true only when IPOPT converged on every
        mesh and the objective changed by less than ``solver.mesh_tolerance`` on the last
        refinement.

    Raises
    ------
    SolverFailure
        IPOPT did not converge; carries ``status``, ``iterations``, the last iterate as a
        trajectory with ``converged=False`` and the guess trajectory.
    ValueError
        Unknown objective, or body-axis thrust without a lift-slope table.
    """
    if objective not in OBJECTIVES:
        raise ValueError(f"objective must be one of {', '.join(OBJECTIVES)}; got {objective!r}")
    wall0 = _time.perf_counter()
    if model is None:
        from climbopt.aircraft import build_model

        model = build_model(scenario)
    st = _setup(scenario, model, objective)
    solver_opts = scenario.solver
    n0 = int(intervals or solver_opts.intervals)
    user = dict(solver_opts.ipopt or {})
    user.update(ipopt_options or {})
    ipopt = {**DEFAULT_IPOPT_OPTIONS, **user}
    # Refinement passes start next to the optimum: a small barrier parameter keeps IPOPT there.
    warm_opts = {**DEFAULT_IPOPT_OPTIONS, **REFINE_IPOPT_OPTIONS, **user}

    def say(msg, frac=None):
        if progress is not None:
            progress(msg, frac)

    notes = list(st.notes)
    guess_tr = None
    if isinstance(guess, Trajectory):
        g = _from_trajectory(st, guess)
        guess_tr = guess
        notes.append(f"initial guess: the given {guess.method} trajectory")
    elif guess in (None, "energy-state"):
        try:
            from climbopt.rutowski import solve_energy_state

            say("energy-state solution for the initial guess", 0.0)
            guess_tr = solve_energy_state(scenario, objective, model=model)
            g = _from_trajectory(st, guess_tr)
            notes.append("initial guess: energy-state path, zooms given time and smoothed")
        except Exception as exc:  # the guess is only a guess: fall back, and say so
            g = _straight_line(st)
            notes.append(f"initial guess: straight line (energy-state solver failed: {exc})")
    elif guess in ("straight", "cold"):
        g = _straight_line(st)
        notes.append("initial guess: straight line from start to target (cold start)")
    else:
        raise ValueError("guess must be None, 'energy-state', 'straight' or a Trajectory")

    F = _point_function(st)
    mesh = np.linspace(0.0, 1.0, n0 + 1)
    tau_pts = np.empty(2 * n0 + 1)
    tau_pts[0::2] = mesh
    tau_pts[1::2] = 0.5 * (mesh[:-1] + mesh[1:])
    init = _interp_guess(g, tau_pts)

    total_iter = 0
    ipopt_s = 0.0
    history = []
    prev = None
    sol = None
    mesh_converged = False
    max_ref = int(solver_opts.max_mesh_refinements)
    max_intervals = 8 * n0
    for npass in range(max_ref + 1):
        def report(k, f, npass=npass):
            say(f"mesh pass {npass + 1}: IPOPT iteration {k}, objective {f:.6g}", None)

        opts = ipopt if npass == 0 else warm_opts
        sol = _solve_mesh(st, F, mesh, init, opts, report if progress else None)
        total_iter += sol.iterations
        ipopt_s += sol.ipopt_s
        history.append((sol.intervals, sol.iterations, sol.objective_value, sol.status,
                        sol.ipopt_s))
        if not sol.success:
            tr = _trajectory(st, sol, converged=False, status=sol.status, iterations=total_iter,
                             wall_s=_time.perf_counter() - wall0,
                             notes=notes + [f"IPOPT did not converge on mesh pass {npass + 1}"])
            raise SolverFailure(
                f"IPOPT did not converge ({sol.status}) after {sol.iterations} iterations on "
                f"{sol.intervals} intervals (mesh pass {npass + 1}); no optimal trajectory",
                status=sol.status, iterations=total_iter, trajectory=tr, guess=guess_tr)
        say(f"mesh pass {npass + 1}: {sol.intervals} intervals, {sol.iterations} iterations, "
            f"objective {sol.objective_value:.6g}", (npass + 1) / (max_ref + 2))
        if prev is not None:
            change = abs(sol.objective_value - prev) / max(abs(sol.objective_value), 1e-12)
            if change < solver_opts.mesh_tolerance:
                mesh_converged = True
                break
        prev = sol.objective_value
        if npass == max_ref:
            break
        err = _interval_errors(st, F, sol)
        new_mesh = _refine(mesh, err, max_intervals)
        if len(new_mesh) == len(mesh):
            break
        mesh = new_mesh
        tp = np.empty(2 * (len(mesh) - 1) + 1)
        tp[0::2] = mesh
        tp[1::2] = 0.5 * (mesh[:-1] + mesh[1:])
        init = _interp_solution(sol, F, st, tp)

    notes += _active_bound_notes(st, sol)
    hist_txt = "; ".join(f"{n} intervals: {it} iterations, objective {obj:.7g}"
                         for n, it, obj, _, _ in history)
    notes.append(f"mesh passes: {hist_txt}")
    status = sol.status
    if sol.status != "Solve_Succeeded":
        notes.append(f"IPOPT status {sol.status}: converged to its acceptable (looser) tolerance")
    if not mesh_converged:
        notes.append(
            f"mesh refinement stopped after {len(history)} passes without the objective settling "
            f"to {solver_opts.mesh_tolerance:g} relative; not reported as converged")
        status = status + "; mesh not converged"
    tr = _trajectory(st, sol, converged=mesh_converged, status=status, iterations=total_iter,
                     wall_s=0.0, notes=notes)
    tr.ipopt_s = ipopt_s
    tr.mesh_history = history
    if verify:
        from climbopt.verify import resimulate

        say("re-simulating the optimal controls", None)
        tr.verification = resimulate(tr, scenario, model)
        if not tr.verification["ok"]:
            tr.notes.append("re-simulation check FAILED: " + tr.verification["message"])
    tr.wall_s = _time.perf_counter() - wall0
    return tr
