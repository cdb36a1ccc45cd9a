"""The families of transfer between two fixed points, from Lagrange's time-of-flight equation.

For two positions r1, r2 with chord c and semiperimeter s = (r1 + r2 + c)/2, Lambert's theorem
says the flight time depends only on a, s and c. Lagrange's equation (Battin 1999, §4.5;
Bate, Mueller & White 1971, §5.3; Prussing & Conway, Orbital Mechanics, ch. 4):

    ellipse    t = sqrt(a³/μ) [2πN + (α - sin α) - (β - sin β)]
                   sin(α/2) = sqrt(s / 2a),  sin(β/2) = sqrt((s - c) / 2a)
                   α → 2π - α after the minimum-energy time;  β → -β the long way
    parabola   t = (1/3) sqrt(2/μ) [s^(3/2) ∓ (s - c)^(3/2)]          (- short way, + long way)
    hyperbola  t = sqrt(-a³/μ) [(sinh α - α) ∓ (sinh β - β)]
                   sinh(α/2) = sqrt(s / -2a),  sinh(β/2) = sqrt((s - c) / -2a)

Normalized quantities (our names, see the glossary): the minimum-energy semi-major axis
a_m = s/2, the geometry parameter λ = ±sqrt(1 - c/s) (+ short way, - long way), the normalized
energy ε = -a_m / a (-1 at the minimum-energy ellipse, 0 for the parabola, > 0 hyperbolic) and
the normalized time τ = t sqrt(μ / a_m³). In these terms sin(α/2) = sqrt(-ε) and
sin(β/2) = |λ| sqrt(-ε), so τ(ε; λ, N) is one chart per geometry.

This module is independent of the Lambert solver's own variable, so it can check the solver.
"""

from __future__ import annotations

from dataclasses import dataclass
from enum import IntEnum

import numpy as np
from numpy.typing import ArrayLike, NDArray

TWO_PI = 2.0 * np.pi
# |ε| below this counts as parabolic when classifying a solution.
PARABOLIC_EPSILON_TOL = 1e-9


class Family(IntEnum):
    """Families of Lambert arcs between two fixed points."""

    ELLIPSE_SHORT_BEFORE = 1
    ELLIPSE_SHORT_AFTER = 2
    ELLIPSE_LONG_BEFORE = 3
    ELLIPSE_LONG_AFTER = 4
    PARABOLA_SHORT = 5
    PARABOLA_LONG = 6
    HYPERBOLA_SHORT = 7
    HYPERBOLA_LONG = 8

    @property
    def label(self) -> str:
        """Name shown on screen and in exports (glossary wording)."""
        return _LABELS[self]

    @property
    def long_way(self) -> bool:
        return self in (
            Family.ELLIPSE_LONG_BEFORE,
            Family.ELLIPSE_LONG_AFTER,
            Family.PARABOLA_LONG,
            Family.HYPERBOLA_LONG,
        )


_LABELS = {
    Family.ELLIPSE_SHORT_BEFORE: "short-way ellipse, before minimum-energy time",
    Family.ELLIPSE_SHORT_AFTER: "short-way ellipse, after minimum-energy time",
    Family.ELLIPSE_LONG_BEFORE: "long-way ellipse, before minimum-energy time",
    Family.ELLIPSE_LONG_AFTER: "long-way ellipse, after minimum-energy time",
    Family.PARABOLA_SHORT: "short-way parabola",
    Family.PARABOLA_LONG: "long-way parabola",
    Family.HYPERBOLA_SHORT: "short-way hyperbola",
    Family.HYPERBOLA_LONG: "long-way hyperbola",
}


def family_label(family: int, revolutions: int = 0, branch: str | None = None) -> str:
    """Full name of an arc's family, with its revolutions and branch when it has them."""
    text = Family(int(family)).label
    if revolutions:
        text = f"{revolutions}-revolution {text}"
        if branch in ("low", "high"):
            text += f", {branch} branch"
    return text


# ---------------------------------------------------------------------------------------------
# Cancellation-free pieces: α - sin α and sinh α - α lose every digit as α → 0 (near parabolic).


