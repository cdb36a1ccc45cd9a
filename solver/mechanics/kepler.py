"""Two-body motion: universal-variable propagation, classical elements, and arc sampling.

Vectors are arrays of shape ``(..., 3)``; scalars per vector have shape ``(...)``. Every function
broadcasts its arguments against each other, so one call can move many states by many times.

The propagator solves the universal Kepler equation (Bate, Mueller & White §4.3; Vallado §2.3;
Curtis §3.7) for the universal anomaly χ with the Laguerre–Conway iteration (Conway 1986,
Celest. Mech. 39:199), which converges from crude starting values for every conic. Elliptic
flights are first reduced modulo one period so that many revolutions cost no accuracy.
"""

from __future__ import annotations

import math
from typing import Literal, NamedTuple, overload

import numba
import numpy as np
from numpy.typing import ArrayLike, NDArray

from solver.mechanics.parallel import PARALLEL_LOCK
from solver.mechanics.stumpff import stumpff_c, stumpff_s

_LAGUERRE_ORDER = 5.0
_MAX_ITERATIONS = 60
# Stop when the χ step is this small relative to χ; one more step then polishes the last bit.
_CHI_REL_TOL = 1e-13
_CHI_NOISE_FLOOR = 1e-9
# Hyperbolas with α·r0 below this, flown toward periapsis, are restarted from periapsis.
_PERIAPSIS_SPLIT_ALPHA_R0 = -1.0


@numba.njit(cache=True, error_model="numpy")
def _propagate_one(rx, ry, rz, vx, vy, vz, dt, mu, out):
    """Move one state by dt seconds; write (r, v) into out[0:6]; return convergence."""
    r0 = math.sqrt(rx * rx + ry * ry + rz * rz)
    v0_sq = vx * vx + vy * vy + vz * vz
    sqrt_mu = math.sqrt(mu)
    alpha = 2.0 / r0 - v0_sq / mu  # 1/a: > 0 ellipse, 0 parabola, < 0 hyperbola
    sigma0 = (rx * vx + ry * vy + rz * vz) / sqrt_mu

    dt_reduced = dt
    if alpha * r0 > 1e-12:
        period = 2.0 * math.pi / (sqrt_mu * alpha**1.5)
        if abs(dt) > 0.5 * period:
            # Whole revolutions change nothing; keeping χ small keeps the iteration accurate.
            dt_reduced = dt - period * math.floor(dt / period + 0.5)

    if dt_reduced == 0.0:
        out[0], out[1], out[2] = rx, ry, rz
        out[3], out[4], out[5] = vx, vy, vz
        return True

    # Starting values: Vallado's for ellipses and hyperbolas, the near-parabolic slope otherwise.
    if alpha * r0 > 1e-6:
        chi = sqrt_mu * dt_reduced * alpha
    elif alpha * r0 < -1e-6:
        a = 1.0 / alpha
        sign = 1.0 if dt_reduced > 0.0 else -1.0
        num = -2.0 * mu * alpha * dt_reduced
        den = sigma0 * sqrt_mu + sign * math.sqrt(-mu * a) * (1.0 - r0 * alpha)
        ratio = num / den if den != 0.0 else 0.0
        chi = sign * math.sqrt(-a) * math.log(ratio) if ratio > 0.0 else sqrt_mu * dt_reduced / r0
    else:
        chi = sqrt_mu * dt_reduced / r0

    one_minus_alpha_r0 = 1.0 - alpha * r0
    n = _LAGUERRE_ORDER
    converged = False
    polish = False
    step = np.inf
    for _ in range(_MAX_ITERATIONS):
        chi_sq = chi * chi
        z = alpha * chi_sq
        c = stumpff_c(z)
        s = stumpff_s(z)
        f_val = (
            sigma0 * chi_sq * c
            + one_minus_alpha_r0 * chi_sq * chi * s
            + r0 * chi
            - sqrt_mu * dt_reduced
        )
        f_prime = sigma0 * chi * (1.0 - z * s) + one_minus_alpha_r0 * chi_sq * c + r0
        f_second = sigma0 * (1.0 - z * c) + one_minus_alpha_r0 * chi * (1.0 - z * s)
        disc = abs((n - 1.0) ** 2 * f_prime * f_prime - n * (n - 1.0) * f_val * f_second)
        root = math.sqrt(disc)
        den = f_prime + root if f_prime >= 0.0 else f_prime - root
        if den == 0.0 or not math.isfinite(den):
            break
        step = n * f_val / den
        chi -= step
        if polish:
            converged = True
            break
        if abs(step) <= _CHI_REL_TOL * max(abs(chi), 1e-300):
            polish = True
    if not converged:
        # Where the terms of the equation nearly cancel (fast hyperbolas grazing the focus), the
        # iteration wanders in rounding noise; accept a χ settled to this noise floor.
        converged = abs(step) <= _CHI_NOISE_FLOOR * abs(chi)

    chi_sq = chi * chi
    z = alpha * chi_sq
    c = stumpff_c(z)
    s = stumpff_s(z)
    f = 1.0 - chi_sq / r0 * c
    g = dt_reduced - chi_sq * chi * s / sqrt_mu
    px = f * rx + g * vx
    py = f * ry + g * vy
    pz = f * rz + g * vz
    r = math.sqrt(px * px + py * py + pz * pz)
    f_dot = sqrt_mu / (r * r0) * chi * (z * s - 1.0)
    g_dot = 1.0 - chi_sq / r * c
    out[0], out[1], out[2] = px, py, pz
    out[3] = f_dot * rx + g_dot * vx
    out[4] = f_dot * ry + g_dot * vy
    out[5] = f_dot * rz + g_dot * vz
    return converged and math.isfinite(r)


