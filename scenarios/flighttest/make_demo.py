"""Make the SYNTHETIC flight-test demo: level accelerations and sawtooth climbs flown through an
invented aircraft model, with sensor noise, written as CSV files and a test plan.

Nothing here is measured data and no real aircraft is meant. The "true" aircraft is the invented
demo transport of ../transport_twinjet.toml with 4 % more zero-lift drag (CD0) than that
prediction, flown on a day 12 K warmer than the standard atmosphere at masses below the
standard weight (70,000 kg), at the scenario's climb rating. Sensor noise (one sigma, white,
Gaussian, independent; sampling 5 Hz): pressure altitude 3 ft, CAS 0.2 kt, outside air
temperature 0.2 K, gross weight 20 lb, normal load factor 0.005, heading 0.2 deg.

Run from anywhere: ``python scenarios/flighttest/make_demo.py``; the files are written beside
this script, the same every time (fixed random seed).
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

from climbopt.aircraft import build_model
from climbopt.flighttest_io import write_history_csv
from climbopt.flighttest_synth import (NoiseLevels, add_noise, modified_scenario,
                                       simulate_level_acceleration, simulate_sawtooth_climb)
from climbopt.scenario import load_scenario
from climbopt.units import ft_to_m, kt_to_m_s, lb_to_kg

HERE = Path(__file__).resolve().parent
PREDICTED = HERE.parent / "transport_twinjet.toml"
CD0_FACTOR = 1.04
TEMPERATURE_OFFSET_K = 12.0
START_MASS_KG = 63_000.0
REPOSITION_FUEL_KG = 250.0  # burnt between two manoeuvres
RATE_HZ = 5.0
SEED = 20_250_101
NOISE = NoiseLevels(pressure_altitude_m=ft_to_m(3.0), cas_m_s=kt_to_m_s(0.2), oat_k=0.2,
                    mass_kg=lb_to_kg(20.0), load_factor=0.005, heading_rad=np.radians(0.2))
NOISE_TEXT = ("sensor noise (1 sigma, white Gaussian): pressure altitude 3 ft, CAS 0.2 kt, "
              "OAT 0.2 K, gross weight 20 lb, load factor 0.005, heading 0.2 deg; 5 Hz")

#: The test card, in flying order: (file stem, kind, pressure altitude(s) [ft], CAS [kt]).
CARD = [
    ("la_05kft", "level_acceleration", 5_000, 170),
    ("la_15kft", "level_acceleration", 15_000, 190),
    ("st_10kft_220kt", "sawtooth_climb", (8_500, 11_500), 220),
    ("st_10kft_260kt", "sawtooth_climb", (8_500, 11_500), 260),
    ("st_10kft_300kt", "sawtooth_climb", (8_500, 11_500), 300),
    ("st_10kft_340kt", "sawtooth_climb", (8_500, 11_500), 340),
    ("la_25kft", "level_acceleration", 25_000, 210),
    ("st_30kft_220kt", "sawtooth_climb", (28_500, 31_500), 220),
    ("st_30kft_250kt", "sawtooth_climb", (28_500, 31_500), 250),
    ("st_30kft_280kt", "sawtooth_climb", (28_500, 31_500), 280),
    ("la_35kft", "level_acceleration", 35_000, 220),
]


def fly(model, kind, altitude_ft, cas_kt, mass_kg, name, heading_rad):
    """One manoeuvre of the card through the true aircraft (noise-free)."""
    if kind == "level_acceleration":
        return simulate_level_acceleration(
            model, ft_to_m(altitude_ft), mass_kg, start_cas_m_s=kt_to_m_s(cas_kt),
            max_mach=0.82, max_cas_m_s=kt_to_m_s(340.0), rate_hz=RATE_HZ, rating="climb",
            name=name, heading_rad=heading_rad)
    low, high = altitude_ft
    return simulate_sawtooth_climb(model, ft_to_m(low), ft_to_m(high), kt_to_m_s(cas_kt),
                                   mass_kg, rate_hz=RATE_HZ, rating="climb", name=name,
                                   heading_rad=heading_rad)


def plan_text(entries) -> str:
    """The test plan TOML."""
    lines = [
        "# SYNTHETIC flight-test demo (made by make_demo.py; not measured data, no real aircraft).",
        f"# The 'true' aircraft: the invented transport of ../transport_twinjet.toml with CD0 x "
        f"{CD0_FACTOR:g}, flown at ISA{TEMPERATURE_OFFSET_K:+g} K below the standard weight.",
        f"# {NOISE_TEXT}.",
        "",
        "[test_plan]",
        'name = "Demo transport: synthetic level accelerations and sawtooth climbs"',
        'description = "Synthetic data flown through an invented model (CD0 +4 %, ISA+12 K) '
        'with sensor noise."',
        "",
        "[aircraft]",
        'name = "Demo twinjet transport (invented)"',
        'reference_area = "125 m^2"',
        'standard_weight = "70000 kg"',
        "",
        "[predicted]",
        'scenario = "../transport_twinjet.toml"',
        'rating = "climb"',
        "",
        "[reduction]",
        'smoothing_window = "20 s"',
        'max_gap = "5 s"',
        "bootstrap = 400",
        "climb_bootstrap = 40",
        "seed = 1",
    ]
    for stem, kind in entries:
        lines += ["", "[[test_point]]", f'file = "{stem}.csv"', f'kind = "{kind}"']
    return "\n".join(lines) + "\n"


def main() -> None:
    scenario = load_scenario(PREDICTED)
    truth = build_model(modified_scenario(scenario, cd0_factor=CD0_FACTOR,
                                          temperature_offset_k=TEMPERATURE_OFFSET_K))
    rng = np.random.default_rng(SEED)
    mass = START_MASS_KG
    entries = []
    for i, (stem, kind, altitude_ft, cas_kt) in enumerate(CARD):
        heading = np.radians(90.0 if i % 2 == 0 else 270.0)
        clean = fly(truth, kind, altitude_ft, cas_kt, mass, stem, heading)
        mass = float(clean.mass_kg[-1]) - REPOSITION_FUEL_KG
        noisy = add_noise(clean, NOISE, rng)
        what = kind.replace("_", " ")
        write_history_csv(HERE / f"{stem}.csv", noisy, [
            f"SYNTHETIC {what} (made by make_demo.py; not measured data, no real aircraft)",
            f"true aircraft: invented transport of ../transport_twinjet.toml, CD0 x "
            f"{CD0_FACTOR:g}, ISA{TEMPERATURE_OFFSET_K:+g} K, climb rating",
            NOISE_TEXT,
        ])
        entries.append((stem, kind))
    (HERE / "demo_testplan.toml").write_text(plan_text(entries), encoding="utf-8")


if __name__ == "__main__":
    main()
