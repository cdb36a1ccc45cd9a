"""Sequences in case files: the ``[sequence]`` section, validated into plain records.

A case file keeps its one-leg sections (``[case]``, ``[window]``, ``[transfer]``, orbits,
``[limits]``, ``[[bodies]]``), read as today by :mod:`solver.window.case`; a sequence adds the
bodies in between::

    [sequence]
    name = "venus-earth-earth"          # optional label
    objective = "dv_total_km_s"         # optional: what the search minimizes
    duration_max_days = 2600            # optional limit
    flyby_dv_max_km_s = 0.3             # optional limit
    unpowered_only = false              # optional: flybys without a burn only
    flyby_altitude_min_km = { venus = 300 }   # optional, per body

    [[sequence.legs]]                   # one table per leg, in order
    to = "venus"
    kind = "flyby"                      # flyby (default) or stop
    tof_min_days = 80
    tof_max_days = 200
    max_revolutions = 0                 # optional (default transfer.max_revolutions)

    [[sequence.legs]]
    to = "mars"
    kind = "stop"
    tof_min_days = 150
    tof_max_days = 300
    stay_min_days = 30
    stay_max_days = 60
    mode = "capture"                    # or "rendezvous"
    periapsis_altitude_km = 400

    [[sequence.legs]]                   # the last leg ends at case.target_body
    tof_min_days = 150
    tof_max_days = 300

``[window]`` gives the departure dates (its step is the grid search's departure step) and the
window the final arrival must fall in. ``[departure_orbit]`` and ``[arrival_orbit]`` apply at the
two ends, ``[limits]`` as for one leg (C3 and DLA at departure, arrival v∞ at the end, TOF on
every leg). A case may hold several sequences as ``[[sequence]]`` tables, ranked together; a
case without a ``[sequence]`` section is a one-leg sequence. A round trip's target is its
departure body, which a sequence case may repeat.

Every problem raises :class:`~solver.errors.InputError` naming the key as written
(``"sequence.legs[2].stay_max_days"``, ``"sequence[2].legs[1].to"``).
"""

from __future__ import annotations

import math
import tomllib
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np
from numpy.typing import NDArray

from solver.ephemeris.bodies import Body, BodyRegistry, has_mass
from solver.errors import InputError
from solver.sequence.settings import (
    LEG_KEYS,
    SEQUENCE_KEYS,
    default_flyby_altitude_km,
    read_setting_at,
)
from solver.window.case import Case, case_from_dict

PITCH_BOUNDS_DEG = (0.0, 90.0)
CLOCK_BOUNDS_DEG = (-180.0, 180.0)

MAX_LEGS = 12
"""Legs a sequence may have (a guard against runaway tables, not a limit of the model)."""

DEFAULT_TOF_STEPS = 40
DEFAULT_STAY_STEPS = 20
_STOP_KEYS = frozenset(
    {
        "stay_min_days",
        "stay_max_days",
        "stay_step_days",
        "mode",
        "periapsis_altitude_km",
        "apoapsis_altitude_km",
    }
)
_FLYBY_KEYS = frozenset({"altitude_min_km"})


