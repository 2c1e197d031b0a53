"""Aircraft model shared by both solvers: drag polar, CLmax, engine ratings, in a standard atmosphere.

Every method accepts numpy arrays/floats (broadcast together) or CasADi MX symbols, and both
paths evaluate the same C2 spline fits (:mod:`climbopt.fits`), so the energy-state maps and the
collocation solver see one and the same aircraft.

Conventions
-----------
* Engine tables are over Mach and pressure altitude at full rating; ``throttle`` scales thrust
  (or shaft power) linearly, and fuel flow in proportion (constant specific consumption at a
  given altitude and Mach; common practice, no source).
* Off-standard days: at a fixed pressure altitude and Mach, thrust (or shaft power) is taken
  proportional to the density ratio, i.e. multiplied by ``T_std / T`` (theta correction of
  corrected thrust T/delta held constant with a density lapse; common practice, no source), and
  specific fuel consumption proportional to ``sqrt(T / T_std)`` (corrected TSFC; common
  practice, no source). With a zero offset both factors are exactly 1.
* Propeller thrust = eta(M) * P_shaft / V_true (e.g. Anderson, *Aircraft Performance and Design*,
  1999, sec. 3.3). It is only defined above a small speed, so a propeller model's Mach domain
  starts at ``PROPELLER_MIN_MACH``.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from climbopt.atmosphere import G0, SmoothAtmosphere
from climbopt.fits import Fit1D, Fit2D, ModelDomainError, is_casadi, smoothstep
from climbopt.scenario import Rating, Scenario

__all__ = ["AircraftModel", "Domain", "ModelDomainError", "PointPerformance", "build_model",
           "fast_scalar_function", "wind_at"]

#: Half-width of the blend between two ratings of a rating schedule around each change
#: altitude [m] (see :meth:`AircraftModel.rating_weights`).
RATING_BLEND_M = 30.0

#: Lowest Mach number at which the propeller thrust model T = eta P / V is used.
PROPELLER_MIN_MACH = 0.05


@dataclass(frozen=True)
class Domain:
    """A rectangle in pressure altitude [m] x Mach."""

    altitude_min_m: float
    altitude_max_m: float
    mach_min: float
    mach_max: float


@dataclass(frozen=True)
class PointPerformance:
    """Forces and rates at flight points (numpy arrays, SI).

    ``ps_m_s`` is specific excess power V (T - D) / (m g0) [m/s] (e.g. Anderson 1999, eq. 6.5).
    """

    mach: np.ndarray
    dynamic_pressure_pa: np.ndarray
    cl: np.ndarray
    cd: np.ndarray
    drag_n: np.ndarray
    thrust_n: np.ndarray
    fuel_flow_kg_s: np.ndarray
    ps_m_s: np.ndarray


class _RatingFits:
    """Fits of one engine rating."""

    def __init__(self, rating: Rating):
        self.name = rating.name
        self.kind = rating.kind
        self.tsfc_kg_per_n_s = rating.tsfc_kg_per_n_s
        self.psfc_kg_per_w_s = rating.psfc_kg_per_w_s
        main = rating.thrust_n if rating.kind == "jet" else rating.shaft_power_w
        label = "thrust" if rating.kind == "jet" else "shaft power"
        self.main = Fit2D(main.mach, main.altitude_m, main.values,
                          f"{label}[{rating.name}](Mach,altitude)", "Mach", "altitude [m]")
        self.eta = None
        if rating.kind == "propeller":
            self.eta = Fit1D(rating.propeller_efficiency.mach, rating.propeller_efficiency.values,
                             f"propeller efficiency[{rating.name}](Mach)")
        self.fuel = None
        if rating.fuel_flow_kg_s is not None:
            t = rating.fuel_flow_kg_s
            self.fuel = Fit2D(t.mach, t.altitude_m, t.values,
                              f"fuel flow[{rating.name}](Mach,altitude)", "Mach", "altitude [m]")
        #: thrust (or power) and fuel flow share one Mach x altitude grid: one basis serves both
        self.shared_grid = self.fuel is not None and self.main.same_grid(self.fuel)
        self.domain = _intersect(
            Domain(self.main.data_v.low, self.main.data_v.high,
                   self.main.data_u.low, self.main.data_u.high),
            None if self.fuel is None else Domain(self.fuel.data_v.low, self.fuel.data_v.high,
                                                  self.fuel.data_u.low, self.fuel.data_u.high),
        )
        if self.eta is not None:
            lo = max(self.domain.mach_min, self.eta.data.low, PROPELLER_MIN_MACH)
            self.domain = Domain(self.domain.altitude_min_m, self.domain.altitude_max_m,
                                 lo, min(self.domain.mach_max, self.eta.data.high))


def _intersect(a: Domain, b: Domain | None) -> Domain:
    if b is None:
        return a
    return Domain(max(a.altitude_min_m, b.altitude_min_m), min(a.altitude_max_m, b.altitude_max_m),
                  max(a.mach_min, b.mach_min), min(a.mach_max, b.mach_max))


def _sqrt(x):
    if is_casadi(x):
        import casadi as ca

        return ca.sqrt(x)
    return np.sqrt(x)


class AircraftModel:
    """The aircraft and its air: build with :func:`build_model`.

    Attributes
    ----------
    reference_area_m2 : float
        Wing reference area [m^2].
    mass_kg : float
        Start mass [kg].
    atmosphere : SmoothAtmosphere
        C2 US Standard Atmosphere 1976 twin with the scenario's temperature offset.
    domain : Domain
        Where all tables used by the default rating have data (intersection over aero tables
        and the rating's engine tables).
    fit_domain : Domain
        The wider rectangle over which the fits are defined (data plus margins).
    """

    def __init__(self, scenario: Scenario):
        ac = scenario.aircraft
        prop = scenario.propulsion
        self.name = ac.name
        self.reference_area_m2 = float(ac.reference_area_m2)
        self.mass_kg = float(ac.mass_kg)
        self.fuel_capacity_kg = ac.fuel_capacity_kg
        self.temperature_offset_k = float(scenario.atmosphere.temperature_offset_k)
        self.atmosphere = SmoothAtmosphere(self.temperature_offset_k)
        self._standard_day = SmoothAtmosphere(0.0)
        self.throttle_min = float(prop.throttle_min)
        self.throttle_max = float(prop.throttle_max)
        self.thrust_alignment = prop.thrust_alignment
        self.thrust_scale = float(prop.thrust_scale)
        self.default_rating = scenario.mission.rating or prop.default_rating
        steps = getattr(scenario.mission, "rating_schedule", ()) or ()
        #: (rating, up to altitude [m] or None, thrust fraction) of the mission's rating schedule
        self.rating_schedule = (tuple((st.rating, st.until_m, st.thrust_fraction) for st in steps)
                                or ((self.default_rating, None, 1.0),))
        self._wind = _WindFit(getattr(scenario.atmosphere, "wind", None))

        drag = ac.drag
        self.drag_kind = drag.kind
        if drag.kind == "parabolic":
            self._cd0 = Fit1D(drag.cd0.mach, drag.cd0.values, "CD0(Mach)")
            self._k = Fit1D(drag.k.mach, drag.k.values, "k(Mach)")
            aero_mach = [self._cd0.data, self._k.data]
            aero_fit = [self._cd0.fit, self._k.fit]
        else:
            self._cd_table = Fit2D(drag.cd_mach, drag.cd_cl, drag.cd_table, "CD(Mach,CL)",
                                   "Mach", "CL")
            aero_mach = [self._cd_table.data_u]
            aero_fit = [self._cd_table.fit_u]
        self._cl_max = Fit1D(ac.cl_max.mach, ac.cl_max.values, "CLmax(Mach)")
        aero_mach.append(self._cl_max.data)
        aero_fit.append(self._cl_max.fit)
        self._lift_slope = None
        if drag.lift_slope_per_rad is not None:
            t = drag.lift_slope_per_rad
            self._lift_slope = Fit1D(t.mach, t.values, "CL_alpha(Mach)")
            aero_mach.append(self._lift_slope.data)
            aero_fit.append(self._lift_slope.fit)

        self._ratings = {name: _RatingFits(r) for name, r in prop.ratings.items()}
        if self.default_rating not in self._ratings:
            raise KeyError(f"unknown rating {self.default_rating!r}")
        rd = self._ratings[self.default_rating].domain
        for name, _, _ in self.rating_schedule:  # every rating the mission uses has data
            rd = _intersect(rd, self._ratings[name].domain)
        self.domain = Domain(
            rd.altitude_min_m, rd.altitude_max_m,
            max([rd.mach_min] + [i.low for i in aero_mach]),
            min([rd.mach_max] + [i.high for i in aero_mach]),
        )
        main = self._ratings[self.default_rating].main
        self.fit_domain = Domain(
            main.fit_v.low, main.fit_v.high,
            max([main.fit_u.low] + [i.low for i in aero_fit]),
            min([main.fit_u.high] + [i.high for i in aero_fit]),
        )

    # ------------------------------------------------------------------ aerodynamics
    @property
    def has_lift_slope(self) -> bool:
        """True when the scenario gives CL_alpha(M) (needed for thrust along the body axis)."""
        return self._lift_slope is not None

    @property
    def ratings(self) -> tuple[str, ...]:
        """Names of the engine ratings."""
        return tuple(self._ratings)

    def drag_coefficient(self, cl, mach, *, check: bool = True):
        """Drag coefficient CD(CL, M) [-]: CD0(M) + k(M) CL^2, or the CD(CL, M) table fit."""
        if self.drag_kind == "parabolic":
            return self._cd0(mach, check=check) + self._k(mach, check=check) * cl**2
        return self._cd_table(mach, cl, check=check)

    def cl_max(self, mach, *, check: bool = True):
        """Maximum usable lift coefficient CLmax(M) [-] (stall or buffet onset)."""
        return self._cl_max(mach, check=check)

    def lift_slope_per_rad(self, mach, *, check: bool = True):
        """Lift-curve slope CL_alpha(M) [1/rad]."""
        if self._lift_slope is None:
            raise ValueError("the scenario gives no lift_slope table (aircraft.drag.lift_slope)")
        return self._lift_slope(mach, check=check)

    # ------------------------------------------------------------------ propulsion
    @property
    def scheduled(self) -> bool:
        """True when the mission's rating changes with altitude or is derated (then ``rating=None``
        in the engine methods means that schedule)."""
        return len(self.rating_schedule) > 1 or self.rating_schedule[0][2] != 1.0

    @property
    def rating_label(self) -> str:
        """The mission's rating in words, e.g. "'max' to 914 m, then 'climb' at 95 % thrust"."""
        words = []
        for name, until, frac in self.rating_schedule:
            w = f"'{name}'" + (f" at {100 * frac:g} % thrust" if frac != 1.0 else "")
            words.append(w + (f" to {until:,.0f} m" if until is not None else ""))
        return ", then ".join(words)

    def rating_weights(self, altitude_m):
        """Weight of each step of the rating schedule at altitude [m] (numpy or CasADi): 1 in
        its altitude band, 0 outside, blended with a C2 quintic step over
        :data:`RATING_BLEND_M` each side of each change altitude (so that the collocation
        solver's derivatives exist); the weights add up to 1."""
        ups = [u for _, u, _ in self.rating_schedule[:-1]]
        above = [smoothstep((altitude_m - u + RATING_BLEND_M) / (2.0 * RATING_BLEND_M))
                 for u in ups]  # 1 above the change, 0 below it
        lower = [1.0] + above
        upper = above + [0.0]
        return [lo - hi for lo, hi in zip(lower, upper, strict=True)]

    def _rating(self, rating: str | None) -> _RatingFits:
        name = rating or self.default_rating
        try:
            return self._ratings[name]
        except KeyError:
            raise ValueError(f"unknown engine rating {name!r}; known: {', '.join(self._ratings)}"
                             ) from None

    def _day_factors(self, altitude_m, offset_k, standard_temperature_k=None):
        """(thrust factor, sfc factor) for a temperature offset [K] (number or CasADi symbol);
        (1, 1) for a zero number. ``standard_temperature_k`` may be passed when known."""
        if not is_casadi(offset_k) and float(offset_k) == 0.0:
            return 1.0, 1.0
        t_std = standard_temperature_k
        if t_std is None:
            t_std = self._standard_day(altitude_m).temperature_k
        ratio = (t_std + offset_k) / t_std
        return 1.0 / ratio, _sqrt(ratio)

    def thrust_and_fuel_flow(self, altitude_m, mach, throttle=1.0, rating: str | None = None, *,
                             check: bool = True):
        """Net thrust [N] and fuel flow [kg/s] of all engines, evaluating each table once.

        Pressure altitude [m], Mach [-], throttle [-] (fraction of the rating).
        """
        return self.engine(altitude_m, mach, throttle, rating, check=check)

    def engine(self, altitude_m, mach, throttle=1.0, rating: str | None = None, *,
               thrust_scale=None, temperature_offset_k=None, standard_temperature_k=None,
               speed_of_sound_m_s=None, check: bool = True):
        """Net thrust [N] and fuel flow [kg/s] as :meth:`thrust_and_fuel_flow`, with the thrust
        scale [-] and the temperature offset [K] given (numbers or CasADi symbols; default: the
        model's own), so that one CasADi graph serves every value. ``standard_temperature_k``
        (standard-day temperature at the altitude [K]) and ``speed_of_sound_m_s`` (at the
        offset, propeller models) may be passed when the caller has them.
        """
        if rating is None and self.scheduled:
            return self._scheduled_engine(altitude_m, mach, throttle, thrust_scale=thrust_scale,
                                          temperature_offset_k=temperature_offset_k,
                                          standard_temperature_k=standard_temperature_k,
                                          speed_of_sound_m_s=speed_of_sound_m_s, check=check)
        r = self._rating(rating)
        if thrust_scale is None:
            thrust_scale = self.thrust_scale
        if temperature_offset_k is None:
            temperature_offset_k = self.temperature_offset_k
        thrust_factor, sfc_factor = self._day_factors(altitude_m, temperature_offset_k,
                                                      standard_temperature_k)
        scale = throttle * thrust_scale * thrust_factor
        fuel_table = None
        if r.shared_grid and not (is_casadi(mach) or is_casadi(altitude_m)):
            basis = r.main.basis(mach, altitude_m, check=check)  # one basis for both tables
            main, fuel_table = r.main.at(basis), r.fuel.at(basis)
        else:
            main = r.main(mach, altitude_m, check=check)
        main = main * scale  # thrust [N] or shaft power [W]
        if r.kind == "jet":
            thrust = main
        else:
            if speed_of_sound_m_s is None:
                speed_of_sound_m_s = self.atmosphere(altitude_m).speed_of_sound_m_s
            thrust = r.eta(mach, check=check) * main / (mach * speed_of_sound_m_s)
        if r.fuel is not None:
            if fuel_table is None:
                fuel_table = r.fuel(mach, altitude_m, check=check)
            fuel = fuel_table * (scale * sfc_factor)
        else:
            sfc = r.tsfc_kg_per_n_s if r.kind == "jet" else r.psfc_kg_per_w_s
            fuel = sfc * main * sfc_factor
        return thrust, fuel

    def _scheduled_engine(self, altitude_m, mach, throttle, **kw):
        """:meth:`engine` under the mission's rating schedule: each step's rating at its thrust
        fraction (as a throttle factor: fuel flow in proportion), weighted by
        :meth:`rating_weights`."""
        thrust = fuel = 0.0
        for (name, _, frac), w in zip(self.rating_schedule, self.rating_weights(altitude_m),
                                      strict=True):
            t, f = self.engine(altitude_m, mach, throttle * frac, name, **kw)
            thrust, fuel = thrust + w * t, fuel + w * f
        return thrust, fuel

    def thrust_n(self, altitude_m, mach, throttle=1.0, rating: str | None = None, *,
                 check: bool = True):
        """Net thrust of all engines [N] (see :meth:`thrust_and_fuel_flow`)."""
        return self.thrust_and_fuel_flow(altitude_m, mach, throttle, rating, check=check)[0]

    def fuel_flow_kg_s(self, altitude_m, mach, throttle=1.0, rating: str | None = None, *,
                       check: bool = True):
        """Fuel flow of all engines [kg/s] (see :meth:`thrust_and_fuel_flow`)."""
        return self.thrust_and_fuel_flow(altitude_m, mach, throttle, rating, check=check)[1]

    # ------------------------------------------------------------------ wind
    @property
    def has_wind(self) -> bool:
        """True when the scenario gives an along-track wind."""
        return self._wind.kind != "none"

    def wind_m_s(self, altitude_m):
        """Along-track wind [m/s] (positive: tailwind) at altitude [m] (numpy or CasADi): zero,
        the scenario's constant, or its table (see :class:`_WindFit`). Ground speed is the true
        airspeed's horizontal component plus this (air-mass physics: the wind moves the air,
        so time and fuel of a climb do not depend on it, its ground distance does)."""
        return self._wind(altitude_m)

    # ------------------------------------------------------------------ domain
    def in_domain(self, altitude_m, mach) -> np.ndarray:
        """Boolean mask: True where (altitude, Mach) lies inside every table's data."""
        h = np.asarray(altitude_m, dtype=float)
        m = np.asarray(mach, dtype=float)
        d = self.domain
        return (h >= d.altitude_min_m) & (h <= d.altitude_max_m) & (m >= d.mach_min) & (m <= d.mach_max)

    # ------------------------------------------------------------------ point performance
    def evaluate(self, altitude_m, tas_m_s, mass_kg, load_factor=1.0, throttle=1.0,
                 rating: str | None = None, *, check: bool = True) -> PointPerformance:
        """Forces and specific excess power at flight points (numpy only).

        Lift equals ``load_factor`` times weight: CL = n m g0 / (q S); D = q S CD(CL, M);
        Ps = V (T - D) / (m g0) [m/s] (energy-state method; Rutowski, J. Aeronaut. Sci. 21(3),
        1954). With ``check=False`` points outside the fits are clipped (mask them yourself
        with :meth:`in_domain`).
        """
        h = np.asarray(altitude_m, dtype=float)
        v = np.asarray(tas_m_s, dtype=float)
        atm = self.atmosphere(h)
        mach = v / atm.speed_of_sound_m_s
        q = 0.5 * atm.density_kg_m3 * v**2
        weight = np.asarray(mass_kg, dtype=float) * G0
        with np.errstate(divide="ignore", invalid="ignore"):
            cl = load_factor * weight / (q * self.reference_area_m2)
        cd = self.drag_coefficient(cl, mach, check=check)
        drag = q * self.reference_area_m2 * cd
        thrust, fuel = self.thrust_and_fuel_flow(h, mach, throttle, rating, check=check)
        ps = v * (thrust - drag) / weight
        return PointPerformance(mach, q, cl, cd, drag, thrust, fuel, ps)

    def force_function(self, rating: str | None = None, *, body: bool | None = None):
        """CasADi Function (h, V, CL, throttle) -> [Mach, q, p, L, D, T, fuel flow, alpha_T].

        Altitude [m], TAS [m/s], lift coefficient [-], throttle [-] in; Mach [-], dynamic
        pressure [Pa], static pressure [Pa], lift [N], drag [N], thrust [N], fuel flow [kg/s]
        and the angle between thrust and velocity [rad] (CL / CL_alpha(M) when ``body`` is
        True, i.e. thrust along the body axis; 0 otherwise; default: the model's alignment)
        out. The tables are the model's own spline fits (the same coefficients as its numpy
        path, see :mod:`climbopt.fits`); CasADi is used for scalar evaluation in integrators
        because, called through :func:`fast_scalar_function`, it is about ten times faster
        than the numpy spline wrappers on scalars. Built once per rating and alignment.
        """
        import casadi as ca

        from climbopt.staging import staged

        if body is None:
            body = self.thrust_alignment == "body"
        key = (rating or (None if self.scheduled else self.default_rating), bool(body))
        cache = self.__dict__.setdefault("_force_functions", {})
        if key in cache:
            return cache[key]
        S = self.reference_area_m2

        def forces(h, v, cl, thr):
            atm = self.atmosphere(h)
            mach = v / atm.speed_of_sound_m_s
            q = 0.5 * atm.density_kg_m3 * v * v
            thrust, ff = self.thrust_and_fuel_flow(h, mach, thr, key[0])
            alpha = cl / self.lift_slope_per_rad(mach) if body else ca.SX(0.0)
            return [ca.vertcat(mach, q, atm.pressure_pa, q * S * cl,
                               q * S * self.drag_coefficient(cl, mach), thrust, ff, alpha)]

        cache[key] = staged("forces", ("h", "v", "cl", "thr"), forces)
        return cache[key]

    def specific_excess_power_m_s(self, altitude_m, tas_m_s, mass_kg, load_factor=1.0,
                                  throttle=1.0, rating: str | None = None, *, check: bool = True):
        """Specific excess power Ps = V (T - D) / (m g0) [m/s] (see :meth:`evaluate`)."""
        return self.evaluate(altitude_m, tas_m_s, mass_kg, load_factor, throttle, rating,
                             check=check).ps_m_s


