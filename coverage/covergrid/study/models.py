"""The study: the top-level model of a study file and the rules between its sections.

:class:`Study` holds a validated study file: every section (:mod:`covergrid.study.sections`,
:mod:`covergrid.study.trade_sections`) plus the rules that join them (the span is a whole
number of steps, ids unique over all groups, a requirement's fold no larger than the
constellation, ...). It holds the file's values; :func:`covergrid.study.build.resolve` turns
them, once, into what the computation takes.
"""

from __future__ import annotations

import datetime as _dt
from typing import Any

import yaml
from pydantic import Field, field_validator, model_validator

from covergrid.compute.span import count_steps
from covergrid.errors import CovergridError
from covergrid.study.messages import Problems, format_path, reason_of
from covergrid.study.sections import (
    NAME_RE,
    ComputeSection,
    GridSection,
    GroupEntry,
    MapsSection,
    OutputSection,
    RequirementSection,
    SectionModel,
    SensorSection,
    text_id,
)
from covergrid.study.trade_sections import SizingSection, SweepSection

__all__ = ["SECONDS_PER_HOUR", "STUDY_NAME_MAX", "Study"]

SECONDS_PER_HOUR = 3600.0
STUDY_NAME_MAX = 100


class Study(SectionModel):
    """A coverage study: what flies, what it sees, where and when to measure."""

    study: str = Field(description="Study name: a plain file name; the output folder.")
    epoch: str = Field(description="Start time, ISO 8601 UTC (e.g. 2031-03-20T00:00:00Z).")
    duration_h: float = Field(gt=0.0, le=24.0 * 3660, description="Span [h].")
    step_s: float = Field(gt=0.0, description="Time step [s].")
    constellation: list[GroupEntry] = Field(min_length=1)
    sensor: SensorSection = Field(default_factory=lambda: SensorSection.model_validate({}))
    grid: GridSection = Field(default_factory=lambda: GridSection.model_validate({}))
    requirement: RequirementSection | None = None
    maps: MapsSection = Field(default_factory=lambda: MapsSection.model_validate({}))
    compute: ComputeSection = Field(default_factory=lambda: ComputeSection.model_validate({}))
    output: OutputSection = Field(default_factory=lambda: OutputSection.model_validate({}))
    sweep: SweepSection | None = Field(None, description="A batch of designs (covergrid sweep).")
    sizing: SizingSection | None = Field(None, description="A sizing search (covergrid size).")
    refine_transitions: bool = Field(
        True, description="Place gap starts and ends at the limit-crossing time between "
        "samples (true), or at the sample (false: pure sampled values).")

    _study_text = field_validator("study", mode="before")(text_id)

    @field_validator("study")
    @classmethod
    def _plain_name(cls, value: str) -> str:
        bad = [c for c in value if ord(c) < 32 or ord(c) == 127]
        if bad:
            raise ValueError("must not contain control characters; allowed: letters, digits, "
                             "'-', '_' and '.'")
        if "/" in value or "\\" in value:
            raise ValueError("must be a plain file name without path separators; allowed: "
                             "letters, digits, '-', '_' and '.'")
        if value in ("", ".", "..") or ".." in value:
            raise ValueError("must not be empty or contain '..'; allowed: letters, digits, "
                             "'-', '_' and '.'")
        if not NAME_RE.match(value) or len(value) > STUDY_NAME_MAX:
            raise ValueError(f"must be a plain file name of at most {STUDY_NAME_MAX} letters, "
                             "digits, '-', '_' and '.'")
        return value

    @field_validator("epoch", mode="before")
    @classmethod
    def _epoch_text(cls, value: Any) -> Any:
        # YAML reads an unquoted timestamp as a datetime; turn it back into ISO text.
        if isinstance(value, _dt.datetime):
            if value.tzinfo is not None:
                value = value.astimezone(_dt.timezone.utc).replace(tzinfo=None)
                return value.isoformat() + "Z"
            return value.isoformat()
        if isinstance(value, _dt.date):
            return value.isoformat() + "T00:00:00Z"
        return value

    @field_validator("epoch")
    @classmethod
    def _epoch(cls, value: str) -> str:
        from covergrid.earth.time import epoch_to_iso, parse_epoch

        try:
            return epoch_to_iso(parse_epoch(value))
        except (ValueError, TypeError, OverflowError) as exc:
            # parse_epoch's message already names the value and what is allowed.
            raise Problems([((), reason_of(exc), None)]) from None

    @model_validator(mode="after")
    def _cross(self) -> Study:
        problems: list[tuple[tuple, str, Any]] = []
        try:
            count_steps(self.duration_s, self.step_s)
        except CovergridError as exc:
            problems.append((("step_s",), reason_of(str(exc).partition(": ")[2]), self.step_s))
        seen: dict[str, tuple] = {}
        for gi, group in enumerate(self.constellation):
            for si, sat in enumerate(group.satellites or []):
                where = ("constellation", gi, "satellites", si, "id")
                if sat.id in seen:
                    problems.append((where, f"duplicate satellite id, already used at "
                                     f"{format_path(seen[sat.id])}; ids must be unique",
                                     sat.id))
                else:
                    seen[sat.id] = where
        names = [g.name for g in self.constellation if g.name is not None]
        for gi, group in enumerate(self.constellation):
            if group.name is not None and names.count(group.name) > 1:
                problems.append((("constellation", gi, "name"), "duplicate group name; group "
                                 "names must be unique", group.name))
                break
        if self.requirement is not None and self.requirement.metric == "nfold_fraction":
            total = sum(g.count for g in self.constellation)
            if self.requirement.k is not None and self.requirement.k > total:
                problems.append((("requirement", "k"), f"exceeds the number of satellites "
                                 f"{total}; allowed: 1 to {total}", self.requirement.k))
        problems += _trade_problems(self)
        if self.sensor.max_range_km is not None and not problems:
            # every satellite stays at least (perigee radius - equatorial radius) from the
            # ground: a shorter range limit means nothing is ever in view
            lowest = min(_lowest_perigee_altitude_km(g) for g in self.constellation)
            if self.sensor.max_range_km < lowest:
                problems.append((("sensor", "max_range_km"), f"is shorter than the lowest "
                                 f"satellite altitude ({lowest:.1f} km), so nothing would ever "
                                 f"be in view; allowed: more than {lowest:.1f} km",
                                 self.sensor.max_range_km))
        if problems:
            raise Problems(problems)
        return self

    # --- plain facts of the file's values ----------------------------------------------
    @property
    def duration_s(self) -> float:
        """Span [s]."""
        return self.duration_h * SECONDS_PER_HOUR

    @property
    def n_satellites(self) -> int:
        """Number of satellites over all groups."""
        return sum(g.count for g in self.constellation)

    def resolved_dict(self) -> dict:
        """The study with every default filled in, as plain data."""
        return self.model_dump(mode="json")

    def dump_resolved_yaml(self) -> str:
        """The resolved study as YAML text (the provenance record written beside outputs)."""
        return yaml.safe_dump(self.resolved_dict(), sort_keys=False, allow_unicode=False)


def _lowest_perigee_altitude_km(group: GroupEntry) -> float:
    """Lowest perigee altitude a(1 - e) - R_E of a group's satellites [km]."""
    if group.template is not None:
        return group.template.perigee_altitude_km
    return min(s.perigee_altitude_km for s in group.satellites or [])


def _trade_problems(study: Study) -> list[tuple[tuple, str, Any]]:
    """Cross-field rules of the sweep and sizing blocks."""
    problems: list[tuple[tuple, str, Any]] = []
    if study.sizing is not None and study.requirement is None:
        problems.append((("requirement",), "is required with sizing (the search looks for the "
                         "smallest design meeting it)", None))
    if study.sweep is not None:
        group = study.constellation[0]
        if len(study.constellation) != 1 or group.walker is None:
            problems.append((("sweep",), "needs the constellation to be one Walker group "
                             "(walker + template): the sweep substitutes its values into it",
                             None))
    return problems
