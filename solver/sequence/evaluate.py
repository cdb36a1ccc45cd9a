"""Evaluating sequences: every leg's arcs, every encounter's costs, limits, the best slot path.

Two stages, shared by every caller:

1. **Arcs** (:meth:`SequenceModel.arcs`): the bodies' states at every encounter date and one
   Lambert solve per leg (all revolutions up to the leg's maximum, both branches) for a whole
   batch of candidates. The exact path reads states exactly as the window engine does
   (:func:`solver.window.case_bodies.body_states`) and calls
   :func:`solver.mechanics.lambert.solve_lambert` with the window engine's arguments, so a
   one-leg sequence is the window engine's arc bit for bit. The fast path (searches) reads the
   states from :mod:`solver.ephemeris.compiled` and stacks every leg into one Lambert call.
2. **Costs** (:meth:`SequenceModel.costs`): departure and final-arrival metrics from
   :func:`solver.window.metrics.arc_metrics` (the window engine's conventions, worded in the
   provenance), each flyby by :mod:`solver.sequence.flyby`, each stop's burns by
   :func:`solver.window.metrics.arrival_dv_km_s`, every limit from
   :mod:`solver.sequence.limits`. A candidate's legs each offer several arcs (slots); the best
   combination (within limits first, then the objective) is found by dynamic programming over
   the chain of legs, since every cost depends on one leg's slot or on two neighbours'.

A search scores through :meth:`SequenceModel.score`, which runs both stages as one compiled,
parallel pass (:mod:`solver.sequence.fused`, the same formulas per candidate, no population-sized
temporaries) wherever the ephemeris has compiled tables; ``staged_score`` keeps the two stages
(the reference the pass is tested against, and the path for the mean-element ephemeris).

Legs that return to the body they left are solved with the sequence's resonance angle as the
Lambert angle tolerance: when the two positions lie on one line through the central body the
plane is undefined and the leg gets :attr:`~solver.reasons.Reason.RESONANT_RETURN`, never an arc.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any

import numpy as np
from numpy.typing import NDArray

from solver.ephemeris.bodies import Body
from solver.ephemeris.compiled import CompiledStates, compile_states
from solver.ephemeris.states import states
from solver.ephemeris.timescales import elapsed_days
from solver.mechanics.lambert import DEFAULT_ANGLE_TOL_RAD, slot_layout, solve_lambert
from solver.reasons import Reason
from solver.sequence.flyby import largest_turn_deg, solve_flybys
from solver.sequence.fused import FusedPlan, UnsupportedRule, fused_plan, score_fused
from solver.sequence.kernels import solve_batch
from solver.sequence.limits import limit_value, rules_for, surface_violation
from solver.sequence.penalty import MISSING, OBJECTIVE_SCALE, PENALTY_WEIGHT, TURN_SCALE_DEG
from solver.sequence.resonance import miss_distance_km, resonant_velocity
from solver.sequence.spec import Event, SequenceSpec
from solver.time_units import SECONDS_PER_DAY
from solver.window.case import Case
from solver.window.case_bodies import CaseBodies, body_states
from solver.window.metrics import arc_conic, arc_metrics, arrival_dv_km_s


@dataclass
class LegArcs:
    """Every arc of one leg for a batch of N candidates (S slots).

    ``r1_km``, ``r2_km`` (N, 3) the leg's ends; ``v1_km_s``, ``v2_km_s`` (N, S, 3); ``reason``
    (N, S); ``tof_days`` (N,); ``revolutions``, ``branch`` (S,).

    ``rows`` (N,), when set, says that candidates share arcs: the arrays then hold M rows (the
    distinct arcs) and candidate ``n``'s arcs are row ``rows[n]`` (a leg map's neighbouring legs
    change with one date only, so 300 arcs serve 90,000 candidates). Candidates sharing a row
    share the leg's two dates and the bodies' states at them.
    """

    r1_km: NDArray[np.float64]
    r2_km: NDArray[np.float64]
    v1_km_s: NDArray[np.float64]
    v2_km_s: NDArray[np.float64]
    reason: NDArray[np.int8]
    tof_days: NDArray[np.float64]
    revolutions: NDArray[np.int64]
    branch: NDArray[np.int8]
    miss_km: NDArray[np.float64] | None = None
    angles_deg: NDArray[np.float64] | None = None
    rows: NDArray[np.int64] | None = None

    @property
    def ok(self) -> NDArray[np.bool_]:
        return self.reason == Reason.OK

    @property
    def resonant(self) -> bool:
        """Flown as a resonant return (one slot; ``miss_km`` and ``angles_deg`` set)."""
        return self.miss_km is not None


@dataclass
class BatchArcs:
    """Stage 1 for N candidates: dates (N, E), the encounter bodies' states (N, E, 3), legs."""

    epochs: NDArray[np.float64]
    body_r_km: NDArray[np.float64]
    body_v_km_s: NDArray[np.float64]
    legs: list[LegArcs]


