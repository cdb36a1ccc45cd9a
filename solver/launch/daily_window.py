"""The daily launch window: when, on one UTC day, a site can launch into a parking orbit whose
plane contains the departure asymptote, with a launch azimuth in the site's range.

Geometry
--------
The departure hyperbola, and so the parking orbit before it (no plane change), lies in a plane
through the Earth's centre that contains the outgoing asymptote ŝ. At launch the site must lie
in that plane too. At each instant the site r̂ and ŝ fix the plane; the spacecraft can move in
it either way round:

* **toward the asymptote** ("short"): from the site toward ŝ through the arc γ < 180° between
  them; the launch azimuth is the great-circle bearing from the site to the point under ŝ;
* **away from it** ("long"): the other way round, at that bearing plus 180°.

The Earth's rotation carries the site around; the bearing changes through the day, and the
window is the set of instants at which either bearing lies in the site's azimuth range. With
the asymptote at declination δ and the site at latitude φ, the bearing B satisfies

    tan B = sin H cos δ / (cos φ sin δ - sin φ cos δ cos H),

H being the longitude of ŝ east of the site's meridian. The window's ends are where B crosses
an end of the azimuth range; each crossing solves A sin H + C cos H = D in closed form
(A = cos δ cos a, C = cos δ sin a sin φ, D = sin a cos φ sin δ, for the range end a), so
openings and closings come out exact, not sampled.

* |δ| above the largest inclination the azimuths reach: no window that day.
* |δ| > |φ|: the bearing swings out and back once a day; when the range cuts off the swing's
  turning point (the lowest inclination, i = |δ|), the window splits in two.

Parking-orbit coast: the spacecraft coasts in the parking orbit (circular, radius r_p) from the
site's position to the perigee of the departure hyperbola, which lies θ∞ before ŝ
(cos θ∞ = -1/e, e = 1 + r_p v∞²/μ): coast angle (γ - θ∞) toward the asymptote, (360° - γ - θ∞)
away from it, modulo a turn, at the orbit's mean motion.

Earth orientation: the asymptote (ICRF) is turned into the celestial intermediate frame of the
day with ERFA's ``c2i06a`` (IAU 2006/2000A precession-nutation) and the site turns at the Earth
Rotation Angle (``era00``, linear in UT1), so declinations are of date, not J2000. UT1 is taken
equal to UTC (within 0.9 s) and polar motion is left out.
"""

from __future__ import annotations

import itertools
import math
from collections.abc import Sequence
from dataclasses import dataclass

import erfa
import numpy as np
from numpy.typing import ArrayLike

from solver.constants import EARTH_ROTATION_TURNS_PER_UT1_DAY
from solver.launch.site import LaunchSite
from solver.time_units import MINUTES_PER_DAY

OMEGA_RAD_PER_DAY = 2.0 * math.pi * EARTH_ROTATION_TURNS_PER_UT1_DAY
"""The Earth's rotation against the celestial intermediate frame, rad per UT1 (= UTC) day."""
SIDEREAL_DAY_DAYS = 1.0 / EARTH_ROTATION_TURNS_PER_UT1_DAY
_MIN_INTERVAL_DAYS = 1e-9  # ~0.1 ms: a grazing touch of the range is not a window

LEFT_OUT: tuple[str, ...] = (
    "the ascent's own arc: the coast is counted from the site itself, as if the vehicle "
    "reached the parking orbit at the moment of launch",
    "the asymptote is held fixed through the day (the arc departing at the chosen date)",
    "spherical Earth (geocentric latitude), UT1 = UTC, no polar motion",
    "azimuths are inertial (the orbit plane's heading at the site), not over the ground",
    "injection at the perigee of the departure hyperbola, impulsive and in plane",
    "range safety, lighting, weather and other day-of-launch constraints",
)
"""What the daily launch window leaves out, for every output to say."""


@dataclass(frozen=True)
class WindowOpening:
    """One interval of a day's launch window.

    Times are UTC Julian dates (``*_jd_utc``) and ISO 8601 text; azimuths in degrees from north;
    coast from the site to the departure burn in degrees of the parking orbit and minutes (NaN
    without a parking orbit).
    """

    direction: str  # "toward" or "away": the sense of motion about the asymptote (see module)
    open_jd_utc: float
    close_jd_utc: float
    open_utc: str
    close_utc: str
    azimuth_open_deg: float
    azimuth_close_deg: float
    inclination_open_deg: float
    inclination_close_deg: float
    coast_open_deg: float
    coast_close_deg: float
    coast_open_min: float
    coast_close_min: float
    opens_at_day_start: bool  # the window was already open at 00:00 UTC
    closes_at_day_end: bool  # still open at 24:00 UTC

    @property
    def minutes(self) -> float:
        return (self.close_jd_utc - self.open_jd_utc) * MINUTES_PER_DAY


