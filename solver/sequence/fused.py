"""The search's whole evaluation in one compiled, parallel pass.

A global search scores whole populations of candidates; :meth:`SequenceModel.costs
<solver.sequence.evaluate.SequenceModel.costs>` does it in numpy stages, each making arrays the
size of the population. Here one compiled kernel (parallel over the population, in chunks that
each allocate their scratch once) takes the search variables and, per candidate and without any
temporary the size of the population:

1. adds up the encounter dates;
2. reads each body met from the compiled ephemeris tables
   (:func:`solver.ephemeris.compiled.body_state_into`);
3. solves every leg with the Lambert solver's own compiled routine
   (:data:`solver.mechanics.lambert.solve_one_into`), or flies a resonant leg on its orbit;
4. costs every arc slot (departure and arrival burns, the surface rule) and every pair of slots
   at each flyby (:func:`solver.sequence.flyby.flyby_one`, the same compiled model) or stop;
5. applies every limit, read from a table the Python side builds from
   :mod:`solver.sequence.limits` (:class:`FusedPlan`): the kernel knows the quantities, never a
   limit's value, bound or scale, so the limits still live in one place;
6. finds the best slot path by the same dynamic programming as ``costs`` and writes the score.

The formulas are those of ``costs`` (the window engine's metrics, the flyby model, the sequence
limits), written per candidate in the same order of operations, so the two agree to rounding
(tests/test_sequence_model.py). Reported candidates are still evaluated by the exact path.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numba
import numpy as np
from numpy.typing import NDArray

from solver.ephemeris.bodies import has_mass
from solver.ephemeris.compiled import SCRATCH_SIZE, CompiledStates, body_state_into
from solver.mechanics.lambert import solve_one_into
from solver.mechanics.parallel import PARALLEL_LOCK
from solver.reasons import Reason
from solver.sequence.flyby import flyby_one
from solver.sequence.limits import SURFACE_SCALE, limit_value, rules_for
from solver.sequence.penalty import MISSING, PENALTY_WEIGHT, TURN_SCALE_DEG
from solver.time_units import SECONDS_PER_DAY

# Quantities a limit row can bound (what the kernel computes).
Q_DEPARTURE_JD = 0
Q_ARRIVAL_JD = 1
Q_TOF = 2  # at: leg
Q_MISS = 3  # at: leg
Q_DURATION = 4
Q_STAY = 5  # at: intermediate event
Q_C3 = 6
Q_DLA = 7
Q_VINF_DEPARTURE = 8
Q_VINF_ARRIVAL = 9
Q_FLYBY_ALTITUDE = 10  # at: intermediate event
Q_FLYBY_DV = 11
Q_FLYBY_MISMATCH = 12

_CONSTANT = {
    "departure_jd_tdb": Q_DEPARTURE_JD,
    "arrival_jd_tdb": Q_ARRIVAL_JD,
    "tof_days": Q_TOF,
    "miss_km": Q_MISS,
    "duration_days": Q_DURATION,
    "stay_days": Q_STAY,
}
_DEPARTURE = {
    "c3_km2_s2": Q_C3,
    "dla_deg": Q_DLA,
    "vinf_departure_km_s": Q_VINF_DEPARTURE,
}
_ARRIVAL = {"vinf_arrival_km_s": Q_VINF_ARRIVAL}
_FLYBY = {
    "periapsis_altitude_km": Q_FLYBY_ALTITUDE,
    "dv_km_s": Q_FLYBY_DV,
    "vinf_mismatch_km_s": Q_FLYBY_MISMATCH,
}

# Burn conventions (solver.window.metrics): departure and arrival/stop modes.
DEPART_FREE = 0  # the launch vehicle delivers the C3: 0 (NaN for no arc)
DEPART_PARKING = 1  # sqrt(v∞² + 2μ/r_p) - v_circ
DEPART_MASSLESS = 2  # |v∞|
ARRIVE_CAPTURE = 0  # sqrt(v∞² + 2μ/r_p) - v_orbit
ARRIVE_RENDEZVOUS = 1  # |v∞|
ARRIVE_FLYBY = 2  # 0 (NaN for no arc)
_ARRIVE = {"capture": ARRIVE_CAPTURE, "rendezvous": ARRIVE_RENDEZVOUS, "flyby": ARRIVE_FLYBY}

OBJECTIVE_CODES = {
    "dv_total_km_s": 0,
    "c3_km2_s2": 1,
    "vinf_arrival_km_s": 2,
    "duration_days": 3,
}

_OK = np.int8(Reason.OK)
_PARALLEL_MIN = 2_048  # below this one thread is faster than the pool's hand-offs (measured)
_CHUNKS_PER_THREAD = 8


class UnsupportedRule(Exception):
    """A limit whose quantity the kernel does not compute (the numpy stages are used)."""


@dataclass(frozen=True)
class FusedPlan:
    """A sequence, its case and its limits as the flat arrays the kernel reads.

    Built once per model by :func:`fused_plan`; see the module docstring.
    """

    compiled: CompiledStates
    ints: tuple[NDArray[np.int64], ...]
    reals: tuple[NDArray[np.float64], ...]
    scalars: tuple
    n_epochs: int
    n_legs: int
    n_slots: int


def _burn_constants(gm: float, rp: float, v_orbit: float) -> tuple[float, float]:
    """(2μ/r_p, orbit speed at r_p), as solver.window.metrics computes them."""
    return 2 * gm / rp, v_orbit


def fused_plan(model) -> FusedPlan:
    """The flat arrays of ``model`` (a :class:`~solver.sequence.evaluate.SequenceModel`).

    Raises
    ------
    UnsupportedRule
        When there are no compiled tables (mean-element ephemeris) or a limit bounds a quantity
        the kernel does not compute.
    """
    compiled = model.compiled()
    if compiled is None:
        raise UnsupportedRule("no compiled ephemeris tables")
    spec, case = model.spec, model.case
    n_legs = len(spec.legs)
    names = spec.variable_names
    date_cols = np.array([i for i, n in enumerate(names) if not n.endswith("_deg")], np.int64)
    angle_cols = np.full(n_legs, -1, np.int64)
    for k in spec.resonant_legs:
        angle_cols[k] = names.index(f"leg{k + 1}_pitch_deg")
    epoch_body = np.array([compiled.index(b.name) for b in model.epoch_body], np.int64)
    ends = [spec.leg_epochs(k) for k in range(n_legs)]
    leg_a = np.array([a for a, _ in ends], np.int64)
    leg_b = np.array([b for _, b in ends], np.int64)
    leg_revs = np.array(
        [0 if leg.resonance else leg.max_revolutions for leg in spec.legs], np.int64
    )
    leg_res_m = np.array([leg.resonance[1] if leg.resonance else 0 for leg in spec.legs], np.int64)
    leg_tol = np.array([model._angle_tol(k) for k in range(n_legs)], float)

    # Intermediate events (between leg j and leg j + 1).
    middle = spec.events[1:-1]
    ev_kind = np.array([0 if e.kind == "flyby" else 1 for e in middle], np.int64)
    ev_in = np.array([e.epoch_in for e in middle], np.int64)
    ev_out = np.array([e.epoch_out for e in middle], np.int64)
    ev_mode = np.zeros(len(middle), np.int64)
    ev_gm = np.zeros(len(middle))
    ev_radius = np.zeros(len(middle))
    ev_rp_min = np.zeros(len(middle))
    ev_k = np.zeros(len(middle))
    ev_vorb = np.zeros(len(middle))
    for j, event in enumerate(middle):
        leg = spec.legs[event.leg_in]
        body = model.bodies[event.index]
        ev_gm[j] = body.gm_km3_s2
        ev_radius[j] = body.radius_km
        ev_rp_min[j] = body.radius_km + (leg.altitude_min_km or 0.0)
        if event.kind == "stop":
            mode = leg.mode or "rendezvous"
            ev_mode[j] = _ARRIVE[mode]
            if mode == "capture":
                ev_k[j], ev_vorb[j] = _capture(
                    body, leg.periapsis_altitude_km, leg.apoapsis_altitude_km
                )

    departure = model.leg_bodies[0].departure
    if case.parking_altitude_km is not None and has_mass(departure):
        rp = departure.radius_km + case.parking_altitude_km
        dep_mode = DEPART_PARKING
        dep_k, dep_v = _burn_constants(departure.gm_km3_s2, rp, math.sqrt(departure.gm_km3_s2 / rp))
    else:
        dep_mode = DEPART_FREE if has_mass(departure) else DEPART_MASSLESS
        dep_k, dep_v = 0.0, 0.0
    target = model.leg_bodies[-1].target
    arr_mode = _ARRIVE[case.arrival_mode]
    arr_k, arr_v = 0.0, 0.0
    if case.arrival_mode == "capture":
        arr_k, arr_v = _capture(
            target, case.capture_periapsis_altitude_km, case.capture_apoapsis_altitude_km
        )

    rows: list[tuple[int, int, float, bool, float, bool]] = []

    def add(table: dict[str, int], rule, at: int, limit: float | None) -> None:
        if limit is None:
            return
        if rule.quantity not in table:
            raise UnsupportedRule(rule.key)
        rows.append(
            (table[rule.quantity], at, float(limit), rule.bound == "max", rule.scale,
             rule.by_magnitude)
        )  # fmt: skip

    # The rows in the order SequenceModel.costs adds the breaches, so that the sums agree.
    for rule in rules_for("departure"):
        table = _CONSTANT if rule.quantity == "departure_jd_tdb" else _DEPARTURE
        add(table, rule, 0, limit_value(rule, case, spec))
    for rule in rules_for("arrival"):
        table = _CONSTANT if rule.quantity == "arrival_jd_tdb" else _ARRIVAL
        add(table, rule, 0, limit_value(rule, case, spec))
    for k, leg in enumerate(spec.legs):
        for rule in rules_for("leg"):
            add(_CONSTANT, rule, k, limit_value(rule, case, spec, leg))
    for k in spec.resonant_legs:
        for rule in rules_for("resonance"):
            add(_CONSTANT, rule, k, limit_value(rule, case, spec))
    for rule in rules_for("sequence"):
        add(_CONSTANT, rule, 0, limit_value(rule, case, spec))
    for j, event in enumerate(middle):
        leg = spec.legs[event.leg_in]
        if event.kind == "stop":
            for rule in rules_for("stop"):
                add(_CONSTANT, rule, j, limit_value(rule, case, spec, leg))
        else:
            for rule in rules_for("flyby"):
                add(_FLYBY, rule, j, limit_value(rule, case, spec, leg))

    # Grouped (stably: each group keeps the order above) by where the kernel applies them:
    # departure arcs, arrival arcs, constants, then each flyby's pairs.
    def group(row: tuple) -> int:
        q, at = row[0], row[1]
        if q in (Q_C3, Q_DLA, Q_VINF_DEPARTURE):
            return 0
        if q == Q_VINF_ARRIVAL:
            return 1
        if q in (Q_FLYBY_ALTITUDE, Q_FLYBY_DV, Q_FLYBY_MISMATCH):
            return 3 + at
        return 2

    rows.sort(key=group)
    groups = [group(r) for r in rows]
    rule_first = np.searchsorted(groups, np.arange(3 + len(middle) + 1)).astype(np.int64)
    rule_q = np.array([r[0] for r in rows], np.int64)
    rule_at = np.array([r[1] for r in rows], np.int64)
    rule_limit = np.array([r[2] for r in rows], float)
    rule_max = np.array([r[3] for r in rows], np.int64)
    rule_scale = np.array([r[4] for r in rows], float)
    rule_abs = np.array([r[5] for r in rows], np.int64)

    objective = OBJECTIVE_CODES[spec.objective]
    scalars = (
        float(model.mu),
        np.ascontiguousarray(model.pole / np.linalg.norm(model.pole), dtype=float),
        bool(case.retrograde),
        float(model.case_bodies.central.radius_km),
        float(PENALTY_WEIGHT * model.objective_scale),
        int(objective),
        int(dep_mode),
        float(dep_k),
        float(dep_v),
        int(arr_mode),
        float(arr_k),
        float(arr_v),
        float(TURN_SCALE_DEG),
        float(SURFACE_SCALE),
    )
    ints = (
        date_cols,
        angle_cols,
        epoch_body,
        leg_a,
        leg_b,
        leg_revs,
        leg_res_m,
        ev_kind,
        ev_in,
        ev_out,
        ev_mode,
        rule_q,
        rule_at,
        rule_max,
        rule_abs,
        rule_first,
    )
    reals = (leg_tol, ev_gm, ev_radius, ev_rp_min, ev_k, ev_vorb, rule_limit, rule_scale)
    return FusedPlan(
        compiled=compiled,
        ints=ints,
        reals=reals,
        scalars=scalars,
        n_epochs=spec.n_epochs,
        n_legs=n_legs,
        n_slots=2 * int(np.max(leg_revs)) + 1,
    )


def _capture(body, periapsis_altitude_km, apoapsis_altitude_km) -> tuple[float, float]:
    """(2μ/r_p, speed at periapsis of the capture orbit), as arrival_dv_km_s computes them."""
    rp = body.radius_km + periapsis_altitude_km
    ra = body.radius_km + apoapsis_altitude_km
    v_orbit = math.sqrt(2 * body.gm_km3_s2 * ra / (rp * (rp + ra)))
    return _burn_constants(body.gm_km3_s2, rp, v_orbit)


# ---------------------------------------------------------------------------------------------
# The kernel


@numba.njit(cache=True, error_model="numpy", inline="always")
def _violation(value, limit, is_max, scale, by_magnitude):
    """As SequenceLimitRule.violation: the breach over the scale, 0 where it holds or is NaN."""
    v = abs(value) if by_magnitude else value
    over = (v - limit) if is_max else (limit - v)
    if over > 0.0:
        return over / scale
    return 0.0


@numba.njit(cache=True, error_model="numpy", inline="always")
def _end_burn(vinf2, mode, k, v_orbit):
    """Arrival (or stop) burn for v∞², by ARRIVE_* mode (solver.window.metrics)."""
    if mode == 0:
        return math.sqrt(vinf2 + k) - v_orbit
    if mode == 1:
        return math.sqrt(vinf2)
    if math.isfinite(vinf2):
        return 0.0
    return math.nan


@numba.njit(cache=True, error_model="numpy", inline="always")
def _departure_burn(vinf2, mode, k, v_circ):
    """Departure burn for v∞², by DEPART_* mode (solver.window.metrics)."""
    if mode == 1:
        return math.sqrt(vinf2 + k) - v_circ
    if mode == 2:
        return math.sqrt(vinf2)
    if math.isfinite(vinf2):
        return 0.0
    return math.nan


@numba.njit(cache=True, error_model="numpy", inline="always")
def _surface(rx, ry, rz, vx, vy, vz, mu, radius, surface_scale):
    """The surface rule's penalty for the arc leaving ``r`` at ``v`` (solver.window.metrics.
    arc_conic, solver.sequence.limits.surface_violation). Scalars, not rows of the scratch
    arrays: a row is a new array view, whose reference counting costs atomic operations."""
    if not math.isfinite(radius):
        return 0.0
    r1n = math.sqrt(rx * rx + ry * ry + rz * rz)
    v1sq = vx * vx + vy * vy + vz * vz
    hx = ry * vz - rz * vy
    hy = rz * vx - rx * vz
    hz = rx * vy - ry * vx
    p = (hx * hx + hy * hy + hz * hz) / mu
    energy = 0.5 * v1sq - mu / r1n
    arg = 1.0 + 2.0 * energy * p / mu
    if arg < 0.0:
        arg = 0.0
    e = math.sqrt(arg)
    periapsis = p / (1.0 + e)
    depth = (radius - periapsis) / radius
    if depth >= 0.0:
        return depth / surface_scale + 1e-3
    return 0.0


@numba.njit(cache=True, error_model="numpy")
def _resonant_into(r, v, tof_days, m, mu, pitch_deg, clock_deg, out):
    """The resonant orbit's velocity (solver.sequence.resonance.resonant_velocity) into ``out``;
    False where no orbit of that period reaches the body's distance."""
    period_s = tof_days * SECONDS_PER_DAY / m
    a = np.cbrt(mu * (period_s / (2.0 * math.pi)) ** 2)
    rn = math.sqrt(r[0] * r[0] + r[1] * r[1] + r[2] * r[2])
    speed2 = mu * (2.0 / rn - 1.0 / a)
    if not speed2 > 0.0:
        for j in range(3):
            out[j] = math.nan
        return False
    speed = math.sqrt(speed2)
    vn = math.sqrt(v[0] * v[0] + v[1] * v[1] + v[2] * v[2])
    ax, ay, az = v[0] / vn, v[1] / vn, v[2] / vn
    nx = r[1] * v[2] - r[2] * v[1]
    ny = r[2] * v[0] - r[0] * v[2]
    nz = r[0] * v[1] - r[1] * v[0]
    nn = math.sqrt(nx * nx + ny * ny + nz * nz)
    nx, ny, nz = nx / nn, ny / nn, nz / nn
    ox = ay * nz - az * ny
    oy = az * nx - ax * nz
    oz = ax * ny - ay * nx
    pitch = math.radians(pitch_deg)
    clock = math.radians(clock_deg)
    cp, sp = math.cos(pitch), math.sin(pitch)
    cc, sc = math.cos(clock), math.sin(clock)
    out[0] = speed * (cp * ax + sp * (cc * ox + sc * nx))
    out[1] = speed * (cp * ay + sp * (cc * oy + sc * ny))
    out[2] = speed * (cp * az + sp * (cc * oz + sc * nz))
    return True


