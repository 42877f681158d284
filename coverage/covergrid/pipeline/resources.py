"""What a run would cost before it runs: work, time and memory, and the refusals above limits.

:func:`estimate` counts the satellites, samples and cells of a resolved study and estimates
the kernel's work (satellite x sample x cell visibilities), the time and the peak memory of
a run, part by part (the interpreter, the results, the kernel's state of every running task,
every worker process, the output writers and the figures); :func:`check_resources` refuses
a run above the work limits (:data:`MAX_SAMPLES`, :data:`MAX_SATELLITE_SAMPLES`) or whose
memory estimate exceeds ``compute.memory_limit_gb`` (or the memory available), with a
one-line :class:`~covergrid.errors.ResourceError` naming the key to change.
:func:`estimate_trade` and :func:`check_trade_resources` do the same for a sweep or a
sizing search (the designs, their work, the designs running at once and the rows kept).

The limits on cells and designs are the study's own: ``grid.resolution_deg >= 0.05`` (at
most 25,920,000 cells), :data:`~covergrid.study.trade_sections.SWEEP_MAX_DESIGNS` and
:data:`~covergrid.study.trade_sections.SIZING_MAX_DESIGNS`.
"""

from __future__ import annotations

import dataclasses
import math
import os
from typing import TYPE_CHECKING, Any

import numpy as np

from covergrid.compute.dop_spec import dop_state_bytes_per_cell
from covergrid.compute.grid import row_bands
from covergrid.compute.kernel_state import state_bytes_per_cell, state_bytes_per_satellite_row
from covergrid.compute.metrics import COVERAGE_METRICS, DOP_METRICS, INTEGER_METRICS
from covergrid.compute.sensor import Sensor
from covergrid.compute.span import POSITION_BLOCK_BYTES
from covergrid.constants import MU_EARTH_KM3_S2, WGS84_A_KM
from covergrid.errors import ResourceError
from covergrid.orbits.geometry import footprint
from covergrid.orbits.walker import walker_option_counts
from covergrid.pipeline.figures import (
    HELPER_BASE_BYTES,
    HELPER_BYTES_PER_CELL,
    MAX_TRACKS,
    TRACK_SAMPLES,
    figure_count,
    figure_helpers_at_most,
)
from covergrid.study.build import as_resolved, trade_orbits

if TYPE_CHECKING:
    from covergrid.study.build import ComputeOptions, ResolvedStudy
    from covergrid.study.models import Study

__all__ = ["KERNEL_S_PER_CELL", "KERNEL_S_PER_SATELLITE_SAMPLE_ROW", "KERNEL_S_PER_SIDE_CELL",
           "KERNEL_S_PER_SIDE_CELL_SAMPLED",
           "KERNEL_VISITS_PER_S_PER_CORE", "MAX_SAMPLES",
           "MAX_SATELLITE_SAMPLES", "OUTPUT_BYTES_PER_CELL", "available_memory_bytes",
           "check_resources", "check_trade_resources", "concurrency", "estimate",
           "estimate_trade", "footprint_central_angle_rad", "format_bytes",
           "format_seconds"]

# --- work limits ----------------------------------------------------------------------
#: Most samples of a span: 10**8 is more than three years at 1 s, ten years at 3.2 s.
MAX_SAMPLES = 10**8
#: Most satellite x sample positions of a run or of one design: 10**10 is 1,000 satellites
#: for a year at 3.2 s; propagating and scanning them takes the better part of a day.
MAX_SATELLITE_SAMPLES = 10**10

