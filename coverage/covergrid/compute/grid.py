"""Regular latitude/longitude grids of ground cells on the WGS-84 ellipsoid.

A grid is a set of cells bounded by parallels and meridians, ``resolution_deg`` on a side,
covering the latitude band ``[lat_min_deg, lat_max_deg]`` and the longitudes from
``lon_min_deg`` eastward to ``lon_max_deg`` (all of them by default; a window may cross the
antimeridian, e.g. 170 to -170). Rows start at ``lat_min_deg`` and columns at
``lon_min_deg``, each a whole number of cells; column longitudes increase eastward from
``lon_min_deg`` and run past 180 deg east of the antimeridian, so they stay monotonic.
Latitudes are geodetic. Each cell is represented by its centre point on the ellipsoid surface
(height 0), and weighted in every statistic by its exact area on the ellipsoid.

A grid may carry a :class:`~covergrid.compute.region.Region`: then only the cells whose
centre lies in the region are computed, and :meth:`GridSpec.cropped` is the smallest grid of
the same cells that holds all of them (what the engine computes on).
"""

from __future__ import annotations

import functools
import math
import os
from dataclasses import dataclass, replace
from functools import cached_property
from typing import Any

import numpy as np

from covergrid.compute.region import Region
from covergrid.constants import WGS84_A_KM, WGS84_E2
from covergrid.errors import CovergridError

__all__ = ["Grid", "GridSpec", "authalic_q", "ellipsoid_area_km2", "grid_shape",
           "lon_span_deg", "row_bands"]

_EPS = 1e-9


def lon_span_deg(lon_min_deg: float, lon_max_deg: float) -> float:
    """Width of the longitudes from ``lon_min_deg`` eastward to ``lon_max_deg`` [deg]:
    ``lon_max - lon_min``, plus 360 when the window crosses the antimeridian
    (``lon_min > lon_max``); -180 to 180 is the whole circle."""
    span = lon_max_deg - lon_min_deg
    return span + 360.0 if span < 0.0 else span


