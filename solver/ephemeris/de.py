"""Barycentric states from the JPL DE423 ephemeris shipped with the ``de423`` package.

DE423 (Folkner 2010) covers JD TDB 2378480.5 to 2524624.5 (1799-12-16 to 2200-02-01). It is read
with ``jplephem``'s package reader (``jplephem.ephem.Ephemeris``), the format the ``de423``
package uses: Chebyshev coefficients per body, positions in km and their time derivative in km
per TDB day (converted here to km/s). Axes are ICRF.

What each name means
--------------------
* ``sun``, ``mercury``, ``venus``: the body's centre.
* ``emb``: the Earth-Moon barycentre. ``earth`` and ``moon`` are split from it with the file's own
  Earth/Moon mass ratio EMRAT: Earth = EMB - Moon_geo / (1 + EMRAT),
  Moon = EMB + Moon_geo * EMRAT / (1 + EMRAT), where Moon_geo is the file's geocentric Moon.
* ``mars`` ... ``pluto``: **system barycentres** (planet plus its moons), which is what a DE file
  integrates. The planet's centre lies within about 0.2 m (Mars), a few hundred km (Jupiter,
  Saturn, from memory) and about 2100 km (Pluto-Charon, from memory) of it: irrelevant for
  heliocentric arcs, to be remembered for close flybys.
"""

from __future__ import annotations

import threading

import numpy as np
from numpy.typing import ArrayLike, NDArray

from solver.time_units import SECONDS_PER_DAY

DE_NAME = "de423"
JD_TDB_MIN = 2378480.5
"""First JD TDB covered by DE423 (1799-12-16T00:00 TDB), from the file header (jalpha)."""
JD_TDB_MAX = 2524624.5
"""Last JD TDB covered by DE423 (2200-02-01T00:00 TDB), from the file header (jomega)."""

# Our body name -> DE segment, for bodies read directly.
_SEGMENTS: dict[str, str] = {
    "sun": "sun",
    "mercury": "mercury",
    "venus": "venus",
    "emb": "earthmoon",
    "mars": "mars",
    "jupiter": "jupiter",
    "saturn": "saturn",
    "uranus": "uranus",
    "neptune": "neptune",
    "pluto": "pluto",
}
BODIES: tuple[str, ...] = (*_SEGMENTS, "earth", "moon")
"""Body names this module answers, all barycentric."""

_lock = threading.Lock()
_ephemeris = None


def ephemeris():
    """The loaded DE423 ``jplephem`` reader (loaded once per process; segments load lazily)."""
    global _ephemeris
    if _ephemeris is None:
        with _lock:
            if _ephemeris is None:
                import de423
                from jplephem.ephem import Ephemeris

                _ephemeris = Ephemeris(de423)
    return _ephemeris


def in_range(jd_tdb: ArrayLike) -> NDArray[np.bool_]:
    """Mask of epochs DE423 covers (NaN epochs are out of range)."""
    jd = np.asarray(jd_tdb, dtype=float)
    return (jd >= JD_TDB_MIN) & (jd <= JD_TDB_MAX)


def _segment_state(segment: str, jd_flat: NDArray[np.float64]):
    """(r_km, v_km_s), each shape (n, 3), for a DE segment at in-range 1-D epochs."""
    eph = ephemeris()
    # jplephem evaluates (jd - jalpha) + tdb2 to keep precision: pass the epoch that way.
    position, velocity = eph.position_and_velocity(segment, jd_flat, 0.0)
    return position.T, velocity.T / SECONDS_PER_DAY


def barycentric_state(
    body: str, jd_tdb: ArrayLike
) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
    """Barycentric ICRF position (km) and velocity (km/s) of a DE423 body.

    Parameters
    ----------
    body : str
        One of :data:`BODIES` (lower case).
    jd_tdb : array_like, shape (...)
        Epochs, JD TDB. Epochs outside DE423's range, or NaN, give NaN rows; callers that must
        refuse them check :func:`in_range` first.

    Returns
    -------
    r_km, v_km_s : ndarray, shape (..., 3)
    """
    jd = np.asarray(jd_tdb, dtype=float)
    shape = jd.shape
    flat = jd.reshape(-1)
    ok = in_range(flat)
    safe = np.where(ok, flat, JD_TDB_MIN)
    if body in _SEGMENTS:
        r, v = _segment_state(_SEGMENTS[body], safe)
    elif body in ("earth", "moon"):
        eph = ephemeris()
        r_emb, v_emb = _segment_state("earthmoon", safe)
        r_geo, v_geo = _segment_state("moon", safe)
        share = 1.0 / (1.0 + eph.EMRAT) if body == "earth" else -eph.EMRAT / (1.0 + eph.EMRAT)
        r = r_emb - share * r_geo
        v = v_emb - share * v_geo
    else:
        raise KeyError(body)
    if not ok.all():
        r = r.copy()
        v = v.copy()
        r[~ok] = np.nan
        v[~ok] = np.nan
    return r.reshape(*shape, 3), v.reshape(*shape, 3)


def moon_geocentric_state(jd_tdb: ArrayLike) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
    """The file's geocentric Moon, ICRF, km and km/s (NaN outside the range)."""
    jd = np.asarray(jd_tdb, dtype=float)
    flat = jd.reshape(-1)
    ok = in_range(flat)
    r, v = _segment_state("moon", np.where(ok, flat, JD_TDB_MIN))
    r = np.where(ok[:, None], r, np.nan)
    v = np.where(ok[:, None], v, np.nan)
    return r.reshape(*jd.shape, 3), v.reshape(*jd.shape, 3)


__all__ = [
    "BODIES",
    "DE_NAME",
    "JD_TDB_MAX",
    "JD_TDB_MIN",
    "barycentric_state",
    "ephemeris",
    "in_range",
    "moon_geocentric_state",
]
