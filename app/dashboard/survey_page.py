"""The survey page (``/survey/``): ranked targets of a results file; each opens its window map.

A second Dash app on the dashboard's own server, so the window page's callbacks and URL state
stay as they are. "open" posts to ``/survey-open``, which builds the target's window case
around its best arc (``solver.survey.scan.case_for_target``), stores it like an uploaded case, and
sends the browser to the window page with that case and the best arc selected.
"""

from __future__ import annotations

import math
from urllib.parse import parse_qsl, quote, urlencode

from dash import Dash, Input, Output, State, ctx, dcc, html, no_update
from flask import redirect, request

from solver.caution import CAUTION
from solver.errors import InputError

from .config import ASSETS_DIR
from .surveys import TABLE_ROWS, SurveyShelf, SurveyTable

BASE_PATH = "/survey/"
OPEN_PATH = "/survey-open"

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


def create_survey_app(server, shelf: SurveyShelf) -> Dash:
    """Mount the survey page on ``server`` (the window page's Flask server)."""
    app = Dash(
        __name__,
        server=server,
        url_base_pathname=BASE_PATH,
        title="arcwindow survey",
        update_title=None,
        assets_folder=str(ASSETS_DIR),
        serve_locally=True,
    )
    app.layout = layout()
    register(app, shelf)

    # "open" stores a case (a state change), so it is a POST from the table's form: a link or a
    # page on another site cannot make a viewer's browser do it (app/dashboard/access.py).
    @server.route(OPEN_PATH, methods=["POST"])
    def open_target():
        name = request.values.get("results", "")
        target = request.values.get("target", "")
        try:
            return redirect("/" + shelf.open_target(name, target))
        except InputError as exc:
            return redirect(BASE_PATH + "?" + urlencode({"results": name, "error": str(exc)}))

    return app


def layout() -> html.Div:
    return html.Div(
        [
            dcc.Location(id="location-survey-url", refresh=False),
            html.Header(
                [
                    html.Div(
                        [html.Span("arc", className="aw-brand-a"), html.Span("window")],
                        className="aw-brand",
                    ),
                    html.Div("Survey results", className="aw-case-title"),
                    html.Div(
                        html.A("Window map", href="/", className="aw-nav-link"),
                        className="aw-header-tools",
                    ),
                ],
                className="aw-header",
            ),
            html.Div([html.Strong("Caution: "), CAUTION], className="aw-caution", role="note"),
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
                            "Choose a target to open its window map around its best arc.",
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


def register(app: Dash, shelf: SurveyShelf) -> None:
    @app.callback(
        Output("dropdown-survey-file", "options"),
        Output("dropdown-survey-file", "value"),
        Output("div-survey-table", "children"),
        Output("text-survey-summary", "children"),
        Output("div-survey-message", "children"),
        Output("location-survey-url", "search"),
        Input("location-survey-url", "search"),
        Input("dropdown-survey-file", "value"),
        State("dropdown-survey-file", "options"),
    )
    def show(search, chosen, options):
        names = shelf.names()
        new_options = [{"label": n, "value": n} for n in names]
        params = dict(parse_qsl((search or "").lstrip("?")))
        message = params.get("error", "")
        if ctx.triggered_id == "dropdown-survey-file" and chosen:
            name = chosen
        else:
            name = params.get("results") or (names[0] if names else None)
        if name is None:
            empty = (
                f"No survey results yet. Run `arcwindow survey ... --out "
                f"{shelf.folder}/NAME.parquet`, or serve with --survey-dir pointing at "
                "a folder of results."
            )
            return new_options, None, html.Div(empty, className="aw-small"), "", message, no_update
        try:
            table = shelf.table(name)
        except InputError as exc:
            return new_options, None, "", "", str(exc), no_update
        query = "?" + urlencode({"results": name})
        return (
            new_options,
            name,
            table_children(table),
            table.summary,
            message,
            query if query != search else no_update,
        )


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
                ok = isinstance(value, (int, float)) and math.isfinite(value)
                text, cls = (f"{value:.{digits}f}" if ok else "—"), "aw-num"
            cells.append(html.Td(text, className=cls))
        has_arc = isinstance(record.get("departure_jd_tdb"), float) and math.isfinite(
            record["departure_jd_tdb"]
        )
        link = (
            html.Form(
                html.Button("open", type="submit", className="aw-link aw-link-button"),
                method="post",
                action=f"{OPEN_PATH}?results={quote(table.name)}"
                f"&target={quote(str(record['target']))}",
                className="aw-inline-form",
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
