"""What climbopt understood from a scenario, as text (printed by ``climbopt check``).

An output module: it reads a :class:`climbopt.scenario.Scenario` and writes text; the reader
never imports it. Values are printed in the unit the file used for each field (``units="file"``),
or in the SI or US display units of :data:`climbopt.units.DISPLAY_UNITS`. Flight levels are
printed as written ("FL350") in the file's units.
"""

from __future__ import annotations

import contextvars

from climbopt.airspeed import eas_from_tas
from climbopt.atmosphere import G0, energy_height_m
from climbopt.scenario import FlightPoint, Scenario, Table1D, Table2D, level_flight_lift, point_state
from climbopt.units import DIMENSIONS, DISPLAY_UNITS, UnitError, from_si, unit_factor

__all__ = ["describe_scenario"]

#: Unit system of the summary being written: "file" (as written), "si" or "us".
_UNIT_SYSTEM: contextvars.ContextVar[str] = contextvars.ContextVar("climbopt_unit_system", default="file")


def describe_scenario(scenario: Scenario, units: str = "file") -> str:
    """What the program understood from a scenario, as text.

    ``units``: "file" (each value in the unit the file used), "si", or "us" (ft, kt, lb, nmi,
    lbf, hp). Warnings (``scenario.warnings``) are not included; ``climbopt check`` prints
    them after this text.
    """
    if units not in ("file", "si", "us"):
        raise ValueError(f"units must be 'file', 'si' or 'us', got {units!r}")
    token = _UNIT_SYSTEM.set(units)
    try:
        s = scenario
        out: list[str] = [f"Scenario: {s.name}"]
        if s.description:
            out.append(f"  {s.description}")
        out.append(f"  file: {s.source_path}")
        for part in (_aircraft_lines, _propulsion_lines, _atmosphere_lines, _mission_lines,
                     _schedule_lines, _limits_lines, _solver_lines):
            lines = part(s)
            if lines:
                out += [""] + lines
        return "\n".join(out)
    finally:
        _UNIT_SYSTEM.reset(token)


# ---- units and numbers ------------------------------------------------------------------------


def _fmt(x: float) -> str:
    return f"{x:.6g}"


def _kind_of_unit(unit: str) -> str | None:
    """Name of the DIMENSIONS entry a unit belongs to (None when it cannot be told)."""
    for name in DIMENSIONS:
        if name == "dimensionless":
            continue
        try:
            unit_factor(unit, name)
        except (UnitError, ValueError):
            continue
        return name
    return None


def _u(scenario: Scenario, fld: str, fallback: str) -> str:
    """Unit to print field ``fld`` in: the file's (or ``fallback``), or the display unit of the
    chosen system for its kind."""
    unit = scenario.display_units.get(fld) or fallback
    system = _UNIT_SYSTEM.get()
    if system == "file" or not unit:
        return unit
    kind = _kind_of_unit(unit)
    if kind is None:
        return unit
    if kind == "length" and fld.endswith("dash_distance"):
        kind = "distance"
    return DISPLAY_UNITS[kind][system]


def _q(value_si: float, unit: str) -> str:
    """Format an SI value in ``unit`` (empty unit: plain number)."""
    if not unit:
        return _fmt(value_si)
    return f"{_fmt(from_si(value_si, unit))} {unit}"


def _alt(scenario: Scenario, fld: str, value_si: float, fallback: str) -> str:
    """An altitude field: as written when it was a flight level (file units), else converted."""
    if _UNIT_SYSTEM.get() == "file" and fld in scenario.display_text:
        return scenario.display_text[fld]
    return _q(value_si, _u(scenario, fld, fallback))


def _range(values, unit: str) -> str:
    lo, hi = min(values), max(values)
    if lo == hi:
        return f"{_q(lo, unit)} (constant)"
    if not unit:
        return f"{_fmt(lo)} to {_fmt(hi)}"
    return f"{_fmt(from_si(lo, unit))} to {_fmt(from_si(hi, unit))} {unit}"


def _flat(table: Table2D) -> list[float]:
    return [v for row in table.values for v in row]


