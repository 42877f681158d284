"""Latitude profiles: area-weighted zonal mean and min/max envelope of metrics against latitude.

One panel per metric, latitude on the vertical axis (as on a map), the metric in its display unit
(:func:`covergrid.render.style.display_unit`, chosen per panel from its data) on the horizontal.
"""

from __future__ import annotations

from collections.abc import Sequence
from pathlib import Path

import numpy as np

from covergrid.errors import CovergridError
from covergrid.render import style

__all__ = [
    "PANEL_SIZE_IN",
    "latitude_profile",
    "plot_latitude_profile",
    "save_latitude_profile",
]

#: Size of one profile panel [in]; the figure is n_panels x this wide plus margins.
PANEL_SIZE_IN = (2.6, 4.2)
_MARGIN_IN = (0.9, 1.9)  # extra width (left axis labels) and height (title, caption, footer)
_BOTTOM_IN = 1.25  # room under the panels for tick labels, axis label, caption and footer
_ROWS_HATCHED = "latitudes with cells not meeting the requirement"


def latitude_profile(ds, metric: str, *, k: int | None = None) -> dict[str, np.ndarray]:
    """Area-weighted zonal mean and the min/max envelope of a metric, per latitude row.

    Parameters
    ----------
    ds : xarray.Dataset
        Coverage Dataset with ``cell_area`` [m2] on (lat, lon).
    metric : str
        Metric name.
    k : int, optional
        Fold, for metrics on ``k`` (``nfold_fraction``).

    Returns
    -------
    dict
        ``lat_deg`` (n_lat,) row centres [deg]; ``mean``, ``min``, ``max`` (n_lat,) in the
        metric's stored units. Rows without any finite value give NaN.

    Notes
    -----
    Zonal mean of row ``j``: :math:`\\bar m_j = \\sum_i A_{ji} m_{ji} / \\sum_i A_{ji}` over cells
    with finite :math:`m_{ji}`, where :math:`A` is ``cell_area`` (on a regular grid the cells of
    one row have equal area, so this is also the plain mean; the weights matter for masked
    cells and irregular inputs).
    """
    from covergrid.render.maps import metric_field

    da, _ = metric_field(ds, metric, k)
    if "cell_area" not in ds:
        raise CovergridError("the Dataset has no 'cell_area' for area weights", field="ds")
    values = np.asarray(da.values, dtype=float)
    area = np.asarray(ds["cell_area"].transpose("lat", "lon").values, dtype=float)
    finite = np.isfinite(values)
    weights = np.where(finite, area, 0.0)
    total = weights.sum(axis=1)
    with np.errstate(invalid="ignore", divide="ignore"):
        mean = np.where(total > 0, (np.where(finite, values, 0.0) * weights).sum(axis=1) / total,
                        np.nan)
    any_finite = finite.any(axis=1)
    low = np.where(any_finite, np.min(np.where(finite, values, np.inf), axis=1), np.nan)
    high = np.where(any_finite, np.max(np.where(finite, values, -np.inf), axis=1), np.nan)
    return {"lat_deg": np.asarray(ds["lat"].values, dtype=float), "mean": mean, "min": low,
            "max": high}


def _figsize(n_panels: int) -> tuple[float, float]:
    return (PANEL_SIZE_IN[0] * n_panels + _MARGIN_IN[0], PANEL_SIZE_IN[1] + _MARGIN_IN[1])


