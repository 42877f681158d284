"""Trade-study figures: metric against constellation size, minimum size map, Pareto front.

Input: a design table
---------------------
Every function takes ``table``, one row per evaluated design, as either

- a mapping of column name -> 1-D array-like, all of one length (a plain dict of numpy arrays,
  lists, or the columns of a CSV read with the csv module), or
- an ``xarray.Dataset`` whose variables used here share one dimension (for example ``design``),
  as the sweep's ``sweep.nc`` holds them.

Columns used (units in the name; extra columns are ignored):

=================  ======================================================================
``total``          satellites in the design, T of Walker T/P/F [count] (required)
``altitude_km``    altitude of the shell [km] (the lines of the size chart; the map's rows)
``inclination_deg`` inclination [deg] (the map's columns; or the lines of the size chart)
``planes``         P [count] (optional; shown in the Pareto labels)
``phasing``        F [count] (optional; shown in the Pareto labels)
``<metric>``       the achieved value of the metric being traded, in its stored units
                   (seconds for times, a fraction 0..1 for fractions); the caller names the
                   column, e.g. ``"max_gap"`` or ``"max_gap_p95"``
``meets``          requirement verdict, bool (optional for the size chart and the Pareto
                   front; required for the minimum-size map)
=================  ======================================================================

Which way is better for the metric comes from ``better=`` or, if omitted, from the metric
registry (the column name, or its part before the first ``"_p"`` / ``"_mean"`` suffix, looked up
in ``covergrid.compute.metrics.METRICS``). Units likewise from ``units=`` or the registry.
"""

from __future__ import annotations

import os
from collections.abc import Mapping, Sequence
from pathlib import Path

import numpy as np

from covergrid.errors import CovergridError
from covergrid.render import style

__all__ = [
    "TRADE_FIGSIZE_IN",
    "best_over",
    "design_columns",
    "minimum_total_grid",
    "pareto_front",
    "plot_metric_vs_total",
    "plot_minimum_total_map",
    "plot_pareto_front",
    "save_trade_figures",
    "total_ticks",
]

#: Size of a saved trade figure [in]; at 200 dpi a PNG is 1400 x 1100 pixels.
TRADE_FIGSIZE_IN = (7.0, 5.5)


def design_columns(table, names: Sequence[str], *, optional: Sequence[str] = ()) -> dict:
    """Read the named columns of a design table into equal-length 1-D numpy arrays.

    Parameters
    ----------
    table : mapping of str to array_like, or xarray.Dataset
        The design table (see the module docstring).
    names : sequence of str
        Required columns.
    optional : sequence of str
        Columns returned when present.

    Returns
    -------
    dict of str to numpy.ndarray
        One array per column found, all of shape (n_designs,).

    Raises
    ------
    covergrid.errors.CovergridError
        A required column is missing (the message lists the columns present), a column is not
        1-D, or the lengths differ.
    """
    if hasattr(table, "data_vars"):  # xarray.Dataset
        present = list(table.data_vars) + list(table.coords)
        getter = lambda name: np.asarray(table[name].values)  # noqa: E731
    elif isinstance(table, Mapping):
        present = list(table)
        getter = lambda name: np.asarray(table[name])  # noqa: E731
    else:
        raise CovergridError(
            f"expected a mapping of columns or an xarray.Dataset, got {type(table).__name__}",
            field="table",
        )
    missing = [name for name in names if name not in present]
    if missing:
        raise CovergridError(f"missing column(s) {missing}; the table has {sorted(present)}",
                             field="table")
    columns = {name: getter(name) for name in [*names, *(n for n in optional if n in present)]}
    lengths = {name: col.shape for name, col in columns.items()}
    if any(len(shape) != 1 for shape in lengths.values()) or len(set(lengths.values())) > 1:
        raise CovergridError(f"columns must be 1-D of one length; got shapes {lengths}",
                             field="table")
    return columns


def _registry_info(metric: str):
    from covergrid.compute.metrics import METRICS

    if metric in METRICS:
        return METRICS[metric]
    for marker in ("_p", "_mean", "_min", "_max", "_global"):
        base = metric.split(marker)[0]
        if base in METRICS:
            return METRICS[base]
    return None


def _better_and_units(metric: str, better: str | None, units: str | None) -> tuple[bool, str]:
    info = _registry_info(metric)
    if better is None:
        better = info.better if info is not None else None
    if better not in ("lower", "higher"):
        raise CovergridError(
            f"{better!r} for {metric!r}: say whether 'lower' or 'higher' is better", field="better"
        )
    if units is None:
        units = info.units if info is not None else "1"
    return better == "lower", units


