"""Tests for covergrid.earth.time: epoch parsing, split Julian dates, sidereal angle."""

from __future__ import annotations

import datetime as dt
import warnings

import erfa
import numpy as np
import pytest

from covergrid.constants import TWO_PI
from covergrid.earth.time import (
    EpochError,
    earth_rotation_angle_rad,
    epoch_to_iso,
    gmst_rad,
    julian_date,
    parse_epoch,
)
from covergrid.errors import CovergridError

# Tolerances (named physical quantities, each with its reason).
ONE_NS_DAY = 1e-9 / 86400.0  # one nanosecond as a day fraction: the epoch is held in ns
# Same IAU 1982 model as ERFA gmst82, so only float rounding separates the two: 1e-9 rad
# (0.2 mas; 6 microns of ground motion at the equator).
SAME_MODEL_RAD = 1e-9
# IAU 2006 GMST (erfa.gmst06) differs from IAU 1982 mainly by the IAU 2000 precession-rate
# correction, about -0.3 arcsec per century in longitude (Capitaine et al., A&A 412, 2003;
# from memory), so within |T| <= 0.5 century of J2000 the models differ by up to ~0.15 arcsec.
# 0.2 arcsec allows that plus the small constant-term change.
IAU82_VS_IAU06_RAD = np.deg2rad(0.2 / 3600.0)
# Vallado's printed result for Example 3-5 has nine decimals of a degree; ERFA gmst82 and
# covergrid agree with each other to 1e-12 rad but both sit 4.2e-8 deg from the printed value,
# which we attribute to the book's arithmetic. 1e-7 deg = 0.36 mas.
VALLADO_EX35_DEG = 1e-7


def _wrap_diff(a, b):
    """Signed angle difference folded to (-pi, pi]."""
    return np.angle(np.exp(1j * (np.asarray(a) - np.asarray(b))))


# --- parse_epoch -------------------------------------------------------------------------


@pytest.mark.parametrize(
    ("text", "expected"),
    [
        ("2027-03-01T00:00:00Z", "2027-03-01T00:00:00"),
        ("2027-03-01T00:00:00+00:00", "2027-03-01T00:00:00"),
        ("2027-03-01 00:00:00", "2027-03-01T00:00:00"),  # naive: taken as UTC
        ("2027-03-01", "2027-03-01T00:00:00"),
        ("2027-03-01T00:00Z", "2027-03-01T00:00:00"),
        ("2027-03-01T02:00:00+02:00", "2027-03-01T00:00:00"),
        ("2027-03-01T02:00:00+0200", "2027-03-01T00:00:00"),
        ("2027-02-28T19:30:00-04:30", "2027-03-01T00:00:00"),
        ("2027-03-01T00:30:00+01", "2027-02-28T23:30:00"),
        ("2027-03-01T12:30:45.25Z", "2027-03-01T12:30:45.250"),
        ("2027-03-01T12:30:45.123456789Z", "2027-03-01T12:30:45.123456789"),
        ("  2027-03-01T12:30:45,5Z ", "2027-03-01T12:30:45.5"),
    ],
)
def test_parse_epoch_forms(text, expected):
    got = parse_epoch(text)
    assert got.dtype == np.dtype("datetime64[ns]")
    assert got == np.datetime64(expected, "ns")


def test_parse_epoch_offset_crosses_year_boundary():
    assert parse_epoch("2027-01-01T01:00:00+03:00") == np.datetime64("2026-12-31T22:00", "ns")


@pytest.mark.parametrize(
    ("text", "match"),
    [
        ("tomorrow", r"not an ISO 8601 date-time: got 'tomorrow'.*2027-03-01T00:00:00Z"),
        ("2027-02-30T00:00:00Z", r"not a real date-time.*'2027-02-30T00:00:00Z'"),
        ("2027-13-01", r"not a real date-time"),
        ("2027-03-01T24:00:00", r"not a real date-time"),
        ("2016-12-31T23:59:60Z", r"leap second 60"),
        ("2027-03-01T00:00:00+25:00", r"UTC offset is out of range"),
        ("1899-12-31T23:59:59Z", r"year 1899 is outside the supported range.*1900 to 2100"),
        ("2101-01-01T00:00:00Z", r"year 2101 is outside"),
        ("2027/03/01 00:00", r"not an ISO 8601"),
        ("2027-03-01T00:00:00.1234567890Z", r"not an ISO 8601"),
    ],
)
def test_parse_epoch_errors(text, match):
    with pytest.raises(EpochError, match=match) as info:
        parse_epoch(text)
    assert isinstance(info.value, CovergridError)
    assert isinstance(info.value, ValueError)


