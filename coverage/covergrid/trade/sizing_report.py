"""``report.html`` of a sizing search (see :mod:`covergrid.pipeline.report`)."""

from __future__ import annotations

import math
from pathlib import Path
from typing import TYPE_CHECKING

from covergrid.compute.quantities import format_values, unit_for

if TYPE_CHECKING:
    from covergrid.study.build import ResolvedStudy
    from covergrid.trade.sizing import SizingResult

__all__ = ["write_sizing_report"]


def write_sizing_report(study: ResolvedStudy, res: SizingResult, files: list[Path],
                        folder: Path) -> Path:
    """Write ``report.html`` of a sizing search into ``folder``: the smallest design (or
    that none was found), a note when the answer is at a bound of the searched totals, the
    answer per altitude and inclination, every trade figure, the study and provenance."""
    from covergrid.compute.metrics import METRICS
    from covergrid.pipeline import report

    req = study.requirement
    sz = study.sizing
    assert req is not None and sz is not None  # the study model requires both with sizing
    info = METRICS.get(req.metric)
    units, kind = (info.units, info.kind) if info is not None else (None, None)
    achieved = [float(r["achieved"]) for r in res.results if math.isfinite(float(r["achieved"]))]
    unit = unit_for(req.metric, units, max((abs(v) for v in achieved),
                                           default=abs(req.threshold)), kind)
    line = report.requirement_line(study)
    b = res.best
    notes = []
    if b is not None:
        value, margin = format_values([b["achieved"], b["margin"]], unit, margin_at=1,
                                      signed=[1])
        loss = (f"; after losing its worst single satellite ({b['worst_loss']})"
                if b.get("worst_loss") else "")
        verdict = {"met": True, "text": (
            f"Smallest design meeting the requirement ({line}): Walker {b['pattern']} "
            f"{b['total']}/{b['planes']}/{b['phasing']} at {b['altitude_km']:g} km, "
            f"{b['inclination_deg']:g} deg: achieved {value}, margin {margin}{loss}.")}
        if int(b["total"]) <= sz.total.min:
            notes.append(f"The answer is the smallest total searched (sizing.total.min = "
                         f"{sz.total.min}): a smaller constellation may meet the requirement "
                         "too; search lower totals to find out.")
    else:
        verdict = {"met": False, "text": f"No design up to {sz.total.max} satellites (the "
                   f"largest total searched, sizing.total.max) meets the requirement ({line})."}
    rows = []
    for r in res.results:
        where = [f"{float(r['altitude_km']):g}", f"{float(r['inclination_deg']):g}"]
        if r["feasible"]:
            value, margin = format_values([r["achieved"], r["margin"]], unit, margin_at=1,
                                          signed=[1])
            bound = " (smallest searched)" if int(r["total"]) <= sz.total.min else ""
            rows.append([*where, f"{r['pattern']} {r['total']}/{r['planes']}/{r['phasing']}"
                         + bound, value, margin, r.get("worst_loss") or "-"])
        else:
            rows.append([*where, f"none up to {sz.total.max}", "-", "-", "-"])
    table = {"title": "Smallest design per altitude and inclination",
             "columns": ["altitude [km]", "inclination [deg]", "Walker T/P/F", "achieved",
                         "margin", "worst single loss"],
             "rows": rows, "note": "Every design evaluated at full resolution is in "
             "sizing_designs.csv; the search counts and rules are in sizing.json."}
    s = res.search
    notes.append(f"Search: {s['designs_in_space']:,} designs in the space, "
                 f"{s['full_evaluated']:,} evaluated at full resolution, {s['pruned']:,} "
                 f"pruned on the coarse grid, {s['skipped_by_early_stop']:,} skipped after "
                 "the first feasible total.")
    context = report.report_context(study, "sizing", files, folder, verdict=verdict,
                                    tables=[table], notes=notes)
    return report.write_report(folder, context)