@dataclass(frozen=True)
class DailyWindow:
    """The launch window of one UTC day, for one asymptote and one site."""

    day_utc: str
    day_jd_utc: float
    declination_of_date_deg: float
    right_ascension_of_date_deg: float
    max_reachable_declination_deg: float
    parking_radius_km: float | None
    openings: tuple[WindowOpening, ...]

    @property
    def reachable(self) -> bool:
        """Whether some parking orbit from the site contains the asymptote."""
        return abs(self.declination_of_date_deg) <= self.max_reachable_declination_deg

    @property
    def total_minutes(self) -> float:
        return sum(o.minutes for o in self.openings)


def _utc_text(jd1: float, fraction: float) -> str:
    # The raw ufunc returns ERFA's "dubious year" status for far-future dates instead of warning.
    iy, im, idd, ihmsf, _ = erfa.ufunc.d2dtf("UTC", 0, jd1, fraction)
    h, m, s, _ = (int(x) for x in ihmsf.item())
    return f"{int(iy):04d}-{int(im):02d}-{int(idd):02d}T{h:02d}:{m:02d}:{s:02d}Z"


def _day_text(jd1: float) -> str:
    return _utc_text(jd1, 0.25)[:10]


def asymptote_of_date(day_jd_utc: float, s_icrf: ArrayLike) -> tuple[float, float, float]:
    """(declination, right ascension) of an ICRF direction in the day's celestial intermediate
    frame, rad, and the Earth Rotation Angle at 00:00 UTC, rad."""
    tai1, tai2, _ = erfa.ufunc.utctai(day_jd_utc, 0.0)
    tt1, tt2, _ = erfa.ufunc.taitt(tai1, tai2)
    s = erfa.c2i06a(tt1, tt2) @ np.asarray(s_icrf, dtype=float)
    s = s / np.linalg.norm(s)
    era0 = float(erfa.era00(day_jd_utc, 0.0))
    return math.asin(max(-1.0, min(1.0, float(s[2])))), math.atan2(float(s[1]), float(s[0])), era0


def unit_vector_icrf(dla_deg: float, rla_deg: float) -> np.ndarray:
    """The ICRF unit vector of declination ``dla_deg`` and right ascension ``rla_deg``."""
    d, a = math.radians(dla_deg), math.radians(rla_deg)
    return np.array([math.cos(d) * math.cos(a), math.cos(d) * math.sin(a), math.sin(d)])