@numba.njit(cache=True, error_model="numpy")
def _score_rows(lo, hi, x, ints, reals, scalars, tables, scratch, outs):
    """Score candidates ``lo:hi`` (rows of the variables ``x``) into ``outs``: the arrays are
    unpacked once for all of them."""
    (
        date_cols,
        angle_cols,
        epoch_body,
        leg_a,
        leg_b,
        leg_revs,
        leg_res_m,
        ev_kind,
        ev_in,
        ev_out,
        ev_mode,
        rule_q,
        rule_at,
        rule_max,
        rule_abs,
        rule_first,
    ) = ints
    leg_tol, ev_gm, ev_radius, ev_rp_min, ev_k, ev_vorb, rule_limit, rule_scale = reals
    (
        mu,
        pole,
        retrograde,
        radius,
        w,
        objective,
        dep_mode,
        dep_k,
        dep_v,
        arr_mode,
        arr_k,
        arr_v,
        turn_scale,
        surface_scale,
    ) = scalars
    coefficients, cheb_int, cheb_real, kep_state, kep_real, cheb_first, kep_first = tables
    (
        epochs,
        body_r,
        body_v,
        acc,
        eph_scratch,
        v1,
        v2,
        xs,
        iters,
        reason,
        miss,
        u_obj,
        u_pen,
        p_obj,
        p_pen,
        cost,
        nxt,
        back,
        path,
    ) = scratch
    score, objective_out, penalty_out, slots_out = outs
    n_epochs = epochs.shape[0]
    n_legs = leg_a.shape[0]
    n_slots = v1.shape[1]
    for i in range(lo, hi):
        # 1. Dates.
        total = 0.0
        for e in range(n_epochs):
            total += x[i, date_cols[e]]
            epochs[e] = total
        # 2. States.
        for e in range(n_epochs):
            body_state_into(
                epoch_body[e],
                epochs[e],
                coefficients,
                cheb_int,
                cheb_real,
                kep_state,
                kep_real,
                cheb_first,
                kep_first,
                acc,
                eph_scratch,
            )
            for j in range(3):
                body_r[e, j] = acc[j]
                body_v[e, j] = acc[j + 3]
        # 3. Arcs; unary costs per slot.
        count_dv = objective == 0
        for k in range(n_legs):
            a = leg_a[k]
            b = leg_b[k]
            tof_days = epochs[b] - epochs[a]
            n_k = 2 * leg_revs[k] + 1
            if leg_res_m[k] > 0:
                col = angle_cols[k]
                ok = _resonant_into(
                    body_r[a],
                    body_v[a],
                    tof_days,
                    leg_res_m[k],
                    mu,
                    x[i, col],
                    x[i, col + 1],
                    v1[k, 0],
                )
                for j in range(3):
                    v2[k, 0, j] = v1[k, 0, j]
                    d = body_r[b, j] - body_r[a, j]
                    acc[j] = d
                miss[k] = math.sqrt(acc[0] * acc[0] + acc[1] * acc[1] + acc[2] * acc[2])
                reason[k, 0] = _OK if (ok and tof_days > 0.0) else np.int8(1)
            else:
                solve_one_into(
                    body_r[a],
                    body_r[b],
                    tof_days * SECONDS_PER_DAY,
                    mu,
                    pole,
                    retrograde,
                    leg_revs[k],
                    leg_tol[k],
                    v1[k],
                    v2[k],
                    xs[k],
                    iters[k],
                    reason[k],
                )
                miss[k] = math.nan
            for s in range(n_slots):
                u_obj[k, s] = 0.0
                if s >= n_k or reason[k, s] != _OK:
                    u_pen[k, s] = math.inf
                    continue
                u_pen[k, s] = _surface(
                    body_r[a, 0],
                    body_r[a, 1],
                    body_r[a, 2],
                    v1[k, s, 0],
                    v1[k, s, 1],
                    v1[k, s, 2],
                    mu,
                    radius,
                    surface_scale,
                )
                if k == 0:
                    dx = v1[k, s, 0] - body_v[a, 0]
                    dy = v1[k, s, 1] - body_v[a, 1]
                    dz = v1[k, s, 2] - body_v[a, 2]
                    vd2 = dx * dx + dy * dy + dz * dz
                    vd = math.sqrt(vd2)
                    for r in range(rule_first[0], rule_first[1]):
                        q = rule_q[r]
                        if q == 6:
                            value = vd2
                        elif q == 7:
                            ratio = dz / vd
                            ratio = min(max(ratio, -1.0), 1.0) if ratio == ratio else ratio
                            value = math.degrees(math.asin(ratio))
                        elif q == 8:
                            value = vd
                        else:
                            continue
                        u_pen[k, s] += _violation(
                            value, rule_limit[r], rule_max[r], rule_scale[r], rule_abs[r]
                        )
                    if objective == 0:
                        u_obj[k, s] += _departure_burn(vd2, dep_mode, dep_k, dep_v)
                    elif objective == 1:
                        u_obj[k, s] += vd2
                if k == n_legs - 1:
                    dx = v2[k, s, 0] - body_v[b, 0]
                    dy = v2[k, s, 1] - body_v[b, 1]
                    dz = v2[k, s, 2] - body_v[b, 2]
                    va2 = dx * dx + dy * dy + dz * dz
                    for r in range(rule_first[1], rule_first[2]):
                        if rule_q[r] == 9:
                            u_pen[k, s] += _violation(
                                math.sqrt(va2),
                                rule_limit[r],
                                rule_max[r],
                                rule_scale[r],
                                rule_abs[r],
                            )
                    if objective == 0:
                        u_obj[k, s] += _end_burn(va2, arr_mode, arr_k, arr_v)
                    elif objective == 2:
                        u_obj[k, s] += math.sqrt(va2)
        # Constant breaches, in the table's order.
        duration = epochs[n_epochs - 1] - epochs[0]
        const_obj = duration if objective == 3 else 0.0
        const_pen = 0.0
        for r in range(rule_first[2], rule_first[3]):
            q = rule_q[r]
            at = rule_at[r]
            if q == 0:
                value = epochs[0]
            elif q == 1:
                value = epochs[n_epochs - 1]
            elif q == 2:
                value = epochs[leg_b[at]] - epochs[leg_a[at]]
            elif q == 3:
                value = miss[at]
            elif q == 4:
                value = duration
            elif q == 5:
                value = epochs[ev_out[at]] - epochs[ev_in[at]]
            else:
                continue
            const_pen += _violation(value, rule_limit[r], rule_max[r], rule_scale[r], rule_abs[r])
        # 4. Pair costs at each intermediate encounter.
        for j in range(n_legs - 1):
            b_in = ev_in[j]
            b_out = ev_out[j]
            gm = ev_gm[j]
            for s_in in range(n_slots):
                for s_out in range(n_slots):
                    p_obj[j, s_in, s_out] = 0.0
                    p_pen[j, s_in, s_out] = 0.0
                    if not (math.isfinite(u_pen[j, s_in]) and math.isfinite(u_pen[j + 1, s_out])):
                        p_obj[j, s_in, s_out] = math.inf
                        continue
                    ix = v2[j, s_in, 0] - body_v[b_in, 0]
                    iy = v2[j, s_in, 1] - body_v[b_in, 1]
                    iz = v2[j, s_in, 2] - body_v[b_in, 2]
                    ox = v1[j + 1, s_out, 0] - body_v[b_out, 0]
                    oy = v1[j + 1, s_out, 1] - body_v[b_out, 1]
                    oz = v1[j + 1, s_out, 2] - body_v[b_out, 2]
                    if ev_kind[j] == 0:
                        turn, rp, dv, vin, vout = flyby_one(ix, iy, iz, ox, oy, oz, gm)
                        mismatch = abs(vout - vin)
                        dv = abs(dv)
                        if not math.isfinite(dv):
                            dv = mismatch
                        if count_dv:
                            p_obj[j, s_in, s_out] = 0.0 + dv
                        pen = 0.0
                        for r in range(rule_first[3 + j], rule_first[4 + j]):
                            q = rule_q[r]
                            if q == 10:
                                value = rp - ev_radius[j]
                            elif q == 11:
                                value = dv
                            elif q == 12:
                                value = mismatch
                            else:
                                continue
                            pen += _violation(
                                value, rule_limit[r], rule_max[r], rule_scale[r], rule_abs[r]
                            )
                        # The turn lacking below the lowest periapsis: none unless the
                        # periapsis is below it (the turn falls as the periapsis rises).
                        if rp < ev_rp_min[j]:
                            qa = ev_rp_min[j] * (vin * vin) / gm
                            qb = ev_rp_min[j] * (vout * vout) / gm
                            largest = math.degrees(
                                math.atan2(1.0, math.sqrt(qa * (2.0 + qa)))
                                + math.atan2(1.0, math.sqrt(qb * (2.0 + qb)))
                            )
                            lacking = math.degrees(turn) - largest
                            if lacking > 0.0:
                                pen += lacking / turn_scale
                        p_pen[j, s_in, s_out] = pen
                    elif count_dv:
                        vin2 = ix * ix + iy * iy + iz * iz
                        vout2 = ox * ox + oy * oy + oz * oz
                        mode = ev_mode[j]
                        p_obj[j, s_in, s_out] = (
                            0.0
                            + _end_burn(vin2, mode, ev_k[j], ev_vorb[j])
                            + _end_burn(vout2, mode, ev_k[j], ev_vorb[j])
                        )
        # 5. The best slot path (as evaluate._best_path): forward minima, then backtracking.
        for s in range(n_slots):
            t = u_obj[0, s] + w * u_pen[0, s]
            cost[s] = t if math.isfinite(t) else math.inf
        for j in range(n_legs - 1):
            for t_out in range(n_slots):
                u = u_obj[j + 1, t_out] + w * u_pen[j + 1, t_out]
                if not math.isfinite(u):
                    u = math.inf
                best = math.inf
                arg = 0
                for s_in in range(n_slots):
                    pair = p_obj[j, s_in, t_out] + w * p_pen[j, s_in, t_out]
                    if not math.isfinite(pair):
                        pair = math.inf
                    value = cost[s_in] + pair + u
                    if value < best:
                        best = value
                        arg = s_in
                nxt[t_out] = best
                back[j, t_out] = arg
            for s in range(n_slots):
                cost[s] = nxt[s]
        best = math.inf
        last = 0
        for s in range(n_slots):
            if cost[s] < best:
                best = cost[s]
                last = s
        path[n_legs - 1] = last
        for j in range(n_legs - 2, -1, -1):
            path[j] = back[j, path[j + 1]]
        if not math.isfinite(best):
            score[i] = MISSING
            objective_out[i] = math.nan
            penalty_out[i] = math.nan
            for k in range(n_legs):
                slots_out[i, k] = -1
            continue
        obj = const_obj
        pen = const_pen
        for k in range(n_legs):
            obj += u_obj[k, path[k]]
            pen += u_pen[k, path[k]]
        for j in range(n_legs - 1):
            obj += p_obj[j, path[j], path[j + 1]]
            pen += p_pen[j, path[j], path[j + 1]]
        score[i] = obj + w * pen
        objective_out[i] = obj
        penalty_out[i] = pen
        for k in range(n_legs):
            slots_out[i, k] = path[k]


