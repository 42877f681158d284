"""Dilution of precision per cell: GDOP, PDOP, HDOP, VDOP and TDOP, streamed over the span.

At every sample each cell's geometry matrix is formed from the unit lines of sight to the
satellites in view (the same visibility limits as the coverage kernel) and its dilutions of
precision are folded into streaming per-cell state: the largest value, the sum over the
samples where it is defined, a histogram for the percentile, the samples with PDOP at or
below a threshold and the samples with fewer than four satellites in view. Memory is
proportional to the cells of a band and independent of the span.

Method
------
A receiver at the cell solves for three position coordinates and its clock offset by linear
least squares; with the geometry matrix ``G`` whose rows are ``(u_i^T, 1)`` (``u_i`` the unit
vector from the cell to satellite i) and ``Q = (G^T G)^{-1}``, the dilutions of precision are
(Kaplan and Hegarty, *Understanding GPS: Principles and Applications*, 2nd ed., sec. 7.3.1,
from memory)

    GDOP^2 = tr Q,  PDOP^2 = Q_xx + Q_yy + Q_zz,  TDOP^2 = Q_tt,
    VDOP^2 = Q_uu,  HDOP^2 = Q_ee + Q_nn

in the cell's local east-north-up frame. ``G^T G`` is accumulated in the Earth-fixed frame
(ten sums per cell: ``sum u u^T``, ``sum u`` and the count); its inverse is not formed:
with ``M = sum u u^T``, ``b = sum u`` and ``n`` satellites, the block inverse (Schur
complement of ``n``) gives the position block as ``C^{-1}`` with ``C = M - b b^T / n`` (the
scatter of the lines of sight about their mean) and ``Q_tt = 1/n + b^T C^{-1} b / n^2``;
``C^{-1}`` is its adjugate over its determinant. The trace is the same in every frame, so
``PDOP^2 = tr C^{-1}``; the vertical is the ellipsoid normal ``up``, ``VDOP^2 = up^T C^{-1}
up`` and ``HDOP^2 = PDOP^2 - VDOP^2``.

Conventions
-----------
- Sampled (sample and hold): the geometry at ``t_i`` holds until ``t_(i+1)``; fractions
  count samples.
- With fewer than four satellites in view (or a singular geometry: every line of sight in
  one plane through the cell... or a cone about one axis) the position is not determined and
  every DOP is taken as infinite: the maximum and the 95th percentile are then infinite, the
  time mean is over the samples where DOP is finite, and the PDOP fraction counts the sample
  as failing.
- The 95th percentile over time is read from a per-cell histogram of DOP^2 whose bins are
  the float64 exponent and the leading :data:`HIST_MANTISSA_BITS` mantissa bits (32 bins
  per octave of DOP^2): a bin spans at most 1.6 % of DOP. The value reported is the upper
  edge of the bin holding the sampled percentile (Hyndman and Fan definition 1 over the
  samples), capped by the cell's exact maximum: never below the sampled percentile and at
  most 1.6 % above it. DOP below 0.5 shares one bin (reported as at most 0.5) and DOP of 64
  or more another (reported as the maximum).
"""

from __future__ import annotations

import math

import numba
import numpy as np

from covergrid.compute.dop_spec import (
    HIST_BASE,
    HIST_DOP2_LOW,
    HIST_SHIFT,
    N_BINS,
    N_STATS,
    DopSpec,
)
from covergrid.compute.footprint import central_angle_bound
from covergrid.compute.metrics import DOP_KINDS, DOP_METRICS

__all__ = ["advance_dop", "column_spans", "dop_metrics", "dop_values", "new_dop_state",
           "run_dop_band"]

# Per-cell statistics, one row each (rows x cells): the largest DOP^2 of each kind, the sum
# of DOP over the samples where it is finite, those samples, the samples with PDOP at or
# below the threshold, the samples with fewer than four in view.
_MAX2 = 0
_SUM = 5
_N_FINITE = 10
_N_PDOP_OK = 11
_N_NO_FIX = 12
#: Sums of the geometry matrix per cell: u u^T (6), u (3), count.
_N_SUMS = 10
#: A geometry whose scatter matrix has determinant below this share of (trace / 3)^3 is
#: singular (DOP above about 10^6): infinite DOP.
_SINGULAR = 1e-12

