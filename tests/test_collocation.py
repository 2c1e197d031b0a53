"""Direct collocation (climbopt.collocation) against the published minimum-time-to-climb benchmark.

Benchmark: the supersonic interceptor of A. E. Bryson, M. N. Desai and W. C. Hoffman, "Energy-state
approximation in performance optimization of supersonic aircraft", J. Aircraft 6(6), 1969, with
the data and problem statement as tabulated in J. T. Betts, *Practical Methods for Optimal
Control and Estimation Using Nonlinear Programming*, 2nd ed., SIAM 2010 (tests/data/
interceptor_1969.toml).

Solved trajectories are shared through module-scoped fixtures to keep the file fast. The
solutions come through the pipeline (energy-state warm start, collocation, re-simulation check),
as a run makes them.
"""

from dataclasses import replace
from pathlib import Path

import numpy as np
import pytest

from climbopt import CACHE_ENV
from climbopt.aircraft import build_model
from climbopt.collocation import SolverFailure, solve_collocation
from climbopt.pipeline import solve_case
from climbopt.rutowski import solve_energy_state
from climbopt.scenario import load_scenario
from climbopt.verify import FINAL_MISS_TOLERANCE, PATH_VIOLATION_TOLERANCE, resimulate

DATA = Path(__file__).parent / "data"
SCENARIOS = Path(__file__).parent.parent / "scenarios"
SLUG_KG = 14.593902937


@pytest.fixture(scope="module")
def interceptor(interceptor_case):
    return interceptor_case


@pytest.fixture(scope="module")
def min_time(interceptor):
    scenario, model = interceptor
    return solve_case(scenario, "collocation", "time", model=model)


@pytest.fixture(scope="module")
def min_time_cold(interceptor):
    scenario, model = interceptor
    return solve_collocation(scenario, "time", model=model, guess="straight")


@pytest.fixture(scope="module")
def min_fuel(interceptor):
    scenario, model = interceptor
    return solve_case(scenario, "collocation", "fuel", model=model)


def test_min_time_matches_published_benchmark(min_time):
    """Minimum time to climb on the 1969 data: independent published direct-method solutions of
    the same problem lie between about 320.2 s and 321.0 s (Betts 2010, minimum-time-to-climb
    example; Bryson, Desai & Hoffman 1969 give about 320 s). The band is as wide as it is
    because the coarse tables must be fitted (each fit gives a slightly different aircraft) and
    the h >= 0 bound is active early, which together move the answer by a few tenths of a
    percent. Accepted: the band widened by 0.2 % each side (319.6-321.6 s) for our table fits;
    a 0.5 % regression of our 321.3 s (322.9 s) fails."""
    assert min_time.converged and min_time.ranked
    assert min_time.method == "collocation" and min_time.objective == "time"
    assert 319.6 <= min_time.time_s <= 321.6
    # End state exactly the published target: 65,600 ft, 968.148 ft/s, level.
    tb = min_time.table
    assert tb["altitude_m"][-1] == pytest.approx(65600 * 0.3048, abs=1e-6)
    assert tb["tas_m_s"][-1] == pytest.approx(968.148 * 0.3048, abs=1e-6)
    assert tb["flight_path_angle_rad"][-1] == pytest.approx(0.0, abs=1e-9)


def test_min_time_final_mass_matches_published(min_time):
    """Final mass on the minimum-time path: about 1161.9 slug (Betts 2010, comparison of the
    minimum-fuel and minimum-time solutions of the 1969 problem; from memory); within 0.5%."""
    assert min_time.final_mass_kg == pytest.approx(1161.9 * SLUG_KG, rel=0.005)


def test_min_time_keeps_ground_and_dives_through_transonic(min_time):
    """Shape (Bryson, Desai & Hoffman 1969): subsonic climb, a dive through the transonic drag
    rise, then a supersonic climb. The altitude >= 0 bound is active at the start of the path
    (common practice for this benchmark, no source: without it the time drops to ~319 s): the
    solution never goes below 0 m and runs along it for the first seconds."""
    tb = min_time.table
    t, h, mach = tb["time_s"], tb["altitude_m"], tb["mach"]
    assert h.min() >= -1e-6
    early = (t > 1.0) & (t < 15.0)
    assert np.all(h[early] < 1.0)  # flies along the ground bound
    sub = mach < 0.99
    i_peak = int(np.argmax(np.where(sub, h, -np.inf)))
    assert h[i_peak] > 8000.0  # subsonic climb well up before the dive
    after = slice(i_peak, int(np.argmax(mach > 1.2)))
    assert h[i_peak] - h[after].min() > 500.0  # dives while going supersonic
    assert mach[after].max() > 1.0


