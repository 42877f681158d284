"""Tests of covergrid.orbits.special and covergrid.orbits.geometry: periods, SSO, repeat
ground track, footprint geometry."""

from __future__ import annotations

import numpy as np
import pytest

from covergrid.constants import (
    EARTH_RADIUS_KM,
    OMEGA_EARTH_RAD_S,
    SECONDS_PER_DAY,
    SIDEREAL_DAY_S,
    TROPICAL_YEAR_DAYS,
)
from covergrid.errors import CovergridError, ElementError
from covergrid.orbits import geometry, special
from covergrid.orbits.j2 import secular_rates

DEG = np.pi / 180.0
R = EARTH_RADIUS_KM

# Tolerances (named, with reasons).
# Values printed to 0.01 deg: half a unit in the last place.
HALF_CENTIDEGREE_RAD = 0.005 * DEG
# Recalled SSO inclinations printed to 0.01-0.1 deg, computed by their sources with other
# J2 / radius / year-length constants (1e-4 relative in cos i, i.e. ~0.01 deg): 0.05 deg.
SSO_TABLE_TOL_RAD = 0.05 * DEG
# Rounding only, for identities evaluated in float64 on angles of order one radian.
ROUNDING_RAD = 1e-12
ONE_MILLIMETRE_KM = 1e-6


# --------------------------------------------------------------------------------------
# Period, mean motion
# --------------------------------------------------------------------------------------
def test_half_sidereal_day_orbit_is_near_26560_km():
    # Common practice: the 12-sidereal-hour (GPS-like) circular orbit has a ~ 26,560 km,
    # quoted to four figures, so +-5 km.
    assert special.semi_major_axis_km(SIDEREAL_DAY_S / 2) == pytest.approx(26560.0, abs=5.0)


def test_geostationary_radius_period():
    # Common practice: the geostationary radius 42,164.17 km (from memory) has a period of
    # one sidereal day (86164.0905 s). 0.01 km in a is 0.03 s in T; 0.1 s covers mu rounding.
    assert special.period_s(42164.17) == pytest.approx(SIDEREAL_DAY_S, abs=0.1)


def test_period_mean_motion_inverse_scalar_and_array():
    a = np.array([6778.137, 7178.0, 26560.0, 42164.17])
    t = special.period_s(a)
    assert isinstance(special.period_s(7000.0), float)
    np.testing.assert_allclose(special.semi_major_axis_km(t), a, rtol=1e-14)
    np.testing.assert_allclose(special.mean_motion_rad_s(a) * t, 2 * np.pi, rtol=1e-14)
    for k in range(a.size):
        assert special.period_s(float(a[k])) == t[k]


def test_period_bad_input():
    with pytest.raises(ElementError, match="a_km"):
        special.period_s(-1.0)
    with pytest.raises(ElementError, match="period_s"):
        special.semi_major_axis_km([100.0, 0.0])


# --------------------------------------------------------------------------------------
# Sun-synchronous inclination
# --------------------------------------------------------------------------------------
@pytest.mark.parametrize(
    ("alt_km", "i_deg"),
    [
        (500.0, 97.40),  # widely tabulated SSO inclinations (common practice, from memory)
        (700.0, 98.19),
        (800.0, 98.6),  # REFERENCES brief: 800 km circular -> about 98.6 deg
        (1000.0, 99.48),
    ],
)
def test_sun_synchronous_inclination_table(alt_km, i_deg):
    i_rad = special.sun_synchronous_inclination(R + alt_km)
    assert isinstance(i_rad, float)
    assert i_rad == pytest.approx(i_deg * DEG, abs=SSO_TABLE_TOL_RAD)


def test_sun_synchronous_band_and_rate():
    # Common practice: LEO SSO inclinations lie near 97-99.5 deg for 400-1000 km altitude.
    alt = np.linspace(400.0, 1000.0, 13)
    e = np.full_like(alt, 0.01)
    i = special.sun_synchronous_inclination(R + alt, e)
    assert np.all((i > 97.0 * DEG) & (i < 99.5 * DEG))
    assert np.all(np.diff(i) > 0)  # higher orbits need more retrograde planes
    raan_dot, _, _ = secular_rates(R + alt, e, i)
    required = 2 * np.pi / (TROPICAL_YEAR_DAYS * SECONDS_PER_DAY)
    np.testing.assert_allclose(raan_dot, required, rtol=1e-12)  # the defining equation


def test_sun_synchronous_too_high():
    # Circular orbits above ~12,350 km cannot be sun-synchronous (|cos i| would exceed 1).
    assert special.sun_synchronous_inclination(12300.0) > 170 * DEG
    with pytest.raises(ElementError, match="a_km"):
        special.sun_synchronous_inclination([7000.0, 13000.0])


