"""Lambert's problem by Izzo's method, compiled and vectorized over arrays of cases.

Given two position vectors, a time of flight and the central body's gravitational parameter,
find every conic arc that joins the positions in that time: the single-revolution arc and, for
each N = 1..max_revs, the two N-revolution arcs (low and high branch, by semi-major axis).

Method: D. Izzo, "Revisiting Lambert's problem", Celest. Mech. Dyn. Astr. 121 (2015) 1-15,
doi:10.1007/s10569-014-9587-y. The unknown is the Lancaster-Blanchard variable x (x < 1 ellipse,
x = 1 parabola, x > 1 hyperbola); the non-dimensional time T(x) is evaluated with Battin's
hypergeometric series near x = 1, Lagrange's form nearby and Lancaster's form elsewhere (paper
eqs. 18-20); Householder's third-order iteration (eq. 22 derivatives) starts from the paper's
initial guesses (eqs. 30-31); the N-revolution minimum time comes from Halley's iteration on
dT/dx = 0. Where the fast iteration fails or lands on the wrong multi-revolution branch, a
bracketed Newton-bisection on the known monotone interval takes over, so every returned arc is
the one its slot promises.

Solution slots: slot 0 holds the single-revolution arc; slots 2N-1 and 2N hold the N-revolution
low-branch and high-branch arcs. Slots with no arc are NaN with a ``Reason`` code.
"""

from __future__ import annotations

import contextlib
import math
from dataclasses import dataclass

import numba
import numpy as np
from numpy.typing import ArrayLike, NDArray

from solver.errors import InputError
from solver.mechanics.parallel import PARALLEL_LOCK
from solver.reasons import Reason

# Branch codes stored in LambertSolutions.branch.
BRANCH_SINGLE = 0
BRANCH_LOW = 1
BRANCH_HIGH = 2
BRANCH_NAMES = {BRANCH_SINGLE: "single", BRANCH_LOW: "low", BRANCH_HIGH: "high"}

# Below this sine of the transfer angle the plane through r1 and r2 is not defined by them.
DEFAULT_ANGLE_TOL_RAD = 1e-7
# A half-turn is put in the reference plane only when both positions lie in it to rounding: the
# arc drawn in that plane misses each end by its out-of-plane offset, so the offset allowed here
# is the miss allowed (1e-12 of the radius, 0.15 m at 1 AU).
_IN_PLANE_TOL = 1e-12

_OK = np.int8(Reason.OK)
_NONFINITE = np.int8(Reason.NONFINITE_INPUT)
_ZERO_RADIUS = np.int8(Reason.ZERO_RADIUS)
_NONPOSITIVE_TOF = np.int8(Reason.NONPOSITIVE_TOF)
_PLANE_UNDEFINED = np.int8(Reason.PLANE_UNDEFINED)
_BELOW_MIN_TOF = np.int8(Reason.BELOW_MINIMUM_TOF)
_NOT_CONVERGED = np.int8(Reason.NOT_CONVERGED)

# Householder stopping steps in x (Izzo's published values): after a step this small the cubic
# convergence has already put the new iterate at machine precision.
_STEP_TOL_SINGLE = 1e-5
_STEP_TOL_MULTI = 1e-8
_MAX_HOUSEHOLDER = 15
_ZERO_RADIUS_FRACTION = 1e-10
# Distance |x - 1| below which Battin's series, and below which Lagrange's form, give T(x).
_BATTIN_BAND = 0.01
_LAGRANGE_BAND = 0.2


@numba.njit(cache=True, error_model="numpy", inline="always")
def _hypergeometric_f(z: float) -> float:
    """Gauss 2F1(3, 1; 5/2; z) by its series (|z| is small where this is used)."""
    total = 1.0
    term = 1.0
    for j in range(200):
        term = term * (3.0 + j) * (1.0 + j) / (2.5 + j) * z / (j + 1.0)
        total += term
        if abs(term) <= 1e-16 * abs(total):
            break
    return total


