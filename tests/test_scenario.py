"""Scenario files: unit parsing, loading, validation (one test per error class) and robustness.

Unit definitions used as references (international definitions, exact):
1 ft = 0.3048 m; 1 lb = 0.45359237 kg; 1 nmi = 1852 m; 1 kt = 1852/3600 m/s (International Yard and
Pound Agreement, 1959; nautical mile: International Hydrographic Conference, 1929);
standard gravity g0 = 9.80665 m/s^2 (3rd CGPM, 1901), hence 1 lbf = 0.45359237 * 9.80665 N;
1 hp (mechanical) = 550 ft lbf/s.
"""

from __future__ import annotations

import copy
import math
import random
from pathlib import Path

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from scenario_docs import BASE, DELETE, edited, find, problems_of, write
from scenario_fuzz import paths as _paths
from scenario_fuzz import to_toml

from climbopt.describe import describe_scenario
from climbopt.scenario import (
    Scenario,
    ScenarioError,
    energy_height_m,
    load_scenario,
)
from climbopt.units import (
    UnitError,
    from_si,
    ft_to_m,
    kg_to_lb,
    kt_to_m_s,
    lb_to_kg,
    m_s_to_kt,
    m_to_ft,
    m_to_nmi,
    nmi_to_m,
    parse_quantity,
    to_si,
)

ROOT = Path(__file__).resolve().parents[1]
DEMOS = sorted((ROOT / "scenarios").glob("*.toml"))
BENCHMARK = ROOT / "tests" / "data" / "interceptor_1969.toml"

FT = 0.3048
LB = 0.45359237
NMI = 1852.0
KT = 1852.0 / 3600.0
G0 = 9.80665
LBF = LB * G0


# ---------------------------------------------------------------------------------------------
# Units (references: the international definitions in the module docstring)


def test_output_conversions_match_international_definitions_scalar():
    assert m_to_ft(0.3048) == pytest.approx(1.0, rel=1e-15)
    assert ft_to_m(1.0) == pytest.approx(FT, rel=1e-15)
    assert m_s_to_kt(KT) == pytest.approx(1.0, rel=1e-15)
    assert kt_to_m_s(1.0) == pytest.approx(KT, rel=1e-15)
    assert kg_to_lb(LB) == pytest.approx(1.0, rel=1e-15)
    assert lb_to_kg(1.0) == pytest.approx(LB, rel=1e-15)
    assert m_to_nmi(NMI) == pytest.approx(1.0, rel=1e-15)
    assert nmi_to_m(1.0) == pytest.approx(NMI, rel=1e-15)


def test_output_conversions_round_trip_array():
    import numpy as np

    x = np.array([0.0, 1.0, 1234.5, 1e5])
    assert np.allclose(ft_to_m(m_to_ft(x)), x, rtol=1e-15)
    assert np.allclose(from_si(x, "kft"), x / (1000 * FT), rtol=1e-15)
    assert np.allclose(to_si(x, "klbf"), x * 1000 * LBF, rtol=1e-15)
    assert np.allclose(from_si(x, "kg/h"), x * 3600.0, rtol=1e-15)


@pytest.mark.parametrize(
    "text, dimension, expected",
    [
        ("30000 ft", "length", 30000 * FT),
        ("30,000 ft", "length", 30000 * FT),
        ("35 kft", "length", 35000 * FT),
        ("150 nmi", "length", 150 * NMI),
        ("250 kt", "speed", 250 * KT),
        ("424.26 ft/s", "speed", 424.26 * FT),
        ("5200 kg", "mass", 5200.0),
        ("42000 lb", "mass", 42000 * LB),
        ("80 kPa", "pressure", 80000.0),
        ("530 ft^2", "area", 530 * FT**2),
        ("24.2 klbf", "force", 24200 * LBF),
        ("1000 hp", "power", 1000 * 550 * FT * LBF),
        ("0.6 lb/lbf/h", "tsfc", 0.6 * LB / (LBF * 3600.0)),
        ("0.5 lb/hp/h", "psfc", 0.5 * LB / (550 * FT * LBF * 3600.0)),
        ("2500 kg/h", "mass_flow", 2500 / 3600.0),
        ("1600 s", "time", 1600.0),
        ("15 K", "temperature_difference", 15.0),
        ("15 delta_degC", "temperature_difference", 15.0),
        ("9 delta_degF", "temperature_difference", 5.0),
        ("3 deg", "angle", 3 * math.pi / 180),
        ("0.1 1/deg", "per_angle", 0.1 * 180 / math.pi),
        ("0.78", "dimensionless", 0.78),
        (0.78, "dimensionless", 0.78),
    ],
)
def test_parse_quantity_to_si_scalar(text, dimension, expected):
    assert parse_quantity(text, dimension, "x") == pytest.approx(expected, rel=1e-12)


