"""Passes that begin and end between two samples are found and timed (continuous time).

The references are brute-force samplings that share nothing with the continuous-time code:
the kernel run with ``refine_transitions=False`` at a 1 s step, which equals the brute force
of tests/conftest.py exactly (tests/test_kernel.py), and, for the few cells where that
disagrees with the continuous result, a 0.1 s brute force of the look angles
(``covergrid.earth.frames``) on those cells. A 1 s sampling cannot see a pass or a gap
shorter than 1 s (nor one that ends within the last second of the span); where the 0.1 s
sampling shows such an event, the continuous result is checked against the 0.1 s sampling.
"""

from __future__ import annotations

import math

import numpy as np
from hypothesis import given, settings
from hypothesis import strategies as st

from covergrid.compute.engine import compute_coverage
from covergrid.compute.grid import GridSpec
from covergrid.compute.sensor import Sensor
from covergrid.earth.frames import geodetic_to_ecef, look_angles, off_nadir_angle
from covergrid.earth.time import gmst_rad, parse_epoch
from covergrid.orbits import j2
from covergrid.orbits.walker import from_keplerian, walker_delta

RE = 6378.137
#: The issue's target: gap statistics within 2 s of a 1 s sampling (itself good to 1 s).
GAP_TOLERANCE_S = 2.0
#: The fine reference's step and the events the 1 s sampling cannot resolve.
FINE_STEP_S = 0.1
SHORT_EVENT_S = 1.5
#: Events shorter than this the fine sampling itself may miss or split (a few of its steps).
UNRESOLVED_S = 0.5


def _fine_events(elements, epoch, span_s, lat_deg, lon_deg, sensor):
    """Per cell, from a 0.1 s brute force of the look angles (span end included): the pass
    durations of every satellite, the gap durations (edges truncated to the span), and the
    number of hand-overs the 0.1 s sampling cannot resolve: one satellite sets and another
    rises within one fine step of each other, so a gap (or an overlap) shorter than 0.1 s may
    lie between them (hypothesis found a 3 ms gap of this kind, which the continuous kernel
    counts and the 0.1 s sampling does not)."""
    n_t = int(round(span_s / FINE_STEP_S)) + 1
    theta0 = float(gmst_rad(epoch, 0.0))
    lat_r, lon_r = np.radians(lat_deg), np.radians(lon_deg)
    seen_all = np.zeros((len(lat_r), len(elements), n_t), bool)
    for k0 in range(0, n_t, 50_000):  # in blocks of time: bounded memory
        t = np.arange(k0, min(k0 + 50_000, n_t)) * FINE_STEP_S
        pos = j2.propagate_to_ecef(elements, t, theta0)
        for c, (lat, lon) in enumerate(zip(lat_r, lon_r, strict=True)):
            _, el, rng = look_angles(lat, lon, 0.0, pos)
            seen = el >= math.radians(sensor.min_elevation_deg)
            if sensor.max_off_nadir_deg:
                cell = geodetic_to_ecef(lat, lon, 0.0)
                seen &= off_nadir_angle(pos, cell) <= math.radians(sensor.max_off_nadir_deg)
            if sensor.max_range_km:
                seen &= rng <= sensor.max_range_km
            seen_all[c, :, k0:k0 + t.size] = seen
    out = []
    for seen in seen_all:
        passes, rises, sets = [], [], []
        for s in range(seen.shape[0]):
            d = np.diff(np.r_[0, seen[s].astype(int), 0])
            up, down = np.flatnonzero(d == 1), np.flatnonzero(d == -1)
            passes += list((down - up) * FINE_STEP_S)
            rises += [(s, k) for k in up if k > 0]
            sets += [(s, k) for k in down if k < n_t]
        handovers = sum(1 for s, k in sets for s2, k2 in rises if s2 != s and abs(k - k2) <= 1)
        covered = seen.any(axis=0).astype(int)
        d = np.diff(np.r_[1, covered, 1])
        gaps = list((np.flatnonzero(d == 1) - np.flatnonzero(d == -1)) * FINE_STEP_S)
        out.append((np.array(passes), np.array(gaps), handovers))
    return out


