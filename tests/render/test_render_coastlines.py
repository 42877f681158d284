"""Coastlines for the maps: no antimeridian or map-edge segments; land re-exported."""

from __future__ import annotations

import numpy as np
import pytest

from covergrid.earth import land
from covergrid.render import coastlines

RESOLUTIONS = sorted(coastlines.RESOLUTIONS)


@pytest.mark.parametrize("resolution", RESOLUTIONS)
def test_coastline_has_no_antimeridian_or_map_edge_segments(resolution):
    lines = coastlines.coastline_polylines(resolution)
    assert lines
    for line in lines:
        assert line.shape[0] >= 2
        dlon = np.abs(np.diff(line[:, 0]))
        assert dlon.max() < 180.0  # no streak across the map
        on_meridian = (np.abs(np.abs(line[:-1, 0]) - 180) < 1e-9) & (dlon < 1e-9)
        assert not on_meridian.any()
    geometry = coastlines.coastline_geometry(resolution)
    assert geometry.geom_type == "MultiLineString" and len(geometry.geoms) == len(lines)


def test_land_is_the_earth_stage_s():
    # one home for the land polygons: the maps draw the same land the masks use
    assert coastlines.land_geometry is land.land_geometry
    assert coastlines.land_polygons is land.land_polygons
