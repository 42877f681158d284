"""The events of a side-looking sensor in one latitude row over one step (numba helpers).

Part of the coverage kernel (:mod:`covergrid.compute.kernel`). A side-looking sensor sees
an off-nadir annulus, ``eta_min <= eta <= eta_max``, on one side of the ground track or on
both. Its outer limits (elevation, the outer cone, the range) are the kernel's usual ones:
on a row they are met on one interval of columns, the row's *reach*, which the kernel finds
and tracks as for any sensor. The two new limits are not met on one interval:

* the inner cone, ``eta >= eta_min``: with the same quadratic as the outer cone
  (:func:`covergrid.compute.footprint.row_thresholds`, its near-side root ``X*_in``) it is
  met for ``X <= X*_in``, the complement of an interval about the satellite's column
  (spherical picture: Wertz and Larson, *Space Mission Analysis and Design*, 3rd ed.,
  sec. 5.2, the off-nadir angle grows with the Earth central angle up to the horizon);
* the side: with ``n = r x v`` (Earth-fixed position and velocity of the satellite), a cell
  at ``p`` lies left of the track when ``n . p >= 0``, right when ``n . p <= 0``; on a row
  ``n . p = rho (n_x cos lon + n_y sin lon) + n_z z_c``, linear in (cos lon, sin lon) but
  along another direction than the projected coordinate.

So a row's visible cells are up to two intervals, off the satellite's column. Rather than
track them, every cell of the reach is decided by the exact test of every limit at each
sample (:func:`side_row`):

* sampled (sample and hold): the cells of the previous and the current reach intervals;
  where a cell's state differs, an event at the sample;
* continuous time: every cell in a conservative bound of the reach over the step (the
  satellite's longitude range and the least threshold over the step, as the kernel's own
  bounds; the annulus lies inside the outer footprint, so it holds every cell that can be
  seen within the step), each solved as
  :func:`covergrid.compute.row_events._solve_cell_limits` solves a cell whose binding limit
  changes: one cubic Hermite per limit margin (value and rate at both samples), their
  crossings sorted, the state tested between them. The inner margin is ``X*_in - X`` with
  the threshold's rate; the side margin is ``+-n . p`` with the rate ``n' . p``,
  ``n' = r x a``, where ``a`` is the Earth-fixed acceleration of a point mass in the
  rotating frame (central term, Coriolis ``-2 w x v`` and centrifugal ``-w x (w x r)``
  terms; no J2). That is accurate enough for an interpolant: the exact test at the samples
  decides the state there, and the rates only shape the crossing times within the step.

The cost per sample is the number of cells in the reach (the footprint's area), not its
perimeter as for the other sensors.
"""

from __future__ import annotations

import math

from covergrid.compute.cell_events import apply_event, push_event
from covergrid.compute.crossings import cubic_range, hermite_crossings
from covergrid.compute.footprint import NO_LIMIT_KM, row_thresholds, wrap_column
from covergrid.compute.jit import kernel_function, kernel_helper
from covergrid.compute.kernel_state import SCRATCH_EVENTS
from covergrid.constants import MU_EARTH_KM3_S2, OMEGA_EARTH_RAD_S

__all__ = ["side_normal", "side_row"]

#: Widening of the longitude bound of the reach over a step [rad] (about 0.6 km), as the
#: kernel's own bounds (far beyond the interpolation error of the track and threshold).
_EDGE_PAD_RAD = 1e-4
#: Limits per cell: elevation, outer cone, range, inner cone, side.
_N_LIMITS = 5
#: Largest magnitude of the Hermite basis functions of the end slopes on [0, 1] (4/27).
_HERMITE_SWING = 4.0 / 27.0


