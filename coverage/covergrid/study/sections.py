"""The sections of a study file, as pydantic models (one model per mapping in the file).

These models say what a study file may contain: every key, its type, its range and the rules
between keys of one section; unknown keys are errors, and no value is coerced. They hold the
file's values in the file's units (degrees, hours); turning them into the quantities the
computation uses is the job of :mod:`covergrid.study.build`. The whole study (top level and
the rules between sections) is :class:`covergrid.study.models.Study`; the trade blocks are in
:mod:`covergrid.study.trade_sections`.
"""

from __future__ import annotations

import math
import re
import typing
from typing import Annotated, Any, Literal

from pydantic import (
    BaseModel,
    BeforeValidator,
    ConfigDict,
    Field,
    field_validator,
    model_validator,
)

from covergrid.compute.grid import grid_shape
from covergrid.constants import EARTH_SOI_RADIUS_KM, MU_EARTH_KM3_S2, WGS84_A_KM
from covergrid.errors import CovergridError
from covergrid.study.messages import Problems, did_you_mean
from covergrid.study.orbit_rules import (
    SUN_SYNCHRONOUS,
    inclination_value_deg,
    km_text,
    orbit_size_problems,
    semi_major_axis_km,
    sun_synchronous_inclination_deg,
    two_body,
)

__all__ = [
    "DEFAULT_MAP_METRICS",
    "MAX_CHUNK_ROWS",
    "MAX_MEMORY_LIMIT_GB",
    "MAX_RANGE_KM",
    "MIN_BAND_WIDTH_DEG",
    "NAME_RE",
    "SCHEDULERS",
    "ComputeSection",
    "DopSection",
    "GridSection",
    "GroupEntry",
    "MapsSection",
    "OutputSection",
    "RequirementSection",
    "SatelliteEntry",
    "SectionModel",
    "SensorSection",
    "TemplateSection",
    "WalkerSection",
    "check_scheduler",
    "metric_names",
    "text_id",
]

# The schedulers a study may name besides a "tcp://host:port" or "tls://host:port" address.
SCHEDULERS = ("threads", "synchronous", "processes", "local-cluster")
DEFAULT_MAP_METRICS = ("coverage_fraction", "max_gap", "mean_response_time", "mean_in_view")
_ADDRESS_RE = re.compile(r"^(tcp|tls)://[A-Za-z0-9_.\-\[\]:]+:[0-9]{1,5}$")
#: A plain name: study names, group names and satellite ids.
NAME_RE = re.compile(r"^[A-Za-z0-9_.\-]+$")
#: Longest slant range a sensor may name [km]: no satellite below the sphere of influence
#: is farther than its radius plus the Earth's from any cell.
MAX_RANGE_KM = EARTH_SOI_RADIUS_KM + WGS84_A_KM
#: Largest memory limit a study may give [GB] (a petabyte: beyond any machine).
MAX_MEMORY_LIMIT_GB = 1.0e6
#: Most latitude rows per task: the rows of the finest grid (0.05 deg, 3600 rows).
MAX_CHUNK_ROWS = 3600
#: Narrowest latitude band of the summary [deg]: the finest grid's cell (0.05 deg); a
#: narrower band cannot hold a row of cells.
MIN_BAND_WIDTH_DEG = 0.05


def check_scheduler(value: str) -> str:
    """A scheduler name of :data:`SCHEDULERS` or a ``tcp://`` / ``tls://`` address.

    Raises
    ------
    ValueError
        Naming the allowed values (and the closest one).
    """
    if value in SCHEDULERS or _ADDRESS_RE.match(value):
        return value
    raise ValueError(f"unknown scheduler{did_you_mean(value, SCHEDULERS)}; allowed: "
                     f"{', '.join(SCHEDULERS)} or an address tcp://host:port")


class SectionModel(BaseModel):
    """Base of every study model: unknown keys forbidden, no NaN/inf, no silent coercion."""

    model_config = ConfigDict(extra="forbid", allow_inf_nan=False, strict=True, frozen=True)


