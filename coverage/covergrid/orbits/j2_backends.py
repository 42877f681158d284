"""The two implementations of secular-J2 propagation behind :mod:`covergrid.orbits.j2`.

``run_numba`` is the compiled kernel used by default (cached on disk); ``run_numpy`` is a
plain NumPy implementation of the same model, kept as an independent reference that the
tests compare with it (``backend="numpy"`` in :func:`covergrid.orbits.j2.propagate`). Both
take validated element arrays, the secular rates and the times, and fill a position array
(and optionally velocities) in place. The model and its sources are described in
:mod:`covergrid.orbits.j2`.
"""

from __future__ import annotations

import math

import numba
import numpy as np

from covergrid.constants import MU_EARTH_KM3_S2

__all__ = ["run_numba", "run_numpy"]

# Kepler's equation: stop when the last correction is below this [rad]. The solver is
# Newton's method, so the error left after a step of size d is about (e/2) d^2 < 1e-19 rad.
_KEPLER_TOL_RAD = 1e-10
_KEPLER_MAX_ITER = 50
# Satellites per NumPy block: bounds the temporaries to ~ a dozen (block, n_t) arrays.
_NUMPY_BLOCK_POINTS = 1 << 20


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
    rate_terms: bool = False,
) -> tuple[np.ndarray, np.ndarray | None]:
    """Positions (and velocities) for one block of satellites; arrays are (n_blk, 1).

    With ``rate_terms`` the velocity is the exact time derivative of the modelled position
    (:func:`covergrid.orbits.j2.propagate_to_ecef_with_velocity`), otherwise the two-body
    velocity on the ellipse.
    """
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
    if rate_terms:
        # dr/dt = (Mdot / n) v + argp_dot (h x r) + node_rate (z x r), h = P x Q
        h = np.stack((so * si, -co * si, np.broadcast_to(ci, so.shape)), axis=-1)
        zxr = np.stack((-r[..., 1], r[..., 0], np.zeros_like(r[..., 0])), axis=-1)
        v = ((m_dot / n)[..., None] * v + argp_dot[..., None] * np.cross(h, r)
             + raan_rate[..., None] * zxr)
    return r, v


def run_numpy(
    els: tuple[np.ndarray, ...],
    rates: tuple[np.ndarray, np.ndarray, np.ndarray],
    t: np.ndarray,
    node_offset_rad: float,
    node_rate_offset_rad_s: float,
    want_v: bool,
    r: np.ndarray,
    rate_terms: bool = False,
    v_out: np.ndarray | None = None,
) -> tuple[np.ndarray, np.ndarray | None]:
    a, e, i, raan, argp, m0 = els
    raan_dot, argp_dot, m_dot = rates
    n_sat, n_t = a.size, t.size
    v = (v_out if v_out is not None else np.empty((n_sat, n_t, 3))) if want_v else None
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
            rate_terms,
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
    a, e, inc, raan0, argp0, m0, raan_rate, argp_dot, m_dot, t, want_v, rate_terms, mu, r_out,
    v_out
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
                vx = vxp * px + vyp * qx
                vy = vxp * py + vyp * qy
                vz = vxp * pz + vyp * qz
                if rate_terms:
                    # exact derivative of the modelled position (propagate_to_ecef_with_velocity):
                    # (Mdot / n) v + argp_dot (h x r) + node_rate (z x r), h = P x Q
                    rx = r_out[s, k, 0]
                    ry = r_out[s, k, 1]
                    rz = r_out[s, k, 2]
                    hx = so[k] * si
                    hy = -co[k] * si
                    kf = m_dot[s] / n_s
                    wd = argp_dot[s]
                    od = raan_rate[s]
                    vx = kf * vx + wd * (hy * rz - ci * ry) - od * ry
                    vy = kf * vy + wd * (ci * rx - hx * rz) + od * rx
                    vz = kf * vz + wd * (hx * ry - hy * rx)
                v_out[s, k, 0] = vx
                v_out[s, k, 1] = vy
                v_out[s, k, 2] = vz


_jit_inline = numba.njit(cache=True, fastmath=False, inline="always")
_sin_series = _jit_inline(_sin_series_py)
_cos_series = _jit_inline(_cos_series_py)
_sincos = _jit_inline(_sincos_py)
_kernel_numba = numba.njit(cache=True, fastmath=False)(_kernel_py)


def run_numba(
    els: tuple[np.ndarray, ...],
    rates: tuple[np.ndarray, np.ndarray, np.ndarray],
    t: np.ndarray,
    node_offset_rad: float,
    node_rate_offset_rad_s: float,
    want_v: bool,
    r: np.ndarray,
    rate_terms: bool = False,
    v_out: np.ndarray | None = None,
) -> tuple[np.ndarray, np.ndarray | None]:
    a, e, i, raan, argp, m0 = els
    raan_dot, argp_dot, m_dot = rates
    n_sat, n_t = a.size, t.size
    if want_v:
        v = v_out if v_out is not None else np.empty((n_sat, n_t, 3))
    else:
        v = np.empty((0, 0, 3))
    _kernel_numba(
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
        rate_terms,
        MU_EARTH_KM3_S2,
        r,
        v,
    )
    return r, (v if want_v else None)
