"""Office tables: a sweep pivoted into time, fuel and distance to climb by mass x temperature
deviation x target altitude, as a performance office publishes them.

:func:`office_table` arranges the rows of a sweep table (:func:`climbopt.sweep.read_table`) on
the three axes; an input the sweep did not vary takes the scenario's value (one row, column or
block). Inputs varied besides these three (thrust scale, target speed, cost weight) give one
block of tables per value combination. Only cases with the sweep's main objective are used.

:func:`write_office_tables` writes ``climb_table.csv`` (one row per target altitude, mass and
quantity, one column per temperature deviation, rounded as the docs state), ``climb_table.md``
and ``climb_table.html`` (a page in the style of ``report.html``), all in the chosen units.

A sweep solves optima (energy-state or collocation, one objective); with ``--schedules`` it
also flies each case's best constant CAS/Mach schedule, and the tables then give its speeds
for every cell (restriction CAS / climb CAS [kt] / Mach, as crews write them). Without, they
say that no schedule was flown. Nothing here computes physics.
"""

from __future__ import annotations

import itertools
import math
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from climbopt import CAUTION, __version__

__all__ = ["OfficeTable", "office_table", "write_office_tables", "QUANTITIES"]

#: The three axes: (sweep parameter name, table column of the sweep).
AXES = (("target_altitude", "target_altitude_m"), ("mass", "mass_kg"),
        ("temperature_offset", "temperature_offset_k"))

#: Quantities of each cell: (key, words, kind of display unit).
QUANTITIES = (("time_s", "time", "time"), ("fuel_kg", "fuel", "mass"),
              ("distance_m", "distance", "distance"))

#: What the tables say about schedule speeds.
NO_SCHEDULES = ("This sweep solved optima only ({method}, minimum {objective}); it flew no "
                "climb schedule, so no schedule speeds are given. Fly a case with climbopt run "
                "(or sweep with --schedules) for its crew schedule.")
SCHEDULES = ("Schedule: for each case the best constant CAS/Mach schedule for minimum "
             "{objective} (restriction CAS / climb CAS [kt] / Mach, rounded as flown), flown "
             "through the model; the times, fuel and distances in the tables are the {method} "
             "optimum's, the schedule's own figures and its penalty are in sweep.csv.")
SCHEDULE_WORDS = "schedule (restriction CAS / climb CAS [kt] / Mach)"


@dataclass(frozen=True)
class OfficeTable:
    """A sweep on the axes target altitude [m] x mass [kg] x temperature deviation [K].

    ``groups``: one ``((name, SI value), ...)`` tuple per combination of the other varied
    inputs (a single empty tuple when there are none). ``values[key]``: array of shape
    (groups, altitudes, masses, temperature deviations) for each key of :data:`QUANTITIES`,
    NaN where the case failed or is missing; ``status``: the same shape, the case status ("ok",
    "infeasible", ..., or "missing"); ``schedules``: the same shape, each case's best schedule
    name ("" where none), or None when the sweep flew no schedules.
    """

    scenario_name: str
    method: str
    objective: str
    target_altitudes_m: tuple[float, ...]
    masses_kg: tuple[float, ...]
    temperature_offsets_k: tuple[float, ...]
    groups: tuple[tuple[tuple[str, float], ...], ...]
    values: dict
    status: np.ndarray
    schedules: np.ndarray | None = None  # best schedule names, same shape (None: not flown)

    @property
    def shape(self) -> tuple[int, int, int, int]:
        return self.status.shape


def _axis_values(plan, name: str, base: float) -> tuple[float, ...]:
    for v in plan.variations:
        if v.name == name:
            return tuple(sorted(v.values))
    return (float(base),)


