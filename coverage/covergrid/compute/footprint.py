"""Where a satellite's visibility limits meet one latitude row: the kernel's geometry.

Scalar numba helpers of :mod:`covergrid.compute.kernel`. On a row of constant geodetic
latitude, a cell at longitude lon is seen from a satellite at Earth-fixed (x, y, z) exactly
when its *projected coordinate* ``X = x cos(lon) + y sin(lon)`` (the satellite's position
projected on the cell's meridian direction) reaches a threshold ``X*`` that depends only on
the satellite and the row: every limit (elevation above the ellipsoid-normal horizon, the
off-nadir angle of a nadir-pointing cone, the slant range) depends on the cell only through
``X``, and is met on a half-line ``X >= X*_k``. So the visible cells of a row are
``cos(lon - lon_sat) >= X*/rho_sat``, one longitude interval, decided exactly by that test
(:func:`row_interval`), and the visibility margin of a cell, ``X - X*`` [km], is a smooth
function of time (smooth through the satellite's passage
over the pole, where its longitude is not): :func:`row_thresholds` gives ``X*`` and its time
derivative in closed form, which the kernel interpolates between samples.

A new limit slots in as one more ``X*_k`` (with its rate) in :func:`row_thresholds`, as
long as it is met on a half-line of ``X``; the kernel takes their largest and, where the
binding limit changes within a step, every limit's own interpolant. A side-looking
sensor's inner cone is the same quadratic's root taken as an upper threshold (``X <= X*``);
its cells are decided one by one within the reach (:mod:`covergrid.compute.side_events`).
"""

from __future__ import annotations

import math

from covergrid.compute.jit import kernel_function, kernel_helper
from covergrid.constants import WGS84_A_KM, WGS84_B_KM

__all__ = ["NO_LIMIT_KM", "binding", "central_angle_bound", "extent", "row_interval",
           "row_thresholds", "wrap_column"]

#: Upper bound on the angle between the ellipsoid normal and the geocentric radius on WGS-84
#: (the maximum is 0.1924 deg at 45 deg latitude; common practice), with a little margin.
_VERTICAL_DEFLECTION_BOUND_RAD = math.radians(0.2)
#: Extra central angle added to the candidate bound to absorb rounding [rad].
_BOUND_MARGIN_RAD = 1e-6
#: Threshold of an absent limit [km]: below any projected coordinate (|X| <= |r_sat|).
NO_LIMIT_KM = -1e9


@kernel_function
def central_angle_bound(r_km, el_min_rad, eta_max_rad, range_max_km):
    """Conservative geocentric central angle of the footprint of a satellite at radius r.

    Spherical footprint geometry (Wertz and Larson, *Space Mission Analysis and Design*,
    3rd ed., sec. 5.2: sin(eta) = cos(eps) R / r, lambda = 90 deg - eta - eps) evaluated with
    the polar radius (the smallest Earth radius gives the widest footprint) and the minimum
    elevation lowered by the largest deflection between ellipsoid normal and geocentric
    radius, so that no visible cell lies outside it on the ellipsoid. Returns -1 when nothing
    can be in view.
    """
    rb = WGS84_B_KM
    if r_km <= rb:
        return -1.0
    eps = el_min_rad - _VERTICAL_DEFLECTION_BOUND_RAD
    c = rb * math.cos(eps) / r_km
    if c > 1.0:
        c = 1.0
    lam = math.acos(c) - eps
    if eta_max_rad > 0.0:
        s = r_km * math.sin(eta_max_rad) / rb
        if s < 1.0:
            lam_on = math.asin(s) - eta_max_rad
            if lam_on < lam:
                lam = lam_on
    if range_max_km > 0.0:
        # cos(lambda) >= (rho^2 + r^2 - D^2) / (2 rho r) (law of cosines); the bound takes
        # the smallest right-hand side over rho in [b, a] (stationary at sqrt(r^2 - D^2))
        d2 = range_max_km * range_max_km
        best = 2.0
        for rho in (WGS84_B_KM, WGS84_A_KM, math.sqrt(max(r_km * r_km - d2, 0.0))):
            rho = min(max(rho, WGS84_B_KM), WGS84_A_KM)
            v = (rho * rho + r_km * r_km - d2) / (2.0 * rho * r_km)
            if v < best:
                best = v
        if best >= 1.0:
            return -1.0
        lam_r = math.acos(max(best, -1.0))
        if lam_r < lam:
            lam = lam_r
    return lam + _BOUND_MARGIN_RAD


