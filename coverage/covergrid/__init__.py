"""covergrid: satellite-constellation coverage analysis.

The public API is small and imported lazily (importing ``covergrid`` loads no numerical
libraries):

- :func:`load_study` - read and validate a study file (:class:`Study`);
- :func:`resolve` - the study as the computation takes it (:class:`ResolvedStudy`);
- :func:`run` - compute a study's coverage Dataset (and write its outputs);
- :func:`estimate` - what a run would compute and cost, without computing;
- :func:`compute_coverage`, :class:`GridSpec`, :class:`Sensor`, :func:`walker_delta` - the
  engine on plain inputs, without a study file.
"""

from __future__ import annotations

import importlib.util as _util
import os as _os
import sys as _sys
from typing import Any

__version__ = "0.1.0"

__all__ = ["GridSpec", "ResolvedStudy", "Sensor", "Study", "__version__", "compute_coverage",
           "estimate", "load_study", "resolve", "run", "walker_delta"]


def _guard_source_root_name() -> None:
    """Keep the source root ``coverage/`` from passing for coverage.py.

    The repository keeps its sources in a folder named ``coverage/`` (holding this package).
    When Python runs with the repository root on ``sys.path`` (``python -c`` or a notebook
    started there) and coverage.py is not installed, ``import coverage`` finds that folder
    as an empty namespace package; numba, which imports coverage.py if it can, then fails.
    When ``coverage`` would resolve to nothing but such a source root, mark it as absent,
    so ``import coverage`` raises ImportError as it does in any environment without
    coverage.py. A real coverage.py, wherever it is on the path, always takes precedence
    over a namespace folder, so this never hides it.
    """
    if "coverage" in _sys.modules:
        return
    try:
        spec = _util.find_spec("coverage")
    except (ImportError, ValueError):
        return
    if spec is None or spec.origin is not None:  # absent, or a real module or package
        return
    # a covergrid source root: a folder named coverage holding covergrid/ (this checkout, or
    # another one when covergrid is installed elsewhere)
    locations = list(spec.submodule_search_locations or [])
    if locations and all(_os.path.isfile(_os.path.join(p, "covergrid", "__init__.py"))
                         for p in locations):
        _sys.modules["coverage"] = None  # type: ignore[assignment]


_guard_source_root_name()

_LAZY = {
    "Study": "covergrid.study.models",
    "load_study": "covergrid.study.loading",
    "ResolvedStudy": "covergrid.study.build",
    "resolve": "covergrid.study.build",
    "estimate": "covergrid.pipeline.resources",
    "run": "covergrid.pipeline.run",
    "compute_coverage": "covergrid.compute.engine",
    "GridSpec": "covergrid.compute.grid",
    "Sensor": "covergrid.compute.sensor",
    "walker_delta": "covergrid.orbits.walker",
}


def __getattr__(name: str) -> Any:
    """Import the public names on first use (PEP 562)."""
    module = _LAZY.get(name)
    if module is None:
        raise AttributeError(f"module 'covergrid' has no attribute {name!r}")
    import importlib

    value = getattr(importlib.import_module(module), name)
    globals()[name] = value
    return value


def __dir__() -> list[str]:
    return sorted(set(globals()) | set(__all__))
