"""Outputs to hand over: report.html, the units of every output, rounded CSVs that the notebook
API reproduces, office tables from sweeps, and the map options."""

from __future__ import annotations

import base64
import json
import math
import re
import shutil
import subprocess
import sys
from html.parser import HTMLParser
from pathlib import Path

import numpy as np
import pytest
from click.testing import CliRunner

from climbopt import CAUTION
from climbopt.cli import cli
from climbopt.results import COLUMNS
from climbopt.scenario import load_scenario
from climbopt.units import UNIT_DIGITS, format_min_s, round_display, unit_system_for

ROOT = Path(__file__).resolve().parents[1]
TRANSPORT = ROOT / "scenarios" / "transport_twinjet.toml"
TURBOPROP = ROOT / "scenarios" / "turboprop_regional.toml"
FT, KT, LB, NMI = 0.3048, 1852.0 / 3600.0, 0.45359237, 1852.0  # exact by definition (1959, 1929)


def _run(args):
    return CliRunner().invoke(cli, [str(a) for a in args], catch_exceptions=False)


class _Page(HTMLParser):
    """Text, section ids, header cells, inline SVGs (and the words drawn in them), scripts and
    external references of a page."""

    def __init__(self):
        super().__init__()
        self.text, self.sections, self.headers, self.svgs = [], [], [], 0
        self.scripts, self.external, self.tables = 0, [], 0
        self.figure_text, self._svg_depth, self.png_images = [], 0, []
        self._in_th = False

    def handle_starttag(self, tag, attrs):
        a = dict(attrs)
        if tag == "section":
            self.sections.append(a.get("id"))
        elif tag == "svg":
            self.svgs += 1
            self._svg_depth += 1
        elif tag == "script":
            self.scripts += 1
        elif tag == "table":
            self.tables += 1
        elif tag == "img" and (a.get("src") or "").startswith("data:image/png;base64,"):
            self.png_images.append(base64.b64decode(a["src"].split(",", 1)[1]))
        elif tag == "th":
            self._in_th = True
        for key in ("src", "href"):
            if key in a and a[key] and not a[key].startswith(("#", "data:")):
                self.external.append(a[key])

    def handle_endtag(self, tag):
        if tag == "th":
            self._in_th = False
        elif tag == "svg":
            self._svg_depth -= 1

    def handle_data(self, data):
        if self._svg_depth:
            self.figure_text.append(data)
            return
        self.text.append(data)
        if self._in_th:
            self.headers.append(data.strip())

    @property
    def all_text(self) -> str:
        return " ".join(" ".join(self.text).split())


@pytest.fixture(scope="module")
def transport_run(tmp_path_factory):
    """The demo transport solved by both methods for both objectives, written in US units."""
    from climbopt.outputs import write_outputs
    from climbopt.pipeline import run_mission

    scenario = load_scenario(TRANSPORT)
    result = run_mission(scenario)
    out = tmp_path_factory.mktemp("transport") / "out"
    doc = write_outputs(result, out, scenario, units="us")
    return scenario, result, doc, out


