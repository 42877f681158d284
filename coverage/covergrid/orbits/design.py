"""Orbit design helpers: period, sun-synchronous inclination, repeat ground track, footprint.

Units: km, s, rad in and out (degrees only at the edges of the package). The footprint
geometry uses a spherical Earth of radius ``constants.EARTH_RADIUS_KM`` (the WGS 84
equatorial radius); it sizes the search window of the coverage kernel, which then applies
the exact ellipsoid test per cell. Functions broadcast over array inputs and return a
float for scalar inputs, except :func:`repeat_ground_track_a`, which is scalar.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

import numpy as np
from scipy.optimize import brentq

from covergrid.constants import (
    EARTH_RADIUS_KM,
    MU_EARTH_KM3_S2,
    OMEGA_EARTH_RAD_S,
    SECONDS_PER_DAY,
    TROPICAL_YEAR_DAYS,
    TWO_PI,
)
from covergrid.errors import CovergridError, ElementError
from covergrid.orbits.j2 import secular_rates

__all__ = [
    "period_s",
    "mean_motion_rad_s",
    "semi_major_axis_km",
    "sun_synchronous_inclination",
    "repeat_ground_track_a",
    "critical_inclination",
    "angular_radius_rho",
    "nadir_angle_from_elevation",
    "central_angle_from_elevation",
    "central_angle_from_nadir",
    "elevation_from_nadir",
    "slant_range_km",
    "Footprint",
    "footprint",
]

# Node rate of a sun-synchronous orbit: one turn per tropical year [rad/s].
SUN_SYNC_RAAN_RATE_RAD_S = TWO_PI / (TROPICAL_YEAR_DAYS * SECONDS_PER_DAY)


def _f64(x: Any) -> np.ndarray:
    return np.asarray(x, dtype=np.float64)


def _ret(x: np.ndarray) -> np.ndarray | float:
    return float(x) if np.ndim(x) == 0 else x


def _require(
    ok: np.ndarray,
    values: np.ndarray,
    field: str,
    allowed: str,
    error: type[CovergridError] = ElementError,
) -> None:
    """Raise `error` naming the first value where `ok` is False."""
    ok = np.asarray(ok)
    if not np.all(ok):
        flat = np.ravel(np.broadcast_to(values, ok.shape))
        first = int(np.flatnonzero(~np.ravel(ok))[0])
        where = f"[{first}]" if ok.ndim else ""
        raise error(f"{field}{where} = {flat[first]!r} is invalid; allowed: {allowed}", field=field)


def _check_a(a: np.ndarray, field: str = "a_km") -> None:
    _require(np.isfinite(a) & (a > 0.0), a, field, "a finite semi-major axis > 0 km")


def _check_e(e: np.ndarray, field: str = "e") -> None:
    _require(np.isfinite(e) & (e >= 0.0) & (e < 1.0), e, field, "0 <= e < 1")


def _check_alt(h: np.ndarray) -> None:
    _require(np.isfinite(h) & (h > 0.0), h, "alt_km", "a finite altitude > 0 km")


# --------------------------------------------------------------------------------------
# Two-body period and mean motion
# --------------------------------------------------------------------------------------
def period_s(a_km: Any, *, mu_km3_s2: float = MU_EARTH_KM3_S2) -> np.ndarray | float:
    """Return the two-body (Keplerian) orbital period.

    Parameters
    ----------
    a_km : array_like
        Semi-major axis [km].
    mu_km3_s2 : float, optional
        Gravitational parameter [km^3/s^2].

    Returns
    -------
    ndarray or float
        Period :math:`T = 2\\pi\\sqrt{a^3/\\mu}` [s].

    Notes
    -----
    Kepler's third law (Vallado, *Fundamentals of Astrodynamics and Applications*, 4th
    ed., sec. 1.3, Eq. 1-28 from memory; Curtis, 3rd ed., Eq. 2.83).
    """
    a = _f64(a_km)
    _check_a(a)
    return _ret(TWO_PI * np.sqrt(a**3 / mu_km3_s2))


def mean_motion_rad_s(a_km: Any, *, mu_km3_s2: float = MU_EARTH_KM3_S2) -> np.ndarray | float:
    """Return the two-body mean motion.

    Parameters
    ----------
    a_km : array_like
        Semi-major axis [km].
    mu_km3_s2 : float, optional
        Gravitational parameter [km^3/s^2].

    Returns
    -------
    ndarray or float
        :math:`n = \\sqrt{\\mu/a^3}` [rad/s].

    Notes
    -----
    Kepler's third law (Vallado, *Fundamentals of Astrodynamics and Applications*, 4th
    ed., sec. 1.3).
    """
    a = _f64(a_km)
    _check_a(a)
    return _ret(np.sqrt(mu_km3_s2 / a**3))


def semi_major_axis_km(period_s: Any, *, mu_km3_s2: float = MU_EARTH_KM3_S2) -> np.ndarray | float:
    """Return the semi-major axis of a two-body orbit with the given period.

    Parameters
    ----------
    period_s : array_like
        Orbital period [s].
    mu_km3_s2 : float, optional
        Gravitational parameter [km^3/s^2].

    Returns
    -------
    ndarray or float
        :math:`a = (\\mu (T / 2\\pi)^2)^{1/3}` [km].

    Notes
    -----
    Kepler's third law inverted (Vallado, *Fundamentals of Astrodynamics and
    Applications*, 4th ed., sec. 1.3).
    """
    p = _f64(period_s)
    _require(np.isfinite(p) & (p > 0.0), p, "period_s", "a finite period > 0 s")
    return _ret(np.cbrt(mu_km3_s2 * (p / TWO_PI) ** 2))


# --------------------------------------------------------------------------------------
# Sun-synchronous, repeat ground track, critical inclination
# --------------------------------------------------------------------------------------
def sun_synchronous_inclination(a_km: Any, e: Any = 0.0) -> np.ndarray | float:
    """Return the inclination at which secular J2 turns the node once per tropical year.

    Parameters
    ----------
    a_km : array_like
        Mean semi-major axis [km].
    e : array_like, optional
        Mean eccentricity [unitless]; default 0.

    Returns
    -------
    ndarray or float
        Sun-synchronous inclination, retrograde, in (90 deg, 180 deg] [rad].

    Raises
    ------
    ElementError
        If a or e is out of range, or the orbit is too high for J2 to reach the required
        node rate (:math:`|\\cos i| > 1`), which happens above about a = 12,350 km
        for circular orbits.

    Notes
    -----
    Setting the secular node rate of :func:`covergrid.orbits.j2.secular_rates`
    (Vallado, *Fundamentals of Astrodynamics and Applications*, 4th ed., sec. 9.6,
    Eq. 9-41) equal to the mean motion of the Sun, one turn per tropical year
    (Vallado, sec. 11.4.1), and solving for i:

    .. math::

        \\cos i = -\\frac{2\\,\\dot\\Omega_{\\odot}}{3 n J_2 (R/p)^2},
        \\qquad \\dot\\Omega_{\\odot} = \\frac{2\\pi}{365.2421897\\ \\mathrm{d}}
    """
    a, ecc = np.broadcast_arrays(_f64(a_km), _f64(e))
    _check_a(a)
    _check_e(ecc)
    # node rate for cos i = 1; the SSO needs raan_dot(i) = cos i * rate_at_cos1
    rate_at_cos1, _, _ = secular_rates(a, ecc, np.zeros_like(a))
    cos_i = SUN_SYNC_RAAN_RATE_RAD_S / np.asarray(rate_at_cos1)
    _require(
        cos_i >= -1.0,
        a,
        "a_km",
        "an orbit low enough that J2 can turn the node 360 deg per tropical year "
        "(circular orbits below about 12,350 km)",
    )
    return _ret(np.arccos(cos_i))


def repeat_ground_track_a(k_revs: int, d_days: int, i_rad: float, e: float = 0.0) -> float:
    """Return the mean semi-major axis of a repeat ground track with secular J2.

    Parameters
    ----------
    k_revs : int
        Number of nodal revolutions in one repeat cycle [unitless], > 0.
    d_days : int
        Number of nodal days in one repeat cycle [unitless], > 0.
    i_rad : float
        Mean inclination [rad].
    e : float, optional
        Mean eccentricity [unitless]; default 0.

    Returns
    -------
    float
        Mean semi-major axis [km].

    Raises
    ------
    ElementError
        If the inputs are out of range or no orbit above the Earth's surface repeats
        k revolutions in d days.

    Notes
    -----
    The ground track repeats when k nodal periods equal d nodal days (Vallado,
    *Fundamentals of Astrodynamics and Applications*, 4th ed., sec. 11.4.2; Wertz,
    *Mission Geometry*, sec. 9.2; both from memory). The nodal period is one turn of the
    argument of latitude, and the nodal day one turn of the Earth relative to the
    drifting node, with the secular J2 rates of Eq. 9-41:

    .. math::

        k \\frac{2\\pi}{\\dot M + \\dot\\omega} = d \\frac{2\\pi}{\\omega_E - \\dot\\Omega}
        \\iff k(\\omega_E - \\dot\\Omega) - d(\\dot M + \\dot\\omega) = 0.

    The root is found with Brent's method on a bracket around the two-body answer
    :math:`a_0 = (\\mu / (k\\omega_E/d)^2)^{1/3}` (J2 moves a by well under 1 %).
    """
    for name, val in (("k_revs", k_revs), ("d_days", d_days)):
        if isinstance(val, bool) or not isinstance(val, (int, np.integer)) or val <= 0:
            raise ElementError(f"{name} = {val!r} is invalid; allowed: an integer > 0", field=name)
    inc = float(i_rad)
    ecc = float(e)
    _require(np.isfinite(np.float64(inc)), np.float64(inc), "i_rad", "a finite angle [rad]")
    _check_e(np.float64(ecc))

    def mismatch(a: float) -> float:
        raan_dot, argp_dot, m_dot = secular_rates(a, ecc, inc)
        return float(k_revs * (OMEGA_EARTH_RAD_S - raan_dot) - d_days * (m_dot + argp_dot))

    n0 = k_revs * OMEGA_EARTH_RAD_S / d_days
    a0 = (MU_EARTH_KM3_S2 / n0**2) ** (1.0 / 3.0)
    lo, hi = 0.95 * a0, 1.05 * a0
    if not mismatch(lo) < 0.0 < mismatch(hi):  # pragma: no cover - J2 << 5 % in a
        raise ElementError(
            f"no repeat ground track of {k_revs} revs in {d_days} days near a = {a0:.1f} km",
            field="k_revs",
        )
    a = float(brentq(mismatch, lo, hi, xtol=1e-9, rtol=4 * np.finfo(float).eps, maxiter=200))
    if a * (1.0 - ecc) <= EARTH_RADIUS_KM:
        raise ElementError(
            f"k_revs/d_days = {k_revs}/{d_days} needs a = {a:.1f} km, whose perigee "
            f"{a * (1.0 - ecc) - EARTH_RADIUS_KM:.1f} km is below the surface; allowed: "
            "fewer revolutions per day",
            field="k_revs",
        )
    return a


def critical_inclination() -> tuple[float, float]:
    """Return the two inclinations at which secular J2 freezes the argument of perigee.

    Returns
    -------
    tuple of float
        arccos(1/sqrt 5) = 63.4349 deg and its supplement 116.5651 deg [rad].

    Notes
    -----
    The perigee rate of Vallado, *Fundamentals of Astrodynamics and Applications*, 4th
    ed., Eq. 9-41, is proportional to :math:`4 - 5\\sin^2 i`, which vanishes at
    :math:`\\cos^2 i = 1/5`.
    """
    i_c = math.acos(1.0 / math.sqrt(5.0))
    return i_c, math.pi - i_c


# --------------------------------------------------------------------------------------
# Footprint geometry on a spherical Earth (Wertz & Larson, SMAD 3rd ed., sec. 5.2)
# --------------------------------------------------------------------------------------
_SMAD = (
    "J. R. Wertz and W. J. Larson, Eds., *Space Mission Analysis and Design*, 3rd ed. "
    "Torrance, CA: Microcosm Press, 1999, sec. 5.2"
)


def _check_angle(x: np.ndarray, field: str, lo: float, hi: float, text: str) -> None:
    _require(np.isfinite(x) & (x >= lo) & (x <= hi), x, field, text, CovergridError)


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
    h = _f64(alt_km)
    _check_alt(h)
    return _ret(np.arcsin(radius_km / (radius_km + h)))


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
    el = _f64(min_el_rad)
    _check_angle(el, "min_el_rad", 0.0, math.pi / 2, "an elevation in [0, pi/2] rad")
    sin_rho = np.sin(_f64(angular_radius_rho(alt_km, radius_km=radius_km)))
    return _ret(np.arcsin(np.cos(el) * sin_rho))


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
    eta = _f64(nadir_angle_from_elevation(alt_km, min_el_rad, radius_km=radius_km))
    return _ret(0.5 * np.pi - eta - _f64(min_el_rad))


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
    eta = _f64(eta_rad)
    _check_angle(eta, "eta_rad", 0.0, math.pi / 2, "a nadir angle in [0, pi/2] rad")
    sin_rho = np.sin(_f64(angular_radius_rho(alt_km, radius_km=radius_km)))
    ratio = np.minimum(np.sin(eta) / sin_rho, 1.0)  # beyond the limb -> horizon
    return _ret(np.arccos(ratio))


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
    eta = _f64(eta_rad)
    rho = _f64(angular_radius_rho(alt_km, radius_km=radius_km))
    el = _f64(elevation_from_nadir(alt_km, eta, radius_km=radius_km))
    return _ret(0.5 * np.pi - np.minimum(eta, rho) - el)


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
    h = _f64(alt_km)
    _check_alt(h)
    lam = _f64(lambda_rad)
    eta = _f64(eta_rad)
    _check_angle(lam, "lambda_rad", 0.0, math.pi / 2, "a central angle in [0, pi/2] rad")
    _check_angle(eta, "eta_rad", 0.0, math.pi / 2, "a nadir angle in [0, pi/2] rad")
    sin_eta = np.sin(eta)
    near_nadir = sin_eta < 1e-12
    d = np.where(near_nadir, h, radius_km * np.sin(lam) / np.where(near_nadir, 1.0, sin_eta))
    return _ret(d)


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
    h = _f64(alt_km)
    el_min = _f64(min_elevation_rad)
    _check_angle(el_min, "min_elevation_rad", 0.0, math.pi / 2, "an elevation in [0, pi/2] rad")
    eta = _f64(nadir_angle_from_elevation(h, el_min, radius_km=radius_km))
    el = np.broadcast_to(el_min, np.broadcast_shapes(eta.shape, el_min.shape)).astype(float)
    if max_off_nadir_rad is not None:
        eta_s = _f64(max_off_nadir_rad)
        _check_angle(
            eta_s, "max_off_nadir_rad", 0.0, math.pi / 2, "a sensor half-angle in [0, pi/2] rad"
        )
        sensor_tighter = eta_s < eta
        el = np.where(
            sensor_tighter,
            _f64(elevation_from_nadir(h, np.minimum(eta_s, eta), radius_km=radius_km)),
            el,
        )
        eta = np.minimum(eta_s, eta)
    lam = 0.5 * np.pi - eta - el
    d = _f64(slant_range_km(h, np.maximum(lam, 0.0), eta, radius_km=radius_km))
    return Footprint(_ret(lam), _ret(eta), _ret(el), _ret(d))
