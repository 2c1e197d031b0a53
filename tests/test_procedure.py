"""Tests of climbopt.procedure: schedules flown through the model and the best flyable schedule.

Most cases fly the bundled demo transport (an invented aircraft, scenarios/transport_twinjet.toml:
250 kt below 10,000 ft, max 340 kt / Mach 0.82, climb from 1,500 ft / 200 kt to 35,000 ft /
Mach 0.78).
"""

from __future__ import annotations

import dataclasses
import math

import numpy as np
import pytest
from scipy.integrate import simpson

from climbopt.aircraft import Domain, build_model
from climbopt.atmosphere import A0_M_S, P0_PA, RHO0_KG_M3, T0_K, AtmosphereState
from climbopt.collocation import solve_collocation
from climbopt.procedure import ScheduleNotFlyable, best_schedule_spec, fly_schedule
from climbopt.results import Method, Objective
from climbopt.rutowski import solve_energy_state
from climbopt.scenario import FlightPoint, Limits, ScheduleSpec
from climbopt.schedule import crossover_altitude_m

KT = 1852.0 / 3600.0  # m/s, exact (NIST SP 811)
FT = 0.3048           # m, exact (NIST SP 811)


def _spec(name="250/290/M0.78", cas_kt=290.0, mach=0.78, below_kt=250.0, share=0.5):
    return ScheduleSpec(name, cas_kt * KT, mach, None if below_kt is None else below_kt * KT,
                        share)


def _segment_slice(traj, seg):
    return slice(seg.start_index, seg.end_index + 1)


def test_flown_schedule_energy_bookkeeping_and_cas_hold(transport):
    """Along a flown 250/290/M0.78 schedule d he/dt = Ps on every segment (Simpson's rule over
    the 100-ft points; 1e-5 relative: integration tolerance 1e-8 and the quadrature's error),
    constant-CAS segments hold their CAS to 0.5 kt, the Mach segment its Mach, and the CAS hold
    gives way to the Mach hold at the crossover of 290 kt / M 0.78."""
    sc, m = transport
    tr = fly_schedule(sc, m, _spec())
    assert tr.method is Method.SCHEDULE and tr.objective is Objective.NONE
    assert tr.name == "250/290/M0.78" and tr.profile == "procedure"
    assert [s.kind for s in tr.segments] == ["accelerate", "climb", "accelerate", "climb",
                                             "climb"]
    tb = tr.table
    for seg in tr.segments:
        sl = _segment_slice(tr, seg)
        d_he = tb.energy_height_m[sl][-1] - tb.energy_height_m[sl][0]
        assert simpson(tb.ps_m_s[sl], x=tb.time_s[sl]) == pytest.approx(d_he, rel=1e-5)
    holds = [s for s in tr.segments if s.kind == "climb"]
    assert np.max(np.abs(tb.cas_m_s[_segment_slice(tr, holds[0])] - 250 * KT)) < 0.5 * KT
    assert np.max(np.abs(tb.cas_m_s[_segment_slice(tr, holds[1])] - 290 * KT)) < 0.5 * KT
    assert np.max(np.abs(tb.mach[_segment_slice(tr, holds[2])] - 0.78)) < 1e-6
    # crossover: exact US Standard Atmosphere 1976 against the model's C2 twin (0.05 % in
    # pressure, a few metres of altitude)
    h_x = tb.altitude_m[holds[2].start_index]
    assert h_x == pytest.approx(crossover_altitude_m(290 * KT, 0.78), abs=10.0)
    assert any("crossover altitude" in n for n in tr.notes)
    # every column at dense points: 100 ft apart in the climbs
    dh = np.diff(tb.altitude_m[_segment_slice(tr, holds[1])])
    assert np.median(dh) == pytest.approx(100 * FT, rel=0.02)
    assert np.all(tb.load_factor > 0.98) and np.all(tb.load_factor <= 1.0 + 1e-12)


class _ConstantAir:
    """Sea-level standard air at every altitude (US Standard Atmosphere 1976 sea-level values):
    a constant CAS is then a constant TAS, so the climb correction factor is exactly 1."""

    altitude_min_m = -1000.0
    altitude_max_m = 30000.0

    def __call__(self, h):
        z = h * 0.0
        return AtmosphereState(T0_K + z, P0_PA + z, RHO0_KG_M3 + z, A0_M_S + z)


