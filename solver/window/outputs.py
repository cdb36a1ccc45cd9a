"""What fits a case: the quantities, columns and analyses that describe its arcs.

The one place that decides how a case is spoken of, read by the command line, the exports and
the dashboard alike:

* **Launch** (the arc leaves a body with a mass and a size: a planet, the Moon): the launch
  vehicle's numbers. C3, the departure asymptote's declination and right ascension (DLA, RLA),
  departure v∞; launch periods; ranked by C3 unless asked otherwise.
* **Burns** (the arc leaves a body given by elements without GM and radius, such as a
  satellite, or a probe already in orbit): no launch vehicle, no asymptote. What matters is
  each burn, its Δv and direction in the local orbital frame of the body it leaves or meets
  (radial, along-track, cross-track: :func:`arc_burns`), the phasing (the target's lead angle
  at departure: :func:`phase_angles_deg`) and the transfer time; ranked by total Δv. Launch
  periods do not apply.
* **Planet-centred** cases (any central body but the Sun) state the transfer time in hours
  beside days.
* **Mass** (:mod:`solver.window.mass`) where the case gives a spacecraft mass (launch vehicles or
  a wet mass): injected mass, propellant, delivered mass; the margin with a required mass.

The ephemeris a case's states come from (DE423, the mean-element table, or nothing but the
elements of its own bodies) is :func:`solver.window.provenance.ephemeris_label`.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

from solver.ephemeris.bodies import has_mass
from solver.errors import InputError
from solver.window.case import Case
from solver.window.case_bodies import CaseBodies, body_states, transfer_angle_deg
from solver.window.cell import Arc
from solver.window.mass import MASS_METRICS
from solver.window.metrics import METRICS, RANKING_METRICS

LAUNCH_ONLY = ("c3_km2_s2", "vinf_departure_km_s", "dla_deg", "rla_deg")
"""Metrics that describe a launch: the energy and asymptote a launch vehicle must deliver."""

ASYMPTOTE_AT_ARRIVAL = ("vinf_arrival_dec_deg", "vinf_arrival_ra_deg")
"""Directions of an arrival hyperbola's asymptote: meaningful only at a body with mass."""

BURN_COMPONENTS = ("radial", "along_track", "cross_track")
"""Axes of a burn's direction: the local orbital frame (RTN) of the body the arc leaves or
meets: radial outward, along-track (in the orbit plane, ahead), cross-track (along the orbit's
angular momentum)."""


@dataclass(frozen=True)
class CaseOutputs:
    """How a case's arcs are described (:func:`case_outputs`).

    Attributes
    ----------
    launch : bool
        The arc leaves a body with mass: C3, DLA/RLA, departure v∞ and launch periods apply.
    planet_centred : bool
        The central body is not the Sun: transfer times also in hours.
    metrics : tuple of str
        ``METRICS`` columns that describe the arcs, in the order to show them.
    ranking_metrics : tuple of str
        What a best arc may minimize (the CLI's ``--metric``, the dashboard's metric picker).
    default_metric : str
        The metric a best arc is ranked by when none is asked for.
    """

    launch: bool
    planet_centred: bool
    metrics: tuple[str, ...]
    ranking_metrics: tuple[str, ...]
    default_metric: str

    @property
    def burns(self) -> bool:
        """The arc starts with a spacecraft burn (no launch): burns, phasing, transfer time."""
        return not self.launch

    @property
    def launch_periods(self) -> bool:
        return self.launch

    @property
    def launch_limits(self) -> bool:
        """Whether the limits of a launch (:func:`launch_limit_keys`: C3, |DLA|) and a launch
        vehicle fit the case: a launch from a planet about the Sun. A satellite case (the
        transfer is about a planet: between its moons or its satellites) has no launch vehicle
        to limit."""
        return self.launch and not self.planet_centred

    def check_metric(self, metric: str, field: str = "--metric") -> str:
        """``metric`` if it describes this case's arcs, else InputError naming what does."""
        if metric not in METRICS:
            raise InputError(field, metric, "one of " + ", ".join(self.ranking_metrics))
        if metric in MASS_METRICS and metric not in self.metrics:
            raise InputError(
                field,
                metric,
                "a metric this case computes: mass needs [[vehicles]] or "
                "spacecraft.wet_mass_max_kg (the margin, spacecraft.required_delivered_mass_kg): "
                + ", ".join(self.ranking_metrics),
            )
        if metric not in self.metrics:
            raise InputError(
                field,
                metric,
                f"a metric of a transfer that starts with a burn ({METRICS[metric].label} "
                "describes a launch): " + ", ".join(self.ranking_metrics),
            )
        return metric

    def check_launch_periods(self, case: Case) -> None:
        """InputError unless launch periods apply to the case."""
        if not self.launch_periods:
            raise InputError(
                "CASE",
                case.title,
                f"a case that departs from a body with mass (a launch); {case.departure_body} is "
                "a body given by elements without GM and radius, so the transfer starts with a "
                "burn and has no launch period (use 'arcwindow best' or 'arcwindow grid')",
            )


