"""Output files of the flight-test reduction (``climbopt reduce``): the standardised points, the
fitted surface (NPZ in SI, CSV grid in the display units), the predicted vs measured climb
table, the crew schedules of both aircraft, the plots, ``report.txt`` and ``reduce.json``. Every
file carries the caution; nothing here prints.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

from climbopt import CAUTION, __version__

__all__ = ["climb_comparison_rows", "reduce_summary", "surface_grid",
           "write_climb_comparison_csv", "write_points_csv", "write_reduce_folder",
           "write_surface"]


def _display(kind: str, value, units: str):
    from climbopt.report import to_display

    return to_display(kind, value, units)


def _comment_lines(plan_name: str, what: str, units: str) -> list[str]:
    from climbopt import CAUTION, __version__

    return [f"# climbopt {__version__}: {what}; test plan: {plan_name}; units: {units}",
            f"# caution: {CAUTION}"]


def _write_rows(path, comments, header, rows) -> None:
    lines = comments + [",".join(header)]
    lines += [",".join(r) for r in rows]
    Path(path).write_text("\n".join(lines) + "\n", encoding="utf-8")


def write_points_csv(path, points, surface, units: str, plan_name: str) -> None:
    """The standardised points with the fit, its residual and the predicted standard Ps."""
    fit = surface.ps_std(points.altitude_m, points.mach)
    pred = surface.predicted_ps_std(points.altitude_m, points.mach)
    alt_u = _display("altitude", 0.0, units)[1]
    spd_u, m_u, ps_u = (_display(k, 0.0, units)[1] for k in ("speed", "mass", "rate"))
    header = ["test point", "kind", "time [s]", f"pressure altitude [{alt_u}]",
              f"altitude [{alt_u}]", "Mach", f"TAS test [{spd_u}]", "OAT [K]",
              f"gross mass [{m_u}]", "load factor", f"Ps test [{ps_u}]", f"Ps std [{ps_u}]",
              f"sigma [{ps_u}]", f"Ps fit [{ps_u}]", f"residual [{ps_u}]",
              f"Ps predicted std [{ps_u}]"]
    cols = [points.time_s, _display("altitude", points.pressure_altitude_m, units)[0],
            _display("altitude", points.altitude_m, units)[0], points.mach,
            _display("speed", points.tas_test_m_s, units)[0], points.oat_k,
            _display("mass", points.mass_kg, units)[0], points.load_factor]
    cols += [_display("rate", v, units)[0] for v in (
        points.ps_test_m_s, points.ps_std_m_s, points.sigma_m_s, fit, points.ps_std_m_s - fit,
        pred)]
    rows = ([str(points.source[i]), str(points.kind[i])] + [f"{c[i]:.6g}" for c in cols]
            for i in range(len(points)))
    _write_rows(path, _comment_lines(plan_name, "standardised Ps points (standard weight, "
                                     "standard day, 1 g)", units), header, rows)


def surface_grid(surface, points_per_axis: int = 41):
    """(altitude_m (nh,), mach (nm,), Ps std, sigma, predicted Ps std (nh, nm)) over the tested
    ranges padded by 10 %."""
    (h0, h1), (m0, m1) = surface.altitude_range_m, surface.mach_range
    pad_h, pad_m = 0.1 * (h1 - h0), 0.1 * (m1 - m0)
    alt = np.linspace(max(h0 - pad_h, 0.0), h1 + pad_h, points_per_axis)
    mach = np.linspace(max(m0 - pad_m, 0.05), m1 + pad_m, points_per_axis)
    hh, mm = np.meshgrid(alt, mach, indexing="ij")
    return (alt, mach, surface.ps_std(hh, mm), surface.sigma(hh, mm),
            surface.predicted_ps_std(hh, mm))


def write_surface(folder, surface, units: str, plan_name: str) -> list[str]:
    """``surface.npz`` (SI: grid, fit, bootstrap sigma, predicted, coefficients, bootstrap sets,
    ranges) and ``surface.csv`` (the grid in ``units``). Returns the file names."""
    alt, mach, ps, sigma, pred = surface_grid(surface)
    np.savez_compressed(Path(folder) / "surface.npz", altitude_m=alt, mach=mach, ps_std_m_s=ps,
                        sigma_m_s=sigma, predicted_ps_std_m_s=pred,
                        coefficients=surface.coefficients, bootstrap_coefficients=surface.samples,
                        mach_range=np.array(surface.mach_range),
                        altitude_range_m=np.array(surface.altitude_range_m),
                        degrees=np.array([surface.mach_degree, surface.altitude_degree]),
                        difference=np.array(surface.difference))
    alt_d, alt_u = _display("altitude", alt, units)
    ps_u = _display("rate", 0.0, units)[1]
    (h0, h1), (m0, m1) = surface.altitude_range_m, surface.mach_range
    rows = []
    for i in range(alt.size):
        for j in range(mach.size):
            tested = h0 <= alt[i] <= h1 and m0 <= mach[j] <= m1
            vals = [_display("rate", v[i, j], units)[0] for v in (ps, sigma, pred)]
            rows.append([f"{alt_d[i]:.1f}", f"{mach[j]:.4f}"] + [f"{v:.5g}" for v in vals]
                        + ["true" if tested else "false"])
    header = [f"altitude [{alt_u}]", "Mach", f"Ps std fit [{ps_u}]", f"sigma [{ps_u}]",
              f"Ps predicted std [{ps_u}]", "inside tested range"]
    _write_rows(Path(folder) / "surface.csv", _comment_lines(
        plan_name, "fitted standard-day Ps surface (standard weight, 1 g)", units), header, rows)
    return ["surface.npz", "surface.csv"]


def climb_comparison_rows(comparison, units: str) -> tuple[list[str], list[list[str]]]:
    """Header and rows of the predicted vs measured minimum-time climb table."""
    rows = []
    for key, kind, label in (("time_s", "time", "time to climb"), ("fuel_used_kg", "mass", "fuel"),
                             ("distance_m", "distance", "distance")):
        p, u = _display(kind, comparison.predicted.table[key][-1], units)
        m = _display(kind, comparison.measured.table[key][-1], units)[0]
        sig = (f"{_display(kind, comparison.time_sigma_s, units)[0]:.1f}" if key == "time_s"
               else "")
        rows.append([f"{label} [{u}]", f"{p:.1f}", f"{m:.1f}", f"{m - p:+.1f}",
                     f"{100 * (m - p) / p:+.2f}", sig])
    return ["quantity", "predicted", "measured", "measured - predicted", "difference [%]",
            "1 sigma (bootstrap)"], rows


def write_climb_comparison_csv(path, comparison, units: str, plan_name: str) -> None:
    """The climb comparison table as CSV."""
    header, rows = climb_comparison_rows(comparison, units)
    _write_rows(path, _comment_lines(plan_name, "minimum-time climb, predicted vs measured "
                                     "aircraft (energy-state)", units), header, rows)


def reduce_summary(plan, points, surface, comparison, units):
    """Summary lines of ``climbopt reduce`` and the JSON-ready facts behind them."""
    from climbopt import report
    from climbopt.flighttest_fit import equivalent_cd0_change

    kinds = [h.kind for h in plan.histories]
    rate = lambda v: report.to_display("rate", v, units)  # noqa: E731
    rms, ps_u = rate(surface.residual_rms_m_s)
    facts = {"test_points": len(kinds), "level_accelerations": kinds.count("level_acceleration"),
             "sawtooth_climbs": kinds.count("sawtooth_climb"), "standardised_points": len(points),
             "residual_rms_m_s": surface.residual_rms_m_s,
             "point_noise_m_s": float(np.sqrt(np.mean(points.sigma_m_s ** 2))),
             "mach_degree": surface.mach_degree, "altitude_degree": surface.altitude_degree,
             "fit": "difference from the predicted model" if surface.difference else "direct"}
    lines = [f"{plan.name}: {facts['test_points']} test points ({facts['level_accelerations']} "
             f"level accelerations, {facts['sawtooth_climbs']} sawtooth climbs), {len(points)} "
             "standardised points",
             f"Ps fit ({facts['fit']}, Mach degree {surface.mach_degree}, altitude degree "
             f"{surface.altitude_degree}): residual rms {rms:.3g} {ps_u}, the points' own noise "
             f"{rate(facts['point_noise_m_s'])[0]:.3g} {ps_u}"]
    if surface.difference:
        fit, samples = equivalent_cd0_change(surface, points.altitude_m, points.mach)
        facts["cd0_change"] = float(np.mean(fit))
        facts["cd0_change_sigma"] = float(np.std(np.mean(samples, axis=1), ddof=1))
        lines.append(f"measured vs predicted, as a zero-lift drag change over the test points: "
                     f"{100 * facts['cd0_change']:+.2f} % of CD0 (1 sigma "
                     f"{100 * facts['cd0_change_sigma']:.2f} %)")
    if comparison is not None:
        tp = comparison.predicted.table["time_s"][-1]
        tm = comparison.measured.table["time_s"][-1]
        lo, hi = comparison.time_interval_s
        facts.update(predicted_time_s=float(tp), measured_time_s=float(tm),
                     time_sigma_s=comparison.time_sigma_s, time_interval_s=[lo, hi],
                     extrapolated_fraction=comparison.extrapolated_fraction)
        lines.append(f"minimum-time climb (energy-state): predicted {tp:.1f} s, measured "
                     f"{tm:.1f} s ({tm - tp:+.1f} s, {100 * (tm - tp) / tp:+.2f} %; 1 sigma "
                     f"{comparison.time_sigma_s:.1f} s, 95 % interval {lo:.1f} to {hi:.1f} s)")
        if comparison.extrapolated_fraction > 0:
            lines.append(f"  {100 * comparison.extrapolated_fraction:.0f} % of the measured path "
                         "lies outside the tested altitude or Mach range (correction held at "
                         "its edge value there)")
        ps, ms = comparison.predicted_schedule, comparison.measured_schedule
        if ps is not None and ms is not None:
            facts.update(predicted_schedule=ps.name, measured_schedule=ms.name,
                         predicted_schedule_time_s=ps.time_s, measured_schedule_time_s=ms.time_s)
            lines.append(f"best flyable schedule for minimum time: predicted {ps.name} "
                         f"({ps.time_s:.1f} s), measured {ms.name} ({ms.time_s:.1f} s, "
                         f"{ms.time_s - ps.time_s:+.1f} s); each flown through its own model")
    return lines, facts


def write_reduce_folder(folder: Path, plan, points, surface, comparison, units):
    """Write every output of ``reduce`` into ``folder``: points and surface files, the plots,
    the climbs' tables and crew schedules (with a comparison), ``report.txt``, ``reduce.html``
    (the flight-test page, self-contained) and ``reduce.json``; return (summary lines,
    document)."""
    from climbopt import plots, report

    write_points_csv(folder / "points.csv", points, surface, units, plan.name)
    files = ["points.csv"] + write_surface(folder, surface, units, plan.name)
    figures = []
    for stem, fn in (("measured_ps", plots.plot_measured_ps),
                     ("residuals", plots.plot_ps_residuals),
                     ("predicted_vs_measured", plots.plot_predicted_vs_measured)):
        if stem == "predicted_vs_measured" and not surface.difference:
            continue
        fig = fn(surface, points, units=units).figure
        files += [p.name for p in plots.save_figure(fig, folder / stem)]
        figures.append((stem, plots.figure_svg(fig)))
    lines, facts = reduce_summary(plan, points, surface, comparison, units)
    schedules = []
    if comparison is not None:
        more, schedules, svg = _write_reduce_schedules(folder, plan, comparison, surface, units,
                                                       lines)
        files += more
        figures.append(("climb_comparison", svg))
    text = [f"climbopt {__version__}: flight-test reduction of {plan.path}", ""] + lines
    text += [""] + [f"note: {n}" for n in surface.reference.notes]
    text += [f"Caution: {CAUTION}"]
    report.write_text_atomic(folder / "report.txt", "\n".join(text) + "\n")
    page = reduce_page(plan, points, surface, comparison, units, lines, schedules, figures)
    report.write_text_atomic(folder / "reduce.html", page)
    doc = {"climbopt_version": __version__, "test_plan": {"name": plan.name, "path": plan.path},
           "units": units, "results": facts, "notes": surface.reference.notes,
           "files": sorted(files + ["report.txt", "reduce.html", "reduce.json"]),
           "caution": CAUTION}
    report.write_summary_json(folder / "reduce.json", doc)
    return lines, doc


#: Captions of the flight-test figures (stem -> title, caption).
_FIGURE_WORDS = {
    "measured_ps": ("Measured Ps", "Standardised points (standard weight, standard day, 1 g) "
                    "over the fitted Ps contours; hatched where the data do not reach."),
    "residuals": ("Residuals", "Standardised Ps minus the fitted surface at each point."),
    "predicted_vs_measured": ("Predicted against measured Ps", "The fitted surface against the "
                              "predicted model's standard-day Ps."),
    "climb_comparison": ("Minimum-time climbs", "The predicted and the measured aircraft's "
                         "minimum-time climbs and best flyable schedules."),
}


def reduce_page(plan, points, surface, comparison, units, lines, schedules, figures) -> str:
    """The flight-test page: summary, the test points, the predicted against measured climbs
    and their crew schedules, the figures and the notes, with the caution (one self-contained
    HTML file in the style of ``report.html``)."""
    from climbopt import htmlreport as hr
    from climbopt.schedule import schedule_records

    summary = "<ul>" + "".join(f"<li>{hr.esc(line.strip())}</li>" for line in lines) + "</ul>"
    kinds = {}
    for src, kind in zip(points.source, points.kind, strict=True):
        kinds.setdefault(str(src), str(kind).replace("_", " "))
    counts = {src: int(np.sum(points.source == src)) for src in kinds}
    alt_d, alt_u = _display("altitude", points.altitude_m, units)
    rows = [[src, kinds[src], counts[src],
             f"{np.mean(alt_d[points.source == src]):,.0f}",
             f"{np.min(points.mach[points.source == src]):.2f} to "
             f"{np.max(points.mach[points.source == src]):.2f}"] for src in kinds]
    test_points = hr.table(["test point", "manoeuvre", "standardised points",
                            f"mean altitude [{alt_u}]", "Mach"], rows)
    sections = [("summary", "Summary", summary), ("points", "Test points", test_points)]
    if comparison is not None:
        header, crows = climb_comparison_rows(comparison, units)
        body = hr.table(header, crows)
        for name, sched in schedules:
            h, r = schedule_records(sched, units)
            body += f"<h3>{hr.esc(name)}</h3>" + hr.table(h, [[_cell(c) for c in row]
                                                             for row in r])
        sections.append(("climbs", "Predicted and measured climbs", body))
    sections.append(("figures", "Figures", hr.figures_html(
        [(*_FIGURE_WORDS.get(stem, (stem, "")), svg) for stem, svg in figures])))
    notes = list(surface.reference.notes) + (list(comparison.notes) if comparison else [])
    sections.append(("notes", "Notes", "<ul>" + "".join(f"<li>{hr.esc(n)}</li>" for n in notes)
                     + "</ul>"))
    meta = (f"climbopt {hr.esc(__version__)} &middot; test plan {hr.esc(plan.path)} &middot; "
            f"units {hr.esc(units)}")
    return hr.page(plan.name, "Flight-test Ps reduction", meta, sections)


def _cell(value) -> str:
    return "" if value is None else str(value)


def _write_reduce_schedules(folder, plan, comparison, surface, units, lines):
    """Per-point tables, crew schedules, the comparison table and plot of the two climbs and
    the two best flyable schedules; returns (files, [(label, crew schedule)], figure SVG)."""
    from climbopt import plots, report
    from climbopt.schedule import (climb_schedule, default_step_m, schedule_summary,
                                   write_schedule_csv)

    scenario = plan.predicted
    files, schedules = ["climb_comparison.csv"], []
    write_climb_comparison_csv(folder / "climb_comparison.csv", comparison, units, plan.name)
    climbs = [("predicted", comparison.predicted), ("measured", comparison.measured),
              ("predicted_best_schedule", comparison.predicted_schedule),
              ("measured_best_schedule", comparison.measured_schedule)]
    for stem, traj in ((k, v) for k, v in climbs if v is not None):
        who = f"{scenario.name} ({stem.split('_')[0]} aircraft)"
        report.write_trajectory_csv(folder / f"{stem}_time.csv", traj, units, who)
        sched = climb_schedule(traj, default_step_m(units), scenario=scenario)
        write_schedule_csv(folder / f"{stem}_time_schedule.csv", sched, units, who)
        files += [f"{stem}_time.csv", f"{stem}_time_schedule.csv"]
        lines.append(f"  {stem.replace('_', ' ')}: {schedule_summary(sched, units)}")
        schedules.append((f"{stem.replace('_', ' ')} aircraft"
                          if "schedule" not in stem else stem.replace("_", " "), sched))
    fig = plots.plot_climb_comparison(comparison, surface, units=units)[0].figure
    files += [p.name for p in plots.save_figure(fig, folder / "climb_comparison")]
    return files, schedules, plots.figure_svg(fig)
