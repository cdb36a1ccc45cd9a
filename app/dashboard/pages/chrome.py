"""What every page of the dashboard wears: the brand, the header with the links to the other
pages, and the caution banner (its wording from solver.caution)."""

from __future__ import annotations

from dash import dcc, html

from solver.caution import CAUTION


def brand() -> html.Div:
    return html.Div(
        [html.Span("arc", className="aw-brand-a"), html.Span("window")], className="aw-brand"
    )


def page_header(
    title: str | None = None,
    title_id: str | None = None,
    links: tuple[tuple[str, str], ...] = (),
    copy_id: str | None = None,
) -> html.Header:
    """The page's header: brand, title (fixed text or filled by a callback through
    ``title_id``), links to other pages as (text, path), and the "copy link" button."""
    title_div = html.Div(title, className="aw-case-title")
    if title_id is not None:
        title_div = html.Div(id=title_id, className="aw-case-title")
    # Another page is a full page load: answers still on their way to the page left behind
    # (a map patch) then land nowhere, instead of on a page without their component.
    tools: list = [
        dcc.Link(text, href=path, className="aw-nav-link", refresh=True) for text, path in links
    ]
    if copy_id is not None:
        # A real button, so the keyboard reaches it (Tab, then Enter); the page copies the
        # address bar, which always holds the current view.
        tools.append(
            html.Button(
                "Copy link to this view",
                id=copy_id,
                className="aw-copy",
                title="copy a link to this view",
                n_clicks=0,
            )
        )
    return html.Header(
        [
            brand(),
            title_div,
            html.Nav(tools, className="aw-header-tools", **{"aria-label": "pages and sharing"}),
        ],
        className="aw-header",
    )


def caution_banner(banner_id: str | None = None) -> html.Div:
    """The caution, visible at the top of every page."""
    extra = {"id": banner_id} if banner_id else {}
    return html.Div(
        [html.Strong("Caution: "), CAUTION], className="aw-caution", role="note", **extra
    )


__all__ = ["brand", "caution_banner", "page_header"]
