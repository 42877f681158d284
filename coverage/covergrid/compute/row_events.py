"""The events of one satellite in one latitude row over one step (numba helpers).

Part of the coverage kernel (:mod:`covergrid.compute.kernel`). A row's visible cells at a
sample form one interval (start, length) of columns; between two samples the kernel queues
an event for every cell whose state changes: at the sample (sample and hold), or at the
time the limit is crossed (continuous time).

In continuous time a cell's margin is ``m(t) = x(t) cos(lon) + y(t) sin(lon) - X*(t)``
[km] (:mod:`covergrid.compute.footprint`), interpolated over the step by the cubic Hermite
through its values and rates at the two samples; its zeros are the crossings
(:func:`covergrid.compute.crossings.hermite_crossings`). Which cells to solve:

* the cells whose sampled state differs (they cross once, or three times);
* where the interval moves by more than its width within the step, the cells between its
  two positions (entered by one edge and left by the other);
* where a row's interval edge turns round within the step (its rate changes sign: at the
  lateral edges of the swath, at the footprint's latitude extremes, where the track turns),
  the cells within the edge's sweep, bounded by the cubic Hermite of the edge
  ``lon_sat +- acos(X*/rho_sat)`` (widened by a fifth and 1e-4 rad): passes that begin and
  end between the samples, and brief losses inside one;
* where the row is reached, left or filled only within the step, every cell within a
  conservative bound of the interval over the step (the satellite's longitude range and the
  half-width's range from the Hermite interpolants of both).

Columns are counted round the whole circle (``n_lon``, from the grid's western edge
``lon0``), but only the first ``n_win`` are cells (a grid with longitude limits): every range
of columns is cut to them before its cells are visited, so columns outside the window cost
nothing. A cell outside the grid's region has its queue head ``heads[c]`` set to -1 and is
skipped (one read, only when the band has such cells: ``masked``); it is never solved or
queued.

The cell helpers inlined here (:mod:`covergrid.compute.cell_events`) read the per-cell state
by the column constants of :mod:`covergrid.compute.kernel_state`; numba's on-disk cache does
not notice a change there, so `make` empties the cache whenever a compiled source changes.
"""

from __future__ import annotations

import math

from covergrid.compute.cell_events import apply_event, push_event
from covergrid.compute.crossings import cubic_range, hermite_crossings
from covergrid.compute.footprint import NO_LIMIT_KM, wrap_column
from covergrid.compute.jit import kernel_function, kernel_helper
from covergrid.compute.kernel_state import SCRATCH_EVENTS

__all__ = ["changed_cells", "timed_row"]

#: Widening of the longitude bounds of a row's edges over a step [rad] (about 0.6 km), far
#: beyond the interpolation error of the threshold and of the satellite's track.
_EDGE_PAD_RAD = 1e-4
#: Relative widening of an edge's Hermite range (a fifth of its width).
_EDGE_PAD_SHARE = 0.2
#: Intervals at two samples closer than this (in the cosine of their separation, about
#: 1e-4 rad) count as disjoint: the cells between them are solved.
_DISJOINT_PAD = 1e-4


@kernel_helper
def _solve_cell(heads, ev, c, cl, sl, geo, dt, t0, in0, in1):
    """Queue the limit crossings of one cell within the step from t0.

    ``geo`` = previous and current satellite x, y [km] and vx, vy [km/s], and the row's
    threshold X* [km] and its rate [km/s] at both samples; (cl, sl) = cos, sin of the cell's
    longitude; in0/in1 its exact visibility at the two samples; dt the step [s].
    """
    px, py, pvx, pvy, x, y, vx, vy, x0, r0, x1, r1 = geo
    n, t1, t2, t3 = hermite_crossings(cl * px + sl * py - x0,
                                      dt * (cl * pvx + sl * pvy - r0),
                                      cl * x + sl * y - x1,
                                      dt * (cl * vx + sl * vy - r1), in0, in1)
    state = in0
    for k in range(n):
        tau = t1 if k == 0 else (t2 if k == 1 else t3)
        push_event(heads, ev, c, t0 + tau, -1.0 if state else 1.0)
        state = not state


