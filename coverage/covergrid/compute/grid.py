"""Regular latitude/longitude grids of ground cells on the WGS-84 ellipsoid.

A grid is a set of cells bounded by parallels and meridians, ``resolution_deg`` on a side,
covering all longitudes and the latitude band ``[lat_min_deg, lat_max_deg]``. Latitudes are
geodetic. Each cell is represented by its centre point on the ellipsoid surface (height 0),
and weighted in every statistic by its exact area on the ellipsoid.
"""

from __future__ import annotations

import math
import os
from dataclasses import dataclass
from functools import cached_property

import numpy as np

from covergrid.constants import WGS84_A_KM, WGS84_E2
from covergrid.errors import CovergridError

__all__ = ["Grid", "GridSpec", "authalic_q", "ellipsoid_area_km2", "grid_shape", "row_bands"]

_EPS = 1e-9


def grid_shape(resolution_deg: float, lat_min_deg: float, lat_max_deg: float) -> tuple[int, int]:
    """(rows, columns) of a regular grid, checking that its cells are whole.

    The one rule of a grid's shape: 360 deg is a whole multiple of the resolution, and so is
    the latitude band.

    Raises
    ------
    CovergridError
        Naming ``grid.resolution_deg``, ``grid.lat_min_deg`` or ``grid.lat_max_deg``.
    """
    res = resolution_deg
    if not (math.isfinite(res) and 0.0 < res <= 90.0):
        raise CovergridError(
            f"resolution {res!r} deg is not allowed; use a value in (0, 90]",
            "grid.resolution_deg",
        )
    n_lon = 360.0 / res
    if abs(n_lon - round(n_lon)) > _EPS * n_lon:
        raise CovergridError(
            f"360 deg is not a whole multiple of {res!r} deg; use e.g. 0.25, 0.5, 1, 2, 2.5, 5",
            "grid.resolution_deg",
        )
    for name, v in (("lat_min_deg", lat_min_deg), ("lat_max_deg", lat_max_deg)):
        if not (math.isfinite(v) and -90.0 <= v <= 90.0):
            raise CovergridError(f"{v!r} deg is outside [-90, 90]", f"grid.{name}")
    if not lat_min_deg < lat_max_deg:
        raise CovergridError(
            f"lat_min_deg {lat_min_deg!r} must be below lat_max_deg {lat_max_deg!r}",
            "grid.lat_min_deg",
        )
    n_lat = (lat_max_deg - lat_min_deg) / res
    if abs(n_lat - round(n_lat)) > _EPS * max(n_lat, 1.0):
        raise CovergridError(
            f"the band {lat_min_deg!r}..{lat_max_deg!r} deg is not a whole number "
            f"of {res!r} deg cells; move its edges to multiples of the resolution",
            "grid.lat_max_deg",
        )
    return int(round(n_lat)), int(round(n_lon))


@dataclass(frozen=True)
class GridSpec:
    """Specification of a regular grid.

    Parameters
    ----------
    resolution_deg : float
        Cell size in latitude and longitude [deg]; 360 must be a whole multiple of it.
    lat_min_deg, lat_max_deg : float
        Latitude band [deg]; its width must be a whole multiple of the resolution.
    """

    resolution_deg: float = 2.0
    lat_min_deg: float = -90.0
    lat_max_deg: float = 90.0

    def __post_init__(self) -> None:
        grid_shape(self.resolution_deg, self.lat_min_deg, self.lat_max_deg)

    @property
    def n_lat(self) -> int:
        """Number of latitude rows."""
        return grid_shape(self.resolution_deg, self.lat_min_deg, self.lat_max_deg)[0]

    @property
    def n_lon(self) -> int:
        """Number of longitude columns."""
        return grid_shape(self.resolution_deg, self.lat_min_deg, self.lat_max_deg)[1]

    @property
    def n_cells(self) -> int:
        """Number of cells."""
        return self.n_lat * self.n_lon


