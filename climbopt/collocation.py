"""Full point-mass climb optimisation by direct collocation (CasADi + IPOPT).

Model (flat non-rotating Earth, point mass in the vertical plane; e.g. Bryson, Desai & Hoffman,
J. Aircraft 6(6), 1969; Betts, *Practical Methods for Optimal Control*, 2nd ed., SIAM 2010,
minimum-time-to-climb example)::

    h'     = V sin(gamma)
    V'     = (T cos(alpha_T) - D) / m - g0 sin(gamma)
    gamma' = (T sin(alpha_T) + L) / (m V) - g0 cos(gamma) / V
    m'     = -fuel flow
    x'     = V cos(gamma) + w(h)

with w(h) the along-track wind (ground distance), L = q S CL, D = q S CD(CL, M),
q = rho V^2 / 2, thrust T and fuel flow at the throttle from the aircraft model, and alpha_T
the angle between thrust and velocity: the angle of attack CL / CL_alpha(M) when thrust acts
along the body axis (``thrust_alignment = "body"``), zero when it acts along the flight path. Air data from the model's smooth US Standard Atmosphere 1976 twin.
States: altitude h [m], true airspeed V [m/s], flight-path angle gamma [rad], mass m [kg],
ground distance x [m]. Controls: lift coefficient CL and, when the scenario's throttle range is
not a single value, the throttle.

Transcription: Hermite-Simpson in separated form (Betts 2010, sec. 4.5) on a mesh over the
normalised time tau = t / t_f in [0, 1] with the final time t_f a decision variable. Every
variable is scaled (altitude / 1e4 m, speed / 300 m/s, mass / start mass, distance / 1e5 m,
t_f / 100 s). The flight envelope is :mod:`climbopt.envelope`'s, the same rows and boundary rule
as every other part of climbopt: its altitude window (which, for the *procedure* climb profile,
runs from the start to the target altitude) and, for the procedure profile, its no-descent row
(flight-path angle >= 0) are simple bounds, like the speed range, mass range, CL range, throttle
range and the start and end states, so IPOPT's iterates never leave them. Every other row
(table Mach range, Mach, dynamic pressure, CAS, CAS restriction, CLmax, load factor) is a path
constraint at every node and interval midpoint, in the envelope's normalised form; the CAS
restriction in its smooth form (released over ``CAS_RESTRICTION_BAND_M`` above its altitude,
never looser than the rule).

Objectives: ``"time"`` (minimum t_f), ``"fuel"`` (maximum final mass, free t_f), ``"weighted"``
(fuel + ``solver.cost_weight_kg_per_s`` * t_f). With a free throttle the minimum-time objective
carries a tie-break, ``FUEL_TIE_BREAK_S`` * fuel / start mass (0.1 s per 1% of the start mass
burnt): where the time does not depend on the throttle (an arc held at the speed limits) it picks
the least-fuel controls instead of one of the many equally fast ones, among which Hermite-Simpson
admits node-to-midpoint control oscillations that cannot be flown (see the constant's comment; it
moves the minimum time by less than 1e-5 relative). Missions: climb to the target altitude, speed
and flight-path angle. With ``mission.dash_distance_m`` a second phase follows, as the mission
defines it: steady level flight at the target altitude and speed until the ground distance from the
start equals the dash distance. It is transcribed like the climb (``DASH_INTERVALS`` intervals, its
duration a decision variable) with altitude, speed and flight-path angle held at the target by
simple bounds and level unaccelerated flight (V' = 0, gamma' = 0) imposed at every point, so CL and
throttle follow the mass; the climb phase ends at the target state with zero flight-path angle and
at most the dash distance from the start. The climb phase is otherwise free: where covering the
distance at another altitude and speed pays more than dashing at the target state (e.g. flying
faster than the target speed), the optimum does so and the dash phase shrinks, possibly to nothing;
the notes say so (the energy-state solver, which always dashes at the target state, then answers a
different question).

Initial guess: any trajectory, e.g. the energy-state path (the pipeline passes it), converted
to time, its instantaneous zooms given a duration and smoothed (see
:func:`guess_from_trajectory`), or a straight line between start and target
(:func:`straight_line_guess`). This module never calls another solver or the verifier
(:mod:`climbopt.pipeline` joins them).

Mesh refinement: after each solve the local error of every climb interval is estimated (the
collocation residual of the interpolating cubic at the quarter points); intervals above
``ERROR_TOLERANCE`` are split (more pieces for larger errors), or, when none is, the worst 10%
are bisected; the problem is re-solved from the previous solution with its IPOPT multipliers
carried over. This repeats until the objective changes by less than ``solver.mesh_tolerance``
(relative) and no interval exceeds ``ERROR_TOLERANCE``, at most ``solver.max_mesh_refinements``
times. One failure channel: anything short of an optimum (IPOPT failing on a mesh pass, or the
mesh refinement not settling within its passes) raises :class:`SolverFailure`, which carries the
last iterate, labelled as not converged.
"""

from __future__ import annotations

import contextlib
import math
import time as _time
from dataclasses import dataclass, field

import numpy as np

from climbopt import cache_dir
from climbopt.aircraft import wind_at
from climbopt.airspeed import cas_from_mach
from climbopt.atmosphere import G0, energy_height_m
from climbopt.envelope import CAS_RESTRICTION_BAND_M, FlightQuantities, envelope_for
from climbopt.results import Controls, Method, Trajectory, derive_segments

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

#: Parameters of the point function and the NLP built on it (scenario numbers that sweeps vary
#: and that enter the dynamics): start mass [kg], temperature offset [K], thrust scale [-].
POINT_PARAMETERS = ("mass_kg", "temperature_offset_k", "thrust_scale")

#: Scales of the decision variables (state order h, V, gamma, m, x; m is scaled by start mass).
ALTITUDE_SCALE_M = 1.0e4
SPEED_SCALE_M_S = 300.0
DISTANCE_SCALE_M = 1.0e5
TIME_SCALE_S = 100.0
#: Fuel objectives are divided by this fraction of the start mass.
FUEL_SCALE_FRACTION = 0.01

#: Local error (scaled state units per interval, see :func:`_interval_errors`) above which an
#: interval is split: 3e-4 is 3 m of altitude, 0.09 m/s, 0.3 mrad, 0.03% of the start mass.
#: Chosen against the re-simulation tolerance (0.1% of the final energy height, see
#: :mod:`climbopt.verify`): at Mach 2 (600 m/s) 0.09 m/s is 5.5 m of energy height, so the few
#: intervals that contain a control switch (where Hermite-Simpson errors are largest and add up
#: in an open-loop re-simulation) stay well inside the 20-30 m tolerance of a 20-30 km climb.
#: (1e-3 let a Mach 2 dash demo stop refining at 0.96e-3 and miss by 0.13%.)
ERROR_TOLERANCE = 3.0e-4

#: Refinement: an interval with error e > ERROR_TOLERANCE is split into
#: ceil((e / ERROR_TOLERANCE)^REFINE_EXPONENT) pieces, at least 2 and at most MAX_PIECES.
#: (1/2: between the O(h^4) local error of smooth arcs and the O(h) error of an interval that
#: contains a control switch.)
REFINE_EXPONENT = 0.5
MAX_PIECES = 4

#: Minimum time with a free throttle minimises t_f + FUEL_TIE_BREAK_S * fuel / start mass:
#: burning 1% of the start mass counts as 0.1 s. Where the aircraft cannot go faster (e.g. on
#: an arc held by both the Mach and the dynamic-pressure limits) the time does not depend on
#: the throttle, any surplus thrust can be spent as induced drag, and the discrete problem has a
#: family of optima, among them controls that alternate between nodes and midpoints
#: (Hermite-Simpson admits that: only the Simpson average enters the defects), which IPOPT
#: approaches slowly and which no aircraft can fly: without it, the climb-and-dash demo rode
#: such an arc at load factors -3.6 and +3.3 at alternate points, and flying those controls
#: missed the target by 17% of the energy height. The tie-break selects the least-fuel member:
#: level flight at n = 1, thrust = drag on average (the throttle may still differ by a few
#: percent between nodes and midpoints there, the discrete trace of the two state limits; the
#: quadratic control of each interval reproduces its Simpson average, so it re-simulates).
#: Measured effect on the minimum time: below 1e-5 relative (interceptor benchmark +0.0003 s of
#: 321.3 s), far below ``solver.mesh_tolerance``.
FUEL_TIE_BREAK_S = 10.0

#: Minimum fuel and the weighted cost with a free throttle add THROTTLE_SMOOTHING times the sum
#: of the squared throttle changes between consecutive climb points (nodes and midpoints) to the
#: scaled objective (whose unit is 1 % of the start mass of fuel). Where the fuel cost hardly
#: depends on how the throttle is spread (level cruise before a downrange point: a singular arc),
#: the discrete problem otherwise has many near-optima, among them a throttle jumping between its
#: bounds from point to point, which IPOPT approaches slowly and which does not re-simulate; the
#: term selects the smooth one. A smooth throttle history contributes a vanishing amount (its
#: changes shrink with the mesh), so the optimum moves by far less than the 0.1 % allowed:
#: measured on the demo business jet's 150 nmi minimum-fuel case (see the tests).
THROTTLE_SMOOTHING = 0.05

#: Intervals of the dash phase (its solution is smooth: mass falls almost linearly).
DASH_INTERVALS = 10
#: Upper bound of each phase's duration [s].
MAX_TIME_S = 1.0e5
#: The mesh never grows beyond this many times the first mesh's intervals.
MAX_INTERVALS_FACTOR = 4

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


#: Extra IPOPT options for the refinement passes, which start from the previous mesh's solution
#: and its multipliers carried to the new mesh (see :func:`_map_multipliers`).
REFINE_IPOPT_OPTIONS = {
    "warm_start_init_point": "yes",
    "mu_init": 1e-6,
    "warm_start_bound_push": 1e-8,
    "warm_start_bound_frac": 1e-8,
    "warm_start_slack_bound_push": 1e-8,
    "warm_start_slack_bound_frac": 1e-8,
    "warm_start_mult_bound_push": 1e-8,
}


