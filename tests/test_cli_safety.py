"""A run never reports a doubtful result as an answer and never loses data: unverified,
unconverged and over-capacity rows are labelled, unranked and make the exit code 4; Ctrl-C and
SIGTERM leave an older results folder byte-identical and no temporary folder; the output
folder is checked before any solving and written with the user's umask."""

from __future__ import annotations

import json
import os
import signal
import stat
import subprocess
import sys
import time
from pathlib import Path

import pytest
from click.testing import CliRunner

from climbopt.cli import cli
from climbopt.report import OUTPUT_MARKER

ROOT = Path(__file__).resolve().parents[1]
TURBOPROP = ROOT / "scenarios" / "turboprop_regional.toml"
TRANSPORT = ROOT / "scenarios" / "transport_twinjet.toml"


def _run(args):
    return CliRunner().invoke(cli, [str(a) for a in args])


def _snapshot(folder: Path) -> dict:
    return {p.relative_to(folder).as_posix(): p.read_bytes()
            for p in sorted(folder.rglob("*")) if p.is_file()}


def _edited(tmp_path, source: Path, name: str, old: str, new: str) -> Path:
    text = source.read_text()
    assert old in text
    path = tmp_path / name
    path.write_text(text.replace(old, new, 1))
    return path


def test_failed_verification_exits_4_and_ranks_nothing_failed(tmp_path, monkeypatch):
    """With the re-simulation tolerance made impossibly tight (1e-12 of the final energy
    height) every collocation row fails its check: exit 4, the rows are labelled FAILED and
    not ranked, and the best rows are energy-state rows."""
    from climbopt import verify

    monkeypatch.setattr(verify, "FINAL_MISS_TOLERANCE", 1e-12)
    out = tmp_path / "o"
    result = _run(["run", TURBOPROP, "--method", "both", "--objective", "time", "--out", out])
    assert result.exit_code == 4, result.output
    doc = json.loads((out / "summary.json").read_text())
    col = [r for r in doc["results"] if r["method"] == "collocation"]
    assert col and all(not r["ranked"] and r["time_diff_pct"] is None for r in col)
    assert all(not r["verification"]["ok"] for r in col)
    assert [r["method"] for r in doc["results"] if r["best_time"]] in (["energy-state"],
                                                                      ["best-schedule"])
    assert "FAILED" in result.output and "not ranked" in result.output
    assert "re-simulation check failed" in result.output


def test_unsettled_mesh_is_a_failure_with_fallback(tmp_path):
    """max_mesh_refinements = 0 on a 4-interval mesh: the single mesh's error estimate is far
    above its target, so the collocation result is not an optimum: exit 4, the row unranked,
    and the energy-state fallback reported in its place."""
    scen = _edited(tmp_path, TURBOPROP, "coarse.toml", "intervals = 100",
                   "max_mesh_refinements = 0\nintervals = 4")
    out = tmp_path / "o"
    result = _run(["run", scen, "--method", "collocation", "--objective", "time", "--out", out])
    assert result.exit_code == 4, result.output
    doc = json.loads((out / "summary.json").read_text())
    rows = {r["method"]: r for r in doc["results"]}
    assert rows["collocation"]["ranked"] is False and rows["collocation"]["converged"] is False
    assert "mesh not converged" in rows["collocation"]["status"]
    assert rows["energy-state"]["ranked"] is True
    assert rows["energy-state"]["time_diff_pct"] is not None


def test_fuel_capacity_exceeded_is_unranked(tmp_path):
    """A fuel capacity below what the climb burns: the energy-state rows say so, are not ranked,
    and the run exits 4."""
    scen = _edited(tmp_path, TURBOPROP, "small_tanks.toml", "fuel_capacity = ",
                   "fuel_capacity = \"100 kg\"\n# was: fuel_capacity = ")
    out = tmp_path / "o"
    result = _run(["run", scen, "--method", "energy", "--objective", "time", "--out", out])
    assert result.exit_code == 4, result.output
    doc = json.loads((out / "summary.json").read_text())
    row = doc["results"][0]
    assert row["ranked"] is False
    assert any("exceeds the fuel capacity 100 kg" in i for i in row["issues"])


def test_out_folder_checked_before_solving(tmp_path):
    """An --out whose parent is a file, and a folder holding a summary.json of somebody else's
    (no climbopt marker), are refused at once with exit 2 and nothing touched."""
    blocker = tmp_path / "file"
    blocker.write_text("not a folder")
    t0 = time.perf_counter()
    result = _run(["run", TURBOPROP, "--out", blocker / "out"])
    assert result.exit_code == 2 and "cannot write" in result.output
    assert time.perf_counter() - t0 < 5.0   # refused before the solvers ran
    foreign = tmp_path / "theirs"
    foreign.mkdir()
    (foreign / "summary.json").write_text("{}")
    (foreign / "notes.txt").write_text("keep me")
    result = _run(["run", TURBOPROP, "--method", "energy", "--out", foreign])
    assert result.exit_code == 2 and OUTPUT_MARKER in result.output
    assert (foreign / "notes.txt").read_text() == "keep me"


