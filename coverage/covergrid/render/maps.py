"""Report-ready maps of per-cell coverage metrics.

A map shows one metric of a coverage Dataset (dims ``lat``, ``lon``; bounds ``lat_bnds``,
``lon_bnds``) as filled grid cells drawn on their true bounds, with the bundled coastlines,
labelled gridlines, a colour bar in a readable unit, a title, the caller's caption and the
standard footer. Colours and units follow :mod:`covergrid.render.style`. Cells holding NaN
(for example outside the computed latitude band) are left transparent.

Saved maps (:func:`save_metric_maps`) are ``maps/<metric>.png`` at 200 dpi and
``maps/<metric>.pdf``, both from one figure. In the PDF the text, coastlines, gridlines, colour
bar and map outline are vector graphics and the cell mesh alone is one embedded image at
:data:`covergrid.render.style.PRINT_DPI` (300 dpi): a 1 deg grid is 64,800 cells, and as vector
paths they made the PDF slow to write (about 2 s a map) and to open, for no visible gain at print
size. ``nfold_fraction`` is drawn once per fold ``k``: ``maps/nfold_fraction_k<k>.png``.
"""

from __future__ import annotations

import datetime as _dt
import os
from collections.abc import Callable, Iterable, Mapping
from pathlib import Path

import numpy as np

from covergrid.errors import CovergridError
from covergrid.render import style
from covergrid.render.coastlines import coastline_geometry
from covergrid.render.gridlines import gridline_crs

__all__ = [
    "MAP_FIGSIZE_IN",
    "PROJECTIONS",
    "design_caption",
    "get_projection",
    "plot_metric_map",
    "prepare_drawing",
    "save_metric_maps",
]

#: Size of a saved map figure [in]; at 200 dpi a PNG is 1700 x 1000 pixels.
MAP_FIGSIZE_IN = (8.5, 5.0)

# Latitude where the polar views stop [deg]: the pole down to 20 deg keeps polar detail legible.
_POLAR_EDGE_LAT_DEG = 20.0


def _robinson(lon0, lat0):
    import cartopy.crs as ccrs

    return ccrs.Robinson(central_longitude=lon0)


def _plate_carree(lon0, lat0):
    import cartopy.crs as ccrs

    return ccrs.PlateCarree(central_longitude=lon0)


def _mollweide(lon0, lat0):
    import cartopy.crs as ccrs

    return ccrs.Mollweide(central_longitude=lon0)


def _equal_earth(lon0, lat0):
    import cartopy.crs as ccrs

    return ccrs.EqualEarth(central_longitude=lon0)


def _orthographic(lon0, lat0):
    import cartopy.crs as ccrs

    return ccrs.Orthographic(central_longitude=lon0, central_latitude=lat0)


def _polar_north(lon0, lat0):
    import cartopy.crs as ccrs

    return ccrs.NorthPolarStereo(central_longitude=lon0)


def _polar_south(lon0, lat0):
    import cartopy.crs as ccrs

    return ccrs.SouthPolarStereo(central_longitude=lon0)


#: Projection names of our own -> factory ``f(centre_lon_deg, centre_lat_deg) -> cartopy CRS``.
PROJECTIONS: dict[str, Callable] = {
    "robinson": _robinson,
    "plate_carree": _plate_carree,
    "mollweide": _mollweide,
    "equal_earth": _equal_earth,
    "orthographic": _orthographic,
    "polar_north": _polar_north,
    "polar_south": _polar_south,
}


def get_projection(projection="robinson", *, centre_lon_deg: float = 0.0,
                   centre_lat_deg: float = 0.0):
    """Look up a map projection by our short name.

    Parameters
    ----------
    projection : str or cartopy.crs.Projection
        A name from :data:`PROJECTIONS`, or a cartopy projection used as given.
    centre_lon_deg : float
        Central longitude [deg].
    centre_lat_deg : float
        Central latitude [deg] (orthographic only).

    Returns
    -------
    cartopy.crs.Projection
        The projection.

    Raises
    ------
    covergrid.errors.CovergridError
        A ValueError subclass: unknown name; the message lists the valid names.
    """
    import cartopy.crs as ccrs

    if isinstance(projection, ccrs.Projection):
        return projection
    if not isinstance(projection, str) or projection not in PROJECTIONS:
        raise CovergridError(
            f"{projection!r} is unknown; choose one of {sorted(PROJECTIONS)}", field="projection"
        )
    return PROJECTIONS[projection](float(centre_lon_deg), float(centre_lat_deg))


