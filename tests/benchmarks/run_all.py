"""Run every benchmark, each in its own process (so peak memory is per benchmark), and print
one table. Figures also go to outputs/bench/results.json. Used by `make bench`.

    python tests/benchmarks/run_all.py [name ...]

names: propagation w1 w2 w3 dop side process cluster sweep regions targets (default: all).
"""

from __future__ import annotations

import json
import subprocess
import sys
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent
ROOT = HERE.parents[1]

BENCHES = {
    "propagation": [sys.executable, "-c",
                    f"import json, sys; sys.path.insert(0, {str(HERE)!r}); "
                    "import bench_propagation as b; print(json.dumps(b.run()))"],
    "w1": [sys.executable, str(HERE / "bench_coverage.py"), "w1"],
    "w2": [sys.executable, str(HERE / "bench_coverage.py"), "w2"],
    "w3": [sys.executable, str(HERE / "bench_coverage.py"), "w3"],
    "dop": [sys.executable, str(HERE / "bench_coverage.py"), "dop"],
    "side": [sys.executable, str(HERE / "bench_coverage.py"), "side"],
    "cluster": [sys.executable, "-c",
                f"import json, sys; sys.path.insert(0, {str(HERE)!r}); "
                "import bench_cluster as b; print(json.dumps(b.run()))"],
    "process": [sys.executable, str(HERE / "bench_process.py")],
    "regions": [sys.executable, str(HERE / "bench_regions.py"), "region"],
    "targets": [sys.executable, str(HERE / "bench_regions.py"), "targets"],
    "sweep": [sys.executable, "-c",
              f"import json, sys; sys.path.insert(0, {str(HERE)!r}); "
              "import bench_sweep as b; print(json.dumps(b.run()))"],
}


def main(names: list[str]) -> int:
    results = {}
    for name in names or list(BENCHES):
        if name == "sweep" and not (HERE / "bench_sweep.py").exists():
            continue
        t = time.perf_counter()
        proc = subprocess.run(BENCHES[name], capture_output=True, text=True, cwd=ROOT)
        wall = time.perf_counter() - t
        if proc.returncode != 0:
            print(f"{name}: FAILED\n{proc.stderr[-2000:]}", file=sys.stderr)
            results[name] = {"error": proc.stderr[-2000:]}
            continue
        line = [x for x in proc.stdout.splitlines() if x.startswith("{")][-1]
        res = json.loads(line)
        res["process_wall_s"] = wall
        results[name] = res
        shown = ", ".join(f"{k}={v:.4g}" if isinstance(v, float) else f"{k}={v}"
                          for k, v in res.items())
        print(f"{name:12s} {shown}", flush=True)
    out = ROOT / "outputs" / "bench"
    out.mkdir(parents=True, exist_ok=True)
    (out / "results.json").write_text(json.dumps(results, indent=2))
    return 1 if any("error" in r for r in results.values()) else 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
