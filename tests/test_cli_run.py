"""Tests of `climbopt run` and `climbopt map` through click's test runner: exit codes, files,
summary fields, units, the caution, bad input, infeasible missions, solver failures and
interrupted runs."""

from __future__ import annotations

import json
import re
from pathlib import Path

import numpy as np
import pytest
from click.testing import CliRunner

from climbopt import CAUTION
from climbopt.cli import cli
from climbopt.report import read_csv

ROOT = Path(__file__).resolve().parents[1]
DEMOS = sorted((ROOT / "scenarios").glob("*.toml"))
LB = 0.45359237        # kg, exact (NIST SP 811)
FT = 0.3048            # m, exact (NIST SP 811)
FIGURES = {f"{name}.png" for name in ("ps_mach", "ps_tas", "fs_mach", "time_histories")}


def _run(args):
    return CliRunner().invoke(cli, [str(a) for a in args])


def _no_traceback(result):
    assert "Traceback" not in result.output
    assert result.exception is None or isinstance(result.exception, SystemExit)


def test_demos_found():
    """The three bundled demo scenarios (invented aircraft) exist."""
    assert len(DEMOS) >= 3


@pytest.mark.parametrize("scenario", DEMOS, ids=lambda p: p.stem)
def test_run_energy_on_every_demo(scenario, tmp_path):
    """Energy-state method, both objectives, on each demo: exit 0, every file written, the
    summary fields present and consistent with the per-point tables, the caution everywhere,
    and the two optimality relations min-time time <= min-fuel time, min-fuel fuel <= min-time
    fuel (true of any correct optimiser)."""
    out = tmp_path / "out"
    result = _run(["run", scenario, "--method", "energy", "--out", out, "--json", "--units", "si"])
    assert result.exit_code == 0, result.output
    doc = json.loads(result.stdout)                      # stdout is the JSON and nothing else
    assert doc == json.loads((out / "summary.json").read_text())
    assert doc["caution"] == CAUTION and doc["exit_code"] == 0
    names = {p.name for p in out.iterdir()}
    expected = {"summary.json", "comparison.csv", "report.txt"} | FIGURES
    for obj in ("time", "fuel"):
        expected |= {f"energy-state_{obj}.csv", f"energy-state_{obj}_schedule.csv"}
    assert expected <= names, expected - names
    res = {r["objective"]: r for r in doc["results"] if r["method"] == "energy-state"}
    flown = [r for r in doc["results"] if r["method"] == "best-schedule"]
    assert sorted(r["objective"] for r in flown) == ["fuel", "time"]
    for r in flown:
        # against the energy-state answer (an approximation of the optimum, about 1 % off on
        # these climbs; common practice, no source) the flown best schedule is no better by more
        # than that
        assert r["reference"]["reference"].startswith("energy-state")
        assert r["reference"]["objective_difference_relative"] >= -1e-2
    assert set(res) == {"time", "fuel"}
    for obj, r in res.items():
        assert r["method"] == "energy-state" and r["converged"] is True
        for key in ("time_s", "fuel_kg", "distance_m", "iterations", "wall_s", "verification"):
            assert key in r
        assert r["time_s"] > 0 and r["fuel_kg"] > 0 and r["distance_m"] > 0
        header, rows = read_csv(out / f"energy-state_{obj}.csv")
        t = np.array([float(row[header.index("time_s")]) for row in rows])
        f = np.array([float(row[header.index("fuel_used_kg")]) for row in rows])
        m = np.array([float(row[header.index("mass_kg")]) for row in rows])
        # the CSV holds 0.1 s and 0.1 kg: two rounded values differ by at most one step
        assert t[-1] - t[0] == pytest.approx(r["time_s"], abs=0.1 + 1e-9)
        assert f[-1] - f[0] == pytest.approx(r["fuel_kg"], abs=0.1 + 1e-9)
        assert m[0] - m[-1] == pytest.approx(r["fuel_kg"], abs=0.1 + 1e-9)   # mass bookkeeping
        assert r["ranked"] is True and r["issues"] == []
        assert CAUTION in (out / f"energy-state_{obj}_schedule.csv").read_text()
    assert res["time"]["time_s"] <= res["fuel"]["time_s"] * (1 + 1e-6)
    assert res["fuel"]["fuel_kg"] <= res["time"]["fuel_kg"] * (1 + 1e-6)
    common = "fuel_to_common_point_kg" in doc["results"][0]  # distances differ: fair fuel
    for flag, key in (("best_time", "time_s"),
                      ("best_fuel", "fuel_to_common_point_kg" if common else "fuel_kg")):
        best = [r for r in doc["results"] if r[flag]]
        assert len(best) == 1 and best[0][key] == min(r[key] for r in doc["results"])
    assert CAUTION in (out / "comparison.csv").read_text()
    assert CAUTION in (out / "report.txt").read_text()
    for fig in FIGURES:
        assert (out / fig).stat().st_size > 5_000
    assert not [n for n in names if n.endswith((".svg", ".pdf"))]  # PNG only by default