def _metric_display(metric, units, values, long_name=None):
    info = _registry_info(metric)
    base = info.name if info is not None and hasattr(info, "name") else metric
    unit = style.display_unit(base, units, values)
    name = long_name or (info.long_name if info is not None else metric.replace("_", " "))
    return unit, style.metric_label(base, {"long_name": name}, unit)


def pareto_front(total, value, *, lower_is_better: bool) -> np.ndarray:
    """Indices of the designs on the Pareto front of size against achieved metric.

    Parameters
    ----------
    total : array_like of int, shape (n,)
        Satellites per design [count].
    value : array_like of float, shape (n,)
        Achieved metric [any unit]; NaN designs are never on the front.
    lower_is_better : bool
        Direction of the metric.

    Returns
    -------
    numpy.ndarray of int
        Indices into the inputs, by increasing total: each design on the front is strictly
        better than every design with fewer or equally many satellites (ties on equal total
        and value keep the first row).

    Notes
    -----
    A design is non-dominated when no other design has at most as many satellites and a value
    at least as good, with one of the two strictly better (Pareto optimality, as used in
    multi-objective design; common practice). Sorting by total, then by value best first, one
    pass with a running best finds the front.
    """
    total = np.asarray(total, dtype=float)
    key = np.asarray(value, dtype=float)
    key = key if lower_is_better else -key
    ok = np.flatnonzero(np.isfinite(total) & np.isfinite(key))
    order = ok[np.lexsort((ok, key[ok], total[ok]))]
    best_before = np.concatenate([[np.inf], np.minimum.accumulate(key[order])[:-1]])
    return order[key[order] < best_before]


def minimum_total_grid(table) -> dict[str, np.ndarray]:
    """Smallest feasible total per altitude and inclination.

    Parameters
    ----------
    table : design table
        Columns ``total``, ``altitude_km``, ``inclination_deg``, ``meets``.

    Returns
    -------
    dict
        ``altitude_km`` (n_alt,) and ``inclination_deg`` (n_inc,) sorted unique values;
        ``min_total`` (n_alt, n_inc) float, NaN where no design meets the requirement;
        ``evaluated`` (n_alt, n_inc) bool, whether any design was evaluated there.
    """
    cols = design_columns(table, ["total", "altitude_km", "inclination_deg", "meets"])
    alt, alt_index = np.unique(cols["altitude_km"].astype(float), return_inverse=True)
    inc, inc_index = np.unique(cols["inclination_deg"].astype(float), return_inverse=True)
    min_total = np.full((alt.size, inc.size), np.inf)
    feasible_total = np.where(cols["meets"].astype(bool), cols["total"].astype(float), np.inf)
    np.minimum.at(min_total, (alt_index, inc_index), feasible_total)
    evaluated = np.zeros((alt.size, inc.size), dtype=bool)
    evaluated[alt_index, inc_index] = True
    return {"altitude_km": alt, "inclination_deg": inc,
            "min_total": np.where(np.isfinite(min_total), min_total, np.nan),
            "evaluated": evaluated}


def _new_figure():
    import matplotlib.pyplot as plt

    fig = plt.figure(figsize=TRADE_FIGSIZE_IN)
    ax = fig.add_axes((0.11, 0.25, 0.64, 0.66))
    return fig, ax


def _format_by(by: str, value: float) -> str:
    if by == "altitude_km":
        return f"{value:g} km"
    if by == "inclination_deg":
        return f"{value:g}\u00b0"
    return f"{by} = {value:g}"