def _projection_name(projection) -> str | None:
    return projection if isinstance(projection, str) else None


def polar_edge_deg(projection_name: str, lat_edges) -> float:
    """Latitude where a polar view stops [deg]: the data's edge nearest the equator, at
    most :data:`_POLAR_EDGE_LAT_DEG` from it (further out the view is mostly distortion)."""
    north = projection_name == "polar_north"
    lats = np.asarray(lat_edges, dtype=float)
    lats = lats[lats >= 0] if north else lats[lats <= 0]
    default = _POLAR_EDGE_LAT_DEG if north else -_POLAR_EDGE_LAT_DEG
    if lats.size < 2:  # no data in this hemisphere: the usual view
        return default
    edge = float(lats.min()) if north else float(lats.max())
    return max(edge, default) if north else min(edge, default)


#: Spacing of the parallels on a polar view [deg] (stated under the map: no inline labels).
POLAR_PARALLEL_STEP_DEG = 10.0


def prepare_map_axes(ax, projection_name, lat_edges=None):
    """Extent, polar circle boundary, coastlines and gridlines for one map axes.

    Parameters
    ----------
    ax : cartopy GeoAxes
        The map.
    projection_name : str or None
        Name from :data:`PROJECTIONS` (None: a caller's own projection, left as it is).
    lat_edges : array_like, optional
        Latitude edges of the data [deg]: a polar view stops at the data's edge
        (:func:`polar_edge_deg`); a world map of a latitude band shows that band (with a
        margin of :data:`BAND_MARGIN_DEG`), not the whole globe.
    """
    import cartopy.crs as ccrs
    import matplotlib.path as mpath
    import matplotlib.ticker as mticker

    polar = projection_name in ("polar_north", "polar_south")
    if polar:
        edges = lat_edges if lat_edges is not None else []
        edge = polar_edge_deg(projection_name, edges)
        pole = 90.0 if projection_name == "polar_north" else -90.0
        ax.set_extent([-180, 180, min(edge, pole), max(edge, pole)], crs=ccrs.PlateCarree())
        theta = np.linspace(0, 2 * np.pi, 200)
        circle = mpath.Path(np.column_stack([np.sin(theta), np.cos(theta)]) * 0.5 + 0.5)
        ax.set_boundary(circle, transform=ax.transAxes)
    elif projection_name in (None, "orthographic"):
        pass
    else:
        lo, hi = ((float(np.min(lat_edges)), float(np.max(lat_edges)))
                  if lat_edges is not None else (-90.0, 90.0))
        if hi - lo < 180.0 - 2 * BAND_MARGIN_DEG:
            ax.set_extent([-180, 180, max(lo - BAND_MARGIN_DEG, -90.0),
                           min(hi + BAND_MARGIN_DEG, 90.0)], crs=ccrs.PlateCarree())
        else:
            ax.set_global()
    # A thin light halo under the dark line keeps the coast legible on dark and light cells alike.
    coast = [coastline_geometry("110m")]
    ax.add_geometries(coast, crs=ccrs.PlateCarree(), facecolor="none", edgecolor="white",
                      linewidth=1.1, alpha=0.7, zorder=3)
    ax.add_geometries(coast, crs=ccrs.PlateCarree(), facecolor="none", edgecolor="0.1",
                      linewidth=0.45, zorder=3)
    rectangular = projection_name == "plate_carree"
    gl = ax.gridlines(crs=gridline_crs(), draw_labels=True, linewidth=0.3, color="0.4",
                      alpha=0.6, linestyle="--", zorder=4,
                      x_inline=False if rectangular else None,
                      y_inline=False if rectangular else None,
                      **({"ylocs": mticker.MultipleLocator(POLAR_PARALLEL_STEP_DEG)}
                         if polar else {}))
    gl.top_labels = False
    gl.right_labels = False
    if projection_name == "orthographic":  # meridian labels crowd at the limb; keep latitudes
        gl.bottom_labels = False
    if polar:
        # latitude labels inside a polar view sit on the data: say the parallels instead,
        # in the corner the round map leaves empty
        gl.y_inline = False  # parallels never meet the round edge: meridians labelled only
        gl.top_labels = gl.right_labels = True
        hemisphere = "N" if projection_name == "polar_north" else "S"
        ax.text(0.0, 0.0, f"parallels every {POLAR_PARALLEL_STEP_DEG:g}\u00b0;\nedge "
                f"{abs(edge):g}\u00b0 {hemisphere}", transform=ax.transAxes, ha="left",
                va="bottom", fontsize=7, color="0.25")
    gl.xlabel_style = {"size": 7}
    gl.ylabel_style = {"size": 7}
    return gl


