"""Sizing: the smallest Walker constellation meeting the study's requirement.

For each altitude and inclination of the ``sizing:`` block, totals T are tried in
increasing order from ``total.min`` to ``total.max``; at each total every allowed
(planes, phasing) pair is a candidate. The search at that altitude and inclination stops at
the first total with a candidate that meets the requirement (evaluated at the study's full
resolution). Among the candidates of that total that meet it, the answer is the one with
the fewest planes (cheaper to launch), then the largest margin (the "best phasing"), then
the smallest phasing (so the answer is deterministic when margins tie, as they do for
integer-valued metrics). Across altitudes and inclinations, ``best`` is the smallest total,
then fewer planes, then the larger margin, then the lower altitude and inclination.

Coarse-to-fine pruning
----------------------
With ``prune: true`` (the default) each candidate is first evaluated on the cheaper
``coarse`` grid and step (by default twice the cell size and twice the step: about 8 times
fewer satellite-sample-cell visits). A candidate is **pruned** (not evaluated at full
resolution) when, coarsely, the share of the area meeting the requirement's threshold is
below ``requirement.area_fraction - coarse.area_tolerance`` (default tolerance 0.02 of the
area). The share is used, not the metric's value, because it is continuous for every metric
(also for integer metrics such as ``min_in_view``, where a value margin is a whole number)
and it changes only where cells lie near the threshold, which is what a coarser sampling
moves. The rule is not a proof: a design that passes at full resolution could in principle
be pruned if its coarse evaluation misses the threshold over more than the tolerance. The
tests check, on published patterns near their coverage limit, that no design passing at
full resolution falls below the tolerance coarsely; raise the tolerance (or set
``prune: false``) for requirements on short gaps sampled near the coarse step.

Robustness to one loss
----------------------
With ``robust_to_one_loss: true`` a candidate that meets the requirement intact counts only
if it still meets it after losing its worst single satellite; the reported achieved value
and margin are those of the worst loss, and ``worst_loss`` names the satellite. In a Walker
delta pattern every satellite is carried onto every other by the pattern's symmetry (a
rotation of 360/P deg in RAAN with a shift of 360 F/T deg in argument of latitude, or a
shift of 360/S deg within a plane), which is the same constellation seen at another Earth
rotation angle and time. Over a finite span the Earth's rotation breaks that equivalence,
but only through where on the ground the pattern's geometry falls, so by default
(``loss_cases: one_per_plane``) the loss of the first satellite of each plane is evaluated
(P runs per candidate instead of T) as representatives; ``loss_cases: all`` evaluates every
satellite (exact, T runs). Loss cases are evaluated at full resolution, and only for
candidates that meet the requirement intact.

Outputs of ``covergrid size`` (:func:`run_sizing`) in ``DIR/<study>/``: ``sizing.csv`` (one
row per altitude and inclination), ``sizing.json`` (``best``, every result, the search
statistics and the rules above), ``sizing_designs.csv``/``.nc`` (every full-resolution
evaluation), ``store/`` (per-design records, shared with ``covergrid sweep``) and
``trades/sizing/`` (trade figures).
"""

from __future__ import annotations

import dataclasses
import math
import os
from dataclasses import dataclass, field, replace
from pathlib import Path
from typing import TYPE_CHECKING, Any

from covergrid import __version__, io
from covergrid.compute.span import count_steps
from covergrid.errors import CovergridError, StudyError
from covergrid.orbits.walker import walker_options
from covergrid.pipeline.resources import check_trade_resources
from covergrid.study.build import as_resolved, trade_orbits
from covergrid.trade.designs import EvalContext, WalkerDesign
from covergrid.trade.figures import trade_figures
from covergrid.trade.runner import design_runner, run_designs
from covergrid.trade.space import designs_caption, evaluation_context
from covergrid.trade.store import MemoryStore, ResultStore
from covergrid.trade.tables import write_table

if TYPE_CHECKING:
    from covergrid.study.build import ResolvedStudy
    from covergrid.study.models import Study

__all__ = [
    "PRUNING_RULE",
    "TIE_BREAK",
    "SizingResult",
    "coarse_context",
    "is_pruned",
    "loss_cases",
    "size_study",
    "run_sizing",
]

