"""The window page (``/``): its layout and its callbacks.

Callbacks only unpack component values, ask the pure planners (``view_changes``, ``map_loop``)
what to do, call the service (``window_service``) and pack the answer:

* ``sync_view``: the page's link, the case picker, every control, a click on the map, the metric
  and arcs pickers. The one place the view changes; it writes the view, its URL query (the page
  replaces the address with it), every control's refused-value message, and a fresh grid
  status (the view's request identity: starting or joining its grid's job).
* ``poll_grid``: the poll, "Cancel" and "Compute again": moves the grid status on (``plan_poll``)
  and paces the poll (it backs off, and stops when the view is settled).
* ``draw_map``: a new grid status, or a date slider being dragged: the map, a patch of it, a
  preview, the progress figure or an error (``plan_map``).
* ``draw_selection``: a new grid status: the arc view, family chart and details
  (``plan_selection``).
* ``load_upload``, ``remove_case``, ``keep_shortlist``, ``send_download``, and client-side
  helpers (the address bar, slider labels, the copy button, PNG downloads with the caution,
  the upload size check, refused controls marked for screen readers).
"""

from __future__ import annotations

import itertools
import json
import math
from dataclasses import asdict
from typing import Any

from dash import (
    ALL,
    Input,
    Output,
    Patch,
    State,
    ctx,
    dcc,
    html,
    no_update,
)
from flask import request

from solver.errors import InputError
from solver.time_units import MINUTE_DAYS, MINUTES_PER_DAY
from solver.window.metrics import METRICS

from .. import theme
from ..case_catalogue import MAX_UPLOAD_BYTES, clean_filename, forget, my_case_ids, remember
from ..controls import (
    CONTROL_BY_KEY,
    CONTROL_IDS,
    CONTROLS,
    ERROR_TARGETS,
    LAUNCH_FIELD_KEYS,
    SLIDER_IDS,
    SLIDERS,
    launch_fields,
)
from ..display_data import display_name, mass_summary
from ..exports import arc_json, arc_oem, figure_html, view_stem
from ..grid_jobs import grid_key
from ..map_loop import (
    CANCELLED,
    GridStatus,
    MapPlan,
    Progress,
    Shown,
    plan_map,
    plan_poll,
    plan_selection,
    poll_interval_ms,
    progress_of,
    status_from_ticket,
)
from ..shortlist import ShortlistUnavailable
from ..view_changes import ViewInputs, errors_by_target, plan_view, short
from ..view_state import (
    ViewState,
    arc_choices,
    control_values,
    iso_to_unix_days,
    to_query,
    unix_days_to_iso,
)
from ..window_service import WindowService
from . import window_layout as layout
from .callback_parts import error_lines, fired_inputs, ok_line

PATH = "/"
TITLE = "arcwindow"
NAME = "Window map"

MAP_WAIT_S = 0.4
"""How long the map callback waits for a grid just asked for before showing progress instead
(small grids then arrive with no progress flash)."""
_SLIDER_MARKS = 4
_MONTHS = "Jan Feb Mar Apr May Jun Jul Aug Sep Oct Nov Dec".split()


def page_layout(**query):
    return layout.page_from_query(**query)


# ---------------------------------------------------------------------------------------------
# Slider domains (pure)


def slider_props(base_days: list[float], view_days: list[float], step_days: float) -> dict:
    """min, max, step, marks and value of a date slider.

    The domain reaches half the case file's window beyond each end (at least ten grid steps),
    widened to hold the view's own dates; it is aligned to the grid step so the case's own
    dates are reachable exactly.
    """
    start, end = base_days
    step = max(float(step_days), MINUTE_DAYS)
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
# Small helpers


def _read_view(data: Any) -> ViewState | None:
    try:
        return ViewState.from_dict(data) if data else None
    except InputError:
        return None


def _arc_options(max_revolutions: int) -> list[dict]:
    return [{"value": v, "label": label} for v, label in arc_choices(max_revolutions)]


def _body_options(case) -> list[dict]:
    """Bodies that orbit the case's central body (the ones a transfer can join)."""
    central = case.central_body.lower()
    names = [b.name for b in case.registry() if (b.central_body or "").lower() == central]
    return [{"value": n, "label": display_name(n)} for n in names]


def _progress_props(progress: Progress) -> dict[str, Any]:
    """The progress strip's component properties (by ``PROGRESS_OUTPUTS`` name)."""
    return {
        "panel": {"display": "flex"} if progress.visible else {"display": "none"},
        "fill": {"width": f"{100 * progress.fraction:.1f}%"},
        "text": progress.text,
        "cancel_style": {} if progress.cancel else {"display": "none"},
        "retry_style": {} if progress.retry else {"display": "none"},
    }