def grid_shape(resolution_deg: float, lat_min_deg: float, lat_max_deg: float,
               lon_min_deg: float = -180.0, lon_max_deg: float = 180.0) -> tuple[int, int]:
    """(rows, columns) of a regular grid, checking that its cells are whole.

    The one rule of a grid's shape: 360 deg is a whole multiple of the resolution, and so are
    the latitude band and the longitude window.

    Raises
    ------
    CovergridError
        Naming ``grid.resolution_deg``, ``grid.lat_min_deg``, ``grid.lat_max_deg``,
        ``grid.lon_min_deg`` or ``grid.lon_max_deg``.
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
    for name, v in (("lon_min_deg", lon_min_deg), ("lon_max_deg", lon_max_deg)):
        if not (math.isfinite(v) and -180.0 <= v <= 180.0):
            raise CovergridError(f"{v!r} deg is outside [-180, 180]", f"grid.{name}")
    if lon_min_deg == lon_max_deg:
        raise CovergridError(
            f"lon_min_deg and lon_max_deg are both {lon_min_deg!r}; allowed: different values "
            "(all longitudes: -180 and 180; crossing the antimeridian: e.g. 170 and -170)",
            "grid.lon_max_deg")
    span = lon_span_deg(lon_min_deg, lon_max_deg)
    n_win = span / res
    if abs(n_win - round(n_win)) > _EPS * max(n_win, 1.0):
        raise CovergridError(
            f"the longitudes {lon_min_deg!r}..{lon_max_deg!r} deg ({span:g} deg) are not a "
            f"whole number of {res!r} deg cells; move lon_max_deg to lon_min_deg plus a "
            "multiple of the resolution", "grid.lon_max_deg")
    return int(round(n_lat)), int(round(n_win))


@dataclass(frozen=True)
class GridSpec:
    """Specification of a regular grid.

    Parameters
    ----------
    resolution_deg : float
        Cell size in latitude and longitude [deg]; 360 must be a whole multiple of it.
    lat_min_deg, lat_max_deg : float
        Latitude band [deg]; its width must be a whole multiple of the resolution.
    lon_min_deg, lon_max_deg : float
        Longitudes from ``lon_min_deg`` eastward to ``lon_max_deg`` [deg], each in
        [-180, 180]; ``lon_min_deg > lon_max_deg`` crosses the antimeridian; the window's
        width must be a whole multiple of the resolution.
    region : Region, optional
        Compute only the cells whose centre lies in it (see :meth:`cropped`).
    """

    resolution_deg: float = 2.0
    lat_min_deg: float = -90.0
    lat_max_deg: float = 90.0
    lon_min_deg: float = -180.0
    lon_max_deg: float = 180.0
    region: Region | None = None

    def __post_init__(self) -> None:
        self.shape  # noqa: B018  (checks the cells are whole)

    @property
    def shape(self) -> tuple[int, int]:
        """(rows, columns) of the grid's extent."""
        return grid_shape(self.resolution_deg, self.lat_min_deg, self.lat_max_deg,
                          self.lon_min_deg, self.lon_max_deg)

    @property
    def n_lat(self) -> int:
        """Number of latitude rows."""
        return self.shape[0]

    @property
    def n_lon(self) -> int:
        """Number of longitude columns of the window."""
        return self.shape[1]

    @property
    def n_lon_circle(self) -> int:
        """Columns all round a parallel (360 deg / resolution)."""
        return int(round(360.0 / self.resolution_deg))

    @property
    def n_cells(self) -> int:
        """Number of cells of the extent (with a region, also those outside it)."""
        return self.n_lat * self.n_lon

    @property
    def full_circle(self) -> bool:
        """True when the columns go all round the parallels."""
        return self.n_lon == self.n_lon_circle

    def cropped(self) -> GridSpec:
        """The smallest grid of the same cells holding every cell of the region (itself
        without a region); its region is the same, so cropping again changes nothing.

        Raises
        ------
        CovergridError
            Naming ``region``, when no cell centre lies in the region.
        """
        return self if self.region is None else _cropped(self)

    def identity(self) -> dict[str, Any]:
        """The grid as plain data (the region by its identity: surface, label, digest)."""
        return {"resolution_deg": self.resolution_deg, "lat_min_deg": self.lat_min_deg,
                "lat_max_deg": self.lat_max_deg, "lon_min_deg": self.lon_min_deg,
                "lon_max_deg": self.lon_max_deg,
                "region": None if self.region is None else self.region.identity()}


