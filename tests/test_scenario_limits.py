"""The reader on bad input: only ScenarioError, within a second, with short messages.

Covers the input limits of climbopt.scenario (file size, lines, items, nesting, strings, keys,
array sizes, number magnitudes), the unit-expression grammar of climbopt.units, finiteness after
unit conversion, the cap on listed problems, and a property test over mutated bundled scenarios
(tests/scenario_fuzz.py). Timing bounds: 1 s per file read, as promised in docs/scenario-format.md.
"""

from __future__ import annotations

import functools
import math
import re
import time
from datetime import timedelta
from pathlib import Path

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scenario_docs import BASE, edited, find, problems_of, write
from scenario_fuzz import fuzz_case, source_documents, to_toml

from climbopt import scenario as scenario_module
from climbopt import units
from climbopt.scenario import MAX_FILE_BYTES, Scenario, ScenarioError, load_scenario
from climbopt.units import UnitError, parse_quantity

ROOT = Path(__file__).resolve().parents[1]
TWINJET = ROOT / "scenarios" / "transport_twinjet.toml"

#: Every read must answer within this time [s].
BUDGET_S = 1.0


def timed_load(path: Path):
    """(Scenario or ScenarioError, seconds) of one read; any other exception propagates."""
    t0 = time.perf_counter()
    try:
        result = load_scenario(path)
    except ScenarioError as exc:
        result = exc
    return result, time.perf_counter() - t0


def timed_problems(path: Path) -> tuple[list[tuple[str, str]], str]:
    """(problems, error text) of a file that must be refused within the budget."""
    result, seconds = timed_load(path)
    assert isinstance(result, ScenarioError), "expected the file to be refused"
    assert seconds < BUDGET_S, f"took {seconds:.2f} s"
    return result.problems, str(result)


def write_text(tmp_path: Path, text: str, name: str = "t.toml") -> Path:
    p = tmp_path / name
    p.write_text(text, encoding="utf-8")
    return p


# ---- property test over mutated bundled scenarios ------------------------------------------------


@functools.lru_cache(maxsize=1)
def _documents():
    return source_documents()


@settings(max_examples=300, deadline=timedelta(seconds=3), derandomize=False)
@given(st.randoms(use_true_random=False))
def test_mutated_bundled_scenarios_only_raise_scenario_error_within_a_second(tmp_path_factory, rng):
    """Mutated bundled scenario files give a Scenario or a ScenarioError, within 1 s each.

    Mutations: deleted keys, type swaps, NaN/inf/huge numbers, bad and nested units, long
    strings, deep nesting, unicode junk, damaged text; messages stay short."""
    what, text = fuzz_case(_documents(), rng)
    path = tmp_path_factory.getbasetemp() / "fuzz.toml"
    path.write_text(text, encoding="utf-8")
    result, seconds = timed_load(path)
    assert seconds < BUDGET_S, f"{what}: took {seconds:.2f} s"
    if isinstance(result, ScenarioError):
        assert result.problems, what
        for fld, msg in result.problems:
            assert isinstance(fld, str) and isinstance(msg, str) and msg, what
            assert len(fld) <= 800 and len(msg) <= 1200, f"{what}: {fld}: {msg[:200]}"
    else:
        assert isinstance(result, Scenario) and math.isfinite(result.aircraft.mass_kg)


# ---- nesting ------------------------------------------------------------------------------------


@pytest.mark.parametrize("text, words", [
    ("a = " + "[" * 100_000, "values, keys and brackets"),  # over the item limit before parsing
    ("a = " + "[" * 50 + "1" + "]" * 50, "brackets nested 50 deep"),
    ("a = " + "{b = " * 40 + "1" + "}" * 40, "brackets nested 40 deep"),
    ("a" + ".a" * 500_000 + " = 1", "has more than 10 parts"),
    ('"a"' + '."a"' * 300 + " = 1", "has more than 10 parts"),
    ("[" + ".".join("abcdefghijkl") + "]\n", "has more than 10 parts"),
])
def test_deep_nesting_invalid(tmp_path, text, words):
    """Deep arrays, inline tables and dotted keys are refused before the TOML reader runs.

    (The reader recurses on nesting and grows with the square of a dotted key's length.)"""
    problems, _ = timed_problems(write_text(tmp_path, text))
    assert problems[0][0] == "file" and words in problems[0][1]


def test_nesting_of_sections_and_arrays_together_invalid(tmp_path):
    """Sections 8 deep holding an array 3 deep are 11 levels: refused after parsing, naming where."""
    text = "[a.b.c.d.e.f.g.h]\nx = [[[1]]]\n"
    problems, _ = timed_problems(write_text(tmp_path, text))
    msg = find(problems, "a.b.c.d.e.f.g.h.x[0][0]")
    assert "nested 11 levels deep; expected at most 10" in msg