#: Most IPOPT iterations of a first mesh pass started from the neighbouring case (16-50 in the
#: 24-case transport sweep); beyond them the case starts from its energy-state guess instead.
#: A neighbour too far away costs more than that guess: on the transport, thrust scale 0.9
#: after 1.0 took 162 iterations and 6.1 s from the neighbour, 3.7 s in all with this cap.
NEIGHBOUR_MAX_ITER = 150


class SolverFailure(RuntimeError):
    """The collocation solve reached no optimum (the solver's one failure channel).

    Attributes
    ----------
    status : str
        IPOPT's return status, e.g. ``"Maximum_Iterations_Exceeded"``, or it with
        "; mesh not converged" when IPOPT converged but the mesh refinement did not settle.
    iterations : int
        IPOPT iterations spent (all mesh passes).
    trajectory : Trajectory or None
        The last iterate as a trajectory with ``converged=False`` (for inspection only).
    """

    def __init__(self, message: str, *, status: str, iterations: int,
                 trajectory: Trajectory | None = None):
        super().__init__(message)
        self.status = status
        self.iterations = int(iterations)
        self.trajectory = trajectory


# --------------------------------------------------------------------------------------------
# Problem set-up
# --------------------------------------------------------------------------------------------


@dataclass
class _Setup:
    """Everything fixed for one scenario/objective: scales, bounds, path constraints."""

    scenario: object
    model: object
    objective: str
    throttle_free: bool
    body_thrust: bool
    m0: float
    x_scale: np.ndarray  # (5,)
    state_lb: np.ndarray  # (5,) physical
    state_ub: np.ndarray
    cl_bound: float
    x0: np.ndarray  # start state, physical (5,)
    xf: np.ndarray  # climb end state, physical, NaN where free (5,)
    dash_m: float | None  # dash distance from the start [m]
    envelope: object  # climbopt.envelope.Envelope
    path_names: list
    path_lb: np.ndarray
    path_ub: np.ndarray
    mach_cap: float
    notes: list
    weight_kg_per_s: float
    temperature_offset_k: float = 0.0
    thrust_scale: float = 1.0

    @property
    def point_params(self) -> np.ndarray:
        """Values of the point function's parameters (:data:`POINT_PARAMETERS`)."""
        return np.array([self.m0, self.temperature_offset_k, self.thrust_scale])

    @property
    def objective_weights(self) -> tuple[float, float, float]:
        """(c_t, c_m, c_u) of the scaled objective c_t t_f / TIME_SCALE_S + c_m (1 - m_f / m0)
        + c_u sum((throttle_{k+1} - throttle_k)^2) (the last term: see
        :data:`THROTTLE_SMOOTHING`)."""
        if self.objective == "time":
            return 1.0, (FUEL_TIE_BREAK_S / TIME_SCALE_S if self.throttle_free else 0.0), 0.0
        return (self.weight_kg_per_s * TIME_SCALE_S / self.fuel_scale_kg,
                self.m0 / self.fuel_scale_kg,
                THROTTLE_SMOOTHING if self.throttle_free else 0.0)

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
    """The :class:`_Setup` of ``scenario`` for ``objective``: state bounds and scales (SI), CL
    bound, start and end states, dash distance, the envelope's path rows, and the notes that
    go with them. One piece over 60 lines: a straight sequence that computes each field once,
    in the order its notes are written; split, it would only pass those values around."""
    lim = scenario.limits
    mis = scenario.mission
    dom = model.domain
    notes: list[str] = []
    m0 = float(model.mass_kg)
    throttle_free = float(model.throttle_max) > float(model.throttle_min)
    body = model.thrust_alignment == "body"
    if body and not model.has_lift_slope:
        raise ValueError("thrust along the body axis needs the lift-slope table "
                         "(aircraft.drag.lift_slope)")

    env = envelope_for(scenario, model)
    h_lo, h_hi = env.altitude_min_m, env.altitude_max_m

    mach_cap = float(dom.mach_max)
    if lim.max_mach is not None:
        mach_cap = min(mach_cap, float(lim.max_mach))
    _, a_max = _sample_speed_of_sound(model, h_lo, h_hi)
    v0, vf = mis.start.tas_m_s, mis.target.tas_m_s
    v_lo = max(1.0, 0.2 * min(v0, vf), float(dom.mach_min) * a_max)
    v_hi = mach_cap * a_max
    fuel = model.fuel_capacity_kg if getattr(model, "fuel_capacity_kg", None) else 0.7 * m0
    m_lo = max(m0 - float(fuel), 1e-3 * m0)
    dash = None if mis.dash_distance_m is None else float(mis.dash_distance_m)
    x_hi = dash if dash is not None else 1.0e3 * DISTANCE_SCALE_M
    gamma_lo = -GAMMA_BOUND_RAD
    if env.profile == "procedure":  # the envelope's "climb" row, as a simple bound
        gamma_lo = min(0.0, mis.start.flight_path_angle_rad, mis.target.flight_path_angle_rad)
        notes.append("procedure profile: altitude between the start and target altitudes and "
                     "never decreasing (flight-path angle >= 0), as simple bounds")
    state_lb = np.array([h_lo, v_lo, gamma_lo, m_lo, 0.0])
    state_ub = np.array([h_hi, v_hi, GAMMA_BOUND_RAD, m0, x_hi])

    mach_grid = np.linspace(dom.mach_min, dom.mach_max, 181)
    cl_bound = float(np.max(model.cl_max(mach_grid)))

    x0 = np.array([mis.start.altitude_m, v0, mis.start.flight_path_angle_rad, m0, 0.0])
    xf = np.array([mis.target.altitude_m, vf, mis.target.flight_path_angle_rad, np.nan, np.nan])
    if dash is not None:
        notes.append(f"dash: level flight at the target state to {dash / 1000:.1f} km from the "
                     "start after the climb (second phase)")
        if xf[2] != 0.0:
            notes.append("dash: the climb ends level (flight-path angle 0) so that the dash can "
                         "follow; the target flight-path angle is not used")
            xf[2] = 0.0
    x_scale = np.array([ALTITUDE_SCALE_M, SPEED_SCALE_M_S, 1.0, m0,
                        max(DISTANCE_SCALE_M, (dash or 0.0) / 5.0)])

    # every envelope row but those imposed as simple bounds (altitude, climb)
    rows = [r for r in env.rows if r.name not in ("altitude", "climb")]
    if lim.cas_restriction is not None:
        notes.append("CAS restriction enforced in full below its altitude and released smoothly "
                     f"over the {CAS_RESTRICTION_BAND_M:.0f} m above it (never looser than the "
                     "rule)")

    if objective == "time" and throttle_free:
        notes.append(f"minimum time with a fuel tie-break ({FUEL_TIE_BREAK_S * 0.01:g} s per 1% "
                     "of the start mass burnt): among equally fast controls the least-fuel ones")
    w = float(scenario.solver.cost_weight_kg_per_s) if objective == "weighted" else 0.0
    return _Setup(scenario, model, objective, throttle_free, body, m0, x_scale, state_lb,
                  state_ub, cl_bound, x0, xf, dash, env, [r.name for r in rows],
                  np.array([r.lower for r in rows]), np.array([r.upper for r in rows]), mach_cap,
                  notes, w, float(model.temperature_offset_k), float(model.thrust_scale))


def _point_function(st: _Setup):
    """CasADi Function (x_scaled[5], u[n_u], p[3]) -> (dx_scaled/dt [5], path [n_path]).

    ``p`` holds the scenario numbers a sweep varies that enter the dynamics
    (:data:`POINT_PARAMETERS`: start mass, which also scales the mass state, temperature offset
    and thrust scale), so one function, and one NLP built on it, serves every such case. It is
    written in SX with the table look-ups (aircraft model and atmosphere, CasADi B-splines)
    lifted out, and assembled as SX algebra around one MX node per look-up
    (:func:`climbopt.staging.staged_function`), which keeps its derivatives cheap.
    """
    import casadi as ca

    from climbopt.atmosphere import GAMMA_AIR, R_AIR
    from climbopt.staging import lifted_tables, staged_function

    model = st.model
    xs = st.x_scale
    X = ca.SX.sym("x", 5)
    U = ca.SX.sym("u", st.n_u)
    P = ca.SX.sym("p", len(POINT_PARAMETERS))
    with lifted_tables() as calls:
        h = X[0] * xs[0]
        v = X[1] * xs[1]
        t_std, ln_p = model.atmosphere.standard_temperature_log_pressure(h)
        temperature = t_std + P[1]
        pressure = ca.exp(ln_p)
        density = pressure / (R_AIR * temperature)
        sound = ca.sqrt(GAMMA_AIR * R_AIR * temperature)
        mach = v / sound
        thr = U[1] if st.throttle_free else st.fixed_throttle
        cd = model.drag_coefficient(U[0], mach)
        clmax = model.cl_max(mach)
        cla = model.lift_slope_per_rad(mach) if st.body_thrust else ca.SX(1.0)
        thrust, ff = model.engine(h, mach, thr, thrust_scale=P[2], temperature_offset_k=P[1],
                                  standard_temperature_k=t_std, speed_of_sound_m_s=sound)
        wind = model.wind_m_s(h) if model.has_wind else ca.SX(0.0)
    fo, po = _point_algebra(st)(X, U, P[0], pressure, density, sound, cd, clmax, cla, thrust,
                                ff, wind)
    return staged_function("point", [X, U, P], [fo, po], calls)


