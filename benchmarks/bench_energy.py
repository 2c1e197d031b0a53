"""Energy-state benchmarks on the published supersonic interceptor (Bryson, Desai & Hoffman,
J. Aircraft 6(6), 1969; data as tabulated in Betts, *Practical Methods for Optimal Control*,
2nd ed., 2010; file tests/data/interceptor_1969.toml).

1. Build time of a 400 x 400 energy map (altitude x true airspeed): target 0.1 s.
2. Grid convergence of the energy-state minimum-time and minimum-fuel answers (time, fuel) as
   the grid (energy levels x speeds per level) is refined, with and without the refinement of
   each level's optimum.

Run:  python benchmarks/bench_energy.py [--quick]
"""

from __future__ import annotations

import argparse
import dataclasses
import statistics
import time
from pathlib import Path

import numpy as np

from climbopt.aircraft import build_model
from climbopt.energy import build_energy_map
from climbopt.rutowski import solve_energy_state
from climbopt.scenario import load_scenario

HERE = Path(__file__).resolve().parent
SCENARIO = HERE.parent / "tests" / "data" / "interceptor_1969.toml"


def map_build_time(model, repeats: int = 7) -> dict[str, float]:
    """Median and best wall-clock and CPU (process) time [s] of building a 400 x 400 map.

    CPU time is shown too because the machine may be shared: wall time then includes waiting.
    """
    build_energy_map(model, shape=(400, 400))  # warm-up (imports, caches)
    wall, cpu = [], []
    for _ in range(repeats):
        t0, c0 = time.perf_counter(), time.process_time()
        build_energy_map(model, shape=(400, 400))
        wall.append(time.perf_counter() - t0)
        cpu.append(time.process_time() - c0)
    return {"wall_median": statistics.median(wall), "wall_best": min(wall),
            "cpu_median": statistics.median(cpu), "cpu_best": min(cpu)}


def _timed(fn, arg) -> float:
    t0 = time.perf_counter()
    fn(arg)
    return time.perf_counter() - t0


def with_grid(scenario, levels: int, speeds: int):
    solver = dataclasses.replace(scenario.solver, grid_altitude_points=levels,
                                 grid_speed_points=speeds)
    return dataclasses.replace(scenario, solver=solver)


def main(argv=None) -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="fewer grid sizes")
    args = parser.parse_args(argv)

    scenario = load_scenario(SCENARIO)
    model = build_model(scenario)
    tm = map_build_time(model)
    print("Energy map, 400 x 400 (altitude x TAS), 1969 interceptor (target 100 ms)")
    print(f"  wall time: median {tm['wall_median'] * 1000:.1f} ms, best {tm['wall_best'] * 1000:.1f} ms")
    print(f"  CPU time:  median {tm['cpu_median'] * 1000:.1f} ms, best {tm['cpu_best'] * 1000:.1f} ms")
    z = np.linspace(0.0, 20000.0, 400 * 400).reshape(400, 400)
    atm = model.atmosphere
    atm(z)
    t_atm = min(_timed(atm, z) for _ in range(7))
    print(f"  of which the smooth atmosphere on 400 x 400 points: best {t_atm * 1000:.1f} ms")
    print()

    sizes = [(50, 50), (100, 100), (200, 200), (400, 400)]
    if not args.quick:
        sizes.append((800, 800))
    print("Grid convergence, energy-state answers (energy levels x speeds per level)")
    header = (f"{'grid':>9} | {'refined':>7} | {'min-time t [s]':>14} {'fuel [kg]':>9} | "
              f"{'min-fuel t [s]':>14} {'fuel [kg]':>9} | {'wall [s]':>8}")
    print(header)
    print("-" * len(header))
    for refine in (False, True):
        for n_lev, n_v in sizes:
            if not refine and n_lev > 400:
                continue
            sc = with_grid(scenario, n_lev, n_v)
            t0 = time.perf_counter()
            tt = solve_energy_state(sc, "time", model=model, refine=refine)
            tf = solve_energy_state(sc, "fuel", model=model, refine=refine)
            wall = time.perf_counter() - t0
            print(f"{n_lev:>4}x{n_v:<4} | {'yes' if refine else 'no':>7} | "
                  f"{tt.time_s:14.2f} {tt.fuel_kg:9.2f} | {tf.time_s:14.2f} {tf.fuel_kg:9.2f} | "
                  f"{wall:8.2f}")
    print()
    print("Published exact optimum for comparison (point-mass model, not energy-state): minimum "
          "time about 320 s (Betts 2010). The energy-state time is lower because its zooms, "
          "above all the final one to the target, take no time.")


if __name__ == "__main__":
    main()
