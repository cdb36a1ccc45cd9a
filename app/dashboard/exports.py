"""Downloads: the selected arc as CCSDS OEM and JSON, figures as HTML, and the
names of every downloaded file.

The grid and arc formats are ``solver.files.export``'s own; the grid table (CSV or Parquet, with
the provenance header of ``arcwindow grid --out``) is streamed from a file by ``downloads``.
Figures also download as PNG in the browser (the page's PNG buttons, which print the caution on
the image); the HTML version inlines plotly.js so it opens offline, and carries the
caution under the figure. File names say which case and which view they come from.
"""

from __future__ import annotations

import json
import re

import plotly.graph_objects as go

from solver.caution import CAUTION
from solver.files.export import arc_json as _arc_json
from solver.files.export import arc_oem_text
from solver.window.case import Case
from solver.window.cell import Arc

from .theme import NO_CLOUD_CONFIG
from .view_state import ViewState


def safe_name(text: str) -> str:
    """A file-name stem from free text."""
    return re.sub(r"[^A-Za-z0-9_.-]+", "_", text).strip("_")[:80] or "arcwindow"


_ARCS_NAME = {"best": "best", "0": "N0"}


def view_stem(case: Case, view: ViewState) -> str:
    """The stem every download of a view starts with: the case title, the metric, the arcs
    shown and, when a cell is selected, its dates
    (``Tallis_rendezvous_c3_N0_2036-03-01_2036-09-01``)."""
    parts = [safe_name(case.title), view.metric.split("_")[0]]
    parts.append(_ARCS_NAME.get(view.arcs, f"N{view.arcs}"))
    if view.selected:
        parts += [view.selected[0][:10], view.selected[1][:10]]
    return safe_name("_".join(parts))


def arc_oem(case: Case, arc: Arc) -> str:
    """CCSDS OEM 2.0 text of the arc."""
    return arc_oem_text(case, arc)


def arc_json(case: Case, arc: Arc) -> str:
    """The arc as JSON text (states, metrics, elements, provenance)."""
    return json.dumps(_arc_json(case, arc), indent=1, ensure_ascii=False)


def figure_html(fig: go.Figure) -> str:
    """A standalone HTML page of a figure, with the caution under it; opens offline and offers
    nothing that sends the chart off the machine."""
    page = fig.to_html(include_plotlyjs=True, full_html=True, config=dict(NO_CLOUD_CONFIG))
    note = f'<p style="font-family:sans-serif;font-size:12px;color:#6b4e00">{CAUTION}</p>'
    return page.replace("</body>", note + "</body>", 1)


__all__ = ["arc_json", "arc_oem", "figure_html", "safe_name", "view_stem"]