@kernel_helper
def _limit_margin(k, lims, p0, q0, p1, q1, dt):
    """Values and tau-rates at both samples of a cell's margin to limit k (see
    :func:`_solve_cell_limits`), and whether the limit is present at both."""
    lim0, lim1 = lims
    x0 = lim0[2 * k]
    x1 = lim1[2 * k]
    return (p0 - x0, q0 - dt * lim0[2 * k + 1], p1 - x1, q1 - dt * lim1[2 * k + 1],
            x0 > NO_LIMIT_KM and x1 > NO_LIMIT_KM)


@kernel_helper
def _hermite(p0, d0, p1, d1, t):
    """The Hermite cubic through (0, p0, d0) and (1, p1, d1) at t."""
    a3 = 2.0 * (p0 - p1) + d0 + d1
    a2 = 3.0 * (p1 - p0) - 2.0 * d0 - d1
    return ((a3 * t + a2) * t + d0) * t + p0


@kernel_function
def _solve_cell_limits(heads, ev, c, cl, sl, geo, lims, dt, t0, in0, in1):
    """Queue the crossings of one cell within the step where the binding limit changes:
    the cell is visible while every limit's margin (each its own Hermite cubic) is >= 0.
    The limits' crossings, sorted, are the candidate times; the state between consecutive
    ones is tested at their midpoint. ``lims`` = every limit's threshold and rate at the
    two samples (:func:`covergrid.compute.footprint.row_thresholds`). The sorting uses the
    queue's scratch rows (free until the sample's events are applied)."""
    px, py, pvx, pvy, x, y, vx, vy = geo[0], geo[1], geo[2], geo[3], geo[4], geo[5], geo[6], geo[7]
    p0 = cl * px + sl * py
    q0 = dt * (cl * pvx + sl * pvy)
    p1 = cl * x + sl * y
    q1 = dt * (cl * vx + sl * vy)
    last = ev.shape[0] - 1
    sb = last - SCRATCH_EVENTS
    nr = 0
    for k in range(3):
        g0, d0, g1, d1, present = _limit_margin(k, lims, p0, q0, p1, q1, dt)
        if not present:
            continue
        n, t1, t2, t3 = hermite_crossings(g0, d0, g1, d1, g0 >= 0.0, g1 >= 0.0)
        for m in range(n):
            t = t1 if m == 0 else (t2 if m == 1 else t3)
            j = nr
            while j > 0 and ev[sb + j - 1, 1] > t:  # insertion, ascending
                ev[sb + j, 1] = ev[sb + j - 1, 1]
                j -= 1
            ev[sb + j, 1] = t
            nr += 1
    state = in0
    for m in range(nr):
        t = ev[sb + m, 1]
        nxt = ev[sb + m + 1, 1] if m + 1 < nr else 1.0
        mid = 0.5 * (t + nxt)
        inside = True
        for k in range(3):
            g0, d0, g1, d1, present = _limit_margin(k, lims, p0, q0, p1, q1, dt)
            if present and _hermite(g0, d0, g1, d1, mid) < 0.0:
                inside = False
        if inside != state:
            push_event(heads, ev, c, t0 + t, 1.0 if inside else -1.0)
            state = inside
    if state != in1:  # the exact test at the sample decides (a crossing within rounding)
        push_event(heads, ev, c, t0 + 1.0, 1.0 if in1 else -1.0)


