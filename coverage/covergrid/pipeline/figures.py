"""The figures of a run: which ones a study asks for, drawn concurrently, with its caption.

:func:`study_caption` states the design, the sensor limits and the span. :func:`figure_jobs`
lists the figures of a computed study: one job per metric map (and per fold of
``nfold_fraction``), the ground tracks and the latitude profile, each holding only the data it
draws (:func:`track_job`, the ground tracks, needs no coverage). :func:`draw_figures` draws
jobs in this process and up to ``workers - 1`` helper processes taking them from one queue
(:class:`~covergrid.pipeline.figure_pool.FigurePool`). A run starts its helpers before
computing (:func:`figure_helpers` says how many: at most the CPUs this process may use and
other work leaves idle, ``compute.workers`` when the study sets it, and what the memory
available allows; none with ``compute.scheduler: synchronous``, which draws everything here,
one after the other), gives them the ground tracks at once and the other figures when the
coverage is known. :func:`write_figures` lists and draws the figures of a computed study.

Every job writes its PNG and PDF atomically into the folder it is given
(:func:`covergrid.render.style.save_png_and_pdf`) and nowhere else. Figures are drawn on this
machine even when the coverage ran on a dask cluster: its workers need not see the output
folder.
"""

from __future__ import annotations

import math
import os
from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import TYPE_CHECKING, Any

import numpy as np

from covergrid.constants import MU_EARTH_KM3_S2

if TYPE_CHECKING:
    from covergrid.study.build import ComputeOptions, ResolvedStudy

__all__ = [
    "HELPER_BASE_BYTES",
    "HELPER_BYTES_PER_CELL",
    "JOBS_PER_PROCESS",
    "MAX_TRACKS",
    "TRACK_SAMPLES",
    "FigureJob",
    "draw_figures",
    "figure_jobs",
    "figure_count",
    "figure_helpers",
    "figure_helpers_at_most",
    "figure_processes_at_most",
    "prepare_job",
    "study_caption",
    "track_job",
    "write_figures",
]

#: Samples of the ground-track figure (over one orbit of the slowest satellite, at most the span).
TRACK_SAMPLES = 721
#: Satellites drawn in the ground-track figure at most (spread over the planes).
MAX_TRACKS = 24

#: Figures per drawing process at least. Every process that draws pays about 1.2 s of one
#: core once (importing matplotlib and cartopy, then fonts, coastlines and gridlines on its
#: first map); a helper pays it while this process pays its own, and a map then costs about
#: 0.4 s of a core (PNG and PDF). A helper with two jobs or more shortens the drawing on a
#: free core; with one it only spends a core. Measured on the development machine (2 cores).
JOBS_PER_PROCESS = 2

#: Resident memory of one helper process drawing figures, besides the per-cell term: the
#: interpreter with numpy, xarray, matplotlib and cartopy imported and a map drawn and saved.
#: Fitted to the peak RSS of a helper drawing one ``max_gap`` map and a latitude profile of
#: a global grid on the development machine: 204 MB at 1 deg (64,800 cells), 217 MB at
#: 0.5 deg, 323 MB at 0.25 deg, 968 MB at 0.1 deg (6.48 million cells), i.e. 196 MB plus
#: 125 bytes per cell (MB = 2**20 bytes).
HELPER_BASE_BYTES = 200 * 2**20
#: Resident memory per grid cell of a helper drawing a map: its copy of the field and the
#: bounds, the masked and scaled field, the projected cell mesh and its colours (same fit).
HELPER_BYTES_PER_CELL = 130


