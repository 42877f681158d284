"""What a satellite's sensor can see of a ground cell: the visibility limits.

:class:`Sensor` is the one type that carries the limits from the study file down to the
compiled kernel (:mod:`covergrid.compute.kernel`), in degrees and kilometres; the kernel
takes them in radians through :meth:`Sensor.kernel_args`.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from covergrid.errors import CovergridError

__all__ = ["Sensor"]


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
    """

    min_elevation_deg: float = 10.0
    max_off_nadir_deg: float | None = None
    max_range_km: float | None = None
    min_sun_elevation_deg: float | None = None

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

    def kernel_args(self) -> tuple[float, float, float]:
        """(el_min_rad, eta_max_rad or 0, range_max_km or 0) as the kernel takes them."""
        return (
            math.radians(self.min_elevation_deg),
            math.radians(self.max_off_nadir_deg) if self.max_off_nadir_deg else 0.0,
            float(self.max_range_km) if self.max_range_km else 0.0,
        )
