"""The day's conditions: along-track wind (air-mass physics), a buffet margin, and the fair
comparison of results at a common downrange point."""

from __future__ import annotations

import dataclasses
from pathlib import Path

import numpy as np
import pytest

from climbopt.aircraft import build_model
from climbopt.cruise import cruise, level_flight
from climbopt.energy import energy_fields
from climbopt.envelope import envelope_for
from climbopt.pipeline import run_mission
from climbopt.procedure import best_schedule
from climbopt.rutowski import solve_energy_state
from climbopt.scenario import WindProfile, load_scenario

ROOT = Path(__file__).resolve().parents[1]
KT = 1852.0 / 3600.0      # m/s, exact (NIST SP 811)
FT = 0.3048               # m, exact (NIST SP 811)


@pytest.fixture(scope="module")
def transport():
    """The demo transport (invented aircraft), procedure profile as in its file."""
    return load_scenario(ROOT / "scenarios" / "transport_twinjet.toml")


def _with_wind(scenario, wind: WindProfile):
    return dataclasses.replace(scenario, atmosphere=dataclasses.replace(scenario.atmosphere,
                                                                         wind=wind))


def test_headwind_changes_distance_not_time_or_fuel(transport):
    """A 50 kt headwind at all altitudes: the air mass moves, the aircraft's motion in it does
    not change (common practice, no source), so minimum-time time and fuel stay the same to
    0.1 % and the ground distance is shorter by 50 kt times the climb time to 0.5 %; for the
    energy-state answer and for the best flown schedule."""
    calm_model = build_model(transport)
    windy = _with_wind(transport, WindProfile((-50 * KT,)))
    windy_model = build_model(windy)
    for solve in (lambda sc, m: solve_energy_state(sc, "time", model=m),
                  lambda sc, m: best_schedule(sc, m, "time")):
        calm, wind = solve(transport, calm_model), solve(windy, windy_model)
        assert wind.time_s == pytest.approx(calm.time_s, rel=1e-3)
        assert wind.fuel_kg == pytest.approx(calm.fuel_kg, rel=1e-3)
        shortening = calm.distance_m - wind.distance_m
        assert shortening == pytest.approx(50 * KT * calm.time_s, rel=5e-3)


def test_wind_table_is_interpolated_and_held_beyond_its_ends(transport):
    """A wind table over altitude: the model returns the table's values at its altitudes
    (to 0.01 kt) and holds the end values beyond them, on numpy and on CasADi alike."""
    import casadi as ca

    wind = WindProfile((-10 * KT, -40 * KT, -60 * KT), (0.0, 20000 * FT, 35000 * FT))
    model = build_model(_with_wind(transport, wind))
    h = np.array([0.0, 20000 * FT, 35000 * FT, 45000 * FT])
    w = model.wind_m_s(h) / KT
    np.testing.assert_allclose(w, [-10.0, -40.0, -60.0, -60.0], atol=0.01)
    x = ca.MX.sym("h")
    f = ca.Function("w", [x], [model.wind_m_s(x)])
    np.testing.assert_allclose([float(f(v)) / KT for v in h], w, rtol=1e-9)


def test_buffet_margin_moves_the_stall_boundary(transport):
    """limits.buffet_load_factor = 1.3 keeps CL below CLmax / 1.3 (the manoeuvre margin to
    buffet onset, common practice, no source): at 1 g with the margin the envelope's stall row
    equals the one at load factor 1.3 without it, point by point over a grid."""
    model = build_model(transport)
    margin = dataclasses.replace(transport, limits=dataclasses.replace(
        transport.limits, buffet_load_factor=1.3))
    env_margin, env_plain = envelope_for(margin, model, path=False), envelope_for(
        transport, model, path=False)
    h = np.linspace(0.0, 41000 * FT, 40)[:, None]
    v = np.linspace(60.0, 260.0, 50)[None, :]
    with_margin = energy_fields(model, h, v, model.mass_kg, limits=env_margin).limits["stall"]
    at_13g = energy_fields(model, h, v, model.mass_kg, limits=env_plain,
                           load_factor=1.3).limits["stall"]
    np.testing.assert_array_equal(with_margin, at_13g)
    assert with_margin.sum() < energy_fields(model, h, v, model.mass_kg,
                                             limits=env_plain).limits["stall"].sum()


