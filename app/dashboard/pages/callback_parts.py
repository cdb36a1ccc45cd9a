"""Small pieces every page's callbacks use: what fired, and the message lines they answer."""

from __future__ import annotations

from dash import ctx, html

from ..view_changes import short


def fired_inputs() -> set[str]:
    """Ids of every input that changed in this round (``ctx.triggered_id`` names only one: when
    several inputs change in one round, Dash names the first, and a change read from it alone
    was lost)."""
    out = set()
    for t in ctx.triggered or []:
        prop = t.get("prop_id") or ""
        if prop and prop != ".":
            out.add(prop.rsplit(".", 1)[0])
    return out


def error_lines(lines: list[str]):
    """Refusals as a list, each cut to a readable length; "" when there are none."""
    if not lines:
        return ""
    return html.Ul([html.Li(short(line)) for line in lines], className="aw-message-error")


def ok_line(text: str):
    return html.Div(text, className="aw-message-ok")


__all__ = ["error_lines", "fired_inputs", "ok_line"]
