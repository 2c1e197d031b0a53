"""Flight-test reduction: smoothing bias, tapeline and standardisation relations, synthetic level
accelerations and sawtooth climbs reduced back to the model, the fitted surface and the
measured aircraft's minimum-time climb.

Synthetic data throughout: histories flown through the invented demo transport
(scenarios/transport_twinjet.toml) by climbopt.flighttest_synth, so the truth is known."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest

from climbopt.aircraft import build_model
from climbopt.atmosphere import G0, standard_atmosphere
from climbopt.flighttest import (ReducedPoints, StandardReference, correct_ps,
                                 derivative_bias_bound, reduce_history, smooth_and_differentiate,
                                 standardise, tapeline_rate, thrust_at_temperature)
from climbopt.flighttest_fit import (MeasuredAircraftModel, compare_climbs, equivalent_cd0_change,
                                     fit_surface)
from climbopt.flighttest_synth import (NoiseLevels, add_noise, modified_scenario,
                                       simulate_level_acceleration, simulate_sawtooth_climb)
from climbopt.scenario import load_scenario
from climbopt.units import ft_to_m, kt_to_m_s, lb_to_kg

ROOT = Path(__file__).resolve().parents[1]
STANDARD_MASS_KG = 70_000.0
#: The demo's sensor noise (one sigma), as stated in scenarios/flighttest/make_demo.py.
DEMO_NOISE = NoiseLevels(pressure_altitude_m=ft_to_m(3.0), cas_m_s=kt_to_m_s(0.2), oat_k=0.2,
                         mass_kg=lb_to_kg(20.0), load_factor=0.005, heading_rad=np.radians(0.2))


@pytest.fixture(scope="module")
def twinjet():
    """(scenario, standard-day predicted model, reference at 70 t) of the demo transport."""
    scenario = load_scenario(ROOT / "scenarios" / "transport_twinjet.toml")
    std = build_model(modified_scenario(scenario, temperature_offset_k=0.0))
    return scenario, std, StandardReference(STANDARD_MASS_KG, std.reference_area_m2, std,
                                            rating="climb")


@pytest.fixture(scope="module")
def clean_histories(twinjet):
    """Noise-free manoeuvres of the predicted aircraft (no drag difference) at ISA+12 K and
    62-63 t: four level accelerations and three sawtooth climbs."""
    scenario = twinjet[0]
    hot = build_model(modified_scenario(scenario, temperature_offset_k=12.0))
    out = [simulate_level_acceleration(hot, ft_to_m(kft * 1000.0), 62_000.0,
                                       start_cas_m_s=kt_to_m_s(cas), max_mach=0.82,
                                       max_cas_m_s=kt_to_m_s(340.0), rating="climb",
                                       name=f"la{kft}")
           for kft, cas in ((5, 170), (15, 190), (25, 210), (35, 220))]
    out += [simulate_sawtooth_climb(hot, ft_to_m(lo), ft_to_m(lo + 3000.0), kt_to_m_s(cas),
                                    63_000.0, rating="climb", name=f"st{lo}_{cas}")
            for lo, cas in ((8_500, 250), (8_500, 320), (28_500, 250))]
    return out


def _model_standard_ps(model, points):
    """The predicted model's standard-day Ps at 70 t, 1 g at the points' altitude and Mach."""
    v = points.mach * standard_atmosphere(points.altitude_m).speed_of_sound_m_s
    return model.evaluate(points.altitude_m, v, STANDARD_MASS_KG, 1.0, 1.0, "climb").ps_m_s


# ------------------------------------------------------------------------------ smoothing


def test_smoothing_exact_on_cubic_speed_history():
    """The cubic Savitzky-Golay filter returns a cubic V(t) and its derivative to rounding."""
    t = np.arange(0.0, 120.0, 0.2)
    v = 120.0 + 0.9 * t - 4e-3 * t**2 + 1.5e-5 * t**3
    vs, dv = smooth_and_differentiate(v, 0.2, 20.0)
    assert np.max(np.abs(vs - v)) < 1e-9
    assert np.max(np.abs(dv - (0.9 - 8e-3 * t + 4.5e-5 * t**2))) < 1e-9


def test_smoothing_bias_on_level_acceleration_shape_below_bound():
    """Bias of dV/dt on V = V0 + dV (1 - exp(-t/tau)) (tau = 40 s, a fast level acceleration)
    stays below the Taylor-remainder bound of derivative_bias_bound, itself below 6e-5 m/s^2,
    i.e. a Ps bias (V/g0) dV/dt under 1.5e-3 m/s (0.3 ft/min) at 250 m/s for the 20 s window,
    a hundredth of the demo's noise."""
    tau, dv0 = 40.0, 100.0
    t = np.arange(0.0, 200.0, 0.2)
    v = 150.0 + dv0 * (1.0 - np.exp(-t / tau))
    _, dv = smooth_and_differentiate(v, 0.2, 20.0)
    inner = slice(50, -50)  # window centres (the ends use the edge fit, as the reduction skips)
    bias = np.abs(dv - dv0 / tau * np.exp(-t / tau))[inner]
    bound = derivative_bias_bound(20.0, 0.2, dv0 / tau**5)  # max |V^(5)| at t = 0
    assert bias.max() <= bound
    assert bound < 6e-5
    assert 250.0 / G0 * bound < 1.5e-3


