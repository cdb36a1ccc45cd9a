"""One arc's mass budget and its day's launch window, as plain data with units.

What the details of a selected arc need in one call each (the dashboard's details panel, the
CLI's ``arc``, ``best``, ``period`` and ``launch``):

* :func:`mass_budget` - injected mass, each burn (who makes it, Δv, Isp, propellant), delivered
  mass and margin, with the reason where a number is missing;
* :func:`vehicle_comparison` - the same budget with each of the case's vehicles;
* :func:`arc_launch_window` - the launch site's reach and the daily launch window of the arc's
  departure day (or why there is none).

Each result has ``as_dict()``: JSON-ready, units in the key names, NaN as None.
"""

from __future__ import annotations

import math
from collections.abc import Iterable
from dataclasses import asdict, dataclass, replace
from typing import Any

import numpy as np

from solver.ephemeris.bodies import has_mass
from solver.ephemeris.timescales import tdb_jd_to_utc_jd
from solver.errors import InputError
from solver.launch.daily_window import LEFT_OUT, DailyWindow, daily_launch_window, utc_day_of
from solver.launch.site import LaunchSite
from solver.launch.vehicle import LaunchVehicle, vehicle_named
from solver.reasons import MassReason, describe_mass
from solver.window.case import Case
from solver.window.case_bodies import CaseBodies
from solver.window.cell import Arc
from solver.window.mass import (
    mass_metrics,
    mass_reasons,
    spacecraft_departs,
    vehicle_c3_km2_s2,
)


def _clean(value: Any) -> Any:
    """NaN and infinities as None, recursively (JSON has no NaN)."""
    if isinstance(value, float):
        return value if math.isfinite(value) else None
    if isinstance(value, dict):
        return {k: _clean(v) for k, v in value.items()}
    if isinstance(value, list | tuple):
        return [_clean(v) for v in value]
    return value


@dataclass(frozen=True)
class BurnMass:
    """One burn of a mass budget."""

    burn: str  # "departure" or "arrival"
    dv_km_s: float  # the arc's Δv for this burn
    made_by: str  # "launch vehicle", a propulsion system's name, "no burn" (Δv 0, a flyby) or
    # "no propulsion system" (a burn nobody makes: no mass after it)
    isp_s: float  # NaN unless the spacecraft makes it
    propellant_kg: float  # the spacecraft's propellant (0 when the vehicle makes the burn)


@dataclass(frozen=True)
class MassBudget:
    """Where the kilograms of one arc go, for one launch vehicle (or none)."""

    vehicle: str | None
    c3_km2_s2: float
    vehicle_c3_km2_s2: float  # where the vehicle's curve is read (the parking orbit's C3 when
    # the spacecraft makes the departure burn)
    vehicle_capability_kg: float  # after adapter and margin; NaN outside the table
    wet_mass_max_kg: float | None
    injected_mass_kg: float
    burns: tuple[BurnMass, ...]
    delivered_mass_kg: float
    required_delivered_mass_kg: float | None
    mass_margin_kg: float
    reason: str  # "" when every number is there

    @property
    def ok(self) -> bool:
        return not self.reason

    def as_dict(self) -> dict[str, Any]:
        return _clean(asdict(self))


def mass_budget(
    case: Case,
    arc: Arc,
    vehicle: str | LaunchVehicle | None = None,
    bodies: CaseBodies | None = None,
) -> MassBudget:
    """The mass budget of ``arc`` with the case's vehicle, or the one named ``vehicle``."""
    bodies = bodies or CaseBodies.of(case)
    model = case.mass
    chosen = _vehicle(case, vehicle)
    m = arc.metrics
    c3 = np.array(m["c3_km2_s2"] if arc.ok else math.nan)
    dv_dep, dv_arr = np.array(m["dv_departure_km_s"]), np.array(m["dv_arrival_km_s"])
    values = mass_metrics(case, bodies, c3, dv_dep, dv_arr, vehicle=chosen)
    code = int(mass_reasons(case, bodies, c3, dv_dep, dv_arr, vehicle=chosen))
    curve_c3 = float(vehicle_c3_km2_s2(case, bodies, c3))
    capability = (
        float(chosen.injected_mass_kg(curve_c3))
        if chosen is not None and has_mass(bodies.departure)
        else math.nan
    )
    burns = []
    for burn, dv in (("departure", float(dv_dep)), ("arrival", float(dv_arr))):
        system = model.system(burn)
        if burn == "departure" and not spacecraft_departs(case, bodies):
            made_by = "launch vehicle"
        elif system is not None:
            made_by = system.name
        else:
            made_by = "no burn" if dv == 0.0 else "no propulsion system"
        burns.append(
            BurnMass(
                burn=burn,
                dv_km_s=dv,
                made_by=made_by,
                isp_s=system.isp_s if system is not None and made_by == system.name else math.nan,
                propellant_kg=float(values[f"propellant_{burn}_kg"]),
            )
        )
    return MassBudget(
        vehicle=None if chosen is None else chosen.name,
        c3_km2_s2=float(c3),
        vehicle_c3_km2_s2=curve_c3 if chosen is not None else math.nan,
        vehicle_capability_kg=capability,
        wet_mass_max_kg=model.wet_mass_max_kg,
        injected_mass_kg=float(values["injected_mass_kg"]),
        burns=tuple(burns),
        delivered_mass_kg=float(values["delivered_mass_kg"]),
        required_delivered_mass_kg=model.required_delivered_mass_kg,
        mass_margin_kg=float(values["mass_margin_kg"]),
        reason="" if code == MassReason.OK else describe_mass(code),
    )


