"""Tests of climbopt.sweep and `climbopt sweep`: value parsing, case expansion and keys, the
changed scenarios, failure recording, identical tables from the serial, local-pool and Dask
executors, resuming, and the time-fuel trade-off over the cost weight.

Solves use the energy-state method on coarse grids (30 energy levels x 30 speeds) to keep the
file fast: the invented demo transport (scenarios/transport_twinjet.toml) and the published
1969 interceptor benchmark (tests/data/interceptor_1969.toml; Bryson, Desai & Hoffman,
J. Aircraft 6(6), 1969).
"""

from __future__ import annotations

import dataclasses
import math
import sys
from pathlib import Path

import pytest
from click.testing import CliRunner

from climbopt import CACHE_ENV, CAUTION
from climbopt import rutowski
from climbopt import plots
from climbopt import sweep as sw
from climbopt.cli import cli
from climbopt.scenario import ScenarioError, load_scenario

ROOT = Path(__file__).resolve().parents[1]
TWINJET = ROOT / "scenarios" / "transport_twinjet.toml"
INTERCEPTOR = ROOT / "tests" / "data" / "interceptor_1969.toml"

#: International foot and knot (exact by definition: 1 ft = 0.3048 m, 1 kt = 1852 m / 3600 s).
FT = 0.3048
KT = 1852.0 / 3600.0


def _coarse(scenario, n=30):
    return dataclasses.replace(scenario, solver=dataclasses.replace(
        scenario.solver, grid_altitude_points=n, grid_speed_points=n))


@pytest.fixture(scope="module")
def twin():
    return _coarse(load_scenario(TWINJET))


@pytest.fixture(scope="module")
def interceptor():
    return _coarse(load_scenario(INTERCEPTOR))


def _plan(scenario, *texts, **kw):
    return sw.plan_sweep(scenario, [sw.parse_variation(t, scenario) for t in texts], **kw)


def _without_wall(rows):
    return [{k: v for k, v in r.items() if k != "wall_s"} for r in rows]


def _same(a, b):
    """Rows equal exactly (NaN equal to NaN), ignoring the wall-clock column."""
    a, b = _without_wall(a), _without_wall(b)
    if len(a) != len(b):
        return False
    for ra, rb in zip(a, b):
        if ra.keys() != rb.keys():
            return False
        for k in ra:
            x, y = ra[k], rb[k]
            if isinstance(x, float) and math.isnan(x):
                if not (isinstance(y, float) and math.isnan(y)):
                    return False
            elif x != y:
                return False
    return True


# ---- parsing --vary -------------------------------------------------------------------------


def test_range_with_units_is_evenly_spaced_ends_included(twin):
    v = sw.parse_variation("mass=60 t:80 t:5", twin)
    assert v.name == "mass" and v.unit == "t"
    assert v.values == pytest.approx([60000, 65000, 70000, 75000, 80000], abs=1e-9)


def test_bare_numbers_take_the_unit_written_elsewhere(twin):
    # one unit written: the bare numbers share it
    v = sw.parse_variation("temperature_offset=-10,0,10,20 K", twin)
    assert v.values == (-10.0, 0.0, 10.0, 20.0)
    v = sw.parse_variation("target_altitude=31000,33000 ft,35000", twin)
    assert v.values == pytest.approx([31000 * FT, 33000 * FT, 35000 * FT], rel=1e-15)
    # one unit after COUNT: both ends
    assert sw.parse_variation("mass=60000:80000:3 kg", twin).values == (60000.0, 70000.0, 80000.0)
    # mixed units each convert (1 lb = 0.45359237 kg exactly, by definition)
    assert sw.parse_variation("mass=60 t,150000 lb", twin).values == pytest.approx(
        [60000.0, 150000 * 0.45359237], rel=1e-15)


def test_target_speed_follows_the_kind_of_the_target(twin, interceptor):
    # the demo transport's target is Mach 0.78: plain numbers
    p = sw.parameters(twin)["target_speed"]
    assert p.column == "target_mach" and p.dimension == "dimensionless"
    values = sw.parse_variation("target_speed=0.74:0.8:4", twin).values
    assert values == pytest.approx([0.74, 0.76, 0.78, 0.80], abs=1e-15) and values[-1] == 0.8
    # the interceptor's target is a TAS: a speed in any unit, stored in m/s
    p = sw.parameters(interceptor)["target_speed"]
    assert p.column == "target_tas_m_s"
    assert sw.parse_variation("target_speed=560,580 kt", interceptor).values == pytest.approx(
        [560 * KT, 580 * KT], rel=1e-15)