# --------------------------------------------------------------------------------------
# Repeat ground track
# --------------------------------------------------------------------------------------
def _repeat_mismatch(k, d, a, i, e=0.0):
    raan_dot, argp_dot, m_dot = secular_rates(a, e, i)
    return k * 2 * np.pi / (m_dot + argp_dot) - d * 2 * np.pi / (OMEGA_EARTH_RAD_S - raan_dot)


def test_repeat_ground_track_landsat_like():
    # Landsat-7/8-like: 233 revolutions in 16 days, i = 98.2 deg, mean a = 7077.7 km
    # (Landsat 7 Science Data Users Handbook, from memory). 1 km covers the printed
    # 0.1 km and the different constants and mean-element definitions of the source.
    a = special.repeat_ground_track_a(233, 16, 98.2 * DEG)
    assert a == pytest.approx(7077.7, abs=1.0)
    # The defining equation holds: 233 nodal periods = 16 nodal days (to 1 microsecond).
    assert abs(_repeat_mismatch(233, 16, a, 98.2 * DEG)) < 1e-6


def test_repeat_ground_track_fifteen_per_day():
    # Common practice: the 15 rev / 1 day circular repeat sits near 480-565 km depending on
    # inclination; J2 lowers it more for prograde than for near-polar orbits.
    a_iss = special.repeat_ground_track_a(15, 1, 51.6 * DEG)
    a_sso = special.repeat_ground_track_a(15, 1, 97.6 * DEG)
    assert 480.0 < a_iss - R < 565.0 and 480.0 < a_sso - R < 565.0
    assert a_iss < a_sso
    # Without J2 (two-body) the 15/1 orbit would be at n = 15 omega_E exactly.
    a_two_body = special.semi_major_axis_km(2 * np.pi / (15 * OMEGA_EARTH_RAD_S))
    assert abs(a_sso - a_two_body) < 0.01 * a_two_body  # J2 moves a by < 1 %
    # Fourteen-and-a-third style: 43 revs in 3 days, eccentric case, exact equation.
    a43 = special.repeat_ground_track_a(43, 3, 97.0 * DEG, e=0.001)
    assert abs(_repeat_mismatch(43, 3, a43, 97.0 * DEG, 0.001)) < 1e-6


@pytest.mark.parametrize(
    ("args", "field"),
    [
        ((0, 1, 0.9), "k_revs"),
        ((15, 1.5, 0.9), "d_days"),
        ((15, 1, 0.9, 1.0), "e"),
        ((17, 1, 0.9), "k_revs"),
        ((True, 1, 0.9), "k_revs"),
    ],
)
def test_repeat_ground_track_errors(args, field):
    with pytest.raises(ElementError, match=field):
        special.repeat_ground_track_a(*args)


def test_critical_inclination():
    # arccos(1/sqrt 5) = 63.4349 deg (REFERENCES.md), printed to 1e-4 deg.
    i1, i2 = special.critical_inclination()
    assert i1 == pytest.approx(63.4349 * DEG, abs=0.00005 * DEG)
    assert i2 == pytest.approx((180.0 - 63.4349) * DEG, abs=0.00005 * DEG)
    for i in (i1, i2):
        assert abs(secular_rates(7000.0, 0.1, i)[1]) < 1e-20  # perigee frozen


# --------------------------------------------------------------------------------------
# Footprint geometry
# --------------------------------------------------------------------------------------
def test_footprint_worked_example_1200_km():
    # SMAD 3rd ed. sec. 5.2 formulas; worked numbers of Jeon and Park, AAS 25-254, 2025
    # (REFERENCES.md): h = 1200 km -> rho = 57.31 deg; eps = 30 deg -> eta = 46.79 deg,
    # lambda = 13.21 deg. Those digits need R ~ 6378 km (R = 6371 km gives rho = 57.30).
    h, eps = 1200.0, 30.0 * DEG
    assert geometry.angular_radius_rho(h) == pytest.approx(57.31 * DEG, abs=HALF_CENTIDEGREE_RAD)
    eta = geometry.nadir_angle_from_elevation(h, eps)
    lam = geometry.central_angle_from_elevation(h, eps)
    assert eta == pytest.approx(46.79 * DEG, abs=HALF_CENTIDEGREE_RAD)
    assert lam == pytest.approx(13.21 * DEG, abs=HALF_CENTIDEGREE_RAD)
    fp = geometry.footprint(h, eps)
    assert fp.central_angle_rad == pytest.approx(lam, abs=ROUNDING_RAD)
    assert fp.nadir_angle_rad == pytest.approx(eta, abs=ROUNDING_RAD)
    assert fp.elevation_rad == pytest.approx(eps, abs=ROUNDING_RAD)
    # Slant range against the law of cosines in the same triangle (plane geometry).
    d_cos = np.sqrt(R**2 + (R + h) ** 2 - 2 * R * (R + h) * np.cos(lam))
    assert fp.slant_range_km == pytest.approx(d_cos, abs=ONE_MILLIMETRE_KM)


