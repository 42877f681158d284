"""Secular J2 theory on mean elements and vectorised propagation.

The propagator advances mean elements with the first-order secular J2 rates (node,
argument of perigee, mean anomaly drift linearly in time; a, e, i stay fixed) and places
each satellite on the two-body ellipse of those drifting elements. Short-period J2 terms
are not modelled. Units: km, s, rad throughout; arrays are float64 with the vector axis
last, ``(n_sat, n_t, 3)``.

Backends (:mod:`covergrid.orbits.j2_backends`): a numba kernel (the default; numba is a
required dependency, as for the coverage kernel) and a plain NumPy implementation giving
the same numbers to rounding, kept as the reference the tests compare it with
(``backend="numpy"``). The speed target (10,000 satellites x 1,440 epochs to Earth-fixed in < 1 s
on one core) and its measurement are in ``tests/benchmarks/bench_propagation.py``: about
18-26 ns per satellite-epoch for near-circular orbits (e < 0.045, where Kepler's equation
needs no libm call), about 75 ns for eccentric ones, about 175-300 ns with NumPy.
"""

from __future__ import annotations

import math
from types import SimpleNamespace
from typing import Any

import numpy as np

from covergrid.constants import EARTH_RADIUS_KM, J2, MU_EARTH_KM3_S2, OMEGA_EARTH_RAD_S
from covergrid.errors import CovergridError, ElementError

__all__ = [
    "secular_rates",
    "propagate",
    "positions",
    "propagate_to_ecef",
    "propagate_to_ecef_with_velocity",
    "ecef_positions_at",
]

_ELEMENT_FIELDS = ("a_km", "e", "i_rad", "raan_rad", "argp_rad", "M_rad")
_BACKENDS = ("numba", "numpy")


# --------------------------------------------------------------------------------------
# Secular rates
# --------------------------------------------------------------------------------------
def secular_rates(
    a_km: Any,
    e: Any,
    i_rad: Any,
    *,
    j2: float = J2,
    radius_km: float = EARTH_RADIUS_KM,
    mu_km3_s2: float = MU_EARTH_KM3_S2,
) -> tuple[np.ndarray | float, np.ndarray | float, np.ndarray | float]:
    """Return the first-order secular J2 rates of node, perigee and mean anomaly.

    Parameters
    ----------
    a_km : array_like
        Mean semi-major axis [km]; broadcast with `e` and `i_rad`.
    e : array_like
        Mean eccentricity, 0 <= e < 1 [unitless].
    i_rad : array_like
        Mean inclination [rad].
    j2 : float, optional
        Second zonal harmonic [unitless]; default EGM96 ``constants.J2``.
    radius_km : float, optional
        Reference radius of the geopotential [km]; default ``constants.EARTH_RADIUS_KM``.
    mu_km3_s2 : float, optional
        Gravitational parameter [km^3/s^2]; default ``constants.MU_EARTH_KM3_S2``.

    Returns
    -------
    raan_dot : ndarray or float
        Rate of the right ascension of the ascending node [rad/s].
    argp_dot : ndarray or float
        Rate of the argument of perigee [rad/s].
    M_dot : ndarray or float
        Rate of the mean anomaly, including the two-body mean motion [rad/s].

    Raises
    ------
    ElementError
        If any a <= 0, e outside [0, 1) or any value is not finite.

    Notes
    -----
    First-order secular theory of the J2 zonal harmonic (Vallado [1]_, sec. 9.6,
    Eq. 9-41; Curtis [2]_, sec. 4.7), with :math:`n = \\sqrt{\\mu/a^3}` and
    :math:`p = a(1-e^2)`:

    .. math::

        \\dot\\Omega = -\\tfrac32 n J_2 (R/p)^2 \\cos i

        \\dot\\omega = \\tfrac34 n J_2 (R/p)^2 (4 - 5\\sin^2 i)

        \\dot M = n\\left[1 + \\tfrac34 J_2 (R/p)^2 \\sqrt{1-e^2}\\,(2 - 3\\sin^2 i)\\right]

    The elements are mean (orbit-averaged) elements; the rates are exact for the
    averaged first-order problem and omit O(J2^2) and all periodic terms.

    References
    ----------
    .. [1] D. A. Vallado, *Fundamentals of Astrodynamics and Applications*, 4th ed.
       Hawthorne, CA: Microcosm Press, 2013, sec. 9.6.
    .. [2] H. D. Curtis, *Orbital Mechanics for Engineering Students*, 3rd ed.
       Oxford: Butterworth-Heinemann, 2014, ch. 4. doi:10.1016/C2011-0-69685-1
    """
    a, ecc, inc = np.broadcast_arrays(
        np.asarray(a_km, dtype=np.float64),
        np.asarray(e, dtype=np.float64),
        np.asarray(i_rad, dtype=np.float64),
    )
    _check_shape_elements(a, ecc, inc)
    n = np.sqrt(mu_km3_s2 / a**3)
    p = a * (1.0 - ecc * ecc)
    k = n * j2 * (radius_km / p) ** 2
    sin2_i = np.sin(inc) ** 2
    raan_dot = -1.5 * k * np.cos(inc)  # Vallado Eq. 9-41, node
    argp_dot = 0.75 * k * (4.0 - 5.0 * sin2_i)  # Vallado Eq. 9-41, perigee
    m_dot = n + 0.75 * k * np.sqrt(1.0 - ecc * ecc) * (2.0 - 3.0 * sin2_i)  # Eq. 9-41, M
    if raan_dot.ndim == 0:
        return float(raan_dot), float(argp_dot), float(m_dot)
    return raan_dot, argp_dot, m_dot


