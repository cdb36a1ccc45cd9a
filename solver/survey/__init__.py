"""Surveys: many targets over many years, ranked by their best arcs, serially or on Dask.

Only ``cluster`` imports Dask; the rest is plain data in, plain rows out.

The public names, by module, are listed below (each is imported on first use).
"""

from __future__ import annotations

from solver._lazy import lazy_api

__all__, __getattr__, __dir__ = lazy_api(
    __name__,
    {
        "targets": ["case_dict", "case_for_target", "target_body", "target_case", "tof_bounds"],
        "results": [
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
        ],
        "scan": [
            "DEFAULT_TARGETS_PER_CHUNK",
            "SURVEY_FORMAT",
            "Chunk",
            "SurveyPlan",
            "SurveySettings",
            "chunk_key",
            "parse_years",
            "plan_survey",
            "scan_chunk",
            "scan_target",
            "year_spans",
        ],
        "store": [
            "CHUNK_KEY",
            "chunk_done",
            "chunk_folder",
            "chunk_path",
            "merge_chunks",
            "read_chunk",
            "sweep_temporaries",
            "write_chunk",
            "write_results",
        ],
        "cluster": [
            "DEFAULT_RETRIES",
            "WORKER_ENV",
            "SurveyRun",
            "connect",
            "describe_client",
            "machine_cores",
            "one_numba_thread",
            "pending_chunks",
            "run_survey",
            "start_local_cluster",
            "survey_client",
        ],
    },
)
