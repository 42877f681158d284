"""Longitude limits, regions of interest and land/sea masks.

A cell's values depend only on the cell and the satellites, so a window or a region must give
the values of the same cells cut from a global run (the reference here; to rounding, as the
column longitudes are counted from the window's edge: ``CUT_RTOL``), NaN outside
the region, and statistics over the region's cells only. Land and sea are checked at places
whose side of the coast is a plain geographic fact (common practice), and the vectorised
point-in-polygon test against shapely's per-point ``Polygon.contains``.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
import shapely

from covergrid.compute.engine import compute_coverage
from covergrid.compute.grid import Grid, GridSpec
from covergrid.compute.region import Region
from covergrid.compute.sensor import Sensor
from covergrid.compute.summary import area_statistics, requirement_verdict, summarise
from covergrid.constants import WGS84_A_KM
from covergrid.errors import CovergridError
from covergrid.orbits.walker import walker_delta
from covergrid.study.geojson import read_areas
from covergrid.study.messages import Problems

EPOCH = "2031-03-20T00:00:00Z"
SENSOR = Sensor(min_elevation_deg=10.0)
#: Relative agreement with the global run: the window's column longitudes are
#: lon_min + (j + 1/2) res instead of -180 + (j' + 1/2) res, equal to an ulp or two in their
#: cosines, which moves crossing times by ~1e-12 s; counts are equal exactly.
CUT_RTOL = 1e-9
METRICS = ("coverage_fraction", "max_gap", "mean_gap", "gap_count", "mean_response_time",
           "pass_count", "mean_in_view", "max_in_view")


def _els():
    return walker_delta(8, 2, 1, a_km=WGS84_A_KM + 800.0, i_rad=math.radians(70.0))


def _run(grid, refine=True):
    return compute_coverage(_els(), EPOCH, 21600.0, 60.0, grid, SENSOR, scheduler="synchronous",
                            refine_transitions=refine)


@pytest.fixture(scope="module")
def global_runs():
    g = GridSpec(2.0, lat_min_deg=-60.0, lat_max_deg=60.0)
    return {r: _run(g, r) for r in (True, False)}


def _cut(ds, lon_lo, lon_hi, lat_lo=-60.0, lat_hi=60.0):
    """Cells of a global run with centres in [lon_lo, lon_hi) (wrapping) and the band."""
    lon = ds.lon.values
    keep = ((lon - lon_lo) % 360.0) < ((lon_hi - lon_lo) % 360.0 or 360.0)
    lat = (ds.lat.values > lat_lo) & (ds.lat.values < lat_hi)
    return ds.isel(lon=np.flatnonzero(keep), lat=np.flatnonzero(lat))


@pytest.mark.parametrize("refine", [True, False])
@pytest.mark.parametrize("window", [(0.0, 20.0), (170.0, -170.0), (-180.0, -100.0)],
                         ids=["east", "antimeridian", "west-edge"])
def test_window_equals_the_cut_of_a_global_run(global_runs, refine, window):
    lo, hi = window
    part = _run(GridSpec(2.0, lat_min_deg=-60.0, lat_max_deg=60.0, lon_min_deg=lo,
                         lon_max_deg=hi), refine)
    ref = _cut(global_runs[refine], lo, hi)
    # the antimeridian window runs past 180 deg east; the global cells are at -179 .. -171
    order = np.argsort((ref.lon.values - lo) % 360.0)
    ref = ref.isel(lon=order)
    np.testing.assert_allclose((part.lon.values - ref.lon.values + 180.0) % 360.0 - 180.0, 0.0,
                               atol=1e-9)
    for m in METRICS:
        np.testing.assert_allclose(part[m].values, ref[m].values, rtol=CUT_RTOL, atol=1e-9,
                                   err_msg=m)
    assert part.attrs["covergrid_lon_min_deg"] == lo


def test_longitudes_past_180_are_monotonic():
    g = Grid(GridSpec(2.0, lon_min_deg=170.0, lon_max_deg=-170.0))
    assert g.spec.n_lon == 10
    assert np.all(np.diff(g.lon_deg) > 0) and g.lon_deg[-1] == 189.0


def _box_region(lon0, lat0, lon1, lat1, surface="all"):
    return Region.from_geometry(shapely.box(lon0, lat0, lon1, lat1), surface, "box")


def test_region_cells_equal_global_and_nan_outside(global_runs):
    tri = shapely.Polygon([(-30.0, -20.0), (30.0, -20.0), (0.0, 40.0)])
    region = Region.from_geometry(tri, "all", "triangle")
    spec = GridSpec(2.0, lat_min_deg=-60.0, lat_max_deg=60.0, region=region)
    ds = _run(spec, True)
    lat, lon = np.meshgrid(ds.lat.values, ds.lon.values, indexing="ij")
    inside = np.array([[tri.contains(shapely.Point(x, y)) for x, y in zip(rx, ry, strict=True)]
                       for rx, ry in zip(lon, lat, strict=True)])
    np.testing.assert_array_equal(ds.in_region.values == 1, inside)
    # cropped to the triangle's cells: every edge row and column holds one
    assert inside[0].any() and inside[-1].any() and inside[:, 0].any() and inside[:, -1].any()
    assert ds.lat_bnds.values.min() == -20.0 and ds.lat_bnds.values.max() <= 40.0
    top = float(ds.lat_bnds.values.max())
    ref = _cut(global_runs[True], -30.0, 30.0, -20.0, top)
    for m in METRICS:
        got = ds[m].values.astype(float)
        assert np.all(np.isnan(got[~inside])), m
        np.testing.assert_allclose(got[inside], ref[m].values.astype(float)[inside],
                                   rtol=CUT_RTOL, atol=1e-9, err_msg=m)
    # statistics over the region's cells only: as if the outside cells did not exist
    summary = summarise(ds)
    stats = next(x["global"] for x in summary["metrics"] if x["metric"] == "max_gap")
    want = area_statistics(ref["max_gap"].values[inside], ref["cell_area"].values[inside])
    assert stats["area_m2"] == pytest.approx(want["area_m2"])
    assert stats["valid_area_fraction"] == 1.0
    assert stats["p90"] == pytest.approx(want["p90"], rel=CUT_RTOL)
    assert stats["mean"] == pytest.approx(want["mean"], rel=CUT_RTOL)
    # a verdict over the whole region: outside cells neither fail nor count
    v = requirement_verdict(ds, "max_gap", at_most=float(np.nanmax(ds.max_gap.values)))
    assert v["met"] and v["area_fraction_met"] == pytest.approx(1.0)


def test_cells_outside_the_region_are_never_touched():
    # the kernel run directly on a band whose every other cell is marked outside (queue
    # head -1, as the engine marks them): those cells' state stays exactly as allocated
    from covergrid.compute import kernel, kernel_state
    from covergrid.earth.time import gmst_rad, parse_epoch
    from covergrid.orbits import j2

    spec = GridSpec(2.0, lat_min_deg=-20.0, lat_max_deg=20.0, lon_min_deg=0.0,
                    lon_max_deg=40.0)
    grid = Grid(spec)
    els = _els()
    n_cells = spec.n_cells
    state = kernel_state.new_state(n_cells, 4, len(els), spec.n_lat)
    outside = np.arange(n_cells) % 2 == 1
    state["heads"][outside] = -1.0
    fresh = state["acc"].copy()
    t = np.arange(361) * 60.0
    theta0 = float(gmst_rad(parse_epoch(EPOCH), 0.0))
    pos, vel = j2.propagate_to_ecef_with_velocity(els, t, theta0)
    kernel.run_band(state, pos, 0, grid.row_geometry, 0.0, math.radians(2.0), 180,
                    *SENSOR.kernel_args(), True, vel, 60.0, n_win=spec.n_lon)
    np.testing.assert_array_equal(state["acc"][outside], fresh[outside])
    assert np.any(state["acc"][~outside] != fresh[~outside])
    assert np.all(state["heads"][outside] == -1.0)


def test_land_and_sea_at_known_places():
    land = Region(surface="land")
    sea = Region(surface="sea")
    # centres of large land masses and of open oceans (common practice)
    lon = np.array([2.35, -100.0, 25.0, 135.0, -40.0, -150.0, 80.0, -20.0])
    lat = np.array([48.85, 40.0, 0.0, -25.0, 30.0, 0.0, -30.0, -40.0])
    want_land = np.array([True, True, True, True, False, False, False, False])
    np.testing.assert_array_equal(land.contains(lon, lat), want_land)
    np.testing.assert_array_equal(sea.contains(lon, lat), ~want_land)


def test_sea_share_of_the_globe():
    # about 71 % of the Earth's surface is ocean (common practice; e.g. Eakins and Sharman,
    # NOAA ETOPO1 volumes, 2010: 70.8 %); area-weighted over 1 deg cell centres with the
    # 1:50m land (lakes count as land, inland seas as sea here) within a point
    g = Grid(GridSpec(1.0, region=Region(surface="sea")))
    w = g.cell_area_km2
    share = float(w[g.cell_mask].sum() / w.sum())
    assert 0.70 <= share <= 0.72


def test_contains_matches_shapely_per_point_and_wraps():
    # a polygon across the antimeridian written with longitudes past 180 (RFC 7946 allows a
    # split instead; both are accepted)
    poly = shapely.Polygon([(170.0, -10.0), (200.0, -10.0), (185.0, 20.0)])
    r = Region.from_geometry(poly)
    rng = np.random.default_rng(3)
    lon = rng.uniform(-180.0, 180.0, 4000)
    lat = rng.uniform(-15.0, 25.0, 4000)
    got = r.contains(lon, lat)
    want = np.array([poly.contains(shapely.Point(x, y)) or poly.contains(shapely.Point(x + 360, y))
                     for x, y in zip(lon, lat, strict=True)])
    np.testing.assert_array_equal(got, want)
    assert got.any() and (lon[got] < 0).any() and (lon[got] > 0).any()


def test_cropped_window_across_the_antimeridian():
    r = Region.from_geometry(shapely.box(175.0, 0.0, 185.0, 10.0))
    c = GridSpec(1.0, region=r).cropped()
    assert (c.lon_min_deg, c.lon_max_deg, c.lat_min_deg, c.lat_max_deg) == (
        175.0, -175.0, 0.0, 10.0)
    assert Grid(c).n_computed == 100


def test_region_without_cells_is_refused():
    with pytest.raises(CovergridError, match="holds no cell centre"):
        GridSpec(2.0, region=_box_region(0.1, 0.1, 0.5, 0.5)).cropped()


@pytest.mark.parametrize("obj, text", [
    ({"type": "Polygon", "coordinates": [[[0, 0], [1, 1], [1, 0], [0, 1], [0, 0]]]},
     "crosses itself"),
    ({"type": "Polygon", "coordinates": [[[0, 0], [1, 0], [1, 1], [0, 0.5]]]}, "not closed"),
    ({"type": "Polygon", "coordinates": [[[0, 0], [1, 0], [0, 0]]]}, "at least four"),
    ({"type": "Polygon", "coordinates": []}, "empty"),
    ({"type": "FeatureCollection", "features": []}, "holds no polygon"),
    ({"type": "Polygon", "coordinates": [[[0, 0], [1, 0], [2, 0], [0, 0]]]}, "not a valid polygon"),
    ({"type": "Polygon", "coordinates": [[[0, 0], [0, 95], [1, 1], [0, 0]]]}, "latitude 95"),
    ({"type": "LineString", "coordinates": [[0, 0], [1, 1]]}, "is not an area"),
    ({"type": "MultiPolygon", "coordinates": [
        [[[0, 0], [2, 0], [2, 2], [0, 2], [0, 0]]],
        [[[1, 1], [3, 1], [3, 3], [1, 3], [1, 1]]]]}, None),  # overlapping parts are unioned
])
def test_geojson_checks(obj, text):
    if text is None:
        union, n = read_areas([obj], None)
        assert n == 2 and union.area == pytest.approx(7.0)
        return
    with pytest.raises(Problems, match=text):
        read_areas([obj], None)


def test_geojson_file_relative_to_the_study(tmp_path):
    (tmp_path / "a.geojson").write_text(
        '{"type": "Feature", "properties": {}, "geometry": {"type": "Polygon", '
        '"coordinates": [[[0, 0], [4, 0], [4, 4], [0, 4], [0, 0]]]}}')
    union, n = read_areas(["a.geojson"], tmp_path)
    assert n == 1 and union.area == 16.0


def test_an_area_split_at_the_antimeridian_is_joined():
    # RFC 7946 sec. 3.1.9: an area crossing the antimeridian is split into two polygons
    obj = {"type": "MultiPolygon", "coordinates": [
        [[[175, 0], [180, 0], [180, 10], [175, 10], [175, 0]]],
        [[[-180, 0], [-175, 0], [-175, 10], [-180, 10], [-180, 0]]]]}
    union, n = read_areas([obj], None)
    c = GridSpec(1.0, region=Region.from_geometry(union)).cropped()
    assert n == 2
    assert (c.lon_min_deg, c.lon_max_deg, c.lat_min_deg, c.lat_max_deg) == (
        175.0, -175.0, 0.0, 10.0)
    assert Grid(c).n_computed == 100