_ANSWERS = itertools.count()


def _answer(
    view: str, status: GridStatus | None, poll_ms: int | None, progress: Progress
) -> dict[str, Any]:
    """What the view callback or a poll answers (the ``store-grid-polled`` data): for which view,
    the status moved on (None: unchanged), when to poll next (None: stop) and the progress
    strip. The page applies it only while it still shows that view (``acceptGridAnswer``), so an
    answer that arrives late, for a view the tab has left, changes nothing."""
    return {
        "view": view,
        "status": None if status is None else status.to_dict(),
        "poll_ms": poll_ms,
        "progress": _progress_props(progress),
        "seq": next(_ANSWERS),  # every answer is new to the page, even one like the last
    }


def _first_poll(status: GridStatus) -> int | None:
    return None if status.settled else poll_interval_ms(0)


def _address() -> str:
    try:
        return request.remote_addr or ""
    except RuntimeError:  # outside a request (tests calling the function directly)
        return ""


def grid_status(
    service: WindowService, view: ViewState, case, viewer: str, restarts: int = 0
) -> tuple[GridStatus, Progress]:
    """Ask for a view's grid (start or join its job) and make the view's first status."""
    key = grid_key(case)
    query = to_query(view)
    slots = 2 * case.max_revolutions + 1
    try:
        ticket = service.request_grid(case, viewer or "anonymous", _address())
    except InputError as exc:
        status = GridStatus(query, key, "failed", slots=slots, message=short(f"No grid: {exc}"))
        return status, progress_of(status, None)
    best = None
    if ticket.phase == "ready":
        best = service.best_state(view, case, service.grid(case))
    status = status_from_ticket(query, key, slots, ticket.phase, best, ticket.message)
    status = GridStatus(**{**status.to_dict(), "restarts": restarts})
    return status, progress_of(status, asdict(ticket))


# ---------------------------------------------------------------------------------------------


def register_callbacks(app, service: WindowService) -> None:
    """Attach the window page's callbacks to ``app``."""
    _register_view(app, service)
    _register_map(app, service)
    _register_selection(app, service)
    _register_cases(app, service)
    _register_shortlist(app, service)
    _register_downloads(app, service)
    _register_clientside(app)


PROGRESS_OUTPUTS = {
    "panel": ("div-grid-progress", "style"),
    "fill": ("div-grid-progress-fill", "style"),
    "text": ("text-grid-progress", "children"),
    "cancel_style": ("button-grid-cancel", "style"),
    "retry_style": ("button-grid-retry", "style"),
}


