"""Mass and launch: launch vehicles, the rocket equation, launch sites and daily launch windows.

Plain numbers and arrays in and out: this layer knows nothing of cases or grids (the window
engine, :mod:`solver.window`, applies it to every arc). Earth orientation comes from ERFA.

The public names, by module, are listed below (each is imported on first use).
"""

from __future__ import annotations

from solver._lazy import lazy_api

__all__, __getattr__, __dir__ = lazy_api(
    __name__,
    {
        "rocket": [
            "burn_sequence_kg",
            "dv_for_mass_ratio_km_s",
            "mass_after_burn_kg",
            "propellant_kg",
        ],
        "vehicle": ["LaunchVehicle", "vehicle_named", "vehicles_from_toml"],
        "propulsion": ["BURNS", "PropulsionSystem", "propulsion_from_toml", "system_for_burn"],
        "site": [
            "LaunchSite",
            "azimuths_for_inclination_deg",
            "inclination_deg",
            "max_declination_deg",
        ],
        "daily_window": [
            "LEFT_OUT",
            "OMEGA_RAD_PER_DAY",
            "DailyWindow",
            "WindowOpening",
            "asymptote_of_date",
            "daily_launch_window",
            "launch_windows",
            "unit_vector_icrf",
            "utc_day_of",
        ],
    },
)
