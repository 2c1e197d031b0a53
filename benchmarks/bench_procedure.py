"""Flown-schedule benchmarks on the demo aircraft (invented; scenarios/*.toml).

1. Wall-clock time of one flown schedule (the best minimum-time schedule of each demo, flown
   again; the first flight of a model also builds its CasADi functions and is shown apart):
   target 0.2 s.
2. Wall-clock time of the best-schedule search per objective: target 3 s.
3. Demo transport: the best schedules against the collocation optimum (procedure profile,
   warm-started from the energy-state path), and the effect of the acceleration share (the
   same schedule flown with other shares, and the best schedule found again for each share).

Run:  python benchmarks/bench_procedure.py [--quick]   (--quick: transport only, no reference)
"""

from __future__ import annotations

import argparse
import dataclasses
import statistics
import time
from pathlib import Path

from climbopt.aircraft import build_model
from climbopt.procedure import best_schedule_spec, fly_schedule
from climbopt.scenario import load_scenario

HERE = Path(__file__).resolve().parent
DEMOS = ["transport_twinjet", "turboprop_regional", "interceptor_dash"]
FLIGHT_TARGET_S = 0.2
SEARCH_TARGET_S = 3.0


def _procedure(scenario, share: float | None = None):
    mission = dataclasses.replace(scenario.mission, profile="procedure")
    if share is not None:
        mission = dataclasses.replace(mission, acceleration_share=share)
    return dataclasses.replace(scenario, mission=mission)


def _timed(fn, *args, **kwargs):
    t0, c0 = time.perf_counter(), time.process_time()
    out = fn(*args, **kwargs)
    return out, time.perf_counter() - t0, time.process_time() - c0


def flights_and_searches(name: str, repeats: int = 7) -> dict:
    """Search times per objective, then the flight time of the minimum-time schedule."""
    scenario = _procedure(load_scenario(HERE.parent / "scenarios" / f"{name}.toml"))
    model = build_model(scenario)
    objectives = ["time", "fuel"] + (["weighted"] if scenario.solver.cost_weight_kg_per_s else [])
    out = {"searches": {}}
    for k, obj in enumerate(objectives):
        (spec, traj), wall, cpu = _timed(best_schedule_spec, scenario, model, obj)
        out["searches"][obj] = (spec, traj, wall, cpu)
        if k == 0:
            out["spec"] = spec
    spec = out["spec"]
    fresh = build_model(scenario)  # first flight of a model: builds its CasADi functions
    _, out["first_flight_s"], _ = _timed(fly_schedule, scenario, fresh, spec)
    walls, cpus = [], []
    for _ in range(repeats):
        _, w, c = _timed(fly_schedule, scenario, model, spec)
        walls.append(w)
        cpus.append(c)
    out["flight_wall_s"], out["flight_cpu_s"] = statistics.median(walls), statistics.median(cpus)
    return out


def report_demo(name: str, res: dict) -> None:
    print(f"\n== {name}")
    w = res["flight_wall_s"]
    print(f"  one flown schedule ({res['spec'].name}): {w * 1000:.1f} ms wall, "
          f"{res['flight_cpu_s'] * 1000:.1f} ms CPU (median of 7); target "
          f"{FLIGHT_TARGET_S:g} s, ratio {w / FLIGHT_TARGET_S:.2f}; first flight of a new model "
          f"{res['first_flight_s'] * 1000:.0f} ms")
    for obj, (spec, traj, wall, cpu) in res["searches"].items():
        print(f"  best schedule, minimum {obj}: {spec.name:>14}  time {traj.time_s:8.1f} s  "
              f"fuel {traj.fuel_kg:8.1f} kg  {traj.iterations:3d} flights  {wall:.2f} s wall "
              f"({cpu:.2f} s CPU); target {SEARCH_TARGET_S:g} s, ratio "
              f"{wall / SEARCH_TARGET_S:.2f}")


def against_collocation() -> None:
    """Best schedules of the demo transport against the collocation optimum."""
    from climbopt.collocation import solve_collocation
    from climbopt.procedure import best_schedule
    from climbopt.rutowski import solve_energy_state

    scenario = _procedure(load_scenario(HERE.parent / "scenarios" / "transport_twinjet.toml"))
    model = build_model(scenario)
    print("\n== transport_twinjet: best schedule against the collocation optimum "
          "(procedure profile)")
    for obj in ("time", "fuel"):
        ref = solve_collocation(scenario, obj, model=model,
                                guess=solve_energy_state(scenario, obj, model=model))
        best = best_schedule(scenario, model, obj, reference=ref)
        c = best.reference
        print(f"  minimum {obj}: collocation {ref.time_s:7.1f} s {ref.fuel_kg:7.1f} kg; best "
              f"schedule {best.name} {best.time_s:7.1f} s {best.fuel_kg:7.1f} kg; "
              f"time {c.time_difference_s:+.1f} s, fuel {c.fuel_difference_kg:+.1f} kg, "
              f"penalty {100 * c.objective_difference_relative:+.2f} %")


def share_effect() -> None:
    """Time and fuel of the demo transport against the acceleration share."""
    base = load_scenario(HERE.parent / "scenarios" / "transport_twinjet.toml")
    model = build_model(base)
    print("\n== transport_twinjet: acceleration share")
    reference = {}
    for obj in ("time", "fuel"):
        spec, traj = best_schedule_spec(_procedure(base, 0.5), model, obj)
        reference[obj] = (spec, traj)
    for share in (0.25, 0.5, 0.75, 1.0):
        scenario = _procedure(base, share)
        parts = []
        for obj, (spec, traj) in reference.items():
            same = fly_schedule(scenario, model, dataclasses.replace(spec,
                                                                    acceleration_share=share))
            spec_s, best = best_schedule_spec(scenario, model, obj)
            parts.append(f"min {obj}: {spec.name} flown {same.time_s:6.1f} s "
                         f"{same.fuel_kg:7.1f} kg ({same.time_s - traj.time_s:+5.1f} s, "
                         f"{same.fuel_kg - traj.fuel_kg:+5.1f} kg); best {spec_s.name} "
                         f"{best.time_s:6.1f} s {best.fuel_kg:7.1f} kg")
        print(f"  share {share:4.2f}: " + " | ".join(parts))


def main(argv=None) -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="transport only, no reference")
    args = parser.parse_args(argv)
    for name in DEMOS[:1] if args.quick else DEMOS:
        report_demo(name, flights_and_searches(name))
    if not args.quick:
        against_collocation()
        share_effect()


if __name__ == "__main__":
    main()