@kernel_helper
def _larger_root(a, b, c):
    """Larger real root of a x^2 + b x + c (a > 0), numerically stable; None-free: a
    negative discriminant (rounding only, in our use) is taken as zero."""
    disc = b * b - 4.0 * a * c
    sq = math.sqrt(disc) if disc > 0.0 else 0.0
    q = -0.5 * (b + sq) if b >= 0.0 else -0.5 * (b - sq)
    r1 = q / a
    if q == 0.0:
        return r1
    r2 = c / q
    return r1 if r1 > r2 else r2


@kernel_helper
def row_thresholds(x, y, z, vx, vy, vz, rho, zc, sin_lat, cos_lat, sin_el, cos_eta, range_max,
                   want_rate):
    """Thresholds X*_k of the projected coordinate for one row, one per limit, and their
    time derivatives.

    Parameters are scalars: satellite Earth-fixed position [km] and velocity [km/s]; the
    row's cell centres at distance ``rho`` from the polar axis and height ``zc`` [km] with
    geodetic latitude (sin_lat, cos_lat); the limits ``sin_el`` = sin(eps_min) >= 0,
    ``cos_eta`` = cos(eta_max) (< -1.5: none), ``range_max`` [km] (<= 0: none).

    Returns ``(X_el, rate_el, X_cone, rate_cone, X_range, rate_range)`` [km, km/s] (rates
    only with ``want_rate``, else 0; an absent limit, or a cone wider than the Earth, has
    X = NO_LIMIT_KM and rate 0): a cell of the row at longitude lon meets limit k iff
    ``x cos(lon) + y sin(lon) >= X_k``, and is visible when it meets all (see
    :func:`binding`).

    Notes
    -----
    With the cell at (rho cos lon, rho sin lon, zc) and normal (cos_lat cos lon, cos_lat
    sin lon, sin_lat), the satellite-to-cell geometry depends on lon only through X:
    the height of the satellite above the cell's horizon plane is
    ``P = cos_lat X + sin_lat (z - zc) - rho cos_lat``, the squared range
    ``D^2 = q - 2 rho X`` with ``q = x^2 + y^2 + rho^2 + (z - zc)^2``, and the projection of
    the satellite-to-cell vector on the nadir ``N = r^2 - rho X - z zc``. The limits are
    (elevation) ``P >= sin(eps) D``, (cone) ``N >= cos(eta) |r| D``, (range) ``D <= D_max``;
    the first two, squared, are quadratics in X whose larger root is the boundary (the
    cone's near-side intersection; the elevation root with P >= 0, taken from the horizon's
    threshold X0 where P = 0 so that small elevations lose no digits), the third is
    linear.
    Each boundary's rate follows by implicit differentiation, ``dX*/dt = -F_t / F_X``, of
    ``F = P - sin(eps) D`` and ``F = N - cos(eta) |r| D``. Geometry of a point seen from a
    satellite, as in Wertz and Larson, *Space Mission Analysis and Design*, 3rd ed.,
    sec. 5.2, written on the ellipsoid; the rate is elementary calculus.
    """
    dz = z - zc
    q = x * x + y * y + rho * rho + dz * dz
    qd = 2.0 * (x * vx + y * vy + dz * vz)
    s = sin_el
    # elevation: P = cos_lat (X - X0) with X0 the horizon's own threshold; the root of
    # P^2 = s^2 D^2 with P >= 0, written without cancellation (it is X0 + u, u >= 0):
    # cos^2 u^2 + 2 s^2 rho u - s^2 D0^2 = 0, D0^2 = q - 2 rho X0
    x_h = (rho * cos_lat - sin_lat * dz) / cos_lat
    d0sq = max(q - 2.0 * rho * x_h, 0.0)
    x_el = x_h + s * d0sq / (s * rho + math.sqrt(s * s * rho * rho + cos_lat * cos_lat * d0sq)
                             ) if s > 0.0 else x_h
    r_el = 0.0
    if want_rate:
        if s == 0.0:
            r_el = -sin_lat * vz / cos_lat
        else:
            d = math.sqrt(max(q - 2.0 * rho * x_el, 1e-12))
            r_el = -(sin_lat * vz - s * qd / (2.0 * d)) / (cos_lat + s * rho / d)
    x_c = NO_LIMIT_KM
    r_c = 0.0
    if cos_eta > -1.5:
        r2 = x * x + y * y + z * z
        e1 = r2 - z * zc
        k2r2 = cos_eta * cos_eta * r2
        a = rho * rho
        b = 2.0 * rho * (k2r2 - e1)
        c = e1 * e1 - k2r2 * q
        if b * b - 4.0 * a * c >= 0.0:  # otherwise the cone is wider than the Earth
            x_c = _larger_root(a, b, c)
            if want_rate:
                rs = math.sqrt(r2)
                rv = x * vx + y * vy + z * vz
                d = math.sqrt(max(q - 2.0 * rho * x_c, 1e-12))
                h_t = (2.0 * rv - vz * zc) - cos_eta * (rv / rs * d + rs * qd / (2.0 * d))
                r_c = -h_t / (-rho + cos_eta * rs * rho / d)
    x_r = NO_LIMIT_KM
    r_r = 0.0
    if range_max > 0.0:
        x_r = (q - range_max * range_max) / (2.0 * rho)
        r_r = qd / (2.0 * rho)
    return x_el, r_el, x_c, r_c, x_r, r_r


