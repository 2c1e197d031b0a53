"""Energy-state fields (climbopt.energy): Ps against closed-form jet climb results and a published
worked example, the feasibility mask against hand-computed limits, the map views, and the 1-D
line maximiser on analytic functions."""

import dataclasses
from pathlib import Path

import ambiance
import numpy as np
import pytest

from climbopt.aircraft import build_model
from climbopt.energy import (
    best_climb_speed,
    build_energy_map,
    energy_fields,
    energy_height_m,
    maximise_on_lines,
)
from climbopt.scenario import load_scenario

ROOT = Path(__file__).resolve().parents[1]
BIZJET = ROOT / "tests" / "data" / "anderson_bizjet.toml"
INTERCEPTOR = ROOT / "tests" / "data" / "interceptor_1969.toml"
FT = 0.3048  # m per ft (international foot)
LBF = 4.4482216152605  # N per lbf
LB = 0.45359237  # kg per lb
KT = 1852.0 / 3600.0  # m/s per knot
G0 = 9.80665  # standard gravity [m/s^2]

# Business jet of Anderson, Aircraft Performance and Design (1999), examples 5.16-5.18
# (inputs from memory; see the header of tests/data/anderson_bizjet.toml).
BJ_WEIGHT_N = 73000 * LB * G0
BJ_AREA_M2 = 950 * FT**2
BJ_CD0 = 0.015
BJ_K = 0.08


@pytest.fixture(scope="module")
def bizjet_scenario():
    return load_scenario(BIZJET)


@pytest.fixture(scope="module")
def bizjet(bizjet_scenario):
    return build_model(bizjet_scenario)


def _closed_form_max_climb(weight_n, area_m2, cd0, k, thrust_n, rho):
    """Anderson (1999) ch. 5: speed and value of the maximum rate of climb of a jet with a
    parabolic polar and thrust independent of speed (Anderson 1999, sec. 5.3-5.4; formulas
    from memory, they are standard)."""
    ld_max = 1.0 / (2.0 * np.sqrt(k * cd0))
    tw = thrust_n / weight_n
    ws = weight_n / area_m2
    z = 1.0 + np.sqrt(1.0 + 3.0 / (ld_max**2 * tw**2))
    v = np.sqrt(tw * ws * z / (3.0 * rho * cd0))
    rc = np.sqrt(ws * z / (3.0 * rho * cd0)) * tw**1.5 * (
        1.0 - z / 6.0 - 3.0 / (2.0 * tw**2 * ld_max**2 * z))
    return v, rc


def test_anderson_bizjet_max_rate_of_climb_published(bizjet):
    """Maximum rate of climb of Anderson's business jet (Aircraft Performance and Design, 1999,
    examples 5.16-5.18): 179.9, 156.6, 133.8, 58.2 ft/s at 0, 10,000, 20,000, 50,000 ft.
    Tolerance 0.2 ft/s: the book's rounding (0.1 ft/s) plus the smooth atmosphere (0.05%)."""
    published_ft_s = np.array([179.9, 156.6, 133.8, 58.2])
    altitude_m = np.array([0.0, 10000.0, 20000.0, 50000.0]) * FT
    _, ps = best_climb_speed(bizjet, altitude_m)
    np.testing.assert_allclose(ps / FT, published_ft_s, atol=0.2)


@pytest.mark.parametrize("mass_factor", [0.7, 1.0, 1.3])
def test_max_rate_of_climb_matches_closed_form(bizjet, mass_factor):
    """Speed of maximum Ps and the maximum Ps at fixed altitudes equal the closed-form jet
    results for a parabolic polar with constant thrust (Anderson 1999, ch. 5), within 0.5%,
    over a range of thrust-to-weight ratios (mass varied)."""
    altitude_m = np.array([0.0, 3000.0, 6096.0, 9000.0, 12192.0])
    mass = bizjet.mass_kg * mass_factor
    v, ps = best_climb_speed(bizjet, altitude_m, mass)
    atm = bizjet.atmosphere(altitude_m)
    thrust = bizjet.thrust_n(altitude_m, v / atm.speed_of_sound_m_s)
    v_ref, rc_ref = _closed_form_max_climb(mass * G0, BJ_AREA_M2, BJ_CD0, BJ_K, thrust,
                                           atm.density_kg_m3)
    np.testing.assert_allclose(v, v_ref, rtol=0.005)
    np.testing.assert_allclose(ps, rc_ref, rtol=0.005)
    # the maximiser is much better than 0.5%: the refined optimum sits on the closed form
    np.testing.assert_allclose(ps, rc_ref, rtol=1e-5)