def _alpha_minus_sin(alpha: NDArray[np.float64]) -> NDArray[np.float64]:
    """α - sin α, by its series for small α."""
    alpha = np.asarray(alpha, dtype=float)
    a2 = alpha * alpha
    series = (
        alpha * a2 / 6.0 * (1 - a2 / 20.0 * (1 - a2 / 42.0 * (1 - a2 / 72.0 * (1 - a2 / 110.0))))
    )
    return np.where(np.abs(alpha) < 0.1, series, alpha - np.sin(alpha))


def _sinh_minus_alpha(alpha: NDArray[np.float64]) -> NDArray[np.float64]:
    """sinh α - α, by its series for small α."""
    alpha = np.asarray(alpha, dtype=float)
    a2 = alpha * alpha
    series = (
        alpha * a2 / 6.0 * (1 + a2 / 20.0 * (1 + a2 / 42.0 * (1 + a2 / 72.0 * (1 + a2 / 110.0))))
    )
    return np.where(np.abs(alpha) < 0.1, series, np.sinh(alpha) - alpha)


# ---------------------------------------------------------------------------------------------
# Geometry and normalization


@dataclass(frozen=True)
class Geometry:
    """Geometry of a transfer between two fixed points (arrays of a common shape).

    Attributes
    ----------
    chord_km, semiperimeter_km, a_min_km : ndarray
        Chord c, semiperimeter s and minimum-energy semi-major axis a_m = s/2, km.
    transfer_angle_rad : ndarray
        Angle swept from r1 to r2 in the direction of motion, in [0, 2π).
    lam : ndarray
        λ = ±sqrt(1 - c/s): positive the short way, negative the long way.
    """

    chord_km: NDArray[np.float64]
    semiperimeter_km: NDArray[np.float64]
    a_min_km: NDArray[np.float64]
    transfer_angle_rad: NDArray[np.float64]
    lam: NDArray[np.float64]

    @property
    def long_way(self) -> NDArray[np.bool_]:
        return self.transfer_angle_rad > np.pi


def geometry(
    r1_km: ArrayLike, r2_km: ArrayLike, pole: ArrayLike = (0.0, 0.0, 1.0), retrograde: bool = False
) -> Geometry:
    """Chord, semiperimeter, transfer angle and λ for positions r1, r2, shape (..., 3).

    The transfer angle is measured in the sense of motion: counter-clockwise about ``pole``
    (clockwise if ``retrograde``), so it exceeds 180° when the arc goes the long way.
    """
    r1 = np.asarray(r1_km, dtype=float)
    r2 = np.asarray(r2_km, dtype=float)
    r1n = np.linalg.norm(r1, axis=-1)
    r2n = np.linalg.norm(r2, axis=-1)
    chord = np.linalg.norm(r2 - r1, axis=-1)
    s = 0.5 * (r1n + r2n + chord)
    cross = np.cross(r1, r2)
    sin_angle = np.linalg.norm(cross, axis=-1)
    angle = np.arctan2(sin_angle, np.einsum("...i,...i->...", r1, r2))
    pole_vec = np.asarray(pole, dtype=float)
    ahead = np.einsum("...i,i->...", cross, pole_vec) >= 0.0
    if retrograde:
        ahead = ~ahead
    angle = np.where(ahead, angle, TWO_PI - angle)
    return _geometry_from(chord, s, angle)


def _geometry_from(chord, s, angle) -> Geometry:
    lam_abs = np.sqrt(np.clip(1.0 - chord / s, 0.0, 1.0))
    lam = np.where(angle > np.pi, -lam_abs, lam_abs)
    return Geometry(chord, s, s / 2.0, angle, lam)


def normalized_energy(a_km: ArrayLike, a_min_km: ArrayLike) -> NDArray[np.float64]:
    """ε = -a_m / a: -1 at the minimum-energy ellipse, 0 for a parabola, > 0 hyperbolic."""
    a = np.asarray(a_km, dtype=float)
    with np.errstate(divide="ignore"):
        return -np.asarray(a_min_km, dtype=float) / a


def normalized_time(
    tof_s: ArrayLike, a_min_km: ArrayLike, mu_km3_s2: ArrayLike
) -> NDArray[np.float64]:
    """τ = t sqrt(μ / a_m³)."""
    return np.asarray(tof_s, dtype=float) * np.sqrt(
        np.asarray(mu_km3_s2, dtype=float) / np.asarray(a_min_km, dtype=float) ** 3
    )


# ---------------------------------------------------------------------------------------------
# Lagrange's equation in normalized form


