"""Where a sequence's numbers come from: the window engine's provenance plus the sequence's own.

Every sequence output (tables, candidate JSON, OEM comments, survey files) states the ephemeris,
constants, engine version, case hash and the caution, as one-leg outputs do, and how each Δv of a
sequence is counted.
"""

from __future__ import annotations

from typing import Any

from solver.sequence.spec import SequenceCase, SequenceSpec
from solver.window.provenance import case_hash, provenance

FLYBY_MODEL = (
    "powered flyby: periapsis radius from the turn angle, one tangential burn at that periapsis "
    "joining the incoming and outgoing hyperbolas (Izzo et al. 2007); flybys refused below "
    "their lowest altitude"
)
FLYBY_DV = "the periapsis burn of each flyby (0 when |v∞ in| = |v∞ out|)"
STOP_DV = (
    "at each stop, the arrival burn into its orbit (capture: tangential at periapsis; "
    "rendezvous: |v∞|) plus the same burn reversed to leave"
)
DV_TOTAL = "departure + every flyby + every stop (in and out) + arrival, each as stated here"


def sequence_label(spec: SequenceSpec) -> str:
    """``"earth > venus (flyby) > mars (stop) > earth"``: the bodies and what happens at each."""
    parts = [spec.departure_body]
    for leg in spec.legs:
        parts.append(leg.to_body if leg.kind == "arrival" else f"{leg.to_body} ({leg.kind})")
    return " > ".join(parts)


def sequence_hash(sequence_case: SequenceCase) -> str:
    """Hash of the case and its sequences (what determines every number of a search)."""
    from dataclasses import asdict

    from solver.digest import cache_key

    return cache_key(
        {
            "case": sequence_case.case.normalized(),
            "sequences": [{**asdict(s), "events": None} for s in sequence_case.sequences],
        }
    )[:16]


def sequence_provenance(sequence_case: SequenceCase) -> dict[str, Any]:
    """The window provenance of the case, plus the sequences and their Δv conventions."""
    out = provenance(sequence_case.case)
    out["case_hash"] = case_hash(sequence_case.case)
    out["sequence_hash"] = sequence_hash(sequence_case)
    out["sequences"] = "; ".join(f"{s.name}: {sequence_label(s)}" for s in sequence_case.sequences)
    out["flyby_model"] = FLYBY_MODEL
    out["flyby_dv"] = FLYBY_DV
    out["stop_dv"] = STOP_DV
    out["dv_total"] = DV_TOTAL
    # The caution goes last, as in every other export.
    out["caution"] = out.pop("caution")
    return out


__all__ = [
    "DV_TOTAL",
    "FLYBY_DV",
    "FLYBY_MODEL",
    "STOP_DV",
    "sequence_hash",
    "sequence_label",
    "sequence_provenance",
]
