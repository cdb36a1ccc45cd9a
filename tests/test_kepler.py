"""Two-body propagation, Stumpff functions and classical elements."""

from __future__ import annotations

import mpmath
import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy.integrate import solve_ivp

from solver.mechanics.kepler import (
    elements_to_state,
    mean_to_true_anomaly,
    propagate,
    sample_arc,
    state_to_elements,
    true_to_mean_anomaly,
)
from solver.mechanics.lambert import solve_lambert
from solver.mechanics.stumpff import stumpff_c_array, stumpff_s_array

MU_EARTH = 398600.4418


def _dop853(r0, v0, dt, mu):
    """Independent reference: scipy DOP853 in units of |r0| and sqrt(|r0|³/μ)."""
    length = np.linalg.norm(r0)
    time_unit = np.sqrt(length**3 / mu)

    def rhs(_t, y):
        return np.concatenate([y[3:], -y[:3] / np.linalg.norm(y[:3]) ** 3])

    out = solve_ivp(
        rhs,
        (0.0, dt / time_unit),
        np.concatenate([r0 / length, v0 * time_unit / length]),
        method="DOP853",
        rtol=3e-14,
        atol=3e-17,
    )
    return out.y[:3, -1] * length, out.y[3:, -1] * length / time_unit


def test_stumpff_against_closed_forms_in_extended_precision():
    """Series near zero and closed forms elsewhere agree with 40-digit values (common practice:
    C(z) = (1 - cos √z)/z, S(z) = (√z - sin √z)/√z³ and their hyperbolic forms)."""
    mpmath.mp.dps = 40
    z = np.concatenate(
        [np.linspace(-50, 50, 1001), np.logspace(-12, 0.5, 60), -np.logspace(-12, 0.5, 60)]
    )
    for value, c_val, s_val in zip(z, stumpff_c_array(z), stumpff_s_array(z), strict=True):
        zz = mpmath.mpf(float(value))
        if zz == 0:
            continue  # checked exactly below
        if zz > 0:
            q = mpmath.sqrt(zz)
            c_ref, s_ref = (1 - mpmath.cos(q)) / zz, (q - mpmath.sin(q)) / q**3
        else:
            q = mpmath.sqrt(-zz)
            c_ref, s_ref = (mpmath.cosh(q) - 1) / (-zz), (mpmath.sinh(q) - q) / q**3
        # absolute error scaled by C(0) = 1/2: near z = (2kπ)² C itself passes through zero
        assert abs(c_val - float(c_ref)) <= 1e-15 * max(1.0, abs(float(c_ref)))
        assert abs(s_val - float(s_ref)) <= 1e-15 * max(1.0 / 6.0, abs(float(s_ref)))
    assert stumpff_c_array(np.array([0.0]))[0] == 0.5
    assert stumpff_s_array(np.array([0.0]))[0] == pytest.approx(1.0 / 6.0, rel=1e-16)


@pytest.mark.parametrize("speed_factor", [0.4, 0.9, 1.0, 1.3, 1.41421356, 1.5, 3.0, 20.0])
def test_propagate_against_dop853(speed_factor):
    """Ellipses through strong hyperbolas, forward and backward, against scipy's DOP853."""
    rng = np.random.default_rng(int(speed_factor * 100))
    for _ in range(6):
        r0 = rng.normal(size=3)
        r0 *= rng.uniform(6600, 42000) / np.linalg.norm(r0)
        v0 = rng.normal(size=3)
        v0 *= speed_factor * np.sqrt(MU_EARTH / np.linalg.norm(r0)) / np.linalg.norm(v0)
        dt = rng.uniform(-20000.0, 20000.0)
        r_ref, v_ref = _dop853(r0, v0, dt, MU_EARTH)
        r, v = propagate(r0, v0, dt, MU_EARTH)
        assert np.linalg.norm(r - r_ref) <= 1e-10 * np.linalg.norm(r_ref)
        assert np.linalg.norm(v - v_ref) <= 1e-9 * np.linalg.norm(v_ref)


def test_propagate_many_revolutions_returns_home():
    """A whole number of periods brings an ellipse back to its start (common practice)."""
    r0 = np.array([7000.0, 100.0, 2000.0])
    v0 = np.array([0.5, 7.2, 1.0])
    a = state_to_elements(r0, v0, MU_EARTH).a_km
    period = 2 * np.pi * np.sqrt(a**3 / MU_EARTH)
    r, v = propagate(r0, v0, 1000 * period, MU_EARTH)
    np.testing.assert_allclose(r, r0, atol=1e-6)
    np.testing.assert_allclose(v, v0, atol=1e-9)


def test_propagate_round_trip_and_shapes():
    r0 = np.array([[7000.0, 0, 0], [0, 9000.0, 100.0]])
    v0 = np.array([[0, 7.5, 0.5], [-6.0, 0.2, 1.0]])
    dt = np.array([[100.0], [5000.0], [-3000.0]])  # (3, 1) against (2,) -> (3, 2)
    r, v = propagate(r0, v0, dt, MU_EARTH)
    assert r.shape == (3, 2, 3) and v.shape == (3, 2, 3)
    back_r, back_v = propagate(r, v, -dt, MU_EARTH)
    np.testing.assert_allclose(back_r, np.broadcast_to(r0, (3, 2, 3)), rtol=1e-12, atol=1e-8)
    np.testing.assert_allclose(back_v, np.broadcast_to(v0, (3, 2, 3)), rtol=1e-12, atol=1e-11)
    assert propagate([7000.0, 0, 0], [0, 7.5, 0], 0.0, MU_EARTH)[0].shape == (3,)