@numba.njit(cache=True, error_model="numpy")
def _propagate_via_periapsis(rx, ry, rz, vx, vy, vz, dt, mu, out):
    """Like ``_propagate_one``, but an inbound hyperbolic flight restarts from periapsis.

    Flying toward periapsis on a fast hyperbola, the universal Kepler equation is a difference
    of huge, nearly equal terms and χ loses digits. From periapsis (r·v = 0) every term has the
    same sign, forward or backward, so the flight is re-expressed from there: periapsis state
    from the eccentricity vector, time to periapsis from the hyperbolic anomaly (Vallado §2.2;
    Curtis §3.5).
    """
    r0 = math.sqrt(rx * rx + ry * ry + rz * rz)
    v0_sq = vx * vx + vy * vy + vz * vz
    alpha = 2.0 / r0 - v0_sq / mu
    rv = rx * vx + ry * vy + rz * vz
    if alpha * r0 > _PERIAPSIS_SPLIT_ALPHA_R0 or rv * dt >= 0.0:
        return _propagate_one(rx, ry, rz, vx, vy, vz, dt, mu, out)
    minus_a = -1.0 / alpha
    hx, hy, hz = ry * vz - rz * vy, rz * vx - rx * vz, rx * vy - ry * vx
    h = math.sqrt(hx * hx + hy * hy + hz * hz)
    k = v0_sq - mu / r0
    ex, ey, ez = (k * rx - rv * vx) / mu, (k * ry - rv * vy) / mu, (k * rz - rv * vz) / mu
    e = math.sqrt(ex * ex + ey * ey + ez * ez)
    sinh_h0 = rv / (math.sqrt(mu * minus_a) * e)
    mean_anomaly0 = e * sinh_h0 - math.asinh(sinh_h0)
    time_to_periapsis = -mean_anomaly0 * math.sqrt(minus_a**3 / mu)
    r_p = minus_a * (e - 1.0)
    v_p = math.sqrt(mu * (2.0 / r_p + 1.0 / minus_a))
    ux, uy, uz = ex / e, ey / e, ez / e
    # Velocity at periapsis is along h x e.
    wx = (hy * uz - hz * uy) / h
    wy = (hz * ux - hx * uz) / h
    wz = (hx * uy - hy * ux) / h
    if _propagate_one(
        r_p * ux, r_p * uy, r_p * uz, v_p * wx, v_p * wy, v_p * wz, dt - time_to_periapsis, mu, out
    ):
        return True
    # A nearly rectilinear hyperbola grazes the focus; the direct route is the better one there.
    return _propagate_one(rx, ry, rz, vx, vy, vz, dt, mu, out)


