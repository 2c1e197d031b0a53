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
from climbopt.units import display_unit

__all__ = [
    "path_style",
    "plot_energy_map",
    "plot_ps_map",
    "plot_fs_map",
    "energy_map_figures",
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
    "table_mach": "table Mach range",
    "altitude": "altitude limit",
    "stall": "CLmax",
    "dynamic_pressure": "q limit",
    "mach": "Mach limit",
    "cas": "CAS limit",
    "cas_restriction": "CAS restriction",
}
LIMIT_LINESTYLES = {
    "data": ":", "table_mach": (0, (3, 1, 1, 1, 1, 1)), "altitude": "-", "stall": "-",
    "dynamic_pressure": "-.",
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
    text = traj.label
    if not traj.converged:
        text += " (NOT CONVERGED)"
    return text


# ------------------------------------------------------------------------------------------
# axis units

def _axis_units(units: str) -> dict:
    """Converter from SI and axis label of each plotted quantity in ``units``, from the one
    display-unit table :data:`climbopt.units.DISPLAY_UNITS`; altitudes and energy heights in
    thousands (km for metres)."""
    from climbopt.units import from_si

    def conv(kind):
        unit = display_unit(kind, units)
        return (lambda v: from_si(v, unit)), unit

    alt_fn, alt_u = conv("altitude")
    thousands = "km" if alt_u == "m" else f"1000 {alt_u}"
    out = {"alt": (lambda h: alt_fn(h) / 1000.0, f"altitude [{thousands}]"),
           "he": (lambda h: alt_fn(h) / 1000.0, thousands)}
    for key, kind, words in (("tas", "speed", "true airspeed"), ("ps", "rate", "Ps"),
                             ("fs", "fuel_specific_energy", "Ps / fuel flow"),
                             ("mass", "mass", "mass")):
        fn, unit = conv(kind)
        out[key] = (fn, f"{words} [{unit}]")
    return out


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
    # drawn in this order: the zoom labels of the paths depend on the axis limits so far
    handles = _draw_field(ax, X, Y, energy_map, quantity, u, feasible)
    handles += _draw_energy_heights(ax, X, Y, energy_map, u)
    handles += _draw_envelope(ax, X, Y, energy_map, feasible, show_limits)
    handles += _draw_paths(ax, energy_map, trajectories, x, u)
    ax.set_xlabel("Mach number" if x == "mach" else u["tas"][1])
    ax.set_ylabel(alt_label)
    ax.set_xlim(float(np.nanmin(X)), float(np.nanmax(X)))
    ax.set_ylim(float(np.nanmin(Y)), float(np.nanmax(Y)))
    if title is None:
        title = _map_title(energy_map, quantity, units)
    ax.set_title(title, fontsize=10)
    if legend and handles:
        ax.legend(handles=handles, fontsize=7, loc="upper left", bbox_to_anchor=(1.01, 1.0),
                  borderaxespad=0.0, framealpha=0.9)
    return ax


def _draw_field(ax, X, Y, energy_map, quantity: str, u: dict, feasible) -> list:
    """Filled and labelled contours of Ps or Ps / fuel flow (where Ps > 0) in display units,
    and the Ps = 0 line (the steady ceiling) inside the envelope; returns legend handles."""
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
    return handles


def _draw_energy_heights(ax, X, Y, energy_map, u: dict) -> list:
    """Dashed, labelled lines of constant energy height; returns legend handles."""
    he_fn, he_unit = u["he"]
    he = he_fn(np.asarray(energy_map.energy_height_m, dtype=float))
    he_levels = _nice_levels(float(np.nanmin(he)), float(np.nanmax(he)), 12)
    if he_levels.size < 2:
        return []
    hs = ax.contour(X, Y, he, levels=he_levels, colors="#6b6b6b", linewidths=0.8,
                    linestyles=[(0, (2, 2))])
    ax.clabel(hs, fontsize=7, fmt=lambda v: f"hE {v:g}")  # the unit is in the legend
    return [Line2D([], [], color="#6b6b6b", linewidth=0.8, linestyle=(0, (2, 2)),
                   label=f"energy height [{he_unit}]")]


def _draw_envelope(ax, X, Y, energy_map, feasible, show_limits: bool) -> list:
    """The region outside the flight envelope hatched and, with ``show_limits``, each limit
    active on the map drawn and labelled; returns legend handles."""
    handles = []
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
    return handles


def _draw_paths(ax, energy_map, trajectories, x: str, u: dict) -> list:
    """Each trajectory in its style (:func:`path_style`), its zooms marked; returns legend
    handles (the paths, and a zoom marker when any path zooms)."""
    alt_fn, tas_fn = u["alt"][0], u["tas"][0]
    dt = float(getattr(energy_map, "temperature_offset_k", 0.0))
    handles = []
    labels: list[tuple[str, float, float]] = []  # zoom labels already placed (text, x, y)
    for traj in trajectories:
        tb = traj.table
        px = tb["mach"] if x == "mach" else tas_fn(tb["tas_m_s"])
        style = path_style(traj.method, traj.objective)
        line, = ax.plot(px, alt_fn(tb["altitude_m"]), label=_label(traj),
                        markevery=max(1, len(px) // 8), **style)
        line.set_gid("path")
        handles.append(line)
        for zoom in traj.zooms:
            _mark_zoom(ax, zoom, x, alt_fn, tas_fn, dt, style["color"], labels)
    if any(traj.zooms for traj in trajectories):
        handles.append(Line2D([], [], color="black", marker="*", linestyle="none",
                              markersize=9, label="zoom (constant energy)"))
    return handles


def _map_title(energy_map, quantity: str, units: str) -> str:
    """Default title of an energy map: the field and the map's conditions."""
    what = "Specific excess power" if quantity == "ps" else "Fuel-specific energy"
    mass_u = display_unit("mass", units)
    return (f"{what}, mass {_from_si(energy_map.mass_kg, mass_u):,.0f} {mass_u}, "
            f"n = {energy_map.load_factor:g}, rating {energy_map.rating}, "
            f"ISA {energy_map.temperature_offset_k:+g} K")


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


def energy_map_figures(energy_map, trajectories=(), *, units: str = "si"):
    """The energy-map figures that ``climbopt run`` and ``climbopt map`` write, one at a time:
    (file stem, Figure) of Ps over Mach ("ps_mach") and over true airspeed ("ps_tas") with
    every path, and of fuel-specific energy over Mach ("fs_mach") with the minimum-fuel ones."""
    for stem, fn, x in (("ps_mach", plot_ps_map, "mach"), ("ps_tas", plot_ps_map, "tas"),
                        ("fs_mach", plot_fs_map, "mach")):
        yield stem, fn(energy_map, trajectories, x=x, units=units).figure


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


def figure_svg(fig) -> str:
    """The figure as SVG text (for pages that carry their figures inline), its words as text
    elements in the page's fonts rather than glyph outlines: the page stays searchable and is
    about 30 % smaller, and drawing it takes about 40 % less time."""
    import io

    from matplotlib import rc_context

    buf = io.StringIO()
    with rc_context({"svg.fonttype": "none"}):
        fig.savefig(buf, format="svg")
    return buf.getvalue()


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
        # zlib level 1: PNG files about 3 % larger, written 10-25 % faster than at level 6
        extra = {"pil_kwargs": {"compress_level": 1}} if fmt == "png" else {}
        fig.savefig(path, dpi=dpi, bbox_inches="tight" if tight else None, **extra)
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



# ------------------------------------------------------------------------------------------
# flight test: measured Ps (climbopt.flighttest, climbopt.flighttest_fit)

#: Colour of the measured aircraft (burnt orange, grey value about 40 %), the predicted one
#: keeps the minimum-time slate; test-point markers by manoeuvre kind.
MEASURED_COLOUR = "#b5542d"
KIND_MARKERS = {"level_acceleration": "o", "sawtooth_climb": "^"}
KIND_LABELS = {"level_acceleration": "level acceleration", "sawtooth_climb": "sawtooth climb"}


def _new_axes(figsize=(8.0, 5.5), ncols: int = 1):
    """Axes on a new figure (no pyplot state, see :func:`_figure`)."""
    fig = _figure(figsize=figsize)
    axes = fig.subplots(1, ncols)
    fig.subplots_adjust(bottom=0.13)
    return axes


def plot_measured_ps(surface, points, *, units: str = "si", ax=None):
    """Contours of the fitted standard-day Ps over altitude vs Mach (the tested range padded by
    10 %; outside the tested range hatched) with the standardised points on top, coloured on the
    same scale and marked by manoeuvre kind. Returns the axes."""
    from climbopt.flighttest_report import surface_grid

    u = _axis_units(units)
    ax = _new_axes() if ax is None else ax
    alt, mach, ps, _, _ = surface_grid(surface, 81)
    alt_fn, ps_fn = u["alt"][0], u["ps"][0]
    disp = ps_fn(ps)
    (h0, h1), (m0, m1) = surface.altitude_range_m, surface.mach_range
    outside = ~((alt[:, None] >= h0) & (alt[:, None] <= h1) & (mach >= m0) & (mach <= m1))
    tested = disp[~outside]  # colour scale of the tested range (extrapolated corners saturate)
    levels = _nice_levels(float(np.nanmin(tested)), float(np.nanmax(tested)), 12)
    cf = ax.contourf(mach, alt_fn(alt), disp, levels=levels, cmap=FIELD_CMAP, extend="both")
    cs = ax.contour(mach, alt_fn(alt), disp, levels=levels, colors="#3a3a3a", linewidths=0.6)
    ax.clabel(cs, levels[::2], fontsize=7, fmt="%g")
    ax.contourf(mach, alt_fn(alt), outside.astype(float), levels=[0.5, 1.5],
                colors="none", hatches=[ENVELOPE_HATCH])
    for kind, marker in KIND_MARKERS.items():
        sel = points.kind == kind
        if sel.any():
            ax.scatter(points.mach[sel], alt_fn(points.altitude_m[sel]),
                       c=ps_fn(points.ps_std_m_s[sel]), cmap=FIELD_CMAP, norm=cf.norm,
                       marker=marker, edgecolors="black", linewidths=0.6, s=30,
                       label=f"{KIND_LABELS[kind]} (standardised)")
    ax.figure.colorbar(cf, ax=ax, label=u["ps"][1])
    ax.set_xlabel("Mach number")
    ax.set_ylabel(u["alt"][1])
    ax.set_title("Measured Ps, standard day, standard weight, 1 g (hatched: not tested)",
                 fontsize=10)
    ax.legend(fontsize=7, loc="upper center", bbox_to_anchor=(0.5, -0.11), ncol=2)
    ax.figure.subplots_adjust(bottom=0.2)
    return ax


def plot_ps_residuals(surface, points, *, units: str = "si", ax=None):
    """Residuals (standardised point minus fitted surface) over Mach, by manoeuvre kind, with
    the two-sigma band of the points' own noise estimate. Returns the axes."""
    u = _axis_units(units)
    ax = _new_axes((8.0, 4.5)) if ax is None else ax
    ps_fn = u["ps"][0]
    resid = ps_fn(points.ps_std_m_s - surface.ps_std(points.altitude_m, points.mach))
    for kind, marker in KIND_MARKERS.items():
        sel = points.kind == kind
        if sel.any():
            ax.errorbar(points.mach[sel], resid[sel], yerr=2.0 * ps_fn(points.sigma_m_s[sel]),
                        fmt=marker, color=MEASURED_COLOUR if kind == "sawtooth_climb"
                        else OBJECTIVE_COLOURS["time"], ms=4, elinewidth=0.6, capsize=0,
                        label=f"{KIND_LABELS[kind]} (bars: 2 sigma)")
    rms = ps_fn(surface.residual_rms_m_s)
    for s in (-2.0, 2.0):
        ax.axhline(s * rms, color="#6b6b6b", linewidth=0.8, linestyle=(0, (4, 2)))
    ax.axhline(0.0, color="black", linewidth=0.8)
    ax.set_xlabel("Mach number")
    ax.set_ylabel(f"residual, {u['ps'][1]}")
    ax.set_title(f"Residuals of the Ps fit ({surface.points} points, dashed: +/- 2 x rms "
                 f"{rms:.3g})", fontsize=10)
    ax.legend(fontsize=7)
    return ax


def plot_predicted_vs_measured(surface, points, *, units: str = "si", ax=None):
    """Standard-day Ps over Mach at the altitude of each level acceleration: predicted (dashed),
    measured fit (solid) with its two-sigma bootstrap band, and the standardised points.
    Returns the axes."""
    u = _axis_units(units)
    ax = _new_axes() if ax is None else ax
    ps_fn = u["ps"][0]
    sel = points.kind == "level_acceleration"
    names = list(dict.fromkeys(points.source[sel]))
    shades = matplotlib.colormaps["copper"](np.linspace(0.1, 0.75, max(len(names), 1)))
    for name, colour in zip(names, shades, strict=False):
        p = points.source == name
        h = float(np.mean(points.altitude_m[p]))
        mach = np.linspace(points.mach[p].min() - 0.02, points.mach[p].max() + 0.02, 60)
        fit = ps_fn(surface.ps_std(h, mach))
        band = ps_fn(2.0 * surface.sigma(h, mach))
        ax.fill_between(mach, fit - band, fit + band, color=colour, alpha=0.25, linewidth=0)
        where = f"{_from_si(h, display_unit('altitude', units)):,.0f} " \
                f"{display_unit('altitude', units)}"
        ax.plot(mach, fit, color=colour, linewidth=1.8, label=f"measured, {where}")
        if surface.difference:
            ax.plot(mach, ps_fn(surface.predicted_ps_std(h, mach)), color=colour,
                    linewidth=1.2, linestyle=(0, (5, 3)))
        ax.plot(points.mach[p], ps_fn(points.ps_std_m_s[p]), "o", color=colour, ms=4)
    if surface.difference:
        ax.plot([], [], color="black", linestyle=(0, (5, 3)), label="predicted (dashed)")
    ax.set_xlabel("Mach number")
    ax.set_ylabel(u["ps"][1])
    ax.set_title("Standard-day Ps at the level-acceleration altitudes: measured fit "
                 "(band: 2 sigma) vs predicted", fontsize=10)
    ax.legend(fontsize=7)
    return ax


def _time_to_altitude(table, altitude_m):
    """Time [s] at which a path first reaches each altitude (NaN above its highest point)."""
    top = np.maximum.accumulate(table["altitude_m"])
    keep = np.concatenate([[True], np.diff(top) > 0])
    return np.interp(altitude_m, top[keep], table["time_s"][keep], right=np.nan)


def plot_climb_comparison(comparison, surface, *, units: str = "si", axes=None):
    """Minimum-time climbs of the predicted and the measured aircraft: (a) altitude vs Mach,
    (b) Ps along each path vs altitude (measured with its two-sigma bootstrap band), (c) the
    difference in time to each altitude, measured minus predicted. Returns the three axes."""
    u = _axis_units(units)
    axes = _new_axes((13.0, 4.6), 3) if axes is None else axes
    alt_fn, ps_fn = u["alt"][0], u["ps"][0]
    runs = (("predicted", comparison.predicted, OBJECTIVE_COLOURS["time"], (0, (6, 3))),
            ("measured", comparison.measured, MEASURED_COLOUR, "-"))
    for label, traj, colour, ls in runs:
        tb = traj.table
        h = alt_fn(tb["altitude_m"])
        axes[0].plot(tb["mach"], h, color=colour, linestyle=ls, linewidth=1.8, label=label)
        axes[1].plot(ps_fn(tb["ps_m_s"]), h, color=colour, linestyle=ls, linewidth=1.8,
                     label=label)
    tb = comparison.measured.table
    v_std = tb["mach"] * standard_atmosphere(tb["altitude_m"]).speed_of_sound_m_s
    scale = (surface.reference.standard_mass_kg / tb["mass_kg"]) * (tb["tas_m_s"] / v_std)
    band = ps_fn(2.0 * scale * surface.sigma(tb["altitude_m"], tb["mach"]))
    axes[1].fill_betweenx(alt_fn(tb["altitude_m"]), ps_fn(tb["ps_m_s"]) - band,
                          ps_fn(tb["ps_m_s"]) + band, color=MEASURED_COLOUR, alpha=0.2,
                          linewidth=0, label="measured, 2 sigma")
    tp = comparison.predicted.table
    levels = np.linspace(tp["altitude_m"][0], min(tp["altitude_m"].max(), tb["altitude_m"].max()),
                         200)
    dt = _time_to_altitude(tb, levels) - _time_to_altitude(tp, levels)
    axes[2].plot(dt, alt_fn(levels), color=MEASURED_COLOUR, linewidth=1.8,
                 label="measured - predicted")
    axes[2].axvline(0.0, color="black", linewidth=0.8)
    axes[0].set_title("minimum-time paths (energy-state)", fontsize=9)
    axes[1].set_title("Ps along the paths", fontsize=9)
    axes[2].set_title(f"time to altitude; to the target {comparison.time_difference_s:+.1f} s "
                      f"(1 sigma {comparison.time_sigma_s:.1f} s)", fontsize=9)
    for ax, xlabel in zip(axes, ("Mach number", u["ps"][1], "time difference [s]"), strict=True):
        ax.set_xlabel(xlabel)
        ax.set_ylabel(u["alt"][1])
        ax.legend(fontsize=7)
    return axes
