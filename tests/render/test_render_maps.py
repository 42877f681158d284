"""Metric maps: files, sizes, vector PDF, colour-bar units, NaN cells, projections, captions."""

from __future__ import annotations

import re
import zlib

import matplotlib.pyplot as plt
import numpy as np
import pytest
from PIL import Image

from conftest import analytic_dataset
from covergrid.errors import CovergridError
from covergrid.render import maps, style

EXPECTED_PX = (round(maps.MAP_FIGSIZE_IN[0] * style.DPI), round(maps.MAP_FIGSIZE_IN[1] * style.DPI))


def _assert_report_png(path, size_px):
    with Image.open(path) as image:
        image.verify()
    with Image.open(path) as image:
        assert image.format == "PNG"
        # the width is the figure's; the height fits what is drawn (style.add_caption: a
        # world map is about half as high as wide, never more than the axes it was given
        # plus a few caption lines)
        assert image.size[0] == size_px[0]
        assert 0.4 * size_px[1] < image.size[1] <= 1.3 * size_px[1]
        dpi = image.info.get("dpi")
        assert dpi is not None and round(dpi[0]) == style.DPI
        pixels = np.asarray(image.convert("RGB"), dtype=float)
    # Non-blank: many distinct colours and real contrast, not a white page.
    assert pixels.std() > 20.0
    assert len(np.unique(pixels.reshape(-1, 3), axis=0)) > 200


def _pdf_images(data: bytes) -> list[tuple[int, int]]:
    """(width, height) [px] of every image XObject in a PDF (matplotlib writes plain dicts)."""
    return [(int(w), int(h)) for w, h in
            re.findall(rb"/Subtype /Image\s*/Width (\d+)\s*/Height (\d+)", data)]


def _pdf_line_segments(data: bytes) -> int:
    """Number of straight-line path segments (``l`` operators) in a PDF's content streams."""
    count = 0
    for match in re.finditer(rb"stream\r?\n(.*?)\r?\nendstream", data, re.S):
        try:
            content = zlib.decompress(match.group(1))
        except zlib.error:  # an image or font stream, not drawing operators
            continue
        count += len(re.findall(rb"[\d.]+ [\d.]+ l\n", content))
    return count


def _assert_print_pdf(path):
    """The PDF of a map: the cell mesh one image at print resolution, the rest vector."""
    data = path.read_bytes()
    assert data.startswith(b"%PDF-")
    images = _pdf_images(data)
    # One image of the cells, plus its soft mask (the alpha of the NaN cells) of the same size.
    assert 1 <= len(images) <= 2 and len(set(images)) == 1
    width_px, height_px = images[0]
    map_width_in = 0.80 * maps.MAP_FIGSIZE_IN[0]  # the map axes of a new figure
    assert width_px >= 0.95 * map_width_in * style.PRINT_DPI  # 300 dpi, not the PNG's 200
    assert height_px > 0.3 * width_px
    # Coastlines and gridlines stay vector: thousands of segments (the 110m coast, drawn twice
    # for its halo, has about 12,000), far fewer than a vector mesh of a 1 deg grid would add
    # (64,800 cells, 4 edges each).
    assert 2_000 < _pdf_line_segments(data) < 50_000
    # Text stays text: embedded fonts with a Unicode map, so it can be selected and searched.
    assert b"/Type /Font" in data and b"/ToUnicode" in data
    return data


def test_save_maps_png_and_print_pdf(dataset, tmp_path, offline_and_tidy):
    written = maps.save_metric_maps(dataset, ["max_gap"], tmp_path,
                                    caption="Walker delta 6/3/1 test design.")
    names = [p.name for p in written]
    assert names == ["max_gap.png", "max_gap.pdf"]
    assert all(p.parent == tmp_path / "maps" for p in written)
    _assert_report_png(written[0], EXPECTED_PX)
    _assert_print_pdf(written[1])
    assert sorted(p.name for p in (tmp_path / "maps").iterdir()) == sorted(names)  # no temp left
    assert list(offline_and_tidy.iterdir()) == []  # nothing downloaded into cartopy's folder


def test_fine_grid_pdf_is_small_with_the_mesh_as_one_image(tmp_path):
    ds = analytic_dataset(1.0)  # 64,800 cells: as vector paths the PDF was about 1.5 MB
    written = maps.save_metric_maps(ds, ["coverage_fraction"], tmp_path, caption=None)
    _assert_print_pdf(written[1])
    assert written[1].stat().st_size < 600_000


def test_nfold_one_map_per_fold_or_chosen_fold(dataset, tmp_path):
    written = maps.save_metric_maps(dataset, ["nfold_fraction"], tmp_path, caption=None)
    assert [p.name for p in written if p.suffix == ".png"] == [
        "nfold_fraction_k1.png", "nfold_fraction_k2.png", "nfold_fraction_k3.png"]
    one = maps.save_metric_maps(dataset, ["nfold_fraction"], tmp_path / "one", caption=None, k=2)
    assert [p.name for p in one] == ["nfold_fraction_k2.png", "nfold_fraction_k2.pdf"]


