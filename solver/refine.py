"""The best arc off the grid: departure and arrival times to the minute, within limits.

A grid finds the best cell to the nearest grid step; an analyst wants the best arc itself.
:func:`refine_best` starts from the grid's best arc within limits and has two methods:

* ``"zoom"`` (default): nested grids around the best arc so far, each a 9 x 9 grid over plus
  and minus the previous step at a quarter of it, solved by the window engine, until the step is
  under a minute (seven levels from a 5-day grid). Its cost is bounded (a few hundred cells),
  every limit is checked cell by cell, non-smooth metrics (|DLA|) and limits active at the
  optimum are no harder than any other, and the result is never worse than the grid cell.
* ``"slsqp"``: scipy's SLSQP over continuous epochs with the limits as inequality constraints and
  the date windows as bounds, then rounded to the minute and kept only if still within limits
  and no worse. Smooth and precise where no limit binds; its cost grows when one does, so its
  evaluations are capped.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace

import numpy as np
from scipy.optimize import minimize

from solver.case import Case
from solver.errors import InputError
from solver.lambert import BRANCH_NAMES
from solver.timescales import MINUTE_DAYS, jd_tdb_to_utc, round_to_minute_from
from solver.window import (
    METRICS,
    Arc,
    CaseBodies,
    WindowGrid,
    compute_window,
    select_arc,
    solve_cell,
)

METHODS = ("zoom", "slsqp")
ZOOM_SUBSTEPS = 4
"""Zoom grids step a quarter of the previous step, over plus and minus the previous step."""
ZOOM_FINEST_DAYS = MINUTE_DAYS
"""Zooming stops after the level whose step is first below a minute."""
SLSQP_MAX_EVALUATIONS = 400
_FAILED = 1e30  # objective where no arc exists (steers the optimizer back)


@dataclass(frozen=True)
class RefinedArc:
    """The refined best arc and how it was found."""

    arc: Arc
    metric: str
    grid_arc: Arc
    improvement: float  # grid value minus refined value, in the metric's unit
    evaluations: int  # cells or single arcs solved
    message: str


class _EnoughEvaluations(Exception):
    """Stops SLSQP at its evaluation budget; the best arc within limits seen so far is kept."""


def _value(arc: Arc, metric: str) -> float:
    value = arc.metrics.get(metric, math.nan)
    return abs(value) if METRICS[metric].rank_by_magnitude else value


def _slot_arc(
    case: Case, bodies: CaseBodies, dep: float, arr: float, grid: WindowGrid, slot: int
) -> Arc:
    """The arc of a grid slot (its revolutions and branch) between two epochs."""
    return select_arc(
        solve_cell(case, float(dep), float(arr), bodies),
        int(grid.revolutions[slot]),
        BRANCH_NAMES[int(grid.branch[slot])],
    )


def refine_best(
    case: Case,
    grid: WindowGrid,
    metric: str = "c3_km2_s2",
    *,
    revolutions: int | None = None,
    branch: str | None = None,
    method: str = "zoom",
) -> RefinedArc:
    """Refine the grid's best arc within limits by ``metric`` to the minute.

    Parameters
    ----------
    case, grid : Case, WindowGrid
        The case and its solved grid.
    metric : str
        A ``METRICS`` column (DLA is ranked by its magnitude).
    revolutions, branch : optional
        Refine the best arc of this revolution count and branch instead of the overall best.
    method : {"zoom", "slsqp"}
        See the module docstring.

    Raises
    ------
    InputError
        Unknown metric or method, or no arc of the grid within limits.
    """
    if metric not in METRICS:
        raise InputError("metric", metric, "one of " + ", ".join(METRICS))
    if method not in METHODS:
        raise InputError("method", method, "'zoom' or 'slsqp'")
    slots = None
    if revolutions is not None:
        wanted = 0 if revolutions == 0 else {"low": 1, "high": 2}.get(branch or "low")
        if wanted is None:
            raise InputError("branch", branch, "'low' or 'high'")
        slots = [
            k
            for k in range(len(grid.revolutions))
            if grid.revolutions[k] == revolutions and grid.branch[k] == wanted
        ]
        if not slots:
            raise InputError(
                "revolutions",
                revolutions,
                f"0 to {case.max_revolutions} (the case's max_revolutions)",
            )
    within = _only_slots(grid.within, slots)
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
    bodies = CaseBodies.of(case)
    grid_arc = _slot_arc(case, bodies, grid.departure_jd_tdb[i], grid.arrival_jd_tdb[j], grid, k)
    if method == "zoom":
        arc, evaluations, message = _zoom(case, bodies, grid_arc, metric, slots)
    else:
        arc, evaluations, message = _slsqp(case, bodies, grid_arc, metric)
    return RefinedArc(
        arc=arc,
        metric=metric,
        grid_arc=grid_arc,
        improvement=_value(grid_arc, metric) - _value(arc, metric),
        evaluations=evaluations,
        message=message,
    )


def _only_slots(within: np.ndarray, slots: list[int] | None) -> np.ndarray:
    if slots is None:
        return within
    keep = np.zeros(within.shape[-1], dtype=bool)
    keep[slots] = True
    return within & keep


def _zoom(
    case: Case, bodies: CaseBodies, start: Arc, metric: str, slots: list[int] | None
) -> tuple[Arc, int, str]:
    """Nested grids around ``start``; returns (arc, cells solved, message)."""
    arc, score = start, _value(start, metric)
    dep, arr = start.departure_jd_tdb, start.arrival_jd_tdb
    half_dep, half_arr = case.departure_step_days, case.arrival_step_days
    cells = 0
    while min(half_dep, half_arr) >= ZOOM_FINEST_DAYS:
        d0 = max(dep - half_dep, case.departure_start_jd_tdb)
        d1 = min(dep + half_dep, case.departure_end_jd_tdb)
        a0 = max(arr - half_arr, case.arrival_start_jd_tdb)
        a1 = min(arr + half_arr, case.arrival_end_jd_tdb)
        half_dep, half_arr = half_dep / ZOOM_SUBSTEPS, half_arr / ZOOM_SUBSTEPS
        # Only the dates differ from the validated case, and they lie inside its windows.
        sub = replace(
            case,
            departure_start=str(jd_tdb_to_utc(d0)),
            departure_end=str(jd_tdb_to_utc(d1)),
            arrival_start=str(jd_tdb_to_utc(a0)),
            arrival_end=str(jd_tdb_to_utc(a1)),
            departure_start_jd_tdb=d0,
            departure_end_jd_tdb=d1,
            arrival_start_jd_tdb=a0,
            arrival_end_jd_tdb=a1,
            departure_step_days=half_dep,
            arrival_step_days=half_arr,
        )
        zoom = compute_window(sub)
        cells += zoom.reason.size
        zoom.within = _only_slots(zoom.within, slots)
        cell = zoom.best_cell(metric)
        if cell is None:
            continue
        zi, zj, zk = cell
        candidate = _slot_arc(
            case, bodies, zoom.departure_jd_tdb[zi], zoom.arrival_jd_tdb[zj], zoom, zk
        )
        if candidate.within and _value(candidate, metric) < score:
            arc, score = candidate, _value(candidate, metric)
            dep, arr = arc.departure_jd_tdb, arc.arrival_jd_tdb
    # Report whole minutes from the grid's dates when that keeps the arc within limits and
    # no worse than the grid cell (the last level stepped ~20 s).
    candidate = select_arc(
        solve_cell(
            case,
            round_to_minute_from(start.departure_jd_tdb, arc.departure_jd_tdb),
            round_to_minute_from(start.arrival_jd_tdb, arc.arrival_jd_tdb),
            bodies,
        ),
        arc.revolutions,
        arc.branch,
    )
    if candidate.within and _value(candidate, metric) <= _value(start, metric):
        arc = candidate
    return arc, cells, f"nested grids down to the minute ({cells} cells)"


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


def _slsqp(case: Case, bodies: CaseBodies, start: Arc, metric: str) -> tuple[Arc, int, str]:
    """SLSQP over continuous epochs from ``start``; returns (arc, arcs solved, message)."""
    dep0, arr0 = start.departure_jd_tdb, start.arrival_jd_tdb
    memo: dict[tuple[float, float], Arc | None] = {}

    def arc_at(x: np.ndarray) -> Arc | None:
        key = (float(x[0]), float(x[1]))
        if key not in memo:
            dep, arr = dep0 + key[0], arr0 + key[1]
            arc = (
                select_arc(solve_cell(case, dep, arr, bodies), start.revolutions, start.branch)
                if arr > dep
                else None
            )
            memo[key] = arc if arc is not None and arc.ok else None
        return memo[key]

    def objective(x):
        if len(memo) >= SLSQP_MAX_EVALUATIONS:
            raise _EnoughEvaluations
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
    try:
        result = minimize(
            objective,
            np.zeros(2),
            method="SLSQP",
            bounds=bounds,
            constraints=[{"type": "ineq", "fun": constraints}],
            options={"ftol": 1e-12, "maxiter": 100, "eps": step_days},
        )
        found, note = np.asarray(result.x), str(result.message)
    except _EnoughEvaluations:
        seen = [(x, a) for x, a in memo.items() if a is not None and a.within]
        found = (
            np.asarray(min(seen, key=lambda item: _value(item[1], metric))[0])
            if seen
            else np.zeros(2)
        )
        note = f"stopped after {SLSQP_MAX_EVALUATIONS} evaluations"
    # Round to the minute and check the rounded arc, not the optimizer's claim.
    candidate = arc_at(np.round(found / MINUTE_DAYS) * MINUTE_DAYS)
    if (
        candidate is not None
        and candidate.within
        and _value(candidate, metric) <= _value(start, metric)
    ):
        return candidate, len(memo), f"refined to the minute ({note})"
    return start, len(memo), "grid arc kept: " + note


__all__ = ["METHODS", "MINUTE_DAYS", "RefinedArc", "refine_best"]
