"""Where a study measures besides the grid's extent: a region of cells and point targets.

``region:`` restricts the grid to the cells whose centre lies in one or more GeoJSON areas
(:mod:`covergrid.study.geojson`) and/or on land or at sea. ``targets:`` lists sites
evaluated exactly at their position (:mod:`covergrid.compute.targets`), inline or from a
CSV file. Files are named relative to the study file (the validation context's
``base_dir``, set by :func:`covergrid.study.loading.load_study`; the current folder
otherwise) and read here, once, when the study is validated, so that a bad file is refused
before anything runs.
"""

from __future__ import annotations

import csv
import io
import math
from pathlib import Path
from typing import Any, Literal

from pydantic import Field, PrivateAttr, ValidationInfo, model_validator

from covergrid.study.messages import Problems, show_value
from covergrid.study.sections import NAME_RE, SectionModel

__all__ = ["MAX_TARGETS", "TARGET_COLUMNS", "TARGET_METRIC_NAMES", "RegionSection",
           "TargetEntry", "TargetRequirementSection", "TargetsSection"]

#: Most targets a study may list (the pass list and the per-target state grow with them).
MAX_TARGETS = 100_000
#: Header of a targets CSV file, in this order.
TARGET_COLUMNS = ("name", "lat_deg", "lon_deg", "altitude_m")
#: Per-target metrics a target requirement may name (see the outputs reference).
TARGET_METRIC_NAMES = ("coverage_fraction", "max_gap", "mean_gap", "mean_response_time",
                       "pass_count")
#: Highest and lowest target altitude [m]: the Dead Sea shore to above the highest summit.
_ALT_RANGE_M = (-500.0, 9000.0)


def _base_dir(info: ValidationInfo) -> Path | None:
    ctx = info.context if isinstance(info.context, dict) else {}
    base = ctx.get("base_dir")
    return None if base is None else Path(base)


class RegionSection(SectionModel):
    """Compute only the cells whose centre lies in the areas and on the surface."""

    geojson: list[str | dict[str, Any]] = Field(
        default_factory=list, max_length=1000,
        description="GeoJSON Polygon/MultiPolygon objects (Feature, FeatureCollection and "
        "GeometryCollection of them too): each a file path relative to the study file, or "
        "inline; their union is the area.")
    surface: Literal["all", "land", "sea"] = Field(
        "all", description="Keep every cell of the area, those on land, or those at sea "
        "(Natural Earth 1:50m land).")
    label: str = Field("", max_length=200, description="Name of the region for titles.")
    _areas_wkb: bytes | None = PrivateAttr(None)
    _n_polygons: int = PrivateAttr(0)

    @model_validator(mode="after")
    def _read(self, info: ValidationInfo) -> RegionSection:
        if not self.geojson and self.surface == "all":
            raise Problems([(("geojson",), "a region needs at least one GeoJSON area or "
                              "surface: land or sea", None)])
        if self.geojson:
            import shapely

            from covergrid.study.geojson import read_areas

            union, n = read_areas(self.geojson, _base_dir(info))
            self._areas_wkb = bytes(shapely.to_wkb(union))
            self._n_polygons = n
        return self

    @property
    def areas_wkb(self) -> bytes | None:
        """The union of the areas in well-known binary (None: no areas)."""
        return self._areas_wkb

    def title(self) -> str:
        """The label, or a description of the region."""
        if self.label:
            return self.label
        where = (f"{self._n_polygons} area{'s' if self._n_polygons != 1 else ''}"
                 if self.geojson else "")
        surface = {"all": "", "land": "land", "sea": "sea"}[self.surface]
        return " within ".join(x for x in (surface, where) if x) or "region"


class TargetEntry(SectionModel):
    """One point target."""

    name: str = Field(min_length=1, max_length=100,
                      description="Unique name: letters, digits, '-', '_' and '.'.")
    lat_deg: float = Field(ge=-90.0, le=90.0, description="Geodetic latitude [deg].")
    lon_deg: float = Field(ge=-180.0, le=360.0, description="Longitude [deg].")
    altitude_m: float = Field(0.0, ge=_ALT_RANGE_M[0], le=_ALT_RANGE_M[1],
                              description="Height above the WGS 84 ellipsoid [m].")

    @model_validator(mode="after")
    def _name(self) -> TargetEntry:
        if not NAME_RE.match(self.name):
            raise Problems([(("name",), "allowed: letters, digits, '-', '_' and '.'",
                              self.name)])
        return self


