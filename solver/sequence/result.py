"""One candidate evaluated exactly: every leg, every encounter, the limits it breaks.

:func:`evaluate_candidate` takes a set of encounter dates (and optionally the arc slot of some
legs) and returns a :class:`Candidate` of plain values: what the CLI prints, the exports write
and the shortlist keeps. It runs the exact path of :class:`~solver.sequence.evaluate.
SequenceModel` (the window engine's ephemeris reads and Lambert calls), so its numbers are the
ones any other part of arcwindow gives for the same arcs.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any

import numpy as np
from numpy.typing import NDArray

from solver.ephemeris.bodies import has_mass
from solver.ephemeris.timescales import jd_tdb_to_utc
from solver.mechanics.lambert import BRANCH_NAMES
from solver.reasons import Reason, describe
from solver.sequence.evaluate import BatchArcs, BatchCosts, SequenceModel
from solver.sequence.flyby import largest_turn_deg
from solver.sequence.limits import (
    SURFACE_RULE_TEXT,
    SequenceLimitRule,
    limit_value,
    rules_for,
)
from solver.sequence.polish import polish
from solver.time_units import SECONDS_PER_DAY
from solver.window.case_bodies import transfer_angle_deg


@dataclass(frozen=True)
class Encounter:
    """One encounter of a candidate (departure, flyby, stop or arrival), plain values.

    Missing quantities are NaN (e.g. no v∞ in at the departure). Dates are JD TDB; a stop has an
    arrival date (``jd_tdb``) and a departure date (``leave_jd_tdb``).
    """

    kind: str
    body: str
    jd_tdb: float
    leave_jd_tdb: float
    vinf_in_km_s: float = math.nan
    vinf_out_km_s: float = math.nan
    dv_km_s: float = math.nan
    periapsis_altitude_km: float = math.nan
    turn_angle_deg: float = math.nan
    periapsis_radius_km: float = math.nan
    altitude_min_km: float = math.nan
    largest_turn_deg: float = math.nan
    dv_in_km_s: float = math.nan
    dv_out_km_s: float = math.nan
    stay_days: float = math.nan
    c3_km2_s2: float = math.nan
    dla_deg: float = math.nan
    rla_deg: float = math.nan
    entry_speed_km_s: float = math.nan
    vinf_arrival_dec_deg: float = math.nan
    vinf_arrival_ra_deg: float = math.nan
    vinf_in_icrf_km_s: tuple[float, float, float] | None = None
    vinf_out_icrf_km_s: tuple[float, float, float] | None = None


@dataclass(frozen=True)
class LegResult:
    """One leg of a candidate: the chosen arc with its states and metrics (ICRF, km, km/s)."""

    index: int
    from_body: str
    to_body: str
    departure_jd_tdb: float
    arrival_jd_tdb: float
    revolutions: int
    branch: str
    slot: int
    reason: int
    transfer_angle_deg: float
    r1_km: NDArray[np.float64]
    v1_km_s: NDArray[np.float64]
    r2_km: NDArray[np.float64]
    v2_km_s: NDArray[np.float64]
    metrics: dict[str, float]
    mu_km3_s2: float

    @property
    def tof_days(self) -> float:
        """Elapsed time of the leg, days (TT, as the window engine reports a TOF)."""
        return self.metrics["tof_days"]

    @property
    def flight_s(self) -> float:
        """The TDB interval the arc flies, s (what propagation of the leg uses)."""
        return (self.arrival_jd_tdb - self.departure_jd_tdb) * SECONDS_PER_DAY

    @property
    def ok(self) -> bool:
        return self.reason == Reason.OK


@dataclass(frozen=True)
class Candidate:
    """One set of encounter dates of a sequence, with its best arcs and every number.

    Attributes
    ----------
    sequence : str
        The sequence's name.
    objective : str
        What ``objective_value`` measures (the sequence's objective).
    objective_value : float
    score : float
        What a search minimizes (objective plus weighted breaches).
    within_limits : bool
    breaches : tuple of str
        The limits broken, in words (empty when within limits).
    reason : int
        ``Reason.OK``, or why some leg has no arc at all.
    encounters : tuple of Encounter
    legs : tuple of LegResult
    dv_total_km_s : float
        Every burn: departure, flybys, stops (in and out), arrival, each counted as the
        provenance says.
    duration_days : float
    """

    sequence: str
    objective: str
    objective_value: float
    score: float
    within_limits: bool
    breaches: tuple[str, ...]
    reason: int
    encounters: tuple[Encounter, ...]
    legs: tuple[LegResult, ...]
    dv_total_km_s: float
    duration_days: float
    epochs_jd_tdb: tuple[float, ...] = field(default=())

    @property
    def ok(self) -> bool:
        return self.reason == Reason.OK

    @property
    def departure_jd_tdb(self) -> float:
        return self.encounters[0].jd_tdb

    @property
    def arrival_jd_tdb(self) -> float:
        return self.encounters[-1].jd_tdb

    @property
    def slots(self) -> tuple[int, ...]:
        return tuple(leg.slot for leg in self.legs)


def evaluate_candidate(
    model: SequenceModel,
    epochs_jd_tdb: Any,
    *,
    slots: list[int | None] | None = None,
    angles_deg: Any = None,
) -> Candidate:
    """Everything about one candidate, by the exact path.

    Parameters
    ----------
    model : SequenceModel
    epochs_jd_tdb : array_like, shape (E,)
        Encounter dates in the order of the sequence's events (a stop gives two: arrive, leave).
    slots : list of int or None, optional
        Pin the arc slot of some legs (slot 0 single revolution; 2N-1, 2N the N-revolution low
        and high branches); None leaves the choice to the evaluation (within limits first, then
        the objective).
    angles_deg : array_like, shape (R, 2), optional
        Each resonant leg's (pitch, clock), deg; None chooses them (the best for these dates,
        :func:`best_resonance_angles`).
    """
    epochs = np.asarray(epochs_jd_tdb, dtype=float).reshape(1, -1)
    angles = None
    if model.spec.resonant_legs:
        angles = (
            best_resonance_angles(model, epochs[0])
            if angles_deg is None
            else np.asarray(angles_deg, dtype=float).reshape(1, -1, 2)
        )
    arcs = model.arcs(epochs, angles, fast=False)
    costs = model.costs(arcs, detail=True, pinned=slots)
    return candidate_from_batch(model, arcs, costs, 0)


def candidate_from_batch(
    model: SequenceModel, arcs: BatchArcs, costs: BatchCosts, row: int
) -> Candidate:
    """The candidate in ``row`` of a detailed stage-2 result."""
    spec, case = model.spec, model.case
    epochs = arcs.epochs[row]
    chosen = costs.slots[row]
    values = costs.values
    legs: list[LegResult] = []
    for k, leg_arcs in enumerate(arcs.legs):
        s = int(chosen[k]) if chosen[k] >= 0 else 0
        metrics = {
            name: float(np.asarray(array)[row, s]) for name, array in values["legs"][k].items()
        }
        metrics["tof_days"] = float(leg_arcs.tof_days[row])
        if leg_arcs.miss_km is not None and leg_arcs.angles_deg is not None:
            metrics["miss_km"] = float(leg_arcs.miss_km[row])
            metrics["pitch_deg"] = float(leg_arcs.angles_deg[row, 0])
            metrics["clock_deg"] = float(leg_arcs.angles_deg[row, 1])
        angle = float(
            transfer_angle_deg(
                leg_arcs.r1_km[row], leg_arcs.r2_km[row], model.pole, case.retrograde
            )
        )
        legs.append(
            LegResult(
                index=k + 1,
                from_body=spec.legs[k].from_body,
                to_body=spec.legs[k].to_body,
                departure_jd_tdb=float(epochs[spec.leg_epochs(k)[0]]),
                arrival_jd_tdb=float(epochs[spec.leg_epochs(k)[1]]),
                revolutions=int(leg_arcs.revolutions[s]),
                branch="resonant" if leg_arcs.resonant else BRANCH_NAMES[int(leg_arcs.branch[s])],
                slot=int(chosen[k]),
                reason=int(leg_arcs.reason[row, s]),
                transfer_angle_deg=angle,
                r1_km=leg_arcs.r1_km[row].copy(),
                v1_km_s=leg_arcs.v1_km_s[row, s].copy(),
                r2_km=leg_arcs.r2_km[row].copy(),
                v2_km_s=leg_arcs.v2_km_s[row, s].copy(),
                metrics=metrics,
                mu_km3_s2=model.mu,
            )
        )

    encounters: list[Encounter] = []
    body_v = arcs.body_v_km_s[row]
    for event in spec.events:
        body = model.bodies[event.index]
        base: dict[str, Any] = {
            "kind": event.kind,
            "body": body.name,
            "jd_tdb": float(epochs[event.epoch_in]),
            "leave_jd_tdb": float(epochs[event.epoch_out]),
        }
        if event.kind == "departure":
            m = legs[0].metrics
            vinf = legs[0].v1_km_s - body_v[event.epoch_out]
            encounters.append(
                Encounter(
                    **base,
                    vinf_out_km_s=m["vinf_departure_km_s"],
                    dv_km_s=m["dv_departure_km_s"],
                    periapsis_altitude_km=_or_nan(case.parking_altitude_km)
                    if has_mass(body)
                    else math.nan,
                    c3_km2_s2=m["c3_km2_s2"],
                    dla_deg=m["dla_deg"],
                    rla_deg=m["rla_deg"],
                    vinf_out_icrf_km_s=_vec(vinf),
                )
            )
        elif event.kind == "arrival":
            m = legs[-1].metrics
            vinf = legs[-1].v2_km_s - body_v[event.epoch_in]
            periapsis = (
                case.capture_periapsis_altitude_km if case.arrival_mode == "capture" else None
            )
            encounters.append(
                Encounter(
                    **base,
                    vinf_in_km_s=m["vinf_arrival_km_s"],
                    dv_km_s=m["dv_arrival_km_s"],
                    periapsis_altitude_km=_or_nan(periapsis),
                    entry_speed_km_s=m["entry_speed_km_s"],
                    vinf_arrival_dec_deg=m["vinf_arrival_dec_deg"],
                    vinf_arrival_ra_deg=m["vinf_arrival_ra_deg"],
                    vinf_in_icrf_km_s=_vec(vinf),
                )
            )
        else:
            ev = values[f"event{event.index}"]
            s_in = max(int(chosen[event.leg_in]), 0)
            s_out = max(int(chosen[event.leg_out]), 0)
            v_in = legs[event.leg_in].v2_km_s - body_v[event.epoch_in]
            v_out = legs[event.leg_out].v1_km_s - body_v[event.epoch_out]
            leg = spec.legs[event.leg_in]
            if event.kind == "flyby":
                fly = ev["flyby"]
                vin = float(fly.vinf_in_km_s[row, s_in, s_out])
                vout = float(fly.vinf_out_km_s[row, s_in, s_out])
                altitude_min = float(leg.altitude_min_km or 0.0)
                encounters.append(
                    Encounter(
                        **base,
                        vinf_in_km_s=vin,
                        vinf_out_km_s=vout,
                        dv_km_s=float(ev["dv_km_s"][row, s_in, s_out]),
                        periapsis_altitude_km=float(ev["periapsis_altitude_km"][row, s_in, s_out]),
                        turn_angle_deg=float(fly.turn_angle_deg[row, s_in, s_out]),
                        periapsis_radius_km=float(fly.periapsis_radius_km[row, s_in, s_out]),
                        altitude_min_km=altitude_min,
                        largest_turn_deg=float(
                            largest_turn_deg(
                                vin, vout, body.gm_km3_s2, body.radius_km + altitude_min
                            )
                        ),
                        vinf_in_icrf_km_s=_vec(v_in),
                        vinf_out_icrf_km_s=_vec(v_out),
                    )
                )
            else:
                dv_in = float(ev["dv_in_km_s"][row, s_in])
                dv_out = float(ev["dv_out_km_s"][row, s_out])
                encounters.append(
                    Encounter(
                        **base,
                        vinf_in_km_s=float(ev["vinf_in_km_s"][row, s_in]),
                        vinf_out_km_s=float(ev["vinf_out_km_s"][row, s_out]),
                        dv_km_s=dv_in + dv_out,
                        dv_in_km_s=dv_in,
                        dv_out_km_s=dv_out,
                        periapsis_altitude_km=_or_nan(leg.periapsis_altitude_km),
                        stay_days=float(epochs[event.epoch_out] - epochs[event.epoch_in]),
                        vinf_in_icrf_km_s=_vec(v_in),
                        vinf_out_icrf_km_s=_vec(v_out),
                    )
                )

    reason = int(costs.reason[row])
    dv_total = float(sum(e.dv_km_s for e in encounters)) if reason == Reason.OK else math.nan
    breaches = tuple(_breaches(model, legs, encounters)) if reason == Reason.OK else ()
    return Candidate(
        sequence=spec.name,
        objective=spec.objective,
        objective_value=float(costs.objective[row]),
        score=float(costs.score[row]),
        within_limits=bool(costs.within[row]),
        breaches=breaches,
        reason=reason,
        encounters=tuple(encounters),
        legs=tuple(legs),
        dv_total_km_s=dv_total,
        duration_days=float(epochs[-1] - epochs[0]),
        epochs_jd_tdb=tuple(float(e) for e in epochs),
    )


def _utc(jd_tdb: float) -> str:
    return str(jd_tdb_to_utc(jd_tdb, digits=0))


def _or_nan(value: float | None) -> float:
    return math.nan if value is None else float(value)


def _vec(v: NDArray[np.float64]) -> tuple[float, float, float]:
    return (float(v[0]), float(v[1]), float(v[2]))


def _breaches(model: SequenceModel, legs: list[LegResult], encounters: list[Encounter]):
    """The limits a candidate breaks, in words, in the tables' order per scope."""
    spec, case = model.spec, model.case
    out: list[str] = []

    def check(rule: SequenceLimitRule, value: float, limit: float | None, where: str) -> None:
        if limit is None or not math.isfinite(value):
            return
        if float(rule.violation(value, limit)) > 0.0:
            if rule.unit == "JD":  # a date outside a window of the case
                side = "after" if rule.bound == "max" else "before"
                out.append(f"{where} {_utc(value)} {side} {rule.key} {_utc(limit)}")
            else:
                out.append(rule.text(value, limit, where))

    first, last = encounters[0], encounters[-1]
    departure_values = {"departure_jd_tdb": first.jd_tdb, **legs[0].metrics}
    for rule in rules_for("departure"):
        check(rule, departure_values[rule.quantity], limit_value(rule, case, spec), "departure")
    arrival_values = {"arrival_jd_tdb": last.jd_tdb, **legs[-1].metrics}
    for rule in rules_for("arrival"):
        check(rule, arrival_values[rule.quantity], limit_value(rule, case, spec), "arrival")
    radius = model.case_bodies.central.radius_km
    for k, leg in enumerate(legs):
        for rule in rules_for("leg"):
            check(rule, leg.tof_days, limit_value(rule, case, spec, spec.legs[k]), f"leg {k + 1}")
        if math.isfinite(radius) and not leg.metrics["periapsis_km"] > radius:
            out.append(f"leg {k + 1} {SURFACE_RULE_TEXT}")
        if "miss_km" in leg.metrics:
            for rule in rules_for("resonance"):
                check(rule, leg.metrics["miss_km"], limit_value(rule, case, spec), f"leg {k + 1}")
    for event, encounter in zip(spec.events, encounters, strict=True):
        leg_spec = spec.legs[event.leg_in] if event.leg_in >= 0 else None
        where = f"{encounter.kind} {event.index} ({encounter.body})"
        if event.kind == "flyby":
            values = {
                "periapsis_altitude_km": encounter.periapsis_altitude_km,
                "dv_km_s": encounter.dv_km_s,
                "vinf_mismatch_km_s": abs(encounter.vinf_out_km_s - encounter.vinf_in_km_s),
            }
            for rule in rules_for("flyby"):
                check(rule, values[rule.quantity], limit_value(rule, case, spec, leg_spec), where)
        elif event.kind == "stop":
            for rule in rules_for("stop"):
                check(rule, encounter.stay_days, limit_value(rule, case, spec, leg_spec), where)
    for rule in rules_for("sequence"):
        check(rule, last.jd_tdb - first.jd_tdb, limit_value(rule, case, spec), "sequence")
    return out


