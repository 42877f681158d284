"""Tests of covergrid.orbits.walker: the ElementSet container and Walker patterns."""

from __future__ import annotations

import math

import numpy as np
import pytest

from covergrid.constants import EARTH_RADIUS_KM, MU_EARTH_KM3_S2
from covergrid.errors import ElementError
from covergrid.orbits.anomalies import mean_to_true, true_to_mean
from covergrid.orbits.element_set import ElementSet
from covergrid.orbits.elements import kepler_to_cartesian
from covergrid.orbits.walker import (
    from_keplerian,
    from_state_vectors,
    walker,
    walker_delta,
    walker_star,
)

DEG = math.pi / 180.0
TWO_PI = 2 * math.pi
A_KM = EARTH_RADIUS_KM + 1200.0
ONE_MILLIMETRE_KM = 1e-6
# Angles built from a few additions of 2 pi k / S: rounding of a few ulps of 2 pi.
ANGLE_ROUNDING_RAD = 1e-13


def _wrapped_diff(a, b):
    """Smallest signed difference a - b of angles, in (-pi, pi]."""
    return (np.asarray(a) - np.asarray(b) + np.pi) % TWO_PI - np.pi


# --------------------------------------------------------------------------------------
# Walker delta and star
# --------------------------------------------------------------------------------------


def test_walker_delta_15_3_1_spacing_and_phasing():
    # Walker's T/P/F rule (J. G. Walker, "Satellite constellations", JBIS 37, 1984): plane j at
    # RAAN 360 j / P, slot k at 360 k / S + 360 F j / T. 15/3/1 at 53.51 deg is one of
    # Ballard's best single-coverage patterns (Ballard, IEEE Trans. AES-16(5), 1980, Table I).
    T, P, F = 15, 3, 1
    s = walker_delta(T, P, F, a_km=A_KM, i_rad=53.51 * DEG)
    S = T // P
    assert len(s) == T
    assert s.ids[:2] == ("S-P01-01", "S-P01-02") and s.ids[-1] == "S-P03-05"
    raan = s.raan_rad.reshape(P, S)
    M = s.M_rad.reshape(P, S)
    # all satellites of a plane share its node; planes 120 deg apart
    assert np.all(raan == raan[:, :1])
    np.testing.assert_allclose(_wrapped_diff(raan[1:, 0], raan[:-1, 0]), TWO_PI / P,
                               atol=ANGLE_ROUNDING_RAD)  # fmt: skip
    # in-plane spacing 360/S = 72 deg
    np.testing.assert_allclose(_wrapped_diff(M[:, 1:], M[:, :-1]), TWO_PI / S,
                               atol=ANGLE_ROUNDING_RAD)  # fmt: skip
    # relative phase between adjacent planes: 2 pi F / T = 24 deg
    np.testing.assert_allclose(_wrapped_diff(M[1:, 0], M[:-1, 0]), TWO_PI * F / T,
                               atol=ANGLE_ROUNDING_RAD)  # fmt: skip
    assert np.all(s.i_rad == 53.51 * DEG) and np.all(s.e == 0.0)
    assert np.all((s.M_rad >= 0) & (s.M_rad < TWO_PI))


def test_walker_delta_offsets_and_f0():
    s = walker_delta(6, 3, 0, a_km=A_KM, i_rad=1.0, raan0_rad=0.5, argp_rad=0.25, M0_rad=0.1)
    assert s.raan_rad[0] == pytest.approx(0.5, abs=0)
    np.testing.assert_allclose(s.argp_rad, 0.25)
    # F = 0: slot 0 of every plane at the same along-track angle argp + M
    u = s.argp_rad + s.M_rad
    np.testing.assert_allclose(u[::2], 0.35, atol=ANGLE_ROUNDING_RAD)


def test_walker_star_spreads_over_180_degrees():
    # Walker star: planes at RAAN 180 j / P (REFERENCES: Walker's T/P/F convention).
    P = 6
    s = walker_star(48, P, 1, a_km=A_KM, i_rad=86.4 * DEG, id_prefix="Q")
    nodes = np.unique(s.raan_rad)
    assert nodes.size == P
    np.testing.assert_allclose(np.diff(nodes), np.pi / P, atol=ANGLE_ROUNDING_RAD)
    assert nodes.max() < np.pi
    assert nodes.max() - nodes.min() == pytest.approx(np.pi * (P - 1) / P, abs=1e-13)
    assert s.ids[0] == "Q-P01-01"
    d = walker_delta(48, P, 1, a_km=A_KM, i_rad=86.4 * DEG, id_prefix="Q")
    np.testing.assert_array_equal(s.M_rad, d.M_rad)  # same in-plane phasing rule


