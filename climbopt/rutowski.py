"""Energy-state (Rutowski) climb paths: minimum time, minimum fuel, weighted, with an optional dash.

Method
------
The aircraft is reduced to one state, the energy height ``he = h + V^2 / (2 g0)``, which grows
at the specific excess power, ``d he / dt = Ps`` (Rutowski, J. Aeronautical Sciences 21(3), 1954;
Bryson, Desai & Hoffman, J. Aircraft 6(6), 1969). Altitude and speed become controls that can be
exchanged instantly at constant energy ("zooms"). For a climb from energy ``he0`` to ``hef``

* time     ``t = integral dhe / Ps``,
* fuel     ``F = integral (fuel flow / Ps) dhe``,
* distance ``x = integral (V / Ps) dhe`` (horizontal distance taken as path length, cos(gamma) = 1),

so each cost is minimised by choosing, on every energy level separately, the feasible point
(h, V) on the line ``h = he - V^2 / (2 g0)`` that maximises

* ``Ps``                          minimum time (tangency of Ps and he contours; Rutowski 1954),
* ``Ps / fuel flow``              minimum fuel (fuel-specific energy; Rutowski 1954),
* ``Ps / (fuel flow + w)``        minimum ``fuel + w * time`` (w = ``solver.cost_weight_kg_per_s``).

In general ``Ps / r`` with the running cost rate ``r = a * fuel flow + b``:
(a, b) = (0, 1), (1, 0), (1, w).

Dash to a ground distance (``mission.dash_distance_m = D``): the climb is followed by level
flight at the target state (speed ``V_d``, cost rate ``r_d`` = its fuel flow at the throttle
that holds level flight, combined as above) until the ground distance D from the start is
covered. The total cost is

    J = integral r / Ps dhe + r_d (D - integral V / Ps dhe) / V_d
      = r_d D / V_d + integral (r - r_d V / V_d) / Ps dhe,

so, D being fixed, each energy level is now best spent at the point maximising
``Ps / (r - r_d V / V_d)``: for minimum time ``Ps / (1 - V / V_d)``, for minimum fuel
``Ps / (ff - ff_d V / V_d)`` (the range-aware energy climb of the energy-state literature on
climb/dash, e.g. Schultz & Zagalsky, J. Aircraft 9(2), 1972, from memory; the derivation here is
the one above). Speed covered during the climb is worth its dash-equivalent cost. Points where
the bracket ``r - r_d V / V_d`` is not positive climb *and* cover distance more cheaply than the
dash itself; there the problem is degenerate (the cheapest plan would cruise there rather than
dash at the target), so such points are left out and, on any level that has no other climbing
point, the plain objective is used (reported in the notes). ``r_d`` is taken at the mass at the
end of the climb (first order). The "climb on the plain path, then dash" answer is computed too;
both totals appear in the notes and the cheaper one is returned. When the range-aware climb
covers more than the dash distance (its premise fails) while the plain climb covers less, the
climb that ends exactly at the dash distance is found as well: the distance credit becomes a
Lagrange multiplier, ``Ps / (r - c r_d V / V_d)`` with ``c`` in [0, 1] set by halving until the
climb's distance is the dash distance (:func:`_matched_climb`).

Numerics
--------
Energy levels are spaced evenly from the start to the target energy
(``solver.grid_altitude_points`` levels). Each constant-energy line is parametrised by true
airspeed between the altitude bounds and sampled at ``solver.grid_speed_points`` points; the two
best sampled peaks are refined by a bounded iterated grid search (:func:`climbopt.energy.
maximise_on_lines`), so a maximum on a limit boundary (stall, q, Mach, CAS, altitude, table data)
is found to within a fraction of a millimetre per second: the path then rides that limit. Where
the optimal point jumps between branches (e.g. subsonic to supersonic), the jump energy is found
by bisection on the energy to 1/1024 of a level spacing and a constant-energy zoom is inserted
there (a short intermediate branch narrower than about one level spacing may show as a single
zoom over it). Costs are integrated with the trapezoidal rule in he over levels and jump points.

Mass: the optimum on each level is chosen at the mass the aircraft has there. The path is
solved with the start mass on every level, the mass is integrated along it, and the path is
solved again with that mass profile (relaxed), until the fuel burnt it gives agrees with the
profile used to within 2e-5 of itself (a fixed-point iteration of the march in he; the first
passes with a coarse speed sampling, then usually one or two with the full one).

Zooms take no time, no fuel and no distance in this model (its main idealisation): the real
aircraft needs time to trade altitude for speed, so the energy-state time is an optimistic
estimate, most so when a long final zoom is needed (Bryson, Desai & Hoffman 1969).

Flight-path angle (approximate): ``dh/dt = Ps * dh/dhe`` along the path (dh/dhe from finite
differences of the optimal altitude between levels), ``gamma = asin(dh/dt / V)``.
"""

from __future__ import annotations

import math
import time as _time
from dataclasses import dataclass, replace

import numpy as np

from climbopt.aircraft import wind_at
from climbopt.airspeed import cas_from_mach
from climbopt.atmosphere import G0, energy_height_m
from climbopt.cruise import LevelFlightImpossible, cruise, level_flight
from climbopt.energy import energy_fields, maximise_on_lines
from climbopt.envelope import FlightQuantities, envelope_for
from climbopt.results import COLUMNS, Method, Trajectory, Zoom, derive_segments

__all__ = ["InfeasibleMission", "solve_energy_state"]

