"""Surveys: many targets scanned over many years, each ranked by its best arc within limits.

A survey takes a base case (departure body, central body, orbits, limits, transfer, coarse steps)
and a catalogue of targets defined by orbital elements, and for every target and every year of
departure dates builds the target's case, solves its window on a coarse grid, refines the best
arc within limits off the grid, and keeps one row per target and year. The final table keeps
each target's best row over the years, ranked by the chosen metric, targets with an arc within
limits first. Targets with no arc within limits are kept with the reason.

Refinement (``SurveySettings.refine``):

* ``"zoom"`` (default) and ``"slsqp"``: the two methods of :func:`solver.window.refine.refine_best`
  (nested grids down to under a minute, bounded cost, limits checked cell by cell; or SLSQP,
  continuous but costlier when a limit binds).
* ``"none"``: the coarse grid's best cell.

Work is split into **chunks**: a block of consecutive targets times one year. A chunk is a plain
function of plain inputs (:func:`scan_chunk`: the base case as a TOML-shaped dict, the targets as
dicts, the year's dates, the settings as a dict), so it pickles in a few kilobytes and gives the
same numbers in this process and on any worker of a Dask cluster. Running chunks and keeping
their files is :mod:`solver.survey.store` and :mod:`solver.survey.cluster`; this module is numbers
only.

Modules: :mod:`solver.survey.targets` (a target's cases), :mod:`solver.survey.results` (row
schema, ranking, reading results), this one (settings, scanning, planning),
:mod:`solver.survey.store` (chunk files) and :mod:`solver.survey.cluster` (running a plan).

For the dashboard's survey page: :func:`load_results` reads a results file (ranked, one row per
target) and :func:`case_for_target` builds a window case around a target's best arc, ready for
``solver.window.compute_window``; both are importable from here.
"""

from __future__ import annotations

import copy
import math
from collections.abc import Mapping, Sequence
from dataclasses import asdict, dataclass, field
from typing import Any

from solver import ENGINE_VERSION
from solver.ephemeris.bodies import default_registry
from solver.ephemeris.element_bodies import ElementBody
from solver.errors import InputError
from solver.survey.results import (
    ARC_SCHEMA,
    STATUS_ERROR,
    STATUS_NO_ARC,
    STATUS_OUTSIDE,
    STATUS_WITHIN,
)
from solver.survey.targets import case_dict, target_case, tof_bounds
from solver.window.best import slot_arc
from solver.window.case import Case, to_toml_dict
from solver.window.case_bodies import CaseBodies
from solver.window.cell import Arc
from solver.window.grid import check_grid_size, compute_window
from solver.window.limits import breach_text
from solver.window.metrics import METRICS, RANKING_METRICS, ranking_values
from solver.window.provenance import case_hash

SURVEY_FORMAT = 1
"""Version of the row schema and of the chunk key; bump it when either changes."""

YEAR_MIN, YEAR_MAX = 1800, 2199
"""Departure years a survey accepts (DE423 covers 1799-12-16 to 2200-02-01; arrivals must fit)."""

DEFAULT_TARGETS_PER_CHUNK = 20
"""Under a second of work per chunk on one core (`arcwindow bench --survey` measures the cost per
target-year; docs/cluster.md): long enough that Dask's ~1 ms per task is noise, short enough to
balance load and to lose little when a worker dies."""

REFINE_MODES = ("zoom", "slsqp", "none")

# ---------------------------------------------------------------------------------------------
# Settings and spans


