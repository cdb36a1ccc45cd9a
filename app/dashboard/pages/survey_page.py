"""The survey page (``/survey``): ranked targets of a results file; each opens its window map.

A page of the one dashboard app. "open" is a link to the window page, ``/?survey=NAME&target=T``:
the window page builds the target's window case around its best arc
(``solver.survey.targets.case_for_target``), stores it like an uploaded case (content hash, so
the link works for every viewer), adds it to the viewer's own case list and shows it with the
best arc selected. The browser's Back button returns here.
"""

from __future__ import annotations

import logging
import math
from urllib.parse import parse_qsl, quote, urlencode

from dash import Input, Output, State, ctx, dcc, html, no_update

from solver.errors import InputError

from ..surveys import TABLE_ROWS, SurveyShelf, SurveyTable
from ..view_changes import short
from .chrome import caution_banner, page_header

_LOG = logging.getLogger(__name__)

PATH = "/survey"
TITLE = "arcwindow survey"
NAME = "Survey results"
LEGACY_OPEN_PATH = "/survey-open"
"""Links of earlier versions (``/survey-open?results=..&target=..``) redirect to the window
page's ``?survey=..&target=..``; the redirect itself changes nothing on the server."""

_COLUMNS = (
    ("rank", "rank", None),
    ("target", "target", None),
    ("status", "status", None),
    ("departure_utc", "departure (UTC)", None),
    ("arrival_utc", "arrival (UTC)", None),
    ("tof_days", "TOF (days)", 1),
    ("c3_km2_s2", "C3 (km²/s²)", 3),
    ("dla_deg", "DLA (deg)", 1),
    ("vinf_arrival_km_s", "arrival v∞ (km/s)", 3),
    ("dv_total_km_s", "total Δv (km/s)", 3),
)
_STATUS_TEXT = {
    "within_limits": "within limits",
    "outside_limits": "outside limits",
    "no_arc": "no arc",
    "error": "error",
}


def page_layout(**query) -> html.Div:
    params = {k: v for k, v in query.items() if k not in ("pathname_", "search_")}
    search = "?" + urlencode(params, doseq=True) if params else ""
    return html.Div(
        [
            dcc.Store(id="store-survey-query", data=search),
            html.Div(id="div-sink-survey-url", hidden=True),
            page_header("Survey results", links=(("Window map", "/"),)),
            caution_banner(),
            html.Div(id="div-survey-message", className="aw-message aw-message-bar", role="alert"),
            html.Main(
                html.Section(
                    [
                        html.H2("Ranked targets", className="aw-section-title"),
                        html.Label(
                            "results file", htmlFor="dropdown-survey-file", className="aw-label"
                        ),
                        dcc.Dropdown(
                            id="dropdown-survey-file", clearable=False, className="aw-survey-file"
                        ),
                        html.P(id="text-survey-summary", className="aw-small"),
                        html.P(
                            "Choose a target to open its window map around its best arc; the "
                            "browser's Back button returns here.",
                            className="aw-small",
                        ),
                        html.Div(id="div-survey-table", className="aw-survey-table-wrap"),
                    ],
                    className="aw-section aw-survey",
                ),
                className="aw-survey-main",
            ),
        ],
        className="aw-page",
    )


def register_callbacks(app, shelf: SurveyShelf) -> None:
    @app.callback(
        Output("dropdown-survey-file", "options"),
        Output("dropdown-survey-file", "value"),
        Output("div-survey-table", "children"),
        Output("text-survey-summary", "children"),
        Output("div-survey-message", "children"),
        Output("div-sink-survey-url", "children"),
        Input("store-survey-query", "data"),
        Input("dropdown-survey-file", "value"),
        State("dropdown-survey-file", "options"),
    )
    def show(search, chosen, options):
        names = shelf.names()
        new_options = [{"label": n, "value": n} for n in names]
        params = dict(parse_qsl((search or "").lstrip("?")))
        message = short(params.get("error", ""))
        if ctx.triggered_id == "dropdown-survey-file" and chosen:
            name = chosen
        else:
            name = params.get("results") or (names[0] if names else None)
        if name is None:
            empty = (
                "No survey results yet. Run `arcwindow survey ... --out NAME.parquet` into the "
                "server's survey folder, or serve with --survey-dir pointing at a folder of "
                "results."
            )
            return new_options, None, html.Div(empty, className="aw-small"), "", message, no_update
        try:
            table = shelf.table(name)
        except InputError as exc:
            return new_options, None, "", "", short(str(exc)), no_update
        except Exception:  # a damaged file: say so, keep serving
            _LOG.exception("survey results %s could not be read", name)
            text = f"The results file '{name}' could not be read (damaged or not a survey)."
            return new_options, None, "", "", text, no_update
        return (
            new_options,
            name,
            table_children(table),
            table.summary,
            message,
            no_update,
        )

    # The address bar follows the file shown (replaced, so Back still leaves the page).
    app.clientside_callback(
        "function(name) { return window.arcwindow.replaceSurveyQuery(name); }",
        Output("div-sink-survey-url", "children", allow_duplicate=True),
        Input("dropdown-survey-file", "value"),
        prevent_initial_call=True,
    )

    from flask import redirect, request

    @app.server.route(LEGACY_OPEN_PATH)
    def open_target_legacy():
        query = urlencode(
            {"survey": request.args.get("results", ""), "target": request.args.get("target", "")}
        )
        return redirect("/?" + query)


def open_href(results: str, target: str) -> str:
    """The window page's link that opens a survey target."""
    return f"/?survey={quote(results)}&target={quote(target)}"


def table_children(table: SurveyTable) -> list:
    """The ranked table (first rows), each target with an "open" link."""
    frame = table.frame.head(TABLE_ROWS)
    head = html.Thead(html.Tr([html.Th(label) for _, label, _ in _COLUMNS] + [html.Th("")]))
    rows = []
    for record in frame.to_dict("records"):
        cells = []
        for key, _, digits in _COLUMNS:
            value = record.get(key)
            if key == "status":
                text, cls = _STATUS_TEXT.get(str(value), str(value)), "aw-text"
            elif digits is None:
                text, cls = str(value).replace("T", " ").rstrip("Z"), "aw-text"
            else:
                ok = isinstance(value, int | float) and math.isfinite(value)
                text, cls = (f"{value:.{digits}f}" if ok else "—"), "aw-num"
            cells.append(html.Td(text, className=cls))
        has_arc = isinstance(record.get("departure_jd_tdb"), float) and math.isfinite(
            record["departure_jd_tdb"]
        )
        link = (
            dcc.Link(
                "open",
                className="aw-link",
                href=open_href(table.name, str(record["target"])),
            )
            if has_arc
            else html.Span(record.get("reason", ""), className="aw-small")
        )
        rows.append(
            html.Tr(
                [*cells, html.Td(link, className="aw-actions")],
                className="" if record.get("within_limits") else "aw-muted",
                **{"data-target": str(record["target"])},
            )
        )
    more = len(table.frame) - len(frame)
    out = [html.Table([head, html.Tbody(rows)], className="aw-shortlist-table aw-survey-table")]
    if more > 0:
        out.append(html.P(f"... {more} more targets in the file.", className="aw-small"))
    return out


__all__ = [
    "LEGACY_OPEN_PATH",
    "NAME",
    "PATH",
    "TITLE",
    "open_href",
    "page_layout",
    "register_callbacks",
    "table_children",
]
