"""The estimate of a run's and a trade's work, time and memory, and the refusals above limits.

Issue 16, defect 3: the memory estimate missed the figures (a 100,000-satellite study was
estimated at 0.62 GB and died at 9.4 GB drawing its ground tracks), the worker processes of
a local cluster (1,024 x 256 was estimated at 0.68 GB) and the trade commands ignored the
memory limit. The study-level reproducers are in tests/bad_studies/ and tests/bad_commands/;
here the parts of the estimate are checked one by one, and against a real cluster's peak.
"""

from __future__ import annotations

import subprocess
import sys

import numpy as np
import pytest

from conftest import TINY_STUDY, write_study
from covergrid.errors import ResourceError
from covergrid.pipeline import resources
from covergrid.pipeline.figures import (
    HELPER_BASE_BYTES,
    HELPER_BYTES_PER_CELL,
    MAX_TRACKS,
    TRACK_SAMPLES,
    figure_count,
    figure_helpers_at_most,
)
from covergrid.study import load_study, parse_study, resolve
from covergrid.trade.evaluate import row_columns
from covergrid.trade.sizing import size_study
from covergrid.trade.space import sweep_designs

GIB = 2**30


def _resolved(tmp_path, extra: str = "", text: str = TINY_STUDY):
    return resolve(load_study(write_study(tmp_path, text + extra)))


def test_the_parts_add_up_and_maps_add_the_figures(tmp_path):
    study = _resolved(tmp_path)
    with_maps, without = resources.estimate(study), resources.estimate(study, maps=False)
    assert with_maps["memory_bytes"] == sum(with_maps["memory_parts"].values())
    assert without["memory_parts"]["figures"] == 0 and without["figures_s"] == 0.0
    n, cells = with_maps["satellites"], with_maps["cells"]
    helpers = figure_helpers_at_most(study.compute, figure_count(study))
    assert with_maps["memory_parts"]["figures"] == (
        min(n, MAX_TRACKS) * TRACK_SAMPLES * resources.TRACK_BYTES_PER_SAMPLE
        + n * resources.PLANE_BYTES_PER_SATELLITE + cells * HELPER_BYTES_PER_CELL
        + helpers * (HELPER_BASE_BYTES + cells * HELPER_BYTES_PER_CELL))


def test_the_figures_of_100000_satellites_stay_within_their_estimate(tmp_path):
    """Issue 16, defect 3: 100,000 satellites were estimated at 0.62 GB and the run died at
    9.4 GB drawing the ground tracks (every satellite propagated, every pair of satellites
    compared to number the planes). Now only the drawn satellites are propagated and the
    planes are numbered by sorting; the memory of building the ground-track figure's input,
    measured, stays within the estimate's figure part."""
    import tracemalloc

    from covergrid.render import ground_track, plane_numbers, track_selection

    study = _resolved(tmp_path, text=TINY_STUDY.replace("total: 6, planes: 3",
                                                        "total: 100000, planes: 100"))
    est = resources.estimate(study)
    resources.check_resources(study, est)  # allowed: the estimate is a few hundred MB
    tracemalloc.start()
    planes = plane_numbers(study.elements)
    shown = track_selection(planes, MAX_TRACKS)
    ground_track(study.elements.subset(shown), study.epoch, np.linspace(0.0, 6000.0,
                                                                        TRACK_SAMPLES))
    peak = tracemalloc.get_traced_memory()[1]
    tracemalloc.stop()
    assert np.unique(planes).size == 100 and shown.size == MAX_TRACKS
    assert peak <= est["memory_parts"]["figures"]


def test_every_worker_and_thread_of_a_local_cluster_is_counted(tmp_path):
    study = _resolved(tmp_path, "compute: {scheduler: local-cluster, workers: 1024, "
                      "threads_per_worker: 256}\n")
    est = resources.estimate(study)
    assert est["worker_processes"] == 1024
    assert est["tasks_at_once"] == est["bands"]  # more threads than tasks: every band at once
    assert est["memory_parts"]["workers"] >= 1024 * resources.WORKER_PROCESS_BYTES
    threads = resources.estimate(_resolved(tmp_path, "compute: {scheduler: threads}\n"))
    assert threads["memory_parts"]["workers"] == 0


