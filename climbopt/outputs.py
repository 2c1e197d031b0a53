"""Write a run's results folder: ``summary.json``, ``comparison.csv``, ``report.txt``,
``report.html`` (the whole run in one self-contained page), one per-point CSV and one crew
schedule per result, and the figures.

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
                  exit_code: int | None = None, progress=None, formats=("png",)) -> dict:
    """Write the results folder of ``result`` (a :class:`climbopt.pipeline.RunResult`).

    Parameters
    ----------
    result : RunResult
    out_dir : str or Path
        The folder; replaced as a whole when it is an earlier climbopt output folder.
    scenario : Scenario
        The scenario solved (names, conditions, the energy map behind the plots).
    units : "si", "us", "crew" or "crew-lb"
        Display units (:data:`climbopt.units.UNIT_SYSTEMS`).
    model : AircraftModel, optional
        Built from the scenario when omitted (for the energy-map figures).
    exit_code : int, optional
        Recorded in ``summary.json`` (default: 4 when the run is a solver failure, else 0).
    progress : callable(label), optional
        Told when the slow steps start.
    formats : sequence of "png", "svg", "pdf"
        Figure files to write (report.html carries the figures too: the PNG files embedded,
        or the SVG inline when SVG is among the formats).

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
        return _write_folder(folder, result, scenario, units, model, exit_code, progress,
                             formats)


#: Order in which crew schedules are shown: the flown schedules first (what crews fly), then
#: the optima they are measured against.
SCHEDULE_ORDER = ("best-schedule", "schedule", "collocation", "energy-state")

#: Title and caption of each figure of a run, by file stem.
FIGURES = {
    "ps_mach": ("Specific excess power over altitude and Mach number",
                "Shading and thin lines: Ps contours; dotted: energy height; hatched: outside the "
                "flight envelope. Dark slate: minimum time; ochre: minimum fuel; dashed with open "
                "markers: energy-state; solid with filled markers: collocation."),
    "ps_tas": ("Specific excess power over altitude and true airspeed",
               "As figure 1 over true airspeed, where energy-height lines are parabolas."),
    "fs_mach": ("Fuel-specific energy (Ps per unit fuel flow) with the minimum-fuel paths",
                "The minimum-fuel paths follow the tangency of these contours with the "
                "energy-height lines."),
    "time_histories": ("Time histories of every result",
                       "Altitude, Mach number, flight-path angle, throttle and mass on a shared "
                       "time axis; energy-state zooms appear as vertical steps."),
}


def _schedule_rank(schedule) -> int:
    return SCHEDULE_ORDER.index(str(schedule.method)) if str(schedule.method) in \
        SCHEDULE_ORDER else len(SCHEDULE_ORDER)


def _write_folder(folder: Path, result, scenario, units, model, exit_code, progress,
                  formats) -> dict:
    from climbopt import report
    from climbopt.schedule import climb_schedule, conditions_of, default_step_m, \
        schedule_summary, write_schedule_csv

    records = report.comparison(list(result.results), result.common_point)
    conditions = conditions_of(scenario)
    trajs = result.trajectories()
    schedules, files = {}, {}
    for traj in trajs:
        stem = report.result_stem(traj.method, traj.objective, traj.name)
        report.write_trajectory_csv(folder / f"{stem}.csv", traj, units, scenario.name,
                                    conditions_of(scenario, traj.profile))
        files[stem] = [f"{stem}.csv"]
        if traj.ranked:
            sched = climb_schedule(traj, default_step_m(units), scenario=scenario)
            schedules[stem] = sched
            write_schedule_csv(folder / f"{stem}_schedule.csv", sched, units, scenario.name)
            files[stem].append(f"{stem}_schedule.csv")
    report.write_comparison_csv(folder / "comparison.csv", records, units, scenario.name,
                                conditions)
    if progress is not None:
        progress("plots")
    figures, drawings = _figures(folder, scenario, trajs, units, model, formats)

    lines = {k: schedule_summary(v, units) for k, v in schedules.items()}
    flown = report.flown_schedule_records(records, lines, units)
    ordered = sorted(schedules.values(), key=_schedule_rank)
    texts = {"common_point": report.format_common_point(result.common_point, units),
             "schedules": report.format_flown_schedules(records, lines, units),
             "procedure_cost": report.format_procedure_costs(result.procedure_costs, units)}
    _write_report_txt(folder, scenario, units, records, texts, ordered, result, conditions)
    _write_report_html(folder, scenario, units, records, flown, ordered, result, drawings,
                       texts["common_point"])
    doc = report.summary_document(
        records, scenario_name=scenario.name, scenario_path=scenario.source_path, units=units,
        files=files, exit_code=exit_code, errors=result.errors, warnings=result.warnings,
        procedure_costs=result.procedure_costs, conditions=conditions)
    doc["figures"] = sorted(p.name for p in figures)
    doc["report"] = ["report.txt", "report.html"]
    doc["text"] = texts
    report.write_summary_json(folder / "summary.json", doc)
    return doc


