"""The sequence page's layout: header, caution, the case and its settings on the left; the ranked
candidates beside the shown candidate's details, the arc view beside the encounter chart, the
leg map beside the leg's family chart, and the shared shortlist.

One function per panel. Ids carry ``seq`` so they are unique across the app's pages. The
settings panel is made per case (a sequence has as many legs as its case file says): its
controls are pattern-matching components ``{"type": "seq-setting", "key": KEY}`` whose keys are
the case file keys the parser names (``sequence.legs[2].tof_max_days``), each with its own line
for a refused value (``{"type": "seq-setting-error", "key": KEY}``).
"""

from __future__ import annotations

import math
from urllib.parse import urlencode

from dash import dcc, html

from solver.ephemeris.timescales import FUTURE_UTC_NOTE
from solver.sequence.leg_map import LEG_MAP_METRICS
from solver.sequence.spec import SequenceCase
from solver.window.settings import SETTING, Setting

from .. import theme
from ..controls import CHOICE_TEXT, label
from ..display_data import display_name
from ..sequence_display import CandidateRow
from ..sequence_view import (
    DEFAULT_SPAN_DAYS,
    DEFAULT_STEP_DAYS,
    SEARCH_MODES,
    SEQUENCE_KEYS,
    change_key,
)
from .chrome import caution_banner, page_header
from .window_layout import details_children, shortlist_form

GRAPH_HEIGHT_PX = 430
LEG_MAP_HEIGHT_PX = 500
POLL_SHORTLIST_MS = 3000

OBJECTIVE_TEXT = {
    "dv_total_km_s": "total Δv",
    "c3_km2_s2": "C3",
    "vinf_arrival_km_s": "arrival v∞",
    "duration_days": "duration",
}
MODE_TEXT = {"global": "global search (time limit)", "grid": "grid search (repeatable)"}


def _section(title: str, *children, class_name: str = ""):
    return html.Section(
        [html.H2(title, className="aw-section-title"), *children],
        className=f"aw-section {class_name}".strip(),
    )


def case_panel() -> html.Section:
    return _section(
        "Case",
        label("case", for_id="dropdown-seq-case"),
        dcc.Dropdown(
            id="dropdown-seq-case",
            clearable=False,
            className="aw-dropdown aw-case-picker",
            optionHeight=44,
            maxHeight=360,
        ),
        html.Div(id="text-seq-case-description", className="aw-small"),
        dcc.Upload(
            id="upload-seq-case-file",
            children=html.Div(["Upload a case file (TOML)"]),
            accept=".toml,text/plain,application/toml",
            max_size=-1,
            multiple=False,
            className="aw-upload",
        ),
        dcc.Store(id="store-seq-upload"),
        html.Div(id="div-seq-message-upload", className="aw-message", role="alert"),
    )


def _error(cid: str) -> html.Div:
    return html.Div(id=cid, className="aw-field-error", role="alert")


def search_panel() -> html.Section:
    def number(cid: str, text: str, unit: str = "", **kw):
        return html.Div(
            [
                label(text, unit, cid),
                dcc.Input(
                    id=cid, type="number", debounce=True, className="aw-input", step="any", **kw
                ),
            ],
            className="aw-field",
        )

    return _section(
        "Search",
        html.Div(
            [
                label("how", for_id="dropdown-seq-search-mode"),
                dcc.Dropdown(
                    id="dropdown-seq-search-mode",
                    options=[{"value": m, "label": MODE_TEXT[m]} for m in SEARCH_MODES],
                    clearable=False,
                ),
            ],
            className="aw-field",
        ),
        html.Div(
            [
                number("input-seq-top", "candidates", min=1, max=20),
                number("input-seq-time", "time limit", "s", min=2, max=600),
                number("input-seq-seed", "seed", min=0),
            ],
            className="aw-grid3",
        ),
        _error("text-seq-error-search"),
        html.Div(
            "A new search starts when the case, a setting or these change; its candidates are "
            "kept for this case and these settings.",
            className="aw-small",
        ),
    )


