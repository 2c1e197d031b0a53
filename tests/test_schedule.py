"""Tests of climbopt.schedule: crossover altitude, crew-style schedule rows and their CSV."""

from __future__ import annotations

import numpy as np
import pytest

from climbopt import CAUTION, report
from climbopt.airspeed import mach_from_cas
from climbopt.atmosphere import standard_atmosphere
from climbopt.results import Trajectory
from climbopt.schedule import (STEP_SI_M, STEP_US_M, climb_schedule, crossover_altitude_m,
                               default_step_m)
from synthetic_paths import straight_climb

FT = 0.3048                # m, exact (NIST SP 811)
KT = 1852.0 / 3600.0       # m/s, exact (NIST SP 811)


@pytest.mark.parametrize("cas_kt, mach, expected_ft", [
    # Standard-day crossover altitudes, common practice, no single source (computed values):
    # 310 kt / M 0.78 at about 27,800 ft,
    # 270 kt / M 0.70 at about 28,800 ft. Tolerance 100 ft: "about" plus the 0.13 % between the
    # geopotential pressure altitude crews quote and our geometric altitude.
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


def test_schedule_recovers_310_078():
    """A climb flown at 310 kt then M 0.78 is recognised as that schedule, crossover near
    27,800 ft (common practice, no source); rows at round 2,000 ft steps, CAS below the
    crossover and Mach above, time from start = altitude / rate by construction."""
    rate = 12.0
    traj = straight_climb(cas_m_s=310 * KT, mach=0.78, top_m=11_000.0, rate_m_s=rate, n=400)
    s = climb_schedule(traj, STEP_US_M)
    assert s.climb_cas_m_s / KT == pytest.approx(310.0, abs=1.0)
    assert s.climb_mach == pytest.approx(0.78, abs=0.003)
    assert s.crossover_altitude_m / FT == pytest.approx(27_800.0, abs=250.0)
    inner = [r for r in s.rows if r.point == ""]
    alts_ft = np.array([r.altitude_m for r in inner]) / FT
    assert np.allclose(alts_ft, 2000.0 * np.arange(1, len(inner) + 1), atol=1e-6)
    assert len(inner) == int(11_000.0 / FT // 2000)          # 2,000 ... 36,000 ft
    assert s.rows[0].point == "start" and s.rows[0].time_s == 0.0
    assert s.rows[-1].point == "top of climb"
    for r in s.rows:
        assert r.time_s == pytest.approx(r.altitude_m / rate, rel=1e-9)
        assert r.fly == ("CAS" if r.altitude_m < s.crossover_altitude_m else "Mach")
        assert r.fuel_kg == pytest.approx(1.5 * r.time_s, rel=1e-9)
    # below the crossover the speed to fly is 310 kt, above it M 0.78
    assert all(abs(r.cas_m_s / KT - 310.0) < 0.5 for r in s.rows if r.fly == "CAS")
    assert all(abs(r.mach - 0.78) < 1e-3 for r in s.rows if r.fly == "Mach")
    assert not s.notes


def test_schedule_level_leg_and_restriction():
    """A level leg after the climb gets an 'end' row; a 250 kt restriction below 10,000 ft
    (14 CFR 91.117(a)) is left out of the fit when asked."""
    traj = straight_climb(cas_m_s=300 * KT, mach=0.76, top_m=10_000.0, rate_m_s=10.0,
                          level_s=120.0, restriction=(250 * KT, 10_000 * FT), n=300)
    s = climb_schedule(traj, STEP_SI_M, fit_above_m=10_000 * FT)
    assert s.climb_cas_m_s / KT == pytest.approx(300.0, abs=1.5)
    assert s.rows[-1].point == "end"
    assert s.rows[-1].time_s == pytest.approx(1000.0 + 120.0, rel=1e-9)
    assert s.rows[-2].point == "top of climb"
    assert any("fitted above" in n for n in s.notes)
    low = [r for r in s.rows if 0 < r.altitude_m < 10_000 * FT - 1]
    assert all(abs(r.cas_m_s / KT - 250.0) < 0.5 for r in low)
    # rows every 500 m
    inner = [r.altitude_m for r in s.rows if r.point == ""]
    assert np.allclose(np.diff(inner), 500.0)


def test_schedule_with_descent_notes_first_passage():
    """A path that dips (zoom dive) gets a note and rows at the first passage."""
    traj = straight_climb(top_m=6000.0, n=200)
    tb = {k: v.copy() for k, v in traj.table.items()}
    h = tb["altitude_m"]
    h[100:110] = h[100] - np.linspace(0, 300, 10)          # a 300 m dip
    dipped = Trajectory("energy-state", "time", tb)
    s = climb_schedule(dipped, 500.0)
    assert any("descends" in n for n in s.notes)
    alts = [r.altitude_m for r in s.rows]
    assert alts == sorted(alts)
    # the 3000 m row lies before the dip: time = 3000 / 10 s
    row = [r for r in s.rows if abs(r.altitude_m - 3000.0) < 1e-6][0]
    assert row.time_s == pytest.approx(300.0, rel=1e-6)


def test_schedule_csv_us(tmp_path):
    """Schedule CSV in US units: speed to fly as '310 kt' or 'M 0.780', distances in nmi,
    the crossover line and the caution in the header comments."""
    traj = straight_climb(cas_m_s=310 * KT, mach=0.78, top_m=11_000.0, n=300)
    s = climb_schedule(traj, STEP_US_M)
    path = tmp_path / "s.csv"
    report.write_schedule_csv(path, s, "us", "demo")
    text = path.read_text()
    assert CAUTION in text and "crossover at 27," in text
    header, rows = report.read_csv(path)
    assert header[:3] == ["altitude [ft]", "fly", "speed to fly"]
    assert "distance [nmi]" in header
    fly = [r[2] for r in rows]
    assert "310 kt" in fly and "M 0.780" in fly
    assert float(rows[1][0]) == pytest.approx(2000.0)
    d = header.index("distance [nmi]")
    last = s.rows[-1]
    assert float(rows[-1][d]) == pytest.approx(last.distance_m / 1852.0, abs=0.01)
    assert "crossover" in report.format_schedule(s, "us")
