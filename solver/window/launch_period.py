"""Launch periods: the run of consecutive departure days one mission must cover.

A mission cannot count on leaving on its single best day; it must be able to leave on any of L
consecutive days. The launch vehicle then has to deliver the largest C3 of those days, and the
mission gets the smallest delivered mass of those days. This module places the period (its first
day) and, for a fixed arrival date, that date, so that the worst day is as good as possible: by
default the largest C3 over the period is as small as possible; with ``metric=
"delivered_mass_kg"`` the smallest delivered mass over the period is as large as possible (any
ranking metric works alike: the worst day by its ranking, lowest best):

* ``"fixed-arrival"``: every day of the period aims at one arrival date (a single arrival, as
  for an orbit insertion planned around one approach geometry); the arrival date is chosen on
  the grid, then refined continuously.
* ``"free-arrival"``: each day flies its own best arrival date.

Every day's arc meets every limit of the case (the limits table of
:mod:`solver.window.limits`: C3, |DLA|, arrival v∞, TOF, delivered mass, clearing the central
body, the launch site's reach), so the period is flyable on each of its days; the largest C3 and
|DLA| and the smallest delivered mass over the period are reported. When no
placement of L days has an arc within limits on every day, the error says how long the longest
such run of days is.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from numpy.lib.stride_tricks import sliding_window_view
from scipy.optimize import minimize_scalar

from solver.ephemeris.timescales import round_to_utc_minute
from solver.errors import InputError
from solver.time_units import MINUTE_DAYS
from solver.window.case import Case
from solver.window.case_bodies import CaseBodies
from solver.window.cell import Arc, solve_cell
from solver.window.grid import compute_window
from solver.window.limits import LIMIT_RULES
from solver.window.mass import check_mass_metric
from solver.window.metrics import RANKING_METRICS, ranking_values
from solver.window.outputs import case_outputs

STRATEGIES = ("fixed-arrival", "free-arrival")
_NO_ARC = 1e30


@dataclass(frozen=True)
class PeriodDay:
    """One departure day of a launch period and the arc it flies."""

    departure_jd_tdb: float
    arrival_jd_tdb: float
    c3_km2_s2: float
    dla_deg: float
    rla_deg: float
    vinf_arrival_km_s: float
    tof_days: float
    revolutions: int
    branch: str
    injected_mass_kg: float = math.nan
    delivered_mass_kg: float = math.nan
    vinf_departure_km_s: float = math.nan


@dataclass(frozen=True)
class LaunchPeriod:
    """The best placement of a launch period of ``length_days`` consecutive days."""

    length_days: int
    strategy: str
    open_jd_tdb: float
    close_jd_tdb: float
    arrival_jd_tdb: float | None  # the common arrival date for "fixed-arrival"
    max_c3_km2_s2: float
    max_abs_dla_deg: float
    meets_c3_limit: bool | None
    meets_dla_limit: bool | None
    days: tuple[PeriodDay, ...]
    metric: str = "c3_km2_s2"
    min_delivered_mass_kg: float = math.nan  # NaN when the case has no spacecraft mass
    meets_mass_limit: bool | None = None


def _feasibility_case(case: Case) -> Case:
    """The case with daily departures (every limit kept: each day must meet all of them)."""
    return case.with_changes(**{"window.departure_step_days": 1.0})


def _longest_run(feasible: np.ndarray) -> int:
    """Length of the longest run of True in a 1-D boolean array."""
    best = run = 0
    for ok in feasible:
        run = run + 1 if ok else 0
        best = max(best, run)
    return best


def _limits_text(case: Case) -> str:
    rules = [
        f"{rule.label} {'<=' if rule.bound == 'max' else '>='} {rule.limit(case.limits):g}"
        + (f" {rule.unit}" if rule.unit else "")
        for rule in LIMIT_RULES
        if rule.limit(case.limits) is not None
    ]
    return ", ".join(rules) if rules else "no limits but clearing the central body"


def _score(arc: Arc | None, metric: str) -> float:
    """How bad an arc is for ``metric`` (lower is better; no arc is worst of all)."""
    if arc is None:
        return math.inf
    value = float(ranking_values(arc.metrics[metric], metric))
    return value if math.isfinite(value) else math.inf


def _best_arc(arcs: list[Arc], metric: str = "c3_km2_s2") -> Arc | None:
    """The feasible arc best by ``metric`` among a cell's arcs, or None."""
    feasible = [a for a in arcs if a.ok and a.within and math.isfinite(_score(a, metric))]
    return min(feasible, key=lambda a: _score(a, metric)) if feasible else None