@pytest.mark.parametrize("text, words", [
    ("mas=60 t", "unknown name 'mas' (did you mean 'mass'?)"),
    ("mass", "expected NAME=VALUES"),
    ("mass=", "no values given"),
    ("mass=60:80", "START:STOP:COUNT"),
    ("mass=60 t:80 t:2.5", "COUNT must be a whole number"),
    ("mass=60 t:80 t:0", "COUNT must be at least 1"),
    ("mass=60 t:60 t:3", "START and STOP are equal"),
    ("mass=60,70,60 t", "appears twice"),
    ("mass=60 m", "not a mass"),
    ("temperature_offset=15 degC", "absolute temperature"),
    ("thrust_scale=0.9,,1.1", "empty value"),
    ("mass=60 t,70,150000 lb", "write the unit on every value"),
])
def test_bad_vary_text_is_explained(twin, text, words):
    with pytest.raises(sw.SweepError) as info:
        sw.parse_variation(text, twin)
    assert words in str(info.value)


# ---- planning -------------------------------------------------------------------------------


def test_full_grid_order_last_varies_fastest_and_zip(twin):
    plan = _plan(twin, "mass=60,70 t", "thrust_scale=0.9,1,1.1")
    assert [dict(c.values) for c in plan.cases] == [
        {"mass": m, "thrust_scale": t} for m in (60000.0, 70000.0) for t in (0.9, 1.0, 1.1)]
    assert [c.index for c in plan.cases] == list(range(6))
    assert plan.objective == "time" and all(c.objective == "time" for c in plan.cases)
    assert plan.header[:6] == ["case", "key", "method", "objective", "mass_kg", "thrust_scale"]

    zipped = _plan(twin, "mass=60,70 t", "thrust_scale=0.9,1.1", zip_values=True)
    assert [dict(c.values) for c in zipped.cases] == [
        {"mass": 60000.0, "thrust_scale": 0.9}, {"mass": 70000.0, "thrust_scale": 1.1}]
    with pytest.raises(sw.SweepError, match="same number of values.*mass 2, thrust_scale 3"):
        _plan(twin, "mass=60,70 t", "thrust_scale=0.9,1,1.1", zip_values=True)
    with pytest.raises(sw.SweepError, match="given more than once"):
        _plan(twin, "mass=60 t", "mass=70 t")


def test_cost_weight_adds_min_time_and_min_fuel_ends_per_combination(twin):
    plan = _plan(twin, "mass=60,70 t", "cost_weight=0,1,5 kg/s")
    assert plan.objective == "weighted"
    main = [c for c in plan.cases if c.objective == "weighted"]
    ends = [c for c in plan.cases if c.objective != "weighted"]
    assert len(main) == 6 and [c.index for c in main] == list(range(6))
    assert [(c.objective, dict(c.values)) for c in ends] == [
        ("time", {"mass": 60000.0}), ("fuel", {"mass": 60000.0}),
        ("time", {"mass": 70000.0}), ("fuel", {"mass": 70000.0})]
    with pytest.raises(sw.SweepError, match="only the weighted objective"):
        _plan(twin, "cost_weight=0,1 kg/s", objective="time")


def test_case_keys_are_stable_and_depend_on_every_input(twin):
    a = _plan(twin, "mass=60,70 t")
    b = _plan(twin, "mass=60000,70000 kg")
    assert [c.key for c in a.cases] == [c.key for c in b.cases]  # same inputs, same keys
    assert len({c.key for c in a.cases}) == 2 and all(len(c.key) == 16 for c in a.cases)
    # another objective, method, scenario value or grid gives other keys
    others = [
        _plan(twin, "mass=60,70 t", objective="fuel"),
        _plan(twin, "mass=60,70 t", method="collocation"),
        _plan(dataclasses.replace(twin, limits=dataclasses.replace(twin.limits, max_mach=0.8)),
              "mass=60,70 t"),
        _plan(_coarse(twin, 31), "mass=60,70 t"),
    ]
    for o in others:
        assert not ({c.key for c in o.cases} & {c.key for c in a.cases})
    # the name and file path of the scenario do not matter
    renamed = dataclasses.replace(twin, name="other", source_path="elsewhere.toml")
    assert [c.key for c in _plan(renamed, "mass=60,70 t").cases] == [c.key for c in a.cases]


