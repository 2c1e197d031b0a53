"""A worked example in notebook style: run it as a script, or paste the cells (``# %%``) into a
notebook. It solves the invented demo transport, looks at one result as a pandas DataFrame and
at the energy map as an xarray Dataset, asks a what-if question with ``Scenario.replace``, and
writes the same results folder as ``climbopt run`` (``report.html`` included).

    .venv/bin/python docs/examples/notebook_example.py [OUTPUT_FOLDER]

Needs the optional packages pandas and xarray (``pip install -e ".[notebook]"``).
"""

# %% 1. Load the demo and solve it: energy-state and collocation, minimum time and minimum fuel
import sys
from pathlib import Path

import climbopt
from climbopt import outputs, pipeline
from climbopt.aircraft import build_model
from climbopt.energy import build_energy_map
from climbopt.units import format_min_s, from_si

ROOT = Path(__file__).resolve().parents[2]
out_dir = Path(sys.argv[1]) if len(sys.argv) > 1 else ROOT / "out" / "notebook_example"

scenario = climbopt.load_scenario(ROOT / "scenarios" / "transport_twinjet.toml")
model = build_model(scenario)
run = pipeline.run_mission(scenario, model)          # a RunResult: every row of the comparison
for row in run.results:
    print(f"{row.label:32s} {format_min_s(row.time_s):>6s} min:s  {row.fuel_kg:7.1f} kg fuel")

# %% 2. One result as a DataFrame (SI columns, one row per point, plus the segment kind)
best = next(r for r in run.trajectories() if r.label == "collocation, minimum time")
df = best.to_dataframe()
print(df[["time_s", "altitude_m", "mach", "cas_m_s", "fuel_used_kg", "segment"]]
      .iloc[::40].round(2).to_string())
climb = df[df["segment"] == "climb"]
print(f"mean Ps while climbing: {from_si(climb['ps_m_s'].mean(), 'ft/min'):.0f} ft/min")

# %% 3. The energy map as an xarray Dataset (fields over altitude x true airspeed)
emap = build_energy_map(scenario, model=model, shape=(80, 60))
ds = emap.to_xarray()
ps_max = ds["ps_m_s"].where(ds["feasible"]).max("tas_m_s")      # best Ps at each altitude
print(f"best Ps at the start altitude: {float(ps_max.sel(altitude_m=457, method='nearest')):.1f} m/s")

# %% 4. What if the aircraft is lighter? Scenario.replace validates the change like a file
light = scenario.replace(mass="65 t")
quick = pipeline.run_mission(light, method="energy", objectives=("time",), schedules=False)
t = quick.results[0]
print(f"65 t: minimum time {format_min_s(t.time_s)} min:s ({t.time_s:.1f} s) against "
      f"{format_min_s(run.results[0].time_s)} at {scenario.aircraft.mass_kg / 1000:g} t")

# %% 5. Write the results folder, as `climbopt run` does (report.html, CSVs, figures)
doc = outputs.write_outputs(run, out_dir, scenario, units="crew", model=model)
print(f"wrote {out_dir}: {', '.join(doc['report'])} and {len(doc['figures'])} figures")
print(f"Caution: {climbopt.CAUTION}")