def test_min_time_resimulation(min_time):
    """Re-integrating the optimal controls (scipy solve_ivp, rtol 1e-10) reaches the target to
    within 0.1% of the final energy height, and no limit is exceeded beyond the tolerance."""
    v = min_time.verification
    assert v is not None and v.ok, v.message
    assert v.final_miss_relative < 1e-3
    assert FINAL_MISS_TOLERANCE == 1e-3
    assert v.max_limit_excess <= PATH_VIOLATION_TOLERANCE
    he_f = 65600 * 0.3048 + (968.148 * 0.3048) ** 2 / (2 * 9.80665)
    assert v.final_energy_height_m == pytest.approx(he_f, rel=1e-9)


def test_cold_and_warm_start_agree(min_time, min_time_cold):
    """A straight-line guess and the energy-state guess reach the same optimum (well-posed
    problem: within 0.1%), and the warm start needs no more IPOPT iterations."""
    assert min_time_cold.converged
    assert min_time_cold.time_s == pytest.approx(min_time.time_s, rel=1e-3)
    assert min_time.iterations <= min_time_cold.iterations
    assert any("straight line" in n for n in min_time_cold.notes)
    assert any("energy-state" in n for n in min_time.notes)


def test_energy_state_answer_is_optimistic(interceptor, min_time):
    """The energy-state time on this problem is well below the point-mass optimum: its final
    zoom from about Mach 1.7 to the target is free (Bryson, Desai & Hoffman 1969: the final
    constant-energy zoom costs about a minute in the point-mass model; a value near 320 s would
    be suspicious)."""
    scenario, model = interceptor
    es = solve_energy_state(scenario, "time", model=model)
    assert es.time_s < 0.95 * min_time.time_s


def test_min_fuel_matches_published(min_fuel, min_time):
    """Minimum fuel, full-thrust data, free final time: final mass about 1177.7-1178.1 slug
    (about 17,190 kg), climb time about 380 s, only weakly determined (Betts 2010, minimum-fuel
    variant of the 1969 problem, from memory: a few lb more fuel at 370 or 390 s, so fuel is
    checked tightly, time loosely). With constant specific impulse the throttle stays at full."""
    assert min_fuel.converged and min_fuel.objective == "fuel"
    assert min_fuel.final_mass_kg == pytest.approx(17190.0, rel=0.005)
    assert min_fuel.time_s == pytest.approx(380.0, rel=0.10)
    assert min_fuel.fuel_kg < min_time.fuel_kg
    assert min_fuel.time_s > min_time.time_s
    assert np.mean(min_fuel.controls.throttle > 0.99) > 0.95
    assert min_fuel.verification.ok, min_fuel.verification.message


def test_dynamic_pressure_limit_is_ridden_not_exceeded(interceptor, min_time):
    """With a dynamic-pressure limit below the unconstrained path's peak (about 57 kPa) the
    optimum rides the limit over part of the supersonic climb and never exceeds it: at the
    collocation points to IPOPT's tolerance, along the re-simulated path to the stated
    PATH_VIOLATION_TOLERANCE (1% of the limit; measured about 0.01%). Riding a limit costs time
    (common practice, no source)."""
    scenario, model = interceptor
    q_max = 45_000.0
    assert min_time.table.dynamic_pressure_pa.max() > 1.2 * q_max
    limited = replace(scenario, limits=replace(scenario.limits, max_dynamic_pressure_pa=q_max))
    tr = solve_case(limited, "collocation", "time", model=model)
    q = tr.table.dynamic_pressure_pa
    assert tr.converged
    assert q.max() <= q_max * (1 + 1e-6)
    riding = q >= q_max * (1 - 1e-3)
    t = tr.table["time_s"]
    assert np.ptp(t[riding]) > 30.0  # rides it for a while, not just touches
    assert tr.time_s > min_time.time_s
    assert tr.verification.limit_excess["dynamic_pressure"] <= PATH_VIOLATION_TOLERANCE
    assert PATH_VIOLATION_TOLERANCE == 0.01
    assert tr.verification.ok, tr.verification.message


