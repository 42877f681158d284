"""The footprint-indexed streaming kernel against the brute-force reference (tests/conftest.py).

Sampled (``refine_transitions=False``), the two must agree exactly: both count the same
samples, the kernel only avoids looking at cells that cannot be in view and at cells whose
state does not change. In continuous time the gap statistics are compared with fine
sampling here and in tests/test_kernel_passes.py.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from conftest import cell_centres, metrics_from_visibility, visibility
from covergrid.compute.engine import compute_coverage
from covergrid.compute.grid import GridSpec
from covergrid.compute.metrics import COVERAGE_METRICS as METRICS
from covergrid.compute.sensor import Sensor
from covergrid.compute.span import count_steps
from covergrid.earth.time import parse_epoch
from covergrid.orbits.element_set import ElementSet
from covergrid.orbits.walker import from_keplerian, walker_delta, walker_star

RE = 6378.137
EPOCH = parse_epoch("2027-03-14T06:00:00Z")

# exact for sampled metrics: the only arithmetic difference is the order of float sums
EXACT = 1e-12


def _case_elements(name):
    if name == "delta_6_3_1":
        return walker_delta(6, 3, 1, a_km=RE + 1200.0, i_rad=math.radians(55.0))
    if name == "star_polar":
        return walker_star(8, 4, 1, a_km=RE + 800.0, i_rad=math.radians(88.0))
    if name == "eccentric":
        return from_keplerian(
            [RE + 20000.0, RE + 9000.0], [0.6, 0.3], np.radians([63.4, 40.0]),
            np.radians([0.0, 120.0]), np.radians([270.0, 30.0]),
            mean_anomaly_rad=np.radians([0.0, 200.0]), ids=["HEO-A", "HEO-B"])
    if name == "high_polar":
        return walker_delta(3, 3, 0, a_km=RE + 8000.0, i_rad=math.radians(90.0))
    raise KeyError(name)


CASES = [
    # name, grid, sensor, span (s), step (s)
    ("delta_6_3_1", GridSpec(10.0), Sensor(10.0), 6 * 3600.0, 120.0),
    ("star_polar", GridSpec(6.0), Sensor(5.0, max_off_nadir_deg=55.0), 4 * 3600.0, 60.0),
    ("star_polar", GridSpec(5.0, -30.0, 60.0), Sensor(0.0, max_range_km=2500.0), 3 * 3600.0,
     90.0),
    ("eccentric", GridSpec(9.0), Sensor(20.0), 12 * 3600.0, 300.0),
    ("high_polar", GridSpec(4.0), Sensor(0.0), 4 * 3600.0, 120.0),
    ("delta_6_3_1", GridSpec(3.0, 30.0, 90.0), Sensor(15.0, 40.0, 3000.0), 2 * 3600.0, 60.0),
]


@pytest.mark.parametrize("case", CASES, ids=[f"{c[0]}-{c[1].resolution_deg}" for c in CASES])
def test_kernel_equals_brute_force(case):
    name, grid, sensor, span, step = case
    el = _case_elements(name)
    ds = compute_coverage(el, EPOCH, span, step, grid, sensor, nfold_max=3, chunk_rows=4,
                          scheduler="synchronous", refine_transitions=False)
    lat, lon = cell_centres(grid.resolution_deg, grid.lat_min_deg, grid.lat_max_deg)
    vis = visibility(el, EPOCH, count_steps(span, step), step, lat, lon,
                     sensor.min_elevation_deg, sensor.max_off_nadir_deg, sensor.max_range_km)
    assert vis.any() and not vis.all(), "a case must have both seen and unseen samples"
    ref = metrics_from_visibility(vis, step, nfold_max=3)
    for m in METRICS:
        got = ds[m].values.reshape(ref[m].shape)
        np.testing.assert_allclose(got, ref[m], rtol=EXACT, atol=EXACT, err_msg=m)
    assert int(ds["visits"]) == int(vis.sum())


def test_handover_at_one_sample_opens_no_gap():
    """Two satellites on one orbit, one step apart in time: as one leaves a cell the other
    arrives within the same sample, so coverage of the shared track must show no extra gap."""
    step = 60.0
    a = RE + 700.0
    n = math.sqrt(398600.4418 / a**3)
    dm = n * step  # one step of mean anomaly
    el = ElementSet(
        a_km=np.full(2, a), e=np.zeros(2), i_rad=np.full(2, math.radians(45.0)),
        raan_rad=np.zeros(2), argp_rad=np.zeros(2), M_rad=np.array([0.0, dm]), ids=("A", "B"))
    grid = GridSpec(5.0)
    sensor = Sensor(10.0)
    ds = compute_coverage(el, EPOCH, 3 * 3600.0, step, grid, sensor, scheduler="synchronous",
                          refine_transitions=False)
    lat, lon = cell_centres(5.0)
    vis = visibility(el, EPOCH, 180, step, lat, lon, 10.0)
    ref = metrics_from_visibility(vis, step)
    for m in ("gap_count", "max_gap", "pass_count", "max_in_view"):
        np.testing.assert_array_equal(ds[m].values.ravel(), ref[m], err_msg=m)


def test_never_seen_and_always_seen_cells():
    """Edge conventions (covergrid.compute.metrics): a never-seen cell has one gap equal to the
    span; a geostationary satellite's sub-point is always seen, with no gap and one pass."""
    geo = from_keplerian([42164.17], [0.0], [0.0], [0.0], [0.0], mean_anomaly_rad=[0.0],
                         ids=["GEO"])
    span = 6 * 3600.0
    ds = compute_coverage(geo, EPOCH, span, 600.0, GridSpec(10.0), Sensor(5.0),
                          scheduler="synchronous")
    seen = ds.coverage_fraction.values == 1.0
    unseen = ds.coverage_fraction.values == 0.0
    assert seen.any() and unseen.any()
    assert np.all(seen | unseen), "a fixed geometry is either always or never in view"
    assert np.all(ds.max_gap.values[unseen] == span)
    assert np.all(ds.gap_count.values[unseen] == 1)
    np.testing.assert_allclose(ds.mean_response_time.values[unseen], span / 2)
    assert np.all(ds.max_gap.values[seen] == 0.0)
    assert np.all(ds.pass_count.values[seen] == 1)
    assert np.all(ds.mean_pass_duration.values[seen] == span)


