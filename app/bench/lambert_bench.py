"""Lambert solver speed: compiled Izzo kernel against a scalar universal-variable baseline."""

from __future__ import annotations

import math
import subprocess
import sys
import time

import numpy as np
from scipy.optimize import brentq

from app.bench import BenchLine, best_time_s

GM_EARTH_KM3_S2 = 398_600.4418  # for generating cases only; any planet-scale value would do
GM_SUN_KM3_S2 = 1.32712440018e11
SEED = 20261201


def random_cases(n: int, seed: int = SEED) -> tuple[np.ndarray, ...]:
    """Seeded cases from low Earth orbit to the outer planets.

    Half geocentric (radii 6,600 to 420,000 km), half heliocentric (0.39 to 30 au); directions
    uniform on the sphere; the second radius 0.5 to 2 times the first; flight times log-uniform
    in the non-dimensional time T = t sqrt(2μ/s³) from 0.1 (fast hyperbolas) to 30 (room for
    several revolutions).
    """
    rng = np.random.default_rng(seed)

    def unit(count: int) -> np.ndarray:
        v = rng.normal(size=(count, 3))
        return v / np.linalg.norm(v, axis=1)[:, None]

    geocentric = rng.random(n) < 0.5
    mu = np.where(geocentric, GM_EARTH_KM3_S2, GM_SUN_KM3_S2)
    scale = np.where(
        geocentric,
        10 ** rng.uniform(math.log10(6.6e3), math.log10(4.2e5), n),
        10 ** rng.uniform(math.log10(5.8e7), math.log10(4.5e9), n),
    )
    r1 = unit(n) * scale[:, None]
    r2 = unit(n) * (scale * rng.uniform(0.5, 2.0, n))[:, None]
    chord = np.linalg.norm(r2 - r1, axis=1)
    s = 0.5 * (np.linalg.norm(r1, axis=1) + np.linalg.norm(r2, axis=1) + chord)
    t_nondim = 10 ** rng.uniform(-1.0, math.log10(30.0), n)
    tof = t_nondim / np.sqrt(2.0 * mu / s**3)
    return r1, r2, tof, mu


def _stumpff_c(z: float) -> float:
    if z > 1e-3:
        return 2.0 * math.sin(0.5 * math.sqrt(z)) ** 2 / z  # 1 - cos loses every digit near 4π²
    if z < -1e-3:
        return (math.cosh(math.sqrt(-z)) - 1.0) / -z
    return 0.5 - z / 24.0 + z * z / 720.0


def _stumpff_s(z: float) -> float:
    if z > 1e-3:
        root = math.sqrt(z)
        return (root - math.sin(root)) / root**3
    if z < -1e-3:
        root = math.sqrt(-z)
        return (math.sinh(root) - root) / root**3
    return 1.0 / 6.0 - z / 120.0 + z * z / 5040.0


def baseline_lambert(r1, r2, tof, mu):
    """Single-revolution, prograde Lambert arc by universal variables and scipy's brentq.

    The textbook scalar method (Curtis, Orbital Mechanics for Engineering Students, Algorithm
    5.2; Bate, Mueller & White §5.3): find z with F(z) = 0 on a bracket, then v from the
    Lagrange coefficients. Returns (v1, v2) or None where the bracket fails.
    """
    r1n = math.sqrt(r1 @ r1)
    r2n = math.sqrt(r2 @ r2)
    cos_dtheta = float(r1 @ r2) / (r1n * r2n)
    dtheta = math.acos(max(-1.0, min(1.0, cos_dtheta)))
    if np.cross(r1, r2)[2] < 0.0:
        dtheta = 2.0 * math.pi - dtheta
    a_coef = math.sin(dtheta) * math.sqrt(r1n * r2n / (1.0 - cos_dtheta))
    sqrt_mu_t = math.sqrt(mu) * tof

    def y_of(z):
        return r1n + r2n + a_coef * (z * _stumpff_s(z) - 1.0) / math.sqrt(_stumpff_c(z))

    def f_of(z):
        y = y_of(z)
        if y <= 0.0:
            return -sqrt_mu_t
        return (y / _stumpff_c(z)) ** 1.5 * _stumpff_s(z) + a_coef * math.sqrt(y) - sqrt_mu_t

    z_hi = 4.0 * math.pi**2 * (1.0 - 1e-9)
    z_lo = -4.0
    while f_of(z_lo) > 0.0 and z_lo > -1e6:
        z_lo *= 2.0
    try:
        z = brentq(f_of, z_lo, z_hi, xtol=1e-14, rtol=1e-14, maxiter=200)
    except ValueError:
        return None
    y = y_of(z)
    f = 1.0 - y / r1n
    g = a_coef * math.sqrt(y / mu)
    g_dot = 1.0 - y / r2n
    return (r2 - f * r1) / g, (g_dot * r2 - r1) / g