def _check_shape_elements(a: np.ndarray, e: np.ndarray, i: np.ndarray) -> None:
    """Raise ElementError naming the first bad a, e or i."""
    for name, values, ok in (
        ("a_km", a, np.isfinite(a) & (a > 0.0)),
        ("e", e, np.isfinite(e) & (e >= 0.0) & (e < 1.0)),
        ("i_rad", i, np.isfinite(i)),
    ):
        if not np.all(ok):
            bad = np.flatnonzero(~np.ravel(ok))
            first = int(bad[0])
            allowed = {
                "a_km": "a finite value > 0 km",
                "e": "0 <= e < 1 (elliptic orbits only)",
                "i_rad": "a finite angle in radians",
            }[name]
            where = f"[{first}]" if values.ndim else ""
            raise ElementError(
                f"{name}{where} = {np.ravel(values)[first]!r} is invalid "
                f"({bad.size} bad value(s)); allowed: {allowed}",
                field=name,
            )


# --------------------------------------------------------------------------------------
# Input handling
# --------------------------------------------------------------------------------------
def _element_arrays(elements: Any) -> tuple[np.ndarray, ...]:
    """Pull the six mean elements off an ElementSet-like object as 1-D float64 arrays."""
    arrays = []
    for name in _ELEMENT_FIELDS:
        if not hasattr(elements, name):
            raise ElementError(
                f"element set has no attribute {name!r}; an ElementSet-like object needs "
                f"{', '.join(_ELEMENT_FIELDS)}",
                field=name,
            )
        arrays.append(np.atleast_1d(np.asarray(getattr(elements, name), dtype=np.float64)))
    shapes = {arr.shape for arr in arrays}
    if len(shapes) != 1 or arrays[0].ndim != 1:
        raise ElementError(
            "element arrays must all be 1-D of the same length, got shapes "
            + ", ".join(f"{n}={a.shape}" for n, a in zip(_ELEMENT_FIELDS, arrays, strict=True)),
            field="elements",
        )
    a, e, i, raan, argp, m = arrays
    _check_shape_elements(a, e, i)
    for name, arr in (("raan_rad", raan), ("argp_rad", argp), ("M_rad", m)):
        if not np.all(np.isfinite(arr)):
            first = int(np.flatnonzero(~np.isfinite(arr))[0])
            raise ElementError(
                f"{name}[{first}] = {arr[first]!r} is invalid; allowed: a finite angle [rad]",
                field=name,
            )
    return tuple(np.ascontiguousarray(x) for x in arrays)


def _times(t_s: Any) -> np.ndarray:
    t = np.atleast_1d(np.asarray(t_s, dtype=np.float64))
    if t.ndim != 1:
        raise CovergridError(f"t_s must be 1-D, got shape {t.shape}", field="t_s")
    if not np.all(np.isfinite(t)):
        first = int(np.flatnonzero(~np.isfinite(t))[0])
        raise CovergridError(
            f"t_s[{first}] = {t[first]!r} is not finite; allowed: finite seconds since epoch",
            field="t_s",
        )
    return np.ascontiguousarray(t)


def _choose_backend(backend: str | None) -> str:
    backend = "numba" if backend is None else backend
    if backend not in _BACKENDS:
        raise CovergridError(
            f"backend = {backend!r} is not known; allowed: {', '.join(_BACKENDS)}",
            field="backend",
        )
    return backend


