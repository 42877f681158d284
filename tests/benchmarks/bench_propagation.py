"""Benchmark: secular-J2 propagation of 10,000 satellites over 1,440 epochs to Earth-fixed.

Target (issue): under 1 s on one core. Run with the project's interpreter::

    .venv/bin/python tests/benchmarks/bench_propagation.py

or import :func:`run` (``run_all.py`` collects its dict). The scenario is invented: four
shells of Walker-delta-like planes, 2,500 satellites each, near-circular (e < 0.002), one
day at one-minute steps. Timings are taken after a warm-up call (numba compilation and
first-touch page faults of the 346 MB output are not counted); the best and median of
several repeats are reported. Secondary lines time the NumPy fallback on a slice, and the
kernel with a reused output buffer (``out=``).
"""

from __future__ import annotations

import os

# One core: set before numpy / numba are imported.
for _var in ("NUMBA_NUM_THREADS", "OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ[_var] = "1"

import time  # noqa: E402
from types import SimpleNamespace  # noqa: E402

import numpy as np  # noqa: E402

from covergrid.constants import EARTH_RADIUS_KM  # noqa: E402
from covergrid.orbits import j2  # noqa: E402

N_SAT = 10_000
N_EPOCH = 1_440
STEP_S = 60.0
TARGET_S = 1.0
REPEATS = 5


def _scenario(n_sat: int = N_SAT, seed: int = 2026) -> SimpleNamespace:
    """Invented constellation: 4 shells x 50 planes x 50 satellites, near-circular."""
    rng = np.random.default_rng(seed)
    shells = [(550.0, 53.0), (570.0, 70.0), (1100.0, 86.4), (800.0, 98.6)]  # alt km, i deg
    per_shell = n_sat // len(shells)
    planes = 50
    a, inc, raan, m = [], [], [], []
    for alt, i_deg in shells:
        k = np.arange(per_shell)
        plane = k % planes
        slot = k // planes
        a.append(np.full(per_shell, EARTH_RADIUS_KM + alt))
        inc.append(np.full(per_shell, np.radians(i_deg)))
        raan.append(2 * np.pi * plane / planes)
        m.append(2 * np.pi * slot / (per_shell // planes) + 2 * np.pi * plane / per_shell)
    n = per_shell * len(shells)
    return SimpleNamespace(
        a_km=np.concatenate(a),
        e=rng.uniform(0.0, 0.002, n),
        i_rad=np.concatenate(inc),
        raan_rad=np.concatenate(raan),
        argp_rad=rng.uniform(0.0, 2 * np.pi, n),
        M_rad=np.concatenate(m),
    )


def _theta0_rad() -> float:
    """Sidereal angle at an invented epoch, from covergrid.earth.time if present."""
    try:
        from covergrid.earth.time import gmst_rad
    except ImportError:  # the earth package is optional for this benchmark
        return 1.234
    return float(gmst_rad(np.datetime64("2027-03-01T00:00:00")))


def _time_it(fn, repeats: int = REPEATS) -> tuple[float, float]:
    times = []
    for _ in range(repeats):
        t0 = time.perf_counter()
        res = fn()
        times.append(time.perf_counter() - t0)
        del res
    return min(times), float(np.median(times))


def run(verbose: bool = True) -> dict:
    """Time the propagation and return the measurements.

    Returns
    -------
    dict
        ``name``, ``n_sat``, ``n_epoch``, ``best_s``, ``median_s``, ``target_s``,
        ``passed`` (best under target), ``reused_buffer_best_s``, ``numpy_per_point_ns``,
        ``numba_per_point_ns``, ``max_backend_difference_km``.
    """
    els = _scenario()
    t = np.arange(N_EPOCH) * STEP_S
    theta0 = _theta0_rad()

    warm = j2.propagate_to_ecef(els, t, theta0)  # compile + first touch
    best, median = _time_it(lambda: j2.propagate_to_ecef(els, t, theta0))
    buf = np.empty_like(warm)
    reuse_best, _ = _time_it(lambda: j2.propagate_to_ecef(els, t, theta0, out=buf))

    # NumPy fallback on a 500-satellite slice (same per-point cost, less waiting).
    sub = SimpleNamespace(**{k: v[:500] for k, v in vars(els).items()})
    j2.propagate_to_ecef(sub, t, theta0, backend="numpy")
    np_best, _ = _time_it(lambda: j2.propagate_to_ecef(sub, t, theta0, backend="numpy"), 2)
    diff = float(np.max(np.abs(j2.propagate_to_ecef(sub, t, theta0, backend="numpy") - warm[:500])))
    points = N_SAT * N_EPOCH
    result = {
        "name": "propagation_ecef",
        "n_sat": N_SAT,
        "n_epoch": N_EPOCH,
        "best_s": best,
        "median_s": median,
        "target_s": TARGET_S,
        "passed": best < TARGET_S,
        "reused_buffer_best_s": reuse_best,
        "numba_per_point_ns": best / points * 1e9,
        "numpy_per_point_ns": np_best / (500 * N_EPOCH) * 1e9,
        "max_backend_difference_km": diff,
    }
    if verbose:
        print(
            f"propagation {N_SAT} sats x {N_EPOCH} epochs -> ECEF: {best:.3f} s "
            f"(target < {TARGET_S:g} s)"
        )
        print(
            f"  median of {REPEATS}: {median:.3f} s; reusing the output buffer: {reuse_best:.3f} s"
        )
        print(
            f"  per point: numba {result['numba_per_point_ns']:.1f} ns, numpy fallback "
            f"{result['numpy_per_point_ns']:.1f} ns; backends differ by {diff:.1e} km"
        )
    return result


if __name__ == "__main__":
    run()