_FT = 0.3048
#: Bisection steps locating a branch jump between two energy levels (1/1024 of the spacing).
_JUMP_BISECTIONS = 10
#: Bisection steps locating the energy ceiling.
_CEILING_BISECTIONS = 30
#: Maximum passes of the mass fixed-point iteration, and its tolerance on fuel burnt
#: (1 g plus 2e-5 of the fuel burnt).
_MAX_PASSES = 8
_MASS_TOL_KG = 1e-3
_MASS_TOL_REL = 2e-5
#: Speeds per level and refinement rounds of the first (coarse) mass passes.
_COARSE_POINTS = 80
_COARSE_ROUNDS = 4
#: A start or target point closer than this to the locus point (altitude) needs no zoom [m].
_ZOOM_MIN_M = 1.0


class InfeasibleMission(RuntimeError):
    """The mission cannot be flown with this aircraft and these limits.

    Attributes
    ----------
    max_energy_height_m : float
        Highest energy height [m] the aircraft can reach from the start (where the largest
        specific excess power on the energy level falls to zero), or NaN when the cause is
        something else (e.g. a target outside the envelope).
    altitude_m, mach : float
        Where on that energy level the largest Ps lies (NaN if not applicable).
    """

    def __init__(self, message: str, max_energy_height_m: float = math.nan,
                 altitude_m: float = math.nan, mach: float = math.nan):
        super().__init__(message)
        self.max_energy_height_m = float(max_energy_height_m)
        self.altitude_m = float(altitude_m)
        self.mach = float(mach)


@dataclass(frozen=True)
class _Cost:
    """Running cost rate r = a * fuel flow + b per second of climb; optional dash terms."""

    fuel_weight: float
    time_weight: float
    dash_rate: float | None = None  # r_d, cost per second while dashing
    credit: float = 1.0  # share of the dash-equivalent credit for distance (see _matched_climb)
    dash_tas_m_s: float | None = None  # V_d: ground speed of the dash (TAS + wind)


@dataclass
class _Problem:
    """Everything fixed during one solve."""

    model: object
    limits: object  # climbopt.envelope.Envelope
    throttle: float
    h_bottom_m: float
    h_top_m: float
    points: int
    refine: bool
    rounds: int = 6
    monotone: bool = False  # procedure profile: altitude never decreases


def _m_ft(x_m: float) -> str:
    return f"{x_m:,.0f} m ({x_m / _FT:,.0f} ft)"


# ------------------------------------------------------------------------------------ levels


def _line_bounds(prob: _Problem, he: np.ndarray, h_floor=None):
    """Speed range [m/s] of each constant-energy line inside the altitude bounds (and above
    ``h_floor`` [m], the altitude already reached, for the procedure profile)."""
    low = prob.h_bottom_m if h_floor is None else np.maximum(prob.h_bottom_m, h_floor)
    v_hi = np.sqrt(2.0 * G0 * np.maximum(he - low, 0.0))
    v_lo = np.sqrt(2.0 * G0 * np.maximum(he - prob.h_top_m, 0.0))
    v_lo = np.maximum(v_lo, 1e-3 * v_hi)
    return v_lo, v_hi


def _fields(prob: _Problem, he, tas, mass):
    """Energy fields on constant-energy lines: altitude from he and speed."""
    h = he - tas**2 / (2.0 * G0)
    return energy_fields(prob.model, h, tas, mass, limits=prob.limits, load_factor=1.0,
                         throttle=prob.throttle)


def _value(f, cost: _Cost | None, dash: bool, model=None):
    """Objective to maximise at points (``-inf`` where not allowed). ``cost=None``: plain Ps."""
    ps = f.ps_m_s
    ok = f.feasible & (ps > 0.0)
    if cost is None:
        return np.where(ok, ps, -np.inf)
    denom = cost.fuel_weight * f.fuel_flow_kg_s + cost.time_weight
    if dash:
        ground = f.tas_m_s + wind_at(model, f.altitude_m)
        denom = denom - cost.credit * cost.dash_rate * ground / cost.dash_tas_m_s
    ok = ok & (denom > 0.0)
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(ok, ps / denom, -np.inf)


def _optimise_levels(prob: _Problem, he, mass, cost: _Cost | None, dash: bool,
                     points: int | None = None, h_floor=None):
    """Best speed on each energy level (at or above ``h_floor`` [m] when given); returns (tas,
    value, used_plain_fallback mask)."""
    he = np.atleast_1d(np.asarray(he, dtype=float))
    mass = np.broadcast_to(np.asarray(mass, dtype=float), he.shape)
    if h_floor is not None:
        h_floor = np.broadcast_to(np.asarray(h_floor, dtype=float), he.shape)
    v_lo, v_hi = _line_bounds(prob, he, h_floor)
    n = points or prob.points

    def objective_for(use_dash, rows):
        def obj(v, line):
            r = rows[line]
            f = _fields(prob, he[r][:, None], v, mass[r][:, None])
            return _value(f, cost, use_dash, prob.model)
        return obj

    all_rows = np.arange(he.size)
    v, val = maximise_on_lines(objective_for(dash, all_rows), v_lo, v_hi, n,
                               refine=prob.refine, rounds=prob.rounds)
    fallback = np.zeros(he.shape, dtype=bool)
    if dash:
        bad = ~np.isfinite(val)
        if bad.any():
            rows = np.flatnonzero(bad)
            v2, val2 = maximise_on_lines(objective_for(False, rows), v_lo[rows], v_hi[rows], n,
                                         refine=prob.refine, rounds=prob.rounds)
            v[rows] = v2
            val[rows] = val2
            fallback[rows] = np.isfinite(val2)
    return v, val, fallback