def test_html_report_holds_conditions_comparison_schedules_and_figures(transport_run):
    """The demo's HTML report holds the conditions, comparison rows, each schedule, every figure."""
    # also: self-contained (no script, nothing fetched) and the caution at top and foot
    scenario, result, doc, out = transport_run
    page = _Page()
    text = (out / "report.html").read_text(encoding="utf-8")
    page.feed(text)
    words = page.all_text
    assert page.sections == ["conditions", "comparison", "flown", "schedules", "procedure",
                             "figures", "notes"]
    assert page.scripts == 0 and page.external == []
    assert words.count(CAUTION) == 2                      # top and foot
    for condition in ("154,324 lb", "ISA +0 K", "1,500 ft, CAS 200 kt", "35,000 ft, Mach 0.780",
                      "250 kt below 10,000 ft", "procedure (acceleration share 0.5)"):
        assert condition in words, condition              # 70,000 kg = 154,324 lb
    for rec in doc["results"]:
        assert rec["label"] in words
        minutes = format_min_s(rec["time_s"])
        assert minutes in words                           # every row's time as min:s
    for header in ("time [s]", "time [min:s]", "fuel [lb]", "distance [nmi]", "converged",
                   "re-sim miss [%]"):
        assert header in page.headers
    schedules = [f for f in doc["results"] if any(n.endswith("_schedule.csv") for n in f["files"])]
    assert len(schedules) == 7
    for sched in schedules:
        assert sched["label"].split(",")[0] in words
    # the flown schedules come first: what crews fly
    first = words.index("climb schedule 250/272/M0.72 (best schedule, minimum time)")
    assert first < words.index("climb schedule, collocation, minimum time")
    # the figures are the PNG files themselves, embedded (not drawn a second time)
    pngs = [out / f for f in doc["figures"]]
    assert page.svgs == 0 and len(page.png_images) == len(pngs) == 4
    assert sorted(page.png_images) == sorted(p.read_bytes() for p in pngs)
    assert "Figure 4." in words and "Figure 5." not in words
    assert "the procedure costs" not in words and "extra time" in page.headers
    # the fuel box leads with the figure the fuel ranking uses: fuel to the common point
    best_fuel = next(r for r in doc["results"] if r.get("best_fuel"))
    cp_lb = best_fuel["fuel_to_common_point_kg"] / 0.45359237   # lb, exact (NIST SP 811)
    assert f"least fuel to the common point: {best_fuel['label']}" in words
    assert f"{cp_lb:,.0f}" in words


def _chromium():
    return shutil.which("chromium") or shutil.which("chromium-browser")


def _chromium_args(tmp_path):
    return [_chromium(), "--headless", "--no-sandbox", "--disable-gpu", "--disable-quic",
            "--no-first-run", "--disable-background-networking", "--disable-component-update",
            "--disable-sync", f"--user-data-dir={tmp_path / 'profile'}"]


@pytest.mark.skipif(_chromium() is None, reason="chromium is not installed")
def test_html_report_renders_in_a_browser(transport_run, tmp_path):
    """A real browser renders the report, not blank, with the comparison text (needs chromium)."""
    from PIL import Image

    _, _, doc, out = transport_run
    url = (out / "report.html").resolve().as_uri()
    shot = tmp_path / "shot.png"
    subprocess.run(_chromium_args(tmp_path) + [f"--screenshot={shot}", "--window-size=1240,1754",
                                               url], check=True, capture_output=True, timeout=180)
    image = np.asarray(Image.open(shot).convert("L"), dtype=float)
    assert image.shape == (1754, 1240)
    assert image.std() > 20.0                            # not a blank page
    assert (image < 80).mean() > 0.002                   # dark text is drawn
    dom = subprocess.run(_chromium_args(tmp_path) + ["--dump-dom", url], check=True,
                         capture_output=True, text=True, timeout=180).stdout
    assert "Comparison of the results" in dom and "collocation, minimum time" in dom
    assert format_min_s(doc["results"][1]["time_s"]) in dom


def test_units_default_follows_the_file(tmp_path):
    """`--units` default follows the file: a scenario written in ft/kt prints ft/kt."""
    # and the same scenario rewritten in m and m/s prints m, with speeds to fly in km/h
    result = _run(["run", TURBOPROP, "--method", "energy", "--objective", "time",
                   "--out", tmp_path / "ft"])
    assert result.exit_code == 0, result.output
    flat = " ".join(result.output.split())                # long lines are wrapped
    assert "units us (ft, kt, lb, nmi, ft/min)" in flat
    assert " [lb] " in flat and "target altitude 20,000 ft" in flat
    header, _ = _csv(tmp_path / "ft" / "energy-state_time_schedule.csv")
    assert header[:3] == ["altitude [ft]", "fly", "CAS [kt]"]
    text = TURBOPROP.read_text()
    for old, new in (('"1500 ft"', '"457.2 m"'), ('"20000 ft"', '"6096 m"'),
                     ('"160 kt"', '"82.31 m/s"'), ('"200 kt"', '"102.89 m/s"'),
                     ('"1000 ft"', '"304.8 m"'), ('"25000 ft"', '"7620 m"'),
                     ('"250 kt"', '"128.61 m/s"')):
        assert old in text
        text = text.replace(old, new)
    metric = tmp_path / "metric.toml"
    metric.write_text(text)  # the same scenario in m and m/s: m, with speeds to fly in km/h
    assert unit_system_for("file", load_scenario(metric).display_units) == "si"
    result = _run(["run", metric, "--method", "energy", "--objective", "time",
                   "--out", tmp_path / "m"])
    assert result.exit_code == 0, result.output
    flat = " ".join(result.output.split())
    assert "units si (m, m/s, kg, km)" in flat and "target altitude 6,096 m" in flat
    header, _ = _csv(tmp_path / "m" / "energy-state_time_schedule.csv")
    assert header[:3] == ["altitude [m]", "fly", "CAS [km/h]"]   # speeds to fly in km/h


