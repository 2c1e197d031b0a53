"""Reports: the comparison table of all results, ``summary.json``, ``comparison.csv``, the
per-point CSV and the climb-schedule CSV of each result, the lines that sum up a sweep, and
atomic output folders.

Values are SI inside; :data:`climbopt.units.DISPLAY_UNITS` says what each quantity is shown in
for each unit system (``"si"``, ``"us"``, ``"crew"``, ``"crew-lb"``) and
:data:`climbopt.units.UNIT_DIGITS` to how many decimals it is written. ``summary.json`` keeps
SI keys whatever the display units, so scripts can rely on it, and adds a ``display`` block in
the chosen units.
Nothing here prints; :mod:`climbopt.cli` decides what goes to the terminal.
"""

from __future__ import annotations

import contextlib
import csv
import dataclasses
import io
import json
import math
import os
import shutil
import tempfile
from pathlib import Path

import numpy as np

from climbopt import CAUTION, __version__
from climbopt.results import COLUMNS, Method, Result, Trajectory
from climbopt import units as _units

UNIT_SYSTEMS = _units.UNIT_SYSTEMS


# ------------------------------------------------------------------------------------------
# units for display (the table is climbopt.units.DISPLAY_UNITS)

#: Kind of quantity of each per-point column (see :data:`climbopt.results.COLUMNS`).
COLUMN_KINDS: dict[str, str] = {
    "time_s": "time",
    "altitude_m": "altitude",
    "tas_m_s": "speed",
    "mach": "none",
    "cas_m_s": "speed",
    "energy_height_m": "altitude",
    "ps_m_s": "rate",
    "flight_path_angle_rad": "angle",
    "mass_kg": "mass",
    "fuel_used_kg": "mass",
    "distance_m": "distance",
    "throttle": "none",
    "lift_coefficient": "none",
    "load_factor": "none",
    "dynamic_pressure_pa": "pressure",
    "thrust_n": "force",
}


def check_units(units: str) -> None:
    """Raise ``ValueError`` unless ``units`` is a unit system (:data:`UNIT_SYSTEMS`)."""
    _units.check_unit_system(units)


def unit_label(kind: str, units: str) -> str:
    """Display unit text of quantity ``kind`` in ``units``, "-" for a plain number."""
    return _units.display_unit(kind, units) or "-"


def to_display(kind: str, value_si, units: str):
    """Convert an SI value (float or array) of quantity ``kind`` to the display unit of
    ``units`` (:data:`climbopt.units.DISPLAY_UNITS`).

    Returns ``(value, unit_label)``; a plain number's label is "-". ``None`` stays ``None``.
    """
    unit = _units.display_unit(kind, units)
    if value_si is None:
        return None, unit or "-"
    return _units.from_si(value_si, unit), unit or "-"


def quantity_text(kind: str, value_si, units: str, fmt: str = ",.0f") -> str:
    """An SI value of quantity ``kind`` as text in the display unit of ``units``, e.g.
    "35,000 ft" (``fmt``: the number's format, default thousands separators, no decimals)."""
    value, unit = to_display(kind, value_si, units)
    return f"{value:{fmt}} {unit}"


def rounded(kind: str, value_si, units: str):
    """An SI value in the display unit of ``units``, rounded to the decimals stated for that
    unit (:data:`climbopt.units.UNIT_DIGITS`); None stays None."""
    value, unit = to_display(kind, value_si, units)
    return _units.round_display(value, "" if unit == "-" else unit)


def _unit_slug(unit: str) -> str:
    """``ft/min`` -> ``ft_per_min``, ``lbf/ft^2`` -> ``lbf_per_ft2``, ``km/h`` -> ``km_per_h``."""
    return unit.replace("/", "_per_").replace("^", "")


def column_header(key: str, units: str) -> str:
    """CSV header of a per-point column in ``units``: the quantity name with its unit, e.g.
    ``altitude_ft`` (``"us"``) or ``altitude_m`` (``"si"``, identical to :data:`COLUMNS`)."""
    check_units(units)
    if units == "si":
        return key
    stem = key
    for suffix in ("_m_s", "_rad", "_kg", "_pa", "_m", "_s"):
        if key.endswith(suffix):
            stem = key[: -len(suffix)]
            break
    label = _units.display_unit(COLUMN_KINDS[key], units)
    return f"{stem}_{_unit_slug(label)}" if label else stem


# ------------------------------------------------------------------------------------------
# comparison

