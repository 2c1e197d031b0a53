"""Airspeed conversions: Mach, true (TAS), calibrated (CAS) and equivalent (EAS) airspeed.

All speeds in m/s, pressures in Pa, densities in kg/m^3; numpy arrays or floats (broadcasting).

Formulas (perfect gas, gamma = 1.4; NACA Report 1135, *Equations, Tables, and Charts for Compressible
Flow*, Ames Research Staff, 1953):

* Subsonic pitot (isentropic compression, NACA 1135 eq. 44 inverted; equation number from memory)::

      qc / p = (1 + (gamma - 1)/2 M^2)^(gamma/(gamma - 1)) - 1         = (1 + 0.2 M^2)^3.5 - 1

* Supersonic pitot, total pressure behind a normal shock (Rayleigh pitot formula, NACA 1135 eq. 100;
  equation number from memory)::

      qc / p = ((gamma + 1)/2 M^2)^(gamma/(gamma - 1))
               * ((gamma + 1) / (2 gamma M^2 - (gamma - 1)))^(1/(gamma - 1)) - 1
             = 166.9216 M^7 / (7 M^2 - 1)^2.5 - 1

  The two branches meet at M = 1 with qc / p = 1.2^3.5 - 1 = 0.892929.

* CAS is the speed that gives the measured impact pressure qc in the sea-level standard atmosphere:
  the same formulas with p = P0_PA and M = CAS / A0_M_S (common practice, no source).
* EAS = TAS sqrt(rho / rho0) (common practice, no source).

Conversions of user input (scenario speeds, limits) use the exact :func:`standard_atmosphere`.
"""

from __future__ import annotations

import numpy as np

from climbopt.atmosphere import A0_M_S, GAMMA_AIR, P0_PA, RHO0_KG_M3, standard_atmosphere

__all__ = [
    "impact_pressure_pa",
    "mach_from_impact_pressure",
    "cas_from_impact_pressure",
    "impact_pressure_from_cas",
    "cas_from_mach",
    "mach_from_cas",
    "eas_from_tas",
    "tas_from_eas",
    "cas_from_tas",
    "tas_from_speed",
    "SPEED_KINDS",
]

SPEED_KINDS = ("mach", "tas", "cas", "eas")

_G = GAMMA_AIR
_EXP = _G / (_G - 1.0)  # 3.5
# Pitot pressure ratio p_t2 / p at M = 1 (both branches): 1.2^3.5 = 1.892929...
_RATIO_AT_SONIC = (1.0 + 0.5 * (_G - 1.0)) ** _EXP


def _is_casadi(x) -> bool:
    return type(x).__module__.split(".")[0] == "casadi"


def _subsonic_ratio(mach, power=np.power):
    """Isentropic total-to-static pressure ratio (1 + (gamma-1)/2 M^2)^(gamma/(gamma-1))."""
    return power(1.0 + 0.5 * (_G - 1.0) * mach * mach, _EXP)


def _rayleigh_ratio(mach, power=np.power):
    """Rayleigh pitot ratio p_t2 / p for M >= 1 (total pressure behind a normal shock over static)."""
    m2 = mach * mach
    return power(0.5 * (_G + 1.0) * m2, _EXP) * power(
        (_G + 1.0) / (2.0 * _G * m2 - (_G - 1.0)), 1.0 / (_G - 1.0)
    )


def _log_rayleigh_ratio(mach, log=np.log):
    """Natural logarithm of :func:`_rayleigh_ratio` (M >= 1), cheaper than the powers."""
    m2 = mach * mach
    return _EXP * log(0.5 * (_G + 1.0) * m2) + log((_G + 1.0) / (2.0 * _G * m2 - (_G - 1.0))) / (_G - 1.0)


def _newton_step_rayleigh(mach, log_ratio, log=np.log):
    """One Newton step on ln(Rayleigh ratio)(M) = ``log_ratio`` (M >= 1), unclamped."""
    m2 = mach * mach
    # d ln(ratio) / dM of the Rayleigh formula
    dlog = 2.0 * _EXP / mach - 2.0 / (_G - 1.0) * 2.0 * _G * mach / (2.0 * _G * m2 - (_G - 1.0))
    return (_log_rayleigh_ratio(mach, log) - log_ratio) / dlog


#: Large-M asymptote of the Rayleigh formula: ratio ~ _RAYLEIGH_SLOPE M^2 (gamma = 1.4).
_RAYLEIGH_SLOPE = float(_rayleigh_ratio(10.0) / 100.0)
#: Newton steps of the CasADi inversion: from the asymptote, 4 steps reach 2e-15 relative for
#: 1 <= M <= 4 (measured); one more for margin.
_CASADI_NEWTON_STEPS = 5