def test_geo_horizon_central_angle():
    # Common practice: from GEO (h = 35,786 km) the horizon lies at lambda = arccos(R/(R+h))
    # ~ 81.3 deg (printed to 0.1 deg: 0.05 deg).
    lam = geometry.central_angle_from_elevation(35786.0, 0.0)
    assert lam == pytest.approx(81.3 * DEG, abs=0.05 * DEG)
    assert lam == pytest.approx(np.arccos(R / (R + 35786.0)), abs=ROUNDING_RAD)
    # Horizon slant range is the tangent length sqrt((R+h)^2 - R^2).
    fp = geometry.footprint(35786.0)
    assert fp.slant_range_km == pytest.approx(
        np.sqrt((R + 35786.0) ** 2 - R**2), abs=ONE_MILLIMETRE_KM
    )


def test_nadir_limits_and_round_trip():
    h = np.array([400.0, 1200.0, 20000.0])
    eps = np.array([0.0, 10.0, 45.0]) * DEG
    eta = geometry.nadir_angle_from_elevation(h, eps)
    np.testing.assert_allclose(geometry.elevation_from_nadir(h, eta), eps, rtol=0, atol=1e-7)
    np.testing.assert_allclose(
        geometry.central_angle_from_nadir(h, eta),
        geometry.central_angle_from_elevation(h, eps),
        rtol=0,
        atol=1e-7,  # arccos near 1 at eps = 0 loses half the digits: sqrt(1e-16) rad
    )
    # Straight down: nadir point, zero central angle, range = altitude.
    assert geometry.central_angle_from_nadir(700.0, 0.0) == pytest.approx(0.0, abs=ROUNDING_RAD)
    assert geometry.slant_range_km(700.0, 0.0, 0.0) == 700.0
    # Beyond the limb clamps to the horizon (documented).
    rho = geometry.angular_radius_rho(700.0)
    assert geometry.central_angle_from_nadir(700.0, 80 * DEG) == pytest.approx(
        np.pi / 2 - rho, abs=ROUNDING_RAD
    )
    assert geometry.elevation_from_nadir(700.0, 80 * DEG) == 0.0


def test_footprint_sensor_limit_is_tighter_of_two():
    h = np.array([500.0, 1200.0])
    wide = geometry.footprint(h, 10 * DEG, max_off_nadir_rad=80 * DEG)
    elev_only = geometry.footprint(h, 10 * DEG)
    np.testing.assert_array_equal(wide.central_angle_rad, elev_only.central_angle_rad)
    narrow = geometry.footprint(h, 10 * DEG, max_off_nadir_rad=30 * DEG)
    np.testing.assert_allclose(narrow.nadir_angle_rad, 30 * DEG, rtol=0, atol=ROUNDING_RAD)
    assert np.all(narrow.central_angle_rad < elev_only.central_angle_rad)
    assert np.all(narrow.elevation_rad > 10 * DEG)
    # Angles of the Earth-centre / satellite / edge triangle sum to 90 deg + 90 deg.
    np.testing.assert_allclose(
        narrow.central_angle_rad + narrow.nadir_angle_rad + narrow.elevation_rad,
        np.pi / 2,
        rtol=0,
        atol=ROUNDING_RAD,
    )
    # Scalar inputs give floats, array inputs match the scalar results.
    for k in range(h.size):
        one = geometry.footprint(float(h[k]), 10 * DEG, max_off_nadir_rad=30 * DEG)
        assert isinstance(one.central_angle_rad, float)
        assert one.slant_range_km == pytest.approx(narrow.slant_range_km[k], rel=1e-15)


def test_footprint_bad_input():
    with pytest.raises(ElementError, match="alt_km"):
        geometry.footprint(-5.0)
    with pytest.raises(CovergridError, match="min_elevation_rad"):
        geometry.footprint(500.0, 2.0)
    with pytest.raises(CovergridError, match="min_el_rad"):
        geometry.central_angle_from_elevation(500.0, -0.1)
    with pytest.raises(CovergridError, match="max_off_nadir_rad"):
        geometry.footprint(500.0, 0.0, -0.1)
    with pytest.raises(CovergridError, match="eta_rad"):
        geometry.elevation_from_nadir(500.0, np.nan)
