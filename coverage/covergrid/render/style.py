"""Shared look of every covergrid figure: sizes, fonts, colour maps, display units, captions.

Colour rule (one rule for every map and chart)
----------------------------------------------
All colour maps are perceptually uniform matplotlib maps, one family per kind of quantity so that
a reader can tell kinds apart across a report:

- fractions of time (``coverage_fraction``, ``nfold_fraction``): ``viridis``;
- durations (gaps, response time, pass duration): ``cividis`` (also readable with red-green
  colour-vision deficiency);
- counts (passes, gaps, satellites in view): ``magma``.

Each map is oriented so that **the bright (yellow) end always means good**: for a metric where
higher is better the map runs dark -> bright with the value; where lower is better (gaps, response
time) the reversed map is used, so a short gap is bright. Which way is better comes from the
metric registry ``covergrid.compute.metrics.METRICS`` (field ``better``); a variable it does not
list is drawn as higher-is-better.

Display units
-------------
Quantities stored in seconds are shown in s, min, h or d, whichever keeps the largest finite value
of the data at or below 180 of the unit (so up to 3 min in s, up to 3 h in min, up to 3 days in h,
days beyond); fractions (``*_fraction``, units "1") are shown in per cent; other unitless
quantities are plain numbers. The chosen unit is always in the axis or colour-bar label.
"""

from __future__ import annotations

import contextlib
import os
import textwrap
from collections.abc import Iterator, Mapping
from pathlib import Path

import numpy as np

from covergrid.compute.quantities import DisplayUnit, unit_for
from covergrid.io import save_figure

__all__ = [
    "DPI",
    "FOOTER",
    "PRINT_DPI",
    "DisplayUnit",
    "add_caption",
    "colormap_for",
    "display_unit",
    "figure_title",
    "fold_text",
    "is_integer_kind",
    "is_lower_better",
    "line_colour",
    "luminance",
    "metric_kind",
    "metric_label",
    "report_style",
    "save_png_and_pdf",
]

#: Raster resolution of saved PNG files [dots per inch].
DPI = 200

#: Resolution of the raster parts of a saved PDF (the cells of a map) [dots per inch]: 300 dpi,
#: the usual resolution for print (common practice); text and lines stay vector.
PRINT_DPI = 300

#: Footer carried by every figure.
FOOTER = "Design study result: secular J2, mean elements; not for operations."

# Font sizes [pt] of the report style.
_FONT_PT = {"base": 9.0, "title": 11.0, "caption": 8.0, "footer": 6.5}

_FAMILY_CMAP = {"fraction": "viridis", "duration": "cividis", "count": "magma",
                "level": "magma", "dop": "magma"}


@contextlib.contextmanager
def report_style() -> Iterator[None]:
    """Temporarily apply the report font sizes and line widths (``matplotlib.rc_context``)."""
    import matplotlib as mpl

    rc: dict = {
        "font.size": _FONT_PT["base"],
        "axes.titlesize": _FONT_PT["title"],
        "axes.labelsize": _FONT_PT["base"],
        "xtick.labelsize": _FONT_PT["base"] - 1,
        "ytick.labelsize": _FONT_PT["base"] - 1,
        "legend.fontsize": _FONT_PT["base"] - 1,
        "axes.linewidth": 0.6,
        "lines.linewidth": 1.2,
        "savefig.dpi": DPI,
        "hatch.linewidth": 0.5,
    }
    with mpl.rc_context(rc):
        yield


def metric_kind(name: str, units: str | None) -> str:
    """Kind of a quantity for colour and unit choice.

    Parameters
    ----------
    name : str
        Variable name (``max_gap``).
    units : str or None
        Its CF ``units`` attribute.

    Returns
    -------
    str
        The kind in ``covergrid.compute.metrics.METRICS`` (``"fraction"``, ``"duration"``,
        ``"count"``, ``"level"`` or ``"dop"``) for a registered metric; otherwise
        ``"duration"`` (units "s"), ``"fraction"`` (``*_fraction``) or ``"count"``.
    """
    from covergrid.compute.metrics import METRICS

    info = METRICS.get(name)
    if info is not None:
        return info.kind
    if units == "s":
        return "duration"
    if name.endswith("_fraction"):
        return "fraction"
    return "count"


def is_integer_kind(name: str, units: str | None) -> bool:
    """Whether a metric's kind is whole numbers by nature (counts, satellites in view)."""
    return metric_kind(name, units) in ("count", "level")


