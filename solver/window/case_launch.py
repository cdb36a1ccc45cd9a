"""The mass and launch sections of a case: vehicles, launch site, spacecraft, propulsion.

A case may add, all optional::

    [[vehicles]]                  # any number, compared side by side; the first is used
    name = "Corvid 2"             # unless spacecraft.vehicle names another
    adapter_kg = 60               # deducted from the curve's mass
    margin_fraction = 0.05        # fraction of the curve's mass held back
    performance = [               # C3 (km²/s²) against injected mass (kg), C3 increasing
        { c3_km2_s2 = 0.0, mass_kg = 4900.0 },
        { c3_km2_s2 = 20.0, mass_kg = 2900.0 },
    ]

    [launch_site]                 # Earth departures only
    name = "Marram Point"
    latitude_deg = 31.2           # geocentric
    longitude_deg = -78.5         # east
    azimuth_min_deg = 85          # allowed launch azimuths, clockwise from min to max
    azimuth_max_deg = 115

    [spacecraft]
    vehicle = "Corvid 2"
    wet_mass_max_kg = 2400        # tank capacity; without [[vehicles]], the injected mass
    required_delivered_mass_kg = 900

    [[propulsion]]                # which system makes which burn, at what Isp
    name = "main engine"
    isp_s = 321
    burns = ["arrival"]           # "departure" (from the parking orbit) and/or "arrival"

Scalar keys are described in :mod:`solver.window.settings`; the arrays of tables have their own
parsers next to their physics (:mod:`solver.launch.vehicle`, :mod:`solver.launch.propulsion`).
Rules that tie sections to the rest of the case are here: a launch site and launch vehicles need
a departure from a body with mass (the site: from the Earth); a spacecraft departure burn from
the parking orbit needs a parking orbit.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

from solver.ephemeris.bodies import Body, has_mass
from solver.errors import InputError
from solver.launch.propulsion import PropulsionSystem, propulsion_from_toml, system_for_burn
from solver.launch.site import LaunchSite
from solver.launch.vehicle import LaunchVehicle, vehicle_named, vehicles_from_toml
from solver.window.settings import SECTIONS, SETTING, read_setting

ARRAY_SECTIONS = ("vehicles", "propulsion")
"""Arrays of tables of a case file besides ``[[bodies]]``."""
_SITE_REQUIRED = ("latitude_deg", "longitude_deg", "azimuth_min_deg", "azimuth_max_deg")


@dataclass(frozen=True)
class MassModel:
    """What turns a C3 and Δv into kilograms: vehicles, the spacecraft and its propulsion."""

    vehicles: tuple[LaunchVehicle, ...] = ()
    vehicle_name: str | None = None
    wet_mass_max_kg: float | None = None
    required_delivered_mass_kg: float | None = None
    propulsion: tuple[PropulsionSystem, ...] = ()

    @property
    def vehicle(self) -> LaunchVehicle | None:
        """The vehicle the mass metrics use: the one named, else the first listed."""
        if self.vehicle_name is not None:
            return vehicle_named(self.vehicles, self.vehicle_name)
        return self.vehicles[0] if self.vehicles else None

    @property
    def gives_mass(self) -> bool:
        """Whether the spacecraft has a mass at injection (a vehicle or a wet mass)."""
        return bool(self.vehicles) or self.wet_mass_max_kg is not None

    def system(self, burn: str) -> PropulsionSystem | None:
        """The propulsion system that makes ``burn``, or None."""
        return system_for_burn(self.propulsion, burn)

    def isp_s(self, burn: str) -> float | None:
        system = self.system(burn)
        return None if system is None else system.isp_s


def read_mass_model(
    raw: dict[str, Any], departure: Body, parking_altitude_km: float | None
) -> MassModel:
    """The ``[[vehicles]]``, ``[spacecraft]`` and ``[[propulsion]]`` of a parsed case."""
    vehicles = vehicles_from_toml(raw["vehicles"]) if "vehicles" in raw else ()
    propulsion = propulsion_from_toml(raw["propulsion"]) if "propulsion" in raw else ()
    if vehicles and not has_mass(departure):
        raise InputError(
            "vehicles",
            f"{len(vehicles)} vehicle(s)",
            f"no launch vehicle: the arcs leave {departure.name}, a body without GM and radius "
            "(give spacecraft.wet_mass_max_kg instead)",
        )
    name = read_setting(raw, "spacecraft.vehicle")
    if name is not None and vehicle_named(vehicles, name) is None:
        listed = ", ".join(v.name for v in vehicles) or "none: the case has no [[vehicles]]"
        raise InputError("spacecraft.vehicle", name, f"the name of a listed vehicle ({listed})")
    departs = system_for_burn(propulsion, "departure")
    if departs is not None and has_mass(departure) and parking_altitude_km is None:
        index = propulsion.index(departs) + 1
        raise InputError(
            f"propulsion[{index}].burns",
            "departure",
            "a departure burn needs a parking orbit to burn from ([departure_orbit] altitude_km); "
            "without one the launch vehicle delivers the C3",
        )
    return MassModel(
        vehicles=vehicles,
        vehicle_name=name,
        wet_mass_max_kg=read_setting(raw, "spacecraft.wet_mass_max_kg"),
        required_delivered_mass_kg=read_setting(raw, "spacecraft.required_delivered_mass_kg"),
        propulsion=propulsion,
    )


def read_launch_site(raw: dict[str, Any], departure: Body) -> LaunchSite | None:
    """The ``[launch_site]`` of a parsed case, or None without one."""
    table = raw.get("launch_site")
    if table is None:
        return None
    if departure.key != "earth":
        raise InputError(
            "launch_site",
            "(section)",
            f"a case departing from the Earth (this one departs from {departure.name})",
        )
    for name in _SITE_REQUIRED:
        if name not in table:
            setting = SETTING[f"launch_site.{name}"]
            raise InputError(setting.key, "(missing)", setting.accepted)
    values = {name: read_setting(raw, f"launch_site.{name}") for name in SECTIONS["launch_site"]}
    low, high = values["azimuth_min_deg"], values["azimuth_max_deg"]
    if not low < high <= low + 360.0:
        raise InputError(
            "launch_site.azimuth_max_deg",
            table["azimuth_max_deg"],
            f"above launch_site.azimuth_min_deg ({low:g}) and at most {low + 360.0:g}: azimuths "
            "run clockwise from min to max (a range through north: 340 to 380)",
        )
    return LaunchSite(
        name=values["name"],
        latitude_deg=values["latitude_deg"],
        longitude_deg=values["longitude_deg"],
        azimuth_min_deg=low,
        azimuth_max_deg=high,
    )


def launch_toml(mass: MassModel, site: LaunchSite | None) -> dict[str, Any]:
    """The sections of :func:`read_mass_model` and :func:`read_launch_site` as TOML-shaped data."""
    out: dict[str, Any] = {}
    if mass.vehicles:
        out["vehicles"] = [v.to_toml() for v in mass.vehicles]
    spacecraft = {
        key: value
        for key, value in (
            ("vehicle", mass.vehicle_name),
            ("wet_mass_max_kg", mass.wet_mass_max_kg),
            ("required_delivered_mass_kg", mass.required_delivered_mass_kg),
        )
        if value is not None
    }
    if spacecraft:
        out["spacecraft"] = spacecraft
    if mass.propulsion:
        out["propulsion"] = [p.to_toml() for p in mass.propulsion]
    if site is not None:
        out["launch_site"] = {
            "name": site.name,
            "latitude_deg": site.latitude_deg,
            "longitude_deg": site.longitude_deg,
            "azimuth_min_deg": site.azimuth_min_deg,
            "azimuth_max_deg": site.azimuth_max_deg,
        }
    return out


__all__ = ["ARRAY_SECTIONS", "MassModel", "launch_toml", "read_launch_site", "read_mass_model"]