class _LinearCeilingModel:
    """Stand-in aircraft with the interface the procedure uses: no drag, no fuel flow and a
    thrust that makes Ps = V T / (m g0) = RC0 (1 - h / H) exactly."""

    def __init__(self, rc0_m_s: float, ceiling_m: float):
        self.rc0, self.ceiling = rc0_m_s, ceiling_m
        self.reference_area_m2, self.mass_kg = 100.0, 10_000.0
        self.thrust_alignment, self.default_rating = "path", "climb"
        self.throttle_min, self.throttle_max = 0.0, 1.0
        self.atmosphere = _ConstantAir()
        self.domain = self.fit_domain = Domain(-1000.0, 30000.0, 0.05, 0.9)

    def thrust_and_fuel_flow(self, h, mach, throttle=1.0, rating=None, *, check=True):
        weight = self.mass_kg * 9.80665
        return (throttle * weight * self.rc0 * (1.0 - h / self.ceiling) / (mach * A0_M_S),
                0.0 * h)

    def drag_coefficient(self, cl, mach, *, check=True):
        return 0.0 * cl

    def cl_max(self, mach, *, check=True):
        return 2.0 + 0.0 * mach


def test_time_to_climb_closed_form(transport):
    """Rate of climb falling linearly from RC0 at sea level to zero at the absolute ceiling H:
    time to climb to h = (H / RC0) ln(H / (H - h)) (textbook result, from memory). The
    integrator reproduces it at every output altitude to 0.5 %."""
    sc, _ = transport
    rc0, ceiling, top = 15.0, 10_000.0, 8_000.0
    v = 150.0
    point = FlightPoint(0.0, "cas", v, v)
    mission = dataclasses.replace(sc.mission, start=point,
                                  target=dataclasses.replace(point, altitude_m=top),
                                  dash_distance_m=None)
    stand_in = dataclasses.replace(sc, mission=mission, limits=Limits(min_altitude_m=0.0),
                                   aircraft=dataclasses.replace(sc.aircraft,
                                                                fuel_capacity_kg=None))
    tr = fly_schedule(stand_in, _LinearCeilingModel(rc0, ceiling), ScheduleSpec("tas", v))
    h, t = tr.table.altitude_m, tr.table.time_s
    expected = ceiling / rc0 * np.log(ceiling / (ceiling - h))
    assert t[-1] == pytest.approx(ceiling / rc0 * math.log(5.0), rel=5e-3)
    assert np.allclose(t[1:], expected[1:], rtol=5e-3)
    assert np.allclose(tr.table.ps_m_s, rc0 * (1.0 - h / ceiling), rtol=1e-9)
    assert [s.kind for s in tr.segments] == ["climb"]


@pytest.fixture(scope="module")
def optima(transport):
    """Collocation optimum (procedure profile, warm-started from the energy-state path) and the
    best flyable schedule, for minimum time and minimum fuel."""
    sc, m = transport
    out = {}
    for obj in ("time", "fuel"):
        ref = solve_collocation(sc, obj, model=m, guess=solve_energy_state(sc, obj, model=m))
        assert ref.converged
        out[obj] = (ref, *best_schedule_spec(sc, m, obj, reference=ref))
    return out


@pytest.mark.parametrize("objective, attr", [("time", "time_s"), ("fuel", "fuel_kg")])
def test_best_schedule_against_collocation(optima, objective, attr):
    """The best flyable schedule is never better than the collocation optimum (same objective,
    procedure profile) by more than 0.1 % (collocation mesh tolerance 1e-4, flight integration
    1e-8, and the quasi-steady model's free changes of flight-path angle), and is within 3 %
    of it; its penalty is reported against the reference."""
    ref, spec, best = optima[objective]
    j_ref, j_best = getattr(ref, attr), getattr(best, attr)
    assert j_best >= j_ref * (1.0 - 1e-3)
    assert j_best <= j_ref * 1.03
    assert best.method is Method.BEST_SCHEDULE and best.objective == objective
    c = best.reference
    assert c.objective_difference_relative == pytest.approx((j_best - j_ref) / j_ref, rel=1e-9)
    assert c.time_difference_s == pytest.approx(best.time_s - ref.time_s, rel=1e-9)
    assert any(n.startswith("against the collocation") for n in best.notes)
    # rounded as flown: whole knots and Mach to 0.01; the restriction CAS at most 250 kt
    assert spec.cas_m_s / KT == pytest.approx(round(spec.cas_m_s / KT), abs=1e-9)
    assert spec.cas_below_restriction_m_s <= 250 * KT * (1 + 1e-12)
    if spec.mach is not None:
        assert spec.mach * 100 == pytest.approx(round(spec.mach * 100), abs=1e-9)