def best_resonance_angles(model: SequenceModel, epochs: Any) -> NDArray[np.float64]:
    """The resonant legs' (pitch, clock) angles that score best for these dates, shape
    (1, R, 2): a spread of starting directions, the best polished by a compass search."""
    spec = model.spec
    epochs = np.asarray(epochs, dtype=float).reshape(-1)
    pitches = np.array([3.0, 8.0, 15.0, 25.0, 40.0])
    clocks = np.arange(-180.0, 180.0, 30.0)
    grid = np.array([(p, c) for p in pitches for c in clocks])
    n_res = len(spec.resonant_legs)
    # Every resonant leg takes each starting direction in turn (the same one for all of them).
    starts = np.repeat(grid[:, None, :], n_res, axis=1)
    variables = spec.variables(np.broadcast_to(epochs, (len(starts), len(epochs))), starts)
    score = model.score(variables)
    best = variables[np.argsort(score)[:4]]
    bounds = spec.variable_bounds(model.case)
    fixed = [i for i, name in enumerate(spec.variable_names) if not name.endswith("_deg")]
    for i in fixed:  # the dates stay as given
        bounds[i] = (float(best[0, i]), float(best[0, i]))
    polished = polish(model, bounds, best, first_step_days=5.0, last_step_days=1e-6)
    final = polished[np.argmin(model.score(polished))]
    return spec.angles(final[None, :])


def reason_text(candidate: Candidate) -> str:
    """Why a candidate has no arc (empty when it has)."""
    if candidate.ok:
        return ""
    legs = [leg for leg in candidate.legs if not leg.ok]
    where = f"leg {legs[0].index} ({legs[0].from_body} to {legs[0].to_body}): " if legs else ""
    return where + describe(candidate.reason)


__all__ = [
    "Candidate",
    "Encounter",
    "LegResult",
    "best_resonance_angles",
    "candidate_from_batch",
    "evaluate_candidate",
    "reason_text",
]
