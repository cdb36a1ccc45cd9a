"""Resonant returns: a leg flown on an orbit that leaves a body and meets it again at one point.

A leg back to the body it left whose time of flight is close to a whole number of the body's
periods has no useful Lambert arc: the two positions nearly coincide, so the plane and the
velocity of the arc are decided by the small difference between them (and the flown missions
correct that difference with manoeuvres and the perturbations a two-body model leaves out). The
practice of gravity-assist tour design is to fly such a leg on a *resonant* orbit instead: the
flyby sets the spacecraft on an orbit whose period is ``TOF / M`` (M spacecraft revolutions while
the body makes N), so it comes back to the point where it left, with the same heliocentric
velocity, and the second encounter is met there (common practice; e.g. resonant flyby sequences
in tour design). The speed on that orbit at the body's distance follows from the period
(vis-viva); its direction is free and is two variables of the search:

* ``pitch``: the angle between the spacecraft's velocity and the body's velocity, 0 to 90 deg;
* ``clock``: where the velocity leans, measured about the body's velocity from the direction
  away from the central body (0 deg) toward the body's orbit normal (90 deg).

The body is not exactly where it was after N periods (its orbit is not exactly periodic, and N
periods are not exactly the TOF); that displacement is the leg's *miss distance*, bounded by the
sequence limit ``resonance_miss_max_km``.
"""

from __future__ import annotations

import math

import numpy as np
from numpy.typing import NDArray

from solver.time_units import SECONDS_PER_DAY


def resonant_velocity(
    r_body_km: NDArray[np.float64],
    v_body_km_s: NDArray[np.float64],
    tof_days: NDArray[np.float64],
    spacecraft_revolutions: int,
    mu_km3_s2: float,
    pitch_deg: NDArray[np.float64],
    clock_deg: NDArray[np.float64],
) -> tuple[NDArray[np.float64], NDArray[np.bool_]]:
    """The spacecraft's velocity (N, 3) on the resonant orbit, and where it exists (N,).

    Parameters
    ----------
    r_body_km, v_body_km_s : ndarray, shape (N, 3)
        The body's state at the first encounter, about the central body.
    tof_days : ndarray, shape (N,)
        The leg's time of flight.
    spacecraft_revolutions : int
        M, whole revolutions of the spacecraft during the leg.
    mu_km3_s2 : float
        GM of the central body.
    pitch_deg, clock_deg : ndarray, shape (N,)
        Direction of the velocity (see the module docstring).
    """
    speed = resonant_speed_km_s(r_body_km, tof_days, spacecraft_revolutions, mu_km3_s2)
    ok = np.isfinite(speed)
    with np.errstate(invalid="ignore", divide="ignore"):
        along = v_body_km_s / np.linalg.norm(v_body_km_s, axis=-1, keepdims=True)
        normal = np.cross(r_body_km, v_body_km_s)
        normal /= np.linalg.norm(normal, axis=-1, keepdims=True)
        outward = np.cross(along, normal)
    pitch = np.radians(pitch_deg)[..., None]
    clock = np.radians(clock_deg)[..., None]
    direction = np.cos(pitch) * along + np.sin(pitch) * (
        np.cos(clock) * outward + np.sin(clock) * normal
    )
    return speed[..., None] * direction, ok


def resonant_speed_km_s(
    r_body_km: NDArray[np.float64],
    tof_days: NDArray[np.float64],
    spacecraft_revolutions: int,
    mu_km3_s2: float,
) -> NDArray[np.float64]:
    """Speed on the resonant orbit at the body's distance (vis-viva), km/s; NaN where no orbit
    of period TOF / M reaches that distance."""
    period_s = np.asarray(tof_days, float) * SECONDS_PER_DAY / spacecraft_revolutions
    a = np.cbrt(mu_km3_s2 * (period_s / (2.0 * math.pi)) ** 2)
    r = np.linalg.norm(r_body_km, axis=-1)
    with np.errstate(invalid="ignore", divide="ignore"):
        speed2 = mu_km3_s2 * (2.0 / r - 1.0 / a)
        return np.sqrt(np.where(speed2 > 0.0, speed2, np.nan))


def pitch_for_vinf_deg(
    speed_km_s: NDArray[np.float64], body_speed_km_s: NDArray[np.float64], vinf_km_s: NDArray
) -> NDArray[np.float64]:
    """The pitch (deg) at which a velocity of magnitude ``speed_km_s`` leaves the body with
    |v∞| = ``vinf_km_s``: the law of cosines in the triangle of the spacecraft's velocity, the
    body's and v∞. Every clock angle then gives the same |v∞| (the resonance circle of tour
    design, common practice), so a flyby into the resonant orbit can be unpowered. NaN where
    no such triangle exists."""
    s = np.asarray(speed_km_s, float)
    vb = np.asarray(body_speed_km_s, float)
    with np.errstate(invalid="ignore", divide="ignore"):
        cos_pitch = (s * s + vb * vb - np.asarray(vinf_km_s, float) ** 2) / (2.0 * s * vb)
        return np.where(np.abs(cos_pitch) <= 1.0, np.degrees(np.arccos(cos_pitch)), np.nan)


def miss_distance_km(r_first_km: NDArray, r_second_km: NDArray) -> NDArray[np.float64]:
    """How far the body is from where it was at the first encounter, km."""
    return np.linalg.norm(np.asarray(r_second_km) - np.asarray(r_first_km), axis=-1)


__all__ = [
    "miss_distance_km",
    "pitch_for_vinf_deg",
    "resonant_speed_km_s",
    "resonant_velocity",
]