def test_user_schedule_equal_to_best_gives_same_result(transport, optima):
    """Flying the best schedule's speeds as a user schedule reproduces its flight exactly."""
    sc, m = transport
    _, spec, best = optima["time"]
    again = fly_schedule(sc, m, dataclasses.replace(spec, name="mine"))
    assert again.name == "mine" and again.method is Method.SCHEDULE
    assert again.time_s == pytest.approx(best.time_s, rel=1e-12)
    assert again.fuel_kg == pytest.approx(best.fuel_kg, rel=1e-12)
    assert again.table.size == best.table.size
    assert best.name == "/".join([f"{spec.cas_below_restriction_m_s / KT:.0f}",
                                  f"{spec.cas_m_s / KT:.0f}"]
                                 + ([f"M{spec.mach:.2f}"] if spec.mach else []))


def test_unflyable_mach_above_limit(transport):
    """Mach 0.84 above the 0.82 limit: the error names the Mach row where 290 kt reaches
    M 0.82 (that crossover altitude, to the 100-ft point spacing)."""
    sc, m = transport
    with pytest.raises(ScheduleNotFlyable, match="Mach limit") as err:
        fly_schedule(sc, m, _spec("hot", mach=0.84))
    e = err.value
    assert e.limit == "mach" and e.schedule == "hot" and "'hot'" in str(e)
    assert e.altitude_m == pytest.approx(crossover_altitude_m(290 * KT, 0.82), abs=35.0)
    assert e.mach == pytest.approx(0.82, abs=0.003)


def test_unflyable_below_stall_speed(transport):
    """150 kt at 70 t is below the CLmax speed (1 g stall near 153 kt EAS at sea level,
    from the model's CLmax 1.44): the stall row is named, right after the start."""
    sc, m = transport
    with pytest.raises(ScheduleNotFlyable, match="CLmax") as err:
        fly_schedule(sc, m, _spec("slow", cas_kt=150.0, mach=None, below_kt=150.0))
    e = err.value
    assert e.limit == "stall"
    assert e.altitude_m < 4000 * FT and 150.0 <= e.cas_m_s / KT < 160.0


def test_unflyable_restriction_and_malformed(transport):
    """290 kt without a restriction segment breaks 250 kt below 10,000 ft (14 CFR 91.117(a));
    a share outside (0, 1] or a restriction CAS where the scenario has none is a ValueError
    (not 'unflyable')."""
    sc, m = transport
    with pytest.raises(ScheduleNotFlyable, match="restriction") as err:
        fly_schedule(sc, m, _spec("fast", below_kt=None))
    assert err.value.limit == "cas_restriction" and err.value.altitude_m < 10_000 * FT
    with pytest.raises(ValueError, match="acceleration_share") as err:
        fly_schedule(sc, m, _spec(share=0.0))
    assert not isinstance(err.value, ScheduleNotFlyable)
    free = dataclasses.replace(sc, limits=dataclasses.replace(sc.limits, cas_restriction=None))
    with pytest.raises(ValueError, match="no CAS restriction"):
        fly_schedule(free, m, _spec())


def test_unflyable_no_climb_and_fuel(transport):
    """At 45 % thrust the climb stalls below the target (the error gives the highest altitude
    reached, where Ps is nearly zero); at 62 % the target Mach cannot be reached level at the
    target altitude; with 500 kg of fuel the capacity runs out where the full flight has burnt
    500 kg."""
    sc, m = transport
    weak = dataclasses.replace(sc, propulsion=dataclasses.replace(sc.propulsion,
                                                                  thrust_scale=0.45))
    mw = build_model(weak)
    with pytest.raises(ScheduleNotFlyable, match="highest altitude reached") as err:
        fly_schedule(weak, mw, _spec())
    e = err.value
    assert e.limit == "ps" and e.highest_altitude_m < 35_000 * FT
    ps = float(mw.evaluate(e.altitude_m, e.tas_m_s, e.mass_kg, rating="climb").ps_m_s)
    start = weak.mission.start
    ps0 = float(mw.evaluate(start.altitude_m, start.tas_m_s, mw.mass_kg, rating="climb").ps_m_s)
    assert e.cas_m_s == pytest.approx(290 * KT, rel=1e-6)  # in the 290 kt hold
    assert 0.0 < ps < 0.02 * ps0
    weaker = dataclasses.replace(sc, propulsion=dataclasses.replace(sc.propulsion,
                                                                    thrust_scale=0.62))
    with pytest.raises(ScheduleNotFlyable, match="target speed cannot be reached") as err:
        fly_schedule(weaker, build_model(weaker), _spec(cas_kt=250.0, mach=0.70))
    assert err.value.altitude_m == pytest.approx(35_000 * FT, abs=0.5)
    assert 0.70 < err.value.mach < 0.78
    full = fly_schedule(sc, m, _spec())
    h_500 = np.interp(500.0, full.table.fuel_used_kg, full.table.altitude_m)
    small = dataclasses.replace(sc, aircraft=dataclasses.replace(sc.aircraft,
                                                                 fuel_capacity_kg=500.0))
    with pytest.raises(ScheduleNotFlyable, match="fuel capacity") as err:
        fly_schedule(small, m, _spec())
    assert err.value.limit == "fuel"
    assert err.value.altitude_m == pytest.approx(h_500, abs=5.0)


