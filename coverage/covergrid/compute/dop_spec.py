"""What a study asks of the dilution-of-precision computation (kept free of numba, so that
resolving and checking a study stays light; the computation is :mod:`covergrid.compute.dop`).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from covergrid.errors import CovergridError

__all__ = ["HIST_MANTISSA_BITS", "MAX_PDOP_THRESHOLD", "N_BINS", "DopSpec",
           "dop_state_bytes_per_cell"]

#: Largest PDOP threshold a study may state (beyond it a "fix" is meaningless) [unitless].
MAX_PDOP_THRESHOLD = 1000.0


@dataclass(frozen=True)
class DopSpec:
    """The ``dop:`` section of a study, as the computation takes it.

    Attributes
    ----------
    pdop_threshold : float
        ``pdop_fraction`` counts the time with at least four satellites in view and PDOP at
        or below it [unitless], in (0, 1000].
    """

    pdop_threshold: float = 6.0

    def __post_init__(self) -> None:
        t = self.pdop_threshold
        if not (math.isfinite(t) and 0.0 < t <= MAX_PDOP_THRESHOLD):
            raise CovergridError(f"{t!r} is not allowed; use (0, {MAX_PDOP_THRESHOLD:g}]",
                                 "dop.pdop_threshold")


# --- the layout of the per-cell DOP state (allocated by covergrid.compute.dop) ----------
#: Mantissa bits of DOP^2 kept by the histogram: 2**5 = 32 bins per octave of DOP^2.
HIST_MANTISSA_BITS = 5
HIST_SHIFT = 52 - HIST_MANTISSA_BITS
#: DOP^2 of the first and past the last regular bin (DOP 0.5 and 64).
HIST_DOP2_LOW = 0.25
HIST_DOP2_HIGH = 4096.0


def _top_bits(x: float) -> int:
    """The float64 exponent and leading mantissa bits of a positive number."""
    return int(np.array([x]).view(np.int64)[0]) >> HIST_SHIFT


HIST_BASE = _top_bits(HIST_DOP2_LOW)
#: Bins: one below DOP 0.5, 32 per octave of DOP^2 up to DOP 64, one from DOP 64 (and inf).
N_BINS = _top_bits(HIST_DOP2_HIGH) - HIST_BASE + 2
#: Per-cell statistics of the DOP state: the largest DOP^2 of each kind (5), the sums of DOP
#: (5), the samples with a fix, with PDOP at or below the threshold, without a fix.
N_STATS = 13


def dop_state_bytes_per_cell() -> int:
    """Bytes of DOP state per cell of a band, as :func:`covergrid.compute.dop.new_dop_state`
    allocates them (13 float64 statistics, a uint32 histogram per kind)."""
    return 8 * N_STATS + 4 * 5 * N_BINS
