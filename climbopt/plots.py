"""Plots (matplotlib): specific-excess-power and fuel-specific-energy maps with the flight
envelope and the climb paths, and time histories of every result.

Each function takes ``ax=None`` (or ``axes=None``) and returns the axes it drew on; nothing here
saves files except :func:`save_figure`, and nothing is shown. The colour scheme is our own and
built to stay readable when printed in grey: the two objectives differ in lightness (dark slate
for minimum time, light ochre for minimum fuel) and marker shape, the two methods in line style
(energy-state dashed with open markers, collocation solid with filled markers). Path lines carry
``gid="path"``, zoom markers ``gid="zoom"``, so tests and users can find them on the axes.
"""

from __future__ import annotations

import math

import matplotlib
import numpy as np
from matplotlib.colors import LinearSegmentedColormap
from matplotlib.figure import Figure
from matplotlib.lines import Line2D
from matplotlib.patches import Patch

from climbopt import CAUTION
from climbopt.atmosphere import standard_atmosphere
from climbopt.results import Trajectory
from climbopt.units import kg_to_lb, m_s_to_kt, m_to_ft

__all__ = [
    "path_style",
    "plot_energy_map",
    "plot_ps_map",
    "plot_fs_map",
    "plot_time_histories",
    "add_caution",
    "save_figure",
]

# ------------------------------------------------------------------------------------------
# colours and styles (ours)

#: Objective colours: dark slate (time), light ochre (fuel), mid green (weighted); their grey
#: values (ITU-R BT.601 luma) are about 22 %, 66 % and 46 % so they stay apart in grey print.
OBJECTIVE_COLOURS = {"time": "#233d4d", "fuel": "#e0a33a", "weighted": "#5c8a4a"}
OBJECTIVE_MARKERS = {"time": "o", "fuel": "s", "weighted": "D"}
METHOD_LINESTYLES = {"energy-state": (0, (6, 3)), "collocation": "-"}

#: Background colour map of the field contours: paper white to pale blue-grey, monotone in
#: lightness so that grey print keeps the order.
FIELD_CMAP = LinearSegmentedColormap.from_list(
    "climbopt_field", ["#fbfaf5", "#dfe6e4", "#b8c7c9", "#8fa6ad"])

#: Hatch and colour of regions outside the flight envelope.
ENVELOPE_HATCH = "////"
ENVELOPE_COLOUR = "#c8c8c8"

#: Labels of the envelope limits (names as in climbopt.energy.LIMIT_NAMES) and their line styles.
LIMIT_LABELS = {
    "data": "edge of table data",
    "altitude": "altitude limit",
    "stall": "CLmax",
    "dynamic_pressure": "q limit",
    "mach": "Mach limit",
    "cas": "CAS limit",
    "cas_restriction": "CAS restriction",
}
LIMIT_LINESTYLES = {
    "data": ":", "altitude": "-", "stall": "-", "dynamic_pressure": "-.",
    "mach": (0, (8, 2, 2, 2)), "cas": (0, (4, 2)), "cas_restriction": (0, (1, 1)),
}

def _figure(**kwargs) -> Figure:
    """A new figure outside pyplot's global state (nothing to close, the user's backend and
    open figures untouched; saving picks the canvas for the file format)."""
    return Figure(**kwargs)


def _sweep():
    from climbopt import sweep

    return sweep


def _from_si(value, unit):
    from climbopt.units import from_si

    return from_si(value, unit)


def path_style(method: str, objective: str) -> dict:
    """Line properties of one result: colour by objective, line style and marker fill by method."""
    colour = OBJECTIVE_COLOURS.get(objective, "#555555")
    return {
        "color": colour,
        "linestyle": METHOD_LINESTYLES.get(method, "-."),
        "marker": OBJECTIVE_MARKERS.get(objective, "v"),
        "markerfacecolor": "white" if method == "energy-state" else colour,
        "markeredgecolor": colour,
        "markersize": 5,
        "linewidth": 2.0 if method == "collocation" else 1.8,
    }


def _label(traj: Trajectory) -> str:
    text = f"{traj.method}, minimum {traj.objective}"
    if not traj.converged:
        text += " (NOT CONVERGED)"
    return text


# ------------------------------------------------------------------------------------------
# axis units

