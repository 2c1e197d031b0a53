"""The notebook API: a trajectory as a pandas DataFrame and an energy map as an xarray Dataset
carry exactly the numbers the written outputs hold, with their units."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest

from climbopt.aircraft import build_model
from climbopt.energy import build_energy_map
from climbopt.results import COLUMNS
from climbopt.rutowski import solve_energy_state
from climbopt.scenario import load_scenario

ROOT = Path(__file__).resolve().parents[1]


@pytest.fixture(scope="module")
def turboprop():
    scenario = load_scenario(ROOT / "scenarios" / "turboprop_regional.toml")
    return scenario, build_model(scenario)


def test_dataframe_holds_the_table(turboprop):
    """Every column of the per-point table, exactly, with the units in ``attrs`` and one
    segment label per point."""
    pd = pytest.importorskip("pandas")
    scenario, model = turboprop
    tr = solve_energy_state(scenario, "time", model=model)
    df = tr.to_dataframe()
    assert isinstance(df, pd.DataFrame) and len(df) == tr.table.size
    for key in COLUMNS:
        np.testing.assert_array_equal(df[key].to_numpy(), tr.table[key])
    assert df.attrs["units"]["altitude_m"] == "m" and df.attrs["method"] == "energy-state"
    assert set(df["segment"]) <= {"climb", "zoom", "level acceleration", "descent", "level"}
    assert (df["segment"] != "").all()


def test_xarray_round_trips_through_netcdf(turboprop, tmp_path):
    """The Dataset's fields equal the map's arrays, coordinates carry units, and writing it to
    netCDF and reading it back changes no number."""
    xr = pytest.importorskip("xarray")
    scenario, model = turboprop
    emap = build_energy_map(scenario, model=model, shape=(25, 30))
    ds = emap.to_xarray()
    assert ds.sizes == {"altitude_m": 25, "tas_m_s": 30}
    assert ds["altitude_m"].attrs["units"] == "m" and ds["ps_m_s"].attrs["units"] == "m/s"
    np.testing.assert_array_equal(ds["ps_m_s"].values, np.asarray(emap.fields.ps_m_s))
    np.testing.assert_array_equal(ds["feasible"].values, np.asarray(emap.feasible))
    ds.to_netcdf(tmp_path / "map.nc")
    back = xr.load_dataset(tmp_path / "map.nc")
    np.testing.assert_array_equal(back["ps_m_s"].values, ds["ps_m_s"].values)
    assert back.attrs["rating"] == emap.rating and back.attrs["mass_kg"] == emap.mass_kg