# A row's working values are held in tiles of _TILE columns: per tile, _T_ROWS rows of
# _TILE lanes (the geometry sums, cos and sin of the longitude, the statistics, the DOP^2),
# all in one flat array, so that every access in the vector loops is a constant offset from
# one base and the compiler needs no run-time overlap checks (with one array per row, those
# checks and the loop set-up cost more than the arithmetic of a run of ~90 cells).
_TILE = 8
_T_COS = 10
_T_SIN = 11
_T_STATS = 12
_T_DOP2 = _T_STATS + N_STATS
_T_ROWS = _T_DOP2 + 5
_U8 = np.uint64(_TILE)
_UW = np.uint64(_T_ROWS * _TILE)

def new_dop_state(n_cells: int, n_sat: int) -> dict[str, np.ndarray]:
    """Allocate the DOP state of one latitude band (``n_cells`` = rows x columns).

    Returns ``stats`` (13, n_cells) float64, ``hist`` (n_cells, 5, N_BINS) uint32 (each
    cell's histograms together, so that a row's cells touch few cache lines) and a
    per-satellite cache of the footprint bound.
    """
    stats = np.zeros((N_STATS, n_cells))
    return {"stats": stats, "hist": np.zeros((n_cells, len(DOP_KINDS), N_BINS), np.uint32),
            "bound_cache": np.full((n_sat, 2), -1.0)}


@numba.njit(cache=True, nogil=True, error_model="numpy", inline="always")
def _dop_squares(mxx, mxy, mxz, myy, myz, mzz, bx, by, bz, n, ex, ey, ez):
    """(GDOP^2, PDOP^2, HDOP^2, VDOP^2, TDOP^2) from the sums of a cell's geometry matrix.

    ``m..`` = sum of u u^T, ``b.`` = sum of u, ``n`` = satellites, ``e.`` = the unit
    vertical (module notes: Schur complement of n, adjugate of the scatter matrix). All
    infinite with fewer than four satellites or a singular geometry. Scalars only, and no
    branches (selects), so that a loop over cells runs on vector units.
    """
    nn = max(n, 4.0)
    cxx = mxx - bx * bx / nn
    cxy = mxy - bx * by / nn
    cxz = mxz - bx * bz / nn
    cyy = myy - by * by / nn
    cyz = myz - by * bz / nn
    czz = mzz - bz * bz / nn
    a00 = cyy * czz - cyz * cyz
    a11 = cxx * czz - cxz * cxz
    a22 = cxx * cyy - cxy * cxy
    a01 = cxz * cyz - cxy * czz
    a02 = cxy * cyz - cxz * cyy
    a12 = cxy * cxz - cxx * cyz
    det = cxx * a00 + cxy * a01 + cxz * a02
    tr = cxx + cyy + czz
    ok = (n >= 4.0) & (det > _SINGULAR * (tr / 3.0) ** 3)
    inv = 1.0 / det if ok else math.inf
    p2 = (a00 + a11 + a22) * inv
    v2 = (a00 * ex * ex + a11 * ey * ey + a22 * ez * ez
          + 2.0 * (a01 * ex * ey + a02 * ex * ez + a12 * ey * ez)) * inv
    h2 = max(p2 - v2, 0.0) if ok else math.inf
    t2 = 1.0 / nn + (a00 * bx * bx + a11 * by * by + a22 * bz * bz
                     + 2.0 * (a01 * bx * by + a02 * bx * bz + a12 * by * bz)) * inv / (nn * nn)
    p2 = p2 if ok else math.inf
    v2 = v2 if ok else math.inf
    t2 = t2 if ok else math.inf
    return p2 + t2, p2, h2, v2, t2


