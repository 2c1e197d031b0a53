"""Fuzz benchmark of the scenario reader: 10,000 mutated scenario files by default.

Each case starts from a bundled scenario file (invented demo aircraft and published worked
examples), applies random mutations (deleted keys, type swaps, NaN/inf/huge numbers, bad and
nested units, malformed flight levels, long strings, deep nesting, unicode junk; sometimes
damaged TOML text) -- see tests/scenario_fuzz.py -- writes it and reads it with
``climbopt.scenario.load_scenario``. A case passes when it gives a Scenario or a ScenarioError
within the time budget (1 s); anything else is a failure, counted by exception type.

Prints: cases run, valid scenarios, ScenarioErrors, failures by type (with the seed of the first
of each, to reproduce), the slowest case and its time, p50 and p99 of the read time.

Run:  python benchmarks/bench_fuzz_reader.py [--cases 10000] [--seed 0] [--budget 1.0]
"""

from __future__ import annotations

import argparse
import collections
import random
import statistics
import sys
import tempfile
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE.parent / "tests"))  # the shared mutation code

from scenario_fuzz import fuzz_case, source_documents  # noqa: E402

from climbopt.scenario import Scenario, ScenarioError, load_scenario  # noqa: E402


def run(cases: int, seed: int, budget_s: float) -> int:
    """Run the cases; return the number of failures (wrong exception or over budget)."""
    documents = source_documents()
    load_scenario(HERE.parent / "scenarios" / "transport_twinjet.toml")  # warm-up: imports, registry
    times: list[float] = []
    outcome = collections.Counter()
    failures: dict[str, tuple[int, str]] = {}
    slowest = (0.0, -1, "")
    with tempfile.TemporaryDirectory() as folder:
        path = Path(folder) / "case.toml"
        for i in range(cases):
            case_seed = seed * 1_000_003 + i
            what, text = fuzz_case(documents, random.Random(case_seed))
            path.write_text(text, encoding="utf-8")
            t0 = time.perf_counter()
            try:
                result = load_scenario(path)
                kind = "Scenario" if isinstance(result, Scenario) else f"returned {type(result).__name__}"
            except ScenarioError:
                kind = "ScenarioError"
            except BaseException as exc:  # noqa: BLE001 - what the benchmark counts
                if isinstance(exc, KeyboardInterrupt):
                    raise
                kind = type(exc).__name__
            dt = time.perf_counter() - t0
            times.append(dt)
            if dt > budget_s:
                kind = f"over {budget_s:g} s"
            outcome[kind] += 1
            if kind not in ("Scenario", "ScenarioError"):
                failures.setdefault(kind, (case_seed, what))
            if dt > slowest[0]:
                slowest = (dt, case_seed, what)
    times.sort()
    n_fail = sum(n for k, n in outcome.items() if k not in ("Scenario", "ScenarioError"))
    print(f"cases run: {cases} (seed {seed}; sources: {', '.join(n for n, _ in documents)})")
    print(f"valid scenarios: {outcome['Scenario']}, ScenarioError: {outcome['ScenarioError']}")
    print(f"failures: {n_fail}" + "".join(f"\n  {k}: {outcome[k]} (first: case seed {s}, {w})"
                                          for k, (s, w) in failures.items()))
    print(f"slowest case: {slowest[0] * 1000:.1f} ms (case seed {slowest[1]}: {slowest[2]})")
    print(f"read time p50 {statistics.median(times) * 1000:.2f} ms, "
          f"p99 {times[min(len(times) - 1, int(0.99 * len(times)))] * 1000:.2f} ms")
    return n_fail


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--cases", type=int, default=10_000)
    parser.add_argument("--seed", type=int, default=0)
    parser.add_argument("--budget", type=float, default=1.0, help="seconds allowed per read")
    args = parser.parse_args()
    sys.exit(1 if run(args.cases, args.seed, args.budget) else 0)


if __name__ == "__main__":
    main()
