"""What a section of the details panel holds: labelled values with their units, a small table
(launch vehicles side by side), or a list of notes (what a model leaves out).

Plain data: ``display_data`` and ``launch_details`` fill them from the solver's results, the
page's layout draws them (``pages.window_layout.details_children``).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field


@dataclass(frozen=True)
class DetailRow:
    """One labelled value and its unit (empty for text)."""

    label: str
    value: str
    unit: str = ""


@dataclass(frozen=True)
class DetailTable:
    """A few rows compared column by column.

    Attributes
    ----------
    columns : tuple of str
        Column headings, units in them (``"delivered (kg)"``); the first names the rows.
    rows : tuple of tuple of str
        The cells, as text; numbers are right-aligned when drawn.
    current : int or None
        The row the rest of the panel uses (drawn in bold).
    notes : tuple of str
        Lines under the table (why a cell is empty).
    """

    columns: tuple[str, ...]
    rows: tuple[tuple[str, ...], ...]
    current: int | None = None
    notes: tuple[str, ...] = ()


@dataclass(frozen=True)
class DetailNotes:
    """A titled list of lines, folded away until asked for."""

    summary: str
    items: tuple[str, ...] = field(default=())


Section = tuple[str, list[DetailRow] | DetailTable | DetailNotes]
"""(heading, content) of one section of the details panel."""


def fmt(value: float | None, digits: int = 3) -> str:
    """A number for the details panel: thousands separated, ``—`` when there is none."""
    if value is None or not math.isfinite(value):
        return "—"
    if abs(value) >= 1e6:
        return f"{value:,.0f}"
    return f"{value:,.{digits}f}"


def detail_rows(sections: list) -> dict[tuple[str, str], DetailRow]:
    """Every labelled value of some sections by (heading, label) (tables and notes left out)."""
    return {
        (heading, row.label): row
        for heading, content in sections
        if isinstance(content, list)
        for row in content
    }


__all__ = ["DetailNotes", "DetailRow", "DetailTable", "Section", "detail_rows", "fmt"]