def wind_at(model, altitude_m):
    """Along-track wind [m/s] at altitude [m] of ``model`` (numpy): its
    :meth:`AircraftModel.wind_m_s`, or 0 when it has no wind (also for stand-in models
    without one), without evaluating a fit then (solvers call this in their inner loops)."""
    return model.wind_m_s(altitude_m) if getattr(model, "has_wind", False) else 0.0


def fast_scalar_function(function):
    """Fast evaluation of a CasADi Function of scalar inputs with one vector output.

    Returns ``call(*args) -> numpy array`` (a fresh copy per call). The inputs are packed into
    one vector argument and evaluated through the Function's preallocated buffers
    (``Function.buffer``), about ten times less call overhead than a plain call; where that
    interface is missing, plain calls are used. For integrators that call the model once per
    stage (the re-simulation check, flown schedules).
    """
    import casadi as ca

    n_in = function.n_in()
    x = ca.MX.sym("x", n_in)
    packed = ca.Function("packed", [x], [function(*(x[i] for i in range(n_in)))])
    try:
        buf, evaluate = packed.buffer()
    except (AttributeError, RuntimeError, NotImplementedError):  # pragma: no cover
        return lambda *a: np.asarray(packed(np.array(a))).ravel()
    arg = np.zeros(n_in)
    res = np.zeros(packed.size1_out(0))
    buf.set_arg(0, memoryview(arg))
    buf.set_res(0, memoryview(res))

    def call(*a):
        arg[:] = a
        evaluate()
        return res.copy()

    call._keep = (buf, arg, res, packed)  # keep the buffers alive with the closure
    return call


