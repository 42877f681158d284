"""A coverage requirement: a metric threshold that must hold over a share of the area."""

from __future__ import annotations

from dataclasses import asdict, dataclass
from typing import Any

__all__ = ["Requirement", "meets_threshold"]


def meets_threshold(values: Any, sense: str, threshold: float) -> Any:
    """Which values meet a threshold: ``values <= threshold`` (``"at_most"``) or
    ``values >= threshold`` (``"at_least"``); NaN never meets (the one rule, used by the
    verdict and by every figure that marks where a requirement is not met).

    Parameters
    ----------
    values : numpy.ndarray
        Metric values [metric units].
    sense : str
        ``"at_most"`` or ``"at_least"``.
    threshold : float
        The limit [metric units].

    Returns
    -------
    numpy.ndarray of bool
        Same shape as ``values``.
    """
    if sense == "at_most":
        return values <= threshold
    if sense == "at_least":
        return values >= threshold
    raise ValueError(f"sense must be 'at_most' or 'at_least'; got {sense!r}")


@dataclass(frozen=True)
class Requirement:
    """A coverage requirement: a metric threshold that must hold over a share of the area.

    The one type that carries a requirement from the study file to the verdict, in runs,
    sweeps and sizing (:func:`covergrid.compute.summary.requirement_verdict` says what is met).

    Attributes
    ----------
    metric : str
        Metric name (``nfold_fraction`` needs ``k``).
    at_most, at_least : float or None
        The threshold, exactly one of them [metric units].
    area_fraction : float
        Share of the grid area that must meet it, in (0, 1] [unitless].
    k : int or None
        Fold of ``nfold_fraction``.
    """

    metric: str
    at_most: float | None = None
    at_least: float | None = None
    area_fraction: float = 1.0
    k: int | None = None

    def __post_init__(self) -> None:
        if (self.at_most is None) == (self.at_least is None):
            raise ValueError("give exactly one of at_most or at_least")
        if not 0.0 < self.area_fraction <= 1.0:
            raise ValueError(f"area_fraction must be in (0, 1]; got {self.area_fraction!r}")

    @property
    def threshold(self) -> float:
        """The limit, whichever sense it has [metric units]."""
        return float(self.at_most if self.at_most is not None else self.at_least)  # type: ignore[arg-type]

    @property
    def sense(self) -> str:
        """``"at_most"`` or ``"at_least"``."""
        return "at_most" if self.at_most is not None else "at_least"

    def meets(self, values: Any) -> Any:
        """Which of ``values`` meet the threshold (:func:`meets_threshold`)."""
        return meets_threshold(values, self.sense, self.threshold)

    def as_dict(self) -> dict[str, Any]:
        """Plain data: ``metric``, ``at_most``, ``at_least``, ``area_fraction``, ``k``."""
        return asdict(self)

    def verdict(self, ds: Any) -> dict[str, Any]:
        """:func:`~covergrid.compute.summary.requirement_verdict` of this requirement on a
        coverage Dataset."""
        from covergrid.compute.summary import requirement_verdict

        return requirement_verdict(ds, **self.as_dict())