def test_crew_units_keep_the_file_mass_unit(tmp_path):
    """`--units crew` keeps the file's mass unit; `--method energy-state` is accepted."""
    scenario = load_scenario(TURBOPROP)
    assert scenario.display_units["aircraft.mass"] == "kg"
    assert unit_system_for("crew", scenario.display_units) == "crew"
    assert unit_system_for("crew", {"aircraft.mass": "lb"}) == "crew-lb"
    result = _run(["run", TURBOPROP, "--method", "energy-state", "--objective", "fuel",
                   "--units", "crew", "--out", tmp_path / "c"])
    assert result.exit_code == 0, result.output
    assert "units crew (ft, kt, kg, nmi, ft/min)" in result.output
    header, rows = _csv(tmp_path / "c" / "comparison.csv")
    assert header[3:5] == ["fuel [kg]", "distance [nmi]"] and "final mass [kg]" in header
    doc = json.loads((tmp_path / "c" / "summary.json").read_text())
    assert float(rows[0][3]) == round(doc["results"][0]["fuel_kg"], 1)
    assert float(rows[0][4]) == round(doc["results"][0]["distance_m"] / NMI, 2)
    assert rows[0][2] == format_min_s(doc["results"][0]["time_s"])


def _csv(path):
    from climbopt.report import read_csv

    return read_csv(path)


def test_dataframe_and_xarray_round_trip_the_written_numbers(transport_run, tmp_path):
    """`to_dataframe()`/`to_xarray()` equal the CSV/NPZ numbers (at the stated rounding)."""
    pytest.importorskip("pandas")
    pytest.importorskip("xarray")
    from climbopt.energy import build_energy_map
    from climbopt.outputs import write_outputs
    from climbopt.report import write_energy_map

    scenario, result, _, _ = transport_run
    write_outputs(result, tmp_path / "si", scenario, units="si")
    traj = next(t for t in result.trajectories() if t.label == "collocation, minimum time")
    df = traj.to_dataframe()
    header, rows = _csv(tmp_path / "si" / "collocation_time.csv")
    assert header == list(COLUMNS) and len(rows) == len(df)
    for j, key in enumerate(COLUMNS):
        unit = COLUMNS[key] if COLUMNS[key] != "-" else ""
        want = [round_display(float(v), unit) for v in df[key]]
        assert [float(r[j]) for r in rows] == want, key
    assert UNIT_DIGITS["s"] == 1 and UNIT_DIGITS["m"] == 1 and UNIT_DIGITS["kg"] == 1
    emap = build_energy_map(scenario, shape=(30, 25))
    write_energy_map(tmp_path, emap, "us", scenario.name, TRANSPORT)
    ds = emap.to_xarray()
    npz = np.load(tmp_path / "energy_map.npz")
    for name in ("ps_m_s", "fuel_flow_kg_s", "mach", "feasible"):
        np.testing.assert_array_equal(npz[name], ds[name].values)
    header, rows = _csv(tmp_path / "energy_map.csv")
    assert header[3] == "Ps [ft/min]" and header[4] == "fuel flow [lb/h]"
    ps = np.array([float(r[3]) for r in rows]).reshape(30, 25)
    want = np.round(ds["ps_m_s"].values / FT * 60.0)       # whole ft/min
    np.testing.assert_array_equal(ps, want)
    ff = np.array([float(r[4]) for r in rows]).reshape(30, 25)
    np.testing.assert_allclose(ff, ds["fuel_flow_kg_s"].values / LB * 3600.0, atol=0.05 + 1e-9)


