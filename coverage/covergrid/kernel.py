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
5. At the end every cell's open level and open gap are closed in one pass.

The sampling convention (sample and hold) and the gap conventions are described in
:mod:`covergrid.metrics`. The kernel is compiled with numba (cached on disk); with
``NUMBA_DISABLE_JIT=1`` the same code runs as plain Python, which is useful for debugging
and far too slow for studies.
"""

from __future__ import annotations

import math

import numba
import numpy as np

from .constants import WGS84_A_KM, WGS84_B_KM

#: Upper bound on the angle between the ellipsoid normal and the geocentric radius on WGS-84
#: (the maximum is 0.1924 deg at 45 deg latitude; common practice), with a little margin.
_VERTICAL_DEFLECTION_BOUND_RAD = math.radians(0.2)
#: Extra central angle added to the candidate bound to absorb rounding [rad].
_BOUND_MARGIN_RAD = 1e-6
_BIG = np.int32(2**30)


def new_state(n_cells: int, nfold_max: int, n_sat: int, n_rows: int) -> dict[str, np.ndarray]:
    """Allocate the streaming state of one latitude band.

    Parameters
    ----------
    n_cells : int
        Cells in the band (rows x columns).
    nfold_max : int
        K, the highest in-view level kept separately; levels >= K share the last bin.
    n_sat : int
        Satellites.
    n_rows : int
        Latitude rows in the band.

    Returns
    -------
    dict of ndarray
        Accumulators (see :func:`covergrid.metrics.finalise`) plus the kernel's own
        bookkeeping (``n_cur``, ``t_last``, ``gap_start``, previous intervals).
    """
    return {
        "n_cur": np.zeros(n_cells, np.int32),
        "t_last": np.zeros(n_cells, np.int32),
        "gap_start": np.zeros(n_cells, np.int32),
        "hist": np.zeros((n_cells, nfold_max + 1), np.int64),
        "sum_n": np.zeros(n_cells, np.int64),
        "min_n": np.full(n_cells, _BIG, np.int32),
        "max_n": np.zeros(n_cells, np.int32),
        "gap_count": np.zeros(n_cells, np.int32),
        "sum_gap": np.zeros(n_cells, np.int64),
        "sum_gap2": np.zeros(n_cells, np.int64),
        "max_gap": np.zeros(n_cells, np.int64),
        "pass_count": np.zeros(n_cells, np.int32),
        # previous step's interval per satellite and row, and the row range it spans
        "prev_start": np.zeros((n_sat, n_rows), np.int32),
        "prev_len": np.zeros((n_sat, n_rows), np.int32),
        "prev_rows": np.zeros((n_sat, 2), np.int32),
        "cur_start": np.zeros((n_sat, n_rows), np.int32),
        "cur_len": np.zeros((n_sat, n_rows), np.int32),
        "cur_rows": np.zeros((n_sat, 2), np.int32),
        "visits": np.zeros(1, np.int64),
    }


@numba.njit(cache=True, nogil=True)
def _central_angle_bound(r_km, el_min_rad, eta_max_rad, range_max_km):
    """Conservative geocentric central angle of the footprint of a satellite at radius r.

    Spherical footprint geometry (Wertz and Larson, *Space Mission Analysis and Design*,
    3rd ed., sec. 5.2: sin(eta) = cos(eps) R / r, lambda = 90 deg - eta - eps) evaluated with
    the polar radius (the smallest Earth radius gives the widest footprint) and the minimum
    elevation lowered by the largest deflection between ellipsoid normal and geocentric
    radius, so that no visible cell lies outside it on the ellipsoid.
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
        # cos(lambda) >= (rho^2 + r^2 - D^2) / (2 rho r); the bound is the smallest right-hand
        # side over rho in [b, a] (law of cosines; its minimum is at rho = sqrt(r^2 - D^2)).
        d2 = range_max_km * range_max_km
        best = 2.0
        for rho in (WGS84_B_KM, WGS84_A_KM, math.sqrt(max(r_km * r_km - d2, 0.0))):
            if rho < WGS84_B_KM:
                rho = WGS84_B_KM
            if rho > WGS84_A_KM:
                rho = WGS84_A_KM
            v = (rho * rho + r_km * r_km - d2) / (2.0 * rho * r_km)
            if v < best:
                best = v
        if best < 1.0:
            lam_r = math.acos(max(best, -1.0))
            if lam_r < lam:
                lam = lam_r
        else:
            return -1.0
    return lam + _BOUND_MARGIN_RAD


