"""numba's on-disk cache: warmed once, then hit by a real run (no compiling in the run)."""

from __future__ import annotations

import json
import os
import subprocess
import sys

import pytest

from conftest import TINY_STUDY, write_study

# A run of a study with figures in a fresh process; prints what numba compiled or loaded.
_RUN_AND_REPORT = """
import json, sys
from covergrid.pipeline.run import run_study
from covergrid.pipeline.warmup import compiled_functions
from covergrid.study import load_study
run_study(load_study(sys.argv[1]), sys.argv[2])
stats = {name: [sum(d.stats.cache_hits.values()), sum(d.stats.cache_misses.values())]
         for name, d in compiled_functions().items()}
print(json.dumps(stats))
"""


@pytest.mark.slow
def test_the_warm_cache_is_hit_by_a_run(tmp_path):
    env = {**os.environ, "NUMBA_CACHE_DIR": str(tmp_path / "numba-cache")}
    warm = subprocess.run([sys.executable, "-m", "covergrid.pipeline.warmup"], env=env,
                          cwd=tmp_path, capture_output=True, text=True, timeout=600,
                          check=False)
    assert warm.returncode == 0, warm.stderr[-2000:]
    assert "compiled" in warm.stdout  # an empty cache folder: everything compiled once
    files = sorted(p.name for p in (tmp_path / "numba-cache").rglob("*.nb*"))
    assert any(f.endswith(".nbc") for f in files) and any(f.endswith(".nbi") for f in files)

    study = write_study(tmp_path, TINY_STUDY + "sensor: {min_elevation_deg: 12, "
                        "max_off_nadir_deg: 50}\n")
    run = subprocess.run([sys.executable, "-c", _RUN_AND_REPORT, str(study),
                          str(tmp_path / "out")], env=env, cwd=tmp_path, capture_output=True,
                         text=True, timeout=600, check=False)
    assert run.returncode == 0, run.stderr[-2000:]
    stats = json.loads(run.stdout.strip().splitlines()[-1])
    called = {name: hits for name, (hits, misses) in stats.items() if hits or misses}
    misses = {name: m for name, (h, m) in stats.items() if m}
    assert called and misses == {}  # every function the run called came from the cache
    # and the run wrote no new machine code
    assert sorted(p.name for p in (tmp_path / "numba-cache").rglob("*.nb*")) == files
