"""The study: the top-level model of a study file and the rules between its sections.

:class:`Study` holds a validated study file: every section (:mod:`covergrid.study.sections`,
:mod:`covergrid.study.trade_sections`) plus the rules that join them (the span is a whole
number of steps, ids unique over all groups, a requirement's fold no larger than the
constellation, ...). It holds the file's values; :func:`covergrid.study.build.resolve` turns
them, once, into what the computation takes.
"""

from __future__ import annotations

import datetime as _dt
import math
from typing import Any

import yaml
from pydantic import Field, field_validator, model_validator

from covergrid.compute.sensor import is_side_looking
from covergrid.compute.span import count_steps
from covergrid.constants import WGS84_A_KM
from covergrid.errors import CovergridError
from covergrid.orbits.walker import count_walker_options
from covergrid.study.messages import Problems, format_path, reason_of
from covergrid.study.orbit_rules import (
    SUN_SYNCHRONOUS,
    orbit_size_problems,
    sun_synchronous_inclination_deg,
)
from covergrid.study.place_sections import RegionSection, TargetsSection
from covergrid.study.sections import (
    NAME_RE,
    ComputeSection,
    DopSection,
    GridSection,
    GroupEntry,
    MapsSection,
    OutputSection,
    RequirementSection,
    SectionModel,
    SensorSection,
    text_id,
)
from covergrid.study.trade_sections import (
    SIZING_MAX_DESIGNS,
    SWEEP_MAX_DESIGNS,
    SizingSection,
    SweepSection,
)

__all__ = ["EPOCH_TEXT_MAX", "MIN_STEP_S", "SECONDS_PER_HOUR", "STUDY_NAME_MAX", "Study"]

SECONDS_PER_HOUR = 3600.0
STUDY_NAME_MAX = 100
#: Shortest step [s]: a millisecond. Finer sampling means nothing for mean-element orbits
#: (their along-track error is kilometres, a satellite's travel in about a second).
MIN_STEP_S = 1e-3
#: Longest epoch text [characters] (``2031-03-20T00:00:00.123456789+00:00`` has 35).
EPOCH_TEXT_MAX = 64


class Study(SectionModel):
    """A coverage study: what flies, what it sees, where and when to measure."""

    study: str = Field(description="Study name: a plain file name; the output folder.")
    epoch: str = Field(description="Start time, ISO 8601 UTC (e.g. 2031-03-20T00:00:00Z).")
    duration_h: float = Field(gt=0.0, le=24.0 * 3660, description="Span [h].")
    step_s: float = Field(ge=MIN_STEP_S, description="Time step [s] (at least 1 ms).")
    constellation: list[GroupEntry] = Field(min_length=1)
    sensor: SensorSection = Field(default_factory=lambda: SensorSection.model_validate({}))
    grid: GridSection = Field(default_factory=lambda: GridSection.model_validate({}))
    requirement: RequirementSection | None = None
    region: RegionSection | None = Field(
        None, description="Compute only the cells in GeoJSON areas and/or on land or sea.")
    targets: TargetsSection | None = Field(
        None, description="Point targets evaluated exactly at each site.")
    dop: DopSection | None = Field(None, description="Also compute the dilutions of precision "
                                   "(navigation studies).")
    maps: MapsSection = Field(default_factory=lambda: MapsSection.model_validate({}))
    compute: ComputeSection = Field(default_factory=lambda: ComputeSection.model_validate({}))
    output: OutputSection = Field(default_factory=lambda: OutputSection.model_validate({}))
    sweep: SweepSection | None = Field(None, description="A batch of designs (covergrid sweep).")
    sizing: SizingSection | None = Field(None, description="A sizing search (covergrid size).")
    refine_transitions: bool = Field(
        True, description="Continuous time: every rise and set at its limit-crossing time "
        "between samples, passes shorter than a step found (true), or pure sampled values, "
        "sample and hold (false).")

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
        if value in ("", ".", ".."):
            raise ValueError("must be a name, not empty, '.' or '..'; allowed: letters, "
                             "digits, '-', '_' and '.'")
        if value.startswith("."):
            raise ValueError("must not start with '.' (a hidden name: covergrid keeps its own "
                             "hidden working folders beside the results); allowed: letters, "
                             "digits, '-', '_' and '.', starting with a letter, digit, '-' or "
                             "'_'")
        if ".." in value:
            raise ValueError("must not contain '..'; allowed: letters, digits, '-', '_' and "
                             "'.'")
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

        if len(value) > EPOCH_TEXT_MAX:
            raise ValueError(f"is {len(value):,} characters long, not an ISO 8601 time; "
                             f"allowed: e.g. 2031-03-20T00:00:00Z (at most {EPOCH_TEXT_MAX} "
                             "characters)")
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
        problems += _span_problems(self)
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
        problems += _dop_problems(self)
        if self.targets is not None and self.sensor.min_sun_elevation_deg is not None:
            # the point-target passes are geometric (rise and set by the sensor's limits)
            problems.append((("targets",), "passes of point targets do not yet apply a "
                             "daylight constraint; leave out sensor.min_sun_elevation_deg or "
                             "targets", None))
        if self.targets is not None and _side_looking(self.sensor):
            # the point-target kernel applies the outer limits only
            problems.append((("targets",), "passes of point targets do not yet apply a "
                             "side-looking sensor; leave out sensor.min_off_nadir_deg and "
                             "sensor.look_side, or targets", None))
        if self.sensor.min_off_nadir_deg is not None and not problems:
            # the horizon lies at asin(R / r) off nadir, widest from the lowest perigee and
            # with the equatorial radius: an inner edge beyond it leaves nothing in view
            lowest = min(_lowest_perigee_altitude_km(g) for g in self.constellation)
            horizon = math.degrees(math.asin(WGS84_A_KM / (WGS84_A_KM + lowest)))
            if self.sensor.min_off_nadir_deg >= horizon:
                problems.append((("sensor", "min_off_nadir_deg"), f"lies beyond the horizon "
                                 f"seen from the lowest satellite ({horizon:.2f} deg off "
                                 f"nadir), so nothing would ever be in view; allowed: less "
                                 f"than {horizon:.2f} deg", self.sensor.min_off_nadir_deg))
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
        """The study with every default filled in, as plain data; the files it names are
        inlined (the region's areas as one GeoJSON geometry, the targets as sites), so the
        record stands alone wherever it is read."""
        data = self.model_dump(mode="json")
        if self.region is not None and self.region.areas_wkb is not None:
            import json

            import shapely

            geometry = shapely.from_wkb(self.region.areas_wkb)
            data["region"]["geojson"] = [json.loads(shapely.to_geojson(geometry))]
        if self.targets is not None and self.targets.file is not None:
            data["targets"]["file"] = None
            data["targets"]["sites"] = [t.model_dump(mode="json")
                                        for t in self.targets.entries]
        return data

    def dump_resolved_yaml(self) -> str:
        """The resolved study as YAML text (the provenance record written beside outputs)."""
        return yaml.safe_dump(self.resolved_dict(), sort_keys=False, allow_unicode=False)