@dataclass
class BatchCosts:
    """Stage 2 for N candidates, on each one's best slot path.

    ``score`` (N,) what a search minimizes (objective plus weighted breaches; :data:`MISSING`
    when a leg has no arc); ``objective`` and ``penalty`` its two parts; ``slots`` (N, L) the
    chosen arc slot of each leg (-1 when none); ``reason`` (N,) OK or why a leg has no arc;
    ``within`` (N,) no limit broken. With ``detail``: ``values``, the per-leg and per-encounter
    quantities by slot (``values["legs"][k]`` of leg ``k``, ``values["event<i>"]`` of
    encounter ``i``). Where arcs are shared (:attr:`LegArcs.rows`), a leg's or an encounter's
    values are per shared row: ``values["leg_rows"][k]`` and ``values["event<i>"]["rows"]`` map
    candidates to them (None: one row per candidate).
    """

    score: NDArray[np.float64]
    objective: NDArray[np.float64]
    penalty: NDArray[np.float64]
    slots: NDArray[np.int64]
    reason: NDArray[np.int8]
    within: NDArray[np.bool_]
    values: dict[str, Any] = field(default_factory=dict)


class SequenceModel:
    """One sequence of one case, ready to evaluate batches of candidates.

    Parameters
    ----------
    case : Case
        The case (bodies, orbits, limits, ephemeris).
    spec : SequenceSpec
        The sequence.
    """

    def __init__(self, case: Case, spec: SequenceSpec) -> None:
        self.case = case
        self.spec = spec
        self.case_bodies = CaseBodies.of(case)
        registry = case.registry()
        self.bodies: list[Body] = [registry.get(name) for name in spec.bodies]
        central = self.case_bodies.central
        self.mu = self.case_bodies.mu_central_km3_s2
        self.pole = self.case_bodies.pole_icrf
        self.leg_bodies = [
            CaseBodies(central, self.bodies[k], self.bodies[k + 1], self.mu, self.pole)
            for k in range(len(spec.legs))
        ]
        # The body met at each date of the epoch vector.
        self.epoch_body: list[Body] = [self.bodies[0]] * spec.n_epochs
        for event in spec.events:
            body = self.bodies[event.index]
            self.epoch_body[event.epoch_in] = body
            self.epoch_body[event.epoch_out] = body
        self._compiled: CompiledStates | bool | None = False
        self._fused: FusedPlan | bool | None = False
        self.objective_scale = OBJECTIVE_SCALE[spec.objective]

    # -----------------------------------------------------------------------------------------
    # Stage 1

    def compiled(self) -> CompiledStates | None:
        """The compiled states for this sequence's reach (None where there is no compiled form)."""
        if self._compiled is False:
            case = self.case
            reach = case.departure_end_jd_tdb
            for leg in self.spec.legs:
                reach += leg.tof_max_days + (leg.stay_max_days or 0.0)
            self._compiled = compile_states(
                [b.name for b in self.bodies],
                case.central_body,
                case.registry(),
                case.departure_start_jd_tdb - 1.0,
                reach + 1.0,
                source=case.ephemeris_source,
            )
        return self._compiled  # type: ignore[return-value]

    def body_states(self, epochs: NDArray[np.float64], *, fast: bool) -> tuple[NDArray, NDArray]:
        """States (N, E, 3) of the body met at each date. Exact: the window engine's reads
        (dates outside the ephemeris raise, naming the date); fast: compiled (NaN outside)."""
        n, n_epochs = epochs.shape
        compiled = self.compiled() if fast else None
        if compiled is not None:
            index = np.array([compiled.index(b.name) for b in self.epoch_body], dtype=np.int64)
            return compiled.states(np.broadcast_to(index, epochs.shape), epochs)
        r = np.empty((n, n_epochs, 3))
        v = np.empty((n, n_epochs, 3))
        groups: dict[str, list[int]] = {}
        for column, body in enumerate(self.epoch_body):
            groups.setdefault(body.name, []).append(column)
        for name, columns in groups.items():
            body = self.epoch_body[columns[0]]
            if fast:
                rr, vv = states(
                    name,
                    epochs[:, columns],
                    central=self.case.central_body,
                    source=self.case.ephemeris_source,
                    registry=self.case.registry(),
                    out_of_range="nan",
                )
            else:
                rr, vv = body_states(
                    self.case, self.case_bodies, body, epochs[:, columns], f"{name} date"
                )
            r[:, columns] = rr
            v[:, columns] = vv
        return r, v

    def arcs(
        self,
        epochs: NDArray[np.float64],
        angles: NDArray[np.float64] | None = None,
        *,
        fast: bool = False,
    ) -> BatchArcs:
        """Stage 1 for epochs of shape (N, E) (JD TDB, in the order of the spec's events) and,
        for a sequence with resonant legs, their (pitch, clock) angles, shape (N, R, 2), deg."""
        epochs = np.ascontiguousarray(np.atleast_2d(np.asarray(epochs, dtype=float)))
        if epochs.shape[-1] != self.spec.n_epochs:
            raise ValueError(f"epochs of shape (N, {self.spec.n_epochs}) expected")
        resonant = self.spec.resonant_legs
        if resonant:
            if angles is None:
                raise ValueError("a sequence with resonant legs needs their angles")
            angles = np.asarray(angles, dtype=float).reshape(len(epochs), len(resonant), 2)
        compiled = self.compiled() if fast else None
        if compiled is not None:
            batch = self._arcs_compiled(compiled, epochs)
        else:
            batch = self._arcs_numpy(epochs, fast)
        for j, k in enumerate(resonant):
            assert angles is not None
            batch.legs[k] = self._resonant_leg(k, batch, angles[:, j])
        if not fast:
            # As the window engine reports it: the elapsed time a clock on the ground counts
            # (TT), while the arcs fly the TDB interval; they differ by ms (solver.ephemeris.
            # timescales.elapsed_days). The search works with the TDB interval.
            for k, leg_arcs in enumerate(batch.legs):
                a, b = self.spec.leg_epochs(k)
                leg_arcs.tof_days = np.asarray(
                    elapsed_days(epochs[:, a], epochs[:, b]), dtype=float
                ).reshape(-1)
        return batch

    def _resonant_leg(self, k: int, batch: BatchArcs, angles: NDArray[np.float64]) -> LegArcs:
        leg = self.spec.legs[k]
        assert leg.resonance is not None
        a, b = self.spec.leg_epochs(k)
        epochs = batch.epochs
        tof_days = epochs[:, b] - epochs[:, a]
        r1 = batch.body_r_km[:, a]
        v, ok = resonant_velocity(
            r1,
            batch.body_v_km_s[:, a],
            tof_days,
            leg.resonance[1],
            self.mu,
            angles[:, 0],
            angles[:, 1],
        )
        reason = np.where(ok, np.int8(Reason.OK), np.int8(Reason.NO_RESONANT_ORBIT))
        reason = np.where(tof_days > 0, reason, np.int8(Reason.ARRIVAL_NOT_AFTER_DEPARTURE))
        v = np.where(reason[:, None] == Reason.OK, v, np.nan)
        return LegArcs(
            r1_km=r1,
            r2_km=r1,  # the spacecraft is back where it left; the body is `miss_km` away
            v1_km_s=v[:, None, :],
            v2_km_s=v[:, None, :].copy(),
            reason=reason.astype(np.int8)[:, None],
            tof_days=tof_days,
            revolutions=np.array([leg.resonance[1]], dtype=np.int64),
            branch=np.zeros(1, dtype=np.int8),
            miss_km=miss_distance_km(r1, batch.body_r_km[:, b]),
            angles_deg=np.asarray(angles, dtype=float),
        )

    def _arcs_numpy(self, epochs: NDArray[np.float64], fast: bool) -> BatchArcs:
        r, v = self.body_states(epochs, fast=fast)
        legs: list[LegArcs | None] = [None] * len(self.spec.legs)
        if fast:
            # One Lambert call for every leg that shares its settings (usually all of them).
            groups: dict[tuple[int, float], list[int]] = {}
            for k, leg in enumerate(self.spec.legs):
                if leg.resonance is not None:
                    a, b = self.spec.leg_epochs(k)
                    legs[k] = self._placeholder(k, r, epochs[:, b] - epochs[:, a])
                    continue
                groups.setdefault((leg.max_revolutions, self._angle_tol(k)), []).append(k)
            for (revs, tol), ks in groups.items():
                ends = [self.spec.leg_epochs(k) for k in ks]
                r1 = np.concatenate([r[:, a] for a, _ in ends])
                r2 = np.concatenate([r[:, b] for _, b in ends])
                tof = np.concatenate([epochs[:, b] - epochs[:, a] for a, b in ends])
                sol = solve_lambert(
                    r1,
                    r2,
                    tof * SECONDS_PER_DAY,
                    self.mu,
                    max_revs=revs,
                    retrograde=self.case.retrograde,
                    pole=self.pole,
                    angle_tol_rad=tol,
                )
                n = epochs.shape[0]
                for j, k in enumerate(ks):
                    part = slice(j * n, (j + 1) * n)
                    legs[k] = self._leg(
                        k,
                        r1[part],
                        r2[part],
                        tof[part],
                        sol.v1_km_s[part],
                        sol.v2_km_s[part],
                        sol.reason[part],
                        sol.revolutions,
                        sol.branch,
                    )
        else:
            for k, leg in enumerate(self.spec.legs):
                a, b = self.spec.leg_epochs(k)
                tof_days = epochs[:, b] - epochs[:, a]
                if leg.resonance is not None:
                    legs[k] = self._placeholder(k, r, tof_days)
                    continue
                sol = solve_lambert(
                    r[:, a],
                    r[:, b],
                    tof_days * SECONDS_PER_DAY,
                    self.mu,
                    max_revs=leg.max_revolutions,
                    retrograde=self.case.retrograde,
                    pole=self.pole,
                    angle_tol_rad=self._angle_tol(k),
                )
                legs[k] = self._leg(
                    k,
                    r[:, a],
                    r[:, b],
                    tof_days,
                    sol.v1_km_s,
                    sol.v2_km_s,
                    sol.reason,
                    sol.revolutions,
                    sol.branch,
                )
        return BatchArcs(epochs, r, v, [leg for leg in legs if leg is not None])

    def _arcs_compiled(self, compiled: CompiledStates, epochs: NDArray[np.float64]) -> BatchArcs:
        spec = self.spec
        ends = [spec.leg_epochs(k) for k in range(len(spec.legs))]
        pole = self.pole / np.linalg.norm(self.pole)
        body_r, body_v, v1, v2, reason = solve_batch(
            compiled,
            epochs,
            np.array([compiled.index(b.name) for b in self.epoch_body], dtype=np.int64),
            np.array([a for a, _ in ends], dtype=np.int64),
            np.array([b for _, b in ends], dtype=np.int64),
            np.array(
                [0 if leg.resonance else leg.max_revolutions for leg in spec.legs], dtype=np.int64
            ),
            np.array([self._angle_tol(k) for k in range(len(spec.legs))]),
            self.mu,
            pole,
            self.case.retrograde,
        )
        legs = []
        for k, leg in enumerate(spec.legs):
            a, b = ends[k]
            revs = 0 if leg.resonance else leg.max_revolutions
            slots = 2 * revs + 1
            revolutions, branch = slot_layout(revs)
            legs.append(
                self._leg(
                    k,
                    body_r[:, a],
                    body_r[:, b],
                    epochs[:, b] - epochs[:, a],
                    v1[:, k, :slots],
                    v2[:, k, :slots],
                    reason[:, k, :slots],
                    revolutions,
                    branch,
                )
            )
        return BatchArcs(epochs, body_r, body_v, legs)

    def _placeholder(self, k: int, r: NDArray, tof_days: NDArray) -> LegArcs:
        """A resonant leg before its angles are applied (replaced by :meth:`_resonant_leg`)."""
        a, b = self.spec.leg_epochs(k)
        n = len(tof_days)
        return LegArcs(
            r[:, a],
            r[:, b],
            np.full((n, 1, 3), np.nan),
            np.full((n, 1, 3), np.nan),
            np.full((n, 1), np.int8(Reason.NOT_REQUESTED)),
            tof_days,
            np.zeros(1, dtype=np.int64),
            np.zeros(1, dtype=np.int8),
        )

    def _angle_tol(self, k: int) -> float:
        if self.spec.legs[k].returns:
            return math.radians(self.spec.resonance_angle_deg)
        return DEFAULT_ANGLE_TOL_RAD

    def _leg(self, k, r1, r2, tof_days, v1, v2, reason, revolutions, branch) -> LegArcs:
        reason = np.where(
            (tof_days <= 0)[:, None] & (reason == Reason.NONPOSITIVE_TOF),
            np.int8(Reason.ARRIVAL_NOT_AFTER_DEPARTURE),
            reason,
        ).astype(np.int8)
        if self.spec.legs[k].returns:
            reason = np.where(
                reason == Reason.PLANE_UNDEFINED, np.int8(Reason.RESONANT_RETURN), reason
            ).astype(np.int8)
        return LegArcs(r1, r2, v1, v2, reason, tof_days, revolutions, branch)

    # -----------------------------------------------------------------------------------------
    # Stage 2

    def costs(
        self,
        arcs: BatchArcs,
        *,
        detail: bool = False,
        pinned: list[int | None] | None = None,
        every_leg: bool = True,
    ) -> BatchCosts:
        """Stage 2: the best slot path of every candidate, its score and whether it is within
        limits (and with ``detail`` every quantity on that path). ``pinned`` fixes the slot of
        some legs (None leaves a leg free). ``every_leg=False`` keeps the window engine's
        metrics of the first and last legs only in the detail (the others' conic alone, which
        is all the costs need: a leg map, whose middle legs are solved per cell)."""
        spec, case = self.spec, self.case
        epochs = arcs.epochs
        n = epochs.shape[0]
        n_legs = len(spec.legs)
        w = PENALTY_WEIGHT * self.objective_scale
        objective = spec.objective

        # Per-leg metrics (on each leg's own rows where arcs are shared): the window engine's
        # for the first and last legs (every leg with detail), the arc's conic for the surface
        # rule otherwise.
        leg_metrics: list[dict[str, NDArray]] = []
        for k, leg_arcs in enumerate(arcs.legs):
            a, b = spec.leg_epochs(k)
            if (detail and every_leg) or k == 0 or k == n_legs - 1:
                metrics = arc_metrics(
                    case,
                    self.leg_bodies[k],
                    leg_arcs.r1_km[:, None, :],
                    leg_arcs.v1_km_s,
                    leg_arcs.v2_km_s,
                    _body_v(arcs, leg_arcs, a)[:, None, :],
                    _body_v(arcs, leg_arcs, b)[:, None, :],
                )
            else:
                metrics = arc_conic(leg_arcs.r1_km[:, None, :], leg_arcs.v1_km_s, self.mu)
            leg_metrics.append(metrics)

        # Unary costs per leg slot (N_k, S_k), on each leg's own rows: objective and breaches.
        unary_obj = [np.zeros(leg.reason.shape) for leg in arcs.legs]
        unary_pen = [
            surface_violation(leg_metrics[k]["periapsis_km"], self.case_bodies.central.radius_km)
            for k in range(n_legs)
        ]
        const_obj = np.zeros(n)
        const_pen = np.zeros(n)
        values: dict[str, Any] = {}

        first, last = leg_metrics[0], leg_metrics[-1]
        for rule in rules_for("departure"):
            limit = limit_value(rule, case, spec)
            if limit is None:
                continue
            if rule.quantity == "departure_jd_tdb":
                const_pen += rule.violation(epochs[:, 0], limit)
            else:
                unary_pen[0] = unary_pen[0] + rule.violation(first[rule.quantity], limit)
        for rule in rules_for("arrival"):
            limit = limit_value(rule, case, spec)
            if limit is None:
                continue
            if rule.quantity == "arrival_jd_tdb":
                const_pen += rule.violation(epochs[:, -1], limit)
            else:
                unary_pen[-1] = unary_pen[-1] + rule.violation(last[rule.quantity], limit)
        for k, leg in enumerate(spec.legs):
            for rule in rules_for("leg"):
                limit = limit_value(rule, case, spec, leg)
                if limit is not None:
                    const_pen += _each(arcs.legs[k], rule.violation(arcs.legs[k].tof_days, limit))
        for leg_arcs in arcs.legs:
            if leg_arcs.miss_km is not None:
                for rule in rules_for("resonance"):
                    limit = limit_value(rule, case, spec)
                    if limit is not None:
                        const_pen += _each(leg_arcs, rule.violation(leg_arcs.miss_km, limit))
        duration = epochs[:, -1] - epochs[:, 0]
        for rule in rules_for("sequence"):
            limit = limit_value(rule, case, spec)
            if limit is not None:
                const_pen += rule.violation(duration, limit)

        if objective == "dv_total_km_s":
            unary_obj[0] = unary_obj[0] + first["dv_departure_km_s"]
            unary_obj[-1] = unary_obj[-1] + last["dv_arrival_km_s"]
        elif objective == "c3_km2_s2":
            unary_obj[0] = unary_obj[0] + first["c3_km2_s2"]
        elif objective == "vinf_arrival_km_s":
            unary_obj[-1] = unary_obj[-1] + last["vinf_arrival_km_s"]
        else:
            const_obj += duration

        # Pair costs at each intermediate encounter (N, S_in, S_out).
        pair_obj: list[NDArray] = []
        pair_pen: list[NDArray] = []
        for event in spec.events[1:-1]:
            po, pp, event_values, rows_shared = self._encounter(
                event, arcs, objective == "dv_total_km_s"
            )
            pair_obj.append(po if rows_shared is None else po[rows_shared])
            pair_pen.append(pp if rows_shared is None else pp[rows_shared])
            if detail:
                event_values["rows"] = rows_shared
                values[f"event{event.index}"] = event_values
            if event.kind == "stop":
                leg = spec.legs[event.leg_in]
                stay = epochs[:, event.epoch_out] - epochs[:, event.epoch_in]
                for rule in rules_for("stop"):
                    limit = limit_value(rule, case, spec, leg)
                    if limit is not None:
                        const_pen += rule.violation(stay, limit)

        # Slots with no arc cost MISSING; then the chain's best path (per candidate).
        unary = []
        for k in range(n_legs):
            total = unary_obj[k] + w * unary_pen[k]
            allowed = _each(arcs.legs[k], arcs.legs[k].ok & np.isfinite(total))
            total = _each(arcs.legs[k], total)
            unary_obj[k] = _each(arcs.legs[k], unary_obj[k])
            unary_pen[k] = _each(arcs.legs[k], unary_pen[k])
            if pinned is not None and pinned[k] is not None:
                allowed = allowed & (np.arange(allowed.shape[1]) == pinned[k])
            unary.append(np.where(allowed, total, math.inf))
        pairs = [
            np.where(np.isfinite(o + w * p), o + w * p, math.inf)
            for o, p in zip(pair_obj, pair_pen, strict=True)
        ]
        slots, best = _best_path(unary, pairs)

        objective_value = const_obj.copy()
        penalty = const_pen.copy()
        rows = np.arange(n)
        for k in range(n_legs):
            s = np.maximum(slots[:, k], 0)
            objective_value += unary_obj[k][rows, s]
            penalty += unary_pen[k][rows, s]
        for j, (po, pp) in enumerate(zip(pair_obj, pair_pen, strict=True)):
            s_in = np.maximum(slots[:, j], 0)
            s_out = np.maximum(slots[:, j + 1], 0)
            objective_value += po[rows, s_in, s_out]
            penalty += pp[rows, s_in, s_out]

        reason = np.full(n, np.int8(Reason.OK), dtype=np.int8)
        for leg_arcs in reversed(arcs.legs):
            no_arc = _each(leg_arcs, np.asarray(~leg_arcs.ok.any(axis=-1)))
            reason = np.where(no_arc, _each(leg_arcs, leg_arcs.reason[:, 0]), reason).astype(
                np.int8
            )
        finite = np.isfinite(best)
        score = np.where(finite, objective_value + w * penalty, MISSING)
        within = finite & (penalty == 0.0) & (reason == Reason.OK)
        if detail:
            values["legs"] = leg_metrics
            values["leg_rows"] = [leg_arcs.rows for leg_arcs in arcs.legs]
            values["duration_days"] = duration
        return BatchCosts(
            score=score,
            objective=np.where(finite, objective_value, math.nan),
            penalty=np.where(finite, penalty, math.nan),
            slots=np.where(finite[:, None], slots, -1),
            reason=reason,
            within=within,
            values=values,
        )

    def _encounter(self, event: Event, arcs: BatchArcs, count_dv: bool):
        """Objective and breach parts (M, S_in, S_out) of one flyby or stop, its values, and
        which of the M rows each candidate's are (None: M = N, one per candidate). An encounter
        whose two legs share their rows (or one of which is one row for all) is solved once per
        shared row."""
        spec, case = self.spec, self.case
        leg = spec.legs[event.leg_in]
        body = self.bodies[event.index]
        arriving = arcs.legs[event.leg_in]
        leaving = arcs.legs[event.leg_out]
        v_in = arriving.v2_km_s - _body_v(arcs, arriving, event.epoch_in)[:, None, :]
        v_out = leaving.v1_km_s - _body_v(arcs, leaving, event.epoch_out)[:, None, :]
        rows = _shared_rows(arriving, leaving)
        if rows is None:  # one row per candidate
            v_in = _each(arriving, v_in)
            v_out = _each(leaving, v_out)
        else:  # one of the two may be a single row for all
            m = max(len(v_in), len(v_out))
            v_in = np.broadcast_to(v_in, (m, *v_in.shape[1:]))
            v_out = np.broadcast_to(v_out, (m, *v_out.shape[1:]))
        shape = (v_in.shape[0], v_in.shape[1], v_out.shape[1])
        obj = np.zeros(shape)
        pen = np.zeros(shape)
        if event.kind == "flyby":
            fly = solve_flybys(v_in[:, :, None, :], v_out[:, None, :, :], body.gm_km3_s2)
            mismatch = np.abs(fly.vinf_out_km_s - fly.vinf_in_km_s)
            # A half-turn (no periapsis) has no burn; its altitude breach ranks it.
            dv = np.where(np.isfinite(fly.dv_km_s), fly.dv_km_s, mismatch)
            altitude = fly.periapsis_radius_km - body.radius_km
            if count_dv:
                obj = obj + dv
            quantities = {
                "periapsis_altitude_km": altitude,
                "dv_km_s": dv,
                "vinf_mismatch_km_s": mismatch,
            }
            for rule in rules_for("flyby"):
                limit = limit_value(rule, case, spec, leg)
                if limit is not None:
                    pen = pen + rule.violation(quantities[rule.quantity], limit)
            # The periapsis cannot fall below the centre, so the altitude shortfall stops
            # growing for turns no periapsis can make; the turn they lack keeps a search moving
            # out of them (in units of TURN_SCALE_DEG, only where the altitude rule is broken).
            lacking = fly.turn_angle_deg - largest_turn_deg(
                fly.vinf_in_km_s,
                fly.vinf_out_km_s,
                body.gm_km3_s2,
                body.radius_km + (leg.altitude_min_km or 0.0),
            )
            pen = pen + np.where(lacking > 0.0, lacking / TURN_SCALE_DEG, 0.0)
            values = {
                "flyby": fly,
                "periapsis_altitude_km": altitude,
                "dv_km_s": dv,
                "vinf_mismatch_km_s": mismatch,
            }
        else:
            vin2 = np.einsum("...i,...i->...", v_in, v_in)
            vout2 = np.einsum("...i,...i->...", v_out, v_out)
            mode = leg.mode or "rendezvous"
            dv_in = arrival_dv_km_s(
                vin2, body, mode, leg.periapsis_altitude_km, leg.apoapsis_altitude_km
            )
            dv_out = arrival_dv_km_s(
                vout2, body, mode, leg.periapsis_altitude_km, leg.apoapsis_altitude_km
            )
            if count_dv:
                obj = obj + dv_in[:, :, None] + dv_out[:, None, :]
            values = {
                "vinf_in_km_s": np.sqrt(vin2),
                "vinf_out_km_s": np.sqrt(vout2),
                "dv_in_km_s": dv_in,
                "dv_out_km_s": dv_out,
            }
        return obj, pen, values, rows

    # -----------------------------------------------------------------------------------------
    # Search entry point

    def fused(self) -> FusedPlan | None:
        """The sequence as the compiled pass reads it (None where it has no compiled form: the
        mean-element ephemeris, or a limit on a quantity the pass does not compute)."""
        if self._fused is False:
            try:
                self._fused = fused_plan(self)
            except UnsupportedRule:
                self._fused = None
        return self._fused  # type: ignore[return-value]

    def score(self, variables: NDArray[np.float64]) -> NDArray[np.float64]:
        """Scores of candidates given as search variables, shape (M, D) -> (M,) (fast path):
        one compiled pass (:mod:`solver.sequence.fused`), or the two stages where there is none."""
        x = np.atleast_2d(variables)
        plan = self.fused()
        if plan is not None:
            return score_fused(plan, x).score
        return self.staged_score(x)

    def staged_score(self, variables: NDArray[np.float64]) -> NDArray[np.float64]:
        """The same scores through the two stages (:meth:`arcs` on the fast path, :meth:`costs`)."""
        x = np.atleast_2d(variables)
        angles = self.spec.angles(x) if self.spec.resonant_legs else None
        return self.costs(self.arcs(self.spec.epochs(x), angles, fast=True)).score


