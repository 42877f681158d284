"""Sun-synchronous templates: ``inclination_deg: sun-synchronous`` and ``ltan_h``, from the
study file to the element set, sweeps and sizing."""

from __future__ import annotations

import math

import numpy as np
import pytest

from covergrid.constants import DEG, SECONDS_PER_DAY, TROPICAL_YEAR_DAYS, WGS84_A_KM
from covergrid.earth.sun import mean_sun_right_ascension_rad
from covergrid.earth.time import gmst_rad
from covergrid.errors import ElementError
from covergrid.orbits import j2
from covergrid.orbits.special import sun_synchronous_inclination
from covergrid.study import parse_study as _parse_data
from covergrid.study import resolve
from covergrid.study.build import trade_orbits
from covergrid.study.loading import parse_yaml
from covergrid.trade.space import sweep_designs

# Tolerances (named, with their reasons).
# A value printed to 0.1 deg: half a unit in the last place.
HALF_DECIDEGREE = 0.05
# A value printed to whole degrees: half a unit.
HALF_DEGREE = 0.5
# A limit printed to whole kilometres.
HALF_KM = 0.5
# Local times compared in hours: rounding only (angles of a few radians in float64).
ROUNDING_H = 1e-9
# The node keeps its local time over a year to within the mismatch between the tropical
# year of the sun-synchronous rate (365.2421897 d) and the mean Sun's rate of the IAU 1982
# sidereal polynomial (0.9856473662 deg/day): 4e-8 deg/day, 1.5e-5 deg a year, 1e-6 h.
ONE_YEAR_DRIFT_H = 1e-5

SSO_STUDY = """\
study: sso-trial
epoch: 2031-03-20T06:00:00Z
duration_h: 6
step_s: 60
constellation:
  - walker: {pattern: star, total: 6, planes: 3, phasing: 1}
    template: {altitude_km: 620, inclination_deg: sun-synchronous, ltan_h: 10.5}
grid: {resolution_deg: 10}
"""


def parse_study(text: str):
    """A study from YAML text."""
    return _parse_data(parse_yaml(text))


def _ut_hours(epoch) -> float:
    return float((epoch - epoch.astype("datetime64[D]")) / np.timedelta64(1, "s")) / 3600.0


def test_published_sun_synchronous_inclinations_from_a_study():
    # MathWorks Cody problem 45800 ("SatCom #6: Inclination of a Sun-Synchronous Orbit"),
    # seen: CloudSat, apogee 710 km and perigee 709 km above a 6371 km Earth, "approximately
    # 98.2 degrees". Wikipedia, "Sun-synchronous orbit", seen: a = 6554 km needs i = 96 deg.
    a = 6371.0 + 709.5
    e = 0.5 / a
    study = parse_study(SSO_STUDY.replace(
        "grid:", "  - satellites:\n"
        f"      - {{id: cloud, semi_major_axis_km: {a}, eccentricity: {e}, inclination_deg: "
        "sun-synchronous, mean_anomaly_deg: 0}\n"
        "      - {id: low, semi_major_axis_km: 6554, inclination_deg: sun-synchronous, "
        "mean_anomaly_deg: 0}\ngrid:"))
    r = resolve(study)
    i_deg = np.rad2deg(r.elements.i_rad)
    assert i_deg[6] == pytest.approx(98.2, abs=HALF_DECIDEGREE)
    assert i_deg[7] == pytest.approx(96.0, abs=HALF_DEGREE)
    # the template's planes take the inclination of the library function (secular J2)
    assert np.allclose(r.elements.i_rad[:6], sun_synchronous_inclination(WGS84_A_KM + 620.0))
    paths = [d.path for d in r.derived]
    assert paths == ["constellation[0].template.inclination_deg",
                     "constellation[0].template.raan_deg",
                     "constellation[1].satellites[0].inclination_deg",
                     "constellation[1].satellites[1].inclination_deg"]


def test_highest_sun_synchronous_orbit_is_refused_with_the_published_limit():
    # Wikipedia, "Sun-synchronous orbit", seen: only orbits with a below 12,352 km can be
    # sun-synchronous (circular; i = 180 deg at the limit).
    from covergrid.study.orbit_rules import SUN_SYNCHRONOUS_MAX_A_KM

    assert SUN_SYNCHRONOUS_MAX_A_KM == pytest.approx(12352.0, abs=HALF_KM)
    assert sun_synchronous_inclination(12351.0) > 178.0 * DEG  # cos i = -1 + 3e-4
    with pytest.raises(ElementError):
        sun_synchronous_inclination(12353.0)
    with pytest.raises(ValueError, match=r"inclination_deg: no inclination makes this orbit "
                       r"sun-synchronous.*below 12,352 km.*5,974 km altitude"):
        parse_study(SSO_STUDY.replace("altitude_km: 620", "altitude_km: 6000"))


