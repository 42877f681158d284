"""The coverage kernel: footprint-indexed, event-driven, streaming per-cell accumulators.

Cost grows with what changes, not with cells x satellites x steps:

1. For each satellite and step, the candidate rows come from a conservative bound on the
   footprint's geocentric central angle (:func:`_central_angle_bound`).
2. In each candidate row the visible cells form one longitude interval centred on the
   satellite's longitude. On a row of constant geodetic latitude, the elevation above the
   ellipsoid-normal horizon, the slant range and the off-nadir angle depend on the cell only
   through ``cos(lon - lon_sat)``, and each limit is met on a set ``cos(dlon) >= c0``; so the
   visible set is ``|dlon| <= w``. The two edges are found with the exact ellipsoid test,
   starting from a spherical estimate; the interior is not tested.
3. A cell's in-view count changes only where this step's interval differs from the previous
   step's interval of the same satellite: at most two short ranges per row and satellite.
   Only those cells are touched. Each cell keeps streaming state (current count, when its
   level last changed, when its current gap began, level histogram, gap sums), so memory is
   proportional to the number of cells and independent of the span.
4. Within a step all entries are applied before all exits, so a hand-over between two
   satellites at one sample never opens a zero-length gap; levels held for zero time are not
   recorded.
5. Gap boundaries are placed at the crossing time between samples, from the visibility
   margin of the satellite concerned at three successive samples (:func:`_crossing`); this
   costs a few margin evaluations per gap boundary and nothing elsewhere.
6. At the end every cell's open level and open gap are closed in one pass.

The sampling convention (sample and hold) and the gap conventions are described in
:mod:`covergrid.compute.metrics`. The kernel is compiled with numba (cached on disk); with
``NUMBA_DISABLE_JIT=1`` the same code runs as plain Python, which is useful for debugging
and far too slow for studies.
"""

from __future__ import annotations

import math

import numba
import numpy as np

from covergrid.compute.kernel_state import (  # the state layout (see that module)
    CLOSE_SAMPLE,
    EXIT_SAMPLE,
    GAP_COUNT,
    GAP_START,
    HIST0,
    MAX_N,
    MIN_N,
    N_CUR,
    PASS_COUNT,
    R_GAP_END,
    R_GAP_START,
    R_MAX_GAP,
    R_SUM_GAP,
    R_SUM_GAP2,
    SUM_N,
    T_LAST,
)
from covergrid.constants import WGS84_A_KM, WGS84_B_KM

#: Upper bound on the angle between the ellipsoid normal and the geocentric radius on WGS-84
#: (the maximum is 0.1924 deg at 45 deg latitude; common practice), with a little margin.
_VERTICAL_DEFLECTION_BOUND_RAD = math.radians(0.2)
#: Extra central angle added to the candidate bound to absorb rounding [rad].
_BOUND_MARGIN_RAD = 1e-6


@numba.njit(cache=True, nogil=True)
def _central_angle_bound(r_km, el_min_rad, eta_max_rad, range_max_km):
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


@numba.njit(cache=True, nogil=True, inline="always")
def _visible(sx, sy, sz, rs2, rho, zc, sin_lat, cos_lat, cl, sl, sin2_el, cos2_eta, range2):
    """Exact visibility of one cell from a satellite at (sx, sy, sz) [km] (scalars only).

    The cell centre is (rho cl, rho sl, zc) on the ellipsoid with normal
    (cos_lat cl, cos_lat sl, sin_lat). Limits: elevation above the ellipsoid-normal horizon
    >= eps_min (sin2_el = sin^2 eps_min, eps_min >= 0); off-nadir angle from the geocentric
    nadir <= eta_max (cos2_eta = cos^2 eta_max, negative when unlimited); slant range
    <= D_max (range2 = D^2, negative when unlimited).
    """
    dx = sx - rho * cl
    dy = sy - rho * sl
    dz = sz - zc
    up = cos_lat * (dx * cl + dy * sl) + sin_lat * dz
    if up < 0.0:
        return False
    d2 = dx * dx + dy * dy + dz * dz
    if up * up < sin2_el * d2:
        return False
    if range2 >= 0.0 and d2 > range2:
        return False
    if cos2_eta >= 0.0:
        nd = sx * dx + sy * dy + sz * dz
        if nd < 0.0 or nd * nd < cos2_eta * rs2 * d2:
            return False
    return True


