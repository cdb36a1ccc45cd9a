"""Case files: one scenario in TOML (bodies, date windows, orbits, limits), validated.

A case can be written by hand::

    [case]
    title = "Vesper orbiter, 2031 opportunity"
    central_body = "sun"
    departure_body = "earth"
    target_body = "venus"

    [window]
    departure_start = "2031-01-01"
    departure_end = "2031-06-30"
    departure_step_days = 1
    arrival_start = "2031-05-01"
    arrival_end = "2031-12-31"
    arrival_step_days = 1

    [transfer]
    max_revolutions = 0
    direction = "prograde"      # angular momentum along the ecliptic pole (Sun-centred) or
                                # along the central planet's north pole

    [departure_orbit]           # optional: circular parking orbit about the departure body
    altitude_km = 200

    [ephemeris]                 # optional
    source = "de423"            # or "mean"
    ecliptic = "iau2006"        # the J2000 ecliptic of [[bodies]] elements: "iau2006"
                                # (84381.406 arcsec) or "iau1976" (84381.448 arcsec)

    [arrival_orbit]             # optional
    mode = "capture"            # "capture", "flyby" or "rendezvous"
    periapsis_altitude_km = 300
    apoapsis_altitude_km = 35000
    entry_altitude_km = 125     # optional: speed at the entry interface

    [limits]                    # optional
    c3_max_km2_s2 = 20
    vinf_arrival_max_km_s = 4.5
    dla_max_deg = 28.5
    tof_min_days = 80
    tof_max_days = 250

    # optional: [[vehicles]], [launch_site], [spacecraft], [[propulsion]] (mass and launch,
    # see solver.window.case_launch)

    [[bodies]]                  # optional, any number: bodies defined by orbital elements
    name = "Tallis"
    central_body = "sun"
    epoch_utc = "2030-01-01"
    semi_major_axis_au = 2.1
    eccentricity = 0.12
    inclination_deg = 4.0
    raan_deg = 80.0
    arg_periapsis_deg = 150.0
    mean_anomaly_deg = 10.0

Every problem raises :class:`solver.errors.InputError` naming the key (``"window.departure_end"``),
the value and what is accepted. Unknown keys are refused too, so a misspelt limit is not silently
ignored.
"""

from __future__ import annotations

import math
import tomllib
from dataclasses import asdict, dataclass, field, replace
from pathlib import Path
from typing import Any

from solver.ephemeris.bodies import Body, BodyRegistry, default_registry, has_mass
from solver.ephemeris.element_bodies import ElementBody
from solver.ephemeris.element_input import ELEMENT_FIELDS, element_body
from solver.ephemeris.frames import ECLIPTIC
from solver.ephemeris.timescales import jd_tdb_to_iso_tdb, utc_to_jd_tdb
from solver.errors import InputError
from solver.launch.site import LaunchSite
from solver.window.case_launch import (
    ARRAY_SECTIONS,
    MassModel,
    launch_toml,
    read_launch_site,
    read_mass_model,
)
from solver.window.settings import SECTIONS, SETTING, read_setting

ARRIVAL_MODES = SETTING["arrival_orbit.mode"].choices

_SECTIONS = SECTIONS


@dataclass(frozen=True)
class Limits:
    """The analyst's bounds; ``None`` means no bound."""

    c3_max_km2_s2: float | None = None
    vinf_arrival_max_km_s: float | None = None
    dla_max_deg: float | None = None
    tof_min_days: float | None = None
    tof_max_days: float | None = None
    delivered_mass_min_kg: float | None = None


