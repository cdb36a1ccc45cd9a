"""Mass metrics of every arc: injected mass, propellant per burn, delivered mass, margin.

Who does what (the conventions, stated once):

* **The launch vehicle** injects the spacecraft onto the departure hyperbola: its curve is read
  at the arc's C3, and the departure Δv from the parking orbit (if the case has one) is the
  vehicle's upper stage's, not the spacecraft's.
* **Unless the spacecraft makes the departure burn** (a ``[[propulsion]]`` system lists
  ``"departure"``): the vehicle then only puts it into the circular parking orbit, whose
  C3 = -μ/r_p is where the curve is read, and the spacecraft burns the departure Δv.
* **Leaving a body without mass** (an element body) is no launch: the spacecraft's mass at
  injection is ``spacecraft.wet_mass_max_kg`` and it makes the departure burn itself.
* Injected mass = the vehicle's capability (after adapter and margin) capped at
  ``spacecraft.wet_mass_max_kg``; without a vehicle, the wet mass itself.
* Each burn the spacecraft makes uses the rocket equation with its propulsion system's Isp; the
  arrival burn (capture, rendezvous) follows the departure burn. A flyby has no arrival burn.
* Delivered mass = what is left after the last burn; margin = delivered - required.

Where there is no mass the metrics are NaN, with a reason (:class:`solver.reasons.MassReason`,
from :func:`mass_reasons`), never a silent zero. A zero propellant is a real zero: no burn.
"""

from __future__ import annotations

import math

import numpy as np
from numpy.typing import ArrayLike, NDArray

from solver.ephemeris.bodies import has_mass
from solver.errors import InputError
from solver.launch.rocket import burn_sequence_kg
from solver.launch.vehicle import LaunchVehicle
from solver.reasons import MassReason
from solver.window.case import Case
from solver.window.case_bodies import CaseBodies

MASS_METRICS = (
    "injected_mass_kg",
    "propellant_departure_kg",
    "propellant_arrival_kg",
    "delivered_mass_kg",
    "mass_margin_kg",
)
"""The per-arc mass columns (registered in ``solver.window.metrics.METRICS``)."""


def spacecraft_departs(case: Case, bodies: CaseBodies) -> bool:
    """Whether the spacecraft (not the launch vehicle) makes the departure burn."""
    return not has_mass(bodies.departure) or case.mass.system("departure") is not None


def parking_c3_km2_s2(case: Case, bodies: CaseBodies) -> float:
    """C3 of the case's circular parking orbit, -μ/r_p, km²/s² (NaN without one)."""
    dep = bodies.departure
    if case.parking_altitude_km is None or not has_mass(dep):
        return math.nan
    return -dep.gm_km3_s2 / (dep.radius_km + case.parking_altitude_km)


def vehicle_c3_km2_s2(case: Case, bodies: CaseBodies, c3_km2_s2: ArrayLike) -> NDArray:
    """The C3 at which the vehicle's curve is read for arcs of C3 ``c3_km2_s2``."""
    c3 = np.asarray(c3_km2_s2, dtype=float)
    if case.mass.system("departure") is not None and has_mass(bodies.departure):
        return np.where(np.isnan(c3), np.nan, parking_c3_km2_s2(case, bodies))
    return c3


def _spacecraft_departure_dv(case: Case, bodies: CaseBodies, dv_departure_km_s: ArrayLike):
    dv = np.asarray(dv_departure_km_s, dtype=float)
    return dv if spacecraft_departs(case, bodies) else np.where(np.isnan(dv), np.nan, 0.0)


def mass_metrics(
    case: Case,
    bodies: CaseBodies,
    c3_km2_s2: NDArray,
    dv_departure_km_s: NDArray,
    dv_arrival_km_s: NDArray,
    *,
    vehicle: LaunchVehicle | None = None,
) -> dict[str, NDArray[np.float64]]:
    """Every mass metric (:data:`MASS_METRICS`) of arcs given their C3 and Δv (same shapes).

    Parameters
    ----------
    vehicle : LaunchVehicle, optional
        Another vehicle than the case's (to compare vehicles on one arc).
    """
    c3 = np.asarray(c3_km2_s2, dtype=float)
    model = case.mass
    vehicle = vehicle or model.vehicle
    if vehicle is None and model.wet_mass_max_kg is None:
        return {name: np.full(c3.shape, np.nan) for name in MASS_METRICS}
    if vehicle is not None and has_mass(bodies.departure):
        injected = vehicle.injected_mass_kg(vehicle_c3_km2_s2(case, bodies, c3))
        if model.wet_mass_max_kg is not None:
            injected = np.minimum(injected, model.wet_mass_max_kg)  # NaN stays NaN
    else:
        injected = np.where(np.isnan(c3), np.nan, float(model.wet_mass_max_kg or math.nan))
    (departure, arrival), delivered = burn_sequence_kg(
        injected,
        [
            (_spacecraft_departure_dv(case, bodies, dv_departure_km_s), model.isp_s("departure")),
            (dv_arrival_km_s, model.isp_s("arrival")),
        ],
    )
    required = model.required_delivered_mass_kg
    return {
        "injected_mass_kg": injected,
        "propellant_departure_kg": departure,
        "propellant_arrival_kg": arrival,
        "delivered_mass_kg": delivered,
        "mass_margin_kg": delivered - required
        if required is not None
        else np.full_like(c3, np.nan),
    }


