"""Fixtures for the figure tests: Agg backend, a hand-built coverage Dataset, no network.

The Dataset follows the engine contract (dims lat/lon/k/nv, CF bounds, cell_area, metric
attributes from the registry) with analytic fields; its values are test inputs, not check values.
"""

from __future__ import annotations

import socket

import matplotlib

matplotlib.use("Agg")

import matplotlib.pyplot as plt  # noqa: E402
import numpy as np  # noqa: E402
import pytest  # noqa: E402
import xarray as xr  # noqa: E402

from covergrid.metrics import INTEGER_METRICS, METRICS  # noqa: E402

SPHERE_RADIUS_M = 6371000.0  # cell areas on a sphere; the figures only use area ratios


def make_dataset(resolution_deg: float = 10.0, lat_min_deg: float = -90.0,
                 lat_max_deg: float = 90.0, nfold_max: int = 3,
                 max_gap_scale_s: float = 3600.0) -> xr.Dataset:
    """Contract Dataset with smooth analytic fields (inputs only).

    ``max_gap`` = scale * (0.5 + 0.5 cos^2 lat) with a longitude ripple, so its largest value is
    ``max_gap_scale_s`` (times 1.1); ``coverage_fraction`` rises from 0.5 at the equator to 1 at
    the poles; counts are small integers.
    """
    lat_e = np.arange(lat_min_deg, lat_max_deg + resolution_deg / 2, resolution_deg)
    lon_e = np.arange(-180.0, 180.0 + resolution_deg / 2, resolution_deg)
    lat = 0.5 * (lat_e[1:] + lat_e[:-1])
    lon = 0.5 * (lon_e[1:] + lon_e[:-1])
    lat2, lon2 = np.meshgrid(np.radians(lat), np.radians(lon), indexing="ij")
    shape = lat2.shape
    row_area = (SPHERE_RADIUS_M**2 * np.radians(resolution_deg)
                * (np.sin(np.radians(lat_e[1:])) - np.sin(np.radians(lat_e[:-1]))))
    frac = 0.5 + 0.5 * np.sin(lat2) ** 2
    fields = {
        "coverage_fraction": frac,
        "max_gap": max_gap_scale_s * (0.5 + 0.5 * np.cos(lat2) ** 2) * (1 + 0.1 * np.sin(lon2)),
        "mean_gap": 0.4 * max_gap_scale_s * np.cos(lat2) ** 2,
        "gap_count": np.round(6 * np.cos(lat2) ** 2),
        "time_average_gap": 0.2 * max_gap_scale_s * np.cos(lat2) ** 2,
        "mean_response_time": 0.1 * max_gap_scale_s * np.cos(lat2) ** 2,
        "pass_count": np.round(8 + 6 * np.sin(lat2) ** 2),
        "mean_pass_duration": 300.0 + 200.0 * np.sin(lat2) ** 2,
        "min_in_view": np.round(np.sin(lat2) ** 2),
        "mean_in_view": 1.0 + 2.0 * np.sin(lat2) ** 2,
        "max_in_view": np.round(1 + 3 * np.sin(lat2) ** 2),
    }
    data_vars = {
        "lat_bnds": (("lat", "nv"), np.column_stack([lat_e[:-1], lat_e[1:]]),
                     {"units": "degrees_north"}),
        "lon_bnds": (("lon", "nv"), np.column_stack([lon_e[:-1], lon_e[1:]]),
                     {"units": "degrees_east"}),
        "cell_area": (("lat", "lon"), np.repeat(row_area[:, None], lon.size, axis=1),
                      {"units": "m2", "standard_name": "cell_area"}),
    }
    for name, values in fields.items():
        dtype = np.int32 if name in INTEGER_METRICS else np.float64
        data_vars[name] = (("lat", "lon"), np.asarray(values, dtype=dtype),
                           dict(METRICS[name].attrs()))
    k = np.arange(1, nfold_max + 1, dtype=np.int32)
    nfold = np.stack([np.clip(frac * (1.3 - 0.3 * kk), 0.0, 1.0) for kk in k])
    data_vars["nfold_fraction"] = (("k", "lat", "lon"), nfold,
                                   dict(METRICS["nfold_fraction"].attrs()))
    coords = {
        "lat": ("lat", lat, {"units": "degrees_north", "standard_name": "latitude",
                             "bounds": "lat_bnds"}),
        "lon": ("lon", lon, {"units": "degrees_east", "standard_name": "longitude",
                             "bounds": "lon_bnds"}),
        "k": ("k", k, {"units": "1"}),
    }
    assert np.all(np.isfinite(fields["max_gap"])) and shape == (lat.size, lon.size)
    return xr.Dataset(data_vars, coords, attrs={"Conventions": "CF-1.8"})


@pytest.fixture
def dataset() -> xr.Dataset:
    """A 10-degree global contract Dataset."""
    return make_dataset()


@pytest.fixture(autouse=True)
def offline_and_tidy(monkeypatch, tmp_path_factory):
    """No network, no cartopy download, an empty cartopy data folder; no figure left open.

    Yields the cartopy data folder so a test can check that nothing was written into it.
    """
    import cartopy
    import cartopy.io

    data_dir = tmp_path_factory.mktemp("cartopy_data")
    monkeypatch.setitem(cartopy.config, "data_dir", data_dir)
    monkeypatch.setitem(cartopy.config, "pre_existing_data_dir", data_dir)

    def refuse(*args, **kwargs):
        raise AssertionError("a figure tried to download data or open a network connection")

    monkeypatch.setattr(cartopy.io.Downloader, "acquire_resource", refuse)
    monkeypatch.setattr(socket.socket, "connect", refuse)
    yield data_dir
    left_open = plt.get_fignums()
    plt.close("all")
    assert left_open == [], f"figures left open: {left_open}"
