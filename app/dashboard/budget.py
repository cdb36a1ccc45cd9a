"""The memory budget of one request to a served dashboard.

A grid is the only thing a request allocates in proportion to what the viewer asks: its size is
known from the windows and steps before anything is built (``solver.window.grid.check_grid_size``,
arithmetic only), so the budget is enforced as a cap on cell-arcs, checked before allocation.
One cell-arc costs :data:`REQUEST_BYTES_PER_CELL_ARC` at the request's peak: the grid's arrays
(``BYTES_PER_CELL_ARC`` plus the per-cell TOF and angle) and the temporaries of ranking the best
arc and preparing the map (measured; see docs/threat-model.md, "Budgets").

``arcwindow serve --request-budget`` (or ``ARCWINDOW_REQUEST_BUDGET``, default 1 GiB) sets it for
the server process through ``ARCWINDOW_MAX_CELL_ARCS``, which the case catalogue's size check and
the grid jobs read; an operator's own ``ARCWINDOW_MAX_CELL_ARCS`` still applies if smaller. Time
follows size: the engine solves a few hundred thousand to a million cell-arcs a second per core,
so the default cap also bounds one grid to seconds of work.
"""

from __future__ import annotations

import os
from dataclasses import dataclass

from solver.errors import InputError
from solver.files.cache import parse_byte_size
from solver.window.grid import BYTES_PER_CELL_ARC, ENV_MAX_CELL_ARCS, max_cell_arcs

ENV_REQUEST_BUDGET = "ARCWINDOW_REQUEST_BUDGET"
DEFAULT_REQUEST_BUDGET = "1GiB"
REQUEST_BYTES_PER_CELL_ARC = 2 * (BYTES_PER_CELL_ARC + 16)
"""Peak bytes per cell-arc of a request that solves, shows and exports a grid: twice the grid's
arrays (123 + 16 bytes for a one-arc cell). Measured on a served Venus case at the default cap
(3.8 million cell-arcs): the server grew by 1.5 times the grid's arrays while solving it and
drawing its map and selected arc, and by 0.2 GB more while writing its CSV for download (0.92
GiB in all, for a 1 GiB budget)."""


@dataclass(frozen=True)
class RequestBudget:
    """Bytes one request may use, and the grid size that follows."""

    bytes: int
    max_cell_arcs: int

    def describe(self) -> str:
        return (
            f"request budget {self.bytes / 2**30:.3g} GiB: grids up to {self.max_cell_arcs:,} "
            "cell-arcs, request bodies up to 1 MiB"
        )


def request_budget(size: str | None = None) -> RequestBudget:
    """The budget from ``size`` (``"1GiB"``), else ``ARCWINDOW_REQUEST_BUDGET``, else 1 GiB."""
    text = size if size is not None else os.environ.get(ENV_REQUEST_BUDGET, "").strip()
    field = "--request-budget" if size is not None else ENV_REQUEST_BUDGET
    nbytes = parse_byte_size(text or DEFAULT_REQUEST_BUDGET, field)
    cells = nbytes // REQUEST_BYTES_PER_CELL_ARC
    if cells < 1:
        raise InputError(field, text, f"at least {REQUEST_BYTES_PER_CELL_ARC} bytes")
    if os.environ.get(ENV_MAX_CELL_ARCS, "").strip():
        cells = min(cells, max_cell_arcs())
    return RequestBudget(nbytes, int(cells))


def apply_request_budget(size: str | None = None) -> RequestBudget:
    """Set this process's grid cap from the budget (the server process only)."""
    budget = request_budget(size)
    os.environ[ENV_MAX_CELL_ARCS] = str(budget.max_cell_arcs)
    return budget


__all__ = [
    "DEFAULT_REQUEST_BUDGET",
    "ENV_REQUEST_BUDGET",
    "REQUEST_BYTES_PER_CELL_ARC",
    "RequestBudget",
    "apply_request_budget",
    "request_budget",
]
