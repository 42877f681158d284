"""Regions of interest: which cells of a grid are computed.

A :class:`Region` is one or more areas (the union of polygons in longitude and latitude,
given as GeoJSON in the study file) and a surface (every cell, land only or sea only, from
the bundled Natural Earth land polygons, :mod:`covergrid.earth.land`). A cell belongs to the
region when its centre lies inside the areas (if any are given) and on the surface.

Polygon edges are straight lines in longitude and latitude (the plate carree plane), as
GeoJSON defines them (RFC 7946, sec. 3.1.1: positions in longitude and latitude, lines
straight in those coordinates), not great circles. An area crossing the antimeridian may be
split there (RFC 7946, sec. 3.1.9) or run past 180 deg east (longitudes to 360); a cell
centre is tested at its longitude and at that longitude plus and minus 360 deg. A centre
exactly on a polygon's edge is not inside (shapely's ``contains``).

The point-in-polygon test is shapely's vectorised ``contains_xy`` on a prepared geometry
(GEOS), over the cells of the areas' bounding box only.
"""

from __future__ import annotations

import hashlib
from dataclasses import dataclass
from functools import cached_property
from typing import Any

import numpy as np

from covergrid.errors import CovergridError

__all__ = ["LAND_RESOLUTION", "SURFACES", "Region"]

#: Surfaces a region may keep: every cell, land only, sea only.
SURFACES = ("all", "land", "sea")
#: Natural Earth scale of the land used by the land and sea masks: the finer bundled one,
#: 1:50 million (coasts within a few kilometres); a global 0.1 deg mask takes about 1.5 s.
LAND_RESOLUTION = "50m"


@dataclass(frozen=True)
class Region:
    """Where on the grid to compute: areas and a surface (see the module notes).

    Parameters
    ----------
    areas_wkb : bytes or None
        The union of the areas as a valid, non-empty shapely (multi)polygon in longitude and
        latitude [deg], in well-known binary; None: no areas (the whole grid).
    surface : {"all", "land", "sea"}
        Keep every cell of the areas, or those on land, or those at sea.
    label : str
        What the region is, for titles and attributes (e.g. ``"sea within 1 area"``).
    """

    areas_wkb: bytes | None = None
    surface: str = "all"
    label: str = ""

    def __post_init__(self) -> None:
        if self.surface not in SURFACES:
            raise CovergridError(f"{self.surface!r} is not a surface; allowed: "
                                 f"{', '.join(SURFACES)}", "region.surface")
        if self.areas_wkb is None and self.surface == "all":
            raise CovergridError("a region needs areas or a surface other than all",
                                 "region")

    @classmethod
    def from_geometry(cls, geometry: Any, surface: str = "all", label: str = "") -> Region:
        """A region from a shapely geometry (or None) and a surface."""
        import shapely

        wkb = None if geometry is None else bytes(shapely.to_wkb(geometry))
        return cls(areas_wkb=wkb, surface=surface, label=label)

    @cached_property
    def areas(self) -> Any:
        """The areas as a prepared shapely geometry, or None."""
        if self.areas_wkb is None:
            return None
        import shapely

        geometry = shapely.from_wkb(self.areas_wkb)
        shapely.prepare(geometry)
        return geometry

    @cached_property
    def digest(self) -> str:
        """SHA-256 of the surface and the areas' well-known binary (the region's identity)."""
        h = hashlib.sha256(self.surface.encode())
        h.update(self.areas_wkb or b"")
        return h.hexdigest()

    def identity(self) -> dict[str, str]:
        """Plain data naming the region (surface, label, digest), e.g. for result keys."""
        return {"surface": self.surface, "label": self.label, "digest": self.digest}

    def contains(self, lon_deg: np.ndarray, lat_deg: np.ndarray) -> np.ndarray:
        """Whether each point (cell centre) lies in the region.

        Parameters
        ----------
        lon_deg, lat_deg : ndarray
            Longitudes (any turn) and latitudes of the points, same shape [deg].

        Returns
        -------
        ndarray of bool
            Same shape: inside the areas (if any) and on the surface.
        """
        import shapely

        lon = (np.asarray(lon_deg, dtype=float) + 180.0) % 360.0 - 180.0
        lat = np.asarray(lat_deg, dtype=float)
        inside = np.ones(lon.shape, dtype=bool)
        if self.areas is not None:
            inside = np.zeros(lon.shape, dtype=bool)
            x0, y0, x1, y1 = self.areas.bounds
            for turn in (-360.0, 0.0, 360.0):
                x = lon + turn
                near = (x >= x0) & (x <= x1) & (lat >= y0) & (lat <= y1) & ~inside
                if near.any():
                    inside[near] = shapely.contains_xy(self.areas, x[near], lat[near])
        if self.surface != "all" and inside.any():
            on_land = shapely.contains_xy(_land(), lon[inside], lat[inside])
            inside[inside] = on_land if self.surface == "land" else ~on_land
        return inside

    def outline(self) -> Any:
        """The areas' boundary as a shapely geometry for maps, or None (surface only)."""
        return None if self.areas is None else self.areas.boundary


def _land() -> Any:
    """The bundled land as a prepared shapely geometry (cached by :mod:`covergrid.earth.land`)."""
    import shapely

    from covergrid.earth.land import land_geometry

    land = land_geometry(LAND_RESOLUTION)
    shapely.prepare(land)
    return land
