"""Grid search of a sequence: every encounter date on a coarse grid, with pruning. Repeatable.

Departures step through the case's departure window at its departure step; each leg's TOF
through its bounds at the leg's ``tof_step_days``; each stop's stay at its ``stay_step_days``.
The search grows partial sequences leg by leg:

1. every surviving partial sequence is extended by every TOF of the next leg, and the leg's arcs
   are solved for all of them in one batched call;
2. an extension is dropped when no pair of arcs (the arriving leg's and the leaving leg's) can be
   joined at the flyby between them: when the v∞ mismatch there is larger than any allowed
   flyby can fix (the turn needs a periapsis below the lowest allowed, or the speed difference
   needs a burn above the largest allowed, even at the lowest periapsis, which needs the least);
   also when the departure breaks a departure limit with every arc, every arc of the leg passes
   inside the central body, or the dates can no longer meet the arrival window or the longest
   duration;
3. when more than ``beam`` partial sequences survive, the best ``beam`` by their score so far
   (the sequence cut at this leg, scored like a whole one) are kept, ties by grid order.

A resonant leg (``resonance = "N:M"``) has no Lambert arc: its orbit's period is its TOF over
M, which fixes the spacecraft's speed at the body, and its direction is two angles. After a
flyby the pitch is the one whose v∞ has the arriving v∞'s magnitude (so the flyby needs no
burn; every clock angle keeps it, the resonance circle of tour design) and the clock angle steps
by ``clock_step_deg``; after the departure or a stop both step. Such extensions are dropped when
the body's miss distance breaks its limit, no orbit of the period reaches the body, the flyby
before cannot make the turn, or (after the departure) a departure limit breaks.

Complete sequences are scored, and the ``top`` best distinct ones evaluated exactly. No random
choice is made anywhere, so a grid gives the same candidates on every run and every machine
(``solver/sequence/search.py`` is the global search; this feeds screens that must not change
between two looks).
"""

from __future__ import annotations

import dataclasses
import math
import time
from dataclasses import dataclass, field

import numpy as np
from numpy.typing import NDArray

from solver.errors import InputError
from solver.sequence.evaluate import SequenceModel
from solver.sequence.flyby import largest_turn_deg, smallest_dv_km_s
from solver.sequence.limits import limit_value, rules_for, surface_violation
from solver.sequence.resonance import (
    miss_distance_km,
    pitch_for_vinf_deg,
    resonant_speed_km_s,
    resonant_velocity,
)
from solver.sequence.result import Candidate, evaluate_candidate
from solver.sequence.search import Progress, distinct_best, rank_candidates
from solver.sequence.spec import PITCH_BOUNDS_DEG, SequenceCase, SequenceSpec
from solver.window.case import Case
from solver.window.metrics import arc_metrics


@dataclass(frozen=True)
class GridSettings:
    """How a grid search runs.

    Attributes
    ----------
    top : int
        Candidates returned.
    beam : int
        Partial sequences kept after each leg (the best by score so far).
    distinct_days : float
        Candidates whose dates all lie within this many days are the same one.
    departure_step_days : float or None
        Departure step (default: the case's ``window.departure_step_days``).
    clock_step_deg : float
        Step of a resonant leg's clock angle, deg.
    pitch_step_deg : float
        Step of a resonant leg's pitch angle where no flyby comes before it (after the
        departure or a stop), deg; after a flyby the pitch follows from the arriving v∞.
    """

    top: int = 5
    beam: int = 20_000
    distinct_days: float = 5.0
    departure_step_days: float | None = None
    clock_step_deg: float = 10.0
    pitch_step_deg: float = 10.0

    def __post_init__(self) -> None:
        if isinstance(self.top, bool) or not isinstance(self.top, int) or not 1 <= self.top:
            raise InputError("--top", self.top, "an integer >= 1")
        if isinstance(self.beam, bool) or not isinstance(self.beam, int) or self.beam < 1:
            raise InputError("--beam", self.beam, "an integer >= 1")
        for name, value in (
            ("--clock-step-deg", self.clock_step_deg),
            ("--pitch-step-deg", self.pitch_step_deg),
        ):
            if not (math.isfinite(value) and 0.1 <= value <= 90.0):
                raise InputError(name, value, "a step from 0.1 to 90 deg")
        step = self.departure_step_days
        if step is not None and not (math.isfinite(step) and 1.0 / 1440.0 <= step <= 3650.0):
            raise InputError("--departure-step-days", step, "a step from 1 minute to 3650 days")


