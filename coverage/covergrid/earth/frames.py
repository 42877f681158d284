"""Inertial <-> Earth-fixed rotation, geodetic coordinates on WGS-84, and look angles.

Conventions: vectors carry their Cartesian axis last, ``(..., 3)``, and all functions broadcast
their leading dimensions with the usual NumPy rules. Angles are radians, lengths km.

Model limit: the inertial frame is the mean equator and equinox of date and the Earth-fixed
frame is reached by one rotation about z by the Greenwich mean sidereal angle
(:func:`covergrid.earth.time.gmst_rad`). Precession-nutation between J2000 and the date, the
equation of the equinoxes and polar motion are not modelled. Element sets used by covergrid are
referred to this same mean-of-date frame, so the only loss is the sub-arcminute nutation/polar
motion offset of the Earth-fixed axes, far below a coverage cell.
"""

from __future__ import annotations

import numpy as np
import numpy.typing as npt

from covergrid.constants import OMEGA_EARTH_RAD_S, TWO_PI, WGS84_A_KM, WGS84_E2

__all__ = [
    "eci_to_ecef",
    "ecef_to_eci",
    "eci_to_ecef_velocity",
    "ecef_to_eci_velocity",
    "geodetic_to_ecef",
    "ecef_to_geodetic",
    "up_vector",
    "enu_basis",
    "look_angles",
    "subsatellite_point",
    "off_nadir_angle",
]


def _vec(r: npt.ArrayLike, name: str) -> np.ndarray:
    arr = np.asarray(r, dtype=np.float64)
    if arr.ndim == 0 or arr.shape[-1] != 3:
        raise ValueError(f"{name} must have its last axis of length 3, got shape {arr.shape}")
    return arr


def _rot_z(r: np.ndarray, theta_rad: npt.ArrayLike) -> np.ndarray:
    """Coordinates of ``r`` in axes turned by ``+theta`` about z (the matrix R3(theta))."""
    th = np.asarray(theta_rad, dtype=np.float64)
    c, s = np.cos(th), np.sin(th)
    x, y, z = r[..., 0], r[..., 1], r[..., 2]
    return np.stack(np.broadcast_arrays(c * x + s * y, -s * x + c * y, z), axis=-1)


def eci_to_ecef(r_eci_km: npt.ArrayLike, theta_rad: npt.ArrayLike) -> np.ndarray:
    """Rotate inertial (mean-of-date) vectors into the Earth-fixed frame.

    Parameters
    ----------
    r_eci_km : array_like, shape (..., 3)
        Vectors in the inertial frame (any unit; positions in [km]).
    theta_rad : array_like, shape (...)
        Sidereal angle at each vector's time, broadcast against ``r_eci_km[..., 0]`` [rad].

    Returns
    -------
    numpy.ndarray, shape (..., 3)
        The same vectors in the Earth-fixed frame [km].

    Notes
    -----
    :math:`r_{ECEF} = R_3(\\theta)\\, r_{ECI}`, the GMST-only rotation of Vallado [1]_ (ch. 3)
    without precession, nutation or polar motion (see the module notes).

    References
    ----------
    .. [1] D. A. Vallado, *Fundamentals of Astrodynamics and Applications*, 5th ed.,
       Microcosm Press, 2022.
    """
    return _rot_z(_vec(r_eci_km, "r_eci_km"), theta_rad)


def ecef_to_eci(r_ecef_km: npt.ArrayLike, theta_rad: npt.ArrayLike) -> np.ndarray:
    """Rotate Earth-fixed vectors into the inertial (mean-of-date) frame.

    Parameters
    ----------
    r_ecef_km : array_like, shape (..., 3)
        Vectors in the Earth-fixed frame [km].
    theta_rad : array_like, shape (...)
        Sidereal angle [rad].

    Returns
    -------
    numpy.ndarray, shape (..., 3)
        :math:`R_3(-\\theta)\\, r_{ECEF}` [km], the inverse of :func:`eci_to_ecef`.
    """
    return _rot_z(_vec(r_ecef_km, "r_ecef_km"), -np.asarray(theta_rad, dtype=np.float64))


def _omega_cross(r: np.ndarray, omega_rad_s: float) -> np.ndarray:
    """``omega_vec x r`` for ``omega_vec = (0, 0, omega)``."""
    return np.stack(
        [-omega_rad_s * r[..., 1], omega_rad_s * r[..., 0], np.zeros_like(r[..., 2])], axis=-1
    )