def test_case_keys_change_with_the_climbopt_version(twin, monkeypatch):
    """A resumed sweep never mixes answers of two solver versions."""
    before = [c.key for c in _plan(twin, "mass=60,70 t").cases]
    monkeypatch.setattr(sw, "__version__", "99.0")
    after = [c.key for c in _plan(twin, "mass=60,70 t").cases]
    assert len(after) == 2 and not set(before) & set(after)


# ---- the changed scenario -------------------------------------------------------------------


def test_apply_case_recomputes_speeds_in_the_changed_atmosphere(twin):
    s = sw.apply_case(twin, {"temperature_offset": 15.0, "target_altitude": 33000 * FT,
                             "mass": 65000.0, "thrust_scale": 0.9, "cost_weight": 2.0})
    assert s.atmosphere.temperature_offset_k == 15.0
    assert s.aircraft.mass_kg == 65000.0 and s.propulsion.thrust_scale == 0.9
    assert s.solver.cost_weight_kg_per_s == 2.0
    # target Mach 0.78 at 33,000 ft (geometric) on an ISA+15 K day. US Standard Atmosphere 1976:
    # geopotential H = r0 z / (r0 + z), r0 = 6,356,766 m; T = 288.15 K - 6.5 K/km H + 15 K;
    # a = sqrt(gamma R T), gamma = 1.4, R = R*/M0 = 8314.32 / 28.9644 J/(kg K) (eqs. 18, 23, 50).
    z = 33000 * FT
    h_geo = 6356766.0 * z / (6356766.0 + z)
    t_k = 288.15 - 0.0065 * h_geo + 15.0
    r_air = 8314.32 / 28.9644
    assert s.mission.target.tas_m_s == pytest.approx(0.78 * math.sqrt(1.4 * r_air * t_k), rel=1e-9)
    assert s.mission.target.altitude_m == z
    # the start is a CAS (200 kt at 1,500 ft): its TAS rises on the hot day (lower density)
    assert s.mission.start.tas_m_s > twin.mission.start.tas_m_s * 1.02
    # nothing else changed
    assert s.limits == twin.limits and s.aircraft.drag == twin.aircraft.drag


@pytest.mark.parametrize("values, field", [
    ({"mass": -5.0}, "aircraft.mass"),
    ({"thrust_scale": 0.0}, "propulsion.thrust_scale"),
    ({"cost_weight": -1.0}, "solver.cost_weight"),
    ({"target_altitude": 80_000.0}, "mission.target.altitude"),
    ({"target_speed": 0.0}, "mission.target.mach"),
])
def test_apply_case_rejects_out_of_range_values(twin, values, field):
    with pytest.raises(ScenarioError) as info:
        sw.apply_case(twin, values)
    assert info.value.problems[0][0] == field


def test_failed_cases_are_recorded_with_status_and_error_and_the_sweep_goes_on(
        twin, tmp_path, monkeypatch):
    from climbopt.collocation import SolverFailure

    real = rutowski.solve_energy_state

    def fake(scenario, objective="time", **kw):  # fails on purpose, by mass
        m = scenario.aircraft.mass_kg
        if m == 61000.0:
            raise SolverFailure("IPOPT stopped", status="Maximum_Iterations_Exceeded",
                                iterations=3000)
        if m == 62000.0:
            raise ZeroDivisionError("division by zero in a test")
        return real(scenario, objective, **kw)

    monkeypatch.setattr(rutowski, "solve_energy_state", fake)
    # thrust scale 0.3: the demo transport cannot reach the target energy (infeasible)
    plan = _plan(twin, "mass=-5000,61000,62000,70000 kg", "thrust_scale=1,0.3")
    res = sw.run_sweep(plan, tmp_path / "t.csv", executor="serial")
    assert res.computed == 8 and res.failed == 7
    status = [(r["mass_kg"], r["thrust_scale"], r["status"]) for r in res.rows]
    assert status == [
        (-5000.0, 1.0, "bad-input"), (-5000.0, 0.3, "bad-input"),
        (61000.0, 1.0, "solver-failure"), (61000.0, 0.3, "solver-failure"),
        (62000.0, 1.0, "error"), (62000.0, 0.3, "error"),
        (70000.0, 1.0, "ok"), (70000.0, 0.3, "infeasible")]
    err = [r["error"] for r in res.rows]
    assert "aircraft.mass: got '-5000.0 kg'; expected a positive value" in err[0]
    assert err[2] == "IPOPT stopped"
    assert err[4] == "ZeroDivisionError: division by zero in a test"
    assert "not reachable" in err[7] and "highest reachable energy height" in err[7]
    ok = res.rows[6]
    assert ok["error"] == "" and 500 < ok["time_s"] < 2000 and ok["fuel_kg"] > 0
    assert ok["final_mass_kg"] == pytest.approx(70000.0 - ok["fuel_kg"], rel=1e-12)
    assert all(math.isnan(r["time_s"]) for r in res.rows if r["status"] != "ok")


