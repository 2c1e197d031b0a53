"""Reports: the comparison table of all results, ``summary.json``, ``comparison.csv``, the
per-point CSV and the climb-schedule CSV of each result, and atomic output folders.

Values are SI inside; :data:`DISPLAY_UNITS` says what each quantity is shown in for ``"si"`` and
``"us"`` output (ft, kt, lb, nmi). ``summary.json`` keeps SI keys whatever the display units, so
scripts can rely on it (see ARCHITECTURE.md), and adds a ``display`` block in the chosen units.
Nothing here prints; :mod:`climbopt.cli` decides what goes to the terminal.
"""

from __future__ import annotations

import contextlib
import csv
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
from climbopt.units import kg_to_lb, m_s_to_kt, m_to_ft, m_to_nmi

UNIT_SYSTEMS = ("si", "us")


# ------------------------------------------------------------------------------------------
# units for display

def _identity(x):
    return x


def _per_min(fn):
    return lambda x: fn(x) * 60.0


#: quantity -> {unit system: (unit label, converter from SI)}
DISPLAY_UNITS: dict[str, dict[str, tuple[str, object]]] = {
    "time": {"si": ("s", _identity), "us": ("s", _identity)},
    "altitude": {"si": ("m", _identity), "us": ("ft", m_to_ft)},
    "distance": {"si": ("km", lambda x: x / 1000.0), "us": ("nmi", m_to_nmi)},
    "speed": {"si": ("m/s", _identity), "us": ("kt", m_s_to_kt)},
    "mass": {"si": ("kg", _identity), "us": ("lb", kg_to_lb)},
    "rate": {"si": ("m/s", _identity), "us": ("ft/min", _per_min(m_to_ft))},
    "angle": {"si": ("rad", _identity), "us": ("deg", np.degrees)},
    "pressure": {"si": ("Pa", _identity), "us": ("psf", lambda x: x / 47.88025898033584)},
    "none": {"si": ("-", _identity), "us": ("-", _identity)},
}

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
}


def check_units(units: str) -> None:
    if units not in UNIT_SYSTEMS:
        raise ValueError(f"units must be one of {UNIT_SYSTEMS}, got {units!r}")


def to_display(kind: str, value_si, units: str):
    """Convert an SI value of quantity ``kind`` to the display unit of ``units``.

    Returns ``(value, unit_label)``. ``None`` stays ``None``.
    """
    check_units(units)
    label, fn = DISPLAY_UNITS[kind][units]
    if value_si is None:
        return None, label
    return fn(value_si), label


def column_header(key: str, units: str) -> str:
    """CSV header of a per-point column in ``units``: the quantity name with its unit, e.g.
    ``altitude_ft`` (``"us"``) or ``altitude_m`` (``"si"``, identical to :data:`COLUMNS`)."""
    check_units(units)
    if units == "si":
        return key
    stem = key
    for suffix in ("_m_s", "_rad", "_kg", "_m", "_s"):
        if key.endswith(suffix):
            stem = key[: -len(suffix)]
            break
    label = DISPLAY_UNITS[COLUMN_KINDS[key]][units][0]
    if label == "-":
        return stem
    return f"{stem}_{label.replace('/', '_per_')}"


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
    if common_point is not None:
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
    """``(record key, header)`` pairs of the comparison table/CSV in ``units`` (``common``: with
    the time and fuel to the common downrange point, the fuel ranking then uses)."""
    m = DISPLAY_UNITS["mass"][units][0]
    d = DISPLAY_UNITS["distance"][units][0]
    extra = [("time_to_common_point_s", "time to common point [s]"),
             ("fuel_to_common_point_kg", f"fuel to common point [{m}]")] if common else []
    return [
        ("label", "result"), ("time_s", "time [s]"),
        ("fuel_kg", f"fuel [{m}]"), ("distance_m", f"distance [{d}]"), *extra,
        ("final_mass_kg", f"final mass [{m}]"), ("time_diff_pct", "time vs best [%]"),
        ("fuel_diff_pct", "fuel vs best [%]"), ("converged", "converged"),
        ("iterations", "iter."), ("wall_s", "wall [s]"),
        ("verification_miss", "re-sim miss [%]"),
    ]


_KINDS = {"time_s": "time", "fuel_kg": "mass", "distance_m": "distance", "final_mass_kg": "mass",
          "time_to_common_point_s": "time", "fuel_to_common_point_kg": "mass"}


def _has_common(records) -> bool:
    return any("common_point_distance_m" in r for r in records)


def display_record(rec: dict, units: str) -> dict:
    """The comparison record's numbers in display units, keyed by the headers of
    :func:`comparison_columns` (numbers stay numbers; ``verification_miss`` in %)."""
    out = {}
    for key, header in comparison_columns(units, "common_point_distance_m" in rec):
        value = rec.get(key)
        if key in _KINDS:
            value = to_display(_KINDS[key], value, units)[0]
        elif key == "verification_miss" and value is not None:
            value = 100.0 * value
        out[header] = value
    return out


