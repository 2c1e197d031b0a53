"""``report.html``: one self-contained page per run (and per office table) to hand to a colleague.

The page holds the conditions, the comparison (engineering figures first, the solver
diagnostics in a small table of their own), every crew schedule (the flown schedules first:
that is what crews fly), what the procedure profile costs against the free optimum, the figures
(embedded: the PNG files as data, or inline SVG when SVG files are written, so nothing is
fetched), the notes and the caution. It needs no network and no JavaScript, and prints on A4
(print style sheet, page breaks kept out of tables and figures).

An output module: it formats numbers that :mod:`climbopt.report` and :mod:`climbopt.schedule`
already put in display units and computes nothing. :func:`run_report` is called by
:func:`climbopt.outputs.write_outputs`; :func:`page` and :func:`table` serve the office table of
a sweep (:mod:`climbopt.office`).
"""

from __future__ import annotations

import datetime
import html
import re

from climbopt import CAUTION, __version__

__all__ = ["page", "run_report", "table", "svg_inline", "figures_html"]

#: The page's style sheet: screen (a sheet of paper on grey) and print (A4, no background).
STYLE = """
:root { --ink: #1d2b33; --muted: #5b6b73; --rule: #c9d2d6; --head: #e9eef0; --accent: #233d4d;
        --warn: #b5651d; --best: #1f5f3a; }
* { box-sizing: border-box; }
html { background: #d9dee0; }
body { margin: 0; color: var(--ink); font: 10pt/1.45 "DejaVu Sans", "Liberation Sans", Arial,
       sans-serif; }
main { max-width: 200mm; margin: 10mm auto; background: #fff; padding: 14mm 14mm 10mm;
       box-shadow: 0 1px 6px rgba(0,0,0,.25); }
header.title { border-bottom: 2.5pt solid var(--accent); padding-bottom: 3mm; margin-bottom: 4mm; }
header.title .kicker { text-transform: uppercase; letter-spacing: .12em; font-size: 8pt;
                       color: var(--muted); }
h1 { font-size: 17pt; margin: 1mm 0 1.5mm; color: var(--accent); }
h2 { font-size: 12pt; color: var(--accent); border-bottom: .6pt solid var(--rule);
     padding-bottom: 1mm; margin: 7mm 0 2.5mm; break-after: avoid; }
h3 { font-size: 10pt; margin: 4mm 0 1mm; break-after: avoid; }
p { margin: 1mm 0 2mm; }
.meta { color: var(--muted); font-size: 8.5pt; margin: 0; }
.caution { border: 1pt solid var(--warn); border-left: 4pt solid var(--warn); background: #fbf4ec;
           padding: 2mm 3mm; margin: 3mm 0; font-size: 9pt; break-inside: avoid; }
.glance { display: grid; grid-template-columns: repeat(2, 1fr); gap: 2.5mm; margin: 3mm 0; }
.glance div { border: .6pt solid var(--rule); border-top: 2.5pt solid var(--accent);
              padding: 2mm 3mm; break-inside: avoid; }
.glance .big { font-size: 13pt; font-weight: bold; color: var(--accent); }
.glance .small { font-size: 8.5pt; color: var(--muted); }
table { border-collapse: collapse; width: 100%; margin: 1.5mm 0 3mm; font-size: 8.6pt;
        font-variant-numeric: tabular-nums; }
th, td { padding: .9mm 1.6mm; border-bottom: .5pt solid var(--rule); vertical-align: top; }
th { background: var(--head); text-align: left; font-weight: 600; border-bottom: .9pt solid
     var(--accent); vertical-align: bottom; }
td.num, th.num { text-align: right; }
td.num { white-space: nowrap; }
tr.highlight td { font-weight: bold; }
td.best { color: var(--best); font-weight: bold; }
table.results td:first-child { white-space: nowrap; }
table.results th, table.results td { padding: .9mm 1.2mm; }
td.flag { color: var(--warn); font-weight: bold; }
table.kv th { width: 32%; background: none; border-bottom: .5pt solid var(--rule);
              font-weight: 600; color: var(--muted); vertical-align: top; }
table.small { width: auto; font-size: 8pt; }
table.small td, table.small th { padding: .6mm 2mm; }
.schedule { break-inside: avoid; margin-bottom: 4mm; }
.schedule .what { font-size: 9pt; }
.schedule .cond { font-size: 8pt; color: var(--muted); }
.tag { display: inline-block; font-size: 7.5pt; padding: 0 1.5mm; border-radius: 1mm;
       background: var(--accent); color: #fff; vertical-align: middle; margin-left: 1.5mm;
       font-weight: normal; }
.tag.optimum { background: var(--muted); }
ul.notes { margin: 1mm 0 3mm; padding-left: 5mm; font-size: 8.8pt; }
ul.notes li { margin: .6mm 0; }
ul.notes.detail { font-size: 7.8pt; color: #3b4a52; }
ul.notes.flagged li { color: var(--warn); }
.who { color: var(--muted); font-size: 8pt; }
figure { margin: 3mm 0 5mm; break-inside: avoid; text-align: center; }
figure svg, figure img { width: 100%; height: auto; max-height: 235mm; }
figcaption { font-size: 8.6pt; color: var(--muted); text-align: left; margin-top: 1mm; }
footer { margin-top: 8mm; border-top: .6pt solid var(--rule); padding-top: 2mm; font-size: 8pt;
         color: var(--muted); }
table.office th.grp { text-align: center; border-left: .6pt solid var(--rule); }
table.office tbody th { background: none; border-bottom: .5pt solid var(--rule);
                        white-space: nowrap; }
table.office td:nth-child(3n+2) { border-left: .6pt solid var(--rule); }
nav.toc { font-size: 8.6pt; margin: 2mm 0; }
nav.toc ul { list-style: none; padding: 0; margin: 0; columns: 2; }
nav.toc a { color: var(--accent); text-decoration: none; }
@page { size: A4; margin: 14mm 12mm 16mm; }
@media print {
  html { background: none; }
  main { max-width: none; margin: 0; padding: 0; box-shadow: none; }
  h2 { break-before: auto; }
  section.figures { break-before: page; }
  table.keep, div.glance { break-inside: avoid; }
  a { color: inherit; text-decoration: none; }
  thead { display: table-header-group; }
  tr { break-inside: avoid; }
}
"""