def comparison(results: list[Result], common_point=None) -> list[dict]:
    """One record per result (SI), with the differences to the best ranked row.

    Each record holds the :meth:`Trajectory.summary` keys plus ``time_diff_pct`` and
    ``fuel_diff_pct`` (percent above the least time and least fuel among *ranked* rows --
    converged and free of issues; ``None`` for the others, which are never ranked),
    ``best_time`` / ``best_fuel`` flags, ``verification_miss`` (the re-simulation's final miss
    as a fraction of the final energy height, or None), ``label`` and ``has_trajectory``.

    With a ``common_point`` (:class:`climbopt.pipeline.CommonPoint`) every record also holds
    ``common_point_distance_m``, ``time_to_common_point_s`` and ``fuel_to_common_point_kg``, and
    the fuel ranking uses the fuel to the common point (the fair comparison when the ground
    distances differ).
    """
    records = []
    for r in results:
        if isinstance(r, Trajectory):
            rec = r.summary()
            rec["has_trajectory"] = True
            rec["verification_miss"] = (None if r.verification is None
                                        else r.verification.final_miss_relative)
        else:
            rec = {
                "method": str(r.method), "objective": str(r.objective), "name": r.name,
                "profile": "", "time_s": None, "fuel_kg": None, "distance_m": None,
                "final_mass_kg": None, "converged": False, "ranked": False, "status": r.status,
                "iterations": int(r.iterations), "wall_s": float(r.wall_s), "verification": None,
                "zooms": 0, "notes": list(r.notes), "issues": [r.message],
                "has_trajectory": False, "verification_miss": None,
            }
        rec["label"] = r.label
        records.append(rec)
    fuel_key = "fuel_kg"
    if common_point is not None and not common_point.unusable:
        fuel_key = "fuel_to_common_point_kg"
        for rec, t, f in zip(records, common_point.time_s, common_point.fuel_kg, strict=True):
            rec.update(common_point_distance_m=common_point.distance_m,
                       time_to_common_point_s=t, fuel_to_common_point_kg=f)
            if rec["ranked"] and f is None:
                rec["ranked"] = False
                rec["issues"] = list(rec["issues"]) + ["cannot reach the common point"]
    ranked = [rec for rec in records if rec["ranked"]]
    best_time = min((rec["time_s"] for rec in ranked), default=None)
    best_fuel = min((rec[fuel_key] for rec in ranked), default=None)
    for rec in records:
        if rec["ranked"]:
            rec["time_diff_pct"] = _pct(rec["time_s"], best_time)
            rec["fuel_diff_pct"] = _pct(rec[fuel_key], best_fuel)
            rec["best_time"] = rec["time_s"] == best_time
            rec["best_fuel"] = rec[fuel_key] == best_fuel
        else:
            rec["time_diff_pct"] = None
            rec["fuel_diff_pct"] = None
            rec["best_time"] = False
            rec["best_fuel"] = False
    return records


def _pct(value: float, best: float | None) -> float | None:
    if best is None or best == 0.0:
        return None
    return 100.0 * (value - best) / abs(best)


def _fmt(value, digits: int = 1) -> str:
    if value is None:
        return "-"
    if isinstance(value, float) and not math.isfinite(value):
        return "-"
    return f"{value:,.{digits}f}"


def comparison_columns(units: str, common: bool = False) -> list[tuple[str, str]]:
    """``(record key, header)`` pairs of the engineering figures of the comparison in
    ``units``: result, time (s and min:s), fuel, ground distance, with ``common`` the time and
    fuel to the common downrange point (the fuel ranking then uses), final mass, and the
    differences to the best ranked time and fuel."""
    m = unit_label("mass", units)
    d = unit_label("distance", units)
    extra = [("time_to_common_point_s", "time to common point [s]"),
             ("fuel_to_common_point_kg", f"fuel to common point [{m}]")] if common else []
    return [
        ("label", "result"), ("time_s", "time [s]"), ("time_min_s", "time [min:s]"),
        ("fuel_kg", f"fuel [{m}]"), ("distance_m", f"distance [{d}]"), *extra,
        ("final_mass_kg", f"final mass [{m}]"), ("time_diff_pct", "time vs best [%]"),
        ("fuel_diff_pct", "fuel vs best [%]"),
    ]


#: ``(record key, header)`` pairs of the solver diagnostics of the comparison.
DIAGNOSTIC_COLUMNS: list[tuple[str, str]] = [
    ("label", "result"), ("converged", "converged"), ("iterations", "iterations"),
    ("wall_s", "wall [s]"), ("verification_miss", "re-sim miss [%]"),
]


def all_columns(units: str, common: bool = False) -> list[tuple[str, str]]:
    """Engineering figures, then the solver diagnostics (the columns of ``comparison.csv``)."""
    return comparison_columns(units, common) + DIAGNOSTIC_COLUMNS[1:]


_KINDS = {"time_s": "time", "fuel_kg": "mass", "distance_m": "distance", "final_mass_kg": "mass",
          "time_to_common_point_s": "time", "fuel_to_common_point_kg": "mass"}


def _has_common(records) -> bool:
    return any("common_point_distance_m" in r for r in records)


def display_record(rec: dict, units: str) -> dict:
    """The comparison record in display units, keyed by the headers of :func:`all_columns`:
    numbers rounded to the stated decimals (:data:`climbopt.units.UNIT_DIGITS`; percentages
    to 0.01, the re-simulation miss to three significant digits, in %), the time also as
    min:s text."""
    out = {}
    for key, header in all_columns(units, "common_point_distance_m" in rec):
        value = rec.get(key)
        if key in _KINDS:
            value = rounded(_KINDS[key], value, units)
        elif key == "time_min_s":
            value = _units.format_min_s(rec.get("time_s")) if rec.get("time_s") is not None \
                else None
        elif key in ("time_diff_pct", "fuel_diff_pct"):
            value = _units.round_display(value, "%")
        elif key == "wall_s":
            value = None if value is None else round(float(value), 2)
        elif key == "verification_miss" and value is not None:
            value = float(f"{100.0 * value:.3g}")
        out[header] = value
    return out


def text_table(header: list[str], rows: list[list[str]], left=1) -> list[str]:
    """Aligned plain-text table: the first ``left`` columns (or the column indices in the set
    ``left``) left-aligned, the rest right-aligned, a rule under the header. A header
    "name [unit]" is wrapped to about 8 characters a line with the unit under the name, so that
    the columns stay narrow."""
    import textwrap

    heads = [h.split(" [", 1) for h in header]
    cols = [textwrap.wrap(h[0], 8, break_long_words=False) or [""] for h in heads]
    cols = [c + [f"[{h[1]}"] if len(h) > 1 else c for c, h in zip(cols, heads)]
    depth = max(len(c) for c in cols)
    cols = [[""] * (depth - len(c)) + c for c in cols]  # names sit on the rule
    lines = [[c[k] for c in cols] for k in range(depth)]
    widths = [max(len(r[i]) for r in [*lines, *rows]) for i in range(len(header))]
    lefts = set(left) if isinstance(left, (set, frozenset, list, tuple)) else set(range(left))
    out = []
    for j, r in enumerate([*lines, *rows]):
        out.append("  ".join(c.ljust(widths[i]) if i in lefts else c.rjust(widths[i])
                             for i, c in enumerate(r)).rstrip())
        if j == len(lines) - 1:
            out.append("  ".join("-" * w for w in widths))
    return out


