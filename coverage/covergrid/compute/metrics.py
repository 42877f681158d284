"""What each per-cell coverage metric means, its units and CF attributes.

This module is the one place where a metric is defined. The kernel
(:mod:`covergrid.compute.kernel`) produces raw per-cell accumulators; :func:`finalise` turns
them into the metrics below; the engine attaches the attributes from :data:`METRICS`;
summaries, requirement checks and maps look metrics up here.

Time convention
---------------
A study spans ``T = N * step_s`` seconds, sampled at ``t_i = i * step_s``.

With ``refine_transitions=True`` (the default) the kernel works in continuous time on
``[0, T]``, samples ``t_0 .. t_N`` included: a satellite rises over a cell or sets at the
time its visibility margin crosses zero, found between two samples from the cubic Hermite
interpolant of the margin through its values and rates at the samples (positions and
Earth-fixed velocities of the satellite, the row's limit thresholds and their rates; see
:mod:`covergrid.compute.kernel`). A pass that begins and ends between two samples is found
and timed, and so is a brief loss of a satellite within a pass; a cell's changes within a
step are applied in time order, so a hand-over between two satellites opens a gap exactly
when the first leaves before the second arrives. Every metric is an integral over these
times: ``coverage_fraction`` is ``(T - sum of gaps) / T``, the level histogram behind
``nfold_fraction``, ``min/mean/max_in_view`` is time-weighted, passes are counted with the
sub-step ones and their durations are refined. Accuracy, measured against sampling at 1 s,
0.25 s and 0.1 s (tests/test_kernel_passes.py; README, Model limits): at steps up to 60 s in
LEO gap statistics agree with the fine sampling to its own resolution. The interpolated
position's error grows as the fourth power of the step (about r (omega h)^4 / 384, 0.3 m at
60 s and 5 m at 120 s in LEO), so a grazing pass that rises less than about 0.001 deg above
the mask (a second or two long) can be missed at 120 s.

With ``refine_transitions=False`` who is in view is found at the samples ``t_0 .. t_(N-1)``
and held until the next (sample and hold): every duration is good to one step, a pass or
gap shorter than a step can be missed, and the values are those of the brute-force
reference in the tests exactly.

Gaps at the edges of the span
-----------------------------
A gap is a maximal interval with no satellite in view (of samples, when sampled). A gap
that touches the start or the end of the span is counted as a gap with its length inside
the span (it is truncated, not dropped and not extended). A cell that is never seen has
exactly one gap, of length ``T``. This is the convention of the time-based statistics in
Wertz and Larson (below): every statistic is taken over the analysis span only.

References
----------
.. [1] J. R. Wertz and W. J. Larson (eds.), *Space Mission Analysis and Design*, 3rd ed.,
       Microcosm Press / Kluwer, 1999, sec. 7.2 (coverage figures of merit: percent coverage,
       maximum gap, mean gap, time-average gap, mean response time). Definitions from memory.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

SMAD = "Wertz and Larson, Space Mission Analysis and Design, 3rd ed., sec. 7.2"

#: The model's limits, written into every output (netCDF comment, summary.json) and shown in
#: every figure's footer in short.
MODEL_LIMITS = (
    "Design-study result, not for operations or safety-of-life use. Model: mean elements with "
    "secular J2 only (no drag, no short-period or higher-order gravity terms, no third bodies), "
    "sidereal-angle-only Earth rotation, geometric visibility of cell centres on the WGS 84 "
    "ellipsoid (no terrain, refraction or pointing), visibility between samples interpolated "
    "(continuous time; sample-and-hold when refine_transitions is false). Verify final "
    "designs with higher-fidelity analysis and by licensed, qualified practice."
)


@dataclass(frozen=True)
class MetricInfo:
    """Definition of one output metric.

    Attributes
    ----------
    name : str
        Variable name in the Dataset and in study files.
    units : str
        UDUNITS string (``"s"``, ``"1"``).
    long_name : str
        Human label for axes and colour bars.
    definition : str
        One-sentence definition (also written as the netCDF ``comment``).
    source : str
        Where the definition comes from ("common practice" if none).
    better : str
        ``"lower"`` or ``"higher"``: which direction meets a requirement more easily.
    kind : str
        ``"fraction"``, ``"duration"``, ``"count"``, ``"level"`` (number of satellites) or
        ``"dop"`` (a dilution of precision).
    group : str
        ``"coverage"`` (the coverage kernel's, always computed) or ``"dop"`` (computed with a
        study's ``dop:`` section, :mod:`covergrid.compute.dop`).
    """

    name: str
    units: str
    long_name: str
    definition: str
    source: str
    better: str
    kind: str
    cell_methods: str = "time: point"
    group: str = "coverage"

    def attrs(self) -> dict[str, str]:
        """CF attributes of the variable."""
        return {
            "units": self.units,
            "long_name": self.long_name,
            "comment": f"{self.definition} Source: {self.source}.",
            "coverage_content_type": "modelResult",
        }


_M = MetricInfo
METRICS: dict[str, MetricInfo] = {
    m.name: m
    for m in (
        _M("coverage_fraction", "1", "coverage fraction",
           "Fraction of the span with at least one satellite in view (percent coverage / 100).",
           SMAD, "higher", "fraction"),
        _M("max_gap", "s", "maximum gap",
           "Longest interval with no satellite in view; gaps at the span edges are truncated "
           "to the span; a never-seen cell has one gap equal to the span.",
           SMAD, "lower", "duration"),
        _M("mean_gap", "s", "mean gap",
           "Sum of gap durations divided by the number of gaps (0 where there is no gap).",
           SMAD, "lower", "duration"),
        _M("gap_count", "1", "number of gaps",
           "Number of maximal intervals with no satellite in view, edge gaps included.",
           SMAD, "lower", "count"),
        _M("time_average_gap", "s", "time-average gap",
           "Sum of squared gap durations divided by the span: the mean length of the gap a "
           "random instant falls in, averaged over all instants (covered instants count 0).",
           SMAD, "lower", "duration"),
        _M("mean_response_time", "s", "mean response time",
           "Sum of squared gap durations divided by twice the span: the mean wait from a "
           "random instant until a satellite is in view (0 for covered instants).",
           SMAD, "lower", "duration"),
        _M("pass_count", "1", "number of passes",
           "Number of single-satellite visibility intervals (passes) that start in the span; "
           "a satellite already in view at the start counts as one pass.",
           "common practice", "higher", "count"),
        _M("mean_pass_duration", "s", "mean pass duration",
           "Total single-satellite time in view divided by the number of passes (0 where "
           "there is no pass); passes at the span edges are truncated.",
           "common practice", "higher", "duration"),
        _M("min_in_view", "1", "minimum satellites in view",
           "Smallest number of satellites simultaneously in view over the span.",
           "common practice", "higher", "level"),
        _M("mean_in_view", "1", "mean satellites in view",
           "Time-average number of satellites simultaneously in view.",
           "common practice", "higher", "level"),
        _M("max_in_view", "1", "maximum satellites in view",
           "Largest number of satellites simultaneously in view over the span.",
           "common practice", "higher", "level"),
        _M("nfold_fraction", "1", "fraction of time with at least k satellites in view",
           "Fraction of the span with at least k satellites simultaneously in view "
           "(k-fold coverage); k = 1 equals coverage_fraction.",
           "common practice", "higher", "fraction"),
    )
}

#: The dilutions of precision (geometric, position, horizontal, vertical, time).
DOP_KINDS = ("gdop", "pdop", "hdop", "vdop", "tdop")
_DOP_NAMES = {"gdop": "GDOP", "pdop": "PDOP", "hdop": "HDOP", "vdop": "VDOP", "tdop": "TDOP"}
DOP_SOURCE = ("Kaplan and Hegarty, Understanding GPS: Principles and Applications, 2nd ed., "
              "sec. 7.3.1 (from memory)")
for _k in DOP_KINDS:
    _n = _DOP_NAMES[_k]
    for _m in (
        _M(f"max_{_k}", "1", f"maximum {_n}",
           f"Largest {_n} over the sampled span from the satellites in view (infinite when "
           "fewer than four are in view or their geometry is singular at any sample).",
           DOP_SOURCE, "lower", "dop", group="dop"),
        _M(f"mean_{_k}", "1", f"time-mean {_n}",
           f"Mean of {_n} over the samples where it is finite (NaN if none).",
           DOP_SOURCE, "lower", "dop", group="dop"),
        _M(f"p95_{_k}", "1", f"95th percentile of {_n} over time",
           f"{_n} not exceeded at 95 % of the samples (outages count as infinite), from a "
           "per-cell histogram: never below the sampled value, at most 1.6 % above it.",
           DOP_SOURCE, "lower", "dop", group="dop"),
    ):
        METRICS[_m.name] = _m
METRICS["pdop_fraction"] = _M(
    "pdop_fraction", "1", "fraction of time with PDOP at or below the threshold",
    "Fraction of the sampled span with at least four satellites in view and PDOP at or below "
    "the study's dop.pdop_threshold.", "common practice", "higher", "fraction", group="dop")
METRICS["no_fix_fraction"] = _M(
    "no_fix_fraction", "1", "fraction of time with fewer than four satellites in view",
    "Fraction of the sampled span with fewer than four satellites in view (no position fix).",
    "common practice", "lower", "fraction", group="dop")
#: Metrics computed with a ``dop:`` section, in the order of the engine's output stack.
DOP_METRICS = tuple(m for m in METRICS if METRICS[m].group == "dop")
#: Metrics the coverage kernel always computes.
COVERAGE_METRICS = tuple(m for m in METRICS if METRICS[m].group == "coverage")

#: Metrics that are integers per cell.
INTEGER_METRICS = frozenset({"gap_count", "pass_count", "min_in_view", "max_in_view"})


def metric_info(name: str) -> MetricInfo:
    """Look up a metric by name; unknown names raise ValueError listing the valid ones."""
    try:
        return METRICS[name]
    except KeyError:
        raise ValueError(
            f"unknown metric {name!r}; valid metrics: {', '.join(METRICS)}"
        ) from None


def finalise(acc: dict[str, np.ndarray], n_steps: int, step_s: float) -> dict[str, np.ndarray]:
    """Turn raw per-cell accumulators into metrics.

    Parameters
    ----------
    acc : dict of ndarray
        Output of :func:`covergrid.compute.kernel_state.new_state` after the kernel has run
        and been closed out: ``hist`` (n_cell, K+1) time spent at each in-view level
        (last bin: K or more), ``sum_n`` (n_cell,) time integral of the count in view,
        ``min_n``, ``max_n``, ``gap_count``, ``sum_gap``, ``sum_gap2`` [samples,
        samples^2], ``max_gap`` [samples], ``pass_count``; times are in (fractional)
        samples, whole ones when sampled.
    n_steps : int
        Number of samples N in the span [unitless].
    step_s : float
        Sample spacing [s].

    Returns
    -------
    dict of ndarray
        One array per metric of :data:`METRICS`, shape (n_cell,) except ``nfold_fraction``
        (K, n_cell). Durations in seconds.

    Notes
    -----
    With gaps :math:`g_1..g_G` over the span :math:`T` (Wertz and Larson, sec. 7.2):

    .. math::

        \\text{coverage} = (T - \\sum g)/T, \\quad
        \\text{time-average gap} = \\sum g^2 / T, \\quad
        \\text{mean response time} = \\sum g^2 / (2T).
    """
    n = float(n_steps)
    hist = acc["hist"]
    gap_count = acc["gap_count"]
    pass_count = acc["pass_count"]
    with np.errstate(invalid="ignore", divide="ignore"):
        mean_gap = np.where(gap_count > 0, acc["sum_gap"] / np.maximum(gap_count, 1), 0.0)
        mean_pass = np.where(pass_count > 0, acc["sum_n"] / np.maximum(pass_count, 1), 0.0)
    # at-least-k fractions: reverse cumulative sum of the level histogram
    at_least = np.cumsum(hist[:, ::-1], axis=1)[:, ::-1]  # at_least[:, m] = samples with >= m
    tag = acc["sum_gap2"] * step_s / n
    return {
        # from the level histogram, like the k-fold fractions: coverage_fraction ==
        # nfold_fraction(k=1) exactly, and == (T - sum of gaps) / T to rounding
        "coverage_fraction": at_least[:, 1] / n,
        "max_gap": acc["max_gap"] * step_s,
        "mean_gap": mean_gap * step_s,
        "gap_count": gap_count.astype(np.int32),
        "time_average_gap": tag,
        "mean_response_time": 0.5 * tag,
        "pass_count": pass_count.astype(np.int32),
        "mean_pass_duration": mean_pass * step_s,
        "min_in_view": acc["min_n"].astype(np.int32),
        "mean_in_view": acc["sum_n"] / n,
        "max_in_view": acc["max_n"].astype(np.int32),
        "nfold_fraction": (at_least[:, 1:] / n).T.copy(),
    }
