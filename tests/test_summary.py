"""Area-weighted summaries and requirement verdicts, checked on paper.

The hand-built Dataset has spherical cell areas, so the share of the area between two
latitudes is (sin phi2 - sin phi1) / 2 (Archimedes' hat-box theorem: a spherical zone's
area is 2 pi R h; common knowledge of geometry). Every expected value below follows from
that formula and the quantile definition in covergrid.compute.summary.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from conftest import SPHERE_RADIUS_M, contract_dataset
from covergrid.compute.requirement import Requirement
from covergrid.compute.summary import (
    CSV_COLUMNS,
    area_statistics,
    band_statistics,
    requirement_verdict,
    summarise,
    summary_rows,
    weighted_quantile,
)

# Float rounding of sums over a few hundred cells (relative).
SUM_ROUNDING = 1e-12


def _lat_field(ds, fn):
    lat = ds["lat"].values
    return np.broadcast_to(fn(lat)[:, None], (ds.sizes["lat"], ds.sizes["lon"])).astype(float)


def test_area_mean_of_tropics_indicator_is_half():
    # The zone |lat| < 30 deg holds sin(30 deg) = 1/2 of a sphere's area (hat-box theorem).
    ds = contract_dataset(10.0)
    x = _lat_field(ds, lambda lat: (np.abs(lat) < 30).astype(float))
    stats = area_statistics(x, ds["cell_area"].values)
    assert stats["mean"] == pytest.approx(0.5, rel=SUM_ROUNDING)
    assert stats["min"] == 0.0 and stats["max"] == 1.0
    assert stats["valid_area_fraction"] == 1.0
    assert stats["area_m2"] == pytest.approx(4 * math.pi * SPHERE_RADIUS_M**2, rel=SUM_ROUNDING)


def test_percentiles_are_smallest_value_reaching_the_area_share():
    # Metric = row-centre latitude. Area south of phi is (1 + sin phi)/2.
    # p50: rows up to edge 0 hold exactly 1/2 -> centre -5. p90: sin(phi) >= 0.8 needs the
    # row with upper edge 60 ((1+sin 60)/2 = 0.933; edge 50 gives 0.883) -> centre 55.
    # p95: (1+sin 70)/2 = 0.970 >= 0.95 > (1+sin 60)/2 -> centre 65.
    ds = contract_dataset(10.0)
    x = _lat_field(ds, lambda lat: lat)
    stats = area_statistics(x, ds["cell_area"].values)
    assert (stats["p50"], stats["p90"], stats["p95"]) == (-5.0, 55.0, 65.0)
    assert stats["mean"] == pytest.approx(0.0, abs=1e-9)  # odd function on a symmetric grid


def test_weighted_quantile_scalar_and_array_and_nan():
    values = np.array([3.0, 1.0, np.nan, 2.0])
    weights = np.array([1.0, 1.0, 5.0, 2.0])
    # Without the NaN: sorted 1 (w1), 2 (w2), 3 (w1); cumulative 1, 3, 4 of 4.
    assert weighted_quantile(values, weights, 0.25) == 1.0
    assert weighted_quantile(values, weights, 0.26) == 2.0
    np.testing.assert_array_equal(weighted_quantile(values, weights, [0.0, 0.75, 1.0]),
                                  [1.0, 2.0, 3.0])
    assert math.isnan(weighted_quantile([np.nan], [1.0], 0.5))
    with pytest.raises(ValueError, match=r"quantile q must lie in \[0, 1\]"):
        weighted_quantile(values, weights, 1.5)


def test_nan_cells_are_left_out_and_reported():
    ds = contract_dataset(10.0)
    x = _lat_field(ds, lambda lat: np.where(lat > 0, np.nan, 1.0))
    stats = area_statistics(x, ds["cell_area"].values)
    assert stats["valid_area_fraction"] == pytest.approx(0.5, rel=SUM_ROUNDING)
    assert stats["mean"] == 1.0


def test_bands_follow_the_width_and_hold_their_zone_area():
    ds = contract_dataset(10.0)
    da = ds["coverage_fraction"].copy(data=_lat_field(ds, lambda lat: (lat > 0).astype(float)))
    bands = band_statistics(da, ds["cell_area"], 30.0, ds["lat_bnds"].values)
    assert [(b["lat_min_deg"], b["lat_max_deg"]) for b in bands] == [
        (-90, -60), (-60, -30), (-30, 0), (0, 30), (30, 60), (60, 90)]
    for b in bands:
        zone = 2 * math.pi * SPHERE_RADIUS_M**2 * (
            math.sin(math.radians(b["lat_max_deg"])) - math.sin(math.radians(b["lat_min_deg"])))
        assert b["area_m2"] == pytest.approx(zone, rel=SUM_ROUNDING)
        assert b["mean"] == (1.0 if b["lat_min_deg"] >= 0 else 0.0)


def test_bands_clip_to_a_regional_grid():
    ds = contract_dataset(5.0, lat_min_deg=-25.0, lat_max_deg=35.0)
    bands = band_statistics(ds["max_gap"], ds["cell_area"], 10.0, ds["lat_bnds"].values)
    assert bands[0]["lat_min_deg"] == -25.0 and bands[0]["lat_max_deg"] == -20.0
    assert bands[-1]["lat_min_deg"] == 30.0 and bands[-1]["lat_max_deg"] == 35.0
    total = sum(b["area_m2"] for b in bands)
    assert total == pytest.approx(float(ds["cell_area"].sum()), rel=SUM_ROUNDING)


def _gap_dataset():
    ds = contract_dataset(10.0)
    # max_gap = 100 s per degree of |latitude|: rows at 500, 1500, 2500, 3500 ... s.
    ds["max_gap"] = ds["max_gap"].copy(data=_lat_field(ds, lambda lat: np.abs(lat) * 100.0))
    ds["coverage_fraction"] = ds["coverage_fraction"].copy(
        data=_lat_field(ds, lambda lat: 1.0 - np.abs(lat) / 100.0))
    return ds


def test_at_most_verdict_met_and_not_met():
    ds = _gap_dataset()
    # |lat| <= 30 (values <= 2500 s) is exactly half the area, so at area_fraction 0.5 the
    # achieved value is 2500 s: 500 s inside a 3000 s limit.
    v = requirement_verdict(ds, "max_gap", at_most=3000.0, area_fraction=0.5)
    assert v["met"] is True
    assert v["achieved"] == 2500.0 and v["margin"] == 500.0
    assert v["area_fraction_met"] == pytest.approx(0.5, rel=SUM_ROUNDING)
    assert v["units"] == "s"
    # At 0.6 the zone must reach 40 deg (sin 40 = 0.643 >= 0.6 > sin 30): achieved 3500 s.
    v = requirement_verdict(ds, "max_gap", at_most=3000.0, area_fraction=0.6)
    assert v["met"] is False and v["achieved"] == 3500.0 and v["margin"] == -500.0


def test_at_least_verdict_at_the_boundary_is_met():
    ds = _gap_dataset()
    # coverage 0.95, 0.85, 0.75 within 30 deg (half the area): the highest floor met over
    # half the area is 0.75, so a 0.75 requirement is met with zero margin.
    v = requirement_verdict(ds, "coverage_fraction", at_least=0.75, area_fraction=0.5)
    assert v["met"] is True and v["achieved"] == 0.75 and v["margin"] == 0.0
    v = requirement_verdict(ds, "coverage_fraction", at_least=0.76, area_fraction=0.5)
    assert v["met"] is False and v["margin"] == pytest.approx(-0.01, abs=1e-15)


def test_whole_area_verdict_is_the_worst_cell():
    ds = _gap_dataset()
    v = requirement_verdict(ds, "max_gap", at_most=9000.0)
    assert v["achieved"] == 8500.0 and v["met"] is True  # polar rows, |lat| = 85


def test_nan_cells_fail_a_requirement():
    ds = _gap_dataset()
    data = ds["max_gap"].values.copy()
    data[0, 0] = np.nan
    ds["max_gap"] = ds["max_gap"].copy(data=data)
    v = requirement_verdict(ds, "max_gap", at_most=1e9)
    assert v["met"] is False and math.isinf(v["achieved"])


def test_nfold_verdict_needs_k():
    ds = contract_dataset(10.0, nfold_max=3)
    with pytest.raises(ValueError, match="needs k"):
        requirement_verdict(ds, "nfold_fraction", at_least=0.1)
    with pytest.raises(ValueError, match="k = 5 is not in the Dataset"):
        requirement_verdict(ds, "nfold_fraction", at_least=0.1, k=5)
    v = requirement_verdict(ds, "nfold_fraction", at_least=0.0, k=2)
    assert v["met"] is True and v["k"] == 2


def test_verdict_refuses_bad_arguments():
    ds = contract_dataset(10.0)
    with pytest.raises(ValueError, match="exactly one of at_most or at_least"):
        requirement_verdict(ds, "max_gap")
    with pytest.raises(ValueError, match="area_fraction must be in"):
        requirement_verdict(ds, "max_gap", at_most=1.0, area_fraction=0.0)
    with pytest.raises(ValueError, match="metric 'no_such' is not in the Dataset"):
        requirement_verdict(ds, "no_such", at_most=1.0)


def test_summarise_lists_every_metric_and_fold():
    ds = contract_dataset(10.0, nfold_max=2)
    s = summarise(ds, band_width_deg=30.0,
                  requirement=Requirement("max_gap", at_most=7200.0, area_fraction=0.9))
    names = [(m["metric"], m["k"]) for m in s["metrics"]]
    assert ("nfold_fraction", 1) in names and ("nfold_fraction", 2) in names
    assert ("cell_area", None) not in names and ("lat_bnds", None) not in names
    gap_count = next(m for m in s["metrics"] if m["metric"] == "gap_count")
    assert gap_count["global"]["mean"] == pytest.approx(12.0, rel=SUM_ROUNDING)
    assert len(gap_count["bands"]) == 6
    assert s["requirement"]["met"] is True
    assert s["attrs"]["covergrid_step_s"] == 60.0
    rows = summary_rows(s)
    assert all(set(r) == set(CSV_COLUMNS) for r in rows)
    assert len(rows) == len(s["metrics"]) * 7  # one global row and six bands each


def test_bands_narrower_than_a_cell_report_the_cells_they_hold():
    # 7 deg bands on a 10 deg grid: the band from -90 holds the row -90..-80 (centre -85), so it
    # must say -90..-80, and its zone area must match those latitudes.
    ds = contract_dataset(10.0)
    bands = band_statistics(ds["max_gap"], ds["cell_area"], 7.0, ds["lat_bnds"].values)
    assert (bands[0]["lat_min_deg"], bands[0]["lat_max_deg"]) == (-90.0, -80.0)
    for b in bands:
        zone = 2 * math.pi * SPHERE_RADIUS_M**2 * (
            math.sin(math.radians(b["lat_max_deg"])) - math.sin(math.radians(b["lat_min_deg"])))
        assert b["area_m2"] == pytest.approx(zone, rel=SUM_ROUNDING)


def test_mean_of_a_uniform_field_lies_within_its_min_and_max():
    # On a 5 deg grid the plain weighted sum of 7200 s everywhere comes out 7199.999999999999.
    ds = contract_dataset(5.0)
    x = _lat_field(ds, lambda lat: np.full_like(lat, 7200.0))
    stats = area_statistics(x, ds["cell_area"].values)
    assert stats["min"] <= stats["mean"] <= stats["max"]
