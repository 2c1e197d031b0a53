"""Tests of climbopt.report: comparison ranking, unit conversion of outputs, CSV/JSON writers,
atomic output folders."""

from __future__ import annotations

import json
import os

import pytest

from climbopt import CAUTION
from climbopt import report
from climbopt.results import COLUMNS, FailedRun, Trajectory
from synthetic_paths import simple_table, verification

# Exact unit definitions (NIST SP 811, appendix B): 1 ft = 0.3048 m, 1 lb = 0.45359237 kg,
# 1 nmi = 1852 m, 1 kt = 1852 m / 3600 s.
FT = 0.3048
LB = 0.45359237
NMI = 1852.0
KT = 1852.0 / 3600.0


def _traj(method, objective, duration_s, fuel_kg, converged=True, **kw):
    return Trajectory(method=method, objective=objective,
                      table=simple_table(duration_s=duration_s, fuel_kg=fuel_kg, **kw),
                      converged=converged, status="ok" if converged else "iteration limit")


def test_comparison_ranks_converged_rows_only():
    """Percent differences are to the best *converged* row; an unconverged row with a better
    time is never ranked (and does not become the reference)."""
    rows = report.comparison([
        _traj("energy-state", "time", 300.0, 500.0),
        _traj("energy-state", "fuel", 330.0, 450.0),
        _traj("collocation", "time", 250.0, 400.0, converged=False),
    ])
    t, f, bad = rows
    assert t["best_time"] and not t["best_fuel"]
    assert f["best_fuel"] and not f["best_time"]
    assert t["time_diff_pct"] == pytest.approx(0.0)
    assert f["time_diff_pct"] == pytest.approx(10.0)          # (330 - 300) / 300
    assert t["fuel_diff_pct"] == pytest.approx(100.0 * 50.0 / 450.0)
    assert bad["time_diff_pct"] is None and bad["fuel_diff_pct"] is None
    assert not bad["best_time"] and not bad["best_fuel"]
    text = report.format_table(rows, "si")
    assert "not ranked" in text and "NO" in text and "best" in text
    assert "never ranked" in text


def test_comparison_failed_run_without_trajectory():
    """A solve that returned nothing still gets a row with its status, and no numbers."""
    rows = report.comparison([
        _traj("energy-state", "time", 300.0, 500.0),
        FailedRun("collocation", "time", status="Maximum_Iterations_Exceeded",
                  message="IPOPT stopped", iterations=1),
    ])
    assert rows[1]["time_s"] is None and rows[1]["converged"] is False
    assert rows[1]["status"] == "Maximum_Iterations_Exceeded"
    assert rows[0]["best_time"] is True
    text = report.format_table(rows, "us")
    figures, diagnostics = [ln for ln in text.splitlines() if ln.startswith("collocation")]
    assert "not ranked" in figures and "NO" not in figures
    assert diagnostics.split()[3] == "NO" and diagnostics.split()[4] == "1"
    lines = text.splitlines()
    rule = next(i for i, ln in enumerate(lines) if ln.startswith("---"))
    assert lines[rule - 1].split()[3] == "[lb]"          # the units sit under the names
    assert lines[rule - 2].split()[2] == "fuel"


def test_to_display_us_units_by_hand():
    """US display units: lb, ft, nmi, kt, ft/min (exact definitions, NIST SP 811)."""
    assert report.to_display("mass", 1000.0, "us") == (pytest.approx(1000.0 / LB), "lb")
    assert report.to_display("altitude", 3048.0, "us") == (pytest.approx(10000.0), "ft")
    assert report.to_display("distance", 1852.0 * 3, "us") == (pytest.approx(3.0), "nmi")
    assert report.to_display("speed", 250 * KT, "us") == (pytest.approx(250.0), "kt")
    assert report.to_display("rate", 10.0, "us")[0] == pytest.approx(10.0 / FT * 60.0)
    assert report.to_display("distance", 12345.0, "si") == (pytest.approx(12.345), "km")
    with pytest.raises(ValueError, match="units must be one of"):
        report.to_display("mass", 1.0, "imperial")


def test_trajectory_csv_si_and_us(tmp_path):
    """Per-point CSV: SI header is exactly COLUMNS; US header and values are converted; the
    caution is in the file; an unconverged result is labelled."""
    traj = _traj("collocation", "fuel", 300.0, 200.0, converged=False)
    report.write_trajectory_csv(tmp_path / "si.csv", traj, "si", "demo")
    report.write_trajectory_csv(tmp_path / "us.csv", traj, "us", "demo")
    header, rows = report.read_csv(tmp_path / "si.csv")
    assert header == list(COLUMNS)
    assert len(rows) == len(traj.table["time_s"])
    text = (tmp_path / "si.csv").read_text()
    assert CAUTION in text and "NOT CONVERGED" in text
    header_us, rows_us = report.read_csv(tmp_path / "us.csv")
    assert "altitude_ft" in header_us and "mass_lb" in header_us and "distance_nmi" in header_us
    i = header_us.index("altitude_ft")
    assert float(rows_us[-1][i]) == round(5000.0 / FT)  # whole feet
    j = header_us.index("tas_kt")
    assert float(rows_us[0][j]) == round(120.0 / KT, 1)  # 0.1 kt