def launch_limit_keys() -> tuple[str, ...]:
    """Case settings that limit a launch: the limits of :data:`LAUNCH_ONLY` metrics, read from
    ``solver.window.limits.LIMIT_RULES`` (``("limits.c3_max_km2_s2", "limits.dla_max_deg")``)."""
    from solver.window.limits import LIMIT_RULES

    return tuple(f"limits.{rule.key}" for rule in LIMIT_RULES if rule.quantity in LAUNCH_ONLY)


def launch_setting_keys() -> tuple[str, ...]:
    """Case settings that fit only a launch (``CaseOutputs.launch_limits``): the launch limits
    and the launch vehicle the mass metrics use."""
    return (*launch_limit_keys(), "spacecraft.vehicle")


def case_outputs(case: Case, bodies: CaseBodies | None = None) -> CaseOutputs:
    """What describes ``case``'s arcs (see the module docstring)."""
    bodies = bodies or CaseBodies.of(case)
    launch = has_mass(bodies.departure)
    leave_out: set[str] = set()
    if not launch:
        # No launch vehicle and no asymptote; meeting a body without mass, the arrival
        # asymptote's direction means nothing either, and a rendezvous's arrival speed is its
        # arrival burn, shown as such.
        leave_out.update(LAUNCH_ONLY)
        if not has_mass(bodies.target):
            leave_out.update(ASYMPTOTE_AT_ARRIVAL)
            if case.arrival_mode == "rendezvous":
                leave_out.add("vinf_arrival_km_s")
    if case.entry_altitude_km is None:
        leave_out.add("entry_speed_km_s")
    if not case.mass.gives_mass:  # no vehicle and no wet mass: no kilograms to speak of
        leave_out.update(MASS_METRICS)
    elif case.mass.required_delivered_mass_kg is None:
        leave_out.add("mass_margin_kg")
    metrics = tuple(m for m in METRICS if m not in leave_out)
    ranking = tuple(m for m in RANKING_METRICS if m in metrics)
    if not launch:
        ranking = ("dv_total_km_s", *(m for m in ranking if m != "dv_total_km_s"))
    return CaseOutputs(
        launch=launch,
        planet_centred=bodies.central.key != "sun",
        metrics=metrics,
        ranking_metrics=ranking,
        default_metric="c3_km2_s2" if launch else "dv_total_km_s",
    )


# ---------------------------------------------------------------------------------------------
# Burns and phasing


def rtn_axes(r_km: NDArray, v_km_s: NDArray) -> NDArray[np.float64]:
    """(..., 3, 3) rows: radial, along-track and cross-track unit vectors of the orbit (r, v)."""
    r = np.asarray(r_km, dtype=float)
    v = np.asarray(v_km_s, dtype=float)
    radial = r / np.linalg.norm(r, axis=-1, keepdims=True)
    h = np.cross(r, v)
    cross = h / np.linalg.norm(h, axis=-1, keepdims=True)
    along = np.cross(cross, radial)
    return np.stack([radial, along, cross], axis=-2)


def in_rtn(vector: NDArray, r_km: NDArray, v_km_s: NDArray) -> NDArray[np.float64]:
    """(..., 3) components of ``vector`` along the radial, along-track and cross-track axes of
    the orbit (r, v)."""
    return np.einsum("...ij,...j->...i", rtn_axes(r_km, v_km_s), np.asarray(vector, dtype=float))


