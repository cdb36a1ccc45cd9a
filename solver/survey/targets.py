"""A target's cases: the base case with the target replaced, over a year or around a best arc.

:func:`target_case` builds the case of one target over one span of departure dates, for the
survey's scan::

    departure dates   [t0, t1)            (t1 minus one minute is the last date)
    arrival dates     [t0 + tof_min, t1 + tof_max]
    steps             the base case's, or the survey's coarse step

where tof_min/tof_max are the base case's ``limits.tof_min_days`` (0 when absent) and
``limits.tof_max_days`` (or the survey's ``tof_max_days``, required one way or the other).
:func:`case_for_target` builds a window around a target's best arc, for the dashboard's survey
page. Everything but the target and the dates comes from the base case (bodies, orbits, limits,
transfer settings, ephemeris), and every case goes through
``solver.window.case.case_from_dict``, so it is validated like a case file. A target may be an
:class:`ElementBody`, a row of a survey's results, a row of an element CSV or a ``[[bodies]]``
table (:func:`target_body`).
"""

from __future__ import annotations

import copy
import math
from collections.abc import Mapping
from typing import Any

from solver.ephemeris.element_bodies import ElementBody
from solver.ephemeris.element_input import ELEMENT_FIELDS, element_body
from solver.errors import InputError
from solver.time_units import MINUTE_DAYS
from solver.window.case import Case, case_from_dict, element_body_dict, to_toml_dict
from solver.window.dates import utc_plus_days


def target_body(target: Any, registry=None) -> ElementBody:
    """An :class:`ElementBody` from what a caller holds for a target.

    Parameters
    ----------
    target : ElementBody, mapping or pandas Series
        An element body; a row of a survey's results (``target`` plus ``target_*`` element
        columns); a row of an element CSV (its column names, values as text or numbers); or a
        ``[[bodies]]`` table.
    registry : BodyRegistry, optional
        Where the central body is looked up (default: the built-in registry).
    """
    if isinstance(target, ElementBody):
        return target
    if hasattr(target, "to_dict") and not isinstance(target, Mapping):
        target = target.to_dict()
    if not isinstance(target, Mapping):
        raise InputError("target", type(target).__name__, "an ElementBody or a row of elements")
    if "target_semi_major_axis_km" in target:
        values = {
            "epoch_jd_tdb": target["target_epoch_jd_tdb"],
            "central_body": target["target_central_body"],
            "frame": target["target_frame"],
            "semi_major_axis_km": target["target_semi_major_axis_km"],
            "eccentricity": target["target_eccentricity"],
            "inclination_deg": target["target_inclination_deg"],
            "raan_deg": target["target_raan_deg"],
            "arg_periapsis_deg": target["target_arg_periapsis_deg"],
            "mean_anomaly_deg": target["target_mean_anomaly_deg"],
            "gm_km3_s2": target.get("target_gm_km3_s2"),
            "radius_km": target.get("target_radius_km"),
        }
        name = target["target"]
    else:
        values = {str(k).strip().lower(): v for k, v in target.items()}
        name = values.pop("name", None)
        unknown = sorted(set(values) - _ELEMENT_ARGUMENTS)
        if unknown:
            raise InputError(
                f"target {unknown[0]}",
                values[unknown[0]],
                "a known element key: " + ", ".join(sorted(_ELEMENT_ARGUMENTS)),
            )
    kwargs = {k: v for k, v in values.items() if not _missing(v)}
    return element_body(name, registry=registry, field_prefix="target ", **kwargs)


_ELEMENT_ARGUMENTS = ELEMENT_FIELDS - {"name"}


def _missing(value: Any) -> bool:
    if value is None:
        return True
    if isinstance(value, str):
        return not value.strip()
    return isinstance(value, float) and math.isnan(value)


# ---------------------------------------------------------------------------------------------
# Cases of one target


def case_dict(base: Case | Mapping[str, Any]) -> dict[str, Any]:
    """A case as a TOML-shaped dict (``solver.window.case.to_toml_dict``), or a copy of one."""
    return to_toml_dict(base) if isinstance(base, Case) else copy.deepcopy(dict(base))


def _case_with_target(
    base_raw: dict[str, Any],
    body: ElementBody,
    window: dict[str, Any],
    title: str,
    tof_max_days: float | None = None,
) -> Case:
    """The base case with ``body`` as its target and this window (validated)."""
    raw = copy.deepcopy(base_raw)
    case = raw["case"]
    old_target = str(case["target_body"]).strip().lower()
    needed = {str(case["departure_body"]).strip().lower(), str(case["central_body"]).lower()}
    needed |= {str(b.get("central_body", "sun")).strip().lower() for b in raw.get("bodies", [])}
    bodies = []
    for entry in raw.get("bodies", []):
        name = str(entry.get("name", "")).strip().lower()
        if name == body.name.lower() or (name == old_target and name not in needed):
            continue  # the catalogue's body replaces a namesake and the base's own target
        bodies.append(entry)
    bodies.append(element_body_dict(body))
    raw["bodies"] = bodies
    case["target_body"] = body.name
    case["title"] = title
    case.pop("description", None)
    raw["window"] = window
    if tof_max_days is not None:
        raw.setdefault("limits", {})["tof_max_days"] = float(tof_max_days)
    return case_from_dict(raw)


def tof_bounds(base_raw: dict[str, Any], tof_max_days: float | None) -> tuple[float, float]:
    """(tof_min, tof_max) of a survey, days: the base case's limits, ``tof_max_days`` first."""
    limits = base_raw.get("limits", {})
    tof_min = float(limits.get("tof_min_days", 0.0) or 0.0)
    tof_max = tof_max_days if tof_max_days is not None else limits.get("tof_max_days")
    if tof_max is None:
        raise InputError(
            "limits.tof_max_days",
            "(missing)",
            "a tof_max_days in the base case's [limits] or --tof-max-days: it bounds the "
            "arrival dates of every target",
        )
    return tof_min, float(tof_max)