#: Latitude margin around a latitude band on a world map [deg].
BAND_MARGIN_DEG = 5.0


def _edges_from_bounds(bounds: np.ndarray) -> np.ndarray:
    """Cell edges (n + 1,) from CF bounds (n, 2) of contiguous cells [deg]."""
    bounds = np.asarray(bounds, dtype=float)
    return np.concatenate([bounds[:, 0], bounds[-1:, 1]])


def metric_field(ds, metric: str, k: int | None):
    if metric not in ds.data_vars:
        metrics = sorted(n for n in ds.data_vars if {"lat", "lon"} <= set(ds[n].dims)
                         and n != "cell_area")
        raise CovergridError(f"{metric!r} is not in the Dataset; it holds {metrics}",
                             field="metric")
    da = ds[metric]
    if "k" in da.dims:
        folds = [int(v) for v in ds["k"].values]
        if k is None or int(k) not in folds:
            raise CovergridError(f"{metric} needs a fold; got {k!r}, the Dataset holds k={folds}",
                                 field="k")
        da = da.sel(k=int(k))
    elif k is not None:
        raise CovergridError(f"{k!r} given but {metric} has no fold dimension 'k'", field="k")
    fold = int(k) if k is not None and "k" in ds[metric].dims else None
    return da.transpose("lat", "lon"), fold