Angle360 = Annotated[float, Field(ge=-360.0, le=360.0)]
Inclination = Annotated[float, Field(ge=0.0, le=180.0)]
#: The value of an ``inclination_deg`` key that asks for the sun-synchronous inclination.


def _inclination_or_sso(value: Any) -> Any:
    """One clear message for an inclination that is neither 0..180 deg nor sun-synchronous
    (instead of one message per member of the union)."""
    allowed = "allowed: 0.0 <= value <= 180.0 (deg) or sun-synchronous"
    if isinstance(value, str):
        if value == SUN_SYNCHRONOUS:
            return value
        raise ValueError(f"not allowed{did_you_mean(value, [SUN_SYNCHRONOUS])}; {allowed}")
    if isinstance(value, bool) or not isinstance(value, int | float):
        raise ValueError(f"must be a number or sun-synchronous; {allowed}")
    if not (math.isfinite(value) and 0.0 <= value <= 180.0):
        raise ValueError(f"out of range; {allowed}")
    return value


#: An inclination, or ``sun-synchronous``: derived from the orbit's size and eccentricity.
InclinationOrSSO = Annotated[Inclination | Literal["sun-synchronous"],
                             BeforeValidator(_inclination_or_sso)]
#: Local time of the ascending node [h].
LocalTime = Annotated[float, Field(ge=0.0, lt=24.0)]
Vector3 = Annotated[list[float], Field(min_length=3, max_length=3)]


def text_id(value: Any) -> Any:
    """Accept a whole number as an identifier (YAML reads ``id: 7`` as an integer)."""
    if isinstance(value, int) and not isinstance(value, bool):
        return str(value)
    return value


def metric_names() -> tuple[str, ...]:
    """Names of the metrics a requirement or a map may use (:mod:`covergrid.compute.metrics`)."""
    from covergrid.compute.metrics import METRICS

    return tuple(METRICS)


class TemplateSection(SectionModel):
    """The orbit every satellite of a Walker group shares (mean elements at the epoch)."""

    altitude_km: float | None = Field(
        None, gt=0.0, description="Semi-major axis minus the WGS-84 equatorial radius [km]."
    )
    semi_major_axis_km: float | None = Field(None, gt=0.0, description="Semi-major axis [km].")
    eccentricity: float = Field(0.0, ge=0.0, lt=1.0, description="Eccentricity [unitless].")
    inclination_deg: InclinationOrSSO = Field(
        description="Inclination [deg], or sun-synchronous (derived from the size and "
        "eccentricity with secular J2).")
    raan_deg: Angle360 = Field(0.0, description="RAAN of the first plane [deg].")
    ltan_h: LocalTime | None = Field(
        None, description="Local mean solar time of the first plane's ascending node at the "
        "epoch [h], instead of raan_deg.")
    arg_perigee_deg: Angle360 = Field(0.0, description="Argument of perigee [deg].")
    mean_anomaly_deg: Angle360 = Field(
        0.0, description="Mean anomaly of the first satellite of the first plane [deg]."
    )

    @model_validator(mode="after")
    def _check(self) -> TemplateSection:
        problems = orbit_size_problems(self.altitude_km, self.semi_major_axis_km,
                                       self.eccentricity)
        if self.ltan_h is not None and "raan_deg" in self.model_fields_set:
            problems.append((("ltan_h",), "give either raan_deg or ltan_h (which sets the "
                             "RAAN from the mean Sun at the epoch), not both", self.ltan_h))
        if problems:
            raise Problems(problems)
        if self.inclination_deg == SUN_SYNCHRONOUS:
            sun_synchronous_inclination_deg(self.a_km, self.eccentricity)
        return self

    @property
    def sun_synchronous(self) -> bool:
        """True when the inclination is to be derived (``inclination_deg: sun-synchronous``)."""
        return self.inclination_deg == SUN_SYNCHRONOUS

    @property
    def inclination_value_deg(self) -> float:
        """The inclination [deg]: as given, or the sun-synchronous one."""
        return inclination_value_deg(self.inclination_deg, self.a_km, self.eccentricity)

    @property
    def a_km(self) -> float:
        """Semi-major axis [km]."""
        return semi_major_axis_km(self.altitude_km, self.semi_major_axis_km)

    @property
    def perigee_altitude_km(self) -> float:
        """a(1 - e) minus the WGS 84 equatorial radius [km]."""
        return self.a_km * (1.0 - self.eccentricity) - WGS84_A_KM