# --- time: calibrated on the development machine (one core, synchronous scheduler) ------
# The kernel's time is modelled as three terms, fitted (least squares on relative error) to
# seven measured runs of the compiled kernel of this version: 6 to 1,200 satellites, grids
# of 2 to 0.25 deg, steps of 10 to 60 s. The fit reproduces them to within a factor of 0.5
# to 1.2, so the estimate is a planning figure good to a factor of about 2. Visits alone
# (the first term) were not enough: a satellite's cells in view are found from the two
# edges of its interval in each latitude row it spans, so the work per sample grows with
# the rows of its footprint more than with the cells inside it (a 0.25 deg grid with a
# 30 deg sensor ran 2.5 times longer than visits at the best throughput predict).
# Re-measure when the kernel changes (issue 10 works on it).
#: Kernel throughput [satellite-sample-cell visibilities per second per core].
KERNEL_VISITS_PER_S_PER_CORE = 9.0e8
#: Kernel time per satellite, sample and latitude row of its footprint [s].
KERNEL_S_PER_SATELLITE_SAMPLE_ROW = 1.3e-7
#: Kernel time per cell whatever is seen (state set-up, finishing, the Dataset) [s].
KERNEL_S_PER_CELL = 2.7e-6
#: Kernel time per satellite, sample and cell of its reach for a side-looking sensor [s],
#: in continuous time and sampled: every cell inside the outer footprint is tested each
#: sample (compute/side_events.py). Measured as the difference between the radar example's
#: constellation (configs/radar_marram.yaml, global 1 deg grid, 24 h at 30 s) and the same
#: with a plain 45 deg cone, per estimated visit, one core, synchronous: 120 ns and 12 ns.
KERNEL_S_PER_SIDE_CELL = 1.2e-7
KERNEL_S_PER_SIDE_CELL_SAMPLED = 1.2e-8
#: The dilution-of-precision work (covergrid.compute.dop) besides the kernel's: time per
#: satellite-sample-cell visibility (its line of sight added to the cell's geometry sums)
#: and per cell and sample (the DOPs, the statistics, the histograms) [s], one core.
#: Measured side by side with the kernel on the DOP bench study (24 satellites at
#: 20,200 km, 2 deg grid, 24 h at 60 s: 1.9e8 visibilities, 2.3e7 cell-samples) on the
#: shared development machine under load, so a planning figure good to a factor of about 2:
#: 0.27 s and 0.32 s of its 0.58 s.
DOP_S_PER_VISIT = 1.4e-9
DOP_S_PER_CELL_SAMPLE = 1.4e-8
#: Time to draw and save a metric map (PNG and PDF) besides its cells, any other figure,
#: and per cell of a map [s], plus the once-only start of drawing (matplotlib, cartopy,
#: fonts, the projected coastline) [s]. Measured in one `make bench` run on the 2-core
#: development machine (the 48/8/1 whole-process study, 1 deg grid, four maps and two other
#: figures): 5.1 s from start to exit with the figures drawn by one process against 2.0 s
#: without maps, i.e. 3.1 s of drawing, of which about 1.2 s the start; the per-cell term
#: is from earlier runs on 1 and 0.25 deg grids. The sum errs high when helpers draw
#: concurrently (4.0 s with two).
MAP_S = 0.25
FIGURE_S = 0.4
FIGURE_START_S = 1.2
MAP_S_PER_CELL = 2.0e-6

# --- memory ---------------------------------------------------------------------------
#: Bytes per cell of the finished Dataset besides nfold_fraction: a float64 per real metric,
#: an int32 per integer metric (covergrid.compute.metrics) and the float64 cell area.
OUTPUT_BYTES_PER_CELL = (8 * sum(1 for m in COVERAGE_METRICS if m != "nfold_fraction"
                                 and m not in INTEGER_METRICS)
                         + 4 * len(INTEGER_METRICS) + 8)
