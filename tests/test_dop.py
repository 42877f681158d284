"""Dilution of precision: the per-geometry values against an independent least-squares
computation and a closed-form geometry, and the streamed per-cell metrics against a brute
force over every cell, satellite and sample."""

from __future__ import annotations

import math

import numpy as np
import pytest

from conftest import cell_centres, visibility
from covergrid.compute.dop import column_spans, dop_values
from covergrid.compute.dop_spec import N_BINS, DopSpec
from covergrid.compute.engine import compute_coverage
from covergrid.compute.grid import GridSpec
from covergrid.compute.metrics import DOP_KINDS, DOP_METRICS
from covergrid.compute.sensor import Sensor
from covergrid.constants import WGS84_A_KM
from covergrid.earth.frames import geodetic_to_ecef, look_angles
from covergrid.earth.time import gmst_rad, parse_epoch
from covergrid.errors import CovergridError
from covergrid.orbits import j2
from covergrid.orbits.walker import walker_delta

#: Our values come from closed-form sums (Schur complement, adjugate); numpy's from an LU or
#: SVD of the same matrix: they agree to rounding of a well-conditioned 4 x 4 system.
RTOL_DOP = 1e-9
#: The percentile is read from a histogram of DOP^2 binned by its 5 leading mantissa bits: a
#: bin's upper edge is at most (1 + 1/32) times its lower edge in DOP^2, so the reported
#: value is at most sqrt(1 + 1/32) - 1 = 1.55 % above the sampled one (the module's 1.6 %).
P95_REL = math.sqrt(1.0 + 1.0 / 32.0) - 1.0


def _enu(az: np.ndarray, el: np.ndarray) -> np.ndarray:
    """Unit lines of sight in east-north-up from azimuth (from north) and elevation."""
    return np.stack([np.cos(el) * np.sin(az), np.cos(el) * np.cos(az), np.sin(el)], axis=-1)


def _dops_by_lstsq(u_enu: np.ndarray) -> dict[str, float]:
    """DOPs by plain linear algebra: Q = (G^T G)^-1 from numpy's least-squares pseudo-inverse
    (Q = G^+ G^+T), G rows (e, n, u, 1); the standard definitions (common practice; e.g.
    Misra and Enge, Global Positioning System, 2nd ed., sec. 6.1, from memory)."""
    g = np.hstack([u_enu, np.ones((len(u_enu), 1))])
    pinv = np.linalg.lstsq(g, np.eye(len(u_enu)), rcond=None)[0]  # (4, n)
    q = pinv @ pinv.T
    q_inv = np.linalg.inv(g.T @ g)
    np.testing.assert_allclose(q, q_inv, rtol=1e-8, atol=1e-12)
    d = np.diag(q)
    return {"gdop": math.sqrt(d.sum()), "pdop": math.sqrt(d[:3].sum()),
            "hdop": math.sqrt(d[0] + d[1]), "vdop": math.sqrt(d[2]), "tdop": math.sqrt(d[3])}


def test_dop_matches_least_squares_on_random_geometries():
    rng = np.random.default_rng(12)
    for _ in range(200):
        lat = rng.uniform(-math.pi / 2, math.pi / 2)
        lon = rng.uniform(-math.pi, math.pi)
        n = int(rng.integers(4, 13))
        # satellites above the horizon at GPS-like radius, positions in the Earth-fixed frame
        site = geodetic_to_ecef(lat, lon, 0.0)
        sats = []
        while len(sats) < n:
            p = rng.normal(size=3)
            p *= (WGS84_A_KM + 20200.0) / np.linalg.norm(p)
            if look_angles(lat, lon, 0.0, p)[1] > math.radians(5.0):
                sats.append(p)
        sats = np.array(sats)
        az, el, _ = look_angles(np.full(n, lat), np.full(n, lon), 0.0, sats)
        want = _dops_by_lstsq(_enu(az, el))
        los = sats - site
        los /= np.linalg.norm(los, axis=1, keepdims=True)
        up = np.array([math.cos(lat) * math.cos(lon), math.cos(lat) * math.sin(lon),
                       math.sin(lat)])
        got = dop_values(los, up)
        for k in DOP_KINDS:
            assert got[k] == pytest.approx(want[k], rel=RTOL_DOP), (k, n)


