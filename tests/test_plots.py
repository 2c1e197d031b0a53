"""Tests of climbopt.plots: files exist and are not blank, every path is drawn (counted on the
axes), envelope limits are labelled, and the styles stay apart in grey print."""

from __future__ import annotations

from pathlib import Path

import matplotlib.image as mpimg
import numpy as np
import pytest

from climbopt import CAUTION, plots
from climbopt.results import Trajectory
from synthetic_paths import simple_table, with_zoom

DATA = Path(__file__).parent / "data"


def _paths(ax):
    return [ln for ln in ax.get_lines() if ln.get_gid() == "path"]


def _traj(method, objective, **kw):
    return Trajectory(method=method, objective=objective, table=simple_table(**kw))


@pytest.fixture(scope="module")
def interceptor_map():
    """A coarse energy map of the published 1969 interceptor (tests/data)."""
    from climbopt.energy import build_energy_map
    from climbopt.scenario import load_scenario

    scenario = load_scenario(DATA / "interceptor_1969.toml")
    return build_energy_map(scenario, shape=(60, 70))


def _nonblank_png(path):
    img = mpimg.imread(path)
    grey = img[..., :3].mean(axis=2)
    # a blank figure is one colour; ours has lines, text and shading
    assert grey.std() > 0.05, f"{path} looks blank"
    assert (grey < 0.5).mean() > 0.002, f"{path} has almost no dark ink"


def test_time_histories_counts_and_files(tmp_path):
    """Five panels, one line per result on each, saved as non-blank PNG and, on request, SVG
    with the caution at the foot."""
    trajs = [_traj("energy-state", "time"), _traj("energy-state", "fuel", duration_s=400.0),
             _traj("collocation", "time", duration_s=280.0)]
    axes = plots.plot_time_histories(trajs, units="us")
    assert len(axes) == 5
    for ax in axes:
        assert len(_paths(ax)) == 3
    # altitude panel in thousands of feet: 5000 m = 16.404 kft (1 ft = 0.3048 m exactly)
    top = _paths(axes[0])[0].get_ydata()[-1]
    assert top == pytest.approx(5000.0 / 0.3048 / 1000.0)
    # mass panel in lb
    assert _paths(axes[4])[0].get_ydata()[0] == pytest.approx(5000.0 / 0.45359237)
    written = plots.save_figure(axes[0].figure, tmp_path / "histories", ("png", "svg"))
    assert [p.suffix for p in written] == [".png", ".svg"]
    _nonblank_png(tmp_path / "histories.png")
    svg = (tmp_path / "histories.svg").read_text()
    assert "<svg" in svg and CAUTION.split(".")[0] in svg


def test_time_histories_wrong_axes():
    """Giving the wrong number of axes is an error naming the number needed."""
    import matplotlib.pyplot as plt

    fig, axes = plt.subplots(2, 1)
    with pytest.raises(ValueError, match="needs 5 axes"):
        plots.plot_time_histories([], axes=axes)
    plt.close(fig)


@pytest.mark.parametrize("x", ["mach", "tas"])
def test_ps_map_paths_zooms_limits(interceptor_map, tmp_path, x):
    """Ps map over Mach and over TAS: every path drawn, the zoom marked, the envelope hatched and
    the Ps = 0 line labelled; returns the axes it was given."""
    import matplotlib.pyplot as plt

    trajs = [with_zoom(_traj("energy-state", "time", top_m=15000.0, tas_m_s=250.0)),
             _traj("energy-state", "fuel", top_m=12000.0, tas_m_s=220.0),
             _traj("collocation", "time", top_m=16000.0, tas_m_s=260.0)]
    fig, ax = plt.subplots()
    out = plots.plot_ps_map(interceptor_map, trajs, x=x, units="si", ax=ax)
    assert out is ax
    assert len(_paths(ax)) == 3
    assert len([ln for ln in ax.get_lines() if ln.get_gid() == "zoom"]) == 1
    labels = [t.get_text() for t in ax.texts]
    assert "Ps = 0" in labels
    assert any(t.startswith("zoom dive") for t in labels)
    hatched = [c for c in ax.collections
               if plots.ENVELOPE_HATCH in (getattr(c, "hatches", None) or [])]
    assert hatched, "the region outside the envelope should be hatched"
    legend = [t.get_text() for t in ax.get_legend().get_texts()]
    assert "outside flight envelope" in legend
    assert "energy-state, minimum fuel" in legend
    if x == "mach":
        # the path's Mach data are on the x axis unchanged
        assert np.allclose(_paths(ax)[0].get_xdata(), trajs[0].table["mach"])
    else:
        assert np.allclose(_paths(ax)[0].get_xdata(), trajs[0].table["tas_m_s"])
    written = plots.save_figure(fig, tmp_path / f"ps_{x}")
    assert written == [tmp_path / f"ps_{x}.png"]           # PNG alone by default
    _nonblank_png(tmp_path / f"ps_{x}.png")
    with pytest.raises(ValueError, match="unknown figure format.*'eps'.*png, svg, pdf"):
        plots.save_figure(fig, tmp_path / f"ps_{x}", ("png", "eps"))