#: Bytes per cell the DOP metrics add to the finished Dataset (float64 each).
DOP_OUTPUT_BYTES_PER_CELL = 8 * len(DOP_METRICS)
#: Resident memory of a run besides the per-cell terms: the interpreter with numpy, numba,
#: dask, xarray and netCDF4 imported (0.29 GB peak for a 2 deg study) plus what computing
#: and writing adds (about 0.25 GB). Fitted to peak RSS (GNU time -v) of `covergrid run` on
#: the development machine: 24 satellites, 6 h at 60 s, global grids of 0.25 deg (measured
#: 0.75 GB, estimated 0.92 GB) and 0.1 deg (measured 2.30 GB, estimated 2.59 GB). Checked
#: again with the one-array kernel state (covergrid.compute.kernel_state.state_bytes_per_cell): 12
#: satellites, 7 days at 10 s, 0.25 deg, maps included: measured 0.88 GB, estimated 1.03 GB.
_BASELINE_BYTES = 550 * 2**20
#: Copies of the finished Dataset alive at the peak: the band results and the assembled
#: arrays (same fit) ...
_RESULT_COPIES = 2.0
#: ... and half a copy more while the netCDF, JSON and CSV writers run (same fit).
_WRITER_COPIES = 0.5
#: Each worker process (processes scheduler, local-cluster worker) imports the same
#: libraries: measured 230 MB each on a 2-worker LocalCluster after a run.
WORKER_PROCESS_BYTES = 256 * 2**20
#: The band results a worker process holds until they are gathered: one copy more (a
#: 2-worker cluster on a 0.1 deg grid peaked 1.0 GB above threads: 2 x 230 MB + 0.8 of
#: the 0.69 GB Dataset).
_WORKER_RESULT_COPIES = 1.0
#: Ground-track figure: bytes per drawn satellite and track sample (propagated positions and
#: sub-satellite points: measured 161; at most pipeline.figures.MAX_TRACKS satellites are
#: drawn and propagated), and per satellite for numbering the planes (a few sorted int64 and
#: float64 arrays: render/tracks.plane_numbers sorts, it no longer compares every pair).
TRACK_BYTES_PER_SAMPLE = 176
PLANE_BYTES_PER_SATELLITE = 128
#: A design row kept in memory: bytes per value (Python floats in a dict read back from
#: JSON: measured 136).
ROW_VALUE_BYTES = 150
#: Columns of a design row besides the per-metric statistics (covergrid.trade.evaluate).
_ROW_FIXED_COLUMNS = 16
_ROW_STATISTICS = 6


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


def concurrency(compute: ComputeOptions) -> tuple[int, int, bool]:
    """What runs at once on a scheduler: (tasks, worker processes, remote).

    ``tasks`` run at once (threads of this machine, or of its local cluster); ``worker
    processes`` are started besides this one (each with its own libraries); ``remote`` is
    True for an existing cluster's address, whose workers use another machine's memory.
    The trade runner's ``threads`` and ``processes`` pools also have one worker per core.
    """
    cores = os.cpu_count() or 1
    name = compute.scheduler
    if name == "synchronous":
        return 1, 0, False
    if name == "threads":
        return cores, 0, False
    if name == "processes":
        return cores, cores, False
    if name == "local-cluster":
        workers = compute.workers or cores
        return workers * (compute.threads_per_worker or 1), workers, False
    return cores, 0, True  # an address: the remote workers' number is not known here


def _civ(a_km, sensor: Sensor, cells: int, band_share: float) -> np.ndarray:
    """Cells inside each satellite's coverage circle (see :func:`estimate`'s notes)."""
    lam = footprint_central_angle_rad(a_km, sensor)
    cap_share = 0.5 * (1.0 - np.cos(lam))
    return np.minimum(cap_share / (band_share / cells), cells)


def _footprint_rows(a_km, sensor: Sensor, study: ResolvedStudy) -> np.ndarray:
    """Latitude rows each satellite's coverage circle spans (at most the grid's rows)."""
    lam_deg = np.degrees(footprint_central_angle_rad(a_km, sensor))
    return np.minimum(2.0 * lam_deg / study.grid.resolution_deg + 1.0,
                      study.grid.cropped().n_lat)


def _kernel_s(visits: float, row_samples: float, cells: float,
              sensor: Sensor | None = None, refine: bool = True) -> float:
    """One core's kernel time for the work counted [s] (see the calibration notes); a
    side-looking ``sensor`` tests every cell of its reach, about the visits of its outer
    footprint, each sample."""
    side = 0.0
    if sensor is not None and sensor.side_looking:
        side = visits * (KERNEL_S_PER_SIDE_CELL if refine else KERNEL_S_PER_SIDE_CELL_SAMPLED)
    return (visits / KERNEL_VISITS_PER_S_PER_CORE + row_samples * KERNEL_S_PER_SATELLITE_SAMPLE_ROW
            + cells * KERNEL_S_PER_CELL + side)


