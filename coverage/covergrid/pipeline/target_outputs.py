"""The outputs of a study's point targets: summary entries, netCDF variables, tables, map.

``passes.csv`` lists every pass (:data:`covergrid.compute.targets.PASS_COLUMNS`, times as
ISO 8601 UTC); ``targets.csv`` one row per target with its statistics; the netCDF gains a
``target`` dimension (name, latitude, longitude, altitude and every per-target metric);
``summary.json`` a ``targets`` entry (per-target statistics, their mean/min/max over the
targets and the target requirement's verdict); with maps, one map per target metric.
"""

from __future__ import annotations

from pathlib import Path
from typing import TYPE_CHECKING, Any

import numpy as np

from covergrid.compute.targets import PASS_COLUMNS, TARGET_METRICS, target_verdict

if TYPE_CHECKING:
    import xarray as xr

    from covergrid.study.build import ResolvedStudy

__all__ = ["TARGET_MAP_METRICS", "target_dataset", "target_summary", "write_target_maps",
           "write_target_tables"]

#: Per-target metrics drawn as maps.
TARGET_MAP_METRICS = ("coverage_fraction", "max_gap", "mean_response_time", "pass_count")


def _iso(epoch: Any, seconds: np.ndarray) -> list[str]:
    """ISO 8601 UTC times (millisecond precision) of seconds after the epoch."""
    t = np.datetime64(epoch, "ns") + np.round(np.asarray(seconds) * 1e9).astype("timedelta64[ns]")
    return [str(x) + "Z" for x in t.astype("datetime64[ms]")]


def target_summary(study: ResolvedStudy, result: dict) -> dict[str, Any]:
    """The ``targets`` entry of summary.json."""
    t = study.targets
    assert t is not None
    stats = result["stats"]
    per_target = [{"name": t.names[k], "lat_deg": t.lat_deg[k], "lon_deg": t.lon_deg[k],
                   "altitude_m": t.altitude_m[k],
                   **{m: float(stats[m][k]) for m in TARGET_METRICS}} for k in range(len(t))]
    over = {m: {"units": TARGET_METRICS[m][0], "mean": float(np.mean(stats[m])),
                "min": float(np.min(stats[m])), "max": float(np.max(stats[m]))}
            for m in TARGET_METRICS}
    r = study.target_requirement
    verdict = None if r is None else target_verdict(stats, r.metric, at_most=r.at_most,
                                                    at_least=r.at_least, share=r.share)
    return {"count": len(t), "passes": int(result["passes"]["rise"].size),
            "statistics": over, "targets": per_target, "requirement": verdict}


def target_dataset(study: ResolvedStudy, result: dict) -> xr.Dataset:
    """The per-target variables on a ``target`` dimension (merged into coverage.nc)."""
    import xarray as xr

    t = study.targets
    assert t is not None
    data: dict[str, Any] = {
        "target_name": ("target", np.array(t.names, dtype=object),
                        {"long_name": "point target name", "cf_role": "timeseries_id"}),
        "target_lat": ("target", np.asarray(t.lat_deg, float),
                       {"units": "degrees_north", "standard_name": "latitude",
                        "long_name": "point target latitude"}),
        "target_lon": ("target", np.asarray(t.lon_deg, float),
                       {"units": "degrees_east", "standard_name": "longitude",
                        "long_name": "point target longitude"}),
        "target_altitude": ("target", np.asarray(t.altitude_m, float),
                            {"units": "m", "long_name": "point target height above the WGS 84 "
                             "ellipsoid", "positive": "up"}),
    }
    for m, (units, long_name) in TARGET_METRICS.items():
        data[f"target_{m}"] = ("target", np.asarray(result["stats"][m], float),
                               {"units": units, "long_name": f"point target {long_name}",
                                "coordinates": "target_lat target_lon"})
    return xr.Dataset(data)


def write_target_tables(study: ResolvedStudy, result: dict, folder: Path) -> list[Path]:
    """Write passes.csv and targets.csv into ``folder``."""
    from covergrid import io

    t = study.targets
    assert t is not None
    p = result["passes"]
    order = np.lexsort((p["rise"], p["target"]))
    ids = study.elements.ids
    rise, sets, peak = (_iso(study.epoch, p[c][order]) for c in
                        ("rise", "set", "max_elevation_time"))
    rows = [{"target": t.names[int(p["target"][i])], "satellite": ids[int(p["satellite"][i])],
             "rise": rise[n], "set": sets[n], "duration_s": round(float(p["duration_s"][i]), 3),
             "max_elevation_deg": round(float(p["max_elevation_deg"][i]), 4),
             "max_elevation_time": peak[n], "cut_at_start": bool(p["cut_at_start"][i]),
             "cut_at_end": bool(p["cut_at_end"][i])} for n, i in enumerate(order)]
    cols = ("name", "lat_deg", "lon_deg", "altitude_m", *TARGET_METRICS)
    stats = result["stats"]
    trows = [{"name": t.names[k], "lat_deg": t.lat_deg[k], "lon_deg": t.lon_deg[k],
              "altitude_m": t.altitude_m[k],
              **{m: (int(stats[m][k]) if m == "pass_count" else float(stats[m][k]))
                 for m in TARGET_METRICS}} for k in range(len(t))]
    return [io.write_csv(rows, folder / "passes.csv", PASS_COLUMNS),
            io.write_csv(trows, folder / "targets.csv", cols)]