@pytest.mark.parametrize(
    "text, dimension, words",
    [
        ("30000 fet", "length", ["unknown unit 'fet'", "did you mean 'ft'"]),
        ("250 kt", "length", ["is a speed, not a length"]),
        ("30000", "length", ["missing unit", "'30000'"]),
        (30000, "length", ["missing unit"]),
        ("nan ft", "length", ["not a finite number"]),
        ("inf kg", "mass", ["not a finite number"]),
        ("15 degC", "temperature_difference", ["absolute temperature", "delta_degC"]),
        ("ft", "length", ["expected a number followed by a unit"]),
        ("3 deg", "per_angle", ["wrong dimension"]),
        (True, "length", ["boolean"]),
        ("0.7 ft", "dimensionless", ["plain number"]),
    ],
)
def test_parse_quantity_invalid(text, dimension, words):
    with pytest.raises(UnitError) as info:
        parse_quantity(text, dimension, "aircraft.mass")
    msg = str(info.value)
    assert msg.startswith("aircraft.mass: ")
    for w in words:
        assert w in msg, msg


@settings(max_examples=100, deadline=None)
@given(st.one_of(st.text(max_size=25), st.floats(), st.integers(), st.booleans(), st.none(),
                 st.lists(st.integers(), max_size=3)),
       st.sampled_from(["length", "speed", "dimensionless", "tsfc", "angle", "temperature_difference"]))
def test_parse_quantity_only_raises_unit_error_invalid(text, dimension):
    try:
        value = parse_quantity(text, dimension, "f")
    except UnitError as exc:
        assert str(exc).startswith("f: ")
    else:
        assert math.isfinite(value)


# ---------------------------------------------------------------------------------------------
# The bundled files


@pytest.mark.parametrize("path", DEMOS + [BENCHMARK], ids=lambda p: p.name)
def test_bundled_scenarios_load(path):
    s = load_scenario(path)
    assert isinstance(s, Scenario)
    assert s.mission.target.tas_m_s > 0
    he0 = energy_height_m(s.mission.start.altitude_m, s.mission.start.tas_m_s)
    he1 = energy_height_m(s.mission.target.altitude_m, s.mission.target.tas_m_s)
    assert he1 > he0
    text = describe_scenario(s)
    assert s.aircraft.name in text


def test_demo_set_complete_and_invented():
    names = {p.name for p in DEMOS}
    assert {"transport_twinjet.toml", "interceptor_dash.toml", "turboprop_regional.toml"} <= names
    for p in DEMOS:
        first = p.read_text(encoding="utf-8").splitlines()[0]
        assert first.startswith("#") and "invented" in first.lower(), p


