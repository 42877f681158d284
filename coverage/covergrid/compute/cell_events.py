"""Per-cell streaming state changes and the sample's event queue (numba helpers).

Part of the coverage kernel (:mod:`covergrid.compute.kernel`; the state layout is in
:mod:`covergrid.compute.kernel_state`). A change of a cell's in-view count is an *event*
(cell, time, +1 or -1). Events are queued while a sample is processed and applied at its
end, each cell's in time order, arrivals before departures at equal times: so a hand-over
between two satellites inside a step opens a gap exactly when the first leaves before the
second arrives, and never at one instant. Applying an event closes the level held since the
cell's last change (level histogram, time integral of the count, least and greatest count)
and opens or closes a gap.
"""

from __future__ import annotations

from covergrid.compute.jit import kernel_function, kernel_helper
from covergrid.compute.kernel_state import (
    DAY,
    DAY_EVENT,
    GAP_COUNT,
    GAP_START,
    HIST0,
    MAX_GAP,
    MAX_N,
    MIN_N,
    N_CUR,
    N_GEO,
    PASS_COUNT,
    SCRATCH_EVENTS,
    SUM_GAP,
    SUM_GAP2,
    SUM_N,
    T_LAST,
)

__all__ = ["apply_event", "apply_events", "close_cells", "push_event"]

@kernel_helper
def _close_level(a, c, t, kmax):
    """Record the level cell c has held since its last change, up to time t [samples]."""
    dur = t - a[c, T_LAST]
    if dur > 0.0:
        n_old = a[c, N_CUR]
        k = int(n_old)
        k = 0 if k < 0 else (kmax if k > kmax else k)
        a[c, HIST0 + k] += dur
        a[c, SUM_N] += n_old * dur
        if n_old < a[c, MIN_N]:
            a[c, MIN_N] = n_old
        if n_old > a[c, MAX_N]:
            a[c, MAX_N] = n_old
        a[c, T_LAST] = t


@kernel_helper
def _record_gap(a, c, t_end):
    """Count the gap of cell c from its start to t_end (if it has a length)."""
    g = t_end - a[c, GAP_START]
    if g > 0.0:
        a[c, GAP_COUNT] += 1.0
        a[c, SUM_GAP] += g
        a[c, SUM_GAP2] += g * g
        if g > a[c, MAX_GAP]:
            a[c, MAX_GAP] = g


@kernel_helper
def apply_event(a, c, t, delta, kmax):
    """Change the in-view count of cell c by delta (+1 a pass starts, -1 one ends) at t; or
    open (+DAY_EVENT, sunrise) or close (-DAY_EVENT, sunset) its daylight gate
    (:mod:`covergrid.compute.daylight`): at night the satellites in view count as none."""
    if delta == DAY_EVENT or delta == -DAY_EVENT:
        _daylight(a, c, t, delta > 0.0, kmax)
        return
    a[c, N_GEO] += delta
    if a[c, DAY] == 0.0:
        return
    _close_level(a, c, t, kmax)
    n_old = a[c, N_CUR]
    a[c, N_CUR] = n_old + delta
    if delta > 0.0:
        a[c, PASS_COUNT] += 1.0
        if n_old == 0.0:
            _record_gap(a, c, t)
    elif n_old == 1.0:
        a[c, GAP_START] = t


@kernel_helper
def _daylight(a, c, t, day, kmax):
    """Open or close cell c's daylight gate at t: at sunrise the satellites in view start
    passes (ending a gap if any is in view), at sunset theirs end (starting one)."""
    if (a[c, DAY] != 0.0) == day:
        return
    _close_level(a, c, t, kmax)
    a[c, DAY] = 1.0 if day else 0.0
    n_geo = a[c, N_GEO]
    if day:
        a[c, N_CUR] = n_geo
        if n_geo > 0.0:
            a[c, PASS_COUNT] += n_geo
            _record_gap(a, c, t)
    else:
        if a[c, N_CUR] > 0.0:
            a[c, GAP_START] = t
        a[c, N_CUR] = 0.0