def test_weighted_objective_lies_between(interceptor, min_time, min_fuel):
    """fuel + w * time with w = 2 kg/s (near the fuel-flow scale of this aircraft): the
    compromise takes no less fuel than the minimum-fuel path and no more time than it, and no
    less time than the minimum-time path (definition of the weighted objective)."""
    scenario, model = interceptor
    sc = replace(scenario, solver=replace(scenario.solver, cost_weight_kg_per_s=2.0))
    guess = solve_energy_state(sc, "weighted", model=model)
    tr = solve_collocation(sc, "weighted", model=model, intervals=60, guess=guess)
    assert tr.converged and tr.objective == "weighted"
    assert min_time.time_s * (1 - 1e-4) <= tr.time_s <= min_fuel.time_s * (1 + 1e-4)
    assert min_fuel.fuel_kg * (1 - 1e-4) <= tr.fuel_kg <= min_time.fuel_kg * (1 + 1e-4)
    cost = tr.fuel_kg + 2.0 * tr.time_s
    assert cost <= min_time.fuel_kg + 2.0 * min_time.time_s + 1e-3 * cost
    assert cost <= min_fuel.fuel_kg + 2.0 * min_fuel.time_s + 1e-3 * cost


def test_forced_failure_raises_with_status(interceptor):
    """IPOPT stopped after one iteration: SolverFailure with IPOPT's status and iteration count,
    and the iterate flagged as not converged (never reported as optimal)."""
    scenario, model = interceptor
    with pytest.raises(SolverFailure) as info:
        solve_collocation(scenario, "time", model=model, guess="straight", intervals=20,
                          ipopt_options={"max_iter": 1})
    err = info.value
    assert err.status == "Maximum_Iterations_Exceeded"
    assert err.iterations == 1
    assert "Maximum_Iterations_Exceeded" in str(err)
    assert err.trajectory is not None and err.trajectory.converged is False
    assert err.trajectory.table["time_s"].shape == (41,)


def test_unknown_objective_invalid(interceptor):
    scenario, model = interceptor
    with pytest.raises(ValueError, match="objective must be one of time, fuel, weighted"):
        solve_collocation(scenario, "range", model=model)


def test_progress_reports_iterations(interceptor):
    """The progress callback receives one message per IPOPT iteration and per mesh pass."""
    scenario, model = interceptor
    msgs = []
    tr = solve_collocation(scenario, "time", model=model, intervals=30,
                           progress=lambda m, f: msgs.append((m, f)))
    per_iteration = [m for m, _ in msgs if "IPOPT iteration" in m]
    assert len(per_iteration) >= tr.iterations
    assert any(m.startswith("mesh pass 1: 30 intervals") for m, _ in msgs)


# Demo scenarios (invented aircraft): energy-state and collocation answers compared. The
# energy-state method treats altitude-speed exchanges as free and instantaneous (Rutowski 1954;
# Bryson, Desai & Hoffman 1969), so its answer can be optimistic or pessimistic; the bounds below
# are per scenario, each with its reason.
@pytest.mark.parametrize("name", ["transport_twinjet", "turboprop_regional"])
def test_subsonic_demos_agree_with_energy_state(name):
    """Subsonic climbs: the kinetic energy at stake (V^2 / 2 g0, about 0.5-1.5 km) is small next
    to the altitude gained and the optimal paths need no zooms, so the energy-state
    approximation is close: time and fuel agree within 1% (common practice, no source; measured
    agreement 0.1-0.2%)."""
    scenario = load_scenario(SCENARIOS / f"{name}.toml")
    model = build_model(scenario)
    es = solve_energy_state(scenario, "time", model=model)
    col = solve_collocation(scenario, "time", model=model, guess=es, intervals=50)
    v = resimulate(col, scenario, model)
    assert col.converged and v.ok, v.message
    assert col.time_s == pytest.approx(es.time_s, rel=0.01)
    assert col.fuel_kg == pytest.approx(es.fuel_kg, rel=0.01)