def test_run_table_and_units_us(tmp_path):
    """--units us: the printed table and the CSVs are in lb, nmi, ft (checked against a hand
    conversion of the SI summary value), schedule rows every 2,000 ft; caution as footer."""
    out = tmp_path / "us"
    scenario = ROOT / "scenarios" / "turboprop_regional.toml"
    result = _run(["run", scenario, "--method", "energy", "--objective", "time",
                   "--units", "us", "--out", out])
    assert result.exit_code == 0, result.output
    assert re.search(r"\nresult\s+\[s\]\s+\[min:s\]\s+\[lb\]\s+\[nmi\]\s", result.output)
    assert "%|" not in result.output          # no progress bar when not on a terminal
    assert result.output.rstrip().endswith(f"Caution: {CAUTION}")
    doc = json.loads((out / "summary.json").read_text())
    fuel_kg = doc["results"][0]["fuel_kg"]
    header, rows = read_csv(out / "comparison.csv")
    fuel_lb = float(rows[0][header.index("fuel [lb]")])
    assert fuel_lb == round(fuel_kg / LB, 1)  # 0.1 lb
    dist_nmi = float(rows[0][header.index("distance [nmi]")])
    assert dist_nmi == round(doc["results"][0]["distance_m"] / 1852.0, 2)  # 0.01 nmi
    # the printed fuel, rounded to whole pounds
    assert f"  {fuel_kg / LB:,.0f}  " in result.output
    h, srows = read_csv(out / "energy-state_time_schedule.csv")
    alts = [float(r[0]) for r in srows if r[-1] == ""]
    assert np.allclose(np.diff(alts), 2000.0)
    assert alts[0] % 2000.0 == pytest.approx(0.0, abs=1e-6)
    h2, prow = read_csv(out / "energy-state_time.csv")
    start_ft = float(prow[0][h2.index("altitude_ft")])
    assert start_ft == pytest.approx(1500.0, abs=0.5)   # the scenario starts at 1,500 ft


def test_run_missing_file(tmp_path):
    """A missing scenario file: exit 2, a message naming the file, no traceback."""
    result = _run(["run", tmp_path / "nowhere.toml", "--out", tmp_path / "o"])
    assert result.exit_code == 2
    assert "nowhere.toml" in result.output and "no such file" in result.output
    _no_traceback(result)
    assert not (tmp_path / "o").exists()


def test_run_malformed_toml(tmp_path):
    """Malformed TOML: exit 2 with the line number, no traceback."""
    bad = tmp_path / "bad.toml"
    bad.write_text("[aircraft\nmass = 5\n")
    result = _run(["run", bad, "--out", tmp_path / "o"])
    assert result.exit_code == 2
    assert "line 1" in result.output and "TOML" in result.output
    _no_traceback(result)


def test_run_invalid_scenario(tmp_path):
    """An invalid field: exit 2 with the field named, no traceback."""
    text = (ROOT / "scenarios" / "turboprop_regional.toml").read_text()
    bad = tmp_path / "neg.toml"
    bad.write_text(text.replace('reference_area = "', 'reference_area = "-', 1))
    result = _run(["run", bad, "--method", "energy", "--out", tmp_path / "o"])
    assert result.exit_code == 2
    assert "aircraft.reference_area" in result.output
    _no_traceback(result)


def test_run_usage_error(tmp_path):
    """A bad option value is a usage error: exit 2."""
    result = _run(["run", ROOT / "scenarios" / "turboprop_regional.toml", "--method", "magic"])
    assert result.exit_code == 2
    assert "magic" in result.output


def test_run_unreachable_target_exit_3(tmp_path):
    """Thrust cut to 45 %: the twinjet cannot reach 35,000 ft / M 0.78; exit 3 and the message
    names the energy ceiling; no output folder is written."""
    text = (ROOT / "scenarios" / "transport_twinjet.toml").read_text()
    weak = tmp_path / "weak.toml"
    weak.write_text(text.replace("[propulsion]\n", "[propulsion]\nthrust_scale = 0.45\n", 1))
    out = tmp_path / "o"
    result = _run(["run", weak, "--method", "energy", "--objective", "time", "--out", out])
    assert result.exit_code == 3, result.output
    assert "ceiling" in result.output and "highest reachable energy height" in result.output
    _no_traceback(result)
    assert not out.exists()