def settings_panel() -> html.Section:
    return _section(
        "Sequence, dates and limits",
        html.Div(id="div-seq-settings"),
        html.Div("Leave a limit empty for none.", className="aw-small"),
        html.Div(FUTURE_UTC_NOTE, className="aw-small aw-note"),
    )


def download_panel() -> html.Section:
    def button(button_id: str, text: str):
        return html.Button(text, id=button_id, className="aw-button aw-button-small", n_clicks=0)

    return _section(
        "Downloads",
        html.Div(
            [
                button("button-seq-download-csv", "candidates CSV"),
                button("button-seq-download-json", "candidate JSON"),
                button("button-seq-download-oem", "candidate OEM"),
            ],
            className="aw-button-row",
        ),
        html.Div(
            [
                button("button-seq-download-arcview-html", "arc view HTML"),
                button("button-seq-download-encounters-html", "encounters HTML"),
                button("button-seq-download-legmap-html", "leg map HTML"),
                button("button-seq-download-family-html", "family HTML"),
            ],
            className="aw-button-row",
        ),
        html.Div(
            [
                button("button-seq-png-arcview", "arc view PNG"),
                button("button-seq-png-encounters", "encounters PNG"),
                button("button-seq-png-legmap", "leg map PNG"),
                button("button-seq-png-family", "family PNG"),
            ],
            className="aw-button-row",
        ),
        dcc.Download(id="download-seq-file"),
        html.Div(id="div-seq-message-download", className="aw-message", role="alert"),
    )


def controls() -> html.Aside:
    return html.Aside(
        [case_panel(), search_panel(), settings_panel(), download_panel()],
        className="aw-controls",
        **{"aria-label": "case, search and settings"},
    )


def _graph(graph_id: str, filename: str, height_px: int):
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
                html.Div(id="div-seq-progress-fill", className="aw-progress-fill"),
                className="aw-progress-track",
            ),
            html.Span(id="text-seq-progress", className="aw-progress-text", role="status"),
            html.Button(
                "Search again",
                id="button-seq-retry",
                className="aw-button aw-button-small",
                n_clicks=0,
                style={"display": "none"},
            ),
            html.Button(
                "Cancel", id="button-seq-cancel", className="aw-button aw-button-small", n_clicks=0
            ),
        ],
        id="div-seq-progress",
        className="aw-progress",
        style={"display": "none"},
    )


def candidates_card() -> html.Div:
    return html.Div(
        [
            html.Div(
                [html.H2("Candidates", className="aw-card-title"), progress_strip()],
                className="aw-card-head",
            ),
            html.Div(id="text-seq-summary", className="aw-small"),
            html.Div(id="div-seq-candidates", className="aw-seq-candidates"),
        ],
        className="aw-card aw-seq-card-candidates",
    )


def details_card() -> html.Div:
    return html.Div(
        [
            html.H2("Candidate shown", className="aw-card-title"),
            shortlist_form("seq-", "Add this candidate", "candidate"),
            html.Div(id="div-seq-details", className="aw-details"),
        ],
        className="aw-card aw-seq-card-details",
    )