@pytest.fixture(scope="module")
def dash_demo():
    """The climb-and-dash demo (interceptor_dash.toml, invented aircraft), its energy-state
    minimum-time answer and the collocation minimum time warm-started from it (50 intervals)."""
    scenario = load_scenario(SCENARIOS / "interceptor_dash.toml")
    model = build_model(scenario)
    es = solve_energy_state(scenario, "time", model=model)
    col = solve_collocation(scenario, "time", model=model, guess=es, intervals=50)
    return scenario, model, es, col.with_(verification=resimulate(col, scenario, model))


def _corner_altitude_m(q_max_pa: float, mach: float) -> float:
    """Altitude [m] where flight at ``mach`` has dynamic pressure ``q_max_pa``:
    q = (gamma / 2) p M^2 with gamma = 1.4 (compressible-flow identity, e.g. NACA Report 1135,
    1953), the pressure from the `ambiance` implementation of the US Standard Atmosphere 1976
    (outside this project), by bisection."""
    from ambiance import Atmosphere

    p_target = q_max_pa / (0.7 * mach**2)
    lo, hi = 0.0, 20000.0
    for _ in range(60):
        mid = 0.5 * (lo + hi)
        if float(Atmosphere(mid).pressure[0]) > p_target:
            lo = mid
        else:
            hi = mid
    return 0.5 * (lo + hi)


def test_dash_demo_min_time_converges_and_flies(dash_demo):
    """Minimum time on the dash demo: converged, and the optimal controls, flown open loop,
    reproduce the path (re-simulation miss below 0.1% of the final energy height, limits kept
    within 1%). The optimum covers the distance at Mach 2 on the dynamic-pressure limit, where
    both limits hold altitude and speed: level flight there needs load factor cos(gamma) = 1
    (point-mass equations, Bryson, Desai & Hoffman 1969), so the lift coefficient is smooth; a
    transcription whose controls alternate between nodes and midpoints on that arc (load factor
    -3.6 / +3.3 at every other point, all equally fast) fails these checks."""
    from ambiance import Atmosphere

    scenario, model, es, col = dash_demo
    assert col.converged, col.status
    v = col.verification
    assert v.ok, v.message
    assert v.final_miss_relative < FINAL_MISS_TOLERANCE
    assert v.max_limit_excess <= PATH_VIOLATION_TOLERANCE
    assert v.largest_departure_relative < FINAL_MISS_TOLERANCE
    tb = col.table
    q_max = scenario.limits.max_dynamic_pressure_pa
    mach_max = scenario.limits.max_mach
    corner = ((tb["dynamic_pressure_pa"] >= q_max * (1 - 1e-4))
              & (tb["mach"] >= mach_max * (1 - 1e-4)))
    t = tb["time_s"][corner]
    assert t.size > 20 and np.ptp(t) > 60.0  # a cruise on both limits, not a touch
    h_corner = _corner_altitude_m(q_max, 2.0)
    # (the model's atmosphere is a smooth fit of the standard; 20 m covers the fit and scenario
    # unit rounding)
    assert np.all(np.abs(tb["altitude_m"][corner] - h_corner) < 20.0)
    # Away from its ends (the push-over onto the arc and the pull-up off it take a few seconds):
    interior = corner & (tb["time_s"] > t.min() + 10.0) & (tb["time_s"] < t.max() - 10.0)
    n = tb["load_factor"][interior]
    assert n.size > 15
    assert np.all(np.abs(n - 1.0) < 0.02), (n.min(), n.max())
    # Mach 2 at that altitude (speed of sound from ambiance) is faster than at the target.
    v_fast = 2.0 * float(Atmosphere(h_corner).speed_of_sound[0])
    assert np.all(np.abs(tb["tas_m_s"][corner] - v_fast) < 0.5)


