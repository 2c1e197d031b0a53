"""Crew-style climb schedules: what to fly at round altitudes, with the rate of climb and the
time, fuel and ground distance from the start; as records, CSV and plain text.

Crews fly a climb as constant calibrated airspeed (CAS) until the Mach number reached at that
CAS equals the planned climb Mach, then constant Mach (common practice, no source). The altitude
where a CAS and a Mach number give the same speed is the *crossover altitude*. It depends only
on the static pressure (the impact pressure is a function of CAS alone, and of Mach and static
pressure), so on a non-standard day it is the same pressure altitude as on a standard day.

A table (:func:`climb_schedule`) has a row at the start, at every round altitude (first
passage), at the **top of climb** (the *first* arrival at the target altitude), at the end of
every level segment (level acceleration or deceleration, cruise) and at the end. For a flown
schedule (:mod:`climbopt.procedure`) each row states the schedule's instruction for its segment
("272 kt", "M 0.72", "accelerate to 272 kt", "level, accelerate to M 0.78"); for an optimal path
(energy-state, collocation) the rows give the optimum's own speeds, as CAS or Mach, whichever
the optimum holds more nearly constant around that altitude.

Everything is SI inside; :func:`schedule_records`, :func:`write_schedule_csv`,
:func:`format_schedule` and :func:`schedule_summary` convert to the display units of
:data:`climbopt.units.DISPLAY_UNITS` (ft, kt, ft/min, lb, nmi for ``"us"``), speeds as flown:
whole knots (whole km/h in SI), Mach to 0.01; times in seconds and min:s.
"""

from __future__ import annotations

import math
from dataclasses import asdict, dataclass, field, replace
from pathlib import Path

import numpy as np

from climbopt.airspeed import impact_pressure_from_cas, impact_pressure_pa
from climbopt.atmosphere import altitude_from_pressure
from climbopt.results import LEVEL_TOLERANCE_M, Method, Trajectory, derive_segments
from climbopt.units import format_min_s, ft_to_m

#: Row spacing of schedules printed in US units (2,000 ft) and in SI units (500 m).
STEP_US_M = ft_to_m(2000.0)
STEP_SI_M = 500.0

def default_step_m(units: str) -> float:
    """Schedule row spacing for a unit system: 500 m for ``"si"``, 2,000 ft for the others
    (altitudes in feet) [m]."""
    from climbopt.units import check_unit_system

    check_unit_system(units)
    return STEP_SI_M if units == "si" else STEP_US_M


def crossover_altitude_m(cas_m_s: float, mach: float) -> float:
    """Altitude [m, geometric, US Standard Atmosphere 1976 pressure] where ``cas_m_s`` and
    ``mach`` are the same airspeed.

    Solves q_c(CAS) = q_c(M, p(h)) for h, with q_c the impact pressure from the compressible
    pitot formulas of :mod:`climbopt.airspeed` (NACA Report 1135, 1953: isentropic subsonic and
    Rayleigh supersonic pitot relations). Below the returned altitude, flying the CAS gives a Mach
    number below ``mach``; above it, more. A temperature offset does not move it (pressure at a
    given altitude is unchanged by the offset convention used throughout climbopt).

    The altitude is geometric, like every altitude in climbopt; the pressure altitude that crews
    quote is geopotential and about 0.13 % lower near 28,000 ft (US Standard Atmosphere 1976,
    eq. 18). Raises ``ValueError`` when the crossover pressure lies outside the atmosphere model.
    """
    cas_m_s = float(cas_m_s)
    mach = float(mach)
    if not (cas_m_s > 0.0 and mach > 0.0):
        raise ValueError(f"CAS and Mach must be positive, got {cas_m_s} m/s and {mach}")
    # Both pitot formulas (subsonic isentropic, supersonic Rayleigh) are linear in the static
    # pressure, so q_c(M, p) = p * q_c(M, 1 Pa) and the crossover pressure follows directly.
    qc_target = float(impact_pressure_from_cas(cas_m_s))
    pressure_pa = qc_target / float(impact_pressure_pa(mach, 1.0))
    try:
        return float(altitude_from_pressure(pressure_pa))
    except ValueError:
        raise ValueError(
            f"CAS {cas_m_s:.1f} m/s and Mach {mach:.3f} cross over at {pressure_pa:.4g} Pa, "
            "outside the standard atmosphere") from None


