"""Shared figure style: display units, the colour rule, fold wording, atomic saves."""

from __future__ import annotations

import matplotlib.pyplot as plt
import numpy as np
import pytest

from covergrid import io
from covergrid.compute.metrics import METRICS
from covergrid.render import style


@pytest.mark.parametrize(
    ("largest_s", "label", "factor"),
    [(90.0, "s", 1.0), (180.0, "s", 1.0), (181.0, "min", 1 / 60), (3 * 3600.0, "min", 1 / 60),
     (5 * 3600.0, "h", 1 / 3600), (72 * 3600.0, "h", 1 / 3600), (10 * 86400.0, "d", 1 / 86400)],
)
def test_time_unit_follows_largest_value(largest_s, label, factor):
    values = np.array([0.0, largest_s / 2, largest_s, np.nan])
    unit = style.display_unit("max_gap", "s", values)
    assert unit.label == label
    assert unit.factor == pytest.approx(factor, rel=1e-15)
    assert largest_s * unit.factor <= 180.0  # the rule: at most 180 of the unit


def test_fraction_in_percent_and_counts_plain():
    assert style.display_unit("coverage_fraction", "1", [0.2, 1.0]) == style.DisplayUnit("%", 100)
    assert style.display_unit("nfold_fraction", "1", [0.2]) == style.DisplayUnit("%", 100)
    assert style.display_unit("pass_count", "1", [3]) == style.DisplayUnit("", 1.0)
    assert style.display_unit("cell_area", "m2", [3]) == style.DisplayUnit("m2", 1.0)
    assert style.display_unit("max_gap", "s", [np.nan]).label == "s"  # all-NaN field


def _luminance(rgba) -> float:
    # Relative luminance, ITU-R BT.709 coefficients (as used by sRGB, IEC 61966-2-1), linearised.
    rgb = np.asarray(rgba[:3])
    lin = np.where(rgb <= 0.04045, rgb / 12.92, ((rgb + 0.055) / 1.055) ** 2.4)
    return float(lin @ [0.2126, 0.7152, 0.0722])


@pytest.mark.parametrize("name", sorted(METRICS))
def test_bright_end_means_good(name):
    info = METRICS[name]
    cmap = style.colormap_for(name, info.units)
    low, high = _luminance(cmap(0.0)), _luminance(cmap(1.0))
    good, bad = (low, high) if info.better == "lower" else (high, low)
    assert good > bad
    assert cmap(np.nan)[3] == 0.0  # NaN cells transparent
    assert cmap.name.split("_")[0] in {"viridis", "cividis", "magma"}


def test_colormap_override_used_as_given():
    assert style.colormap_for("max_gap", "s", cmap="plasma").name == "plasma"


def test_fold_text():
    text = "fraction of time with at least k satellites in view"
    assert style.fold_text(text, 2) == "fraction of time with at least 2 satellites in view"
    assert style.fold_text(text, 1) == "fraction of time with at least 1 satellite in view"
    assert style.fold_text("coverage", 3) == "coverage (k = 3)"
    assert style.fold_text(text, None) == text


def test_label():
    unit = style.DisplayUnit("min", 1 / 60)
    assert style.metric_label("max_gap", {"long_name": "maximum gap"}, unit) == "maximum gap [min]"
    assert style.metric_label("x_y", {}, style.DisplayUnit("", 1.0)) == "x y"


def test_figure_save_leaves_nothing_on_failure(tmp_path):
    # the one figure saver, covergrid.io.save_figure (render/style had a second one)
    fig = plt.figure()
    try:
        with pytest.raises(ValueError, match="not supported"):
            io.save_figure(fig, tmp_path / "figure.nosuchformat")
        assert list(tmp_path.iterdir()) == []
        path = io.save_figure(fig, tmp_path / "sub" / "figure.png")
        assert [p.name for p in path.parent.iterdir()] == ["figure.png"]
        assert path.stat().st_mode & 0o044  # readable by others, not mkstemp's 0600
    finally:
        plt.close(fig)
