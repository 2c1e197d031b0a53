"""US Standard Atmosphere 1976, exact and as a C2-smooth twin for the optimisers.

Source: *U.S. Standard Atmosphere, 1976*, NOAA/NASA/USAF, Washington DC, October 1976
(NOAA-S/T 76-1562), part 1: defining constants (table 2), layer table of geopotential heights and
temperature gradients (table 4), geopotential height (eq. 18), temperature (eq. 23), pressure
(eqs. 33a and 33b), density (eq. 42), speed of sound (eq. 50).

Altitudes given to this module are **geometric** altitudes Z [m] above mean sea level. The standard is
defined in geopotential height H; the conversion is H = r0 Z / (r0 + Z) with r0 = 6356766 m (eq. 18).
The model covers the seven layers from H = 0 to 84.852 km, with the first layer's constant lapse rate
extended down to H = -5 km (as ICAO Doc 7488 does).

Non-standard day: ``temperature_offset_k`` shifts temperature by a constant at every altitude while
pressure at a given geometric altitude stays the standard value; density follows from the gas law and
the speed of sound from the temperature (common practice, no source).

Constants:
``G0`` [m/s^2], ``R_AIR`` [J/(kg K)] (specific gas constant of air), ``GAMMA_AIR`` [-],
``T0_K`` [K], ``P0_PA`` [Pa], ``RHO0_KG_M3`` [kg/m^3], ``A0_M_S`` [m/s] (sea-level standard values),
``R_STAR`` [J/(mol K)], ``M0_KG_MOL`` [kg/mol], ``EARTH_RADIUS_M`` (r0) [m] of the 1976 standard.

``R_AIR`` is the 1976 standard's own ratio R*/M0 = 287.0531 J/(kg K), used for pressure (through the
hydrostatic constant g0 M0 / R* = 34.1632 K/km), density and speed of sound alike, so the model
reproduces the standard's printed tables to their last digit (e.g. a = 298.46 m/s at H = 25 km).
ICAO Doc 7488 (and the ``ambiance`` package) use 287.05287 J/(kg K) (M = 28.96442 kg/kmol), which is
7.0e-7 relative smaller; the difference is far below any engineering significance.
"""

from __future__ import annotations

import functools
from dataclasses import dataclass
from typing import Any

import numpy as np

__all__ = [
    "G0",
    "R_AIR",
    "GAMMA_AIR",
    "T0_K",
    "P0_PA",
    "RHO0_KG_M3",
    "A0_M_S",
    "R_STAR",
    "M0_KG_MOL",
    "EARTH_RADIUS_M",
    "GEOPOTENTIAL_MIN_M",
    "GEOPOTENTIAL_MAX_M",
    "ALTITUDE_MIN_M",
    "ALTITUDE_MAX_M",
    "AtmosphereState",
    "standard_atmosphere",
    "SmoothAtmosphere",
    "geopotential_from_geometric",
    "geometric_from_geopotential",
    "altitude_from_pressure",
]

# Defining constants, US Standard Atmosphere 1976, table 2 (SI units).
G0 = 9.80665  # standard gravity [m/s^2]


def energy_height_m(altitude_m, tas_m_s):
    """Energy height (specific energy) he = h + V^2 / (2 g0) [m] from altitude [m] and true
    airspeed [m/s] (Rutowski, J. Aeronaut. Sci. 21(3), 1954). Floats or arrays (broadcast)."""
    return np.asarray(altitude_m, dtype=float) + np.asarray(tas_m_s, dtype=float) ** 2 / (2.0 * G0)
R_STAR = 8.31432  # universal gas constant as adopted by the standard [J/(mol K)]
M0_KG_MOL = 0.0289644  # sea-level mean molar mass of air [kg/mol]
EARTH_RADIUS_M = 6356766.0  # r0, effective Earth radius for geopotential height [m]
R_AIR = R_STAR / M0_KG_MOL  # specific gas constant of air, 287.0531 [J/(kg K)]
GAMMA_AIR = 1.4  # ratio of specific heats [-]
T0_K = 288.15  # sea-level standard temperature [K]
P0_PA = 101325.0  # sea-level standard pressure [Pa]
RHO0_KG_M3 = 1.225  # sea-level standard density [kg/m^3]
A0_M_S = 340.294  # sea-level standard speed of sound [m/s]

# Hydrostatic constant g0 M0 / R* = g0 / R_AIR [K/m] (appears in eqs. 33a, 33b).
_GMR_K_M = G0 / R_AIR

