"""Speed and memory of climbopt against the previous release, side by side in one run.

The previous release is commit ``3c1eee9`` of this repository, extracted (``git archive``) into a
scratch folder under the system temporary folder and run by the same Python interpreter with
``PYTHONPATH`` pointing at it; every command below runs for both, interleaved (previous, this
tree, previous, ...), so that both see the same load on a shared machine. Times are CPU seconds
(user + system of the process and the children it waited for, e.g. a C compiler), the median of
``--repeat`` runs; wall seconds are shown beside them. The load average (1 min) is printed before
and after each section.

Sections:

1. ``climbopt run`` (whole command: imports, both methods, both objectives, plots) on every
   demo (scenarios/*.toml) and the published interceptor (Bryson, Desai & Hoffman,
   J. Aircraft 6(6), 1969; tests/data/interceptor_1969.toml). The previous release always wrote
   PNG and SVG figures; this tree writes PNG by default. "core" runs with ``--no-schedules``
   (the previous release's work: four optimisation rows and the figures, plus report.html and
   the free-profile cost, which cannot be switched off), "full" is the default run (adds the
   flown schedules). Targets: core at most half of the previous CPU
   time; full no slower than the previous.
2. Interceptor minimum-time collocation, solve + re-simulation check, in one process after the
   first solve (the previous release rebuilt its problem every time; this tree reuses it, and
   "compiled" evaluates the point function from C). Target 0.6 s CPU, same optimum to 1e-4 s.
3. A 24-case collocation sweep of the demo transport (start mass 56-80 t x temperature offset
   -10, 0, 10, 20 K, minimum time, serial, no plots), CPU per case: "cold" with an empty cache
   of compiled code (a fresh folder), "warm" with it filled, and "no-compile". Target: at most a
   third of the previous per-case CPU.
4. Energy maps: build time and tracemalloc peak at 100^2 ... 800^2 points (this tree), and the
   whole ``climbopt map`` command at 800 x 800 (CPU, peak resident memory from getrusage).
   Target: 400 x 400 in at most 0.1 s on every demo, 800 x 800 under 250 MiB.
5. Start-up: ``climbopt --help`` and ``python -X importtime -c "import climbopt.cli"``.

Run:  python benchmarks/bench_speed.py [--repeat 3] [--quick] [--sections 1,2,3,4,5]
"""

from __future__ import annotations

import argparse
import os
import re
import shutil
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent
ROOT = HERE.parent
PREVIOUS = "3c1eee9"
DEMOS = sorted((ROOT / "scenarios").glob("*.toml")) + [ROOT / "tests" / "data" /
                                                       "interceptor_1969.toml"]
TRANSPORT = ROOT / "scenarios" / "transport_twinjet.toml"
INTERCEPTOR = ROOT / "tests" / "data" / "interceptor_1969.toml"


def previous_tree() -> Path:
    """The previous release's source, extracted once into the temporary folder."""
    folder = Path(tempfile.gettempdir()) / f"climbopt-prev-{PREVIOUS}"
    if not (folder / "climbopt" / "__init__.py").exists():
        folder.mkdir(parents=True, exist_ok=True)
        archive = subprocess.run(["git", "-C", str(ROOT), "archive", PREVIOUS],
                                 check=True, capture_output=True).stdout
        subprocess.run(["tar", "-x", "-C", str(folder)], input=archive, check=True)
    return folder


def measure(args, tree: Path, env_extra=None, cwd=None) -> tuple[float, float, float, int]:
    """(CPU s, wall s, peak resident MiB, exit code) of ``python args...`` with ``tree`` first
    on the module path (its ``climbopt``, not the installed one)."""
    env = {**os.environ, "PYTHONPATH": str(tree), "MPLBACKEND": "Agg", **(env_extra or {})}
    with tempfile.TemporaryFile() as err:
        t0 = time.perf_counter()
        proc = subprocess.Popen([sys.executable, *args], env=env, cwd=cwd or tree,
                                stdout=subprocess.DEVNULL, stderr=err)
        _, status, usage = os.wait4(proc.pid, 0)
        wall = time.perf_counter() - t0
        proc.returncode = code = os.waitstatus_to_exitcode(status)
        if code not in (0, 4):
            err.seek(0)
            text = err.read().decode(errors="replace")
            print(f"    ! exit {code}: {' '.join(map(str, args))[:120]}\n{text[-800:]}")
    return usage.ru_utime + usage.ru_stime, wall, usage.ru_maxrss / 1024.0, code


