"""Special orbits: period and mean motion, sun-synchronous, repeat ground track, critical.

Units: km, s, rad in and out (degrees only at the edges of the package). Functions
broadcast over array inputs and return a float for scalar inputs, except
:func:`repeat_ground_track_a`, which is scalar.
"""

from __future__ import annotations

import math
from typing import Any

import numpy as np

from covergrid.constants import (
    EARTH_RADIUS_KM,
    MU_EARTH_KM3_S2,
    OMEGA_EARTH_RAD_S,
    SECONDS_PER_DAY,
    TROPICAL_YEAR_DAYS,
    TWO_PI,
)
from covergrid.errors import ElementError
from covergrid.orbits.checks import (
    as_float,
    check_eccentricity,
    check_semi_major_axis,
    require,
    scalar_or_array,
)
from covergrid.orbits.j2 import secular_rates

__all__ = [
    "SUN_SYNC_RAAN_RATE_RAD_S",
    "critical_inclination",
    "mean_motion_rad_s",
    "period_s",
    "repeat_ground_track_a",
    "semi_major_axis_km",
    "sun_synchronous_inclination",
]

# Node rate of a sun-synchronous orbit: one turn per tropical year [rad/s].
SUN_SYNC_RAAN_RATE_RAD_S = TWO_PI / (TROPICAL_YEAR_DAYS * SECONDS_PER_DAY)


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
    a = as_float(a_km)
    check_semi_major_axis(a)
    return scalar_or_array(TWO_PI * np.sqrt(a**3 / mu_km3_s2))


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
    a = as_float(a_km)
    check_semi_major_axis(a)
    return scalar_or_array(np.sqrt(mu_km3_s2 / a**3))


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
    p = as_float(period_s)
    require(np.isfinite(p) & (p > 0.0), p, "period_s", "a finite period > 0 s")
    return scalar_or_array(np.cbrt(mu_km3_s2 * (p / TWO_PI) ** 2))


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
    a, ecc = np.broadcast_arrays(as_float(a_km), as_float(e))
    check_semi_major_axis(a)
    check_eccentricity(ecc)
    # node rate for cos i = 1; the SSO needs raan_dot(i) = cos i * rate_at_cos1
    rate_at_cos1, _, _ = secular_rates(a, ecc, np.zeros_like(a))
    cos_i = SUN_SYNC_RAAN_RATE_RAD_S / np.asarray(rate_at_cos1)
    require(
        cos_i >= -1.0,
        a,
        "a_km",
        "an orbit low enough that J2 can turn the node 360 deg per tropical year "
        "(circular orbits below about 12,350 km)",
    )
    return scalar_or_array(np.arccos(cos_i))


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
    require(np.isfinite(np.float64(inc)), np.float64(inc), "i_rad", "a finite angle [rad]")
    check_eccentricity(np.float64(ecc))

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
    from scipy.optimize import brentq  # here, not at import: study checks stay light

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
