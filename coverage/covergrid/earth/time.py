"""Epochs, Julian dates and the sidereal angle.

A study's time axis is one epoch (UTC, ``numpy.datetime64[ns]``) plus float offsets in seconds.
Julian dates are returned split into a whole part and a day fraction so that no precision is
lost to one large float (the same reason SOFA/ERFA take two-part dates).

Model limits
------------
* UT1 is taken equal to UTC. ``|UT1 - UTC| < 0.9 s`` by the definition of UTC, and the Earth turns
  by ``0.9 s * 15.04 arcsec/s = 13.5 arcsec < 4e-3 deg`` in that time: far below any coverage
  grid spacing.
* Leap seconds are ignored (a UTC time is counted as if every day had 86 400 s). For the same
  reason this is harmless for coverage, but it limits the useful span: epochs are accepted only
  in the years 1900 to 2100. The IAU 1982 sidereal-time polynomial is fitted to modern
  observations and meant for use within about a century of J2000, and far from the present the
  difference between UT1 and a leap-second-free count of UTC (Delta T) is no longer small or
  predictable, so UT1 = UTC would stop being a sub-second approximation.
"""

from __future__ import annotations

import datetime as _dt
import re

import numpy as np
import numpy.typing as npt

from covergrid.constants import JD_J2000, SECONDS_PER_DAY, TWO_PI
from covergrid.errors import CovergridError

__all__ = [
    "EpochError",
    "EPOCH_MIN_YEAR",
    "EPOCH_MAX_YEAR",
    "parse_epoch",
    "epoch_to_iso",
    "julian_date",
    "gmst_rad",
    "earth_rotation_angle_rad",
]

#: First and last calendar year accepted for an epoch (see the module notes).
EPOCH_MIN_YEAR = 1900
EPOCH_MAX_YEAR = 2100

_EXAMPLE = '"2027-03-01T00:00:00Z"'
_NS_PER_S = 1_000_000_000
_NS_PER_DAY = 86_400 * _NS_PER_S
# Julian date of the Unix origin 1970-01-01T00:00:00 (common practice; 2440587.5).
_JD_UNIX_ORIGIN = 2440587.5

_ISO_RE = re.compile(
    r"""^\s*
    (?P<year>\d{4})-(?P<month>\d{2})-(?P<day>\d{2})
    (?:[Tt\ ]
        (?P<hour>\d{2}):(?P<minute>\d{2})
        (?::(?P<second>\d{2})(?:[.,](?P<frac>\d{1,9}))?)?
        (?P<tz>[Zz]|[+-]\d{2}(?::?\d{2})?)?
    )?
    \s*$""",
    re.VERBOSE,
)


class EpochError(CovergridError):
    """An epoch is not a valid ISO 8601 UTC time or lies outside the supported years."""


def _fail(value: object, why: str, field: str | None) -> EpochError:
    return EpochError(
        f"{why}: got {value!r}; expected an ISO 8601 time such as {_EXAMPLE}, "
        f'"2027-03-01 12:30:00.250", or "2027-03-01T14:00:00+02:00", '
        f"in the years {EPOCH_MIN_YEAR} to {EPOCH_MAX_YEAR}",
        field=field,
    )


def parse_epoch(text: str, field: str | None = None) -> np.datetime64:
    """Parse an ISO 8601 date-time into a UTC ``numpy.datetime64[ns]``.

    Parameters
    ----------
    text : str
        ``YYYY-MM-DD[(T| )hh:mm[:ss[.fffffffff]]][Z|+hh:mm|-hh:mm|+hhmm|+hh]``. A time with an
        offset is converted to UTC; a time without offset (naive) is taken as UTC. A date alone
        means midnight UTC. Leap second 60 is not representable and is refused.
    field : str, optional
        Dotted path of the config field, used in the error message.

    Returns
    -------
    numpy.datetime64
        The instant in UTC, nanosecond resolution.

    Raises
    ------
    EpochError
        If the text is not such a time, names an impossible date, or lies outside the years
        1900 to 2100 (see the module notes for why).
    """
    if not isinstance(text, str):
        raise _fail(text, f"epoch must be text, not {type(text).__name__}", field)
    m = _ISO_RE.match(text)
    if m is None:
        raise _fail(text, "epoch is not an ISO 8601 date-time", field)
    g = m.groupdict()
    year, month, day = int(g["year"]), int(g["month"]), int(g["day"])
    hour = int(g["hour"] or 0)
    minute = int(g["minute"] or 0)
    second = int(g["second"] or 0)
    frac_ns = int((g["frac"] or "").ljust(9, "0")) if g["frac"] else 0
    if second == 60:
        raise _fail(
            text, "leap second 60 is not supported (UTC is counted without leap seconds)", field
        )
    try:
        naive = _dt.datetime(year, month, day, hour, minute, second)
    except ValueError as exc:
        raise _fail(text, f"epoch is not a real date-time ({exc})", field) from None
    offset_min = 0
    tz = g["tz"]
    if tz and tz not in "Zz":
        sign = -1 if tz[0] == "-" else 1
        digits = tz[1:].replace(":", "")
        oh = int(digits[:2])
        om = int(digits[2:4]) if len(digits) > 2 else 0
        if oh > 23 or om > 59:
            raise _fail(text, "UTC offset is out of range", field)
        offset_min = sign * (oh * 60 + om)
    # Local time minus offset gives UTC.
    utc = naive - _dt.timedelta(minutes=offset_min)
    if not EPOCH_MIN_YEAR <= utc.year <= EPOCH_MAX_YEAR:
        raise _fail(text, f"epoch year {utc.year} is outside the supported range", field)
    out = np.datetime64(utc.replace(tzinfo=None), "ns") + np.timedelta64(frac_ns, "ns")
    return out


