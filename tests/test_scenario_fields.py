"""Scenario fields added to the reader: mission profile and acceleration share, named climb
schedules, the run time limit, flight levels, the stall check, plausibility warnings, IPOPT
options checked by IPOPT, points exactly on a limit, validated changes (Scenario.replace) and
how `climbopt check` prints them.

The scenarios are the small invented test jet of tests/scenario_docs.py (edited per test) and
the invented demo transport (scenarios/transport_twinjet.toml).

Unit definitions (exact): 1 ft = 0.3048 m, 1 kt = 1852/3600 m/s, 1 lb = 0.45359237 kg
(International Yard and Pound Agreement, 1959); g0 = 9.80665 m/s^2 (3rd CGPM, 1901).
"""

from __future__ import annotations

import dataclasses
import math
from pathlib import Path

import pytest
from click.testing import CliRunner
from scenario_docs import BASE, DELETE, edited, find, problems_of, write

from climbopt.atmosphere import standard_atmosphere
from climbopt.cli import cli
from climbopt.describe import describe_scenario
from climbopt.scenario import ScenarioError, ScheduleSpec, load_scenario

ROOT = Path(__file__).resolve().parents[1]
TWINJET = ROOT / "scenarios" / "transport_twinjet.toml"
BUNDLED = sorted((ROOT / "scenarios").glob("*.toml")) + sorted((ROOT / "tests" / "data").glob("*.toml"))

FT = 0.3048
KT = 1852.0 / 3600.0
G0 = 9.80665


def check(path) -> tuple[int, str]:
    """Exit code and output of `climbopt check PATH` (never a traceback)."""
    result = CliRunner().invoke(cli, ["check", str(path)])
    assert "Traceback" not in result.output
    return result.exit_code, result.output


# ---- mission profile, acceleration share, time limit ----------------------------------------------


def test_profile_share_and_time_limit_defaults_and_values(tmp_path):
    """Defaults: procedure profile, share 0.5, 300 s; given values are read (10 min = 600 s)."""
    s = load_scenario(write(tmp_path, BASE))
    assert (s.mission.profile, s.mission.acceleration_share, s.solver.time_limit_s) == ("procedure", 0.5, 300.0)
    doc = edited(mission__profile="free", mission__acceleration_share=0.8, solver__time_limit="10 min")
    s = load_scenario(write(tmp_path, doc))
    assert (s.mission.profile, s.mission.acceleration_share, s.solver.time_limit_s) == ("free", 0.8, 600.0)


def test_profile_share_and_time_limit_invalid(tmp_path):
    """Unknown profile, a share outside (0, 1] and a time limit that is not a positive time."""
    doc = edited(mission__profile="zoom", mission__acceleration_share=1.5, solver__time_limit="0 s")
    problems = problems_of(tmp_path, doc)
    assert "expected one of 'procedure', 'free'" in find(problems, "mission.profile")
    assert "got 1.5; expected a fraction" in find(problems, "mission.acceleration_share")
    assert "expected a positive wall-clock time" in find(problems, "solver.time_limit")
    problems = problems_of(tmp_path, edited(mission__acceleration_share=0, solver__time_limit="5 kg"))
    assert "got 0" in find(problems, "mission.acceleration_share")
    assert "is a mass, not a time" in find(problems, "solver.time_limit")


def test_procedure_profile_never_descends_invalid(tmp_path):
    """A procedure climb may not end below its start altitude; a free profile may.

    The target is below the start altitude but at higher energy."""
    points = dict(mission__start={"altitude": "20000 ft", "cas": "250 kt"},
                  mission__target={"altitude": "15000 ft", "mach": 0.85})
    msg = find(problems_of(tmp_path, edited(**points)), "mission.target.altitude")
    assert "15000 ft is below the start altitude 20000 ft" in msg and 'profile = "free"' in msg
    s = load_scenario(write(tmp_path, edited(mission__profile="free", **points)))
    assert s.mission.target.altitude_m == pytest.approx(15000 * FT, rel=1e-12)


# ---- flight levels ----------------------------------------------------------------------------------