# ------------------------------------------------------------------------------ relations


def test_tapeline_rate_scales_with_temperature_ratio():
    """dh/dt = dHp/dt T / T_std (common practice, no source): ISA+15 K at sea level gives
    303.15 / 288.15 of the pressure-altitude rate."""
    assert tapeline_rate(10.0, 303.15, 0.0) == pytest.approx(10.0 * 303.15 / 288.15, rel=1e-12)


def test_standardisation_is_identity_at_standard_conditions(twinjet):
    """At standard weight, standard temperature and 1 g the standardised Ps equals the test Ps."""
    _, _, ref = twinjet
    alt = np.array([1500.0, 7000.0, 10700.0])
    mach = np.array([0.4, 0.6, 0.78])
    oat = standard_atmosphere(alt).temperature_k
    ps = np.array([18.0, 9.0, 2.5])
    out = standardise(ps, alt, mach, oat, np.full(3, STANDARD_MASS_KG), np.ones(3), ref)
    assert np.allclose(out, ps, rtol=0.0, atol=1e-12)
    assert correct_ps(7.0, 200.0, 6e5, 200.0, 6e5) == pytest.approx(7.0, rel=1e-15)


def test_standardisation_worked_weight_and_temperature_change():
    """Worked example of the relation Ps_std = Ps_t (W_t/W_s)(V_s/V_t) + (V_s/W_s)(dT - dD)
    (US Naval Test Pilot School FTM-108, Fixed Wing Performance, ch. 7; from memory):
    Ps_t = 10 m/s, W_t = 600 kN, W_s = 650 kN, V_t = 200 m/s at 300 K, standard 288.15 K at the
    same Mach (V_s = 200 sqrt(288.15/300) = 196.0102 m/s), dT = 5 kN, dD = 2 kN:
    10 x 0.923077 x 0.980051 + 196.0102 / 650000 x 3000 = 9.04662 + 0.90466 = 9.95128 m/s
    (by hand, to the 6 digits shown)."""
    v_s = 200.0 * np.sqrt(288.15 / 300.0)
    assert v_s == pytest.approx(196.0102, abs=1e-4)
    assert correct_ps(10.0, 200.0, 600e3, v_s, 650e3, 5e3, 2e3) == pytest.approx(9.95128,
                                                                               abs=1e-5)


def test_standardise_uses_induced_drag_and_engine_temperature_correction(twinjet):
    """standardise() with a stated k and no engine equals the relation with
    dD = k q S (CL_s^2 - CL_t^2) typed out; with the predicted engine, the thrust at the test
    temperature is the one the aircraft model itself gives on that day."""
    scenario, std, _ = twinjet
    alt, mach, oat, m_t, n_t, ps_t = 6000.0, 0.62, 260.0, 61_000.0, 0.98, 8.0
    atm = standard_atmosphere(alt)
    qs = 0.7 * atm.pressure_pa * mach**2 * 125.0
    w_t, w_s = m_t * G0, STANDARD_MASS_KG * G0
    v_t, v_s = mach * np.sqrt(1.4 * 287.0531 * oat), mach * atm.speed_of_sound_m_s
    k = 0.045
    d_drag = k * qs * ((w_s / qs) ** 2 - (n_t * w_t / qs) ** 2)
    expected = ps_t * (w_t / w_s) * (v_s / v_t) - v_s / w_s * d_drag
    ref_k = StandardReference(STANDARD_MASS_KG, 125.0, None, k)
    assert standardise(ps_t, alt, mach, oat, m_t, n_t, ref_k) == pytest.approx(expected,
                                                                              rel=1e-5)
    offset = oat - atm.temperature_k
    hot = build_model(modified_scenario(scenario, temperature_offset_k=offset))
    f_std = std.thrust_n(alt, mach, 1.0, "climb")
    assert thrust_at_temperature(f_std, alt, oat) == pytest.approx(
        float(hot.thrust_n(alt, mach, 1.0, "climb")), rel=1e-9)


# ------------------------------------------------------------------------------ reduction


def test_noise_free_synthetic_data_reduce_to_model_standard_ps(twinjet, clean_histories):
    """Noise-free level accelerations and sawtooth climbs at ISA+12 K and 62-63 t reduce to the
    model's standard-day (70 t, 1 g) Ps to 0.5 % (the smoothing bias alone is below 0.05 %)."""
    _, std, ref = twinjet
    for h in clean_histories:
        pts = reduce_history(h, ref, 20.0, spacing_s=2.0)
        truth = _model_standard_ps(std, pts)
        assert np.max(np.abs(pts.ps_std_m_s / truth - 1.0)) < 5e-3, h.name
        assert np.max(np.abs(pts.ps_std_m_s / truth - 1.0)) < 5e-4, h.name