def test_fs_map_shows_fuel_paths_only(interceptor_map):
    """The fuel-specific-energy map overlays the minimum-fuel paths only."""
    trajs = [_traj("energy-state", "time"), _traj("energy-state", "fuel"),
             _traj("collocation", "fuel")]
    ax = plots.plot_fs_map(interceptor_map, trajs, units="us")
    assert len(_paths(ax)) == 2
    assert all("fuel" in ln.get_label() for ln in _paths(ax))
    assert "ft/lb" in " ".join(t.get_text() for t in ax.get_legend().get_texts())


def test_limit_lines_labelled():
    """Each active envelope limit gets a labelled line (a dynamic-pressure limit on the
    interceptor)."""
    import dataclasses

    from climbopt.energy import build_energy_map
    from climbopt.scenario import load_scenario

    scenario = load_scenario(DATA / "interceptor_1969.toml")
    limits = dataclasses.replace(scenario.limits, max_dynamic_pressure_pa=60_000.0)
    emap = build_energy_map(scenario, shape=(40, 50), limits=limits)
    ax = plots.plot_ps_map(emap, [], x="mach")
    labels = [t.get_text() for t in ax.texts]
    assert "q limit" in labels
    assert "q limit" in [t.get_text() for t in ax.get_legend().get_texts()]
    assert _paths(ax) == []


def test_styles_apart_in_grey():
    """Objective colours differ in grey (luma, ITU-R BT.601 weights 0.299/0.587/0.114) by more
    than 0.25 of full scale, and the two methods differ in line style."""
    from matplotlib.colors import to_rgb

    def luma(c):
        r, g, b = to_rgb(c)
        return 0.299 * r + 0.587 * g + 0.114 * b

    t = plots.path_style("collocation", "time")
    f = plots.path_style("collocation", "fuel")
    assert abs(luma(t["color"]) - luma(f["color"])) > 0.25
    assert t["marker"] != f["marker"]
    e = plots.path_style("energy-state", "time")
    assert e["linestyle"] != t["linestyle"]
    assert e["markerfacecolor"] != t["markerfacecolor"]


def test_time_histories_throttle_axis_full_range():
    """The throttle panel shows 0 to 1 even when the throttle is constant (no offset notation
    amplifying rounding noise)."""
    tb = simple_table()
    tb["throttle"] = 1.0 - 1e-7 * np.arange(len(tb["throttle"]))
    axes = plots.plot_time_histories([Trajectory("collocation", "fuel", tb)])
    lo, hi = axes[3].get_ylim()
    assert lo <= 0.0 and hi >= 1.0
    assert axes[3].yaxis.get_major_formatter().get_offset() == ""


def test_import_keeps_the_users_backend():
    """Importing climbopt.plots leaves the user's matplotlib backend alone (notebooks keep their
    inline backend): checked in a fresh interpreter that chose the SVG backend first."""
    import subprocess
    import sys

    code = ("import matplotlib; matplotlib.use('svg'); import climbopt.plots; "
            "print(matplotlib.get_backend())")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                         check=True, env={"PATH": ""})
    assert out.stdout.strip() == "svg"
