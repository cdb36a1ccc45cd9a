"""The window engine: cases, metrics, limits, grids, single arcs, best arcs and launch periods.

Joins the ephemeris and the Lambert solver over departure x arrival date grids.

The public names, by module, are listed below (each is imported on first use).
"""

from __future__ import annotations

from solver._lazy import lazy_api

__all__, __getattr__, __dir__ = lazy_api(
    __name__,
    {
        "case": [
            "ARRIVAL_MODES",
            "Case",
            "Limits",
            "case_from_dict",
            "dumps_toml",
            "element_body_dict",
            "load_case",
            "parse_case",
            "to_toml_dict",
            "with_window",
        ],
        "case_bodies": ["CaseBodies", "body_states", "transfer_angle_deg"],
        "metrics": [
            "METRICS",
            "RANKING_METRICS",
            "Metric",
            "arc_metrics",
            "dv_conventions",
            "ranking_values",
        ],
        "limits": [
            "LIMIT_RULES",
            "SITE_RULE_TEXT",
            "Breach",
            "LimitRule",
            "breach_text",
            "breaches",
            "margins",
            "site_reach_deg",
            "within_limits",
        ],
        "settings": ["SECTIONS", "SETTING", "SETTINGS", "Setting", "read_setting"],
        "best": ["best_grid_arc", "slot_arc", "slot_arc_at", "slots_of"],
        "grid": [
            "BYTES_PER_CELL_ARC",
            "DEFAULT_MAX_CELL_ARCS",
            "ENV_MAX_CELL_ARCS",
            "TIE_BREAK",
            "BestChoice",
            "Cancelled",
            "WindowGrid",
            "check_grid_size",
            "compute_window",
            "estimated_grid_bytes",
            "grid_axes",
            "grid_dates",
            "max_cell_arcs",
            "ranks_before",
            "tie_tolerance",
            "window_notes",
        ],
        "cell": ["Arc", "select_arc", "solve_cell"],
        "dates": [
            "DateAxis",
            "axis_count",
            "date_axis",
            "elapsed_days_between",
            "end_note",
            "utc_plus_days",
        ],
        "provenance": ["case_hash", "ephemeris_label", "provenance", "window_cache_key"],
        "refine": ["METHODS", "RefinedArc", "refine_best"],
        "outputs": [
            "BURN_COMPONENTS",
            "Burns",
            "CaseOutputs",
            "arc_burns",
            "case_outputs",
            "phase_angles_deg",
            "transfer_time_text",
        ],
        "launch_period": ["STRATEGIES", "LaunchPeriod", "PeriodDay", "launch_period"],
        "case_launch": ["MassModel", "launch_toml", "read_launch_site", "read_mass_model"],
        "mass": [
            "MASS_METRICS",
            "check_mass_metric",
            "mass_metrics",
            "mass_notes",
            "mass_reasons",
            "parking_c3_km2_s2",
            "spacecraft_departs",
            "vehicle_c3_km2_s2",
        ],
        "arc_launch": [
            "BurnMass",
            "LaunchReport",
            "MassBudget",
            "arc_launch_window",
            "departure_day_jd_utc",
            "launch_window",
            "launch_windows",
            "mass_budget",
            "vehicle_comparison",
        ],
    },
)
