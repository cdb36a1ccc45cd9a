"""A survey's tables: the row schema, ranking, and reading a results file.

Each target-year gives one row (:data:`SPAN_SCHEMA`); the results keep each target's best row
over its years, ranked (:data:`RESULT_SCHEMA`, :func:`rank_results`). :func:`load_results`,
:func:`read_survey_metadata` and :func:`results_base_case` read a results file back (for the
dashboard's survey page).
"""

from __future__ import annotations

import json
from collections.abc import Mapping, Sequence
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd

from solver.errors import InputError
from solver.window.case import Case, parse_case
from solver.window.metrics import ranking_values

PROVENANCE_KEY = b"arcwindow.provenance"
SURVEY_KEY = b"arcwindow.survey"

STATUS_WITHIN = "within_limits"
STATUS_OUTSIDE = "outside_limits"
STATUS_NO_ARC = "no_arc"
STATUS_ERROR = "error"
STATUS_ORDER = {STATUS_WITHIN: 0, STATUS_OUTSIDE: 1, STATUS_NO_ARC: 2, STATUS_ERROR: 3}

# Per target-year row: (column, dtype). Units in the names; dates UTC (ISO 8601), JD in TDB.
ARC_SCHEMA: tuple[tuple[str, str], ...] = (
    ("departure_utc", "str"),
    ("arrival_utc", "str"),
    ("departure_jd_tdb", "float64"),
    ("arrival_jd_tdb", "float64"),
    ("tof_days", "float64"),
    ("revolutions", "int64"),
    ("branch", "str"),
    ("transfer_type", "str"),
    ("c3_km2_s2", "float64"),
    ("dla_deg", "float64"),
    ("rla_deg", "float64"),
    ("vinf_departure_km_s", "float64"),
    ("vinf_arrival_km_s", "float64"),
    ("dv_departure_km_s", "float64"),
    ("dv_arrival_km_s", "float64"),
    ("dv_total_km_s", "float64"),
)
TARGET_SCHEMA: tuple[tuple[str, str], ...] = (
    ("target_central_body", "str"),
    ("target_frame", "str"),
    ("target_epoch_jd_tdb", "float64"),
    ("target_semi_major_axis_km", "float64"),
    ("target_eccentricity", "float64"),
    ("target_inclination_deg", "float64"),
    ("target_raan_deg", "float64"),
    ("target_arg_periapsis_deg", "float64"),
    ("target_mean_anomaly_deg", "float64"),
    ("target_gm_km3_s2", "float64"),
    ("target_radius_km", "float64"),
)
SPAN_SCHEMA: tuple[tuple[str, str], ...] = (
    ("target", "str"),
    ("status", "str"),
    ("within_limits", "bool"),
    ("reason", "str"),
    ("metric", "str"),
    ("metric_value", "float64"),
    *ARC_SCHEMA,
    ("grid_metric_value", "float64"),
    ("refined", "bool"),
    ("cells_within", "int64"),
    ("span_start_utc", "str"),
    ("span_end_utc", "str"),
    ("case_hash", "str"),
    ("engine_version", "str"),
    *TARGET_SCHEMA,
)
"""Columns of one target-year row (chunk files hold these)."""
RESULT_SCHEMA: tuple[tuple[str, str], ...] = (
    ("rank", "int64"),
    *SPAN_SCHEMA,
    ("spans_within", "int64"),
    ("spans_scanned", "int64"),
)
"""Columns of the final results: a target's best row plus its rank and year counts."""
SPAN_COLUMNS = tuple(name for name, _ in SPAN_SCHEMA)
RESULT_COLUMNS = tuple(name for name, _ in RESULT_SCHEMA)


# ---------------------------------------------------------------------------------------------
# Tables and ranking


def span_frame(rows: Sequence[Mapping[str, Any]]) -> pd.DataFrame:
    """Target-year rows as a frame with the fixed :data:`SPAN_SCHEMA` dtypes."""
    frame = pd.DataFrame(list(rows), columns=list(SPAN_COLUMNS))
    return frame.astype(dict(SPAN_SCHEMA))


