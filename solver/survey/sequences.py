"""Surveys of sequences: launch years, or targets, ranked by their best sequence candidate.

Each task is one case file (with its ``[sequence]`` section) with the departure window moved to
one calendar year and/or the target replaced by one catalogue body, searched like
``arcwindow sequence`` does (the global search with a seed of its own, or the grid search). A
task is a plain function of plain data (:func:`scan_sequence_task`: the case as a TOML-shaped
dict, the year, the target's elements, the settings), so it runs the same in this process and on
a Dask worker (:func:`run_sequence_survey` submits one task per year-target on the client of
:func:`solver.survey.cluster.survey_client`). Rows are ranked: within limits first, then by the
sequences' objective; a task that fails keeps its row with the reason.
"""

from __future__ import annotations

import copy
import json
import math
import time
from collections.abc import Callable, Mapping, Sequence
from dataclasses import asdict, dataclass
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd

from solver import ENGINE_VERSION
from solver.ephemeris.element_bodies import ElementBody
from solver.errors import InputError
from solver.survey.scan import parse_years, year_spans
from solver.window.case import element_body_dict

STATUSES = ("within_limits", "outside_limits", "no_arc", "error")

ROW_COLUMNS = (
    "rank",
    "label",
    "year",
    "target",
    "status",
    "within_limits",
    "sequence",
    "objective",
    "objective_value",
    "dv_total_km_s",
    "duration_days",
    "c3_km2_s2",
    "vinf_arrival_km_s",
    "departure_utc",
    "arrival_utc",
    "encounter_dates_utc",
    "breaches",
    "reason",
    "evaluations",
    "seconds",
    "engine_version",
)


@dataclass(frozen=True)
class SequenceSurveySettings:
    """How each year-target is searched (plain values, shipped to workers as a dict).

    ``search`` holds :class:`solver.sequence.search.SearchSettings` fields (``top`` is 1: one
    row per task); ``grid`` uses the grid search instead (``beam``).
    """

    seed: int = 0
    restarts: int = 8
    population: int = 20
    generations: int = 300
    time_limit_s: float | None = None
    method: str = "islands"
    grid: bool = False
    beam: int = 20_000


def plan_sequence_survey(
    raw_case: Mapping[str, Any],
    *,
    years: str | tuple[int, int] | None = None,
    targets: Sequence[ElementBody] | None = None,
    settings: SequenceSurveySettings = SequenceSurveySettings(),
) -> list[dict[str, Any]]:
    """One task per year (and per target), as plain dicts; checked up front.

    Every task's case is built once here, so a bad year or target is refused (naming the
    option) before anything runs.
    """
    from solver.sequence.spec import sequence_case_from_dict

    if years is None and not targets:
        raise InputError("--years/--targets", "(none)", "years to rank, targets to rank, or both")
    spans: list[tuple[str, str] | None] = [None]
    if years is not None:
        first, last = parse_years(years)
        spans = list(year_spans(first, last))
    bodies: list[ElementBody | None] = list(targets) if targets else [None]
    tasks = []
    for span in spans:
        for body in bodies:
            task: dict[str, Any] = {
                "case": copy.deepcopy(dict(raw_case)),
                "span": list(span) if span else None,
                "target": asdict(body) if body is not None else None,
                "settings": asdict(settings),
            }
            label = " ".join(
                part for part in ((span[0][:4] if span else ""), body.name if body else "") if part
            )
            task["label"] = label
            try:
                sequence_case_from_dict(task_case(task))
            except InputError as exc:
                option = "--years" if exc.field.startswith("window.") else "--targets"
                raise InputError(
                    option, label, f"a year/target whose case is valid: {exc}"
                ) from None
            tasks.append(task)
    return tasks