@kernel_helper
def binding(lims):
    """The binding (largest) threshold of the tuple :func:`row_thresholds` returns, its rate
    and its index (0 elevation, 1 cone, 2 range)."""
    x_el, r_el, x_c, r_c, x_r, r_r = lims
    best, rate, k = x_el, r_el, 0
    if x_c > best:
        best, rate, k = x_c, r_c, 1
    if x_r > best:
        best, rate, k = x_r, r_r, 2
    return best, rate, k


@kernel_helper
def wrap_column(j, n_lon):
    """Column j in [-n_lon, 2 n_lon) taken modulo n_lon, without an integer division."""
    if j >= n_lon:
        return j - n_lon
    if j < 0:
        return j + n_lon
    return j


@kernel_helper
def _seen(j, x, y, x_thr, cos_lon, sin_lon):
    """Whether column j of a row meets every limit: its projected coordinate reaches X*."""
    return cos_lon[j] * x + sin_lon[j] * y >= x_thr


@kernel_helper
def extent(step, m, cap, jc, x, y, x_thr, cos_lon, sin_lon, n_lon, known0):
    """Largest m in [0, cap] with column jc + step*m seen, searched from the estimate m.

    Visibility falls monotonically with m. With ``known0`` column jc (m = 0) is known to be
    seen and is not tested; otherwise -1 is returned when it is not.
    """
    if m < 0:
        m = 0
    if m > cap:
        m = cap
    if _seen(wrap_column(jc + step * m, n_lon), x, y, x_thr, cos_lon, sin_lon):
        while m < cap and _seen(wrap_column(jc + step * (m + 1), n_lon), x, y, x_thr, cos_lon,
                                sin_lon):
            m += 1
        return m
    m -= 1
    stop = 0 if known0 else -1
    while m > stop and not _seen(wrap_column(jc + step * m, n_lon), x, y, x_thr, cos_lon,
                                 sin_lon):
        m -= 1
    return m


@kernel_helper
def row_interval(x, y, x_thr, jc, m_r, m_l, cos_lon, sin_lon, n_lon):
    """Visible columns of one row as (start, length), wrapping modulo n_lon; length 0: none.

    A column is visible when its projected coordinate ``x cos(lon) + y sin(lon)`` reaches the
    row's binding threshold ``x_thr`` (:func:`row_thresholds`, :func:`binding`); the visible
    columns are one interval about column ``jc``, the satellite's. ``m_r`` and ``m_l`` are
    estimates of the offsets of its two ends from jc, from which the ends are searched.
    """
    cap = (n_lon - 1) // 2
    # column jc holds the satellite's longitude, so if any column is visible it is; the
    # right-hand search finds out (without a separate test when the estimate is visible)
    m_r = extent(1, m_r, cap, jc, x, y, x_thr, cos_lon, sin_lon, n_lon, False)
    if m_r < 0:
        return 0, 0
    m_l = extent(-1, m_l, cap, jc, x, y, x_thr, cos_lon, sin_lon, n_lon, True)
    if m_r == cap or m_l == cap:
        # the footprint reaches round the row: the cells left near the far side are tested
        # one by one
        while m_r + m_l + 1 < n_lon and _seen(wrap_column(jc + m_r + 1, n_lon), x, y, x_thr,
                                              cos_lon, sin_lon):
            m_r += 1
        while m_r + m_l + 1 < n_lon and _seen(wrap_column(jc - m_l - 1, n_lon), x, y, x_thr,
                                              cos_lon, sin_lon):
            m_l += 1
    length = m_r + m_l + 1
    if length >= n_lon:
        return 0, n_lon
    return wrap_column(jc - m_l, n_lon), length
