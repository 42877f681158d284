"""The row threshold of the visibility limits (covergrid.compute.footprint) and the Hermite
crossings (covergrid.compute.crossings) against independent references: the look angles of
covergrid.earth.frames (elevation by arcsine, range, off-nadir angle), numpy's polynomial
roots, dense sampling, and differences for the rates."""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import example, given, settings
from hypothesis import strategies as st

from covergrid.compute.crossings import cubic_range, hermite_crossings
from covergrid.compute.footprint import NO_LIMIT_KM, binding, row_interval, row_thresholds
from covergrid.constants import WGS84_A_KM, WGS84_E2
from covergrid.earth.frames import geodetic_to_ecef, look_angles, off_nadir_angle

#: Cells this close to the threshold in projected coordinate (1 mm) are left out of the
#: membership comparison: the two formulas round differently there.
ROUNDING_KM = 1e-6


def _row(lat_rad):
    n = WGS84_A_KM / math.sqrt(1.0 - WGS84_E2 * math.sin(lat_rad) ** 2)
    return n * math.cos(lat_rad), n * (1.0 - WGS84_E2) * math.sin(lat_rad)


sensors = st.tuples(
    st.floats(0.0, 60.0),                                   # minimum elevation [deg]
    st.one_of(st.none(), st.floats(10.0, 70.0)),           # cone half-angle [deg]
    st.one_of(st.none(), st.floats(800.0, 6000.0)),        # range [km]
)


@settings(max_examples=150, deadline=None)
@given(lat=st.floats(-89.0, 89.0), alt=st.floats(300.0, 36000.0),
       sat_lat=st.floats(-89.0, 89.0), sat_lon=st.floats(-180.0, 180.0), sensor=sensors)
def test_threshold_separates_the_visible_cells_of_a_row(lat, alt, sat_lat, sat_lon, sensor):
    el_deg, cone_deg, range_km = sensor
    lat_r = math.radians(lat)
    rho, zc = _row(lat_r)
    sat = geodetic_to_ecef(math.radians(sat_lat), math.radians(sat_lon), alt)
    s_el = math.sin(math.radians(el_deg))
    cos_eta = math.cos(math.radians(cone_deg)) if cone_deg else -2.0
    lims = row_thresholds(sat[0], sat[1], sat[2], 0.0, 0.0, 0.0, rho, zc, math.sin(lat_r),
                          math.cos(lat_r), s_el, cos_eta, range_km or -1.0, False)
    x_thr, _, k = binding(lims)
    assert x_thr == max(lims[0], lims[2], lims[4]) == lims[2 * k]
    assert (lims[2] > NO_LIMIT_KM) <= bool(cone_deg) and (lims[4] > NO_LIMIT_KM) == bool(range_km)
    lon = np.radians(np.arange(-180.0, 180.0, 0.25))
    cells = geodetic_to_ecef(np.full_like(lon, lat_r), lon, 0.0)
    _, el, rng = look_angles(np.full_like(lon, lat_r), lon, 0.0, sat[None, :])
    seen = el >= math.radians(el_deg)
    if cone_deg:
        seen &= off_nadir_angle(sat[None, :], cells) <= math.radians(cone_deg)
    if range_km:
        seen &= rng <= range_km
    proj = sat[0] * np.cos(lon) + sat[1] * np.sin(lon)
    clear = np.abs(proj - x_thr) > ROUNDING_KM
    np.testing.assert_array_equal((proj >= x_thr)[clear], seen[clear])
    # and the kernel's row interval is exactly those columns
    cols = np.arange(lon.size)
    jc = int(np.argmin(np.abs(np.angle(np.exp(1j * (lon - math.atan2(sat[1], sat[0])))))))
    start, length = row_interval(sat[0], sat[1], x_thr, jc, 3, 3, np.cos(lon), np.sin(lon),
                                 lon.size)
    inside = ((cols - start) % lon.size) < length
    np.testing.assert_array_equal(inside[clear], seen[clear])


@settings(max_examples=100, deadline=None)
@given(lat=st.floats(-85.0, 85.0), alt=st.floats(400.0, 20000.0),
       sat_lat=st.floats(-80.0, 80.0), sat_lon=st.floats(-180.0, 180.0),
       vel=st.tuples(*[st.floats(-8.0, 8.0)] * 3), sensor=sensors)
@example(lat=0.0, alt=973.0, sat_lat=0.0, sat_lon=28.0, vel=(8.0, 8.0, 0.0),
         sensor=(0.0, 60.0, None))  # a cone nearly as wide as the Earth (see below)
