"""The requirement on figures: threshold contour, hatching where not met, two-tone scale,
verdict in the caption, a layout whose caption never overprints the footer, polar extents.

The Dataset is the suite's analytic one (invented smooth fields: inputs, not check values);
the requirement thresholds are chosen so that its field crosses them.
"""

from __future__ import annotations

import matplotlib.pyplot as plt
import numpy as np
import pytest

from conftest import analytic_dataset
from covergrid.compute.requirement import Requirement
from covergrid.render import maps, profiles, scales, style
from covergrid.render.marks import requirement_mark

# max_gap of analytic_dataset(…, max_gap_scale_s=3600) runs from about 34 to 66 min.
GAP_REQUIREMENT = Requirement("max_gap", at_most=2700.0, area_fraction=0.95)
LONG_CAPTION = ("Walker delta 28/7/1, altitude 1000 km, inclination 53\u00b0. Sensor: minimum "
                "elevation 15\u00b0. Span 24 h from 2031-06-21T00:00:00Z, step 60 s. ") * 4


def _by_gid(fig, gid):
    return [a for a in fig.findobj() if a.get_gid() == gid]


def _bbox(fig, gid):
    (artist,) = _by_gid(fig, gid)
    return artist.get_window_extent(fig.canvas.get_renderer())


@pytest.fixture
def gaps():
    return analytic_dataset(2.0, lat_min_deg=-60.0, lat_max_deg=60.0, max_gap_scale_s=3600.0)


def test_map_of_the_requirement_metric_has_contour_hatching_and_two_tones(gaps):
    mesh = maps.plot_metric_map(gaps, "max_gap", requirement=GAP_REQUIREMENT, study="demo",
                                caption="Test design.")
    fig = mesh.axes.figure
    try:
        (contour,) = _by_gid(fig, "covergrid-requirement-contour")
        assert list(contour.levels) == [45.0]  # the threshold in the map's unit (min)
        assert sum(len(p.vertices) for p in contour.get_paths()) > 10
        (hatch,) = _by_gid(fig, "covergrid-requirement-hatch")
        assert hatch.get_hatch() and len(hatch.get_paths()) > 0
        # cells meeting it blue, cells failing it orange-red (two tones split at 45 min)
        values = gaps["max_gap"].values / 60.0
        met = mesh.cmap(mesh.norm(float(values[values <= 45.0].min())))
        fails = mesh.cmap(mesh.norm(float(values[values > 45.0].max())))
        assert met[2] > met[0] and fails[0] > fails[2]
        bold = [t.get_text() for t in mesh.colorbar.ax.get_yticklabels()
                if t.get_fontweight() == "bold"]
        assert bold == ["45"]
        assert mesh.axes.get_title() == "Maximum gap \u2014 study demo"
        caption = _by_gid(fig, "covergrid-caption")[0].get_text().replace("\n", " ")
        assert "Requirement: maximum gap at most 45.0 min over 95 % of the area: NOT MET" in (
            caption)
    finally:
        plt.close(fig)


def test_other_maps_hatch_where_the_requirement_fails_without_a_contour(gaps):
    mesh = maps.plot_metric_map(gaps, "coverage_fraction", requirement=GAP_REQUIREMENT)
    fig = mesh.axes.figure
    try:
        assert _by_gid(fig, "covergrid-requirement-contour") == []
        assert len(_by_gid(fig, "covergrid-requirement-hatch")) == 1
        assert mesh.cmap.name.startswith("viridis")  # its own scale: not the requirement's
    finally:
        plt.close(fig)
    met = Requirement("max_gap", at_most=1e6)  # met everywhere: nothing hatched, no key
    mesh = maps.plot_metric_map(gaps, "coverage_fraction", requirement=met)
    try:
        assert _by_gid(mesh.axes.figure, "covergrid-requirement-hatch") == []
        assert _by_gid(mesh.axes.figure, "covergrid-key") == []
    finally:
        plt.close(mesh.axes.figure)


def test_hatching_is_exactly_the_failing_cells(gaps):
    mark = requirement_mark(GAP_REQUIREMENT, gaps)
    np.testing.assert_array_equal(mark.fails, ~(gaps["max_gap"].values <= 2700.0))
    nan = gaps.copy(deep=True)
    nan["max_gap"].values[0, 0] = np.nan  # a cell without a value fails, as in the verdict
    assert requirement_mark(GAP_REQUIREMENT, nan).fails[0, 0]


