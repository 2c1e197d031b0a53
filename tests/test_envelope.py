"""The flight envelope is written once (climbopt.envelope): the energy-state mask, the collocation
constraint and the re-simulation check agree about every limit at points just inside and just
outside its boundary, and a point exactly on a limit is inside for all three."""

from __future__ import annotations

import dataclasses
from pathlib import Path

import numpy as np
import pytest

from climbopt import collocation, verify
from climbopt.aircraft import build_model
from climbopt.airspeed import tas_from_speed
from climbopt.atmosphere import G0
from climbopt.energy import energy_fields
from climbopt.envelope import INSIDE_TOL, envelope_for
from climbopt.scenario import load_scenario

ROOT = Path(__file__).resolve().parents[1]
FT = 0.3048              # m, exact (NIST SP 811)
KT = 1852.0 / 3600.0     # m/s, exact (NIST SP 811)
EPS = 1e-6               # relative step across a boundary (far above the 1e-9 rule)


@pytest.fixture(scope="module")
def case():
    """The demo transport (invented aircraft) with a dynamic-pressure limit added, so that every
    kind of limit is present (free profile: the altitude row is the scenario's 41,000 ft limit);
    its model and envelope; the collocation point function."""
    scenario = load_scenario(ROOT / "scenarios" / "transport_twinjet.toml")
    limits = dataclasses.replace(scenario.limits, max_dynamic_pressure_pa=20_000.0)
    scenario = dataclasses.replace(scenario, limits=limits,
                                   mission=dataclasses.replace(scenario.mission, profile="free"))
    model = build_model(scenario)
    st = collocation._setup(scenario, model, "time")
    return scenario, model, envelope_for(scenario, model), st, collocation._point_function(st)


def _verdicts(case, name, h, v, n=1.0):
    """(energy mask, collocation constraint, re-simulation check): True = inside ``name``."""
    scenario, model, env, st, F = case
    m = model.mass_kg
    energy = bool(energy_fields(model, h, v, m, limits=env, load_factor=n).limits[name])
    q = 0.5 * float(model.atmosphere(np.array(h)).density_kg_m3) * v * v
    cl = n * m * G0 / (q * model.reference_area_m2)
    if name == "altitude":  # a simple bound of the collocation problem
        colloc = st.state_lb[0] - INSIDE_TOL * 1e3 <= h <= st.state_ub[0] + INSIDE_TOL * 1e3
    else:
        x = np.array([h, v, 0.05, m, 0.0]) / st.x_scale
        u = [cl, 1.0] if st.throttle_free else [cl]
        g = np.asarray(F(x, u, st.point_params)[1]).ravel()[st.path_names.index(name)]
        k = st.path_names.index(name)
        colloc = max(g - st.path_ub[k], st.path_lb[k] - g) <= INSIDE_TOL
    ys = np.array([[h, v, 0.05, m, 0.0]])
    check = verify._limit_excess(env, model, ys, np.array([cl]))[name] <= INSIDE_TOL
    return energy, bool(colloc), bool(check)


def _tas_for_cas(cas_m_s, h):
    return float(tas_from_speed("cas", cas_m_s, h, 0.0))


def _boundary_points(case):
    """(limit name, h, v, n) at the boundary of each limit, and the direction of 'outside':
    +1 when a larger speed (or load factor, or altitude) is outside."""
    scenario, model, env, st, F = case
    lim = scenario.limits
    h30 = 30000 * FT
    a30 = float(model.atmosphere(np.array(h30)).speed_of_sound_m_s)
    h20 = 20000 * FT
    rho0 = float(model.atmosphere(np.array(0.0)).density_kg_m3)
    h10 = 10000 * FT
    rho10 = float(model.atmosphere(np.array(h10)).density_kg_m3)
    a10 = float(model.atmosphere(np.array(h10)).speed_of_sound_m_s)
    w = model.mass_kg * G0
    v_stall = 60.0
    for _ in range(50):  # V_s = sqrt(2 W / (rho S CLmax(V_s / a))) by fixed-point iteration
        v_stall = np.sqrt(2 * w / (rho10 * model.reference_area_m2
                                   * float(model.cl_max(v_stall / a10))))
    return [
        ("mach", h30, lim.max_mach * a30, 1.0, "speed"),
        ("cas", h20, _tas_for_cas(lim.max_cas_m_s, h20), 1.0, "speed"),
        ("cas_restriction", 5000 * FT, _tas_for_cas(lim.cas_restriction[0], 5000 * FT), 1.0,
         "speed"),
        ("dynamic_pressure", 0.0, np.sqrt(2 * lim.max_dynamic_pressure_pa / rho0), 1.0, "speed"),
        # stall: the speed where CL = CLmax(M) at 1 g (common practice, no source)
        ("stall", h10, v_stall, 1.0, "slow"),
        ("load_factor", h20, 200.0, lim.max_load_factor, "load"),
        ("altitude", lim.max_altitude_m, 230.0, 1.0, "altitude"),
    ]