@numba.njit(cache=True, parallel=True, error_model="numpy")
def _propagate_kernel(r0, v0, dt, mu, r_out, v_out, ok_out):
    for i in numba.prange(r0.shape[0]):
        buf = np.empty(6)
        ok = _propagate_via_periapsis(
            r0[i, 0], r0[i, 1], r0[i, 2], v0[i, 0], v0[i, 1], v0[i, 2], dt[i], mu[i], buf
        )
        r_out[i, 0], r_out[i, 1], r_out[i, 2] = buf[0], buf[1], buf[2]
        v_out[i, 0], v_out[i, 1], v_out[i, 2] = buf[3], buf[4], buf[5]
        ok_out[i] = ok


@numba.njit(cache=True, error_model="numpy")
def _propagate_kernel_serial(r0, v0, dt, mu, r_out, v_out, ok_out):
    for i in range(r0.shape[0]):
        buf = np.empty(6)
        ok = _propagate_via_periapsis(
            r0[i, 0], r0[i, 1], r0[i, 2], v0[i, 0], v0[i, 1], v0[i, 2], dt[i], mu[i], buf
        )
        r_out[i, 0], r_out[i, 1], r_out[i, 2] = buf[0], buf[1], buf[2]
        v_out[i, 0], v_out[i, 1], v_out[i, 2] = buf[3], buf[4], buf[5]
        ok_out[i] = ok


# Below this many states the serial kernel (no thread-pool start) is the faster one.
_PARALLEL_MIN_STATES = 512


@overload
def propagate(
    r0_km: ArrayLike,
    v0_km_s: ArrayLike,
    dt_s: ArrayLike,
    mu_km3_s2: ArrayLike,
    *,
    return_converged: Literal[False] = False,
) -> tuple[NDArray[np.float64], NDArray[np.float64]]: ...


@overload
def propagate(
    r0_km: ArrayLike,
    v0_km_s: ArrayLike,
    dt_s: ArrayLike,
    mu_km3_s2: ArrayLike,
    *,
    return_converged: Literal[True],
) -> tuple[NDArray[np.float64], NDArray[np.float64], NDArray[np.bool_]]: ...


