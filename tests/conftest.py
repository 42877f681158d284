"""Shared helpers of the test suite: study texts, hand-built Datasets, references.

Everything several test files use lives here, once:

- :data:`TINY_STUDY` and :func:`write_study`: the small study most command-line tests run;
- :func:`contract_dataset` (fields chosen per test) and :func:`analytic_dataset` (smooth
  analytic fields, for figures): coverage Datasets built by hand to the engine's contract,
  on a sphere, so area-weighted statistics can be worked out on paper; their values are test
  inputs, not check values;
- the brute-force coverage reference (:func:`cell_centres`, :func:`visibility`,
  :func:`metrics_from_visibility`): every satellite x every cell x every step;
- :func:`compliance_report`: the IOOS compliance checker's CF 1.8 report of a file.

The suite runs with ``--import-mode=importlib`` and ``pythonpath = tests`` (see
DEVELOPERS.md), so test files take these with ``from conftest import ...``; they never
import from one another.

The brute force shares nothing with the kernel but the propagator: cell centres come from
``covergrid.earth.frames.geodetic_to_ecef``, elevation and range from
``covergrid.earth.frames.look_angles``, the off-nadir angle from
``covergrid.earth.frames.off_nadir_angle``, and the metrics are counted with plain loops over
each cell's time series, straight from the definitions in Wertz and Larson, *Space Mission
Analysis and Design*, 3rd ed., sec. 7.2 (definitions from memory) and the sampling
convention in ``covergrid.compute.metrics``.
"""

from __future__ import annotations

import json
import math
import subprocess
import sys
from pathlib import Path

import matplotlib

matplotlib.use("Agg")

import numpy as np  # noqa: E402
import pytest  # noqa: E402
import xarray as xr  # noqa: E402

from covergrid.compute.metrics import INTEGER_METRICS, METRICS  # noqa: E402
from covergrid.earth.frames import geodetic_to_ecef, look_angles, off_nadir_angle  # noqa: E402
from covergrid.earth.time import gmst_rad  # noqa: E402
from covergrid.orbits import j2  # noqa: E402

REPO = Path(__file__).resolve().parents[1]
VENV_BIN = Path(sys.executable).parent

# --- studies -------------------------------------------------------------------------------
TINY_STUDY = """\
study: tiny-ring
epoch: 2031-03-20T00:00:00Z
duration_h: 2
step_s: 60
constellation:
  - walker: {pattern: delta, total: 6, planes: 3, phasing: 1}
    template: {altitude_km: 1200, inclination_deg: 55}
grid: {resolution_deg: 10}
"""


def write_study(tmp_path: Path, text: str, name: str = "study.yaml") -> Path:
    path = tmp_path / name
    path.write_text(text, encoding="utf-8")
    return path



# --- hand-built Datasets ---------------------------------------------------------------------
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
            "source": "covergrid tests", "history": "built by tests/conftest.py",
            "covergrid_epoch": "2031-03-20T00:00:00Z", "covergrid_duration_s": duration_s,
            "covergrid_step_s": 60.0, "covergrid_min_elevation_deg": 10.0,
            "covergrid_n_satellites": 3,
        },
    )


