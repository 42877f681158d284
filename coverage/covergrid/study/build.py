"""From a validated study to what the computation takes: the one translation, done once.

:func:`resolve` turns a :class:`~covergrid.study.models.Study` (the file's values, in the
file's units) into a :class:`ResolvedStudy`: the constellation's element set (degrees to
radians here, and only here), the span, the grid, the sensor, the requirement and the
options of the run, as plain frozen data. Everything downstream (the run pipeline, the
memory estimate, figures, sweeps and sizing) takes the resolved bundle and never goes back
to the study file's models, so a study parameter such as ``sensor.min_elevation_deg`` goes
from the file to the kernel along one path:

    Study.sensor (SensorSection) --resolve--> ResolvedStudy.sensor (compute.sensor.Sensor)
      --run.pipeline--> compute.engine.compute_coverage(sensor=...) --> Sensor.kernel_args()
      --> compute.kernel.advance(el_min_rad, ...)
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from covergrid.compute.dop_spec import DopSpec
from covergrid.compute.grid import GridSpec
from covergrid.compute.region import Region
from covergrid.compute.requirement import Requirement
from covergrid.compute.sensor import Sensor
from covergrid.compute.span import count_steps
from covergrid.compute.targets import Targets
from covergrid.constants import DEG, WGS84_A_KM
from covergrid.earth.time import parse_epoch
from covergrid.errors import CovergridError, ElementError, StudyError
from covergrid.orbits import walker as w
from covergrid.orbits.element_set import ElementSet
from covergrid.study.messages import format_path
from covergrid.study.models import Study
from covergrid.study.orbit_rules import (
    SUN_SYNCHRONOUS,
    sun_synchronous_inclination_deg,
)
from covergrid.study.place_sections import TargetRequirementSection
from covergrid.study.sections import (
    GroupEntry,
    SatelliteEntry,
)
from covergrid.study.trade_sections import SizingSection, SweepSection

__all__ = [
    "ComputeOptions",
    "DerivedValue",
    "MapOptions",
    "ResolvedStudy",
    "WalkerTemplate",
    "as_resolved",
    "build_elements",
    "group_prefix",
    "nfold_max_of",
    "resolve",
    "trade_orbits",
]

#: Largest fold K of nfold_fraction computed when no requirement asks for more.
DEFAULT_NFOLD_MAX = 4


@dataclass(frozen=True)
class WalkerTemplate:
    """The first Walker group of a study: its pattern and the orbit its satellites share.

    Sweeps and sizing substitute their axes into it. Angles in degrees, as in the file.
    """

    pattern: str
    total: int
    planes: int
    phasing: int
    altitude_km: float
    eccentricity: float
    inclination_deg: float
    raan_deg: float
    arg_perigee_deg: float
    mean_anomaly_deg: float
    sun_synchronous: bool = False
    ltan_h: float | None = None

    def orbit(self) -> dict[str, Any]:
        """The template orbit besides altitude and inclination (what a design inherits)."""
        return {"eccentricity": self.eccentricity, "raan_deg": self.raan_deg,
                "arg_perigee_deg": self.arg_perigee_deg,
                "mean_anomaly_deg": self.mean_anomaly_deg}


@dataclass(frozen=True)
class DerivedValue:
    """A value the study asked to be derived (``covergrid check`` prints them).

    Attributes
    ----------
    path : str
        The study key it stands for (``constellation[0].template.inclination_deg``).
    value : float
        The derived value [unit].
    unit : str
        ``deg``.
    how : str
        From what and by which rule.
    """

    path: str
    value: float
    unit: str
    how: str


@dataclass(frozen=True)
class ComputeOptions:
    """Where and how the work runs (``compute:`` of the study file)."""

    scheduler: str = "threads"
    workers: int | None = None
    threads_per_worker: int | None = None
    chunk_rows: int | None = None
    memory_limit_gb: float | None = None


@dataclass(frozen=True)
class MapOptions:
    """Which metric maps to draw and in which projection (``maps:`` of the study file)."""

    metrics: tuple[str, ...]
    projection: str


@dataclass(frozen=True)
class ResolvedStudy:
    """A study as the computation takes it: plain, frozen, built once by :func:`resolve`.

    Attributes
    ----------
    name : str
        The study name (the output folder).
    epoch : numpy.datetime64
        Start of the span, UTC [ns].
    epoch_iso : str
        The epoch as ISO 8601 text (``...Z``).
    duration_s, step_s : float
        Span and sample spacing [s].
    n_steps : int
        Samples N (the span is N x step_s).
    elements : ElementSet
        Every satellite of every group, in file order [km, rad].
    sensor : Sensor
        Visibility limits.
    grid : GridSpec
        The cells.
    nfold_max : int
        K of ``nfold_fraction``.
    refine_transitions : bool
        Continuous time (rises and sets at limit-crossing times between samples).
    requirement : Requirement or None
        The coverage requirement.
    band_width_deg : float
        Latitude band width of the summary [deg].
    maps : MapOptions
        Figures to draw.
    compute : ComputeOptions
        Scheduler and resource options.
    walker : WalkerTemplate or None
        The first Walker group, if any.
    n_groups : int
        Groups in the constellation.
    sweep, sizing : section or None
        The trade blocks (their axes are already expanded lists).
    resolved_yaml : str
        The study with every default filled in (the provenance record).
    targets : Targets or None
        Point targets (evaluated exactly at each site).
    target_requirement : TargetRequirementSection or None
        The requirement over the targets.
    derived : tuple of DerivedValue
        Values derived from others (sun-synchronous inclinations, RAANs from ltan_h).
    dop : DopSpec or None
        The dilution-of-precision request (the ``dop:`` section), or None.
    """

    name: str
    epoch: Any
    epoch_iso: str
    duration_s: float
    step_s: float
    n_steps: int
    elements: ElementSet
    sensor: Sensor
    grid: GridSpec
    nfold_max: int
    refine_transitions: bool
    requirement: Requirement | None
    band_width_deg: float
    maps: MapOptions
    compute: ComputeOptions
    walker: WalkerTemplate | None
    n_groups: int
    sweep: SweepSection | None = None
    sizing: SizingSection | None = None
    resolved_yaml: str = field(default="", repr=False)
    targets: Targets | None = None
    target_requirement: TargetRequirementSection | None = None
    derived: tuple[DerivedValue, ...] = ()
    dop: DopSpec | None = None

    @property
    def n_satellites(self) -> int:
        """Number of satellites."""
        return len(self.elements)

    @property
    def single_walker(self) -> bool:
        """True when the constellation is exactly one Walker group."""
        return self.walker is not None and self.n_groups == 1


def nfold_max_of(n_satellites: int, requirement: Requirement | None) -> int:
    """K of ``nfold_fraction``: 4 (no more than the satellites there are, at least 1), or the
    requirement's k if larger."""
    k = requirement.k if requirement is not None and requirement.k else 0
    return max(min(DEFAULT_NFOLD_MAX, n_satellites), k, 1)