class WalkerSection(SectionModel):
    """A Walker pattern T/P/F."""

    pattern: Literal["delta", "star"] = Field(
        description="delta: planes spread over 360 deg of RAAN; star: over 180 deg."
    )
    total: int = Field(ge=1, le=100000, description="Total number of satellites T.")
    planes: int = Field(ge=1, description="Number of equally spaced orbit planes P.")
    phasing: int = Field(ge=0, description="Relative phasing F, 0 <= F < P.")

    @model_validator(mode="after")
    def _check(self) -> WalkerSection:
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
            raise Problems(problems)
        return self


class SatelliteEntry(SectionModel):
    """One satellite: Keplerian elements, or an inertial state vector at the epoch."""

    id: str = Field(min_length=1, max_length=64, description="Unique satellite identifier.")
    altitude_km: float | None = Field(None, gt=0.0, description="a minus R_E [km].")
    semi_major_axis_km: float | None = Field(None, gt=0.0, description="Semi-major axis [km].")
    eccentricity: float | None = Field(None, ge=0.0, lt=1.0,
                                       description="Eccentricity (0 if not given).")
    inclination_deg: InclinationOrSSO | None = Field(
        None, description="Inclination [deg], or sun-synchronous (derived with secular J2).")
    raan_deg: Angle360 | None = Field(None, description="RAAN [deg] (0 if not given).")
    ltan_h: LocalTime | None = Field(
        None, description="Local mean solar time of the ascending node at the epoch [h], "
        "instead of raan_deg.")
    arg_perigee_deg: Angle360 | None = Field(None, description="Argument of perigee [deg] (0 if "
                                             "not given).")
    true_anomaly_deg: Angle360 | None = Field(None, description="True anomaly [deg].")
    mean_anomaly_deg: Angle360 | None = Field(None, description="Mean anomaly [deg].")
    position_km: Vector3 | None = Field(None, description="Inertial (GCRS-like) position [km].")
    velocity_km_s: Vector3 | None = Field(None, description="Inertial velocity [km/s].")

    _ELEMENT_KEYS: typing.ClassVar[tuple[str, ...]] = (
        "altitude_km", "semi_major_axis_km", "eccentricity", "inclination_deg", "raan_deg",
        "arg_perigee_deg", "true_anomaly_deg", "mean_anomaly_deg", "ltan_h",
    )

    _id_text = field_validator("id", mode="before")(text_id)

    @model_validator(mode="before")
    @classmethod
    def _element_defaults(cls, data: Any) -> Any:
        """Fill eccentricity, RAAN and argument of perigee with 0 for Keplerian satellites."""
        if isinstance(data, dict) and "position_km" not in data and "velocity_km_s" not in data:
            data = dict(data)
            for key in ("eccentricity", "arg_perigee_deg"):
                data.setdefault(key, 0.0)
            if "ltan_h" not in data:
                data.setdefault("raan_deg", 0.0)
        return data

    @property
    def is_state_vector(self) -> bool:
        """True when the satellite is given as a position and velocity."""
        return self.position_km is not None or self.velocity_km_s is not None

    @model_validator(mode="after")
    def _check(self) -> SatelliteEntry:
        if not NAME_RE.match(self.id):
            raise Problems([(("id",), "may hold only letters, digits, '-', '_' and '.'", self.id)])
        if self.is_state_vector:
            given = [k for k in self._ELEMENT_KEYS if getattr(self, k) is not None]
            if given:
                raise Problems([((given[0],), "give either Keplerian elements or position_km "
                                  "with velocity_km_s, not both", getattr(self, given[0]))])
            if self.position_km is None or self.velocity_km_s is None:
                missing = "position_km" if self.position_km is None else "velocity_km_s"
                raise Problems([((missing,), "a state vector needs both position_km and "
                                  "velocity_km_s", None)])
            return self._check_state()
        problems = orbit_size_problems(self.altitude_km, self.semi_major_axis_km,
                                       self.eccentricity or 0.0)
        if self.inclination_deg is None:
            problems.append((("inclination_deg",), "is required for Keplerian elements "
                             "(0 to 180 deg)", None))
        if (self.true_anomaly_deg is None) == (self.mean_anomaly_deg is None):
            problems.append((("true_anomaly_deg",), "give exactly one of true_anomaly_deg or "
                             "mean_anomaly_deg", self.true_anomaly_deg))
        if self.ltan_h is not None and self.raan_deg is not None:
            problems.append((("ltan_h",), "give either raan_deg or ltan_h (which sets the "
                             "RAAN from the mean Sun at the epoch), not both", self.ltan_h))
        if problems:
            raise Problems(problems)
        if self.inclination_deg == SUN_SYNCHRONOUS:
            sun_synchronous_inclination_deg(self.a_km, self.eccentricity or 0.0)
        return self

    @property
    def a_km(self) -> float:
        """Semi-major axis of a Keplerian satellite [km]."""
        return semi_major_axis_km(self.altitude_km, self.semi_major_axis_km)

    @property
    def inclination_value_deg(self) -> float:
        """The inclination of a Keplerian satellite [deg]: as given, or sun-synchronous."""
        return inclination_value_deg(self.inclination_deg, self.a_km,  # type: ignore[arg-type]
                                     self.eccentricity or 0.0)

    def _check_state(self) -> SatelliteEntry:
        """Two-body energy and perigee of the state vector (Vallado 5th ed., Algorithm 9)."""
        r_km, v2, energy, a_km, e, h2 = two_body(self.position_km, self.velocity_km_s)
        if r_km <= WGS84_A_KM:
            raise Problems([(("position_km",), f"|r| = {km_text(r_km)} km is inside the Earth; "
                              f"allowed: |r| > {WGS84_A_KM} km", self.position_km)])
        if not r_km < EARTH_SOI_RADIUS_KM:
            raise Problems([(("position_km",), f"|r| = {km_text(r_km)} km is beyond the Earth's "
                              f"sphere of influence; allowed: |r| < {EARTH_SOI_RADIUS_KM:,.0f} "
                              "km", self.position_km)])
        if energy >= 0.0:
            raise Problems([(("velocity_km_s",), f"|v| = {math.sqrt(v2):.6g} km/s gives an "
                              "unbound orbit (e >= 1); allowed: |v| < escape speed "
                              f"{math.sqrt(2 * MU_EARTH_KM3_S2 / r_km):.6g} km/s",
                              self.velocity_km_s)])
        if h2 == 0.0 or a_km * (1.0 - e) <= WGS84_A_KM:
            raise Problems([(("velocity_km_s",), f"the orbit's perigee radius "
                              f"{km_text(a_km * (1.0 - e))} km is below the surface; allowed: "
                              f"perigee radius > {WGS84_A_KM} km", self.velocity_km_s)])
        if not a_km * (1.0 + e) < EARTH_SOI_RADIUS_KM:
            raise Problems([(("velocity_km_s",), f"the orbit's apogee radius "
                              f"{km_text(a_km * (1.0 + e))} km is beyond the Earth's sphere of "
                              f"influence; allowed: apogee radius < {EARTH_SOI_RADIUS_KM:,.0f} "
                              "km", self.velocity_km_s)])
        return self

    @property
    def perigee_altitude_km(self) -> float:
        """a(1 - e) minus the WGS 84 equatorial radius [km] (two-body, at the epoch)."""
        if self.is_state_vector:
            _, _, _, a_km, e, _ = two_body(self.position_km, self.velocity_km_s)
            return a_km * (1.0 - e) - WGS84_A_KM
        return self.a_km * (1.0 - (self.eccentricity or 0.0)) - WGS84_A_KM