@numba.njit(cache=True, nogil=True, error_model="numpy")
def _fold_tiles(f, t_lo, t_hi, cl, sl, pdop2_ok):
    """The DOPs of the cells of tiles [t_lo, t_hi) of a row from their geometry sums, folded
    into their statistics (count without a fix, with a fix, PDOP at or below the threshold,
    sums of DOP, largest DOP^2); the squares are left in the tiles for the histograms.
    Branch-free over a tile's lanes: vectorised."""
    for t in range(np.uint64(t_lo), np.uint64(t_hi)):
        o = t * _UW
        for lane in range(_U8):
            i = o + lane
            count = f[i + np.uint64(72)]
            g2, p2, h2, v2, t2 = _dop_squares(
                f[i], f[i + np.uint64(8)], f[i + np.uint64(16)], f[i + np.uint64(24)],
                f[i + np.uint64(32)], f[i + np.uint64(40)], f[i + np.uint64(48)],
                f[i + np.uint64(56)], f[i + np.uint64(64)], count,
                cl * f[i + np.uint64(8 * _T_COS)], cl * f[i + np.uint64(8 * _T_SIN)], sl)
            fin = p2 < math.inf
            st = i + np.uint64(8 * _T_STATS)
            f[st + np.uint64(8 * _N_NO_FIX)] += 1.0 if count < 4.0 else 0.0
            f[st + np.uint64(8 * _N_FINITE)] += 1.0 if fin else 0.0
            f[st + np.uint64(8 * _N_PDOP_OK)] += 1.0 if fin & (p2 <= pdop2_ok) else 0.0
            d = i + np.uint64(8 * _T_DOP2)
            f[d] = g2
            f[d + np.uint64(8)] = p2
            f[d + np.uint64(16)] = h2
            f[d + np.uint64(24)] = v2
            f[d + np.uint64(32)] = t2
            f[st + np.uint64(8 * _SUM)] += math.sqrt(g2) if g2 < math.inf else 0.0
            f[st + np.uint64(8 * _SUM + 8)] += math.sqrt(p2) if p2 < math.inf else 0.0
            f[st + np.uint64(8 * _SUM + 16)] += math.sqrt(h2) if h2 < math.inf else 0.0
            f[st + np.uint64(8 * _SUM + 24)] += math.sqrt(v2) if v2 < math.inf else 0.0
            f[st + np.uint64(8 * _SUM + 32)] += math.sqrt(t2) if t2 < math.inf else 0.0
            f[st] = max(f[st], g2)
            f[st + np.uint64(8)] = max(f[st + np.uint64(8)], p2)
            f[st + np.uint64(16)] = max(f[st + np.uint64(16)], h2)
            f[st + np.uint64(24)] = max(f[st + np.uint64(24)], v2)
            f[st + np.uint64(32)] = max(f[st + np.uint64(32)], t2)


@numba.njit(cache=True)
def _dop_squares_of(u, up):
    s = np.zeros(_N_SUMS)
    for i in range(u.shape[0]):
        ux, uy, uz = u[i, 0], u[i, 1], u[i, 2]
        s[0] += ux * ux
        s[1] += ux * uy
        s[2] += ux * uz
        s[3] += uy * uy
        s[4] += uy * uz
        s[5] += uz * uz
        s[6] += ux
        s[7] += uy
        s[8] += uz
        s[9] += 1.0
    return _dop_squares(s[0], s[1], s[2], s[3], s[4], s[5], s[6], s[7], s[8], s[9], up[0],
                        up[1], up[2])


def dop_values(lines_of_sight: np.ndarray, up: np.ndarray) -> dict[str, float]:
    """GDOP, PDOP, HDOP, VDOP and TDOP of one receiver, by the kernel's own arithmetic.

    Parameters
    ----------
    lines_of_sight : ndarray, (n, 3)
        Unit vectors from the receiver to the satellites, any Cartesian frame [unitless].
    up : ndarray, (3,)
        The receiver's unit vertical in the same frame [unitless].

    Returns
    -------
    dict
        ``gdop`` ... ``tdop`` [unitless]; infinite with fewer than four satellites or a
        singular geometry.
    """
    u = np.ascontiguousarray(lines_of_sight, dtype=np.float64).reshape(-1, 3)
    squares = _dop_squares_of(u, np.ascontiguousarray(up, dtype=np.float64).reshape(3))
    return {k: math.sqrt(v) for k, v in zip(DOP_KINDS, squares, strict=True)}


