"""Tests of covergrid.orbits.elements against textbook worked examples and analytic cases."""

from __future__ import annotations

import math

import numpy as np
import pytest

from covergrid.errors import ElementError
from covergrid.orbits.anomalies import (
    eccentric_to_mean,
    eccentric_to_true,
    hyperbolic_to_mean,
    hyperbolic_to_true,
    mean_to_eccentric,
    mean_to_hyperbolic,
    mean_to_true,
    solve_kepler,
    solve_kepler_hyperbolic,
    true_to_eccentric,
    true_to_hyperbolic,
    true_to_mean,
)
from covergrid.orbits.elements import (
    ORBIT_CIRCULAR_EQUATORIAL,
    ORBIT_CIRCULAR_INCLINED,
    ORBIT_DEGENERATE,
    ORBIT_NONCIRCULAR_EQUATORIAL,
    ORBIT_NONCIRCULAR_INCLINED,
    ORBIT_TYPE_MEANINGS,
    cartesian_to_kepler,
    kepler_to_cartesian,
    validate_elements,
    validate_state,
)

DEG = math.pi / 180.0

# Gravitational parameters used by the worked examples (not our WGS 84 default).
MU_VALLADO_KM3_S2 = 398600.4415  # Vallado, Fundamentals of Astrodynamics, 5th ed., Ex. 2-5, 2-6
MU_CURTIS_KM3_S2 = 398600.0  # Curtis, Orbital Mechanics for Engineering Students, 3rd ed.

# Named tolerances.
ONE_MILLIMETRE_KM = 1e-6
ONE_MICROMETRE_PER_S_KM_S = 1e-9
# Double precision on angles of a few radians: a few ulps of 2 pi (ulp = 8.9e-16 rad).
ROUNDING_RAD = 1e-14


# --------------------------------------------------------------------------------------
# Kepler's equation
# --------------------------------------------------------------------------------------


def test_solve_kepler_vallado_example_2_1_scalar():
    # Vallado, Fundamentals of Astrodynamics and Applications, 5th ed., Example 2-1:
    # M = 235.4 deg, e = 0.4 -> E = 220.512074767522 deg.
    # Printed to 1e-12 deg; tolerance two half-units of that digit.
    E = solve_kepler(235.4 * DEG, 0.4)
    assert np.ndim(E) == 0
    assert abs(E / DEG - 220.512074767522) <= 1e-12


def test_solve_kepler_vallado_example_2_1_array_and_revolutions():
    # Same example (Vallado 5th ed., Ex. 2-1) on other revolutions and mirrored:
    # E(M + 2 pi k) = E(M) + 2 pi k and E(-M) = -E(M) follow from Kepler's equation.
    M = (235.4 * DEG + 2 * np.pi * np.arange(-3, 4))[:, None] * np.array([1.0, -1.0])
    E = solve_kepler(M, 0.4)
    assert E.shape == (7, 2)
    want = (220.512074767522 * DEG + 2 * np.pi * np.arange(-3, 4))[:, None] * np.array([1, -1])
    # Tolerance: the example's digit (1e-12 deg = 1.7e-14 rad) plus rounding of M near
    # 7 revolutions (|M| < 30 rad, ulp 3.6e-15 rad, a few of them).
    np.testing.assert_allclose(E, want, rtol=0, atol=1e-12 * DEG + 2e-14)


def test_solve_kepler_identities():
    # Analytic cases: e = 0 gives E = M; M = 0 and M = pi are fixed points for any e.
    M = np.linspace(-10, 10, 101)
    np.testing.assert_array_equal(solve_kepler(M, 0.0), M)
    e = np.array([0.0, 0.3, 0.9, 0.999])
    np.testing.assert_allclose(solve_kepler(0.0, e), 0.0, atol=ROUNDING_RAD)
    np.testing.assert_allclose(solve_kepler(np.pi, e), np.pi, atol=ROUNDING_RAD)


def test_solve_kepler_residual_over_all_m_and_e():
    # Kepler's equation itself is the check: |E - e sin E - M| at rounding level over
    # a dense grid, including the hard corner near M = 0 with e -> 0.999.
    M = np.concatenate([np.geomspace(1e-12, np.pi, 400), np.linspace(-20, 20, 401)])
    e = np.array([0.0, 0.1, 0.5, 0.9, 0.99, 0.999])[:, None]
    E = solve_kepler(M, e)
    assert E.shape == (6, M.size)
    resid = np.abs(E - e * np.sin(E) - M)
    assert resid.max() <= 4 * np.finfo(float).eps * 20