def mass_reasons(
    case: Case,
    bodies: CaseBodies,
    c3_km2_s2: ArrayLike,
    dv_departure_km_s: ArrayLike,
    dv_arrival_km_s: ArrayLike,
    *,
    vehicle: LaunchVehicle | None = None,
) -> NDArray[np.int8]:
    """Why each arc has no delivered mass (:class:`~solver.reasons.MassReason`; OK where it has).

    Recomputed from the arcs' C3 and Δv, so grids need not store it (exports and details call
    it for the arcs they show).
    """
    c3 = np.asarray(c3_km2_s2, dtype=float)
    model = case.mass
    vehicle = vehicle or model.vehicle
    shape = np.broadcast_shapes(c3.shape, np.shape(dv_departure_km_s), np.shape(dv_arrival_km_s))
    code = np.full(shape, MassReason.OK, dtype=np.int8)
    if vehicle is None and model.wet_mass_max_kg is None:
        code[...] = MassReason.NO_MASS_GIVEN
    else:
        if vehicle is not None and has_mass(bodies.departure):
            code[...] = vehicle.reasons(vehicle_c3_km2_s2(case, bodies, c3))
        dv_dep = np.asarray(_spacecraft_departure_dv(case, bodies, dv_departure_km_s))
        dv_arr = np.asarray(dv_arrival_km_s, dtype=float)
        with np.errstate(invalid="ignore"):
            if model.isp_s("arrival") is None:
                code = np.where(
                    (code == MassReason.OK) & (dv_arr > 0), MassReason.NO_ARRIVAL_PROPULSION, code
                )
            if model.isp_s("departure") is None:
                code = np.where(
                    (code == MassReason.OK) & (dv_dep > 0), MassReason.NO_DEPARTURE_PROPULSION, code
                )
    return np.where(np.isnan(c3), MassReason.NO_ARC, code).astype(np.int8)


def check_mass_metric(case: Case, metric: str, field: str = "metric") -> None:
    """Refuse to rank or optimize by a mass metric the case cannot compute (all NaN), naming
    what it lacks, instead of reporting that no arc qualifies."""
    if metric not in MASS_METRICS:
        return
    if not case.mass.gives_mass:
        raise InputError(
            field,
            metric,
            "a metric this case computes: mass needs [[vehicles]] or spacecraft.wet_mass_max_kg",
        )
    if metric == "mass_margin_kg" and case.mass.required_delivered_mass_kg is None:
        raise InputError(
            field,
            metric,
            "a metric this case computes: the margin needs spacecraft.required_delivered_mass_kg",
        )


def mass_notes(case: Case, bodies: CaseBodies) -> dict[str, str]:
    """How this case's mass metrics are counted, in words (for provenance and outputs)."""
    model = case.mass
    vehicle = model.vehicle
    if vehicle is not None and has_mass(bodies.departure):
        low, high = vehicle.c3_range_km2_s2
        where = (
            f"at the parking orbit's C3 ({parking_c3_km2_s2(case, bodies):.2f} km²/s²)"
            if case.mass.system("departure") is not None
            else "at the arc's C3"
        )
        injected = (
            f"{vehicle.name}'s performance table read {where} (PCHIP, C3 {low:g} to {high:g} "
            "km²/s², not extrapolated)"
        )
        if vehicle.margin_fraction:
            injected += f", less a {vehicle.margin_fraction:.0%} margin"
        if vehicle.adapter_kg:
            injected += f", less a {vehicle.adapter_kg:g} kg adapter"
        if model.wet_mass_max_kg is not None:
            injected += f", at most the {model.wet_mass_max_kg:g} kg wet mass limit"
    elif model.wet_mass_max_kg is not None:
        injected = f"the spacecraft's {model.wet_mass_max_kg:g} kg wet mass"
    else:
        injected = "none: the case gives neither [[vehicles]] nor spacecraft.wet_mass_max_kg"
    notes = {"mass_injected": injected}
    for burn in ("departure", "arrival"):
        system = model.system(burn)
        if burn == "departure" and not spacecraft_departs(case, bodies):
            notes[f"mass_{burn}_burn"] = "made by the launch vehicle (no spacecraft propellant)"
        elif system is not None:
            notes[f"mass_{burn}_burn"] = f"{system.name}, Isp {system.isp_s:g} s"
        else:
            notes[f"mass_{burn}_burn"] = "no propulsion system (propellant NaN unless Δv is 0)"
    required = model.required_delivered_mass_kg
    notes["mass_margin"] = (
        f"delivered minus the required {required:g} kg"
        if required is not None
        else "none: the case gives no spacecraft.required_delivered_mass_kg"
    )
    return notes


__all__ = [
    "MASS_METRICS",
    "check_mass_metric",
    "mass_metrics",
    "mass_notes",
    "mass_reasons",
    "parking_c3_km2_s2",
    "spacecraft_departs",
    "vehicle_c3_km2_s2",
]