@kernel_helper
def push_event(heads, ev, c, t, delta):
    """Queue the event (cell c, time t, change delta) on the cell's list.

    ``ev`` rows are (cell, time, change, next); ``heads[c]`` is the 1-based row of the cell's
    latest event (0: none). The last row of ``ev`` holds the count, and in column 1 the
    events that did not fit: they are counted, never dropped silently (the engine then
    recomputes the band with a longer queue). The rows before it are sorting scratch.
    """
    last = ev.shape[0] - 1
    q = int(ev[last, 0])
    if q < last - SCRATCH_EVENTS:
        ev[q, 0] = c
        ev[q, 1] = t
        ev[q, 2] = delta
        ev[q, 3] = heads[c]
        heads[c] = q + 1
        ev[last, 0] = q + 1
    else:
        ev[last, 1] += 1.0


@kernel_helper
def _rank(d):
    """Order of events at one time: sunset, arrivals, departures, sunrise (so that a
    satellite that rises at sunset, or sets at sunrise, is never counted in daylight)."""
    if d == -DAY_EVENT:
        return 0.0
    if d == DAY_EVENT:
        return 3.0
    return 1.5 - 0.5 * d


@kernel_helper
def _before(t1, d1, t2, d2):
    """Event order: by time, and at equal times by :func:`_rank` (arrivals before
    departures)."""
    return t1 < t2 or (t1 == t2 and _rank(d1) < _rank(d2))


@kernel_function
def apply_events(a, heads, ev, kmax):
    """Apply the sample's queued events, each cell's in time order, and empty the queue."""
    last = ev.shape[0] - 1
    scratch = last - SCRATCH_EVENTS
    n_ev = int(ev[last, 0])
    # many events (a dense constellation): visit the cells in order, so that the per-cell
    # rows are read one after the other; few: visit the cells of the queued events. Each
    # cell is applied once either way, its events in time order: the same values.
    by_cell = 4 * n_ev > heads.shape[0]
    for q in range(heads.shape[0] if by_cell else n_ev):
        c = q if by_cell else int(ev[q, 0])
        head = int(heads[c])
        if head <= 0:
            continue  # applied already (0), or outside the grid's region (-1)
        heads[c] = 0.0
        e = head - 1
        nxt = int(ev[e, 3])
        if nxt == 0:
            apply_event(a, c, ev[e, 1], ev[e, 2], kmax)
            continue
        # gather the cell's events in the scratch rows by insertion, in order
        k = 0
        while e >= 0 and k < SCRATCH_EVENTS:
            t = ev[e, 1]
            d = ev[e, 2]
            m = k
            while m > 0 and _before(t, d, ev[scratch + m - 1, 1], ev[scratch + m - 1, 2]):
                ev[scratch + m, 1] = ev[scratch + m - 1, 1]
                ev[scratch + m, 2] = ev[scratch + m - 1, 2]
                m -= 1
            ev[scratch + m, 1] = t
            ev[scratch + m, 2] = d
            k += 1
            e = int(ev[e, 3]) - 1
        if e < 0:
            for m in range(k):
                apply_event(a, c, ev[scratch + m, 1], ev[scratch + m, 2], kmax)
            continue
        # more events than scratch rows: pick the earliest left each time (in place)
        while True:
            best = -1
            e = head - 1
            while e >= 0:
                if ev[e, 2] != 0.0 and (best < 0 or _before(ev[e, 1], ev[e, 2], ev[best, 1],
                                                            ev[best, 2])):
                    best = e
                e = int(ev[e, 3]) - 1
            if best < 0:
                break
            apply_event(a, c, ev[best, 1], ev[best, 2], kmax)
            ev[best, 2] = 0.0
    ev[last, 0] = 0.0


@kernel_function
def close_cells(t_end, acc, n_cells, kmax):
    """Close every cell's open level and open gap at the end of the span (time t_end)."""
    for c in range(n_cells):
        _close_level(acc, c, t_end, kmax)
        if acc[c, N_CUR] == 0.0:
            _record_gap(acc, c, t_end)
            acc[c, GAP_START] = t_end