@pytest.mark.parametrize("make", ["map", "profile"])
def test_a_long_caption_never_overprints_the_footer_or_the_drawing(gaps, make):
    if make == "map":
        fig = maps.plot_metric_map(gaps, "max_gap", requirement=GAP_REQUIREMENT,
                                   caption=LONG_CAPTION).axes.figure
    else:
        fig = profiles.plot_latitude_profile(gaps, ["max_gap", "coverage_fraction"],
                                             requirement=GAP_REQUIREMENT,
                                             caption=LONG_CAPTION)[0].figure
    try:
        renderer = fig.canvas.get_renderer()
        caption, footer = _bbox(fig, "covergrid-caption"), _bbox(fig, "covergrid-footer")
        assert caption.height > 4 * footer.height  # four lines or more
        assert not caption.overlaps(footer) and caption.y0 > footer.y1
        key = _bbox(fig, "covergrid-key")
        assert key.y0 > caption.y1
        for ax in fig.axes:  # the drawing (with its tick and gridline labels) above it all
            assert ax.get_tightbbox(renderer).y0 > key.y1
        width, height = fig.get_size_inches() * fig.dpi
        for box in (caption, footer, key):
            assert 0 <= box.x0 and box.x1 <= width and 0 <= box.y0 and box.y1 <= height
    finally:
        plt.close(fig)


def test_profile_draws_the_threshold_and_hatches_failing_latitudes(gaps):
    axes = profiles.plot_latitude_profile(gaps, ["coverage_fraction", "max_gap"],
                                          requirement=GAP_REQUIREMENT, study="demo")
    fig = axes[0].figure
    try:
        (line,) = _by_gid(fig, "covergrid-requirement-threshold")
        assert line.axes is axes[1] and list(line.get_xdata()) == [45.0, 45.0]
        spans = [a for a in _by_gid(fig, "covergrid-requirement-hatch")]
        assert {a.axes for a in spans} == set(axes)  # every panel
        assert fig.texts and "Latitude profile \u2014 study demo" in [t.get_text()
                                                                     for t in fig.texts]
    finally:
        plt.close(fig)


def test_whole_number_maps_never_use_the_black_end():
    ds = analytic_dataset(10.0)
    ds["min_in_view"] = (ds["min_in_view"].dims, np.full(ds["min_in_view"].shape, 6),
                         ds["min_in_view"].attrs)
    ds["min_in_view"].values[:, :6] = 9
    mesh = maps.plot_metric_map(ds, "min_in_view")
    try:
        for value in (6, 9):
            # magma at 0.0 is black (luminance 0); from 0.35 on it is at least 0.07
            assert style.luminance(mesh.cmap(mesh.norm(value))) > 0.05
        np.testing.assert_array_equal(mesh.colorbar.get_ticks(), [6, 7, 8, 9])
    finally:
        plt.close(mesh.axes.figure)


def test_a_requirement_at_the_end_of_the_range_keeps_its_own_colour():
    """At least 100 %: the cells at 100 % must not share the colour of the cells at 99 %
    (a continuous scale saturates exactly there)."""
    shown = np.ma.masked_invalid(np.array([80.0, 95.0, 99.0, 99.9, 100.0]))
    scale = scales.colour_scale("nfold_fraction", "1", shown, threshold=100.0,
                                sense="at_least")
    colour = [scale.cmap(scale.norm(v)) for v in shown]
    assert colour[-1] != colour[-2]
    assert colour[-1][2] > colour[-1][0] and colour[-2][0] > colour[-2][2]  # blue, red
    assert scale.tick_labels is not None and scale.tick_labels[-1] == ""  # no 102 %
    counts = scales.colour_scale("min_in_view", "1", np.ma.masked_invalid(np.array([3.0, 4.0])),
                                 threshold=4.0, sense="at_least")
    assert counts.decision_level == 3.5
    assert counts.cmap(counts.norm(4.0))[2] > counts.cmap(counts.norm(3.0))[2]


def test_polar_views_stop_at_the_data():
    assert maps.polar_edge_deg("polar_north", np.arange(50.0, 91.0, 2.0)) == 50.0
    assert maps.polar_edge_deg("polar_north", np.arange(-90.0, 91.0, 2.0)) == 20.0
    assert maps.polar_edge_deg("polar_south", np.arange(-90.0, -59.0, 2.0)) == -60.0
    assert maps.polar_edge_deg("polar_north", np.arange(-90.0, -59.0, 2.0)) == 20.0
    ds = analytic_dataset(2.0, lat_min_deg=50.0, lat_max_deg=90.0)
    mesh = maps.plot_metric_map(ds, "coverage_fraction", projection="polar_north")
    try:
        notes = [t.get_text() for t in mesh.axes.texts]
        assert any("edge 50\u00b0 N" in t for t in notes)
    finally:
        plt.close(mesh.axes.figure)
