"""Seeded sweep of Lambert cases covering every family and the hard corners.

Used by the accuracy tests. Flight times are drawn in Izzo's non-dimensional time
T = t sqrt(2μ/s³), in which the parabola sits at T = (2/3)(1 - λ³) and N revolutions need
roughly T > Nπ, so each slice lands where it is meant to.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

GM_EARTH_KM3_S2 = 398_600.4418
GM_SUN_KM3_S2 = 1.32712440018e11


@dataclass
class Sweep:
    r1_km: np.ndarray
    r2_km: np.ndarray
    tof_s: np.ndarray
    mu_km3_s2: np.ndarray
    kind: np.ndarray  # label of the slice each case came from


def _unit(rng, n):
    v = rng.normal(size=(n, 3))
    return v / np.linalg.norm(v, axis=1)[:, None]


def _rotate_toward(rng, r1, angle, r2_norm):
    """r2 at ``angle`` from r1 about a random axis perpendicular to r1."""
    axis = np.cross(r1, _unit(rng, len(r1)))
    axis /= np.linalg.norm(axis, axis=1)[:, None]
    u1 = r1 / np.linalg.norm(r1, axis=1)[:, None]
    return (np.cos(angle)[:, None] * u1 + np.sin(angle)[:, None] * axis) * r2_norm[:, None]


def make_sweep(n: int = 100_000, seed: int = 12345) -> Sweep:
    rng = np.random.default_rng(seed)
    slices = {
        "general": 0.35,
        "near-180": 0.15,
        "near-0": 0.05,
        "near-parabolic": 0.15,
        "hyperbolic": 0.15,
        "many-revolutions": 0.15,
    }
    r1s, r2s, ts, mus, kinds = [], [], [], [], []
    for kind, share in slices.items():
        m = int(n * share)
        mu = np.where(rng.random(m) < 0.5, GM_EARTH_KM3_S2, GM_SUN_KM3_S2)
        scale = np.where(
            mu < 1e6,
            10 ** rng.uniform(np.log10(6.6e3), np.log10(4.2e5), m),
            10 ** rng.uniform(np.log10(5.8e7), np.log10(4.5e9), m),
        )
        r1 = _unit(rng, m) * scale[:, None]
        r2_norm = scale * rng.uniform(0.5, 2.0, m)
        if kind == "near-180":
            angle = np.pi - 10 ** rng.uniform(-6.5, -2.0, m) * rng.choice([-1.0, 1.0], m)
            r2 = _rotate_toward(rng, r1, angle, r2_norm)
        elif kind == "near-0":
            r2 = _rotate_toward(rng, r1, 10 ** rng.uniform(-6.0, -2.0, m), r2_norm)
        else:
            r2 = _unit(rng, m) * r2_norm[:, None]
        r1n = np.linalg.norm(r1, axis=1)
        r2n = np.linalg.norm(r2, axis=1)
        chord = np.linalg.norm(r2 - r1, axis=1)
        s = 0.5 * (r1n + r2n + chord)
        lam = np.sqrt(np.clip(1.0 - chord / s, 0.0, 1.0))
        lam = np.where(np.cross(r1, r2)[:, 2] >= 0.0, lam, -lam)  # prograde about +z
        t_parabola = 2.0 / 3.0 * (1.0 - lam**3)
        if kind == "near-parabolic":
            t_nondim = t_parabola * (
                1.0 + rng.choice([-1.0, 1.0], m) * 10 ** rng.uniform(-9, -2, m)
            )
        elif kind == "hyperbolic":
            t_nondim = t_parabola * 10 ** rng.uniform(-1.3, -0.001, m)
        elif kind == "many-revolutions":
            t_nondim = rng.uniform(np.pi, 6.0 * np.pi, m)
        else:
            t_nondim = 10 ** rng.uniform(-1.0, np.log10(40.0), m)
        tof = t_nondim / np.sqrt(2.0 * mu / s**3)
        r1s.append(r1)
        r2s.append(r2)
        ts.append(tof)
        mus.append(mu)
        kinds.append(np.full(m, kind))
    return Sweep(
        np.concatenate(r1s),
        np.concatenate(r2s),
        np.concatenate(ts),
        np.concatenate(mus),
        np.concatenate(kinds),
    )