# --------------------------------------------------------------------------------------
# Public propagation API
# --------------------------------------------------------------------------------------
def _propagate(
    elements: Any,
    t_s: Any,
    node_offset_rad: float,
    node_rate_offset_rad_s: float,
    want_v: bool,
    backend: str | None,
    out: np.ndarray | None = None,
    rate_terms: bool = False,
    out_v: np.ndarray | None = None,
) -> tuple[np.ndarray, np.ndarray | None]:
    els = _element_arrays(elements)
    t = _times(t_s)
    shape = (els[0].size, t.size, 3)
    out = _checked_buffer(out, shape, "out")
    if want_v and out_v is not None:
        out_v = _checked_buffer(out_v, shape, "out_v")
    raan_dot, argp_dot, m_dot = secular_rates(els[0], els[1], els[2])
    rates = (np.asarray(raan_dot), np.asarray(argp_dot), np.asarray(m_dot))
    # the backends load numba: imported here, so that the secular rates (and the study
    # checks that use them, such as the sun-synchronous inclination) stay light
    from covergrid.orbits import j2_backends

    run = (j2_backends.run_numba if _choose_backend(backend) == "numba"
           else j2_backends.run_numpy)
    return run(els, rates, t, node_offset_rad, node_rate_offset_rad_s, want_v, out,
               rate_terms, out_v)


def _checked_buffer(buf: np.ndarray | None, shape: tuple[int, ...], field: str) -> np.ndarray:
    """A new (n_sat, n_t, 3) array, or `buf` if it is a writeable C-contiguous float64 one."""
    if buf is None:
        return np.empty(shape)
    if (
        not isinstance(buf, np.ndarray)
        or buf.shape != shape
        or buf.dtype != np.float64
        or not buf.flags.c_contiguous
        or not buf.flags.writeable
    ):
        raise CovergridError(
            f"{field} must be a writeable C-contiguous float64 array of shape {shape}, got "
            f"{type(buf).__name__} {getattr(buf, 'shape', None)} {getattr(buf, 'dtype', None)}",
            field=field,
        )
    return buf


def propagate(
    elements: Any, t_s: Any, *, frame: str = "inertial", backend: str | None = None
) -> tuple[np.ndarray, np.ndarray]:
    """Propagate mean elements with secular J2 to inertial positions and velocities.

    Parameters
    ----------
    elements : ElementSet-like
        Object with 1-D float attributes ``a_km`` [km], ``e`` [unitless], ``i_rad``,
        ``raan_rad``, ``argp_rad``, ``M_rad`` [rad], all of length n_sat, the mean
        elements at the epoch (t = 0).
    t_s : array_like
        Times since the epoch, shape (n_t,) [s].
    frame : {"inertial"}, optional
        Output frame. Only the inertial frame of the elements (e.g. the mean equator and
        equinox they are referred to) is offered here; use :func:`propagate_to_ecef` for
        Earth-fixed positions.
    backend : {"numba", "numpy"}, optional
        Implementation; default numba (``numpy``: the reference implementation).

    Returns
    -------
    r_km : ndarray
        Positions, shape (n_sat, n_t, 3) [km].
    v_km_s : ndarray
        Velocities, shape (n_sat, n_t, 3) [km/s].

    Raises
    ------
    ElementError
        If an element is missing, not finite, or outside its range (a > 0, 0 <= e < 1).
    CovergridError
        If `t_s` is not a finite 1-D array, or `frame` / `backend` is not known.

    Notes
    -----
    Secular J2 propagation on mean elements (Vallado [1]_, sec. 9.6): with the rates of
    :func:`secular_rates`,

    .. math::

        \\Omega(t) = \\Omega_0 + \\dot\\Omega t,\\quad
        \\omega(t) = \\omega_0 + \\dot\\omega t,\\quad
        M(t) = M_0 + \\dot M t,

    Kepler's equation :math:`M = E - e \\sin E` is solved by Newton's method (Vallado
    [1]_, Algorithm 2), and the position is
    :math:`\\mathbf r = a(\\cos E - e)\\,\\mathbf P + a\\sqrt{1-e^2}\\sin E\\,\\mathbf Q`
    with the perifocal unit vectors P, Q of (Omega(t), i, omega(t)).

    The velocity is the two-body velocity on that ellipse,
    :math:`\\dot{\\mathbf r} = \\frac{n a}{1 - e\\cos E}
    (-\\sin E\\,\\mathbf P + \\sqrt{1-e^2}\\cos E\\,\\mathbf Q)` with
    :math:`n = \\sqrt{\\mu/a^3}`. The contribution of the drift rates
    (:math:`\\dot\\Omega`, :math:`\\dot\\omega`, :math:`\\dot M - n`) to the velocity is
    neglected: it is O(J2) relative, a few m/s in LEO, the same order as the
    short-period terms the mean-element model leaves out.

    References
    ----------
    .. [1] D. A. Vallado, *Fundamentals of Astrodynamics and Applications*, 4th ed.
       Hawthorne, CA: Microcosm Press, 2013, sec. 2.2, 2.6, 9.6.
    """
    if frame != "inertial":
        raise CovergridError(
            f"frame = {frame!r} is not known; allowed: 'inertial' "
            "(use propagate_to_ecef for Earth-fixed positions)",
            field="frame",
        )
    r, v = _propagate(elements, t_s, 0.0, 0.0, True, backend)
    assert v is not None
    return r, v


