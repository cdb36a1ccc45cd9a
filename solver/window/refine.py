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
from dataclasses import dataclass

import numpy as np
from scipy.optimize import minimize

from solver.ephemeris.timescales import (
    add_days,
    parse_iso_utc,
    round_to_utc_minute,
    split_jd,
    tdb_jd_to_utc_jd,
    utc_jd_to_iso,
)
from solver.errors import InputError
from solver.time_units import MINUTE_DAYS
from solver.window.best import slot_arc, slots_of
from solver.window.case import Case, with_window
from solver.window.case_bodies import CaseBodies
from solver.window.cell import Arc, select_arc, solve_cell
from solver.window.grid import WindowGrid, compute_window, ranks_before
from solver.window.limits import margins
from solver.window.mass import check_mass_metric
from solver.window.metrics import METRICS, ranking_values

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
    note: str = ""  # how the grid's best arc was chosen when the metric alone did not decide


class _EnoughEvaluations(Exception):
    """Stops SLSQP at its evaluation budget; the best arc within limits seen so far is kept."""


def _value(arc: Arc, metric: str) -> float:
    return float(ranking_values(arc.metrics.get(metric, math.nan), metric))


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
    check_mass_metric(case, metric)
    slots = None
    if revolutions is not None:
        if revolutions != 0 and branch not in (None, "low", "high"):
            raise InputError("branch", branch, "'low' or 'high'")
        slots = slots_of(grid, revolutions, branch)
        if not slots:
            raise InputError(
                "revolutions",
                revolutions,
                f"0 to {case.max_revolutions} (the case's max_revolutions)",
            )
    choice = grid.best_choice(metric, slots=slots)
    if choice is None:
        raise InputError(
            "limits",
            "no arc of the grid within limits",
            "a window or limits that leave at least one arc",
        )
    bodies = CaseBodies.of(case)
    grid_arc = slot_arc(case, bodies, grid, *choice.index)
    if method == "zoom":
        arc, evaluations, message = _zoom(case, bodies, grid_arc, metric, slots)
    else:
        # A metric that is the same for every arc gives SLSQP nothing to descend: it follows
        # the tie-break that chose the grid arc instead.
        objective = metric if choice.separates or choice.decided_by is None else choice.decided_by
        arc, evaluations, message = _slsqp(case, bodies, grid_arc, objective)
    return RefinedArc(
        arc=arc,
        metric=metric,
        grid_arc=grid_arc,
        improvement=_value(grid_arc, metric) - _value(arc, metric),
        evaluations=evaluations,
        message=message,
        note=choice.note,
    )


def _zoom(
    case: Case, bodies: CaseBodies, start: Arc, metric: str, slots: list[int] | None
) -> tuple[Arc, int, str]:
    """Nested grids around ``start``; returns (arc, cells solved, message)."""
    arc = start
    dep, arr = _utc(start.departure_jd_tdb), _utc(start.arrival_jd_tdb)
    dep_window = _window_utc(case.departure_start, case.departure_end)
    arr_window = _window_utc(case.arrival_start, case.arrival_end)
    half_dep, half_arr = case.departure_step_days, case.arrival_step_days
    cells = 0
    while min(half_dep, half_arr) >= ZOOM_FINEST_DAYS:
        # Plus and minus the previous step about the best arc, inside the case's windows, in
        # UTC: the nested grid's dates follow the same rule as every grid's.
        departure = _around(dep, half_dep, dep_window)
        arrival = _around(arr, half_arr, arr_window)
        half_dep, half_arr = half_dep / ZOOM_SUBSTEPS, half_arr / ZOOM_SUBSTEPS
        sub = with_window(case, (*departure, half_dep), (*arrival, half_arr))
        zoom = compute_window(sub)
        cells += zoom.reason.size
        cell = zoom.best_cell(metric, slots=slots)
        if cell is None:
            continue
        candidate = slot_arc(case, bodies, zoom, *cell)
        if candidate.within and ranks_before(candidate.metrics, arc.metrics, metric):
            arc = candidate
            dep, arr = _utc(arc.departure_jd_tdb), _utc(arc.arrival_jd_tdb)
    # Report whole UTC minutes when that keeps the arc within limits and no worse than the grid
    # cell (the last level stepped ~20 s).
    candidate = select_arc(
        solve_cell(
            case,
            round_to_utc_minute(arc.departure_jd_tdb),
            round_to_utc_minute(arc.arrival_jd_tdb),
            bodies,
        ),
        arc.revolutions,
        arc.branch,
    )
    if candidate.within and not ranks_before(start.metrics, candidate.metrics, metric):
        arc = candidate
    return arc, cells, f"nested grids down to the minute ({cells} cells)"


def _utc(jd_tdb: float) -> tuple[float, float]:
    """A JD TDB as a two-part UTC quasi-JD."""
    utc1, utc2 = tdb_jd_to_utc_jd(*split_jd(jd_tdb))
    return float(utc1), float(utc2)


def _window_utc(start: str, end: str) -> tuple[tuple[float, float], tuple[float, float]]:
    (s1, s2), (e1, e2) = parse_iso_utc(start), parse_iso_utc(end)
    return (float(s1), float(s2)), (float(e1), float(e2))


def _around(
    centre: tuple[float, float],
    half_days: float,
    window: tuple[tuple[float, float], tuple[float, float]],
) -> tuple[str, str]:
    """ISO UTC start and end of ``centre`` plus and minus ``half_days``, inside ``window``."""
    lo, hi = window
    start = tuple(float(x) for x in add_days(*centre, -half_days))
    end = tuple(float(x) for x in add_days(*centre, half_days))
    if sum(start) < sum(lo):
        start = lo
    if sum(end) > sum(hi):
        end = hi
    return utc_jd_to_iso(*start, digits=6), utc_jd_to_iso(*end, digits=6)


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
        return np.array(margins(case, bodies, arc.metrics) if arc is not None else [-1e6])

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
    # Round to the whole UTC minute and check the rounded arc, not the optimizer's claim.
    candidate = arc_at(
        np.array(
            [
                round_to_utc_minute(dep0 + float(found[0])) - dep0,
                round_to_utc_minute(arr0 + float(found[1])) - arr0,
            ]
        )
    )
    if (
        candidate is not None
        and candidate.within
        and _value(candidate, metric) <= _value(start, metric)
    ):
        return candidate, len(memo), f"refined to the minute ({note})"
    return start, len(memo), "grid arc kept: " + note


__all__ = ["METHODS", "RefinedArc", "refine_best"]
