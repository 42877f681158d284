"""The study kinds combined: a daylight constraint and dilution of precision on a grid with
longitude limits and a region give, cell for cell, the values of the same cells cut from a
global run (the global runs are themselves checked against brute forces in test_daylight.py
and test_dop.py). This holds the kernel's window and region iteration (issue 13) and the
daylight gate and DOP path (issue 12) together."""

from __future__ import annotations

import math

import numpy as np
import pytest
import shapely

from covergrid.compute.dop_spec import DopSpec
from covergrid.compute.engine import compute_coverage
from covergrid.compute.grid import GridSpec
from covergrid.compute.metrics import DOP_METRICS
from covergrid.compute.region import Region
from covergrid.compute.sensor import Sensor
from covergrid.constants import WGS84_A_KM
from covergrid.orbits.walker import walker_delta

EPOCH = "2031-06-21T00:00:00Z"
#: As in test_regions.py: the window's column longitudes differ from the global ones by an
#: ulp or two, which moves crossing times by ~1e-12 s; counts are equal exactly.
RTOL = 1e-9
METRICS = ("coverage_fraction", "max_gap", "mean_gap", "gap_count", "mean_response_time",
           "pass_count", "mean_in_view")


def _cut(ds, lon_lo, lon_hi):
    lon = ds.lon.values
    keep = ((lon - lon_lo) % 360.0) < ((lon_hi - lon_lo) % 360.0 or 360.0)
    part = ds.isel(lon=np.flatnonzero(keep))
    return part.isel(lon=np.argsort((part.lon.values - lon_lo) % 360.0))


@pytest.mark.parametrize("refine", [True, False], ids=["continuous", "sampled"])
def test_daylight_on_a_window_and_a_region_equals_the_global_cut(refine):
    els = walker_delta(8, 2, 1, a_km=WGS84_A_KM + 700.0, i_rad=math.radians(98.0))
    sensor = Sensor(10.0, min_sun_elevation_deg=5.0)

    def run(grid):
        return compute_coverage(els, EPOCH, 21600.0, 60.0, grid, sensor, scheduler="synchronous",
                                refine_transitions=refine)

    whole = run(GridSpec(2.0, lat_min_deg=-60.0, lat_max_deg=60.0))
    assert 0.0 < float(whole.coverage_fraction.mean()) < 1.0
    window = run(GridSpec(2.0, lat_min_deg=-60.0, lat_max_deg=60.0, lon_min_deg=150.0,
                          lon_max_deg=-150.0))
    ref = _cut(whole, 150.0, -150.0)
    for m in METRICS:
        np.testing.assert_allclose(window[m].values, ref[m].values, rtol=RTOL, atol=1e-9,
                                   err_msg=m)
    tri = shapely.Polygon([(-40.0, -30.0), (40.0, -30.0), (0.0, 50.0)])
    reg = run(GridSpec(2.0, lat_min_deg=-60.0, lat_max_deg=60.0,
                       region=Region.from_geometry(tri, "all", "triangle")))
    inside = reg.in_region.values == 1
    ref = whole.sel(lat=reg.lat, lon=reg.lon)
    for m in METRICS:
        got = reg[m].values.astype(float)
        assert np.all(np.isnan(got[~inside])), m
        np.testing.assert_allclose(got[inside], ref[m].values.astype(float)[inside], rtol=RTOL,
                                   atol=1e-9, err_msg=m)


def test_dop_on_a_window_and_a_region_equals_the_global_cut():
    els = walker_delta(24, 6, 1, a_km=WGS84_A_KM + 20200.0, i_rad=math.radians(55.0))
    dop = DopSpec(pdop_threshold=6.0)

    def run(grid):
        return compute_coverage(els, EPOCH, 7200.0, 300.0, grid, Sensor(5.0), dop=dop,
                                scheduler="synchronous")

    whole = run(GridSpec(5.0))
    window = run(GridSpec(5.0, lon_min_deg=160.0, lon_max_deg=-120.0))
    ref = _cut(whole, 160.0, -120.0)
    for m in DOP_METRICS:
        np.testing.assert_allclose(window[m].values, ref[m].values, rtol=RTOL, err_msg=m)
    reg = run(GridSpec(5.0, region=Region.from_geometry(shapely.box(-30, -20, 30, 40), "all",
                                                        "box")))
    inside = reg.in_region.values == 1
    ref = whole.sel(lat=reg.lat, lon=reg.lon)
    for m in DOP_METRICS:
        got = reg[m].values
        assert np.all(np.isnan(got[~inside])), m
        np.testing.assert_allclose(got[inside], ref[m].values[inside], rtol=RTOL, err_msg=m)