def plot_metric_vs_total(table, metric: str, *, by: str = "altitude_km",
                         better: str | None = None, units: str | None = None,
                         requirement: float | None = None, title: str | None = None,
                         caption: str | None = None, ax=None, long_name: str | None = None):
    """Best achieved metric against total satellites, one line per altitude (or inclination).

    Parameters
    ----------
    table : design table
        Columns ``total``, ``by`` and ``metric`` (see the module docstring).
    metric : str
        Column of the achieved metric [stored units].
    by : str
        Column giving one line per distinct value: ``"altitude_km"`` or ``"inclination_deg"``.
    better, units : str, optional
        Direction ("lower"/"higher") and stored units; from the registry by default.
    requirement : float, optional
        Threshold drawn as a dashed line [stored units].
    title, caption : str, optional
        Title and caption (caption on a new figure only).
    ax : matplotlib.axes.Axes, optional
        Axes to draw on.

    Returns
    -------
    list of matplotlib.lines.Line2D
        One line per value of ``by``: at each total, the best value over every other parameter
        (planes, phasing and any other swept parameter).
    """
    import matplotlib as mpl

    cols = design_columns(table, ["total", by, metric])
    lower, units = _better_and_units(metric, better, units)
    values = cols[metric].astype(float)
    unit, label = _metric_display(metric, units, values, long_name)
    groups = np.unique(cols[by].astype(float))
    colours = mpl.colormaps["viridis"](np.linspace(0.0, 0.85, max(groups.size, 1)))
    with style.report_style():
        own = ax is None
        if own:
            fig, ax = _new_figure()
        lines = []
        for colour, group in zip(colours, groups, strict=True):
            rows = (cols[by].astype(float) == group) & np.isfinite(values)
            totals = np.unique(cols["total"][rows])
            pick = np.nanmin if lower else np.nanmax
            best = np.array([pick(values[rows & (cols["total"] == t)]) for t in totals])
            (line,) = ax.plot(totals, best * unit.factor, marker="o", markersize=3.5,
                              color=colour, label=_format_by(by, group))
            lines.append(line)
        if requirement is not None:
            ax.axhline(requirement * unit.factor, color="0.2", linestyle="--", linewidth=0.9,
                       label="requirement")
        ax.set_xlabel("total satellites")
        ax.set_ylabel(label)
        ax.grid(True, linewidth=0.3, color="0.85")
        total_ticks(ax, cols["total"])
        ax.legend(loc="upper left", bbox_to_anchor=(1.02, 1.0), frameon=False,
                  title=by.replace("_km", " [km]").replace("_deg", " [deg]").replace("_", " "))
        over = best_over(table, by)
        head = f"{label.split(' [')[0].capitalize()} against constellation size"
        ax.set_title(title or (head + (f"\n(best over {over} at each total)" if over else "")))
        if own:
            style.add_caption(ax.figure, caption)
    return lines


#: Columns a design table may sweep besides the total, with their names in titles.
_SWEPT = (("altitude_km", "altitude"), ("inclination_deg", "inclination"),
          ("min_elevation_deg", "minimum elevation"), ("planes", "planes"),
          ("phasing", "phasing"))


def best_over(table, by: str) -> str:
    """The parameters a line of the size chart takes the best over: every swept column
    with more than one value, besides ``by`` and the total ("inclination, planes and
    phasing"); empty when there is none."""
    present = design_columns(table, ["total"], optional=[c for c, _ in _SWEPT])
    names = [name for column, name in _SWEPT
             if column != by and column in present and np.unique(present[column]).size > 1]
    if len(names) <= 1:
        return "".join(names)
    return ", ".join(names[:-1]) + " and " + names[-1]


def total_ticks(ax, totals) -> None:
    """Ticks of a total-satellites axis: whole numbers only, each total swept when they are
    few, and a sensible range around a single total (not 11.4 ... 12.6)."""
    from matplotlib.ticker import FixedLocator, MaxNLocator

    values = np.unique(np.asarray(totals, dtype=float)[np.isfinite(np.asarray(totals,
                                                                             dtype=float))])
    if values.size == 0:
        return
    if values.size <= 12:
        ax.xaxis.set_major_locator(FixedLocator(values.tolist()))
    else:
        ax.xaxis.set_major_locator(MaxNLocator(integer=True))
    pad = max(1.0, 0.05 * float(values[-1] - values[0]))
    ax.set_xlim(values[0] - pad, values[-1] + pad)