# ---- executors: identical tables ------------------------------------------------------------


@pytest.fixture(scope="module")
def grid_plan(twin):
    # 6 cases, 2 of them refused as bad input (above the demo aircraft's 41,000 ft altitude
    # limit, which a scenario file with that target would be refused for too)
    return _plan(twin, "mass=60,80 t", "target_altitude=33000,35000,45000 ft")


@pytest.fixture(scope="module")
def serial_rows(grid_plan, tmp_path_factory):
    res = sw.run_sweep(grid_plan, tmp_path_factory.mktemp("serial") / "t.csv", executor="serial")
    assert res.computed == 6 and res.failed == 2 and res.skipped == 0
    return res.rows


def test_serial_table_is_in_case_order_with_physical_trends(serial_rows):
    assert [r["case"] for r in serial_rows] == list(range(6))
    ok = {(r["mass_kg"], round(r["target_altitude_m"] / FT)): r for r in serial_rows
          if r["status"] == "ok"}
    assert sorted(ok) == [(60000.0, 33000), (60000.0, 35000), (80000.0, 33000), (80000.0, 35000)]
    for m in (60000.0, 80000.0):  # higher target: more time and fuel (more energy to gain)
        assert ok[(m, 35000)]["time_s"] > ok[(m, 33000)]["time_s"]
        assert ok[(m, 35000)]["fuel_kg"] > ok[(m, 33000)]["fuel_kg"]
    for h in (33000, 35000):  # heavier: more time and fuel
        assert ok[(80000.0, h)]["time_s"] > ok[(60000.0, h)]["time_s"]
        assert ok[(80000.0, h)]["fuel_kg"] > ok[(60000.0, h)]["fuel_kg"]


def test_parameter_plots_show_groups_and_failed_cases(grid_plan, serial_rows):
    figs = plots.sweep_figures(grid_plan, serial_rows)
    assert sorted(figs) == ["sweep_mass", "sweep_target_altitude"]
    ax_t, _ = figs["sweep_target_altitude"].axes
    lines = [ln for ln in ax_t.get_lines() if ln.get_gid() == "sweep"]
    assert [ln.get_label() for ln in lines] == ["mass 60 t", "mass 80 t"]  # one per other value
    assert list(lines[0].get_xdata()) == pytest.approx([33000, 35000, 45000])  # in ft, as written
    assert math.isnan(lines[0].get_ydata()[2])  # the infeasible case leaves a gap
    (failed,) = [ln for ln in ax_t.get_lines() if ln.get_gid() == "failed"]
    assert list(failed.get_xdata()) == pytest.approx([45000, 45000])


def test_local_pool_gives_the_identical_table(grid_plan, serial_rows, tmp_path):
    res = sw.run_sweep(grid_plan, tmp_path / "t.csv", executor="pool", workers=2)
    assert res.workers == 2 and res.computed == 6
    assert _same(res.rows, serial_rows)
    text = (tmp_path / "t.csv").read_text()
    assert text.startswith("# climbopt") and f"# caution: {CAUTION}" in text


def test_dask_local_cluster_gives_the_identical_table(grid_plan, serial_rows, tmp_path):
    from distributed import Client, LocalCluster

    # Two workers on the loopback interface, talking TCP (every task and result is serialised
    # over the wire as on a real cluster); worker threads in this process rather than worker
    # processes, which would take 5-20 s to start on the shared 2-core test machine. The
    # benchmark (benchmarks/bench_sweep.py) runs worker processes.
    with LocalCluster(n_workers=2, threads_per_worker=1, processes=False, protocol="tcp://",
                      host="127.0.0.1", dashboard_address=None) as cluster, \
            Client(cluster) as client:
        workers = client.scheduler_info()["workers"]
        assert len(workers) == 2 and all(a.startswith("tcp://127.0.0.1:") for a in workers)
        res = sw.run_sweep(grid_plan, tmp_path / "t.csv", executor="dask",
                           cluster=cluster.scheduler_address)
    assert res.executor == "dask" and res.workers == 2 and res.computed == 6
    assert _same(res.rows, serial_rows)


# ---- resume ---------------------------------------------------------------------------------


class _Stop(Exception):
    pass