def esc(text) -> str:
    """``text`` escaped for HTML (None as "-")."""
    return html.escape("-" if text is None else str(text), quote=True)


_NUMERIC = re.compile(r"^[-+]?[\d,]*\.?\d+( ?%)?$|^[-+]?\d+:\d\d$|^best$|^not ranked$|^-$")


def table(header, rows, *, css: str = "", numeric=None, cell_class=None,
          row_class=None) -> str:
    """An HTML table. ``numeric``: indices of right-aligned columns (default: every column
    whose cells all look like numbers); ``cell_class(i, j, text)`` and ``row_class(i)`` may
    add CSS classes to a cell or a row."""
    if numeric is None:
        numeric = {j for j in range(len(header))
                   if rows and all(_NUMERIC.match(str(r[j]).strip()) for r in rows)}
    head = "".join(f'<th class="num">{esc(h)}</th>' if j in numeric else f"<th>{esc(h)}</th>"
                   for j, h in enumerate(header))
    body = []
    for i, r in enumerate(rows):
        cells = []
        for j, c in enumerate(r):
            extra = cell_class(i, j, str(c)) if cell_class else ""
            classes = (["num"] if j in numeric else []) + ([extra] if extra else [])
            attr = f' class="{" ".join(classes)}"' if classes else ""
            cells.append(f"<td{attr}>{esc(c)}</td>")
        rc = row_class(i) if row_class else ""
        tr = f'<tr class="{rc}">' if rc else "<tr>"
        body.append(f"{tr}{''.join(cells)}</tr>")
    css = " ".join(c for c in (css, "keep" if len(rows) <= 12 else "") if c)
    cls = f' class="{css}"' if css else ""
    return f"<table{cls}><thead><tr>{head}</tr></thead><tbody>{''.join(body)}</tbody></table>"


