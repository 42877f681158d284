"""Benchmarks of issue 13: a regional grid's cost, and point targets.

* region: a 10 x 10 deg region at 0.1 deg (10,000 cells) against a global run at 0.1 deg
  (6.48 million cells; about 3 GB at its peak) and against the region's latitudes all round
  the globe (360,000 cells), measured side by side in one process; the region's values are
  checked equal (to rounding) to the same cells cut from the global run.
* targets: 1,000 targets (seeded, uniform on the sphere) for 7 days at 10 s.

Constellation for both: Walker delta 24/6/1 at 550 km and 53 deg, 10 deg elevation.
"""

from __future__ import annotations

import json
import math
import sys
import time

import numpy as np

from covergrid.compute.engine import compute_coverage
from covergrid.compute.grid import GridSpec
from covergrid.compute.sensor import Sensor
from covergrid.compute.targets import Targets, evaluate_targets
from covergrid.constants import WGS84_A_KM
from covergrid.earth.time import gmst_rad, parse_epoch
from covergrid.orbits.walker import walker_delta

EPOCH = "2031-03-20T00:00:00Z"
SENSOR = Sensor(min_elevation_deg=10.0)


def _els():
    return walker_delta(24, 6, 1, a_km=WGS84_A_KM + 550.0, i_rad=math.radians(53.0))


def _timed(fn):
    t = time.perf_counter()
    out = fn()
    return time.perf_counter() - t, out


def region() -> dict:
    els = _els()
    span, step = 6 * 3600.0, 30.0
    box = GridSpec(0.1, lat_min_deg=40.0, lat_max_deg=50.0, lon_min_deg=10.0,
                   lon_max_deg=20.0)
    band = GridSpec(0.1, lat_min_deg=40.0, lat_max_deg=50.0)
    world = GridSpec(0.1)
    run = lambda g: compute_coverage(els, EPOCH, span, step, g, SENSOR,  # noqa: E731
                                     scheduler="threads")
    run(GridSpec(2.0, lat_min_deg=40.0, lat_max_deg=50.0, lon_min_deg=10.0,
                 lon_max_deg=20.0))  # warm the compiled code
    t_box, a = _timed(lambda: run(box))
    t_band, _ = _timed(lambda: run(band))
    t_world, w = _timed(lambda: run(world))
    cut = w.sel(lon=slice(10.0, 20.0), lat=slice(40.0, 50.0))
    diff = float(np.nanmax(np.abs(a["max_gap"].values - cut["max_gap"].values)))
    return {"region_cells": int(box.n_cells), "global_cells": int(world.n_cells),
            "region_s": t_box, "band_s": t_band, "global_s": t_world,
            "ratio_vs_global": t_world / t_box, "ratio_vs_band": t_band / t_box,
            "target_ratio": 20.0, "max_gap_diff_s": diff}


def targets() -> dict:
    els = _els()
    rng = np.random.default_rng(13)
    n = 1000
    lat = np.degrees(np.arcsin(rng.uniform(-1.0, 1.0, n)))
    lon = rng.uniform(-180.0, 180.0, n)
    tg = Targets(tuple(f"T{k:04d}" for k in range(n)), tuple(lat), tuple(lon), (0.0,) * n)
    theta0 = float(gmst_rad(parse_epoch(EPOCH), 0.0))
    small = Targets(tg.names[:10], tg.lat_deg[:10], tg.lon_deg[:10], tg.altitude_m[:10])
    evaluate_targets(els, theta0, 3600.0, 10.0, small, SENSOR)  # warm the compiled code
    t, out = _timed(lambda: evaluate_targets(els, theta0, 7 * 86400.0, 10.0, tg, SENSOR))
    return {"targets": n, "span_days": 7, "step_s": 10.0, "seconds": t,
            "passes": int(out["passes"]["rise"].size), "target_s_limit": 10.0}


if __name__ == "__main__":
    which = sys.argv[1] if len(sys.argv) > 1 else "region"
    print(json.dumps(region() if which == "region" else targets()))