def positions(elements: Any, t_s: Any, *, backend: str | None = None) -> np.ndarray:
    """Propagate mean elements with secular J2 to inertial positions only.

    Parameters
    ----------
    elements : ElementSet-like
        Mean elements at the epoch, as for :func:`propagate` [km, rad].
    t_s : array_like
        Times since the epoch, shape (n_t,) [s].
    backend : {"numba", "numpy"}, optional
        Implementation; default numba (``numpy``: the reference implementation).

    Returns
    -------
    r_km : ndarray
        Positions, shape (n_sat, n_t, 3) [km].

    Notes
    -----
    The same secular J2 model as :func:`propagate` (Vallado, *Fundamentals of
    Astrodynamics and Applications*, 4th ed., sec. 9.6), without the velocity.
    """
    r, _ = _propagate(elements, t_s, 0.0, 0.0, False, backend)
    return r


def propagate_to_ecef(
    elements: Any,
    t_s: Any,
    theta0_rad: float,
    *,
    omega_earth_rad_s: float = OMEGA_EARTH_RAD_S,
    backend: str | None = None,
    out: np.ndarray | None = None,
) -> np.ndarray:
    """Propagate mean elements with secular J2 to Earth-fixed positions.

    Parameters
    ----------
    elements : ElementSet-like
        Mean elements at the epoch, as for :func:`propagate` [km, rad].
    t_s : array_like
        Times since the epoch, shape (n_t,) [s].
    theta0_rad : float
        Earth rotation angle (Greenwich mean sidereal angle) at the epoch [rad].
    omega_earth_rad_s : float, optional
        Earth rotation rate [rad/s]; default WGS 84 ``constants.OMEGA_EARTH_RAD_S``.
    backend : {"numba", "numpy"}, optional
        Implementation; default numba (``numpy``: the reference implementation).
    out : ndarray, optional
        Writeable C-contiguous float64 array of shape (n_sat, n_t, 3) to fill and return,
        so that a streaming caller can reuse one buffer [km].

    Returns
    -------
    r_km : ndarray
        Earth-fixed positions, shape (n_sat, n_t, 3) [km] (`out` if given).

    Notes
    -----
    The inertial position of :func:`propagate` is rotated about z by
    :math:`\\theta(t) = \\theta_0 + \\omega_E t`,
    :math:`\\mathbf r_{EF} = R_3(\\theta)\\,\\mathbf r_I`. Since a rotation about z only
    shifts the node, this is done exactly by propagating with
    :math:`\\Omega(t) - \\theta(t)` in place of :math:`\\Omega(t)`, at no extra cost.
    It is a sidereal-angle-only rotation: no precession-nutation and no polar motion
    (Vallado, *Fundamentals of Astrodynamics and Applications*, 4th ed., sec. 3.7,
    keeps only the sidereal-time rotation of the reduction), which matches the
    accuracy of mean elements (short-period J2 terms of several km are not modelled).
    """
    theta0 = float(theta0_rad)
    if not math.isfinite(theta0):
        raise CovergridError(f"theta0_rad = {theta0_rad!r} is not finite", field="theta0_rad")
    r, _ = _propagate(elements, t_s, theta0, float(omega_earth_rad_s), False, backend, out)
    return r