@dataclass(frozen=True)
class Case:
    """A validated case. Dates are kept as the ISO strings given and as JD TDB."""

    title: str
    central_body: str
    departure_body: str
    target_body: str
    departure_start: str
    departure_end: str
    departure_step_days: float
    arrival_start: str
    arrival_end: str
    arrival_step_days: float
    max_revolutions: int = 0
    direction: str = "prograde"
    parking_altitude_km: float | None = None
    arrival_mode: str = "flyby"
    capture_periapsis_altitude_km: float | None = None
    capture_apoapsis_altitude_km: float | None = None
    entry_altitude_km: float | None = None
    limits: Limits = field(default_factory=Limits)
    ephemeris_source: str = "de423"
    element_ecliptic: str = "iau2006"
    description: str = ""
    bodies: tuple[ElementBody, ...] = ()
    mass: MassModel = field(default_factory=MassModel)
    launch_site: LaunchSite | None = None
    departure_start_jd_tdb: float = math.nan
    departure_end_jd_tdb: float = math.nan
    arrival_start_jd_tdb: float = math.nan
    arrival_end_jd_tdb: float = math.nan
    source_path: str = ""

    @property
    def retrograde(self) -> bool:
        return self.direction == "retrograde"

    def registry(self) -> BodyRegistry:
        """The built-in bodies plus this case's own element bodies."""
        return default_registry().with_bodies(*self.bodies) if self.bodies else default_registry()

    def normalized(self) -> dict[str, Any]:
        """Everything that determines the computed grid, in canonical form (for the cache key).

        The title, description and file path do not change the numbers and are left out; dates
        enter as JD TDB so ``"2031-01-01"`` and ``"2031-01-01T00:00:00Z"`` are the same case.
        """
        data = asdict(self)
        for key in (
            "title",
            "description",
            "source_path",
            "departure_start",
            "departure_end",
            "arrival_start",
            "arrival_end",
        ):
            data.pop(key)
        data["bodies"] = [asdict(b) for b in self.bodies]
        return data

    def with_changes(self, **changes: Any) -> Case:
        """A copy with some fields replaced, re-validated (used by the dashboard controls)."""
        raw = to_toml_dict(self)
        for dotted, value in changes.items():
            section, key = dotted.split(".", 1)
            if value is None:
                raw.get(section, {}).pop(key, None)
            else:
                raw.setdefault(section, {})[key] = value
        return case_from_dict(raw, source_path=self.source_path)


def with_window(
    case: Case,
    departure: tuple[str, str, float],
    arrival: tuple[str, str, float],
) -> Case:
    """A copy of a validated case with other date windows, each ``(start UTC, end UTC, step
    days)``. Only the dates are parsed again: for windows inside the case's own (refinement's
    nested grids), where nothing else can become invalid."""
    (d0, d1, d_step), (a0, a1, a_step) = departure, arrival
    jd = {
        key: float(utc_to_jd_tdb(text, field=f"window.{key}"))
        for key, text in (
            ("departure_start", d0),
            ("departure_end", d1),
            ("arrival_start", a0),
            ("arrival_end", a1),
        )
    }
    return replace(
        case,
        departure_start=d0,
        departure_end=d1,
        departure_step_days=float(d_step),
        arrival_start=a0,
        arrival_end=a1,
        arrival_step_days=float(a_step),
        departure_start_jd_tdb=jd["departure_start"],
        departure_end_jd_tdb=jd["departure_end"],
        arrival_start_jd_tdb=jd["arrival_start"],
        arrival_end_jd_tdb=jd["arrival_end"],
    )


# ---------------------------------------------------------------------------------------------
# Parsing


def load_case(path: str | Path) -> Case:
    """Read and validate a TOML case file."""
    path = Path(path)
    try:
        text = path.read_text(encoding="utf-8")
    except FileNotFoundError:
        raise InputError("case", str(path), "an existing TOML case file") from None
    except UnicodeDecodeError:
        raise InputError("case", str(path), "a UTF-8 text file") from None
    return parse_case(text, source_path=str(path))


MAX_CASE_CHARS = 1_000_000
"""A case file is a few kB; a megabyte holds thousands of ``[[bodies]]``. Longer text is refused
before it is parsed."""
MAX_TOML_DEPTH = 6
"""Tables and arrays nested deeper than this are refused with their key, so nothing downstream
walks a structure a thousand levels deep. The deepest a case needs is 5: a ``[[vehicles]]``
performance row (document, array, table, array, inline table) or a leg of ``[[sequence]]``
tables; one level is spare."""
TOML_INTEGER_RANGE = (-(2**63), 2**63 - 1)
"""TOML integers are 64-bit (TOML 1.0.0, "Integer"); Python's reader accepts any size, so larger
ones (which no float holds either) are refused here, naming the key."""