def test_solve_kepler_invalid_gives_nan_not_error():
    E = solve_kepler([1.0, 1.0, 1.0, np.nan], [1.0, -0.1, 0.5, 0.5])
    assert np.isnan(E[[0, 1, 3]]).all()
    assert np.isfinite(E[2])


def test_solve_kepler_hyperbolic_scalar_array_and_large_m():
    # Analytic: for H = 1, e = 2 the hyperbolic Kepler equation gives M = 2 sinh 1 - 1.
    H = solve_kepler_hyperbolic(2 * math.sinh(1.0) - 1.0, 2.0)
    assert np.ndim(H) == 0
    assert abs(H - 1.0) <= ROUNDING_RAD
    # Array with large |M| and e close to 1: residual relative to |M| at rounding level.
    M = np.array([-1e8, -50.0, -1e-9, 0.0, 1e-9, 3.0, 1e3, 1e12])
    e = np.array([[1.0001], [1.5], [10.0]])
    H = solve_kepler_hyperbolic(M, e)
    assert H.shape == (3, 8)
    resid = np.abs(e * np.sinh(H) - H - M)
    # Backward error: rounding of H (ulp ~ eps |H|) is amplified by dM/dH = e cosh H, and
    # the subtraction rounds at eps |M|; allow four of each.
    eps = np.finfo(float).eps
    assert (resid <= 4 * eps * (np.abs(M) + np.abs(H) * e * np.cosh(H)) + 1e-300).all()
    assert np.isnan(solve_kepler_hyperbolic(1.0, 0.9))


# --------------------------------------------------------------------------------------
# Anomaly conversions
# --------------------------------------------------------------------------------------


def test_true_eccentric_mean_analytic_point():
    # Analytic: e = 0.5, nu = 90 deg: cos E = (e + cos nu)/(1 + e cos nu) = 0.5 ->
    # E = 60 deg (Vallado 5th ed., Eq. 2-9), M = E - e sin E = pi/3 - sqrt(3)/4.
    E = true_to_eccentric(90 * DEG, 0.5)
    assert np.ndim(E) == 0
    assert abs(E - 60 * DEG) <= ROUNDING_RAD
    assert abs(eccentric_to_true(60 * DEG, 0.5) - 90 * DEG) <= ROUNDING_RAD
    M = math.pi / 3 - math.sqrt(3) / 4
    assert abs(eccentric_to_mean(60 * DEG, 0.5) - M) <= ROUNDING_RAD
    assert abs(true_to_mean(90 * DEG, 0.5) - M) <= ROUNDING_RAD
    assert abs(mean_to_eccentric(M, 0.5) - 60 * DEG) <= ROUNDING_RAD
    assert abs(mean_to_true(M, 0.5) - 90 * DEG) <= ROUNDING_RAD


def test_elliptic_conversions_array_keep_revolution():
    nu = np.linspace(-15.0, 15.0, 61)[:, None]
    e = np.array([0.0, 0.2, 0.7, 0.99])
    E = true_to_eccentric(nu, e)
    assert E.shape == (61, 4)
    # Same revolution: E and nu never differ by more than pi.
    assert np.abs(E - nu).max() < np.pi
    np.testing.assert_allclose(eccentric_to_true(E, e), np.broadcast_to(nu, E.shape), atol=1e-12)
    M = true_to_mean(nu, e)
    np.testing.assert_allclose(mean_to_true(M, e), np.broadcast_to(nu, M.shape), atol=1e-11)
    np.testing.assert_array_equal(true_to_eccentric(nu, 0.0), np.broadcast_to(nu, (61, 1)))