def _register_view(app, service: WindowService) -> None:
    outputs: dict[str, Output] = {
        "store": Output("store-view-state", "data"),
        "query": Output("store-view-query", "data"),
        "status": Output("store-grid-status", "data"),
        "answer": Output("store-grid-polled", "data"),
        "message": Output("div-message-view", "children"),
        "case_options": Output("dropdown-case", "options"),
        "case_value": Output("dropdown-case", "value"),
        "remove_style": Output("button-case-remove", "style"),
        "my_cases": Output("store-my-cases", "data"),
        "title": Output("text-case-title", "children"),
        "description": Output("text-case-description", "children"),
        "central": Output("text-central-body", "children"),
        "metric": Output("dropdown-metric", "value"),
        "metric_options": Output("dropdown-metric", "options"),
        "arc_options": Output("dropdown-arc-slot", "options"),
        "arc_value": Output("dropdown-arc-slot", "value"),
        "errors": Output("store-control-errors", "data"),
        "stem": Output("store-download-stem", "data"),
        "redirect": Output("store-redirect", "data"),
    }
    for key in ("case.departure_body", "case.target_body", "spacecraft.vehicle"):
        outputs[f"options:{key}"] = Output(CONTROL_IDS[key], "options")
    outputs["vehicle_disabled"] = Output(CONTROL_IDS["spacecraft.vehicle"], "disabled")
    outputs["mass_summary"] = Output("text-mass-summary", "children")
    for slider in SLIDERS:
        for prop in ("min", "max", "step", "marks", "value"):
            outputs[f"{slider.url}_{prop}"] = Output(slider.id, prop)
    for control in CONTROLS:
        outputs[f"control:{control.key}"] = Output(control.id, "value")
    for key in LAUNCH_FIELD_KEYS:
        outputs[f"field:{key}"] = Output(f"field-{CONTROL_BY_KEY[key].setting.url}", "style")
    outputs["launch_hint"] = Output("text-launch-hint", "children")
    for target in ERROR_TARGETS:
        outputs[f"error:{target}"] = Output(f"text-error-{target}", "children")

    @app.callback(
        output=outputs,
        inputs={
            "page": Input("store-page-query", "data"),
            "case_id": Input("dropdown-case", "value"),
            "sliders": {s.url: Input(s.id, "value") for s in SLIDERS},
            "controls": {c.key: Input(c.id, "value") for c in CONTROLS},
            "metric": Input("dropdown-metric", "value"),
            "arcs": Input("dropdown-arc-slot", "value"),
            "click": Input("graph-window-map", "clickData"),
            "current": State("store-view-state", "data"),
            "viewer": State("store-viewer-id", "data"),
            "my_cases": State("store-my-cases", "data"),
        },
    )
    def sync_view(page, case_id, sliders, controls, metric, arcs, click, current, viewer, my_cases):
        out: dict[str, Any] = dict.fromkeys(outputs, no_update)
        fired = fired_inputs()
        view_now = _read_view(current)
        slider_ids = {s.id: s.url for s in SLIDERS}
        control_ids = {c.id: c.key for c in CONTROLS}
        if not fired or "store-page-query" in fired or view_now is None:
            trigger = "page"
        elif "dropdown-case" in fired:
            trigger = "case"
        elif "graph-window-map" in fired:
            trigger = "click"
        elif "dropdown-metric" in fired:
            trigger = "metric"
        elif "dropdown-arc-slot" in fired:
            trigger = "arcs"
        else:
            trigger = "controls"
        redirect = _sequence_redirect(service, trigger, page, case_id)
        if redirect:  # a case with a [sequence] section opens the sequence page
            out["redirect"] = redirect
            return out
        values = dict(controls)
        values.update(sliders)
        inputs = ViewInputs(
            trigger=trigger,
            search=page if isinstance(page, str) else "",
            case_id=case_id,
            values=values,
            fired=tuple(slider_ids.get(f) or control_ids.get(f, f) for f in fired),
            metric=metric,
            arcs=arcs,
            click=click,
        )
        plan = plan_view(
            inputs,
            view_now,
            cases=service.catalogue,
            from_link=service.view_from_url,
            for_case=service.view_for_case,
            select=service.select_point,
        )
        notes = list(plan.notes or [])
        if current and view_now is None:
            notes.insert(0, "The page's stored view was refused; it was read again from the link.")
        if plan.errors is not None:
            shown, rest = errors_by_target(plan.errors)
            for target in ERROR_TARGETS:
                out[f"error:{target}"] = shown.get(target, "")
            out["errors"] = shown
            if rest:
                notes += rest
        if plan.notes is not None or notes:
            out["message"] = error_lines(notes)
        view, case = plan.view, plan.case
        if view is None or case is None:
            return out
        if plan.fill:
            _fill_controls(out, service, view, case, my_cases)
        elif view_now is not None and case.max_revolutions != _revolutions(service, view_now):
            out["arc_options"] = _arc_options(case.max_revolutions)
            out["arc_value"] = view.arcs
        elif view_now is not None and view.arcs != view_now.arcs:
            out["arc_value"] = view.arcs
        out["store"] = view.to_dict()
        out["query"] = to_query(view)
        out["stem"] = view_stem(case, view)
        status, progress = grid_status(service, view, case, viewer)
        out["status"] = status.to_dict()
        out["answer"] = _answer(out["query"], status, _first_poll(status), progress)
        return out


def _sequence_redirect(service: WindowService, trigger: str, page: Any, case_id: Any) -> str:
    """The sequence page's address when the case asked for is a sequence ("" otherwise)."""
    from urllib.parse import parse_qs

    if trigger == "case" and isinstance(case_id, str):
        if service.catalogue.is_sequence(case_id):
            return "/sequence?case=" + case_id
        return ""
    if trigger == "page" and isinstance(page, str):
        params = parse_qs(page.lstrip("?"))
        wanted = (params.get("case") or [""])[0]
        if wanted and service.catalogue.is_sequence(wanted):
            return "/sequence" + page
    return ""


def _revolutions(service: WindowService, view: ViewState) -> int:
    try:
        return service.case(view).max_revolutions
    except InputError:
        return -1


