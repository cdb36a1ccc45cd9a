"""Reference frames: equatorial J2000 (ICRF), ecliptic J2000, and planet-equator frames.

* ``"icrf"``: the frame of the JPL DE ephemerides (ICRF axes, which agree with the mean equator
  and equinox of J2000, EME2000, to about 0.02 arcsec). DLA and RLA are measured here.
* ``"ecliptic"``: the mean ecliptic and equinox of J2000, obtained from ICRF by a rotation of
  the J2000 obliquity, 84381.406 arcsec (IAU 2006, docs/references.md 4.4 [FOUND]), about +x. The
  ~0.02 arcsec frame bias between ICRF and EME2000 is neglected (common practice; far below
  anything a two-body design study resolves). Used for pictures and for Sun-centred "prograde".
* Planet-equator frames (``equator_frame(pole_ra_deg, pole_dec_deg)``): z along the body's north
  pole given in ICRF right ascension/declination, x along the ascending node of the body's
  equator on the ICRF equator (the IAU convention for the node, right ascension pole_ra + 90 deg).

All vectors are arrays of shape (..., 3); rotation is ``v_to = v_from @ M.T`` for each vector.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
from numpy.typing import ArrayLike, NDArray

from solver.constants import OBLIQUITY_J2000_IAU1976_RAD, OBLIQUITY_J2000_RAD
from solver.errors import InputError

ICRF = "icrf"
ECLIPTIC = "ecliptic"
ECLIPTIC_IAU1976 = "ecliptic_iau1976"
NAMED_FRAMES: tuple[str, ...] = (ICRF, ECLIPTIC, ECLIPTIC_IAU1976)
FRAME_ALIASES: dict[str, str] = {"ecliptic_iau2006": ECLIPTIC}
"""Other accepted spellings of named frames."""


def _rot_x(angle_rad: float) -> NDArray[np.float64]:
    """Matrix that expresses a vector in axes turned by +angle about x (a frame rotation)."""
    c, s = np.cos(angle_rad), np.sin(angle_rad)
    return np.array([[1.0, 0.0, 0.0], [0.0, c, s], [0.0, -s, c]])


# v_ecliptic = ICRF_TO_ECLIPTIC @ v_icrf
ICRF_TO_ECLIPTIC: NDArray[np.float64] = _rot_x(OBLIQUITY_J2000_RAD)
ICRF_TO_ECLIPTIC.setflags(write=False)
ICRF_TO_ECLIPTIC_IAU1976: NDArray[np.float64] = _rot_x(OBLIQUITY_J2000_IAU1976_RAD)
ICRF_TO_ECLIPTIC_IAU1976.setflags(write=False)


@dataclass(frozen=True)
class EquatorFrame:
    """A body's equator frame, fixed at the IAU pole direction given (no precession of the pole).

    Attributes
    ----------
    name : str
        Label for messages, e.g. ``"mars equator"``.
    pole_ra_deg, pole_dec_deg : float
        North pole right ascension and declination in ICRF, deg.
    """

    name: str
    pole_ra_deg: float
    pole_dec_deg: float
    icrf_to_frame: NDArray[np.float64] = field(init=False, repr=False, compare=False)

    def __post_init__(self) -> None:
        ra = np.radians(self.pole_ra_deg)
        dec = np.radians(self.pole_dec_deg)
        z_axis = np.array([np.cos(dec) * np.cos(ra), np.cos(dec) * np.sin(ra), np.sin(dec)])
        # Ascending node of the body's equator on the ICRF equator: ICRF z cross pole.
        x_axis = np.array([-np.sin(ra), np.cos(ra), 0.0])
        y_axis = np.cross(z_axis, x_axis)
        matrix = np.vstack([x_axis, y_axis, z_axis])
        matrix.setflags(write=False)
        object.__setattr__(self, "icrf_to_frame", matrix)


def equator_frame(pole_ra_deg: float, pole_dec_deg: float, name: str = "equator") -> EquatorFrame:
    """Equator frame of a body whose north pole is at (pole_ra_deg, pole_dec_deg) in ICRF."""
    for field_name, value, lo, hi in (
        ("pole_ra_deg", pole_ra_deg, -360.0, 360.0),
        ("pole_dec_deg", pole_dec_deg, -90.0, 90.0),
    ):
        if not (np.isfinite(value) and lo <= value <= hi):
            raise InputError(field_name, value, f"a number of degrees in [{lo}, {hi}]")
    return EquatorFrame(name, float(pole_ra_deg), float(pole_dec_deg))


Frame = str | EquatorFrame


def _icrf_to(frame: Frame, field_name: str) -> NDArray[np.float64]:
    if isinstance(frame, EquatorFrame):
        return frame.icrf_to_frame
    key = str(frame).strip().lower() if isinstance(frame, str) else frame
    key = FRAME_ALIASES.get(key, key)
    if key == ICRF:
        return np.eye(3)
    if key == ECLIPTIC:
        return ICRF_TO_ECLIPTIC
    if key == ECLIPTIC_IAU1976:
        return ICRF_TO_ECLIPTIC_IAU1976
    raise InputError(
        field_name, frame, "'icrf', 'ecliptic' or 'ecliptic_iau1976' (or an EquatorFrame)"
    )


def check_frame(frame: Frame, field_name: str = "frame") -> Frame:
    """Return ``frame`` normalised (lower-case name or the EquatorFrame), or raise InputError."""
    _icrf_to(frame, field_name)
    if isinstance(frame, EquatorFrame):
        return frame
    key = frame.strip().lower()
    return FRAME_ALIASES.get(key, key)


def rotation_matrix(from_frame: Frame, to_frame: Frame) -> NDArray[np.float64]:
    """3x3 matrix M with ``v_to = M @ v_from``."""
    m_from = _icrf_to(from_frame, "from_frame")
    m_to = _icrf_to(to_frame, "to_frame")
    return m_to @ m_from.T


def rotate(vectors: ArrayLike, from_frame: Frame, to_frame: Frame) -> NDArray[np.float64]:
    """Express vectors given in ``from_frame`` in ``to_frame`` (same origin; a pure rotation).

    Parameters
    ----------
    vectors : array_like, shape (..., 3)
        Position or velocity vectors, any units (unchanged by a rotation).
    from_frame, to_frame : str or EquatorFrame
        ``"icrf"``, ``"ecliptic"`` or an :class:`EquatorFrame`.

    Returns
    -------
    ndarray, shape (..., 3)

    Notes
    -----
    The frames are inertial and fixed at J2000, so velocities rotate exactly like positions.

    Examples
    --------
    >>> import numpy as np
    >>> v = rotate([0.0, 0.0, 1.0], "ecliptic", "icrf")   # ecliptic north pole in ICRF
    >>> round(float(np.degrees(np.arcsin(v[2]))), 4)       # its declination is 90 - obliquity
    66.5607
    """
    arr = np.asarray(vectors, dtype=float)
    if arr.shape[-1:] != (3,):
        raise InputError("vectors", f"array of shape {arr.shape}", "an array of shape (..., 3)")
    matrix = rotation_matrix(from_frame, to_frame)
    return arr @ matrix.T


__all__ = [
    "ECLIPTIC",
    "ECLIPTIC_IAU1976",
    "FRAME_ALIASES",
    "ICRF",
    "ICRF_TO_ECLIPTIC",
    "ICRF_TO_ECLIPTIC_IAU1976",
    "NAMED_FRAMES",
    "EquatorFrame",
    "Frame",
    "check_frame",
    "equator_frame",
    "rotate",
    "rotation_matrix",
]