#: Segment kinds flown level; each gets a row of its own at its end.
LEVEL_KINDS = ("level acceleration", "level deceleration", "level", "cruise", "dash")
#: Schedules of these methods are flown schedules: their rows state the schedule.
FLOWN_METHODS = (Method.SCHEDULE, Method.BEST_SCHEDULE)


@dataclass(frozen=True)
class Conditions:
    """What a schedule was computed for (SI): start mass [kg], temperature deviation from the
    standard day [K], engine rating, climb profile ("procedure" or "free"), target altitude [m]
    and the limits: max CAS [m/s], max Mach, CAS restriction (CAS [m/s], below altitude [m]),
    altitude range [m] (None: no limit); the rating schedule (``RatingStep`` tuple, empty for
    one rating), the along-track wind (``WindProfile`` or None) and the buffet margin (load
    factor or None)."""

    mass_kg: float
    temperature_offset_k: float
    rating: str
    profile: str
    target_altitude_m: float
    max_cas_m_s: float | None = None
    max_mach: float | None = None
    cas_restriction: tuple[float, float] | None = None
    min_altitude_m: float | None = None
    max_altitude_m: float | None = None
    rating_schedule: tuple = ()
    wind: object = None
    buffet_load_factor: float | None = None


def conditions_of(scenario, profile: str | None = None) -> Conditions:
    """The :class:`Conditions` of ``scenario`` (``profile`` defaults to the mission's)."""
    lim = scenario.limits
    return Conditions(
        mass_kg=float(scenario.aircraft.mass_kg),
        temperature_offset_k=float(scenario.atmosphere.temperature_offset_k),
        rating=scenario.mission.rating or scenario.propulsion.default_rating,
        profile=profile or getattr(scenario.mission, "profile", "free"),
        target_altitude_m=float(scenario.mission.target.altitude_m),
        max_cas_m_s=lim.max_cas_m_s, max_mach=lim.max_mach, cas_restriction=lim.cas_restriction,
        min_altitude_m=lim.min_altitude_m, max_altitude_m=lim.max_altitude_m,
        rating_schedule=tuple(getattr(scenario.mission, "rating_schedule", ()) or ()),
        wind=getattr(scenario.atmosphere, "wind", None),
        buffet_load_factor=getattr(lim, "buffet_load_factor", None))


@dataclass(frozen=True)
class ScheduleRow:
    """One row of a climb schedule (SI).

    ``altitude_m`` [m]; ``action``: the segment the row lies in ("climb", "accelerate",
    "decelerate", "level acceleration", "level deceleration", "cruise", ..., "zoom");
    ``fly``: the indication to hold, "CAS" or "Mach"; ``target_cas_m_s`` / ``target_mach``:
    the schedule's speed for that segment (flown schedules; None for an optimum);
    ``cas_m_s`` [m/s], ``mach``, ``tas_m_s`` [m/s], ``rate_of_climb_m_s`` [m/s] (V sin gamma)
    as flown at the row; ``time_s`` [s], ``fuel_kg`` [kg], ``distance_m`` [m] from the start;
    ``point``: "start", "" (a round altitude), "top of climb", "end of <level segment kind>"
    or "end".
    """

    altitude_m: float
    action: str
    fly: str
    cas_m_s: float
    mach: float
    tas_m_s: float
    rate_of_climb_m_s: float
    time_s: float
    fuel_kg: float
    distance_m: float
    point: str = ""
    target_cas_m_s: float | None = None
    target_mach: float | None = None


