"""The daylight constraint of the coverage kernel: sunrise and sunset of every cell as events.

With a daylight threshold ``h0`` a cell counts as seen only while the Sun's centre is at
or above ``h0`` over its horizon (the plane normal to the ellipsoid normal). Whether a cell
is in daylight does not depend on the satellites, so it is kept per cell as a gate
(:data:`covergrid.compute.kernel_state.DAY`) in front of the in-view count: the
satellites' rises and sets change the geometric count (``N_GEO``) at all times, and the
count the metrics see (``N_CUR``) is that count in daylight and zero at night. Sunrise and
sunset are events in the sample's queue like a satellite's rise and set
(:func:`covergrid.compute.cell_events.apply_event`, change ``+DAY_EVENT`` or
``-DAY_EVENT``), applied in time order with them, so a pass that straddles sunset ends at
sunset and one that straddles sunrise begins at it.

Method
------
The Sun's elevation ``h`` at a cell follows from the Earth-fixed unit vector from the cell
to the Sun (low-precision Astronomical Almanac position, :mod:`covergrid.earth.sun`,
parallax kept): ``sin h = up . s``. The margin ``m = sin h - sin h0`` is evaluated exactly
at the cells that may change between two samples: on a row of geodetic latitude ``phi``
the daylit cells are, to the Sun's parallax, those with ``cos(lon - lon_sun) >= (sin h0 -
sin(phi) s_z) / (cos(phi) s_xy)`` (spherical trigonometry of the solar hour angle, e.g.
Meeus, *Astronomical Algorithms*, 2nd ed., ch. 13 and 15, from memory): one longitude
interval centred on the subsolar longitude, whose edges (the terminator at ``h0``) move by
about 0.25 deg a minute. The cells between an edge's positions at the two samples, widened
by a column, are examined; a whole row where the interval is empty or the whole circle at
either sample. With ``refine`` the crossing time is the root of the margin's linear
interpolation between the samples (the margin varies with the Earth's rotation, a period of
one day: over a 60 s step the interpolation's timing error is below 0.01 s); otherwise the
change takes effect at the sample (sample and hold).
"""

from __future__ import annotations

import math

from covergrid.compute.cell_events import apply_event, push_event
from covergrid.compute.jit import kernel_function, kernel_helper
from covergrid.compute.kernel_state import DAY, DAY_EVENT, DAY_QUEUED

__all__ = ["daylight_events", "daylight_start"]


@kernel_helper
def _margin(sx, sy, sz, rho, zc, cl, sl, cos_l, sin_l, sin_h0):
    """sin(Sun elevation) - sin(h0) at a cell (centre rho cos l, rho sin l, zc), the Sun at
    (sx, sy, sz) [km] Earth-fixed."""
    dx = sx - rho * cos_l
    dy = sy - rho * sin_l
    dz = sz - zc
    up = cl * (dx * cos_l + dy * sin_l) + sl * dz
    return up / math.sqrt(dx * dx + dy * dy + dz * dz) - sin_h0


@kernel_helper
def _half_width(sx, sy, sz, cl, sl, sin_h0):
    """Half-width of a row's daylit longitudes about the subsolar longitude [rad]: 0 when
    no cell is daylit, pi when every cell is (to the parallax)."""
    r = math.sqrt(sx * sx + sy * sy + sz * sz)
    s_xy = math.sqrt(sx * sx + sy * sy) / r
    den = cl * s_xy
    num = sin_h0 - sl * sz / r
    if den <= 1e-12:
        return math.pi if num <= 0.0 else 0.0
    c = num / den
    if c >= 1.0:
        return 0.0
    if c <= -1.0:
        return math.pi
    return math.acos(c)


@kernel_function
def daylight_start(acc, heads, sun_x, sun_y, sun_z, rho, zr, sin_lat, cos_lat, cos_lon,
                   sin_lon, n_win, masked, sin_h0):
    """Set every cell's daylight gate at the span's start (before any event). The band's
    cells are the first ``n_win`` columns of each row (cell ``r * n_win + j``); with
    ``masked`` a cell outside the region (queue head -1) is left as allocated."""
    for r in range(rho.shape[0]):
        for j in range(n_win):
            c = r * n_win + j
            if masked and heads[c] < 0.0:
                continue
            m = _margin(sun_x, sun_y, sun_z, rho[r], zr[r], cos_lat[r], sin_lat[r], cos_lon[j],
                        sin_lon[j], sin_h0)
            acc[c, DAY] = 1.0 if m >= 0.0 else 0.0
            acc[c, DAY_QUEUED] = acc[c, DAY]


