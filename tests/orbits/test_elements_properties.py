"""Property tests (Hypothesis) of covergrid.orbits.elements and the Walker builders.

Round trips are judged on quantities that are always well defined: the residual of Kepler's
equation, and positions and velocities rather than angles that lose meaning for circular or
equatorial orbits.
"""

from __future__ import annotations

import math

import numpy as np
from hypothesis import assume, given, settings
from hypothesis import strategies as st
from hypothesis.extra.numpy import arrays

from covergrid.constants import EARTH_RADIUS_KM
from covergrid.orbits.anomalies import (
    eccentric_to_mean,
    hyperbolic_to_mean,
    mean_to_true,
    solve_kepler,
    solve_kepler_hyperbolic,
    true_to_mean,
)
from covergrid.orbits.elements import (
    ECCENTRICITY_TOL,
    INCLINATION_TOL_RAD,
    cartesian_to_kepler,
    kepler_to_cartesian,
)
from covergrid.orbits.walker import walker_delta

EPS = np.finfo(np.float64).eps
MU = 398600.4418
ONE_MILLIMETRE_KM = 1e-6
# Velocity counterpart: 1 micrometre per second. Rounding of ~10 km/s speeds is ~1e-14 km/s;
# folding a circular orbit (e < 1e-11) changes the speed by at most v e ~ 1e-10 km/s.
ONE_MICROMETRE_PER_S_KM_S = 1e-9


def fold_tol_km(r_km):
    """Position tolerance of a round trip through cartesian_to_kepler.

    One millimetre, plus what the special-case folding may move a state by: treating
    e < ECCENTRICITY_TOL as circular changes |r| by up to 2 |r| e, treating
    i < INCLINATION_TOL_RAD as equatorial tilts r out of its plane by up to 2 |r| i.
    Below 50,000 km that extra is under one millimetre.
    """
    return ONE_MILLIMETRE_KM + 2.0 * np.linalg.norm(r_km) * (ECCENTRICITY_TOL + INCLINATION_TOL_RAD)


SETTINGS = settings(max_examples=300, deadline=None)

finite = {"allow_nan": False, "allow_infinity": False}
angle = st.floats(0.0, 2 * math.pi, **finite)
ecc_elliptic = st.one_of(
    st.just(0.0),
    st.floats(1e-9, 1e-6, **finite),  # near-circular, on both sides of ECCENTRICITY_TOL
    st.floats(1e-13, 1e-10, **finite),
    st.floats(0.0, 0.999, **finite),
)
inclination = st.one_of(
    st.just(0.0),
    st.just(math.pi),
    st.floats(1e-13, 1e-6, **finite),  # near-equatorial prograde
    st.floats(1e-13, 1e-6, **finite).map(lambda x: math.pi - x),  # near-equatorial retrograde
    st.floats(0.0, math.pi, **finite),
)


# --------------------------------------------------------------------------------------
# Kepler's equation
# --------------------------------------------------------------------------------------


@SETTINGS
@given(
    M=arrays(np.float64, st.integers(1, 20), elements=st.floats(-1e3, 1e3, **finite)),
    e=st.one_of(st.floats(0.0, 0.999, **finite), st.floats(0.99, 0.999, **finite)),
)
def test_kepler_mean_eccentric_mean(M, e):
    E = solve_kepler(M, e)
    # |E - M| = e |sin E| <= e
    assert np.all(np.abs(E - M) <= e + 4 * EPS * (1 + np.abs(M)))
    # Backward error: M is reduced modulo 2 pi (rounding eps |M|) and E - e sin E rounds at
    # eps |E|; a few of each.
    M2 = eccentric_to_mean(E, e)
    assert np.all(np.abs(M2 - M) <= 8 * EPS * (1 + np.abs(M)))


@SETTINGS
@given(
    M=arrays(np.float64, st.integers(1, 20), elements=st.floats(-1e6, 1e6, **finite)),
    e=st.one_of(st.floats(1.0 + 1e-9, 1.001, **finite), st.floats(1.001, 30.0, **finite)),
)
def test_kepler_hyperbolic_mean_round_trip(M, e):
    H = solve_kepler_hyperbolic(M, e)
    M2 = hyperbolic_to_mean(H, e)
    # rounding of H (eps |H|) is amplified by dM/dH = e cosh H; subtraction rounds at eps |M|
    tol = 8 * EPS * (1 + np.abs(M) + np.abs(H) * e * np.cosh(H))
    assert np.all(np.abs(M2 - M) <= tol)


