"""A study with a region and point targets, run end to end: every output written and
consistent (passes.csv, targets.csv, the target dimension and in_region in coverage.nc,
summary.json, maps), the CF checker clean, and trades weighting the region."""

from __future__ import annotations

import csv
import json

import numpy as np
import pytest
import xarray as xr

from conftest import compliance_report, write_study
from covergrid import cli
from covergrid.pipeline.run import run_study
from covergrid.study import load_study, resolve
from covergrid.trade.evaluate import statistics_row

STUDY = """\
study: harbour-watch
epoch: 2031-03-20T00:00:00Z
duration_h: 6
step_s: 60
constellation:
  - walker: {pattern: delta, total: 6, planes: 3, phasing: 1}
    template: {altitude_km: 1200, inclination_deg: 55}
grid: {resolution_deg: 2, lat_min_deg: 30, lat_max_deg: 50, lon_min_deg: -10, lon_max_deg: 30}
region:
  surface: sea
  geojson: [area.geojson]
targets:
  file: sites.csv
  sites: [{name: Mole-1, lat_deg: 38.0, lon_deg: 15.6, altitude_m: 12}]
  requirement: {metric: max_gap, at_most: 30000, share: 1.0}
maps: {metrics: [max_gap]}
"""
AREA = ('{"type": "Polygon", "coordinates": [[[-6, 30], [36, 30], [36, 46], [-6, 46], '
        '[-6, 30]]]}')
SITES = "name,lat_deg,lon_deg,altitude_m\nQuay-A,43.3,5.4,3\nQuay-B,37.9,23.6,8\n"


@pytest.fixture
def study_path(tmp_path):
    (tmp_path / "area.geojson").write_text(AREA)
    (tmp_path / "sites.csv").write_text(SITES)
    return write_study(tmp_path, STUDY)


def test_run_writes_every_place_output(study_path, tmp_path):
    out = tmp_path / "out"
    assert cli.main(["run", str(study_path), "--out", str(out), "--quiet"]) == 0
    folder = out / "harbour-watch"
    with open(folder / "passes.csv", newline="") as fh:
        passes = list(csv.DictReader(fh))
    assert {p["target"] for p in passes} == {"Mole-1", "Quay-A", "Quay-B"}
    assert all(float(p["duration_s"]) > 0 and p["rise"] < p["set"] for p in passes)
    assert all(p["rise"] <= p["max_elevation_time"] <= p["set"] for p in passes)
    with open(folder / "targets.csv", newline="") as fh:
        rows = {r["name"]: r for r in csv.DictReader(fh)}
    counts = {n: sum(p["target"] == n for p in passes) for n in rows}
    assert all(int(rows[n]["pass_count"]) == counts[n] for n in rows)
    summary = json.loads((folder / "summary.json").read_text())
    assert summary["targets"]["count"] == 3 and summary["targets"]["requirement"]["met"]
    ds = xr.open_dataset(folder / "coverage.nc")
    assert ds.sizes["target"] == 3 and list(ds["target_name"].values) == [
        "Mole-1", "Quay-A", "Quay-B"]
    np.testing.assert_allclose(ds["target_pass_count"].values,
                               [float(rows[n]["pass_count"]) for n in ds["target_name"].values])
    inside = ds["in_region"].values == 1
    assert inside.any() and (~inside).any()
    assert np.all(np.isnan(ds["max_gap"].values[~inside]))
    assert np.all(np.isfinite(ds["max_gap"].values[inside]))
    # the window is cropped to the region's cells (the area starts at 6 W, so does the grid)
    assert float(ds["lon_bnds"].min()) == -6.0
    ds.close()
    for stem in ("max_gap", "targets_max_gap", "targets_pass_count"):
        assert (folder / "maps" / f"{stem}.png").exists()
    html = (folder / "report.html").read_text()
    assert "Point targets" in html and "Quay-B" in html and "Target requirement" in html
    report = compliance_report(folder / "coverage.nc")
    assert report["high_count"] == 0, report["high_priorities"]


def test_trade_rows_weight_the_region(study_path):
    result = run_study(load_study(study_path))
    ds = result.dataset
    row = statistics_row(ds)
    inside = ds["in_region"].values == 1
    w = ds["cell_area"].values[inside]
    want = float(np.sum(w * ds["max_gap"].values[inside]) / w.sum())
    assert row["max_gap_mean"] == pytest.approx(want)
    assert result.requirement_met is True  # the target requirement (no grid requirement)
    assert resolve(load_study(study_path)).targets.names == ("Mole-1", "Quay-A", "Quay-B")


def test_requirement_marks_leave_the_outside_of_a_region_alone(study_path):
    from covergrid.compute.requirement import Requirement
    from covergrid.render.marks import requirement_mark

    ds = run_study(load_study(study_path)).dataset
    req = Requirement(metric="max_gap", at_most=1.0)  # failed by every cell in the region
    fails = requirement_mark(req, ds).fails
    inside = ds["in_region"].values == 1
    assert fails[inside].all() and not fails[~inside].any()