def _point_algebra(st: _Setup):
    """The algebra of :func:`_point_function`: SX Function (x_scaled[5], u[n_u], m0 [kg],
    pressure [Pa], density [kg/m^3], speed of sound [m/s], CD, CLmax, CL_alpha [1/rad],
    thrust [N], fuel flow [kg/s], along-track wind [m/s]) -> (dx_scaled/dt [5], path [n_path]):
    the equations of motion of the module docstring and the envelope's path constraints."""
    import casadi as ca

    xs = st.x_scale
    S = float(st.model.reference_area_m2)
    X = ca.SX.sym("x", 5)
    U = ca.SX.sym("u", st.n_u)
    m0 = ca.SX.sym("m0")
    p_s, rho_s, a_s, cd_s, clmax_s, cla_s, thr_s, ff_s, w_s = (ca.SX.sym(n) for n in (
        "p", "rho", "a", "cd", "clmax", "cla", "thrust", "ff", "wind"))
    scale = ca.vertcat(xs[0], xs[1], xs[2], m0, xs[4])
    h = X[0] * xs[0]
    v = X[1] * xs[1]
    gam = X[2]
    m = X[3] * m0
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
        v * ca.cos(gam) + w_s,  # ground speed: the along-track wind added
    ) / scale
    fq = FlightQuantities(h, mach, p_s, q, cl, clmax_s, lift / (m * G0))
    values = st.envelope.values(fq, smooth=True)
    path = [values[name] for name in st.path_names]
    return ca.Function("algebra", [X, U, m0, p_s, rho_s, a_s, cd_s, clmax_s, cla_s, thr_s,
                                   ff_s, w_s], [f, ca.vertcat(*path)])


# --------------------------------------------------------------------------------------------
# Compiled point functions (on-disk cache)
# --------------------------------------------------------------------------------------------

#: Version of the code-generation recipe (part of every artefact's key).
_COMPILE_RECIPE = 2
#: C compiler flags. -O1: on the 1969 interceptor the first IPOPT pass evaluates as fast as
#: with -O2 while the compilation takes about half as long (see benchmarks/bench_speed.py).
COMPILE_FLAGS = ("-O1", "-fPIC", "-shared")
#: Compiled functions already loaded in this process, by artefact path.
_LOADED: dict = {}


def _artefact_path(key: str):
    """Path of the compiled point function whose serialised form hashes to ``key``: the key,
    CasADi's version, the recipe and the flags make the name, so a change of any of them
    (different table values, limits, climbopt's algebra) compiles anew."""
    import hashlib

    import casadi as ca

    text = "|".join([key, ca.__version__, str(_COMPILE_RECIPE), " ".join(COMPILE_FLAGS)])
    return cache_dir() / f"point_{hashlib.sha256(text.encode()).hexdigest()[:32]}.so"


def _compile(F, path) -> None:
    """Generate C for ``F``, its Jacobian (``jac_point``, for the constraint Jacobian), its
    reverse-mode derivative (``adj1_point``, for the Lagrangian's gradient) and that
    derivative's Jacobian (``jac_adj1_point``: the Hessian of the multiplier-weighted point
    function, which is what IPOPT's exact Hessian needs at each point; CasADi finds all three
    by name when it differentiates the loaded function), compile it with the system C compiler
    (``$CC``, else ``cc``) and move it into place atomically.

    The reverse-mode recipe (2) replaced the full second-derivative tensor of recipe 1
    (``jac_jac_point``): on the demo transport it compiles in about a third of the time and
    IPOPT's solves run 1.6-1.9 times faster, with the same optimum (benchmarks/bench_speed.py).
    """
    import os
    import shutil
    import subprocess
    import tempfile

    import casadi as ca

    path.parent.mkdir(parents=True, exist_ok=True)
    work = tempfile.mkdtemp(prefix="compile-", dir=path.parent)
    try:
        cg = ca.CodeGenerator("point.c", {"with_header": False})
        adj = F.reverse(1)
        for fun in (F, F.jacobian(), adj, adj.jacobian()):
            cg.add(fun)
        cg.generate(work + os.sep)
        so = os.path.join(work, "point.so")
        cmd = [os.environ.get("CC") or "cc", *COMPILE_FLAGS, os.path.join(work, "point.c"),
               "-o", so, "-lm"]
        subprocess.run(cmd, check=True, capture_output=True, text=True)
        os.replace(so, path)
    finally:
        shutil.rmtree(work, ignore_errors=True)


def _compiled(F, key: str, build: bool = True):
    """(compiled point function, note): loaded from the cache, or compiled now; ``F`` itself
    (and a note saying why) when no C compiler can build it; (None, note) when it is not cached
    and ``build`` is false."""
    import subprocess

    import casadi as ca

    path = _artefact_path(key)
    if str(path) in _LOADED:
        return _LOADED[str(path)], f"point function: compiled C ({path.name}, loaded)"
    note = f"point function: compiled C from the cache ({path.name})"
    if not path.exists() and not build:
        return None, f"point function: not compiled yet ({path.name})"
    if not path.exists():
        t0 = _time.perf_counter()
        try:
            _compile(F, path)
        except (OSError, subprocess.CalledProcessError) as exc:
            detail = getattr(exc, "stderr", "") or str(exc)
            return F, ("point function: compiling failed, evaluated by CasADi instead ("
                       + " ".join(str(detail).split())[:200] + ")")
        note = (f"point function: compiled to C in {_time.perf_counter() - t0:.1f} s, cached "
                f"as {path}")
    E = ca.external("point", str(path))
    _LOADED[str(path)] = E
    return E, note


def compiled_point_function(scenario, model=None, objective: str = "time", *,
                            build: bool = True):
    """(compiled point function, artefact path, note) of ``scenario``: from the on-disk cache,
    or compiled now (``build=False``: None when not cached).

    Every scenario that differs only in the numbers of :data:`POINT_PARAMETERS`, the targets,
    the cost weight or the objective shares it; a sweep calls this once before its workers
    start so that none of them compiles."""
    if model is None:
        from climbopt.aircraft import build_model

        model = build_model(scenario)
    F, key = _keyed_point_function(_setup(scenario, model, objective))
    fun, note = _compiled(F, key, build)
    return fun, _artefact_path(key), note


# --------------------------------------------------------------------------------------------
# Initial guesses
# --------------------------------------------------------------------------------------------


@dataclass
class _Guess:
    """A climb guess over normalised time ``tau`` in [0, 1] (arrays), its duration and the
    duration of the dash that follows (0 without a dash)."""

    tau: np.ndarray
    states: np.ndarray  # (5, n) physical
    cl: np.ndarray
    throttle: np.ndarray
    tf_s: float
    source: str
    dash_s: float = 0.0


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
    line's climb rate, CL for that path, mass from the mean fuel flow, distance integrated; a
    dash (if any) takes the remaining distance at the target speed.
    """
    return _straight_line(_setup(scenario, model, objective), points)


def _straight_line(st: _Setup, points: int = 201) -> _Guess:
    model = st.model
    tau = np.linspace(0.0, 1.0, points)
    h = st.x0[0] + (st.xf[0] - st.x0[0]) * tau
    v = st.x0[1] + (st.xf[1] - st.x0[1]) * tau
    h_c = np.clip(h, st.state_lb[0], st.state_ub[0])
    a = np.asarray(model.atmosphere(h_c).speed_of_sound_m_s)
    mach = np.clip(v / a, model.domain.mach_min, model.domain.mach_max)
    perf = model.evaluate(h_c, mach * a, st.m0, 1.0, model.throttle_max, check=False)
    ps = np.asarray(perf.ps_m_s)
    pos = ps[ps > 0.0]
    ps_mean = float(np.mean(pos)) if pos.size else 1.0
    dhe = abs(float(energy_height_m(st.xf[0], st.xf[1]) - energy_height_m(st.x0[0], st.x0[1])))
    tf = max(dhe / max(ps_mean, 1.0), 10.0)
    ff = float(np.mean(np.asarray(perf.fuel_flow_kg_s)))
    m = np.maximum(st.m0 - ff * tf * tau, st.state_lb[3] + 0.01 * st.m0)
    sin_g = np.clip((st.xf[0] - st.x0[0]) / tf / v, -0.5, 0.5)
    gam = np.arcsin(sin_g)
    gam[0], gam[-1] = st.x0[2], st.xf[2]
    x = _integrate_distance(v, gam, tau * tf, wind_at(st.model, h))
    dash_s = 0.0
    if st.dash_m is not None:
        if x[-1] > 0.9 * st.dash_m:
            x *= 0.9 * st.dash_m / x[-1]
        dash_s = (st.dash_m - x[-1]) / st.xf[1]
    cl = _cl_for_path(st, h, v, np.zeros_like(gam), m, tf, tau)
    thr = np.full_like(tau, model.throttle_max)
    return _Guess(tau, np.vstack([h, v, gam, m, x]), cl, thr, tf, "straight line", dash_s)


def _integrate_distance(v, gam, t, wind=0.0):
    """Ground distance by the trapezoidal rule [m] (``wind``: along-track wind [m/s])."""
    vx = v * np.cos(gam) + wind
    return np.concatenate([[0.0], np.cumsum(0.5 * (vx[1:] + vx[:-1]) * np.diff(t))])


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

    A trailing dash at the target state (when the mission has one) is cut off and only its
    duration kept. Instantaneous zooms (steps with no elapsed time) get a duration as if flown
    at a flight-path angle with sine ``zoom_sin_gamma`` (|dh| / (V sin gamma)); the path is then
    resampled evenly in time and altitude and speed are smoothed with a moving average over 4%
    of the time (so zooms become finite exchanges); flight-path angle from the smoothed climb
    rate; CL for that path; the ends are blended onto the mission's start and target states. A
    trajectory with stored controls and strictly increasing time (a collocation result) is used
    as it is.
    """
    return _from_trajectory(_setup(scenario, model, objective), trajectory, points,
                            zoom_sin_gamma)