# Table 4: geopotential height of each layer base [m] and temperature gradient [K/m].
_LAYER_BASE_H_M = np.array([0.0, 11000.0, 20000.0, 32000.0, 47000.0, 51000.0, 71000.0])
_LAYER_LAPSE_K_M = np.array([-0.0065, 0.0, 0.0010, 0.0028, 0.0, -0.0028, -0.0020])

GEOPOTENTIAL_MIN_M = -5000.0  # the first layer is extended down to here [m']
GEOPOTENTIAL_MAX_M = 84852.0  # top of the seventh layer [m']


def _layer_base_values() -> tuple[np.ndarray, np.ndarray]:
    """Temperature [K] and pressure [Pa] at each layer base, from T0, P0 and the layer table."""
    n = len(_LAYER_BASE_H_M)
    t_b = np.empty(n)
    p_b = np.empty(n)
    t_b[0], p_b[0] = T0_K, P0_PA
    for i in range(1, n):
        dh = _LAYER_BASE_H_M[i] - _LAYER_BASE_H_M[i - 1]
        lapse = _LAYER_LAPSE_K_M[i - 1]
        t_b[i] = t_b[i - 1] + lapse * dh
        if lapse == 0.0:
            p_b[i] = p_b[i - 1] * np.exp(-_GMR_K_M * dh / t_b[i - 1])
        else:
            p_b[i] = p_b[i - 1] * (t_b[i - 1] / t_b[i]) ** (_GMR_K_M / lapse)
    return t_b, p_b


_LAYER_BASE_T_K, _LAYER_BASE_P_PA = _layer_base_values()


def geopotential_from_geometric(altitude_m):
    """Geopotential height H [m'] from geometric altitude Z [m]: H = r0 Z / (r0 + Z).

    US Standard Atmosphere 1976, eq. 18, r0 = 6356766 m. Numpy arrays or floats.
    """
    z = np.asarray(altitude_m, dtype=float)
    return EARTH_RADIUS_M * z / (EARTH_RADIUS_M + z)


def geometric_from_geopotential(geopotential_m):
    """Geometric altitude Z [m] from geopotential height H [m']: Z = r0 H / (r0 - H) (eq. 18 inverted)."""
    h = np.asarray(geopotential_m, dtype=float)
    return EARTH_RADIUS_M * h / (EARTH_RADIUS_M - h)


ALTITUDE_MIN_M = float(geometric_from_geopotential(GEOPOTENTIAL_MIN_M))  # about -4996.1 m
ALTITUDE_MAX_M = float(geometric_from_geopotential(GEOPOTENTIAL_MAX_M))  # about 86000 m


@dataclass(frozen=True, eq=False)
class AtmosphereState:
    """Air properties at one or more altitudes (numpy arrays/floats, or CasADi expressions).

    Attributes
    ----------
    temperature_k : Static air temperature. [K]
    pressure_pa : Static pressure. [Pa]
    density_kg_m3 : Air density. [kg/m^3]
    speed_of_sound_m_s : Speed of sound, sqrt(gamma R T). [m/s]
    """

    temperature_k: Any
    pressure_pa: Any
    density_kg_m3: Any
    speed_of_sound_m_s: Any


def _scalar_or_array(x: np.ndarray):
    """Return a 0-d array as a numpy float, anything else unchanged."""
    return x[()] if x.ndim == 0 else x


def _check_offset(temperature_offset_k) -> float:
    try:
        dt = float(temperature_offset_k)
    except (TypeError, ValueError):
        raise ValueError(
            f"temperature_offset_k must be a number in kelvin, got {temperature_offset_k!r}"
        ) from None
    if not np.isfinite(dt):
        raise ValueError(f"temperature_offset_k must be finite, got {dt!r} K")
    return dt


def _check_altitudes(z: np.ndarray, low_m: float, high_m: float, what: str) -> None:
    """Raise ValueError naming the first bad altitude and the valid range."""
    if z.size == 0:
        return
    # A 1e-6 m slack lets the exact range ends (which pass through a float conversion) in.
    z_min, z_max = float(np.min(z)), float(np.max(z))  # NaN propagates into both
    if z_min >= low_m - 1e-6 and z_max <= high_m + 1e-6:
        return
    bad_nan = np.isnan(z)
    if bad_nan.any():
        raise ValueError(f"altitude_m contains NaN ({int(bad_nan.sum())} of {z.size} values)")
    bad = (z < low_m - 1e-6) | (z > high_m + 1e-6)
    first = z[bad].flat[0]
    raise ValueError(
        f"altitude_m = {first:g} m is outside the range of {what}: "
        f"{low_m:.1f} m to {high_m:.1f} m geometric altitude "
        f"({int(bad.sum())} of {z.size} values outside)"
    )