def is_lower_better(name: str) -> bool:
    """Whether a lower value of metric ``name`` is better, per
    ``covergrid.compute.metrics.METRICS``.

    Parameters
    ----------
    name : str
        Metric name.

    Returns
    -------
    bool
        True for gap-like metrics; False for metrics the registry does not list.
    """
    from covergrid.compute.metrics import METRICS

    info = METRICS.get(name)
    return info is not None and info.better == "lower"


def colormap_for(name: str, units: str | None, *, cmap=None):
    """The colour map of a metric per the module rule (bright = good), NaN transparent.

    Parameters
    ----------
    name : str
        Metric name.
    units : str or None
        Its CF units.
    cmap : str or matplotlib.colors.Colormap, optional
        Override; used as given (no reversal).

    Returns
    -------
    matplotlib.colors.Colormap
        A copy whose "bad" colour (NaN cells) is fully transparent.
    """
    import matplotlib as mpl

    if cmap is None:
        base = _FAMILY_CMAP[metric_kind(name, units)]
        cmap = base + "_r" if is_lower_better(name) else base
    colormap = mpl.colormaps[cmap] if isinstance(cmap, str) else cmap
    return colormap.with_extremes(bad=(0.0, 0.0, 0.0, 0.0))


def line_colour(name: str, units: str | None):
    """A dark colour of the metric's colour-map family, for lines on white (profiles, charts).

    Parameters
    ----------
    name : str
        Metric name.
    units : str or None
        Its CF units.

    Returns
    -------
    tuple of float
        RGBA colour: the family map (never reversed) at 0.3 of its range.
    """
    import matplotlib as mpl

    return mpl.colormaps[_FAMILY_CMAP[metric_kind(name, units)]](0.3)


def luminance(rgba) -> float:
    """Relative luminance of an sRGB colour, 0 (black) to 1 (white).

    Parameters
    ----------
    rgba : sequence of float
        Colour, channels in [0, 1] (alpha ignored).

    Returns
    -------
    float
        Relative luminance [unitless].

    Notes
    -----
    sRGB channels are linearised per IEC 61966-2-1 and weighted with the ITU-R BT.709
    coefficients 0.2126, 0.7152, 0.0722.
    """
    rgb = np.asarray(rgba[:3], dtype=float)
    lin = np.where(rgb <= 0.04045, rgb / 12.92, ((rgb + 0.055) / 1.055) ** 2.4)
    return float(lin @ np.array([0.2126, 0.7152, 0.0722]))


def display_unit(name: str, units: str | None, values) -> DisplayUnit:
    """Choose the display unit of a quantity from its stored units and data range.

    Parameters
    ----------
    name : str
        Variable name.
    units : str or None
        Stored CF units ("s", "1" ...).
    values : array_like
        The data (NaN ignored) [stored units].

    Returns
    -------
    DisplayUnit
        Label and multiplication factor (the rule of :mod:`covergrid.compute.quantities`).
    """
    finite = np.asarray(values, dtype=float)
    finite = finite[np.isfinite(finite)]
    largest = float(np.max(np.abs(finite))) if finite.size else 0.0
    return unit_for(name, units, largest, metric_kind(name, units))


def metric_label(name: str, attrs: Mapping, unit: DisplayUnit, *, k: int | None = None) -> str:
    """Axis or colour-bar label: the long name (or the name) and the display unit in brackets.

    Parameters
    ----------
    name : str
        Variable name.
    attrs : mapping
        Its attributes (``long_name`` used when present).
    unit : DisplayUnit
        Display unit.
    k : int, optional
        For N-fold quantities, the fold shown.

    Returns
    -------
    str
        For example ``"maximum gap [min]"``.
    """
    text = fold_text(str(attrs.get("long_name") or name.replace("_", " ")), k)
    return f"{text} [{unit.label}]" if unit.label else text


def fold_text(text: str, k: int | None) -> str:
    """Put the fold into a long name: "at least k satellites" -> "at least 2 satellites".

    Parameters
    ----------
    text : str
        Long name, possibly with the placeholder word ``k``.
    k : int or None
        Fold; None leaves the text unchanged.

    Returns
    -------
    str
        The text with the first stand-alone ``k`` replaced, or ``" (k = 2)"`` appended.
    """
    if k is None:
        return text
    words = text.split(" ")
    if "k" in words:
        at = words.index("k")
        words[at] = str(int(k))
        if int(k) == 1 and at + 1 < len(words) and words[at + 1] == "satellites":
            words[at + 1] = "satellite"
        return " ".join(words)
    return f"{text} (k = {int(k)})"


