"""Lagrange's time-of-flight equation, the normalized family chart and classification."""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from solver.mechanics.families import (
    Family,
    classify,
    family_curves,
    family_label,
    geometry,
    lagrange_tof_s,
    minimum_energy_tau,
    minimum_energy_tof_s,
    parabolic_tau,
    parabolic_tof_s,
    tau_of_epsilon,
)
from solver.mechanics.lambert import minimum_tof_nondim, solve_lambert

MU = 398600.4418


@pytest.mark.parametrize("lam", [-0.95, -0.5, 0.0, 0.3, 0.8, 0.999])
def test_parabola_is_the_limit_of_both_sides(lam):
    """Euler's parabolic equation (Battin 1999 §4.2; common practice) is the ε → 0 limit of the
    elliptic 'before' branch and of the hyperbolic branch."""
    tau_p = parabolic_tau(lam)
    for eps in (-1e-6, -1e-9, 1e-9, 1e-6):
        assert tau_of_epsilon(eps, lam) == pytest.approx(tau_p, rel=5 * abs(eps) ** 0.5 + 1e-12)
    assert tau_of_epsilon(0.0, lam) == pytest.approx(tau_p, rel=1e-15)


def test_parabolic_tof_matches_normalized_form():
    r1, r2 = np.array([7000.0, 0, 0]), np.array([-2000.0, 12000.0, 300.0])
    geo = geometry(r1, r2)
    t = parabolic_tof_s(geo.semiperimeter_km, geo.chord_km, MU, long_way=False)
    assert t == pytest.approx(parabolic_tau(geo.lam) * np.sqrt(geo.a_min_km**3 / MU), rel=1e-13)
    assert lagrange_tof_s(np.inf, geo.semiperimeter_km, geo.chord_km, MU) == pytest.approx(
        t, rel=1e-13
    )


def test_half_turn_minimum_energy_is_hohmann():
    """At 180 degrees the minimum-energy ellipse is the Hohmann ellipse: t = π sqrt(a³/μ) with
    a = (r1 + r2)/2 (common practice); N revolutions add N full periods."""
    r1, r2 = 7000.0, 42164.0
    s = r1 + r2  # chord = r1 + r2
    a = s / 2
    for n in range(3):
        expected = (2 * n + 1) * np.pi * np.sqrt(a**3 / MU)
        assert minimum_energy_tof_s(s, s, MU, revolutions=n) == pytest.approx(expected, rel=1e-14)


@pytest.mark.parametrize("lam", [-0.7, 0.0, 0.6])
def test_branches_meet_at_minimum_energy(lam):
    before = tau_of_epsilon(-1.0, lam, 0, False)
    after = tau_of_epsilon(-1.0, lam, 0, True)
    assert before == pytest.approx(after, rel=1e-14)
    assert minimum_energy_tau(lam) == pytest.approx(before)
    # before the minimum-energy time is faster, after is slower, for every other energy
    eps = np.linspace(-0.99, -0.01, 50)
    assert np.all(tau_of_epsilon(eps, lam, 0, False) < before)
    assert np.all(tau_of_epsilon(eps, lam, 0, True) > after)


@pytest.mark.parametrize("lam", [-0.8, -0.2, 0.4, 0.9])
@pytest.mark.parametrize("revs", [1, 2, 4])
def test_curves_reach_the_multirevolution_minimum(lam, revs):
    """The lowest τ on each N-revolution curve equals the solver's minimum time (τ = 2T)."""
    curves = [c for c in family_curves(lam, revs, points=4000) if c.revolutions == revs]
    assert len(curves) == 2
    tau_min = min(c.tau.min() for c in curves)
    _, t_min = minimum_tof_nondim(lam, revs)
    assert tau_min == pytest.approx(2 * t_min, rel=1e-5)