def _first_call_s() -> float:
    """Wall time of import plus a first solve in a fresh process (kernels load from cache)."""
    code = (
        "import time; t=time.perf_counter(); from solver.mechanics.lambert import solve_lambert; "
        "solve_lambert([7000.,0,0],[0,8000.,0],3000.,398600.,max_revs=1); "
        "print(time.perf_counter()-t)"
    )
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    return float(out.stdout.strip().splitlines()[-1])


def run(size: str = "full") -> list[BenchLine]:
    from solver.mechanics.lambert import solve_lambert

    n = 1_000_000 if size == "full" else 20_000
    n_baseline = 2_000 if size == "full" else 200
    r1, r2, tof, mu = random_cases(n)
    solve_lambert(r1[:8], r2[:8], tof[:8], mu[:8], max_revs=3)  # compile or load, not timed

    single_s = best_time_s(lambda: solve_lambert(r1, r2, tof, mu), repeats=3)
    multi_s = best_time_s(lambda: solve_lambert(r1, r2, tof, mu, max_revs=3), repeats=3)

    start = time.perf_counter()
    solved = 0
    for i in range(n_baseline):
        try:
            if baseline_lambert(r1[i], r2[i], tof[i], mu[i]) is not None:
                solved += 1
        except (ZeroDivisionError, ValueError, OverflowError):
            pass  # the simple baseline has no guard for degenerate geometry; it still costs
    baseline_rate = n_baseline / (time.perf_counter() - start)

    single_rate = n / single_s
    multi_rate = n / multi_s
    first_call = _first_call_s()
    return [
        BenchLine(
            section="lambert",
            name=f"single-revolution solves, batch of {n:,}",
            value=single_rate,
            unit="solves/s",
            baseline_value=baseline_rate,
            ratio=single_rate / baseline_rate,
            goal=">= 3,000,000 solves/s and >= 100x the scalar baseline",
            meets_goal=single_rate >= 3e6 and single_rate / baseline_rate >= 100,
            notes=(
                f"baseline: scalar universal variables + scipy brentq on {n_baseline:,} of the "
                f"same cases ({solved:,} bracketed); compiled kernel uses {_threads()} threads"
            ),
        ),
        BenchLine(
            section="lambert",
            name=f"max_revs = 3 cases (7 arc slots each), batch of {n:,}",
            value=multi_rate,
            unit="cases/s",
            baseline_value=baseline_rate,
            ratio=multi_rate / baseline_rate,
            notes="ratio against the single-revolution baseline per case (it finds 1 arc, this 7)",
        ),
        BenchLine(
            section="lambert",
            name="import and first solve in a fresh process",
            value=first_call,
            unit="s",
            notes="the cost of numba: compiled kernels load from its on-disk cache after the "
            "first run (the very first run on a machine compiles them, a few seconds more)",
        ),
    ]


def _threads() -> int:
    import numba

    return numba.get_num_threads()
