"""Approximate planet positions from JPL's table of mean orbital elements (Standish, Table 1).

Source: E. M. Standish, "Keplerian Elements for Approximate Positions of the Major Planets"
(JPL Solar System Dynamics), Table 1: elements and rates per Julian century TDB, mean ecliptic
and equinox of J2000, fitted for 1800 AD - 2050 AD [FOUND: docs/references.md 2.1]. The stated
errors in heliocentric longitude, latitude and distance over that interval [FOUND:
docs/references.md 2.2] sit beside each row (:data:`ERROR_BOUNDS`). "The elements are not valid
outside the given time-interval over which they were fit", so this source refuses dates outside
1800-2050.

Method (docs/references.md 2.3): each element is value + rate * T, T = (JD TDB - 2451545)/36525;
ω = ϖ - Ω, M = L - ϖ; Kepler's equation solved by
``solver.mechanics.kepler.mean_to_true_anomaly``; the position is placed by
``solver.mechanics.kepler.elements_to_state`` in the J2000 ecliptic frame.

Velocity: the table gives positions only. We return the two-body velocity of the osculating
ellipse whose mean motion is the table's own rate of L (μ_eff = n² a³), so velocity and the
motion of the position agree; the slow drift of the other elements (< 1e-4 of the orbital rate)
is neglected. Expect velocity errors of the order of the stated position error divided by a
tenth of the orbital period.

Bodies: the Earth-Moon barycentre (``emb``; ``earth`` is answered with the EMB position, off by
up to about 4700 km, inside the stated 6000 km bound), Mercury-Neptune and Pluto. For the outer
planets the fit is to the DE system barycentres.
"""

from __future__ import annotations

from typing import NamedTuple

import numpy as np
from numpy.typing import ArrayLike, NDArray

from solver.constants import AU_KM
from solver.mechanics.kepler import elements_to_state, mean_to_true_anomaly
from solver.time_units import DAYS_PER_JULIAN_CENTURY, JD_J2000_TDB, SECONDS_PER_DAY

SOURCE_NAME = "mean"
JD_TDB_MIN = 2378496.5  # 1800-01-01T00:00 TDB
JD_TDB_MAX = 2469807.5  # 2050-01-01T00:00 TDB
VALID_RANGE_TEXT = "1800-01-01 to 2050-01-01 (TDB)"


class MeanElementRow(NamedTuple):
    """One body of Table 1: J2000 value and rate per Julian century of each element."""

    a_au: float
    e: float
    inclination_deg: float
    mean_longitude_deg: float
    longitude_periapsis_deg: float
    raan_deg: float
    a_au_per_cy: float
    e_per_cy: float
    inclination_deg_per_cy: float
    mean_longitude_deg_per_cy: float
    longitude_periapsis_deg_per_cy: float
    raan_deg_per_cy: float


class ErrorBound(NamedTuple):
    """Stated errors 1800-2050: heliocentric longitude and latitude (arcsec), distance (km)."""

    longitude_arcsec: float
    latitude_arcsec: float
    distance_km: float


# Standish Table 1 [FOUND: docs/references.md 2.1, three copies agree]. Order as in MeanElementRow.
TABLE_1: dict[str, MeanElementRow] = {
    "mercury": MeanElementRow(
        0.38709927, 0.20563593, 7.00497902, 252.25032350, 77.45779628, 48.33076593,
        0.00000037, 0.00001906, -0.00594749, 149472.67411175, 0.16047689, -0.12534081,
    ),
    "venus": MeanElementRow(
        0.72333566, 0.00677672, 3.39467605, 181.97909950, 131.60246718, 76.67984255,
        0.00000390, -0.00004107, -0.00078890, 58517.81538729, 0.00268329, -0.27769418,
    ),
    "emb": MeanElementRow(
        1.00000261, 0.01671123, -0.00001531, 100.46457166, 102.93768193, 0.0,
        0.00000562, -0.00004392, -0.01294668, 35999.37244981, 0.32327364, 0.0,
    ),
    "mars": MeanElementRow(
        1.52371034, 0.09339410, 1.84969142, -4.55343205, -23.94362959, 49.55953891,
        0.00001847, 0.00007882, -0.00813131, 19140.30268499, 0.44441088, -0.29257343,
    ),
    "jupiter": MeanElementRow(
        5.20288700, 0.04838624, 1.30439695, 34.39644051, 14.72847983, 100.47390909,
        -0.00011607, -0.00013253, -0.00183714, 3034.74612775, 0.21252668, 0.20469106,
    ),
    "saturn": MeanElementRow(
        9.53667594, 0.05386179, 2.48599187, 49.95424423, 92.59887831, 113.66242448,
        -0.00125060, -0.00050991, 0.00193609, 1222.49362201, -0.41897216, -0.28867794,
    ),
    "uranus": MeanElementRow(
        19.18916464, 0.04725744, 0.77263783, 313.23810451, 170.95427630, 74.01692503,
        -0.00196176, -0.00004397, -0.00242939, 428.48202785, 0.40805281, 0.04240589,
    ),
    "neptune": MeanElementRow(
        30.06992276, 0.00859048, 1.77004347, -55.12002969, 44.96476227, 131.78422574,
        0.00026291, 0.00005105, 0.00035372, 218.45945325, -0.32241464, -0.00508664,
    ),
    "pluto": MeanElementRow(
        39.48211675, 0.24882730, 17.14001206, 238.92903833, 224.06891629, 110.30393684,
        -0.00031596, 0.00005170, 0.00004818, 145.20780515, -0.04062942, -0.01183482,
    ),
}  # fmt: skip

