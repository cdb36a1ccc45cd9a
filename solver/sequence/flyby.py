"""Flybys (gravity assists): turn angle, periapsis radius and the powered-flyby burn.

The published powered-flyby model of the multiple-gravity-assist literature (Izzo, Becerra,
Myatt, Nasuto & Bishop, "Search space pruning and global optimisation of multiple gravity assist
spacecraft trajectories", J. Global Optimization 38 (2007); docs/references.md 8.2): the
spacecraft arrives with v∞,in and leaves with v∞,out relative to the body. The two vectors span
the plane of the flyby and make the turn angle δ. The incoming and outgoing hyperbolas share one
periapsis radius r_p, found from

    asin(1/e_in) + asin(1/e_out) = δ,   e_in,out = 1 + r_p v∞,in/out² / μ,

and, when the two speeds differ, one tangential burn at that periapsis joins them:

    Δv = |sqrt(v∞,out² + 2μ/r_p) - sqrt(v∞,in² + 2μ/r_p)|.

With equal speeds this is the unpowered flyby of the textbooks (e = 1 + r_p v∞²/μ,
δ = 2 asin(1/e); Curtis, *Orbital Mechanics for Engineering Students*, ch. 8). The left side
falls monotonically from π (r_p → 0) to 0 (r_p → ∞), so every turn below π has exactly one
periapsis; it lies between the radii of the two unpowered flybys that would turn δ/2 each, which
start a monotone Newton-type iteration on 1/r_p (no arc tangent per step; see
_periapsis_for_turn). asin(1/e) is evaluated as atan(1 / sqrt(q (2 + q)))
with q = e - 1 = r_p v∞²/μ, which keeps its digits at every e.

The minimum periapsis altitude is a limit of the sequence (solver.sequence.limits): a flyby that
needs a lower periapsis is refused, never moved. The compiled scalar functions here are the one
home of the model: the exact evaluation and the search both call them.
"""

from __future__ import annotations

import contextlib
import math
from dataclasses import dataclass

import numba
import numpy as np
from numpy.typing import ArrayLike, NDArray

from solver.mechanics.parallel import PARALLEL_LOCK

# Steps on w = 1/r_p (see _periapsis_for_turn): 3-8 in practice; the cap is a guard.
_MAX_ITERATIONS = 60
_REL_TOL = 1e-14
_PARALLEL_MIN = 65_536  # a flyby is a fraction of a microsecond: hand-offs dominate below this


@numba.njit(cache=True, error_model="numpy", inline="always")
def half_turn_rad(q: float) -> float:
    """asin(1/e) of a hyperbola with e = 1 + q (q = r_p v∞²/μ >= 0), without cancellation."""
    return math.atan2(1.0, math.sqrt(q * (2.0 + q)))


@numba.njit(cache=True, error_model="numpy")
def turn_angle_rad(vin_x, vin_y, vin_z, vout_x, vout_y, vout_z) -> float:
    """Angle between v∞,in and v∞,out, rad in [0, π] (atan2 form, accurate at 0 and π)."""
    cx = vin_y * vout_z - vin_z * vout_y
    cy = vin_z * vout_x - vin_x * vout_z
    cz = vin_x * vout_y - vin_y * vout_x
    dot = vin_x * vout_x + vin_y * vout_y + vin_z * vout_z
    return math.atan2(math.sqrt(cx * cx + cy * cy + cz * cz), dot)


@numba.njit(cache=True, error_model="numpy")
def periapsis_for_turn(turn_rad: float, vin: float, vout: float, mu: float) -> float:
    """Periapsis radius (km) at which hyperbolas of v∞ ``vin`` and ``vout`` turn ``turn_rad``.

    inf for no turn; 0 for a turn of π or more (no periapsis can make it); NaN for bad input.
    See :func:`_periapsis_for_turn`.
    """
    return _periapsis_for_turn(
        turn_rad,
        math.sin(turn_rad),
        math.cos(turn_rad),
        1.0 / math.sin(0.5 * turn_rad) - 1.0,
        vin,
        vout,
        mu,
    )