def analytic_dataset(resolution_deg: float = 10.0, lat_min_deg: float = -90.0,
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


#: Caption of the reference map (tests/reference/maps/README.md); an invented design.
REFERENCE_MAP_CAPTION = ("Walker delta 48/8/1, altitude 1000 km, inclination 60\u00b0. Sensor: "
                         "minimum elevation 15\u00b0. Span 24 h from 2027-01-01T00:00:00Z, "
                         "step 30 s.")


def reference_map_dataset() -> xr.Dataset:
    """The Dataset of the reference map: :func:`analytic_dataset` on a 1 deg grid, with
    ``max_gap`` NaN poleward of 75 deg (so the map shows transparent cells too).

    64,800 cells, the size of a typical global study; the values are figure inputs only.
    """
    ds = analytic_dataset(1.0)
    ds["max_gap"] = ds["max_gap"].where(np.abs(ds["lat"]) < 75.0)
    return ds


# --- the brute-force reference ---------------------------------------------------------------
def cell_centres(resolution_deg, lat_min_deg=-90.0, lat_max_deg=90.0):
    """Geodetic centres of a regular grid, (n_lat, n_lon) each [rad]."""
    n_lat = int(round((lat_max_deg - lat_min_deg) / resolution_deg))
    n_lon = int(round(360.0 / resolution_deg))
    lat = lat_min_deg + resolution_deg * (np.arange(n_lat) + 0.5)
    lon = -180.0 + resolution_deg * (np.arange(n_lon) + 0.5)
    la, lo = np.meshgrid(np.radians(lat), np.radians(lon), indexing="ij")
    return la, lo


def visibility(elements, epoch, n_steps, step_s, lat, lon, min_el_deg, max_off_nadir_deg=None,
               max_range_km=None, min_off_nadir_deg=None, look_side="both"):
    """Boolean visibility, (n_steps, n_sat, n_cells), every combination tested.

    A side-looking sensor: off-nadir angle at least ``min_off_nadir_deg``, and the cell on
    the ``look_side`` ("left", "right", "both") of the Earth-fixed velocity, i.e. the sign
    of ``(r x v) . p`` (positive: left); from the look angles and vectors directly.
    """
    theta0 = float(gmst_rad(epoch, 0.0))
    t = np.arange(n_steps) * step_s
    pos, vel = j2.propagate_to_ecef_with_velocity(elements, t, theta0)  # (n_sat, n_t, 3)
    la = lat.ravel()
    lo = lon.ravel()
    cells = geodetic_to_ecef(la, lo, 0.0)
    n_sat = pos.shape[0]
    vis = np.zeros((n_steps, n_sat, la.size), bool)
    for i in range(n_steps):
        r = pos[:, i, :][:, None, :]  # (n_sat, 1, 3)
        _, el, rng = look_angles(la[None, :], lo[None, :], 0.0, r)
        ok = el >= math.radians(min_el_deg)
        if max_range_km is not None:
            ok &= rng <= max_range_km
        if max_off_nadir_deg is not None or min_off_nadir_deg is not None:
            eta = off_nadir_angle(r, cells[None, :, :])
            if max_off_nadir_deg is not None:
                ok &= eta <= math.radians(max_off_nadir_deg)
            if min_off_nadir_deg is not None:
                ok &= eta >= math.radians(min_off_nadir_deg)
        if look_side != "both":
            n = np.cross(pos[:, i, :], vel[:, i, :])  # (n_sat, 3)
            side = cells @ n.T  # (n_cells, n_sat)
            ok &= (side.T >= 0.0) if look_side == "left" else (side.T <= 0.0)
        vis[i] = ok
    return vis


def metrics_from_visibility(vis, step_s, nfold_max=4):
    """Every metric of covergrid.compute.metrics.METRICS from a visibility cube, by plain loops."""
    n_steps, n_sat, n_cells = vis.shape
    span = n_steps * step_s
    n = vis.sum(axis=1)  # (n_steps, n_cells) satellites in view
    out = {k: np.zeros(n_cells) for k in (
        "coverage_fraction", "max_gap", "mean_gap", "gap_count", "time_average_gap",
        "mean_response_time", "pass_count", "mean_pass_duration", "min_in_view",
        "mean_in_view", "max_in_view")}
    out["nfold_fraction"] = np.zeros((nfold_max, n_cells))
    for c in range(n_cells):
        series = n[:, c]
        gaps = []
        run = 0
        for v in series:
            if v == 0:
                run += 1
            elif run:
                gaps.append(run * step_s)
                run = 0
        if run:
            gaps.append(run * step_s)
        passes = 0
        for s in range(n_sat):
            prev = False
            for v in vis[:, s, c]:
                if v and not prev:
                    passes += 1
                prev = v
        in_view_time = series.sum() * step_s
        out["coverage_fraction"][c] = np.count_nonzero(series) / n_steps
        out["max_gap"][c] = max(gaps) if gaps else 0.0
        out["mean_gap"][c] = sum(gaps) / len(gaps) if gaps else 0.0
        out["gap_count"][c] = len(gaps)
        out["time_average_gap"][c] = sum(g * g for g in gaps) / span
        out["mean_response_time"][c] = sum(g * g for g in gaps) / (2 * span)
        out["pass_count"][c] = passes
        out["mean_pass_duration"][c] = in_view_time / passes if passes else 0.0
        out["min_in_view"][c] = series.min()
        out["mean_in_view"][c] = series.mean()
        out["max_in_view"][c] = series.max()
        for k in range(1, nfold_max + 1):
            out["nfold_fraction"][k - 1, c] = np.count_nonzero(series >= k) / n_steps
    return out


# --- the CF checker ---------------------------------------------------------------------------
def compliance_report(path: Path) -> dict:
    """Run the IOOS compliance checker's CF 1.8 test on a file; return its JSON report."""
    exe = VENV_BIN / "compliance-checker"
    if not exe.exists():
        pytest.skip("compliance-checker is not installed in this environment")
    out = path.with_suffix(".cc.json")
    proc = subprocess.run([str(exe), "--test=cf:1.8", "--format=json", "-o", str(out), str(path)],
                          capture_output=True, text=True, timeout=120, check=False)
    assert out.exists(), proc.stderr
    return json.loads(out.read_text())["cf:1.8"]


@pytest.fixture
def tiny_study(tmp_path: Path) -> Path:
    """:data:`TINY_STUDY` written to a file in the test's folder."""
    return write_study(tmp_path, TINY_STUDY)