PRUNING_RULE = (
    "a design is not evaluated at full resolution when, on the coarse grid and step, the "
    "share of the area meeting the requirement's threshold is below requirement.area_fraction "
    "minus coarse.area_tolerance")
TIE_BREAK = (
    "smallest total; then fewest planes; then largest margin; then smallest phasing "
    "(across altitudes and inclinations: then lowest altitude, then lowest inclination)")

SIZING_COLUMNS = (
    "altitude_km", "inclination_deg", "feasible", "pattern", "total", "planes", "phasing",
    "achieved", "margin", "area_fraction_met", "worst_loss", "intact_achieved",
    "intact_margin", "totals_tried", "designs_coarse", "designs_full", "designs_pruned",
)


def _default_coarse(study: ResolvedStudy) -> tuple[float, float]:
    """Twice the cell size (if the grid stays whole) and twice the step (if it divides)."""
    g = study.grid
    res = g.resolution_deg
    try:
        dataclasses.replace(g, resolution_deg=2 * res).cropped()  # same extent and region
        if 2 * res <= 30.0:
            res = 2 * res
    except ValueError:
        pass
    step = study.step_s
    try:
        count_steps(study.duration_s, 2 * step)
        step = 2 * step
    except CovergridError:
        pass
    return res, step


def coarse_context(study: ResolvedStudy | Study) -> EvalContext:
    """The evaluation context of the pruning pass (see the module notes).

    Raises
    ------
    StudyError
        If ``sizing.coarse.resolution_deg`` does not give whole cells over the grid's
        latitudes or ``sizing.coarse.step_s`` does not divide the span.
    """
    study = as_resolved(study)
    assert study.sizing is not None
    c = study.sizing.coarse
    res0, step0 = _default_coarse(study)
    res = c.resolution_deg if c.resolution_deg is not None else res0
    step = c.step_s if c.step_s is not None else step0
    g = study.grid
    try:
        dataclasses.replace(g, resolution_deg=res).cropped()  # same extent and region
    except CovergridError as exc:
        raise StudyError(f"{res!r} deg does not fit the grid ({exc}); allowed: a cell size "
                         "that divides 360 deg, the latitude span and the longitude window, "
                         "with a cell of the region",
                         field="sizing.coarse.resolution_deg") from None
    try:
        count_steps(study.duration_s, step)
    except CovergridError as exc:
        raise StudyError(f"{str(exc).partition(': ')[2]}; got {step!r}",
                         field="sizing.coarse.step_s") from None
    return evaluation_context(study, resolution_deg=res, step_s=step)


def is_pruned(coarse_row: dict, area_fraction: float, area_tolerance: float) -> bool:
    """The pruning rule: coarse share meeting the threshold below area_fraction - tolerance."""
    share = coarse_row["area_fraction_met"]
    return not (share >= area_fraction - area_tolerance)  # NaN share: pruned


def loss_cases(design: WalkerDesign, mode: str) -> list[int]:
    """Indices of the satellites whose single loss is evaluated.

    ``one_per_plane``: the first satellite of each plane (index j * T/P); ``all``: every
    satellite. See the module notes for why one per plane represents the pattern.
    """
    if mode == "all":
        return list(range(design.total))
    per_plane = design.total // design.planes
    return [j * per_plane for j in range(design.planes)]


def _better(a: dict, b: dict | None) -> bool:
    """Whether candidate ``a`` beats ``b`` at one total (fewer planes, margin, phasing)."""
    if b is None:
        return True
    return (a["planes"], -a["margin"], a["phasing"]) < (b["planes"], -b["margin"], b["phasing"])


@dataclass
class SizingResult:
    """What :func:`size_study` found.

    Attributes
    ----------
    results : list of dict
        One per (altitude, inclination), columns :data:`SIZING_COLUMNS`.
    best : dict or None
        The overall answer ``{pattern, total, planes, phasing, altitude_km,
        inclination_deg, achieved, margin, worst_loss}``; None when nothing is feasible.
    search : dict
        Counts of designs in the space, evaluated coarsely and fully, pruned, skipped.
    designs : list of dict
        Every full-resolution row (intact designs and loss cases).
    out_dir, files
        Where outputs were written.
    """

    results: list[dict]
    best: dict | None
    search: dict
    designs: list[dict]
    out_dir: Path | None = None
    files: list[Path] = field(default_factory=list)


