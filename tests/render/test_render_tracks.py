"""Ground tracks: antimeridian splitting, plane numbering, propagated tracks, saved figures."""

from __future__ import annotations

import math

import numpy as np
import pytest
from PIL import Image

from covergrid.constants import WGS84_A_KM, WGS84_E2
from covergrid.errors import CovergridError
from covergrid.render import style, tracks

# Interpolated crossing latitudes are exact linear interpolation: only rounding remains.
ROUNDING_DEG = 1e-12


def test_split_eastward_and_westward_crossings():
    lon = np.array([170.0, 178.0, -174.0, -166.0, -174.0, 178.0, 170.0])
    lat = np.array([0.0, 1.0, 3.0, 5.0, 6.0, 8.0, 9.0])
    pieces = tracks.split_at_antimeridian(lat, lon)
    assert len(pieces) == 3
    (lat0, lon0), (lat1, lon1), (lat2, lon2) = pieces
    # East across 180 between (178, 1) and (-174 = 186, 3): a quarter of the way -> lat 1.5.
    assert lon0[-1] == 180.0 and lat0[-1] == pytest.approx(1.5, abs=ROUNDING_DEG)
    assert lon1[0] == -180.0 and lat1[0] == pytest.approx(1.5, abs=ROUNDING_DEG)
    # West back across it between (-174 = 186, 6) and (178, 8): three quarters -> lat 7.5.
    assert lon1[-1] == -180.0 and lat1[-1] == pytest.approx(7.5, abs=ROUNDING_DEG)
    assert lon2[0] == 180.0 and lat2[0] == pytest.approx(7.5, abs=ROUNDING_DEG)
    for _lat, plon in pieces:
        assert np.all(np.abs(np.diff(plon)) < 180.0)
        assert np.all((plon >= -180.0) & (plon <= 180.0))
    # Every sample kept once, plus two edge points per crossing.
    assert sum(p[0].size for p in pieces) == lat.size + 2 * 2


def test_split_without_crossing_and_bad_shapes():
    pieces = tracks.split_at_antimeridian([0.0, 1.0], [10.0, 20.0])
    assert len(pieces) == 1
    np.testing.assert_array_equal(pieces[0][1], [10.0, 20.0])
    assert tracks.split_at_antimeridian([], []) == []
    with pytest.raises(CovergridError, match="lon_deg"):
        tracks.split_at_antimeridian([0.0, 1.0], [0.0])


@pytest.fixture(scope="module")
def walker_tracks():
    from covergrid.orbits.walker import walker_delta

    elements = walker_delta(12, 3, 1, a_km=WGS84_A_KM + 550.0, i_rad=math.radians(53.0))
    t_s = np.arange(0.0, 3 * 3600.0, 30.0)
    lat, lon = tracks.ground_track(elements, np.datetime64("2031-03-20T00:00:00"), t_s)
    return elements, lat, lon


def test_ground_track_latitude_reaches_inclination(walker_tracks):
    elements, lat, lon = walker_tracks
    assert lat.shape == lon.shape == (12, 360)
    assert np.all((lon >= -180.0) & (lon < 180.0))
    # A circular orbit's geocentric latitude peaks at the inclination; the geodetic latitude of
    # the nadir point is larger, but not more than a surface point's (tan phi = tan psi/(1-e^2)).
    i_deg = 53.0
    upper_deg = math.degrees(math.atan(math.tan(math.radians(i_deg)) / (1.0 - WGS84_E2)))
    # 30 s samples miss the peak by at most i * (1 - cos(half a step of argument of latitude)):
    # 0.95 deg half-step -> 0.007 deg; 0.01 deg covers it.
    SAMPLING_DEG = 0.01
    peak = lat.max(axis=1)
    assert np.all(peak >= i_deg - SAMPLING_DEG) and np.all(peak <= upper_deg)
    assert np.all(-lat.min(axis=1) >= i_deg - SAMPLING_DEG)


def test_plane_numbers_of_walker_pattern(walker_tracks):
    elements = walker_tracks[0]
    np.testing.assert_array_equal(tracks.plane_numbers(elements), np.repeat([0, 1, 2], 4))


