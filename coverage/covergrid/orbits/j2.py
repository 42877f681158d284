"""Secular J2 theory on mean elements and vectorised propagation.

The propagator advances mean elements with the first-order secular J2 rates (node,
argument of perigee, mean anomaly drift linearly in time; a, e, i stay fixed) and places
each satellite on the two-body ellipse of those drifting elements. Short-period J2 terms
are not modelled. Units: km, s, rad throughout; arrays are float64 with the vector axis
last, ``(n_sat, n_t, 3)``.

Backends: a numba kernel (default) and a pure NumPy fallback giving the same numbers to
rounding. Set the environment variable ``COVERGRID_NUMBA=0`` (or pass ``backend="numpy"``)
to use NumPy. The speed target (10,000 satellites x 1,440 epochs to Earth-fixed in < 1 s
on one core) and its measurement are in ``tests/benchmarks/bench_propagation.py``: about
18-26 ns per satellite-epoch for near-circular orbits (e < 0.045, where Kepler's equation
needs no libm call), about 75 ns for eccentric ones, about 175-300 ns with NumPy.
"""

from __future__ import annotations

import math
import os
from typing import Any

import numpy as np

from covergrid.constants import EARTH_RADIUS_KM, J2, MU_EARTH_KM3_S2, OMEGA_EARTH_RAD_S
from covergrid.errors import CovergridError, ElementError

try:  # numba is a declared dependency; the NumPy path keeps working without it.
    import numba as _numba
except ImportError:  # pragma: no cover - exercised only in broken installs
    _numba = None  # type: ignore[assignment]

__all__ = [
    "secular_rates",
    "propagate",
    "positions",
    "propagate_to_ecef",
]

_ELEMENT_FIELDS = ("a_km", "e", "i_rad", "raan_rad", "argp_rad", "M_rad")
_BACKENDS = ("numba", "numpy")
# Kepler's equation: stop when the last correction is below this [rad]. The solver is
# Newton's method, so the error left after a step of size d is about (e/2) d^2 < 1e-19 rad.
_KEPLER_TOL_RAD = 1e-10
_KEPLER_MAX_ITER = 50
# Satellites per NumPy block: bounds the temporaries to ~ a dozen (block, n_t) arrays.
_NUMPY_BLOCK_POINTS = 1 << 20


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
    if backend is None:
        backend = "numpy" if os.environ.get("COVERGRID_NUMBA", "1") == "0" else "numba"
    if backend not in _BACKENDS:
        raise CovergridError(
            f"backend = {backend!r} is not known; allowed: {', '.join(_BACKENDS)}",
            field="backend",
        )
    if backend == "numba" and _numba is None:  # pragma: no cover - broken installs only
        backend = "numpy"
    return backend


# --------------------------------------------------------------------------------------
# NumPy backend
# --------------------------------------------------------------------------------------
def _kepler_numpy(m: np.ndarray, e: np.ndarray) -> np.ndarray:
    """Solve M = E - e sin E for E by Newton's method, elementwise (M in [-pi, pi])."""
    # Starter E0 = M + e sin M (1 + e cos M): error O(e^3) for small e; for e > 0.3 the
    # starter E0 = M + 0.85 e sign(sin M) (Danby) keeps Newton's method globally convergent.
    sin_m = np.sin(m)
    big = e > 0.3
    E = np.where(big, m + 0.85 * e * np.sign(sin_m), m + e * sin_m * (1.0 + e * np.cos(m)))
    for _ in range(_KEPLER_MAX_ITER):
        d = (E - e * np.sin(E) - m) / (1.0 - e * np.cos(E))
        E -= d
        if not np.any(np.abs(d) > _KEPLER_TOL_RAD):
            break
    return E