def _dop_s(visits: float, cell_samples: float) -> float:
    """One core's time for the DOP work counted [s] (see DOP_S_PER_VISIT)."""
    return visits * DOP_S_PER_VISIT + cell_samples * DOP_S_PER_CELL_SAMPLE


def _band_share(study: ResolvedStudy) -> float:
    """Share of the sphere's area within the grid's computed window (latitudes and
    longitudes; a region's cells outside its areas are counted, so the estimate errs high)."""
    g = study.grid.cropped()
    return (0.5 * (math.sin(math.radians(g.lat_max_deg)) - math.sin(math.radians(g.lat_min_deg)))
            * g.n_lon / g.n_lon_circle)


#: Bytes per pass of the pass list (eight float64 or int64 columns and two flags) and the
#: events behind it, with the copies made while sorting and pairing (about three).
TARGET_BYTES_PER_PASS = 3 * (8 * 8 + 2 + 2 * 4 * 8)
#: Passes per satellite, target and day assumed by the estimate: a low satellite passes over
#: a site at most about 15 times a day (one per orbit, common practice).
TARGET_PASSES_PER_DAY = 15.0


def _targets_bytes(study: ResolvedStudy, n_sat: int) -> int:
    """Memory of the point targets: the per-pair state (compute.target_kernel.PAIR_COLUMNS
    float64 per satellite and target) and the pass list (at most TARGET_PASSES_PER_DAY per
    satellite, target and day; an upper bound)."""
    if study.targets is None:
        return 0
    n_t = len(study.targets)
    days = max(study.duration_s / 86400.0, 1.0 / 24.0)
    pairs = 8 * 7 * n_sat * n_t  # compute.target_kernel.PAIR_COLUMNS = 7
    passes = TARGET_PASSES_PER_DAY * days * n_sat * n_t * TARGET_BYTES_PER_PASS
    return int(pairs + passes)


def _figures_bytes(study: ResolvedStudy, n_sat: int, cells: int) -> int:
    """Peak memory the figures add: ground tracks, plane numbering, one map at a time in this
    process, and every helper process that may draw (pipeline.figures: each holds its
    interpreter and libraries, HELPER_BASE_BYTES, and HELPER_BYTES_PER_CELL a cell; the same
    per-cell figure holds for this process)."""
    helpers = figure_helpers_at_most(study.compute, figure_count(study))
    return (min(n_sat, MAX_TRACKS) * TRACK_SAMPLES * TRACK_BYTES_PER_SAMPLE
            + n_sat * PLANE_BYTES_PER_SATELLITE + cells * HELPER_BYTES_PER_CELL
            + helpers * (HELPER_BASE_BYTES + cells * HELPER_BYTES_PER_CELL))


