"""Sweep benchmarks: cases per second serial vs the local process pool, and the per-case
overhead of the sweep machinery (serial, pool, Dask LocalCluster on the loopback interface).

1. Throughput: the invented demo transport (scenarios/transport_twinjet.toml), energy-state,
   minimum time, a grid of start mass x temperature offset, solved serially and on a pool of
   ``--workers`` processes (default 2); speed-up = pool cases/s / serial cases/s. The same cases
   on a Dask LocalCluster (``--workers`` single-threaded worker processes).
2. Overhead per case: a sweep of cases that fail at once (negative masses: rejected before any
   solve, recorded as "bad-input"), so the wall time per case is the cost of the machinery
   alone (hand-out, result transfer, CSV row written and flushed).

The parent process solves one case first (warm-up: imports and first-call costs), so the pool's
forked workers and the serial run start equally warm. Dask workers are separate processes
that import climbopt on their first case; the cluster start-up time is reported apart.

Run:  python benchmarks/bench_sweep.py [--quick] [--workers 2] [--grid 100]
"""

from __future__ import annotations

import argparse
import dataclasses
import os
import tempfile
import time
from pathlib import Path

from climbopt import sweep as sw
from climbopt.rutowski import solve_energy_state
from climbopt.scenario import load_scenario

HERE = Path(__file__).resolve().parent
SCENARIO = HERE.parent / "scenarios" / "transport_twinjet.toml"


def with_grid(scenario, n: int):
    solver = dataclasses.replace(scenario.solver, grid_altitude_points=n, grid_speed_points=n)
    return dataclasses.replace(scenario, solver=solver)


def timed(plan, folder: Path, name: str, **kw) -> sw.SweepResult:
    res = sw.run_sweep(plan, folder / f"{name}.csv", **kw)
    assert res.computed == len(plan.cases), (name, res.computed)
    return res


def main(argv=None) -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="fewer cases")
    parser.add_argument("--workers", type=int, default=2, help="pool / cluster workers")
    parser.add_argument("--grid", type=int, default=100,
                        help="energy levels and speeds per level of each solve")
    parser.add_argument("--no-dask", action="store_true", help="skip the Dask cluster")
    args = parser.parse_args(argv)

    base = with_grid(load_scenario(SCENARIO), args.grid)
    masses = "56 t:80 t:4" if args.quick else "56 t:80 t:6"
    plan = sw.plan_sweep(base, [sw.parse_variation(f"mass={masses}", base),
                                sw.parse_variation("temperature_offset=-10,0,10,20 K", base)])
    n = len(plan.cases)
    n_cheap = 100 if args.quick else 400
    cheap = sw.plan_sweep(base, [sw.parse_variation(f"mass=-{n_cheap} kg:-1 kg:{n_cheap}", base)])

    t0 = time.perf_counter()
    solve_energy_state(base, "time")  # warm-up
    print(f"Sweep benchmark: {base.name} (invented demo aircraft), energy-state minimum time, "
          f"grid {args.grid} x {args.grid}; warm-up solve {time.perf_counter() - t0:.2f} s")
    print(f"  {n} cases (mass x temperature offset); {args.workers} workers; load average "
          f"before {os.getloadavg()[0]:.2f} on {os.cpu_count()} cores (other work on the "
          f"machine lowers the pool's speed-up)")
    print()

    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(tmp)
        cpu0 = time.process_time()
        serial = timed(plan, folder, "serial", executor="serial")
        cpu_serial = (time.process_time() - cpu0) / n
        solve_s = sum(r["wall_s"] for r in serial.rows) / n
        print(f"serial : {serial.wall_s:6.2f} s, {serial.cases_per_s:6.2f} cases/s "
              f"(mean solve {solve_s:.3f} s; CPU {cpu_serial:.3f} s/case)")
        cpu0 = _children_cpu_s()
        pool = timed(plan, folder, "pool", executor="pool", workers=args.workers)
        cpu_pool = (_children_cpu_s() - cpu0) / n
        print(f"pool   : {pool.wall_s:6.2f} s, {pool.cases_per_s:6.2f} cases/s, speed-up "
              f"{pool.cases_per_s / serial.cases_per_s:.2f}x on {pool.workers} processes "
              f"(includes starting them; mean solve in the workers "
              f"{sum(r['wall_s'] for r in pool.rows) / n:.3f} s; worker CPU {cpu_pool:.3f} "
              f"s/case)")
        print(f"         CPU-bound limit on {pool.workers} free cores: "
              f"{pool.workers * cpu_serial / cpu_pool:.2f}x (serial CPU per case / worker CPU "
              f"per case x workers; the wall-clock speed-up falls short of it by the share of "
              f"the cores other processes take)")

        c_serial = timed(cheap, folder, "cheap_serial", executor="serial")
        c_pool = timed(cheap, folder, "cheap_pool", executor="pool", workers=args.workers)
        print()
        print(f"overhead per case ({n_cheap} cases rejected before solving):")
        print(f"  serial : {1e3 * c_serial.wall_s / n_cheap:7.3f} ms/case")
        print(f"  pool   : {1e3 * c_pool.wall_s / n_cheap:7.3f} ms/case "
              f"(wall / cases, {c_pool.workers} processes, incl. their start)")

        if not args.no_dask:
            from distributed import Client, LocalCluster

            t0 = time.perf_counter()
            with LocalCluster(n_workers=args.workers, threads_per_worker=1, processes=True,
                              host="127.0.0.1", dashboard_address=None) as cluster, \
                    Client(cluster) as client:
                start = time.perf_counter() - t0
                client.run(_warm_up, base)  # every worker: imports and a first solve
                c_dask = timed(cheap, folder, "cheap_dask", executor="dask", cluster=client)
                dask = timed(plan, folder, "dask", executor="dask", cluster=client)
            print(f"  dask   : {1e3 * c_dask.wall_s / n_cheap:7.3f} ms/case "
                  f"(LocalCluster, {c_dask.workers} worker processes on 127.0.0.1)")
            print()
            print(f"dask   : {dask.wall_s:6.2f} s, {dask.cases_per_s:6.2f} cases/s, speed-up "
                  f"{dask.cases_per_s / serial.cases_per_s:.2f}x (cluster start-up "
                  f"{start:.1f} s not included)")
            print(f"         mean solve in the workers "
                  f"{sum(r['wall_s'] for r in dask.rows) / n:.3f} s")
            print(f"tables identical (serial, pool, dask; wall_s aside): "
                  f"{_same(serial, pool) and _same(serial, dask)}")
        else:
            print(f"tables identical (serial, pool; wall_s aside): {_same(serial, pool)}")
    print(f"load average after {os.getloadavg()[0]:.2f}")


def _children_cpu_s() -> float:
    """User + system CPU time [s] of the finished child processes of this process."""
    import resource

    ru = resource.getrusage(resource.RUSAGE_CHILDREN)
    return ru.ru_utime + ru.ru_stime


def _warm_up(scenario) -> None:
    solve_energy_state(scenario, "time")


def _same(a: sw.SweepResult, b: sw.SweepResult) -> bool:
    """Same rows, wall_s aside (NaN equal to NaN: compared as table text)."""
    def cells(rows):
        return [[sw._cell(v) for k, v in r.items() if k != "wall_s"] for r in rows]

    return cells(a.rows) == cells(b.rows)


if __name__ == "__main__":
    main()