@numba.njit(cache=True, error_model="numpy", inline="always")
def _periapsis_for_turn(turn_rad, sin_turn, cos_turn, e_half_minus_one, vin, vout, mu):
    """:func:`periapsis_for_turn` given also sin δ, cos δ and 1/sin(δ/2) - 1 (from the v∞
    vectors in :func:`flyby_one`, without trigonometric calls).

    A Newton-type iteration on w = 1/r_p. With a = v∞²/μ each hyperbola turns by α,
    sin α = w/(a + w), cos α = A/(a + w), A = sqrt(a² + 2aw) (B, b likewise for the other); the
    turn θ(w) = α + β is increasing and concave in w. Newton's step on θ - δ would be
    -(θ - δ)/θ'; here θ - δ is replaced by its sine, which is rational in w, A and B (no arc
    tangent per step) and agrees with it to third order near the root, so the convergence stays
    quadratic. From a point left of the root (where the turn is short of δ; the smaller of the
    two unpowered half-turn values of w is one, where θ - δ lies in [-δ/2, 0]) that step is no
    longer than Newton's, which already falls short of the root on a concave function: the
    iterates rise to the root monotonically. The iteration stops when the step falls below
    1e-14 of w, or stops rising (at the root to rounding).
    """
    if not (math.isfinite(turn_rad) and vin > 0.0 and vout > 0.0 and mu > 0.0):
        return math.nan
    if turn_rad <= 0.0:
        return math.inf
    if turn_rad >= math.pi:
        return 0.0
    a = vin * vin / mu
    b = vout * vout / mu
    # Unpowered flybys turning δ/2 each: e = 1/sin(δ/2), w = 1/r_p = (v∞²/μ) / (e - 1).
    lo = min(a, b) / e_half_minus_one
    # One step from the mean speed's unpowered value (at or right of the root, and close to it
    # for similar speeds), -tan(θ - δ)/θ': at least as long as Newton's, which from the right
    # of the root of a concave function lands left of it, so this lands left of it too (below
    # the bracket's left end, the fallback, at worst). It saves one evaluation on average.
    w = 0.5 * (a + b) / e_half_minus_one
    aw = math.sqrt(a * (a + 2.0 * w))
    bw = math.sqrt(b * (b + 2.0 * w))
    # sin(θ - δ) and cos(θ - δ) times (a + w)(b + w); θ' times (a + w)(b + w) A B.
    sin_part = w * (aw + bw) * cos_turn - (aw * bw - w * w) * sin_turn
    cos_part = (aw * bw - w * w) * cos_turn + w * (aw + bw) * sin_turn
    slope_part = a * (b + w) * bw + b * (a + w) * aw
    if cos_part > 0.0:
        w = w - sin_part * (a + w) * (b + w) * aw * bw / (cos_part * slope_part)
    if not w > lo:
        w = lo
    for _ in range(_MAX_ITERATIONS):
        aw = math.sqrt(a * (a + 2.0 * w))
        bw = math.sqrt(b * (b + 2.0 * w))
        sin_part = w * (aw + bw) * cos_turn - (aw * bw - w * w) * sin_turn
        slope_part = a * (b + w) * bw + b * (a + w) * aw
        step = -sin_part * aw * bw / slope_part
        if not step > 0.0:
            break  # at the root to rounding (the iterates only rise)
        w += step
        if step <= _REL_TOL * w:
            break
    return 1.0 / w


@numba.njit(cache=True, error_model="numpy", inline="always")
def flyby_burn_km_s(vin: float, vout: float, mu: float, rp: float) -> float:
    """Signed Δv of the tangential periapsis burn joining hyperbolas of v∞ ``vin`` and ``vout``.

    Written as (vout² - vin²) / (v_p,out + v_p,in) so that it keeps its digits when the speeds
    nearly agree; positive speeds the spacecraft up. At r_p = inf it is vout - vin.
    """
    if rp == math.inf:
        return vout - vin
    k = 2.0 * mu / rp
    return (vout - vin) * (vout + vin) / (math.sqrt(vout * vout + k) + math.sqrt(vin * vin + k))


@numba.njit(cache=True, error_model="numpy", inline="always")
def largest_turn_rad(vin: float, vout: float, mu: float, rp_min: float) -> float:
    """The largest turn a flyby can give with a periapsis no lower than ``rp_min`` (km)."""
    return half_turn_rad(rp_min * vin * vin / mu) + half_turn_rad(rp_min * vout * vout / mu)