# Stated errors, 1800-2050 [FOUND: ssd.jpl.nasa.gov/planets/approx_pos.html, docs/references.md 2.2;
# Pluto from the older page only].
ERROR_BOUNDS: dict[str, ErrorBound] = {
    "mercury": ErrorBound(15.0, 1.0, 1_000.0),
    "venus": ErrorBound(20.0, 1.0, 4_000.0),
    "emb": ErrorBound(20.0, 8.0, 6_000.0),
    "mars": ErrorBound(40.0, 2.0, 25_000.0),
    "jupiter": ErrorBound(400.0, 10.0, 600_000.0),
    "saturn": ErrorBound(600.0, 25.0, 1_500_000.0),
    "uranus": ErrorBound(50.0, 2.0, 1_000_000.0),
    "neptune": ErrorBound(10.0, 1.0, 200_000.0),
    "pluto": ErrorBound(5.0, 2.0, 300_000.0),
}

# Names answered; "earth" is answered with the EM barycentre (see module docstring).
BODIES: tuple[str, ...] = (*TABLE_1, "earth")


def in_range(jd_tdb: ArrayLike) -> NDArray[np.bool_]:
    """Mask of epochs inside the table's fit interval (NaN is outside)."""
    jd = np.asarray(jd_tdb, dtype=float)
    return (jd >= JD_TDB_MIN) & (jd <= JD_TDB_MAX)


def heliocentric_ecliptic_state(
    body: str, jd_tdb: ArrayLike
) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
    """Heliocentric position (km) and velocity (km/s), mean ecliptic and equinox of J2000.

    Parameters
    ----------
    body : str
        One of :data:`BODIES` (lower case).
    jd_tdb : array_like, shape (...)
        Epochs, JD TDB. Epochs outside 1800-2050 (or NaN) give NaN rows; callers that must
        refuse them check :func:`in_range` first.

    Returns
    -------
    r_km, v_km_s : ndarray, shape (..., 3)
    """
    row = TABLE_1["emb" if body == "earth" else body]
    jd = np.asarray(jd_tdb, dtype=float)
    ok = in_range(jd)
    t_cy = (np.where(ok, jd, JD_J2000_TDB) - JD_J2000_TDB) / DAYS_PER_JULIAN_CENTURY
    a_km = (row.a_au + row.a_au_per_cy * t_cy) * AU_KM
    e = row.e + row.e_per_cy * t_cy
    inc = np.radians(row.inclination_deg + row.inclination_deg_per_cy * t_cy)
    mean_longitude = row.mean_longitude_deg + row.mean_longitude_deg_per_cy * t_cy
    varpi = row.longitude_periapsis_deg + row.longitude_periapsis_deg_per_cy * t_cy
    raan_deg = row.raan_deg + row.raan_deg_per_cy * t_cy
    argp = np.radians(varpi - raan_deg)
    mean_anomaly = np.radians(np.remainder(mean_longitude - varpi + 180.0, 360.0) - 180.0)
    nu = mean_to_true_anomaly(mean_anomaly, e)
    n_rad_s = np.radians(row.mean_longitude_deg_per_cy) / (
        DAYS_PER_JULIAN_CENTURY * SECONDS_PER_DAY
    )
    mu_eff = n_rad_s**2 * a_km**3
    r, v = elements_to_state(a_km, e, inc, np.radians(raan_deg), argp, nu, mu_eff)
    if not np.all(ok):
        r = np.where(ok[..., None], r, np.nan)
        v = np.where(ok[..., None], v, np.nan)
    return r, v


__all__ = [
    "BODIES",
    "ERROR_BOUNDS",
    "JD_TDB_MAX",
    "JD_TDB_MIN",
    "SOURCE_NAME",
    "TABLE_1",
    "VALID_RANGE_TEXT",
    "ErrorBound",
    "MeanElementRow",
    "heliocentric_ecliptic_state",
    "in_range",
]