@numba.njit(cache=True, nogil=True)
def _visible(sx, sy, sz, rs2, r, j, rho, zr, sin_lat, cos_lat, cos_lon, sin_lon,
             sin2_el, cos2_eta, range2):
    """Exact visibility of cell (row r, column j) from a satellite at (sx, sy, sz) [km].

    Elevation above the ellipsoid-normal horizon >= eps_min (sin2_el = sin^2 eps_min,
    eps_min >= 0), off-nadir angle from the geocentric nadir <= eta_max (cos2_eta =
    cos^2 eta_max, or a negative number when unlimited), slant range <= D_max (range2 = D^2,
    or a negative number when unlimited).
    """
    cl = cos_lon[j]
    sl = sin_lon[j]
    dx = sx - rho[r] * cl
    dy = sy - rho[r] * sl
    dz = sz - zr[r]
    up = cos_lat[r] * (dx * cl + dy * sl) + sin_lat[r] * dz
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


@numba.njit(cache=True, nogil=True)
def _extent(step, m, cap, jc, sx, sy, sz, rs2, r, rho, zr, sin_lat, cos_lat, cos_lon, sin_lon,
            n_lon, sin2_el, cos2_eta, range2):
    """Largest m in [0, cap] with column jc + step*m visible, searched from the estimate m.

    Column jc (m = 0) is known to be visible and visibility falls monotonically with m.
    """
    if m < 0:
        m = 0
    if m > cap:
        m = cap
    if _visible(sx, sy, sz, rs2, r, (jc + step * m) % n_lon, rho, zr, sin_lat, cos_lat,
                cos_lon, sin_lon, sin2_el, cos2_eta, range2):
        while m < cap and _visible(sx, sy, sz, rs2, r, (jc + step * (m + 1)) % n_lon, rho, zr,
                                   sin_lat, cos_lat, cos_lon, sin_lon, sin2_el, cos2_eta,
                                   range2):
            m += 1
        return m
    m -= 1
    while m > 0 and not _visible(sx, sy, sz, rs2, r, (jc + step * m) % n_lon, rho, zr, sin_lat,
                                 cos_lat, cos_lon, sin_lon, sin2_el, cos2_eta, range2):
        m -= 1
    return m


@numba.njit(cache=True, nogil=True)
def _row_interval(sx, sy, sz, rs2, lon_s, sin_psi_s, cos_psi_s, cos_lam, r,
                  rho, zr, sin_lat, cos_lat, sin_psi, cos_psi, cos_lon, sin_lon,
                  lon0, dlon, n_lon, sin2_el, cos2_eta, range2):
    """Visible columns of row r as (start, length), wrapping modulo n_lon; length 0: none."""
    jc = int(math.floor((lon_s - lon0) / dlon)) % n_lon
    if not _visible(sx, sy, sz, rs2, r, jc, rho, zr, sin_lat, cos_lat, cos_lon, sin_lon,
                    sin2_el, cos2_eta, range2):
        return 0, 0
    # spherical estimate of the half-width (law of cosines on the sphere)
    den = cos_psi[r] * cos_psi_s
    if den > 1e-12:
        cw = (cos_lam - sin_psi[r] * sin_psi_s) / den
    else:
        cw = -2.0
    w = math.pi if cw <= -1.0 else math.acos(min(cw, 1.0))
    off = lon0 + (jc + 0.5) * dlon - lon_s  # centre of jc relative to the satellite, |off| <= dlon/2
    cap = (n_lon - 1) // 2
    m_r = int(math.floor((w - off) / dlon))
    m_l = int(math.floor((w + off) / dlon))
    m_r = _extent(1, m_r, cap, jc, sx, sy, sz, rs2, r, rho, zr, sin_lat, cos_lat, cos_lon,
                  sin_lon, n_lon, sin2_el, cos2_eta, range2)
    m_l = _extent(-1, m_l, cap, jc, sx, sy, sz, rs2, r, rho, zr, sin_lat, cos_lat, cos_lon,
                  sin_lon, n_lon, sin2_el, cos2_eta, range2)
    if m_r == cap or m_l == cap:
        # the footprint reaches round the row: the few cells left near the far side are
        # tested one by one
        while m_r + m_l + 1 < n_lon and _visible(sx, sy, sz, rs2, r, (jc + m_r + 1) % n_lon,
                                                 rho, zr, sin_lat, cos_lat, cos_lon, sin_lon,
                                                 sin2_el, cos2_eta, range2):
            m_r += 1
        while m_r + m_l + 1 < n_lon and _visible(sx, sy, sz, rs2, r, (jc - m_l - 1) % n_lon,
                                                 rho, zr, sin_lat, cos_lat, cos_lon, sin_lon,
                                                 sin2_el, cos2_eta, range2):
            m_l += 1
    length = m_r + m_l + 1
    if length >= n_lon:
        return 0, n_lon
    return (jc - m_l) % n_lon, length


