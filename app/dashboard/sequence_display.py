"""Sequence results turned into the plain data the sequence page's figures and panels draw.

The figure builders (``sequence_figures.py``, and ``figures.family_chart_figure`` for a leg's
family chart) take the dataclasses made here and know nothing of cases or the engine; this
module reads candidates (``solver.sequence.result.Candidate``), leg maps
(``solver.sequence.leg_map.LegMap``) and the ephemeris, and converts units for display.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np
from numpy.typing import NDArray

from solver.ephemeris.frames import ICRF, rotate
from solver.ephemeris.states import states
from solver.mechanics.families import (
    classify,
    family_curves,
    family_label,
    geometry,
    minimum_energy_tau,
    parabolic_tau,
)
from solver.mechanics.kepler import sample_arc
from solver.mechanics.lambert import BRANCH_NAMES, solve_lambert
from solver.reasons import describe
from solver.sequence.evaluate import SequenceModel
from solver.sequence.leg_map import LEG_MAP_METRICS, LegMap
from solver.sequence.provenance import DV_TOTAL, FLYBY_DV, FLYBY_MODEL, STOP_DV
from solver.sequence.result import Candidate, Encounter, LegResult, reason_text
from solver.sequence.spec import SequenceCase
from solver.time_units import SECONDS_PER_DAY
from solver.window.metrics import dv_conventions

from .display_data import (
    DetailRow,
    FamilyData,
    FamilyPoint,
    MapPoint,
    _display_frame,
    _fmt,
    _period_s,
    display_ms,
    display_name,
    utc_text,
)

KIND_WORDS = {"departure": "departure", "flyby": "flyby", "stop": "stop", "arrival": "arrival"}
ORBIT_POINTS = 241
LEG_POINTS_PER_REVOLUTION = 180

# ---------------------------------------------------------------------------------------------
# Small helpers


def bodies_label(candidate: Candidate) -> str:
    """``Earth › Venus › Earth › Earth › Jupiter``: the bodies met, in order."""
    return " › ".join(display_name(e.body) for e in candidate.encounters)


def encounter_title(index: int, encounter: Encounter) -> str:
    """``2 · Venus flyby``."""
    return f"{index + 1} · {display_name(encounter.body)} {KIND_WORDS[encounter.kind]}"


def flyby_margins_km(candidate: Candidate) -> list[float]:
    """Each flyby's periapsis altitude above its minimum, km (negative below it)."""
    return [
        e.periapsis_altitude_km - e.altitude_min_km
        for e in candidate.encounters
        if e.kind == "flyby"
    ]


def worst_margin_km(candidate: Candidate) -> float:
    """The smallest flyby altitude margin, km (NaN without flybys)."""
    margins = [m for m in flyby_margins_km(candidate) if math.isfinite(m)]
    if not margins:
        return math.nan
    return min(margins)


def _date(jd_tdb: float) -> str:
    return utc_text(jd_tdb)[:10]


# ---------------------------------------------------------------------------------------------
# Candidates table


@dataclass(frozen=True)
class CandidateRow:
    """One row of the ranked candidates."""

    rank: int
    bodies: str
    dates: tuple[str, ...]  # every encounter date, UTC (a stop: arrive and leave)
    dv_total_km_s: float
    c3_km2_s2: float
    worst_margin_km: float
    duration_days: float
    within: bool
    status: str


def candidate_rows(candidates: list[Candidate]) -> list[CandidateRow]:
    rows = []
    for rank, c in enumerate(candidates, start=1):
        dates: list[str] = []
        for e in c.encounters:
            dates.append(_date(e.jd_tdb))
            if e.kind == "stop":
                dates.append(_date(e.leave_jd_tdb))
        if not c.ok:
            status = "no arc: " + reason_text(c)
        elif c.within_limits:
            status = "within limits"
        else:
            n = len(c.breaches)
            status = f"outside {n} limit{'s' if n != 1 else ''}"
        rows.append(
            CandidateRow(
                rank=rank,
                bodies=bodies_label(c),
                dates=tuple(dates),
                dv_total_km_s=c.dv_total_km_s,
                c3_km2_s2=c.encounters[0].c3_km2_s2,
                worst_margin_km=worst_margin_km(c),
                duration_days=c.duration_days,
                within=c.within_limits,
                status=status,
            )
        )
    return rows


# ---------------------------------------------------------------------------------------------
# Arc view of the whole trajectory


@dataclass(frozen=True)
class LegTrack:
    """One leg drawn in the arc view (display frame and unit)."""

    index: int  # 1-based
    label: str
    xyz: NDArray[np.float64]


