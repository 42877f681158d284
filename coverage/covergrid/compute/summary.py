"""Area-weighted statistics of coverage metrics, latitude bands and requirement verdicts.

Every statistic weights a cell by its area (the Dataset's ``cell_area`` variable), so a
statistic is a statement about the Earth's surface, not about the number of grid cells.

Percentiles
-----------
The area-weighted ``q``-quantile of a metric is the smallest metric value ``v`` such that
the cells with values ``<= v`` hold at least the share ``q`` of the area (the "inverted
distribution function" definition, Hyndman and Fan's definition 1, applied to the
area-weighted distribution; no interpolation; shares within 1e-9 of the target count as
reaching it, so results do not hang on rounding in the area sums). So ``p90 = 3600 s`` of
``max_gap`` reads "90 % of the area has a maximum gap of at most an hour", and the value
reported is one that actually occurs on the grid.

Cells whose metric is NaN are left out of the statistics and reported as the missing share
of the area (``valid_area_fraction`` < 1); a requirement verdict counts them as failing.

References
----------
.. [1] R. J. Hyndman and Y. Fan, "Sample quantiles in statistical packages", *The American
       Statistician* 50(4), 361-365, 1996, definition 1. doi:10.1080/00031305.1996.10473566
"""

from __future__ import annotations

import math
from typing import Any

import numpy as np
import xarray as xr

from covergrid.compute.requirement import Requirement, meets_threshold

__all__ = [
    "PERCENTILES",
    "weighted_quantile",
    "area_statistics",
    "band_statistics",
    "requirement_verdict",
    "summarise",
    "summary_rows",
    "CSV_COLUMNS",
]

#: Percentiles reported for every metric [percent of the grid area].
PERCENTILES = (50, 90, 95)
#: Shares of area closer than this to a quantile's target count as reaching it [unitless].
AREA_SHARE_TOLERANCE = 1e-9
#: Variables of the coverage Dataset that are not metrics.
_NOT_METRICS = frozenset({"cell_area", "lat_bnds", "lon_bnds"})

CSV_COLUMNS = (
    "metric", "k", "units", "scope", "lat_min_deg", "lat_max_deg", "area_m2",
    "valid_area_fraction", "mean", "min", "max", *(f"p{p}" for p in PERCENTILES),
)


def weighted_quantile(values, weights, q):
    """Area-weighted quantile without interpolation (Hyndman and Fan definition 1).

    Parameters
    ----------
    values : array_like
        Metric values; NaN entries are ignored [metric units].
    weights : array_like
        Non-negative weights of the same shape, e.g. cell areas [m2].
    q : float or array_like
        Quantile(s) in [0, 1] [unitless].

    Returns
    -------
    float or ndarray
        The smallest value ``v`` with ``sum(w[x <= v]) >= q * sum(w)``; NaN when no weight
        remains [metric units].

    Notes
    -----
    .. math:: Q(q) = \\min\\{v : \\sum_{x_i \\le v} w_i \\ge q \\sum_i w_i\\}

    References
    ----------
    .. [1] R. J. Hyndman and Y. Fan, "Sample quantiles in statistical packages", The American
           Statistician 50(4), 1996, definition 1 (here with weights).
    """
    x = np.asarray(values, dtype=float).ravel()
    w = np.broadcast_to(np.asarray(weights, dtype=float), np.shape(values)).ravel()
    q_arr = np.asarray(q, dtype=float)
    if np.any((q_arr < 0.0) | (q_arr > 1.0)) or np.any(np.isnan(q_arr)):
        raise ValueError(f"quantile q must lie in [0, 1]; got {q!r}")
    keep = ~np.isnan(x) & (w > 0.0)
    x, w = x[keep], w[keep]
    if x.size == 0:
        out = np.full(q_arr.shape, np.nan)
        return float(out) if out.ndim == 0 else out
    order = np.argsort(x, kind="stable")
    x, w = x[order], w[order]
    cum = np.cumsum(w)
    total = cum[-1]
    # A share within AREA_SHARE_TOLERANCE of the target counts as reaching it, so a target
    # met exactly on paper (e.g. half a symmetric grid) is not missed by rounding in the sums.
    target = (q_arr - AREA_SHARE_TOLERANCE) * total
    idx = np.searchsorted(cum, target, side="left")
    out = x[np.clip(idx, 0, x.size - 1)]
    return float(out) if out.ndim == 0 else out