def test_flight_level_equals_feet_scalar(tmp_path):
    """FL350 equals 35,000 ft, in every altitude field and an engine-table axis.

    Flight levels are pressure altitude in hundreds of feet (common practice, no source);
    check prints them as written."""
    doc = edited(mission__target={"altitude": "FL350", "mach": 0.8},
                 limits__cas_restriction={"cas": "250 kt", "below": "FL100"},
                 limits__max_altitude="fl 400")
    doc["propulsion"]["ratings"]["max"]["altitude"] = ["FL0", "FL200", "FL400"]
    s = load_scenario(write(tmp_path, doc))
    assert s.mission.target.altitude_m == pytest.approx(35000 * FT, rel=1e-15)
    assert s.mission.target.altitude_m == load_scenario(write(tmp_path, edited(
        mission__target={"altitude": "35000 ft", "mach": 0.8}))).mission.target.altitude_m
    assert s.limits.cas_restriction[1] == pytest.approx(10000 * FT, rel=1e-15)
    assert s.limits.max_altitude_m == pytest.approx(40000 * FT, rel=1e-15)
    assert s.propulsion.ratings["max"].thrust_n.altitude_m == pytest.approx((0.0, 20000 * FT, 40000 * FT))
    text = describe_scenario(s)
    assert "target: altitude FL350, Mach 0.8" in text
    assert "CAS at most 250 kt below FL100" in text and "to fl 400" in text
    assert "target: altitude 10668 m" in describe_scenario(s, units="si")


@pytest.mark.parametrize("level", ["FL", "FL-10", "FL35.5.0", "FL 3 50", "FL1000", "FLx"])
def test_malformed_flight_level_exit_2(tmp_path, level):
    """Malformed flight levels are bad input: `climbopt check` exits 2 naming the field."""
    code, out = check(write(tmp_path, edited(mission__target={"altitude": level, "mach": 0.8})))
    assert code == 2
    assert f"mission.target.altitude: cannot read flight level '{level}': expected 'FL' followed by" in out


# ---- stall --------------------------------------------------------------------------------------------


def test_start_below_stall_speed_invalid(tmp_path):
    """A start (or target) below the stall speed at the start mass is refused.

    100 kt TAS at sea level needs CL = m g0 / (q S) = 2.420 at 20 t and 50 m^2 (rho0 =
    1.225 kg/m^3, US Standard Atmosphere 1976, Table I), above CLmax(M 0.151) = 1.175 (linear
    in the test jet's table, a0 = 340.294 m/s)."""
    v = 100 * KT
    cl = 20000 * G0 / (0.5 * 1.225 * v**2 * 50)
    clmax = 1.2 - 0.2 * (v / 340.294) / 1.2
    msg = find(problems_of(tmp_path, edited(mission__start={"altitude": "0 ft", "tas": "100 kt"})),
               "mission.start.tas")
    assert f"below the stall speed: level flight at the start mass needs a lift coefficient of {cl:.3f}, " \
           f"above CLmax {clmax:.3f}" in msg
    # the speed must grow by sqrt(CL / CLmax) to fly level
    assert f"expected at least about TAS {100 * math.sqrt(cl / clmax):.4g} kt" in msg
    doc = edited(mission__target={"altitude": "40000 ft", "mach": 0.3}, limits__max_mach=DELETE)
    assert "below the stall speed" in find(problems_of(tmp_path, doc), "mission.target.mach")


# ---- schedules ----------------------------------------------------------------------------------------


def test_schedules_scalar(tmp_path):
    """Schedules with every field, and with the defaults (restriction CAS, mission share, no Mach)."""
    doc = edited(mission__acceleration_share=0.4)
    doc["schedules"] = [
        {"name": "250/300/M0.78", "cas_below_restriction": "240 kt", "cas": "300 kt", "mach": 0.78,
         "acceleration_share": 1.0},
        {"name": "cas only", "cas": "230 kt"},
    ]
    s = load_scenario(write(tmp_path, doc))
    assert s.schedules == (
        ScheduleSpec("250/300/M0.78", 300 * KT, 0.78, 240 * KT, 1.0),
        # default below the restriction: the restriction's 250 kt, or the climb CAS if lower
        ScheduleSpec("cas only", 230 * KT, None, 230 * KT, 0.4),
    )
    text = describe_scenario(s)
    assert ("'250/300/M0.78': CAS 240 kt below 10000 ft, then CAS 300 kt, then Mach 0.78 above the "
            "crossover altitude; acceleration share 1") in text