def plot_metric_map(ds, metric: str, *, ax=None, projection="robinson", title=None,
                    caption=None, cmap=None, k=None, centre_lon_deg: float = 0.0,
                    centre_lat_deg: float = 0.0, requirement=None, study: str | None = None):
    """Draw one per-cell metric as a map with coastlines, gridlines and a colour bar.

    Parameters
    ----------
    ds : xarray.Dataset
        Coverage Dataset with ``lat``/``lon`` and their bounds ``lat_bnds``/``lon_bnds`` [deg].
    metric : str
        Variable to draw, e.g. ``"max_gap"``.
    ax : cartopy.mpl.geoaxes.GeoAxes, optional
        Axes to draw on (its projection is kept). Without one a report figure of
        :data:`MAP_FIGSIZE_IN` is made, with the caption and footer at the bottom.
    projection : str or cartopy.crs.Projection
        Name from :data:`PROJECTIONS` (``"robinson"`` default) or a cartopy projection. A
        world projection of a latitude band shows the band; a polar view stops at the data.
    title : str, optional
        Title; the metric's long name by default (followed by the study's name).
    caption : str, optional
        Caption under the map (for example from :func:`design_caption`); only on a new figure.
    cmap : str or Colormap, optional
        Colour map override (otherwise the rules of :mod:`covergrid.render.scales`).
    k : int, optional
        Fold for ``nfold_fraction`` (required there).
    centre_lon_deg, centre_lat_deg : float
        Centre of the projection [deg].
    requirement : Requirement or RequirementMark, optional
        The study's requirement (:mod:`covergrid.render.marks`): the cells not meeting it
        are hatched; on the map of its own metric the threshold is a contour and the scale
        two-tone; the caption ends with the verdict.
    study : str, optional
        The study's name, for the title.

    Returns
    -------
    matplotlib.collections.QuadMesh
        The cell mesh; its colour bar is ``mesh.colorbar``.

    Raises
    ------
    covergrid.errors.CovergridError
        A ValueError subclass: unknown metric, missing or unknown fold, or unknown projection.
    """
    import cartopy.crs as ccrs
    import matplotlib.pyplot as plt

    from covergrid.compute.quantities import format_values
    from covergrid.render import marks, scales

    da, fold = metric_field(ds, metric, k)
    units = da.attrs.get("units")
    values = np.asarray(da.values, dtype=float)
    mark = marks.as_mark(requirement, ds)
    on_metric = mark is not None and mark.is_on(metric, fold)
    unit = style.display_unit(metric, units, values)
    shown = np.ma.masked_invalid(values * unit.factor)
    lon_edges = _edges_from_bounds(ds["lon_bnds"].values)
    lat_edges = _edges_from_bounds(ds["lat_bnds"].values)
    plate = ccrs.PlateCarree()

    with style.report_style():
        if ax is None:
            crs = get_projection(projection, centre_lon_deg=centre_lon_deg,
                                 centre_lat_deg=centre_lat_deg)
            fig = plt.figure(figsize=MAP_FIGSIZE_IN)
            ax = fig.add_axes((0.04, 0.19, 0.80, 0.72), projection=crs)
            own_figure = True
        else:
            fig, own_figure = ax.figure, False
        name = _projection_name(projection) if own_figure else None
        prepare_map_axes(ax, name, lat_edges)

        threshold = None
        if on_metric and mark is not None:
            threshold = mark.threshold * unit.factor
        scale = scales.colour_scale(metric, units, shown, cmap=cmap, threshold=threshold,
                                    sense=mark.sense if mark is not None else None)
        mesh = ax.pcolormesh(lon_edges, lat_edges, shown, transform=plate,
                             cmap=scale.cmap, norm=scale.norm, shading="flat",
                             edgecolors="face", linewidth=0, zorder=1, rasterized=True)
        key = None
        if mark is not None and mark.fails is not None and mark.fails.shape == values.shape:
            hatched = marks.hatch_cells(ax, lon_edges, lat_edges, mark.fails, transform=plate)
            threshold_text = None
            if threshold is not None and scale.decision_level is not None:
                contour = marks.threshold_contour(
                    ax, np.asarray(ds["lon"].values, dtype=float),
                    np.asarray(ds["lat"].values, dtype=float), shown.filled(np.nan),
                    scale.decision_level, transform=plate)
                if contour is not None:  # the key names only what is drawn
                    threshold_text = format_values([mark.threshold], unit)[0]
            if hatched is not None or threshold_text is not None:
                key = marks.key_handles(mark, threshold_text=threshold_text,
                                        hatched=hatched is not None)
        if own_figure:
            # Put the colour bar beside the map as drawn (narrow projections leave room).
            ax.apply_aspect()
            box = ax.get_position()
            cax = fig.add_axes((min(box.x1 + 0.03, 0.86), box.y0 + 0.1 * box.height, 0.022,
                                0.8 * box.height))
            cbar = fig.colorbar(mesh, cax=cax, ticks=scale.ticks, extend=scale.extend)
        else:
            cbar = fig.colorbar(mesh, ax=ax, shrink=0.8, ticks=scale.ticks, extend=scale.extend)
        if scale.tick_labels is not None and scale.ticks is not None:
            cbar.set_ticks(scale.ticks, labels=scale.tick_labels)
            cbar.ax.minorticks_off()
            if scale.threshold_tick is not None:
                cbar.ax.get_yticklabels()[scale.threshold_tick].set_fontweight("bold")
        cbar.set_label(style.metric_label(metric, da.attrs, unit, k=fold))
        cbar.outline.set_linewidth(0.5)
        if cbar.solids is not None:  # matplotlib rasterises long colour bars; keep it vector
            cbar.solids.set_rasterized(False)
            cbar.solids.set_edgecolor("face")
        if title is None:
            title = style.fold_text(str(da.attrs.get("long_name") or metric.replace("_", " ")),
                                    fold)
            title = title[:1].upper() + title[1:]
        ax.set_title(style.figure_title(title, study), pad=8)
        if own_figure:
            if mark is not None:
                caption = "\n".join(c for c in (caption, mark.caption()) if c)
            style.add_caption(fig, caption, key=key)
    return mesh