def area_statistics(values, area) -> dict[str, float]:
    """Area-weighted mean, min, max and percentiles of one metric field.

    Parameters
    ----------
    values : array_like
        Metric values on the grid, NaN where undefined [metric units].
    area : array_like
        Cell areas, same shape [m2].

    Returns
    -------
    dict
        ``area_m2`` (area of all cells given), ``valid_area_fraction`` (share of that area
        with a defined value), ``mean`` (sum of w x over sum of w), ``min``, ``max`` and
        ``p50``, ``p90``, ``p95`` (see :func:`weighted_quantile`) [metric units].
    """
    x = np.asarray(values, dtype=float)
    w = np.broadcast_to(np.asarray(area, dtype=float), x.shape)
    total = float(w.sum())
    valid = ~np.isnan(x)
    w_valid = float(w[valid].sum())
    out: dict[str, float] = {"area_m2": total,
                             "valid_area_fraction": w_valid / total if total > 0 else math.nan}
    if w_valid > 0:
        out["min"] = float(x[valid].min())
        out["max"] = float(x[valid].max())
        # Rounding in the weighted sum can put the mean of a uniform field a few ulp outside
        # [min, max] (7199.999999999999 for a field of 7200); keep it inside.
        out["mean"] = min(max(float(np.sum(w[valid] * x[valid]) / w_valid), out["min"]),
                          out["max"])
    else:
        out["mean"] = out["min"] = out["max"] = math.nan
    quantiles = weighted_quantile(x, w, [p / 100.0 for p in PERCENTILES])
    for p, v in zip(PERCENTILES, np.atleast_1d(quantiles), strict=True):
        out[f"p{p}"] = float(v)
    return out


def _band_edges(lat_bnds: np.ndarray, band_width_deg: float) -> np.ndarray:
    """Band edges on multiples of the width from -90 deg, clipped to the grid's span."""
    lo, hi = float(np.min(lat_bnds)), float(np.max(lat_bnds))
    first = -90.0 + math.floor((lo + 90.0) / band_width_deg + 1e-9) * band_width_deg
    edges = np.arange(first, hi + band_width_deg - 1e-9, band_width_deg)
    edges = np.clip(edges, lo, hi)
    return np.unique(edges)


def band_statistics(da: xr.DataArray, cell_area: xr.DataArray, band_width_deg: float = 10.0,
                    lat_bnds=None) -> list[dict[str, float]]:
    """Area-weighted statistics of a (lat, lon) metric per latitude band.

    Parameters
    ----------
    da : xarray.DataArray
        Metric on dims (lat, lon) [metric units].
    cell_area : xarray.DataArray
        Cell areas on (lat, lon) [m2].
    band_width_deg : float
        Band width; band edges lie on multiples of it counted from -90 deg, clipped to the
        grid [deg]. A cell belongs to the band holding its centre latitude; a band's
        ``lat_min_deg`` and ``lat_max_deg`` are the outer bounds of its cells (the nominal
        edges when the width is a multiple of the grid resolution).
    lat_bnds : array_like, optional
        Latitude bounds of the rows, (lat, 2); default: half-way between centres [deg].

    Returns
    -------
    list of dict
        One entry per band, south to north: ``lat_min_deg``, ``lat_max_deg`` and the keys of
        :func:`area_statistics`.
    """
    if not band_width_deg > 0:
        raise ValueError(f"band_width_deg must be > 0; got {band_width_deg!r}")
    lat = np.asarray(da["lat"].values, dtype=float)
    if lat_bnds is not None:
        bnds = np.asarray(lat_bnds, dtype=float)
    else:
        half = 0.5 * float(np.median(np.abs(np.diff(lat)))) if lat.size > 1 else 0.5
        bnds = np.stack([lat - half, lat + half], axis=-1)
    edges = _band_edges(np.clip(bnds, -90.0, 90.0), band_width_deg)
    which = np.clip(np.searchsorted(edges, lat, side="right") - 1, 0, edges.size - 2)
    x = da.transpose("lat", "lon").values
    w = cell_area.transpose("lat", "lon").values
    out = []
    for b in range(edges.size - 1):
        rows = which == b
        if not rows.any():
            continue
        # Report the latitudes the band's cells actually span: when the band width is not a
        # multiple of the grid resolution, a cell reaches past the nominal band edge.
        stats = {"lat_min_deg": float(np.min(bnds[rows, 0])),
                 "lat_max_deg": float(np.max(bnds[rows, 1]))}
        stats.update(area_statistics(x[rows], w[rows]))
        out.append(stats)
    return out