@SETTINGS
@given(
    nu=arrays(np.float64, st.integers(1, 10), elements=st.floats(-30.0, 30.0, **finite)),
    e=st.floats(0.0, 0.99, **finite),
)
def test_true_mean_true_elliptic(nu, e):
    M = true_to_mean(nu, e)
    nu2 = mean_to_true(M, e)
    # Error in M of a few eps (1 + |M|) maps to nu through dnu/dM, at most
    # (1 + e)^2 / (1 - e^2)^(3/2) at periapsis.
    gain = (1 + e) ** 2 / (1 - e * e) ** 1.5
    assert np.all(np.abs(nu2 - nu) <= 16 * EPS * (1 + np.abs(M)) * gain)


# --------------------------------------------------------------------------------------
# Kepler <-> Cartesian round trips
# --------------------------------------------------------------------------------------


@SETTINGS
@given(
    a=st.floats(6600.0, 50000.0, **finite),
    e=ecc_elliptic,
    i=inclination,
    raan=angle,
    argp=angle,
    nu=angle,
)
def test_elements_state_elements_elliptic(a, e, i, raan, argp, nu):
    r1, v1 = kepler_to_cartesian(a, e, i, raan, argp, nu, MU)
    k = cartesian_to_kepler(r1, v1, MU)
    # Well-defined elements come back: a (vis-viva loses ~2 eps / (1 - e) relatively, as
    # below for hyperbolas; allow 8 times that), e, i.
    assert abs(k.a_km - a) <= 16 * EPS * (1.0 + 1.0 / (1.0 - e)) * a
    assert abs(k.e - e) <= 1e-11
    assert abs(k.i_rad - i) <= 1e-11
    # Angles may be folded (circular / equatorial special cases); the state may not change.
    r2, v2 = kepler_to_cartesian(k.a_km, k.e, k.i_rad, k.raan_rad, k.argp_rad, k.nu_rad, MU)
    assert np.linalg.norm(r2 - r1) <= fold_tol_km(r1)
    assert np.linalg.norm(v2 - v1) <= ONE_MICROMETRE_PER_S_KM_S


@SETTINGS
@given(
    rp=st.floats(6600.0, 50000.0, **finite),
    e=st.one_of(st.floats(1.0 + 1e-9, 1.01, **finite), st.floats(1.01, 10.0, **finite)),
    i=inclination,
    raan=angle,
    argp=angle,
    frac=st.floats(-0.95, 0.95, **finite),
)
def test_elements_state_elements_hyperbolic(rp, e, i, raan, argp, frac):
    a = rp / (1.0 - e)  # negative; perigee radius rp above the Earth
    nu = frac * math.acos(-1.0 / e)  # inside the asymptotes
    r1, v1 = kepler_to_cartesian(a, e, i, raan, argp, nu, MU)
    k = cartesian_to_kepler(r1, v1, MU)
    assert k.a_km < 0 and k.e > 1
    # a from vis-viva: xi = v^2/2 - mu/r cancels to mu (e - 1) / (2 rp) at periapsis, so
    # its relative rounding is ~ 2 eps / (e - 1); allow 8 times that.
    assert abs(k.a_km - a) <= 16 * EPS * (1.0 + 1.0 / (e - 1.0)) * abs(a)
    r2, v2 = kepler_to_cartesian(None, k.e, k.i_rad, k.raan_rad, k.argp_rad, k.nu_rad, MU,
                                 p_km=k.p_km)  # fmt: skip
    assert np.linalg.norm(r2 - r1) <= fold_tol_km(r1)
    assert np.linalg.norm(v2 - v1) <= ONE_MICROMETRE_PER_S_KM_S
    # the mean anomaly of a hyperbola round-trips too
    M = true_to_mean(k.nu_rad, k.e)
    nu_back = mean_to_true(M, k.e)
    assert abs(math.remainder(nu_back - k.nu_rad, 2 * math.pi)) <= 1e-9


def _unit(v):
    return v / np.linalg.norm(v)


