"""Shared fixtures: the published 1969 interceptor benchmark (Bryson, Desai & Hoffman,
J. Aircraft 6(6), 1969, data as tabulated in Betts 2010), loaded and modelled once per session."""

from pathlib import Path

import pytest

from climbopt.aircraft import build_model
from climbopt.scenario import load_scenario

DATA = Path(__file__).parent / "data"


@pytest.fixture(scope="session")
def interceptor_case():
    """(scenario, model) of tests/data/interceptor_1969.toml."""
    scenario = load_scenario(DATA / "interceptor_1969.toml")
    return scenario, build_model(scenario)