class TargetRequirementSection(SectionModel):
    """A requirement over the targets: a threshold met by at least a share of them."""

    metric: str = Field(description="A per-target metric: " + ", ".join(TARGET_METRIC_NAMES))
    at_most: float | None = Field(None, description="Upper limit, in the metric's units.")
    at_least: float | None = Field(None, description="Lower limit, in the metric's units.")
    share: float = Field(1.0, gt=0.0, le=1.0,
                         description="Share of the targets that must meet it.")

    @model_validator(mode="after")
    def _check(self) -> TargetRequirementSection:
        if self.metric not in TARGET_METRIC_NAMES:
            raise Problems([(("metric",), "is not a per-target metric; allowed: "
                              + ", ".join(TARGET_METRIC_NAMES), self.metric)])
        if (self.at_most is None) == (self.at_least is None):
            raise Problems([(("at_most",), "give exactly one of at_most or at_least",
                              self.at_most)])
        return self


class TargetsSection(SectionModel):
    """Point targets, evaluated exactly at each site (not on the grid)."""

    file: str | None = Field(None, max_length=4096, description="A CSV file (relative to "
                             "the study file) with the header name,lat_deg,lon_deg,altitude_m.")
    sites: list[TargetEntry] = Field(default_factory=list, max_length=MAX_TARGETS,
                                     description="Inline targets.")
    requirement: TargetRequirementSection | None = None
    _all: tuple[TargetEntry, ...] = PrivateAttr(())

    @model_validator(mode="after")
    def _read(self, info: ValidationInfo) -> TargetsSection:
        entries = list(self.sites)
        if self.file is not None:
            base = _base_dir(info)
            path = Path(self.file) if base is None else base / self.file
            entries += _read_csv(path, self.file)
        if not entries:
            raise Problems([(("sites",), "no targets: give sites or a file", None)])
        if len(entries) > MAX_TARGETS:
            raise Problems([(("file",), f"holds {len(entries):,} targets; allowed: at most "
                              f"{MAX_TARGETS:,}", None)])
        seen: dict[str, int] = {}
        for n, e in enumerate(entries):
            if e.name in seen:
                raise Problems([(("sites" if n < len(self.sites) else "file",),
                                 f"the target name {show_value(e.name)} is used twice; "
                                 "allowed: unique names", e.name)])
            seen[e.name] = n
        self._all = tuple(entries)
        return self

    @property
    def entries(self) -> tuple[TargetEntry, ...]:
        """Every target: the inline ones, then the file's, in order."""
        return self._all


def _read_csv(path: Path, shown: str) -> list[TargetEntry]:
    """The targets of a CSV file (header :data:`TARGET_COLUMNS`), refused with the file
    name and line of the first problem."""
    from pydantic import ValidationError

    from covergrid.study.input_files import InputFileError, read_input_file

    try:
        raw = read_input_file(path, "a targets CSV file")
    except InputFileError as exc:
        raise Problems([(("file",), f"{shown}: {exc.reason}", None)]) from None
    try:
        text = raw.decode("utf-8-sig")
    except UnicodeDecodeError:
        raise Problems([(("file",), f"{shown}: not UTF-8 text; allowed: a UTF-8 CSV file",
                         None)]) from None
    rows = list(csv.reader(io.StringIO(text)))
    rows = [r for r in rows if any(c.strip() for c in r)]
    header = tuple(c.strip() for c in rows[0]) if rows else ()
    if header != TARGET_COLUMNS:
        raise Problems([(("file",), f"{shown}: line 1 must be the header "
                         f"{','.join(TARGET_COLUMNS)}; got {show_value(','.join(header))}",
                         None)])
    out = []
    for line, row in enumerate(rows[1:], start=2):
        if len(row) != len(TARGET_COLUMNS):
            raise Problems([(("file",), f"{shown}: line {line} has {len(row)} fields; "
                             f"allowed: {len(TARGET_COLUMNS)} ({','.join(TARGET_COLUMNS)})",
                             None)])
        values: dict[str, Any] = {"name": row[0].strip()}
        for key, cell in zip(TARGET_COLUMNS[1:], row[1:], strict=True):
            try:
                v = float(cell)
            except ValueError:
                v = math.nan
            if not math.isfinite(v):
                raise Problems([(("file",), f"{shown}: line {line}: {key} "
                                 f"{show_value(cell.strip())} is not a finite number", None)])
            values[key] = v
        try:
            out.append(TargetEntry.model_validate(values))
        except ValidationError as exc:
            err = exc.errors()[0]
            key = ".".join(str(x) for x in err["loc"]) or "target"
            raise Problems([(("file",), f"{shown}: line {line}: {key} "
                             f"{show_value(values.get(key, ''))}: {err['msg']}",
                             None)]) from None
    return out
