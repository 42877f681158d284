"""What a run would cost before it runs: work, memory, and the refusal above the limit.

:func:`estimate` counts the satellites, samples and cells of a resolved study and estimates
the kernel's work (satellite x sample x cell visibilities) and the peak memory of a run;
:func:`check_resources` refuses a run estimated above ``compute.memory_limit_gb`` (or the
memory available) with a one-line :class:`~covergrid.errors.ResourceError`.
"""

from __future__ import annotations

import math
import os
from typing import TYPE_CHECKING, Any

import numpy as np

from covergrid.compute.grid import row_bands
from covergrid.compute.kernel_state import state_bytes_per_cell, state_bytes_per_satellite_row
from covergrid.compute.metrics import INTEGER_METRICS, METRICS
from covergrid.compute.sensor import Sensor
from covergrid.compute.span import POSITION_BLOCK_BYTES
from covergrid.constants import MU_EARTH_KM3_S2, WGS84_A_KM
from covergrid.errors import ResourceError
from covergrid.orbits.geometry import footprint
from covergrid.study.build import as_resolved

if TYPE_CHECKING:
    from covergrid.study.build import ResolvedStudy
    from covergrid.study.models import Study

__all__ = ["OUTPUT_BYTES_PER_CELL", "available_memory_bytes", "check_resources", "estimate",
           "footprint_central_angle_rad"]

#: Bytes per cell of the finished Dataset besides nfold_fraction: a float64 per real metric,
#: an int32 per integer metric (covergrid.compute.metrics) and the float64 cell area.
OUTPUT_BYTES_PER_CELL = (8 * sum(1 for m in METRICS if m != "nfold_fraction"
                                 and m not in INTEGER_METRICS)
                         + 4 * len(INTEGER_METRICS) + 8)
#: Resident memory of a run besides the per-cell terms: the interpreter with numpy, numba,
#: dask, xarray and netCDF4 imported (0.29 GB peak for a 2 deg study) plus what computing
#: and writing adds (about 0.25 GB). Fitted to peak RSS (GNU time -v) of `covergrid run` on
#: the development machine: 24 satellites, 6 h at 60 s, global grids of 0.25 deg (measured
#: 0.75 GB, estimated 0.92 GB) and 0.1 deg (measured 2.30 GB, estimated 2.59 GB). Checked
#: again with the one-array kernel state (covergrid.compute.kernel_state.state_bytes_per_cell): 12
#: satellites, 7 days at 10 s, 0.25 deg, maps included: measured 0.88 GB, estimated 1.03 GB.
_BASELINE_BYTES = 550 * 2**20
#: Copies of the finished Dataset alive at the peak: the band results and the assembled
#: arrays (2), plus a margin of half a copy for writing and summarising (same fit).
_OUTPUT_COPIES = 2.5


def available_memory_bytes() -> int | None:
    """Memory the operating system can give without swapping [bytes]; None if unknown."""
    try:
        import psutil

        return int(psutil.virtual_memory().available)
    except ImportError:
        pass
    try:
        with open("/proc/meminfo", encoding="ascii") as fh:
            for line in fh:
                if line.startswith("MemAvailable:"):
                    return int(line.split()[1]) * 1024
    except (OSError, ValueError, IndexError):
        return None
    return None


def footprint_central_angle_rad(a_km, sensor: Sensor) -> np.ndarray:
    """Coverage-circle central angle per satellite at its mean altitude a - R_E [rad]
    (spherical Earth, Wertz and Larson, SMAD 3rd ed., sec. 5.2)."""
    s = sensor
    alt_km = np.maximum(np.asarray(a_km, dtype=float) - WGS84_A_KM, 1.0)
    off_nadir = math.radians(s.max_off_nadir_deg) if s.max_off_nadir_deg else None
    fp = footprint(alt_km, math.radians(s.min_elevation_deg), off_nadir)
    lam = np.asarray(fp.central_angle_rad, dtype=float)
    if s.max_range_km is not None:
        # Law of cosines in the Earth-centre/satellite/edge triangle:
        # D^2 = R^2 + r^2 - 2 R r cos(lambda).
        r = WGS84_A_KM + alt_km
        cos_lam = (WGS84_A_KM**2 + r**2 - s.max_range_km**2) / (2 * WGS84_A_KM * r)
        lam_range = np.where(cos_lam >= 1.0, 0.0, np.arccos(np.clip(cos_lam, -1.0, 1.0)))
        lam = np.minimum(lam, lam_range)
    return np.maximum(lam, 0.0)


