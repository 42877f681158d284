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
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from covergrid.io import save_figure

__all__ = [
    "DPI",
    "FOOTER",
    "PRINT_DPI",
    "DisplayUnit",
    "add_caption",
    "colormap_for",
    "display_unit",
    "fold_text",
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

_CAPTION_WRAP_CHARS = 120  # characters per caption line at the map figure width

_FAMILY_CMAP = {"fraction": "viridis", "duration": "cividis", "count": "magma"}


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
        ``"duration"`` (units "s"), ``"fraction"`` (unitless ``*_fraction``) or ``"count"``.
    """
    if units == "s":
        return "duration"
    if name.endswith("_fraction"):
        return "fraction"
    return "count"


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


@dataclass(frozen=True)
class DisplayUnit:
    """How to show a quantity: ``shown = stored * factor``, labelled ``label``."""

    label: str  # "min", "h", "%", "" (plain number)
    factor: float


# Seconds per display unit; a unit is used while the data stay <= 180 of it.
_TIME_UNITS_S = (("s", 1.0), ("min", 60.0), ("h", 3600.0), ("d", 86400.0))
_MAX_IN_UNIT = 180.0


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
        Label and multiplication factor (see the module docstring for the rule).
    """
    if units == "s":
        finite = np.asarray(values, dtype=float)
        finite = finite[np.isfinite(finite)]
        largest_s = float(np.max(np.abs(finite))) if finite.size else 0.0
        for label, seconds in _TIME_UNITS_S:
            if largest_s <= _MAX_IN_UNIT * seconds:
                return DisplayUnit(label, 1.0 / seconds)
        return DisplayUnit("d", 1.0 / 86400.0)
    if metric_kind(name, units) == "fraction" and units in (None, "1", ""):
        return DisplayUnit("%", 100.0)
    if units in (None, "1", ""):
        return DisplayUnit("", 1.0)
    return DisplayUnit(units, 1.0)


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


def add_caption(fig, caption: str | None, *, footer: str = FOOTER, width_chars=None) -> None:
    """Write the caption (wrapped) and the footer line at the bottom of a figure.

    Parameters
    ----------
    fig : matplotlib.figure.Figure
        Figure; the caller leaves room at the bottom (see the figure layouts).
    caption : str or None
        Caption text; None writes only the footer.
    footer : str
        Footer line, :data:`FOOTER` by default.
    width_chars : int, optional
        Wrap width [characters]; scaled from the figure width when omitted.
    """
    if width_chars is None:
        width_chars = int(_CAPTION_WRAP_CHARS * fig.get_figwidth() / 8.0)
    if caption:
        text = "\n".join(textwrap.wrap(caption, width=width_chars))
        fig.text(0.02, 0.105, text, ha="left", va="top", fontsize=_FONT_PT["caption"])
    fig.text(0.02, 0.012, footer, ha="left", va="bottom", fontsize=_FONT_PT["footer"],
             color="0.35", style="italic")


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
