"""The best arc of a grid, as an arc: used by refinement, surveys and the dashboard.

The rule for which arc is best lives in :meth:`solver.window.grid.WindowGrid.best_cell`; this
module solves that cell again to give the arc with its states and every metric.
"""

from __future__ import annotations

import numpy as np
from numpy.typing import NDArray

from solver.mechanics.lambert import BRANCH_NAMES
from solver.window.case import Case
from solver.window.case_bodies import CaseBodies
from solver.window.cell import Arc, select_arc, solve_cell
from solver.window.grid import WindowGrid


def slot_arc(case: Case, bodies: CaseBodies, grid: WindowGrid, i: int, j: int, k: int) -> Arc:
    """The arc of grid slot ``k`` at grid node ``(i, j)``, with its states and every metric."""
    return slot_arc_at(
        case, bodies, grid, float(grid.departure_jd_tdb[i]), float(grid.arrival_jd_tdb[j]), k
    )


def slot_arc_at(
    case: Case, bodies: CaseBodies, grid: WindowGrid, dep_jd_tdb: float, arr_jd_tdb: float, k: int
) -> Arc:
    """The arc of grid slot ``k`` (its revolutions and branch) between any two epochs."""
    return select_arc(
        solve_cell(case, dep_jd_tdb, arr_jd_tdb, bodies),
        int(grid.revolutions[k]),
        BRANCH_NAMES[int(grid.branch[k])],
    )


def best_grid_arc(
    case: Case,
    grid: WindowGrid,
    metric: str,
    *,
    slots: list[int] | None = None,
    mask: NDArray[np.bool_] | None = None,
    bodies: CaseBodies | None = None,
) -> Arc | None:
    """The best arc at its grid node (the rule is :meth:`WindowGrid.best_cell`), or None."""
    index = grid.best_cell(metric, slots=slots, mask=mask)
    if index is None:
        return None
    return slot_arc(case, bodies or CaseBodies.of(case), grid, *index)


_BRANCH_CODES = {name: code for code, name in BRANCH_NAMES.items()}


def slots_of(grid: WindowGrid, revolutions: int, branch: str | None = None) -> list[int]:
    """Slots of one revolution count and branch (``branch`` ignored for 0 revolutions)."""
    wanted = 0 if revolutions == 0 else _BRANCH_CODES[branch or "low"]
    return [
        k
        for k in range(len(grid.revolutions))
        if grid.revolutions[k] == revolutions and grid.branch[k] == wanted
    ]


__all__ = ["best_grid_arc", "slot_arc", "slot_arc_at", "slots_of"]