def size_study(study: ResolvedStudy | Study, store=None, *, scheduler: str | None = None,
               progress: bool = False) -> SizingResult:
    """Run the sizing search of the study's ``sizing:`` block (see the module notes).

    Parameters
    ----------
    study : ResolvedStudy or Study
        A study with ``sizing`` and ``requirement`` (resolved here once if not yet).
    store : ResultStore or MemoryStore, optional
        Where design rows are kept (default: in memory).
    scheduler : str, optional
        Overrides ``compute.scheduler``.
    progress : bool
        Progress bars with ETA.

    Returns
    -------
    SizingResult
    """
    study = as_resolved(study)
    sz = study.sizing
    if sz is None:
        raise StudyError("the study has no sizing block; add sizing: {pattern, altitude_km, "
                         "inclination_deg, total: {min, max}, planes, phasing}", field="sizing")
    req = study.requirement
    assert req is not None  # the study model requires it with sizing
    store = MemoryStore() if store is None else store
    full = evaluation_context(study)
    coarse = coarse_context(study) if sz.prune else None
    extras = study.walker.orbit() if study.walker is not None else {}
    el = study.sensor.min_elevation_deg
    cells = trade_orbits(study, "sizing")
    found: dict[tuple[float, float], dict] = {}
    tried: dict[tuple[float, float], int] = {c: 0 for c in cells}
    per_cell = {c: {"coarse": 0, "full": 0, "pruned": 0} for c in cells}
    space = sum(len(walker_options(t, sz.planes, sz.phasing))
                for t in range(sz.total.min, sz.total.max + 1)) * len(cells)
    counts = {"coarse_evaluated": 0, "full_evaluated": 0, "pruned": 0, "loss_cases_evaluated": 0,
              "computed_now": 0}
    full_rows: list[dict] = []
    with design_runner(study.compute, scheduler) as runner:
        for total in range(sz.total.min, sz.total.max + 1):
            open_cells = [c for c in cells if c not in found]
            options = walker_options(total, sz.planes, sz.phasing)
            if not open_cells:
                break
            if not options:
                continue
            designs = [WalkerDesign(sz.pattern, total, p, f, alt, inc, el, **extras)
                       for alt, inc in open_cells for p, f in options]
            for c in open_cells:
                tried[c] += 1
            keep = designs
            if coarse is not None:
                rows, n_new = run_designs(designs, coarse, store, runner, progress=progress,
                                          desc=f"size T={total} coarse")
                counts["coarse_evaluated"] += len(designs)
                counts["computed_now"] += n_new
                keep = []
                for d, r in zip(designs, rows, strict=True):
                    c = (d.altitude_km, d.inclination_deg)
                    per_cell[c]["coarse"] += 1
                    if is_pruned(r, req.area_fraction, sz.coarse.area_tolerance):
                        per_cell[c]["pruned"] += 1
                        counts["pruned"] += 1
                    else:
                        keep.append(d)
            rows, n_new = run_designs(keep, full, store, runner, progress=progress,
                                      desc=f"size T={total} full")
            counts["full_evaluated"] += len(keep)
            counts["computed_now"] += n_new
            full_rows += rows
            candidates: dict[tuple[float, float], list[tuple[WalkerDesign, dict]]] = {}
            for d, r in zip(keep, rows, strict=True):
                c = (d.altitude_km, d.inclination_deg)
                per_cell[c]["full"] += 1
                if r["meets"]:
                    candidates.setdefault(c, []).append((d, r))
            if sz.robust_to_one_loss and candidates:
                candidates = _robust(candidates, sz.loss_cases, full, store, runner, progress,
                                     counts, full_rows)
            else:
                candidates = {c: [(d, {**r, "counts": True}) for d, r in cands]
                              for c, cands in candidates.items()}
            for c, cands in candidates.items():
                best = None
                for _d, r in cands:
                    if r["counts"] and _better(r, best):
                        best = r
                if best is not None:
                    found[c] = best
    results = [_result_row(c, found.get(c), tried[c], per_cell[c], sz.pattern) for c in cells]
    feasible = [r for r in results if r["feasible"]]
    best = None
    if feasible:
        b = min(feasible, key=lambda r: (r["total"], r["planes"], -r["margin"], r["phasing"],
                                         r["altitude_km"], r["inclination_deg"]))
        best = {k: b[k] for k in ("pattern", "total", "planes", "phasing", "altitude_km",
                                  "inclination_deg", "achieved", "margin", "worst_loss")}
    search = {
        "designs_in_space": space, **counts,
        "skipped_by_early_stop": space - counts["full_evaluated"] - counts["pruned"],
        "share_avoided_by_pruning": counts["pruned"] / space if space else 0.0,
        "share_not_evaluated_at_full_resolution":
            1.0 - counts["full_evaluated"] / space if space else 0.0,
        "pruning": ({"rule": PRUNING_RULE, "area_tolerance": sz.coarse.area_tolerance,
                     "coarse_resolution_deg": coarse.resolution_deg,
                     "coarse_step_s": coarse.step_s} if coarse is not None else None),
        "tie_break": TIE_BREAK,
        "robust_to_one_loss": sz.robust_to_one_loss,
        "loss_cases": sz.loss_cases if sz.robust_to_one_loss else None,
    }
    return SizingResult(results, best, search, full_rows)