@numba.njit(cache=True, nogil=True, inline="always")
def _extent(step, m, cap, jc, sx, sy, sz, rs2, rho, zc, sin_lat, cos_lat, cos_lon, sin_lon,
            n_lon, sin2_el, cos2_eta, range2, known0):
    """Largest m in [0, cap] with column jc + step*m visible, searched from the estimate m.

    Visibility falls monotonically with m. With ``known0`` column jc (m = 0) is known to be
    visible and is not tested; otherwise -1 is returned when it is not visible.
    """
    if m < 0:
        m = 0
    if m > cap:
        m = cap
    j = (jc + step * m) % n_lon
    if _visible(sx, sy, sz, rs2, rho, zc, sin_lat, cos_lat, cos_lon[j], sin_lon[j], sin2_el,
                cos2_eta, range2):
        while m < cap:
            j = (jc + step * (m + 1)) % n_lon
            if not _visible(sx, sy, sz, rs2, rho, zc, sin_lat, cos_lat, cos_lon[j], sin_lon[j],
                            sin2_el, cos2_eta, range2):
                break
            m += 1
        return m
    m -= 1
    stop = 0 if known0 else -1
    while m > stop:
        j = (jc + step * m) % n_lon
        if _visible(sx, sy, sz, rs2, rho, zc, sin_lat, cos_lat, cos_lon[j], sin_lon[j], sin2_el,
                    cos2_eta, range2):
            break
        m -= 1
    return m


@numba.njit(cache=True, nogil=True, inline="always")
def _row_interval(sx, sy, sz, rs2, lon_s, sin_psi_s, cos_psi_s, cos_lam, rho, zc, sin_lat,
                  cos_lat, sin_psi, cos_psi, cos_lon, sin_lon, lon0, dlon, n_lon, sin2_el,
                  cos2_eta, range2):
    """Visible columns of one row as (start, length), wrapping modulo n_lon; length 0: none."""
    jc = int(math.floor((lon_s - lon0) / dlon)) % n_lon
    # spherical estimate of the half-width (law of cosines on the sphere)
    den = cos_psi * cos_psi_s
    cw = (cos_lam - sin_psi * sin_psi_s) / den if den > 1e-12 else -2.0
    w = math.pi if cw <= -1.0 else math.acos(min(cw, 1.0))
    off = lon0 + (jc + 0.5) * dlon - lon_s  # centre of jc relative to the satellite
    cap = (n_lon - 1) // 2
    # column jc holds the satellite's longitude, so if any column is visible it is; the
    # right-hand search finds out (without a separate test when the estimate is visible)
    m_r = _extent(1, int(math.floor((w - off) / dlon)), cap, jc, sx, sy, sz, rs2, rho, zc,
                  sin_lat, cos_lat, cos_lon, sin_lon, n_lon, sin2_el, cos2_eta, range2, False)
    if m_r < 0:
        return 0, 0
    m_l = _extent(-1, int(math.floor((w + off) / dlon)), cap, jc, sx, sy, sz, rs2, rho, zc,
                  sin_lat, cos_lat, cos_lon, sin_lon, n_lon, sin2_el, cos2_eta, range2, True)
    if m_r == cap or m_l == cap:
        # the footprint reaches round the row: the cells left near the far side are tested
        # one by one
        while m_r + m_l + 1 < n_lon:
            j = (jc + m_r + 1) % n_lon
            if not _visible(sx, sy, sz, rs2, rho, zc, sin_lat, cos_lat, cos_lon[j], sin_lon[j],
                            sin2_el, cos2_eta, range2):
                break
            m_r += 1
        while m_r + m_l + 1 < n_lon:
            j = (jc - m_l - 1) % n_lon
            if not _visible(sx, sy, sz, rs2, rho, zc, sin_lat, cos_lat, cos_lon[j], sin_lon[j],
                            sin2_el, cos2_eta, range2):
                break
            m_l += 1
    length = m_r + m_l + 1
    if length >= n_lon:
        return 0, n_lon
    return (jc - m_l) % n_lon, length


