"""The dashboard's look in one place: colours, fonts, the colour scale and line styles.

Figures and the page style sheet (``assets/arcwindow.css``) take every colour from here or from
the CSS variables that mirror it, so a change of look is a change of this module.

The window-map colour scale is our own: seven stops whose lightness falls steadily from a pale
cream (low values, the region an analyst looks for) to a deep indigo (high values). A scale
whose lightness changes monotonically reads the same for the common colour-vision deficiencies
and in greyscale print, because order is carried by lightness, not by hue.
"""

from __future__ import annotations

import plotly.graph_objects as go

FONT_FAMILY = 'system-ui, -apple-system, "Segoe UI", Roboto, "Helvetica Neue", Arial, sans-serif'
MONO_FAMILY = 'ui-monospace, "SFMono-Regular", Menlo, Consolas, "Liberation Mono", monospace'
FONT_SIZE = 12
TITLE_SIZE = 13

# Page colours (mirrored as CSS variables in assets/arcwindow.css).
INK = "#1d2430"  # text and axis lines
INK_MUTED = "#5b6472"  # secondary text, tick labels
PAPER = "#ffffff"  # figure background
PANEL = "#f4f5f7"  # page background
RULE = "#d9dde3"  # grid lines and borders
ACCENT = "#0b6e8a"  # links, focus, the selected cell
CAUTION_BG = "#fff4d6"
CAUTION_INK = "#6b4e00"
ERROR_BG = "#fde8e8"
ERROR_INK = "#8a1c1c"

# Window map colour scale, low (good) to high; lightness falls monotonically.
WINDOW_SCALE: list[list[float | str]] = [
    [0.00, "#fdf8e4"],
    [0.17, "#f4dfa6"],
    [0.34, "#e6b877"],
    [0.51, "#cc8660"],
    [0.68, "#9c5c6a"],
    [0.85, "#5e3d6e"],
    [1.00, "#27224d"],
]
# Contour lines take the opposite lightness of the fill below them so they stay readable:
# dark ink over the pale low region, pale lines over the dark high region.
CONTOUR_LINE_SCALE: list[list[float | str]] = [
    [0.00, "#2b2b2b"],
    [0.45, "#3a3a3a"],
    [0.60, "#f2f2f2"],
    [1.00, "#ffffff"],
]
OUTSIDE_LIMITS_COLOR = "rgba(226, 229, 234, 0.86)"  # pale wash: cells outside the limits recede
NO_ARC_COLOR = "#ffffff"  # plot background where a cell has no arc at all
TOF_LINE_COLOR = "rgba(40, 48, 60, 0.55)"
TYPE_BOUNDARY_COLOR = "#0b6e8a"
LIMIT_LINE_COLOR = "#b3122e"  # where the mapped metric meets the case's limit on it
BEST_MARKER = {
    "symbol": "star",
    "size": 17,
    "color": "#111111",
    "line": {"color": "#ffffff", "width": 1.5},
}
SELECTED_MARKER = {
    "symbol": "circle-open",
    "size": 19,
    "color": ACCENT,
    "line": {"color": ACCENT, "width": 3},
}

# Arc view: body colours form a pair that stays distinct for red-green colour-vision deficiency
# (blue against orange), the arc itself is near-black so it stands out from both.
DEPARTURE_BODY_COLOR = "#2f6db5"
TARGET_BODY_COLOR = "#d9822b"
TRANSFER_ARC_COLOR = "#1d2430"
CENTRAL_BODY_COLOR = "#e0b43c"
PLANET_SURFACE_COLOR = "#aab4c3"
REFERENCE_PLANE_COLOR = "#8a94a3"

# Family chart: one hue per revolution count (N = 0 darkest), dashes tell the two sides of the
# minimum-energy point apart without relying on colour.
REVOLUTION_COLORS = ["#1d2430", "#2f6db5", "#d9822b", "#3d8b5a", "#8f4f9e", "#b5443b", "#6b7280"]
PARABOLA_COLOR = "#8a94a3"
MIN_ENERGY_COLOR = "#111111"