def format_table(records: list[dict], units: str = "si") -> str:
    """The comparison table as aligned plain text, with a legend line and the caution."""
    check_units(units)
    cols = comparison_columns(units, _has_common(records))
    lines = [[h for _, h in cols]]
    for rec in records:
        disp = display_record(rec, units)
        row = []
        for key, header in cols:
            v = disp[header]
            if key == "label":
                row.append(str(v))
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
            else:
                row.append(_fmt(v, 1))
        lines.append(row)
    widths = [max(len(r[i]) for r in lines) for i in range(len(cols))]
    text = []
    for j, r in enumerate(lines):
        cells = [c.ljust(widths[i]) if i < 1 else c.rjust(widths[i]) for i, c in enumerate(r)]
        text.append("  ".join(cells).rstrip())
        if j == 0:
            text.append("  ".join("-" * w for w in widths))
    if any(not rec["converged"] for rec in records):
        text.append("NO = not converged: shown for information, never ranked as optimal.")
    if any(not (rec.get("verification") or {}).get("ok", True) for rec in records):
        text.append("FAILED = the re-simulation of the controls misses the path or breaks a "
                    "limit by more than the stated tolerance (see summary.json, verification).")
    for rec in records:
        if not rec["ranked"] and rec["issues"]:
            text.append(f"not ranked: {rec['label']}: {'; '.join(rec['issues'])}")
    return "\n".join(text)


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


def header_lines(scenario_name: str, units: str, what: str) -> list[str]:
    return [f"# climbopt {__version__}: {what}; scenario: {scenario_name}; units: {units}",
            f"# caution: {CAUTION}"]


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
                         scenario_name: str = "") -> None:
    """Write the full per-point table of one trajectory (column order of :data:`COLUMNS`)."""
    check_units(units)
    header = [column_header(k, units) for k in COLUMNS]
    conv = [to_display(COLUMN_KINDS[k], trajectory.table[k], units)[0] for k in COLUMNS]
    label = f"{trajectory.method}, minimum {trajectory.objective}"
    if not trajectory.converged:
        label += " (NOT CONVERGED: not an optimum)"
    rows = ([cell(float(col[i])) for col in conv] for i in range(len(conv[0])))
    write_csv(Path(path), header_lines(scenario_name, units, label), header, rows)


def write_comparison_csv(path, records: list[dict], units: str = "si",
                         scenario_name: str = "") -> None:
    """Write the comparison table as CSV in ``units``."""
    cols = comparison_columns(units, _has_common(records))
    rows = []
    for rec in records:
        disp = display_record(rec, units)
        rows.append([cell(disp[h]) for _, h in cols])
    write_csv(Path(path), header_lines(scenario_name, units, "comparison"),
               [h for _, h in cols], rows)


def format_flown_schedules(records: list[dict], schedule_lines: dict, units: str = "si") -> str:
    """For each flown schedule (the best schedule per objective, the scenario's own) in the
    comparison ``records``: what is flown (``schedule_lines``: result stem -> the crew
    schedule's one-line summary) and its cost against the reference optimum of the same
    objective (best schedules) or against the best ranked rows of the run (the scenario's own
    schedules; to the common point when there is one)."""
    m_u = DISPLAY_UNITS["mass"][units][0]
    lines = []
    for rec in records:
        if rec["method"] not in (Method.SCHEDULE, Method.BEST_SCHEDULE):
            continue
        if not rec["has_trajectory"]:
            lines.append(f"{rec['label']}: cannot be flown: {'; '.join(rec['issues'])}")
            continue
        stem = result_stem(rec["method"], rec["objective"], rec.get("name", ""))
        what = schedule_lines.get(stem, rec["label"])
        c = rec.get("reference")
        if c:
            cost = (f"against the {c['reference']}: {c['time_difference_s']:+,.1f} s, "
                    f"{to_display('mass', c['fuel_difference_kg'], units)[0]:+,.1f} {m_u} "
                    f"(penalty {100 * c['objective_difference_relative']:+.2f} % in "
                    f"{c['objective']})")
        elif rec["ranked"]:
            where = " to the common point" if "common_point_distance_m" in rec else ""
            cost = (f"against the best of this run{where}: time {rec['time_diff_pct']:+.2f} %, "
                    f"fuel {rec['fuel_diff_pct']:+.2f} %")
        else:
            cost = f"not ranked: {'; '.join(rec['issues'])}"
        prefix = "" if what.startswith(rec["label"]) else f"{rec['label']}: "
        lines.append(f"{prefix}{what}; {cost}")
    return "\n".join(lines)