def eci_to_ecef_velocity(
    r_eci_km: npt.ArrayLike,
    v_eci_km_s: npt.ArrayLike,
    theta_rad: npt.ArrayLike,
    omega_rad_s: float = OMEGA_EARTH_RAD_S,
) -> np.ndarray:
    """Earth-fixed velocity from an inertial position and velocity.

    Parameters
    ----------
    r_eci_km : array_like, shape (..., 3)
        Inertial position [km].
    v_eci_km_s : array_like, shape (..., 3)
        Inertial velocity [km/s].
    theta_rad : array_like, shape (...)
        Sidereal angle [rad].
    omega_rad_s : float, optional
        Earth rotation rate; WGS-84 value by default [rad/s].

    Returns
    -------
    numpy.ndarray, shape (..., 3)
        Velocity relative to the rotating Earth, in Earth-fixed axes [km/s].

    Notes
    -----
    Transport theorem: :math:`v_{ECEF} = R_3(\\theta) (v_{ECI} - \\omega \\times r_{ECI})`.
    The WGS-84 rate (7.292115e-5 rad/s) and the rate of the IAU 1982 sidereal angle
    (7.2921158553e-5 rad/s) differ by 1.2e-7 relative: 5e-7 km/s at geostationary radius.
    """
    r = _vec(r_eci_km, "r_eci_km")
    v = _vec(v_eci_km_s, "v_eci_km_s")
    return _rot_z(v - _omega_cross(r, omega_rad_s), theta_rad)


def ecef_to_eci_velocity(
    r_ecef_km: npt.ArrayLike,
    v_ecef_km_s: npt.ArrayLike,
    theta_rad: npt.ArrayLike,
    omega_rad_s: float = OMEGA_EARTH_RAD_S,
) -> np.ndarray:
    """Inertial velocity from an Earth-fixed position and velocity (inverse of the above).

    Parameters
    ----------
    r_ecef_km : array_like, shape (..., 3)
        Earth-fixed position [km].
    v_ecef_km_s : array_like, shape (..., 3)
        Velocity relative to the Earth, Earth-fixed axes [km/s].
    theta_rad : array_like, shape (...)
        Sidereal angle [rad].
    omega_rad_s : float, optional
        Earth rotation rate [rad/s].

    Returns
    -------
    numpy.ndarray, shape (..., 3)
        :math:`R_3(-\\theta)(v_{ECEF} + \\omega \\times r_{ECEF})` [km/s].
    """
    r = _vec(r_ecef_km, "r_ecef_km")
    v = _vec(v_ecef_km_s, "v_ecef_km_s")
    return _rot_z(v + _omega_cross(r, omega_rad_s), -np.asarray(theta_rad, dtype=np.float64))


def geodetic_to_ecef(
    lat_rad: npt.ArrayLike, lon_rad: npt.ArrayLike, h_km: npt.ArrayLike = 0.0
) -> np.ndarray:
    """Earth-fixed Cartesian position of a geodetic point on WGS-84.

    Parameters
    ----------
    lat_rad, lon_rad : array_like
        Geodetic latitude and longitude [rad]; broadcast together with ``h_km``.
    h_km : array_like, optional
        Height above the ellipsoid [km].

    Returns
    -------
    numpy.ndarray, shape (..., 3)
        Earth-fixed position [km].

    Notes
    -----
    With the prime-vertical radius :math:`N = a / \\sqrt{1 - e^2 \\sin^2\\phi}`
    (NIMA TR8350.2 [1]_, ch. 4):

    .. math::

        x = (N + h)\\cos\\phi\\cos\\lambda,\\quad y = (N + h)\\cos\\phi\\sin\\lambda,\\quad
        z = (N (1 - e^2) + h)\\sin\\phi

    References
    ----------
    .. [1] National Imagery and Mapping Agency, *Department of Defense World Geodetic System
       1984*, TR8350.2, 3rd ed., 2000.
    """
    lat = np.asarray(lat_rad, dtype=np.float64)
    lon = np.asarray(lon_rad, dtype=np.float64)
    h = np.asarray(h_km, dtype=np.float64)
    sin_lat = np.sin(lat)
    cos_lat = np.cos(lat)
    n = WGS84_A_KM / np.sqrt(1.0 - WGS84_E2 * sin_lat * sin_lat)
    rho = (n + h) * cos_lat
    x = rho * np.cos(lon)
    y = rho * np.sin(lon)
    z = (n * (1.0 - WGS84_E2) + h) * sin_lat
    return np.stack(np.broadcast_arrays(x, y, z), axis=-1)


def _wrap_lon(lon: np.ndarray) -> np.ndarray:
    """Wrap ``arctan2`` longitudes from (-pi, pi] into [-pi, pi)."""
    return np.where(lon >= np.pi, lon - TWO_PI, lon)


