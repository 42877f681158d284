"""The streaming state of the coverage kernel: its layout, allocation and read-out.

All of a latitude band's state is one float64 array ``acc`` (one row per cell, then one
sample's queue of gap-boundary events) plus a few small integer arrays, allocated by
:func:`new_state`, advanced in place by :mod:`covergrid.compute.kernel` and read back by
:func:`accumulators`. This module needs only NumPy, so the memory estimate can size the
state without loading the compiler.
"""

from __future__ import annotations

import numpy as np

__all__ = ["HIST0", "QUEUE_SLACK", "accumulators", "new_state", "queue_overflow",
           "state_bytes_per_cell"]

#: Event-queue rows of a band besides ``queue_per_cell`` per cell.
QUEUE_SLACK = 1024

# Columns of the per-cell state: one row of float64 per cell, all fields together, so that
# touching a cell reads one or two cache lines, and one array only, because every array
# passed down the inlined helpers costs reference counting per call. Counts and sample
# indices are whole numbers held exactly in float64 (below 2**53). The R_ columns hold gap
# boundaries in (fractional) samples: gap start, sums of gap lengths and of their squares,
# the longest gap, and the end of a gap closing at the current sample.
(N_CUR, T_LAST, GAP_START, SUM_N, MIN_N, MAX_N, GAP_COUNT, PASS_COUNT, CLOSE_SAMPLE,
 EXIT_SAMPLE, R_GAP_START, R_SUM_GAP, R_SUM_GAP2, R_MAX_GAP, R_GAP_END) = range(15)
#: first column of the level histogram (samples spent at 0, 1, .., K-1 and >= K in view)
HIST0 = 15
_FIELDS = {"sum_n": SUM_N, "min_n": MIN_N, "max_n": MAX_N, "gap_count": GAP_COUNT,
           "sum_gap": R_SUM_GAP, "sum_gap2": R_SUM_GAP2, "max_gap": R_MAX_GAP,
           "pass_count": PASS_COUNT}


def new_state(n_cells: int, nfold_max: int, n_sat: int, n_rows: int,
              queue_per_cell: int = 2) -> dict[str, np.ndarray]:
    """Allocate the streaming state of one latitude band.

    Parameters
    ----------
    n_cells : int
        Cells in the band (rows x columns).
    nfold_max : int
        K, the highest in-view level kept separately; levels >= K share the last bin.
    n_sat : int
        Satellites.
    n_rows : int
        Latitude rows in the band.
    queue_per_cell : int
        Rows of gap-boundary event queue per cell (see below).

    Returns
    -------
    dict of ndarray
        ``acc``: rows 0 .. n_cells-1 are the per-cell state (columns ``N_CUR`` ...
        ``R_GAP_END`` of this module, then from ``HIST0`` the samples spent at each level);
        the rows after them are one sample's queue of gap-boundary events (cell, satellite,
        kind), whose count is in the last row (column 0) with the number of events that
        did not fit (column 1, see :func:`queue_overflow`). Also the previous interval of
        every satellite in every row, one sample's queued exits, per-satellite caches,
        ``visits``.

    Notes
    -----
    Per sample a cell has at most one closing arrival and two departure events; further
    arrivals in a closing step are rare, so ``queue_per_cell = 2`` (plus slack) is ample.
    An event that does not fit is counted, never silently lost: the engine then computes
    the band again with a longer queue (:func:`covergrid.compute.engine.band_task`).
    """
    cap = queue_per_cell * n_cells + QUEUE_SLACK
    acc = np.zeros((n_cells + cap + 1, HIST0 + nfold_max + 1))
    acc[:n_cells, MIN_N] = 2.0**40
    acc[:n_cells, CLOSE_SAMPLE] = -1.0
    acc[:n_cells, EXIT_SAMPLE] = -1.0
    return {
        "acc": acc,
        "n_cells": np.array([n_cells], np.int64),
        "prev_start": np.zeros((n_sat, n_rows), np.int32),
        "prev_len": np.zeros((n_sat, n_rows), np.int32),
        "prev_rows": np.zeros((n_sat, 2), np.int32),
        # queued exits of one sample: (row, prev start, prev length, new start, new length, sat)
        "exits": np.zeros((n_sat * n_rows, 6), np.int32),
        # per satellite: the radius the footprint bound was last computed for, and the bound
        "bound_cache": np.full((n_sat, 2), -1.0),
        # per satellite: Earth-fixed positions at the two previous samples (crossing times)
        "prev_pos": np.zeros((n_sat, 6)),
        "visits": np.zeros(1, np.int64),
    }


def queue_overflow(state: dict[str, np.ndarray]) -> int:
    """Gap-boundary events that did not fit in the event queue over the whole run."""
    return int(state["acc"][-1, 1])


def state_bytes_per_cell(nfold_max: int, queue_per_cell: int = 2) -> int:
    """Bytes of streaming state per cell of a band, as :func:`new_state` allocates them: one
    float64 row of ``HIST0 + K + 1`` values, plus the rows of event-queue capacity."""
    return (1 + queue_per_cell) * 8 * (HIST0 + nfold_max + 1)


def accumulators(state: dict[str, np.ndarray]) -> dict[str, np.ndarray]:
    """The closed-out accumulators by name, as :func:`covergrid.compute.metrics.finalise`
    takes them."""
    acc = state["acc"][: int(state["n_cells"][0])]
    out = {name: acc[:, col] for name, col in _FIELDS.items()}
    out["hist"] = acc[:, HIST0:]
    return out