@pytest.mark.parametrize("index", range(7))
def test_three_consumers_agree_at_each_boundary(case, index):
    """Just inside (1e-6 relative) every consumer says inside, just outside every consumer says
    outside, exactly on the boundary every consumer says inside (the one boundary rule)."""
    name, h, v, n, kind = _boundary_points(case)[index]

    def at(f):
        if kind == "speed":
            return _verdicts(case, name, h, v * f, n)
        if kind == "slow":
            return _verdicts(case, name, h, v / f, n)
        if kind == "load":
            return _verdicts(case, name, h, v, n * f)
        return _verdicts(case, name, h + (f - 1.0) * 1000.0, v, n)   # +-1 mm at EPS

    inside, outside = at(1.0 - EPS), at(1.0 + EPS)
    assert inside == (True, True, True), (name, inside)
    assert outside == (False, False, False), (name, outside)
    assert at(1.0) == (True, True, True), name


def test_restriction_released_above_its_altitude(case):
    """14 CFR 91.117(a) limits the speed *below* 10,000 ft: 1 m above the restriction altitude
    the energy mask and the check allow 300 kt CAS; the collocation constraint is the smooth,
    never looser form, which releases the restriction over the 300 m above it."""
    scenario, model, env, st, F = case
    h_r = scenario.limits.cas_restriction[1]
    v = _tas_for_cas(300 * KT, h_r + 1.0)
    energy, colloc, check = _verdicts(case, "cas_restriction", h_r + 1.0, v)
    assert energy and check and not colloc
    assert all(_verdicts(case, "cas_restriction", h_r + 301.0, _tas_for_cas(300 * KT, h_r + 301.0)))
    assert not any(_verdicts(case, "cas_restriction", h_r - 1.0, _tas_for_cas(300 * KT, h_r - 1.0)))


def test_target_exactly_on_a_limit_is_inside():
    """A target written exactly on the CAS limit in the file's units ("340 kt" against a limit of
    "340 kt") is inside for the envelope (the one boundary rule absorbs unit round-off)."""
    scenario = load_scenario(ROOT / "scenarios" / "transport_twinjet.toml")
    model = build_model(scenario)
    env = envelope_for(scenario, model)
    h = 20000 * FT
    v = _tas_for_cas(scenario.limits.max_cas_m_s, h)
    f = energy_fields(model, h, v, model.mass_kg, limits=env)
    assert bool(f.limits["cas"])


def test_procedure_profile_window_and_no_descent():
    """With the procedure profile the envelope's altitude window runs from the start to the
    target altitude and a 'no descent' row appears; the free profile has neither."""
    scenario = load_scenario(ROOT / "scenarios" / "transport_twinjet.toml")
    model = build_model(scenario)
    proc = dataclasses.replace(scenario,
                               mission=dataclasses.replace(scenario.mission, profile="procedure"))
    free = dataclasses.replace(scenario,
                               mission=dataclasses.replace(scenario.mission, profile="free"))
    e_proc, e_free = envelope_for(proc, model), envelope_for(free, model)
    assert e_proc.altitude_min_m == pytest.approx(1500 * FT)
    assert e_proc.altitude_max_m == pytest.approx(35000 * FT)
    assert "climb" in e_proc.names and "climb" not in e_free.names
    assert e_free.altitude_min_m == pytest.approx(1000 * FT)
    assert e_free.altitude_max_m == pytest.approx(41000 * FT)