def test_hyperbolic_conversions_scalar_array_and_asymptote():
    # Analytic: e = 2, nu = 60 deg: tanh(H/2) = sqrt(1/3) tan 30 deg = 1/3 -> H = 2 atanh(1/3).
    H = true_to_hyperbolic(60 * DEG, 2.0)
    assert np.ndim(H) == 0
    assert abs(H - 2 * math.atanh(1 / 3)) <= ROUNDING_RAD
    assert abs(hyperbolic_to_true(H, 2.0) - 60 * DEG) <= ROUNDING_RAD
    assert abs(hyperbolic_to_mean(H, 2.0) - (2 * math.sinh(H) - H)) <= ROUNDING_RAD
    assert abs(mean_to_hyperbolic(2 * math.sinh(H) - H, 2.0) - H) <= ROUNDING_RAD
    # Beyond the asymptote arccos(-1/e) = 120 deg for e = 2: NaN, no exception.
    nu = np.array([-119.0, 0.0, 119.0, 121.0, 240.0]) * DEG  # 240 deg = -120 deg: on the asymptote
    H = true_to_hyperbolic(nu, 2.0)
    assert np.isfinite(H[:3]).all() and np.isnan(H[3:]).all()
    np.testing.assert_allclose(true_to_mean(nu[:3], 2.0), hyperbolic_to_mean(H[:3], 2.0))
    np.testing.assert_allclose(mean_to_true(true_to_mean(nu[:3], 2.0), 2.0), nu[:3], atol=1e-12)


def test_parabolic_barker():
    # Barker's equation M = B + B^3/3, B = tan(nu/2) (Vallado 5th ed., sec. 2.2.4, from
    # memory; the convention is checked against sgp4.ext.newtonnu below): nu = 90 deg -> B = 1
    # -> M = 4/3.
    assert abs(true_to_mean(90 * DEG, 1.0) - 4 / 3) <= ROUNDING_RAD
    assert abs(mean_to_true(4 / 3, 1.0) - 90 * DEG) <= ROUNDING_RAD
    nu = np.array([-170.0, -30.0, 0.0, 45.0, 179.0]) * DEG
    np.testing.assert_allclose(mean_to_true(true_to_mean(nu, 1.0), 1.0), nu, atol=1e-12)


def test_mixed_eccentricities_dispatch():
    nu = np.array([1.0, 1.0, 1.0, 1.0])
    e = np.array([0.3, 1.0, 1.7, -0.1])
    M = true_to_mean(nu, e)
    assert M[0] == pytest.approx(float(true_to_mean(1.0, 0.3)), abs=0)
    assert M[1] == pytest.approx(float(true_to_mean(1.0, 1.0)), abs=0)
    assert M[2] == pytest.approx(float(true_to_mean(1.0, 1.7)), abs=0)
    assert np.isnan(M[3])
    np.testing.assert_allclose(mean_to_true(M[:3], e[:3]), nu[:3], atol=1e-12)


# --------------------------------------------------------------------------------------
# Kepler <-> Cartesian: worked examples
# --------------------------------------------------------------------------------------


def test_rv2coe_vallado_example_2_5():
    # Vallado, Fundamentals of Astrodynamics and Applications, 5th ed., Example 2-5:
    # r = (6524.834, 6862.875, 6448.296) km, v = (4.901327, 5.533756, -1.976341) km/s,
    # mu = 398600.4415 -> p = 11067.790 km, a = 36127.343 km, e = 0.832853, i = 87.870 deg,
    # RAAN = 227.898 deg, argp = 53.38 deg, nu = 92.335 deg.
    k = cartesian_to_kepler(
        [6524.834, 6862.875, 6448.296], [4.901327, 5.533756, -1.976341], MU_VALLADO_KM3_S2
    )
    assert k.orbit_type == ORBIT_NONCIRCULAR_INCLINED
    # e, RAAN, argp, nu: half a unit in the last printed digit.
    assert abs(k.e - 0.832853) <= 5e-7
    assert abs(k.raan_rad / DEG - 227.898) <= 5e-4
    assert abs(k.argp_rad / DEG - 53.38) <= 5e-3
    assert abs(k.nu_rad / DEG - 92.335) <= 5e-4
    # a: rounding of the printed state (5e-4 km, 5e-7 km/s) moves a by up to 0.058 km
    # (linearised worst case), so the printed 36127.343 is matched to that.
    assert abs(k.a_km - 36127.343) <= 0.058
    # p and i: the printed 11067.790 km and 87.870 deg do not follow from the printed state
    # to all digits (we get 11067.798 km and 87.8691 deg; input rounding explains only
    # 0.005 km and 1e-5 deg). They are the inputs of Example 2-6, which the state printed
    # there reproduces to all digits (next test). So p and i are checked to 0.01 km and
    # 0.001 deg here, which still catches any error in the method.
    assert abs(k.p_km - 11067.790) <= 0.01
    assert abs(k.i_rad / DEG - 87.870) <= 1e-3
    # Argument of latitude = argp + nu for an inclined orbit.
    assert abs(k.arglat_rad - (k.argp_rad + k.nu_rad)) <= ROUNDING_RAD
    assert np.isnan(k.lonper_rad) and np.isnan(k.truelon_rad)


