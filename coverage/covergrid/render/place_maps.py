"""Maps of point targets coloured by a per-target metric, and region outlines on maps.

The targets are drawn as markers on a plate carree map of the area they span (a margin of
a tenth of their extent, at least 2 deg), coloured with the metric's colour map and units
(:mod:`covergrid.render.style`), over the bundled coastlines; a region's outline, when
given, is drawn as a line (its GeoJSON areas as straight lines in longitude and latitude).
"""

from __future__ import annotations

from pathlib import Path
from typing import Any

import numpy as np

from covergrid.render import style

__all__ = ["draw_region_outline", "plot_target_map", "save_region_maps"]

#: Least margin around the targets [deg].
_MARGIN_DEG = 2.0


def draw_region_outline(ax: Any, outline: Any) -> None:
    """Draw a shapely (multi)line of a region's boundary on map axes (plate carree data)."""
    import cartopy.crs as ccrs
    import shapely

    if outline is None:
        return
    for line in getattr(outline, "geoms", [outline]):
        xy = np.asarray(shapely.get_coordinates(line))
        if xy.size:
            ax.plot(xy[:, 0], xy[:, 1], transform=ccrs.PlateCarree(), color="black",
                    linewidth=0.9, zorder=4)


def plot_target_map(lat_deg: np.ndarray, lon_deg: np.ndarray, values: np.ndarray, metric: str,
                    units: str, long_name: str, folder: Path, stem: str, *,
                    caption: str | None = None, outline: Any = None,
                    fails: np.ndarray | None = None, study: str | None = None) -> list[Path]:
    """Draw the targets coloured by ``values`` and save ``folder/<stem>.png`` and ``.pdf``;
    targets flagged in ``fails`` (a requirement on this metric not met) are ringed."""
    import cartopy.crs as ccrs
    import matplotlib.pyplot as plt

    from covergrid.render.maps import prepare_map_axes

    lat = np.asarray(lat_deg, float)
    lon = (np.asarray(lon_deg, float) + 180.0) % 360.0 - 180.0
    vals = np.asarray(values, float)
    unit = style.display_unit(metric, units, vals)
    shown = vals * unit.factor
    span_lon = max(float(np.ptp(lon)), 1e-9)
    span_lat = max(float(np.ptp(lat)), 1e-9)
    m_lon = max(_MARGIN_DEG, 0.1 * span_lon)
    m_lat = max(_MARGIN_DEG, 0.1 * span_lat)
    extent = (max(lon.min() - m_lon, -180.0), min(lon.max() + m_lon, 180.0),
              max(lat.min() - m_lat, -90.0), min(lat.max() + m_lat, 90.0))
    with style.report_style():
        fig = plt.figure(figsize=(8.0, 6.0))
        ax: Any = fig.add_axes((0.06, 0.19, 0.76, 0.72), projection=ccrs.PlateCarree())
        prepare_map_axes(ax, None)  # coastlines and gridlines, our own extent
        ax.set_extent(extent, crs=ccrs.PlateCarree())
        draw_region_outline(ax, outline)
        sc = ax.scatter(lon, lat, c=shown, cmap=style.colormap_for(metric, units), s=36,
                        edgecolors="black", linewidths=0.4, transform=ccrs.PlateCarree(),
                        zorder=5)
        if fails is not None and np.any(fails):
            bad = np.asarray(fails, bool)
            ax.scatter(lon[bad], lat[bad], s=140, facecolors="none", edgecolors="#b2182b",
                       linewidths=1.6, transform=ccrs.PlateCarree(), zorder=6,
                       label="target requirement not met")
            ax.legend(loc="lower left", fontsize=7, frameon=True)
        ax.apply_aspect()
        box = ax.get_position()
        cax = fig.add_axes((min(box.x1 + 0.03, 0.88), box.y0 + 0.1 * box.height, 0.022,
                            0.8 * box.height))
        cbar = fig.colorbar(sc, cax=cax)
        cbar.set_label(style.metric_label(metric, {"long_name": long_name, "units": units},
                                          unit))
        title = f"Targets: {long_name}"
        ax.set_title(title + (f" \u2014 study {study}" if study else ""), pad=8)
        style.add_caption(fig, caption)
        try:
            return style.save_png_and_pdf(fig, folder, stem)
        finally:
            plt.close(fig)


def save_region_maps(ds: Any, metrics: list[str], out_dir: Path, *, caption: str | None,
                     k: int | None = None, outline_wkb: bytes | None = None,
                     requirement: Any = None, study: str | None = None) -> list[Path]:
    """Maps of a regional grid: each metric on a plate carree map of the grid's window
    (cells outside the region are NaN and not drawn), with the region's outline and the
    requirement's marks (as :func:`covergrid.render.maps.plot_metric_map`); files
    ``out_dir/maps/<metric>[_k<k>].png`` and ``.pdf`` as
    :func:`covergrid.render.maps.save_metric_maps` names them."""
    import cartopy.crs as ccrs
    import matplotlib.pyplot as plt
    import shapely

    from covergrid.render.maps import plot_metric_map

    outline = None if outline_wkb is None else shapely.from_wkb(outline_wkb)
    lon_b = np.asarray(ds["lon_bnds"].values, float)
    lat_b = np.asarray(ds["lat_bnds"].values, float)
    west, east = float(lon_b.min()), float(lon_b.max())
    south, north = float(lat_b.min()), float(lat_b.max())
    m_lon = max(1.0, 0.05 * (east - west))
    m_lat = max(1.0, 0.05 * (north - south))
    centre = 0.5 * (west + east) if east > 180.0 else 0.0
    written: list[Path] = []
    for metric in metrics:
        folds = ([int(v) for v in ds["k"].values] if k is None else [int(k)]) \
            if "k" in ds[metric].dims else [None]
        for fold in folds:
            crs = ccrs.PlateCarree(central_longitude=centre)
            mesh = plot_metric_map(ds, metric, projection=crs, caption=caption, k=fold,
                                   requirement=requirement, study=study)
            ax = mesh.axes
            ax.set_extent((west - m_lon, east + m_lon, max(south - m_lat, -90.0),
                           min(north + m_lat, 90.0)), crs=ccrs.PlateCarree())
            draw_region_outline(ax, outline)
            stem = metric if fold is None else f"{metric}_k{fold}"
            try:
                written += style.save_png_and_pdf(mesh.axes.figure, Path(out_dir) / "maps", stem)
            finally:
                plt.close(mesh.axes.figure)
    return written
