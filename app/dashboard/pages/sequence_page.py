"""The sequence page (``/sequence``): flyby sequences, round trips and tours, with the window
page's live loop, sharing and exports.

Callbacks only unpack component values, ask the pure planners (``sequence_view``,
``search_loop``) what to do, call the service (``sequence_service``) and pack the answer:

* ``sync_view``: the link, the case picker, every setting, the search settings, a candidate
  chosen, the leg, the leg map's metric, span and step, a click on the leg map, "back to the
  ranked dates". The one place the view changes; it writes the view, its URL query, every
  refused value and a fresh search status (starting or joining the view's search).
* ``poll_search``: the poll, "Cancel" and "Search again": moves the status on
  (``search_loop.plan_poll``), backs off and stops.
* ``draw_candidates``, ``draw_selection``, ``draw_leg_map``: a new status: the ranked
  candidates; the arc view, encounter chart, family chart and details; the leg map
  (``search_loop.plan_draw``: only for the current view's status).
* uploads, the shortlist, downloads, and client-side helpers (the address bar, the copy
  button, PNG downloads with the caution, going to the window page for a one-leg case).
"""

from __future__ import annotations

from dataclasses import asdict, replace
from typing import Any

from dash import ALL, Input, Output, State, ctx, dcc, html, no_update
from flask import request

from solver.errors import InputError

from .. import theme
from ..case_catalogue import MAX_UPLOAD_BYTES, clean_filename, my_case_ids, remember
from ..display_data import display_name
from ..exports import figure_html, safe_name
from ..map_loop import Progress, poll_interval_ms
from ..search_loop import (
    CANCELLED,
    SearchStatus,
    plan_draw,
    plan_poll,
    progress_of,
    status_from_ticket,
)
from ..sequence_display import candidate_rows
from ..sequence_service import SequenceService
from ..sequence_view import (
    DEFAULT_TIME_S,
    SEARCH_MODES,
    SEED_RANGE,
    TIME_RANGE_S,
    TOP_RANGE,
    SequenceView,
    apply_settings,
    setting_values,
    to_query,
)
from ..view_changes import short
from . import sequence_layout as layout
from .callback_parts import error_lines, fired_inputs, ok_line
from .window_layout import shortlist_children

PATH = "/sequence"
TITLE = "arcwindow sequences"
NAME = "Sequences"


def page_layout(**query):
    return layout.page_from_query(**query)


def _read_view(data: Any) -> SequenceView | None:
    try:
        return SequenceView.from_dict(data) if data else None
    except InputError:
        return None


def _address() -> str:
    try:
        return request.remote_addr or ""
    except RuntimeError:
        return ""


def _body_options(case) -> list[dict]:
    central = case.central_body.lower()
    names = [b.name for b in case.registry() if (b.central_body or "").lower() == central]
    return [{"value": n, "label": display_name(n)} for n in names]


def _progress_out(out: dict, progress: Progress) -> None:
    out["panel"] = {"display": "flex"} if progress.visible else {"display": "none"}
    out["fill"] = {"width": f"{100 * progress.fraction:.1f}%"}
    out["text"] = progress.text
    out["cancel_style"] = {} if progress.cancel else {"display": "none"}
    out["retry_style"] = {} if progress.retry else {"display": "none"}


PROGRESS_OUTPUTS = {
    "panel": ("div-seq-progress", "style"),
    "fill": ("div-seq-progress-fill", "style"),
    "text": ("text-seq-progress", "children"),
    "cancel_style": ("button-seq-cancel", "style"),
    "retry_style": ("button-seq-retry", "style"),
}


