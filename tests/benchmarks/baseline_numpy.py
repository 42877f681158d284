"""The obvious method, well vectorised: every satellite against every cell at every step.

This is the baseline the kernel is measured against in W1 (tests/benchmarks/bench_coverage.py).
It is plain numpy: per step one (n_sat, n_cells) visibility matrix from the same ellipsoid
geometry (cell centres and normals on WGS 84), then per-cell streaming statistics updated with
whole-array operations. It produces every metric, so its values can be compared with
covergrid's exactly.
"""

from __future__ import annotations

import math

import numpy as np

from covergrid.compute.grid import Grid
from covergrid.earth.time import gmst_rad
from covergrid.orbits import j2


def coverage_numpy(elements, epoch, n_steps, step_s, grid_spec, min_el_deg, nfold_max=4,
                   max_off_nadir_deg=None, max_range_km=None):
    """All metrics on the grid (flattened cells), by brute force over sats x cells x steps."""
    g = Grid(grid_spec)
    cells = g.cell_positions_km().reshape(-1, 3)
    up = g.cell_up_vectors().reshape(-1, 3)
    n_cells = cells.shape[0]
    theta0 = float(gmst_rad(epoch, 0.0))
    pos = j2.propagate_to_ecef(elements, np.arange(n_steps) * step_s, theta0)
    sin2 = math.sin(math.radians(min_el_deg)) ** 2
    cos2_eta = math.cos(math.radians(max_off_nadir_deg)) ** 2 if max_off_nadir_deg else None
    n_sat = pos.shape[0]
    prev = np.zeros((n_sat, n_cells), bool)
    passes = np.zeros(n_cells, np.int64)
    sum_n = np.zeros(n_cells, np.int64)
    min_n = np.full(n_cells, 1 << 30)
    max_n = np.zeros(n_cells, np.int64)
    hist = np.zeros((nfold_max + 1, n_cells), np.int64)
    run = np.zeros(n_cells, np.int64)
    gap_count = np.zeros(n_cells, np.int64)
    sum_gap = np.zeros(n_cells, np.int64)
    sum_gap2 = np.zeros(n_cells, np.int64)
    max_gap = np.zeros(n_cells, np.int64)

    def close_gaps(mask):
        g_ = run[mask]
        gap_count[mask] += 1
        sum_gap[mask] += g_
        sum_gap2[mask] += g_ * g_
        max_gap[mask] = np.maximum(max_gap[mask], g_)
        run[mask] = 0

    for i in range(n_steps):
        s = pos[:, i, :]
        d = s[:, None, :] - cells[None, :, :]
        upd = np.einsum("scx,cx->sc", d, up)
        d2 = np.einsum("scx,scx->sc", d, d)
        vis = (upd >= 0) & (upd * upd >= sin2 * d2)
        if max_range_km:
            vis &= d2 <= max_range_km**2
        if cos2_eta is not None:
            nd = np.einsum("sx,scx->sc", s, d)
            vis &= (nd >= 0) & (nd * nd >= cos2_eta * np.einsum("sx,sx->s", s, s)[:, None] * d2)
        n = vis.sum(axis=0)
        passes += (vis & ~prev).sum(axis=0)
        prev = vis
        sum_n += n
        np.minimum(min_n, n, out=min_n)
        np.maximum(max_n, n, out=max_n)
        hist[np.minimum(n, nfold_max), np.arange(n_cells)] += 1
        covered = n > 0
        close_gaps(covered & (run > 0))
        run += ~covered
    close_gaps(run > 0)
    at_least = np.cumsum(hist[::-1], axis=0)[::-1]
    span = n_steps * step_s
    return {
        "coverage_fraction": at_least[1] / n_steps,
        "max_gap": max_gap * step_s,
        "mean_gap": np.where(gap_count > 0, sum_gap / np.maximum(gap_count, 1), 0) * step_s,
        "gap_count": gap_count,
        "time_average_gap": sum_gap2 * step_s**2 / span,
        "mean_response_time": sum_gap2 * step_s**2 / (2 * span),
        "pass_count": passes,
        "mean_pass_duration": np.where(passes > 0, sum_n / np.maximum(passes, 1), 0) * step_s,
        "min_in_view": min_n,
        "mean_in_view": sum_n / n_steps,
        "max_in_view": max_n,
        "nfold_fraction": at_least[1:] / n_steps,
    }
