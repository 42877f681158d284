"""The compiled part of point-target evaluation: every satellite's rise and set over sites.

A site is seen from a satellite exactly as a grid cell is (:mod:`covergrid.compute.footprint`):
its visibility margin to each limit is ``X - X*_k`` [km] with ``X`` the satellite's position
projected on the site's meridian direction and ``X*_k`` the limit's threshold for the site's
distance from the axis, height and latitude (:func:`~covergrid.compute.footprint.row_thresholds`
takes any point, not only one on the ellipsoid). The site is in view when every present
limit's margin is >= 0. In continuous time each margin over a step is the cubic Hermite
through its values and rates at the two samples and its roots are the rise and set times
(:func:`~covergrid.compute.crossings.hermite_crossings`), as in the coverage kernel; where
several limits apply, every limit's roots are candidates and the state between two of them
is tested at their midpoint (the kernel's rule where the binding limit changes). Sampled
(``refine`` false): the state at each sample holds until the next.

Only sites within reach are evaluated: those within the footprint's conservative central
angle (:func:`~covergrid.compute.footprint.central_angle_bound`) widened by the angle the
satellite moves over one step (so a pass between two samples is within reach at both),
found among the sites sorted by geocentric latitude and then by their angle from the
satellite. A pair (satellite, site) keeps its margins and rates of the last sample it was
evaluated at; a pair newly in reach has them computed at the previous sample from the
satellite's state there, so a pass beginning within the step is timed as any other.
"""

from __future__ import annotations

import math

import numpy as np

from covergrid.compute.crossings import hermite_crossings
from covergrid.compute.footprint import NO_LIMIT_KM, central_angle_bound, row_thresholds
from covergrid.compute.jit import kernel_function, kernel_helper

__all__ = ["PAIR_COLUMNS", "target_events"]

#: Per (satellite, site): margin and tau-free rate of each of the three limits [km, km/s]
#: at the last sample evaluated, and that sample's index.
PAIR_COLUMNS = 7
#: Widening of the reach beyond the step's motion: a tenth, and 1e-4 rad (0.6 km).
_REACH_SHARE = 0.1
_REACH_PAD_RAD = 1e-4


@kernel_helper
def _hermite(p0, d0, p1, d1, t):
    """The Hermite cubic through (0, p0, d0) and (1, p1, d1) at t."""
    a3 = 2.0 * (p0 - p1) + d0 + d1
    a2 = 3.0 * (p1 - p0) - 2.0 * d0 - d1
    return ((a3 * t + a2) * t + d0) * t + p0


@kernel_helper
def _push(out, n_out, site, sat, t, kind):
    """Record one event (site, satellite, time [samples], +1 rise / -1 set)."""
    q = n_out[0]
    if q < out.shape[0]:
        out[q, 0] = site
        out[q, 1] = sat
        out[q, 2] = t
        out[q, 3] = kind
    n_out[0] = q + 1


