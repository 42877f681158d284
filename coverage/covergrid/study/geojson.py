"""The areas of a region: GeoJSON polygons read, checked and joined into one geometry.

A study's ``region.geojson`` is one GeoJSON object or a list of them, each inline (a mapping
in the study file) or a file (a path, relative to the study file). An object is a
``Polygon``, a ``MultiPolygon``, a ``Feature`` holding one, a ``FeatureCollection`` of such
features or a ``GeometryCollection`` of such geometries (RFC 7946: H. Butler et al., "The
GeoJSON Format", IETF, 2016, sec. 3.1.6, 3.1.7, 3.2, 3.3). Every problem is refused with
its place inside the object (``features[2].geometry.coordinates[0]``):

* not JSON, or not one of those types; a position that is not 2 or 3 finite numbers, a
  longitude outside [-360, 360] or a latitude outside [-90, 90];
* a linear ring with fewer than four positions or not closed (RFC 7946 sec. 3.1.6);
* an empty object (no polygon at all, or a polygon without rings);
* a polygon that is not valid as a simple feature (a self-intersecting ring, a hole outside
  its shell, parts of a multipolygon overlapping; OGC Simple Features, checked by GEOS
  through shapely's ``is_valid_reason``) or that has no area.

The areas are joined with shapely's ``union_all``; :class:`covergrid.compute.region.Region`
then tests the grid's cell centres against them.
"""

from __future__ import annotations

import json
import math
from pathlib import Path
from typing import Any

from covergrid.study.messages import Problems, format_path, show_value

__all__ = ["AREA_TYPES", "read_areas"]

#: GeoJSON types an area may be.
AREA_TYPES = ("Polygon", "MultiPolygon", "Feature", "FeatureCollection", "GeometryCollection")
#: Longitudes allowed in a position [deg]: past +-180 so an area may cross the antimeridian
#: without being split.
_LON_LIMIT_DEG = 360.0


class _Bad(Exception):
    """A problem at a place inside one GeoJSON object."""

    def __init__(self, where: tuple, text: str) -> None:
        super().__init__(text)
        self.where = where
        self.text = text


def read_areas(items: list[Any], base_dir: Path | None, key: tuple = ("geojson",)):
    """The union of every area of ``region.geojson`` as one valid shapely geometry.

    Parameters
    ----------
    items : list
        Each a path (text, relative to ``base_dir``) or an inline GeoJSON mapping.
    base_dir : pathlib.Path or None
        Folder of the study file (None: the current folder).
    key : tuple
        Location of the list in the study, for messages.

    Returns
    -------
    tuple
        (the union [shapely geometry, longitude/latitude deg], the number of polygons).

    Raises
    ------
    Problems
        The first problem, located at the item and, inside it, the place in the object.
    """
    import shapely

    polygons = []
    for n, item in enumerate(items):
        where = (*key, n)
        if isinstance(item, str):
            path = Path(item) if base_dir is None else base_dir / item
            obj = _load_file(path, where)
            prefix = f"{item}: "
        else:
            obj, prefix = item, ""
        try:
            found = _polygons(obj, ())
            if not found:
                raise _Bad((), "holds no polygon (an empty GeoJSON object); allowed: at least "
                           "one Polygon or MultiPolygon")
            polygons += [_checked(coords, place) for coords, place in found]
        except _Bad as bad:
            inner = format_path(bad.where) if bad.where else ""
            text = f"{prefix}{inner + ': ' if inner else ''}{bad.text}"
            raise Problems([(where, text, None)]) from None
    union = shapely.union_all(polygons)
    return union, len(polygons)


def _load_file(path: Path, where: tuple) -> Any:
    """Parse a GeoJSON file (bounded like a study file)."""
    from covergrid.study.input_files import InputFileError, read_input_file

    try:
        raw = read_input_file(path, "a GeoJSON file")
    except InputFileError as exc:
        raise Problems([(where, f"{path}: {exc.reason}", None)]) from None
    try:
        return json.loads(raw.decode("utf-8"))
    except UnicodeDecodeError:
        raise Problems([(where, f"{path}: not UTF-8 text; allowed: a GeoJSON file (UTF-8 "
                         "JSON)", None)]) from None
    except json.JSONDecodeError as exc:
        raise Problems([(where, f"{path}: not valid JSON (line {exc.lineno}, column "
                         f"{exc.colno}: {exc.msg}); allowed: a GeoJSON file", None)]) from None


