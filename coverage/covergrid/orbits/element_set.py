"""The element set: mean Keplerian elements of n satellites, the input of every later stage.

Propagation, visibility and metrics all take an :class:`ElementSet`: mean Keplerian
elements of ``n`` satellites on dimension ``sat`` in km and radians, plus one unique name
per satellite. Walker patterns and satellites given one by one are built into it by
:mod:`covergrid.orbits.walker`.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np

from covergrid.constants import EARTH_RADIUS_KM
from covergrid.errors import ElementError
from covergrid.orbits.elements import validate_elements

__all__ = ["ELEMENT_FIELDS", "ElementSet"]

ELEMENT_FIELDS = ("a_km", "e", "i_rad", "raan_rad", "argp_rad", "M_rad")


@dataclass(frozen=True)
class ElementSet:
    """Mean Keplerian elements of n satellites on dimension ``sat`` [km, rad].

    Parameters
    ----------
    a_km : array_like, shape (n,)
        Semi-major axis [km].
    e : array_like, shape (n,)
        Eccentricity, ``0 <= e < 1`` [unitless].
    i_rad : array_like, shape (n,)
        Inclination [rad].
    raan_rad : array_like, shape (n,)
        Right ascension of the ascending node [rad].
    argp_rad : array_like, shape (n,)
        Argument of perigee [rad].
    M_rad : array_like, shape (n,)
        Mean anomaly at the epoch [rad].
    ids : sequence of str, length n
        Unique satellite names.

    Raises
    ------
    ElementError
        If the lengths differ, an id repeats, or the elements fail
        :func:`~covergrid.orbits.elements.validate_elements` (closed orbit, finite
        values, perigee above the Earth's equatorial radius).

    Notes
    -----
    The arrays are stored as read-only float64 copies, so a set cannot change after it
    has been validated.
    """

    a_km: np.ndarray
    e: np.ndarray
    i_rad: np.ndarray
    raan_rad: np.ndarray
    argp_rad: np.ndarray
    M_rad: np.ndarray
    ids: tuple[str, ...]

    def __post_init__(self) -> None:
        ids = self.ids
        if isinstance(ids, str):
            raise ElementError(f"must be a sequence of names, got the string {ids!r}", "ids")
        ids = tuple(str(s) for s in ids)
        n = len(ids)
        for name in ELEMENT_FIELDS:
            arr = np.array(getattr(self, name), dtype=np.float64)  # copy
            if arr.ndim == 0:
                arr = np.full(n, float(arr))
            if arr.ndim != 1:
                raise ElementError(f"must be one-dimensional, got shape {arr.shape}", name)
            if arr.shape[0] != n:
                raise ElementError(
                    f"has {arr.shape[0]} values but there are {n} ids; lengths must match",
                    name,
                )
            arr.setflags(write=False)
            object.__setattr__(self, name, arr)
        seen: set[str] = set()
        for s in ids:
            if s in seen:
                raise ElementError(f"must be unique, {s!r} appears more than once", "ids")
            seen.add(s)
        object.__setattr__(self, "ids", ids)
        validate_elements(
            self.a_km,
            self.e,
            i_rad=self.i_rad,
            raan_rad=self.raan_rad,
            argp_rad=self.argp_rad,
            anomaly_rad=self.M_rad,
            ids=ids,
            require_closed=True,
            min_perigee_km=EARTH_RADIUS_KM,
        )

    def __len__(self) -> int:
        """Return the number of satellites."""
        return len(self.ids)

    def __eq__(self, other: object) -> bool:
        """Compare ids and element values (the generated dataclass ``==`` fails on arrays)."""
        if not isinstance(other, ElementSet):
            return NotImplemented
        return self.ids == other.ids and all(
            np.array_equal(getattr(self, f), getattr(other, f)) for f in ELEMENT_FIELDS
        )

    def __hash__(self) -> int:
        """Hash of ids and element bytes (the arrays are read-only), so sets can be cache keys."""
        return hash((self.ids, *(getattr(self, f).tobytes() for f in ELEMENT_FIELDS)))

    @staticmethod
    def concat(sets: Sequence[ElementSet]) -> ElementSet:
        """Join several sets (shells, groups) into one constellation.

        Parameters
        ----------
        sets : sequence of ElementSet
            At least one set; ids must stay unique across all of them.

        Returns
        -------
        ElementSet
            The satellites of all sets, in order.
        """
        sets = list(sets)
        if not sets:
            raise ElementError("needs at least one ElementSet to join, got none", "sets")
        for k, s in enumerate(sets):
            if not isinstance(s, ElementSet):
                raise ElementError(f"item {k} must be an ElementSet, got {type(s).__name__}")
        cols = {f: np.concatenate([getattr(s, f) for s in sets]) for f in ELEMENT_FIELDS}
        ids = tuple(i for s in sets for i in s.ids)
        return ElementSet(**cols, ids=ids)

    def subset(self, index: Any) -> ElementSet:
        """Select satellites, e.g. to drop one.

        Parameters
        ----------
        index : int, slice, array of int or bool, or sequence of ids
            Positions, a boolean mask of length n, or satellite names.

        Returns
        -------
        ElementSet
            The selected satellites (a single int still gives a set of one).
        """
        if isinstance(index, str):
            index = [index]
        if isinstance(index, Sequence) and index and all(isinstance(x, str) for x in index):
            pos = {s: k for k, s in enumerate(self.ids)}
            missing = [s for s in index if s not in pos]
            if missing:
                raise ElementError(f"unknown satellite ids {missing}", "ids")
            index = [pos[s] for s in index]
        if isinstance(index, (int, np.integer)):
            index = [int(index)]
        idx = np.arange(len(self))[index]
        return ElementSet(
            **{f: getattr(self, f)[idx] for f in ELEMENT_FIELDS},
            ids=tuple(self.ids[k] for k in np.atleast_1d(idx)),
        )