def _best_arrival(c3_of_arrival, grid_arrival_jd: float, step_days: float) -> float:
    """The arrival date, to the minute, within a grid step of ``grid_arrival_jd`` that minimizes
    ``c3_of_arrival``; the grid date itself if the continuous search does not beat it."""

    def bounded(arrival: float) -> float:
        # No arc within limits on some day: a large finite value steers the search away
        # (infinities give the bounded search inf - inf).
        return min(c3_of_arrival(arrival), _NO_ARC)

    result = minimize_scalar(
        bounded,
        bounds=(grid_arrival_jd - step_days, grid_arrival_jd + step_days),
        method="bounded",
        options={"xatol": MINUTE_DAYS},
    )
    arrival = round_to_utc_minute(float(result.x))
    return (
        arrival if c3_of_arrival(arrival) <= c3_of_arrival(grid_arrival_jd) else (grid_arrival_jd)
    )


def _day(arc: Arc) -> PeriodDay:
    m = arc.metrics
    return PeriodDay(
        arc.departure_jd_tdb,
        arc.arrival_jd_tdb,
        m["c3_km2_s2"],
        m["dla_deg"],
        m["rla_deg"],
        m["vinf_arrival_km_s"],
        arc.tof_days,
        arc.revolutions,
        arc.branch,
        m["injected_mass_kg"],
        m["delivered_mass_kg"],
        m["vinf_departure_km_s"],
    )


