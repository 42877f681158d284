"""Quantities as people read them: the display unit of a value and its decimals, in one place.

Every figure, caption, report and command-line line shows metric values through this module,
so one number reads the same everywhere. Pure Python (no numpy): the command line's ``check``
imports it without the numerical libraries.

Display units
-------------
Quantities stored in seconds are shown in s, min, h or d, whichever keeps the largest value
shown at or below 180 of the unit (so up to 3 min in s, up to 3 h in min, up to 3 days in h,
days beyond); fractions (``*_fraction`` or kind ``"fraction"``, units "1") are shown in per
cent; numbers of satellites (kind ``"level"``) and other counts are plain numbers (the
command line names the satellites); other units are shown as stored.

Decimals
--------
Values shown together (a threshold, the value achieved and the margin) share one number of
decimals: 1 for s, min and per cent, 2 for h and d, 0 for whole counts and 2 for other
numbers; more (up to :data:`MAX_DECIMALS`) when the margin would otherwise round to zero, so a
value that fails a requirement never reads as equal to it. A margin always carries its sign.
"""

from __future__ import annotations

import math
from collections.abc import Iterable, Mapping, Sequence
from dataclasses import dataclass
from typing import Any

__all__ = [
    "MAX_DECIMALS",
    "DisplayUnit",
    "format_values",
    "percent",
    "requirement_text",
    "time_unit",
    "unit_for",
    "verdict_text",
]

#: Most decimals a value is given when its margin would otherwise round to zero.
MAX_DECIMALS = 6

# Seconds per display unit; a unit is used while the data stay <= 180 of it.
_TIME_UNITS_S = (("s", 1.0), ("min", 60.0), ("h", 3600.0), ("d", 86400.0))
_MAX_IN_UNIT = 180.0
_DECIMALS = {"s": 1, "min": 1, "h": 2, "d": 2, "%": 1}


@dataclass(frozen=True)
class DisplayUnit:
    """How to show a quantity: ``shown = stored * factor``, labelled ``label``."""

    label: str  # "min", "h", "%", "" (plain number)
    factor: float


def time_unit(largest_s: float) -> DisplayUnit:
    """The display unit of durations whose largest magnitude is ``largest_s`` [s]."""
    for label, seconds in _TIME_UNITS_S:
        if largest_s <= _MAX_IN_UNIT * seconds:
            return DisplayUnit(label, 1.0 / seconds)
    return DisplayUnit("d", 1.0 / 86400.0)


def unit_for(name: str, units: str | None, largest: float, kind: str | None = None
             ) -> DisplayUnit:
    """The display unit of a quantity (see the module docstring for the rule).

    Parameters
    ----------
    name : str
        Variable name (``max_gap``).
    units : str or None
        Stored CF units ("s", "1" ...).
    largest : float
        The largest finite magnitude to show [stored units]; 0 when there is none.
    kind : str, optional
        The metric's kind (``covergrid.compute.metrics.METRICS``): ``"fraction"``,
        ``"duration"``, ``"count"`` or ``"level"``.

    Returns
    -------
    DisplayUnit
        Label and multiplication factor.
    """
    if units == "s":
        return time_unit(largest if math.isfinite(largest) else 0.0)
    plain = units in (None, "1", "")
    if plain and (kind == "fraction" or name.endswith("_fraction")):
        return DisplayUnit("%", 100.0)
    if plain:
        return DisplayUnit("", 1.0)
    return DisplayUnit(str(units), 1.0)


def _decimals(unit: DisplayUnit, shown: Sequence[float]) -> int:
    if unit.label in _DECIMALS:
        return _DECIMALS[unit.label]
    finite = [v for v in shown if math.isfinite(v)]
    return 0 if all(float(v).is_integer() for v in finite) else 2


def format_values(values: Iterable[float], unit: DisplayUnit, *, margin_at: int | None = None,
                  signed: Iterable[int] = (), with_unit: bool = True) -> list[str]:
    """Format values shown together with one number of decimals and the unit.

    Parameters
    ----------
    values : iterable of float
        Values in stored units (NaN shows as "n/a").
    unit : DisplayUnit
        How to show them.
    margin_at : int, optional
        Index of a margin among ``values``: decimals are added until it does not round to
        zero (at most :data:`MAX_DECIMALS`).
    signed : iterable of int
        Indices shown with an explicit sign (``+655.4 s``).
    with_unit : bool
        Append the unit label.

    Returns
    -------
    list of str
        For example ``["2700.0 s", "2044.6 s", "+655.4 s"]``.
    """
    shown = [float(v) * unit.factor for v in values]
    decimals = _decimals(unit, shown)
    if margin_at is not None and math.isfinite(shown[margin_at]) and shown[margin_at] != 0:
        while round(shown[margin_at], decimals) == 0 and decimals < MAX_DECIMALS:
            decimals += 1
    signs = set(signed)
    suffix = f" {unit.label}" if with_unit and unit.label else ""
    out = []
    for n, v in enumerate(shown):
        if not math.isfinite(v):
            out.append("n/a")
            continue
        text = f"{v:+.{decimals}f}" if n in signs else f"{v:.{decimals}f}"
        if n not in signs and text.startswith("-") and text.strip("-0.") == "":
            text = text[1:]  # a value that rounds to zero is not "-0.0"
        out.append(text + suffix)
    return out


