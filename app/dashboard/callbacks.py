"""Callbacks: unpack component values, ask the model, pack the answer.

The callbacks, and what starts them:

* ``sync_view``: the URL, every control and a click on the map. It is the one place where the
  view state changes; it writes the URL (so the address bar always holds a link to the view),
  the view store, and, when a link or the case picker sets the view, every control.
* ``draw_map``: the view store (full map, or a ``Patch`` of the markers or metric), the date
  sliders while dragged (coarse preview) and the grid-job poll (progress, then the map).
  One callback, so a late answer to an old trigger never overwrites a newer map.
* ``draw_selection``: the arc view, family chart and details of the selected arc.
* ``keep_shortlist``: add, remove, and the poll that shows other viewers' entries.
* ``load_upload``, ``cancel_job``, ``send_download``, and client-side helpers (slider labels,
  the copy-link button, PNG downloads).
"""

from __future__ import annotations

import math
from dataclasses import replace
from typing import Any

from dash import (
    ALL,
    Input,
    Output,
    Patch,
    State,
    ctx,
    dcc,
    no_update,
)

from solver.errors import InputError
from solver.window.provenance import window_cache_key

from . import layout, theme
from .exports import arc_json, arc_oem, figure_html, grid_csv, safe_name
from .layout import CONTROL_IDS, SLIDER_IDS
from .model import DashboardModel
from .prepare import display_name
from .state import (
    ViewState,
    arc_choices,
    control_values,
    iso_to_unix_days,
    to_query,
    unix_days_to_iso,
)

# ---------------------------------------------------------------------------------------------
# Slider domains

_SLIDER_MARKS = 4
MAP_WAIT_S = 0.4
"""How long the map callback waits for a new grid before showing progress instead."""
SELECTION_WAIT_S = 2.0
"""How long the selection callback waits for the grid its best arc needs (it is redrawn when
the map arrives in any case)."""
_MONTHS = "Jan Feb Mar Apr May Jun Jul Aug Sep Oct Nov Dec".split()


def slider_props(base_days: list[float], view_days: list[float], step_days: float) -> dict:
    """min, max, step, marks and value of a date slider.

    The domain reaches half the case file's window beyond each end (at least ten grid steps),
    widened to hold the view's own dates; it is aligned to the grid step so the case's own
    dates are reachable exactly.
    """
    start, end = base_days
    step = max(float(step_days), 1.0 / 1440.0)
    pad = max(0.5 * (end - start), 10.0 * step)
    pad = math.ceil(pad / step) * step
    lo = start - pad
    hi = end + pad
    while view_days[0] < lo:
        lo -= pad
    while view_days[1] > hi:
        hi += pad
    return {
        "min": lo,
        "max": hi,
        "step": step,
        "marks": slider_marks(lo, hi),
        "value": [float(view_days[0]), float(view_days[1])],
    }


def slider_marks(lo: float, hi: float) -> dict:
    """A few calendar labels spread over a slider's domain."""
    span = hi - lo
    marks = {}
    for k in range(_SLIDER_MARKS):
        days = lo + span * (k + 0.5) / _SLIDER_MARKS
        text = unix_days_to_iso(days)
        if span > 90:
            label = _MONTHS[int(text[5:7]) - 1] + " " + text[:4]
        elif span > 3:
            label = text[5:10]  # month-day
        else:
            label = text[11:16] if "T" in text else "00:00"
        marks[round(days, 6)] = {"label": label}
    return marks


# ---------------------------------------------------------------------------------------------
# Progress panel


def _set_progress(out: dict, status: dict | None) -> None:
    """Fill the progress panel's outputs: bar and Cancel while a job runs, the reason and
    "Compute again" after it was cancelled or failed, nothing when there is no job."""
    out["panel"], out["fill"], out["text"] = _progress(status)
    running = bool(status) and status["state"] == "running"
    stopped = bool(status) and status["state"] in ("cancelled", "failed")
    out["cancel_style"] = {} if running else {"display": "none"}
    out["retry_style"] = {} if stopped else {"display": "none"}