def cli(*args) -> list:
    """Arguments running climbopt's command line from the tree on the module path."""
    return ["-c", "import sys; from climbopt.cli import main; sys.argv[0] = 'climbopt'; main()",
            *map(str, args)]


def load(label: str) -> None:
    one, five, _ = os.getloadavg()
    print(f"  [load average {label}: {one:.2f} (1 min), {five:.2f} (5 min); {os.cpu_count()} "
          "cores shared]")


def median_runs(variants: dict, repeat: int) -> dict:
    """Run each variant's thunk ``repeat`` times, interleaved; {name: (cpu, wall, rss)} medians."""
    samples = {name: [] for name in variants}
    for _ in range(repeat):
        for name, thunk in variants.items():
            samples[name].append(thunk())
    return {name: tuple(statistics.median(s[i] for s in runs) for i in range(3))
            for name, runs in samples.items()}


# ---------------------------------------------------------------------------------------------
# 1. climbopt run


def _prepare_compiled(path: Path, cache: Path) -> None:
    """Compile the point function of ``path`` into ``cache`` (what a first sweep or a run with
    ``solver.compile`` leaves behind)."""
    code = ("import sys; from climbopt.scenario import load_scenario; "
            "from climbopt.collocation import compiled_point_function; "
            "compiled_point_function(load_scenario(sys.argv[1]))")
    subprocess.run([sys.executable, "-c", code, str(path)], check=True, cwd=ROOT,
                   env={**os.environ, "PYTHONPATH": str(ROOT), "CLIMBOPT_CACHE_DIR": str(cache)})


#: Keys this tree reads that the previous release refuses; the previous release runs a copy of
#: each scenario without them (it knows only the free profile and no flown schedules).
_NEW_KEYS = ("profile", "acceleration_share", "buffet_load_factor")


def previous_scenario(path: Path, work: Path) -> Path:
    """A copy of ``path`` the previous release can read: the keys of :data:`_NEW_KEYS` and the
    ``[[schedules]]`` tables dropped, flight levels written in feet. (The previous release then
    solves the free profile where this tree solves the procedure profile: the same amount of
    work, four optimisation rows.)"""
    lines, skipping = [], False
    for line in path.read_text().splitlines():
        head = line.strip()
        if head.startswith("["):
            skipping = head == "[[schedules]]"
        if skipping or head.split("=")[0].strip() in _NEW_KEYS:
            continue
        lines.append(re.sub(r'"FL(\d+)"', lambda m: f'"{int(m.group(1)) * 100} ft"', line))
    copy = work / f"previous-{path.name}"
    copy.write_text("\n".join(lines) + "\n")
    return copy


