"""Walker designs and the context they are evaluated in.

A :class:`WalkerDesign` is one Walker constellation (pattern, T/P/F, altitude, inclination)
with one sensor elevation limit, possibly with one satellite removed (robustness cases). An
:class:`EvalContext` is everything else that decides a design's result: span, grid, the
other sensor limits, the requirement and the software. Both are frozen, so that together
they key a design's row in the result store (:mod:`covergrid.trade.store`).
"""

from __future__ import annotations

from dataclasses import asdict, dataclass, replace
from typing import Any

import numpy as np

from covergrid.compute.dop_spec import DopSpec
from covergrid.compute.grid import GridSpec
from covergrid.compute.requirement import Requirement
from covergrid.compute.sensor import Sensor
from covergrid.constants import DEG, WGS84_A_KM
from covergrid.orbits.element_set import ElementSet
from covergrid.orbits.walker import walker

__all__ = ["EvalContext", "WalkerDesign"]


@dataclass(frozen=True)
class WalkerDesign:
    """One Walker constellation and elevation limit to evaluate.

    Attributes
    ----------
    pattern : str
        ``"delta"`` or ``"star"``.
    total, planes, phasing : int
        Walker T/P/F.
    altitude_km : float
        Semi-major axis minus the WGS-84 equatorial radius [km].
    inclination_deg : float
        Inclination [deg].
    min_elevation_deg : float
        Minimum elevation of the sensor [deg].
    eccentricity, raan_deg, arg_perigee_deg, mean_anomaly_deg : float
        The rest of the Walker template (from the study's group) [unitless, deg].
    lost : int or None
        Index of a satellite removed from the pattern (robustness cases); None: intact.
    """

    pattern: str
    total: int
    planes: int
    phasing: int
    altitude_km: float
    inclination_deg: float
    min_elevation_deg: float
    eccentricity: float = 0.0
    raan_deg: float = 0.0
    arg_perigee_deg: float = 0.0
    mean_anomaly_deg: float = 0.0
    lost: int | None = None

    def full_elements(self) -> ElementSet:
        """Mean elements of the intact pattern [km, rad] (ids ``S-P<plane>-<slot>``)."""
        return walker(self.pattern,  # type: ignore[arg-type]
                      self.total, self.planes, self.phasing,
                      a_km=WGS84_A_KM + self.altitude_km, e=self.eccentricity,
                      i_rad=self.inclination_deg * DEG, raan0_rad=self.raan_deg * DEG,
                      argp_rad=self.arg_perigee_deg * DEG, M0_rad=self.mean_anomaly_deg * DEG,
                      id_prefix="S")

    def elements(self) -> ElementSet:
        """Mean elements of the design (without satellite ``lost``, if set) [km, rad]."""
        el = self.full_elements()
        if self.lost is None:
            return el
        keep = np.ones(len(el), dtype=bool)
        keep[self.lost] = False
        return el.subset(keep)

    @property
    def lost_id(self) -> str:
        """Id of the satellite removed, or ``""``."""
        return "" if self.lost is None else self.full_elements().ids[self.lost]

    def intact(self) -> WalkerDesign:
        """The same design with no satellite removed."""
        return replace(self, lost=None)

    @property
    def label(self) -> str:
        """``T/P/F`` text."""
        return f"{self.total}/{self.planes}/{self.phasing}"


@dataclass(frozen=True)
class EvalContext:
    """Everything besides the design that decides a row: span, grid, sensor, requirement.

    Attributes
    ----------
    epoch : str
        ISO 8601 UTC start.
    duration_s, step_s : float
        Span and step [s].
    grid : GridSpec
        The cells.
    sensor : Sensor
        The study's sensor; a design's ``min_elevation_deg`` replaces its elevation limit.
    nfold_max : int
        K of ``nfold_fraction``.
    requirement : Requirement or None
        The coverage requirement.
    software : str
        :func:`covergrid.trade.store.software_fingerprint`.

    Built from a study by :func:`covergrid.trade.space.evaluation_context`.
    refine_transitions : bool
        Gap boundaries at limit-crossing times (see
        :func:`covergrid.compute.engine.compute_coverage`).
    dop : DopSpec or None
        Also compute the dilutions of precision (the study's ``dop:`` section).
    """

    epoch: str
    duration_s: float
    step_s: float
    grid: GridSpec
    sensor: Sensor
    nfold_max: int
    requirement: Requirement | None
    software: str
    refine_transitions: bool = True
    dop: DopSpec | None = None

    @property
    def resolution_deg(self) -> float:
        """Grid cell size [deg]."""
        return float(self.grid.resolution_deg)

    def sensor_for(self, design: WalkerDesign) -> Sensor:
        """The sensor of a design: the study's, with the design's elevation limit."""
        return replace(self.sensor, min_elevation_deg=design.min_elevation_deg)

    def inputs(self, design: WalkerDesign) -> dict[str, Any]:
        """Every input of a design's row: hashed into its store key."""
        return {"design": asdict(design), "context": asdict(self)}
