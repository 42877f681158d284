"""Side-looking sensors (an off-nadir annulus on one side of the track): the kernel against
a brute force of the look geometry, the swath's edges against the handbook's spherical
footprint relation, continuous time against fine sampling, and the study-level plumbing
(sweeps, schedulers, refusals).

Sources: Wertz and Larson, *Space Mission Analysis and Design*, 3rd ed., sec. 5.2 (on a
sphere of radius R seen from radius r, off-nadir angle eta, elevation eps and Earth central
angle lambda obey sin(eta) = cos(eps) R / r and lambda = 90 deg - eta - eps). The brute
force (tests/conftest.py ``visibility``) takes the off-nadir angle and the look angles from
``covergrid.earth.frames`` and the side from the sign of (r x v) . p, cell by cell and
sample by sample; it shares nothing with the kernel's row thresholds.
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
from covergrid.earth.frames import geodetic_to_ecef, look_angles, off_nadir_angle
from covergrid.earth.time import gmst_rad, parse_epoch
from covergrid.errors import CovergridError
from covergrid.orbits import j2
from covergrid.orbits.walker import from_keplerian

RE = 6378.137
EPOCH = parse_epoch("2027-03-14T06:00:00Z")
#: Sampled runs equal the brute force but for the order of float sums.
EXACT = 1e-12
#: Continuous-time gap statistics against a 1 s sampling: the continuous-time tests' own
#: tolerance (tests/test_kernel_passes.py: 2 s, the 1 s sampling itself good to 1 s).
GAP_TOLERANCE_S = 2.0
#: Events shorter than this a 1 s sampling may miss (tests/test_kernel_passes.py).
SHORT_EVENT_S = 1.5


def _three_orbits():
    """A sun-synchronous-like polar orbit, an inclined eccentric one, an equatorial one."""
    return from_keplerian(RE + np.array([700.0, 900.0, 600.0]), np.array([0.0, 0.01, 0.0]),
                          np.radians([97.0, 45.0, 0.0]), np.radians([10.0, 100.0, 50.0]),
                          np.radians([0.0, 30.0, 0.0]),
                          mean_anomaly_rad=np.radians([0.0, 90.0, 200.0]),
                          ids=["polar", "inclined", "equatorial"])


SENSORS = [
    Sensor(5.0, max_off_nadir_deg=45.0, min_off_nadir_deg=20.0, look_side="right"),
    Sensor(5.0, min_off_nadir_deg=30.0, look_side="left"),
    Sensor(5.0, max_off_nadir_deg=50.0, min_off_nadir_deg=25.0),
    Sensor(5.0, max_off_nadir_deg=50.0, max_range_km=2500.0, look_side="left"),
]
IDS = ["annulus-right", "inner-only-left", "annulus-both", "cone-range-left"]


def _brute(el, sensor, n_steps, step, lat, lon):
    return visibility(el, EPOCH, n_steps, step, lat, lon, sensor.min_elevation_deg,
                      sensor.max_off_nadir_deg, sensor.max_range_km, sensor.min_off_nadir_deg,
                      sensor.look_side)


@pytest.mark.parametrize("sensor", SENSORS, ids=IDS)
def test_sampled_kernel_equals_brute_force(sensor):
    """Sample and hold: every metric of every cell equal to the brute force (the velocity
    that defines the side reaches the sampled kernel too)."""
    el = _three_orbits()
    grid, span, step = GridSpec(5.0), 4 * 3600.0, 60.0
    ds = compute_coverage(el, EPOCH, span, step, grid, sensor, nfold_max=3, chunk_rows=5,
                          scheduler="synchronous", refine_transitions=False)
    lat, lon = cell_centres(5.0)
    vis = _brute(el, sensor, count_steps(span, step), step, lat, lon)
    assert vis.any() and not vis.all()
    ref = metrics_from_visibility(vis, step, nfold_max=3)
    for m in METRICS:
        got = ds[m].values.reshape(ref[m].shape)
        np.testing.assert_allclose(got, ref[m], rtol=EXACT, atol=EXACT, err_msg=m)
    assert int(ds["visits"]) == int(vis.sum())


def _sub_point(el, t_s=0.0):
    theta0 = float(gmst_rad(EPOCH, 0.0))
    r = j2.propagate_to_ecef(el, np.array([t_s]), theta0)[0, 0]
    norm = float(np.linalg.norm(r))
    return math.degrees(math.atan2(r[1], r[0])), math.degrees(math.asin(r[2] / norm)), norm


def _central_angle_deg(eta_deg, r_km, radius_km):
    """Earth central angle of the point seen at off-nadir angle eta (SMAD sec. 5.2)."""
    eps = math.acos(r_km * math.sin(math.radians(eta_deg)) / radius_km)
    return 90.0 - eta_deg - math.degrees(eps)


@pytest.mark.parametrize("inclination_deg, side, expect", [
    (0.0, "left", "north"), (0.0, "right", "south"),
    (90.0, "left", "west"), (90.0, "right", "east")])
def test_swath_edges_match_the_handbook_footprint(inclination_deg, side, expect):
    """One sample of a circular orbit at 700 km: an equatorial satellite (moving east) sees
    the cells of its meridian between the central angles of 20 deg and 40 deg off nadir to
    the north when looking left and to the south when looking right; a polar satellite at
    its ascending node (moving north) sees the equator's cells to the west (left) or east
    (right). Inner and outer edges within one cell width of the spherical relation (SMAD
    3rd ed., sec. 5.2), with the Earth radius at the cells' latitude; nothing on the other
    side, nothing inside the inner edge."""
    res = 0.25
    el = from_keplerian([RE + 700.0], [0.0], [math.radians(inclination_deg)], [0.0], [0.0],
                        mean_anomaly_rad=[0.0], ids=["s"])
    sensor = Sensor(0.0, max_off_nadir_deg=40.0, min_off_nadir_deg=20.0, look_side=side)
    grid = GridSpec(res, -12.0, 12.0)
    ds = compute_coverage(el, EPOCH, 60.0, 60.0, grid, sensor, scheduler="synchronous",
                          refine_transitions=False)  # one sample: seen at t = 0 or not
    seen = ds.coverage_fraction.values > 0.0
    lon_s, lat_s, r = _sub_point(el)
    assert abs(lat_s) < 1e-6
    lat = ds.lat.values
    lon = ds.lon.values
    # the spherical relation with the Earth's radius where the swath lies (at most 5 deg from
    # the equator: within 0.2 km of the equatorial radius here; the ellipsoid's geodetic
    # normal tilts the off-nadir angle by less than a tenth of a cell)
    lam_in = _central_angle_deg(20.0, r, RE)
    lam_out = _central_angle_deg(40.0, r, RE)
    assert 2.0 < lam_in < lam_out < 6.0
    if inclination_deg == 0.0:
        col = int(np.argmin(abs(((lon - lon_s + 180.0) % 360.0) - 180.0)))
        line = seen[:, col]
        offsets = lat[line]
        others = seen.copy()
        others[:, col] = False
    else:
        row = int(np.argmin(abs(lat - lat_s)))
        line = seen[row, :]
        offsets = ((lon[line] - lon_s + 180.0) % 360.0) - 180.0
        others = seen.copy()
        others[row, :] = False
    assert offsets.size > 0
    sign = 1.0 if expect in ("north", "east") else -1.0
    assert np.all(sign * offsets > 0.0), "cells on the wrong side of the track"
    dist = np.abs(offsets)
    assert abs(dist.min() - lam_in) <= res, (dist.min(), lam_in)
    assert abs(dist.max() - lam_out) <= res, (dist.max(), lam_out)
    # every seen cell anywhere lies within the annulus's central angles; for the equatorial
    # orbit the track plane is the equator's, so every seen cell is on the expected side
    # (the polar orbit's Earth-fixed velocity leans west by the Earth's rotation, so off the
    # equator its plane is not a meridian's)
    la, lo = np.meshgrid(lat, lon, indexing="ij")
    d_lon = ((lo - lon_s + 180.0) % 360.0) - 180.0
    if inclination_deg == 0.0:
        assert np.all(sign * la[seen] > 0.0)
    cos_c = np.cos(np.radians(la)) * np.cos(np.radians(d_lon))
    central = np.degrees(np.arccos(np.clip(cos_c, -1.0, 1.0)))
    assert central[seen].min() >= lam_in - res and central[seen].max() <= lam_out + res
    assert others.any()  # the annulus is two-dimensional: seen beyond the one line too


def _fine_seen(el, sensor, span_s, lat_deg, lon_deg, step_s=0.1):
    """One cell's visibility (n_t, n_sat) every 0.1 s, span end included: the brute force's
    tests (look angles, off-nadir angle, side of r x v), vectorised over time."""
    theta0 = float(gmst_rad(EPOCH, 0.0))
    t = np.arange(int(round(span_s / step_s)) + 1) * step_s
    pos, vel = j2.propagate_to_ecef_with_velocity(el, t, theta0)  # (n_sat, n_t, 3)
    lat, lon = math.radians(lat_deg), math.radians(lon_deg)
    _, elev, rng = look_angles(lat, lon, 0.0, pos)
    ok = elev >= math.radians(sensor.min_elevation_deg)
    cell = geodetic_to_ecef(lat, lon, 0.0)
    eta = off_nadir_angle(pos, cell)
    if sensor.max_off_nadir_deg is not None:
        ok &= eta <= math.radians(sensor.max_off_nadir_deg)
    if sensor.min_off_nadir_deg is not None:
        ok &= eta >= math.radians(sensor.min_off_nadir_deg)
    if sensor.max_range_km is not None:
        ok &= rng <= sensor.max_range_km
    if sensor.look_side != "both":
        side = np.cross(pos, vel) @ cell
        ok &= side >= 0.0 if sensor.look_side == "left" else side <= 0.0
    return ok.T


@pytest.mark.parametrize("sensor", SENSORS, ids=IDS)
@pytest.mark.parametrize("step", [30.0, 120.0])
def test_continuous_time_agrees_with_one_second_sampling(sensor, step):
    """Continuous time at 30 s and 120 s against the sampled kernel at 1 s (which equals the
    brute force, above): pass and gap counts equal and maximum and mean gap within 2 s on
    every cell but those where a 0.1 s brute force shows an event shorter than 1.5 s (a 1 s
    sampling's blind spot); no pass the 1 s sampling finds is missed."""
    el = _three_orbits()
    span = 3 * 3600.0
    grid = GridSpec(5.0)
    ours = compute_coverage(el, EPOCH, span, step, grid, sensor)
    ref = compute_coverage(el, EPOCH, span, 1.0, grid, sensor, refine_transitions=False)
    assert np.all(ours.pass_count.values >= ref.pass_count.values)
    agree = ((ours.pass_count == ref.pass_count) & (ours.gap_count == ref.gap_count)
             & (abs(ours.max_gap - ref.max_gap) <= GAP_TOLERANCE_S)
             & (abs(ours.mean_gap - ref.mean_gap) <= GAP_TOLERANCE_S)).values
    assert agree.mean() > 0.99
    assert float(ref.pass_count.sum()) > 100  # the case has passes to compare
    for i, j in np.argwhere(~agree):
        fine = _fine_seen(el, sensor, span, float(ours.lat[i]), float(ours.lon[j]))
        events = []
        for s in range(fine.shape[1]):
            d = np.diff(np.r_[0, fine[:, s].astype(int), 0])
            events += list((np.flatnonzero(d == -1) - np.flatnonzero(d == 1)) * 0.1)
        covered = fine.any(axis=1).astype(int)
        d = np.diff(np.r_[1, covered, 1])
        events += list((np.flatnonzero(d == 1) - np.flatnonzero(d == -1)) * 0.1)
        assert min(events) < SHORT_EVENT_S, (float(ours.lat[i]), float(ours.lon[j]))


@pytest.mark.parametrize("refine", [False, True])
def test_left_and_right_add_up_to_both_sides(refine):
    """The two sides partition the annulus (a cell on the track plane has measure zero):
    the time-mean number in view looking left plus looking right equals looking both ways,
    exactly when sampled and within the crossing times' accuracy in continuous time. (The
    grid has no row on the equator: the equatorial satellite's track plane holds such a
    row's cells, which count for both sides.)"""
    el = _three_orbits()
    grid, span, step = GridSpec(5.0), 3 * 3600.0, 60.0
    runs = {side: compute_coverage(el, EPOCH, span, step, grid,
                                   Sensor(0.0, max_off_nadir_deg=45.0, min_off_nadir_deg=15.0,
                                          look_side=side), refine_transitions=refine)
            for side in ("left", "right", "both")}
    total = runs["left"].mean_in_view + runs["right"].mean_in_view
    # continuous time: each crossing time good to well under a second (the Hermite roots);
    # a cell has a few dozen crossings in the span, so 10 s of in-view time over 3 h
    tol = EXACT if not refine else 10.0 / span
    np.testing.assert_allclose(total.values, runs["both"].mean_in_view.values, rtol=0, atol=tol)
    assert float(runs["left"].mean_in_view.sum()) > 0 and float(
        runs["right"].mean_in_view.sum()) > 0


def test_daylight_gate_combines_with_the_annulus():
    """The daylight gate is independent of the geometry: with it a cell is never seen more,
    and somewhere less (the Sun lights half the Earth)."""
    el = _three_orbits()
    grid, span, step = GridSpec(5.0), 6 * 3600.0, 60.0
    radar = Sensor(0.0, max_off_nadir_deg=45.0, min_off_nadir_deg=20.0, look_side="right")
    day = Sensor(0.0, max_off_nadir_deg=45.0, min_off_nadir_deg=20.0, look_side="right",
                 min_sun_elevation_deg=10.0)
    a = compute_coverage(el, EPOCH, span, step, grid, radar)
    b = compute_coverage(el, EPOCH, span, step, grid, day)
    assert np.all(b.coverage_fraction.values <= a.coverage_fraction.values + 1e-12)
    assert np.any(b.coverage_fraction.values < a.coverage_fraction.values - 1e-3)
    assert np.any(b.coverage_fraction.values > 0.0)


def test_process_scheduler_gives_identical_values():
    el = _three_orbits()
    sensor = SENSORS[0]
    ref = compute_coverage(el, EPOCH, 3 * 3600.0, 120.0, GridSpec(10.0), sensor)
    got = compute_coverage(el, EPOCH, 3 * 3600.0, 120.0, GridSpec(10.0), sensor, chunk_rows=3,
                           scheduler="processes")
    import xarray as xr

    xr.testing.assert_identical(got, ref)
    assert got.attrs["covergrid_look_side"] == "right"
    assert got.attrs["covergrid_min_off_nadir_deg"] == 20.0


def test_sensor_refuses_bad_annulus_values():
    with pytest.raises(CovergridError, match=r"sensor\.min_off_nadir_deg.*less than"):
        Sensor(0.0, max_off_nadir_deg=30.0, min_off_nadir_deg=30.0)
    with pytest.raises(CovergridError, match=r"sensor\.min_off_nadir_deg.*\(0, 90\)"):
        Sensor(0.0, min_off_nadir_deg=0.0)
    with pytest.raises(CovergridError, match=r"sensor\.look_side.*left, right, both"):
        Sensor(0.0, min_off_nadir_deg=20.0, look_side="up")
    assert Sensor(0.0, look_side="left").side_looking
    assert not Sensor(0.0, max_off_nadir_deg=30.0).side_looking
    assert Sensor(0.0, min_off_nadir_deg=20.0, look_side="right").side_args() == (
        math.radians(20.0), -1)


# An invented scenario: a small side-looking radar trade on a coarse grid (fast).
RADAR_SWEEP = {
    "study": "radar_sweep_test",
    "epoch": "2031-05-01T00:00:00Z",
    "duration_h": 6.0,
    "step_s": 60.0,
    "constellation": [{"walker": {"pattern": "star", "total": 4, "planes": 2, "phasing": 1},
                       "template": {"altitude_km": 700.0, "inclination_deg": 97.0}}],
    "sensor": {"min_elevation_deg": 0.0, "min_off_nadir_deg": 20.0, "max_off_nadir_deg": 45.0,
               "look_side": "right"},
    "grid": {"resolution_deg": 10.0},
    "requirement": {"metric": "max_gap", "at_most": 14400.0, "area_fraction": 0.5},
    "compute": {"scheduler": "synchronous"},
    "sweep": {"altitude_km": [700.0, 900.0], "total": [4], "planes": [2], "phasing": [1]},
}


def test_sweep_rows_use_the_side_looking_sensor():
    """A sweep's designs keep the study's annulus and side (a design replaces only the
    elevation limit): each row's mean coverage equals a direct run of the design with the
    side-looking sensor, and differs from the same design looking both ways."""
    from covergrid.study import parse_study
    from covergrid.trade.designs import WalkerDesign
    from covergrid.trade.sweep import run_sweep

    result = run_sweep(parse_study(RADAR_SWEEP), scheduler="synchronous", figures=False,
                       report=False)
    assert len(result.rows) == 2
    for row in result.rows:
        design = WalkerDesign(row["pattern"], row["total"], row["planes"], row["phasing"],
                              row["altitude_km"], row["inclination_deg"],
                              row["min_elevation_deg"])
        means = {}
        for side in ("right", "both"):
            sensor = Sensor(0.0, max_off_nadir_deg=45.0, min_off_nadir_deg=20.0,
                            look_side=side)
            ds = compute_coverage(design.elements(), "2031-05-01T00:00:00Z", 6 * 3600.0, 60.0,
                                  GridSpec(10.0), sensor)
            means[side] = float(ds.coverage_fraction.weighted(ds.cell_area).mean())
        assert row["coverage_fraction_mean"] == pytest.approx(means["right"], rel=1e-12)
        assert means["both"] > 1.5 * means["right"]


def test_estimate_counts_the_reach_cells_of_a_side_looking_sensor():
    """The time estimate of a side-looking study adds the per-cell test of its reach (the
    calibrated cost per visit of the outer footprint), so it exceeds the plain cone's."""
    import json

    import covergrid
    from covergrid.pipeline.resources import KERNEL_S_PER_SIDE_CELL
    from covergrid.study import parse_study

    data = json.loads(json.dumps(RADAR_SWEEP))
    del data["sweep"]
    radar = covergrid.estimate(parse_study(data), maps=False)
    data["sensor"] = {"min_elevation_deg": 0.0, "max_off_nadir_deg": 45.0}
    cone = covergrid.estimate(parse_study(data), maps=False)
    assert radar["visits"] == cone["visits"]  # the same outer footprint
    extra = radar["visits"] * KERNEL_S_PER_SIDE_CELL / radar["tasks_at_once"]
    assert radar["compute_s"] == pytest.approx(cone["compute_s"] + extra, rel=1e-9)


def test_check_prints_the_side_looking_sensor(capsys):
    """`covergrid check` states the annulus and the side it looks to."""
    from pathlib import Path

    from covergrid import cli

    study = Path(__file__).resolve().parents[1] / "configs" / "radar_marram.yaml"
    assert cli.main(["check", str(study)]) == 0
    out = capsys.readouterr().out
    assert ("min off-nadir 20 deg, max off-nadir 45 deg, looking right of the Earth-fixed "
            "velocity") in out
