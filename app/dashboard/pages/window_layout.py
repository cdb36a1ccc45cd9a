"""The window page's layout: header, caution, controls on the left, the map beside the selected
arc's details, the arc view beside the family chart, and the shared shortlist.

Built from small functions, one per panel. Component ids follow widget-subject-parameter
(``graph-window-map``, ``slider-departure-range``); the case controls are made from the table of
case settings (``controls.CONTROLS``). The controls start empty: the view callback fills them
from the page's link (or the default case), so a shared link and a fresh page take one path.
"""

from __future__ import annotations

import re
from urllib.parse import urlencode

from dash import dcc, html

from solver.ephemeris.timescales import FUTURE_UTC_NOTE
from solver.window.metrics import METRICS

from .. import theme
from ..controls import SLIDERS, Slider, control_field, controls_of, error_text, label
from ..detail_rows import DetailNotes, DetailRow, DetailTable, Section
from ..shortlist import MAX_AUTHOR_CHARS, MAX_NOTE_CHARS
from ..view_changes import short
from ..view_state import MAP_METRICS
from .chrome import caution_banner, page_header

POLL_SHORTLIST_MS = 3000
MAP_HEIGHT_PX = 520
VIEW_HEIGHT_PX = 400


def _section(title: str, *children, class_name: str = ""):
    return html.Section(
        [html.H2(title, className="aw-section-title"), *children],
        className=f"aw-section {class_name}".strip(),
    )


def case_controls() -> html.Section:
    return _section(
        "Case",
        label("case", for_id="dropdown-case"),
        dcc.Dropdown(
            id="dropdown-case",
            clearable=False,
            className="aw-dropdown aw-case-picker",
            optionHeight=44,
            maxHeight=360,
        ),
        html.Div(id="text-case-description", className="aw-small"),
        html.Button(
            "Remove this upload from my list",
            id="button-case-remove",
            className="aw-button-link aw-remove-case",
            n_clicks=0,
            style={"display": "none"},
        ),
        dcc.Upload(
            id="upload-case-file",
            children=html.Div(["Upload a case file (TOML)"]),
            accept=".toml,text/plain,application/toml",
            # No limit in the browser: the page checks the size itself and says so
            # (a file over a browser limit would be dropped without a word).
            max_size=-1,
            multiple=False,
            className="aw-upload",
        ),
        dcc.Store(id="store-upload"),
        html.Div(id="div-message-upload", className="aw-message", role="alert"),
    )


def body_controls() -> html.Section:
    return _section(
        "Bodies",
        html.Div(id="text-central-body", className="aw-small"),
        html.Div([control_field(c) for c in controls_of("bodies")], className="aw-pair"),
    )


def _slider(slider: Slider):
    word = slider.label.split()[0]
    return html.Div(
        [
            html.Div(
                [
                    label(slider.label, "UTC", label_id=f"label-{slider.url}"),
                    html.Span(id=slider.text_id, className="aw-range-text"),
                ],
                className="aw-slider-head",
            ),
            dcc.RangeSlider(
                id=slider.id,
                min=0,
                max=1,
                value=[0, 1],
                allowCross=False,
                updatemode="mouseup",
                allow_direct_input=False,
                tooltip={"placement": "bottom", "transform": "arcwindowDate"},
                className="aw-slider",
            ),
            error_text(slider.url),
        ],
        className="aw-field aw-slider-field",
        **{"data-setting": f"{slider.start_key} {slider.end_key}", "data-slider": word},
    )


def date_controls() -> html.Section:
    return _section(
        "Dates",
        *[_slider(s) for s in SLIDERS],
        html.Div([control_field(c) for c in controls_of("dates")], className="aw-stack"),
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
                label("metric", for_id="dropdown-metric"),
                dcc.Dropdown(
                    id="dropdown-metric", options=metric_options, clearable=False, value="c3_km2_s2"
                ),
            ],
            className="aw-field",
        ),
        html.Div(
            [
                label("arcs shown", for_id="dropdown-arc-slot"),
                dcc.Dropdown(id="dropdown-arc-slot", clearable=False),
            ],
            className="aw-field",
        ),
        *[control_field(c) for c in controls_of("map")],
    )


def limit_controls() -> html.Section:
    return _section(
        "Limits",
        html.Div([control_field(c) for c in controls_of("limits")], className="aw-grid2"),
        html.Div("Leave a box empty for no limit.", className="aw-small"),
        html.Div(id="text-launch-hint", className="aw-small"),
    )


def orbit_controls() -> html.Section:
    return _section("Orbits", *[control_field(c) for c in controls_of("orbits")])


def mass_controls() -> html.Section:
    """The launch vehicle the mass metrics use, and what else the case says of mass and
    launch (its spacecraft, propulsion and launch site, written in the case file)."""
    return _section(
        "Launch and mass",
        *[control_field(c) for c in controls_of("mass")],
        html.Div(id="text-mass-summary", className="aw-small"),
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
            mass_controls(),
            download_controls(),
        ],
        className="aw-controls",
        **{"aria-label": "case and view settings"},
    )