def comparison_cells(records: list[dict], units: str, columns) -> tuple[list[str], list[list]]:
    """Header and display texts of the comparison (``columns``: :func:`comparison_columns` or
    :data:`DIAGNOSTIC_COLUMNS`): "best", "+0.3" or "not ranked" for the differences, "yes" /
    "NO" for convergence, "FAILED" beside a failed re-simulation check."""
    rows = []
    for rec in records:
        disp = display_record(rec, units)
        row = []
        for key, header in columns:
            v = disp[header]
            if key in ("label", "time_min_s"):
                row.append(str(v) if v is not None else "-")
            elif key == "converged":
                row.append("yes" if v else "NO")
            elif key == "iterations":
                row.append(str(v))
            elif key in ("time_diff_pct", "fuel_diff_pct"):
                if not rec["ranked"]:
                    row.append("not ranked")
                else:
                    best = rec["best_time"] if key == "time_diff_pct" else rec["best_fuel"]
                    row.append("best" if best else f"+{_fmt(v, 1)}")
            elif key == "verification_miss":
                flag = "" if (rec.get("verification") or {}).get("ok", True) else " FAILED"
                row.append(_fmt(v, 3) + flag)
            elif key == "wall_s":
                row.append(_fmt(v, 2))
            elif key == "distance_m":
                row.append(_fmt(v, 1))
            else:
                row.append(_fmt(v, 0 if key in ("fuel_kg", "final_mass_kg",
                                                "fuel_to_common_point_kg") else 1))
        rows.append(row)
    return [h for _, h in columns], rows


def comparison_legend(records: list[dict]) -> list[str]:
    """What NO, FAILED and "not ranked" mean, as far as the records use them."""
    text = []
    if any(not rec["converged"] for rec in records):
        text.append("NO = not converged: shown for information, never ranked as optimal.")
    if any(not (rec.get("verification") or {}).get("ok", True) for rec in records):
        text.append("FAILED = the re-simulation of the controls misses the path or breaks a "
                    "limit by more than the stated tolerance (see summary.json, verification).")
    for rec in records:
        if not rec["ranked"] and rec["issues"]:
            text.append(f"not ranked: {rec['label']}: {'; '.join(rec['issues'])}")
    return text


def format_table(records: list[dict], units: str = "si") -> str:
    """The comparison as aligned plain text: the engineering figures (time, fuel, distance,
    with a common downrange point the time and fuel to it ("CP"), final mass, differences to
    the best), then the solver diagnostics in a small table of their own, then what NO,
    FAILED and "not ranked" mean."""
    check_units(units)
    common = _has_common(records)
    header, rows = comparison_cells(records, units, comparison_columns(units, common))
    text = text_table([h.replace("common point", "CP") for h in header], rows)
    if common:
        text.append("CP = the common downrange point (see below); the fuel ranking uses the fuel "
                    "to it.")
    header, rows = comparison_cells(records, units, DIAGNOSTIC_COLUMNS)
    text += ["", "solver diagnostics:"] + text_table(header, rows)
    return "\n".join(text + comparison_legend(records))


# ------------------------------------------------------------------------------------------
# files

def result_stem(method: str, objective: str, name: str = "") -> str:
    """File-name stem of one result, e.g. ``energy-state_time``, ``best-schedule_fuel`` or
    ``schedule_250-290-M0.74`` (a named schedule: its name with anything but letters, digits,
    '.', '-' and '_' replaced by '-')."""
    if str(method) == str(Method.SCHEDULE):
        slug = "".join(c if (c.isascii() and (c.isalnum() or c in "._-")) else "-"
                       for c in name)[:60].strip("-.") or "unnamed"
        return f"schedule_{slug}"
    return f"{method}_{objective}".replace(" ", "-")


def units_words(units: str) -> str:
    """``"us (ft, kt, lb, nmi, ft/min)"``: a unit system with its main units."""
    main = [_units.display_unit(k, units) for k in ("altitude", "speed", "mass", "distance",
                                                     "rate")]
    return f"{units} ({', '.join(dict.fromkeys(main))})"


def header_lines(scenario_name: str, units: str, what: str, conditions=None) -> list[str]:
    """Comment lines at the top of every CSV: what it is, the scenario, the units, the
    conditions (:func:`format_conditions`, when given), the rounding and the caution."""
    out = [f"# climbopt {__version__}: {what}; scenario: {scenario_name}; units: "
           f"{units_words(units)}"]
    if conditions is not None:
        out.append(f"# {format_conditions(conditions, units)}")
    out += ["# numbers rounded per quantity (see the docs: CSV rounding)", f"# caution: {CAUTION}"]
    return out