@numba.njit(cache=True, nogil=True)
def _change(c, i, delta, n_cur, t_last, gap_start, hist, sum_n, min_n, max_n,
            gap_count, sum_gap, sum_gap2, max_gap, pass_count, kmax):
    """Apply a +1 / -1 change of cell c's in-view count at sample i."""
    n_old = n_cur[c]
    dur = i - t_last[c]
    if dur > 0:
        lvl = n_old if n_old < kmax else kmax
        hist[c, lvl] += dur
        sum_n[c] += n_old * dur
        if n_old < min_n[c]:
            min_n[c] = n_old
        if n_old > max_n[c]:
            max_n[c] = n_old
        t_last[c] = i
    n_cur[c] = n_old + delta
    if delta > 0:
        pass_count[c] += 1
        if n_old == 0:
            g = i - gap_start[c]
            if g > 0:
                gap_count[c] += 1
                sum_gap[c] += g
                sum_gap2[c] += g * g
                if g > max_gap[c]:
                    max_gap[c] = g
    elif n_old + delta == 0:
        gap_start[c] = i


@numba.njit(cache=True, nogil=True)
def _apply_difference(base, sa, la, sb, lb, n_lon, i, delta, n_cur, t_last, gap_start, hist,
                      sum_n, min_n, max_n, gap_count, sum_gap, sum_gap2, max_gap, pass_count,
                      kmax):
    """Apply `delta` to the cells of interval A that are not in interval B (one row)."""
    if la == 0:
        return 0
    touched = 0
    if lb == 0:
        for m in range(la):
            _change(base + (sa + m) % n_lon, i, delta, n_cur, t_last, gap_start, hist, sum_n,
                    min_n, max_n, gap_count, sum_gap, sum_gap2, max_gap, pass_count, kmax)
        return la
    if la + lb >= n_lon:
        # long arcs may overlap in two pieces: test membership cell by cell (polar rows only)
        for m in range(la):
            j = (sa + m) % n_lon
            if (j - sb) % n_lon >= lb:
                _change(base + j, i, delta, n_cur, t_last, gap_start, hist, sum_n, min_n,
                        max_n, gap_count, sum_gap, sum_gap2, max_gap, pass_count, kmax)
                touched += 1
        return touched
    # two arcs shorter than the circle together overlap in at most one piece; unwrap B to
    # the copy whose centre is nearest A's centre, then A \ B = [a0, b0) U [b1, a1)
    a0 = sa
    a1 = sa + la
    d2 = (2 * sb + lb) - (2 * sa + la)
    k = int(math.floor(d2 / (2.0 * n_lon) + 0.5))
    b0 = sb - k * n_lon
    b1 = b0 + lb
    hi = a1 if a1 < b0 else b0
    for j in range(a0, hi):
        _change(base + j % n_lon, i, delta, n_cur, t_last, gap_start, hist, sum_n, min_n,
                max_n, gap_count, sum_gap, sum_gap2, max_gap, pass_count, kmax)
        touched += 1
    lo = b1 if b1 > a0 else a0
    for j in range(lo, a1):
        _change(base + j % n_lon, i, delta, n_cur, t_last, gap_start, hist, sum_n, min_n,
                max_n, gap_count, sum_gap, sum_gap2, max_gap, pass_count, kmax)
        touched += 1
    return touched


