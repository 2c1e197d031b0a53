"""Write a run's results folder: ``summary.json``, ``comparison.csv``, ``report.txt``, one
per-point CSV and one crew schedule per result, and the figures.

:func:`write_outputs` is what ``climbopt run`` calls and what a notebook calls after
:func:`climbopt.pipeline.run_mission`. The folder is written atomically
(:func:`climbopt.report.atomic_output_dir`): an older folder is replaced only once everything is
written, and only if it is a climbopt output folder. Nothing here computes physics; the numbers
come from the results, formatted by :mod:`climbopt.report` and :mod:`climbopt.schedule`, drawn
by :mod:`climbopt.plots`.
"""

from __future__ import annotations

from pathlib import Path

from climbopt import CAUTION, __version__

__all__ = ["write_outputs"]


def write_outputs(result, out_dir, scenario, *, units: str = "si", model=None,
                  exit_code: int | None = None, progress=None) -> dict:
    """Write the results folder of ``result`` (a :class:`climbopt.pipeline.RunResult`).

    Parameters
    ----------
    result : RunResult
    out_dir : str or Path
        The folder; replaced as a whole when it is an earlier climbopt output folder.
    scenario : Scenario
        The scenario solved (names, conditions, the energy map behind the plots).
    units : "si" or "us"
    model : AircraftModel, optional
        Built from the scenario when omitted (for the energy-map figures).
    exit_code : int, optional
        Recorded in ``summary.json`` (default: 4 when the run is a solver failure, else 0).
    progress : callable(label), optional
        Told when the slow steps start.

    Returns
    -------
    dict
        The ``summary.json`` document.

    Raises
    ------
    climbopt.report.OutputFolderError
        The folder cannot or must not be replaced.
    """
    from climbopt import report

    report.check_output_folder(out_dir)
    if exit_code is None:
        exit_code = 4 if result.solver_failure else 0
    with report.atomic_output_dir(out_dir, "climbopt run") as folder:
        return _write_folder(folder, result, scenario, units, model, exit_code, progress)


def _write_folder(folder: Path, result, scenario, units, model, exit_code, progress) -> dict:
    from climbopt import report
    from climbopt.schedule import (climb_schedule, default_step_m, format_schedule,
                                   schedule_summary, write_schedule_csv)

    records = report.comparison(list(result.results), result.common_point)
    trajs = result.trajectories()
    schedules, files = {}, {}
    for traj in trajs:
        stem = report.result_stem(traj.method, traj.objective, traj.name)
        report.write_trajectory_csv(folder / f"{stem}.csv", traj, units, scenario.name)
        files[stem] = [f"{stem}.csv"]
        if traj.ranked:
            sched = climb_schedule(traj, default_step_m(units), scenario=scenario)
            schedules[stem] = sched
            write_schedule_csv(folder / f"{stem}_schedule.csv", sched, units, scenario.name)
            files[stem].append(f"{stem}_schedule.csv")
    report.write_comparison_csv(folder / "comparison.csv", records, units, scenario.name)
    if progress is not None:
        progress("plots")
    figures = _figures(folder, scenario, trajs, units, model)

    costs = report.format_procedure_costs(result.procedure_costs, units)
    flown = report.format_flown_schedules(
        records, {k: schedule_summary(v, units) for k, v in schedules.items()}, units)
    text = [f"climbopt {__version__}: {scenario.name}", "", report.format_table(records, units)]
    common = report.format_common_point(result.common_point, units)
    text += [block for c in (common, flown, costs) if c for block in ("", c)]
    for sched in schedules.values():
        text += ["", format_schedule(sched, units)]
    text += [""] + [f"error: {e}" for e in result.errors]
    text += [f"warning: {w}" for w in result.warnings] + [f"Caution: {CAUTION}"]
    report.write_text_atomic(folder / "report.txt", "\n".join(text) + "\n")
    doc = report.summary_document(
        records, scenario_name=scenario.name, scenario_path=scenario.source_path, units=units,
        files=files, exit_code=exit_code, errors=result.errors, warnings=result.warnings,
        procedure_costs=result.procedure_costs)
    doc["figures"] = sorted(p.name for p in figures)
    doc["text"] = {"common_point": common, "schedules": flown, "procedure_cost": costs}
    report.write_summary_json(folder / "summary.json", doc)
    return doc


def _figures(folder: Path, scenario, trajs, units, model) -> list:
    """The Ps and fs maps with every path, and the time histories; returns the paths written."""
    from climbopt import plots
    from climbopt.energy import build_energy_map

    if not trajs:
        return []
    if model is None:
        from climbopt.aircraft import build_model

        model = build_model(scenario)
    emap = build_energy_map(scenario, model=model, shape=(160, 160))
    figures = []
    for name, fn, x in (("ps_mach", plots.plot_ps_map, "mach"),
                        ("ps_tas", plots.plot_ps_map, "tas"),
                        ("fs_mach", plots.plot_fs_map, "mach")):
        ax = fn(emap, trajs, x=x, units=units)
        figures += plots.save_figure(ax.figure, folder / name)
    axes = plots.plot_time_histories(trajs, units=units)
    axes[0].set_title(scenario.name, fontsize=10)
    figures += plots.save_figure(axes[0].figure, folder / "time_histories")
    return figures