def _progress(status: dict | None) -> tuple[dict, dict, str]:
    """(panel style, fill style, text) for a job status, hidden when there is none."""
    if not status:
        return {"display": "none"}, {"width": "0%"}, ""
    state = status["state"]
    if state == "running":
        percent = 100.0 * status["fraction"]
        text = f"Solving the window… {percent:.0f}% ({status['elapsed_s']:.1f} s)"
        return {"display": "flex"}, {"width": f"{percent:.1f}%"}, text
    return (
        {"display": "flex"},
        {"width": "0%"},
        status.get("message") or state,
    )


def register(app, model: DashboardModel) -> None:
    """Attach every callback of the page to ``app``."""
    control_inputs = {key: Input(cid, "value") for key, cid in CONTROL_IDS.items()}

    # ---- the view ------------------------------------------------------------------------
    view_outputs: dict[str, Output] = {
        "search": Output("location-page-url", "search"),
        "store": Output("store-view-state", "data"),
        "message": Output("div-message-view", "children"),
        "case_options": Output("dropdown-case", "options"),
        "case_value": Output("dropdown-case", "value"),
        "title": Output("text-case-title", "children"),
        "description": Output("text-case-description", "children"),
        "central": Output("text-central-body", "children"),
        "metric": Output("dropdown-metric", "value"),
        "metric_options": Output("dropdown-metric", "options"),
        "arc_options": Output("dropdown-arc-slot", "options"),
        "arc_value": Output("dropdown-arc-slot", "value"),
        "dep_options": Output("dropdown-body-departure", "options"),
        "tgt_options": Output("dropdown-body-target", "options"),
    }
    for url, sid in SLIDER_IDS.items():
        for prop in ("min", "max", "step", "marks", "value"):
            view_outputs[f"{url}_{prop}"] = Output(sid, prop)
    for key, cid in CONTROL_IDS.items():
        view_outputs[f"control:{key}"] = Output(cid, "value")

    @app.callback(
        output=view_outputs,
        inputs={
            "search": Input("location-page-url", "search"),
            "case_id": Input("dropdown-case", "value"),
            "dep": Input(SLIDER_IDS["dep"], "value"),
            "arr": Input(SLIDER_IDS["arr"], "value"),
            "controls": control_inputs,
            "metric": Input("dropdown-metric", "value"),
            "arcs": Input("dropdown-arc-slot", "value"),
            "click": Input("graph-window-map", "clickData"),
            "current": State("store-view-state", "data"),
        },
    )
    def sync_view(search, case_id, dep, arr, controls, metric, arcs, click, current):
        out: dict[str, Any] = dict.fromkeys(view_outputs, no_update)
        trigger = ctx.triggered_id
        view = ViewState.from_dict(current) if current else None
        if (
            view is not None
            and trigger == "location-page-url"
            and (not search or search == to_query(view))
        ):
            return out  # the address bar echoing the page's first or last query: nothing new
        if view is None or trigger in (None, "location-page-url"):
            view, case, notes = model.view_from_url(search)
            _fill_controls(out, model, view, case)
            out["message"] = _notes(notes)
        elif trigger == "dropdown-case":
            if case_id == view.case:
                return out
            try:
                view, case = model.view_for_case(case_id, view.metric)
            except InputError as exc:
                out["message"] = _notes([str(exc)])
                return out
            _fill_controls(out, model, view, case)
            out["message"] = ""
        elif trigger == "graph-window-map":
            points = (click or {}).get("points") or []
            if not points:
                return out
            view = model.select_point(view, model.case(view), points[0]["x"], points[0]["y"])
        elif trigger == "dropdown-metric":
            if metric == view.metric:
                return out
            view = replace(view, metric=metric)
        elif trigger == "dropdown-arc-slot":
            if not arcs or arcs == view.arcs:
                return out
            view = replace(view, arcs=arcs)
        else:
            values = dict(controls)
            values["dep"], values["arr"] = dep, arr
            try:
                new_view, case = model.view_from_controls(view, values)
            except InputError as exc:
                out["message"] = _notes([f"Not applied: {exc}"])
                return out
            if new_view.case_part() != view.case_part() or trigger in SLIDER_IDS.values():
                out["message"] = ""
            old_revs = model.case(view).max_revolutions
            if case.max_revolutions != old_revs:
                out["arc_options"] = _arc_options(case.max_revolutions)
                out["arc_value"] = new_view.arcs
            view = new_view
        out["store"] = view.to_dict()
        query = to_query(view)
        if query != search:
            out["search"] = query
        return out

    # ---- the window map ------------------------------------------------------------------
    map_outputs = {
        "figure": Output("graph-window-map", "figure"),
        "shown": Output("store-map-shown", "data"),
        "poll_off": Output("interval-grid-poll", "disabled"),
        "panel": Output("div-grid-progress", "style"),
        "fill": Output("div-grid-progress-fill", "style"),
        "text": Output("text-grid-progress", "children"),
        "job": Output("store-grid-job", "data"),
        "cancel_style": Output("button-grid-cancel", "style"),
        "retry_style": Output("button-grid-retry", "style"),
    }

    @app.callback(
        output=map_outputs,
        inputs={
            "view_data": Input("store-view-state", "data"),
            "dep_drag": Input(SLIDER_IDS["dep"], "drag_value"),
            "arr_drag": Input(SLIDER_IDS["arr"], "drag_value"),
            "tick": Input("interval-grid-poll", "n_intervals"),
            "retry": Input("button-grid-retry", "n_clicks"),
            "shown": State("store-map-shown", "data"),
            "job_key": State("store-grid-job", "data"),
        },
        prevent_initial_call=True,
    )
    def draw_map(view_data, dep_drag, arr_drag, tick, retry, shown, job_key):
        out: dict[str, Any] = dict.fromkeys(map_outputs, no_update)
        if not view_data:
            return out
        view = ViewState.from_dict(view_data)
        case = model.case(view)
        trigger = ctx.triggered_id
        # Inputs that changed in the same round arrive together and ctx.triggered_id names only
        # the first: a new view (or a retry) must win over a slider's drag echo or a poll tick,
        # or the map of a freshly loaded page is never drawn.
        if _fired() & {"store-view-state", "button-grid-retry"}:
            trigger = "store-view-state"
        if trigger in SLIDER_IDS.values():
            dep_now = [iso_to_unix_days(case.departure_start), iso_to_unix_days(case.departure_end)]
            arr_now = [iso_to_unix_days(case.arrival_start), iso_to_unix_days(case.arrival_end)]
            dep = dep_drag or dep_now
            arr = arr_drag or arr_now
            if _close(dep, dep_now) and _close(arr, arr_now):
                return out
            try:
                out["figure"] = model.preview_figure(view, case, dep, arr)
            except InputError:
                return out
            out["shown"] = {"kind": "preview"}
            return out
        if trigger == "interval-grid-poll":
            job = model.grids.job(job_key) if job_key else None
            if job is None:
                return _poll_refinement(out, model, view, case, shown)
            if job.state == "running":
                _set_progress(out, job.status())
                return out
            if job.key != window_cache_key(case) or job.state != "done":
                out["poll_off"] = True
                _set_progress(out, job.status() if job.state != "done" else None)
                if job.state != "done" and (not shown or shown.get("kind") == "empty"):
                    out["figure"] = theme.empty_figure(
                        "No grid: "
                        + (job.message or job.state)
                        + " Change a setting or press “Compute again”."
                    )
                return out
        grid, job = model.request_grid(case)
        if grid is None and job is not None:
            if job_key and job_key != job.key:
                model.grids.cancel(job_key)  # this tab moved on; its old job is not needed
            grid = model.grids.wait(job, MAP_WAIT_S)
            if grid is None:
                out["job"] = job.key
                out["poll_off"] = job.state != "running"
                _set_progress(out, job.status())
                if not shown or shown.get("kind") == "empty":
                    out["figure"] = theme.empty_figure("Solving the window…")
                    out["shown"] = {"kind": "empty"}
                return out
        key = window_cache_key(case)
        new_shown = {"kind": "full", "key": key, "metric": view.metric, "arcs": view.arcs}
        same_grid = (
            shown
            and shown.get("kind") == "full"
            and shown.get("key") == key
            and shown.get("arcs") == view.arcs
        )
        metric_changed = bool(shown) and shown.get("metric") != view.metric
        if same_grid and metric_changed and view.arcs == "best" and grid.shape[2] > 1:
            same_grid = False  # the best arc of a cell depends on the metric: redraw it all
        if same_grid:
            out["figure"] = model.map_patch(Patch(), view, case, grid, metric_changed)
        else:
            out["figure"] = model.map_figure(view, case, grid)
        refined = model.best_refined(view, case, grid)
        out["shown"] = {**new_shown, "refined": refined}
        out["poll_off"] = refined  # keep polling until the refined best arc can be shown
        out["job"] = None
        _set_progress(out, None)
        return out

    @app.callback(
        Output("text-grid-progress", "children", allow_duplicate=True),
        Input("button-grid-cancel", "n_clicks"),
        State("store-grid-job", "data"),
        prevent_initial_call=True,
    )
    def cancel_job(n_clicks, job_key):
        if n_clicks and job_key and model.grids.cancel(job_key):
            return "Cancelling…"
        return no_update

    # ---- the selected arc ----------------------------------------------------------------
    @app.callback(
        Output("graph-arc-view", "figure"),
        Output("graph-family-chart", "figure"),
        Output("div-details-arc", "children"),
        Output("store-selected-arc", "data"),
        Input("store-view-state", "data"),
        Input("interval-grid-poll", "n_intervals"),
        State("store-selected-arc", "data"),
        prevent_initial_call=True,
    )
    def draw_selection(view_data, tick, drawn):
        # The grid poll (not the map's own outputs) wakes this callback up for a best arc whose
        # grid was still being solved: an input written by the map callback would make the
        # page hold this callback back until every map update had arrived.
        nothing = (no_update,) * 4
        if not view_data:
            return nothing
        view = ViewState.from_dict(view_data)
        query = to_query(view)
        polled = _fired() == {"interval-grid-poll"}  # a tick alone, not with a new view
        same = bool(drawn) and drawn.get("for_view") == query
        if polled and (view.selected or (same and drawn.get("refined", True))):
            return nothing
        case = model.case(view)
        grid = model.grids.memory_get(window_cache_key(case))
        if polled and same and grid is not None and not model.best_refined(view, case, grid):
            return nothing  # still the grid node shown: wait for the refined best arc
        if grid is None and not view.selected:
            if polled:
                return nothing
            # The best arc needs the grid: share the map's job and wait a moment for it, so a
            # small grid's views arrive with the map rather than after it.
            grid, job = model.request_grid(case)
            if grid is None and job is not None:
                grid = model.grids.wait(job, SELECTION_WAIT_S)
        try:
            result = model.selection_figures(view, case, grid)
        except InputError as exc:
            waiting = theme.empty_figure(str(exc))
            return waiting, waiting, layout.details_children([], str(exc)), None
        if result is None:
            text = "Waiting for the grid…" if grid is None else "No arc within the limits."
            waiting = theme.empty_figure(text)
            return waiting, waiting, layout.details_children([], text), None
        arc_fig, family_fig, details, sel = result
        note = "The selected cell (clicked, or named by the link)."
        if sel.is_best:
            note = (
                "The best arc of the window, refined off the grid."
                if sel.refined
                else "The best arc's grid cell; refining it off the grid…"
            )
        return (
            arc_fig,
            family_fig,
            layout.details_children(details, note),
            _selected_store(query, sel),
        )

    # ---- uploads -------------------------------------------------------------------------
    @app.callback(
        Output("dropdown-case", "options", allow_duplicate=True),
        Output("dropdown-case", "value", allow_duplicate=True),
        Output("div-message-upload", "children"),
        Input("upload-case-file", "contents"),
        State("upload-case-file", "filename"),
        prevent_initial_call=True,
    )
    def load_upload(contents, filename):
        if not contents:
            return no_update, no_update, no_update
        try:
            case_id = model.catalogue.add_upload(filename, contents)
        except InputError as exc:
            return no_update, no_update, _notes([f"{filename or 'The file'} was not loaded: {exc}"])
        title = model.catalogue.load(case_id).title
        return model.catalogue.options(), case_id, html_ok(f"Loaded “{title}”.")

    # ---- shortlist -----------------------------------------------------------------------
    @app.callback(
        Output("div-shortlist-table", "children"),
        Output("store-shortlist-version", "data"),
        Output("input-shortlist-note", "value"),
        Output("div-message-shortlist", "children"),
        Input("button-shortlist-add", "n_clicks"),
        Input({"type": "button-shortlist-remove", "index": ALL}, "n_clicks"),
        Input("interval-shortlist-poll", "n_intervals"),
        State("input-shortlist-note", "value"),
        State("input-shortlist-author", "value"),
        State("store-view-state", "data"),
        State("store-shortlist-version", "data"),
    )
    def keep_shortlist(add, removes, tick, note, author, view_data, version):
        trigger = ctx.triggered_id
        if "button-shortlist-add" in _fired():
            trigger = "button-shortlist-add"  # a click that lands with a poll tick still counts
        note_out, message = no_update, no_update
        shortlist = model.shortlist
        view = ViewState.from_dict(view_data) if view_data else None
        if trigger == "button-shortlist-add" and add:
            try:
                if view is None:
                    raise InputError("selected arc", "none", "a selected cell with an arc")
                model.keep(view, note, author)
            except InputError as exc:
                message = _notes([f"Not kept: {exc}"])
            else:
                note_out, message = "", html_ok("Kept in the shortlist.")
        elif isinstance(trigger, dict) and trigger.get("type") == "button-shortlist-remove":
            if ctx.triggered and ctx.triggered[0].get("value"):
                shortlist.remove(str(trigger["index"]))
        now = shortlist.version()
        if now == version and trigger not in ("button-shortlist-add",) and ctx.triggered_id:
            return no_update, no_update, note_out, message
        entries = shortlist.entries()
        table = layout.shortlist_children(entries, view.case if view else None)
        return table, now, note_out, message

    # ---- downloads -----------------------------------------------------------------------
    download_buttons = {
        "button-download-grid-csv": "grid",
        "button-download-arc-oem": "oem",
        "button-download-arc-json": "json",
        "button-download-map-html": "map",
        "button-download-arcview-html": "arcview",
        "button-download-family-html": "family",
    }

    @app.callback(
        Output("download-file", "data"),
        Output("div-message-download", "children"),
        *[Input(b, "n_clicks") for b in download_buttons],
        State("store-view-state", "data"),
        prevent_initial_call=True,
    )
    def send_download(*args):
        view_data = args[-1]
        kind = download_buttons.get(ctx.triggered_id)
        if not kind or not view_data or not (ctx.triggered and ctx.triggered[0].get("value")):
            return no_update, no_update
        view = ViewState.from_dict(view_data)
        case = model.case(view)
        grid = model.grids.memory_get(window_cache_key(case))
        stem = safe_name(case.title)
        if kind == "grid":
            if grid is None:
                return no_update, _notes(["The grid is still being solved."])
            return dcc.send_string(grid_csv(grid), f"{stem}_grid.csv"), ""
        if kind == "map":
            if grid is None:
                return no_update, _notes(["The grid is still being solved."])
            fig = model.map_figure(view, case, grid)
            return dcc.send_string(figure_html(fig), f"{stem}_window_map.html"), ""
        result = model.selection_figures(view, case, grid)
        if result is None:
            return no_update, _notes(["Select a cell with an arc first."])
        arc_fig, family_fig, _, sel = result
        if not sel.arc.ok and kind in ("oem", "json"):
            return no_update, _notes(["The selected cell has no arc to export."])
        if kind == "oem":
            return dcc.send_string(arc_oem(case, sel.arc), f"{stem}_arc.oem"), ""
        if kind == "json":
            return dcc.send_string(arc_json(case, sel.arc), f"{stem}_arc.json"), ""
        fig = arc_fig if kind == "arcview" else family_fig
        return dcc.send_string(figure_html(fig), f"{stem}_{kind}.html"), ""

    # ---- client-side helpers -------------------------------------------------------------
    for sid, text_id in (
        (SLIDER_IDS["dep"], "text-departure-range"),
        (SLIDER_IDS["arr"], "text-arrival-range"),
    ):
        app.clientside_callback(
            "function(drag, value) { return window.arcwindow.rangeText(drag || value); }",
            Output(text_id, "children"),
            Input(sid, "drag_value"),
            Input(sid, "value"),
        )
    app.clientside_callback(
        "function(d, a) { return window.arcwindow.stepHint(d, a); }",
        Output("text-step-hint", "children"),
        Input("input-step-departure", "value"),
        Input("input-step-arrival", "value"),
    )
    # The copy button always holds the link to the current view, ready before any click.
    app.clientside_callback(
        "function(search) { return window.location.origin + window.location.pathname"
        " + (search || ''); }",
        Output("clipboard-view-link", "content"),
        Input("location-page-url", "search"),
    )
    app.clientside_callback(
        "function(a, b, c) { return window.arcwindow.downloadPng("
        "window.dash_clientside.callback_context.triggered_id); }",
        Output("button-png-map", "title"),
        Input("button-png-map", "n_clicks"),
        Input("button-png-arcview", "n_clicks"),
        Input("button-png-family", "n_clicks"),
        prevent_initial_call=True,
    )