def test_family_curves_cover_every_family():
    curves = family_curves(0.5, 2)
    names = [c.name for c in curves]
    assert "short-way ellipse, before minimum-energy time" in names
    assert "short-way ellipse, after minimum-energy time" in names
    assert "short-way hyperbola" in names
    assert any(n.startswith("2-revolution") for n in names)
    for c in curves:
        assert c.tau.shape == c.epsilon.shape and len(c.tau) > 10
        assert np.all(np.isfinite(c.tau))
    long_names = [c.name for c in family_curves(-0.5, 0)]
    assert "long-way hyperbola" in long_names


def test_classify_agrees_with_solver_variable():
    """x > 0 (faster than the minimum-energy arc) is 'before', x < 0 'after', x > 1 hyperbolic."""
    rng = np.random.default_rng(4)
    r1 = rng.normal(size=(3000, 3)) * 8000
    r2 = rng.normal(size=(3000, 3)) * 12000
    tof = rng.uniform(300, 80000, 3000)
    sol = solve_lambert(r1, r2, tof, MU, max_revs=2)
    fam = classify(r1[:, None], sol.v1_km_s, r2[:, None], tof[:, None], MU, sol.revolutions)
    ok = sol.converged
    x = sol.x[ok]
    codes = fam.family[ok]
    before = np.isin(codes, [Family.ELLIPSE_SHORT_BEFORE, Family.ELLIPSE_LONG_BEFORE])
    after = np.isin(codes, [Family.ELLIPSE_SHORT_AFTER, Family.ELLIPSE_LONG_AFTER])
    hyper = np.isin(codes, [Family.HYPERBOLA_SHORT, Family.HYPERBOLA_LONG])
    clear = np.abs(x) > 1e-6  # the minimum-energy arc itself sits on the boundary
    assert np.all((x[before & clear] > 0) & (x[before & clear] < 1))
    assert np.all(x[after & clear] < 0)
    assert np.all(x[hyper] > 1)
    # ε = x² - 1 (a = a_m / (1 - x²)), an identity between the two parametrizations
    np.testing.assert_allclose(fam.epsilon[ok], x**2 - 1, rtol=1e-7, atol=1e-9)


def test_curtis_example_family():
    """Curtis Example 5.2 [MEMORY, COMPUTED]: transfer angle 100.2925° [COMPUTED], short way."""
    r1 = np.array([5000.0, 10000.0, 2100.0])
    r2 = np.array([-14600.0, 2500.0, 7000.0])
    sol = solve_lambert(r1, r2, 3600.0, 398600.0)
    fam = classify(r1, sol.v1_km_s[0], r2, 3600.0, 398600.0)
    assert np.degrees(fam.transfer_angle_rad) == pytest.approx(100.2925, abs=1e-4)
    assert Family(int(fam.family)).long_way is False
    assert fam.lagrange_tof_s == pytest.approx(3600.0, rel=1e-12)


def test_family_label_wording():
    assert family_label(Family.ELLIPSE_LONG_AFTER) == "long-way ellipse, after minimum-energy time"
    assert family_label(Family.ELLIPSE_SHORT_BEFORE, 2, "low") == (
        "2-revolution short-way ellipse, before minimum-energy time, low branch"
    )


@settings(max_examples=200, deadline=None)
@given(lam=st.floats(-0.999, 0.999), eps=st.floats(-0.999, -1e-4), revs=st.integers(0, 4))
def test_lagrange_dimensional_and_normalized_forms_agree(lam, eps, revs):
    s = 20000.0
    c = s * (1 - lam * lam)
    a = -s / 2 / eps
    for after in (False, True):
        t = lagrange_tof_s(
            a, s, c, MU, revolutions=revs, long_way=lam < 0, after_minimum_energy=after
        )
        tau = tau_of_epsilon(eps, np.copysign(abs(lam), lam), revs, after)
        assert t == pytest.approx(tau * np.sqrt((s / 2) ** 3 / MU), rel=1e-12)
