"""Kepler's equation and the anomalies: mean, eccentric, hyperbolic and true.

All functions broadcast over NumPy arrays; angles are radians. Scalar input gives NumPy
scalars back, array input arrays. Vectorised functions never raise per element: an anomaly
they cannot convert (``e`` out of range, a true anomaly beyond a hyperbola's asymptote)
comes back as NaN.
"""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike

from covergrid.constants import TWO_PI

__all__ = [
    "eccentric_to_mean",
    "eccentric_to_true",
    "hyperbolic_to_mean",
    "hyperbolic_to_true",
    "mean_to_eccentric",
    "mean_to_hyperbolic",
    "mean_to_true",
    "solve_kepler",
    "solve_kepler_hyperbolic",
    "true_to_eccentric",
    "true_to_hyperbolic",
    "true_to_mean",
    "wrap_2pi",
]

_EPS = np.finfo(np.float64).eps
_MAX_ITER = 100  # bisection alone halves a bracket of width pi to 1e-16 in 55 steps
_DANBY_PASSES = 3  # quartic passes; the residual step after them decides who needs more
_STEP_TOL_RAD = 1e-10  # a Newton step this small leaves an error ~ (f''/2f') step^2 < 1e-17


def _out(x: np.ndarray) -> np.ndarray:
    """Return a NumPy scalar for 0-d arrays, else the array."""
    return x[()] if x.ndim == 0 else x


def wrap_2pi(x: np.ndarray) -> np.ndarray:
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