@dataclass(frozen=True)
class SurveySettings:
    """How every target-year is scanned (plain values: they travel to workers as a dict).

    Attributes
    ----------
    metric : str
        What "best" minimizes, one of ``solver.window.RANKING_METRICS`` (DLA by magnitude).
    coarse_step_days : float or None
        Departure and arrival grid step, days; None keeps the base case's steps.
    tof_max_days : float or None
        Longest time of flight, days; overrides the base case's ``limits.tof_max_days`` (one of
        the two is required: it bounds the arrival dates).
    refine : {"zoom", "slsqp", "none"}
        How each target-year's best grid arc is refined (see the module docstring).
    max_cells : int or None
        Cell-arc cap of one target-year grid (``solver.window.max_cell_arcs``).
    """

    metric: str = "c3_km2_s2"
    coarse_step_days: float | None = None
    tof_max_days: float | None = None
    refine: str = "zoom"
    max_cells: int | None = None

    def __post_init__(self) -> None:
        if self.refine not in REFINE_MODES:
            raise InputError("--refine", self.refine, "one of " + ", ".join(REFINE_MODES))
        if self.metric not in RANKING_METRICS:
            raise InputError("--metric", self.metric, "one of " + ", ".join(RANKING_METRICS))
        if self.coarse_step_days is not None and not (
            math.isfinite(self.coarse_step_days) and 1.0 / 1440.0 <= self.coarse_step_days <= 3650
        ):
            raise InputError(
                "--coarse-step-days", self.coarse_step_days, "a step from 1 minute to 3650 days"
            )
        if self.tof_max_days is not None and not (
            math.isfinite(self.tof_max_days) and 0 < self.tof_max_days <= 1e5
        ):
            raise InputError("--tof-max-days", self.tof_max_days, "0 to 100000 days")


Span = tuple[str, str]
"""A year of departure dates: (start, end) as ISO UTC dates, the end excluded."""


def parse_years(text: str | tuple[int, int]) -> tuple[int, int]:
    """``"2031-2045"`` (or ``"2031"``) -> (2031, 2045), both years included."""
    accepted = (
        f"YEAR or YEAR1-YEAR2 with {YEAR_MIN} <= YEAR1 <= YEAR2 <= {YEAR_MAX}, e.g. 2031-2045"
    )
    if isinstance(text, tuple):
        first, last = text
    else:
        parts = str(text).strip().split("-")
        try:
            if len(parts) == 1:
                first = last = int(parts[0])
            elif len(parts) == 2:
                first, last = int(parts[0]), int(parts[1])
            else:
                raise ValueError
        except ValueError:
            raise InputError("--years", text, accepted) from None
    if not (YEAR_MIN <= first <= last <= YEAR_MAX):
        shown = f"{first}-{last}" if isinstance(text, tuple) else text
        raise InputError("--years", shown, accepted)
    return int(first), int(last)


def year_spans(first: int, last: int) -> tuple[Span, ...]:
    """One span per calendar year: ("YYYY-01-01", "YYYY+1-01-01")."""
    return tuple((f"{y:04d}-01-01", f"{y + 1:04d}-01-01") for y in range(first, last + 1))


# ---------------------------------------------------------------------------------------------
# Scanning


def _empty_arc_columns() -> dict[str, Any]:
    out: dict[str, Any] = {}
    for name, dtype in ARC_SCHEMA:
        out[name] = "" if dtype == "str" else (-1 if dtype == "int64" else math.nan)
    return out


def _arc_columns(arc: Arc) -> dict[str, Any]:
    from solver.ephemeris.timescales import jd_tdb_to_utc

    m = arc.metrics
    return {
        "departure_utc": str(jd_tdb_to_utc(arc.departure_jd_tdb, digits=0)),
        "arrival_utc": str(jd_tdb_to_utc(arc.arrival_jd_tdb, digits=0)),
        "departure_jd_tdb": float(arc.departure_jd_tdb),
        "arrival_jd_tdb": float(arc.arrival_jd_tdb),
        "tof_days": float(arc.tof_days),
        "revolutions": int(arc.revolutions),
        "branch": arc.branch,
        "transfer_type": "I" if arc.transfer_angle_deg < 180.0 else "II",
        **{name: float(m[name]) for name, _ in ARC_SCHEMA[8:]},
    }