# ---------------------------------------------------------------------------------------------
# Helpers


def _fired() -> set[str]:
    """Ids of every input that changed in this round (``ctx.triggered_id`` names only one)."""
    return {t["prop_id"].rsplit(".", 1)[0] for t in ctx.triggered or [] if t.get("prop_id")}


def _poll_refinement(out: dict, model: DashboardModel, view: ViewState, case, shown) -> dict:
    """A grid-poll tick with no grid job: move the best-arc star once it has been refined."""
    key = window_cache_key(case)
    grid = model.grids.memory_get(key)
    waiting = (
        shown
        and shown.get("kind") == "full"
        and shown.get("key") == key
        and not shown.get("refined", True)
        and grid is not None
    )
    if not waiting:
        out["poll_off"] = True
        _set_progress(out, None)
        return out
    if model.best_refined(view, case, grid):
        out["figure"] = model.map_patch(Patch(), view, case, grid, False)
        out["shown"] = {**shown, "refined": True}
        out["poll_off"] = True
    return out


def _close(a, b, tol_days: float = 0.5 / 1440.0) -> bool:
    return all(abs(float(x) - float(y)) < tol_days for x, y in zip(a, b, strict=True))


def _notes(lines: list[str]):
    from dash import html

    if not lines:
        return ""
    return html.Ul([html.Li(line) for line in lines], className="aw-message-error")


