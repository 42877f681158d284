"""The bundled Natural Earth land polygons: decoding, and land as shapely geometry.

The package ships ``earth/data/land-110m.json`` and ``land-50m.json`` (Natural Earth land
polygons, public domain, in the TopoJSON form of the ``world-atlas`` package; see
``data/ATTRIBUTION.md``). This module decodes them with numpy alone; :func:`land_geometry`
gives land as valid shapely polygons in longitude/latitude, which the land-only and sea-only
cell masks (:mod:`covergrid.compute.region`) and the maps' light land fill
(:mod:`covergrid.render`) both use. Nothing is ever downloaded.

TopoJSON in brief (the parts used here): the file holds a list of *arcs*, each a polyline
whose first position is absolute and whose later positions are deltas from the previous one,
all in integer *quantized* units; the *transform* maps an integer position ``(x, y)`` to
``(x * scale_x + translate_x, y * scale_y + translate_y)`` in degrees of longitude and
latitude. A polygon ring is a list of arc indices; a negative index ``i`` means arc ``~i``
(``-1 - i``) taken in reverse. Consecutive arcs of a ring share their joining position, which
is kept once.
"""

from __future__ import annotations

import functools
import json
from importlib import resources

import numpy as np

from covergrid.errors import CovergridError

__all__ = ["RESOLUTIONS", "decode_arcs", "join_ring", "land_geometry", "land_polygons",
           "read_topology"]

#: Bundled resolutions (Natural Earth scale names) and their files in ``earth/data``.
RESOLUTIONS: dict[str, str] = {"110m": "land-110m.json", "50m": "land-50m.json"}

def _check_resolution(resolution: str) -> str:
    if resolution not in RESOLUTIONS:
        raise CovergridError(
            f"{resolution!r} is not bundled; choose one of {sorted(RESOLUTIONS)}",
            field="resolution",
        )
    return RESOLUTIONS[resolution]


@functools.cache
def read_topology(resolution: str) -> dict:
    """The parsed TopoJSON of a bundled resolution (cached)."""
    name = _check_resolution(resolution)
    text = resources.files("covergrid.earth").joinpath("data").joinpath(name).read_text("utf-8")
    return json.loads(text)


def decode_arcs(topology: dict) -> list[np.ndarray]:
    """Decode quantized, delta-encoded TopoJSON arcs into longitude/latitude polylines.

    Parameters
    ----------
    topology : dict
        A parsed TopoJSON ``Topology`` with ``arcs`` and ``transform``.

    Returns
    -------
    list of numpy.ndarray
        One ``(n_points, 2)`` array per arc: longitude, latitude [deg].

    Notes
    -----
    Implements the arc decoding of the TopoJSON Format Specification 1.0 (sec. 2.1.5 transforms,
    sec. 2.2 arcs): positions are the running sum of the deltas, then scaled and translated.
    """
    transform = topology["transform"]
    scale = np.asarray(transform["scale"], dtype=float)
    translate = np.asarray(transform["translate"], dtype=float)
    return [
        np.cumsum(np.asarray(arc, dtype=np.int64), axis=0) * scale + translate
        for arc in topology["arcs"]
    ]


def join_ring(arcs: list[np.ndarray], indices: list[int]) -> np.ndarray:
    """Join the arcs of one ring, reversing negative indices and dropping shared positions."""
    parts = []
    for n, index in enumerate(indices):
        arc = arcs[index] if index >= 0 else arcs[~index][::-1]
        parts.append(arc if n == 0 else arc[1:])
    return np.concatenate(parts, axis=0)


@functools.cache
def land_polygons(resolution: str = "110m") -> tuple[tuple[np.ndarray, ...], ...]:
    """Land polygons as rings of longitude/latitude positions.

    Parameters
    ----------
    resolution : {"110m", "50m"}
        Natural Earth scale: 1:110 million (small, for world maps) or 1:50 million.

    Returns
    -------
    tuple of tuple of numpy.ndarray
        One entry per polygon: its exterior ring then any holes, each a closed ``(n, 2)`` array
        (first position equals last) of longitude [deg] in [-180, 180] and latitude [deg].

    Raises
    ------
    covergrid.errors.CovergridError
        A ValueError subclass: if ``resolution`` is not bundled.
    """
    topology = read_topology(resolution)
    arcs = decode_arcs(topology)
    polygons = []
    for geometry in topology["objects"]["land"]["geometries"]:
        if geometry["type"] == "Polygon":
            members = [geometry["arcs"]]
        elif geometry["type"] == "MultiPolygon":
            members = geometry["arcs"]
        else:  # pragma: no cover - the bundled files hold only (multi)polygons
            raise ValueError(f"unexpected TopoJSON geometry type {geometry['type']!r}")
        for rings in members:
            polygons.append(tuple(join_ring(arcs, ring) for ring in rings))
    return tuple(polygons)



def _ring_to_map(ring: np.ndarray):
    """A spherical ring as a planar shapely polygon on the plate carree map, split at 180 deg.

    Rings in the file may step across the antimeridian (Chukotka, Fiji) or wind once around a
    pole (Antarctica). The longitudes are unwrapped so the ring is continuous; a ring whose
    longitude changes by a full turn encloses the pole and is closed along the pole's parallel;
    the polygon is then cut into its parts on the copies of the map shifted by whole turns.
    """
    import shapely
    import shapely.affinity

    lon = np.degrees(np.unwrap(np.radians(ring[:, 0])))
    lat = ring[:, 1]
    turn = lon[-1] - lon[0]
    if abs(turn) > 180.0:  # winds around a pole: close it along that pole's parallel
        pole = -90.0 if lat.mean() < 0.0 else 90.0
        lon = np.concatenate([lon, [lon[-1], lon[0]]])
        lat = np.concatenate([lat, [pole, pole]])
    polygon = shapely.make_valid(shapely.Polygon(np.column_stack([lon, lat])))
    world = shapely.box(-180.0, -90.0, 180.0, 90.0)
    low = int(np.floor((lon.min() + 180.0) / 360.0))
    high = int(np.floor((lon.max() + 180.0) / 360.0))
    parts = [
        shapely.intersection(shapely.affinity.translate(polygon, xoff=-360.0 * n), world)
        for n in range(low, high + 1)
    ]
    return shapely.union_all(parts)


@functools.cache
def land_geometry(resolution: str = "110m"):
    """Land as shapely polygons on the plate carree map (for a light fill).

    Rings crossing the antimeridian are split there and Antarctica is closed to the pole (see
    ``_ring_to_map``); a few rings that touch themselves after quantization are repaired with
    ``shapely.make_valid``. Coordinates are longitude in [-180, 180] and latitude [deg].

    Parameters
    ----------
    resolution : {"110m", "50m"}
        Natural Earth scale.

    Returns
    -------
    shapely.MultiPolygon
        Valid polygons (parts may touch) in longitude, latitude [deg].
    """
    import shapely

    pieces = []
    for rings in land_polygons(resolution):
        shape = _ring_to_map(rings[0])
        for hole in rings[1:]:
            shape = shape.difference(_ring_to_map(hole))
        pieces.append(shape)
    parts = shapely.get_parts(shapely.get_parts(np.array(pieces, dtype=object)))
    keep = shapely.get_type_id(parts) == shapely.GeometryType.POLYGON
    return shapely.MultiPolygon(list(parts[keep]))