def test_interrupted_sweep_resumes_without_recomputing_or_losing_cases(
        grid_plan, serial_rows, tmp_path, monkeypatch):
    table = tmp_path / "t.csv"
    seen = []

    def stop_after_two(row):
        seen.append(row["case"])
        if len(seen) == 2:
            raise _Stop

    with pytest.raises(_Stop):  # interrupted in the local pool, cases still in flight
        sw.run_sweep(grid_plan, table, executor="pool", workers=2, on_case=stop_after_two)
    done_first = {r["key"] for r in sw.read_table(table)}
    assert len(done_first) == 2

    calls = []
    real = sw.run_case

    def counting(scenario, case, **kw):  # every case run, solved or refused as bad input
        values = dict(case.values)
        calls.append((values["mass"], values["target_altitude"]))
        return real(scenario, case, **kw)

    monkeypatch.setattr(sw, "run_case", counting)
    res = sw.run_sweep(grid_plan, table, executor="serial", max_cases=1)
    assert (res.computed, res.skipped, res.remaining) == (1, 2, 3) and len(calls) == 1

    res = sw.run_sweep(grid_plan, table, executor="serial")
    assert (res.computed, res.skipped, res.remaining) == (3, 3, 0) and len(calls) == 4
    # every case run exactly once over the three runs: none of the first two again
    first = {(r["mass_kg"], r["target_altitude_m"]) for r in serial_rows if r["key"] in done_first}
    assert len(set(calls)) == 4 and not (set(calls) & first)
    assert _same(res.rows, serial_rows)

    # a third run does nothing and leaves the table as it is
    before = table.read_text()
    res = sw.run_sweep(grid_plan, table, executor="serial")
    assert (res.computed, res.skipped) == (0, 6) and len(calls) == 4
    assert table.read_text() == before


def test_a_row_torn_by_a_crash_is_solved_again(grid_plan, serial_rows, tmp_path, monkeypatch):
    table = tmp_path / "t.csv"
    sw.run_sweep(grid_plan, table, executor="serial", max_cases=3)
    text = table.read_text()
    table.write_text(text[: text.rstrip("\n").rfind(",") - 5])  # crash in the middle of row 3
    calls = []
    real = sw.run_case
    monkeypatch.setattr(sw, "run_case", lambda s, c, **kw: calls.append(1) or real(s, c, **kw))
    res = sw.run_sweep(grid_plan, table, executor="serial")
    assert (res.computed, res.skipped) == (4, 2) and len(calls) == 4
    assert _same(res.rows, serial_rows)


def test_retry_failed_and_tables_of_other_sweeps(grid_plan, serial_rows, twin, tmp_path):
    table = tmp_path / "t.csv"
    sw.run_sweep(grid_plan, table, executor="serial")
    res = sw.run_sweep(grid_plan, table, executor="serial", retry_failed=True)
    assert (res.computed, res.failed, res.skipped) == (2, 2, 4)
    assert _same(res.rows, serial_rows)  # the retried rows replaced the old ones
    other = _plan(twin, "thrust_scale=0.9,1")
    with pytest.raises(sw.SweepError, match="holds another sweep"):
        sw.run_sweep(other, table, executor="serial")


# ---- the time-fuel trade-off ----------------------------------------------------------------


@pytest.fixture(scope="module")
def tradeoff(interceptor, tmp_path_factory):
    folder = tmp_path_factory.mktemp("tradeoff")
    plan = _plan(interceptor, "cost_weight=0,1,3,10,30,100,10000 kg/s")
    res = sw.run_sweep(plan, folder / "t.csv", executor="pool", workers=2)
    assert res.failed == 0 and res.computed == 9
    return plan, res, folder


def test_tradeoff_curve_is_monotone_and_every_point_is_on_the_front(tradeoff):
    _, res, _ = tradeoff
    curve = sw.tradeoff_curve(res.rows)
    assert curve["cost_weight"] == [0, 1, 3, 10, 30, 100, 10000]
    # more weight on time: time never rises, fuel never falls (exchange argument: if w2 > w1,
    # F1 + w1 T1 <= F2 + w1 T2 and F2 + w2 T2 <= F1 + w2 T1 give (w2 - w1)(T2 - T1) <= 0)
    assert curve["monotone"]
    t, f = curve["time_s"], curve["fuel_kg"]
    assert all(b <= a for a, b in zip(t, t[1:])) and all(b >= a for a, b in zip(f, f[1:]))
    assert t[0] - t[-1] > 30.0 and f[-1] - f[0] > 150.0  # a real trade, not a flat line
    assert curve["front"] == list(range(len(t)))[::-1]  # none dominated (front ordered by time)