def test_the_time_estimate_follows_its_calibration(tmp_path):
    study = _resolved(tmp_path)
    est = resources.estimate(study)
    assert est["compute_s"] == pytest.approx(
        (est["visits"] / resources.KERNEL_VISITS_PER_S_PER_CORE
         + est["row_samples"] * resources.KERNEL_S_PER_SATELLITE_SAMPLE_ROW
         + est["cells"] * resources.KERNEL_S_PER_CELL) / est["tasks_at_once"], rel=1e-12)
    # 6 satellites at 1200 km, 10 deg elevation: rho = asin(6378.137 / 7578.137) = 57.3 deg,
    # eta = asin(cos 10 deg sin rho) = 56.0 deg, lambda = 90 - eta - 10 = 24.0 deg (Wertz
    # and Larson, SMAD 3rd ed., sec. 5.2), so a circle spans 2 x 24.0 / 10 + 1 = 5.80 of
    # the 18 rows of a 10 deg grid in each of the 120 samples
    assert est["row_samples"] == pytest.approx(6 * 120 * 5.80, rel=0.001)
    longer = resources.estimate(_resolved(tmp_path, text=TINY_STUDY.replace("duration_h: 2",
                                                                            "duration_h: 4")))
    assert longer["visits"] == pytest.approx(2 * est["visits"], rel=1e-12)
    assert longer["row_samples"] == pytest.approx(2 * est["row_samples"], rel=1e-12)
    assert est["seconds"] == est["compute_s"] + est["figures_s"]


def test_the_time_estimate_counts_the_dop_work(tmp_path):
    """A dop: section adds its work to the time: per visibility (the line of sight added to
    the cell's geometry sums) and per cell and sample (the DOPs, statistics, histograms)."""
    plain = resources.estimate(_resolved(tmp_path))
    assert plain["dop_s"] == 0.0
    est = resources.estimate(_resolved(tmp_path, "dop:\n  pdop_threshold: 6\n"))
    assert est["visits"] == plain["visits"]
    want = (est["visits"] * resources.DOP_S_PER_VISIT
            + est["cells"] * est["steps"] * resources.DOP_S_PER_CELL_SAMPLE
            ) / est["tasks_at_once"]
    assert est["dop_s"] == pytest.approx(want, rel=1e-12)
    assert est["dop_s"] > 0.0
    assert est["compute_s"] == pytest.approx(plain["compute_s"] + want, rel=1e-12)
    assert est["memory_parts"]["tasks"] > plain["memory_parts"]["tasks"]


def test_the_work_limits_name_the_step(tmp_path, monkeypatch):
    study = _resolved(tmp_path)  # 6 satellites x 120 samples
    monkeypatch.setattr(resources, "MAX_SATELLITE_SAMPLES", 719)
    with pytest.raises(ResourceError, match=r"^step_s: 6 satellites x 120 samples = 720 "
                       r"positions; allowed: at most 719"):
        resources.check_resources(study)
    monkeypatch.setattr(resources, "MAX_SAMPLES", 119)
    with pytest.raises(ResourceError, match=r"^step_s: the span has 120 samples"):
        resources.check_resources(study)


def test_memory_sizes_are_shown_readably():
    assert resources.format_bytes(1e6) == "1 MB"
    assert resources.format_bytes(6.1e8) == "610 MB"
    assert resources.format_bytes(2.41e9) == "2.41 GB"
    assert resources.format_seconds(0.2) == "under 1 s"
    assert resources.format_seconds(4000) == "67 min"


SWEEP = {
    "study": "trade", "epoch": "2031-05-01T00:00:00Z", "duration_h": 2.0, "step_s": 60.0,
    "constellation": [{"walker": {"pattern": "delta", "total": 6, "planes": 2, "phasing": 1},
                       "template": {"altitude_km": 1200.0, "inclination_deg": 55.0}}],
    "grid": {"resolution_deg": 10.0},
    "requirement": {"metric": "max_gap", "at_most": 7200.0, "area_fraction": 0.5},
    "compute": {"scheduler": "synchronous"},
    "sweep": {"altitude_km": [1000.0, 1400.0], "inclination_deg": [50.0, 60.0],
              "total": {"from": 4, "to": 9, "step": 1}, "planes": "all", "phasing": [0, 1]},
    "sizing": {"altitude_km": [1000.0, 1400.0], "inclination_deg": 55.0,
               "total": {"min": 3, "max": 8}},
}