def test_office_table_of_a_3x3x2_sweep(tmp_path):
    """A 3 x 3 x 2 sweep's office table has 18 cells per quantity matching the rows."""
    from climbopt import sweep as sw
    from climbopt.office import office_table

    result = _run(["sweep", TURBOPROP, "--vary", "mass=14:16:3 t",
                   "--vary", "temperature_offset=-10,0,10 K",
                   "--vary", "target_altitude=FL150,FL200", "--serial", "--no-plots",
                   "--table", "--units", "crew", "--out", tmp_path / "s"])
    assert result.exit_code == 0, result.output
    rows = sw.read_table(tmp_path / "s" / "sweep.csv")
    assert len(rows) == 18 and all(r["status"] == "ok" for r in rows)
    header, body = _csv(tmp_path / "s" / "climb_table.csv")
    assert header == ["target altitude [ft]", "flight level", "mass [kg]", "quantity",
                      "ISA -10 K", "ISA +0 K", "ISA +10 K"]
    per = {}
    for r in body:
        per.setdefault(r[3], []).extend(c for c in r[4:] if c != "")
    assert {q: len(v) for q, v in per.items()} == {
        "time [s]": 18, "time [min:s]": 18, "fuel [kg]": 18, "distance [nmi]": 18}
    for r in rows:
        line = next(b for b in body if b[3] == "fuel [kg]" and float(b[2]) == r["mass_kg"]
                    and float(b[0]) == round(r["target_altitude_m"] / FT))
        col = header.index(f"ISA {r['temperature_offset_k']:+g} K")
        assert float(line[col]) == round(r["fuel_kg"], 1)
        t_line = next(b for b in body if b[3] == "time [s]" and b[:3] == line[:3])
        assert float(t_line[col]) == round(r["time_s"], 1)
    scenario = load_scenario(TURBOPROP)
    plan = sw.plan_sweep(scenario, [sw.parse_variation(v, scenario) for v in
                                    ("mass=14:16:3 t", "temperature_offset=-10,0,10 K",
                                     "target_altitude=FL150,FL200")])
    table = office_table(plan, rows)
    assert table.shape == (1, 2, 3, 3) and np.isfinite(table.values["distance_m"]).sum() == 18
    # heavier and warmer climbs take longer (more weight, less thrust)
    assert np.all(np.diff(table.values["time_s"], axis=2) > 0)
    assert np.all(np.diff(table.values["time_s"], axis=3) > 0)
    md = (tmp_path / "s" / "climb_table.md").read_text()
    assert "### To FL150" in md and "### To FL200" in md and md.count("| 15,000 kg |") == 2
    assert "flew no climb schedule, so no schedule speeds are given" in md
    page = _Page()
    page.feed((tmp_path / "s" / "climb_table.html").read_text())
    assert page.tables == 3 and CAUTION in page.all_text     # conditions + two levels