def epoch_to_iso(epoch: np.datetime64 | str) -> str:
    """Format a UTC epoch as ISO 8601 with a ``Z`` suffix.

    Parameters
    ----------
    epoch : numpy.datetime64 or str
        The instant (UTC). Text is parsed with :func:`parse_epoch`.

    Returns
    -------
    str
        ``"YYYY-MM-DDThh:mm:ssZ"``, with a fraction of a second (trailing zeros dropped) only
        when the epoch has one.
    """
    ns = _epoch_ns(epoch)
    if ns.ndim != 0:
        raise EpochError(f"epoch_to_iso takes one epoch, got an array of shape {ns.shape}")
    text = str(np.datetime64(int(ns), "ns"))  # 'YYYY-MM-DDThh:mm:ss.fffffffff'
    date_time, _, frac = text.partition(".")
    frac = frac.rstrip("0")
    return f"{date_time}.{frac}Z" if frac else f"{date_time}Z"


def _epoch_ns(epoch: object) -> np.ndarray:
    """Epoch(s) as int64 nanoseconds since 1970-01-01T00:00 UTC, range-checked."""
    if isinstance(epoch, str):
        epoch = parse_epoch(epoch)
    elif isinstance(epoch, _dt.datetime) and epoch.tzinfo is not None:
        epoch = epoch.astimezone(_dt.timezone.utc).replace(tzinfo=None)
    try:
        arr = np.asarray(epoch, dtype="datetime64[ns]")
    except (TypeError, ValueError):
        raise _fail(epoch, "epoch is not a date-time", None) from None
    if np.any(np.isnat(arr)):
        raise _fail(epoch, "epoch is NaT", None)
    years = arr.astype("datetime64[Y]").astype(np.int64) + 1970
    if np.any((years < EPOCH_MIN_YEAR) | (years > EPOCH_MAX_YEAR)):
        raise _fail(epoch, "epoch year is outside the supported range", None)
    return arr.astype(np.int64)


def julian_date(
    epoch: np.datetime64 | str | npt.ArrayLike, offsets_s: npt.ArrayLike = 0.0
) -> tuple[np.ndarray, np.ndarray]:
    """Julian date (UTC, used as UT1) of ``epoch + offsets_s``, split in two parts.

    Parameters
    ----------
    epoch : numpy.datetime64, str or array of datetime64
        Reference instant(s), UTC.
    offsets_s : array_like
        Seconds after ``epoch``; broadcast against ``epoch`` [s].

    Returns
    -------
    jd_whole : numpy.ndarray
        Julian date of the preceding 0h UTC (always ``N + 0.5``, exact in float64) [day].
    jd_fraction : numpy.ndarray
        Fraction of the day since 0h UTC, in ``[0, 1)`` [day].

    Notes
    -----
    ``JD = jd_whole + jd_fraction``; the epoch is split in integer nanoseconds, so the only
    rounding is in the fraction (float64 spacing below 1 day is 1.1e-16 day, about 10 ns).
    """
    ns = _epoch_ns(epoch)
    off = np.asarray(offsets_s, dtype=np.float64)
    days = np.floor_divide(ns, _NS_PER_DAY)
    rem_s = (ns - days * _NS_PER_DAY).astype(np.float64) / _NS_PER_S  # exact below 2**53 ns
    total_s = rem_s + off
    extra = np.floor(total_s / SECONDS_PER_DAY)
    frac = (total_s - extra * SECONDS_PER_DAY) / SECONDS_PER_DAY
    # Rounding can leave frac == 1.0 for total_s a hair below a whole day.
    carry = frac >= 1.0
    extra = np.where(carry, extra + 1.0, extra)
    frac = np.where(carry, 0.0, frac)
    whole = _JD_UNIX_ORIGIN + days.astype(np.float64) + extra
    whole, frac = np.broadcast_arrays(whole, frac)
    return np.array(whole, dtype=np.float64), np.array(frac, dtype=np.float64)


