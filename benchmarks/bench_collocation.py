"""Direct-collocation benchmarks: wall and CPU time, IPOPT iterations and objective for 50, 100
and 200 first-mesh intervals, from a cold (straight-line) and a warm (energy-state) start, on the
published supersonic interceptor (Bryson, Desai & Hoffman, J. Aircraft 6(6), 1969; data as
tabulated in Betts, *Practical Methods for Optimal Control*, 2nd ed., 2010; file
tests/data/interceptor_1969.toml) and on every demo scenario (scenarios/*.toml, invented aircraft).

Targets (interceptor, minimum time, 100 intervals, warm start): first IPOPT pass under 1.5 s and
about 25 iterations; the whole ``climbopt run --method collocation --objective time`` under 10 s.

Columns: "pass 1" = the first mesh (IPOPT time and iterations), "total" = all mesh passes
(refinement included), "solve" = solve_collocation wall time (refinement and re-simulation
included, the energy-state guess not), "guess" = energy-state solve time (warm rows).
CPU time is shown as well because the machine may be shared: wall time then includes waiting.

Run:  python benchmarks/bench_collocation.py [--quick] [--objective time|fuel] [--no-cli]
"""

from __future__ import annotations

import argparse
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import climbopt.collocation as collocation
from climbopt.aircraft import build_model
from climbopt.collocation import SolverFailure, solve_collocation
from climbopt.rutowski import solve_energy_state
from climbopt.scenario import load_scenario
from climbopt.verify import resimulate

HERE = Path(__file__).resolve().parent
ROOT = HERE.parent
INTERCEPTOR = ROOT / "tests" / "data" / "interceptor_1969.toml"


class _PassRecorder:
    """Records each IPOPT mesh pass (wraps the solver's internal per-mesh function)."""

    def __init__(self):
        self.passes = []
        self._inner = collocation._solve_mesh

    def __enter__(self):
        def wrapped(*args, **kwargs):
            sol = self._inner(*args, **kwargs)
            self.passes.append((sol.intervals, sol.iterations, sol.ipopt_s))
            return sol

        collocation._solve_mesh = wrapped
        return self

    def __exit__(self, *exc):
        collocation._solve_mesh = self._inner


def run_case(scenario, model, objective, intervals, start, es_guess):
    guess = es_guess if start == "warm" else "straight"
    with _PassRecorder() as rec:
        t0, c0 = time.perf_counter(), time.process_time()
        try:
            tr = solve_collocation(scenario, objective, model=model, guess=guess,
                                   intervals=intervals)
            ok = "yes" if resimulate(tr, scenario, model).ok else "NO"
            conv = "yes" if tr.converged else "no"
            obj = tr.time_s if objective == "time" else tr.fuel_kg
            iters = tr.iterations
        except SolverFailure as exc:
            ok, conv, obj, iters = "-", f"FAIL {exc.status}", float("nan"), exc.iterations
        wall, cpu = time.perf_counter() - t0, time.process_time() - c0
    p1 = rec.passes[0] if rec.passes else (intervals, 0, float("nan"))
    final_n = rec.passes[-1][0] if rec.passes else intervals
    return {"n": intervals, "start": start, "p1_it": p1[1], "p1_s": p1[2], "it": iters,
            "passes": len(rec.passes), "final_n": final_n, "ipopt_s": sum(p[2] for p in rec.passes),
            "wall": wall, "cpu": cpu, "obj": obj, "conv": conv, "ok": ok}


def bench_scenario(path: Path, objective: str, sizes, starts) -> list[dict]:
    scenario = load_scenario(path)
    model = build_model(scenario)
    t0 = time.perf_counter()
    es = solve_energy_state(scenario, objective, model=model)
    t_es = time.perf_counter() - t0
    unit = "s" if objective == "time" else "kg"
    es_obj = es.time_s if objective == "time" else es.fuel_kg
    print(f"\n{path.name}: {scenario.name}")
    print(f"  energy-state {objective}: {es_obj:.2f} {unit} ({t_es:.2f} s)")
    print(f"  {'N':>4} {'start':>5} | {'pass 1':>13} | {'total':>20} | {'solve':>6} {'cpu':>6} | "
          f"{'objective':>11} {'conv':>5} {'re-sim':>6}")
    print(f"  {'':>4} {'':>5} | {'iter':>5} {'IPOPT s':>7} | {'iter':>5} {'passes':>6} "
          f"{'N end':>5}  {'IPOPT':>5} | {'wall s':>6} {'s':>6} | {unit:>11} {'':>5} {'ok':>6}")
    rows = []
    for n in sizes:
        for start in starts:
            r = run_case(scenario, model, objective, n, start, es)
            rows.append(r)
            print(f"  {r['n']:>4} {r['start']:>5} | {r['p1_it']:>5} {r['p1_s']:>7.2f} | "
                  f"{r['it']:>5} {r['passes']:>6} {r['final_n']:>5} {r['ipopt_s']:>6.2f} | "
                  f"{r['wall']:>6.2f} {r['cpu']:>6.2f} | {r['obj']:>11.3f} {r['conv']:>5} "
                  f"{r['ok']:>6}")
    return rows


def cli_run_time() -> float:
    """Wall time of the whole command, imports, guess, refinement, verification, plots included."""
    with tempfile.TemporaryDirectory() as tmp:
        t0 = time.perf_counter()
        subprocess.run([sys.executable, "-c", "from climbopt.cli import main; main()", "run",
                        str(INTERCEPTOR), "--method",
                        "collocation", "--objective", "time", "--out", str(Path(tmp) / "out"),
                        "--quiet"], check=True, capture_output=True)
        return time.perf_counter() - t0


def main(argv=None) -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="100 intervals, interceptor only")
    parser.add_argument("--objective", default="time", choices=["time", "fuel"])
    parser.add_argument("--no-cli", action="store_true", help="skip the whole-command timing")
    args = parser.parse_args(argv)
    sizes = [100] if args.quick else [50, 100, 200]
    starts = ["cold", "warm"]
    paths = [INTERCEPTOR]
    if not args.quick:
        paths += sorted((ROOT / "scenarios").glob("*.toml"))
    for path in paths:
        bench_scenario(path, args.objective, sizes, starts)
    if not args.no_cli:
        try:
            t = cli_run_time()
            print(f"\nclimbopt run {INTERCEPTOR.name} --method collocation --objective time: "
                  f"{t:.2f} s wall (target 10 s)")
        except (subprocess.CalledProcessError, OSError) as exc:
            print(f"\nwhole-command timing failed: {exc}")


if __name__ == "__main__":
    main()