def test_dash_demo_bounds(dash_demo):
    """Climb and dash (interceptor_dash.toml): climb to Mach 2.0 at 40,000 ft, dash to 150 nmi.
    The energy-state solver dashes at the target state; the point-mass optimum flies the
    distance at Mach 2 lower down, on the dynamic-pressure limit, where the warmer air makes it
    about 2% faster, and zooms to the target at the end (its dash phase shrinks to nothing).
    Bound on the difference: the collocation time is at most the energy-state time + 1% (the
    energy-state zooms are free; common practice, no source), and at least the energy-state time
    minus the time the faster cruise can save over the whole distance, minus the same 1%. The
    hard physical floor (the distance at the Mach limit at the sea-level speed of sound) holds
    as well. The two effects partly cancel: measured 546.1 s against 547.0 s (0.16%); the test
    also holds them within 1% of each other, tighter than the reasoning guarantees, so that a
    change in either solver that moves them apart is noticed."""
    scenario, model, es, col = dash_demo
    assert col.converged
    d = scenario.mission.dash_distance_m
    assert col.distance_m == pytest.approx(d, rel=1e-9)
    assert d / (scenario.limits.max_mach * 340.294) <= col.time_s <= 1.01 * es.time_s
    from ambiance import Atmosphere

    v_target = scenario.mission.target.tas_m_s
    v_fast = 2.0 * float(Atmosphere(_corner_altitude_m(
        scenario.limits.max_dynamic_pressure_pa, 2.0)).speed_of_sound[0])
    assert v_fast > v_target
    saving = d * (1.0 / v_target - 1.0 / v_fast)
    assert col.time_s >= es.time_s - saving - 0.01 * es.time_s
    assert col.time_s == pytest.approx(es.time_s, rel=0.01)
    assert any(n.startswith("dash phase:") for n in col.notes)


# ---- one problem for many solves (parameters), compiled point functions, stopping -------------

def _changed(scenario, **values):
    from climbopt.sweep import apply_case

    return apply_case(scenario, values)


def _reference_rates(model, x, u, body):
    """Scaled state rates of the point-mass model at one point, in plain numpy from ``model``
    (built with the scenario's own mass, temperature offset and thrust scale)."""
    from climbopt.atmosphere import G0

    scale = np.array([1e4, 300.0, 1.0, model.mass_kg, 1e5])
    h, v, gam, m, _ = x * scale
    cl, thr = u
    atm = model.atmosphere(np.array(h))
    mach = v / float(atm.speed_of_sound_m_s)
    q = 0.5 * float(atm.density_kg_m3) * v * v
    S = model.reference_area_m2
    thrust, ff = (float(t) for t in model.thrust_and_fuel_flow(h, mach, thr))
    drag = q * S * float(model.drag_coefficient(cl, mach))
    alpha = cl / float(model.lift_slope_per_rad(mach)) if body else 0.0
    rates = [v * np.sin(gam), (thrust * np.cos(alpha) - drag) / m - G0 * np.sin(gam),
             (thrust * np.sin(alpha) + q * S * cl) / (m * v) - G0 * np.cos(gam) / v, -ff,
             v * np.cos(gam)]
    return np.array(rates) / scale


@pytest.mark.parametrize("name", ["interceptor_1969", "turboprop_regional"])
def test_point_function_parameters_match_numpy_model(name):
    """One point function built for the scenario as written, evaluated with another start mass,
    temperature offset (ISA+12 K) and thrust scale as parameters, gives the rates of a numpy
    model built with those numbers, to 1e-9 relative at random points (jet with body-axis
    thrust; propeller, whose thrust needs the speed of sound of the offset day)."""
    from climbopt import collocation

    path = DATA / f"{name}.toml" if name.startswith("interceptor") else SCENARIOS / f"{name}.toml"
    base = load_scenario(path)
    model = build_model(base)
    st = collocation._setup(base, model, "time")
    F = collocation._point_function(st)
    other = _changed(base, mass=0.93 * model.mass_kg, temperature_offset=12.0, thrust_scale=1.07)
    ref_model = build_model(other)
    params = [0.93 * model.mass_kg, 12.0, 1.07]
    rng = np.random.default_rng(7)
    for _ in range(20):
        h = rng.uniform(st.state_lb[0] + 500.0, min(st.state_ub[0], 12000.0))
        a = float(ref_model.atmosphere(np.array(h)).speed_of_sound_m_s)
        mach = rng.uniform(model.domain.mach_min + 0.1, min(model.domain.mach_max, 1.6) - 0.05)
        x = np.array([h / 1e4, mach * a / 300.0, rng.uniform(-0.2, 0.3), rng.uniform(0.8, 1.0),
                      rng.uniform(0.0, 2.0)])
        u = np.array([rng.uniform(0.05, 0.6), rng.uniform(0.4, 1.0)])
        got = np.asarray(F(x, u[: st.n_u], params)[0]).ravel()
        want = _reference_rates(ref_model, x, u if st.throttle_free else [u[0], 1.0],
                                st.body_thrust)
        np.testing.assert_allclose(got, want, rtol=1e-9, atol=1e-12)


