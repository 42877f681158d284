"""Low-precision position of the Sun and the solar elevation at ground points.

The Sun is given in covergrid's inertial frame, the mean equator and equinox of date (the
frame that :func:`covergrid.earth.time.gmst_rad` rotates into the Earth-fixed frame), from
the Astronomical Almanac's low-precision formulas. Their stated accuracy is 0.01 deg between
1950 and 2050, ample for a daylight constraint (the Sun's disc is 0.53 deg across).
"""

from __future__ import annotations

import numpy as np
import numpy.typing as npt

from covergrid.constants import AU_KM, DEG, JD_J2000, TWO_PI
from covergrid.earth.frames import eci_to_ecef, geodetic_to_ecef, up_vector
from covergrid.earth.time import gmst_rad, julian_date

__all__ = ["mean_sun_right_ascension_rad", "raan_for_local_time_rad", "solar_elevation_rad",
           "sun_direction_eci", "sun_position_eci_km"]


def sun_position_eci_km(
    epoch: np.datetime64 | str | npt.ArrayLike, offsets_s: npt.ArrayLike = 0.0
) -> np.ndarray:
    """Geocentric position of the Sun, mean equator and equinox of date.

    Parameters
    ----------
    epoch : numpy.datetime64, str or array of datetime64
        Reference instant(s), UTC.
    offsets_s : array_like
        Seconds after ``epoch``; broadcast against ``epoch`` [s].

    Returns
    -------
    numpy.ndarray, shape (..., 3)
        Sun position [km] in the inertial frame of :mod:`covergrid.earth.frames`.

    Notes
    -----
    Astronomical Almanac, Section C, low-precision formulas for the Sun [1]_, with
    :math:`n = JD - 2451545.0`:

    .. math::

        L &= 280.460^\\circ + 0.9856474^\\circ n \\quad\\text{(mean longitude)}\\\\
        g &= 357.528^\\circ + 0.9856003^\\circ n \\quad\\text{(mean anomaly)}\\\\
        \\lambda &= L + 1.915^\\circ \\sin g + 0.020^\\circ \\sin 2g\\\\
        \\epsilon &= 23.439^\\circ - 0.0000004^\\circ n\\\\
        R &= 1.00014 - 0.01671 \\cos g - 0.00014 \\cos 2g \\ \\text{au}

    and :math:`r = R (\\cos\\lambda, \\cos\\epsilon \\sin\\lambda, \\sin\\epsilon\\sin\\lambda)`.
    The ecliptic latitude is taken as zero (it stays below 1.2 arcsec). ``n`` is formed from
    UTC rather than TT: the 69 s difference (2020s) moves the Sun by 0.0008 deg. The
    longitude includes aberration, so this is the apparent direction less nutation, referred
    to the mean equinox of date.

    References
    ----------
    .. [1] U.S. Naval Observatory and HM Nautical Almanac Office, *The Astronomical Almanac*,
       Section C, "Low-precision formulas for the Sun".
    """
    whole, frac = julian_date(epoch, offsets_s)
    n = (whole - JD_J2000) + frac
    mean_lon_rad = np.mod(280.460 + 0.9856474 * n, 360.0) * DEG
    g_rad = np.mod(357.528 + 0.9856003 * n, 360.0) * DEG
    lam_rad = mean_lon_rad + (1.915 * np.sin(g_rad) + 0.020 * np.sin(2.0 * g_rad)) * DEG
    eps_rad = (23.439 - 0.0000004 * n) * DEG
    dist_km = (1.00014 - 0.01671 * np.cos(g_rad) - 0.00014 * np.cos(2.0 * g_rad)) * AU_KM
    cl = np.cos(lam_rad)
    sl = np.sin(lam_rad)
    return dist_km[..., None] * np.stack([cl, np.cos(eps_rad) * sl, np.sin(eps_rad) * sl], axis=-1)


def sun_direction_eci(
    epoch: np.datetime64 | str | npt.ArrayLike, offsets_s: npt.ArrayLike = 0.0
) -> np.ndarray:
    """Unit vector from the Earth's centre to the Sun, mean equator and equinox of date.

    Parameters
    ----------
    epoch : numpy.datetime64, str or array of datetime64
        Reference instant(s), UTC.
    offsets_s : array_like
        Seconds after ``epoch`` [s].

    Returns
    -------
    numpy.ndarray, shape (..., 3)
        :func:`sun_position_eci_km` normalised [unitless].
    """
    r = sun_position_eci_km(epoch, offsets_s)
    return r / np.linalg.norm(r, axis=-1, keepdims=True)