def leg_map_card() -> html.Div:
    metric_options = [
        {"value": m, "label": f"{text} ({unit})"} for m, (text, unit) in LEG_MAP_METRICS.items()
    ]
    return html.Div(
        [
            html.H2("Leg map", className="aw-card-title"),
            html.Div(
                [
                    html.Div(
                        [
                            label("leg", for_id="dropdown-seq-leg"),
                            dcc.Dropdown(id="dropdown-seq-leg", clearable=False),
                        ],
                        className="aw-field aw-seq-leg-pick",
                    ),
                    html.Div(
                        [
                            label("coloured by", for_id="dropdown-seq-metric"),
                            dcc.Dropdown(
                                id="dropdown-seq-metric", options=metric_options, clearable=False
                            ),
                        ],
                        className="aw-field aw-seq-metric-pick",
                    ),
                    html.Div(
                        [
                            label("span ±", "days", "input-seq-span"),
                            dcc.Input(
                                id="input-seq-span",
                                type="number",
                                debounce=True,
                                className="aw-input",
                                step="any",
                                value=DEFAULT_SPAN_DAYS,
                            ),
                        ],
                        className="aw-field aw-seq-narrow",
                    ),
                    html.Div(
                        [
                            label("step", "days", "input-seq-step"),
                            dcc.Input(
                                id="input-seq-step",
                                type="number",
                                debounce=True,
                                className="aw-input",
                                step="any",
                                value=DEFAULT_STEP_DAYS,
                            ),
                        ],
                        className="aw-field aw-seq-narrow",
                    ),
                ],
                className="aw-seq-map-controls",
            ),
            _error("text-seq-error-map"),
            _graph("graph-seq-leg-map", "leg_map", LEG_MAP_HEIGHT_PX),
            html.Div(
                [
                    html.Span(
                        "Click a cell to re-time the candidate to its dates (every view "
                        "follows). Drag to zoom; double-click to reset. ",
                        className="aw-small",
                    ),
                    html.Button(
                        "Back to the ranked dates",
                        id="button-seq-reset",
                        className="aw-button-link aw-link-plain",
                        n_clicks=0,
                        style={"display": "none"},
                    ),
                ],
                className="aw-hint",
            ),
        ],
        className="aw-card aw-seq-card-legmap",
    )


def views() -> html.Section:
    def card(title: str, graph_id: str, filename: str, class_name: str):
        return html.Div(
            [
                html.H2(title, className="aw-card-title"),
                _graph(graph_id, filename, GRAPH_HEIGHT_PX),
            ],
            className=f"aw-card {class_name}",
        )

    return html.Section(
        [
            candidates_card(),
            details_card(),
            card("Arc view", "graph-seq-arc-view", "arc_view", "aw-seq-card-arc"),
            card("Encounter chart", "graph-seq-encounters", "encounters", "aw-seq-card-enc"),
            leg_map_card(),
            card("Family chart of the leg", "graph-seq-family", "family_chart", "aw-seq-card-fam"),
            html.Div(
                [
                    html.H2("Shortlist", className="aw-card-title"),
                    html.Div(
                        "Shared by everyone viewing this server (window arcs and sequence "
                        "candidates); refreshed every few seconds.",
                        className="aw-small",
                    ),
                    html.Div(id="div-seq-shortlist-table", className="aw-shortlist"),
                ],
                className="aw-card aw-seq-card-shortlist",
            ),
        ],
        className="aw-seq-views",
    )


def stores(query: str) -> html.Div:
    return html.Div(
        [
            dcc.Store(id="store-seq-page-query", data=query),
            dcc.Store(id="store-seq-view"),
            dcc.Store(id="store-seq-query"),
            dcc.Store(id="store-seq-resolved"),
            dcc.Store(id="store-seq-status"),
            dcc.Store(id="store-seq-polled"),
            dcc.Store(id="store-seq-errors"),
            dcc.Store(id="store-seq-stem"),
            dcc.Store(id="store-seq-redirect"),
            dcc.Store(id="store-seq-shortlist-version"),
            dcc.Interval(id="interval-seq-poll", interval=300, disabled=True),
            dcc.Interval(id="interval-seq-shortlist-poll", interval=POLL_SHORTLIST_MS),
            html.Div(id="div-seq-sink-url", hidden=True),
            html.Div(id="div-seq-sink-redirect", hidden=True),
        ]
    )


