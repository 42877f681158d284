"""Tests for covergrid.earth.frames: rotations, WGS-84 geodetic coordinates, look angles."""

from __future__ import annotations

import erfa
import numpy as np
import pyproj
import pytest

from covergrid.constants import OMEGA_EARTH_RAD_S, TWO_PI, WGS84_A_KM, WGS84_B_KM
from covergrid.earth.frames import (
    ecef_to_eci,
    ecef_to_eci_velocity,
    ecef_to_geodetic,
    eci_to_ecef,
    eci_to_ecef_velocity,
    enu_basis,
    geodetic_to_ecef,
    look_angles,
    off_nadir_angle,
    subsatellite_point,
    up_vector,
)

# Tolerances (named physical quantities, each with its reason).
ONE_MM_KM = 1e-6  # the accuracy asked of the geodetic conversions
ONE_MICRON_KM = 1e-9  # float64 rounding on Earth-sized vectors is ~1e-12 km; 1 micron is ample
FLOAT_RAD = 1e-12  # pure rotations/identities: float64 rounding only
ONE_MM_AT_1000_KM_RAD = 1e-9  # an angle seen over 1000 km that moves a point by 1 mm
# Central finite difference with step 1 s on an orbit: truncation ~ a_max * dt^2 / 6 with
# centripetal acceleration of the rotating frame ~ omega^2 r = 4e-5 km/s^2 -> 1e-5 km/s.
FINITE_DIFF_KM_S = 2e-5

ECEF_OF_GEODETIC = pyproj.Transformer.from_crs("EPSG:4979", "EPSG:4978", always_xy=True)


def _random_geodetic(rng, n, h_lo_km, h_hi_km):
    lat = np.arcsin(rng.uniform(-1.0, 1.0, n))
    lon = rng.uniform(-np.pi, np.pi, n)
    h = rng.uniform(h_lo_km, h_hi_km, n)
    # Poles, equator and the antimeridian explicitly.
    lat[:6] = [np.pi / 2, -np.pi / 2, 0.0, 0.0, np.pi / 2, -np.pi / 2]
    lon[:6] = [0.0, 1.0, 0.0, -np.pi, -np.pi, 2.5]
    return lat, lon, h


def _pyproj_ecef_km(lat, lon, h):
    x, y, z = ECEF_OF_GEODETIC.transform(np.rad2deg(lon), np.rad2deg(lat), np.asarray(h) * 1e3)
    return np.stack([x, y, z], axis=-1) / 1e3


# --- inertial <-> Earth-fixed ------------------------------------------------------------


def test_eci_to_ecef_matches_erfa_rz():
    # erfa.rz builds the SOFA rotation matrix R3(theta) (iauRz): an independent convention check.
    rng = np.random.default_rng(1)
    r = rng.normal(size=(50, 3)) * 7000.0
    theta = rng.uniform(0.0, TWO_PI, 50)
    mats = erfa.rz(theta, np.broadcast_to(np.eye(3), (50, 3, 3)))
    ref = np.einsum("nij,nj->ni", mats, r)
    np.testing.assert_allclose(eci_to_ecef(r, theta), ref, rtol=0, atol=ONE_MICRON_KM)
    np.testing.assert_allclose(ecef_to_eci(ref, theta), r, rtol=0, atol=ONE_MICRON_KM)


def test_eci_to_ecef_scalar_quarter_turn():
    # Axes turned +90 deg: the inertial x axis appears at -y in the Earth-fixed frame.
    out = eci_to_ecef([7000.0, 0.0, 10.0], np.pi / 2)
    assert out.shape == (3,)
    np.testing.assert_allclose(out, [0.0, -7000.0, 10.0], rtol=0, atol=ONE_MICRON_KM)