def estimate(study: ResolvedStudy | Study, *, workers: int | None = None,
             maps: bool = True) -> dict[str, Any]:
    """What a run of the study would compute, and an estimate of its work, time and memory.

    Parameters
    ----------
    study : ResolvedStudy or Study
        A resolved study (:func:`covergrid.study.build.resolve`), or a study to resolve.
    workers : int, optional
        Tasks running at once (default: from the study's scheduler, see
        :func:`concurrency`).
    maps : bool
        Whether the figures are drawn (their memory and time are included).

    Returns
    -------
    dict
        ``satellites``, ``steps`` (N samples), ``satellite_samples``, ``step_s``,
        ``duration_s``, ``grid_rows``, ``grid_columns``, ``cells``, ``nfold_max``,
        ``bands``, ``tasks_at_once``, ``worker_processes``, ``visits`` (expected satellite
        x sample x cell visibilities: the kernel's work), ``seconds`` (estimated wall time:
        ``compute_s`` plus ``figures_s``; ``compute_s`` includes ``dop_s``, the
        dilution-of-precision work, zero without a ``dop:`` section), ``memory_bytes``
        (estimated peak) with
        ``memory_parts`` (baseline, results, writers, tasks, workers, figures),
        ``memory_available_bytes`` and ``memory_limit_bytes`` (the limit applied, or None),
        and ``limits`` (the work limits).

    Notes
    -----
    The visit estimate counts, per satellite and sample, the cells inside its coverage
    circle: spherical-cap area ``2 pi R^2 (1 - cos lambda)`` (Archimedes' zone formula)
    divided by the grid's mean cell area, times the share of the sphere the grid covers
    (a satellite's circle lies over the grid about that share of the time); lambda from
    :func:`covergrid.orbits.geometry.footprint` at the mean altitude. It is an order-of-
    magnitude figure for planning (eccentric orbits and strongly inclined regional grids
    deviate most). The time is the kernel's (visits, satellite x sample x footprint rows
    and cells, each at its calibrated cost) shared over the tasks running at once, plus,
    with DOP, its work (per visibility and per cell and sample), plus the figures.

    The memory estimate adds a fixed baseline, 2.5 times the finished Dataset (dask holds
    the band results while it assembles the arrays, and the writers a half copy), per
    running task one band's streaming state and the position buffer, per worker process
    its libraries and one more copy of the results, and with maps the figures (the ground
    tracks of every satellite and a map's cells). Fitted to measured peak resident memory,
    it errs on the high side by 10-25 % on global grids of 0.25 and 0.1 deg (see
    ``_BASELINE_BYTES``); it does not grow with the span, as the engine streams over time.
    """
    study = as_resolved(study)
    elements = study.elements
    n_sat = len(elements.ids)
    grid = study.grid.cropped()  # the window the engine computes
    rows, cols = grid.n_lat, grid.n_lon
    cells = rows * cols
    k = study.nfold_max
    n_steps = study.n_steps
    band_share = _band_share(study)
    visits = float(np.sum(_civ(elements.a_km, study.sensor, cells, band_share)) * band_share
                   * n_steps)

    tasks, processes, _remote = concurrency(study.compute)
    if workers is not None:
        tasks = workers
    bands = row_bands(rows, study.compute.chunk_rows)
    b_rows = max(b - a for a, b in bands)
    running = min(tasks, len(bands))
    dop = study.dop is not None
    out_bytes = cells * (OUTPUT_BYTES_PER_CELL + 8 * k + (DOP_OUTPUT_BYTES_PER_CELL if dop else 0))
    # per running task: the band's streaming state (and DOP state), the position buffer and
    # the previous interval per satellite and row (its finished metrics are counted in results)
    per_task = (b_rows * cols * (state_bytes_per_cell(k)
                                 + (dop_state_bytes_per_cell() if dop else 0))
                + POSITION_BLOCK_BYTES + state_bytes_per_satellite_row() * n_sat * b_rows)
    parts = {
        "baseline": _BASELINE_BYTES,
        "results": int(_RESULT_COPIES * out_bytes),
        "writers": int(_WRITER_COPIES * out_bytes),
        "tasks": running * per_task,
        "workers": processes * WORKER_PROCESS_BYTES
                   + (int(_WORKER_RESULT_COPIES * out_bytes) if processes else 0),
        "figures": _figures_bytes(study, n_sat, cells) if maps else 0,
        "targets": _targets_bytes(study, n_sat),
    }
    memory = sum(parts.values())
    row_samples = float(np.sum(_footprint_rows(elements.a_km, study.sensor, study))) * n_steps
    dop_s = _dop_s(visits, cells * n_steps) / running if dop else 0.0
    compute_s = _kernel_s(visits, row_samples, cells, study.sensor,
                          study.refine_transitions) / running + dop_s
    n_maps = figure_count(study) - 2 if maps else 0
    figures_s = (FIGURE_START_S + n_maps * (MAP_S + cells * MAP_S_PER_CELL) + 2 * FIGURE_S
                 if maps else 0.0)
    available = available_memory_bytes()
    limit = (int(study.compute.memory_limit_gb * 1e9) if study.compute.memory_limit_gb
             else available)
    periods = 2 * math.pi * np.sqrt(np.asarray(elements.a_km) ** 3 / MU_EARTH_KM3_S2)
    return {
        "study": study.name,
        "satellites": n_sat,
        "steps": n_steps,
        "satellite_samples": n_sat * n_steps,
        "step_s": study.step_s,
        "duration_s": n_steps * study.step_s,
        "grid_rows": rows,
        "grid_columns": cols,
        "cells": cells,
        "nfold_max": k,
        "bands": len(bands),
        "band_rows": b_rows,
        "tasks_at_once": running,
        "worker_processes": processes,
        "shortest_period_s": float(periods.min()),
        "visits": visits,
        "row_samples": row_samples,
        "seconds": compute_s + figures_s,
        "compute_s": compute_s,
        "dop_s": dop_s,
        "figures_s": figures_s,
        "maps": maps,
        "memory_bytes": int(memory),
        "memory_parts": parts,
        "memory_available_bytes": available,
        "memory_limit_bytes": limit,
        "limits": {"max_samples": MAX_SAMPLES, "max_satellite_samples": MAX_SATELLITE_SAMPLES},
    }


