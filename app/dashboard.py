"""Placeholder dashboard until the window map lands."""

from __future__ import annotations

from dash import Dash, html


def create_app() -> Dash:
    app = Dash(__name__, title="arcwindow")
    app.layout = html.Div(
        [
            html.H1("arcwindow"),
            html.P("The window map is coming. Try `arcwindow lambert --help` meanwhile."),
            html.P(
                "Caution: preliminary two-body, patched-conic design. Confirm with high-fidelity "
                "tools and the responsible mission authority before committing hardware or launch "
                "plans."
            ),
        ]
    )
    return app