@pytest.mark.parametrize("elev_deg", [0.0, 15.0, 30.0, 45.0])
def test_zenith_plus_three_equally_spaced_closed_form(elev_deg):
    # Derived here: one satellite at the zenith and three at elevation E, 120 deg apart in
    # azimuth. G^T G = [[3/2 c^2, 0, 0, 0], [0, 3/2 c^2, 0, 0], [0, 0, 1 + 3 s^2, 1 + 3 s],
    # [0, 0, 1 + 3 s, 4]] (c = cos E, s = sin E), whose (u, t) block has determinant
    # 3 (1 - s)^2; so HDOP = 2 / (sqrt(3) c), VDOP = 2 / (sqrt(3) (1 - s)),
    # TDOP = sqrt(1 + 3 s^2) / (sqrt(3) (1 - s)).
    e = math.radians(elev_deg)
    c, s = math.cos(e), math.sin(e)
    az = np.radians([0.0, 0.0, 120.0, 240.0])
    el = np.array([math.pi / 2, e, e, e])
    u = _enu(az, el)
    hdop = 2.0 / (math.sqrt(3.0) * c)
    vdop = 2.0 / (math.sqrt(3.0) * (1.0 - s))
    tdop = math.sqrt(1.0 + 3.0 * s * s) / (math.sqrt(3.0) * (1.0 - s))
    pdop = math.hypot(hdop, vdop)
    want = {"gdop": math.hypot(pdop, tdop), "pdop": pdop, "hdop": hdop, "vdop": vdop,
            "tdop": tdop}
    got = dop_values(u, np.array([0.0, 0.0, 1.0]))
    for k in DOP_KINDS:
        assert got[k] == pytest.approx(want[k], rel=1e-12), k
    # the same geometry turned into another frame: DOP does not depend on it
    rot = np.linalg.qr(np.random.default_rng(3).normal(size=(3, 3)))[0]
    got_rot = dop_values(u @ rot.T, rot @ np.array([0.0, 0.0, 1.0]))
    for k in DOP_KINDS:
        assert got_rot[k] == pytest.approx(want[k], rel=1e-9), k
    # and numpy's least squares agrees (independent)
    for k, v in _dops_by_lstsq(u).items():
        assert v == pytest.approx(want[k], rel=1e-9), k


def test_fewer_than_four_or_one_cone_is_no_fix():
    u = _enu(np.radians([0.0, 120.0, 240.0]), np.radians([30.0, 30.0, 30.0]))
    assert all(math.isinf(v) for v in dop_values(u, np.array([0.0, 0.0, 1.0])).values())
    # four on one cone about the vertical: the clock and the height cannot be separated
    u4 = _enu(np.radians([0.0, 90.0, 180.0, 270.0]), np.radians([30.0] * 4))
    assert all(math.isinf(v) for v in dop_values(u4, np.array([0.0, 0.0, 1.0])).values())


def test_pdop_threshold_is_checked():
    with pytest.raises(CovergridError, match=r"dop\.pdop_threshold.*\(0, 1000\]"):
        DopSpec(pdop_threshold=0.0)
    with pytest.raises(CovergridError, match=r"dop\.pdop_threshold"):
        DopSpec(pdop_threshold=math.nan)


def _brute_dops(elements, epoch, n_steps, step_s, res_deg, min_el_deg):
    """(n_steps, n_kinds, n_cells) DOPs by numpy least squares on every sample and cell."""
    la, lo = cell_centres(res_deg)
    vis = visibility(elements, epoch, n_steps, step_s, la, lo, min_el_deg)
    pos = j2.propagate_to_ecef(elements, np.arange(n_steps) * step_s,
                               float(gmst_rad(parse_epoch(epoch), 0.0)))
    la, lo = la.ravel(), lo.ravel()
    out = np.full((n_steps, len(DOP_KINDS), la.size), np.inf)
    for i in range(n_steps):
        for c in range(la.size):
            sel = vis[i, :, c]
            if sel.sum() < 4:
                continue
            az, el, _ = look_angles(np.full(sel.sum(), la[c]), np.full(sel.sum(), lo[c]), 0.0,
                                    pos[sel, i, :])
            d = _dops_by_lstsq(_enu(az, el))
            out[i, :, c] = [d[k] for k in DOP_KINDS]
    return out, vis.sum(axis=1)


