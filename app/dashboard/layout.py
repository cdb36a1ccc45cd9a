"""The page: header, caution, controls on the left, the three views, details and shortlist.

Built from small functions, one per panel. Component ids follow widget-subject-parameter
(``graph-window-map``, ``slider-departure-range``). The controls start empty: on page load the
view callback fills them from the URL (or the default case), so a shared link and a fresh page
take the same path.
"""

from __future__ import annotations

import re

from dash import dcc, html

from solver.caution import CAUTION
from solver.ephemeris.timescales import FUTURE_UTC_NOTE
from solver.window.metrics import METRICS

from . import theme
from .cases import MAX_UPLOAD_BYTES
from .prepare import DetailRow
from .state import MAP_METRICS

POLL_GRID_MS = 300
POLL_SHORTLIST_MS = 3000

# Control ids by the case setting they change (dotted keys of solver.window.case.with_changes).
CONTROL_IDS: dict[str, str] = {
    "case.departure_body": "dropdown-body-departure",
    "case.target_body": "dropdown-body-target",
    "window.departure_step_days": "input-step-departure",
    "window.arrival_step_days": "input-step-arrival",
    "transfer.max_revolutions": "input-revolutions-max",
    "departure_orbit.altitude_km": "input-parking-altitude",
    "arrival_orbit.mode": "dropdown-arrival-mode",
    "arrival_orbit.periapsis_altitude_km": "input-capture-periapsis",
    "arrival_orbit.apoapsis_altitude_km": "input-capture-apoapsis",
    "limits.c3_max_km2_s2": "input-limit-c3",
    "limits.vinf_arrival_max_km_s": "input-limit-vinf",
    "limits.dla_max_deg": "input-limit-dla",
    "limits.tof_min_days": "input-limit-tofmin",
    "limits.tof_max_days": "input-limit-tofmax",
}
SLIDER_IDS = {"dep": "slider-departure-range", "arr": "slider-arrival-range"}


def _label(text: str, unit: str = "", for_id: str | None = None):
    children = [text] + ([html.Span(f" ({unit})", className="aw-unit")] if unit else [])
    return html.Label(children, htmlFor=for_id, className="aw-label")


def _number(control_id: str, label: str, unit: str, placeholder: str = "none"):
    return html.Div(
        [
            _label(label, unit, control_id),
            dcc.Input(
                id=control_id,
                type="number",
                debounce=True,
                placeholder=placeholder,
                className="aw-input",
                step="any",
            ),
        ],
        className="aw-field",
    )


def _section(title: str, *children, class_name: str = ""):
    return html.Section(
        [html.H2(title, className="aw-section-title"), *children],
        className=f"aw-section {class_name}".strip(),
    )


def header() -> html.Header:
    return html.Header(
        [
            html.Div(
                [html.Span("arc", className="aw-brand-a"), html.Span("window")],
                className="aw-brand",
            ),
            html.Div(id="text-case-title", className="aw-case-title"),
            html.Div(
                [
                    html.A("Survey results", href="/survey/", className="aw-nav-link"),
                    dcc.Clipboard(
                        id="clipboard-view-link",
                        title="copy a link to this view",
                        className="aw-copy",
                        children=html.Span("Copy link to this view"),
                        copied_children=html.Span("Link copied"),
                    ),
                ],
                className="aw-header-tools",
            ),
        ],
        className="aw-header",
    )


def caution() -> html.Div:
    return html.Div(
        [html.Strong("Caution: "), CAUTION],
        id="div-caution-banner",
        className="aw-caution",
        role="note",
    )


def case_controls() -> html.Section:
    return _section(
        "Case",
        dcc.Dropdown(id="dropdown-case", clearable=False, className="aw-dropdown"),
        html.Div(id="text-case-description", className="aw-small"),
        dcc.Upload(
            id="upload-case-file",
            children=html.Div(["Upload a case file (TOML)"]),
            accept=".toml,text/plain,application/toml",
            # Well above the server's own limit (cases.MAX_UPLOAD_BYTES), so an oversized file
            # reaches the server and gets a message instead of being dropped in the browser.
            max_size=4 * MAX_UPLOAD_BYTES,
            className="aw-upload",
        ),
        html.Div(id="div-message-upload", className="aw-message", role="alert"),
    )


