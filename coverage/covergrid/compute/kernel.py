"""The coverage kernel: footprint-indexed, event-driven, streaming per-cell accumulators.

Cost grows with what changes, not with cells x satellites x steps:

1. For each satellite and sample, the candidate rows come from a conservative bound on the
   footprint's geocentric central angle (:func:`covergrid.compute.footprint.central_angle_bound`).
2. In each candidate row the visible cells form one longitude interval centred on the
   satellite's longitude: every limit depends on the cell only through its projected
   coordinate ``X = x cos(lon) + y sin(lon)`` and is met for ``X >= X*`` (the row's
   threshold, in closed form: :func:`covergrid.compute.footprint.row_threshold`). The
   interval's two edges are confirmed with the exact ellipsoid test; the interior is not
   tested.
3. A cell's in-view count changes only where this sample's interval differs from the
   previous sample's interval of the same satellite. Each change is an *event* (cell, time,
   +1 or -1) in the sample's queue; at the end of the sample every cell's events are applied
   in time order (arrivals before departures at equal times), so that a hand-over between
   two satellites opens a gap exactly when there is one. Each cell keeps streaming state
   (current count, when its level last changed, when its gap began, level histogram, gap
   sums), so memory is proportional to the number of cells and independent of the span.
4. With ``refine`` (continuous time), an event happens at the time the limit is crossed.
   A cell's margin ``X(t) - X*(t)`` [km] is smooth; over a step it is represented by the
   cubic Hermite interpolant of its values and rates at the two samples (positions and
   Earth-fixed velocities of the satellite, the threshold and its rate), and its roots are
   the rise and set times (:func:`covergrid.compute.crossings.hermite_crossings`). The
   cells examined in a row are those whose sampled state differs, plus, where an interval
   edge turns round within the step or the row is reached only inside it, every cell in a
   conservative bound of the edges' sweep: so passes that begin and end between two samples
   (at the lateral edges of the swath, at the footprint's latitude extremes, near the track's
   turning point) are found and timed, and so are brief losses inside a pass.
5. Without ``refine`` every event is at its sample and who is in view at a sample holds
   until the next (sample and hold; the brute-force reference of the tests).
6. At the end every cell's open level and open gap are closed in one pass.
7. A side-looking sensor (an off-nadir annulus, one side of the track) is met on up to two
   intervals of a row, off the satellite's column: the other limits give the row's reach as
   above, and every cell of it is decided by the exact test of all limits
   (:mod:`covergrid.compute.side_events`), one branch of :func:`advance`.

The conventions are described in :mod:`covergrid.compute.metrics`. The kernel is compiled
with numba (cached on disk); with ``NUMBA_DISABLE_JIT=1`` the same code runs as plain
Python, which is useful for debugging and far too slow for studies.
"""

from __future__ import annotations

import math

import numpy as np

from covergrid.compute.cell_events import apply_events, close_cells
from covergrid.compute.crossings import cubic_range
from covergrid.compute.daylight import daylight_events, daylight_start
from covergrid.compute.footprint import (
    NO_LIMIT_KM,
    binding,
    central_angle_bound,
    row_interval,
    row_thresholds,
    wrap_column,
)
from covergrid.compute.jit import kernel_function
from covergrid.compute.kernel_state import HIST0
from covergrid.compute.row_events import changed_cells, timed_row
from covergrid.compute.side_events import side_row

#: Widening of the conservative longitude bounds of a row's edges over a step [rad] (about
#: 0.6 km), far beyond the interpolation error of the threshold and the satellite's track.
_EDGE_PAD_RAD = 1e-4