@dataclass(frozen=True)
class LegSpec:
    """One leg and what happens at the body it ends at.

    Attributes
    ----------
    from_body, to_body : str
        Registered names of the leg's two ends.
    kind : {"flyby", "stop", "arrival"}
        What happens at ``to_body``: a gravity assist, a stop (arrive, stay, depart) or the final
        arrival of the sequence (``[arrival_orbit]``).
    tof_min_days, tof_max_days, tof_step_days : float
        TOF bounds (search bounds and limits) and the grid search's step.
    max_revolutions : int
        Complete revolutions solved for, both branches.
    altitude_min_km : float or None
        A flyby's lowest periapsis altitude.
    stay_min_days, stay_max_days, stay_step_days : float or None
        A stop's stay bounds and grid step.
    mode : str or None
        A stop's orbit: "capture" or "rendezvous".
    periapsis_altitude_km, apoapsis_altitude_km : float or None
        A capture stop's orbit.
    resonance : (int, int) or None
        A resonant return ``(body revolutions, spacecraft revolutions)``: the leg is flown on
        the orbit whose period is the leg's TOF over the spacecraft's revolutions, leaving and
        returning to the same point (see :mod:`solver.sequence.resonance`), not a Lambert arc.
    """

    from_body: str
    to_body: str
    kind: str
    tof_min_days: float
    tof_max_days: float
    tof_step_days: float
    max_revolutions: int
    altitude_min_km: float | None = None
    stay_min_days: float | None = None
    stay_max_days: float | None = None
    stay_step_days: float | None = None
    mode: str | None = None
    periapsis_altitude_km: float | None = None
    apoapsis_altitude_km: float | None = None
    resonance: tuple[int, int] | None = None

    @property
    def returns(self) -> bool:
        """Whether the leg ends at the body it left (a resonant return is possible)."""
        return self.from_body.lower() == self.to_body.lower()


@dataclass(frozen=True)
class Event:
    """One encounter of a sequence, with where its dates sit in the epoch vector.

    ``epoch_in`` is the date the spacecraft reaches the body (for the departure, the departure
    date), ``epoch_out`` the date it leaves (equal to ``epoch_in`` but for a stop). ``leg_in`` and
    ``leg_out`` are the legs arriving and leaving (-1 where there is none).
    """

    index: int
    kind: str
    body: str
    epoch_in: int
    epoch_out: int
    leg_in: int
    leg_out: int