def test_ltan_puts_the_first_plane_node_at_that_local_mean_time():
    # Local mean solar time at a meridian = UT + east longitude / 15 deg/h (common practice;
    # UT1 taken as UTC). Satellite 0 (mean anomaly 0, circular, argument of perigee 0) sits on
    # its ascending node at the epoch: its Earth-fixed longitude there is the node's.
    r = resolve(parse_study(SSO_STUDY))
    theta0 = float(gmst_rad(r.epoch))
    pos = j2.propagate_to_ecef(r.elements, np.array([0.0]), theta0)
    lon = math.atan2(pos[0, 0, 1], pos[0, 0, 0])
    assert abs(pos[0, 0, 2]) < 1e-6  # on the equator
    lmst = _ut_hours(r.epoch) + math.degrees(lon) / 15.0
    assert (lmst - 10.5 + 12.0) % 24.0 - 12.0 == pytest.approx(0.0, abs=ROUNDING_H)
    # star 6/3/1: planes 60 deg apart in RAAN, so 4 h apart in local time
    raan = r.elements.raan_rad[::2]
    np.testing.assert_allclose(np.diff(np.rad2deg(raan)) % 360.0, 60.0, atol=1e-9)


def test_the_node_keeps_its_local_time_for_a_year():
    r = resolve(parse_study(SSO_STUDY))
    el = r.elements
    raan_dot, _, _ = j2.secular_rates(el.a_km[0], el.e[0], el.i_rad[0])
    assert raan_dot == pytest.approx(2 * math.pi / (TROPICAL_YEAR_DAYS * SECONDS_PER_DAY),
                                     rel=1e-12)
    for t_s in (0.0, 86400.0 * 91.0, 86400.0 * 365.0):
        node = el.raan_rad[0] + raan_dot * t_s
        sun = float(mean_sun_right_ascension_rad(r.epoch, t_s))
        ltan = 12.0 + math.degrees(node - sun) / 15.0
        assert (ltan - 10.5 + 12.0) % 24.0 - 12.0 == pytest.approx(0.0, abs=ONE_YEAR_DRIFT_H)


def test_sweep_and_sizing_derive_the_inclination_at_each_altitude():
    sweep = SSO_STUDY + "sweep: {altitude_km: [500, 700], total: [6, 12]}\n"
    r = resolve(parse_study(sweep))
    designs = sweep_designs(r)
    for d in designs:
        assert d.inclination_deg == pytest.approx(
            math.degrees(sun_synchronous_inclination(WGS84_A_KM + d.altitude_km)), abs=1e-12)
        assert d.raan_deg == pytest.approx(r.walker.raan_deg)  # the LTAN's RAAN for all
    assert len({d.inclination_deg for d in designs}) == 2
    # an inclination axis overrides the template's derivation
    listed = resolve(parse_study(SSO_STUDY + "sweep: {altitude_km: [500, 700], "
                                 "inclination_deg: 97}\n"))
    assert {d.inclination_deg for d in sweep_designs(listed)} == {97.0}
    sizing = resolve(parse_study(SSO_STUDY.replace("template: {altitude_km: 620, inclination_"
                                                   "deg: sun-synchronous, ltan_h: 10.5}",
                                                   "template: {altitude_km: 620, "
                                                   "inclination_deg: 60}")
                                 + "requirement: {metric: max_gap, at_most: 3600}\n"
                                 "sizing: {altitude_km: [550, 650], inclination_deg: "
                                 "sun-synchronous, total: {min: 3, max: 6}}\n"))
    pairs = trade_orbits(sizing, "sizing")
    assert [a for a, _ in pairs] == [550.0, 650.0]
    for alt, inc in pairs:
        assert inc == pytest.approx(math.degrees(sun_synchronous_inclination(WGS84_A_KM + alt)))


@pytest.mark.parametrize(("change", "path", "fragment"), [
    (("ltan_h: 10.5", "ltan_h: 24"), "constellation[0].template.ltan_h", "< 24"),
    (("ltan_h: 10.5", "ltan_h: 10.5, raan_deg: 30"), "constellation[0].template.ltan_h",
     "give either raan_deg or ltan_h"),
    (("inclination_deg: sun-synchronous", "inclination_deg: sun-sync"),
     "constellation[0].template.inclination_deg", "did you mean 'sun-synchronous'"),
    (("grid:", "sweep: {altitude_km: [600, 6100]}\ngrid:"), "sweep.altitude_km[1]",
     "no inclination makes this orbit sun-synchronous"),
])
def test_bad_sun_synchronous_values_name_their_key(change, path, fragment):
    with pytest.raises(ValueError) as info:
        parse_study(SSO_STUDY.replace(*change))
    text = str(info.value)
    assert path in text and fragment in text, text


# Circular sun-synchronous inclinations by altitude above the equatorial radius, as commonly
# tabulated in mission-design texts (common practice; recalled from memory to 0.01 deg, so
# the tolerance is half a unit of that rounding plus the spread between texts' J2 and Earth
# radius, about 0.01 deg).
RECALLED_SSO_DEG = [(500.0, 97.40), (600.0, 97.79), (700.0, 98.19), (800.0, 98.60),
                    (1000.0, 99.48)]
RECALLED_TOL_DEG = 0.015


@pytest.mark.parametrize(("altitude_km", "incl_deg"), RECALLED_SSO_DEG)
def test_recalled_sun_synchronous_inclinations_by_altitude(altitude_km, incl_deg):
    got = math.degrees(sun_synchronous_inclination(WGS84_A_KM + altitude_km))
    assert abs(got - incl_deg) < RECALLED_TOL_DEG