@dataclass
class GridLevel:
    """What one leg of the grid search did: extensions made, dropped by each rule, kept."""

    leg: int
    extensions: int
    pruned_flyby: int = 0
    pruned_limits: int = 0
    trimmed: int = 0
    kept: int = 0


@dataclass
class GridSearchResult:
    """Candidates of a grid search (ranked) and its work per leg."""

    candidates: list[Candidate]
    levels: list[GridLevel] = field(default_factory=list)
    evaluations: int = 0
    seconds: float = 0.0


def _steps(low: float, high: float, step: float) -> NDArray[np.float64]:
    n = math.floor((high - low) / step + 1e-9)
    values = low + step * np.arange(n + 1, dtype=float)
    if values[-1] < high - 1e-9:
        values = np.append(values, high)
    return np.asarray(values, dtype=np.float64)


def _truncated(case: Case, spec: SequenceSpec, k: int) -> SequenceModel:
    """The sequence cut after leg ``k``, ending there with no burn and no arrival limits: its
    score is a partial sequence's score so far."""
    legs = list(spec.legs[: k + 1])
    legs[-1] = dataclasses.replace(legs[-1], kind="arrival")
    cut = dataclasses.replace(spec, legs=tuple(legs), events=())
    open_case = dataclasses.replace(
        case,
        arrival_mode="flyby",
        entry_altitude_km=None,
        limits=dataclasses.replace(case.limits, vinf_arrival_max_km_s=None),
        arrival_start_jd_tdb=-math.inf,
        arrival_end_jd_tdb=math.inf,
    )
    return SequenceModel(open_case, cut)


def grid_search(
    sequence_case: SequenceCase,
    spec: SequenceSpec | None = None,
    settings: GridSettings = GridSettings(),
    *,
    progress: Progress | None = None,
) -> GridSearchResult:
    """The ``top`` best distinct candidates of one sequence on its grid (see the module
    docstring)."""
    start = time.perf_counter()
    case = sequence_case.case
    spec = spec or sequence_case.sequences[0]
    model = SequenceModel(case, spec)
    step = settings.departure_step_days or case.departure_step_days
    epochs = _steps(case.departure_start_jd_tdb, case.departure_end_jd_tdb, step)[:, None]
    # Each row's resonant legs' (pitch, clock), deg (zero until the leg is reached).
    angles = np.zeros((len(epochs), len(spec.resonant_legs), 2))
    levels: list[GridLevel] = []
    evaluations = 0
    previous_arrival = None  # (v2 of the last leg's slots, the body's velocity) per row
    remaining_min = np.cumsum([leg.tof_min_days for leg in spec.legs][::-1])[::-1]
    for k, leg in enumerate(spec.legs):
        tofs = _steps(leg.tof_min_days, leg.tof_max_days, leg.tof_step_days)
        parent = np.repeat(np.arange(len(epochs)), len(tofs))
        grown = np.concatenate(
            [epochs[parent], (epochs[parent, -1] + np.tile(tofs, len(epochs)))[:, None]], axis=1
        )
        grown_angles = angles[parent]
        if leg.resonance is not None:
            grown, grown_angles, level, arrival_v, body_v_end, keep = _resonant_leg(
                model, k, grown, grown_angles, parent, previous_arrival, settings
            )
            keep &= _dates_can_finish(case, spec, grown, k, remaining_min)
            evaluations += len(grown)
        else:
            level = GridLevel(leg=k + 1, extensions=len(grown))
            evaluations += len(grown)
            keep = _dates_can_finish(case, spec, grown, k, remaining_min)
            arrival_v, body_v_end, keep, level.pruned_flyby = _solve_leg(
                model, k, grown, keep, previous_arrival, parent
            )
        level.pruned_limits = int(level.extensions - np.count_nonzero(keep) - level.pruned_flyby)
        grown, parent_arrival = grown[keep], (arrival_v[keep], body_v_end[keep])
        grown_angles = grown_angles[keep]
        if leg.kind == "stop":
            assert leg.stay_min_days is not None and leg.stay_max_days is not None
            assert leg.stay_step_days is not None
            stays = _steps(leg.stay_min_days, leg.stay_max_days, leg.stay_step_days)
            rows = np.repeat(np.arange(len(grown)), len(stays))
            grown = np.concatenate(
                [grown[rows], (grown[rows, -1] + np.tile(stays, len(grown)))[:, None]], axis=1
            )
            grown_angles = grown_angles[rows]
            parent_arrival = (parent_arrival[0][rows], parent_arrival[1][rows])
        if len(grown) > settings.beam and k < len(spec.legs) - 1:
            cut = _truncated(case, spec, k)
            n_cut = len(cut.spec.resonant_legs)
            score = cut.score(
                cut.spec.variables(grown[:, : cut.spec.n_epochs], grown_angles[:, :n_cut])
            )
            evaluations += len(grown)
            order = np.lexsort((np.arange(len(score)), score))[: settings.beam]
            order.sort()
            level.trimmed = len(grown) - len(order)
            grown = grown[order]
            grown_angles = grown_angles[order]
            parent_arrival = (parent_arrival[0][order], parent_arrival[1][order])
        level.kept = len(grown)
        levels.append(level)
        if progress is not None:
            progress(
                f"{spec.name}: leg {k + 1}/{len(spec.legs)}: {level.extensions} extensions, "
                f"{level.pruned_flyby} pruned at the flyby, {level.pruned_limits} by limits, "
                f"{level.trimmed} beyond the beam, {level.kept} kept"
            )
        epochs = grown
        angles = grown_angles
        previous_arrival = parent_arrival
        if len(epochs) == 0:
            break

    candidates: list[Candidate] = []
    if len(epochs):
        variables = spec.variables(epochs, angles)
        score = model.score(variables)
        evaluations += len(score)
        chosen = distinct_best(spec, variables, score, settings.top, settings.distinct_days)
        resonant = bool(spec.resonant_legs)
        candidates = [
            evaluate_candidate(model, epochs[i], angles_deg=angles[i] if resonant else None)
            for i in chosen
        ]
    return GridSearchResult(
        candidates=rank_candidates(candidates),
        levels=levels,
        evaluations=evaluations,
        seconds=time.perf_counter() - start,
    )