def plot_latitude_profile(ds, metrics: Sequence[str], *, k: int | None = None,
                          title: str | None = None, caption: str | None = None,
                          requirement=None, study: str | None = None):
    """Draw the zonal mean (line) and min/max envelope (band) of each metric against latitude.

    Parameters
    ----------
    ds : xarray.Dataset
        Coverage Dataset (with ``cell_area``).
    metrics : sequence of str
        Metrics, one panel each (left to right).
    k : int, optional
        Fold for ``nfold_fraction``; 1 if omitted and that metric is asked for.
    title : str, optional
        Figure title; "Latitude profile" by default.
    caption : str, optional
        Caption under the panels.
    requirement : Requirement or RequirementMark, optional
        The study's requirement (:mod:`covergrid.render.marks`): on every panel the latitude
        rows holding a cell that does not meet it are hatched; the panel of its metric shows
        the threshold as a dashed line; the caption ends with the verdict.
    study : str, optional
        The study's name, for the title.

    Returns
    -------
    list of matplotlib.axes.Axes
        One axes per metric; ``axes[0].figure`` is the figure.
    """
    import matplotlib.pyplot as plt

    from covergrid.compute.quantities import format_values
    from covergrid.render import marks

    mark = marks.as_mark(requirement, ds)
    lat_edges = np.concatenate([ds["lat_bnds"].values[:, 0], ds["lat_bnds"].values[-1:, 1]])
    metrics = list(metrics)
    if not metrics:
        raise CovergridError("give at least one metric", field="metrics")
    profiles = []
    for metric in metrics:
        fold = k if k is not None else (1 if metric in ds and "k" in ds[metric].dims else None)
        profiles.append((metric, fold, latitude_profile(ds, metric, k=fold)))
    # Latitude axis: the computed band, ticked every 30, 15 or 10 deg as it narrows.
    lat_lo, lat_hi = float(np.min(ds["lat_bnds"].values)), float(np.max(ds["lat_bnds"].values))
    tick = 30.0 if lat_hi - lat_lo > 90 else 15.0 if lat_hi - lat_lo > 40 else 10.0
    lat_ticks = np.arange(np.ceil(lat_lo / tick) * tick, lat_hi + tick / 2, tick)
    width, height = _figsize(len(metrics))
    any_hatched, threshold_line = False, None
    with style.report_style():
        fig = plt.figure(figsize=(width, height))
        left = 0.7 / width
        bottom = _BOTTOM_IN / height
        panel_w = (width - 0.9) / len(metrics)
        axes: list = []
        for n, (metric, fold, prof) in enumerate(profiles):
            ax = fig.add_axes((left + n * panel_w / width, bottom,
                               (panel_w - 0.25) / width, PANEL_SIZE_IN[1] / height),
                              sharey=axes[0] if axes else None)
            attrs = ds[metric].attrs
            unit = style.display_unit(metric, attrs.get("units"), ds[metric].values)
            colour = style.line_colour(metric, attrs.get("units"))
            lat = prof["lat_deg"]
            if mark is not None and mark.fails is not None:
                any_hatched = bool(marks.hatch_rows(ax, lat_edges, mark.fails)) or any_hatched
            if mark is not None and mark.is_on(metric, fold):
                threshold_text = format_values([mark.threshold], unit)[0]
                line = ax.axvline(mark.threshold * unit.factor, color="black",
                                  linestyle="--", linewidth=1.0, zorder=3)
                line.set_gid("covergrid-requirement-threshold")
                threshold_line = threshold_text
            ax.fill_betweenx(lat, prof["min"] * unit.factor, prof["max"] * unit.factor,
                             color=colour, alpha=0.25, linewidth=0, label="min to max")
            ax.plot(prof["mean"] * unit.factor, lat, color=colour, label="area-weighted mean")
            ax.set_xlabel(style.metric_label(metric, attrs, unit, k=fold), wrap=True)
            ax.set_ylim(lat_lo, lat_hi)
            ax.set_yticks(lat_ticks)
            ax.grid(True, linewidth=0.3, color="0.8")
            if n == 0:
                ax.set_ylabel("latitude [deg]")
            else:
                ax.tick_params(labelleft=False)
            axes.append(ax)
        axes[0].legend(loc="lower left", fontsize=6.5, frameon=False)
        fig.suptitle(style.figure_title(title or "Latitude profile", study),
                     y=1.0 - 0.15 / height, va="top")
        key = None
        if mark is not None:
            caption = "\n".join(c for c in (caption, mark.caption()) if c)
            key = marks.key_handles(mark, threshold_text=threshold_line, line="dashed",
                                    hatched=_ROWS_HATCHED if any_hatched else False) or None
        style.add_caption(fig, caption, key=key)
    return axes


def save_latitude_profile(ds, metrics: Sequence[str], out_dir, *,
                          stem: str = "latitude_profile", caption: str | None = None,
                          **kwargs) -> list[Path]:
    """Write the latitude-profile figure as ``out_dir/<stem>.png`` (200 dpi) and ``.pdf``.

    Parameters
    ----------
    ds : xarray.Dataset
        Coverage Dataset.
    metrics : sequence of str
        Metrics, one panel each.
    out_dir : path-like
        Folder to write into.
    stem : str
        File name without suffix.
    caption : str, optional
        Caption text.
    **kwargs
        Passed to :func:`plot_latitude_profile` (k, title, requirement, study).

    Returns
    -------
    list of pathlib.Path
        The PNG and PDF paths.
    """
    import matplotlib.pyplot as plt

    axes = plot_latitude_profile(ds, metrics, caption=caption, **kwargs)
    fig = axes[0].figure
    try:
        return style.save_png_and_pdf(fig, out_dir, stem)
    finally:
        plt.close(fig)
