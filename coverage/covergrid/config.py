"""The study file: pydantic models, YAML loading and the JSON Schema.

A study file is YAML read with a safe loader (plain data only). Every key is checked:
unknown keys are errors with a "did you mean" hint, every value is range-checked, and
cross-field rules (planes divide total, perigee above the surface, ...) are applied. All
problems found are gathered into one :class:`covergrid.errors.StudyError` whose text names
each field by its dotted path (``constellation[0].walker.planes``), the offending value and
what is allowed.

Degrees are used in the file; :meth:`Study.to_elements` converts to radians once.
"""

from __future__ import annotations

import datetime as _dt
import difflib
import math
import re
import typing
from pathlib import Path
from typing import Annotated, Any, Literal

import numpy as np
import yaml
from pydantic import (
    BaseModel,
    ConfigDict,
    Field,
    ValidationError,
    WithJsonSchema,
    field_validator,
    model_validator,
)

from covergrid.constants import DEG, MU_EARTH_KM3_S2, WGS84_A_KM
from covergrid.errors import CovergridError, ElementError, StudyError

__all__ = [
    "Study",
    "load_study",
    "parse_study",
    "export_schema",
    "format_path",
]

SECONDS_PER_HOUR = 3600.0
# The schedulers a study may name besides a "tcp://host:port" or "tls://host:port" address.
SCHEDULERS = ("threads", "synchronous", "processes", "local-cluster")
DEFAULT_MAP_METRICS = ("coverage_fraction", "max_gap", "mean_response_time", "mean_in_view")
_ADDRESS_RE = re.compile(r"^(tcp|tls)://[A-Za-z0-9_.\-\[\]:]+:[0-9]{1,5}$")
_NAME_RE = re.compile(r"^[A-Za-z0-9_.\-]+$")
_STUDY_NAME_MAX = 100
# The span must be a whole number of steps to this relative precision (as the engine asks).
STEP_COUNT_TOLERANCE = 1e-6


class _Problems(ValueError):
    """Several located problems found by a cross-field check (unpacked by the converter)."""

    def __init__(self, problems: list[tuple[tuple, str, Any]]) -> None:
        self.problems = problems
        super().__init__("; ".join(f"{format_path(p)}: {m}" for p, m, _ in problems))


class _Model(BaseModel):
    """Base of every study model: unknown keys forbidden, no NaN/inf, no silent coercion."""

    model_config = ConfigDict(extra="forbid", allow_inf_nan=False, strict=True, frozen=True)


Angle360 = Annotated[float, Field(ge=-360.0, le=360.0)]
Inclination = Annotated[float, Field(ge=0.0, le=180.0)]
Vector3 = Annotated[list[float], Field(min_length=3, max_length=3)]


def _text_id(value: Any) -> Any:
    """Accept a whole number as an identifier (YAML reads ``id: 7`` as an integer)."""
    if isinstance(value, int) and not isinstance(value, bool):
        return str(value)
    return value


class OrbitTemplate(_Model):
    """The orbit every satellite of a Walker group shares (mean elements at the epoch)."""

    altitude_km: float | None = Field(
        None, gt=0.0, description="Semi-major axis minus the WGS-84 equatorial radius [km]."
    )
    semi_major_axis_km: float | None = Field(None, gt=0.0, description="Semi-major axis [km].")
    eccentricity: float = Field(0.0, ge=0.0, lt=1.0, description="Eccentricity [unitless].")
    inclination_deg: Inclination = Field(description="Inclination [deg].")
    raan_deg: Angle360 = Field(0.0, description="RAAN of the first plane [deg].")
    arg_perigee_deg: Angle360 = Field(0.0, description="Argument of perigee [deg].")
    mean_anomaly_deg: Angle360 = Field(
        0.0, description="Mean anomaly of the first satellite of the first plane [deg]."
    )

    @model_validator(mode="after")
    def _check(self) -> OrbitTemplate:
        problems = _size_problems(self.altitude_km, self.semi_major_axis_km, self.eccentricity)
        if problems:
            raise _Problems(problems)
        return self

    @property
    def a_km(self) -> float:
        """Semi-major axis [km]."""
        if self.semi_major_axis_km is not None:
            return self.semi_major_axis_km
        return WGS84_A_KM + float(self.altitude_km)  # type: ignore[arg-type]


def _size_problems(alt_km, a_km, e) -> list[tuple[tuple, str, Any]]:
    """Exactly one of altitude/semi-major axis, and the perigee above the surface."""
    if (alt_km is None) == (a_km is None):
        both = alt_km is not None
        return [
            (
                ("altitude_km",),
                "give exactly one of altitude_km or semi_major_axis_km"
                + ("; both were given" if both else "; neither was given"),
                None,
            )
        ]
    a = a_km if a_km is not None else WGS84_A_KM + alt_km
    perigee_alt_km = a * (1.0 - e) - WGS84_A_KM
    if perigee_alt_km <= 0.0:
        size_key = "semi_major_axis_km" if a_km is not None else "altitude_km"
        key = "eccentricity" if e > 0 else size_key
        return [
            (
                (key,),
                f"perigee altitude a(1-e) - R_E = {perigee_alt_km:.1f} km is below the surface "
                f"(a = {a:.1f} km, e = {e:g}); allowed: a(1-e) > {WGS84_A_KM} km",
                e if key == "eccentricity" else (a_km if a_km is not None else alt_km),
            )
        ]
    return []