def search_status(
    service: SequenceService, view: SequenceView, viewer: str, restarts: int = 0
) -> tuple[SearchStatus, Progress]:
    """Ask for a view's search (start or join it) and make the view's first status."""
    query = to_query(view)
    try:
        sequence_case = service.sequence_case(view)
        key = service.search_key(view, sequence_case)
        ticket = service.request_search(view, viewer or "anonymous", _address())
    except InputError as exc:
        status = SearchStatus(query, "", "failed", short(f"No candidates: {exc}"))
        return status, progress_of(status, None)
    status = status_from_ticket(query, key, ticket.phase, ticket.message)
    status = replace(status, restarts=restarts)
    return status, progress_of(status, asdict(ticket))


def register_callbacks(app, service: SequenceService) -> None:
    """Attach the sequence page's callbacks to ``app``."""
    _register_view(app, service)
    _register_poll(app, service)
    _register_draw(app, service)
    _register_upload(app, service)
    _register_shortlist(app, service)
    _register_downloads(app, service)
    _register_clientside(app)


# ---------------------------------------------------------------------------------------------
# The view


def _register_view(app, service: SequenceService) -> None:
    outputs: dict[str, Output] = {
        "store": Output("store-seq-view", "data"),
        "query": Output("store-seq-query", "data"),
        "status": Output("store-seq-status", "data"),
        "poll_off": Output("interval-seq-poll", "disabled"),
        "poll_ms": Output("interval-seq-poll", "interval"),
        "message": Output("div-seq-message", "children"),
        "case_options": Output("dropdown-seq-case", "options"),
        "case_value": Output("dropdown-seq-case", "value"),
        "my_cases": Output("store-my-cases", "data", allow_duplicate=True),
        "title": Output("text-seq-case-title", "children"),
        "description": Output("text-seq-case-description", "children"),
        "settings": Output("div-seq-settings", "children"),
        "errors": Output("store-seq-errors", "data"),
        "search_error": Output("text-seq-error-search", "children"),
        "map_error": Output("text-seq-error-map", "children"),
        "mode": Output("dropdown-seq-search-mode", "value"),
        "top": Output("input-seq-top", "value"),
        "time": Output("input-seq-time", "value"),
        "time_disabled": Output("input-seq-time", "disabled"),
        "seed": Output("input-seq-seed", "value"),
        "seed_disabled": Output("input-seq-seed", "disabled"),
        "leg": Output("dropdown-seq-leg", "value"),
        "leg_options": Output("dropdown-seq-leg", "options", allow_duplicate=True),
        "metric": Output("dropdown-seq-metric", "value"),
        "span": Output("input-seq-span", "value"),
        "step": Output("input-seq-step", "value"),
        "reset_style": Output("button-seq-reset", "style"),
        "redirect": Output("store-seq-redirect", "data"),
        "stem": Output("store-seq-stem", "data"),
    }
    for name, (cid, prop) in PROGRESS_OUTPUTS.items():
        outputs[name] = Output(cid, prop)

    @app.callback(
        output=outputs,
        inputs={
            "page": Input("store-seq-page-query", "data"),
            "case_id": Input("dropdown-seq-case", "value"),
            "settings": Input({"type": "seq-setting", "key": ALL}, "value"),
            "mode": Input("dropdown-seq-search-mode", "value"),
            "top": Input("input-seq-top", "value"),
            "time": Input("input-seq-time", "value"),
            "seed": Input("input-seq-seed", "value"),
            "candidate": Input({"type": "button-seq-candidate", "index": ALL}, "n_clicks"),
            "leg": Input("dropdown-seq-leg", "value"),
            "metric": Input("dropdown-seq-metric", "value"),
            "span": Input("input-seq-span", "value"),
            "step": Input("input-seq-step", "value"),
            "click": Input("graph-seq-leg-map", "clickData"),
            "reset": Input("button-seq-reset", "n_clicks"),
            "current": State("store-seq-view", "data"),
            "viewer": State("store-viewer-id", "data"),
            "my_cases": State("store-my-cases", "data"),
        },
        # The view is made on load (from the link); the case list it may extend is also written
        # by the upload callback.
        prevent_initial_call="initial_duplicate",
    )
    def sync_view(
        page, case_id, settings, mode, top, time, seed, candidate, leg, metric, span, step,
        click, reset, current, viewer, my_cases,
    ):  # fmt: skip
        out: dict[str, Any] = dict.fromkeys(outputs, no_update)
        fired = fired_inputs()
        now = _read_view(current)
        notes: list[str] = []
        fill = False
        view = None
        if not fired or "store-seq-page-query" in fired or now is None:
            view, _, notes = service.view_from_url(page if isinstance(page, str) else "")
            fill = True
            if current and now is None:
                notes.insert(0, "The page's stored view was refused; read again from the link.")
        elif "dropdown-seq-case" in fired:
            if not isinstance(case_id, str) or case_id == now.case:
                return out
            if not service.catalogue.is_sequence(case_id):
                out["redirect"] = "/?case=" + case_id  # a one-leg case: the window page
                return out
            try:
                view, _ = service.view_for_case(case_id)
            except InputError as exc:
                out["message"] = error_lines([str(exc)])
                return out
            fill = True
        else:
            values = {
                "settings": settings,
                "mode": mode,
                "top": top,
                "time": time,
                "seed": seed,
                "leg": leg,
                "metric": metric,
                "span": span,
                "step": step,
                "click": click,
                "reset": reset,
            }
            view, errors = _changed(service, now, fired, values)
            if errors is not None:
                out["errors"] = errors.get("settings", {})
                out["search_error"] = errors.get("search", "")
                out["map_error"] = errors.get("map", "")
            if view is None or view == now:
                if errors is not None and errors.get("notes"):
                    out["message"] = error_lines(errors["notes"])
                return out
        out["message"] = error_lines(notes)
        assert view is not None
        if fill:
            _fill(out, service, view, my_cases)
        out["reset_style"] = {} if view.at else {"display": "none"}
        out["store"] = view.to_dict()
        out["query"] = to_query(view)
        out["stem"] = _stem(service, view)
        status, progress = search_status(service, view, viewer)
        out["status"] = status.to_dict()
        out["poll_off"] = status.settled
        out["poll_ms"] = poll_interval_ms(0)
        _progress_out(out, progress)
        return out