@numba.njit(cache=True, nogil=True, inline="always")
def _margin(x, y, z, rho, zc, sin_lat, cos_lat, cl, sl, sin_el, cos_eta, range_max):
    """Smallest normalised margin of the visibility limits (>= 0: in view).

    sin(elevation) - sin(eps_min); cos(off-nadir) - cos(eta_max) if limited (cos_eta > -1.5);
    (D_max - D) / D_max if limited (range_max > 0). Each is a smooth function of time, so a
    root of the smallest one between two samples is a limit crossing.
    """
    dx = x - rho * cl
    dy = y - rho * sl
    dz = z - zc
    d = math.sqrt(dx * dx + dy * dy + dz * dz)
    m = (cos_lat * (dx * cl + dy * sl) + sin_lat * dz) / d - sin_el
    if range_max > 0.0:
        m = min(m, (range_max - d) / range_max)
    if cos_eta > -1.5:
        rs = math.sqrt(x * x + y * y + z * z)
        m = min(m, (x * dx + y * dy + z * dz) / (rs * d) - cos_eta)
    return m


@numba.njit(cache=True, nogil=True)
def _crossing(mode, sx, sy, sz, px, py, pz, qx, qy, qz, rho, zc, sin_lat, cos_lat, cl, sl,
              sin_el, cos_eta, range_max):
    """Fraction of the step, after the previous sample, at which a cell's visibility changed.

    The visibility margin of the satellite concerned is evaluated at its positions at the
    samples i (s.), i-1 (p.) and i-2 (q.); the crossing is the root in [0, 1] of the parabola
    through the three values (Lagrange interpolation; mode 2), or of the secant through the
    last two (mode 1, at the second sample; also when the parabola has no root there).
    Scalars only and not inlined: it runs at gap boundaries only, a call costs no reference
    counting, and the compiled kernel stays small.
    """
    m0 = _margin(px, py, pz, rho, zc, sin_lat, cos_lat, cl, sl, sin_el, cos_eta, range_max)
    m1 = _margin(sx, sy, sz, rho, zc, sin_lat, cos_lat, cl, sl, sin_el, cos_eta, range_max)
    den = m0 - m1
    f = m0 / den if den != 0.0 else 1.0
    f = min(max(f, 0.0), 1.0)
    if mode == 2:
        ma = _margin(qx, qy, qz, rho, zc, sin_lat, cos_lat, cl, sl, sin_el, cos_eta, range_max)
        # p(t) = m0 + b t + c t^2 through t = -1, 0, 1
        b = 0.5 * (m1 - ma)
        c = 0.5 * (m1 + ma) - m0
        if abs(c) > 1e-12 * (abs(b) + abs(m0)):
            disc = b * b - 4.0 * c * m0
            if disc >= 0.0:
                sq = math.sqrt(disc)
                # numerically stable roots of c t^2 + b t + m0
                qq = -0.5 * (b + (sq if b >= 0.0 else -sq))
                best = f
                found = False
                for root in (qq / c, m0 / qq if qq != 0.0 else -1.0):
                    if 0.0 <= root <= 1.0 and (not found or abs(root - f) < abs(best - f)):
                        best = root
                        found = True
                f = best
    return f