def _dash_start_index(st: _Setup, h: np.ndarray, v: np.ndarray) -> int:
    """Index where a trailing run of points at the target altitude and speed begins."""
    i = len(h) - 1
    if st.dash_m is None:
        return i
    at = (np.abs(h - st.xf[0]) <= 1.0 + 1e-4 * abs(st.xf[0])) & (np.abs(v - st.xf[1]) <= 0.5)
    while i > 0 and at[i - 1]:
        i -= 1
    return i


def _from_trajectory(st: _Setup, tr: Trajectory, points: int = 401,
                     zoom_sin_gamma: float = 0.3) -> _Guess:
    tb = tr.table
    t = np.asarray(tb["time_s"], float) - float(tb["time_s"][0])
    h = np.asarray(tb["altitude_m"], float)
    v = np.asarray(tb["tas_m_s"], float)
    ic = _dash_start_index(st, h, v)
    if ic < 2:
        return _straight_line(st, points)
    dash_s = float(t[-1] - t[ic])
    cut = slice(0, ic + 1)
    t, h, v = t[cut], h[cut], v[cut]
    gam = np.asarray(tb["flight_path_angle_rad"], float)[cut]
    m = np.asarray(tb["mass_kg"], float)[cut]
    x = (np.asarray(tb["distance_m"], float) - float(tb["distance_m"][0]))[cut]
    thr = np.asarray(tb["throttle"], float)[cut]
    controls = tr.controls
    if controls is not None and np.all(np.diff(t) > 0):
        cl = np.asarray(controls.lift_coefficient, float)[cut]
        thr = np.asarray(controls.throttle, float)[cut]
        return _Guess(t / t[-1], np.vstack([h, v, gam, m, x]), cl, thr, float(t[-1]), tr.method,
                      dash_s)
    # Give zero-duration steps (zooms) a duration.
    dt = np.diff(t)
    zoom_dt = np.abs(np.diff(h)) / (np.maximum(0.5 * (v[1:] + v[:-1]), 1.0) * zoom_sin_gamma)
    tiny = dt <= 1e-9 * max(t[-1], 1.0)
    dt = np.where(tiny, np.maximum(zoom_dt, 1e-3), dt)
    t2 = np.concatenate([[0.0], np.cumsum(dt)])
    tf = float(t2[-1])
    if not (tf > 0.0 and np.isfinite(tf)):
        return _straight_line(st, points)
    tg = np.linspace(0.0, tf, points)
    width = max(int(0.04 * points), 1)
    hg = _moving_average(np.interp(tg, t2, h), width)
    vg = _moving_average(np.interp(tg, t2, v), width)
    mg = np.interp(tg, t2, m)
    thg = np.interp(tg, t2, thr)
    # Ends exactly at start and target; blend the correction in over the first / last 5%.
    ramp0 = 1.0 - np.clip(tg / (0.05 * tf), 0.0, 1.0)
    ramp1 = 1.0 - np.clip((tf - tg) / (0.05 * tf), 0.0, 1.0)
    hg = hg + (st.x0[0] - hg[0]) * ramp0 + (st.xf[0] - hg[-1]) * ramp1
    vg = vg + (st.x0[1] - vg[0]) * ramp0 + (st.xf[1] - vg[-1]) * ramp1
    hg = np.clip(hg, st.state_lb[0], st.state_ub[0])
    vg = np.clip(vg, st.state_lb[1], st.state_ub[1])
    gg = _moving_average(np.arcsin(np.clip(np.gradient(hg, tg) / vg, -0.9, 0.9)), width)
    gg[0], gg[-1] = st.x0[2], st.xf[2]
    xg = _integrate_distance(vg, gg, tg, wind_at(st.model, hg))
    if st.dash_m is not None:
        if xg[-1] > 0.95 * st.dash_m:
            xg *= 0.95 * st.dash_m / xg[-1]
        dash_s = max(dash_s, (st.dash_m - xg[-1]) / st.xf[1])
    tau = tg / tf
    cl = _cl_for_path(st, hg, vg, gg, mg, tf, tau)
    thg = np.clip(thg, st.model.throttle_min, st.model.throttle_max)
    return _Guess(tau, np.vstack([hg, vg, gg, mg, xg]), cl, thg, tf, tr.method, dash_s)


def _dash_init(st: _Setup, m_c: float, x_c: float, dash_s: float, points: int):
    """Dash-phase start values: level flight at the target state, throttle for thrust = drag."""
    model = st.model
    tau = np.linspace(0.0, 1.0, points)
    h, v = st.xf[0], st.xf[1]
    dur = max(dash_s, 1.0)
    perf = model.evaluate(np.array([h]), np.array([v]), np.array([m_c]), 1.0, 1.0,
                          check=False)
    thr = float(np.clip(perf.drag_n[0] / perf.thrust_n[0], model.throttle_min,
                        model.throttle_max))
    ff = float(perf.fuel_flow_kg_s[0]) * thr
    m = m_c - ff * dur * tau
    x = x_c + (st.dash_m - x_c) * tau
    states = np.vstack([np.full_like(tau, h), np.full_like(tau, v), np.zeros_like(tau), m, x])
    q = 0.5 * float(model.atmosphere(np.array(h)).density_kg_m3) * v * v
    cl = m * G0 / (q * model.reference_area_m2)
    return _Phase(tau, states, cl, np.full_like(tau, thr), dur)


# --------------------------------------------------------------------------------------------
# One NLP on one mesh
# --------------------------------------------------------------------------------------------


def _iteration_callback(nx: int, ng: int):
    """A CasADi Callback that IPOPT calls once per iteration. Its ``report`` (callable(count,
    scaled objective) or None) and ``deadline`` (``time.perf_counter`` value or None; IPOPT is
    stopped once it has passed) are set before each solve, so that one NLP, built once, serves
    solves with and without progress reports and time limits."""
    import casadi as ca

    class _Iterations(ca.Callback):
        def __init__(self):
            ca.Callback.__init__(self)
            self.count = 0
            self.report = None
            self.deadline = None
            self.stopped = False
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
            if self.report is not None:
                self.report(self.count, float(arg[1]))
            if self.deadline is not None and _time.perf_counter() > self.deadline:
                self.stopped = True
                return [1]  # non-zero: IPOPT stops (User_Requested_Stop)
            return [0]

    return _Iterations()


@dataclass
class _Phase:
    """Values of one phase at its nodes and midpoints (physical units)."""

    tau: np.ndarray  # (P,) normalised time in the phase, 0..1
    states: np.ndarray  # (5, P)
    cl: np.ndarray  # (P,)
    throttle: np.ndarray  # (P,)
    duration_s: float


@dataclass
class _Solution:
    climb: _Phase
    dash: _Phase | None
    objective_value: float  # s (time) or kg (fuel, weighted)
    status: str
    success: bool
    iterations: int
    ipopt_s: float
    nlp_s: float
    intervals: int
    lam_x: np.ndarray | None = None  # IPOPT's bound multipliers (scaled problem)
    lam_g: np.ndarray | None = None  # constraint multipliers
    reused: bool = False  # the NLP was built by an earlier solve in this process

    @property
    def total_time_s(self) -> float:
        return self.climb.duration_s + (self.dash.duration_s if self.dash else 0.0)

    @property
    def final_mass_kg(self) -> float:
        last = self.dash if self.dash is not None else self.climb
        return float(last.states[3, -1])


def _objective_value(st: _Setup, total_time_s: float, final_mass_kg: float) -> float:
    fuel = st.m0 - final_mass_kg
    if st.objective == "time":
        return total_time_s
    return fuel + st.weight_kg_per_s * total_time_s


def _points(mesh: np.ndarray) -> np.ndarray:
    """Normalised times of the nodes and interval midpoints of a mesh."""
    tau = np.empty(2 * len(mesh) - 1)
    tau[0::2] = mesh
    tau[1::2] = 0.5 * (mesh[:-1] + mesh[1:])
    return tau


def _phase_from_guess(g: _Guess, mesh: np.ndarray) -> _Phase:
    tau = _points(mesh)
    states = np.vstack([np.interp(tau, g.tau, g.states[i]) for i in range(5)])
    return _Phase(tau, states, np.interp(tau, g.tau, g.cl), np.interp(tau, g.tau, g.throttle),
                  g.tf_s)


def _hs_defects(X, Fv, dtau, duration):
    """Hermite-Simpson separated-form defects (Betts 2010, eqs. 4.104-4.105) of one phase:
    midpoint interpolation and Simpson quadrature, for scaled states ``X`` (n x P) and scaled
    rates ``Fv`` (per second) over intervals ``dtau`` (normalised) of a phase lasting
    ``duration`` [s]."""
    import casadi as ca

    Xk, Xm, Xk1 = X[:, 0:-1:2], X[:, 1::2], X[:, 2::2]
    Fk, Fm, Fk1 = Fv[:, 0:-1:2], Fv[:, 1::2], Fv[:, 2::2]
    hk = ca.repmat(ca.DM(dtau).T, X.shape[0], 1) * duration
    d_mid = Xm - 0.5 * (Xk + Xk1) - hk / 8.0 * (Fk - Fk1)
    d_simp = Xk1 - Xk - hk / 6.0 * (Fk + 4.0 * Fm + Fk1)
    return ca.vec(ca.vertcat(d_mid, d_simp))


def _box(st: _Setup, P: int) -> tuple[np.ndarray, np.ndarray]:
    """Simple bounds (scaled) of the states and controls of a phase with P points."""
    nv = 5 + st.n_u
    lbw = np.zeros((nv, P))
    ubw = np.zeros((nv, P))
    lbw[:5, :] = (st.state_lb / st.x_scale)[:, None]
    ubw[:5, :] = (st.state_ub / st.x_scale)[:, None]
    lbw[5, :], ubw[5, :] = -st.cl_bound, st.cl_bound
    if st.throttle_free:
        lbw[6, :], ubw[6, :] = st.model.throttle_min, st.model.throttle_max
    return lbw, ubw