def _changed(service: SequenceService, now: SequenceView, fired: set[str], values: dict):
    """The next view after a control of the page changed, and the messages to show (None:
    leave them)."""
    errors: dict[str, Any] = {}
    if any(f.startswith("{") and "seq-setting" in f for f in fired):
        raw = {
            item["id"]["key"]: item.get("value")
            for item in ctx.args_grouping["settings"]
            if isinstance(item, dict) and isinstance(item.get("id"), dict)
        }
        fired_keys = {
            item["id"]["key"]
            for item in ctx.args_grouping["settings"]
            if isinstance(item, dict) and item.get("triggered")
        }
        try:
            sequence_case = service.sequence_case(now)
            array = isinstance(service.catalogue.document(now.case).get("sequence"), list)
            base = service.sequence_case(SequenceView(case=now.case))
        except InputError as exc:
            return None, {"notes": [str(exc)]}
        view, _, refused = apply_settings(
            service.sequence_case,
            now,
            raw,
            fired_keys,
            setting_values(sequence_case, array),
            setting_values(base, array),
        )
        errors["settings"] = {k: short(v) for k, v in refused.items()}
        return view, errors
    if fired & {"dropdown-seq-search-mode", "input-seq-top", "input-seq-time", "input-seq-seed"}:
        try:
            view = _search_settings(now, values)
        except InputError as exc:
            return None, {"search": short(f"Not applied: {exc}")}
        return view, {"search": ""}
    if any("button-seq-candidate" in f for f in fired):
        trigger = ctx.triggered_id
        if not isinstance(trigger, dict) or not (ctx.triggered and ctx.triggered[0].get("value")):
            return None, None
        rank = int(trigger.get("index", 1))
        return replace(now.ranked(), cand=rank), None
    if "button-seq-reset" in fired:
        return (now.ranked(), None) if values["reset"] else (None, None)
    if "dropdown-seq-leg" in fired:
        leg = values["leg"]
        if not isinstance(leg, int) or leg == now.leg:
            return None, None
        return replace(now, leg=leg), {"map": ""}
    if "dropdown-seq-metric" in fired:
        metric = values["metric"]
        from solver.sequence.leg_map import LEG_MAP_METRICS

        if metric not in LEG_MAP_METRICS or metric == now.metric:
            return None, None
        return replace(now, metric=metric), None
    if fired & {"input-seq-span", "input-seq-step"}:
        from ..sequence_view import SPAN_RANGE_DAYS, STEP_RANGE_DAYS, check_leg_map_size

        try:
            span = _number(values["span"], SPAN_RANGE_DAYS, "leg map span")
            step = _number(values["step"], STEP_RANGE_DAYS, "leg map step")
            check_leg_map_size(span, step)
        except InputError as exc:
            return None, {"map": short(f"Not applied: {exc}")}
        return replace(now, span_days=span, step_days=step), {"map": ""}
    if "graph-seq-leg-map" in fired:
        click = values["click"]
        points = click.get("points") if isinstance(click, dict) else None
        if not points or not isinstance(points[0], dict):
            return None, None
        try:
            view = service.retime(now, points[0].get("x"), points[0].get("y"))
        except (InputError, ValueError, TypeError) as exc:
            return None, {"notes": [f"That point is not a cell of the leg map: {exc}"]}
        return view, None
    return None, None


