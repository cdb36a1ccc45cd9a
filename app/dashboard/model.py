"""The dashboard's model: what the callbacks ask for, without Dash.

One ``DashboardModel`` per server holds the case catalogue, the grid store (memory LRU, disk
cache, background jobs) and the shortlist. Its methods turn a view (``state.ViewState``) into
cases, grids, arcs and figures. Callbacks stay thin: they unpack component values, call one
method here and pack the result.
"""

from __future__ import annotations

import math
import threading
from collections import OrderedDict
from dataclasses import dataclass, replace
from typing import Any

import numpy as np
import plotly.graph_objects as go

from solver.cache import GridCache
from solver.case import Case
from solver.errors import InputError
from solver.timescales import utc_to_jd_tdb
from solver.window import Arc, CaseBodies, WindowGrid, grid_axes, select_arc, solve_cell

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
    family_data,
    grid_best_point,
    jd_tdb_to_unix_ms,
    map_data,
    map_point,
    utc_text,
)
from .shortlist import Shortlist
from .state import (
    ViewState,
    changes_from_controls,
    fit_arcs,
    from_query,
    parse_arcs,
    plot_x_to_unix_ms,
    unix_days_to_iso,
)

try:  # off-grid refinement of the best arc (solver/refine.py, on main)
    from solver.refine import refine_best as _refine_best
except ImportError:  # until it is merged, the best arc is the best grid node
    _refine_best = None

_MEMO_SIZE = 32
_MS_PER_DAY = 86_400_000.0


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


def _jd(text: str, field: str) -> float:
    return float(utc_to_jd_tdb(text, field=field))


class DashboardModel:
    """Cases, grids, arcs, figures and the shortlist for one server."""

    def __init__(self, settings: Settings, *, store: GridStore | None = None) -> None:
        self.settings = settings
        self.catalogue = CaseCatalogue(settings.cases_dir, settings.uploads_dir)
        self.grids = store or GridStore(GridCache(settings.cache_dir))
        self.shortlist = Shortlist(settings.shortlist_path)
        self._best = _Memo()
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
        return view, case, notes

    def view_for_case(self, case_id: str, metric: str) -> tuple[ViewState, Case]:
        """A fresh view of a case file (the case picker)."""
        view = ViewState(case=case_id, metric=metric)
        case = self.catalogue.effective(view)
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

    def bodies(self, case: Case) -> CaseBodies:
        key = case.normalized().__repr__()
        hit = self._bodies.get(key)
        return hit if hit is not None else self._bodies.put(key, CaseBodies.of(case))

    def best_arc(self, case: Case, grid: WindowGrid, metric: str, arcs: str) -> Arc | None:
        """The best arc within limits among the arcs shown: refined off the grid when the
        engine offers it, else the best grid node, solved exactly."""
        key = (grid.provenance.get("case_hash"), id(grid), metric, arcs)
        hit = self._best.get(key)
        if hit is not None:
            return hit or None
        revolutions, branch = parse_arcs(arcs)
        arc = None
        if _refine_best is not None:
            from .prepare import shown_slot

            arc = _refine_best(case, grid, metric, slot=shown_slot(grid, arcs))
        else:
            point = grid_best_point(grid, metric, arcs)
            if point is not None:
                i = int(
                    np.argmin(np.abs(jd_tdb_to_unix_ms(grid.departure_jd_tdb) - point.departure_ms))
                )
                j = int(
                    np.argmin(np.abs(jd_tdb_to_unix_ms(grid.arrival_jd_tdb) - point.arrival_ms))
                )
                cell = solve_cell(
                    case, grid.departure_jd_tdb[i], grid.arrival_jd_tdb[j], self.bodies(case)
                )
                arc = select_arc(cell, revolutions, branch, metric)
        self._best.put(key, arc or False)
        return arc

    def selection(self, view: ViewState, case: Case, grid: WindowGrid | None) -> Selection | None:
        """The selected cell's arcs and the arc shown (None while the best arc awaits its grid)."""
        revolutions, branch = parse_arcs(view.arcs)
        if view.selected:
            dep = _jd(view.selected[0], "selected departure")
            arr = _jd(view.selected[1], "selected arrival")
            arcs = solve_cell(case, dep, arr, self.bodies(case))
            return Selection(arcs, select_arc(arcs, revolutions, branch, view.metric), False)
        if grid is None:
            return None
        best = self.best_arc(case, grid, view.metric, view.arcs)
        if best is None:
            return None
        arcs = solve_cell(case, best.departure_jd_tdb, best.arrival_jd_tdb, self.bodies(case))
        return Selection(arcs, select_arc(arcs, revolutions, branch, view.metric), True)

    # -- figures ---------------------------------------------------------------------------
    def _points(self, view: ViewState, case: Case, grid: WindowGrid):
        best_arc = self.best_arc(case, grid, view.metric, view.arcs)
        label = "best arc" + (" (refined)" if _refine_best is not None else " (grid node)")
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
        return best, selected

    def map_figure(self, view: ViewState, case: Case, grid: WindowGrid) -> go.Figure:
        """The full window map for a view whose grid is ready."""
        best, selected = self._points(view, case, grid)
        key = (id(grid), view.metric, view.arcs)
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
            f"{metric_label(view.metric)} — {case.departure_body.capitalize()} to "
            f"{case.target_body.capitalize()}"
        )

    def map_patch(self, patch, view: ViewState, case: Case, grid: WindowGrid, metric_changed: bool):
        """Fill a ``dash.Patch`` of the shown map: markers only, or a new metric as well."""
        best, selected = self._points(view, case, grid)
        if metric_changed:
            key = (id(grid), view.metric, view.arcs)
            data = self._map.get(key) or self._map.put(
                key, map_data(grid, view.metric, view.arcs, max_points=DISPLAY_MAX_POINTS)
            )
            data = replace(data, best=best, selected=selected, title=self.map_title(view, case))
            return figures.map_metric_patch(patch, data)
        unit = ""
        figures.set_point(patch, "best", best, unit)
        figures.set_point(patch, "selected", selected, unit)
        return patch

    def preview_figure(self, view: ViewState, case: Case, dep_days, arr_days) -> go.Figure:
        """A coarse window map for slider positions being dragged (InputError if refused)."""
        from solver.window import compute_window

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
            from solver.window import provenance as make_provenance

            provenance = make_provenance(case)
        details = arc_details(case, sel.arc, provenance, bodies)
        return (
            figures.arc_view_figure(scene),
            figures.family_chart_figure(fam),
            details,
            sel,
        )
