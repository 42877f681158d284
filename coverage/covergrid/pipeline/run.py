"""The run pipeline: resolved study -> coverage Dataset -> summaries and files.

``run_study`` resolves a study once (:func:`covergrid.study.build.resolve`), refuses it up
front if its memory estimate is over the limit (:mod:`covergrid.pipeline.resources`),
computes the coverage Dataset on the study's scheduler (:mod:`covergrid.pipeline.schedulers`)
and, given an
output folder, writes every output:

    DIR/<study>/coverage.nc           CF-1.8 netCDF of every metric
    DIR/<study>/summary.json, .csv    area-weighted global and per-band statistics, verdict
    DIR/<study>/passes.csv            every pass over every point target (with targets)
    DIR/<study>/targets.csv           per-target statistics (with targets)
    DIR/<study>/study.resolved.yaml   the study with every default filled in
    DIR/<study>/maps/...              figures (when maps are on)
    DIR/<study>/report.html           one self-contained document of all of it

Nothing is written before the study is valid and the resources suffice. The output folder
is then taken for the run (its lock, before computing: a second run of the same study into
the same folder is refused at once) and every file is written into a staging folder that
replaces ``DIR/<study>/`` whole once all are written (:class:`covergrid.io.ResultFolder`),
so the folder never holds files of two runs: an interrupted or failed run leaves the
earlier results as they were, and a run with other maps (or none) leaves no old map.
"""

from __future__ import annotations

import contextlib
import dataclasses
import datetime as _dt
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from covergrid import __version__
from covergrid.pipeline.resources import check_resources
from covergrid.pipeline.schedulers import open_scheduler
from covergrid.study.build import ResolvedStudy, resolve
from covergrid.study.loading import load_study, with_overrides
from covergrid.study.models import Study
from covergrid.study.sections import check_scheduler

__all__ = [
    "RunResult",
    "dataset_attrs",
    "resolve_for_run",
    "run",
    "run_study",
    "summarise_study",
    "write_outputs",
    "write_study_files",
]


@dataclass
class RunResult:
    """What :func:`run_study` produced.

    Attributes
    ----------
    dataset : xarray.Dataset
        The coverage metrics on (lat, lon) (engine contract).
    summary : dict
        :func:`covergrid.compute.summary.summarise` result (with the requirement verdict).
    out_dir : pathlib.Path or None
        The study's output folder, when outputs were written.
    files : list of pathlib.Path
        Every file written.
    targets : dict or None
        :func:`covergrid.compute.targets.evaluate_targets` result, with point targets.
    """

    dataset: Any
    summary: dict
    out_dir: Path | None = None
    files: list[Path] = field(default_factory=list)
    targets: dict | None = None

    @property
    def requirement_met(self) -> bool | None:
        """The verdicts together (the grid's and the targets'), or None when the study
        states no requirement."""
        verdicts = [v for v in (self.summary.get("requirement"),
                                (self.summary.get("targets") or {}).get("requirement"))
                    if v is not None]
        return None if not verdicts else all(bool(v["met"]) for v in verdicts)


def resolve_for_run(study: Study | ResolvedStudy, scheduler: str | None = None) -> ResolvedStudy:
    """The resolved study, with ``compute.scheduler`` replaced by ``scheduler`` if given.

    Raises
    ------
    StudyError
        If the scheduler override is not a scheduler name or address (``--scheduler``).
    """
    if isinstance(study, ResolvedStudy):
        if scheduler is None:
            return study
        try:
            check_scheduler(scheduler)
        except ValueError as exc:
            from covergrid.errors import StudyError

            raise StudyError(str(exc), field="--scheduler") from None
        return dataclasses.replace(study, compute=dataclasses.replace(study.compute,
                                                                      scheduler=scheduler))
    if scheduler is not None:
        study = with_overrides(study, {"compute.scheduler": scheduler}, source="--scheduler")
    return resolve(study)


def summarise_study(study: ResolvedStudy, ds, targets: dict | None = None) -> dict[str, Any]:
    """Summaries of a coverage Dataset with the study's band width and requirement, and of
    the point targets' statistics when given."""
    from covergrid.compute.metrics import MODEL_LIMITS
    from covergrid.compute.summary import summarise

    out = summarise(ds, band_width_deg=study.band_width_deg, requirement=study.requirement)
    summary = {"study": study.name, "covergrid_version": __version__,
               "model_limits": MODEL_LIMITS, **out}
    if targets is not None and study.targets is not None:
        from covergrid.pipeline.target_outputs import target_summary

        summary["targets"] = target_summary(study, targets)
    return summary