def svg_inline(svg_text: str) -> str:
    """An SVG document (as matplotlib writes it) ready to sit inside HTML: no XML declaration
    or DOCTYPE, scaled to the page width through its view box."""
    text = re.sub(r"<\?xml[^>]*\?>|<!DOCTYPE[^>]*>", "", svg_text, flags=re.S).strip()
    return re.sub(r'<svg([^>]*?)\swidth="[^"]*"\s+height="[^"]*"', r'<svg\1', text, count=1)


def page(title: str, kicker: str, meta: str, sections: list[tuple[str, str, str]]) -> str:
    """A whole page: title block, the caution, a contents list, ``sections`` (id, heading,
    HTML body) numbered in order, and a footer with the caution again."""
    toc = "".join(f'<li><a href="#{sid}">{k}. {esc(h)}</a></li>'
                  for k, (sid, h, _) in enumerate(sections, 1))  # numbered by hand (print)
    parts = [f'<section id="{sid}" class="{sid}"><h2>{k}. {esc(h)}</h2>{body}</section>'
             for k, (sid, h, body) in enumerate(sections, 1)]
    written = datetime.date.today().isoformat()
    return (
        '<!DOCTYPE html>\n<html lang="en"><head><meta charset="utf-8">'
        '<meta name="viewport" content="width=device-width, initial-scale=1">'
        f"<title>{esc(title)}</title><style>{STYLE}</style></head><body><main>"
        f'<header class="title"><div class="kicker">{esc(kicker)}</div><h1>{esc(title)}</h1>'
        f'<p class="meta">{meta}</p></header>'
        f'<aside class="caution" role="note"><strong>Caution.</strong> {esc(CAUTION)}</aside>'
        f'<nav class="toc"><ul>{toc}</ul></nav>' + "".join(parts) +
        f"<footer><p><strong>Caution.</strong> {esc(CAUTION)}</p><p>Written by climbopt "
        f"{esc(__version__)} on {written}. Every number is an engineering estimate from the "
        "scenario's invented or supplied data.</p></footer></main></body></html>\n")


# ---------------------------------------------------------------------------------------------
# the run report


def _glance(records, flown, units) -> str:
    """The boxes at the top: the least time and the least fuel among ranked rows, and the best
    flown schedule of each objective with its penalty."""
    from climbopt import report
    from climbopt.units import format_min_s

    m_u = report.unit_label("mass", units)
    d_u = report.unit_label("distance", units)
    boxes = []
    for flag, words in (("best_time", "least time"), ("best_fuel", "least fuel")):
        rec = next((r for r in records if r.get(flag)), None)
        if rec is None:
            continue
        disp = report.display_record(rec, units)
        to_cp = disp.get(f"fuel to common point [{m_u}]")
        if to_cp is not None and flag == "best_fuel":
            # the fuel ranking uses the fuel to the common point: that figure comes first
            boxes.append(
                f'<div><span class="small">least fuel to the common point: '
                f'{esc(rec["label"])}</span><br><span class="big">{to_cp:,.0f}</span>&nbsp;'
                f'{esc(m_u)} &nbsp; <span class="big">'
                f'{esc(format_min_s(disp["time to common point [s]"]))}</span> min:s<br>'
                f'climb: {disp[f"fuel [{m_u}]"]:,.0f}&nbsp;{esc(m_u)}, '
                f'{esc(format_min_s(rec["time_s"]))} min:s, '
                f'{disp[f"distance [{d_u}]"]:,.1f}&nbsp;{esc(d_u)}</div>')
            continue
        cp = "" if to_cp is None else f"<br>{to_cp:,.0f}&nbsp;{esc(m_u)} to the common point"
        fuel = disp[f"fuel [{m_u}]"]
        boxes.append(
            f'<div><span class="small">{esc(words)}: {esc(rec["label"])}</span><br>'
            f'<span class="big">{esc(format_min_s(rec["time_s"]))}</span> min:s '
            f'({rec["time_s"]:,.1f} s) &nbsp; <span class="big">{fuel:,.0f}'
            f'</span>&nbsp;{esc(m_u)} &nbsp; {disp[f"distance [{d_u}]"]:,.1f}&nbsp;{esc(d_u)}'
            f'{cp}</div>')
    for rec in flown:
        if rec["kind"] != "best" or rec["penalty_pct"] is None:
            continue
        name = rec["label"]
        boxes.append(
            f'<div><span class="small">{esc(name)}</span><br><span class="big">'
            f'{esc(rec["what"].split(":")[0].replace("schedule ", ""))}</span> &nbsp; '
            f'penalty {rec["penalty_pct"]:+.2f} %<br><span class="small">against the '
            f'{esc(rec["against"])}</span></div>')
    return f'<div class="glance">{"".join(boxes)}</div>' if boxes else ""