def parse_case(text: str, source_path: str = "") -> Case:
    """Validate TOML text as a case.

    Refusals are :class:`InputError` naming the key (``case file`` for text that is not TOML):
    text over :data:`MAX_CASE_CHARS`, nesting deeper than :data:`MAX_TOML_DEPTH`, integers
    outside 64 bits, and every rule of :func:`case_from_dict`.
    """
    if not isinstance(text, str):
        raise InputError("case file", type(text).__name__, "TOML text")
    if len(text) > MAX_CASE_CHARS:
        raise InputError("case file", f"{len(text):,} characters", f"at most {MAX_CASE_CHARS:,}")
    try:
        raw = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise InputError("case file", _short(str(exc)), "valid TOML (see sample_cases/)") from None
    except RecursionError:  # arrays or inline tables nested hundreds deep
        raise InputError(
            "case file", "values nested hundreds deep", f"at most {MAX_TOML_DEPTH} levels"
        ) from None
    except ValueError:  # an integer of thousands of digits (Python's conversion limit)
        raise InputError(
            "case file", "a number thousands of digits long", "64-bit integers"
        ) from None
    check_toml_shape(raw)
    return case_from_dict(raw, source_path=source_path)


def check_toml_shape(raw: Any) -> None:
    """Refuse values nested deeper than :data:`MAX_TOML_DEPTH` and integers beyond 64 bits.

    Walks the parsed document without recursion, so the check itself has no depth limit.
    """
    low, high = TOML_INTEGER_RANGE
    pending: list[tuple[str, Any, int]] = [("", raw, 0)]
    while pending:
        key, value, depth = pending.pop()
        if isinstance(value, dict):
            if depth >= MAX_TOML_DEPTH:
                raise InputError(key, "(a table)", f"no deeper nesting (at most {MAX_TOML_DEPTH})")
            for name, item in value.items():
                pending.append((f"{key}.{name}" if key else str(name), item, depth + 1))
        elif isinstance(value, list):
            if depth >= MAX_TOML_DEPTH:
                raise InputError(key, "(an array)", f"no deeper nesting (at most {MAX_TOML_DEPTH})")
            for index, item in enumerate(value, start=1):
                pending.append((f"{key}[{index}]", item, depth + 1))
        elif isinstance(value, int) and not isinstance(value, bool) and not low <= value <= high:
            raise InputError(
                key, f"an integer of {len(str(abs(value)))} digits", "a 64-bit integer"
            )


