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


# columns of the per-cell accumulator array (one row of int64 per cell, fields together in
# memory so that touching a cell is one or two cache lines)
N_CUR, T_LAST, GAP_START, SUM_N, MIN_N, MAX_N, GAP_COUNT, SUM_GAP, SUM_GAP2, MAX_GAP, \
    PASS_COUNT, CLOSE_SAMPLE, EXIT_SAMPLE = range(13)
#: first column of the level histogram (samples spent at 0, 1, .., K-1 and >= K in view)
HIST0 = 13
# columns of the float per-cell array, in (fractional) samples: gap start time, sum of gap
# lengths, of their squares, the longest gap; the end of a gap closing at this sample (the
# earliest arrival) and the latest departure at this sample (for a gap opening at it)
R_GAP_START, R_SUM_GAP, R_SUM_GAP2, R_MAX_GAP, R_GAP_END, R_LAST_EXIT = range(6)
_FIELDS = {"sum_n": SUM_N, "min_n": MIN_N, "max_n": MAX_N, "gap_count": GAP_COUNT,
           "sum_gap": SUM_GAP, "sum_gap2": SUM_GAP2, "max_gap": MAX_GAP,
           "pass_count": PASS_COUNT}


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
        ``acc`` (n_cells, 11 + K + 1) int64 per-cell accumulators: columns ``N_CUR`` ...
        ``PASS_COUNT`` of this module, then from ``HIST0`` the samples spent at each level
        (one row per cell, so that touching a cell reads one or two cache lines),
        the previous and current interval of every satellite in every row, and ``visits``.
    """
    acc = np.zeros((n_cells, HIST0 + nfold_max + 1), np.int64)
    acc[:, MIN_N] = 2**40
    acc[:, CLOSE_SAMPLE] = -1
    acc[:, EXIT_SAMPLE] = -1
    return {
        "acc": acc,
        "prev_start": np.zeros((n_sat, n_rows), np.int32),
        "prev_len": np.zeros((n_sat, n_rows), np.int32),
        "prev_rows": np.zeros((n_sat, 2), np.int32),
        # queued exits of one sample: (row, prev start, prev length, new start, new length, sat)
        "exits": np.zeros((n_sat * n_rows, 6), np.int32),
        # per satellite: the radius the footprint bound was last computed for, and the bound
        "bound_cache": np.full((n_sat, 2), -1.0),
        # per satellite: Earth-fixed positions at the two previous samples (crossing times)
        "prev_pos": np.zeros((n_sat, 6)),
        # per cell: gap start and gap sums in (fractional) samples, from crossing times
        "accf": np.zeros((n_cells, 6)),
        # cells whose gap closes at the current sample (closed after all arrivals are known)
        "closing": np.zeros(n_cells + 1, np.int64),
        "visits": np.zeros(1, np.int64),
    }


def accumulators(state: dict[str, np.ndarray]) -> dict[str, np.ndarray]:
    """The closed-out accumulators by name, as :func:`covergrid.metrics.finalise` takes them."""
    acc = state["acc"]
    out = {name: acc[:, col] for name, col in _FIELDS.items()}
    out["hist"] = acc[:, HIST0:]
    accf = state["accf"]
    out["sum_gap"] = accf[:, R_SUM_GAP]
    out["sum_gap2"] = accf[:, R_SUM_GAP2]
    out["max_gap"] = accf[:, R_MAX_GAP]
    return out


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
def _crossing(g, cl, sl):
    """Fraction of the step, after the previous sample, at which a cell's visibility changed.

    The visibility margin of the satellite concerned is evaluated at its positions at the
    samples i-2, i-1 and i; the crossing is the root in [0, 1] of the parabola through the
    three values (Lagrange interpolation; the secant through the last two when i-2 does not
    exist or the parabola has no root there). 1.0 (the sample itself) when refinement is
    off. ``g`` = (mode, sx, sy, sz, px, py, pz, qx, qy, qz, rho, zc, sin_lat, cos_lat,
    sin_el, cos_eta, range_max) with mode 0 off, 1 secant, 2 parabola, and (p.), (q.) the
    positions at samples i-1 and i-2. Not inlined (it runs at gap boundaries only and takes
    no arrays, so a call costs no reference counting): this keeps the compiled kernel small.
    """
    if g[0] == 0.0:
        return 1.0
    m0 = _margin(g[4], g[5], g[6], g[10], g[11], g[12], g[13], cl, sl, g[14], g[15], g[16])
    m1 = _margin(g[1], g[2], g[3], g[10], g[11], g[12], g[13], cl, sl, g[14], g[15], g[16])
    den = m0 - m1
    f = m0 / den if den != 0.0 else 1.0
    f = min(max(f, 0.0), 1.0)
    if g[0] == 2.0:
        ma = _margin(g[7], g[8], g[9], g[10], g[11], g[12], g[13], cl, sl, g[14], g[15], g[16])
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
    if dur > 0:
        n_old = a[c, N_CUR]
        a[c, HIST0 + (n_old if n_old < kmax else kmax)] += dur
        a[c, SUM_N] += n_old * dur
        if n_old < a[c, MIN_N]:
            a[c, MIN_N] = n_old
        if n_old > a[c, MAX_N]:
            a[c, MAX_N] = n_old
        a[c, T_LAST] = i


@numba.njit(cache=True, nogil=True, inline="always")
def _close_gap(a, c, i):
    """Record the gap of cell c that began at GAP_START and ends at sample i (if not empty)."""
    g = i - a[c, GAP_START]
    if g > 0:
        a[c, GAP_COUNT] += 1
        a[c, SUM_GAP] += g
        a[c, SUM_GAP2] += g * g
        if g > a[c, MAX_GAP]:
            a[c, MAX_GAP] = g


@numba.njit(cache=True, nogil=True, inline="always")
def _change_range(a, af, closing, base, j0, j1, n_lon, i, delta, kmax, g, cos_lon, sin_lon):
    """Apply a +1 (a pass starts) or -1 change of the in-view count at sample i to the
    columns j0 .. j1-1 (taken modulo n_lon) of the row starting at cell `base`; `g` is the
    satellite and row geometry for crossing times (see :func:`_crossing`).

    Refined gap boundaries: a gap that closes at this sample ends at the earliest arrival
    among the satellites arriving at it in this step (the cell is queued in `closing`, whose
    last element counts the queue, and closed once every arrival is known); a gap that opens
    at this sample starts at the latest departure among the last two satellites leaving it
    in this step.
    """
    for jj in range(j0, j1):
        j = jj % n_lon
        c = base + j
        _close_level(a, c, i, kmax)
        n_old = a[c, N_CUR]
        a[c, N_CUR] = n_old + delta
        if delta > 0:
            a[c, PASS_COUNT] += 1
            if n_old == 0:
                if i > a[c, GAP_START]:
                    _close_gap(a, c, i)
                    a[c, CLOSE_SAMPLE] = i
                    af[c, R_GAP_END] = i - 1 + _crossing(g, cos_lon[j], sin_lon[j])
                    q = closing[closing.shape[0] - 1]
                    closing[q] = c
                    closing[closing.shape[0] - 1] = q + 1
            elif a[c, CLOSE_SAMPLE] == i and g[0] != 0.0:
                # another satellite arrives in the step in which the gap closed
                te = i - 1 + _crossing(g, cos_lon[j], sin_lon[j])
                if te < af[c, R_GAP_END]:
                    af[c, R_GAP_END] = te
        elif n_old <= 2:
            tx = i - 1 + _crossing(g, cos_lon[j], sin_lon[j])
            if n_old == 2:
                a[c, EXIT_SAMPLE] = i
                af[c, R_LAST_EXIT] = tx
            else:
                a[c, GAP_START] = i
                if a[c, EXIT_SAMPLE] == i and af[c, R_LAST_EXIT] > tx:
                    tx = af[c, R_LAST_EXIT]
                af[c, R_GAP_START] = tx
    return max(j1 - j0, 0)


@numba.njit(cache=True, nogil=True, inline="always")
def _close_gap_refined(af, c, t_end):
    """Record the gap of cell c from R_GAP_START to t_end [samples, fractional]."""
    gr = t_end - af[c, R_GAP_START]
    af[c, R_SUM_GAP] += gr
    af[c, R_SUM_GAP2] += gr * gr
    if gr > af[c, R_MAX_GAP]:
        af[c, R_MAX_GAP] = gr


@numba.njit(cache=True, nogil=True, inline="always")
def _apply_difference(a, af, closing, base, sa, la, sb, lb, n_lon, i, delta, kmax, g, cos_lon,
                      sin_lon):
    """Apply `delta` to the cells of interval A that are not in interval B (one row)."""
    if la == 0:
        return 0
    if lb > 0 and la + lb >= n_lon:
        # long arcs may overlap in two pieces: test membership cell by cell (polar rows)
        touched = 0
        for m in range(la):
            j = (sa + m) % n_lon
            if (j - sb) % n_lon >= lb:
                touched += _change_range(a, af, closing, base, j, j + 1, n_lon, i, delta,
                                         kmax, g, cos_lon, sin_lon)
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
            touched += _change_range(a, af, closing, base, lo, hi, n_lon, i, delta, kmax, g,
                                     cos_lon, sin_lon)
    return touched


@numba.njit(cache=True, nogil=True)
def advance(pos_km, i0, rho, zr, sin_lat, cos_lat, psi, lon0, dlon, n_lon,
            el_min_rad, eta_max_rad, range_max_km, refine, acc, accf, closing, prev_start,
            prev_len, prev_rows, exits, bound_cache, prev_pos, visits):
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
        Row geometry of the band (see :attr:`covergrid.grid.Grid.row_geometry`).
    lon0, dlon : float
        Western edge of column 0 and column width [rad]; n_lon columns cover 360 deg.
    el_min_rad, eta_max_rad, range_max_km : float
        Sensor limits; eta_max_rad <= 0 and range_max_km <= 0 mean "no limit".
    refine : bool
        Place gap boundaries at the crossing time between samples (see :func:`_crossing`)
        instead of at the sample.
    acc, accf, closing, prev_start, prev_len, prev_rows, exits, bound_cache, prev_pos : ndarray
        State from :func:`new_state`, updated in place.
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
        mode = 0.0 if not refine or i == 0 else (1.0 if i == 1 else 2.0)
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
                g = (mode, sx, sy, sz, prev_pos[s, 0], prev_pos[s, 1], prev_pos[s, 2],
                     prev_pos[s, 3], prev_pos[s, 4], prev_pos[s, 5], rho[r], zr[r],
                     sin_lat[r], cos_lat[r], sin_el, cos_eta, range_lim)
                _apply_difference(acc, accf, closing, r * n_lon, cs, cl, ps, pl, n_lon, i, 1,
                                  kmax, g, cos_lon, sin_lon)
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
        # gaps that closed at this sample, now that every arrival is known
        n_closing = closing[closing.shape[0] - 1]
        for q in range(n_closing):
            c = closing[q]
            _close_gap_refined(accf, c, accf[c, R_GAP_END])
        closing[closing.shape[0] - 1] = 0
        for q in range(n_exits):
            r = exits[q, 0]
            s = exits[q, 5]
            g = (mode, pos_km[s, b, 0], pos_km[s, b, 1], pos_km[s, b, 2], prev_pos[s, 0],
                 prev_pos[s, 1], prev_pos[s, 2], prev_pos[s, 3], prev_pos[s, 4],
                 prev_pos[s, 5], rho[r], zr[r], sin_lat[r], cos_lat[r], sin_el, cos_eta,
                 range_lim)
            _apply_difference(acc, accf, closing, r * n_lon, exits[q, 1], exits[q, 2],
                              exits[q, 3], exits[q, 4], n_lon, i, -1, kmax, g, cos_lon, sin_lon)
        for s in range(n_sat):
            prev_pos[s, 3] = prev_pos[s, 0]
            prev_pos[s, 4] = prev_pos[s, 1]
            prev_pos[s, 5] = prev_pos[s, 2]
            prev_pos[s, 0] = pos_km[s, b, 0]
            prev_pos[s, 1] = pos_km[s, b, 1]
            prev_pos[s, 2] = pos_km[s, b, 2]
    visits[0] += nvis


@numba.njit(cache=True, nogil=True)
def close(n_steps, acc, accf):
    """Close every cell's open level and open gap at the end of the span (sample n_steps)."""
    kmax = acc.shape[1] - HIST0 - 1
    for c in range(acc.shape[0]):
        _close_level(acc, c, n_steps, kmax)
        if acc[c, N_CUR] == 0:
            if n_steps > acc[c, GAP_START]:
                _close_gap(acc, c, n_steps)
                _close_gap_refined(accf, c, float(n_steps))
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
            st["acc"], st["accf"], st["closing"], st["prev_start"], st["prev_len"],
            st["prev_rows"], st["exits"], st["bound_cache"], st["prev_pos"], st["visits"])


def close_band(state: dict[str, np.ndarray], n_steps: int) -> None:
    """Python entry point to :func:`close`."""
    close(int(n_steps), state["acc"], state["accf"])