def test_threshold_rate_is_its_time_derivative(lat, alt, sat_lat, sat_lon, vel, sensor):
    # central differences of X* along a straight motion r + v t with Richardson's
    # extrapolation from h = 2e-3 s and 1e-3 s (truncation O(h^4); rounding ~ 1e-16 |X*| / h,
    # far below 1e-6 km/s). A plain central difference (truncation h^2 |X*'''| / 6) is not
    # enough where a cone is nearly as wide as the Earth: hypothesis found a 60 deg cone at
    # 973 km (the Earth's edge at 60.2 deg) where it is off by 7e-6 km/s, while the
    # extrapolated difference agrees with the closed form to 1e-9 km/s.
    el_deg, cone_deg, range_km = sensor
    lat_r = math.radians(lat)
    rho, zc = _row(lat_r)
    r0 = geodetic_to_ecef(math.radians(sat_lat), math.radians(sat_lon), alt)
    v = np.array(vel)
    args = (rho, zc, math.sin(lat_r), math.cos(lat_r), math.sin(math.radians(el_deg)),
            math.cos(math.radians(cone_deg)) if cone_deg else -2.0, range_km or -1.0)

    def thr(t):
        r = r0 + v * t
        return row_thresholds(r[0], r[1], r[2], v[0], v[1], v[2], *args, True)

    now = thr(0.0)
    near = (thr(1e-3), thr(-1e-3))
    far = (thr(2e-3), thr(-2e-3))
    for k in range(3):  # every limit's rate, binding or not
        if min(now[2 * k], *(p[2 * k] for p in near + far)) > NO_LIMIT_KM:
            d1 = (near[0][2 * k] - near[1][2 * k]) / 2e-3
            d2 = (far[0][2 * k] - far[1][2 * k]) / 4e-3
            fd = (4.0 * d1 - d2) / 3.0
            assert now[2 * k + 1] == pytest.approx(fd, abs=1e-6, rel=1e-7), k


def _cubic(p0, d0, p1, d1):
    """Monomial coefficients (highest first) of the Hermite cubic, for numpy."""
    return [2 * (p0 - p1) + d0 + d1, 3 * (p1 - p0) - 2 * d0 - d1, d0, p0]


margins = st.floats(-2.0, 2.0).filter(lambda v: abs(v) > 1e-6)
slopes = st.floats(-12.0, 12.0)


@settings(max_examples=400, deadline=None)
@given(p0=margins, d0=slopes, p1=margins, d1=slopes)
def test_hermite_crossings_are_the_roots_of_the_cubic(p0, d0, p1, d1):
    n, *times = hermite_crossings(p0, d0, p1, d1, p0 >= 0.0, p1 >= 0.0)
    # reference: the sign changes of the cubic on a dense grid (a double root, a tangency,
    # is no crossing); numpy's polynomial evaluation, not the kernel's
    tau = np.linspace(0.0, 1.0, 20001)
    p = np.polyval(_cubic(p0, d0, p1, d1), tau)
    changes = np.flatnonzero(np.diff(p >= 0.0))
    assert n == changes.size, (n, changes)
    assert (n % 2 == 1) == ((p0 >= 0.0) != (p1 >= 0.0))
    found = np.array(times[:n])
    assert np.all(np.diff(found) >= 0)
    for t, k in zip(found, changes, strict=True):  # each in its bracket, where p vanishes
        assert tau[k] - 1e-9 <= t <= tau[k + 1] + 1e-9
        assert abs(np.polyval(_cubic(p0, d0, p1, d1), t)) <= 1e-5 * (
            abs(p0) + abs(p1) + abs(d0) + abs(d1))


def test_hermite_crossings_find_a_pass_between_samples():
    # out at both ends, in between: margin -0.1 at both ends rising to +0.15 at tau = 0.5
    # (p = -0.1 + tau (1 - tau)), crossings at tau = (1 +- sqrt(0.6)) / 2
    n, t1, t2, _ = hermite_crossings(-0.1, 1.0, -0.1, -1.0, False, False)
    assert n == 2
    assert t1 == pytest.approx((1 - math.sqrt(0.6)) / 2, abs=1e-7)
    assert t2 == pytest.approx((1 + math.sqrt(0.6)) / 2, abs=1e-7)
    # and a brief loss within a pass (the mirror image)
    n, t1, t2, _ = hermite_crossings(0.1, -1.0, 0.1, 1.0, True, True)
    assert n == 2 and t1 == pytest.approx((1 - math.sqrt(0.6)) / 2, abs=1e-7)


def test_hermite_crossings_keep_the_decided_state_at_the_samples():
    # the exact test said "in" at the first sample although the margin rounds to below zero
    n, t1, _, _ = hermite_crossings(-1e-15, -1.0, -0.5, -1.0, True, False)
    assert n == 1 and 0.0 <= t1 < 1e-6


@settings(max_examples=200, deadline=None)
@given(p0=st.floats(-5, 5), d0=st.floats(-20, 20), p1=st.floats(-5, 5), d1=st.floats(-20, 20))
def test_cubic_range_bounds_the_cubic(p0, d0, p1, d1):
    lo, hi = cubic_range(p0, d0, p1, d1)
    v = np.polyval(_cubic(p0, d0, p1, d1), np.linspace(0.0, 1.0, 2001))
    scale = 1e-12 * (1 + abs(p0) + abs(p1) + abs(d0) + abs(d1))
    assert lo <= v.min() + scale and hi >= v.max() - scale
    assert lo >= v.min() - 1e-3 * (1 + abs(d0) + abs(d1))  # and is tight
    assert hi <= v.max() + 1e-3 * (1 + abs(d0) + abs(d1))