def test_benchmark_values_in_si():
    """The 1969 benchmark (Bryson, Desai & Hoffman 1969 via Betts 2010), converted with the
    international definitions of ft, lb, lbf and g0."""
    s = load_scenario(BENCHMARK)
    ac = s.aircraft
    assert ac.mass_kg == pytest.approx(42000 * LB, rel=1e-12)
    assert ac.reference_area_m2 == pytest.approx(530 * FT**2, rel=1e-12)
    rating = s.propulsion.ratings["max"]
    assert rating.tsfc_kg_per_n_s == pytest.approx(1 / (G0 * 1600), rel=1e-12)  # Isp = T / (mdot g0)
    assert rating.thrust_n.values[0][0] == pytest.approx(24.2e3 * LBF, rel=1e-12)
    assert rating.thrust_n.values[9][2] == pytest.approx(45.7e3 * LBF, rel=1e-12)  # M 1.8, 10 kft
    assert rating.thrust_n.altitude_m[-1] == pytest.approx(70000 * FT, rel=1e-12)
    assert len(rating.thrust_n.mach) == 10 and len(rating.thrust_n.altitude_m) == 10
    # k = eta / cl_alpha (CD = cd0 + eta cl_alpha alpha^2 with CL = cl_alpha alpha); M 1.0 row: 0.79/4.44
    assert ac.drag.k.values[4] == pytest.approx(0.79 / 4.44, rel=1e-9)
    assert ac.drag.lift_slope_per_rad.values[4] == 4.44
    assert s.propulsion.thrust_alignment == "body"
    assert s.mission.start.tas_m_s == pytest.approx(424.26 * FT, rel=1e-12)
    assert s.mission.target.tas_m_s == pytest.approx(968.148 * FT, rel=1e-12)
    assert s.mission.target.altitude_m == pytest.approx(65600 * FT, rel=1e-12)
    assert s.display_units["aircraft.mass"] == "lb"
    assert s.display_units["propulsion.ratings.max.thrust"] == "klbf"


def test_benchmark_describe_in_file_units():
    text = describe_scenario(load_scenario(BENCHMARK))
    assert "42000 lb" in text and "530 ft^2" in text and "65600 ft" in text
    assert "0.1 to 45.7 klbf" in text
    # target energy height 65600 ft + (968.148 ft/s)^2 / (2 g0), g0 = 9.80665/0.3048 ft/s^2
    he_ft = 65600 + 968.148**2 / (2 * G0 / FT)
    assert f"energy height {he_ft:.6g} ft" in text


def test_speed_kinds_resolve_to_tas(tmp_path):
    """CAS = TAS at sea level on a standard day (definition of calibrated airspeed; common
    practice, no source); Mach 0.8 at 30,000 ft is 0.8 a(9144 m), with a from the `ambiance`
    package (US Standard Atmosphere 1976)."""
    from ambiance import Atmosphere

    doc = edited(mission__start={"altitude": "0 ft", "cas": "250 kt"},
                 limits__cas_restriction=DELETE)
    s = load_scenario(write(tmp_path, doc))
    # tolerance: the sea-level speed of sound a0 = 340.294 m/s is a rounded constant (6 digits)
    assert s.mission.start.tas_m_s == pytest.approx(250 * KT, rel=2e-6)
    assert s.mission.start.speed_kind == "cas"
    assert s.mission.start.speed_value == pytest.approx(250 * KT, rel=1e-12)
    a = float(Atmosphere(30000 * FT).speed_of_sound[0])
    assert s.mission.target.tas_m_s == pytest.approx(0.8 * a, rel=1e-6)


def test_defaults_and_constants(tmp_path):
    doc = edited(scenario=DELETE, atmosphere=DELETE, solver=DELETE, limits=DELETE,
                 propulsion__default_rating=DELETE)
    doc["aircraft"]["cl_max"] = 1.4  # a constant spreads over the drag Mach grid
    s = load_scenario(write(tmp_path, doc))
    assert s.name == "s"  # file stem
    assert s.propulsion.default_rating == "max"  # the only rating
    assert s.atmosphere.temperature_offset_k == 0.0
    assert s.limits.max_load_factor == 3.0 and s.limits.min_altitude_m == 0.0
    assert s.solver.intervals == 100 and s.solver.ipopt == {}
    assert s.aircraft.cl_max.mach == (0.0, 0.5, 0.9, 1.2)
    assert s.aircraft.cl_max.values == (1.4, 1.4, 1.4, 1.4)


def test_base_is_valid(tmp_path):
    s = load_scenario(write(tmp_path, BASE))
    assert s.solver.ipopt == {"max_iter": 500, "tol": 1e-8}
    assert s.propulsion.ratings["max"].tsfc_kg_per_n_s == pytest.approx(0.8 * LB / (LBF * 3600), rel=1e-12)


