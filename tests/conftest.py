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


@pytest.fixture(scope="session")
def transport():
    """(scenario, model) of the demo transport (scenarios/transport_twinjet.toml, an invented
    aircraft) with the procedure climb profile."""
    import dataclasses

    scenario = load_scenario(Path(__file__).resolve().parents[1] / "scenarios"
                             / "transport_twinjet.toml")
    scenario = dataclasses.replace(
        scenario, mission=dataclasses.replace(scenario.mission, profile="procedure"))
    return scenario, build_model(scenario)


@pytest.fixture(scope="session", autouse=True)
def _private_compile_cache(tmp_path_factory):
    """Compiled point functions go to a cache of this test session, not the user's: a solve
    uses a cached compiled function when there is one, and the tests must not depend on what
    earlier work left there."""
    import os

    from climbopt import CACHE_ENV

    old = os.environ.get(CACHE_ENV)
    os.environ[CACHE_ENV] = str(tmp_path_factory.mktemp("compiled"))
    yield
    if old is None:
        os.environ.pop(CACHE_ENV, None)
    else:
        os.environ[CACHE_ENV] = old