# ---- numbers ------------------------------------------------------------------------------------


def test_huge_integers_invalid(tmp_path):
    """Huge integers are refused by field, not raised as OverflowError or ValueError.

    throttle_max = 1 followed by 300 zeros: "too large", the number cut short; an integer of
    5,000 digits (beyond what Python converts): unreadable TOML."""
    problems = problems_of(tmp_path, edited(propulsion__throttle_max=10**300))
    msg = find(problems, "propulsion.throttle_max")
    assert "is too large; expected a number within +-1e15" in msg and len(msg) < 130
    text = to_toml(BASE).replace("throttle_max\" = 1.0", "throttle_max\" = 1" + "0" * 5000)
    problems, _ = timed_problems(write_text(tmp_path, text))
    assert problems[0][0] == "file" and "cannot be read as TOML (ValueError" in problems[0][1]


@pytest.mark.parametrize("value, field", [
    ("1e300 kg", "aircraft.mass"),
    ("1" + "0" * 40 + " kg", "aircraft.mass"),
])
def test_huge_numbers_in_quantities_invalid(tmp_path, value, field):
    """A number in a quantity text beyond 1e15 is refused, not converted to infinity."""
    msg = find(problems_of(tmp_path, edited(aircraft__mass=value)), field)
    assert "is too large" in msg


def test_infinite_after_unit_conversion_invalid(tmp_path, monkeypatch):
    """1e308 kN in a unit table is refused, and finiteness is checked after conversion.

    With the magnitude limit lifted, 1e308 kN = inf N is still refused."""
    thrust = {"unit": "kN", "values": [[1e308, 60, 30], [110, 65, 33], [130, 80, 40]]}
    doc = edited(propulsion__ratings__max__thrust=thrust)
    msg = find(problems_of(tmp_path, doc), "propulsion.ratings.max.thrust.values[0][0]")
    assert msg == "1e+308 is too large; expected a number within +-1e15"
    monkeypatch.setattr(scenario_module, "MAX_MAGNITUDE", math.inf)
    msg = find(problems_of(tmp_path, doc), "propulsion.ratings.max.thrust[0][0]")
    assert msg == "1e+308 is not a finite number after unit conversion"
    monkeypatch.setattr(units, "MAX_MAGNITUDE", math.inf)
    with pytest.raises(UnitError, match="'1e300 Qm\\^2' is not a finite number after unit conversion"):
        parse_quantity("1e300 Qm^2", "area", "x")  # 1e300 x (1e30 m)^2 overflows


def test_ipopt_numbers_have_their_own_limits(tmp_path):
    """IPOPT's infinity (1e19) is a valid float option; integers there are 32-bit."""
    s = load_scenario(write(tmp_path, edited(solver__ipopt={"nlp_upper_bound_inf": 1e19})))
    assert s.solver.ipopt == {"nlp_upper_bound_inf": 1e19}
    msg = find(problems_of(tmp_path, edited(solver__ipopt={"max_iter": 2**31})), "solver.ipopt.max_iter")
    assert "expected a number within +-2147483647" in msg


# ---- strings, keys, sizes -------------------------------------------------------------------------


def test_long_strings_invalid(tmp_path):
    """Long strings are refused with short messages echoing at most 60 characters.

    A 200,000-character name; a 1 MB unit string (message under 300 characters)."""
    problems = problems_of(tmp_path, edited(aircraft__name="x" * 200_000))
    assert "text of 200000 characters" in find(problems, "aircraft.name")
    text = to_toml(BASE).replace('"mass" = "20000 kg"', '"mass" = "20000 ' + "kg/" * 340_000 + 'kg"')
    assert len(text) > 1_000_000
    problems, message = timed_problems(write_text(tmp_path, text))
    assert "text of 1020008 characters" in find(problems, "aircraft.mass")
    assert len(message) < 300
    excerpts = re.findall(r"'([^']*)'", message)
    assert excerpts and excerpts[0].startswith("20000 kg/kg/") and max(map(len, excerpts)) <= 60


@pytest.mark.parametrize("change, field, words", [
    ({"aircraft__mass": "20000 " + "kg/" * 20 + "kg"}, "aircraft.mass", "is 68 characters long"),
    ({"aircraft__name": "y" * 1001}, "aircraft.name", "expected at most 1000"),
    ({"propulsion__ratings__" + "r" * 65: {}}, "propulsion.ratings." + "r" * 37 + "...",
     "key of 65 characters"),
    ({"aircraft__drag__cd0": [0.02] * 10_001}, "aircraft.drag.cd0", "has 10001 elements"),
    ({"solver__ipopt": {f"o{i}": 1 for i in range(1001)}}, "solver.ipopt", "has 1001 keys"),
])
def test_size_limits_invalid(tmp_path, change, field, words):
    """Quantity texts, strings, keys, arrays and tables beyond their limits are refused by name."""
    assert words in find(problems_of(tmp_path, edited(**change)), field)