# ---------------------------------------------------------------------------------------------
# One test per error class; each asserts the message names the field (dotted path).


def test_unknown_key_invalid(tmp_path):
    doc = edited(aircraft__refrence_area="50 m^2")
    msg = find(problems_of(tmp_path, doc), "aircraft.refrence_area")
    assert "unknown key" in msg and "did you mean 'reference_area'" in msg


def test_unknown_section_invalid(tmp_path):
    doc = edited(limts={"max_mach": 1.0})
    msg = find(problems_of(tmp_path, doc), "limts")
    assert "did you mean 'limits'" in msg


def test_missing_key_invalid(tmp_path):
    problems = problems_of(tmp_path, edited(aircraft__mass=DELETE))
    assert "missing" in find(problems, "aircraft.mass")


def test_missing_section_invalid(tmp_path):
    problems = problems_of(tmp_path, edited(mission=DELETE))
    assert "missing section [mission]" in find(problems, "mission")


def test_wrong_type_invalid(tmp_path):
    problems = problems_of(tmp_path, edited(aircraft__name=12, aircraft__drag__model=3,
                                            solver__intervals="many", mission__start__altitude=[1000]))
    assert "expected a string, got integer 12" in find(problems, "aircraft.name")
    assert "expected a string" in find(problems, "aircraft.drag.model")
    assert "whole number" in find(problems, "solver.intervals")
    assert "array" in find(problems, "mission.start.altitude")


def test_nan_and_inf_invalid(tmp_path):
    cd0 = [0.02, float("nan"), 0.03, 0.04]
    problems = problems_of(tmp_path, edited(aircraft__drag__cd0=cd0, aircraft__mass="inf kg"))
    assert "not a finite number" in find(problems, "aircraft.drag.cd0[1]")
    assert "not a finite number" in find(problems, "aircraft.mass")


def test_negative_or_zero_invalid(tmp_path):
    thrust = {"unit": "kN", "values": [[100, 60, 30], [110, -65, 33], [130, 80, 40]]}
    problems = problems_of(tmp_path, edited(aircraft__reference_area="-50 m^2", aircraft__mass="0 kg",
                                            propulsion__ratings__max__thrust=thrust))
    assert "'-50 m^2'" in find(problems, "aircraft.reference_area")
    assert "positive" in find(problems, "aircraft.reference_area")
    assert "positive" in find(problems, "aircraft.mass")
    msg = find(problems, "propulsion.ratings.max.thrust[1][1]")
    assert "-65 kN" in msg and ">= 0" in msg


def test_non_monotonic_grid_invalid(tmp_path):
    problems = problems_of(tmp_path, edited(aircraft__drag__mach=[0.0, 0.9, 0.5, 1.2]))
    msg = find(problems, "aircraft.drag.mach")
    assert "not increasing" in msg and "0.5" in msg and "0.9" in msg


def test_duplicate_grid_invalid(tmp_path):
    alt = {"unit": "ft", "values": [0, 20000, 20000]}
    problems = problems_of(tmp_path, edited(propulsion__ratings__max__altitude=alt))
    msg = find(problems, "propulsion.ratings.max.altitude")
    assert "duplicate value 20000 ft" in msg


def test_table_shape_mismatch_invalid(tmp_path):
    thrust = {"unit": "kN", "values": [[100, 60, 30], [110, 65], [130, 80, 40]]}
    problems = problems_of(tmp_path, edited(propulsion__ratings__max__thrust=thrust,
                                            aircraft__drag__k=[0.1, 0.1, 0.12]))
    assert "has 2 values but propulsion.ratings.max.altitude has 3" in find(
        problems, "propulsion.ratings.max.thrust[1]")
    assert "has 3 values but aircraft.drag.mach has 4" in find(problems, "aircraft.drag.k")


def test_table_row_count_mismatch_invalid(tmp_path):
    thrust = {"unit": "kN", "values": [[100, 60, 30], [110, 65, 33]]}
    problems = problems_of(tmp_path, edited(propulsion__ratings__max__thrust=thrust))
    assert "has 2 rows but propulsion.ratings.max.mach has 3" in find(problems, "propulsion.ratings.max.thrust")