def format_conditions(c, units: str) -> str:
    """The conditions a result was computed for, one line: mass, temperature deviation from
    ISA, rating, climb profile, target altitude and the limits (``c``:
    :class:`climbopt.schedule.Conditions`)."""
    def q(kind, v):
        return quantity_text(kind, v, units)

    limits = []
    if c.max_cas_m_s is not None:
        limits.append(f"CAS {q('airspeed', c.max_cas_m_s)}")
    if c.max_mach is not None:
        limits.append(f"Mach {c.max_mach:.2f}")
    if c.cas_restriction is not None:
        limits.append(f"{q('airspeed', c.cas_restriction[0])} below "
                      f"{q('altitude', c.cas_restriction[1])}")
    if c.max_altitude_m is not None:
        limits.append(f"altitude {q('altitude', c.min_altitude_m or 0.0)} to "
                      f"{q('altitude', c.max_altitude_m)}")
    if getattr(c, "buffet_load_factor", None):
        limits.append(f"buffet margin {c.buffet_load_factor:g} g")
    extra = "".join(f"; {x}" for x in (wind_text(getattr(c, "wind", None), units),
                                       rating_schedule_text(getattr(c, "rating_schedule", ()),
                                                            units)) if x)
    return (f"conditions: mass {q('mass', c.mass_kg)}, ISA {c.temperature_offset_k:+g} K, "
            f"rating {c.rating}, {c.profile} climb profile, target altitude "
            f"{q('altitude', c.target_altitude_m)}; limits: {', '.join(limits) or 'none'}{extra}")


def wind_text(wind, units: str) -> str:
    """The along-track wind in words ("" without wind): "wind -50 kt (headwind)", or the
    column "wind -10 kt at 0 ft, -40 kt at 20,000 ft" (negative: headwind)."""
    if wind is None:
        return ""
    if not wind.altitude_m:
        w = wind.along_track_m_s[0]
        return (f"wind {quantity_text('airspeed', w, units, '+,.0f')} "
                f"({'headwind' if w < 0 else 'tailwind' if w > 0 else 'calm'})")
    return "wind (negative: headwind) " + ", ".join(
        f"{quantity_text('airspeed', w, units, '+,.0f')} at {quantity_text('altitude', h, units)}"
        for h, w in zip(wind.altitude_m, wind.along_track_m_s))


def rating_schedule_text(steps, units: str) -> str:
    """A rating schedule in words ("" for a single rating): "rating max to 1,500 ft, then
    climb at 90 % thrust"."""
    if not steps:
        return ""
    parts = []
    for st in steps:
        derate = "" if st.thrust_fraction == 1.0 else f" at {100 * st.thrust_fraction:g} % thrust"
        until = "" if st.until_m is None else f" to {quantity_text('altitude', st.until_m, units)}"
        parts.append(f"{st.rating}{derate}{until}")
    return "rating schedule " + ", then ".join(parts)


def read_csv(path) -> tuple[list[str], list[list[str]]]:
    """Read a climbopt CSV (skipping ``#`` comment lines); returns ``(header, rows)``."""
    with open(path, newline="", encoding="utf-8") as fh:
        lines = [ln for ln in fh if not ln.startswith("#")]
    rows = list(csv.reader(lines))
    return rows[0], rows[1:]


def write_csv(path: Path, comments: list[str], header: list[str], rows) -> None:
    buf = io.StringIO()
    for c in comments:
        buf.write(c + "\n")
    w = csv.writer(buf, lineterminator="\n")
    w.writerow(header)
    for r in rows:
        w.writerow(r)
    Path(path).write_text(buf.getvalue(), encoding="utf-8")


def cell(v) -> str:
    """CSV text of a value (empty for None and NaN, true/false for booleans)."""
    if v is None:
        return ""
    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, float):
        return "" if not math.isfinite(v) else repr(round(v, 6))
    return str(v)


def write_trajectory_csv(path, trajectory: Trajectory, units: str = "si",
                         scenario_name: str = "", conditions=None) -> None:
    """Write the full per-point table of one trajectory (column order of :data:`COLUMNS`),
    each column rounded to the decimals of its display unit
    (:data:`climbopt.units.UNIT_DIGITS`). In SI every column is in the SI unit its header
    names (the ground distance in m, not km)."""
    check_units(units)
    header = [column_header(k, units) for k in COLUMNS]
    conv = []
    for k in COLUMNS:
        if units == "si":  # the SI headers are the keys: every column in its SI unit
            values, unit = np.asarray(trajectory.table[k]), COLUMNS[k]
        else:
            values, unit = to_display(COLUMN_KINDS[k], np.asarray(trajectory.table[k]), units)
        unit = "" if unit == "-" else unit
        conv.append([cell(_units.round_display(float(v), unit)) for v in values])
    label = f"{trajectory.method}, minimum {trajectory.objective}"
    if not trajectory.converged:
        label += " (NOT CONVERGED: not an optimum)"
    rows = ([col[i] for col in conv] for i in range(len(conv[0])))
    write_csv(Path(path), header_lines(scenario_name, units, label, conditions), header, rows)


def write_comparison_csv(path, records: list[dict], units: str = "si",
                         scenario_name: str = "", conditions=None) -> None:
    """Write the comparison as CSV in ``units``: engineering figures (with the time and fuel to
    the common downrange point when there is one), then the solver diagnostics
    (:func:`all_columns`), rounded as :func:`display_record` says."""
    cols = all_columns(units, _has_common(records))
    rows = []
    for rec in records:
        disp = display_record(rec, units)
        rows.append([cell(disp[h]) for _, h in cols])
    write_csv(Path(path), header_lines(scenario_name, units, "comparison", conditions),
              [h for _, h in cols], rows)