def test_save_ground_tracks(walker_tracks, tmp_path, offline_and_tidy):
    elements, lat, lon = walker_tracks
    written = tracks.save_ground_tracks(lat, lon, tmp_path, ids=elements.ids,
                                        planes=tracks.plane_numbers(elements), max_sats=6,
                                        caption="Walker delta 12/3/1 test design.")
    assert [p.name for p in written] == ["ground_tracks.png", "ground_tracks.pdf"]
    with Image.open(written[0]) as image:
        size = image.size
        pixels = np.asarray(image.convert("RGB"), dtype=float)
    # the width is the figure's; the height fits the map, caption and footer
    assert size[0] == round(tracks.TRACK_FIGSIZE_IN[0] * style.DPI)
    assert 0.6 * tracks.TRACK_FIGSIZE_IN[1] * style.DPI < size[1] <= (
        tracks.TRACK_FIGSIZE_IN[1] * style.DPI)
    assert pixels.std() > 20.0
    pdf = written[1].read_bytes()
    assert pdf.startswith(b"%PDF-") and b"/Subtype /Image" not in pdf
    assert list(offline_and_tidy.iterdir()) == []


def test_drawn_lines_never_jump_across_the_map(walker_tracks):
    import matplotlib.pyplot as plt

    elements, lat, lon = walker_tracks
    lines = tracks.plot_ground_tracks(lat, lon, planes=tracks.plane_numbers(elements),
                                      max_sats=6)
    fig = lines[0].axes.figure
    try:
        for line in lines:
            assert np.all(np.abs(np.diff(line.get_xdata())) < 180.0)
        # Round-robin selection keeps every plane: 6 of 12 satellites, 2 per plane.
        assert lines[0].axes.get_title() == "Ground tracks (6 of 12 satellites)"
        colours = {line.get_color() for line in lines}
        assert len(colours) == 3
        legend = [t.get_text() for t in lines[0].axes.get_legend().get_texts()]
        assert legend == ["plane 1", "plane 2", "plane 3"]
        assert style.FOOTER in [t.get_text() for t in fig.texts]
    finally:
        plt.close(fig)


def test_track_input_errors():
    lat = np.zeros((2, 5))
    with pytest.raises(CovergridError, match="ids: 1 ids for 2 satellites"):
        tracks.plot_ground_tracks(lat, lat, ids=["a"])
    with pytest.raises(CovergridError, match="lon_deg"):
        tracks.plot_ground_tracks(lat, np.zeros((2, 4)))
    with pytest.raises(CovergridError, match="planes"):
        tracks.plot_ground_tracks(lat, lat, planes=[0, 1, 2])
    with pytest.raises(CovergridError, match="max_sats"):
        tracks.plot_ground_tracks(lat, lat, max_sats=0)


def test_any_plane_numbers_get_one_colour_each():
    import matplotlib.pyplot as plt

    lat = np.zeros((3, 4))
    lon = np.array([[0.0, 10, 20, 30]] * 3)
    lines = tracks.plot_ground_tracks(lat, lon, planes=[7, 7, 3])
    try:
        assert lines[0].get_color() == lines[1].get_color() != lines[2].get_color()
        legend = [t.get_text() for t in lines[0].axes.get_legend().get_texts()]
        assert legend == ["plane 2", "plane 1"]  # numbered by sorted plane value
    finally:
        plt.close(lines[0].axes.figure)


def test_plane_numbers_by_sorting_equal_the_pairwise_definition():
    """Satellites share a plane when RAAN (modulo 2 pi) and inclination agree within the
    tolerance; planes are numbered in order of their first satellite. The sorting version
    (memory n, not n^2) gives the numbers of the pairwise comparison it replaced."""
    from covergrid.orbits.element_set import ElementSet
    from covergrid.render.tracks import plane_numbers

    rng = np.random.default_rng(7)
    n = 300
    raan = rng.choice([0.0, 1.0, 2.0, 2 * np.pi - 1e-9, 3.0], n)  # 2 pi - 1e-9 joins 0
    inc = rng.choice([0.9, 0.9 + 5e-7, 1.2], n)  # 0.9 + 5e-7 joins 0.9
    els = ElementSet(a_km=np.full(n, 7000.0), e=np.zeros(n), i_rad=inc, raan_rad=raan,
                     argp_rad=np.zeros(n), M_rad=rng.uniform(0, 6, n),
                     ids=tuple(f"s{k}" for k in range(n)))
    r = np.mod(raan, 2 * np.pi)
    draan = np.abs(np.angle(np.exp(1j * (r[:, None] - r[None, :]))))
    same = (draan < 1e-6) & (np.abs(inc[:, None] - inc[None, :]) < 1e-6)
    _, pairwise = np.unique(np.argmax(same, axis=1), return_inverse=True)
    np.testing.assert_array_equal(plane_numbers(els), pairwise.reshape(-1))