def as_resolved(study: Study | ResolvedStudy) -> ResolvedStudy:
    """``study`` itself if already resolved, else :func:`resolve` of it (entry points of the
    Python API take either and resolve once)."""
    return study if isinstance(study, ResolvedStudy) else resolve(study)


def resolve(study: Study) -> ResolvedStudy:
    """Build the resolved bundle of a validated study (see the module notes).

    Raises
    ------
    StudyError
        If the element sets cannot be built (naming the constellation group).
    """
    r = study.requirement
    requirement = None if r is None else Requirement(
        metric=r.metric, at_most=r.at_most, at_least=r.at_least,
        area_fraction=r.area_fraction, k=r.k)
    elements = build_elements(study)
    s, c = study.sensor, study.compute
    return ResolvedStudy(
        name=study.study,
        epoch=parse_epoch(study.epoch),
        epoch_iso=study.epoch,
        duration_s=study.duration_s,
        step_s=study.step_s,
        n_steps=count_steps(study.duration_s, study.step_s),
        elements=elements,
        sensor=Sensor(min_elevation_deg=s.min_elevation_deg,
                      max_off_nadir_deg=s.max_off_nadir_deg, max_range_km=s.max_range_km,
                      min_sun_elevation_deg=s.min_sun_elevation_deg,
                      min_off_nadir_deg=s.min_off_nadir_deg, look_side=s.look_side),
        grid=_grid(study),
        nfold_max=nfold_max_of(len(elements), requirement),
        refine_transitions=study.refine_transitions,
        requirement=requirement,
        band_width_deg=study.output.band_width_deg,
        maps=MapOptions(metrics=tuple(study.maps.metrics), projection=study.maps.projection),
        compute=ComputeOptions(scheduler=c.scheduler, workers=c.workers,
                               threads_per_worker=c.threads_per_worker,
                               chunk_rows=c.chunk_rows, memory_limit_gb=c.memory_limit_gb),
        walker=_walker_template(study),
        n_groups=len(study.constellation),
        sweep=study.sweep,
        sizing=study.sizing,
        resolved_yaml=study.dump_resolved_yaml(),
        targets=_targets(study),
        target_requirement=None if study.targets is None else study.targets.requirement,
        derived=derived_values(study),
        dop=None if study.dop is None else DopSpec(pdop_threshold=study.dop.pdop_threshold),
    )