def _pack(st: _Setup, ph: _Phase) -> np.ndarray:
    nv = 5 + st.n_u
    w = np.zeros((nv, ph.states.shape[1]))
    w[:5, :] = ph.states / st.x_scale[:, None]
    w[5, :] = ph.cl
    if st.throttle_free:
        w[6, :] = ph.throttle
    return np.concatenate([w.ravel(order="F"), [ph.duration_s / TIME_SCALE_S]])


def _unpack(st: _Setup, zpart: np.ndarray, tau: np.ndarray) -> _Phase:
    nv = 5 + st.n_u
    P = tau.size
    W = zpart[:-1].reshape(P, nv).T
    thr = W[6, :].copy() if st.throttle_free else np.full(P, st.fixed_throttle)
    return _Phase(tau, W[:5, :] * st.x_scale[:, None], W[5, :].copy(), thr,
                  float(zpart[-1] * TIME_SCALE_S))


@contextlib.contextmanager
def _signals_surface():
    """Make Ctrl-C (SIGINT) and SIGTERM during IPOPT stop the run, not fail the solve.

    CasADi checks for signals during IPOPT, catches the exception the Python handler raises and
    reports a failed solve ("NonIpopt_Exception_Thrown"), which would read as a solver failure.
    Inside this block such a signal is recorded (and stops IPOPT); once IPOPT has returned it is
    delivered again through the previous handler (KeyboardInterrupt for SIGINT). Only the main
    thread can set handlers; elsewhere the block does nothing.
    """
    import signal
    import threading

    if threading.current_thread() is not threading.main_thread():
        yield
        return
    caught, previous = [], {}

    def recorder(signum, frame):
        caught.append(signum)
        raise KeyboardInterrupt

    for sig in (signal.SIGINT, signal.SIGTERM):
        old = signal.getsignal(sig)
        if callable(old):  # a Python handler (default SIGINT, or the command line's SIGTERM)
            previous[sig] = old
            signal.signal(sig, recorder)
    try:
        yield
    finally:
        for sig, old in previous.items():
            signal.signal(sig, old)
    if caught:
        previous[caught[0]](caught[0], None)
        raise KeyboardInterrupt


class _Transcription:
    """The NLP of one point function, climb mesh, dash layout and IPOPT option set, built once.

    Everything a solve changes enters as numbers: the start state, target and box bounds as
    simple bounds (lbx/ubx), the start mass, temperature offset and thrust scale through the
    point function's parameters, and the objective (c_t t_f / TIME_SCALE_S + c_m (1 - m_f / m0)
    + c_u sum(d throttle^2), which covers minimum time, its fuel tie-break, minimum fuel, the
    weighted cost and the throttle smoothing) through three more NLP parameters (``p`` of
    ``nlpsol``).
    """

    def __init__(self, F, mesh: np.ndarray, n_u: int, has_dash: bool, ipopt_opts: dict):
        import casadi as ca

        t0 = _time.perf_counter()
        self.mesh = mesh
        nv = 5 + n_u
        self.tau_c = _points(mesh)
        P = self.tau_c.size
        self.n_c = nv * P + 1
        self.tau_d = _points(np.linspace(0.0, 1.0, DASH_INTERVALS + 1)) if has_dash else None
        Pd = self.tau_d.size if has_dash else 0
        self.n_d = nv * Pd + 1 if has_dash else 0
        n_int = len(mesh) - 1

        z = ca.MX.sym("z", self.n_c + self.n_d)
        par = ca.MX.sym("p", len(POINT_PARAMETERS) + 3)
        pp, c_t, c_m, c_u = (par[: len(POINT_PARAMETERS)], par[-3], par[-2], par[-1])
        W = ca.reshape(z[: self.n_c - 1], nv, P)
        t_climb = z[self.n_c - 1] * TIME_SCALE_S
        Fv, Pv = F.map(P)(W[:5, :], W[5:, :], ca.repmat(pp, 1, P))
        g = [_hs_defects(W[:5, :], Fv, np.diff(mesh), t_climb), ca.vec(Pv)]
        self.n_path = Pv.shape[0]
        total_time, m_end = t_climb, W[3, -1]
        if has_dash:
            Wd = ca.reshape(z[self.n_c: self.n_c + self.n_d - 1], nv, Pd)
            t_dash = z[self.n_c + self.n_d - 1] * TIME_SCALE_S
            Fd, Pdv = F.map(Pd)(Wd[:5, :], Wd[5:, :], ca.repmat(pp, 1, Pd))
            # Mass and distance follow their dynamics; level, unaccelerated flight at every
            # point; the dash starts where the climb ends.
            g += [_hs_defects(Wd[3:5, :], Fd[3:5, :],
                              np.full(DASH_INTERVALS, 1.0 / DASH_INTERVALS), t_dash),
                  ca.vec(TIME_SCALE_S * Fd[1:3, :]), ca.vec(Pdv), Wd[3:5, 0] - W[3:5, -1]]
            total_time, m_end = total_time + t_dash, Wd[3, -1]
        J = c_t * (total_time / TIME_SCALE_S) + c_m * (1.0 - m_end)
        if n_u == 2:  # throttle smoothing over consecutive climb points (THROTTLE_SMOOTHING)
            J = J + c_u * ca.sumsqr(W[6, 1:] - W[6, :-1])
        g = ca.vertcat(*g)
        self.ng = g.shape[0]
        self.callback = _iteration_callback(self.n_c + self.n_d, self.ng)
        opts = {"ipopt." + k: v for k, v in ipopt_opts.items()}
        opts["print_time"] = False
        opts["iteration_callback"] = self.callback
        self.solver = ca.nlpsol("climb", "ipopt", {"x": z, "p": par, "f": J, "g": g}, opts)
        self.build_s = _time.perf_counter() - t0
        self.n_int, self.P, self.Pd = n_int, P, Pd

    def bounds(self, st: _Setup):
        """Numeric (lbz, ubz, lbg, ubg) of ``st``'s scenario."""
        P, Pd = self.P, self.Pd
        lbg = [np.zeros(10 * self.n_int), np.tile(st.path_lb, P)]
        ubg = [np.zeros(10 * self.n_int), np.tile(st.path_ub, P)]
        lbw, ubw = _box(st, P)
        lbw[:5, 0] = ubw[:5, 0] = st.x0 / st.x_scale
        fixed = ~np.isnan(st.xf)
        lbw[:5, -1][fixed] = ubw[:5, -1][fixed] = (st.xf / st.x_scale)[fixed]
        lbz = [lbw.ravel(order="F"), [1.0 / TIME_SCALE_S]]
        ubz = [ubw.ravel(order="F"), [MAX_TIME_S / TIME_SCALE_S]]
        if self.tau_d is not None:
            zeros = np.zeros(4 * DASH_INTERVALS + 2 * Pd)
            lbg += [zeros, np.tile(st.path_lb, Pd), np.zeros(2)]
            ubg += [zeros, np.tile(st.path_ub, Pd), np.zeros(2)]
            lbd, ubd = _box(st, Pd)
            lbd[:3, :] = ubd[:3, :] = (st.xf[:3] / st.x_scale[:3])[:, None]
            lbd[4, -1] = ubd[4, -1] = st.dash_m / st.x_scale[4]
            lbz += [lbd.ravel(order="F"), [0.0]]
            ubz += [ubd.ravel(order="F"), [MAX_TIME_S / TIME_SCALE_S]]
        return (np.concatenate(lbz), np.concatenate(ubz), np.concatenate(lbg),
                np.concatenate(ubg))


#: Built NLPs of this process, most recently used last (see :func:`_transcription`).
_TRANSCRIPTIONS: "dict[tuple, _Transcription]" = {}
#: How many built NLPs a process keeps (a sweep case needs its first mesh and a few refined
#: ones; the first mesh is shared by every case of the same aircraft and stays in).
TRANSCRIPTION_CACHE_SIZE = 8


def _transcription(F, key: str, mesh: np.ndarray, n_u: int, has_dash: bool,
                   ipopt_opts: dict) -> tuple[_Transcription, bool]:
    """The NLP for (point function ``key``, mesh, dash, options): from this process's cache or
    built now. Returns (transcription, reused). Each thread has its own (a solver object and
    its iteration callback serve one solve at a time; Dask workers may run several)."""
    import threading

    full = (threading.get_ident(), key, mesh.tobytes(), n_u, has_dash,
            repr(sorted(ipopt_opts.items())))
    tr = _TRANSCRIPTIONS.pop(full, None)
    reused = tr is not None
    if tr is None:
        tr = _Transcription(F, mesh, n_u, has_dash, ipopt_opts)
        while len(_TRANSCRIPTIONS) >= TRANSCRIPTION_CACHE_SIZE:
            _TRANSCRIPTIONS.pop(next(iter(_TRANSCRIPTIONS)))
    _TRANSCRIPTIONS[full] = tr
    return tr, reused