def case_from_dict(raw: dict[str, Any], source_path: str = "") -> Case:
    """Validate a parsed TOML document as a case."""
    if not isinstance(raw, dict):
        raise InputError("case file", type(raw).__name__, "a TOML table")
    for key, value in raw.items():
        if key in ("bodies", *ARRAY_SECTIONS):
            if not isinstance(value, list):
                raise InputError(key, value, f"an array of tables ([[{key}]])")
            continue
        if key == "sequence":  # multi-leg sequences: validated by solver.sequence.spec
            continue
        if key not in _SECTIONS:
            raise InputError(
                key,
                "(section)",
                "one of " + ", ".join(sorted([*_SECTIONS, "bodies", "sequence", *ARRAY_SECTIONS])),
            )
        if not isinstance(value, dict):
            raise InputError(key, value, f"a [{key}] table")
        unknown = set(value) - _SECTIONS[key]
        if unknown:
            name = sorted(unknown)[0]
            raise InputError(
                f"{key}.{name}",
                value[name],
                f"a known key of [{key}]: " + ", ".join(sorted(_SECTIONS[key])),
            )

    case = raw.get("case")
    if case is None:
        raise InputError("case", "(missing)", "a [case] table with title and bodies")
    window = raw.get("window")
    if window is None:
        raise InputError("window", "(missing)", "a [window] table with the date windows")
    arr_orbit = raw.get("arrival_orbit", {})

    def setting(key: str) -> Any:
        return read_setting(raw, key)

    title = setting("case.title")
    ecliptic = setting("ephemeris.ecliptic")
    bodies = _element_bodies(raw.get("bodies", []), ecliptic)
    registry = default_registry().with_bodies(*bodies) if bodies else default_registry()
    central = _body(registry, "case.central_body", setting("case.central_body"))
    departure = _body(registry, "case.departure_body", setting("case.departure_body"))
    target = _body(registry, "case.target_body", setting("case.target_body"))
    if departure.key == target.key and "sequence" not in raw:  # a sequence may return home
        raise InputError(
            "case.target_body", case["target_body"], "a body other than the departure body"
        )
    for role, body in (("departure_body", departure), ("target_body", target)):
        if body.key == central.key:
            raise InputError(f"case.{role}", case[role], f"a body orbiting {central.name}")

    source = setting("ephemeris.source")
    dates = {}
    for key in ("departure_start", "departure_end", "arrival_start", "arrival_end"):
        text = setting(f"window.{key}")
        dates[key] = (text, float(utc_to_jd_tdb(text, field=f"window.{key}")))
    steps = {key: setting(f"window.{key}") for key in ("departure_step_days", "arrival_step_days")}
    _check_dates_in_range(registry, (central, departure, target), source, dates)
    if dates["departure_end"][1] < dates["departure_start"][1]:
        raise InputError(
            "window.departure_end",
            dates["departure_end"][0],
            f"on or after window.departure_start ({dates['departure_start'][0]})",
        )
    if dates["arrival_end"][1] < dates["arrival_start"][1]:
        raise InputError(
            "window.arrival_end",
            dates["arrival_end"][0],
            f"on or after window.arrival_start ({dates['arrival_start'][0]})",
        )
    if dates["arrival_end"][1] <= dates["departure_start"][1]:
        raise InputError(
            "window.arrival_end",
            dates["arrival_end"][0],
            f"after window.departure_start ({dates['departure_start'][0]}): "
            "every arrival would come before every departure",
        )

    max_revs = setting("transfer.max_revolutions")
    direction = setting("transfer.direction")

    parking = setting("departure_orbit.altitude_km")
    if parking is not None and not has_mass(departure):
        raise InputError(
            "departure_orbit.altitude_km",
            parking,
            f"no parking orbit: {departure.name} has no GM and radius "
            "(leave [departure_orbit] out to depart from its orbit directly)",
        )

    mode = setting("arrival_orbit.mode")
    if mode is None:
        if has_mass(target):
            mode = "capture" if "periapsis_altitude_km" in arr_orbit else "flyby"
        else:
            mode = "rendezvous"
    periapsis = setting("arrival_orbit.periapsis_altitude_km")
    apoapsis = setting("arrival_orbit.apoapsis_altitude_km")
    entry = setting("arrival_orbit.entry_altitude_km")
    if mode == "capture":
        if not has_mass(target):
            raise InputError(
                "arrival_orbit.mode",
                mode,
                f"'rendezvous' or 'flyby' ({target.name} has no GM and radius)",
            )
        if periapsis is None:
            raise InputError(
                "arrival_orbit.periapsis_altitude_km",
                "(missing)",
                "a capture periapsis altitude, km",
            )
        if apoapsis is None:
            apoapsis = periapsis  # circular capture orbit
        if apoapsis < periapsis:
            raise InputError(
                "arrival_orbit.apoapsis_altitude_km",
                apoapsis,
                f">= arrival_orbit.periapsis_altitude_km ({periapsis:g} km)",
            )
    if entry is not None and not has_mass(target):
        raise InputError(
            "arrival_orbit.entry_altitude_km",
            entry,
            f"no entry speed: {target.name} has no GM and radius",
        )

    mass = read_mass_model(raw, departure, parking)
    launch_site = read_launch_site(raw, departure)
    limits = Limits(**{name: setting(f"limits.{name}") for name in SECTIONS["limits"]})
    if (
        limits.tof_min_days is not None
        and limits.tof_max_days is not None
        and limits.tof_max_days < limits.tof_min_days
    ):
        raise InputError(
            "limits.tof_max_days",
            limits.tof_max_days,
            f">= limits.tof_min_days ({limits.tof_min_days:g})",
        )

    return Case(
        title=title,
        central_body=central.name,
        departure_body=departure.name,
        target_body=target.name,
        departure_start=dates["departure_start"][0],
        departure_end=dates["departure_end"][0],
        departure_step_days=steps["departure_step_days"],
        arrival_start=dates["arrival_start"][0],
        arrival_end=dates["arrival_end"][0],
        arrival_step_days=steps["arrival_step_days"],
        max_revolutions=int(max_revs),
        direction=direction,
        parking_altitude_km=parking,
        arrival_mode=mode,
        capture_periapsis_altitude_km=periapsis,
        capture_apoapsis_altitude_km=apoapsis,
        entry_altitude_km=entry,
        limits=limits,
        ephemeris_source=source,
        element_ecliptic=ecliptic,
        description=setting("case.description"),
        bodies=tuple(bodies),
        mass=mass,
        launch_site=launch_site,
        departure_start_jd_tdb=dates["departure_start"][1],
        departure_end_jd_tdb=dates["departure_end"][1],
        arrival_start_jd_tdb=dates["arrival_start"][1],
        arrival_end_jd_tdb=dates["arrival_end"][1],
        source_path=source_path,
    )


