"""A small valid scenario (an invented jet, written for the tests) as a Python dict, and helpers
to edit it, write it as TOML and collect the problems the reader finds."""

from __future__ import annotations

import copy
from pathlib import Path

import pytest
from scenario_fuzz import to_toml

from climbopt.scenario import ScenarioError, load_scenario

BASE: dict = {
    "scenario": {"name": "test jet", "description": "invented for tests"},
    "aircraft": {
        "name": "test jet (invented)",
        "reference_area": "50 m^2",
        "mass": "20000 kg",
        "fuel_capacity": "5000 kg",
        "drag": {
            "model": "parabolic",
            "mach": [0.0, 0.5, 0.9, 1.2],
            "cd0": [0.02, 0.02, 0.03, 0.04],
            "k": [0.1, 0.1, 0.12, 0.2],
        },
        "cl_max": {"mach": [0.0, 1.2], "values": [1.2, 1.0]},
    },
    "propulsion": {
        "default_rating": "max",
        "throttle_min": 0.2,
        "throttle_max": 1.0,
        "ratings": {
            "max": {
                "kind": "jet",
                "mach": [0.0, 0.5, 1.2],
                "altitude": {"unit": "ft", "values": [0, 20000, 40000]},
                "thrust": {"unit": "kN", "values": [[100, 60, 30], [110, 65, 33], [130, 80, 40]]},
                "tsfc": "0.8 lb/lbf/h",
            }
        },
    },
    "atmosphere": {"temperature_offset": "0 K"},
    "mission": {
        "start": {"altitude": "1000 ft", "cas": "250 kt"},
        "target": {"altitude": "30000 ft", "mach": 0.8},
    },
    "limits": {"max_mach": 1.1, "max_cas": "450 kt", "min_altitude": "0 ft",
               "cas_restriction": {"cas": "250 kt", "below": "10000 ft"}},
    "solver": {"intervals": 50, "ipopt": {"max_iter": 500, "tol": 1e-8}},
}


def write(tmp_path: Path, doc: dict, name: str = "s.toml") -> Path:
    p = tmp_path / name
    p.write_text(to_toml(doc), encoding="utf-8")
    return p


def problems_of(tmp_path: Path, doc: dict) -> list[tuple[str, str]]:
    with pytest.raises(ScenarioError) as info:
        load_scenario(write(tmp_path, doc))
    assert info.value.problems, "a ScenarioError must list its problems"
    return info.value.problems


def edited(**changes) -> dict:
    """BASE with dotted-path changes; the value DELETE removes the key."""
    doc = copy.deepcopy(BASE)
    for dotted, value in changes.items():
        *parents, last = dotted.split("__")
        node = doc
        for p in parents:
            node = node[p]
        if value is DELETE:
            del node[last]
        else:
            node[last] = value
    return doc


DELETE = object()


def find(problems, field: str) -> str:
    """The message for ``field`` (exact dotted name); fails listing all problems otherwise."""
    for fld, msg in problems:
        if fld == field:
            return msg
    raise AssertionError(f"no problem for {field!r}; got {problems}")
