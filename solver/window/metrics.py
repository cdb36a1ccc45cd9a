"""Per-arc metrics: what each one means, and how each is computed from the arc's velocities.

For each cell (a departure date and an arrival date) and each arc of the cell (the
single-revolution arc and the low- and high-branch arcs of N = 1..max_revolutions) the engine
gives the numbers that decide a mission:

* time of flight, transfer angle, Type I/II, family;
* departure v∞, C3 = v∞², DLA and RLA (declination and right ascension of the departure
  asymptote in ICRF/EME2000), departure Δv from a circular parking orbit;
* arrival v∞, its declination and right ascension (ICRF), arrival Δv into the capture orbit
  (zero for a flyby, |v∞| for a rendezvous), speed at the entry interface;
* total Δv; the arc's periapsis and apoapsis about the central body, a and e;
* mass, when the case gives a launch vehicle or a wet mass: injected mass, propellant of each
  burn, mass delivered into the final orbit and its margin (conventions in
  :mod:`solver.window.mass`);
* whether the arc is within the case's limits, and a reason code for every arc that is missing.

All vectors are in ICRF, the frame of the ephemeris; "prograde" turns about the ecliptic pole for
a Sun-centred case and about the central planet's north pole otherwise.

Conventions (common practice in preliminary design):

* v∞ vectors are the arc velocity minus the body's velocity, both about the central body (the
  patched-conic approximation; the body's own sphere of influence is a point).
* Departure Δv from a circular parking orbit of radius r_p: sqrt(v∞² + 2μ/r_p) - sqrt(μ/r_p)
  (a tangential burn at periapsis of the departure hyperbola). Without a parking orbit the launch
  vehicle is taken to deliver the C3 and the departure Δv is 0; leaving a body with no mass (an
  element body without GM) costs |v∞|.
* Arrival Δv into an orbit of periapsis r_p and apoapsis r_a: sqrt(v∞² + 2μ/r_p) -
  sqrt(2μ r_a / (r_p (r_p + r_a))); flyby 0; rendezvous |v∞|.
* Entry speed at radius R + h: sqrt(v∞² + 2μ/(R + h)).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

import numpy as np
from numpy.typing import NDArray

from solver.ephemeris.bodies import Body, has_mass
from solver.errors import InputError
from solver.window.case import Case
from solver.window.case_bodies import CaseBodies
from solver.window.mass import mass_metrics


@dataclass(frozen=True)
class Metric:
    """A per-arc quantity an analyst can map, rank or limit."""

    column: str
    label: str
    unit: str
    description: str
    rank_by_magnitude: bool = False  # rank |value| (DLA: the launch site cares about |DLA|)
    higher_is_better: bool = False  # "best" maximizes it (delivered mass)


METRICS: dict[str, Metric] = {
    m.column: m
    for m in (
        Metric("c3_km2_s2", "C3", "km²/s²", "launch energy, the square of the departure v∞"),
        Metric("vinf_departure_km_s", "departure v∞", "km/s", "hyperbolic excess speed leaving"),
        Metric(
            "dla_deg",
            "DLA",
            "deg",
            "declination of the departure asymptote (ICRF)",
            rank_by_magnitude=True,
        ),
        Metric("rla_deg", "RLA", "deg", "right ascension of the departure asymptote (ICRF)"),
        Metric("vinf_arrival_km_s", "arrival v∞", "km/s", "hyperbolic excess speed arriving"),
        Metric(
            "vinf_arrival_dec_deg",
            "arrival v∞ declination",
            "deg",
            "declination of the arrival asymptote (ICRF)",
            rank_by_magnitude=True,
        ),
        Metric(
            "vinf_arrival_ra_deg",
            "arrival v∞ right ascension",
            "deg",
            "right ascension of the arrival asymptote (ICRF)",
        ),
        Metric("dv_departure_km_s", "departure Δv", "km/s", "burn from the parking orbit"),
        Metric("dv_arrival_km_s", "arrival Δv", "km/s", "burn into the capture orbit"),
        Metric("dv_total_km_s", "total Δv", "km/s", "departure plus arrival Δv"),
        Metric("entry_speed_km_s", "entry speed", "km/s", "speed at the entry interface"),
        Metric("tof_days", "TOF", "days", "time of flight"),
        Metric("periapsis_km", "arc periapsis", "km", "closest approach to the central body"),
        Metric("apoapsis_km", "arc apoapsis", "km", "farthest distance from the central body"),
        Metric("a_km", "arc semi-major axis", "km", "negative for hyperbolic arcs"),
        Metric("e", "arc eccentricity", "", "eccentricity of the transfer arc"),
        Metric(
            "injected_mass_kg",
            "injected mass",
            "kg",
            "spacecraft mass on the departure arc: the launch vehicle's capability at the C3 "
            "(after adapter and margin), at most the wet mass limit",
            higher_is_better=True,
        ),
        Metric(
            "propellant_departure_kg",
            "departure propellant",
            "kg",
            "spacecraft propellant for the departure burn (0 when the vehicle makes it)",
        ),
        Metric(
            "propellant_arrival_kg",
            "arrival propellant",
            "kg",
            "spacecraft propellant for the arrival burn (0 for a flyby)",
        ),
        Metric(
            "delivered_mass_kg",
            "delivered mass",
            "kg",
            "mass left in the final orbit after every spacecraft burn",
            higher_is_better=True,
        ),
        Metric(
            "mass_margin_kg",
            "mass margin",
            "kg",
            "delivered mass minus the required delivered mass",
            higher_is_better=True,
        ),
    )
}
RANKING_METRICS = (
    "c3_km2_s2",
    "vinf_arrival_km_s",
    "dv_total_km_s",
    "tof_days",
    "dla_deg",
    "vinf_departure_km_s",
    "dv_departure_km_s",
    "dv_arrival_km_s",
    "delivered_mass_kg",
    "injected_mass_kg",
)
_ARC_FLOAT_COLUMNS = tuple(m for m in METRICS if m != "tof_days")


def ranking_values(values: Any, metric: str) -> Any:
    """Values (a float or an array) as they rank for ``metric``, lowest best: magnitudes for
    metrics ranked by magnitude (DLA), negated values for metrics where more is better (delivered
    mass), the values themselves otherwise."""
    meta = METRICS[metric]
    if meta.rank_by_magnitude:
        return np.abs(values)
    return -values if meta.higher_is_better else values


def departure_dv_km_s(
    vinf2_km2_s2: NDArray, body: Body, parking_altitude_km: float | None
) -> NDArray[np.float64]:
    """Δv to leave ``body`` with v∞² ``vinf2_km2_s2`` (the module's departure convention).

    From a circular parking orbit at ``parking_altitude_km``: a tangential burn at periapsis of
    the departure hyperbola, sqrt(v∞² + 2μ/r_p) - sqrt(μ/r_p). Without one: 0 (the launch
    vehicle delivers the C3) for a body with mass, |v∞| for a body without (one burn leaves its
    orbit). NaN where v∞² is NaN.
    """
    with np.errstate(invalid="ignore", divide="ignore"):
        if parking_altitude_km is not None and has_mass(body):
            rp = body.radius_km + parking_altitude_km
            return hyperbola_orbit_burn_km_s(
                vinf2_km2_s2, body.gm_km3_s2, rp, math.sqrt(body.gm_km3_s2 / rp)
            )
        if has_mass(body):
            return np.where(np.isfinite(vinf2_km2_s2), 0.0, np.nan)
        return np.sqrt(vinf2_km2_s2)


def arrival_dv_km_s(
    vinf2_km2_s2: NDArray,
    body: Body,
    mode: str,
    periapsis_altitude_km: float | None = None,
    apoapsis_altitude_km: float | None = None,
) -> NDArray[np.float64]:
    """Δv to arrive at ``body`` with v∞² ``vinf2_km2_s2`` (the module's arrival convention).

    ``mode`` "capture": a tangential burn at periapsis into the orbit of those altitudes,
    sqrt(v∞² + 2μ/r_p) - sqrt(2μ r_a / (r_p (r_p + r_a))); "rendezvous": |v∞|; "flyby": 0.
    Leaving such an orbit for the same v∞ costs the same burn run backwards, so a sequence's
    stop counts its departure with this function too. NaN where v∞² is NaN.
    """
    with np.errstate(invalid="ignore", divide="ignore"):
        if mode == "capture":
            if periapsis_altitude_km is None or apoapsis_altitude_km is None:
                raise InputError(
                    "arrival_orbit.periapsis_altitude_km", "(missing)", "both capture altitudes"
                )
            rp = body.radius_km + periapsis_altitude_km
            ra = body.radius_km + apoapsis_altitude_km
            v_orbit = math.sqrt(2 * body.gm_km3_s2 * ra / (rp * (rp + ra)))
            return hyperbola_orbit_burn_km_s(vinf2_km2_s2, body.gm_km3_s2, rp, v_orbit)
        if mode == "rendezvous":
            return np.sqrt(vinf2_km2_s2)
        return np.where(np.isfinite(vinf2_km2_s2), 0.0, np.nan)


def hyperbola_orbit_burn_km_s(
    vinf2_km2_s2: NDArray, gm_km3_s2: float, periapsis_radius_km: float, orbit_speed_km_s: float
) -> NDArray[np.float64]:
    """Tangential burn at periapsis between a hyperbola of v∞² and an orbit moving at
    ``orbit_speed_km_s`` there: sqrt(v∞² + 2μ/r_p) - v_orbit (common practice)."""
    return np.sqrt(vinf2_km2_s2 + 2 * gm_km3_s2 / periapsis_radius_km) - orbit_speed_km_s


def arc_metrics(
    case: Case,
    bodies: CaseBodies,
    r1_km: NDArray,
    v1_km_s: NDArray,
    v2_km_s: NDArray,
    departure_v_km_s: NDArray,
    arrival_v_km_s: NDArray,
) -> dict[str, NDArray[np.float64]]:
    """Every per-arc metric from the arc velocities and the bodies' velocities (ICRF).

    Shapes broadcast: vectors (..., 3) give metrics of shape (...). NaN arcs give NaN metrics.
    """
    mu = bodies.mu_central_km3_s2
    vinf_d = v1_km_s - departure_v_km_s
    vinf_a = v2_km_s - arrival_v_km_s
    vd2 = np.einsum("...i,...i->...", vinf_d, vinf_d)
    va2 = np.einsum("...i,...i->...", vinf_a, vinf_a)
    vd = np.sqrt(vd2)
    va = np.sqrt(va2)
    with np.errstate(invalid="ignore", divide="ignore"):
        out: dict[str, NDArray[np.float64]] = {
            "c3_km2_s2": vd2,
            "vinf_departure_km_s": vd,
            "dla_deg": np.degrees(np.arcsin(np.clip(vinf_d[..., 2] / vd, -1.0, 1.0))),
            "rla_deg": np.degrees(np.arctan2(vinf_d[..., 1], vinf_d[..., 0])) % 360.0,
            "vinf_arrival_km_s": va,
            "vinf_arrival_dec_deg": np.degrees(np.arcsin(np.clip(vinf_a[..., 2] / va, -1.0, 1.0))),
            "vinf_arrival_ra_deg": np.degrees(np.arctan2(vinf_a[..., 1], vinf_a[..., 0])) % 360.0,
        }

        out["dv_departure_km_s"] = departure_dv_km_s(
            vd2, bodies.departure, case.parking_altitude_km
        )
        tgt = bodies.target
        out["dv_arrival_km_s"] = arrival_dv_km_s(
            va2,
            tgt,
            case.arrival_mode,
            case.capture_periapsis_altitude_km,
            case.capture_apoapsis_altitude_km,
        )
        out["dv_total_km_s"] = out["dv_departure_km_s"] + out["dv_arrival_km_s"]
        out.update(
            mass_metrics(case, bodies, vd2, out["dv_departure_km_s"], out["dv_arrival_km_s"])
        )
        if case.entry_altitude_km is not None:
            out["entry_speed_km_s"] = np.sqrt(
                va2 + 2 * tgt.gm_km3_s2 / (tgt.radius_km + case.entry_altitude_km)
            )
        else:
            out["entry_speed_km_s"] = np.full(va.shape, np.nan)

        out.update(arc_conic(r1_km, v1_km_s, mu))
    return out


def arc_conic(r1_km: NDArray, v1_km_s: NDArray, mu_km3_s2: float) -> dict[str, NDArray]:
    """The arc's own conic about the central body from its departure state: ``a_km``, ``e``,
    ``periapsis_km`` (closest approach, for the surface rule) and ``apoapsis_km`` (inf when
    open). Shapes broadcast as in :func:`arc_metrics`; NaN arcs give NaN."""
    mu = mu_km3_s2
    with np.errstate(invalid="ignore", divide="ignore"):
        r1 = np.broadcast_to(r1_km, v1_km_s.shape)
        r1n = np.sqrt(np.einsum("...i,...i->...", r1, r1))
        v1sq = np.einsum("...i,...i->...", v1_km_s, v1_km_s)
        h = np.cross(r1, v1_km_s)
        p = np.einsum("...i,...i->...", h, h) / mu
        energy = 0.5 * v1sq - mu / r1n
        e = np.sqrt(np.maximum(0.0, 1.0 + 2.0 * energy * p / mu))
        apoapsis = np.where(e < 1.0, p / (1.0 - e), np.inf)
        return {
            "a_km": -mu / (2.0 * energy),
            "e": e,
            "periapsis_km": p / (1.0 + e),
            "apoapsis_km": np.where(np.isfinite(e), apoapsis, np.nan),
        }


def dv_conventions(case: Case, bodies: CaseBodies) -> dict[str, str]:
    """How this case's departure and arrival Δv are counted, in words (the module's conventions).

    A Δv of 0 means "no burn by the spacecraft here", which a reader must not take for free.
    """
    if case.parking_altitude_km is not None and has_mass(bodies.departure):
        departure = f"burn from a circular {case.parking_altitude_km:g} km parking orbit"
    elif has_mass(bodies.departure):
        departure = "0: the launch vehicle delivers the C3 (the case has no parking orbit)"
    else:
        departure = "|v∞|: one burn to leave the departure body's orbit"
    if case.arrival_mode == "capture":
        arrival = (
            f"burn at periapsis into a {case.capture_periapsis_altitude_km:g} × "
            f"{case.capture_apoapsis_altitude_km:g} km capture orbit"
        )
    elif case.arrival_mode == "rendezvous":
        arrival = "|v∞|: one burn to match the target's velocity"
    else:
        arrival = "0: a flyby, no burn"
    return {"departure_dv": departure, "arrival_dv": arrival}


__all__ = [
    "METRICS",
    "RANKING_METRICS",
    "Metric",
    "arc_conic",
    "arc_metrics",
    "arrival_dv_km_s",
    "departure_dv_km_s",
    "dv_conventions",
    "hyperbola_orbit_burn_km_s",
    "ranking_values",
]