@kernel_helper
def _difference_ranges(sa, la, sb, lb, n_lon):
    """Columns of interval A (start, length) not in interval B, as up to two unwrapped
    ranges [lo0, hi0), [lo1, hi1); ``per_cell`` when long arcs need a test per column."""
    if la == 0:
        return False, 0, 0, 0, 0
    if lb > 0 and la + lb >= n_lon:
        return True, sa, sa + la, 0, 0  # long arcs may overlap in two pieces (polar rows)
    a1 = sa + la
    if lb == 0:
        return False, sa, a1, 0, 0
    # two arcs shorter than the circle together overlap in at most one piece; unwrap B to
    # the copy whose centre is nearest A's centre, then A \ B = [a0, b0) U [b1, a1)
    k = int(math.floor(((2 * sb + lb) - (2 * sa + la)) / (2.0 * n_lon) + 0.5))
    b0 = sb - k * n_lon
    return False, sa, min(a1, b0), max(b0 + lb, sa), a1


@kernel_function
def changed_cells(a, heads, ev, base, cs, cl, ps, pl, n_lon, n_win, masked, cos_lon, sin_lon, geo,
                  dt, t, timed, kmax):
    """Events of the cells of a row whose state differs between the previous interval
    (ps, pl) and the new one (cs, cl) (``base``: the row's first cell): at the sample t, or
    with ``timed`` at their crossing times in the step from t. Arrivals at a sample are
    applied at once: they come first among the sample's events of a cell."""
    for side in range(2):
        if side == 0:
            sa, la, sb, lb, delta = cs, cl, ps, pl, 1.0
        else:
            sa, la, sb, lb, delta = ps, pl, cs, cl, -1.0
        per_cell, lo0, hi0, lo1, hi1 = _difference_ranges(sa, la, sb, lb, n_lon)
        for part in range(4):
            # each range (lo, hi within [0, 2 n_lon)) cut to the window's columns: its
            # copies [0, n_win) and [n_lon, n_lon + n_win); nothing is done outside them
            lo = lo0 if part < 2 else lo1
            hi = hi0 if part < 2 else hi1
            off = 0 if part % 2 == 0 else n_lon
            for jj in range(max(lo, off), min(hi, off + n_win)):
                j = jj - off
                if per_cell and wrap_column(j - sb, n_lon) < lb:
                    continue
                if masked and heads[base + j] < 0.0:
                    continue  # outside the region (see the module notes)
                if timed:
                    _solve_cell(heads, ev, base + j, cos_lon[j], sin_lon[j], geo, dt, t,
                                delta < 0.0, delta > 0.0)
                elif delta > 0.0:
                    apply_event(a, base + j, t, delta, kmax)
                else:
                    push_event(heads, ev, base + j, t, delta)


@kernel_helper
def _sweep_range(heads, ev, base, ps, pl, cs, cl, n_lon, n_win, masked, lon0, dlon, cos_lon,
                 sin_lon, geo, dt, t0, lo, hi, skip_changed, lims, kinked):
    """Solve the cells of a row whose centre longitude lies in [lo, hi] (unwrapped; the
    whole row when that spans the circle), except, with ``skip_changed``, those whose
    sampled state differs (solved already); with ``kinked`` limit by limit."""
    if hi - lo >= 2.0 * math.pi - dlon:
        j0 = 0
        j1 = n_lon
    else:
        j0 = int(math.ceil((lo - lon0) / dlon - 0.5))
        j1 = int(math.floor((hi - lon0) / dlon - 0.5)) + 1
    # the columns j0 .. j1 - 1 round the circle, from js in [0, n_lon), cut to the window's
    # columns [0, n_win) and their copy [n_lon, n_lon + n_win)
    js = j0 % n_lon
    je = js + min(j1 - j0, n_lon)
    for part in range(2):
        off = 0 if part == 0 else n_lon
        for jj in range(max(js, off), min(je, off + n_win)):
            j = jj - off
            if masked and heads[base + j] < 0.0:
                continue  # outside the region
            in0 = pl > 0 and wrap_column(j - ps, n_lon) < pl
            in1 = cl > 0 and wrap_column(j - cs, n_lon) < cl
            if skip_changed and in0 != in1:
                continue
            if kinked:
                _solve_cell_limits(heads, ev, base + j, cos_lon[j], sin_lon[j], geo, lims, dt,
                                   t0, in0, in1)
            else:
                _solve_cell(heads, ev, base + j, cos_lon[j], sin_lon[j], geo, dt, t0, in0,
                            in1)


