"""Output files of the flight-test reduction: the standardised points, the fitted surface
(NPZ in SI, CSV grid in the display units) and the predicted vs measured climb table. Every file
carries the caution; nothing here prints.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

__all__ = ["climb_comparison_rows", "surface_grid", "write_climb_comparison_csv",
           "write_points_csv", "write_surface"]


def _display(kind: str, value, units: str):
    from climbopt.report import to_display

    return to_display(kind, value, units)


def _comment_lines(plan_name: str, what: str, units: str) -> list[str]:
    from climbopt import CAUTION, __version__

    return [f"# climbopt {__version__}: {what}; test plan: {plan_name}; units: {units}",
            f"# caution: {CAUTION}"]


def _write_rows(path, comments, header, rows) -> None:
    lines = comments + [",".join(header)]
    lines += [",".join(r) for r in rows]
    Path(path).write_text("\n".join(lines) + "\n", encoding="utf-8")


def write_points_csv(path, points, surface, units: str, plan_name: str) -> None:
    """The standardised points with the fit, its residual and the predicted standard Ps."""
    fit = surface.ps_std(points.altitude_m, points.mach)
    pred = surface.predicted_ps_std(points.altitude_m, points.mach)
    alt_u = _display("altitude", 0.0, units)[1]
    spd_u, m_u, ps_u = (_display(k, 0.0, units)[1] for k in ("speed", "mass", "rate"))
    header = ["test point", "kind", "time [s]", f"pressure altitude [{alt_u}]",
              f"altitude [{alt_u}]", "Mach", f"TAS test [{spd_u}]", "OAT [K]",
              f"gross mass [{m_u}]", "load factor", f"Ps test [{ps_u}]", f"Ps std [{ps_u}]",
              f"sigma [{ps_u}]", f"Ps fit [{ps_u}]", f"residual [{ps_u}]",
              f"Ps predicted std [{ps_u}]"]
    cols = [points.time_s, _display("altitude", points.pressure_altitude_m, units)[0],
            _display("altitude", points.altitude_m, units)[0], points.mach,
            _display("speed", points.tas_test_m_s, units)[0], points.oat_k,
            _display("mass", points.mass_kg, units)[0], points.load_factor]
    cols += [_display("rate", v, units)[0] for v in (
        points.ps_test_m_s, points.ps_std_m_s, points.sigma_m_s, fit, points.ps_std_m_s - fit,
        pred)]
    rows = ([str(points.source[i]), str(points.kind[i])] + [f"{c[i]:.6g}" for c in cols]
            for i in range(len(points)))
    _write_rows(path, _comment_lines(plan_name, "standardised Ps points (standard weight, "
                                     "standard day, 1 g)", units), header, rows)


def surface_grid(surface, points_per_axis: int = 41):
    """(altitude_m (nh,), mach (nm,), Ps std, sigma, predicted Ps std (nh, nm)) over the tested
    ranges padded by 10 %."""
    (h0, h1), (m0, m1) = surface.altitude_range_m, surface.mach_range
    pad_h, pad_m = 0.1 * (h1 - h0), 0.1 * (m1 - m0)
    alt = np.linspace(max(h0 - pad_h, 0.0), h1 + pad_h, points_per_axis)
    mach = np.linspace(max(m0 - pad_m, 0.05), m1 + pad_m, points_per_axis)
    hh, mm = np.meshgrid(alt, mach, indexing="ij")
    return (alt, mach, surface.ps_std(hh, mm), surface.sigma(hh, mm),
            surface.predicted_ps_std(hh, mm))


def write_surface(folder, surface, units: str, plan_name: str) -> list[str]:
    """``surface.npz`` (SI: grid, fit, bootstrap sigma, predicted, coefficients, bootstrap sets,
    ranges) and ``surface.csv`` (the grid in ``units``). Returns the file names."""
    alt, mach, ps, sigma, pred = surface_grid(surface)
    np.savez_compressed(Path(folder) / "surface.npz", altitude_m=alt, mach=mach, ps_std_m_s=ps,
                        sigma_m_s=sigma, predicted_ps_std_m_s=pred,
                        coefficients=surface.coefficients, bootstrap_coefficients=surface.samples,
                        mach_range=np.array(surface.mach_range),
                        altitude_range_m=np.array(surface.altitude_range_m),
                        degrees=np.array([surface.mach_degree, surface.altitude_degree]),
                        difference=np.array(surface.difference))
    alt_d, alt_u = _display("altitude", alt, units)
    ps_u = _display("rate", 0.0, units)[1]
    (h0, h1), (m0, m1) = surface.altitude_range_m, surface.mach_range
    rows = []
    for i in range(alt.size):
        for j in range(mach.size):
            tested = h0 <= alt[i] <= h1 and m0 <= mach[j] <= m1
            vals = [_display("rate", v[i, j], units)[0] for v in (ps, sigma, pred)]
            rows.append([f"{alt_d[i]:.1f}", f"{mach[j]:.4f}"] + [f"{v:.5g}" for v in vals]
                        + ["true" if tested else "false"])
    header = [f"altitude [{alt_u}]", "Mach", f"Ps std fit [{ps_u}]", f"sigma [{ps_u}]",
              f"Ps predicted std [{ps_u}]", "inside tested range"]
    _write_rows(Path(folder) / "surface.csv", _comment_lines(
        plan_name, "fitted standard-day Ps surface (standard weight, 1 g)", units), header, rows)
    return ["surface.npz", "surface.csv"]


def climb_comparison_rows(comparison, units: str) -> tuple[list[str], list[list[str]]]:
    """Header and rows of the predicted vs measured minimum-time climb table."""
    rows = []
    for key, kind, label in (("time_s", "time", "time to climb"), ("fuel_used_kg", "mass", "fuel"),
                             ("distance_m", "distance", "distance")):
        p, u = _display(kind, comparison.predicted.table[key][-1], units)
        m = _display(kind, comparison.measured.table[key][-1], units)[0]
        sig = (f"{_display(kind, comparison.time_sigma_s, units)[0]:.1f}" if key == "time_s"
               else "")
        rows.append([f"{label} [{u}]", f"{p:.1f}", f"{m:.1f}", f"{m - p:+.1f}",
                     f"{100 * (m - p) / p:+.2f}", sig])
    return ["quantity", "predicted", "measured", "measured - predicted", "difference [%]",
            "1 sigma (bootstrap)"], rows


def write_climb_comparison_csv(path, comparison, units: str, plan_name: str) -> None:
    """The climb comparison table as CSV."""
    header, rows = climb_comparison_rows(comparison, units)
    _write_rows(path, _comment_lines(plan_name, "minimum-time climb, predicted vs measured "
                                     "aircraft (energy-state)", units), header, rows)