def prepare_drawing(projection="robinson", folder=None) -> list[Path]:
    """Load once in a process what every map in ``projection`` needs, drawing nothing kept.

    An empty global map frame (coastlines, gridlines and their labels, a title and a caption)
    is drawn and saved as PNG and PDF into memory: the fonts, the projected coastlines and
    gridlines (remembered per process, :mod:`covergrid.render.gridlines`) and both
    backends are then ready, so the first real map costs what the others do. A figure
    helper process runs it while the coverage is computed. ``folder`` is ignored (the
    signature of a figure job); returns no path.
    """
    import io

    import matplotlib.pyplot as plt

    crs = get_projection(projection)
    with style.report_style():
        fig = plt.figure(figsize=MAP_FIGSIZE_IN)
        try:
            ax = fig.add_axes((0.04, 0.19, 0.80, 0.72), projection=crs)
            prepare_map_axes(ax, _projection_name(projection), np.array([-90.0, 90.0]))
            ax.set_title(style.figure_title("Frame", "warm-up"), pad=8)
            style.add_caption(fig, "Frame drawn to load fonts and projected lines.")
            for fmt, dpi in (("png", style.DPI), ("pdf", style.PRINT_DPI)):
                fig.savefig(io.BytesIO(), format=fmt, dpi=dpi)
        finally:
            plt.close(fig)
    return []


def _map_jobs(ds, metrics: Iterable[str], k):
    for metric in metrics:
        if metric in ds.data_vars and "k" in ds[metric].dims:
            folds = [int(v) for v in ds["k"].values] if k is None else [int(k)]
            for fold in folds:
                yield metric, fold, f"{metric}_k{fold}"
        else:
            yield metric, None, metric


def save_metric_maps(ds, metrics: Iterable[str], out_dir, *, caption: str | None,
                     projection="robinson", k: int | None = None,
                     titles: Mapping[str, str] | None = None, requirement=None,
                     study: str | None = None) -> list[Path]:
    """Write a PNG (200 dpi) and a vector PDF map of each metric under ``out_dir/maps/``.

    Parameters
    ----------
    ds : xarray.Dataset
        Coverage Dataset.
    metrics : iterable of str
        Metrics to draw.
    out_dir : path-like
        Study output folder; files go to ``out_dir/maps/<metric>.png`` and ``.pdf``.
    caption : str or None
        Caption of every map (the design and span; see :func:`design_caption`).
    projection : str or cartopy.crs.Projection
        Projection name or object.
    k : int, optional
        For fold metrics (``nfold_fraction``): draw only this fold; by default one map per fold,
        named ``<metric>_k<k>``.
    titles : mapping, optional
        Title per metric name, overriding the default.
    requirement : Requirement or RequirementMark, optional
        The study's requirement, marked on every map (see :func:`plot_metric_map`).
    study : str, optional
        The study's name, for the titles.

    Returns
    -------
    list of pathlib.Path
        Written files, PNG then PDF for each map, in order.

    Raises
    ------
    covergrid.errors.CovergridError
        A ValueError subclass: unknown metric, fold or projection (raised before any file
        is written).
    """
    import matplotlib.pyplot as plt

    metrics = list(metrics)
    jobs = list(_map_jobs(ds, metrics, k))
    for metric, fold, _ in jobs:  # validate everything before writing anything
        metric_field(ds, metric, fold)
    get_projection(projection)
    maps_dir = Path(os.fspath(out_dir)) / "maps"
    written: list[Path] = []
    for metric, fold, stem in jobs:
        title = (titles or {}).get(metric)
        mesh = plot_metric_map(ds, metric, projection=projection, title=title, caption=caption,
                               k=fold, requirement=requirement, study=study)
        fig = mesh.axes.figure
        try:
            written += style.save_png_and_pdf(fig, maps_dir, stem)
        finally:
            plt.close(fig)
    return written


_CAPTION_KEYS = {
    "pattern", "total", "planes", "phasing", "altitude_km", "inclination_deg",
    "min_elevation_deg", "max_off_nadir_deg", "max_range_km", "duration_h", "step_s", "epoch",
    "min_off_nadir_deg", "look_side",
}