def _axis_units(units: str) -> dict:
    if units == "us":
        return {
            "alt": (lambda h: m_to_ft(h) / 1000.0, "altitude [1000 ft]"),
            "tas": (m_s_to_kt, "true airspeed [kt]"),
            "ps": (lambda p: m_to_ft(p) * 60.0, "Ps [ft/min]"),
            "fs": (lambda f: m_to_ft(f) / kg_to_lb(1.0), "Ps / fuel flow [ft/lb]"),
            "he": (lambda h: m_to_ft(h) / 1000.0, "kft"),
            "mass": (kg_to_lb, "mass [lb]"),
        }
    if units == "si":
        return {
            "alt": (lambda h: h / 1000.0, "altitude [km]"),
            "tas": (lambda v: v, "true airspeed [m/s]"),
            "ps": (lambda p: p, "Ps [m/s]"),
            "fs": (lambda f: f, "Ps / fuel flow [m/kg]"),
            "he": (lambda h: h / 1000.0, "km"),
            "mass": (lambda m: m, "mass [kg]"),
        }
    raise ValueError(f"units must be 'si' or 'us', got {units!r}")


def _nice_levels(lo: float, hi: float, count: int = 10) -> np.ndarray:
    """Round contour levels covering [lo, hi] (1, 2, 2.5, 5 x 10^k steps)."""
    if not (np.isfinite(lo) and np.isfinite(hi)) or hi <= lo:
        return np.array([lo])
    raw = (hi - lo) / count
    mag = 10.0 ** np.floor(np.log10(raw))
    step = mag * min((s for s in (1, 2, 2.5, 5, 10) if s * mag >= raw), default=10)
    return np.arange(np.ceil(lo / step) * step, hi + 0.5 * step, step)


# ------------------------------------------------------------------------------------------
# energy maps