def _each(leg_arcs: LegArcs, array: NDArray) -> NDArray:
    """A per-row array of a leg (first axis) for every candidate (see :attr:`LegArcs.rows`)."""
    return array if leg_arcs.rows is None else array[leg_arcs.rows]


def _body_v(arcs: BatchArcs, leg_arcs: LegArcs, column: int) -> NDArray[np.float64]:
    """The body's velocity (M, 3) at one of a leg's dates, on the leg's own rows: read at one
    candidate of each shared row (they share the date)."""
    if leg_arcs.rows is None:
        return arcs.body_v_km_s[:, column]
    some = np.zeros(len(leg_arcs.reason), dtype=np.int64)
    some[leg_arcs.rows] = np.arange(len(leg_arcs.rows))
    return arcs.body_v_km_s[some, column]


def _shared_rows(arriving: LegArcs, leaving: LegArcs) -> NDArray[np.int64] | None:
    """The rows two legs meeting at an encounter share (None when the encounter has to be
    solved per candidate): the same rows, or one leg's when the other is one row for all."""
    if arriving.rows is None or leaving.rows is None:
        return None
    if arriving.rows is leaving.rows:
        return arriving.rows
    if len(leaving.reason) == 1:
        return arriving.rows
    if len(arriving.reason) == 1:
        return leaving.rows
    return None


