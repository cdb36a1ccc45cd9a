"""Time units and the conversions between day counts that the whole project shares.

Every literal such as 86400, 1440 or 2440587.5 lives here once, with its definition. Time
scales (UTC, TAI, TT, TDB) are :mod:`solver.ephemeris.timescales`; this module only converts
between units of one scale.
"""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike, NDArray

SECONDS_PER_DAY = 86400.0
"""SI day, exact by definition."""
MINUTES_PER_DAY = 1440.0
MINUTE_DAYS = 1.0 / MINUTES_PER_DAY
"""One minute in days: the finest grid step and the resolution of refined dates."""
SECOND_DAYS = 1.0 / SECONDS_PER_DAY
MS_PER_DAY = 86_400_000.0
DAYS_PER_JULIAN_CENTURY = 36525.0
"""Exact by definition."""
JD_J2000_TDB = 2451545.0
"""J2000.0 = 2000-01-01T12:00:00 TDB, exact by definition (IAU 1976)."""
JD_UNIX_EPOCH = 2440587.5
"""Julian date of 1970-01-01T00:00:00, the origin of Unix time (common practice)."""


def jd_to_unix_ms(jd: ArrayLike) -> NDArray[np.float64]:
    """Milliseconds since 1970-01-01 (what browsers plot dates in) from a Julian date.

    The scale is kept: a JD UTC gives Unix milliseconds UTC (no leap seconds, as in Unix time).
    """
    return (np.asarray(jd, dtype=float) - JD_UNIX_EPOCH) * MS_PER_DAY


def unix_ms_to_jd(ms: ArrayLike) -> NDArray[np.float64]:
    """Julian date from milliseconds since 1970-01-01 (the inverse of :func:`jd_to_unix_ms`)."""
    return np.asarray(ms, dtype=float) / MS_PER_DAY + JD_UNIX_EPOCH


__all__ = [
    "DAYS_PER_JULIAN_CENTURY",
    "JD_J2000_TDB",
    "JD_UNIX_EPOCH",
    "MINUTES_PER_DAY",
    "MINUTE_DAYS",
    "MS_PER_DAY",
    "SECONDS_PER_DAY",
    "SECOND_DAYS",
    "jd_to_unix_ms",
    "unix_ms_to_jd",
]
