"""Grid geometry: cell bounds, exact ellipsoid areas, cell positions."""

from __future__ import annotations

import math

import numpy as np
import pytest
from pyproj import Geod

from covergrid.compute.grid import Grid, GridSpec, ellipsoid_area_km2
from covergrid.earth.frames import geodetic_to_ecef, up_vector
from covergrid.errors import CovergridError

# WGS 84 surface area, 510,065,621.724 km^2 (Moritz, "Geodetic Reference System 1980",
# Bull. Geod. 54, 1980, table of derived constants, for GRS 80; WGS 84 differs in the 10th
# digit; from memory). One square kilometre of slack covers that difference.
WGS84_AREA_KM2 = 510_065_621.724
ONE_KM2 = 1.0
ONE_MM_KM = 1e-6


def test_total_area_matches_published_value():
    assert abs(ellipsoid_area_km2() - WGS84_AREA_KM2) < ONE_KM2


@pytest.mark.parametrize("res", [0.25, 1.0, 2.5, 10.0, 30.0])
def test_cell_areas_sum_to_ellipsoid(res):
    g = Grid(GridSpec(res))
    # relative 1e-12: the sum of telescoping differences of q, rounding only
    assert math.isclose(g.cell_area_km2.sum(), ellipsoid_area_km2(), rel_tol=1e-12)


def test_band_area_is_the_zone_between_its_parallels():
    band = Grid(GridSpec(2.0, -60.0, 60.0))
    full = Grid(GridSpec(2.0))
    inside = (full.lat_deg > -60) & (full.lat_deg < 60)
    assert math.isclose(band.cell_area_km2.sum(), full.cell_area_km2[inside].sum(),
                        rel_tol=1e-12)


def _geodesic_cell_area_km2(lat0, lat1, lon0, lon1, n=2000):
    """Cell area from geographiclib via pyproj.Geod, with the parallels densified.

    Geod joins vertices by geodesics, not parallels; with 2000 points per edge the chord-
    versus-parallel difference is below 1e-9 of a 1-degree cell (common practice).
    """
    geod = Geod(ellps="WGS84")
    lons = np.concatenate([np.linspace(lon0, lon1, n), np.linspace(lon1, lon0, n)])
    lats = np.concatenate([np.full(n, lat0), np.full(n, lat1)])
    area_m2, _ = geod.polygon_area_perimeter(lons, lats)
    return abs(area_m2) / 1e6


@pytest.mark.parametrize("lat0", [-90.0, -46.0, 0.0, 32.0, 88.0])
def test_cell_area_against_geographiclib(lat0):
    """Independent reference: Karney's geodesic polygon areas (geographiclib, through pyproj)."""
    g = Grid(GridSpec(2.0))
    row = int(np.searchsorted(g.lat_edges_deg, lat0))
    assert g.lat_edges_deg[row] == lat0
    ref = _geodesic_cell_area_km2(lat0, lat0 + 2.0, 10.0, 12.0)
    # 1e-6 relative: the densified-parallel approximation above, with margin
    assert math.isclose(g.row_area_km2[row], ref, rel_tol=1e-6)


def test_polar_cells_weighted_by_true_area():
    g = Grid(GridSpec(1.0))
    # a polar cap cell is about (pi/2)(1 deg)^2 / (cos of 0.5 deg ...) smaller than an
    # equatorial one: the ratio is sin(0.5 deg)-ish; check against the exact Geod ratio
    eq = _geodesic_cell_area_km2(0.0, 1.0, 0.0, 1.0)
    pole = _geodesic_cell_area_km2(89.0, 90.0, 0.0, 1.0)
    ratio = g.row_area_km2[-1] / g.row_area_km2[90]
    assert math.isclose(ratio, pole / eq, rel_tol=1e-6)
    assert ratio < 0.01


def test_area_weighted_mean_of_constant_is_constant():
    g = Grid(GridSpec(3.0, -72.0, 51.0))
    field = np.full(g.cell_area_km2.shape, 0.731)
    w = g.cell_area_km2
    assert math.isclose((field * w).sum() / w.sum(), 0.731, rel_tol=1e-14)


def test_bounds_and_centres():
    g = Grid(GridSpec(5.0, -30.0, 60.0))
    assert g.lat_deg[0] == -27.5 and g.lat_deg[-1] == 57.5
    assert g.lon_deg[0] == -177.5 and g.lon_deg[-1] == 177.5
    np.testing.assert_array_equal(g.lat_bounds_deg[1:, 0], g.lat_bounds_deg[:-1, 1])
    assert g.lon_bounds_deg[0, 0] == -180.0 and g.lon_bounds_deg[-1, 1] == 180.0


def test_cell_positions_and_up_vectors_on_ellipsoid():
    g = Grid(GridSpec(7.5))
    la, lo = np.meshgrid(np.radians(g.lat_deg), np.radians(g.lon_deg), indexing="ij")
    np.testing.assert_allclose(g.cell_positions_km(), geodetic_to_ecef(la, lo, 0.0),
                               atol=ONE_MM_KM)
    np.testing.assert_allclose(g.cell_up_vectors(), up_vector(la, lo), atol=1e-14)


@pytest.mark.parametrize("kwargs, field", [
    ({"resolution_deg": 0.7}, "grid.resolution_deg"),
    ({"resolution_deg": -1.0}, "grid.resolution_deg"),
    ({"resolution_deg": float("nan")}, "grid.resolution_deg"),
    ({"lat_min_deg": 10.0, "lat_max_deg": -10.0}, "grid.lat_min_deg"),
    ({"lat_min_deg": -95.0}, "grid.lat_min_deg"),
    ({"resolution_deg": 2.0, "lat_min_deg": -61.0, "lat_max_deg": 60.0}, "grid.lat_max_deg"),
])
def test_bad_grid_is_refused(kwargs, field):
    with pytest.raises(CovergridError, match=field.replace(".", r"\.")):
        GridSpec(**kwargs)