def _span_problems(study: Study) -> list[tuple[tuple, str, Any]]:
    """The span must end within the supported years (``earth.time.EPOCH_MAX_YEAR``)."""
    import numpy as np

    from covergrid.earth.time import EPOCH_MAX_YEAR, EPOCH_MIN_YEAR, parse_epoch

    start = parse_epoch(study.epoch)
    last = np.datetime64(f"{EPOCH_MAX_YEAR + 1}-01-01T00:00:00", "ns")
    room_s = float((last - start) / np.timedelta64(1, "s"))
    if study.duration_s > room_s:
        return [(("duration_h",), f"the span from {study.epoch} would end after "
                 f"{EPOCH_MAX_YEAR} (supported years: {EPOCH_MIN_YEAR} to {EPOCH_MAX_YEAR}); "
                 f"allowed: at most {room_s / SECONDS_PER_HOUR:.6g} h from this epoch",
                 study.duration_h)]
    return []


def _dop_problems(study: Study) -> list[tuple[tuple, str, Any]]:
    """A DOP metric in the requirement or the maps needs the ``dop:`` section."""
    if study.dop is not None:
        if study.sensor.min_sun_elevation_deg is not None:
            return [(("dop",), "is computed from every satellite in view, day and night; "
                     "leave out sensor.min_sun_elevation_deg (a daylight constraint) or dop",
                     None)]
        if _side_looking(study.sensor):
            return [(("dop",), "uses the satellites above the elevation mask (navigation "
                     "signals), not a side-looking sensor; leave out "
                     "sensor.min_off_nadir_deg and sensor.look_side, or dop", None)]
        return []
    from covergrid.compute.metrics import DOP_METRICS

    uses: list[tuple[tuple, str]] = []
    if study.requirement is not None and study.requirement.metric in DOP_METRICS:
        uses.append((("requirement", "metric"), study.requirement.metric))
    uses += [(("maps", "metrics", i), m) for i, m in enumerate(study.maps.metrics)
             if m in DOP_METRICS]
    return [(where, "is a dilution-of-precision metric: add a dop: section (dop: "
             "{pdop_threshold: 6}) to compute it", m) for where, m in uses]


def _side_looking(sensor: SensorSection) -> bool:
    """Whether the sensor section states a side-looking sensor (an inner off-nadir angle or
    one side of the track)."""
    return is_side_looking(sensor.min_off_nadir_deg, sensor.look_side)