def _block_numpy(
    a: np.ndarray,
    e: np.ndarray,
    ci: np.ndarray,
    si: np.ndarray,
    raan0: np.ndarray,
    argp0: np.ndarray,
    m0: np.ndarray,
    raan_rate: np.ndarray,
    argp_dot: np.ndarray,
    m_dot: np.ndarray,
    t: np.ndarray,
    want_v: bool,
) -> tuple[np.ndarray, np.ndarray | None]:
    """Positions (and velocities) for one block of satellites; arrays are (n_blk, 1)."""
    m = m0 + m_dot * t
    m -= 2.0 * np.pi * np.round(m / (2.0 * np.pi))
    E = _kepler_numpy(m, e)
    cos_e, sin_e = np.cos(E), np.sin(E)
    b = a * np.sqrt(1.0 - e * e)
    xp = a * (cos_e - e)
    yp = b * sin_e
    node = raan0 + raan_rate * t
    w = argp0 + argp_dot * t
    co, so, cw, sw = np.cos(node), np.sin(node), np.cos(w), np.sin(w)
    # Perifocal unit vectors P, Q in the output frame (Vallado sec. 2.6, the ROT3 ROT1 ROT3
    # product written out).
    px = co * cw - so * sw * ci
    py = so * cw + co * sw * ci
    pz = sw * si
    qx = -co * sw - so * cw * ci
    qy = -so * sw + co * cw * ci
    qz = cw * si
    r = np.stack((xp * px + yp * qx, xp * py + yp * qy, xp * pz + yp * qz), axis=-1)
    if not want_v:
        return r, None
    n = np.sqrt(MU_EARTH_KM3_S2 / a**3)
    f = n / (1.0 - e * cos_e)
    vxp = -a * f * sin_e
    vyp = b * f * cos_e
    v = np.stack((vxp * px + vyp * qx, vxp * py + vyp * qy, vxp * pz + vyp * qz), axis=-1)
    return r, v


