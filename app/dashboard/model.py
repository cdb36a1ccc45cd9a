"""The dashboard's model: what the callbacks ask for, without Dash.

One ``DashboardModel`` per server holds the case catalogue, the grid store (memory LRU, disk
cache, background jobs) and the shortlist. Its methods turn a view (``state.ViewState``) into
cases, grids, arcs and figures. Callbacks stay thin: they unpack component values, call one
method here and pack the result.
"""

from __future__ import annotations

import logging
import math
import threading
from collections import OrderedDict
from concurrent.futures import Future, ThreadPoolExecutor, TimeoutError
from dataclasses import dataclass, replace
from typing import Any
from urllib.parse import parse_qs

import numpy as np
import plotly.graph_objects as go

from solver.ephemeris.timescales import utc_to_jd_tdb
from solver.errors import InputError
from solver.files.cache import GridCache
from solver.window.best import best_grid_arc
from solver.window.case import Case
from solver.window.case_bodies import CaseBodies
from solver.window.cell import Arc, select_arc, solve_cell
from solver.window.grid import WindowGrid, grid_axes
from solver.window.metrics import METRICS
from solver.window.outputs import case_outputs
from solver.window.provenance import case_hash, window_cache_key

from . import figures
from .cases import CaseCatalogue
from .config import Settings
from .jobs import GridStore, Job
from .prepare import (
    DISPLAY_MAX_POINTS,
    PREVIEW_MAX_POINTS,
    MapPoint,
    arc_details,
    arc_scene,
    display_name,
    family_data,
    jd_tdb_to_unix_ms,
    map_data,
    map_point,
    shown_slot,
    utc_text,
)
from .shortlist import Shortlist
from .state import (
    MAP_METRICS,
    ViewState,
    changes_from_controls,
    fit_arcs,
    from_query,
    parse_arcs,
    plot_x_to_unix_ms,
    to_query,
    unix_days_to_iso,
)

_MEMO_SIZE = 32
_MS_PER_DAY = 86_400_000.0


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
    refined: bool = True  # False: the best arc's grid node, while its refinement runs


def _jd(text: str, field: str) -> float:
    return float(utc_to_jd_tdb(text, field=field))


_SNAP_DAYS = 1.0 / 86400.0


def _snap(jd_tdb: float, axis: np.ndarray) -> float:
    """The grid node a date names, when it is within a second of one.

    Links carry dates in UTC to the second, while grid nodes are evenly spaced in TDB, so a
    node's UTC text is a few milliseconds off the node; snapping makes a selected cell's numbers
    those of the grid cell exactly. Other dates are kept as given.
    """
    k = int(np.argmin(np.abs(axis - jd_tdb)))
    return float(axis[k]) if abs(axis[k] - jd_tdb) < _SNAP_DAYS else jd_tdb


def grid_best_arc(
    case: Case, grid: WindowGrid, metric: str, arcs: str, bodies: CaseBodies
) -> Arc | None:
    """The best arc within limits among the arcs shown, at its grid node (None if no arc of
    the grid is within limits)."""
    slot = shown_slot(grid, arcs)
    return best_grid_arc(case, grid, metric, slots=None if slot is None else [slot], bodies=bodies)


class BestArcs:
    """Best arcs by (grid, metric, arcs shown): the grid node at once, refined in the background.

    Refining the best arc off the grid (``solver.window.refine``) takes from a tenth of a second to
    several seconds depending on the metric, too long to hold a click or a metric change; so
    callers get the grid node's arc while a worker thread refines it, and pick the refined arc
    up on a later poll.
    """

    def __init__(self) -> None:
        self._nodes = _Memo(64)
        self._refined = _Memo(64)
        self._pending: dict[tuple, Future] = {}
        self._lock = threading.Lock()
        self._pool = ThreadPoolExecutor(max_workers=1, thread_name_prefix="arcwindow-refine")

    def get(self, case, grid, metric, arcs, bodies) -> tuple[Arc | None, bool]:
        """(best arc, refined?) now; starts the refinement if it has not started."""
        key = (window_cache_key(grid.case), metric, arcs)
        refined = self._refined.get(key)
        if refined is not None:
            return refined or None, True
        self._start(key, case, grid, metric, arcs)
        node = self._nodes.get(key)
        if node is None:
            node = self._nodes.put(key, grid_best_arc(case, grid, metric, arcs, bodies) or False)
        return node or None, False

    def _start(self, key, case, grid, metric, arcs) -> None:
        with self._lock:
            if key in self._pending:
                return
            self._pending[key] = self._pool.submit(self._refine, key, case, grid, metric, arcs)

    def _refine(self, key, case, grid, metric, arcs) -> None:
        from solver.window.refine import refine_best  # scipy.optimize: imported when first needed

        revolutions, branch = parse_arcs(arcs)
        try:
            arc = refine_best(case, grid, metric, revolutions=revolutions, branch=branch).arc
        except InputError:
            arc = None  # no arc of the grid within limits
        except Exception:  # keep the grid node rather than lose the page to a failed refinement
            _LOG.exception("refining the best arc failed; keeping the grid node")
            arc = self._nodes.get(key) or None
        self._refined.put(key, arc or False)
        with self._lock:
            self._pending.pop(key, None)

    def wait(self, case, grid, metric, arcs, timeout_s: float) -> None:
        """Wait up to ``timeout_s`` for a pending refinement (tests and the benchmark)."""
        key = (window_cache_key(grid.case), metric, arcs)
        with self._lock:
            future = self._pending.get(key)
        if future is not None:
            try:
                future.result(timeout=timeout_s)
            except TimeoutError:
                pass

    def shutdown(self) -> None:
        self._pool.shutdown(wait=False, cancel_futures=True)