def test_unknown_unit_invalid(tmp_path):
    problems = problems_of(tmp_path, edited(mission__target__altitude="30000 fet"))
    msg = find(problems, "mission.target.altitude")
    assert "unknown unit 'fet'" in msg and "did you mean 'ft'" in msg


def test_unknown_unit_in_table_invalid(tmp_path):
    thrust = {"unit": "kNx", "values": [[100, 60, 30], [110, 65, 33], [130, 80, 40]]}
    problems = problems_of(tmp_path, edited(propulsion__ratings__max__thrust=thrust))
    assert "unknown unit" in find(problems, "propulsion.ratings.max.thrust.unit")


def test_wrong_dimension_invalid(tmp_path):
    problems = problems_of(tmp_path, edited(aircraft__reference_area="50 m", mission__start__altitude="250 kt"))
    assert "is a length, not an area" in find(problems, "aircraft.reference_area")
    assert "is a speed, not a length" in find(problems, "mission.start.altitude")


def test_missing_unit_invalid(tmp_path):
    problems = problems_of(tmp_path, edited(aircraft__mass=20000))
    assert "missing unit" in find(problems, "aircraft.mass")


def test_absolute_temperature_offset_invalid(tmp_path):
    problems = problems_of(tmp_path, edited(atmosphere__temperature_offset="15 degC"))
    msg = find(problems, "atmosphere.temperature_offset")
    assert "absolute temperature" in msg and "15 delta_degC" in msg


def test_target_below_start_energy_invalid(tmp_path):
    doc = edited(mission__start={"altitude": "30000 ft", "mach": 0.8},
                 mission__target={"altitude": "20000 ft", "mach": 0.6})
    msg = find(problems_of(tmp_path, doc), "mission.target")
    assert "energy height" in msg and "below the start" in msg and "ft" in msg


def test_unknown_rating_invalid(tmp_path):
    problems = problems_of(tmp_path, edited(mission__rating="mx", propulsion__default_rating="climb"))
    assert "unknown rating 'mx'" in find(problems, "mission.rating")
    assert "unknown rating 'climb'" in find(problems, "propulsion.default_rating")


def test_throttle_range_invalid(tmp_path):
    problems = problems_of(tmp_path, edited(propulsion__throttle_max=1.5))
    assert "got 1.5" in find(problems, "propulsion.throttle_max")
    problems = problems_of(tmp_path, edited(propulsion__throttle_max=0.0))
    assert "> 0" in find(problems, "propulsion.throttle_max")
    problems = problems_of(tmp_path, edited(propulsion__throttle_min=0.8, propulsion__throttle_max=0.5))
    assert "above throttle_max" in find(problems, "propulsion.throttle_min")


def test_speed_given_twice_invalid(tmp_path):
    problems = problems_of(tmp_path, edited(mission__start__mach=0.4))
    assert "exactly one of mach, tas, cas, eas" in find(problems, "mission.start.cas")


def test_fuel_model_count_invalid(tmp_path):
    problems = problems_of(tmp_path, edited(propulsion__ratings__max__specific_impulse="1600 s"))
    assert "more than one fuel model" in find(problems, "propulsion.ratings.max.specific_impulse")
    problems = problems_of(tmp_path, edited(propulsion__ratings__max__tsfc=DELETE))
    assert "missing fuel data" in find(problems, "propulsion.ratings.max.fuel_flow")


def test_jet_with_propeller_keys_invalid(tmp_path):
    problems = problems_of(tmp_path, edited(propulsion__ratings__max__psfc="0.5 lb/hp/h"))
    assert 'kind = "propeller"' in find(problems, "propulsion.ratings.max.psfc")


def test_body_alignment_needs_lift_slope_invalid(tmp_path):
    problems = problems_of(tmp_path, edited(propulsion__thrust_alignment="body"))
    assert "lift-curve slope" in find(problems, "aircraft.drag.lift_slope")