def test_interrupted_run_keeps_earlier_folder(tmp_path, monkeypatch):
    """A run that crashes while writing (simulated in the plot writer) leaves the earlier output
    folder exactly as it was and no temporary folders."""
    from climbopt import plots

    scenario = ROOT / "scenarios" / "turboprop_regional.toml"
    out = tmp_path / "o"
    first = _run(["run", scenario, "--method", "energy", "--objective", "time", "--out", out,
                  "--quiet"])
    assert first.exit_code == 0, first.output
    before = {p.name: p.read_bytes() for p in out.iterdir()}

    real = plots.save_figure
    calls = {"n": 0}

    def crash_on_second(*a, **k):
        calls["n"] += 1
        if calls["n"] == 2:
            raise RuntimeError("simulated crash while writing")
        return real(*a, **k)

    monkeypatch.setattr(plots, "save_figure", crash_on_second)
    second = _run(["run", scenario, "--method", "energy", "--objective", "fuel", "--out", out,
                   "--quiet"])
    assert second.exit_code != 0
    assert isinstance(second.exception, RuntimeError)
    after = {p.name: p.read_bytes() for p in out.iterdir()}
    assert after == before
    assert sorted(p.name for p in tmp_path.iterdir()) == ["o"]


def test_map_command(tmp_path):
    """`climbopt map`: the fields as .npz and .csv, plots, map.json with the caution; the CSV
    has one row per grid point and its Ps matches the .npz."""
    out = tmp_path / "m"
    text = (ROOT / "scenarios" / "turboprop_regional.toml").read_text()
    scenario = tmp_path / "small_grid.toml"         # a coarser grid keeps the test fast
    scenario.write_text(text.replace("grid_altitude_points = 300", "grid_altitude_points = 90")
                        .replace("grid_speed_points = 300", "grid_speed_points = 70"))
    result = _run(["map", scenario, "--out", out, "--units", "si"])
    assert result.exit_code == 0, result.output
    assert CAUTION in result.output
    meta = json.loads((out / "map.json").read_text())
    assert meta["caution"] == CAUTION
    data = np.load(out / "energy_map.npz")
    nh, nv = meta["shape"]
    assert (nh, nv) == (90, 70)
    assert data["ps_m_s"].shape == (nh, nv) and data["feasible"].dtype == bool
    header, rows = read_csv(out / "energy_map.csv")
    assert len(rows) == nh * nv
    i_ps = header.index("Ps [m/s]")
    assert float(rows[nv + 3][i_ps]) == pytest.approx(float(data["ps_m_s"][1, 3]), abs=1e-3)
    assert meta["max_ps_m_s"] == pytest.approx(
        float(np.nanmax(np.where(data["feasible"], data["ps_m_s"], np.nan))))
    for name in ("ps_mach", "ps_tas", "fs_mach"):
        assert (out / f"{name}.png").stat().st_size > 5_000
    assert sorted(p.name for p in out.glob("*.svg")) == []     # PNG only by default
    bad = _run(["map", tmp_path / "none.toml"])
    assert bad.exit_code == 2


def test_format_option_writes_requested_figures(tmp_path):
    """`--format svg,png` writes both formats of every figure (listed in the summary); an
    unknown format is a usage error (exit 2) naming the known ones, before any solving."""
    scenario = ROOT / "scenarios" / "turboprop_regional.toml"
    out = tmp_path / "f"
    result = _run(["run", scenario, "--method", "energy", "--objective", "time", "--out", out,
                   "--format", "svg,png", "--quiet"])
    assert result.exit_code == 0, result.output
    doc = json.loads((out / "summary.json").read_text())
    stems = ("ps_mach", "ps_tas", "fs_mach", "time_histories")
    assert doc["figures"] == sorted(f"{s}.{e}" for s in stems for e in ("png", "svg"))
    svg = (out / "time_histories.svg").read_text()
    assert svg.lstrip().startswith("<?xml") and "<svg" in svg and CAUTION.split(".")[0] in svg
    # with SVG files, report.html carries those drawings inline, their words as text
    page = (out / "report.html").read_text(encoding="utf-8")
    assert page.count("<svg") == 4 and "data:image/png" not in page
    assert page.count(CAUTION.split(".")[0]) >= 4 + 2   # each figure's foot, the page's top and foot
    bad = _run(["map", scenario, "--out", tmp_path / "g", "--format", "png,tiff"])
    assert bad.exit_code == 2
    assert "'png,tiff'" in bad.output and "png, svg, pdf" in bad.output
    assert not (tmp_path / "g").exists()


def test_cli_formats_match_plots():
    """The command line offers exactly the formats the plot writer knows (kept apart so that
    `climbopt --help` does not import matplotlib)."""
    from climbopt import cli as cli_module
    from climbopt import plots

    assert cli_module._FIGURE_FORMATS == plots.FIGURE_FORMATS == ("png", "svg", "pdf")