@kernel_helper
def side_normal(x, y, z, vx, vy, vz):
    """The track plane's normal ``n = r x v`` [km^2/s] and its rate ``n' = r x a``
    [km^2/s^2] from an Earth-fixed position [km] and velocity [km/s].

    ``a`` is the acceleration in the rotating frame of a point-mass Earth: ``-mu r/|r|^3
    - 2 w x v - w x (w x r)`` with ``w = (0, 0, omega_E)`` (the rotating-frame equation of
    motion, e.g. Vallado, *Fundamentals of Astrodynamics and Applications*, 4th ed.,
    sec. 3.7; from memory), enough for the interpolant of the side margin (module notes).
    """
    nx = y * vz - z * vy
    ny = z * vx - x * vz
    nz = x * vy - y * vx
    r2 = x * x + y * y + z * z
    k = -MU_EARTH_KM3_S2 / (r2 * math.sqrt(r2))
    w = OMEGA_EARTH_RAD_S
    ax = k * x + 2.0 * w * vy + w * w * x
    ay = k * y - 2.0 * w * vx + w * w * y
    az = k * z
    return nx, ny, nz, y * az - z * ay, z * ax - x * az, x * ay - y * ax


@kernel_helper
def _margins(k, cl, sl, rho, zc, orbit, lims, inner, side, sg, dt):
    """Values and tau-rates (rate times the step) at both samples of a cell's margin to
    limit k (0 elevation, 1 outer cone, 2 range: ``X - X*_k``; 3 inner cone:
    ``X*_in - X``; 4 side: ``sg n . p``), and whether the limit applies."""
    px, py, pz, pvx, pvy, pvz, x, y, z, vx, vy, vz = orbit
    p0 = cl * px + sl * py
    q0 = dt * (cl * pvx + sl * pvy)
    p1 = cl * x + sl * y
    q1 = dt * (cl * vx + sl * vy)
    if k < 3:
        lim0, lim1 = lims
        x0 = lim0[2 * k]
        x1 = lim1[2 * k]
        return (p0 - x0, q0 - dt * lim0[2 * k + 1], p1 - x1, q1 - dt * lim1[2 * k + 1],
                x0 > NO_LIMIT_KM and x1 > NO_LIMIT_KM)
    if k == 3:
        xi0, ri0, xi1, ri1, present = inner
        return xi0 - p0, dt * ri0 - q0, xi1 - p1, dt * ri1 - q1, present
    (nx0, ny0, nz0, dx0, dy0, dz0), (nx1, ny1, nz1, dx1, dy1, dz1) = side
    return (sg * (rho * (nx0 * cl + ny0 * sl) + nz0 * zc),
            sg * dt * (rho * (dx0 * cl + dy0 * sl) + dz0 * zc),
            sg * (rho * (nx1 * cl + ny1 * sl) + nz1 * zc),
            sg * dt * (rho * (dx1 * cl + dy1 * sl) + dz1 * zc), sg != 0.0)


@kernel_helper
def _hermite(p0, d0, p1, d1, t):
    """The Hermite cubic through (0, p0, d0) and (1, p1, d1) at t."""
    a3 = 2.0 * (p0 - p1) + d0 + d1
    a2 = 3.0 * (p1 - p0) - 2.0 * d0 - d1
    return ((a3 * t + a2) * t + d0) * t + p0


@kernel_helper
def _sure(cl, sl, rho, zc, orbit, lims, inner, side, sg, dt):
    """+1 when every limit's margin interpolant stays >= 0 over the step, -1 when one stays
    < 0, 0 when neither is sure: a cheap bound that spares most cells the root finding.

    The Hermite cubic is ``h00 p0 + h01 p1 + h10 d0 + h11 d1`` with ``h00 + h01 = 1``, both
    >= 0, and ``|h10|, |h11| <= 4/27`` on [0, 1] (their extremes at tau = 1/3 and 2/3), so it
    lies within ``[min(p0, p1) - s, max(p0, p1) + s]`` with ``s = 4/27 (|d0| + |d1|)``.
    """
    verdict = 1
    for k in range(_N_LIMITS):
        g0, d0, g1, d1, present = _margins(k, cl, sl, rho, zc, orbit, lims, inner, side, sg,
                                           dt)
        if not present:
            continue
        slack = _HERMITE_SWING * (abs(d0) + abs(d1))
        if max(g0, g1) + slack < 0.0:
            return -1
        if min(g0, g1) - slack < 0.0:
            verdict = 0
    return verdict


