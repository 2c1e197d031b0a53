"""Scenario documents and their mutations, for fuzzing the reader.

Used by tests/test_scenario.py (the TOML writer), tests/test_scenario_limits.py (a property test)
and benchmarks/bench_fuzz_reader.py (10,000 cases). A case starts from one of the bundled
scenario files (invented demo aircraft and published worked examples), applies a few random
mutations to its document -- deleted keys, swapped types, NaN, infinite and huge numbers, bad and
nested units, malformed flight levels, long strings, deep nesting, unicode junk, unknown keys --
writes it as TOML and sometimes damages the text itself (cut, spliced, brackets inserted).
Everything is driven by one ``random.Random``, so a case is reproducible from its seed.
"""

from __future__ import annotations

import copy
import json
import math
import random
import tomllib
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
SOURCES = sorted((ROOT / "scenarios").glob("*.toml")) + sorted((ROOT / "tests" / "data").glob("*.toml"))


# ---- a minimal TOML writer ----------------------------------------------------------------------


def toml_value(v) -> str:
    """One TOML value: strings escaped (control characters as \\uXXXX), nested tables inline."""
    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, int):
        return str(v)
    if isinstance(v, float):
        if math.isnan(v):
            return "nan"
        if math.isinf(v):
            return "inf" if v > 0 else "-inf"
        return repr(v)
    if isinstance(v, str):
        out = []
        for ch in v:
            if ch in '"\\' or ord(ch) < 0x20 or ord(ch) == 0x7F:
                out.append(f"\\u{ord(ch):04x}")
            else:
                out.append(ch)
        return '"' + "".join(out) + '"'
    if isinstance(v, list):
        return "[" + ", ".join(toml_value(x) for x in v) + "]"
    if isinstance(v, dict):
        return "{ " + ", ".join(f"{json.dumps(k)} = {toml_value(x)}" for k, x in v.items()) + " }"
    raise TypeError(type(v))


def to_toml(doc: dict) -> str:
    """Write a dict as TOML: top-level tables as [sections], everything below as inline tables."""
    lines = []
    for key, val in doc.items():
        if isinstance(val, dict):
            lines.append(f"[{json.dumps(key)}]")
            lines.extend(f"{json.dumps(k)} = {toml_value(x)}" for k, x in val.items())
        else:
            lines.insert(0, f"{json.dumps(key)} = {toml_value(val)}")
    return "\n".join(lines) + "\n"


# ---- mutations ----------------------------------------------------------------------------------

_BAD_TEXT = [
    "", " ", "ft", "12 fet", "1e999 m", "nan kg", "-inf kN", "-3 kg", "3 degC", "1 kt", "0.5",
    "1 m/s/s", "(", "3 ft**ft", "2 1/0", "1,2,3 m", "mach", "jet", "free", "procedure", "1 m^99",
    "1 ((((m))))", "1 (m/(s))", "1 m^-9", "5 1/rad", "1e16 kg", "1e-320 m", "FL", "FL-10",
    "FL35.5.0", "FL 3 50", "FL350", "fl999", "FL1000", "1 kg/(N s)", "0 kt", "250 kt", "1 " + "m/" * 40,
    "1 " + "k" * 40, "1 °C", "1 µm", "1e308 klbf", "1_000 ft", "+-1 m", ".5 .5 m", "1e5e5 m",
]


def junk(rng: random.Random):
    """A random bad (or odd) TOML value."""
    pick = rng.randrange(12)
    if pick == 0:
        return rng.choice(_BAD_TEXT)
    if pick == 1:
        return rng.choice([math.nan, math.inf, -math.inf, 1e308, -1e308, 1e16, 5e-324, 0.0, -0.0])
    if pick == 2:
        return rng.choice([10**300, -(10**300), 10**16, 2**63, 2**31, -1, 0, 3])
    if pick == 3:  # long text, sometimes in a quantity
        n = rng.choice([61, 65, 1001, 5000, 100_000])
        return rng.choice(["", "1 ", "1 m", "FL"]) + rng.choice("x(/m^9 ") * n
    if pick == 4:  # unicode junk
        return "".join(chr(rng.choice([rng.randrange(0x20, 0x7F), rng.randrange(0xA0, 0xD7FF),
                                       rng.randrange(0xE000, 0x10FFFF)])) for _ in range(rng.randrange(1, 40)))
    if pick == 5:  # deep lists
        v: object = rng.choice([1, "1 m", []])
        for _ in range(rng.randrange(3, 40)):
            v = [v]
        return v
    if pick == 6:  # deep tables
        v = {"unit": "kN", "values": [1]}
        for _ in range(rng.randrange(3, 40)):
            v = {rng.choice(["unit", "values", "mach", "x"]): v}
        return v
    if pick == 7:
        return rng.choice([True, False, [], {}, [1, 2], ["1 m", 2], [[1, 2], [3]], {"unit": "kN"},
                           {"unit": "kN", "values": [[1e308, 1], [2, 3]]}, {"mach": [0, 1], "values": [1]}])
    if pick == 8:
        return [rng.uniform(-1e3, 1e3) for _ in range(rng.randrange(0, 6))]
    if pick == 9:  # a huge array
        return [rng.random()] * rng.choice([100, 10_001])
    if pick == 10:  # many keys
        return {f"k{i}": i for i in range(rng.choice([3, 1001]))}
    return rng.choice(["x" * 65, "name", "max", "climb", "body", "table", "propeller"])