def _check_against_references(elements, epoch, span_s, step_s, grid, sensor):
    """Compare the continuous-time run at step_s with the 1 s sampling (and, where needed,
    the 0.1 s brute force); return the share of cells that agree with the 1 s sampling."""
    ours = compute_coverage(elements, epoch, span_s, step_s, grid, sensor)
    ref = compute_coverage(elements, epoch, span_s, 1.0, grid, sensor,
                           refine_transitions=False)
    agree = ((ours.pass_count == ref.pass_count) & (ours.gap_count == ref.gap_count)
             & (abs(ours.max_gap - ref.max_gap) <= GAP_TOLERANCE_S)
             & (abs(ours.mean_gap - ref.mean_gap) <= GAP_TOLERANCE_S)).values
    # every pass the 1 s sampling finds is found (the continuous run may find more)
    assert np.all(ours.pass_count.values >= ref.pass_count.values)
    bad = np.argwhere(~agree)
    if bad.size:
        lat = ours.lat.values[bad[:, 0]]
        lon = ours.lon.values[bad[:, 1]]
        fine = _fine_events(elements, epoch, span_s, lat, lon, sensor)
        for (i, j), (passes, gaps, handovers) in zip(bad, fine, strict=True):
            cell = ours.isel(lat=i, lon=j)
            where = (float(cell.lat), float(cell.lon), step_s)
            # the disagreement is the 1 s sampling's blind spot: a sub-second event (or one
            # within a second of the span's end, which 1 s sampling holds over), or a
            # hand-over too close for even the 0.1 s sampling
            events = np.r_[passes, gaps]
            assert np.any(events < SHORT_EVENT_S) or handovers, where
            unresolved = int(np.sum(passes < UNRESOLVED_S) + np.sum(gaps < UNRESOLVED_S)
                             + handovers)
            assert abs(int(cell.pass_count) - passes.size) <= unresolved, where
            assert abs(int(cell.gap_count) - gaps.size) <= unresolved, where
            if unresolved == 0:
                assert abs(float(cell.max_gap) - gaps.max(initial=0.0)) <= GAP_TOLERANCE_S, where
                mean = gaps.mean() if gaps.size else 0.0
                assert abs(float(cell.mean_gap) - mean) <= GAP_TOLERANCE_S, where
    return agree.mean()


orbits = st.lists(
    st.tuples(st.floats(400.0, 2500.0),            # altitude [km]
              st.floats(0.0, 180.0),               # inclination [deg]
              st.floats(0.0, 360.0),               # RAAN [deg]
              st.floats(0.0, 360.0),               # mean anomaly [deg]
              st.sampled_from([0.0, 0.0, 0.02, 0.05]),  # eccentricity
              st.floats(0.0, 360.0)),              # argument of perigee [deg]
    min_size=1, max_size=3)
sensors = st.builds(Sensor, st.floats(0.0, 40.0),
                    st.one_of(st.none(), st.floats(20.0, 60.0)),
                    st.one_of(st.none(), st.floats(1500.0, 4000.0)))


@settings(max_examples=24, deadline=None, derandomize=True)
@given(orbit_list=orbits, sensor=sensors, step_s=st.sampled_from([30.0, 60.0, 120.0]))
def test_every_pass_a_one_second_sampling_finds_is_found(orbit_list, sensor, step_s):
    """Random orbits, masks, cones, ranges and steps (issue 10's property): every pass the
    1 s sampling finds is found, and max and mean gap agree within 2 s; where the 1 s
    sampling disagrees it misses a sub-second event, and the 0.1 s brute force agrees."""
    alt, inc, raan, m, ecc, argp = (np.array(v) for v in zip(*orbit_list, strict=True))
    a = np.maximum(RE + alt, (RE + 300.0) / (1.0 - ecc))  # perigee above 300 km
    el = from_keplerian(a, ecc, np.radians(inc), np.radians(raan), np.radians(argp),
                        mean_anomaly_rad=np.radians(m), ids=[f"s{k}" for k in range(len(a))])
    share = _check_against_references(el, parse_epoch("2029-05-01T00:00:00Z"), 3 * 3600.0,
                                      step_s, GridSpec(10.0), sensor)
    assert share > 0.9


def test_issue_case_all_cells_within_two_seconds_of_one_second_sampling():
    """The reported case: 12/3/1 Walker delta at 700 km and 70 deg, 20 deg mask, 10 deg grid
    between 60 S and 60 N, 24 h at 60 s (epoch invented). Sampled at 60 s, short passes
    between samples are lost and some maximum gaps come out more than 1,000 s long; in
    continuous time every one of the 432 cells is within 2 s of the 1 s sampling (or, where
    that misses a sub-second gap, of the 0.1 s brute force)."""
    el = walker_delta(12, 3, 1, a_km=RE + 700.0, i_rad=math.radians(70.0))
    epoch = parse_epoch("2027-03-14T06:00:00Z")
    grid, sensor = GridSpec(10.0, -60.0, 60.0), Sensor(20.0)
    span = 86400.0
    ref = compute_coverage(el, epoch, span, 1.0, grid, sensor, refine_transitions=False)
    sampled = compute_coverage(el, epoch, span, 60.0, grid, sensor, refine_transitions=False)
    assert float(abs(sampled.max_gap - ref.max_gap).max()) > 1000.0  # the reported failure
    assert np.any(sampled.pass_count.values < ref.pass_count.values)
    ours = compute_coverage(el, epoch, span, 60.0, grid, sensor)
    assert float(abs(ours.max_gap - ref.max_gap).max()) <= GAP_TOLERANCE_S
    share = _check_against_references(el, epoch, span, 60.0, grid, sensor)
    # a few cells hold sub-second gaps the 1 s sampling misses: they are checked against the
    # 0.1 s brute force (so that branch of the check runs here)
    assert 0.99 < share < 1.0