def section_run(prev: Path, repeat: int, demos) -> None:
    print("\n1. climbopt run SCENARIO (both methods, both objectives, plots): CPU s (wall s). "
          "'core' is --no-schedules: the previous release's work (the four optimisation rows "
          "and PNG figures) plus what cannot be switched off (report.html, the free-profile "
          "cost); 'full' is the default run (adds the flown schedules); both with an empty "
          "cache of compiled code (a "
          "first run); 'compiled' is 'core' with the aircraft's point function compiled "
          "before (a later run). Targets: core <= 0.5 x previous, full <= 1.0 x previous")
    load("before")
    print(f"  {'scenario':<20} {'previous (png+svg)':>19} {'core (png)':>14} {'ratio':>6} "
          f"{'full (png)':>14} {'ratio':>6} {'compiled core':>14} {'ratio':>6}  target")
    work = Path(tempfile.mkdtemp(prefix="bench-run-"))
    empty, filled = {"CLIMBOPT_CACHE_DIR": str(work / "empty")}, work / "filled"
    try:
        for path in demos:
            _prepare_compiled(path, filled)

            old = previous_scenario(path, work)

            def run(tree, *extra, env=empty, _path=path, _old=old):
                out = work / f"{tree.name}-{len(extra)}"
                shutil.rmtree(out, ignore_errors=True)
                cpu, wall, rss, code = measure(
                    cli("run", _old if tree == prev else _path, "--out", out, "--quiet", *extra),
                    tree, env)
                return (cpu, wall, rss) if code in (0, 4) else (float("nan"),) * 3

            res = median_runs({
                "prev": lambda: run(prev), "core": lambda: run(ROOT, "--no-schedules"),
                "full": lambda: run(ROOT),
                "compiled": lambda: run(ROOT, "--no-schedules",
                                        env={"CLIMBOPT_CACHE_DIR": str(filled)})}, repeat)
            p, n, f, c = res["prev"], res["core"], res["full"], res["compiled"]
            core_ok = "met" if n[0] <= 0.5 * p[0] else "NOT met"
            full_ok = "met" if f[0] <= p[0] else "NOT met"
            target = (f"core {core_ok}, full {full_ok}" if p[0] == p[0]
                      else "new demo (the previous release cannot read it)")
            print(f"  {path.stem:<20} {p[0]:>10.2f} ({p[1]:5.2f}) {n[0]:>6.2f} ({n[1]:5.2f}) "
                  f"{n[0] / p[0]:>6.2f} {f[0]:>6.2f} ({f[1]:5.2f}) {f[0] / p[0]:>6.2f} "
                  f"{c[0]:>6.2f} ({c[1]:5.2f}) {c[0] / p[0]:>6.2f}  {target}")
    finally:
        shutil.rmtree(work, ignore_errors=True)
    load("after")


# ---------------------------------------------------------------------------------------------
# 2. interceptor minimum-time collocation after the first build

_SOLVE_SCRIPT = r"""
import sys, time, statistics
from climbopt.scenario import load_scenario
from climbopt.aircraft import build_model
from climbopt.rutowski import solve_energy_state
from climbopt import collocation
from climbopt.verify import resimulate
scenario = load_scenario(sys.argv[1]); model = build_model(scenario)
guess = solve_energy_state(scenario, "time", model=model)
new = hasattr(collocation, "POINT_PARAMETERS")
opts = {"compile": True} if sys.argv[2] == "compiled" else ({"compile": False} if new else {})
def solve_and_check():
    tr = collocation.solve_collocation(scenario, "time", model=model, guess=guess, **opts)
    return tr, (resimulate(tr, scenario, model) if new else tr.verification)
solve_and_check()  # the first build (and, compiled, the compilation or the cache look-up)
cpu = []
for _ in range(int(sys.argv[3])):
    c0 = time.process_time(); tr, check = solve_and_check(); cpu.append(time.process_time() - c0)
ok = check.ok if new else check["ok"]
print(f"{statistics.median(cpu):.4f} {tr.time_s:.6f} {ok}")
"""


def _solve_stats(tree: Path, variant: str, repeat: int, env,
                 scenario: Path = INTERCEPTOR) -> tuple[float, float, str]:
    env = {**os.environ, "PYTHONPATH": str(tree), "MPLBACKEND": "Agg", **env}
    out = subprocess.run([sys.executable, "-c", _SOLVE_SCRIPT, str(scenario), variant,
                          str(repeat)], env=env, cwd=tree, capture_output=True, text=True)
    if out.returncode:
        return float("nan"), float("nan"), out.stderr[-300:]
    cpu, t, ok = out.stdout.split()[-3:]
    return float(cpu), float(t), ok


def section_solve(prev: Path, repeat: int, cache: Path) -> None:
    print("\n2. Interceptor minimum-time collocation, solve + check, after the first build "
          f"(median of 5 in one process, then the median over {repeat} processes per variant, "
          "interleaved): CPU s")
    load("before")
    env = {"CLIMBOPT_CACHE_DIR": str(cache)}
    work = Path(tempfile.mkdtemp(prefix="bench-solve-"))
    variants = [("previous", prev, "plain", previous_scenario(INTERCEPTOR, work)),
                ("this", ROOT, "plain", INTERCEPTOR), ("this, compiled", ROOT, "compiled",
                                                       INTERCEPTOR)]
    samples = {name: [] for name, *_ in variants}
    for _ in range(repeat):
        for name, tree, variant, scen in variants:
            samples[name].append(_solve_stats(tree, variant, 5, env, scen))
    shutil.rmtree(work, ignore_errors=True)
    rows = [(name, (statistics.median(c for c, _, _ in runs), runs[0][1], runs[0][2]))
            for name, runs in samples.items()]
    base_t = rows[0][1][1]
    for name, (cpu, t, ok) in rows:
        same = "same" if abs(t - base_t) <= 1e-4 else f"DIFFERS by {t - base_t:+.2e} s"
        target = "" if name == "previous" else ("met" if cpu <= 0.6 else "NOT met")
        print(f"  {name:<16} {cpu:7.3f} s   minimum time {t:.6f} s ({same}), check ok: {ok}"
              f"  {target}")
    load("after")