@dataclass(frozen=True)
class EncounterMark:
    """A body at one encounter."""

    index: int  # 1-based
    kind: str
    body: str
    label: str
    xyz: NDArray[np.float64]


@dataclass(frozen=True)
class OrbitTrack:
    """One full orbit of a body met (None-free: bodies on open orbits are left out)."""

    body: str
    xyz: NDArray[np.float64]


@dataclass(frozen=True)
class SequenceScene:
    """What the sequence's arc view draws."""

    central_name: str
    central_radius: float
    unit: str
    plane_label: str
    legs: list[LegTrack]
    encounters: list[EncounterMark]
    orbits: list[OrbitTrack]
    title: str = ""
    extent: float = 1.0


def sequence_scene(model: SequenceModel, candidate: Candidate) -> SequenceScene:
    """Every leg of a candidate, the bodies at each encounter and their orbits."""
    case = model.case
    bodies = model.case_bodies
    frame, plane_label, scale, unit = _display_frame(bodies)
    legs = []
    for leg in candidate.legs:
        if not leg.ok:
            continue
        _, r = sample_arc(
            leg.r1_km, leg.v1_km_s, leg.flight_s, leg.mu_km3_s2, LEG_POINTS_PER_REVOLUTION
        )
        label = (
            f"leg {leg.index}: {display_name(leg.from_body)} → {display_name(leg.to_body)}, "
            f"{leg.tof_days:.1f} d"
        )
        legs.append(LegTrack(leg.index, label, rotate(r, ICRF, frame) / scale))
    central = bodies.central.name
    marks = []
    for k, e in enumerate(candidate.encounters):
        r, _ = states(
            e.body,
            e.jd_tdb,
            central=central,
            frame=frame,
            source=case.ephemeris_source,
            registry=case.registry(),
            out_of_range="nan",
        )
        text = f"{encounter_title(k, e)}, {_date(e.jd_tdb)}"
        if e.kind == "stop":
            text += f" to {_date(e.leave_jd_tdb)}"
        marks.append(EncounterMark(k + 1, e.kind, e.body, text, np.asarray(r) / scale))
    orbits = []
    seen: set[str] = set()
    for e in candidate.encounters:
        if e.body.lower() in seen:
            continue
        seen.add(e.body.lower())
        r0, v0 = states(
            e.body,
            e.jd_tdb,
            central=central,
            frame=ICRF,
            source=case.ephemeris_source,
            registry=case.registry(),
            out_of_range="nan",
        )
        period_s = _period_s(np.asarray(r0), np.asarray(v0), model.mu)
        if not math.isfinite(period_s):
            continue
        jd = e.jd_tdb + np.linspace(0.0, period_s / SECONDS_PER_DAY, ORBIT_POINTS)
        r, _ = states(
            e.body,
            jd,
            central=central,
            frame=frame,
            source=case.ephemeris_source,
            registry=case.registry(),
            out_of_range="nan",
        )
        orbits.append(OrbitTrack(display_name(e.body), np.asarray(r) / scale))
    pieces = [t.xyz for t in legs] + [o.xyz for o in orbits]
    pieces += [m.xyz[None, :] for m in marks]
    stacked = np.concatenate(pieces) if pieces else np.zeros((1, 3))
    extent = float(np.nanmax(np.abs(stacked))) if np.isfinite(stacked).any() else 1.0
    radius = bodies.central.radius_km / scale if math.isfinite(bodies.central.radius_km) else 0.0
    return SequenceScene(
        central_name=display_name(central),
        central_radius=radius if radius > 0.01 * extent else 0.0,
        unit=unit,
        plane_label=plane_label,
        legs=legs,
        encounters=marks,
        orbits=orbits,
        title=f"{bodies_label(candidate)}, {candidate.duration_days:.0f} days",
        extent=extent if math.isfinite(extent) and extent > 0 else 1.0,
    )


# ---------------------------------------------------------------------------------------------
# Encounter chart


@dataclass(frozen=True)
class EncounterRow:
    """One encounter of the encounter chart (NaN where a quantity does not apply)."""

    label: str
    kind: str
    vinf_in_km_s: float
    vinf_out_km_s: float
    altitude_km: float
    altitude_min_km: float
    dv_km_s: float
    hover: str


@dataclass(frozen=True)
class EncounterChartData:
    rows: list[EncounterRow]
    title: str = ""