def test_schedules_invalid(tmp_path):
    """Duplicate and empty names, speeds breaking the limits, Mach above the tables, no CAS."""
    doc = edited(limits__max_cas="320 kt")
    doc["schedules"] = [
        {"name": "a", "cas": "300 kt", "cas_below_restriction": "260 kt"},
        {"name": "a", "cas": "330 kt", "mach": 1.3},
        {"name": " ", "cas": "200 kt", "cas_below_restriction": "210 kt"},
        {"name": "no cas", "mach": 0.7},
    ]
    problems = problems_of(tmp_path, doc)
    assert "260 kt is above the restriction 250 kt" in find(problems, "schedules[0].cas_below_restriction")
    assert "'a' is already the name of schedules[0]" in find(problems, "schedules[1].name")
    assert "330 kt is above limits.max_cas 320 kt" in find(problems, "schedules[1].cas")
    assert "got 1.3; expected a climb Mach number > 0 and <= 1.2 (the top of the tables)" in find(
        problems, "schedules[1].mach")
    assert "is empty" in find(problems, "schedules[2].name")
    assert "210 kt is above the climb CAS 200 kt" in find(problems, "schedules[2].cas_below_restriction")
    assert "missing" in find(problems, "schedules[3].cas")
    doc["schedules"] = {"name": "x"}
    assert "expected [[schedules]] tables" in find(problems_of(tmp_path, doc), "schedules")


def test_schedule_below_restriction_without_restriction_warns(tmp_path):
    """cas_below_restriction without a CAS restriction is ignored, with a warning."""
    doc = edited(limits__cas_restriction=DELETE, mission__start={"altitude": "1000 ft", "cas": "250 kt"})
    doc["schedules"] = [{"name": "s", "cas": "280 kt", "cas_below_restriction": "250 kt"}]
    s = load_scenario(write(tmp_path, doc))
    assert s.schedules[0].cas_below_restriction_m_s is None
    assert s.warnings == (("schedules[0].cas_below_restriction",
                           "'250 kt' is ignored: the scenario has no limits.cas_restriction"),)


def test_demo_transport_schedule():
    """The invented demo transport carries one invented operator schedule, 250/290/M0.74."""
    (sc,) = load_scenario(TWINJET).schedules
    assert sc == ScheduleSpec("250/290/M0.74", 290 * KT, 0.74, 250 * KT, 0.6)


# ---- plausibility warnings ------------------------------------------------------------------------


def test_plausibility_warnings_printed_exit_0(tmp_path):
    """Thrust rising with altitude and a high thrust-to-weight ratio are warnings; exit 0.

    Invented jet: thrust 110 -> 120 kN from 0 to 20,000 ft at Mach 0.5; thrust scale 5 gives
    T/W = 5 x 100 kN / (20 t x g0) = 2.55. Printed after the summary."""
    thrust = {"unit": "kN", "values": [[100, 60, 30], [110, 120, 33], [130, 80, 40]]}
    doc = edited(propulsion__ratings__max__thrust=thrust, propulsion__thrust_scale=5.0)
    code, out = check(write(tmp_path, doc))
    assert code == 0, out
    ratio = 5 * 100e3 / (20000 * G0)
    assert ("warning: propulsion.ratings.max.thrust: thrust rises with altitude at fixed Mach in 1 of 6 "
            "steps; largest at Mach 0.5: 110 kN at 0 ft to 120 kN at 20000 ft") in out
    assert f"warning: propulsion.ratings.max.thrust: thrust-to-weight ratio {ratio:.3g} " in out
    assert out.index("warning:") > out.index("Solver:") and "OK:" in out


def test_transposed_table_and_rising_fuel_flow_warn(tmp_path):
    """A transposed square thrust table and a rising fuel-flow table draw warnings.

    The bundled demos draw none."""
    rating = dict(BASE["propulsion"]["ratings"]["max"])
    rating.pop("tsfc")
    rating["thrust"] = {"unit": "kN", "values": [[100, 110, 130], [60, 65, 80], [30, 33, 40]]}
    rating["fuel_flow"] = {"unit": "kg/h", "values": [[9000, 5000, 6000], [9000, 5000, 3000],
                                                      [9000, 5000, 3000]]}
    s = load_scenario(write(tmp_path, edited(propulsion__ratings__max=rating)))
    warnings = dict(s.warnings)
    assert warnings["propulsion.ratings.max.thrust"].startswith(
        "looks transposed: thrust falls from row to row (Mach) in 100% of the steps but from column "
        "to column (altitude) in only 0%")
    assert "fuel flow rises with altitude at fixed Mach in 1 of 6 steps; largest at Mach 0: 5000 kg/h" \
        in warnings["propulsion.ratings.max.fuel_flow"]
    for path in BUNDLED:
        if path.name != "interceptor_1969.toml":
            assert load_scenario(path).warnings == (), path.name


