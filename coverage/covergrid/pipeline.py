"""The study pipeline: study file -> elements -> coverage Dataset -> summaries and files.

``load_study`` reads and validates a study file; ``estimate`` says what a run would cost;
``run`` computes the coverage Dataset and, given an output folder, writes every output:

    DIR/<study>/coverage.nc           CF-1.8 netCDF of every metric
    DIR/<study>/summary.json, .csv    area-weighted global and per-band statistics, verdict
    DIR/<study>/study.resolved.yaml   the study with every default filled in
    DIR/<study>/maps/...              figures (when the renderer is available and maps are on)

Nothing is written before the study is valid, the resources suffice and the output folder
is known to be writable; each file is written atomically (see :mod:`covergrid.io`).
"""

from __future__ import annotations

import contextlib
import datetime as _dt
import math
from collections.abc import Iterator
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from covergrid import __version__
from covergrid.config import Study, load_study, parse_study
from covergrid.constants import MU_EARTH_KM3_S2, WGS84_A_KM
from covergrid.errors import ResourceError

__all__ = [
    "load_study",
    "estimate",
    "check_resources",
    "available_memory_bytes",
    "run",
    "run_study",
    "write_outputs",
    "summarise_study",
    "RunResult",
]

#: Bytes per cell of the finished Dataset besides nfold_fraction: 7 float64 metrics,
#: 4 int32 counts and the float64 cell area (covergrid.metrics, covergrid.engine).
_OUTPUT_BYTES_PER_CELL = 7 * 8 + 4 * 4 + 8
#: Satellite-position buffer per running task (covergrid.engine._POSITION_BLOCK_BYTES).
_POSITION_BUFFER_BYTES = 16 * 2**20
#: Resident memory of a run besides the per-cell terms: the interpreter with numpy, numba,
#: dask, xarray and netCDF4 imported (0.29 GB peak for a 2 deg study) plus what computing
#: and writing adds (about 0.25 GB). Fitted to peak RSS (GNU time -v) of `covergrid run` on
#: the development machine: 24 satellites, 6 h at 60 s, global grids of 0.25 deg (measured
#: 0.75 GB, estimated 0.92 GB) and 0.1 deg (measured 2.30 GB, estimated 2.59 GB). Checked
#: again with the one-array kernel state (covergrid.kernel.state_bytes_per_cell): 12
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


def _footprint_central_angle_rad(a_km, study: Study):
    """Coverage-circle central angle per satellite at its mean altitude a - R_E [rad]."""
    import numpy as np

    from covergrid.orbits.design import footprint

    s = study.sensor
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


