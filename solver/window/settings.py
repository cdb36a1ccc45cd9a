"""Every setting of a case file, described once, as data.

Each :class:`Setting` names its key, kind, bounds, unit, default and label, and, when the
dashboard may change it, its link parameter and the kind of control that edits it. The case
parser validates every scalar setting from this table; the dashboard builds its URL state and its
controls from it; ``docs/case-format.md`` lists it. Adding a scalar setting is one entry here
plus the use of its value; rules that tie several settings together (an arrival window after
the departure window, an apoapsis above the periapsis) stay in :mod:`solver.window.case`.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass
from typing import Any, Literal

from solver.errors import InputError, has_control_characters

Kind = Literal["number", "integer", "text", "choice", "date", "body"]
Control = Literal["number", "dropdown", "range", "none"]


@dataclass(frozen=True)
class Setting:
    """One key of a case file.

    Attributes
    ----------
    key : str
        Dotted key, ``"section.name"`` (``"limits.c3_max_km2_s2"``).
    kind : {"number", "integer", "text", "choice", "date", "body"}
        ``number`` is a float, ``date`` an ISO 8601 UTC date, ``body`` a body name.
    label : str
        Short label for screens (``"C3 max"``).
    unit : str
        Unit shown beside values (``"km²/s²"``); empty for none.
    low, high : float or None
        Inclusive bounds of numbers and integers.
    choices : tuple of str
        Accepted values of a ``choice`` (lower case).
    default : Any
        Value when the key is absent; None means "not set" (an optional setting).
    required : bool
        The key must be given.
    url : str or None
        Link parameter of the dashboard (None: not changed from the dashboard).
    control : {"number", "dropdown", "range", "none"}
        Kind of dashboard control that edits it.
    description : str
        One line for the case-format documentation.
    max_chars : int
        Longest text of a ``text`` setting.
    multiline : bool
        A ``text`` setting that may hold line breaks and tabs (other control characters are
        refused in every text: a newline in a title would break the CSV header it goes into).
    """

    key: str
    kind: Kind
    label: str
    unit: str = ""
    low: float | None = None
    high: float | None = None
    choices: tuple[str, ...] = ()
    default: Any = None
    required: bool = False
    url: str | None = None
    control: Control = "none"
    description: str = ""
    max_chars: int = 200
    multiline: bool = False

    @property
    def section(self) -> str:
        return self.key.split(".", 1)[0]

    @property
    def name(self) -> str:
        return self.key.split(".", 1)[1]

    @property
    def accepted(self) -> str:
        """What is accepted, in words, for error messages."""
        unit = f" {self.unit}" if self.unit else ""
        if self.kind in ("number", "integer"):
            what = "an integer" if self.kind == "integer" else "a number"
            return f"{what} from {_g(self.low)} to {_g(self.high)}{unit}"
        if self.kind == "choice":
            return " or ".join(f"'{c}'" for c in self.choices)
        if self.kind == "date":
            return "an ISO 8601 UTC date, e.g. 2031-01-01"
        if self.kind == "body":
            return "a body name (arcwindow bodies lists them)"
        breaks = "line breaks allowed, no other" if self.multiline else "no"
        return f"text of 1 to {self.max_chars} characters, {breaks} control characters"

    def read(self, table: Mapping[str, Any]) -> Any:
        """The validated value of this setting in its section's ``table`` (or its default)."""
        value = table.get(self.name)
        if value is None:
            if self.required:
                raise InputError(self.key, "(missing)", self.accepted)
            return self.default
        return self.check(value)

    def check(self, value: Any) -> Any:
        """``value`` validated and converted to this setting's type; InputError otherwise."""
        if self.kind in ("number", "integer"):
            if isinstance(value, bool) or not isinstance(value, int | float):
                raise InputError(self.key, value, self.accepted)
            if self.kind == "integer" and not isinstance(value, int):
                raise InputError(self.key, value, self.accepted)
            try:
                number = float(value)
            except OverflowError:  # an integer beyond any float (above 1.8e308)
                raise InputError(self.key, value, self.accepted) from None
            if not math.isfinite(number) or not (
                (self.low is None or number >= self.low)
                and (self.high is None or number <= self.high)
            ):
                raise InputError(self.key, value, self.accepted)
            return int(number) if self.kind == "integer" else number
        if self.kind == "date":
            text = value.isoformat() if hasattr(value, "isoformat") else value
            if not isinstance(text, str) or not text.strip():
                raise InputError(self.key, value, self.accepted)
            return text.strip()
        if not isinstance(value, str) or not value.strip():
            raise InputError(self.key, value, self.accepted)
        if has_control_characters(value, allow_breaks=self.multiline):
            raise InputError(self.key, value, self.accepted)
        if self.kind == "text" and len(value.strip()) > self.max_chars:
            raise InputError(self.key, value, self.accepted)
        if self.kind == "choice":
            choice = value.strip().lower()
            if choice not in self.choices:
                raise InputError(self.key, value, self.accepted)
            return choice
        return value.strip()