def _hover_lines(e: Encounter) -> list[str]:
    def line(name: str, value: float, unit: str, digits: int = 3) -> str | None:
        if not math.isfinite(value):
            return None
        return f"{name} {value:,.{digits}f} {unit}".rstrip()

    lines = [
        f"date {utc_text(e.jd_tdb).replace('T', ' ').rstrip('Z')} UTC",
        line("v∞ in", e.vinf_in_km_s, "km/s", 4),
        line("v∞ out", e.vinf_out_km_s, "km/s", 4),
    ]
    if e.kind == "departure":
        lines += [line("C3", e.c3_km2_s2, "km²/s²"), line("DLA", e.dla_deg, "deg", 2)]
        lines.append(line("parking orbit altitude", e.periapsis_altitude_km, "km", 0))
    elif e.kind == "flyby":
        lines += [
            line("|v∞ out| − |v∞ in|", e.vinf_out_km_s - e.vinf_in_km_s, "km/s", 4),
            line("turn angle", e.turn_angle_deg, "deg", 2),
            line("largest turn at the minimum altitude", e.largest_turn_deg, "deg", 2),
            line("periapsis altitude", e.periapsis_altitude_km, "km", 0),
            line("minimum altitude", e.altitude_min_km, "km", 0),
            line("margin", e.periapsis_altitude_km - e.altitude_min_km, "km", 0),
        ]
    elif e.kind == "stop":
        lines += [
            f"leave {utc_text(e.leave_jd_tdb).replace('T', ' ').rstrip('Z')} UTC",
            line("stay", e.stay_days, "days", 1),
            line("Δv in", e.dv_in_km_s, "km/s", 4),
            line("Δv out", e.dv_out_km_s, "km/s", 4),
        ]
    else:
        lines += [
            line("v∞ declination", e.vinf_arrival_dec_deg, "deg", 2),
            line("capture periapsis altitude", e.periapsis_altitude_km, "km", 0),
            line("entry speed", e.entry_speed_km_s, "km/s", 3),
        ]
    lines.append(line("Δv", e.dv_km_s, "km/s", 4))
    return [text for text in lines if text]


def encounter_chart_data(candidate: Candidate) -> EncounterChartData:
    """Per encounter, in order: v∞ in and out, periapsis altitude against its minimum, Δv."""
    rows = []
    for k, e in enumerate(candidate.encounters):
        title = encounter_title(k, e)
        rows.append(
            EncounterRow(
                label=f"{k + 1} · {display_name(e.body)}<br>{KIND_WORDS[e.kind]}",
                kind=e.kind,
                vinf_in_km_s=e.vinf_in_km_s,
                vinf_out_km_s=e.vinf_out_km_s,
                altitude_km=e.periapsis_altitude_km,
                altitude_min_km=e.altitude_min_km,
                dv_km_s=e.dv_km_s,
                hover=f"<b>{title}</b><br>" + "<br>".join(_hover_lines(e)),
            )
        )
    return EncounterChartData(rows, title=f"Encounters of {bodies_label(candidate)}")


# ---------------------------------------------------------------------------------------------
# Leg map


LEG_MAP_HOVER: tuple[tuple[str, str, str, str], ...] = (
    ("dv_total_km_s", "total Δv", "km/s", ".3f"),
    ("c3_km2_s2", "C3", "km²/s²", ".2f"),
    ("vinf_arrival_km_s", "arrival v∞", "km/s", ".3f"),
    ("flyby_margin_km", "worst flyby altitude margin", "km", ",.0f"),
    ("flyby_dv_max_km_s", "largest flyby Δv", "km/s", ".3f"),
    ("leg_tof_days", "leg TOF", "days", ".1f"),
    ("duration_days", "duration", "days", ".0f"),
)
"""What each leg-map cell's hover shows: (quantity, label, unit, format)."""

HIGHER_IS_BETTER = frozenset({"flyby_margin_km"})
"""Leg-map quantities whose larger values are the better ones (the colour scale turns round)."""


@dataclass(frozen=True)
class LegMapData:
    """What the leg map draws (axes in plot milliseconds, cells in display orientation: rows
    are end dates)."""

    metric: str
    metric_label: str
    unit: str
    start_ms: NDArray[np.float64]
    end_ms: NDArray[np.float64]
    values: NDArray[np.float32]
    outside: NDArray[np.bool_]
    no_arc: NDArray[np.bool_]
    hover: NDArray[np.float32]
    hover_fields: tuple[tuple[str, str, str, str], ...]
    limit: float | None
    higher_is_better: bool
    tof_days_min: float
    tof_days_max: float
    shown: MapPoint | None
    ranked: MapPoint | None
    x_title: str
    y_title: str
    title: str
    leg_tof_bounds: tuple[float, float] = (math.nan, math.nan)
    notes: list[str] = field(default_factory=list)


