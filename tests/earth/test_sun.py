"""Tests for covergrid.earth.sun: low-precision Sun and solar elevation."""

from __future__ import annotations

import warnings

import numpy as np
from astropy import units as u
from astropy.coordinates import AltAz, EarthLocation, PrecessedGeocentric, get_sun
from astropy.time import Time
from astropy.utils import iers

from covergrid.constants import AU_KM
from covergrid.earth.frames import eci_to_ecef
from covergrid.earth.sun import solar_elevation_rad, sun_direction_eci, sun_position_eci_km
from covergrid.earth.time import gmst_rad, parse_epoch

iers.conf.auto_download = False  # tests run offline; dates below stay inside bundled tables

# Tolerances (named physical quantities, each with its reason).
# Vallado's Example 5-1 uses the same low-precision theory with coefficients to more digits
# (1.914666471 deg vs the Almanac's 1.915 deg, i.e. up to 3.3e-4 deg) and TT for part of the
# argument (65 s = 7e-4 deg of solar motion); values printed to 1e-4 deg. Sum ~1.1e-3 deg.
VALLADO_EX51_DEG = 0.002
# Astronomical Almanac, Section C: stated accuracy 0.01 deg for 1950-2050; we feed UTC instead
# of TT (up to 69 s = 0.0008 deg of solar motion), so 0.0108 deg, written 0.011 deg.
ALMANAC_DEG = 0.011
# Astropy AltAz also applies nutation (|dpsi| <= 17.2 arcsec, |deps| <= 9.2 arcsec: together
# <= 0.0074 deg), UT1 - UTC (<= 0.9 s of rotation = 0.0038 deg) and polar motion (< 0.5 arcsec),
# which covergrid leaves out by design. 0.011 + 0.0074 + 0.0038 + 0.0002 = 0.0224 deg; written
# 0.025 deg. (Largest difference seen with the seed below: 0.022 deg.)
ALTAZ_MODEL_DEG = 0.025
# The Almanac distance series omits the Moon's pull on the Earth (Earth-Moon barycentre offset
# 4700 km = 3e-5 au) and planetary terms; seen against astropy over 1950-2050: <= 8.4e-5 au.
# 2e-4 au keeps a factor ~2 margin over what was seen.
ALMANAC_DISTANCE_AU = 2e-4
# Solar parallax 8.8 arcsec (common practice): the topocentric Sun is off the geocentric
# direction by at most 4.3e-5 rad; 5e-5 rad covers it.
PARALLAX_RAD = 5e-5


def _angle_between(a, b):
    cross = np.linalg.norm(np.cross(a, b), axis=-1)
    return np.arctan2(cross, np.sum(a * b, axis=-1))


def test_sun_vallado_example_5_1():
    # Vallado, Fundamentals of Astrodynamics and Applications, 5th ed., Example 5-1:
    # 2006-04-01 23:58:54.816 UTC -> RA = 11.1406 deg, Dec = 4.7883 deg (mean of date).
    r = sun_position_eci_km(parse_epoch("2006-04-01T23:58:54.816Z"))
    assert r.shape == (3,)
    ra_deg = np.rad2deg(np.arctan2(r[1], r[0])) % 360.0
    dec_deg = np.rad2deg(np.arcsin(r[2] / np.linalg.norm(r)))
    assert abs(ra_deg - 11.1406) < VALLADO_EX51_DEG
    assert abs(dec_deg - 4.7883) < VALLADO_EX51_DEG


def test_sun_matches_astropy_mean_of_date():
    # astropy get_sun (GCRS, apparent, from the ERFA epv00 ephemeris) turned into the mean
    # equator and equinox of date (PrecessedGeocentric: precession only, no nutation), which
    # is covergrid's inertial frame.
    rng = np.random.default_rng(1950)
    epoch = parse_epoch("1950-01-01T00:00:00Z")
    offsets = rng.uniform(0.0, 100.0 * 365.25 * 86400.0, 3000)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # ERFA "dubious year" for dates past the leap table
        t = Time(epoch, scale="utc") + offsets * u.s
        sun = get_sun(t).transform_to(PrecessedGeocentric(equinox=t, obstime=t))
    ref_km = sun.cartesian.xyz.to_value(u.km).T
    ours = sun_position_eci_km(epoch, offsets)
    assert ours.shape == (3000, 3)
    assert np.rad2deg(_angle_between(ours, ref_km)).max() < ALMANAC_DEG
    dist_err_au = np.abs(np.linalg.norm(ours, axis=-1) - np.linalg.norm(ref_km, axis=-1)) / AU_KM
    assert dist_err_au.max() < ALMANAC_DISTANCE_AU


