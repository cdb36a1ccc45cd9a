"""A survey's files: one Parquet file per finished chunk, merged at the end into the results.

Chunk files live in a folder next to the results (``RESULTS.parquet.chunks/``), each named by its
chunk key, a hash of the chunk's inputs and the engine version (window surveys:
:func:`solver.survey.scan.chunk_key`, ``chunk-KEY.parquet``; sequence surveys, one year-target
each: :func:`solver.survey.sequences.task_key`, ``chunk-seq-KEY.parquet``; both written and read
by :func:`write_frame` and :func:`read_frame`), so a rerun of the same survey finds the chunks
already done and a changed base case, catalogue, setting or engine never reuses a stale one.

* **Atomic**: a chunk is written through :func:`solver.files.atomic.atomic_output` (temporary
  file in the folder, fsync, rename) with its SHA-256 beside it (``chunk-<key>.parquet.sha256``).
  A run killed mid-write leaves at worst a temporary file (swept when older than an hour), never
  a partial chunk.
* **Verified on resume**: a chunk file counts as done only if every byte matches its SHA-256,
  it reads as Parquet, its metadata holds the expected key, and its rows are exactly the chunk's
  targets in order; anything else (a flipped bit anywhere in the file included) is computed
  again and replaced.
* **No duplicates**: the merge reads only the chunks of the current plan, each once, and keeps
  one row per (target, span) even if a file were to repeat one.

Results carry their provenance in the Parquet schema metadata, as ``solver.files.export`` does:
``arcwindow.provenance`` (ephemeris, constants, engine, base case hash, caution) and
``arcwindow.survey`` (the base case as TOML, the years, the settings, the counts).
"""

from __future__ import annotations

import json
import logging
from pathlib import Path

import pandas as pd

from solver import ENGINE_VERSION
from solver.files.atomic import STALE_TEMPORARY_AGE_S, atomic_output, verify_checksum
from solver.files.atomic import sweep_temporaries as sweep_files
from solver.survey.results import PROVENANCE_KEY, SURVEY_KEY, rank_results, span_frame
from solver.survey.scan import SURVEY_FORMAT, Chunk, SurveyPlan

logger = logging.getLogger(__name__)

CHUNK_KEY = b"arcwindow.survey_chunk"


def chunk_folder(out_path: str | Path) -> Path:
    """The folder of a results file's chunk files: ``RESULTS.parquet.chunks`` beside it."""
    out = Path(out_path)
    return out.with_name(out.name + ".chunks")


def chunk_path(folder: str | Path, chunk: Chunk) -> Path:
    return Path(folder) / chunk.file_name


def _atomic_write_table(table, path: Path) -> None:
    """Write a Parquet table atomically with its SHA-256 file beside it."""
    import pyarrow.parquet as pq

    with atomic_output(path, checksum=True) as handle:
        pq.write_table(table, handle)


def write_frame(folder: str | Path, file_name: str, frame: pd.DataFrame, record: dict) -> Path:
    """Write one chunk file atomically: ``frame`` with ``record`` (which must hold the chunk's
    ``key``) in its metadata. Any survey's chunks are written by this one function."""
    import pyarrow as pa

    folder = Path(folder)
    folder.mkdir(parents=True, exist_ok=True)
    table = pa.Table.from_pandas(frame, preserve_index=False)
    metadata = dict(table.schema.metadata or {})
    metadata[CHUNK_KEY] = json.dumps({**record, "engine": ENGINE_VERSION}).encode()
    path = folder / file_name
    _atomic_write_table(table.replace_schema_metadata(metadata), path)
    return path


