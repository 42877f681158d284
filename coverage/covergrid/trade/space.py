"""A study's design space: the designs of its sweep block and the context they run in.

This module joins the study (:mod:`covergrid.study`) to the trade layer: it expands the
``sweep:`` axes into :class:`~covergrid.trade.designs.WalkerDesign` values, builds the
:class:`~covergrid.trade.designs.EvalContext` they are evaluated in (with the software
fingerprint of the result store) and writes the caption of the trade figures.
"""

from __future__ import annotations

import dataclasses
from collections.abc import Sequence
from typing import TYPE_CHECKING

from covergrid.compute.metrics import METRICS
from covergrid.compute.quantities import requirement_text
from covergrid.errors import StudyError
from covergrid.orbits.walker import walker_options
from covergrid.study.build import as_resolved, trade_orbits
from covergrid.trade.designs import EvalContext, WalkerDesign
from covergrid.trade.store import software_fingerprint

if TYPE_CHECKING:
    from covergrid.study.build import ResolvedStudy
    from covergrid.study.models import Study

__all__ = ["designs_caption", "evaluation_context", "sweep_designs"]


def evaluation_context(study: ResolvedStudy | Study, *, resolution_deg: float | None = None,
                       step_s: float | None = None) -> EvalContext:
    """The study's evaluation context, optionally with another grid cell size or step."""
    study = as_resolved(study)
    g = study.grid
    grid = g if resolution_deg is None else dataclasses.replace(
        g, resolution_deg=float(resolution_deg))  # same extent and region
    return EvalContext(epoch=study.epoch_iso, duration_s=float(study.duration_s),
                       step_s=float(step_s if step_s is not None else study.step_s),
                       grid=grid, sensor=study.sensor, nfold_max=int(study.nfold_max),
                       requirement=study.requirement, software=software_fingerprint(),
                       refine_transitions=bool(study.refine_transitions), dop=study.dop)


def sweep_designs(study: ResolvedStudy | Study) -> list[WalkerDesign]:
    """Every design of the study's ``sweep:`` block, in file order of the axes.

    Order: altitude, inclination, minimum elevation, total, planes, phasing (the last
    varies fastest). Values not listed keep the study's Walker group or sensor value; a
    sun-synchronous template (or ``inclination_deg: sun-synchronous``) gives each altitude
    its own inclination (:func:`covergrid.study.build.trade_orbits`).

    Raises
    ------
    StudyError
        If the study has no sweep block or no combination is a valid Walker pattern.
    """
    study = as_resolved(study)
    sw = study.sweep
    if sw is None:
        raise StudyError("the study has no sweep block; add sweep: {altitude_km, "
                         "inclination_deg, total, planes, phasing, min_elevation_deg}",
                         field="sweep")
    t = study.walker
    assert t is not None  # the study model requires one Walker group with a sweep
    els = sw.min_elevation_deg or [study.sensor.min_elevation_deg]
    totals = sw.total or [t.total]
    planes = sw.planes if sw.planes is not None else [t.planes]
    phasing = sw.phasing if sw.phasing is not None else [t.phasing]
    pattern = sw.pattern or t.pattern
    extras = t.orbit()
    designs = []
    for alt, inc in trade_orbits(study, "sweep"):
        for el in dict.fromkeys(els):
            for total in dict.fromkeys(totals):
                for p, f in walker_options(total, planes, phasing):
                    designs.append(WalkerDesign(pattern, int(total), p, f, float(alt),
                                                float(inc), float(el), **extras))
    if not designs:
        raise StudyError(f"no combination of total {list(totals)}, planes {planes} and "
                         f"phasing {phasing} is a Walker pattern (planes must divide the "
                         "total, phasing must be below the planes)", field="sweep")
    return designs


def designs_caption(study: ResolvedStudy, designs: Sequence[WalkerDesign], what: str) -> str:
    """Caption of the trade figures: the designs swept, the grid, span and requirement."""
    alts = sorted({d.altitude_km for d in designs})
    incs = sorted({d.inclination_deg for d in designs})
    els = sorted({d.min_elevation_deg for d in designs})

    def span(v: list[float], unit: str) -> str:
        return f"{v[0]:g} {unit}" if len(v) == 1 else f"{v[0]:g}-{v[-1]:g} {unit}"

    text = (f"{what}: {len(designs)} Walker {designs[0].pattern} designs, altitude "
            f"{span(alts, 'km')}, inclination {span(incs, 'deg')}, min elevation "
            f"{span(els, 'deg')}; {study.grid.resolution_deg:g} deg grid, "
            f"{study.duration_s / 3600.0:g} h at {study.step_s:g} s from {study.epoch_iso}.")
    r = study.requirement
    if r is not None:
        info = METRICS[r.metric]
        text += " Requirement: " + requirement_text(
            r.as_dict(), long_name=info.long_name, units=info.units, kind=info.kind) + "."
    return text
