"""A candidate as plain data for the shortlist, and as link parameters that reopen it.

The dashboard's shortlist keeps plain JSON entries and rebuilds each one on the server from what
a link says; a sequence candidate needs the same two things:

* :func:`candidate_record`: every value a shortlist row shows (dates, sequence, arcs chosen,
  key numbers, limits), JSON-able, with the link parameters that reopen it;
* :func:`link_parameters` / :func:`candidate_from_link`: the candidate as URL query parameters
  (``seq``, ``at``: the encounter dates in UTC joined by ``~``, ``arcs``: each leg's revolutions
  and branch) and back, re-evaluated exactly, so a link never carries numbers, only the choice.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from typing import Any
from urllib.parse import urlencode

from solver.ephemeris.timescales import jd_tdb_to_utc, utc_to_jd_tdb
from solver.errors import InputError
from solver.sequence.evaluate import SequenceModel
from solver.sequence.provenance import sequence_hash, sequence_label
from solver.sequence.result import Candidate, evaluate_candidate
from solver.sequence.spec import SequenceCase, SequenceSpec
from solver.window.provenance import case_hash

DATE_SEPARATOR = "~"
LINK_KEYS = ("case", "seq", "at", "arcs", "res")
"""The link parameters of a sequence candidate (``case`` is the dashboard's case id; ``res``
each resonant leg's pitch/clock angles in degrees, joined by ',')."""


def _utc(jd_tdb: float) -> str:
    return str(jd_tdb_to_utc(jd_tdb, digits=3))


def _number(value: float) -> float | None:
    return float(value) if math.isfinite(value) else None


def _slot_text(revolutions: int, branch: str) -> str:
    return "0" if revolutions == 0 else f"{revolutions}{branch[0]}"


def _slot_of(text: str, field: str) -> int | None:
    """``"0"`` -> 0, ``"2l"`` -> 3, ``"2h"`` -> 4, ``"*"`` -> None (free)."""
    text = text.strip().lower()
    if text in ("*", ""):
        return None
    accepted = "per leg 0, Nl or Nh (N revolutions, low or high branch) or *, joined by '.'"
    if text == "0":
        return 0
    if len(text) >= 2 and text[:-1].isdigit() and text[-1] in "lh":
        n = int(text[:-1])
        if n >= 1:
            return 2 * n - 1 if text[-1] == "l" else 2 * n
    raise InputError(field, text, accepted)


def link_parameters(candidate: Candidate, case_id: str) -> dict[str, str]:
    """The URL query parameters that reopen ``candidate`` (``case`` = the dashboard's case id)."""
    out = {
        "case": case_id,
        "seq": candidate.sequence,
        "at": DATE_SEPARATOR.join(_utc(jd) for jd in candidate.epochs_jd_tdb),
        "arcs": ".".join(
            "*" if leg.branch == "resonant" else _slot_text(leg.revolutions, leg.branch)
            for leg in candidate.legs
        ),
    }
    angles = [
        f"{leg.metrics['pitch_deg']:.6f}/{leg.metrics['clock_deg']:.6f}"
        for leg in candidate.legs
        if leg.branch == "resonant"
    ]
    if angles:
        out["res"] = ",".join(angles)
    return out


def link_query(candidate: Candidate, case_id: str) -> str:
    """``?case=...&seq=...&at=...&arcs=...`` for ``candidate``."""
    return "?" + urlencode(link_parameters(candidate, case_id), safe="~:")


def candidate_from_link(sequence_case: SequenceCase, parameters: Mapping[str, str]) -> Candidate:
    """The candidate a link names, evaluated exactly. Bad parameters raise InputError naming
    the parameter."""
    spec = sequence_case.sequence(parameters.get("seq"))
    at = parameters.get("at")
    if not at:
        raise InputError("at", at, "the encounter dates, UTC, joined by '~'")
    epochs = parse_encounter_dates(spec, at.split(DATE_SEPARATOR), field="at")
    slots = None
    arcs = parameters.get("arcs")
    if arcs:
        parts = arcs.split(".")
        if len(parts) != len(spec.legs):
            raise InputError("arcs", arcs, f"{len(spec.legs)} entries joined by '.', one per leg")
        slots = [_slot_of(p, "arcs") for p in parts]
        for k, (slot, leg) in enumerate(zip(slots, spec.legs, strict=True)):
            if slot is not None and slot > 2 * leg.max_revolutions:
                raise InputError(
                    "arcs",
                    parts[k],
                    f"at most {leg.max_revolutions} revolutions on leg {k + 1}",
                )
    angles = None
    res = parameters.get("res")
    if res:
        angles = parse_resonance_angles(spec, res, "res")
    model = SequenceModel(sequence_case.case, spec)
    return evaluate_candidate(model, epochs, slots=slots, angles_deg=angles)


def parse_resonance_angles(spec: SequenceSpec, text: str, field: str) -> list[list[float]]:
    """``"12.5/40,8/-90"`` -> [[12.5, 40.0], [8.0, -90.0]]: each resonant leg's pitch and
    clock angles, deg, in leg order."""
    accepted = (
        f"{len(spec.resonant_legs)} PITCH/CLOCK pairs in degrees joined by ',', one per "
        "resonant leg, e.g. 12.5/40"
    )
    pairs = [p for p in text.split(",") if p.strip()]
    if len(pairs) != len(spec.resonant_legs):
        raise InputError(field, text, accepted)
    out = []
    for pair in pairs:
        try:
            pitch, clock = (float(x) for x in pair.split("/"))
        except ValueError:
            raise InputError(field, text, accepted) from None
        if not (0.0 <= pitch <= 90.0 and -180.0 <= clock <= 180.0):
            raise InputError(field, text, "pitch 0 to 90 deg, clock -180 to 180 deg")
        out.append([pitch, clock])
    return out


def parse_encounter_dates(spec: SequenceSpec, texts: list[str], field: str) -> list[float]:
    """JD TDB of the encounter dates given as UTC strings, checked for count and order."""
    texts = [t.strip() for t in texts if t.strip()]
    expected = expected_dates_text(spec)
    if len(texts) != spec.n_epochs:
        raise InputError(field, ",".join(texts), f"{spec.n_epochs} UTC dates: {expected}")
    epochs = [float(utc_to_jd_tdb(text, field=field)) for text in texts]
    for i in range(1, len(epochs)):
        if not epochs[i] > epochs[i - 1]:
            raise InputError(field, texts[i], f"a date after {texts[i - 1]} (dates in order)")
    return epochs


def expected_dates_text(spec: SequenceSpec) -> str:
    """What the dates of one candidate are, in order (for messages and help)."""
    parts = []
    for event in spec.events:
        if event.kind == "stop":
            parts.append(f"arrive at {event.body}")
            parts.append(f"leave {event.body}")
        elif event.kind == "departure":
            parts.append(f"leave {event.body}")
        elif event.kind == "flyby":
            parts.append(f"{event.body} flyby")
        else:
            parts.append(f"arrive at {event.body}")
    return ", ".join(parts)


def candidate_record(
    sequence_case: SequenceCase, candidate: Candidate, *, case_id: str
) -> dict[str, Any]:
    """A shortlist entry's values for a sequence candidate (plain JSON-able data)."""
    spec = sequence_case.sequence(candidate.sequence)
    departure, arrival = candidate.encounters[0], candidate.encounters[-1]
    flybys = [e for e in candidate.encounters if e.kind == "flyby"]
    return {
        "kind": "sequence",
        "case_id": case_id,
        "case_title": sequence_case.case.title,
        "case_hash": case_hash(sequence_case.case),
        "sequence_hash": sequence_hash(sequence_case),
        "sequence": candidate.sequence,
        "sequence_label": sequence_label(spec),
        "encounters": [
            {
                "kind": e.kind,
                "body": e.body,
                "utc": _utc(e.jd_tdb),
                **({"leave_utc": _utc(e.leave_jd_tdb)} if e.kind == "stop" else {}),
            }
            for e in candidate.encounters
        ],
        "departure_utc": _utc(departure.jd_tdb),
        "arrival_utc": _utc(arrival.jd_tdb),
        "legs": [
            {"revolutions": leg.revolutions, "branch": leg.branch, "tof_days": leg.tof_days}
            for leg in candidate.legs
        ],
        "dv_total_km_s": _number(candidate.dv_total_km_s),
        "duration_days": candidate.duration_days,
        "c3_km2_s2": _number(departure.c3_km2_s2),
        "vinf_arrival_km_s": _number(arrival.vinf_in_km_s),
        "flyby_altitudes_km": [_number(e.periapsis_altitude_km) for e in flybys],
        "flyby_dv_km_s": [_number(e.dv_km_s) for e in flybys],
        "objective": candidate.objective,
        "objective_value": _number(candidate.objective_value),
        "within_limits": candidate.within_limits,
        "breaches": list(candidate.breaches),
        "link": link_parameters(candidate, case_id),
    }


__all__ = [
    "DATE_SEPARATOR",
    "LINK_KEYS",
    "candidate_from_link",
    "candidate_record",
    "expected_dates_text",
    "link_parameters",
    "link_query",
    "parse_encounter_dates",
    "parse_resonance_angles",
]
