"""Bodies defined by orbital elements at an epoch, moved as two-body orbits.

A case file (or a survey's CSV of thousands of targets) can define bodies the ephemeris does not
know: invented planets, asteroids, a moon of a planet. Each is a conic about a stated central body:

* elements: semi-major axis (km or au; negative for a hyperbola), eccentricity (0 <= e, e != 1),
  inclination, right ascension/longitude of the ascending node, argument of periapsis, and the
  mean or true anomaly at the epoch, angles in degrees;
* epoch: ISO 8601 UTC or JD TDB;
* frame of the elements (the plane and direction the inclination, node and periapsis are
  measured from):

  - ``"ecliptic"``: the mean ecliptic and equinox of J2000 as arcwindow defines it everywhere,
    ICRF turned about x by the IAU 2006 obliquity 84381.406 arcsec; the default for Sun-centred
    bodies;
  - ``"ecliptic_iau1976"``: the same with the IAU 1976 obliquity 84381.448 arcsec, the J2000
    ecliptic in which small-body element lists are commonly given (common practice). The two
    differ by 0.042 arcsec: up to ~85 km for a body at 2.8 au. A case chooses which one a plain
    ``"ecliptic"`` means (``ephemeris.ecliptic``, see ``solver/window/settings.py``);
  - ``"icrf"``: the ICRF equator and equinox (EME2000 to ~0.02 arcsec); the default for every
    other central body;
  - ``"equator"``: the central body's equator, from its IAU pole in the registry (the frame in
    which "prograde" means about the planet's north pole);
* GM of the two-body motion: GM(central) + GM(body) (the body's own GM counts when given).

Motion: mean anomaly M(t) = M0 + n (t - t0), n = sqrt(GM / |a|^3), solved for the true anomaly by
``solver.mechanics.kepler.mean_to_true_anomaly`` and placed by
``solver.mechanics.kepler.elements_to_state``: exact two-body motion, any time span, no step
error.

Built from plain values by :mod:`solver.ephemeris.element_input` (validation, units, CSV files).
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike, NDArray

from solver.ephemeris.frames import (
    ECLIPTIC,
    ECLIPTIC_IAU1976,
    ICRF,
    ICRF_TO_ECLIPTIC,
    ICRF_TO_ECLIPTIC_IAU1976,
    equator_frame,
)
from solver.errors import InputError
from solver.mechanics.kepler import (
    elements_to_state,
    mean_to_true_anomaly,
    perifocal_to_reference,
)
from solver.time_units import SECONDS_PER_DAY

EQUATOR = "equator"
ELEMENT_FRAMES: tuple[str, ...] = (ECLIPTIC, ECLIPTIC_IAU1976, ICRF, EQUATOR)
ECLIPTICS: dict[str, str] = {"iau2006": ECLIPTIC, "iau1976": ECLIPTIC_IAU1976}
"""Which frame a plain ``"ecliptic"`` means, by the name of its obliquity's IAU system."""


def frame_text(frame: str) -> str:
    """The frame of a body's elements in words, with the obliquity of an ecliptic."""
    return {
        ECLIPTIC: "J2000 ecliptic (IAU 2006 obliquity 84381.406 arcsec)",
        ECLIPTIC_IAU1976: "J2000 ecliptic (IAU 1976 obliquity 84381.448 arcsec)",
        ICRF: "ICRF equator and equinox",
        EQUATOR: "the central body's equator (IAU pole)",
    }.get(frame, frame)


# Above this many (body x epoch) states, work in chunks to bound memory (each state costs about
# 30 float64 temporaries inside elements_to_state).
_CHUNK_STATES = 200_000


@dataclass(frozen=True)
class ElementBody:
    """One body on a two-body orbit, in canonical form (mean anomaly, km, degrees).

    Build it with :func:`solver.ephemeris.element_input.element_body` (validates, converts units,
    resolves the central body's GM and pole) rather than directly.

    Attributes
    ----------
    name : str
        Display name; looked up case-insensitively.
    epoch_jd_tdb : float
        Epoch of the elements, JD TDB.
    central_body : str
        Lower-case name of the body the orbit is about.
    semi_major_axis_km : float
        km; negative for a hyperbola.
    eccentricity : float
        0 <= e < 1 (ellipse) or e > 1 (hyperbola).
    inclination_deg, raan_deg, arg_periapsis_deg, mean_anomaly_deg : float
        Angles at the epoch, deg, in ``frame``.
    mu_km3_s2 : float
        GM of the two-body motion, GM(central) + GM(body), km^3/s^2.
    frame : str
        ``"ecliptic"`` (IAU 2006 obliquity), ``"ecliptic_iau1976"``, ``"icrf"`` or
        ``"equator"`` (see the module docstring).
    pole_ra_deg, pole_dec_deg : float
        The central body's pole for ``frame == "equator"`` (NaN otherwise).
    gm_km3_s2, radius_km : float
        The body's own GM and radius (NaN when not given).
    """

    name: str
    epoch_jd_tdb: float
    central_body: str
    semi_major_axis_km: float
    eccentricity: float
    inclination_deg: float
    raan_deg: float
    arg_periapsis_deg: float
    mean_anomaly_deg: float
    mu_km3_s2: float
    frame: str = ECLIPTIC
    pole_ra_deg: float = math.nan
    pole_dec_deg: float = math.nan
    gm_km3_s2: float = math.nan
    radius_km: float = math.nan