def _describe_table1d(label: str, table: Table1D, unit: str = "") -> str:
    if min(table.values) == max(table.values):
        return f"{label}: {_q(table.values[0], unit)} at all Mach numbers"
    return (f"{label}: {_range(table.values, unit)} over Mach {_fmt(table.mach[0])} to "
            f"{_fmt(table.mach[-1])} ({len(table.mach)} points)")


# ---- sections ---------------------------------------------------------------------------------


def _aircraft_lines(s: Scenario) -> list[str]:
    ac = s.aircraft
    out = [f"Aircraft: {ac.name}"]
    line = (f"  reference area {_q(ac.reference_area_m2, _u(s, 'aircraft.reference_area', 'm^2'))}, "
            f"start mass {_q(ac.mass_kg, _u(s, 'aircraft.mass', 'kg'))}")
    if ac.fuel_capacity_kg is not None:
        line += f", fuel capacity {_q(ac.fuel_capacity_kg, _u(s, 'aircraft.fuel_capacity', _u(s, 'aircraft.mass', 'kg')))}"
    out.append(line)
    d = ac.drag
    if d.kind == "parabolic":
        out.append(f"  drag polar: parabolic, CD = CD0(M) + k(M) CL^2 over Mach {_fmt(d.cd0.mach[0])} to "
                   f"{_fmt(d.cd0.mach[-1])} ({len(d.cd0.mach)} points); CD0 {_range(d.cd0.values, '')}, "
                   f"k {_range(d.k.values, '')}")
    else:
        cds = [v for row in d.cd_table for v in row]
        out.append(f"  drag polar: table CD(CL, M), {len(d.cd_mach)} Mach x {len(d.cd_cl)} CL points, Mach "
                   f"{_fmt(d.cd_mach[0])} to {_fmt(d.cd_mach[-1])}, CL {_fmt(d.cd_cl[0])} to "
                   f"{_fmt(d.cd_cl[-1])}; CD {_range(cds, '')}")
    if d.lift_slope_per_rad is not None:
        out.append("  " + _describe_table1d("lift-curve slope", d.lift_slope_per_rad,
                                            _u(s, "aircraft.drag.lift_slope", "1/rad")))
    out.append("  " + _describe_table1d("maximum lift coefficient", ac.cl_max))
    return out


def _propulsion_lines(s: Scenario) -> list[str]:
    prop = s.propulsion
    align = "along the flight path" if prop.thrust_alignment == "path" else "along the body axis"
    out = [f"Propulsion: default rating '{prop.default_rating}', throttle {_fmt(prop.throttle_min)} to "
           f"{_fmt(prop.throttle_max)}, thrust {align}, thrust scale {_fmt(prop.thrust_scale)}"]
    for name, rt in prop.ratings.items():
        base = f"propulsion.ratings.{name}"
        main = rt.thrust_n if rt.kind == "jet" else rt.shaft_power_w
        u_alt = _u(s, f"{base}.altitude", "ft")
        out.append(f"  rating '{name}' ({rt.kind}): {'thrust' if rt.kind == 'jet' else 'shaft power'} table "
                   f"{len(main.mach)} Mach x {len(main.altitude_m)} altitudes, Mach {_fmt(main.mach[0])} to "
                   f"{_fmt(main.mach[-1])}, altitude {_range(main.altitude_m, u_alt)}")
        if rt.kind == "jet":
            out.append(f"    thrust (all engines) {_range(_flat(rt.thrust_n), _u(s, base + '.thrust', 'kN'))}")
        else:
            out.append(f"    shaft power (all engines) "
                       f"{_range(_flat(rt.shaft_power_w), _u(s, base + '.shaft_power', 'kW'))}")
            out.append("    " + _describe_table1d("propeller efficiency", rt.propeller_efficiency))
        if rt.fuel_flow_kg_s is not None:
            out.append(f"    fuel flow table {_range(_flat(rt.fuel_flow_kg_s), _u(s, base + '.fuel_flow', 'kg/h'))}")
        elif base + ".specific_impulse" in s.display_units:
            isp = 1.0 / (G0 * rt.tsfc_kg_per_n_s)
            out.append(f"    fuel: specific impulse {_q(isp, _u(s, base + '.specific_impulse', 's'))} "
                       f"(TSFC {_q(rt.tsfc_kg_per_n_s, _u(s, base + '.tsfc', 'lb/lbf/h'))})")
        elif rt.tsfc_kg_per_n_s is not None:
            out.append(f"    fuel: TSFC {_q(rt.tsfc_kg_per_n_s, _u(s, base + '.tsfc', 'lb/lbf/h'))}")
        else:
            out.append(f"    fuel: PSFC {_q(rt.psfc_kg_per_w_s, _u(s, base + '.psfc', 'lb/hp/h'))}")
    return out


