"""Tests of climbopt.airspeed: pitot formulas and Mach/TAS/CAS/EAS conversions."""

import casadi as ca
import numpy as np
import pytest

from climbopt.airspeed import (
    cas_from_impact_pressure,
    cas_from_mach,
    cas_from_tas,
    eas_from_tas,
    impact_pressure_from_cas,
    impact_pressure_pa,
    mach_from_cas,
    mach_from_impact_pressure,
    tas_from_eas,
    tas_from_speed,
)
from climbopt.atmosphere import A0_M_S, P0_PA, altitude_from_pressure, standard_atmosphere

KT = 1852.0 / 3600.0  # international knot [m/s] (exact definition)
FT = 0.3048  # international foot [m] (exact definition)


@pytest.mark.parametrize("kind", ["cas", "eas", "tas"])
def test_cas_tas_eas_equal_at_sea_level_standard_array(kind):
    """At sea level on a standard day CAS = EAS = TAS (common practice, no source), sub- and supersonic.
    Tolerance 1e-6: A0_M_S = 340.294 and RHO0 = 1.225 are the standard's rounded values (3e-7, 7e-7)."""
    v = np.array([10.0, 100.0, 250.0, 340.0, 500.0, 800.0])
    np.testing.assert_allclose(tas_from_speed(kind, v, 0.0), v, rtol=1e-6)
    np.testing.assert_allclose(cas_from_tas(v, 0.0), v, rtol=1e-6)
    np.testing.assert_allclose(eas_from_tas(v, standard_atmosphere(0.0).density_kg_m3), v, rtol=1e-6)


@pytest.mark.parametrize(
    ("mach", "p_over_pt"),
    # Isentropic flow tables, gamma = 1.4 (NACA Report 1135, 1953, table I; values from memory,
    # 4 significant figures, tolerance half a unit in the last digit).
    [(0.5, 0.8430), (0.8, 0.6560), (1.0, 0.5283)],
)
def test_subsonic_isentropic_table_scalar(mach, p_over_pt):
    """p / p_t = p / (p + qc) at subsonic Mach numbers."""
    qc = impact_pressure_pa(mach, 1.0)
    assert 1.0 / (1.0 + qc) == pytest.approx(p_over_pt, abs=0.00005)


@pytest.mark.parametrize(
    ("mach", "pt2_over_p"),
    # Rayleigh pitot ratio p_t2 / p1 from the normal-shock tables, gamma = 1.4 (NACA Report 1135
    # tables; M = 2 value 5.6404 and M = 3 value 12.061, both from memory).
    [(2.0, 5.6404), (3.0, 12.061)],
)
def test_supersonic_rayleigh_pitot_scalar(mach, pt2_over_p):
    """Supersonic pitot: total pressure behind the normal shock over free-stream static pressure."""
    assert impact_pressure_pa(mach, 1.0) + 1.0 == pytest.approx(pt2_over_p, rel=1e-5)


def test_rayleigh_matches_numeric_constant_form_array():
    """Our gamma form equals the familiar gamma = 1.4 form p_t2/p = 166.9216 M^7 / (7 M^2 - 1)^2.5
    (NACA Report 1135, 1953; the constant printed to 7 digits, so 1e-6 relative)."""
    m = np.linspace(1.0, 5.0, 81)
    expected = 166.9216 * m**7 / (7.0 * m**2 - 1.0) ** 2.5
    np.testing.assert_allclose(impact_pressure_pa(m, 1.0) + 1.0, expected, rtol=1e-6)


def test_branches_meet_at_mach_one_scalar():
    """Both pitot branches give p_t/p = 1.2^3.5 = 1.892929 at M = 1, with equal slope
    d(qc/p)/dM = 2.2084 on both sides (CasADi AD), and CAS is continuous across M = 1."""
    x = ca.MX.sym("m")
    qc = impact_pressure_pa(x, 1.0)
    f = ca.Function("f", [x], [qc, ca.jacobian(qc, x)])
    below, above = f(1.0 - 1e-9), f(1.0 + 1e-9)
    assert float(below[0]) == pytest.approx(1.2**3.5 - 1.0, rel=1e-8)
    assert float(above[0]) == pytest.approx(1.2**3.5 - 1.0, rel=1e-8)
    assert float(below[1]) == pytest.approx(float(above[1]), rel=1e-7)
    assert float(below[1]) == pytest.approx(3.5 * 1.2**2.5 * 0.4, rel=1e-7)
    p = standard_atmosphere(9000.0).pressure_pa
    cas = cas_from_mach(np.array([1.0 - 1e-10, 1.0, 1.0 + 1e-10]), p)
    assert np.ptp(cas) < 1e-6