def test_parse_epoch_error_names_field_and_rejects_non_text():
    with pytest.raises(EpochError, match=r"^study\.epoch: epoch must be text, not int"):
        parse_epoch(20270301, field="study.epoch")


def test_parse_epoch_year_limits_after_offset():
    # 2100-12-31T23:00-02:00 is 2101-01-01T01:00Z: outside once converted to UTC.
    with pytest.raises(EpochError, match="2101"):
        parse_epoch("2100-12-31T23:00:00-02:00")
    assert parse_epoch("1900-01-01T00:00:00Z") == np.datetime64("1900-01-01", "ns")


# --- epoch_to_iso ------------------------------------------------------------------------


@pytest.mark.parametrize(
    "text",
    [
        "2027-03-01T00:00:00Z",
        "1992-08-20T12:14:00Z",
        "2027-03-01T12:30:45.25Z",
        "2050-12-31T23:59:59.000000001Z",
    ],
)
def test_epoch_to_iso_round_trip(text):
    assert epoch_to_iso(parse_epoch(text)) == text


def test_epoch_to_iso_accepts_text_and_aware_datetime():
    assert epoch_to_iso("2027-03-01T02:00:00+02:00") == "2027-03-01T00:00:00Z"
    aware = dt.datetime(2027, 3, 1, 2, 0, tzinfo=dt.timezone(dt.timedelta(hours=2)))
    assert epoch_to_iso(aware) == "2027-03-01T00:00:00Z"


def test_epoch_to_iso_rejects_array():
    with pytest.raises(EpochError, match="one epoch"):
        epoch_to_iso(np.array(["2027-03-01", "2027-03-02"], dtype="datetime64[ns]"))


def test_datetime64_epoch_outside_years_rejected():
    with pytest.raises(EpochError, match="outside the supported range"):
        julian_date(np.datetime64("1850-01-01", "ns"))


# --- julian_date -------------------------------------------------------------------------


def test_julian_date_j2000_scalar():
    # JD 2451545.0 = 2000-01-01 12:00 (IAU definition of J2000.0, common practice).
    whole, frac = julian_date(np.datetime64("2000-01-01T12:00:00", "ns"))
    assert whole.shape == () and frac.shape == ()
    assert whole == 2451544.5
    assert frac == 0.5


def test_julian_date_matches_erfa_dtf2d():
    # erfa.dtf2d converts a calendar date to a two-part JD (SOFA/ERFA reference library).
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", erfa.ErfaWarning)
        j1, j2 = erfa.dtf2d("UT1", 1992, 8, 20, 12, 14, 0.0)
    whole, frac = julian_date(parse_epoch("1992-08-20T12:14:00Z"))
    assert abs((whole - j1) + (frac - j2)) < ONE_NS_DAY


def test_julian_date_array_offsets_and_carry():
    epoch = parse_epoch("2027-03-01T00:00:00Z")
    offsets = np.array([-1.0, 0.0, 0.5, 86399.999999, 86400.0, 1.5 * 86400.0])
    whole, frac = julian_date(epoch, offsets)
    assert whole.shape == offsets.shape
    assert np.all((frac >= 0.0) & (frac < 1.0))
    # Whole parts are always midnight (N + 0.5).
    np.testing.assert_array_equal(np.mod(whole, 1.0), 0.5)
    base = 2461465.5  # 2027-03-01 0h: JD of 1970-01-01 (2440587.5) + 20878 days
    total = (whole - base) + frac
    np.testing.assert_allclose(total * 86400.0, offsets, rtol=0, atol=1e-6)