def propagate(
    r0_km: ArrayLike,
    v0_km_s: ArrayLike,
    dt_s: ArrayLike,
    mu_km3_s2: ArrayLike,
    *,
    return_converged: bool = False,
) -> (
    tuple[NDArray[np.float64], NDArray[np.float64]]
    | tuple[NDArray[np.float64], NDArray[np.float64], NDArray[np.bool_]]
):
    """Propagate two-body states by a time step, for every conic, with universal variables.

    Parameters
    ----------
    r0_km : array_like, shape (..., 3)
        Initial positions, km.
    v0_km_s : array_like, shape (..., 3)
        Initial velocities, km/s.
    dt_s : array_like, shape (...)
        Time steps, s (negative steps propagate backwards).
    mu_km3_s2 : array_like, shape (...)
        Gravitational parameter of the central body, km³/s².
    return_converged : bool
        Also return a boolean array flagging states whose iteration converged.

    Returns
    -------
    r_km : ndarray, shape (..., 3)
        Positions after ``dt_s``, km.
    v_km_s : ndarray, shape (..., 3)
        Velocities after ``dt_s``, km/s.
    converged : ndarray of bool, shape (...)
        Only with ``return_converged``. States that fail are NaN.

    Examples
    --------
    >>> import numpy as np
    >>> r, v = propagate([7000.0, 0, 0], [0, 7.546, 0], 600.0, 398600.4418)
    >>> r.shape
    (3,)
    """
    r0 = np.asarray(r0_km, dtype=float)
    v0 = np.asarray(v0_km_s, dtype=float)
    dt = np.asarray(dt_s, dtype=float)
    mu = np.asarray(mu_km3_s2, dtype=float)
    shape = np.broadcast_shapes(r0.shape[:-1], v0.shape[:-1], dt.shape, mu.shape)
    r0f = np.ascontiguousarray(np.broadcast_to(r0, (*shape, 3)).reshape(-1, 3))
    v0f = np.ascontiguousarray(np.broadcast_to(v0, (*shape, 3)).reshape(-1, 3))
    dtf = np.ascontiguousarray(np.broadcast_to(dt, shape).reshape(-1))
    muf = np.ascontiguousarray(np.broadcast_to(mu, shape).reshape(-1))
    r_out = np.empty_like(r0f)
    v_out = np.empty_like(v0f)
    ok = np.empty(r0f.shape[0], dtype=np.bool_)
    if len(dtf) >= _PARALLEL_MIN_STATES:
        with PARALLEL_LOCK:
            _propagate_kernel(r0f, v0f, dtf, muf, r_out, v_out, ok)
    else:
        _propagate_kernel_serial(r0f, v0f, dtf, muf, r_out, v_out, ok)
    r_out[~ok] = np.nan
    v_out[~ok] = np.nan
    r_out = r_out.reshape(*shape, 3)
    v_out = v_out.reshape(*shape, 3)
    if return_converged:
        return r_out, v_out, ok.reshape(shape)
    return r_out, v_out


class Elements(NamedTuple):
    """Classical orbital elements; angles in radians, arrays of a common shape.

    For hyperbolas ``a_km`` is negative; for circular or equatorial orbits the undefined angles
    follow the usual conventions (see ``state_to_elements``).
    """

    a_km: NDArray[np.float64]
    e: NDArray[np.float64]
    inclination_rad: NDArray[np.float64]
    raan_rad: NDArray[np.float64]
    arg_periapsis_rad: NDArray[np.float64]
    true_anomaly_rad: NDArray[np.float64]
    p_km: NDArray[np.float64]
    periapsis_km: NDArray[np.float64]
    apoapsis_km: NDArray[np.float64]


# Below these the node line or the periapsis direction is undefined.
_CIRCULAR_E = 1e-11
_EQUATORIAL_SIN_I = 1e-11


