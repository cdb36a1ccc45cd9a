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


class MassReason(IntEnum):
    """Why an arc that exists has no mass numbers (injected, propellant, delivered), as ``int8``.

    Mass is missing for a reason of the case (no vehicle and no wet mass given), of the vehicle
    (the C3 lies outside its performance table, which is never extrapolated) or of the
    spacecraft (a burn that no propulsion system makes).
    """

    OK = 0
    NO_ARC = 1
    NO_MASS_GIVEN = 2
    C3_BELOW_TABLE = 3
    C3_ABOVE_TABLE = 4
    NOTHING_LEFT_AFTER_DEDUCTIONS = 5
    NO_DEPARTURE_PROPULSION = 6
    NO_ARRIVAL_PROPULSION = 7

    @property
    def description(self) -> str:
        """Plain-language explanation, as shown in exports and details."""
        return _MASS_DESCRIPTIONS[self]


_MASS_DESCRIPTIONS = {
    MassReason.OK: "mass computed",
    MassReason.NO_ARC: "no arc",
    MassReason.NO_MASS_GIVEN: (
        "no spacecraft mass: the case gives neither [[vehicles]] nor spacecraft.wet_mass_max_kg"
    ),
    MassReason.C3_BELOW_TABLE: "C3 below the launch vehicle's performance table (not extrapolated)",
    MassReason.C3_ABOVE_TABLE: "C3 above the launch vehicle's performance table (not extrapolated)",
    MassReason.NOTHING_LEFT_AFTER_DEDUCTIONS: (
        "the vehicle lifts nothing at this C3 after its adapter and margin deductions"
    ),
    MassReason.NO_DEPARTURE_PROPULSION: "no propulsion system makes the departure burn",
    MassReason.NO_ARRIVAL_PROPULSION: "no propulsion system makes the arrival burn",
}


def describe_mass(code: int) -> str:
    """Description of an integer mass reason code (``"unknown reason"`` for foreign codes)."""
    try:
        return MassReason(int(code)).description
    except ValueError:
        return "unknown reason"
