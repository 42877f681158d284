"""covergrid: satellite-constellation coverage analysis.

The public API is small and imported lazily (importing ``covergrid`` loads no numerical
libraries):

- :func:`load_study` - read and validate a study file;
- :func:`run` - compute a study's coverage Dataset (and write its outputs);
- :func:`estimate` - what a run would compute and cost, without computing;
- :class:`Study` - the validated study model.
"""

from __future__ import annotations

from typing import Any

__version__ = "0.1.0"

__all__ = ["__version__", "Study", "estimate", "load_study", "run"]

_LAZY = {
    "Study": "covergrid.config",
    "load_study": "covergrid.config",
    "estimate": "covergrid.pipeline",
    "run": "covergrid.pipeline",
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