def test_coe2rv_vallado_example_2_6():
    # Vallado, Fundamentals of Astrodynamics and Applications, 5th ed., Example 2-6:
    # p = 11067.79 km, e = 0.83285, i = 87.87 deg, RAAN = 227.89 deg, argp = 53.38 deg,
    # nu = 92.335 deg (mu = 398600.4415) -> r = (6525.36812, 6861.53183, 6449.11861) km,
    # v = (4.90227864, 5.53313957, -1.9757101) km/s.
    r, v = kepler_to_cartesian(
        None, 0.83285, 87.87 * DEG, 227.89 * DEG, 53.38 * DEG, 92.335 * DEG,
        MU_VALLADO_KM3_S2, p_km=11067.79,
    )  # fmt: skip
    assert r.shape == (3,) and v.shape == (3,)
    # Half a unit in the last printed digit of each component.
    np.testing.assert_allclose(r, [6525.36812, 6861.53183, 6449.11861], rtol=0, atol=5e-6)
    np.testing.assert_allclose(v[:2], [4.90227864, 5.53313957], rtol=0, atol=5e-9)
    assert abs(v[2] - -1.9757101) <= 5e-8
    # Same elements given through a = p / (1 - e^2): identical state.
    a = 11067.79 / (1 - 0.83285**2)
    r2, v2 = kepler_to_cartesian(
        a, 0.83285, 87.87 * DEG, 227.89 * DEG, 53.38 * DEG, 92.335 * DEG, MU_VALLADO_KM3_S2
    )
    np.testing.assert_allclose(r2, r, rtol=0, atol=ONE_MILLIMETRE_KM * 1e-3)
    np.testing.assert_allclose(v2, v, rtol=0, atol=ONE_MICROMETRE_PER_S_KM_S)


def test_rv2coe_of_vallado_example_2_6_state():
    # The state printed in Vallado 5th ed., Example 2-6 converted back gives that example's
    # inputs p = 11067.79 km, e = 0.83285, i = 87.87, RAAN = 227.89, argp = 53.38,
    # nu = 92.335 deg. Tolerances: the state is printed to 5e-6 km and 5e-9 km/s, which
    # (linearised as for Example 2-5) moves p by < 5e-5 km, e by < 1e-8, angles < 1e-6 deg.
    k = cartesian_to_kepler(
        [6525.36812, 6861.53183, 6449.11861], [4.90227864, 5.53313957, -1.9757101],
        MU_VALLADO_KM3_S2,
    )  # fmt: skip
    assert abs(k.p_km - 11067.79) <= 1e-4
    assert abs(k.e - 0.83285) <= 1e-8
    for got, want in [(k.i_rad, 87.87), (k.raan_rad, 227.89), (k.argp_rad, 53.38)]:
        assert abs(got / DEG - want) <= 1e-6
    assert abs(k.nu_rad / DEG - 92.335) <= 1e-6


def test_rv2coe_curtis_example_4_3():
    # Curtis, Orbital Mechanics for Engineering Students, 3rd ed., Example 4.3 (mu = 398600):
    # r = (-6045, -3490, 2500) km, v = (-3.457, 6.618, 2.533) km/s -> h = 58310 km^2/s,
    # i = 153.2 deg, RAAN = 255.3 deg, e = 0.1712, argp = 20.07 deg, nu = 28.45 deg,
    # a = 8788 km. Printed to four significant figures; tolerance half a unit of the last.
    k = cartesian_to_kepler([-6045, -3490, 2500], [-3.457, 6.618, 2.533], MU_CURTIS_KM3_S2)
    assert abs(math.sqrt(k.p_km * MU_CURTIS_KM3_S2) - 58310) <= 5
    assert abs(k.i_rad / DEG - 153.2) <= 0.05
    assert abs(k.raan_rad / DEG - 255.3) <= 0.05
    assert abs(k.e - 0.1712) <= 5e-5
    assert abs(k.argp_rad / DEG - 20.07) <= 5e-3
    assert abs(k.nu_rad / DEG - 28.45) <= 5e-3
    assert abs(k.a_km - 8788) <= 0.5


