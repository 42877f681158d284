"""Trade figures: Pareto front and minimum-size grid by hand, saved files, input errors."""

from __future__ import annotations

import matplotlib.pyplot as plt
import numpy as np
import pytest
import xarray as xr
from PIL import Image

from covergrid.errors import CovergridError
from covergrid.render import style, trades


def test_pareto_front_by_hand():
    # Invented designs (inputs, worked by hand): lower is better.
    total = [12, 12, 18, 18, 24, 30, 30, 36]
    gap = [90.0, 80.0, 85.0, 60.0, 60.0, 40.0, np.nan, 45.0]
    # 12 -> best 80 (row 1); 18 -> 60 (row 3) beats 80; 24 -> 60 ties, not strictly better;
    # 30 -> 40 (row 5); NaN row never counts; 36 -> 45 is worse than 40.
    np.testing.assert_array_equal(trades.pareto_front(total, gap, lower_is_better=True),
                                  [1, 3, 5])
    coverage = [0.5, 0.6, 0.6, 0.9]
    np.testing.assert_array_equal(
        trades.pareto_front([6, 6, 12, 18], coverage, lower_is_better=False), [1, 3])


def _table():
    alt, inc, total, planes, phasing, gap = [], [], [], [], [], []
    for a in (500.0, 800.0):
        for i in (45.0, 60.0, 75.0):
            for t in (12, 18, 24):
                for p in (2, 3, 6):
                    if t % p:
                        continue
                    for f in range(p):
                        alt.append(a)
                        inc.append(i)
                        total.append(t)
                        planes.append(p)
                        phasing.append(f)
                        # Invented smooth response (an input, not a check value).
                        gap.append(7200.0 * (12 / t) * (500 / a) * (1 + abs(i - 60) / 60)
                                   * (1 + 0.1 * f))
    table = {"altitude_km": np.array(alt), "inclination_deg": np.array(inc),
             "total": np.array(total), "planes": np.array(planes),
             "phasing": np.array(phasing), "max_gap": np.array(gap)}
    table["meets"] = table["max_gap"] <= 4000.0
    return table


def test_minimum_total_grid_by_hand():
    table = _table()
    grid = trades.minimum_total_grid(table)
    np.testing.assert_array_equal(grid["altitude_km"], [500.0, 800.0])
    np.testing.assert_array_equal(grid["inclination_deg"], [45.0, 60.0, 75.0])
    # 500 km, 60 deg: gap 7200*12/T <= 4000 needs T >= 21.6 -> 24. At 45/75 deg the factor
    # 1.25 needs T >= 27 -> none. 800 km: 4500*12/T (*1.25) <= 4000 -> T >= 13.5 (16.9): 18, 18.
    expected = np.array([[np.nan, 24.0, np.nan], [18.0, 18.0, 18.0]])
    np.testing.assert_array_equal(grid["min_total"], expected)
    assert grid["evaluated"].all()


def test_save_trade_figures_from_dict_and_dataset(tmp_path):
    table = _table()
    written = trades.save_trade_figures(table, "max_gap", tmp_path, caption="Test sweep.",
                                        requirement=4000.0)
    assert [p.name for p in written] == [
        "trade_metric_vs_total.png", "trade_metric_vs_total.pdf", "trade_min_total.png",
        "trade_min_total.pdf", "trade_pareto.png", "trade_pareto.pdf"]
    for path in written:
        if path.suffix == ".png":
            with Image.open(path) as image:
                # the width is the figure's; the height fits the chart and its caption
                assert image.size[0] == round(trades.TRADE_FIGSIZE_IN[0] * style.DPI)
                assert (0.7 * trades.TRADE_FIGSIZE_IN[1] * style.DPI < image.size[1]
                        <= 1.3 * trades.TRADE_FIGSIZE_IN[1] * style.DPI)
                assert np.asarray(image.convert("L"), dtype=float).std() > 10.0
        else:
            data = path.read_bytes()
            assert data.startswith(b"%PDF-") and b"/Subtype /Image" not in data
    ds = xr.Dataset({name: ("design", np.asarray(col)) for name, col in table.items()})
    again = trades.save_trade_figures(ds, "max_gap", tmp_path / "ds", by="inclination_deg")
    assert len(again) == 6