def test_eci_to_ecef_broadcasts_sat_time():
    rng = np.random.default_rng(2)
    r = rng.normal(size=(4, 5, 3)) * 7000.0  # (n_sat, n_time, 3)
    theta = np.linspace(0.0, 3.0, 5)  # (n_time,)
    out = eci_to_ecef(r, theta)
    assert out.shape == (4, 5, 3)
    np.testing.assert_allclose(out[2, 3], eci_to_ecef(r[2, 3], theta[3]), rtol=0, atol=0)
    np.testing.assert_allclose(
        np.linalg.norm(out, axis=-1), np.linalg.norm(r, axis=-1), rtol=0, atol=ONE_MICRON_KM
    )


def test_bad_vector_shape_message():
    with pytest.raises(ValueError, match=r"r_eci_km must have its last axis of length 3.*\(4, 2\)"):
        eci_to_ecef(np.zeros((4, 2)), 0.0)


def test_velocity_transform_against_finite_difference():
    # Straight-line inertial motion seen from the rotating frame; differentiate numerically.
    r0 = np.array([6800.0, 1200.0, -300.0])
    v0 = np.array([-1.1, 7.2, 1.3])
    theta0 = 1.234
    dt = 1.0

    def ecef_at(t):
        return eci_to_ecef(r0 + v0 * t, theta0 + OMEGA_EARTH_RAD_S * t)

    v_fd = (ecef_at(dt) - ecef_at(-dt)) / (2.0 * dt)
    v_an = eci_to_ecef_velocity(r0, v0, theta0)
    np.testing.assert_allclose(v_an, v_fd, rtol=0, atol=FINITE_DIFF_KM_S)
    # And back.
    r_e = eci_to_ecef(r0, theta0)
    np.testing.assert_allclose(
        ecef_to_eci_velocity(r_e, v_an, theta0), v0, rtol=0, atol=ONE_MICRON_KM
    )


def test_ground_point_has_zero_earth_fixed_velocity():
    # A point fixed on the Earth moves inertially with omega x r: its ECEF velocity is zero.
    rng = np.random.default_rng(3)
    r_ecef = geodetic_to_ecef(rng.uniform(-1.5, 1.5, 20), rng.uniform(-3, 3, 20), 0.0)
    theta = rng.uniform(0.0, TWO_PI, 20)
    v_eci = ecef_to_eci_velocity(r_ecef, np.zeros_like(r_ecef), theta)
    np.testing.assert_allclose(
        np.linalg.norm(v_eci, axis=-1),
        OMEGA_EARTH_RAD_S * np.hypot(r_ecef[:, 0], r_ecef[:, 1]),
        rtol=1e-12,
    )
    r_eci = ecef_to_eci(r_ecef, theta)
    v_back = eci_to_ecef_velocity(r_eci, v_eci, theta)
    np.testing.assert_allclose(v_back, 0.0, rtol=0, atol=ONE_MICRON_KM)


# --- geodetic <-> ECEF -------------------------------------------------------------------


def test_geodetic_to_ecef_matches_pyproj():
    # PROJ's EPSG:4979 -> EPSG:4978 (WGS 84 geographic 3D -> geocentric), closed form.
    rng = np.random.default_rng(4)
    lat, lon, h = _random_geodetic(rng, 5000, -1.0, 40000.0)
    ours = geodetic_to_ecef(lat, lon, h)
    assert ours.shape == (5000, 3)
    err = np.linalg.norm(ours - _pyproj_ecef_km(lat, lon, h), axis=-1)
    assert err.max() < ONE_MM_KM


def test_geodetic_to_ecef_scalar_and_axes():
    # On the equator at lon 0 the point is (a, 0, 0); at the pole (0, 0, b) (WGS-84 a and b).
    np.testing.assert_allclose(geodetic_to_ecef(0.0, 0.0), [WGS84_A_KM, 0, 0], atol=ONE_MICRON_KM)
    np.testing.assert_allclose(
        geodetic_to_ecef(np.pi / 2, 0.3, 1.0), [0, 0, WGS84_B_KM + 1.0], atol=ONE_MICRON_KM
    )