@dataclass(frozen=True)
class Grid:
    """Cell geometry of a :class:`GridSpec` (all arrays read-only, radians and km inside).

    Longitude columns start at -180 deg: column ``j`` spans
    ``[-180 + j * res, -180 + (j + 1) * res)`` with its centre half a cell in.
    """

    spec: GridSpec

    @cached_property
    def lat_edges_deg(self) -> np.ndarray:
        """Row edges, (n_lat + 1,) [deg], ascending."""
        s = self.spec
        return s.lat_min_deg + s.resolution_deg * np.arange(s.n_lat + 1)

    @cached_property
    def lon_edges_deg(self) -> np.ndarray:
        """Column edges, (n_lon + 1,) [deg], from -180 to 180."""
        s = self.spec
        return -180.0 + s.resolution_deg * np.arange(s.n_lon + 1)

    @cached_property
    def lat_deg(self) -> np.ndarray:
        """Row centres (geodetic), (n_lat,) [deg]."""
        e = self.lat_edges_deg
        return 0.5 * (e[:-1] + e[1:])

    @cached_property
    def lon_deg(self) -> np.ndarray:
        """Column centres, (n_lon,) [deg]."""
        e = self.lon_edges_deg
        return 0.5 * (e[:-1] + e[1:])

    @cached_property
    def lat_bounds_deg(self) -> np.ndarray:
        """CF cell bounds of the rows, (n_lat, 2) [deg]."""
        e = self.lat_edges_deg
        return np.stack([e[:-1], e[1:]], axis=-1)

    @cached_property
    def lon_bounds_deg(self) -> np.ndarray:
        """CF cell bounds of the columns, (n_lon, 2) [deg]."""
        e = self.lon_edges_deg
        return np.stack([e[:-1], e[1:]], axis=-1)

    @cached_property
    def row_area_km2(self) -> np.ndarray:
        """Exact ellipsoid area of one cell in each row, (n_lat,) [km^2]."""
        dlon_rad = math.radians(self.spec.resolution_deg)
        q = authalic_q(np.radians(self.lat_edges_deg))
        return 0.5 * WGS84_A_KM**2 * dlon_rad * np.diff(q)

    @cached_property
    def cell_area_km2(self) -> np.ndarray:
        """Exact ellipsoid area of every cell, (n_lat, n_lon) [km^2]."""
        return np.broadcast_to(self.row_area_km2[:, None], (self.spec.n_lat, self.spec.n_lon))

    @cached_property
    def row_geometry(self) -> dict[str, np.ndarray]:
        """Per-row constants used by the kernel, each (n_lat,).

        ``sin_lat``, ``cos_lat`` of the geodetic latitude (the local vertical),
        ``rho_km`` and ``z_km`` (distance from the polar axis and height above the equator of
        the cell centres on the ellipsoid), ``psi_rad`` geocentric latitude of the centres.
        """
        lat = np.radians(self.lat_deg)
        sin_lat, cos_lat = np.sin(lat), np.cos(lat)
        n_km = WGS84_A_KM / np.sqrt(1.0 - WGS84_E2 * sin_lat**2)  # prime vertical radius
        rho = n_km * cos_lat
        z = n_km * (1.0 - WGS84_E2) * sin_lat
        return {
            "sin_lat": sin_lat,
            "cos_lat": cos_lat,
            "rho_km": rho,
            "z_km": z,
            "psi_rad": np.arctan2(z, rho),
        }

    def cell_positions_km(self) -> np.ndarray:
        """Earth-fixed positions of all cell centres on the ellipsoid, (n_lat, n_lon, 3) [km]."""
        g = self.row_geometry
        lon = np.radians(self.lon_deg)
        x = g["rho_km"][:, None] * np.cos(lon)[None, :]
        y = g["rho_km"][:, None] * np.sin(lon)[None, :]
        z = np.broadcast_to(g["z_km"][:, None], x.shape)
        return np.stack([x, y, z], axis=-1)

    def cell_up_vectors(self) -> np.ndarray:
        """Unit ellipsoid normals (local vertical) at the cell centres, (n_lat, n_lon, 3)."""
        g = self.row_geometry
        lon = np.radians(self.lon_deg)
        x = g["cos_lat"][:, None] * np.cos(lon)[None, :]
        y = g["cos_lat"][:, None] * np.sin(lon)[None, :]
        z = np.broadcast_to(g["sin_lat"][:, None], x.shape)
        return np.stack([x, y, z], axis=-1)


def authalic_q(lat_rad: np.ndarray | float) -> np.ndarray:
    """Authalic function q of geodetic latitude on the WGS-84 ellipsoid.

    The area of the ellipsoid between the equator and latitude :math:`\\phi`, over a
    longitude span :math:`\\Delta\\lambda`, is :math:`a^2 \\Delta\\lambda \\, q(\\phi) / 2`.

    Parameters
    ----------
    lat_rad : array_like
        Geodetic latitude [rad].

    Returns
    -------
    ndarray
        q [unitless]; q(90 deg) = 1 + (1 - e^2)/(2e) ln((1 + e)/(1 - e)).

    Notes
    -----
    Snyder, *Map Projections: A Working Manual*, USGS Professional Paper 1395, 1987,
    eq. (3-12):

    .. math::

        q = (1 - e^2) \\left[ \\frac{\\sin\\phi}{1 - e^2 \\sin^2\\phi}
            - \\frac{1}{2e} \\ln \\frac{1 - e \\sin\\phi}{1 + e \\sin\\phi} \\right]
    """
    e = math.sqrt(WGS84_E2)
    s = np.sin(np.asarray(lat_rad, dtype=float))
    return (1.0 - WGS84_E2) * (
        s / (1.0 - WGS84_E2 * s * s) - np.log((1.0 - e * s) / (1.0 + e * s)) / (2.0 * e)
    )


def ellipsoid_area_km2() -> float:
    """Total surface area of the WGS-84 ellipsoid [km^2] (closed form, Snyder eq. 3-12)."""
    return float(2.0 * math.pi * WGS84_A_KM**2 * authalic_q(math.pi / 2))


def row_bands(n_lat: int, chunk_rows: int | None) -> list[tuple[int, int]]:
    """Split rows 0..n_lat into contiguous bands of at most `chunk_rows` rows.

    With ``chunk_rows=None`` the band count is about four per available core (at least one
    row each), which balances the latitude-dependent work of inclined constellations while
    keeping the per-band propagation overhead small.
    """
    if chunk_rows is None:
        n_bands = max(1, min(n_lat, 4 * (os.cpu_count() or 1)))
        chunk_rows = math.ceil(n_lat / n_bands)
    if chunk_rows < 1:
        raise CovergridError(f"{chunk_rows!r} is not allowed; use a positive number of rows",
                             "compute.chunk_rows")
    return [(r, min(r + chunk_rows, n_lat)) for r in range(0, n_lat, chunk_rows)]
