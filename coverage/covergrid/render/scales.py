"""Colour scales of maps, chosen per metric so that the range that decides is resolved.

One function, :func:`colour_scale`, for every map; it reads only the metric registry's
``kind`` and ``better`` (through :mod:`covergrid.render.style`), so a metric added to
``covergrid.compute.metrics.METRICS`` gets the same rules without code here.

- **Whole numbers** (kinds ``count`` and ``level``: passes, gaps, satellites in view) get one
  colour per value (up to :data:`MAX_DISCRETE_LEVELS` values), taken from the family's
  colour map between :data:`DISCRETE_RANGE` of its length: never its black end, which reads
  as "no data" and hides the coastlines.
- **A metric the requirement is stated on** gets a two-tone scale of bins split exactly at
  the threshold: blues where the requirement is met, oranges to reds where it is not, each
  darker further from the threshold, so the decision is the most visible edge of the scale.
  Both sides get their own bins (whole values for whole-number metrics), so a requirement at
  the end of the range (at least 100 %) still has its own colour for the cells that meet
  it instead of saturating there. Blue against orange-red stays distinct with the common
  red-green colour-vision deficiencies; the maps also hatch the failing cells, so colour is
  never the only mark.
- **Other continuous metrics** use the family's perceptually uniform map over the data
  range, bright = good (see :mod:`covergrid.render.style`), a duration's outliers clipped.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from covergrid.render import style

__all__ = ["DISCRETE_RANGE", "MAX_DISCRETE_LEVELS", "Scale", "colour_scale"]

#: Whole-number data spanning at most this many values get one colour per value.
MAX_DISCRETE_LEVELS = 16
#: The part of a family colour map that discrete colours are taken from (its dark end is
#: left out: at magma's 0.0 a cell is black).
DISCRETE_RANGE = (0.35, 0.97)
#: Parts of the two colour maps of a two-tone scale: near the threshold (light) to far from
#: it (dark). Blues for met, oranges to reds for not met (matplotlib's ``Blues``, ``OrRd``).
MET_RANGE = (0.35, 0.90)
NOT_MET_RANGE = (0.30, 0.85)
#: Bins of a two-tone scale over its whole range (shared by the two sides by their widths).
TWO_TONE_BINS = 10

# A duration map whose largest values are outliers (e.g. never-seen polar cells with a gap
# equal to the span) is scaled to this percentile of the cells, with an arrow on the colour
# bar for the cells above it, so the structure elsewhere stays readable.
_OUTLIER_PERCENTILE = 98.0
_OUTLIER_RATIO = 1.5


@dataclass(frozen=True)
class Scale:
    """A map's colours: colour map, normalisation, colour-bar ticks and their labels.

    ``threshold`` is the requirement's threshold in display units when the scale is two-tone
    (None otherwise), ``decision_level`` the value where met turns into not met (the
    threshold, or for whole numbers the half-way value between the last failing and the first
    meeting one) and ``threshold_tick`` the index of the colour-bar tick labelled with the
    threshold; ``boundaries`` the bin edges of a binned scale (None when continuous).
    """

    cmap: object
    norm: object
    ticks: list[float] | None
    tick_labels: list[str] | None
    extend: str
    threshold: float | None = None
    boundaries: list[float] | None = None
    decision_level: float | None = None
    threshold_tick: int | None = None


def colour_scale(metric: str, units: str | None, shown, *, cmap=None,
                 threshold: float | None = None, sense: str | None = None) -> Scale:
    """The colour scale of a map (see the module docstring).

    Parameters
    ----------
    metric : str
        Metric name.
    units : str or None
        Its stored units.
    shown : numpy.ma.MaskedArray
        The field in display units, invalid cells masked.
    cmap : str or Colormap, optional
        Colour map override: used as given on a continuous scale (no two-tone scale).
    threshold : float, optional
        The requirement's threshold in display units, when the requirement is on this field.
    sense : str, optional
        ``"at_most"`` or ``"at_least"`` (with ``threshold``).

    Returns
    -------
    Scale
    """
    data = np.ma.masked_invalid(shown).compressed()
    integer = style.is_integer_kind(metric, units) and bool(np.all(data == np.round(data)))
    if threshold is not None and cmap is None:
        return _two_tone(metric, units, data, float(threshold), str(sense), integer)
    return _single(metric, units, data, cmap, integer)


def _single(metric, units, data, cmap, integer) -> Scale:
    import matplotlib.colors as mcolors

    colormap = style.colormap_for(metric, units, cmap=cmap)
    if data.size == 0:
        return Scale(colormap, mcolors.Normalize(vmin=0.0, vmax=1.0), None, None, "neither")
    lo, hi = float(data.min()), float(data.max())
    kind = style.metric_kind(metric, units)
    if integer and hi - lo + 1 <= MAX_DISCRETE_LEVELS and cmap is None:
        levels = np.arange(lo, hi + 1)
        n = levels.size
        positions = (np.linspace(*DISCRETE_RANGE, n) if n > 1
                     else np.array([np.mean(DISCRETE_RANGE)]))
        # sampled from the oriented map (bright = good), skipping its dark end either way
        dark_first = style.luminance(colormap(0.0)) < style.luminance(colormap(1.0))
        colours = colormap(positions if dark_first else 1.0 - positions)
        listed = mcolors.ListedColormap(colours).with_extremes(bad=(0.0, 0.0, 0.0, 0.0))
        edges = np.append(levels, hi + 1) - 0.5
        return Scale(listed, mcolors.BoundaryNorm(edges, ncolors=n), list(levels),
                     [f"{v:.0f}" for v in levels], "neither", boundaries=list(edges))
    if hi == lo:
        if kind == "fraction":
            # A uniform fraction (e.g. no cell ever 2-fold covered): the full 0-100 % scale, so
            # the colour reads as the value and the bar shows no impossible negative percent.
            return Scale(colormap, mcolors.Normalize(vmin=0.0, vmax=100.0), None, None,
                         "neither")
        # Otherwise centre it in the colour range, never below zero for a non-negative field.
        return Scale(colormap, mcolors.Normalize(vmin=max(lo - 0.5, 0.0) if lo >= 0 else lo - 0.5,
                                                 vmax=hi + 0.5), None, None, "neither")
    if kind == "duration":
        top = float(np.percentile(data, _OUTLIER_PERCENTILE))
        if top > lo and hi > _OUTLIER_RATIO * top:
            return Scale(colormap, mcolors.Normalize(vmin=lo, vmax=top), None, None, "max")
    return Scale(colormap, mcolors.Normalize(vmin=lo, vmax=hi), None, None, "neither")


def _side_edges(a: float, b: float, n_bins: int, integer: bool, *, round_a: bool = False,
                round_b: bool = False, floor: float | None = None,
                ceiling: float | None = None) -> np.ndarray:
    """Bin edges from ``a`` to ``b`` (a < b) on round numbers, both ends included; an end
    marked ``round_*`` (the data's end, not the threshold) moves out to the next round
    number, within ``floor`` and ``ceiling`` (a fraction stops at 100 %)."""
    from matplotlib.ticker import MaxNLocator

    locator = MaxNLocator(nbins=max(n_bins, 1), steps=[1, 2, 2.5, 5, 10], integer=integer)
    ticks = np.asarray(locator.tick_values(a, b), dtype=float)
    step = float(np.min(np.diff(ticks))) if ticks.size > 1 else (b - a)
    if round_a:
        a = float(np.floor(a / step + 1e-9) * step)
        a = a if floor is None else max(a, floor)
    if round_b:
        b = float(np.ceil(b / step - 1e-9) * step)
        b = b if ceiling is None else min(b, ceiling)
    inner = [t for t in ticks if a < t < b and t - a > 0.2 * step and b - t > 0.2 * step]
    return np.array([a, *inner, b])


def _two_tone(metric, units, data, threshold, sense, integer) -> Scale:
    import matplotlib as mpl
    import matplotlib.colors as mcolors

    if sense not in ("at_most", "at_least"):
        raise ValueError(f"sense must be 'at_most' or 'at_least'; got {sense!r}")
    finite = data if data.size else np.array([threshold])
    lo, hi = float(min(finite.min(), threshold)), float(max(finite.max(), threshold))
    extend = "neither"
    if style.metric_kind(metric, units) == "duration" and data.size:
        top = float(np.percentile(data, _OUTLIER_PERCENTILE))
        if top > threshold and hi > _OUTLIER_RATIO * top:
            hi, extend = top, "max"
    integer = integer and float(threshold).is_integer()
    if integer:
        # one bin per whole value when few; the threshold's value on its meeting side
        cut = threshold - 0.5 if sense == "at_least" else threshold + 0.5
        # at least one bin on each side of the threshold, so both tones are on the bar
        lo_e = min(lo, threshold - (1 if sense == "at_least" else 0)) - 0.5
        hi_e = max(hi, threshold + (1 if sense == "at_most" else 0)) + 0.5
        if hi_e - lo_e <= MAX_DISCRETE_LEVELS:
            edges = np.arange(lo_e, hi_e + 0.5)
        else:
            n_low = max(1, round(TWO_TONE_BINS * (cut - lo_e) / (hi_e - lo_e)))
            edges = np.concatenate([_side_edges(lo_e, cut, n_low, True)[:-1],
                                    _side_edges(cut, hi_e, TWO_TONE_BINS - n_low, True)])
        low_side = edges[1:] <= cut + 1e-9
    else:
        width = hi - lo
        if width == 0:
            width = abs(threshold) if threshold else 1.0
        n_low = round(TWO_TONE_BINS * (threshold - lo) / width) if threshold > lo else 0
        n_high = round(TWO_TONE_BINS * (hi - threshold) / width) if hi > threshold else 0
        step = width / TWO_TONE_BINS
        kind = style.metric_kind(metric, units)
        floor = 0.0 if finite.min() >= 0 else None  # durations, fractions: never below 0
        ceiling = 100.0 if kind == "fraction" else None
        # a side without width (the data never cross, or the threshold ends the range, as
        # "at least 100 %" does) still gets one bin, so the colour bar shows both tones
        low = (_side_edges(lo, threshold, max(n_low, 1), False, round_a=True, floor=floor)
               if threshold > lo else np.array([threshold - step, threshold]))
        high = (_side_edges(threshold, hi, max(n_high, 1), False, round_b=extend != "max",
                            ceiling=ceiling)
                if hi > threshold else np.array([threshold, threshold + step]))
        edges = np.concatenate([low[:-1], high])
        low_side = np.arange(edges.size - 1) < low.size - 1
        if sense == "at_most":
            # bins are [edge, next edge): a value equal to the threshold meets "at most"
            edges[low.size - 1] = np.nextafter(threshold, np.inf)
    met = low_side if sense == "at_most" else ~low_side
    colours = _bin_colours(low_side, met, mpl)
    listed = mcolors.ListedColormap(colours).with_extremes(bad=(0.0, 0.0, 0.0, 0.0))
    if extend == "max":
        listed = listed.with_extremes(over=colours[-1])
    norm = mcolors.BoundaryNorm(edges, ncolors=len(colours),
                                extend="max" if extend == "max" else "neither")
    if integer:
        ticks = ([float(v) for v in (edges[:-1] + 0.5)] if edges.size - 1 <= MAX_DISCRETE_LEVELS
                 else [float(e) for e in edges])
        labels = [f"{v:.0f}" if float(v).is_integer() else f"{v:g}" for v in ticks]
        level = cut
    else:
        ticks = [float(e) for e in edges]
        labels = [_tick_text(threshold if np.isclose(e, threshold, rtol=1e-12, atol=0) else e)
                  for e in edges]
        if threshold <= lo:  # the bin below is only a swatch of its tone: no value there
            labels[0] = ""
        if hi <= threshold:
            labels[-1] = ""
        level = threshold
    at = int(np.argmin(np.abs(np.asarray(ticks) - threshold)))
    return Scale(listed, norm, ticks, labels, extend, threshold=float(threshold),
                 boundaries=[float(e) for e in edges], decision_level=float(level),
                 threshold_tick=at)


def _bin_colours(low_side: np.ndarray, met: np.ndarray, mpl) -> list:
    """Colours of the bins: met bins in blues, the others in oranges to reds, each side
    lighter towards the threshold (which lies between the low side and the high side)."""
    at = int(low_side.sum()) - 0.5  # the threshold, in bin numbers
    colours: list = [None] * met.size
    for side, name, (near, far) in ((met, "Blues", MET_RANGE),
                                    (~met, "OrRd", NOT_MET_RANGE)):
        idx = np.flatnonzero(side)
        if idx.size == 0:
            continue
        distance = np.abs(idx - at) - 0.5  # 0 for the bin next to the threshold
        spread = (distance / distance.max() if idx.size > 1 and distance.max() > 0
                  else np.full(idx.size, 0.3))
        for i, c in zip(idx, mpl.colormaps[name](near + (far - near) * spread), strict=True):
            colours[i] = tuple(c)
    return colours


def _tick_text(value: float) -> str:
    text = f"{value:.4g}"
    return text if "e" not in text else f"{value:.3g}"