def tau_of_epsilon(
    epsilon: ArrayLike, lam: ArrayLike, revolutions: int = 0, after_minimum_energy: bool = False
) -> NDArray[np.float64]:
    """Normalized time τ from Lagrange's equation at normalized energy ε for geometry λ.

    Parameters
    ----------
    epsilon : array_like
        ε = -a_m/a. ε < 0 ellipse (≥ -1), ε = 0 parabola, ε > 0 hyperbola.
    lam : array_like
        λ, signed (negative the long way).
    revolutions : int
        Complete revolutions N (ellipses only; NaN is returned for open conics with N > 0).
    after_minimum_energy : bool
        For ellipses, the branch with α = 2π - α0 (flight times above the minimum-energy time).

    Returns
    -------
    ndarray
        τ = t sqrt(μ/a_m³); NaN where ε < -1.
    """
    eps = np.asarray(epsilon, dtype=float)
    lam = np.asarray(lam, dtype=float)
    eps, lam = np.broadcast_arrays(eps, lam)
    tau = np.full(eps.shape, np.nan)
    lam_abs = np.abs(lam)
    sign = np.where(lam < 0.0, -1.0, 1.0)

    ell = (eps < 0.0) & (eps >= -1.0)
    if np.any(ell):
        e = eps[ell]
        alpha0 = 2.0 * np.arcsin(np.sqrt(-e))
        beta = sign[ell] * 2.0 * np.arcsin(lam_abs[ell] * np.sqrt(-e))
        if after_minimum_energy:
            alpha_term = TWO_PI - alpha0 + np.sin(alpha0)
        else:
            alpha_term = _alpha_minus_sin(alpha0)
        bracket = TWO_PI * revolutions + alpha_term - _alpha_minus_sin(beta)
        tau[ell] = (-1.0 / e) ** 1.5 * bracket

    if revolutions == 0:
        par = eps == 0.0
        tau[par] = 4.0 / 3.0 * (1.0 - lam[par] ** 3)
        hyp = eps > 0.0
        if np.any(hyp):
            e = eps[hyp]
            alpha = 2.0 * np.arcsinh(np.sqrt(e))
            beta = sign[hyp] * 2.0 * np.arcsinh(lam_abs[hyp] * np.sqrt(e))
            tau[hyp] = e**-1.5 * (_sinh_minus_alpha(alpha) - _sinh_minus_alpha(beta))
    return tau


def lagrange_tof_s(
    a_km: ArrayLike,
    s_km: ArrayLike,
    c_km: ArrayLike,
    mu_km3_s2: ArrayLike,
    *,
    revolutions: int = 0,
    long_way: ArrayLike = False,
    after_minimum_energy: bool = False,
) -> NDArray[np.float64]:
    """Flight time from Lagrange's equation in (a, s, c), every family.

    Parameters
    ----------
    a_km : array_like
        Semi-major axis, km (negative for hyperbolas, ``inf`` for the parabola).
    s_km, c_km : array_like
        Semiperimeter and chord, km.
    mu_km3_s2 : array_like
        Gravitational parameter, km³/s².
    revolutions : int
        Complete revolutions (ellipses).
    long_way : array_like of bool
        Transfer angle above 180 degrees.
    after_minimum_energy : bool
        For ellipses, the slower of the two arcs with this a (α = 2π - α0).

    Returns
    -------
    ndarray
        Time of flight, s. NaN where a < a_m for an ellipse (no such arc).
    """
    a = np.asarray(a_km, dtype=float)
    s = np.asarray(s_km, dtype=float)
    c = np.asarray(c_km, dtype=float)
    mu = np.asarray(mu_km3_s2, dtype=float)
    a_min = s / 2.0
    lam_abs = np.sqrt(np.clip(1.0 - c / s, 0.0, 1.0))
    lam = np.where(np.asarray(long_way, dtype=bool), -lam_abs, lam_abs)
    eps = normalized_energy(a, a_min)
    tau = tau_of_epsilon(eps, lam, revolutions, after_minimum_energy)
    return tau * np.sqrt(a_min**3 / mu)


