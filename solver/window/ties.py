"""The order of the best arc among arcs the chosen metric does not separate.

:meth:`solver.window.grid.WindowGrid.best_cell` is the one rule for "the best arc": the lowest
metric, then these tie-breaks; the per-cell best slot (``WindowGrid.best_slot``) and the choice
among one cell's arcs (:func:`solver.window.cell.select_arc`) apply the same order. It is a leaf
module so that the cell, the grid and refinement can all read it without importing each other.
"""

from __future__ import annotations

from collections.abc import Mapping

import numpy as np
from numpy.typing import NDArray

from solver.window.metrics import ranking_values

TIE_BREAK: tuple[str, ...] = ("dv_total_km_s", "c3_km2_s2", "vinf_arrival_km_s", "tof_days")
"""How arcs that the chosen metric does not separate are ranked: by these metrics in turn (the
chosen one skipped), then by the earliest departure and arrival dates. Total Δv first (what
the spacecraft pays), then the launch energy, the arrival speed and the time of flight."""

TIE_RELATIVE = 1e-9
"""Values within this fraction of the lowest (or 1e-12 absolute) count as equal: a TOF on a
whole-day diagonal, a Δv that is 0 for every arc (no parking orbit, a flyby)."""


def tie_tolerance(value: float) -> float:
    """How far from ``value`` another value still ties with it (in the metric's unit)."""
    return max(1e-12, TIE_RELATIVE * abs(value)) if np.isfinite(value) else 0.0


def tied_lowest(score: NDArray[np.float64], axis: int = -1) -> NDArray[np.bool_]:
    """Finite values within :func:`tie_tolerance` of the lowest along ``axis`` (none where
    every value is infinite)."""
    low = np.min(score, axis=axis, keepdims=True)
    finite_low = np.isfinite(low)
    tolerance = np.where(finite_low, np.maximum(1e-12, TIE_RELATIVE * np.abs(low)), 0.0)
    with np.errstate(invalid="ignore"):
        return np.isfinite(score) & finite_low & (score <= low + tolerance)


def ranks_before(values: Mapping[str, float], other: Mapping[str, float], metric: str) -> bool:
    """Whether an arc with metrics ``values`` ranks strictly before one with ``other`` by
    ``metric`` under the grid's rule (:meth:`WindowGrid.best_cell`): the metric first, ties
    (within :func:`tie_tolerance`) by :data:`TIE_BREAK`. For single arcs (refinement)."""
    for name in (metric, *(n for n in TIE_BREAK if n != metric)):
        a = float(ranking_values(values.get(name, np.nan), name))
        b = float(ranking_values(other.get(name, np.nan), name))
        a = a if np.isfinite(a) else np.inf
        b = b if np.isfinite(b) else np.inf
        if abs(a - b) > tie_tolerance(min(a, b)) or not np.isfinite(min(a, b)):
            return a < b
    return False


__all__ = ["TIE_BREAK", "TIE_RELATIVE", "ranks_before", "tie_tolerance", "tied_lowest"]