def _graph(graph_id: str, filename: str, height_px: int):
    # The height goes on the graph itself: plotly sizes its plot to this box when it first
    # draws, and a box sized later by a style sheet would leave it drawn too small.
    return dcc.Graph(
        id=graph_id,
        figure=theme.empty_figure("Loading…"),
        config=theme.graph_config(filename),
        style={"height": f"{height_px}px"},
    )


def progress_strip() -> html.Div:
    return html.Div(
        [
            html.Div(
                html.Div(id="div-grid-progress-fill", className="aw-progress-fill"),
                className="aw-progress-track",
            ),
            html.Span(id="text-grid-progress", className="aw-progress-text", role="status"),
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
    )


def map_card() -> html.Div:
    return html.Div(
        [
            html.Div(
                [html.H2("Window map", className="aw-card-title"), progress_strip()],
                className="aw-card-head",
            ),
            _graph("graph-window-map", "window_map", MAP_HEIGHT_PX),
            html.Div(
                "Click a cell to inspect its arc. Drag on the map to zoom; double-click to reset.",
                className="aw-small aw-hint",
            ),
        ],
        className="aw-card aw-card-map",
    )


def shortlist_form(
    prefix: str = "", add_text: str = "Add selected arc", what: str = "arc"
) -> html.Div:
    """The "keep in the shortlist" form of a page: ids ``input-{prefix}shortlist-author`` and so
    on, lengths capped as the shortlist store caps them."""
    return html.Div(
        [
            html.H3("Keep in the shortlist", className="aw-subtitle"),
            label("kept by", for_id=f"input-{prefix}shortlist-author"),
            html.Div(
                [
                    dcc.Input(
                        id=f"input-{prefix}shortlist-author",
                        placeholder="name or initials",
                        className="aw-input",
                        maxLength=MAX_AUTHOR_CHARS,
                        persistence=True,
                        persistence_type="local",
                    ),
                    html.Button(
                        add_text,
                        id=f"button-{prefix}shortlist-add",
                        className="aw-button",
                        n_clicks=0,
                    ),
                ],
                className="aw-inline",
            ),
            label("note", for_id=f"input-{prefix}shortlist-note"),
            dcc.Textarea(
                id=f"input-{prefix}shortlist-note",
                placeholder=f"note (why this {what})",
                className="aw-input aw-textarea",
                maxLength=MAX_NOTE_CHARS,
            ),
            html.Div(id=f"div-{prefix}message-shortlist", className="aw-message", role="alert"),
        ],
        className="aw-shortlist-form",
    )


def details_card() -> html.Div:
    return html.Div(
        [
            html.H2("Selected arc", className="aw-card-title"),
            shortlist_form(),
            html.Div(id="div-details-arc", className="aw-details"),
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


def stores(query: str) -> html.Div:
    return html.Div(
        [
            dcc.Store(id="store-page-query", data=query),
            dcc.Store(id="store-view-state"),
            dcc.Store(id="store-view-query"),
            dcc.Store(id="store-grid-status"),
            dcc.Store(id="store-grid-polled"),
            dcc.Store(id="store-map-shown"),
            dcc.Store(id="store-selected-arc"),
            dcc.Store(id="store-control-errors"),
            dcc.Store(id="store-download-stem"),
            dcc.Store(id="store-shortlist-version"),
            dcc.Store(id="store-redirect"),
            dcc.Interval(id="interval-grid-poll", interval=300, disabled=True),
            dcc.Interval(id="interval-grid-watchdog", interval=5000),
            dcc.Interval(id="interval-shortlist-poll", interval=POLL_SHORTLIST_MS),
            # Outputs of client-side helpers that act on the page itself.
            html.Div(id="div-sink-url", hidden=True),
            html.Div(id="div-sink-errors", hidden=True),
            html.Div(id="div-sink-redirect", hidden=True),
        ]
    )


def page(query: str = "") -> html.Div:
    """The whole window page; ``query`` is the link it was opened with."""
    return html.Div(
        [
            stores(query),
            page_header(
                title_id="text-case-title",
                links=(("Survey results", "/survey"),),
                copy_id="button-copy-link",
            ),
            caution_banner("div-caution-banner"),
            html.Div(id="div-message-view", className="aw-message aw-message-bar", role="alert"),
            html.Main([controls(), views()], className="aw-main"),
        ],
        className="aw-page",
    )


def page_from_query(**params) -> html.Div:
    """The page for Dash's router, which passes the link's query parameters."""
    params = {k: v for k, v in params.items() if k not in ("pathname_", "search_")}
    return page("?" + urlencode(params, doseq=True) if params else "")


_NUMBER_RE = re.compile(r"^[-+−]?[\d,]*\.?\d+(\s*\(.*\))?$")


def _cell_class(text: str) -> str:
    return "aw-num" if _NUMBER_RE.match(text) else "aw-text"


def _rows_table(rows: list[DetailRow]) -> html.Table:
    """Labelled values: label, value (numbers right-aligned), unit."""
    return html.Table(
        html.Tbody(
            [
                html.Tr(
                    [
                        html.Th(r.label),
                        html.Td(r.value.replace("T", " ").rstrip("Z"), className="aw-text aw-date")
                        if r.unit == "UTC"
                        else html.Td(r.value, className=_cell_class(r.value)),
                        html.Td(r.unit, className="aw-unit"),
                    ]
                )
                for r in rows
            ]
        ),
        className="aw-details-table",
    )


def _compare_table(table: DetailTable) -> list:
    """A few rows side by side under column headings; the row in use in bold."""
    head = html.Thead(
        html.Tr(
            [html.Th(table.columns[0])]
            + [html.Th(c, className="aw-num") for c in table.columns[1:]]
        )
    )
    body = html.Tbody(
        [
            html.Tr(
                [html.Th(row[0])] + [html.Td(c, className="aw-num") for c in row[1:]],
                className="aw-current" if k == table.current else "",
            )
            for k, row in enumerate(table.rows)
        ]
    )
    out: list = [html.Table([head, body], className="aw-details-table aw-compare-table")]
    out += [html.Div(line, className="aw-small") for line in table.notes]
    return out


def details_children(sections: list[Section], note: str = "") -> list:
    """The details panel's content: one compact table per section (numbers right-aligned), a
    table of columns for things compared side by side, folded notes."""
    out: list = []
    if note:
        out.append(html.Div(note, className="aw-small aw-details-note"))
    for heading, content in sections:
        if heading:
            out.append(html.H3(heading, className="aw-subtitle"))
        if isinstance(content, DetailTable):
            out += _compare_table(content)
        elif isinstance(content, DetailNotes):
            out.append(
                html.Details(
                    [
                        html.Summary(content.summary),
                        html.Ul([html.Li(item) for item in content.items]),
                    ],
                    className="aw-small aw-details-notes",
                )
            )
        else:
            out.append(_rows_table(content))
    return out


def shortlist_children(
    entries,
    current_case: str | None,
    remove_type: str = "button-shortlist-remove",
    problem: str = "",
) -> list:
    """The shortlist table (newest first), with a link that opens each arc (a sequence
    candidate on the sequence page) and a remove button (``remove_type``: the pattern id of the
    page that shows the table); ``problem``: the store's latest problem, one line above it."""
    notice = [html.Div(short(problem), className="aw-message-error")] if problem else []
    if not entries:
        return [*notice, html.Div("Nothing kept yet.", className="aw-small")]
    head = html.Thead(
        html.Tr(
            [
                html.Th(t)
                for t in (
                    "",
                    "case",
                    "departure (UTC)",
                    "arrival (UTC)",
                    "arc or sequence",
                    "C3 (km²/s²)",
                    "arrival v∞ (km/s)",
                    "total Δv (km/s)",
                    "TOF or duration (days)",
                    "note",
                    "by",
                    "kept (UTC)",
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
        page = "/"
        extra = e.extra if isinstance(e.extra, dict) else {}
        if extra.get("kind") == "sequence":
            page = "/sequence"
            record = extra.get("record") if isinstance(extra.get("record"), dict) else {}
            arc = "sequence: " + str(record.get("sequence_label", "") or "")[:80]
        rows.append(
            html.Tr(
                [
                    # Actions first, so they show without scrolling the table sideways.
                    html.Td(
                        [
                            dcc.Link("open", href=page + e.view, className="aw-link", refresh=True),
                            html.Button(
                                "remove",
                                id={"type": remove_type, "index": e.id},
                                className="aw-button-link",
                                n_clicks=0,
                            ),
                        ],
                        className="aw-actions",
                    ),
                    html.Td(e.case_title, className="aw-clip"),
                    html.Td(e.departure_utc.replace("T", " ").rstrip("Z")),
                    html.Td(e.arrival_utc.replace("T", " ").rstrip("Z")),
                    html.Td(arc, className="aw-clip" if page != "/" else ""),
                    html.Td(num(e.metrics.get("c3_km2_s2"), 3), className="aw-num"),
                    html.Td(num(e.metrics.get("vinf_arrival_km_s"), 3), className="aw-num"),
                    html.Td(num(e.metrics.get("dv_total_km_s"), 3), className="aw-num"),
                    html.Td(num(e.metrics.get("tof_days"), 1), className="aw-num"),
                    html.Td(e.note, className="aw-note-cell"),
                    html.Td(e.author),
                    html.Td(e.created_utc.replace("T", " ").rstrip("Z")),
                ],
                className="aw-current" if e.case_id == current_case else "",
                **{"data-entry-id": e.id},
            )
        )
    return [*notice, html.Table([head, html.Tbody(rows)], className="aw-shortlist-table")]


__all__ = [
    "MAP_HEIGHT_PX",
    "VIEW_HEIGHT_PX",
    "details_children",
    "page",
    "page_from_query",
    "shortlist_children",
]