def body_controls() -> html.Section:
    return _section(
        "Bodies",
        html.Div(id="text-central-body", className="aw-small"),
        html.Div(
            [
                html.Div(
                    [
                        _label("departure", for_id="dropdown-body-departure"),
                        dcc.Dropdown(id="dropdown-body-departure", clearable=False, options=[]),
                    ],
                    className="aw-field",
                ),
                html.Div(
                    [
                        _label("target", for_id="dropdown-body-target"),
                        dcc.Dropdown(id="dropdown-body-target", clearable=False, options=[]),
                    ],
                    className="aw-field",
                ),
            ],
            className="aw-pair",
        ),
    )


def _slider(slider_id: str, label: str, text_id: str):
    return html.Div(
        [
            html.Div(
                [_label(label, "UTC"), html.Span(id=text_id, className="aw-range-text")],
                className="aw-slider-head",
            ),
            dcc.RangeSlider(
                id=slider_id,
                min=0,
                max=1,
                value=[0, 1],
                allowCross=False,
                updatemode="mouseup",
                allow_direct_input=False,
                tooltip={"placement": "bottom", "transform": "arcwindowDate"},
                className="aw-slider",
            ),
        ],
        className="aw-field aw-slider-field",
    )


def date_controls() -> html.Section:
    return _section(
        "Dates",
        _slider("slider-departure-range", "departure window", "text-departure-range"),
        _slider("slider-arrival-range", "arrival window", "text-arrival-range"),
        html.Div(
            [
                _number("input-step-departure", "departure step", "days", ""),
                _number("input-step-arrival", "arrival step", "days", ""),
            ],
            # one per row: steps of minutes need the width (0.00347 days = 5 min)
            className="aw-stack",
        ),
        html.Div(id="text-step-hint", className="aw-small"),
        html.Div(FUTURE_UTC_NOTE, className="aw-small aw-note"),
    )


def map_controls() -> html.Section:
    metric_options = [
        {"value": m, "label": f"{METRICS[m].label} ({METRICS[m].unit})"} for m in MAP_METRICS
    ]
    return _section(
        "Window map",
        html.Div(
            [
                _label("metric", for_id="dropdown-metric"),
                dcc.Dropdown(
                    id="dropdown-metric", options=metric_options, clearable=False, value="c3_km2_s2"
                ),
            ],
            className="aw-field",
        ),
        html.Div(
            [
                _label("arcs shown", for_id="dropdown-arc-slot"),
                dcc.Dropdown(id="dropdown-arc-slot", clearable=False),
            ],
            className="aw-field",
        ),
        _number("input-revolutions-max", "maximum revolutions", "", "0"),
    )


def limit_controls() -> html.Section:
    return _section(
        "Limits",
        html.Div(
            [
                _number("input-limit-c3", "C3 max", "km²/s²"),
                _number("input-limit-vinf", "arrival v∞ max", "km/s"),
                _number("input-limit-dla", "|DLA| max", "deg"),
                _number("input-limit-tofmin", "TOF min", "days"),
                _number("input-limit-tofmax", "TOF max", "days"),
            ],
            className="aw-grid2",
        ),
        html.Div("Leave a box empty for no limit.", className="aw-small"),
    )


def orbit_controls() -> html.Section:
    return _section(
        "Orbits",
        _number("input-parking-altitude", "parking orbit altitude", "km"),
        html.Div(
            [
                _label("arrival", for_id="dropdown-arrival-mode"),
                dcc.Dropdown(
                    id="dropdown-arrival-mode",
                    clearable=False,
                    options=[
                        {"value": "capture", "label": "capture into orbit"},
                        {"value": "flyby", "label": "flyby (no burn)"},
                        {"value": "rendezvous", "label": "rendezvous (match velocity)"},
                    ],
                ),
            ],
            className="aw-field",
        ),
        html.Div(
            [
                _number("input-capture-periapsis", "capture periapsis", "km"),
                _number("input-capture-apoapsis", "capture apoapsis", "km"),
            ],
            className="aw-pair",
        ),
    )