def test_tradeoff_ends_match_the_single_objective_solutions(tradeoff, interceptor):
    _, res, _ = tradeoff
    curve = sw.tradeoff_curve(res.rows)
    t_min, f_min = curve["min_time"], curve["min_fuel"]
    # the anchors in the table are the plain single-objective energy-state solutions
    direct = rutowski.solve_energy_state(interceptor, "time")
    assert t_min["time_s"] == direct.time_s and t_min["fuel_kg"] == direct.fuel_kg
    # w = 0: fuel + 0 x time is the fuel objective itself
    assert curve["time_s"][0] == pytest.approx(f_min["time_s"], rel=1e-12)
    assert curve["fuel_kg"][0] == pytest.approx(f_min["fuel_kg"], rel=1e-12)
    # w = 10,000 kg/s (about 1,500 times the largest fuel flow): the weighted optimum is the
    # minimum-time path up to the grid's discretisation (0.05 % in time and 0.2 % in fuel between
    # 30 and 40 energy levels, measured)
    assert curve["time_s"][-1] == pytest.approx(t_min["time_s"], rel=5e-4)
    assert curve["fuel_kg"][-1] == pytest.approx(t_min["fuel_kg"], rel=2e-3)
    # no weighted point beats an anchor on its own objective
    assert min(curve["time_s"]) >= t_min["time_s"] * (1 - 1e-9)
    assert min(curve["fuel_kg"]) >= f_min["fuel_kg"] * (1 - 1e-9)
    # interceptor: minimum fuel takes longer than minimum time and burns less
    assert f_min["time_s"] > t_min["time_s"] + 30 and f_min["fuel_kg"] < t_min["fuel_kg"] - 150


def test_plots_of_a_sweep_and_the_tradeoff(tradeoff):
    from climbopt.plots import save_figure

    plan, res, folder = tradeoff
    figs = plots.sweep_figures(plan, res.rows)
    assert sorted(figs) == ["sweep_cost_weight", "tradeoff"]
    ax = figs["tradeoff"].axes[0]
    by_gid = {}
    for line in ax.get_lines():
        by_gid.setdefault(line.get_gid(), []).append(line)
    (curve,) = by_gid["tradeoff"]
    curve_t, curve_f = curve.get_data()
    assert list(curve_t) == sw.tradeoff_curve(res.rows)["time_s"]  # 7 weights, by weight
    assert len(curve_t) == 7 and list(curve_f) == sorted(curve_f)
    (t_end,), (f_end,) = by_gid["min_time"], by_gid["min_fuel"]
    t_min = next(r for r in res.rows if r["objective"] == "time")
    f_min = next(r for r in res.rows if r["objective"] == "fuel")
    assert (t_end.get_xdata()[0], t_end.get_ydata()[0]) == (t_min["time_s"], t_min["fuel_kg"])
    assert (f_end.get_xdata()[0], f_end.get_ydata()[0]) == (f_min["time_s"], f_min["fuel_kg"])
    ax_t, ax_f = figs["sweep_cost_weight"].axes
    (line,) = [ln for ln in ax_f.get_lines() if ln.get_gid() == "sweep"]
    assert list(line.get_xdata()) == [0, 1, 3, 10, 30, 100, 10000]  # kg/s as written
    assert ax_f.get_xlabel() == "cost weight (fuel per second of time) [kg/s]"
    written = save_figure(figs["tradeoff"], folder / "tradeoff")
    png = next(p for p in written if p.suffix == ".png").read_bytes()
    assert png[:8] == b"\x89PNG\r\n\x1a\n" and len(png) > 5000


def test_pareto_front_drops_dominated_points():
    # (time, fuel): (3, 10) is dominated by (2, 9); NaN is ignored
    assert sw.pareto_front([1, 2, 3, 4, math.nan], [12, 9, 10, 8, 1]) == [0, 1, 3]


# ---- command line ---------------------------------------------------------------------------


@pytest.fixture(scope="module")
def small_toml(tmp_path_factory):
    text = TWINJET.read_text()
    lines = [ln for ln in text.splitlines() if not ln.startswith("grid_")]
    text = "\n".join(lines).replace("[solver]", "[solver]\ngrid_altitude_points = 30\n"
                                                "grid_speed_points = 30")
    path = tmp_path_factory.mktemp("cli") / "twin.toml"
    path.write_text(text)
    return path


