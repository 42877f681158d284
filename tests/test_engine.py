"""The engine's Dataset, its schedulers and chunking, and coverage checks against published
geometry (Wertz and Larson footprint formula; Ballard 1980 optimum patterns)."""

from __future__ import annotations

import math

import numpy as np
import pytest
import xarray as xr

from covergrid.compute.engine import compute_coverage
from covergrid.compute.grid import GridSpec, row_bands
from covergrid.compute.metrics import COVERAGE_METRICS, INTEGER_METRICS, METRICS
from covergrid.compute.sensor import Sensor
from covergrid.compute.span import count_steps
from covergrid.errors import CovergridError
from covergrid.orbits.special import period_s
from covergrid.orbits.walker import from_keplerian, walker_delta

EPOCH = "2027-03-14T06:00:00Z"
RE = 6378.137


def _small():
    el = walker_delta(12, 3, 1, a_km=RE + 1000.0, i_rad=math.radians(63.0))
    return el, GridSpec(6.0), Sensor(10.0, max_off_nadir_deg=50.0)


def test_dataset_layout_and_cf_attributes():
    el, grid, sensor = _small()
    ds = compute_coverage(el, EPOCH, 3 * 3600.0, 120.0, grid, sensor, nfold_max=3,
                          attrs={"covergrid_study": "name: x"})
    assert dict(ds.sizes) == {"lat": 30, "lon": 60, "nv": 2, "k": 3}
    for m in COVERAGE_METRICS:  # the DOP metrics need dop= (tests/test_dop.py)
        info = METRICS[m]
        assert ds[m].attrs["units"] == info.units
        assert ds[m].attrs["long_name"] == info.long_name
        assert info.source in ds[m].attrs["comment"]
    assert ds.nfold_fraction.dims == ("k", "lat", "lon")
    assert ds.lat.attrs["bounds"] == "lat_bnds" and ds.lon.attrs["bounds"] == "lon_bnds"
    assert ds.cell_area.attrs["standard_name"] == "cell_area"
    assert ds.attrs["Conventions"] == "CF-1.8"
    assert ds.attrs["covergrid_study"] == "name: x"
    assert ds.attrs["covergrid_n_steps"] == 90
    # k = 1 of the n-fold fraction is the coverage fraction, and one satellite in view on
    # average at least covers the time with one in view (both sampled)
    xr.testing.assert_allclose(ds.nfold_fraction.sel(k=1, drop=True),
                               ds.coverage_fraction, rtol=0, atol=0)
    assert np.all(ds.mean_in_view.values >= ds.coverage_fraction.values)
    assert ds.attrs["covergrid_refine_transitions"] == 1
    # fractions stay in [0, 1] and the n-fold fractions fall with k
    assert float(ds.coverage_fraction.min()) >= 0 and float(ds.coverage_fraction.max()) <= 1
    assert np.all(np.diff(ds.nfold_fraction.values, axis=0) <= 0)


def test_lazy_result_is_dask_chunked_by_latitude_band():
    el, grid, sensor = _small()
    lazy = compute_coverage(el, EPOCH, 3600.0, 120.0, grid, sensor, chunk_rows=7, compute=False)
    assert lazy.coverage_fraction.chunks[0] == (7, 7, 7, 7, 2)
    eager = compute_coverage(el, EPOCH, 3600.0, 120.0, grid, sensor, chunk_rows=7)
    xr.testing.assert_identical(lazy.compute(), eager)


def test_chunk_sizes_give_identical_values():
    el, grid, sensor = _small()
    ref = compute_coverage(el, EPOCH, 3 * 3600.0, 120.0, grid, sensor, scheduler="threads")
    for chunk in (1, 4, 29, None):
        got = compute_coverage(el, EPOCH, 3 * 3600.0, 120.0, grid, sensor, chunk_rows=chunk,
                               scheduler="synchronous")
        xr.testing.assert_identical(got, ref)


@pytest.mark.slow
def test_process_scheduler_gives_identical_values():
    el, grid, sensor = _small()
    ref = compute_coverage(el, EPOCH, 3 * 3600.0, 120.0, grid, sensor, scheduler="threads")
    got = compute_coverage(el, EPOCH, 3 * 3600.0, 120.0, grid, sensor, chunk_rows=8,
                           scheduler="processes")
    xr.testing.assert_identical(got, ref)


@pytest.mark.slow
def test_distributed_client_gives_identical_values():
    distributed = pytest.importorskip("distributed")
    el, grid, sensor = _small()
    ref = compute_coverage(el, EPOCH, 3 * 3600.0, 120.0, grid, sensor)
    with distributed.LocalCluster(n_workers=2, threads_per_worker=1, host="127.0.0.1",
                                  dashboard_address=None, processes=True) as cluster, \
            distributed.Client(cluster) as client:
        got = compute_coverage(el, EPOCH, 3 * 3600.0, 120.0, grid, sensor, scheduler=client)
    xr.testing.assert_identical(got, ref)