def parabolic_tof_s(
    s_km: ArrayLike, c_km: ArrayLike, mu_km3_s2: ArrayLike, long_way: ArrayLike = False
) -> NDArray[np.float64]:
    """Parabolic flight time (1/3) sqrt(2/μ) [s^(3/2) ∓ (s - c)^(3/2)], s (Euler's equation)."""
    s = np.asarray(s_km, dtype=float)
    c = np.asarray(c_km, dtype=float)
    sign = np.where(np.asarray(long_way, dtype=bool), 1.0, -1.0)
    return (
        np.sqrt(2.0 / np.asarray(mu_km3_s2, dtype=float)) / 3.0 * (s**1.5 + sign * (s - c) ** 1.5)
    )


def minimum_energy_tof_s(
    s_km: ArrayLike,
    c_km: ArrayLike,
    mu_km3_s2: ArrayLike,
    long_way: ArrayLike = False,
    revolutions: int = 0,
) -> NDArray[np.float64]:
    """Flight time on the minimum-energy ellipse (a = s/2), s."""
    s = np.asarray(s_km, dtype=float)
    return lagrange_tof_s(s / 2.0, s, c_km, mu_km3_s2, revolutions=revolutions, long_way=long_way)


# ---------------------------------------------------------------------------------------------
# Curves for the family chart


@dataclass(frozen=True)
class FamilyCurve:
    """One curve of the family chart: ε against τ for a geometry and revolution count."""

    revolutions: int
    name: str
    family: Family | None
    tau: NDArray[np.float64]
    epsilon: NDArray[np.float64]


def family_curves(
    lam: float,
    max_revs: int = 0,
    *,
    epsilon_max: float = 1.5,
    tau_max: float | None = None,
    points: int = 400,
) -> list[FamilyCurve]:
    """ε(τ) curves of every family for geometry λ and N = 0..max_revs.

    The single-revolution curve is split into its families (ellipse before and after the
    minimum-energy time, hyperbola); each N-revolution curve into its two sides of the
    minimum-energy point. Points are clustered near ε = -1 and ε = 0 where the curves bend.

    Parameters
    ----------
    lam : float
        Geometry parameter λ (negative the long way).
    max_revs : int
        Largest revolution count drawn.
    epsilon_max : float
        Largest normalized energy on the hyperbolic branch.
    tau_max : float, optional
        Clip curves at this τ (default: a little beyond the slowest point drawn on N = max_revs).
    points : int
        Samples per branch.
    """
    lam = float(lam)
    u = np.linspace(0.0, 1.0, points)
    # ε from -1 toward 0, clustered at both ends (ε = -cos²(πu/2) keeps dε small near each end).
    eps_ell = -(np.cos(0.5 * np.pi * u[:-1]) ** 2)
    eps_ell[0] = -1.0
    eps_hyp = epsilon_max * u[1:] ** 2
    short_family = Family.ELLIPSE_LONG_BEFORE if lam < 0 else Family.ELLIPSE_SHORT_BEFORE
    after_family = Family.ELLIPSE_LONG_AFTER if lam < 0 else Family.ELLIPSE_SHORT_AFTER
    hyp_family = Family.HYPERBOLA_LONG if lam < 0 else Family.HYPERBOLA_SHORT
    curves = [
        FamilyCurve(
            0,
            Family(short_family).label,
            short_family,
            tau_of_epsilon(eps_ell, lam, 0, False),
            eps_ell,
        ),
        FamilyCurve(
            0,
            Family(after_family).label,
            after_family,
            tau_of_epsilon(eps_ell, lam, 0, True),
            eps_ell,
        ),
        FamilyCurve(
            0, Family(hyp_family).label, hyp_family, tau_of_epsilon(eps_hyp, lam, 0), eps_hyp
        ),
    ]
    for n in range(1, max_revs + 1):
        for after, fam in ((False, short_family), (True, after_family)):
            curves.append(
                FamilyCurve(
                    n,
                    f"{n}-revolution {Family(fam).label}",
                    fam,
                    tau_of_epsilon(eps_ell, lam, n, after),
                    eps_ell,
                )
            )
    if tau_max is None:
        slowest_min = tau_of_epsilon(-1.0, lam, max_revs, True)
        tau_max = float(1.6 * slowest_min + 2.0)
    clipped = []
    for curve in curves:
        keep = np.isfinite(curve.tau) & (curve.tau <= tau_max)
        clipped.append(
            FamilyCurve(
                curve.revolutions, curve.name, curve.family, curve.tau[keep], curve.epsilon[keep]
            )
        )
    return clipped