@kernel_helper
def _solve_cell(heads, ev, c, cl, sl, rho, zc, orbit, lims, inner, side, sg, dt, t0, in0, in1):
    """Queue the crossings of one cell within the step from t0: the cell is seen while
    every limit's margin (each its own Hermite cubic) is >= 0; ``in0``, ``in1`` its exact
    state at the two samples. The crossings, sorted in the queue's scratch rows (free
    until the sample's events are applied), are the candidate times; the state between
    consecutive ones is tested at their midpoint."""
    last = ev.shape[0] - 1
    sb = last - SCRATCH_EVENTS
    nr = 0
    for k in range(_N_LIMITS):
        g0, d0, g1, d1, present = _margins(k, cl, sl, rho, zc, orbit, lims, inner, side, sg,
                                           dt)
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
        for k in range(_N_LIMITS):
            g0, d0, g1, d1, present = _margins(k, cl, sl, rho, zc, orbit, lims, inner, side,
                                               sg, dt)
            if present and _hermite(g0, d0, g1, d1, mid) < 0.0:
                inside = False
        if inside != state:
            push_event(heads, ev, c, t0 + t, 1.0 if inside else -1.0)
            state = inside
    if state != in1:  # the exact test at the sample decides (a crossing within rounding)
        push_event(heads, ev, c, t0 + 1.0, 1.0 if in1 else -1.0)


@kernel_helper
def _seen(j, ps, pl, cl, sl, x, y, rho, zc, x_in, normal, sg, n_lon):
    """Exact state of column j at a sample: in the reach interval (ps, pl) (every outer
    limit), outside the inner cone (``X <= X*_in``) and on the sensor's side."""
    if pl <= 0 or wrap_column(j - ps, n_lon) >= pl:
        return False
    if cl * x + sl * y > x_in:
        return False
    nx, ny, nz = normal
    return sg * (rho * (nx * cl + ny * sl) + nz * zc) >= 0.0