def test_geostationary_footprint_matches_handbook_central_angle():
    """A geostationary satellite covers, all the time, the cap of Earth central angle
    lambda = 90 deg - eta - eps with sin(eta) = cos(eps) R / r (Wertz and Larson, Space
    Mission Analysis and Design, 3rd ed., sec. 5.2, eqs. 5-16..5-18), and nothing outside.

    Tolerance 0.35 deg: the handbook formula is for a sphere; on the ellipsoid the local
    radius (6357..6378 km) moves lambda by under 0.05 deg at this height and the tilt of the
    ellipsoid normal against the geocentric radius (at most 0.19 deg) moves it by under
    0.2 deg; a GEO satellite's J2 drift over the span is under 0.01 deg.
    """
    a = 42164.17  # geostationary radius, common practice
    eps = 10.0
    geo = from_keplerian([a], [0.0], [0.0], [0.0], [0.0], mean_anomaly_rad=[0.0], ids=["GEO"])
    ds = compute_coverage(geo, EPOCH, 2 * 3600.0, 600.0, GridSpec(1.0), Sensor(eps),
                          scheduler="synchronous")
    # where is the sub-satellite point? the cell seen from the highest elevation
    cov = ds.coverage_fraction.values
    assert set(np.unique(cov)) == {0.0, 1.0}
    lat, lon = np.meshgrid(np.radians(ds.lat.values), np.radians(ds.lon.values), indexing="ij")
    # the sub-satellite longitude (set by the sidereal angle at the epoch) is the centre of
    # the covered cap, which is symmetric about it
    seen = cov == 1.0
    lon_sub = math.atan2(np.sin(lon[seen]).mean(), np.cos(lon[seen]).mean())
    central = np.arccos(np.clip(np.cos(lat) * np.cos(lon - lon_sub), -1, 1))
    R = 6371.0
    eta = math.asin(math.cos(math.radians(eps)) * R / a)
    lam = math.pi / 2 - eta - math.radians(eps)
    assert math.isclose(math.degrees(lam), 71.4, abs_tol=0.2)  # ~71 deg, common practice
    tol = math.radians(0.35)
    assert np.all(cov[central < lam - tol] == 1.0)
    assert np.all(cov[central > lam + tol] == 0.0)


# Ballard, "Rosette Constellations of Earth Satellites", IEEE Trans. AES-16(5), 1980,
# Table I: best patterns for continuous single coverage of the whole Earth and their
# worst-case Earth central angle R (equal to J. G. Walker's best delta patterns).
BALLARD_TABLE_I = [
    # T, P, F, inclination [deg], R [deg]
    (5, 5, 1, 43.66, 69.15),
    (10, 10, 7, 47.93, 51.53),
    (15, 3, 1, 53.51, 42.13),
]
# The analysis is on a sphere; our visibility is on the ellipsoid. With a zero minimum
# elevation the coverage angle then varies by up to ~0.25 deg over the globe (normal tilt
# 0.19 deg, local radius), so "just above" is R + 0.4 deg. "Just below" must leave a gap a
# 2-degree grid sampled every 30 s can see: R - 0.6 deg.
ABOVE_DEG = 0.4
BELOW_DEG = 0.6


def _ballard_run(T, P, F, inc_deg, lam_deg):
    r = 6371.0 / math.cos(math.radians(lam_deg))  # horizon central angle on a mean sphere
    el = walker_delta(T, P, F, a_km=r, i_rad=math.radians(inc_deg))
    step = 30.0
    span = step * math.ceil(period_s(r) / step)  # one orbit: the pattern's geometry repeats
    return compute_coverage(el, EPOCH, span, step, GridSpec(2.0), Sensor(0.0))


@pytest.mark.parametrize("T, P, F, inc, R", BALLARD_TABLE_I)
def test_ballard_patterns_cover_the_whole_earth_just_above_R(T, P, F, inc, R):
    ds = _ballard_run(T, P, F, inc, R + ABOVE_DEG)
    assert int(ds.min_in_view.min()) >= 1


@pytest.mark.parametrize("T, P, F, inc, R", BALLARD_TABLE_I)
def test_ballard_patterns_leave_a_gap_just_below_R(T, P, F, inc, R):
    ds = _ballard_run(T, P, F, inc, R - BELOW_DEG)
    assert int(ds.min_in_view.min()) == 0