def test_outputs_follow_the_umask(tmp_path):
    """With umask 022 the results folder is 755 and its files 644 (colleagues can read them)."""
    old = os.umask(0o022)
    try:
        out = tmp_path / "o"
        result = _run(["run", TURBOPROP, "--method", "energy", "--objective", "time", "--out",
                       out, "--quiet"])
    finally:
        os.umask(old)
    assert result.exit_code == 0, result.output
    assert stat.S_IMODE(out.stat().st_mode) == 0o755
    for name in ("report.txt", "summary.json", OUTPUT_MARKER, "comparison.csv"):
        assert stat.S_IMODE((out / name).stat().st_mode) == 0o644, name


def _signal_during_solve(tmp_path, sig, scenario_dir):
    """Run once (energy-state) to have an older folder, then a long collocation run into the
    same folder, signalled after 3 s: imports take about 1.3 s, and the transport on an
    energy-state grid of 2000 x 2000 keeps the first solve busy for several seconds more. (A
    signal during IPOPT itself is tested in test_collocation.py.)"""
    slow = scenario_dir / "transport_slow.toml"
    slow.write_text(TRANSPORT.read_text()
                    .replace("grid_altitude_points = 300", "grid_altitude_points = 2000")
                    .replace("grid_speed_points = 300", "grid_speed_points = 2000"))
    out = tmp_path / "o"
    first = _run(["run", TURBOPROP, "--method", "energy", "--objective", "time", "--out", out,
                  "--quiet"])
    assert first.exit_code == 0, first.output
    before = _snapshot(out)
    code = "import sys; from climbopt.cli import main; sys.argv[0] = 'climbopt'; main()"
    proc = subprocess.Popen(
        [sys.executable, "-c", code, "run", str(slow), "--method", "collocation",
         "--out", str(out)], stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True,
        env={**os.environ, "MPLBACKEND": "Agg"})
    time.sleep(3.0)
    proc.send_signal(sig)
    stdout, stderr = proc.communicate(timeout=120)
    return proc.returncode, stdout + stderr, before, _snapshot(out), out


@pytest.mark.parametrize("sig,code,word", [(signal.SIGINT, 130, "interrupted"),
                                           (signal.SIGTERM, 143, "terminated")])
def test_signal_during_solve_keeps_older_folder(tmp_path, tmp_path_factory, sig, code, word):
    """Ctrl-C (SIGINT) exits 130 and SIGTERM 143 during a solve: nothing is written, the older
    results folder is byte-identical, no temporary folder is left, no traceback."""
    rc, text, before, after, out = _signal_during_solve(tmp_path, sig,
                                                        tmp_path_factory.mktemp("scenario"))
    assert rc == code, text
    assert word in text and "Traceback" not in text
    assert after == before
    assert sorted(p.name for p in tmp_path.iterdir()) == ["o"]


def test_unknown_ipopt_option_refused_before_solving(tmp_path):
    """An IPOPT option IPOPT does not know: `run` with collocation stops at once with exit 2
    naming the field (before, it died with a CasADi traceback after the energy-state work)."""
    scen = _edited(tmp_path, TURBOPROP, "opt.toml", "intervals = 100",
                   "intervals = 100\n\n[solver.ipopt]\nnot_an_option = 1")
    out = tmp_path / "o"
    result = _run(["run", scen, "--method", "collocation", "--out", out])
    assert result.exit_code == 2, result.output
    assert "solver.ipopt.not_an_option" in result.output and "Traceback" not in result.output
    assert not out.exists()


def test_time_limit_reached_is_a_clear_failure(tmp_path):
    """solver.time_limit = 0.5 s on a collocation run of the transport: exit 4 with a message
    naming the limit; nothing is reported as optimal and no folder is written."""
    scen = _edited(tmp_path, TRANSPORT, "hurry.toml", "intervals = 100",
                   "intervals = 100\ntime_limit = \"0.5 s\"")
    out = tmp_path / "o"
    result = _run(["run", scen, "--method", "collocation", "--objective", "time", "--out", out])
    assert result.exit_code == 4, result.output
    assert "time limit of 0.5 s" in result.output
    assert "optimal" not in result.output.replace("not optimal", "")