@dataclass
class ClimbSchedule:
    """A crew-style climb schedule of one trajectory.

    Attributes
    ----------
    method, objective, name : str
        Copied from the trajectory (``name``: the flown schedule's name, "" otherwise).
    rows : list[ScheduleRow]
        Start, round altitudes, top of climb, ends of level segments, end.
    step_m : float
        Spacing of the round altitudes [m].
    flown : bool
        True for a flown schedule (rows state the schedule), False for an optimum.
    holds : list[tuple[str, float, float]]
        Flown schedules: each climb hold in order as (indication "CAS"/"Mach", value [m/s or
        -], altitude where it ends [m]); empty for an optimum.
    crossover_altitude_m : float or None
        Flown schedules: where the CAS hold gives way to the Mach hold [m] (None: CAS all the
        way, or an optimum).
    top_of_climb : ScheduleRow
        The first arrival at the target altitude.
    conditions : Conditions or None
        What the schedule was computed for (None when no scenario was given).
    notes : list[str]
        Caveats (e.g. a path that descends before the top of climb).
    """

    method: str
    objective: str
    name: str
    rows: list[ScheduleRow]
    step_m: float
    flown: bool
    holds: list
    crossover_altitude_m: float | None
    top_of_climb: ScheduleRow
    conditions: Conditions | None = None
    notes: list[str] = field(default_factory=list)

    def as_dict(self) -> dict:
        """JSON-ready record (SI)."""
        d = asdict(self)
        d["method"], d["objective"] = str(self.method), str(self.objective)
        return d


def _first_passage(altitude_m: np.ndarray, levels_m: np.ndarray) -> np.ndarray:
    """Fractional indices where the altitude first reaches each level (levels ascending, within
    [altitude[0], max(altitude)])."""
    running_max = np.maximum.accumulate(altitude_m)
    out = np.empty(len(levels_m))
    for j, level in enumerate(levels_m):
        i = int(np.searchsorted(running_max, level, side="left"))
        if i == 0:
            out[j] = 0.0
            continue
        i = min(i, len(altitude_m) - 1)
        h0, h1 = altitude_m[i - 1], altitude_m[i]
        # altitude[i-1] < level <= altitude[i] because running_max first exceeds level at i
        frac = 0.0 if h1 == h0 else (level - h0) / (h1 - h0)
        out[j] = (i - 1) + float(np.clip(frac, 0.0, 1.0))
    return out


def _at(column: np.ndarray, fractional_index) -> float:
    """Linear interpolation of a column at a fractional index."""
    return float(np.interp(fractional_index, np.arange(len(column)), column))


def top_of_climb_index(trajectory: Trajectory, target_altitude_m: float | None = None) -> float:
    """Fractional point index of the top of climb: the first arrival at the target altitude
    (defaults to the path's highest altitude). A path that comes within LEVEL_TOLERANCE_M
    (0.5 m) of the target counts as arrived there; one that overshoots arrives where it
    crosses the target."""
    h = np.asarray(trajectory.table["altitude_m"], float)
    top = float(np.max(h)) if target_altitude_m is None else min(float(target_altitude_m),
                                                                 float(np.max(h)))
    i = int(np.flatnonzero(h >= top - LEVEL_TOLERANCE_M)[0])
    if i > 0 and h[i] > top > h[i - 1]:
        return (i - 1) + (top - h[i - 1]) / (h[i] - h[i - 1])
    return float(i)


def _segment_at(segments, index: float):
    """The segment holding (fractional) point ``index`` (the later one at a shared end)."""
    inside = [s for s in segments if s.start_index <= index <= s.end_index]
    if not inside:
        return None
    after = [s for s in inside if s.start_index <= index < s.end_index]
    return (after or inside)[-1]