def test_julian_date_array_epochs_broadcast():
    epochs = np.array(["2027-03-01", "2027-03-02"], dtype="datetime64[ns]")
    whole, frac = julian_date(epochs[:, None], np.array([0.0, 43200.0])[None, :])
    assert whole.shape == (2, 2)
    np.testing.assert_array_equal(whole, [[2461465.5, 2461465.5], [2461466.5, 2461466.5]])
    np.testing.assert_array_equal(frac, [[0.0, 0.5], [0.0, 0.5]])


# --- gmst_rad ----------------------------------------------------------------------------


def test_gmst_vallado_example_3_5():
    # Vallado, Fundamentals of Astrodynamics and Applications, 5th ed., Example 3-5:
    # 1992-08-20 12:14:00 UT1 -> GMST (IAU 1982) = 152.578787810 deg (exact JD used).
    theta = gmst_rad(parse_epoch("1992-08-20T12:14:00Z"))
    assert theta.shape == ()
    assert abs(np.rad2deg(theta) - 152.578787810) < VALLADO_EX35_DEG


def test_gmst_matches_erfa_gmst82_on_random_dates():
    # pyerfa gmst82 implements the same IAU 1982 expression (SOFA iauGmst82).
    rng = np.random.default_rng(20270301)
    epoch = parse_epoch("1950-01-01T00:00:00Z")
    offsets = rng.uniform(0.0, 100.0 * 365.25 * 86400.0, 4000)
    theta = gmst_rad(epoch, offsets)
    whole, frac = julian_date(epoch, offsets)
    ref = erfa.gmst82(whole, frac)
    assert theta.shape == offsets.shape
    assert np.all((theta >= 0.0) & (theta < TWO_PI))
    assert np.max(np.abs(_wrap_diff(theta, ref))) < SAME_MODEL_RAD


def test_gmst_close_to_erfa_gmst06():
    rng = np.random.default_rng(7)
    epoch = parse_epoch("1950-01-01T00:00:00Z")
    offsets = rng.uniform(0.0, 100.0 * 365.25 * 86400.0, 2000)
    whole, frac = julian_date(epoch, offsets)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", erfa.ErfaWarning)  # future leap seconds unknown
        tai1, tai2 = erfa.utctai(whole, frac)
        tt1, tt2 = erfa.taitt(tai1, tai2)
    ref = erfa.gmst06(whole, frac, tt1, tt2)
    diff = np.abs(_wrap_diff(gmst_rad(epoch, offsets), ref))
    assert np.max(diff) < IAU82_VS_IAU06_RAD


def test_gmst_rate_is_sidereal():
    # One sidereal day of 86164.0905 s (common practice) brings the angle back. That day is
    # printed to 1e-4 s, i.e. 1e-4 s * 7.29e-5 rad/s = 7.3e-9 rad of rotation.
    sidereal_day_digits_rad = 1e-4 * 7.3e-5
    epoch = parse_epoch("2027-03-01T00:00:00Z")
    th = gmst_rad(epoch, np.array([0.0, 86164.0905]))
    assert abs(_wrap_diff(th[1], th[0])) < sidereal_day_digits_rad


def test_gmst_epoch_offset_consistency():
    # The same instant written two ways gives the same angle (split-date precision).
    a = gmst_rad(parse_epoch("2027-03-01T00:00:00Z"), 10.0 * 86400.0 + 3723.5)
    b = gmst_rad(parse_epoch("2027-03-11T01:02:03.5Z"))
    assert abs(_wrap_diff(a, b)) < SAME_MODEL_RAD


def test_earth_rotation_angle_matches_erfa_era00():
    # IERS Conventions (2010) eq. 5.15, as implemented by SOFA/ERFA iauEra00.
    rng = np.random.default_rng(11)
    epoch = parse_epoch("1950-01-01T00:00:00Z")
    offsets = rng.uniform(0.0, 100.0 * 365.25 * 86400.0, 2000)
    whole, frac = julian_date(epoch, offsets)
    era = earth_rotation_angle_rad(epoch, offsets)
    assert np.max(np.abs(_wrap_diff(era, erfa.era00(whole, frac)))) < SAME_MODEL_RAD
    scalar = earth_rotation_angle_rad(epoch)
    assert scalar.shape == ()
    assert 0.0 <= scalar < TWO_PI