def task_case(task: Mapping[str, Any]) -> dict[str, Any]:
    """The task's case as a TOML-shaped dict: its year's departure window (arrivals as late as
    the legs reach) and its target."""
    from solver.ephemeris.timescales import jd_tdb_to_utc, utc_to_jd_tdb

    raw = copy.deepcopy(dict(task["case"]))
    span = task.get("span")
    if span:
        window = raw.setdefault("window", {})
        start = float(utc_to_jd_tdb(span[0], field="--years"))
        end = float(utc_to_jd_tdb(span[1], field="--years")) - 1.0 / 1440.0
        reach_min, reach_max = _reach_days(raw)
        window["departure_start"] = span[0]
        window["departure_end"] = str(jd_tdb_to_utc(end, digits=0))
        window["arrival_start"] = str(jd_tdb_to_utc(start + reach_min, digits=0))
        window["arrival_end"] = str(jd_tdb_to_utc(end + reach_max, digits=0))
    target = task.get("target")
    if target:
        body = ElementBody(**target)
        raw["bodies"] = [
            b for b in raw.get("bodies", []) if str(b.get("name", "")).lower() != body.name.lower()
        ] + [element_body_dict(body)]
        raw.setdefault("case", {})["target_body"] = body.name
        for table in _sequence_tables(raw):
            legs = table.get("legs") or []
            if legs and isinstance(legs[-1], dict):
                legs[-1].pop("to", None)
    return raw


def _sequence_tables(raw: Mapping[str, Any]) -> list[dict[str, Any]]:
    section = raw.get("sequence")
    if isinstance(section, dict):
        return [section]
    if isinstance(section, list):
        return [t for t in section if isinstance(t, dict)]
    return []


def _reach_days(raw: Mapping[str, Any]) -> tuple[float, float]:
    """Shortest and longest departure-to-arrival time the sequences allow (days)."""
    low, high = math.inf, 0.0
    for table in _sequence_tables(raw) or [{}]:
        legs = table.get("legs") or []
        if not legs:
            limits = raw.get("limits", {})
            low = min(low, float(limits.get("tof_min_days", 1.0)))
            high = max(high, float(limits.get("tof_max_days", 3650.0)))
            continue
        low = min(low, sum(float(leg.get("tof_min_days", 0.0)) for leg in legs))
        high = max(
            high,
            sum(
                float(leg.get("tof_max_days", 0.0)) + float(leg.get("stay_max_days", 0.0))
                for leg in legs
            ),
        )
    return (low if math.isfinite(low) else 0.0), high


def scan_sequence_task(task: Mapping[str, Any]) -> dict[str, Any]:
    """One row: the task's best candidate (or why there is none). Plain data in and out."""
    from solver.ephemeris.timescales import jd_tdb_to_utc
    from solver.sequence.grid import GridSearchResult, GridSettings, grid_search_case
    from solver.sequence.search import SearchResult, SearchSettings, search_case
    from solver.sequence.spec import sequence_case_from_dict

    settings = SequenceSurveySettings(**task["settings"])
    span = task.get("span")
    target = task.get("target")
    row: dict[str, Any] = {name: None for name in ROW_COLUMNS}
    row.update(
        label=task.get("label", ""),
        year=int(span[0][:4]) if span else -1,
        target=target["name"] if target else "",
        status="error",
        within_limits=False,
        engine_version=ENGINE_VERSION,
        evaluations=0,
    )
    start = time.perf_counter()
    try:
        sequence_case = sequence_case_from_dict(task_case(task))
        if not target:
            row["target"] = sequence_case.case.target_body
        result: GridSearchResult | SearchResult
        if settings.grid:
            result = grid_search_case(sequence_case, GridSettings(top=1, beam=settings.beam))
        else:
            result = search_case(
                sequence_case,
                SearchSettings(
                    top=1,
                    seed=settings.seed,
                    restarts=settings.restarts,
                    population=settings.population,
                    generations=settings.generations,
                    time_limit_s=settings.time_limit_s,
                    method=settings.method,
                ),
            )
    except InputError as exc:
        row["reason"] = str(exc)
        row["seconds"] = time.perf_counter() - start
        return row
    row["evaluations"] = int(result.evaluations)
    row["seconds"] = time.perf_counter() - start
    if not result.candidates:
        row["status"] = "no_arc"
        row["reason"] = "no candidate with an arc on every leg"
        return row
    best = result.candidates[0]
    dep, arr = best.encounters[0], best.encounters[-1]

    def utc(jd: float) -> str:
        return str(jd_tdb_to_utc(jd, digits=0))

    row.update(
        status="within_limits"
        if best.within_limits
        else ("outside_limits" if best.ok else "no_arc"),
        within_limits=bool(best.within_limits),
        sequence=best.sequence,
        objective=best.objective,
        objective_value=float(best.objective_value),
        dv_total_km_s=float(best.dv_total_km_s),
        duration_days=float(best.duration_days),
        c3_km2_s2=float(dep.c3_km2_s2),
        vinf_arrival_km_s=float(arr.vinf_in_km_s),
        departure_utc=utc(dep.jd_tdb),
        arrival_utc=utc(arr.jd_tdb),
        encounter_dates_utc="~".join(utc(jd) for jd in best.epochs_jd_tdb),
        breaches="; ".join(best.breaches),
        reason="",
    )
    return row