def leg_ends(candidate: Candidate, k: int) -> tuple[str, str]:
    """What the two axes of leg ``k``'s map are: ``("leave Venus", "Earth flyby")``."""
    leg = candidate.legs[k]
    start = candidate.encounters[k]
    end = candidate.encounters[k + 1]
    first = (
        f"leave {display_name(leg.from_body)}"
        if start.kind in ("departure", "stop")
        else f"{display_name(leg.from_body)} flyby"
    )
    if end.kind == "flyby":
        second = f"{display_name(leg.to_body)} flyby"
    else:
        second = f"arrive at {display_name(leg.to_body)}"
    return first, second


def leg_map_data(
    legmap: LegMap,
    metric: str,
    candidate: Candidate,
    ranked: Candidate | None,
    *,
    limit: float | None,
    tof_bounds: tuple[float, float],
) -> LegMapData:
    """Display arrays of one leg map coloured by ``metric``; ``ranked`` is the candidate as the
    search ranked it when the one shown was re-timed."""
    label, unit = LEG_MAP_METRICS[metric]
    values = legmap.values[metric].astype(np.float32)
    exists = np.isfinite(legmap.values["dv_total_km_s"])
    hover = np.stack(
        [legmap.values[name].astype(np.float32) for name, *_ in LEG_MAP_HOVER], axis=-1
    )
    start_ms = display_ms(legmap.start_jd_tdb)
    end_ms = display_ms(legmap.end_jd_tdb)
    k = legmap.leg
    x_name, y_name = leg_ends(candidate, k)

    def point(c: Candidate, text: str) -> MapPoint:
        leg = c.legs[k]
        value = float("nan")
        return MapPoint(
            float(display_ms(leg.departure_jd_tdb)),
            float(display_ms(leg.arrival_jd_tdb)),
            value,
            text,
        )

    tof = legmap.end_jd_tdb[:, None] - legmap.start_jd_tdb[None, :]
    leg = candidate.legs[k]
    return LegMapData(
        metric=metric,
        metric_label=label,
        unit=unit,
        start_ms=start_ms,
        end_ms=end_ms,
        values=np.where(exists, values, np.float32(np.nan)),
        outside=exists & ~legmap.within,
        no_arc=~exists,
        hover=hover,
        hover_fields=LEG_MAP_HOVER,
        limit=limit,
        higher_is_better=metric in HIGHER_IS_BETTER,
        tof_days_min=float(np.min(tof)),
        tof_days_max=float(np.max(tof)),
        shown=point(candidate, "shown"),
        ranked=point(ranked, "as ranked") if ranked is not None else None,
        x_title=f"{x_name} (UTC)",
        y_title=f"{y_name} (UTC)",
        title=(
            f"{label} of the whole sequence — leg {leg.index}: "
            f"{display_name(leg.from_body)} → {display_name(leg.to_body)}"
        ),
        leg_tof_bounds=tof_bounds,
    )


# ---------------------------------------------------------------------------------------------
# Family chart of a leg