def plot_energy_map(energy_map, trajectories=(), *, quantity: str = "ps", x: str = "mach",
                    units: str = "si", ax=None, title: str | None = None,
                    show_limits: bool = True, legend: bool = True):
    """Contours of Ps (``quantity="ps"``) or fuel-specific energy Ps / fuel flow (``"fs"``)
    over altitude vs Mach (``x="mach"``) or vs true airspeed (``x="tas"``), with lines of
    constant energy height, the region outside the flight envelope hatched, each envelope limit
    drawn and labelled, and the given trajectories overlaid (zooms marked with arrows).

    Parameters
    ----------
    energy_map : climbopt.energy.EnergyMap
        The fields (any grid kind; curvilinear axes are handled).
    trajectories : sequence of Trajectory
        Paths to overlay (each with its own style, see :func:`path_style`).
    units : "si" or "us"
        Axis units (km, m/s, m/kg or 1000 ft, kt, ft/min, ft/lb).

    Returns
    -------
    matplotlib.axes.Axes
    """
    if quantity not in ("ps", "fs"):
        raise ValueError(f"quantity must be 'ps' or 'fs', got {quantity!r}")
    if x not in ("mach", "tas"):
        raise ValueError(f"x must be 'mach' or 'tas', got {x!r}")
    u = _axis_units(units)
    if ax is None:
        fig = _figure(figsize=(10.0, 6.0))
        ax = fig.subplots()
        # fixed margins (room for the legend on the right): saving needs no tight-bbox pass
        fig.subplots_adjust(left=0.07, right=0.74, bottom=0.1, top=0.93)
    alt_fn, alt_label = u["alt"]
    Y = alt_fn(np.broadcast_to(energy_map.altitude_m[:, None], energy_map.shape))
    X = energy_map.mach if x == "mach" else u["tas"][0](energy_map.tas_m_s)
    X = np.asarray(X, dtype=float)
    feasible = np.asarray(energy_map.feasible, dtype=bool)

    if quantity == "ps":
        field_si = np.asarray(energy_map.ps_m_s, dtype=float)
        fn, flabel = u["ps"]
    else:
        field_si = np.asarray(energy_map.fuel_specific_energy_m_kg, dtype=float)
        field_si = np.where(np.asarray(energy_map.fields.ps_m_s) > 0.0, field_si, np.nan)
        fn, flabel = u["fs"]
    field_disp = fn(field_si)
    finite = field_disp[np.isfinite(field_disp)]
    handles = []
    if finite.size:
        top = float(np.nanmax(finite))
        # the useful range is Ps > 0; show only a band of negative Ps below it
        low = 0.0 if quantity == "fs" else max(min(0.0, float(np.nanmin(finite))), -0.4 * top)
        levels = _nice_levels(low, top, 14)
        if levels.size >= 2:
            ax.contourf(X, Y, field_disp, levels=levels, cmap=FIELD_CMAP, extend="both")
            cs = ax.contour(X, Y, field_disp, levels=levels, colors="#3a3a3a", linewidths=0.6)
            ax.clabel(cs, levels[::2], fontsize=7, fmt="%g")
            handles.append(Line2D([], [], color="#3a3a3a", linewidth=0.6, label=flabel))
    ps_feasible = np.where(feasible, np.asarray(energy_map.fields.ps_m_s, dtype=float), np.nan)
    if np.isfinite(ps_feasible).any() and np.nanmin(ps_feasible) < 0.0 < np.nanmax(ps_feasible):
        zero = ax.contour(X, Y, ps_feasible, levels=[0.0], colors="black", linewidths=1.6)
        ax.clabel(zero, fmt={0.0: "Ps = 0"}, fontsize=8)
        handles.append(Line2D([], [], color="black", linewidth=1.6,
                              label="Ps = 0 (steady ceiling)"))

    # energy-height lines
    he_fn, he_unit = u["he"]
    he = he_fn(np.asarray(energy_map.energy_height_m, dtype=float))
    he_levels = _nice_levels(float(np.nanmin(he)), float(np.nanmax(he)), 12)
    if he_levels.size >= 2:
        hs = ax.contour(X, Y, he, levels=he_levels, colors="#6b6b6b", linewidths=0.8,
                        linestyles=[(0, (2, 2))])
        ax.clabel(hs, fontsize=7, fmt=lambda v: f"he {v:g} {he_unit}")
        handles.append(Line2D([], [], color="#6b6b6b", linewidth=0.8, linestyle=(0, (2, 2)),
                              label=f"energy height [{he_unit}]"))

    # outside the envelope
    if not feasible.all():
        ax.contourf(X, Y, (~feasible).astype(float), levels=[0.5, 1.5],
                    colors=[ENVELOPE_COLOUR], hatches=[ENVELOPE_HATCH], alpha=0.6)
        handles.append(Patch(facecolor=ENVELOPE_COLOUR, hatch=ENVELOPE_HATCH, alpha=0.6,
                             label="outside flight envelope"))
    if show_limits:
        for name, ok in getattr(energy_map.fields, "limits", {}).items():
            ok = np.asarray(ok, dtype=float)
            if ok.min() == ok.max():
                continue  # limit never active on this map
            ls = LIMIT_LINESTYLES.get(name, "-")
            cs = ax.contour(X, Y, ok, levels=[0.5], colors="black", linewidths=1.0,
                            linestyles=[ls])
            ax.clabel(cs, fmt={0.5: LIMIT_LABELS.get(name, name)}, fontsize=7, inline=True)
            handles.append(Line2D([], [], color="black", linewidth=1.0, linestyle=ls,
                                  label=LIMIT_LABELS.get(name, name)))

    # paths
    dt = float(getattr(energy_map, "temperature_offset_k", 0.0))
    labels: list[tuple[str, float, float]] = []  # zoom labels already placed (text, x, y)
    for traj in trajectories:
        tb = traj.table
        px = tb["mach"] if x == "mach" else u["tas"][0](tb["tas_m_s"])
        style = path_style(traj.method, traj.objective)
        line, = ax.plot(px, alt_fn(tb["altitude_m"]), label=_label(traj),
                        markevery=max(1, len(px) // 8), **style)
        line.set_gid("path")
        handles.append(line)
        for zoom in traj.zooms:
            _mark_zoom(ax, zoom, x, alt_fn, u["tas"][0], dt, style["color"], labels)
    if any(traj.zooms for traj in trajectories):
        handles.append(Line2D([], [], color="black", marker="*", linestyle="none",
                              markersize=9, label="zoom (constant energy)"))

    ax.set_xlabel("Mach number" if x == "mach" else u["tas"][1])
    ax.set_ylabel(alt_label)
    ax.set_xlim(float(np.nanmin(X)), float(np.nanmax(X)))
    ax.set_ylim(float(np.nanmin(Y)), float(np.nanmax(Y)))
    if title is None:
        what = "Specific excess power" if quantity == "ps" else "Fuel-specific energy"
        title = (f"{what}, mass {energy_map.mass_kg:,.0f} kg, n = {energy_map.load_factor:g}, "
                 f"rating {energy_map.rating}")
    ax.set_title(title, fontsize=10)
    if legend and handles:
        ax.legend(handles=handles, fontsize=7, loc="upper left", bbox_to_anchor=(1.01, 1.0),
                  borderaxespad=0.0, framealpha=0.9)
    return ax


def _mark_zoom(ax, zoom, x, alt_fn, tas_fn, temperature_offset_k, colour, labels):
    """Arrow from the start to the end of a constant-energy zoom, stars at both ends.

    ``labels`` holds the zoom labels already drawn; a label is not repeated where the same text
    already stands close by (zooms of several paths often coincide)."""
    def xval(h, v):
        if x == "tas":
            return float(tas_fn(v))
        a = float(standard_atmosphere(h, temperature_offset_k).speed_of_sound_m_s)
        return v / a

    x0, y0 = xval(zoom.from_altitude_m, zoom.from_tas_m_s), float(alt_fn(zoom.from_altitude_m))
    x1, y1 = xval(zoom.to_altitude_m, zoom.to_tas_m_s), float(alt_fn(zoom.to_altitude_m))
    pts, = ax.plot([x0, x1], [y0, y1], linestyle="none", marker="*", markersize=9,
                   color="black", markerfacecolor=colour)
    pts.set_gid("zoom")
    ax.annotate("", xy=(x1, y1), xytext=(x0, y0),
                arrowprops={"arrowstyle": "->", "color": "black", "linewidth": 1.2})
    text, xm, ym = f"zoom {zoom.kind}", 0.5 * (x0 + x1), 0.5 * (y0 + y1)
    x_span = np.diff(ax.get_xlim())[0] or 1.0
    y_span = np.diff(ax.get_ylim())[0] or 1.0
    if any(t == text and abs(xm - xl) < 0.08 * x_span and abs(ym - yl) < 0.05 * y_span
           for t, xl, yl in labels):
        return
    labels.append((text, xm, ym))
    ax.annotate(text, xy=(xm, ym), fontsize=7, xytext=(4, 4), textcoords="offset points")


def plot_ps_map(energy_map, trajectories=(), *, x: str = "mach", units: str = "si", ax=None,
                **kw):
    """Ps contours with every path overlaid (see :func:`plot_energy_map`)."""
    return plot_energy_map(energy_map, trajectories, quantity="ps", x=x, units=units, ax=ax,
                           **kw)


def plot_fs_map(energy_map, trajectories=(), *, x: str = "mach", units: str = "si", ax=None,
                **kw):
    """Fuel-specific-energy contours with the minimum-fuel paths only (trajectories of other
    objectives are left out)."""
    fuel = [t for t in trajectories if t.objective == "fuel"]
    return plot_energy_map(energy_map, fuel, quantity="fs", x=x, units=units, ax=ax, **kw)


# ------------------------------------------------------------------------------------------
# time histories

#: Panels of the time-history figure: (column or derived name, axis label key).
TIME_PANELS = ("altitude", "mach", "flight_path_angle", "throttle", "mass")


def plot_time_histories(trajectories, *, units: str = "si", axes=None):
    """Altitude, Mach, flight-path angle, throttle and mass against time for every result, on
    five panels sharing the time axis.

    The energy-state flight-path angle is the steady-climb value of its per-point table; its
    zooms are instantaneous, so they appear as vertical steps.

    Returns
    -------
    ndarray of 5 matplotlib.axes.Axes
    """
    u = _axis_units(units)
    if axes is None:
        fig = _figure(figsize=(8.0, 9.0))
        axes = fig.subplots(len(TIME_PANELS), 1, sharex=True)
        fig.subplots_adjust(left=0.11, right=0.97, bottom=0.07, top=0.95, hspace=0.12)
    axes = np.asarray(axes).ravel()
    if axes.size != len(TIME_PANELS):
        raise ValueError(f"plot_time_histories needs {len(TIME_PANELS)} axes, got {axes.size}")
    labels = {
        "altitude": u["alt"][1], "mach": "Mach number", "flight_path_angle": "path angle [deg]",
        "throttle": "throttle [-]", "mass": u["mass"][1],
    }
    for traj in trajectories:
        tb = traj.table
        t = tb["time_s"] - tb["time_s"][0]
        values = {
            "altitude": u["alt"][0](tb["altitude_m"]),
            "mach": tb["mach"],
            "flight_path_angle": np.degrees(tb["flight_path_angle_rad"]),
            "throttle": tb["throttle"],
            "mass": u["mass"][0](tb["mass_kg"]),
        }
        style = path_style(traj.method, traj.objective)
        for ax, key in zip(axes, TIME_PANELS):
            line, = ax.plot(t, values[key], label=_label(traj),
                            markevery=max(1, len(t) // 8), **style)
            line.set_gid("path")
    for ax, key in zip(axes, TIME_PANELS):
        ax.set_ylabel(labels[key], fontsize=8)
        ax.grid(True, color="#dddddd", linewidth=0.5)
        ax.ticklabel_format(axis="y", useOffset=False, style="plain")
    # the throttle is a fraction of the rating: show its whole range, not rounding noise
    lo, hi = axes[TIME_PANELS.index("throttle")].get_ylim()
    axes[TIME_PANELS.index("throttle")].set_ylim(min(lo, -0.05), max(hi, 1.05))
    axes[-1].set_xlabel("time from start [s]")
    if len(trajectories):
        axes[0].legend(fontsize=7, loc="best")
    return axes


# ------------------------------------------------------------------------------------------
# files

def add_caution(fig) -> None:
    """Write climbopt's caution at the foot of a figure."""
    fig.text(0.01, 0.005, CAUTION, fontsize=6, color="#444444", ha="left", va="bottom",
             wrap=True)


#: File formats :func:`save_figure` writes (PNG by default; SVG and PDF on request).
FIGURE_FORMATS = ("png", "svg", "pdf")


def save_figure(fig, path_stem, formats=("png",), dpi: int = 110,
                tight: bool = False) -> list:
    """Save ``fig`` as ``<path_stem>.<format>`` for each of ``formats`` (from
    :data:`FIGURE_FORMATS`; PNG alone by default), with the caution at its foot. ``tight=True``
    trims the margins (one more drawing pass; figures made by this module have fixed margins
    and do not need it). Returns the paths written."""
    from pathlib import Path

    unknown = [f for f in formats if f not in FIGURE_FORMATS]
    if unknown:
        raise ValueError(f"unknown figure format(s) {', '.join(map(repr, unknown))}; "
                         f"known: {', '.join(FIGURE_FORMATS)}")
    add_caution(fig)
    written = []
    for fmt in formats:
        path = Path(f"{path_stem}.{fmt}")
        fig.savefig(path, dpi=dpi, bbox_inches="tight" if tight else None)
        written.append(path)
    return written


# ------------------------------------------------------------------------------------------
# sweeps (climbopt.sweep)


def _shown(value_si: float, unit: str) -> str:
    return f"{_from_si(value_si, unit):g} {unit}".strip() if unit else f"{value_si:g}"


def _display_units(plan) -> dict[str, str]:
    """Plot unit of each varied input: the unit the user wrote, else SI."""
    return {v.name: (v.unit or p.si_unit) for v, p in zip(plan.variations, plan.parameters)}


def _group_label(others, values, units) -> str:
    return ", ".join(f"{q.name} {_shown(v, units[q.name])}" for q, v in zip(others, values))


def plot_parameter(plan, rows: list[dict], name: str, axes=None):
    """Time [s] and fuel [kg] against the varied input ``name`` (in the unit the user wrote),
    one line per combination of the other varied inputs; failed cases are crosses along the
    bottom edge (``gid="failed"``). Only the rows of ``plan`` with its main objective are used.

    ``axes``: two matplotlib axes (time, fuel) or None for a new figure. Returns the two axes.
    """
    params = {p.name: p for p in plan.parameters}
    p = params[name]
    others = [q for q in plan.parameters if q.name != name]
    units = _display_units(plan)
    keys = {c.key for c in plan.cases}
    main = [r for r in rows if r["key"] in keys and r["objective"] == plan.objective]
    if axes is None:
        axes = _figure(figsize=(6.4, 6.0)).subplots(2, 1, sharex=True)
    ax_t, ax_f = axes
    groups = _sweep()._groups(main, [q.column for q in others])
    palette = matplotlib.colormaps["viridis"]
    failed_x: list[float] = []
    for gi, (gvals, grows) in enumerate(groups):
        grows = sorted(grows, key=lambda r: r[p.column])
        x = [_from_si(r[p.column], units[name]) if units[name] else r[p.column] for r in grows]
        ok = [r["status"] == "ok" for r in grows]
        colour = palette(gi / max(1, len(groups) - 1)) if len(groups) > 1 else "#233d4d"
        label = _group_label(others, gvals, units) or None
        for ax, col in ((ax_t, "time_s"), (ax_f, "fuel_kg")):
            y = [r[col] if good else math.nan for r, good in zip(grows, ok)]
            ax.plot(x, y, "-o", color=colour, markersize=3.5, linewidth=1.2, gid="sweep",
                    label=label if ax is ax_t else None)
        failed_x += [xi for xi, good in zip(x, ok) if not good]
    for ax in (ax_t, ax_f):
        if failed_x:
            ax.plot(failed_x, [0.03] * len(failed_x), "x", color="#b03a2e", markersize=6,
                    transform=ax.get_xaxis_transform(), clip_on=False, gid="failed",
                    label="failed case" if ax is ax_t else None)
        ax.grid(True, color="#dddddd", linewidth=0.5)
    ax_t.set_ylabel("time [s]")
    ax_f.set_ylabel("fuel [kg]")
    ax_f.set_xlabel(f"{p.label} [{units[name]}]" if units[name] else p.label)
    if len(groups) <= 8 and (others or failed_x):
        ax_t.legend(fontsize=7, loc="best")
    n_bad = sum(r["status"] != "ok" for r in main)
    ax_t.set_title(f"{plan.scenario.name}\n{_sweep().METHODS[plan.method]}, objective {plan.objective}"
                   + (f" ({n_bad} failed case{'s' if n_bad != 1 else ''})" if n_bad else ""),
                   fontsize=9)
    return ax_t, ax_f


def plot_tradeoff(plan, rows: list[dict], ax=None):
    """Fuel [kg] against time [s] along the cost weight (the time-fuel trade-off curve,
    ``gid="tradeoff"``), one curve per combination of the other varied inputs; non-dominated
    points filled, dominated ones hollow; the minimum-time and minimum-fuel solutions marked
    (``gid="min_time"``, ``gid="min_fuel"``). Returns the axes."""
    if "cost_weight" not in [v.name for v in plan.variations]:
        raise ValueError("the trade-off curve needs a sweep over cost_weight")
    others = [q for q in plan.parameters if q.name != "cost_weight"]
    units = _display_units(plan)
    keys = {c.key for c in plan.cases}
    groups = _sweep()._groups([r for r in rows if r["key"] in keys], [q.column for q in others])
    if ax is None:
        ax = _figure(figsize=(6.4, 5.0)).subplots()
    palette = matplotlib.colormaps["viridis"]
    for gi, (gvals, grows) in enumerate(groups):
        curve = _sweep().tradeoff_curve(grows)
        colour = (palette(gi / max(1, len(groups) - 1)) if len(groups) > 1
                  else OBJECTIVE_COLOURS["weighted"])
        label = _group_label(others, gvals, units) or "minimum fuel + w x time"
        ax.plot(curve["time_s"], curve["fuel_kg"], "-", color=colour, linewidth=1.2,
                label=label, gid="tradeoff")
        front = set(curve["front"])
        for i, (t, f) in enumerate(zip(curve["time_s"], curve["fuel_kg"])):
            ax.plot(t, f, OBJECTIVE_MARKERS["weighted"], markersize=4, color=colour,
                    markerfacecolor=colour if i in front else "white")
        for obj, words in (("time", "minimum time"), ("fuel", "minimum fuel")):
            a = curve[f"min_{obj}"]
            if a is not None:
                ax.plot(a["time_s"], a["fuel_kg"], OBJECTIVE_MARKERS[obj], markersize=9,
                        color=OBJECTIVE_COLOURS[obj], markeredgecolor="black",
                        label=words if gi == 0 else None, gid=f"min_{obj}")
    ax.set_xlabel("time [s]")
    ax.set_ylabel("fuel [kg]")
    ax.grid(True, color="#dddddd", linewidth=0.5)
    ax.legend(fontsize=7, loc="best")
    ax.set_title(f"{plan.scenario.name}\ntime-fuel trade-off over the cost weight "
                 f"({_sweep().METHODS[plan.method]}); hollow: dominated", fontsize=9)
    return ax


def sweep_figures(plan, rows: list[dict]) -> dict:
    """All figures of a sweep by file stem: ``sweep_<name>`` for each varied input and
    ``tradeoff`` when the cost weight is varied. Nothing is saved here."""
    figures = {}
    for p in plan.parameters:
        fig = _figure(figsize=(6.4, 6.0))
        axes = fig.subplots(2, 1, sharex=True)
        plot_parameter(plan, rows, p.name, axes)
        figures[f"sweep_{p.name}"] = fig
    if "cost_weight" in [v.name for v in plan.variations]:
        fig = _figure(figsize=(6.4, 5.0))
        ax = fig.subplots()
        plot_tradeoff(plan, rows, ax)
        figures["tradeoff"] = fig
    return figures