def office_table(plan, rows: list[dict]) -> OfficeTable:
    """Arrange the rows of the sweep ``plan`` (its cases with the main objective) on the axes
    target altitude x mass x temperature deviation (see the module docstring)."""
    from climbopt.sweep import METHODS

    sc = plan.scenario
    base = {"target_altitude": sc.mission.target.altitude_m, "mass": sc.aircraft.mass_kg,
            "temperature_offset": sc.atmosphere.temperature_offset_k}
    axes = [_axis_values(plan, name, base[name]) for name, _ in AXES]
    axis_names = {name for name, _ in AXES}
    others = [v for v in plan.variations if v.name not in axis_names]
    groups = [tuple(zip([v.name for v in others], combo))
              for combo in itertools.product(*(v.values for v in others))] or [()]
    shape = (len(groups), *(len(a) for a in axes))
    values = {key: np.full(shape, np.nan) for key, _, _ in QUANTITIES}
    status = np.full(shape, "missing", dtype=object)
    schedules = np.full(shape, "", dtype=object) if getattr(plan, "schedules", False) else None
    by_key = {r["key"]: r for r in rows}
    for case in plan.cases:
        if case.objective != plan.objective or case.key not in by_key:
            continue
        given = dict(case.values)
        point = [a.index(given.get(name, base[name])) for (name, _), a in zip(AXES, axes)]
        group = tuple((v.name, given[v.name]) for v in others)
        if group not in groups:  # zipped sweeps: a combination off the grid
            continue
        at = (groups.index(group), *point)
        row = by_key[case.key]
        status[at] = row["status"]
        if row["status"] == "ok":
            for key, _, _ in QUANTITIES:
                values[key][at] = row[key]
            if schedules is not None:
                schedules[at] = row.get("schedule", "")
    return OfficeTable(sc.name, METHODS[plan.method], plan.objective, *map(tuple, axes),
                       tuple(groups), values, status, schedules)


# ---------------------------------------------------------------------------------------------
# labels in display units


def level_text(altitude_m: float, units: str) -> str:
    """A target altitude as crews name it: "FL350" in feet-based units when it is a whole
    hundred feet, else the altitude in the display unit ("10,668 m")."""
    from climbopt.report import to_display

    value, unit = to_display("altitude", altitude_m, units)
    if unit == "ft" and abs(value / 100.0 - round(value / 100.0)) < 1e-6:
        return f"FL{round(value / 100.0):03d}"
    return f"{value:,.0f} {unit}"


def isa_text(offset_k: float) -> str:
    """"ISA +10 K", "ISA -5 K", "ISA +0 K"."""
    return f"ISA {offset_k:+g} K"


def _group_text(group, plan) -> str:
    from climbopt.sweep import parameters

    params = parameters(plan.scenario)
    parts = []
    for name, value in group:
        p = params[name]
        parts.append(f"{p.label} {value:g} {p.si_unit}".strip())
    return ", ".join(parts)


def _mass_text(mass_kg: float, units: str) -> str:
    from climbopt.report import quantity_text

    return quantity_text("mass", mass_kg, units)


def _cell_numbers(table: OfficeTable, units: str, at) -> tuple[str, str, str] | None:
    """(time min:s, fuel, distance) texts of one cell, or None when it has no result."""
    from climbopt.report import to_display
    from climbopt.units import format_min_s

    t = table.values["time_s"][at]
    if not math.isfinite(t):
        return None
    fuel = to_display("mass", table.values["fuel_kg"][at], units)[0]
    dist = to_display("distance", table.values["distance_m"][at], units)[0]
    return format_min_s(t), f"{fuel:,.0f}", f"{dist:,.1f}"


# ---------------------------------------------------------------------------------------------
# writers


def _varied_text(table: OfficeTable, units: str) -> str:
    """What the sweep varied on the table's axes, in display units."""
    def span(values, fmt):
        shown = [fmt(v) for v in values]
        return shown[0] if len(shown) == 1 else f"{', '.join(shown)} ({len(shown)} values)"

    return (f"target altitude {span(table.target_altitudes_m, lambda v: level_text(v, units))}; "
            f"mass {span(table.masses_kg, lambda v: _mass_text(v, units))}; temperature "
            f"{span(table.temperature_offsets_k, isa_text)}")


def _conditions_lines(plan, table: OfficeTable, units: str, html: bool = False) -> list[str]:
    """The base conditions (not in HTML, which has the conditions table), what the sweep
    varied, and that it flew no schedules."""
    from climbopt.report import format_conditions
    from climbopt.schedule import conditions_of

    base = [] if html else [format_conditions(conditions_of(plan.scenario), units)
                            + " (base scenario)"]
    words = NO_SCHEDULES if table.schedules is None else SCHEDULES
    return base + [f"varied: {_varied_text(table, units)}",
                   words.format(method=plan_method(plan), objective=plan.objective)]