def leg_family_data(model: SequenceModel, candidate: Candidate, k: int) -> FamilyData | None:
    """The family chart of leg ``k`` (its geometry, every arc of its dates, the one chosen);
    None for a resonant return, which is no Lambert arc."""
    leg = candidate.legs[k]
    if leg.branch == "resonant" or not leg.ok:
        return None
    case = model.case
    spec_leg = model.spec.legs[k]
    geo = geometry(leg.r1_km, leg.r2_km, model.pole, case.retrograde)
    lam = float(geo.lam)
    sol = solve_lambert(
        leg.r1_km,
        leg.r2_km,
        leg.flight_s,
        leg.mu_km3_s2,
        max_revs=spec_leg.max_revolutions,
        retrograde=case.retrograde,
        pole=model.pole,
    )
    points = []
    chosen = None
    for slot in range(len(sol.revolutions)):
        if int(sol.reason[slot]) != 0:
            continue
        revs = int(sol.revolutions[slot])
        branch = BRANCH_NAMES[int(sol.branch[slot])]
        c = classify(leg.r1_km, sol.v1_km_s[slot], leg.r2_km, leg.flight_s, leg.mu_km3_s2, revs)
        label = family_label(int(c.family), revs, branch) if int(c.family) else "unclassified"
        point = FamilyPoint(float(c.tau), float(c.epsilon), label, revs)
        points.append(point)
        if slot == leg.slot:
            chosen = point
    max_revs = spec_leg.max_revolutions
    taus = [p.tau for p in points if math.isfinite(p.tau)]
    default_max = 1.6 * minimum_energy_tau(lam, max_revs) + 2.0
    tau_max = max([default_max, *(1.15 * t for t in taus)])
    eps_max = max([1.5, *(1.15 * p.epsilon for p in points if math.isfinite(p.epsilon))])
    curves = family_curves(lam, max_revs, epsilon_max=eps_max, tau_max=tau_max)
    minimum = [
        FamilyPoint(minimum_energy_tau(lam, n), -1.0, f"minimum-energy ellipse, N = {n}", n)
        for n in range(max_revs + 1)
    ]
    way = "long way" if lam < 0 else "short way"
    angle = float(np.degrees(geo.transfer_angle_rad))
    return FamilyData(
        lam=lam,
        transfer_angle_deg=angle,
        curves=curves,
        parabolic_tau=parabolic_tau(lam),
        minimum_energy=minimum,
        cell_arcs=points,
        selected=chosen,
        max_revolutions=max_revs,
        title=(f"leg {leg.index}: λ = {lam:+.3f} ({way}, transfer angle {angle:.1f}°)"),
    )


# ---------------------------------------------------------------------------------------------
# Details panel


def _arc_text(leg: LegResult, model: SequenceModel) -> str:
    if leg.branch == "resonant":
        ratio = model.spec.legs[leg.index - 1].resonance
        text = f"resonant return {ratio[0]}:{ratio[1]}" if ratio else "resonant return"
        return text
    if leg.revolutions == 0:
        return "single revolution (N = 0)"
    return f"N = {leg.revolutions}, {leg.branch} branch"