def _mach_from_pitot_ratio_casadi(ratio):
    """CasADi twin of :func:`_mach_from_pitot_ratio`: closed-form subsonic branch, a fixed
    number of Newton steps on the supersonic branch; both branches evaluated at valid
    arguments (the result is chosen with ``casadi.if_else``) so derivatives stay finite."""
    import casadi as ca

    sub = ca.sqrt(ca.fmax(2.0 / (_G - 1.0) * (ca.power(ratio, 1.0 / _EXP) - 1.0), 0.0))
    r_sup = ca.fmax(ratio, _RATIO_AT_SONIC)
    log_r = ca.log(r_sup)
    m = ca.fmax(ca.sqrt(r_sup / _RAYLEIGH_SLOPE), 1.0)
    for _ in range(_CASADI_NEWTON_STEPS):
        m = ca.fmax(m - _newton_step_rayleigh(m, log_r, ca.log), 1.0)
    return ca.if_else(ratio <= _RATIO_AT_SONIC, sub, m)


def _as_nonnegative(value, name: str) -> np.ndarray:
    x = np.asarray(value, dtype=float)
    if x.size:
        bad = ~(x >= 0.0) | ~np.isfinite(x)
        if bad.any():
            raise ValueError(f"{name} must be finite and >= 0, got {float(x[bad].flat[0])!r}")
    return x


def _as_positive(value, name: str) -> np.ndarray:
    x = np.asarray(value, dtype=float)
    if x.size:
        bad = ~(x > 0.0) | ~np.isfinite(x)
        if bad.any():
            raise ValueError(f"{name} must be finite and > 0, got {float(x[bad].flat[0])!r}")
    return x


def _out(x):
    x = np.asarray(x)
    return x[()] if x.ndim == 0 else x


def impact_pressure_pa(mach, pressure_pa):
    """Impact pressure qc = p_t - p sensed by a pitot tube at Mach ``mach`` and static pressure [Pa].

    Subsonic (M <= 1): isentropic; supersonic: Rayleigh pitot formula (normal shock ahead of the tube).
    NACA Report 1135 (1953); see the module docstring. Works on numpy arrays/floats and on CasADi
    symbols (branch chosen with ``casadi.if_else``; both branches are evaluated at valid arguments so
    derivatives stay finite). Returns [Pa].
    """
    if _is_casadi(mach) or _is_casadi(pressure_pa):
        import casadi as ca

        m_sup = ca.fmax(mach, 1.0)
        sub = _subsonic_ratio(mach, power=ca.power)
        sup = _rayleigh_ratio(m_sup, power=ca.power)
        return pressure_pa * (ca.if_else(mach <= 1.0, sub, sup) - 1.0)
    m = _as_nonnegative(mach, "mach")
    p = _as_positive(pressure_pa, "pressure_pa")
    sub = m <= 1.0
    if sub.all():
        ratio = _subsonic_ratio(m)
    else:  # evaluate each branch only where it applies
        ratio = np.empty(m.shape)
        ratio[sub] = _subsonic_ratio(m[sub])
        ratio[~sub] = _rayleigh_ratio(m[~sub])
    return _out(p * (ratio - 1.0))


def _mach_from_pitot_ratio(ratio: np.ndarray) -> np.ndarray:
    """Mach number from the pitot-to-static pressure ratio p_t / p (>= 1), inverting both branches.

    Subsonic branch in closed form; supersonic branch by Newton's method on the logarithm of the
    Rayleigh formula (monotonic for M >= 1), to machine precision.
    """
    ratio = np.asarray(ratio, dtype=float)
    shape = ratio.shape
    ratio = ratio.reshape(-1)
    sub = ratio <= _RATIO_AT_SONIC
    ratio_sub = np.where(sub, ratio, 1.0)
    mach = np.sqrt(np.maximum(2.0 / (_G - 1.0) * (np.power(ratio_sub, 1.0 / _EXP) - 1.0), 0.0))
    if np.any(~sub):
        r = ratio[~sub]
        # Large-M asymptote of the Rayleigh formula: ratio ~ 1.2876 M^2 (gamma = 1.4); start above 1.
        m = np.maximum(np.sqrt(r / _RAYLEIGH_SLOPE), 1.0)
        log_r = np.log(r)
        for _ in range(50):
            step = _newton_step_rayleigh(m, log_r)
            m = np.maximum(m - step, 1.0)
            # Quadratic convergence: once the step is 1e-12 M the remaining error is at round-off.
            if np.all(np.abs(step) <= 1e-12 * m):
                break
        else:  # pragma: no cover - Newton converges in well under 10 steps on the whole range
            raise RuntimeError("supersonic pitot inversion did not converge")
        mach[~sub] = m
    return mach.reshape(shape)


