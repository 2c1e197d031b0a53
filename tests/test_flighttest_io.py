"""Flight-test input and the `climbopt reduce` command: every problem of a test plan and its CSV
files at once, naming file and line/column or field (exit 2, no traceback); the bundled
synthetic demo reduced end to end."""

from __future__ import annotations

import json
import re
import shutil
from pathlib import Path

import numpy as np
import pytest
from click.testing import CliRunner

from climbopt import CAUTION
from climbopt.aircraft import build_model
from climbopt.cli import cli
from climbopt.flighttest_fit import equivalent_cd0_change, fit_surface, reduce_plan
from climbopt.flighttest_io import FlightTestError, PlannedPoint, load_test_plan, read_history
from climbopt.flighttest_synth import modified_scenario
from climbopt.rutowski import solve_energy_state

ROOT = Path(__file__).resolve().parents[1]
DEMO = ROOT / "scenarios" / "flighttest"
PLAN = DEMO / "demo_testplan.toml"

HEADER = "time_s,pressure_altitude_ft,cas_kt,oat_degC,gross_weight_lb,load_factor"


def _csv(path: Path, header: str = HEADER, rows: int = 200, edit=None) -> Path:
    """A level acceleration at 10 Hz (20 s), each line edited by ``edit(i, fields)``."""
    lines = ["# test data", header]
    for i in range(rows):
        fields = [f"{0.1 * i:.1f}", "15000", f"{200 + 0.1 * i:.2f}", "-2.5", "135000", "1.0"]
        if edit:
            fields = edit(i, fields)
        lines.append(",".join(fields))
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")
    return path


def _problems(path, **kw):
    hist, problems = read_history(path, PlannedPoint("p", str(path), "level_acceleration"), **kw)
    return hist, ["{}: {}: {}".format(*p) for p in problems]


def test_valid_history_is_read_in_si(tmp_path):
    """A clean file reads into SI arrays (ft -> m, kt -> m/s, degC -> K, lb -> kg)."""
    hist, problems = _problems(_csv(tmp_path / "a.csv"))
    assert problems == []
    assert hist.pressure_altitude_m[0] == pytest.approx(4572.0)
    assert hist.cas_m_s[0] == pytest.approx(200 * 1852 / 3600)
    assert hist.oat_k[0] == pytest.approx(270.65)
    assert hist.mass_kg[0] == pytest.approx(135000 * 0.45359237)


def test_missing_column_named(tmp_path):
    """A missing temperature column is named with its expected form."""
    path = _csv(tmp_path / "a.csv", HEADER.replace(",oat_degC", ""),
                edit=lambda i, f: f[:3] + f[4:])
    _, problems = _problems(path)
    assert any(str(path) in p and "header" in p and "missing column oat_<unit>" in p
               for p in problems), problems


def test_non_monotone_time_named_with_line(tmp_path):
    """A time stamp that goes backwards names its line (line 50: header on line 2, data from 3)."""
    path = _csv(tmp_path / "a.csv", edit=lambda i, f: (["4.0"] + f[1:]) if i == 47 else f)
    _, problems = _problems(path)
    assert any("line 50, column time_s" in p and "time must increase" in p for p in problems), \
        problems


def test_thirty_second_gap_is_an_error(tmp_path):
    """A 30 s gap in the time history is an error naming the line after the gap."""
    path = _csv(tmp_path / "a.csv", edit=lambda i, f: ([f"{0.1 * i + 30.0:.1f}"] + f[1:])
                if i >= 100 else f)
    _, problems = _problems(path, max_gap_s=5.0)
    assert any("line 103, column time_s" in p and "gap of 30.1 s" in p for p in problems), \
        problems


def test_unknown_units_and_nan_all_reported_at_once(tmp_path):
    """An unknown altitude unit, a non-numeric CAS and a NaN temperature are all reported in
    one pass, each with file, column and (for values) line."""
    path = _csv(tmp_path / "a.csv", HEADER.replace("pressure_altitude_ft", "pressure_altitude_fet"),
                edit=lambda i, f: (f[:2] + ["fast"] + f[3:]) if i == 10 else
                (f[:3] + ["nan"] + f[4:]) if i == 20 else f)
    _, problems = _problems(path)
    text = "\n".join(problems)
    assert "column pressure_altitude_fet: unknown unit 'fet'" in text
    assert "line 13, column cas_kt: not a number: 'fast'" in text
    assert "line 23, column oat_degC: missing value (nan)" in text
    assert all(str(path) in p for p in problems)