def _check_work(study: ResolvedStudy, n_sat_max: int, step_s: float | None = None,
                field: str = "step_s") -> None:
    """Refuse spans with too many samples or satellite positions (see the limits); a
    sizing search's coarse step is checked with ``step_s`` and its ``field``."""
    step = study.step_s if step_s is None else step_s
    n = study.n_steps if step_s is None else round(study.duration_s / step_s)
    if n > MAX_SAMPLES:
        raise ResourceError(
            f"the span has {n:,} samples ({study.duration_s / 3600:g} h at {step:g} s); "
            f"allowed: at most {MAX_SAMPLES:,}; use a longer {field} or a shorter duration_h",
            field=field)
    if n_sat_max * n > MAX_SATELLITE_SAMPLES:
        raise ResourceError(
            f"{n_sat_max:,} satellites x {n:,} samples = {n_sat_max * n:,} positions; allowed: "
            f"at most {MAX_SATELLITE_SAMPLES:,}; use a longer {field}, a shorter duration_h or "
            "fewer satellites", field=field)


def _check_memory(study: ResolvedStudy, est: dict[str, Any], what: str, force: bool,
                  rows_key: str = "sweep") -> None:
    limit = est["memory_limit_bytes"]
    if force or limit is None or est["memory_bytes"] <= limit:
        return
    parts = est["memory_parts"]
    shown = ", ".join(f"{name} {format_bytes(v)}" for name, v in
                      sorted(parts.items(), key=lambda kv: -kv[1]) if v >= 0.05 * limit)
    given = bool(study.compute.memory_limit_gb)
    where = "compute.memory_limit_gb" if given else _dominant_key(parts, rows_key)
    limit_text = (f"compute.memory_limit_gb is {format_bytes(limit)}" if given
                  else f"{format_bytes(limit)} is available")
    ways = {"figures": "pass --no-maps or use a coarser grid.resolution_deg (drawing the maps "
                       "of a fine grid needs the most), or set compute.workers: 1 (one process "
                       "draws)",
            "workers": "use fewer compute.workers or compute.threads_per_worker",
            "targets": "use fewer targets or satellites, or a shorter span"}.get(
        _largest(parts), "use a coarser grid.resolution_deg, a smaller compute.chunk_rows or "
                         "a cluster (compute.scheduler)")
    raise ResourceError(
        f"{what} needs about {format_bytes(est['memory_bytes'])} of memory ({shown}) but "
        f"{limit_text}; {ways}, or pass --force to run anyway", field=where)


def _largest(parts: dict[str, int]) -> str:
    return max(parts, key=lambda k: parts[k])