class GroupEntry(SectionModel):
    """One group of satellites: a Walker pattern with its template, or a list of satellites."""

    name: str | None = Field(None, min_length=1, max_length=40,
                             description="Group name; prefixes the satellite ids.")
    walker: WalkerSection | None = None
    template: TemplateSection | None = None
    satellites: list[SatelliteEntry] | None = Field(None, min_length=1)

    @model_validator(mode="after")
    def _check(self) -> GroupEntry:
        if self.name is not None and not NAME_RE.match(self.name):
            raise Problems([(("name",), "may hold only letters, digits, '-', '_' and '.'",
                              self.name)])
        if self.satellites is not None:
            if self.walker is not None or self.template is not None:
                key = "walker" if self.walker is not None else "template"
                raise Problems([((key,), "a group is either walker+template or satellites, "
                                  "not both", None)])
            return self
        if self.walker is None and self.template is None:
            raise Problems([((), "a group needs walker+template or satellites", None)])
        if self.walker is None:
            raise Problems([(("walker",), "is required with template "
                              "(walker: {pattern, total, planes, phasing})", None)])
        if self.template is None:
            raise Problems([(("template",), "is required with walker (template: "
                              "{altitude_km, inclination_deg, ...})", None)])
        return self

    @property
    def count(self) -> int:
        """Number of satellites in the group."""
        return self.walker.total if self.walker is not None else len(self.satellites or [])