def build_model(scenario: Scenario) -> AircraftModel:
    """Build the shared aircraft model (fits are made once here)."""
    return AircraftModel(scenario)


class _WindFit:
    """Along-track wind against altitude: none, a constant, or a C2 fit of the table (monotone
    PCHIP samples through a cubic spline, :class:`climbopt.fits.Fit1D`), held at the end values
    beyond the table (the table is padded with its end values 10 km beyond each end before
    fitting, so the fit is flat there)."""

    def __init__(self, wind):
        self.kind, self.value, self.fit = "none", 0.0, None
        if wind is None:
            return
        if not wind.altitude_m or len(wind.altitude_m) == 1:
            self.kind, self.value = "constant", float(wind.along_track_m_s[0])
            return
        h = np.asarray(wind.altitude_m, dtype=float)
        w = np.asarray(wind.along_track_m_s, dtype=float)
        h = np.concatenate([[h[0] - 10_000.0], h, [h[-1] + 10_000.0]])
        w = np.concatenate([[w[0]], w, [w[-1]]])
        self.kind, self.fit = "table", Fit1D(h, w, "wind(altitude)")

    def __call__(self, altitude_m):
        if self.kind == "table":
            return self.fit(altitude_m, check=False)
        if is_casadi(altitude_m):
            return 0.0 * altitude_m + self.value
        return np.full(np.shape(altitude_m), self.value) if np.ndim(altitude_m) else self.value