def _comparison_section(records, flown, units, common_text: str = "") -> str:
    from climbopt import report

    columns = report.comparison_columns(units, any("common_point_distance_m" in r
                                                   for r in records))
    header, rows = report.comparison_cells(records, units, columns)

    def best(i, j, text):
        return "best" if text == "best" else ("flag" if text == "not ranked" else "")

    body = [_glance(records, flown, units),
            "<p>Time, fuel and ground distance from the start to the end of the mission; "
            "differences are to the least time and the least fuel among the ranked rows "
            "(converged, verified, within the fuel capacity)"
            + ("; the fuel ranking uses the fuel to the common downrange point, see below"
               if common_text else "") + ".</p>",
            table(header, rows, css="results", cell_class=best)]
    if common_text:
        body.append('<ul class="notes">' + "".join(f"<li>{esc(line.strip())}</li>"
                                                   for line in common_text.splitlines()) + "</ul>")
    header, rows = report.comparison_cells(records, units, report.DIAGNOSTIC_COLUMNS)
    body += ["<h3>Solver diagnostics</h3>",
             table(header, rows, css="small",
                   cell_class=lambda i, j, t: "flag" if t == "NO" or "FAILED" in t else "")]
    legend = report.comparison_legend(records)
    if legend:
        body.append('<ul class="notes">' + "".join(f"<li>{esc(x)}</li>" for x in legend)
                    + "</ul>")
    return "".join(body)


def _flown_section(flown, units) -> str:
    """The flown schedules and what each costs, as a table."""
    if not flown:
        return ""
    from climbopt import report

    m_u = report.unit_label("mass", units)
    rows = []
    for rec in flown:
        if rec["against"] is None:
            cost = ["-", "-", "-"]
        else:
            cost = [f"{rec['time_diff_s']:+,.1f} s, {rec['time_diff_pct']:+.2f} %",
                    f"{rec['fuel_diff']:+,.1f} {m_u}, {rec['fuel_diff_pct']:+.2f} %",
                    rec["against"]]
        rows.append([rec["label"], rec["what"], *cost])
    return ("<p>What crews fly: the best constant-CAS/Mach schedule of each objective and the "
            "scenario's own schedules, each against its reference.</p>"
            + table(["schedule", "what is flown", "time", "fuel", "against"], rows,
                    numeric={2, 3}))


def _schedule_block(schedule, units) -> str:
    from climbopt import schedule as sch

    header, rows = sch.schedule_records(schedule, units)
    mach = header.index("Mach")
    cells = [[f"{v:.2f}" if j == mach else sch_cell(v) for j, v in enumerate(r)] for r in rows]
    tag = ('<span class="tag">flown</span>' if schedule.flown
           else '<span class="tag optimum">optimum</span>')
    notes = "".join(f"<li>{esc(n)}</li>" for n in schedule.notes)
    toc_i = [i for i, r in enumerate(rows) if r[-1] == "top of climb"]
    return (f'<div class="schedule"><h3>{esc(sch.schedule_title(schedule))}{tag}</h3>'
            f'<p class="what">{esc(sch.schedule_summary(schedule, units))}</p>'
            f'<p class="cond">{esc(sch.conditions_text(schedule, units))}</p>'
            + table(header, cells, numeric={0, 2, 3, 4, 5, 6, 7, 8, 9},
                    row_class=lambda i: "highlight" if i in toc_i else "")
            + (f'<ul class="notes">{notes}</ul>' if notes else "") + "</div>")


