"""Stumpff functions C(z) and S(z) of the universal-variable formulation.

C(z) = (1 - cos √z) / z and S(z) = (√z - sin √z) / √z³ for z > 0, their hyperbolic forms for z < 0,
and power series near z = 0 where the closed forms lose digits to cancellation. Both are
compiled with numba so the Kepler and Lambert kernels can call them per element.
"""

from __future__ import annotations

import math

import numba

# Below |z| < 1 the series converge fast: the ninth term is under 1/21! ≈ 2e-20 of the first.
_SERIES_LIMIT = 1.0
_SERIES_TERMS = 10


@numba.njit(cache=True, error_model="numpy", inline="always")
def stumpff_c(z: float) -> float:
    """C(z) = (1 - cos √z) / z, analytic through z = 0 (C(0) = 1/2)."""
    if abs(z) < _SERIES_LIMIT:
        term = 0.5
        total = 0.5
        for k in range(1, _SERIES_TERMS):
            term *= -z / ((2 * k + 1) * (2 * k + 2))
            total += term
        return total
    if z > 0.0:
        half = 0.5 * math.sqrt(z)
        sine = math.sin(half)
        # 2 sin²(√z/2) / z avoids the 1 - cos cancellation for moderate z.
        return 2.0 * sine * sine / z
    return (math.cosh(math.sqrt(-z)) - 1.0) / (-z)


@numba.njit(cache=True, error_model="numpy", inline="always")
def stumpff_s(z: float) -> float:
    """S(z) = (√z - sin √z) / √z³, analytic through z = 0 (S(0) = 1/6)."""
    if abs(z) < _SERIES_LIMIT:
        term = 1.0 / 6.0
        total = term
        for k in range(1, _SERIES_TERMS):
            term *= -z / ((2 * k + 2) * (2 * k + 3))
            total += term
        return total
    if z > 0.0:
        root = math.sqrt(z)
        return (root - math.sin(root)) / (root * root * root)
    root = math.sqrt(-z)
    return (math.sinh(root) - root) / (root * root * root)


@numba.vectorize(["float64(float64)"], cache=True)
def stumpff_c_array(z):  # pragma: no cover - thin ufunc wrapper, exercised in tests
    """Elementwise C(z) over an array (a numpy ufunc)."""
    return stumpff_c(z)


@numba.vectorize(["float64(float64)"], cache=True)
def stumpff_s_array(z):  # pragma: no cover - thin ufunc wrapper, exercised in tests
    """Elementwise S(z) over an array (a numpy ufunc)."""
    return stumpff_s(z)


__all__ = ["stumpff_c", "stumpff_c_array", "stumpff_s", "stumpff_s_array"]