def test_file_over_1_mib_invalid_and_1_mib_read_within_a_second(tmp_path):
    """A file over 1 MiB is refused unread; a valid file of exactly 1 MiB is read within 1 s.

    The valid file is the demo transport padded with a comment."""
    text = TWINJET.read_text(encoding="utf-8") + "# "
    padded = text + "x" * (MAX_FILE_BYTES - len(text.encode()))
    path = write_text(tmp_path, padded)
    assert path.stat().st_size == MAX_FILE_BYTES == 1 << 20
    result, seconds = timed_load(path)
    assert isinstance(result, Scenario) and seconds < BUDGET_S
    problems, _ = timed_problems(write_text(tmp_path, padded + "x"))
    assert problems == [("file", "larger than 1048576 bytes (1 MiB); expected a scenario file of at most 1 MiB")]


_MIB = 1 << 20


@pytest.mark.parametrize("name, text, words", [
    ("blank lines", "\n" * (_MIB - 1), "lines; expected at most 100000"),
    ("numbers", "a = [" + "1," * (_MIB // 2 - 4) + "]", "values, keys and brackets"),
    ("strings", "a = [" + '"x",' * (_MIB // 4 - 4) + "]", "values, keys and brackets"),
    ("closing brackets", "]" * _MIB, "values, keys and brackets"),
    ("one long string", 'a = "' + "x" * (_MIB - 8) + '"', "text of 1048568 characters"),
    ("unterminated string", 'a = """' + "x" * (_MIB - 8), "not valid TOML"),
    ("many keys", "".join(f"k{i} = 1\n" for i in range(45_000)), "keys; expected at most 1000"),
    ("NUL bytes", "\x00" * _MIB, "not valid TOML"),
])
def test_any_1_mib_input_is_answered_within_a_second(tmp_path, name, text, words):
    """Inputs of about 1 MiB shaped to be slow for a TOML reader are refused within a second."""
    problems, message = timed_problems(write_text(tmp_path, text))
    assert words in message, name
    assert len(message) < 400


def test_problems_listed_are_capped(tmp_path):
    """300 unknown keys: the first 100 problems are listed and the rest counted."""
    doc = edited()
    doc["aircraft"].update({f"unknown_{i}": 1 for i in range(300)})
    problems = problems_of(tmp_path, doc)
    assert len(problems) == 101
    assert problems[-1] == ("file", "... and 200 more problems not listed")


# ---- the unit grammar ------------------------------------------------------------------------------


@pytest.mark.parametrize("text, dimension, expected", [
    ("1 kg/(N s)", "tsfc", 1.0),
    ("1 kg/(N*s)", "tsfc", 1.0),
    ("2 m²", "area", 2.0),
    ("3 m**2", "area", 3.0),
    ("4 s^-1 m", "speed", 4.0),
    # 1 hp = 550 ft lbf/s (mechanical horsepower; common practice, no source)
    ("550 ft lbf/s", "power", 550 * 0.3048 * 0.45359237 * 9.80665),
    ("1 1/deg", "per_angle", 180 / math.pi),
])
def test_unit_expressions_scalar(text, dimension, expected):
    """Products, quotients, powers and one level of parentheses of unit names are read."""
    assert parse_quantity(text, dimension, "x") == pytest.approx(expected, rel=1e-12)


@pytest.mark.parametrize("text, words", [
    ("1 ((m))", "nested parentheses"),
    ("1 " + "(" * 10 + "m" + ")" * 10, "nested parentheses"),
    ("1 (m", "unbalanced parentheses"),
    ("1 m)", "unbalanced parentheses"),
    ("1 m^99", "power 99 out of range"),
    ("1 m^2^2^2", "power of 'm' out of range"),
    ("1 m^1.5", "unexpected '.'"),
    ("3 ft**ft", "a power needs a unit before it and a whole number after it"),
    ("1 m/m/m/m/m/m/m/m", "more than 6 unit names"),
    ("2 1/0", "unexpected number '0'"),
    ("1 m/", "ends with an operator"),
    ("1 m$", "unexpected '$'"),
    ("1 " + "m/" * 40, "is 82 characters long"),
    ("1 abcdefghijklmnopqrstuvwxyz", "a unit name of more than 20 characters"),
    ("1 abcdefghijklmnopqrst", "unknown unit 'abcdefghijklmnopqrst'"),
])
def test_unit_expressions_invalid(text, words):
    """Nested, unbalanced, long or odd unit texts are refused with the reason, fast."""
    t0 = time.perf_counter()
    with pytest.raises(UnitError) as info:
        parse_quantity(text, "length", "x")
    assert time.perf_counter() - t0 < 0.1
    assert words in str(info.value)