def write_target_maps(study: ResolvedStudy, ds: Any, result: dict, folder: Path) -> list[Path]:
    """One map per metric of :data:`TARGET_MAP_METRICS` into ``folder/maps``."""
    from covergrid.render.place_maps import plot_target_map

    t = study.targets
    assert t is not None
    region = study.grid.region
    outline = None if region is None else region.outline()
    caption = (f"Study {study.name}: {len(t)} point targets, {study.n_satellites} satellites, "
               f"{study.duration_s / 3600:g} h from {study.epoch_iso}.")
    r = study.target_requirement
    files: list[Path] = []
    for m in TARGET_MAP_METRICS:
        units, long_name = TARGET_METRICS[m]
        fails = None
        if r is not None and r.metric == m:
            from covergrid.compute.requirement import meets_threshold

            sense = "at_most" if r.at_most is not None else "at_least"
            limit = r.at_most if r.at_most is not None else r.at_least
            assert limit is not None
            fails = ~meets_threshold(np.asarray(result["stats"][m], float), sense,
                                     float(limit))
        files += plot_target_map(np.asarray(t.lat_deg), np.asarray(t.lon_deg),
                                 result["stats"][m], m, units, long_name, folder / "maps",
                                 f"targets_{m}", caption=caption, outline=outline,
                                 fails=fails, study=study.name)
    return files


#: Targets listed in report.html (targets.csv holds them all).
REPORT_TARGETS_SHOWN = 40


def report_parts(study: ResolvedStudy, result: dict,
                 summary: dict) -> tuple[dict[str, Any], list[str]]:
    """The report's table of targets (those failing the target requirement first, at most
    :data:`REPORT_TARGETS_SHOWN`) and its note (the target verdict in words)."""
    from covergrid.compute.metrics import METRICS
    from covergrid.compute.quantities import format_values, unit_for
    from covergrid.compute.requirement import meets_threshold

    t = study.targets
    assert t is not None
    stats = result["stats"]
    order = list(range(len(t)))
    r = study.target_requirement
    fails = np.zeros(len(t), bool)
    if r is not None:
        sense = "at_most" if r.at_most is not None else "at_least"
        limit = r.at_most if r.at_most is not None else r.at_least
        assert limit is not None
        threshold = float(limit)
        fails = ~meets_threshold(np.asarray(stats[r.metric], float), sense, threshold)
        order.sort(key=lambda k: not fails[k])
    shown = order[:REPORT_TARGETS_SHOWN]
    columns = ["target", "lat [deg]", "lon [deg]"]
    cells: list[list[str]] = [[t.names[k], f"{t.lat_deg[k]:g}", f"{t.lon_deg[k]:g}"]
                              for k in shown]
    for m in TARGET_METRICS:
        info = METRICS.get(m)
        values = [float(stats[m][k]) for k in shown]
        unit = unit_for(m, TARGET_METRICS[m][0], max((abs(v) for v in values), default=0.0),
                        info.kind if info is not None else None)
        texts = format_values(values, unit, with_unit=False)
        columns.append(m.replace("_", " ") + (f" [{unit.label}]" if unit.label else ""))
        for row, text in zip(cells, texts, strict=True):
            row.append(text)
    if r is not None:
        columns.append("meets")
        for row, k in zip(cells, shown, strict=True):
            row.append("no" if fails[k] else "yes")
    table = {"title": "Point targets", "columns": columns, "rows": cells,
             "note": f"{len(shown)} of {len(t)} targets shown"
                     + (", those failing the target requirement first" if r is not None
                        else "") + "; every target is in targets.csv, every pass in passes.csv."}
    notes = []
    verdict = (summary.get("targets") or {}).get("requirement")
    if verdict is not None:
        state = "met" if verdict["met"] else "NOT met"
        notes.append(f"Target requirement {verdict['metric'].replace('_', ' ')} "
                     f"{'at most' if verdict['sense'] == 'at_most' else 'at least'} "
                     f"{verdict['threshold']:g} {verdict['units']} at "
                     f"{100 * verdict['share']:g} % of the targets: {state} "
                     f"({100 * verdict['share_met']:.1f} % of the targets meet it).")
    return table, notes