def rank_results(span_rows: pd.DataFrame) -> pd.DataFrame:
    """Each target's best row over its spans, ranked (see :data:`RESULT_SCHEMA`).

    Best = status (within limits, outside limits, no arc, error), then the metric (DLA by its
    magnitude), then the earliest span. Ranks follow the same order across targets, ties broken
    by name. A (target, span) pair present twice counts once.
    """
    rows = span_rows.drop_duplicates(["target", "span_start_utc"], keep="first")
    if rows.empty:
        return pd.DataFrame(columns=list(RESULT_COLUMNS)).astype(dict(RESULT_SCHEMA))
    metric = str(rows["metric"].iloc[0])
    score = ranking_values(rows["metric_value"].to_numpy(dtype=float), metric)
    order = pd.DataFrame(
        {
            "status": rows["status"].map(STATUS_ORDER).fillna(len(STATUS_ORDER)).to_numpy(),
            "score": np.where(np.isfinite(score), score, np.inf),
            "target": rows["target"].to_numpy(),
            "span": rows["span_start_utc"].to_numpy(),
        },
        index=rows.index,
    ).sort_values(["status", "score", "target", "span"], kind="mergesort")
    ordered = rows.loc[order.index]
    counts = rows.groupby("target", sort=False).agg(
        spans_within=("within_limits", "sum"), spans_scanned=("span_start_utc", "size")
    )
    best = ordered.drop_duplicates("target", keep="first").reset_index(drop=True)
    best["spans_within"] = best["target"].map(counts["spans_within"]).to_numpy()
    best["spans_scanned"] = best["target"].map(counts["spans_scanned"]).to_numpy()
    best.insert(0, "rank", np.arange(1, len(best) + 1))
    return best[list(RESULT_COLUMNS)].astype(dict(RESULT_SCHEMA))


# ---------------------------------------------------------------------------------------------
# Reading results (for the dashboard's survey page)


def load_results(path: str | Path) -> pd.DataFrame:
    """A survey's results: one row per target, ranked (``rank`` 1 is the best).

    Columns :data:`RESULT_COLUMNS`: the target, its status (``within_limits``,
    ``outside_limits``, ``no_arc``, ``error``) and reason, the best arc (departure/arrival UTC
    and JD TDB, TOF, revolutions, branch, Type, C3, DLA, RLA, departure and arrival v∞,
    departure, arrival and total Δv), the ranking metric and its value, the span that holds it,
    how many spans had an arc within limits, the case hash and engine version, and the target's
    elements (``target_*``, canonical units) for :func:`case_for_target`.

    Raises
    ------
    InputError
        The file is missing or is not a survey results file.
    """
    path = _verified(path)
    try:
        frame = pd.read_parquet(path)
    except Exception as exc:  # any unreadable file is the same user error
        raise InputError(
            "results", str(path), f"a Parquet file written by arcwindow survey ({exc})"
        ) from None
    missing = [c for c in RESULT_COLUMNS if c not in frame.columns]
    if missing:
        raise InputError("results", str(path), f"a survey results file (no column '{missing[0]}')")
    return frame.sort_values("rank", kind="mergesort").reset_index(drop=True)


def read_survey_metadata(path: str | Path) -> dict[str, Any]:
    """The survey's own record in a results file: base case TOML, years, settings, counts."""
    import pyarrow.parquet as pq

    meta = pq.read_schema(_verified(path)).metadata or {}
    if SURVEY_KEY not in meta:
        raise InputError("results", str(path), "a survey results file (no survey metadata)")
    return json.loads(meta[SURVEY_KEY])


def _verified(path: str | Path) -> Path:
    """The results file, once every byte has matched the SHA-256 written beside it."""
    from solver.files.atomic import DamagedFile, verify_checksum

    path = Path(path)
    if not path.is_file():
        raise InputError("results", str(path), "an existing survey results file (.parquet)")
    try:
        verify_checksum(path)
    except DamagedFile as exc:
        raise InputError(
            "results",
            path.name,
            f"a results file that matches its checksum ({exc}); rerun the "
            "survey command to write it again (finished chunks are reused)",
        ) from None
    return path


def results_base_case(path: str | Path) -> Case:
    """The base case a results file was computed with (for :func:`case_for_target`).

    With the survey's ``--tof-max-days`` applied, so windows around best arcs use the survey's
    limits.
    """
    meta = read_survey_metadata(path)
    case = parse_case(meta["base_case_toml"], source_path=str(path))
    tof_max = meta.get("settings", {}).get("tof_max_days")
    if tof_max is not None:  # the survey's own TOF bound replaced the base case's
        case = case.with_changes(**{"limits.tof_max_days": tof_max})
    return case


__all__ = [
    "ARC_SCHEMA",
    "PROVENANCE_KEY",
    "RESULT_COLUMNS",
    "RESULT_SCHEMA",
    "SPAN_COLUMNS",
    "SPAN_SCHEMA",
    "STATUS_ORDER",
    "SURVEY_KEY",
    "TARGET_SCHEMA",
    "load_results",
    "rank_results",
    "read_survey_metadata",
    "results_base_case",
    "span_frame",
]
