"""Argument checks shared by the orbit-design and footprint helpers (raise with a field name).

Vectorised helpers check their inputs where data enters and raise one
:class:`~covergrid.errors.ElementError` (or another :class:`~covergrid.errors.CovergridError`)
naming the field, the first bad value and what is allowed.
"""

from __future__ import annotations

from typing import Any

import numpy as np

from covergrid.errors import CovergridError, ElementError

__all__ = ["as_float", "check_altitude", "check_eccentricity", "check_semi_major_axis",
           "require", "scalar_or_array"]


def as_float(x: Any) -> np.ndarray:
    """``x`` as a float64 array."""
    return np.asarray(x, dtype=np.float64)


def scalar_or_array(x: np.ndarray) -> np.ndarray | float:
    """A Python float for a 0-d value, else the array."""
    return float(x) if np.ndim(x) == 0 else x


def require(
    ok: np.ndarray,
    values: np.ndarray,
    field: str,
    allowed: str,
    error: type[CovergridError] = ElementError,
) -> None:
    """Raise `error` naming the first value where `ok` is False."""
    ok = np.asarray(ok)
    if not np.all(ok):
        flat = np.ravel(np.broadcast_to(values, ok.shape))
        first = int(np.flatnonzero(~np.ravel(ok))[0])
        where = f"[{first}]" if ok.ndim else ""
        raise error(f"{field}{where} = {flat[first]!r} is invalid; allowed: {allowed}", field=field)


def check_semi_major_axis(a: np.ndarray, field: str = "a_km") -> None:
    """Finite and positive [km]."""
    require(np.isfinite(a) & (a > 0.0), a, field, "a finite semi-major axis > 0 km")


def check_eccentricity(e: np.ndarray, field: str = "e") -> None:
    """0 <= e < 1 (closed orbit)."""
    require(np.isfinite(e) & (e >= 0.0) & (e < 1.0), e, field, "0 <= e < 1")


def check_altitude(h: np.ndarray) -> None:
    """Finite and positive [km]."""
    require(np.isfinite(h) & (h > 0.0), h, "alt_km", "a finite altitude > 0 km")