def test_ecef_to_geodetic_inverse_via_pyproj_forward_all_heights():
    # Our inverse, mapped forward again by PROJ's exact closed form, must land on the input:
    # this checks the inverse to 1 mm from -100 km to 100 000 km without trusting our forward.
    rng = np.random.default_rng(5)
    lat, lon, h = _random_geodetic(rng, 5000, -100.0, 100000.0)
    r = _pyproj_ecef_km(lat, lon, h)
    lat2, lon2, h2 = ecef_to_geodetic(r)
    assert lat2.shape == lon2.shape == h2.shape == (5000,)
    err = np.linalg.norm(_pyproj_ecef_km(lat2, lon2, h2) - r, axis=-1)
    assert err.max() < ONE_MM_KM
    assert np.max(np.abs(h2 - h)) < ONE_MM_KM
    assert np.max(np.abs(lat2 - lat)) < ONE_MM_AT_1000_KM_RAD / 100.0


def test_ecef_to_geodetic_matches_pyproj_inverse_low_heights():
    # PROJ's inverse (EPSG:4978 -> 4979) takes a single Bowring step; measured against its own
    # forward it is good to 1e-4 m at 100 km height but drifts to ~0.4 m above 10 000 km, so
    # the direct comparison is only meaningful at low heights (-1 to 100 km here).
    rng = np.random.default_rng(6)
    lat, lon, h = _random_geodetic(rng, 5000, -1.0, 100.0)
    r = _pyproj_ecef_km(lat, lon, h)
    lon_p, lat_p, h_p = ECEF_OF_GEODETIC.transform(
        r[:, 0] * 1e3, r[:, 1] * 1e3, r[:, 2] * 1e3, direction="INVERSE"
    )
    lat2, lon2, h2 = ecef_to_geodetic(r)
    assert np.max(np.abs(h2 - h_p / 1e3)) < ONE_MM_KM
    # 1 mm of ground distance at the Earth's surface is 1.6e-10 rad of latitude.
    assert np.max(np.abs(lat2 - np.deg2rad(lat_p))) < ONE_MM_KM / WGS84_A_KM
    dlon = np.angle(np.exp(1j * (lon2 - np.deg2rad(lon_p))))
    assert np.max(np.abs(dlon * np.cos(lat2))) < ONE_MM_KM / WGS84_A_KM


def test_ecef_to_geodetic_scalar_special_points():
    lat, lon, h = ecef_to_geodetic([0.0, 0.0, -(WGS84_B_KM + 500.0)])
    assert lat.shape == ()
    assert lat == -np.pi / 2
    assert abs(h - 500.0) < ONE_MM_KM
    lat, lon, h = ecef_to_geodetic([-WGS84_A_KM, 0.0, 0.0])
    assert lat == 0.0
    assert lon == -np.pi  # wrapped into [-pi, pi)
    assert abs(h) < ONE_MM_KM


# --- local frame -------------------------------------------------------------------------


def test_up_vector_is_ellipsoid_normal():
    # The gradient of x^2/a^2 + y^2/a^2 + z^2/b^2 at a surface point is the outward normal.
    rng = np.random.default_rng(7)
    lat = rng.uniform(-np.pi / 2, np.pi / 2, 300)
    lon = rng.uniform(-np.pi, np.pi, 300)
    p = geodetic_to_ecef(lat, lon)
    grad = p / np.array([WGS84_A_KM**2, WGS84_A_KM**2, WGS84_B_KM**2])
    grad /= np.linalg.norm(grad, axis=-1, keepdims=True)
    up = up_vector(lat, lon)
    assert up.shape == (300, 3)
    np.testing.assert_allclose(up, grad, rtol=0, atol=FLOAT_RAD)
    np.testing.assert_allclose(up_vector(0.0, 0.0), [1.0, 0.0, 0.0], atol=FLOAT_RAD)