def _number(value: Any, bounds: tuple[float, float], field: str) -> float:
    ok = isinstance(value, int | float) and not isinstance(value, bool)
    if not ok or not bounds[0] <= float(value) <= bounds[1]:
        raise InputError(field, value, f"a number from {bounds[0]:g} to {bounds[1]:g}")
    return float(value)


def _search_settings(now: SequenceView, values: dict) -> SequenceView:
    mode = values["mode"] if values["mode"] in SEARCH_MODES else now.mode
    top = values["top"]
    if isinstance(top, float) and top.is_integer():
        top = int(top)
    if not isinstance(top, int) or isinstance(top, bool) or not TOP_RANGE[0] <= top <= TOP_RANGE[1]:
        raise InputError("candidates", top, f"an integer from {TOP_RANGE[0]} to {TOP_RANGE[1]}")
    time_s = now.time_s
    seed = now.seed
    if mode == "global":
        time_s = _number(
            values["time"] if values["time"] is not None else DEFAULT_TIME_S,
            TIME_RANGE_S,
            "time limit (s)",
        )
        raw_seed = values["seed"] if values["seed"] is not None else 0
        if isinstance(raw_seed, float) and raw_seed.is_integer():
            raw_seed = int(raw_seed)
        if not isinstance(raw_seed, int) or not SEED_RANGE[0] <= raw_seed <= SEED_RANGE[1]:
            raise InputError(
                "seed", raw_seed, f"an integer from {SEED_RANGE[0]} to {SEED_RANGE[1]}"
            )
        seed = raw_seed
    view = replace(now.ranked(), mode=mode, top=top, time_s=time_s, seed=seed, cand=1)
    return view if view.search_part() != now.search_part() else now