def study_caption(study: ResolvedStudy) -> str:
    """Caption of every figure: the design (first group), sensor limits, span and step."""
    from covergrid.render import design_caption

    s = study.sensor
    info: dict[str, Any] = {
        "min_elevation_deg": s.min_elevation_deg,
        "max_off_nadir_deg": s.max_off_nadir_deg,
        "min_off_nadir_deg": s.min_off_nadir_deg,
        "look_side": s.look_side,
        "max_range_km": s.max_range_km,
        "duration_h": study.duration_s / 3600.0, "step_s": study.step_s,
        "epoch": study.epoch_iso,
    }
    if study.single_walker:
        t = study.walker
        assert t is not None
        info.update(pattern=t.pattern, total=t.total, planes=t.planes, phasing=t.phasing,
                    altitude_km=t.altitude_km, inclination_deg=t.inclination_deg)
    text = design_caption(info)
    if s.min_sun_elevation_deg is not None:
        text += f" Daylight only: Sun at least {s.min_sun_elevation_deg:g} deg high."
    if not study.single_walker:
        n, g = study.n_satellites, study.n_groups
        text = (f"{n} satellite{'s' if n != 1 else ''} in {g} group{'s' if g != 1 else ''}. "
                + text)
    return text


@dataclass(frozen=True)
class FigureJob:
    """One figure to draw: a ``save_*`` function of :mod:`covergrid.render` and its data.

    ``draw(*data, folder, **options)`` draws the figure and writes its files into ``folder``.
    A job is sent to a helper process as it is (pickled), so ``data`` holds only what the
    figure shows, and ``draw`` is a module-level function.

    Attributes
    ----------
    name : str
        What is drawn, for messages (``"map max_gap"``).
    draw : callable
        :func:`~covergrid.render.save_metric_maps`,
        :func:`~covergrid.render.save_ground_tracks` or
        :func:`~covergrid.render.save_latitude_profile`.
    data : tuple
        The leading positional arguments of ``draw`` (a Dataset, or track arrays).
    options : mapping
        Its keyword arguments (caption, projection, fold ...).
    cells : int
        Grid cells drawn (for the memory bound of the helpers).
    """

    name: str
    draw: Callable[..., list[Path]]
    data: tuple
    options: Mapping[str, Any] = field(default_factory=dict)
    cells: int = 0

    def run(self, folder: Path) -> list[Path]:
        """Draw the figure and write its files into ``folder``; returns the paths."""
        return self.draw(*self.data, folder, **self.options)


def shapely_wkb(geometry: Any) -> bytes:
    """A shapely geometry in well-known binary (a figure job's data must pickle plainly)."""
    import shapely

    return bytes(shapely.to_wkb(geometry))


def figure_jobs(study: ResolvedStudy, ds, verdict: Mapping[str, Any] | None = None, *,
                tracks: FigureJob | None = None) -> list[FigureJob]:
    """The figures a study asks for, from its coverage Dataset, in the order of their files.

    One job per metric of ``maps.metrics`` (per fold ``k`` for ``nfold_fraction``), then the
    ground tracks (in the maps' projection), then the latitude profile of the first four
    metrics (without ``nfold_fraction``). Every figure's title names the study; with a
    requirement, every map and the profile mark where it is not met and end their caption
    with the verdict (:mod:`covergrid.render.marks`; ``verdict`` is the summary's, computed
    from ``ds`` when not given).

    Raises
    ------
    covergrid.errors.CovergridError
        A ValueError subclass: a metric the Dataset does not hold, or an unknown projection
        (raised before anything is drawn).
    """
    from covergrid.render import maps as render_maps
    from covergrid.render import profiles
    from covergrid.render.marks import requirement_mark

    caption = study_caption(study)
    mark = (requirement_mark(study.requirement, ds, verdict)
            if study.requirement is not None else None)
    named = {"requirement": mark, "study": study.name}
    metrics = list(study.maps.metrics)
    render_maps.get_projection(study.maps.projection)
    from covergrid.render.place_maps import save_region_maps

    jobs = []
    cells = int(ds.sizes.get("lat", 0) * ds.sizes.get("lon", 0))
    grid = study.grid
    regional = grid.region is not None or not grid.full_circle
    outline = None if grid.region is None else grid.region.outline()
    outline_wkb = None if outline is None else bytes(shapely_wkb(outline))
    bounds = [n for n in ("lat_bnds", "lon_bnds") if n in ds]
    for metric in metrics:
        if metric in ds.data_vars and "k" in ds[metric].dims:
            folds: list[int | None] = [int(v) for v in ds["k"].values]
        else:
            folds = [None]
        for fold in folds:
            render_maps.metric_field(ds, metric, fold)  # validate before drawing anything
            part = ds[[metric, *bounds]]
            if fold is not None:
                part = part.sel(k=[fold])
            name = f"map {metric}" + (f" k={fold}" if fold is not None else "")
            if regional:
                # a window or region of the globe: drawn on its own extent, with its outline
                jobs.append(FigureJob(name, save_region_maps, (part, [metric]),
                                      {"caption": caption, "k": fold,
                                       "outline_wkb": outline_wkb, **named}, cells))
                continue
            jobs.append(FigureJob(
                name, render_maps.save_metric_maps, (part, [metric]),
                {"caption": caption, "projection": study.maps.projection, "k": fold,
                 **named}, cells))

    jobs.append(track_job(study) if tracks is None else tracks)

    profile = [m for m in metrics if m != "nfold_fraction"][:4] or ["coverage_fraction"]
    for metric in profile:
        render_maps.metric_field(ds, metric, None)
    part = ds[[*profile, "cell_area", *bounds]]
    jobs.append(FigureJob("latitude profile", profiles.save_latitude_profile, (part, profile),
                          {"caption": caption, **named}, cells))
    return jobs