# ---------------------------------------------------------------------------------------------
# 3. collocation sweep


def section_sweep(prev: Path, quick: bool) -> None:
    masses = "56 t:80 t:2" if quick else "56 t:80 t:6"
    n = 8 if quick else 24
    print(f"\n3. Collocation sweep of the demo transport, {n} cases (mass {masses} x temperature "
          "offset -10,0,10,20 K), minimum time, serial, no plots: CPU s per case (wall s)")
    load("before")
    work = Path(tempfile.mkdtemp(prefix="bench-sweep-"))
    args = ("sweep", TRANSPORT, "--vary", f"mass={masses}", "--vary",
            "temperature_offset=-10,0,10,20 K", "--method", "collocation", "--serial",
            "--no-plots", "--quiet")
    try:
        cache = work / "cache"
        env = {"CLIMBOPT_CACHE_DIR": str(cache)}
        runs = [("previous", prev, ()), ("this, cold (compiles)", ROOT, ()),
                ("this, warm (cached)", ROOT, ()), ("this, --no-compile", ROOT, ("--no-compile",))]
        base = None
        old = previous_scenario(TRANSPORT, work)
        for i, (name, tree, extra) in enumerate(runs):
            case = [old if (a == TRANSPORT and tree == prev) else a for a in args]
            cpu, wall, _, code = measure(cli(*case, "--out", work / f"o{i}", *extra), tree, env)
            per = cpu / n
            base = per if base is None else base
            target = "" if base is per else ("met" if per <= base / 3 else "NOT met")
            print(f"  {name:<24} {per:6.3f} ({wall / n:6.3f})  x{per / base:5.2f}  {target}")
    finally:
        shutil.rmtree(work, ignore_errors=True)
    load("after")


# ---------------------------------------------------------------------------------------------
# 4. energy maps

_MAP_SCRIPT = r"""
import sys, time, tracemalloc, statistics
from climbopt.scenario import load_scenario
from climbopt.aircraft import build_model
from climbopt.energy import build_energy_map
scenario = load_scenario(sys.argv[1]); model = build_model(scenario)
build_energy_map(scenario, model=model, shape=(50, 50))
for n in (100, 200, 400, 800):
    cpu = []
    for _ in range(5):
        c0 = time.process_time(); m = build_energy_map(scenario, model=model, shape=(n, n))
        cpu.append(time.process_time() - c0); del m
    tracemalloc.start(); m = build_energy_map(scenario, model=model, shape=(n, n))
    peak = tracemalloc.get_traced_memory()[1] / 2**20; tracemalloc.stop(); del m
    print(f"{n} {statistics.median(cpu):.4f} {peak:.1f}")
"""


def _map_rows(tree: Path, path: Path) -> dict:
    env = {**os.environ, "PYTHONPATH": str(tree), "MPLBACKEND": "Agg"}
    out = subprocess.run([sys.executable, "-c", _MAP_SCRIPT, str(path)], env=env, cwd=tree,
                         capture_output=True, text=True)
    return {int(a): (float(b), float(c)) for a, b, c in
            (line.split() for line in out.stdout.splitlines() if line.strip())}