def test_published_interceptor_thrust_rises_at_its_corners_warning():
    """The 1969 interceptor's thrust table draws one warning: 5 of 90 steps rise.

    Source: Bryson, Desai & Hoffman, J. Aircraft 6(6), 1969, as tabulated by Betts 2010; the
    largest rise is 33.8 -> 45.7 klbf from 5,000 to 10,000 ft at Mach 1.8."""
    (fld, msg), = load_scenario(ROOT / "tests" / "data" / "interceptor_1969.toml").warnings
    assert fld == "propulsion.ratings.max.thrust"
    assert msg.startswith("thrust rises with altitude at fixed Mach in 5 of 90 steps; largest at Mach "
                          "1.8: 33.8 klbf at 5 kft to 45.7 klbf at 10 kft")


# ---- IPOPT options -------------------------------------------------------------------------------------


def test_unknown_ipopt_option_exit_2(tmp_path):
    """`not_an_option = 1` is refused by check (IPOPT's own option list, through CasADi), by name."""
    code, out = check(write(tmp_path, edited(solver__ipopt={"not_an_option": 1})))
    assert code == 2
    assert "solver.ipopt.not_an_option: not an IPOPT option" in out


def test_bad_ipopt_values_exit_2(tmp_path):
    """A setting IPOPT does not know and a value of the wrong type are refused with IPOPT's reason."""
    code, out = check(write(tmp_path, edited(solver__ipopt={"mu_strategy": "nonsense", "max_iter": "many"})))
    assert code == 2
    assert ("solver.ipopt.mu_strategy: 'nonsense' is not a valid setting; valid settings: monotone, "
            "adaptive") in out
    assert "solver.ipopt.max_iter: IPOPT expects a whole number for this option" in out


def test_valid_ipopt_options_pass(tmp_path):
    """max_iter = 500, tol = 1e-7, mu_strategy = "adaptive" pass check (exit 0)."""
    opts = {"max_iter": 500, "tol": 1e-7, "mu_strategy": "adaptive"}
    code, out = check(write(tmp_path, edited(solver__ipopt=opts)))
    assert code == 0, out
    assert "IPOPT options: max_iter=500, tol=1e-07, mu_strategy=adaptive" in out


# ---- points exactly on a limit --------------------------------------------------------------------


@pytest.mark.parametrize("changes", [
    dict(mission__target={"altitude": "30000 ft", "cas": "280 kt"}, limits__max_cas="280 kt"),
    # 280 kt = 518.56 km/h exactly; the two roundings differ in the last bit at most
    dict(mission__target={"altitude": "30000 ft", "cas": "280 kt"}, limits__max_cas="518.56 km/h"),
    dict(limits__max_mach=0.8),
    dict(limits__max_altitude="30000 ft"),
    dict(limits__max_altitude="FL300"),
    dict(limits__min_altitude="1000 ft"),
    dict(mission__target={"altitude": "40000 ft", "mach": 0.8}),  # the engine table's top
])
def test_point_exactly_on_a_limit_passes(tmp_path, changes):
    """A point exactly on a limit or a table edge is inside, in any units.

    Relative tolerance 1e-9."""
    s = load_scenario(write(tmp_path, edited(**changes)))
    assert s.mission.target.tas_m_s > 0


def test_point_just_beyond_a_limit_invalid(tmp_path):
    """280.001 kt against a 280 kt limit (3.6e-6 relative) is beyond it."""
    doc = edited(mission__target={"altitude": "30000 ft", "cas": "280.001 kt"}, limits__max_cas="280 kt")
    assert "exceeds limits.max_cas 280 kt" in find(problems_of(tmp_path, doc), "mission.target.cas")


# ---- Scenario.replace -----------------------------------------------------------------------------