def _write_report_txt(folder, scenario, units, records, texts, schedules, result, conditions):
    """``report.txt``: conditions, the comparison, the flown schedules and their cost, what the
    procedure costs, every crew schedule (flown first), errors, warnings, the caution."""
    from climbopt import report
    from climbopt.schedule import format_schedule

    text = [f"climbopt {__version__}: {scenario.name}", f"units: {report.units_words(units)}",
            report.format_conditions(conditions, units), "", report.format_table(records, units)]
    text += [block for c in texts.values() if c for block in ("", c)]
    for sched in schedules:
        text += ["", format_schedule(sched, units)]
    text += [""] + [f"error: {e}" for e in result.errors]
    text += [f"warning: {w}" for w in result.warnings] + [f"Caution: {CAUTION}"]
    report.write_text_atomic(folder / "report.txt", "\n".join(text) + "\n")


def _write_report_html(folder, scenario, units, records, flown, schedules, result, drawings,
                       common_point=""):
    """``report.html``: the whole run in one self-contained page (:mod:`climbopt.htmlreport`)."""
    from climbopt import htmlreport, report

    figures = [(*FIGURES.get(stem, (stem, "")), drawing) for stem, drawing in drawings]
    page = htmlreport.run_report(
        scenario=scenario, units=units, records=records, flown=flown, schedules=schedules,
        procedure_costs=result.procedure_costs, figures=figures, errors=result.errors,
        warnings=result.warnings, common_point=common_point)
    report.write_text_atomic(folder / "report.html", page)


def _figures(folder: Path, scenario, trajs, units, model, formats) -> tuple[list, list]:
    """The Ps and fs maps with every path, and the time histories; returns the paths written
    and ``(stem, drawing)`` of each figure for the HTML report: the SVG text when SVG files
    were asked for, else the bytes of the PNG file just written (drawing the figure once more
    as SVG would cost about as much as the PNG itself)."""
    from climbopt import plots
    from climbopt.energy import build_energy_map

    if not trajs:
        return [], []
    if model is None:
        from climbopt.aircraft import build_model

        model = build_model(scenario)
    emap = build_energy_map(scenario, model=model, shape=(160, 160))
    figures, drawings = [], []
    made = list(plots.energy_map_figures(emap, trajs, units=units))
    axes = plots.plot_time_histories(trajs, units=units)
    axes[0].set_title(scenario.name, fontsize=10)
    made.append(("time_histories", axes[0].figure))
    for name, fig in made:
        written = plots.save_figure(fig, folder / name, formats)
        figures += written
        files = {p.suffix: p for p in written}
        if ".svg" in files:
            drawings.append((name, files[".svg"].read_text(encoding="utf-8")))
        elif ".png" in files:
            drawings.append((name, files[".png"].read_bytes()))
        else:  # PDF alone: the page still needs a drawing
            drawings.append((name, plots.figure_svg(fig)))
    return figures, drawings