def test_wrong_dimension_and_unknown_column(tmp_path):
    """A CAS column in feet and an unknown column are both named."""
    path = _csv(tmp_path / "a.csv", HEADER.replace("cas_kt", "cas_ft") + ",flap_deg",
                edit=lambda i, f: f + ["0"])
    _, problems = _problems(path)
    text = "\n".join(problems)
    assert "column cas_ft: unit 'ft' is a length, not a speed" in text
    assert "unknown column 'flap_deg'" in text


def test_level_acceleration_must_hold_altitude(tmp_path):
    """A 'level acceleration' that climbs 2,000 ft is rejected (wrong manoeuvre kind)."""
    path = _csv(tmp_path / "a.csv", edit=lambda i, f: [f[0], f"{15000 + 10 * i}"] + f[2:])
    _, problems = _problems(path)
    assert any("a level acceleration holds it" in p for p in problems), problems


def _plan(tmp_path, text: str) -> Path:
    p = tmp_path / "plan.toml"
    p.write_text(text, encoding="utf-8")
    return p


def test_plan_problems_listed_with_fields(tmp_path):
    """Unknown keys, a bad kind, a missing standard weight, a missing file and a bad predicted
    scenario are all listed, each with its field."""
    _csv(tmp_path / "ok.csv")
    plan = _plan(tmp_path, """
[aircraft]
reference_area = "125 m^2"
wing_span = "30 m"
[predicted]
scenario = "nowhere.toml"
[[test_point]]
file = "ok.csv"
kind = "level_acceleraton"
[[test_point]]
file = "missing.csv"
kind = "sawtooth_climb"
""")
    with pytest.raises(FlightTestError) as err:
        load_test_plan(plan)
    text = str(err.value)
    assert "aircraft.wing_span: unknown key" in text
    assert "aircraft.standard_weight: missing" in text
    assert ("test_point[1].kind: got 'level_acceleraton' (did you mean "
            "'level_acceleration'?)") in text
    assert "missing.csv: no such file" in text
    assert "predicted.scenario (nowhere.toml): file: no such file" in text


def test_cli_bad_data_exit_2_without_traceback(tmp_path):
    """`climbopt reduce` on bad data exits 2 and lists the problems by file and line."""
    _csv(tmp_path / "a.csv", edit=lambda i, f: (["4.0"] + f[1:]) if i == 47 else f)
    plan = _plan(tmp_path, """
[aircraft]
reference_area = "125 m^2"
standard_weight = "70000 kg"
induced_drag_factor = 0.043
[[test_point]]
file = "a.csv"
kind = "level_acceleration"
""")
    result = CliRunner().invoke(cli, ["reduce", str(plan), "--out", str(tmp_path / "out")])
    assert result.exit_code == 2
    assert "Traceback" not in result.output
    assert "1 problem found" in result.output
    assert "line 50, column time_s" in result.output
    assert not (tmp_path / "out").exists()


def test_demo_recovers_drag_difference():
    """The bundled synthetic demo (flown with CD0 x 1.04, ISA+12 K, stated sensor noise) gives
    a zero-lift drag change of +4 % within 3 of its bootstrap sigmas."""
    plan = load_test_plan(PLAN)
    ref, points = reduce_plan(plan)
    surface = fit_surface(points, ref, bootstrap=plan.bootstrap, seed=plan.seed)
    fit, samples = equivalent_cd0_change(surface, points.altitude_m, points.mach)
    sigma = np.std(np.mean(samples, axis=1), ddof=1)
    assert abs(np.mean(fit) - 0.04) < 3.0 * sigma
    assert sigma < 0.01