def test_coe2rv_curtis_example_4_7_hyperbola():
    # Curtis, Orbital Mechanics for Engineering Students, 3rd ed., Example 4.7 (mu = 398600):
    # h = 80000 km^2/s, e = 1.4, i = 30, RAAN = 40, argp = 60, nu = 30 deg ->
    # r = (-4040, 4815, 3629) km, v = (-10.39, -4.772, 1.744) km/s (four significant
    # figures; tolerance half a unit of the last).
    p = 80000.0**2 / MU_CURTIS_KM3_S2
    a = p / (1 - 1.4**2)  # negative: the sign convention for hyperbolas
    assert a < 0
    args = (1.4, 30 * DEG, 40 * DEG, 60 * DEG, 30 * DEG, MU_CURTIS_KM3_S2)
    r, v = kepler_to_cartesian(a, *args)
    np.testing.assert_allclose(r, [-4040, 4815, 3629], rtol=0, atol=0.5)
    assert abs(v[0] - -10.39) <= 5e-3
    np.testing.assert_allclose(v[1:], [-4.772, 1.744], rtol=0, atol=5e-4)
    rp, vp = kepler_to_cartesian(None, *args, p_km=p)
    np.testing.assert_allclose(rp, r, rtol=0, atol=ONE_MILLIMETRE_KM)
    # Back to elements: the example's inputs, to rounding.
    k = cartesian_to_kepler(r, v, MU_CURTIS_KM3_S2)
    assert abs(k.a_km - a) <= ONE_MILLIMETRE_KM
    assert abs(k.e - 1.4) <= 1e-12
    for got, want in [(k.i_rad, 30), (k.raan_rad, 40), (k.argp_rad, 60), (k.nu_rad, 30)]:
        assert abs(got / DEG - want) <= 1e-9


# --------------------------------------------------------------------------------------
# Special cases of RV2COE (analytic constructions)
# --------------------------------------------------------------------------------------

MU = 398600.4418
R0_KM = 7000.0
VC_KM_S = math.sqrt(MU / R0_KM)


def _circular_state(i_rad, u_rad, raan_rad=0.0):
    return kepler_to_cartesian(R0_KM, 0.0, i_rad, raan_rad, 0.0, u_rad, MU)


def test_circular_inclined_uses_argument_of_latitude():
    r, v = _circular_state(50 * DEG, 123 * DEG, 77 * DEG)
    k = cartesian_to_kepler(r, v, MU)
    assert k.orbit_type == ORBIT_CIRCULAR_INCLINED
    assert k.argp_rad == 0.0
    assert abs(k.nu_rad - 123 * DEG) <= 1e-12
    assert abs(k.arglat_rad - 123 * DEG) <= 1e-12
    assert abs(k.raan_rad - 77 * DEG) <= 1e-12


def test_noncircular_equatorial_uses_longitude_of_periapsis():
    # Prograde and retrograde equatorial ellipses with periapsis at 30 deg from x.
    for i_rad in (0.0, np.pi):
        r, v = kepler_to_cartesian(9000.0, 0.2, i_rad, 0.0, 30 * DEG, 100 * DEG, MU)
        k = cartesian_to_kepler(r, v, MU)
        assert k.orbit_type == ORBIT_NONCIRCULAR_EQUATORIAL
        assert k.raan_rad == 0.0
        assert abs(k.argp_rad - 30 * DEG) <= 1e-12
        assert abs(k.lonper_rad - 30 * DEG) <= 1e-12
        assert abs(k.nu_rad - 100 * DEG) <= 1e-12
        assert np.isnan(k.arglat_rad)
    # Retrograde: the longitude is measured clockwise, so periapsis on the -y side
    # (counter-clockwise angle 330 deg from x) has longitude 30 deg.
    r, v = kepler_to_cartesian(9000.0, 0.2, np.pi, 0.0, 30 * DEG, 0.0, MU)
    assert r[1] < 0


