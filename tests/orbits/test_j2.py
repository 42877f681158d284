"""Tests of covergrid.orbits.j2: secular J2 rates and the mean-element propagator."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pytest
from scipy.integrate import solve_ivp

from covergrid.constants import EARTH_RADIUS_KM, J2, MU_EARTH_KM3_S2, OMEGA_EARTH_RAD_S
from covergrid.errors import CovergridError, ElementError
from covergrid.orbits import anomalies, j2
from covergrid.orbits import elements as kepler

DEG = np.pi / 180.0
DAY_S = 86400.0

# Tolerances (named physical quantities with their reasons).
# First-order secular theory leaves out the second-order secular terms, of size J2^2 n
# times coefficients of order one to ten (Brouwer, Astron. J. 64, 1959, from memory); the
# orbit-averaged osculating a, e, i used as mean elements also differ from the theory's mean
# elements at second order. So each fitted rate must match within 10 J2^2 n (about 1 % of
# the J2 part of the rate: a wrong coefficient or sign in Eq. 9-41 fails by far).
SECOND_ORDER_COEFF = 10.0 * J2**2
# Two backends evaluating the same formulas: they differ by the angle recurrence (<= 32 steps
# of 2e-16 rad) and the Kepler-solver rounding, together < 1e-13 rad; so positions agree to
# 1e-12 of the semi-major axis (7 micrometres at 7,000 km).
BACKEND_REL = 1e-12
# Independent element-to-Cartesian conversion of the same ellipse: rounding only (< 1e-12
# relative on 40,000 km), so one micrometre.
ONE_MICROMETRE_KM = 1e-9
ONE_MICROMETRE_PER_S_KM_S = 1e-9


@dataclass(frozen=True)
class Elements:
    """Minimal ElementSet-like test double (duck-typed)."""

    a_km: np.ndarray
    e: np.ndarray
    i_rad: np.ndarray
    raan_rad: np.ndarray
    argp_rad: np.ndarray
    M_rad: np.ndarray


def _elements(a, e, i, raan, argp, m):
    return Elements(*(np.atleast_1d(np.asarray(x, dtype=float)) for x in (a, e, i, raan, argp, m)))


def _mixed_set(n: int = 60, seed: int = 7) -> Elements:
    """Circular, near-circular, moderately and highly eccentric orbits (all branches)."""
    rng = np.random.default_rng(seed)
    e = np.concatenate(
        [
            np.zeros(n // 4),
            rng.uniform(0, 0.04, n // 4),
            rng.uniform(0.05, 0.3, n // 4),
            rng.uniform(0.3, 0.75, n - 3 * (n // 4)),
        ]
    )
    a = (EARTH_RADIUS_KM + rng.uniform(300.0, 2000.0, n)) / (1.0 - e)  # perigee above 300 km
    return _elements(
        a,
        e,
        rng.uniform(0, np.pi, n),
        rng.uniform(0, 2 * np.pi, n),
        rng.uniform(0, 2 * np.pi, n),
        rng.uniform(-10, 10, n),
    )


# --------------------------------------------------------------------------------------
# Secular rates
# --------------------------------------------------------------------------------------
def test_raan_rate_matches_smad_eq_6_19():
    # Wertz and Larson, Space Mission Analysis and Design, 3rd ed., eq. 6-19 (from memory):
    # dRAAN/dt = -2.06474e14 a^-3.5 cos i (1 - e^2)^-2 deg/day, a in km; a = 6758 km,
    # i = 51.6 deg gives about -5.06 deg/day (REFERENCES.md).
    raan_dot, _, _ = j2.secular_rates(6758.0, 0.0, 51.6 * DEG)
    deg_per_day = raan_dot / DEG * DAY_S
    # Quoted as "about -5.06": the SMAD formula itself gives -5.055, so the quoted figure
    # carries up to 0.01 deg/day of rounding.
    assert deg_per_day == pytest.approx(-5.06, abs=0.01)
    smad = -2.06474e14 * 6758.0**-3.5 * np.cos(51.6 * DEG)
    # The SMAD coefficient is 6 significant figures with its own J2, R, mu: 1e-5 relative.
    assert deg_per_day == pytest.approx(smad, rel=1e-5)


def test_secular_rates_scalar_and_array():
    a = np.array([6778.0, 7178.0, 26560.0])
    e = np.array([0.0, 0.001, 0.7])
    i = np.array([51.6, 98.6, 63.4]) * DEG
    arr = j2.secular_rates(a, e, i)
    for k in range(3):
        scalar = j2.secular_rates(float(a[k]), float(e[k]), float(i[k]))
        assert all(isinstance(x, float) for x in scalar)
        np.testing.assert_allclose([x[k] for x in arr], scalar, rtol=0, atol=0)


def test_secular_rates_closed_forms():
    # Polar orbit: node frozen (cos i = 0). Critical inclination: perigee frozen.
    raan_dot, _, _ = j2.secular_rates(7000.0, 0.01, 90 * DEG)
    assert abs(raan_dot) < 1e-22
    _, argp_dot, _ = j2.secular_rates(7000.0, 0.01, np.arccos(1 / np.sqrt(5)))
    assert abs(argp_dot) < 1e-20
    # Mean-anomaly rate at sin^2 i = 2/3 is the two-body mean motion exactly.
    _, _, m_dot = j2.secular_rates(7000.0, 0.2, np.arcsin(np.sqrt(2 / 3)))
    assert m_dot == pytest.approx(np.sqrt(MU_EARTH_KM3_S2 / 7000.0**3), rel=1e-14)


@pytest.mark.parametrize(
    ("field", "args"),
    [("a_km", (-7000.0, 0.0, 0.1)), ("e", (7000.0, 1.0, 0.1)), ("i_rad", (7000.0, 0.0, np.nan))],
)
def test_secular_rates_bad_input(field, args):
    with pytest.raises(ElementError, match=field):
        j2.secular_rates(*args)


def _j2_rhs(_t, y):
    """Two-body plus J2 acceleration (Vallado, Fundamentals of Astrodynamics and
    Applications, 4th ed., Eq. 8-30 / Curtis, 3rd ed., Eq. 10.30)."""
    r = y[:3]
    rn = np.sqrt(r @ r)
    z2 = (r[2] / rn) ** 2
    k = 1.5 * J2 * (EARTH_RADIUS_KM / rn) ** 2
    f = -MU_EARTH_KM3_S2 / rn**3
    acc = f * r * np.array([1 + k * (1 - 5 * z2), 1 + k * (1 - 5 * z2), 1 + k * (3 - 5 * z2)])
    return np.concatenate([y[3:], acc])


@pytest.mark.parametrize(
    ("a_km", "e", "i_deg"),
    [
        (6778.137, 0.0005, 51.6),  # LEO station-like orbit
        (7178.137, 0.0005, 98.6),  # sun-synchronous, 800 km
        (8000.0, 0.1, 45.0),  # eccentric
    ],
)
def test_secular_rates_against_numerical_j2_integration(a_km, e, i_deg):
    """Fit lines to osculating angles from a full J2 integration over ~1 day."""
    period = 2 * np.pi * np.sqrt(a_km**3 / MU_EARTH_KM3_S2)
    n_orbits = int(DAY_S / period)
    span = n_orbits * period  # whole orbits: short-period terms average out of the fit
    t = np.linspace(0.0, span, n_orbits * 200, endpoint=False)
    r0, v0 = kepler.kepler_to_cartesian(a_km, e, i_deg * DEG, 1.0, 0.5, 0.3)
    sol = solve_ivp(
        _j2_rhs,
        (0.0, span),
        np.concatenate([r0, v0]),
        method="DOP853",
        rtol=1e-12,
        atol=np.array([1e-8] * 3 + [1e-11] * 3),
        t_eval=t,
    )
    assert sol.success
    osc = kepler.cartesian_to_kepler(sol.y[:3].T, sol.y[3:].T)
    # Mean a, e, i = averages of the osculating values over whole orbits (removes the
    # O(J2) offset between the osculating start and the mean elements).
    a_bar, e_bar, i_bar = osc.a_km.mean(), osc.e.mean(), osc.i_rad.mean()
    raan_dot, argp_dot, m_dot = j2.secular_rates(a_bar, e_bar, i_bar)
    n = np.sqrt(MU_EARTH_KM3_S2 / a_bar**3)

    tol = SECOND_ORDER_COEFF * n

    fitted_raan = np.polyfit(t, np.unwrap(osc.raan_rad), 1)[0]
    assert abs(fitted_raan - raan_dot) <= tol
    if e < 0.01:
        # argp is not defined well for near-circular orbits; the argument of latitude is.
        fitted_u = np.polyfit(t, np.unwrap(osc.arglat_rad), 1)[0]
        assert abs(fitted_u - (argp_dot + m_dot)) <= tol
    else:
        fitted_argp = np.polyfit(t, np.unwrap(osc.argp_rad), 1)[0]
        assert abs(fitted_argp - argp_dot) <= tol
        mean_anom = anomalies.true_to_mean(osc.nu_rad, osc.e)
        fitted_m = np.polyfit(t, np.unwrap(mean_anom), 1)[0]
        assert abs(fitted_m - m_dot) <= tol
    # The J2 parts are far larger than the tolerance, so the check has teeth.
    assert abs(raan_dot) > 10 * tol and abs(argp_dot + m_dot - n) > 10 * tol


# --------------------------------------------------------------------------------------
# Propagation
# --------------------------------------------------------------------------------------
def _reference_state(els: Elements, t: np.ndarray):
    """Drift the angles with secular_rates; place them with the elements module."""
    raan_dot, argp_dot, m_dot = j2.secular_rates(els.a_km, els.e, els.i_rad)
    col = (slice(None), None)
    m = els.M_rad[col] + m_dot[col] * t
    nu = anomalies.mean_to_true(np.mod(m, 2 * np.pi), els.e[col])
    return kepler.kepler_to_cartesian(
        els.a_km[col],
        els.e[col],
        els.i_rad[col],
        els.raan_rad[col] + raan_dot[col] * t,
        els.argp_rad[col] + argp_dot[col] * t,
        nu,
    )


@pytest.mark.parametrize("backend", ["numba", "numpy"])
def test_propagate_matches_elements_module(backend):
    els = _mixed_set()
    t = np.concatenate([np.arange(0.0, 7200.0, 60.0), [3.0 * DAY_S, 10.5 * DAY_S]])
    r, v = j2.propagate(els, t, backend=backend)
    r_ref, v_ref = _reference_state(els, t)
    assert r.shape == v.shape == (els.a_km.size, t.size, 3)
    scale = np.max(els.a_km) / 7000.0  # rounding grows with the orbit size
    np.testing.assert_allclose(r, r_ref, rtol=0, atol=ONE_MICROMETRE_KM * scale * 10)
    np.testing.assert_allclose(v, v_ref, rtol=0, atol=ONE_MICROMETRE_PER_S_KM_S)
    np.testing.assert_array_equal(j2.positions(els, t, backend=backend), r)


def test_propagate_scalar_case():
    els = _elements(7000.0, 0.01, 0.9, 0.2, 0.3, 0.4)
    r, v = j2.propagate(els, 600.0)
    assert r.shape == v.shape == (1, 1, 3)
    r_ref, v_ref = _reference_state(els, np.array([600.0]))
    np.testing.assert_allclose(r, r_ref, rtol=0, atol=ONE_MICROMETRE_KM)
    np.testing.assert_allclose(v, v_ref, rtol=0, atol=ONE_MICROMETRE_PER_S_KM_S)


def test_propagate_energy_and_plane():
    # Two-body ellipse at every instant: vis-viva holds and r is normal to the drifting
    # orbit normal (Vallado, 4th ed., Eq. 1-31 and sec. 2.6).
    els = _mixed_set(20)
    t = np.linspace(0.0, 2 * DAY_S, 97)
    r, v = j2.propagate(els, t)
    rn = np.linalg.norm(r, axis=-1)
    energy = 0.5 * np.sum(v * v, axis=-1) - MU_EARTH_KM3_S2 / rn
    expected = np.broadcast_to(-MU_EARTH_KM3_S2 / (2 * els.a_km[:, None]), energy.shape)
    np.testing.assert_allclose(energy, expected, rtol=1e-12)  # rounding of r, v: 1e-12
    raan_dot, _, _ = j2.secular_rates(els.a_km, els.e, els.i_rad)
    node = els.raan_rad[:, None] + raan_dot[:, None] * t
    inc = els.i_rad[:, None]
    normal = np.stack(
        np.broadcast_arrays(np.sin(node) * np.sin(inc), -np.cos(node) * np.sin(inc), np.cos(inc)),
        axis=-1,
    )
    h = np.cross(r, v)
    np.testing.assert_allclose(
        h / np.linalg.norm(h, axis=-1, keepdims=True), normal, rtol=0, atol=1e-12
    )  # unit vectors: rounding only


def test_numba_and_numpy_agree_on_irregular_long_grid():
    els = _mixed_set(80, seed=3)
    rng = np.random.default_rng(11)
    # uniform stretch, irregular stretch, repeated times, then a 30-day tail
    t = np.concatenate(
        [
            np.arange(0.0, 3600.0, 30.0),
            np.sort(rng.uniform(3600, 90000, 200)),
            [90000.0, 90000.0],
            np.arange(29 * DAY_S, 30 * DAY_S, 60.0),
        ]
    )
    bound_km = BACKEND_REL * els.a_km
    r_nb = j2.positions(els, t, backend="numba")
    r_np = j2.positions(els, t, backend="numpy")
    assert np.all(np.abs(r_nb - r_np).max(axis=(1, 2)) <= bound_km)
    ecef_nb = j2.propagate_to_ecef(els, t, 1.3, backend="numba")
    ecef_np = j2.propagate_to_ecef(els, t, 1.3, backend="numpy")
    assert np.all(np.abs(ecef_nb - ecef_np).max(axis=(1, 2)) <= bound_km)
    # coarse 10-minute steps over three days (big jumps in the eccentric-orbit predictor)
    t_coarse = np.arange(0.0, 3 * DAY_S, 600.0)
    diff = j2.positions(els, t_coarse, backend="numba") - j2.positions(
        els, t_coarse, backend="numpy"
    )
    assert np.all(np.abs(diff).max(axis=(1, 2)) <= bound_km)


def test_backend_argument_selects_numpy_and_numba_is_the_default(monkeypatch):
    # One numba policy: numba is required and the default; the NumPy implementation is
    # reached only by asking for it (it was once also selected by an environment variable).
    from covergrid.orbits import j2_backends

    calls = []
    real = j2_backends.run_numpy

    def spy(*args):
        calls.append(1)
        return real(*args)

    monkeypatch.setattr(j2_backends, "run_numpy", spy)
    els = _mixed_set(8)
    j2.positions(els, [0.0, 60.0], backend="numpy")
    assert calls == [1]
    j2.positions(els, [0.0, 60.0])
    assert calls == [1]


def test_ecef_is_sidereal_rotation_of_inertial():
    from covergrid.earth.frames import eci_to_ecef

    els = _mixed_set(12)
    t = np.linspace(0.0, DAY_S, 49)
    theta0 = 2.5
    r_i = j2.positions(els, t)
    theta = theta0 + OMEGA_EARTH_RAD_S * t
    expected = eci_to_ecef(r_i, theta[None, :])
    np.testing.assert_allclose(
        j2.propagate_to_ecef(els, t, theta0), expected, rtol=0, atol=ONE_MICROMETRE_KM * 10
    )
    # Independent check of the sense of rotation: R3(theta) maps x_I to (cos, -sin, 0).
    x_i = r_i[0, 5]
    c, s = np.cos(theta[5]), np.sin(theta[5])
    manual = np.array([c * x_i[0] + s * x_i[1], -s * x_i[0] + c * x_i[1], x_i[2]])
    np.testing.assert_allclose(
        j2.propagate_to_ecef(els, t, theta0)[0, 5], manual, rtol=0, atol=ONE_MICROMETRE_KM * 10
    )


def test_ecef_out_buffer_reused():
    els = _mixed_set(5)
    t = np.arange(10.0)
    buf = np.full((5, 10, 3), np.nan)
    res = j2.propagate_to_ecef(els, t, 0.1, out=buf)
    assert res is buf and np.all(np.isfinite(buf))
    with pytest.raises(CovergridError, match="out"):
        j2.propagate_to_ecef(els, t, 0.1, out=np.empty((5, 9, 3)))


def test_propagate_bad_inputs():
    good = _mixed_set(3)
    with pytest.raises(ElementError, match="e"):
        j2.positions(_elements([7000.0], [1.2], [0.1], [0.0], [0.0], [0.0]), [0.0])
    with pytest.raises(ElementError, match="M_rad"):
        j2.positions(_elements([7000.0], [0.0], [0.1], [0.0], [0.0], [np.inf]), [0.0])
    with pytest.raises(ElementError, match="no attribute 'a_km'"):
        j2.positions(object(), [0.0])
    with pytest.raises(ElementError, match="same length"):
        j2.positions(_elements([7000.0, 7100.0], [0.0], [0.1], [0.0], [0.0], [0.0]), [0.0])
    with pytest.raises(CovergridError, match="t_s"):
        j2.positions(good, [0.0, np.nan])
    with pytest.raises(CovergridError, match="frame"):
        j2.propagate(good, [0.0], frame="ecef")
    with pytest.raises(CovergridError, match="backend"):
        j2.positions(good, [0.0], backend="gpu")


def test_velocity_neglects_only_the_drift_rates():
    # The returned velocity is the two-body one; the time derivative of the modelled
    # position adds v (Mdot - n)/n + argp_dot dr/d(argp) + raan_dot dr/d(raan), with
    # |dr/d(angle)| <= |r|. Central differences (h = 0.5 s, error ~ h^2 |jerk| / 6 below
    # 1e-7 km/s in LEO) must lie within that bound, and the documented neglect is real.
    els = _elements(
        [6878.0, 7500.0], [0.001, 0.05], [0.9, 1.7], [0.1, 2.0], [0.2, 1.0], [0.3, -2.0]
    )
    t = np.linspace(0.0, 6000.0, 41)
    h = 0.5
    _, v = j2.propagate(els, t)
    r = j2.positions(els, t)
    v_fd = (j2.positions(els, t + h) - j2.positions(els, t - h)) / (2 * h)
    raan_dot, argp_dot, m_dot = j2.secular_rates(els.a_km, els.e, els.i_rad)
    n = np.sqrt(MU_EARTH_KM3_S2 / els.a_km**3)
    bound = (
        np.linalg.norm(v, axis=-1) * (np.abs(m_dot - n) / n)[:, None]
        + np.linalg.norm(r, axis=-1) * (np.abs(argp_dot) + np.abs(raan_dot))[:, None]
    )
    gap = np.linalg.norm(v_fd - v, axis=-1)
    FD_ERROR_KM_S = 1e-7
    assert np.all(gap <= bound + FD_ERROR_KM_S)
    assert np.all(gap > 1e-4)  # ~0.1 m/s or more: the O(J2) drift part is really left out
    assert np.all(bound < 0.02)  # "a few m/s" in LEO, as documented


# Five-point central differences with h = 0.5 s: truncation ~ h^4 |r^(5)| / 30, below
# 1e-12 km/s in LEO and for the eccentric orbits here; rounding ~ 1e-16 * |r| / h ~ 1e-11.
FIVE_POINT_ERROR_KM_S = 1e-9


def _five_point(f, t, h=0.5):
    return (8.0 * (f(t + h) - f(t - h)) - (f(t + 2 * h) - f(t - 2 * h))) / (12.0 * h)


@pytest.mark.parametrize("backend", ["numba", "numpy"])
def test_ecef_velocity_is_the_derivative_of_the_ecef_position(backend):
    # the coverage kernel interpolates positions between samples with these rates (cubic
    # Hermite), so they must be the derivative of the modelled trajectory itself, drift of
    # node, perigee and mean anomaly and Earth rotation included
    els = _mixed_set(12)
    t = np.linspace(0.0, DAY_S, 37)
    theta0 = 1.3
    r, v = j2.propagate_to_ecef_with_velocity(els, t, theta0, backend=backend)
    np.testing.assert_array_equal(r, j2.propagate_to_ecef(els, t, theta0, backend=backend))
    v_fd = _five_point(lambda tt: j2.propagate_to_ecef(els, tt, theta0, backend=backend), t)
    np.testing.assert_allclose(v, v_fd, rtol=0, atol=FIVE_POINT_ERROR_KM_S)


def test_ecef_velocity_follows_the_rotating_frame_rule():
    # v_EF = R3(theta) v_I - omega_E x r_EF (Vallado, Fundamentals of Astrodynamics and
    # Applications, 4th ed., sec. 3.7; from memory), with v_I the derivative of the
    # inertial position (differenced here)
    from covergrid.earth.frames import eci_to_ecef

    els = _mixed_set(8)
    t = np.linspace(0.0, 6 * 3600.0, 13)
    theta0 = 0.4
    r, v = j2.propagate_to_ecef_with_velocity(els, t, theta0)
    theta = theta0 + OMEGA_EARTH_RAD_S * t
    v_i = _five_point(lambda tt: j2.positions(els, tt), t)
    omega_x_r = OMEGA_EARTH_RAD_S * np.stack([-r[..., 1], r[..., 0], np.zeros_like(r[..., 0])],
                                             axis=-1)
    expected = eci_to_ecef(v_i, theta[None, :]) - omega_x_r
    np.testing.assert_allclose(v, expected, rtol=0, atol=FIVE_POINT_ERROR_KM_S)


def test_ecef_velocity_buffers():
    els = _mixed_set(3)
    t = np.arange(6.0)
    r_buf = np.full((3, 6, 3), np.nan)
    v_buf = np.full((3, 6, 3), np.nan)
    r, v = j2.propagate_to_ecef_with_velocity(els, t, 0.2, out=r_buf, out_v=v_buf)
    assert r is r_buf and v is v_buf and np.all(np.isfinite(v_buf))
    with pytest.raises(CovergridError, match="out_v"):
        j2.propagate_to_ecef_with_velocity(els, t, 0.2, out_v=np.empty((3, 5, 3)))