def _fmt(value: float, digits: int = 1) -> str:
    text = f"{float(value):.{digits}f}"
    return text.rstrip("0").rstrip(".") if "." in text else text


def design_caption(study_like: Mapping) -> str:
    """Caption text stating the design, the sensor limits and the time span of a study.

    Parameters
    ----------
    study_like : mapping
        Plain dict with any of: ``pattern`` ("delta" or "star"), ``total``, ``planes``,
        ``phasing`` (Walker T/P/F), ``altitude_km``, ``inclination_deg``, ``min_elevation_deg``,
        ``max_off_nadir_deg``, ``max_range_km``, ``duration_h``, ``step_s``, ``epoch`` (ISO text
        or datetime64), ``min_off_nadir_deg`` and ``look_side`` (a side-looking sensor:
        "left", "right" or "both"). Missing or None entries are left out.

    Returns
    -------
    str
        For example ``"Walker delta 24/3/1, altitude 550 km, inclination 53\u00b0. Sensor: minimum
        elevation 10\u00b0. Span 24 h from 2026-03-01T00:00:00Z, step 60 s."``

    Raises
    ------
    covergrid.errors.CovergridError
        A ValueError subclass: an unknown key (named, with the allowed keys), or T/P/F
        given only in part.
    """
    unknown = sorted(set(study_like) - _CAPTION_KEYS)
    if unknown:
        raise CovergridError(
            f"unknown key(s) {unknown}; allowed keys are {sorted(_CAPTION_KEYS)}",
            field="design_caption",
        )
    s = {key: value for key, value in study_like.items() if value is not None}
    sentences = []
    design = []
    tpf = [s.get("total"), s.get("planes"), s.get("phasing")]
    if any(v is not None for v in tpf):
        if any(v is None for v in tpf):
            raise CovergridError(
                f"total, planes and phasing go together; got {tpf}", field="design_caption"
            )
        pattern = s.get("pattern", "delta")
        design.append(f"Walker {pattern} " + "/".join(str(int(v)) for v in tpf if v is not None))
    elif "pattern" in s:
        design.append(f"Walker {s['pattern']}")
    if "altitude_km" in s:
        design.append(f"altitude {_fmt(s['altitude_km'])} km")
    if "inclination_deg" in s:
        design.append(f"inclination {_fmt(s['inclination_deg'], 2)}\u00b0")
    if design:
        first = ", ".join(design)
        sentences.append(first[:1].upper() + first[1:] + ".")
    sensor = []
    if "min_elevation_deg" in s:
        sensor.append(f"minimum elevation {_fmt(s['min_elevation_deg'])}\u00b0")
    if "min_off_nadir_deg" in s and np.isfinite(float(s["min_off_nadir_deg"])):
        sensor.append(f"minimum off-nadir {_fmt(s['min_off_nadir_deg'])}\u00b0")
    if "max_off_nadir_deg" in s and np.isfinite(float(s["max_off_nadir_deg"])):
        sensor.append(f"maximum off-nadir {_fmt(s['max_off_nadir_deg'])}\u00b0")
    if s.get("look_side") in ("left", "right"):
        sensor.append(f"looking {s['look_side']} of the track")
    if "max_range_km" in s and np.isfinite(float(s["max_range_km"])):
        sensor.append(f"maximum range {_fmt(s['max_range_km'], 0)} km")
    if sensor:
        sentences.append("Sensor: " + ", ".join(sensor) + ".")
    span = f"Span {_fmt(s['duration_h'], 2)} h" if "duration_h" in s else ""
    if "epoch" in s:
        epoch = s["epoch"]
        if isinstance(epoch, _dt.datetime):
            epoch = np.datetime64(epoch.astimezone(_dt.timezone.utc).replace(tzinfo=None))
        if isinstance(epoch, np.datetime64):
            epoch = np.datetime_as_string(epoch.astype("datetime64[s]")) + "Z"
        span += (" from " if span else "Epoch ") + str(epoch)
    if "step_s" in s:
        span += (", step " if span else "Step ") + f"{_fmt(s['step_s'], 3)} s"
    if span:
        sentences.append(span + ".")
    return " ".join(sentences)