def test_comparison_csv_and_summary_json(tmp_path):
    """comparison.csv in US units holds the fuel in lb (hand conversion); summary.json keeps SI
    keys, has the caution, and writes NaN as null."""
    traj = _traj("energy-state", "time", 300.0, 500.0)
    traj = traj.with_(verification=verification(float("nan"), False))
    rows = report.comparison([traj])
    report.write_comparison_csv(tmp_path / "c.csv", rows, "us", "demo")
    header, body = report.read_csv(tmp_path / "c.csv")
    assert float(body[0][header.index("fuel [lb]")]) == round(500.0 / LB, 1)  # 0.1 lb
    assert float(body[0][header.index("distance [nmi]")]) == round(120.0 * 300.0 / NMI, 2)
    doc = report.summary_document(rows, scenario_name="demo", scenario_path="demo.toml",
                                  units="us")
    report.write_summary_json(tmp_path / "summary.json", doc)
    loaded = json.loads((tmp_path / "summary.json").read_text())
    assert loaded["caution"] == CAUTION
    res = loaded["results"][0]
    for key in ("method", "objective", "time_s", "fuel_kg", "distance_m", "converged",
                "iterations", "wall_s", "verification"):
        assert key in res
    assert res["fuel_kg"] == pytest.approx(500.0)
    assert res["display"]["fuel [lb]"] == round(500.0 / LB, 1)
    assert res["verification"]["final_miss_relative"] is None
    assert res["verification_miss"] is None


def test_atomic_output_dir_replaces_whole_folder(tmp_path):
    """A successful write replaces the old folder completely and leaves no temporary folders."""
    out = tmp_path / "out"
    out.mkdir()
    (out / "old.txt").write_text("old")
    with report.atomic_output_dir(out) as tmp:
        (tmp / "new.txt").write_text("new")
        assert not (out / "new.txt").exists()   # nothing visible before the swap
    assert sorted(p.name for p in out.iterdir()) == [report.OUTPUT_MARKER, "new.txt"]
    assert sorted(p.name for p in tmp_path.iterdir()) == ["out"]


def test_atomic_output_dir_failure_mid_write_keeps_old(tmp_path):
    """An exception while writing leaves the earlier folder untouched (interrupted run)."""
    out = tmp_path / "out"
    out.mkdir()
    (out / "summary.json").write_text('{"old": true}')
    with pytest.raises(KeyboardInterrupt):
        with report.atomic_output_dir(out) as tmp:
            (tmp / "summary.json").write_text('{"old": false}')
            raise KeyboardInterrupt
    assert json.loads((out / "summary.json").read_text()) == {"old": True}
    assert sorted(p.name for p in tmp_path.iterdir()) == ["out"]


def test_atomic_output_dir_failed_swap_restores_old(tmp_path, monkeypatch):
    """If renaming the new folder into place fails, the old folder is renamed back."""
    out = tmp_path / "out"
    out.mkdir()
    (out / "keep.txt").write_text("keep")
    real_rename = os.rename
    calls = []

    def flaky_rename(src, dst):
        calls.append((str(src), str(dst)))
        if ".new-" in str(src):
            raise OSError("disk full (simulated)")
        return real_rename(src, dst)

    monkeypatch.setattr(report.os, "rename", flaky_rename)
    with pytest.raises(OSError, match="simulated"):
        with report.atomic_output_dir(out) as tmp:
            (tmp / "x.txt").write_text("x")
    assert (out / "keep.txt").read_text() == "keep"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["out"]
    assert len(calls) == 3   # old aside, new in (fails), old back


def test_write_text_atomic(tmp_path, monkeypatch):
    """A single-file write that fails leaves the earlier file and no temporary file."""
    target = tmp_path / "a.txt"
    target.write_text("before")

    def boom(*a, **k):
        raise OSError("simulated")

    monkeypatch.setattr(report.os, "replace", boom)
    with pytest.raises(OSError):
        report.write_text_atomic(target, "after")
    assert target.read_text() == "before"
    assert [p.name for p in tmp_path.iterdir()] == ["a.txt"]


def test_column_headers_us():
    """US per-point headers name the unit of each column."""
    got = {k: report.column_header(k, "us") for k in COLUMNS}
    assert got["ps_m_s"] == "ps_ft_per_min"
    assert got["flight_path_angle_rad"] == "flight_path_angle_deg"
    assert got["mach"] == "mach" and got["throttle"] == "throttle"
    assert got["fuel_used_kg"] == "fuel_used_lb"
    assert len(set(got.values())) == len(COLUMNS)


def test_verification_miss_in_table():
    """The re-simulation miss (fraction) is shown in percent; a failed check is flagged."""
    good = _traj("collocation", "time", 300.0, 500.0)
    good = good.with_(verification=verification(2.5e-4, True))
    bad = _traj("collocation", "fuel", 320.0, 450.0)
    bad = bad.with_(verification=verification(3.0e-2, False)).with_issues("re-simulation FAILED")
    rows = report.comparison([good, bad])
    assert rows[0]["verification_miss"] == pytest.approx(2.5e-4)
    assert rows[1]["ranked"] is False and rows[1]["fuel_diff_pct"] is None
    text = report.format_table(rows, "si")
    lines = text.splitlines()
    start = lines.index("solver diagnostics:")
    rule = next(i for i in range(start, len(lines)) if lines[i].startswith("---"))
    diagnostics = lines[rule + 1:]
    assert diagnostics[0].endswith("0.025")
    assert diagnostics[1].endswith("3.000 FAILED")
    assert "re-simulation" in text
    assert "not ranked: collocation, minimum fuel: re-simulation FAILED" in text
    assert report.display_record(rows[1], "si")["re-sim miss [%]"] == pytest.approx(3.0)


def test_public_api_exports():
    """The package exposes each step of the data flow lazily (no CasADi import on
    ``import climbopt``)."""
    import climbopt
    from climbopt.schedule import crossover_altitude_m

    assert climbopt.crossover_altitude_m is crossover_altitude_m
    for name in climbopt.__all__:
        assert getattr(climbopt, name) is not None
    with pytest.raises(AttributeError, match="no attribute 'nothing'"):
        climbopt.nothing  # noqa: B018