def _grid(study: Study) -> GridSpec:
    """The study's grid: its extent and region (the engine computes its cropped window,
    :meth:`covergrid.compute.grid.GridSpec.cropped`, found here once so that a region
    without cells is refused before anything runs).

    Raises
    ------
    StudyError
        Naming ``region`` when no cell centre lies in the region.
    """
    g, r = study.grid, study.region
    region = None if r is None else Region(areas_wkb=r.areas_wkb, surface=r.surface,
                                           label=r.title())
    spec = GridSpec(resolution_deg=g.resolution_deg, lat_min_deg=g.lat_min_deg,
                    lat_max_deg=g.lat_max_deg, lon_min_deg=g.lon_min_deg,
                    lon_max_deg=g.lon_max_deg, region=region)
    try:
        spec.cropped()
    except CovergridError as exc:
        raise StudyError(str(exc).partition(": ")[2] or str(exc),
                         field=exc.field or "region") from None
    return spec


def _targets(study: Study) -> Targets | None:
    """The study's point targets, or None."""
    if study.targets is None:
        return None
    e = study.targets.entries
    return Targets(names=tuple(t.name for t in e), lat_deg=tuple(t.lat_deg for t in e),
                   lon_deg=tuple(t.lon_deg for t in e),
                   altitude_m=tuple(t.altitude_m for t in e))


def _walker_template(study: Study) -> WalkerTemplate | None:
    """The first Walker group's pattern and template orbit, or None."""
    for group in study.constellation:
        if group.walker is not None and group.template is not None:
            k, t = group.walker, group.template
            return WalkerTemplate(
                pattern=k.pattern, total=k.total, planes=k.planes, phasing=k.phasing,
                altitude_km=t.a_km - WGS84_A_KM, eccentricity=t.eccentricity,
                inclination_deg=t.inclination_value_deg,
                raan_deg=_raan_deg(t.raan_deg, t.ltan_h, study.epoch),
                arg_perigee_deg=t.arg_perigee_deg, mean_anomaly_deg=t.mean_anomaly_deg,
                sun_synchronous=t.sun_synchronous, ltan_h=t.ltan_h)
    return None


def build_elements(study: Study) -> ElementSet:
    """The constellation's mean elements (degrees converted to radians here).

    Returns
    -------
    ElementSet
        Every satellite of every group, in file order.

    Raises
    ------
    StudyError
        If a group's elements are invalid, or a generated Walker id clashes with another.
    """
    sets = []
    for gi, group in enumerate(study.constellation):
        prefix = group_prefix(group, gi, len(study.constellation))
        try:
            sets.append(_group_elements(group, prefix, study.epoch))
        except ElementError as exc:
            raise StudyError(str(exc), field=format_path(("constellation", gi))) from None
    all_ids = [i for s in sets for i in s.ids]
    dup = _first_duplicate(all_ids)
    if dup is not None:
        raise StudyError(f"duplicate satellite id {dup!r} (a generated Walker id "
                         "<group>-P<plane>-<slot> clashes with another id); give the groups "
                         "distinct names or the satellites distinct ids",
                         field="constellation")
    return sets[0] if len(sets) == 1 else ElementSet.concat(sets)


def group_prefix(group: GroupEntry, index: int, n_groups: int) -> str:
    """Id prefix of a Walker group's satellites (ids ``<prefix>-P<plane>-<slot>``).

    The group's name, else ``S`` for a single group or ``G<n>`` (n counted from 1).
    """
    if group.name is not None:
        return group.name
    return "S" if n_groups == 1 else f"G{index + 1}"


def _group_elements(group: GroupEntry, prefix: str, epoch: str) -> ElementSet:
    if group.walker is not None:
        t = group.template
        assert t is not None
        return w.walker(
            group.walker.pattern, group.walker.total, group.walker.planes, group.walker.phasing,
            a_km=t.a_km, e=t.eccentricity, i_rad=t.inclination_value_deg * DEG,
            raan0_rad=_raan_deg(t.raan_deg, t.ltan_h, epoch) * DEG,
            argp_rad=t.arg_perigee_deg * DEG,
            M0_rad=t.mean_anomaly_deg * DEG, id_prefix=prefix,
        )
    sats = group.satellites or []
    ids = tuple(s.id for s in sats)
    if all(s.is_state_vector for s in sats):
        r = np.array([s.position_km for s in sats], dtype=float)
        v = np.array([s.velocity_km_s for s in sats], dtype=float)
        return w.from_state_vectors(r, v, ids)
    if not any(s.is_state_vector for s in sats):
        return _keplerian_set(sats, ids, epoch)
    parts = []
    for s in sats:
        if s.is_state_vector:
            parts.append(w.from_state_vectors(np.array([s.position_km], dtype=float),
                                              np.array([s.velocity_km_s], dtype=float), (s.id,)))
        else:
            parts.append(_keplerian_set([s], (s.id,), epoch))
    return ElementSet.concat(parts)