SEQUENCE_SURVEY_FORMAT = 1
"""Version of a sequence survey's chunk files (part of each key)."""


def task_key(task: Mapping[str, Any]) -> str:
    """SHA-256 of a task's inputs (case, year, target, settings) and the engine version: its
    chunk file's name and resume key. The label only names the row and is left out."""
    from solver.digest import cache_key

    inputs = {k: v for k, v in task.items() if k != "label"}
    # TOML dates (datetime objects) as their text; everything else is plain data already.
    plain = json.loads(json.dumps(inputs, default=str))
    return cache_key(
        {
            "sequence_survey_format": SEQUENCE_SURVEY_FORMAT,
            "engine": ENGINE_VERSION,
            "task": plain,
        }
    )


def task_file_name(key: str) -> str:
    """A task's chunk file name (``chunk-`` like every chunk, so one sweep covers them all)."""
    return f"chunk-seq-{key[:32]}.parquet"


def read_task_row(folder: str | Path, task: Mapping[str, Any]) -> dict[str, Any] | None:
    """The task's row from its chunk file, when the file is complete and holds this task's key
    and label; else None (computed again)."""
    from solver.survey.store import read_frame

    key = task_key(task)
    found = read_frame(folder, task_file_name(key), key)
    if found is None:
        return None
    frame, _record = found
    if len(frame) != 1 or str(frame["label"].iloc[0]) != str(task.get("label", "")):
        return None
    row = frame.iloc[0].to_dict()
    return {name: _plain(row.get(name)) for name in ROW_COLUMNS}


def write_task_row(folder: str | Path, task: Mapping[str, Any], row: Mapping[str, Any]) -> Path:
    """Write a finished task's row as its chunk file, atomically (solver.survey.store)."""
    from solver.survey.store import write_frame

    key = task_key(task)
    frame = pd.DataFrame([{name: row.get(name) for name in ROW_COLUMNS}], columns=ROW_COLUMNS)
    record = {"format": SEQUENCE_SURVEY_FORMAT, "key": key, "label": task.get("label", "")}
    return write_frame(folder, task_file_name(key), frame, record)


def _plain(value: Any) -> Any:
    """A value read back from Parquet as the plain Python value the row had."""
    if isinstance(value, np.generic):
        value = value.item()
    if isinstance(value, float) and math.isnan(value):
        return None
    return value


def rank_rows(rows: Sequence[Mapping[str, Any]]) -> pd.DataFrame:
    """Rows ranked: within limits first, then by objective value, ties by label."""
    frame = pd.DataFrame(list(rows), columns=list(ROW_COLUMNS))
    order = {status: i for i, status in enumerate(STATUSES)}
    value = pd.to_numeric(frame["objective_value"], errors="coerce").fillna(np.inf)
    frame = (
        frame.assign(_s=frame["status"].map(order).fillna(len(order)), _v=value)
        .sort_values(["_s", "_v", "label"], kind="stable")
        .drop(columns=["_s", "_v"])
        .reset_index(drop=True)
    )
    frame["rank"] = np.arange(1, len(frame) + 1)
    return frame