@numba.njit(cache=True, error_model="numpy")
def flyby_one(vin_x, vin_y, vin_z, vout_x, vout_y, vout_z, mu):
    """One flyby: (turn angle rad, periapsis radius km, signed periapsis Δv km/s, |v∞in|,
    |v∞out|). NaN where a speed is zero or an input is not finite."""
    vin = math.sqrt(vin_x * vin_x + vin_y * vin_y + vin_z * vin_z)
    vout = math.sqrt(vout_x * vout_x + vout_y * vout_y + vout_z * vout_z)
    # The turn as turn_angle_rad computes it, and its sine and cosine from the same cross and
    # dot products (no trigonometric calls).
    cx = vin_y * vout_z - vin_z * vout_y
    cy = vin_z * vout_x - vin_x * vout_z
    cz = vin_x * vout_y - vin_y * vout_x
    cross = math.sqrt(cx * cx + cy * cy + cz * cz)
    dot = vin_x * vout_x + vin_y * vout_y + vin_z * vout_z
    turn = math.atan2(cross, dot)
    norm = math.sqrt(cross * cross + dot * dot)
    sin_turn = cross / norm
    cos_turn = dot / norm
    # 1/sin(δ/2) - 1 (the unpowered half-turns' e - 1), keeping its digits: below a quarter
    # turn sin(δ/2) = sin δ / sqrt(2 (1 + cos δ)); above, sin(δ/2) = sqrt((1 - cos δ)/2) and
    # 1 - sin(δ/2) = cos²(δ/2) / (1 + sin(δ/2)) with cos(δ/2) = sin δ / (2 sin(δ/2)).
    if cos_turn >= 0.0:
        e_half_minus_one = math.sqrt(2.0 * (1.0 + cos_turn)) / sin_turn - 1.0
    else:
        sin_half = math.sqrt(0.5 * (1.0 - cos_turn))
        cos_half = sin_turn / (2.0 * sin_half)
        e_half_minus_one = cos_half * cos_half / ((1.0 + sin_half) * sin_half)
    rp = _periapsis_for_turn(turn, sin_turn, cos_turn, e_half_minus_one, vin, vout, mu)
    if not math.isfinite(vin + vout) or not (rp >= 0.0):
        return math.nan, math.nan, math.nan, vin, vout
    if rp == 0.0:
        # A turn of π: the hyperbolas would meet in the body's centre. No periapsis, no burn.
        return turn, 0.0, math.nan, vin, vout
    return turn, rp, flyby_burn_km_s(vin, vout, mu, rp), vin, vout


@numba.njit(cache=True, parallel=True, error_model="numpy")
def _flyby_kernel(vin, vout, mu, turn, rp, dv, speed_in, speed_out):
    for i in numba.prange(vin.shape[0]):
        t, r, d, a, b = flyby_one(
            vin[i, 0], vin[i, 1], vin[i, 2], vout[i, 0], vout[i, 1], vout[i, 2], mu[i]
        )
        turn[i] = t
        rp[i] = r
        dv[i] = d
        speed_in[i] = a
        speed_out[i] = b


@numba.njit(cache=True, error_model="numpy")
def _flyby_kernel_serial(vin, vout, mu, turn, rp, dv, speed_in, speed_out):
    for i in range(vin.shape[0]):
        t, r, d, a, b = flyby_one(
            vin[i, 0], vin[i, 1], vin[i, 2], vout[i, 0], vout[i, 1], vout[i, 2], mu[i]
        )
        turn[i] = t
        rp[i] = r
        dv[i] = d
        speed_in[i] = a
        speed_out[i] = b


@dataclass(frozen=True)
class Flybys:
    """Flybys of many (v∞,in, v∞,out) pairs; every array has the broadcast shape of the inputs.

    Attributes
    ----------
    turn_angle_deg : ndarray
        Angle between v∞,in and v∞,out, deg.
    periapsis_radius_km : ndarray
        Periapsis radius that makes the turn (inf when there is no turn; 0 for a half-turn).
    dv_km_s : ndarray
        Magnitude of the tangential periapsis burn (0 for equal speeds).
    dv_signed_km_s : ndarray
        The same burn, positive when it speeds the spacecraft up.
    vinf_in_km_s, vinf_out_km_s : ndarray
        |v∞,in| and |v∞,out|.
    """

    turn_angle_deg: NDArray[np.float64]
    periapsis_radius_km: NDArray[np.float64]
    dv_km_s: NDArray[np.float64]
    dv_signed_km_s: NDArray[np.float64]
    vinf_in_km_s: NDArray[np.float64]
    vinf_out_km_s: NDArray[np.float64]