# ---- collocation (one demo, to keep the suite fast) ------------------------------------------

def _collocation():
    return pytest.importorskip("climbopt.collocation")


def test_run_both_methods_on_one_demo(tmp_path):
    """Both methods, minimum time, on the turboprop demo: the collocation row is converged,
    verified by re-simulation, and ranked against the energy-state row."""
    _collocation()
    out = tmp_path / "both"
    result = _run(["run", ROOT / "scenarios" / "turboprop_regional.toml", "--method", "both",
                   "--objective", "time", "--out", out, "--json"])
    assert result.exit_code == 0, result.output
    doc = json.loads(result.stdout)
    rows = {r["method"]: r for r in doc["results"]}
    assert set(rows) == {"energy-state", "collocation", "best-schedule"}
    col = rows["collocation"]
    assert col["converged"] is True and col["iterations"] > 0
    assert col["verification"] is not None and col["verification_miss"] is not None
    assert col["verification_miss"] < 1e-2
    assert (out / "collocation_time_schedule.csv").exists()
    best = [r for r in doc["results"] if r["best_time"]]
    assert len(best) == 1 and best[0]["time_diff_pct"] == 0.0


def test_forced_solver_failure_exit_4(tmp_path):
    """IPOPT limited to one iteration (scenario override): exit 4; the energy-state result is
    still written and labelled; the collocation row is marked not converged and never ranked."""
    _collocation()
    text = (ROOT / "scenarios" / "turboprop_regional.toml").read_text()
    forced = tmp_path / "forced.toml"
    forced.write_text(text.rstrip() + "\n\n[solver.ipopt]\nmax_iter = 1\n")
    out = tmp_path / "o"
    result = _run(["run", forced, "--method", "collocation", "--objective", "time",
                   "--out", out])
    assert result.exit_code == 4, result.output
    _no_traceback(result)
    assert "not converged" in result.output
    doc = json.loads((out / "summary.json").read_text())
    assert doc["exit_code"] == 4 and doc["errors"]
    rows = {r["method"]: r for r in doc["results"]}
    assert rows["collocation"]["converged"] is False
    assert rows["collocation"]["time_diff_pct"] is None and not rows["collocation"]["best_time"]
    energy = rows["energy-state"]
    assert energy["converged"] is True and energy["ranked"] is True
    assert not rows["collocation"]["best_time"] and energy["time_diff_pct"] is not None
    assert any("collocation solve failed" in n for n in energy["notes"])
    assert (out / "energy-state_time.csv").exists()
    assert (out / "energy-state_time_schedule.csv").exists()
    assert not (out / "collocation_time_schedule.csv").exists()
    table = (out / "report.txt").read_text()
    assert "not ranked" in table and CAUTION in table


def test_run_refuses_foreign_out_folder(tmp_path, monkeypatch):
    """The output folder is replaced as a whole, so a non-empty folder that is not an earlier
    climbopt output (no summary.json), or the current folder, is refused with exit 2 and left
    alone."""
    foreign = tmp_path / "mine"
    foreign.mkdir()
    (foreign / "thesis.tex").write_text("precious")
    scenario = ROOT / "scenarios" / "turboprop_regional.toml"
    result = _run(["run", scenario, "--method", "energy", "--out", foreign])
    assert result.exit_code == 2
    assert "not a climbopt output folder" in result.output
    assert (foreign / "thesis.tex").read_text() == "precious"
    monkeypatch.chdir(foreign)
    result = _run(["run", scenario, "--method", "energy", "--out", "."])
    assert result.exit_code == 2 and "current folder" in result.output
    assert (foreign / "thesis.tex").read_text() == "precious"


def test_no_schedules_runs_the_optimisation_rows_alone(tmp_path):
    """`--no-schedules` skips the best-schedule search and the scenario's own schedules: only
    the energy-state rows remain, with the same figures as a full run's (the flown rows do not
    change the optimisation results)."""
    scenario = ROOT / "scenarios" / "transport_twinjet.toml"
    full = _run(["run", scenario, "--method", "energy", "--objective", "time", "--quiet",
                 "--out", tmp_path / "full", "--json"])
    quick = _run(["run", scenario, "--method", "energy", "--objective", "time", "--quiet",
                  "--out", tmp_path / "quick", "--json", "--no-schedules"])
    assert full.exit_code == quick.exit_code == 0, quick.output
    rows_full = json.loads(full.stdout)["results"]
    rows_quick = json.loads(quick.stdout)["results"]
    assert [r["method"] for r in rows_quick] == ["energy-state"]
    assert {"best-schedule", "schedule"} <= {r["method"] for r in rows_full}
    assert rows_quick[0]["time_s"] == rows_full[0]["time_s"]
    assert rows_quick[0]["fuel_kg"] == rows_full[0]["fuel_kg"]