def climb_schedule(trajectory: Trajectory, step_m: float = STEP_SI_M, *,
                   scenario=None) -> ClimbSchedule:
    """Crew-style climb schedule of ``trajectory`` with round altitudes every ``step_m`` [m].

    Rows (see the module docstring): start, each round altitude at its first passage, the top
    of climb (first arrival at the scenario's target altitude, or at the path's highest
    altitude without a scenario), the end of every level segment and the end. ``scenario``
    supplies the target altitude and the :class:`Conditions` of the header.
    """
    if not step_m > 0.0:
        raise ValueError(f"step_m must be positive, got {step_m}")
    t = trajectory.table
    h = np.asarray(t["altitude_m"], float)
    conditions = None if scenario is None else conditions_of(scenario, trajectory.profile)
    toc = top_of_climb_index(trajectory, None if conditions is None
                             else conditions.target_altitude_m)
    segments = trajectory.segments or derive_segments(t, trajectory.zooms)
    flown = trajectory.method in FLOWN_METHODS
    notes: list[str] = []
    if np.any(np.diff(h[: int(math.ceil(toc)) + 1]) < -1.0):
        notes.append("the path descends somewhere before the top of climb (a dive to gain speed); "
                     "rows give the first time each altitude is reached")
    first = math.floor(h[0] / step_m) * step_m + step_m
    levels = np.arange(first, _at(h, toc) - LEVEL_TOLERANCE_M, step_m)
    marks = [(0.0, "start")] + [(float(i), "") for i in
                                _first_passage(h[: int(math.ceil(toc)) + 1], levels)]
    marks.append((toc, "top of climb"))
    marks += [(float(s.end_index), f"end of {s.kind}") for s in segments
              if s.kind in LEVEL_KINDS and abs(s.end_index - toc) > 1e-9]
    last = h.size - 1
    if max(i for i, _ in marks) < last:
        marks.append((float(last), "end"))
    marks.sort(key=lambda m: m[0])
    rows = [_row(t, i, point, _segment_at(segments, i), flown) for i, point in marks]
    if not flown:
        rows = _choose_indication(rows)
    holds = _holds(t, segments) if flown else []
    crossover = next((float(h[s.start_index]) for s in segments
                      if s.kind == "climb" and s.mach is not None and s.cas_m_s is None), None)
    if crossover is not None and abs(crossover - h[0]) < LEVEL_TOLERANCE_M:
        crossover = None  # Mach from the start: no crossover on this climb
    return ClimbSchedule(
        method=str(trajectory.method), objective=str(trajectory.objective), name=trajectory.name,
        rows=rows, step_m=float(step_m), flown=flown, holds=holds,
        crossover_altitude_m=crossover, top_of_climb=next(r for r in rows
                                                          if r.point == "top of climb"),
        conditions=conditions, notes=notes)


def _row(t, i: float, point: str, segment, flown: bool) -> ScheduleRow:
    """A row at fractional point index ``i`` (values interpolated along the table)."""
    action = segment.kind if segment is not None else "climb"
    target_cas = target_mach = None
    fly = "CAS"
    if flown and segment is not None:
        target_cas, target_mach = segment.cas_m_s, segment.mach
        fly = "Mach" if target_cas is None and target_mach is not None else "CAS"
    gam = _at(t["flight_path_angle_rad"], i)
    return ScheduleRow(
        altitude_m=_at(t["altitude_m"], i), action=action, fly=fly,
        cas_m_s=_at(t["cas_m_s"], i), mach=_at(t["mach"], i), tas_m_s=_at(t["tas_m_s"], i),
        rate_of_climb_m_s=_at(t["tas_m_s"], i) * math.sin(gam),
        time_s=_at(t["time_s"], i) - float(t["time_s"][0]),
        fuel_kg=_at(t["fuel_used_kg"], i) - float(t["fuel_used_kg"][0]),
        distance_m=_at(t["distance_m"], i) - float(t["distance_m"][0]), point=point,
        target_cas_m_s=target_cas, target_mach=target_mach)


