"""Re-simulation check of an optimised trajectory: fly its controls, see where the aircraft ends up.

The control histories stored on a trajectory (``trajectory.controls``: lift coefficient and
throttle) are interpolated in time and the point-mass equations of motion (flat Earth; Bryson,
Desai & Hoffman, J. Aircraft 6(6), 1969; see :mod:`climbopt.collocation`) are integrated from
the trajectory's first point with scipy's ``solve_ivp`` (DOP853, rtol 1e-10, absolute tolerances
scaled per state). The equations are written here a second time, in numpy, on the aircraft
model's numpy path, independently of the CasADi transcription, so the check also catches
transcription errors.

Controls are interpolated the way the collocation solver represents them: for a collocation
trajectory (points = mesh nodes and interval midpoints) a quadratic through node, midpoint and
node on each interval (Hermite-Simpson; Betts, *Practical Methods for Optimal Control*, 2nd ed.,
SIAM 2010, sec. 4.5), limited to the range of those three values (so that a control switching
inside an interval, e.g. a bang-bang pull-up, is not given values the optimiser never chose;
for smooth controls the limit changes nothing measurable), otherwise linearly. Each interval is
integrated separately (the controls have kinks at the nodes). A repeated time separates phases
(climb and dash): the controls may jump there, and the simulation carries its own state across.

Reported:

* ``final_state_miss``: simulated minus trajectory final state, per state (m, m/s, rad, kg, m);
* ``final_miss_energy_m``: sqrt(dh^2 + (V dV / g0)^2), the miss in altitude and speed expressed
  as energy height [m], and ``final_miss_relative`` = that / final energy height;
* ``largest_departure_relative``: the largest distance, as energy height relative to the final
  energy height, between the simulated and the trajectory's state at the end of any interval,
  and ``departure_time_s``: where it first exceeded ``FINAL_MISS_TOLERANCE`` (None if never),
  so that a failed check says where the controls stop reproducing the path;
* ``limit_excess``: the largest margin of each row of the flight envelope
  (:mod:`climbopt.envelope`, the same rows and boundary rule the solvers use, including the
  procedure profile's altitude window and no-descent row) along the simulated path (all
  integrator steps), clipped at 0; ``worst_limit`` the row that exceeds its tolerance most;
* ``ok``: ``final_miss_relative <= FINAL_MISS_TOLERANCE``, every row's excess within that row's
  tolerance (1 % of the limit for ratio rows, :data:`PATH_VIOLATION_TOLERANCE`; 20 m for
  altitude; 0.01 rad for no-descent) and the integration stayed inside the model's tables.

The result is a :class:`climbopt.results.Verification`.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy.integrate import solve_ivp

from climbopt.aircraft import fast_scalar_function, wind_at
from climbopt.atmosphere import G0, energy_height_m
from climbopt.envelope import RATIO_TOLERANCE, envelope_for, flight_quantities
from climbopt.results import StateValues, Verification

__all__ = ["resimulate", "FINAL_MISS_TOLERANCE", "PATH_VIOLATION_TOLERANCE", "RTOL"]

#: Largest accepted final miss, as a fraction of the final energy height (0.1%).
FINAL_MISS_TOLERANCE = 1.0e-3
#: Largest accepted path-constraint excess along the re-simulated path, as a fraction of the
#: limit (1%; for the dynamic- and impact-pressure limits that is about 0.5% of the speed):
#: between collocation points an open-loop re-simulation may drift slightly over a limit the
#: optimum rides, and where the optimum leaves a limit inside an interval the interpolated
#: controls may cross it a little before the next point.
PATH_VIOLATION_TOLERANCE = RATIO_TOLERANCE
#: Relative tolerance of the integration.
RTOL = 1.0e-10
#: State scales for the absolute tolerances (h, V, gamma, m as fraction of start mass, x).
_SCALES = np.array([1.0e4, 300.0, 1.0, 1.0, 1.0e5])


def _pieces(t: np.ndarray, cl: np.ndarray, thr: np.ndarray, quadratic: bool):
    """Control polynomials per interval: (t0, t1, (c0, c1, c2, lo, hi) of CL, same of throttle,
    index of the interval's last point) with u = min(max(c0 + s (c1 + s c2), lo), hi),
    s = (t - t0) / (t1 - t0). Quadratic through node, midpoint, node (Hermite-Simpson) limited
    to the range of those three values, or linear between points."""
    out = []
    if quadratic:
        for k in range(0, t.size - 2, 2):
            coeffs = []
            for u in (cl, thr):
                u0, um, u1 = u[k], u[k + 1], u[k + 2]
                coeffs.append((u0, -3 * u0 + 4 * um - u1, 2 * u0 - 4 * um + 2 * u1,
                               min(u0, um, u1), max(u0, um, u1)))
            if t[k + 2] > t[k]:
                out.append((t[k], t[k + 2], coeffs[0], coeffs[1], k + 2))
    else:
        for k in range(t.size - 1):
            if t[k + 1] > t[k]:
                out.append((t[k], t[k + 1],
                            (cl[k], cl[k + 1] - cl[k], 0.0, -np.inf, np.inf),
                            (thr[k], thr[k + 1] - thr[k], 0.0, -np.inf, np.inf), k + 1))
    return out


def resimulate(trajectory, scenario, model=None) -> Verification:
    """Integrate the trajectory's controls and compare (see the module docstring).

    Parameters
    ----------
    trajectory : Trajectory
        Must carry ``controls`` (lift coefficient and throttle at its points).
    scenario : Scenario
        Supplies the envelope (:func:`climbopt.envelope.envelope_for`) and mission (rating).
    model : AircraftModel, optional
        Built from the scenario when omitted.

    Returns
    -------
    Verification

    Raises
    ------
    ValueError
        The trajectory has no stored controls (e.g. an energy-state path, whose zooms take no
        time and cannot be flown as such).
    """
    if getattr(trajectory, "controls", None) is None:
        raise ValueError(f"the {trajectory.method} trajectory has no control histories to "
                         "re-simulate (only collocation results carry them)")
    if model is None:
        from climbopt.aircraft import build_model

        model = build_model(scenario)
    tb = trajectory.table
    t = np.asarray(tb["time_s"], float)
    planned = np.vstack([np.asarray(tb[k], float) for k in _STATE_KEYS])
    he_f = float(energy_height_m(planned[0, -1], planned[1, -1]))
    sim = _simulate(trajectory, scenario, model, t, planned, he_f)
    final = planned[:, -1]
    if sim.failure:
        miss = StateValues(*([math.nan] * 5))
        miss_e = math.inf
    else:
        d = sim.ys[-1] - final
        miss = StateValues(*(float(x) for x in d))
        miss_e = float(math.hypot(d[0], final[1] * d[1] / G0))
    miss_rel = miss_e / abs(he_f) if he_f else math.inf
    env = envelope_for(scenario, model)
    excess = _limit_excess(env, model, sim.ys, sim.cls)
    ratio = {k: v / env.row(k).tolerance for k, v in excess.items()}
    worst = max(ratio, key=ratio.get) if ratio else ""
    limits_ok = all(v <= 1.0 for v in ratio.values())
    ok = not sim.failure and miss_rel <= FINAL_MISS_TOLERANCE and limits_ok
    message = sim.failure or _verification_message(sim, env, excess, worst, miss_e, miss_rel,
                                                   he_f)
    return Verification(
        ok=bool(ok), message=message, final_state_miss=miss,
        simulated_final_state=StateValues(*(float(x) for x in sim.ys[-1])),
        final_miss_energy_m=miss_e, final_miss_relative=miss_rel, final_energy_height_m=he_f,
        largest_departure_relative=math.inf if sim.failure else float(sim.departure),
        departure_time_s=sim.departure_t, limit_excess=excess,
        worst_limit=worst if worst and excess[worst] > 0 else "",
        final_miss_tolerance=FINAL_MISS_TOLERANCE, limit_tolerance=PATH_VIOLATION_TOLERANCE,
        steps=sim.steps)


def _verification_message(sim, env, excess: dict, worst: str, miss_e: float, miss_rel: float,
                          he_f: float) -> str:
    """The verdict of a finished re-simulation in words: the final miss [m of energy height]
    against its tolerance, the largest limit excess, and where the simulated path first left
    the trajectory."""
    worst_words = (f"{env.row(worst).words} {excess[worst]:.2e}, tolerance "
                   f"{env.row(worst).tolerance:.0e}" if worst and excess[worst] > 0
                   else "none")
    message = (f"final miss {miss_e:.3g} m of energy height ({miss_rel:.2e} of "
               f"{he_f:.0f} m; tolerance {FINAL_MISS_TOLERANCE:.0e}); largest limit "
               f"excess: {worst_words}")
    if sim.departure_t is not None:
        message += (f"; the simulated path first leaves the trajectory by more than "
                    f"{FINAL_MISS_TOLERANCE:.0e} of the final energy height near "
                    f"t = {sim.departure_t:.1f} s")
    return message


_STATE_KEYS = ("altitude_m", "tas_m_s", "flight_path_angle_rad", "mass_kg", "distance_m")


@dataclass
class _Simulation:
    """Simulated states at every integrator step, their lift coefficients, and how it went."""

    ys: np.ndarray
    cls: np.ndarray
    steps: int
    departure: float
    departure_t: float | None
    failure: str


def _simulate(trajectory, scenario, model, t, planned, he_f) -> _Simulation:
    """Fly the controls interval by interval (the controls have kinks at the nodes); phases
    (e.g. climb and dash) are separated by a repeated time, where the controls may jump."""
    from climbopt.fits import ModelDomainError

    cl_all = np.asarray(trajectory.controls.lift_coefficient, float)
    th_all = np.asarray(trajectory.controls.throttle, float)
    m0 = float(planned[3, 0])
    scales = _SCALES * np.array([1, 1, 1, m0, 1])
    rhs_for = _rhs_factory(model, model.thrust_alignment == "body")
    segments = np.split(np.arange(t.size), np.flatnonzero(np.diff(t) <= 0.0) + 1)
    y = planned[:, 0].copy()
    ys, cls = [y.copy()], [cl_all[0]]
    steps, departure, departure_t, failure = 0, 0.0, None, ""
    for seg in segments:
        if seg.size < 2:
            continue
        quadratic = trajectory.method == "collocation" and seg.size % 2 == 1
        for t0, t1, cl_c, th_c, k_end in _pieces(t[seg], cl_all[seg], th_all[seg], quadratic):
            try:
                sol = solve_ivp(rhs_for(t0, t1, cl_c, th_c), (t0, t1), y, method="DOP853",
                                rtol=RTOL, atol=RTOL * scales)
            except (ModelDomainError, ValueError) as exc:
                failure = f"the simulated path left the model's tables near t = {t0:.1f} s: {exc}"
                break
            if not sol.success:
                failure = f"integration failed near t = {t0:.1f} s: {sol.message}"
                break
            steps += sol.t.size - 1
            ys.extend(sol.y[:, 1:].T)
            s_ = (sol.t[1:] - t0) / (t1 - t0)
            cls.extend(np.clip(cl_c[0] + s_ * (cl_c[1] + s_ * cl_c[2]), cl_c[3], cl_c[4]))
            y = sol.y[:, -1].copy()
            d = y - planned[:, seg[k_end]]
            dep = math.hypot(d[0], planned[1, seg[k_end]] * d[1] / G0) / max(abs(he_f), 1e-9)
            departure = max(departure, dep)
            if departure_t is None and dep > FINAL_MISS_TOLERANCE:
                departure_t = float(t1)
        if failure:
            break
    return _Simulation(np.asarray(ys), np.asarray(cls), steps, departure, departure_t, failure)


def _rhs_factory(model, body):
    """``rhs_for(t0, t1, cl_c, th_c)``: the right-hand side on one interval [t0, t1] with
    polynomial controls c0 + s (c1 + s c2), s = (t - t0) / (t1 - t0), limited to [lo, hi]."""
    from climbopt.fits import ModelDomainError

    forces = fast_scalar_function(model.force_function(body=body))
    dom = model.fit_domain

    def rhs_for(t0, t1, cl_c, th_c):
        inv = 1.0 / (t1 - t0)

        def rhs(tt, y):
            h, v, gam, m, _x = y
            if not (dom.altitude_min_m <= h <= dom.altitude_max_m) or v <= 0.0:
                raise ModelDomainError(f"altitude {h:.6g} m, speed {v:.6g} m/s outside the tables")
            s_ = (tt - t0) * inv
            cl = min(max(cl_c[0] + s_ * (cl_c[1] + s_ * cl_c[2]), cl_c[3]), cl_c[4])
            thr = min(max(th_c[0] + s_ * (th_c[1] + s_ * th_c[2]), th_c[3]), th_c[4])
            mach, _, _, lift, drag, thrust, ff, alpha = forces(h, v, cl, thr)
            if not (dom.mach_min <= mach <= dom.mach_max):
                raise ModelDomainError(f"Mach {mach:.6g} outside the tables")
            return [
                v * math.sin(gam),
                (thrust * math.cos(alpha) - drag) / m - G0 * math.sin(gam),
                (thrust * math.sin(alpha) + lift) / (m * v) - G0 * math.cos(gam) / v,
                -ff,
                v * math.cos(gam) + float(wind_at(model, h)),
            ]
        return rhs
    return rhs_for


def _limit_excess(env, model, ys, cl) -> dict:
    """Largest margin of each envelope row along the simulated points, clipped at 0 (one
    boundary rule: :mod:`climbopt.envelope`)."""
    h, v, gam, m = ys[:, 0], ys[:, 1], ys[:, 2], ys[:, 3]
    fq = flight_quantities(model, h, v, m, lift_coefficient=cl, flight_path_angle_rad=gam)
    return {k: float(max(0.0, np.max(mg))) for k, mg in env.margins(fq).items()}