class WalkerSpec(_Model):
    """A Walker pattern T/P/F."""

    pattern: Literal["delta", "star"] = Field(
        description="delta: planes spread over 360 deg of RAAN; star: over 180 deg."
    )
    total: int = Field(ge=1, le=100000, description="Total number of satellites T.")
    planes: int = Field(ge=1, description="Number of equally spaced orbit planes P.")
    phasing: int = Field(ge=0, description="Relative phasing F, 0 <= F < P.")

    @model_validator(mode="after")
    def _check(self) -> WalkerSpec:
        problems = []
        if self.total % self.planes:
            divisors = [d for d in range(1, self.total + 1) if self.total % d == 0]
            shown = ", ".join(str(d) for d in divisors[:30])
            shown += " ..." if len(divisors) > 30 else ""
            problems.append(
                (
                    ("planes",),
                    f"must divide total = {self.total}; allowed: {shown}",
                    self.planes,
                )
            )
        if self.phasing >= self.planes:
            problems.append(
                (("phasing",), f"must be less than planes = {self.planes}; allowed: 0 to "
                 f"{self.planes - 1}", self.phasing)
            )
        if problems:
            raise _Problems(problems)
        return self


class SatelliteSpec(_Model):
    """One satellite: Keplerian elements, or an inertial state vector at the epoch."""

    id: str = Field(min_length=1, max_length=64, description="Unique satellite identifier.")
    altitude_km: float | None = Field(None, gt=0.0, description="a minus R_E [km].")
    semi_major_axis_km: float | None = Field(None, gt=0.0, description="Semi-major axis [km].")
    eccentricity: float | None = Field(None, ge=0.0, lt=1.0,
                                       description="Eccentricity (0 if not given).")
    inclination_deg: Inclination | None = Field(None, description="Inclination [deg].")
    raan_deg: Angle360 | None = Field(None, description="RAAN [deg] (0 if not given).")
    arg_perigee_deg: Angle360 | None = Field(None, description="Argument of perigee [deg] (0 if "
                                             "not given).")
    true_anomaly_deg: Angle360 | None = Field(None, description="True anomaly [deg].")
    mean_anomaly_deg: Angle360 | None = Field(None, description="Mean anomaly [deg].")
    position_km: Vector3 | None = Field(None, description="Inertial (GCRS-like) position [km].")
    velocity_km_s: Vector3 | None = Field(None, description="Inertial velocity [km/s].")

    _ELEMENT_KEYS: typing.ClassVar[tuple[str, ...]] = (
        "altitude_km", "semi_major_axis_km", "eccentricity", "inclination_deg", "raan_deg",
        "arg_perigee_deg", "true_anomaly_deg", "mean_anomaly_deg",
    )

    _id_text = field_validator("id", mode="before")(_text_id)

    @model_validator(mode="before")
    @classmethod
    def _element_defaults(cls, data: Any) -> Any:
        """Fill eccentricity, RAAN and argument of perigee with 0 for Keplerian satellites."""
        if isinstance(data, dict) and "position_km" not in data and "velocity_km_s" not in data:
            data = dict(data)
            for key in ("eccentricity", "raan_deg", "arg_perigee_deg"):
                data.setdefault(key, 0.0)
        return data

    @property
    def is_state_vector(self) -> bool:
        """True when the satellite is given as a position and velocity."""
        return self.position_km is not None or self.velocity_km_s is not None

    @model_validator(mode="after")
    def _check(self) -> SatelliteSpec:
        if not _NAME_RE.match(self.id):
            raise _Problems([(("id",), "may hold only letters, digits, '-', '_' and '.'", self.id)])
        if self.is_state_vector:
            given = [k for k in self._ELEMENT_KEYS if getattr(self, k) is not None]
            if given:
                raise _Problems([((given[0],), "give either Keplerian elements or position_km "
                                  "with velocity_km_s, not both", getattr(self, given[0]))])
            if self.position_km is None or self.velocity_km_s is None:
                missing = "position_km" if self.position_km is None else "velocity_km_s"
                raise _Problems([((missing,), "a state vector needs both position_km and "
                                  "velocity_km_s", None)])
            return self._check_state()
        problems = _size_problems(self.altitude_km, self.semi_major_axis_km,
                                  self.eccentricity or 0.0)
        if self.inclination_deg is None:
            problems.append((("inclination_deg",), "is required for Keplerian elements "
                             "(0 to 180 deg)", None))
        if (self.true_anomaly_deg is None) == (self.mean_anomaly_deg is None):
            problems.append((("true_anomaly_deg",), "give exactly one of true_anomaly_deg or "
                             "mean_anomaly_deg", self.true_anomaly_deg))
        if problems:
            raise _Problems(problems)
        return self

    def _check_state(self) -> SatelliteSpec:
        """Two-body energy and perigee of the state vector (Vallado 5th ed., Algorithm 9)."""
        r = [float(x) for x in self.position_km]  # type: ignore[union-attr]
        v = [float(x) for x in self.velocity_km_s]  # type: ignore[union-attr]
        r_km = math.sqrt(sum(x * x for x in r))
        if r_km <= WGS84_A_KM:
            raise _Problems([(("position_km",), f"|r| = {r_km:.1f} km is inside the Earth; "
                              f"allowed: |r| > {WGS84_A_KM} km", self.position_km)])
        v2 = sum(x * x for x in v)
        energy = v2 / 2.0 - MU_EARTH_KM3_S2 / r_km
        h = (r[1] * v[2] - r[2] * v[1], r[2] * v[0] - r[0] * v[2], r[0] * v[1] - r[1] * v[0])
        h2 = sum(x * x for x in h)
        if energy >= 0.0:
            raise _Problems([(("velocity_km_s",), f"|v| = {math.sqrt(v2):.4f} km/s gives an "
                              "unbound orbit (e >= 1); allowed: |v| < escape speed "
                              f"{math.sqrt(2 * MU_EARTH_KM3_S2 / r_km):.4f} km/s",
                              self.velocity_km_s)])
        a_km = -MU_EARTH_KM3_S2 / (2.0 * energy)
        e = math.sqrt(max(0.0, 1.0 - h2 / (MU_EARTH_KM3_S2 * a_km)))
        if h2 == 0.0 or a_km * (1.0 - e) <= WGS84_A_KM:
            raise _Problems([(("velocity_km_s",), f"the orbit's perigee radius "
                              f"{a_km * (1.0 - e):.1f} km is below the surface; allowed: "
                              f"perigee radius > {WGS84_A_KM} km", self.velocity_km_s)])
        return self


