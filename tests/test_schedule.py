"""Tests of climbopt.schedule: crossover altitude and the crew-style schedule table, its text
and CSV forms (flown schedules of the demo transport, an invented aircraft)."""

from __future__ import annotations

import dataclasses

import numpy as np
import pytest

from climbopt import CAUTION
from climbopt.airspeed import mach_from_cas
from climbopt.atmosphere import standard_atmosphere
from climbopt.procedure import fly_schedule
from climbopt.report import read_csv
from climbopt.rutowski import solve_energy_state
from climbopt.scenario import ScheduleSpec
from climbopt.schedule import (STEP_US_M, climb_schedule, crossover_altitude_m, default_step_m,
                               format_schedule, schedule_records, schedule_summary,
                               write_schedule_csv)

FT = 0.3048                # m, exact (NIST SP 811)
KT = 1852.0 / 3600.0       # m/s, exact (NIST SP 811)


@pytest.mark.parametrize("cas_kt, mach, expected_ft", [
    # Standard-day crossover altitudes of common airliner climb schedules (common practice, no
    # source): 310 kt / M 0.78 at about 27,800 ft, 270 kt / M 0.70 at about 28,800 ft.
    # Tolerance 100 ft: "about" plus the 0.13 % between the geopotential pressure altitude
    # crews quote and our geometric altitude.
    (310.0, 0.78, 27_800.0),
    (270.0, 0.70, 28_800.0),
])
def test_crossover_altitude_scalar(cas_kt, mach, expected_ft):
    """Crossover altitude of common airliner climb schedules on a standard day."""
    h = crossover_altitude_m(cas_kt * KT, mach)
    assert h / FT == pytest.approx(expected_ft, abs=100.0)
    # at that altitude the CAS is that Mach (round trip through the pitot formulas)
    p = standard_atmosphere(h).pressure_pa
    assert float(mach_from_cas(cas_kt * KT, p)) == pytest.approx(mach, rel=1e-9)


def test_crossover_altitude_invalid():
    """Non-positive speeds and pairs that never cross inside the atmosphere are errors."""
    with pytest.raises(ValueError, match="positive"):
        crossover_altitude_m(-1.0, 0.8)
    with pytest.raises(ValueError, match="outside the standard atmosphere"):
        crossover_altitude_m(400 * KT, 0.3)   # 400 kt is M 0.6 at sea level already


def test_default_step():
    """Rows every 2,000 ft in US units, every 500 m in SI units."""
    assert default_step_m("us") == pytest.approx(2000 * FT)
    assert default_step_m("si") == 500.0
    with pytest.raises(ValueError, match="units"):
        default_step_m("metric")


@pytest.fixture(scope="module")
def flown(transport):
    """The demo transport flown at 250 kt below 10,000 ft, 272 kt, then M 0.72, with the level
    acceleration to M 0.78 at 35,000 ft."""
    sc, m = transport
    return fly_schedule(sc, m, ScheduleSpec("250/272/M0.72", 272 * KT, 0.72, 250 * KT))


def test_top_of_climb_is_first_arrival(transport, flown):
    """The top-of-climb row is the first arrival at the target altitude (to 1 s), even when the
    level flight after it drifts up by a fraction of a metre (as an optimiser's path may); a
    highest-point rule would put it at the end, 62 s later."""
    sc, _ = transport
    climb_end = [s for s in flown.segments if s.kind == "climb"][-1]
    t_arrival = flown.table.time_s[climb_end.end_index]
    h = flown.table.altitude_m.copy()
    h[climb_end.end_index + 1:] += np.linspace(0.0, 0.4, h.size - climb_end.end_index - 1)
    drifted = flown.with_(table=flown.table.replaced(altitude_m=h))
    assert flown.time_s - t_arrival > 30.0  # the case is not trivial
    for traj in (flown, drifted):
        s = climb_schedule(traj, STEP_US_M, scenario=sc)
        top = s.top_of_climb
        assert top.point == "top of climb"
        assert top.time_s == pytest.approx(t_arrival, abs=1.0)
        assert top.altitude_m == pytest.approx(35_000 * FT, abs=0.5)
        assert s.rows[-1].point == "end of level acceleration"
        assert s.rows[-1].time_s == pytest.approx(flown.time_s, abs=1e-9)


