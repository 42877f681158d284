"""Latitude profiles: area-weighted zonal statistics and the saved figure."""

from __future__ import annotations

import matplotlib.pyplot as plt
import numpy as np
import pytest
from PIL import Image

from conftest import analytic_dataset
from covergrid.render import profiles, style

# Sums of a few float64 products: only rounding remains.
ROUNDING = 1e-12


def test_zonal_mean_uses_cell_area_and_skips_nan():
    ds = analytic_dataset(30.0)
    values = np.tile(np.arange(12, dtype=float), (6, 1))  # (lat, lon): value = lon index
    area = np.ones((6, 12))
    area[0, :6] = 3.0  # first row: the western half weighs three times as much
    values[1, 5] = np.nan  # second row: one cell missing
    values[2, :] = np.nan  # third row: nothing finite
    ds["max_gap"].values = values
    ds["cell_area"].values = area
    prof = profiles.latitude_profile(ds, "max_gap")
    # Row 0 by hand: (3 * (0+...+5) + (6+...+11)) / (3*6 + 6) = (45 + 51) / 24 = 4.0.
    assert prof["mean"][0] == pytest.approx(4.0, abs=ROUNDING)
    # Row 1: mean of 0..11 without 5 = (66 - 5) / 11.
    assert prof["mean"][1] == pytest.approx(61.0 / 11.0, abs=ROUNDING)
    assert np.isnan(prof["mean"][2]) and np.isnan(prof["min"][2]) and np.isnan(prof["max"][2])
    assert prof["min"][3] == 0.0 and prof["max"][3] == 11.0
    np.testing.assert_array_equal(prof["lat_deg"], ds["lat"].values)


def test_nfold_profile_needs_a_valid_fold():
    ds = analytic_dataset(30.0)
    prof = profiles.latitude_profile(ds, "nfold_fraction", k=2)
    expected = ds["nfold_fraction"].sel(k=2).mean("lon").values
    np.testing.assert_allclose(prof["mean"], expected, rtol=0, atol=ROUNDING)
    with pytest.raises(ValueError, match="needs a fold"):
        profiles.latitude_profile(ds, "nfold_fraction")


def test_saved_profile_figure(tmp_path):
    ds = analytic_dataset(10.0)
    metrics = ["coverage_fraction", "max_gap", "nfold_fraction"]
    written = profiles.save_latitude_profile(ds, metrics, tmp_path, caption="Test design.")
    assert [p.name for p in written] == ["latitude_profile.png", "latitude_profile.pdf"]
    width_in, height_in = profiles._figsize(len(metrics))
    with Image.open(written[0]) as image:
        # the width is the figure's; the height fits the panels, caption and footer
        assert image.size[0] == round(width_in * style.DPI)
        assert 0.8 * height_in * style.DPI < image.size[1] <= 1.2 * height_in * style.DPI
        assert np.asarray(image.convert("L"), dtype=float).std() > 10.0
    pdf = written[1].read_bytes()
    assert pdf.startswith(b"%PDF-") and b"/Subtype /Image" not in pdf


def test_profile_panels_and_units():
    ds = analytic_dataset(10.0, max_gap_scale_s=6 * 3600.0)
    axes = profiles.plot_latitude_profile(ds, ["max_gap", "coverage_fraction", "pass_count"])
    try:
        labels = [ax.get_xlabel() for ax in axes]
        assert labels == ["maximum gap [h]", "coverage fraction [%]", "number of passes"]
        mean_line = axes[0].get_lines()[0]
        expected_h = profiles.latitude_profile(ds, "max_gap")["mean"] / 3600.0
        np.testing.assert_allclose(mean_line.get_xdata(), expected_h, rtol=0, atol=ROUNDING)
        assert style.FOOTER in [t.get_text() for t in axes[0].figure.texts]
        assert axes[0].get_ylim() == (-90.0, 90.0)
    finally:
        plt.close(axes[0].figure)
    band = analytic_dataset(10.0, lat_min_deg=-60.0, lat_max_deg=60.0)
    axes = profiles.plot_latitude_profile(band, ["max_gap"])
    try:
        assert axes[0].get_ylim() == (-60.0, 60.0)  # the axis spans the computed band
        np.testing.assert_array_equal(axes[0].get_yticks(), [-60, -30, 0, 30, 60])
    finally:
        plt.close(axes[0].figure)
    with pytest.raises(ValueError, match="at least one metric"):
        profiles.plot_latitude_profile(ds, [])
