"""Quantities in text: one unit and one number of decimals for the numbers read together."""

from __future__ import annotations

import pytest

from covergrid.compute.quantities import (
    DisplayUnit,
    format_values,
    percent,
    requirement_text,
    unit_for,
    verdict_text,
)

# A verdict as requirement_verdict returns it (invented numbers: inputs of the formatting).
GAP = {"metric": "max_gap", "k": None, "sense": "at_most", "threshold": 2700.0,
       "area_fraction": 0.95, "achieved": 2044.597, "margin": 655.403, "met": True,
       "area_fraction_met": 0.9731, "units": "s"}


def test_command_line_keeps_seconds_with_one_decimal():
    text = verdict_text(GAP, long_name="max_gap", kind="duration", stored_units=True)
    assert text == ("max_gap at most 2700.0 s over 95 % of the area: MET (achieved 2044.6 s, "
                    "margin +655.4 s; 97.3 % of the area meets it)")


def test_figures_use_the_display_unit_of_the_threshold():
    text = verdict_text(GAP, long_name="maximum gap", kind="duration")
    assert text.startswith("maximum gap at most 45.0 min over 95 % of the area: MET "
                           "(achieved 34.1 min, margin +10.9 min;")


def test_a_failing_margin_never_rounds_to_zero():
    v = {"metric": "nfold_fraction", "k": 4, "sense": "at_least", "threshold": 1.0,
         "area_fraction": 1.0, "achieved": 0.99996, "margin": -0.00004, "met": False,
         "area_fraction_met": 0.8, "units": "1"}
    text = verdict_text(v, long_name="fraction of time with at least k satellites in view",
                        kind="fraction")
    assert "at least 4 satellites in view at least 100.000 %" in text
    assert "achieved 99.996 %, margin -0.004 %" in text  # not "100.0 %, margin -0.0 %"


@pytest.mark.parametrize(("largest", "label"), [(180.0, "s"), (181.0, "min"),
                                                (3 * 3600.0, "min"), (5 * 3600.0, "h"),
                                                (10 * 86400.0, "d")])
def test_time_units(largest, label):
    assert unit_for("max_gap", "s", largest, "duration").label == label


def test_counts_and_shares():
    assert format_values([6.0, 4.0, 2.0], unit_for("min_in_view", "1", 6.0, "level"),
                         signed=[2]) == ["6", "4", "+2"]
    assert format_values([0.79], DisplayUnit("", 1.0)) == ["0.79"]
    assert percent(0.95) == "95 %" and percent(0.973) == "97.3 %"
    assert requirement_text({"metric": "min_in_view", "k": None, "at_least": 4,
                             "at_most": None, "area_fraction": 1.0}, kind="level") == (
        "min in view at least 4 over 100 % of the area")
