"""The streaming state of the coverage kernel: its layout, allocation and read-out.

A latitude band's state is one float64 array ``acc`` (one row per cell), one sample's queue
of visibility changes (``events``) and a few per-satellite arrays, allocated by
:func:`new_state`, advanced in place by :mod:`covergrid.compute.kernel` and read back by
:func:`accumulators`. This module needs only NumPy, so the memory estimate can size the
state without loading the compiler.
"""

from __future__ import annotations

import numpy as np

__all__ = ["HIST0", "QUEUE_SLACK", "accumulators", "new_state", "queue_overflow",
           "state_bytes_per_cell", "state_bytes_per_satellite_row"]

#: Event-queue rows of a band besides ``queue_per_cell`` per cell.
QUEUE_SLACK = 1024
#: Event-queue rows per cell of the first attempt (the engine retries with four times more
#: when one sample's events do not fit).
QUEUE_PER_CELL = 4

# Columns of the per-cell state: one row of float64 per cell, all fields together, so that
# touching a cell reads one or two cache lines, and one array only, because every array
# passed down the inlined helpers costs reference counting per call. Counts are whole
# numbers held exactly in float64 (below 2**53); times are in (fractional) samples:
# in-view count now, time of its last change, start of the current gap, time integral of
# the count, least and greatest count held for a positive time, gaps, passes, sum of gap
# lengths and of their squares, and the longest gap; then the daylight gate
# (covergrid.compute.daylight): satellites in view whatever the daylight (N_CUR is this
# count in daylight, 0 at night), the gate (1 in daylight or without the constraint), and
# the gate as of the last queued sunrise or sunset.
(N_CUR, T_LAST, GAP_START, SUM_N, MIN_N, MAX_N, GAP_COUNT, PASS_COUNT, SUM_GAP, SUM_GAP2,
 MAX_GAP, N_GEO, DAY, DAY_QUEUED) = range(14)
#: first column of the level histogram (time spent at 0, 1, .., K-1 and >= K in view)
HIST0 = 14
#: The change of an event that is a sunrise (+) or a sunset (-), not a satellite's rise or set.
DAY_EVENT = 2.0
_FIELDS = {"sum_n": SUM_N, "min_n": MIN_N, "max_n": MAX_N, "gap_count": GAP_COUNT,
           "sum_gap": SUM_GAP, "sum_gap2": SUM_GAP2, "max_gap": MAX_GAP,
           "pass_count": PASS_COUNT}
#: Rows of the event queue kept for sorting one cell's events of a sample (a cell with more,
#: a dozen satellites crossing it within one step, is sorted in place, more slowly).
SCRATCH_EVENTS = 64
#: Columns of an event: cell, time [samples], change of the in-view count (+1, -1; 0 once
#: applied), 1-based index of the cell's next event (0 = last).
EVENT_COLUMNS = 4
#: Per satellite and row, the previous sample's: interval start and length (columns), and
#: each limit's threshold X* [km] and rate [km/s] (covergrid.compute.footprint.row_thresholds).
ROW_COLUMNS = 8


def new_state(n_cells: int, nfold_max: int, n_sat: int, n_rows: int,
              queue_per_cell: int = QUEUE_PER_CELL) -> dict[str, np.ndarray]:
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
        Rows of the event queue per cell (see below).

    Returns
    -------
    dict of ndarray
        ``acc`` (n_cells, HIST0 + K + 1): the per-cell state (columns ``N_CUR`` ...
        ``MAX_GAP`` of this module, then from ``HIST0`` the time spent at each level).
        ``heads`` (n_cells,): each cell's first event in the queue (1-based, 0 = none; a
        small array of its own, so that queueing an event touches no per-cell row).
        ``events``: one sample's queue of visibility changes (cell, time, change, next),
        applied cell by cell in time order at the end of the sample; then ``SCRATCH_EVENTS``
        rows for sorting, and a last row holding the count (column 0) and the number of
        events that did not fit (column 1, see :func:`queue_overflow`).
        ``rows_prev`` (n_sat, n_rows, ROW_COLUMNS): the previous sample's interval and
        threshold of every satellite in every row; ``prev_rows`` the
        rows where they are valid; ``prev_pos`` the previous sample's position and
        velocity; ``bound_cache`` per-satellite footprint bounds; ``visits``.

    Notes
    -----
    An event that does not fit is counted, never silently lost: the engine then computes
    the band again with a longer queue (:func:`covergrid.compute.engine.band_task`).
    """
    cap = queue_per_cell * n_cells + QUEUE_SLACK
    acc = np.zeros((n_cells, HIST0 + nfold_max + 1))
    acc[:, MIN_N] = 2.0**40
    acc[:, DAY] = 1.0
    acc[:, DAY_QUEUED] = 1.0
    return {
        "acc": acc,
        "heads": np.zeros(n_cells),
        "events": np.zeros((cap + SCRATCH_EVENTS + 1, EVENT_COLUMNS)),
        "n_cells": np.array([n_cells], np.int64),
        "rows_prev": np.zeros((n_sat, n_rows, ROW_COLUMNS)),
        # per satellite: the rows of the previous sample's intervals, and its column
        "prev_rows": np.zeros((n_sat, 3), np.int64),
        # per satellite: the radius the footprint bound was last computed for, the bound,
        # and the previous sample's bound
        "bound_cache": np.full((n_sat, 3), -1.0),
        # per satellite: Earth-fixed position [km] and velocity [km/s] at the previous sample
        "prev_pos": np.zeros((n_sat, 6)),
        # the Sun's Earth-fixed position at the previous sample [km] (daylight constraint)
        "prev_sun": np.zeros(3),
        "visits": np.zeros(1, np.int64),
    }


def queue_overflow(state: dict[str, np.ndarray]) -> int:
    """Events that did not fit in the event queue over the whole run."""
    return int(state["events"][-1, 1])


def state_bytes_per_cell(nfold_max: int, queue_per_cell: int = QUEUE_PER_CELL) -> int:
    """Bytes of streaming state per cell of a band, as :func:`new_state` allocates them: one
    float64 row of ``HIST0 + K + 1`` values, its queue head, and the event-queue capacity."""
    return 8 * (HIST0 + nfold_max + 2) + 8 * EVENT_COLUMNS * queue_per_cell


def state_bytes_per_satellite_row() -> int:
    """Bytes of streaming state per satellite and latitude row of a band (``rows_prev``)."""
    return 8 * ROW_COLUMNS


def accumulators(state: dict[str, np.ndarray]) -> dict[str, np.ndarray]:
    """The closed-out accumulators by name, as :func:`covergrid.compute.metrics.finalise`
    takes them."""
    acc = state["acc"][: int(state["n_cells"][0])]
    out = {name: acc[:, col] for name, col in _FIELDS.items()}
    out["hist"] = acc[:, HIST0:]
    return out