def flown_schedule_records(records: list[dict], schedule_lines: dict,
                           units: str = "si") -> list[dict]:
    """One record per flown schedule (the best schedule per objective, the scenario's own) in
    the comparison ``records``: ``label``, ``kind`` ("best" or "scenario"), ``what`` (the crew
    schedule's one-line summary from ``schedule_lines``, result stem -> text, or why it cannot
    be flown), ``against`` (the reference it is measured against: the optimum of the same
    objective for a best schedule, the best ranked rows of the run, to the common point when
    there is one, for the scenario's own), ``time_diff_s`` [s], ``time_diff_pct``,
    ``fuel_diff`` (display units), ``fuel_diff_pct``, ``penalty_pct`` (best schedules: in
    their objective), ``ranked`` and ``issues``; differences None where there is nothing to
    compare with."""
    fuel_key = "fuel_to_common_point_kg" if _has_common(records) else "fuel_kg"
    ranked = [r for r in records if r["ranked"]]
    best_t = min((r["time_s"] for r in ranked), default=None)
    best_f = min((r[fuel_key] for r in ranked), default=None)
    out = []
    for rec in records:
        if rec["method"] not in (Method.SCHEDULE, Method.BEST_SCHEDULE):
            continue
        row = {"label": rec["label"], "kind": "best" if rec["method"] == Method.BEST_SCHEDULE
               else "scenario", "against": None, "time_diff_s": None, "time_diff_pct": None,
               "fuel_diff": None, "fuel_diff_pct": None, "penalty_pct": None,
               "ranked": bool(rec["ranked"]), "objective": str(rec["objective"]),
               "issues": list(rec["issues"])}
        if not rec["has_trajectory"]:
            row["what"] = f"cannot be flown: {'; '.join(rec['issues'])}"
            out.append(row)
            continue
        name = rec.get("name", "")
        what = schedule_lines.get(result_stem(rec["method"], rec["objective"], name), name)
        if rec["method"] == Method.SCHEDULE and what.startswith(f"schedule {name}: "):
            what = what[len(f"schedule {name}: "):]
        row["what"] = what
        c = rec.get("reference")
        if c:
            row.update(against=c["reference"], time_diff_s=c["time_difference_s"],
                       time_diff_pct=_pct(rec["time_s"], c["time_s"]),
                       fuel_diff=to_display("mass", c["fuel_difference_kg"], units)[0],
                       fuel_diff_pct=_pct(rec["fuel_kg"], c["fuel_kg"]),
                       penalty_pct=100.0 * c["objective_difference_relative"])
        elif rec["ranked"] and best_t is not None:
            where = " to the common point" if fuel_key != "fuel_kg" else ""
            row.update(against=f"best of this run{where}", time_diff_s=rec["time_s"] - best_t,
                       time_diff_pct=rec["time_diff_pct"],
                       fuel_diff=to_display("mass", rec[fuel_key] - best_f, units)[0],
                       fuel_diff_pct=rec["fuel_diff_pct"])
        out.append(row)
    return out


def format_flown_schedules(records: list[dict], schedule_lines: dict, units: str = "si") -> str:
    """For each flown schedule (the best schedule per objective, the scenario's own) in the
    comparison ``records``: what is flown (``schedule_lines``: result stem -> the crew
    schedule's one-line summary) and its cost against the reference optimum of the same
    objective (best schedules) or against the best ranked rows of the run (the scenario's own
    schedules; to the common point when there is one); see :func:`flown_schedule_records`."""
    m_u = unit_label("mass", units)
    lines = []
    for rec in flown_schedule_records(records, schedule_lines, units):
        if rec["against"] is not None:
            cost = (f"; against the {rec['against']}: {rec['time_diff_s']:+,.1f} s "
                    f"({rec['time_diff_pct']:+.2f} %), {rec['fuel_diff']:+,.1f} {m_u} "
                    f"({rec['fuel_diff_pct']:+.2f} %)")
            if rec["penalty_pct"] is not None:
                cost += f", penalty {rec['penalty_pct']:+.2f} % in {rec['objective']}"
        elif rec["what"].startswith("cannot be flown"):
            cost = ""
        elif rec["issues"]:
            cost = f"; not ranked: {'; '.join(rec['issues'])}"
        else:
            cost = "; no ranked optimum to compare with"
        lines.append(f"{rec['label']}: {rec['what']}{cost}")
    return "\n".join(lines)


def procedure_cost_records(costs) -> list[dict]:
    """``summary.json`` records of what the procedure profile costs against the free optimum
    (:class:`climbopt.pipeline.ProcedureCost`; energy-state solutions, SI)."""
    return [{"objective": str(c.objective), "method": "energy-state",
             "free_time_s": c.free.time_s, "free_fuel_kg": c.free.fuel_kg,
             "procedure_time_s": c.procedure.time_s, "procedure_fuel_kg": c.procedure.fuel_kg,
             "time_cost_s": c.time_s, "fuel_cost_kg": c.fuel_kg} for c in costs]


def procedure_cost_rows(costs, units: str = "si") -> tuple[list[str], list[list[str]]]:
    """Header and display texts of what the procedure profile costs against the free optimum,
    one row per objective (energy-state solutions)."""
    m_u = unit_label("mass", units)
    header = ["objective", "free profile", "procedure profile", "extra time", "extra fuel"]
    rows = []
    for c in costs:
        f_free, f_proc, f_diff = (to_display("mass", x, units)[0]
                                  for x in (c.free.fuel_kg, c.procedure.fuel_kg, c.fuel_kg))
        rows.append([
            f"minimum {c.objective}",
            f"{_units.format_min_s(c.free.time_s)} ({c.free.time_s:,.1f} s), {f_free:,.0f} {m_u}",
            f"{_units.format_min_s(c.procedure.time_s)} ({c.procedure.time_s:,.1f} s), "
            f"{f_proc:,.0f} {m_u}",
            f"{c.time_s:+,.1f} s ({_pct(c.procedure.time_s, c.free.time_s):+.2f} %)",
            f"{f_diff:+,.1f} {m_u} ({_pct(c.procedure.fuel_kg, c.free.fuel_kg):+.2f} %)"])
    return header, rows