def test_replace_example_values():
    """The documented example: each change as written in a file, converted like a file."""
    s = load_scenario(TWINJET)
    r = s.replace(mass="65 t", temperature_offset="10 K", thrust_scale=0.95, target_altitude="FL370",
                  target_speed=0.8, cost_weight="0.5 kg/s")
    assert r.aircraft.mass_kg == 65000.0 and r.atmosphere.temperature_offset_k == 10.0
    assert r.propulsion.thrust_scale == 0.95 and r.solver.cost_weight_kg_per_s == 0.5
    assert r.mission.target.altitude_m == pytest.approx(37000 * FT, rel=1e-15)
    a = float(standard_atmosphere(37000 * FT, 10.0).speed_of_sound_m_s)
    assert r.mission.target.tas_m_s == pytest.approx(0.8 * a, rel=1e-12)
    assert r.display_units["aircraft.mass"] == "t" and r.display_text == {"mission.target.altitude": "FL370"}
    assert "start mass 65 t" in describe_scenario(r) and "target: altitude FL370, Mach 0.8" in describe_scenario(r)
    assert s.aircraft.mass_kg == 70000.0  # the original is unchanged
    assert r.limits == s.limits and r.schedules == s.schedules and r.propulsion.ratings == s.propulsion.ratings


@pytest.mark.parametrize("path", BUNDLED, ids=lambda p: p.name)
def test_replace_without_changes_is_exact(path):
    """Written back in SI and read again, every bundled scenario is equal to itself."""
    s = load_scenario(path)
    assert s.replace() == s


def test_replace_is_validated_like_a_file():
    """Scenario.replace refuses what a file would, naming the change.

    A mass below the fuel capacity, a limit the target breaks (by dotted name), a malformed
    flight level; unknown names get a suggestion."""
    s = load_scenario(TWINJET)
    with pytest.raises(ScenarioError) as info:
        s.replace(mass="15 t")
    (fld, msg), = info.value.problems
    assert fld == "aircraft.fuel_capacity"
    assert msg.endswith("exceeds the start mass '15 t'; expected at most the start mass "
                        "(after the change aircraft.mass = '15 t')")
    with pytest.raises(ScenarioError) as info:
        s.replace(**{"limits.max_mach": 0.7})
    assert info.value.problems == [
        ("schedules[0].mach", "0.74 is above limits.max_mach 0.7; expected a schedule inside the limits "
                              "(after the change limits.max_mach = 0.7)"),
        ("mission.target.mach", "Mach 0.780 exceeds limits.max_mach 0.7 (after the change "
                                "limits.max_mach = 0.7)")]
    with pytest.raises(ScenarioError, match="mission.target.altitude: cannot read flight level 'FL 3 50'"):
        s.replace(target_altitude="FL 3 50")
    with pytest.raises(ScenarioError, match="unknown change 'weight' \\(did you mean 'mass'\\?\\)"):
        s.replace(weight="60 t")


def test_replace_si_and_kind_of_speed():
    """replace_si equals replace with SI text; target_cas switches the kind of speed.

    A change made with dataclasses.replace (a coarse grid) is kept."""
    s = load_scenario(TWINJET)
    assert s.replace_si(mass=65000.0, target_altitude=10000.0) == s.replace(mass="65000 kg",
                                                                            target_altitude="10000 m")
    r = s.replace(target_cas="280 kt", target_altitude="30000 ft")
    assert (r.mission.target.speed_kind, r.mission.target.speed_value) == ("cas", 280 * KT)
    coarse = dataclasses.replace(s, solver=dataclasses.replace(s.solver, grid_altitude_points=30))
    assert coarse.replace(mass="60 t").solver.grid_altitude_points == 30
    with pytest.raises(ScenarioError, match="replace_si takes SI numbers"):
        s.replace_si(mass="60 t")


def test_vanishing_speed_is_below_stall_invalid(tmp_path):
    """Mach 5e-324 (q = 0 after rounding) is below the stall speed, not a ZeroDivisionError.

    Found by the fuzz benchmark."""
    doc = edited(mission__target={"altitude": "30000 ft", "mach": 5e-324})
    msg = find(problems_of(tmp_path, doc), "mission.target.mach")
    assert msg == "below the stall speed: the speed is too small to give any lift"