def write_study_files(study: ResolvedStudy, ds, folder: Path, *, maps: bool = True,
                      summary: dict | None = None, report: bool = True,
                      targets: dict | None = None, figures=None,
                      tracks=None) -> tuple[list[Path], dict]:
    """Write every output file of a computed study into ``folder`` (a staging folder):
    the data files (with point targets, their tables and variables), the figures (``maps``)
    and last ``report.html`` (``report``), which embeds the figures written before it.

    With ``figures``, a :class:`~covergrid.pipeline.figure_pool.FigurePool` (and ``tracks``,
    the ground-track job already given to it), the figures are queued first and drawn by its
    helpers while this process writes the data files.

    Returns
    -------
    tuple
        (the files written, the summary).
    """
    from covergrid import io
    from covergrid.compute.summary import CSV_COLUMNS, summary_rows

    summary = summarise_study(study, ds, targets) if summary is None else summary
    if targets is not None and study.targets is not None:
        from covergrid.pipeline.target_outputs import target_dataset

        ds = ds.merge(target_dataset(study, targets))
    figure_jobs = None
    if maps and figures is not None:
        from covergrid.pipeline.figures import figure_jobs as list_figures

        figure_jobs = list_figures(study, ds, summary.get("requirement"), tracks=tracks)
        figures.submit(figure_jobs, folder)  # drawn by the helpers while the data are written
    files = [
        io.write_netcdf(ds, folder / "coverage.nc"),
        io.write_json(summary, folder / "summary.json"),
        io.write_csv(summary_rows(summary), folder / "summary.csv", CSV_COLUMNS),
        io.write_text(study.resolved_yaml, folder / "study.resolved.yaml"),
    ]
    if targets is not None and study.targets is not None:
        from covergrid.pipeline.target_outputs import write_target_tables

        files += write_target_tables(study, targets, folder)
    if maps:
        if figure_jobs is not None:
            files += figures.collect(figure_jobs)
        else:
            from covergrid.pipeline.figures import write_figures

            files += write_figures(study, ds, folder, summary.get("requirement"))
        if targets is not None and study.targets is not None:
            from covergrid.pipeline.target_outputs import write_target_maps

            files += write_target_maps(study, ds, targets, folder)
    if report:
        from covergrid.pipeline import report as run_report

        tables: list[dict] = []
        notes: list[str] = []
        if targets is not None and study.targets is not None:
            from covergrid.pipeline.target_outputs import report_parts

            table, notes = report_parts(study, targets, summary)
            tables.append(table)
        context = run_report.report_context(
            study, "run", files, folder, summary=summary,
            verdict=run_report.run_verdict(summary.get("requirement")), tables=tables,
            notes=notes)
        files.append(run_report.write_report(folder, context))
    return files, summary


def write_outputs(study: ResolvedStudy, ds, out_root: str | Path, *, maps: bool = True,
                  summary: dict | None = None, report: bool = True
                  ) -> tuple[Path, list[Path], dict]:
    """Write every output of a computed study into ``out_root/<study>/``, replacing the
    folder whole (:class:`covergrid.io.ResultFolder`).

    Returns
    -------
    tuple
        (the study folder, the files written (final paths), the summary).
    """
    from covergrid import io

    with io.ResultFolder(out_root, study.name) as folder:
        files, summary = write_study_files(study, ds, folder.path, maps=maps, summary=summary,
                                           report=report)
        files = [folder.final(f) for f in files]
    return folder.target, files, summary


def dataset_attrs(study: ResolvedStudy) -> dict[str, Any]:
    """Global attributes a run adds to its Dataset: title, history and the resolved study."""
    now = _dt.datetime.now(_dt.timezone.utc).replace(microsecond=0).isoformat()
    return {
        "title": f"covergrid coverage metrics: study {study.name}",
        "history": f"{now.replace('+00:00', 'Z')} covergrid {__version__} run of study "
                   f"{study.name}",
        "covergrid_study_name": study.name,
        "covergrid_study": study.resolved_yaml,
    }