def test_ps_by_hand_with_reference_atmosphere(bizjet):
    """Ps = V (T - D) / W (Anderson 1999, ch. 5; Rutowski 1954) computed by hand at
    10,000 ft with the `ambiance` library's density (US Standard Atmosphere 1976, geometric
    altitude) and the thrust of the table at that altitude; within 0.1% (smooth-atmosphere
    error 0.05%)."""
    h = 10000 * FT
    v = np.array([120.0, 180.0, 240.0])
    rho = float(ambiance.Atmosphere(h).density[0])
    thrust = 23.0952e3 * LBF  # table value at 10,000 ft (27.7 klbf (rho/rho0)^0.6)
    q = 0.5 * rho * v**2
    cl = BJ_WEIGHT_N / (q * BJ_AREA_M2)
    drag = q * BJ_AREA_M2 * (BJ_CD0 + BJ_K * cl**2)
    ps_hand = v * (thrust - drag) / BJ_WEIGHT_N
    f = energy_fields(bizjet, h, v, bizjet.mass_kg)
    np.testing.assert_allclose(f.ps_m_s, ps_hand, rtol=1e-3)
    # energy height: he = h + V^2 / (2 g0) (Rutowski 1954)
    np.testing.assert_allclose(f.energy_height_m, h + v**2 / (2 * G0), rtol=1e-12)
    # fuel flow = TSFC * thrust, TSFC 0.6 lb/lbf/h (scenario file); fs = Ps / fuel flow
    tsfc = 0.6 * LB / (LBF * 3600.0)
    np.testing.assert_allclose(f.fuel_flow_kg_s, tsfc * thrust, rtol=1e-6)
    np.testing.assert_allclose(f.fuel_specific_energy_m_kg, ps_hand / (tsfc * thrust), rtol=1e-3)


def test_feasibility_mask_limits(bizjet, bizjet_scenario):
    """Each limit cuts where a hand calculation puts it: stall speed at n = 1 and n = 2
    (V_s = sqrt(2 n W / (rho S CLmax)), common practice, no source), dynamic pressure,
    250 kt CAS below 10,000 ft (14 CFR 91.117(a)), Mach limit, maximum altitude and the
    table's Mach range. Sea-level density and speed of sound from `ambiance`; CAS from the
    subsonic compressible pitot relation (e.g. Anderson, Introduction to Flight, ch. 4)."""
    limits = dataclasses.replace(
        bizjet_scenario.limits, max_dynamic_pressure_pa=20000.0, max_mach=0.82,
        cas_restriction=(250 * KT, 10000 * FT), max_altitude_m=15000.0)
    sl = ambiance.Atmosphere(0.0)
    rho0, a0, p0 = float(sl.density[0]), float(sl.speed_of_sound[0]), float(sl.pressure[0])
    w = bizjet.mass_kg * G0

    def ok(h, v, n=1.0, which=None):
        f = energy_fields(bizjet, h, v, bizjet.mass_kg, limits=limits, load_factor=n)
        return bool(f.limits[which] if which else f.feasible)

    vs1 = np.sqrt(2 * w / (rho0 * BJ_AREA_M2 * 2.0))
    assert not ok(0.0, 0.995 * vs1, which="stall") and ok(0.0, 1.005 * vs1, which="stall")
    vs2 = np.sqrt(2 * 2.0 * w / (rho0 * BJ_AREA_M2 * 2.0))
    assert not ok(0.0, 0.995 * vs2, n=2.0, which="stall")
    assert ok(0.0, 1.005 * vs2, n=2.0, which="stall")
    vq = np.sqrt(2 * 20000.0 / rho0)
    assert ok(0.0, 0.999 * vq, which="dynamic_pressure")
    assert not ok(0.0, 1.001 * vq, which="dynamic_pressure")
    # at sea level on a standard day CAS = TAS
    assert ok(0.0, 0.999 * 250 * KT) and not ok(0.0, 1.001 * 250 * KT)
    # at 9,000 ft: TAS for 250 kt CAS from the pitot relation with ambiance's atmosphere
    h = 9000 * FT
    at = ambiance.Atmosphere(h)
    p, a = float(at.pressure[0]), float(at.speed_of_sound[0])
    qc = p0 * ((1 + 0.2 * (250 * KT / a0) ** 2) ** 3.5 - 1)
    mach = np.sqrt(5 * ((qc / p + 1) ** (2 / 7) - 1))
    v250 = mach * a
    assert ok(h, 0.998 * v250, which="cas_restriction")
    assert not ok(h, 1.002 * v250, which="cas_restriction")
    assert ok(10000 * FT + 1.0, 1.05 * v250, which="cas_restriction")  # above: no restriction
    # Mach 0.82 at 30,000 ft
    a30 = float(ambiance.Atmosphere(30000 * FT).speed_of_sound[0])
    assert ok(30000 * FT, 0.818 * a30, which="mach")
    assert not ok(30000 * FT, 0.822 * a30, which="mach")
    assert ok(14900.0, 200.0, which="altitude") and not ok(15100.0, 200.0, which="altitude")
    # the tables stop at Mach 2.0 (scenario file): beyond it the model is not used
    a40 = float(ambiance.Atmosphere(40000 * FT).speed_of_sound[0])
    assert ok(40000 * FT, 1.99 * a40, which="table_mach")
    assert not ok(40000 * FT, 2.01 * a40, which="table_mach")


