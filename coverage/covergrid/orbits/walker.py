"""Walker delta and star patterns, and satellites given one by one, as element sets.

Each builder returns an :class:`~covergrid.orbits.element_set.ElementSet` (mean Keplerian
elements in km and radians plus one unique name per satellite).
"""

from __future__ import annotations

from collections.abc import Sequence
from typing import Any, Literal

import numpy as np
from numpy.typing import ArrayLike

from covergrid.constants import MU_EARTH_KM3_S2, TWO_PI
from covergrid.errors import ElementError
from covergrid.orbits.anomalies import true_to_mean
from covergrid.orbits.element_set import ElementSet
from covergrid.orbits.elements import (
    cartesian_to_kepler,
    validate_elements,
    validate_state,
)

__all__ = [
    "WALKER_PATTERNS",
    "count_walker_options",
    "divisors",
    "from_keplerian",
    "from_state_vectors",
    "walker",
    "walker_delta",
    "walker_star",
    "walker_option_counts",
    "walker_options",
]

# --------------------------------------------------------------------------------------
# Walker patterns
# --------------------------------------------------------------------------------------


def divisors(n: int) -> list[int]:
    """Every divisor of ``n`` in increasing order (the plane counts P a total T allows)."""
    small = [d for d in range(1, int(n**0.5) + 1) if n % d == 0]
    return small + [n // d for d in reversed(small) if d * d != n]


def walker_options(total: int, planes, phasing) -> list[tuple[int, int]]:
    """Valid (P, F) pairs of a total for ``planes``/``phasing`` given as ``"all"`` or lists.

    Planes that do not divide the total, and phasings not below the planes, are left out
    (Walker's T/P/F: P divides T, 0 <= F < P).
    """
    p_list = divisors(total) if planes == "all" else [p for p in dict.fromkeys(planes)
                                                      if total % p == 0]
    out = []
    for p in p_list:
        f_list = range(p) if phasing == "all" else [f for f in dict.fromkeys(phasing) if f < p]
        out += [(p, f) for f in f_list]
    return out


def walker_option_counts(totals, planes, phasing) -> tuple[np.ndarray, np.ndarray]:
    """The distinct totals and how many (P, F) pairs :func:`walker_options` gives each,
    counted without listing them.

    Each allowed plane count P adds its number of allowed phasings to every multiple of P
    (a sieve over 1 .. max T), so the cost is about max T log(max T) additions whatever the
    count: a search space of billions of patterns is counted in a fraction of a second.

    Returns
    -------
    (totals, counts) : tuple of int64 arrays
        The distinct totals >= 1 in increasing order and the patterns of each.
    """
    t = np.unique(np.asarray(list(totals), dtype=np.int64))
    t = t[t >= 1]
    if t.size == 0:
        return t, np.zeros(0, dtype=np.int64)
    t_max = int(t[-1])
    per_total = np.zeros(t_max + 1, dtype=np.int64)
    candidates = (range(1, t_max + 1) if planes == "all"
                  else sorted({int(p) for p in planes if 1 <= int(p) <= t_max}))
    f_sorted = None if phasing == "all" else np.unique(np.asarray(list(phasing), dtype=np.int64))
    for p in candidates:
        n_f = p if f_sorted is None else int(np.searchsorted(f_sorted, p))  # phasings F < P
        if n_f:
            per_total[p::p] += n_f
    return t, per_total[t]


def count_walker_options(totals, planes, phasing) -> int:
    """How many (T, P, F) patterns :func:`walker_options` gives over the distinct totals
    (see :func:`walker_option_counts`)."""
    return int(walker_option_counts(totals, planes, phasing)[1].sum())


def _check_tpf(total: int, planes: int, phasing: int) -> int:
    for name, val in (("total", total), ("planes", planes), ("phasing", phasing)):
        if isinstance(val, bool) or not isinstance(val, (int, np.integer)):
            raise ElementError(f"must be an integer, got {val!r}", name)
    if total < 1:
        raise ElementError(f"must be >= 1, got {total}", "total")
    if planes < 1 or total % planes:
        raise ElementError(
            f"must divide total = {total}, got {planes}; allowed: {divisors(total)}", "planes"
        )
    if not 0 <= phasing < planes:
        raise ElementError(
            f"must satisfy 0 <= phasing < planes = {planes}, got {phasing}; "
            f"allowed: 0..{planes - 1}",
            "phasing",
        )
    return total // planes


def _walker(
    spread_rad: float,
    total: int,
    planes: int,
    phasing: int,
    *,
    a_km: float,
    e: float,
    i_rad: float,
    raan0_rad: float,
    argp_rad: float,
    M0_rad: float,
    id_prefix: str,
) -> ElementSet:
    per_plane = _check_tpf(total, planes, phasing)
    j = np.repeat(np.arange(planes), per_plane)  # plane index of each satellite
    k = np.tile(np.arange(per_plane), planes)  # slot index within the plane
    raan = np.mod(raan0_rad + spread_rad * j / planes, TWO_PI)
    M = np.mod(M0_rad + TWO_PI * k / per_plane + TWO_PI * phasing * j / total, TWO_PI)
    wp, ws = max(2, len(str(planes))), max(2, len(str(per_plane)))
    ids = tuple(
        f"{id_prefix}-P{jj + 1:0{wp}d}-{kk + 1:0{ws}d}" for jj, kk in zip(j, k, strict=True)
    )
    n = total
    return ElementSet(
        a_km=np.full(n, float(a_km)),
        e=np.full(n, float(e)),
        i_rad=np.full(n, float(i_rad)),
        raan_rad=raan,
        argp_rad=np.full(n, float(argp_rad)),
        M_rad=M,
        ids=ids,
    )


def walker_delta(
    total: int,
    planes: int,
    phasing: int,
    *,
    a_km: float,
    e: float = 0.0,
    i_rad: float,
    raan0_rad: float = 0.0,
    argp_rad: float = 0.0,
    M0_rad: float = 0.0,
    id_prefix: str = "S",
) -> ElementSet:
    r"""Build a Walker delta pattern T/P/F: planes spread over 360 degrees of RAAN.

    Plane j has RAAN ``raan0 + 2 pi j / P``.

    Parameters
    ----------
    total : int
        Number of satellites T.
    planes : int
        Number of orbit planes P; must divide T.
    phasing : int
        Phasing factor F, ``0 <= F < P``.
    a_km : float
        Semi-major axis of every satellite [km].
    e : float, optional
        Eccentricity of every satellite [unitless].
    i_rad : float
        Inclination [rad].
    raan0_rad : float, optional
        Right ascension of the ascending node of plane 0 [rad].
    argp_rad : float, optional
        Argument of perigee of every satellite [rad].
    M0_rad : float, optional
        Mean anomaly of slot 0 in plane 0 [rad].
    id_prefix : str, optional
        Prefix of the ids ``"<prefix>-P<plane>-<slot>"``, both counted from 1 and
        zero-padded to at least two digits (``"S-P01-03"``).

    Returns
    -------
    ElementSet
        T satellites ordered plane by plane, slot by slot.

    Notes
    -----
    Walker's T/P/F notation [1]_: with ``S = T/P`` satellites per plane, satellite
    ``k`` of plane ``j`` has

    .. math:: u_{jk} = u_0 + \frac{2\pi k}{S} + \frac{2\pi F j}{T}

    where ``u = argp + M`` is the along-track angle from the node. For circular orbits
    this is the argument of latitude. For an eccentric template the spacing is applied
    to the mean anomaly (``M = M0 + 2 pi k / S + 2 pi F j / T`` with the common
    ``argp``), which keeps the satellites evenly spaced in time.

    References
    ----------
    .. [1] J. G. Walker, "Satellite constellations", Journal of the British
       Interplanetary Society, vol. 37, pp. 559-572, 1984.
    """
    return _walker(
        TWO_PI,
        total,
        planes,
        phasing,
        a_km=a_km,
        e=e,
        i_rad=i_rad,
        raan0_rad=raan0_rad,
        argp_rad=argp_rad,
        M0_rad=M0_rad,
        id_prefix=id_prefix,
    )


def walker_star(
    total: int,
    planes: int,
    phasing: int,
    *,
    a_km: float,
    e: float = 0.0,
    i_rad: float,
    raan0_rad: float = 0.0,
    argp_rad: float = 0.0,
    M0_rad: float = 0.0,
    id_prefix: str = "S",
) -> ElementSet:
    r"""Build a Walker star pattern T/P/F: planes spread over 180 degrees of RAAN.

    Plane j has RAAN ``raan0 + pi j / P`` (near-polar planes whose ascending and
    descending halves together cover all longitudes).

    Parameters
    ----------
    total : int
        Number of satellites T.
    planes : int
        Number of orbit planes P; must divide T.
    phasing : int
        Phasing factor F, ``0 <= F < P``.
    a_km : float
        Semi-major axis of every satellite [km].
    e : float, optional
        Eccentricity of every satellite [unitless].
    i_rad : float
        Inclination [rad].
    raan0_rad : float, optional
        Right ascension of the ascending node of plane 0 [rad].
    argp_rad : float, optional
        Argument of perigee of every satellite [rad].
    M0_rad : float, optional
        Mean anomaly of slot 0 in plane 0 [rad].
    id_prefix : str, optional
        Prefix of the ids ``"<prefix>-P<plane>-<slot>"``, both counted from 1 and
        zero-padded to at least two digits (``"S-P01-03"``).

    Returns
    -------
    ElementSet
        T satellites ordered plane by plane, slot by slot.

    Notes
    -----
    Walker's T/P/F notation [1]_: with ``S = T/P`` satellites per plane, satellite
    ``k`` of plane ``j`` has

    .. math:: u_{jk} = u_0 + \frac{2\pi k}{S} + \frac{2\pi F j}{T}

    where ``u = argp + M`` is the along-track angle from the node. For circular orbits
    this is the argument of latitude. For an eccentric template the spacing is applied
    to the mean anomaly (``M = M0 + 2 pi k / S + 2 pi F j / T`` with the common
    ``argp``), which keeps the satellites evenly spaced in time.

    References
    ----------
    .. [1] J. G. Walker, "Satellite constellations", Journal of the British
       Interplanetary Society, vol. 37, pp. 559-572, 1984.
    """
    return _walker(
        np.pi,
        total,
        planes,
        phasing,
        a_km=a_km,
        e=e,
        i_rad=i_rad,
        raan0_rad=raan0_rad,
        argp_rad=argp_rad,
        M0_rad=M0_rad,
        id_prefix=id_prefix,
    )


WALKER_PATTERNS = {"delta": walker_delta, "star": walker_star}


def walker(
    pattern: Literal["delta", "star"],
    total: int,
    planes: int,
    phasing: int,
    **kwargs: Any,
) -> ElementSet:
    """Build a Walker pattern by name (see :func:`walker_delta`, :func:`walker_star`).

    Parameters
    ----------
    pattern : {"delta", "star"}
        Which pattern.
    total, planes, phasing : int
        Walker T/P/F.
    **kwargs
        Keyword arguments of :func:`walker_delta` (``a_km``, ``i_rad``, ...).

    Returns
    -------
    ElementSet
        The constellation.
    """
    try:
        build = WALKER_PATTERNS[pattern]
    except (KeyError, TypeError):
        raise ElementError(
            f"unknown Walker pattern {pattern!r}; allowed: {sorted(WALKER_PATTERNS)}", "pattern"
        ) from None
    return build(total, planes, phasing, **kwargs)


# --------------------------------------------------------------------------------------
# Other sources of element sets
# --------------------------------------------------------------------------------------


def from_state_vectors(
    r_km: ArrayLike,
    v_km_s: ArrayLike,
    ids: Sequence[str],
    *,
    mu_km3_s2: float = MU_EARTH_KM3_S2,
) -> ElementSet:
    """Build an element set from inertial positions and velocities.

    Parameters
    ----------
    r_km : array_like, shape (n, 3)
        Positions [km].
    v_km_s : array_like, shape (n, 3)
        Velocities [km/s].
    ids : sequence of str, length n
        Unique satellite names.
    mu_km3_s2 : float, optional
        Gravitational parameter [km^3/s^2].

    Returns
    -------
    ElementSet
        Osculating elements taken as the mean elements at the epoch.

    Notes
    -----
    Uses :func:`~covergrid.orbits.elements.cartesian_to_kepler` (Vallado, Fundamentals
    of Astrodynamics and Applications, 5th ed., Algorithm 9) and its special cases:
    circular orbits get ``argp = 0`` and the argument of latitude as anomaly, equatorial
    ones ``raan = 0`` and the longitude of periapsis as ``argp``, circular equatorial
    ones the true longitude as anomaly, so ``raan + argp + M`` always carries the
    along-track angle. The true anomaly is converted to mean anomaly. Open orbits
    (``e >= 1``) are rejected.
    """
    r = np.asarray(r_km, dtype=np.float64)
    v = np.asarray(v_km_s, dtype=np.float64)
    ids = tuple(ids)
    if r.ndim != 2 or r.shape[1] != 3:
        raise ElementError(f"must have shape (n, 3), got shape {r.shape}", "position_km")
    if v.shape != r.shape:
        raise ElementError(
            f"must have the shape of position_km {r.shape}, got shape {v.shape}",
            "velocity_km_s",
        )
    if len(ids) != r.shape[0]:
        raise ElementError(f"has {len(ids)} names for {r.shape[0]} states", "ids")
    validate_state(r, v, ids=ids)
    k = cartesian_to_kepler(r, v, mu_km3_s2)
    validate_elements(k.a_km, k.e, ids=ids, require_closed=True, min_perigee_km=None)
    return ElementSet(
        a_km=k.a_km,
        e=k.e,
        i_rad=k.i_rad,
        raan_rad=k.raan_rad,
        argp_rad=k.argp_rad,
        M_rad=np.mod(true_to_mean(k.nu_rad, k.e), TWO_PI),
        ids=ids,
    )


def from_keplerian(
    a_km: ArrayLike,
    e: ArrayLike,
    i_rad: ArrayLike,
    raan_rad: ArrayLike,
    argp_rad: ArrayLike,
    *,
    true_anomaly_rad: ArrayLike | None = None,
    mean_anomaly_rad: ArrayLike | None = None,
    ids: Sequence[str],
) -> ElementSet:
    """Build an element set from Keplerian elements with either anomaly.

    Parameters
    ----------
    a_km, e, i_rad, raan_rad, argp_rad : array_like
        Elements, scalars or arrays of length n (broadcast to n) [km, unitless, rad].
    true_anomaly_rad : array_like, optional
        True anomaly [rad]; give exactly one of the two anomalies.
    mean_anomaly_rad : array_like, optional
        Mean anomaly [rad].
    ids : sequence of str, length n
        Unique satellite names.

    Returns
    -------
    ElementSet
        The satellites; a true anomaly is converted to mean anomaly with
        :func:`~covergrid.orbits.elements.true_to_mean`.
    """
    if (true_anomaly_rad is None) == (mean_anomaly_rad is None):
        raise ElementError(
            "give exactly one of true_anomaly_rad and mean_anomaly_rad, got "
            + ("both" if true_anomaly_rad is not None else "neither"),
            "anomaly",
        )
    ids = tuple(ids)
    n = len(ids)
    anomaly = true_anomaly_rad if mean_anomaly_rad is None else mean_anomaly_rad
    names = ("a_km", "e", "i_rad", "raan_rad", "argp_rad", "anomaly_rad")
    cols = []
    for name, val in zip(names, (a_km, e, i_rad, raan_rad, argp_rad, anomaly), strict=True):
        arr = np.asarray(val, dtype=np.float64)
        try:
            cols.append(np.broadcast_to(arr, (n,)).copy())
        except ValueError:
            raise ElementError(
                f"shape {arr.shape} does not fit {n} satellites (scalar or length {n})", name
            ) from None
    a, ecc, inc, raan, argp, anom = cols
    validate_elements(a, ecc, i_rad=inc, raan_rad=raan, argp_rad=argp, anomaly_rad=anom, ids=ids)
    M = anom if mean_anomaly_rad is not None else true_to_mean(anom, ecc)
    return ElementSet(a_km=a, e=ecc, i_rad=inc, raan_rad=raan, argp_rad=argp, M_rad=M, ids=ids)