def format_common_point(point, units: str = "si") -> str:
    """Which common downrange point the comparison used, in words ('' without one)."""
    if point is None:
        return ""
    if point.unusable:
        return (f"no common downrange point: {point.unusable}; the results are compared at "
                "their own ends and the fuel ranking uses the fuel to the end of each")
    d, du = to_display("distance", point.distance_m, units)
    text = (f"common point: {d:,.1f} {du} from the start (the farthest distance at which a "
            "ranked result reaches the target state); results that get there earlier continue in "
            "level flight at the target state (thrust = drag) to it; the fuel ranking uses the "
            "fuel to this point")
    return "\n".join([text] + [f"  {n}" for n in point.notes])


def format_procedure_costs(costs, units: str = "si") -> str:
    """What the procedure profile costs, one line per objective (empty without costs)."""
    lines = []
    for row in procedure_cost_rows(costs, units)[1]:
        lines.append(f"procedure profile, {row[0]} (energy-state): {row[2]} against {row[1]} "
                     f"for the free profile (dives and overshoots allowed): the procedure costs "
                     f"{row[3]} and {row[4]}")
    return "\n".join(lines)


def summary_document(records: list[dict], *, scenario_name: str, scenario_path: str,
                     units: str = "si", files: dict | None = None, extra: dict | None = None,
                     exit_code: int = 0, errors=(), warnings=(), procedure_costs=(),
                     conditions=None) -> dict:
    """The ``summary.json`` document: SI keys per result (stable), display values in ``units``,
    files written per result, ``extra`` fields per result stem (e.g. its schedule), the errors
    and warnings, what the procedure profile costs, the conditions (SI, from
    :class:`climbopt.schedule.Conditions`, with their line in ``units``) and the caution."""
    check_units(units)
    files = files or {}
    extra = extra or {}
    results = []
    for rec in records:
        out = {k: v for k, v in rec.items()}
        stem = result_stem(rec["method"], rec["objective"], rec.get("name", ""))
        out["display"] = display_record(rec, units)
        out.update(extra.get(stem, {}))
        out["files"] = files.get(stem, [])
        results.append(out)
    return {
        "climbopt_version": __version__,
        "scenario": {"name": scenario_name, "path": str(scenario_path)},
        "units": units,
        "results": results,
        "procedure_cost": procedure_cost_records(procedure_costs),
        "conditions": None if conditions is None else {
            **dataclasses.asdict(conditions), "text": format_conditions(conditions, units)},
        "exit_code": int(exit_code),
        "errors": list(errors),
        "warnings": list(warnings),
        "caution": CAUTION,
    }


def _json_default(obj):
    if isinstance(obj, np.generic):
        return obj.item()
    if isinstance(obj, np.ndarray):
        return obj.tolist()
    if isinstance(obj, Path):
        return str(obj)
    raise TypeError(f"cannot write {type(obj).__name__} to JSON")