def test_energy_map_tas_and_mach_views(bizjet):
    """A map over altitude x TAS and one over altitude x Mach agree where they share points:
    TAS = M a(h), a from `ambiance` (US Standard Atmosphere 1976) within 0.05%."""
    alt = np.linspace(0.0, 15000.0, 31)
    mmap = build_energy_map(bizjet, altitude_m=alt, speed=np.linspace(0.1, 1.0, 10),
                            speed_kind="mach")
    assert mmap.shape == (31, 10) and mmap.ps_m_s.shape == (31, 10)
    a_ref = ambiance.Atmosphere(alt).speed_of_sound
    np.testing.assert_allclose(mmap.tas_m_s[:, 5], 0.6 * a_ref, rtol=5e-4)
    tmap = build_energy_map(bizjet, altitude_m=alt, speed=mmap.tas_m_s[:, 5][[0, 10, 30]])
    for col, row in enumerate([0, 10, 30]):
        assert tmap.mach[row, col] == pytest.approx(0.6, rel=1e-12)
        assert tmap.fields.ps_m_s[row, col] == pytest.approx(mmap.fields.ps_m_s[row, 5],
                                                             rel=1e-12)
    np.testing.assert_allclose(tmap.energy_height_m,
                               alt[:, None] + tmap.tas_m_s**2 / (2 * G0), rtol=1e-12)
    assert energy_height_m(1000.0, 100.0) == pytest.approx(1000.0 + 100.0**2 / (2 * G0))


def test_energy_map_default_grid_interceptor():
    """A 400 x 400 map of the 1969 interceptor (Bryson, Desai & Hoffman 1969): default axes
    cover the thrust table (0 to 70,000 ft, up to Mach 1.8), infeasible points are NaN, and the
    largest Ps at sea level is at high subsonic speed with roughly 200 m/s (from the table:
    the thrust minus the subsonic drag at M 0.9, computed here, not a published value)."""
    sc = load_scenario(INTERCEPTOR)
    model = build_model(sc)
    m = build_energy_map(sc, model=model, shape=(400, 400))
    assert m.shape == (400, 400)
    assert m.altitude_m[0] == 0.0 and m.altitude_m[-1] == pytest.approx(70000 * FT)
    assert np.nanmax(m.mach) > 1.79
    assert np.all(np.isnan(m.ps_m_s[~m.feasible]))
    assert np.all(m.mach[m.feasible] <= 1.8 + 1e-12)
    row = m.ps_m_s[0]
    j = int(np.nanargmax(row))
    assert 0.8 < m.mach[0, j] < 1.0
    # by hand at h = 0, M = 0.9 from the data: T = (34.5 + 37.9)/2 klbf is the linear mean,
    # the fit is monotone between rows, so T lies between the two rows
    v = 0.9 * 340.294
    q = 0.5 * 1.225 * v**2
    s = 530 * FT**2
    w = 42000 * LB * G0
    cl = w / (q * s)
    d = q * s * (0.014 + 0.2094972067 * cl**2)
    lo = v * (34.5e3 * LBF - d) / w
    hi = v * (37.9e3 * LBF - d) / w
    ps09 = float(energy_fields(model, 0.0, v, model.mass_kg).ps_m_s)
    assert lo - 1 < ps09 < hi + 1