def _robust(candidates, mode, context, store, runner, progress, counts, full_rows):
    """Mark each candidate with its worst single loss (``counts``: still meets after it)."""
    losses = []
    owner = []
    for c, cands in candidates.items():
        for k, (d, _r) in enumerate(cands):
            for idx in loss_cases(d, mode):
                losses.append(replace(d, lost=idx))
                owner.append((c, k))
    rows, n_new = run_designs(losses, context, store, runner, progress=progress,
                              desc="size loss cases")
    counts["loss_cases_evaluated"] += len(losses)
    counts["computed_now"] += n_new
    full_rows += rows
    worst: dict[tuple, dict] = {}
    for o, r in zip(owner, rows, strict=True):
        if o not in worst or r["margin"] < worst[o]["margin"]:
            worst[o] = r
    out = {}
    for c, cands in candidates.items():
        marked = []
        for k, (d, r) in enumerate(cands):
            w = worst[(c, k)]
            marked.append((d, {**r, "counts": bool(w["meets"]), "intact_achieved": r["achieved"],
                               "intact_margin": r["margin"], "achieved": w["achieved"],
                               "margin": w["margin"], "area_fraction_met": w["area_fraction_met"],
                               "worst_loss": w["lost_satellite"]}))
        out[c] = marked
    return out


def robust_verdicts(designs: list[dict]) -> list[dict]:
    """The intact designs with ``meets`` true only where every evaluated single loss meets too.

    Designs whose losses were never evaluated (the search had already stopped, or the intact
    design fails) count as not meeting; every intact-feasible design at or below a cell's
    chosen total has had its losses evaluated, so the smallest robust total is unaffected.
    """
    def key(d: dict) -> tuple:
        return (d["pattern"], int(d["total"]), int(d["planes"]), int(d["phasing"]),
                float(d["altitude_km"]), float(d["inclination_deg"]),
                float(d["min_elevation_deg"]))

    loss_ok: dict[tuple, bool] = {}
    for d in designs:
        if d.get("lost_satellite"):
            loss_ok[key(d)] = loss_ok.get(key(d), True) and bool(d["meets"])
    return [{**d, "meets": bool(d["meets"]) and loss_ok.get(key(d), False)}
            for d in designs if not d.get("lost_satellite")]