class SensorSection(SectionModel):
    """What a satellite can see: a cell is covered when every given limit holds."""

    min_elevation_deg: float = Field(10.0, ge=0.0, lt=90.0,
                                     description="Minimum elevation seen from the cell [deg].")
    max_off_nadir_deg: float | None = Field(None, gt=0.0, lt=90.0,
                                            description="Sensor half-cone angle [deg].")
    max_range_km: float | None = Field(None, gt=0.0, le=MAX_RANGE_KM,
                                       description="Maximum slant range [km].")
    min_sun_elevation_deg: float | None = Field(
        None, gt=-90.0, lt=90.0, description="Daylight: a cell counts as seen only while the "
        "Sun is at least this high above its horizon [deg] (optical imaging).")
    min_off_nadir_deg: float | None = Field(
        None, gt=0.0, lt=90.0, description="Side-looking sensor: the inner edge of an "
        "off-nadir annulus [deg]; a cell is seen only at an off-nadir angle of at least this "
        "much (and at most max_off_nadir_deg).")
    look_side: Literal["left", "right", "both"] = Field(
        "both", description="Side of the satellite's Earth-fixed velocity on which cells are "
        "seen: left, right or both (a radar looking to one side of its ground track).")

    @model_validator(mode="after")
    def _check(self) -> SensorSection:
        lo, hi = self.min_off_nadir_deg, self.max_off_nadir_deg
        if lo is not None and hi is not None and lo >= hi:
            raise Problems([(("min_off_nadir_deg",), f"must be less than max_off_nadir_deg "
                              f"= {hi:g}; allowed: 0 < value < {hi:g}", lo)])
        return self


class GridSection(SectionModel):
    """The latitude-longitude grid of cells."""

    resolution_deg: float = Field(2.0, ge=0.05, le=30.0, description="Cell size [deg].")
    lat_min_deg: float = Field(-90.0, ge=-90.0, le=90.0, description="Southern edge [deg].")
    lat_max_deg: float = Field(90.0, ge=-90.0, le=90.0, description="Northern edge [deg].")
    lon_min_deg: float = Field(-180.0, ge=-180.0, le=180.0,
                               description="Western edge [deg]; above lon_max_deg the "
                               "window crosses the antimeridian.")
    lon_max_deg: float = Field(180.0, ge=-180.0, le=180.0, description="Eastern edge [deg].")

    @model_validator(mode="after")
    def _check(self) -> GridSection:
        if self.lat_min_deg >= self.lat_max_deg:
            raise Problems([(("lat_min_deg",), f"must be less than lat_max_deg = "
                              f"{self.lat_max_deg}", self.lat_min_deg)])
        try:
            grid_shape(self.resolution_deg, self.lat_min_deg, self.lat_max_deg,
                       self.lon_min_deg, self.lon_max_deg)
        except CovergridError as exc:
            key = (exc.field or "grid.resolution_deg").rpartition(".")[2]
            text = str(exc).partition(": ")[2] if exc.field else str(exc)
            raise Problems([((key,), text, getattr(self, key, None))]) from None
        return self


