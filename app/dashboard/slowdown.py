"""A test-only setting that slows the server's background work down on purpose.

Races between a viewer's actions and the server's background work (a grid being solved, a best
arc being refined) decide what a page shows; on a fast machine they happen only by chance. The
browser tests and the dashboard's soak benchmark set ``ARCWINDOW_TEST_SLOWDOWN`` on the server
they start so that every grid job and every refinement takes seconds, and each race happens on
every run::

    ARCWINDOW_TEST_SLOWDOWN="grid=3,refine=4" arcwindow serve --port 8123

``grid`` seconds are added to every grid job (spent in ten steps before the solve, so a cancel
is heard between steps); ``refine`` seconds are added to every refinement of a best arc;
``search`` seconds to every sequence search (in ten steps, like a grid's); ``poll`` seconds to
every answer of the window page's grid poll (a server so busy that a poll takes longer than the
poll interval); ``map`` seconds to every answer of the window page's map drawing (an answer
that lands after the viewer has gone to another page). Unset (the default), nothing is slowed.
"""

from __future__ import annotations

import os
import threading
from dataclasses import dataclass

from solver.errors import InputError

ENV_SLOWDOWN = "ARCWINDOW_TEST_SLOWDOWN"
_STEPS = 10


@dataclass(frozen=True)
class Slowdown:
    """Seconds added to each grid job, refinement, search, poll answer and map answer (0: none)."""

    grid_s: float = 0.0
    refine_s: float = 0.0
    search_s: float = 0.0
    poll_s: float = 0.0
    map_s: float = 0.0

    @classmethod
    def from_text(cls, text: str | None) -> Slowdown:
        """Read ``"grid=3,refine=4,search=2,poll=0.5,map=2"`` (any part may be left out)."""
        values = {"grid": 0.0, "refine": 0.0, "search": 0.0, "poll": 0.0, "map": 0.0}
        for part in (text or "").split(","):
            if not part.strip():
                continue
            name, sep, value = part.partition("=")
            name = name.strip()
            try:
                seconds = float(value)
            except ValueError:
                seconds = -1.0
            if not sep or name not in values or not 0.0 <= seconds <= 600.0:
                raise InputError(
                    ENV_SLOWDOWN,
                    text,
                    "NAME=SECONDS, NAME one of grid, refine, search, poll, map (0 to 600 s)",
                )
            values[name] = seconds
        return cls(
            grid_s=values["grid"],
            refine_s=values["refine"],
            search_s=values["search"],
            poll_s=values["poll"],
            map_s=values["map"],
        )

    @classmethod
    def from_environment(cls) -> Slowdown:
        return cls.from_text(os.environ.get(ENV_SLOWDOWN))

    def grid_pause(self, check) -> None:
        """Spend ``grid_s`` in ten steps, calling ``check()`` after each.

        ``check`` may raise (a cancelled job's check does) to stop early.
        """
        _pause(self.grid_s, check)

    def search_pause(self, check) -> None:
        """Spend ``search_s`` in ten steps, calling ``check()`` after each."""
        _pause(self.search_s, check)

    def refine_pause(self) -> None:
        if self.refine_s > 0:
            threading.Event().wait(self.refine_s)

    def poll_pause(self) -> None:
        if self.poll_s > 0:
            threading.Event().wait(self.poll_s)

    def map_pause(self) -> None:
        if self.map_s > 0:
            threading.Event().wait(self.map_s)


def _pause(seconds: float, check) -> None:
    if seconds <= 0:
        return
    for _ in range(_STEPS):
        threading.Event().wait(seconds / _STEPS)
        check()


__all__ = ["ENV_SLOWDOWN", "Slowdown"]