@numba.njit(cache=True, error_model="numpy")
def _tof_lagrange(x: float, lam: float, revs: int) -> float:
    """Non-dimensional time from Lagrange's equation in x (used for 0.01 < |x - 1| < 0.2)."""
    a = 1.0 / (1.0 - x * x)
    if a > 0.0:
        alpha = 2.0 * math.acos(x)
        beta = 2.0 * math.asin(math.sqrt(lam * lam / a))
        if lam < 0.0:
            beta = -beta
        return (
            a
            * math.sqrt(a)
            * ((alpha - math.sin(alpha)) - (beta - math.sin(beta)) + 2.0 * math.pi * revs)
            / 2.0
        )
    alpha = 2.0 * math.acosh(x)
    beta = 2.0 * math.asinh(math.sqrt(-lam * lam / a))
    if lam < 0.0:
        beta = -beta
    return -a * math.sqrt(-a) * ((beta - math.sinh(beta)) - (alpha - math.sinh(alpha))) / 2.0


@numba.njit(cache=True, error_model="numpy")
def tof_of_x(x: float, lam: float, revs: int) -> float:
    """Non-dimensional time of flight T(x) for geometry λ and ``revs`` complete revolutions.

    T = t·sqrt(2μ/s³). Izzo (2015) eqs. 18-20: Battin's series within 0.01 of the parabola,
    Lagrange's form out to 0.2, Lancaster's elsewhere.
    """
    dist = abs(x - 1.0)
    if _BATTIN_BAND <= dist < _LAGRANGE_BAND:
        return _tof_lagrange(x, lam, revs)
    k = lam * lam
    e = x * x - 1.0
    rho = abs(e)
    z = math.sqrt(1.0 + k * e)
    if dist < _BATTIN_BAND:
        eta = z - lam * x
        s1 = 0.5 * (1.0 - lam - x * eta)
        q = 4.0 / 3.0 * _hypergeometric_f(s1)
        tof = (eta * eta * eta * q + 4.0 * lam * eta) / 2.0
        if revs > 0:
            tof += revs * math.pi / rho**1.5
        return tof
    y = math.sqrt(rho)
    if e < 0.0:
        g = x * z - lam * e
        d = revs * math.pi + math.acos(min(1.0, max(-1.0, g)))
        return (x - lam * z - d / y) / e
    # Hyperbolic: for λ > 0, x - λz and z - λx lose every digit as x grows; their rationalized
    # forms (z² - λ²x² = 1 - λ²) keep them.
    if lam > 0.0:
        z_minus = (1.0 - lam * lam) / (z + lam * x)
        x_minus = (1.0 - lam * lam) * (x * x * (1.0 + lam * lam) - lam * lam) / (x + lam * z)
    else:
        z_minus = z - lam * x
        x_minus = x - lam * z
    f = y * z_minus
    g = x * z_minus + lam
    d = math.log(f + g)
    return (x_minus - d / y) / e


@numba.njit(cache=True, error_model="numpy", inline="always")
def _tof_derivatives(x: float, tof: float, lam: float):
    """dT/dx, d²T/dx², d³T/dx³ at x (Izzo 2015, eq. 22)."""
    l2 = lam * lam
    l3 = l2 * lam
    umx2 = 1.0 - x * x
    y = math.sqrt(1.0 - l2 * umx2)
    y2 = y * y
    y3 = y2 * y
    dt = (3.0 * tof * x - 2.0 + 2.0 * l3 * x / y) / umx2
    ddt = (3.0 * tof + 5.0 * x * dt + 2.0 * (1.0 - l2) * l3 / y3) / umx2
    dddt = (7.0 * x * ddt + 8.0 * dt - 6.0 * (1.0 - l2) * l2 * l3 * x / (y3 * y2)) / umx2
    return dt, ddt, dddt


