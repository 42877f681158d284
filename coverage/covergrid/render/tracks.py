"""Ground-track figures: sub-satellite paths on a map, broken cleanly at the antimeridian.

Colours: satellites of one orbital plane share a colour (``tab10`` for up to 10 planes,
``tab20`` up to 20, evenly spaced ``viridis`` beyond). Without plane numbers each satellite is
its own group. A filled circle marks where each track starts (the epoch), so the direction of
flight is readable.
"""

from __future__ import annotations

from collections.abc import Sequence
from pathlib import Path

import numpy as np

from covergrid.errors import CovergridError
from covergrid.render import style
from covergrid.render.coastlines import land_geometry

__all__ = [
    "TRACK_FIGSIZE_IN",
    "ground_track",
    "plane_numbers",
    "plot_ground_tracks",
    "save_ground_tracks",
    "split_at_antimeridian",
    "track_selection",
]

#: Size of a saved ground-track figure [in]; at 200 dpi a PNG is 1700 x 1000 pixels.
TRACK_FIGSIZE_IN = (8.5, 5.0)


def ground_track(elements, epoch, t_s) -> tuple[np.ndarray, np.ndarray]:
    """Sub-satellite latitude and longitude of each satellite at the given times.

    Parameters
    ----------
    elements : covergrid.orbits.element_set.ElementSet
        Mean elements at ``epoch`` [km, rad].
    epoch : numpy.datetime64 or str
        Epoch of the elements (UTC).
    t_s : array_like, shape (n_t,)
        Times after the epoch [s].

    Returns
    -------
    lat_deg, lon_deg : numpy.ndarray, shape (n_sat, n_t)
        Geodetic latitude [deg] and longitude in [-180, 180) [deg].

    Notes
    -----
    Secular-J2 propagation (:func:`covergrid.orbits.j2.propagate_to_ecef`) rotated by the
    IAU 1982 Greenwich mean sidereal angle at the epoch (:func:`covergrid.earth.time.gmst_rad`),
    then the geodetic nadir point (:func:`covergrid.earth.frames.subsatellite_point`).
    """
    from covergrid.earth.frames import subsatellite_point
    from covergrid.earth.time import gmst_rad
    from covergrid.orbits.j2 import propagate_to_ecef

    theta0_rad = float(np.asarray(gmst_rad(epoch, 0.0)))
    r_ecef_km = propagate_to_ecef(elements, np.asarray(t_s, dtype=float), theta0_rad)
    lat_rad, lon_rad = subsatellite_point(r_ecef_km)
    return np.degrees(lat_rad), np.degrees(lon_rad)


# Satellites whose node and inclination agree to this are in one plane [rad] (1e-6 rad is
# 0.2 arcsec, far below any designed plane spacing).
_SAME_PLANE_RAD = 1e-6


def plane_numbers(elements) -> np.ndarray:
    """Number the orbital planes of an element set (0, 1, ... in order of first appearance).

    Parameters
    ----------
    elements : covergrid.orbits.element_set.ElementSet
        Elements at the epoch [rad].

    Returns
    -------
    numpy.ndarray of int, shape (n_sat,)
        Plane number of each satellite: equal RAAN and inclination means the same plane.
    """
    raan = np.mod(np.asarray(elements.raan_rad, dtype=float), 2 * np.pi)
    inc = np.asarray(elements.i_rad, dtype=float)
    n = raan.size
    if n == 0:
        return np.zeros(0, dtype=int)
    # Sort instead of comparing every pair (memory and time n log n, not n^2): cluster the
    # RAANs where neighbours lie within the tolerance (the last cluster joins the first when
    # they meet across 2 pi), then the inclinations within each RAAN cluster.
    order = np.argsort(raan, kind="stable")
    r = raan[order]
    raan_cluster = np.concatenate([[0], np.cumsum(np.diff(r) >= _SAME_PLANE_RAD)])
    if raan_cluster[-1] > 0 and r[0] + 2 * np.pi - r[-1] < _SAME_PLANE_RAD:
        raan_cluster[raan_cluster == raan_cluster[-1]] = 0
    by_raan = np.empty(n, dtype=np.int64)
    by_raan[order] = raan_cluster
    order = np.lexsort((inc, by_raan))
    i_sorted, c_sorted = inc[order], by_raan[order]
    new = np.concatenate([[True], (np.diff(c_sorted) != 0)
                          | (np.diff(i_sorted) >= _SAME_PLANE_RAD)])
    plane = np.empty(n, dtype=np.int64)
    plane[order] = np.cumsum(new) - 1
    # number the planes in order of their first satellite
    _, first = np.unique(plane, return_index=True)
    renumber = np.empty(first.size, dtype=np.int64)
    renumber[np.argsort(first, kind="stable")] = np.arange(first.size)
    return renumber[plane]