direction = arrays(np.float64, 3, elements=st.floats(-1.0, 1.0, **finite)).filter(
    lambda x: np.linalg.norm(x) > 0.1
)


@SETTINGS
@given(
    rdir=direction,
    vdir=direction,
    rmag=st.floats(6500.0, 1e5, **finite),
    speed_factor=st.one_of(
        st.floats(0.3, 1.8, **finite),  # elliptic and hyperbolic, escape at sqrt(2) = 1.414
        st.floats(-1e-8, 1e-8, **finite).map(lambda x: 1.0 + x),  # near-circular speeds
    ),
    tangential=st.booleans(),
)
def test_state_elements_state(rdir, vdir, rmag, speed_factor, tangential):
    r1 = rmag * _unit(rdir)
    vd = _unit(vdir)
    if tangential:  # perpendicular to r: with speed_factor ~ 1 a near-circular orbit
        vd = _unit(np.cross(r1, vd)) if np.linalg.norm(np.cross(_unit(r1), vd)) > 0.1 else vd
    v1 = speed_factor * math.sqrt(MU / rmag) * vd
    # Nearly rectilinear orbits are ill-conditioned in elements: r = p / (1 + e cos nu)
    # with 1 + e cos nu = p / r, so r carries a relative rounding of ~ eps r / p. Keep
    # p / r >= 1e-3 (error < 1e-12 r, well below a millimetre).
    p_over_r = float(np.linalg.norm(np.cross(r1, v1)) ** 2 / MU / rmag)
    assume(p_over_r >= 1e-3)
    k = cartesian_to_kepler(r1, v1, MU)
    # p = h^2 / mu is well conditioned for every conic; a is not near e = 1.
    r2, v2 = kepler_to_cartesian(None, k.e, k.i_rad, k.raan_rad, k.argp_rad, k.nu_rad, MU,
                                 p_km=k.p_km)  # fmt: skip
    assert np.linalg.norm(r2 - r1) <= fold_tol_km(r1)
    assert np.linalg.norm(v2 - v1) <= ONE_MICROMETRE_PER_S_KM_S


@SETTINGS
@given(
    r=arrays(np.float64, (4, 3), elements=st.floats(-9e4, 9e4, **finite)),
    v=arrays(np.float64, (4, 3), elements=st.floats(-12.0, 12.0, **finite)),
)
def test_cartesian_to_kepler_array_matches_scalar(r, v):
    k = cartesian_to_kepler(r, v, MU)
    for j in range(4):
        kj = cartesian_to_kepler(r[j], v[j], MU)
        for name in ("p_km", "a_km", "e", "i_rad", "raan_rad", "argp_rad", "nu_rad"):
            np.testing.assert_array_equal(getattr(k, name)[j], getattr(kj, name))
        assert k.orbit_type[j] == kj.orbit_type


# --------------------------------------------------------------------------------------
# Walker builders
# --------------------------------------------------------------------------------------


@st.composite
def tpf(draw):
    planes = draw(st.integers(1, 12))
    per_plane = draw(st.integers(1, 12))
    phasing = draw(st.integers(0, planes - 1))
    return planes * per_plane, planes, phasing


@SETTINGS
@given(tpf(), st.floats(0.0, math.pi, **finite), angle, angle)
def test_walker_delta_properties(tpf_, i, raan0, M0):
    T, P, F = tpf_
    s = walker_delta(T, P, F, a_km=EARTH_RADIUS_KM + 800.0, i_rad=i, raan0_rad=raan0,
                     M0_rad=M0)  # fmt: skip
    S = T // P
    assert len(s) == T == len(set(s.ids))
    # Walker's rule: along-track angle of slot k in plane j is M0 + 2 pi k / S + 2 pi F j / T
    j, k = np.divmod(np.arange(T), S)
    want = M0 + 2 * np.pi * k / S + 2 * np.pi * F * j / T
    diff = np.vectorize(math.remainder)(s.M_rad - want, 2 * math.pi)
    assert np.all(np.abs(diff) <= 1e-12)
    diff = np.vectorize(math.remainder)(s.raan_rad - (raan0 + 2 * np.pi * j / P), 2 * math.pi)
    assert np.all(np.abs(diff) <= 1e-12)