def _dates_can_finish(case, spec, grown, k, remaining_min) -> NDArray[np.bool_]:
    """Rows whose dates can still reach the target within the arrival window and duration."""
    soonest = grown[:, -1] + (remaining_min[k + 1] if k + 1 < len(spec.legs) else 0.0)
    ok = soonest <= case.arrival_end_jd_tdb
    if spec.duration_max_days is not None:
        ok &= soonest - grown[:, 0] <= spec.duration_max_days
    return ok


def _solve_leg(model: SequenceModel, k: int, grown, keep, previous_arrival, parent):
    """Leg ``k``'s arcs for every row; prune by the flyby before it and the leg's limits.

    Returns the arriving velocities (rows, S, 3), the arrival body's velocity (rows, 3), the
    rows kept, and how many were dropped at the flyby.
    """
    spec, case = model.spec, model.case
    leg = spec.legs[k]
    a = grown.shape[1] - 2
    n = len(grown)
    compiled = model.compiled()
    from_body, to_body = model.bodies[k], model.bodies[k + 1]
    if compiled is not None:
        r1, v1b = compiled.states(np.full(n, compiled.index(from_body.name)), grown[:, a])
        r2, v2b = compiled.states(np.full(n, compiled.index(to_body.name)), grown[:, a + 1])
    else:
        from solver.ephemeris.states import states

        r1, v1b = states(
            from_body.name,
            grown[:, a],
            central=case.central_body,
            source=case.ephemeris_source,
            registry=case.registry(),
            out_of_range="nan",
        )
        r2, v2b = states(
            to_body.name,
            grown[:, a + 1],
            central=case.central_body,
            source=case.ephemeris_source,
            registry=case.registry(),
            out_of_range="nan",
        )
    from solver.mechanics.lambert import solve_lambert
    from solver.time_units import SECONDS_PER_DAY

    sol = solve_lambert(
        r1,
        r2,
        (grown[:, a + 1] - grown[:, a]) * SECONDS_PER_DAY,
        model.mu,
        max_revs=leg.max_revolutions,
        retrograde=case.retrograde,
        pole=model.pole,
        angle_tol_rad=model._angle_tol(k),
    )
    ok_slot = sol.reason == 0
    metrics = arc_metrics(
        case,
        model.leg_bodies[k],
        r1[:, None, :],
        sol.v1_km_s,
        sol.v2_km_s,
        v1b[:, None, :],
        v2b[:, None, :],
    )
    ok_slot &= surface_violation(metrics["periapsis_km"], model.case_bodies.central.radius_km) == 0
    if k == 0:
        for rule in rules_for("departure"):
            limit = limit_value(rule, case, spec)
            if limit is not None and rule.quantity in metrics:
                ok_slot &= rule.violation(metrics[rule.quantity], limit) == 0
    keep = keep & ok_slot.any(axis=1)
    pruned_flyby = 0
    event = spec.events[k]
    if k > 0 and event.kind == "flyby" and previous_arrival is not None:
        v2_prev, vb_prev = previous_arrival
        v_in = v2_prev[parent] - vb_prev[parent][:, None, :]
        v_out = sol.v1_km_s - v1b[:, None, :]
        feasible = _joinable(model, k, v_in, v_out) & ok_slot[:, None, :]
        joinable = feasible.any(axis=(1, 2))
        pruned_flyby = int(np.count_nonzero(keep & ~joinable))
        keep = keep & joinable
    return sol.v2_km_s, v2b, keep, pruned_flyby