def test_enu_basis_orthonormal_right_handed():
    rng = np.random.default_rng(8)
    lat = rng.uniform(-np.pi / 2, np.pi / 2, (10, 3))
    lon = rng.uniform(-np.pi, np.pi, (10, 3))
    east, north, up = enu_basis(lat, lon)
    assert east.shape == north.shape == up.shape == (10, 3, 3)
    eye = np.stack([east, north, up], axis=-2) @ np.swapaxes(
        np.stack([east, north, up], -2), -1, -2
    )
    np.testing.assert_allclose(eye, np.broadcast_to(np.eye(3), eye.shape), atol=FLOAT_RAD)
    np.testing.assert_allclose(np.cross(east, north), up, atol=FLOAT_RAD)
    # North points towards the pole: positive z component away from the poles.
    assert np.all(north[..., 2] >= 0.0)


# --- look angles -------------------------------------------------------------------------


def test_look_angles_zenith_and_horizon_scalar():
    lat, lon, h = np.deg2rad(35.0), np.deg2rad(139.0), 0.05
    zenith = geodetic_to_ecef(lat, lon, 800.0)
    az, el, rng_km = look_angles(lat, lon, h, zenith)
    assert el.shape == ()
    assert abs(el - np.pi / 2) < FLOAT_RAD * 1e3  # atan2 near 90 deg: 1e-9 rad
    assert abs(rng_km - 799.95) < ONE_MICRON_KM * 1e3
    site = geodetic_to_ecef(lat, lon, h)
    east, north, _ = enu_basis(lat, lon)
    az, el, _ = look_angles(lat, lon, h, site + 1500.0 * east)
    assert abs(el) < FLOAT_RAD and abs(az - np.pi / 2) < FLOAT_RAD
    az, el, _ = look_angles(lat, lon, h, site + 1500.0 * north)
    assert abs(el) < FLOAT_RAD and (az < FLOAT_RAD or az > TWO_PI - FLOAT_RAD)
    az, _, _ = look_angles(lat, lon, h, site - 1500.0 * east)
    assert abs(az - 1.5 * np.pi) < FLOAT_RAD


def test_look_angles_match_pyproj_topocentric():
    # Independent ENU: PROJ's "topocentric" conversion (EPSG method 9837, geocentric to
    # topocentric, IOGP Guidance Note 7-2) from the site to each satellite.
    rng = np.random.default_rng(9)
    sites = [(52.0, 4.4, 0.0), (-33.9, 18.4, 0.3), (78.2, 15.6, 0.5), (0.0, -179.9, 2.0)]
    sat = geodetic_to_ecef(
        np.arcsin(rng.uniform(-1, 1, 400)),
        rng.uniform(-np.pi, np.pi, 400),
        rng.uniform(300.0, 36000.0, 400),
    )
    for lat_deg, lon_deg, h_km in sites:
        topo = pyproj.Transformer.from_pipeline(
            f"+proj=topocentric +ellps=WGS84 +lat_0={lat_deg} +lon_0={lon_deg} +h_0={h_km * 1e3}"
        )
        e, n, u = topo.transform(sat[:, 0] * 1e3, sat[:, 1] * 1e3, sat[:, 2] * 1e3)
        ref_az = np.mod(np.arctan2(e, n), TWO_PI)
        ref_el = np.arctan2(u, np.hypot(e, n))
        ref_rng = np.sqrt(e * e + n * n + u * u) / 1e3
        az, el, rng_km = look_angles(np.deg2rad(lat_deg), np.deg2rad(lon_deg), h_km, sat)
        # 1 mm across the longest range (~42 000 km) is 2.4e-11 rad; allow 1e-9 rad (4 cm).
        assert np.max(np.abs(np.angle(np.exp(1j * (az - ref_az))))) < ONE_MM_AT_1000_KM_RAD
        assert np.max(np.abs(el - ref_el)) < ONE_MM_AT_1000_KM_RAD
        assert np.max(np.abs(rng_km - ref_rng)) < ONE_MM_KM
        assert np.all((az >= 0.0) & (az < TWO_PI))