def solar_elevation_rad(
    lat_rad: npt.ArrayLike,
    lon_rad: npt.ArrayLike,
    epoch: np.datetime64 | str | npt.ArrayLike,
    offsets_s: npt.ArrayLike = 0.0,
    h_km: npt.ArrayLike = 0.0,
) -> np.ndarray:
    """Geometric elevation of the Sun's centre above the horizon of a ground point.

    Parameters
    ----------
    lat_rad, lon_rad : array_like
        Geodetic latitude and longitude of the points [rad].
    epoch : numpy.datetime64, str or array of datetime64
        Reference instant(s), UTC.
    offsets_s : array_like
        Seconds after ``epoch`` [s].
    h_km : array_like, optional
        Height of the points above the ellipsoid [km].

    Returns
    -------
    numpy.ndarray
        Elevation above the plane normal to the ellipsoid normal, in [-pi/2, pi/2] [rad].

    Notes
    -----
    Broadcasting contract: ``lat_rad``, ``lon_rad``, ``h_km`` and the time shape (``epoch``
    broadcast with ``offsets_s``) all broadcast together under NumPy rules. For every point at
    every time give the points leading axes, e.g. ``lat[:, None]``, ``lon[:, None]`` with
    ``offsets_s[None, :]`` for ``(n_point, n_time)``.

    The Sun (:func:`sun_position_eci_km`) is turned into the Earth-fixed frame with the IAU
    1982 sidereal angle, and the elevation is ``arcsin(up . s)`` with ``s`` the unit vector from
    the point (not the Earth's centre: the 8.8 arcsec parallax is kept) to the Sun. No
    refraction (about 0.57 deg at the horizon) and no allowance for the Sun's radius.
    """
    sun_eci = sun_position_eci_km(epoch, offsets_s)
    theta = gmst_rad(epoch, offsets_s)
    sun_ecef = eci_to_ecef(sun_eci, theta)
    site = geodetic_to_ecef(lat_rad, lon_rad, h_km)
    los = sun_ecef - site
    s_hat = los / np.linalg.norm(los, axis=-1, keepdims=True)
    up = up_vector(lat_rad, lon_rad)
    return np.arcsin(np.clip(np.sum(up * s_hat, axis=-1), -1.0, 1.0))


def mean_sun_right_ascension_rad(
    epoch: np.datetime64 | str | npt.ArrayLike, offsets_s: npt.ArrayLike = 0.0
) -> np.ndarray:
    """Right ascension of the mean Sun, mean equator and equinox of date.

    Parameters
    ----------
    epoch : numpy.datetime64, str or array of datetime64
        Reference instant(s), UTC (used as UT1).
    offsets_s : array_like
        Seconds after ``epoch`` [s].

    Returns
    -------
    numpy.ndarray
        Right ascension in ``[0, 2 pi)`` [rad].

    Notes
    -----
    Mean solar time is the hour angle of the mean Sun plus 12 h, and universal time is mean
    solar time at Greenwich (common practice), so the mean Sun's right ascension is the
    Greenwich mean sidereal angle less the Greenwich hour angle of the mean Sun:

    .. math:: \\alpha_{ms} = \\theta_{GMST} - 15^\\circ/\\mathrm{h}\\,(UT - 12^h)

    with the IAU 1982 sidereal angle of :func:`covergrid.earth.time.gmst_rad` (whose
    polynomial is the mean Sun's right ascension at 12 h UT, Vallado, *Fundamentals of
    Astrodynamics and Applications*, 5th ed., sec. 3.5, from memory). It moves 0.9856474 deg
    per day, as the Astronomical Almanac's mean longitude of the Sun does.
    """
    whole, frac = julian_date(epoch, offsets_s)
    theta = gmst_rad(epoch, offsets_s)
    return np.mod(theta - TWO_PI * (frac - 0.5), TWO_PI)


def raan_for_local_time_rad(
    ltan_h: npt.ArrayLike, epoch: np.datetime64 | str | npt.ArrayLike
) -> np.ndarray:
    """RAAN of an orbit whose ascending node is at a given local mean solar time.

    Parameters
    ----------
    ltan_h : array_like
        Local (mean solar) time of the ascending node, in [0, 24) [h].
    epoch : numpy.datetime64, str or array of datetime64
        The instant at which the node has that local time, UTC.

    Returns
    -------
    numpy.ndarray
        Right ascension of the ascending node in ``[0, 2 pi)`` [rad], mean equator and
        equinox of date (covergrid's inertial frame).

    Notes
    -----
    The local mean solar time of a meridian is 12 h plus the hour angle of the mean Sun
    there, so a node at local time ``LTAN`` lies ``15 deg/h (LTAN - 12 h)`` east of the
    mean Sun (common practice):

    .. math:: \\Omega = \\alpha_{ms} + 15^\\circ/\\mathrm{h}\\,(LTAN - 12^h)

    (:func:`mean_sun_right_ascension_rad`). A sun-synchronous orbit keeps this local time;
    the true (apparent) solar time at the node differs from it by the equation of time
    (within about 16 minutes).
    """
    alpha = mean_sun_right_ascension_rad(epoch)
    return np.mod(alpha + (np.asarray(ltan_h, dtype=float) - 12.0) * (TWO_PI / 24.0), TWO_PI)