def test_map_options_change_the_conditions(tmp_path):
    """`map` options set mass, load factor, temperature, rating; bad values exit 2."""
    text = TURBOPROP.read_text().replace("grid_altitude_points = 300", "grid_altitude_points = 40") \
        .replace("grid_speed_points = 300", "grid_speed_points = 30")
    small = tmp_path / "small.toml"
    small.write_text(text)
    result = _run(["map", small, "--out", tmp_path / "m", "--mass", "44000 lb",
                   "--load-factor", "1.5", "--temperature-offset", "15 K", "--rating", "climb",
                   "--units", "si"])
    assert result.exit_code == 0, result.output
    meta = json.loads((tmp_path / "m" / "map.json").read_text())
    assert meta["mass_kg"] == pytest.approx(44000 * LB) and meta["load_factor"] == 1.5
    assert meta["temperature_offset_k"] == 15.0 and meta["rating"] == "climb"
    assert "mass 19,958 kg, load factor 1.5" in result.output and "ISA +15 K" in result.output
    base = _run(["map", small, "--out", tmp_path / "b", "--units", "si"])
    assert base.exit_code == 0
    plain = json.loads((tmp_path / "b" / "map.json").read_text())
    assert plain["mass_kg"] == 18000.0 and plain["load_factor"] == 1.0
    # heavier, at 1.5 g and 15 K warmer: less excess power everywhere
    assert meta["max_ps_m_s"] < plain["max_ps_m_s"]
    bad = _run(["map", small, "--out", tmp_path / "x", "--mass", "30000", "--rating", "toga"])
    assert bad.exit_code == 2
    assert "aircraft.mass: missing unit in '30000'" in bad.output
    assert "mission.rating: unknown rating 'toga'" in bad.output
    high = _run(["map", small, "--out", tmp_path / "x", "--load-factor", "9"])
    assert high.exit_code == 2 and "limits.max_load_factor 2.5" in high.output


def test_min_s_and_rounding_rules():
    """Times read as min:s (16:04 for 963.6 s) and rounding follows the stated digits."""
    assert format_min_s(963.6) == "16:04" and format_min_s(59.5) == "1:00"
    assert format_min_s(-30.0) == "-0:30" and format_min_s(float("nan")) == "-"
    assert round_display(1234.5, "ft") == 1234 and isinstance(round_display(1.5, "ft"), int)
    assert round_display(12.345678, "nmi") == 12.35 and round_display(None, "kg") is None
    assert math.isnan(round_display(float("nan"), "kg"))


def test_notebook_example_runs(tmp_path):
    """The notebook example in docs/examples runs and writes report.html."""
    script = ROOT / "docs" / "examples" / "notebook_example.py"
    done = subprocess.run([sys.executable, str(script), str(tmp_path / "nb")], cwd=ROOT,
                          capture_output=True, text=True, timeout=600)
    assert done.returncode == 0, done.stderr[-2000:]
    assert (tmp_path / "nb" / "report.html").is_file()
    assert "65 t:" in done.stdout and CAUTION in done.stdout


def test_scenario_format_doc_shows_the_real_error_output(tmp_path):
    """docs/scenario-format.md's error example is exactly what `check` prints."""
    doc = (ROOT / "docs" / "scenario-format.md").read_text()
    block = doc[doc.index("## Errors"):].split("```")[1].strip().splitlines()
    text = TRANSPORT.read_text()
    for old, new in (('mass = "70000 kg"', 'mass = "70000 kgg"'),
                     ('[mission]\nrating = "climb"', '[mission]\nrating = "climbing"'),
                     ("max_mach = 0.82", 'max_mach = "fast"')):
        assert old in text
        text = text.replace(old, new)
    (tmp_path / "scenarios").mkdir()
    (tmp_path / "scenarios" / "x.toml").write_text(text)
    done = subprocess.run([sys.executable, "-c", "from climbopt.cli import main; main()",
                           "check", "scenarios/x.toml"],
                          cwd=tmp_path, capture_output=True, text=True, timeout=120)
    assert done.returncode == 2 and done.stdout == ""
    assert done.stderr.strip().splitlines() == block


def test_html_report_marks_unranked_rows():
    """An unconverged and a failed solve appear in the HTML as not ranked, with their issues."""
    from synthetic_paths import simple_table

    from climbopt import htmlreport, report
    from climbopt.results import FailedRun, Trajectory

    good = Trajectory(method="energy-state", objective="time", table=simple_table(
        duration_s=300.0, fuel_kg=500.0), converged=True, status="ok")
    bad = Trajectory(method="collocation", objective="time", table=simple_table(
        duration_s=250.0, fuel_kg=400.0), converged=False,
        status="iteration limit").with_issues("NOT CONVERGED: not an optimum")
    lost = FailedRun("collocation", "fuel", status="Infeasible_Problem_Detected",
                     message="IPOPT found no feasible point")
    records = report.comparison([good, bad, lost])
    page = _Page()
    page.feed(htmlreport.run_report(scenario=load_scenario(TRANSPORT), units="si",
                                    records=records, flown=[], schedules=[], procedure_costs=[],
                                    figures=[]))
    words = page.all_text
    assert words.count("not ranked") >= 4                  # two rows x two difference columns
    assert "NOT CONVERGED: not an optimum" in words and "IPOPT found no feasible point" in words
    assert "5:00" in words and "4:10" in words             # 300 s and 250 s as min:s
    assert "No figures" in words and page.sections[-1] == "notes"