@pytest.mark.parametrize(
    ("scale_s", "unit"), [(100.0, "s"), (3600.0, "min"), (6 * 3600.0, "h")],
)
def test_colour_bar_unit_follows_range(scale_s, unit):
    ds = analytic_dataset(10.0, max_gap_scale_s=scale_s)
    mesh = maps.plot_metric_map(ds, "max_gap")
    try:
        label = mesh.colorbar.ax.get_ylabel()
        assert label == f"maximum gap [{unit}]"
        factor = style.display_unit("max_gap", "s", ds["max_gap"].values).factor
        assert mesh.norm.vmax == pytest.approx(float(ds["max_gap"].max()) * factor, rel=1e-12)
    finally:
        plt.close(mesh.axes.figure)


def test_fraction_in_percent_and_counts_discrete(dataset):
    mesh = maps.plot_metric_map(dataset, "coverage_fraction")
    count = maps.plot_metric_map(dataset, "max_in_view")
    try:
        assert mesh.colorbar.ax.get_ylabel() == "coverage fraction [%]"
        assert mesh.norm.vmax == pytest.approx(100 * float(dataset["coverage_fraction"].max()))
        assert count.colorbar.ax.get_ylabel() == "maximum satellites in view"
        values = np.unique(dataset["max_in_view"].values)
        np.testing.assert_array_equal(count.colorbar.get_ticks(), values)
        # One colour per integer value.
        colours = {tuple(count.cmap(count.norm(v))) for v in values}
        assert len(colours) == values.size
    finally:
        plt.close(mesh.axes.figure)
        plt.close(count.axes.figure)


def test_nan_cells_are_masked_and_transparent():
    ds = analytic_dataset(10.0)
    gap = ds["max_gap"].values.copy()
    outside = np.abs(ds["lat"].values) > 60.0
    gap[outside, :] = np.nan
    ds["max_gap"].values = gap
    mesh = maps.plot_metric_map(ds, "max_gap", projection="plate_carree")
    try:
        shown = mesh.get_array()
        assert np.ma.count_masked(shown) == int(np.isnan(gap).sum())
        assert mesh.cmap(np.ma.masked)[3] == 0.0
        assert np.isfinite(mesh.norm.vmin) and np.isfinite(mesh.norm.vmax)
    finally:
        plt.close(mesh.axes.figure)


def test_latitude_band_grid_draws(tmp_path):
    ds = analytic_dataset(10.0, lat_min_deg=-60.0, lat_max_deg=60.0)
    written = maps.save_metric_maps(ds, ["mean_response_time"], tmp_path, caption="band",
                                    projection="mollweide")
    _assert_report_png(written[0], EXPECTED_PX)


@pytest.mark.parametrize("name", sorted(maps.PROJECTIONS))
def test_every_projection_draws(dataset, name):
    mesh = maps.plot_metric_map(dataset, "coverage_fraction", projection=name,
                                centre_lat_deg=30.0 if name == "orthographic" else 0.0)
    fig = mesh.axes.figure
    try:
        fig.canvas.draw()  # draws gridline labels and coastlines for real
    finally:
        plt.close(fig)


def test_unknown_projection_lists_names_and_writes_nothing(dataset, tmp_path):
    with pytest.raises(CovergridError, match=r"projection: 'mercator' is unknown.*robinson"):
        maps.save_metric_maps(dataset, ["max_gap"], tmp_path, caption=None,
                              projection="mercator")
    assert list(tmp_path.iterdir()) == []


def test_bad_metric_or_fold_writes_nothing(dataset, tmp_path):
    with pytest.raises(CovergridError, match=r"metric: 'max_gapp' is not in the Dataset"):
        maps.save_metric_maps(dataset, ["coverage_fraction", "max_gapp"], tmp_path, caption=None)
    with pytest.raises(CovergridError, match=r"k: nfold_fraction needs a fold; got 7"):
        maps.save_metric_maps(dataset, ["nfold_fraction"], tmp_path, caption=None, k=7)
    assert list(tmp_path.iterdir()) == []
    with pytest.raises(CovergridError, match="needs a fold"):
        maps.plot_metric_map(dataset, "nfold_fraction")
    with pytest.raises(CovergridError, match="no fold dimension"):
        maps.plot_metric_map(dataset, "max_gap", k=1)


def test_title_caption_footer_and_given_axes(dataset):
    import cartopy.crs as ccrs

    mesh = maps.plot_metric_map(dataset, "nfold_fraction", k=2, caption="My design caption.")
    fig = mesh.axes.figure
    try:
        texts = [t.get_text() for t in fig.texts]
        assert "My design caption." in texts
        assert style.FOOTER in texts
        assert mesh.axes.get_title() == "Fraction of time with at least 2 satellites in view"
    finally:
        plt.close(fig)
    fig = plt.figure()
    try:
        ax = fig.add_subplot(projection=ccrs.Mollweide())
        mesh = maps.plot_metric_map(dataset, "max_gap", ax=ax, title="Custom")
        assert mesh.axes is ax and ax.get_title() == "Custom"
        assert mesh.colorbar is not None
    finally:
        plt.close(fig)