def _hold_altitude(prob: _Problem, he, mass, cost: _Cost | None, dash: bool, v, val, fallback):
    """Procedure profile: make the locus's altitude non-decreasing from level to level.

    Each level whose best point lies below the highest altitude reached on the levels before
    it is solved again with that altitude as its floor (at constant energy, a point above the
    floor or the floor itself: holding altitude means accelerating level). Repeated until no
    level descends (each pass fixes at least the first descending level). Arrays are updated in
    place; returns the number of levels re-solved.
    """
    resolved = set()
    for _ in range(he.size):
        h = he - v**2 / (2.0 * G0)
        ok = np.isfinite(val)
        reached = np.maximum.accumulate(np.where(ok, h, -np.inf))
        floor = np.concatenate([[-np.inf], reached[:-1]])
        bad = np.flatnonzero(ok & (h < floor - 1e-3))
        if bad.size == 0:
            break
        v2, val2, fb2 = _optimise_levels(prob, he[bad], mass[bad], cost, dash,
                                         h_floor=floor[bad])
        v[bad], val[bad], fallback[bad] = v2, val2, fb2
        resolved.update(bad.tolist())
    return len(resolved)


def _ceiling(prob: _Problem, he_ok: float, he_bad: float, mass: float):
    """Bisect for the energy height where the largest Ps on the level reaches zero.

    Returns (ceiling he [m], altitude [m] and Mach of the largest Ps there)."""
    v_ok, _, _ = _optimise_levels(prob, he_ok, mass, None, False)
    lo, hi = he_ok, he_bad
    best_v = v_ok[0]
    for _ in range(_CEILING_BISECTIONS):
        if hi - lo < 0.01:
            break
        mid = 0.5 * (lo + hi)
        v, val, _ = _optimise_levels(prob, mid, mass, None, False)
        if np.isfinite(val[0]):
            lo, best_v = mid, v[0]
        else:
            hi = mid
    if not np.isfinite(best_v):  # nothing feasible even at the lower end: report the start
        return lo, math.nan, math.nan
    h = lo - best_v**2 / (2.0 * G0)
    a = float(prob.model.atmosphere(h).speed_of_sound_m_s)
    return lo, float(h), float(best_v / a)


def _raise_ceiling(prob, he_levels, val, mass_levels, he_target):
    """Raise InfeasibleMission for the first level without a climbing point."""
    bad = np.flatnonzero(~np.isfinite(val))
    k = int(bad[0])
    if k == 0:
        he_c, h_c, m_c = he_levels[0], math.nan, math.nan
        # where on the start level is Ps largest (it is <= 0)?
        v_lo, v_hi = _line_bounds(prob, he_levels[:1])

        def obj(v, line):
            f = _fields(prob, he_levels[line][:, None], v, mass_levels[line][:, None])
            return np.where(f.feasible, f.ps_m_s, -np.inf)

        v, ps = maximise_on_lines(obj, v_lo, v_hi, prob.points)
        if np.isfinite(ps[0]):
            h_c = float(he_c - v[0] ** 2 / (2.0 * G0))
            m_c = float(v[0] / prob.model.atmosphere(h_c).speed_of_sound_m_s)
        where = ("" if not np.isfinite(h_c) else
                 f"; the largest specific excess power on that level, {ps[0]:.2f} m/s, is at "
                 f"altitude {_m_ft(h_c)}, Mach {m_c:.2f}")
        raise InfeasibleMission(
            f"the aircraft cannot climb at all from the start: no feasible point on the start "
            f"energy level {_m_ft(he_c)} has positive specific excess power{where}; the "
            f"highest reachable energy height is the start's, {_m_ft(he_c)}",
            he_c, h_c, m_c)
    he_c, h_c, m_c = _ceiling(prob, he_levels[k - 1], he_levels[k], mass_levels[k - 1])
    raise InfeasibleMission(
        f"target energy height {_m_ft(he_target)} is not reachable: the highest reachable energy "
        f"height is {_m_ft(he_c)} (energy ceiling, where specific excess power falls to zero), "
        f"at altitude {_m_ft(h_c)}, Mach {m_c:.2f} (mass {mass_levels[k - 1]:,.0f} kg, rating "
        f"{prob.model.rating_label}, limits applied)",
        he_c, h_c, m_c)


def _locate_jumps(prob, he_levels, v, mass_fn, cost, dash):
    """Find branch jumps of the optimal locus between consecutive levels.

    Returns a list of (k, he_jump, v_before, v_after): the jump lies between levels k and k+1.
    """
    h = he_levels - v**2 / (2.0 * G0)
    dhe = he_levels[1] - he_levels[0] if he_levels.size > 1 else 1.0
    # on a continuous branch |dh/dhe| stays below about 2 (e.g. 1.1 at constant Mach 0.9 in the
    # troposphere); larger steps are checked by bisection, which keeps only true jumps
    cand = np.flatnonzero(np.abs(np.diff(h)) > 2.0 * dhe + 50.0)
    if cand.size == 0:
        return []
    lo = he_levels[cand].copy()
    hi = he_levels[cand + 1].copy()
    v_a = v[cand].copy()
    v_b = v[cand + 1].copy()
    # procedure profile: between two levels the floor is the altitude of the lower one
    floor = h[cand] if prob.monotone else None
    for _ in range(_JUMP_BISECTIONS):
        mid = 0.5 * (lo + hi)
        vm, _, _ = _optimise_levels(prob, mid, mass_fn(mid), cost, dash, h_floor=floor)
        h_m = mid - vm**2 / (2.0 * G0)
        h_a = lo - v_a**2 / (2.0 * G0)
        h_b = hi - v_b**2 / (2.0 * G0)
        to_a = np.abs(h_m - h_a) <= np.abs(h_m - h_b)
        lo = np.where(to_a, mid, lo)
        v_a = np.where(to_a, vm, v_a)
        hi = np.where(to_a, hi, mid)
        v_b = np.where(to_a, v_b, vm)
    width = hi - lo
    jump_h = np.abs((hi - v_b**2 / (2.0 * G0)) - (lo - v_a**2 / (2.0 * G0)))
    out = []
    for j, k in enumerate(cand):
        if jump_h[j] > 10.0 + 20.0 * width[j]:
            out.append((int(k), float(hi[j]), float(v_a[j]), float(v_b[j])))
    return out