def sch_cell(v) -> str:
    """Display text of a schedule cell (thousands separators from 1,000 on)."""
    if isinstance(v, bool) or not isinstance(v, (int, float)):
        return str(v)
    if abs(v) >= 1000:
        return f"{v:,}" if isinstance(v, int) else f"{v:,.{len(repr(v).split('.')[-1])}f}"
    return repr(v) if isinstance(v, float) else str(v)


#: Words that make a result's note one of the key notes (zooms, limits ridden, checks).
KEY_NOTE_WORDS = ("zoom", "rides", "re-simulation", "not ranked", "exceeds", "FAILED",
                  "descends", "overshoot")


def _note_items(notes: dict) -> str:
    return "".join(f"<li>{esc(n)} <span class=\"who\">({esc('; '.join(who))})</span></li>"
                   for n, who in notes.items())


def _notes_section(records, errors, warnings) -> str:
    """The notes of every result, each note once with the results it belongs to: first the
    issues (unranked rows, errors, warnings), then the key notes (zooms, limits ridden,
    re-simulation checks), then the method and solver details in small print."""
    key: dict[str, list[str]] = {}
    detail: dict[str, list[str]] = {}
    issues: dict[str, list[str]] = {}
    for rec in records:
        items = list(rec.get("notes") or [])
        v = rec.get("verification")
        if v:
            items.append(f"re-simulation check {'passed' if v.get('ok') else 'FAILED'}: "
                         f"{v.get('message', '')}")
        for i in rec.get("issues") or []:
            issues.setdefault(f"not ranked: {i}", []).append(rec["label"])
        for n in items:
            where = key if any(w in n for w in KEY_NOTE_WORDS) else detail
            where.setdefault(n, []).append(rec["label"])
    out = []
    flagged = _note_items(issues) + "".join(f"<li>error: {esc(e)}</li>" for e in errors) \
        + "".join(f"<li>warning: {esc(w)}</li>" for w in warnings)
    if flagged:
        out.append(f'<h3>Issues</h3><ul class="notes flagged">{flagged}</ul>')
    if key:
        out.append("<h3>Zooms, limits ridden and checks</h3>"
                   f'<ul class="notes">{_note_items(key)}</ul>')
    if detail:
        out.append("<h3>Method and solver details</h3>"
                   f'<ul class="notes detail">{_note_items(detail)}</ul>')
    return "".join(out) or "<p>No notes.</p>"


def figures_html(figures) -> str:
    """Numbered figures with their captions: ``figures`` are ``(title, caption, drawing)``
    triples, the drawing an SVG document (text, inlined) or a PNG file's bytes (embedded as a
    data URI); "Figure k. Title. Caption." under each."""
    import base64

    out = []
    for k, (title, caption, drawing) in enumerate(figures, 1):
        if isinstance(drawing, bytes):
            data = base64.b64encode(drawing).decode("ascii")
            body = f'<img src="data:image/png;base64,{data}" alt="{esc(title)}">'
        else:
            body = svg_inline(drawing)
        out.append(f"<figure>{body}<figcaption><strong>Figure {k}.</strong> "
                   f"{esc(title)}. {esc(caption)}</figcaption></figure>")
    return "".join(out) or "<p>No figures (no result carries a path).</p>"