def _metric_fields(ds: xr.Dataset):
    """(name, k, DataArray on (lat, lon)) for every metric in the Dataset."""
    for name, var in ds.data_vars.items():
        if name in _NOT_METRICS or not {"lat", "lon"} <= set(var.dims):
            continue
        extra = [d for d in var.dims if d not in ("lat", "lon")]
        if not extra:
            yield name, None, var
        elif extra == ["k"]:
            for k in var["k"].values:
                yield name, int(k), var.sel(k=k)


def _select(ds: xr.Dataset, metric: str, k: int | None) -> xr.DataArray:
    if metric not in ds.data_vars:
        names = [n for n, _, _ in _metric_fields(ds)]
        raise ValueError(f"metric {metric!r} is not in the Dataset; available: "
                         f"{', '.join(dict.fromkeys(names))}")
    da = ds[metric]
    if "k" in da.dims:
        if k is None:
            raise ValueError(f"metric {metric!r} needs k; available k: "
                             f"{', '.join(str(int(x)) for x in da['k'].values)}")
        if int(k) not in set(int(x) for x in da["k"].values):
            raise ValueError(f"k = {k} is not in the Dataset; available k: "
                             f"{', '.join(str(int(x)) for x in da['k'].values)}")
        da = da.sel(k=int(k))
    return da


def requirement_verdict(ds: xr.Dataset, metric: str, *, at_most: float | None = None,
                        at_least: float | None = None, area_fraction: float = 1.0,
                        k: int | None = None) -> dict[str, Any]:
    """Whether a metric meets a threshold over at least a share of the grid area.

    Parameters
    ----------
    ds : xarray.Dataset
        Coverage Dataset with ``cell_area`` and the metric.
    metric : str
        Metric name (``nfold_fraction`` needs ``k``).
    at_most, at_least : float
        The threshold, exactly one of them [metric units].
    area_fraction : float
        Share of the grid area that must meet the threshold, in (0, 1] [unitless].
    k : int, optional
        Fold of ``nfold_fraction``.

    Returns
    -------
    dict
        ``met`` (bool), ``achieved`` (for ``at_most``: the area-weighted ``area_fraction``
        quantile of the metric, i.e. the lowest limit met over that share of the area; for
        ``at_least``: the ``1 - area_fraction`` quantile of the upper tail, i.e. the highest
        floor met over that share), ``threshold``, ``margin`` (signed, positive = met:
        ``threshold - achieved`` for at_most, ``achieved - threshold`` for at_least) and
        ``area_fraction_met`` (share of the area meeting the threshold).

    Notes
    -----
    NaN cells count as not meeting the requirement.
    """
    if (at_most is None) == (at_least is None):
        raise ValueError("give exactly one of at_most or at_least")
    if not 0.0 < area_fraction <= 1.0:
        raise ValueError(f"area_fraction must be in (0, 1]; got {area_fraction!r}")
    da = _select(ds, metric, k)
    x = da.transpose("lat", "lon").values.astype(float)
    w = ds["cell_area"].transpose("lat", "lon").values.astype(float)
    total = float(w.sum())
    if at_most is not None:
        threshold = float(at_most)
        achieved = weighted_quantile(np.where(np.isnan(x), np.inf, x), w, area_fraction)
        margin = threshold - achieved
        sense = "at_most"
    else:
        assert at_least is not None
        threshold = float(at_least)
        # The highest floor v met over the share (largest v with area{x >= v} >= share),
        # computed as the lower quantile of -x.
        achieved = -weighted_quantile(np.where(np.isnan(x), np.inf, -x), w, area_fraction)
        margin = achieved - threshold
        sense = "at_least"
    ok = meets_threshold(x, sense, threshold)
    share = float(w[ok & ~np.isnan(x)].sum() / total) if total > 0 else math.nan
    met = bool(margin >= 0.0)
    return {
        "metric": metric, "k": k, "sense": sense, "threshold": threshold,
        "area_fraction": float(area_fraction), "achieved": float(achieved),
        "margin": float(margin), "met": met, "area_fraction_met": share,
        "units": str(da.attrs.get("units", "")),
    }