def test_circular_equatorial_uses_true_longitude():
    for i_rad, want_deg in ((0.0, 200.0), (np.pi, 160.0)):
        ang = 200 * DEG
        r = R0_KM * np.array([math.cos(ang), math.sin(ang), 0.0])
        sense = 1.0 if i_rad == 0.0 else -1.0
        v = sense * VC_KM_S * np.array([-math.sin(ang), math.cos(ang), 0.0])
        k = cartesian_to_kepler(r, v, MU)
        assert k.orbit_type == ORBIT_CIRCULAR_EQUATORIAL
        assert k.raan_rad == 0.0 and k.argp_rad == 0.0
        assert abs(k.truelon_rad - want_deg * DEG) <= 1e-12
        assert abs(k.nu_rad - want_deg * DEG) <= 1e-12
        r2, v2 = kepler_to_cartesian(k.a_km, k.e, k.i_rad, 0.0, 0.0, k.nu_rad, MU)
        np.testing.assert_allclose(r2, r, rtol=0, atol=ONE_MILLIMETRE_KM)


def test_rv2coe_array_shape_and_degenerate_rows():
    r = np.array([[7000.0, 0, 0], [0, 0, 0], [7000.0, 0, 0], [np.nan, 1, 2]])
    v = np.array([[0, 7.5, 0.1], [0, 7.5, 0], [1.0, 0, 0], [0, 7.5, 0]])
    k = cartesian_to_kepler(r.reshape(2, 2, 3), v.reshape(2, 2, 3), MU)
    assert k.e.shape == (2, 2) and k.orbit_type.shape == (2, 2)
    codes = k.orbit_type.ravel()
    assert codes[0] == ORBIT_NONCIRCULAR_INCLINED
    assert (codes[1:] == ORBIT_DEGENERATE).all()
    assert np.isnan(k.a_km.ravel()[1:]).all()
    assert set(ORBIT_TYPE_MEANINGS) == {-1, 0, 1, 2, 3}


def test_coe2rv_array_broadcast_and_invalid_gives_nan():
    nu = np.linspace(0, 2 * np.pi, 5)
    r, v = kepler_to_cartesian(np.array([[7000.0], [8000.0]]), 0.01, 0.5, 0.2, 0.3, nu, MU)
    assert r.shape == (2, 5, 3) and v.shape == (2, 5, 3)
    # Wrong sign of a for a hyperbola, and a true anomaly beyond the asymptote: NaN.
    r, v = kepler_to_cartesian([7000.0, -7000.0, -7000.0], [1.5, 1.5, 1.5], 0, 0, 0,
                               [0.0, 0.0, 3.0], MU)  # fmt: skip
    assert np.isnan(r[0]).all() and np.isfinite(r[1]).all() and np.isnan(r[2]).all()
    with pytest.raises(ElementError, match="exactly one of a_km and p_km"):
        kepler_to_cartesian(7000.0, 0.0, 0, 0, 0, 0, MU, p_km=7000.0)
    with pytest.raises(ElementError, match="exactly one"):
        kepler_to_cartesian(None, 0.0, 0, 0, 0, 0, MU)


def test_parabola_through_p():
    # Parabola: speed equals the escape speed sqrt(2 mu / r) everywhere (vis-viva, a -> inf).
    r, v = kepler_to_cartesian(None, 1.0, 0.3, 0.1, 0.2, [0.0, 1.0, -2.0], MU, p_km=14000.0)
    rmag = np.linalg.norm(r, axis=-1)
    np.testing.assert_allclose(np.linalg.norm(v, axis=-1), np.sqrt(2 * MU / rmag), rtol=1e-14)
    np.testing.assert_allclose(rmag[0], 7000.0, rtol=1e-15)


# --------------------------------------------------------------------------------------
# Validation
# --------------------------------------------------------------------------------------


@pytest.mark.parametrize(
    ("a", "e", "field", "text"),
    [
        (-7000.0, 0.0, "semi_major_axis_km", r"> 0 for e < 1, got -7000\.0"),
        (0.0, 0.1, "semi_major_axis_km", r"> 0 for e < 1, got 0\.0"),
        (7000.0, -0.01, "eccentricity", r">= 0, got -0\.01"),
        (7000.0, 1.0, "eccentricity", r"< 1 \(a closed orbit is required\), got 1\.0"),
        (-9000.0, 1.2, "eccentricity", r"< 1 .*got 1\.2"),
        (7000.0, 0.2, "semi_major_axis_km", r"perigee radius a\(1 - e\) = 5600\.000 km"),
        (6000.0, 0.0, "semi_major_axis_km", r"below the Earth's surface"),
        (np.nan, 0.0, "semi_major_axis_km", r"finite, got nan"),
        (7000.0, np.inf, "eccentricity", r"finite, got inf"),
    ],
)
def test_validate_elements_names_field_and_value(a, e, field, text):
    with pytest.raises(ElementError, match=text) as info:
        validate_elements(a, e, field_prefix="constellation.0.")
    assert info.value.field == "constellation.0." + field
    assert str(info.value).startswith("constellation.0." + field + ":")


