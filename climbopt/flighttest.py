"""Flight-test reduction of measured specific excess power (Ps): smoothing and differentiation of
the time histories, tapeline correction, Ps at test conditions and its standardisation to
standard weight, standard day and 1 g. Pure functions, SI inside; reading and validating the
files is :mod:`climbopt.flighttest_io`, the fitted Ps surface :mod:`climbopt.flighttest_fit`.

Method (symbols in SI; Hp pressure altitude, geopotential, as an altimeter set to 1013.25 hPa
reads it; T static air temperature; V true airspeed; W weight):

* **Smoothing and derivatives**: Savitzky-Golay filter (Savitzky & Golay, Analytical Chemistry
  36(8), 1964) through :func:`scipy.signal.savgol_filter`: a cubic least-squares polynomial over a
  moving window of ``window_s`` seconds, evaluated (and differentiated) at its centre; at the ends
  of a history the polynomial fitted to the first/last window is used. The filter is exact for
  cubic signals (its first derivative even for quartics); :func:`derivative_bias_bound` bounds
  the bias on any other signal. Histories are resampled onto a uniform time grid first (linear
  interpolation, needed by the filter; the validator keeps gaps short).
* **Tapeline correction**: on a non-standard day a pressure-altitude change dHp is a true height
  change dh = dHp T / T_std(Hp) (hydrostatic equation with the test-day temperature; common
  practice, no source). Gravity is taken as g0 throughout, as in the energy-state model.
* **Ps at test conditions**: Ps = dh/dt + (V / g0) dV/dt (energy height rate; level
  acceleration: dh/dt ~ 0; sawtooth climb: both terms). Both terms are always used.
* **Standardisation** at the same pressure altitude and Mach (so the dynamic pressure, and with
  it the drag at a given lift coefficient, is the same on both days), from memory after US Naval
  Test Pilot School, *Fixed Wing Performance*, Flight Test Manual FTM-108, ch. 7::

      Ps_std = Ps_test (W_test / W_std)(V_std / V_test) + (V_std / W_std)(dT - dD)

  with V = M a(T), dD = D_std - D_test the drag change for the lift change from n W_test to
  W_std (from the predicted drag polar, or a stated induced-drag factor k: dD = k q S (CL_std^2 -
  CL_test^2)) and dT = T_std - T_test the thrust change for the temperature difference (from the
  predicted engine model and its off-standard-day correction, thrust proportional to
  T_std / T at a fixed pressure altitude and Mach as in :mod:`climbopt.aircraft`; zero when no
  engine model is given, which is then stated). The relation is exact algebra of
  Ps = V (T - D) / W; the physics is in dT and dD.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
from scipy.signal import savgol_coeffs, savgol_filter

from climbopt.airspeed import mach_from_cas
from climbopt.atmosphere import (G0, GAMMA_AIR, R_AIR, geometric_from_geopotential,
                                 standard_atmosphere)

__all__ = [
    "POLYORDER",
    "FlightHistory",
    "ReducedPoints",
    "StandardReference",
    "correct_ps",
    "derivative_bias_bound",
    "derivative_noise_gain",
    "ps_at_test",
    "reduce_history",
    "smooth_and_differentiate",
    "standardise",
    "tapeline_rate",
    "thrust_at_temperature",
    "uniform_time",
    "window_samples",
]

#: Degree of the Savitzky-Golay polynomial (cubic: exact for cubic histories, its first
#: derivative exact for quartics).
POLYORDER = 3


@dataclass(frozen=True)
class FlightHistory:
    """One test point's time history in SI, as read from its CSV (see flighttest-format.md).

    ``pressure_altitude_m`` is geopotential pressure altitude [m]; exactly one of ``cas_m_s``
    [m/s] and ``mach`` [-] is given; ``oat_k`` static air temperature [K]; ``mass_kg`` gross
    mass [kg] (gross weight / g0); ``load_factor`` normal load factor [-] (1 when not recorded);
    ``heading_rad`` [rad] or None. ``kind`` is "level_acceleration" or "sawtooth_climb".
    """

    name: str
    kind: str
    time_s: np.ndarray
    pressure_altitude_m: np.ndarray
    oat_k: np.ndarray
    mass_kg: np.ndarray
    cas_m_s: np.ndarray | None = None
    mach: np.ndarray | None = None
    load_factor: np.ndarray | None = None
    heading_rad: np.ndarray | None = None


# ------------------------------------------------------------------------------ smoothing


def window_samples(window_s: float, dt_s: float) -> int:
    """Odd number of samples spanning about ``window_s`` [s] at spacing ``dt_s`` [s] (at least
    POLYORDER + 2 = 5, so that the cubic is over-determined)."""
    n = int(round(window_s / dt_s))
    n = max(n, POLYORDER + 2)
    return n if n % 2 == 1 else n + 1


def smooth_and_differentiate(y, dt_s: float, window_s: float):
    """Smoothed signal and its time derivative (Savitzky-Golay, cubic, see the module docstring).

    ``y`` sampled uniformly at ``dt_s`` [s]; returns ``(y_smooth, dy/dt)`` in y's units and
    y's units per second. Raises ValueError when the history is shorter than one window.
    """
    y = np.asarray(y, dtype=float)
    n = window_samples(window_s, dt_s)
    if y.size < n:
        raise ValueError(f"history of {y.size} samples is shorter than the smoothing window "
                         f"({n} samples = {n * dt_s:.1f} s)")
    ys = savgol_filter(y, n, POLYORDER, deriv=0, mode="interp")
    dy = savgol_filter(y, n, POLYORDER, deriv=1, delta=dt_s, mode="interp")
    return ys, dy


def derivative_noise_gain(window_s: float, dt_s: float) -> float:
    """sigma(dy/dt) / sigma(y) [1/s] of the window-centre derivative for white noise on y:
    sqrt(sum c_j^2) / dt with c_j the Savitzky-Golay derivative coefficients."""
    c = savgol_coeffs(window_samples(window_s, dt_s), POLYORDER, deriv=1, delta=dt_s)
    return float(np.sqrt(np.sum(c**2)))


def derivative_bias_bound(window_s: float, dt_s: float, max_abs_fifth_derivative: float) -> float:
    """Upper bound of |estimated - true| first derivative at a window centre [units/s].

    The cubic Savitzky-Golay derivative is a linear functional L[y] = sum c_j y(t_j) that is
    exact for polynomials up to degree 4 (symmetric window), so by Taylor's theorem with the
    Lagrange remainder |L[y] - y'(0)| <= max|y^(5)| / 5! * sum |c_j| |t_j|^5 (our derivation).
    ``max_abs_fifth_derivative`` in units/s^5.
    """
    n = window_samples(window_s, dt_s)
    c = savgol_coeffs(n, POLYORDER, deriv=1, delta=dt_s, use="dot")
    t = (np.arange(n) - (n - 1) / 2) * dt_s
    return float(max_abs_fifth_derivative / 120.0 * np.sum(np.abs(c) * np.abs(t) ** 5))


def uniform_time(time_s):
    """(uniform time grid, spacing [s]) covering ``time_s`` at its median sample spacing."""
    t = np.asarray(time_s, dtype=float)
    dt = float(np.median(np.diff(t)))
    n = int(np.floor((t[-1] - t[0]) / dt + 1e-9)) + 1
    return t[0] + dt * np.arange(n), dt


# ------------------------------------------------------------------------------ Ps relations


def tapeline_rate(pressure_altitude_rate_m_s, oat_k, pressure_altitude_m):
    """True (tapeline) climb rate dh/dt = dHp/dt T / T_std(Hp) [m/s] (common practice, no
    source): pressure-altitude rate [m/s], static air temperature [K], pressure altitude [m,
    geopotential]."""
    t_std = standard_atmosphere(geometric_from_geopotential(pressure_altitude_m)).temperature_k
    return np.asarray(pressure_altitude_rate_m_s) * np.asarray(oat_k) / t_std


def ps_at_test(climb_rate_m_s, tas_m_s, acceleration_m_s2):
    """Specific excess power at test conditions Ps = dh/dt + (V / g0) dV/dt [m/s] (energy-height
    rate; Rutowski, J. Aeronaut. Sci. 21(3), 1954): tapeline climb rate [m/s], true airspeed
    [m/s], its time derivative [m/s^2]."""
    return np.asarray(climb_rate_m_s) + np.asarray(tas_m_s) / G0 * np.asarray(acceleration_m_s2)


def correct_ps(ps_m_s, tas_from_m_s, weight_from_n, tas_to_m_s, weight_to_n,
               thrust_change_n=0.0, drag_change_n=0.0):
    """Ps moved from one flight condition to another at the same pressure altitude and Mach:

        Ps_to = Ps_from (W_from / W_to)(V_to / V_from) + (V_to / W_to)(dT - dD)

    (US Naval Test Pilot School FTM-108, *Fixed Wing Performance*, ch. 7; from memory). Ps [m/s],
    true airspeeds [m/s], weights [N], thrust and drag changes dT = T_to - T_from, dD = D_to -
    D_from [N]. Test to standard is the standardisation; standard to any mass, load factor and
    day is its inverse (same relation, roles swapped).
    """
    ps = np.asarray(ps_m_s, dtype=float)
    return (ps * (weight_from_n / weight_to_n) * (tas_to_m_s / tas_from_m_s)
            + tas_to_m_s / weight_to_n * (thrust_change_n - drag_change_n))


# ------------------------------------------------------------------------------ reference


@dataclass
class StandardReference:
    """Standard conditions and the predicted aircraft data used for the corrections.

    Attributes
    ----------
    standard_mass_kg : float
        Standard weight / g0 [kg].
    reference_area_m2 : float
        Wing reference area S [m^2].
    model : AircraftModel or None
        The predicted aircraft on a *standard day* (temperature offset 0): its drag polar gives
        dD, its engine (``rating``) dT. None: use ``induced_drag_factor`` and dT = 0.
    induced_drag_factor : float or None
        k of CD = CD0 + k CL^2 [-] when no model is given (a stated assumption).
    rating : str or None
        Engine rating the test points were flown at.
    notes : list[str]
        Assumptions made (said in the outputs).
    """

    standard_mass_kg: float
    reference_area_m2: float
    model: object = None
    induced_drag_factor: float | None = None
    rating: str | None = None
    notes: list[str] = field(default_factory=list)

    def drag_coefficient_change(self, cl_from, cl_to, mach):
        """CD(CL_to, M) - CD(CL_from, M) [-] from the predicted polar, or else
        k (CL_to^2 - CL_from^2)."""
        if self.model is not None:
            return (self.model.drag_coefficient(cl_to, mach, check=False)
                    - self.model.drag_coefficient(cl_from, mach, check=False))
        return self.induced_drag_factor * (np.asarray(cl_to) ** 2 - np.asarray(cl_from) ** 2)

    def standard_thrust_n(self, altitude_m, mach):
        """Standard-day thrust at full rating [N] at model altitude [m] and Mach (None: no engine
        model)."""
        if self.model is None:
            return None
        return self.model.thrust_n(altitude_m, mach, 1.0, self.rating, check=False)


def thrust_at_temperature(standard_thrust_n, altitude_m, temperature_k):
    """Thrust [N] at static temperature ``temperature_k`` [K] from the standard-day thrust at the
    same pressure altitude (model altitude [m]) and Mach: T_std(h) / T times it, the
    off-standard-day correction of :class:`climbopt.aircraft.AircraftModel` (common practice,
    no source)."""
    t_std = standard_atmosphere(altitude_m).temperature_k
    return np.asarray(standard_thrust_n) * t_std / np.asarray(temperature_k)


# ------------------------------------------------------------------------------ reduction


@dataclass(frozen=True)
class ReducedPoints:
    """Standardised Ps samples of one or more test points (1-D arrays of equal length, SI).

    ``altitude_m`` is the model altitude whose standard pressure is the measured one
    (geometric, as everywhere in climbopt); ``pressure_altitude_m`` the measured (geopotential)
    pressure altitude. ``ps_test_m_s`` Ps at test conditions, ``ps_std_m_s`` standardised (standard
    weight, standard day, 1 g); ``sigma_m_s`` its one-sigma noise estimate (from the scatter of
    the raw histories about their smoothed values, through the filter's noise gain).
    """

    source: np.ndarray  # test point name of each sample
    kind: np.ndarray
    time_s: np.ndarray
    pressure_altitude_m: np.ndarray
    altitude_m: np.ndarray
    mach: np.ndarray
    tas_test_m_s: np.ndarray
    oat_k: np.ndarray
    mass_kg: np.ndarray
    load_factor: np.ndarray
    ps_test_m_s: np.ndarray
    ps_std_m_s: np.ndarray
    sigma_m_s: np.ndarray

    def __len__(self) -> int:
        return int(self.time_s.size)

    @staticmethod
    def concatenate(parts: list[ReducedPoints]) -> ReducedPoints:
        """All samples of several reductions in one set."""
        names = ReducedPoints.__dataclass_fields__
        return ReducedPoints(**{k: np.concatenate([getattr(p, k) for p in parts]) for k in names})

    def take(self, index) -> ReducedPoints:
        """The samples at ``index`` (integer array or mask)."""
        names = ReducedPoints.__dataclass_fields__
        return ReducedPoints(**{k: getattr(self, k)[index] for k in names})


def _mach_of(history: FlightHistory):
    """Mach at the recorded samples: as recorded, or from the recorded CAS and the static pressure
    of the recorded pressure altitude (compressible pitot relations, NACA Report 1135, 1953)."""
    if history.mach is not None:
        return np.asarray(history.mach, dtype=float)
    hp = np.asarray(history.pressure_altitude_m, dtype=float)
    pressure = standard_atmosphere(geometric_from_geopotential(hp)).pressure_pa
    return np.asarray(mach_from_cas(history.cas_m_s, pressure), dtype=float)


def _noise_sigma(raw, smooth):
    """Robust one-sigma scatter of raw about smoothed samples (1.4826 x median absolute
    deviation; Hampel, J. Amer. Statist. Assoc. 69(346), 1974)."""
    r = np.asarray(raw) - np.asarray(smooth)
    return float(1.4826 * np.median(np.abs(r - np.median(r))))


def reduce_history(history: FlightHistory, reference: StandardReference, window_s: float,
                   spacing_s: float | None = None) -> ReducedPoints:
    """Standardised Ps of one test point, sampled every ``spacing_s`` (default: one smoothing
    window, so that the noise of neighbouring samples is independent), half a window in from
    each end of the history (the filter's edge fits are noisier).

    Steps: uniform resampling; true airspeed V = M sqrt(gamma R T) from Mach (or CAS through the
    pitot relations) and the measured static temperature; Savitzky-Golay smoothing of Hp, V,
    T, mass and load factor and derivatives of Hp and V; tapeline rate; Ps at test; standardised
    to ``reference`` by :func:`correct_ps` (see the module docstring for dT and dD).
    """
    t, dt = uniform_time(history.time_s)

    def on_grid(y):
        return np.interp(t, history.time_s, np.asarray(y, dtype=float))

    hp_raw = on_grid(history.pressure_altitude_m)
    oat_raw = on_grid(history.oat_k)
    mach_raw = on_grid(_mach_of(history))
    tas_raw = mach_raw * np.sqrt(GAMMA_AIR * R_AIR * oat_raw)
    n_raw = on_grid(history.load_factor) if history.load_factor is not None else np.ones_like(t)
    hp, dhp = smooth_and_differentiate(hp_raw, dt, window_s)
    tas, dtas = smooth_and_differentiate(tas_raw, dt, window_s)
    oat, _ = smooth_and_differentiate(oat_raw, dt, window_s)
    mass, _ = smooth_and_differentiate(on_grid(history.mass_kg), dt, window_s)
    n_load, _ = smooth_and_differentiate(n_raw, dt, window_s)
    climb = tapeline_rate(dhp, oat, hp)
    ps_test = ps_at_test(climb, tas, dtas)
    gain = derivative_noise_gain(window_s, dt)
    sigma = np.hypot(gain * _noise_sigma(hp_raw, hp) * oat / standard_atmosphere(
        geometric_from_geopotential(hp)).temperature_k,
        tas / G0 * gain * _noise_sigma(tas_raw, tas))
    # the samples kept: every spacing_s, half a window in from the ends
    half = window_samples(window_s, dt) // 2
    step = max(1, int(round((spacing_s or window_s) / dt)))
    keep = np.arange(half, t.size - half, step)
    if keep.size == 0:
        keep = np.array([t.size // 2])
    alt = geometric_from_geopotential(hp[keep])
    mach = tas[keep] / np.sqrt(GAMMA_AIR * R_AIR * oat[keep])
    ps_std = standardise(ps_test[keep], alt, mach, oat[keep], mass[keep], n_load[keep], reference)
    k = keep.size
    return ReducedPoints(np.full(k, history.name, dtype=object),
                         np.full(k, history.kind, dtype=object),
                         t[keep], hp[keep], alt, mach, tas[keep], oat[keep], mass[keep],
                         n_load[keep], ps_test[keep], ps_std, sigma[keep])


def standardise(ps_test, altitude_m, mach, oat_k, mass_kg, load_factor,
                reference: StandardReference):
    """Ps [m/s] at test conditions -> standard weight, standard day, 1 g at the same pressure
    altitude (model altitude [m]) and Mach, by :func:`correct_ps` with dD from the polar and dT
    from the engine's temperature correction (module docstring)."""
    atm = standard_atmosphere(altitude_m)
    v_test = mach * np.sqrt(GAMMA_AIR * R_AIR * np.asarray(oat_k))
    v_std = mach * atm.speed_of_sound_m_s
    q_s = 0.5 * GAMMA_AIR * atm.pressure_pa * mach**2 * reference.reference_area_m2
    w_test = np.asarray(mass_kg) * G0
    w_std = reference.standard_mass_kg * G0
    d_cd = reference.drag_coefficient_change(load_factor * w_test / q_s, w_std / q_s, mach)
    f_std = reference.standard_thrust_n(altitude_m, mach)
    d_thrust = 0.0 if f_std is None else f_std - thrust_at_temperature(f_std, altitude_m, oat_k)
    return correct_ps(ps_test, v_test, w_test, v_std, w_std, d_thrust, q_s * d_cd)