def test_buffet_margin_holds_on_every_result(transport):
    """With a 1.3 g buffet margin and a heavier aircraft climbing to FL410 (so that the margin
    comes within 6 % near the top), no point of the energy-state path, of the best flown
    schedule or of the collocation optimum has CL above CLmax(M) / 1.3, and the collocation
    optimum's re-simulated path keeps it too."""
    heavy = transport.replace(mass="75 t", target_altitude="FL410",
                              **{"limits.max_altitude": "43000 ft",
                                 "limits.buffet_load_factor": 1.3})
    assert heavy.limits.buffet_load_factor == 1.3
    model = build_model(heavy)
    from climbopt.pipeline import solve_case

    colloc = solve_case(heavy, "collocation", "time", model=model)
    assert colloc.verification.ok, colloc.verification.message  # re-simulated, margin kept
    assert colloc.verification.limit_excess["stall"] <= 1e-2
    for tr in (solve_energy_state(heavy, "time", model=model),
               best_schedule(heavy, model, "time"), colloc):
        t = tr.table
        ratio = t.lift_coefficient * 1.3 / model.cl_max(t.mach, check=False)
        assert ratio.max() <= 1 + 1e-6, tr.label
        assert ratio.max() > 0.94, tr.label  # the margin matters on this climb


def test_common_point_adds_the_cruise(transport):
    """When the results' ground distances differ, every row reports the same common point (the
    farthest distance); a row that reaches it first has the cruise added: time = distance /
    ground speed at the target state, fuel = the level-flight fuel flow over that time (between
    the flows at the cruise's end and start masses)."""
    model = build_model(transport)
    run = run_mission(transport, model, method="energy", objectives=("time", "fuel"))
    cp = run.common_point
    assert cp is not None
    rows = [r for r in run.results if hasattr(r, "table")]
    assert cp.distance_m == pytest.approx(max(r.distance_m for r in rows if r.ranked))
    target = transport.mission.target
    for r, t_cp, f_cp in zip(run.results, cp.time_s, cp.fuel_kg, strict=True):
        gap = cp.distance_m - r.distance_m
        assert t_cp - r.time_s == pytest.approx(gap / target.tas_m_s, abs=1e-6)
        if gap > 1000.0:
            dt = gap / target.tas_m_s
            m_end = r.final_mass_kg - (f_cp - r.fuel_kg)
            flows = []
            for m in (r.final_mass_kg, m_end):
                thr, _, _, mach = level_flight(model, target.altitude_m, target.tas_m_s, m)
                flows.append(float(model.fuel_flow_kg_s(target.altitude_m, mach, thr)))
            assert min(flows) * dt * (1 - 1e-6) <= f_cp - r.fuel_kg <= max(flows) * dt * (1 + 1e-6)
    leg = cruise(model, target.altitude_m, target.tas_m_s, model.mass_kg, 10_000.0)
    assert leg.time_s == pytest.approx(10_000.0 / target.tas_m_s)


def _scenario_text(tmp_path, old: str, new: str) -> Path:
    text = (ROOT / "scenarios" / "transport_twinjet.toml").read_text()
    assert old in text
    path = tmp_path / "conditions.toml"
    path.write_text(text.replace(old, new, 1))
    return path