def prepare_job(study: ResolvedStudy) -> FigureJob:
    """What a helper draws first, while the coverage is computed: an empty map frame in the
    study's projection, kept nowhere (:func:`covergrid.render.maps.prepare_drawing`)."""
    from covergrid.render.maps import prepare_drawing

    return FigureJob("drawing set-up", prepare_drawing, (study.maps.projection,))


def track_job(study: ResolvedStudy) -> FigureJob:
    """The ground-track figure of a study; it needs no coverage, so a run draws it while the
    coverage is computed. At most :data:`MAX_TRACKS` satellites (spread over the planes,
    only those propagated) over one orbit of the slowest one, at most the span, in the maps'
    projection."""
    from covergrid.render import ground_track, plane_numbers, save_ground_tracks, track_selection

    elements = study.elements
    period_s = float(np.max(2 * math.pi * np.sqrt(np.asarray(elements.a_km) ** 3
                                                   / MU_EARTH_KM3_S2)))
    shown_s = min(period_s, study.duration_s)
    t_s = np.linspace(0.0, shown_s, TRACK_SAMPLES)
    planes = plane_numbers(elements)
    shown = track_selection(planes, MAX_TRACKS)
    drawn = elements if shown.size == len(elements) else elements.subset(shown)
    lat, lon = ground_track(drawn, study.epoch, t_s)
    title = (f"Ground tracks over the first {shown_s / 60:.0f} min"
             + (" (one orbit)" if shown_s < study.duration_s else "")
             + (f" ({shown.size} of {len(elements)} satellites)"
                if shown.size < len(elements) else ""))
    return FigureJob("ground tracks", save_ground_tracks, (lat, lon),
                     {"caption": study_caption(study), "title": title, "ids": drawn.ids,
                      "planes": planes[shown], "max_sats": MAX_TRACKS,
                      "projection": study.maps.projection, "study": study.name})


def _usable_cpus() -> int:
    try:
        return len(os.sched_getaffinity(0))
    except (AttributeError, OSError):  # not on Linux
        return os.cpu_count() or 1


def _idle_cpus(cpus: int) -> float:
    """CPUs not busy with other work: the CPU count less the 1-minute load average."""
    try:
        return cpus - os.getloadavg()[0]
    except (AttributeError, OSError):  # no load average on this system
        return float(cpus)