class ConstellationGroup(_Model):
    """One group of satellites: a Walker pattern with its template, or a list of satellites."""

    name: str | None = Field(None, min_length=1, max_length=40,
                             description="Group name; prefixes the satellite ids.")
    walker: WalkerSpec | None = None
    template: OrbitTemplate | None = None
    satellites: list[SatelliteSpec] | None = Field(None, min_length=1)

    @model_validator(mode="after")
    def _check(self) -> ConstellationGroup:
        if self.name is not None and not _NAME_RE.match(self.name):
            raise _Problems([(("name",), "may hold only letters, digits, '-', '_' and '.'",
                              self.name)])
        if self.satellites is not None:
            if self.walker is not None or self.template is not None:
                key = "walker" if self.walker is not None else "template"
                raise _Problems([((key,), "a group is either walker+template or satellites, "
                                  "not both", None)])
            return self
        if self.walker is None and self.template is None:
            raise _Problems([((), "a group needs walker+template or satellites", None)])
        if self.walker is None:
            raise _Problems([(("walker",), "is required with template "
                              "(walker: {pattern, total, planes, phasing})", None)])
        if self.template is None:
            raise _Problems([(("template",), "is required with walker (template: "
                              "{altitude_km, inclination_deg, ...})", None)])
        return self

    @property
    def count(self) -> int:
        """Number of satellites in the group."""
        return self.walker.total if self.walker is not None else len(self.satellites or [])


class SensorSpec(_Model):
    """What a satellite can see: a cell is covered when every given limit holds."""

    min_elevation_deg: float = Field(10.0, ge=0.0, lt=90.0,
                                     description="Minimum elevation seen from the cell [deg].")
    max_off_nadir_deg: float | None = Field(None, gt=0.0, lt=90.0,
                                            description="Sensor half-cone angle [deg].")
    max_range_km: float | None = Field(None, gt=0.0, description="Maximum slant range [km].")


class GridSpec(_Model):
    """The latitude-longitude grid of cells."""

    resolution_deg: float = Field(2.0, ge=0.05, le=30.0, description="Cell size [deg].")
    lat_min_deg: float = Field(-90.0, ge=-90.0, le=90.0, description="Southern edge [deg].")
    lat_max_deg: float = Field(90.0, ge=-90.0, le=90.0, description="Northern edge [deg].")

    @model_validator(mode="after")
    def _check(self) -> GridSpec:
        if self.lat_min_deg >= self.lat_max_deg:
            raise _Problems([(("lat_min_deg",), f"must be less than lat_max_deg = "
                              f"{self.lat_max_deg}", self.lat_min_deg)])
        try:
            self.cells()
        except CovergridError as exc:
            key = (exc.field or "grid.resolution_deg").rpartition(".")[2]
            text = str(exc).partition(": ")[2] if exc.field else str(exc)
            raise _Problems([((key,), text, getattr(self, key, None))]) from None
        return self

    def cells(self):
        """The grid specification of :mod:`covergrid.grid` (checks whole numbers of cells)."""
        from covergrid.grid import GridSpec as CellGridSpec

        return CellGridSpec(resolution_deg=self.resolution_deg, lat_min_deg=self.lat_min_deg,
                            lat_max_deg=self.lat_max_deg)

    @property
    def shape(self) -> tuple[int, int]:
        """(rows, columns) of the grid."""
        spec = self.cells()
        return spec.n_lat, spec.n_lon


class RequirementSpec(_Model):
    """A coverage requirement: a threshold that must hold over a share of the grid area."""

    metric: str = Field(description="A metric name (see the outputs reference).")
    k: int | None = Field(None, ge=1, le=64,
                          description="Fold for metric nfold_fraction (at least k in view).")
    at_most: float | None = Field(None, description="Upper limit, in the metric's units.")
    at_least: float | None = Field(None, description="Lower limit, in the metric's units.")
    area_fraction: float = Field(1.0, gt=0.0, le=1.0,
                                 description="Share of the grid area that must meet it.")

    @model_validator(mode="after")
    def _check(self) -> RequirementSpec:
        names = _metric_names()
        if names and self.metric not in names:
            raise _Problems([(("metric",), f"unknown metric{_hint(self.metric, names)}; "
                              f"allowed: {', '.join(names)}", self.metric)])
        if self.metric == "nfold_fraction" and self.k is None:
            raise _Problems([(("k",), "is required with metric nfold_fraction (k >= 1)", None)])
        if self.metric != "nfold_fraction" and self.k is not None:
            raise _Problems([(("k",), "applies only to metric nfold_fraction", self.k)])
        if (self.at_most is None) == (self.at_least is None):
            raise _Problems([(("at_most",), "give exactly one of at_most or at_least",
                              self.at_most)])
        return self


class MapsSpec(_Model):
    """Which metric maps to draw and how."""

    metrics: list[str] = Field(default_factory=lambda: list(DEFAULT_MAP_METRICS),
                               description="Metrics to map.")
    projection: Literal["robinson", "plate_carree", "mollweide", "equal_earth", "orthographic",
                        "polar_north", "polar_south"] = Field(
        "robinson", description="Map projection of the metric maps.")

    @field_validator("metrics")
    @classmethod
    def _known(cls, value: list[str]) -> list[str]:
        names = _metric_names()
        problems = [((i,), f"unknown metric{_hint(m, names)}; allowed: {', '.join(names)}", m)
                    for i, m in enumerate(value) if names and m not in names]
        if problems:
            raise _Problems(problems)
        return value