def test_curtis_example_elements():
    """Curtis, Orbital Mechanics for Engineering Students, Example 5.3 (elements of the
    Example 5.2 arc). [MEMORY] book values h ≈ 80470 km²/s, e = 0.4335, i = 30.19°,
    Ω = 44.60°, ω = 30.71°, θ1 = 350.8°; [COMPUTED] a = 20003 km (docs/references.md 1.1).
    Tolerances follow the printed digits."""
    r1 = np.array([5000.0, 10000.0, 2100.0])
    sol = solve_lambert(r1, [-14600.0, 2500.0, 7000.0], 3600.0, 398600.0)
    v1 = sol.v1_km_s[0]
    el = state_to_elements(r1, v1, 398600.0)
    assert np.linalg.norm(np.cross(r1, v1)) == pytest.approx(80470, abs=5)
    assert el.e == pytest.approx(0.4335, abs=1e-4)
    assert np.degrees(el.inclination_rad) == pytest.approx(30.19, abs=0.01)
    assert np.degrees(el.raan_rad) == pytest.approx(44.60, abs=0.01)
    assert np.degrees(el.arg_periapsis_rad) == pytest.approx(30.71, abs=0.01)
    assert np.degrees(el.true_anomaly_rad) == pytest.approx(350.8, abs=0.05)
    assert el.a_km == pytest.approx(20003, abs=1)


@settings(max_examples=200, deadline=None)
@given(
    a=st.floats(7000.0, 1e6),
    e=st.floats(0.0, 0.99),
    inc=st.floats(0.001, np.pi - 0.001),
    raan=st.floats(0.0, 2 * np.pi - 1e-6),
    argp=st.floats(0.0, 2 * np.pi - 1e-6),
    nu=st.floats(-np.pi, np.pi),
)
def test_elements_round_trip_ellipse(a, e, inc, raan, argp, nu):
    r, v = elements_to_state(a, e, inc, raan, argp, nu, MU_EARTH)
    el = state_to_elements(r, v, MU_EARTH)
    r_back, v_back = elements_to_state(
        el.a_km,
        el.e,
        el.inclination_rad,
        el.raan_rad,
        el.arg_periapsis_rad,
        el.true_anomaly_rad,
        MU_EARTH,
    )
    # compare states, not angles: ω and ν are ill-defined for nearly circular orbits
    assert np.linalg.norm(r_back - r) <= 1e-9 * np.linalg.norm(r)
    assert np.linalg.norm(v_back - v) <= 1e-9 * np.linalg.norm(v)
    assert el.a_km == pytest.approx(a, rel=1e-9)
    assert el.inclination_rad == pytest.approx(inc, abs=1e-9)


def test_elements_hyperbola_and_special_orbits():
    r, v = elements_to_state(-20000.0, 1.8, 0.3, 1.0, 2.0, 0.5, MU_EARTH)
    el = state_to_elements(r, v, MU_EARTH)
    assert el.a_km == pytest.approx(-20000.0, rel=1e-12)
    assert el.e == pytest.approx(1.8, rel=1e-12)
    assert el.apoapsis_km == np.inf
    # equatorial circular: node on the x axis, periapsis at the node (documented conventions)
    el = state_to_elements([0.0, 7000.0, 0.0], [-np.sqrt(MU_EARTH / 7000.0), 0.0, 0.0], MU_EARTH)
    assert el.raan_rad == 0.0 and el.arg_periapsis_rad == 0.0
    assert el.true_anomaly_rad == pytest.approx(np.pi / 2, abs=1e-12)


@settings(max_examples=300, deadline=None)
@given(m=st.floats(-50.0, 50.0), e=st.one_of(st.floats(0.0, 0.999), st.floats(1.001, 20.0)))
def test_kepler_equation_round_trip(m, e):
    nu = mean_to_true_anomaly(m, e)
    m_back = true_to_mean_anomaly(nu, e)
    if e < 1:
        m_wrapped = (m + np.pi) % (2 * np.pi) - np.pi
        diff = (m_back - m_wrapped + np.pi) % (2 * np.pi) - np.pi
        assert abs(diff) <= 1e-11
    else:
        assert m_back == pytest.approx(m, rel=1e-11, abs=1e-11)


def test_sample_arc_follows_the_orbit():
    """Samples lie on the conic (radius = p / (1 + e cos ν), in the orbit plane) and get denser
    with more revolutions."""
    r1 = np.array([7000.0, 0.0, 0.0])
    v1 = np.array([0.0, 8.5, 0.3])
    el = state_to_elements(r1, v1, MU_EARTH)
    period = 2 * np.pi * np.sqrt(el.a_km**3 / MU_EARTH)
    t, r = sample_arc(r1, v1, 3.2 * period, MU_EARTH)
    assert t[0] == 0.0 and t[-1] == pytest.approx(3.2 * period)
    assert len(t) >= 3 * 180
    np.testing.assert_allclose(r[0], r1)
    h_unit = np.cross(r1, v1) / np.linalg.norm(np.cross(r1, v1))
    assert np.all(np.abs(r @ h_unit) <= 1e-9 * np.linalg.norm(r, axis=1))
    e_vec = np.cross(v1, np.cross(r1, v1)) / MU_EARTH - r1 / np.linalg.norm(r1)
    cos_nu = (r @ e_vec) / (np.linalg.norm(r, axis=1) * el.e)
    np.testing.assert_allclose(np.linalg.norm(r, axis=1), el.p_km / (1 + el.e * cos_nu), rtol=1e-9)