def _fill_controls(out: dict, service: WindowService, view: ViewState, case, my_cases) -> None:
    """Every control's value (and the sliders' domains) from a view and its case."""
    base = service.catalogue.load(view.case)
    values = control_values(case)
    base_values = control_values(base)
    for control in CONTROLS:
        out[f"control:{control.key}"] = values.get(control.key)
    for slider in SLIDERS:
        step_key = "departure_step_days" if slider.url == "dep" else "arrival_step_days"
        step = min(getattr(case, step_key), getattr(base, step_key))
        for prop, value in slider_props(base_values[slider.url], values[slider.url], step).items():
            out[f"{slider.url}_{prop}"] = value
    mine = my_case_ids(my_cases)
    if view.case.startswith("upload-") and view.case not in mine:
        mine = remember(mine, view.case)  # a shared link to an upload: it joins this list
        out["my_cases"] = mine
    out["case_options"] = service.catalogue.options(mine)
    out["case_value"] = view.case
    out["remove_style"] = {} if view.case.startswith("upload-") else {"display": "none"}
    out["metric"] = view.metric
    out["metric_options"] = service.metric_options(case)
    out["arc_options"] = _arc_options(case.max_revolutions)
    out["arc_value"] = view.arcs
    out["title"] = case.title
    out["description"] = case.description
    out["central"] = f"Central body: {display_name(case.central_body)}"
    styles, hint = launch_fields(service.launch_limits(case), display_name(case.central_body))
    for key, style in styles.items():
        out[f"field:{key}"] = style
    out["launch_hint"] = hint
    options = _body_options(case)
    for key in ("case.departure_body", "case.target_body"):
        out[f"options:{key}"] = options
    vehicles = [{"value": v.name, "label": v.name} for v in case.mass.vehicles]
    out["options:spacecraft.vehicle"] = vehicles
    out["vehicle_disabled"] = not vehicles
    out["mass_summary"] = [html.Div(line) for line in mass_summary(case, service.bodies(case))]


# ---------------------------------------------------------------------------------------------
# The grid status and the map