# Sequence page. Legs: one hue each, in order, chosen to stay apart for the common colour-vision
# deficiencies (blue, orange, teal, purple, olive, rose) and from the muted body orbits.
LEG_COLORS = ["#1f5fa8", "#d9822b", "#2a9d8f", "#7b4fa0", "#7a8a1f", "#c2456e"]
ORBIT_COLOR = "#9aa3b0"
# Encounter chart: v∞ in and out as a blue/orange pair (distinct in greyscale by shape too),
# altitudes green above their minimum (red below it: ERROR_INK), Δv bars in the accent colour.
VINF_IN_COLOR = "#1f5fa8"
VINF_OUT_COLOR = "#d9822b"
ALTITUDE_OK_COLOR = "#2e7d4f"
DV_BAR_COLOR = ACCENT


def leg_color(index: int) -> str:
    """Line colour of leg ``index`` (1-based; the palette repeats beyond its length)."""
    return LEG_COLORS[(int(index) - 1) % len(LEG_COLORS)]


def revolution_color(revolutions: int) -> str:
    """Line colour of the N-revolution curves (the palette repeats beyond its length)."""
    return REVOLUTION_COLORS[int(revolutions) % len(REVOLUTION_COLORS)]


def base_layout(**overrides) -> dict:
    """Layout settings every figure shares (fonts, colours, margins); overrides win."""
    layout = {
        "font": {"family": FONT_FAMILY, "size": FONT_SIZE, "color": INK},
        "paper_bgcolor": PAPER,
        "plot_bgcolor": PAPER,
        "margin": {"l": 60, "r": 20, "t": 36, "b": 50},
        "hoverlabel": {
            "font": {"family": FONT_FAMILY, "size": FONT_SIZE, "color": INK},
            "bgcolor": "#ffffff",
            "bordercolor": RULE,
        },
        "legend": {
            "font": {"size": 11},
            "bgcolor": "rgba(255,255,255,0.85)",
            "bordercolor": RULE,
            "borderwidth": 1,
        },
        "uirevision": "keep",
    }
    layout.update(overrides)
    return layout


def axis_style(**overrides) -> dict:
    """Cartesian axis settings shared by the window map and the family chart."""
    style = {
        "showline": True,
        "linecolor": INK_MUTED,
        "mirror": True,
        "ticks": "outside",
        "tickcolor": INK_MUTED,
        "gridcolor": RULE,
        "zeroline": False,
        "tickfont": {"color": INK_MUTED},
        "title": {"font": {"size": FONT_SIZE, "color": INK}},
    }
    style.update(overrides)
    return style


NO_CLOUD_CONFIG = {
    "displaylogo": False,
    "showSendToCloud": False,
    "plotlyServerURL": "",
}
"""Plot settings that keep every chart on the machine: plotly.js would otherwise offer a toolbar
button that sends the chart and its data to an outside cloud service."""


def graph_config(filename: str) -> dict:
    """dcc.Graph ``config``: nothing sent off the machine, no plotly logo, no camera button.

    Images download through the page's PNG buttons, which name the file after the case and the
    view and print the caution on the image (the toolbar's camera would do neither).
    """
    return {
        **NO_CLOUD_CONFIG,
        "responsive": True,
        "toImageButtonOptions": {"format": "png", "filename": filename, "scale": 2},
        "modeBarButtonsToRemove": ["lasso2d", "select2d", "toImage", "sendDataToCloud"],
    }


def empty_figure(message: str, height: int | None = None) -> go.Figure:
    """A blank figure carrying a short centred message (waiting, nothing selected, error)."""
    layout = base_layout(
        xaxis={"visible": False},
        yaxis={"visible": False},
        annotations=[
            {
                "text": message,
                "showarrow": False,
                "x": 0.5,
                "y": 0.5,
                "xref": "paper",
                "yref": "paper",
                "font": {"size": 14, "color": INK_MUTED},
            }
        ],
    )
    if height:
        layout["height"] = height
    return go.Figure(layout=layout)
