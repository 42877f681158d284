"""The daylight constraint: a cell counts as seen only while the Sun is at or above the
threshold there. Sampled, the kernel must equal a brute force that masks every satellite's
visibility by the solar elevation of :func:`covergrid.earth.sun.solar_elevation_rad` (itself
checked against astropy in tests/earth/test_sun.py); in continuous time, sunrise and sunset
cut passes at their times (checked against a fine sampling)."""

from __future__ import annotations

import math

import numpy as np
import pytest

from conftest import cell_centres, metrics_from_visibility, visibility
from covergrid.compute.engine import compute_coverage
from covergrid.compute.grid import GridSpec
from covergrid.compute.metrics import COVERAGE_METRICS
from covergrid.compute.sensor import Sensor
from covergrid.compute.span import count_steps
from covergrid.constants import WGS84_A_KM
from covergrid.earth.sun import solar_elevation_rad
from covergrid.earth.time import parse_epoch
from covergrid.errors import CovergridError
from covergrid.orbits.walker import walker_delta, walker_star

EXACT = 1e-9


def _day_mask(epoch, n_steps, step_s, lat, lon, h0_deg):
    """(n_steps, n_cells): the Sun at or above h0 at each sample and cell."""
    t = np.arange(n_steps) * step_s
    h = solar_elevation_rad(lat.ravel()[:, None], lon.ravel()[:, None], parse_epoch(epoch),
                            t[None, :])
    return (h >= math.radians(h0_deg)).T


CASES = [
    # an invented imaging ring near the solstice (polar day and night both on the grid)
    ("2031-06-21T00:00:00Z", walker_star(6, 3, 1, a_km=WGS84_A_KM + 700.0,
                                         i_rad=math.radians(98.0)),
     GridSpec(10.0), Sensor(0.0, max_off_nadir_deg=45.0, min_sun_elevation_deg=10.0),
     12 * 3600.0, 120.0),
    ("2031-03-20T06:00:00Z", walker_delta(6, 3, 1, a_km=WGS84_A_KM + 1200.0,
                                          i_rad=math.radians(55.0)),
     GridSpec(6.0), Sensor(10.0, min_sun_elevation_deg=-6.0), 8 * 3600.0, 60.0),
]


@pytest.mark.parametrize("case", CASES, ids=["solstice-sso", "equinox-twilight"])
def test_sampled_daylight_equals_brute_force(case):
    epoch, el, grid, sensor, span, step = case
    ds = compute_coverage(el, epoch, span, step, grid, sensor, nfold_max=3, chunk_rows=3,
                          scheduler="synchronous", refine_transitions=False)
    lat, lon = cell_centres(grid.resolution_deg, grid.lat_min_deg, grid.lat_max_deg)
    n_steps = count_steps(span, step)
    vis = visibility(el, parse_epoch(epoch), n_steps, step, lat, lon, sensor.min_elevation_deg,
                     sensor.max_off_nadir_deg, sensor.max_range_km)
    day = _day_mask(epoch, n_steps, step, lat, lon, sensor.min_sun_elevation_deg)
    assert day.any() and not day.all()
    eff = vis & day[:, None, :]
    assert eff.any() and (vis & ~day[:, None, :]).any(), "night passes must be present"
    ref = metrics_from_visibility(eff, step, nfold_max=3)
    for m in COVERAGE_METRICS:
        got = ds[m].values.reshape(ref[m].shape)
        np.testing.assert_allclose(got, ref[m], rtol=EXACT, atol=EXACT, err_msg=m)


def test_refined_daylight_matches_fine_sampling():
    # continuous time at a 60 s step against the sampled kernel at 2 s: each cell's time in
    # view and its gaps agree to the finer step (sunrise and sunset are timed, not sampled)
    epoch, el, grid, sensor, span, _ = CASES[0]
    coarse = compute_coverage(el, epoch, span, 60.0, grid, sensor, scheduler="synchronous")
    fine = compute_coverage(el, epoch, span, 2.0, grid, sensor, scheduler="synchronous",
                            refine_transitions=False)
    # coverage fraction: the time in daylight view over the span; 2 s sampling errs by at
    # most one 2 s sample per rise or set (a few per cell), the refined one by far less
    frac_tol = 4.0 * 2.0 * fine.pass_count.values.max() / span
    np.testing.assert_allclose(coarse.coverage_fraction, fine.coverage_fraction,
                               atol=frac_tol)
    np.testing.assert_allclose(coarse.max_gap, fine.max_gap, atol=4.0)
    # without daylight the same study sees more (night passes)
    night = compute_coverage(el, epoch, span, 60.0, grid, Sensor(0.0, max_off_nadir_deg=45.0),
                             scheduler="synchronous")
    assert float(night.coverage_fraction.sum()) > float(coarse.coverage_fraction.sum())


def test_sun_threshold_is_checked():
    with pytest.raises(CovergridError, match=r"sensor\.min_sun_elevation_deg.*\(-90, 90\)"):
        Sensor(10.0, min_sun_elevation_deg=90.0)


@pytest.mark.slow
def test_daylight_and_dop_on_worker_processes():
    # the distributed path (tasks pickled to other processes) gives the same values
    from covergrid.compute.dop_spec import DopSpec

    epoch, el, grid, sensor, span, step = CASES[1]
    one = compute_coverage(el, epoch, span, step, grid, sensor, scheduler="synchronous")
    many = compute_coverage(el, epoch, span, step, grid, sensor, scheduler="processes",
                            chunk_rows=5)
    for m in COVERAGE_METRICS:
        np.testing.assert_array_equal(one[m].values, many[m].values, err_msg=m)
    nav = walker_delta(24, 6, 1, a_km=WGS84_A_KM + 20200.0, i_rad=math.radians(55.0))
    a = compute_coverage(nav, epoch, 3 * 3600.0, 600.0, GridSpec(15.0), Sensor(10.0),
                         scheduler="synchronous", dop=DopSpec(4.0))
    b = compute_coverage(nav, epoch, 3 * 3600.0, 600.0, GridSpec(15.0), Sensor(10.0),
                         scheduler="processes", chunk_rows=3, dop=DopSpec(4.0))
    for m in ("p95_pdop", "max_gdop", "mean_hdop", "pdop_fraction", "no_fix_fraction"):
        np.testing.assert_array_equal(a[m].values, b[m].values, err_msg=m)