@numba.njit(cache=True, error_model="numpy")
def _scratch(n_epochs, n_legs, n_slots):
    """One candidate's working arrays (allocated once per chunk of candidates)."""
    n_pairs = max(n_legs - 1, 1)
    return (
        np.empty(n_epochs),
        np.empty((n_epochs, 3)),
        np.empty((n_epochs, 3)),
        np.empty(6),
        np.empty(SCRATCH_SIZE),
        np.empty((n_legs, n_slots, 3)),
        np.empty((n_legs, n_slots, 3)),
        np.empty((n_legs, n_slots)),
        np.empty((n_legs, n_slots), dtype=np.int16),
        np.empty((n_legs, n_slots), dtype=np.int8),
        np.empty(n_legs),
        np.empty((n_legs, n_slots)),
        np.empty((n_legs, n_slots)),
        np.empty((n_pairs, n_slots, n_slots)),
        np.empty((n_pairs, n_slots, n_slots)),
        np.empty(n_slots),
        np.empty(n_slots),
        np.empty((n_pairs, n_slots), dtype=np.int64),
        np.empty(n_legs, dtype=np.int64),
    )


@numba.njit(cache=True, parallel=True, error_model="numpy")
def _score_kernel(x, n_slots, n_chunks, ints, reals, scalars, tables, outs):
    n = x.shape[0]
    n_epochs = ints[0].shape[0]
    n_legs = ints[3].shape[0]
    for c in numba.prange(n_chunks):
        scratch = _scratch(n_epochs, n_legs, n_slots)
        lo = c * n // n_chunks
        hi = (c + 1) * n // n_chunks
        _score_rows(lo, hi, x, ints, reals, scalars, tables, scratch, outs)