class ComputeSpec(_Model):
    """Where and how the work runs."""

    scheduler: str = Field("threads", description="threads | synchronous | processes | "
                           "local-cluster | tcp://host:port (an existing dask scheduler).")
    workers: int | None = Field(None, ge=1, le=1024, description="local-cluster: workers.")
    threads_per_worker: int | None = Field(None, ge=1, le=256,
                                           description="local-cluster: threads per worker.")
    chunk_rows: int | None = Field(None, ge=1, description="Latitude rows per task.")
    memory_limit_gb: float | None = Field(None, gt=0.0,
                                          description="Refuse studies estimated above this "
                                          "(default: the memory available).")

    @field_validator("scheduler")
    @classmethod
    def _scheduler(cls, value: str) -> str:
        if value in SCHEDULERS or _ADDRESS_RE.match(value):
            return value
        raise ValueError(f"unknown scheduler{_hint(value, SCHEDULERS)}; allowed: "
                         f"{', '.join(SCHEDULERS)} or an address tcp://host:port")


class OutputSpec(_Model):
    """Options for the written outputs."""

    band_width_deg: float = Field(10.0, gt=0.0, le=180.0,
                                  description="Latitude band width of the summary [deg].")


# --- trade studies: sweep and sizing (covergrid.sweep, covergrid.sizing) ------------------
#: Most designs one sweep may list (each is a full coverage run).
SWEEP_MAX_DESIGNS = 100000


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
            raise _Problems([((), "must hold at least one value", value)])
        not_numbers = [i for i, v in enumerate(value) if not number(v)]
        if not_numbers:
            raise _Problems([((i,), f"must be a {kind}", value[i]) for i in not_numbers])
        return value
    if isinstance(value, dict):
        keys = {"from", "to", "step"}
        extra = [k for k in value if k not in keys]
        missing = sorted(keys - set(value))
        if extra or missing:
            what = (f"unknown key {extra[0]!r}" if extra else f"missing key {missing[0]!r}")
            raise _Problems([((), f"a range is {{from, to, step}}; {what}", value)])
        bad: list[tuple[tuple, str, Any]] = [
            ((k,), f"must be a {kind}", value[k]) for k in ("from", "to", "step")
               if not number(value[k]) or not math.isfinite(value[k])]
        if bad:
            raise _Problems(bad)
        lo, hi, step = value["from"], value["to"], value["step"]
        if step <= 0:
            raise _Problems([(("step",), "must be > 0", step)])
        if hi < lo:
            raise _Problems([(("to",), f"must be >= from = {lo}", hi)])
        n = math.floor((hi - lo) / step + 1e-9) + 1
        if n > SWEEP_MAX_DESIGNS:
            raise _Problems([(("step",), f"gives {n} values; allowed: at most "
                              f"{SWEEP_MAX_DESIGNS}", step)])
        return [lo + i * step for i in range(n)]
    raise _Problems([((), f"must be a {kind}, a list of them or a range {{from, to, step}}",
                      value)])


def _float_axis(value: Any) -> Any:
    return _axis(value, integer=False)


def _int_axis(value: Any) -> Any:
    return _axis(value, integer=True)