def _choose_indication(rows: list[ScheduleRow]) -> list[ScheduleRow]:
    """Optimal paths: at each row, fly CAS or Mach, whichever the optimum holds more nearly
    constant between the neighbouring rows (smaller relative change per metre of altitude)."""
    out = []
    for k, r in enumerate(rows):
        a, b = rows[max(k - 1, 0)], rows[min(k + 1, len(rows) - 1)]
        dh = b.altitude_m - a.altitude_m
        if abs(dh) <= LEVEL_TOLERANCE_M or min(a.cas_m_s, b.cas_m_s, a.mach, b.mach) <= 0.0:
            fly = out[-1].fly if out else "CAS"
        else:
            d_cas = abs(math.log(b.cas_m_s / a.cas_m_s))
            d_mach = abs(math.log(b.mach / a.mach))
            fly = "CAS" if d_cas <= d_mach else "Mach"
        out.append(replace(r, fly=fly))
    return out


def _holds(t, segments) -> list[tuple[str, float, float]]:
    """Flown schedules: the climb holds in order, (indication, value, end altitude [m])."""
    out = []
    for s in segments:
        if s.kind != "climb":
            continue
        fly, value = ("CAS", s.cas_m_s) if s.cas_m_s is not None else ("Mach", s.mach)
        out.append((fly, float(value), float(t["altitude_m"][s.end_index])))
    return out


# ------------------------------------------------------------------------------ display
# Display units and the CSV helpers are those of climbopt.report (imported where used:
# report imports this module).

def _units(units: str):
    from climbopt import report

    report.check_units(units)
    return report


def _speed_text(report, units: str, cas_m_s, mach, fly: str) -> str:
    """A speed to fly: whole knots or km/h for CAS, Mach to 0.01."""
    if fly == "Mach" and mach is not None:
        return f"M {mach:.2f}"
    value, unit = report.to_display("airspeed", cas_m_s, units)
    return f"{value:.0f} {unit}"


def _instruction(report, units: str, r: ScheduleRow, flown: bool) -> str:
    """What the row says to fly: the schedule's instruction (flown) or the optimum's speed."""
    if flown:
        speed = _speed_text(report, units, r.target_cas_m_s, r.target_mach, r.fly)
    else:
        speed = _speed_text(report, units, r.cas_m_s, r.mach, r.fly)
    words = {"climb": "{s}", "accelerate": "accelerate to {s}", "decelerate": "decelerate to {s}",
             "level acceleration": "level, accelerate to {s}",
             "level deceleration": "level, decelerate to {s}", "cruise": "cruise {s}",
             "dash": "dash {s}", "level": "level {s}", "zoom": "zoom ({s})",
             "descent": "descend ({s})"}.get(r.action, "{s}")
    if not flown and r.action in ("level acceleration", "level deceleration"):
        words = f"level, {r.action.split()[1].replace('ion', 'e')} ({{s}})"
    return words.format(s=speed)


def schedule_records(schedule: ClimbSchedule, units: str = "si") -> tuple[list[str], list[list]]:
    """Header and rows of a climb schedule in ``units``: altitude, what to fly, CAS (whole
    knots or km/h), Mach (0.01), TAS, rate of climb (ft/min, or m/s to 0.1), cumulative time in
    s and min:s, fuel, ground distance, point."""
    report = _units(units)
    u = {k: report.unit_label(k, units) for k in ("altitude", "airspeed", "mass", "distance",
                                                  "rate")}
    header = [f"altitude [{u['altitude']}]", "fly", f"CAS [{u['airspeed']}]", "Mach",
              f"TAS [{u['airspeed']}]", f"rate of climb [{u['rate']}]", "time [s]", "time [min:s]",
              f"fuel [{u['mass']}]", f"distance [{u['distance']}]", "point"]
    rows = []
    for r in schedule.rows:
        def show(kind, value, digits):
            v = round(float(report.to_display(kind, value, units)[0]), digits)
            return int(v) if digits == 0 else v
        fine = 1 if u["rate"] == "m/s" else 0  # whole ft/min; 0.1 m/s
        rows.append([
            show("altitude", r.altitude_m, 0), _instruction(report, units, r, schedule.flown),
            show("airspeed", r.cas_m_s, 0), round(r.mach, 2), show("airspeed", r.tas_m_s, 0),
            show("rate", r.rate_of_climb_m_s, fine), round(r.time_s, 1),
            format_min_s(r.time_s), show("mass", r.fuel_kg, 0), show("distance", r.distance_m, 1),
            r.point])
    return header, rows


