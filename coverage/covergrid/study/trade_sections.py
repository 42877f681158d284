"""The trade blocks of a study file: ``sweep`` (a batch of designs) and ``sizing`` (a search).

Each sweep axis takes a number, a list of numbers or a range ``{from, to, step}``; the range
is expanded here, so the models hold plain lists. What the blocks mean is described in
:mod:`covergrid.trade.sweep` and :mod:`covergrid.trade.sizing`.
"""

from __future__ import annotations

import math
from typing import Annotated, Any, Literal

from pydantic import Field, WithJsonSchema, field_validator, model_validator

from covergrid.study.messages import Problems, did_you_mean, show_value
from covergrid.study.orbit_rules import SUN_SYNCHRONOUS
from covergrid.study.sections import Inclination, SectionModel

__all__ = ["SIZING_MAX_DESIGNS", "SWEEP_MAX_DESIGNS", "CoarseSection", "SizingSection",
           "SweepSection", "TotalRange"]

#: Most designs one sweep may hold, the product of its axes (each design is a full
#: coverage run), and most values one axis may list.
SWEEP_MAX_DESIGNS = 100000
#: Most designs a sizing search may try (every allowed total, planes and phasing at every
#: altitude and inclination: the worst case, when no design meets the requirement).
SIZING_MAX_DESIGNS = 100000


def _axis(value: Any, *, integer: bool) -> Any:
    """A sweep axis: a number, a list of numbers or a range ``{from, to, step}`` -> a list.

    A range holds ``from, from + step, ...`` up to ``to`` inclusive (``to`` is included when
    it lies within 1e-9 of a step of a range value).
    """
    kind = "whole number" if integer else "number"

    def number(v: Any) -> bool:
        if isinstance(v, bool):
            return False
        return isinstance(v, int) if integer else isinstance(v, int | float)

    if number(value):
        return [value]
    if isinstance(value, list):
        if not value:
            raise Problems([((), "must hold at least one value", value)])
        not_numbers = [i for i, v in enumerate(value) if not number(v)]
        if not_numbers:
            raise Problems([((i,), f"must be a {kind}", value[i]) for i in not_numbers])
        return value
    if isinstance(value, dict):
        keys = {"from", "to", "step"}
        extra = [k for k in value if k not in keys]
        missing = sorted(keys - set(value))
        if extra or missing:
            what = (f"unknown key {show_value(extra[0])}" if extra
                    else f"missing key {missing[0]!r}")
            raise Problems([((), f"a range is {{from, to, step}}; {what}", value)])
        bad: list[tuple[tuple, str, Any]] = [
            ((k,), f"must be a {kind}", value[k]) for k in ("from", "to", "step")
               if not number(value[k]) or not math.isfinite(value[k])]
        if bad:
            raise Problems(bad)
        lo, hi, step = value["from"], value["to"], value["step"]
        if step <= 0:
            raise Problems([(("step",), "must be > 0", step)])
        if hi < lo:
            raise Problems([(("to",), f"must be >= from = {lo}", hi)])
        n = math.floor((hi - lo) / step + 1e-9) + 1
        if n > SWEEP_MAX_DESIGNS:
            raise Problems([(("step",), f"gives {n} values; allowed: at most "
                              f"{SWEEP_MAX_DESIGNS}", step)])
        return [lo + i * step for i in range(n)]
    raise Problems([((), f"must be a {kind}, a list of them or a range {{from, to, step}}",
                      value)])


def _float_axis(value: Any) -> Any:
    return _axis(value, integer=False)


def _inclination_axis(value: Any) -> Any:
    """An inclination axis, or ``sun-synchronous`` (one inclination per altitude)."""
    if isinstance(value, str):
        if value == SUN_SYNCHRONOUS:
            return value
        raise Problems([((), f"not allowed{did_you_mean(value, [SUN_SYNCHRONOUS])}; allowed: "
                          "sun-synchronous, a number, a list of them or a range "
                          "{from, to, step}", value)])
    return _axis(value, integer=False)


def _int_axis(value: Any) -> Any:
    return _axis(value, integer=True)


def _choice_axis(value: Any) -> Any:
    """``all`` or a whole number / list / range of whole numbers."""
    if isinstance(value, str):
        if value == "all":
            return value
        raise Problems([((), f"not allowed{did_you_mean(value, ['all'])}; allowed: all, a whole "
                          "number, a list of them or a range {from, to, step}", value)])
    return _axis(value, integer=True)


def _axis_schema(kind: str, **limits: float) -> WithJsonSchema:
    """JSON Schema of what a sweep axis accepts: a value, a list or {from, to, step}."""
    item = {"type": kind, **limits}
    bound = {"type": kind}
    return WithJsonSchema({"anyOf": [
        item,
        {"type": "array", "items": item, "minItems": 1},
        {"type": "object", "additionalProperties": False, "required": ["from", "to", "step"],
         "properties": {"from": bound, "to": bound, "step": {"type": kind,
                                                             "exclusiveMinimum": 0}}},
    ]}, mode="validation")


PositiveAxis = Annotated[list[Annotated[float, Field(gt=0.0)]], Field(min_length=1),
                         _axis_schema("number", exclusiveMinimum=0)]
