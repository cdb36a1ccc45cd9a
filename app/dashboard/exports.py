"""Downloads: the selected arc as CCSDS OEM and JSON, figures as HTML (the grid table is
streamed from a file by ``downloads``).

The grid and arc formats are ``solver.files.export``'s own; this module only names the files and
turns results into text. Figures also download as PNG in the browser (the graph's camera
button and the page's PNG buttons); the HTML version inlines plotly.js so it opens offline.
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


def safe_name(text: str) -> str:
    """A file-name stem from free text."""
    return re.sub(r"[^A-Za-z0-9_.-]+", "_", text).strip("_")[:80] or "arcwindow"


def arc_oem(case: Case, arc: Arc) -> str:
    """CCSDS OEM 2.0 text of the arc."""
    return arc_oem_text(case, arc)


def arc_json(case: Case, arc: Arc) -> str:
    """The arc as JSON text (states, metrics, elements, provenance)."""
    return json.dumps(_arc_json(case, arc), indent=1, ensure_ascii=False)


def figure_html(fig: go.Figure) -> str:
    """A standalone HTML page of a figure, with the caution under it; opens offline."""
    page = fig.to_html(include_plotlyjs=True, full_html=True)
    note = f'<p style="font-family:sans-serif;font-size:12px;color:#6b4e00">{CAUTION}</p>'
    return page.replace("</body>", note + "</body>", 1)