def track_selection(planes, max_sats: int) -> np.ndarray:
    """Indices of at most ``max_sats`` satellites, taken round-robin across the planes so
    that every plane stays visible (increasing order)."""
    groups = np.asarray(planes, dtype=int).reshape(-1)
    n_sat = groups.size
    if n_sat <= max_sats:
        return np.arange(n_sat)
    order = np.lexsort((np.arange(n_sat), groups))
    sorted_groups = groups[order]
    starts = np.concatenate([[0], np.flatnonzero(np.diff(sorted_groups)) + 1])
    sizes = np.diff(np.concatenate([starts, [n_sat]]))
    rank = np.empty(n_sat, dtype=int)
    rank[order] = np.arange(n_sat) - np.repeat(starts, sizes)
    shown = np.lexsort((groups, rank))[: int(max_sats)]
    shown.sort()
    return shown


def split_at_antimeridian(lat_deg, lon_deg) -> list[tuple[np.ndarray, np.ndarray]]:
    """Split one track into pieces that never cross the antimeridian.

    Parameters
    ----------
    lat_deg, lon_deg : array_like, shape (n_t,)
        Track latitude [deg] and longitude [deg] (any wrapping).

    Returns
    -------
    list of (lat_deg, lon_deg)
        Pieces in time order with longitudes in [-180, 180]. Where the track crosses 180 deg,
        the piece before ends and the piece after starts exactly on the meridian, at the
        latitude interpolated linearly in unwrapped longitude, so the drawn line reaches the map
        edge without a streak across the map.
    """
    lat = np.asarray(lat_deg, dtype=float)
    lon = np.asarray(lon_deg, dtype=float)
    if lat.shape != lon.shape or lat.ndim != 1:
        raise CovergridError(
            f"lat_deg and lon_deg must be 1-D of equal length; got {lat.shape} and {lon.shape}",
            field="lon_deg",
        )
    if lat.size == 0:
        return []
    unwrapped = np.degrees(np.unwrap(np.radians(lon)))
    # Which copy of the map each sample is on: sheet n covers [-180 + 360 n, 180 + 360 n).
    sheet = np.floor((unwrapped + 180.0) / 360.0)
    cross = np.flatnonzero(np.diff(sheet) != 0)
    pieces = []
    start = 0
    entry = None  # (lat, lon) where the current piece enters the map
    for i in cross:
        boundary = 180.0 + 360.0 * min(sheet[i], sheet[i + 1])  # unwrapped meridian crossed
        frac = (boundary - unwrapped[i]) / (unwrapped[i + 1] - unwrapped[i])
        lat_x = lat[i] + frac * (lat[i + 1] - lat[i])
        east = sheet[i + 1] > sheet[i]
        seg_lat = lat[start : i + 1]
        seg_lon = unwrapped[start : i + 1] - 360.0 * sheet[i]
        if entry is not None:
            seg_lat = np.concatenate([[entry[0]], seg_lat])
            seg_lon = np.concatenate([[entry[1]], seg_lon])
        pieces.append((np.append(seg_lat, lat_x), np.append(seg_lon, 180.0 if east else -180.0)))
        entry = (lat_x, -180.0 if east else 180.0)
        start = i + 1
    seg_lat = lat[start:]
    seg_lon = unwrapped[start:] - 360.0 * sheet[-1]
    if entry is not None:
        seg_lat = np.concatenate([[entry[0]], seg_lat])
        seg_lon = np.concatenate([[entry[1]], seg_lon])
    pieces.append((seg_lat, seg_lon))
    return pieces


def _group_colours(groups: np.ndarray) -> list:
    """One colour per distinct group value (any integers), per the module's rule."""
    import matplotlib as mpl

    _, index = np.unique(groups, return_inverse=True)
    n = int(index.max()) + 1 if index.size else 1
    if n <= 10:
        colours = mpl.colormaps["tab10"](np.arange(n))
    elif n <= 20:
        colours = mpl.colormaps["tab20"](np.arange(n))
    else:
        colours = mpl.colormaps["viridis"](np.linspace(0.0, 0.9, n))
    return [tuple(colours[g]) for g in index.reshape(-1)]