def download_controls() -> html.Section:
    def button(button_id: str, text: str):
        return html.Button(text, id=button_id, className="aw-button aw-button-small", n_clicks=0)

    return _section(
        "Downloads",
        html.Div(
            [
                button("button-download-grid-csv", "grid CSV"),
                button("button-download-arc-oem", "arc OEM"),
                button("button-download-arc-json", "arc JSON"),
            ],
            className="aw-button-row",
        ),
        html.Div(
            [
                button("button-download-map-html", "map HTML"),
                button("button-download-arcview-html", "arc view HTML"),
                button("button-download-family-html", "family HTML"),
            ],
            className="aw-button-row",
        ),
        html.Div(
            [
                button("button-png-map", "map PNG"),
                button("button-png-arcview", "arc view PNG"),
                button("button-png-family", "family PNG"),
            ],
            className="aw-button-row",
        ),
        dcc.Download(id="download-file"),
        html.Div(id="div-message-download", className="aw-message", role="alert"),
    )


def controls() -> html.Aside:
    return html.Aside(
        [
            case_controls(),
            body_controls(),
            date_controls(),
            map_controls(),
            limit_controls(),
            orbit_controls(),
            download_controls(),
        ],
        className="aw-controls",
    )


MAP_HEIGHT_PX = 560
VIEW_HEIGHT_PX = 430


def _graph(graph_id: str, filename: str, height_px: int):
    # The height goes on the graph itself: plotly sizes its plot to this box when it first
    # draws, and a box sized later by a style sheet would leave it drawn too small.
    return dcc.Graph(
        id=graph_id,
        figure=theme.empty_figure("Loading…"),
        config=theme.graph_config(filename),
        style={"height": f"{height_px}px"},
    )


def map_card() -> html.Div:
    return html.Div(
        [
            html.Div(
                [
                    html.Div(
                        html.Div(id="div-grid-progress-fill", className="aw-progress-fill"),
                        className="aw-progress-track",
                    ),
                    html.Span(id="text-grid-progress", className="aw-progress-text"),
                    html.Button(
                        "Compute again",
                        id="button-grid-retry",
                        className="aw-button aw-button-small",
                        n_clicks=0,
                        style={"display": "none"},
                    ),
                    html.Button(
                        "Cancel",
                        id="button-grid-cancel",
                        className="aw-button aw-button-small",
                        n_clicks=0,
                    ),
                ],
                id="div-grid-progress",
                className="aw-progress",
                style={"display": "none"},
            ),
            html.H2("Window map", className="aw-card-title"),
            _graph("graph-window-map", "window_map", MAP_HEIGHT_PX),
            html.Div(
                "Click a cell to inspect its arc. Drag on the map to zoom; double-click to reset.",
                className="aw-small aw-hint",
            ),
        ],
        className="aw-card aw-card-map",
    )


def details_card() -> html.Div:
    return html.Div(
        [
            html.H2("Selected arc", className="aw-card-title"),
            html.Div(id="div-details-arc", className="aw-details"),
            html.Div(
                [
                    html.H3("Keep in the shortlist", className="aw-subtitle"),
                    dcc.Input(
                        id="input-shortlist-author",
                        placeholder="your name or initials",
                        className="aw-input",
                        maxLength=60,
                        persistence=True,
                        persistence_type="local",
                    ),
                    dcc.Textarea(
                        id="input-shortlist-note",
                        placeholder="note (why this arc)",
                        className="aw-input aw-textarea",
                        maxLength=500,
                    ),
                    html.Button(
                        "Add selected arc",
                        id="button-shortlist-add",
                        className="aw-button",
                        n_clicks=0,
                    ),
                    html.Div(id="div-message-shortlist", className="aw-message", role="alert"),
                ],
                className="aw-shortlist-form",
            ),
        ],
        className="aw-card aw-card-details",
    )


def views() -> html.Section:
    return html.Section(
        [
            html.Div([map_card(), details_card()], className="aw-row aw-row-top"),
            html.Div(
                [
                    html.Div(
                        [
                            html.H2("Arc view", className="aw-card-title"),
                            _graph("graph-arc-view", "arc_view", VIEW_HEIGHT_PX),
                        ],
                        className="aw-card",
                    ),
                    html.Div(
                        [
                            html.H2("Family chart", className="aw-card-title"),
                            _graph("graph-family-chart", "family_chart", VIEW_HEIGHT_PX),
                        ],
                        className="aw-card",
                    ),
                ],
                className="aw-row aw-row-bottom",
            ),
            html.Div(
                [
                    html.H2("Shortlist", className="aw-card-title"),
                    html.Div(
                        "Shared by everyone viewing this server; refreshed every few seconds.",
                        className="aw-small",
                    ),
                    html.Div(id="div-shortlist-table", className="aw-shortlist"),
                ],
                className="aw-card aw-card-shortlist",
            ),
        ],
        className="aw-views",
    )