# ------------------------------------------------------------------------------------ path


@dataclass
class _Path:
    """Nodes of the optimal locus in increasing energy; ``zoom_after[i]``: i -> i+1 is a zoom."""

    he: np.ndarray
    tas: np.ndarray
    zoom_after: np.ndarray
    fallback_levels: int = 0

    @property
    def altitude(self):
        return self.he - self.tas**2 / (2.0 * G0)


def _build_path(he_levels, v, jumps, fallback) -> _Path:
    """Locus nodes with each jump inserted as a pair of points at the jump energy."""
    he_nodes, v_nodes, zoom = [], [], []
    jump_at = {k: (he_j, va, vb) for k, he_j, va, vb in jumps}
    for k in range(he_levels.size):
        he_nodes.append(he_levels[k])
        v_nodes.append(v[k])
        zoom.append(False)
        if k in jump_at:
            he_j, va, vb = jump_at[k]
            # both sides at the same energy he_j (the before-point moved up by < 1/1024 of a
            # level spacing in energy, keeping its speed)
            he_nodes += [he_j, he_j]
            v_nodes += [va, vb]
            zoom += [True, False]
    return _Path(np.array(he_nodes), np.array(v_nodes), np.array(zoom),
                 int(np.count_nonzero(fallback)))


def _integrate(prob, path: _Path, mass_fn, start_mass):
    """Time, fuel, distance, mass at the nodes (trapezoid in he; zooms free)."""
    h = path.altitude
    mass_guess = mass_fn(path.he)
    f = energy_fields(prob.model, h, path.tas, mass_guess, limits=prob.limits, load_factor=1.0,
                      throttle=prob.throttle)
    ps = np.asarray(f.ps_m_s, dtype=float)
    ff = np.asarray(f.fuel_flow_kg_s, dtype=float)
    inv = 1.0 / ps
    dhe = np.diff(path.he)
    free = path.zoom_after[:-1]
    seg = lambda g: np.where(free, 0.0, 0.5 * dhe * (g[:-1] + g[1:]))  # noqa: E731
    t = np.concatenate([[0.0], np.cumsum(seg(inv))])
    fuel = np.concatenate([[0.0], np.cumsum(seg(ff * inv))])
    ground = path.tas + wind_at(prob.model, h)  # ground speed: TAS plus the along-track wind
    dist = np.concatenate([[0.0], np.cumsum(seg(ground * inv))])
    return dict(time=t, fuel=fuel, distance=dist, mass=start_mass - fuel, fields=f)


def _mass_function(he_nodes, mass_nodes):
    he_nodes = np.asarray(he_nodes, dtype=float)
    mass_nodes = np.asarray(mass_nodes, dtype=float)

    def fn(he):
        return np.interp(he, he_nodes, mass_nodes)

    return fn


# ------------------------------------------------------------------------------------ dash


def _dash(prob, target, mass0, distance_m):
    """Level flight at the target state over ``distance_m`` of ground (:func:`climbopt.cruise.
    cruise`); dict with arrays distance, time, mass, fuel, throttle (from the dash start)."""
    try:
        leg = cruise(prob.model, target.altitude_m, target.tas_m_s, mass0, distance_m)
    except LevelFlightImpossible as exc:
        raise InfeasibleMission(f"the dash at the target state cannot be flown: {exc} (rating "
                                f"{prob.model.rating_label})", math.nan, exc.altitude_m,
                                exc.mach) from None
    return dict(distance=leg.distance, time=leg.time, mass=leg.mass, fuel=leg.fuel,
                throttle=leg.throttle)


# ------------------------------------------------------------------------------------ solve


def _cost_for(objective: str, w: float) -> _Cost:
    if objective == "time":
        return _Cost(0.0, 1.0)
    if objective == "fuel":
        return _Cost(1.0, 0.0)
    return _Cost(1.0, float(w))