def plot_minimum_total_map(table, *, title: str | None = None, caption: str | None = None,
                           ax=None):
    """Map of the smallest feasible total over altitude x inclination, infeasible cells marked.

    Parameters
    ----------
    table : design table
        Columns ``total``, ``altitude_km``, ``inclination_deg``, ``meets``.
    title, caption : str, optional
        Title and caption.
    ax : matplotlib.axes.Axes, optional
        Axes to draw on.

    Returns
    -------
    matplotlib.collections.QuadMesh
        One cell per (inclination, altitude) pair, coloured by the minimum total (one colour
        per total found, fewer satellites brighter, following the report colour rule; the
        colour bar is discrete); each cell is labelled with the number, "none" (hatched
        grey: evaluated, nothing up to the largest total swept met the requirement) or left
        blank (not evaluated). An answer at the smallest total swept is marked "\u2264"
        and explained in a note under the chart: a smaller total was never tried.
    """
    import matplotlib as mpl
    import matplotlib.colors as mcolors
    import matplotlib.patches as mpatches

    grid = minimum_total_grid(table)
    alt, inc, min_total = grid["altitude_km"], grid["inclination_deg"], grid["min_total"]
    totals_swept = np.asarray(design_columns(table, ["total"])["total"], dtype=float)
    floor, ceiling = float(np.nanmin(totals_swept)), float(np.nanmax(totals_swept))
    finite = np.unique(min_total[np.isfinite(min_total)])
    # one colour per total found (fewer satellites brighter, the report colour rule)
    n = max(finite.size, 1)
    positions = np.linspace(0.95, 0.15, n) if n > 1 else np.array([0.6])
    cmap = mcolors.ListedColormap(mpl.colormaps["viridis"](positions)).with_extremes(
        bad=(0, 0, 0, 0))
    values = finite if finite.size else np.array([0.0])
    edges = np.concatenate([[values[0] - 0.5], (values[:-1] + values[1:]) / 2,
                            [values[-1] + 0.5]])
    norm = mcolors.BoundaryNorm(edges, ncolors=n)
    at_floor = np.isfinite(min_total) & (min_total <= floor)
    with style.report_style():
        own = ax is None
        if own:
            fig, ax = _new_figure()
        x_edges = np.arange(inc.size + 1) - 0.5
        y_edges = np.arange(alt.size + 1) - 0.5
        mesh = ax.pcolormesh(x_edges, y_edges, np.ma.masked_invalid(min_total), cmap=cmap,
                             norm=norm, edgecolors="white", linewidth=1.0)
        for (row, col), value in np.ndenumerate(min_total):
            if np.isfinite(value):
                shade = mesh.cmap(mesh.norm(value))
                dark = style.luminance(shade) < 0.35
                text = f"\u2264{value:.0f}" if at_floor[row, col] else f"{value:.0f}"
                ax.text(col, row, text, ha="center", va="center", fontsize=8,
                        color="white" if dark else "black")
            elif grid["evaluated"][row, col]:
                ax.add_patch(mpatches.Rectangle((col - 0.5, row - 0.5), 1, 1, facecolor="0.85",
                                                hatch="///", edgecolor="0.55", linewidth=0))
                ax.text(col, row, f"none\n\u2264{ceiling:.0f}", ha="center", va="center",
                        fontsize=7, color="0.25")
        ax.set_xticks(np.arange(inc.size), [f"{v:g}" for v in inc])
        ax.set_yticks(np.arange(alt.size), [f"{v:g}" for v in alt])
        ax.set_xlim(x_edges[0], x_edges[-1])
        ax.set_ylim(y_edges[0], y_edges[-1])
        ax.set_xlabel("inclination [deg]")
        ax.set_ylabel("altitude [km]")
        cbar = ax.figure.colorbar(mesh, ax=ax, shrink=0.9, pad=0.03, ticks=list(values))
        cbar.set_ticks(list(values), labels=[f"{v:.0f}" for v in values])
        cbar.ax.minorticks_off()
        cbar.set_label("smallest total meeting the requirement")
        if cbar.solids is not None:
            cbar.solids.set_rasterized(False)
        handles = []
        if np.any(grid["evaluated"] & ~np.isfinite(min_total)):
            handles.append(mpatches.Patch(facecolor="0.85", hatch="///", edgecolor="0.55",
                                          label=f"no design up to {ceiling:.0f} satellites "
                                          "meets the requirement"))
        notes = []
        if at_floor.any():
            # the answer is the smallest total swept: a smaller one was never tried
            notes.append(f"\u2264{floor:.0f}: at the smallest total swept; the true minimum "
                         "may be lower (sweep smaller totals)")
        if handles or notes:
            legend = ax.legend(handles=handles or [mpatches.Patch(visible=False)],
                               labels=[h.get_label() for h in handles] or [""],
                               loc="upper left", bbox_to_anchor=(0.0, -0.12), frameon=False,
                               title="\n".join(notes) or None, alignment="left",
                               title_fontsize=7.5, fontsize=7.5)
            legend.set_gid("covergrid-bound-note" if notes else "covergrid-key")
        ax.set_title(title or "Smallest constellation meeting the requirement")
        if own:
            style.add_caption(ax.figure, caption)
    return mesh