@dataclass(frozen=True)
class SequenceSpec:
    """One sequence: departure body, then its legs, each ending at an encounter.

    Attributes
    ----------
    name : str
    departure_body : str
    legs : tuple of LegSpec
    objective : str
        What a search minimizes (``solver.sequence.settings.OBJECTIVES``).
    unpowered_only : bool
    unpowered_tolerance_km_s : float
    duration_max_days, flyby_dv_max_km_s : float or None
        Sequence limits.
    resonance_angle_deg : float
        Transfer-angle tolerance of legs that return to the body they left.
    resonance_miss_max_km : float
        Limit of a resonant return: the body's displacement between its two encounters.
    """

    name: str
    departure_body: str
    legs: tuple[LegSpec, ...]
    objective: str = "dv_total_km_s"
    unpowered_only: bool = False
    unpowered_tolerance_km_s: float = 0.001
    duration_max_days: float | None = None
    flyby_dv_max_km_s: float | None = None
    resonance_angle_deg: float = 0.1
    resonance_miss_max_km: float = 2.0e6
    events: tuple[Event, ...] = field(default=(), compare=False)

    def __post_init__(self) -> None:
        if not self.events:
            object.__setattr__(self, "events", _events(self.departure_body, self.legs))

    @property
    def bodies(self) -> tuple[str, ...]:
        """Departure body, then the body at the end of each leg."""
        return (self.departure_body, *(leg.to_body for leg in self.legs))

    @property
    def n_epochs(self) -> int:
        """Dates in a candidate: one per encounter, two per stop (arrive, leave)."""
        return self.events[-1].epoch_out + 1

    @property
    def variable_names(self) -> tuple[str, ...]:
        """The search's variables: departure date, then each leg's TOF (and a resonant leg's two
        direction angles) and each stop's stay."""
        names = ["departure_jd_tdb"]
        for k, leg in enumerate(self.legs, start=1):
            names.append(f"leg{k}_tof_days")
            if leg.resonance is not None:
                names.extend([f"leg{k}_pitch_deg", f"leg{k}_clock_deg"])
            if leg.kind == "stop":
                names.append(f"stop{k}_stay_days")
        return tuple(names)

    @property
    def resonant_legs(self) -> tuple[int, ...]:
        """Indices of the legs flown as resonant returns."""
        return tuple(k for k, leg in enumerate(self.legs) if leg.resonance is not None)

    def variable_bounds(self, case: Case) -> list[tuple[float, float]]:
        """Bounds of each variable: the departure window, the TOF and stay bounds, and a
        resonant leg's pitch (0 to 90 deg) and clock (-180 to 180 deg) angles."""
        bounds = [(case.departure_start_jd_tdb, case.departure_end_jd_tdb)]
        for leg in self.legs:
            bounds.append((leg.tof_min_days, leg.tof_max_days))
            if leg.resonance is not None:
                bounds.extend([PITCH_BOUNDS_DEG, CLOCK_BOUNDS_DEG])
            if leg.kind == "stop":
                assert leg.stay_min_days is not None and leg.stay_max_days is not None
                bounds.append((leg.stay_min_days, leg.stay_max_days))
        return bounds

    def _date_columns(self) -> list[int]:
        """Columns of the variables that are dates or durations (not angles)."""
        return [i for i, name in enumerate(self.variable_names) if not name.endswith("_deg")]

    def epochs(self, variables: NDArray[np.float64]) -> NDArray[np.float64]:
        """Encounter dates (JD TDB), shape (..., n_epochs), from variables of shape (..., D)."""
        x = np.asarray(variables, dtype=float)[..., self._date_columns()]
        return np.cumsum(x, axis=-1)

    def angles(self, variables: NDArray[np.float64]) -> NDArray[np.float64]:
        """Resonant legs' (pitch, clock) angles, deg, shape (..., n_resonant, 2)."""
        x = np.asarray(variables, dtype=float)
        columns = [i for i, name in enumerate(self.variable_names) if name.endswith("_deg")]
        return x[..., columns].reshape(*x.shape[:-1], len(self.resonant_legs), 2)

    def variables(
        self, epochs: NDArray[np.float64], angles: NDArray[np.float64] | None = None
    ) -> NDArray[np.float64]:
        """The inverse of :meth:`epochs` (and :meth:`angles`; zeros where none are given)."""
        e = np.asarray(epochs, dtype=float)
        out = np.zeros((*e.shape[:-1], len(self.variable_names)))
        dates = np.empty_like(e)
        dates[..., 0] = e[..., 0]
        dates[..., 1:] = np.diff(e, axis=-1)
        out[..., self._date_columns()] = dates
        if angles is not None and self.resonant_legs:
            columns = [i for i, name in enumerate(self.variable_names) if name.endswith("_deg")]
            out[..., columns] = np.asarray(angles, dtype=float).reshape(*e.shape[:-1], -1)
        return out

    def leg_epochs(self, k: int) -> tuple[int, int]:
        """Indices of leg ``k``'s start and end dates in the epoch vector."""
        start = next(e for e in self.events if e.leg_out == k).epoch_out
        end = next(e for e in self.events if e.leg_in == k).epoch_in
        return start, end


@dataclass(frozen=True)
class SequenceCase:
    """A case and its sequences (one-leg cases hold one sequence of one leg)."""

    case: Case
    sequences: tuple[SequenceSpec, ...]

    def sequence(self, name: str | None = None) -> SequenceSpec:
        """A sequence by name (the first when None)."""
        if name is None:
            return self.sequences[0]
        for seq in self.sequences:
            if seq.name.lower() == str(name).lower():
                return seq
        names = ", ".join(s.name for s in self.sequences)
        raise InputError("--sequence", name, f"one of the case's sequences: {names}")


def _events(departure: str, legs: tuple[LegSpec, ...]) -> tuple[Event, ...]:
    events = [Event(0, "departure", departure, 0, 0, -1, 0)]
    epoch = 0
    for k, leg in enumerate(legs):
        epoch += 1
        last = k == len(legs) - 1
        if leg.kind == "stop":
            events.append(Event(k + 1, "stop", leg.to_body, epoch, epoch + 1, k, k + 1))
            epoch += 1
        else:
            events.append(
                Event(k + 1, leg.kind, leg.to_body, epoch, epoch, k, -1 if last else k + 1)
            )
    return tuple(events)