def test_maximise_on_lines_analytic():
    """Line maximiser on analytic functions (exact answers known): an interior maximum, a
    maximum on a feasibility boundary, and a narrow higher peak between samples that the
    refinement must find although the best sample lies on the other peak."""
    lo = np.zeros(3)
    hi = np.ones(3)
    centre = np.array([0.3, 0.5, 0.77])

    def parabola(x, line):
        return -((x - centre[line][:, None]) ** 2)

    x, f = maximise_on_lines(parabola, lo, hi, points=21)
    np.testing.assert_allclose(x, centre, atol=1e-6)

    bound = 0.61803

    def ramp(x, line):
        return np.where(x <= bound, x, -np.inf)

    x, f = maximise_on_lines(ramp, lo[:1], hi[:1], points=11)
    assert bound - 1e-6 < x[0] <= bound

    def two_peaks(x, line):
        a = 1.0 - ((x - 0.2) / 0.15) ** 2
        b = 1.05 - ((x - 0.84) / 0.05) ** 2
        return np.maximum(a, b)

    x, f = maximise_on_lines(two_peaks, lo[:1], hi[:1], points=11)
    # samples: 0.2 -> 1.0 (best sample); 0.8 -> 0.41 (a sampled local maximum)
    assert x[0] == pytest.approx(0.84, abs=1e-6) and f[0] == pytest.approx(1.05, abs=1e-9)
    x1, _ = maximise_on_lines(two_peaks, lo[:1], hi[:1], points=11, peaks=1)
    assert x1[0] == pytest.approx(0.2, abs=1e-6)  # one refined peak only: the wrong one
    # nothing feasible: NaN and -inf
    x, f = maximise_on_lines(lambda x, line: np.full(x.shape, -np.inf), lo, hi, points=5)
    assert np.all(np.isnan(x)) and np.all(f == -np.inf)


def test_grid_in_blocks_equals_one_piece():
    """A map computed in blocks of rows (bounded memory) holds exactly the fields and limit
    masks of the same grid computed in one piece."""
    from pathlib import Path

    from climbopt.aircraft import build_model
    from climbopt.energy import _BLOCK_POINTS, build_energy_map, energy_fields
    from climbopt.envelope import envelope_for
    from climbopt.scenario import load_scenario

    scenario = load_scenario(Path(__file__).parents[1] / "scenarios" / "transport_twinjet.toml")
    model = build_model(scenario)
    nv = 250
    emap = build_energy_map(scenario, model=model, shape=(3 * _BLOCK_POINTS // nv + 7, nv))
    whole = energy_fields(model, emap.altitude_m[:, None], emap.speed[None, :], model.mass_kg,
                          limits=envelope_for(scenario, model, path=False))
    for name in ("mach", "cl", "cl_max", "thrust_n", "drag_n", "ps_m_s", "fuel_flow_kg_s",
                 "dynamic_pressure_pa", "feasible", "cas_m_s"):
        np.testing.assert_array_equal(getattr(emap.fields, name), getattr(whole, name), name)
    assert emap.fields.limits.keys() == whole.limits.keys()
    for name, ok in whole.limits.items():
        np.testing.assert_array_equal(emap.fields.limits[name], ok, name)
    assert 0.2 < emap.feasible.mean() < 0.9
