"""The requirement drawn on figures: where it is not met, its threshold, its verdict.

A :class:`RequirementMark` carries what every map and latitude profile of a run needs to
show the study's requirement: the verdict (met or not, achieved value, margin, share of the
area meeting it), the threshold, and the cells that do not meet it (the per-cell rule of
:func:`covergrid.compute.requirement.meets_threshold`; cells without a value count as not
meeting, as in the verdict). It holds plain data only, so a figure job sent to a helper
process carries it as it is.

- On every map, the cells not meeting the requirement are hatched (:func:`hatch_cells`),
  whatever metric the map shows; on the map of the requirement's own metric (and fold) the
  threshold is also drawn as a contour (:func:`threshold_contour`) and the colours are the
  two-tone scale of :mod:`covergrid.render.scales`.
- On every latitude profile, the latitude rows holding a cell that does not meet it are
  hatched; on the panel of the requirement's metric the threshold is a vertical line.
- Every caption ends with the verdict in words (:meth:`RequirementMark.caption`), its
  numbers formatted by :mod:`covergrid.compute.quantities` as on the command line.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass
from typing import Any

import numpy as np

from covergrid.compute.quantities import verdict_text

__all__ = [
    "HATCH",
    "RequirementMark",
    "as_mark",
    "hatch_cells",
    "hatch_rows",
    "key_handles",
    "requirement_mark",
    "threshold_contour",
]

#: Hatching of what does not meet the requirement (dense enough to see at print size, thin
#: enough to read the colour under it).
HATCH = "////"
_HATCH_COLOUR = "0.15"
_CONTOUR_COLOUR = "black"


@dataclass(frozen=True)
class RequirementMark:
    """The requirement of a study as its figures draw it (plain data; see the module notes).

    Attributes
    ----------
    metric, k : str, int or None
        The requirement's metric and fold.
    sense : str
        ``"at_most"`` or ``"at_least"``.
    threshold : float
        The limit [metric units].
    area_fraction : float
        Share of the area that must meet it [unitless].
    verdict : mapping
        :func:`covergrid.compute.summary.requirement_verdict` result.
    long_name, units, kind : str
        The metric's long name, stored units and kind (registry).
    fails : numpy.ndarray of bool or None, shape (n_lat, n_lon)
        Cells not meeting the threshold (None when the Dataset did not hold the metric).
    """

    metric: str
    k: int | None
    sense: str
    threshold: float
    area_fraction: float
    verdict: Mapping[str, Any]
    long_name: str
    units: str
    kind: str
    fails: np.ndarray | None = None

    def is_on(self, metric: str, k: int | None) -> bool:
        """Whether a field (metric and fold) is the one the requirement is stated on."""
        return metric == self.metric and (self.k is None or k is None or int(k) == self.k)

    def caption(self) -> str:
        """The verdict sentence every caption ends with."""
        return "Requirement: " + verdict_text(self.verdict, long_name=self.long_name,
                                              kind=self.kind) + "."


def requirement_mark(requirement, ds, verdict: Mapping[str, Any] | None = None
                     ) -> RequirementMark:
    """The mark of a requirement on a coverage Dataset.

    Parameters
    ----------
    requirement : covergrid.compute.requirement.Requirement
        The requirement.
    ds : xarray.Dataset
        Coverage Dataset holding the requirement's metric (and ``cell_area`` when
        ``verdict`` is not given).
    verdict : mapping, optional
        The verdict already computed (a run's summary holds it).

    Returns
    -------
    RequirementMark
    """
    from covergrid.compute.metrics import METRICS

    info = METRICS.get(requirement.metric)
    if verdict is None:
        verdict = requirement.verdict(ds)
    fails = None
    if requirement.metric in ds.data_vars:
        da = ds[requirement.metric]
        if "k" in da.dims and requirement.k is not None:
            da = da.sel(k=int(requirement.k))
        values = np.asarray(da.transpose("lat", "lon").values, dtype=float)
        fails = ~requirement.meets(values)
    return RequirementMark(
        metric=requirement.metric, k=requirement.k, sense=requirement.sense,
        threshold=float(requirement.threshold), area_fraction=float(requirement.area_fraction),
        verdict=dict(verdict),
        long_name=info.long_name if info is not None else requirement.metric,
        units=info.units if info is not None else str(verdict.get("units", "")),
        kind=info.kind if info is not None else "count", fails=fails)


def as_mark(requirement, ds) -> RequirementMark | None:
    """A :class:`RequirementMark` from a mark, a ``Requirement`` (measured on ``ds``) or
    None."""
    if requirement is None or isinstance(requirement, RequirementMark):
        return requirement
    return requirement_mark(requirement, ds)


def _runs(flags: np.ndarray) -> list[tuple[int, int]]:
    """(start, stop) of each run of True in a 1-D boolean array."""
    padded = np.concatenate([[False], flags, [False]]).astype(np.int8)
    change = np.flatnonzero(np.diff(padded))
    return list(zip(change[::2].tolist(), change[1::2].tolist(), strict=True))


def hatch_cells(ax, lon_edges, lat_edges, fails, *, transform=None):
    """Hatch the cells of a map that do not meet the requirement.

    Runs of failing cells along each latitude row are merged into one rectangle each (the
    cells' true bounds), so the hatching follows the grid exactly at a cost of one path per
    run, not per cell.

    Parameters
    ----------
    ax : matplotlib Axes or cartopy GeoAxes
        The map.
    lon_edges, lat_edges : numpy.ndarray, shapes (n_lon + 1,), (n_lat + 1,)
        Cell edges [deg].
    fails : numpy.ndarray of bool, shape (n_lat, n_lon)
        Cells to hatch.
    transform : optional
        Data coordinate system of the edges (plate carree for a map).

    Returns
    -------
    matplotlib.collections.PolyCollection or None
        The hatched rectangles (``gid`` ``"covergrid-requirement-hatch"``), None when every
        cell meets the requirement.
    """
    from matplotlib.collections import PolyCollection

    fails = np.asarray(fails, dtype=bool)
    boxes = []
    for row in range(fails.shape[0]):
        y0, y1 = float(lat_edges[row]), float(lat_edges[row + 1])
        for start, stop in _runs(fails[row]):
            x0, x1 = float(lon_edges[start]), float(lon_edges[stop])
            # a few vertices along each parallel, so the rectangle bends with the projection
            xs = np.linspace(x0, x1, max(2, int(abs(x1 - x0) // 10) + 2))
            boxes.append(np.concatenate([np.column_stack([xs, np.full(xs.size, y0)]),
                                         np.column_stack([xs[::-1], np.full(xs.size, y1)])]))
    if not boxes:
        return None
    kw = {} if transform is None else {"transform": transform}
    projection = getattr(ax, "projection", None)
    hidden: list = []
    if transform is not None and projection is not None:
        # project the vertices at once (numpy) instead of path by path through cartopy's
        # geometry projection, which took about a second for the rectangles of a 1 deg map;
        # a run of cells never crosses the antimeridian, so its points project as they are.
        # Rectangles reaching out of view (the far side of an orthographic globe) go the
        # slow way, which clips them.
        points = np.concatenate(boxes)
        xy = projection.transform_points(transform, points[:, 0], points[:, 1])[:, :2]
        sizes = np.cumsum([len(b) for b in boxes])[:-1]
        parts = np.split(xy, sizes)
        seen = [bool(np.all(np.isfinite(part))) for part in parts]
        hidden = [box for box, ok in zip(boxes, seen, strict=True) if not ok]
        boxes = [part for part, ok in zip(parts, seen, strict=True) if ok]
        kw = {"transform": ax.transData}
    hatch = None
    for polygons, where in ((boxes, kw), (hidden, {"transform": transform})):
        if not polygons:
            continue
        part = PolyCollection(polygons, facecolors="none", edgecolors=_HATCH_COLOUR,
                              linewidths=0.0, hatch=HATCH, zorder=2, **where)
        part.set_gid("covergrid-requirement-hatch")
        ax.add_collection(part)
        hatch = hatch or part
    return hatch


def threshold_contour(ax, lon_centres, lat_centres, values, level: float, *, transform=None):
    """Draw the requirement's threshold as a contour of the field (cell centres).

    Parameters
    ----------
    ax : Axes
        The map.
    lon_centres, lat_centres : numpy.ndarray
        Cell centres [deg], (n_lon,), (n_lat,).
    values : numpy.ndarray, shape (n_lat, n_lon)
        The field in the units of ``level``.
    level : float
        The contour level (the threshold; for whole numbers the edge between the last value
        failing and the first meeting).

    Returns
    -------
    matplotlib.contour.QuadContourSet or None
        The contour (``gid`` ``"covergrid-requirement-contour"``); None when no two
        neighbouring cells lie on both sides of the level.
    """
    field = np.ma.masked_invalid(np.asarray(values, dtype=float))
    data = field.compressed()
    if data.size == 0 or not (data.min() < level < data.max()):
        return None
    kw = {} if transform is None else {"transform": transform}
    contour = ax.contour(lon_centres, lat_centres, field, levels=[level],
                         colors=_CONTOUR_COLOUR, linewidths=1.1, zorder=4, **kw)
    contour.set_gid("covergrid-requirement-contour")
    return contour


def hatch_rows(ax, lat_edges, fails) -> list:
    """Hatch the latitude rows of a profile panel that hold a failing cell."""
    rows = np.asarray(np.asarray(fails, dtype=bool).any(axis=1))
    spans = []
    for start, stop in _runs(rows):
        span = ax.axhspan(float(lat_edges[start]), float(lat_edges[stop]), facecolor="none",
                          edgecolor=_HATCH_COLOUR, hatch=HATCH, linewidth=0.0, zorder=0.5)
        span.set_gid("covergrid-requirement-hatch")
        spans.append(span)
    return spans


def key_handles(mark: RequirementMark, *, threshold_text: str | None, line: str = "contour",
                hatched: bool | str = True) -> list:
    """Legend entries explaining the marks drawn: the hatching (``hatched``: its label, or
    True for "requirement not met", False when nothing is hatched) and the threshold."""
    import matplotlib.lines as mlines
    import matplotlib.patches as mpatches

    handles: list = []
    if threshold_text is not None:
        handles.append(mlines.Line2D([], [], color=_CONTOUR_COLOUR, linewidth=1.1,
                                     linestyle="-" if line == "contour" else "--",
                                     label=f"requirement threshold {threshold_text}"))
    if hatched:
        label = hatched if isinstance(hatched, str) else "requirement not met"
        handles.append(mpatches.Patch(facecolor="none", edgecolor=_HATCH_COLOUR, hatch=HATCH,
                                      linewidth=0.0, label=label))
    return handles