def _dominant_key(parts: dict[str, int], rows_key: str) -> str:
    """The study key behind the largest part of the memory estimate."""
    return {"figures": "maps", "workers": "compute.workers", "rows": rows_key,
            "targets": "targets"}.get(
        _largest(parts), "grid.resolution_deg")


def check_resources(study: ResolvedStudy | Study, est: dict[str, Any] | None = None, *,
                    maps: bool = True, force: bool = False) -> dict[str, Any]:
    """Refuse a run above the work limits, or whose memory estimate exceeds the limit (or
    the memory available) unless ``force``.

    Raises
    ------
    ResourceError
        Naming the key to change, with the estimate part by part and the ways out.
    """
    study = as_resolved(study)
    est = estimate(study, maps=maps) if est is None else est
    _check_work(study, est["satellites"])
    _check_memory(study, est, "the run", force)
    return est


# --- trades -----------------------------------------------------------------------------
def _trade_space(study: ResolvedStudy, block: str):
    """(orbits, elevations, totals, counts) of a sweep or sizing block: the (altitude,
    inclination) pairs (:func:`covergrid.study.build.trade_orbits`), the elevations, and
    the Walker totals with their pattern counts."""
    t = study.walker
    if block == "sweep":
        sw = study.sweep
        assert sw is not None and t is not None
        els = sw.min_elevation_deg or [study.sensor.min_elevation_deg]
        planes = sw.planes if sw.planes is not None else [t.planes]
        phasing = sw.phasing if sw.phasing is not None else [t.phasing]
        totals, counts = walker_option_counts(sw.total or [t.total], planes, phasing)
    else:
        sz = study.sizing
        assert sz is not None
        els = [study.sensor.min_elevation_deg]
        totals, counts = walker_option_counts(range(sz.total.min, sz.total.max + 1),
                                              sz.planes, sz.phasing)
    return trade_orbits(study, block), sorted(set(els)), totals, counts