def plot_pareto_front(table, metric: str, *, better: str | None = None,
                      units: str | None = None, requirement: float | None = None,
                      title: str | None = None, caption: str | None = None, ax=None,
                      long_name: str | None = None):
    """All designs as total against achieved metric, with the Pareto front drawn through them.

    Parameters
    ----------
    table : design table
        Columns ``total`` and ``metric``; optional ``meets`` (feasible designs filled, others
        hollow), ``planes`` and ``phasing`` (front points labelled T/P/F).
    metric : str
        Column of the achieved metric [stored units].
    better, units : str, optional
        Direction and stored units; from the registry by default.
    requirement : float, optional
        Threshold drawn as a dashed line [stored units].
    title, caption : str, optional
        Title and caption.
    ax : matplotlib.axes.Axes, optional
        Axes to draw on.

    Returns
    -------
    numpy.ndarray of int
        Row indices of the front (see :func:`pareto_front`).
    """
    cols = design_columns(table, ["total", metric], optional=["meets", "planes", "phasing"])
    lower, units = _better_and_units(metric, better, units)
    values = cols[metric].astype(float)
    total = cols["total"].astype(float)
    unit, label = _metric_display(metric, units, values, long_name)
    front = pareto_front(total, values, lower_is_better=lower)
    meets = cols.get("meets")
    colour = style.line_colour(metric, units)
    with style.report_style():
        own = ax is None
        if own:
            fig, ax = _new_figure()
        if meets is None:
            ax.scatter(total, values * unit.factor, s=12, color="0.6", label="design")
        else:
            ok = meets.astype(bool)
            ax.scatter(total[ok], values[ok] * unit.factor, s=16, color=colour, alpha=0.55,
                       linewidths=0, label="meets requirement")
            ax.scatter(total[~ok], values[~ok] * unit.factor, s=14, facecolors="none",
                       edgecolors="0.6", linewidths=0.7, label="fails requirement")
        ax.step(total[front], values[front] * unit.factor, where="post", color=colour,
                linewidth=1.3, marker="o", markersize=4.5, label="Pareto front")
        if "planes" in cols and "phasing" in cols:
            for i in front:
                ax.annotate(f"{total[i]:.0f}/{cols['planes'][i]:.0f}/{cols['phasing'][i]:.0f}",
                            (total[i], values[i] * unit.factor), textcoords="offset points",
                            xytext=(4, 4), fontsize=6.5, color=colour)
        if requirement is not None:
            ax.axhline(requirement * unit.factor, color="0.2", linestyle="--", linewidth=0.9,
                       label="requirement")
        ax.set_xlabel("total satellites")
        ax.set_ylabel(label)
        ax.grid(True, linewidth=0.3, color="0.85")
        total_ticks(ax, total)
        ax.legend(loc="upper left", bbox_to_anchor=(1.02, 1.0), frameon=False)
        ax.set_title(title or "Size against achieved performance")
        if own:
            style.add_caption(ax.figure, caption)
    return front


def save_trade_figures(table, metric: str, out_dir, *, caption: str | None = None,
                       by: str = "altitude_km", better: str | None = None,
                       units: str | None = None, requirement: float | None = None,
                       long_name: str | None = None, study: str | None = None) -> list[Path]:
    """Write the three trade figures (PNG 200 dpi and vector PDF) into ``out_dir``.

    Files: ``trade_metric_vs_total``, ``trade_min_total`` (only when the table has ``meets``)
    and ``trade_pareto``, each ``.png`` and ``.pdf``.

    Parameters
    ----------
    table : design table
        See the module docstring.
    metric : str
        Column of the achieved metric.
    out_dir : path-like
        Folder to write into.
    caption : str, optional
        Caption of every figure.
    by, better, units, requirement
        As for :func:`plot_metric_vs_total`.
    long_name : str, optional
        Axis label of the metric (default: its registry long name, or the column name).
    study : str, optional
        The study's name, for the titles.

    Returns
    -------
    list of pathlib.Path
        Written files in order.
    """
    import matplotlib.pyplot as plt

    cols = design_columns(table, ["total", by, metric], optional=["meets"])  # validate first
    _better_and_units(metric, better, units)
    jobs = [("trade_metric_vs_total", lambda ax: plot_metric_vs_total(
        table, metric, by=by, better=better, units=units, requirement=requirement, ax=ax,
        long_name=long_name))]
    if "meets" in cols:
        jobs.append(("trade_min_total", lambda ax: plot_minimum_total_map(table, ax=ax)))
    jobs.append(("trade_pareto", lambda ax: plot_pareto_front(
        table, metric, better=better, units=units, requirement=requirement, ax=ax,
        long_name=long_name)))
    out = Path(os.fspath(out_dir))
    written = []
    for stem, draw in jobs:
        with style.report_style():
            fig, ax = _new_figure()
        try:
            draw(ax)
            ax.set_title(style.figure_title(ax.get_title(), study))
            style.add_caption(fig, caption)
            written += style.save_png_and_pdf(fig, out, stem)
        finally:
            plt.close(fig)
    return written