def figure_title(text: str, study: str | None) -> str:
    """A figure's title naming the study: ``"Maximum gap \u2014 study demo"``."""
    return f"{text} \u2014 study {study}" if study else text


def _wrap_to_width(fig, renderer, text: str, width_px: float, **text_kw) -> str:
    """Wrap ``text`` (paragraphs split at newlines) so that no line is wider than
    ``width_px`` as measured by ``renderer`` in the figure's font."""
    probe = fig.text(0, 0, "", **text_kw)
    try:
        def widest(lines: list[str]) -> float:
            probe.set_text("\n".join(lines))
            return probe.get_window_extent(renderer).width

        out = []
        for paragraph in text.split("\n"):
            if not paragraph.strip():
                continue
            chars = max(len(paragraph), 1)
            one_line = widest([paragraph])
            width = max(int(chars * width_px / max(one_line, 1.0)), 10)
            lines = textwrap.wrap(paragraph, width=width) or [""]
            while widest(lines) > width_px and width > 10:  # measured, not guessed
                width = int(width * 0.95)
                lines = textwrap.wrap(paragraph, width=width)
            out += lines
        return "\n".join(out)
    finally:
        probe.remove()


#: Gaps of the measured layout [in]: figure edge to text, footer to caption, caption to
#: the lowest drawn element (tick labels, colour bar, legend).
_EDGE_IN = 0.10
_TEXT_GAP_IN = 0.05
_CONTENT_GAP_IN = 0.14


def add_caption(fig, caption: str | None, *, footer: str = FOOTER, key=None) -> None:
    """Write the caption and the footer at the bottom of a figure in a measured layout.

    The footer sits at the bottom edge, the caption (wrapped to the figure width as
    measured in its font; newlines start paragraphs) above it and the key (a legend of the
    figure's marks, if any) above the caption. Then every drawn element
    (axes with their tick and gridline labels, colour bars, legends, titles) is measured:
    where one would reach into the caption or beyond an edge of the figure, the figure
    grows by what is missing and keeps every axes at its size, so a long caption can never
    overprint the footer, the map or its labels, and nothing is cut at an edge; empty space
    above and below is trimmed (the width never shrinks). Call it last, once everything
    else is drawn.

    Parameters
    ----------
    fig : matplotlib.figure.Figure
        The figure.
    caption : str or None
        Caption text; None writes only the footer.
    footer : str
        Footer line, :data:`FOOTER` by default.
    key : list of matplotlib artists, optional
        Legend handles of the figure's marks (the requirement's hatching and threshold),
        drawn in one row between the drawing and the caption.
    """
    from covergrid.render.gridlines import place_labels_once

    renderer = fig.canvas.get_renderer()
    dpi = fig.dpi
    caption_kw = {"ha": "left", "va": "bottom", "fontsize": _FONT_PT["caption"]}
    footer_art = fig.text(0, 0, footer, ha="left", va="bottom", fontsize=_FONT_PT["footer"],
                          color="0.35", style="italic", gid="covergrid-footer")
    caption_art = None
    if caption:
        width_px = (fig.get_figwidth() - 2 * _EDGE_IN) * dpi
        text = _wrap_to_width(fig, renderer, caption, width_px, **caption_kw)
        caption_art = fig.text(0, 0, text, gid="covergrid-caption", **caption_kw)
    legend = None
    if key:
        legend = fig.legend(handles=list(key), loc="lower left", ncols=len(key),
                            frameon=False, fontsize=_FONT_PT["caption"], handlelength=2.2,
                            borderaxespad=0.0, borderpad=0.0)
        legend.set_gid("covergrid-key")
    own = {id(footer_art), id(caption_art)}
    for _ in range(4):  # each pass can only grow the figure; two settle every case seen
        width_in, height_in = fig.get_figwidth(), fig.get_figheight()
        footer_art.set_position((_EDGE_IN / width_in, _EDGE_IN / height_in))
        footer_top = _EDGE_IN + footer_art.get_window_extent(renderer).height / dpi
        text_top = footer_top
        if caption_art is not None:
            caption_art.set_position((_EDGE_IN / width_in,
                                      (footer_top + _TEXT_GAP_IN) / height_in))
            text_top = (footer_top + _TEXT_GAP_IN
                        + caption_art.get_window_extent(renderer).height / dpi)
        if legend is not None:
            legend.set_bbox_to_anchor((_EDGE_IN / width_in, (text_top + _TEXT_GAP_IN)
                                       / height_in), transform=fig.transFigure)
            text_top += _TEXT_GAP_IN + legend.get_window_extent(renderer).height / dpi
        boxes = [ax.get_tightbbox(renderer) for ax in fig.axes]
        # map labels are placed by this first measure; growing the figure keeps every axes
        # at its size, so they stay where they are (cartopy would place them again at every
        # measure and draw)
        place_labels_once(fig)
        boxes += [t.get_window_extent(renderer) for t in fig.texts
                  if id(t) not in own and t.get_text()]
        boxes = [b for b in boxes if b is not None and b.width > 0]
        if not boxes:
            return
        x0 = min(b.x0 for b in boxes) / dpi
        x1 = max(b.x1 for b in boxes) / dpi
        y0 = min(b.y0 for b in boxes) / dpi
        y1 = max(b.y1 for b in boxes) / dpi
        # the height fits the content (a map of a latitude band is shorter than the axes
        # it was given); the width only grows, so figures of a kind keep their width
        grow_bottom = text_top + _CONTENT_GAP_IN - y0
        grow_top = y1 - (height_in - _EDGE_IN)
        grow_left = _at_least_a_little(_EDGE_IN - x0)
        grow_right = _at_least_a_little(x1 - (width_in - _EDGE_IN))
        if max(abs(grow_bottom), abs(grow_top), grow_left, grow_right) < 0.5 / dpi:
            return  # settled to under a pixel
        _grow(fig, grow_left, grow_right, grow_bottom, grow_top)


