"""Batch trade studies: every combination of altitude, inclination, T/P/F and elevation.

A *design* (:class:`~covergrid.trade.designs.WalkerDesign`) is one Walker constellation with
one sensor elevation limit. Each design is one engine call on the study with the design's
values substituted, run as a single latitude band (one task per design) so that the
parallelism is across designs; its result reduces to one *row*
(:func:`covergrid.trade.evaluate.evaluate_design`): the parameters, the area-weighted
statistics of every metric and, when the study states a requirement, its verdict.

Designs run concurrently on the study's scheduler (threads, processes, synchronous, a local
dask.distributed cluster or an existing scheduler's address): each is submitted as one
future and, as soon as it finishes, its row is written to the
:class:`~covergrid.trade.store.ResultStore` under a key hashing every input that decides it
(:meth:`~covergrid.trade.designs.EvalContext.inputs`). A rerun skips the designs already
stored; an interrupted run loses only the designs still running.

Outputs of ``covergrid sweep`` (:func:`run_sweep`) in ``DIR/<study>/``: ``sweep.csv`` and
``sweep.nc`` (one row / one point on dimension ``design`` per design), ``store/`` (the
per-design records) and ``trades/sweep/`` (trade figures, PNG 200 dpi and PDF).
"""

from __future__ import annotations

import os
from dataclasses import dataclass
from pathlib import Path
from typing import TYPE_CHECKING, Any

from covergrid import io
from covergrid.pipeline.resources import check_trade_resources
from covergrid.study.build import as_resolved
from covergrid.trade.figures import trade_figures
from covergrid.trade.runner import design_runner, run_designs
from covergrid.trade.space import designs_caption, evaluation_context, sweep_designs
from covergrid.trade.store import MemoryStore, ResultStore
from covergrid.trade.tables import write_table

if TYPE_CHECKING:
    from covergrid.study.build import ResolvedStudy
    from covergrid.study.models import Study

__all__ = ["SweepResult", "run_sweep"]


@dataclass
class SweepResult:
    """What :func:`run_sweep` produced.

    Attributes
    ----------
    rows : list of dict
        One row per design, in design order (columns
        :func:`~covergrid.trade.evaluate.row_columns`).
    computed : int
        Designs computed in this run (the others were read from the store).
    out_dir : pathlib.Path or None
        The study's output folder.
    files : list of pathlib.Path
        Files written (not counting the store records).
    """

    rows: list[dict]
    computed: int
    out_dir: Path | None = None
    files: list[Path] | None = None


def run_sweep(study: ResolvedStudy | Study, out_dir: str | os.PathLike | None = None, *,
              scheduler: str | None = None, progress: bool = False,
              figures: bool = True, force: bool = False, report: bool = True) -> SweepResult:
    """Evaluate every design of the study's sweep block; write the table and figures.

    Parameters
    ----------
    study : ResolvedStudy or Study
        A study with a ``sweep:`` block (resolved here once if not yet).
    out_dir : path-like, optional
        Output root; outputs go to ``out_dir/<study>/`` (the store to
        ``out_dir/<study>/store/``). Without it the store is kept in memory only.
    scheduler : str, optional
        Overrides ``compute.scheduler``.
    progress : bool
        Show a progress bar with ETA.
    figures : bool
        Draw the trade figures.
    force : bool
        Run even if the memory estimate exceeds the limit.
    report : bool
        Write ``report.html`` (with ``out_dir``).

    Returns
    -------
    SweepResult

    Notes
    -----
    The output folder is written whole (:class:`covergrid.io.ResultFolder`): the table,
    figures and resolved study of one sweep replace the earlier ones at once, while the
    store's records are written in place as designs finish and carried over.
    """
    study = as_resolved(study)
    check_trade_resources(study, "sweep", force=force)
    designs = sweep_designs(study)
    context = evaluation_context(study)
    if out_dir is None:
        store: Any = MemoryStore()
        rows, computed = _evaluate(study, designs, context, store, scheduler, progress)
        return SweepResult(rows, computed)
    with io.ResultFolder(out_dir, study.name, carry=("store",)) as folder:
        store = ResultStore(folder.target / "store")
        rows, computed = _evaluate(study, designs, context, store, scheduler, progress)
        files = write_table(rows, study, folder.path, "sweep")
        files.append(io.write_text(study.resolved_yaml, folder.path / "study.resolved.yaml"))
        if figures:
            files += trade_figures(rows, study, folder.path / "trades" / "sweep",
                                   caption=designs_caption(study, designs, "Sweep"))
        if report:
            files.append(_report(study, rows, files, folder.path))
        files = [folder.final(f) for f in files]
    return SweepResult(rows, computed, folder.target, files)


def _report(study: ResolvedStudy, rows: list[dict], files: list[Path], folder: Path) -> Path:
    """``report.html`` of a sweep: how many designs meet the requirement, the best designs,
    every trade figure, the study and provenance."""
    from covergrid.pipeline import report

    verdict, notes = None, []
    line = report.requirement_line(study)
    if line is not None:
        met = sum(1 for r in rows if r.get("meets") is True)
        verdict = {"met": met > 0, "text": f"{met} of {len(rows)} designs meet the "
                   f"requirement: {line}."}
    else:
        notes.append("The study states no requirement: the designs are compared on the "
                     "area-weighted statistics in sweep.csv.")
    table = report.design_table(rows, study, "Designs", csv_name="sweep.csv")
    context = report.report_context(study, "sweep", files, folder, verdict=verdict,
                                    tables=[table], notes=notes)
    return report.write_report(folder, context)


def _evaluate(study, designs, context, store, scheduler, progress) -> tuple[list[dict], int]:
    with design_runner(study.compute, scheduler) as runner:
        return run_designs(designs, context, store, runner, progress=progress,
                           desc=f"sweep {study.name}")
