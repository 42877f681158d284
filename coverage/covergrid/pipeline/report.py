"""What goes into ``report.html`` of a run, a sweep or a sizing search (drawn by
:mod:`covergrid.render.report`).

The report is written into the run's staging folder after every other file (it embeds the
figures already written there), through :func:`covergrid.io.write_text` like every other
output, so it is swapped in with them or not at all. Numbers are shown through
:mod:`covergrid.compute.quantities`, the same units and decimals as the figures' captions.
"""

from __future__ import annotations

import datetime as _dt
import hashlib
import math
import platform
from collections.abc import Iterable, Mapping, Sequence
from pathlib import Path
from typing import TYPE_CHECKING, Any

from covergrid import __version__
from covergrid.compute.quantities import format_values, requirement_text, unit_for, verdict_text

if TYPE_CHECKING:
    from covergrid.study.build import ResolvedStudy

__all__ = [
    "REPORT_NAME",
    "TABLE_ROWS_SHOWN",
    "figure_entries",
    "provenance",
    "report_context",
    "summary_table",
    "write_report",
]

#: File name of the report in a result folder.
REPORT_NAME = "report.html"
#: Rows of a design table shown in the report at most (the CSV beside it has them all).
TABLE_ROWS_SHOWN = 40

#: Titles of the figures a run or trade writes, by file stem.
_FIGURE_TITLES = {
    "ground_tracks": "Ground tracks",
    "latitude_profile": "Latitude profile",
    "trade_metric_vs_total": "Achieved value against constellation size",
    "trade_min_total": "Smallest constellation meeting the requirement",
    "trade_pareto": "Size against achieved performance (Pareto front)",
}


def _metric(name: str):
    from covergrid.compute.metrics import METRICS

    return METRICS.get(name)


def provenance(study: ResolvedStudy, extra: Iterable[tuple[str, str]] = ()
               ) -> list[tuple[str, str]]:
    """Where the results come from: software version, the inputs' hash, time, platform.

    The inputs' hash is the SHA-256 of the resolved study (``study.resolved.yaml``), which
    holds every value that decides the results.
    """
    now = _dt.datetime.now(_dt.timezone.utc).replace(microsecond=0).isoformat()
    digest = hashlib.sha256(study.resolved_yaml.encode("utf-8")).hexdigest()
    return [("covergrid version", __version__),
            ("inputs (study.resolved.yaml) SHA-256", digest),
            ("created", now.replace("+00:00", "Z")),
            ("Python", f"{platform.python_version()} on {platform.system()} "
                       f"{platform.machine()}"),
            *extra]


def summary_table(summary: Mapping[str, Any]) -> dict[str, Any]:
    """The summary's global statistics, one row per metric (and fold), in display units."""
    from covergrid.render.style import fold_text

    stats = ("mean", "min", "max", "p50", "p90", "p95")
    rows = []
    for m in summary["metrics"]:
        info = _metric(m["metric"])
        kind = info.kind if info is not None else None
        g = m["global"]
        values = [float(g[s]) for s in stats]
        largest = max((abs(v) for v in values if math.isfinite(v)), default=0.0)
        unit = unit_for(m["metric"], m["units"], largest, kind)
        name = fold_text(str(m["long_name"]), m["k"])
        rows.append([name, unit.label or "-", *format_values(values, unit, with_unit=False),
                     format_values([g["valid_area_fraction"]], unit_for("share", "1", 1.0,
                                                                        "fraction"))[0]])
    return {"columns": ["metric", "unit", "mean", "min", "max", "50 % of the area at most",
                        "90 %", "95 %", "area with a value"],
            "rows": rows}


def figure_entries(files: Sequence[Path], folder: Path) -> list[dict[str, Any]]:
    """The PNG figures among ``files`` (in their order), each with a title and its path."""
    out = []
    for path in files:
        path = Path(path)
        if path.suffix != ".png":
            continue
        stem = path.stem
        base, _, fold = stem.partition("_k")
        info = _metric(stem) or (_metric(base) if fold.isdigit() else None)
        if info is not None:
            title = "Map: " + info.long_name.replace(" k ", f" {fold} " if fold else " k ")
        else:
            title = _FIGURE_TITLES.get(stem, stem.replace("_", " ").capitalize())
        out.append({"title": title, "path": path, "file": path.relative_to(folder).as_posix()})
    return out


