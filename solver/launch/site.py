"""Launch sites: which parking-orbit inclinations a site reaches, and so which asymptotes.

A launch along azimuth Az (from north, toward east) from geocentric latitude φ puts the orbit
plane at inclination i with

    cos i = cos φ · sin Az                                  (docs/references.md 11.3)

(spherical trigonometry of the site, the orbit's ground track and the equator). Due east
(Az = 90°) gives the lowest inclination, i = |φ|; no azimuth gives less. A site with an allowed
azimuth range reaches the inclinations this maps the range to, an interval [i_min, i_max].

A parking orbit of inclination i contains the directions of declination up to min(i, 180° - i)
in magnitude; so the departure asymptotes a site reaches without a plane change are those with

    |DLA| <= max over reachable i of min(i, 180° - i).

Azimuths here are inertial: the heading of the orbit plane at the site. The vehicle's heading
over the rotating ground differs by a few degrees; a site's range is taken to be inertial.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike, NDArray


@dataclass(frozen=True)
class LaunchSite:
    """A launch site on the Earth (spherical Earth: the latitude is geocentric).

    Attributes
    ----------
    name : str
    latitude_deg : float
        Geocentric latitude, north positive, within (-90, 90).
    longitude_deg : float
        East longitude.
    azimuth_min_deg, azimuth_max_deg : float
        Allowed launch azimuths run clockwise from ``azimuth_min_deg`` to ``azimuth_max_deg``
        (from north through east); a range through north is written past 360 (340 to 380).
        ``0 < max - min <= 360``.
    """

    name: str
    latitude_deg: float
    longitude_deg: float
    azimuth_min_deg: float
    azimuth_max_deg: float

    @property
    def azimuth_span_deg(self) -> float:
        return self.azimuth_max_deg - self.azimuth_min_deg

    def azimuth_allowed(self, azimuth_deg: ArrayLike, tol_deg: float = 1e-9) -> NDArray[np.bool_]:
        """Whether each azimuth lies in the allowed range (ends included)."""
        offset = (np.asarray(azimuth_deg, dtype=float) - self.azimuth_min_deg) % 360.0
        span = self.azimuth_span_deg
        return (offset <= span + tol_deg) | (offset >= 360.0 - tol_deg)

    @property
    def reachable_inclinations_deg(self) -> tuple[float, float]:
        """(lowest, highest) parking-orbit inclination the azimuth range reaches, deg."""
        lo_sin, hi_sin = _sine_range(self.azimuth_min_deg, self.azimuth_max_deg)
        cos_lat = math.cos(math.radians(self.latitude_deg))
        return (
            math.degrees(math.acos(cos_lat * hi_sin)),
            math.degrees(math.acos(cos_lat * lo_sin)),
        )

    @property
    def max_reachable_dla_deg(self) -> float:
        """Largest |DLA| of an asymptote a parking orbit from this site contains, deg."""
        return max_declination_deg(*self.reachable_inclinations_deg)


def inclination_deg(latitude_deg: ArrayLike, azimuth_deg: ArrayLike) -> NDArray[np.float64]:
    """Inclination of the orbit launched along ``azimuth_deg`` from ``latitude_deg``:
    cos i = cos φ · sin Az, deg in [0, 180]."""
    phi = np.radians(np.asarray(latitude_deg, dtype=float))
    az = np.radians(np.asarray(azimuth_deg, dtype=float))
    return np.degrees(np.arccos(np.clip(np.cos(phi) * np.sin(az), -1.0, 1.0)))


def azimuths_for_inclination_deg(
    latitude_deg: float, inclination_deg: float
) -> tuple[float, float] | None:
    """The two launch azimuths that give ``inclination_deg`` from ``latitude_deg``, deg in
    [0, 360): sin Az = cos i / cos φ, Az and 180° - Az; None when |cos i| > cos φ (an inclination
    below the latitude, or above 180° minus it)."""
    ratio = math.cos(math.radians(inclination_deg)) / math.cos(math.radians(latitude_deg))
    if abs(ratio) > 1.0 + 1e-12:
        return None
    az = math.degrees(math.asin(max(-1.0, min(1.0, ratio))))
    return az % 360.0, (180.0 - az) % 360.0


def max_declination_deg(inclination_min_deg: float, inclination_max_deg: float) -> float:
    """Largest |declination| contained by some plane of inclination in [min, max], deg."""
    if inclination_min_deg <= 90.0 <= inclination_max_deg:
        return 90.0
    if inclination_max_deg < 90.0:
        return inclination_max_deg
    return 180.0 - inclination_min_deg


def _sine_range(start_deg: float, end_deg: float) -> tuple[float, float]:
    """(min, max) of sin over the arc of azimuths from ``start_deg`` clockwise to ``end_deg``."""
    values = [math.sin(math.radians(start_deg)), math.sin(math.radians(end_deg))]

    def contains(angle: float) -> bool:
        return (angle - start_deg) % 360.0 <= end_deg - start_deg

    hi = 1.0 if contains(90.0) else max(values)
    lo = -1.0 if contains(270.0) else min(values)
    return lo, hi


__all__ = [
    "LaunchSite",
    "azimuths_for_inclination_deg",
    "inclination_deg",
    "max_declination_deg",
]
