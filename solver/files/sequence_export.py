"""Sequence exports: ranked candidates as CSV or Parquet, one candidate as JSON or CCSDS OEM.

Provenance travels as in every other export (:mod:`solver.files.export`): ``#`` comment lines at
the top of a CSV, ``arcwindow.provenance`` in the Parquet schema metadata, ``"provenance"`` in
JSON, COMMENT lines in the OEM. The OEM has one segment per leg (the leg's Lambert arc sampled by
two-body propagation, TDB epochs, ICRF, about the central body); consecutive legs meet at the
flyby's epoch, and a stop leaves a gap (the spacecraft is in orbit about the stop body there).
"""

from __future__ import annotations

import json
import math
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd

from solver.ephemeris.timescales import jd_tdb_to_iso_tdb, jd_tdb_to_utc
from solver.errors import InputError
from solver.files.oem import OemSegment, format_oem_segments
from solver.mechanics.kepler import propagate, sample_arc
from solver.reasons import describe
from solver.sequence.provenance import sequence_label, sequence_provenance
from solver.sequence.result import Candidate, reason_text
from solver.sequence.spec import SequenceCase
from solver.time_units import SECONDS_PER_DAY

ENCOUNTER_FIELDS = (
    "vinf_in_km_s",
    "vinf_out_km_s",
    "dv_km_s",
    "periapsis_altitude_km",
    "turn_angle_deg",
    "stay_days",
)
"""Per-encounter columns of the candidates table (prefixed ``e<k>_``)."""


def _utc(jd_tdb: float) -> str:
    return str(jd_tdb_to_utc(jd_tdb, digits=0))


def _clean(value: Any) -> Any:
    if isinstance(value, float | np.floating):
        return float(value) if math.isfinite(value) else None
    return value


def candidates_frame(candidates: list[Candidate]) -> pd.DataFrame:
    """One row per candidate, in rank order; encounters and legs as numbered columns.

    Candidates of several sequences share the table; columns a shorter sequence lacks are empty.
    """
    rows = []
    for rank, c in enumerate(candidates, start=1):
        dep, arr = c.encounters[0], c.encounters[-1]
        row: dict[str, Any] = {
            "rank": rank,
            "sequence": c.sequence,
            "bodies": "-".join(e.body for e in c.encounters),
            "within_limits": c.within_limits,
            "breaches": "; ".join(c.breaches),
            "reason": reason_text(c) or describe(c.reason),
            "objective": c.objective,
            "objective_value": c.objective_value,
            "dv_total_km_s": c.dv_total_km_s,
            "duration_days": c.duration_days,
            "departure_utc": _utc(dep.jd_tdb),
            "arrival_utc": _utc(arr.jd_tdb),
            "c3_km2_s2": dep.c3_km2_s2,
            "dla_deg": dep.dla_deg,
            "rla_deg": dep.rla_deg,
            "vinf_departure_km_s": dep.vinf_out_km_s,
            "dv_departure_km_s": dep.dv_km_s,
            "vinf_arrival_km_s": arr.vinf_in_km_s,
            "dv_arrival_km_s": arr.dv_km_s,
            "entry_speed_km_s": arr.entry_speed_km_s,
        }
        for k, e in enumerate(c.encounters[1:-1], start=1):
            row[f"e{k}_kind"] = e.kind
            row[f"e{k}_body"] = e.body
            row[f"e{k}_utc"] = _utc(e.jd_tdb)
            row[f"e{k}_leave_utc"] = _utc(e.leave_jd_tdb) if e.kind == "stop" else ""
            for name in ENCOUNTER_FIELDS:
                row[f"e{k}_{name}"] = getattr(e, name)
        for leg in c.legs:
            row[f"leg{leg.index}_tof_days"] = leg.tof_days
            row[f"leg{leg.index}_revolutions"] = leg.revolutions
            row[f"leg{leg.index}_branch"] = leg.branch
        row["departure_jd_tdb"] = dep.jd_tdb
        row["arrival_jd_tdb"] = arr.jd_tdb
        rows.append(row)
    return pd.DataFrame(rows)


