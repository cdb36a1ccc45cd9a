"""Two-body mechanics: Stumpff functions, Kepler propagation, Lambert's problem and its families.

Plain arrays in, plain arrays out: nothing here knows of dates, bodies or cases.

The public names, by module, are listed below (each is imported on first use).
"""

from __future__ import annotations

from solver._lazy import lazy_api

__all__, __getattr__, __dir__ = lazy_api(
    __name__,
    {
        "stumpff": ["stumpff_c", "stumpff_c_array", "stumpff_s", "stumpff_s_array"],
        "kepler": [
            "Elements",
            "elements_to_state",
            "mean_to_true_anomaly",
            "perifocal_to_reference",
            "propagate",
            "sample_arc",
            "state_to_elements",
            "true_to_mean_anomaly",
        ],
        "lambert": [
            "BRANCH_HIGH",
            "BRANCH_LOW",
            "BRANCH_NAMES",
            "BRANCH_SINGLE",
            "DEFAULT_ANGLE_TOL_RAD",
            "LambertSolutions",
            "minimum_tof_nondim",
            "slot_layout",
            "solve_lambert",
            "tof_of_x",
        ],
        "families": [
            "Classification",
            "Family",
            "FamilyCurve",
            "Geometry",
            "classify",
            "family_curves",
            "family_from_x",
            "family_label",
            "geometry",
            "lagrange_tof_s",
            "minimum_energy_tau",
            "minimum_energy_tof_s",
            "normalized_energy",
            "normalized_time",
            "parabolic_tau",
            "parabolic_tof_s",
            "tau_of_epsilon",
        ],
        "parallel": ["PARALLEL_LOCK"],
        "kernels": [
            "KERNELS",
            "Kernel",
            "PreparedKernel",
            "is_compiled_here",
            "pending_kernels",
            "prepare_kernels",
        ],
    },
)