def test_mission_outside_tables_invalid(tmp_path):
    doc = edited(mission__target={"altitude": "45000 ft", "mach": 1.3}, limits__max_mach=DELETE)
    problems = problems_of(tmp_path, doc)
    assert "outside the engine table" in find(problems, "mission.target.altitude")
    assert "outside aircraft.drag.mach" in find(problems, "mission.target.mach")


def test_mission_violates_limits_invalid(tmp_path):
    doc = edited(mission__start={"altitude": "1000 ft", "cas": "300 kt"})
    msg = find(problems_of(tmp_path, doc), "mission.start.cas")
    assert "exceeds the restriction 250 kt below 10000 ft" in msg


def test_all_problems_reported_invalid(tmp_path):
    doc = edited(aircraft__mass="-1 kg", aircraft__reference_area="50 fet", mission__rating="none",
                 limits__max_mach="fast", solver__grid_speed_points=2)
    fields = {f for f, _ in problems_of(tmp_path, doc)}
    assert {"aircraft.mass", "aircraft.reference_area", "mission.rating", "limits.max_mach",
            "solver.grid_speed_points"} <= fields


def test_error_message_names_file(tmp_path):
    path = write(tmp_path, edited(aircraft__mass=DELETE), "named.toml")
    with pytest.raises(ScenarioError) as info:
        load_scenario(path)
    assert str(info.value).startswith(f"{path}: aircraft.mass: missing")
    assert info.value.path == str(path)


def test_malformed_toml_invalid(tmp_path):
    p = tmp_path / "bad.toml"
    p.write_text('[aircraft]\nname = "x"\nmass = 5 kg\n', encoding="utf-8")
    with pytest.raises(ScenarioError) as info:
        load_scenario(p)
    (fld, msg), = info.value.problems
    assert fld == "line 3, column 10" and "not valid TOML" in msg


def test_missing_file_and_directory_invalid(tmp_path):
    with pytest.raises(ScenarioError) as info:
        load_scenario(tmp_path / "nope.toml")
    assert info.value.problems == [("file", "no such file")]
    with pytest.raises(ScenarioError) as info:
        load_scenario(tmp_path)
    assert "is a directory" in info.value.problems[0][1]


def test_not_utf8_invalid(tmp_path):
    p = tmp_path / "latin1.toml"
    p.write_bytes(b'[scenario]\nname = "caf\xe9"\n')
    with pytest.raises(ScenarioError) as info:
        load_scenario(p)
    assert "UTF-8" in info.value.problems[0][1]


# ---------------------------------------------------------------------------------------------
# Property test: mutated scenarios give a Scenario or a ScenarioError, never anything else.

_GARBAGE = st.one_of(
    st.sampled_from(["", "ft", "12 fet", "1e999 m", "nan kg", "-3 kg", "3 degC", "1 kt", "0.5",
                     "1 m/s/s", "(", "3 ft**ft", "2 1/0", "1,2,3 m", "inf", "mach", "jet", "body",
                     "max", "1 klbf", "1 s"]),
    st.text(max_size=12),
    st.integers(min_value=-10**6, max_value=10**6),
    st.floats(allow_nan=True, allow_infinity=True),
    st.booleans(),
    st.lists(st.floats(-1e3, 1e3), max_size=4),
    st.lists(st.lists(st.integers(-5, 50), max_size=4), max_size=4),
    st.dictionaries(st.sampled_from(["unit", "values", "mach", "x"]),
                    st.one_of(st.text(max_size=5), st.lists(st.integers(0, 9), max_size=4)), max_size=3),
)


def _mutate(doc, path, action, value, rng):
    node = doc
    for p in path[:-1]:
        node = node[p]
    last = path[-1]
    if action == "delete":
        del node[last]
    elif action == "replace":
        node[last] = value
    elif action == "shuffle" and isinstance(node[last], list):
        rng.shuffle(node[last])
    elif action == "insert" and isinstance(node, dict):
        node[f"{last}_extra"] = value
    else:
        node[last] = value


