"""An independent single-revolution Lambert solver for checking the engine's grids.

Written separately from solver/mechanics/lambert.py and from the benchmark's baseline: the classic
universal-variable formulation (Bate, Mueller & White, Fundamentals of Astrodynamics, 1971,
§5.3; Curtis, Orbital Mechanics for Engineering Students, Algorithm 5.2), solved by plain
bisection on z, scalar Python, no numba.
"""

from __future__ import annotations

import math

import numpy as np


def _c(z: float) -> float:
    if z > 1e-6:
        return (1.0 - math.cos(math.sqrt(z))) / z
    if z < -1e-6:
        return (math.cosh(math.sqrt(-z)) - 1.0) / (-z)
    return 0.5 - z / 24.0 + z * z / 720.0


def _s(z: float) -> float:
    if z > 1e-6:
        q = math.sqrt(z)
        return (q - math.sin(q)) / q**3
    if z < -1e-6:
        q = math.sqrt(-z)
        return (math.sinh(q) - q) / q**3
    return 1.0 / 6.0 - z / 120.0 + z * z / 5040.0


def lambert_uv(r1, r2, tof_s: float, mu: float, pole=(0.0, 0.0, 1.0)):
    """(v1, v2) of the single-revolution prograde arc (motion about ``pole``)."""
    r1 = np.asarray(r1, dtype=float)
    r2 = np.asarray(r2, dtype=float)
    n1, n2 = float(np.linalg.norm(r1)), float(np.linalg.norm(r2))
    cos_dnu = float(r1 @ r2) / (n1 * n2)
    dnu = math.acos(max(-1.0, min(1.0, cos_dnu)))
    if float(np.cross(r1, r2) @ np.asarray(pole, dtype=float)) < 0.0:
        dnu = 2.0 * math.pi - dnu
    a_coef = math.sin(dnu) * math.sqrt(n1 * n2 / (1.0 - math.cos(dnu)))

    def y(z):
        return n1 + n2 + a_coef * (z * _s(z) - 1.0) / math.sqrt(_c(z))

    def time_of(z):
        yz = y(z)
        if yz < 0.0:
            return -math.inf
        chi = math.sqrt(yz / _c(z))
        return (chi**3 * _s(z) + a_coef * math.sqrt(yz)) / math.sqrt(mu)

    lo, hi = -100.0, 4.0 * math.pi**2 - 1e-9
    while time_of(lo) > tof_s:
        lo *= 2.0
    for _ in range(300):  # time_of rises with z: bisection to the last bit
        mid = 0.5 * (lo + hi)
        if time_of(mid) < tof_s:
            lo = mid
        else:
            hi = mid
        if hi - lo <= 1e-15 * max(1.0, abs(mid)):
            break
    z = 0.5 * (lo + hi)
    yz = y(z)
    f = 1.0 - yz / n1
    g = a_coef * math.sqrt(yz / mu)
    g_dot = 1.0 - yz / n2
    return (r2 - f * r1) / g, (g_dot * r2 - r1) / g