def ecef_to_geodetic(r_ecef_km: npt.ArrayLike) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Geodetic latitude, longitude and height on WGS-84 of an Earth-fixed position.

    Parameters
    ----------
    r_ecef_km : array_like, shape (..., 3)
        Earth-fixed position [km]. Valid outside the ellipsoid's evolute (more than about
        43 km from the Earth's centre), which covers heights from -100 km upwards.

    Returns
    -------
    lat_rad : numpy.ndarray, shape (...)
        Geodetic latitude in [-pi/2, pi/2] [rad].
    lon_rad : numpy.ndarray, shape (...)
        Longitude in [-pi, pi) [rad].
    h_km : numpy.ndarray, shape (...)
        Height above the ellipsoid [km].

    Notes
    -----
    Closed form of Vermeille [1]_ (no iteration). With
    :math:`p = (x^2+y^2)/a^2`, :math:`q = (1-e^2) z^2 / a^2`, :math:`r = (p + q - e^4)/6`,
    :math:`s = e^4 p q / (4 r^3)`, :math:`t = \\sqrt[3]{1 + s + \\sqrt{s(2+s)}}`,
    :math:`u = r (1 + t + 1/t)`, :math:`v = \\sqrt{u^2 + e^4 q}`,
    :math:`w = e^2 (u + v - q) / (2v)`, :math:`k = \\sqrt{u + v + w^2} - w`,
    :math:`D = k \\sqrt{x^2+y^2} / (k + e^2)`:

    .. math::

        \\phi = 2 \\arctan \\frac{z}{D + \\sqrt{D^2 + z^2}},\\qquad
        h = \\frac{k + e^2 - 1}{k} \\sqrt{D^2 + z^2}

    Agrees with PROJ to better than 1 mm from -100 km to 100 000 km height (tests).

    References
    ----------
    .. [1] H. Vermeille, "Direct transformation from geocentric coordinates to geodetic
       coordinates," *Journal of Geodesy*, vol. 76, pp. 451-454, 2002,
       doi:10.1007/s00190-002-0273-6.
    """
    r = _vec(r_ecef_km, "r_ecef_km")
    x, y, z = r[..., 0], r[..., 1], r[..., 2]
    e2 = WGS84_E2
    e4 = e2 * e2
    a2 = WGS84_A_KM * WGS84_A_KM
    rho = np.hypot(x, y)
    p = rho * rho / a2  # Vermeille (2002), in the paper's order
    q = (1.0 - e2) * z * z / a2
    rr = (p + q - e4) / 6.0
    s = e4 * p * q / (4.0 * rr**3)
    t = np.cbrt(1.0 + s + np.sqrt(s * (2.0 + s)))
    u = rr * (1.0 + t + 1.0 / t)
    v = np.sqrt(u * u + e4 * q)
    w = e2 * (u + v - q) / (2.0 * v)
    k = np.sqrt(u + v + w * w) - w
    d = k * rho / (k + e2)
    dz = np.hypot(d, z)
    lat = 2.0 * np.arctan2(z, d + dz)
    h = (k + e2 - 1.0) / k * dz
    lon = _wrap_lon(np.arctan2(y, x))
    return lat, lon, h


def up_vector(lat_rad: npt.ArrayLike, lon_rad: npt.ArrayLike) -> np.ndarray:
    """Outward unit normal of the WGS-84 ellipsoid at a geodetic latitude and longitude.

    Parameters
    ----------
    lat_rad, lon_rad : array_like
        Geodetic latitude and longitude [rad], broadcast together.

    Returns
    -------
    numpy.ndarray, shape (..., 3)
        ``(cos lat cos lon, cos lat sin lon, sin lat)`` in Earth-fixed axes [unitless].
    """
    lat = np.asarray(lat_rad, dtype=np.float64)
    lon = np.asarray(lon_rad, dtype=np.float64)
    c = np.cos(lat)
    return np.stack(np.broadcast_arrays(c * np.cos(lon), c * np.sin(lon), np.sin(lat)), axis=-1)


def enu_basis(
    lat_rad: npt.ArrayLike, lon_rad: npt.ArrayLike
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Local east, north and up unit vectors (Earth-fixed axes) at geodetic points.

    Parameters
    ----------
    lat_rad, lon_rad : array_like
        Geodetic latitude and longitude [rad], broadcast together.

    Returns
    -------
    east, north, up : numpy.ndarray, each shape (..., 3)
        Right-handed orthonormal triad; ``up`` is the ellipsoid normal [unitless].

    Notes
    -----
    The rows of the ECEF-to-ENU rotation of EPSG Guidance Note 7-2 [1]_ (method 9837,
    geocentric/topocentric conversions).

    References
    ----------
    .. [1] IOGP, *Geomatics Guidance Note 7, part 2: Coordinate Conversions and
       Transformations including Formulas*, IOGP Publication 373-7-2.
    """
    lat = np.asarray(lat_rad, dtype=np.float64)
    lon = np.asarray(lon_rad, dtype=np.float64)
    sl, cl = np.sin(lat), np.cos(lat)
    so, co = np.sin(lon), np.cos(lon)
    east = np.stack(np.broadcast_arrays(-so, co, np.zeros_like(lat * lon)), axis=-1)
    north = np.stack(np.broadcast_arrays(-sl * co, -sl * so, cl), axis=-1)
    up = np.stack(np.broadcast_arrays(cl * co, cl * so, sl), axis=-1)
    return east, north, up


