"""The window page's server side: cases, grids, best arcs, figures and the shortlist, joined for
the page's callbacks (which only unpack values, call one method here and pack the answer).

One ``WindowService`` per server. Its methods turn a view (``view_state.ViewState``) into cases,
grid tickets, arcs and figures; the branching of what to do when is in ``view_changes`` and
``map_loop`` (pure functions).
"""

from __future__ import annotations

import functools
import logging
import math
import threading
from collections import OrderedDict
from dataclasses import dataclass, replace
from typing import Any
from urllib.parse import parse_qs

import numpy as np
import plotly.graph_objects as go

from solver.ephemeris.timescales import utc_to_jd_tdb
from solver.errors import InputError
from solver.files.cache import GridCache
from solver.time_units import MINUTE_DAYS, SECOND_DAYS
from solver.window.case import Case
from solver.window.case_bodies import CaseBodies
from solver.window.cell import Arc, select_arc, solve_cell
from solver.window.grid import WindowGrid, grid_axes
from solver.window.mass import MASS_METRICS
from solver.window.metrics import METRICS
from solver.window.outputs import case_outputs
from solver.window.provenance import case_hash

from . import figures
from .best_arcs import BestArcs
from .case_catalogue import CaseCatalogue
from .config import Settings
from .display_data import (
    DISPLAY_MAX_POINTS,
    PREVIEW_MAX_POINTS,
    LimitsBlock,
    MapPoint,
    any_arc_shown,
    arc_details,
    arc_scene,
    display_ms,
    display_name,
    family_data,
    limits_block,
    map_data,
    map_point,
    utc_text,
)
from .grid_jobs import GridJobs, Ticket, grid_key
from .shortlist import Shortlist
from .slowdown import Slowdown
from .view_state import (
    MAP_METRICS,
    ViewState,
    arcs_label,
    fit_arcs,
    from_query,
    metric_label,
    parse_arcs,
    plot_x_to_unix_ms,
    to_query,
    unix_days_to_iso,
)

_MEMO_SIZE = 32
_LOG = logging.getLogger(__name__)


class _Memo:
    """A small thread-safe LRU for derived results keyed by hashable tuples."""

    def __init__(self, size: int = _MEMO_SIZE) -> None:
        self.size = size
        self._items: OrderedDict = OrderedDict()
        self._lock = threading.Lock()

    def get(self, key):
        with self._lock:
            if key in self._items:
                self._items.move_to_end(key)
                return self._items[key]
        return None

    def put(self, key, value):
        with self._lock:
            self._items[key] = value
            self._items.move_to_end(key)
            while len(self._items) > self.size:
                self._items.popitem(last=False)
        return value


@dataclass(frozen=True)
class Selection:
    """The arcs of the selected cell and the one shown."""

    arcs: list[Arc]
    arc: Arc
    is_best: bool
    refined: bool = True  # False: the best arc's grid node (refining, or refinement gave up)


def _jd(text: str, field: str) -> float:
    return float(utc_to_jd_tdb(text, field=field))


def _snap(jd_tdb: float, axis: np.ndarray) -> float:
    """The grid node a date names, when it is within a second of one.

    Links carry dates in UTC to the second, while grid nodes are evenly spaced in TDB, so a
    node's UTC text is a few milliseconds off the node; snapping makes a selected cell's numbers
    those of the grid cell exactly. Other dates are kept as given.
    """
    k = int(np.argmin(np.abs(axis - jd_tdb)))
    return float(axis[k]) if abs(axis[k] - jd_tdb) < SECOND_DAYS else jd_tdb


@functools.lru_cache(maxsize=64)
def _display_axes(case: Case) -> tuple[np.ndarray, np.ndarray]:
    """The plot coordinates of a case's grid dates (computed once per case; read only)."""
    dep_jd, arr_jd = grid_axes(case)
    return display_ms(dep_jd), display_ms(arr_jd)