# ---------------------------------------------------------------------------------------------
# Parsing


def load_sequence_case(path: str | Path) -> SequenceCase:
    """Read and validate a TOML case file with or without a ``[sequence]`` section."""
    path = Path(path)
    try:
        text = path.read_text(encoding="utf-8")
    except FileNotFoundError:
        raise InputError("case", str(path), "an existing TOML case file") from None
    except UnicodeDecodeError:
        raise InputError("case", str(path), "a UTF-8 text file") from None
    return parse_sequence_case(text, source_path=str(path))


def parse_sequence_case(text: str, source_path: str = "") -> SequenceCase:
    """Validate TOML text as a sequence case."""
    try:
        raw = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        shown = str(exc) if len(str(exc)) < 120 else str(exc)[:117] + "..."
        raise InputError("case file", shown, "valid TOML (see sample_cases/)") from None
    return sequence_case_from_dict(raw, source_path=source_path)


def sequence_case_from_dict(raw: dict[str, Any], source_path: str = "") -> SequenceCase:
    """Validate a parsed TOML document as a sequence case."""
    case = case_from_dict(raw, source_path=source_path)
    section = raw.get("sequence")
    if section is None:
        return SequenceCase(case, (one_leg_sequence(case),))
    if isinstance(section, dict):
        tables = [(section, "sequence")]
    elif isinstance(section, list) and section:
        tables = [(table, f"sequence[{i}]") for i, table in enumerate(section, start=1)]
    else:
        raise InputError("sequence", section, "a [sequence] table or [[sequence]] tables")
    registry = case.registry()
    sequences = []
    for table, where in tables:
        sequences.append(_sequence(case, registry, table, where))
    if case.limits.delivered_mass_min_kg is not None and any(len(q.legs) > 1 for q in sequences):
        raise InputError(
            "limits.delivered_mass_min_kg",
            case.limits.delivered_mass_min_kg,
            "no delivered-mass limit in a case with multi-leg sequences: the mass of flyby and "
            "stop burns is not counted for sequences yet (the one-leg window counts it)",
        )
    seen: set[str] = set()
    for seq, (_table, where) in zip(sequences, tables, strict=True):
        if seq.name.lower() in seen:
            raise InputError(f"{where}.name", seq.name, "a name no other sequence of the case has")
        seen.add(seq.name.lower())
        if seq.objective != sequences[0].objective:
            raise InputError(
                f"{where}.objective",
                seq.objective,
                f"'{sequences[0].objective}', the objective of the case's first sequence "
                "(sequences of one case are ranked together)",
            )
    return SequenceCase(case, tuple(sequences))


def sequence_case_from_case(case: Case) -> SequenceCase:
    """A one-leg case as a sequence case (its one sequence of one leg)."""
    return SequenceCase(case, (one_leg_sequence(case),))


def one_leg_sequence(case: Case) -> SequenceSpec:
    """The case's own transfer as a sequence of one leg.

    TOF bounds: the case's TOF limits where set, else what the date windows allow.
    """
    widest_min = max(case.arrival_start_jd_tdb - case.departure_end_jd_tdb, 1.0 / 1440.0)
    widest_max = max(case.arrival_end_jd_tdb - case.departure_start_jd_tdb, widest_min)
    low = case.limits.tof_min_days if case.limits.tof_min_days is not None else widest_min
    high = case.limits.tof_max_days if case.limits.tof_max_days is not None else widest_max
    low = max(low, 1.0 / 1440.0)
    high = max(high, low)
    leg = LegSpec(
        from_body=case.departure_body,
        to_body=case.target_body,
        kind="arrival",
        tof_min_days=low,
        tof_max_days=high,
        tof_step_days=case.arrival_step_days,
        max_revolutions=case.max_revolutions,
    )
    return SequenceSpec(
        name=f"{case.departure_body}-{case.target_body}",
        departure_body=case.departure_body,
        legs=(leg,),
    )