def test_validate_elements_open_orbits_and_angles_and_ids():
    validate_elements(-40000.0, 1.2, require_closed=False)  # hyperbola, a < 0, rp = 8000 km
    with pytest.raises(ElementError, match=r"< 0 for e > 1, got 9000\.0"):
        validate_elements(9000.0, 1.2, require_closed=False)
    with pytest.raises(ElementError, match="parabola"):
        validate_elements(7000.0, 1.0, require_closed=False, min_perigee_km=None)
    with pytest.raises(ElementError, match=r"inclination_rad: must be finite, got nan at "
                       r"satellite 'B'") as info:  # fmt: skip
        validate_elements([7000.0, 7000.0], [0.0, 0.0], i_rad=[0.1, np.nan], ids=["A", "B"])
    assert info.value.field == "inclination_rad"
    # Several problems: one error naming the first field, listing the others.
    with pytest.raises(ElementError, match=r"must be >= 0, got -0\.5 at index 1 \(also "
                       r"semi_major_axis_km: must be > 0 for e < 1, got -1\.0"):  # fmt: skip
        validate_elements([-1.0, 7000.0], [0.0, -0.5])
    validate_elements([7000.0, 8000.0], [0.0, 0.1])  # valid: no exception
    validate_elements(6000.0, 0.0, min_perigee_km=None)


def test_validate_state():
    validate_state([[7000.0, 0, 0]], [[0, 7.5, 0]])
    with pytest.raises(ElementError, match=r"position_km: must be non-zero, got \[0\.0, 0\.0"):
        validate_state([[0.0, 0, 0]], [[0, 7.5, 0]])
    with pytest.raises(ElementError, match=r"velocity_km_s: must be finite.*satellite 'X'"):
        validate_state([[7000.0, 0, 0]], [[0, np.nan, 0]], ids=["X"])
    with pytest.raises(ElementError, match="zero angular momentum"):
        validate_state([7000.0, 0, 0], [3.0, 0, 0])
    with pytest.raises(ElementError, match=r"shape \(\.\.\., 3\)"):
        validate_state([7000.0, 0], [0, 7.5])


# --------------------------------------------------------------------------------------
# Cross-check with a reference library: sgp4.ext.rv2coe / newtonnu (python-sgp4's port of
# Vallado's RV2COE and NEWTONNU, tolerance 1e-8 for circular and equatorial)
# --------------------------------------------------------------------------------------

# sgp4's port takes every angle from acos, which near 0 and pi is accurate only to
# sqrt(2 eps) = 2.1e-8 rad; allow a little more.
ACOS_ROUNDING_RAD = 3e-8
VALLADO_TOL = 1e-8  # the port's "small", for both eccentricity and inclination


def _random_states(n, seed):
    rng = np.random.default_rng(seed)
    rdir = rng.normal(size=(n, 3))
    vdir = rng.normal(size=(n, 3))
    rmag = rng.uniform(6600.0, 60000.0, n)
    r = rdir / np.linalg.norm(rdir, axis=1, keepdims=True) * rmag[:, None]
    speed = rng.uniform(0.4, 1.8, n) * np.sqrt(MU / rmag)  # ellipses and hyperbolas
    v = vdir / np.linalg.norm(vdir, axis=1, keepdims=True) * speed[:, None]
    return r, v


def _angle_close(a, b, tol):
    return abs(math.remainder(float(a) - float(b), 2 * math.pi)) <= tol