def html_ok(text: str):
    from dash import html

    return html.Div(text, className="aw-message-ok")


def _selected_store(query: str, sel) -> dict:
    """What the page remembers of the arc shown: the view it was drawn for, and whether a best
    arc shown was already the refined one (the grid poll redraws it once refined)."""
    return {"for_view": query, "refined": sel.refined}


def _arc_options(max_revolutions: int) -> list[dict]:
    return [{"value": v, "label": label} for v, label in arc_choices(max_revolutions)]


def _fill_controls(out: dict, model: DashboardModel, view: ViewState, case) -> None:
    """Every control's value (and the sliders' domains) from a view and its case."""
    base = model.catalogue.load(view.case)
    values = control_values(case)
    base_values = control_values(base)
    for key in CONTROL_IDS:
        out[f"control:{key}"] = values.get(key)
    for url in SLIDER_IDS:
        step = case.departure_step_days if url == "dep" else case.arrival_step_days
        base_step = base.departure_step_days if url == "dep" else base.arrival_step_days
        props = slider_props(base_values[url], values[url], min(step, base_step))
        for prop, value in props.items():
            out[f"{url}_{prop}"] = value
    out["case_options"] = model.catalogue.options()
    out["case_value"] = view.case
    out["metric"] = view.metric
    out["metric_options"] = model.metric_options(case)
    out["arc_options"] = _arc_options(case.max_revolutions)
    out["arc_value"] = view.arcs
    out["title"] = case.title
    out["description"] = case.description
    out["central"] = f"Central body: {display_name(case.central_body)}"
    options = _body_options(case)
    out["dep_options"] = options
    out["tgt_options"] = options


def _body_options(case) -> list[dict]:
    """Bodies that orbit the case's central body (the ones a transfer can join)."""
    central = case.central_body.lower()
    names = [b.name for b in case.registry() if (b.central_body or "").lower() == central]
    return [{"value": n, "label": display_name(n)} for n in names]


__all__ = ["register", "slider_marks", "slider_props"]