def test_reused_problem_equals_rebuilt_for_other_numbers(interceptor, min_time):
    """A case with another start mass, temperature offset, thrust scale and target speed is
    solved on the problem already built for the published case (reused: same mesh) and on a
    freshly built one: the same optimum to 1e-6 relative, and a different one from the
    published case's (the numbers really reach the problem)."""
    from climbopt import collocation

    scenario, model = interceptor
    other = _changed(scenario, mass=0.97 * model.mass_kg, temperature_offset=8.0,
                     thrust_scale=1.04,
                     target_speed=0.98 * scenario.mission.target.speed_value)
    other_model = build_model(other)
    guess = solve_energy_state(other, "time", model=other_model)
    solve_collocation(scenario, "time", model=model, guess=guess)  # the base problem is built
    reused = solve_collocation(other, "time", model=other_model, guess=guess)
    assert any("on 1 of" in n or "on 2 of" in n for n in reused.notes
               if n.startswith("NLP reused")), reused.notes
    collocation._TRANSCRIPTIONS.clear()
    rebuilt = solve_collocation(other, "time", model=other_model, guess=guess)
    assert any(n.startswith("NLP reused") and " on 0 of" in n for n in rebuilt.notes)
    assert reused.time_s == pytest.approx(rebuilt.time_s, rel=1e-6)
    assert reused.fuel_kg == pytest.approx(rebuilt.fuel_kg, rel=1e-6)
    assert reused.table["altitude_m"].shape == rebuilt.table["altitude_m"].shape
    np.testing.assert_allclose(reused.table["tas_m_s"], rebuilt.table["tas_m_s"], rtol=1e-5)
    assert abs(reused.time_s / min_time.time_s - 1.0) > 1e-3


def test_time_limit_stops_ipopt(interceptor):
    """A time limit that is already spent stops IPOPT at its first iteration: SolverFailure with
    status Maximum_WallTime_Exceeded and the limit named, never an optimum."""
    scenario, model = interceptor
    with pytest.raises(SolverFailure) as info:
        solve_collocation(scenario, "time", model=model, guess="straight", intervals=20,
                          time_limit_s=1e-9)
    assert info.value.status == "Maximum_WallTime_Exceeded"
    assert "time limit" in str(info.value)
    assert info.value.trajectory is not None and info.value.trajectory.converged is False


def test_interrupt_during_ipopt_is_raised_not_a_failure(interceptor):
    """Ctrl-C (SIGINT) arriving while IPOPT iterates stops the solve with KeyboardInterrupt
    (the run is stopped), not with a SolverFailure."""
    import os
    import signal

    scenario, model = interceptor

    def progress(message, fraction):
        if "IPOPT iteration 3," in message:
            os.kill(os.getpid(), signal.SIGINT)

    with pytest.raises(KeyboardInterrupt):
        solve_collocation(scenario, "time", model=model, guess="straight", intervals=20,
                          progress=progress)


def _cc():
    import shutil

    return shutil.which("cc") or shutil.which("gcc")