def test_span_and_step_errors():
    with pytest.raises(CovergridError, match="step_s"):
        count_steps(3600.0, 7200.0)
    with pytest.raises(CovergridError, match="whole number"):
        count_steps(3600.0, 7.0)
    with pytest.raises(CovergridError, match="step_s"):
        count_steps(3600.0, 0.0)
    with pytest.raises(CovergridError, match="compute.chunk_rows"):
        row_bands(10, 0)
    with pytest.raises(CovergridError, match="sensor.min_elevation_deg"):
        Sensor(-5.0)
    with pytest.raises(CovergridError, match="sensor.max_off_nadir_deg"):
        Sensor(10.0, max_off_nadir_deg=95.0)
    with pytest.raises(CovergridError, match="compute.scheduler"):
        el, grid, sensor = _small()
        compute_coverage(el, EPOCH, 3600.0, 600.0, grid, sensor, scheduler="gpu")


def test_band_edges_cover_all_rows_once():
    for n_lat, chunk in ((90, None), (90, 7), (1, None), (5, 100)):
        b = row_bands(n_lat, chunk)
        assert b[0][0] == 0 and b[-1][1] == n_lat
        assert all(x[1] == y[0] for x, y in zip(b[:-1], b[1:], strict=True))


def test_every_dataset_states_the_model_limits():
    from covergrid.compute.metrics import MODEL_LIMITS

    el, grid, sensor = _small()
    ds = compute_coverage(el, EPOCH, 3600.0, 600.0, grid, sensor)
    assert ds.attrs["comment"] == MODEL_LIMITS
    for phrase in ("secular J2", "no drag", "not for operations", "higher-fidelity"):
        assert phrase in MODEL_LIMITS


def test_position_blocks_do_not_change_results(monkeypatch):
    """The engine propagates in blocks of samples to bound memory; splitting the span into
    many short blocks (the last one shorter) must give the same Dataset as one block,
    refined gap boundaries included (they use positions from the previous block)."""
    import covergrid.compute.span as span

    el, grid, sensor = _small()
    one = compute_coverage(el, EPOCH, 3 * 3600.0, 60.0, grid, sensor, scheduler="synchronous")
    monkeypatch.setattr(span, "POSITION_BLOCK_BYTES", 24 * len(el) * 7)  # 7 samples
    many = compute_coverage(el, EPOCH, 3 * 3600.0, 60.0, grid, sensor, scheduler="synchronous")
    # The propagator advances its angles by recurrence within one call, so positions from
    # other block boundaries differ in the last bits (~1e-12 relative): counts are
    # identical, and every time (all metrics are integrals over refined crossing times)
    # agrees to far below a millisecond. (Within one study the blocks depend only on the
    # number of satellites, so schedulers and latitude chunks still give bit-identical
    # results: see the tests above.)
    for name in many.data_vars:
        if name in INTEGER_METRICS:
            xr.testing.assert_identical(many[name], one[name])
        else:
            np.testing.assert_allclose(many[name], one[name], rtol=1e-9, atol=1e-6,
                                       err_msg=name)
    sampled = {"refine_transitions": False}
    one = compute_coverage(el, EPOCH, 3 * 3600.0, 60.0, grid, sensor, scheduler="synchronous",
                           **sampled)
    monkeypatch.setattr(span, "POSITION_BLOCK_BYTES", 24 * len(el) * 5)
    many = compute_coverage(el, EPOCH, 3 * 3600.0, 60.0, grid, sensor,
                            scheduler="synchronous", **sampled)
    xr.testing.assert_identical(many.drop_attrs(), one.drop_attrs())  # sampled: identical


def test_event_queue_overflow_is_counted_and_the_band_recomputed(monkeypatch):
    """A kernel event queue too short for one sample's events never drops an event
    silently: the overflow is counted and the band computed again with a longer queue, so
    the Dataset equals a run whose queue was long enough from the start."""
    from covergrid.compute import kernel_state

    el, grid, sensor = _small()
    ref = compute_coverage(el, EPOCH, 3 * 3600.0, 60.0, grid, sensor, scheduler="synchronous")
    real = kernel_state.new_state
    asked: list[int] = []

    def first_queue_empty(n_cells, nfold_max, n_sat, n_rows,
                          queue_per_cell=kernel_state.QUEUE_PER_CELL):
        asked.append(queue_per_cell)
        # the first attempt gets no room at all for events
        return real(n_cells, nfold_max, n_sat, n_rows, queue_per_cell if len(asked) > 1 else 0)

    monkeypatch.setattr(kernel_state, "QUEUE_SLACK", 0)
    monkeypatch.setattr(kernel_state, "new_state", first_queue_empty)
    got = compute_coverage(el, EPOCH, 3 * 3600.0, 60.0, grid, sensor, scheduler="synchronous",
                           chunk_rows=grid.n_lat)
    first = kernel_state.QUEUE_PER_CELL
    assert asked == [first, 4 * first]  # one retry, with a queue four times longer
    xr.testing.assert_identical(got.drop_attrs(), ref.drop_attrs())