def _register_map(app, service: WindowService) -> None:
    # The poll answers into its own store, never into the page's controls: the page applies an
    # answer (``acceptGridAnswer`` in assets/arcwindow.js) only while it shows the answer's view,
    # and arms exactly one more tick of the interval for each answer it applies. So one poll is
    # in flight at a time: Dash drops the answer of a request still in flight when the same
    # callback is asked again, and a poll ticking on its own clock on a server slower than the
    # interval never heard an answer (the status never moved on). And an answer for a view the
    # tab has left cannot stop the new view's polling nor overwrite its progress. The map and
    # the selection read the grid status, which the page copies from an applied answer: a
    # callback waits while any of its inputs is the output of a request in flight, and reading
    # the poll's output directly, a map would wait for ever on a busy server.

    @app.callback(
        Output("store-grid-polled", "data", allow_duplicate=True),
        Input("interval-grid-poll", "n_intervals"),
        Input("button-grid-retry", "n_clicks"),
        Input("button-grid-cancel", "n_clicks"),
        State("store-grid-status", "data"),
        State("store-view-state", "data"),
        State("store-viewer-id", "data"),
        prevent_initial_call=True,
    )
    def poll_grid(tick, retry, cancel, status_data, view_data, viewer):
        fired = fired_inputs()
        if "interval-grid-poll" in fired:
            service.slowdown.poll_pause()  # test-only: a server too busy to answer in time
        view = _read_view(view_data)
        status = GridStatus.from_dict(status_data)
        if view is None:
            return _answer(status.view if status else "", None, None, Progress())
        query = to_query(view)
        try:
            case = service.case(view)
        except InputError as exc:
            return _answer(query, None, None, Progress(True, short(str(exc)), retry=False))
        if "button-grid-retry" in fired and retry:
            new, progress = grid_status(service, view, case, viewer)
            return _answer(query, new, _first_poll(new), progress)
        if "button-grid-cancel" in fired and cancel:
            if status is None or status.view != query or status.phase != "solving":
                return no_update
            service.grids.cancel(status.grid, viewer or "anonymous")
            new = GridStatus(
                **{
                    **status.to_dict(),
                    "phase": "cancelled",
                    "message": CANCELLED,
                    "polls": 0,
                }
            )
            return _answer(query, new, None, progress_of(new, None))
        ticket = None
        best = None
        if status is not None and status.view == query:
            if status.phase == "solving":
                ticket = asdict(service.ticket(status.grid, viewer or "anonymous"))
                if ticket["phase"] == "ready":
                    best = service.best_state(view, case, service.grid(case))
            elif status.phase == "ready":
                best = service.best_state(view, case, service.grid(case))
        plan = plan_poll(status, query, ticket, best)
        if plan.action == "restart" and plan.status is not None:
            new, progress = grid_status(service, view, case, viewer, plan.status.restarts)
            return _answer(query, new, _first_poll(new), progress)
        return _answer(query, plan.status, plan.interval_ms, plan.progress)

    map_outputs = {
        "figure": Output("graph-window-map", "figure"),
        "shown": Output("store-map-shown", "data"),
    }

    @app.callback(
        output=map_outputs,
        inputs={
            "status_data": Input("store-grid-status", "data"),
            "dep_drag": Input(SLIDER_IDS["dep"], "drag_value"),
            "arr_drag": Input(SLIDER_IDS["arr"], "drag_value"),
            "dep_value": State(SLIDER_IDS["dep"], "value"),
            "arr_value": State(SLIDER_IDS["arr"], "value"),
            "view_data": State("store-view-state", "data"),
            "shown_data": State("store-map-shown", "data"),
        },
        prevent_initial_call=True,
    )
    def draw_map(status_data, dep_drag, arr_drag, dep_value, arr_value, view_data, shown_data):
        service.slowdown.map_pause()  # test-only: an answer that lands after the page is left
        out: dict[str, Any] = dict.fromkeys(map_outputs, no_update)
        view = _read_view(view_data)
        if view is None:
            return out
        status = GridStatus.from_dict(status_data)
        shown = Shown.from_dict(shown_data)
        fired = fired_inputs()
        trigger = "status" if "store-grid-status" in fired or not fired else "drag"
        try:
            case = service.case(view)
        except InputError as exc:
            out["figure"] = theme.empty_figure(short(str(exc)))
            out["shown"] = Shown("error", to_query(view), message=str(exc)).to_dict()
            return out
        dep_now = [iso_to_unix_days(case.departure_start), iso_to_unix_days(case.departure_end)]
        arr_now = [iso_to_unix_days(case.arrival_start), iso_to_unix_days(case.arrival_end)]
        dep = dep_drag or dep_now
        arr = arr_drag or arr_now
        if trigger == "drag":
            # dragged dates that are not the view's yet: held, or released and on their way
            dragging = not (_close(dep, dep_now) and _close(arr, arr_now))
        else:
            # A status that lands mid-drag must keep the preview (plan_map). Only a thumb still
            # held counts here (its drag value is not yet the slider's value): released dates
            # the view refused stay on the slider, and the view's own map must come back.
            dragging = not (_close(dep, dep_value or dep_now) and _close(arr, arr_value or arr_now))
        query = to_query(view)

        def planned(dragging: bool) -> MapPlan:
            return plan_map(
                trigger,
                status,
                shown,
                view=query,
                metric=view.metric,
                arcs=view.arcs,
                dragging=dragging,
            )

        plan = planned(dragging)
        preview = None
        if plan.action == "preview":
            try:
                preview = service.preview_figure(view, case, dep, arr)
            except InputError:
                if trigger == "drag":
                    return out  # dates with no preview: the map stays as it is
                plan = planned(False)  # a status is never left unshown for want of a preview
        if plan.action == "nothing":
            return out
        if plan.action == "preview":
            out["figure"] = preview
        elif plan.action == "solving":
            grid = None
            if status is not None:
                grid = service.grids.wait(status.grid, MAP_WAIT_S)
            if grid is not None and status is not None:
                # Solved within the wait: draw it now with the grid node as the best arc; the
                # poll then moves the status on and the markers follow.
                out["figure"] = service.map_figure(view, case, grid, "node")
                shown_now = Shown("full", query, status.grid, view.metric, view.arcs, "node")
                out["shown"] = shown_now.to_dict()
                return out
            out["figure"] = theme.empty_figure(
                "Solving the window for this view… (progress above the map)"
            )
        elif plan.action == "error":
            out["figure"] = theme.empty_figure(
                short(status.message if status else "No grid.") + " Change a setting or press "
                "“Compute again”."
            )
        else:
            grid = service.grid(case)
            if grid is None or status is None:
                out["figure"] = theme.empty_figure("Solving the window for this view…")
                out["shown"] = Shown("solving", query).to_dict()
                return out
            try:
                if plan.action == "full":
                    out["figure"] = service.map_figure(view, case, grid, status.best)
                else:
                    metric = plan.action == "patch_metric"
                    out["figure"] = service.map_patch(
                        Patch(), view, case, grid, status.best, metric
                    )
            except InputError as exc:
                out["figure"] = theme.empty_figure(short(str(exc)))
                out["shown"] = Shown("error", query, message=str(exc)).to_dict()
                return out
        out["shown"] = plan.shown.to_dict() if plan.shown else no_update
        return out


def _close(a, b, tol_days: float = 0.5 / MINUTES_PER_DAY) -> bool:
    try:
        return all(abs(float(x) - float(y)) < tol_days for x, y in zip(a, b, strict=True))
    except (TypeError, ValueError):
        return True


# ---------------------------------------------------------------------------------------------
# The selected arc