def write_candidates(
    sequence_case: SequenceCase,
    candidates: list[Candidate],
    path: str | Path,
    *,
    extra: dict[str, Any] | None = None,
) -> Path:
    """Write the candidates table to ``.csv`` or ``.parquet`` (chosen by the suffix), atomically
    and with its SHA-256 beside it (:mod:`solver.files.atomic`)."""
    from solver.files.atomic import atomic_output
    from solver.files.export import csv_header

    path = Path(path)
    suffix = path.suffix.lower()
    if suffix not in (".csv", ".parquet"):
        raise InputError("--out", str(path), "a file name ending in .csv or .parquet")
    frame = candidates_frame(candidates)
    prov = {**sequence_provenance(sequence_case), **(extra or {})}
    with atomic_output(path, checksum=True) as handle:
        if suffix == ".csv":
            handle.write(csv_header(prov).encode("utf-8"))
            handle.write(frame.to_csv(index=False).encode("utf-8"))  # a few hundred rows
        else:
            import pyarrow as pa
            import pyarrow.parquet as pq

            table = pa.Table.from_pandas(frame, preserve_index=False)
            metadata = dict(table.schema.metadata or {})
            metadata[b"arcwindow.provenance"] = json.dumps(prov).encode()
            pq.write_table(table.replace_schema_metadata(metadata), handle)
    return path


def candidate_json(
    sequence_case: SequenceCase, candidate: Candidate, *, rank: int | None = None
) -> dict[str, Any]:
    """One candidate as plain JSON-able data: every encounter, every leg, the totals.

    Each event has ``kind`` (departure, flyby, stop, arrival), ``body``, ``utc``,
    ``vinf_in_km_s``, ``vinf_out_km_s``, ``dv_km_s``, ``periapsis_altitude_km``,
    ``turn_angle_deg`` (null where they do not apply); each leg ``tof_days``, ``revolutions``,
    ``branch``; the candidate ``dv_total_km_s``. States are ICRF, km and km/s.
    """
    spec = sequence_case.sequence(candidate.sequence)
    events = []
    for e in candidate.encounters:
        event: dict[str, Any] = {
            "kind": e.kind,
            "body": e.body,
            "utc": _utc(e.jd_tdb),
            "jd_tdb": e.jd_tdb,
            "vinf_in_km_s": _clean(e.vinf_in_km_s),
            "vinf_out_km_s": _clean(e.vinf_out_km_s),
            "dv_km_s": _clean(e.dv_km_s),
            "periapsis_altitude_km": _clean(e.periapsis_altitude_km),
            "turn_angle_deg": _clean(e.turn_angle_deg),
        }
        if e.kind == "departure":
            event.update(c3_km2_s2=e.c3_km2_s2, dla_deg=e.dla_deg, rla_deg=e.rla_deg)
        elif e.kind == "flyby":
            event.update(
                periapsis_radius_km=_clean(e.periapsis_radius_km),
                altitude_min_km=_clean(e.altitude_min_km),
                largest_turn_deg=_clean(e.largest_turn_deg),
            )
        elif e.kind == "stop":
            event.update(
                leave_utc=_utc(e.leave_jd_tdb),
                leave_jd_tdb=e.leave_jd_tdb,
                stay_days=e.stay_days,
                dv_arrival_km_s=_clean(e.dv_in_km_s),
                dv_departure_km_s=_clean(e.dv_out_km_s),
            )
        else:
            event.update(
                entry_speed_km_s=_clean(e.entry_speed_km_s),
                vinf_arrival_dec_deg=_clean(e.vinf_arrival_dec_deg),
                vinf_arrival_ra_deg=_clean(e.vinf_arrival_ra_deg),
            )
        if e.vinf_in_icrf_km_s is not None:
            event["vinf_in_icrf_km_s"] = list(e.vinf_in_icrf_km_s)
        if e.vinf_out_icrf_km_s is not None:
            event["vinf_out_icrf_km_s"] = list(e.vinf_out_icrf_km_s)
        events.append({k: _clean(v) for k, v in event.items()})
    legs = []
    for leg in candidate.legs:
        legs.append(
            {
                "index": leg.index,
                "from": leg.from_body,
                "to": leg.to_body,
                "departure_utc": _utc(leg.departure_jd_tdb),
                "arrival_utc": _utc(leg.arrival_jd_tdb),
                "tof_days": leg.tof_days,
                "revolutions": leg.revolutions,
                "branch": leg.branch,
                "transfer_type": "I" if leg.transfer_angle_deg < 180.0 else "II",
                "transfer_angle_deg": leg.transfer_angle_deg,
                "solved": leg.ok,
                "reason": describe(leg.reason),
                "periapsis_km": _clean(leg.metrics.get("periapsis_km", math.nan)),
                "a_km": _clean(leg.metrics.get("a_km", math.nan)),
                "e": _clean(leg.metrics.get("e", math.nan)),
                "r1_km": leg.r1_km.tolist(),
                "v1_km_s": leg.v1_km_s.tolist(),
                "r2_km": leg.r2_km.tolist(),
                "v2_km_s": leg.v2_km_s.tolist(),
            }
        )
    out: dict[str, Any] = {
        "case_title": sequence_case.case.title,
        "sequence": candidate.sequence,
        "sequence_label": sequence_label(spec),
        "central_body": sequence_case.case.central_body,
        "within_limits": candidate.within_limits,
        "breaches": list(candidate.breaches),
        "solved": candidate.ok,
        "reason": reason_text(candidate) or describe(candidate.reason),
        "objective": candidate.objective,
        "objective_value": _clean(candidate.objective_value),
        "dv_total_km_s": _clean(candidate.dv_total_km_s),
        "duration_days": candidate.duration_days,
        "events": events,
        "legs": legs,
        "frame": "ICRF",
        "provenance": sequence_provenance(sequence_case),
    }
    if rank is not None:
        out = {"rank": rank, **out}
    return out