@numba.njit(cache=True, nogil=True)
def advance(pos_km, i0, rho, zr, sin_lat, cos_lat, psi, lon0, dlon, n_lon,
            el_min_rad, eta_max_rad, range_max_km,
            n_cur, t_last, gap_start, hist, sum_n, min_n, max_n, gap_count, sum_gap,
            sum_gap2, max_gap, pass_count, prev_start, prev_len, prev_rows,
            cur_start, cur_len, cur_rows, visits):
    """Advance one latitude band's streaming state over a block of samples.

    Parameters
    ----------
    pos_km : ndarray, (n_sat, n_block, 3)
        Earth-fixed satellite positions at samples i0 .. i0 + n_block - 1 [km].
    i0 : int
        Index of the block's first sample.
    rho, zr, sin_lat, cos_lat, psi : ndarray, (n_rows,)
        Row geometry of the band (see :attr:`covergrid.grid.Grid.row_geometry`).
    lon0, dlon : float
        Western edge of column 0 and column width [rad]; n_lon columns cover 360 deg.
    el_min_rad, eta_max_rad, range_max_km : float
        Sensor limits; eta_max_rad <= 0 and range_max_km <= 0 mean "no limit".
    n_cur ... cur_rows : ndarray
        State from :func:`new_state`, updated in place.
    visits : ndarray, (1,)
        Running count of satellite-step-cell visibilities (for benchmarks), updated in place.
    """
    n_sat = pos_km.shape[0]
    n_block = pos_km.shape[1]
    n_rows = rho.shape[0]
    kmax = hist.shape[1] - 1
    sin_el = math.sin(el_min_rad)
    sin2_el = sin_el * sin_el
    cos2_eta = math.cos(eta_max_rad) ** 2 if eta_max_rad > 0.0 else -1.0
    range2 = range_max_km * range_max_km if range_max_km > 0.0 else -1.0
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
        # 1. this sample's interval of every satellite in every candidate row
        for s in range(n_sat):
            sx = pos_km[s, b, 0]
            sy = pos_km[s, b, 1]
            sz = pos_km[s, b, 2]
            rs2 = sx * sx + sy * sy + sz * sz
            rs = math.sqrt(rs2)
            lam = _central_angle_bound(rs, el_min_rad, eta_max_rad, range_max_km)
            cur_rows[s, 0] = 0
            cur_rows[s, 1] = 0
            if lam < 0.0:
                continue
            psi_s = math.asin(sz / rs)
            lo_psi = psi_s - lam
            hi_psi = psi_s + lam
            if hi_psi < psi_lo_band or lo_psi > psi_hi_band:
                continue
            r_lo = np.searchsorted(psi, lo_psi)
            r_hi = np.searchsorted(psi, hi_psi, side="right")
            cur_rows[s, 0] = r_lo
            cur_rows[s, 1] = r_hi
            lon_s = math.atan2(sy, sx)
            sps = sz / rs
            cps = math.sqrt(max(1.0 - sps * sps, 0.0))
            cos_lam = math.cos(lam)
            for r in range(r_lo, r_hi):
                st, ln = _row_interval(sx, sy, sz, rs2, lon_s, sps, cps, cos_lam, r, rho, zr,
                                       sin_lat, cos_lat, sin_psi, cos_psi, cos_lon, sin_lon,
                                       lon0, dlon, n_lon, sin2_el, cos2_eta, range2)
                cur_start[s, r] = st
                cur_len[s, r] = ln
                nvis += ln
        # 2. entries of all satellites, then 3. exits of all satellites
        for phase in range(2):
            delta = 1 if phase == 0 else -1
            for s in range(n_sat):
                p_lo = prev_rows[s, 0]
                p_hi = prev_rows[s, 1]
                c_lo = cur_rows[s, 0]
                c_hi = cur_rows[s, 1]
                if p_lo >= p_hi and c_lo >= c_hi:
                    continue
                if p_lo >= p_hi:
                    lo, hi = c_lo, c_hi
                elif c_lo >= c_hi:
                    lo, hi = p_lo, p_hi
                else:
                    lo, hi = min(p_lo, c_lo), max(p_hi, c_hi)
                for r in range(lo, hi):
                    cs = cur_start[s, r] if c_lo <= r < c_hi else 0
                    cl = cur_len[s, r] if c_lo <= r < c_hi else 0
                    ps = prev_start[s, r] if p_lo <= r < p_hi else 0
                    pl = prev_len[s, r] if p_lo <= r < p_hi else 0
                    if phase == 0:
                        _apply_difference(r * n_lon, cs, cl, ps, pl, n_lon, i, delta, n_cur,
                                          t_last, gap_start, hist, sum_n, min_n, max_n,
                                          gap_count, sum_gap, sum_gap2, max_gap, pass_count,
                                          kmax)
                    else:
                        _apply_difference(r * n_lon, ps, pl, cs, cl, n_lon, i, delta, n_cur,
                                          t_last, gap_start, hist, sum_n, min_n, max_n,
                                          gap_count, sum_gap, sum_gap2, max_gap, pass_count,
                                          kmax)
        # 4. this sample's intervals become the previous ones
        for s in range(n_sat):
            c_lo = cur_rows[s, 0]
            c_hi = cur_rows[s, 1]
            for r in range(c_lo, c_hi):
                prev_start[s, r] = cur_start[s, r]
                prev_len[s, r] = cur_len[s, r]
            prev_rows[s, 0] = c_lo
            prev_rows[s, 1] = c_hi
    visits[0] += nvis