def procedure_cost_records(costs) -> list[dict]:
    """``summary.json`` records of what the procedure profile costs against the free optimum
    (:class:`climbopt.pipeline.ProcedureCost`; energy-state solutions, SI)."""
    return [{"objective": str(c.objective), "method": "energy-state",
             "free_time_s": c.free.time_s, "free_fuel_kg": c.free.fuel_kg,
             "procedure_time_s": c.procedure.time_s, "procedure_fuel_kg": c.procedure.fuel_kg,
             "time_cost_s": c.time_s, "fuel_cost_kg": c.fuel_kg} for c in costs]


def format_common_point(point, units: str = "si") -> str:
    """Which common downrange point the comparison used, in words ('' without one)."""
    if point is None:
        return ""
    d, du = to_display("distance", point.distance_m, units)
    text = (f"common point: {d:,.1f} {du} from the start (the farthest distance at which a "
            "ranked result reaches the target state); results that get there earlier continue in "
            "level flight at the target state (thrust = drag) to it; the fuel ranking uses the "
            "fuel to this point")
    return "\n".join([text] + [f"  {n}" for n in point.notes])


def format_procedure_costs(costs, units: str = "si") -> str:
    """What the procedure profile costs, one line per objective (empty without costs)."""
    lines = []
    for c in costs:
        m_u = DISPLAY_UNITS["mass"][units][0]
        f_free, f_proc, f_diff = (to_display("mass", x, units)[0]
                                  for x in (c.free.fuel_kg, c.procedure.fuel_kg, c.fuel_kg))
        lines.append(
            f"procedure profile, minimum {c.objective} (energy-state): {c.procedure.time_s:,.1f} s "
            f"and {f_proc:,.1f} {m_u} against {c.free.time_s:,.1f} s and {f_free:,.1f} {m_u} "
            f"for the free profile (dives and overshoots allowed): the procedure costs "
            f"{c.time_s:+,.1f} s ({_pct(c.procedure.time_s, c.free.time_s):+.2f} %) and "
            f"{f_diff:+,.1f} {m_u} ({_pct(c.procedure.fuel_kg, c.free.fuel_kg):+.2f} %)")
    return "\n".join(lines)


def summary_document(records: list[dict], *, scenario_name: str, scenario_path: str,
                     units: str = "si", files: dict | None = None, extra: dict | None = None,
                     exit_code: int = 0, errors=(), warnings=(), procedure_costs=()) -> dict:
    """The ``summary.json`` document: SI keys per result (stable), display values in ``units``,
    files written per result, ``extra`` fields per result stem (e.g. its schedule), the errors
    and warnings, what the procedure profile costs, and the caution."""
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


def _write_map_csv(path, emap, units, scenario_name):
    """One row per grid point: altitude, TAS, Mach, Ps, fuel flow, Ps / fuel flow, feasible."""
    shape = emap.shape
    alt, alt_u = to_display("altitude", np.broadcast_to(emap.altitude_m[:, None], shape), units)
    tas, spd_u = to_display("speed", np.asarray(emap.tas_m_s), units)
    ps, ps_u = to_display("rate", np.asarray(emap.fields.ps_m_s), units)
    ff, m_u = to_display("mass", np.asarray(emap.fields.fuel_flow_kg_s), units)
    fs = np.asarray(emap.fields.fuel_specific_energy_m_kg)
    fs_u = "m/kg"
    if units == "us":
        from climbopt.units import lb_to_kg, m_to_ft

        fs, fs_u = m_to_ft(fs) * lb_to_kg(1.0), "ft/lb"
    header = [f"altitude [{alt_u}]", f"TAS [{spd_u}]", "Mach", f"Ps [{ps_u}]",
              f"fuel flow [{m_u}/s]", f"Ps / fuel flow [{fs_u}]", "feasible"]
    feas = np.broadcast_to(np.asarray(emap.feasible), shape)
    cols = [np.broadcast_to(c, shape).ravel() for c in (alt, tas, emap.mach, ps, ff, fs)]
    table = np.column_stack(cols + [feas.ravel().astype(float)])
    buf = io.StringIO()
    buf.write(f"# climbopt {__version__}: energy map; scenario: {scenario_name}; units: {units}; "
              f"mass {emap.mass_kg:.1f} kg, load factor {emap.load_factor:g}, rating "
              f"{emap.rating}\n# caution: {CAUTION}\n{','.join(header)}\n")
    np.savetxt(buf, table, fmt=["%.1f", "%.2f", "%.4f", "%.3f", "%.5f", "%.4f", "%d"],
               delimiter=",")
    Path(path).write_text(buf.getvalue().replace(",1\n", ",true\n").replace(",0\n", ",false\n"),
                          encoding="utf-8")


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
