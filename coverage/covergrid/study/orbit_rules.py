"""The rules of an orbit's size and inclination as a study file states them.

Shared by the study sections (:mod:`covergrid.study.sections`), the whole-study rules
(:mod:`covergrid.study.models`) and the translation into elements
(:mod:`covergrid.study.build`): the semi-major axis from either size key, the perigee above
the surface and the apogee inside the sphere of influence, the sun-synchronous inclination
(secular J2) and the two-body size of a state vector.
"""

from __future__ import annotations

import math
from typing import Any

from covergrid.constants import EARTH_SOI_RADIUS_KM, MU_EARTH_KM3_S2, WGS84_A_KM
from covergrid.study.messages import Problems

__all__ = [
    "SUN_SYNCHRONOUS",
    "SUN_SYNCHRONOUS_MAX_A_KM",
    "inclination_value_deg",
    "km_text",
    "orbit_size_problems",
    "semi_major_axis_km",
    "sun_synchronous_inclination_deg",
    "two_body",
]

#: The value of ``inclination_deg`` that asks for the sun-synchronous inclination.
SUN_SYNCHRONOUS = "sun-synchronous"


def km_text(x: float) -> str:
    """A length for a message [km]: plain below a billion, else in powers of ten."""
    return f"{x:,.1f}" if abs(x) < 1e9 else f"{x:.3e}"


def semi_major_axis_km(altitude_km: float | None, a_km: float | None) -> float:
    """The semi-major axis of an orbit given by either size key (``altitude_km`` above the
    WGS 84 equatorial radius, or ``semi_major_axis_km`` as ``a_km``) [km]; the model
    validators have made sure one of them is given."""
    if a_km is not None:
        return a_km
    return WGS84_A_KM + float(altitude_km)  # type: ignore[arg-type]


def inclination_value_deg(inclination: float | str, a_km: float, e: float) -> float:
    """The inclination [deg]: as given, or the sun-synchronous one for ``sun-synchronous``
    (:func:`sun_synchronous_inclination_deg`, secular J2)."""
    if isinstance(inclination, str):
        return sun_synchronous_inclination_deg(a_km, e)
    return float(inclination)


def orbit_size_problems(alt_km, a_km, e, *, size_key: str | None = None
                        ) -> list[tuple[tuple, str, Any]]:
    """Exactly one of altitude/semi-major axis, the perigee above the surface and the
    apogee inside the Earth's sphere of influence (``constants.EARTH_SOI_RADIUS_KM``).

    ``size_key`` names the size in the messages when it is not the study key of the
    value given (a sweep's ``altitude_km[2]``).
    """
    if (alt_km is None) == (a_km is None):
        both = alt_km is not None
        return [
            (
                ("altitude_km",),
                "give exactly one of altitude_km or semi_major_axis_km"
                + ("; both were given" if both else "; neither was given"),
                None,
            )
        ]
    a = a_km if a_km is not None else WGS84_A_KM + alt_km
    key = size_key or ("semi_major_axis_km" if a_km is not None else "altitude_km")
    size = a_km if a_km is not None else alt_km
    perigee_alt_km = a * (1.0 - e) - WGS84_A_KM
    if perigee_alt_km <= 0.0:
        where = "eccentricity" if e > 0 and size_key is None else key
        return [
            (
                (where,),
                f"perigee altitude a(1-e) - R_E = {km_text(perigee_alt_km)} km is below the "
                f"surface (a = {km_text(a)} km, e = {e:g}); allowed: a(1-e) > {WGS84_A_KM} km",
                e if where == "eccentricity" else size,
            )
        ]
    apogee_km = a * (1.0 + e)
    if not apogee_km < EARTH_SOI_RADIUS_KM:
        where = "eccentricity" if a < EARTH_SOI_RADIUS_KM and size_key is None else key
        return [
            (
                (where,),
                f"apogee radius a(1+e) = {km_text(apogee_km)} km is beyond the Earth's sphere of "
                f"influence (a = {km_text(a)} km, e = {e:g}); allowed: a(1+e) < "
                f"{EARTH_SOI_RADIUS_KM:,.0f} km",
                e if where == "eccentricity" else size,
            )
        ]
    return []