@dataclass(frozen=True)
class Grid:
    """Cell geometry of a :class:`GridSpec` (all arrays read-only, radians and km inside).

    Longitude columns start at ``lon_min_deg``: column ``j`` spans
    ``[lon_min + j * res, lon_min + (j + 1) * res)`` with its centre half a cell in (past
    180 deg east of the antimeridian).
    """

    spec: GridSpec

    @cached_property
    def lat_edges_deg(self) -> np.ndarray:
        """Row edges, (n_lat + 1,) [deg], ascending."""
        s = self.spec
        return s.lat_min_deg + s.resolution_deg * np.arange(s.n_lat + 1)

    @cached_property
    def lon_edges_deg(self) -> np.ndarray:
        """Column edges, (n_lon + 1,) [deg], increasing from lon_min_deg."""
        s = self.spec
        return s.lon_min_deg + s.resolution_deg * np.arange(s.n_lon + 1)

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
    def cell_mask(self) -> np.ndarray | None:
        """Cells computed, (n_lat, n_lon) bool (read-only): those whose centre lies in the
        region; None without a region (every cell)."""
        region = self.spec.region
        if region is None:
            return None
        lon, lat = np.meshgrid(self.lon_deg, self.lat_deg)
        mask = region.contains(lon, lat)
        mask.flags.writeable = False
        return mask

    @cached_property
    def n_computed(self) -> int:
        """Number of cells computed (in the region, or all)."""
        mask = self.cell_mask
        return self.spec.n_cells if mask is None else int(mask.sum())

    def cap(self, r0: int, r1: int) -> tuple[float, float, float, float]:
        """A spherical cap holding every cell of rows [r0, r1): the geocentric unit vector of
        its centre and its angular radius [rad] (4.0, more than pi, when the columns go all
        round: no useful cap).

        The farthest point of the cells from the centre lies on their boundary (a distance
        on the sphere has no interior maximum short of the antipode), so the radius is the
        largest angle to the boundary sampled at a quarter cell, plus that spacing (a
        conservative margin).
        """
        s = self.spec
        if self.spec.full_circle:
            return (1.0, 0.0, 0.0, 4.0)
        lat = np.radians(self.lat_edges_deg[[r0, r1]])
        lon = np.radians(self.lon_edges_deg[[0, -1]])
        step = math.radians(s.resolution_deg) / 4.0
        n_lat = max(2, int(math.ceil((lat[1] - lat[0]) / step)) + 1)
        n_lon = max(2, int(math.ceil((lon[1] - lon[0]) / step)) + 1)
        la = np.linspace(lat[0], lat[1], n_lat)
        lo = np.linspace(lon[0], lon[1], n_lon)
        pts_lat = np.concatenate([la, la, np.full(n_lon, lat[0]), np.full(n_lon, lat[1])])
        pts_lon = np.concatenate([np.full(n_lat, lon[0]), np.full(n_lat, lon[1]), lo, lo])
        # geocentric directions of points on the ellipsoid (geodetic latitude in)
        psi = np.arctan((1.0 - WGS84_E2) * np.tan(pts_lat))
        u = np.stack([np.cos(psi) * np.cos(pts_lon), np.cos(psi) * np.sin(pts_lon),
                      np.sin(psi)], axis=-1)
        centre = u.mean(axis=0)
        norm = float(np.linalg.norm(centre))
        if norm < 1e-6:
            return (1.0, 0.0, 0.0, 4.0)
        centre /= norm
        radius = float(np.max(np.arccos(np.clip(u @ centre, -1.0, 1.0)))) + step
        return (float(centre[0]), float(centre[1]), float(centre[2]), radius)

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


@functools.lru_cache(maxsize=16)
def _cropped(spec: GridSpec) -> GridSpec:
    """:meth:`GridSpec.cropped` (cached: a land mask of a fine grid takes a second or two)."""
    mask = Grid(spec).cell_mask
    assert mask is not None
    rows = np.flatnonzero(mask.any(axis=1))
    if rows.size == 0:
        raise CovergridError(
            f"holds no cell centre of the {spec.resolution_deg:g} deg grid (latitudes "
            f"{spec.lat_min_deg:g} to {spec.lat_max_deg:g}, longitudes {spec.lon_min_deg:g} to "
            f"{spec.lon_max_deg:g}); allowed: a region holding at least one cell centre: use a "
            "finer grid.resolution_deg, a larger area or wider grid limits", "region")
    res = spec.resolution_deg
    cols = mask.any(axis=0)
    if spec.full_circle:
        # the window starts after the longest run of empty columns round the circle
        empty = np.concatenate([~cols, ~cols])
        best, start, run = 0, 0, 0
        for j, e in enumerate(empty):
            run = run + 1 if e else 0
            if run > best:
                best, start = min(run, cols.size), j + 1
        c0, n = (0, cols.size) if best == 0 else (start % cols.size, cols.size - best)
    else:
        idx = np.flatnonzero(cols)
        c0, n = int(idx[0]), int(idx[-1] - idx[0] + 1)
    lon0 = (spec.lon_min_deg + c0 * res + 180.0) % 360.0 - 180.0
    lon1 = (lon0 + n * res + 180.0) % 360.0 - 180.0
    if n == spec.n_lon_circle:
        lon0, lon1 = spec.lon_min_deg, spec.lon_max_deg
    elif lon1 == -180.0 and lon0 != -180.0:
        lon1 = 180.0
    # limits to 1e-9 deg (0.1 mm): 10.000000000000014 read back as the 10 it stands for
    return replace(spec, lat_min_deg=round(spec.lat_min_deg + int(rows[0]) * res, 9),
                   lat_max_deg=round(spec.lat_min_deg + (int(rows[-1]) + 1) * res, 9),
                   lon_min_deg=round(lon0, 9), lon_max_deg=round(lon1, 9))


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
