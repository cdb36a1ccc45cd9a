"""Sequences: multi-leg arcs with flybys (gravity assists) and stops, their search and checks.

A sequence leaves a departure body, meets any number of intermediate bodies (a flyby, or a stop
with a stay) and ends at the target. Each leg is a Lambert arc of the window engine's solver;
each flyby follows the published powered-flyby model; each stop's burns and the end burns follow
the window engine's conventions.

The public names, by module, are listed below (each is imported on first use).
"""

from __future__ import annotations

from solver._lazy import lazy_api

__all__, __getattr__, __dir__ = lazy_api(
    __name__,
    {
        "flyby": [
            "Flybys",
            "largest_turn_deg",
            "smallest_dv_km_s",
            "solve_flybys",
            "unpowered_turn_deg",
        ],
        "settings": [
            "FLYBY_ALTITUDE_MIN_KM",
            "NODE_KINDS",
            "OBJECTIVES",
            "SEQUENCE_SETTINGS",
            "STOP_MODES",
            "default_flyby_altitude_km",
        ],
        "spec": [
            "Event",
            "LegSpec",
            "SequenceCase",
            "SequenceSpec",
            "load_sequence_case",
            "one_leg_sequence",
            "parse_sequence_case",
            "sequence_case_from_case",
            "sequence_case_from_dict",
        ],
        "limits": ["ALL_RULES", "SEQUENCE_LIMIT_RULES", "WINDOW_LIMIT_RULES", "SequenceLimitRule"],
        "evaluate": ["BatchArcs", "BatchCosts", "LegArcs", "SequenceModel"],
        "result": [
            "Candidate",
            "Encounter",
            "LegResult",
            "best_resonance_angles",
            "evaluate_candidate",
            "reason_text",
        ],
        "grid": [
            "GridLevel",
            "GridSearchResult",
            "GridSettings",
            "grid_search",
            "grid_search_case",
        ],
        "leg_map": ["LEG_MAP_METRICS", "LegMap", "leg_axes", "leg_map"],
        "polish": ["polish"],
        "resonance": ["miss_distance_km", "resonant_velocity"],
        "provenance": ["sequence_hash", "sequence_label", "sequence_provenance"],
        "record": [
            "candidate_from_link",
            "candidate_record",
            "expected_dates_text",
            "link_parameters",
            "link_query",
            "parse_encounter_dates",
        ],
        "search": [
            "METHODS",
            "SearchResult",
            "SearchSettings",
            "rank_candidates",
            "search_case",
            "search_sequence",
        ],
    },
)