def test_look_angles_broadcast_sites_against_satellites():
    rng = np.random.default_rng(10)
    lat = rng.uniform(-1.0, 1.0, 6)
    lon = rng.uniform(-3.0, 3.0, 6)
    sat = geodetic_to_ecef(rng.uniform(-1, 1, 7), rng.uniform(-3, 3, 7), 700.0)
    az, el, rr = look_angles(lat[:, None], lon[:, None], 0.0, sat[None, :, :])
    assert az.shape == el.shape == rr.shape == (6, 7)
    a1, e1, r1 = look_angles(lat[4], lon[4], 0.0, sat[2])
    np.testing.assert_allclose([az[4, 2], el[4, 2], rr[4, 2]], [a1, e1, r1], rtol=0, atol=0)


# --- sub-satellite point and off-nadir angle ---------------------------------------------


def test_subsatellite_point_scalar_and_array():
    lat, lon = subsatellite_point(geodetic_to_ecef(0.7, np.pi, 550.0))
    assert lat.shape == ()
    assert abs(lat - 0.7) < FLOAT_RAD
    assert lon == pytest.approx(-np.pi, abs=FLOAT_RAD)
    assert lon < np.pi  # wrapped into [-pi, pi)
    rng = np.random.default_rng(11)
    la = rng.uniform(-1.5, 1.5, 100)
    lo = rng.uniform(-np.pi, np.pi, 100)
    lat, lon = subsatellite_point(geodetic_to_ecef(la, lo, rng.uniform(300.0, 40000.0, 100)))
    np.testing.assert_allclose(lat, la, atol=FLOAT_RAD)
    np.testing.assert_allclose(lon, lo, atol=FLOAT_RAD)


def test_off_nadir_angle_smad_worked_numbers():
    # Wertz and Larson, Space Mission Analysis and Design, 3rd ed., sec. 5.2 formulas:
    # sin(rho) = Re/(Re+h), sin(eta) = cos(eps) sin(rho), lambda = 90 - eta - eps.
    # Worked numbers (Jeon and Park, AAS 25-254, 2025): h = 1200 km, eps = 30 deg ->
    # rho = 57.31, eta = 46.79, lambda = 13.21 deg. Spherical Earth of radius 6378.137 km
    # (the worked numbers reproduce with it). Values are printed to 0.01 deg: lambda carries
    # +-0.005 deg, which moves eta by d(eta)/d(lambda) = 1.6 times that here, and eta itself
    # carries +-0.005 deg: 0.005 * (1 + 1.6) = 0.013 deg, rounded up to 0.015 deg.
    printed_digits_rad = np.deg2rad(0.015)
    re_km, h_km = 6378.137, 1200.0
    lam = np.deg2rad(13.21)
    sat = np.array([re_km + h_km, 0.0, 0.0])
    target = re_km * np.array([np.cos(lam), np.sin(lam), 0.0])
    eta = off_nadir_angle(sat, target)
    assert eta.shape == ()
    assert abs(eta - np.deg2rad(46.79)) < printed_digits_rad
    assert abs(np.arcsin(re_km / (re_km + h_km)) - np.deg2rad(57.31)) < printed_digits_rad


def test_off_nadir_angle_array_cases():
    sat = np.array([[7000.0, 0.0, 0.0], [0.0, 0.0, -8000.0]])
    below = sat * 0.9  # on the geocentric nadir line: angle 0
    np.testing.assert_allclose(off_nadir_angle(sat, below), 0.0, atol=FLOAT_RAD)
    # Perpendicular offset d at distance L below the satellite: angle atan(d / L).
    tgt = np.array([[6000.0, 300.0, 0.0], [0.0, 400.0, -7000.0]])
    np.testing.assert_allclose(
        off_nadir_angle(sat, tgt), np.arctan2([300.0, 400.0], 1000.0), atol=FLOAT_RAD
    )
    # Broadcasting one satellite against many targets.
    assert off_nadir_angle(sat[0], np.zeros((5, 3))).shape == (5,)