def _solve_climb(prob, he_levels, start_mass, cost, dash_info, he_target, progress, label):
    """Mass fixed-point passes, then the path. Returns (path, integration, passes, cost used).

    The first passes sample each level coarsely in speed; the last ones use the full sampling
    and locate the branch jumps. Each pass solves every level at the mass profile of the
    previous one; the new profile is relaxed, ``m <- m + omega (m_new - m)``, with ``omega``
    from the secant of the fuel burnt over the last two passes (this removes most of the
    oscillation of the plain iteration). A level without any climbing point stops the pass
    there (a lighter aircraft may climb on); if it stays out of reach once the mass has
    converged, InfeasibleMission names the energy ceiling."""
    dash = dash_info is not None
    used = np.full(he_levels.size, start_mass)  # mass profile used by the current pass
    cost_now = cost
    coarse = replace(prob, points=min(prob.points, _COARSE_POINTS), rounds=_COARSE_ROUNDS)
    passes = 0
    hist = []  # (end fuel used by the pass's profile, end fuel computed)
    for grid_prob, final in ((coarse, False), (prob, True)):
        last_bad = None
        for i_pass in range(_MAX_PASSES):
            passes += 1
            mass_fn = _mass_function(he_levels, used)
            v, val, fallback = _optimise_levels(grid_prob, he_levels, used, cost_now, dash)
            if grid_prob.monotone:
                _hold_altitude(grid_prob, he_levels, used, cost_now, dash, v, val, fallback)
            bad = np.flatnonzero(~np.isfinite(val))
            if bad.size and bad[0] == 0:
                _raise_ceiling(grid_prob, he_levels, val, used, he_target)
            n_ok = int(bad[0]) if bad.size else he_levels.size
            jumps = (_locate_jumps(grid_prob, he_levels[:n_ok], v[:n_ok], mass_fn, cost_now, dash)
                     if final else [])
            path = _build_path(he_levels[:n_ok], v[:n_ok], jumps, fallback[:n_ok])
            integ = _integrate(grid_prob, path, mass_fn, start_mass)
            fuel = integ["fuel"][-1]
            if progress:
                progress(f"energy-state {label}: pass {passes}, fuel {fuel:.3f} kg",
                         min(0.9, 0.12 * passes))
            fuel_used = start_mass - used[n_ok - 1]  # what this pass assumed at its end
            tol = (1.0 if final else 10.0) * (_MASS_TOL_KG + _MASS_TOL_REL * fuel)
            converged = abs(fuel - fuel_used) < tol and (not bad.size or last_bad == n_ok)
            if bad.size and final and (converged or i_pass == _MAX_PASSES - 1):
                _raise_ceiling(grid_prob, he_levels, val, used, he_target)
            if converged:
                break
            # next mass profile (relaxed); beyond an unreachable level keep the last mass
            new = np.interp(he_levels, path.he, integ["mass"])
            hist.append((fuel_used, fuel))
            omega = 1.0
            if len(hist) >= 2:
                (x0, g0), (x1, g1) = hist[-2], hist[-1]
                if abs(x1 - x0) > 1e-9:
                    lam = (g1 - g0) / (x1 - x0)
                    omega = float(np.clip(1.0 / (1.0 - lam), 0.3, 1.5)) if lam < 1 else 1.0
            used = used + omega * (new - used)
            if dash:
                cost_now = replace(cost_now, dash_rate=dash_info(used[-1]))
            last_bad = n_ok
    return path, integ, passes, cost_now


def solve_energy_state(scenario, objective: str = "time", *, model=None, progress=None,
                       refine: bool = True, dash_climb: str = "best") -> Trajectory:
    """Energy-state climb (and dash) path for ``objective`` in "time" | "fuel" | "weighted".

    (Over 60 lines for this documentation: the body is one straight sequence, set-up, climb
    and dash, table, notes, with the work in the helpers below.)

    Parameters
    ----------
    scenario : climbopt.scenario.Scenario
        Start and target points, limits, rating, optional dash distance; grid sizes from
        ``scenario.solver`` (energy levels = ``grid_altitude_points``, samples per level =
        ``grid_speed_points``).
    objective : str
        "time" (minimum time), "fuel" (minimum fuel) or "weighted" (minimum
        fuel + ``solver.cost_weight_kg_per_s`` * time).
    model : AircraftModel, optional
        Prebuilt model (built from the scenario otherwise).
    progress : callable, optional
        ``progress(message, fraction)``.
    refine : bool
        Refine each level's optimum by a bracketing search (True; False only to study the
        grid dependence).
    dash_climb : str
        With a dash distance: "best" (solve the range-aware and the plain climb, return the
        cheaper, compare both in the notes), "range-aware" or "plain" (that one only).

    Returns
    -------
    Trajectory
        ``method="energy-state"``; per-point table over energy levels (and the dash), zooms,
        notes. See the module docstring for the method and its assumptions.

    Raises
    ------
    InfeasibleMission
        Target energy above the energy ceiling (names the highest reachable energy height and
        where it lies), target outside the envelope, target below the start energy, or a dash
        that cannot be held in level flight.
    """
    t_wall = _time.perf_counter()
    if objective not in ("time", "fuel", "weighted"):
        raise ValueError(f"objective must be 'time', 'fuel' or 'weighted', got {objective!r}")
    if dash_climb not in ("best", "range-aware", "plain"):
        raise ValueError(f"dash_climb must be 'best', 'range-aware' or 'plain', got {dash_climb!r}")
    if model is None:
        from climbopt.aircraft import build_model

        model = build_model(scenario)
    env = envelope_for(scenario, model)
    # every engine call uses the mission's rating or rating schedule (AircraftModel.engine)
    prob = _Problem(model, env, float(model.throttle_max), env.altitude_min_m,
                    env.altitude_max_m, max(3, int(scenario.solver.grid_speed_points)), refine,
                    monotone=env.profile == "procedure")
    n_levels = max(2, int(scenario.solver.grid_altitude_points))
    start, target = scenario.mission.start, scenario.mission.target
    start_mass = float(model.mass_kg)
    notes = _check_end_points(prob, start, target, start_mass)
    he0 = float(energy_height_m(start.altitude_m, start.tas_m_s))
    hef = float(energy_height_m(target.altitude_m, target.tas_m_s))
    w = scenario.solver.cost_weight_kg_per_s
    cost = _cost_for(objective, w)
    he_levels = np.linspace(he0, max(hef, he0 + 1e-6), n_levels)
    if progress:
        progress(f"energy-state {objective}: {n_levels} energy levels x {prob.points} speeds", 0.0)

    dash_m = scenario.mission.dash_distance_m
    if dash_m:
        chosen, dash, dash_notes = _climb_and_dash(prob, he_levels, start_mass, cost, target,
                                                   dash_m, dash_climb, progress, objective, w)
        notes += dash_notes
    else:
        chosen = _solve_climb(prob, he_levels, start_mass, cost, None, hef, progress, objective)
    path, integ, passes, _ = chosen
    table, zooms = _table(prob, path, integ, start, target)
    if dash_m:
        table, note = _dash_leg(prob, table, dash, target, dash_m)
        notes.append(note)

    notes += _notes(prob, scenario, path, integ, passes, n_levels, objective, w)
    if progress:
        progress(f"energy-state {objective}: done", 1.0)
    status = (f"energy-state path: {n_levels} levels x {prob.points} speeds, {passes} mass "
              f"passes, {len(zooms)} zooms")
    return Trajectory(Method.ENERGY_STATE, objective, table, converged=True, status=status,
                      iterations=0, wall_s=_time.perf_counter() - t_wall, zooms=zooms,
                      segments=derive_segments(table, zooms), notes=notes,
                      profile=prob.limits.profile)