def launch_period(
    case: Case, length_days: int, strategy: str = "fixed-arrival", metric: str = "c3_km2_s2"
) -> LaunchPeriod:
    """Place a launch period of ``length_days`` days so that its worst day is as good as it can be:
    the largest C3 as small as possible (default), or by ``metric`` (``"delivered_mass_kg"``:
    the smallest delivered mass as large as possible).

    Parameters
    ----------
    case : Case
        The case; its departure window is scanned day by day, its arrival window on its own
        step.
    length_days : int
        Consecutive departure days the mission must cover (1 to the window's length).
    strategy : {"fixed-arrival", "free-arrival"}
        One arrival date for the whole period, or each day's own best arrival.
    metric : str
        One of ``RANKING_METRICS``; each day flies its best arc by it, and the period's worst day
        by it is made as good as possible.

    Raises
    ------
    InputError
        Bad length or strategy, a case without a launch (a transfer that starts with a burn:
        :mod:`solver.window.outputs`), or no placement where every day has an arc within limits.
    """
    if strategy not in STRATEGIES:
        raise InputError("strategy", strategy, "'fixed-arrival' or 'free-arrival'")
    if metric not in RANKING_METRICS:
        raise InputError("metric", metric, "one of " + ", ".join(RANKING_METRICS))
    check_mass_metric(case, metric)
    case_outputs(case).check_launch_periods(case)
    feasible_case = _feasibility_case(case)
    grid = compute_window(feasible_case)
    n_days = len(grid.departure_jd_tdb)
    if (
        isinstance(length_days, bool)
        or int(length_days) != length_days
        or not (1 <= length_days <= n_days)
    ):
        raise InputError(
            "--days",
            length_days,
            f"a whole number of days from 1 to {n_days} (the departure window)",
        )
    length_days = int(length_days)
    bodies = CaseBodies.of(feasible_case)
    # How bad each cell's best arc is by the metric (lower is better; C3 by default); a cell
    # outside limits, or without the metric (no mass), is not a feasible day.
    bad = ranking_values(grid.best_values(metric, by=metric), metric)
    c3 = np.where(grid.cell_within() & np.isfinite(bad), bad, np.inf)

    if strategy == "fixed-arrival":
        worst = sliding_window_view(c3, length_days, axis=0).max(axis=-1)  # (starts, n_arr)
        if not np.isfinite(worst).any():
            longest = max(_longest_run(np.isfinite(c3[:, j])) for j in range(c3.shape[1]))
            raise InputError(
                "--days",
                length_days,
                f"at most {longest} days: the longest run of departure days that one arrival "
                f"date serves within every limit of the case ({_limits_text(case)})",
            )
        start, j = (int(k) for k in np.unravel_index(int(np.argmin(worst)), worst.shape))
        dep = grid.departure_jd_tdb[start : start + length_days]
        arr0 = float(grid.arrival_jd_tdb[j])

        def period_max(arrival: float) -> float:
            arcs = [_best_arc(solve_cell(feasible_case, d, arrival, bodies), metric) for d in dep]
            return max(_score(a, metric) for a in arcs)

        arrival = _best_arrival(period_max, arr0, feasible_case.arrival_step_days)
        arcs = [_best_arc(solve_cell(feasible_case, d, arrival, bodies), metric) for d in dep]
        fixed_arrival: float | None = arrival
    else:
        per_day = c3.min(axis=1)
        worst = sliding_window_view(per_day, length_days).max(axis=-1)
        if not np.isfinite(worst).any():
            raise InputError(
                "--days",
                length_days,
                f"at most {_longest_run(np.isfinite(per_day))} days: the longest run of "
                f"departure days with an arc within every limit of the case "
                f"({_limits_text(case)})",
            )
        start = int(np.argmin(worst))
        dep = grid.departure_jd_tdb[start : start + length_days]
        arcs = []
        step = feasible_case.arrival_step_days
        for i, d in enumerate(dep, start=int(start)):
            arr0 = float(grid.arrival_jd_tdb[int(np.argmin(c3[i]))])

            def day_score(arrival: float, d=d) -> float:
                return _score(
                    _best_arc(solve_cell(feasible_case, d, arrival, bodies), metric), metric
                )

            arrival = _best_arrival(day_score, arr0, step)
            arcs.append(_best_arc(solve_cell(feasible_case, d, arrival, bodies), metric))
        fixed_arrival = None

    # Every day flies an arc within every limit: the grid placed the period on such days and
    # the continuous arrival search only moves where that still holds (infinite C3 otherwise).
    if any(a is None or not a.within for a in arcs):
        raise RuntimeError("launch period: a day without an arc within limits was placed")
    days = tuple(_day(a) for a in arcs if a is not None)
    max_c3 = max(d.c3_km2_s2 for d in days)
    max_dla = max(abs(d.dla_deg) for d in days)
    min_mass = min(d.delivered_mass_kg for d in days)
    lim = case.limits
    return LaunchPeriod(
        length_days=length_days,
        strategy=strategy,
        open_jd_tdb=float(dep[0]),
        close_jd_tdb=float(dep[-1]),
        arrival_jd_tdb=fixed_arrival,
        max_c3_km2_s2=max_c3,
        max_abs_dla_deg=max_dla,
        meets_c3_limit=None if lim.c3_max_km2_s2 is None else max_c3 <= lim.c3_max_km2_s2,
        meets_dla_limit=None if lim.dla_max_deg is None else max_dla <= lim.dla_max_deg,
        days=days,
        metric=metric,
        min_delivered_mass_kg=min_mass,
        meets_mass_limit=None
        if lim.delivered_mass_min_kg is None
        else bool(min_mass >= lim.delivered_mass_min_kg),
    )


__all__ = ["STRATEGIES", "LaunchPeriod", "PeriodDay", "launch_period"]