@kernel_function
def _sweep_union(heads, ev, base, ps, pl, cs, cl, n_lon, n_win, masked, lon0, dlon, cos_lon,
                 sin_lon, geo, dt, t0, ranges, skip_changed, lims, kinked):
    """Solve the cells of a row within the union of up to four longitude ranges ((lo, hi);
    lo > hi: unused), each cell once. Not inlined: rare and long."""
    (l0, h0), (l1, h1), (l2, h2), (l3, h3) = ranges
    # sort the four ranges by their start (a sorting network of five exchanges)
    if l1 < l0:
        l0, h0, l1, h1 = l1, h1, l0, h0
    if l3 < l2:
        l2, h2, l3, h3 = l3, h3, l2, h2
    if l2 < l0:
        l0, h0, l2, h2 = l2, h2, l0, h0
    if l3 < l1:
        l1, h1, l3, h3 = l3, h3, l1, h1
    if l2 < l1:
        l1, h1, l2, h2 = l2, h2, l1, h1
    first = -1.0
    cur_lo = 0.0
    cur_hi = -1.0
    span_lo = 1e300
    span_hi = -1e300
    for k in range(4):
        lo, hi = (l0, h0) if k == 0 else ((l1, h1) if k == 1 else ((l2, h2) if k == 2
                                                                   else (l3, h3)))
        if lo <= hi:
            span_lo = min(span_lo, lo)
            span_hi = max(span_hi, hi)
    if span_hi - span_lo >= 2.0 * math.pi - dlon:
        _sweep_range(heads, ev, base, ps, pl, cs, cl, n_lon, n_win, masked, lon0, dlon, cos_lon,
                     sin_lon, geo, dt, t0, 0.0, 2.0 * math.pi, skip_changed, lims, kinked)
        return
    for k in range(4):
        lo, hi = (l0, h0) if k == 0 else ((l1, h1) if k == 1 else ((l2, h2) if k == 2
                                                                   else (l3, h3)))
        if lo > hi:
            continue
        if first > 0.0 and lo <= cur_hi + dlon:
            cur_hi = max(cur_hi, hi)
            continue
        if first > 0.0:
            _sweep_range(heads, ev, base, ps, pl, cs, cl, n_lon, n_win, masked, lon0, dlon, cos_lon,
                         sin_lon, geo, dt, t0, cur_lo, cur_hi, skip_changed, lims, kinked)
        first = 1.0
        cur_lo = lo
        cur_hi = hi
    if first > 0.0:
        _sweep_range(heads, ev, base, ps, pl, cs, cl, n_lon, n_win, masked, lon0, dlon, cos_lon,
                     sin_lon, geo, dt, t0, cur_lo, cur_hi, skip_changed, lims, kinked)


@kernel_helper
def _kinked(lims, dt):
    """Whether the binding limit changes within the step: another limit's Hermite threshold
    rises above the binding one's somewhere (or the binding one differs at the samples)."""
    lim0, lim1 = lims
    b0 = 0
    b1 = 0
    for k in range(1, 3):
        if lim0[2 * k] > lim0[2 * b0]:
            b0 = k
        if lim1[2 * k] > lim1[2 * b1]:
            b1 = k
    if b0 != b1:
        return True
    for k in range(3):
        if k == b0 or (lim0[2 * k] <= NO_LIMIT_KM and lim1[2 * k] <= NO_LIMIT_KM):
            continue
        lo, hi = cubic_range(lim0[2 * b0] - lim0[2 * k],
                             dt * (lim0[2 * b0 + 1] - lim0[2 * k + 1]),
                             lim1[2 * b0] - lim1[2 * k],
                             dt * (lim1[2 * b0 + 1] - lim1[2 * k + 1]))
        if lo < 0.0:
            return True
    return False