def test_reader_takes_wind_rating_schedule_and_buffet_margin(tmp_path):
    """[atmosphere.wind] as a table, mission.rating as a schedule with a derate, and
    limits.buffet_load_factor are read in SI (1 kt = 1852/3600 m/s, FL = 100 ft) and survive a
    validated change of the scenario."""
    path = _scenario_text(tmp_path, 'rating = "climb"\n\n[mission.start]',
                          'rating = [{ rating = "max", until = "FL030" }, '
                          '{ rating = "climb", thrust_fraction = 0.9 }]\n\n[mission.start]')
    text = path.read_text().replace('temperature_offset = "0 K"',
                                    'temperature_offset = "0 K"\nwind = { altitude = ["0 ft", '
                                    '"FL350"], along_track = ["-20 kt", "-60 kt"] }')
    path.write_text(text.replace("max_load_factor = 2.5",
                                 "max_load_factor = 2.5\nbuffet_load_factor = 1.3"))
    s = load_scenario(path)
    steps = s.mission.rating_schedule
    assert [st.rating for st in steps] == ["max", "climb"]
    assert steps[0].until_m == pytest.approx(3000 * FT) and steps[1].until_m is None
    assert steps[1].thrust_fraction == 0.9
    assert s.atmosphere.wind.altitude_m == pytest.approx((0.0, 35000 * FT))
    assert s.atmosphere.wind.along_track_m_s == pytest.approx((-20 * KT, -60 * KT))
    assert s.limits.buffet_load_factor == 1.3
    changed = s.replace(mass="65 t")
    assert changed.mission.rating_schedule == steps and changed.atmosphere.wind == s.atmosphere.wind
    assert changed.limits.buffet_load_factor == 1.3


@pytest.mark.parametrize("new, field, words", [
    ('rating = [{ rating = "max" }, { rating = "climb" }]', "mission.rating[0].until",
     "missing"),
    ('rating = [{ rating = "max", until = "3000 ft" }, { rating = "cruise" }]',
     "mission.rating[1].rating", "unknown rating"),
    ('rating = [{ rating = "max", until = "3000 ft" }, { rating = "climb", thrust_fraction = 1.2 }]',
     "mission.rating[1].thrust_fraction", "fraction"),
    ('rating = [{ rating = "max", until = "3000 ft" }, { rating = "climb", until = "2000 ft" }]',
     "mission.rating[1].until", "last rating"),
])
def test_bad_rating_schedule(tmp_path, new, field, words):
    """A rating schedule without the altitude of a step, with an unknown rating, an excessive
    derate, or an altitude on its last step: exit 2 naming the field."""
    from click.testing import CliRunner

    from climbopt.cli import cli

    path = _scenario_text(tmp_path, 'rating = "climb"\n\n[mission.start]',
                          new + "\n\n[mission.start]")
    result = CliRunner().invoke(cli, ["check", str(path)])
    assert result.exit_code == 2
    assert field in result.output and words in result.output


def test_bad_wind(tmp_path):
    """A wind table whose columns differ in length, and a 400 kt wind: exit 2 naming the field."""
    from click.testing import CliRunner

    from climbopt.cli import cli

    for wind, field in (('wind = { altitude = ["0 ft", "FL350"], along_track = ["-20 kt"] }',
                         "atmosphere.wind.along_track"),
                        ('wind = { along_track = "-400 kt" }', "atmosphere.wind.along_track")):
        path = _scenario_text(tmp_path, 'temperature_offset = "0 K"',
                              f'temperature_offset = "0 K"\n{wind}')
        result = CliRunner().invoke(cli, ["check", str(path)])
        assert result.exit_code == 2 and field in result.output, result.output


def test_rating_schedule_switches_at_the_stated_altitude(transport):
    """'max' up to 3,000 ft, then 'climb': the climb is never slower than on 'climb' alone
    (more thrust early; common practice, no source), and in the per-point tables of the
    energy-state path and of a flown schedule the thrust is the 'max' rating's below 3,000 ft
    and the 'climb' rating's above it (beyond the 30 m blend either side)."""
    from climbopt.procedure import fly_schedule
    from climbopt.scenario import RatingStep, ScheduleSpec

    steps = (RatingStep("max", 3000 * FT), RatingStep("climb"))
    sched = dataclasses.replace(transport, mission=dataclasses.replace(
        transport.mission, rating="max", rating_schedule=steps))
    plain_model, model = build_model(transport), build_model(sched)
    assert model.scheduled and "'max' to 914 m, then 'climb'" == model.rating_label
    spec = ScheduleSpec("250/290/M0.74", 290 * KT, 0.74, 250 * KT)
    for solve in (lambda sc, m: solve_energy_state(sc, "time", model=m),
                  lambda sc, m: fly_schedule(sc, m, spec)):
        tr, plain = solve(sched, model), solve(transport, plain_model)
        assert tr.time_s <= plain.time_s * (1 + 1e-6)
        t = tr.table
        for rating, where in (("max", t.altitude_m < 3000 * FT - 30.0),
                              ("climb", t.altitude_m > 3000 * FT + 30.0)):
            assert where.sum() >= 3
            expected = model.thrust_n(t.altitude_m[where], t.mach[where], t.throttle[where],
                                      rating)
            np.testing.assert_allclose(t.thrust_n[where], expected, rtol=1e-9)