def plot_ground_tracks(lat_deg, lon_deg, *, ids: Sequence[str] | None = None, planes=None,
                       ax=None, projection="plate_carree", title: str | None = None,
                       caption: str | None = None, max_sats: int = 24,
                       centre_lon_deg: float = 0.0, study: str | None = None):
    """Draw sub-satellite tracks on a map with coastlines, one colour per orbital plane.

    Parameters
    ----------
    lat_deg, lon_deg : array_like, shape (n_sat, n_t)
        Sub-satellite latitude [deg] and longitude [deg], e.g. from :func:`ground_track`.
    ids : sequence of str, optional
        Satellite names (shown in the legend when there are no planes and few satellites).
    planes : array_like of int, shape (n_sat,), optional
        Plane number of each satellite (see :func:`plane_numbers`); sets the colours.
    ax : cartopy GeoAxes, optional
        Axes to draw on; without one a report figure of :data:`TRACK_FIGSIZE_IN` is made.
    projection : str or cartopy.crs.Projection
        Map projection name (see :data:`covergrid.render.maps.PROJECTIONS`).
    title, caption : str, optional
        Title (default "Ground tracks") and caption (new figures only).
    max_sats : int
        Draw at most this many satellites, spread evenly over the planes (the title says so).
    centre_lon_deg : float
        Central longitude of the projection [deg].
    study : str, optional
        The study's name, for the title.

    Returns
    -------
    list of matplotlib.lines.Line2D
        The track lines (start markers excluded).
    """
    import cartopy.crs as ccrs
    import matplotlib.pyplot as plt

    from covergrid.render.maps import get_projection, prepare_map_axes

    lat = np.atleast_2d(np.asarray(lat_deg, dtype=float))
    lon = np.atleast_2d(np.asarray(lon_deg, dtype=float))
    if lat.shape != lon.shape:
        raise CovergridError(f"shape {lon.shape} differs from lat_deg's {lat.shape}",
                             field="lon_deg")
    n_sat = lat.shape[0]
    if lat.shape[1] < 1:
        raise CovergridError("no times: the tracks have zero samples", field="lat_deg")
    if ids is not None and len(ids) != n_sat:
        raise CovergridError(f"{len(ids)} ids for {n_sat} satellites", field="ids")
    if int(max_sats) < 1:
        raise CovergridError(f"{max_sats!r} must be at least 1", field="max_sats")
    groups = (np.arange(n_sat) if planes is None else np.asarray(planes, dtype=int).reshape(-1))
    if groups.shape != (n_sat,):
        raise CovergridError(f"{groups.size} plane numbers for {n_sat} satellites",
                             field="planes")
    shown = track_selection(groups, int(max_sats))
    colours = _group_colours(groups)
    rank_of = {g: n for n, g in enumerate(np.unique(groups))}  # legend numbers 1..n

    with style.report_style():
        if ax is None:
            crs = get_projection(projection, centre_lon_deg=centre_lon_deg)
            fig = plt.figure(figsize=TRACK_FIGSIZE_IN)
            ax = fig.add_axes((0.06, 0.18, 0.74, 0.72), projection=crs)
            own_figure = True
        else:
            fig, own_figure = ax.figure, False
        name = projection if own_figure and isinstance(projection, str) else None
        ax.add_geometries([land_geometry("110m")], crs=ccrs.PlateCarree(), facecolor="0.92",
                          edgecolor="none", zorder=0)
        prepare_map_axes(ax, name)
        lines = []
        labelled = set()
        for s in shown:
            label = None
            if planes is not None and groups[s] not in labelled:
                label = f"plane {rank_of[groups[s]] + 1}"
                labelled.add(groups[s])
            elif planes is None and ids is not None and n_sat <= 12:
                label = ids[int(s)]
            for n, (plat, plon) in enumerate(split_at_antimeridian(lat[s], lon[s])):
                (line,) = ax.plot(plon, plat, color=colours[s], linewidth=0.9,
                                  transform=ccrs.PlateCarree(), zorder=5,
                                  label=label if n == 0 else None)
                lines.append(line)
            ax.plot(lon[s, 0], lat[s, 0], marker="o", markersize=3.5, color=colours[s],
                    markeredgecolor="black", markeredgewidth=0.4,
                    transform=ccrs.PlateCarree(), zorder=6)
        if title is None:
            title = "Ground tracks"
            if shown.size < n_sat:
                title += f" ({shown.size} of {n_sat} satellites)"
        ax.set_title(style.figure_title(title, study), pad=8)
        if any(line.get_label() and not line.get_label().startswith("_") for line in lines):
            ax.legend(loc="upper left", bbox_to_anchor=(1.02, 1.0), frameon=False,
                      fontsize=7, title="start: \u25cf", title_fontsize=7)
        if own_figure:
            style.add_caption(fig, caption)
    return lines


def save_ground_tracks(lat_deg, lon_deg, out_dir, *, stem: str = "ground_tracks",
                       caption: str | None = None, **kwargs) -> list[Path]:
    """Write the ground-track figure as ``out_dir/<stem>.png`` (200 dpi) and ``.pdf``.

    Parameters
    ----------
    lat_deg, lon_deg : array_like, shape (n_sat, n_t)
        Sub-satellite latitude and longitude [deg].
    out_dir : path-like
        Folder to write into (made if missing).
    stem : str
        File name without suffix.
    caption : str, optional
        Caption text.
    **kwargs
        Passed to :func:`plot_ground_tracks` (ids, planes, projection, title, max_sats ...).

    Returns
    -------
    list of pathlib.Path
        The PNG and PDF paths.
    """
    import matplotlib.pyplot as plt

    lines = plot_ground_tracks(lat_deg, lon_deg, caption=caption, **kwargs)
    fig = lines[0].axes.figure
    try:
        return style.save_png_and_pdf(fig, out_dir, stem)
    finally:
        plt.close(fig)