def run_report(*, scenario, units: str, records, flown, schedules, procedure_costs, figures,
               errors=(), warnings=(), common_point: str = "") -> str:
    """The ``report.html`` page of a run.

    ``records``: :func:`climbopt.report.comparison`; ``flown``:
    :func:`climbopt.report.flown_schedule_records`; ``schedules``: the crew schedules in the
    order to show (flown first); ``procedure_costs``: :class:`climbopt.pipeline.ProcedureCost`
    list; ``figures``: ``(title, caption, drawing)`` triples (see :func:`figures_html`);
    ``common_point``: the text of :func:`climbopt.report.format_common_point` ("" without a
    common downrange point).
    """
    from climbopt import report

    sections = [("conditions", "Conditions", conditions_table(scenario, units)),
                ("comparison", "Comparison of the results",
                 _comparison_section(records, flown, units, common_point))]
    if flown:
        sections.append(("flown", "Flown schedules and their cost", _flown_section(flown, units)))
    sections.append(("schedules", "Climb schedules",
                     "".join(_schedule_block(s, units) for s in schedules)
                     or "<p>No ranked result to tabulate.</p>"))
    if procedure_costs:
        header, rows = report.procedure_cost_rows(procedure_costs, units)
        sections.append((
            "procedure", "Cost of the procedure profile",
            "<p>Energy-state solutions of the same mission with the procedure profile "
            "(altitude never decreasing, between the start and target altitudes) and with the "
            "free profile (dives and overshoots allowed).</p>" + table(header, rows)))
    sections += [("figures", "Figures", figures_html(figures)),
                 ("notes", "Notes", _notes_section(records, errors, warnings))]
    meta = (f"climbopt {esc(__version__)} &middot; scenario file {esc(scenario.source_path)} "
            f"&middot; units {esc(report.units_words(units))}")
    return page(scenario.name, "Climb performance report", meta, sections)


def conditions_table(scenario, units: str) -> str:
    """The scenario's conditions as a two-column table, in ``units``."""
    from climbopt import report

    def q(kind, v, digits=0):
        return "none" if v is None else report.quantity_text(kind, v, units, f",.{digits}f")

    def point(p):
        speed = (f"Mach {p.speed_value:.3f}" if p.speed_kind == "mach"
                 else f"{p.speed_kind.upper()} {q('airspeed', p.speed_value)}")
        return f"{q('altitude', p.altitude_m)}, {speed}"

    ac, m, lim = scenario.aircraft, scenario.mission, scenario.limits
    rows = [("aircraft", ac.name), ("start mass", q("mass", ac.mass_kg)),
            ("fuel capacity", q("mass", ac.fuel_capacity_kg)),
            ("temperature", f"ISA {scenario.atmosphere.temperature_offset_k:+g} K"),
            ("engine rating", m.rating or scenario.propulsion.default_rating),
            ("thrust scale", f"{scenario.propulsion.thrust_scale:g}"),
            ("climb profile", f"{m.profile} (acceleration share {m.acceleration_share:g})"),
            ("start", point(m.start)), ("target", point(m.target))]
    if m.dash_distance_m is not None:
        rows.append(("dash to", q("distance", m.dash_distance_m, 1) + " from the start"))
    rows += [("maximum CAS", q("airspeed", lim.max_cas_m_s)),
             ("maximum Mach", "none" if lim.max_mach is None else f"{lim.max_mach:.2f}"),
             ("maximum dynamic pressure", q("pressure", lim.max_dynamic_pressure_pa)),
             ("altitude range", f"{q('altitude', lim.min_altitude_m)} to "
                                f"{q('altitude', lim.max_altitude_m)}"),
             ("maximum load factor", f"{lim.max_load_factor:g}")]
    if lim.cas_restriction is not None:
        rows.append(("speed restriction", f"{q('airspeed', lim.cas_restriction[0])} below "
                                          f"{q('altitude', lim.cas_restriction[1])}"))
    if getattr(lim, "buffet_load_factor", None):
        rows.append(("buffet margin", f"{lim.buffet_load_factor:g} g (CL at most CLmax / "
                                      f"{lim.buffet_load_factor:g})"))
    extras = (("wind", report.wind_text(getattr(scenario.atmosphere, "wind", None), units)),
              ("rating schedule", report.rating_schedule_text(
                  getattr(m, "rating_schedule", ()), units)))
    rows[5:5] = [(k, v.split(" ", 1)[1] if k == "wind" else v.replace("rating schedule ", ""))
                 for k, v in extras if v]
    if scenario.description:
        rows.insert(0, ("scenario", scenario.description))
    body = "".join(f"<tr><th>{esc(k)}</th><td>{esc(v)}</td></tr>" for k, v in rows)
    return f'<table class="kv"><tbody>{body}</tbody></table>'