@settings(max_examples=100, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(st.lists(st.tuples(st.integers(0, 10**6), st.sampled_from(["delete", "replace", "shuffle", "insert"]),
                          _GARBAGE), min_size=1, max_size=3),
       st.integers(0, 2**32 - 1))
def test_mutated_scenario_only_raises_scenario_error(tmp_path, mutations, seed):
    doc = copy.deepcopy(BASE)
    rng = random.Random(seed)
    for index, action, value in mutations:
        paths = _paths(doc)
        if not paths:
            break
        _mutate(doc, paths[index % len(paths)], action, value, rng)
    try:
        text = to_toml(doc)
    except TypeError:
        return
    p = tmp_path / "m.toml"
    p.write_text(text, encoding="utf-8")
    try:
        result = load_scenario(p)
    except ScenarioError as exc:
        assert exc.problems and all(isinstance(f, str) and isinstance(m, str) for f, m in exc.problems)
    else:
        assert isinstance(result, Scenario)


@settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(st.integers(0, 10**6), st.integers(1, 6), st.text(max_size=3))
def test_text_edits_only_raise_scenario_error(tmp_path, pos, length, insert):
    text = to_toml(BASE)
    pos %= len(text)
    p = tmp_path / "t.toml"
    p.write_text(text[:pos] + insert + text[pos + length:], encoding="utf-8")
    try:
        load_scenario(p)
    except ScenarioError as exc:
        assert exc.problems


def test_drag_table_model_scalar(tmp_path):
    """CD(CL, M) table form with a constant lift-curve slope given per degree."""
    drag = {"model": "table", "mach": [0.0, 0.6, 1.2], "cl": [-0.2, 0.0, 0.5, 1.0],
            "cd": [[0.03, 0.02, 0.04, 0.12], [0.031, 0.021, 0.041, 0.125], [0.05, 0.04, 0.07, 0.2]],
            "lift_slope": "0.1 1/deg"}
    s = load_scenario(write(tmp_path, edited(aircraft__drag=drag)))
    d = s.aircraft.drag
    assert d.kind == "table" and d.cd0 is None
    assert d.cd_cl == (-0.2, 0.0, 0.5, 1.0) and d.cd_table[2][3] == 0.2
    assert d.lift_slope_per_rad.values == pytest.approx((0.1 * 180 / math.pi,) * 3, rel=1e-12)
    assert "table CD(CL, M), 3 Mach x 4 CL points" in describe_scenario(s)


def test_drag_table_model_invalid(tmp_path):
    drag = {"model": "table", "mach": [0.0, 0.6, 1.2], "cl": [0.0, 0.5, 1.0],
            "cd": [[0.02, 0.04, 0.12], [0.021, 0.041, 0.125]], "k": 0.1}
    problems = problems_of(tmp_path, edited(aircraft__drag=drag))
    assert "has 2 rows but aircraft.drag.mach has 3" in find(problems, "aircraft.drag.cd")
    assert 'only used with model = "parabolic"' in find(problems, "aircraft.drag.k")


def test_propeller_rating_scalar(tmp_path):
    """Shaft-power rating with a constant efficiency and PSFC (1 hp = 550 ft lbf/s)."""
    rating = {"kind": "propeller", "mach": [0.1, 0.5, 1.2],
              "altitude": {"unit": "ft", "values": [0, 20000, 40000]},
              "shaft_power": {"unit": "hp", "values": [[3000, 2000, 1000]] * 3},
              "propeller_efficiency": 0.8, "psfc": "0.5 lb/hp/h"}
    s = load_scenario(write(tmp_path, edited(propulsion__ratings__max=rating)))
    r = s.propulsion.ratings["max"]
    assert r.shaft_power_w.values[0][0] == pytest.approx(3000 * 550 * FT * LBF, rel=1e-12)
    assert r.propeller_efficiency.mach == (0.1, 0.5, 1.2) and r.propeller_efficiency.values == (0.8,) * 3
    assert r.psfc_kg_per_w_s == pytest.approx(0.5 * LB / (550 * FT * LBF * 3600), rel=1e-12)
    rating["propeller_efficiency"] = {"mach": [0.1, 1.2], "values": [0.5, 1.3]}
    problems = problems_of(tmp_path, edited(propulsion__ratings__max=rating))
    assert "<= 1" in find(problems, "propulsion.ratings.max.propeller_efficiency.values[1]")