class WindowService:
    """Cases, grids, arcs, figures and the shortlist for one server."""

    def __init__(
        self,
        settings: Settings,
        *,
        jobs: GridJobs | None = None,
        slowdown: Slowdown | None = None,
    ) -> None:
        self.settings = settings
        slowdown = slowdown or Slowdown.from_environment()
        self.slowdown = slowdown
        self.catalogue = CaseCatalogue(settings.cases_dir, settings.uploads_dir)
        self.grids = jobs or GridJobs(GridCache(settings.cache_dir), slowdown=slowdown)
        self.shortlist = Shortlist(settings.shortlist_path)
        self.best = BestArcs(slowdown)
        self._map = _Memo(8)
        self._bodies = _Memo()
        self._shelf = None

    # -- views -----------------------------------------------------------------------------
    def view_from_url(self, search: str | None) -> tuple[ViewState, Case, list[str]]:
        """The view a link asks for, made valid: unreadable or refused parts are dropped and
        named in the returned notes. A link ``?survey=NAME&target=T`` opens a survey target."""
        params = parse_qs((search or "").lstrip("?"))
        if "survey" in params or "target" in params:
            return self._survey_view(params)
        view = from_query(search)
        notes = list(view.notes)
        if not self.catalogue.exists(view.case):
            notes.append(f"link: there is no case '{view.case}' here; showing the default case")
            view = ViewState(case=self.catalogue.default_id(), metric=view.metric)
        try:
            case = self.catalogue.effective(view)
        except InputError as exc:
            notes.append(f"link: {exc}. Showing the case file's own settings.")
            view = replace(view, changes=(), selected=None)
            case = self.catalogue.effective(view)
        if view.selected:
            try:
                _jd(view.selected[0], "sel departure")
                _jd(view.selected[1], "sel arrival")
            except InputError as exc:
                notes.append(f"link: {exc}; selecting the best arc")
                view = replace(view, selected=None)
        view = replace(view, arcs=fit_arcs(view.arcs, case.max_revolutions), notes=())
        if "metric" not in params:
            view = replace(view, metric=self.suited_metric(case, view.metric))
        elif view.metric in MASS_METRICS and view.metric not in self.map_metrics(case):
            try:
                case_outputs(case, self.bodies(case)).check_metric(view.metric, "link: metric")
            except InputError as exc:
                notes.append(f"{exc}; showing {metric_label(self.default_metric(case))}")
            view = replace(view, metric=self.default_metric(case))
        return view, case, notes

    def _survey_view(self, params: dict) -> tuple[ViewState, Case, list[str]]:
        name = (params.get("survey") or [""])[0]
        target = (params.get("target") or [""])[0]
        try:
            query = self.shelf.open_target(name, target)
        except InputError as exc:
            view, case, notes = self.view_from_url("")
            return view, case, [f"survey: {exc}", *notes]
        except Exception:  # a damaged results file: say so, keep serving
            _LOG.exception("survey target %s of %s could not be opened", target[:40], name[:40])
            view, case, notes = self.view_from_url("")
            return view, case, [f"survey: the results file '{name[:60]}' could not be read"]
        view, case, notes = self.view_from_url(query)
        return view, case, notes

    @property
    def shelf(self):
        """The survey shelf of this server (its results folder)."""
        if self._shelf is None:
            from .surveys import SurveyShelf

            self._shelf = SurveyShelf(self.settings.surveys_dir, self.catalogue)
        return self._shelf

    def view_for_case(self, case_id: str, metric: str) -> tuple[ViewState, Case]:
        """A fresh view of a case file (the case picker), on a metric that suits it."""
        view = ViewState(case=case_id, metric=metric)
        case = self.catalogue.effective(view)
        view = replace(view, metric=self.suited_metric(case, metric))
        return replace(view, arcs=fit_arcs("best", case.max_revolutions)), case

    def select_point(self, view: ViewState, case: Case, x: Any, y: Any) -> ViewState:
        """The view with the grid cell nearest a clicked map point selected (exact node dates)."""
        if x is None or y is None:
            raise ValueError("no coordinates")
        dep_jd, arr_jd = grid_axes(case)
        x_ms, y_ms = plot_x_to_unix_ms(x), plot_x_to_unix_ms(y)
        if not (math.isfinite(x_ms) and math.isfinite(y_ms)):
            raise ValueError("coordinates are not dates")
        dep_ms, arr_ms = _display_axes(case)
        i = int(np.argmin(np.abs(dep_ms - x_ms)))
        j = int(np.argmin(np.abs(arr_ms - y_ms)))
        return replace(view, selected=(utc_text(dep_jd[i]), utc_text(arr_jd[j])))

    def case(self, view: ViewState) -> Case:
        return self.catalogue.effective(view)

    def suited_metric(self, case: Case, metric: str) -> str:
        """``metric``, unless it does not describe the case's arcs (C3 or DLA of a transfer that
        starts with a burn, kilograms without a spacecraft mass): then the case's own default
        (solver.window.outputs)."""
        return metric if metric in self.map_metrics(case) else self.default_metric(case)

    def default_metric(self, case: Case) -> str:
        return case_outputs(case, self.bodies(case)).default_metric

    def map_metrics(self, case: Case) -> tuple[str, ...]:
        """The map metrics that describe a case's arcs (``MAP_METRICS`` it computes)."""
        fit = case_outputs(case, self.bodies(case))
        return tuple(m for m in MAP_METRICS if m in fit.metrics)

    def launch_limits(self, case: Case) -> bool:
        """Whether the case's launch-only controls fit it (``CaseOutputs.launch_limits``)."""
        return case_outputs(case, self.bodies(case)).launch_limits

    def metric_options(self, case: Case) -> list[dict[str, str]]:
        """The metric picker's choices for a case: the map metrics that fit it."""
        return [
            {"value": m, "label": f"{METRICS[m].label} ({METRICS[m].unit})"}
            for m in self.map_metrics(case)
        ]

    def bodies(self, case: Case) -> CaseBodies:
        key = repr(case.normalized())
        hit = self._bodies.get(key)
        return hit if hit is not None else self._bodies.put(key, CaseBodies.of(case))

    # -- grids and best arcs ---------------------------------------------------------------
    def request_grid(self, case: Case, viewer: str, address: str = "") -> Ticket:
        return self.grids.request(case, viewer, address)

    def ticket(self, key: str, viewer: str) -> Ticket:
        return self.grids.ticket(key, viewer)

    def grid(self, case: Case) -> WindowGrid | None:
        return self.grids.memory_get(grid_key(case))

    def best_state(self, view: ViewState, case: Case, grid: WindowGrid | None) -> str:
        """ "refined", "refining" or "none" for the view's best arc; "lost" without its grid."""
        if grid is None:
            return "lost"
        return self.best.state(case, grid, view.metric, view.arcs, self.bodies(case))

    def best_arc(
        self, case: Case, grid: WindowGrid, metric: str, arcs: str, *, refined: bool
    ) -> Arc | None:
        """The best arc within limits among the arcs shown: the grid node, or the refined arc."""
        return self.best.get(case, grid, metric, arcs, self.bodies(case), refined=refined)

    def limits_block(self, view: ViewState, case: Case, grid: WindowGrid) -> LimitsBlock:
        return limits_block(case, grid, view.metric, view.arcs, self.bodies(case))

    def shutdown(self) -> None:
        """Stop the worker threads (tests and benchmarks that build many services)."""
        self.grids.shutdown()
        self.best.shutdown()

    def selection(
        self, view: ViewState, case: Case, grid: WindowGrid | None, best: str = "node"
    ) -> Selection | None:
        """The selected cell's arcs and the arc shown (None while the best arc awaits its grid,
        or when no arc is within limits). ``best`` is the status's best-arc state."""
        revolutions, branch = parse_arcs(view.arcs)
        if view.selected:
            dep_axis, arr_axis = grid_axes(case)
            dep = _snap(_jd(view.selected[0], "selected departure"), dep_axis)
            arr = _snap(_jd(view.selected[1], "selected arrival"), arr_axis)
            arcs = solve_cell(case, dep, arr, self.bodies(case))
            return Selection(arcs, select_arc(arcs, revolutions, branch, view.metric), False)
        if grid is None:
            return None
        refined = best == "refined"
        arc = self.best_arc(case, grid, view.metric, view.arcs, refined=refined)
        if arc is None:
            return None
        arcs = solve_cell(case, arc.departure_jd_tdb, arc.arrival_jd_tdb, self.bodies(case))
        # The best arc itself: the same revolutions and branch as the star on the map.
        chosen = next(
            (a for a in arcs if (a.revolutions, a.branch) == (arc.revolutions, arc.branch)),
            select_arc(arcs, revolutions, branch, view.metric),
        )
        return Selection(arcs, chosen, True, refined)

    # -- shortlist -------------------------------------------------------------------------
    SHORTLIST_METRICS = ("c3_km2_s2", "vinf_arrival_km_s", "dv_total_km_s", "dla_deg", "tof_days")

    def keep(self, view: ViewState, note: str | None, author: str | None, best: str = "refined"):
        """Add the view's selected arc to the shortlist, recomputed here from the view (nothing
        the page sends is written as is), with a link that opens it."""
        case = self.case(view)
        grid = self.grid(case)
        sel = self.selection(view, case, grid, best)
        if sel is None or not sel.arc.ok:
            raise InputError("selected arc", "none", "a selected cell with an arc")
        arc = sel.arc
        dates = (utc_text(arc.departure_jd_tdb), utc_text(arc.arrival_jd_tdb))
        metrics = {
            name: (float(arc.metrics[name]) if math.isfinite(arc.metrics[name]) else None)
            for name in self.SHORTLIST_METRICS
        }
        return self.shortlist.add(
            case_id=view.case,
            case_title=case.title,
            case_hash=case_hash(case),
            departure_utc=dates[0],
            arrival_utc=dates[1],
            revolutions=arc.revolutions,
            branch=arc.branch,
            metrics=metrics,
            note=note,
            author=author,
            view=to_query(replace(view, selected=dates)),
        )

    # -- figures ---------------------------------------------------------------------------
    def _points(self, view: ViewState, case: Case, grid: WindowGrid, best: str):
        refined = best == "refined"
        arc = self.best_arc(case, grid, view.metric, view.arcs, refined=refined)
        label = {
            "refined": "best arc",
            "node": "best arc (grid node; refining)",
            "unrefined": "best arc (grid node; refinement did not finish)",
        }.get(best, "best arc")
        star = map_point(arc, view.metric, label) if arc is not None else None
        selected = None
        if view.selected:
            selected = MapPoint(
                float(display_ms(_jd(view.selected[0], "sel"))),
                float(display_ms(_jd(view.selected[1], "sel"))),
                math.nan,
                "selected",
            )
        elif star is not None:
            selected = replace(star, label="selected (best arc)")
        return star, selected

    def _map_data(self, view: ViewState, case: Case, grid: WindowGrid):
        key = (grid_key(grid.case), view.metric, view.arcs)
        data = self._map.get(key)
        if data is None:
            data = self._map.put(
                key, map_data(grid, view.metric, view.arcs, max_points=DISPLAY_MAX_POINTS)
            )
        return data

    def map_figure(self, view: ViewState, case: Case, grid: WindowGrid, best: str) -> go.Figure:
        """The full window map for a view whose grid is ready."""
        star, selected = self._points(view, case, grid, best)
        data = replace(
            self._map_data(view, case, grid),
            best=star,
            selected=selected,
            title=self.map_title(view, case),
            note=self._no_arc_note(star, view, grid),
        )
        return figures.window_map_figure(data)

    @staticmethod
    def _no_arc_note(star: MapPoint | None, view: ViewState, grid: WindowGrid) -> str:
        """What the map says when it has no best arc: none of the arcs shown exist, or none is
        within the limits."""
        if star is not None:
            return ""
        if not any_arc_shown(grid, view.arcs):
            return f"No {arcs_label(view.arcs)} arc in this window."
        return "No arc within the limits: see the details panel."

    def map_title(self, view: ViewState, case: Case) -> str:
        arcs = (
            "" if view.arcs == "best" or case.max_revolutions == 0 else f", {arcs_label(view.arcs)}"
        )
        return (
            f"{metric_label(view.metric)} — {display_name(case.departure_body)} to "
            f"{display_name(case.target_body)}{arcs}"
        )

    def map_patch(
        self, patch, view: ViewState, case: Case, grid: WindowGrid, best: str, metric: bool
    ):
        """Fill a ``dash.Patch`` of the shown map: markers only, or a new metric as well."""
        star, selected = self._points(view, case, grid, best)
        if metric:  # the caller checked that the cells keep their arcs
            data = replace(
                self._map_data(view, case, grid),
                best=star,
                selected=selected,
                title=self.map_title(view, case),
                note=self._no_arc_note(star, view, grid),
            )
            return figures.map_metric_patch(patch, data)
        return figures.set_markers(
            patch, star, selected, METRICS[view.metric].unit, self._no_arc_note(star, view, grid)
        )

    def preview_figure(self, view: ViewState, case: Case, dep_days, arr_days) -> go.Figure:
        """A coarse window map for slider positions being dragged (InputError if refused)."""
        from solver.window.grid import compute_window

        changes: dict[str, Any] = {}
        for (start_key, end_key, step_key), days in (
            (
                ("window.departure_start", "window.departure_end", "window.departure_step_days"),
                dep_days,
            ),
            (("window.arrival_start", "window.arrival_end", "window.arrival_step_days"), arr_days),
        ):
            if not days:
                continue
            span = max(float(days[1]) - float(days[0]), 1e-3)
            changes[start_key] = unix_days_to_iso(days[0])
            changes[end_key] = unix_days_to_iso(days[1])
            changes[step_key] = max(span / (PREVIEW_MAX_POINTS - 1), MINUTE_DAYS)
        coarse = case.with_changes(**changes)  # validated: dates within the engine's ranges
        grid = compute_window(coarse)
        data = map_data(
            grid, view.metric, view.arcs, preview=True, title=self.map_title(view, case)
        )
        return figures.window_map_figure(data)

    def closest_figures(self, view: ViewState, case: Case, grid: WindowGrid, arc: Arc):
        """(arc view, family chart, details sections) of an arc the limits exclude."""
        bodies = self.bodies(case)
        arcs = solve_cell(case, arc.departure_jd_tdb, arc.arrival_jd_tdb, bodies)
        chosen = next(
            (a for a in arcs if (a.revolutions, a.branch) == (arc.revolutions, arc.branch)), None
        )
        if chosen is None:
            return None
        scene = arc_scene(case, chosen, bodies)
        fam = family_data(case, arcs, chosen, bodies)
        details = arc_details(case, chosen, grid.provenance, bodies)
        return figures.arc_view_figure(scene), figures.family_chart_figure(fam), details

    def selection_figures(
        self, view: ViewState, case: Case, grid: WindowGrid | None, best: str = "node"
    ):
        """(arc view, family chart, details sections, selection) for a view, or None."""
        sel = self.selection(view, case, grid, best)
        if sel is None:
            return None
        bodies = self.bodies(case)
        scene = arc_scene(case, sel.arc, bodies)
        fam = family_data(case, sel.arcs, sel.arc, bodies)
        provenance = grid.provenance if grid is not None else {}
        if not provenance:
            from solver.window.provenance import provenance as make_provenance

            provenance = make_provenance(case)
        details = arc_details(case, sel.arc, provenance, bodies)
        return (
            figures.arc_view_figure(scene),
            figures.family_chart_figure(fam),
            details,
            sel,
        )


__all__ = ["Selection", "WindowService"]