def test_walker_dispatcher():
    a = walker("delta", 8, 4, 1, a_km=A_KM, i_rad=1.0)
    b = walker_delta(8, 4, 1, a_km=A_KM, i_rad=1.0)
    np.testing.assert_array_equal(a.raan_rad, b.raan_rad)
    c = walker("star", 8, 4, 1, a_km=A_KM, i_rad=1.0)
    assert c.raan_rad.max() < np.pi
    with pytest.raises(ElementError, match=r"pattern: unknown Walker pattern 'rosette'; "
                       r"allowed: \['delta', 'star'\]"):  # fmt: skip
        walker("rosette", 8, 4, 1, a_km=A_KM, i_rad=1.0)


def test_walker_ids_padding_for_many_planes():
    s = walker_delta(200, 100, 3, a_km=A_KM, i_rad=1.0)
    assert s.ids[0] == "S-P001-01" and s.ids[-1] == "S-P100-02"
    assert len(set(s.ids)) == 200


def test_walker_eccentric_template_phases_mean_anomaly():
    s = walker_delta(4, 2, 1, a_km=12000.0, e=0.3, i_rad=1.1, argp_rad=1.0, M0_rad=0.2)
    np.testing.assert_allclose(s.argp_rad, 1.0)
    # slots 0, 1 of plane 0 and of plane 1 (shifted by 2 pi F / T = 90 deg), on M
    want = np.mod(0.2 + np.array([0, np.pi, np.pi / 2, 3 * np.pi / 2]), TWO_PI)
    np.testing.assert_allclose(s.M_rad, want, atol=ANGLE_ROUNDING_RAD)


@pytest.mark.parametrize(
    ("tpf", "field", "text"),
    [
        ((15, 4, 1), "planes", r"must divide total = 15, got 4; allowed: \[1, 3, 5, 15\]"),
        ((15, 0, 0), "planes", r"allowed: \[1, 3, 5, 15\]"),
        ((15, 3, 3), "phasing", r"0 <= phasing < planes = 3, got 3; allowed: 0\.\.2"),
        ((15, 3, -1), "phasing", r"got -1"),
        ((0, 1, 0), "total", r">= 1, got 0"),
        ((15.0, 3, 1), "total", r"must be an integer, got 15\.0"),
    ],
)
def test_walker_tpf_errors(tpf, field, text):
    with pytest.raises(ElementError, match=text) as info:
        walker_delta(*tpf, a_km=A_KM, i_rad=1.0)
    assert info.value.field == field


@pytest.mark.parametrize(
    ("kwargs", "field", "text"),
    [
        ({"a_km": -7000.0}, "semi_major_axis_km", r"> 0 for e < 1, got -7000\.0 at satellite "
                                                  r"'S-P01-01'"),
        ({"a_km": 0.0}, "semi_major_axis_km", r"> 0 for e < 1, got 0\.0"),
        ({"e": -0.1}, "eccentricity", r">= 0, got -0\.1"),
        ({"e": 1.0}, "eccentricity", r"< 1 \(a closed orbit is required\), got 1\.0"),
        ({"e": 1.5}, "eccentricity", r"got 1\.5"),
        ({"a_km": 6500.0, "e": 0.1}, "semi_major_axis_km", r"perigee radius a\(1 - e\) = "
                                                           r"5850\.000 km"),
        ({"a_km": 6000.0}, "semi_major_axis_km", r"below the Earth's surface"),
        ({"a_km": float("nan")}, "semi_major_axis_km", r"finite, got nan"),
        ({"i_rad": float("nan")}, "inclination_rad", r"finite, got nan"),
        ({"i_rad": -0.1}, "inclination_rad", r"in \[0, pi\], got -0\.1"),
        ({"i_rad": 3.2}, "inclination_rad", r"in \[0, pi\], got 3\.2"),
    ],
)  # fmt: skip
def test_walker_bad_elements_name_field_and_value(kwargs, field, text):
    args = {"a_km": A_KM, "i_rad": 1.0} | kwargs
    with pytest.raises(ElementError, match=text) as info:
        walker_delta(6, 2, 1, **args)
    assert info.value.field == field