# ---------------------------------------------------------------------------------------------
# Many bodies at once
# ---------------------------------------------------------------------------------------------
class ElementSet:
    """Many element bodies as arrays, for states of all of them at many epochs in one call.

    Parameters
    ----------
    bodies : sequence of ElementBody
        Names must be unique (case-insensitively).
    """

    def __init__(self, bodies: Sequence[ElementBody]) -> None:
        self._bodies = tuple(bodies)
        seen: set[str] = set()
        for body in self._bodies:
            key = body.name.lower()
            if key in seen:
                raise InputError("name", body.name, "a name used only once")
            seen.add(key)
        n = len(self._bodies)

        def column(attr: str) -> NDArray[np.float64]:
            return np.array([getattr(b, attr) for b in self._bodies], dtype=float).reshape(n)

        self.names: NDArray[np.str_] = np.array([b.name for b in self._bodies], dtype=str)
        self.central_body: NDArray[np.str_] = np.array(
            [b.central_body for b in self._bodies], dtype=str
        )
        self.frame: NDArray[np.str_] = np.array([b.frame for b in self._bodies], dtype=str)
        self.epoch_jd_tdb = column("epoch_jd_tdb")
        self.semi_major_axis_km = column("semi_major_axis_km")
        self.eccentricity = column("eccentricity")
        self.mu_km3_s2 = column("mu_km3_s2")
        self.gm_km3_s2 = column("gm_km3_s2")
        self.radius_km = column("radius_km")
        self._inc = np.radians(column("inclination_deg"))
        self._raan = np.radians(column("raan_deg"))
        self._argp = np.radians(column("arg_periapsis_deg"))
        self._m0 = np.radians(column("mean_anomaly_deg"))
        self._n_rad_s = np.sqrt(self.mu_km3_s2 / np.abs(self.semi_major_axis_km) ** 3)
        # One matrix per body: perifocal -> its element frame -> ICRF.
        to_icrf = np.empty((n, 3, 3))
        for k, body in enumerate(self._bodies):
            if body.frame == ICRF:
                to_icrf[k] = np.eye(3)
            elif body.frame == ECLIPTIC:
                to_icrf[k] = ICRF_TO_ECLIPTIC.T
            elif body.frame == ECLIPTIC_IAU1976:
                to_icrf[k] = ICRF_TO_ECLIPTIC_IAU1976.T
            else:
                to_icrf[k] = equator_frame(body.pole_ra_deg, body.pole_dec_deg).icrf_to_frame.T
        self._perifocal_to_icrf = to_icrf @ perifocal_to_reference(
            self._inc, self._raan, self._argp
        )

    def __len__(self) -> int:
        return len(self._bodies)

    def __iter__(self):
        return iter(self._bodies)

    def __getitem__(self, index: int) -> ElementBody:
        return self._bodies[index]

    @property
    def bodies(self) -> tuple[ElementBody, ...]:
        return self._bodies

    def states_about_central(
        self, jd_tdb: ArrayLike, *, per_body: bool = False
    ) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
        """Position (km) and velocity (km/s) of every body relative to its own central body, ICRF.

        Parameters
        ----------
        jd_tdb : array_like
            ``per_body=False``: epochs of any shape S, the same for every body.
            ``per_body=True``: shape (n_bodies, ...), row k holding body k's own epochs.

        Returns
        -------
        r_km, v_km_s : ndarray, shape (n_bodies, *S, 3) (or ``jd_tdb.shape + (3,)`` per body)
        """
        jd = np.asarray(jd_tdb, dtype=float)
        n = len(self)
        if per_body:
            if jd.ndim == 0 or jd.shape[0] != n:
                raise InputError(
                    "jd_tdb", f"array of shape {jd.shape}", f"shape ({n}, ...) with per_body=True"
                )
            epochs = jd.reshape(n, -1)
            out_shape = jd.shape
        else:
            epochs = np.broadcast_to(jd.reshape(1, -1), (n, jd.size))
            out_shape = (n, *jd.shape)
        m_per_body = epochs.shape[1]
        r_out = np.empty((n, m_per_body, 3))
        v_out = np.empty((n, m_per_body, 3))
        rows_per_chunk = max(1, _CHUNK_STATES // max(1, m_per_body))
        for start in range(0, n, rows_per_chunk):
            sl = slice(start, min(n, start + rows_per_chunk))
            self._fill(sl, epochs[sl], r_out[sl], v_out[sl])
        return r_out.reshape(*out_shape, 3), v_out.reshape(*out_shape, 3)

    def _fill(self, sl: slice, epochs, r_out, v_out) -> None:
        dt_s = (epochs - self.epoch_jd_tdb[sl, None]) * SECONDS_PER_DAY
        e = self.eccentricity[sl, None]
        mean_anomaly = self._m0[sl, None] + self._n_rad_s[sl, None] * dt_s
        nu = mean_to_true_anomaly(mean_anomaly, e)
        r_pf, v_pf = elements_to_state(
            self.semi_major_axis_km[sl, None], e, 0.0, 0.0, 0.0, nu, self.mu_km3_s2[sl, None]
        )
        # The rotation written out term by term: a matrix product would go through BLAS for
        # many epochs and through another loop for one, rounding the last bit differently, and
        # a body's state at a date must not depend on which other dates were asked with it.
        rot = self._perifocal_to_icrf[sl][:, None]  # (bodies, 1, 3, 3)
        for axis in range(3):
            r_out[..., axis] = r_pf[..., 0] * rot[..., axis, 0] + r_pf[..., 1] * rot[..., axis, 1]
            r_out[..., axis] += r_pf[..., 2] * rot[..., axis, 2]
            v_out[..., axis] = v_pf[..., 0] * rot[..., axis, 0] + v_pf[..., 1] * rot[..., axis, 1]
            v_out[..., axis] += v_pf[..., 2] * rot[..., axis, 2]


__all__ = ["ECLIPTICS", "ELEMENT_FRAMES", "EQUATOR", "ElementBody", "ElementSet", "frame_text"]