def _target_columns(body: ElementBody) -> dict[str, Any]:
    return {
        "target_central_body": body.central_body,
        "target_frame": body.frame,
        "target_epoch_jd_tdb": body.epoch_jd_tdb,
        "target_semi_major_axis_km": body.semi_major_axis_km,
        "target_eccentricity": body.eccentricity,
        "target_inclination_deg": body.inclination_deg,
        "target_raan_deg": body.raan_deg,
        "target_arg_periapsis_deg": body.arg_periapsis_deg,
        "target_mean_anomaly_deg": body.mean_anomaly_deg,
        "target_gm_km3_s2": body.gm_km3_s2,
        "target_radius_km": body.radius_km,
    }


def scan_target(
    base: Case | Mapping[str, Any],
    body: ElementBody,
    span: Span,
    settings: SurveySettings | Mapping[str, Any] = SurveySettings(),
) -> dict[str, Any]:
    """One row: a target's best arc with departures in one span (see :data:`SPAN_SCHEMA`).

    The coarse grid's best arc within limits by ``settings.metric`` is refined off the grid.
    With no arc within limits, the row holds the closest arc (best by the metric among the
    solved arcs whose TOF lies within the TOF limits) and the limits it breaks; with no arc at
    all, or a case that cannot be built, the row says why. A target is never dropped.
    """
    from solver.window.refine import refine_best

    if isinstance(settings, Mapping):
        settings = SurveySettings(**settings)
    metric = settings.metric
    row: dict[str, Any] = {
        "target": body.name,
        "status": STATUS_ERROR,
        "within_limits": False,
        "reason": "",
        "metric": metric,
        "metric_value": math.nan,
        **_empty_arc_columns(),
        "grid_metric_value": math.nan,
        "refined": False,
        "cells_within": 0,
        "span_start_utc": span[0],
        "span_end_utc": span[1],
        "case_hash": "",
        "engine_version": ENGINE_VERSION,
        **_target_columns(body),
    }
    try:
        case = target_case(
            base,
            body,
            span[0],
            span[1],
            coarse_step_days=settings.coarse_step_days,
            tof_max_days=settings.tof_max_days,
        )
        row["case_hash"] = case_hash(case)
        grid = compute_window(case, max_cells=settings.max_cells)
    except InputError as exc:
        row["reason"] = str(exc)
        return row
    row["cells_within"] = int(grid.cell_within().sum())
    bodies = CaseBodies.of(case)
    best = grid.best_cell(metric)
    if best is not None:
        grid_arc = slot_arc(case, bodies, grid, *best)
        arc = grid_arc
        if settings.refine != "none":
            arc = refine_best(case, grid, metric, method=settings.refine).arc
        row.update(_arc_columns(arc))
        row["status"], row["within_limits"] = STATUS_WITHIN, True
        row["metric_value"] = float(arc.metrics[metric])
        row["grid_metric_value"] = float(grid_arc.metrics[metric])
        row["refined"] = bool(
            ranking_values(arc.metrics[metric], metric)
            < ranking_values(grid_arc.metrics[metric], metric)
        )
        return row

    # No arc within limits: report the closest one inside the TOF band, and what it breaks.
    tof_min, tof_max = tof_bounds(case_dict(base), settings.tof_max_days)
    band = (grid.tof_days >= tof_min) & (grid.tof_days <= tof_max)
    closest = grid.best_cell(metric, mask=grid.converged & band[..., None])
    if closest is None:
        row["status"] = STATUS_NO_ARC
        row["reason"] = f"no arc solved with a TOF of {tof_min:g} to {tof_max:g} days"
        return row
    arc = slot_arc(case, bodies, grid, *closest)
    row.update(_arc_columns(arc))
    row["status"] = STATUS_OUTSIDE
    row["metric_value"] = row["grid_metric_value"] = float(arc.metrics[metric])
    row["reason"] = (
        f"no arc within limits on the {case.departure_step_days:g}-day grid; the lowest "
        f"{METRICS[metric].label} breaks: {breach_text(case, bodies, arc.metrics)}"
    )
    return row