def page(query: str = "") -> html.Div:
    """The whole sequence page; ``query`` is the link it was opened with."""
    return html.Div(
        [
            stores(query),
            page_header(
                title_id="text-seq-case-title",
                links=(("Window map", "/"), ("Survey results", "/survey")),
                copy_id="button-seq-copy-link",
            ),
            caution_banner("div-seq-caution"),
            html.Div(id="div-seq-message", className="aw-message aw-message-bar", role="alert"),
            html.Main([controls(), views()], className="aw-main"),
        ],
        className="aw-page aw-seq-page",
    )


def page_from_query(**params) -> html.Div:
    params = {k: v for k, v in params.items() if k not in ("pathname_", "search_")}
    return page("?" + urlencode(params, doseq=True) if params else "")


# ---------------------------------------------------------------------------------------------
# The settings panel of one case


def _value_text(value) -> str | float | None:
    if isinstance(value, float) and math.isfinite(value):
        return float(f"{value:.6g}")
    return value


def setting_field(key: str, setting: Setting, value, *, options=None, text: str | None = None):
    """One setting's label, widget and refused-value line."""
    cid = {"type": "seq-setting", "key": key}
    if setting.control == "dropdown" or options is not None:
        if options is None:
            choices = setting.choices
            names = {**CHOICE_TEXT, **OBJECTIVE_TEXT, "true": "yes", "false": "no"}
            options = [{"value": c, "label": names.get(c, c)} for c in choices]
        widget = dcc.Dropdown(id=cid, options=options, value=value, clearable=False)
    elif setting.kind == "date":
        widget = dcc.Input(
            id=cid,
            type="text",
            debounce=True,
            value=value,
            className="aw-input",
            placeholder="YYYY-MM-DD",
        )
    else:
        optional = setting.default is None and not setting.required
        widget = dcc.Input(
            id=cid,
            type="number",
            debounce=True,
            value=_value_text(value),
            className="aw-input",
            step="any",
            placeholder="none" if optional else "",
        )
    return html.Div(
        [
            html.Label(
                [text or setting.label]
                + ([html.Span(f" ({setting.unit})", className="aw-unit")] if setting.unit else []),
                className="aw-label",
            ),
            widget,
            html.Div(
                id={"type": "seq-setting-error", "key": key},
                className="aw-field-error",
                role="alert",
            ),
        ],
        className="aw-field",
        **{"data-setting": key},
    )


def settings_children(
    sequence_case: SequenceCase, values: dict, several: bool, body_options: list[dict]
) -> list:
    """The settings panel of a sequence case: its departure window and limits, then for each
    sequence its objective, limits and legs."""
    from solver.sequence.settings import SEQUENCE_SETTING

    out: list = [html.H3("Departure and limits", className="aw-subtitle")]
    pair = []
    for key in ("window.departure_start", "window.departure_end"):
        setting = SETTING[key]
        pair.append(setting_field(key, setting, values.get(key)))
    out.append(html.Div(pair, className="aw-pair"))
    out.append(
        setting_field(
            "window.departure_step_days",
            SETTING["window.departure_step_days"],
            values.get("window.departure_step_days"),
            text="departure step (grid search)",
        )
    )
    limits = [
        setting_field(key, SETTING[key], values.get(key))
        for key in ("limits.c3_max_km2_s2", "limits.dla_max_deg", "limits.vinf_arrival_max_km_s")
    ]
    out.append(html.Div(limits, className="aw-grid2"))
    for s, spec in enumerate(sequence_case.sequences, start=1):
        index = s if several else 0
        title = spec.name if several else "Sequence"
        out.append(html.H3(title, className="aw-subtitle"))
        fields = []
        for name in SEQUENCE_KEYS:
            key = change_key(SEQUENCE_SETTING[name], index)
            fields.append(setting_field(key, SEQUENCE_SETTING[name], values.get(key)))
        out.append(html.Div(fields, className="aw-grid2"))
        for k, leg in enumerate(spec.legs, start=1):
            kind = {"flyby": "flyby", "stop": "stop", "arrival": "arrival"}[leg.kind]
            out.append(
                html.Div(
                    f"Leg {k}: {display_name(leg.from_body)} → {display_name(leg.to_body)} "
                    f"({kind})"
                    + (
                        f", resonant {leg.resonance[0]}:{leg.resonance[1]}" if leg.resonance else ""
                    ),
                    className="aw-seq-leg-title",
                )
            )
            fields = []
            last = k == len(spec.legs)
            if not last:
                key = change_key(SEQUENCE_SETTING["leg.to"], index, k)
                fields.append(
                    setting_field(
                        key,
                        SEQUENCE_SETTING["leg.to"],
                        values.get(key),
                        options=body_options,
                        text="body",
                    )
                )
            for name in ("leg.tof_min_days", "leg.tof_max_days"):
                key = change_key(SEQUENCE_SETTING[name], index, k)
                fields.append(setting_field(key, SEQUENCE_SETTING[name], values.get(key)))
            if leg.kind == "flyby":
                key = change_key(SEQUENCE_SETTING["leg.altitude_min_km"], index, k)
                fields.append(
                    setting_field(key, SEQUENCE_SETTING["leg.altitude_min_km"], values.get(key))
                )
            if leg.kind == "stop":
                for name in ("leg.stay_min_days", "leg.stay_max_days"):
                    key = change_key(SEQUENCE_SETTING[name], index, k)
                    fields.append(setting_field(key, SEQUENCE_SETTING[name], values.get(key)))
            out.append(html.Div(fields, className="aw-grid2"))
    return out