def _raan_deg(raan_deg: float | None, ltan_h: float | None, epoch: str) -> float:
    """The RAAN [deg]: as given (0 if not), or the one that puts the ascending node at local
    mean solar time ``ltan_h`` at the epoch
    (:func:`covergrid.earth.sun.raan_for_local_time_rad`)."""
    if ltan_h is None:
        return float(raan_deg or 0.0)
    from covergrid.earth.sun import raan_for_local_time_rad

    return math.degrees(float(raan_for_local_time_rad(ltan_h, parse_epoch(epoch))))


def derived_values(study: Study) -> tuple[DerivedValue, ...]:
    """The inclinations and RAANs a study derives (``sun-synchronous``, ``ltan_h``)."""
    out: list[DerivedValue] = []
    for gi, group in enumerate(study.constellation):
        entries: list[tuple[str, Any]] = []
        if group.template is not None:
            entries.append((format_path(("constellation", gi, "template")), group.template))
        for si, sat in enumerate(group.satellites or []):
            if not sat.is_state_vector:
                entries.append((format_path(("constellation", gi, "satellites", si)), sat))
        for where, orbit in entries:
            e = orbit.eccentricity or 0.0
            alt = orbit.a_km - WGS84_A_KM
            if orbit.inclination_deg == SUN_SYNCHRONOUS:
                out.append(DerivedValue(f"{where}.inclination_deg", orbit.inclination_value_deg,
                                        "deg", f"sun-synchronous at {alt:g} km altitude and e = "
                                        f"{e:g}: secular J2 turns the node once per "
                                        "tropical year"))
            if orbit.ltan_h is not None:
                out.append(DerivedValue(f"{where}.raan_deg",
                                        _raan_deg(None, orbit.ltan_h, study.epoch), "deg",
                                        f"ascending node at local mean solar time "
                                        f"{_clock(orbit.ltan_h)} at {study.epoch}"))
    return tuple(out)


def _clock(hours: float) -> str:
    """``10:30`` for 10.5 h (to the nearest second: ``10:30:15``)."""
    total = round(hours * 3600.0)
    h, rest = divmod(total, 3600)
    m, sec = divmod(rest, 60)
    return f"{h:02d}:{m:02d}" + (f":{sec:02d}" if sec else "")


def trade_orbits(study: ResolvedStudy, block: str) -> list[tuple[float, float]]:
    """The (altitude [km], inclination [deg]) pairs of a ``sweep`` or ``sizing`` block, in
    order (altitude first).

    Each altitude takes every listed inclination, or, for ``inclination_deg:
    sun-synchronous`` (and for a sweep without an inclination axis whose template is
    sun-synchronous), the sun-synchronous inclination at that altitude with the template's
    eccentricity.
    """
    t = study.walker
    e = t.eccentricity if t is not None else 0.0
    if block == "sweep":
        sw = study.sweep
        assert sw is not None and t is not None
        alts = sw.altitude_km or [t.altitude_km]
        incs: Any = sw.inclination_deg
        if incs is None:
            incs = SUN_SYNCHRONOUS if t.sun_synchronous else [t.inclination_deg]
    else:
        sz = study.sizing
        assert sz is not None
        alts, incs = sz.altitude_km, sz.inclination_deg
    pairs = []
    for alt in dict.fromkeys(float(a) for a in alts):
        if incs == SUN_SYNCHRONOUS:
            pairs.append((alt, sun_synchronous_inclination_deg(
                WGS84_A_KM + alt, e, (block, "altitude_km"))))
        else:
            pairs += [(alt, float(i)) for i in dict.fromkeys(incs)]
    return pairs


def _keplerian_set(sats: list[SatelliteEntry], ids: tuple[str, ...], epoch: str) -> ElementSet:
    def arr(getter):
        return np.array([getter(s) for s in sats], dtype=float)

    a = arr(lambda s: s.a_km)
    e = arr(lambda s: s.eccentricity or 0.0)
    i = arr(lambda s: s.inclination_value_deg) * DEG
    raan = arr(lambda s: _raan_deg(s.raan_deg, s.ltan_h, epoch)) * DEG
    argp = arr(lambda s: s.arg_perigee_deg or 0.0) * DEG
    true_given = [s.true_anomaly_deg is not None for s in sats]
    if all(true_given):
        return w.from_keplerian(a, e, i, raan, argp,
                                true_anomaly_rad=arr(lambda s: s.true_anomaly_deg) * DEG, ids=ids)
    if not any(true_given):
        return w.from_keplerian(a, e, i, raan, argp,
                                mean_anomaly_rad=arr(lambda s: s.mean_anomaly_deg) * DEG, ids=ids)
    parts = [_keplerian_set([s], (sid,), epoch) for s, sid in zip(sats, ids, strict=True)]
    return ElementSet.concat(parts)


def _first_duplicate(ids) -> str | None:
    seen: set[str] = set()
    for x in ids:
        if x in seen:
            return x
        seen.add(x)
    return None