def _at_least_a_little(need_in: float) -> float:
    """A margin to add sideways [in]: none for less than :data:`_SLACK_IN` (the edge gap
    absorbs it), so a figure's width changes only when something would be cut."""
    return need_in if need_in > _SLACK_IN else 0.0


#: Sideways overrun the edge gap absorbs [in].
_SLACK_IN = 0.05


def _grow(fig, left_in: float, right_in: float, bottom_in: float, top_in: float) -> None:
    """Enlarge a figure by the given margins [in] (a negative one trims), keeping every
    axes and figure text at its size and place relative to the others."""
    width_in, height_in = fig.get_figwidth(), fig.get_figheight()
    new_w, new_h = width_in + left_in + right_in, height_in + bottom_in + top_in
    for ax in fig.axes:
        box = ax.get_position(original=True)
        ax.set_position(((box.x0 * width_in + left_in) / new_w,
                         (box.y0 * height_in + bottom_in) / new_h,
                         box.width * width_in / new_w, box.height * height_in / new_h),
                        which="both")
    for text in fig.texts:  # the suptitle too
        x, y = text.get_position()
        text.set_position(((x * width_in + left_in) / new_w, (y * height_in + bottom_in) / new_h))
    fig.set_size_inches(new_w, new_h, forward=False)


def save_png_and_pdf(fig, folder, stem: str) -> list[Path]:
    """Save one figure as ``folder/<stem>.png`` (:data:`DPI`) and ``folder/<stem>.pdf``.

    The figure is built once and saved twice; each file is written atomically
    (:func:`covergrid.io.save_figure`) into ``folder`` and nowhere else. In the PDF, artists
    marked ``rasterized`` (a map's cell mesh) are embedded as an image at :data:`PRINT_DPI`;
    everything else stays vector. Text is text: matplotlib's Type 3 fonts with a Unicode map,
    selectable and searchable (embedding TrueType instead, ``pdf.fonttype`` 42, costs about
    0.15 s a file in font subsetting).

    Parameters
    ----------
    fig : matplotlib.figure.Figure
        The drawn figure.
    folder : path-like
        Folder to write into (made if missing).
    stem : str
        File name without suffix.

    Returns
    -------
    list of pathlib.Path
        The PNG and PDF paths.
    """
    from covergrid.render.gridlines import place_labels_once

    folder = Path(os.fspath(folder))
    place_labels_once(fig)  # the layout is final: map labels placed once, not per draw
    return [save_figure(fig, folder / f"{stem}.png", dpi=DPI),
            save_figure(fig, folder / f"{stem}.pdf", dpi=PRINT_DPI)]