def state_to_elements(r_km: ArrayLike, v_km_s: ArrayLike, mu_km3_s2: ArrayLike) -> Elements:
    """Classical elements from position and velocity (any conic).

    Parameters
    ----------
    r_km : array_like, shape (..., 3)
        Position, km, in the frame whose xy-plane is the reference plane.
    v_km_s : array_like, shape (..., 3)
        Velocity, km/s.
    mu_km3_s2 : array_like, shape (...)
        Gravitational parameter, km³/s².

    Returns
    -------
    Elements
        ``a_km`` (``inf`` for a parabola, negative for a hyperbola), ``e``, inclination, right
        ascension of the ascending node, argument of periapsis and true anomaly in radians
        (in [0, 2π)), semi-latus rectum, periapsis radius and apoapsis radius (``inf`` for open
        orbits). For equatorial orbits the node is taken on the x axis (Ω = 0); for circular
        orbits the periapsis is taken at the node (ω = 0), so ν is the argument of latitude.
    """
    r = np.asarray(r_km, dtype=float)
    v = np.asarray(v_km_s, dtype=float)
    mu = np.asarray(mu_km3_s2, dtype=float)
    r, v = np.broadcast_arrays(r, v)
    r_norm = np.linalg.norm(r, axis=-1)
    v_sq = np.einsum("...i,...i->...", v, v)
    h = np.cross(r, v)
    h_norm = np.linalg.norm(h, axis=-1)
    e_vec = (np.cross(v, h) / mu[..., None]) - r / r_norm[..., None]
    e = np.linalg.norm(e_vec, axis=-1)
    energy = 0.5 * v_sq - mu / r_norm
    with np.errstate(divide="ignore"):
        a = np.where(energy != 0.0, -mu / (2.0 * energy), np.inf)
    p = h_norm**2 / mu
    inclination = np.arccos(np.clip(h[..., 2] / h_norm, -1.0, 1.0))

    node = np.stack([-h[..., 1], h[..., 0], np.zeros_like(h[..., 0])], axis=-1)
    node_norm = np.linalg.norm(node, axis=-1)
    equatorial = node_norm <= _EQUATORIAL_SIN_I * h_norm
    circular = e <= _CIRCULAR_E
    node_unit = np.where(
        equatorial[..., None],
        np.array([1.0, 0.0, 0.0]),
        node / np.where(equatorial, 1.0, node_norm)[..., None],
    )
    raan = np.where(equatorial, 0.0, np.arctan2(node_unit[..., 1], node_unit[..., 0]))

    # In-plane basis: node direction and the direction 90° ahead of it in the orbit's sense.
    h_unit = h / h_norm[..., None]
    ahead_of_node = np.cross(h_unit, node_unit)
    e_safe = np.where(circular[..., None], node_unit, e_vec)
    argp = np.arctan2(
        np.einsum("...i,...i->...", e_safe, ahead_of_node),
        np.einsum("...i,...i->...", e_safe, node_unit),
    )
    argp = np.where(circular, 0.0, argp)
    periapsis_dir = np.where(
        circular[..., None], node_unit, e_vec / np.where(circular, 1.0, e)[..., None]
    )
    beyond = np.cross(h_unit, periapsis_dir)
    nu = np.arctan2(
        np.einsum("...i,...i->...", r, beyond), np.einsum("...i,...i->...", r, periapsis_dir)
    )
    two_pi = 2.0 * np.pi
    periapsis = p / (1.0 + e)
    with np.errstate(divide="ignore"):
        apoapsis = np.where(e < 1.0, p / (1.0 - e), np.inf)
    return Elements(
        a_km=a,
        e=e,
        inclination_rad=inclination,
        raan_rad=np.mod(raan, two_pi),
        arg_periapsis_rad=np.mod(argp, two_pi),
        true_anomaly_rad=np.mod(nu, two_pi),
        p_km=p,
        periapsis_km=periapsis,
        apoapsis_km=apoapsis,
    )


def elements_to_state(
    a_km: ArrayLike,
    e: ArrayLike,
    inclination_rad: ArrayLike,
    raan_rad: ArrayLike,
    arg_periapsis_rad: ArrayLike,
    true_anomaly_rad: ArrayLike,
    mu_km3_s2: ArrayLike,
) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
    """Position and velocity from classical elements (ellipse or hyperbola).

    Parameters
    ----------
    a_km : array_like
        Semi-major axis, km (negative for a hyperbola).
    e : array_like
        Eccentricity, dimensionless (not exactly 1: give a parabola as a hyperbola or use
        ``propagate`` from a state).
    inclination_rad, raan_rad, arg_periapsis_rad, true_anomaly_rad : array_like
        Angles, rad.
    mu_km3_s2 : array_like
        Gravitational parameter, km³/s².

    Returns
    -------
    r_km, v_km_s : ndarray, shape (..., 3)
    """
    a, e, inc, raan, argp, nu, mu = np.broadcast_arrays(
        *(
            np.asarray(x, dtype=float)
            for x in (
                a_km,
                e,
                inclination_rad,
                raan_rad,
                arg_periapsis_rad,
                true_anomaly_rad,
                mu_km3_s2,
            )
        )
    )
    p = a * (1.0 - e * e)
    cos_nu, sin_nu = np.cos(nu), np.sin(nu)
    radius = p / (1.0 + e * cos_nu)
    speed_factor = np.sqrt(mu / p)
    r_pf = np.stack([radius * cos_nu, radius * sin_nu, np.zeros_like(radius)], axis=-1)
    v_pf = np.stack(
        [-speed_factor * sin_nu, speed_factor * (e + cos_nu), np.zeros_like(radius)], axis=-1
    )
    rotation = perifocal_to_reference(inc, raan, argp)
    return (
        np.einsum("...ij,...j->...i", rotation, r_pf),
        np.einsum("...ij,...j->...i", rotation, v_pf),
    )