def to_toml_dict(case: Case) -> dict[str, Any]:
    """The case as a TOML-shaped dict (round-trips through :func:`case_from_dict`)."""
    raw: dict[str, Any] = {
        "case": {
            "title": case.title,
            "central_body": case.central_body,
            "departure_body": case.departure_body,
            "target_body": case.target_body,
        },
        "window": {
            "departure_start": case.departure_start,
            "departure_end": case.departure_end,
            "departure_step_days": case.departure_step_days,
            "arrival_start": case.arrival_start,
            "arrival_end": case.arrival_end,
            "arrival_step_days": case.arrival_step_days,
        },
        "transfer": {"max_revolutions": case.max_revolutions, "direction": case.direction},
        "arrival_orbit": {"mode": case.arrival_mode},
        "ephemeris": {"source": case.ephemeris_source, "ecliptic": case.element_ecliptic},
    }
    if case.description:
        raw["case"]["description"] = case.description
    if case.parking_altitude_km is not None:
        raw["departure_orbit"] = {"altitude_km": case.parking_altitude_km}
    for key, value in (
        ("periapsis_altitude_km", case.capture_periapsis_altitude_km),
        ("apoapsis_altitude_km", case.capture_apoapsis_altitude_km),
        ("entry_altitude_km", case.entry_altitude_km),
    ):
        if value is not None:
            raw["arrival_orbit"][key] = value
    limits = {k: v for k, v in asdict(case.limits).items() if v is not None}
    if limits:
        raw["limits"] = limits
    if case.bodies:
        raw["bodies"] = [element_body_dict(b) for b in case.bodies]
    raw.update(launch_toml(case.mass, case.launch_site))
    return raw


def dumps_toml(case: Case) -> str:
    """The case as TOML text (for downloads and for saving an edited case)."""
    lines: list[str] = []
    raw = to_toml_dict(case)
    arrays = ("bodies", *ARRAY_SECTIONS)
    for section, table in raw.items():
        if section in arrays:
            continue
        lines.append(f"[{section}]")
        lines.extend(f"{k} = {_toml_value(v)}" for k, v in table.items())
        lines.append("")
    for section in arrays:
        for entry in raw.get(section, []):
            lines.append(f"[[{section}]]")
            lines.extend(f"{k} = {_toml_value(v)}" for k, v in entry.items())
            lines.append("")
    return "\n".join(lines)


# ---------------------------------------------------------------------------------------------
# Helpers


def _short(text: str) -> str:
    return text if len(text) < 120 else text[:117] + "..."


def _body(registry: BodyRegistry, key: str, name: str) -> Body:
    return registry.get(name, field=key)