def test_cli_sweep_writes_table_and_plots_and_resumes(small_toml, tmp_path):
    out = tmp_path / "o"
    args = ["sweep", str(small_toml), "--vary", "mass=60 t:70 t:2", "--serial", "--out", str(out),
            "--parquet", "--quiet"]
    r = CliRunner().invoke(cli, args)
    assert r.exit_code == 0, r.output
    assert "sweep: 2 cases (grid mass (2)); energy-state, objective time" in r.output
    assert "done 2, failed 0, skipped 0; wall time" in r.output and "cases/s in this process" in r.output
    assert f"Caution: {CAUTION}" in r.output
    rows = sw.read_table(out / "sweep.csv")
    assert [r_["mass_kg"] for r_ in rows] == [60000.0, 70000.0]
    assert (out / "sweep_mass.png").exists()
    import pyarrow.parquet as pq

    pt = pq.read_table(out / "sweep.parquet").to_pydict()
    assert pt["mass_kg"] == [60000.0, 70000.0] and pt["time_s"] == [x["time_s"] for x in rows]
    assert pt["status"] == ["ok", "ok"]

    r = CliRunner().invoke(cli, args)
    assert r.exit_code == 0, r.output
    assert "2 cases already in the table: skipped" in r.output
    assert "done 0, failed 0, skipped 2; wall time" in r.output


def test_cli_sweep_local_pool_and_failures_keep_exit_code_0(small_toml, tmp_path):
    r = CliRunner().invoke(cli, ["sweep", str(small_toml), "--vary", "thrust_scale=1,0.3",
                                 "--workers", "2", "--out", str(tmp_path / "o"), "--no-plots"])
    assert r.exit_code == 0, r.output
    assert "done 1, failed 1, skipped 0" in r.output and "on a pool of 2 processes" in r.output
    assert "failed cases in the table: 1 infeasible" in r.output
    assert "case 1 (infeasible): target energy height" in r.output


@pytest.mark.parametrize("args, words", [
    (["--vary", "mass=60 t", "--serial", "--cluster", "tcp://127.0.0.1:8786"], "--serial cannot"),
    (["--vary", "weight=60 t"], "unknown name 'weight' (did you mean 'mass'?)"),
    (["--vary", "mass=13:16:4"], "no unit given; the start mass needs one (a bare number is not "
                                 "read as SI), e.g. 'mass=13 t:16 t:4' or 'mass=13:16:4 t'"),
    (["--vary", "cost_weight=0,1 kg/s", "--objective", "fuel"], "only the weighted objective"),
])
def test_cli_sweep_bad_input_exits_2(small_toml, tmp_path, args, words):
    r = CliRunner().invoke(cli, ["sweep", str(small_toml), "--out", str(tmp_path / "o")] + args)
    assert r.exit_code == 2
    assert words in r.output
    assert "Traceback" not in r.output
    assert not (tmp_path / "o" / "sweep.csv").exists()


@pytest.mark.parametrize("module, option, words", [
    ("distributed", ["--cluster", "tcp://127.0.0.1:8786"], "pip install 'climbopt[dask]'"),
    ("pyarrow", ["--parquet"], "--parquet needs the pyarrow package"),
])
def test_cli_sweep_missing_optional_package_exits_2(small_toml, tmp_path, monkeypatch, module,
                                                    option, words):
    import importlib.util

    real_find = importlib.util.find_spec
    monkeypatch.setitem(sys.modules, module, None)  # makes `import module` fail
    monkeypatch.setattr(importlib.util, "find_spec",
                        lambda name, *a: None if name == module else real_find(name, *a))
    r = CliRunner().invoke(cli, ["sweep", str(small_toml), "--vary", "mass=60 t",
                                 "--out", str(tmp_path / "o")] + option)
    assert r.exit_code == 2, r.output
    assert words in r.output
    assert not (tmp_path / "o" / "sweep.csv").exists()


def test_cli_sweep_ctrl_c_keeps_the_finished_rows_and_exits_130(small_toml, tmp_path, monkeypatch):
    real = sw.run_case
    calls = []

    def interrupted_on_second(scenario, case, **options):
        calls.append(case.index)
        if len(calls) == 2:
            raise KeyboardInterrupt
        return real(scenario, case, **options)

    monkeypatch.setattr(sw, "run_case", interrupted_on_second)
    out = tmp_path / "o"
    args = ["sweep", str(small_toml), "--vary", "thrust_scale=0.9,1,1.1", "--serial",
            "--out", str(out)]
    r = CliRunner().invoke(cli, args)
    assert r.exit_code == 130
    assert "interrupted: the finished cases are in" in r.output and "Traceback" not in r.output
    assert [x["thrust_scale"] for x in sw.read_table(out / "sweep.csv")] == [0.9]
    monkeypatch.setattr(sw, "run_case", real)
    r = CliRunner().invoke(cli, args + ["--no-plots"])
    assert r.exit_code == 0, r.output
    assert "done 2, failed 0, skipped 1" in r.output
    rows = sw.read_table(out / "sweep.csv")
    assert [x["thrust_scale"] for x in rows] == [0.9, 1.0, 1.1]
    # more thrust: a faster climb (common practice, no source)
    assert rows[0]["time_s"] > rows[1]["time_s"] > rows[2]["time_s"]