def test_noisy_level_accelerations_within_stated_uncertainty(twinjet, clean_histories):
    """With the demo's sensor noise, every standardised point lies within 4 of its own stated
    sigmas of the model's standard Ps, and the sigmas are honest (rms of the normalised error
    between 0.5 and 1.5); the fitted surface's drag equivalent is zero within 3 bootstrap
    sigmas (there is no drag difference in these data)."""
    _, std, ref = twinjet
    rng = np.random.default_rng(7)
    pts = ReducedPoints.concatenate([reduce_history(add_noise(h, DEMO_NOISE, rng), ref, 20.0)
                                     for h in clean_histories])
    z = (pts.ps_std_m_s - _model_standard_ps(std, pts)) / pts.sigma_m_s
    assert np.max(np.abs(z)) < 4.0
    assert 0.5 < np.sqrt(np.mean(z**2)) < 1.5
    surface = fit_surface(pts, ref, bootstrap=300, seed=3)
    fit, samples = equivalent_cd0_change(surface, pts.altitude_m, pts.mach)
    assert abs(np.mean(fit)) < 3.0 * np.std(np.mean(samples, axis=1), ddof=1)


def test_fit_needs_more_points_than_coefficients(twinjet, clean_histories):
    """Too few points for the requested degrees is an error, not a silent interpolation."""
    _, _, ref = twinjet
    pts = reduce_history(clean_histories[0], ref, 20.0)
    with pytest.raises(ValueError, match="cannot fit"):
        fit_surface(pts, ref, mach_degree=3, altitude_degree=3)


# ------------------------------------------------------------------------------ measured aircraft


def test_measured_model_forces_consistent(twinjet, clean_histories):
    """The measured aircraft keeps thrust = drag + Ps m g0 / V and adds V q S dC / (m g0) to
    the predicted Ps at any mass, load factor and throttle."""
    scenario, _, ref = twinjet
    pts = ReducedPoints.concatenate([reduce_history(h, ref, 20.0) for h in clean_histories])
    surface = fit_surface(pts, ref, bootstrap=20)
    surface.coefficients = surface.coefficients + 1e-3  # a visible difference
    pred = build_model(scenario)
    meas = MeasuredAircraftModel(pred, surface)
    h, v, m = np.array([3000.0, 9000.0]), np.array([160.0, 230.0]), np.array([65e3, 58e3])
    a, b = pred.evaluate(h, v, m, 1.3, 0.8), meas.evaluate(h, v, m, 1.3, 0.8)
    assert np.allclose(b.thrust_n, b.drag_n + b.ps_m_s * m * G0 / v, rtol=1e-12)
    dc = surface.delta_coefficient(h, a.mach)
    assert np.allclose(b.ps_m_s - a.ps_m_s, v * a.dynamic_pressure_pa * 125.0 * dc / (m * G0),
                       rtol=1e-12)
    assert meas.domain == pred.domain and meas.atmosphere is pred.atmosphere
    # the CasADi path (flown schedules, collocation) carries the same thrust change
    mach = float(a.mach[1])
    f = meas.force_function()(h[1], v[1], 0.5, 0.8)
    g = pred.force_function()(h[1], v[1], 0.5, 0.8)
    assert float(f[5] - g[5]) == pytest.approx(
        float(a.dynamic_pressure_pa[1]) * 125.0 * float(surface.delta_coefficient(h[1], mach)),
        rel=1e-9)


def test_measured_schedule_equals_model_schedule_without_drag_difference(twinjet,
                                                                         clean_histories):
    """On noise-free synthetic data with no drag difference, the measured aircraft's
    minimum-time energy-state climb takes the predicted model's time to 1 %, and its best
    flyable schedule, flown through the measured model, the predicted one's to 1 % as well
    (same speeds to within the search's rounding: 3 kt, Mach 0.01)."""
    scenario, _, ref = twinjet
    pts = ReducedPoints.concatenate([reduce_history(h, ref, 20.0) for h in clean_histories])
    surface = fit_surface(pts, ref, bootstrap=20)
    cmp = compare_climbs(scenario, build_model(scenario), surface, bootstrap=0)
    t_pred = cmp.predicted.table["time_s"][-1]
    assert abs(cmp.time_difference_s) < 0.01 * t_pred
    ps, ms = cmp.predicted_schedule, cmp.measured_schedule
    assert ps is not None and ms is not None
    assert ms.time_s == pytest.approx(ps.time_s, rel=0.01)
    assert abs(ms.schedule.cas_m_s - ps.schedule.cas_m_s) <= kt_to_m_s(3.0)
    assert abs(ms.schedule.mach - ps.schedule.mach) <= 0.0100001