def test_trade_estimates_count_the_designs_without_listing_them():
    study = resolve(parse_study(SWEEP))
    assert resources.estimate_trade(study, "sweep")["designs"] == len(sweep_designs(study))
    sized = size_study(study)
    est = resources.estimate_trade(study, "sizing")
    assert est["designs"] == sized.search["designs_in_space"]
    # at worst every design coarsely and at full resolution
    assert est["evaluations"] == 2 * est["designs"]
    assert sized.search["coarse_evaluated"] + sized.search["full_evaluated"] <= est["evaluations"]


def test_sweep_and_size_honour_the_memory_limit():
    from covergrid.trade.sweep import run_sweep

    study = resolve(parse_study({**SWEEP, "compute": {"scheduler": "synchronous",
                                                      "memory_limit_gb": 0.01}}))
    for block in ("sweep", "sizing"):
        with pytest.raises(ResourceError, match=r"^compute.memory_limit_gb: the (sweep|sizing "
                           r"search) needs about .* but compute.memory_limit_gb is 10 MB"):
            resources.check_trade_resources(study, block)
    est = resources.estimate_trade(study, "sweep")
    columns = len(row_columns(study.nfold_max, study.requirement is not None))
    assert est["memory_parts"]["rows"] == (est["evaluations"] * resources.ROW_VALUE_BYTES
                                           * columns)
    assert len(run_sweep(study, force=True).rows) == est["designs"]


_PEAK = """\
import subprocess, sys, time, psutil
proc = psutil.Popen(sys.argv[1:])
peak = 0
while proc.poll() is None:
    try:
        peak = max(peak, sum(p.memory_info().rss for p in [proc, *proc.children(recursive=True)]))
    except psutil.Error:
        pass
    time.sleep(0.01)
print(proc.returncode, peak)
"""


@pytest.mark.slow  # a 2-worker local cluster on a 0.25 deg grid: 15-30 s
def test_the_estimate_covers_a_real_two_worker_cluster(tmp_path):
    """Issue 16, defect 3: a 2-worker cluster used 1.7 GB against an estimate of 0.68 GB.
    The peak resident memory of the whole process tree (sampled every 10 ms, so a lower
    bound) stays under the estimate; the estimate errs high by design (its baseline was
    fitted with figures, here off) but by less than a factor of 2.5."""
    text = (TINY_STUDY.replace("{resolution_deg: 10}", "{resolution_deg: 0.25}")
            .replace("total: 6, planes: 3", "total: 24, planes: 4")
            + "compute: {scheduler: local-cluster, workers: 2, threads_per_worker: 1}\n")
    path = write_study(tmp_path, text)
    proc = subprocess.run([sys.executable, "-c", _PEAK, sys.executable, "-m", "covergrid.cli",
                           "run", str(path), "--out", str(tmp_path / "out"), "--quiet",
                           "--no-maps"], capture_output=True, text=True, timeout=600,
                          check=False)
    status, peak = (int(x) for x in proc.stdout.split())
    assert status == 0, proc.stderr
    est = resources.estimate(resolve(load_study(path)), maps=False)
    assert est["worker_processes"] == 2
    assert peak <= est["memory_bytes"] <= 2.5 * peak, (peak, est["memory_parts"])


def test_walker_patterns_are_counted_without_listing_them():
    """With every planes and phasing, a total T has sigma(T) patterns (the sum of its
    divisors); the sum over T <= N equals sum_d d * floor(N / d) (each divisor d counted
    once per multiple; a classical identity, common practice). For N = 100,000 that is
    8.2e9 patterns, counted by the sieve without listing one."""
    from covergrid.orbits.walker import count_walker_options, walker_options

    n = 100000
    assert count_walker_options(range(1, n + 1), "all", "all") == sum(
        d * (n // d) for d in range(1, n + 1))
    for totals, planes, phasing in (([6, 8, 8, 12], "all", [0, 1]), (range(1, 40), [2, 3], "all"),
                                    ([5, 7], [1, 5, 99], [4, 0])):
        assert count_walker_options(totals, planes, phasing) == sum(
            len(walker_options(t, planes, phasing)) for t in dict.fromkeys(totals))