# ---- cases validated like scenario files -----------------------------------------------------


def test_dimensional_values_without_a_unit_are_refused(twin):
    """`--vary mass=13:16:4` is refused with a message showing how to write the unit.

    A unit after COUNT or on one list value applies to all; flight levels are altitudes."""
    with pytest.raises(sw.SweepError) as info:
        sw.parse_variation("mass=13:16:4", twin)
    assert "'mass=13 t:16 t:4' or 'mass=13:16:4 t'" in str(info.value)
    with pytest.raises(sw.SweepError, match="'target_altitude=31000,35000 ft'"):
        sw.parse_variation("target_altitude=31000,35000", twin)
    assert sw.parse_variation("mass=60:80:3 t", twin).values == (60000.0, 70000.0, 80000.0)
    assert sw.parse_variation("thrust_scale=0.9:1.1:3", twin).values == pytest.approx((0.9, 1.0, 1.1))
    assert sw.parse_variation("target_altitude=FL330,FL350", twin).values == pytest.approx(
        (33000 * FT, 35000 * FT), rel=1e-15)


@pytest.mark.parametrize("word, name", [("weight", "mass"), ("temperature", "temperature_offset"),
                                        ("thrust", "thrust_scale"), ("altitude", "target_altitude")])
def test_common_words_suggest_the_parameter(twin, word, name):
    """Words people use for an input suggest its --vary name."""
    with pytest.raises(sw.SweepError, match=f"unknown name '{word}' \\(did you mean '{name}'\\?\\)"):
        sw.parse_variation(f"{word}=1,2", twin)


def test_case_with_mass_below_fuel_capacity_is_refused_like_the_file(twin, tmp_path):
    """A sweep case lighter than its fuel capacity is bad input, as the same file is.

    The demo transport at 15 t (20 t of fuel capacity)."""
    plan = _plan(twin, "mass=15,70 t")
    res = sw.run_sweep(plan, tmp_path / "t.csv", executor="serial")
    bad, ok = res.rows
    assert (bad["status"], ok["status"]) == ("bad-input", "ok")
    assert "aircraft.fuel_capacity: '20000.0 kg' exceeds the start mass '15000.0 kg'" in bad["error"]
    text = TWINJET.read_text(encoding="utf-8").replace('mass = "70000 kg"', 'mass = "15 t"')
    (tmp_path / "light.toml").write_text(text, encoding="utf-8")
    with pytest.raises(ScenarioError) as info:
        load_scenario(tmp_path / "light.toml")
    assert info.value.problems == [("aircraft.fuel_capacity", "'20000 kg' exceeds the start mass '15 t'; "
                                                              "expected at most the start mass")]


def test_compile_only_where_it_pays(twin, tmp_path, monkeypatch):
    """Collocation sweeps compile the point function once, in the parent, when told to or when
    at least COMPILE_MIN_CASES cases are to be solved; never for energy-state sweeps, never
    with --no-compile, and not for a few cases whose artefact is not cached yet."""
    from climbopt import collocation

    monkeypatch.setenv(CACHE_ENV, str(tmp_path / "cache"))
    monkeypatch.setattr(collocation, "_LOADED", {})
    attempts = []

    def fake_compile(F, path):
        attempts.append(path)
        raise OSError("no C compiler here")

    monkeypatch.setattr(collocation, "_compile", fake_compile)
    energy = _plan(twin, "mass=60,70 t")
    few = _plan(twin, "mass=60,70 t", method="collocation")
    assert sw._compile_choice(energy, True, 40) is False
    assert sw._compile_choice(few, False, 40) is False
    assert sw._compile_choice(few, None, 2) is False and attempts == []
    assert sw._compile_choice(few, None, sw.COMPILE_MIN_CASES) is True and len(attempts) == 1
    assert sw._compile_choice(few, True, 2) is True and len(attempts) == 2
    # the cases fall back to CasADi's own evaluation and say so
    _, _, note = collocation.compiled_point_function(twin)
    assert "compiling failed" in note and "no C compiler here" in note