@numba.njit(cache=True, nogil=True, error_model="numpy")
def _accumulate(f, t_start, t_end, x, y, z, rs2, rho_r, zc, cl, sl, sin2_el, cos2_eta,
                range2):
    """Add the lines of sight of one satellite to the geometry sums of the cells of tiles
    [t_start, t_end) of a row, where it is in view (the coverage kernel's limits: elevation
    above the ellipsoid-normal horizon, slant range, off-nadir angle).

    Branch-free over a tile's lanes, so that it runs on vector units: a cell out of view
    adds exact zeros, which leaves its sums as they were (whole tiles are tested, so cells
    beside the candidate run are tested exactly too and add nothing).
    """
    dz = z - zc
    use_range = range2 >= 0.0
    use_cone = cos2_eta >= 0.0
    for t in range(np.uint64(t_start), np.uint64(t_end)):
        o = t * _UW
        for lane in range(_U8):
            i = o + lane
            c_lon = f[i + np.uint64(8 * _T_COS)]
            s_lon = f[i + np.uint64(8 * _T_SIN)]
            dx = x - rho_r * c_lon
            dy = y - rho_r * s_lon
            up = cl * (dx * c_lon + dy * s_lon) + sl * dz
            d2 = dx * dx + dy * dy + dz * dz
            nd = x * dx + y * dy + z * dz
            ok = (up >= 0.0) & (up * up >= sin2_el * d2)
            ok &= (~use_range) | (d2 <= range2)
            ok &= (~use_cone) | ((nd >= 0.0) & (nd * nd >= cos2_eta * rs2 * d2))
            inv = 1.0 / math.sqrt(d2)
            inv = inv if ok else 0.0
            ux = dx * inv
            uy = dy * inv
            uz = dz * inv
            f[i] += ux * ux
            f[i + np.uint64(8)] += ux * uy
            f[i + np.uint64(16)] += ux * uz
            f[i + np.uint64(24)] += uy * uy
            f[i + np.uint64(32)] += uy * uz
            f[i + np.uint64(40)] += uz * uz
            f[i + np.uint64(48)] += ux
            f[i + np.uint64(56)] += uy
            f[i + np.uint64(64)] += uz
            f[i + np.uint64(72)] += 1.0 if ok else 0.0


