"""Single arcs between two dates: the dashboard's selected cell, refinement and exports.

``solve_cell`` gives the same numbers as the grid cell at those dates, for any dates.
"""

from __future__ import annotations

import functools
from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

from solver.ephemeris.timescales import elapsed_days
from solver.errors import InputError
from solver.mechanics.families import family_from_x
from solver.mechanics.lambert import BRANCH_NAMES, solve_lambert
from solver.reasons import Reason
from solver.time_units import SECONDS_PER_DAY
from solver.window.case import Case
from solver.window.case_bodies import CaseBodies, body_states, transfer_angle_deg
from solver.window.limits import within_limits
from solver.window.metrics import METRICS, arc_metrics
from solver.window.ties import ranks_before


@dataclass(frozen=True)
class Arc:
    """One arc between two epochs, with its states and every metric."""

    departure_jd_tdb: float
    arrival_jd_tdb: float
    revolutions: int
    branch: str
    r1_km: NDArray[np.float64]
    v1_km_s: NDArray[np.float64]
    r2_km: NDArray[np.float64]
    v2_km_s: NDArray[np.float64]
    departure_body_v_km_s: NDArray[np.float64]
    arrival_body_v_km_s: NDArray[np.float64]
    metrics: dict[str, float]
    family: int
    reason: int
    within: bool
    transfer_angle_deg: float
    mu_km3_s2: float
    tof_days: float
    """Elapsed time between the two UTC instants, days (TT; see ``solver.window.dates``)."""

    @property
    def flight_s(self) -> float:
        """The TDB interval between the two epochs, s: what the Lambert solve and any propagation
        of the arc use (it differs from ``tof_days`` by the periodic TDB - TT term, ms)."""
        return (self.arrival_jd_tdb - self.departure_jd_tdb) * SECONDS_PER_DAY

    @property
    def ok(self) -> bool:
        return self.reason == Reason.OK


def solve_cell(
    case: Case, departure_jd_tdb: float, arrival_jd_tdb: float, bodies: CaseBodies | None = None
) -> list[Arc]:
    """Every arc slot between two epochs (the same numbers as the grid cell at those dates)."""
    bodies = bodies or CaseBodies.of(case)
    jd = np.array([departure_jd_tdb, arrival_jd_tdb], dtype=float)
    r_d, v_d = body_states(case, bodies, bodies.departure, jd[:1], "departure date")
    r_a, v_a = body_states(case, bodies, bodies.target, jd[1:], "arrival date")
    flight_s = float(jd[1] - jd[0]) * SECONDS_PER_DAY
    tof_days = float(elapsed_days(jd[0], jd[1]))
    sol = solve_lambert(
        r_d[0],
        r_a[0],
        flight_s,
        bodies.mu_central_km3_s2,
        max_revs=case.max_revolutions,
        retrograde=case.retrograde,
        pole=bodies.pole_icrf,
    )
    metrics = arc_metrics(case, bodies, r_d[0], sol.v1_km_s, sol.v2_km_s, v_d[0], v_a[0])
    angle = float(transfer_angle_deg(r_d[0], r_a[0], bodies.pole_icrf, case.retrograde))
    reason = np.where(
        (flight_s <= 0) & (sol.reason == Reason.NONPOSITIVE_TOF),
        np.int8(Reason.ARRIVAL_NOT_AFTER_DEPARTURE),
        sol.reason,
    )
    within = within_limits(
        case, bodies, metrics, np.full(reason.shape, tof_days), reason == Reason.OK
    )
    family = family_from_x(sol.x, angle > 180.0)
    arcs = []
    for k in range(len(sol.revolutions)):
        arcs.append(
            Arc(
                departure_jd_tdb=float(jd[0]),
                arrival_jd_tdb=float(jd[1]),
                revolutions=int(sol.revolutions[k]),
                branch=BRANCH_NAMES[int(sol.branch[k])],
                r1_km=r_d[0],
                v1_km_s=sol.v1_km_s[k],
                r2_km=r_a[0],
                v2_km_s=sol.v2_km_s[k],
                departure_body_v_km_s=v_d[0],
                arrival_body_v_km_s=v_a[0],
                metrics={name: float(values[k]) for name, values in metrics.items()}
                | {"tof_days": tof_days},
                family=int(family[k]),
                reason=int(reason[k]),
                within=bool(within[k]),
                transfer_angle_deg=angle,
                mu_km3_s2=bodies.mu_central_km3_s2,
                tof_days=tof_days,
            )
        )
    return arcs


def select_arc(
    arcs: list[Arc],
    revolutions: int | None = None,
    branch: str | None = None,
    metric: str = "c3_km2_s2",
) -> Arc:
    """The arc with these revolutions/branch, or the best by ``metric`` (within limits first)."""
    if revolutions is not None:
        wanted = "single" if revolutions == 0 else (branch or "low")
        for arc in arcs:
            if arc.revolutions == revolutions and arc.branch == wanted:
                return arc
        raise InputError(
            "revolutions",
            revolutions,
            f"0 to {max(a.revolutions for a in arcs)} (the case's max_revolutions)",
        )
    if metric not in METRICS:
        raise InputError("metric", metric, "one of " + ", ".join(METRICS))

    def order(a: Arc, b: Arc) -> int:
        # Within limits first, then other arcs, then cells' "no arc" entries; within a class the
        # rule of WindowGrid.best_cell (the metric, then its tie-break); then the slot order.
        a_class = 0 if a.within else 1 if a.ok else 2
        b_class = 0 if b.within else 1 if b.ok else 2
        if a_class != b_class:
            return -1 if a_class < b_class else 1
        if ranks_before(a.metrics, b.metrics, metric):
            return -1
        return 1 if ranks_before(b.metrics, a.metrics, metric) else 0

    return min(arcs, key=functools.cmp_to_key(order))


__all__ = ["Arc", "select_arc", "solve_cell"]