def _joinable(model: SequenceModel, k: int, v_in: NDArray, v_out: NDArray) -> NDArray[np.bool_]:
    """Whether a flyby at the start of leg ``k`` can join each pair of arriving v∞ (rows, S_in,
    3) and leaving v∞ (rows, S_out, 3): the turn within reach of the lowest periapsis, and the
    speed change within the largest allowed burn (which the lowest periapsis makes least)."""
    spec, case = model.spec, model.case
    speed_in = np.linalg.norm(v_in, axis=-1)[:, :, None]
    speed_out = np.linalg.norm(v_out, axis=-1)[:, None, :]
    cos_turn = np.einsum("nia,nja->nij", v_in, v_out) / (speed_in * speed_out)
    with np.errstate(invalid="ignore"):
        turn = np.degrees(np.arccos(np.clip(cos_turn, -1.0, 1.0)))
    body = model.bodies[k]
    prev_leg = spec.legs[k - 1]
    rp_min = body.radius_km + (prev_leg.altitude_min_km or 0.0)
    feasible = turn <= largest_turn_deg(speed_in, speed_out, body.gm_km3_s2, rp_min)
    limits = [
        limit_value(rule, case, spec, prev_leg)
        for rule in rules_for("flyby")
        if rule.quantity in ("dv_km_s", "vinf_mismatch_km_s")
    ]
    dv_allowed = [x for x in limits if x is not None]
    if dv_allowed:
        feasible &= smallest_dv_km_s(speed_in, speed_out, body.gm_km3_s2, rp_min) <= min(dv_allowed)
    return np.asarray(feasible, dtype=bool)


def _states(model: SequenceModel, body, jd: NDArray) -> tuple[NDArray, NDArray]:
    """States of ``body`` at ``jd`` (compiled tables where there are some)."""
    compiled = model.compiled()
    if compiled is not None:
        return compiled.states(np.full(len(jd), compiled.index(body.name)), jd)
    from solver.ephemeris.states import states

    case = model.case
    return states(
        body.name,
        jd,
        central=case.central_body,
        source=case.ephemeris_source,
        registry=case.registry(),
        out_of_range="nan",
    )


