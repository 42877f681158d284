"""Peak memory of a coverage run does not grow with the span (the engine streams over time).

Each run is a fresh process (so its peak resident memory, ``ru_maxrss``, is its own) that
computes one study for 1 day and for 8 days with the synchronous scheduler (one band task at
a time, so the bound below does not depend on the machine's core count).

Bound. The kernel's per-cell state does not depend on the span, and neither do the results.
The only allocation that depends on the span is the satellite-position block a band task
streams through the kernel: (n_sat, block, 3) float64 with ``block`` capped so that the
buffer is at most ``engine._POSITION_BLOCK_BYTES`` (16 MiB), plus, while that buffer is
alive, one shorter array for the last, partial block (also at most 16 MiB). So the 8-day
peak may exceed the 1-day peak by at most two blocks, 32 MiB, plus allocator slack
(glibc keeps freed blocks of this size for reuse rather than returning them): 16 MiB.

Two studies, so that each way of growing with the span would break the bound several times
over:
- 600 satellites on a 10 deg grid: the block cap (1,165 samples) is reached within the
  first day; keeping every position of the 8 days instead would add
  (11,520 - 1,440) x 600 x 24 B = 145 MB.
- 24 satellites on a 1 deg grid (64,800 cells): keeping one byte per cell and sample
  would add 64,800 x 10,080 B = 653 MB.
"""

from __future__ import annotations

import subprocess
import sys

import pytest

from covergrid.compute.span import POSITION_BLOCK_BYTES

MIB = 2**20
#: Growth allowed from 1 to 8 days [bytes]: two position blocks and allocator slack
#: (module docstring).
ALLOWED_GROWTH_BYTES = 2 * POSITION_BLOCK_BYTES + 16 * MIB

_RUN = """\
import math, resource, sys
from covergrid.compute.engine import compute_coverage
from covergrid.compute.grid import GridSpec
from covergrid.compute.sensor import Sensor
from covergrid.orbits.walker import walker_delta
n_sat, planes, res_deg, min_el_deg, days = (int(sys.argv[1]), int(sys.argv[2]),
                                            float(sys.argv[3]), float(sys.argv[4]),
                                            float(sys.argv[5]))
el = walker_delta(n_sat, planes, 1, a_km=6378.137 + 1000.0, i_rad=math.radians(53.0))
ds = compute_coverage(el, "2027-01-01T00:00:00Z", days * 86400.0, 60.0, GridSpec(res_deg),
                      Sensor(min_el_deg), scheduler="synchronous")
assert ds.attrs["covergrid_n_steps"] == round(days * 1440)
print(resource.getrusage(resource.RUSAGE_SELF).ru_maxrss * 1024)  # Linux: KiB
"""

STUDIES = {
    # name: (satellites, planes, grid resolution [deg], minimum elevation [deg])
    "600 satellites, 10 deg grid": (600, 20, 10.0, 30.0),
    "24 satellites, 1 deg grid": (24, 4, 1.0, 10.0),
}


@pytest.mark.slow  # four fresh processes, two at a time on two cores: about 15 s
@pytest.mark.skipif(not sys.platform.startswith("linux"), reason="ru_maxrss in KiB is Linux")
def test_peak_memory_does_not_grow_with_the_span():
    # Start every run at once (each is single-threaded); each process's peak is its own.
    procs = {
        (name, days): subprocess.Popen(
            [sys.executable, "-c", _RUN, *(str(x) for x in study), str(days)],
            stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
        for name, study in STUDIES.items() for days in (1, 8)
    }
    peaks = {}
    for key, proc in procs.items():
        out, err = proc.communicate(timeout=300)
        assert proc.returncode == 0, err
        peaks[key] = int(out.strip().splitlines()[-1])
    for name in STUDIES:
        growth = peaks[name, 8] - peaks[name, 1]
        assert growth < ALLOWED_GROWTH_BYTES, (
            f"{name}: peak {peaks[name, 1] / MIB:.0f} MiB for 1 day, "
            f"{peaks[name, 8] / MIB:.0f} MiB for 8 days")