class RequirementSection(SectionModel):
    """A coverage requirement: a threshold that must hold over a share of the grid area."""

    metric: str = Field(description="A metric name (see the outputs reference).")
    k: int | None = Field(None, ge=1, le=64,
                          description="Fold for metric nfold_fraction (at least k in view).")
    at_most: float | None = Field(None, description="Upper limit, in the metric's units.")
    at_least: float | None = Field(None, description="Lower limit, in the metric's units.")
    area_fraction: float = Field(1.0, gt=0.0, le=1.0,
                                 description="Share of the grid area that must meet it.")

    @model_validator(mode="after")
    def _check(self) -> RequirementSection:
        names = metric_names()
        if names and self.metric not in names:
            raise Problems([(("metric",), f"unknown metric{did_you_mean(self.metric, names)}; "
                              f"allowed: {', '.join(names)}", self.metric)])
        if self.metric == "nfold_fraction" and self.k is None:
            raise Problems([(("k",), "is required with metric nfold_fraction (k >= 1)", None)])
        if self.metric != "nfold_fraction" and self.k is not None:
            raise Problems([(("k",), "applies only to metric nfold_fraction", self.k)])
        if (self.at_most is None) == (self.at_least is None):
            raise Problems([(("at_most",), "give exactly one of at_most or at_least",
                              self.at_most)])
        return self


class DopSection(SectionModel):
    """Dilution of precision per cell from the satellites in view (navigation studies)."""

    pdop_threshold: float = Field(6.0, gt=0.0, le=1000.0, description="pdop_fraction counts "
                                  "the time with PDOP at or below this [unitless].")


class MapsSection(SectionModel):
    """Which metric maps to draw and how."""

    metrics: list[str] = Field(default_factory=lambda: list(DEFAULT_MAP_METRICS),
                               description="Metrics to map.")
    projection: Literal["robinson", "plate_carree", "mollweide", "equal_earth", "orthographic",
                        "polar_north", "polar_south"] = Field(
        "robinson", description="Map projection of the metric maps.")

    @field_validator("metrics")
    @classmethod
    def _known(cls, value: list[str]) -> list[str]:
        names = metric_names()
        problems = [((i,), f"unknown metric{did_you_mean(m, names)}; allowed: "
                      f"{', '.join(names)}", m)
                    for i, m in enumerate(value) if names and m not in names]
        if problems:
            raise Problems(problems)
        return value


class ComputeSection(SectionModel):
    """Where and how the work runs."""

    scheduler: str = Field("threads", description="threads | synchronous | processes | "
                           "local-cluster | tcp://host:port (an existing dask scheduler).")
    workers: int | None = Field(None, ge=1, le=1024, description="local-cluster: workers.")
    threads_per_worker: int | None = Field(None, ge=1, le=256,
                                           description="local-cluster: threads per worker.")
    chunk_rows: int | None = Field(None, ge=1, le=MAX_CHUNK_ROWS,
                                   description="Latitude rows per task.")
    memory_limit_gb: float | None = Field(None, gt=0.0, le=MAX_MEMORY_LIMIT_GB,
                                          description="Refuse studies estimated above this "
                                          "(default: the memory available).")

    @field_validator("scheduler")
    @classmethod
    def _scheduler(cls, value: str) -> str:
        return check_scheduler(value)


class OutputSection(SectionModel):
    """Options for the written outputs."""

    band_width_deg: float = Field(10.0, ge=MIN_BAND_WIDTH_DEG, le=180.0,
                                  description="Latitude band width of the summary [deg].")