def estimate_trade(study: ResolvedStudy | Study, block: str) -> dict[str, Any]:
    """The designs of a sweep (``block="sweep"``) or sizing search (``"sizing"``), and an
    estimate of their work, time and memory.

    A sizing search is estimated at its worst (no design meets the requirement): every
    design of the space evaluated coarsely and at full resolution, plus the loss cases of
    the largest total. Each design runs as one task on one core (covergrid.trade.runner);
    the designs run at once are the runner's pool (:func:`concurrency`).

    Returns
    -------
    dict
        ``designs`` (in the sweep, or in the sizing space), ``evaluations`` (at most),
        ``visits``, ``seconds``, ``designs_at_once``, ``memory_bytes`` with
        ``memory_parts``, ``memory_available_bytes``, ``memory_limit_bytes``,
        ``largest_total``.
    """
    study = as_resolved(study)
    orbits, els, totals, counts = _trade_space(study, block)
    cells = study.grid.n_cells
    coarse = study.sizing.coarse if block == "sizing" and study.sizing is not None else None
    if coarse is not None and study.sizing is not None and study.sizing.prune \
            and coarse.resolution_deg is not None:
        # a coarse grid finer than the study's (allowed, if odd) sets the bound
        g = study.grid
        rows = round((g.lat_max_deg - g.lat_min_deg) / coarse.resolution_deg)
        cells = max(cells, rows * round(360.0 / coarse.resolution_deg))
    band_share = _band_share(study)
    sensors = [dataclasses.replace(study.sensor, min_elevation_deg=el) for el in els]
    # one entry per (altitude, inclination): the work depends on the altitude only
    a_km = np.array([WGS84_A_KM + a for a, _ in orbits])
    cells_civ = sum(float(np.sum(_civ(a_km, s, cells, band_share))) for s in sensors)
    rows_sum = sum(float(np.sum(_footprint_rows(a_km, s, study))) for s in sensors)
    designs = len(orbits) * len(els) * int(counts.sum())
    satellites_sum = float(np.sum(totals * counts))  # per (orbit, elevation)
    visits = cells_civ * band_share * study.n_steps * satellites_sum
    row_samples = rows_sum * study.n_steps * satellites_sum
    evaluations = designs
    largest = int(totals[counts > 0].max()) if np.any(counts > 0) else 0
    if block == "sizing":
        sz = study.sizing
        assert sz is not None
        evaluations = 2 * designs if sz.prune else designs
        visits *= 2 if sz.prune else 1
        row_samples *= 2 if sz.prune else 1
        if sz.robust_to_one_loss:  # at most T single losses per design, at one total
            evaluations += len(orbits) * int((counts * totals).max(initial=0))
    tasks, processes, remote = concurrency(study.compute)
    k = study.nfold_max
    dop = study.dop is not None
    out_bytes = cells * (OUTPUT_BYTES_PER_CELL + 8 * k + (DOP_OUTPUT_BYTES_PER_CELL if dop else 0))
    per_design = (cells * (state_bytes_per_cell(k) + (dop_state_bytes_per_cell() if dop else 0))
                  + (_RESULT_COPIES + _WRITER_COPIES) * out_bytes + POSITION_BLOCK_BYTES
                  + 4 * 4 * largest * study.grid.n_lat)
    columns = _ROW_FIXED_COLUMNS + _ROW_STATISTICS * (
        len(COVERAGE_METRICS) - 1 + k + (len(DOP_METRICS) if dop else 0))
    parts = {
        "baseline": _BASELINE_BYTES,
        "designs": 0 if remote else int(tasks * per_design),
        "workers": processes * WORKER_PROCESS_BYTES,
        "rows": evaluations * columns * ROW_VALUE_BYTES,
    }
    seconds = (_kernel_s(visits, row_samples, evaluations * cells, study.sensor,
                         study.refine_transitions)
               + (_dop_s(visits, evaluations * cells * study.n_steps) if dop else 0.0)) / tasks
    available = available_memory_bytes()
    limit = (int(study.compute.memory_limit_gb * 1e9) if study.compute.memory_limit_gb
             else available)
    return {
        "block": block, "designs": designs, "evaluations": evaluations, "visits": visits,
        "seconds": seconds, "designs_at_once": tasks, "largest_total": largest,
        "memory_bytes": int(sum(parts.values())), "memory_parts": parts,
        "memory_available_bytes": available, "memory_limit_bytes": limit,
    }


def check_trade_resources(study: ResolvedStudy | Study, block: str, *,
                          force: bool = False) -> dict[str, Any]:
    """Refuse a sweep or sizing search above the work limits, or whose memory estimate
    exceeds ``compute.memory_limit_gb`` (or the memory available) unless ``force``.

    Raises
    ------
    ResourceError
        Naming the key to change.
    """
    study = as_resolved(study)
    est = estimate_trade(study, block)
    _check_work(study, est["largest_total"])
    sz = study.sizing
    if block == "sizing" and sz is not None and sz.prune and sz.coarse.step_s is not None:
        _check_work(study, est["largest_total"], sz.coarse.step_s, "sizing.coarse.step_s")
    if block == "sweep":
        _check_memory(study, est, "the sweep", force, "sweep")
    else:
        _check_memory(study, est, "the sizing search", force, "sizing.total.max")
    return est


def format_bytes(n: float) -> str:
    """A memory size for people: ``2.41 GB``, ``611 MB``, ``12.5 MB``, ``0.804 MB``."""
    return f"{n / 1e9:.2f} GB" if n >= 1e9 else f"{n / 1e6:.3g} MB"


def format_seconds(s: float) -> str:
    """A duration for people: ``under 1 s``, ``40 s``, ``12 min``, ``3.5 h``, ``2.1 days``."""
    if s < 1:
        return "under 1 s"
    if s < 90:
        return f"{s:.0f} s"
    if s < 5400:
        return f"{s / 60:.0f} min"
    if s < 172800:
        return f"{s / 3600:.1f} h"
    return f"{s / 86400:.1f} days"