# --------------------------------------------------------------------------------------
# ElementSet
# --------------------------------------------------------------------------------------


def _three():
    return ElementSet(
        a_km=[7000.0, 7100, 7200], e=[0.0, 0.001, 0.01], i_rad=[0.9, 0.9, 1.0],
        raan_rad=[0.0, 1.0, 2.0], argp_rad=[0.0, 0.5, 1.0], M_rad=[0.1, 0.2, 0.3],
        ids=["a", "b", "c"],
    )  # fmt: skip


def test_elementset_coerces_and_freezes():
    s = _three()
    for name in ("a_km", "e", "i_rad", "raan_rad", "argp_rad", "M_rad"):
        arr = getattr(s, name)
        assert arr.dtype == np.float64 and arr.shape == (3,)
        with pytest.raises(ValueError, match="read-only"):
            arr[0] = 1.0
    assert s.ids == ("a", "b", "c") and len(s) == 3
    with pytest.raises(AttributeError):
        s.a_km = np.zeros(3)  # type: ignore[misc]
    # equality and hashing by value, so a set can key a cache
    assert s == _three() and hash(s) == hash(_three())
    assert s != s.subset([0, 1]) and s != "not a set"
    assert len({s, _three()}) == 1


def test_elementset_length_and_id_errors():
    with pytest.raises(ElementError, match=r"e: has 2 values but there are 3 ids"):
        ElementSet(a_km=[7000.0] * 3, e=[0.0, 0.0], i_rad=[1.0] * 3, raan_rad=[0.0] * 3,
                   argp_rad=[0.0] * 3, M_rad=[0.0] * 3, ids=["a", "b", "c"])  # fmt: skip
    with pytest.raises(ElementError, match=r"ids: must be unique, 'b' appears more than once"):
        ElementSet(a_km=[7000.0] * 3, e=[0.0] * 3, i_rad=[1.0] * 3, raan_rad=[0.0] * 3,
                   argp_rad=[0.0] * 3, M_rad=[0.0] * 3, ids=["a", "b", "b"])  # fmt: skip
    with pytest.raises(ElementError, match=r"M_rad: must be one-dimensional"):
        ElementSet(a_km=[7000.0], e=[0.0], i_rad=[1.0], raan_rad=[0.0], argp_rad=[0.0],
                   M_rad=[[0.0]], ids=["a"])  # fmt: skip
    with pytest.raises(ElementError, match=r"perigee .* at satellite 'b'"):
        ElementSet(a_km=[7000.0, 6400.0], e=[0.0, 0.01], i_rad=[1.0] * 2, raan_rad=[0.0] * 2,
                   argp_rad=[0.0] * 2, M_rad=[0.0] * 2, ids=["a", "b"])  # fmt: skip


def test_elementset_concat_and_subset():
    shell1 = walker_delta(6, 2, 1, a_km=A_KM, i_rad=1.0, id_prefix="L")
    shell2 = walker_star(4, 2, 0, a_km=A_KM + 300, i_rad=1.5, id_prefix="H")
    both = ElementSet.concat([shell1, shell2])
    assert len(both) == 10 and both.ids[:6] == shell1.ids and both.ids[6:] == shell2.ids
    np.testing.assert_array_equal(both.a_km[6:], shell2.a_km)
    with pytest.raises(ElementError, match=r"'L-P01-01' appears more than once"):
        ElementSet.concat([shell1, shell1])
    with pytest.raises(ElementError, match="at least one"):
        ElementSet.concat([])
    dropped = both.subset(np.arange(10) != 3)
    assert len(dropped) == 9 and both.ids[3] not in dropped.ids
    one = both.subset(7)
    assert one.ids == (both.ids[7],) and one.M_rad[0] == both.M_rad[7]
    named = both.subset(["H-P02-02", "L-P01-01"])
    assert named.ids == ("H-P02-02", "L-P01-01")
    assert named.raan_rad[0] == both.raan_rad[9]
    assert both.subset(slice(2, 4)).ids == both.ids[2:4]
    with pytest.raises(ElementError, match=r"unknown satellite ids \['nope'\]"):
        both.subset(["nope"])


# --------------------------------------------------------------------------------------
# from_state_vectors / from_keplerian
# --------------------------------------------------------------------------------------


def _states(s: ElementSet, mu=MU_EARTH_KM3_S2):
    return kepler_to_cartesian(s.a_km, s.e, s.i_rad, s.raan_rad, s.argp_rad,
                               mean_to_true(s.M_rad, s.e), mu)  # fmt: skip