def _solve_mesh(st: _Setup, F, mesh: np.ndarray, init: tuple, ipopt_opts: dict,
                report=None, *, key: str | None = None, deadline: float | None = None
                ) -> _Solution:
    """Solve on ``mesh`` (climb-phase node taus from 0 to 1) with the NLP built for it (reused
    when this process built it before), return the solution.

    ``init`` = (climb _Phase on this mesh's points, dash _Phase or None[, (lam_x, lam_g)]):
    with multipliers IPOPT is warm-started from them (``warm_start_init_point``). ``key``
    identifies ``F`` (default: a hash of its serialised form); ``deadline``: a
    ``time.perf_counter`` value at which IPOPT is stopped (status Maximum_WallTime_Exceeded).
    """
    climb0, dash0 = init[:2]
    mult = init[2] if len(init) > 2 else None
    has_dash = st.dash_m is not None
    if key is None:
        key = _function_key(F)
    tr, reused = _transcription(F, key, mesh, st.n_u, has_dash, ipopt_opts)
    lbz, ubz, lbg, ubg = tr.bounds(st)
    z0 = [_pack(st, climb0)] + ([_pack(st, dash0)] if has_dash else [])
    z0 = np.clip(np.concatenate(z0), lbz, ubz)
    par = np.concatenate([st.point_params, st.objective_weights])
    cb = tr.callback
    cb.count, cb.report, cb.deadline, cb.stopped = 0, report, deadline, False
    args = dict(x0=z0, p=par, lbx=lbz, ubx=ubz, lbg=lbg, ubg=ubg)
    if mult is not None:
        args.update(lam_x0=mult[0], lam_g0=mult[1])
    t0 = _time.perf_counter()
    try:
        with _signals_surface():
            res = tr.solver(**args)
    finally:
        cb.report = cb.deadline = None
    t_solve = _time.perf_counter() - t0
    stats = tr.solver.stats()
    status = str(stats.get("return_status", "unknown"))
    if cb.stopped:
        status = "Maximum_WallTime_Exceeded"
    # IPOPT relaxes bounds by 1e-8 relative (bound_relax_factor); report values inside them.
    zs = np.clip(np.asarray(res["x"], float).ravel(), lbz, ubz)
    climb = _unpack(st, zs[:tr.n_c], tr.tau_c)
    dash = _unpack(st, zs[tr.n_c:], tr.tau_d) if has_dash else None
    total = climb.duration_s + (dash.duration_s if dash else 0.0)
    mf = float((dash or climb).states[3, -1])
    return _Solution(
        climb=climb, dash=dash, objective_value=_objective_value(st, total, mf),
        status=status, success=bool(stats.get("success", False)) and not cb.stopped,
        iterations=int(stats.get("iter_count", 0)),
        ipopt_s=t_solve, nlp_s=0.0 if reused else tr.build_s, intervals=tr.n_int,
        lam_x=np.asarray(res["lam_x"], float).ravel(),
        lam_g=np.asarray(res["lam_g"], float).ravel(), reused=reused,
    )


#: Last converged first mesh pass per (thread, point function, mesh, objective, dash), for
#: :func:`solve_collocation`'s ``from_neighbour``: (climb phase, dash phase, multipliers).
_NEIGHBOURS: dict = {}


def _neighbour_key(key: str, mesh: np.ndarray, st: _Setup) -> tuple:
    import threading

    return (threading.get_ident(), key, mesh.tobytes(), st.objective, st.dash_m is not None)


def _remember_neighbour(near: tuple, sol: _Solution) -> None:
    _NEIGHBOURS.pop(near, None)
    while len(_NEIGHBOURS) >= TRANSCRIPTION_CACHE_SIZE:
        _NEIGHBOURS.pop(next(iter(_NEIGHBOURS)))
    _NEIGHBOURS[near] = (sol.climb, sol.dash, (sol.lam_x, sol.lam_g))


def _neighbour_pass(st: _Setup, F, mesh: np.ndarray, opts: dict, report, key: str,
                    deadline, near: tuple):
    """(solution or None, iterations spent in vain): the first mesh pass warm-started from the
    last converged first pass under ``near`` (IPOPT's warm-start options, as on refinement
    passes, at most :data:`NEIGHBOUR_MAX_ITER` iterations); None when there is none or IPOPT
    did not converge from it."""
    start = _NEIGHBOURS.get(near)
    if start is None:
        return None, 0
    opts = {**opts, "max_iter": min(int(opts.get("max_iter", NEIGHBOUR_MAX_ITER)),
                                    NEIGHBOUR_MAX_ITER)}
    sol = _solve_mesh(st, F, mesh, start, opts, report, key=key, deadline=deadline)
    return (sol, 0) if sol.success else (None, sol.iterations)


def _function_key(F) -> str:
    """A hash of a CasADi Function's serialised form: equal keys, equal functions (the table
    data, the limits and the algebra are all in it)."""
    import hashlib

    return hashlib.sha256(F.serialize().encode()).hexdigest()


def _point_function_for(st: _Setup, compile: bool | None, notes: list):
    """(point function, key) for a solve: CasADi's own, or the compiled one (``compile`` True:
    compiled unless cached; None: the scenario's ``solver.compile``, else the cached one only;
    False: never); what was used is added to ``notes``."""
    if compile is None:
        compile = getattr(st.scenario.solver, "compile", None)
    F, key = _keyed_point_function(st)
    if compile is not False:
        compiled, note = _compiled(F, key, build=bool(compile))
        if compiled is not None:
            F, key = compiled, key + (":compiled" if compiled is not F else "")
            notes.append(note)
    return F, key


def _keyed_point_function(st: _Setup):
    """(point function, key): the key hashes the function's serialised form (table data, limits,
    algebra); the function returned is a private copy made from that form. (CasADi serialises
    the derivatives it has made of a function's inner functions too, so differentiating the
    shared table functions would change the key of the next case; the copy keeps them
    untouched.)"""
    import hashlib

    import casadi as ca

    text = _point_function(st).serialize()
    return ca.Function.deserialize(text), hashlib.sha256(text.encode()).hexdigest()


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


def _scaled(st: _Setup, ph: _Phase):
    X = ph.states / st.x_scale[:, None]
    U = np.vstack([ph.cl, ph.throttle]) if st.throttle_free else ph.cl[None, :]
    return X, U


def _rates(st: _Setup, F, X: np.ndarray, U: np.ndarray) -> np.ndarray:
    """Scaled state rates of the point function at the columns of X (scaled states), U."""
    n = X.shape[1]
    return np.asarray(F.map(n)(X, U, np.tile(st.point_params[:, None], (1, n)))[0])


def _interval_errors(st: _Setup, F, ph: _Phase) -> np.ndarray:
    """Local error estimate of each climb interval [scaled state units]: the collocation residual
    x_interp' - f(x_interp, u_interp) of the cubic Hermite interpolant through the interval's end
    states and rates, at its quarter points, times the interval length (largest state)."""
    X, U = _scaled(st, ph)
    Fv = _rates(st, F, X, U)
    h = np.diff(ph.tau[0::2]) * ph.duration_s
    x0, x1 = X[:, 0:-1:2], X[:, 2::2]
    f0, f1 = Fv[:, 0:-1:2], Fv[:, 2::2]
    u0, um, u1 = U[:, 0:-1:2], U[:, 1::2], U[:, 2::2]
    err = np.zeros(len(h))
    for s in (0.25, 0.75):
        xq, dxq = _hermite(x0, x1, f0, f1, h[None, :], s)
        fq = _rates(st, F, xq, _quadratic(u0, um, u1, s))
        err = np.maximum(err, np.max(np.abs(dxq - fq), axis=0) * h)
    return err


def _refine(mesh: np.ndarray, err: np.ndarray, max_intervals: int) -> np.ndarray:
    """New mesh: every interval whose error estimate exceeds ``ERROR_TOLERANCE`` is split into
    2 to ``MAX_PIECES`` equal pieces (ceil((err / tol)^REFINE_EXPONENT)); if none exceeds it,
    the 10% of intervals with the largest errors are bisected. Total capped at ``max_intervals``
    (largest errors first)."""
    n = len(err)
    pieces = np.ones(n, int)
    over = err > ERROR_TOLERANCE
    if over.any():
        pieces[over] = np.clip(np.ceil((err[over] / ERROR_TOLERANCE) ** REFINE_EXPONENT), 2,
                               MAX_PIECES)
    else:
        pieces[np.argsort(err)[::-1][: int(math.ceil(0.1 * n))]] = 2
    budget = max(max_intervals - n, 0)
    for i in np.argsort(err)[::-1]:  # keep the largest errors within the budget
        extra = min(pieces[i] - 1, budget)
        pieces[i] = 1 + extra
        budget -= extra
    new = [mesh[:1]]
    for i in range(n):
        new.append(np.linspace(mesh[i], mesh[i + 1], pieces[i] + 1)[1:])
    return np.concatenate(new)


def _interp_phase(st: _Setup, F, ph: _Phase, mesh_new: np.ndarray) -> _Phase:
    """A phase on a new mesh from a solution: states by the Hermite cubic of each old interval,
    controls by its quadratic."""
    X, U = _scaled(st, ph)
    Fv = _rates(st, F, X, U)
    tau_new = _points(mesh_new)
    mesh = ph.tau[0::2]
    idx = np.clip(np.searchsorted(mesh, tau_new, side="right") - 1, 0, len(mesh) - 2)
    h = np.diff(mesh)[idx]
    s = (tau_new - mesh[idx]) / h
    xq, _ = _hermite(X[:, 2 * idx], X[:, 2 * idx + 2], Fv[:, 2 * idx], Fv[:, 2 * idx + 2],
                     (h * ph.duration_s)[None, :], s[None, :])
    Uall = np.vstack([ph.cl, ph.throttle])
    uq = _quadratic(Uall[:, 2 * idx], Uall[:, 2 * idx + 1], Uall[:, 2 * idx + 2], s[None, :])
    return _Phase(tau_new, xq * st.x_scale[:, None], uq[0], uq[1], ph.duration_s)


def _weights(mesh: np.ndarray) -> np.ndarray:
    """Simpson quadrature weights of the nodes and midpoints of a mesh (normalised time)."""
    d = np.diff(mesh)
    w = np.zeros(2 * d.size + 1)
    w[0:-1:2] += d / 6.0
    w[2::2] += d / 6.0
    w[1::2] = 4.0 * d / 6.0
    return w