@numba.njit(cache=True, nogil=True, inline="always")
def _close_level(a, c, i, kmax):
    """Record the level cell c has held since its last change, up to sample i."""
    dur = i - a[c, T_LAST]
    if dur > 0.0:
        n_old = a[c, N_CUR]
        a[c, HIST0 + (int(n_old) if n_old < kmax else kmax)] += dur
        a[c, SUM_N] += n_old * dur
        if n_old < a[c, MIN_N]:
            a[c, MIN_N] = n_old
        if n_old > a[c, MAX_N]:
            a[c, MAX_N] = n_old
        a[c, T_LAST] = i


@numba.njit(cache=True, nogil=True, inline="always")
def _close_gap(a, c, t_end):
    """Record the gap of cell c from R_GAP_START to t_end [samples, fractional]."""
    gr = t_end - a[c, R_GAP_START]
    a[c, R_SUM_GAP] += gr
    a[c, R_SUM_GAP2] += gr * gr
    if gr > a[c, R_MAX_GAP]:
        a[c, R_MAX_GAP] = gr


@numba.njit(cache=True, nogil=True, inline="always")
def _push(a, ev0, c, s, kind):
    """Queue a gap-boundary event (cell, satellite, kind) in the rows of `a` from ev0; when
    the queue is full the event is counted in ``a[last, 1]`` (the engine then recomputes the
    band with a longer queue, so no boundary keeps a wrong time)."""
    last = a.shape[0] - 1
    q = int(a[last, 0])
    if ev0 + q < last:
        a[ev0 + q, 0] = c
        a[ev0 + q, 1] = s
        a[ev0 + q, 2] = kind
        a[last, 0] = q + 1
    else:
        a[last, 1] += 1.0


@numba.njit(cache=True, nogil=True, inline="always")
def _change_range(a, ev0, base, j0, j1, n_lon, i, delta, kmax, mode, s):
    """Apply a +1 (a pass starts) or -1 change of the in-view count at sample i by satellite
    s to the columns j0 .. j1-1 (taken modulo n_lon) of the row starting at cell `base`.

    A gap boundary is recorded at the sample (mode 0), or queued as an event whose crossing
    time is found at the end of the sample (:func:`_refine_events`): kind 0 the first
    arrival closing a gap, kind 1 a further arrival in that step, kind 2 a departure of one
    of the last two satellites in view.
    """
    for jj in range(j0, j1):
        c = base + jj % n_lon
        _close_level(a, c, i, kmax)
        n_old = a[c, N_CUR]
        a[c, N_CUR] = n_old + delta
        if delta > 0:
            a[c, PASS_COUNT] += 1.0
            if n_old == 0.0:
                if i > a[c, GAP_START]:
                    a[c, GAP_COUNT] += 1.0
                    if mode == 0:
                        _close_gap(a, c, float(i))
                    else:
                        a[c, CLOSE_SAMPLE] = i
                        a[c, R_GAP_END] = i
                        _push(a, ev0, c, s, 0)
            elif mode != 0 and a[c, CLOSE_SAMPLE] == i:
                _push(a, ev0, c, s, 1)
        else:
            if n_old == 1.0:
                a[c, GAP_START] = i
                a[c, R_GAP_START] = i
            if mode != 0 and n_old <= 2.0:
                _push(a, ev0, c, s, 2)
    return max(j1 - j0, 0)


