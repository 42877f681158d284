"""Footprint geometry on a spherical Earth (Wertz and Larson, SMAD 3rd ed., sec. 5.2).

Angular radius of the Earth, nadir angle, Earth central angle and slant range from the
altitude and the sensor's limits. The sphere has radius ``constants.EARTH_RADIUS_KM`` (the
WGS 84 equatorial radius); these figures size the search window of the coverage kernel,
which then applies the exact ellipsoid test per cell. Units: km and rad; functions broadcast
over array inputs and return a float for scalar inputs.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

import numpy as np

from covergrid.constants import EARTH_RADIUS_KM
from covergrid.errors import CovergridError
from covergrid.orbits.checks import as_float, check_altitude, require, scalar_or_array

__all__ = [
    "Footprint",
    "angular_radius_rho",
    "central_angle_from_elevation",
    "central_angle_from_nadir",
    "elevation_from_nadir",
    "footprint",
    "nadir_angle_from_elevation",
    "slant_range_km",
]


# --------------------------------------------------------------------------------------
# Footprint geometry on a spherical Earth (Wertz & Larson, SMAD 3rd ed., sec. 5.2)
# --------------------------------------------------------------------------------------
_SMAD = (
    "J. R. Wertz and W. J. Larson, Eds., *Space Mission Analysis and Design*, 3rd ed. "
    "Torrance, CA: Microcosm Press, 1999, sec. 5.2"
)


def _check_angle(x: np.ndarray, field: str, lo: float, hi: float, text: str) -> None:
    require(np.isfinite(x) & (x >= lo) & (x <= hi), x, field, text, CovergridError)


def angular_radius_rho(alt_km: Any, *, radius_km: float = EARTH_RADIUS_KM) -> np.ndarray | float:
    """Return the angular radius of the Earth seen from a satellite.

    Parameters
    ----------
    alt_km : array_like
        Altitude above the spherical Earth [km], > 0.
    radius_km : float, optional
        Earth radius [km]; default ``constants.EARTH_RADIUS_KM``.

    Returns
    -------
    ndarray or float
        Angular radius rho, measured at the satellite from nadir to the horizon [rad].

    Notes
    -----
    Wertz and Larson [1]_, sec. 5.2 (angular radius of the Earth): :math:`\\sin\\rho = R / (R + h)`.

    References
    ----------
    .. [1] J. R. Wertz and W. J. Larson, Eds., *Space Mission Analysis and Design*, 3rd
       ed. Torrance, CA: Microcosm Press, 1999, sec. 5.2.
    """
    h = as_float(alt_km)
    check_altitude(h)
    return scalar_or_array(np.arcsin(radius_km / (radius_km + h)))


def nadir_angle_from_elevation(
    alt_km: Any, min_el_rad: Any, *, radius_km: float = EARTH_RADIUS_KM
) -> np.ndarray | float:
    """Return the nadir angle at the satellite of a ground point seen at an elevation.

    Parameters
    ----------
    alt_km : array_like
        Altitude [km], > 0.
    min_el_rad : array_like
        Elevation of the satellite above the ground point's horizon, in [0, pi/2] [rad].
    radius_km : float, optional
        Earth radius [km].

    Returns
    -------
    ndarray or float
        Nadir angle eta [rad].

    Notes
    -----
    Wertz and Larson [1]_, sec. 5.2 (law of sines in the Earth-centre, satellite,
    target triangle): :math:`\\sin\\eta = \\cos\\varepsilon \\sin\\rho`.

    References
    ----------
    .. [1] J. R. Wertz and W. J. Larson, Eds., *Space Mission Analysis and Design*, 3rd
       ed. Torrance, CA: Microcosm Press, 1999, sec. 5.2.
    """
    el = as_float(min_el_rad)
    _check_angle(el, "min_el_rad", 0.0, math.pi / 2, "an elevation in [0, pi/2] rad")
    sin_rho = np.sin(as_float(angular_radius_rho(alt_km, radius_km=radius_km)))
    return scalar_or_array(np.arcsin(np.cos(el) * sin_rho))


def central_angle_from_elevation(
    alt_km: Any, min_el_rad: Any, *, radius_km: float = EARTH_RADIUS_KM
) -> np.ndarray | float:
    """Return the Earth central angle from the sub-satellite point to the footprint edge.

    Parameters
    ----------
    alt_km : array_like
        Altitude [km], > 0.
    min_el_rad : array_like
        Minimum elevation at the edge, in [0, pi/2] [rad].
    radius_km : float, optional
        Earth radius [km].

    Returns
    -------
    ndarray or float
        Earth central angle lambda [rad].

    Notes
    -----
    Wertz and Larson [1]_, sec. 5.2 (angles of the triangle):
    :math:`\\lambda = 90^\\circ - \\eta - \\varepsilon`
    with eta from :func:`nadir_angle_from_elevation`.

    References
    ----------
    .. [1] J. R. Wertz and W. J. Larson, Eds., *Space Mission Analysis and Design*, 3rd
       ed. Torrance, CA: Microcosm Press, 1999, sec. 5.2.
    """
    eta = as_float(nadir_angle_from_elevation(alt_km, min_el_rad, radius_km=radius_km))
    return scalar_or_array(0.5 * np.pi - eta - as_float(min_el_rad))


def elevation_from_nadir(
    alt_km: Any, eta_rad: Any, *, radius_km: float = EARTH_RADIUS_KM
) -> np.ndarray | float:
    """Return the elevation at the ground point seen at a nadir angle from the satellite.

    Parameters
    ----------
    alt_km : array_like
        Altitude [km], > 0.
    eta_rad : array_like
        Nadir angle, in [0, pi/2) [rad]. Angles beyond the Earth's limb (eta > rho) are
        clamped to the horizon and give elevation 0.
    radius_km : float, optional
        Earth radius [km].

    Returns
    -------
    ndarray or float
        Elevation epsilon [rad].

    Notes
    -----
    Wertz and Larson [1]_, sec. 5.2, the nadir-angle relation inverted:
    :math:`\\cos\\varepsilon = \\sin\\eta /
    \\sin\\rho`, with :math:`\\eta` clamped to :math:`\\rho`.

    References
    ----------
    .. [1] J. R. Wertz and W. J. Larson, Eds., *Space Mission Analysis and Design*, 3rd
       ed. Torrance, CA: Microcosm Press, 1999, sec. 5.2.
    """
    eta = as_float(eta_rad)
    _check_angle(eta, "eta_rad", 0.0, math.pi / 2, "a nadir angle in [0, pi/2] rad")
    sin_rho = np.sin(as_float(angular_radius_rho(alt_km, radius_km=radius_km)))
    ratio = np.minimum(np.sin(eta) / sin_rho, 1.0)  # beyond the limb -> horizon
    return scalar_or_array(np.arccos(ratio))


def central_angle_from_nadir(
    alt_km: Any, eta_rad: Any, *, radius_km: float = EARTH_RADIUS_KM
) -> np.ndarray | float:
    """Return the Earth central angle of the ground point seen at a nadir angle.

    Parameters
    ----------
    alt_km : array_like
        Altitude [km], > 0.
    eta_rad : array_like
        Nadir angle, in [0, pi/2] [rad]. A nadir angle beyond the Earth's limb
        (eta > rho) is clamped to the horizon, giving lambda = 90 deg - rho: a sensor wider
        than the Earth's disc sees up to the horizon.
    radius_km : float, optional
        Earth radius [km].

    Returns
    -------
    ndarray or float
        Earth central angle lambda [rad].

    Notes
    -----
    Wertz and Larson [1]_, sec. 5.2: :math:`\\cos\\varepsilon = \\sin\\eta /
    \\sin\\rho`, :math:`\\lambda = 90^\\circ - \\eta - \\varepsilon`.

    References
    ----------
    .. [1] J. R. Wertz and W. J. Larson, Eds., *Space Mission Analysis and Design*, 3rd
       ed. Torrance, CA: Microcosm Press, 1999, sec. 5.2.
    """
    eta = as_float(eta_rad)
    rho = as_float(angular_radius_rho(alt_km, radius_km=radius_km))
    el = as_float(elevation_from_nadir(alt_km, eta, radius_km=radius_km))
    return scalar_or_array(0.5 * np.pi - np.minimum(eta, rho) - el)


def slant_range_km(
    alt_km: Any, lambda_rad: Any, eta_rad: Any, *, radius_km: float = EARTH_RADIUS_KM
) -> np.ndarray | float:
    """Return the distance from the satellite to a ground point.

    Parameters
    ----------
    alt_km : array_like
        Altitude [km], > 0.
    lambda_rad : array_like
        Earth central angle of the point [rad].
    eta_rad : array_like
        Nadir angle of the point, consistent with `lambda_rad` [rad].
    radius_km : float, optional
        Earth radius [km].

    Returns
    -------
    ndarray or float
        Slant range D [km].

    Notes
    -----
    Wertz and Larson [1]_, sec. 5.2 (law of sines): :math:`D = R \\sin\\lambda /
    \\sin\\eta`. At nadir both sines vanish and the limit :math:`D = h` is returned
    (for :math:`\\sin\\eta < 10^{-12}`).

    References
    ----------
    .. [1] J. R. Wertz and W. J. Larson, Eds., *Space Mission Analysis and Design*, 3rd
       ed. Torrance, CA: Microcosm Press, 1999, sec. 5.2.
    """
    h = as_float(alt_km)
    check_altitude(h)
    lam = as_float(lambda_rad)
    eta = as_float(eta_rad)
    _check_angle(lam, "lambda_rad", 0.0, math.pi / 2, "a central angle in [0, pi/2] rad")
    _check_angle(eta, "eta_rad", 0.0, math.pi / 2, "a nadir angle in [0, pi/2] rad")
    sin_eta = np.sin(eta)
    near_nadir = sin_eta < 1e-12
    d = np.where(near_nadir, h, radius_km * np.sin(lam) / np.where(near_nadir, 1.0, sin_eta))
    return scalar_or_array(d)


@dataclass(frozen=True)
class Footprint:
    """Edge of a satellite's coverage circle on a spherical Earth.

    Attributes
    ----------
    central_angle_rad : ndarray or float
        Earth central angle lambda from the sub-satellite point to the edge [rad].
    nadir_angle_rad : ndarray or float
        Nadir angle eta of the edge, seen from the satellite [rad].
    elevation_rad : ndarray or float
        Elevation epsilon of the satellite seen from the edge [rad].
    slant_range_km : ndarray or float
        Distance from the satellite to the edge [km].
    """

    central_angle_rad: np.ndarray | float
    nadir_angle_rad: np.ndarray | float
    elevation_rad: np.ndarray | float
    slant_range_km: np.ndarray | float


def footprint(
    alt_km: Any,
    min_elevation_rad: Any = 0.0,
    max_off_nadir_rad: Any = None,
    *,
    radius_km: float = EARTH_RADIUS_KM,
) -> Footprint:
    """Return the coverage circle edge set by a minimum elevation and an off-nadir limit.

    Parameters
    ----------
    alt_km : array_like
        Altitude [km], > 0.
    min_elevation_rad : array_like, optional
        Minimum elevation of the satellite above a ground point's horizon [rad]; default 0.
    max_off_nadir_rad : array_like, optional
        Sensor half-angle from nadir [rad]; default None (no sensor limit). Values beyond
        the Earth's limb are clamped to the horizon.
    radius_km : float, optional
        Earth radius [km]; default ``constants.EARTH_RADIUS_KM`` (spherical Earth).

    Returns
    -------
    Footprint
        Central angle, nadir angle, elevation and slant range at the edge, for the tighter
        of the two limits.

    Notes
    -----
    Wertz and Larson [1]_, sec. 5.2 (Eqs. 5-15 to 5-27, numbers from memory): the
    elevation limit gives
    :math:`\\sin\\eta_\\varepsilon = \\cos\\varepsilon_{min} \\sin\\rho`; the sensor
    limit gives :math:`\\eta_s`; the edge is at :math:`\\eta = \\min(\\eta_\\varepsilon,
    \\eta_s)`, with :math:`\\cos\\varepsilon = \\sin\\eta/\\sin\\rho`,
    :math:`\\lambda = 90^\\circ - \\eta - \\varepsilon`, :math:`D = R\\sin\\lambda/\\sin\\eta`.

    References
    ----------
    .. [1] J. R. Wertz and W. J. Larson, Eds., *Space Mission Analysis and Design*, 3rd
       ed. Torrance, CA: Microcosm Press, 1999, sec. 5.2.
    """
    h = as_float(alt_km)
    el_min = as_float(min_elevation_rad)
    _check_angle(el_min, "min_elevation_rad", 0.0, math.pi / 2, "an elevation in [0, pi/2] rad")
    eta = as_float(nadir_angle_from_elevation(h, el_min, radius_km=radius_km))
    el = np.broadcast_to(el_min, np.broadcast_shapes(eta.shape, el_min.shape)).astype(float)
    if max_off_nadir_rad is not None:
        eta_s = as_float(max_off_nadir_rad)
        _check_angle(
            eta_s, "max_off_nadir_rad", 0.0, math.pi / 2, "a sensor half-angle in [0, pi/2] rad"
        )
        sensor_tighter = eta_s < eta
        el = np.where(
            sensor_tighter,
            as_float(elevation_from_nadir(h, np.minimum(eta_s, eta), radius_km=radius_km)),
            el,
        )
        eta = np.minimum(eta_s, eta)
    lam = 0.5 * np.pi - eta - el
    d = as_float(slant_range_km(h, np.maximum(lam, 0.0), eta, radius_km=radius_km))
    return Footprint(scalar_or_array(lam), scalar_or_array(eta), scalar_or_array(el),
                     scalar_or_array(d))