def candidate_oem_text(
    sequence_case: SequenceCase,
    candidate: Candidate,
    *,
    points_per_revolution: int = 360,
    min_points: int = 101,
) -> str:
    """The candidate as a CCSDS OEM 2.0 (KVN) message, one segment per leg."""
    bad = [leg for leg in candidate.legs if not leg.ok]
    if bad:
        raise InputError(
            "candidate",
            candidate.sequence,
            f"a candidate whose every leg has an arc (leg {bad[0].index}: "
            f"{describe(bad[0].reason)})",
        )
    case = sequence_case.case
    prov = sequence_provenance(sequence_case)
    spec = sequence_case.sequence(candidate.sequence)
    segments = []
    for leg in candidate.legs:
        tof_s = leg.flight_s
        t_s, _ = sample_arc(
            leg.r1_km,
            leg.v1_km_s,
            tof_s,
            leg.mu_km3_s2,
            points_per_revolution=points_per_revolution,
            min_points=min_points,
        )
        r, v = propagate(leg.r1_km, leg.v1_km_s, t_s, leg.mu_km3_s2)
        r[0], v[0], r[-1], v[-1] = leg.r1_km, leg.v1_km_s, leg.r2_km, leg.v2_km_s
        epochs = [
            str(e)
            for e in np.atleast_1d(
                jd_tdb_to_iso_tdb(leg.departure_jd_tdb, t_s / SECONDS_PER_DAY, digits=6)
            )
        ]
        segments.append(
            OemSegment(
                epochs=epochs,
                r_km=r,
                v_km_s=v,
                # One object throughout (the standard's segments are spans of one object's
                # ephemeris); the leg is said in the segment's comment.
                object_name=candidate.sequence[:60],
                object_id=f"ARCWINDOW-{prov['sequence_hash'][:8]}",
                center_name=case.central_body.upper(),
                ref_frame="ICRF",
                time_system="TDB",
                comments=[
                    f"Leg {leg.index}: {leg.from_body} to {leg.to_body}, "
                    f"{leg.revolutions} revolution(s), {leg.branch} branch, "
                    f"{leg.tof_days:.6f} days"
                ],
                interpolation="LAGRANGE",
                interpolation_degree=7,
            )
        )
    comments = [
        f"Sequence candidate of case '{case.title}' (case hash {prov['case_hash']}, "
        f"sequence hash {prov['sequence_hash']})",
        f"{sequence_label(spec)} about {case.central_body}; one segment per leg",
        f"Total dv {candidate.dv_total_km_s:.6f} km/s ({prov['dv_total']})",
        f"Ephemeris: {prov['ephemeris']}; constants: {prov['constants']}",
        f"Engine: {prov['engine']}; method: {prov['lambert_method']}; {prov['flyby_model']}",
    ]
    return format_oem_segments(segments, originator="arcwindow", comments=comments)


__all__ = [
    "ENCOUNTER_FIELDS",
    "candidate_json",
    "candidate_oem_text",
    "candidates_frame",
    "write_candidates",
]