class DashboardModel:
    """Cases, grids, arcs, figures and the shortlist for one server."""

    def __init__(self, settings: Settings, *, store: GridStore | None = None) -> None:
        self.settings = settings
        self.catalogue = CaseCatalogue(settings.cases_dir, settings.uploads_dir)
        self.grids = store or GridStore(GridCache(settings.cache_dir))
        self.shortlist = Shortlist(settings.shortlist_path)
        self.best = BestArcs()
        self._map = _Memo(8)
        self._bodies = _Memo()

    # -- views -----------------------------------------------------------------------------
    def view_from_url(self, search: str | None) -> tuple[ViewState, Case, list[str]]:
        """The view a link asks for, made valid: unreadable or refused parts are dropped and
        named in the returned notes."""
        view = from_query(search)
        notes = list(view.notes)
        try:
            self.catalogue.load(view.case)
        except InputError:
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
        if "metric" not in parse_qs((search or "").lstrip("?")):
            view = replace(view, metric=self.suited_metric(case, view.metric))
        return view, case, notes

    def view_for_case(self, case_id: str, metric: str) -> tuple[ViewState, Case]:
        """A fresh view of a case file (the case picker), on a metric that suits it."""
        view = ViewState(case=case_id, metric=metric)
        case = self.catalogue.effective(view)
        view = replace(view, metric=self.suited_metric(case, metric))
        return replace(view, arcs=fit_arcs("best", case.max_revolutions)), case

    def view_from_controls(self, current: ViewState, controls: dict[str, Any]) -> tuple:
        """The view the controls describe; InputError (naming the setting) if the case they
        make is refused, in which case the page keeps the current view."""
        base = self.catalogue.load(current.case)
        view = current.with_changes(changes_from_controls(base, controls))
        case = self.catalogue.effective(view)
        selected = view.selected if self._inside(view.selected, case) else None
        return replace(
            view, arcs=fit_arcs(view.arcs, case.max_revolutions), selected=selected
        ), case

    @staticmethod
    def _inside(selected: tuple[str, str] | None, case: Case) -> bool:
        if not selected:
            return False
        dep, arr = _jd(selected[0], "sel"), _jd(selected[1], "sel")
        tol = 1e-6
        return (
            case.departure_start_jd_tdb - tol <= dep <= case.departure_end_jd_tdb + tol
            and case.arrival_start_jd_tdb - tol <= arr <= case.arrival_end_jd_tdb + tol
        )

    def select_point(self, view: ViewState, case: Case, x: Any, y: Any) -> ViewState:
        """The view with the grid cell nearest a clicked map point selected (exact node dates)."""
        dep_jd, arr_jd = grid_axes(case)
        x_ms, y_ms = plot_x_to_unix_ms(x), plot_x_to_unix_ms(y)
        i = int(np.argmin(np.abs(jd_tdb_to_unix_ms(dep_jd) - x_ms)))
        j = int(np.argmin(np.abs(jd_tdb_to_unix_ms(arr_jd) - y_ms)))
        return replace(view, selected=(utc_text(dep_jd[i]), utc_text(arr_jd[j])))

    # -- grids -----------------------------------------------------------------------------
    def case(self, view: ViewState) -> Case:
        return self.catalogue.effective(view)

    def request_grid(self, case: Case) -> tuple[WindowGrid | None, Job | None]:
        return self.grids.request(case)

    def suited_metric(self, case: Case, metric: str) -> str:
        """``metric``, unless it does not describe the case's arcs (C3 or DLA of a transfer that
        starts with a burn): then the case's own default (solver.window.outputs)."""
        fit = case_outputs(case, self.bodies(case))
        return metric if metric in fit.ranking_metrics else fit.default_metric

    def metric_options(self, case: Case) -> list[dict[str, str]]:
        """The metric picker's choices for a case: the map metrics that fit it."""
        fit = case_outputs(case, self.bodies(case))
        return [
            {"value": m, "label": f"{METRICS[m].label} ({METRICS[m].unit})"}
            for m in MAP_METRICS
            if m in fit.ranking_metrics
        ]

    def bodies(self, case: Case) -> CaseBodies:
        key = case.normalized().__repr__()
        hit = self._bodies.get(key)
        return hit if hit is not None else self._bodies.put(key, CaseBodies.of(case))

    def best_arc(
        self, case: Case, grid: WindowGrid, metric: str, arcs: str
    ) -> tuple[Arc | None, bool]:
        """(best arc within limits among the arcs shown, refined?): the grid node's arc until
        the background refinement has finished (None if no arc is within limits)."""
        return self.best.get(case, grid, metric, arcs, self.bodies(case))

    def shutdown(self) -> None:
        """Stop the worker threads (tests and benchmarks that build many models)."""
        self.grids.shutdown()
        self.best.shutdown()

    def selection(self, view: ViewState, case: Case, grid: WindowGrid | None) -> Selection | None:
        """The selected cell's arcs and the arc shown (None while the best arc awaits its grid)."""
        revolutions, branch = parse_arcs(view.arcs)
        if view.selected:
            dep_axis, arr_axis = grid_axes(case)
            dep = _snap(_jd(view.selected[0], "selected departure"), dep_axis)
            arr = _snap(_jd(view.selected[1], "selected arrival"), arr_axis)
            arcs = solve_cell(case, dep, arr, self.bodies(case))
            return Selection(arcs, select_arc(arcs, revolutions, branch, view.metric), False)
        if grid is None:
            return None
        best, refined = self.best_arc(case, grid, view.metric, view.arcs)
        if best is None:
            return None
        arcs = solve_cell(case, best.departure_jd_tdb, best.arrival_jd_tdb, self.bodies(case))
        return Selection(arcs, select_arc(arcs, revolutions, branch, view.metric), True, refined)

    # -- shortlist -------------------------------------------------------------------------
    SHORTLIST_METRICS = ("c3_km2_s2", "vinf_arrival_km_s", "dv_total_km_s", "dla_deg", "tof_days")

    def keep(self, view: ViewState, note: str | None, author: str | None):
        """Add the view's selected arc to the shortlist, recomputed here from the view (nothing
        the page sends is written as is), with a link that opens it."""
        case = self.case(view)
        grid = self.grids.memory_get(window_cache_key(case))
        sel = self.selection(view, case, grid)
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
    def _points(self, view: ViewState, case: Case, grid: WindowGrid):
        best_arc, refined = self.best_arc(case, grid, view.metric, view.arcs)
        label = "best arc" if refined else "best arc (grid node; refining)"
        best = map_point(best_arc, view.metric, label) if best_arc is not None else None
        selected = None
        if view.selected:
            selected = MapPoint(
                float(jd_tdb_to_unix_ms(_jd(view.selected[0], "sel"))),
                float(jd_tdb_to_unix_ms(_jd(view.selected[1], "sel"))),
                math.nan,
                "selected",
            )
        elif best is not None:
            selected = replace(best, label="selected (best arc)")
        return best, selected, refined

    def best_refined(self, view: ViewState, case: Case, grid: WindowGrid) -> bool:
        """Whether the best arc of a view has been refined (without starting anything new)."""
        return self.best_arc(case, grid, view.metric, view.arcs)[1]

    def map_figure(self, view: ViewState, case: Case, grid: WindowGrid) -> go.Figure:
        """The full window map for a view whose grid is ready."""
        best, selected, _ = self._points(view, case, grid)
        key = (window_cache_key(grid.case), view.metric, view.arcs)
        data = self._map.get(key)
        if data is None:
            data = self._map.put(
                key, map_data(grid, view.metric, view.arcs, max_points=DISPLAY_MAX_POINTS)
            )
        data = replace(data, best=best, selected=selected, title=self.map_title(view, case))
        return figures.window_map_figure(data)

    def map_title(self, view: ViewState, case: Case) -> str:
        from .state import metric_label

        return (
            f"{metric_label(view.metric)} — {display_name(case.departure_body)} to "
            f"{display_name(case.target_body)}"
        )

    def map_patch(self, patch, view: ViewState, case: Case, grid: WindowGrid, metric_changed: bool):
        """Fill a ``dash.Patch`` of the shown map: markers only, or a new metric as well."""
        best, selected, _ = self._points(view, case, grid)
        if metric_changed:  # the caller checked that the cells keep their arcs
            key = (window_cache_key(grid.case), view.metric, view.arcs)
            data = self._map.get(key) or self._map.put(
                key, map_data(grid, view.metric, view.arcs, max_points=DISPLAY_MAX_POINTS)
            )
            data = replace(data, best=best, selected=selected, title=self.map_title(view, case))
            return figures.map_metric_patch(patch, data)
        return figures.set_markers(patch, best, selected, METRICS[view.metric].unit)

    def preview_figure(self, view: ViewState, case: Case, dep_days, arr_days) -> go.Figure:
        """A coarse window map for slider positions being dragged (InputError if refused)."""
        from solver.window.grid import compute_window

        changes = {}
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
            changes[step_key] = max(span / (PREVIEW_MAX_POINTS - 1), 1.0 / 1440.0)
        coarse = case.with_changes(**changes)
        grid = compute_window(coarse)
        data = map_data(
            grid, view.metric, view.arcs, preview=True, title=self.map_title(view, case)
        )
        return figures.window_map_figure(data)

    def selection_figures(self, view: ViewState, case: Case, grid: WindowGrid | None):
        """(arc view, family chart, details sections, selection) for a view."""
        sel = self.selection(view, case, grid)
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