def read_frame(
    folder: str | Path, file_name: str, key: str, columns: list[str] | None = None
) -> tuple[pd.DataFrame, dict] | None:
    """A chunk file's rows and record if every byte matches its SHA-256, it reads whole and it
    holds chunk ``key``; else None (a damaged, foreign or stale file is computed again, never
    trusted)."""
    import pyarrow.parquet as pq

    path = Path(folder) / file_name
    if not path.is_file():
        return None
    try:
        verify_checksum(path)  # every byte, before the Parquet reader sees any of them
        table = pq.read_table(path, columns=columns)
        record = json.loads((table.schema.metadata or {}).get(CHUNK_KEY, b"{}"))
        frame = table.to_pandas()
    except Exception as exc:  # a damaged or foreign file is recomputed, never trusted
        logger.debug("chunk file %s unreadable (%s): recomputing", path, exc)
        return None
    if not isinstance(record, dict) or record.get("key") != key:
        logger.debug("chunk file %s does not hold chunk %s: recomputing", path, key)
        return None
    return frame, record


def write_chunk(folder: str | Path, chunk: Chunk, rows: list[dict]) -> Path:
    """Write a finished chunk's rows atomically; returns the file's path."""
    record = {
        "format": SURVEY_FORMAT,
        "key": chunk.key,
        "span": list(chunk.span),
        "targets": list(chunk.target_names),
    }
    return write_frame(folder, chunk.file_name, span_frame(rows), record)


def read_chunk(
    folder: str | Path, chunk: Chunk, columns: list[str] | None = None
) -> pd.DataFrame | None:
    """The chunk's rows if its file exists and is complete and its own; else None.

    ``columns`` reads only those (``target`` is always read: it is checked).
    """
    if columns is not None and "target" not in columns:
        columns = ["target", *columns]
    found = read_frame(folder, chunk.file_name, chunk.key, columns)
    if found is None:
        return None
    frame = found[0]
    if tuple(frame.get("target", ())) != chunk.target_names:
        logger.debug(
            "chunk file %s does not hold chunk %s: recomputing", chunk.file_name, chunk.key
        )
        return None
    return frame


def sweep_temporaries(folder: str | Path, max_age_s: float = STALE_TEMPORARY_AGE_S) -> int:
    """Remove temporary chunk files older than ``max_age_s``; returns how many."""
    return sweep_files(
        folder, max_age_s=max_age_s, name_matches=lambda name: name.startswith("chunk-")
    )


def chunk_done(folder: str | Path, chunk: Chunk) -> bool:
    """Whether the chunk has a valid file (reads its metadata and target column only)."""
    return read_chunk(folder, chunk, columns=["target"]) is not None


def merge_chunks(plan: SurveyPlan, folder: str | Path) -> pd.DataFrame:
    """Every target-year row of the plan's chunks, in plan order, one row per (target, span).

    Raises
    ------
    FileNotFoundError
        A chunk of the plan has no valid file yet.
    """
    frames = []
    for chunk in plan.chunks:
        frame = read_chunk(folder, chunk)
        if frame is None:
            raise FileNotFoundError(chunk_path(folder, chunk))
        frames.append(frame)
    rows = pd.concat(frames, ignore_index=True) if frames else span_frame([])
    return rows.drop_duplicates(["target", "span_start_utc"], keep="first").reset_index(drop=True)


def write_results(plan: SurveyPlan, span_rows: pd.DataFrame, out_path: str | Path) -> pd.DataFrame:
    """Rank the target-year rows, write the results atomically with provenance; return them."""
    import pyarrow as pa

    from solver.window.provenance import provenance

    ranked = rank_results(span_rows)
    out = Path(out_path)
    out.parent.mkdir(parents=True, exist_ok=True)
    prov = provenance(plan.base_case)
    prov["case_title"] = f"survey on {plan.base_case.title}"
    table = pa.Table.from_pandas(ranked, preserve_index=False)
    metadata = dict(table.schema.metadata or {})
    metadata[PROVENANCE_KEY] = json.dumps(prov).encode()
    metadata[SURVEY_KEY] = json.dumps(plan.survey_metadata()).encode()
    _atomic_write_table(table.replace_schema_metadata(metadata), out)
    return ranked


__all__ = [
    "CHUNK_KEY",
    "chunk_done",
    "chunk_folder",
    "chunk_path",
    "merge_chunks",
    "read_chunk",
    "read_frame",
    "sweep_temporaries",
    "write_chunk",
    "write_frame",
    "write_results",
]