def _fill(out: dict, service: SequenceService, view: SequenceView, my_cases) -> None:
    """Every control from a view and its sequence case (a link or the case picker)."""
    sequence_case = service.sequence_case(view)
    array = isinstance(service.catalogue.document(view.case).get("sequence"), list)
    values = setting_values(sequence_case, array)
    out["settings"] = layout.settings_children(
        sequence_case, values, array, _body_options(sequence_case.case)
    )
    out["errors"] = {}
    out["search_error"] = ""
    out["map_error"] = ""
    mine = my_case_ids(my_cases)
    if view.case.startswith("upload-") and view.case not in mine:
        mine = remember(mine, view.case)
        out["my_cases"] = mine
    out["case_options"] = service.catalogue.options(mine)
    out["case_value"] = view.case
    case = sequence_case.case
    out["title"] = case.title
    out["description"] = case.description
    out["mode"] = view.mode
    out["top"] = view.top
    out["time"] = view.time_s
    out["seed"] = view.seed
    out["time_disabled"] = view.mode != "global"
    out["seed_disabled"] = view.mode != "global"
    spec = sequence_case.sequence(view.seq) if view.seq else sequence_case.sequences[0]
    out["leg_options"] = [
        {
            "value": k,
            "label": f"leg {k}: {display_name(leg.from_body)} → {display_name(leg.to_body)}",
        }
        for k, leg in enumerate(spec.legs, start=1)
    ]
    out["leg"] = min(view.leg, len(spec.legs))
    out["metric"] = view.metric
    out["span"] = view.span_days
    out["step"] = view.step_days


def _stem(service: SequenceService, view: SequenceView) -> str:
    try:
        title = service.sequence_case(view).case.title
    except InputError:
        title = view.case
    parts = [safe_name(title), f"candidate{view.cand}"]
    if view.at:
        parts.append("retimed_" + view.at[0][:10])
    parts.append(f"leg{view.leg}")
    return safe_name("_".join(parts))


# ---------------------------------------------------------------------------------------------
# The poll


def _register_poll(app, service: SequenceService) -> None:
    poll_outputs = {
        "status": Output("store-seq-polled", "data"),
        "poll_off": Output("interval-seq-poll", "disabled", allow_duplicate=True),
        "poll_ms": Output("interval-seq-poll", "interval", allow_duplicate=True),
    }
    for name, (cid, prop) in PROGRESS_OUTPUTS.items():
        poll_outputs[name] = Output(cid, prop, allow_duplicate=True)

    @app.callback(
        output=poll_outputs,
        inputs={
            "tick": Input("interval-seq-poll", "n_intervals"),
            "retry": Input("button-seq-retry", "n_clicks"),
            "cancel": Input("button-seq-cancel", "n_clicks"),
            "status_data": State("store-seq-status", "data"),
            "view_data": State("store-seq-view", "data"),
            "viewer": State("store-viewer-id", "data"),
        },
        prevent_initial_call=True,
    )
    def poll_search(tick, retry, cancel, status_data, view_data, viewer):
        out: dict[str, Any] = dict.fromkeys(poll_outputs, no_update)
        view = _read_view(view_data)
        status = SearchStatus.from_dict(status_data)
        if view is None:
            out["poll_off"] = True
            return out
        fired = fired_inputs()
        query = to_query(view)
        if "button-seq-retry" in fired and retry:
            new, progress = search_status(service, view, viewer)
            out["status"] = new.to_dict()
            out["poll_off"] = new.settled
            out["poll_ms"] = poll_interval_ms(0)
            _progress_out(out, progress)
            return out
        if "button-seq-cancel" in fired and cancel:
            if status is None or status.view != query or status.phase != "solving":
                return out
            service.jobs.cancel(status.key, viewer or "anonymous")
            new = replace(
                status,
                phase="cancelled",
                message=CANCELLED,
                polls=0,
            )
            out["status"] = new.to_dict()
            out["poll_off"] = True
            _progress_out(out, progress_of(new, None))
            return out
        ticket = None
        if status is not None and status.view == query and status.phase == "solving":
            ticket = asdict(service.ticket(status.key, viewer or "anonymous"))
        plan = plan_poll(status, query, ticket)
        if plan.action == "restart" and plan.status is not None:
            new, progress = search_status(service, view, viewer, plan.status.restarts)
            out["status"] = new.to_dict()
            out["poll_off"] = new.settled
            out["poll_ms"] = poll_interval_ms(0)
            _progress_out(out, progress)
            return out
        if plan.status is not None:
            out["status"] = plan.status.to_dict()
        out["poll_off"] = plan.interval_ms is None
        if plan.interval_ms is not None:
            out["poll_ms"] = plan.interval_ms
        _progress_out(out, plan.progress)
        return out