def _dash_leg(prob: _Problem, table: dict, dash: dict, target, dash_m: float):
    """(table, note): the climb's table with the dash leg appended, flown from the same
    end-of-climb mass and distance, unless the climb alone already covers the dash distance
    ``dash_m`` [m]; the note says which."""
    x_c = table["distance_m"][-1]
    if x_c >= dash_m:
        return table, (
            f"dash: the climb alone covers {x_c / 1000:.1f} km, more than the dash distance "
            f"{dash_m / 1000:.1f} km; no dash leg is flown (the target is reached beyond it)")
    return _append_dash(prob, table, dash, target), (
        f"dash: level flight at the target state for {(dash_m - x_c) / 1000:.1f} km, "
        f"{dash['time'][-1]:.1f} s, {dash['fuel'][-1]:.1f} kg, throttle "
        f"{dash['throttle'][0]:.3f} (thrust = drag)")


def _check_end_points(prob: _Problem, start, target, mass_kg: float) -> list:
    """Notes on the start point; InfeasibleMission when the target is outside the envelope (1 g,
    full rating) or below the start energy."""
    env, notes = prob.limits, []
    fs = energy_fields(prob.model, start.altitude_m, start.tas_m_s, mass_kg, limits=env,
                       throttle=prob.throttle)
    if not bool(fs.feasible):
        broken = [n for n in env.names if n in fs.limits and not bool(fs.limits[n])]
        notes.append(f"the start point lies outside the flight envelope ({', '.join(broken)} "
                     "limit(s) not met); the energy-state path leaves it by a zoom")
    ft = energy_fields(prob.model, target.altitude_m, target.tas_m_s, mass_kg, limits=env,
                       throttle=prob.throttle)
    if not bool(ft.feasible):
        broken = [n for n in env.names if n in ft.limits and not bool(ft.limits[n])]
        raise InfeasibleMission(
            f"the target point (altitude {_m_ft(target.altitude_m)}, Mach {float(ft.mach):.2f}) "
            f"lies outside the flight envelope: {', '.join(broken)} limit(s) not met",
            math.nan, target.altitude_m, float(ft.mach))
    he0 = float(energy_height_m(start.altitude_m, start.tas_m_s))
    hef = float(energy_height_m(target.altitude_m, target.tas_m_s))
    if hef < he0 - 0.5:
        raise InfeasibleMission(
            f"the target energy height {_m_ft(hef)} is below the start's {_m_ft(he0)}: the "
            f"energy-state climb solver only climbs (no descent model)", he0)
    return notes


def _climb_and_dash(prob, he_levels, start_mass, cost, target, dash_m, dash_climb, progress,
                    objective, w):
    """The climb variants for a dash mission (plain, range-aware or both), each completed by its
    dash; returns (the cheaper variant's climb, its dash, notes comparing them)."""
    model = prob.model
    hef = he_levels[-1]

    def dash_info(mass_kg):
        thr, _, _, mach = level_flight(model, target.altitude_m, target.tas_m_s, mass_kg)
        ff = float(model.fuel_flow_kg_s(target.altitude_m, mach,
                                        min(max(thr, model.throttle_min), prob.throttle)))
        return cost.fuel_weight * ff + cost.time_weight

    ground = target.tas_m_s + float(wind_at(model, target.altitude_m))
    if ground <= 0.0:
        raise InfeasibleMission(
            f"the dash cannot cover ground: the headwind at the target altitude "
            f"({-float(wind_at(model, target.altitude_m)):.1f} m/s) is not below the target's true "
            f"airspeed ({target.tas_m_s:.1f} m/s)", math.nan, target.altitude_m)
    cost = replace(cost, dash_rate=dash_info(start_mass), dash_tas_m_s=ground)
    variants = {}
    if dash_climb in ("best", "plain"):
        variants["plain"] = _solve_climb(prob, he_levels, start_mass, cost, None, hef, progress,
                                         objective)
    if dash_climb in ("best", "range-aware"):
        variants["range-aware"] = _solve_climb(prob, he_levels, start_mass, cost, dash_info, hef,
                                               progress, objective + " (range-aware)")
        plain = variants.get("plain")
        if (variants["range-aware"][1]["distance"][-1] > dash_m
                and (plain is None or plain[1]["distance"][-1] < dash_m)):
            variants["distance-matched"] = _matched_climb(prob, he_levels, start_mass, cost,
                                                          dash_info, dash_m)
    totals, dashes, notes = {}, {}, []
    for name, (_, integ, _, _) in variants.items():
        x_c = integ["distance"][-1]
        dash = dashes[name] = _dash(prob, target, start_mass - integ["fuel"][-1], dash_m - x_c)
        totals[name] = (integ["time"][-1] + dash["time"][-1],
                        integ["fuel"][-1] + dash["fuel"][-1], x_c)
    j = {k: cost.fuel_weight * v[1] + cost.time_weight * v[0] for k, v in totals.items()}
    variant = min(j, key=j.get)
    label = {"time": "time", "fuel": "fuel", "weighted": f"fuel + {w:g} kg/s x time"}[objective]
    notes += _dash_variant_notes(variants, totals, variant, label, dash_m)
    return variants[variant], dashes[variant], notes