def section_map(prev: Path, repeat: int) -> None:
    print("\n4. Energy map build (altitude x TAS, median of 5): CPU ms, tracemalloc peak MiB")
    load("before")
    print(f"  {'scenario':<26} {'':>9} {'100^2':>13} {'200^2':>13} {'400^2':>13} {'800^2':>13}")
    scratch = Path(tempfile.mkdtemp(prefix="bench-maps-"))
    for path in DEMOS:
        for name, tree in (("previous", prev), ("this", ROOT)):
            rows = _map_rows(tree, previous_scenario(path, scratch) if tree == prev else path)
            if not rows:
                print(f"  {path.stem:<26} {name:>9} (the previous release cannot read it)")
                continue
            cells = " ".join(f"{rows[n][0] * 1e3:6.1f} {rows[n][1]:5.1f}" for n in sorted(rows))
            flag = ""
            if name == "this" and 400 in rows:
                flag = "  400^2: " + ("met" if rows[400][0] <= 0.1 else "NOT met")
            print(f"  {path.stem if name == 'previous' else '':<26} {name:>9} {cells}{flag}")
    print("  climbopt map at 800 x 800 (whole command, CSV and plots included): CPU s, "
          "peak resident MiB")
    work = Path(tempfile.mkdtemp(prefix="bench-map-"))
    try:
        big = work / "transport_800.toml"
        big.write_text(re.sub(r"grid_(altitude|speed)_points = \d+", r"grid_\1_points = 800",
                              TRANSPORT.read_text()))
        old = previous_scenario(big, work)
        res = median_runs({
            "previous": lambda: measure(cli("map", old, "--out", work / "p", "--quiet"), prev)[:3],
            "this": lambda: measure(cli("map", big, "--out", work / "t", "--quiet"), ROOT)[:3]},
            max(1, repeat - 1))
        for name, (cpu, wall, rss) in res.items():
            target = "" if name == "previous" else ("met" if rss < 250 else "NOT met")
            print(f"  {name:<10} {cpu:6.2f} s ({wall:5.2f} s wall), {rss:6.0f} MiB  {target}")
    finally:
        shutil.rmtree(work, ignore_errors=True)
        shutil.rmtree(scratch, ignore_errors=True)
    load("after")


# ---------------------------------------------------------------------------------------------
# 5. start-up


def section_startup(prev: Path, repeat: int) -> None:
    print("\n5. Start-up: CPU s")
    load("before")
    for name, tree in (("previous", prev), ("this", ROOT)):
        helps = [measure(cli("--help"), tree)[0] for _ in range(max(repeat, 3))]
        env = {**os.environ, "PYTHONPATH": str(tree)}
        err = subprocess.run([sys.executable, "-X", "importtime", "-c", "import climbopt.cli"],
                             env=env, cwd=tree, capture_output=True, text=True).stderr
        total = max((int(m.group(1)) for m in re.finditer(r"\|\s+(\d+) \|\s+climbopt\.cli$",
                                                            err, re.M)), default=0)
        print(f"  {name:<10} climbopt --help {statistics.median(helps):.3f} s; "
              f"import climbopt.cli {total / 1e6:.3f} s (-X importtime, cumulative)")
    load("after")


def main(argv=None) -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeat", type=int, default=3, help="runs per measurement (median)")
    parser.add_argument("--quick", action="store_true",
                        help="one demo, an 8-case sweep, one repeat")
    parser.add_argument("--sections", default="1,2,3,4,5", help="which sections to run")
    args = parser.parse_args(argv)
    repeat = 1 if args.quick else args.repeat
    sections = {int(s) for s in args.sections.split(",")}
    prev = previous_tree()
    head = subprocess.run(["git", "-C", str(ROOT), "rev-parse", "--short", "HEAD"],
                          capture_output=True, text=True).stdout.strip() or "?"
    print(f"climbopt speed: this tree (commit {head} plus any uncommitted changes) against the "
          f"previous release {PREVIOUS} (extracted to the temporary folder); "
          f"Python {sys.version.split()[0]}; {time.strftime('%Y-%m-%d %H:%M')}")
    cache = Path(tempfile.mkdtemp(prefix="bench-cache-"))
    try:
        if 1 in sections:
            section_run(prev, repeat, DEMOS[:1] if args.quick else DEMOS)
        if 2 in sections:
            section_solve(prev, repeat, cache)
        if 3 in sections:
            section_sweep(prev, args.quick)
        if 4 in sections:
            section_map(prev, repeat)
        if 5 in sections:
            section_startup(prev, repeat)
    finally:
        shutil.rmtree(cache, ignore_errors=True)


if __name__ == "__main__":
    main()