def _lowest_perigee_altitude_km(group: GroupEntry) -> float:
    """Lowest perigee altitude a(1 - e) - R_E of a group's satellites [km]."""
    if group.template is not None:
        return group.template.perigee_altitude_km
    return min(s.perigee_altitude_km for s in group.satellites or [])


def _trade_problems(study: Study) -> list[tuple[tuple, str, Any]]:
    """Cross-field rules of the sweep and sizing blocks, their altitudes and their size."""
    problems: list[tuple[tuple, str, Any]] = []
    if study.sizing is not None and study.requirement is None:
        problems.append((("requirement",), "is required with sizing (the search looks for the "
                         "smallest design meeting it)", None))
    template = next((g.template for g in study.constellation if g.walker is not None), None)
    e = template.eccentricity if template is not None else 0.0
    if study.sweep is not None:
        group = study.constellation[0]
        if len(study.constellation) != 1 or group.walker is None or group.template is None:
            problems.append((("sweep",), "needs the constellation to be one Walker group "
                             "(walker + template): the sweep substitutes its values into it",
                             None))
        else:
            sso = (study.sweep.inclination_deg == SUN_SYNCHRONOUS
                   or (study.sweep.inclination_deg is None and group.template.sun_synchronous))
            problems += _altitude_problems("sweep", study.sweep.altitude_km, e, sso)
            problems += _sweep_size_problems(study.sweep, group)
    if study.sizing is not None:
        problems += _altitude_problems("sizing", study.sizing.altitude_km, e,
                                       study.sizing.inclination_deg == SUN_SYNCHRONOUS)
        problems += _sizing_size_problems(study.sizing)
    return problems


def _altitude_problems(block: str, altitudes, e: float, sso: bool = False
                       ) -> list[tuple[tuple, str, Any]]:
    """Each altitude of a trade block with the template's eccentricity: perigee above the
    surface, apogee inside the sphere of influence, and with ``sso`` a sun-synchronous
    inclination (the first bad one is reported)."""
    for i, alt in enumerate(altitudes or []):
        found = orbit_size_problems(alt, None, e, size_key="altitude_km")
        if not found and sso:
            try:
                sun_synchronous_inclination_deg(WGS84_A_KM + alt, e)
            except Problems as exc:
                found = exc.problems
        if found:
            (_, text, _), = found
            where = ("" if e == 0 else
                     f" (the template's eccentricity {e:g} applies to every altitude)")
            return [((block, "altitude_km", i), f"{text}{where}", alt)]
    return []


def _sweep_size_problems(sweep: SweepSection, group: GroupEntry) -> list[tuple[tuple, str, Any]]:
    """The sweep's designs: the product of its axes, at least one and at most the limit."""
    w = group.walker
    assert w is not None
    n_alt = len(set(sweep.altitude_km or [0.0]))
    n_inc = len(set(sweep.inclination_deg or [0.0]))
    n_el = len(set(sweep.min_elevation_deg or [0.0]))
    planes = sweep.planes if sweep.planes is not None else [w.planes]
    phasing = sweep.phasing if sweep.phasing is not None else [w.phasing]
    patterns = count_walker_options(sweep.total or [w.total], planes, phasing)
    n = n_alt * n_inc * n_el * patterns
    if patterns == 0:
        return [(("sweep",), f"no combination of total, planes ({_axis_text(planes)}) and "
                 f"phasing ({_axis_text(phasing)}) is a Walker pattern (planes must divide "
                 "the total, phasing must be below the planes)", None)]
    if n > SWEEP_MAX_DESIGNS:
        return [(("sweep",), f"gives {n:,} designs ({n_alt:,} altitudes x {n_inc:,} "
                 f"inclinations x {n_el:,} elevations x {patterns:,} Walker patterns); "
                 f"allowed: at most {SWEEP_MAX_DESIGNS:,} designs in one sweep", None)]
    return []


def _sizing_size_problems(sizing: SizingSection) -> list[tuple[tuple, str, Any]]:
    """The sizing search's space (every total, planes and phasing it may try at every
    altitude and inclination) is at most the limit."""
    cells = len(set(sizing.altitude_km)) * len(set(sizing.inclination_deg))
    patterns = count_walker_options(range(sizing.total.min, sizing.total.max + 1),
                                    sizing.planes, sizing.phasing)
    n = cells * patterns
    if n > SIZING_MAX_DESIGNS:
        return [(("sizing", "total", "max"), f"the search may try {n:,} designs ({cells:,} "
                 f"altitude-inclination pairs x {patterns:,} Walker patterns with totals "
                 f"{sizing.total.min} to {sizing.total.max}); allowed: at most "
                 f"{SIZING_MAX_DESIGNS:,}; lower total.max or list planes and phasing",
                 sizing.total.max)]
    return []


def _axis_text(axis) -> str:
    return axis if isinstance(axis, str) else ", ".join(str(v) for v in axis[:6]) + (
        " ..." if len(axis) > 6 else "")