@numba.njit(cache=True, nogil=True)
def _refine_events(a, ev0, i, mode, b, pos_km, prev_pos, n_lon, rho, zr, sin_lat, cos_lat,
                   cos_lon, sin_lon, sin_el, cos_eta, range_max):
    """Place the gap boundaries queued at sample i at their crossing times.

    A gap that closes ends at the earliest arrival in the step; a gap that opens (the cell
    ends the sample with nobody in view) starts at the latest departure of the last two.
    """
    last = a.shape[0] - 1
    n_ev = int(a[last, 0])
    for phase in range(3):
        for q in range(n_ev):
            kind = int(a[ev0 + q, 2])
            c = int(a[ev0 + q, 0])
            if (phase < 2 and kind == 2) or (phase == 2 and kind != 2):
                continue
            if phase == 1:
                if kind == 0:
                    _close_gap(a, c, a[c, R_GAP_END])
                continue
            if kind == 2 and a[c, N_CUR] != 0.0:
                continue  # the cell is still in view: no gap opens
            s = int(a[ev0 + q, 1])
            r = c // n_lon
            j = c - r * n_lon
            t = i - 1 + _crossing(mode, pos_km[s, b, 0], pos_km[s, b, 1], pos_km[s, b, 2],
                                  prev_pos[s, 0], prev_pos[s, 1], prev_pos[s, 2],
                                  prev_pos[s, 3], prev_pos[s, 4], prev_pos[s, 5], rho[r],
                                  zr[r], sin_lat[r], cos_lat[r], cos_lon[j], sin_lon[j],
                                  sin_el, cos_eta, range_max)
            if kind == 0:
                a[c, R_GAP_END] = t
            elif kind == 1:
                if t < a[c, R_GAP_END]:
                    a[c, R_GAP_END] = t
            elif a[c, EXIT_SAMPLE] != i:
                a[c, EXIT_SAMPLE] = i
                a[c, R_GAP_START] = t
            elif t > a[c, R_GAP_START]:
                a[c, R_GAP_START] = t
    a[last, 0] = 0.0


@numba.njit(cache=True, nogil=True, inline="always")
def _apply_difference(a, ev0, base, sa, la, sb, lb, n_lon, i, delta, kmax, mode, s):
    """Apply `delta` to the cells of interval A that are not in interval B (one row)."""
    if la == 0:
        return 0
    if lb > 0 and la + lb >= n_lon:
        # long arcs may overlap in two pieces: test membership cell by cell (polar rows)
        touched = 0
        for m in range(la):
            j = (sa + m) % n_lon
            if (j - sb) % n_lon >= lb:
                touched += _change_range(a, ev0, base, j, j + 1, n_lon, i, delta,
                                         kmax, mode, s)
        return touched
    a1 = sa + la
    if lb == 0:
        lo0, hi0, lo1, hi1 = sa, a1, a1, a1
    else:
        # two arcs shorter than the circle together overlap in at most one piece; unwrap B
        # to the copy whose centre is nearest A's centre, then A \ B = [a0, b0) U [b1, a1)
        k = int(math.floor(((2 * sb + lb) - (2 * sa + la)) / (2.0 * n_lon) + 0.5))
        b0 = sb - k * n_lon
        b1 = b0 + lb
        lo0, hi0, lo1, hi1 = sa, min(a1, b0), max(b1, sa), a1
    touched = 0
    for part in range(2):
        lo = lo0 if part == 0 else lo1
        hi = hi0 if part == 0 else hi1
        if hi > lo:
            touched += _change_range(a, ev0, base, lo, hi, n_lon, i, delta, kmax,
                                     mode, s)
    return touched