def _element_bodies(entries: list, ecliptic: str = "iau2006") -> list[ElementBody]:
    bodies: list[ElementBody] = []
    registry = default_registry()
    for index, entry in enumerate(entries, start=1):
        prefix = f"bodies[{index}]."
        if not isinstance(entry, dict):
            raise InputError(f"bodies[{index}]", entry, "a [[bodies]] table")
        unknown = set(entry) - ELEMENT_FIELDS
        if unknown:
            key = sorted(unknown)[0]
            raise InputError(
                prefix + key,
                entry[key],
                "a known element key: " + ", ".join(sorted(ELEMENT_FIELDS)),
            )
        if "name" not in entry:
            raise InputError(prefix + "name", "(missing)", "a body name")
        kwargs = {k: v for k, v in entry.items() if k != "name"}
        for key in ("eccentricity", "inclination_deg", "raan_deg", "arg_periapsis_deg"):
            if key not in kwargs:
                raise InputError(prefix + key, "(missing)", "a number")
        epoch = kwargs.get("epoch_utc")
        if epoch is not None and hasattr(epoch, "isoformat"):
            kwargs["epoch_utc"] = epoch.isoformat()
        body = element_body(
            entry["name"], registry=registry, field_prefix=prefix, ecliptic=ecliptic, **kwargs
        )
        registry = registry.with_bodies(body)  # later bodies may orbit earlier ones
        bodies.append(body)
    return bodies


def element_body_dict(body: ElementBody) -> dict[str, Any]:
    """An element body as a ``[[bodies]]`` table (canonical units; round-trips exactly).

    Used to put an :class:`ElementBody` into a case dict for :func:`case_from_dict`.
    """
    out: dict[str, Any] = {
        "name": body.name,
        "central_body": body.central_body,
        "epoch_jd_tdb": body.epoch_jd_tdb,
        "semi_major_axis_km": body.semi_major_axis_km,
        "eccentricity": body.eccentricity,
        "inclination_deg": body.inclination_deg,
        "raan_deg": body.raan_deg,
        "arg_periapsis_deg": body.arg_periapsis_deg,
        "mean_anomaly_deg": body.mean_anomaly_deg,
        # Named outright, so the body means the same in a case of either ecliptic setting.
        "frame": "ecliptic_iau2006" if body.frame == ECLIPTIC else body.frame,
    }
    if math.isfinite(body.gm_km3_s2):
        out["gm_km3_s2"] = body.gm_km3_s2
    if math.isfinite(body.radius_km):
        out["radius_km"] = body.radius_km
    return out


_TOML_ESCAPES = {
    "\\": "\\\\",
    '"': '\\"',
    "\b": "\\b",
    "\t": "\\t",
    "\n": "\\n",
    "\f": "\\f",
    "\r": "\\r",
}


def _toml_value(value: Any) -> str:
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, (int, float)):
        return repr(value)
    if isinstance(value, list):  # arrays and arrays of inline tables ([[vehicles]] performance)
        return "[" + ", ".join(_toml_value(v) for v in value) + "]"
    if isinstance(value, dict):
        return "{ " + ", ".join(f"{k} = {_toml_value(v)}" for k, v in value.items()) + " }"
    # A basic string: every control character escaped (TOML 1.0.0, "String"), so a description
    # with line breaks still gives one valid line.
    escaped = "".join(
        _TOML_ESCAPES.get(c, f"\\u{ord(c):04x}" if ord(c) < 32 or ord(c) == 127 else c)
        for c in str(value)
    )
    return f'"{escaped}"'


def _check_dates_in_range(registry, bodies, source: str, dates) -> None:
    """Dates outside the ephemeris are refused up front, naming the date and the range."""
    for body in bodies:
        # Element bodies have a range of their own ("elements"), checked like the ephemerides'.
        chosen = body.source_range(source) or body.source_range(body.default_source)
        if chosen is None:
            continue
        for key, (text, jd) in dates.items():
            if not chosen.jd_tdb_min <= jd <= chosen.jd_tdb_max:
                first = jd_tdb_to_iso_tdb(chosen.jd_tdb_min, digits=0)[:10]
                last = jd_tdb_to_iso_tdb(chosen.jd_tdb_max, digits=0)[:10]
                raise InputError(
                    f"window.{key}",
                    text,
                    f"a date within the {chosen.source} range for {body.name}: {first} to "
                    f"{last} (TDB)",
                )


__all__ = [
    "ARRIVAL_MODES",
    "MAX_CASE_CHARS",
    "MAX_TOML_DEPTH",
    "Case",
    "Limits",
    "case_from_dict",
    "check_toml_shape",
    "dumps_toml",
    "element_body_dict",
    "load_case",
    "parse_case",
    "to_toml_dict",
    "with_window",
]
