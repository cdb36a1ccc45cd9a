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
from solver.sequence.result import Candidate, evaluate_candidate
from solver.sequence.search import Progress, distinct_best, rank_candidates
from solver.sequence.spec import SequenceCase, SequenceSpec
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
    """

    top: int = 5
    beam: int = 20_000
    distinct_days: float = 5.0
    departure_step_days: float | None = None

    def __post_init__(self) -> None:
        if isinstance(self.top, bool) or not isinstance(self.top, int) or not 1 <= self.top:
            raise InputError("--top", self.top, "an integer >= 1")
        if isinstance(self.beam, bool) or not isinstance(self.beam, int) or self.beam < 1:
            raise InputError("--beam", self.beam, "an integer >= 1")
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
    for k in spec.resonant_legs:
        raise InputError(
            f"sequence.legs[{k + 1}].resonance",
            spec.name,
            "a sequence without resonant legs for the grid search (use the global search)",
        )
    model = SequenceModel(case, spec)
    step = settings.departure_step_days or case.departure_step_days
    epochs = _steps(case.departure_start_jd_tdb, case.departure_end_jd_tdb, step)[:, None]
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
        level = GridLevel(leg=k + 1, extensions=len(grown))
        evaluations += len(grown)
        keep = _dates_can_finish(case, spec, grown, k, remaining_min)
        arrival_v, body_v_end, keep, pruned_flyby = _solve_leg(
            model, k, grown, keep, previous_arrival, parent
        )
        level.pruned_flyby = pruned_flyby
        level.pruned_limits = int(len(grown) - np.count_nonzero(keep) - pruned_flyby)
        grown, parent_arrival = grown[keep], (arrival_v[keep], body_v_end[keep])
        if leg.kind == "stop":
            assert leg.stay_min_days is not None and leg.stay_max_days is not None
            assert leg.stay_step_days is not None
            stays = _steps(leg.stay_min_days, leg.stay_max_days, leg.stay_step_days)
            rows = np.repeat(np.arange(len(grown)), len(stays))
            grown = np.concatenate(
                [grown[rows], (grown[rows, -1] + np.tile(stays, len(grown)))[:, None]], axis=1
            )
            parent_arrival = (parent_arrival[0][rows], parent_arrival[1][rows])
        if len(grown) > settings.beam and k < len(spec.legs) - 1:
            cut = _truncated(case, spec, k)
            score = cut.score(cut.spec.variables(grown[:, : cut.spec.n_epochs]))
            evaluations += len(grown)
            order = np.lexsort((np.arange(len(score)), score))[: settings.beam]
            order.sort()
            level.trimmed = len(grown) - len(order)
            grown = grown[order]
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
        previous_arrival = parent_arrival
        if len(epochs) == 0:
            break

    candidates: list[Candidate] = []
    if len(epochs):
        variables = spec.variables(epochs)
        score = model.score(variables)
        evaluations += len(score)
        chosen = distinct_best(spec, variables, score, settings.top, settings.distinct_days)
        candidates = [evaluate_candidate(model, epochs[i]) for i in chosen]
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
            feasible &= smallest_dv_km_s(speed_in, speed_out, body.gm_km3_s2, rp_min) <= min(
                dv_allowed
            )
        feasible &= ok_slot[:, None, :]
        joinable = feasible.any(axis=(1, 2))
        pruned_flyby = int(np.count_nonzero(keep & ~joinable))
        keep = keep & joinable
    return sol.v2_km_s, v2b, keep, pruned_flyby


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
