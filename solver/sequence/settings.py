"""Every setting of a case file's ``[sequence]`` section, described once, as data.

The same :class:`~solver.window.settings.Setting` records as the one-leg settings: key, kind,
bounds, unit, default, label and a line for the documentation. ``sequence.*`` keys belong to a
``[sequence]`` (or ``[[sequence]]``) table, ``leg.*`` keys to each ``[[sequence.legs]]`` table.
Rules that tie settings together (a stay's maximum above its minimum, the last leg ending at the
target) are in :mod:`solver.sequence.spec`. Also here: the default lowest flyby altitude of each
built-in body, which the case can override per body or per flyby.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from typing import Any

from solver.errors import InputError
from solver.window.settings import Setting

NODE_KINDS = ("flyby", "stop")
"""What can happen at an intermediate body; the last leg ends at the target (``arrival``)."""

STOP_MODES = ("capture", "rendezvous")
"""How a stop is entered and left (the burns of ``[arrival_orbit]``'s modes of those names)."""

OBJECTIVES = ("dv_total_km_s", "c3_km2_s2", "vinf_arrival_km_s", "duration_days")
"""What a search minimizes: total Δv (as counted, see the provenance), launch energy, arrival v∞
or total duration."""

SEQUENCE_SETTINGS: tuple[Setting, ...] = (
    Setting(
        "sequence.name",
        "text",
        "sequence",
        description="Label of the sequence (default: its bodies joined by '-'); unique in a case.",
    ),
    Setting(
        "sequence.objective",
        "choice",
        "objective",
        choices=OBJECTIVES,
        default="dv_total_km_s",
        url="objective",
        control="dropdown",
        description="What the search minimizes among candidates within limits.",
    ),
    Setting(
        "sequence.unpowered_only",
        "choice",
        "unpowered flybys only",
        choices=("true", "false"),
        default="false",
        url="unpowered",
        control="dropdown",
        description="Refuse flybys whose arrival and departure v∞ differ by more than the "
        "tolerance (true/false, as a TOML boolean).",
    ),
    Setting(
        "sequence.unpowered_tolerance_km_s",
        "number",
        "unpowered tolerance",
        unit="km/s",
        low=0.0,
        high=10.0,
        default=0.001,
        description="Largest | |v∞ out| - |v∞ in| | of an unpowered flyby.",
    ),
    Setting(
        "sequence.duration_max_days",
        "number",
        "duration max",
        unit="days",
        low=0.0,
        high=1e5,
        url="durmax",
        control="number",
        description="Limit: longest time from departure to final arrival.",
    ),
    Setting(
        "sequence.flyby_dv_max_km_s",
        "number",
        "flyby Δv max",
        unit="km/s",
        low=0.0,
        high=50.0,
        url="fdvmax",
        control="number",
        description="Limit: largest periapsis burn of any one flyby.",
    ),
    Setting(
        "sequence.resonance_miss_max_km",
        "number",
        "resonance miss max",
        unit="km",
        low=0.0,
        high=1e9,
        default=2.0e6,
        description="Limit of a resonant return: the largest distance between the body's "
        "positions at the two encounters (the model joins them as one point).",
    ),
    Setting(
        "sequence.resonance_angle_deg",
        "number",
        "resonance angle",
        unit="deg",
        low=1e-6,
        high=5.0,
        default=0.1,
        description="A leg back to the body it left whose positions are closer than this to "
        "the same direction (or opposite) has no defined plane: reported as a resonant return.",
    ),
    Setting(
        "leg.to",
        "body",
        "to",
        url="to",
        control="dropdown",
        description="The body at the end of the leg (the last leg ends at case.target_body, "
        "which it may repeat or leave out).",
    ),
    Setting(
        "leg.kind",
        "choice",
        "kind",
        choices=(*NODE_KINDS, "arrival"),
        description="flyby or stop at an intermediate body; arrival (the default) on the last leg.",
    ),
    Setting(
        "leg.tof_min_days",
        "number",
        "TOF min",
        unit="days",
        low=1.0 / 1440.0,
        high=1e5,
        required=True,
        url="tofmin",
        control="number",
        description="Shortest time of flight of the leg (a search bound and a limit).",
    ),
    Setting(
        "leg.tof_max_days",
        "number",
        "TOF max",
        unit="days",
        low=1.0 / 1440.0,
        high=1e5,
        required=True,
        url="tofmax",
        control="number",
        description="Longest time of flight of the leg (a search bound and a limit).",
    ),
    Setting(
        "leg.tof_step_days",
        "number",
        "TOF step",
        unit="days",
        low=1.0 / 1440.0,
        high=3650.0,
        description="Step of the leg's TOF in the grid search (default: the span in 40 steps).",
    ),
    Setting(
        "leg.max_revolutions",
        "integer",
        "max revolutions",
        low=0,
        high=20,
        description="Complete revolutions of the leg, 0 to 20, both branches (default: "
        "transfer.max_revolutions).",
    ),
    Setting(
        "leg.resonance",
        "text",
        "resonance",
        description="Fly a leg back to the body it left as a resonant return, 'N:M' (the body "
        "makes N revolutions while the spacecraft makes M): the orbit whose period is TOF/M "
        "leaves and rejoins the body at one point, its direction chosen by the search.",
    ),
    Setting(
        "leg.altitude_min_km",
        "number",
        "flyby altitude min",
        unit="km",
        low=0.0,
        high=1e8,
        url="altmin",
        control="number",
        description="Lowest periapsis altitude of this flyby (default: the body's entry in "
        "sequence.flyby_altitude_min_km, else the built-in default).",
    ),
    Setting(
        "leg.stay_min_days",
        "number",
        "stay min",
        unit="days",
        low=0.0,
        high=1e5,
        default=0.0,
        url="staymin",
        control="number",
        description="Shortest stay at a stop.",
    ),
    Setting(
        "leg.stay_max_days",
        "number",
        "stay max",
        unit="days",
        low=0.0,
        high=1e5,
        url="staymax",
        control="number",
        description="Longest stay at a stop (required for a stop).",
    ),
    Setting(
        "leg.stay_step_days",
        "number",
        "stay step",
        unit="days",
        low=1.0 / 1440.0,
        high=3650.0,
        description="Step of the stay in the grid search (default: the span in 20 steps).",
    ),
    Setting(
        "leg.mode",
        "choice",
        "stop orbit",
        choices=STOP_MODES,
        description="capture into an orbit (when a periapsis altitude is given, the default) or "
        "rendezvous (match the body's velocity; the default for bodies without GM and radius).",
    ),
    Setting(
        "leg.periapsis_altitude_km",
        "number",
        "stop orbit periapsis",
        unit="km",
        low=0.0,
        high=1e8,
        description="Periapsis altitude of the orbit of a capture stop.",
    ),
    Setting(
        "leg.apoapsis_altitude_km",
        "number",
        "stop orbit apoapsis",
        unit="km",
        low=0.0,
        high=1e9,
        description="Apoapsis altitude of that orbit (default: the periapsis, circular).",
    ),
)
"""Every scalar setting of a sequence, in the order the documentation lists them. Those with a
``url`` are edited on the dashboard's sequence page (a ``leg.*`` one per leg, its link parameter
followed by the leg's number: ``tofmin2``)."""

SEQUENCE_SETTING: dict[str, Setting] = {s.key: s for s in SEQUENCE_SETTINGS}

SEQUENCE_KEYS = frozenset(s.name for s in SEQUENCE_SETTINGS if s.section == "sequence") | {
    "legs",
    "flyby_altitude_min_km",
}
"""Keys a ``[sequence]`` table accepts."""

LEG_KEYS = frozenset(s.name for s in SEQUENCE_SETTINGS if s.section == "leg")
"""Keys a ``[[sequence.legs]]`` table accepts."""

FLYBY_ALTITUDE_MIN_KM: dict[str, tuple[float, str]] = {
    "mercury": (200.0, "terrain clearance (common practice)"),
    "venus": (300.0, "above the sensible atmosphere (common practice)"),
    "earth": (300.0, "above the sensible atmosphere (common practice)"),
    "moon": (100.0, "terrain clearance (common practice)"),
    "mars": (200.0, "above the sensible atmosphere (common practice)"),
    "jupiter": (214_476.0, "periapsis at 4 Jupiter radii, outside the worst radiation"),
    "saturn": (80_000.0, "periapsis outside the main rings (A ring edge ~136,800 km)"),
    "uranus": (5_000.0, "above the atmosphere"),
    "neptune": (5_000.0, "above the atmosphere"),
    "pluto": (500.0, "terrain clearance"),
}
"""Default lowest flyby periapsis altitude of each built-in body, km, with the reason.

arcwindow's defaults for preliminary design, not a mission's rules: a case sets its own per body
(``[sequence.flyby_altitude_min_km]``) or per flyby (``altitude_min_km`` of the leg)."""

ELEMENT_BODY_ALTITUDE_FRACTION = 0.1
"""A body defined by elements (with GM and radius) defaults to a periapsis altitude of this
fraction of its radius."""


def default_flyby_altitude_km(name: str, radius_km: float) -> float:
    """The built-in default lowest flyby altitude of a body, km."""
    entry = FLYBY_ALTITUDE_MIN_KM.get(name.lower())
    if entry is not None:
        return entry[0]
    return ELEMENT_BODY_ALTITUDE_FRACTION * radius_km if math.isfinite(radius_km) else 0.0


def read_setting_at(key: str, table: Mapping[str, Any], where: str) -> Any:
    """The validated value of sequence setting ``key`` in ``table``; errors name ``where.name``.

    ``where`` is the path of the table as the user wrote it (``"sequence.legs[2]"``).
    """
    setting = SEQUENCE_SETTING[key]
    value = table.get(setting.name)
    if setting.kind == "choice" and isinstance(value, bool):
        value = "true" if value else "false"
    try:
        return setting.read({setting.name: value} if value is not None else {})
    except InputError as exc:
        raise InputError(f"{where}.{setting.name}", exc.value, exc.accepted) from None


__all__ = [
    "ELEMENT_BODY_ALTITUDE_FRACTION",
    "FLYBY_ALTITUDE_MIN_KM",
    "LEG_KEYS",
    "NODE_KINDS",
    "OBJECTIVES",
    "SEQUENCE_KEYS",
    "SEQUENCE_SETTING",
    "SEQUENCE_SETTINGS",
    "STOP_MODES",
    "default_flyby_altitude_km",
    "read_setting_at",
]