def stores() -> html.Div:
    return html.Div(
        [
            dcc.Location(id="location-page-url", refresh=False),
            dcc.Store(id="store-view-state"),
            dcc.Store(id="store-map-shown"),
            dcc.Store(id="store-grid-job"),
            dcc.Store(id="store-selected-arc"),
            dcc.Store(id="store-shortlist-version"),
            dcc.Interval(id="interval-grid-poll", interval=POLL_GRID_MS, disabled=True),
            dcc.Interval(id="interval-shortlist-poll", interval=POLL_SHORTLIST_MS),
        ]
    )


def page() -> html.Div:
    """The whole page."""
    return html.Div(
        [
            stores(),
            header(),
            caution(),
            html.Div(id="div-message-view", className="aw-message aw-message-bar", role="alert"),
            html.Main([controls(), views()], className="aw-main"),
        ],
        className="aw-page",
    )


_NUMBER_RE = re.compile(r"^[-+−]?[\d,]*\.?\d+(\s*\(.*\))?$")


def details_children(sections: list[tuple[str, list[DetailRow]]], note: str = "") -> list:
    """The details panel's content: one compact table per section (numbers right-aligned)."""
    out: list = []
    if note:
        out.append(html.Div(note, className="aw-small aw-details-note"))
    for heading, rows in sections:
        out.append(html.H3(heading, className="aw-subtitle"))
        out.append(
            html.Table(
                html.Tbody(
                    [
                        html.Tr(
                            [
                                html.Th(r.label),
                                html.Td(
                                    r.value.replace("T", " ").rstrip("Z")
                                    if r.unit == "UTC"
                                    else r.value,
                                    className="aw-num" if _NUMBER_RE.match(r.value) else "aw-text",
                                ),
                                html.Td(r.unit, className="aw-unit"),
                            ]
                        )
                        for r in rows
                    ]
                ),
                className="aw-details-table",
            )
        )
    return out


def shortlist_children(entries, current_case: str | None) -> list:
    """The shortlist table (newest first), with a link that opens each arc and a remove button."""
    if not entries:
        return [html.Div("No arcs kept yet.", className="aw-small")]
    head = html.Thead(
        html.Tr(
            [
                html.Th(t)
                for t in (
                    "case",
                    "departure (UTC)",
                    "arrival (UTC)",
                    "arc",
                    "C3 (km²/s²)",
                    "arrival v∞ (km/s)",
                    "total Δv (km/s)",
                    "TOF (days)",
                    "note",
                    "by",
                    "kept (UTC)",
                    "",
                )
            ]
        )
    )

    def num(value, digits):
        try:
            return f"{float(value):.{digits}f}"
        except (TypeError, ValueError):
            return "—"

    rows = []
    for e in reversed(entries):
        arc = "N = 0" if e.revolutions == 0 else f"N = {e.revolutions}, {e.branch}"
        rows.append(
            html.Tr(
                [
                    html.Td(e.case_title, className="aw-clip"),
                    html.Td(e.departure_utc.replace("T", " ").rstrip("Z")),
                    html.Td(e.arrival_utc.replace("T", " ").rstrip("Z")),
                    html.Td(arc),
                    html.Td(num(e.metrics.get("c3_km2_s2"), 3), className="aw-num"),
                    html.Td(num(e.metrics.get("vinf_arrival_km_s"), 3), className="aw-num"),
                    html.Td(num(e.metrics.get("dv_total_km_s"), 3), className="aw-num"),
                    html.Td(num(e.metrics.get("tof_days"), 1), className="aw-num"),
                    html.Td(e.note, className="aw-note-cell"),
                    html.Td(e.author),
                    html.Td(e.created_utc.replace("T", " ").rstrip("Z")),
                    html.Td(
                        [
                            dcc.Link("open", href="/" + e.view, className="aw-link"),
                            html.Button(
                                "remove",
                                id={"type": "button-shortlist-remove", "index": e.id},
                                className="aw-button-link",
                                n_clicks=0,
                            ),
                        ],
                        className="aw-actions",
                    ),
                ],
                className="aw-current" if e.case_id == current_case else "",
                **{"data-entry-id": e.id},
            )
        )
    return [html.Table([head, html.Tbody(rows)], className="aw-shortlist-table")]
