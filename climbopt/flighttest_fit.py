"""The measured Ps surface and the measured aircraft: a smooth fit of standardised Ps over Mach
and altitude with bootstrap uncertainty, a model object that flies it, and the minimum-time
climb on it compared with the predicted one.

Surface (our own choice, reasons in docs/methods.md, section 6). With a predicted model the fit
is of the *difference* from the prediction, written as an excess-thrust coefficient::

    Ps_std(h, M) = Ps_pred,std(h, M) + (V_std q S / W_std) dC(M, h),   dC = d(T - D) / (q S)

with dC a low-order tensor Legendre polynomial in normalised Mach and altitude (default degree 2
in Mach, 1 in altitude). The prediction carries the shape that the data between altitude bands
cannot (the transonic drag rise, the thrust lapse); the data only have to fix a slowly varying
correction, which a few coefficients do without wiggles between bands, and which moves to any
mass, load factor and day unchanged (see :class:`MeasuredAircraftModel`). Without a predicted
model Ps_std itself is fitted (default degree 3 in Mach, 2 in altitude). Coefficients by linear
least squares; uncertainty by the bootstrap: the standardised points, one smoothing window apart
and so with independent noise, are resampled with replacement and the fit repeated (Efron &
Tibshirani, *An Introduction to the Bootstrap*, Chapman & Hall, 1993, ch. 9, "bootstrapping
pairs"). Beyond the tested Mach and altitude ranges dC is held at its value at the edge.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field, replace

import numpy as np
from numpy.polynomial import legendre

from climbopt.aircraft import AircraftModel
from climbopt.atmosphere import G0, standard_atmosphere
from climbopt.flighttest import ReducedPoints, StandardReference, reduce_history

__all__ = ["ClimbComparison", "MeasuredAircraftModel", "PsSurface", "compare_climbs",
           "equivalent_cd0_change", "fit_surface", "reduce_plan", "standard_reference"]


def standard_reference(plan) -> StandardReference:
    """The standard conditions and correction data of a test plan
    (:class:`climbopt.flighttest_io.FlightTestPlan`): its predicted scenario's aircraft on a
    standard day, or the stated induced-drag factor with no thrust correction."""
    if plan.predicted is None:
        return StandardReference(plan.standard_mass_kg, plan.reference_area_m2, None,
                                 plan.induced_drag_factor, None, [
                                     f"no predicted model: weight correction with the stated "
                                     f"induced-drag factor k = {plan.induced_drag_factor:g}; "
                                     "thrust change for temperature taken as zero"])
    from climbopt.aircraft import build_model

    scenario = plan.predicted
    standard_day = replace(scenario, atmosphere=replace(scenario.atmosphere,
                                                        temperature_offset_k=0.0))
    return StandardReference(plan.standard_mass_kg, plan.reference_area_m2,
                             build_model(standard_day), None, plan.rating, [
                                 f"weight and temperature corrections from the predicted model "
                                 f"({scenario.name}, rating {plan.rating!r}): drag polar and "
                                 "engine off-standard-day correction"])


def reduce_plan(plan, reference: StandardReference | None = None):
    """(reference, standardised points of every test point of ``plan``)."""
    reference = reference or standard_reference(plan)
    parts = [reduce_history(h, reference, plan.smoothing_window_s) for h in plan.histories]
    return reference, ReducedPoints.concatenate(parts)


@dataclass
class PsSurface:
    """Fitted standard-day, standard-weight, 1 g Ps over model altitude [m] and Mach.

    ``coefficients`` (p,) of the Legendre basis, ``samples`` (B, p) bootstrap coefficient sets,
    ``mach_range`` and ``altitude_range_m`` the tested ranges (the normalisation interval), and
    the fit statistics ``residual_rms_m_s``, ``points`` and ``parameters``.
    ``difference`` is True when the fit is of dC relative to ``reference.model``.
    """

    reference: StandardReference
    mach_degree: int
    altitude_degree: int
    mach_range: tuple[float, float]
    altitude_range_m: tuple[float, float]
    coefficients: np.ndarray
    samples: np.ndarray = field(default_factory=lambda: np.zeros((0, 0)))
    residual_rms_m_s: float = math.nan
    points: int = 0

    @property
    def difference(self) -> bool:
        """True when the surface is the predicted Ps plus a fitted excess-thrust coefficient."""
        return self.reference.model is not None

    @property
    def parameters(self) -> int:
        """Number of fitted coefficients."""
        return (self.mach_degree + 1) * (self.altitude_degree + 1)

    def _basis(self, altitude_m, mach):
        """Legendre products at normalised (Mach, altitude), shape (..., p); for CasADi
        symbols a list of the p products (same order)."""
        if _is_casadi(mach) or _is_casadi(altitude_m):
            return self._basis_casadi(altitude_m, mach)

        def norm(x, lo_hi):
            lo, hi = lo_hi
            u = (2.0 * np.asarray(x, dtype=float) - (lo + hi)) / max(hi - lo, 1e-12)
            return np.clip(u, -1.0, 1.0) if self.difference else u

        x, y = np.broadcast_arrays(norm(mach, self.mach_range),
                                   norm(altitude_m, self.altitude_range_m))
        vx = legendre.legvander(x, self.mach_degree)[..., :, None]
        vy = legendre.legvander(y, self.altitude_degree)[..., None, :]
        return (vx * vy).reshape(x.shape + (self.parameters,))

    def _basis_casadi(self, altitude_m, mach):
        """The Legendre products of :meth:`_basis` on CasADi symbols (Bonnet's recurrence
        (n + 1) P_{n+1} = (2n + 1) u P_n - n P_{n-1}; normalised values held at the tested
        range's edge like the numpy path)."""
        import casadi as ca

        def polys(x, lo_hi, degree):
            lo, hi = lo_hi
            u = (2.0 * x - (lo + hi)) / max(hi - lo, 1e-12)
            u = ca.fmin(ca.fmax(u, -1.0), 1.0) if self.difference else u
            p = [1.0, u]
            for n in range(1, degree):
                p.append(((2 * n + 1) * u * p[n] - n * p[n - 1]) / (n + 1))
            return p[:degree + 1]

        px = polys(mach, self.mach_range, self.mach_degree)
        py = polys(altitude_m, self.altitude_range_m, self.altitude_degree)
        return [a * b for a in px for b in py]

    def _baseline_scale(self, altitude_m, mach):
        """(predicted standard Ps [m/s], V_std q S / W_std [m/s]); (0, 1) without a model."""
        ref = self.reference
        if not self.difference:
            return 0.0, 1.0
        atm = standard_atmosphere(altitude_m)
        v = np.asarray(mach) * atm.speed_of_sound_m_s
        perf = ref.model.evaluate(altitude_m, v, ref.standard_mass_kg, 1.0, 1.0, ref.rating,
                                  check=False)
        return perf.ps_m_s, v * perf.dynamic_pressure_pa * ref.reference_area_m2 / (
            ref.standard_mass_kg * G0)

    def predicted_ps_std(self, altitude_m, mach):
        """The predicted model's standard-day Ps [m/s] at standard weight, 1 g (NaN without a
        predicted model)."""
        if not self.difference:
            return np.full(np.broadcast(altitude_m, mach).shape, np.nan)
        return self._baseline_scale(altitude_m, mach)[0]

    def delta_coefficient(self, altitude_m, mach, coefficients=None):
        """Fitted excess-thrust coefficient change dC = d(T - D) / (q S) [-] (difference fits;
        numpy arrays or CasADi symbols)."""
        c = self.coefficients if coefficients is None else coefficients
        basis = self._basis(altitude_m, mach)
        if isinstance(basis, list):
            return sum(float(ci) * b for ci, b in zip(c, basis, strict=True))
        return basis @ c

    def ps_std(self, altitude_m, mach, coefficients=None):
        """Standardised Ps [m/s] at model altitude [m] and Mach (the fit, or a bootstrap set)."""
        base, scale = self._baseline_scale(altitude_m, mach)
        return base + scale * self.delta_coefficient(altitude_m, mach, coefficients)

    def sigma(self, altitude_m, mach):
        """One-sigma bootstrap spread of :meth:`ps_std` [m/s] (NaN without samples)."""
        if self.samples.size == 0:
            return np.full(np.broadcast(altitude_m, mach).shape, np.nan)
        _, scale = self._baseline_scale(altitude_m, mach)
        spread = np.std(self._basis(altitude_m, mach) @ self.samples.T, axis=-1, ddof=1)
        return np.abs(scale) * spread


def _design(surface: PsSurface, points: ReducedPoints):
    base, scale = surface._baseline_scale(points.altitude_m, points.mach)
    a = surface._basis(points.altitude_m, points.mach) * np.asarray(scale)[..., None]
    return a, points.ps_std_m_s - base


def fit_surface(points: ReducedPoints, reference: StandardReference, *,
                mach_degree: int | None = None, altitude_degree: int | None = None,
                bootstrap: int = 400, seed: int = 0) -> PsSurface:
    """Least-squares Ps surface through standardised points, with ``bootstrap`` resampled fits
    (module docstring). Raises ValueError when there are fewer points than coefficients."""
    diff = reference.model is not None
    md = (2 if diff else 3) if mach_degree is None else int(mach_degree)
    ad = (1 if diff else 2) if altitude_degree is None else int(altitude_degree)
    surface = PsSurface(reference, md, ad,
                        (float(points.mach.min()), float(points.mach.max())),
                        (float(points.altitude_m.min()), float(points.altitude_m.max())),
                        np.zeros((md + 1) * (ad + 1)))
    n, p = len(points), surface.parameters
    if n <= p:
        raise ValueError(f"{n} standardised points cannot fit a surface with {p} coefficients "
                         f"(Mach degree {md}, altitude degree {ad}); fly more test points or "
                         f"lower the degrees")
    a, y = _design(surface, points)
    surface.coefficients = np.linalg.lstsq(a, y, rcond=None)[0]
    resid = y - a @ surface.coefficients
    surface.residual_rms_m_s = float(np.sqrt(np.sum(resid**2) / (n - p)))
    surface.points = n
    rng = np.random.default_rng(seed)
    samples = np.empty((bootstrap, p))
    for b in range(bootstrap):
        i = rng.integers(0, n, n)
        samples[b] = np.linalg.lstsq(a[i], y[i], rcond=None)[0]
    surface.samples = samples
    return surface


def equivalent_cd0_change(surface: PsSurface, altitude_m, mach):
    """The fitted dC expressed as a zero-lift drag change relative to the predicted CD0(M):
    -dC / CD0(M) [-] at the given points, for the fit and each bootstrap set (rows).

    Returns ``(fit, samples)``; the sign makes more drag positive."""
    model = surface.reference.model
    if model is None:
        raise ValueError("the drag equivalent needs a predicted model")
    cd0 = model.drag_coefficient(0.0, mach, check=False)
    fit = -surface.delta_coefficient(altitude_m, mach) / cd0
    samples = -(surface._basis(altitude_m, mach) @ surface.samples.T).T / cd0
    return fit, samples


class MeasuredAircraftModel(AircraftModel):
    """The predicted aircraft with the measured Ps: same atmosphere, domain, limits, polar and
    fuel flow, but a net thrust raised by the measured excess-thrust change,

        T = T_pred(h, M, throttle) + q S dC(M, h),   q = gamma p M^2 / 2 (gamma = 1.4),

    so that Ps = Ps_pred(h, V, m, n, throttle) + V q S dC(M, h) / (m g0): the measured
    standard-day Ps moved to the mass, load factor and day asked for with the same relation
    (and the same predicted dT, dD) that standardised it (FTM-108 ch. 7, from memory;
    derivation in docs/methods.md, section 6). The change is attributed to drag, so it does
    not scale with throttle. Every method of :class:`climbopt.aircraft.AircraftModel` uses it,
    on numpy and on CasADi, so the energy-state solver, the flown schedules and the collocation
    solver all fly the measured aircraft.
    """

    def __init__(self, predicted, surface: PsSurface, coefficients=None):
        if not surface.difference:
            raise ValueError("the measured aircraft needs a surface fitted against a predicted "
                             "model")
        # the predicted model's fits and settings, without its cached CasADi functions
        self.__dict__.update({k: v for k, v in predicted.__dict__.items()
                              if k != "_force_functions"})
        self.predicted = predicted
        self.surface = surface
        self.coefficients = surface.coefficients if coefficients is None else coefficients
        self.name = f"{predicted.name} (measured Ps)"

    def engine(self, altitude_m, mach, throttle=1.0, rating: str | None = None, **kw):
        """Net thrust [N] with the measured change, and the predicted fuel flow [kg/s] (every
        engine path of the model goes through here: numpy, CasADi, the collocation's
        parametrised graph; under a rating schedule each step's call adds it, with weights
        summing to one)."""
        thrust, fuel = super().engine(altitude_m, mach, throttle, rating, **kw)
        if rating is None and self.scheduled:
            return thrust, fuel
        q = 0.7 * self.atmosphere(altitude_m).pressure_pa * mach * mach
        dc = self.surface.delta_coefficient(altitude_m, mach, self.coefficients)
        return thrust + q * self.reference_area_m2 * dc, fuel


def _is_casadi(x) -> bool:
    from climbopt.fits import is_casadi

    return is_casadi(x)


@dataclass
class ClimbComparison:
    """Minimum-time energy-state climbs of the predicted and the measured aircraft, and the best
    flyable constant CAS/Mach schedule of each (``predicted_schedule``, ``measured_schedule``:
    :func:`climbopt.procedure.best_schedule` flown through each model; None when none is
    flyable).

    ``time_sigma_s`` is the one-sigma spread of the measured time over the bootstrap surfaces
    (re-solved on a coarser grid, ``bootstrap_grid``), ``time_interval_s`` its 2.5-97.5 %
    percentiles shifted to the full-grid answer; ``extrapolated_fraction`` the share of the
    measured path's points outside the tested altitude or Mach range.
    """

    predicted: object
    measured: object
    time_sigma_s: float
    time_interval_s: tuple[float, float]
    bootstrap_solves: int
    bootstrap_failures: int
    bootstrap_grid: tuple[int, int]
    extrapolated_fraction: float
    notes: list[str] = field(default_factory=list)
    predicted_schedule: object = None
    measured_schedule: object = None

    @property
    def time_difference_s(self) -> float:
        """Measured minus predicted minimum time [s]."""
        return float(self.measured.table["time_s"][-1] - self.predicted.table["time_s"][-1])


def compare_climbs(scenario, predicted_model, surface: PsSurface, *, bootstrap: int = 30,
                   bootstrap_grid: tuple[int, int] = (120, 120), progress=None) -> ClimbComparison:
    """Minimum-time energy-state climb of ``scenario`` on the predicted and on the measured
    aircraft, and the measured time's bootstrap spread (``bootstrap`` re-solves on surfaces of
    the bootstrap sets, on a ``bootstrap_grid`` grid of energy levels x speeds)."""
    from climbopt.rutowski import InfeasibleMission, solve_energy_state

    predicted = solve_energy_state(scenario, "time", model=predicted_model)
    measured_model = MeasuredAircraftModel(predicted_model, surface)
    measured = solve_energy_state(scenario, "time", model=measured_model)
    coarse = replace(scenario, solver=replace(scenario.solver,
                                              grid_altitude_points=bootstrap_grid[0],
                                              grid_speed_points=bootstrap_grid[1]))
    nominal = solve_energy_state(coarse, "time", model=measured_model).table["time_s"][-1]
    times, failures = [], 0
    for b, coeffs in enumerate(surface.samples[:bootstrap]):
        if progress:
            progress(f"bootstrap climb {b + 1}/{bootstrap}", (b + 1) / max(bootstrap, 1))
        try:
            sol = solve_energy_state(coarse, "time",
                                     model=MeasuredAircraftModel(predicted_model, surface, coeffs))
            times.append(sol.table["time_s"][-1])
        except InfeasibleMission:
            failures += 1
    t_full = measured.table["time_s"][-1]
    times = np.asarray(times)
    sigma = float(np.std(times, ddof=1)) if times.size > 1 else math.nan
    interval = ((float(np.percentile(times, 2.5) - nominal + t_full),
                 float(np.percentile(times, 97.5) - nominal + t_full))
                if times.size > 1 else (math.nan, math.nan))
    tab = measured.table
    (h_lo, h_hi), (m_lo, m_hi) = surface.altitude_range_m, surface.mach_range
    outside = ((tab["altitude_m"] < h_lo) | (tab["altitude_m"] > h_hi)
               | (tab["mach"] < m_lo) | (tab["mach"] > m_hi))
    notes = [f"bootstrap: {times.size} of {bootstrap} re-solves on {bootstrap_grid[0]} x "
             f"{bootstrap_grid[1]} grids" + (f", {failures} infeasible" if failures else "")]
    schedules = []
    for model, climb in ((predicted_model, predicted), (measured_model, measured)):
        schedules.append(_best_schedule(scenario, model, climb, notes))
    return ClimbComparison(predicted, measured, sigma, interval, int(times.size), failures,
                           tuple(bootstrap_grid), float(np.mean(outside)), notes, *schedules)


def _best_schedule(scenario, model, climb, notes):
    """The best flyable minimum-time schedule on ``model`` (None, with a note, if none is)."""
    from climbopt.procedure import ScheduleNotFlyable, best_schedule

    try:
        return best_schedule(scenario, model, "time", reference=climb)
    except ScheduleNotFlyable as exc:
        notes.append(f"no flyable schedule on the {model.name}: {exc}")
        return None

