"""Point targets: every pass of every satellite over each site, and per-site statistics.

A target is a site (geodetic latitude, longitude, height on WGS 84) evaluated exactly at its
position, not on the grid. :func:`evaluate_targets` propagates the constellation block by
block (as the coverage engine does) and streams the blocks through the compiled
:func:`covergrid.compute.target_kernel.target_events` over chunks of sites in threads; the
rise and set times use the same visibility limits (the study's :class:`Sensor`) and the
same refinement between samples as the coverage kernel (continuous time by default).

A pass is one satellite's interval in view over one site: rise, set, duration, and the
maximum elevation with its time, found by golden-section search (Kiefer, "Sequential
minimax search for a maximum", Proc. AMS 4, 1953; common practice) on the elevation from
the propagated orbit itself at any time within the pass (not interpolated), to 1e-3 s.
A pass in view at the span's start or end is cut there (flagged in ``passes.csv``).

Per-site statistics follow the grid's conventions (:mod:`covergrid.compute.metrics`): the
union of all passes is the time in view; gaps are its complement within the span (truncated
at its edges); coverage fraction ``(T - sum g) / T``, maximum and mean gap, mean response
time ``sum g^2 / (2 T)`` (Wertz and Larson, *Space Mission Analysis and Design*, 3rd ed.,
sec. 7.2), and the number of passes (every satellite's, as the grid's ``pass_count``).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

import numpy as np

from covergrid.compute.sensor import Sensor
from covergrid.compute.span import count_steps, position_block_length
from covergrid.constants import WGS84_A_KM, WGS84_E2
from covergrid.errors import CovergridError

__all__ = ["PASS_COLUMNS", "TARGET_METRICS", "Targets", "evaluate_targets", "pass_statistics",
           "target_verdict"]

#: Per-target metrics: (units, long name).
TARGET_METRICS = {
    "coverage_fraction": ("1", "fraction of the span with at least one satellite in view"),
    "max_gap": ("s", "longest gap in coverage"),
    "mean_gap": ("s", "mean gap length"),
    "mean_response_time": ("s", "mean response time (sum of squared gaps / 2T)"),
    "pass_count": ("1", "passes of all satellites"),
}
#: Columns of the pass list (passes.csv).
PASS_COLUMNS = ("target", "satellite", "rise", "set", "duration_s", "max_elevation_deg",
                "max_elevation_time", "cut_at_start", "cut_at_end")
#: Sites per compiled call (chunks run in threads; the kernel releases the GIL).
_SITES_PER_CHUNK = 256
#: Golden-section stopping width [s].
_PEAK_TOL_S = 1e-3


@dataclass(frozen=True)
class Targets:
    """Point targets (names unique; lat/lon [deg], altitude [m] above WGS 84)."""

    names: tuple[str, ...]
    lat_deg: tuple[float, ...]
    lon_deg: tuple[float, ...]
    altitude_m: tuple[float, ...]

    def __post_init__(self) -> None:
        n = len(self.names)
        if not (len(self.lat_deg) == len(self.lon_deg) == len(self.altitude_m) == n) or n == 0:
            raise CovergridError("names, lat_deg, lon_deg and altitude_m must have one "
                                 "entry per target (at least one)", "targets")
        if len(set(self.names)) != n:
            raise CovergridError("target names must be unique", "targets")
        lat = np.asarray(self.lat_deg)
        if not np.all(np.abs(lat) <= 90.0):
            raise CovergridError("latitudes must be within [-90, 90] deg", "targets")

    def __len__(self) -> int:
        return len(self.names)

    def ecef_km(self) -> tuple[np.ndarray, np.ndarray]:
        """Earth-fixed positions (n, 3) [km] and unit normals (n, 3) of the sites (geodetic
        to Earth-fixed on WGS 84; e.g. Vallado, *Fundamentals of Astrodynamics and
        Applications*, 4th ed., Algorithm 51, from memory)."""
        lat = np.radians(np.asarray(self.lat_deg, float))
        lon = np.radians(np.asarray(self.lon_deg, float))
        h = np.asarray(self.altitude_m, float) / 1000.0
        n = WGS84_A_KM / np.sqrt(1.0 - WGS84_E2 * np.sin(lat) ** 2)
        normal = np.stack([np.cos(lat) * np.cos(lon), np.cos(lat) * np.sin(lon), np.sin(lat)],
                          axis=-1)
        pos = np.stack([(n + h) * np.cos(lat) * np.cos(lon), (n + h) * np.cos(lat) * np.sin(lon),
                        (n * (1.0 - WGS84_E2) + h) * np.sin(lat)], axis=-1)
        return pos, normal


def evaluate_targets(elements: Any, theta0_rad: float, duration_s: float, step_s: float,
                     targets: Targets, sensor: Sensor, refine: bool = True,
                     progress: bool = False) -> dict[str, Any]:
    """Every pass over every target and the per-target statistics.

    Parameters
    ----------
    elements : ElementSet
        Mean elements at the epoch [km, rad].
    theta0_rad : float
        Earth rotation angle at the epoch [rad] (:func:`covergrid.earth.time.gmst_rad`).
    duration_s, step_s : float
        Span and sample spacing [s] (a whole number of steps).
    targets : Targets
        The sites.
    sensor : Sensor
        Visibility limits (the grid's).
    refine : bool
        Continuous time (the default; crossing times between samples) or sample and hold.
    progress : bool
        A progress bar over the blocks of samples (stderr).

    Returns
    -------
    dict
        ``passes``: dict of arrays (:data:`PASS_COLUMNS`; ``target`` and ``satellite`` as
        indices; times in seconds from the epoch), and ``stats``: dict of per-target arrays
        (:data:`TARGET_METRICS`).
    """
    n_steps = count_steps(duration_s, step_s)
    room = 4096
    while True:
        events, needed = _events(elements, theta0_rad, n_steps, step_s, targets, sensor,
                                 refine, room, progress)
        if needed <= room:
            break
        room = needed * 2
    t_end = float(n_steps)
    passes = _pair_up(events, t_end, step_s)
    passes.update(_peaks(elements, theta0_rad, targets, passes))
    stats = pass_statistics(passes, len(targets), n_steps * step_s)
    return {"passes": passes, "stats": stats}


def _events(elements: Any, theta0: float, n_steps: int, step_s: float, targets: Targets,
            sensor: Sensor, refine: bool, room: int, progress: bool) -> tuple[np.ndarray, int]:
    """All events (site, satellite, time [samples], kind) in original site order, and the
    number there were (more than ``room`` per chunk: run again)."""
    from concurrent.futures import ThreadPoolExecutor

    from covergrid.compute.target_kernel import PAIR_COLUMNS, target_events
    from covergrid.orbits import j2

    pos_t, normal = targets.ecef_km()
    lat = np.radians(np.asarray(targets.lat_deg, float))
    lon = np.radians(np.asarray(targets.lon_deg, float))
    rho = np.hypot(pos_t[:, 0], pos_t[:, 1])
    psi = np.arctan2(pos_t[:, 2], rho)
    order = np.argsort(psi, kind="stable")
    n_sat = len(elements.a_km)
    el_min, eta_max, range_max = sensor.kernel_args()
    chunks: list[dict[str, Any]] = []
    for c0 in range(0, len(order), _SITES_PER_CHUNK):
        idx = order[c0: c0 + _SITES_PER_CHUNK]
        u = pos_t[idx] / np.linalg.norm(pos_t[idx], axis=1)[:, None]
        geo = [np.ascontiguousarray(a) for a in (
            rho[idx], pos_t[idx, 2], np.sin(lat[idx]), np.cos(lat[idx]), np.cos(lon[idx]),
            np.sin(lon[idx]), psi[idx], u[:, 0], u[:, 1], u[:, 2])]
        pairs = np.zeros((n_sat, len(idx), PAIR_COLUMNS))
        pairs[:, :, 6] = -2.0
        chunks.append({"idx": idx, "geo": geo, "pairs": pairs, "prev": np.zeros((n_sat, 7)),
                       "work": np.zeros(24), "out": np.zeros((room, 4)),
                       "n": np.zeros(1, np.int64)})
    n_samples = n_steps + 1 if refine else n_steps
    block = position_block_length(n_sat, n_samples, with_velocity=True)
    workers = max(1, min(len(chunks), _cpus()))
    bar = None
    if progress:
        from tqdm import tqdm

        bar = tqdm(total=n_samples, desc="targets", unit="sample", leave=False)

    def run(ch: dict, pos: np.ndarray, vel: np.ndarray, i0: int) -> None:
        target_events(pos, vel, i0, *ch["geo"], el_min, eta_max, range_max, bool(refine),
                      float(step_s), ch["pairs"], ch["prev"], ch["work"], ch["out"], ch["n"])

    with ThreadPoolExecutor(workers) as pool:
        for i0 in range(0, n_samples, block):
            nb = min(block, n_samples - i0)
            t = (i0 + np.arange(nb)) * step_s
            pos, vel = j2.propagate_to_ecef_with_velocity(elements, t, theta0)
            list(pool.map(lambda ch: run(ch, pos, vel, i0), chunks))  # noqa: B023
            if bar is not None:
                bar.update(nb)
    if bar is not None:
        bar.close()
    needed = max(int(ch["n"][0]) for ch in chunks)
    rows = []
    for ch in chunks:
        ev = ch["out"][: min(int(ch["n"][0]), room)].copy()
        ev[:, 0] = ch["idx"][ev[:, 0].astype(np.int64)]
        rows.append(ev)
    return np.concatenate(rows) if rows else np.zeros((0, 4)), needed


def _cpus() -> int:
    import os

    try:
        return len(os.sched_getaffinity(0))
    except AttributeError:  # not on Linux
        return os.cpu_count() or 1


def _pair_up(events: np.ndarray, t_end: float, step_s: float) -> dict[str, np.ndarray]:
    """Passes from the events: each (site, satellite) alternates rise, set in time order;
    one still in view at the end is set at the end (``t_end`` [samples])."""
    site = events[:, 0].astype(np.int64)
    sat = events[:, 1].astype(np.int64)
    t = events[:, 2]
    kind = events[:, 3]
    order = np.lexsort((-kind, t, sat, site))  # rises before sets at equal times
    site, sat, t, kind = site[order], sat[order], t[order], kind[order]
    rises = np.flatnonzero(kind > 0)
    # the event after a rise of the same pair is its set; none: in view at the end
    nxt = rises + 1
    has_set = (nxt < t.size)
    has_set[has_set] &= (site[nxt[has_set]] == site[rises[has_set]]) & (
        sat[nxt[has_set]] == sat[rises[has_set]]) & (kind[nxt[has_set]] < 0)
    rise = t[rises]
    sets = np.where(has_set, t[np.minimum(nxt, t.size - 1)] if t.size else 0.0, t_end)
    return {"target": site[rises], "satellite": sat[rises], "rise": rise * step_s,
            "set": sets * step_s, "duration_s": (sets - rise) * step_s,
            "cut_at_start": rise <= 0.0, "cut_at_end": ~has_set}


def _peaks(elements: Any, theta0: float, targets: Targets,
           passes: dict[str, np.ndarray]) -> dict[str, np.ndarray]:
    """Maximum elevation of every pass and its time (golden section; see the module)."""
    from covergrid.orbits import j2

    n = passes["rise"].size
    if n == 0:
        return {"max_elevation_deg": np.zeros(0), "max_elevation_time": np.zeros(0)}
    pos_t, normal = targets.ecef_km()
    p = pos_t[passes["target"]]
    nrm = normal[passes["target"]]
    sat = passes["satellite"]

    def sin_el(t: np.ndarray) -> np.ndarray:
        d = j2.ecef_positions_at(elements, sat, t, theta0) - p
        return np.einsum("ij,ij->i", d, nrm) / np.linalg.norm(d, axis=1)

    a = passes["rise"].astype(float).copy()
    b = passes["set"].astype(float).copy()
    g = (math.sqrt(5.0) - 1.0) / 2.0
    c = b - g * (b - a)
    d = a + g * (b - a)
    fc, fd = sin_el(c), sin_el(d)
    width = float(np.max(b - a))
    iterations = 0 if width <= _PEAK_TOL_S else int(
        math.ceil(math.log(_PEAK_TOL_S / width) / math.log(g)))
    for _ in range(iterations):
        left = fc > fd  # the maximum lies in [a, d]
        b = np.where(left, d, b)
        a = np.where(left, a, c)
        d_new = np.where(left, c, a + g * (b - a))
        c_new = np.where(left, b - g * (b - a), d)
        # one new evaluation per pass: where left, c is new; else d is new
        t_new = np.where(left, c_new, d_new)
        f_new = sin_el(t_new)
        fc, fd = np.where(left, f_new, fd), np.where(left, fc, f_new)
        c, d = c_new, d_new
    t_best = 0.5 * (a + b)
    # the ends (a pass cut by the span, or a monotone one) may be higher than the interior
    cands = np.stack([passes["rise"], t_best, passes["set"]])
    vals = np.stack([sin_el(x) for x in cands])
    k = np.argmax(vals, axis=0)
    pick = np.arange(n)
    return {"max_elevation_deg": np.degrees(np.arcsin(np.clip(vals[k, pick], -1.0, 1.0))),
            "max_elevation_time": cands[k, pick]}


def pass_statistics(passes: dict[str, np.ndarray], n_targets: int,
                    span_s: float) -> dict[str, np.ndarray]:
    """Per-target metrics (:data:`TARGET_METRICS`) from the pass list (see the module
    notes: the union of the passes, gaps within the span)."""
    out = {m: np.zeros(n_targets) for m in TARGET_METRICS}
    tgt = passes["target"]
    order = np.lexsort((passes["rise"], tgt))
    tgt, rise, sets = tgt[order], passes["rise"][order], passes["set"][order]
    bounds = np.searchsorted(tgt, np.arange(n_targets + 1))
    for k in range(n_targets):
        r = rise[bounds[k]: bounds[k + 1]]
        s = sets[bounds[k]: bounds[k + 1]]
        # union of intervals: the running latest set; a gap opens where a rise comes after it
        covered_to = np.maximum.accumulate(s) if s.size else s
        prev_end = np.concatenate([[0.0], covered_to])
        starts = np.concatenate([r, [span_s]])
        gaps = starts - prev_end
        gaps = gaps[gaps > 0.0]
        total = float(gaps.sum())
        out["coverage_fraction"][k] = (span_s - total) / span_s
        out["max_gap"][k] = float(gaps.max()) if gaps.size else 0.0
        out["mean_gap"][k] = total / gaps.size if gaps.size else 0.0
        out["mean_response_time"][k] = float(np.sum(gaps * gaps)) / (2.0 * span_s)
        out["pass_count"][k] = r.size
    return out


def target_verdict(stats: dict[str, np.ndarray], metric: str, *, at_most: float | None = None,
                   at_least: float | None = None, share: float = 1.0) -> dict[str, Any]:
    """Whether a per-target metric meets a threshold at at least a share of the targets.

    ``achieved`` is the value met by that share (the ``share`` quantile of the targets'
    values for ``at_most``, the ``1 - share`` one for ``at_least``; Hyndman and Fan's
    definition 1, as the grid's verdict with equal weights); ``share_met`` the share of
    targets meeting the threshold.
    """
    from covergrid.compute.summary import weighted_quantile

    x = np.asarray(stats[metric], float)
    w = np.ones_like(x)
    if at_most is not None:
        achieved = float(weighted_quantile(x, w, share))
        met_each = x <= at_most
        margin = at_most - achieved
        sense, threshold = "at_most", float(at_most)
    else:
        assert at_least is not None
        achieved = -float(weighted_quantile(-x, w, share))
        met_each = x >= at_least
        margin = achieved - at_least
        sense, threshold = "at_least", float(at_least)
    return {"metric": metric, "sense": sense, "threshold": threshold, "share": float(share),
            "achieved": achieved, "margin": float(margin), "met": bool(margin >= 0.0),
            "share_met": float(met_each.mean()), "units": TARGET_METRICS[metric][0]}