@kernel_helper
def _edge_columns(lon_a, lon_b, lon0, dlon, n_lon):
    """First column and count of the columns whose centres lie within [lon_a, lon_b] widened
    by one column each side (at most every column)."""
    j_a = int(math.floor((lon_a - lon0) / dlon - 0.5)) - 1
    j_b = int(math.floor((lon_b - lon0) / dlon - 0.5)) + 2
    return j_a, min(j_b - j_a + 1, n_lon)


@kernel_function
def daylight_events(acc, heads, events, prev_sun, sun_x, sun_y, sun_z, rho, zr, sin_lat,
                    cos_lat, cos_lon, sin_lon, lon0, dlon, n_lon, n_win, masked, sin_h0, refine,
                    t_sample, kmax):
    """Queue the sunrises and sunsets of the band's cells between the previous sample (Sun
    at ``prev_sun``) and this one (Sun at ``sun_*``), at time ``t_sample`` [samples].

    Called before the satellites of the sample are processed. Sampled (without ``refine``),
    a sunset is applied at once, before the sample's arrivals (which the kernel applies as
    it finds them), and a sunrise is queued, after the sample's departures: a satellite
    that rises at a sunset, or sets at a sunrise, is not counted in daylight. Columns are
    counted round the circle (``n_lon`` from ``lon0``); only the first ``n_win`` are cells
    (cell ``r * n_win + j``), and with ``masked`` a cell outside the region is skipped."""
    px = prev_sun[0]
    py = prev_sun[1]
    pz = prev_sun[2]
    lon_p = math.atan2(py, px)
    lon_s = math.atan2(sun_y, sun_x)
    d_lon = lon_s - lon_p
    lon_s = lon_p + d_lon - 2.0 * math.pi * math.floor(d_lon / (2.0 * math.pi) + 0.5)
    for r in range(rho.shape[0]):
        cl = cos_lat[r]
        sl = sin_lat[r]
        w_p = _half_width(px, py, pz, cl, sl, sin_h0)
        w_s = _half_width(sun_x, sun_y, sun_z, cl, sl, sin_h0)
        base = r * n_win
        for edge in range(2):
            if w_p <= 0.0 or w_s <= 0.0 or w_p >= math.pi or w_s >= math.pi:
                if edge == 1:
                    break
                j_first, count = 0, n_lon  # the interval appears, vanishes or fills the row
            else:
                sign = -1.0 if edge == 0 else 1.0
                e_p = lon_p + sign * w_p
                e_s = lon_s + sign * w_s
                j_first, count = _edge_columns(min(e_p, e_s), max(e_p, e_s), lon0, dlon, n_lon)
            for m in range(count):
                j = (j_first + m) % n_lon
                if j >= n_win:
                    continue  # beyond the grid's longitude window
                c = base + j
                if masked and heads[c] < 0.0:
                    continue  # outside the region
                m1 = _margin(sun_x, sun_y, sun_z, rho[r], zr[r], cl, sl, cos_lon[j], sin_lon[j],
                             sin_h0)
                day_now = m1 >= 0.0
                if day_now == (acc[c, DAY_QUEUED] != 0.0):
                    continue  # no change (or examined already from the other edge)
                t = t_sample
                if refine:
                    m0 = _margin(px, py, pz, rho[r], zr[r], cl, sl, cos_lon[j], sin_lon[j],
                                 sin_h0)
                    if m0 != m1:
                        f = m0 / (m0 - m1)
                        t = t_sample - 1.0 + min(max(f, 0.0), 1.0)
                if refine or day_now:
                    push_event(heads, events, c, t, DAY_EVENT if day_now else -DAY_EVENT)
                else:
                    apply_event(acc, c, t, -DAY_EVENT, kmax)
                acc[c, DAY_QUEUED] = 1.0 if day_now else 0.0
    prev_sun[0] = sun_x
    prev_sun[1] = sun_y
    prev_sun[2] = sun_z