def propagate_to_ecef_with_velocity(
    elements: Any,
    t_s: Any,
    theta0_rad: float,
    *,
    omega_earth_rad_s: float = OMEGA_EARTH_RAD_S,
    backend: str | None = None,
    out: np.ndarray | None = None,
    out_v: np.ndarray | None = None,
) -> tuple[np.ndarray, np.ndarray]:
    """Earth-fixed positions and their exact time derivatives under the secular-J2 model.

    Parameters
    ----------
    elements : ElementSet-like
        Mean elements at the epoch, as for :func:`propagate` [km, rad].
    t_s : array_like
        Times since the epoch, shape (n_t,) [s].
    theta0_rad : float
        Earth rotation angle (Greenwich mean sidereal angle) at the epoch [rad].
    omega_earth_rad_s : float, optional
        Earth rotation rate [rad/s]; default WGS 84 ``constants.OMEGA_EARTH_RAD_S``.
    backend : {"numba", "numpy"}, optional
        Implementation; default numba (``numpy``: the reference implementation).
    out, out_v : ndarray, optional
        Writeable C-contiguous float64 arrays of shape (n_sat, n_t, 3) to fill [km, km/s].

    Returns
    -------
    r_km : ndarray
        Earth-fixed positions, shape (n_sat, n_t, 3) [km], as :func:`propagate_to_ecef`.
    v_km_s : ndarray
        Their time derivatives in the Earth-fixed frame, shape (n_sat, n_t, 3) [km/s].

    Notes
    -----
    The position is :math:`\\mathbf r = R_3(-\\Omega')R_1(-i)R_3(-\\omega)\\,
    \\mathbf r_{pf}(M)` with the Earth-fixed node :math:`\\Omega' = \\Omega - \\theta`
    (:func:`propagate_to_ecef`). By the chain rule its time derivative is

    .. math::

        \\dot{\\mathbf r} = \\frac{\\dot M}{n}\\,\\mathbf v_{2b}
            + \\dot\\omega\\,(\\hat{\\mathbf h} \\times \\mathbf r)
            + (\\dot\\Omega - \\omega_E)\\,(\\hat{\\mathbf z} \\times \\mathbf r)

    with the two-body velocity :math:`\\mathbf v_{2b} = d\\mathbf r_{pf}/dM \\cdot n` of
    :func:`propagate` (rotated like the position), the orbit normal
    :math:`\\hat{\\mathbf h} = \\mathbf P \\times \\mathbf Q` (a change of perigee turns the
    position about it) and the polar axis :math:`\\hat{\\mathbf z}` (a change of node turns it
    about that). Unlike the velocity of :func:`propagate`, nothing is neglected: this is the
    derivative of the modelled trajectory, which the coverage kernel interpolates between
    samples (cubic Hermite). The Earth-rotation term is the frame transformation
    :math:`\\mathbf v_{EF} = R_3(\\theta)\\mathbf v_I - \\boldsymbol\\omega_E \\times
    \\mathbf r_{EF}` (Vallado, *Fundamentals of Astrodynamics and Applications*, 4th ed.,
    sec. 3.7).
    """
    theta0 = float(theta0_rad)
    if not math.isfinite(theta0):
        raise CovergridError(f"theta0_rad = {theta0_rad!r} is not finite", field="theta0_rad")
    r, v = _propagate(elements, t_s, theta0, float(omega_earth_rad_s), True, backend, out,
                      rate_terms=True, out_v=out_v)
    assert v is not None
    return r, v


def ecef_positions_at(elements: Any, sat: Any, t_s: Any, theta0_rad: float) -> np.ndarray:
    """Earth-fixed positions (n, 3) [km] of satellites ``sat[k]`` each at its own time
    ``t_s[k]`` [s] (e.g. the peaks of many passes, in one call).

    Secular J2 moves the node, perigee and mean anomaly linearly in time (and the Earth's
    rotation the node, in the Earth-fixed frame), so each satellite's elements are moved to
    its own time and all are propagated at t = 0: the same positions as
    :func:`propagate_to_ecef` at those times.
    """
    a, e, i, raan, argp, m = _element_arrays(elements)
    sat = np.asarray(sat, dtype=np.intp)
    t = np.asarray(t_s, dtype=np.float64)
    a, e, i = a[sat], e[sat], i[sat]
    raan_dot, argp_dot, m_dot = secular_rates(a, e, i)
    moved = SimpleNamespace(a_km=a, e=e, i_rad=i,
                            raan_rad=raan[sat] + (raan_dot - OMEGA_EARTH_RAD_S) * t,
                            argp_rad=argp[sat] + argp_dot * t, M_rad=m[sat] + m_dot * t)
    return propagate_to_ecef(moved, np.zeros(1), theta0_rad)[:, 0, :]