def test_from_state_vectors_round_trip_positions():
    # Circular inclined, circular equatorial (prograde, retrograde), eccentric inclined and
    # eccentric equatorial: the recovered set reproduces every state (angles may be folded).
    s = ElementSet(
        a_km=[A_KM, A_KM, A_KM, 26560.0, 9000.0],
        e=[0.0, 0.0, 0.0, 0.7, 0.2],
        i_rad=[1.0, 0.0, np.pi, 63.4 * DEG, 0.0],
        raan_rad=[0.3, 0.0, 0.0, 4.0, 0.0],
        argp_rad=[0.0, 0.0, 0.0, 270 * DEG, 1.2],
        M_rad=[0.4, 2.0, 2.0, 0.1, 5.0],
        ids=["c", "ce", "cer", "molniya-like", "ee"],
    )
    r, v = _states(s)
    back = from_state_vectors(r, v, s.ids)
    assert back.ids == s.ids
    r2, v2 = _states(back)
    np.testing.assert_allclose(r2, r, rtol=0, atol=ONE_MILLIMETRE_KM)
    np.testing.assert_allclose(v2, v, rtol=0, atol=1e-9)  # 1 micrometre per second
    # along-track angle carried by argp + M for the circular ones
    np.testing.assert_allclose(back.argp_rad[:3], 0.0)
    np.testing.assert_allclose(_wrapped_diff(back.raan_rad[0] + back.M_rad[0], 0.7), 0.0,
                               atol=1e-12)  # fmt: skip


def test_from_state_vectors_rejects_open_and_bad_states():
    r = np.array([[A_KM, 0, 0]])
    v_escape = np.array([[0.0, 1.01 * math.sqrt(2 * MU_EARTH_KM3_S2 / A_KM), 0]])
    with pytest.raises(ElementError, match=r"eccentricity: must be < 1 .* at satellite 'x'"):
        from_state_vectors(r, v_escape, ["x"])
    with pytest.raises(ElementError, match=r"position_km: must be non-zero"):
        from_state_vectors([[0.0, 0, 0]], [[0, 7.0, 0]], ["x"])
    with pytest.raises(ElementError, match=r"velocity_km_s: must be finite, got \[0\.0, nan"):
        from_state_vectors(r, [[0.0, np.nan, 0]], ["x"])
    with pytest.raises(ElementError, match=r"position_km: must have shape \(n, 3\)"):
        from_state_vectors([A_KM, 0, 0], [0, 7, 0], ["x"])
    with pytest.raises(ElementError, match=r"ids: has 2 names for 1 states"):
        from_state_vectors(r, [[0, 7.0, 0]], ["x", "y"])


def test_from_keplerian_anomalies():
    ids = ["p", "q"]
    t = from_keplerian(8000.0, [0.0, 0.1], 1.0, 0.2, 0.3, true_anomaly_rad=[0.5, 2.0], ids=ids)
    m = from_keplerian(8000.0, [0.0, 0.1], 1.0, 0.2, 0.3, mean_anomaly_rad=[0.5, 2.0], ids=ids)
    assert t.M_rad[0] == pytest.approx(0.5, abs=1e-15)  # circular: M = nu
    assert t.M_rad[1] == pytest.approx(float(true_to_mean(2.0, 0.1)), abs=0)
    np.testing.assert_array_equal(m.M_rad, [0.5, 2.0])
    np.testing.assert_array_equal(t.a_km, [8000.0, 8000.0])
    with pytest.raises(ElementError, match="anomaly: give exactly one .* got both"):
        from_keplerian(8000.0, 0.0, 1.0, 0.0, 0.0, true_anomaly_rad=0.0, mean_anomaly_rad=0.0,
                       ids=["p"])  # fmt: skip
    with pytest.raises(ElementError, match="got neither"):
        from_keplerian(8000.0, 0.0, 1.0, 0.0, 0.0, ids=["p"])
    with pytest.raises(ElementError, match=r"e: shape \(3,\) does not fit 2 satellites"):
        from_keplerian(8000.0, [0, 0, 0], 1.0, 0.0, 0.0, mean_anomaly_rad=0.0, ids=ids)
    with pytest.raises(ElementError, match=r"eccentricity: must be < 1"):
        from_keplerian(8000.0, 1.2, 1.0, 0.0, 0.0, true_anomaly_rad=0.0, ids=["p"])