@numba.njit(cache=True, error_model="numpy")
def _minimum_tof_x(lam: float, revs: int):
    """(x, T) at the minimum of T(x) for ``revs`` revolutions, by Halley's iteration from x = 0."""
    x = 0.0
    tof = tof_of_x(0.0, lam, revs)
    for _ in range(30):
        dt, ddt, dddt = _tof_derivatives(x, tof, lam)
        den = ddt * ddt - dt * dddt / 2.0
        if dt == 0.0 or den == 0.0:
            break
        x_new = x - dt * ddt / den
        x_new = min(max(x_new, -0.999999), 0.999999)
        step = abs(x_new - x)
        x = x_new
        tof = tof_of_x(x, lam, revs)
        if step < 1e-13:
            break
    return x, tof


@numba.njit(cache=True, error_model="numpy")
def _householder(target: float, x0: float, lam: float, revs: int, step_tol: float):
    """Householder iteration on T(x) = target; returns (x, iterations, converged, dT/dx)."""
    x = x0
    dt = 0.0
    for it in range(1, _MAX_HOUSEHOLDER + 1):
        tof = tof_of_x(x, lam, revs)
        dt, ddt, dddt = _tof_derivatives(x, tof, lam)
        delta = tof - target
        dt2 = dt * dt
        den = dt * (dt2 - delta * ddt) + dddt * delta * delta / 6.0
        if den == 0.0 or not math.isfinite(den):
            return x, it, False, dt
        x_new = x - delta * (dt2 - delta * ddt / 2.0) / den
        if not math.isfinite(x_new):
            return x, it, False, dt
        step = abs(x_new - x)
        x = x_new
        # Near x = ±1 on an ellipse T grows like (1 - x²)^(-3/2): the step must be small
        # next to the distance left to ±1, or a "converged" x can still miss the time.
        room = 1.0 - abs(x) if abs(x) < 1.0 else 1.0
        if step < step_tol * room:
            return x, it, True, dt
    return x, _MAX_HOUSEHOLDER, False, dt


@numba.njit(cache=True, error_model="numpy")
def _bracketed(target: float, lo: float, hi: float, lam: float, revs: int, decreasing: bool):
    """Safeguarded Newton-bisection for T(x) = target on [lo, hi], where T is monotone.

    The fallback when Householder fails or lands on the other multi-revolution branch.
    Returns (x, iterations, converged).
    """
    x = 0.5 * (lo + hi)
    for it in range(1, 200):
        tof = tof_of_x(x, lam, revs)
        delta = tof - target
        if abs(delta) <= 1e-14 * target:
            return x, it, True
        # Keep the root inside [lo, hi]: T above target means move toward larger T.
        if (delta > 0.0) == decreasing:
            lo = x
        else:
            hi = x
        dt, _, _ = _tof_derivatives(x, tof, lam)
        x_newton = x - delta / dt if dt != 0.0 else lo - 1.0
        x = x_newton if lo < x_newton < hi else 0.5 * (lo + hi)
        if hi - lo <= 4e-16 * max(1.0, abs(x)):
            return x, it, abs(delta) <= 1e-10 * target
    return x, 200, False


