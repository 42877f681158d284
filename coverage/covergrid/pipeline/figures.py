"""The figures of a run: which ones a study asks for, drawn concurrently, with its caption.

:func:`study_caption` states the design, the sensor limits and the span. :func:`figure_jobs`
lists the figures of a computed study: one job per metric map (and per fold of
``nfold_fraction``), the ground tracks and the latitude profile, each holding only the data it
draws. :func:`draw_figures` draws them: this process and up to ``workers - 1`` helper
processes take jobs from one queue (:func:`figure_workers` says how many: at most the CPUs
this process may use, ``compute.workers`` when the study sets it, and what the memory
available allows; ``compute.scheduler: synchronous`` draws everything here, one after the
other). :func:`write_figures` does both.

Every job writes its PNG and PDF atomically into the folder it is given
(:func:`covergrid.render.style.save_png_and_pdf`) and nowhere else. Figures are drawn on this
machine even when the coverage ran on a dask cluster: its workers need not see the output
folder.
"""

from __future__ import annotations

import collections
import contextlib
import math
import os
import pickle
import signal
import struct
import subprocess
import sys
import threading
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
    "figure_processes_at_most",
    "figure_workers",
    "serve_figure_jobs",
    "study_caption",
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


def figure_jobs(study: ResolvedStudy, ds, verdict: Mapping[str, Any] | None = None
                ) -> list[FigureJob]:
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
    from covergrid.render import (
        ground_track,
        plane_numbers,
        profiles,
        save_ground_tracks,
        track_selection,
    )
    from covergrid.render import maps as render_maps
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

    elements = study.elements
    period_s = float(np.max(2 * math.pi * np.sqrt(np.asarray(elements.a_km) ** 3
                                                   / MU_EARTH_KM3_S2)))
    shown_s = min(period_s, study.duration_s)
    t_s = np.linspace(0.0, shown_s, TRACK_SAMPLES)
    # only the satellites drawn are propagated (at most MAX_TRACKS, every plane kept)
    planes = plane_numbers(elements)
    shown = track_selection(planes, MAX_TRACKS)
    drawn = elements if shown.size == len(elements) else elements.subset(shown)
    lat, lon = ground_track(drawn, study.epoch, t_s)
    title = (f"Ground tracks over the first {shown_s / 60:.0f} min"
             + (" (one orbit)" if shown_s < study.duration_s else "")
             + (f" ({shown.size} of {len(elements)} satellites)"
                if shown.size < len(elements) else ""))
    jobs.append(FigureJob("ground tracks", save_ground_tracks, (lat, lon),
                          {"caption": caption, "title": title, "ids": drawn.ids,
                           "planes": planes[shown], "max_sats": MAX_TRACKS,
                           "projection": study.maps.projection, "study": study.name}))

    profile = [m for m in metrics if m != "nfold_fraction"][:4] or ["coverage_fraction"]
    for metric in profile:
        render_maps.metric_field(ds, metric, None)
    part = ds[[*profile, "cell_area", *bounds]]
    jobs.append(FigureJob("latitude profile", profiles.save_latitude_profile, (part, profile),
                          {"caption": caption, **named}, cells))
    return jobs


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
    ``compute.scheduler: synchronous``. The memory estimate counts this many."""
    if compute.scheduler == "synchronous" or n_jobs <= 1:
        return 1
    n = min(n_jobs // JOBS_PER_PROCESS, _usable_cpus())
    if compute.workers is not None:
        n = min(n, int(compute.workers))
    return max(n, 1)


def figure_workers(study: ResolvedStudy, jobs: Sequence[FigureJob]) -> int:
    """How many processes draw the figures: this one plus the helpers (at least 1).

    At most one per :data:`JOBS_PER_PROCESS` jobs, one per CPU this process may use, and
    one per CPU left idle by other work (the CPU count less the 1-minute load average,
    rounded: on a busy machine a helper would only take time from this process); at most
    ``compute.workers`` when the study sets it; 1 with ``compute.scheduler: synchronous``;
    and no more helpers than the memory available holds (:data:`HELPER_BASE_BYTES` plus
    :data:`HELPER_BYTES_PER_CELL` per cell each).
    """
    from covergrid.pipeline.resources import available_memory_bytes

    n = min(figure_processes_at_most(study.compute, len(jobs)),
            round(_idle_cpus(_usable_cpus())))
    available = available_memory_bytes()
    if available is not None:
        per_helper = HELPER_BASE_BYTES + HELPER_BYTES_PER_CELL * max(j.cells for j in jobs)
        n = min(n, 1 + int(available // per_helper))
    return max(n, 1)


def _send(stream, obj: Any) -> None:
    data = pickle.dumps(obj, protocol=pickle.HIGHEST_PROTOCOL)
    stream.write(struct.pack("<Q", len(data)))
    stream.write(data)
    stream.flush()


def _receive(stream) -> Any:
    head = stream.read(8)
    if len(head) < 8:
        raise EOFError("the other end closed the pipe")
    (size,) = struct.unpack("<Q", head)
    return pickle.loads(stream.read(size))


def serve_figure_jobs() -> None:
    """The loop of a helper process: draw each job sent on stdin, answer on stdout.

    Started by :func:`draw_figures` as ``python -c`` (a fresh interpreter that imports nothing
    of the caller's program, so a script calling :func:`covergrid.run` needs no
    ``if __name__ == "__main__"`` guard). Messages are pickles, each preceded by its length;
    an answer is ``("done", paths)`` or ``("error", exception)``. Anything the drawing code
    prints goes to stderr. Ends when stdin closes.
    """
    import matplotlib

    matplotlib.use("Agg")
    import covergrid.render  # noqa: F401  (matplotlib, cartopy and the bundled coast)

    answers = os.fdopen(os.dup(1), "wb")
    os.dup2(2, 1)  # stray prints must not corrupt the answers
    jobs = sys.stdin.buffer
    try:
        while True:
            try:
                job, folder = _receive(jobs)
            except EOFError:
                return
            try:
                answer: tuple[str, Any] = ("done", job.run(folder))
            except Exception as exc:  # sent back and raised by the caller
                answer = ("error", exc)
            try:
                _send(answers, answer)
            except (pickle.PicklingError, TypeError, AttributeError):
                _send(answers, ("error", RuntimeError(f"{job.name}: {answer[1]!r}")))
    except KeyboardInterrupt:  # the caller was interrupted; the partial file is gone
        return


class _Helper:
    """One helper process drawing figure jobs (see :func:`serve_figure_jobs`)."""

    def __init__(self) -> None:
        self.proc = subprocess.Popen(
            [sys.executable, "-c",
             "from covergrid.pipeline.figures import serve_figure_jobs; serve_figure_jobs()"],
            stdin=subprocess.PIPE, stdout=subprocess.PIPE)

    def run(self, job: FigureJob, folder: Path) -> list[Path]:
        assert self.proc.stdin is not None and self.proc.stdout is not None
        try:
            _send(self.proc.stdin, (job, folder))
            kind, value = _receive(self.proc.stdout)
        except (EOFError, BrokenPipeError):
            code = self.proc.wait()
            raise RuntimeError(f"the process drawing the {job.name} figure ended "
                               f"(exit status {code})") from None
        if kind == "error":
            raise value
        return value

    def close(self, interrupt: bool) -> None:
        """Let the helper end (after an interrupt, stop its drawing first)."""
        if interrupt and self.proc.poll() is None:
            self.proc.send_signal(signal.SIGINT)  # its files are removed as it unwinds
        with contextlib.suppress(OSError):
            assert self.proc.stdin is not None
            self.proc.stdin.close()
        try:
            self.proc.wait(timeout=_HELPER_EXIT_S)
        except subprocess.TimeoutExpired:
            self.proc.kill()
            self.proc.wait()
        if self.proc.stdout is not None:
            self.proc.stdout.close()


#: How long a helper may take to end once asked [s] (a figure takes well under a second).
_HELPER_EXIT_S = 30.0


def draw_figures(jobs: Sequence[FigureJob], folder: str | os.PathLike, *,
                 workers: int = 1) -> list[Path]:
    """Draw figure jobs into ``folder``, concurrently when ``workers`` > 1.

    This process takes jobs from the front of the queue while ``workers - 1`` helper
    processes (fresh interpreters, :func:`serve_figure_jobs`) take them from the back, so no
    core waits while a helper starts; the files come back in the order of the jobs. If a job
    fails, no new job starts, and the first error is raised once the jobs already running
    have ended.

    Parameters
    ----------
    jobs : sequence of FigureJob
        From :func:`figure_jobs`.
    folder : path-like
        The study's output folder; every file is written inside it.
    workers : int
        Processes drawing at once, this one included (:func:`figure_workers`).

    Returns
    -------
    list of pathlib.Path
        Every file written, in the order of the jobs.
    """
    folder = Path(os.fspath(folder)).absolute()
    jobs = list(jobs)
    n_helpers = min(int(workers), len(jobs)) - 1
    if n_helpers <= 0:
        return [p for job in jobs for p in job.run(folder)]

    results: list[list[Path]] = [[] for _ in jobs]
    queue = collections.deque(range(len(jobs)))
    lock = threading.Lock()
    errors: list[BaseException] = []

    def take(front: bool) -> int | None:
        with lock:
            if not queue or errors:
                return None
            return queue.popleft() if front else queue.pop()

    def fail(exc: BaseException) -> None:
        with lock:
            errors.append(exc)
            queue.clear()

    def keep_busy(helper: _Helper) -> None:
        """Give one helper the jobs at the back of the queue, one at a time."""
        while (index := take(front=False)) is not None:
            try:
                results[index] = helper.run(jobs[index], folder)
            except BaseException as exc:  # re-raised by the thread that draws here
                fail(exc)

    helpers: list[_Helper] = []
    interrupted = False
    try:
        helpers = [_Helper() for _ in range(n_helpers)]
        threads = [threading.Thread(target=keep_busy, args=(h,), daemon=True,
                                    name=f"covergrid-figures-{n}")
                   for n, h in enumerate(helpers)]
        for thread in threads:
            thread.start()
        while (index := take(front=True)) is not None:
            try:
                results[index] = jobs[index].run(folder)
            except Exception as exc:
                fail(exc)
        for thread in threads:
            thread.join()
    except BaseException:  # KeyboardInterrupt: stop the helpers too
        interrupted = True
        fail(KeyboardInterrupt())
        raise
    finally:
        for helper in helpers:
            helper.close(interrupted)
    if errors:
        raise errors[0]
    return [p for files in results for p in files]


def write_figures(study: ResolvedStudy, ds, folder: Path,
                  verdict: Mapping[str, Any] | None = None) -> list[Path]:
    """Draw every figure of a computed study into ``folder`` (see the module docstring)."""
    jobs = figure_jobs(study, ds, verdict)
    return draw_figures(jobs, folder, workers=figure_workers(study, jobs))