def estimate(study: Study, *, workers: int | None = None) -> dict[str, Any]:
    """What a run of the study would compute, and an estimate of its work and memory.

    Parameters
    ----------
    study : Study
        A validated study.
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
    :func:`covergrid.orbits.design.footprint` at the mean altitude. It is an order-of-
    magnitude figure for planning (eccentric orbits and strongly inclined regional grids
    deviate most).

    The memory estimate adds a fixed baseline, 2.5 times the finished Dataset (dask holds
    the band results while it assembles the arrays, plus a margin for writing) and, per
    running task, one band's streaming state and the position buffer. Fitted to measured
    peak resident memory, it errs on the high side by 10-25 % on global grids of 0.25 and
    0.1 deg (see ``_BASELINE_BYTES``); it does not grow with the span, as the engine
    streams over time.
    """
    import os

    import numpy as np

    from covergrid.engine import band_edges
    from covergrid.kernel import state_bytes_per_cell

    elements = study.to_elements()
    n_sat = len(elements.ids)
    rows, cols = study.grid.shape
    cells = rows * cols
    k = study.nfold_max
    n_steps = study.n_steps
    band_share = 0.5 * (math.sin(math.radians(study.grid.lat_max_deg))
                        - math.sin(math.radians(study.grid.lat_min_deg)))
    mean_cell_share = band_share / cells  # of the sphere's area
    lam = _footprint_central_angle_rad(elements.a_km, study)
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
    bands = band_edges(rows, study.compute.chunk_rows)
    b_rows = max(b - a for a, b in bands)
    out_bytes = cells * (_OUTPUT_BYTES_PER_CELL + 8 * k)
    # per running task: the band's streaming state, the position buffer and 4 int32
    # interval arrays per satellite and row (its finished metrics are counted in out_bytes)
    cell_bytes = state_bytes_per_cell(k)
    per_task = b_rows * cols * cell_bytes + _POSITION_BUFFER_BYTES + 4 * 4 * n_sat * b_rows
    running = min(workers, len(bands))
    memory = _BASELINE_BYTES + _OUTPUT_COPIES * out_bytes + running * per_task
    available = available_memory_bytes()
    limit = (int(study.compute.memory_limit_gb * 1e9) if study.compute.memory_limit_gb
             else available)
    periods = 2 * math.pi * np.sqrt(np.asarray(elements.a_km) ** 3 / MU_EARTH_KM3_S2)
    return {
        "study": study.study,
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


def check_resources(study: Study, est: dict[str, Any] | None = None) -> dict[str, Any]:
    """Refuse a study whose memory estimate exceeds the limit (or the memory available).

    Raises
    ------
    ResourceError
        With the estimate and the ways out (coarser grid, smaller chunks, a cluster,
        ``--force``).
    """
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


@contextlib.contextmanager
def _scheduler(study: Study, override: str | None) -> Iterator[Any]:
    """The scheduler argument for the engine; starts and stops a LocalCluster if asked."""
    name = override or study.compute.scheduler
    if name in ("threads", "synchronous", "processes"):
        yield name
        return
    from distributed import Client, LocalCluster

    if name == "local-cluster":
        c = study.compute
        with LocalCluster(n_workers=c.workers, threads_per_worker=c.threads_per_worker,
                          host="127.0.0.1", dashboard_address=None,
                          processes=True) as cluster, Client(cluster) as client:
            yield client
        return
    try:
        client = Client(name, timeout=f"{_CONNECT_TIMEOUT_S}s")
    except OSError as exc:  # refused, unreachable or timed out (TimeoutError is an OSError)
        raise ResourceError(
            f"cannot reach the dask scheduler ({exc}); start it "
            "first or check the address (an SSH tunnel or VPN for a remote cluster); got "
            f"{name!r}", field="compute.scheduler") from None
    with client:
        yield client


#: How long to wait for an existing dask scheduler to answer [s].
_CONNECT_TIMEOUT_S = 30


@dataclass
class RunResult:
    """What :func:`run_study` produced.

    Attributes
    ----------
    dataset : xarray.Dataset
        The coverage metrics on (lat, lon) (engine contract).
    summary : dict
        :func:`covergrid.summary.summarise` result (with the requirement verdict).
    out_dir : pathlib.Path or None
        The study's output folder, when outputs were written.
    files : list of pathlib.Path
        Every file written.
    """

    dataset: Any
    summary: dict
    out_dir: Path | None = None
    files: list[Path] = field(default_factory=list)

    @property
    def requirement_met(self) -> bool | None:
        """The verdict, or None when the study states no requirement."""
        verdict = self.summary.get("requirement")
        return None if verdict is None else bool(verdict["met"])


def summarise_study(study: Study, ds) -> dict[str, Any]:
    """Summaries of a coverage Dataset with the study's band width and requirement."""
    from covergrid.summary import summarise

    req = None
    if study.requirement is not None:
        r = study.requirement
        req = {"metric": r.metric, "at_most": r.at_most, "at_least": r.at_least,
               "area_fraction": r.area_fraction, "k": r.k}
    out = summarise(ds, band_width_deg=study.output.band_width_deg, requirement=req)
    from covergrid.metrics import MODEL_LIMITS

    out = {"study": study.study, "covergrid_version": __version__, "model_limits": MODEL_LIMITS,
           **out}
    return out


def write_outputs(study: Study, ds, out_root: str | Path, *, maps: bool = True,
                  summary: dict | None = None) -> tuple[Path, list[Path], dict]:
    """Write every output of a computed study into ``out_root/<study>/``.

    Returns
    -------
    tuple
        (the study folder, the files written, the summary).
    """
    from covergrid import io
    from covergrid.summary import CSV_COLUMNS, summary_rows

    folder = io.study_output_dir(out_root, study.study)
    summary = summarise_study(study, ds) if summary is None else summary
    files = [
        io.write_netcdf(ds, folder / "coverage.nc"),
        io.write_json(summary, folder / "summary.json"),
        io.write_csv(summary_rows(summary), folder / "summary.csv", CSV_COLUMNS),
        io.write_text(study.dump_resolved_yaml(), folder / "study.resolved.yaml"),
    ]
    if maps:
        files += _write_figures(study, ds, folder)
    return folder, files, summary


def design_caption_for(study: Study) -> str:
    """Caption of every figure: the design (first group), sensor limits, span and step."""
    from covergrid.render import design_caption

    info: dict[str, Any] = {
        "min_elevation_deg": study.sensor.min_elevation_deg,
        "max_off_nadir_deg": study.sensor.max_off_nadir_deg,
        "max_range_km": study.sensor.max_range_km,
        "duration_h": study.duration_h, "step_s": study.step_s, "epoch": study.epoch,
    }
    walkers = [g for g in study.constellation if g.walker is not None]
    if len(study.constellation) == 1 and walkers:
        w, t = walkers[0].walker, walkers[0].template
        assert w is not None and t is not None
        info.update(pattern=w.pattern, total=w.total, planes=w.planes, phasing=w.phasing,
                    altitude_km=t.a_km - WGS84_A_KM, inclination_deg=t.inclination_deg)
    text = design_caption(info)
    if not (len(study.constellation) == 1 and walkers):
        n, g = study.n_satellites, len(study.constellation)
        text = (f"{n} satellite{'s' if n != 1 else ''} in {g} group{'s' if g != 1 else ''}. "
                + text)
    return text


#: Samples of the ground-track figure (over one orbit of the slowest satellite, at most the span).
_TRACK_SAMPLES = 721


def _write_figures(study: Study, ds, folder: Path) -> list[Path]:
    """Metric maps, ground tracks and the latitude profile (see :mod:`covergrid.render`)."""
    import numpy as np

    from covergrid.render import (
        ground_track,
        plane_numbers,
        save_ground_tracks,
        save_latitude_profile,
        save_metric_maps,
    )

    caption = design_caption_for(study)
    files = save_metric_maps(ds, study.maps.metrics, folder, caption=caption,
                             projection=study.maps.projection)
    elements = study.to_elements()
    period_s = float(np.max(2 * math.pi * np.sqrt(np.asarray(elements.a_km) ** 3
                                                   / MU_EARTH_KM3_S2)))
    shown_s = min(period_s, study.duration_s)
    t_s = np.linspace(0.0, shown_s, _TRACK_SAMPLES)
    lat, lon = ground_track(elements, study.epoch_datetime64(), t_s)
    title = (f"Ground tracks over the first {shown_s / 60:.0f} min"
             + (" (one orbit)" if shown_s < study.duration_s else ""))
    files += save_ground_tracks(lat, lon, folder, caption=caption, title=title,
                                ids=elements.ids,
                                planes=plane_numbers(elements))
    profile = [m for m in study.maps.metrics if m != "nfold_fraction"][:4] or ["coverage_fraction"]
    files += save_latitude_profile(ds, profile, folder, caption=caption)
    return files


def _attrs(study: Study) -> dict[str, Any]:
    now = _dt.datetime.now(_dt.timezone.utc).replace(microsecond=0).isoformat()
    return {
        "title": f"covergrid coverage metrics: study {study.study}",
        "history": f"{now.replace('+00:00', 'Z')} covergrid {__version__} run of study "
                   f"{study.study}",
        "covergrid_study_name": study.study,
        "covergrid_study": study.dump_resolved_yaml(),
    }


def run_study(study: Study, out_dir: str | Path | None = None, *, progress: bool = False,
              scheduler: str | None = None, maps: bool = True,
              force: bool = False) -> RunResult:
    """Compute a study, summarise it and (given ``out_dir``) write every output.

    Parameters
    ----------
    study : Study
        A validated study (:func:`load_study`).
    out_dir : path-like, optional
        Output root; outputs go to ``out_dir/<study>/``.
    progress : bool
        Show a progress bar.
    scheduler : str, optional
        Overrides ``compute.scheduler``.
    maps : bool
        Draw the figures (when writing outputs).
    force : bool
        Run even if the memory estimate exceeds the limit.

    Returns
    -------
    RunResult
    """
    from covergrid import io
    from covergrid.engine import SensorSpec, compute_coverage

    if scheduler is not None:
        data = study.resolved_dict()
        data["compute"]["scheduler"] = scheduler
        study = parse_study(data, source="--scheduler")
    if not force:
        check_resources(study)
    if out_dir is not None:
        io.check_writable(io.study_output_dir(out_dir, study.study))
    elements = study.to_elements()
    s = study.sensor
    sensor = SensorSpec(min_elevation_deg=s.min_elevation_deg,
                        max_off_nadir_deg=s.max_off_nadir_deg, max_range_km=s.max_range_km)
    with _scheduler(study, None) as sched:
        ds = compute_coverage(
            elements, study.epoch_datetime64(), study.duration_s, study.step_s,
            study.grid.cells(), sensor, nfold_max=study.nfold_max,
            chunk_rows=study.compute.chunk_rows, scheduler=sched, progress=progress,
            attrs=_attrs(study), refine_transitions=study.refine_transitions,
        )
    summary = summarise_study(study, ds)
    if out_dir is None:
        return RunResult(ds, summary)
    folder, files, summary = write_outputs(study, ds, out_dir, maps=maps, summary=summary)
    return RunResult(ds, summary, folder, files)


def run(study: Study | str | Path, out_dir: str | Path | None = None,
        progress: bool = False, **kwargs: Any):
    """Compute a study's coverage Dataset; given ``out_dir``, also write every output.

    Parameters
    ----------
    study : Study or path-like
        A validated study, or the path of a study file.
    out_dir : path-like, optional
        Output root; outputs go to ``out_dir/<study>/``.
    progress : bool
        Show a progress bar.
    **kwargs
        ``scheduler``, ``maps``, ``force`` of :func:`run_study`.

    Returns
    -------
    xarray.Dataset
        Per-cell metrics (see the outputs reference).
    """
    if not isinstance(study, Study):
        study = load_study(study)
    return run_study(study, out_dir, progress=progress, **kwargs).dataset
