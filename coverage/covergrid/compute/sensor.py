"""What a satellite's sensor can see of a ground cell: the visibility limits.

:class:`Sensor` is the one type that carries the limits from the study file down to the
compiled kernel (:mod:`covergrid.compute.kernel`), in degrees and kilometres; the kernel
takes them in radians through :meth:`Sensor.kernel_args`.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from covergrid.errors import CovergridError

__all__ = ["LOOK_SIDES", "Sensor", "is_side_looking"]

#: Which side of the ground track a side-looking sensor sees, and its sign in the kernel:
#: +1 left of the Earth-fixed velocity (n . p >= 0 with n = r x v), -1 right, 0 both.
LOOK_SIDES = {"left": 1, "right": -1, "both": 0}


def is_side_looking(min_off_nadir_deg: float | None, look_side: str) -> bool:
    """Whether limits see an off-nadir annulus or one side of the track only (the one rule,
    for :class:`Sensor` and the study's checks alike)."""
    return min_off_nadir_deg is not None or look_side != "both"


@dataclass(frozen=True)
class Sensor:
    """Visibility limits of a ground cell from a satellite; a cell is seen when all hold.

    Parameters
    ----------
    min_elevation_deg : float
        Minimum elevation of the satellite above the cell's ellipsoid-normal horizon [deg],
        in [0, 90).
    max_off_nadir_deg : float or None
        Half-angle of a nadir-pointing conical sensor, measured at the satellite from the
        geocentric nadir [deg], in (0, 90); None: no limit.
    max_range_km : float or None
        Maximum slant range [km]; None: no limit.
    min_sun_elevation_deg : float or None
        Daylight: the cell counts as seen only while the Sun's centre is at least this high
        above its horizon [deg], in (-90, 90) (:mod:`covergrid.compute.daylight`); None: day
        and night alike.
    min_off_nadir_deg : float or None
        Side-looking sensor: the inner edge of an off-nadir annulus [deg], in (0, 90) and
        below ``max_off_nadir_deg`` when that is given; a cell is seen only at an off-nadir
        angle of at least this much. None: no inner limit.
    look_side : str
        ``"left"``, ``"right"`` or ``"both"`` (default): the side of the satellite's
        Earth-fixed velocity on which cells are seen (the half-space bounded by the plane
        through the Earth's centre holding the satellite's position and Earth-fixed
        velocity; a cell on that plane counts for both sides).
    """

    min_elevation_deg: float = 10.0
    max_off_nadir_deg: float | None = None
    max_range_km: float | None = None
    min_sun_elevation_deg: float | None = None
    min_off_nadir_deg: float | None = None
    look_side: str = "both"

    def __post_init__(self) -> None:
        e = self.min_elevation_deg
        if not (math.isfinite(e) and 0.0 <= e < 90.0):
            raise CovergridError(f"{e!r} deg is not allowed; use [0, 90)",
                                 "sensor.min_elevation_deg")
        o = self.max_off_nadir_deg
        if o is not None and not (math.isfinite(o) and 0.0 < o < 90.0):
            raise CovergridError(f"{o!r} deg is not allowed; use (0, 90) or leave it out",
                                 "sensor.max_off_nadir_deg")
        r = self.max_range_km
        if r is not None and not (math.isfinite(r) and r > 0.0):
            raise CovergridError(f"{r!r} km is not allowed; use a positive range or leave it out",
                                 "sensor.max_range_km")
        h = self.min_sun_elevation_deg
        if h is not None and not (math.isfinite(h) and -90.0 < h < 90.0):
            raise CovergridError(f"{h!r} deg is not allowed; use (-90, 90) or leave it out",
                                 "sensor.min_sun_elevation_deg")
        m = self.min_off_nadir_deg
        if m is not None:
            if not (math.isfinite(m) and 0.0 < m < 90.0):
                raise CovergridError(f"{m!r} deg is not allowed; use (0, 90) or leave it out",
                                     "sensor.min_off_nadir_deg")
            if o is not None and m >= o:
                raise CovergridError(f"{m!r} deg is not allowed; use less than "
                                     f"max_off_nadir_deg = {o!r} deg",
                                     "sensor.min_off_nadir_deg")
        if self.look_side not in LOOK_SIDES:
            raise CovergridError(f"{self.look_side!r} is not allowed; use one of "
                                 f"{', '.join(LOOK_SIDES)}", "sensor.look_side")

    @property
    def side_looking(self) -> bool:
        """Whether the sensor sees an off-nadir annulus or one side of the track only."""
        return is_side_looking(self.min_off_nadir_deg, self.look_side)

    def kernel_args(self) -> tuple[float, float, float]:
        """(el_min_rad, eta_max_rad or 0, range_max_km or 0) as the kernel takes them."""
        return (
            math.radians(self.min_elevation_deg),
            math.radians(self.max_off_nadir_deg) if self.max_off_nadir_deg else 0.0,
            float(self.max_range_km) if self.max_range_km else 0.0,
        )

    def side_args(self) -> tuple[float, int]:
        """(eta_min_rad or 0, side) as the kernel takes them (side: :data:`LOOK_SIDES`)."""
        return (math.radians(self.min_off_nadir_deg) if self.min_off_nadir_deg else 0.0,
                LOOK_SIDES[self.look_side])