@numba.njit(cache=True, error_model="numpy", inline="always")
def _solve_one(
    r1,
    r2,
    tof_s,
    mu,
    pole,
    retrograde,
    max_revs,
    angle_tol,
    v1_out,
    v2_out,
    x_out,
    iters_out,
    reason_out,
):
    """Solve one case; write every slot of the output rows.

    Inlined into its callers (numba's ``inline="always"``: no reference counting of the nine
    array arguments per call, which the sequence search pays once per leg).
    """
    n_slots = 2 * max_revs + 1
    for k in range(n_slots):
        for j in range(3):
            v1_out[k, j] = np.nan
            v2_out[k, j] = np.nan
        x_out[k] = np.nan
        iters_out[k] = 0

    finite = math.isfinite(tof_s) and math.isfinite(mu)
    for j in range(3):
        finite = finite and math.isfinite(r1[j]) and math.isfinite(r2[j])
    if not finite:
        reason_out[:] = _NONFINITE
        return
    r1n = math.sqrt(r1[0] * r1[0] + r1[1] * r1[1] + r1[2] * r1[2])
    r2n = math.sqrt(r2[0] * r2[0] + r2[1] * r2[1] + r2[2] * r2[2])
    # A radius this small next to the other one puts an end of the arc on the focus.
    if min(r1n, r2n) <= _ZERO_RADIUS_FRACTION * max(r1n, r2n) or mu <= 0.0:
        reason_out[:] = _ZERO_RADIUS
        return
    if tof_s <= 0.0:
        reason_out[:] = _NONPOSITIVE_TOF
        return

    cx = r2[0] - r1[0]
    cy = r2[1] - r1[1]
    cz = r2[2] - r1[2]
    chord = math.sqrt(cx * cx + cy * cy + cz * cz)
    semiperimeter = 0.5 * (r1n + r2n + chord)
    u1x, u1y, u1z = r1[0] / r1n, r1[1] / r1n, r1[2] / r1n
    u2x, u2y, u2z = r2[0] / r2n, r2[1] / r2n, r2[2] / r2n
    hx = u1y * u2z - u1z * u2y
    hy = u1z * u2x - u1x * u2z
    hz = u1x * u2y - u1y * u2x
    sin_angle = math.sqrt(hx * hx + hy * hy + hz * hz)
    cos_angle = u1x * u2x + u1y * u2y + u1z * u2z
    px, py, pz = pole[0], pole[1], pole[2]
    if sin_angle < angle_tol:
        # r1 and r2 are (anti)parallel: only a half-turn in the reference plane is defined,
        # by the pole, as for circular coplanar orbits.
        in_plane = (
            abs(u1x * px + u1y * py + u1z * pz) < _IN_PLANE_TOL
            and abs(u2x * px + u2y * py + u2z * pz) < _IN_PLANE_TOL
        )
        if cos_angle < 0.0 and in_plane:
            # The pole fixes the plane; the sign of what is left of r1 x r2 along it still
            # says whether r2 lies just short of the half-turn or just past it.
            side = 1.0 if hx * px + hy * py + hz * pz >= 0.0 else -1.0
            hx, hy, hz = side * px, side * py, side * pz
        else:
            reason_out[:] = _PLANE_UNDEFINED
            return
    else:
        hx, hy, hz = hx / sin_angle, hy / sin_angle, hz / sin_angle

    # λ² = 1 - c/s, written as r1 r2 (1 + cos θ) / (2 s²) with 1 + cos θ = |û1 + û2|² / 2 so
    # that it keeps its digits near 180 degrees, where c/s approaches 1.
    sx, sy, sz = u1x + u2x, u1y + u2y, u1z + u2z
    lam = math.sqrt(r1n * r2n * (sx * sx + sy * sy + sz * sz)) / (2.0 * semiperimeter)
    lam = min(lam, 1.0)
    lam2 = lam * lam
    # Tangential unit vectors point along the motion: ih x ir for the short way.
    if hx * px + hy * py + hz * pz < 0.0:
        lam = -lam
        t1x, t1y, t1z = u1y * hz - u1z * hy, u1z * hx - u1x * hz, u1x * hy - u1y * hx
        t2x, t2y, t2z = u2y * hz - u2z * hy, u2z * hx - u2x * hz, u2x * hy - u2y * hx
    else:
        t1x, t1y, t1z = hy * u1z - hz * u1y, hz * u1x - hx * u1z, hx * u1y - hy * u1x
        t2x, t2y, t2z = hy * u2z - hz * u2y, hz * u2x - hx * u2z, hx * u2y - hy * u2x
    if retrograde:
        lam = -lam
        t1x, t1y, t1z = -t1x, -t1y, -t1z
        t2x, t2y, t2z = -t2x, -t2y, -t2z

    target = math.sqrt(2.0 * mu / semiperimeter**3) * tof_s

    # Single revolution (Izzo eq. 30 initial guess).
    t00 = math.acos(lam) + lam * math.sqrt(1.0 - lam2)
    t1 = 2.0 / 3.0 * (1.0 - lam2 * lam)
    if target >= t00:
        x0 = (t00 / target) ** (2.0 / 3.0) - 1.0
    elif target <= t1:
        x0 = 2.5 * t1 / target * (t1 - target) / (1.0 - lam2 * lam2 * lam) + 1.0
    else:
        x0 = (target / t00) ** (math.log(2.0) / math.log(t1 / t00)) - 1.0
    x, it, ok, slope = _householder(target, x0, lam, 0, _STEP_TOL_SINGLE)
    if not ok or x <= -1.0 or slope >= 0.0:
        hi = 2.0
        while tof_of_x(hi, lam, 0) > target and hi < 1e12:
            hi *= 4.0
        x, extra, ok = _bracketed(target, -1.0, hi, lam, 0, True)
        it += extra
    x_out[0] = x
    iters_out[0] = it
    reason_out[0] = _OK if ok else _NOT_CONVERGED

    # Multi-revolution arcs (Izzo eq. 31 initial guesses), low and high branch by |x|.
    max_possible = int(target / math.pi)
    for revs in range(1, max_revs + 1):
        slot_a = 2 * revs - 1
        slot_b = 2 * revs
        if revs > max_possible:
            reason_out[slot_a] = _BELOW_MIN_TOF
            reason_out[slot_b] = _BELOW_MIN_TOF
            continue
        x_min = 0.0
        have_min = False
        if target < t00 + revs * math.pi:
            x_min, t_min = _minimum_tof_x(lam, revs)
            have_min = True
            if t_min > target:
                reason_out[slot_a] = _BELOW_MIN_TOF
                reason_out[slot_b] = _BELOW_MIN_TOF
                continue
        tmp = ((revs * math.pi + math.pi) / (8.0 * target)) ** (2.0 / 3.0)
        x_left0 = (tmp - 1.0) / (tmp + 1.0)
        tmp = ((8.0 * target) / (revs * math.pi)) ** (2.0 / 3.0)
        x_right0 = (tmp - 1.0) / (tmp + 1.0)
        x_left, it_l, ok_l, slope_l = _householder(target, x_left0, lam, revs, _STEP_TOL_MULTI)
        x_right, it_r, ok_r, slope_r = _householder(target, x_right0, lam, revs, _STEP_TOL_MULTI)
        # Left branch: T falls with x; right branch: T rises. Anything else is the wrong root.
        bad_l = not ok_l or not (-1.0 < x_left < 1.0) or slope_l >= 0.0
        bad_r = not ok_r or not (-1.0 < x_right < 1.0) or slope_r <= 0.0
        if bad_l or bad_r:
            if not have_min:
                x_min, t_min = _minimum_tof_x(lam, revs)
            if bad_l:
                x_left, extra, ok_l = _bracketed(target, -1.0, x_min, lam, revs, True)
                it_l += extra
            if bad_r:
                x_right, extra, ok_r = _bracketed(target, x_min, 1.0, lam, revs, False)
                it_r += extra
        if abs(x_left) <= abs(x_right):
            x_out[slot_a], iters_out[slot_a], ok_a = x_left, it_l, ok_l
            x_out[slot_b], iters_out[slot_b], ok_b = x_right, it_r, ok_r
        else:
            x_out[slot_a], iters_out[slot_a], ok_a = x_right, it_r, ok_r
            x_out[slot_b], iters_out[slot_b], ok_b = x_left, it_l, ok_l
        reason_out[slot_a] = _OK if ok_a else _NOT_CONVERGED
        reason_out[slot_b] = _OK if ok_b else _NOT_CONVERGED

    # Velocities from x (Izzo 2015, Algorithm 1, final lines).
    gamma = math.sqrt(mu * semiperimeter / 2.0)
    rho = (r1n - r2n) / chord if chord > 0.0 else 0.0
    # σ = sqrt(1 - ρ²) cancels at small transfer angles; c² - (r1 - r2)² = r1 r2 |û1 - û2|²
    # keeps its digits.
    dx, dy, dz = u1x - u2x, u1y - u2y, u1z - u2z
    sigma = math.sqrt(r1n * r2n * (dx * dx + dy * dy + dz * dz)) / chord if chord > 0.0 else 0.0
    sigma = min(sigma, 1.0)
    for k in range(n_slots):
        if reason_out[k] != _OK:
            x_out[k] = np.nan
            continue
        xk = x_out[k]
        y = math.sqrt(1.0 - lam2 + lam2 * xk * xk)
        # λy - x and y + λx cancel for fast hyperbolic arcs; use y² - λ²x² = 1 - λ² there.
        if lam > 0.0 and xk >= 1.0:
            ly_minus_x = -(1.0 - lam2) * (xk * xk * (1.0 + lam2) - lam2) / (xk + lam * y)
        else:
            ly_minus_x = lam * y - xk
        if lam * xk < 0.0:
            y_plus_lx = (1.0 - lam2) / (y - lam * xk)
        else:
            y_plus_lx = y + lam * xk
        ly_plus_x = lam * y + xk
        vr1 = gamma * (ly_minus_x - rho * ly_plus_x) / r1n
        vr2 = -gamma * (ly_minus_x + rho * ly_plus_x) / r2n
        vt = gamma * sigma * y_plus_lx
        vt1 = vt / r1n
        vt2 = vt / r2n
        v1_out[k, 0] = vr1 * u1x + vt1 * t1x
        v1_out[k, 1] = vr1 * u1y + vt1 * t1y
        v1_out[k, 2] = vr1 * u1z + vt1 * t1z
        v2_out[k, 0] = vr2 * u2x + vt2 * t2x
        v2_out[k, 1] = vr2 * u2y + vt2 * t2y
        v2_out[k, 2] = vr2 * u2z + vt2 * t2z