def summarise(ds: xr.Dataset, *, band_width_deg: float = 10.0,
              requirement: Requirement | None = None) -> dict[str, Any]:
    """Global and per-latitude-band area-weighted statistics of every metric.

    Parameters
    ----------
    ds : xarray.Dataset
        Coverage Dataset (the engine's contract): metrics on (lat, lon) or (k, lat, lon)
        and ``cell_area`` [m2].
    band_width_deg : float
        Width of the latitude bands [deg].
    requirement : Requirement, optional
        The requirement whose verdict is included.

    Returns
    -------
    dict
        ``{"metrics": [{"metric", "k", "units", "long_name", "global": {...},
        "bands": [...]}, ...], "band_width_deg", "percentiles", "requirement": verdict|None,
        "attrs": selected global attributes}``.
    """
    area = ds["cell_area"]
    lat_bnds = ds["lat_bnds"].values if "lat_bnds" in ds else None
    metrics = []
    for name, k, da in _metric_fields(ds):
        metrics.append({
            "metric": name, "k": k, "units": str(da.attrs.get("units", "")),
            "long_name": str(da.attrs.get("long_name", name)),
            "global": area_statistics(da.transpose("lat", "lon").values,
                                      area.transpose("lat", "lon").values),
            "bands": band_statistics(da, area, band_width_deg, lat_bnds),
        })
    verdict = requirement.verdict(ds) if requirement is not None else None
    keep = {key: _plain(v) for key, v in ds.attrs.items()
            if key.startswith("covergrid_") and key != "covergrid_study"}
    return {"percentiles": list(PERCENTILES), "band_width_deg": float(band_width_deg),
            "metrics": metrics, "requirement": verdict, "attrs": keep}


def _plain(v):
    if isinstance(v, np.generic):
        return v.item()
    return v


def summary_rows(summary: dict[str, Any]) -> list[dict[str, Any]]:
    """Flatten a :func:`summarise` result into CSV rows (columns :data:`CSV_COLUMNS`)."""
    rows = []
    for m in summary["metrics"]:
        scopes = [("global", m["global"])] + [("band", b) for b in m["bands"]]
        for scope, stats in scopes:
            row = {"metric": m["metric"], "k": "" if m["k"] is None else m["k"],
                   "units": m["units"], "scope": scope,
                   "lat_min_deg": stats.get("lat_min_deg", ""),
                   "lat_max_deg": stats.get("lat_max_deg", "")}
            for col in CSV_COLUMNS[6:]:
                row[col] = stats[col]
            rows.append(row)
    return rows