def daily_launch_window(
    site: LaunchSite,
    day_jd_utc: float,
    dla_deg: float,
    rla_deg: float,
    vinf_km_s: float,
    *,
    mu_km3_s2: float,
    parking_radius_km: float | None = None,
) -> DailyWindow:
    """The launch window of one UTC day.

    Parameters
    ----------
    site : LaunchSite
    day_jd_utc : float
        The day's 00:00 UTC as a Julian date (ends in .5).
    dla_deg, rla_deg : float
        Declination and right ascension of the outgoing asymptote, ICRF (EME2000), deg.
    vinf_km_s : float
        Departure v∞, km/s (for the angle from perigee to the asymptote).
    mu_km3_s2 : float
        The Earth's GM, km³/s².
    parking_radius_km : float, optional
        Radius of the circular parking orbit; without it the coast is NaN.

    Returns
    -------
    DailyWindow
        Its openings in time order; none when the asymptote is out of the site's reach.
    """
    delta, alpha, era0 = asymptote_of_date(day_jd_utc, unit_vector_icrf(dla_deg, rla_deg))
    phi = math.radians(site.latitude_deg)
    lam = math.radians(site.longitude_deg)
    sin_phi, cos_phi = math.sin(phi), math.cos(phi)
    sin_d, cos_d = math.sin(delta), math.cos(delta)
    az_min, az_span = site.azimuth_min_deg, site.azimuth_span_deg

    def allowed(azimuth: float) -> bool:  # the scalar form of LaunchSite.azimuth_allowed
        offset = (azimuth - az_min) % 360.0
        return offset <= az_span + 1e-9 or offset >= 360.0 - 1e-9

    def hour(tau: float) -> float:  # longitude of the asymptote east of the site, rad
        return alpha - lam - era0 - OMEGA_RAD_PER_DAY * tau

    def bearing(tau: float) -> float:  # toward the asymptote, deg in [0, 360)
        h = hour(tau)
        b = math.atan2(math.sin(h) * cos_d, cos_phi * sin_d - sin_phi * cos_d * math.cos(h))
        return math.degrees(b) % 360.0

    # Instants at which either bearing crosses an end of the azimuth range.
    breaks = [0.0, 1.0]
    for end in (site.azimuth_min_deg, site.azimuth_max_deg):
        a = math.radians(end)
        big_a = cos_d * math.cos(a)
        big_c = cos_d * math.sin(a) * sin_phi
        big_d = math.sin(a) * cos_phi * sin_d
        r = math.hypot(big_a, big_c)
        if r < 1e-15 or abs(big_d) > r:
            continue
        psi = math.atan2(big_c, big_a)
        base = math.asin(max(-1.0, min(1.0, big_d / r)))
        for h in (base - psi, math.pi - base - psi):
            tau = ((alpha - lam - era0 - h) / OMEGA_RAD_PER_DAY) % SIDEREAL_DAY_DAYS
            while tau <= 1.0:
                breaks.append(tau)
                tau += SIDEREAL_DAY_DAYS
    breaks.sort()

    # Which sense is open on each piece between consecutive breaks; then merge pieces.
    runs: dict[str, list[list[float]]] = {"toward": [], "away": []}
    for t0, t1 in itertools.pairwise(breaks):
        if t1 - t0 <= 0.0:
            continue
        b = bearing(0.5 * (t0 + t1))
        for direction, azimuth in (("toward", b), ("away", (b + 180.0) % 360.0)):
            if allowed(azimuth):
                run = runs[direction]
                if run and run[-1][1] >= t0:
                    run[-1][1] = t1
                else:
                    run.append([t0, t1])
    pieces = [(t0, t1, direction) for direction, run in runs.items() for t0, t1 in run]

    coast = _coast_model(vinf_km_s, mu_km3_s2, parking_radius_km)

    def ends(tau: float, direction: str) -> tuple[float, float, float, float]:
        h = hour(tau)
        az = bearing(tau) if direction == "toward" else (bearing(tau) + 180.0) % 360.0
        gamma = math.acos(max(-1.0, min(1.0, sin_phi * sin_d + cos_phi * cos_d * math.cos(h))))
        angle, minutes = coast(gamma, direction)
        inclination = math.degrees(
            math.acos(max(-1.0, min(1.0, cos_phi * math.sin(math.radians(az)))))
        )
        return az, inclination, angle, minutes

    openings = []
    for t0, t1, direction in pieces:
        if t1 - t0 < _MIN_INTERVAL_DAYS:
            continue
        az0, inc0, c0, m0 = ends(t0, direction)
        az1, inc1, c1, m1 = ends(t1, direction)
        openings.append(
            WindowOpening(
                direction=direction,
                open_jd_utc=day_jd_utc + t0,
                close_jd_utc=day_jd_utc + t1,
                open_utc=_utc_text(day_jd_utc, t0),
                close_utc=_utc_text(day_jd_utc, t1),
                azimuth_open_deg=az0,
                azimuth_close_deg=az1,
                inclination_open_deg=inc0,
                inclination_close_deg=inc1,
                coast_open_deg=c0,
                coast_close_deg=c1,
                coast_open_min=m0,
                coast_close_min=m1,
                opens_at_day_start=t0 == 0.0,
                closes_at_day_end=t1 == 1.0,
            )
        )
    return DailyWindow(
        day_utc=_day_text(day_jd_utc),
        day_jd_utc=day_jd_utc,
        declination_of_date_deg=math.degrees(delta),
        right_ascension_of_date_deg=math.degrees(alpha) % 360.0,
        max_reachable_declination_deg=site.max_reachable_dla_deg,
        parking_radius_km=parking_radius_km,
        openings=tuple(sorted(openings, key=lambda o: o.open_jd_utc)),
    )


def _coast_model(vinf_km_s: float, mu_km3_s2: float, parking_radius_km: float | None):
    """(coast angle deg, coast minutes) from the site to the departure burn, as a function of
    the site-asymptote angle γ (rad) and the sense of motion."""
    if parking_radius_km is None or not math.isfinite(vinf_km_s):
        return lambda gamma, direction: (math.nan, math.nan)
    rp = parking_radius_km
    e = 1.0 + rp * vinf_km_s**2 / mu_km3_s2
    theta_inf = math.acos(-1.0 / e)
    mean_motion_rad_s = math.sqrt(mu_km3_s2 / rp**3)

    def coast(gamma: float, direction: str) -> tuple[float, float]:
        ahead = gamma if direction == "toward" else 2.0 * math.pi - gamma
        angle = (ahead - theta_inf) % (2.0 * math.pi)
        return math.degrees(angle), angle / mean_motion_rad_s / 60.0

    return coast


def launch_windows(
    site: LaunchSite,
    days_jd_utc: Sequence[float],
    dla_deg: Sequence[float],
    rla_deg: Sequence[float],
    vinf_km_s: Sequence[float],
    *,
    mu_km3_s2: float,
    parking_radius_km: float | None = None,
) -> tuple[DailyWindow, ...]:
    """The daily window of each day of a launch period, each with its own asymptote."""
    return tuple(
        daily_launch_window(
            site, d, dla, rla, v, mu_km3_s2=mu_km3_s2, parking_radius_km=parking_radius_km
        )
        for d, dla, rla, v in zip(days_jd_utc, dla_deg, rla_deg, vinf_km_s, strict=True)
    )


def utc_day_of(jd_utc: float) -> float:
    """00:00 UTC of the day containing ``jd_utc`` (a UTC Julian date)."""
    return math.floor(jd_utc - 0.5) + 0.5


__all__ = [
    "LEFT_OUT",
    "OMEGA_RAD_PER_DAY",
    "DailyWindow",
    "WindowOpening",
    "asymptote_of_date",
    "daily_launch_window",
    "launch_windows",
    "unit_vector_icrf",
    "utc_day_of",
]
