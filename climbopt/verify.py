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
* ``path_violations``: the largest excess over each limit along the simulated path (all
  integrator steps), relative to the limit (altitude: metres over the final energy height);
  ``max_path_violation`` the largest of them;
* ``ok``: ``final_miss_relative <= FINAL_MISS_TOLERANCE`` and ``max_path_violation <=
  PATH_VIOLATION_TOLERANCE`` and the integration stayed inside the model's tables.
"""

from __future__ import annotations

import math

import numpy as np
from scipy.integrate import solve_ivp

from climbopt.airspeed import impact_pressure_from_cas, impact_pressure_pa
from climbopt.atmosphere import G0, energy_height_m

__all__ = ["resimulate", "FINAL_MISS_TOLERANCE", "PATH_VIOLATION_TOLERANCE", "RTOL"]

#: Largest accepted final miss, as a fraction of the final energy height (0.1%).
FINAL_MISS_TOLERANCE = 1.0e-3
#: Largest accepted path-constraint excess along the re-simulated path, as a fraction of the
#: limit (1%; for the dynamic- and impact-pressure limits that is about 0.5% of the speed):
#: between collocation points an open-loop re-simulation may drift slightly over a limit the
#: optimum rides, and where the optimum leaves a limit inside an interval the interpolated
#: controls may cross it a little before the next point.
PATH_VIOLATION_TOLERANCE = 1.0e-2
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


def _fast(function):
    """Fast scalar evaluation of a CasADi Function of 4 scalars with one vector output, through
    its preallocated buffers (Function.buffer; about 10x less call overhead), or plain calls
    where that interface is missing."""
    import casadi as ca

    x = ca.MX.sym("x", 4)
    packed = ca.Function("packed", [x], [function(x[0], x[1], x[2], x[3])])
    try:
        buf, evaluate = packed.buffer()
    except (AttributeError, RuntimeError, NotImplementedError):  # pragma: no cover
        return lambda *a: np.asarray(packed(np.array(a))).ravel()
    arg = np.zeros(4)
    res = np.zeros(packed.size1_out(0))
    buf.set_arg(0, memoryview(arg))
    buf.set_res(0, memoryview(res))

    def call(*a):
        arg[:] = a
        evaluate()
        return res.copy()

    call._keep = (buf, arg, res, packed)  # keep the buffers alive with the closure
    return call


def _force_function(model, rating, body):
    """CasADi Function (h, V, CL, throttle) -> [Mach, q, p, L, D, T, fuel flow, alpha_T].

    The tables are the model's own spline fits (the same coefficients as its numpy path, see
    :mod:`climbopt.fits`); CasADi is used only because calling it per integrator stage is ten
    times faster than the numpy spline wrappers on scalars.
    """
    import casadi as ca

    h, v, cl, thr = (ca.MX.sym(n) for n in ("h", "v", "cl", "thr"))
    atm = model.atmosphere(h)
    mach = v / atm.speed_of_sound_m_s
    q = 0.5 * atm.density_kg_m3 * v * v
    S = model.reference_area_m2
    lift = q * S * cl
    drag = q * S * model.drag_coefficient(cl, mach)
    thrust = model.thrust_n(h, mach, thr, rating)
    ff = model.fuel_flow_kg_s(h, mach, thr, rating)
    alpha = cl / model.lift_slope_per_rad(mach) if body else ca.MX(0.0)
    return ca.Function("forces", [h, v, cl, thr],
                       [ca.vertcat(mach, q, atm.pressure_pa, lift, drag, thrust, ff, alpha)])


def resimulate(trajectory, scenario, model=None) -> dict:
    """Integrate the trajectory's controls and compare (see the module docstring).

    Parameters
    ----------
    trajectory : Trajectory
        Must carry ``controls`` with ``lift_coefficient`` and ``throttle`` at its points.
    scenario : Scenario
        Supplies the limits and mission (rating).
    model : AircraftModel, optional
        Built from the scenario when omitted.

    Returns
    -------
    dict
        ``ok`` (bool), ``message`` (str), ``final_state_miss`` (dict of per-state differences,
        SI), ``final_miss_energy_m``, ``final_miss_relative``, ``final_energy_height_m``,
        ``largest_departure_relative``, ``departure_time_s`` (float or None),
        ``path_violations`` (dict, relative), ``max_path_violation``, ``tolerances`` (dict),
        ``simulated_final_state`` (dict), ``steps`` (integrator steps).

    Raises
    ------
    ValueError
        The trajectory has no stored controls (e.g. an energy-state path, whose zooms take no
        time and cannot be flown as such).
    """
    from climbopt.fits import ModelDomainError

    if getattr(trajectory, "controls", None) is None:
        raise ValueError(f"the {trajectory.method} trajectory has no control histories to "
                         "re-simulate (only collocation results carry them)")
    if model is None:
        from climbopt.aircraft import build_model

        model = build_model(scenario)
    tb = trajectory.table
    t = np.asarray(tb["time_s"], float)
    cl_all = np.asarray(trajectory.controls["lift_coefficient"], float)
    th_all = np.asarray(trajectory.controls["throttle"], float)
    rating = scenario.mission.rating or model.default_rating
    body = model.thrust_alignment == "body"
    m0 = float(tb["mass_kg"][0])
    scales = _SCALES * np.array([1, 1, 1, m0, 1])
    forces = _fast(_force_function(model, rating, body))
    dom = model.fit_domain
    # Phases (e.g. climb and dash) are separated by a repeated time; the controls may jump there.
    segments = np.split(np.arange(t.size), np.flatnonzero(np.diff(t) <= 0.0) + 1)

    def make_rhs(t0, t1, cl_c, th_c):
        """Right-hand side on one interval [t0, t1] with polynomial controls c0 + s (c1 + s c2),
        s = (t - t0) / (t1 - t0)."""
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
                v * math.cos(gam),
            ]
        return rhs

    planned = np.vstack([np.asarray(tb[k], float) for k in
                         ("altitude_m", "tas_m_s", "flight_path_angle_rad", "mass_kg",
                          "distance_m")])
    he_f = float(energy_height_m(planned[0, -1], planned[1, -1]))
    y = planned[:, 0].copy()
    ts, ys, cls = [t[0]], [y.copy()], [cl_all[0]]
    failure = ""
    steps = 0
    # Departure from the trajectory at the end of every interval, as energy height.
    departure = 0.0
    departure_t = None
    for seg in segments:
        if seg.size < 2:
            continue
        quadratic = trajectory.method == "collocation" and seg.size % 2 == 1
        pieces = _pieces(t[seg], cl_all[seg], th_all[seg], quadratic)
        for t0, t1, cl_c, th_c, k_end in pieces:
            try:
                sol = solve_ivp(make_rhs(t0, t1, cl_c, th_c), (t0, t1), y, method="DOP853",
                                rtol=RTOL, atol=RTOL * scales)
            except (ModelDomainError, ValueError) as exc:
                failure = f"the simulated path left the model's tables near t = {t0:.1f} s: {exc}"
                break
            if not sol.success:
                failure = f"integration failed near t = {t0:.1f} s: {sol.message}"
                break
            steps += sol.t.size - 1
            ts.extend(sol.t[1:])
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
    ts = np.asarray(ts)
    ys = np.asarray(ys)
    cls = np.asarray(cls)

    final = planned[:, -1]
    names = ("altitude_m", "tas_m_s", "flight_path_angle_rad", "mass_kg", "distance_m")
    if failure:
        miss = {k: float("nan") for k in names}
        miss_e = float("inf")
    else:
        d = ys[-1] - final
        miss = {k: float(v) for k, v in zip(names, d)}
        miss_e = float(math.hypot(d[0], final[1] * d[1] / G0))
    miss_rel = miss_e / abs(he_f) if he_f else float("inf")

    h_plan = np.interp(ts, t, np.asarray(tb["altitude_m"], float))
    violations = _path_violations(model, scenario, ys, cls, he_f, h_plan)
    max_viol = max(violations.values()) if violations else 0.0
    ok = (not failure and miss_rel <= FINAL_MISS_TOLERANCE
          and max_viol <= PATH_VIOLATION_TOLERANCE)
    if failure:
        message = failure
    else:
        worst = max(violations, key=violations.get) if violations else "none"
        message = (f"final miss {miss_e:.3g} m of energy height ({miss_rel:.2e} of "
                   f"{he_f:.0f} m; tolerance {FINAL_MISS_TOLERANCE:.0e}); largest path-limit "
                   f"excess {max_viol:.2e} ({worst}; tolerance {PATH_VIOLATION_TOLERANCE:.0e})")
        if departure_t is not None:
            message += (f"; the simulated path first leaves the trajectory by more than "
                        f"{FINAL_MISS_TOLERANCE:.0e} of the final energy height near "
                        f"t = {departure_t:.1f} s")
    return {
        "ok": bool(ok),
        "message": message,
        "final_state_miss": miss,
        "final_miss_energy_m": miss_e,
        "final_miss_relative": miss_rel,
        "final_energy_height_m": he_f,
        "path_violations": violations,
        "max_path_violation": float(max_viol),
        "tolerances": {"final_miss_relative": FINAL_MISS_TOLERANCE,
                       "path_violation": PATH_VIOLATION_TOLERANCE, "rtol": RTOL},
        "largest_departure_relative": float(departure) if not failure else float("inf"),
        "departure_time_s": departure_t,
        "simulated_final_state": {k: float(v) for k, v in zip(names, ys[-1])},
        "steps": int(steps),
    }


def _path_violations(model, scenario, ys, cl, he_f, h_plan) -> dict:
    """Largest relative excess over each scenario limit along the simulated points (>= 0).

    The CAS restriction applies where the trajectory itself is at or below the restriction
    altitude (``h_plan``, the trajectory's altitude at the same times): a simulated path a few
    metres lower than planned where the speed-up begins is an altitude drift (counted in the
    final miss), not a speed violation."""
    lim = scenario.limits
    h, v, m = ys[:, 0], ys[:, 1], ys[:, 3]
    atm = model.atmosphere(np.clip(h, model.atmosphere.altitude_min_m,
                                   model.atmosphere.altitude_max_m))
    a = np.asarray(atm.speed_of_sound_m_s, float)
    p = np.asarray(atm.pressure_pa, float)
    mach = v / a
    q = 0.5 * np.asarray(atm.density_kg_m3, float) * v * v
    out = {}

    def excess(value, limit):
        return float(max(0.0, np.max(value / limit - 1.0)))

    h_lo = max(lim.min_altitude_m, model.domain.altitude_min_m)
    h_hi = model.domain.altitude_max_m
    if lim.max_altitude_m is not None:
        h_hi = min(h_hi, lim.max_altitude_m)
    out["altitude"] = float(max(0.0, np.max(h_lo - h), np.max(h - h_hi)) / abs(he_f))
    mach_cap = model.domain.mach_max if lim.max_mach is None else min(lim.max_mach,
                                                                       model.domain.mach_max)
    out["mach"] = excess(mach, mach_cap)
    if lim.max_dynamic_pressure_pa is not None:
        out["dynamic_pressure"] = excess(q, lim.max_dynamic_pressure_pa)
    qc = np.asarray(impact_pressure_pa(np.maximum(mach, 0.0), p), float)
    if lim.max_cas_m_s is not None:
        out["cas"] = excess(qc, float(impact_pressure_from_cas(lim.max_cas_m_s)))
    if lim.cas_restriction is not None:
        cas_r, h_r = lim.cas_restriction
        below = h_plan <= h_r
        out["cas_restriction"] = (excess(qc[below], float(impact_pressure_from_cas(cas_r)))
                                  if below.any() else 0.0)
    mc = np.clip(mach, model.fit_domain.mach_min, model.fit_domain.mach_max)
    clmax = np.asarray(model.cl_max(mc, check=False), float)
    out["cl_max"] = excess(np.abs(cl), clmax)
    n_load = q * model.reference_area_m2 * cl / (m * G0)
    out["load_factor"] = excess(np.abs(n_load), lim.max_load_factor)
    return out