def solve_flybys(vinf_in_km_s: ArrayLike, vinf_out_km_s: ArrayLike, mu_km3_s2: ArrayLike) -> Flybys:
    """The powered-flyby model for arrays of v∞ pairs about bodies of GM ``mu_km3_s2``.

    Parameters
    ----------
    vinf_in_km_s, vinf_out_km_s : array_like, shape (..., 3)
        Arrival and departure v∞ relative to the body (any common frame), km/s.
    mu_km3_s2 : array_like, shape (...)
        GM of the body, km³/s².

    Returns
    -------
    Flybys
        Arrays of the broadcast shape (...). Missing arcs (NaN v∞) give NaN.

    Examples
    --------
    An unpowered Venus flyby at v∞ = 3.733 km/s turning 103.6°: the periapsis radius is about
    6350 km, some 300 km above the surface.

    >>> import math
    >>> turn = math.radians(103.6)
    >>> v_in = [3.733, 0.0, 0.0]
    >>> v_out = [3.733 * math.cos(turn), 3.733 * math.sin(turn), 0.0]
    >>> round(float(solve_flybys(v_in, v_out, 324_859.0).periapsis_radius_km), -1)
    6350.0
    """
    vin = np.asarray(vinf_in_km_s, dtype=float)
    vout = np.asarray(vinf_out_km_s, dtype=float)
    mu = np.asarray(mu_km3_s2, dtype=float)
    shape = np.broadcast_shapes(vin.shape[:-1], vout.shape[:-1], mu.shape)
    n = int(np.prod(shape, dtype=np.int64))
    vin_f = np.ascontiguousarray(np.broadcast_to(vin, (*shape, 3)).reshape(n, 3))
    vout_f = np.ascontiguousarray(np.broadcast_to(vout, (*shape, 3)).reshape(n, 3))
    mu_f = np.ascontiguousarray(np.broadcast_to(mu, shape).reshape(n))
    turn, rp, dv, a, b = (np.empty(n) for _ in range(5))
    parallel = n >= _PARALLEL_MIN
    with PARALLEL_LOCK if parallel else contextlib.nullcontext():
        (_flyby_kernel if parallel else _flyby_kernel_serial)(
            vin_f, vout_f, mu_f, turn, rp, dv, a, b
        )
    return Flybys(
        turn_angle_deg=np.degrees(turn).reshape(shape),
        periapsis_radius_km=rp.reshape(shape),
        dv_km_s=np.abs(dv).reshape(shape),
        dv_signed_km_s=dv.reshape(shape),
        vinf_in_km_s=a.reshape(shape),
        vinf_out_km_s=b.reshape(shape),
    )


def unpowered_turn_deg(vinf_km_s: ArrayLike, periapsis_radius_km: ArrayLike, mu_km3_s2: ArrayLike):
    """Turn of an unpowered flyby, deg: δ = 2 asin(1/e), e = 1 + r_p v∞²/μ (Curtis ch. 8)."""
    q = np.asarray(periapsis_radius_km, float) * np.asarray(vinf_km_s, float) ** 2
    q = q / np.asarray(mu_km3_s2, float)
    return np.degrees(2.0 * np.arctan2(1.0, np.sqrt(q * (2.0 + q))))


def largest_turn_deg(vinf_in_km_s, vinf_out_km_s, mu_km3_s2, rp_min_km):
    """The largest turn with a periapsis no lower than ``rp_min_km``, deg (vectorized)."""
    mu = np.asarray(mu_km3_s2, float)
    rp = np.asarray(rp_min_km, float)
    qa = rp * np.asarray(vinf_in_km_s, float) ** 2 / mu
    qb = rp * np.asarray(vinf_out_km_s, float) ** 2 / mu
    return np.degrees(
        np.arctan2(1.0, np.sqrt(qa * (2.0 + qa))) + np.arctan2(1.0, np.sqrt(qb * (2.0 + qb)))
    )


def smallest_dv_km_s(vinf_in_km_s, vinf_out_km_s, mu_km3_s2, rp_min_km):
    """The smallest periapsis burn any allowed flyby can make for these speeds, km/s.

    The burn (v_out² - v_in²)/(v_p,out + v_p,in) shrinks as the periapsis falls, so the lowest
    allowed periapsis gives the least; used to prune leg pairs no flyby can join.
    """
    vin = np.asarray(vinf_in_km_s, float)
    vout = np.asarray(vinf_out_km_s, float)
    k = 2.0 * np.asarray(mu_km3_s2, float) / np.asarray(rp_min_km, float)
    return np.abs((vout - vin) * (vout + vin) / (np.sqrt(vout * vout + k) + np.sqrt(vin * vin + k)))


__all__ = [
    "Flybys",
    "flyby_burn_km_s",
    "flyby_one",
    "half_turn_rad",
    "largest_turn_deg",
    "largest_turn_rad",
    "periapsis_for_turn",
    "smallest_dv_km_s",
    "solve_flybys",
    "turn_angle_rad",
    "unpowered_turn_deg",
]