@pytest.mark.parametrize("min_el_deg", [5.0, 40.0])
def test_streamed_metrics_match_brute_force(min_el_deg):
    # 24 satellites in 6 planes at 20,200 km and 55 deg (a GPS-like invented constellation);
    # a 40 deg mask leaves cells and times with fewer than four in view
    el = walker_delta(24, 6, 1, a_km=WGS84_A_KM + 20200.0, i_rad=math.radians(55.0))
    epoch, step_s, n_steps, res = "2031-03-20T00:00:00Z", 600.0, 24, 20.0
    threshold = 3.0
    ds = compute_coverage(el, epoch, n_steps * step_s, step_s, GridSpec(res), Sensor(min_el_deg),
                          scheduler="synchronous", dop=DopSpec(pdop_threshold=threshold))
    dops, n_vis = _brute_dops(el, epoch, n_steps, step_s, res, min_el_deg)
    for name in DOP_METRICS:
        assert name in ds
    for k, kind in enumerate(DOP_KINDS):
        v = dops[:, k, :]
        got_max = ds[f"max_{kind}"].values.ravel()
        np.testing.assert_allclose(got_max, v.max(axis=0), rtol=1e-7)
        fin = np.isfinite(v)
        with np.errstate(invalid="ignore"):
            mean = np.where(fin.any(axis=0), np.where(fin, v, 0.0).sum(axis=0)
                            / fin.sum(axis=0), np.nan)
        np.testing.assert_allclose(ds[f"mean_{kind}"].values.ravel(), mean, rtol=1e-7)
        # 95th percentile of the samples, inverted CDF (Hyndman and Fan definition 1)
        p95 = np.quantile(v, 0.95, axis=0, method="inverted_cdf")
        got = ds[f"p95_{kind}"].values.ravel()
        finite = np.isfinite(p95)
        assert np.array_equal(np.isfinite(got), finite)
        low = p95[finite] < 0.5  # the first bin reports at most 0.5
        assert np.all(got[finite] >= p95[finite] * (1 - 1e-9))
        assert np.all(got[finite][~low] <= p95[finite][~low] * (1 + P95_REL) + 1e-12)
        assert np.all(got[finite][low] <= 0.5)
    ok = (dops[:, 1, :] <= threshold).mean(axis=0)
    np.testing.assert_allclose(ds["pdop_fraction"].values.ravel(), ok, atol=1e-12)
    no_fix = (n_vis < 4).mean(axis=0)
    np.testing.assert_allclose(ds["no_fix_fraction"].values.ravel(), no_fix, atol=1e-12)
    if min_el_deg > 30.0:
        assert no_fix.max() > 0.0  # the case exercises outages
    assert ds["pdop_fraction"].attrs["threshold"] == threshold
    assert N_BINS > 100


def test_dop_metrics_absent_without_a_dop_request():
    el = walker_delta(6, 3, 1, a_km=WGS84_A_KM + 1200.0, i_rad=math.radians(55.0))
    ds = compute_coverage(el, "2031-03-20T00:00:00Z", 3600.0, 300.0, GridSpec(30.0),
                          Sensor(10.0), scheduler="synchronous")
    assert not set(DOP_METRICS) & set(ds.data_vars)


_NAV_TRADE = """\
study: nav-trade
epoch: 2031-03-20T00:00:00Z
duration_h: 6
step_s: 600
constellation:
  - walker: {pattern: delta, total: 24, planes: 6, phasing: 1}
    template: {altitude_km: 20200, inclination_deg: 55}
sensor: {min_elevation_deg: 10}
grid: {resolution_deg: 15}
dop: {pdop_threshold: 4}
requirement: {metric: pdop_fraction, at_least: 0.9, area_fraction: 0.9}
"""


def test_sweep_and_sizing_state_a_dop_requirement(tmp_path):
    import yaml

    from covergrid.pipeline.run import run_study
    from covergrid.study import parse_study as parse_data
    from covergrid.trade.sizing import size_study
    from covergrid.trade.sweep import run_sweep

    def parse_study(text):
        return parse_data(yaml.safe_load(text))

    sweep = parse_study(_NAV_TRADE + "sweep: {total: [12, 24], planes: [3, 6]}\n")
    res = run_sweep(sweep, figures=False)
    rows = {(r["total"], r["planes"]): r for r in res.rows}
    assert set(rows) == {(12, 3), (12, 6), (24, 3), (24, 6)}
    for r in rows.values():
        assert "p95_pdop_mean" in r and "no_fix_fraction_max" in r
        assert math.isfinite(r["achieved"])
    # the row of 24/6/1 is the plain run's verdict
    single = run_study(parse_study(_NAV_TRADE))
    assert rows[(24, 6)]["achieved"] == pytest.approx(single.summary["requirement"]["achieved"])
    # more satellites in the same planes: at least as good a geometry, here strictly better
    assert rows[(24, 6)]["achieved"] > rows[(12, 6)]["achieved"]
    sized = size_study(parse_study(_NAV_TRADE + """\
sizing:
  pattern: delta
  altitude_km: [20200]
  inclination_deg: [55]
  total: {min: 12, max: 24}
  planes: [6]
  phasing: [1]
  prune: false
"""))
    assert sized.best is not None
    best = sized.best["total"]
    by_total = {r["total"]: r for r in sized.designs}
    assert by_total[best]["meets"]
    assert all(not r["meets"] for t, r in by_total.items() if t < best)


def test_each_row_computes_the_span_of_its_cells_in_the_region():
    mask = np.array([[False, True, False, True, False],
                     [False, False, False, False, False],
                     [True, True, True, True, True]])
    lo, hi = column_spans(mask, 3, 5)
    assert lo.tolist() == [1, 0, 0] and hi.tolist() == [4, 0, 5]  # row 1: none, skipped
    lo, hi = column_spans(None, 3, 5)
    assert lo.tolist() == [0, 0, 0] and hi.tolist() == [5, 5, 5]