def test_downrange_business_jet_collocation_verifies(monkeypatch):
    """The invented mid-size jet climbing to FL410 with a 150 nmi downrange point: minimum time
    and minimum fuel both converge in well under 100 IPOPT iterations and pass their
    re-simulation check; the minimum-fuel throttle does not chatter (it does without the
    smoothing term: a singular arc), and the smoothing moves the minimum fuel by less than
    0.1 % against the solve without it."""
    from climbopt import collocation
    from climbopt.pipeline import solve_case

    scenario = load_scenario(ROOT / "scenarios" / "bizjet_downrange.toml")
    model = build_model(scenario)
    for objective in ("time", "fuel"):
        tr = solve_case(scenario, "collocation", objective, model=model)
        assert tr.ranked and tr.verification.ok, (objective, tr.issues)
        assert tr.iterations < 100, (objective, tr.iterations)
        assert tr.distance_m == pytest.approx(150 * 1852.0, rel=1e-9)
        jumps = np.abs(np.diff(tr.controls.throttle))
        assert np.sum(jumps > 0.2) <= 2, objective
    monkeypatch.setattr(collocation, "THROTTLE_SMOOTHING", 0.0)
    rough = solve_case(scenario, "collocation", "fuel", model=model)
    assert np.sum(np.abs(np.diff(rough.controls.throttle)) > 0.2) > 20  # the chattering arc
    assert tr.fuel_kg == pytest.approx(rough.fuel_kg, rel=1e-3)


def test_solver_compile_option_is_read(tmp_path):
    """[solver] compile = false is read as False (the collocation solver then never compiles);
    a number is bad input naming the field."""
    from click.testing import CliRunner

    from climbopt.cli import cli

    path = _scenario_text(tmp_path, "intervals = 100", "intervals = 100\ncompile = false")
    assert load_scenario(path).solver.compile is False
    assert load_scenario(ROOT / "scenarios" / "transport_twinjet.toml").solver.compile is None
    bad = _scenario_text(tmp_path, "intervals = 100", "intervals = 100\ncompile = 1")
    result = CliRunner().invoke(cli, ["check", str(bad)])
    assert result.exit_code == 2 and "solver.compile" in result.output


def test_no_common_point_when_the_target_state_cannot_be_held():
    """The published interceptor's target (19,995 m, Mach 1.0) lies above its steady ceiling:
    the minimum-time path ends in a zoom climb (Bryson, Desai & Hoffman, J. Aircraft 6(6),
    1969, fig. 2), so thrust is below drag in level flight there. The results end at different
    distances, but comparing them at a common point would need level flight nobody can hold:
    the comparison says so, adds no common-point figures and ranks fuel to each result's end."""
    from climbopt import report

    scenario = load_scenario(ROOT / "tests" / "data" / "interceptor_1969.toml")
    model = build_model(scenario)
    run = run_mission(scenario, model, method="energy", objectives=("time", "fuel"),
                      schedules=False)
    cp = run.common_point
    assert cp is not None and "level flight at the target state is not possible" in cp.unusable
    assert "more than the" in cp.unusable and "N available" in cp.unusable
    records = report.comparison(list(run.results), cp)
    assert all(rec["ranked"] for rec in records)
    assert all("fuel_to_common_point_kg" not in rec for rec in records)
    fuel = {rec["objective"]: rec for rec in records}
    assert fuel["fuel"]["best_fuel"] and fuel["fuel"]["fuel_kg"] < fuel["time"]["fuel_kg"]
    text = report.format_common_point(cp)
    assert text.startswith("no common downrange point: level flight at the target state")
