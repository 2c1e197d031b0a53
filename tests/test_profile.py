"""The climb profile on the demo transport (an invented aircraft): a procedure never descends,
never goes below its start or above its target altitude, in the energy-state solver, the
collocation solver and the re-simulation alike; the free profile, less constrained, is never
worse."""

from __future__ import annotations

import dataclasses
from pathlib import Path

import numpy as np
import pytest

from climbopt.aircraft import build_model
from climbopt.pipeline import solve_case
from climbopt.scenario import load_scenario

ROOT = Path(__file__).resolve().parents[1]


@pytest.fixture(scope="module")
def solved():
    """{(profile, method, objective): trajectory} for the demo transport."""
    base = load_scenario(ROOT / "scenarios" / "transport_twinjet.toml")
    out = {}
    for profile in ("procedure", "free"):
        sc = dataclasses.replace(base, mission=dataclasses.replace(base.mission, profile=profile))
        model = build_model(sc)
        for method in ("energy", "collocation"):
            for objective in ("time", "fuel"):
                out[profile, method, objective] = solve_case(sc, method, objective, model=model)
    return base, out


@pytest.mark.parametrize("method", ["energy", "collocation"])
@pytest.mark.parametrize("objective", ["time", "fuel"])
def test_procedure_never_descends_nor_overshoots(solved, method, objective):
    """Altitude non-decreasing (to 0.1 m between collocation points, the transcription's
    interpolation), between the start (1,500 ft) and the target (35,000 ft) altitude, and, for
    collocation, the re-simulated path inside the same window with no descent (its check
    passes); the free profile of the same case dives below the start or overshoots the target
    (what the procedure forbids)."""
    base, out = solved
    tr = out["procedure", method, objective]
    h = tr.table.altitude_m
    start, target = base.mission.start.altitude_m, base.mission.target.altitude_m
    assert tr.profile == "procedure" and tr.ranked
    assert np.all(np.diff(h) >= -0.1)
    assert h.min() >= start - 1e-6 and h.max() <= target + 1e-6
    if method == "collocation":
        v = tr.verification
        assert v.ok, v.message
        assert v.limit_excess["climb"] <= 1e-2 and v.limit_excess["altitude"] <= 0.02
    free = out["free", method, objective].table.altitude_m
    assert free.min() < start - 10.0 or free.max() > target + 10.0


@pytest.mark.parametrize("method", ["energy", "collocation"])
def test_free_profile_is_never_worse(solved, method):
    """The free profile has fewer constraints: its minimum time is no longer and its minimum
    fuel no larger than the procedure's (to the solvers' tolerance, 1e-4 relative), and the
    procedure's cost stays small on this transport (under 1 %)."""
    _, out = solved
    for objective, key in (("time", "time_s"), ("fuel", "fuel_kg")):
        free = getattr(out["free", method, objective], key)
        proc = getattr(out["procedure", method, objective], key)
        assert free <= proc * (1 + 1e-4)
        assert proc <= free * 1.01