def _map_multipliers(st: _Setup, mesh_old: np.ndarray, mesh_new: np.ndarray,
                     lam_x: np.ndarray, lam_g: np.ndarray):
    """IPOPT multipliers of a solution carried to a refined climb mesh (warm start).

    Discrete multipliers of quantities imposed at every point (bounds, path constraints) are a
    density times the point's quadrature weight; the Simpson defects' multipliers approximate
    the costates (copied to each piece of a split interval); the midpoint defects' multipliers
    scale with the interval length. Boundary-point multipliers and the dash phase's (whose
    mesh does not change) are copied.
    """
    nv = 5 + st.n_u
    npth = len(st.path_names)
    n_old = mesh_old.size - 1
    p_old = 2 * n_old + 1
    tau_old, tau_new = _points(mesh_old), _points(mesh_new)
    w_old, w_new = _weights(mesh_old), _weights(mesh_new)

    def by_density(values):  # (rows, p_old) -> (rows, p_new)
        dens = values / w_old
        out = np.vstack([np.interp(tau_new, tau_old, r) for r in dens]) * w_new
        out[:, 0], out[:, -1] = values[:, 0], values[:, -1]
        return out

    lx = lam_x[: nv * p_old].reshape(p_old, nv).T
    lam_x_new = np.concatenate([by_density(lx).ravel(order="F"), lam_x[nv * p_old:]])
    nd = 10 * n_old
    defects = lam_g[:nd].reshape(n_old, 10).T
    path = lam_g[nd: nd + npth * p_old].reshape(p_old, npth).T
    k_old = np.clip(np.searchsorted(mesh_old, 0.5 * (mesh_new[:-1] + mesh_new[1:]),
                                    side="right") - 1, 0, n_old - 1)
    d_new = defects[:, k_old]
    d_new[:5] *= np.diff(mesh_new) / np.diff(mesh_old)[k_old]
    lam_g_new = np.concatenate([d_new.ravel(order="F"), by_density(path).ravel(order="F"),
                                lam_g[nd + npth * p_old:]])
    return lam_x_new, lam_g_new


# --------------------------------------------------------------------------------------------
# Result
# --------------------------------------------------------------------------------------------


def _trajectory(st: _Setup, sol: _Solution, *, converged: bool, status: str, iterations: int,
                wall_s: float, notes: list) -> Trajectory:
    """Per-point table at all nodes and midpoints of both phases (numpy model evaluation).

    With a dash the junction appears twice (end of climb, start of dash) at the same time."""
    model = st.model
    phases = [sol.climb] + ([sol.dash] if sol.dash is not None else [])
    t = np.concatenate([sol.climb.tau * sol.climb.duration_s]
                       + ([sol.climb.duration_s + sol.dash.tau * sol.dash.duration_s]
                          if sol.dash is not None else []))
    states = np.hstack([p.states for p in phases])
    cl = np.concatenate([p.cl for p in phases])
    thr = np.concatenate([p.throttle for p in phases])
    h, v, gam, m, x = states
    fd = model.fit_domain
    hc = np.clip(h, fd.altitude_min_m, fd.altitude_max_m)
    atm = model.atmosphere(hc)
    a = np.asarray(atm.speed_of_sound_m_s, float)
    p = np.asarray(atm.pressure_pa, float)
    mach = v / a
    mach_c = np.clip(mach, fd.mach_min, fd.mach_max)
    q = 0.5 * np.asarray(atm.density_kg_m3, float) * v * v
    S = model.reference_area_m2
    drag = q * S * np.asarray(model.drag_coefficient(cl, mach_c, check=False), float)
    thrust = np.asarray(model.thrust_n(hc, mach_c, thr, check=False), float)
    lift_over_weight = q * S * cl / (m * G0)
    t_par = thrust
    alpha = None
    if st.body_thrust:
        alpha = cl / np.asarray(model.lift_slope_per_rad(mach_c, check=False), float)
        t_par = thrust * np.cos(alpha)
    table = {
        "time_s": t,
        "altitude_m": h,
        "tas_m_s": v,
        "mach": mach,
        "cas_m_s": np.asarray(cas_from_mach(np.maximum(mach, 0.0), p), float),
        "energy_height_m": energy_height_m(h, v),
        "ps_m_s": v * (t_par - drag) / (m * G0),
        "flight_path_angle_rad": gam,
        "mass_kg": m,
        "fuel_used_kg": st.m0 - m,
        "distance_m": x,
        "throttle": thr,
        "lift_coefficient": cl,
        "load_factor": lift_over_weight,
        "dynamic_pressure_pa": q,
        "thrust_n": thrust,
    }
    return Trajectory(method=Method.COLLOCATION, objective=st.objective, table=table,
                      converged=converged, status=status, iterations=iterations, wall_s=wall_s,
                      notes=tuple(notes), controls=Controls(cl, thr, alpha),
                      segments=derive_segments(table), profile=st.envelope.profile)


def _active_bound_notes(st: _Setup, ph: _Phase) -> list:
    """Notes on the climb's box bounds that ended up active (the answer depends on them)."""
    notes = []
    names = ["altitude", "speed", "flight-path angle", "mass"]
    units = ["m", "m/s", "rad", "kg"]
    for i in range(4):
        inner = ph.states[i, 1:-1]
        for bound, word in ((st.state_lb[i], "lower"), (st.state_ub[i], "upper")):
            if i == 3 and word == "upper":
                continue  # the start mass
            hit = np.abs(inner - bound) <= 1e-5 * st.x_scale[i]
            if np.count_nonzero(hit) >= 3:
                t_hit = ph.tau[1:-1][hit] * ph.duration_s
                notes.append(f"{names[i]} rides its {word} bound {bound:.6g} {units[i]} "
                             f"between {t_hit.min():.0f} s and {t_hit.max():.0f} s")
    return notes


# --------------------------------------------------------------------------------------------
# The mesh passes of one solve
# --------------------------------------------------------------------------------------------


def _ipopt_option_sets(solver_opts, ipopt_options: dict | None) -> tuple[dict, dict]:
    """(options of the first mesh pass, options of the refinement passes): the user's options
    (``ipopt_options`` over the scenario's ``solver.ipopt``) over :data:`DEFAULT_IPOPT_OPTIONS`,
    and on refinement passes also over :data:`REFINE_IPOPT_OPTIONS`."""
    user = dict(solver_opts.ipopt or {})
    user.update(ipopt_options or {})
    return ({**DEFAULT_IPOPT_OPTIONS, **user},
            {**DEFAULT_IPOPT_OPTIONS, **REFINE_IPOPT_OPTIONS, **user})


def _initial_guess(st: _Setup, guess, notes: list) -> _Guess:
    """The initial guess from ``guess`` (a Trajectory, "straight" or None), said in ``notes``."""
    if isinstance(guess, Trajectory):
        g = _from_trajectory(st, guess)
        notes.append(f"initial guess: the {guess.method} trajectory"
                     + (", zooms given time and smoothed" if guess.zooms else ""))
    elif guess in (None, "straight"):
        g = _straight_line(st)
        notes.append("initial guess: straight line from start to target (cold start)")
    else:
        raise ValueError("guess must be a Trajectory, 'straight' or None")
    return g


def _first_init(st: _Setup, g: _Guess, mesh: np.ndarray) -> tuple:
    """Start of the first mesh pass, (climb phase, dash phase or None), from the guess."""
    climb0 = _phase_from_guess(g, mesh)
    dash0 = None
    if st.dash_m is not None:
        dash0 = _dash_init(st, float(climb0.states[3, -1]), float(climb0.states[4, -1]),
                           g.dash_s, 2 * DASH_INTERVALS + 1)
    return (climb0, dash0)


@dataclass
class _Run:
    """One :func:`solve_collocation` call: what each mesh pass needs (set-up, point function and
    its key, deadline [``time.perf_counter`` value], progress callback) and what the passes add
    up (notes, IPOPT iterations and time [s], one (intervals, iterations, objective, IPOPT
    time) entry per pass, passes on a reused NLP)."""

    st: _Setup
    F: object
    key: str
    wall0: float  # time.perf_counter() at the start of the solve
    notes: list
    progress: object = None
    deadline: float | None = None
    time_limit_s: float | None = None
    total_iter: int = 0
    ipopt_s: float = 0.0
    history: list = field(default_factory=list)
    n_reused: int = 0

    def say(self, msg, frac=None):
        if self.progress is not None:
            self.progress(msg, frac)

    def add(self, sol: _Solution) -> None:
        """Count a finished mesh pass."""
        self.total_iter += sol.iterations
        self.ipopt_s += sol.ipopt_s
        self.history.append((sol.intervals, sol.iterations, sol.objective_value, sol.ipopt_s))
        self.n_reused += sol.reused

    def trajectory(self, sol: _Solution, *, converged: bool, status: str, notes: list):
        """``sol`` as a Trajectory with the solve's iterations and wall time so far."""
        return _trajectory(self.st, sol, converged=converged, status=status,
                           iterations=self.total_iter,
                           wall_s=_time.perf_counter() - self.wall0, notes=notes)

    def fail(self, sol: _Solution, message: str, status: str):
        """Raise SolverFailure with ``sol`` as the last iterate, labelled not converged."""
        tr = self.trajectory(sol, converged=False, status=status,
                             notes=self.notes + [f"NOT CONVERGED: {message}"])
        raise SolverFailure(f"{message}; no optimal trajectory", status=status,
                            iterations=self.total_iter, trajectory=tr)