def _register_selection(app, service: WindowService) -> None:
    @app.callback(
        Output("graph-arc-view", "figure"),
        Output("graph-family-chart", "figure"),
        Output("div-details-arc", "children"),
        Output("store-selected-arc", "data"),
        Input("store-grid-status", "data"),
        State("store-view-state", "data"),
        State("store-selected-arc", "data"),
        prevent_initial_call=True,
    )
    def draw_selection(status_data, view_data, drawn):
        nothing = (no_update,) * 4
        view = _read_view(view_data)
        if view is None:
            return nothing
        status = GridStatus.from_dict(status_data)
        query = to_query(view)
        plan = plan_selection(status, drawn, view=query, selected=bool(view.selected))
        if plan.action == "nothing":
            return nothing

        def message(text: str):
            fig = theme.empty_figure(text)
            return fig, fig, layout.details_children([], text), plan.drawn

        if plan.action == "waiting":
            return message("Waiting for the grid to find the best arc…")
        if plan.action == "error":
            return message(short(status.message if status else "No grid."))
        try:
            case = service.case(view)
            grid = service.grid(case)
            best = status.best if status is not None else "node"
            result = service.selection_figures(view, case, grid, best)
        except InputError as exc:
            return message(short(str(exc)))
        if result is None:
            if grid is None:
                return message("Waiting for the grid to find the best arc…")
            return _no_arc_within_limits(service, view, case, grid, plan.drawn)
        arc_fig, family_fig, details, sel = result
        if not sel.is_best:
            note = "The selected cell."
            if not sel.arc.ok:
                note = "The selected cell has no arc: see “Why no arc” below."
        elif sel.refined:
            note = "The best arc of the window, refined off the grid."
        elif best == "unrefined":
            note = "The best arc's grid cell (its refinement did not finish)."
        else:
            note = "The best arc's grid cell; refining it off the grid…"
        return arc_fig, family_fig, layout.details_children(details, note), plan.drawn


def _no_arc_within_limits(service: WindowService, view: ViewState, case, grid, drawn):
    """The panels of a view with no arc within the limits: which limits exclude the arcs and
    how many each breaks, and the closest arc they exclude, drawn in the arc view, the family
    chart and the details like any arc."""
    from ..view_state import arcs_label

    block = service.limits_block(view, case, grid)
    if block.closest is None:
        what = "arc" if view.arcs == "best" else f"{arcs_label(view.arcs)} arc"
        text = f"No {what} in this window."
        lines = [
            html.Div(text, className="aw-details-note aw-small"),
            html.P(
                "Change the dates, or the arcs shown (the maximum revolutions and branch).",
                className="aw-small",
            ),
        ]
        fig = theme.empty_figure(text)
        return fig, fig, lines, drawn
    by = "the closest arc by the map's metric"
    if block.ranked_by and block.ranked_by != view.metric:
        by = (
            f"no arc has a {METRICS[view.metric].label} (the mass budget below says why), so "
            f"the closest arc by {METRICS[block.ranked_by].label}"
        )
    lines = [
        html.Div(
            f"No arc within the limits. Shown: {by}, which breaks "
            + ("; ".join(block.breaches) or "no single limit (a combination)")
            + ".",
            className="aw-details-note aw-small",
        )
    ]
    if block.breaking:
        lines.append(
            html.P(
                f"Of the {block.arcs:,} arcs of this window, "
                + "; ".join(f"{n:,} break {label}" for label, n in block.breaking)
                + ".",
                className="aw-small",
            )
        )
    if block.excluded_by:
        lines.append(
            html.P(
                "Lifting one limit alone would admit: "
                + "; ".join(f"{label}: {n:,} arcs" for label, n in block.excluded_by)
                + ".",
                className="aw-small",
            )
        )
    else:
        lines.append(
            html.P(
                "No single limit excludes them all; several bind together.",
                className="aw-small",
            )
        )
    closest = service.closest_figures(view, case, grid, block.closest)
    if closest is None:
        fig = theme.empty_figure("No arc within the limits.")
        return fig, fig, lines, drawn
    arc_fig, family_fig, details = closest
    return arc_fig, family_fig, lines + layout.details_children(details), drawn


# ---------------------------------------------------------------------------------------------
# Cases: uploads and the viewer's own list