def _best_path(
    unary: list[NDArray[np.float64]], pairs: list[NDArray[np.float64]]
) -> tuple[NDArray[np.int64], NDArray[np.float64]]:
    """Cheapest slot per leg along a chain: unary costs (N, S_k), pair costs (N, S_k, S_k+1).

    Dynamic programming (Viterbi): forward minima, then backtracking. Returns the slots (N, L)
    and the cheapest total (N,) (inf when every path has an infinite cost).
    """
    n = unary[0].shape[0]
    cost = unary[0]
    back: list[NDArray[np.int64]] = []
    for k, pair in enumerate(pairs):
        total = cost[:, :, None] + pair + unary[k + 1][:, None, :]
        back.append(np.argmin(total, axis=1))
        cost = np.min(total, axis=1)  # the value at the argmin (no NaN: missing costs are inf)
    slots = np.empty((n, len(unary)), dtype=np.int64)
    last = np.argmin(cost, axis=1)
    best = np.min(cost, axis=1)
    slots[:, -1] = last
    for k in range(len(pairs) - 1, -1, -1):
        slots[:, k] = back[k][np.arange(n), slots[:, k + 1]]
    return slots, best


__all__ = [
    "MISSING",
    "OBJECTIVE_SCALE",
    "PENALTY_WEIGHT",
    "BatchArcs",
    "BatchCosts",
    "LegArcs",
    "SequenceModel",
]