def figure_processes_at_most(compute: ComputeOptions, n_jobs: int) -> int:
    """The most processes that may draw ``n_jobs`` figures (this one included): one per
    :data:`JOBS_PER_PROCESS` jobs, per usable CPU and at most ``compute.workers``; 1 with
    ``compute.scheduler: synchronous``."""
    if compute.scheduler == "synchronous" or n_jobs <= 1:
        return 1
    n = min(n_jobs // JOBS_PER_PROCESS, _usable_cpus())
    if compute.workers is not None:
        n = min(n, int(compute.workers))
    return max(n, 1)


def draw_figures(jobs: Sequence[FigureJob], folder: str | os.PathLike, *,
                 workers: int = 1) -> list[Path]:
    """Draw figure jobs into ``folder``, concurrently when ``workers`` > 1.

    This process takes jobs from the front of the queue while ``workers - 1`` helper
    processes (:class:`~covergrid.pipeline.figure_pool.FigurePool`) take them from the back,
    so no core waits while a helper starts; the files come back in the order of the jobs. If
    a job fails, no new job starts, and the first error is raised once the jobs already
    running have ended.

    Parameters
    ----------
    jobs : sequence of FigureJob
        From :func:`figure_jobs`.
    folder : path-like
        The study's output folder; every file is written inside it.
    workers : int
        Processes drawing at once, this one included.

    Returns
    -------
    list of pathlib.Path
        Every file written, in the order of the jobs.
    """
    from covergrid.pipeline.figure_pool import FigurePool

    jobs = list(jobs)
    with FigurePool(min(int(workers), len(jobs)) - 1) as pool:
        pool.submit(jobs, folder)
        return pool.collect(jobs, here=True)


def figure_count(study: ResolvedStudy) -> int:
    """Figures a run of the study draws: one map per metric (per fold for
    ``nfold_fraction``), the ground tracks and the latitude profile."""
    return sum(study.nfold_max if m == "nfold_fraction" else 1
               for m in study.maps.metrics) + 2


def figure_helpers_at_most(compute: ComputeOptions, n_jobs: int) -> int:
    """The most helper processes a run may start for ``n_jobs`` figures: 0 when at most
    one process may draw (:func:`figure_processes_at_most`), else that many (this process
    then draws none). The memory estimate counts this many."""
    n = figure_processes_at_most(compute, n_jobs)
    return n if n >= 2 else 0


def figure_helpers(study: ResolvedStudy) -> int:
    """Helper processes a run starts, before computing, to draw its figures (0: this
    process draws them after computing).

    None when at most one process may draw (:func:`figure_helpers_at_most`:
    ``compute.scheduler: synchronous``, ``compute.workers: 1``, one usable CPU or fewer than
    2 x :data:`JOBS_PER_PROCESS` figures); otherwise one per CPU left idle by other work (the
    CPU count less the 1-minute load average, rounded) and one for the CPU of this process,
    which draws none; at least one and at most that bound,
    and no more than the memory available holds (:data:`HELPER_BASE_BYTES` plus
    :data:`HELPER_BYTES_PER_CELL` per cell each). This process then draws none: a helper
    imports the drawing libraries and draws the ground tracks while the coverage is
    computed (the coverage kernel leaves a core free part of the time), so even one helper
    takes that work off the path from start to exit.
    """
    from covergrid.pipeline.resources import available_memory_bytes

    at_most = figure_helpers_at_most(study.compute, figure_count(study))
    if at_most == 0:
        return 0
    n = min(at_most, max(round(_idle_cpus(_usable_cpus())) + 1, 1))
    available = available_memory_bytes()
    if available is not None:
        per_helper = HELPER_BASE_BYTES + HELPER_BYTES_PER_CELL * study.grid.n_cells
        n = min(n, int(available // per_helper))
    return max(n, 0)


def write_figures(study: ResolvedStudy, ds, folder: Path,
                  verdict: Mapping[str, Any] | None = None, *, pool=None,
                  tracks: FigureJob | None = None) -> list[Path]:
    """Draw every figure of a computed study into ``folder`` (see the module docstring).

    ``pool`` (a :class:`~covergrid.pipeline.figure_pool.FigurePool`) draws them, with
    ``tracks`` the ground-track job already submitted to it (:func:`track_job`); without one
    a pool of :func:`figure_helpers` helpers is made here.
    """
    jobs = figure_jobs(study, ds, verdict, tracks=tracks)
    if pool is not None:
        pool.submit(jobs, folder)
        return pool.collect(jobs)
    return draw_figures(jobs, folder, workers=max(figure_helpers(study), 1))