def _check_keys(table: Any, where: str, accepted: frozenset[str]) -> dict[str, Any]:
    if not isinstance(table, dict):
        raise InputError(where, table, f"a [{where}] table")
    unknown = set(table) - accepted
    if unknown:
        key = sorted(unknown)[0]
        raise InputError(
            f"{where}.{key}",
            table[key],
            f"a known key of [{where}]: " + ", ".join(sorted(accepted)),
        )
    return table


def _body(registry: BodyRegistry, case: Case, name: Any, key: str) -> Body:
    if not isinstance(name, str) or not name.strip():
        raise InputError(key, name, "a body name (arcwindow bodies lists them)")
    body = registry.get(name, field=key)
    if body.key == case.central_body.lower():
        raise InputError(
            key,
            name,
            f"a body orbiting {case.central_body} (the central body cannot be flown by or "
            "stopped at: every leg is an orbit about it)",
        )
    return body


def _sequence(case: Case, registry: BodyRegistry, table: Any, where: str) -> SequenceSpec:
    table = _check_keys(table, where, SEQUENCE_KEYS)
    legs_raw = table.get("legs")
    if legs_raw is None or (isinstance(legs_raw, list) and not legs_raw):
        raise InputError(
            f"{where}.legs", "(none)", "one or more [[sequence.legs]] tables (zero legs)"
        )
    if not isinstance(legs_raw, list):
        raise InputError(f"{where}.legs", legs_raw, "an array of tables ([[sequence.legs]])")
    if len(legs_raw) > MAX_LEGS:
        raise InputError(f"{where}.legs", f"{len(legs_raw)} legs", f"at most {MAX_LEGS} legs")

    altitudes = table.get("flyby_altitude_min_km", {})
    if not isinstance(altitudes, dict):
        raise InputError(
            f"{where}.flyby_altitude_min_km", altitudes, "a table of body = altitude in km"
        )
    altitude_by_body: dict[str, float] = {}
    for name, value in altitudes.items():
        key = f"{where}.flyby_altitude_min_km.{name}"
        body = registry.get(name, field=key)
        if isinstance(value, bool) or not isinstance(value, int | float) or not 0 <= value < 1e8:
            raise InputError(key, value, "an altitude from 0 to 1e8 km")
        altitude_by_body[body.key] = float(value)

    default_revs = case.max_revolutions
    target = registry.get(case.target_body)
    legs: list[LegSpec] = []
    previous = registry.get(case.departure_body)
    for index, leg_raw in enumerate(legs_raw, start=1):
        at = f"{where}.legs[{index}]"
        leg_table = _check_keys(leg_raw, at, LEG_KEYS)
        last = index == len(legs_raw)
        to_name = leg_table.get("to")
        if last:
            if to_name is None:
                body = target
            else:
                body = _body(registry, case, to_name, f"{at}.to")
                if body.key != target.key:
                    raise InputError(
                        f"{at}.to",
                        to_name,
                        f"the target, {case.target_body} (the last leg ends at case.target_body; "
                        "leave 'to' out or repeat it)",
                    )
        else:
            if to_name is None:
                raise InputError(f"{at}.to", "(missing)", "the body at the end of this leg")
            body = _body(registry, case, to_name, f"{at}.to")

        kind = read_setting_at("leg.kind", leg_table, at)
        if last:
            if kind not in (None, "arrival"):
                raise InputError(
                    f"{at}.kind",
                    leg_table.get("kind"),
                    "'arrival' or nothing: the last leg ends at the target, whose "
                    "[arrival_orbit] says what happens there",
                )
            kind = "arrival"
        elif kind is None:
            kind = "flyby"
        elif kind == "arrival":
            raise InputError(
                f"{at}.kind", "arrival", "'flyby' or 'stop' (only the last leg arrives)"
            )

        for key in _STOP_KEYS if kind != "stop" else ():
            if key in leg_table:
                raise InputError(f"{at}.{key}", leg_table[key], "only on a stop (kind = 'stop')")
        for key in _FLYBY_KEYS if kind != "flyby" else ():
            if key in leg_table:
                raise InputError(f"{at}.{key}", leg_table[key], "only on a flyby (kind = 'flyby')")

        tof_min = read_setting_at("leg.tof_min_days", leg_table, at)
        tof_max = read_setting_at("leg.tof_max_days", leg_table, at)
        if tof_max < tof_min:
            raise InputError(f"{at}.tof_max_days", tof_max, f">= {at}.tof_min_days ({tof_min:g})")
        tof_step = read_setting_at("leg.tof_step_days", leg_table, at)
        if tof_step is None:
            tof_step = max((tof_max - tof_min) / DEFAULT_TOF_STEPS, 1.0 / 1440.0)
        revs = read_setting_at("leg.max_revolutions", leg_table, at)
        revs = default_revs if revs is None else int(revs)

        fields: dict[str, Any] = {}
        resonance = read_setting_at("leg.resonance", leg_table, at)
        if resonance is not None:
            if body.key != previous.key:
                raise InputError(
                    f"{at}.resonance",
                    resonance,
                    f"only on a leg back to the body it left ({previous.name})",
                )
            fields["resonance"] = _ratio(resonance, f"{at}.resonance")
        if kind == "flyby":
            if not has_mass(body):
                raise InputError(
                    f"{at}.kind",
                    "flyby",
                    f"'stop' ({body.name} has no GM and radius: it gives no gravity assist)",
                )
            altitude = read_setting_at("leg.altitude_min_km", leg_table, at)
            if altitude is None:
                altitude = altitude_by_body.get(
                    body.key, default_flyby_altitude_km(body.key, body.radius_km)
                )
            fields["altitude_min_km"] = float(altitude)
        elif kind == "stop":
            fields.update(_stop(body, leg_table, at))

        legs.append(
            LegSpec(
                from_body=previous.name,
                to_body=body.name,
                kind=kind,
                tof_min_days=float(tof_min),
                tof_max_days=float(tof_max),
                tof_step_days=float(tof_step),
                max_revolutions=revs,
                **fields,
            )
        )
        previous = body

    name = read_setting_at("sequence.name", table, where)
    if name is None:
        name = "-".join(b.lower() for b in (case.departure_body, *(leg.to_body for leg in legs)))
    unpowered = read_setting_at("sequence.unpowered_only", table, where) == "true"
    spec = SequenceSpec(
        name=name,
        departure_body=case.departure_body,
        legs=tuple(legs),
        objective=read_setting_at("sequence.objective", table, where),
        unpowered_only=unpowered,
        unpowered_tolerance_km_s=read_setting_at("sequence.unpowered_tolerance_km_s", table, where),
        duration_max_days=read_setting_at("sequence.duration_max_days", table, where),
        flyby_dv_max_km_s=read_setting_at("sequence.flyby_dv_max_km_s", table, where),
        resonance_angle_deg=read_setting_at("sequence.resonance_angle_deg", table, where),
        resonance_miss_max_km=read_setting_at("sequence.resonance_miss_max_km", table, where),
    )
    _check_dates(case, registry, spec, where)
    return spec


