"""A small coverage Dataset built by hand to the engine's contract (for summary and io tests).

The cell areas are those of a sphere of radius ``R`` (area of a cell between latitudes
phi1, phi2 over a longitude span dlon: R^2 dlon (sin phi2 - sin phi1), an exact
spherical-zone formula), so area-weighted statistics can be worked out on paper.
The metric values are test inputs chosen per test, not check values.
"""

from __future__ import annotations

import numpy as np
import xarray as xr

from covergrid.metrics import INTEGER_METRICS, METRICS

SPHERE_RADIUS_M = 6371000.0  # any radius: the tests use area ratios


def sphere_cell_area_m2(lat_bnds_deg: np.ndarray, dlon_deg: float) -> np.ndarray:
    """Area of one cell per row on a sphere, (n_lat,) [m2]."""
    s = np.sin(np.radians(lat_bnds_deg))
    return SPHERE_RADIUS_M**2 * np.radians(dlon_deg) * (s[:, 1] - s[:, 0])


def contract_dataset(resolution_deg: float = 10.0, lat_min_deg: float = -90.0,
                     lat_max_deg: float = 90.0, nfold_max: int = 2,
                     fields: dict[str, np.ndarray] | None = None) -> xr.Dataset:
    """A Dataset with every contract variable; ``fields`` overrides metric values (lat, lon)."""
    lat_edges = np.arange(lat_min_deg, lat_max_deg + resolution_deg / 2, resolution_deg)
    lon_edges = np.arange(-180.0, 180.0 + resolution_deg / 2, resolution_deg)
    lat_bnds = np.stack([lat_edges[:-1], lat_edges[1:]], axis=-1)
    lon_bnds = np.stack([lon_edges[:-1], lon_edges[1:]], axis=-1)
    lat = lat_bnds.mean(axis=1)
    lon = lon_bnds.mean(axis=1)
    shape = (lat.size, lon.size)
    area = np.broadcast_to(sphere_cell_area_m2(lat_bnds, resolution_deg)[:, None], shape)
    # Smooth made-up fields (inputs only): coverage rises toward the poles.
    frac = np.broadcast_to((0.5 + 0.5 * np.abs(np.sin(np.radians(lat))))[:, None], shape)
    duration_s = 86400.0
    default = {
        "coverage_fraction": frac,
        "max_gap": (1.0 - frac) * 7200.0,
        "mean_gap": (1.0 - frac) * 3600.0,
        "gap_count": np.full(shape, 12),
        "time_average_gap": (1.0 - frac) * 1800.0,
        "mean_response_time": (1.0 - frac) * 900.0,
        "pass_count": np.full(shape, 10),
        "mean_pass_duration": frac * 600.0,
        "min_in_view": np.zeros(shape, dtype=int),
        "mean_in_view": frac * 1.5,
        "max_in_view": np.full(shape, 3),
    }
    default.update(fields or {})
    data_vars = {
        "lat_bnds": (("lat", "nv"), lat_bnds, {"units": "degrees_north"}),
        "lon_bnds": (("lon", "nv"), lon_bnds, {"units": "degrees_east"}),
        "cell_area": (("lat", "lon"), np.array(area),
                      {"units": "m2", "standard_name": "cell_area", "long_name": "cell area"}),
    }
    for name, values in default.items():
        info = METRICS[name]
        dtype = np.int32 if name in INTEGER_METRICS else np.float64
        attrs = dict(info.attrs())
        attrs["cell_methods"] = "area: point"
        data_vars[name] = (("lat", "lon"), np.asarray(values, dtype=dtype), attrs)
    k = np.arange(1, nfold_max + 1, dtype=np.int32)
    nfold = np.stack([np.clip(frac * (1.2 - 0.3 * kk), 0, 1) for kk in k])
    attrs = dict(METRICS["nfold_fraction"].attrs())
    attrs["cell_methods"] = "area: point"
    data_vars["nfold_fraction"] = (("k", "lat", "lon"), nfold, attrs)
    coords = {
        "lat": ("lat", lat, {"units": "degrees_north", "standard_name": "latitude",
                             "long_name": "latitude", "bounds": "lat_bnds", "axis": "Y"}),
        "lon": ("lon", lon, {"units": "degrees_east", "standard_name": "longitude",
                             "long_name": "longitude", "bounds": "lon_bnds", "axis": "X"}),
        "k": ("k", k, {"units": "1", "long_name": "minimum number of satellites in view"}),
    }
    return xr.Dataset(
        data_vars, coords,
        attrs={
            "Conventions": "CF-1.8", "title": "hand-built test Dataset",
            "source": "covergrid tests", "history": "built by tests/_contract_dataset.py",
            "covergrid_epoch": "2031-03-20T00:00:00Z", "covergrid_duration_s": duration_s,
            "covergrid_step_s": 60.0, "covergrid_min_elevation_deg": 10.0,
            "covergrid_n_satellites": 3,
        },
    )
