"""The shape of the code: packages by stage, small modules, one path from the study to the
kernel, and no dependence on coverage.py although the source root is named ``coverage/``."""

from __future__ import annotations

import ast
import importlib.metadata
import math
import subprocess
import sys

import numpy as np

from conftest import REPO, TINY_STUDY, write_study
from covergrid.compute import kernel
from covergrid.pipeline.run import run_study
from covergrid.study import load_study

PACKAGE = REPO / "coverage" / "covergrid"
#: "No module is over ~600 lines": the limit with the tilde's slack.
MODULE_LINE_LIMIT = 650

# Run from the repository root, so that '' (the repository root) is first on sys.path, with
# any installed coverage.py hidden, as in an environment that never installed it.
_FROM_REPO_ROOT = """
import importlib.abc, importlib.machinery, sys

class HideInstalledCoverage(importlib.abc.MetaPathFinder):
    def find_spec(self, name, path=None, target=None):
        if name != "coverage":
            return None
        where = [p for p in sys.path if "site-packages" not in p]
        return importlib.machinery.PathFinder.find_spec(name, where)

sys.meta_path.insert(0, HideInstalledCoverage())
import importlib.util
spec = importlib.util.find_spec("coverage")
# the hazard is real: 'coverage' resolves to the source root, as a namespace package
assert spec is not None and spec.origin is None, spec
import covergrid
from covergrid.compute.engine import compute_coverage
from covergrid.compute.grid import GridSpec
from covergrid.compute.sensor import Sensor
from covergrid.orbits.walker import walker_delta
el = walker_delta(4, 2, 1, a_km=7578.137, i_rad=0.9)
ds = compute_coverage(el, "2031-03-20T00:00:00Z", 3600.0, 60.0, GridSpec(30.0), Sensor(10.0),
                      scheduler="synchronous")
assert float(ds.coverage_fraction.max()) > 0.0
print("ok")
"""


def test_import_and_numba_kernel_work_from_the_repository_root_without_coverage_py():
    proc = subprocess.run([sys.executable, "-c", _FROM_REPO_ROOT], cwd=REPO,
                          capture_output=True, text=True, timeout=300, check=False)
    assert proc.returncode == 0, proc.stderr[-2000:]
    assert proc.stdout.strip() == "ok"


def test_coverage_py_is_no_runtime_dependency():
    requires = importlib.metadata.requires("covergrid") or []
    runtime = [r for r in requires if "extra ==" not in r]
    assert runtime and not any(r.split()[0].lower().startswith("coverage") for r in runtime)


def _modules():
    return sorted(p for p in PACKAGE.rglob("*.py") if "__pycache__" not in p.parts)


def test_no_module_is_over_about_600_lines():
    long = {p.relative_to(PACKAGE).as_posix(): n for p in _modules()
            if (n := len(p.read_text(encoding="utf-8").splitlines())) > MODULE_LINE_LIMIT}
    assert long == {}


def test_no_private_name_is_imported_across_modules():
    found = []
    for path in _modules():
        for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
            if isinstance(node, ast.ImportFrom) and (node.module or "").startswith("covergrid"):
                found += [f"{path.name}: {a.name}" for a in node.names
                          if a.name.startswith("_") and a.name != "__version__"]
    assert found == []


def _imports(path) -> set[str]:
    out: set[str] = set()
    for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
        if isinstance(node, ast.ImportFrom):
            out.add(node.module or "")
        elif isinstance(node, ast.Import):
            out.update(a.name for a in node.names)
    return out


def test_the_stages_import_downward_only():
    # orbits, earth and compute are pure numerics: they never read a study, run a pipeline,
    # trade, write a file or draw
    banned = ("covergrid.study", "covergrid.pipeline", "covergrid.trade", "covergrid.io",
              "covergrid.render", "covergrid.cli")
    for stage in ("orbits", "earth", "compute"):
        for path in (PACKAGE / stage).glob("*.py"):
            bad = [m for m in _imports(path) if m.startswith(banned)]
            assert bad == [], f"{stage}/{path.name} imports {bad}"


def test_min_elevation_goes_from_the_study_file_to_the_kernel(tmp_path, monkeypatch):
    study = load_study(write_study(tmp_path, TINY_STUDY + "sensor: {min_elevation_deg: 23.5}\n"
                                   + "compute: {scheduler: synchronous}\n"))
    seen = []
    real = kernel.run_band

    def spy(state, pos_km, i0, rows, lon0_rad, dlon_rad, n_lon, el_min_rad, *args, **kw):
        seen.append(el_min_rad)
        return real(state, pos_km, i0, rows, lon0_rad, dlon_rad, n_lon, el_min_rad, *args,
                    **kw)

    monkeypatch.setattr(kernel, "run_band", spy)
    result = run_study(study)
    assert seen and set(seen) == {math.radians(23.5)}
    assert result.dataset.attrs["covergrid_min_elevation_deg"] == 23.5
    assert np.isfinite(result.dataset.max_gap.values).all()