def _result_row(cell, best: dict | None, tried: int, per_cell: dict, pattern: str) -> dict:
    alt, inc = cell
    row: dict[str, Any] = {"altitude_km": alt, "inclination_deg": inc,
                           "feasible": best is not None, "totals_tried": tried,
                           "designs_coarse": per_cell["coarse"],
                           "designs_full": per_cell["full"],
                           "designs_pruned": per_cell["pruned"]}
    if best is None:
        row.update(pattern=pattern, total="", planes="", phasing="", achieved=math.nan,
                   margin=math.nan, area_fraction_met=math.nan, worst_loss="",
                   intact_achieved=math.nan, intact_margin=math.nan)
        return row
    row.update(pattern=best["pattern"], total=best["total"], planes=best["planes"],
               phasing=best["phasing"], achieved=best["achieved"], margin=best["margin"],
               area_fraction_met=best["area_fraction_met"],
               worst_loss=best.get("worst_loss", ""),
               intact_achieved=best.get("intact_achieved", best["achieved"]),
               intact_margin=best.get("intact_margin", best["margin"]))
    return row


def run_sizing(study: ResolvedStudy | Study, out_dir: str | os.PathLike | None = None, *,
               scheduler: str | None = None, progress: bool = False,
               figures: bool = True, force: bool = False, report: bool = True
               ) -> SizingResult:
    """Run the sizing search and (given ``out_dir``) write its outputs and trade figures.

    Parameters
    ----------
    study : ResolvedStudy or Study
        A study with ``sizing`` and ``requirement`` (resolved here once if not yet).
    out_dir : path-like, optional
        Output root; outputs go to ``out_dir/<study>/``.
    scheduler : str, optional
        Overrides ``compute.scheduler``.
    progress : bool
        Progress bars with ETA.
    figures : bool
        Draw the trade figures.
    force : bool
        Run even if the memory estimate exceeds the limit.
    report : bool
        Write ``report.html`` (with ``out_dir``).

    Returns
    -------
    SizingResult

    Notes
    -----
    The output folder is written whole, as by :func:`covergrid.trade.sweep.run_sweep`.
    """
    study = as_resolved(study)
    check_trade_resources(study, "sizing", force=force)
    if study.sizing is not None and study.sizing.prune:
        coarse_context(study)  # refuse a bad coarse block before any work
    if out_dir is None:
        return size_study(study, None, scheduler=scheduler, progress=progress)
    with io.ResultFolder(out_dir, study.name, carry=("store",)) as folder:
        res = size_study(study, ResultStore(folder.target / "store"), scheduler=scheduler,
                         progress=progress)
        files = _write_sizing(study, res, folder.path, figures)
        if report:
            from covergrid.trade.sizing_report import write_sizing_report

            files.append(write_sizing_report(study, res, files, folder.path))
        files = [folder.final(f) for f in files]
    res.out_dir, res.files = folder.target, files
    return res


def _write_sizing(study: ResolvedStudy, res: SizingResult, folder: Path,
                  figures: bool) -> list[Path]:
    """Write the sizing outputs into ``folder`` (a staging folder)."""
    r = study.requirement
    assert r is not None
    doc = {
        "study": study.name, "covergrid_version": __version__,
        "requirement": {"metric": r.metric, "k": r.k, "at_most": r.at_most,
                        "at_least": r.at_least, "area_fraction": r.area_fraction},
        "best": res.best, "results": res.results, "search": res.search,
    }
    files = [io.write_csv(res.results, folder / "sizing.csv", SIZING_COLUMNS),
             io.write_json(doc, folder / "sizing.json")]
    intact = [d for d in res.designs if not d.get("lost_satellite")]
    if res.designs:
        files += write_table(res.designs, study, folder, "sizing_designs")
    files.append(io.write_text(study.resolved_yaml, folder / "study.resolved.yaml"))
    robust = study.sizing is not None and study.sizing.robust_to_one_loss
    if robust:
        intact = robust_verdicts(res.designs)
    if figures and intact:
        shown = [WalkerDesign(d["pattern"], int(d["total"]), int(d["planes"]),
                              int(d["phasing"]), float(d["altitude_km"]),
                              float(d["inclination_deg"]), float(d["min_elevation_deg"]))
                 for d in intact]
        what = "Sizing search (designs evaluated at full resolution"
        what += ("; a design meets the requirement only if it still does after losing its "
                 "worst single satellite)" if robust else ")")
        files += trade_figures(intact, study, folder / "trades" / "sizing",
                               caption=designs_caption(study, shown, what))
    return files