def test_cli_reduce_demo_with_schedule(tmp_path):
    """`climbopt reduce --schedule` on the demo writes the points, surface, plots and both climbs,
    prints the caution, and the measured time is within 3 bootstrap sigmas of the time of the
    'true' aircraft the data were flown with (CD0 x 1.04)."""
    plan_dir = tmp_path / "flighttest"
    shutil.copytree(DEMO, plan_dir)
    shutil.copy(ROOT / "scenarios" / "transport_twinjet.toml", tmp_path)
    out = tmp_path / "out"
    result = CliRunner().invoke(cli, ["reduce", str(plan_dir / "demo_testplan.toml"), "--out",
                                      str(out), "--units", "us", "--schedule"])
    assert result.exit_code == 0, result.output
    assert CAUTION in result.output
    doc = json.loads((out / "reduce.json").read_text())
    for name in ("points.csv", "surface.npz", "surface.csv", "measured_ps.png", "residuals.png",
                 "predicted_vs_measured.png", "climb_comparison.png", "climb_comparison.csv",
                 "measured_time_schedule.csv", "predicted_time_schedule.csv", "report.txt"):
        assert (out / name).is_file(), name
        assert name in doc["files"]
    res = doc["results"]
    scenario = load_test_plan(plan_dir / "demo_testplan.toml").predicted
    truth = solve_energy_state(modified_scenario(scenario, cd0_factor=1.04), "time",
                               model=build_model(modified_scenario(scenario, cd0_factor=1.04)))
    assert abs(res["measured_time_s"] - truth.table["time_s"][-1]) < 3.0 * res["time_sigma_s"]
    assert res["measured_time_s"] > res["predicted_time_s"]
    assert CAUTION in (out / "points.csv").read_text()
    # the best flyable schedule of each aircraft, and the self-contained flight-test page
    assert res["measured_schedule_time_s"] > res["predicted_schedule_time_s"]
    page = (out / "reduce.html").read_text()
    assert "reduce.html" in doc["files"] and "<script" not in page
    assert not re.search(r"""(src|href)\s*=\s*["']https?:|url\(\s*["']?https?:|@import""", page)
    assert page.count("<svg") == 4 and page.count(CAUTION) >= 2  # top and foot of the page
    for text in ("Summary", "Test points", "la_35kft", "Predicted and measured climbs",
                 "measured best schedule", res["measured_schedule"]):
        assert text in page, text


def test_fuel_used_column_needs_initial_weight(tmp_path):
    """A fuel_used column gives mass = initial gross weight - fuel used; without the initial
    weight in the plan it is an error naming the column."""
    path = _csv(tmp_path / "a.csv", HEADER.replace("gross_weight_lb", "fuel_used_kg"),
                edit=lambda i, f: f[:4] + [f"{0.5 * i:.1f}"] + f[5:])
    hist, problems = read_history(path, PlannedPoint("p", "a.csv", "level_acceleration", 60_000.0))
    assert problems == []
    assert hist.mass_kg[10] == pytest.approx(60_000.0 - 5.0)
    _, problems = _problems(path)
    assert any("column fuel_used_kg" in p and "initial_gross_weight" in p for p in problems)


def test_cli_reduce_without_predicted_model(tmp_path):
    """Without a [predicted] scenario the demo data reduce with the stated induced-drag factor
    to a direct Ps surface (the outputs say the thrust change for temperature is taken as
    zero); --schedule then exits 2."""
    plan_dir = tmp_path / "ft"
    shutil.copytree(DEMO, plan_dir)
    text = (plan_dir / "demo_testplan.toml").read_text(encoding="utf-8")
    text = text.replace('[predicted]\nscenario = "../transport_twinjet.toml"\nrating = "climb"\n',
                        "").replace('standard_weight = "70000 kg"',
                                    'standard_weight = "70000 kg"\ninduced_drag_factor = 0.043')
    plan = plan_dir / "direct.toml"
    plan.write_text(text, encoding="utf-8")
    out = tmp_path / "out"
    result = CliRunner().invoke(cli, ["reduce", str(plan), "--out", str(out)])
    assert result.exit_code == 0, result.output
    assert "Ps fit (direct, Mach degree 3, altitude degree 2)" in result.output
    assert "thrust change for temperature taken as zero" in (out / "report.txt").read_text()
    assert (out / "measured_ps.png").is_file() and not (out / "predicted_vs_measured.png").exists()
    result = CliRunner().invoke(cli, ["reduce", str(plan), "--out", str(out), "--schedule"])
    assert result.exit_code == 2
    assert "--schedule needs a [predicted] scenario" in result.output