def perifocal_to_reference(
    inclination_rad: ArrayLike, raan_rad: ArrayLike, arg_periapsis_rad: ArrayLike
) -> NDArray[np.float64]:
    """Rotation matrices R3(-Ω) R1(-i) R3(-ω) from perifocal axes, shape (..., 3, 3)."""
    inc, raan, argp = inclination_rad, raan_rad, arg_periapsis_rad
    co, so = np.cos(raan), np.sin(raan)
    ci, si = np.cos(inc), np.sin(inc)
    cw, sw = np.cos(argp), np.sin(argp)
    return np.stack(
        [
            np.stack([co * cw - so * sw * ci, -co * sw - so * cw * ci, so * si], axis=-1),
            np.stack([so * cw + co * sw * ci, -so * sw + co * cw * ci, -co * si], axis=-1),
            np.stack([sw * si, cw * si, ci], axis=-1),
        ],
        axis=-2,
    )


def mean_to_true_anomaly(mean_anomaly_rad: ArrayLike, e: ArrayLike) -> NDArray[np.float64]:
    """True anomaly from mean anomaly by Newton's method on Kepler's equation.

    Parameters
    ----------
    mean_anomaly_rad : array_like
        Mean anomaly M, rad: ``E - e sin E`` for ellipses, ``e sinh H - H`` for hyperbolas.
    e : array_like
        Eccentricity (``e < 1`` elliptic, ``e > 1`` hyperbolic; ``e == 1`` is not accepted).

    Returns
    -------
    ndarray
        True anomaly ν, rad, in (-π, π].
    """
    m, ecc = np.broadcast_arrays(np.asarray(mean_anomaly_rad, float), np.asarray(e, float))
    m = np.array(m, dtype=float)
    ecc = np.array(ecc, dtype=float)
    elliptic = ecc < 1.0
    nu = np.full(m.shape, np.nan)
    if np.any(elliptic):
        me = np.remainder(m[elliptic] + np.pi, 2.0 * np.pi) - np.pi
        ee = ecc[elliptic]
        # Start at M + e sin M (or π for very eccentric orbits), then Newton to machine precision.
        big_e = np.where(ee > 0.8, np.sign(me) * np.pi, me + ee * np.sin(me))
        for _ in range(50):
            f = big_e - ee * np.sin(big_e) - me
            step = f / (1.0 - ee * np.cos(big_e))
            big_e = big_e - step
            if np.all(np.abs(step) < 1e-15 * np.maximum(1.0, np.abs(big_e))):
                break
        nu[elliptic] = 2.0 * np.arctan2(
            np.sqrt(1.0 + ee) * np.sin(big_e / 2.0), np.sqrt(1.0 - ee) * np.cos(big_e / 2.0)
        )
    hyperbolic = ecc > 1.0
    if np.any(hyperbolic):
        mh = m[hyperbolic]
        eh = ecc[hyperbolic]
        big_h = np.arcsinh(mh / eh)
        for _ in range(100):
            f = eh * np.sinh(big_h) - big_h - mh
            step = f / (eh * np.cosh(big_h) - 1.0)
            big_h = big_h - step
            if np.all(np.abs(step) < 1e-15 * np.maximum(1.0, np.abs(big_h))):
                break
        nu[hyperbolic] = 2.0 * np.arctan(np.sqrt((eh + 1.0) / (eh - 1.0)) * np.tanh(big_h / 2.0))
    return nu