def test_share_and_level_segments(transport):
    """Share 1 accelerates level at 10,000 ft; share 0.5 climbs while accelerating; a lower
    Mach ends with a level acceleration at 35,000 ft to the target speed; a dash cruises level
    at thrust = drag to the dash distance."""
    sc, m = transport
    level = fly_schedule(sc, m, _spec(share=1.0))
    seg = level.segments[2]
    assert seg.kind == "level acceleration"
    assert np.ptp(level.table.altitude_m[_segment_slice(level, seg)]) == 0.0
    assert level.table.altitude_m[seg.start_index] == pytest.approx(10_000 * FT, abs=1e-6)
    half = fly_schedule(sc, m, _spec())
    assert half.segments[2].kind == "accelerate"
    assert np.ptp(half.table.altitude_m[_segment_slice(half, half.segments[2])]) > 100.0
    low = fly_schedule(sc, m, _spec(mach=0.72))
    top = low.segments[-1]
    assert top.kind == "level acceleration"
    assert np.all(low.table.altitude_m[_segment_slice(low, top)] == sc.mission.target.altitude_m)
    assert low.table.tas_m_s[-1] == pytest.approx(sc.mission.target.tas_m_s, abs=1e-3)
    dash = dataclasses.replace(sc, mission=dataclasses.replace(sc.mission,
                                                              dash_distance_m=400e3))
    tr = fly_schedule(dash, m, _spec())
    cruise = tr.segments[-1]
    sl = _segment_slice(tr, cruise)
    assert cruise.kind == "cruise" and tr.distance_m == pytest.approx(400e3, rel=1e-9)
    assert np.max(np.abs(tr.table.ps_m_s[sl])) < 1e-6
    assert np.all((tr.table.throttle[sl] > m.throttle_min) & (tr.table.throttle[sl] < 1.0))


def test_best_schedule_weighted(transport, optima):
    """Minimum fuel + 2 kg/s x time: the best schedule costs no more than the minimum-time and
    minimum-fuel schedules flown in the same scenario, and its climb CAS lies between theirs."""
    sc, m = transport
    w = 2.0
    weighted = dataclasses.replace(sc, solver=dataclasses.replace(sc.solver,
                                                                  cost_weight_kg_per_s=w))
    spec, best = best_schedule_spec(weighted, m, "weighted")
    assert best.objective is Objective.WEIGHTED
    j = best.fuel_kg + w * best.time_s
    for obj in ("time", "fuel"):
        other = fly_schedule(weighted, m, optima[obj][1])
        assert j <= other.fuel_kg + w * other.time_s + 1e-6 * j
    lo, hi = sorted(optima[o][1].cas_m_s for o in ("time", "fuel"))
    assert lo - 0.5 * KT <= spec.cas_m_s <= hi + 0.5 * KT


def test_mach_reached_in_a_speed_change_is_kept():
    """On the published interceptor (Bryson, Desai & Hoffman, J. Aircraft 6(6), 1969) the best
    minimum-time schedule reaches its Mach while still accelerating to its CAS: that Mach is
    the crossover and must stay in the schedule (flown CAS-only the aircraft leaves the
    model's tables near Mach 2). A constant schedule cannot fly this zoom climb well, and the
    result says so against the optimum."""
    from pathlib import Path

    from climbopt.aircraft import build_model as build
    from climbopt.scenario import load_scenario

    scenario = load_scenario(Path(__file__).resolve().parents[1] / "tests" / "data" /
                             "interceptor_1969.toml")
    model = build(scenario)
    optimum = solve_energy_state(scenario, "time", model=model)
    spec, traj = best_schedule_spec(scenario, model, "time", reference=optimum)
    assert spec.mach is not None
    climb = traj.table.altitude_m < scenario.mission.target.altitude_m - 1.0
    assert traj.table.mach[climb].max() <= spec.mach + 5e-3
    crossover = [n for n in traj.notes if n.startswith("crossover altitude")]
    assert crossover and "not reached" not in crossover[0]
    assert traj.reference.objective_difference_relative > 0.10
    assert any("no constant CAS/Mach schedule comes near the optimum" in n for n in traj.notes)