# ---------------------------------------------------------------------------------------------
# Tables


def _num(value: float, digits: int) -> str:
    if value is None or not math.isfinite(value):
        return "—"
    return f"{value:,.{digits}f}"


def candidates_children(rows: list[CandidateRow], selected: int, retimed: bool) -> list:
    """The ranked candidates, each with a button that shows it."""
    if not rows:
        return [html.Div("The search found no candidate.", className="aw-small")]
    head = html.Thead(
        html.Tr(
            [
                html.Th(t)
                for t in (
                    "",
                    "#",
                    "sequence and encounter dates (UTC)",
                    "total Δv (km/s)",
                    "C3 (km²/s²)",
                    "worst flyby margin (km)",
                    "duration (days)",
                    "status",
                )
            ]
        )
    )
    body = []
    for row in rows:
        current = row.rank == selected
        button_text = "shown" if current and not retimed else "show"
        body.append(
            html.Tr(
                [
                    html.Td(
                        html.Button(
                            button_text,
                            id={"type": "button-seq-candidate", "index": row.rank},
                            className="aw-button aw-button-small",
                            n_clicks=0,
                            **{"aria-pressed": "true" if current else "false"},
                        ),
                        className="aw-actions",
                    ),
                    html.Td(str(row.rank), className="aw-num"),
                    html.Td(
                        [
                            html.Div(row.bodies, className="aw-seq-bodies"),
                            html.Div(" · ".join(row.dates), className="aw-seq-dates"),
                        ],
                        className="aw-seq-sequence-cell",
                    ),
                    html.Td(_num(row.dv_total_km_s, 3), className="aw-num"),
                    html.Td(_num(row.c3_km2_s2, 2), className="aw-num"),
                    html.Td(_num(row.worst_margin_km, 0), className="aw-num"),
                    html.Td(_num(row.duration_days, 0), className="aw-num"),
                    html.Td(row.status, className="aw-seq-status"),
                ],
                className=("aw-current " if current else "") + ("" if row.within else "aw-muted"),
                **{"data-rank": str(row.rank)},
            )
        )
    return [html.Table([head, html.Tbody(body)], className="aw-shortlist-table aw-seq-table")]


__all__ = [
    "candidates_children",
    "details_children",
    "page",
    "page_from_query",
    "settings_children",
]