def parabolic_tau(lam: float) -> float:
    """τ of the parabola for geometry λ: (4/3)(1 - λ³)."""
    return 4.0 / 3.0 * (1.0 - float(lam) ** 3)


def minimum_energy_tau(lam: float, revolutions: int = 0) -> float:
    """τ of the minimum-energy ellipse (ε = -1) for geometry λ and N revolutions."""
    return float(tau_of_epsilon(-1.0, lam, revolutions, False))


def family_from_x(x: ArrayLike, long_way: ArrayLike) -> NDArray[np.int8]:
    """Family codes from the Lambert solver's own variable x and the sense of the transfer.

    x > 1 hyperbola, x = 1 parabola, 0 <= x < 1 ellipse before the minimum-energy time (a faster
    arc), x < 0 after it (Izzo 2015, §2: ε = x² - 1). A cheap labelling for whole grids; use
    :func:`classify` to check a solution independently of x. NaN gives 0.
    """
    x = np.asarray(x, dtype=float)
    long_way = np.broadcast_to(np.asarray(long_way, dtype=bool), x.shape)
    code = np.select(
        [x > 1.0, x == 1.0, x >= 0.0, x < 0.0],
        [
            np.where(long_way, Family.HYPERBOLA_LONG, Family.HYPERBOLA_SHORT),
            np.where(long_way, Family.PARABOLA_LONG, Family.PARABOLA_SHORT),
            np.where(long_way, Family.ELLIPSE_LONG_BEFORE, Family.ELLIPSE_SHORT_BEFORE),
            np.where(long_way, Family.ELLIPSE_LONG_AFTER, Family.ELLIPSE_SHORT_AFTER),
        ],
        0,
    )
    return code.astype(np.int8)


# ---------------------------------------------------------------------------------------------
# Classifying solutions


@dataclass(frozen=True)
class Classification:
    """Family of each arc, with its normalized coordinates and Lagrange's flight time.

    Attributes
    ----------
    family : ndarray of int8
        ``Family`` codes (0 where the arc is NaN).
    epsilon, tau : ndarray
        Normalized energy and time of the arc.
    lam : ndarray
        Geometry parameter, signed.
    lagrange_tof_s : ndarray
        Flight time recomputed from Lagrange's equation with the arc's own a, s, c and branch;
        compare with the requested time of flight to check a solution.
    transfer_angle_rad : ndarray
        Angle swept from r1 to r2 in the direction of motion.
    """

    family: NDArray[np.int8]
    epsilon: NDArray[np.float64]
    tau: NDArray[np.float64]
    lam: NDArray[np.float64]
    lagrange_tof_s: NDArray[np.float64]
    transfer_angle_rad: NDArray[np.float64]