def vehicle_comparison(
    case: Case, arc: Arc, bodies: CaseBodies | None = None
) -> tuple[MassBudget, ...]:
    """The mass budget of ``arc`` with each of the case's vehicles, in the case's order."""
    bodies = bodies or CaseBodies.of(case)
    return tuple(mass_budget(case, arc, v, bodies) for v in case.mass.vehicles)


def _vehicle(case: Case, vehicle: str | LaunchVehicle | None) -> LaunchVehicle | None:
    if isinstance(vehicle, LaunchVehicle) or vehicle is None:
        return vehicle or case.mass.vehicle
    found = vehicle_named(case.mass.vehicles, vehicle)
    if found is None:
        names = ", ".join(v.name for v in case.mass.vehicles) or "none in the case"
        raise InputError("vehicle", vehicle, f"the name of one of the case's vehicles ({names})")
    return found


# ---------------------------------------------------------------------------------------------
# Launch windows


@dataclass(frozen=True)
class LaunchReport:
    """A launch site's reach and one day's launch window for one departure asymptote."""

    site: LaunchSite | None
    reachable_inclinations_deg: tuple[float, float] | None
    max_reachable_dla_deg: float | None
    departure_jd_tdb: float
    dla_deg: float
    rla_deg: float
    vinf_departure_km_s: float
    parking_altitude_km: float | None
    window: DailyWindow | None
    reason: str  # why there is no window ("" when there is one, even an empty one)
    left_out: tuple[str, ...] = LEFT_OUT

    def as_dict(self) -> dict[str, Any]:
        out = asdict(self)
        if self.window is not None:
            out["window"]["total_minutes"] = self.window.total_minutes
            out["window"]["reachable"] = self.window.reachable
            for opening, data in zip(self.window.openings, out["window"]["openings"], strict=True):
                data["minutes"] = opening.minutes
        return _clean(out)


def departure_day_jd_utc(departure_jd_tdb: float) -> float:
    """00:00 UTC of the UTC day of a departure epoch (JD TDB), as a UTC Julian date."""
    jd1, jd2 = tdb_jd_to_utc_jd(departure_jd_tdb, 0.0)
    return utc_day_of(float(jd1) + float(jd2))


def launch_window(
    case: Case,
    departure_jd_tdb: float,
    dla_deg: float,
    rla_deg: float,
    vinf_departure_km_s: float,
    bodies: CaseBodies | None = None,
) -> LaunchReport:
    """The launch window of the UTC day of ``departure_jd_tdb`` for an asymptote (ICRF)."""
    site = case.launch_site
    parking = case.parking_altitude_km
    report = LaunchReport(
        site=site,
        reachable_inclinations_deg=None if site is None else site.reachable_inclinations_deg,
        max_reachable_dla_deg=None if site is None else site.max_reachable_dla_deg,
        departure_jd_tdb=departure_jd_tdb,
        dla_deg=dla_deg,
        rla_deg=rla_deg,
        vinf_departure_km_s=vinf_departure_km_s,
        parking_altitude_km=parking,
        window=None,
        reason="the case has no [launch_site]",
    )
    if site is None:
        return report
    if not all(map(math.isfinite, (dla_deg, rla_deg, vinf_departure_km_s))):
        return replace(report, reason="no arc")
    earth = (bodies or CaseBodies.of(case)).departure
    window = daily_launch_window(
        site,
        departure_day_jd_utc(departure_jd_tdb),
        dla_deg,
        rla_deg,
        vinf_departure_km_s,
        mu_km3_s2=earth.gm_km3_s2,
        parking_radius_km=None if parking is None else earth.radius_km + parking,
    )
    return replace(report, window=window, reason="")


def arc_launch_window(case: Case, arc: Arc, bodies: CaseBodies | None = None) -> LaunchReport:
    """The launch window of the arc's departure day (UTC), for the arc's asymptote."""
    m = arc.metrics
    nan = math.nan
    return launch_window(
        case,
        arc.departure_jd_tdb,
        m["dla_deg"] if arc.ok else nan,
        m["rla_deg"] if arc.ok else nan,
        m["vinf_departure_km_s"] if arc.ok else nan,
        bodies,
    )


def launch_windows(
    case: Case, days: Iterable[tuple[float, float, float, float]]
) -> tuple[LaunchReport, ...]:
    """One report per ``(departure_jd_tdb, dla_deg, rla_deg, vinf_departure_km_s)``: the
    windows of a launch period's days, each with its own asymptote."""
    bodies = CaseBodies.of(case)
    return tuple(launch_window(case, *day, bodies=bodies) for day in days)


__all__ = [
    "BurnMass",
    "LaunchReport",
    "MassBudget",
    "arc_launch_window",
    "departure_day_jd_utc",
    "launch_window",
    "launch_windows",
    "mass_budget",
    "vehicle_comparison",
]