@kernel_function
def advance(pos_km, vel_km_s, i0, rho, zr, sin_lat, cos_lat, psi, cos_lon, sin_lon, lon0, dlon,
            n_lon, n_win, cap,
            el_min_rad, eta_max_rad, range_max_km, refine, step_s, acc, heads, events,
            rows_prev, prev_rows, bound_cache, prev_pos, visits, sun_km, prev_sun, sin_h0,
            eta_min_rad, look_side):
    """Advance one latitude band's streaming state over a block of samples.

    For each sample, each satellite's rows are visited once: the row's threshold and
    interval are found, the cells whose state changed since the previous sample (and, with
    ``refine``, the cells a sub-step pass may reach) are queued as events, and the new
    interval replaces the old. The queued events are applied cell by cell in time order
    after every satellite is done.

    Parameters
    ----------
    pos_km, vel_km_s : ndarray, (n_sat, n_block, 3)
        Earth-fixed satellite positions [km] at samples i0 .. i0 + n_block - 1 and their time
        derivatives [km/s] (read only with ``refine`` or a side-looking sensor).
    i0 : int
        Index of the block's first sample.
    rho, zr, sin_lat, cos_lat, psi : ndarray, (n_rows,)
        Row geometry of the band (see :attr:`covergrid.compute.grid.Grid.row_geometry`).
    lon0, dlon : float
        Western edge of column 0 and column width [rad]; n_lon columns cover 360 deg.
    n_win : int
        Columns that are cells, from column 0 (n_lon without longitude limits): a row's
        cells are ``r * n_win + j`` for j < n_win, and the columns beyond are never visited
        (:mod:`covergrid.compute.row_events`). A cell whose ``heads`` entry is -1 lies
        outside the grid's region and is skipped.
    cap : tuple of 4 float
        A spherical cap holding every cell of the band (geocentric unit vector of its centre
        and its angular radius [rad]; a radius >= pi holds everything). A satellite whose
        footprint bound, widened by its motion over the step, does not reach the cap sees
        no cell of the band at this sample nor within the step before it: its rows are
        left alone (the previous sample's intervals are closed once, then nothing).
    el_min_rad, eta_max_rad, range_max_km : float
        Sensor limits; eta_max_rad <= 0 and range_max_km <= 0 mean "no limit".
    refine : bool
        Continuous time: events at their crossing times, sub-step passes found (module
        notes); otherwise every event at its sample.
    step_s : float
        Sample spacing [s].
    acc, heads, events, rows_prev, prev_rows, bound_cache, prev_pos : ndarray
        State from :func:`covergrid.compute.kernel_state.new_state`, updated in place.
    visits : ndarray, (1,)
        Running count of satellite-sample-cell visibilities (for benchmarks), in place.
    sun_km : ndarray, (n_block, 3) or (0, 3)
        The Sun's Earth-fixed position at the block's samples [km], with the daylight
        constraint (:mod:`covergrid.compute.daylight`); empty without it.
    prev_sun : ndarray, (3,)
        The Sun at the previous sample (state, updated in place).
    sin_h0 : float
        Sine of the least solar elevation of daylight.
    eta_min_rad, look_side : float, int
        A side-looking sensor (:mod:`covergrid.compute.side_events`): the least off-nadir
        angle (<= 0: none) and the side (+1 left, -1 right, 0 both). The other limits give
        the row's reach as for any sensor; every cell of the reach is then decided by the
        exact test of all limits.
    """
    n_sat = pos_km.shape[0]
    n_block = pos_km.shape[1]
    n_rows = rho.shape[0]
    kmax = acc.shape[1] - HIST0 - 1
    sin_el = math.sin(el_min_rad)
    cos_eta = math.cos(eta_max_rad) if eta_max_rad > 0.0 else -2.0
    range_lim = range_max_km if range_max_km > 0.0 else -1.0
    psi_lo_band = psi[0]
    psi_hi_band = psi[n_rows - 1]
    dt = step_s
    nvis = 0
    vx = vy = vz = 0.0
    sat = (1.0, 0.0, 0.0, 0.0, 1.0, 0.0, 0.0, 0.0, 0.0, 0.0, 1.0, 0.0, 1.0, 1.0)
    no_limits = (NO_LIMIT_KM, 0.0, NO_LIMIT_KM, 0.0, NO_LIMIT_KM, 0.0)
    several = cos_eta > -1.5 or range_lim > 0.0  # more than the elevation limit
    cap_x, cap_y, cap_z, cap_r = cap
    masked = False  # any cell outside the region (queue head -1)? then cells are checked
    for c in range(heads.shape[0]):
        if heads[c] < 0.0:
            masked = True
            break
    daylight = sun_km.shape[0] > 0
    annulus = eta_min_rad > 0.0 or look_side != 0
    ann = (math.cos(eta_min_rad) if eta_min_rad > 0.0 else -2.0, look_side)
    for b in range(n_block):
        i = i0 + b
        timed = refine and i > 0
        t_sample = float(i)
        if daylight:
            if i == 0:
                daylight_start(acc, heads, sun_km[b, 0], sun_km[b, 1], sun_km[b, 2], rho, zr,
                               sin_lat, cos_lat, cos_lon, sin_lon, n_win, masked, sin_h0)
                prev_sun[0] = sun_km[b, 0]
                prev_sun[1] = sun_km[b, 1]
                prev_sun[2] = sun_km[b, 2]
            else:
                daylight_events(acc, heads, events, prev_sun, sun_km[b, 0], sun_km[b, 1],
                                sun_km[b, 2], rho, zr, sin_lat, cos_lat, cos_lon, sin_lon, lon0,
                                dlon, n_lon, n_win, masked, sin_h0, refine, t_sample, kmax)
        for s in range(n_sat):
            x = pos_km[s, b, 0]
            y = pos_km[s, b, 1]
            z = pos_km[s, b, 2]
            if refine or annulus:
                vx = vel_km_s[s, b, 0]
                vy = vel_km_s[s, b, 1]
                vz = vel_km_s[s, b, 2]
            rs2 = x * x + y * y + z * z
            rs = math.sqrt(rs2)
            rho_s = math.sqrt(x * x + y * y)
            # the bound depends on the radius only: reuse it while the radius stays put
            # (circular orbits), to within a metre, which the bound's margin covers many times
            if abs(rs - bound_cache[s, 0]) > 1e-3:
                bound_cache[s, 0] = rs
                bound_cache[s, 1] = central_angle_bound(rs + 1e-3, el_min_rad, eta_max_rad,
                                                        range_max_km)
            lam = bound_cache[s, 1]
            lam_prev = bound_cache[s, 2]
            bound_cache[s, 2] = lam
            c_lo = 0
            c_hi = 0
            far = False
            if cap_r < math.pi:
                # the angle moved since the previous sample (a tenth more, and 1e-4 rad)
                # plus the footprint bound: beyond the cap's edge, nothing of the band seen
                qx = prev_pos[s, 0]
                qy = prev_pos[s, 1]
                qz = prev_pos[s, 2]
                rq = math.sqrt(qx * qx + qy * qy + qz * qz)
                moved = math.pi
                if i > 0 and rq > 0.0:
                    cm = (qx * x + qy * y + qz * z) / (rq * rs)
                    moved = 1.1 * math.acos(min(1.0, max(-1.0, cm))) + 1e-4
                reach = cap_r + max(lam, lam_prev) + moved
                far = reach < math.pi and (cap_x * x + cap_y * y + cap_z * z) < rs * math.cos(
                    reach)
            if lam >= 0.0 and not far:
                psi_s = math.asin(z / rs)
                if psi_s + lam >= psi_lo_band and psi_s - lam <= psi_hi_band:
                    c_lo = np.searchsorted(psi, psi_s - lam)
                    c_hi = np.searchsorted(psi, psi_s + lam, side="right")
            p_lo = prev_rows[s, 0]
            p_hi = prev_rows[s, 1]
            lo, hi = c_lo, c_hi
            if p_lo < p_hi:
                lo, hi = (p_lo, p_hi) if lo >= hi else (min(lo, p_lo), max(hi, p_hi))
            px = prev_pos[s, 0]
            py = prev_pos[s, 1]
            pz = prev_pos[s, 2]
            pvx = prev_pos[s, 3]
            pvy = prev_pos[s, 4]
            pvz = prev_pos[s, 5]
            if timed and max(lam, lam_prev) >= 0.0 and not far:
                # rows reached within the step: the track's latitude between the samples
                # (its turning point lies beyond both) widened by the footprint bound
                lam_s = max(lam, lam_prev)
                z_lo, z_hi = cubic_range(pz, dt * pvz, z, dt * vz)
                rp = math.sqrt(px * px + py * py + pz * pz)
                r_min = min(rp, rs)
                r_max = max(rp, rs)
                top = math.asin(min(1.0, z_hi / (r_min if z_hi > 0.0 else r_max)))
                bot = math.asin(max(-1.0, z_lo / (r_min if z_lo < 0.0 else r_max)))
                if top + lam_s >= psi_lo_band and bot - lam_s <= psi_hi_band:
                    x_lo = np.searchsorted(psi, bot - lam_s)
                    x_hi = np.searchsorted(psi, top + lam_s, side="right")
                    lo, hi = (x_lo, x_hi) if lo >= hi else (min(lo, x_lo), max(hi, x_hi))
            jc_prev = prev_rows[s, 2]
            if lo < hi:
                lon_s = math.atan2(y, x)
                jc = int(math.floor((lon_s - lon0) / dlon)) % n_lon
                off = lon0 + (jc + 0.5) * dlon - lon_s  # centre of column jc from the satellite
                if timed:
                    rho_p = math.sqrt(px * px + py * py)
                    drho_p = (px * pvx + py * pvy) / rho_p
                    drho_s = (x * vx + y * vy) / rho_s
                    dl_p = (px * pvy - py * pvx) / (rho_p * rho_p)
                    dl_s = (x * vy - y * vx) / (rho_s * rho_s)
                    # close to the polar axis the longitude is no guide: whole rows
                    near_axis = min(rho_p, rho_s) < dt * max(math.hypot(vx, vy),
                                                             math.hypot(pvx, pvy))
                    lon_p = math.atan2(py, px)
                    d_lon = lon_s - lon_p
                    lon_1 = lon_p + d_lon - 2.0 * math.pi * math.floor(d_lon / (2.0 * math.pi)
                                                                     + 0.5)
                    lon_a, lon_b = cubic_range(lon_p, dt * dl_p, lon_1, dt * dl_s)
                    r_lo, r_hi = cubic_range(rho_p, dt * drho_p, rho_s, dt * drho_s)
                    sat = (rho_p, drho_p, dl_p, lon_p, rho_s, drho_s, dl_s, lon_1,
                           lon_a - _EDGE_PAD_RAD, lon_b + _EDGE_PAD_RAD,
                           (px * x + py * y) / (rho_p * rho_s), 1.0 if near_axis else 0.0,
                           max(r_lo - 1e-3, 1e-9), r_hi + 1e-3)
                for r in range(lo, hi):
                    in_c = c_lo <= r < c_hi
                    lim1 = no_limits
                    if in_c or timed:
                        lim1 = row_thresholds(x, y, z, vx, vy, vz, rho[r], zr[r], sin_lat[r],
                                              cos_lat[r], sin_el, cos_eta, range_lim, refine)
                    x1, rate1, _ = binding(lim1)
                    ps = 0
                    pl = 0
                    lim0 = no_limits
                    if p_lo <= r < p_hi:
                        ps = int(rows_prev[s, r, 0])
                        pl = int(rows_prev[s, r, 1])
                        if several:
                            lim0 = (rows_prev[s, r, 2], rows_prev[s, r, 3], rows_prev[s, r, 4],
                                    rows_prev[s, r, 5], rows_prev[s, r, 6], rows_prev[s, r, 7])
                        else:
                            lim0 = (rows_prev[s, r, 2], rows_prev[s, r, 3], NO_LIMIT_KM, 0.0,
                                    NO_LIMIT_KM, 0.0)
                    elif timed:
                        lim0 = row_thresholds(px, py, pz, pvx, pvy, pvz, rho[r], zr[r],
                                              sin_lat[r], cos_lat[r], sin_el, cos_eta,
                                              range_lim, True)
                    x0, rate0, _ = binding(lim0)
                    cs = 0
                    cl = 0
                    if in_c and x1 <= rho_s + 1e-9 * rs:
                        # the interval's ends, searched from where they were at the previous
                        # sample (relative to the satellite's column), or from the half-width
                        if 0 < pl < n_lon:
                            m_r = wrap_column(ps + pl - 1 - jc_prev, n_lon)
                            m_l = wrap_column(jc_prev - ps, n_lon)
                        else:
                            cw = x1 / rho_s if rho_s > 0.0 else -2.0
                            w = math.pi if cw <= -1.0 else (0.0 if cw >= 1.0 else math.acos(cw))
                            m_r = int(math.floor((w - off) / dlon))
                            m_l = int(math.floor((w + off) / dlon))
                        cs, cl = row_interval(x, y, x1, jc, m_r, m_l, cos_lon, sin_lon, n_lon)
                        nvis += 0 if annulus else cl
                    if in_c:
                        rows_prev[s, r, 0] = cs
                        rows_prev[s, r, 1] = cl
                        for k in range(6 if several else 2):
                            rows_prev[s, r, 2 + k] = lim1[k]
                    base = r * n_win
                    geo = (px, py, pvx, pvy, x, y, vx, vy, x0, rate0, x1, rate1)
                    if annulus:
                        # a side-looking sensor: every cell of the row's reach decided by
                        # the exact test of all its limits (side_events)
                        nvis += side_row(acc, heads, events, base, ps, pl, cs, cl, n_lon, n_win,
                                         masked, lon0, dlon, cos_lon, sin_lon,
                                         (rho[r], zr[r], sin_lat[r], cos_lat[r]),
                                         (px, py, pz, pvx, pvy, pvz, x, y, z, vx, vy, vz), sat,
                                         (lim0, lim1), ann, timed, dt,
                                         t_sample - 1.0 if timed else t_sample, kmax)
                    elif timed:
                        timed_row(acc, heads, events, base, ps, pl, cs, cl, n_lon, n_win, masked,
                                  lon0, dlon, cos_lon, sin_lon, geo, sat, (lim0, lim1), several,
                                  dt, t_sample - 1.0, kmax)
                    elif cs != ps or cl != pl:
                        changed_cells(acc, heads, events, base, cs, cl, ps, pl, n_lon, n_win,
                                      masked, cos_lon, sin_lon, geo, dt, t_sample, False, kmax)
            prev_rows[s, 0] = c_lo
            prev_rows[s, 1] = c_hi
            if lo < hi:
                prev_rows[s, 2] = jc
            prev_pos[s, 0] = x
            prev_pos[s, 1] = y
            prev_pos[s, 2] = z
            prev_pos[s, 3] = vx
            prev_pos[s, 4] = vy
            prev_pos[s, 5] = vz
        apply_events(acc, heads, events, kmax)
    visits[0] += nvis