def test_design_caption_full_and_partial():
    text = maps.design_caption({
        "pattern": "delta", "total": 24, "planes": 3, "phasing": 1, "altitude_km": 550.0,
        "inclination_deg": 53.0, "min_elevation_deg": 10.0, "max_off_nadir_deg": 45.0,
        "max_range_km": float("nan"), "duration_h": 24.0, "step_s": 60.0,
        "epoch": np.datetime64("2031-03-20T00:00:00"),
    })
    assert text == ("Walker delta 24/3/1, altitude 550 km, inclination 53\u00b0. Sensor: minimum "
                    "elevation 10\u00b0, maximum off-nadir 45\u00b0. Span 24 h from "
                    "2031-03-20T00:00:00Z, step 60 s.")
    import datetime

    plus_one_h = datetime.timezone(datetime.timedelta(hours=1))
    aware = datetime.datetime(2031, 3, 20, 1, 0, tzinfo=plus_one_h)
    assert maps.design_caption({"epoch": aware}) == "Epoch 2031-03-20T00:00:00Z."
    short = maps.design_caption({"altitude_km": 1200.5, "step_s": 30, "max_range_km": 2500})
    assert short == "Altitude 1200.5 km. Sensor: maximum range 2500 km. Step 30 s."
    assert maps.design_caption({"pattern": "star", "inclination_deg": 86.4}) == (
        "Walker star, inclination 86.4\u00b0.")


def test_design_caption_errors():
    with pytest.raises(CovergridError, match=r"unknown key\(s\) \['altitude'\]"):
        maps.design_caption({"altitude": 500})
    with pytest.raises(CovergridError, match="total, planes and phasing go together"):
        maps.design_caption({"total": 24, "planes": 3})


def test_outlying_durations_clip_the_colour_scale_with_an_arrow():
    """Never-seen cells (gap = span) must not flatten the rest of a gap map: the scale stops at
    the 98th percentile of the cells and the colour bar gets a 'more than' arrow."""
    ds = analytic_dataset(10.0, max_gap_scale_s=3600.0)
    gap = ds["max_gap"].values.copy()
    gap[0, :6] = 50 * float(np.nanmax(gap))  # a few outliers (under 2 % of the cells)
    ds["max_gap"] = (ds["max_gap"].dims, gap, ds["max_gap"].attrs)
    mesh = maps.plot_metric_map(ds, "max_gap")
    try:
        factor = style.display_unit("max_gap", "s", gap).factor
        top = np.percentile(gap[np.isfinite(gap)], 98.0) * factor
        assert mesh.norm.vmax == pytest.approx(top, rel=1e-12)
        assert mesh.colorbar.extend == "max"
    finally:
        plt.close(mesh.axes.figure)
    plain = maps.plot_metric_map(analytic_dataset(10.0, max_gap_scale_s=3600.0), "max_gap")
    try:
        assert plain.colorbar.extend == "neither"
    finally:
        plt.close(plain.axes.figure)


@pytest.mark.parametrize("value", [0.0, 1.0])
def test_uniform_fraction_uses_the_whole_percent_scale(value):
    """A fraction that is the same everywhere (e.g. 2-fold coverage with one satellite) is drawn
    on 0-100 %, not on a bar around the value that reaches negative percent."""
    ds = analytic_dataset(10.0)
    ds["coverage_fraction"] = (ds["coverage_fraction"].dims,
                               np.full(ds["coverage_fraction"].shape, value),
                               ds["coverage_fraction"].attrs)
    mesh = maps.plot_metric_map(ds, "coverage_fraction")
    try:
        assert (mesh.norm.vmin, mesh.norm.vmax) == (0.0, 100.0)
    finally:
        plt.close(mesh.axes.figure)


def test_uniform_duration_scale_stays_non_negative():
    ds = analytic_dataset(10.0)
    ds["max_gap"] = (ds["max_gap"].dims, np.zeros(ds["max_gap"].shape), ds["max_gap"].attrs)
    mesh = maps.plot_metric_map(ds, "max_gap")
    try:
        assert mesh.norm.vmin == 0.0 and mesh.norm.vmax > 0.0
    finally:
        plt.close(mesh.axes.figure)


def test_preparing_the_drawing_writes_nothing_and_leaves_no_figure(tmp_path):
    # run by each figure helper before its first job (the fixture checks no figure is open)
    assert maps.prepare_drawing("robinson", tmp_path) == []
    assert list(tmp_path.iterdir()) == []
    with pytest.raises(CovergridError, match="unknown"):
        maps.prepare_drawing("no_such_projection")