@numba.njit(cache=True, nogil=True)
def close(n_steps, n_cur, t_last, gap_start, hist, sum_n, min_n, max_n, gap_count, sum_gap,
          sum_gap2, max_gap):
    """Close every cell's open level and open gap at the end of the span (sample n_steps)."""
    kmax = hist.shape[1] - 1
    for c in range(n_cur.shape[0]):
        n_old = n_cur[c]
        dur = n_steps - t_last[c]
        if dur > 0:
            lvl = n_old if n_old < kmax else kmax
            hist[c, lvl] += dur
            sum_n[c] += n_old * dur
            if n_old < min_n[c]:
                min_n[c] = n_old
            if n_old > max_n[c]:
                max_n[c] = n_old
            t_last[c] = n_steps
        if n_old == 0:
            g = n_steps - gap_start[c]
            if g > 0:
                gap_count[c] += 1
                sum_gap[c] += g
                sum_gap2[c] += g * g
                if g > max_gap[c]:
                    max_gap[c] = g
            gap_start[c] = n_steps


def run_band(state: dict[str, np.ndarray], pos_km: np.ndarray, i0: int,
             rows: dict[str, np.ndarray], lon0_rad: float, dlon_rad: float, n_lon: int,
             el_min_rad: float, eta_max_rad: float, range_max_km: float) -> None:
    """Python entry point to :func:`advance` with the state held in a dict."""
    st = state
    advance(np.ascontiguousarray(pos_km, dtype=np.float64), int(i0),
            rows["rho_km"], rows["z_km"], rows["sin_lat"], rows["cos_lat"], rows["psi_rad"],
            float(lon0_rad), float(dlon_rad), int(n_lon),
            float(el_min_rad), float(eta_max_rad), float(range_max_km),
            st["n_cur"], st["t_last"], st["gap_start"], st["hist"], st["sum_n"], st["min_n"],
            st["max_n"], st["gap_count"], st["sum_gap"], st["sum_gap2"], st["max_gap"],
            st["pass_count"], st["prev_start"], st["prev_len"], st["prev_rows"],
            st["cur_start"], st["cur_len"], st["cur_rows"], st["visits"])


def close_band(state: dict[str, np.ndarray], n_steps: int) -> None:
    """Python entry point to :func:`close`."""
    st = state
    close(int(n_steps), st["n_cur"], st["t_last"], st["gap_start"], st["hist"], st["sum_n"],
          st["min_n"], st["max_n"], st["gap_count"], st["sum_gap"], st["sum_gap2"],
          st["max_gap"])