def _register_cases(app, service: WindowService) -> None:
    @app.callback(
        Output("div-message-upload", "children"),
        Output("dropdown-case", "options", allow_duplicate=True),
        Output("dropdown-case", "value", allow_duplicate=True),
        Output("store-my-cases", "data", allow_duplicate=True),
        Input("store-upload", "data"),
        State("store-my-cases", "data"),
        prevent_initial_call=True,
    )
    def load_upload(upload, my_cases):
        if not isinstance(upload, dict) or not upload.get("contents"):
            return no_update, no_update, no_update, no_update
        name = clean_filename(upload.get("filename"))
        try:
            case_id = service.catalogue.add_upload(name, upload.get("contents"))
            title = service.catalogue.load(case_id).title
        except InputError as exc:
            return error_lines([f"{name} was not loaded: {exc}"]), no_update, no_update, no_update
        except OSError as exc:  # the server's disk (full, read-only): nothing half written
            reason = exc.strerror or type(exc).__name__
            line = f"{name} was not stored on the server ({reason}); try again later."
            return error_lines([line]), no_update, no_update, no_update
        mine = remember(my_cases, case_id)
        return (
            ok_line(f"Loaded “{title}” from {name}; it is in your case list."),
            service.catalogue.options(mine),
            case_id,
            mine,
        )

    @app.callback(
        Output("dropdown-case", "options", allow_duplicate=True),
        Output("dropdown-case", "value", allow_duplicate=True),
        Output("store-my-cases", "data", allow_duplicate=True),
        Input("button-case-remove", "n_clicks"),
        State("dropdown-case", "value"),
        State("store-my-cases", "data"),
        prevent_initial_call=True,
    )
    def remove_case(n_clicks, case_id, my_cases):
        if not n_clicks or not isinstance(case_id, str) or not case_id.startswith("upload-"):
            return no_update, no_update, no_update
        mine = forget(my_cases, case_id)
        return service.catalogue.options(mine), service.catalogue.default_id(), mine


# ---------------------------------------------------------------------------------------------
# The shortlist


def _register_shortlist(app, service: WindowService) -> None:
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
        State("store-grid-status", "data"),
        State("store-shortlist-version", "data"),
    )
    def keep_shortlist(add, removes, tick, note, author, view_data, status_data, version):
        trigger = ctx.triggered_id
        fired = fired_inputs()
        if "button-shortlist-add" in fired:
            trigger = "button-shortlist-add"  # a click that lands with a poll tick still counts
        note_out, message = no_update, no_update
        shortlist = service.shortlist
        view = _read_view(view_data)
        status = GridStatus.from_dict(status_data)
        if trigger == "button-shortlist-add" and add:
            try:
                if view is None:
                    raise InputError("selected arc", "none", "a selected cell with an arc")
                best = status.best if status is not None else "refined"
                service.keep(view, note, author, best)
            except InputError as exc:
                message = error_lines([f"Not kept: {exc}"])
            except ShortlistUnavailable as exc:  # the note stays in its box for another try
                message = error_lines([str(exc)])
            else:
                note_out, message = "", ok_line("Kept in the shortlist.")
        elif isinstance(trigger, dict) and trigger.get("type") == "button-shortlist-remove":
            if ctx.triggered and ctx.triggered[0].get("value"):
                try:
                    shortlist.remove(str(trigger["index"]))
                except ShortlistUnavailable as exc:
                    message = error_lines([str(exc)])
        now = shortlist.version()
        if now == version and trigger != "button-shortlist-add" and ctx.triggered_id:
            return no_update, no_update, note_out, message
        entries = shortlist.entries()
        problems = shortlist.problems()
        table = layout.shortlist_children(
            entries, view.case if view else None, problem=problems[-1] if problems else ""
        )
        return table, now, note_out, message


# ---------------------------------------------------------------------------------------------
# Downloads


# The grid table is not built here: app/dashboard/downloads.py streams it from a file.
DOWNLOAD_BUTTONS = {
    "button-download-arc-oem": "oem",
    "button-download-arc-json": "json",
    "button-download-map-html": "map",
    "button-download-arcview-html": "arcview",
    "button-download-family-html": "family",
}


def _register_downloads(app, service: WindowService) -> None:
    @app.callback(
        Output("download-file", "data"),
        Output("div-message-download", "children"),
        *[Input(b, "n_clicks") for b in DOWNLOAD_BUTTONS],
        State("store-view-state", "data"),
        State("store-grid-status", "data"),
        prevent_initial_call=True,
    )
    def send_download(*args):
        view_data, status_data = args[-2], args[-1]
        kind = DOWNLOAD_BUTTONS.get(ctx.triggered_id)
        view = _read_view(view_data)
        if not kind or view is None or not (ctx.triggered and ctx.triggered[0].get("value")):
            return no_update, no_update
        status = GridStatus.from_dict(status_data)
        best = status.best if status is not None and status.view == to_query(view) else "node"
        try:
            case = service.case(view)
        except InputError as exc:
            return no_update, error_lines([str(exc)])
        grid = service.grid(case)
        stem = view_stem(case, view)
        if kind == "map":
            if grid is None:
                return no_update, error_lines(["The grid is still being solved."])
            fig = service.map_figure(view, case, grid, best)
            return dcc.send_string(figure_html(fig), f"{stem}_window_map.html"), ""
        result = service.selection_figures(view, case, grid, best)
        if result is None:
            return no_update, error_lines(["Select a cell with an arc first."])
        arc_fig, family_fig, _, sel = result
        if not sel.arc.ok and kind in ("oem", "json"):
            return no_update, error_lines(["The selected cell has no arc to export."])
        if kind == "oem":
            return dcc.send_string(arc_oem(case, sel.arc), f"{stem}_arc.oem"), ""
        if kind == "json":
            return dcc.send_string(arc_json(case, sel.arc), f"{stem}_arc.json"), ""
        fig = arc_fig if kind == "arcview" else family_fig
        name = "arc_view" if kind == "arcview" else "family_chart"
        return dcc.send_string(figure_html(fig), f"{stem}_{name}.html"), ""