def scan_chunk(
    base_toml: Mapping[str, Any],
    targets: Sequence[Mapping[str, Any]],
    span: Span,
    settings: Mapping[str, Any],
) -> list[dict[str, Any]]:
    """Scan a block of targets over one span: the unit of work of a survey.

    Plain inputs and outputs only, so the call pickles cheaply and runs the same here and on a
    Dask worker.

    Parameters
    ----------
    base_toml : dict
        The base case, ``solver.window.case.to_toml_dict`` form.
    targets : sequence of dict
        ``dataclasses.asdict`` of each target's :class:`ElementBody` (canonical, exact).
    span : (str, str)
        Departure span, ISO UTC, end excluded.
    settings : dict
        ``dataclasses.asdict`` of :class:`SurveySettings`.

    Returns
    -------
    list of dict
        One row per target, in order (columns :data:`SPAN_COLUMNS`).
    """
    base_raw = dict(base_toml)
    survey_settings = SurveySettings(**settings)
    span = (str(span[0]), str(span[1]))
    return [
        scan_target(base_raw, ElementBody(**target), span, survey_settings) for target in targets
    ]


# ---------------------------------------------------------------------------------------------
# Planning


@dataclass(frozen=True)
class Chunk:
    """One unit of work: consecutive targets times one span, named by its inputs' hash."""

    key: str
    span: Span
    targets: tuple[dict[str, Any], ...]
    first_index: int

    @property
    def target_names(self) -> tuple[str, ...]:
        return tuple(t["name"] for t in self.targets)

    @property
    def file_name(self) -> str:
        return f"chunk-{self.key[:32]}.parquet"


@dataclass(frozen=True)
class SurveyPlan:
    """Everything a survey run needs, in plain values.

    Attributes
    ----------
    base_case : Case
    base_toml : dict           the base case as shipped to workers
    settings : SurveySettings
    years : (int, int)
    spans : tuple of Span
    target_names : tuple of str
    chunks : tuple of Chunk    span-major, then blocks of consecutive targets
    targets_label : str        where the targets came from (for the provenance)
    """

    base_case: Case
    base_toml: dict[str, Any]
    settings: SurveySettings
    years: tuple[int, int]
    spans: tuple[Span, ...]
    target_names: tuple[str, ...]
    chunks: tuple[Chunk, ...]
    targets_label: str = ""
    targets_per_chunk: int = DEFAULT_TARGETS_PER_CHUNK
    metadata: dict[str, Any] = field(default_factory=dict)

    @property
    def target_years(self) -> int:
        return len(self.target_names) * len(self.spans)

    def survey_metadata(self) -> dict[str, Any]:
        """What the results file records about the survey (JSON-able)."""
        from solver.window.case import dumps_toml

        return {
            "format": SURVEY_FORMAT,
            "base_case_toml": dumps_toml(self.base_case),
            "base_case_title": self.base_case.title,
            "years": list(self.years),
            "spans": [list(s) for s in self.spans],
            "settings": asdict(self.settings),
            "targets": len(self.target_names),
            "targets_source": self.targets_label,
            "targets_per_chunk": self.targets_per_chunk,
            "chunks": len(self.chunks),
            **self.metadata,
        }


def chunk_key(base_toml: Mapping[str, Any], targets, span: Span, settings: SurveySettings) -> str:
    """SHA-256 of a chunk's inputs and the engine version (its file name and resume key).

    The base case enters without its title, description and window dates (a survey replaces
    them); the cell cap is left out (it refuses grids, it does not change numbers).
    """
    from solver.digest import cache_key

    base = copy.deepcopy(dict(base_toml))
    base.get("case", {}).pop("title", None)
    base.get("case", {}).pop("description", None)
    for key in ("departure_start", "departure_end", "arrival_start", "arrival_end"):
        base.get("window", {}).pop(key, None)
    numbers = {k: v for k, v in asdict(settings).items() if k != "max_cells"}
    return cache_key(
        {
            "survey_format": SURVEY_FORMAT,
            "engine": ENGINE_VERSION,
            "base": base,
            "settings": numbers,
            "span": list(span),
            "targets": list(targets),
        }
    )


