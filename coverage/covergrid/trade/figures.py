"""The trade figures of a design table (drawn by :mod:`covergrid.render.trades`)."""

from __future__ import annotations

from pathlib import Path
from typing import TYPE_CHECKING

import numpy as np

from covergrid.compute.metrics import METRICS
from covergrid.trade.evaluate import row_columns
from covergrid.trade.tables import columns_table

if TYPE_CHECKING:
    from covergrid.study.build import ResolvedStudy

__all__ = ["trade_figures"]


def trade_figures(rows: list[dict], study: ResolvedStudy, folder: Path, *,
                  caption: str) -> list[Path]:
    """The trade figures of a design table in ``folder`` (see :mod:`covergrid.render.trades`).

    The metric traded is the requirement's achieved value when the study has one (with its
    threshold drawn), else the area-weighted mean of the first mapped metric.
    """
    from covergrid.render.trades import save_trade_figures

    if not rows:
        return []
    has_req = study.requirement is not None
    columns = row_columns(study.nfold_max, has_req, study.dop is not None)
    table = columns_table(rows, columns)
    if study.requirement is not None:
        r = study.requirement
        info = METRICS[r.metric]
        metric, better, units = "achieved", info.better, info.units
        threshold = r.threshold
        fold = f" (k = {r.k})" if r.k else ""
        long_name = (f"{info.long_name}{fold} met over {100 * r.area_fraction:g} % of the "
                     "area")
    else:
        name = next((m for m in study.maps.metrics if m != "nfold_fraction"),
                    "coverage_fraction")
        metric, better, units, threshold = f"{name}_mean", METRICS[name].better, None, None
        long_name = f"area-weighted mean {METRICS[name].long_name}"
        table.pop("meets", None)
    by = ("altitude_km" if np.unique(table["altitude_km"]).size > 1
          or np.unique(table["inclination_deg"]).size == 1 else "inclination_deg")
    return save_trade_figures(table, metric, folder, caption=caption, by=by, better=better,
                              units=units, requirement=threshold, long_name=long_name,
                              study=study.name)