def _resonant_leg(model: SequenceModel, k: int, grown, grown_angles, parent, previous_arrival,
                  settings: GridSettings):  # fmt: skip
    """Extensions by resonant leg ``k``: rows times angles (see the module docstring).

    Returns the rows, their angles, the leg's level, the spacecraft's velocity
    arriving (rows, 1, 3), the body's velocity then (rows, 3), and the rows kept.
    """
    spec, case = model.spec, model.case
    leg = spec.legs[k]
    assert leg.resonance is not None
    column = spec.resonant_legs.index(k)
    a = grown.shape[1] - 2
    body = model.bodies[k]
    r_a, v_a = _states(model, body, grown[:, a])
    r_b, v_b = _states(model, body, grown[:, a + 1])
    tof = grown[:, a + 1] - grown[:, a]
    speed = resonant_speed_km_s(r_a, tof, leg.resonance[1], model.mu)
    clocks = np.arange(-180.0, 180.0 - 1e-9, settings.clock_step_deg)
    after_flyby = k > 0 and spec.events[k].kind == "flyby" and previous_arrival is not None
    if after_flyby:
        # One pitch per arriving arc slot: the one that keeps |v∞|.
        v2_prev, vb_prev = previous_arrival
        v_in = v2_prev[parent] - vb_prev[parent][:, None, :]  # (rows, S_in, 3)
        pitch = pitch_for_vinf_deg(
            speed[:, None], np.linalg.norm(v_a, axis=-1)[:, None], np.linalg.norm(v_in, axis=-1)
        )
    else:
        v_in = None
        pitches = np.arange(0.0, 90.0 + 1e-9, settings.pitch_step_deg)
        pitch = np.broadcast_to(pitches, (len(grown), len(pitches)))
    n_rows, n_pitch = pitch.shape
    # Rows x pitches x clocks, flattened in that order (grid order: repeatable).
    row = np.repeat(np.arange(n_rows), n_pitch * len(clocks))
    pitch_index = np.tile(np.repeat(np.arange(n_pitch), len(clocks)), n_rows)
    clock = np.tile(clocks, n_rows * n_pitch)
    pitch_flat = pitch[row, pitch_index]
    level = GridLevel(leg=k + 1, extensions=len(row))  # unusable pitches count as pruned
    lo, hi = PITCH_BOUNDS_DEG
    usable = np.isfinite(pitch_flat) & (pitch_flat >= lo) & (pitch_flat <= hi)
    row, pitch_index, clock, pitch_flat = (
        row[usable], pitch_index[usable], clock[usable], pitch_flat[usable]
    )  # fmt: skip
    v, ok = resonant_velocity(
        r_a[row], v_a[row], tof[row], leg.resonance[1], model.mu, pitch_flat, clock
    )
    keep = ok.copy()
    miss = miss_distance_km(r_a[row], r_b[row])
    for rule in rules_for("resonance"):
        limit = limit_value(rule, case, spec)
        if limit is not None:
            keep &= rule.violation(miss, limit) == 0
    metrics = arc_metrics(case, model.leg_bodies[k], r_a[row], v, v, v_a[row], v_b[row])
    keep &= surface_violation(metrics["periapsis_km"], model.case_bodies.central.radius_km) == 0
    if k == 0:
        for rule in rules_for("departure"):
            limit = limit_value(rule, case, spec)
            if limit is not None and rule.quantity in metrics:
                keep &= rule.violation(metrics[rule.quantity], limit) == 0
    if after_flyby:
        assert v_in is not None
        v_out = (v - v_a[row])[:, None, :]
        arriving = v_in[row, pitch_index][:, None, :]  # the slot whose |v∞| set the pitch
        joined = _joinable(model, k, arriving, v_out)[:, 0, 0]
        level.pruned_flyby = int(np.count_nonzero(keep & ~joined))
        keep &= joined
    angles = grown_angles[row].copy()
    angles[:, column, 0] = pitch_flat
    angles[:, column, 1] = clock
    return (
        grown[row],
        angles,
        level,
        v[:, None, :],
        v_b[row],
        keep,
    )


def grid_search_case(
    sequence_case: SequenceCase,
    settings: GridSettings = GridSettings(),
    *,
    names: list[str] | None = None,
    progress: Progress | None = None,
) -> GridSearchResult:
    """Grid-search every sequence of a case (or those named) and rank them together."""
    sequences = (
        [sequence_case.sequence(name) for name in names] if names else sequence_case.sequences
    )
    start = time.perf_counter()
    merged = GridSearchResult(candidates=[])
    for spec in sequences:
        result = grid_search(sequence_case, spec, settings, progress=progress)
        merged.candidates.extend(result.candidates)
        merged.levels.extend(result.levels)
        merged.evaluations += result.evaluations
    merged.candidates = rank_candidates(merged.candidates)[: settings.top]
    merged.seconds = time.perf_counter() - start
    return merged


__all__ = [
    "GridLevel",
    "GridSearchResult",
    "GridSettings",
    "grid_search",
    "grid_search_case",
]