def test_impact_pressure_casadi_matches_numpy_array():
    """impact_pressure_pa on SX symbols equals the numpy result across both branches (1e-12)."""
    m = ca.SX.sym("m")
    p = ca.SX.sym("p")
    f = ca.Function("f", [m, p], [impact_pressure_pa(m, p)])
    machs = np.linspace(0.0, 4.0, 41)
    got = np.array(f(machs, 30000.0)).ravel()
    np.testing.assert_allclose(got, impact_pressure_pa(machs, 30000.0), rtol=1e-12, atol=1e-12)


def test_supersonic_cas_at_sea_level_scalar():
    """At sea-level pressure CAS = M a0 on the supersonic branch too (definition of CAS)."""
    assert cas_from_mach(2.0, P0_PA) == pytest.approx(2.0 * A0_M_S, rel=1e-13)
    assert cas_from_impact_pressure(impact_pressure_pa(2.5, P0_PA)) == pytest.approx(2.5 * A0_M_S, rel=1e-13)


def test_round_trips_array():
    """Mach -> CAS -> Mach, qc -> Mach -> qc, CAS -> qc -> CAS, TAS -> EAS -> TAS, TAS -> CAS -> TAS."""
    mach = np.concatenate([np.linspace(0.0, 1.0, 51), np.linspace(1.0, 4.0, 61)])
    for alt in (0.0, 11000.0, 25000.0):
        p = standard_atmosphere(alt).pressure_pa
        np.testing.assert_allclose(mach_from_cas(cas_from_mach(mach, p), p), mach, rtol=1e-12, atol=1e-12)
        qc = impact_pressure_pa(mach, p)
        np.testing.assert_allclose(impact_pressure_pa(mach_from_impact_pressure(qc, p), p), qc,
                                   rtol=1e-12, atol=1e-9)
    cas = np.linspace(0.0, 900.0, 91)
    np.testing.assert_allclose(cas_from_impact_pressure(impact_pressure_from_cas(cas)), cas, rtol=1e-12,
                               atol=1e-9)
    rho = standard_atmosphere(8000.0, 12.0).density_kg_m3
    tas = np.linspace(0.0, 600.0, 13)
    np.testing.assert_allclose(tas_from_eas(eas_from_tas(tas, rho), rho), tas, rtol=1e-14)
    alt = np.array([0.0, 3000.0, 9000.0, 15000.0, 20000.0])[:, None]
    cas_back = cas_from_tas(tas_from_speed("cas", cas[None, ::10], alt, -10.0), alt, -10.0)
    np.testing.assert_allclose(cas_back, np.broadcast_to(cas[None, ::10], cas_back.shape), rtol=1e-12,
                               atol=1e-9)


def test_250_kt_cas_at_10000_ft_scalar():
    """250 kt CAS at 10,000 ft, standard day: about 289 kt TAS (flight-computer value, from memory;
    tolerance 1.5 kt). Compressibility makes it lower than the incompressible CAS / sqrt(sigma)
    = 290.9 kt (same density), which a program ignoring compressibility would return."""
    alt = 10000.0 * FT
    tas_kt = tas_from_speed("cas", 250.0 * KT, alt) / KT
    assert tas_kt == pytest.approx(289.0, abs=1.5)
    sigma = standard_atmosphere(alt).density_kg_m3 / standard_atmosphere(0.0).density_kg_m3
    assert tas_kt < 250.0 / np.sqrt(sigma) - 1.5


@pytest.mark.parametrize(
    ("cas_kt", "mach", "crossover_ft"),
    # Standard-day crossover altitudes (common practice; computed values, no single source). Tolerance 100 ft: "about", and geometric vs pressure (geopotential) altitude differ by
    # ~40 ft here.
    [(310.0, 0.78, 27800.0), (270.0, 0.70, 28800.0)],
)
def test_crossover_altitude_scalar(cas_kt, mach, crossover_ft):
    """Altitude where a CAS and a Mach number give the same speed: equal impact pressure."""
    qc = impact_pressure_from_cas(cas_kt * KT)
    p_cross = qc / (impact_pressure_pa(mach, 1.0))
    h_ft = altitude_from_pressure(p_cross) / FT
    assert h_ft == pytest.approx(crossover_ft, abs=100.0)
    assert mach_from_cas(cas_kt * KT, p_cross) == pytest.approx(mach, rel=1e-12)


