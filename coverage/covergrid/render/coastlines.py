"""Offline coastlines from the bundled Natural Earth land polygons.

The land polygons ship with the package (``earth/data``, decoded by
:mod:`covergrid.earth.land`); this module turns their rings into coastlines for the maps, so
no figure ever needs cartopy's downloader or a network connection.
"""

from __future__ import annotations

import functools

import numpy as np

from covergrid.earth.land import RESOLUTIONS, land_geometry, land_polygons, read_topology

__all__ = [
    "RESOLUTIONS",
    "coastline_geometry",
    "coastline_polylines",
    "land_geometry",
    "land_polygons",
]

# Positions closer than this to the antimeridian or to the file's southern edge lie on a cut that
# Natural Earth makes to keep polygons inside (-180, 180) x (-90, 90); such edges are not coast.
# One quantization step is 360/99999 deg = 3.6e-3 deg, so 1e-6 deg only matches exact edge values.
_ON_EDGE_DEG = 1e-6


@functools.cache
def coastline_polylines(resolution: str = "110m") -> tuple[np.ndarray, ...]:
    """Coastlines as open polylines: the land rings without the map-edge cuts.

    Edges lying on the antimeridian (both ends at longitude -180 or both at +180), stepping across
    it (longitude change above 180 deg) or running along the file's southern edge (Antarctica is
    cut there) are map artefacts rather than coast; the rings are broken at them so a drawn
    coastline shows no line at 180 deg east, no streak across the map and no line along its
    bottom.

    Parameters
    ----------
    resolution : {"110m", "50m"}
        Natural Earth scale.

    Returns
    -------
    tuple of numpy.ndarray
        ``(n, 2)`` arrays of longitude, latitude [deg], each with at least two positions.
    """
    south_edge_deg = float(read_topology(resolution)["bbox"][1])
    lines: list[np.ndarray] = []
    for polygon in land_polygons(resolution):
        for ring in polygon:
            lon, lat = ring[:, 0], ring[:, 1]
            on_meridian = (np.abs(np.abs(lon) - 180.0) < _ON_EDGE_DEG) & (
                np.abs(lon - np.roll(lon, -1)) < _ON_EDGE_DEG
            )
            on_south = (np.abs(lat - south_edge_deg) < _ON_EDGE_DEG) & (
                np.abs(np.roll(lat, -1) - south_edge_deg) < _ON_EDGE_DEG
            )
            # A ring may also step across the antimeridian (-180 -> +179.99): not drawable as one
            # edge in longitude/latitude, and it follows the cut, so it is dropped too.
            jump = np.abs(lon - np.roll(lon, -1)) > 180.0
            cut = (on_meridian | on_south | jump)[:-1]  # edge n joins position n and n + 1
            if not cut.any():
                lines.append(ring)
                continue
            # Rotate the closed ring so that it starts just after a cut edge, then split at cuts.
            first = int(np.flatnonzero(cut)[0]) + 1
            open_ring = ring[:-1]
            rolled = np.roll(open_ring, -first, axis=0)
            rolled = np.concatenate([rolled, rolled[:1]], axis=0)
            rolled_cut = np.roll(cut, -first)
            start = 0
            for edge in np.flatnonzero(rolled_cut):
                if edge - start >= 1:
                    lines.append(rolled[start : edge + 1])
                start = edge + 1
            if len(rolled) - 1 - start >= 1:
                lines.append(rolled[start:])
    return tuple(lines)


@functools.cache
def coastline_geometry(resolution: str = "110m"):
    """Coastlines as one shapely ``MultiLineString`` in longitude/latitude degrees.

    Parameters
    ----------
    resolution : {"110m", "50m"}
        Natural Earth scale.

    Returns
    -------
    shapely.MultiLineString
        Coordinates are longitude, latitude [deg] (plate carree).
    """
    import shapely

    return shapely.MultiLineString([line for line in coastline_polylines(resolution)])