# ---------------------------------------------------------------------------------------------
# In the browser


def _register_clientside(app) -> None:
    for slider in SLIDERS:
        app.clientside_callback(
            "function(drag, value) { return window.arcwindow.rangeText(drag || value); }",
            Output(slider.text_id, "children"),
            Input(slider.id, "drag_value"),
            Input(slider.id, "value"),
        )
    app.clientside_callback(
        "function(d, a) { return window.arcwindow.stepHint(d, a); }",
        Output("text-step-hint", "children"),
        Input(CONTROL_IDS["window.departure_step_days"], "value"),
        Input(CONTROL_IDS["window.arrival_step_days"], "value"),
    )
    # The address bar always holds the view, replaced rather than pushed: Back leaves the page
    # (to the survey a target was opened from) instead of stepping through every click.
    app.clientside_callback(
        "function(query) { return window.arcwindow.replaceQuery(query); }",
        Output("div-sink-url", "children"),
        Input("store-view-query", "data"),
        prevent_initial_call=True,
    )
    app.clientside_callback(
        "function(href) { return window.arcwindow.goTo(href); }",
        Output("div-sink-redirect", "children"),
        Input("store-redirect", "data"),
        prevent_initial_call=True,
    )
    # The one writer of the poll's pace and of the progress strip: an answer of the view callback
    # or of the poll, applied while the tab still shows its view (see ``_register_map``).
    app.clientside_callback(
        "function(answer, current, ticks) { return window.arcwindow.acceptGridAnswer(answer,"
        f" current, ticks, {json.dumps(list(PROGRESS_OUTPUTS))}); }}",
        Output("store-grid-status", "data", allow_duplicate=True),
        Output("interval-grid-poll", "disabled"),
        Output("interval-grid-poll", "interval"),
        Output("interval-grid-poll", "max_intervals"),
        *[Output(cid, prop) for cid, prop in PROGRESS_OUTPUTS.values()],
        Input("store-grid-polled", "data"),
        State("store-grid-status", "data"),
        State("interval-grid-poll", "n_intervals"),
        prevent_initial_call=True,
    )
    app.clientside_callback(
        "function(beat, ticks, maxTicks, disabled) {"
        " return window.arcwindow.pollWatchdog(beat, ticks, maxTicks, disabled); }",
        Output("interval-grid-poll", "max_intervals", allow_duplicate=True),
        Input("interval-grid-watchdog", "n_intervals"),
        State("interval-grid-poll", "n_intervals"),
        State("interval-grid-poll", "max_intervals"),
        State("interval-grid-poll", "disabled"),
        prevent_initial_call=True,
    )
    app.clientside_callback(
        "function(n) { return window.arcwindow.copyLink(n); }",
        Output("button-copy-link", "children"),
        Input("button-copy-link", "n_clicks"),
        prevent_initial_call=True,
    )
    app.clientside_callback(
        "function(a, b, c, stem) { return window.arcwindow.downloadPng("
        "window.dash_clientside.callback_context.triggered_id, stem); }",
        Output("button-png-map", "title"),
        Input("button-png-map", "n_clicks"),
        Input("button-png-arcview", "n_clicks"),
        Input("button-png-family", "n_clicks"),
        State("store-download-stem", "data"),
        prevent_initial_call=True,
    )
    app.clientside_callback(
        f"function(contents, name) {{ return window.arcwindow.checkUpload(contents, name, "
        f"{MAX_UPLOAD_BYTES}); }}",
        Output("store-upload", "data"),
        Output("div-message-upload", "children", allow_duplicate=True),
        Input("upload-case-file", "contents"),
        State("upload-case-file", "filename"),
        prevent_initial_call=True,
    )
    app.clientside_callback(
        "function(errors) { return window.arcwindow.markInvalid(errors); }",
        Output("div-sink-errors", "children"),
        Input("store-control-errors", "data"),
        prevent_initial_call=True,
    )


__all__ = [
    "MAP_WAIT_S",
    "NAME",
    "PATH",
    "TITLE",
    "grid_status",
    "page_layout",
    "register_callbacks",
    "slider_marks",
    "slider_props",
]
