"""Classical orbital elements: Kepler's equation, anomalies, Kepler <-> Cartesian.

All functions broadcast over NumPy arrays; Cartesian vectors have the vector axis last,
``(..., 3)``. Lengths are kilometres, times seconds, angles radians. Scalar input gives
NumPy scalars back, array input arrays.

Sign convention for open orbits: the semi-major axis of a hyperbola (``e > 1``) is
negative, so that ``p = a (1 - e**2) > 0`` and the vis-viva energy ``-mu / (2 a)`` is
positive. A parabola (``e == 1``) has no finite semi-major axis; give the semi-latus
rectum ``p_km`` instead.

Vectorised functions never raise per element: an element they cannot convert (``e`` out
of range, a true anomaly beyond a hyperbola's asymptote, a zero position) comes back as
NaN. Raising with a named field is the job of :func:`validate_elements` and
:func:`validate_state`, which callers use where data enters.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike

from covergrid.constants import EARTH_RADIUS_KM, MU_EARTH_KM3_S2, TWO_PI
from covergrid.errors import ElementError

__all__ = [
    "ECCENTRICITY_TOL",
    "INCLINATION_TOL_RAD",
    "ORBIT_TYPE_MEANINGS",
    "KeplerElements",
    "cartesian_to_kepler",
    "eccentric_to_mean",
    "eccentric_to_true",
    "hyperbolic_to_mean",
    "hyperbolic_to_true",
    "kepler_to_cartesian",
    "mean_to_eccentric",
    "mean_to_hyperbolic",
    "mean_to_true",
    "solve_kepler",
    "solve_kepler_hyperbolic",
    "true_to_eccentric",
    "true_to_hyperbolic",
    "true_to_mean",
    "validate_elements",
    "validate_state",
]

# Tolerances of the special cases in cartesian_to_kepler. Vallado's RV2COE uses 1e-8 for
# both (as does its port in the sgp4 package, sgp4.ext.rv2coe). We use 1e-11: folding a
# circular orbit (argp -> 0, nu -> argument of latitude) keeps the direction of r but
# changes its length by up to 2 |r| e, and folding an equatorial one (raan -> 0) tilts r out
# of its plane by up to 2 |r| i; for |r| < 50,000 km both stay below one millimetre. 1e-11
# is still four orders of magnitude above the rounding noise of e and i computed from r
# and v (~1e-15).
ECCENTRICITY_TOL = 1e-11  # [unitless] e below this counts as circular
INCLINATION_TOL_RAD = 1e-11  # [rad] i below this (or above pi minus this) counts as equatorial

# orbit_type codes of KeplerElements (integer status codes, NaN elements for -1).
ORBIT_DEGENERATE = -1
ORBIT_NONCIRCULAR_INCLINED = 0
ORBIT_CIRCULAR_INCLINED = 1
ORBIT_NONCIRCULAR_EQUATORIAL = 2
ORBIT_CIRCULAR_EQUATORIAL = 3
ORBIT_TYPE_MEANINGS: dict[int, str] = {
    ORBIT_DEGENERATE: "degenerate: non-finite input, zero position or zero angular momentum",
    ORBIT_NONCIRCULAR_INCLINED: "non-circular inclined (general case)",
    ORBIT_CIRCULAR_INCLINED: "circular inclined: argp = 0, nu = argument of latitude",
    ORBIT_NONCIRCULAR_EQUATORIAL: (
        "non-circular equatorial: raan = 0, argp = longitude of periapsis"
    ),
    ORBIT_CIRCULAR_EQUATORIAL: "circular equatorial: raan = argp = 0, nu = true longitude",
}

_EPS = np.finfo(np.float64).eps
_MAX_ITER = 100  # bisection alone halves a bracket of width pi to 1e-16 in 55 steps
_DANBY_PASSES = 3  # quartic passes; the residual step after them decides who needs more
_STEP_TOL_RAD = 1e-10  # a Newton step this small leaves an error ~ (f''/2f') step^2 < 1e-17


def _out(x: np.ndarray) -> np.ndarray:
    """Return a NumPy scalar for 0-d arrays, else the array."""
    return x[()] if x.ndim == 0 else x


def _wrap_2pi(x: np.ndarray) -> np.ndarray:
    """Wrap angles to [0, 2 pi) (np.mod can round a tiny negative angle up to 2 pi)."""
    y = np.mod(x, TWO_PI)
    return np.where(y >= TWO_PI, 0.0, y)


# --------------------------------------------------------------------------------------
# Kepler's equation
# --------------------------------------------------------------------------------------


def solve_kepler(M_rad: ArrayLike, e: ArrayLike) -> np.ndarray:
    r"""Solve the elliptic Kepler equation for the eccentric anomaly.

    Starts from Danby's ``E0 = M + 0.85 e`` and applies three of Danby's quartic
    corrections [1]_ to the whole array; elements whose last correction was still larger
    than 1e-10 rad (near ``M = 0`` with ``e`` close to 1) continue with Newton's method
    inside a bracket, falling back to bisection when a step would leave it.

    Parameters
    ----------
    M_rad : array_like
        Mean anomaly, any real value [rad].
    e : array_like
        Eccentricity, ``0 <= e < 1`` (tested up to 0.999) [unitless]. Broadcasts with
        ``M_rad``.

    Returns
    -------
    E_rad : ndarray
        Eccentric anomaly on the same revolution as ``M_rad`` (``E = M`` at multiples of
        pi) [rad]. NaN where ``e`` is outside ``[0, 1)`` or an input is not finite.

    Notes
    -----
    Kepler's equation (Vallado [2]_, Eq. 2-4):

    .. math:: M = E - e \sin E

    ``M`` is reduced to ``[-pi, pi]`` and, by odd symmetry, to ``[0, pi]``, where the root
    lies in ``[M, min(M + e, pi)]``; ``f(E) = E - e sin E - M`` is increasing there, so
    the bracket guarantees convergence for every ``e < 1``.

    References
    ----------
    .. [1] J. M. A. Danby, "The solution of Kepler's equation, III", Celestial Mechanics,
       vol. 40, pp. 303-312, 1987, doi:10.1007/BF01235847.
    .. [2] D. A. Vallado, Fundamentals of Astrodynamics and Applications, 5th ed.,
       Microcosm Press, 2022, sec. 2.2, Algorithm 2.
    """
    M, e = np.broadcast_arrays(np.asarray(M_rad, dtype=np.float64), np.asarray(e, np.float64))
    k = np.round(M / TWO_PI)
    Mr = M - TWO_PI * k  # [-pi, pi]
    sign = np.where(Mr < 0.0, -1.0, 1.0)
    Ma = np.abs(Mr)
    good = np.isfinite(M) & np.isfinite(e) & (e >= 0.0) & (e < 1.0)

    Ma_g = Ma[good]
    e_g = e[good]
    lo = Ma_g.copy()
    hi = np.minimum(Ma_g + e_g, np.pi)
    E = np.clip(Ma_g + 0.85 * e_g, lo, hi)  # Danby's starter [1]_
    # Danby's quartic correction [1]_, Eqs. (9)-(11), on the whole array ...
    for _ in range(_DANBY_PASSES):
        se, ce = e_g * np.sin(E), e_g * np.cos(E)
        f0, f1 = E - se - Ma_g, 1.0 - ce
        d = -f0 / f1
        d = -f0 / (f1 + 0.5 * d * se)
        d = -f0 / (f1 + 0.5 * d * se + d * d * ce / 6.0)
        E = np.clip(E + d, lo, hi)
    # ... then bracketed Newton for the few elements whose last correction was not tiny
    # (near M = 0 with e close to 1, where the quartic series converges slowly).
    slow = ~(np.abs(d) <= _STEP_TOL_RAD)
    if np.any(slow):
        E[slow] = _bracketed_newton(E[slow], lo[slow], hi[slow], Ma_g[slow], e_g[slow])
    Eg = E

    out = np.full(M.shape, np.nan)
    out[good] = Eg
    return _out(sign * out + TWO_PI * k)


def _bracketed_newton(
    E: np.ndarray, lo: np.ndarray, hi: np.ndarray, M: np.ndarray, e: np.ndarray
) -> np.ndarray:
    """Newton-with-bisection on ``E - e sin E - M = 0`` within ``[lo, hi]`` (1-D arrays)."""
    active = np.arange(E.size)
    for _ in range(_MAX_ITER):
        if active.size == 0:
            break
        Ea, ea, Ma = E[active], e[active], M[active]
        lo_a, hi_a = lo[active], hi[active]
        f = Ea - ea * np.sin(Ea) - Ma
        fp = 1.0 - ea * np.cos(Ea)
        above = f > 0.0
        hi_a = np.where(above, Ea, hi_a)
        lo_a = np.where(above, lo_a, Ea)
        E_new = Ea - f / fp
        outside = (E_new < lo_a) | (E_new > hi_a)
        E_new = np.where(outside, 0.5 * (lo_a + hi_a), E_new)
        step_ok = ~outside & (np.abs(E_new - Ea) <= _STEP_TOL_RAD)
        narrow = (hi_a - lo_a) <= 4.0 * _EPS * np.maximum(1.0, hi_a)
        done = step_ok | narrow | (f == 0.0)
        E[active] = np.where(f == 0.0, Ea, E_new)
        lo[active], hi[active] = lo_a, hi_a
        active = active[~done]
    return E


def _sinh_minus_x(x: np.ndarray) -> np.ndarray:
    """``sinh(x) - x`` without cancellation: Taylor series for ``|x| < 1``."""
    x2 = x * x
    series = 1.0 + x2 / 342.0
    for d in (272.0, 210.0, 156.0, 110.0, 72.0, 42.0, 20.0):  # (2k + 2)(2k + 3)
        series = 1.0 + x2 / d * series
    with np.errstate(over="ignore", invalid="ignore"):
        return np.where(np.abs(x) < 1.0, x * x2 / 6.0 * series, np.sinh(x) - x)


def solve_kepler_hyperbolic(M_rad: ArrayLike, e: ArrayLike) -> np.ndarray:
    r"""Solve the hyperbolic Kepler equation for the hyperbolic anomaly.

    Newton's method started to the right of the root, where the convexity of
    ``f(H) = e sinh H - H - M`` makes the iterates decrease monotonically to the root, so
    it converges for every ``e > 1`` and every ``M`` without overflow.

    Parameters
    ----------
    M_rad : array_like
        Hyperbolic mean anomaly, any real value [rad].
    e : array_like
        Eccentricity, ``e > 1`` [unitless]. Broadcasts with ``M_rad``.

    Returns
    -------
    H_rad : ndarray
        Hyperbolic anomaly [rad]. NaN where ``e <= 1`` or an input is not finite.

    Notes
    -----
    Hyperbolic Kepler equation (Vallado, Fundamentals of Astrodynamics and Applications,
    5th ed., Eq. 2-38; Curtis, Orbital Mechanics for Engineering Students, 3rd ed.,
    Eq. 3.40):

    .. math:: M = e \sinh H - H

    For ``M >= 0`` the root satisfies ``sinh H = (M + H)/e`` and ``H <= M/(e - 1)``, so
    ``H <= asinh(M/(e - 1))``; also ``e sinh H - H >= (e - 1) H + e H^3/6`` gives
    ``H <= (6 M / e)^(1/3)``. The start is the smaller of the two bounds.
    """
    M, e = np.broadcast_arrays(np.asarray(M_rad, dtype=np.float64), np.asarray(e, np.float64))
    good = np.isfinite(M) & np.isfinite(e) & (e > 1.0)
    sign = np.where(M < 0.0, -1.0, 1.0)
    Ma = np.abs(M[good])
    eg = e[good]
    with np.errstate(over="ignore", divide="ignore"):
        H = np.minimum(np.arcsinh(Ma / (eg - 1.0)), np.cbrt(6.0 * Ma / eg))
    lo = np.arcsinh(Ma / eg)  # f(lo) = -lo <= 0
    active = np.arange(H.size)
    for _ in range(_MAX_ITER):
        if active.size == 0:
            break
        Ha, ea, Mh = H[active], eg[active], Ma[active]
        # e sinh H - H - M written as (e - 1) sinh H + (sinh H - H) - M: no cancellation
        # near e = 1 with small H (near-parabolic orbits)
        f = (ea - 1.0) * np.sinh(Ha) + _sinh_minus_x(Ha) - Mh
        fp = ea * np.cosh(Ha) - 1.0
        H_new = np.maximum(Ha - f / fp, lo[active])
        step = np.abs(H_new - Ha)
        done = (step <= _STEP_TOL_RAD * np.maximum(1.0, Ha)) | (f == 0.0)
        H[active] = H_new
        active = active[~done]
    out = np.full(M.shape, np.nan)
    out[good] = H
    return _out(sign * out)


# --------------------------------------------------------------------------------------
# Anomaly conversions
# --------------------------------------------------------------------------------------


def _f64(*xs: ArrayLike) -> list[np.ndarray]:
    return list(np.broadcast_arrays(*(np.asarray(x, dtype=np.float64) for x in xs)))


def true_to_eccentric(nu_rad: ArrayLike, e: ArrayLike) -> np.ndarray:
    r"""Convert true anomaly to eccentric anomaly (ellipse).

    Parameters
    ----------
    nu_rad : array_like
        True anomaly [rad].
    e : array_like
        Eccentricity, ``0 <= e < 1`` [unitless].

    Returns
    -------
    E_rad : ndarray
        Eccentric anomaly on the same revolution as ``nu_rad`` [rad]; NaN for ``e``
        outside ``[0, 1)``.

    Notes
    -----
    Half-angle relation (Vallado, Fundamentals of Astrodynamics and Applications, 5th ed.,
    Eq. 2-14; Curtis, 3rd ed., Eq. 3.13b):

    .. math:: \tan\frac{E}{2} = \sqrt{\frac{1-e}{1+e}} \tan\frac{\nu}{2}
    """
    nu, e = _f64(nu_rad, e)
    k = np.round(nu / TWO_PI)
    half = 0.5 * (nu - TWO_PI * k)  # [-pi/2, pi/2]: cos(half) >= 0 keeps E on nu's branch
    with np.errstate(invalid="ignore"):
        E = 2.0 * np.arctan2(np.sqrt(1.0 - e) * np.sin(half), np.sqrt(1.0 + e) * np.cos(half))
    E = np.where((e >= 0.0) & (e < 1.0), E + TWO_PI * k, np.nan)
    return _out(E)


def eccentric_to_true(E_rad: ArrayLike, e: ArrayLike) -> np.ndarray:
    r"""Convert eccentric anomaly to true anomaly (ellipse).

    Parameters
    ----------
    E_rad : array_like
        Eccentric anomaly [rad].
    e : array_like
        Eccentricity, ``0 <= e < 1`` [unitless].

    Returns
    -------
    nu_rad : ndarray
        True anomaly on the same revolution as ``E_rad`` [rad]; NaN for ``e`` outside
        ``[0, 1)``.

    Notes
    -----
    Inverse of the half-angle relation (Vallado, 5th ed., Eq. 2-14):

    .. math:: \tan\frac{\nu}{2} = \sqrt{\frac{1+e}{1-e}} \tan\frac{E}{2}
    """
    E, e = _f64(E_rad, e)
    k = np.round(E / TWO_PI)
    half = 0.5 * (E - TWO_PI * k)
    with np.errstate(invalid="ignore"):
        nu = 2.0 * np.arctan2(np.sqrt(1.0 + e) * np.sin(half), np.sqrt(1.0 - e) * np.cos(half))
    nu = np.where((e >= 0.0) & (e < 1.0), nu + TWO_PI * k, np.nan)
    return _out(nu)


def eccentric_to_mean(E_rad: ArrayLike, e: ArrayLike) -> np.ndarray:
    r"""Convert eccentric anomaly to mean anomaly by Kepler's equation.

    Parameters
    ----------
    E_rad : array_like
        Eccentric anomaly [rad].
    e : array_like
        Eccentricity, ``0 <= e < 1`` [unitless].

    Returns
    -------
    M_rad : ndarray
        Mean anomaly [rad]; NaN for ``e`` outside ``[0, 1)``.

    Notes
    -----
    Kepler's equation (Vallado, 5th ed., Eq. 2-4): :math:`M = E - e \sin E`.
    """
    E, e = _f64(E_rad, e)
    M = np.where((e >= 0.0) & (e < 1.0), E - e * np.sin(E), np.nan)
    return _out(M)


def mean_to_eccentric(M_rad: ArrayLike, e: ArrayLike) -> np.ndarray:
    """Convert mean anomaly to eccentric anomaly (same as :func:`solve_kepler`).

    Parameters
    ----------
    M_rad : array_like
        Mean anomaly [rad].
    e : array_like
        Eccentricity, ``0 <= e < 1`` [unitless].

    Returns
    -------
    E_rad : ndarray
        Eccentric anomaly [rad].
    """
    return solve_kepler(M_rad, e)


def true_to_hyperbolic(nu_rad: ArrayLike, e: ArrayLike) -> np.ndarray:
    r"""Convert true anomaly to hyperbolic anomaly.

    Parameters
    ----------
    nu_rad : array_like
        True anomaly; only ``|nu| < arccos(-1/e)`` (inside the asymptotes, modulo 2 pi) is
        on the orbit [rad].
    e : array_like
        Eccentricity, ``e > 1`` [unitless].

    Returns
    -------
    H_rad : ndarray
        Hyperbolic anomaly [rad]; NaN beyond the asymptotes or for ``e <= 1``.

    Notes
    -----
    Vallado, 5th ed., Eq. 2-35; Curtis, 3rd ed., Eq. 3.44a:

    .. math:: \tanh\frac{H}{2} = \sqrt{\frac{e-1}{e+1}} \tan\frac{\nu}{2}
    """
    nu, e = _f64(nu_rad, e)
    nu = nu - TWO_PI * np.round(nu / TWO_PI)  # (-pi, pi]
    with np.errstate(invalid="ignore", divide="ignore"):
        t = np.sqrt((e - 1.0) / (e + 1.0)) * np.tan(0.5 * nu)
        H = 2.0 * np.arctanh(t)
    ok = (e > 1.0) & (np.abs(t) < 1.0)
    return _out(np.where(ok, H, np.nan))


def hyperbolic_to_true(H_rad: ArrayLike, e: ArrayLike) -> np.ndarray:
    r"""Convert hyperbolic anomaly to true anomaly.

    Parameters
    ----------
    H_rad : array_like
        Hyperbolic anomaly [rad].
    e : array_like
        Eccentricity, ``e > 1`` [unitless].

    Returns
    -------
    nu_rad : ndarray
        True anomaly in ``(-arccos(-1/e), arccos(-1/e))`` [rad]; NaN for ``e <= 1``.

    Notes
    -----
    Inverse of Vallado, 5th ed., Eq. 2-35:

    .. math:: \tan\frac{\nu}{2} = \sqrt{\frac{e+1}{e-1}} \tanh\frac{H}{2}
    """
    H, e = _f64(H_rad, e)
    with np.errstate(invalid="ignore", divide="ignore"):
        nu = 2.0 * np.arctan(np.sqrt((e + 1.0) / (e - 1.0)) * np.tanh(0.5 * H))
    return _out(np.where(e > 1.0, nu, np.nan))


def hyperbolic_to_mean(H_rad: ArrayLike, e: ArrayLike) -> np.ndarray:
    r"""Convert hyperbolic anomaly to hyperbolic mean anomaly.

    Parameters
    ----------
    H_rad : array_like
        Hyperbolic anomaly [rad].
    e : array_like
        Eccentricity, ``e > 1`` [unitless].

    Returns
    -------
    M_rad : ndarray
        Hyperbolic mean anomaly [rad]; NaN for ``e <= 1``.

    Notes
    -----
    Vallado, 5th ed., Eq. 2-38: :math:`M = e \sinh H - H`, evaluated as
    :math:`(e - 1) \sinh H + (\sinh H - H)` with a series for the bracket at small
    ``H``, which keeps full relative precision for near-parabolic orbits.
    """
    H, e = _f64(H_rad, e)
    with np.errstate(over="ignore", invalid="ignore"):
        M = (e - 1.0) * np.sinh(H) + _sinh_minus_x(H)
    return _out(np.where(e > 1.0, M, np.nan))


def mean_to_hyperbolic(M_rad: ArrayLike, e: ArrayLike) -> np.ndarray:
    """Convert hyperbolic mean anomaly to hyperbolic anomaly (:func:`solve_kepler_hyperbolic`).

    Parameters
    ----------
    M_rad : array_like
        Hyperbolic mean anomaly [rad].
    e : array_like
        Eccentricity, ``e > 1`` [unitless].

    Returns
    -------
    H_rad : ndarray
        Hyperbolic anomaly [rad].
    """
    return solve_kepler_hyperbolic(M_rad, e)


def _barker_true_to_mean(nu: np.ndarray) -> np.ndarray:
    B = np.tan(0.5 * nu)
    return B + B**3 / 3.0


def _barker_mean_to_true(M: np.ndarray) -> np.ndarray:
    # B^3 + 3 B - 3 M = 0 by Cardano: B = s - 1/s with s = cbrt(3M/2 + sqrt(1 + (3M/2)^2)),
    # solved for |M| (odd symmetry) so that s >= 1 and s - 1/s does not cancel badly.
    q = 1.5 * np.abs(M)
    s = np.cbrt(q + np.sqrt(1.0 + q * q))
    B = np.sign(M) * (s - 1.0 / s)
    return 2.0 * np.arctan(B)


def true_to_mean(nu_rad: ArrayLike, e: ArrayLike) -> np.ndarray:
    r"""Convert true anomaly to mean anomaly for any conic.

    Dispatches on the eccentricity of each element: ellipse (``e < 1``, via the eccentric
    anomaly, on the same revolution as ``nu``), hyperbola (``e > 1``, via the hyperbolic
    anomaly), parabola (``e == 1`` exactly, Barker's equation).

    Parameters
    ----------
    nu_rad : array_like
        True anomaly [rad].
    e : array_like
        Eccentricity, ``e >= 0`` [unitless].

    Returns
    -------
    M_rad : ndarray
        Mean anomaly [rad]; for the parabola the quantity ``B + B**3/3`` with
        ``B = tan(nu/2)``, which equals ``n_p (t - T)`` for the parabolic mean motion
        ``n_p = 2 sqrt(mu / p**3)``. NaN for ``e < 0`` or off the orbit.

    Notes
    -----
    Barker's equation (Vallado, Fundamentals of Astrodynamics and Applications, 5th ed.,
    sec. 2.2.4; the same convention as the NEWTONNU port in sgp4.ext, checked in the tests):

    .. math:: M_p = B + \frac{B^3}{3}, \qquad B = \tan\frac{\nu}{2}
    """
    nu, e = _f64(nu_rad, e)
    out = np.full(nu.shape, np.nan)
    ell = (e >= 0.0) & (e < 1.0)
    hyp = e > 1.0
    par = e == 1.0
    out[ell] = eccentric_to_mean(true_to_eccentric(nu[ell], e[ell]), e[ell])
    out[hyp] = hyperbolic_to_mean(true_to_hyperbolic(nu[hyp], e[hyp]), e[hyp])
    out[par] = _barker_true_to_mean(nu[par])
    return _out(out)


def mean_to_true(M_rad: ArrayLike, e: ArrayLike) -> np.ndarray:
    """Convert mean anomaly to true anomaly for any conic (inverse of :func:`true_to_mean`).

    Parameters
    ----------
    M_rad : array_like
        Mean anomaly (for ``e == 1`` Barker's ``B + B**3/3``) [rad].
    e : array_like
        Eccentricity, ``e >= 0`` [unitless].

    Returns
    -------
    nu_rad : ndarray
        True anomaly; for ellipses on the same revolution as ``M_rad`` [rad]. NaN for
        ``e < 0``.

    Notes
    -----
    Ellipse: :func:`solve_kepler` then :func:`eccentric_to_true`; hyperbola:
    :func:`solve_kepler_hyperbolic` then :func:`hyperbolic_to_true`; parabola: Barker's
    equation solved in closed form by Cardano's formula (Vallado, 5th ed., sec. 2.2.4).
    """
    M, e = _f64(M_rad, e)
    out = np.full(M.shape, np.nan)
    ell = (e >= 0.0) & (e < 1.0)
    hyp = e > 1.0
    par = e == 1.0
    out[ell] = eccentric_to_true(solve_kepler(M[ell], e[ell]), e[ell])
    out[hyp] = hyperbolic_to_true(solve_kepler_hyperbolic(M[hyp], e[hyp]), e[hyp])
    out[par] = _barker_mean_to_true(M[par])
    return _out(out)


# --------------------------------------------------------------------------------------
# Kepler <-> Cartesian
# --------------------------------------------------------------------------------------


def kepler_to_cartesian(
    a_km: ArrayLike | None,
    e: ArrayLike,
    i_rad: ArrayLike,
    raan_rad: ArrayLike,
    argp_rad: ArrayLike,
    nu_rad: ArrayLike,
    mu_km3_s2: float = MU_EARTH_KM3_S2,
    *,
    p_km: ArrayLike | None = None,
) -> tuple[np.ndarray, np.ndarray]:
    r"""Convert classical orbital elements to inertial position and velocity.

    Parameters
    ----------
    a_km : array_like or None
        Semi-major axis, ``> 0`` for ellipses and ``< 0`` for hyperbolas [km]. Pass
        ``None`` and give ``p_km`` instead (required for a parabola).
    e : array_like
        Eccentricity [unitless].
    i_rad, raan_rad, argp_rad : array_like
        Inclination, right ascension of the ascending node, argument of periapsis [rad].
    nu_rad : array_like
        True anomaly [rad].
    mu_km3_s2 : float, optional
        Gravitational parameter [km^3/s^2].
    p_km : array_like, optional
        Semi-latus rectum ``a (1 - e**2)`` [km]; exactly one of ``a_km`` and ``p_km``.

    Returns
    -------
    r_km : ndarray, shape (..., 3)
        Position in the frame of the elements [km].
    v_km_s : ndarray, shape (..., 3)
        Velocity [km/s].
        Both are NaN where ``p <= 0`` (e.g. the sign convention of ``a`` is violated),
        ``e < 0``, or the true anomaly is beyond a hyperbola's asymptote.

    Notes
    -----
    COE2RV, Vallado, Fundamentals of Astrodynamics and Applications, 5th ed.,
    Algorithm 10: perifocal position and velocity (Eqs. 2-110, 2-111)

    .. math::
        r_{PQW} = \frac{p}{1 + e\cos\nu} (\cos\nu, \sin\nu, 0), \quad
        v_{PQW} = \sqrt{\mu/p}\,(-\sin\nu, e + \cos\nu, 0)

    rotated by :math:`R_3(-\Omega) R_1(-i) R_3(-\omega)`.
    """
    if (a_km is None) == (p_km is None):
        raise ElementError(
            "give exactly one of a_km and p_km (a parabola needs p_km)", field="a_km"
        )
    if a_km is not None:
        a, e_, i, raan, argp, nu = _f64(a_km, e, i_rad, raan_rad, argp_rad, nu_rad)
        p = a * (1.0 - e_ * e_)
    else:
        assert p_km is not None  # guaranteed by the check above; narrows the type
        p, e_, i, raan, argp, nu = _f64(p_km, e, i_rad, raan_rad, argp_rad, nu_rad)
    cnu, snu = np.cos(nu), np.sin(nu)
    denom = 1.0 + e_ * cnu
    ok = (p > 0.0) & (e_ >= 0.0) & (denom > 0.0)
    with np.errstate(invalid="ignore", divide="ignore"):
        r = np.where(ok, p / denom, np.nan)
        vs = np.where(ok, np.sqrt(mu_km3_s2 / p), np.nan)
    # perifocal components
    xp, yp = r * cnu, r * snu
    vxp, vyp = -vs * snu, vs * (e_ + cnu)
    # rotation matrix columns P and Q (Vallado Eq. 2-112, written out)
    cO, sO = np.cos(raan), np.sin(raan)
    cw, sw = np.cos(argp), np.sin(argp)
    ci, si = np.cos(i), np.sin(i)
    P = np.stack([cO * cw - sO * sw * ci, sO * cw + cO * sw * ci, sw * si], axis=-1)
    Q = np.stack([-cO * sw - sO * cw * ci, -sO * sw + cO * cw * ci, cw * si], axis=-1)
    r_vec = xp[..., None] * P + yp[..., None] * Q
    v_vec = vxp[..., None] * P + vyp[..., None] * Q
    return r_vec, v_vec


@dataclass(frozen=True)
class KeplerElements:
    """Classical orbital elements from :func:`cartesian_to_kepler` (arrays of one shape).

    Attributes
    ----------
    p_km : ndarray
        Semi-latus rectum [km].
    a_km : ndarray
        Semi-major axis; negative for hyperbolas, infinite for a parabola [km].
    e : ndarray
        Eccentricity [unitless].
    i_rad : ndarray
        Inclination in ``[0, pi]`` [rad].
    raan_rad : ndarray
        Right ascension of the ascending node in ``[0, 2 pi)``; 0 for equatorial orbits [rad].
    argp_rad : ndarray
        Argument of periapsis in ``[0, 2 pi)``; 0 for circular orbits, the longitude of
        periapsis for non-circular equatorial ones [rad].
    nu_rad : ndarray
        True anomaly in ``[0, 2 pi)``; the argument of latitude for circular inclined
        orbits and the true longitude for circular equatorial ones [rad].
    arglat_rad : ndarray
        Argument of latitude (node to position) where the orbit is inclined, else NaN [rad].
    lonper_rad : ndarray
        True longitude of periapsis where the orbit is non-circular equatorial, else NaN
        [rad].
    truelon_rad : ndarray
        True longitude (x axis to position) where the orbit is circular equatorial, else
        NaN [rad].
    orbit_type : ndarray of int8
        Codes of :data:`ORBIT_TYPE_MEANINGS`; -1 marks rows whose elements are all NaN.
    """

    p_km: np.ndarray
    a_km: np.ndarray
    e: np.ndarray
    i_rad: np.ndarray
    raan_rad: np.ndarray
    argp_rad: np.ndarray
    nu_rad: np.ndarray
    arglat_rad: np.ndarray
    lonper_rad: np.ndarray
    truelon_rad: np.ndarray
    orbit_type: np.ndarray


def _dot(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    return np.einsum("...i,...i->...", a, b)


def _angle_about(a: np.ndarray, b: np.ndarray, axis: np.ndarray) -> np.ndarray:
    """Angle from ``a`` to ``b`` measured positively about ``axis``, in [0, 2 pi)."""
    return _wrap_2pi(np.arctan2(_dot(np.cross(a, b), axis), _dot(a, b)))


def cartesian_to_kepler(
    r_km: ArrayLike,
    v_km_s: ArrayLike,
    mu_km3_s2: float = MU_EARTH_KM3_S2,
    *,
    ecc_tol: float = ECCENTRICITY_TOL,
    inc_tol_rad: float = INCLINATION_TOL_RAD,
) -> KeplerElements:
    r"""Convert inertial position and velocity to classical orbital elements.

    Parameters
    ----------
    r_km : array_like, shape (..., 3)
        Position [km].
    v_km_s : array_like, shape (..., 3)
        Velocity [km/s].
    mu_km3_s2 : float, optional
        Gravitational parameter [km^3/s^2].
    ecc_tol : float, optional
        Eccentricity below which the orbit is treated as circular [unitless].
    inc_tol_rad : float, optional
        Inclination below which (or above ``pi - inc_tol_rad``) the orbit is treated as
        equatorial [rad].

    Returns
    -------
    KeplerElements
        Elements with shape ``r_km.shape[:-1]``.

    Notes
    -----
    RV2COE, Vallado, Fundamentals of Astrodynamics and Applications, 5th ed.,
    Algorithm 9: :math:`h = r \times v`, :math:`n = \hat K \times h`,

    .. math::
        \mathbf e = \frac{(v^2 - \mu/r)\,\mathbf r - (\mathbf r\cdot\mathbf v)\,\mathbf v}{\mu},
        \quad \xi = \frac{v^2}{2} - \frac{\mu}{r}, \quad a = -\frac{\mu}{2\xi},
        \quad p = \frac{h^2}{\mu}

    Special cases as in Algorithm 9: circular inclined (``e < ecc_tol``): ``argp = 0`` and
    ``nu`` = argument of latitude; non-circular equatorial (``i < inc_tol_rad`` or
    ``i > pi - inc_tol_rad``): ``raan = 0`` and ``argp`` = true longitude of periapsis;
    circular equatorial: ``raan = argp = 0`` and ``nu`` = true longitude. For retrograde
    equatorial orbits the longitudes are measured clockwise (``2 pi`` minus the angle from
    the x axis), as in Algorithm 9, so that :func:`kepler_to_cartesian` with ``raan = 0``
    gives the same state back.

    Departures: angles come from ``atan2`` of a sine and cosine (the sign tests of
    Algorithm 9 are folded into the sine's sign) for accuracy near 0 and pi, and the
    default tolerances are 1e-11 rather than 1e-8 (see :data:`ECCENTRICITY_TOL`).
    """
    r = np.asarray(r_km, dtype=np.float64)
    v = np.asarray(v_km_s, dtype=np.float64)
    r, v = np.broadcast_arrays(r, v)
    if r.shape[-1:] != (3,):
        raise ElementError(f"must have a last axis of length 3, got shape {r.shape}", "r_km")
    with np.errstate(invalid="ignore", divide="ignore", over="ignore"):
        rmag = np.linalg.norm(r, axis=-1)
        v2 = _dot(v, v)
        rv = _dot(r, v)
        h = np.cross(r, v)
        hmag = np.linalg.norm(h, axis=-1)
        h_hat = h / hmag[..., None]
        zeros = np.zeros_like(hmag)
        n = np.stack([-h[..., 1], h[..., 0], zeros], axis=-1)  # K x h
        nmag = np.linalg.norm(n, axis=-1)
        e_vec = ((v2 - mu_km3_s2 / rmag)[..., None] * r - rv[..., None] * v) / mu_km3_s2
        e = np.linalg.norm(e_vec, axis=-1)
        xi = 0.5 * v2 - mu_km3_s2 / rmag
        a = -mu_km3_s2 / (2.0 * xi)
        p = hmag * hmag / mu_km3_s2
        i = np.arctan2(np.hypot(h[..., 0], h[..., 1]), h[..., 2])

        raan = _wrap_2pi(np.arctan2(n[..., 1], n[..., 0]))
        argp = _angle_about(n, e_vec, h_hat)
        nu = _angle_about(e_vec, r, h_hat)
        arglat = _angle_about(n, r, h_hat)
        retro = i > 0.5 * np.pi
        lonper = _wrap_2pi(np.arctan2(e_vec[..., 1], e_vec[..., 0]))
        lonper = np.where(retro, _wrap_2pi(-lonper), lonper)
        truelon = _wrap_2pi(np.arctan2(r[..., 1], r[..., 0]))
        truelon = np.where(retro, _wrap_2pi(-truelon), truelon)

    degenerate = ~(np.isfinite(rmag) & np.isfinite(v2) & (rmag > 0.0) & (hmag > 0.0))
    degenerate |= ~np.isfinite(e)
    circular = e < ecc_tol
    equatorial = (i < inc_tol_rad) | (i > np.pi - inc_tol_rad) | (nmag == 0.0)

    ci = circular & ~equatorial
    ne = ~circular & equatorial
    ce = circular & equatorial
    argp = np.where(circular, 0.0, np.where(ne, lonper, argp))
    raan = np.where(equatorial, 0.0, raan)
    nu = np.where(ci, arglat, np.where(ce, truelon, nu))
    arglat = np.where(equatorial, np.nan, arglat)
    lonper = np.where(ne, lonper, np.nan)
    truelon = np.where(ce, truelon, np.nan)

    otype = np.full(rmag.shape, ORBIT_NONCIRCULAR_INCLINED, dtype=np.int8)
    otype[ci] = ORBIT_CIRCULAR_INCLINED
    otype[ne] = ORBIT_NONCIRCULAR_EQUATORIAL
    otype[ce] = ORBIT_CIRCULAR_EQUATORIAL
    otype[degenerate] = ORBIT_DEGENERATE

    names = ("p_km", "a_km", "e", "i_rad", "raan_rad", "argp_rad", "nu_rad", "arglat_rad")
    values = (p, a, e, i, raan, argp, nu, arglat)
    out = {k: _out(np.where(degenerate, np.nan, f)) for k, f in zip(names, values, strict=True)}
    return KeplerElements(
        **out,
        lonper_rad=_out(np.where(degenerate, np.nan, lonper)),
        truelon_rad=_out(np.where(degenerate, np.nan, truelon)),
        orbit_type=_out(otype),
    )


# --------------------------------------------------------------------------------------
# Validation (raises; used where data enters)
# --------------------------------------------------------------------------------------


def _where_text(bad: np.ndarray, values: np.ndarray, ids: Sequence[str] | None) -> str:
    """Describe the first few offending elements of a flat boolean mask."""
    idx = np.flatnonzero(bad)
    parts = []
    for j in idx[:3]:
        who = f"satellite {ids[j]!r}" if ids is not None and j < len(ids) else f"index {j}"
        parts.append(f"{float(values.flat[j])!r} at {who}")
    more = f" and {idx.size - 3} more" if idx.size > 3 else ""
    return ", ".join(parts) + more


def validate_elements(
    a_km: ArrayLike,
    e: ArrayLike,
    *,
    i_rad: ArrayLike | None = None,
    raan_rad: ArrayLike | None = None,
    argp_rad: ArrayLike | None = None,
    anomaly_rad: ArrayLike | None = None,
    ids: Sequence[str] | None = None,
    field_prefix: str = "",
    require_closed: bool = True,
    min_perigee_km: float | None = EARTH_RADIUS_KM,
) -> None:
    """Check orbital elements and raise one error describing every problem found.

    Parameters
    ----------
    a_km : array_like
        Semi-major axis [km]; ``> 0`` for ``e < 1``, ``< 0`` for ``e > 1``.
    e : array_like
        Eccentricity, ``>= 0``; ``< 1`` when ``require_closed`` [unitless].
    i_rad, raan_rad, argp_rad, anomaly_rad : array_like, optional
        Angles, checked for being finite, the inclination also for lying in
        ``[0, pi]`` [rad].
    ids : sequence of str, optional
        Satellite names, used in the message instead of indices.
    field_prefix : str, optional
        Prefix of the field names in the message (e.g. ``"constellation.0."``).
    require_closed : bool, optional
        Whether open orbits (``e >= 1``) are errors.
    min_perigee_km : float or None, optional
        Smallest allowed perigee radius ``a (1 - e)`` [km]; ``None`` skips the check.
        Defaults to the Earth's equatorial radius.

    Raises
    ------
    ElementError
        Naming the first offending field (``semi_major_axis_km``, ``eccentricity``,
        ``inclination_rad``, ``raan_rad``, ``argument_of_perigee_rad``, ``anomaly_rad``),
        the value and what is allowed; further problems are appended to the message.
    """
    a, e_ = _f64(a_km, e)
    problems: list[tuple[str, str]] = []

    def check(name: str, bad: np.ndarray, values: np.ndarray, allowed: str) -> None:
        bad = np.broadcast_to(bad, a.shape)
        if np.any(bad):
            vals = np.broadcast_to(values, a.shape)
            problems.append(
                (field_prefix + name, f"must be {allowed}, got {_where_text(bad, vals, ids)}")
            )

    check("semi_major_axis_km", ~np.isfinite(a), a, "finite")
    check("eccentricity", ~np.isfinite(e_), e_, "finite")
    for name, val in (
        ("inclination_rad", i_rad),
        ("raan_rad", raan_rad),
        ("argument_of_perigee_rad", argp_rad),
        ("anomaly_rad", anomaly_rad),
    ):
        if val is not None:
            arr = np.asarray(val, dtype=np.float64)
            check(name, ~np.isfinite(arr), arr, "finite")
    if i_rad is not None:
        inc = np.asarray(i_rad, dtype=np.float64)
        check("inclination_rad", (inc < 0.0) | (inc > np.pi), inc, "in [0, pi]")
    fin = np.isfinite(a) & np.isfinite(e_)
    check("eccentricity", fin & (e_ < 0.0), e_, ">= 0")
    if require_closed:
        check("eccentricity", fin & (e_ >= 1.0), e_, "< 1 (a closed orbit is required)")
    else:
        check("eccentricity", fin & (e_ == 1.0), e_, "!= 1 (a parabola has no finite a)")
        check("semi_major_axis_km", fin & (e_ > 1.0) & (a >= 0.0), a, "< 0 for e > 1")
    check("semi_major_axis_km", fin & (e_ >= 0.0) & (e_ < 1.0) & (a <= 0.0), a, "> 0 for e < 1")
    if min_perigee_km is not None:
        rp = a * (1.0 - e_)
        shape_ok = fin & (e_ >= 0.0) & (e_ != 1.0) & (rp > 0.0)
        low = shape_ok & (rp < min_perigee_km)
        if np.any(low):
            j = int(np.flatnonzero(low)[0])
            who = f"satellite {ids[j]!r}" if ids is not None and j < len(ids) else f"index {j}"
            problems.append(
                (
                    field_prefix + "semi_major_axis_km",
                    f"perigee radius a(1 - e) = {rp.flat[j]:.3f} km (a = {float(a.flat[j])!r} km, "
                    f"e = {float(e_.flat[j])!r}) at {who} must be >= {min_perigee_km:.3f} km "
                    f"(the perigee is below the Earth's surface)"
                    + (f"; {int(low.sum()) - 1} more such" if low.sum() > 1 else ""),
                )
            )
    if problems:
        field, text = problems[0]
        if len(problems) > 1:
            text += " (also " + "; ".join(f"{f}: {t}" for f, t in problems[1:]) + ")"
        raise ElementError(text, field=field)


def validate_state(
    r_km: ArrayLike,
    v_km_s: ArrayLike,
    *,
    ids: Sequence[str] | None = None,
    field_prefix: str = "",
) -> None:
    """Check Cartesian states and raise one error describing every problem found.

    Parameters
    ----------
    r_km : array_like, shape (..., 3)
        Position [km]; finite and non-zero.
    v_km_s : array_like, shape (..., 3)
        Velocity [km/s]; finite and not parallel to the position.
    ids : sequence of str, optional
        Satellite names, used in the message instead of indices.
    field_prefix : str, optional
        Prefix of the field names in the message.

    Raises
    ------
    ElementError
        Naming ``position_km`` or ``velocity_km_s``, the value and what is allowed.
    """
    r = np.asarray(r_km, dtype=np.float64)
    v = np.asarray(v_km_s, dtype=np.float64)
    for name, x in (("position_km", r), ("velocity_km_s", v)):
        if x.shape[-1:] != (3,):
            raise ElementError(
                f"must have shape (..., 3), got shape {x.shape}", field=field_prefix + name
            )
    try:
        r, v = np.broadcast_arrays(r, v)
    except ValueError:
        raise ElementError(
            f"shape {v.shape} does not match position shape {r.shape}",
            field=field_prefix + "velocity_km_s",
        ) from None
    rows_r = r.reshape(-1, 3)
    rows_v = v.reshape(-1, 3)
    problems: list[tuple[str, str]] = []

    def rows_text(bad: np.ndarray, rows: np.ndarray) -> str:
        idx = np.flatnonzero(bad)
        parts = []
        for j in idx[:3]:
            who = f"satellite {ids[j]!r}" if ids is not None and j < len(ids) else f"index {j}"
            parts.append(f"{rows[j].tolist()} at {who}")
        return ", ".join(parts) + (f" and {idx.size - 3} more" if idx.size > 3 else "")

    bad_r = ~np.all(np.isfinite(rows_r), axis=-1)
    bad_v = ~np.all(np.isfinite(rows_v), axis=-1)
    if bad_r.any():
        problems.append(("position_km", f"must be finite, got {rows_text(bad_r, rows_r)}"))
    if bad_v.any():
        problems.append(("velocity_km_s", f"must be finite, got {rows_text(bad_v, rows_v)}"))
    ok = ~bad_r & ~bad_v
    zero_r = ok & (np.linalg.norm(rows_r, axis=-1) == 0.0)
    if zero_r.any():
        problems.append(("position_km", f"must be non-zero, got {rows_text(zero_r, rows_r)}"))
    hmag = np.linalg.norm(np.cross(rows_r, rows_v), axis=-1)
    scale = np.linalg.norm(rows_r, axis=-1) * np.linalg.norm(rows_v, axis=-1)
    straight = ok & ~zero_r & (hmag <= 1e-12 * scale)
    if straight.any():
        problems.append(
            (
                "velocity_km_s",
                "must not be parallel to the position (zero angular momentum), got "
                + rows_text(straight, rows_v),
            )
        )
    if problems:
        field, text = problems[0]
        if len(problems) > 1:
            text += " (also " + "; ".join(f"{field_prefix}{f}: {t}" for f, t in problems[1:])
            text += ")"
        raise ElementError(text, field=field_prefix + field)