def mach_from_impact_pressure(impact_pressure_pa_, pressure_pa):
    """Mach number from impact pressure qc [Pa] and static pressure p [Pa] (inverse of
    :func:`impact_pressure_pa`, both branches). Numpy arrays/floats or CasADi symbols (the
    supersonic branch then takes a fixed number of Newton steps, converged to rounding)."""
    if _is_casadi(impact_pressure_pa_) or _is_casadi(pressure_pa):
        return _mach_from_pitot_ratio_casadi(impact_pressure_pa_ / pressure_pa + 1.0)
    qc = _as_nonnegative(impact_pressure_pa_, "impact_pressure_pa")
    p = _as_positive(pressure_pa, "pressure_pa")
    return _out(_mach_from_pitot_ratio(qc / p + 1.0))


def cas_from_impact_pressure(impact_pressure_pa_):
    """Calibrated airspeed [m/s] from impact pressure qc [Pa]: the pitot formulas at sea-level standard
    pressure and speed of sound (P0_PA, A0_M_S)."""
    qc = _as_nonnegative(impact_pressure_pa_, "impact_pressure_pa")
    return _out(A0_M_S * _mach_from_pitot_ratio(qc / P0_PA + 1.0))


def impact_pressure_from_cas(cas_m_s):
    """Impact pressure qc [Pa] that corresponds to calibrated airspeed ``cas_m_s`` [m/s]
    (numpy or CasADi)."""
    if _is_casadi(cas_m_s):
        return impact_pressure_pa(cas_m_s / A0_M_S, P0_PA)
    cas = _as_nonnegative(cas_m_s, "cas_m_s")
    return impact_pressure_pa(cas / A0_M_S, P0_PA)


def cas_from_mach(mach, pressure_pa):
    """Calibrated airspeed [m/s] at Mach ``mach`` and static pressure ``pressure_pa`` [Pa]."""
    return cas_from_impact_pressure(impact_pressure_pa(mach, pressure_pa))


def mach_from_cas(cas_m_s, pressure_pa):
    """Mach number at calibrated airspeed ``cas_m_s`` [m/s] and static pressure ``pressure_pa`` [Pa]
    (numpy or CasADi)."""
    return mach_from_impact_pressure(impact_pressure_from_cas(cas_m_s), pressure_pa)


def eas_from_tas(tas_m_s, density_kg_m3):
    """Equivalent airspeed [m/s]: EAS = TAS sqrt(rho / rho0), rho0 = 1.225 kg/m^3."""
    tas = _as_nonnegative(tas_m_s, "tas_m_s")
    rho = _as_positive(density_kg_m3, "density_kg_m3")
    return _out(tas * np.sqrt(rho / RHO0_KG_M3))


def tas_from_eas(eas_m_s, density_kg_m3):
    """True airspeed [m/s]: TAS = EAS sqrt(rho0 / rho)."""
    eas = _as_nonnegative(eas_m_s, "eas_m_s")
    rho = _as_positive(density_kg_m3, "density_kg_m3")
    return _out(eas * np.sqrt(RHO0_KG_M3 / rho))


def cas_from_tas(tas_m_s, altitude_m, temperature_offset_k=0.0):
    """Calibrated airspeed [m/s] at true airspeed [m/s] and geometric altitude [m] (exact standard
    atmosphere with the temperature offset [K])."""
    tas = _as_nonnegative(tas_m_s, "tas_m_s")
    atm = standard_atmosphere(altitude_m, temperature_offset_k)
    return cas_from_mach(tas / atm.speed_of_sound_m_s, atm.pressure_pa)


def tas_from_speed(kind: str, value, altitude_m, temperature_offset_k=0.0):
    """True airspeed [m/s] from a speed given as ``kind`` in ``SPEED_KINDS``.

    ``value`` is a Mach number for ``"mach"`` and a speed [m/s] for ``"tas"``, ``"cas"``, ``"eas"``.
    ``altitude_m`` is geometric altitude [m]; the exact standard atmosphere with
    ``temperature_offset_k`` [K] supplies pressure, density and speed of sound.
    """
    if kind not in SPEED_KINDS:
        raise ValueError(f"speed kind must be one of {', '.join(SPEED_KINDS)}; got {kind!r}")
    name = "mach" if kind == "mach" else f"{kind}_m_s"
    v = _as_nonnegative(value, name)
    atm = standard_atmosphere(altitude_m, temperature_offset_k)
    if kind == "tas":
        return _out(np.broadcast_to(v, np.broadcast(v, np.asarray(atm.temperature_k)).shape).copy())
    if kind == "mach":
        return _out(v * atm.speed_of_sound_m_s)
    if kind == "eas":
        return tas_from_eas(v, atm.density_kg_m3)
    return _out(mach_from_cas(v, atm.pressure_pa) * atm.speed_of_sound_m_s)
