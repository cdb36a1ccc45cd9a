"""The best arc of each view: its grid node at once, refined off the grid in the background.

Refining the best arc (``solver.window.refine.refine_best``) takes from a tenth of a second to
several seconds depending on the metric, too long to hold a click or a metric change; so a view
first shows the best grid node while a worker thread refines it, and the page's poll picks the
refined arc up.

Which of the two a page shows is decided by the page's own grid status (``map_loop``), never by
timing: the map's star and the details panel ask for the same one (``refined=`` below), so they
always agree, and every tab that shows a view gets the same refined arc (the result is kept by
grid, metric and arcs shown, and refinement is deterministic).
"""

from __future__ import annotations

import logging
import threading
import time
from collections import OrderedDict
from concurrent.futures import ThreadPoolExecutor
from typing import Any

from solver.errors import InputError
from solver.window.best import best_grid_arc
from solver.window.case import Case
from solver.window.case_bodies import CaseBodies
from solver.window.cell import Arc
from solver.window.grid import WindowGrid

from .display_data import shown_slot
from .grid_jobs import grid_key
from .slowdown import Slowdown
from .view_state import parse_arcs

_LOG = logging.getLogger(__name__)

MEMO_SIZE = 512
"""Arcs kept per kind (nodes, refined): a few kB each."""
ASKED_WINDOW_S = 60.0
"""A queued refinement nobody has asked about for this long is skipped when its turn comes."""
_NONE = False  # memo value for "no arc within limits"


class _Memo:
    """A small thread-safe LRU."""

    def __init__(self, size: int) -> None:
        self.size = size
        self._items: OrderedDict = OrderedDict()
        self._lock = threading.Lock()

    def get(self, key) -> Any:
        with self._lock:
            if key in self._items:
                self._items.move_to_end(key)
                return self._items[key]
        return None

    def put(self, key, value) -> Any:
        with self._lock:
            self._items[key] = value
            self._items.move_to_end(key)
            while len(self._items) > self.size:
                self._items.popitem(last=False)
        return value


def grid_best_arc(
    case: Case, grid: WindowGrid, metric: str, arcs: str, bodies: CaseBodies
) -> Arc | None:
    """The best arc within limits among the arcs shown, at its grid node (None if no arc of
    the grid is within limits, or the arcs shown do not exist in this grid)."""
    slot = shown_slot(grid, arcs)
    if slot == -1:
        return None
    return best_grid_arc(case, grid, metric, slots=None if slot is None else [slot], bodies=bodies)


class BestArcs:
    """Best arcs by (grid, metric, arcs shown)."""

    def __init__(self, slowdown: Slowdown | None = None) -> None:
        self._nodes = _Memo(MEMO_SIZE)
        self._refined = _Memo(MEMO_SIZE)
        self._failed: set[tuple] = set()
        self._pending: dict[tuple, float] = {}  # key -> monotonic time last asked about
        self._lock = threading.Lock()
        self._pool = ThreadPoolExecutor(max_workers=1, thread_name_prefix="arcwindow-refine")
        self._slowdown = slowdown or Slowdown.from_environment()

    @staticmethod
    def key(grid: WindowGrid, metric: str, arcs: str) -> tuple:
        return (grid_key(grid.case), metric, arcs)

    def node(self, case, grid, metric, arcs, bodies) -> Arc | None:
        """The best arc at its grid node (computed once per key)."""
        key = self.key(grid, metric, arcs)
        hit = self._nodes.get(key)
        if hit is None:
            hit = self._nodes.put(key, grid_best_arc(case, grid, metric, arcs, bodies) or _NONE)
        return hit or None

    def state(self, case, grid, metric, arcs, bodies) -> str:
        """``"none"`` (no arc within limits), ``"refined"`` (ready) or ``"refining"`` (started
        now if it was not)."""
        key = self.key(grid, metric, arcs)
        if self.node(case, grid, metric, arcs, bodies) is None:
            return "none"
        if self._refined.get(key) is not None:
            return "refined"
        self._start(key, case, grid, metric, arcs)
        return "refining"

    def get(self, case, grid, metric, arcs, bodies, *, refined: bool) -> Arc | None:
        """The grid node's best arc, or the refined one when ``refined`` (refined here and now
        if the background result is not at hand, e.g. dropped from the memo)."""
        node = self.node(case, grid, metric, arcs, bodies)
        if node is None or not refined:
            return node
        key = self.key(grid, metric, arcs)
        hit = self._refined.get(key)
        if hit is None:
            hit = self._refine(key, case, grid, metric, arcs, pause=False)
        return hit or None

    def failed(self, grid, metric, arcs) -> bool:
        """Whether the refinement of this view failed (the grid node then stands)."""
        return self.key(grid, metric, arcs) in self._failed

    def _start(self, key, case, grid, metric, arcs) -> None:
        with self._lock:
            fresh = key not in self._pending
            self._pending[key] = time.monotonic()
        if fresh:
            self._pool.submit(self._queued, key, case, grid, metric, arcs)

    def _queued(self, key, case, grid, metric, arcs) -> None:
        with self._lock:
            asked = self._pending.get(key, 0.0)
        try:
            if time.monotonic() - asked > ASKED_WINDOW_S:
                return  # nobody looks at this view any more; a later ask starts it again
            self._refine(key, case, grid, metric, arcs, pause=True)
        finally:
            with self._lock:
                self._pending.pop(key, None)

    def _refine(self, key, case, grid, metric, arcs, *, pause: bool) -> Arc | bool:
        from solver.window.refine import refine_best  # scipy.optimize: imported when needed

        if pause:
            self._slowdown.refine_pause()
        revolutions, branch = parse_arcs(arcs)
        try:
            arc: Arc | bool = refine_best(
                case, grid, metric, revolutions=revolutions, branch=branch
            ).arc
        except InputError:
            arc = _NONE  # no arc of the grid within limits
        except Exception:  # keep the grid node rather than lose the page to a failed refinement
            _LOG.exception("refining the best arc failed; keeping the grid node")
            self._failed.add(key)
            arc = self._nodes.get(key) or _NONE
        return self._refined.put(key, arc or _NONE)

    def wait(self, grid, metric, arcs, timeout_s: float) -> bool:
        """Wait up to ``timeout_s`` for a refinement to finish (tests and the benchmark)."""
        key = self.key(grid, metric, arcs)
        deadline = time.monotonic() + timeout_s
        while time.monotonic() < deadline:
            if self._refined.get(key) is not None:
                return True
            threading.Event().wait(0.01)
        return self._refined.get(key) is not None

    def idle(self) -> bool:
        with self._lock:
            return not self._pending

    def shutdown(self) -> None:
        self._pool.shutdown(wait=False, cancel_futures=True)


__all__ = ["BestArcs", "grid_best_arc"]