def test_charts_content():
    table = _table()
    lines = trades.plot_metric_vs_total(table, "max_gap", requirement=4000.0)
    fig = lines[0].axes.figure
    try:
        assert [line.get_label() for line in lines] == ["500 km", "800 km"]
        # At each total, the best over inclination, planes and phasing: 60 deg and F = 0.
        np.testing.assert_allclose(lines[0].get_xdata(), [12, 18, 24])
        expected_h = 7200.0 * 12 / np.array([12, 18, 24]) / 3600.0
        np.testing.assert_allclose(lines[0].get_ydata(), expected_h, rtol=1e-12)
        assert lines[0].axes.get_ylabel() == "maximum gap [h]"
        assert style.FOOTER in [t.get_text() for t in fig.texts]
    finally:
        plt.close(fig)
    mesh = trades.plot_minimum_total_map(table)
    fig = mesh.axes.figure
    try:
        texts = sorted(t.get_text() for t in mesh.axes.texts)
        # "none" up to the largest total swept
        assert texts == ["18", "18", "18", "24", "none\n\u226424", "none\n\u226424"]
    finally:
        plt.close(fig)


def test_table_errors():
    with pytest.raises(CovergridError, match=r"missing column\(s\) \['max_gap'\]"):
        trades.plot_pareto_front({"total": [1, 2]}, "max_gap")
    with pytest.raises(CovergridError, match="one length"):
        trades.plot_pareto_front({"total": [1, 2], "max_gap": [1.0]}, "max_gap")
    with pytest.raises(CovergridError, match="say whether 'lower' or 'higher'"):
        trades.plot_pareto_front({"total": [1, 2], "score": [1.0, 2.0]}, "score")
    with pytest.raises(CovergridError, match="mapping of columns"):
        trades.design_columns([1, 2, 3], ["total"])
    assert plt.get_fignums() == []


def test_axis_names_what_is_traded():
    """A sweep trades the achieved value of the requirement's metric: the axis must say
    which metric and over what share of the area, not just 'achieved'."""
    table = _table()
    table["achieved"] = np.asarray(table["max_gap"], dtype=float)
    name = "maximum gap met over 90 % of the area"
    lines = trades.plot_metric_vs_total(table, "achieved", better="lower", units="s",
                                        long_name=name)
    try:
        assert lines[0].axes.get_ylabel() == f"{name} [h]"
    finally:
        plt.close(lines[0].axes.figure)


def test_minimum_total_map_marks_answers_at_the_floor_and_is_discrete():
    """An answer at the smallest total swept may not be the true minimum: the cell says
    "<=" and a note under the chart says why; the colour bar has one colour per total."""
    table = _table()
    table["meets"] = table["max_gap"] <= 8000.0  # 12 (the floor) already meets in places
    mesh = trades.plot_minimum_total_map(table)
    fig = mesh.axes.figure
    try:
        texts = sorted(t.get_text() for t in mesh.axes.texts)
        assert texts == ["18", "18", "\u226412", "\u226412", "\u226412", "\u226412"]
        note = next(a for a in mesh.axes.get_children() if a.get_gid() == "covergrid-bound-note")
        assert "smallest total swept" in note.get_title().get_text()
        # discrete: ticks at the totals found, and as many colours as totals
        np.testing.assert_array_equal(mesh.colorbar.get_ticks(), [12, 18])
        assert mesh.cmap.N == 2
    finally:
        plt.close(fig)
    table["meets"] = table["max_gap"] <= 4000.0  # no answer at the floor: no note
    mesh = trades.plot_minimum_total_map(table)
    try:
        assert not any(a.get_gid() == "covergrid-bound-note" for a in mesh.axes.get_children())
        assert "none\n\u226424" in [t.get_text() for t in mesh.axes.texts]
    finally:
        plt.close(mesh.axes.figure)


def test_single_design_charts_have_sane_ticks_and_say_what_the_best_is_over():
    table = _table()
    lines = trades.plot_metric_vs_total(table, "max_gap")
    try:
        title = lines[0].axes.get_title()
        assert "best over inclination, planes and phasing at each total" in title
    finally:
        plt.close(lines[0].axes.figure)
    one = {name: np.asarray(col)[:1] for name, col in table.items()}
    lines = trades.plot_metric_vs_total(one, "max_gap")
    try:
        ax = lines[0].axes
        np.testing.assert_array_equal(ax.get_xticks(), [12])  # not 11.4 ... 12.6
        assert "best over" not in ax.get_title()  # nothing else varies
    finally:
        plt.close(ax.figure)
    one["meets"] = np.array([True])
    mesh = trades.plot_minimum_total_map(one)
    try:
        np.testing.assert_array_equal(mesh.colorbar.get_ticks(), [12])  # not 9.6 ... 10.4
    finally:
        plt.close(mesh.axes.figure)