def report_context(study: ResolvedStudy, kind: str, files: Sequence[Path], folder: Path, *,
                   verdict: Mapping[str, Any] | None = None,
                   summary: Mapping[str, Any] | None = None,
                   tables: Sequence[Mapping[str, Any]] = (), notes: Sequence[str] = (),
                   extra_provenance: Iterable[tuple[str, str]] = ()) -> dict[str, Any]:
    """The report's content (see :func:`covergrid.render.report.render_report`).

    Parameters
    ----------
    study : ResolvedStudy
        The study.
    kind : str
        ``"run"``, ``"sweep"`` or ``"sizing"``.
    files : sequence of pathlib.Path
        The files written so far into ``folder`` (its figures are embedded).
    folder : pathlib.Path
        The staging folder.
    verdict : mapping, optional
        ``{"met": bool, "text": str}``: the requirement's verdict in words.
    summary : mapping, optional
        A run's summary (its global statistics become the summary table).
    tables : sequence of mapping
        Trade tables ``{"title", "columns", "rows", "note"}``.
    notes : sequence of str
        Paragraphs under the verdict.
    extra_provenance : iterable of (str, str)
        More provenance lines.
    """
    from covergrid.compute.metrics import MODEL_LIMITS
    from covergrid.render.style import FOOTER

    what = {"run": "Coverage", "sweep": "Trade sweep", "sizing": "Sizing search"}[kind]
    prov = provenance(study, extra_provenance)
    return {
        "title": f"{what}: study {study.name}", "kind": kind, "study": study.name,
        "version": __version__, "created": dict(prov)["created"], "verdict": verdict,
        "notes": list(notes), "summary": summary_table(summary) if summary else None,
        "figures": figure_entries(files, folder), "tables": list(tables),
        "study_yaml": study.resolved_yaml, "provenance": prov, "cautions": MODEL_LIMITS,
        "footer": FOOTER,
    }


def run_verdict(v: Mapping[str, Any] | None) -> dict[str, Any] | None:
    """A run's verdict for the report (display units, as in the captions)."""
    if v is None:
        return None
    info = _metric(v["metric"])
    return {"met": bool(v["met"]),
            "text": verdict_text(v, long_name=info.long_name if info else None,
                                 kind=info.kind if info else None)}


def design_table(rows: Sequence[Mapping[str, Any]], study: ResolvedStudy, title: str, *,
                 csv_name: str) -> dict[str, Any]:
    """A trade table for the report: the best designs first (meeting the requirement, then
    by margin), at most :data:`TABLE_ROWS_SHOWN` of them, values in display units."""
    req = study.requirement
    if req is not None:
        order = sorted(rows, key=lambda r: (not r.get("meets"), -float(r.get("margin",
                                                                            -math.inf))))
        info = _metric(req.metric)
        values = [float(r["achieved"]) for r in order if math.isfinite(float(r["achieved"]))]
        unit = unit_for(req.metric, info.units if info else None,
                        max((abs(v) for v in values), default=abs(req.threshold)),
                        info.kind if info else None)
        head = ["achieved", "margin", "meets"]
    else:
        order, unit, head = list(rows), None, []
    shown = order[:TABLE_ROWS_SHOWN]
    body = []
    for r in shown:
        row = [f"{r['pattern']} {int(r['total'])}/{int(r['planes'])}/{int(r['phasing'])}",
               f"{float(r['altitude_km']):g}", f"{float(r['inclination_deg']):g}",
               f"{float(r['min_elevation_deg']):g}"]
        if unit is not None:
            achieved, margin = format_values([r["achieved"], r["margin"]], unit, margin_at=1,
                                             signed=[1])
            row += [achieved, margin, "yes" if r.get("meets") else "no"]
        body.append(row)
    note = (f"{len(shown)} of {len(rows)} designs shown"
            + (", those meeting the requirement first, by margin" if req is not None else "")
            + f"; every design is in {csv_name}.")
    return {"title": title, "columns": ["Walker T/P/F", "altitude [km]", "inclination [deg]",
                                        "min elevation [deg]", *head],
            "rows": body, "note": note}


def requirement_line(study: ResolvedStudy) -> str | None:
    """The study's requirement in words (display units), or None."""
    req = study.requirement
    if req is None:
        return None
    info = _metric(req.metric)
    return requirement_text(req.as_dict(), long_name=info.long_name if info else None,
                            units=info.units if info else None,
                            kind=info.kind if info else None)


def write_report(folder: Path, context: Mapping[str, Any]) -> Path:
    """Render the report and write it atomically as ``folder/report.html``."""
    from covergrid import io
    from covergrid.render.report import render_report

    return io.write_text(render_report(context), Path(folder) / REPORT_NAME)