def _ratio(text: str, key: str) -> tuple[int, int]:
    accepted = (
        "'N:M', N revolutions of the body while the spacecraft makes M (whole numbers >= 1), "
        "e.g. '2:1'"
    )
    parts = text.replace(" ", "").split(":")
    if len(parts) != 2 or not all(p.isdigit() for p in parts):
        raise InputError(key, text, accepted)
    n, m = int(parts[0]), int(parts[1])
    if n < 1 or m < 1 or n > 100 or m > 100:
        raise InputError(key, text, accepted)
    return n, m


def _stop(body: Body, table: dict[str, Any], at: str) -> dict[str, Any]:
    stay_min = read_setting_at("leg.stay_min_days", table, at)
    stay_max = read_setting_at("leg.stay_max_days", table, at)
    if stay_max is None:
        raise InputError(f"{at}.stay_max_days", "(missing)", "the longest stay at the stop, days")
    if stay_max < stay_min:
        raise InputError(f"{at}.stay_max_days", stay_max, f">= {at}.stay_min_days ({stay_min:g})")
    step = read_setting_at("leg.stay_step_days", table, at)
    if step is None:
        step = max((stay_max - stay_min) / DEFAULT_STAY_STEPS, 1.0 / 1440.0)
    mode = read_setting_at("leg.mode", table, at)
    periapsis = read_setting_at("leg.periapsis_altitude_km", table, at)
    apoapsis = read_setting_at("leg.apoapsis_altitude_km", table, at)
    if mode is None:
        mode = "capture" if periapsis is not None and has_mass(body) else "rendezvous"
    if mode == "capture":
        if not has_mass(body):
            raise InputError(
                f"{at}.mode", mode, f"'rendezvous' ({body.name} has no GM and radius to orbit)"
            )
        if periapsis is None:
            raise InputError(
                f"{at}.periapsis_altitude_km",
                "(missing)",
                "the stop orbit's periapsis altitude, km",
            )
        apoapsis = periapsis if apoapsis is None else apoapsis
        if apoapsis < periapsis:
            raise InputError(
                f"{at}.apoapsis_altitude_km", apoapsis, f">= {at}.periapsis_altitude_km"
            )
    else:
        for key, value in (
            ("periapsis_altitude_km", periapsis),
            ("apoapsis_altitude_km", apoapsis),
        ):
            if value is not None:
                raise InputError(f"{at}.{key}", value, "only for a capture stop (mode = 'capture')")
    return {
        "stay_min_days": float(stay_min),
        "stay_max_days": float(stay_max),
        "stay_step_days": float(step),
        "mode": mode,
        "periapsis_altitude_km": periapsis,
        "apoapsis_altitude_km": apoapsis,
    }