def plan_method(plan) -> str:
    from climbopt.sweep import METHODS

    return METHODS[plan.method]


def csv_rows(table: OfficeTable, plan, units: str) -> tuple[list[str], list[list]]:
    """Header and rows of ``climb_table.csv``: the other varied inputs (if any), target
    altitude, mass, quantity, then one column per temperature deviation; numbers rounded as
    :data:`climbopt.units.UNIT_DIGITS` states (time also as min:s)."""
    from climbopt.report import rounded, unit_label
    from climbopt.units import format_min_s

    others = [name for name, _ in table.groups[0]]
    alt_u, m_u = unit_label("altitude", units), unit_label("mass", units)
    header = others + [f"target altitude [{alt_u}]", "flight level" if alt_u == "ft" else "level",
                       f"mass [{m_u}]", "quantity"] + [isa_text(d) for d in
                                                       table.temperature_offsets_k]
    quantities = [("time_s", "time [s]", "time"), ("time_s", "time [min:s]", None),
                  ("fuel_kg", f"fuel [{m_u}]", "mass"),
                  ("distance_m", f"distance [{unit_label('distance', units)}]", "distance")]
    rows = []
    for g, group in enumerate(table.groups):
        for i, alt in enumerate(table.target_altitudes_m):
            for j, mass in enumerate(table.masses_kg):
                lead = [v for _, v in group] + [rounded("altitude", alt, units),
                                                level_text(alt, units),
                                                rounded("mass", mass, units)]
                for key, words, kind in quantities:
                    cells = table.values[key][g, i, j, :]
                    if kind is None:
                        shown = [format_min_s(v) if math.isfinite(v) else "" for v in cells]
                    else:
                        shown = [rounded(kind, float(v), units) if math.isfinite(v) else None
                                 for v in cells]
                    rows.append(lead + [words] + shown)
                if table.schedules is not None:
                    rows.append(lead + [SCHEDULE_WORDS] + list(table.schedules[g, i, j, :]))
    return header, rows


def markdown(table: OfficeTable, plan, units: str) -> str:
    """``climb_table.md``: per block and target altitude, a table of mass x temperature
    deviation with "time / fuel / distance" in each cell."""
    from climbopt.report import unit_label

    m_u, d_u = unit_label("mass", units), unit_label("distance", units)
    out = [f"# Time, fuel and distance to climb: {table.scenario_name}", "",
           f"climbopt {__version__}; {plan_method(plan)}, minimum {table.objective}; units "
           f"{units}. Each cell: time [min:s] / fuel [{m_u}] / distance [{d_u}] from the start.",
           ""] + [f"{line}  " for line in _conditions_lines(plan, table, units)] + [""]
    for g, group in enumerate(table.groups):
        if group:
            out += [f"## {_group_text(group, plan)}", ""]
        for i, alt in enumerate(table.target_altitudes_m):
            out += [f"### To {level_text(alt, units)}", "",
                    "| mass | " + " | ".join(isa_text(d) for d in table.temperature_offsets_k)
                    + " |", "|---" * (1 + len(table.temperature_offsets_k)) + "|"]
            for j, mass in enumerate(table.masses_kg):
                cells = []
                for k in range(len(table.temperature_offsets_k)):
                    nums = _cell_numbers(table, units, (g, i, j, k))
                    cells.append(" / ".join(nums) if nums else str(table.status[g, i, j, k]))
                out.append(f"| {_mass_text(mass, units)} | " + " | ".join(cells) + " |")
            out.append("")
            if table.schedules is not None:
                out += [f"Best constant {SCHEDULE_WORDS}:", "",
                        "| mass | " + " | ".join(isa_text(d) for d in
                                               table.temperature_offsets_k) + " |",
                        "|---" * (1 + len(table.temperature_offsets_k)) + "|"]
                out += [f"| {_mass_text(mass, units)} | "
                        + " | ".join(str(x) or "-" for x in table.schedules[g, i, j, :]) + " |"
                        for j, mass in enumerate(table.masses_kg)]
                out.append("")
    out += [f"> **Caution.** {CAUTION}", ""]
    return "\n".join(out)