@numba.njit(cache=True, nogil=True, error_model="numpy")
def advance_dop(pos_km, rho, zr, sin_lat, cos_lat, psi, lon0, dlon, n_lon, n_circle,
                col_lo, col_hi, el_min_rad, eta_max_rad, range_max_km, pdop2_ok, stats, hist,
                bound_cache):
    """Fold a block of samples into one band's DOP state (see the module notes).

    The loops run row by row and, in a row, sample by sample, so that the row's statistics
    and the histogram lines its cells use stay in cache over the block.

    Parameters
    ----------
    pos_km : ndarray, (n_sat, n_block, 3)
        Earth-fixed satellite positions at the block's samples [km].
    rho, zr, sin_lat, cos_lat, psi : ndarray, (n_rows,)
        Row geometry of the band (:attr:`covergrid.compute.grid.Grid.row_geometry`).
    lon0, dlon : float
        Western edge of column 0 and column width [rad].
    n_lon : int
        Columns of the band's cells (cell ``r * n_lon + j``).
    n_circle : int
        Columns round the whole circle from ``lon0`` (equal to ``n_lon`` without longitude
        limits): the candidate columns are found on the circle and cut to the first n_lon.
    col_lo, col_hi : ndarray, (n_rows,) int64
        Each row's computed columns [col_lo, col_hi) (all of them without a region; the span
        of the row's cells in the region with one; an empty span skips the row). Cells
        outside the span keep an empty state.
    el_min_rad, eta_max_rad, range_max_km : float
        Visibility limits (the coverage kernel's); eta_max_rad <= 0 and range_max_km <= 0
        mean no limit.
    pdop2_ok : float
        Square of the PDOP threshold [unitless].
    stats, hist, bound_cache : ndarray
        State from :func:`new_dop_state`, updated in place.
    """
    n_sat = pos_km.shape[0]
    n_block = pos_km.shape[1]
    n_rows = rho.shape[0]
    sin2_el = math.sin(el_min_rad) ** 2
    cos2_eta = math.cos(eta_max_rad) ** 2 if eta_max_rad > 0.0 else -1.0
    range2 = range_max_km * range_max_km if range_max_km > 0.0 else -1.0
    n_tiles = (n_lon + _TILE - 1) // _TILE
    w = _T_ROWS * _TILE
    f = np.zeros(n_tiles * w)  # the row's tiles (see _TILE)
    bits = f.view(np.int64)
    for j in range(n_tiles * _TILE):  # lanes past n_lon: junk cells, never read out
        lc = lon0 + (j + 0.5) * dlon
        at = (j // _TILE) * w + j % _TILE
        f[at + _TILE * _T_COS] = math.cos(lc)
        f[at + _TILE * _T_SIN] = math.sin(lc)
    sin_psi = np.sin(psi)
    cos_psi = np.cos(psi)
    # per sample and satellite: lon, sin psi, cos psi, cos lambda, first row, end row
    sat = np.empty((n_block, n_sat, 6))
    for b in range(n_block):
        for s in range(n_sat):
            x = pos_km[s, b, 0]
            y = pos_km[s, b, 1]
            z = pos_km[s, b, 2]
            rs = math.sqrt(x * x + y * y + z * z)
            if abs(rs - bound_cache[s, 0]) > 1e-3:
                bound_cache[s, 0] = rs
                bound_cache[s, 1] = central_angle_bound(rs + 1e-3, el_min_rad, eta_max_rad,
                                                        range_max_km)
            lam = bound_cache[s, 1]
            sat[b, s, 4] = 0.0
            sat[b, s, 5] = 0.0
            if lam >= 0.0:
                psi_s = math.asin(z / rs)
                sat[b, s, 0] = math.atan2(y, x)
                sat[b, s, 1] = z / rs
                sat[b, s, 2] = math.cos(psi_s)
                sat[b, s, 3] = math.cos(lam)
                sat[b, s, 4] = np.searchsorted(psi, psi_s - lam)
                sat[b, s, 5] = np.searchsorted(psi, psi_s + lam, side="right")
    for r in range(n_rows):
        lo = col_lo[r]
        hi = col_hi[r]
        if lo >= hi:
            continue
        rho_r = rho[r]
        zc = zr[r]
        sl = sin_lat[r]
        cl = cos_lat[r]
        base = r * n_lon
        t_lo = lo // _TILE
        t_hi = (hi + _TILE - 1) // _TILE
        for q in range(N_STATS):  # the row's statistics into its tiles
            for j in range(lo, hi):
                f[(j // _TILE) * w + (_T_STATS + q) * _TILE + j % _TILE] = stats[q, base + j]
        for b in range(n_block):
            for t in range(t_lo, t_hi):
                f[t * w: t * w + _N_SUMS * _TILE] = 0.0
            for s in range(n_sat):
                if not sat[b, s, 4] <= r < sat[b, s, 5]:
                    continue
                x = pos_km[s, b, 0]
                y = pos_km[s, b, 1]
                z = pos_km[s, b, 2]
                rs2 = x * x + y * y + z * z
                # candidate columns: cell centres within the bound's central angle
                den = cos_psi[r] * sat[b, s, 2]
                cw = (sat[b, s, 3] - sin_psi[r] * sat[b, s, 1]) / den if den > 1e-12 else -2.0
                if cw <= -1.0:
                    j_first = 0
                    count = n_circle
                else:
                    acw = math.acos(min(cw, 1.0))
                    j_first = int(math.floor((sat[b, s, 0] - acw - lon0) / dlon - 0.5))
                    j_last = int(math.floor((sat[b, s, 0] + acw - lon0) / dlon - 0.5)) + 1
                    count = min(j_last - j_first + 1, n_circle)
                # the candidates as at most two runs of whole columns on the circle
                # (wrap-around), each cut to the row's computed columns, as runs of tiles;
                # runs sharing a tile are joined, so that no cell is counted twice
                j0 = j_first % n_circle
                a0 = max(j0, lo) // _TILE
                a1 = (min(j0 + count, n_circle, hi) + _TILE - 1) // _TILE
                b1 = (min(j0 + count - n_circle, hi) + _TILE - 1) // _TILE
                if b1 > t_lo:  # the wrapped run [lo, ...)
                    if a0 < a1 and b1 >= a0:
                        a0 = t_lo
                        a1 = max(a1, b1)
                    else:
                        _accumulate(f, t_lo, b1, x, y, z, rs2, rho_r, zc, cl, sl, sin2_el,
                                    cos2_eta, range2)
                if a0 < a1:
                    _accumulate(f, a0, a1, x, y, z, rs2, rho_r, zc, cl, sl, sin2_el,
                                cos2_eta, range2)
            _fold_tiles(f, t_lo, t_hi, cl, sl, pdop2_ok)
            for k in range(len(DOP_KINDS)):
                for j in range(lo, hi):
                    at = (j // _TILE) * w + (_T_DOP2 + k) * _TILE + j % _TILE
                    idx = (bits[at] >> HIST_SHIFT) - HIST_BASE + 1
                    hist[base + j, k, min(max(idx, 0), N_BINS - 1)] += 1
        for q in range(N_STATS):  # and back
            for j in range(lo, hi):
                stats[q, base + j] = f[(j // _TILE) * w + (_T_STATS + q) * _TILE + j % _TILE]


def run_dop_band(state: dict[str, np.ndarray], pos_km: np.ndarray, rows: dict[str, np.ndarray],
                 lon0_rad: float, dlon_rad: float, n_lon: int, el_min_rad: float,
                 eta_max_rad: float, range_max_km: float, spec: DopSpec,
                 n_circle: int | None = None, cells: np.ndarray | None = None) -> None:
    """Python entry point to :func:`advance_dop` with the state held in a dict
    (``n_circle``: columns round the circle, default ``n_lon``; ``cells``: the band's
    computed cells as a (rows, n_lon) boolean mask, default all; each row computes the span
    from its first to its last computed cell)."""
    lo, hi = column_spans(cells, len(rows["rho_km"]), int(n_lon))
    advance_dop(np.ascontiguousarray(pos_km, dtype=np.float64), rows["rho_km"], rows["z_km"],
                rows["sin_lat"], rows["cos_lat"], rows["psi_rad"], float(lon0_rad),
                float(dlon_rad), int(n_lon), int(n_lon if n_circle is None else n_circle),
                lo, hi, float(el_min_rad), float(eta_max_rad),
                float(range_max_km), float(spec.pdop_threshold) ** 2, state["stats"],
                state["hist"], state["bound_cache"])


def column_spans(cells: np.ndarray | None, n_rows: int, n_lon: int
                 ) -> tuple[np.ndarray, np.ndarray]:
    """Each row's span [lo, hi) from its first to its last True column (0, 0 for a row
    with none; every column without a mask), as int64 arrays."""
    if cells is None:
        return np.zeros(n_rows, np.int64), np.full(n_rows, n_lon, np.int64)
    mask = np.asarray(cells, bool).reshape(n_rows, n_lon)
    any_ = mask.any(axis=1)
    lo = np.where(any_, np.argmax(mask, axis=1), 0).astype(np.int64)
    hi = np.where(any_, n_lon - np.argmax(mask[:, ::-1], axis=1), 0).astype(np.int64)
    return lo, hi


def _bin_upper_dop(idx: np.ndarray) -> np.ndarray:
    """Upper edge of histogram bins, as DOP (inf for the last) [unitless]."""
    top = (idx - 1 + HIST_BASE + 1).astype(np.int64) << HIST_SHIFT  # first bits of the next bin
    edge2 = top.view(np.float64)
    out = np.sqrt(edge2)
    out[idx == 0] = math.sqrt(HIST_DOP2_LOW)
    out[idx >= N_BINS - 1] = math.inf
    return out


def dop_metrics(state: dict[str, np.ndarray], n_steps: int, *, q: float = 0.95
                ) -> dict[str, np.ndarray]:
    """The DOP metrics of a band's state, one (n_cells,) array each
    (:data:`covergrid.compute.metrics.DOP_METRICS`).

    Parameters
    ----------
    state : dict
        After :func:`run_dop_band` over all samples.
    n_steps : int
        Samples in the span.
    q : float
        Quantile reported as ``p95_*`` [unitless].
    """
    stats = state["stats"]
    hist = state["hist"]
    n = float(n_steps)
    n_finite = stats[_N_FINITE]
    out: dict[str, np.ndarray] = {}
    target = q * n - 1e-9 * n  # Hyndman and Fan definition 1 over the samples
    for k, kind in enumerate(DOP_KINDS):
        mx = np.sqrt(stats[_MAX2 + k])
        with np.errstate(invalid="ignore", divide="ignore"):
            mean = np.where(n_finite > 0, stats[_SUM + k] / np.maximum(n_finite, 1.0), np.nan)
        cum = np.cumsum(hist[:, k], axis=1, dtype=np.int64)  # (n_cells, N_BINS)
        idx = np.argmax(cum >= target, axis=1)
        pct = np.minimum(_bin_upper_dop(idx), mx)
        out[f"max_{kind}"] = mx
        out[f"mean_{kind}"] = mean
        out[f"p95_{kind}"] = pct
    out["pdop_fraction"] = stats[_N_PDOP_OK] / n
    out["no_fix_fraction"] = stats[_N_NO_FIX] / n
    assert tuple(out) == DOP_METRICS
    return out