def candidate_details(
    sequence_case: SequenceCase,
    model: SequenceModel,
    candidate: Candidate,
    *,
    rank_text: str,
    provenance: dict,
) -> list[tuple[str, list[DetailRow]]]:
    """The details panel's sections: the candidate, how each Δv is counted, every encounter,
    every leg, the provenance."""
    case = sequence_case.case
    if not candidate.ok:
        status = "no arc: " + reason_text(candidate)
    elif candidate.within_limits:
        status = "within limits"
    else:
        status = "outside limits: " + "; ".join(candidate.breaches)
    first, last = candidate.encounters[0], candidate.encounters[-1]
    sections: list[tuple[str, list[DetailRow]]] = [
        (
            "Candidate",
            [
                DetailRow("sequence", bodies_label(candidate)),
                DetailRow("rank", rank_text),
                DetailRow("status", status),
                DetailRow("total Δv", _fmt(candidate.dv_total_km_s, 4), "km/s"),
                DetailRow("duration", _fmt(candidate.duration_days, 1), "days"),
                DetailRow("departure", utc_text(first.jd_tdb), "UTC"),
                DetailRow("arrival", utc_text(last.jd_tdb), "UTC"),
                DetailRow(
                    "objective",
                    f"{candidate.objective} = {_fmt(candidate.objective_value, 4)}",
                ),
            ],
        )
    ]
    counted = dv_conventions(case, model.case_bodies)
    sections.append(
        (
            "How each Δv is counted",
            [
                DetailRow("departure", counted["departure_dv"]),
                DetailRow("flyby", FLYBY_DV),
                DetailRow("stop", STOP_DV),
                DetailRow("arrival", counted["arrival_dv"]),
                DetailRow("total", DV_TOTAL),
            ],
        )
    )
    for k, e in enumerate(candidate.encounters):
        rows = [DetailRow("date", utc_text(e.jd_tdb), "UTC")]
        if e.kind == "departure":
            rows += [
                DetailRow("C3", _fmt(e.c3_km2_s2, 3), "km²/s²"),
                DetailRow("v∞ out", _fmt(e.vinf_out_km_s, 4), "km/s"),
                DetailRow("DLA", _fmt(e.dla_deg, 2), "deg"),
                DetailRow("RLA", _fmt(e.rla_deg, 2), "deg"),
                DetailRow("parking orbit altitude", _fmt(e.periapsis_altitude_km, 0), "km"),
            ]
        elif e.kind == "flyby":
            rows += [
                DetailRow("v∞ in", _fmt(e.vinf_in_km_s, 4), "km/s"),
                DetailRow("v∞ out", _fmt(e.vinf_out_km_s, 4), "km/s"),
                DetailRow("turn angle", _fmt(e.turn_angle_deg, 2), "deg"),
                DetailRow("largest turn at the minimum", _fmt(e.largest_turn_deg, 2), "deg"),
                DetailRow("periapsis altitude", _fmt(e.periapsis_altitude_km, 0), "km"),
                DetailRow("minimum altitude", _fmt(e.altitude_min_km, 0), "km"),
                DetailRow("margin", _fmt(e.periapsis_altitude_km - e.altitude_min_km, 0), "km"),
            ]
        elif e.kind == "stop":
            rows += [
                DetailRow("leave", utc_text(e.leave_jd_tdb), "UTC"),
                DetailRow("stay", _fmt(e.stay_days, 1), "days"),
                DetailRow("v∞ in", _fmt(e.vinf_in_km_s, 4), "km/s"),
                DetailRow("v∞ out", _fmt(e.vinf_out_km_s, 4), "km/s"),
                DetailRow("Δv in", _fmt(e.dv_in_km_s, 4), "km/s"),
                DetailRow("Δv out", _fmt(e.dv_out_km_s, 4), "km/s"),
            ]
        else:
            rows += [
                DetailRow("v∞ in", _fmt(e.vinf_in_km_s, 4), "km/s"),
                DetailRow("v∞ declination", _fmt(e.vinf_arrival_dec_deg, 2), "deg"),
                DetailRow("v∞ right ascension", _fmt(e.vinf_arrival_ra_deg, 2), "deg"),
            ]
            if math.isfinite(e.periapsis_altitude_km):
                rows.append(
                    DetailRow("capture periapsis altitude", _fmt(e.periapsis_altitude_km, 0), "km")
                )
            if math.isfinite(e.entry_speed_km_s):
                rows.append(DetailRow("entry speed", _fmt(e.entry_speed_km_s, 3), "km/s"))
        rows.append(DetailRow("Δv", _fmt(e.dv_km_s, 4), "km/s"))
        sections.append((encounter_title(k, e), rows))
    for leg in candidate.legs:
        rows = [
            DetailRow("start", utc_text(leg.departure_jd_tdb), "UTC"),
            DetailRow("end", utc_text(leg.arrival_jd_tdb), "UTC"),
            DetailRow("TOF", _fmt(leg.tof_days, 2), "days"),
            DetailRow("arc", _arc_text(leg, model)),
        ]
        if leg.branch == "resonant":
            rows += [
                DetailRow("pitch", _fmt(leg.metrics.get("pitch_deg", math.nan), 3), "deg"),
                DetailRow("clock", _fmt(leg.metrics.get("clock_deg", math.nan), 3), "deg"),
                DetailRow(
                    "body's displacement", _fmt(leg.metrics.get("miss_km", math.nan), 0), "km"
                ),
            ]
        elif leg.ok:
            kind = "Type I" if leg.transfer_angle_deg < 180.0 else "Type II"
            rows += [
                DetailRow("transfer angle", _fmt(leg.transfer_angle_deg, 1), "deg"),
                DetailRow("type", kind),
            ]
        else:
            rows.append(DetailRow("why no arc", describe(leg.reason)))
        title = f"Leg {leg.index} · {display_name(leg.from_body)} → {display_name(leg.to_body)}"
        sections.append((title, rows))
    sections.append(
        (
            "Provenance",
            [
                DetailRow("case", case.title),
                DetailRow("case hash", str(provenance.get("case_hash", ""))),
                DetailRow("sequence hash", str(provenance.get("sequence_hash", ""))),
                DetailRow("ephemeris", str(provenance.get("ephemeris", ""))),
                DetailRow("engine", str(provenance.get("engine", ""))),
                DetailRow("flyby model", FLYBY_MODEL),
                DetailRow("time scales", str(provenance.get("time_scales", ""))),
            ],
        )
    )
    return sections


__all__ = [
    "HIGHER_IS_BETTER",
    "LEG_MAP_HOVER",
    "CandidateRow",
    "EncounterChartData",
    "EncounterMark",
    "EncounterRow",
    "LegMapData",
    "LegTrack",
    "OrbitTrack",
    "SequenceScene",
    "bodies_label",
    "candidate_details",
    "candidate_rows",
    "encounter_chart_data",
    "encounter_title",
    "flyby_margins_km",
    "leg_ends",
    "leg_family_data",
    "leg_map_data",
    "sequence_scene",
    "worst_margin_km",
]
