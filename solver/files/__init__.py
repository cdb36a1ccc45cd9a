"""Files: the grid cache and its file format, grid and arc exports, CCSDS OEM.

Every file is written atomically and verified before it is trusted.

The public names, by module, are listed below (each is imported on first use).
"""

from __future__ import annotations

from solver._lazy import lazy_api

__all__, __getattr__, __dir__ = lazy_api(
    __name__,
    {
        "atomic": [
            "CHECKSUM_SUFFIX",
            "STALE_TEMPORARY_AGE_S",
            "DamagedFile",
            "atomic_output",
            "checksum_path",
            "sweep_temporaries",
            "verify_checksum",
            "write_bytes_atomic",
        ],
        "gridfile": [
            "FORMAT_VERSION",
            "DamagedGridFile",
            "EncodedGrid",
            "UnknownFormatVersion",
            "encode_grid",
            "read_grid",
            "write_grid",
        ],
        "cache": [
            "DEFAULT_MAX_BYTES",
            "ENV_DIRECTORY",
            "ENV_MAX_BYTES",
            "CacheEntry",
            "CachedGrid",
            "GridCache",
            "default_directory",
            "parse_byte_size",
        ],
        "oem": [
            "CAUTION_COMMENTS",
            "INTERPOLATIONS",
            "MAX_LINE_CHARS",
            "OEM_VERSION",
            "REF_FRAMES",
            "TIME_SYSTEMS",
            "OemSegment",
            "format_oem",
            "format_oem_segments",
            "write_oem",
        ],
        "export": [
            "GRID_COLUMNS",
            "arc_json",
            "arc_oem_text",
            "grid_to_frame",
            "read_provenance",
        ],
        "sequence_export": [
            "ENCOUNTER_FIELDS",
            "candidate_json",
            "candidate_oem_text",
            "candidates_frame",
            "write_candidates",
        ],
        "paths": ["prepare_output"],
    },
)