def test_flown_rows_state_the_schedule(transport, flown):
    """Rows of a flown schedule say what to fly in each segment (whole knots, Mach to 0.01), at
    the start, every 2,000 ft, the top of climb and the end of the level acceleration; the rate
    of climb is V sin(gamma) in ft/min and the time also reads as min:s."""
    sc, _ = transport
    s = climb_schedule(flown, STEP_US_M, scenario=sc)
    header, rows = schedule_records(s, "us")
    col = {name: k for k, name in enumerate(header)}
    fly = [r[col["fly"]] for r in rows]
    assert fly[0] == "accelerate to 250 kt"
    assert {"250 kt", "272 kt", "M 0.72", "level, accelerate to M 0.78"} <= set(fly)
    assert [r[col["altitude [ft]"]] for r in rows if r[-1] == ""] == \
        list(range(2000, 35_000, 2000))
    assert s.holds == [("CAS", pytest.approx(250 * KT), pytest.approx(10_000 * FT)),
                       ("CAS", pytest.approx(272 * KT), pytest.approx(s.crossover_altitude_m)),
                       ("Mach", pytest.approx(0.72), pytest.approx(35_000 * FT))]
    assert s.crossover_altitude_m == pytest.approx(crossover_altitude_m(272 * KT, 0.72), abs=10)
    row = next(r for r in s.rows if abs(r.altitude_m - 20_000 * FT) < 1e-6)
    tb = flown.table
    i = np.flatnonzero(tb.altitude_m >= 20_000 * FT)[0]
    rate = tb.tas_m_s[i] * np.sin(tb.flight_path_angle_rad[i])
    assert row.rate_of_climb_m_s == pytest.approx(rate, rel=2e-3)  # 100-ft point spacing
    r20 = rows[[k for k, r in enumerate(s.rows) if r is row][0]]
    assert r20[col["rate of climb [ft/min]"]] == round(rate / FT * 60.0)
    m, sec = (int(x) for x in r20[col["time [min:s]"]].split(":"))
    assert 60 * m + sec == round(row.time_s)
    assert r20[col["CAS [kt]"]] == 272
    summary = schedule_summary(s, "us")
    assert "250 kt to 10,000 ft, 272 kt to" in summary and "M 0.72 to 35,000 ft" in summary


def test_level_segment_rows(transport):
    """Level accelerations (share 1: at the start to 250 kt and at the restriction altitude to
    290 kt) and a dash cruise get rows of their own at their ends."""
    sc, m = transport
    dash = dataclasses.replace(sc, mission=dataclasses.replace(sc.mission, dash_distance_m=400e3))
    tr = fly_schedule(dash, m, ScheduleSpec("level", 290 * KT, 0.78, 250 * KT, 1.0))
    s = climb_schedule(tr, STEP_US_M, scenario=dash)
    ends = [r for r in s.rows if r.point.startswith("end of")]
    assert [r.point for r in ends] == ["end of level acceleration"] * 2 + ["end of cruise"]
    level = [seg for seg in tr.segments if seg.kind == "level acceleration"][1]
    assert ends[1].altitude_m == pytest.approx(10_000 * FT, abs=1e-6)
    assert ends[1].time_s == pytest.approx(tr.table.time_s[level.end_index], abs=1e-9)
    assert ends[1].cas_m_s == pytest.approx(290 * KT, abs=0.05)
    assert ends[0].cas_m_s == pytest.approx(250 * KT, abs=0.05)
    assert ends[2].distance_m == pytest.approx(400e3, rel=1e-9)
    assert s.rows.index(s.top_of_climb) < s.rows.index(ends[2])


def test_optimum_rows_give_its_own_speeds(transport):
    """For an energy-state optimum the rows give the path's own speeds where it first reaches
    each round altitude (CAS held in the 250 kt band below 10,000 ft)."""
    sc, m = transport
    es = solve_energy_state(sc, "time", model=m)
    s = climb_schedule(es, STEP_US_M, scenario=sc)
    assert not s.flown and s.holds == [] and s.crossover_altitude_m is None
    tb = es.table
    for r in s.rows:
        if r.point == "":
            i = np.flatnonzero(tb.altitude_m >= r.altitude_m - 1e-9)[0]
            lo = max(i - 1, 0)
            assert min(tb.cas_m_s[lo], tb.cas_m_s[i]) - 1e-9 <= r.cas_m_s \
                <= max(tb.cas_m_s[lo], tb.cas_m_s[i]) + 1e-9
    band = [r for r in s.rows if r.point == "" and 2000 * FT < r.altitude_m < 9000 * FT]
    assert band and all(r.fly == "CAS" and abs(r.cas_m_s - 250 * KT) < 0.5 * KT for r in band)
    text = format_schedule(s, "us")
    assert "the optimum's own speeds" in text and "mass 154,324 lb" in text


def test_schedule_csv_us(tmp_path, transport, flown):
    """Schedule CSV in US units: header with the summary, the conditions and the caution;
    columns in ft, kt, ft/min, lb, nmi."""
    sc, _ = transport
    s = climb_schedule(flown, STEP_US_M, scenario=sc)
    path = tmp_path / "s.csv"
    write_schedule_csv(path, s, "us", "demo")
    text = path.read_text()
    assert CAUTION in text and "# schedule 250/272/M0.72:" in text
    assert "ISA +0 K, rating climb, procedure climb profile" in text
    assert "limits: CAS 340 kt, Mach 0.82, 250 kt below 10,000 ft" in text
    header, rows = read_csv(path)
    assert header[:3] == ["altitude [ft]", "fly", "CAS [kt]"]
    assert "rate of climb [ft/min]" in header and "distance [nmi]" in header
    d = header.index("distance [nmi]")
    assert float(rows[-1][d]) == pytest.approx(flown.distance_m / 1852.0, abs=0.05)
    si = format_schedule(s, "si")
    assert "[km/h]" in si and "463 km/h to 3,048 m" in si  # 128.6 m/s = 463 km/h