@kernel_function
def _solve_step(out, n_out, site, sat, w, dt, t0, in0, in1, several):
    """Events of one pair within the step from sample t0. ``w`` holds each limit's margin
    and rate at the two samples (``w[0:6]``, ``w[6:12]``) and room for the roots
    (``w[12:21]``)."""
    if not several:
        n, t1, t2, t3 = hermite_crossings(w[0], dt * w[1], w[6], dt * w[7], in0, in1)
        state = in0
        for k in range(n):
            tau = t1 if k == 0 else (t2 if k == 1 else t3)
            _push(out, n_out, site, sat, t0 + tau, -1.0 if state else 1.0)
            state = not state
        return
    nr = 0
    for k in range(3):
        p0 = w[2 * k]
        p1 = w[6 + 2 * k]
        if p0 <= NO_LIMIT_KM or p1 <= NO_LIMIT_KM:
            continue
        n, t1, t2, t3 = hermite_crossings(p0, dt * w[2 * k + 1], p1, dt * w[7 + 2 * k],
                                          p0 >= 0.0, p1 >= 0.0)
        for m in range(n):
            t = t1 if m == 0 else (t2 if m == 1 else t3)
            j = nr
            while j > 0 and w[12 + j - 1] > t:  # insertion, ascending
                w[12 + j] = w[12 + j - 1]
                j -= 1
            w[12 + j] = t
            nr += 1
    state = in0
    for m in range(nr):
        t = w[12 + m]
        nxt = w[12 + m + 1] if m + 1 < nr else 1.0
        mid = 0.5 * (t + nxt)
        inside = True
        for k in range(3):
            p0 = w[2 * k]
            p1 = w[6 + 2 * k]
            if p0 <= NO_LIMIT_KM or p1 <= NO_LIMIT_KM:
                continue
            if _hermite(p0, dt * w[2 * k + 1], p1, dt * w[7 + 2 * k], mid) < 0.0:
                inside = False
        if inside != state:
            _push(out, n_out, site, sat, t0 + t, 1.0 if inside else -1.0)
            state = inside
    if state != in1:  # the exact test at the sample decides (a crossing within rounding)
        _push(out, n_out, site, sat, t0 + 1.0, 1.0 if in1 else -1.0)