@pytest.mark.skipif(_cc() is None, reason="no C compiler")
def test_compiled_point_function_cached_and_invalidated(tmp_path, monkeypatch):
    """The compiled point function equals CasADi's own evaluation to 1e-12 relative; once in
    the on-disk cache it is loaded, not compiled again, and a solve uses it without being asked
    to; another table value is another artefact (not cached yet), so a changed aircraft never
    uses a stale one."""
    from climbopt import collocation

    monkeypatch.setenv(CACHE_ENV, str(tmp_path / "cache"))
    monkeypatch.setattr(collocation, "_LOADED", {})
    scenario = load_scenario(SCENARIOS / "turboprop_regional.toml")
    fun, path, note = collocation.compiled_point_function(scenario)
    assert path.parent == tmp_path / "cache" and path.exists() and "compiled to C" in note
    model = build_model(scenario)
    st = collocation._setup(scenario, model, "time")
    F = collocation._point_function(st)
    rng = np.random.default_rng(3)
    for _ in range(10):
        x = np.array([rng.uniform(0.1, 0.7), rng.uniform(0.3, 0.5), rng.uniform(-0.1, 0.2),
                      rng.uniform(0.9, 1.0), 0.5])
        u = np.array([rng.uniform(0.1, 1.0), rng.uniform(0.4, 1.0)])
        for a, b in zip(fun(x, u, st.point_params), F(x, u, st.point_params)):
            np.testing.assert_allclose(np.asarray(a), np.asarray(b), rtol=1e-12, atol=1e-15)

    def no_compiling(*args):
        raise AssertionError("compiled again although cached")

    monkeypatch.setattr(collocation, "_compile", no_compiling)
    monkeypatch.setattr(collocation, "_LOADED", {})
    again, path2, note2 = collocation.compiled_point_function(scenario)
    assert path2 == path and "from the cache" in note2
    tr = solve_case(scenario, "collocation", "time", model=model)
    assert tr.ranked and any(path.name in n for n in tr.notes)
    plain = solve_case(scenario, "collocation", "time", model=model, compile=False)
    assert not any("compiled" in n for n in plain.notes)
    assert tr.time_s == pytest.approx(plain.time_s, rel=1e-6)
    rating = scenario.propulsion.ratings[scenario.propulsion.default_rating]
    power = rating.shaft_power_w
    values = np.array(power.values, dtype=float)
    values[3, 2] *= 1.01
    changed = replace(scenario, propulsion=replace(scenario.propulsion, ratings={
        **scenario.propulsion.ratings,
        rating.name: replace(rating, shaft_power_w=replace(power, values=values))}))
    none, path3, note3 = collocation.compiled_point_function(changed, build=False)
    assert none is None and path3 != path and not path3.exists()


def test_neighbouring_cases_start_from_each_other_with_the_same_optimum(interceptor):
    """Sweep-style solves (from_neighbour) start each case's first mesh pass from the previous
    case's solution and reach the same optimum as independent solves, to 1e-6 relative."""
    from climbopt import collocation

    scenario, model = interceptor
    cases = [_changed(scenario, mass=f * model.mass_kg, temperature_offset=dt)
             for f, dt in ((1.0, 0.0), (0.98, 3.0), (0.96, 6.0))]
    guesses = [solve_energy_state(c, "time", model=build_model(c)) for c in cases]
    collocation._NEIGHBOURS.clear()
    chained = [solve_collocation(c, "time", model=build_model(c), guess=g, from_neighbour=True)
               for c, g in zip(cases, guesses)]
    started = ["previous case's solution" in " ".join(t.notes) for t in chained]
    assert started == [False, True, True]
    for case, guess, tr in zip(cases, guesses, chained):
        alone = solve_collocation(case, "time", model=build_model(case), guess=guess)
        assert tr.time_s == pytest.approx(alone.time_s, rel=1e-6)
        assert tr.fuel_kg == pytest.approx(alone.fuel_kg, rel=1e-6)
    assert abs(chained[2].time_s / chained[0].time_s - 1.0) > 1e-3  # the cases really differ


def test_a_neighbour_start_that_takes_too_long_gives_way_to_the_guess(interceptor, monkeypatch):
    """With the neighbour's start capped at NEIGHBOUR_MAX_ITER iterations (here 2, too few), the
    case starts from its own guess and still reaches the optimum of an independent solve."""
    from climbopt import collocation

    scenario, model = interceptor
    cases = [_changed(scenario, mass=f * model.mass_kg) for f in (1.0, 0.97)]
    guesses = [solve_energy_state(c, "time", model=build_model(c)) for c in cases]
    collocation._NEIGHBOURS.clear()
    monkeypatch.setattr(collocation, "NEIGHBOUR_MAX_ITER", 2)
    chained = [solve_collocation(c, "time", model=build_model(c), guess=g, from_neighbour=True)
               for c, g in zip(cases, guesses)]
    assert not any("previous case's solution" in " ".join(t.notes) for t in chained)
    alone = solve_collocation(cases[1], "time", model=build_model(cases[1]), guess=guesses[1])
    assert chained[1].time_s == pytest.approx(alone.time_s, rel=1e-6)
    # the iterations spent in vain on the capped start are counted: 2 of them
    assert chained[1].iterations == alone.iterations + 2
