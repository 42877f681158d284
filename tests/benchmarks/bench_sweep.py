"""Trade-study benchmark: designs evaluated per minute, and the share of designs pruning avoids.

S1  The realistic sweep of the trade-study issue: 6 altitudes (500..1500 km) x 5 inclinations
    (45..85 deg) x totals 12..48 with every planes count and phasing, min elevation 10 deg,
    2 deg grid, 24 h at 60 s. That is tens of thousands of designs, so the benchmark
    evaluates a fixed, evenly strided subset (every k-th design of the full list, so all
    altitudes, inclinations and sizes are represented) on the threads scheduler, reports
    designs per minute and extrapolates the wall time of the whole sweep.
S2  A sizing search on part of that space (2 altitudes x 2 inclinations, totals 12..48, all
    planes and phasings, requirement max_gap <= 30 min over 90 % of the area): the share of
    the design space evaluated at full resolution, pruned coarsely, and skipped by stopping
    at the first feasible total.

Usage: python bench_sweep.py [n_subset] prints one JSON line (run() returns the dict).
"""

from __future__ import annotations

import json
import os
import sys
import time

from covergrid.study import parse_study, resolve
from covergrid.trade.runner import design_runner, run_designs
from covergrid.trade.sizing import size_study
from covergrid.trade.space import evaluation_context, sweep_designs
from covergrid.trade.store import MemoryStore

ALTITUDES_KM = [500.0, 700.0, 900.0, 1100.0, 1300.0, 1500.0]
INCLINATIONS_DEG = [45.0, 55.0, 65.0, 75.0, 85.0]


def _study(**extra) -> object:
    return parse_study({
        "study": "bench_sweep", "epoch": "2030-06-01T00:00:00Z", "duration_h": 24.0,
        "step_s": 60.0,
        "constellation": [{"walker": {"pattern": "delta", "total": 24, "planes": 4,
                                      "phasing": 1},
                           "template": {"altitude_km": 1000.0, "inclination_deg": 55.0}}],
        "sensor": {"min_elevation_deg": 10.0}, "grid": {"resolution_deg": 2.0},
        "requirement": {"metric": "max_gap", "at_most": 1800.0, "area_fraction": 0.9},
        "compute": {"scheduler": "threads"}, **extra})


def run(n_subset: int = 120) -> dict:
    """Run S1 and S2; returns the figures as a dict."""
    study = _study(sweep={"altitude_km": ALTITUDES_KM, "inclination_deg": INCLINATIONS_DEG,
                          "total": {"from": 12, "to": 48, "step": 1}, "planes": "all",
                          "phasing": "all"})
    study = resolve(study)
    designs = sweep_designs(study)
    stride = max(1, len(designs) // n_subset)
    subset = designs[::stride][:n_subset]
    ctx = evaluation_context(study)
    with design_runner(study.compute) as runner:
        run_designs(subset[:2], ctx, MemoryStore(), runner)  # JIT load / warm-up
        t0 = time.perf_counter()
        rows, computed = run_designs(subset, ctx, MemoryStore(), runner)
        wall = time.perf_counter() - t0
    per_min = 60.0 * computed / wall
    mean_sat = sum(d.total for d in subset) / len(subset)

    sizing_study = _study(sizing={"altitude_km": [700.0, 1100.0],
                                  "inclination_deg": [55.0, 75.0],
                                  "total": {"min": 12, "max": 48}})
    t1 = time.perf_counter()
    res = size_study(sizing_study)
    sizing_wall = time.perf_counter() - t1
    s = res.search
    return {
        "benchmark": "S1/S2 trade study",
        "cores": os.cpu_count(),
        "S1_designs_in_sweep": len(designs),
        "S1_subset_evaluated": computed,
        "S1_subset_mean_satellites": round(mean_sat, 1),
        "S1_wall_s": round(wall, 2),
        "S1_designs_per_minute": round(per_min, 1),
        "S1_full_sweep_extrapolated_h": round(len(designs) / per_min / 60.0, 2),
        "S2_wall_s": round(sizing_wall, 2),
        "S2_designs_in_space": s["designs_in_space"],
        "S2_coarse_evaluated": s["coarse_evaluated"],
        "S2_full_evaluated": s["full_evaluated"],
        "S2_pruned": s["pruned"],
        "S2_skipped_by_early_stop": s["skipped_by_early_stop"],
        "S2_share_avoided_by_pruning": round(s["share_avoided_by_pruning"], 3),
        "S2_share_of_reached_designs_pruned":
            round(s["pruned"] / s["coarse_evaluated"], 3) if s["coarse_evaluated"] else 0.0,
        "S2_share_not_evaluated_at_full_resolution":
            round(s["share_not_evaluated_at_full_resolution"], 3),
        "S2_best": res.best,
        "S2_results": [(r["altitude_km"], r["inclination_deg"], r["total"], r["planes"],
                        r["phasing"]) for r in res.results],
    }


if __name__ == "__main__":
    print(json.dumps(run(int(sys.argv[1]) if len(sys.argv) > 1 else 120)))
