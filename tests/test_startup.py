"""Start-up: the commands that compute nothing import none of the heavy libraries, and the
drawing code imports matplotlib and cartopy only when it draws."""

from __future__ import annotations

import json
import subprocess
import sys

import pytest

from conftest import TINY_STUDY, write_study

#: Libraries that take a tenth of a second or more each to import.
HEAVY = ("numba", "xarray", "dask", "distributed", "matplotlib", "cartopy", "scipy",
         "netCDF4", "pandas", "shapely", "pyproj")

_REPORT = """
import json, sys
{code}
print(json.dumps(sorted(m for m in {heavy!r} if m in sys.modules)))
"""


def _heavy_after(code: str, cwd) -> list[str]:
    proc = subprocess.run([sys.executable, "-c", _REPORT.format(code=code, heavy=HEAVY)],
                          cwd=cwd, capture_output=True, text=True, timeout=120, check=False)
    assert proc.returncode == 0, proc.stderr[-2000:]
    return json.loads(proc.stdout.strip().splitlines()[-1])


@pytest.mark.parametrize("command", ["check", "schema"])
def test_check_and_schema_import_no_heavy_library(tmp_path, command):
    study = write_study(tmp_path, TINY_STUDY)
    argv = ["check", str(study)] if command == "check" else ["schema"]
    code = ("import contextlib, io\nfrom covergrid.cli import main\n"
            f"with contextlib.redirect_stdout(io.StringIO()):\n    assert main({argv!r}) == 0")
    assert _heavy_after(code, tmp_path) == []


def test_importing_the_drawing_code_loads_no_plotting_library(tmp_path):
    code = "import covergrid.render, covergrid.pipeline.figures, covergrid.pipeline.run"
    assert _heavy_after(code, tmp_path) == []