REFINE_CASES = [
    ("delta_6_3_1", Sensor(10.0)),
    ("star_polar", Sensor(0.0, max_range_km=2500.0)),
    ("star_polar", Sensor(5.0, max_off_nadir_deg=55.0)),
]


@pytest.mark.parametrize("name, sensor", REFINE_CASES, ids=["elevation", "range", "off-nadir"])
def test_refined_gap_boundaries_match_fine_sampling(name, sensor):
    """Gap statistics at a 30 s step in continuous time agree with a 2 s sampled reference
    (itself good to one 2 s step) to a few seconds, where the plain 30 s samples are off by
    up to a whole step. Compared on the cells whose gaps are the same gaps at both steps
    (equal gap counts; the sub-step passes are the business of tests/test_kernel_passes.py).

    Tolerances: max_gap 3 s = the reference's 2 s step plus 1 s of margin for the
    interpolation of the crossing times over 30 s; the mean response time and the mean gap
    average several boundaries and must agree to 2.5 s.
    """
    el = _case_elements(name)
    span, grid = 6 * 3600.0, GridSpec(10.0)
    ref = compute_coverage(el, EPOCH, span, 2.0, grid, sensor, refine_transitions=False)
    fine = compute_coverage(el, EPOCH, span, 30.0, grid, sensor)
    coarse = compute_coverage(el, EPOCH, span, 30.0, grid, sensor, refine_transitions=False)
    same = (fine.gap_count == ref.gap_count).values
    assert same.mean() > 0.9
    tolerances = {"max_gap": 3.0, "mean_gap": 2.5, "mean_response_time": 2.5}
    for m, tol in tolerances.items():
        refined_err = np.abs(fine[m] - ref[m]).values[same].max()
        sampled_err = np.abs(coarse[m] - ref[m]).values[same].max()
        assert refined_err <= tol, (m, refined_err)
        assert sampled_err > 2 * tol, "the case must show the sampling error it removes"
    # every metric is an integral over the same crossing times: the coverage fraction is
    # the span less the gaps, exactly (to rounding), and k = 1 of the n-fold fraction
    total_gaps = (fine.mean_gap * fine.gap_count).values
    np.testing.assert_allclose((1.0 - fine.coverage_fraction.values) * span, total_gaps,
                               rtol=0, atol=1e-6)
    np.testing.assert_array_equal(fine.nfold_fraction.sel(k=1).values,
                                  fine.coverage_fraction.values)
    # and the time in view is a refined integral too: pass durations agree with the 2 s
    # sampling like the gaps (3 s: its step plus 1 s), where whole 30 s steps do not
    assert np.all(fine.mean_in_view.values >= fine.coverage_fraction.values - 1e-12)
    passes = (fine.pass_count == ref.pass_count).values & same
    refined_err = np.abs(fine.mean_pass_duration - ref.mean_pass_duration).values[passes]
    sampled_err = np.abs(coarse.mean_pass_duration - ref.mean_pass_duration).values[passes]
    assert refined_err.max() <= 3.0 < sampled_err.max()