def _atmosphere_lines(s: Scenario) -> list[str]:
    out = [f"Atmosphere: US Standard Atmosphere 1976, temperature offset "
           f"{_q(s.atmosphere.temperature_offset_k, _u(s, 'atmosphere.temperature_offset', 'K'))}"]
    wind = s.atmosphere.wind
    if wind is not None:
        u_w = _u(s, "atmosphere.wind.along_track", "kt")
        if not wind.altitude_m:
            w = wind.along_track_m_s[0]
            out.append(f"  along-track wind {_q(w, u_w)} at all altitudes "
                       f"({'headwind' if w < 0 else 'tailwind' if w > 0 else 'calm'})")
        else:
            u_a = _u(s, "atmosphere.wind.altitude", "ft")
            pairs = ", ".join(f"{_q(w, u_w)} at {_q(h, u_a)}"
                              for h, w in zip(wind.altitude_m, wind.along_track_m_s))
            out.append(f"  along-track wind (negative: headwind): {pairs}; held beyond the ends")
    return out


_PROFILE_WORDS = {
    "procedure": "procedure (altitude never decreases and stays between the start and target altitudes)",
    "free": "free (the unconstrained optimum; zooms allowed)",
}


def _rating_words(s: Scenario) -> str:
    """The rating in force, or the rating schedule in words ('max' to 3000 ft, then 'climb' at
    95 % thrust)."""
    steps = s.mission.rating_schedule
    if not steps:
        return f"'{s.mission.rating or s.propulsion.default_rating}'"
    words = []
    for i, st in enumerate(steps):
        w = f"'{st.rating}'" + (f" at {100 * st.thrust_fraction:g} % thrust"
                                if st.thrust_fraction != 1.0 else "")
        if st.until_m is not None:
            w += f" to {_alt(s, f'mission.rating[{i}].until', st.until_m, 'ft')}"
        words.append(w)
    return ", then ".join(words)


def _mission_lines(s: Scenario) -> list[str]:
    mis, dt_k = s.mission, s.atmosphere.temperature_offset_k
    out = [f"Mission: climb with rating {_rating_words(s)}, profile "
           f"{_PROFILE_WORDS[mis.profile]}, acceleration share {_fmt(mis.acceleration_share)}"]
    out.extend(_point_lines(s, "start", mis.start, dt_k))
    out.extend(_point_lines(s, "target", mis.target, dt_k))
    u_alt = _u(s, "mission.target.altitude", "ft")
    gain = (energy_height_m(mis.target.altitude_m, mis.target.tas_m_s)
            - energy_height_m(mis.start.altitude_m, mis.start.tas_m_s))
    out.append(f"  energy height to gain: {_q(gain, u_alt)}")
    if mis.dash_distance_m is not None:
        out.append(f"  then dash at the target state to a ground distance of "
                   f"{_q(mis.dash_distance_m, _u(s, 'mission.dash_distance', 'nmi'))} from the start")
    return out


def _point_lines(scenario: Scenario, key: str, point: FlightPoint, dt_k: float) -> list[str]:
    fld = f"mission.{key}"
    u_alt = _u(scenario, f"{fld}.altitude", "ft")
    u_speed = _u(scenario, f"{fld}.{point.speed_kind}", "kt")
    mach, q, cas, rho = point_state(point, dt_k)
    he = energy_height_m(point.altitude_m, point.tas_m_s)
    eas = float(eas_from_tas(point.tas_m_s, rho))
    given = (f"Mach {_fmt(point.speed_value)}" if point.speed_kind == "mach"
             else f"{point.speed_kind.upper()} {_q(point.speed_value, u_speed)}")
    cl, clmax = level_flight_lift(scenario.aircraft, point, dt_k)
    return [
        f"  {key}: altitude {_alt(scenario, f'{fld}.altitude', point.altitude_m, 'ft')}, {given}",
        f"      = Mach {mach:.3f}, TAS {_q(point.tas_m_s, u_speed)}, CAS {_q(cas, u_speed)}, "
        f"EAS {_q(eas, u_speed)}, dynamic pressure {_q(q, _u(scenario, 'limits.max_dynamic_pressure', 'kPa'))}",
        f"      flight-path angle {_q(point.flight_path_angle_rad, _u(scenario, f'{fld}.flight_path_angle', 'deg'))}, "
        f"energy height {_q(he, u_alt)}",
        f"      lift coefficient in level flight at the start mass {cl:.3f} (CLmax {clmax:.3g})",
    ]


