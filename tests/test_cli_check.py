"""`climbopt check`: exit 0 and a summary in the file's units for valid files; exit 2 and every
problem, never a traceback, for invalid ones."""

from __future__ import annotations

from pathlib import Path

import pytest
from click.testing import CliRunner

from climbopt import CAUTION
from climbopt.cli import cli

ROOT = Path(__file__).resolve().parents[1]
FILES = sorted((ROOT / "scenarios").glob("*.toml")) + [ROOT / "tests" / "data" / "interceptor_1969.toml"]


def run_check(path) -> tuple[int, str]:
    result = CliRunner().invoke(cli, ["check", str(path)])
    assert "Traceback" not in result.output
    assert result.exception is None or isinstance(result.exception, SystemExit)
    return result.exit_code, result.output


@pytest.mark.parametrize("path", FILES, ids=lambda p: p.name)
def test_check_bundled_files_exit_0(path):
    code, out = run_check(path)
    assert code == 0, out
    assert CAUTION in out
    for heading in ("Aircraft:", "Propulsion:", "Mission:", "Limits:", "energy height"):
        assert heading in out


def test_check_prints_in_file_units():
    code, out = run_check(ROOT / "scenarios" / "transport_twinjet.toml")
    assert code == 0
    assert "start: altitude 1500 ft, CAS 200 kt" in out
    assert "target: altitude 35000 ft, Mach 0.78" in out
    assert "CAS at most 250 kt below 10000 ft" in out
    assert "max Mach 0.82, max CAS 340 kt" in out
    assert "start mass 70000 kg" in out and "125 m^2" in out
    assert "altitude 0 to 45 kft" in out  # the engine table grid, as written (kft)


def test_check_lists_all_problems_exit_2(tmp_path):
    src = (ROOT / "scenarios" / "transport_twinjet.toml").read_text(encoding="utf-8")
    bad = (src.replace('mass = "70000 kg"', 'mass = "70000 kgg"')
              .replace('max_mach = 0.82', 'max_mach = "fast"')
              .replace('rating = "climb"\n\n[mission.start]', 'rating = "climbing"\n\n[mission.start]'))
    p = tmp_path / "bad.toml"
    p.write_text(bad, encoding="utf-8")
    code, out = run_check(p)
    assert code == 2
    assert "3 problems found" in out
    assert "aircraft.mass: unknown unit 'kgg'" in out
    assert "limits.max_mach:" in out
    assert "mission.rating: unknown rating 'climbing' (did you mean 'climb'?)" in out
    assert CAUTION not in out


@pytest.mark.parametrize("name", ["missing.toml", "."])
def test_check_missing_file_or_directory_exit_2(tmp_path, name):
    code, out = run_check(tmp_path / name)
    assert code == 2
    assert "no such file" in out or "is a directory" in out


def test_check_malformed_toml_exit_2(tmp_path):
    p = tmp_path / "broken.toml"
    p.write_text("[aircraft\nname = 1\n", encoding="utf-8")
    code, out = run_check(p)
    assert code == 2
    assert "line 1, column" in out and "not valid TOML" in out


def test_check_empty_file_exit_2(tmp_path):
    p = tmp_path / "empty.toml"
    p.write_text("", encoding="utf-8")
    code, out = run_check(p)
    assert code == 2
    for section in ("aircraft", "propulsion", "mission"):
        assert f"{section}: missing section [{section}]" in out


def test_check_units_us_and_si():
    """--units us: 70,000 kg / 0.45359237 kg/lb = 154,324 lb; --units si: 35,000 ft x 0.3048 = 10,668 m
    (international definitions)."""
    path = ROOT / "scenarios" / "transport_twinjet.toml"
    result = CliRunner().invoke(cli, ["check", str(path), "--units", "us"])
    assert result.exit_code == 0, result.output
    assert "start mass 154324 lb" in result.output
    result = CliRunner().invoke(cli, ["check", str(path), "--units", "si"])
    assert result.exit_code == 0, result.output
    assert "target: altitude 10668 m, Mach 0.78" in result.output
    result = CliRunner().invoke(cli, ["check", str(path), "--units", "furlongs"])
    assert result.exit_code == 2 and "Traceback" not in result.output
