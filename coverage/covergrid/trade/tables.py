"""Design tables: one row per design, written as CSV and as netCDF on dimension ``design``."""

from __future__ import annotations

import math
from collections.abc import Sequence
from pathlib import Path
from typing import TYPE_CHECKING, Any

import numpy as np

from covergrid import __version__, io
from covergrid.compute.metrics import METRICS
from covergrid.trade.evaluate import row_columns

if TYPE_CHECKING:
    from covergrid.study.build import ResolvedStudy

__all__ = ["column_attrs", "columns_table", "write_table"]


def columns_table(rows: list[dict], columns: Sequence[str]) -> dict[str, Any]:
    """A design table as one NumPy array per column (text, booleans, counts, numbers)."""
    table: dict[str, Any] = {}
    for c in columns:
        values = [r.get(c, math.nan) for r in rows]
        if c in ("key", "pattern", "lost_satellite"):
            table[c] = np.array([str(v) for v in values], dtype=object)
        elif c == "meets":
            table[c] = np.array([bool(v) for v in values], dtype=bool)
        elif c in ("total", "planes", "phasing"):
            table[c] = np.array(values, dtype=np.int64)
        else:
            table[c] = np.array(values, dtype=float)
    return table


def write_table(rows: list[dict], study: ResolvedStudy, folder: Path, stem: str) -> list[Path]:
    """Write a design table as ``<stem>.csv`` and ``<stem>.nc`` (dimension ``design``)."""
    import xarray as xr

    columns = row_columns(study.nfold_max, study.requirement is not None,
                          study.dop is not None)
    files = [io.write_csv([{c: r.get(c, math.nan) for c in columns} for r in rows],
                          folder / f"{stem}.csv", columns)]
    table = columns_table(rows, columns)
    data = {}
    for c in columns:
        attrs = column_attrs(c, METRICS, study)
        values = table[c]
        if values.dtype == object:
            values = values.astype(str)
        data[c] = (("design",), values, attrs)
    ds = xr.Dataset(data, coords={"design": ("design", np.arange(len(rows), dtype=np.int32),
                                             {"long_name": "design number"})})
    ds.attrs.update({
        "Conventions": "CF-1.8",
        "title": f"covergrid trade study {study.name}: one point per design",
        "source": f"covergrid {__version__}",
        "history": f"created by covergrid {__version__}",
        "covergrid_study_name": study.name,
        "covergrid_study": study.resolved_yaml,
    })
    files.append(io.write_netcdf(ds, folder / f"{stem}.nc"))
    return files


def column_attrs(column: str, metrics, study: ResolvedStudy) -> dict[str, str]:
    """CF ``long_name`` and ``units`` of a design-table column."""
    fixed = {
        "key": ("result-store key (SHA-256 of every input)", ""),
        "pattern": ("Walker pattern", ""), "total": ("total satellites T", "1"),
        "planes": ("orbit planes P", "1"), "phasing": ("relative phasing F", "1"),
        "altitude_km": ("altitude a - R_E", "km"), "inclination_deg": ("inclination", "degree"),
        "min_elevation_deg": ("minimum elevation", "degree"),
        "lost_satellite": ("satellite removed (robustness case); empty: none", ""),
        "resolution_deg": ("grid cell size of the evaluation", "degree"),
        "step_s": ("time step of the evaluation", "s"),
        "meets": ("requirement met", ""),
        "area_fraction_met": ("share of the area meeting the requirement's threshold", "1"),
        "elapsed_s": ("wall time of the evaluation", "s"),
    }
    if column in fixed:
        name, units = fixed[column]
        return {"long_name": name, **({"units": units} if units else {})}
    if column in ("achieved", "margin") and study.requirement is not None:
        r = study.requirement
        info = metrics[r.metric]
        what = ("requirement's achieved value" if column == "achieved"
                else "requirement's margin (positive: met)")
        return {"long_name": f"{what} of {r.metric}", "units": info.units}
    base, _, stat = column.rpartition("_")
    name = base.split("_k")[0] if base.startswith("nfold_fraction_k") else base
    info = metrics.get(name)
    if info is None:
        return {"long_name": column}
    return {"long_name": f"area-weighted {stat} of {info.long_name}"
            + (f" (k = {base.rpartition('_k')[2]})" if name != base else ""),
            "units": info.units}