def run_study(study: Study | ResolvedStudy, out_dir: str | Path | None = None, *,
              progress: bool = False, scheduler: str | None = None, maps: bool = True,
              force: bool = False, report: bool = True) -> RunResult:
    """Compute a study, summarise it and (given ``out_dir``) write every output.

    Parameters
    ----------
    study : Study or ResolvedStudy
        A validated study (:func:`covergrid.load_study`), resolved here once, or one
        already resolved (:func:`covergrid.resolve`).
    out_dir : path-like, optional
        Output root; outputs go to ``out_dir/<study>/``.
    progress : bool
        Show a progress bar.
    scheduler : str, optional
        Overrides ``compute.scheduler``.
    maps : bool
        Draw the figures (when writing outputs).
    force : bool
        Run even if the memory estimate exceeds the limit (the work limits still hold).
    report : bool
        Write ``report.html`` (when writing outputs).

    Returns
    -------
    RunResult

    Raises
    ------
    StudyError, ResourceError, OutputRefused
        Before any work: bad input, work or memory over the limits, an output folder that
        cannot be taken (another run writing it, a link or a file in the way).
    OutputError
        While writing (disk full ...): the earlier results are kept.
    """
    from covergrid import io

    resolved = resolve_for_run(study, scheduler)
    check_resources(resolved, maps=maps and out_dir is not None, force=force)
    if out_dir is None:
        ds = _compute(resolved, progress)
        targets = _compute_targets(resolved, progress)
        return RunResult(ds, summarise_study(resolved, ds, targets), targets=targets)
    with (io.ResultFolder(out_dir, resolved.name) as folder,  # taken before computing
          _figure_pool(resolved, maps) as pool):
        tracks = None
        if pool is not None:  # the ground tracks need no coverage: drawn while computing
            from covergrid.pipeline.figures import track_job

            tracks = track_job(resolved)
            pool.submit([tracks], folder.path)
        ds = _compute(resolved, progress)
        targets = _compute_targets(resolved, progress)
        summary = summarise_study(resolved, ds, targets)
        files, summary = write_study_files(resolved, ds, folder.path, maps=maps,
                                           summary=summary, report=report,
                                           targets=targets, figures=pool, tracks=tracks)
        files = [folder.final(f) for f in files]
    return RunResult(ds, summary, folder.target, files, targets)


@contextlib.contextmanager
def _figure_pool(resolved: ResolvedStudy, maps: bool):
    """The helper processes drawing a run's figures, started before computing so that
    they import the drawing libraries and draw an empty map frame meanwhile; None when
    this process draws them (:func:`covergrid.pipeline.figures.figure_helpers`) or no
    figure is drawn."""
    if not maps:
        yield None
        return
    from covergrid.pipeline.figure_pool import FigurePool
    from covergrid.pipeline.figures import figure_helpers, prepare_job

    helpers = figure_helpers(resolved)
    if helpers == 0:
        yield None
        return
    with FigurePool(helpers, prepare=prepare_job(resolved)) as pool:
        yield pool


def _compute_targets(resolved: ResolvedStudy, progress: bool) -> dict | None:
    """The passes and statistics of the study's point targets, or None."""
    if resolved.targets is None:
        return None
    from covergrid.compute.targets import evaluate_targets
    from covergrid.earth.time import gmst_rad

    return evaluate_targets(resolved.elements, float(gmst_rad(resolved.epoch, 0.0)),
                            resolved.duration_s, resolved.step_s, resolved.targets,
                            resolved.sensor, refine=resolved.refine_transitions,
                            progress=progress)


def _compute(resolved: ResolvedStudy, progress: bool):
    """The coverage Dataset of a resolved study on its scheduler."""
    from covergrid.compute.engine import compute_coverage

    with open_scheduler(resolved.compute) as sched:
        return compute_coverage(
            resolved.elements, resolved.epoch, resolved.duration_s, resolved.step_s,
            resolved.grid, resolved.sensor, nfold_max=resolved.nfold_max,
            chunk_rows=resolved.compute.chunk_rows, scheduler=sched, progress=progress,
            attrs=dataset_attrs(resolved), refine_transitions=resolved.refine_transitions,
            dop=resolved.dop,
        )


def run(study: Study | ResolvedStudy | str | Path, out_dir: str | Path | None = None,
        progress: bool = False, **kwargs: Any):
    """Compute a study's coverage Dataset; given ``out_dir``, also write every output.

    Parameters
    ----------
    study : Study, ResolvedStudy or path-like
        A validated study, a resolved one, or the path of a study file.
    out_dir : path-like, optional
        Output root; outputs go to ``out_dir/<study>/``.
    progress : bool
        Show a progress bar.
    **kwargs
        ``scheduler``, ``maps``, ``force``, ``report`` of :func:`run_study`.

    Returns
    -------
    xarray.Dataset
        Per-cell metrics (see the outputs reference).
    """
    if not isinstance(study, (Study, ResolvedStudy)):
        study = load_study(study)
    return run_study(study, out_dir, progress=progress, **kwargs).dataset