def classify(
    r1_km: ArrayLike,
    v1_km_s: ArrayLike,
    r2_km: ArrayLike,
    tof_s: ArrayLike,
    mu_km3_s2: ArrayLike,
    revolutions: ArrayLike = 0,
    *,
    parabolic_tol: float = PARABOLIC_EPSILON_TOL,
) -> Classification:
    """Family of arcs given by their departure state, arrival position and flight time.

    The sense of motion comes from the arc's own angular momentum (r1 x v1), the energy from
    vis-viva at r1. Of the two elliptic arcs with that energy, the one whose Lagrange flight
    time matches ``tof_s`` decides "before" or "after" the minimum-energy time.

    Parameters
    ----------
    r1_km, v1_km_s, r2_km : array_like, shape (..., 3)
        Departure position and velocity on the arc, arrival position.
    tof_s : array_like, shape (...)
        Time of flight, s.
    mu_km3_s2 : array_like
        Gravitational parameter, km³/s².
    revolutions : array_like of int
        Complete revolutions of each arc.
    parabolic_tol : float
        |ε| below which an arc counts as parabolic.
    """
    r1, v1, r2 = np.broadcast_arrays(*(np.asarray(x, dtype=float) for x in (r1_km, v1_km_s, r2_km)))
    shape = np.broadcast_shapes(
        r1.shape[:-1], np.shape(tof_s), np.shape(mu_km3_s2), np.shape(revolutions)
    )
    # Work on flat arrays; the result takes the broadcast shape at the end.
    r1, v1, r2 = (np.broadcast_to(x, (*shape, 3)).reshape(-1, 3) for x in (r1, v1, r2))
    tof = np.broadcast_to(np.asarray(tof_s, dtype=float), shape).reshape(-1)
    mu = np.broadcast_to(np.asarray(mu_km3_s2, dtype=float), shape).reshape(-1)
    revs = np.broadcast_to(np.asarray(revolutions, dtype=np.int64), shape).reshape(-1)

    # The sense of motion is the arc's own: the angle is swept about h = r1 x v1.
    h = np.cross(r1, v1)
    cross = np.cross(r1, r2)
    ahead = np.einsum("...i,...i->...", cross, h) >= 0.0
    angle_short = np.arctan2(np.linalg.norm(cross, axis=-1), np.einsum("...i,...i->...", r1, r2))
    angle = np.where(ahead, angle_short, TWO_PI - angle_short)
    chord = np.linalg.norm(r2 - r1, axis=-1)
    s = 0.5 * (np.linalg.norm(r1, axis=-1) + np.linalg.norm(r2, axis=-1) + chord)
    geo = _geometry_from(chord, s, angle)

    inv_a = 2.0 / np.linalg.norm(r1, axis=-1) - np.einsum("...i,...i->...", v1, v1) / mu
    eps = -geo.a_min_km * inv_a
    tau = normalized_time(tof, geo.a_min_km, mu)
    long_way = geo.long_way
    scale = np.sqrt(geo.a_min_km**3 / mu)

    family = np.zeros(eps.shape, dtype=np.int8)
    lagrange = np.full(eps.shape, np.nan)
    valid = np.isfinite(eps) & np.isfinite(tau)
    parabolic = valid & (np.abs(eps) < parabolic_tol) & (revs == 0)
    hyperbolic = valid & (eps >= parabolic_tol) & (revs == 0)
    elliptic = valid & (eps <= -parabolic_tol)

    family[parabolic] = np.where(long_way[parabolic], Family.PARABOLA_LONG, Family.PARABOLA_SHORT)
    lagrange[parabolic] = tau_of_epsilon(0.0, geo.lam[parabolic], 0) * scale[parabolic]
    family[hyperbolic] = np.where(
        long_way[hyperbolic], Family.HYPERBOLA_LONG, Family.HYPERBOLA_SHORT
    )
    lagrange[hyperbolic] = (
        tau_of_epsilon(eps[hyperbolic], geo.lam[hyperbolic], 0) * scale[hyperbolic]
    )

    # Of the two ellipses with this energy, the one whose Lagrange time matches is the arc.
    e_ell = np.maximum(eps[elliptic], -1.0)  # rounding can put the minimum-energy arc a hair below
    lam_ell = geo.lam[elliptic]
    revs_ell = revs[elliptic]
    before = np.full(e_ell.shape, np.nan)
    after = np.full(e_ell.shape, np.nan)
    for n in np.unique(revs_ell):
        sel = revs_ell == n
        before[sel] = tau_of_epsilon(e_ell[sel], lam_ell[sel], int(n), False)
        after[sel] = tau_of_epsilon(e_ell[sel], lam_ell[sel], int(n), True)
    use_after = np.abs(after - tau[elliptic]) < np.abs(before - tau[elliptic])
    lagrange[elliptic] = np.where(use_after, after, before) * scale[elliptic]
    lw = long_way[elliptic]
    family[elliptic] = np.select(
        [~lw & ~use_after, ~lw & use_after, lw & ~use_after],
        [Family.ELLIPSE_SHORT_BEFORE, Family.ELLIPSE_SHORT_AFTER, Family.ELLIPSE_LONG_BEFORE],
        Family.ELLIPSE_LONG_AFTER,
    )
    return Classification(
        *(np.reshape(v, shape) for v in (family, eps, tau, geo.lam, lagrange, angle))
    )


__all__ = [
    "Classification",
    "Family",
    "FamilyCurve",
    "Geometry",
    "classify",
    "family_curves",
    "family_from_x",
    "family_label",
    "geometry",
    "lagrange_tof_s",
    "minimum_energy_tau",
    "minimum_energy_tof_s",
    "normalized_energy",
    "normalized_time",
    "parabolic_tau",
    "parabolic_tof_s",
    "tau_of_epsilon",
]