def test_sun_direction_is_unit_and_broadcasts():
    epochs = np.array(["2027-03-01", "2027-06-21"], dtype="datetime64[ns]")
    d = sun_direction_eci(epochs[:, None], np.array([0.0, 3600.0, 7200.0])[None, :])
    assert d.shape == (2, 3, 3)
    np.testing.assert_allclose(np.linalg.norm(d, axis=-1), 1.0, rtol=1e-15)
    # Near the June solstice the declination is close to the obliquity 23.44 deg (common
    # practice); the Sun's declination changes < 0.01 deg/day there and 2027-06-21 is within
    # a day of the solstice (from memory: 2027-06-21 about 14 h UTC).
    assert abs(np.rad2deg(np.arcsin(d[1, 0, 2])) - 23.44) < 0.05


def test_solar_elevation_subsolar_and_antisolar_points():
    # The point whose ellipsoid normal points at the Sun sees it at the zenith (up to the
    # 8.8 arcsec parallax); the opposite point sees it at the nadir.
    epoch = parse_epoch("2027-03-01T00:00:00Z")
    offsets = np.linspace(0.0, 86400.0 * 200.0, 37)
    s_ecef = eci_to_ecef(sun_direction_eci(epoch, offsets), gmst_rad(epoch, offsets))
    lat = np.arcsin(s_ecef[:, 2])
    lon = np.arctan2(s_ecef[:, 1], s_ecef[:, 0])
    el = solar_elevation_rad(lat, lon, epoch, offsets)
    assert el.shape == offsets.shape
    np.testing.assert_allclose(el, np.pi / 2, atol=PARALLAX_RAD)
    el_night = solar_elevation_rad(-lat, lon + np.pi, epoch, offsets)
    np.testing.assert_allclose(el_night, -np.pi / 2, atol=PARALLAX_RAD)


def test_solar_elevation_scalar_and_grid_broadcast():
    epoch = parse_epoch("2027-03-01T12:00:00Z")
    el = solar_elevation_rad(0.0, 0.0, epoch)
    assert el.shape == ()
    # Greenwich meridian at 12:00 UTC on 1 March: the Sun is within ~13 min (equation of
    # time, common practice: about -12 min in early March) of transit, so high in the sky:
    # at least 90 - 8 (declination) - 4 (hour angle) deg.
    assert np.rad2deg(el) > 78.0
    lat = np.deg2rad(np.array([-60.0, 0.0, 45.0, 80.0]))
    lon = np.deg2rad(np.array([10.0, -120.0, 30.0, 170.0]))
    offsets = np.array([0.0, 21600.0, 43200.0])
    grid = solar_elevation_rad(lat[:, None], lon[:, None], epoch, offsets[None, :])
    assert grid.shape == (4, 3)
    assert grid[2, 1] == solar_elevation_rad(lat[2], lon[2], epoch, offsets[1])


def test_solar_elevation_matches_astropy_altaz():
    # astropy AltAz of get_sun (no refraction: pressure = 0), dates 2000-2020 so that the
    # bundled IERS-B table gives UT1 and polar motion without a download.
    rng = np.random.default_rng(2000)
    epoch = parse_epoch("2000-01-01T00:00:00Z")
    offsets = rng.uniform(0.0, 20.0 * 365.25 * 86400.0, 300)
    lat_deg = rng.uniform(-80.0, 80.0, 300)
    lon_deg = rng.uniform(-180.0, 180.0, 300)
    t = Time(epoch, scale="utc") + offsets * u.s
    site = EarthLocation.from_geodetic(lon_deg * u.deg, lat_deg * u.deg, 0.0 * u.m)
    ref = get_sun(t).transform_to(AltAz(location=site, obstime=t, pressure=0.0 * u.hPa))
    el = solar_elevation_rad(np.deg2rad(lat_deg), np.deg2rad(lon_deg), epoch, offsets)
    assert np.max(np.abs(np.rad2deg(el) - ref.alt.deg)) < ALTAZ_MODEL_DEG