@dataclass(frozen=True)
class Burns:
    """The two burns of a transfer between two bodies given by elements.

    Attributes
    ----------
    departure_dv_km_s, arrival_dv_km_s : float
        Magnitudes: leaving the departure body's orbit; matching the target's velocity
        (a rendezvous; 0 for a flyby, which burns nothing on arrival).
    departure_rtn_km_s, arrival_rtn_km_s : (3,) arrays
        The burns along the radial, along-track and cross-track axes of the departure body's
        orbit at departure and of the target's orbit at arrival, km/s.
    phase_deg : float
        The target's lead over the departure body at departure, in the sense of motion.
    """

    departure_dv_km_s: float
    arrival_dv_km_s: float
    departure_rtn_km_s: NDArray[np.float64]
    arrival_rtn_km_s: NDArray[np.float64]
    phase_deg: float


def arc_burns(case: Case, arc: Arc, bodies: CaseBodies | None = None) -> Burns:
    """The burns of ``arc`` and the phasing at its departure (see :class:`Burns`)."""
    bodies = bodies or CaseBodies.of(case)
    departure = np.asarray(arc.v1_km_s) - np.asarray(arc.departure_body_v_km_s)
    if case.arrival_mode == "flyby":
        arrival = np.zeros(3)
    else:
        arrival = np.asarray(arc.arrival_body_v_km_s) - np.asarray(arc.v2_km_s)
    phase = float(phase_angles_deg(case, bodies, np.array([arc.departure_jd_tdb]))[0])
    return Burns(
        departure_dv_km_s=float(np.linalg.norm(departure)),
        arrival_dv_km_s=float(np.linalg.norm(arrival)),
        departure_rtn_km_s=in_rtn(departure, arc.r1_km, arc.departure_body_v_km_s),
        arrival_rtn_km_s=in_rtn(arrival, arc.r2_km, arc.arrival_body_v_km_s),
        phase_deg=phase,
    )


def phase_angles_deg(case: Case, bodies: CaseBodies, departure_jd_tdb: NDArray) -> NDArray:
    """The target's lead over the departure body at each departure epoch, deg in [0, 360),
    measured in the case's sense of motion about its pole (the phasing of a rendezvous)."""
    jd = np.asarray(departure_jd_tdb, dtype=float)
    r_dep, _ = body_states(case, bodies, bodies.departure, jd, "departure dates")
    r_tgt, _ = body_states(case, bodies, bodies.target, jd, "departure dates")
    return np.asarray(transfer_angle_deg(r_dep, r_tgt, bodies.pole_icrf, case.retrograde))


def vector_from_angles(
    magnitude: NDArray, declination_deg: NDArray, right_ascension_deg: NDArray
) -> NDArray[np.float64]:
    """(..., 3) ICRF vectors from a magnitude, a declination and a right ascension."""
    dec = np.radians(declination_deg)
    ra = np.radians(right_ascension_deg)
    return np.stack(
        [
            magnitude * np.cos(dec) * np.cos(ra),
            magnitude * np.cos(dec) * np.sin(ra),
            magnitude * np.sin(dec),
        ],
        axis=-1,
    )


def transfer_time_text(tof_days: float, planet_centred: bool) -> str:
    """A transfer time for people: days, and hours and minutes about a planet."""
    if not math.isfinite(tof_days):
        return "-"
    if not planet_centred:
        return f"{tof_days:.3f} days"
    minutes = round(tof_days * 1440.0)
    hours, minutes = divmod(minutes, 60)
    return f"{hours} h {minutes:02d} min = {tof_days:.4f} days"


__all__ = [
    "ASYMPTOTE_AT_ARRIVAL",
    "BURN_COMPONENTS",
    "LAUNCH_ONLY",
    "Burns",
    "CaseOutputs",
    "arc_burns",
    "case_outputs",
    "in_rtn",
    "launch_limit_keys",
    "phase_angles_deg",
    "rtn_axes",
    "transfer_time_text",
    "vector_from_angles",
]