# ---------------------------------------------------------------------------------------------
# Drawing


NO_CANDIDATES = "No candidates: the search did not finish (see above)."
"""What the views show when a search failed or was cancelled (the progress panel says why)."""


def _register_draw(app, service: SequenceService) -> None:
    @app.callback(
        Output("div-seq-candidates", "children"),
        Output("text-seq-summary", "children"),
        Input("store-seq-status", "data"),
        State("store-seq-view", "data"),
        prevent_initial_call=True,
    )
    def draw_candidates(status_data, view_data):
        view = _read_view(view_data)
        status = SearchStatus.from_dict(status_data)
        if view is None:
            return no_update, no_update
        plan = plan_draw(status, to_query(view))
        if plan == "nothing":
            return no_update, no_update
        if plan == "waiting":
            return html.Div("Searching…", className="aw-small"), ""
        if plan == "error":  # the progress panel above says why, with its "Search again" button
            return html.Div(NO_CANDIDATES, className="aw-small"), ""
        outcome = service.result(view)
        if outcome is None:
            return html.Div("Searching…", className="aw-small"), ""
        service.prewarm(view, outcome)
        rows = candidate_rows(outcome.candidates)
        return layout.candidates_children(rows, view.cand, view.at is not None), outcome.summary

    @app.callback(
        Output("graph-seq-arc-view", "figure"),
        Output("graph-seq-encounters", "figure"),
        Output("graph-seq-family", "figure"),
        Output("div-seq-details", "children"),
        Output("store-seq-resolved", "data"),
        Output("dropdown-seq-leg", "options"),
        Input("store-seq-status", "data"),
        State("store-seq-view", "data"),
        prevent_initial_call=True,
    )
    def draw_selection(status_data, view_data):
        nothing = (no_update,) * 6
        view = _read_view(view_data)
        status = SearchStatus.from_dict(status_data)
        if view is None:
            return nothing
        plan = plan_draw(status, to_query(view))
        if plan == "nothing":
            return nothing

        def message(text: str):
            fig = theme.empty_figure(text)
            return fig, fig, fig, layout.details_children([], text), None, no_update

        if plan == "waiting":
            return message("Waiting for the search's candidates…")
        if plan == "error":
            return message(NO_CANDIDATES)
        outcome = service.result(view)
        if outcome is None:
            return message("Waiting for the search's candidates…")
        try:
            shown = service.shown(view, outcome)
            arc, chart, family, details = service.selection_figures(view, shown)
        except InputError as exc:
            return message(short(str(exc)))
        from solver.sequence.record import link_parameters

        note = (
            "Re-timed on the leg map: every number is this candidate's, evaluated exactly."
            if shown.retimed
            else f"Candidate {shown.rank} as the search ranked it."
        )
        resolved = {**link_parameters(shown.candidate, view.case), "view": to_query(view)}
        return (
            arc,
            chart,
            family,
            layout.details_children(details, note),
            resolved,
            service.leg_options(shown.candidate),
        )

    @app.callback(
        Output("graph-seq-leg-map", "figure"),
        Input("store-seq-status", "data"),
        State("store-seq-view", "data"),
        prevent_initial_call=True,
    )
    def draw_leg_map(status_data, view_data):
        view = _read_view(view_data)
        status = SearchStatus.from_dict(status_data)
        if view is None:
            return no_update
        plan = plan_draw(status, to_query(view))
        if plan == "nothing":
            return no_update
        if plan == "waiting":
            return theme.empty_figure("The leg map follows the search's candidates…")
        if plan == "error":
            return theme.empty_figure(NO_CANDIDATES)
        outcome = service.result(view)
        if outcome is None:
            return theme.empty_figure("The leg map follows the search's candidates…")
        try:
            shown = service.shown(view, outcome)
            return service.leg_map_figure(view, shown)
        except InputError as exc:
            return theme.empty_figure(short(str(exc)))

    @app.callback(
        Output({"type": "seq-setting-error", "key": ALL}, "children"),
        Input("store-seq-errors", "data"),
        State({"type": "seq-setting-error", "key": ALL}, "id"),
        prevent_initial_call=True,
    )
    def show_errors(errors, ids):
        errors = errors if isinstance(errors, dict) else {}
        return [errors.get(item["key"], "") for item in ids]