def _standard_temperature_pressure(z: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Standard-day temperature [K] and pressure [Pa] at geometric altitudes z [m] (already checked)."""
    h = geopotential_from_geometric(z)
    layer = np.searchsorted(_LAYER_BASE_H_M[1:], h, side="right")
    h_b = _LAYER_BASE_H_M[layer]
    t_b = _LAYER_BASE_T_K[layer]
    p_b = _LAYER_BASE_P_PA[layer]
    lapse = _LAYER_LAPSE_K_M[layer]
    dh = h - h_b
    temperature = t_b + lapse * dh  # eq. 23
    isothermal = lapse == 0.0
    safe_lapse = np.where(isothermal, 1.0, lapse)
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        p_grad = p_b * (t_b / temperature) ** (_GMR_K_M / safe_lapse)  # eq. 33a
        p_iso = p_b * np.exp(-_GMR_K_M * dh / t_b)  # eq. 33b
    pressure = np.where(isothermal, p_iso, p_grad)
    return temperature, pressure


def standard_atmosphere(altitude_m, temperature_offset_k=0.0) -> AtmosphereState:
    """Exact US Standard Atmosphere 1976 at geometric altitude, optionally with a temperature offset.

    Parameters
    ----------
    altitude_m : float or array_like
        Geometric altitude above mean sea level, from ``ALTITUDE_MIN_M`` (about -4996 m, i.e.
        geopotential -5 km) to ``ALTITUDE_MAX_M`` (about 86 km, geopotential 84.852 km). [m]
    temperature_offset_k : float
        Constant temperature deviation from the standard day (ISA + dT). Pressure at a given
        altitude is unchanged; density from the gas law (common practice, no source). [K]

    Returns
    -------
    AtmosphereState
        Fields with the shape of ``altitude_m`` (numpy floats for scalar input).

    Raises
    ------
    ValueError
        Altitude NaN or outside the supported range; offset not finite; or an offset that makes the
        absolute temperature zero or negative anywhere asked.

    Formulas: US Standard Atmosphere 1976, eqs. 18, 23, 33a, 33b; rho = p / (R T); a = sqrt(gamma R T).
    """
    dt = _check_offset(temperature_offset_k)
    z = np.asarray(altitude_m, dtype=float)
    _check_altitudes(z, ALTITUDE_MIN_M, ALTITUDE_MAX_M, "the US Standard Atmosphere 1976 model "
                     f"(geopotential {GEOPOTENTIAL_MIN_M / 1000:g} km to {GEOPOTENTIAL_MAX_M / 1000:g} km)")
    t_std, pressure = _standard_temperature_pressure(z)
    temperature = t_std + dt
    if z.size and np.any(temperature <= 0.0):
        i = np.flatnonzero(temperature.ravel() <= 0.0)[0]
        raise ValueError(
            f"temperature_offset_k = {dt:g} K gives an absolute temperature of "
            f"{temperature.ravel()[i]:.2f} K at altitude {z.ravel()[i]:g} m; "
            "the temperature must stay above 0 K"
        )
    density = pressure / (R_AIR * temperature)
    speed_of_sound = np.sqrt(GAMMA_AIR * R_AIR * temperature)
    return AtmosphereState(
        temperature_k=_scalar_or_array(temperature),
        pressure_pa=_scalar_or_array(pressure),
        density_kg_m3=_scalar_or_array(density),
        speed_of_sound_m_s=_scalar_or_array(speed_of_sound),
    )


def altitude_from_pressure(pressure_pa):
    """Geometric altitude [m] at which the standard-day pressure equals ``pressure_pa`` [Pa].

    Exact inverse of the pressure of :func:`standard_atmosphere` (pressure altitude, expressed as a
    geometric altitude of the standard). Pressure altitude does not depend on a temperature offset.
    Raises ValueError for pressures outside the model's range or NaN.
    """
    p = np.asarray(pressure_pa, dtype=float)
    p_high = float(_standard_temperature_pressure(np.array(ALTITUDE_MIN_M))[1])
    p_low = float(_standard_temperature_pressure(np.array(ALTITUDE_MAX_M))[1])
    if p.size:
        if np.isnan(p).any():
            raise ValueError("pressure_pa contains NaN")
        bad = (p < p_low * (1 - 1e-12)) | (p > p_high * (1 + 1e-12))
        if bad.any():
            raise ValueError(
                f"pressure_pa = {p[bad].flat[0]:g} Pa is outside the range of the US Standard "
                f"Atmosphere 1976 model: {p_low:.4g} Pa to {p_high:.6g} Pa"
            )
    # Layer bases have decreasing pressure; find the layer whose base pressure is >= p.
    layer = np.clip(np.searchsorted(-_LAYER_BASE_P_PA, -p, side="right") - 1, 0, None)
    h_b = _LAYER_BASE_H_M[layer]
    t_b = _LAYER_BASE_T_K[layer]
    p_b = _LAYER_BASE_P_PA[layer]
    lapse = _LAYER_LAPSE_K_M[layer]
    isothermal = lapse == 0.0
    safe_lapse = np.where(isothermal, 1.0, lapse)
    ratio = p / p_b
    h_grad = h_b + t_b / safe_lapse * (ratio ** (-safe_lapse / _GMR_K_M) - 1.0)
    h_iso = h_b - t_b / _GMR_K_M * np.log(ratio)
    h = np.where(isothermal, h_iso, h_grad)
    return _scalar_or_array(np.asarray(geometric_from_geopotential(h)))


# --------------------------------------------------------------------------------------------------
# Smooth twin
# --------------------------------------------------------------------------------------------------

_SMOOTH_MIN_M = -2000.0  # geometric [m]
_SMOOTH_MAX_M = 70000.0  # geometric [m]
_SMOOTH_STEP_M = 100.0  # spacing of the interpolation nodes [m]


@dataclass(frozen=True, eq=False)
class _SmoothTables:
    """Spline data shared by the numpy and CasADi evaluations (built once per process)."""

    knots: np.ndarray  # B-spline knot vector (scipy convention) [m]
    coeffs: np.ndarray  # (n, 2) B-spline coefficients of T_std [K] and ln(p [Pa])
    z0: float  # first node [m]
    step: float  # node spacing [m]
    poly: np.ndarray  # (2, 4, n_intervals): c0..c3 of T and ln p on each node interval, in u in [0, 1]
    casadi_function: Any  # CasADi Function z -> [T_std; ln p] (never inlined: usable from SX and MX)


@functools.lru_cache(maxsize=1)
def _smooth_tables() -> _SmoothTables:
    from scipy.interpolate import make_interp_spline

    nodes = np.linspace(_SMOOTH_MIN_M, _SMOOTH_MAX_M,
                        int(round((_SMOOTH_MAX_M - _SMOOTH_MIN_M) / _SMOOTH_STEP_M)) + 1)
    t_std, p_std = _standard_temperature_pressure(nodes)
    values = np.column_stack([t_std, np.log(p_std)])
    spline = make_interp_spline(nodes, values, k=3)  # not-a-knot cubic: C2
    # Cubic on each node interval, from the spline's derivatives at the left node (a cubic equals its
    # Taylor expansion); the third derivative is taken mid-interval where it is unambiguous.
    left = nodes[:-1]
    mid = 0.5 * (nodes[:-1] + nodes[1:])
    step = float(nodes[1] - nodes[0])
    taylor = np.stack(  # (n_intervals, 4, 2); local variable u = (z - node) / step
        [spline(left), spline(left, nu=1) * step, spline(left, nu=2) / 2.0 * step**2,
         spline(mid, nu=3) / 6.0 * step**3], axis=1
    )
    poly = np.ascontiguousarray(taylor.transpose(2, 1, 0))
    knots = np.asarray(spline.t, dtype=float)
    coeffs = np.asarray(spline.c, dtype=float)

    from climbopt.staging import bspline_function

    fun = bspline_function("us1976_smooth", (knots,), coeffs)  # columns: T_std, ln p
    return _SmoothTables(knots=knots, coeffs=coeffs, z0=float(nodes[0]), step=step,
                         poly=poly, casadi_function=fun)


def _is_casadi_symbolic(x) -> bool:
    if type(x).__module__.split(".")[0] != "casadi":
        return False
    import casadi as ca

    return isinstance(x, (ca.SX, ca.MX))


class SmoothAtmosphere:
    """C2-smooth twin of the US Standard Atmosphere 1976 for the optimisers and energy maps.

    Cubic interpolating splines (scipy ``make_interp_spline``, k=3, not-a-knot) of the standard-day
    temperature and of ln(pressure) against geometric altitude, nodes every 100 m from -2 km to 70 km.
    The temperature offset is added afterwards (pressure unchanged, density from the gas law, as in
    :func:`standard_atmosphere`). Within 0.05% of the exact model for T, p, rho and a on the whole
    range (the largest error sits next to the layer corners, e.g. 11 km geopotential; measured in
    tests/test_atmosphere.py).

    ``atm(altitude_m)`` accepts numpy arrays/floats (fast vectorised evaluation of the same cubic
    pieces) or CasADi SX/MX symbols (``casadi.bspline`` with the identical knots and coefficients,
    wrapped in a never-inlined Function so that SX graphs can call it). The two agree to ~1e-14
    relative.

    Attributes
    ----------
    temperature_offset_k : Temperature deviation from the standard day. [K]
    altitude_min_m, altitude_max_m : Range of the spline. [m] Numpy evaluation raises ValueError outside;
        CasADi's spline returns 0 outside, so optimisers must bound altitude inside this range.
    """

    altitude_min_m = _SMOOTH_MIN_M
    altitude_max_m = _SMOOTH_MAX_M

    def __init__(self, temperature_offset_k: float = 0.0):
        dt = _check_offset(temperature_offset_k)
        tables = _smooth_tables()
        t_min = float(np.min(tables.poly[0, 0]))
        if t_min + dt <= 0.0:
            raise ValueError(
                f"temperature_offset_k = {dt:g} K gives an absolute temperature of {t_min + dt:.2f} K "
                f"within {self.altitude_min_m:g} m to {self.altitude_max_m:g} m; "
                "the temperature must stay above 0 K"
            )
        self.temperature_offset_k = dt
        self._tables = tables

    def __repr__(self) -> str:
        return f"SmoothAtmosphere(temperature_offset_k={self.temperature_offset_k!r})"

    def standard_temperature_log_pressure(self, altitude_m):
        """Standard-day temperature [K] and ln(pressure [Pa]) from the splines (numpy or CasADi)."""
        if _is_casadi_symbolic(altitude_m):
            return self._casadi_t_lnp(altitude_m)
        return self._numpy_t_lnp(altitude_m)

    def _numpy_t_lnp(self, altitude_m):
        tables = self._tables
        z = np.asarray(altitude_m, dtype=float)
        _check_altitudes(z, self.altitude_min_m, self.altitude_max_m,
                         "the smooth US Standard Atmosphere 1976 twin")
        n_int = tables.poly.shape[2]
        shape = z.shape
        pos = (z.reshape(-1) - tables.z0) * (1.0 / tables.step)
        cell = np.floor(pos)
        u = pos - cell  # position inside the node interval, 0..1
        idx = cell.astype(np.intp)
        np.clip(idx, 0, n_int - 1, out=idx)
        u = u + (cell - idx)  # only changes anything at the very top node (u = 1 there)
        out = []
        for c in tables.poly:  # Horner, in place: c0 + u (c1 + u (c2 + u c3))
            r = c[3].take(idx)
            r *= u
            r += c[2].take(idx)
            r *= u
            r += c[1].take(idx)
            r *= u
            r += c[0].take(idx)
            out.append(r.reshape(shape))
        return out[0], out[1]

    def _casadi_t_lnp(self, z):
        import casadi as ca

        from climbopt.staging import call_table

        fun = self._tables.casadi_function
        rows, cols = z.shape
        n = rows * cols
        if n == 1:
            out = call_table(fun, z)
            return out[0], out[1]
        out = fun.map(n)(ca.reshape(z, 1, n))  # 2 x n
        return ca.reshape(out[0, :], rows, cols), ca.reshape(out[1, :], rows, cols)

    def __call__(self, altitude_m) -> AtmosphereState:
        """Air properties at geometric altitude ``altitude_m`` [m] (numpy or CasADi SX/MX)."""
        t_std, lnp = self.standard_temperature_log_pressure(altitude_m)
        if _is_casadi_symbolic(altitude_m):
            import casadi as ca

            temperature = t_std + self.temperature_offset_k
            pressure = ca.exp(lnp)
            sqrt = ca.sqrt
        else:
            temperature = t_std + self.temperature_offset_k
            pressure = np.exp(lnp)
            sqrt = np.sqrt
        density = pressure / (R_AIR * temperature)
        speed_of_sound = sqrt(GAMMA_AIR * R_AIR * temperature)
        if isinstance(temperature, np.ndarray):
            temperature, pressure, density, speed_of_sound = (
                _scalar_or_array(np.asarray(v)) for v in (temperature, pressure, density, speed_of_sound)
            )
        return AtmosphereState(temperature, pressure, density, speed_of_sound)
