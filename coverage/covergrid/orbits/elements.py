"""Classical orbital elements: Kepler <-> Cartesian conversion and element validation.

All functions broadcast over NumPy arrays; Cartesian vectors have the vector axis last,
``(..., 3)``. Lengths are kilometres, times seconds, angles radians. Scalar input gives
NumPy scalars back, array input arrays.

Sign convention for open orbits: the semi-major axis of a hyperbola (``e > 1``) is
negative, so that ``p = a (1 - e**2) > 0`` and the vis-viva energy ``-mu / (2 a)`` is
positive. A parabola (``e == 1``) has no finite semi-major axis; give the semi-latus
rectum ``p_km`` instead.

Vectorised functions never raise per element: an element they cannot convert (``e`` out
of range, a true anomaly beyond a hyperbola's asymptote, a zero position) comes back as
NaN. Raising with a named field is the job of :func:`validate_elements` and
:func:`validate_state`, which callers use where data enters.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike

from covergrid.constants import EARTH_RADIUS_KM, MU_EARTH_KM3_S2
from covergrid.errors import ElementError
from covergrid.orbits.anomalies import wrap_2pi

__all__ = [
    "ECCENTRICITY_TOL",
    "INCLINATION_TOL_RAD",
    "ORBIT_TYPE_MEANINGS",
    "KeplerElements",
    "cartesian_to_kepler",
    "kepler_to_cartesian",
    "validate_elements",
    "validate_state",
]

# Tolerances of the special cases in cartesian_to_kepler. Vallado's RV2COE uses 1e-8 for
# both (as does its port in the sgp4 package, sgp4.ext.rv2coe). We use 1e-11: folding a
# circular orbit (argp -> 0, nu -> argument of latitude) keeps the direction of r but
# changes its length by up to 2 |r| e, and folding an equatorial one (raan -> 0) tilts r out
# of its plane by up to 2 |r| i; for |r| < 50,000 km both stay below one millimetre. 1e-11
# is still four orders of magnitude above the rounding noise of e and i computed from r
# and v (~1e-15).
ECCENTRICITY_TOL = 1e-11  # [unitless] e below this counts as circular
INCLINATION_TOL_RAD = 1e-11  # [rad] i below this (or above pi minus this) counts as equatorial

# orbit_type codes of KeplerElements (integer status codes, NaN elements for -1).
ORBIT_DEGENERATE = -1
ORBIT_NONCIRCULAR_INCLINED = 0
ORBIT_CIRCULAR_INCLINED = 1
ORBIT_NONCIRCULAR_EQUATORIAL = 2
ORBIT_CIRCULAR_EQUATORIAL = 3
ORBIT_TYPE_MEANINGS: dict[int, str] = {
    ORBIT_DEGENERATE: "degenerate: non-finite input, zero position or zero angular momentum",
    ORBIT_NONCIRCULAR_INCLINED: "non-circular inclined (general case)",
    ORBIT_CIRCULAR_INCLINED: "circular inclined: argp = 0, nu = argument of latitude",
    ORBIT_NONCIRCULAR_EQUATORIAL: (
        "non-circular equatorial: raan = 0, argp = longitude of periapsis"
    ),
    ORBIT_CIRCULAR_EQUATORIAL: "circular equatorial: raan = argp = 0, nu = true longitude",
}

def _out(x: np.ndarray) -> np.ndarray:
    """Return a NumPy scalar for 0-d arrays, else the array."""
    return x[()] if x.ndim == 0 else x


def _f64(*xs: ArrayLike) -> list[np.ndarray]:
    return [np.asarray(x, dtype=np.float64) for x in xs]


# --------------------------------------------------------------------------------------
# Kepler <-> Cartesian
# --------------------------------------------------------------------------------------


def kepler_to_cartesian(
    a_km: ArrayLike | None,
    e: ArrayLike,
    i_rad: ArrayLike,
    raan_rad: ArrayLike,
    argp_rad: ArrayLike,
    nu_rad: ArrayLike,
    mu_km3_s2: float = MU_EARTH_KM3_S2,
    *,
    p_km: ArrayLike | None = None,
) -> tuple[np.ndarray, np.ndarray]:
    r"""Convert classical orbital elements to inertial position and velocity.

    Parameters
    ----------
    a_km : array_like or None
        Semi-major axis, ``> 0`` for ellipses and ``< 0`` for hyperbolas [km]. Pass
        ``None`` and give ``p_km`` instead (required for a parabola).
    e : array_like
        Eccentricity [unitless].
    i_rad, raan_rad, argp_rad : array_like
        Inclination, right ascension of the ascending node, argument of periapsis [rad].
    nu_rad : array_like
        True anomaly [rad].
    mu_km3_s2 : float, optional
        Gravitational parameter [km^3/s^2].
    p_km : array_like, optional
        Semi-latus rectum ``a (1 - e**2)`` [km]; exactly one of ``a_km`` and ``p_km``.

    Returns
    -------
    r_km : ndarray, shape (..., 3)
        Position in the frame of the elements [km].
    v_km_s : ndarray, shape (..., 3)
        Velocity [km/s].
        Both are NaN where ``p <= 0`` (e.g. the sign convention of ``a`` is violated),
        ``e < 0``, or the true anomaly is beyond a hyperbola's asymptote.

    Notes
    -----
    COE2RV, Vallado, Fundamentals of Astrodynamics and Applications, 5th ed.,
    Algorithm 10: perifocal position and velocity (Eqs. 2-110, 2-111)

    .. math::
        r_{PQW} = \frac{p}{1 + e\cos\nu} (\cos\nu, \sin\nu, 0), \quad
        v_{PQW} = \sqrt{\mu/p}\,(-\sin\nu, e + \cos\nu, 0)

    rotated by :math:`R_3(-\Omega) R_1(-i) R_3(-\omega)`.
    """
    if (a_km is None) == (p_km is None):
        raise ElementError(
            "give exactly one of a_km and p_km (a parabola needs p_km)", field="a_km"
        )
    if a_km is not None:
        a, e_, i, raan, argp, nu = _f64(a_km, e, i_rad, raan_rad, argp_rad, nu_rad)
        p = a * (1.0 - e_ * e_)
    else:
        assert p_km is not None  # guaranteed by the check above; narrows the type
        p, e_, i, raan, argp, nu = _f64(p_km, e, i_rad, raan_rad, argp_rad, nu_rad)
    cnu, snu = np.cos(nu), np.sin(nu)
    denom = 1.0 + e_ * cnu
    ok = (p > 0.0) & (e_ >= 0.0) & (denom > 0.0)
    with np.errstate(invalid="ignore", divide="ignore"):
        r = np.where(ok, p / denom, np.nan)
        vs = np.where(ok, np.sqrt(mu_km3_s2 / p), np.nan)
    # perifocal components
    xp, yp = r * cnu, r * snu
    vxp, vyp = -vs * snu, vs * (e_ + cnu)
    # rotation matrix columns P and Q (Vallado Eq. 2-112, written out)
    cO, sO = np.cos(raan), np.sin(raan)
    cw, sw = np.cos(argp), np.sin(argp)
    ci, si = np.cos(i), np.sin(i)
    P = np.stack([cO * cw - sO * sw * ci, sO * cw + cO * sw * ci, sw * si], axis=-1)
    Q = np.stack([-cO * sw - sO * cw * ci, -sO * sw + cO * cw * ci, cw * si], axis=-1)
    r_vec = xp[..., None] * P + yp[..., None] * Q
    v_vec = vxp[..., None] * P + vyp[..., None] * Q
    return r_vec, v_vec


@dataclass(frozen=True)
class KeplerElements:
    """Classical orbital elements from :func:`cartesian_to_kepler` (arrays of one shape).

    Attributes
    ----------
    p_km : ndarray
        Semi-latus rectum [km].
    a_km : ndarray
        Semi-major axis; negative for hyperbolas, infinite for a parabola [km].
    e : ndarray
        Eccentricity [unitless].
    i_rad : ndarray
        Inclination in ``[0, pi]`` [rad].
    raan_rad : ndarray
        Right ascension of the ascending node in ``[0, 2 pi)``; 0 for equatorial orbits [rad].
    argp_rad : ndarray
        Argument of periapsis in ``[0, 2 pi)``; 0 for circular orbits, the longitude of
        periapsis for non-circular equatorial ones [rad].
    nu_rad : ndarray
        True anomaly in ``[0, 2 pi)``; the argument of latitude for circular inclined
        orbits and the true longitude for circular equatorial ones [rad].
    arglat_rad : ndarray
        Argument of latitude (node to position) where the orbit is inclined, else NaN [rad].
    lonper_rad : ndarray
        True longitude of periapsis where the orbit is non-circular equatorial, else NaN
        [rad].
    truelon_rad : ndarray
        True longitude (x axis to position) where the orbit is circular equatorial, else
        NaN [rad].
    orbit_type : ndarray of int8
        Codes of :data:`ORBIT_TYPE_MEANINGS`; -1 marks rows whose elements are all NaN.
    """

    p_km: np.ndarray
    a_km: np.ndarray
    e: np.ndarray
    i_rad: np.ndarray
    raan_rad: np.ndarray
    argp_rad: np.ndarray
    nu_rad: np.ndarray
    arglat_rad: np.ndarray
    lonper_rad: np.ndarray
    truelon_rad: np.ndarray
    orbit_type: np.ndarray


def _dot(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    return np.einsum("...i,...i->...", a, b)


def _angle_about(a: np.ndarray, b: np.ndarray, axis: np.ndarray) -> np.ndarray:
    """Angle from ``a`` to ``b`` measured positively about ``axis``, in [0, 2 pi)."""
    return wrap_2pi(np.arctan2(_dot(np.cross(a, b), axis), _dot(a, b)))


def cartesian_to_kepler(
    r_km: ArrayLike,
    v_km_s: ArrayLike,
    mu_km3_s2: float = MU_EARTH_KM3_S2,
    *,
    ecc_tol: float = ECCENTRICITY_TOL,
    inc_tol_rad: float = INCLINATION_TOL_RAD,
) -> KeplerElements:
    r"""Convert inertial position and velocity to classical orbital elements.

    Parameters
    ----------
    r_km : array_like, shape (..., 3)
        Position [km].
    v_km_s : array_like, shape (..., 3)
        Velocity [km/s].
    mu_km3_s2 : float, optional
        Gravitational parameter [km^3/s^2].
    ecc_tol : float, optional
        Eccentricity below which the orbit is treated as circular [unitless].
    inc_tol_rad : float, optional
        Inclination below which (or above ``pi - inc_tol_rad``) the orbit is treated as
        equatorial [rad].

    Returns
    -------
    KeplerElements
        Elements with shape ``r_km.shape[:-1]``.

    Notes
    -----
    RV2COE, Vallado, Fundamentals of Astrodynamics and Applications, 5th ed.,
    Algorithm 9: :math:`h = r \times v`, :math:`n = \hat K \times h`,

    .. math::
        \mathbf e = \frac{(v^2 - \mu/r)\,\mathbf r - (\mathbf r\cdot\mathbf v)\,\mathbf v}{\mu},
        \quad \xi = \frac{v^2}{2} - \frac{\mu}{r}, \quad a = -\frac{\mu}{2\xi},
        \quad p = \frac{h^2}{\mu}

    Special cases as in Algorithm 9: circular inclined (``e < ecc_tol``): ``argp = 0`` and
    ``nu`` = argument of latitude; non-circular equatorial (``i < inc_tol_rad`` or
    ``i > pi - inc_tol_rad``): ``raan = 0`` and ``argp`` = true longitude of periapsis;
    circular equatorial: ``raan = argp = 0`` and ``nu`` = true longitude. For retrograde
    equatorial orbits the longitudes are measured clockwise (``2 pi`` minus the angle from
    the x axis), as in Algorithm 9, so that :func:`kepler_to_cartesian` with ``raan = 0``
    gives the same state back.

    Departures: angles come from ``atan2`` of a sine and cosine (the sign tests of
    Algorithm 9 are folded into the sine's sign) for accuracy near 0 and pi, and the
    default tolerances are 1e-11 rather than 1e-8 (see :data:`ECCENTRICITY_TOL`).
    """
    r = np.asarray(r_km, dtype=np.float64)
    v = np.asarray(v_km_s, dtype=np.float64)
    r, v = np.broadcast_arrays(r, v)
    if r.shape[-1:] != (3,):
        raise ElementError(f"must have a last axis of length 3, got shape {r.shape}", "r_km")
    with np.errstate(invalid="ignore", divide="ignore", over="ignore"):
        rmag = np.linalg.norm(r, axis=-1)
        v2 = _dot(v, v)
        rv = _dot(r, v)
        h = np.cross(r, v)
        hmag = np.linalg.norm(h, axis=-1)
        h_hat = h / hmag[..., None]
        zeros = np.zeros_like(hmag)
        n = np.stack([-h[..., 1], h[..., 0], zeros], axis=-1)  # K x h
        nmag = np.linalg.norm(n, axis=-1)
        e_vec = ((v2 - mu_km3_s2 / rmag)[..., None] * r - rv[..., None] * v) / mu_km3_s2
        e = np.linalg.norm(e_vec, axis=-1)
        xi = 0.5 * v2 - mu_km3_s2 / rmag
        a = -mu_km3_s2 / (2.0 * xi)
        p = hmag * hmag / mu_km3_s2
        i = np.arctan2(np.hypot(h[..., 0], h[..., 1]), h[..., 2])

        raan = wrap_2pi(np.arctan2(n[..., 1], n[..., 0]))
        argp = _angle_about(n, e_vec, h_hat)
        nu = _angle_about(e_vec, r, h_hat)
        arglat = _angle_about(n, r, h_hat)
        retro = i > 0.5 * np.pi
        lonper = wrap_2pi(np.arctan2(e_vec[..., 1], e_vec[..., 0]))
        lonper = np.where(retro, wrap_2pi(-lonper), lonper)
        truelon = wrap_2pi(np.arctan2(r[..., 1], r[..., 0]))
        truelon = np.where(retro, wrap_2pi(-truelon), truelon)

    degenerate = ~(np.isfinite(rmag) & np.isfinite(v2) & (rmag > 0.0) & (hmag > 0.0))
    degenerate |= ~np.isfinite(e)
    circular = e < ecc_tol
    equatorial = (i < inc_tol_rad) | (i > np.pi - inc_tol_rad) | (nmag == 0.0)

    ci = circular & ~equatorial
    ne = ~circular & equatorial
    ce = circular & equatorial
    argp = np.where(circular, 0.0, np.where(ne, lonper, argp))
    raan = np.where(equatorial, 0.0, raan)
    nu = np.where(ci, arglat, np.where(ce, truelon, nu))
    arglat = np.where(equatorial, np.nan, arglat)
    lonper = np.where(ne, lonper, np.nan)
    truelon = np.where(ce, truelon, np.nan)

    otype = np.full(rmag.shape, ORBIT_NONCIRCULAR_INCLINED, dtype=np.int8)
    otype[ci] = ORBIT_CIRCULAR_INCLINED
    otype[ne] = ORBIT_NONCIRCULAR_EQUATORIAL
    otype[ce] = ORBIT_CIRCULAR_EQUATORIAL
    otype[degenerate] = ORBIT_DEGENERATE

    names = ("p_km", "a_km", "e", "i_rad", "raan_rad", "argp_rad", "nu_rad", "arglat_rad")
    values = (p, a, e, i, raan, argp, nu, arglat)
    out = {k: _out(np.where(degenerate, np.nan, f)) for k, f in zip(names, values, strict=True)}
    return KeplerElements(
        **out,
        lonper_rad=_out(np.where(degenerate, np.nan, lonper)),
        truelon_rad=_out(np.where(degenerate, np.nan, truelon)),
        orbit_type=_out(otype),
    )


# --------------------------------------------------------------------------------------
# Validation (raises; used where data enters)
# --------------------------------------------------------------------------------------


def _where_text(bad: np.ndarray, values: np.ndarray, ids: Sequence[str] | None) -> str:
    """Describe the first few offending elements of a flat boolean mask."""
    idx = np.flatnonzero(bad)
    parts = []
    for j in idx[:3]:
        who = f"satellite {ids[j]!r}" if ids is not None and j < len(ids) else f"index {j}"
        parts.append(f"{float(values.flat[j])!r} at {who}")
    more = f" and {idx.size - 3} more" if idx.size > 3 else ""
    return ", ".join(parts) + more


def validate_elements(
    a_km: ArrayLike,
    e: ArrayLike,
    *,
    i_rad: ArrayLike | None = None,
    raan_rad: ArrayLike | None = None,
    argp_rad: ArrayLike | None = None,
    anomaly_rad: ArrayLike | None = None,
    ids: Sequence[str] | None = None,
    field_prefix: str = "",
    require_closed: bool = True,
    min_perigee_km: float | None = EARTH_RADIUS_KM,
) -> None:
    """Check orbital elements and raise one error describing every problem found.

    Parameters
    ----------
    a_km : array_like
        Semi-major axis [km]; ``> 0`` for ``e < 1``, ``< 0`` for ``e > 1``.
    e : array_like
        Eccentricity, ``>= 0``; ``< 1`` when ``require_closed`` [unitless].
    i_rad, raan_rad, argp_rad, anomaly_rad : array_like, optional
        Angles, checked for being finite, the inclination also for lying in
        ``[0, pi]`` [rad].
    ids : sequence of str, optional
        Satellite names, used in the message instead of indices.
    field_prefix : str, optional
        Prefix of the field names in the message (e.g. ``"constellation.0."``).
    require_closed : bool, optional
        Whether open orbits (``e >= 1``) are errors.
    min_perigee_km : float or None, optional
        Smallest allowed perigee radius ``a (1 - e)`` [km]; ``None`` skips the check.
        Defaults to the Earth's equatorial radius.

    Raises
    ------
    ElementError
        Naming the first offending field (``semi_major_axis_km``, ``eccentricity``,
        ``inclination_rad``, ``raan_rad``, ``argument_of_perigee_rad``, ``anomaly_rad``),
        the value and what is allowed; further problems are appended to the message.
    """
    a, e_ = _f64(a_km, e)
    problems: list[tuple[str, str]] = []

    def check(name: str, bad: np.ndarray, values: np.ndarray, allowed: str) -> None:
        bad = np.broadcast_to(bad, a.shape)
        if np.any(bad):
            vals = np.broadcast_to(values, a.shape)
            problems.append(
                (field_prefix + name, f"must be {allowed}, got {_where_text(bad, vals, ids)}")
            )

    check("semi_major_axis_km", ~np.isfinite(a), a, "finite")
    check("eccentricity", ~np.isfinite(e_), e_, "finite")
    for name, val in (
        ("inclination_rad", i_rad),
        ("raan_rad", raan_rad),
        ("argument_of_perigee_rad", argp_rad),
        ("anomaly_rad", anomaly_rad),
    ):
        if val is not None:
            arr = np.asarray(val, dtype=np.float64)
            check(name, ~np.isfinite(arr), arr, "finite")
    if i_rad is not None:
        inc = np.asarray(i_rad, dtype=np.float64)
        check("inclination_rad", (inc < 0.0) | (inc > np.pi), inc, "in [0, pi]")
    fin = np.isfinite(a) & np.isfinite(e_)
    check("eccentricity", fin & (e_ < 0.0), e_, ">= 0")
    if require_closed:
        check("eccentricity", fin & (e_ >= 1.0), e_, "< 1 (a closed orbit is required)")
    else:
        check("eccentricity", fin & (e_ == 1.0), e_, "!= 1 (a parabola has no finite a)")
        check("semi_major_axis_km", fin & (e_ > 1.0) & (a >= 0.0), a, "< 0 for e > 1")
    check("semi_major_axis_km", fin & (e_ >= 0.0) & (e_ < 1.0) & (a <= 0.0), a, "> 0 for e < 1")
    if min_perigee_km is not None:
        rp = a * (1.0 - e_)
        shape_ok = fin & (e_ >= 0.0) & (e_ != 1.0) & (rp > 0.0)
        low = shape_ok & (rp < min_perigee_km)
        if np.any(low):
            j = int(np.flatnonzero(low)[0])
            who = f"satellite {ids[j]!r}" if ids is not None and j < len(ids) else f"index {j}"
            problems.append(
                (
                    field_prefix + "semi_major_axis_km",
                    f"perigee radius a(1 - e) = {rp.flat[j]:.3f} km (a = {float(a.flat[j])!r} km, "
                    f"e = {float(e_.flat[j])!r}) at {who} must be >= {min_perigee_km:.3f} km "
                    f"(the perigee is below the Earth's surface)"
                    + (f"; {int(low.sum()) - 1} more such" if low.sum() > 1 else ""),
                )
            )
    if problems:
        field, text = problems[0]
        if len(problems) > 1:
            text += " (also " + "; ".join(f"{f}: {t}" for f, t in problems[1:]) + ")"
        raise ElementError(text, field=field)


def validate_state(
    r_km: ArrayLike,
    v_km_s: ArrayLike,
    *,
    ids: Sequence[str] | None = None,
    field_prefix: str = "",
) -> None:
    """Check Cartesian states and raise one error describing every problem found.

    Parameters
    ----------
    r_km : array_like, shape (..., 3)
        Position [km]; finite and non-zero.
    v_km_s : array_like, shape (..., 3)
        Velocity [km/s]; finite and not parallel to the position.
    ids : sequence of str, optional
        Satellite names, used in the message instead of indices.
    field_prefix : str, optional
        Prefix of the field names in the message.

    Raises
    ------
    ElementError
        Naming ``position_km`` or ``velocity_km_s``, the value and what is allowed.
    """
    r = np.asarray(r_km, dtype=np.float64)
    v = np.asarray(v_km_s, dtype=np.float64)
    for name, x in (("position_km", r), ("velocity_km_s", v)):
        if x.shape[-1:] != (3,):
            raise ElementError(
                f"must have shape (..., 3), got shape {x.shape}", field=field_prefix + name
            )
    try:
        r, v = np.broadcast_arrays(r, v)
    except ValueError:
        raise ElementError(
            f"shape {v.shape} does not match position shape {r.shape}",
            field=field_prefix + "velocity_km_s",
        ) from None
    rows_r = r.reshape(-1, 3)
    rows_v = v.reshape(-1, 3)
    problems: list[tuple[str, str]] = []

    def rows_text(bad: np.ndarray, rows: np.ndarray) -> str:
        idx = np.flatnonzero(bad)
        parts = []
        for j in idx[:3]:
            who = f"satellite {ids[j]!r}" if ids is not None and j < len(ids) else f"index {j}"
            parts.append(f"{rows[j].tolist()} at {who}")
        return ", ".join(parts) + (f" and {idx.size - 3} more" if idx.size > 3 else "")

    bad_r = ~np.all(np.isfinite(rows_r), axis=-1)
    bad_v = ~np.all(np.isfinite(rows_v), axis=-1)
    if bad_r.any():
        problems.append(("position_km", f"must be finite, got {rows_text(bad_r, rows_r)}"))
    if bad_v.any():
        problems.append(("velocity_km_s", f"must be finite, got {rows_text(bad_v, rows_v)}"))
    ok = ~bad_r & ~bad_v
    zero_r = ok & (np.linalg.norm(rows_r, axis=-1) == 0.0)
    if zero_r.any():
        problems.append(("position_km", f"must be non-zero, got {rows_text(zero_r, rows_r)}"))
    hmag = np.linalg.norm(np.cross(rows_r, rows_v), axis=-1)
    scale = np.linalg.norm(rows_r, axis=-1) * np.linalg.norm(rows_v, axis=-1)
    straight = ok & ~zero_r & (hmag <= 1e-12 * scale)
    if straight.any():
        problems.append(
            (
                "velocity_km_s",
                "must not be parallel to the position (zero angular momentum), got "
                + rows_text(straight, rows_v),
            )
        )
    if problems:
        field, text = problems[0]
        if len(problems) > 1:
            text += " (also " + "; ".join(f"{field_prefix}{f}: {t}" for f, t in problems[1:])
            text += ")"
        raise ElementError(text, field=field_prefix + field)