@numba.njit(cache=True, error_model="numpy")
def _score_kernel_serial(x, n_slots, n_chunks, ints, reals, scalars, tables, outs):
    scratch = _scratch(ints[0].shape[0], ints[3].shape[0], n_slots)
    _score_rows(0, x.shape[0], x, ints, reals, scalars, tables, scratch, outs)


@dataclass(frozen=True)
class FusedScores:
    """What the kernel gives per candidate: ``score`` (as SequenceModel.costs), its
    ``objective`` and ``penalty`` parts (NaN without a path), the best ``slots`` (-1 without)."""

    score: NDArray[np.float64]
    objective: NDArray[np.float64]
    penalty: NDArray[np.float64]
    slots: NDArray[np.int64]


def score_fused(plan: FusedPlan, variables: NDArray[np.float64]) -> FusedScores:
    """Scores of candidates given as search variables, shape (M, D) -> (M,)."""
    x = np.ascontiguousarray(np.atleast_2d(np.asarray(variables, dtype=float)))
    n = x.shape[0]
    outs = (np.empty(n), np.empty(n), np.empty(n), np.empty((n, plan.n_legs), dtype=np.int64))
    args = (plan.ints, plan.reals, plan.scalars, plan.compiled.tables, outs)
    if n >= _PARALLEL_MIN:
        n_chunks = min(n, _CHUNKS_PER_THREAD * numba.get_num_threads())
        with PARALLEL_LOCK:
            _score_kernel(x, plan.n_slots, n_chunks, *args)
    else:
        _score_kernel_serial(x, plan.n_slots, 1, *args)
    return FusedScores(*outs)


