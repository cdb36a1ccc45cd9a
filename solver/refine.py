"""The best arc off the grid: continuous departure and arrival times, within limits.

A grid finds the best cell to the nearest grid step; an analyst wants the best arc itself.
Starting from the grid's best arc, :func:`refine_best` minimizes the chosen metric over
continuous departure and arrival epochs for that arc's revolutions and branch, with the case's
limits as inequality constraints and its date windows as bounds (scipy's SLSQP), then rounds the
epochs to the minute and keeps the result only if it is still within limits and no worse than
the grid cell.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy.optimize import minimize

from solver.case import Case
from solver.errors import InputError
from solver.window import (
    METRICS,
    Arc,
    CaseBodies,
    WindowGrid,
    select_arc,
    solve_cell,
)

MINUTE_DAYS = 1.0 / 1440.0
_FAILED = 1e30  # objective where no arc exists (steers the optimizer back)


@dataclass(frozen=True)
class RefinedArc:
    """The refined best arc and how it was found."""

    arc: Arc
    metric: str
    grid_arc: Arc
    improvement: float  # grid value minus refined value, in the metric's unit
    evaluations: int
    message: str


def _value(arc: Arc, metric: str) -> float:
    value = arc.metrics.get(metric, math.nan)
    return abs(value) if METRICS[metric].rank_by_magnitude else value


def _limit_margins(case: Case, bodies: CaseBodies, arc: Arc) -> list[float]:
    """Non-negative where each limit holds (SLSQP inequality form)."""
    lim = case.limits
    m = arc.metrics
    margins = []
    if lim.c3_max_km2_s2 is not None:
        margins.append(lim.c3_max_km2_s2 - m["c3_km2_s2"])
    if lim.vinf_arrival_max_km_s is not None:
        margins.append(lim.vinf_arrival_max_km_s - m["vinf_arrival_km_s"])
    if lim.dla_max_deg is not None:
        margins.append(lim.dla_max_deg - abs(m["dla_deg"]))
    if lim.tof_min_days is not None:
        margins.append(arc.tof_days - lim.tof_min_days)
    if lim.tof_max_days is not None:
        margins.append(lim.tof_max_days - arc.tof_days)
    if math.isfinite(bodies.central.radius_km):
        margins.append(m["periapsis_km"] / bodies.central.radius_km - 1.0)
    return [x if math.isfinite(x) else -1e6 for x in margins]


def refine_best(
    case: Case,
    grid: WindowGrid,
    metric: str = "c3_km2_s2",
    *,
    revolutions: int | None = None,
    branch: str | None = None,
) -> RefinedArc:
    """Refine the grid's best arc by ``metric`` to continuous epochs (to the minute).

    Parameters
    ----------
    case, grid : Case, WindowGrid
        The case and its solved grid.
    metric : str
        A ``METRICS`` column (DLA is ranked by its magnitude).
    revolutions, branch : optional
        Refine the best arc of this revolution count and branch instead of the overall best.

    Raises
    ------
    InputError
        Unknown metric, or no arc of the grid is within limits.
    """
    if metric not in METRICS:
        raise InputError("metric", metric, "one of " + ", ".join(METRICS))
    bodies = CaseBodies.of(case)
    within = grid.within
    if revolutions is not None:
        slots = [
            k
            for k in range(len(grid.revolutions))
            if grid.revolutions[k] == revolutions
            and (revolutions == 0 or grid.branch[k] == {"low": 1, "high": 2}[branch or "low"])
        ]
        if not slots:
            raise InputError(
                "revolutions",
                revolutions,
                f"0 to {case.max_revolutions} (the case's max_revolutions)",
            )
        mask = np.zeros_like(within)
        mask[..., slots] = True
        within = within & mask
    values = grid.metric(metric)
    if METRICS[metric].rank_by_magnitude:
        values = np.abs(values)
    score = np.where(within, values, np.inf)
    if not np.isfinite(score).any():
        raise InputError(
            "limits",
            "no arc of the grid within limits",
            "a window or limits that leave at least one arc",
        )
    i, j, k = np.unravel_index(int(np.argmin(score)), score.shape)
    revs = int(grid.revolutions[k])
    br = {0: "single", 1: "low", 2: "high"}[int(grid.branch[k])]
    dep0 = float(grid.departure_jd_tdb[i])
    arr0 = float(grid.arrival_jd_tdb[j])
    grid_arc = select_arc(solve_cell(case, dep0, arr0, bodies), revs, br)

    evaluations = 0
    memo: dict[tuple[float, float], Arc | None] = {}

    def arc_at(x: np.ndarray) -> Arc | None:
        nonlocal evaluations
        key = (float(x[0]), float(x[1]))
        if key not in memo:
            evaluations += 1
            dep, arr = dep0 + key[0], arr0 + key[1]
            arc = select_arc(solve_cell(case, dep, arr, bodies), revs, br) if arr > dep else None
            memo[key] = arc if arc is not None and arc.ok else None
        return memo[key]

    def objective(x):
        arc = arc_at(x)
        return _FAILED if arc is None else _value(arc, metric)

    def constraints(x):
        arc = arc_at(x)
        return np.array(_limit_margins(case, bodies, arc) if arc is not None else [-1e6])

    bounds = [
        (case.departure_start_jd_tdb - dep0, case.departure_end_jd_tdb - dep0),
        (case.arrival_start_jd_tdb - arr0, case.arrival_end_jd_tdb - arr0),
    ]
    # Finite-difference step: a hundredth of the grid step (1.4 min for a daily grid).
    step_days = 0.01 * min(case.departure_step_days, case.arrival_step_days)
    result = minimize(
        objective,
        np.zeros(2),
        method="SLSQP",
        bounds=bounds,
        constraints=[{"type": "ineq", "fun": constraints}],
        options={"ftol": 1e-12, "maxiter": 100, "eps": step_days},
    )
    # Round to the minute and check the rounded arc, not the optimizer's claim.
    best = grid_arc
    message = "grid arc kept: " + str(result.message)
    candidate_x = np.round(np.asarray(result.x) / MINUTE_DAYS) * MINUTE_DAYS
    candidate = arc_at(candidate_x)
    if (
        candidate is not None
        and candidate.within
        and _value(candidate, metric) <= _value(grid_arc, metric)
    ):
        best = candidate
        message = f"refined to the minute ({result.message})"
    return RefinedArc(
        arc=best,
        metric=metric,
        grid_arc=grid_arc,
        improvement=_value(grid_arc, metric) - _value(best, metric),
        evaluations=evaluations,
        message=message,
    )


__all__ = ["MINUTE_DAYS", "RefinedArc", "refine_best"]