def _html_block(table: OfficeTable, units: str, g: int, i: int) -> str:
    """One target altitude: mass rows, and per temperature deviation three columns."""
    from climbopt.htmlreport import esc
    from climbopt.report import unit_label

    m_u, d_u = unit_label("mass", units), unit_label("distance", units)
    n = len(table.temperature_offsets_k)
    head1 = '<th rowspan="2">mass</th>' + "".join(
        f'<th colspan="3" class="grp">{esc(isa_text(d))}</th>' for d in table.temperature_offsets_k)
    head2 = "".join(f'<th class="num">time [min:s]</th><th class="num">fuel [{esc(m_u)}]</th>'
                    f'<th class="num">dist. [{esc(d_u)}]</th>' for _ in range(n))
    body = []
    for j, mass in enumerate(table.masses_kg):
        cells = []
        for k in range(n):
            nums = _cell_numbers(table, units, (g, i, j, k))
            cells.append("".join(f'<td class="num">{esc(x)}</td>' for x in nums) if nums else
                         f'<td colspan="3" class="flag">{esc(table.status[g, i, j, k])}</td>')
        body.append(f"<tr><th>{esc(_mass_text(mass, units))}</th>{''.join(cells)}</tr>")
    if table.schedules is not None:
        body.append(f'<tr><th colspan="{1 + 3 * n}" class="grp">best constant '
                    f"{esc(SCHEDULE_WORDS)}</th></tr>")
        for j, mass in enumerate(table.masses_kg):
            cells = "".join(f'<td colspan="3" class="num">{esc(str(x) or "-")}</td>'
                            for x in table.schedules[g, i, j, :])
            body.append(f"<tr><th>{esc(_mass_text(mass, units))}</th>{cells}</tr>")
    return (f'<table class="office"><thead><tr>{head1}</tr><tr>{head2}</tr></thead>'
            f"<tbody>{''.join(body)}</tbody></table>")


def html_page(table: OfficeTable, plan, units: str) -> str:
    """``climb_table.html``: the office table as a page in the style of ``report.html``."""
    from climbopt import htmlreport
    from climbopt.report import units_words

    esc = htmlreport.esc
    intro = "".join(f"<p>{esc(line)}</p>" for line in _conditions_lines(plan, table, units, True))
    sections = [("conditions", "Conditions", htmlreport.conditions_table(plan.scenario, units)
                 + intro)]
    for g, group in enumerate(table.groups):
        blocks = "".join(f"<h3>To {esc(level_text(alt, units))}</h3>"
                         + _html_block(table, units, g, i)
                         for i, alt in enumerate(table.target_altitudes_m))
        title = "Time, fuel and distance to climb" + (
            f": {_group_text(group, plan)}" if group else "")
        sections.append((f"table{g + 1}", title, blocks))
    meta = (f"climbopt {esc(__version__)} &middot; {esc(plan_method(plan))}, minimum "
            f"{esc(table.objective)} &middot; units {esc(units_words(units))}")
    return htmlreport.page(table.scenario_name, "Climb tables from a sweep", meta, sections)


def write_office_tables(folder, plan, rows: list[dict], units: str) -> list[Path]:
    """Write ``climb_table.csv``, ``.md`` and ``.html`` into ``folder``; returns the paths."""
    from climbopt import report

    folder = Path(folder)
    table = office_table(plan, rows)
    header, body = csv_rows(table, plan, units)
    comments = report.header_lines(plan.scenario.name, units,
                                   f"time, fuel and distance to climb ({plan_method(plan)}, "
                                   f"minimum {table.objective})")
    comments[1:1] = [f"# {line}" for line in _conditions_lines(plan, table, units)]
    paths = [folder / f"climb_table.{ext}" for ext in ("csv", "md", "html")]
    report.write_csv(paths[0], comments, header, ([report.cell(v) for v in r] for r in body))
    report.write_text_atomic(paths[1], markdown(table, plan, units))
    report.write_text_atomic(paths[2], html_page(table, plan, units))
    return paths