def _mesh_pass(run: _Run, npass: int, mesh: np.ndarray, init: tuple, opts: dict,
               refine_opts: dict, near) -> _Solution:
    """Mesh pass ``npass`` (0: the first) on ``mesh``: IPOPT from ``init`` or, on the first pass
    with ``near`` (see :func:`_neighbour_key`), from the previous case's solution first. The
    pass is counted in ``run``; IPOPT not converging raises SolverFailure (``run.fail``)."""
    st = run.st

    def report(k, f):
        run.say(f"mesh pass {npass + 1}: IPOPT iteration {k}, scaled objective {f:.6g}", None)

    sol = None
    if npass == 0 and near is not None:
        sol, spent = _neighbour_pass(st, run.F, mesh, refine_opts,
                                     report if run.progress else None, run.key, run.deadline,
                                     near)
        run.total_iter += spent
        if sol is not None:
            run.notes.append("first mesh pass started from the previous case's solution and "
                             "multipliers (same aircraft, mesh and objective, this process)")
    if sol is None:
        sol = _solve_mesh(st, run.F, mesh, init, opts,
                          report if run.progress is not None else None,
                          key=run.key, deadline=run.deadline)
    if npass == 0 and near is not None and sol.success:
        _remember_neighbour(near, sol)
    run.add(sol)
    if not sol.success:
        hint = ""
        if st.dash_m is not None and not st.throttle_free:
            hint = " (a dash needs a throttle range to hold level flight)"
        if sol.status == "Maximum_WallTime_Exceeded":
            hint = f" (the time limit of {run.time_limit_s:g} s was reached)"
        run.fail(sol, f"IPOPT did not converge ({sol.status}) after {sol.iterations} iterations "
                      f"on {sol.intervals} intervals (mesh pass {npass + 1}){hint}", sol.status)
    return sol


def _mesh_passes(run: _Run, mesh: np.ndarray, init: tuple, near, first_opts: dict,
                 refine_opts: dict):
    """Solve on the first ``mesh``, then refine and solve again (from the solution and its
    multipliers) until the objective settles (see the module docstring).

    Returns (last solution, its local error estimate per climb interval, whether the mesh
    converged)."""
    st, solver_opts = run.st, run.st.scenario.solver
    max_ref = int(solver_opts.max_mesh_refinements)
    max_intervals = MAX_INTERVALS_FACTOR * (len(mesh) - 1)
    prev = None
    mesh_converged = False
    for npass in range(max_ref + 1):
        sol = _mesh_pass(run, npass, mesh, init, first_opts if npass == 0 else refine_opts,
                         refine_opts, near)
        run.say(f"mesh pass {npass + 1}: {sol.intervals} intervals, {sol.iterations} iterations, "
                f"objective {sol.objective_value:.7g}", (npass + 1) / (max_ref + 2))
        err = _interval_errors(st, run.F, sol.climb)
        if max_ref == 0:
            mesh_converged = bool(err.max() <= ERROR_TOLERANCE)
            break
        if prev is not None:
            change = abs(sol.objective_value - prev) / max(abs(sol.objective_value), 1e-12)
            mesh_converged = change < solver_opts.mesh_tolerance
            if mesh_converged and err.max() <= ERROR_TOLERANCE:
                break
        prev = sol.objective_value
        if npass == max_ref:
            break
        new_mesh = _refine(mesh, err, max_intervals)
        if len(new_mesh) == len(mesh):
            break
        init = (_interp_phase(st, run.F, sol.climb, new_mesh), sol.dash,
                _map_multipliers(st, mesh, new_mesh, sol.lam_x, sol.lam_g))
        mesh = new_mesh
    return sol, err, mesh_converged


def _check_mesh(run: _Run, sol: _Solution, err: np.ndarray, mesh_converged: bool) -> None:
    """Note the mesh passes and the final local error; raise SolverFailure (``run.fail``) when
    the mesh did not converge."""
    solver_opts = run.st.scenario.solver
    max_ref = int(solver_opts.max_mesh_refinements)
    run.notes.append("mesh passes: " + "; ".join(
        f"{n} intervals, {it} iterations, objective {obj:.7g}" for n, it, obj, _ in run.history))
    run.notes.append(f"NLP reused from an earlier solve in this process on {run.n_reused} of "
                     f"{len(run.history)} mesh passes")
    run.notes.append(f"largest local error estimate on the final mesh {err.max():.1e} "
                     f"(scaled states; refinement target {ERROR_TOLERANCE:.0e})")
    if not mesh_converged:
        what = (f"the local error estimate {err.max():.1e} exceeds {ERROR_TOLERANCE:.0e} on the "
                "single mesh (max_mesh_refinements = 0)" if max_ref == 0 else
                f"mesh refinement stopped after {len(run.history)} passes without the objective "
                f"settling to {solver_opts.mesh_tolerance:g} relative")
        run.fail(sol, what, sol.status + "; mesh not converged")


def _optimum_notes(st: _Setup, sol: _Solution) -> list:
    """Notes on a converged optimum: active bounds, the dash phase, a looser IPOPT tolerance."""
    notes = _active_bound_notes(st, sol.climb)
    if sol.dash is not None:
        full = st.dash_m / st.xf[1]
        notes.append(f"dash phase: {sol.dash.duration_s:.1f} s at the target state, from "
                     f"{sol.climb.states[4, -1] / 1000:.1f} km")
        if sol.dash.duration_s < 0.1 * full:
            notes.append(
                "the optimum covers most of the dash distance before reaching the target state: "
                "flying it at another altitude and speed is better for this objective than the "
                "dash at the target state (the energy-state solver, which always dashes at the "
                "target state, answers that different question)")
    if sol.status != "Solve_Succeeded":
        notes.append(f"IPOPT status {sol.status}: converged to its acceptable (looser) tolerance")
    return notes


# --------------------------------------------------------------------------------------------
# Public entry point
# --------------------------------------------------------------------------------------------


def solve_collocation(scenario, objective: str = "time", *, model=None, guess=None,
                      progress=None, intervals: int | None = None,
                      ipopt_options: dict | None = None,
                      time_limit_s: float | None = None,
                      compile: bool | None = None,
                      from_neighbour: bool = False) -> Trajectory:
    """Optimal climb by Hermite-Simpson collocation and IPOPT (see the module docstring).

    (Over 60 lines only for this documentation of its options: the body is a short sequence of
    calls to the helpers above, :func:`_mesh_passes` doing the solving.)

    Parameters
    ----------
    scenario : Scenario
    objective : {"time", "fuel", "weighted"}
    model : AircraftModel, optional
        Built from the scenario when omitted.
    guess : Trajectory or "straight"
        Initial guess: a trajectory (e.g. the energy-state solution for the same objective, as
        :mod:`climbopt.pipeline` passes it) or a straight line from start to target
        (``"straight"`` or None: a cold start).
    progress : callable(message: str, fraction: float | None), optional
        Receives one message per IPOPT iteration and one per mesh pass.
    intervals : int, optional
        Intervals of the first climb mesh (default ``scenario.solver.intervals``).
    ipopt_options : dict, optional
        IPOPT options; they override ``scenario.solver.ipopt``, which overrides
        :data:`DEFAULT_IPOPT_OPTIONS` (and :data:`REFINE_IPOPT_OPTIONS` on refinement passes).
    time_limit_s : float, optional
        Wall-clock budget of the whole solve [s] (IPOPT is stopped when it is spent).
    compile : bool, optional
        True: evaluate the point function from C code compiled with the system C compiler and
        kept in the on-disk cache (:func:`compiled_point_function`): a few seconds the first
        time for an aircraft, nothing afterwards, and faster IPOPT iterations (it pays in sweeps
        and repeated runs). None (default): the scenario's ``solver.compile`` when given, else
        the compiled function only when it is already in the cache (it costs nothing then).
        False: never.
    from_neighbour : bool
        Start the first mesh pass from the solution and multipliers of the last solve with
        ``from_neighbour`` of the same aircraft, first mesh and objective in this thread (in a
        sweep: the neighbouring case), which takes about half the IPOPT iterations of a start
        from ``guess``; ``guess`` is used when there is none or that start fails. The optimum
        is the same to IPOPT's tolerance (the first mesh, and so the refinement, are the same).

    Returns
    -------
    Trajectory
        ``method="collocation"``, converged: IPOPT converged on every mesh pass and the
        objective changed by less than ``solver.mesh_tolerance`` (relative) on the last
        refinement (with ``max_mesh_refinements = 0``: the single mesh's local error estimate is
        within :data:`ERROR_TOLERANCE`). Per-point table at the mesh nodes and interval
        midpoints (with a dash, the junction point appears twice, at the same time);
        ``controls``; no ``verification`` (:func:`climbopt.verify.resimulate` does that).
        ``iterations`` sums IPOPT iterations over the mesh passes; the notes list each pass.

    Raises
    ------
    SolverFailure
        Anything short of an optimum: IPOPT did not converge on some mesh pass (or ran out of
        time), or the mesh refinement did not settle. Carries ``status``, ``iterations`` and
        the last iterate as a trajectory with ``converged=False``.
    ValueError
        Unknown objective or guess, or body-axis thrust without a lift-slope table.
    """
    if objective not in OBJECTIVES:
        raise ValueError(f"objective must be one of {', '.join(OBJECTIVES)}; got {objective!r}")
    wall0 = _time.perf_counter()
    if model is None:
        from climbopt.aircraft import build_model

        model = build_model(scenario)
    st = _setup(scenario, model, objective)
    first_opts, refine_opts = _ipopt_option_sets(scenario.solver, ipopt_options)
    notes = list(st.notes)
    g = _initial_guess(st, guess, notes)
    F, key = _point_function_for(st, compile, notes)
    deadline = None if time_limit_s is None else wall0 + time_limit_s
    run = _Run(st, F, key, wall0, notes, progress=progress, deadline=deadline,
               time_limit_s=time_limit_s)
    mesh = np.linspace(0.0, 1.0, int(intervals or scenario.solver.intervals) + 1)
    near = _neighbour_key(key, mesh, st) if from_neighbour else None
    sol, err, mesh_converged = _mesh_passes(run, mesh, _first_init(st, g, mesh), near,
                                            first_opts, refine_opts)
    _check_mesh(run, sol, err, mesh_converged)
    run.notes += _optimum_notes(st, sol)
    run.notes.append(f"IPOPT time {run.ipopt_s:.2f} s over {len(run.history)} mesh passes")
    return run.trajectory(sol, converged=True, status=sol.status, notes=run.notes)
