"""Where the bodies are: time scales, frames, JPL DE423, mean elements and element bodies.

Knows nothing of transfers. ``states(body, jd_tdb, central=..., frame=...)`` is the one interface.

The public names, by module, are listed below (each is imported on first use).
"""

from __future__ import annotations

from solver._lazy import lazy_api

__all__, __getattr__, __dir__ = lazy_api(
    __name__,
    {
        "timescales": [
            "FUTURE_UTC_NOTE",
            "ISO_UTC_ACCEPTED",
            "LAST_LEAP_SECOND_UTC",
            "TAI_MINUS_UTC_LATEST_S",
            "jd_tdb_to_iso_tdb",
            "jd_tdb_to_utc",
            "parse_iso_utc",
            "split_jd",
            "tdb_jd_to_utc_jd",
            "utc_jd_to_tdb_jd",
            "utc_to_jd_tdb",
        ],
        "frames": [
            "ECLIPTIC",
            "EquatorFrame",
            "Frame",
            "ICRF",
            "ICRF_TO_ECLIPTIC",
            "NAMED_FRAMES",
            "check_frame",
            "equator_frame",
            "rotate",
            "rotation_matrix",
        ],
        "de": [
            "BODIES",
            "DE_NAME",
            "JD_TDB_MAX",
            "JD_TDB_MIN",
            "barycentric_state",
            "ephemeris",
            "in_range",
            "moon_geocentric_state",
        ],
        "mean_elements": [
            "ERROR_BOUNDS",
            "ErrorBound",
            "MeanElementRow",
            "SOURCE_NAME",
            "TABLE_1",
            "VALID_RANGE_TEXT",
            "heliocentric_ecliptic_state",
        ],
        "element_bodies": ["ELEMENT_FRAMES", "EQUATOR", "ElementBody", "ElementSet"],
        "bodies": [
            "Body",
            "BodyRegistry",
            "DE423",
            "ELEMENTS",
            "ELEMENT_JD_TDB_MAX",
            "ELEMENT_JD_TDB_MIN",
            "MEAN",
            "SOURCES",
            "SourceRange",
            "body_from_elements",
            "default_registry",
            "has_mass",
        ],
        "element_input": [
            "CSV_ONE_OF",
            "CSV_OPTIONAL",
            "CSV_REQUIRED",
            "ELEMENT_FIELDS",
            "element_body",
            "read_element_csv",
        ],
        "states": ["OUT_OF_RANGE_MODES", "State", "element_set_states", "states"],
    },
)