def _choice_axis(value: Any) -> Any:
    """``all`` or a whole number / list / range of whole numbers."""
    if isinstance(value, str):
        if value == "all":
            return value
        raise _Problems([((), f"not allowed{_hint(value, ['all'])}; allowed: all, a whole "
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


class SweepSpec(_Model):
    """A batch of designs: every combination of the listed values (``covergrid sweep``).

    Each key takes a number, a list, or a range ``{from, to, step}`` (inclusive); a key left
    out keeps the value of the study's Walker group (or sensor). ``planes: all`` is every
    divisor of the total, ``phasing: all`` is 0 .. planes-1; combinations where the planes
    do not divide the total, or the phasing is not below the planes, are left out.
    """

    pattern: Literal["delta", "star"] | None = Field(
        None, description="Walker pattern (default: the study's group's).")
    altitude_km: PositiveAxis | None = Field(None, description="Altitudes a - R_E [km].")
    inclination_deg: InclinationAxis | None = Field(None, description="Inclinations [deg].")
    total: CountAxis | None = Field(None, description="Totals T.")
    planes: Literal["all"] | CountAxis | None = Field(
        None, description="Planes P, or all (every divisor of T).")
    phasing: Literal["all"] | PhasingAxis | None = Field(
        None, description="Phasings F, or all (0 .. P-1).")
    min_elevation_deg: ElevationAxis | None = Field(
        None, description="Minimum elevations [deg].")

    _floats = field_validator("altitude_km", "inclination_deg", "min_elevation_deg",
                              mode="before")(_float_axis)
    _ints = field_validator("total", mode="before")(_int_axis)
    _choices = field_validator("planes", "phasing", mode="before")(_choice_axis)


class TotalRange(_Model):
    """The totals a sizing search tries, in increasing order."""

    min: int = Field(ge=1, le=100000, description="Smallest total T tried.")
    max: int = Field(ge=1, le=100000, description="Largest total T tried.")

    @model_validator(mode="after")
    def _check(self) -> TotalRange:
        if self.max < self.min:
            raise _Problems([(("max",), f"must be >= min = {self.min}", self.max)])
        return self


class CoarseSpec(_Model):
    """The cheaper evaluation a sizing search uses to prune designs before confirming them.

    A design is pruned (not evaluated at full resolution) when, on the coarse evaluation,
    the share of the area meeting the requirement's threshold is below the requirement's
    ``area_fraction`` minus ``area_tolerance``.
    """

    resolution_deg: float | None = Field(
        None, ge=0.05, le=30.0,
        description="Coarse grid cell size [deg] (default: twice the study's, if it fits).")
    step_s: float | None = Field(
        None, gt=0.0, description="Coarse time step [s] (default: twice the study's, if it "
        "divides the span).")
    area_tolerance: float = Field(
        0.02, ge=0.0, le=1.0, description="Share of the area by which a coarse evaluation "
        "may fall short of the requirement and still be confirmed [unitless].")


class SizingSpec(_Model):
    """Search for the smallest Walker constellation meeting the requirement (``covergrid size``).

    For each altitude and inclination, totals are tried from ``total.min`` upwards; the
    first total with a design (planes, phasing) meeting the requirement ends the search
    there. Ties between designs of that total go to fewer planes, then the larger margin,
    then the smaller phasing.
    """

    pattern: Literal["delta", "star"] = Field("delta", description="Walker pattern.")
    altitude_km: PositiveAxis = Field(description="Altitudes a - R_E [km].")
    inclination_deg: InclinationAxis = Field(description="Inclinations [deg].")
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
    coarse: CoarseSpec = Field(default_factory=lambda: CoarseSpec.model_validate({}))

    _floats = field_validator("altitude_km", "inclination_deg", mode="before")(_float_axis)
    _choices = field_validator("planes", "phasing", mode="before")(_choice_axis)


class Study(_Model):
    """A coverage study: what flies, what it sees, where and when to measure."""

    study: str = Field(description="Study name: a plain file name; the output folder.")
    epoch: str = Field(description="Start time, ISO 8601 UTC (e.g. 2031-03-20T00:00:00Z).")
    duration_h: float = Field(gt=0.0, le=24.0 * 3660, description="Span [h].")
    step_s: float = Field(gt=0.0, description="Time step [s].")
    constellation: list[ConstellationGroup] = Field(min_length=1)
    sensor: SensorSpec = Field(default_factory=lambda: SensorSpec.model_validate({}))
    grid: GridSpec = Field(default_factory=lambda: GridSpec.model_validate({}))
    requirement: RequirementSpec | None = None
    maps: MapsSpec = Field(default_factory=lambda: MapsSpec.model_validate({}))
    compute: ComputeSpec = Field(default_factory=lambda: ComputeSpec.model_validate({}))
    output: OutputSpec = Field(default_factory=lambda: OutputSpec.model_validate({}))
    sweep: SweepSpec | None = Field(None, description="A batch of designs (covergrid sweep).")
    sizing: SizingSpec | None = Field(None, description="A sizing search (covergrid size).")
    refine_transitions: bool = Field(
        True, description="Place gap starts and ends at the limit-crossing time between "
        "samples (true), or at the sample (false: pure sampled values).")

    _study_text = field_validator("study", mode="before")(_text_id)

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
        if not _NAME_RE.match(value) or len(value) > _STUDY_NAME_MAX:
            raise ValueError(f"must be a plain file name of at most {_STUDY_NAME_MAX} letters, "
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
            raise _Problems([((), _reason(exc), None)]) from None

    @model_validator(mode="after")
    def _cross(self) -> Study:
        problems: list[tuple[tuple, str, Any]] = []
        span_s = self.duration_h * SECONDS_PER_HOUR
        if self.step_s > span_s:
            problems.append((("step_s",), f"must not exceed the span duration_h x 3600 = "
                             f"{span_s:g} s", self.step_s))
        else:
            n = span_s / self.step_s
            if abs(n - round(n)) > STEP_COUNT_TOLERANCE * n:
                problems.append((("step_s",), f"must divide the span {span_s:g} s into a whole "
                                 f"number of steps (it gives {n:.4f}); allowed: e.g. "
                                 f"{_dividing_steps(span_s, self.step_s)}", self.step_s))
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
            try:
                els = self.to_elements()
                lowest = float(np.min(els.a_km * (1.0 - els.e))) - WGS84_A_KM
            except (ValueError, TypeError):
                lowest = -1.0  # reported by the satellites' own checks
            if self.sensor.max_range_km < lowest:
                problems.append((("sensor", "max_range_km"), f"is shorter than the lowest "
                                 f"satellite altitude ({lowest:.1f} km), so nothing would ever "
                                 f"be in view; allowed: more than {lowest:.1f} km",
                                 self.sensor.max_range_km))
        if problems:
            raise _Problems(problems)
        return self

    # --- derived quantities ----------------------------------------------------------
    @property
    def duration_s(self) -> float:
        """Span [s]."""
        return self.duration_h * SECONDS_PER_HOUR

    @property
    def n_steps(self) -> int:
        """Number of time samples N (the span is N x step_s, sampled at 0 .. N-1 steps)."""
        return max(1, int(round(self.duration_s / self.step_s)))

    @property
    def n_satellites(self) -> int:
        """Number of satellites over all groups."""
        return sum(g.count for g in self.constellation)

    @property
    def nfold_max(self) -> int:
        """Largest fold K of nfold_fraction computed: 4 (no more than the satellites there
        are, at least 1), or the requirement's k if larger."""
        k = self.requirement.k if self.requirement is not None and self.requirement.k else 0
        return max(min(4, self.n_satellites), k, 1)

    def epoch_datetime64(self):
        """The epoch as numpy datetime64[ns] (UTC)."""
        from covergrid.earth.time import parse_epoch

        return parse_epoch(self.epoch)

    def to_elements(self):
        """Build the constellation's mean elements (degrees converted to radians here).

        Returns
        -------
        covergrid.orbits.walker.ElementSet
            Every satellite of every group, in file order.
        """
        from covergrid.orbits import walker as w

        sets = []
        for gi, group in enumerate(self.constellation):
            prefix = _group_prefix(group, gi, len(self.constellation))
            try:
                sets.append(_group_elements(w, group, prefix))
            except ElementError as exc:
                raise StudyError(str(exc), field=format_path(("constellation", gi))) from None
        all_ids = [i for s in sets for i in s.ids]
        dup = _first_duplicate(all_ids)
        if dup is not None:
            raise StudyError(f"duplicate satellite id {dup!r} (a generated Walker id "
                             "<group>-P<plane>-<slot> clashes with another id); give the groups "
                             "distinct names or the satellites distinct ids",
                             field="constellation")
        return sets[0] if len(sets) == 1 else w.ElementSet.concat(sets)

    def resolved_dict(self) -> dict:
        """The study with every default filled in, as plain data."""
        return self.model_dump(mode="json")

    def dump_resolved_yaml(self) -> str:
        """The resolved study as YAML text (the provenance record written beside outputs)."""
        return yaml.safe_dump(self.resolved_dict(), sort_keys=False, allow_unicode=False)


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


def _group_prefix(group: ConstellationGroup, index: int, n_groups: int) -> str:
    """Id prefix of a Walker group's satellites (ids ``<prefix>-P<plane>-<slot>``).

    The group's name, else ``S`` for a single group or ``G<n>`` (n counted from 1).
    """
    if group.name is not None:
        return group.name
    return "S" if n_groups == 1 else f"G{index + 1}"


def _group_elements(w, group: ConstellationGroup, prefix: str):
    if group.walker is not None:
        t = group.template
        assert t is not None
        return w.walker(
            group.walker.pattern, group.walker.total, group.walker.planes, group.walker.phasing,
            a_km=t.a_km, e=t.eccentricity, i_rad=t.inclination_deg * DEG,
            raan0_rad=t.raan_deg * DEG, argp_rad=t.arg_perigee_deg * DEG,
            M0_rad=t.mean_anomaly_deg * DEG, id_prefix=prefix,
        )
    import numpy as np

    sats = group.satellites or []
    ids = tuple(s.id for s in sats)
    if all(s.is_state_vector for s in sats):
        r = np.array([s.position_km for s in sats], dtype=float)
        v = np.array([s.velocity_km_s for s in sats], dtype=float)
        return w.from_state_vectors(r, v, ids)
    if not any(s.is_state_vector for s in sats):
        return _keplerian_set(w, sats, ids)
    parts = []
    for s in sats:
        if s.is_state_vector:
            parts.append(w.from_state_vectors(np.array([s.position_km], dtype=float),
                                              np.array([s.velocity_km_s], dtype=float), (s.id,)))
        else:
            parts.append(_keplerian_set(w, [s], (s.id,)))
    return w.ElementSet.concat(parts)


def _keplerian_set(w, sats: list[SatelliteSpec], ids: tuple[str, ...]):
    import numpy as np

    def arr(getter):
        return np.array([getter(s) for s in sats], dtype=float)

    a = arr(lambda s: s.semi_major_axis_km if s.semi_major_axis_km is not None
            else WGS84_A_KM + s.altitude_km)
    e = arr(lambda s: s.eccentricity or 0.0)
    i = arr(lambda s: s.inclination_deg) * DEG
    raan = arr(lambda s: s.raan_deg or 0.0) * DEG
    argp = arr(lambda s: s.arg_perigee_deg or 0.0) * DEG
    true_given = [s.true_anomaly_deg is not None for s in sats]
    if all(true_given):
        return w.from_keplerian(a, e, i, raan, argp,
                                true_anomaly_rad=arr(lambda s: s.true_anomaly_deg) * DEG, ids=ids)
    if not any(true_given):
        return w.from_keplerian(a, e, i, raan, argp,
                                mean_anomaly_rad=arr(lambda s: s.mean_anomaly_deg) * DEG, ids=ids)
    parts = [_keplerian_set(w, [s], (sid,)) for s, sid in zip(sats, ids, strict=True)]
    return w.ElementSet.concat(parts)


def _dividing_steps(span_s: float, step_s: float) -> str:
    """A few steps near ``step_s`` that divide the span into whole steps [s]."""
    n = span_s / step_s
    options = sorted({span_s / max(1, math.floor(n)), span_s / math.ceil(n)})
    return " or ".join(f"{x:g} s" for x in options)


def _first_duplicate(ids) -> str | None:
    seen: set[str] = set()
    for x in ids:
        if x in seen:
            return x
        seen.add(x)
    return None


# --- metric names (the registry lives in covergrid.metrics) ------------------------------
def _metric_names() -> tuple[str, ...]:
    """Names of the metrics a requirement or a map may use."""
    try:
        from covergrid.metrics import METRICS
    except ImportError:  # pragma: no cover - the registry is part of the package
        return ()
    names = list(METRICS)
    if "nfold_fraction" not in names:
        names.append("nfold_fraction")
    return tuple(names)


def _hint(word: str, options) -> str:
    close = difflib.get_close_matches(str(word), [str(o) for o in options], n=1, cutoff=0.6)
    return f" (did you mean {close[0]!r}?)" if close else ""


def _reason(exc: BaseException) -> str:
    text = str(exc).strip().rstrip(".")
    return text or type(exc).__name__


# --- error conversion -------------------------------------------------------------------
def format_path(loc) -> str:
    """Dotted path of a location: ``('constellation', 0, 'walker')`` -> ``constellation[0].walker``.
    """
    out = ""
    for part in loc:
        if isinstance(part, int):
            out += f"[{part}]"
        else:
            out += ("." if out else "") + str(part)
    return out or "(top level)"


def _show(value: Any) -> str:
    text = repr(value)
    return text if len(text) <= 80 else text[:77] + "..."


def _model_at(loc: tuple) -> type[BaseModel] | None:
    """The model class that validates the mapping found at ``loc`` (None if not a model)."""
    model: Any = Study
    for part in loc:
        if isinstance(part, int):
            continue
        if not (isinstance(model, type) and issubclass(model, BaseModel)):
            return None
        field = model.model_fields.get(part)
        if field is None:
            return None
        model = _unwrap_model(field.annotation)
    return model if isinstance(model, type) and issubclass(model, BaseModel) else None


def _unwrap_model(annotation: Any) -> Any:
    if isinstance(annotation, type) and issubclass(annotation, BaseModel):
        return annotation
    for arg in typing.get_args(annotation):
        found = _unwrap_model(arg)
        if found is not None:
            return found
    return None


_TYPE_WORDS = {
    "float_type": "must be a number", "int_type": "must be a whole number",
    "string_type": "must be text", "list_type": "must be a list", "bool_type": "must be true/false",
    "model_type": "must be a mapping of keys", "dict_type": "must be a mapping of keys",
    "model_attributes_type": "must be a mapping of keys",
    "int_from_float": "must be a whole number",
    "finite_number": "must be a finite number (not NaN or infinity)",
}


def _message(err: Any) -> tuple[list[tuple[tuple, str, Any]], bool]:
    """One pydantic error -> located problems; the flag says whether to show the value."""
    kind, loc, ctx = err["type"], tuple(err["loc"]), err.get("ctx") or {}
    value = err.get("input")
    if kind == "value_error" and isinstance(ctx.get("error"), _Problems):
        return [(loc + p, m, v) for p, m, v in ctx["error"].problems], True
    if kind == "missing":
        return [(loc, "is required", None)], False
    if kind == "extra_forbidden":
        model = _model_at(loc[:-1])
        allowed = list(model.model_fields) if model is not None else []
        return [(loc, f"unknown key{_hint(loc[-1], allowed)}; allowed keys: "
                 f"{', '.join(allowed)}", None)], False
    if kind in ("greater_than", "greater_than_equal", "less_than", "less_than_equal"):
        op = {"greater_than": ">", "greater_than_equal": ">=", "less_than": "<",
              "less_than_equal": "<="}[kind]
        limit = next(iter(ctx.values()))
        text = f"out of range; allowed: {op} {limit}"
        bounds = _field_bounds(loc)
        if bounds:
            text = f"out of range; allowed: {bounds}"
        return [(loc, text, value)], True
    if kind == "literal_error":
        return [(loc, f"not allowed{_hint(str(value), _literal_options(ctx))}; allowed: "
                 f"{ctx.get('expected')}", value)], True
    if kind in ("too_short", "too_long"):
        lo, hi = _length_bounds(loc)
        want = f"exactly {lo}" if lo == hi else f"at least {lo}"
        return [(loc, f"must hold {want} item{'s' if lo != 1 else ''}", value)], True
    if kind == "value_error":
        return [(loc, _reason(ctx.get("error", err["msg"])), value)], True
    if kind in _TYPE_WORDS:
        return [(loc, _TYPE_WORDS[kind], value)], True
    return [(loc, err["msg"], value)], True


def _literal_options(ctx: dict) -> list[str]:
    return re.findall(r"'([^']*)'", str(ctx.get("expected", "")))


def _field_info(loc: tuple):
    names = [p for p in loc if isinstance(p, str)]
    if not names:
        return None
    model = _model_at(loc[:-1]) if isinstance(loc[-1], str) else None
    if model is None:
        return None
    return model.model_fields.get(loc[-1])


def _constraints(info) -> list:
    """Every constraint object (Gt, Le, MinLen ...) of a field, through Optional/Annotated."""
    found: list = []

    def walk(obj) -> None:
        for m in getattr(obj, "metadata", ()) or ():
            found.append(m)
        for m in getattr(obj, "__metadata__", ()) or ():
            walk(m) if hasattr(m, "metadata") else found.append(m)
        for arg in typing.get_args(obj):
            if arg is not type(None):
                walk(arg)

    walk(info)
    walk(info.annotation)
    return found


def _field_bounds(loc: tuple) -> str:
    """Both bounds of a numeric field as text ("0 < value <= 90"), from its metadata."""
    info = _field_info(loc)
    if info is None:
        return ""
    lo = hi = None
    lo_op = hi_op = ""
    for m in _constraints(info):
        for attr, op in (("gt", "<"), ("ge", "<=")):
            if getattr(m, attr, None) is not None:
                lo, lo_op = getattr(m, attr), op
        for attr, op in (("lt", "<"), ("le", "<=")):
            if getattr(m, attr, None) is not None:
                hi, hi_op = getattr(m, attr), op
    if lo is not None and hi is not None:
        return f"{lo} {lo_op} value {hi_op} {hi}"
    if lo is not None:
        return f"value {'>' if lo_op == '<' else '>='} {lo}"
    if hi is not None:
        return f"value {hi_op} {hi}"
    return ""


def _length_bounds(loc: tuple) -> tuple[int, int | None]:
    info = _field_info(loc)
    lo, hi = 1, None
    if info is not None:
        for m in _constraints(info):
            lo = getattr(m, "min_length", None) or lo
            hi = getattr(m, "max_length", None) or hi
    return lo, hi


def _problems_text(problems: list[tuple[tuple, str, Any, bool]]) -> StudyError:
    lines = []
    for loc, msg, value, show in problems:
        line = f"{format_path(loc)}: {msg}"
        if show and value is not None:
            line += f"; got {_show(value)}"
        lines.append(line)
    if len(lines) == 1:
        path, _, rest = lines[0].partition(": ")
        err = StudyError(rest, field=path)
    else:
        err = StudyError(f"{len(lines)} problems in the study:\n  " + "\n  ".join(lines))
    err.problems = lines  # type: ignore[attr-defined]
    return err


def study_error_from(exc: ValidationError) -> StudyError:
    """Convert a pydantic ValidationError into one StudyError listing every problem."""
    found: list[tuple[tuple, str, Any, bool]] = []
    for err in exc.errors(include_url=False):
        located, show = _message(err)
        for loc, msg, value in located:
            found.append((loc, msg, value, show and value is not None))
    return _problems_text(found)


# --- loading -----------------------------------------------------------------------------
class _StrictSafeLoader(yaml.SafeLoader):
    """yaml.SafeLoader that also refuses duplicate keys in a mapping."""


def _construct_mapping(loader, node, deep=False):
    keys = set()
    for key_node, _ in node.value:
        key = loader.construct_object(key_node, deep=deep)
        try:
            hashable = key in keys
        except TypeError:
            raise yaml.constructor.ConstructorError(
                None, None, "a mapping key must be plain text", key_node.start_mark) from None
        if hashable:
            raise yaml.constructor.ConstructorError(
                None, None, f"duplicate key {key!r}", key_node.start_mark)
        keys.add(key)
    return yaml.SafeLoader.construct_mapping(loader, node, deep=deep)


_StrictSafeLoader.add_constructor(yaml.resolver.BaseResolver.DEFAULT_MAPPING_TAG,
                                  _construct_mapping)


def _where(mark) -> str:
    return f"line {mark.line + 1}, column {mark.column + 1}" if mark is not None else "?"


def parse_yaml(text: str, source: str = "study file") -> Any:
    """Read YAML text with a safe loader (plain data only, no duplicate keys).

    Raises
    ------
    StudyError
        On a syntax error (with line and column), an object tag or a duplicate key.
    """
    try:
        return yaml.load(text, Loader=_StrictSafeLoader)  # noqa: S506 - a SafeLoader subclass
    except yaml.constructor.ConstructorError as exc:
        mark = exc.problem_mark
        problem = str(exc.problem or "")
        tag = re.search(r"tag '([^']*)'", problem)
        if tag:
            msg = (f"{_where(mark)}: tag {tag.group(1)!r} is not allowed; allowed: plain data "
                   "only (mappings, lists, numbers, text, true/false)")
        else:
            msg = f"{_where(mark)}: {problem}"
        raise StudyError(msg, field=source) from None
    except yaml.MarkedYAMLError as exc:
        mark = exc.problem_mark or exc.context_mark
        what = " ".join(x for x in (exc.context, exc.problem) if x)
        ctx = exc.context_mark
        if ctx is not None and mark is not None and (ctx.line, ctx.column) != (mark.line,
                                                                                mark.column):
            what += f" (the construct starts at {_where(ctx)})"
        raise StudyError(f"{_where(mark)}: YAML syntax error: {what}", field=source) from None
    except yaml.YAMLError as exc:
        raise StudyError(f"YAML error: {exc}", field=source) from None


def parse_study(data: Any, source: str = "study file") -> Study:
    """Validate plain data (as read from YAML) into a :class:`Study`.

    Raises
    ------
    StudyError
        Listing every problem by dotted path, value and what is allowed.
    """
    if data is None:
        raise StudyError("is empty; expected a mapping with keys study, epoch, duration_h, "
                         "step_s, constellation", field=source)
    if not isinstance(data, dict):
        raise StudyError(f"the top level must be a mapping of keys, not {type(data).__name__}",
                         field=source)
    bad_keys = [k for k in data if not isinstance(k, str)]
    if bad_keys:
        raise StudyError(f"top-level keys must be text; got {bad_keys[0]!r}", field=source)
    try:
        return Study.model_validate(data)
    except ValidationError as exc:
        raise study_error_from(exc) from None


def load_study(path: str | Path) -> Study:
    """Read and validate a study file.

    Parameters
    ----------
    path : str or pathlib.Path
        The YAML study file (UTF-8).

    Returns
    -------
    Study
        The validated study.

    Raises
    ------
    StudyError
        If the file cannot be read, is not UTF-8, is not valid YAML or is not a valid study.
    """
    path = Path(path)
    name = path.name or str(path)
    try:
        raw = path.read_bytes()
    except FileNotFoundError:
        raise StudyError("no such file", field=str(path)) from None
    except IsADirectoryError:
        raise StudyError("is a folder, not a study file", field=str(path)) from None
    except OSError as exc:
        raise StudyError(f"cannot read: {exc.strerror}", field=str(path)) from None
    try:
        text = raw.decode("utf-8")
    except UnicodeDecodeError as exc:
        line = raw[: exc.start].count(b"\n") + 1
        raise StudyError(f"not UTF-8 text (byte 0x{raw[exc.start]:02x} on line {line}); "
                         "allowed: UTF-8 text; save the file as UTF-8", field=name) from None
    if text.startswith("\ufeff"):
        text = text[1:]
    return parse_study(parse_yaml(text, source=name), source=name)


def export_schema() -> dict:
    """The JSON Schema of a study file (draft 2020-12), generated from the models."""
    schema = Study.model_json_schema(mode="validation")
    schema["$schema"] = "https://json-schema.org/draft/2020-12/schema"
    schema["title"] = "covergrid study"
    names = _metric_names()
    defs = schema.get("$defs", {})
    if names:
        defs["RequirementSpec"]["properties"]["metric"]["enum"] = list(names)
        defs["MapsSpec"]["properties"]["metrics"]["items"]["enum"] = list(names)
    return schema