def _polygons(obj: Any, where: tuple) -> list[tuple[Any, tuple]]:
    """Every polygon's coordinates in a GeoJSON object, with its place."""
    if not isinstance(obj, dict):
        raise _Bad(where, f"must be a GeoJSON object (a mapping), not {show_value(obj)}")
    kind = obj.get("type")
    if kind not in AREA_TYPES:
        raise _Bad((*where, "type"), f"{show_value(kind)} is not an area; allowed types: "
                   f"{', '.join(AREA_TYPES)}")
    if kind == "Polygon":
        return [(_member(obj, "coordinates", where), (*where, "coordinates"))]
    if kind == "MultiPolygon":
        coords = _list(_member(obj, "coordinates", where), (*where, "coordinates"))
        return [(c, (*where, "coordinates", i)) for i, c in enumerate(coords)]
    if kind == "Feature":
        geometry = _member(obj, "geometry", where)
        if geometry is None:
            return []
        return _polygons(geometry, (*where, "geometry"))
    if kind == "GeometryCollection":
        members = _list(_member(obj, "geometries", where), (*where, "geometries"))
        return [p for i, g in enumerate(members) for p in _polygons(g, (*where, "geometries", i))]
    features = _list(_member(obj, "features", where), (*where, "features"))
    out = []
    for i, feature in enumerate(features):
        place = (*where, "features", i)
        if not isinstance(feature, dict) or feature.get("type") != "Feature":
            raise _Bad(place, "must be a Feature")
        out += _polygons(feature, place)
    return out


def _member(obj: dict, name: str, where: tuple) -> Any:
    if name not in obj:
        raise _Bad(where, f"a {obj.get('type')} needs '{name}'")
    return obj[name]


def _list(value: Any, where: tuple) -> list:
    if not isinstance(value, list):
        raise _Bad(where, f"must be a list, not {show_value(value)}")
    return value


def _position(p: Any, where: tuple) -> tuple[float, float]:
    ok = isinstance(p, list) and len(p) in (2, 3) and all(
        isinstance(v, int | float) and not isinstance(v, bool) and math.isfinite(v) for v in p)
    if not ok:
        raise _Bad(where, f"a position must be [longitude, latitude] (2 or 3 finite numbers); "
                   f"got {show_value(p)}")
    lon, lat = float(p[0]), float(p[1])
    if not -_LON_LIMIT_DEG <= lon <= _LON_LIMIT_DEG:
        raise _Bad(where, f"longitude {lon:g} deg is outside [-360, 360]")
    if not -90.0 <= lat <= 90.0:
        raise _Bad(where, f"latitude {lat:g} deg is outside [-90, 90]")
    return lon, lat


def _checked(coords: Any, where: tuple):
    """A shapely polygon from GeoJSON polygon coordinates, refused unless valid (see the
    module notes)."""
    import shapely

    rings = _list(coords, where)
    if not rings:
        raise _Bad(where, "a polygon without rings is empty; allowed: an exterior ring of at "
                   "least four positions")
    parsed = []
    for r, ring in enumerate(rings):
        place = (*where, r)
        points = [_position(p, (*place, i)) for i, p in enumerate(_list(ring, place))]
        if len(points) < 4:
            raise _Bad(place, f"a linear ring needs at least four positions (the last equal to "
                       f"the first); got {len(points)}")
        if points[0] != points[-1]:
            raise _Bad(place, "the ring is not closed: its last position must equal its first "
                       f"{list(points[0])}; got {list(points[-1])}")
        parsed.append(points)
    polygon = shapely.Polygon(parsed[0], parsed[1:])
    reason = shapely.is_valid_reason(polygon)
    if reason != "Valid Geometry":
        raise _Bad(where, f"not a valid polygon: {_reason_text(reason)}")
    if not polygon.area > 0.0:
        raise _Bad(where, "the polygon has no area (its positions lie on one line)")
    return polygon


def _reason_text(reason: str) -> str:
    """GEOS's validity reason in words (``Self-intersection[12 40]`` -> at lon 12, lat 40)."""
    name, _, rest = reason.partition("[")
    words = {"Self-intersection": "a ring crosses itself or another ring",
             "Ring Self-intersection": "a ring touches itself",
             "Hole lies outside shell": "a hole lies outside its exterior ring",
             "Nested holes": "a hole lies inside another hole",
             "Interior is disconnected": "the holes cut the polygon in pieces",
             "Too few points": "a ring has too few distinct positions",
             "Invalid Coordinate": "a position is not a number"}.get(name, name)
    if rest:
        xy = rest.rstrip("]").split()
        if len(xy) >= 2:
            return f"{words} at longitude {float(xy[0]):g}, latitude {float(xy[1]):g}"
    return words