def test_rv2coe_matches_sgp4_reference_general_orbits():
    ext = pytest.importorskip("sgp4.ext")
    r, v = _random_states(300, seed=20261201)
    k = cartesian_to_kepler(r, v, MU, ecc_tol=VALLADO_TOL, inc_tol_rad=VALLADO_TOL)
    assert (k.orbit_type == ORBIT_NONCIRCULAR_INCLINED).all()
    assert (k.e > 1).any() and (k.e < 1).any()
    for j in range(len(r)):
        p, a, ecc, incl, raan, argp, nu, m, *_ = ext.rv2coe(r[j].tolist(), v[j].tolist(), MU)
        assert k.p_km[j] == pytest.approx(p, rel=1e-13)
        assert k.a_km[j] == pytest.approx(a, rel=1e-11)  # both from vis-viva; near e = 1 worse
        assert k.e[j] == pytest.approx(ecc, rel=1e-12)
        for got, want in [(k.i_rad[j], incl), (k.raan_rad[j], raan), (k.argp_rad[j], argp),
                          (k.nu_rad[j], nu)]:  # fmt: skip
            assert _angle_close(got, want, ACOS_ROUNDING_RAD)
        # mean anomaly from the reference's NEWTONNU (nu passed in (-pi, pi] so that its
        # hyperbolic branch accepts it)
        _, m_ref = ext.newtonnu(ecc, math.remainder(nu, 2 * math.pi))
        if m_ref != 999999.9:  # the port's "undefined"
            e_j, nu_j = float(k.e[j]), math.remainder(float(k.nu_rad[j]), 2 * math.pi)
            m_ours = true_to_mean(nu_j, e_j)
            # The reference's nu carries the acos rounding, which reaches M through
            # dM/dnu = |1 - e^2|^1.5 / (1 + e cos nu)^2 (Kepler's second law).
            gain = abs(1 - e_j**2) ** 1.5 / (1 + e_j * math.cos(nu_j)) ** 2
            tol = ACOS_ROUNDING_RAD * max(gain, 1.0) + 1e-12 * abs(m_ref)
            assert _angle_close(m_ours, m_ref, tol)


def test_rv2coe_matches_sgp4_reference_special_cases():
    ext = pytest.importorskip("sgp4.ext")
    cases = {
        # name: (a, e, i, raan, argp, nu), the reference field carrying the angle, our type
        "ci": ((8000.0, 0.0, 0.9, 1.1, 0.0, 2.5), "arglat", ORBIT_CIRCULAR_INCLINED),
        "ee": ((9000.0, 0.2, 0.0, 0.0, 0.7, 1.9), "lonper", ORBIT_NONCIRCULAR_EQUATORIAL),
        "ee-retro": ((9000.0, 0.2, math.pi, 0.0, 0.7, 1.9), "lonper",
                     ORBIT_NONCIRCULAR_EQUATORIAL),
        "ce": ((7000.0, 0.0, 0.0, 0.0, 0.0, 4.0), "truelon", ORBIT_CIRCULAR_EQUATORIAL),
        "ce-retro": ((7000.0, 0.0, math.pi, 0.0, 0.0, 4.0), "truelon",
                     ORBIT_CIRCULAR_EQUATORIAL),
    }  # fmt: skip
    for name, (el, field, otype) in cases.items():
        r, v = kepler_to_cartesian(*el, MU)
        k = cartesian_to_kepler(r, v, MU, ecc_tol=VALLADO_TOL, inc_tol_rad=VALLADO_TOL)
        p, a, ecc, incl, raan, argp, nu, m, arglat, truelon, lonper = ext.rv2coe(
            r.tolist(), v.tolist(), MU
        )
        ref = {"arglat": arglat, "truelon": truelon, "lonper": lonper}[field]
        ours = {"arglat": k.arglat_rad, "truelon": k.truelon_rad, "lonper": k.lonper_rad}[field]
        assert _angle_close(ours, ref, ACOS_ROUNDING_RAD), name
        # and where our folded elements put it
        carried = k.argp_rad if field == "lonper" else k.nu_rad
        assert _angle_close(carried, ref, ACOS_ROUNDING_RAD), name
        assert k.orbit_type == otype, name


def test_barker_convention_matches_sgp4_newtonnu():
    ext = pytest.importorskip("sgp4.ext")
    for nu in (-2.5, -0.3, 0.0, 0.8, 2.9):
        _, m_ref = ext.newtonnu(1.0, nu)
        if abs(nu) < 168 * DEG:  # the port's range for the parabola
            assert true_to_mean(nu, 1.0) == pytest.approx(m_ref, rel=1e-15, abs=1e-15)