def test_temperature_offset_array():
    """Mach from CAS depends on pressure only; TAS scales with sqrt(T) at fixed Mach (ISA + 20 K)."""
    alt = np.array([1000.0, 6000.0, 12000.0])
    cas = 150.0
    std = standard_atmosphere(alt)
    hot = standard_atmosphere(alt, 20.0)
    ratio = tas_from_speed("cas", cas, alt, 20.0) / tas_from_speed("cas", cas, alt)
    np.testing.assert_allclose(ratio, np.sqrt(hot.temperature_k / std.temperature_k), rtol=1e-13)
    np.testing.assert_allclose(tas_from_speed("mach", 0.8, alt, 20.0), 0.8 * hot.speed_of_sound_m_s,
                               rtol=1e-15)


def test_eas_below_cas_at_altitude_array():
    """EAS < CAS at altitude (the compressibility correction is positive), equal at sea level."""
    alt = np.array([0.0, 5000.0, 10000.0])
    tas = tas_from_speed("cas", 160.0, alt)
    eas = eas_from_tas(tas, standard_atmosphere(alt).density_kg_m3)
    assert eas[0] == pytest.approx(160.0, rel=1e-6)
    assert np.all(np.diff(eas) < 0.0)


@pytest.mark.parametrize(
    ("call", "pattern"),
    [
        (lambda: impact_pressure_pa(-0.1, 1e5), r"mach must be finite and >= 0, got -0\.1"),
        (lambda: impact_pressure_pa(np.nan, 1e5), r"mach must be finite and >= 0, got nan"),
        (lambda: impact_pressure_pa(0.5, 0.0), r"pressure_pa must be finite and > 0, got 0\.0"),
        (lambda: mach_from_cas(-5.0, 1e5), r"cas_m_s must be finite and >= 0, got -5\.0"),
        (lambda: eas_from_tas(100.0, -1.0), r"density_kg_m3 must be finite and > 0"),
        (lambda: tas_from_speed("ias", 100.0, 0.0),
         r"speed kind must be one of mach, tas, cas, eas; got 'ias'"),
        (lambda: tas_from_speed("cas", 100.0, 1.0e6), r"altitude_m = 1e\+06 m is outside"),
        (lambda: cas_from_tas(np.inf, 0.0), r"tas_m_s must be finite"),
    ],
)
def test_airspeed_invalid(call, pattern):
    """Invalid speeds, pressures, densities, kinds and altitudes raise ValueError naming the input."""
    with pytest.raises(ValueError, match=pattern):
        call()


def test_mach_from_cas_casadi_matches_numpy():
    """The CasADi Mach-from-CAS (closed-form subsonic branch, fixed Newton steps on the
    supersonic Rayleigh branch; NACA Report 1135, 1953) equals the numpy inverse to 1e-12 from
    M 0.05 to M 3, and its derivative in pressure matches a central difference."""
    import casadi as ca

    cas, p = ca.MX.sym("cas"), ca.MX.sym("p")
    mach = mach_from_cas(cas, p)
    f = ca.Function("f", [cas, p], [mach, ca.jacobian(mach, p)])
    for m_true in (0.05, 0.4, 0.95, 1.0, 1.05, 1.6, 3.0):
        for pressure in (101325.0, 26436.0, 5474.9):  # sea level, 10 km, 20 km (US 1976)
            c = float(cas_from_mach(m_true, pressure))
            got, dm_dp = (float(x) for x in f(c, pressure))
            assert got == pytest.approx(float(mach_from_cas(c, pressure)), rel=1e-12)
            assert got == pytest.approx(m_true, rel=1e-10)
            step = 1e-4 * pressure
            fd = (float(mach_from_cas(c, pressure + step)) -
                  float(mach_from_cas(c, pressure - step))) / (2 * step)
            assert dm_dp == pytest.approx(fd, rel=1e-5)