def percent(share: float) -> str:
    """A share of the area as people write it: ``95 %``, ``97.3 %``, ``100 %``."""
    text = f"{100.0 * float(share):.1f}"
    return (text[:-2] if text.endswith(".0") else text) + " %"


def _fold(long_name: str, k: int | None) -> str:
    if k is None:
        return long_name
    words = long_name.split(" ")
    if "k" in words:
        words[words.index("k")] = str(int(k))
        return " ".join(words)
    return f"{long_name} (k = {int(k)})"


def requirement_text(req: Mapping[str, Any], *, long_name: str | None = None,
                     units: str | None = None, kind: str | None = None,
                     stored_units: bool = False, threshold_text: str | None = None) -> str:
    """The requirement in words: ``maximum gap at most 45.0 min over 95 % of the area``.

    Parameters
    ----------
    req : mapping
        ``metric``, ``k``, ``area_fraction`` and either ``sense`` with ``threshold`` (a
        verdict) or ``at_most`` / ``at_least`` (a requirement's plain data).
    long_name, units, kind : str, optional
        The metric's long name, stored units and kind (from the metric registry).
    stored_units : bool
        Seconds stay seconds (the command line); otherwise the display unit of the threshold.
    threshold_text : str, optional
        The threshold already formatted (with the decimals of the numbers beside it).
    """
    sense, threshold = _sense_threshold(req)
    unit = _unit(req, units, kind, [threshold], stored_units)
    value = threshold_text or format_values([threshold], unit)[0]
    name = _fold(long_name or str(req["metric"]).replace("_", " "), req.get("k"))
    words = "at most" if sense == "at_most" else "at least"
    return f"{name} {words} {value} over {percent(req.get('area_fraction', 1.0))} of the area"


def verdict_text(verdict: Mapping[str, Any], *, long_name: str | None = None,
                 kind: str | None = None, stored_units: bool = False) -> str:
    """The verdict in one sentence, its numbers in one unit with one number of decimals.

    For example ``"maximum gap at most 45.0 min over 95 % of the area: MET (achieved
    34.1 min, margin +10.9 min; 97.3 % of the area meets it)"``.

    Parameters
    ----------
    verdict : mapping
        :func:`covergrid.compute.summary.requirement_verdict` result.
    long_name, kind : str, optional
        The metric's long name and kind (from the metric registry).
    stored_units : bool
        Seconds stay seconds (the command line: ``achieved 2044.6 s, margin +655.4 s``).
    """
    units = verdict.get("units")
    values = [verdict["threshold"], verdict["achieved"], verdict["margin"]]
    unit = _unit(verdict, units, kind, values, stored_units)
    threshold, achieved, margin = format_values(values, unit, margin_at=2, signed=[2])
    (share,) = format_values([verdict["area_fraction_met"]], DisplayUnit("%", 100.0))
    state = "MET" if verdict["met"] else "NOT MET"
    head = requirement_text(verdict, long_name=long_name, units=units, kind=kind,
                            stored_units=stored_units, threshold_text=threshold)
    return (f"{head}: {state} (achieved {achieved}, margin {margin}; "
            f"{share} of the area meets it)")


def _sense_threshold(req: Mapping[str, Any]) -> tuple[str, float]:
    if "sense" in req:
        return str(req["sense"]), float(req["threshold"])
    if req.get("at_most") is not None:
        return "at_most", float(req["at_most"])
    return "at_least", float(req["at_least"])


def _unit(req: Mapping[str, Any], units: str | None, kind: str | None,
          values: Sequence[float], stored_units: bool) -> DisplayUnit:
    if stored_units and units == "s":
        return DisplayUnit("s", 1.0)
    # the unit follows the threshold, the number the reader compares with
    _, threshold = _sense_threshold(req)
    return unit_for(str(req["metric"]), units, abs(threshold), kind)