# ---------------------------------------------------------------------------------------------
# Uploads


def _register_upload(app, service: SequenceService) -> None:
    @app.callback(
        Output("div-seq-message-upload", "children"),
        Output("dropdown-seq-case", "options", allow_duplicate=True),
        Output("dropdown-seq-case", "value", allow_duplicate=True),
        Output("store-my-cases", "data", allow_duplicate=True),
        Input("store-seq-upload", "data"),
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
        mine = remember(my_cases, case_id)
        where = (
            ""
            if service.catalogue.is_sequence(case_id)
            else " (a one-leg case: it opens the window map)"
        )
        return (
            ok_line(f"Loaded “{title}” from {name}; it is in your case list{where}."),
            service.catalogue.options(mine),
            case_id,
            mine,
        )


# ---------------------------------------------------------------------------------------------
# The shortlist


def _register_shortlist(app, service: SequenceService) -> None:
    @app.callback(
        Output("div-seq-shortlist-table", "children"),
        Output("store-seq-shortlist-version", "data"),
        Output("input-seq-shortlist-note", "value"),
        Output("div-seq-message-shortlist", "children"),
        Input("button-seq-shortlist-add", "n_clicks"),
        Input({"type": "button-seq-shortlist-remove", "index": ALL}, "n_clicks"),
        Input("interval-seq-shortlist-poll", "n_intervals"),
        State("input-seq-shortlist-note", "value"),
        State("input-seq-shortlist-author", "value"),
        State("store-seq-view", "data"),
        State("store-seq-shortlist-version", "data"),
    )
    def keep_shortlist(add, removes, tick, note, author, view_data, version):
        trigger = ctx.triggered_id
        fired = fired_inputs()
        if "button-seq-shortlist-add" in fired:
            trigger = "button-seq-shortlist-add"
        note_out, message = no_update, no_update
        shortlist = service.shortlist
        view = _read_view(view_data)
        if trigger == "button-seq-shortlist-add" and add:
            try:
                if view is None:
                    raise InputError("candidate", "none", "a candidate shown")
                service.keep(view, note, author)
            except InputError as exc:
                message = error_lines([f"Not kept: {exc}"])
            else:
                note_out, message = "", ok_line("Kept in the shortlist.")
        elif isinstance(trigger, dict) and trigger.get("type") == "button-seq-shortlist-remove":
            if ctx.triggered and ctx.triggered[0].get("value"):
                shortlist.remove(str(trigger["index"]))
        now = shortlist.version()
        if now == version and trigger != "button-seq-shortlist-add" and ctx.triggered_id:
            return no_update, no_update, note_out, message
        table = shortlist_children(
            shortlist.entries(),
            view.case if view else None,
            remove_type="button-seq-shortlist-remove",
        )
        return table, now, note_out, message


# ---------------------------------------------------------------------------------------------
# Downloads


DOWNLOAD_BUTTONS = {
    "button-seq-download-csv": "csv",
    "button-seq-download-json": "json",
    "button-seq-download-oem": "oem",
    "button-seq-download-arcview-html": "arcview",
    "button-seq-download-encounters-html": "encounters",
    "button-seq-download-legmap-html": "legmap",
    "button-seq-download-family-html": "family",
}


def _register_downloads(app, service: SequenceService) -> None:
    @app.callback(
        Output("download-seq-file", "data"),
        Output("div-seq-message-download", "children"),
        *[Input(b, "n_clicks") for b in DOWNLOAD_BUTTONS],
        State("store-seq-view", "data"),
        State("store-seq-stem", "data"),
        prevent_initial_call=True,
    )
    def send_download(*args):
        view_data, stem = args[-2], args[-1]
        kind = DOWNLOAD_BUTTONS.get(ctx.triggered_id)
        view = _read_view(view_data)
        if not kind or view is None or not (ctx.triggered and ctx.triggered[0].get("value")):
            return no_update, no_update
        stem = stem or "arcwindow_sequence"
        try:
            if kind == "csv":
                return dcc.send_string(service.candidates_csv(view), f"{stem}_candidates.csv"), ""
            if kind == "json":
                return dcc.send_string(service.candidate_json(view), f"{stem}_candidate.json"), ""
            if kind == "oem":
                return dcc.send_string(service.candidate_oem(view), f"{stem}_candidate.oem"), ""
            outcome = service.result(view)
            if outcome is None:
                raise InputError("candidate", "none", "a finished search")
            shown = service.shown(view, outcome)
            if kind == "legmap":
                fig = service.leg_map_figure(view, shown)
            else:
                arc, chart, family, _ = service.selection_figures(view, shown)
                fig = {"arcview": arc, "encounters": chart, "family": family}[kind]
        except InputError as exc:
            return no_update, error_lines([str(exc)])
        names = {
            "arcview": "arc_view",
            "encounters": "encounter_chart",
            "legmap": "leg_map",
            "family": "family_chart",
        }
        return dcc.send_string(figure_html(fig), f"{stem}_{names[kind]}.html"), ""


# ---------------------------------------------------------------------------------------------
# In the browser


def _register_clientside(app) -> None:
    # The address bar holds the view (replaced, never pushed) and, once it is known, the shown
    # candidate's own dates, so a copied link names the trajectory itself.
    app.clientside_callback(
        "function(query, resolved) { return window.arcwindow.replaceSequenceQuery(query, "
        "resolved); }",
        Output("div-seq-sink-url", "children"),
        Input("store-seq-query", "data"),
        Input("store-seq-resolved", "data"),
        prevent_initial_call=True,
    )
    app.clientside_callback(
        "function(polled, current) { return window.arcwindow.acceptPolled(polled, current); }",
        Output("store-seq-status", "data", allow_duplicate=True),
        Input("store-seq-polled", "data"),
        State("store-seq-status", "data"),
        prevent_initial_call=True,
    )
    app.clientside_callback(
        "function(href) { return window.arcwindow.goTo(href); }",
        Output("div-seq-sink-redirect", "children"),
        Input("store-seq-redirect", "data"),
        prevent_initial_call=True,
    )
    app.clientside_callback(
        "function(n) { return window.arcwindow.copyLink(n, 'button-seq-copy-link'); }",
        Output("button-seq-copy-link", "children"),
        Input("button-seq-copy-link", "n_clicks"),
        prevent_initial_call=True,
    )
    app.clientside_callback(
        "function(a, b, c, d, stem) { return window.arcwindow.downloadPng("
        "window.dash_clientside.callback_context.triggered_id, stem); }",
        Output("button-seq-png-arcview", "title"),
        Input("button-seq-png-arcview", "n_clicks"),
        Input("button-seq-png-encounters", "n_clicks"),
        Input("button-seq-png-legmap", "n_clicks"),
        Input("button-seq-png-family", "n_clicks"),
        State("store-seq-stem", "data"),
        prevent_initial_call=True,
    )
    app.clientside_callback(
        f"function(contents, name) {{ return window.arcwindow.checkUpload(contents, name, "
        f"{MAX_UPLOAD_BYTES}); }}",
        Output("store-seq-upload", "data"),
        Output("div-seq-message-upload", "children", allow_duplicate=True),
        Input("upload-seq-case-file", "contents"),
        State("upload-seq-case-file", "filename"),
        prevent_initial_call=True,
    )


__all__ = ["NAME", "PATH", "TITLE", "page_layout", "register_callbacks", "search_status"]
