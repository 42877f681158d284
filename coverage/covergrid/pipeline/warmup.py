"""Warm numba's on-disk cache, so that no run waits for the compiler.

The coverage kernel and the propagator are compiled by numba with ``cache=True``: the machine
code is kept beside each module (``__pycache__/*.nbi``, ``*.nbc``; or numba's user cache
folder when the package folder is read-only) and reloaded by later processes in a fraction of
a second. The first process after an install, or after a compiled module changed, compiles
instead, for about 15-30 s. ``make venv`` runs this module once after installing, so that
process is not an analyst's first run::

    python -m covergrid.pipeline.warmup

:func:`warm_compiled_code` runs a tiny study through the same calls a run makes (the coverage
of a Walker pattern with each kind of sensor limit, and a ground track), so the cache holds
the same argument types a real run asks for, and reports for each compiled function whether
it came from the cache or was compiled now.
"""

from __future__ import annotations

import math
import sys
import time
from typing import Any

__all__ = ["compiled_functions", "warm_compiled_code"]

# The tiny study: a few satellites, a coarse grid, an hour (compiling, not computing, costs).
_EPOCH = "2031-03-20T00:00:00Z"


def compiled_functions() -> dict[str, Any]:
    """The numba dispatchers of the compiled modules, by dotted name."""
    from covergrid.compute import daylight, dop, kernel
    from covergrid.orbits import j2_backends

    found = {}
    for module in (kernel, daylight, dop, j2_backends):
        for name, obj in vars(module).items():
            if hasattr(obj, "stats") and hasattr(obj, "signatures"):
                found[f"{module.__name__}.{name}"] = obj
    return found


def warm_compiled_code() -> dict[str, Any]:
    """Run a tiny study so that every compiled function is in numba's on-disk cache.

    Returns
    -------
    dict
        ``seconds`` (wall time), ``compiled`` (functions compiled now, their machine code
        written to the cache) and ``loaded`` (functions found in the cache), each a sorted
        list of dotted names of the functions the tiny study called.
    """
    import numpy as np

    from covergrid.compute.dop_spec import DopSpec
    from covergrid.compute.engine import compute_coverage
    from covergrid.compute.grid import GridSpec
    from covergrid.compute.sensor import Sensor
    from covergrid.earth.time import gmst_rad
    from covergrid.orbits.j2 import propagate_to_ecef
    from covergrid.orbits.walker import walker_delta

    start = time.perf_counter()
    elements = walker_delta(4, 2, 1, a_km=6378.137 + 1000.0, i_rad=math.radians(60.0))
    for sensor in (Sensor(10.0), Sensor(0.0, max_off_nadir_deg=40.0, max_range_km=3000.0)):
        compute_coverage(elements, _EPOCH, 3600.0, 60.0, GridSpec(30.0), sensor,
                         scheduler="synchronous")
    # the daylight constraint and the dilutions of precision (navigation, imaging studies)
    compute_coverage(elements, _EPOCH, 3600.0, 60.0, GridSpec(30.0),
                     Sensor(0.0, max_off_nadir_deg=40.0, min_sun_elevation_deg=10.0),
                     scheduler="synchronous")
    compute_coverage(elements, _EPOCH, 3600.0, 60.0, GridSpec(30.0), Sensor(5.0),
                     scheduler="synchronous", dop=DopSpec())
    propagate_to_ecef(elements, np.linspace(0.0, 3600.0, 11), float(gmst_rad(_EPOCH, 0.0)))
    compiled, loaded = [], []
    for name, dispatcher in compiled_functions().items():
        if sum(dispatcher.stats.cache_hits.values()):
            loaded.append(name)
        elif sum(dispatcher.stats.cache_misses.values()):
            compiled.append(name)
    return {"seconds": time.perf_counter() - start, "compiled": sorted(compiled),
            "loaded": sorted(loaded)}


def main() -> int:
    """Warm the cache and say what was done (one line on stdout)."""
    result = warm_compiled_code()
    what = (f"compiled {len(result['compiled'])} function(s) into numba's cache"
            if result["compiled"] else "numba's cache was already warm")
    print(f"covergrid: {what} ({len(result['loaded'])} loaded from it) in "
          f"{result['seconds']:.1f} s")
    return 0


if __name__ == "__main__":
    sys.exit(main())