@numba.njit(cache=True, parallel=True, error_model="numpy")
def _solve_kernel(r1, r2, tof, mu, pole, retrograde, max_revs, angle_tol, v1, v2, x, iters, reason):
    for i in numba.prange(r1.shape[0]):
        _solve_one(
            r1[i],
            r2[i],
            tof[i],
            mu[i],
            pole,
            retrograde,
            max_revs,
            angle_tol,
            v1[i],
            v2[i],
            x[i],
            iters[i],
            reason[i],
        )


@numba.njit(cache=True, error_model="numpy")
def _solve_kernel_serial(
    r1, r2, tof, mu, pole, retrograde, max_revs, angle_tol, v1, v2, x, iters, reason
):
    # A handful of cases (a cell click, a refinement step) is faster on the calling thread
    # than through the thread pool, whose start costs more than the solves.
    for i in range(r1.shape[0]):
        _solve_one(
            r1[i],
            r2[i],
            tof[i],
            mu[i],
            pole,
            retrograde,
            max_revs,
            angle_tol,
            v1[i],
            v2[i],
            x[i],
            iters[i],
            reason[i],
        )


# Below this many cases the serial kernel is the faster one.
_PARALLEL_MIN_CASES = 512


@dataclass(frozen=True)
class LambertSolutions:
    """Every arc of every case, in solution slots along the second-to-last axis.

    Shapes: the broadcast shape ``B`` of the inputs, then ``S = 2*max_revs + 1`` slots.

    Attributes
    ----------
    v1_km_s, v2_km_s : ndarray, shape (*B, S, 3)
        Velocity on the arc at r1 (departure) and at r2 (arrival), km/s; NaN where no arc.
    x : ndarray, shape (*B, S)
        Lancaster-Blanchard variable of each arc (x < 1 elliptic, 1 parabolic, > 1 hyperbolic).
    iterations : ndarray of int16, shape (*B, S)
        Iterations used (Householder plus any bracketed fallback).
    reason : ndarray of int8, shape (*B, S)
        ``solver.reasons.Reason`` code; ``Reason.OK`` where an arc was found.
    revolutions : ndarray of int, shape (S,)
        Complete revolutions of each slot.
    branch : ndarray of int8, shape (S,)
        ``BRANCH_SINGLE``, ``BRANCH_LOW`` (smaller semi-major axis) or ``BRANCH_HIGH``.
    """

    v1_km_s: NDArray[np.float64]
    v2_km_s: NDArray[np.float64]
    x: NDArray[np.float64]
    iterations: NDArray[np.int16]
    reason: NDArray[np.int8]
    revolutions: NDArray[np.int64]
    branch: NDArray[np.int8]

    @property
    def converged(self) -> NDArray[np.bool_]:
        """True where the slot holds a converged arc."""
        return self.reason == Reason.OK