@kernel_function
def close(t_end, acc, n_cells):
    """Close every cell's open level and open gap at the end of the span (time t_end)."""
    close_cells(t_end, acc, n_cells, acc.shape[1] - HIST0 - 1)


def run_band(state: dict[str, np.ndarray], pos_km: np.ndarray, i0: int,
             rows: dict[str, np.ndarray], lon0_rad: float, dlon_rad: float, n_lon: int,
             el_min_rad: float, eta_max_rad: float, range_max_km: float,
             refine: bool = True, vel_km_s: np.ndarray | None = None,
             step_s: float = 1.0, n_win: int | None = None,
             cap: tuple[float, float, float, float] | None = None,
             sun_km: np.ndarray | None = None, min_sun_elevation_rad: float = 0.0,
             min_off_nadir_rad: float = 0.0, look_side: int = 0) -> None:
    """Python entry point to :func:`advance` with the state held in a dict.

    With ``refine``, ``vel_km_s`` (the positions' time derivatives, same shape) and the
    sample spacing ``step_s`` [s] are required. ``n_lon`` columns from ``lon0_rad`` go
    round the circle; the first ``n_win`` of them (default all) are the band's cells.
    ``cap`` (centre unit vector, radius [rad]) holds every cell of the band (default: the
    whole sphere); see :func:`advance`. ``sun_km`` (n_block, 3), the Sun's Earth-fixed
    positions at the block's samples [km], applies the daylight constraint with the least
    solar elevation ``min_sun_elevation_rad``. ``min_off_nadir_rad`` (> 0) and
    ``look_side`` (+1 left, -1 right, 0 both) make the sensor side-looking
    (:mod:`covergrid.compute.side_events`), which needs ``vel_km_s`` in both modes.
    """
    st = state
    pos = np.ascontiguousarray(pos_km, dtype=np.float64)
    side_looking = min_off_nadir_rad > 0.0 or look_side != 0
    if refine or side_looking:
        if vel_km_s is None:
            raise ValueError("refine and a side-looking sensor need the satellites' "
                             "velocities (vel_km_s)")
        vel = np.ascontiguousarray(vel_km_s, dtype=np.float64)
    else:
        vel = np.zeros((1, 1, 3))
    lon = lon0_rad + (np.arange(n_lon) + 0.5) * dlon_rad
    advance(pos, vel, int(i0), rows["rho_km"], rows["z_km"], rows["sin_lat"], rows["cos_lat"],
            rows["psi_rad"], np.cos(lon), np.sin(lon), float(lon0_rad), float(dlon_rad),
            int(n_lon), int(n_lon if n_win is None else n_win),
            (1.0, 0.0, 0.0, 4.0) if cap is None else tuple(float(v) for v in cap),
            float(el_min_rad),
            float(eta_max_rad), float(range_max_km), bool(refine), float(step_s), st["acc"],
            st["heads"], st["events"], st["rows_prev"], st["prev_rows"], st["bound_cache"],
            st["prev_pos"], st["visits"],
            np.zeros((0, 3)) if sun_km is None else np.ascontiguousarray(sun_km, np.float64),
            st["prev_sun"], math.sin(min_sun_elevation_rad), float(min_off_nadir_rad),
            int(look_side))


def close_band(state: dict[str, np.ndarray], t_end: float) -> None:
    """Python entry point to :func:`close`: ``t_end`` is the span's end [samples]."""
    close(float(t_end), state["acc"], int(state["n_cells"][0]))
