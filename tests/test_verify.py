"""Re-simulation check (climbopt.verify): it integrates the stored controls with solve_ivp and
catches wrong trajectories, misses and limit violations."""

from dataclasses import replace
from pathlib import Path

import numpy as np
import pytest

from climbopt.aircraft import build_model
from climbopt.atmosphere import G0
from climbopt.collocation import solve_collocation
from climbopt.envelope import ALTITUDE_UNIT_M
from climbopt.results import COLUMNS, Controls, Trajectory
from climbopt.rutowski import solve_energy_state
from climbopt.scenario import load_scenario
from climbopt.verify import FINAL_MISS_TOLERANCE, resimulate

DATA = Path(__file__).parent / "data"
SCENARIOS = Path(__file__).parent.parent / "scenarios"


@pytest.fixture(scope="module")
def interceptor(interceptor_case):
    return interceptor_case


@pytest.fixture(scope="module")
def solved(interceptor):
    """Minimum time on the published interceptor benchmark (Bryson, Desai & Hoffman 1969), coarse
    mesh, warm-started from the energy-state path (the solver itself checks nothing)."""
    scenario, model = interceptor
    guess = solve_energy_state(scenario, "time", model=model)
    return solve_collocation(scenario, "time", model=model, intervals=40, guess=guess)


def _copy(tr: Trajectory, lift_coefficient) -> Trajectory:
    return tr.with_(controls=Controls(np.array(lift_coefficient, copy=True),
                                      tr.controls.throttle))


def test_optimal_controls_reach_the_target(interceptor, solved):
    """The collocation solution, flown open loop, ends within 0.1% of the final energy height."""
    scenario, model = interceptor
    v = resimulate(solved, scenario, model)
    assert v.ok, v.message
    assert v.final_miss_relative < FINAL_MISS_TOLERANCE
    assert abs(v.final_state_miss.altitude_m) < FINAL_MISS_TOLERANCE * v.final_energy_height_m
    assert v.steps > 40
    assert v.departure_time_s is None
    assert v.final_miss_relative <= v.largest_departure_relative < FINAL_MISS_TOLERANCE
    assert v.worst_limit == "" or v.limit_excess[v.worst_limit] > 0


def test_perturbed_controls_are_caught(interceptor, solved):
    """Lift coefficient 2% too high everywhere: the simulated aircraft misses the target by
    several times the tolerance and the check says so."""
    scenario, model = interceptor
    bad = _copy(solved, 1.02 * solved.controls.lift_coefficient)
    v = resimulate(bad, scenario, model)
    assert not v.ok
    assert v.final_miss_relative > 5 * FINAL_MISS_TOLERANCE
    assert "final miss" in v.message
    assert v.largest_departure_relative >= v.final_miss_relative


def test_departure_time_located(interceptor, solved):
    """Controls perturbed only after 60% of the flight (lift coefficient 5% high): the check
    says where the simulated path first leaves the trajectory, after the perturbation starts
    and before the end, and names that time in its message."""
    scenario, model = interceptor
    t = solved.table["time_s"]
    t_start = 0.6 * t[-1]
    cl = solved.controls.lift_coefficient.copy()
    cl[t > t_start] *= 1.05
    v = resimulate(_copy(solved, cl), scenario, model)
    assert not v.ok
    assert v.departure_time_s is not None
    assert t_start < v.departure_time_s < t[-1]
    assert f"near t = {v.departure_time_s:.1f} s" in v.message


def test_limit_violations_are_measured(interceptor, solved):
    """A dynamic-pressure limit 10% below the path's peak and a minimum altitude of 100 m above
    the path's start: the excesses are reported relative to the limit (q: peak / limit - 1 =
    1/0.9 - 1) and, for altitude, in the envelope's altitude unit (100 m = 0.1 km)."""
    scenario, model = interceptor
    q_peak = solved.table.dynamic_pressure_pa.max()
    strict = replace(scenario, limits=replace(scenario.limits, max_dynamic_pressure_pa=0.9 * q_peak,
                                              min_altitude_m=100.0))
    v = resimulate(solved, strict, model)
    assert not v.ok
    # (the re-simulated peak differs from the coarse collocation points' peak by a fraction of 1%)
    assert v.limit_excess["dynamic_pressure"] == pytest.approx(1 / 0.9 - 1, rel=0.05)
    # (open loop, the simulated path may sink a fraction of a metre below the ground it rides)
    assert v.limit_excess["altitude"] == pytest.approx(100.0 / ALTITUDE_UNIT_M, rel=1e-2)
    assert v.max_limit_excess == v.limit_excess["dynamic_pressure"]
    assert v.worst_limit == "dynamic_pressure"  # 11x its 1% tolerance; altitude 5x its 20 m
    assert "dynamic pressure" in v.message


def test_trajectory_without_controls_invalid(interceptor, solved):
    scenario, model = interceptor
    plain = Trajectory(method="energy-state", objective="time",
                       table={k: np.array(v) for k, v in solved.table.items()})
    with pytest.raises(ValueError, match="energy-state trajectory has no control histories"):
        resimulate(plain, scenario, model)


def test_energy_rate_equals_specific_excess_power():
    """Level flight at load factor 1 with thrust along the path: the energy height grows at
    Ps = V (T - D) / (m g0) (Rutowski, J. Aeronaut. Sci. 21(3), 1954), which the aircraft model
    computes independently (AircraftModel.specific_excess_power_m_s). Over 0.2 s the simulated
    energy gain divided by the time matches it to 1e-3 relative."""
    scenario = load_scenario(SCENARIOS / "transport_twinjet.toml")
    model = build_model(scenario)
    h, v, m = 5000.0, 180.0, 65000.0
    atm = model.atmosphere(np.array(h))
    q = 0.5 * float(atm.density_kg_m3) * v * v
    cl = m * G0 / (q * model.reference_area_m2)
    dt = 0.2
    n = 3
    table = {k: np.zeros(n) for k in COLUMNS}
    table.update(time_s=np.array([0.0, dt / 2, dt]), altitude_m=np.full(n, h),
                 tas_m_s=np.full(n, v), mass_kg=np.full(n, m), throttle=np.ones(n))
    tr = Trajectory(method="collocation", objective="time", table=table,
                    controls=Controls(np.full(n, cl), np.ones(n)))
    res = resimulate(tr, scenario, model)
    end = res.simulated_final_state
    he0 = h + v * v / (2 * G0)
    he1 = end.altitude_m + end.tas_m_s ** 2 / (2 * G0)
    ps = float(model.specific_excess_power_m_s(h, v, m, 1.0, 1.0, scenario.mission.rating))
    assert abs(ps) > 1.0  # a real climb or descent rate, not a trivial zero
    assert (he1 - he0) / dt == pytest.approx(ps, rel=1e-3)
    ff = float(model.fuel_flow_kg_s(h, v / float(atm.speed_of_sound_m_s), 1.0,
                                    scenario.mission.rating))
    assert (m - end.mass_kg) / dt == pytest.approx(ff, rel=1e-3)
    accel = ps * G0 / v  # level flight: dV/dt = (T - D) / m = Ps g0 / V
    assert end.distance_m == pytest.approx(v * dt + 0.5 * accel * dt**2, rel=1e-5)