InclinationAxis = Annotated[list[Inclination], Field(min_length=1),
                            _axis_schema("number", minimum=0, maximum=180)]
CountAxis = Annotated[list[Annotated[int, Field(ge=1, le=100000)]], Field(min_length=1),
                      _axis_schema("integer", minimum=1, maximum=100000)]
PhasingAxis = Annotated[list[Annotated[int, Field(ge=0, le=100000)]], Field(min_length=1),
                        _axis_schema("integer", minimum=0, maximum=100000)]
ElevationAxis = Annotated[list[Annotated[float, Field(ge=0.0, lt=90.0)]], Field(min_length=1),
                          _axis_schema("number", minimum=0, exclusiveMaximum=90)]


class SweepSection(SectionModel):
    """A batch of designs: every combination of the listed values (``covergrid sweep``).

    Each key takes a number, a list, or a range ``{from, to, step}`` (inclusive); a key left
    out keeps the value of the study's Walker group (or sensor). ``planes: all`` is every
    divisor of the total, ``phasing: all`` is 0 .. planes-1; combinations where the planes
    do not divide the total, or the phasing is not below the planes, are left out.
    """

    pattern: Literal["delta", "star"] | None = Field(
        None, description="Walker pattern (default: the study's group's).")
    altitude_km: PositiveAxis | None = Field(None, description="Altitudes a - R_E [km].")
    inclination_deg: InclinationAxis | Literal["sun-synchronous"] | None = Field(
        None, description="Inclinations [deg], or sun-synchronous (derived at each altitude; "
        "also the default when the study's template is sun-synchronous).")
    total: CountAxis | None = Field(None, description="Totals T.")
    planes: Literal["all"] | CountAxis | None = Field(
        None, description="Planes P, or all (every divisor of T).")
    phasing: Literal["all"] | PhasingAxis | None = Field(
        None, description="Phasings F, or all (0 .. P-1).")
    min_elevation_deg: ElevationAxis | None = Field(
        None, description="Minimum elevations [deg].")

    _floats = field_validator("altitude_km", "min_elevation_deg", mode="before")(_float_axis)
    _incs = field_validator("inclination_deg", mode="before")(_inclination_axis)
    _ints = field_validator("total", mode="before")(_int_axis)
    _choices = field_validator("planes", "phasing", mode="before")(_choice_axis)


class TotalRange(SectionModel):
    """The totals a sizing search tries, in increasing order."""

    min: int = Field(ge=1, le=100000, description="Smallest total T tried.")
    max: int = Field(ge=1, le=100000, description="Largest total T tried.")

    @model_validator(mode="after")
    def _check(self) -> TotalRange:
        if self.max < self.min:
            raise Problems([(("max",), f"must be >= min = {self.min}", self.max)])
        return self


class CoarseSection(SectionModel):
    """The cheaper evaluation a sizing search uses to prune designs before confirming them.

    A design is pruned (not evaluated at full resolution) when, on the coarse evaluation,
    the share of the area meeting the requirement's threshold is below the requirement's
    ``area_fraction`` minus ``area_tolerance``.
    """

    resolution_deg: float | None = Field(
        None, ge=0.05, le=30.0,
        description="Coarse grid cell size [deg] (default: twice the study's, if it fits).")
    step_s: float | None = Field(
        None, ge=1e-3, description="Coarse time step [s] (default: twice the study's, if it "
        "divides the span; at least 1 ms).")
    area_tolerance: float = Field(
        0.02, ge=0.0, le=1.0, description="Share of the area by which a coarse evaluation "
        "may fall short of the requirement and still be confirmed [unitless].")


class SizingSection(SectionModel):
    """Search for the smallest Walker constellation meeting the requirement (``covergrid size``).

    For each altitude and inclination, totals are tried from ``total.min`` upwards; the
    first total with a design (planes, phasing) meeting the requirement ends the search
    there. Ties between designs of that total go to fewer planes, then the larger margin,
    then the smaller phasing.
    """

    pattern: Literal["delta", "star"] = Field("delta", description="Walker pattern.")
    altitude_km: PositiveAxis = Field(description="Altitudes a - R_E [km].")
    inclination_deg: InclinationAxis | Literal["sun-synchronous"] = Field(
        description="Inclinations [deg], or sun-synchronous (derived at each altitude).")
    total: TotalRange = Field(description="Totals to try {min, max}.")
    planes: Literal["all"] | CountAxis = Field(
        "all", description="Planes P, or all (every divisor of T).")
    phasing: Literal["all"] | PhasingAxis = Field(
        "all", description="Phasings F, or all (0 .. P-1).")
    robust_to_one_loss: bool = Field(
        False, description="A design counts only if the requirement holds after losing its "
        "worst single satellite.")
    loss_cases: Literal["one_per_plane", "all"] = Field(
        "one_per_plane", description="Which single losses are evaluated: the first satellite "
        "of each plane, or every satellite.")
    prune: bool = Field(True, description="Evaluate coarsely first and prune (see coarse).")
    coarse: CoarseSection = Field(default_factory=lambda: CoarseSection.model_validate({}))

    _floats = field_validator("altitude_km", mode="before")(_float_axis)
    _incs = field_validator("inclination_deg", mode="before")(_inclination_axis)
    _choices = field_validator("planes", "phasing", mode="before")(_choice_axis)