def _g(value: float | None) -> str:
    if value is None:
        return "any"
    if float(value).is_integer() and abs(value) >= 1e4:
        return f"{int(value)}"
    return f"{value:g}"


_STEP = {
    "kind": "number",
    "unit": "days",
    "low": 1.0 / 1440.0,
    "high": 3650.0,
    "default": 1.0,
    "control": "number",
}

SETTINGS: tuple[Setting, ...] = (
    # [case]
    Setting(
        "case.title",
        "text",
        "title",
        required=True,
        description="Name of the case: one line of at most 200 characters.",
    ),
    Setting(
        "case.description",
        "text",
        "description",
        default="",
        max_chars=4000,
        multiline=True,
        description="Free text, up to 4000 characters (line breaks allowed).",
    ),
    Setting(
        "case.central_body",
        "body",
        "central body",
        required=True,
        description="The body the arcs orbit (sun, or a planet for transfers between moons).",
    ),
    Setting(
        "case.departure_body",
        "body",
        "from",
        required=True,
        url="from",
        control="dropdown",
        description="The body the arcs leave.",
    ),
    Setting(
        "case.target_body",
        "body",
        "to",
        required=True,
        url="to",
        control="dropdown",
        description="The body the arcs reach.",
    ),
    # [window]
    Setting(
        "window.departure_start",
        "date",
        "departures from",
        unit="UTC",
        required=True,
        control="range",
        description="First departure date.",
    ),
    Setting(
        "window.departure_end",
        "date",
        "departures to",
        unit="UTC",
        required=True,
        control="range",
        description="Last departure date (kept when the step divides the window).",
    ),
    Setting(
        "window.departure_step_days",
        label="departure step",
        url="dstep",
        description="Departure grid step, 1 minute to 3650 days.",
        **_STEP,  # type: ignore[arg-type]
    ),
    Setting(
        "window.arrival_start",
        "date",
        "arrivals from",
        unit="UTC",
        required=True,
        control="range",
        description="First arrival date.",
    ),
    Setting(
        "window.arrival_end",
        "date",
        "arrivals to",
        unit="UTC",
        required=True,
        control="range",
        description="Last arrival date (kept when the step divides the window).",
    ),
    Setting(
        "window.arrival_step_days",
        label="arrival step",
        url="astep",
        description="Arrival grid step, 1 minute to 3650 days.",
        **_STEP,  # type: ignore[arg-type]
    ),
    # [transfer]
    Setting(
        "transfer.max_revolutions",
        "integer",
        "max revolutions",
        low=0,
        high=20,
        default=0,
        url="revs",
        control="number",
        description="Complete revolutions about the central body, 0 to 20; every count up to "
        "this is solved, both branches.",
    ),
    Setting(
        "transfer.direction",
        "choice",
        "direction",
        choices=("prograde", "retrograde"),
        default="prograde",
        description="Sense of motion about the ecliptic pole (Sun-centred) or the central "
        "planet's north pole.",
    ),
    # [departure_orbit]
    Setting(
        "departure_orbit.altitude_km",
        "number",
        "parking orbit altitude",
        unit="km",
        low=0.0,
        high=1e7,
        url="park",
        control="number",
        description="Circular parking orbit about the departure body; without it the launch "
        "vehicle delivers the C3 and the departure Δv is 0.",
    ),
    # [arrival_orbit]
    Setting(
        "arrival_orbit.mode",
        "choice",
        "arrival",
        choices=("capture", "flyby", "rendezvous"),
        url="mode",
        control="dropdown",
        description="capture into an orbit, flyby (no burn) or rendezvous (match velocity); "
        "default: capture when a periapsis is given, flyby for a body with mass, else "
        "rendezvous.",
    ),
    Setting(
        "arrival_orbit.periapsis_altitude_km",
        "number",
        "capture periapsis",
        unit="km",
        low=0.0,
        high=1e8,
        url="capp",
        control="number",
        description="Periapsis altitude of the capture orbit.",
    ),
    Setting(
        "arrival_orbit.apoapsis_altitude_km",
        "number",
        "capture apoapsis",
        unit="km",
        low=0.0,
        high=1e9,
        url="capa",
        control="number",
        description="Apoapsis altitude of the capture orbit (default: the periapsis, circular).",
    ),
    Setting(
        "arrival_orbit.entry_altitude_km",
        "number",
        "entry interface",
        unit="km",
        low=0.0,
        high=1e5,
        description="Altitude of the entry interface, for the entry speed.",
    ),
    # [limits]
    Setting(
        "limits.c3_max_km2_s2",
        "number",
        "C3 max",
        unit="km²/s²",
        low=0.0,
        high=1e4,
        url="c3max",
        control="number",
        description="Largest launch energy.",
    ),
    Setting(
        "limits.vinf_arrival_max_km_s",
        "number",
        "arrival v∞ max",
        unit="km/s",
        low=0.0,
        high=200.0,
        url="vinfmax",
        control="number",
        description="Largest arrival v∞.",
    ),
    Setting(
        "limits.dla_max_deg",
        "number",
        "|DLA| max",
        unit="deg",
        low=0.0,
        high=90.0,
        url="dlamax",
        control="number",
        description="Largest |declination| of the departure asymptote.",
    ),
    Setting(
        "limits.tof_min_days",
        "number",
        "TOF min",
        unit="days",
        low=0.0,
        high=1e5,
        url="tofmin",
        control="number",
        description="Shortest time of flight.",
    ),
    Setting(
        "limits.tof_max_days",
        "number",
        "TOF max",
        unit="days",
        low=0.0,
        high=1e5,
        url="tofmax",
        control="number",
        description="Longest time of flight.",
    ),
    Setting(
        "limits.delivered_mass_min_kg",
        "number",
        "delivered mass min",
        unit="kg",
        low=0.0,
        high=1e7,
        url="massmin",
        control="number",
        description="Smallest mass delivered into the final orbit (needs a spacecraft mass: "
        "[[vehicles]] or spacecraft.wet_mass_max_kg).",
    ),
    # [ephemeris]
    Setting(
        "ephemeris.source",
        "choice",
        "ephemeris",
        choices=("de423", "mean"),
        default="de423",
        description="JPL DE423 (default) or JPL's approximate mean elements (1800-2050).",
    ),
    Setting(
        "ephemeris.ecliptic",
        "choice",
        "ecliptic of element bodies",
        choices=("iau2006", "iau1976"),
        default="iau2006",
        description="The J2000 ecliptic of [[bodies]] elements given in the ecliptic (frame "
        "'ecliptic', or no frame about the Sun): 'iau2006', obliquity 84381.406 arcsec, the "
        "ecliptic of arcwindow's outputs; or 'iau1976', 84381.448 arcsec, common for small-body "
        "element lists (0.042 arcsec apart: up to ~85 km at 2.8 au). A body's frame "
        "'ecliptic_iau2006' or 'ecliptic_iau1976' says it outright. Survey catalogues read "
        "with the base case's choice.",
    ),
    # [launch_site]: optional, for Earth departures (see solver.launch.site)
    Setting(
        "launch_site.name",
        "text",
        "launch site",
        default="launch site",
        description="Name of the launch site.",
    ),
    Setting(
        "launch_site.latitude_deg",
        "number",
        "site latitude",
        unit="deg",
        low=-89.0,
        high=89.0,
        description="Geocentric latitude of the site, north positive (spherical Earth); "
        "required with [launch_site].",
    ),
    Setting(
        "launch_site.longitude_deg",
        "number",
        "site longitude",
        unit="deg",
        low=-180.0,
        high=360.0,
        description="East longitude of the site; required with [launch_site].",
    ),
    Setting(
        "launch_site.azimuth_min_deg",
        "number",
        "azimuth from",
        unit="deg",
        low=0.0,
        high=360.0,
        description="Allowed launch azimuths run clockwise (from north through east) from this; "
        "required with [launch_site].",
    ),
    Setting(
        "launch_site.azimuth_max_deg",
        "number",
        "azimuth to",
        unit="deg",
        low=0.0,
        high=720.0,
        description="Where the allowed azimuths end, clockwise from azimuth_min_deg: above it "
        "and at most 360 past it (a range through north is written past 360: 340 to 380); "
        "required with [launch_site].",
    ),
    # [spacecraft]: optional (with [[vehicles]] and [[propulsion]], see solver.window.mass)
    Setting(
        "spacecraft.vehicle",
        "text",
        "launch vehicle",
        url="vehicle",
        control="dropdown",
        description="Name of the [[vehicles]] entry the mass metrics use (default: the first).",
    ),
    Setting(
        "spacecraft.wet_mass_max_kg",
        "number",
        "wet mass limit",
        unit="kg",
        low=1.0,
        high=1e7,
        description="Largest spacecraft mass at injection (full tanks); without [[vehicles]], "
        "the spacecraft's mass at injection.",
    ),
    Setting(
        "spacecraft.required_delivered_mass_kg",
        "number",
        "required delivered mass",
        unit="kg",
        low=0.0,
        high=1e7,
        description="Mass the mission needs in the final orbit; the mass margin is measured "
        "against it.",
    ),
)
"""Every scalar setting of a case file, in the order the documentation lists them."""

SETTING: dict[str, Setting] = {s.key: s for s in SETTINGS}
"""Settings by dotted key."""

SECTIONS: dict[str, frozenset[str]] = {
    section: frozenset(s.name for s in SETTINGS if s.section == section)
    for section in dict.fromkeys(s.section for s in SETTINGS)
}
"""The keys each ``[section]`` of a case file accepts (``[[bodies]]`` is separate)."""


def read_setting(raw: Mapping[str, Any], key: str) -> Any:
    """The validated value of setting ``key`` in a parsed case document (or its default)."""
    setting = SETTING[key]
    table = raw.get(setting.section) or {}
    return setting.read(table)


__all__ = ["SECTIONS", "SETTING", "SETTINGS", "Setting", "read_setting"]