def _run_numpy(
    els: tuple[np.ndarray, ...],
    rates: tuple[np.ndarray, np.ndarray, np.ndarray],
    t: np.ndarray,
    node_offset_rad: float,
    node_rate_offset_rad_s: float,
    want_v: bool,
    r: np.ndarray,
) -> tuple[np.ndarray, np.ndarray | None]:
    a, e, i, raan, argp, m0 = els
    raan_dot, argp_dot, m_dot = rates
    n_sat, n_t = a.size, t.size
    v = np.empty((n_sat, n_t, 3)) if want_v else None
    step = max(1, _NUMPY_BLOCK_POINTS // max(n_t, 1))
    col = t[None, :]
    for lo in range(0, n_sat, step):  # blocks bound memory; each block is fully vectorised
        s = slice(lo, min(lo + step, n_sat))

        def c(x: np.ndarray, s: slice = s) -> np.ndarray:
            return x[s, None]

        rb, vb = _block_numpy(
            c(a),
            c(e),
            np.cos(c(i)),
            np.sin(c(i)),
            c(raan) - node_offset_rad,
            c(argp),
            c(m0),
            c(raan_dot) - node_rate_offset_rad_s,
            c(argp_dot),
            c(m_dot),
            col,
            want_v,
        )
        r[s] = rb
        if v is not None and vb is not None:
            v[s] = vb
    return r, v


# --------------------------------------------------------------------------------------
# numba backend
# --------------------------------------------------------------------------------------
# Re-evaluate sin/cos of the drifting angles directly every this many steps [steps]; in
# between they advance by the angle-addition recurrence, whose rounding error grows by
# ~1e-16 rad per step, so it stays below ~1e-14 rad (1e-10 km at 7000 km).
_RESYNC_STEPS = 32
# Below this |angle| [rad] sin and cos come from their Taylor series to the x^9 / x^10 term
# (truncation < 2e-22), which is cheaper than a libm call and vectorises.
_SMALL_ANGLE_RAD = 0.05
# Orbits with e below this use the series path: |E - M| <= e / (1 - e) < _SMALL_ANGLE_RAD.
_SERIES_MAX_E = 0.045
# Reciprocal factorial ratios of the series (multiplying is cheaper than dividing).
_I6, _I20, _I42, _I72 = 1.0 / 6.0, 1.0 / 20.0, 1.0 / 42.0, 1.0 / 72.0
_I2, _I12, _I30, _I56, _I90 = 0.5, 1.0 / 12.0, 1.0 / 30.0, 1.0 / 56.0, 1.0 / 90.0


def _sincos_py(x):  # pragma: no cover - compiled by numba
    """Return (sin x, cos x): Taylor series for |x| < _SMALL_ANGLE_RAD, else libm."""
    if abs(x) < _SMALL_ANGLE_RAD:
        return _sin_series(x), _cos_series(x)
    return math.sin(x), math.cos(x)


def _sin_series_py(x):  # pragma: no cover - compiled by numba
    x2 = x * x
    return x * (1.0 - x2 * _I6 * (1.0 - x2 * _I20 * (1.0 - x2 * _I42 * (1.0 - x2 * _I72))))


def _cos_series_py(x):  # pragma: no cover - compiled by numba
    x2 = x * x
    return 1.0 - x2 * _I2 * (
        1.0 - x2 * _I12 * (1.0 - x2 * _I30 * (1.0 - x2 * _I56 * (1.0 - x2 * _I90)))
    )


def _kernel_py(
    a, e, inc, raan0, argp0, m0, raan_rate, argp_dot, m_dot, t, want_v, mu, r_out, v_out
):  # pragma: no cover - compiled by numba; the NumPy path is its reference
    """Loop over satellites; the maths of ``_block_numpy`` without big temporaries.

    Per satellite the three drifting angles (M, node, perigee) are linear in time, so
    their sin/cos advance step to step by the angle-addition recurrence (re-evaluated
    directly every ``_RESYNC_STEPS`` steps). Kepler's equation is solved by Newton's
    method for d = E - M, so that sin E, cos E follow from sin M, cos M and sin d, cos d.
    For near-circular orbits (e < _SERIES_MAX_E) d is small, its sin/cos come from a
    short series, and Newton's method runs over all times of the satellite at once
    (branch-free inner loops that the compiler vectorises) until every step is converged.
    """
    n_sat = a.shape[0]
    n_t = t.shape[0]
    sm = np.empty(n_t)
    cm = np.empty(n_t)
    so = np.empty(n_t)
    co = np.empty(n_t)
    sw = np.empty(n_t)
    cw = np.empty(n_t)
    dd = np.empty(n_t)
    sin_e = np.empty(n_t)
    cos_e = np.empty(n_t)
    for s in range(n_sat):
        a_s = a[s]
        e_s = e[s]
        b_s = a_s * math.sqrt(1.0 - e_s * e_s)
        ci = math.cos(inc[s])
        si = math.sin(inc[s])
        n_s = math.sqrt(mu / (a_s * a_s * a_s))
        # 1. sin/cos of the drifting angles at every time.
        dt_prev = math.nan
        s_dm = c_dm = s_do = c_do = s_dw = c_dw = 0.0
        for k in range(n_t):
            tk = t[k]
            if k % _RESYNC_STEPS == 0:
                x = m0[s] + m_dot[s] * tk
                sm[k] = math.sin(x)
                cm[k] = math.cos(x)
                x = raan0[s] + raan_rate[s] * tk
                so[k] = math.sin(x)
                co[k] = math.cos(x)
                x = argp0[s] + argp_dot[s] * tk
                sw[k] = math.sin(x)
                cw[k] = math.cos(x)
            else:
                dt = tk - t[k - 1]
                if dt != dt_prev:
                    s_dm, c_dm = _sincos(m_dot[s] * dt)
                    s_do, c_do = _sincos(raan_rate[s] * dt)
                    s_dw, c_dw = _sincos(argp_dot[s] * dt)
                    dt_prev = dt
                j = k - 1
                sm[k] = sm[j] * c_dm + cm[j] * s_dm
                cm[k] = cm[j] * c_dm - sm[j] * s_dm
                so[k] = so[j] * c_do + co[j] * s_do
                co[k] = co[j] * c_do - so[j] * s_do
                sw[k] = sw[j] * c_dw + cw[j] * s_dw
                cw[k] = cw[j] * c_dw - sw[j] * s_dw
        # 2. Kepler's equation in d = E - M: g(d) = d - e sin(M + d) = 0 (Newton).
        if e_s == 0.0:
            for k in range(n_t):
                sin_e[k] = sm[k]
                cos_e[k] = cm[k]
        elif e_s < _SERIES_MAX_E:
            for k in range(n_t):  # starter E0 = M + e sin M (1 + e cos M), error O(e^3)
                dd[k] = e_s * sm[k] * (1.0 + e_s * cm[k])
            for _ in range(_KEPLER_MAX_ITER):
                worst = 0.0
                for k in range(n_t):
                    d = dd[k]
                    sd = _sin_series(d)
                    cd = _cos_series(d)
                    se = sm[k] * cd + cm[k] * sd
                    ce = cm[k] * cd - sm[k] * sd
                    step = (d - e_s * se) / (1.0 - e_s * ce)
                    dd[k] = d - step
                    worst = max(worst, abs(step))
                if worst <= _KEPLER_TOL_RAD:
                    break
            for k in range(n_t):
                d = dd[k]
                sd = _sin_series(d)
                cd = _cos_series(d)
                sin_e[k] = sm[k] * cd + cm[k] * sd
                cos_e[k] = cm[k] * cd - sm[k] * sd
        else:
            # Eccentric orbits, one time after another. Away from resync points the
            # starter is predicted from the previous solution, d' = d + dM e cos E /
            # (1 - e cos E) (dE/dM = 1 / (1 - e cos E)), and sin/cos of d advance by angle
            # addition, so that libm is called only at resync points or after big jumps.
            d = sd = cd = ce = 0.0
            for k in range(n_t):
                fresh = k % _RESYNC_STEPS == 0
                if not fresh:
                    inc_d = m_dot[s] * (t[k] - t[k - 1]) * e_s * ce / (1.0 - e_s * ce)
                    if abs(inc_d) < _SMALL_ANGLE_RAD:
                        ss = _sin_series(inc_d)
                        cs = _cos_series(inc_d)
                        sd, cd = sd * cs + cd * ss, cd * cs - sd * ss
                        d += inc_d
                    else:
                        fresh = True
                if fresh:
                    if e_s > 0.3:  # Danby's starter E0 = M + 0.85 e sign(sin M)
                        d = 0.85 * e_s * (1.0 if sm[k] > 0.0 else (-1.0 if sm[k] < 0.0 else 0.0))
                    else:
                        d = e_s * sm[k] * (1.0 + e_s * cm[k])
                    sd, cd = _sincos(d)
                converged = False
                for _ in range(_KEPLER_MAX_ITER):
                    se = sm[k] * cd + cm[k] * sd
                    ce = cm[k] * cd - sm[k] * sd
                    step = (d - e_s * se) / (1.0 - e_s * ce)
                    d -= step
                    if abs(step) < _SMALL_ANGLE_RAD:
                        # sin/cos of d - step by angle subtraction: no libm call
                        ss = _sin_series(step)
                        cs = _cos_series(step)
                        sd, cd = sd * cs - cd * ss, cd * cs + sd * ss
                    else:
                        sd, cd = _sincos(d)
                    if abs(step) <= _KEPLER_TOL_RAD:
                        converged = True
                        break
                if not converged and not fresh:  # predictor failed: start afresh (Danby)
                    d = 0.85 * e_s * (1.0 if sm[k] > 0.0 else (-1.0 if sm[k] < 0.0 else 0.0))
                    for _ in range(_KEPLER_MAX_ITER):
                        sd, cd = _sincos(d)
                        se = sm[k] * cd + cm[k] * sd
                        ce = cm[k] * cd - sm[k] * sd
                        step = (d - e_s * se) / (1.0 - e_s * ce)
                        d -= step
                        if abs(step) <= _KEPLER_TOL_RAD:
                            break
                    sd, cd = _sincos(d)
                sin_e[k] = sm[k] * cd + cm[k] * sd
                cos_e[k] = cm[k] * cd - sm[k] * sd
                ce = cos_e[k]
        # 3. Position (and velocity) along the perifocal axes P, Q of (node, i, perigee).
        for k in range(n_t):
            xp = a_s * (cos_e[k] - e_s)
            yp = b_s * sin_e[k]
            px = co[k] * cw[k] - so[k] * sw[k] * ci
            py = so[k] * cw[k] + co[k] * sw[k] * ci
            pz = sw[k] * si
            qx = -co[k] * sw[k] - so[k] * cw[k] * ci
            qy = -so[k] * sw[k] + co[k] * cw[k] * ci
            qz = cw[k] * si
            r_out[s, k, 0] = xp * px + yp * qx
            r_out[s, k, 1] = xp * py + yp * qy
            r_out[s, k, 2] = xp * pz + yp * qz
            if want_v:
                f = n_s / (1.0 - e_s * cos_e[k])
                vxp = -a_s * f * sin_e[k]
                vyp = b_s * f * cos_e[k]
                v_out[s, k, 0] = vxp * px + vyp * qx
                v_out[s, k, 1] = vxp * py + vyp * qy
                v_out[s, k, 2] = vxp * pz + vyp * qz


if _numba is not None:
    _jit_inline = _numba.njit(cache=True, fastmath=False, inline="always")
    _sin_series = _jit_inline(_sin_series_py)
    _cos_series = _jit_inline(_cos_series_py)
    _sincos = _jit_inline(_sincos_py)
    _kernel_numba = _numba.njit(cache=True, fastmath=False)(_kernel_py)
else:  # pragma: no cover - broken installs only
    _kernel_numba = None


def _get_kernel():  # type: ignore[no-untyped-def]
    return _kernel_numba


def _run_numba(
    els: tuple[np.ndarray, ...],
    rates: tuple[np.ndarray, np.ndarray, np.ndarray],
    t: np.ndarray,
    node_offset_rad: float,
    node_rate_offset_rad_s: float,
    want_v: bool,
    r: np.ndarray,
) -> tuple[np.ndarray, np.ndarray | None]:
    a, e, i, raan, argp, m0 = els
    raan_dot, argp_dot, m_dot = rates
    n_sat, n_t = a.size, t.size
    v = np.empty((n_sat, n_t, 3)) if want_v else np.empty((0, 0, 3))
    _get_kernel()(
        a,
        e,
        i,
        raan - node_offset_rad,
        argp,
        m0,
        raan_dot - node_rate_offset_rad_s,
        argp_dot,
        m_dot,
        t,
        want_v,
        MU_EARTH_KM3_S2,
        r,
        v,
    )
    return r, (v if want_v else None)


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
) -> tuple[np.ndarray, np.ndarray | None]:
    els = _element_arrays(elements)
    t = _times(t_s)
    shape = (els[0].size, t.size, 3)
    if out is None:
        out = np.empty(shape)
    elif (
        not isinstance(out, np.ndarray)
        or out.shape != shape
        or out.dtype != np.float64
        or not out.flags.c_contiguous
        or not out.flags.writeable
    ):
        raise CovergridError(
            f"out must be a writeable C-contiguous float64 array of shape {shape}, got "
            f"{type(out).__name__} {getattr(out, 'shape', None)} {getattr(out, 'dtype', None)}",
            field="out",
        )
    raan_dot, argp_dot, m_dot = secular_rates(els[0], els[1], els[2])
    rates = (np.asarray(raan_dot), np.asarray(argp_dot), np.asarray(m_dot))
    run = _run_numba if _choose_backend(backend) == "numba" else _run_numpy
    return run(els, rates, t, node_offset_rad, node_rate_offset_rad_s, want_v, out)


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
        Implementation; default numba unless the environment sets ``COVERGRID_NUMBA=0``.

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
        Implementation; default numba unless ``COVERGRID_NUMBA=0``.

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
        Implementation; default numba unless ``COVERGRID_NUMBA=0``.
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