def _dash_variant_notes(variants: dict, totals: dict, variant: str, label: str,
                        dash_m: float) -> list:
    """Notes comparing the climb variants of a dash mission: each one's total time [s], fuel
    [kg] and climb distance [km] (``totals``: name -> (time, fuel, climb distance [m])), which
    one is returned (lower ``label``), and energy levels where the range-aware objective
    degenerated."""
    notes = []
    for name, (tt, ff, xc) in totals.items():
        over = (" - more than the dash distance, so the range-aware premise (a dash after "
                "the climb) fails" if name == "range-aware" and xc > dash_m else "")
        if name == "distance-matched":
            over = (f"; the range-aware credit for distance scaled by "
                    f"{variants[name][3].credit:.3f} so that the climb ends at the dash distance")
        notes.append(
            f"dash to {dash_m / 1000:.1f} km: {name} energy climb then dash: total time "
            f"{tt:.1f} s, fuel {ff:.1f} kg (climb covers {xc / 1000:.1f} km{over})")
    if len(variants) > 1:
        notes.append(
            f"dash: the {variant} climb is returned (lower {label}); the range-aware climb "
            "maximises Ps / (r - r_d V / V_d) on each energy level (see climbopt.rutowski)")
    aware = variants.get("range-aware")
    if aware is not None and aware[0].fallback_levels:
        notes.append(
            f"dash: on {aware[0].fallback_levels} energy levels every climbing point covers "
            "distance more cheaply than the dash itself (degenerate range-aware objective); "
            "the plain objective was used there")
    return notes


#: Halvings of the distance credit in :func:`_matched_climb`, and its coarse grid.
_MATCH_STEPS = 12
_MATCH_GRID = (100, 80)


def _matched_climb(prob, he_levels, start_mass, cost, dash_info, dash_m):
    """The climb that reaches the target state exactly at the dash distance, for a mission where
    the range-aware climb overshoots it and the plain climb falls short.

    Minimising the cost of the climb subject to its ground distance being the dash distance
    makes the distance credit of the range-aware objective a Lagrange multiplier: on each level
    maximise Ps / (r - c r_d V_g / V_d) with c in [0, 1] (c = 0 the plain climb, c = 1 the
    range-aware one). c is found by halving its interval (:data:`_MATCH_STEPS` times, on a
    coarse grid of energy levels x speeds) until the climb covers the dash distance, then the
    path is solved on the full grid at that c."""
    coarse = replace(prob, points=min(prob.points, _MATCH_GRID[1]), rounds=4)
    levels = np.linspace(he_levels[0], he_levels[-1], min(he_levels.size, _MATCH_GRID[0]))
    lo, hi = 0.0, 1.0
    for _ in range(_MATCH_STEPS):
        c = 0.5 * (lo + hi)
        _, integ, _, _ = _solve_climb(coarse, levels, start_mass, replace(cost, credit=c),
                                      dash_info, levels[-1], None, "")
        lo, hi = (c, hi) if integ["distance"][-1] < dash_m else (lo, c)
    return _solve_climb(prob, he_levels, start_mass, replace(cost, credit=0.5 * (lo + hi)),
                        dash_info, he_levels[-1], None, "distance-matched")


def _gamma_along(path: _Path, ps, tas):
    """Approximate flight-path angle: dh/dt = Ps dh/dhe on each zoom-free segment."""
    h = path.altitude
    dh_dhe = np.zeros_like(h)
    breaks = np.flatnonzero(path.zoom_after) + 1
    for seg in np.split(np.arange(h.size), breaks):
        if seg.size >= 2:
            dh_dhe[seg] = np.gradient(h[seg], path.he[seg])
    return np.arcsin(np.clip(ps * dh_dhe / tas, -1.0, 1.0))


def _table(prob, path, integ, start, target):
    """Per-point table: start point, locus nodes (with jump zooms), target point."""
    model = prob.model
    mass = integ["mass"]
    # Ps at the integrated mass (the optimum was chosen at the previous pass's mass)
    f_m = energy_fields(model, path.altitude, path.tas, mass, limits=prob.limits, load_factor=1.0,
                        throttle=prob.throttle)
    ps = np.asarray(f_m.ps_m_s, dtype=float)
    cols = {
        "time_s": integ["time"],
        "altitude_m": path.altitude,
        "tas_m_s": path.tas,
        "energy_height_m": path.he,
        "ps_m_s": ps,
        "flight_path_angle_rad": _gamma_along(path, ps, path.tas),
        "mass_kg": mass,
        "fuel_used_kg": integ["fuel"],
        "distance_m": integ["distance"],
        "throttle": np.full(path.he.size, prob.throttle),
    }
    zooms = []
    jump_idx = np.flatnonzero(path.zoom_after)
    offset = 0
    h = path.altitude
    # start: off the locus -> initial zoom
    if abs(start.altitude_m - h[0]) > _ZOOM_MIN_M:
        r = _zoom_end_row(prob, cols, start.altitude_m, start.tas_m_s, path.he[0],
                          start.flight_path_angle_rad, 0)
        cols = {k: np.insert(np.asarray(v, dtype=float), 0, r[k]) for k, v in cols.items()}
        zooms.append(Zoom(float(path.he[0]), start.altitude_m, start.tas_m_s, float(h[0]),
                          float(path.tas[0]), "dive" if h[0] < start.altitude_m else "climb",
                          "initial", 1))
        offset = 1
    for i in jump_idx:
        zooms.append(Zoom(float(path.he[i]), float(h[i]), float(path.tas[i]), float(h[i + 1]),
                          float(path.tas[i + 1]), "dive" if h[i + 1] < h[i] else "climb",
                          "branch jump", int(i + 1 + offset)))
    # target: off the locus -> final zoom
    if abs(target.altitude_m - h[-1]) > _ZOOM_MIN_M:
        last = cols["time_s"].size - 1
        r = _zoom_end_row(prob, cols, target.altitude_m, target.tas_m_s, path.he[-1],
                          target.flight_path_angle_rad, last)
        zooms.append(Zoom(float(path.he[-1]), float(h[-1]), float(path.tas[-1]),
                          target.altitude_m, target.tas_m_s,
                          "dive" if target.altitude_m < h[-1] else "climb", "final", last + 1))
        cols = {k: np.append(np.asarray(v, dtype=float), r[k]) for k, v in cols.items()}
    zooms.sort(key=lambda z: z.index)
    return _finish_columns(model, cols), zooms