def _schedule_lines(s: Scenario) -> list[str]:
    if not s.schedules:
        return []
    out = [f"Schedules: {len(s.schedules)}"]
    for i, sc in enumerate(s.schedules):
        u = _u(s, f"schedules[{i}].cas", "kt")
        parts = []
        if sc.cas_below_restriction_m_s is not None:
            below = s.limits.cas_restriction[1]
            u_below = _u(s, f"schedules[{i}].cas_below_restriction", u)
            parts.append(f"CAS {_q(sc.cas_below_restriction_m_s, u_below)} below "
                         f"{_alt(s, 'limits.cas_restriction.below', below, 'ft')}")
        parts.append(f"CAS {_q(sc.cas_m_s, u)}")
        if sc.mach is not None:
            parts.append(f"Mach {_fmt(sc.mach)} above the crossover altitude")
        out.append(f"  '{sc.name}': {', then '.join(parts)}; acceleration share "
                   f"{_fmt(sc.acceleration_share)}")
    return out


def _limits_lines(s: Scenario) -> list[str]:
    lim = s.limits
    u_alt = _u(s, "mission.target.altitude", "ft")
    none = "none"
    top = (f"to {_alt(s, 'limits.max_altitude', lim.max_altitude_m, u_alt)}" if lim.max_altitude_m is not None
           else "(no upper limit)")
    out = ["Limits:", f"  altitude from {_alt(s, 'limits.min_altitude', lim.min_altitude_m, u_alt)} {top}"]
    out.append(f"  max Mach {_fmt(lim.max_mach) if lim.max_mach is not None else none}, max CAS "
               f"{_q(lim.max_cas_m_s, _u(s, 'limits.max_cas', 'kt')) if lim.max_cas_m_s is not None else none}, "
               f"max dynamic pressure "
               f"{_q(lim.max_dynamic_pressure_pa, _u(s, 'limits.max_dynamic_pressure', 'kPa')) if lim.max_dynamic_pressure_pa is not None else none}, "
               f"max load factor {_fmt(lim.max_load_factor)}")
    if lim.buffet_load_factor is not None:
        out.append(f"  buffet margin: lift coefficient at most CLmax / "
                   f"{_fmt(lim.buffet_load_factor)} (a {_fmt(lim.buffet_load_factor)} g manoeuvre "
                   "margin to buffet onset)")
    if lim.cas_restriction is not None:
        rc, below = lim.cas_restriction
        out.append(f"  CAS at most {_q(rc, _u(s, 'limits.cas_restriction.cas', 'kt'))} below "
                   f"{_alt(s, 'limits.cas_restriction.below', below, 'ft')}")
    return out


def _solver_lines(s: Scenario) -> list[str]:
    sol = s.solver
    ipopt = ", ".join(f"{k}={v}" for k, v in sol.ipopt.items()) or "defaults"
    return [f"Solver: energy-state grid {sol.grid_altitude_points} altitudes x {sol.grid_speed_points} speeds; "
            f"collocation {sol.intervals} intervals ({sol.transcription}), mesh tolerance "
            f"{_fmt(sol.mesh_tolerance)}, up to {sol.max_mesh_refinements} refinements, cost weight "
            f"{_q(sol.cost_weight_kg_per_s, _u(s, 'solver.cost_weight', 'kg/s'))}; time limit "
            f"{_q(sol.time_limit_s, _u(s, 'solver.time_limit', 's'))}; IPOPT options: {ipopt}"]