@kernel_helper
def timed_row(a, heads, ev, base, ps, pl, cs, cl, n_lon, n_win, masked, lon0, dlon, cos_lon,
              sin_lon, geo, sat, lims, several, dt, t0, kmax):
    """Queue every crossing of one row in the step from t0 (continuous time; see module).

    ``geo`` as for the cells; ``sat`` = previous and current satellite distance from the
    polar axis [km], its rate [km/s], longitude rate [rad/s] and longitude [rad] (the
    current one unwrapped next to the previous), the bounds of the longitude over the step
    [rad], the cosine of the longitude's change, and 1.0 when the track passes so close to
    the polar axis that longitude is no guide (then every cell of the row is solved), and
    the bounds of the distance from the axis over the step [km]; ``lims`` every limit's
    threshold and rate at both samples, ``several`` whether more than one limit applies.
    """
    x0 = geo[8]
    r0 = geo[9]
    x1 = geo[10]
    r1 = geo[11]
    (rho_p, drho_p, dl_p, lon_p, rho_s, drho_s, dl_s, lon_s, lon_a, lon_b, cos_dlon,
     near_axis, r_lo, r_hi) = sat
    none = (1.0, -1.0)
    kinked = several and _kinked(lims, dt)
    if near_axis > 0.0:
        _sweep_union(heads, ev, base, ps, pl, cs, cl, n_lon, n_win, masked, lon0, dlon, cos_lon,
                     sin_lon,
                     geo, dt, t0, ((0.0, 2.0 * math.pi), none, none, none), False, lims, kinked)
        return
    if kinked:
        # the binding limit changes within the step: bound the threshold X* = max_k X*_k
        # over the step by the limits' own Hermite ranges (from below by the largest least
        # value), and solve every cell in reach limit by limit
        x_lo = NO_LIMIT_KM
        x_hi = NO_LIMIT_KM
        lim0, lim1 = lims
        for k in range(3):
            if lim0[2 * k] > NO_LIMIT_KM and lim1[2 * k] > NO_LIMIT_KM:
                k_lo, k_hi = cubic_range(lim0[2 * k], dt * lim0[2 * k + 1], lim1[2 * k],
                                         dt * lim1[2 * k + 1])
                x_lo = max(x_lo, k_lo)
                x_hi = max(x_hi, k_hi)
        c_lo = x_lo / r_hi if x_lo >= 0.0 else x_lo / r_lo
        c_hi = x_hi / r_lo if x_hi >= 0.0 else x_hi / r_hi
        if pl == 0 and cl == 0 and c_lo >= 1.0:
            return
        w_hi = math.pi if c_lo <= -1.0 else math.acos(min(c_lo, 1.0))
        w_lo = 0.0 if c_hi >= 1.0 else math.acos(max(c_hi, -1.0))
        w_hi += _EDGE_PAD_RAD
        w_lo = max(w_lo - _EDGE_PAD_RAD, 0.0)
        _sweep_union(heads, ev, base, ps, pl, cs, cl, n_lon, n_win, masked, lon0, dlon, cos_lon,
                     sin_lon,
                     geo, dt, t0, ((lon_a - w_hi, lon_b - w_lo), (lon_a + w_lo, lon_b + w_hi),
                              none, none), False, lims, True)
        return
    # the interval's half-width W over the step: cos W = c = X*/rho_sat, smooth
    c0 = x0 / rho_p
    c1 = x1 / rho_s
    dc0 = (r0 - c0 * drho_p) / rho_p
    dc1 = (r1 - c1 * drho_s) / rho_s
    gap = none
    right = none
    left = none
    loose = False
    partly = -1.0 < c0 < 1.0 and -1.0 < c1 < 1.0
    if partly:
        # partly seen at both samples: the changed cells cross; more only where the
        # interval jumps by more than its width, or an edge turns round within the step
        if cs != ps or cl != pl:
            changed_cells(a, heads, ev, base, cs, cl, ps, pl, n_lon, n_win, masked, cos_lon,
                          sin_lon, geo, dt, t0, True, kmax)
        s0 = math.sqrt(1.0 - c0 * c0)  # sin W
        s1 = math.sqrt(1.0 - c1 * c1)
        if c0 + c1 > 0.0 and cos_dlon < c0 * c1 - s0 * s1 + _DISJOINT_PAD:
            # |dlon| > W0 + W1: the cells between the interval's two positions are entered
            # and left within the step
            w0 = math.acos(c0)
            w1 = math.acos(c1)
            if lon_s >= lon_p:
                gap = (lon_p + w0 - _EDGE_PAD_RAD, lon_s - w1 + _EDGE_PAD_RAD)
            else:
                gap = (lon_s + w1 - _EDGE_PAD_RAD, lon_p - w0 + _EDGE_PAD_RAD)
        dw0 = -dc0 / s0  # the half-width's rate, dW = -dc / sin W
        dw1 = -dc1 / s1
        turn_r = (dl_p + dw0 > 0.0) != (dl_s + dw1 > 0.0)
        turn_l = (dl_p - dw0 > 0.0) != (dl_s - dw1 > 0.0)
        if turn_r or turn_l:
            c_lo, c_hi = cubic_range(c0, dt * dc0, c1, dt * dc1)
            if -1.0 < c_lo and c_hi < 1.0:
                # each turning edge's sweep, from its Hermite interpolant
                w0 = math.acos(c0)
                w1 = math.acos(c1)
                for side in range(2):
                    if (side == 0 and not turn_r) or (side == 1 and not turn_l):
                        continue
                    sg = 1.0 if side == 0 else -1.0
                    e_lo, e_hi = cubic_range(lon_p + sg * w0, dt * (dl_p + sg * dw0),
                                             lon_s + sg * w1, dt * (dl_s + sg * dw1))
                    pad = _EDGE_PAD_SHARE * (e_hi - e_lo) + _EDGE_PAD_RAD
                    if side == 0:
                        right = (e_lo - pad, e_hi + pad)
                    else:
                        left = (e_lo - pad, e_hi + pad)
            else:
                loose = True  # the interval vanishes or fills the row within the step
        if not loose:
            if gap[0] <= gap[1] or right[0] <= right[1] or left[0] <= left[1]:
                _sweep_union(heads, ev, base, ps, pl, cs, cl, n_lon, n_win, masked, lon0, dlon,
                             cos_lon, sin_lon, geo, dt, t0, (gap, right, left, none), True, lims,
                             False)
            return
    else:
        c_lo, c_hi = cubic_range(c0, dt * dc0, c1, dt * dc1)
        if pl == 0 and cl == 0 and c_lo >= 1.0:
            return  # out of reach throughout
        if pl == n_lon and cl == n_lon and c_hi <= -1.0:
            return  # all of the row in view throughout
    # a conservative bound of the interval over the step (its edges within these ranges),
    # with the cells between the interval's positions (the gap) if it jumped
    w_hi = math.pi if c_lo <= -1.0 else math.acos(min(c_lo, 1.0))
    w_lo = 0.0 if c_hi >= 1.0 else math.acos(max(c_hi, -1.0))
    w_hi += _EDGE_PAD_RAD
    w_lo = max(w_lo - _EDGE_PAD_RAD, 0.0)
    _sweep_union(heads, ev, base, ps, pl, cs, cl, n_lon, n_win, masked, lon0, dlon, cos_lon,
                 sin_lon, geo,
                 dt, t0, ((lon_a - w_hi, lon_b - w_lo), (lon_a + w_lo, lon_b + w_hi), gap, none),
                 partly, lims, False)