def target_case(
    base: Case | Mapping[str, Any],
    target: Any,
    span_start_utc: str,
    span_end_utc: str,
    *,
    coarse_step_days: float | None = None,
    tof_max_days: float | None = None,
) -> Case:
    """The case of one target over departures in [span_start, span_end).

    Parameters
    ----------
    base : Case or TOML-shaped dict
        The survey's base case (``solver.window.case.to_toml_dict`` form for a dict).
    target : ElementBody or row of elements (see :func:`target_body`)
        Replaces the base case's target.
    span_start_utc, span_end_utc : str
        ISO UTC dates; departures from the start to one minute before the end.
    coarse_step_days : float, optional
        Departure and arrival step, days (default: the base case's steps).
    tof_max_days : float, optional
        Overrides the base case's ``limits.tof_max_days`` (required if the base has none).

    Returns
    -------
    Case
        Arrivals from span_start + tof_min to span_end + tof_max; everything else from the base.
    """
    raw = case_dict(base)
    body = target_body(target)
    tof_min, tof_max = tof_bounds(raw, tof_max_days)
    base_window = raw.get("window", {})
    dep_step = coarse_step_days or base_window.get("departure_step_days", 1.0)
    arr_step = coarse_step_days or base_window.get("arrival_step_days", 1.0)
    # Spans follow the grid's date rule (UTC calendar arithmetic, solver.window.dates).
    last_departure = utc_plus_days(span_end_utc, -MINUTE_DAYS)
    window = {
        "departure_start": span_start_utc,
        "departure_end": last_departure,
        "departure_step_days": float(dep_step),
        "arrival_start": utc_plus_days(span_start_utc, tof_min),
        "arrival_end": utc_plus_days(span_end_utc, tof_max),
        "arrival_step_days": float(arr_step),
    }
    title = f"{body.name}, departures {span_start_utc} to {span_end_utc}"
    return _case_with_target(raw, body, window, title, tof_max_days)


def case_for_target(
    base_case: Case | Mapping[str, Any],
    target: Any,
    best_departure_jd: float,
    best_arrival_jd: float,
    *,
    departure_half_width_days: float = 60.0,
    arrival_half_width_days: float = 90.0,
    step_days: float = 1.0,
    tof_max_days: float | None = None,
) -> Case:
    """A window case centred on a target's best arc (for the dashboard's survey page).

    Parameters
    ----------
    base_case : Case or TOML-shaped dict
        The survey's base case (:func:`results_base_case` reads it from a results file).
    target : ElementBody, results row, CSV row or ``[[bodies]]`` table
        The target (see :func:`target_body`); a row of :func:`load_results` works as is.
    best_departure_jd, best_arrival_jd : float
        JD TDB of the best arc (the results' ``departure_jd_tdb`` / ``arrival_jd_tdb``).
    departure_half_width_days, arrival_half_width_days : float
        The window spans the best dates plus and minus these, days (default 60 and 90: a
        121 x 181 map at the default step, a few hundredths of a second to solve).
    step_days : float
        Departure and arrival step, days.
    tof_max_days : float, optional
        The survey's TOF bound if it overrode the base case's (results metadata ``settings``).

    Returns
    -------
    Case
        The base case's bodies, orbits, limits and transfer settings with the target replaced.

    Examples
    --------
    >>> frame = load_results("survey.parquet")                     # doctest: +SKIP
    >>> row = frame.iloc[0]                                         # doctest: +SKIP
    >>> case = case_for_target(results_base_case("survey.parquet"), row,
    ...                        row.departure_jd_tdb, row.arrival_jd_tdb)  # doctest: +SKIP
    >>> grid = compute_window(case)                                 # doctest: +SKIP
    """
    from solver.ephemeris.timescales import jd_tdb_to_utc

    dep, arr = float(best_departure_jd), float(best_arrival_jd)
    for name, value in (("best_departure_jd", dep), ("best_arrival_jd", arr)):
        if not math.isfinite(value):
            raise InputError(name, value, "a finite JD TDB (the target has no best arc)")
    if not arr > dep:
        raise InputError("best_arrival_jd", arr, f"after best_departure_jd ({dep})")
    for name, value in (
        ("departure_half_width_days", departure_half_width_days),
        ("arrival_half_width_days", arrival_half_width_days),
    ):
        if not (math.isfinite(value) and value >= 0):
            raise InputError(name, value, ">= 0 days")
    raw = case_dict(base_case)
    body = target_body(target)

    def utc(jd: float, days: float) -> str:
        # The arc's UTC date plus whole days in UTC, the grid's date rule (solver.window.dates).
        return utc_plus_days(str(jd_tdb_to_utc(jd, digits=6)), days, digits=0)

    window = {
        "departure_start": utc(dep, -departure_half_width_days),
        "departure_end": utc(dep, departure_half_width_days),
        "departure_step_days": float(step_days),
        "arrival_start": (
            utc(arr, -arrival_half_width_days)
            if arr - arrival_half_width_days > dep - departure_half_width_days
            else utc(dep, -departure_half_width_days)
        ),
        "arrival_end": utc(arr, arrival_half_width_days),
        "arrival_step_days": float(step_days),
    }
    title = f"{body.name}: window around the survey's best arc"
    return _case_with_target(raw, body, window, title, tof_max_days)


__all__ = [
    "case_dict",
    "case_for_target",
    "target_body",
    "target_case",
    "tof_bounds",
]
