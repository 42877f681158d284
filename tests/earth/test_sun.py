"""Tests for covergrid.earth.sun: low-precision Sun and solar elevation."""

from __future__ import annotations

import warnings

import numpy as np
import pytest
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


# --- the mean Sun and local times of the ascending node ---------------------------------
# The Almanac's mean longitude L = 280.460 deg + 0.9856474 deg/day n is printed to 5e-4 deg,
# its rate differs from the IAU 1982 sidereal polynomial's by 3.4e-8 deg/day (6e-4 deg over
# 50 years either side of J2000), and the quadratic term of the sidereal polynomial adds
# 2e-4 deg by 1950 and 2050: 0.0013 deg together; written 0.002 deg.
MEAN_LONGITUDE_DEG = 0.002
# The equation of time is printed to 0.1 min in the table below (from memory); astropy's
# true Sun against our mean Sun also carries nutation in right ascension (<= 1.1 s of time)
# and UT1 = UTC: 0.1 min + 0.02 min, written 0.15 min.
EQUATION_OF_TIME_MIN = 0.15


def test_mean_sun_follows_the_almanac_mean_longitude():
    # Astronomical Almanac, Section C, low-precision formulas: the Sun's mean longitude
    # L = 280.460 deg + 0.9856474 deg n (n days from J2000), 1950-2050. The mean Sun of
    # mean solar time moves along the equator with right ascension L.
    from covergrid.earth.sun import mean_sun_right_ascension_rad
    from covergrid.earth.time import julian_date

    epoch = parse_epoch("1950-01-01T00:00:00Z")
    offsets = np.linspace(0.0, 100.0 * 365.25 * 86400.0, 2001)
    whole, frac = julian_date(epoch, offsets)
    n = whole - 2451545.0 + frac
    mean_lon_deg = np.mod(280.460 + 0.9856474 * n, 360.0)
    ours_deg = np.rad2deg(mean_sun_right_ascension_rad(epoch, offsets))
    diff = (ours_deg - mean_lon_deg + 180.0) % 360.0 - 180.0
    assert np.max(np.abs(diff)) < MEAN_LONGITUDE_DEG


@pytest.mark.parametrize(("date", "eot_min"), [
    # Equation of time (apparent minus mean solar time), common practice, from memory: its
    # extremes of about -14.2 min (11-12 February), +3.7 min (14 May), -6.5 min (26 July)
    # and +16.4 min (3 November) move by well under 0.1 min from year to year.
    ("2031-02-11T12:00:00", -14.2), ("2031-05-14T12:00:00", 3.7),
    ("2031-07-26T12:00:00", -6.5), ("2031-11-03T12:00:00", 16.4),
])
def test_mean_sun_against_astropy_true_sun_is_the_equation_of_time(date, eot_min):
    # True Sun: astropy get_sun in the mean equator and equinox of date (see
    # test_sun_matches_astropy_mean_of_date). Apparent solar time runs ahead of mean time by
    # (RA of the mean Sun - RA of the true Sun) / 15 deg/h.
    from covergrid.earth.sun import mean_sun_right_ascension_rad

    with warnings.catch_warnings():
        # ERFA "dubious year" past the leap-second table (raised by the UTC date itself)
        warnings.simplefilter("ignore")
        t = Time(date, scale="utc")
        true_ra = get_sun(t).transform_to(PrecessedGeocentric(equinox=t, obstime=t)).ra.rad
    mean_ra = float(mean_sun_right_ascension_rad(parse_epoch(date + "Z")))
    eot = np.rad2deg((mean_ra - true_ra + np.pi) % (2 * np.pi) - np.pi) * 4.0  # min of time
    assert eot == pytest.approx(eot_min, abs=EQUATION_OF_TIME_MIN)


def test_raan_for_local_time_puts_the_node_at_that_mean_solar_time():
    # Local mean solar time at a meridian = UT + east longitude / (15 deg/h) (common
    # practice; UT1 taken as UTC). The node of RAAN Omega lies at Earth-fixed longitude
    # Omega - GMST at the epoch.
    from covergrid.earth.sun import raan_for_local_time_rad

    for text in ("2031-03-20T00:00:00Z", "2027-08-01T17:45:30Z", "1999-12-31T23:59:00Z"):
        epoch = parse_epoch(text)
        ut_h = float((epoch - epoch.astype("datetime64[D]")) / np.timedelta64(1, "s")) / 3600.0
        ltan = np.array([0.0, 6.0, 10.5, 13.75, 22.0])
        raan = raan_for_local_time_rad(ltan, epoch)
        lon = raan - gmst_rad(epoch)
        lmst = ut_h + np.rad2deg(lon) / 15.0
        np.testing.assert_allclose((lmst - ltan + 12.0) % 24.0 - 12.0, 0.0, atol=1e-9)
    assert raan_for_local_time_rad(10.5, "2031-03-20T00:00:00Z").shape == ()