def test_conditions_line_states_wind_rating_schedule_and_buffet_margin():
    """The conditions line names the wind, the rating schedule and the buffet margin when set."""
    import dataclasses

    from climbopt.report import format_conditions
    from climbopt.scenario import RatingStep, WindProfile
    from climbopt.schedule import conditions_of

    plain = conditions_of(load_scenario(TRANSPORT))
    assert "wind" not in format_conditions(plain, "us") and "buffet" not in format_conditions(
        plain, "us")
    c = dataclasses.replace(
        plain, wind=WindProfile((-50 * KT,)), buffet_load_factor=1.3,
        rating_schedule=(RatingStep("max", until_m=1500 * FT),
                         RatingStep("climb", thrust_fraction=0.9)))
    text = format_conditions(c, "us")
    assert "buffet margin 1.3 g" in text and "wind -50 kt (headwind)" in text
    assert "rating schedule max to 1,500 ft, then climb at 90 % thrust" in text
    column = dataclasses.replace(c, wind=WindProfile((-10 * KT, -40 * KT), (0.0, 6096.0)))
    assert "wind (negative: headwind) -10 kt at 0 ft, -40 kt at 20,000 ft" in format_conditions(
        column, "us")


def test_sweep_schedules_in_the_table_and_office_tables(tmp_path):
    """`sweep --schedules` flies each case's best constant schedule: sweep.csv holds its name,
    speeds, figures and penalty, equal to flying it directly; the office tables give the speeds
    per cell (restriction CAS / climb CAS [kt] / Mach) instead of saying none were flown."""
    from climbopt import sweep as sw
    from climbopt.aircraft import build_model
    from climbopt.procedure import best_schedule_spec
    from climbopt.rutowski import solve_energy_state

    result = _run(["sweep", TURBOPROP, "--vary", "mass=14,16 t", "--serial", "--no-plots",
                   "--schedules", "--table", "--units", "us", "--out", tmp_path / "s"])
    assert result.exit_code == 0, result.output
    rows = sw.read_table(tmp_path / "s" / "sweep.csv")
    assert len(rows) == 2 and all(r["status"] == "ok" for r in rows)
    scenario = load_scenario(TURBOPROP)
    header, body = _csv(tmp_path / "s" / "climb_table.csv")
    for r in rows:
        case = scenario.replace(mass=f"{r['mass_kg']} kg")
        model = build_model(case)
        optimum = solve_energy_state(case, "time", model=model)
        spec, flown = best_schedule_spec(case, model, "time", reference=optimum)
        assert r["schedule"] == spec.name
        assert re.fullmatch(r"(\d+/)?\d+(/M\d\.\d\d)?", spec.name)
        assert r["schedule_cas_m_s"] == pytest.approx(spec.cas_m_s, rel=1e-12)
        assert r["schedule_time_s"] == pytest.approx(flown.time_s, rel=1e-9)
        # the energy-state optimum is itself approximate (cos gamma = 1, instant speed changes):
        # a flown schedule may come out a little faster, never by much
        assert r["schedule_time_s"] >= r["time_s"] * (1 - 0.01)
        assert r["schedule_penalty_pct"] == pytest.approx(
            100 * (flown.time_s - optimum.time_s) / optimum.time_s, rel=1e-6)
        line = next(b for b in body if b[3].startswith("schedule")
                    and float(b[2]) == round(r["mass_kg"] / LB, 1))
        assert line[4] == spec.name
    md = (tmp_path / "s" / "climb_table.md").read_text()
    assert "flew no climb schedule" not in md and "best constant CAS/Mach schedule" in md
    assert all(r["schedule"] in md for r in rows)
