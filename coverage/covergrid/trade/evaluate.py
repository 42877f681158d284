"""The evaluation of one design: one engine call reduced to one row of a design table.

A row holds the design's parameters, the area-weighted statistics of every metric
(:func:`covergrid.compute.summary.area_statistics`) and, when the study states a
requirement, its verdict (:func:`covergrid.compute.summary.requirement_verdict`). This
module and what it imports decide every number of a row, so the result store keys rows by
their sources (:func:`covergrid.trade.store.software_fingerprint` starts here).
"""

from __future__ import annotations

import time
from typing import Any

from covergrid.compute.engine import compute_coverage
from covergrid.compute.metrics import COVERAGE_METRICS, METRICS
from covergrid.compute.summary import area_statistics, region_area
from covergrid.trade.designs import EvalContext, WalkerDesign

__all__ = ["DESIGN_COLUMNS", "STATISTICS", "VERDICT_COLUMNS", "evaluate_design", "row_columns",
           "statistics_row"]

#: Area-weighted statistics of each metric kept in a design's row (see
#: :func:`covergrid.compute.summary.area_statistics`); column ``<metric>_<statistic>``.
STATISTICS = ("mean", "min", "max", "p50", "p90", "p95")
#: Columns describing the design and how it was evaluated, in table order.
DESIGN_COLUMNS = ("key", "pattern", "total", "planes", "phasing", "altitude_km",
                  "inclination_deg", "min_elevation_deg", "lost_satellite", "resolution_deg",
                  "step_s")
#: Requirement columns (present when the study has a requirement).
VERDICT_COLUMNS = ("meets", "achieved", "margin", "area_fraction_met")


def statistics_row(ds) -> dict[str, float]:
    """``<metric>_<statistic>`` (and ``nfold_fraction_k<k>_<statistic>``) of a Dataset."""
    area = region_area(ds).transpose("lat", "lon").values  # zero outside the region
    row: dict[str, float] = {}
    for name in METRICS:
        if name not in ds:  # the DOP metrics, without a dop: section
            continue
        var = ds[name]
        fields = ([(f"{name}_k{int(k)}", var.sel(k=k)) for k in var["k"].values]
                  if "k" in var.dims else [(name, var)])
        for prefix, da in fields:
            stats = area_statistics(da.transpose("lat", "lon").values, area)
            for s in STATISTICS:
                row[f"{prefix}_{s}"] = float(stats[s])
    return row


def evaluate_design(design: WalkerDesign, context: EvalContext) -> dict[str, Any]:
    """Coverage of one design reduced to one row (one engine call, one band task).

    Parameters
    ----------
    design : WalkerDesign
        The constellation and elevation limit.
    context : EvalContext
        Span, grid, other sensor limits, requirement.

    Returns
    -------
    dict
        The columns of :func:`row_columns` for this design (the key is added by
        :func:`covergrid.trade.runner.run_designs`); ``elapsed_s`` is the wall time of the
        evaluation [s].
    """
    start = time.perf_counter()
    grid = context.grid
    ds = compute_coverage(design.elements(), context.epoch, context.duration_s, context.step_s,
                          grid, context.sensor_for(design), nfold_max=context.nfold_max,
                          chunk_rows=grid.n_lat, scheduler="synchronous",
                          refine_transitions=context.refine_transitions, dop=context.dop)
    row: dict[str, Any] = {
        "pattern": design.pattern, "total": design.total, "planes": design.planes,
        "phasing": design.phasing, "altitude_km": design.altitude_km,
        "inclination_deg": design.inclination_deg,
        "min_elevation_deg": design.min_elevation_deg, "lost_satellite": design.lost_id,
        "resolution_deg": context.resolution_deg, "step_s": context.step_s,
    }
    row.update(statistics_row(ds))
    if context.requirement is not None:
        v = context.requirement.verdict(ds)
        row.update(meets=bool(v["met"]), achieved=v["achieved"], margin=v["margin"],
                   area_fraction_met=v["area_fraction_met"])
    row["elapsed_s"] = time.perf_counter() - start
    return row


def row_columns(nfold_max: int, requirement: bool, dop: bool = False) -> list[str]:
    """Column order of a design table (with ``dop``, the DOP metrics' columns too)."""
    cols = list(DESIGN_COLUMNS)
    for name in METRICS if dop else COVERAGE_METRICS:
        prefixes = ([f"{name}_k{k}" for k in range(1, nfold_max + 1)]
                    if name == "nfold_fraction" else [name])
        cols += [f"{p}_{s}" for p in prefixes for s in STATISTICS]
    if requirement:
        cols += list(VERDICT_COLUMNS)
    return cols + ["elapsed_s"]