# IAU 1982 GMST coefficients, Vallado, Fundamentals of Astrodynamics and Applications,
# 5th ed., eq. 3-47 (seconds of time, T in Julian centuries of UT1 from J2000):
#   GMST = 67310.54841 s + (876600 h + 8640184.812866 s) T + 0.093104 T^2 - 6.2e-6 T^3
_GMST82_A_S = 67310.54841
_GMST82_B_S = 8640184.812866
_GMST82_C_S = 0.093104
_GMST82_D_S = -6.2e-6


def gmst_rad(
    epoch: np.datetime64 | str | npt.ArrayLike, offsets_s: npt.ArrayLike = 0.0
) -> np.ndarray:
    """Greenwich mean sidereal angle, IAU 1982 model, at ``epoch + offsets_s``.

    Parameters
    ----------
    epoch : numpy.datetime64, str or array of datetime64
        Reference instant(s), UTC (used as UT1).
    offsets_s : array_like
        Seconds after ``epoch``; broadcast against ``epoch`` [s].

    Returns
    -------
    numpy.ndarray
        Sidereal angle in ``[0, 2 pi)`` [rad]; shape of the broadcast inputs.

    Notes
    -----
    IAU 1982 Greenwich mean sidereal time, Vallado [1]_ eq. 3-47 (Example 3-5):

    .. math::

        \\theta = 67310.54841^s + (876600^h + 8640184.812866^s) T + 0.093104^s T^2
                  - 6.2 \\times 10^{-6\\,s} T^3,
        \\qquad T = (JD_{UT1} - 2451545.0) / 36525

    The full polynomial is evaluated at every time. For precision the term
    ``876600 h * T = 86400 s * (JD - 2451545.0)`` is reduced to the day fraction taken from the
    split Julian date, so no large angle is formed. UT1 is taken equal to UTC: the error is at
    most 0.9 s of rotation, below 4e-3 deg. The angle rotates the mean equator and equinox of
    date into the Earth-fixed frame; precession-nutation and polar motion are not modelled.

    References
    ----------
    .. [1] D. A. Vallado, *Fundamentals of Astrodynamics and Applications*, 5th ed.,
       Microcosm Press, 2022, eq. 3-47 and Example 3-5.
    """
    whole, frac = julian_date(epoch, offsets_s)
    d_whole = whole - JD_J2000  # exact: an integer + 0.5
    t = (d_whole + frac) / 36525.0
    poly_s = _GMST82_A_S + (_GMST82_B_S + (_GMST82_C_S + _GMST82_D_S * t) * t) * t
    # 86400 s * (d_whole + frac) modulo one day: only the fractional days matter.
    day_turns = np.mod(d_whole, 1.0) + frac
    turns = np.mod(poly_s / SECONDS_PER_DAY + day_turns, 1.0)
    theta = TWO_PI * turns
    return np.where(theta >= TWO_PI, 0.0, theta)


def earth_rotation_angle_rad(
    epoch: np.datetime64 | str | npt.ArrayLike, offsets_s: npt.ArrayLike = 0.0
) -> np.ndarray:
    """Earth rotation angle (IAU 2000) at ``epoch + offsets_s``, with UT1 taken as UTC.

    Parameters
    ----------
    epoch : numpy.datetime64, str or array of datetime64
        Reference instant(s), UTC (used as UT1).
    offsets_s : array_like
        Seconds after ``epoch``; broadcast against ``epoch`` [s].

    Returns
    -------
    numpy.ndarray
        Angle in ``[0, 2 pi)`` [rad].

    Notes
    -----
    IERS Conventions (2010) [1]_ eq. 5.15:

    .. math::

        \\theta = 2\\pi (0.7790572732640 + 1.00273781191135448\\, D_U),
        \\qquad D_U = JD_{UT1} - 2451545.0

    evaluated as ``2 pi (frac(D_U) + 0.7790572732640 + 0.00273781191135448 D_U)``.
    This angle belongs with the CIO-based (IAU 2000/2006) frames; covergrid's own frames use
    :func:`gmst_rad`. It is provided for comparisons.

    References
    ----------
    .. [1] G. Petit and B. Luzum (eds.), *IERS Conventions (2010)*, IERS Technical Note 36,
       eq. 5.15.
    """
    whole, frac = julian_date(epoch, offsets_s)
    d_whole = whole - JD_J2000
    du = d_whole + frac
    turns = np.mod(np.mod(d_whole, 1.0) + frac + 0.7790572732640 + 0.00273781191135448 * du, 1.0)
    theta = TWO_PI * turns
    return np.where(theta >= TWO_PI, 0.0, theta)