def paths(node, prefix=()):
    """All key paths (tuples) and list positions inside a document."""
    out = []
    if isinstance(node, dict):
        for k, v in node.items():
            out.append(prefix + (k,))
            out.extend(paths(v, prefix + (k,)))
    elif isinstance(node, list):
        for i, v in enumerate(node):
            out.append(prefix + (i,))
            out.extend(paths(v, prefix + (i,)))
    return out


def _swap_type(value, rng: random.Random):
    """The same content in another type: number <-> string, scalar <-> list, list -> table."""
    if isinstance(value, str):
        try:
            return float(value.split()[0])
        except (ValueError, IndexError):
            return [value]
    if isinstance(value, (int, float)) and not isinstance(value, bool):
        return rng.choice([str(value), f"{value} kg", [value], bool(value)])
    if isinstance(value, list):
        return {"values": value} if rng.random() < 0.5 else toml_value(value) if _writable(value) else "[]"
    return str(value)


def _writable(value) -> bool:
    try:
        toml_value(value)
    except (TypeError, RecursionError):
        return False
    return True


def mutate(doc: dict, rng: random.Random, count: int) -> dict:
    """``doc`` with ``count`` random edits (delete, replace by junk, swap type, shuffle, insert)."""
    doc = copy.deepcopy(doc)
    for _ in range(count):
        found = paths(doc)
        keys = [q for q in found if isinstance(q[-1], str)]  # table elements would dominate
        if not found:
            break
        path = rng.choice(keys if keys and rng.random() < 0.7 else found)
        node = doc
        for p in path[:-1]:
            node = node[p]
        last = path[-1]
        action = rng.choice(["delete", "junk", "junk", "swap", "shuffle", "insert"])
        if action == "delete":
            del node[last]
        elif action == "swap":
            node[last] = _swap_type(node[last], rng)
        elif action == "shuffle" and isinstance(node[last], list):
            rng.shuffle(node[last])
        elif action == "insert" and isinstance(node, dict):
            node[rng.choice([f"{last}_extra", "x" * rng.choice([3, 70]), "mass", "profile"])] = junk(rng)
        else:
            node[last] = junk(rng)
    return doc


def damage_text(text: str, rng: random.Random) -> str:
    """The TOML text cut, spliced with brackets or quotes, or with a line repeated."""
    pos = rng.randrange(len(text) + 1)
    pick = rng.randrange(4)
    if pick == 0:
        return text[:pos]
    if pick == 1:
        return text[:pos] + rng.choice(["[", "{", "]", '"', "'''", '"""', "#", "=", ".", "\x00"]) * rng.choice([1, 3, 50]) + text[pos:]
    if pick == 2:
        line = rng.choice(text.splitlines() or [""])
        return text + "\n" + line
    return text[:pos] + "a" + ".a" * rng.choice([5, 12, 40]) + " = 1\n" + text[pos:]


def source_documents() -> list[tuple[str, dict]]:
    """(file name, parsed document) of every bundled scenario file."""
    return [(p.name, tomllib.loads(p.read_text(encoding="utf-8"))) for p in SOURCES]


def fuzz_case(documents: list[tuple[str, dict]], rng: random.Random) -> tuple[str, str]:
    """(description, TOML text) of one random case built from ``documents``."""
    name, doc = rng.choice(documents)
    count = rng.choice([1, 1, 2, 3, 5])
    text = to_toml(mutate(doc, rng, count))
    damaged = rng.random() < 0.2
    if damaged:
        text = damage_text(text, rng)
    return f"{name}, {count} mutation(s){', text damaged' if damaged else ''}", text
