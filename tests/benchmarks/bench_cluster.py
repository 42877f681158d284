"""W2 on a 2-worker dask.distributed LocalCluster against the threaded scheduler (run by
`make bench` through run_all.py).

W2: Walker delta 1200/40/1 at 53 deg, 600 km, min elevation 25 deg, 1 deg grid, 24 h at 30 s
(as in bench_coverage.py). Both runs in this one process, on the same machine:

- threads: the default scheduler, after a small warm-up run (JIT compile or cache load);
- cluster: a LocalCluster of 2 worker processes with 1 thread each, listening on 127.0.0.1
  only. Its start-up (workers up) and the workers' warm-up (each loads the compiled kernel
  on its first band) are reported apart from the timed run.

Reported: both wall times, their ratio (cluster / threads; above 1 means the cluster is
slower), and whether the two Datasets are identical (they must be).

Usage: python bench_cluster.py prints one JSON line.
"""

from __future__ import annotations

import json
import math
import os
import time

import xarray as xr

from covergrid.compute.engine import compute_coverage
from covergrid.compute.grid import GridSpec
from covergrid.compute.sensor import Sensor
from covergrid.orbits.walker import walker_delta

RE = 6378.137
EPOCH = "2027-01-01T00:00:00Z"
N_WORKERS = 2


def _w2():
    el = walker_delta(1200, 40, 1, a_km=RE + 600.0, i_rad=math.radians(53.0))
    return el, GridSpec(1.0), Sensor(25.0), 24 * 3600.0, 30.0


def run() -> dict:
    """Time W2 on threads and on a 2-worker local cluster; returns the figures."""
    from distributed import Client, LocalCluster

    el, grid, sensor, span, step = _w2()
    small = el.subset(slice(0, 40))

    t = time.perf_counter()
    compute_coverage(small, EPOCH, 600.0, step, grid, sensor)
    threads_warmup = time.perf_counter() - t
    t = time.perf_counter()
    ds_threads = compute_coverage(el, EPOCH, span, step, grid, sensor, scheduler="threads")
    threads_s = time.perf_counter() - t

    t = time.perf_counter()
    with LocalCluster(n_workers=N_WORKERS, threads_per_worker=1, processes=True,
                      host="127.0.0.1", dashboard_address=None) as cluster, \
            Client(cluster) as client:
        client.wait_for_workers(N_WORKERS)
        start_s = time.perf_counter() - t
        t = time.perf_counter()
        # one small band per worker at least: every worker loads the compiled kernel
        compute_coverage(small, EPOCH, 600.0, step, grid, sensor, chunk_rows=10,
                         scheduler=client)
        cluster_warmup = time.perf_counter() - t
        t = time.perf_counter()
        ds_cluster = compute_coverage(el, EPOCH, span, step, grid, sensor, scheduler=client)
        cluster_s = time.perf_counter() - t
    try:
        xr.testing.assert_identical(ds_cluster, ds_threads)
        identical = True
    except AssertionError:
        identical = False
    return {
        "bench": "W2 cluster vs threads",
        "threads_s": threads_s,
        "cluster_s": cluster_s,
        "cluster_over_threads": cluster_s / threads_s,
        "cluster_start_s": start_s,
        "cluster_warmup_s": cluster_warmup,
        "threads_warmup_s": threads_warmup,
        "workers": N_WORKERS,
        "threads_per_worker": 1,
        "cpu_count": os.cpu_count(),
        "identical": identical,
        "visits": int(ds_threads.visits),
    }


if __name__ == "__main__":
    print(json.dumps(run()))
