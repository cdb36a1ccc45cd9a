"""Grid dates: the one rule that turns a date window into the dates of a grid.

A window is a start and an end date in UTC (ISO 8601 text) and a step in days. Its dates are

    start, start + step, start + 2 step, ...   up to the end,

counted in UTC (calendar arithmetic on ERFA's two-part UTC quasi-Julian dates), and only then
converted, node by node, to TDB for the ephemeris and the Lambert solve. So a window given on
whole UTC days (or whole UTC minutes) has every date on a whole UTC day (minute), and the end
date is a date of the grid whenever the step divides the window (to 1e-9 of a step). Counting in
TDB instead would let the small periodic TDB - UTC difference decide whether the end is kept.

Every part of the engine that makes dates from a window uses this module: the grid
(:func:`solver.window.grid.grid_axes`), its size check (:func:`axis_count`, arithmetic only),
refinement's nested grids and launch periods (through the grid), and surveys' spans
(:func:`utc_plus_days`).

Time of flight
--------------
The TOF of a cell is the elapsed time between its two UTC instants, in days of 86400 SI seconds
(the TT difference: leap seconds count). A grid on whole UTC days therefore has whole-day TOFs.
The Lambert solve uses the TDB epochs at which the positions are taken; the two durations differ
by the periodic TDB - TT term at each end, a few milliseconds at most.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

from solver.ephemeris.timescales import (
    add_days,
    parse_iso_utc,
    tt_jd_to_tdb_jd,
    utc_jd_to_iso,
    utc_jd_to_tt_jd,
)
from solver.errors import InputError

STEP_TOLERANCE = 1e-9
"""A window whose length is within this many steps of a whole number of steps ends on a node."""


@dataclass(frozen=True)
class DateAxis:
    """The dates of one grid axis, in every form the engine needs.

    Attributes
    ----------
    utc1, utc2 : (n,) two-part UTC quasi-JD (midnight day part, fraction of the day)
    tt1, tt2 : (n,) two-part TT JD (for elapsed times, exact to ~1e-16 day part by part)
    jd_tdb : (n,) float64 JD TDB (the engine's epochs; ~20 microsecond resolution)
    """

    utc1: NDArray[np.float64]
    utc2: NDArray[np.float64]
    tt1: NDArray[np.float64]
    tt2: NDArray[np.float64]
    jd_tdb: NDArray[np.float64]

    def __len__(self) -> int:
        return len(self.jd_tdb)


def _parse(text: str, field: str) -> tuple[float, float]:
    jd1, jd2 = parse_iso_utc(text, field)
    return float(jd1), float(jd2)


def _count(span_days: float, step_days: float) -> int:
    if not (math.isfinite(step_days) and step_days > 0):
        raise InputError("step_days", step_days, "a finite number of days > 0")
    if span_days < 0:
        return 0
    return math.floor(span_days / step_days + STEP_TOLERANCE) + 1


def axis_count(start_utc: str, end_utc: str, step_days: float, field: str = "window") -> int:
    """Number of dates of a window, by arithmetic alone (nothing the size of the grid).

    Parameters
    ----------
    start_utc, end_utc : str
        ISO 8601 UTC dates of the window.
    step_days : float
        Step, days (> 0).
    field : str
        Name used in error messages.
    """
    s1, s2 = _parse(start_utc, f"{field} start")
    e1, e2 = _parse(end_utc, f"{field} end")
    return _count((e1 - s1) + (e2 - s2), float(step_days))


def date_axis(start_utc: str, end_utc: str, step_days: float, field: str = "window") -> DateAxis:
    """The dates of a window: start + k * step in UTC, k = 0, 1, ... up to the end.

    When the step divides the window (to :data:`STEP_TOLERANCE` of a step) the last date is the
    end date itself.
    """
    s1, s2 = _parse(start_utc, f"{field} start")
    e1, e2 = _parse(end_utc, f"{field} end")
    span = (e1 - s1) + (e2 - s2)
    n = _count(span, float(step_days))
    offsets = np.minimum(np.arange(n) * float(step_days), span)  # the end, not a hair beyond
    utc1, utc2 = add_days(np.full(n, s1), np.full(n, s2), offsets)
    tt1, tt2 = utc_jd_to_tt_jd(utc1, utc2)
    tdb1, tdb2 = tt_jd_to_tdb_jd(tt1, tt2)
    return DateAxis(
        utc1=np.asarray(utc1, dtype=float),
        utc2=np.asarray(utc2, dtype=float),
        tt1=np.asarray(tt1, dtype=float),
        tt2=np.asarray(tt2, dtype=float),
        jd_tdb=np.asarray(tdb1 + tdb2, dtype=float),
    )


def elapsed_days_between(departures: DateAxis, arrivals: DateAxis) -> NDArray[np.float64]:
    """(n_dep, n_arr) elapsed time from each departure to each arrival date, days (TT)."""
    return (arrivals.tt1[None, :] - departures.tt1[:, None]) + (
        arrivals.tt2[None, :] - departures.tt2[:, None]
    )


def end_note(start_utc: str, end_utc: str, step_days: float, label: str = "window") -> str | None:
    """One sentence when the step does not divide the window, naming the last date it reaches
    instead of the end; None when the end date is a date of the axis."""
    s1, s2 = _parse(start_utc, f"{label} start")
    e1, e2 = _parse(end_utc, f"{label} end")
    span = (e1 - s1) + (e2 - s2)
    n = _count(span, float(step_days))
    if n == 0 or span - (n - 1) * step_days <= STEP_TOLERANCE * step_days:
        return None
    last = utc_plus_days(start_utc, (n - 1) * step_days, digits=0)
    return (
        f"{label}_end {end_utc} is not a whole number of {step_days:g}-day steps after "
        f"{label}_start {start_utc}: the last {label} date is {last}"
    )


def utc_plus_days(utc: str, days: float, *, field: str = "date", digits: int = 6) -> str:
    """An ISO 8601 UTC date plus a number of days (UTC calendar arithmetic), as ISO text.

    The same arithmetic as the grid's dates: ``utc_plus_days("2031-01-01", 45)`` is
    ``"2031-02-15T00:00:00.000000Z"``.
    """
    jd1, jd2 = add_days(*_parse(utc, field), float(days))
    return utc_jd_to_iso(float(jd1), float(jd2), digits=digits)


__all__ = [
    "STEP_TOLERANCE",
    "DateAxis",
    "axis_count",
    "date_axis",
    "elapsed_days_between",
    "end_note",
    "utc_plus_days",
]