def _clean(obj):
    """Replace NaN/inf by None so the JSON is standard."""
    if isinstance(obj, dict):
        return {k: _clean(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [_clean(v) for v in obj]
    if isinstance(obj, (float, np.floating)) and not math.isfinite(float(obj)):
        return None
    return obj


def dumps_summary(document: dict) -> str:
    """``summary.json`` text (standard JSON, NaN written as null)."""
    return json.dumps(_clean(document), indent=2, default=_json_default)


def write_summary_json(path, document: dict) -> None:
    """Write ``summary.json``."""
    Path(path).write_text(dumps_summary(document) + "\n", encoding="utf-8")


def write_energy_map(folder, emap, units: str, scenario_name: str, scenario_path) -> dict:
    """Write an energy map's fields as ``energy_map.npz`` (SI arrays, one per field and limit)
    and ``energy_map.csv`` (one row per grid point, in ``units``, written in one vectorised
    pass); return the ``map.json`` document (conditions, files, caution)."""
    folder = Path(folder)
    f = emap.fields
    arrays = {
        "altitude_m": emap.altitude_m, "tas_m_s": np.asarray(emap.tas_m_s),
        "mach": np.asarray(emap.mach), "energy_height_m": np.asarray(emap.energy_height_m),
        "ps_m_s": np.asarray(f.ps_m_s), "fuel_flow_kg_s": np.asarray(f.fuel_flow_kg_s),
        "fuel_specific_energy_m_kg": np.asarray(f.fuel_specific_energy_m_kg),
        "feasible": np.asarray(emap.feasible),
    }
    arrays.update({f"limit_{k}": np.asarray(v) for k, v in f.limits.items()})
    np.savez_compressed(folder / "energy_map.npz", **arrays)
    _write_map_csv(folder / "energy_map.csv", emap, units, scenario_name)
    feasible_ps = np.where(emap.feasible, f.ps_m_s, np.nan)
    return {
        "climbopt_version": __version__,
        "scenario": {"name": scenario_name, "path": str(scenario_path)},
        "units": units,
        "mass_kg": emap.mass_kg, "load_factor": emap.load_factor,
        "throttle": emap.throttle, "rating": emap.rating,
        "temperature_offset_k": emap.temperature_offset_k,
        "shape": list(emap.shape),
        "max_ps_m_s": float(np.nanmax(feasible_ps)) if np.isfinite(feasible_ps).any() else None,
        "feasible_fraction": float(np.mean(emap.feasible)),
        "files": ["energy_map.npz", "energy_map.csv"],
        "caution": CAUTION,
    }


def map_conditions_text(emap, units: str) -> str:
    """The conditions of an energy map, one line: mass, load factor, rating, throttle,
    temperature deviation from ISA."""
    mass, m_u = to_display("mass", emap.mass_kg, units)
    return (f"conditions: mass {mass:,.0f} {m_u}, load factor {emap.load_factor:g}, rating "
            f"{emap.rating}, throttle {emap.throttle:g}, ISA {emap.temperature_offset_k:+g} K")


def _write_map_csv(path, emap, units, scenario_name, rows_per_block: int = 50):
    """One row per grid point: altitude, TAS, Mach, Ps, fuel flow, Ps / fuel flow, feasible;
    each column rounded to the decimals of its unit (:data:`climbopt.units.UNIT_DIGITS`).
    Written straight to the file, ``rows_per_block`` altitudes at a time (an 800 x 800 map
    would otherwise hold its whole text in memory twice)."""
    shape = emap.shape
    fields = (("altitude", np.broadcast_to(emap.altitude_m[:, None], shape), "altitude"),
              ("speed", np.asarray(emap.tas_m_s), "TAS"), ("none", np.asarray(emap.mach), "Mach"),
              ("rate", np.asarray(emap.fields.ps_m_s), "Ps"),
              ("mass_flow", np.asarray(emap.fields.fuel_flow_kg_s), "fuel flow"),
              ("fuel_specific_energy", np.asarray(emap.fields.fuel_specific_energy_m_kg),
               "Ps / fuel flow"))
    header, fmts = [], []
    for kind, _, name in fields:
        unit = to_display(kind, 0.0, units)[1]
        unit = "" if unit == "-" else unit
        header.append(f"{name} [{unit}]" if unit else name)
        fmts.append(f"%.{_units.UNIT_DIGITS.get(unit, 4)}f")
    feas = np.broadcast_to(np.asarray(emap.feasible), shape)
    lines = header_lines(scenario_name, units, "energy map")
    lines.insert(1, f"# {map_conditions_text(emap, units)}")
    with open(path, "w", encoding="utf-8", newline="\n") as fh:
        fh.write("\n".join(lines) + f"\n{','.join(header + ['feasible'])}\n")
        for i in range(0, shape[0], rows_per_block):
            block = slice(i, min(i + rows_per_block, shape[0]))
            cols = [np.broadcast_to(to_display(kind, np.broadcast_to(v, shape)[block], units)[0],
                                    feas[block].shape).ravel() for kind, v, _ in fields]
            buf = io.StringIO()
            np.savetxt(buf, np.column_stack(cols + [feas[block].ravel().astype(float)]),
                       fmt=fmts + ["%d"], delimiter=",")
            fh.write(buf.getvalue().replace(",1\n", ",true\n").replace(",0\n", ",false\n"))


# ------------------------------------------------------------------------------------------
# sweep summary (the lines ``climbopt sweep`` prints)


def sweep_plan_text(plan, table) -> str:
    """The line announcing a sweep (:class:`climbopt.sweep.SweepPlan`): its number of cases,
    grid or given combinations, end cases of the trade-off, method, objective and table."""
    from climbopt.sweep import METHODS

    shape = " x ".join(f"{v.name} ({len(v.values)})" for v in plan.variations)
    n_anchor = sum(c.objective != plan.objective for c in plan.cases)
    n_cases = len(plan.cases)
    return (f"sweep: {n_cases} case{'s' if n_cases != 1 else ''} "
            f"({'given combinations of' if plan.zipped else 'grid'} "
            f"{shape}" + (f", plus {n_anchor} minimum-time/minimum-fuel end cases" if n_anchor
                          else "")
            + f"); {METHODS[plan.method]}, objective {plan.objective}; table {table}")


def sweep_summary_lines(plan, result, executor: str, units: str):
    """The lines after a sweep (:class:`climbopt.sweep.SweepResult`), one at a time: cases
    done, failed, skipped and left, wall time and rate; this sweep's failed cases in the table
    (the first five with their errors); rows of other cases; with the cost weight as the only
    variation, the range of the time-fuel trade-off (time [s], fuel in ``units``)."""
    where = {"serial": "in this process", "pool": f"on a pool of {result.workers} processes",
             "dask": f"on the Dask cluster ({result.workers} worker threads)"}[executor]
    rate = (f"{result.cases_per_s:.2f} cases/s {where}" if result.computed
            else "no cases solved")
    yield (f"done {result.computed - result.failed}, failed {result.failed}, skipped "
           f"{result.skipped}" + (f", left for a re-run {result.remaining}" if result.remaining
                                 else "")
           + f"; wall time {result.wall_s:.1f} s, {rate}")
    ours = {c.key for c in plan.cases}
    bad = [r for r in result.rows if r["key"] in ours and r["status"] != "ok"]
    if bad:
        counts = {}
        for r in bad:
            counts[r["status"]] = counts.get(r["status"], 0) + 1
        yield ("failed cases in the table: "
               + ", ".join(f"{n} {s}" for s, n in sorted(counts.items())))
        for r in bad[:5]:
            yield f"  case {r['case']} ({r['status']}): {r['error'][:160]}"
        if len(bad) > 5:
            yield f"  ... {len(bad) - 5} more (see the table)"
    if result.foreign_rows:
        yield (f"note: {result.foreign_rows} rows of the table belong to other cases (kept at "
               f"the end)")
    if "cost_weight" in [v.name for v in plan.variations]:
        yield from _tradeoff_lines(plan, [r for r in result.rows if r["key"] in ours], units)


def _tradeoff_lines(plan, rows: list[dict], units: str):
    """The trade-off line of :func:`sweep_summary_lines` (none unless the cost weight is the
    only variation and the curve has two points or more)."""
    from climbopt.sweep import tradeoff_curve

    curve = tradeoff_curve([r for r in rows if r["objective"] == "weighted"]
                           if len(plan.variations) == 1 else [])
    if len(plan.variations) == 1 and len(curve["time_s"]) > 1:
        fuel, m_u = to_display("mass", [min(curve["fuel_kg"]), max(curve["fuel_kg"])], units)
        yield (f"trade-off: {len(curve['time_s'])} weights, time {min(curve['time_s']):.1f} "
               f"to {max(curve['time_s']):.1f} s, fuel {fuel[0]:,.1f} to {fuel[1]:,.1f} "
               f"{m_u}" + ("" if curve["monotone"] else " (not monotone: check the grid)"))


#: Marker file of a climbopt output folder: only a folder holding it (or an empty or missing
#: one) is ever replaced by ``run`` or ``map``.
OUTPUT_MARKER = ".climbopt-output"


class OutputFolderError(ValueError):
    """The output folder cannot be used (the message says why and what to do)."""


def _umask() -> int:
    mask = os.umask(0)
    os.umask(mask)
    return mask


def _chmod_default(path: Path, directory: bool) -> None:
    """Give ``path`` the permissions a plain create would (0o777 / 0o666 minus the umask);
    temporary files and folders are created private (0o700 / 0o600) otherwise."""
    with contextlib.suppress(OSError):
        os.chmod(path, (0o777 if directory else 0o666) & ~_umask())


def check_output_folder(out_dir) -> None:
    """Refuse, before any work, an output folder that cannot or must not be replaced.

    It must not be the current folder or above it; an existing folder must be empty or a
    climbopt output folder (holding :data:`OUTPUT_MARKER`); its parent (the nearest existing
    ancestor) must be writable. Raises :class:`OutputFolderError`.
    """
    out = Path(out_dir)
    resolved = out.resolve()
    cwd = Path.cwd().resolve()
    if resolved == cwd or resolved in cwd.parents:
        raise OutputFolderError(f"--out {out}: refusing to replace the current folder or one "
                                "above it; give a folder for the results")
    if out.exists() and not out.is_dir():
        raise OutputFolderError(f"--out {out}: exists and is not a folder")
    if out.is_dir() and any(out.iterdir()) and not (out / OUTPUT_MARKER).is_file():
        raise OutputFolderError(
            f"--out {out}: the folder exists and is not a climbopt output folder (no "
            f"{OUTPUT_MARKER} file); it would be replaced as a whole, so choose another folder "
            "or empty it")
    parent = resolved.parent
    while not parent.exists():
        parent = parent.parent
    if not parent.is_dir() or not os.access(parent, os.W_OK | os.X_OK):
        raise OutputFolderError(f"--out {out}: cannot write in {parent} (permission denied); "
                                "choose a folder you can write to")


def write_text_atomic(path, text: str) -> None:
    """Write one file atomically: a temporary file in the same folder, then a rename."""
    path = Path(path)
    fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".tmp", dir=path.parent)
    try:
        with os.fdopen(fd, "w", encoding="utf-8") as fh:
            fh.write(text)
        _chmod_default(Path(tmp), directory=False)
        os.replace(tmp, path)
    except BaseException:
        with contextlib.suppress(OSError):
            os.unlink(tmp)
        raise


@contextlib.contextmanager
def _signals_blocked():
    """Hold SIGINT and SIGTERM back while folders are swapped (delivered afterwards)."""
    import signal

    sigs = {signal.SIGINT, signal.SIGTERM}
    try:
        old = signal.pthread_sigmask(signal.SIG_BLOCK, sigs)
    except (AttributeError, ValueError, OSError):  # pragma: no cover - no POSIX signals
        yield
        return
    try:
        yield
    finally:
        signal.pthread_sigmask(signal.SIG_SETMASK, old)


@contextlib.contextmanager
def atomic_output_dir(out_dir, what: str = "output"):
    """Context manager yielding a temporary sibling folder to write into; on success the folder
    replaces ``out_dir`` by renames, on any exception (an interrupt included) it is deleted and
    ``out_dir`` is untouched.

    The new folder gets the :data:`OUTPUT_MARKER` file (``what`` wrote it) and the permissions
    of a plainly created folder (the user's umask). The swap renames an existing ``out_dir``
    aside, renames the new folder into place, then deletes the old one, with SIGINT and SIGTERM
    held back; if the second rename fails the old folder is renamed back. An existing folder is
    therefore never left half-overwritten, and no temporary folder is left behind.
    """
    out_dir = Path(out_dir)
    out_dir.parent.mkdir(parents=True, exist_ok=True)
    tmp = Path(tempfile.mkdtemp(prefix=f".{out_dir.name}.new-", dir=out_dir.parent))
    try:
        _chmod_default(tmp, directory=True)
        (tmp / OUTPUT_MARKER).write_text(
            json.dumps({"written_by": f"climbopt {__version__}", "what": what}) + "\n",
            encoding="utf-8")
        yield tmp
    except BaseException:
        shutil.rmtree(tmp, ignore_errors=True)
        raise
    with _signals_blocked():
        _swap(tmp, out_dir)


def _swap(tmp: Path, out_dir: Path) -> None:
    old = None
    try:
        if out_dir.exists():
            old = Path(tempfile.mkdtemp(prefix=f".{out_dir.name}.old-", dir=out_dir.parent))
            os.rmdir(old)
            os.rename(out_dir, old)
        try:
            os.rename(tmp, out_dir)
        except BaseException:
            if old is not None:
                os.rename(old, out_dir)
                old = None
            raise
    except BaseException:
        shutil.rmtree(tmp, ignore_errors=True)
        raise
    if old is not None:
        shutil.rmtree(old, ignore_errors=True)