def slot_layout(max_revs: int) -> tuple[NDArray[np.int64], NDArray[np.int8]]:
    """Revolutions and branch codes of the ``2*max_revs + 1`` solution slots."""
    revolutions = np.zeros(2 * max_revs + 1, dtype=np.int64)
    branch = np.zeros(2 * max_revs + 1, dtype=np.int8)
    for n in range(1, max_revs + 1):
        revolutions[2 * n - 1 : 2 * n + 1] = n
        branch[2 * n - 1] = BRANCH_LOW
        branch[2 * n] = BRANCH_HIGH
    return revolutions, branch


def solve_lambert(
    r1_km: ArrayLike,
    r2_km: ArrayLike,
    tof_s: ArrayLike,
    mu_km3_s2: ArrayLike,
    *,
    max_revs: int = 0,
    retrograde: bool = False,
    pole: ArrayLike = (0.0, 0.0, 1.0),
    angle_tol_rad: float = DEFAULT_ANGLE_TOL_RAD,
) -> LambertSolutions:
    """Solve Lambert's problem for arrays of cases, all revolutions and both branches.

    Parameters
    ----------
    r1_km, r2_km : array_like, shape (..., 3)
        Departure and arrival positions relative to the central body, km.
    tof_s : array_like, shape (...)
        Time of flight, s.
    mu_km3_s2 : array_like, shape (...)
        Gravitational parameter of the central body, km³/s².
    max_revs : int
        Largest number of complete revolutions to solve for (0 for single-revolution only).
    retrograde : bool
        Solve for arcs whose angular momentum points against ``pole`` instead of along it.
    pole : array_like, shape (3,)
        Reference pole that defines prograde motion (the frame's z axis by default).
    angle_tol_rad : float
        Arcs whose transfer angle lies within this of 0 or 180 degrees have no defined plane and
        come back NaN with ``Reason.PLANE_UNDEFINED``, unless both positions lie in the plane
        normal to ``pole`` at 180 degrees, where the pole fixes the plane (the Hohmann case).

    Returns
    -------
    LambertSolutions
        Arrays shaped by the broadcast of the inputs, plus a slot axis. Cases that cannot be
        solved are NaN with a reason code; nothing raises for bad cells.

    Raises
    ------
    InputError
        Only for arguments that apply to the whole call (negative ``max_revs``, zero pole).

    Examples
    --------
    >>> sol = solve_lambert([5000, 10000, 2100], [-14600, 2500, 7000], 3600, 398600)
    >>> sol.v1_km_s[0].round(4)
    array([-5.9925,  1.9254,  3.2456])
    """
    if int(max_revs) != max_revs or max_revs < 0 or max_revs > 1000:
        raise InputError("max_revs", max_revs, "an integer from 0 to 1000")
    max_revs = int(max_revs)
    pole_vec = np.asarray(pole, dtype=float).reshape(3)
    pole_norm = float(np.linalg.norm(pole_vec))
    if not np.isfinite(pole_norm) or pole_norm == 0.0:
        raise InputError("pole", tuple(pole_vec), "a non-zero finite 3-vector")
    pole_vec = pole_vec / pole_norm
    if not (0.0 < angle_tol_rad < 0.1):
        raise InputError("angle_tol_rad", angle_tol_rad, "between 0 and 0.1 rad")

    r1 = np.asarray(r1_km, dtype=float)
    r2 = np.asarray(r2_km, dtype=float)
    tof = np.asarray(tof_s, dtype=float)
    mu = np.asarray(mu_km3_s2, dtype=float)
    if r1.shape[-1:] != (3,) or r2.shape[-1:] != (3,):
        raise InputError("r1_km/r2_km shape", (r1.shape, r2.shape), "arrays of shape (..., 3)")
    shape = np.broadcast_shapes(r1.shape[:-1], r2.shape[:-1], tof.shape, mu.shape)
    n = int(np.prod(shape, dtype=np.int64))
    r1f = np.ascontiguousarray(np.broadcast_to(r1, (*shape, 3)).reshape(n, 3))
    r2f = np.ascontiguousarray(np.broadcast_to(r2, (*shape, 3)).reshape(n, 3))
    tof_f = np.ascontiguousarray(np.broadcast_to(tof, shape).reshape(n))
    mu_f = np.ascontiguousarray(np.broadcast_to(mu, shape).reshape(n))

    n_slots = 2 * max_revs + 1
    v1 = np.empty((n, n_slots, 3))
    v2 = np.empty((n, n_slots, 3))
    x = np.empty((n, n_slots))
    iterations = np.empty((n, n_slots), dtype=np.int16)
    reason = np.empty((n, n_slots), dtype=np.int8)
    parallel = n >= _PARALLEL_MIN_CASES
    kernel = _solve_kernel if parallel else _solve_kernel_serial
    with PARALLEL_LOCK if parallel else contextlib.nullcontext():
        kernel(
            r1f,
            r2f,
            tof_f,
            mu_f,
            pole_vec,
            bool(retrograde),
            max_revs,
            float(angle_tol_rad),
            v1,
            v2,
            x,
            iterations,
            reason,
        )
    revolutions, branch = slot_layout(max_revs)
    return LambertSolutions(
        v1_km_s=v1.reshape(*shape, n_slots, 3),
        v2_km_s=v2.reshape(*shape, n_slots, 3),
        x=x.reshape(*shape, n_slots),
        iterations=iterations.reshape(*shape, n_slots),
        reason=reason.reshape(*shape, n_slots),
        revolutions=revolutions,
        branch=branch,
    )


def minimum_tof_nondim(lam: float, revs: int) -> tuple[float, float]:
    """(x, T_min) at the minimum non-dimensional time for ``revs`` >= 1 revolutions and λ."""
    if revs < 1:
        raise InputError("revs", revs, "an integer >= 1")
    return _minimum_tof_x(float(lam), int(revs))


solve_one_into = _solve_one
"""The compiled one-case solver, for other compiled kernels: ``(r1, r2, tof_s, mu, pole,
retrograde, max_revs, angle_tol, v1_out, v2_out, x_out, iters_out, reason_out)`` fills one row of
every slot exactly as :func:`solve_lambert` does."""

__all__ = [
    "BRANCH_HIGH",
    "BRANCH_LOW",
    "BRANCH_NAMES",
    "BRANCH_SINGLE",
    "DEFAULT_ANGLE_TOL_RAD",
    "LambertSolutions",
    "minimum_tof_nondim",
    "slot_layout",
    "solve_lambert",
    "solve_one_into",
    "tof_of_x",
]