def plan_survey(
    base_case: Case,
    targets: Sequence[ElementBody],
    years: tuple[int, int] | str,
    *,
    settings: SurveySettings | None = None,
    targets_per_chunk: int = DEFAULT_TARGETS_PER_CHUNK,
    targets_label: str = "",
) -> SurveyPlan:
    """Check a survey's inputs and split it into chunks.

    Checks up front (each failure an :class:`InputError` naming the option or key): the TOF
    bound exists, target names are unique and clash with no body of the base case, the first
    and last years fit the ephemeris, and a target-year grid stays within the cell cap.
    """
    settings = settings or SurveySettings()
    first, last = parse_years(years)
    if isinstance(targets_per_chunk, bool) or not (
        isinstance(targets_per_chunk, int) and 1 <= targets_per_chunk <= 100_000
    ):
        raise InputError("--targets-per-chunk", targets_per_chunk, "an integer from 1 to 100000")
    bodies = list(targets)
    if not bodies:
        raise InputError("targets", "none", "at least one target")
    base_toml = to_toml_dict(base_case)
    tof_bounds(base_toml, settings.tof_max_days)
    # A target may replace a namesake among the base case's element bodies, but not a built-in
    # body, nor the departure or central body, nor a body another one orbits.
    reserved = {label for b in default_registry() for label in (b.key, *b.aliases)}
    reserved |= {base_case.departure_body.lower(), base_case.central_body.lower()}
    reserved |= {b.central_body.lower() for b in base_case.bodies}
    names: set[str] = set()
    for body in bodies:
        key = body.name.lower()
        if key in names:
            raise InputError("targets: name", body.name, "a name used only once")
        if key in reserved:
            raise InputError(
                "targets: name",
                body.name,
                "a name that is not a built-in body (arcwindow bodies) nor the base case's "
                "departure or central body",
            )
        names.add(key)
    spans = year_spans(first, last)
    for span in {spans[0], spans[-1]}:
        try:
            probe = target_case(
                base_toml,
                bodies[0],
                *span,
                coarse_step_days=settings.coarse_step_days,
                tof_max_days=settings.tof_max_days,
            )
        except InputError as exc:
            if exc.field.startswith("window."):
                raise InputError(
                    "--years", f"{first}-{last}", f"years whose windows fit: {exc}"
                ) from None
            raise
        check_grid_size(probe, settings.max_cells)
    target_dicts = [asdict(b) for b in bodies]
    chunks = []
    for span in spans:
        for start in range(0, len(bodies), targets_per_chunk):
            block = tuple(target_dicts[start : start + targets_per_chunk])
            chunks.append(
                Chunk(
                    key=chunk_key(base_toml, block, span, settings),
                    span=span,
                    targets=block,
                    first_index=start,
                )
            )
    return SurveyPlan(
        base_case=base_case,
        base_toml=base_toml,
        settings=settings,
        years=(first, last),
        spans=spans,
        target_names=tuple(b.name for b in bodies),
        chunks=tuple(chunks),
        targets_label=targets_label,
        targets_per_chunk=targets_per_chunk,
    )


__all__ = [
    "DEFAULT_TARGETS_PER_CHUNK",
    "SURVEY_FORMAT",
    "Chunk",
    "SurveyPlan",
    "SurveySettings",
    "chunk_key",
    "parse_years",
    "plan_survey",
    "scan_chunk",
    "scan_target",
    "year_spans",
]