@numba.njit(cache=True, nogil=True)
def advance(pos_km, i0, rho, zr, sin_lat, cos_lat, psi, lon0, dlon, n_lon,
            el_min_rad, eta_max_rad, range_max_km, refine, acc, n_cells, prev_start, prev_len,
            prev_rows, exits, bound_cache, prev_pos, visits):
    """Advance one latitude band's streaming state over a block of samples.

    For each sample, each satellite's rows are visited once: the row's new interval is found,
    the cells it adds are counted in at once (+1), the cells it drops are queued, and the new
    interval replaces the old. The queued exits (-1) are applied after every satellite's
    entries, so that a hand-over within one sample never passes through zero in view.

    Parameters
    ----------
    pos_km : ndarray, (n_sat, n_block, 3)
        Earth-fixed satellite positions at samples i0 .. i0 + n_block - 1 [km].
    i0 : int
        Index of the block's first sample.
    rho, zr, sin_lat, cos_lat, psi : ndarray, (n_rows,)
        Row geometry of the band (see :attr:`covergrid.compute.grid.Grid.row_geometry`).
    lon0, dlon : float
        Western edge of column 0 and column width [rad]; n_lon columns cover 360 deg.
    el_min_rad, eta_max_rad, range_max_km : float
        Sensor limits; eta_max_rad <= 0 and range_max_km <= 0 mean "no limit".
    refine : bool
        Place gap boundaries at the crossing time between samples (see :func:`_crossing`)
        instead of at the sample.
    acc, prev_start, prev_len, prev_rows, exits, bound_cache, prev_pos : ndarray
        State from :func:`new_state`, updated in place (``n_cells``: cells in ``acc``).
    visits : ndarray, (1,)
        Running count of satellite-sample-cell visibilities (for benchmarks), in place.
    """
    n_sat = pos_km.shape[0]
    n_block = pos_km.shape[1]
    n_rows = rho.shape[0]
    kmax = acc.shape[1] - HIST0 - 1
    sin_el = math.sin(el_min_rad)
    sin2_el = sin_el * sin_el
    cos2_eta = math.cos(eta_max_rad) ** 2 if eta_max_rad > 0.0 else -1.0
    range2 = range_max_km * range_max_km if range_max_km > 0.0 else -1.0
    cos_eta = math.cos(eta_max_rad) if eta_max_rad > 0.0 else -2.0
    range_lim = range_max_km if range_max_km > 0.0 else -1.0
    sin_psi = np.sin(psi)
    cos_psi = np.cos(psi)
    cos_lon = np.empty(n_lon)
    sin_lon = np.empty(n_lon)
    for j in range(n_lon):
        lc = lon0 + (j + 0.5) * dlon
        cos_lon[j] = math.cos(lc)
        sin_lon[j] = math.sin(lc)
    psi_lo_band = psi[0]
    psi_hi_band = psi[n_rows - 1]
    nvis = 0
    for b in range(n_block):
        i = i0 + b
        n_exits = 0
        # crossing-time refinement: none at the first sample, a secant from the second,
        # a parabola through three samples from the third on
        mode = 0 if not refine or i == 0 else (1 if i == 1 else 2)
        for s in range(n_sat):
            sx = pos_km[s, b, 0]
            sy = pos_km[s, b, 1]
            sz = pos_km[s, b, 2]
            rs2 = sx * sx + sy * sy + sz * sz
            rs = math.sqrt(rs2)
            c_lo = 0
            c_hi = 0
            # the bound depends on the radius only: reuse it while the radius stays put
            # (circular orbits), to within a metre, which the bound's margin covers many times
            if abs(rs - bound_cache[s, 0]) > 1e-3:
                bound_cache[s, 0] = rs
                bound_cache[s, 1] = _central_angle_bound(rs + 1e-3, el_min_rad, eta_max_rad,
                                                         range_max_km)
            lam = bound_cache[s, 1]
            sps = sz / rs
            if lam >= 0.0:
                psi_s = math.asin(sps)
                if psi_s + lam >= psi_lo_band and psi_s - lam <= psi_hi_band:
                    c_lo = np.searchsorted(psi, psi_s - lam)
                    c_hi = np.searchsorted(psi, psi_s + lam, side="right")
            p_lo = prev_rows[s, 0]
            p_hi = prev_rows[s, 1]
            if p_lo >= p_hi:
                lo, hi = c_lo, c_hi
            elif c_lo >= c_hi:
                lo, hi = p_lo, p_hi
            else:
                lo, hi = min(p_lo, c_lo), max(p_hi, c_hi)
            if lo >= hi:
                continue
            lon_s = math.atan2(sy, sx)
            cps = math.sqrt(max(1.0 - sps * sps, 0.0))
            cos_lam = math.cos(lam)
            for r in range(lo, hi):
                cs = 0
                cl = 0
                if c_lo <= r < c_hi:
                    cs, cl = _row_interval(sx, sy, sz, rs2, lon_s, sps, cps, cos_lam, rho[r],
                                           zr[r], sin_lat[r], cos_lat[r], sin_psi[r],
                                           cos_psi[r], cos_lon, sin_lon, lon0, dlon, n_lon,
                                           sin2_el, cos2_eta, range2)
                    nvis += cl
                ps = 0
                pl = 0
                if p_lo <= r < p_hi:
                    ps = prev_start[s, r]
                    pl = prev_len[s, r]
                if cs == ps and cl == pl:
                    continue
                _apply_difference(acc, n_cells, r * n_lon, cs, cl, ps, pl, n_lon, i, 1,
                                  kmax, mode, s)
                if pl > 0:
                    exits[n_exits, 0] = r
                    exits[n_exits, 1] = ps
                    exits[n_exits, 2] = pl
                    exits[n_exits, 3] = cs
                    exits[n_exits, 4] = cl
                    exits[n_exits, 5] = s
                    n_exits += 1
                prev_start[s, r] = cs
                prev_len[s, r] = cl
            prev_rows[s, 0] = c_lo
            prev_rows[s, 1] = c_hi
        for q in range(n_exits):
            r = exits[q, 0]
            _apply_difference(acc, n_cells, r * n_lon, exits[q, 1], exits[q, 2],
                              exits[q, 3], exits[q, 4], n_lon, i, -1, kmax, mode, exits[q, 5])
        if mode != 0:
            _refine_events(acc, n_cells, i, mode, b, pos_km, prev_pos, n_lon, rho, zr, sin_lat,
                           cos_lat, cos_lon, sin_lon, sin_el, cos_eta, range_lim)
        for s in range(n_sat):
            prev_pos[s, 3] = prev_pos[s, 0]
            prev_pos[s, 4] = prev_pos[s, 1]
            prev_pos[s, 5] = prev_pos[s, 2]
            prev_pos[s, 0] = pos_km[s, b, 0]
            prev_pos[s, 1] = pos_km[s, b, 1]
            prev_pos[s, 2] = pos_km[s, b, 2]
    visits[0] += nvis