def look_angles(
    site_lat_rad: npt.ArrayLike,
    site_lon_rad: npt.ArrayLike,
    site_h_km: npt.ArrayLike,
    r_sat_ecef_km: npt.ArrayLike,
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Azimuth, elevation and range from ground sites to satellites.

    Parameters
    ----------
    site_lat_rad, site_lon_rad : array_like, shape S
        Geodetic latitude and longitude of the sites [rad].
    site_h_km : array_like, shape S
        Site height above the ellipsoid [km].
    r_sat_ecef_km : array_like, shape (..., 3)
        Satellite Earth-fixed positions [km].

    Returns
    -------
    azimuth_rad : numpy.ndarray
        From north through east, in [0, 2 pi) [rad].
    elevation_rad : numpy.ndarray
        Above the plane normal to the ellipsoid normal at the site, in [-pi/2, pi/2] [rad].
    range_km : numpy.ndarray
        Site-to-satellite distance [km].

    Notes
    -----
    Broadcasting contract: the three site arrays broadcast to a shape S, and S broadcasts
    with ``r_sat_ecef_km.shape[:-1]`` under NumPy rules; the outputs have that common shape.
    Matching sites and satellites element by element needs equal shapes; all sites against all
    satellites needs new axes, e.g. ``site_lat_rad[:, None]`` with ``r_sat[None, :, :]`` for a
    result of shape ``(n_site, n_sat)``.

    The line of sight is projected on the site's east/north/up triad (:func:`enu_basis`):
    azimuth ``atan2(e, n)``, elevation ``atan2(u, hypot(e, n))``; the elevation is geometric
    (no refraction).
    """
    r_sat = _vec(r_sat_ecef_km, "r_sat_ecef_km")
    site = geodetic_to_ecef(site_lat_rad, site_lon_rad, site_h_km)
    east, north, up = enu_basis(site_lat_rad, site_lon_rad)
    los = r_sat - site
    e = np.sum(los * east, axis=-1)
    n = np.sum(los * north, axis=-1)
    u = np.sum(los * up, axis=-1)
    horiz = np.hypot(e, n)
    el = np.arctan2(u, horiz)
    az = np.mod(np.arctan2(e, n), TWO_PI)
    az = np.where(az >= TWO_PI, 0.0, az)
    rng = np.sqrt(horiz * horiz + u * u)
    return az, el, rng


def subsatellite_point(r_ecef_km: npt.ArrayLike) -> tuple[np.ndarray, np.ndarray]:
    """Geodetic latitude and longitude of the point directly below a satellite.

    Parameters
    ----------
    r_ecef_km : array_like, shape (..., 3)
        Satellite Earth-fixed position [km].

    Returns
    -------
    lat_rad : numpy.ndarray, shape (...)
        Geodetic latitude [rad].
    lon_rad : numpy.ndarray, shape (...)
        Longitude in [-pi, pi) [rad].

    Notes
    -----
    "Below" is the geodetic nadir: the ellipsoid point whose normal passes through the
    satellite, i.e. the latitude and longitude of :func:`ecef_to_geodetic`.
    """
    lat, lon, _ = ecef_to_geodetic(r_ecef_km)
    return lat, lon


def off_nadir_angle(r_sat_ecef_km: npt.ArrayLike, r_target_ecef_km: npt.ArrayLike) -> np.ndarray:
    """Angle at the satellite between the geocentric nadir and the line of sight to a target.

    Parameters
    ----------
    r_sat_ecef_km : array_like, shape (..., 3)
        Satellite position [km].
    r_target_ecef_km : array_like, shape (..., 3)
        Target position, same frame; broadcast against the satellite [km].

    Returns
    -------
    numpy.ndarray, shape (...)
        Off-nadir angle in [0, pi] [rad].

    Notes
    -----
    Geocentric nadir: the direction ``-r_sat`` towards the Earth's centre (not the ellipsoid
    normal; the two differ by at most about 0.19 deg for a low orbit at mid latitude). Any frame
    works as long as both positions share it. Computed as ``atan2(|a x b|, a . b)`` with
    ``a = -r_sat`` and ``b = r_target - r_sat``, which stays accurate near 0 and pi.
    """
    r_sat = _vec(r_sat_ecef_km, "r_sat_ecef_km")
    tgt = _vec(r_target_ecef_km, "r_target_ecef_km")
    a = -r_sat
    b = tgt - r_sat
    cross = np.cross(a, b)
    return np.arctan2(np.linalg.norm(cross, axis=-1), np.sum(a * b, axis=-1))
