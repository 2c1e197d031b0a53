"""The shared aircraft model: numpy and CasADi agree, tables are honoured, no silent extrapolation."""

from pathlib import Path

import casadi as ca
import numpy as np
import pytest

from climbopt.aircraft import ModelDomainError, build_model
from climbopt.scenario import load_scenario

ROOT = Path(__file__).resolve().parents[1]
INTERCEPTOR = ROOT / "tests" / "data" / "interceptor_1969.toml"
DEMOS = sorted((ROOT / "scenarios").glob("*.toml"))
LBF = 4.4482216152605  # N per lbf (international definition)
FT = 0.3048


@pytest.fixture(scope="module")
def interceptor():
    return build_model(load_scenario(INTERCEPTOR))


def _casadi_model_function(model, rating=None):
    """One MX function of (h, M, CL, throttle) -> [CD, CLmax, T, fuel flow]."""
    h, m, cl, thr = (ca.MX.sym(n) for n in ("h", "m", "cl", "thr"))
    out = ca.vertcat(model.drag_coefficient(cl, m), model.cl_max(m),
                     model.thrust_n(h, m, thr, rating), model.fuel_flow_kg_s(h, m, thr, rating))
    return ca.Function("model", [h, m, cl, thr], [out])


@pytest.mark.parametrize("path", [INTERCEPTOR] + DEMOS, ids=lambda p: p.stem)
def test_numpy_and_casadi_agree_1e9(path):
    """Architecture requirement: both numerics see one model, to 1e-9 relative."""
    model = build_model(load_scenario(path))
    f = _casadi_model_function(model)
    d = model.domain
    rng = np.random.default_rng(7)
    n = 25
    h = rng.uniform(d.altitude_min_m, d.altitude_max_m, n)
    m = rng.uniform(d.mach_min, d.mach_max, n)
    cl = rng.uniform(0.0, 1.0, n)
    thr = rng.uniform(model.throttle_min, model.throttle_max, n)
    ref = np.stack([model.drag_coefficient(cl, m), model.cl_max(m),
                    model.thrust_n(h, m, thr), model.fuel_flow_kg_s(h, m, thr)])
    got = np.array([np.array(f(*args)).ravel() for args in zip(h, m, cl, thr)]).T
    np.testing.assert_allclose(got, ref, rtol=1e-9, atol=1e-12)


def test_interceptor_tables_reproduced(interceptor):
    """At table points the fits return the published data (Bryson, Desai & Hoffman 1969 via
    Betts 2010): thrust 30.4 klbf at Mach 1.0, 10,000 ft; CD0 0.031 at Mach 1.0; eta 0.79."""
    assert interceptor.thrust_n(10000 * FT, 1.0) == pytest.approx(30.4e3 * LBF, rel=1e-9)
    assert interceptor.thrust_n(0.0, 0.8) == pytest.approx(34.5e3 * LBF, rel=1e-9)
    assert interceptor.drag_coefficient(0.0, 1.0) == pytest.approx(0.031, rel=1e-9)
    # CD = cd0 + eta * cl_alpha * alpha^2 = cd0 + (eta / cl_alpha) CL^2 at Mach 1.0
    cl = 4.44 * 0.05
    assert interceptor.drag_coefficient(cl, 1.0) == pytest.approx(0.031 + 0.79 * 4.44 * 0.05**2,
                                                                 rel=1e-9)
    # fuel flow = T / (g0 Isp), Isp = 1600 s
    t = interceptor.thrust_n(5000 * FT, 0.6)
    assert interceptor.fuel_flow_kg_s(5000 * FT, 0.6) == pytest.approx(t / (9.80665 * 1600),
                                                                      rel=1e-9)


def test_interceptor_domain(interceptor):
    """The data domain is the table's: 0-70,000 ft and Mach 0-1.8."""
    d = interceptor.domain
    assert d.altitude_min_m == pytest.approx(0.0)
    assert d.altitude_max_m == pytest.approx(70000 * FT)
    assert (d.mach_min, d.mach_max) == (pytest.approx(0.0), pytest.approx(1.8))
    assert interceptor.in_domain([1000.0, 1000.0, -10.0], [0.5, 1.9, 0.5]).tolist() == [True, False,
                                                                                      False]


def test_far_outside_tables_raises_invalid(interceptor):
    with pytest.raises(ModelDomainError, match="Mach = 2.5"):
        interceptor.thrust_n(1000.0, 2.5)
    with pytest.raises(ModelDomainError, match="altitude"):
        interceptor.thrust_n(40000.0, 0.9)


def test_specific_excess_power_by_hand(interceptor):
    """Ps = V (T - D) / W at one point, assembled by hand from the model's parts."""
    h, v, mass = 3000.0, 250.0, 19000.0
    atm = interceptor.atmosphere(h)
    mach = v / atm.speed_of_sound_m_s
    q = 0.5 * atm.density_kg_m3 * v**2
    cl = mass * 9.80665 / (q * interceptor.reference_area_m2)
    drag = q * interceptor.reference_area_m2 * interceptor.drag_coefficient(cl, mach)
    ps = v * (interceptor.thrust_n(h, mach) - drag) / (mass * 9.80665)
    assert interceptor.specific_excess_power_m_s(h, v, mass) == pytest.approx(ps, rel=1e-12)
    assert 50 < ps < 300  # a fighter-class jet at low altitude (common practice, no source)


def test_hot_day_reduces_thrust():
    """ISA+20 K: thrust at fixed pressure altitude and Mach scales by T_std / T (density lapse,
    common practice, no source)."""
    from dataclasses import replace

    sc = load_scenario(INTERCEPTOR)
    hot = build_model(replace(sc, atmosphere=replace(sc.atmosphere, temperature_offset_k=20.0)))
    std = build_model(sc)
    t_std = std.atmosphere(0.0).temperature_k
    assert hot.thrust_n(0.0, 0.5) == pytest.approx(std.thrust_n(0.0, 0.5) * t_std / (t_std + 20),
                                                   rel=1e-6)


@pytest.mark.parametrize("path", [INTERCEPTOR] + DEMOS, ids=lambda p: p.stem)
def test_fast_force_function_matches_numpy(path):
    """The CasADi force function called through its buffers (used by the integrators) gives
    the numpy model's Mach, dynamic pressure, drag, thrust and fuel flow to 1e-9 relative."""
    from climbopt.aircraft import fast_scalar_function

    model = build_model(load_scenario(path))
    forces = fast_scalar_function(model.force_function())
    d = model.domain
    rng = np.random.default_rng(11)
    for _ in range(10):
        h = rng.uniform(d.altitude_min_m, d.altitude_max_m)
        a = float(model.atmosphere(h).speed_of_sound_m_s)
        v = rng.uniform(d.mach_min, d.mach_max) * a
        mass = model.mass_kg * rng.uniform(0.7, 1.0)
        thr = rng.uniform(model.throttle_min, model.throttle_max)
        p = model.evaluate(h, v, mass, throttle=thr)
        mach, q, _, lift, drag, thrust, ff, _ = forces(h, v, float(p.cl), thr)
        np.testing.assert_allclose([mach, q, lift, drag, thrust, ff],
                                   [p.mach, p.dynamic_pressure_pa, mass * 9.80665, p.drag_n,
                                    p.thrust_n, p.fuel_flow_kg_s], rtol=1e-9)