def schedule_summary(schedule: ClimbSchedule, units: str = "si") -> str:
    """One line: the schedule flown (holds and where each ends) or, for an optimum, that the
    rows give its own speeds; then the top of climb (altitude, time, fuel, distance)."""
    report = _units(units)

    def at(h):
        return report.quantity_text("altitude", h, units)

    if schedule.flown:
        holds = ", ".join(f"{_speed_text(report, units, v, v, fly)} to {at(h)}"
                          for fly, v, h in schedule.holds)
        what = f"schedule {schedule.name}: {holds}" if holds else f"schedule {schedule.name}"
    else:
        what = (f"{schedule.method}, minimum {schedule.objective}: the optimum's own speeds at "
                "round altitudes")
    top = schedule.top_of_climb
    mass, mu = report.to_display("mass", top.fuel_kg, units)
    dist, du = report.to_display("distance", top.distance_m, units)
    return (f"{what}; top of climb {at(top.altitude_m)} at {format_min_s(top.time_s)} "
            f"({top.time_s:,.0f} s), fuel {mass:,.0f} {mu}, {dist:,.1f} {du}")


def conditions_text(schedule: ClimbSchedule, units: str = "si") -> str:
    """The conditions line of the header: mass, temperature deviation, rating, profile,
    limits ("" without conditions); see :func:`climbopt.report.format_conditions`."""
    if schedule.conditions is None:
        return ""
    return _units(units).format_conditions(schedule.conditions, units)


def schedule_title(schedule: ClimbSchedule) -> str:
    """The heading of a schedule: its name and kind (best schedule, flown schedule, optimum)."""
    if schedule.method == Method.BEST_SCHEDULE:
        return f"climb schedule {schedule.name} (best schedule, minimum {schedule.objective})"
    if schedule.flown:
        return f"climb schedule {schedule.name} (flown schedule)"
    return f"climb schedule, {schedule.method}, minimum {schedule.objective}"


def write_schedule_csv(path, schedule: ClimbSchedule, units: str = "si",
                       scenario_name: str = "") -> None:
    """Write a crew-style climb schedule as CSV; comment lines carry the summary, the
    conditions, the notes and the caution."""
    report = _units(units)
    header, rows = schedule_records(schedule, units)
    comments = report.header_lines(scenario_name, units, schedule_title(schedule))
    comments.append(f"# {schedule_summary(schedule, units)}")
    if schedule.conditions is not None:
        comments.append(f"# {conditions_text(schedule, units)}")
    comments += [f"# note: {n}" for n in schedule.notes]
    report.write_csv(Path(path), comments, header,
                      ([report.cell(v) for v in r] for r in rows))


def format_schedule(schedule: ClimbSchedule, units: str = "si") -> str:
    """The climb schedule as aligned plain text (summary, conditions, table, notes)."""
    report = _units(units)
    header, rows = schedule_records(schedule, units)
    out = [schedule_title(schedule), schedule_summary(schedule, units)]
    if schedule.conditions is not None:
        out.append(conditions_text(schedule, units))
    out += report.text_table(header, [[report.cell(v) for v in r] for r in rows],
                             left={1, len(header) - 1})
    out += [f"note: {n}" for n in schedule.notes]
    return "\n".join(out)