def sun_synchronous_inclination_deg(a_km: float, e: float, key: tuple = ("inclination_deg",)
                                    ) -> float:
    """The sun-synchronous inclination of an orbit [deg] (secular J2, one node turn per
    tropical year: :func:`covergrid.orbits.special.sun_synchronous_inclination`).

    Raises
    ------
    Problems
        At ``key`` when no inclination makes the orbit sun-synchronous (too high), with the
        highest circular altitude that can be.
    """
    from covergrid.errors import ElementError
    from covergrid.orbits.special import sun_synchronous_inclination

    try:
        return math.degrees(float(sun_synchronous_inclination(a_km, e)))
    except ElementError:
        raise Problems([(key, f"no inclination makes this orbit sun-synchronous (a = "
                         f"{km_text(a_km)} km, e = {e:g}): secular J2 turns its node less than "
                         "360 deg a year at any inclination; allowed: sun-synchronous orbits "
                         f"with a(1 - e^2)^(4/7) below {SUN_SYNCHRONOUS_MAX_A_KM:,.0f} km "
                         f"(circular orbits below {SUN_SYNCHRONOUS_MAX_A_KM - WGS84_A_KM:,.0f} "
                         "km altitude)",
                         SUN_SYNCHRONOUS)]) from None


def _sun_synchronous_max_a_km() -> float:
    """Largest circular semi-major axis with a sun-synchronous inclination (i = 180 deg):
    where the secular J2 node rate at cos i = -1 equals the Sun's mean motion [km].

    The node rate is proportional to a^(-7/2) (1 - e^2)^(-2), hence the a(1 - e^2)^(4/7)
    of the message above.
    """
    from covergrid.constants import EARTH_RADIUS_KM, J2, SECONDS_PER_DAY, TROPICAL_YEAR_DAYS

    sun_rate = 2.0 * math.pi / (TROPICAL_YEAR_DAYS * SECONDS_PER_DAY)
    # 1.5 J2 R^2 sqrt(mu) a^(-7/2) = sun_rate  (Vallado 4th ed. eq. 9-41 at e = 0, cos i = 1)
    return (1.5 * J2 * EARTH_RADIUS_KM**2 * math.sqrt(MU_EARTH_KM3_S2) / sun_rate) ** (2.0 / 7.0)


#: Largest circular semi-major axis that can be sun-synchronous [km] (12,352 km).
SUN_SYNCHRONOUS_MAX_A_KM = _sun_synchronous_max_a_km()


def two_body(position_km, velocity_km_s) -> tuple[float, float, float, float, float, float]:
    """|r| [km], |v|^2 [km^2/s^2], specific energy [km^2/s^2], a [km], e, |h|^2 of a state
    vector (vis-viva and the angular momentum; Vallado 5th ed., Algorithm 9)."""
    r = [float(x) for x in position_km]
    v = [float(x) for x in velocity_km_s]
    r_km = math.sqrt(sum(x * x for x in r))
    v2 = sum(x * x for x in v)
    energy = v2 / 2.0 - MU_EARTH_KM3_S2 / r_km
    h = (r[1] * v[2] - r[2] * v[1], r[2] * v[0] - r[0] * v[2], r[0] * v[1] - r[1] * v[0])
    h2 = sum(x * x for x in h)
    if energy >= 0.0 or r_km == 0.0:
        return r_km, v2, energy, math.inf, 1.0, h2
    a_km = -MU_EARTH_KM3_S2 / (2.0 * energy)
    e = math.sqrt(max(0.0, 1.0 - h2 / (MU_EARTH_KM3_S2 * a_km)))
    return r_km, v2, energy, a_km, e, h2