@kernel_function
def side_row(a, heads, ev, base, ps, pl, cs, cl, n_lon, n_win, masked, lon0, dlon, cos_lon,
             sin_lon, row, orbit, sat, lims, ann, timed, dt, t, kmax):
    """Events of one satellite in one row for a side-looking sensor (see the module notes);
    returns the number of the row's cells seen at the sample.

    ``base`` the row's first cell; (ps, pl) and (cs, cl) the reach intervals (start, length)
    at the previous and the current sample; ``row`` = (rho, z_c, sin_lat, cos_lat) of the
    row's cell centres; ``orbit`` the satellite's Earth-fixed position and velocity at the
    previous and current sample; ``sat`` the kernel's bounds of the satellite's motion over
    the step (continuous time only; see :func:`covergrid.compute.row_events.timed_row`);
    ``lims`` the outer limits' thresholds and rates at both samples; ``ann`` = (cos of the
    inner off-nadir angle, < -1.5: none; side sign: +1 left, -1 right, 0 both). With
    ``timed`` the events are at their crossing times in the step from t, otherwise at the
    sample t (arrivals applied at once: they come first among the sample's events).
    """
    rho, zc, sin_lat, cos_lat = row
    px, py, pz, pvx, pvy, pvz, x, y, z, vx, vy, vz = orbit
    cos_in, side_sign = ann
    sg = float(side_sign)
    sg_test = 1.0 if side_sign == 0 else sg  # both sides: n . p >= 0 or <= 0, always met
    has_inner = cos_in > -1.5
    # the inner threshold at both samples (the previous one recomputed: the same numbers)
    xi0 = 1e300
    ri0 = 0.0
    xi1 = 1e300
    ri1 = 0.0
    if has_inner:
        lt = row_thresholds(x, y, z, vx, vy, vz, rho, zc, sin_lat, cos_lat, 0.0, cos_in,
                            -1.0, timed)
        xi1 = lt[2]
        ri1 = lt[3]
        if timed or pl > 0:
            lt = row_thresholds(px, py, pz, pvx, pvy, pvz, rho, zc, sin_lat, cos_lat, 0.0,
                                cos_in, -1.0, timed)
            xi0 = lt[2]
            ri0 = lt[3]
    n0 = (0.0, 0.0, 0.0, 0.0, 0.0, 0.0)
    n1 = (0.0, 0.0, 0.0, 0.0, 0.0, 0.0)
    if side_sign != 0:
        if timed or pl > 0:
            n0 = side_normal(px, py, pz, pvx, pvy, pvz)
        n1 = side_normal(x, y, z, vx, vy, vz)
    nrm0 = (n0[0], n0[1], n0[2]) if side_sign != 0 else (0.0, 0.0, 0.0)
    nrm1 = (n1[0], n1[1], n1[2]) if side_sign != 0 else (0.0, 0.0, 0.0)
    seen = 0
    if not timed:
        # sample and hold: the cells of the previous and the current reach
        for part in range(2):
            s_a, l_a = (ps, pl) if part == 0 else (cs, cl)
            for m in range(l_a):
                j = wrap_column(s_a + m, n_lon)
                if j >= n_win:
                    continue
                if part == 1 and pl > 0 and wrap_column(j - ps, n_lon) < pl:
                    continue  # in both reaches: visited with the previous one
                if masked and heads[base + j] < 0.0:
                    continue  # outside the region
                cj = cos_lon[j]
                sj = sin_lon[j]
                in0 = _seen(j, ps, pl, cj, sj, px, py, rho, zc, xi0, nrm0, sg_test, n_lon)
                in1 = _seen(j, cs, cl, cj, sj, x, y, rho, zc, xi1, nrm1, sg_test, n_lon)
                if in1:
                    seen += 1
                if in1 and not in0:
                    apply_event(a, base + j, t, 1.0, kmax)
                elif in0 and not in1:
                    push_event(heads, ev, base + j, t, -1.0)
        return seen
    # continuous time: every cell within a conservative bound of the reach over the step
    (rho_p, drho_p, dl_p, lon_p, rho_s, drho_s, dl_s, lon_s, lon_a, lon_b, cos_dlon,
     near_axis, r_lo, r_hi) = sat
    lim0, lim1 = lims
    x_lo = NO_LIMIT_KM
    for k in range(3):
        if lim0[2 * k] > NO_LIMIT_KM and lim1[2 * k] > NO_LIMIT_KM:
            k_lo, k_hi = cubic_range(lim0[2 * k], dt * lim0[2 * k + 1], lim1[2 * k],
                                     dt * lim1[2 * k + 1])
            x_lo = max(x_lo, k_lo)
    c_lo = x_lo / r_hi if x_lo >= 0.0 else x_lo / r_lo
    if pl == 0 and cl == 0 and c_lo >= 1.0:
        return 0  # out of reach throughout the step
    w_hi = (math.pi if c_lo <= -1.0 else math.acos(c_lo)) + _EDGE_PAD_RAD
    lo = lon_a - w_hi
    hi = lon_b + w_hi
    if near_axis > 0.0 or hi - lo >= 2.0 * math.pi - dlon:
        j0 = 0
        j1 = n_lon
    else:
        j0 = int(math.ceil((lo - lon0) / dlon - 0.5))
        j1 = int(math.floor((hi - lon0) / dlon - 0.5)) + 1
    inner = (xi0, ri0, xi1, ri1, has_inner)
    side = (n0, n1)
    js = j0 % n_lon
    je = js + min(j1 - j0, n_lon)
    for part in range(2):
        off = 0 if part == 0 else n_lon
        for jj in range(max(js, off), min(je, off + n_win)):
            j = jj - off
            if masked and heads[base + j] < 0.0:
                continue  # outside the region
            cj = cos_lon[j]
            sj = sin_lon[j]
            in0 = _seen(j, ps, pl, cj, sj, px, py, rho, zc, xi0, nrm0, sg_test, n_lon)
            in1 = _seen(j, cs, cl, cj, sj, x, y, rho, zc, xi1, nrm1, sg_test, n_lon)
            if in1:
                seen += 1
            sure = _sure(cj, sj, rho, zc, orbit, lims, inner, side, sg, dt)
            if (sure > 0 and in0 and in1) or (sure < 0 and not in0 and not in1):
                continue  # in view, or out of view, throughout the step: no event
            _solve_cell(heads, ev, base + j, cj, sj, rho, zc, orbit, lims, inner, side, sg,
                        dt, t, in0, in1)
    return seen