def _check_dates(case: Case, registry: BodyRegistry, spec: SequenceSpec, where: str) -> None:
    """Every encounter the search can reach must fall within each body's ephemeris."""
    latest = case.departure_end_jd_tdb
    for index, leg in enumerate(spec.legs, start=1):
        latest += leg.tof_max_days
        at = f"{where}.legs[{index}].tof_max_days"
        body = registry.get(leg.to_body)
        chosen = body.source_range(case.ephemeris_source) or body.source_range(body.default_source)
        if body.elements is None and chosen is not None and latest > chosen.jd_tdb_max:
            raise InputError(
                at,
                leg.tof_max_days,
                f"a TOF whose latest arrival stays within the {chosen.source} range of "
                f"{body.name} (JD TDB {chosen.jd_tdb_max:g})",
            )
        if leg.kind == "stop" and leg.stay_max_days is not None:
            latest += leg.stay_max_days
    if not math.isfinite(latest):  # pragma: no cover - bounds are finite by the settings
        raise InputError(where, latest, "finite dates")


__all__ = [
    "CLOCK_BOUNDS_DEG",
    "MAX_LEGS",
    "PITCH_BOUNDS_DEG",
    "Event",
    "LegSpec",
    "SequenceCase",
    "SequenceSpec",
    "load_sequence_case",
    "one_leg_sequence",
    "parse_sequence_case",
    "sequence_case_from_case",
    "sequence_case_from_dict",
]
