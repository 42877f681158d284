"""A deliberately simple coverage reference: every satellite x every cell x every step.

It shares nothing with the kernel but the propagator: cell centres come from
``covergrid.earth.frames.geodetic_to_ecef``, elevation and range from
``covergrid.earth.frames.look_angles``, the off-nadir angle from
``covergrid.earth.frames.off_nadir_angle``, and the metrics are counted with plain loops
over each cell's time series, straight from the definitions in Wertz and Larson, *Space
Mission Analysis and Design*, 3rd ed., sec. 7.2 (definitions from memory) and the sampling
convention in ``covergrid.metrics``. Used by the kernel tests and by the W1 benchmark
baseline (tests/benchmarks/).
"""

from __future__ import annotations

import math

import numpy as np

from covergrid.earth.frames import geodetic_to_ecef, look_angles, off_nadir_angle
from covergrid.earth.time import gmst_rad
from covergrid.orbits import j2


def cell_centres(resolution_deg, lat_min_deg=-90.0, lat_max_deg=90.0):
    """Geodetic centres of a regular grid, (n_lat, n_lon) each [rad]."""
    n_lat = int(round((lat_max_deg - lat_min_deg) / resolution_deg))
    n_lon = int(round(360.0 / resolution_deg))
    lat = lat_min_deg + resolution_deg * (np.arange(n_lat) + 0.5)
    lon = -180.0 + resolution_deg * (np.arange(n_lon) + 0.5)
    la, lo = np.meshgrid(np.radians(lat), np.radians(lon), indexing="ij")
    return la, lo


def visibility(elements, epoch, n_steps, step_s, lat, lon, min_el_deg, max_off_nadir_deg=None,
               max_range_km=None):
    """Boolean visibility, (n_steps, n_sat, n_cells), every combination tested."""
    theta0 = float(gmst_rad(epoch, 0.0))
    t = np.arange(n_steps) * step_s
    pos = j2.propagate_to_ecef(elements, t, theta0)  # (n_sat, n_t, 3)
    la = lat.ravel()
    lo = lon.ravel()
    cells = geodetic_to_ecef(la, lo, 0.0)
    n_sat = pos.shape[0]
    vis = np.zeros((n_steps, n_sat, la.size), bool)
    for i in range(n_steps):
        r = pos[:, i, :][:, None, :]  # (n_sat, 1, 3)
        _, el, rng = look_angles(la[None, :], lo[None, :], 0.0, r)
        ok = el >= math.radians(min_el_deg)
        if max_range_km is not None:
            ok &= rng <= max_range_km
        if max_off_nadir_deg is not None:
            ok &= off_nadir_angle(r, cells[None, :, :]) <= math.radians(max_off_nadir_deg)
        vis[i] = ok
    return vis


def metrics_from_visibility(vis, step_s, nfold_max=4):
    """Every metric of covergrid.metrics.METRICS from a visibility cube, by plain loops."""
    n_steps, n_sat, n_cells = vis.shape
    span = n_steps * step_s
    n = vis.sum(axis=1)  # (n_steps, n_cells) satellites in view
    out = {k: np.zeros(n_cells) for k in (
        "coverage_fraction", "max_gap", "mean_gap", "gap_count", "time_average_gap",
        "mean_response_time", "pass_count", "mean_pass_duration", "min_in_view",
        "mean_in_view", "max_in_view")}
    out["nfold_fraction"] = np.zeros((nfold_max, n_cells))
    for c in range(n_cells):
        series = n[:, c]
        gaps = []
        run = 0
        for v in series:
            if v == 0:
                run += 1
            elif run:
                gaps.append(run * step_s)
                run = 0
        if run:
            gaps.append(run * step_s)
        passes = 0
        for s in range(n_sat):
            prev = False
            for v in vis[:, s, c]:
                if v and not prev:
                    passes += 1
                prev = v
        in_view_time = series.sum() * step_s
        out["coverage_fraction"][c] = np.count_nonzero(series) / n_steps
        out["max_gap"][c] = max(gaps) if gaps else 0.0
        out["mean_gap"][c] = sum(gaps) / len(gaps) if gaps else 0.0
        out["gap_count"][c] = len(gaps)
        out["time_average_gap"][c] = sum(g * g for g in gaps) / span
        out["mean_response_time"][c] = sum(g * g for g in gaps) / (2 * span)
        out["pass_count"][c] = passes
        out["mean_pass_duration"][c] = in_view_time / passes if passes else 0.0
        out["min_in_view"][c] = series.min()
        out["mean_in_view"][c] = series.mean()
        out["max_in_view"][c] = series.max()
        for k in range(1, nfold_max + 1):
            out["nfold_fraction"][k - 1, c] = np.count_nonzero(series >= k) / n_steps
    return out