def run_sequence_survey(
    tasks: Sequence[Mapping[str, Any]],
    *,
    client: Any = None,
    retries: int = 2,
    progress: Callable[[int, int], None] | None = None,
    folder: str | Path | None = None,
) -> pd.DataFrame:
    """Run every task (here, in order, or on a Dask client) and rank the rows.

    With ``folder`` (``solver.survey.store.chunk_folder`` of the results file), each finished
    task's row is written there as a chunk file, and a task whose chunk file is already there,
    whole and of the same inputs and engine, is not run again: a rerun after an interruption
    computes only what is missing or damaged.
    """
    rows: list[dict[str, Any]] = []
    total = len(tasks)
    pending = list(tasks)
    if folder is not None:
        from solver.survey.store import sweep_temporaries

        sweep_temporaries(folder)
        pending = []
        for task in tasks:
            row = read_task_row(folder, task)
            if row is None:
                pending.append(task)
            else:
                rows.append(row)
        if rows and progress is not None:
            progress(len(rows), total)

    def finished(task: Mapping[str, Any], row: dict[str, Any]) -> None:
        if folder is not None:
            write_task_row(folder, task, row)
        rows.append(row)
        if progress is not None:
            progress(len(rows), total)

    if client is None:
        from solver.survey.cluster import one_numba_thread

        with one_numba_thread():
            for task in pending:
                finished(task, scan_sequence_task(task))
        return rank_rows(rows)
    from distributed import as_completed

    futures = [
        client.submit(scan_sequence_task, dict(task), retries=retries, pure=False)
        for task in pending
    ]
    try:
        for future in as_completed(list(futures), loop=client.loop):
            task = pending[futures.index(future)]
            try:
                row = future.result()
            except Exception as exc:  # a task that failed after its retries keeps its row
                rows.append(
                    {
                        **{name: None for name in ROW_COLUMNS},
                        "label": task.get("label", ""),
                        "status": "error",
                        "within_limits": False,
                        "reason": f"{type(exc).__name__}: {exc}",
                        "engine_version": ENGINE_VERSION,
                    }
                )  # not written: a rerun tries it again
                if progress is not None:
                    progress(len(rows), total)
                continue
            finished(task, row)
    finally:
        for future in futures:
            future.cancel()
    return rank_rows(rows)


def write_sequence_survey(
    frame: pd.DataFrame, path: str | Path, provenance: Mapping[str, Any]
) -> Path:
    """The ranked rows to ``.parquet`` (provenance in the schema metadata) or ``.csv``."""
    path = Path(path)
    suffix = path.suffix.lower()
    if suffix not in (".csv", ".parquet"):
        raise InputError("--out", str(path), "a file name ending in .csv or .parquet")
    if suffix == ".csv":
        with open(path, "w", encoding="utf-8", newline="") as handle:
            for key, value in provenance.items():
                handle.write(f"# {key}: {value}\n")
            frame.to_csv(handle, index=False)
        return path
    import pyarrow as pa
    import pyarrow.parquet as pq

    table = pa.Table.from_pandas(frame, preserve_index=False)
    metadata = dict(table.schema.metadata or {})
    metadata[b"arcwindow.provenance"] = json.dumps(dict(provenance)).encode()
    pq.write_table(table.replace_schema_metadata(metadata), path)
    return path


__all__ = [
    "ROW_COLUMNS",
    "SEQUENCE_SURVEY_FORMAT",
    "STATUSES",
    "SequenceSurveySettings",
    "plan_sequence_survey",
    "rank_rows",
    "read_task_row",
    "run_sequence_survey",
    "scan_sequence_task",
    "task_case",
    "task_key",
    "write_sequence_survey",
    "write_task_row",
]
