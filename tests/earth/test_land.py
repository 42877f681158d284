"""Bundled Natural Earth land: TopoJSON decoding, closure, antimeridian handling, known
geography."""

from __future__ import annotations

import json
from importlib import resources

import numpy as np
import pytest
import shapely

from covergrid.earth import land
from covergrid.errors import CovergridError

RESOLUTIONS = sorted(land.RESOLUTIONS)


def test_decode_arcs_hand_example():
    # A hand-worked example (invented input, arithmetic by hand): quantized positions with
    # scale (0.5, 0.25) and translate (10, -5); deltas accumulate before the transform.
    topology = {"transform": {"scale": [0.5, 0.25], "translate": [10.0, -5.0]},
                "arcs": [[[4, 8], [2, 0], [0, -4]], [[6, 4], [-6, 4]]]}
    arcs = land.decode_arcs(topology)
    np.testing.assert_array_equal(arcs[0], [[12.0, -3.0], [13.0, -3.0], [13.0, -4.0]])
    np.testing.assert_array_equal(arcs[1], [[13.0, -4.0], [10.0, -3.0]])
    # Ring [0, 1]: arcs 0 then 1 share (13, -4), kept once; ~i is arc i reversed.
    ring = land.join_ring(arcs, [0, 1])
    np.testing.assert_array_equal(ring, [[12, -3], [13, -3], [13, -4], [10, -3]])
    back = land.join_ring(arcs, [~1, ~0])
    np.testing.assert_array_equal(back, ring[::-1])


@pytest.mark.parametrize("resolution", RESOLUTIONS)
def test_every_polygon_decoded_and_rings_closed(resolution):
    raw = json.loads(resources.files("covergrid.earth").joinpath(
        "data", land.RESOLUTIONS[resolution]).read_text("utf-8"))
    n_polygons = sum(len(g["arcs"]) if g["type"] == "MultiPolygon" else 1
                     for g in raw["objects"]["land"]["geometries"])
    polygons = land.land_polygons(resolution)
    assert len(polygons) == n_polygons
    for rings in polygons:
        for ring in rings:
            # TopoJSON rings must close; a wrong arc join or reversal breaks this.
            np.testing.assert_array_equal(ring[0], ring[-1])
            assert ring.shape[0] >= 4
            assert np.all(np.abs(ring[:, 0]) <= 180.0) and np.all(np.abs(ring[:, 1]) <= 90.0)


# Australia's mainland extreme points (Geoscience Australia, "Australia's extreme points";
# from memory): Cape York 10.6872 S, South Point (Wilsons Promontory) 39.1365 S,
# Steep Point 113.1553 E, Cape Byron 153.6386 E.
AUSTRALIA_EXTREMES = {"north": -10.6872, "south": -39.1365, "west": 113.1553, "east": 153.6386}
# Generalisation moves headlands: at 1:110 million 1 mm on the map is 110 km (about 1 deg) and
# the simplified outline cuts capes by a fraction of that, so allow a quarter of it, 0.25 deg
# (~28 km). At 1:50 million 1 mm is 50 km (0.45 deg); allow about a tenth, 0.05 deg (~6 km).
HEADLAND_TOLERANCE_DEG = {"110m": 0.25, "50m": 0.05}


@pytest.mark.parametrize("resolution", RESOLUTIONS)
def test_australia_bounding_box(resolution):
    exteriors = [rings[0] for rings in land.land_polygons(resolution)]
    inside = [r for r in exteriors if 110 < r[:, 0].mean() < 155 and -45 < r[:, 1].mean() < -10]
    mainland = max(inside, key=lambda r: shapely.Polygon(r).area)
    tol = HEADLAND_TOLERANCE_DEG[resolution]
    assert mainland[:, 1].max() == pytest.approx(AUSTRALIA_EXTREMES["north"], abs=tol)
    assert mainland[:, 1].min() == pytest.approx(AUSTRALIA_EXTREMES["south"], abs=tol)
    assert mainland[:, 0].min() == pytest.approx(AUSTRALIA_EXTREMES["west"], abs=tol)
    assert mainland[:, 0].max() == pytest.approx(AUSTRALIA_EXTREMES["east"], abs=tol)


# Points well inside land or sea (common geography, a degree or more from any coast). The sea
# points lie where a ring stepping across 180 deg would smear a false band of land.
LAND = {"Paris": (2.35, 48.86), "central Australia": (135.0, -25.0),
        "Chukotka west of 180": (175.0, 66.0), "Chukotka east of 180": (-176.0, 67.0),
        "Viti Levu (Fiji)": (178.0, -17.8), "South Pole": (0.0, -89.5)}
SEA = {"Gulf of Guinea": (0.0, 0.0), "Norwegian Sea": (0.0, 66.5),
       "Denmark Strait": (-30.0, 67.0), "South Atlantic": (-30.0, -16.0),
       "North Pole": (0.0, 89.0)}


@pytest.mark.parametrize("resolution", RESOLUTIONS)
def test_land_fill_is_split_at_antimeridian_and_closed_at_south_pole(resolution):
    shape = land.land_geometry(resolution)
    minx, miny, maxx, maxy = shape.bounds
    assert minx >= -180.0 and maxx <= 180.0 and miny >= -90.0 and maxy <= 90.0
    assert all(part.is_valid for part in shape.geoms)
    for name, point in LAND.items():
        assert shape.contains(shapely.Point(point)), name
    for name, point in SEA.items():
        assert not shape.contains(shapely.Point(point)), name


def test_bundled_data_is_small():
    data = resources.files("covergrid.earth").joinpath("data")
    total = sum(len(data.joinpath(name).read_bytes()) for name in land.RESOLUTIONS.values())
    assert total < 1_000_000  # the package stays small: under 1 MB of map data
    assert data.joinpath("ATTRIBUTION.md").read_text("utf-8").count("Natural Earth") >= 2


def test_unknown_resolution():
    with pytest.raises(CovergridError, match=r"resolution: '10m' is not bundled.*110m.*50m"):
        land.land_polygons("10m")