def true_to_mean_anomaly(true_anomaly_rad: ArrayLike, e: ArrayLike) -> NDArray[np.float64]:
    """Mean anomaly from true anomaly (inverse of ``mean_to_true_anomaly``), rad."""
    nu, ecc = np.broadcast_arrays(np.asarray(true_anomaly_rad, float), np.asarray(e, float))
    out = np.full(nu.shape, np.nan)
    elliptic = ecc < 1.0
    big_e = 2.0 * np.arctan2(
        np.sqrt(1.0 - ecc[elliptic]) * np.sin(nu[elliptic] / 2.0),
        np.sqrt(1.0 + ecc[elliptic]) * np.cos(nu[elliptic] / 2.0),
    )
    out[elliptic] = big_e - ecc[elliptic] * np.sin(big_e)
    hyperbolic = ecc > 1.0
    eh = ecc[hyperbolic]
    big_h = 2.0 * np.arctanh(np.sqrt((eh - 1.0) / (eh + 1.0)) * np.tan(nu[hyperbolic] / 2.0))
    out[hyperbolic] = eh * np.sinh(big_h) - big_h
    return out


def sample_arc(
    r1_km: ArrayLike,
    v1_km_s: ArrayLike,
    tof_s: float,
    mu_km3_s2: float,
    points_per_revolution: int = 180,
    min_points: int = 60,
) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
    """Positions along a two-body arc, for drawing.

    The number of samples grows with the swept angle so that multi-revolution arcs stay smooth.

    Parameters
    ----------
    r1_km, v1_km_s : array_like, shape (3,)
        State at the start of the arc.
    tof_s : float
        Duration of the arc, s.
    mu_km3_s2 : float
        Gravitational parameter, km³/s².
    points_per_revolution, min_points : int
        Sampling density.

    Returns
    -------
    t_s : ndarray, shape (n,)
        Times since the start of the arc, s.
    r_km : ndarray, shape (n, 3)
        Positions, km.
    """
    r1 = np.asarray(r1_km, dtype=float)
    v1 = np.asarray(v1_km_s, dtype=float)
    elements = state_to_elements(r1, v1, mu_km3_s2)
    n = min_points
    a = float(elements.a_km)
    if np.isfinite(a) and a > 0:
        revolutions = tof_s / (2.0 * np.pi * np.sqrt(a**3 / mu_km3_s2))
        n = max(min_points, int(np.ceil(revolutions * points_per_revolution)) + 1)
    n = min(n, 20_000)
    t = np.linspace(0.0, float(tof_s), n)
    r, _ = propagate(r1, v1, t, mu_km3_s2)
    return t, r


propagate_one_into = _propagate_via_periapsis
"""The compiled one-state propagator, for other compiled kernels (the sequence search's
ephemeris): ``(rx, ry, rz, vx, vy, vz, dt_s, mu, out)`` writes (r, v) into ``out[0:6]`` and
returns whether the iteration converged."""

__all__ = [
    "Elements",
    "elements_to_state",
    "mean_to_true_anomaly",
    "perifocal_to_reference",
    "propagate",
    "propagate_one_into",
    "sample_arc",
    "state_to_elements",
    "true_to_mean_anomaly",
]

# The classes of orbit that ``state_to_elements`` treats as degenerate are documented above;
# the thresholds are exported for tests.
CIRCULAR_ECCENTRICITY = _CIRCULAR_E
EQUATORIAL_SIN_INCLINATION = _EQUATORIAL_SIN_I