@numba.njit(cache=True, nogil=True)
def close(n_steps, acc, n_cells):
    """Close every cell's open level and open gap at the end of the span (sample n_steps)."""
    kmax = acc.shape[1] - HIST0 - 1
    for c in range(n_cells):
        _close_level(acc, c, n_steps, kmax)
        if acc[c, N_CUR] == 0.0:
            if n_steps > acc[c, GAP_START]:
                acc[c, GAP_COUNT] += 1.0
                _close_gap(acc, c, float(n_steps))
            acc[c, GAP_START] = n_steps


def run_band(state: dict[str, np.ndarray], pos_km: np.ndarray, i0: int,
             rows: dict[str, np.ndarray], lon0_rad: float, dlon_rad: float, n_lon: int,
             el_min_rad: float, eta_max_rad: float, range_max_km: float,
             refine: bool = True) -> None:
    """Python entry point to :func:`advance` with the state held in a dict."""
    st = state
    advance(np.ascontiguousarray(pos_km, dtype=np.float64), int(i0),
            rows["rho_km"], rows["z_km"], rows["sin_lat"], rows["cos_lat"], rows["psi_rad"],
            float(lon0_rad), float(dlon_rad), int(n_lon),
            float(el_min_rad), float(eta_max_rad), float(range_max_km), bool(refine),
            st["acc"], int(st["n_cells"][0]), st["prev_start"], st["prev_len"],
            st["prev_rows"], st["exits"], st["bound_cache"], st["prev_pos"], st["visits"])


def close_band(state: dict[str, np.ndarray], n_steps: int) -> None:
    """Python entry point to :func:`close`."""
    close(int(n_steps), state["acc"], int(state["n_cells"][0]))
