"""Why an arc or a grid cell holds no number.

Arrays of these codes travel beside every solver result: a bad cell is NaN plus a reason, never
an exception in the middle of a grid and never a silently wrong value.
"""

from __future__ import annotations

from enum import IntEnum


class Reason(IntEnum):
    """Reason codes stored as ``int8`` arrays next to results."""

    OK = 0
    NONFINITE_INPUT = 1
    ZERO_RADIUS = 2
    NONPOSITIVE_TOF = 3
    PLANE_UNDEFINED = 4
    BELOW_MINIMUM_TOF = 5
    NOT_CONVERGED = 6
    NOT_REQUESTED = 7
    OUTSIDE_EPHEMERIS = 8
    ARRIVAL_NOT_AFTER_DEPARTURE = 9
    RESONANT_RETURN = 10
    NO_RESONANT_ORBIT = 11

    @property
    def description(self) -> str:
        """Plain-language explanation, as shown in hover text and exports."""
        return _DESCRIPTIONS[self]


_DESCRIPTIONS = {
    Reason.OK: "solved",
    Reason.NONFINITE_INPUT: "an input is NaN or infinite",
    Reason.ZERO_RADIUS: "a position vector has zero length (or under 1e-10 of the other)",
    Reason.NONPOSITIVE_TOF: "time of flight is not positive",
    Reason.PLANE_UNDEFINED: (
        "transfer angle within tolerance of 0 or 180 degrees: the transfer plane is undefined"
    ),
    Reason.BELOW_MINIMUM_TOF: "time of flight is below the minimum for this many revolutions",
    Reason.NOT_CONVERGED: "the iteration did not converge",
    Reason.NOT_REQUESTED: "not requested (more revolutions than asked for)",
    Reason.OUTSIDE_EPHEMERIS: "a date lies outside the ephemeris range",
    Reason.ARRIVAL_NOT_AFTER_DEPARTURE: "arrival is not after departure",
    Reason.RESONANT_RETURN: (
        "a resonant return: the leg comes back to the body it left with both positions on one "
        "line through the central body, so the plane of the arc is undefined"
    ),
    Reason.NO_RESONANT_ORBIT: (
        "no orbit of the resonant period reaches the body's distance from the central body"
    ),
}


def describe(code: int) -> str:
    """Description of an integer reason code (``"unknown reason"`` for foreign codes)."""
    try:
        return Reason(int(code)).description
    except ValueError:
        return "unknown reason"