def _zoom_end_row(prob, cols: dict, h_, v_, he_, gamma, idx_from: int) -> dict:
    """Table row of a zoom's end off the locus (altitude [m], TAS [m/s], energy height [m],
    flight-path angle [rad]): Ps there, time, mass, fuel and distance of row ``idx_from``
    (a zoom takes no time)."""
    fr = energy_fields(prob.model, h_, v_, cols["mass_kg"][idx_from], limits=prob.limits,
                       throttle=prob.throttle)
    return {"time_s": cols["time_s"][idx_from], "altitude_m": h_, "tas_m_s": v_,
            "energy_height_m": he_, "ps_m_s": float(fr.ps_m_s),
            "flight_path_angle_rad": gamma, "mass_kg": cols["mass_kg"][idx_from],
            "fuel_used_kg": cols["fuel_used_kg"][idx_from],
            "distance_m": cols["distance_m"][idx_from], "throttle": prob.throttle}


def _finish_columns(model, cols):
    """Add Mach, CAS, dynamic pressure, the 1 g lift coefficient and the thrust from altitude,
    TAS, mass and throttle (model atmosphere; compressible pitot formulas; L = m g0, the
    energy-state assumption; the mission's rating or rating schedule)."""
    atm = model.atmosphere(cols["altitude_m"])
    v = np.asarray(cols["tas_m_s"], dtype=float)
    mach = v / atm.speed_of_sound_m_s
    cols["mach"] = mach
    cols["cas_m_s"] = np.asarray(cas_from_mach(mach, atm.pressure_pa), dtype=float)
    q = 0.5 * np.asarray(atm.density_kg_m3, dtype=float) * v * v
    cols["dynamic_pressure_pa"] = q
    cols["load_factor"] = np.ones_like(q)
    with np.errstate(divide="ignore", invalid="ignore"):
        cols["lift_coefficient"] = np.asarray(cols["mass_kg"]) * G0 / (q * model.reference_area_m2)
    thr = np.nan_to_num(np.asarray(cols["throttle"], dtype=float), nan=float(model.throttle_max))
    fd = model.fit_domain
    cols["thrust_n"] = model.thrust_n(cols["altitude_m"], np.clip(mach, fd.mach_min, fd.mach_max),
                                      thr, check=False)
    return {k: np.asarray(cols[k], dtype=float) for k in COLUMNS}


def _append_dash(prob, table, dash, target):
    n = dash["distance"].size - 1  # skip the first point (same as the climb's end)
    t0, x0, f0 = table["time_s"][-1], table["distance_m"][-1], table["fuel_used_kg"][-1]
    he_t = float(energy_height_m(target.altitude_m, target.tas_m_s))
    ext = {
        "time_s": t0 + dash["time"][1:],
        "altitude_m": np.full(n, target.altitude_m),
        "tas_m_s": np.full(n, target.tas_m_s),
        "energy_height_m": np.full(n, he_t),
        "ps_m_s": np.zeros(n),
        "flight_path_angle_rad": np.zeros(n),
        "mass_kg": dash["mass"][1:],
        "fuel_used_kg": f0 + dash["fuel"][1:],
        "distance_m": x0 + dash["distance"][1:],
        "throttle": dash["throttle"][1:],
    }
    ext = _finish_columns(prob.model, ext)
    return {k: np.concatenate([table[k], ext[k]]) for k in table}


def _notes(prob, scenario, path, integ, passes, n_levels, objective, w):
    """Assumptions and active limits, in words."""
    notes = [
        "energy-state model (Rutowski 1954; Bryson, Desai & Hoffman 1969): altitude and speed "
        "are traded instantly at constant energy; zooms take no time, no fuel and no distance, "
        "so the time is an optimistic estimate when zooms are long",
        f"{n_levels} energy levels, {prob.points} speeds per level, optimum refined by "
        f"a bracketing search; mass updated along the path ({passes} passes)",
        "distance = integral V / Ps dhe (cos(gamma) taken as 1); flight-path angle from "
        "dh/dt = Ps dh/dhe along the path (approximate)",
    ]
    if objective == "weighted":
        notes.append(f"weighted objective: fuel + {w:g} kg/s x time")
    notes += _active_limits(prob, path, integ)
    return notes


def _active_limits(prob, path, integ):
    """Say which limits the locus rides (the optimum sits on their boundary;
    :meth:`climbopt.envelope.Envelope.riding`)."""
    f = integ["fields"]
    fq = FlightQuantities(f.altitude_m, f.mach, f._pressure_pa, f.dynamic_pressure_pa, f.cl,
                          f.cl_max, 1.0)
    out = []
    for name, m in prob.limits.riding(fq).items():
        m = np.asarray(m, dtype=bool)
        if m.any():
            he = path.he[m]
            words = prob.limits.row(name).words
            out.append(f"path rides the {words} limit on {int(m.sum())} of {m.size} points "
                       f"(energy height {he.min():,.0f} to {he.max():,.0f} m)")
    return out
