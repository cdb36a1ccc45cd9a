"""The resolved bodies of a case: central body, reference pole, departure and target.

Also the bodies' states about the central body and the transfer angle in the case's sense of
motion, which every part of the window engine shares.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

from solver.constants import OBLIQUITY_J2000_RAD
from solver.ephemeris.bodies import Body, has_mass
from solver.ephemeris.states import states
from solver.errors import InputError
from solver.window.case import Case


@dataclass(frozen=True)
class CaseBodies:
    """The resolved bodies of a case and the constants the metrics need."""

    central: Body
    departure: Body
    target: Body
    mu_central_km3_s2: float
    pole_icrf: NDArray[np.float64]

    @classmethod
    def of(cls, case: Case) -> CaseBodies:
        reg = case.registry()
        central = reg.get(case.central_body, field="case.central_body")
        if central.key == "sun":
            # Ecliptic north pole in ICRF: the ecliptic frame is ICRF turned by ε about x.
            pole = np.array([0.0, -math.sin(OBLIQUITY_J2000_RAD), math.cos(OBLIQUITY_J2000_RAD)])
        elif math.isfinite(central.pole_ra_deg):
            ra, dec = math.radians(central.pole_ra_deg), math.radians(central.pole_dec_deg)
            pole = np.array(
                [math.cos(dec) * math.cos(ra), math.cos(dec) * math.sin(ra), math.sin(dec)]
            )
        else:
            pole = np.array([0.0, 0.0, 1.0])
        if not (math.isfinite(central.gm_km3_s2) and central.gm_km3_s2 > 0):
            raise InputError("case.central_body", case.central_body, "a body with a known GM")
        return cls(
            central,
            reg.get(case.departure_body),
            reg.get(case.target_body),
            float(central.gm_km3_s2),
            pole,
        )

    @property
    def departure_is_launch(self) -> bool:
        """Whether the arc leaves a body with mass and size, so that C3 and DLA describe what a
        launch vehicle must deliver (leaving a satellite given by elements is a plain burn)."""
        return has_mass(self.departure)


def body_states(case: Case, bodies: CaseBodies, body: Body, jd_tdb: NDArray, field_name: str):
    """States of a case body about the case's central body in ICRF."""
    return states(
        body.name,
        jd_tdb,
        central=bodies.central.name,
        frame="icrf",
        source=case.ephemeris_source,
        registry=case.registry(),
        field=field_name,
    )


def transfer_angle_deg(r1: NDArray, r2: NDArray, pole: NDArray, retrograde: bool) -> NDArray:
    """Angle swept from r1 to r2 in the sense of motion about ``pole``, deg in [0, 360)."""
    cross = np.cross(r1, r2)
    angle = np.degrees(
        np.arctan2(np.linalg.norm(cross, axis=-1), np.einsum("...i,...i->...", r1, r2))
    )
    ahead = np.einsum("...i,i->...", cross, pole) >= 0.0
    if retrograde:
        ahead = ~ahead
    return np.where(ahead, angle, 360.0 - angle)


__all__ = ["CaseBodies", "body_states", "transfer_angle_deg"]