def _warm(n: int):
    """A call that compiles (or loads) a kernel with the argument types every plan has: a
    plan of two legs (Earth, Venus flyby, Earth) built by hand, no limits."""

    def call() -> object:
        from solver.constants import GM_SUN_KM3_S2
        from solver.ephemeris.bodies import default_registry
        from solver.ephemeris.compiled import compile_states

        compiled = compile_states(["earth", "venus"], "sun", default_registry(), 2462000, 2462800)
        assert compiled is not None

        def ints(*values: int) -> NDArray[np.int64]:
            return np.array(values, dtype=np.int64)

        def reals(*values: float) -> NDArray[np.float64]:
            return np.array(values, dtype=float)

        plan = FusedPlan(
            compiled=compiled,
            ints=(
                ints(0, 1, 2), ints(-1, -1), ints(0, 1, 0), ints(0, 1), ints(1, 2), ints(0, 0),
                ints(0, 0), ints(0), ints(1), ints(1), ints(0), ints(), ints(), ints(), ints(),
                ints(0, 0, 0, 0, 0),
            ),
            reals=(
                reals(1e-7, 1e-7), reals(324_859.0), reals(6051.8), reals(6351.8), reals(0.0),
                reals(0.0), reals(), reals(),
            ),
            scalars=(
                GM_SUN_KM3_S2, reals(0.0, -0.3977771559, 0.9174820621), False, 695_700.0,
                1.0e4, 0, 0, 0.0, 0.0, 2, 0.0, 0.0, TURN_SCALE_DEG, SURFACE_SCALE,
            ),
            n_epochs=3,
            n_legs=2,
            n_slots=1,
        )  # fmt: skip
        x = np.tile([2462100.0, 150.0, 300.0], (n, 1))
        return score_fused(plan, x)

    return call


def fused_kernels() -> tuple:
    """The compiled pass's entry points, as :func:`solver.sequence.kernels.sequence_kernels`
    lists them (the command line compiles them up front and says so)."""
    from solver.mechanics.kernels import Kernel

    return (
        Kernel("sequence scores, small batches", _score_kernel_serial, _warm(4)),
        Kernel("sequence scores, populations", _score_kernel, _warm(_PARALLEL_MIN)),
    )


__all__ = [
    "FusedPlan",
    "FusedScores",
    "UnsupportedRule",
    "fused_kernels",
    "fused_plan",
    "score_fused",
]