def estimate(study: ResolvedStudy | Study, *, workers: int | None = None) -> dict[str, Any]:
    """What a run of the study would compute, and an estimate of its work and memory.

    Parameters
    ----------
    study : ResolvedStudy or Study
        A resolved study (:func:`covergrid.study.build.resolve`), or a study to resolve.
    workers : int, optional
        Tasks running at once (default: the CPU count, or the study's local-cluster size).

    Returns
    -------
    dict
        ``satellites``, ``steps`` (N samples), ``step_s``, ``duration_s``, ``grid_rows``,
        ``grid_columns``, ``cells``, ``nfold_max``, ``visits`` (expected satellite x sample x
        cell visibilities: the kernel's work), ``memory_bytes`` (estimated peak),
        ``memory_available_bytes`` and ``memory_limit_bytes`` (the limit applied, or None).

    Notes
    -----
    The visit estimate counts, per satellite and sample, the cells inside its coverage
    circle: spherical-cap area ``2 pi R^2 (1 - cos lambda)`` (Archimedes' zone formula)
    divided by the grid's mean cell area, times the share of the sphere the grid covers
    (a satellite's circle lies over the grid about that share of the time); lambda from
    :func:`covergrid.orbits.geometry.footprint` at the mean altitude. It is an order-of-
    magnitude figure for planning (eccentric orbits and strongly inclined regional grids
    deviate most).

    The memory estimate adds a fixed baseline, 2.5 times the finished Dataset (dask holds
    the band results while it assembles the arrays, plus a margin for writing) and, per
    running task, one band's streaming state and the position buffer. Fitted to measured
    peak resident memory, it errs on the high side by 10-25 % on global grids of 0.25 and
    0.1 deg (see ``_BASELINE_BYTES``); it does not grow with the span, as the engine
    streams over time.
    """
    study = as_resolved(study)
    elements = study.elements
    n_sat = len(elements.ids)
    rows, cols = study.grid.n_lat, study.grid.n_lon
    cells = rows * cols
    k = study.nfold_max
    n_steps = study.n_steps
    band_share = 0.5 * (math.sin(math.radians(study.grid.lat_max_deg))
                        - math.sin(math.radians(study.grid.lat_min_deg)))
    mean_cell_share = band_share / cells  # of the sphere's area
    lam = footprint_central_angle_rad(elements.a_km, study.sensor)
    cap_share = 0.5 * (1.0 - np.cos(lam))
    cells_in_view = np.minimum(cap_share / mean_cell_share, cells)
    visits = float(np.sum(cells_in_view) * band_share * n_steps)

    if workers is None:
        c = study.compute
        if c.scheduler == "local-cluster":
            workers = (c.workers or os.cpu_count() or 1) * (c.threads_per_worker or 1)
        elif c.scheduler == "synchronous":
            workers = 1
        else:
            workers = os.cpu_count() or 1
    bands = row_bands(rows, study.compute.chunk_rows)
    b_rows = max(b - a for a, b in bands)
    out_bytes = cells * (OUTPUT_BYTES_PER_CELL + 8 * k)
    # per running task: the band's streaming state, the position buffer and the previous
    # interval per satellite and row (its finished metrics are counted in out_bytes)
    cell_bytes = state_bytes_per_cell(k)
    per_task = (b_rows * cols * cell_bytes + POSITION_BLOCK_BYTES
                + state_bytes_per_satellite_row() * n_sat * b_rows)
    running = min(workers, len(bands))
    memory = _BASELINE_BYTES + _OUTPUT_COPIES * out_bytes + running * per_task
    available = available_memory_bytes()
    limit = (int(study.compute.memory_limit_gb * 1e9) if study.compute.memory_limit_gb
             else available)
    periods = 2 * math.pi * np.sqrt(np.asarray(elements.a_km) ** 3 / MU_EARTH_KM3_S2)
    return {
        "study": study.name,
        "satellites": n_sat,
        "steps": n_steps,
        "step_s": study.step_s,
        "duration_s": n_steps * study.step_s,
        "grid_rows": rows,
        "grid_columns": cols,
        "cells": cells,
        "nfold_max": k,
        "bands": len(bands),
        "band_rows": b_rows,
        "tasks_at_once": running,
        "shortest_period_s": float(periods.min()),
        "visits": visits,
        "memory_bytes": int(memory),
        "memory_available_bytes": available,
        "memory_limit_bytes": limit,
    }


def check_resources(study: ResolvedStudy | Study,
                    est: dict[str, Any] | None = None) -> dict[str, Any]:
    """Refuse a study whose memory estimate exceeds the limit (or the memory available).

    Raises
    ------
    ResourceError
        With the estimate and the ways out (coarser grid, smaller chunks, a cluster,
        ``--force``).
    """
    study = as_resolved(study)
    est = estimate(study) if est is None else est
    limit = est["memory_limit_bytes"]
    if limit is not None and est["memory_bytes"] > limit:
        what = ("compute.memory_limit_gb" if study.compute.memory_limit_gb
                else "the memory available")
        raise ResourceError(
            f"the run needs about {_gb(est['memory_bytes'])} of memory but {what} is "
            f"{_gb(limit)} ({est['cells']:,} cells of {study.grid.resolution_deg:g} deg); "
            "use a coarser grid.resolution_deg, a smaller compute.chunk_rows or a cluster "
            "(compute.scheduler), or pass --force to run anyway",
            field="grid.resolution_deg",
        )
    return est


def _gb(n: float) -> str:
    return f"{n / 1e9:.2f} GB"