@kernel_function
def target_events(pos_km, vel_km_s, i0, rho, zc, sin_lat, cos_lat, cos_lon, sin_lon, psi,
                  ux, uy, uz, el_min_rad, eta_max_rad, range_max_km, refine, step_s, pairs,
                  prev_pos, work, out, n_out):
    """Advance the rise and set events of every (satellite, site) pair over a block.

    Parameters
    ----------
    pos_km, vel_km_s : ndarray, (n_sat, n_block, 3)
        Earth-fixed positions [km] at samples i0 .. and their time derivatives [km/s]
        (velocities read only with ``refine``).
    i0 : int
        Index of the block's first sample.
    rho, zc, sin_lat, cos_lat, cos_lon, sin_lon, psi, ux, uy, uz : ndarray, (n_site,)
        Sites sorted by geocentric latitude ``psi`` [rad]: distance from the polar axis and
        height [km], geodetic latitude and longitude, unit geocentric direction.
    el_min_rad, eta_max_rad, range_max_km : float
        Sensor limits (<= 0: none, for the cone and the range), as the coverage kernel.
    refine : bool
        Continuous time (crossing times) or sample and hold.
    step_s : float
        Sample spacing [s].
    pairs : ndarray, (n_sat, n_site, PAIR_COLUMNS)
        Per-pair state (see :data:`PAIR_COLUMNS`); the sample column starts at -2.
    prev_pos : ndarray, (n_sat, 7)
        Each satellite's position at the previous sample, its footprint bound and velocity
        there.
    work : ndarray, (24,)
        Scratch room.
    out, n_out : ndarray
        Event rows (site, satellite, time [samples], +1/-1) and their count (events beyond
        ``out``'s length are counted, not written: the caller runs again with more room).
    """
    n_sat = pos_km.shape[0]
    n_block = pos_km.shape[1]
    n_site = rho.shape[0]
    sin_el = math.sin(el_min_rad)
    cos_eta = math.cos(eta_max_rad) if eta_max_rad > 0.0 else -2.0
    range_lim = range_max_km if range_max_km > 0.0 else -1.0
    several = cos_eta > -1.5 or range_lim > 0.0
    vx = vy = vz = 0.0
    for b in range(n_block):
        i = i0 + b
        for s in range(n_sat):
            x = pos_km[s, b, 0]
            y = pos_km[s, b, 1]
            z = pos_km[s, b, 2]
            if refine:
                vx = vel_km_s[s, b, 0]
                vy = vel_km_s[s, b, 1]
                vz = vel_km_s[s, b, 2]
            rs = math.sqrt(x * x + y * y + z * z)
            lam = central_angle_bound(rs + 1e-3, el_min_rad, eta_max_rad, range_max_km)
            # the larger of this and the previous sample's bound: a pair in view at the
            # previous sample is within reach now even where the bound shrinks (eccentric)
            reach = max(lam, prev_pos[s, 3], 0.0) if i > 0 else max(lam, 0.0)
            prev_pos[s, 3] = lam
            px = prev_pos[s, 0]
            py = prev_pos[s, 1]
            pz = prev_pos[s, 2]
            pvx = prev_pos[s, 4]
            pvy = prev_pos[s, 5]
            pvz = prev_pos[s, 6]
            if i > 0:
                rp = math.sqrt(px * px + py * py + pz * pz)
                c = (px * x + py * y + pz * z) / (rp * rs)
                moved = math.acos(min(1.0, max(-1.0, c)))
                reach += moved * (1.0 + _REACH_SHARE) + _REACH_PAD_RAD
            prev_pos[s, 0] = x
            prev_pos[s, 1] = y
            prev_pos[s, 2] = z
            prev_pos[s, 4] = vx
            prev_pos[s, 5] = vy
            prev_pos[s, 6] = vz
            if lam < 0.0 and i == 0:
                continue
            psi_s = math.asin(z / rs)
            lo = np.searchsorted(psi, psi_s - reach)
            hi = np.searchsorted(psi, psi_s + reach, side="right")
            cos_reach = math.cos(min(reach, math.pi))
            sx = x / rs
            sy = y / rs
            sz = z / rs
            for t in range(lo, hi):
                if ux[t] * sx + uy[t] * sy + uz[t] * sz < cos_reach:
                    continue
                lims = row_thresholds(x, y, z, vx, vy, vz, rho[t], zc[t], sin_lat[t],
                                      cos_lat[t], sin_el, cos_eta, range_lim, refine)
                xp = cos_lon[t] * x + sin_lon[t] * y
                dxp = cos_lon[t] * vx + sin_lon[t] * vy
                in1 = True
                for k in range(3):
                    thr = lims[0] if k == 0 else (lims[2] if k == 1 else lims[4])
                    rate = lims[1] if k == 0 else (lims[3] if k == 1 else lims[5])
                    if thr <= NO_LIMIT_KM:
                        work[6 + 2 * k] = NO_LIMIT_KM
                        work[7 + 2 * k] = 0.0
                    else:
                        work[6 + 2 * k] = xp - thr
                        work[7 + 2 * k] = dxp - rate
                        if xp < thr:
                            in1 = False
                last = pairs[s, t, 6]
                if i > 0 and last != i - 1:
                    # newly in reach: its margins at the previous sample, from the
                    # satellite's state there (a pass may begin within the step)
                    lp = row_thresholds(px, py, pz, pvx, pvy, pvz, rho[t], zc[t], sin_lat[t],
                                        cos_lat[t], sin_el, cos_eta, range_lim, refine)
                    xq = cos_lon[t] * px + sin_lon[t] * py
                    dxq = cos_lon[t] * pvx + sin_lon[t] * pvy
                    for k in range(3):
                        thr = lp[0] if k == 0 else (lp[2] if k == 1 else lp[4])
                        rate = lp[1] if k == 0 else (lp[3] if k == 1 else lp[5])
                        pairs[s, t, 2 * k] = NO_LIMIT_KM if thr <= NO_LIMIT_KM else xq - thr
                        pairs[s, t, 2 * k + 1] = 0.0 if thr <= NO_LIMIT_KM else dxq - rate
                    last = i - 1
                if last == i - 1:
                    in0 = True
                    for k in range(6):
                        work[k] = pairs[s, t, k]
                    for k in range(3):
                        if NO_LIMIT_KM < work[2 * k] < 0.0:
                            in0 = False
                    if refine:
                        _solve_step(out, n_out, t, s, work, step_s, float(i - 1), in0, in1,
                                    several)
                    elif in0 != in1:
                        _push(out, n_out, t, s, float(i), 1.0 if in1 else -1.0)
                elif in1:  # in view at the span's start
                    _push(out, n_out, t, s, float(i), 1.0)
                for k in range(6):
                    pairs[s, t, k] = work[6 + k]
                pairs[s, t, 6] = i
    return n_site
