"""The window map's live loop as pure functions: what a tab shows while its grid is solved and
its best arc refined.

A tab holds three small records (``dcc.Store`` data, plain JSON):

* the **grid status** of its current view (:class:`GridStatus`): which view it is for (the view's
  URL query is its request identity), which grid, and the phase: ``solving``, ``ready``,
  ``failed`` or ``cancelled``; and for a ready grid, which best arc may be shown (``node`` while
  it is refined, then ``refined``). The view callback writes a fresh status with every new view;
  the poll moves it on. Nothing else writes it.
* what the **map** shows (:class:`Shown`): for which view, grid, metric and arcs, and which
  best arc.
* what the **selection** panels show (the view and the best arc they were drawn for).

The map and the selection panels are redrawn when the status changes, never on a poll tick, so
a slow drawing of a large map is never superseded by the next tick (the page once polled every
300 ms, each poll restarting the drawing the one before had begun, and the map never came).
From a status and what is shown, :func:`plan_map` and :func:`plan_selection` say what to draw;
comparing the identities makes a late answer for an old view harmless: a status for another
view draws nothing, and what is shown for another view is replaced. The page therefore always
shows one of: the map of the current view, the progress of its job, or an error naming the
cause. :func:`plan_poll` moves a status on from the server's ticket: a lost job is restarted
(twice at most, then reported), a stalled one reported, and polling backs off and stops.
"""

from __future__ import annotations

from dataclasses import asdict, dataclass, replace
from typing import Any

MAX_RESTARTS = 2
"""A job lost (unknown to the server, or its grid dropped before it was drawn) is asked for again
this many times before the page reports it."""
REFINE_WAIT_POLLS = 120
"""Polls (about 4 minutes at the slowest rate) a view waits for its refined best arc before it
keeps the grid node and says so."""

PHASES = ("solving", "ready", "failed", "cancelled")
CANCELLED = (
    "Cancelled: this tab no longer waits for the grid (other viewers may). "
    "Press “Compute again” to solve it."
)
"""What the progress strip says once this tab cancelled its grid."""
BEST = ("node", "refined", "none", "unrefined")


def poll_interval_ms(polls: int) -> int:
    """How long to wait before the next poll: quick at first, slower as a job goes on."""
    if polls < 10:
        return 300
    if polls < 20:
        return 600
    if polls < 50:
        return 1000
    return 2000


@dataclass(frozen=True)
class GridStatus:
    """The grid status of a tab's current view (the ``store-grid-status`` data).

    Attributes
    ----------
    view : str
        The view's URL query: the request's identity.
    grid : str
        The grid's cache key.
    phase : {"solving", "ready", "failed", "cancelled"}
    best : {"node", "refined", "none", "unrefined"}
        For a ready grid, the best arc to show: the grid node while it is refined, the refined
        arc, none within limits, or the node after refinement did not finish in time.
    slots : int
        Arc slots of the grid (a metric change redraws the "best arc of each cell" map whole
        when there are several).
    message : str
        Why a job failed or was cancelled.
    restarts : int
        Times the job was asked for again after it was lost.
    polls : int
        Polls since the status last changed phase (paces the poll and bounds the wait).
    """

    view: str
    grid: str
    phase: str
    best: str = "node"
    slots: int = 1
    message: str = ""
    restarts: int = 0
    polls: int = 0

    def to_dict(self) -> dict[str, Any]:
        return asdict(self)

    @classmethod
    def from_dict(cls, data: Any) -> GridStatus | None:
        """The status a page holds, or None when it holds none or something unreadable."""
        if not isinstance(data, dict):
            return None
        try:
            status = cls(
                view=str(data["view"]),
                grid=str(data["grid"]),
                phase=str(data["phase"]),
                best=str(data.get("best", "node")),
                slots=int(data.get("slots", 1)),
                message=str(data.get("message", ""))[:500],
                restarts=int(data.get("restarts", 0)),
                polls=int(data.get("polls", 0)),
            )
        except (KeyError, TypeError, ValueError):
            return None
        if status.phase not in PHASES or status.best not in BEST:
            return None
        return status

    @property
    def settled(self) -> bool:
        """Nothing more will change without a new view or a retry."""
        return self.phase in ("failed", "cancelled") or (
            self.phase == "ready" and self.best != "node"
        )


def status_from_ticket(
    view: str, grid: str, slots: int, phase: str, best: str | None, message: str = ""
) -> GridStatus:
    """The first status of a view, from its ticket's phase and (for a ready grid) the state of
    its best arc (``best_state``: "refined", "refining" or "none")."""
    if phase == "ready":
        return GridStatus(view, grid, "ready", _best_of(best), slots)
    if phase in ("failed", "cancelled"):
        return GridStatus(view, grid, phase, "node", slots, message)
    return GridStatus(view, grid, "solving", "node", slots)


def _best_of(best_state: str | None) -> str:
    return {"refined": "refined", "none": "none"}.get(best_state or "", "node")


# ---------------------------------------------------------------------------------------------
# The poll


@dataclass(frozen=True)
class Progress:
    """What the progress strip above the map says."""

    visible: bool = False
    text: str = ""
    fraction: float = 0.0
    cancel: bool = False  # a Cancel button (a job this tab waits for)
    retry: bool = False  # a "Compute again" button (failed or cancelled)


@dataclass(frozen=True)
class PollPlan:
    """What one poll tick does.

    ``status`` is the new status (None: unchanged, so nothing is redrawn); ``action`` is
    ``"restart"`` (ask for the grid again) or ``""``; ``interval_ms`` is when to poll next
    (None: stop polling).
    """

    status: GridStatus | None
    action: str
    interval_ms: int | None
    progress: Progress


def progress_of(status: GridStatus, ticket: dict | None) -> Progress:
    """The progress strip for a status (and the server's ticket while solving)."""
    if status.phase == "solving":
        ticket = ticket or {}
        elapsed = float(ticket.get("elapsed_s", 0.0))
        if ticket.get("phase") == "queued":
            ahead = int(ticket.get("ahead", 0))
            behind = f"{ahead} grid{'s' if ahead != 1 else ''} ahead" if ahead else "next"
            text = f"Waiting for a grid worker ({behind}, {elapsed:.1f} s)…"
            return Progress(True, text, 0.0, cancel=True)
        fraction = float(ticket.get("fraction", 0.0))
        text = f"Solving the window… {100 * fraction:.0f}% ({elapsed:.1f} s)"
        return Progress(True, text, fraction, cancel=True)
    if status.phase in ("failed", "cancelled"):
        return Progress(True, status.message or status.phase, 0.0, retry=True)
    return Progress()


def plan_poll(
    status: GridStatus | None, view: str, ticket: dict | None, best_state: str | None
) -> PollPlan:
    """One poll tick.

    Parameters
    ----------
    status : GridStatus or None
        The tab's status.
    view : str
        The tab's current view (a status for another view is left alone: the view's own
        status is on its way).
    ticket : dict or None
        The server's ticket for the status's grid (``grid_jobs.Ticket`` as a dict): phase
        ``ready``, ``queued``, ``running``, ``failed``, ``cancelled`` or ``lost``, ``stalled``.
    best_state : str or None
        For a ready grid in memory: "refined", "refining" or "none"; "lost" when the grid is no
        longer in memory; None when not asked.
    """
    if status is None or status.view != view or status.settled:
        return PollPlan(None, "", None, Progress() if status is None else progress_of(status, None))
    polls = status.polls + 1
    if status.phase == "solving":
        phase = (ticket or {}).get("phase", "lost")
        if phase == "ready":
            new = replace(status, phase="ready", best=_best_of(best_state), polls=0)
            return _moved(new, None)
        if phase == "cancelled" and (ticket or {}).get("withdrawn"):
            # This tab pressed Cancel (its answer may have been lost to a tick in flight).
            return _moved(replace(status, phase="cancelled", message=CANCELLED, polls=0), None)
        if phase in ("lost", "cancelled"):
            # Lost, or cancelled without this tab asking (its wait lapsed): ask again.
            if status.restarts < MAX_RESTARTS:
                new = replace(status, restarts=status.restarts + 1, polls=0)
                return PollPlan(new, "restart", poll_interval_ms(0), progress_of(new, None))
            reason = (ticket or {}).get("message") or "the grid job was lost"
            new = replace(
                status,
                phase="failed",
                message=f"No grid: {reason} (asked {MAX_RESTARTS + 1} times).",
                polls=0,
            )
            return _moved(new, None)
        if phase == "failed":
            message = (ticket or {}).get("message") or "the grid job failed"
            return _moved(replace(status, phase="failed", message=message, polls=0), None)
        if (ticket or {}).get("stalled"):
            new = replace(
                status,
                phase="failed",
                message="No grid: its job has reported no progress for minutes; press "
                "“Compute again” to start it afresh.",
                polls=0,
            )
            return _moved(new, None)
        new = replace(status, polls=polls)
        return PollPlan(None, "", poll_interval_ms(polls), progress_of(new, ticket))
    # ready, waiting for the refined best arc
    if best_state == "lost":  # the grid was dropped from memory: solve it again
        new = replace(status, phase="solving", polls=0)
        return PollPlan(new, "restart", poll_interval_ms(0), progress_of(new, None))
    best = _best_of(best_state)
    if best != "node":
        return _moved(replace(status, best=best, polls=0), None)
    if polls >= REFINE_WAIT_POLLS:
        return _moved(replace(status, best="unrefined", polls=0), None)
    return PollPlan(None, "", poll_interval_ms(polls), Progress())


def _moved(status: GridStatus, ticket: dict | None) -> PollPlan:
    interval = None if status.settled else poll_interval_ms(0)
    return PollPlan(status, "", interval, progress_of(status, ticket))


# ---------------------------------------------------------------------------------------------
# The map


@dataclass(frozen=True)
class Shown:
    """What the map shows (the ``store-map-shown`` data).

    ``kind``: "empty", "preview", "solving", "error" or "full"; the rest identify a full map.
    """

    kind: str
    view: str = ""
    grid: str = ""
    metric: str = ""
    arcs: str = ""
    best: str = ""
    message: str = ""

    def to_dict(self) -> dict[str, Any]:
        return asdict(self)

    @classmethod
    def from_dict(cls, data: Any) -> Shown:
        if not isinstance(data, dict):
            return cls("empty")
        fields = {k: str(data.get(k, "")) for k in cls.__dataclass_fields__}
        return cls(**fields)


@dataclass(frozen=True)
class MapPlan:
    """What the map callback draws: ``action`` is one of "nothing", "preview", "solving",
    "error", "full", "patch_markers" or "patch_metric"; ``shown`` what is shown afterwards."""

    action: str
    shown: Shown | None = None


def plan_map(
    trigger: str,
    status: GridStatus | None,
    shown: Shown,
    *,
    view: str,
    metric: str,
    arcs: str,
    dragging: bool = False,
) -> MapPlan:
    """What the map callback draws.

    Parameters
    ----------
    trigger : {"status", "drag", "retry"}
        A new status (a new view, or the poll moved it on), a date slider being dragged, or the
        retry button.
    status : GridStatus or None
        The tab's status.
    shown : Shown
        What the map shows now.
    view, metric, arcs : str
        The tab's current view (its URL query), metric and arcs shown.
    dragging : bool
        A slider's dragged dates differ from the view's dates (a drag in progress, or just
        released and not yet the view), whichever input fired.
    """
    if dragging:
        # A drag in progress owns the map until it ends, whatever status lands meanwhile: Dash
        # drops the answer to a drag when the same callback is asked again for a status before
        # that answer arrives, so a status round must draw the preview itself.
        if trigger == "status" and shown.kind == "preview":
            return MapPlan("nothing")
        return MapPlan("preview", Shown("preview", view))
    if trigger == "drag" and shown.kind != "preview":
        return MapPlan("nothing")
    # a drag that ended where the view is falls through and shows the view's own state
    if status is None or status.view != view:
        return MapPlan("nothing")  # a status for another view: the current one's is coming
    if status.phase == "solving":
        if shown.kind == "solving" and shown.view == view:
            return MapPlan("nothing")
        return MapPlan("solving", Shown("solving", view, status.grid))
    if status.phase in ("failed", "cancelled"):
        now = Shown("error", view, status.grid, message=status.message)
        return MapPlan("nothing" if shown == now else "error", now)
    now = Shown("full", view, status.grid, metric, arcs, status.best)
    if shown.kind != "full" or shown.grid != status.grid or shown.arcs != arcs:
        return MapPlan("full", now)
    if shown.metric != metric:
        if arcs == "best" and status.slots > 1:
            return MapPlan("full", now)  # each cell's best arc depends on the metric
        return MapPlan("patch_metric", now)
    if shown.view != view or shown.best != status.best:
        return MapPlan("patch_markers", now)
    return MapPlan("nothing")


# ---------------------------------------------------------------------------------------------
# The selected arc's panels


@dataclass(frozen=True)
class SelectionPlan:
    """What the selection callback draws: ``action`` is "nothing", "cell" (the selected cell,
    which needs no grid), "best" (the view's best arc), "waiting" or "error"."""

    action: str
    drawn: dict[str, str] | None = None


def plan_selection(
    status: GridStatus | None, drawn: Any, *, view: str, selected: bool
) -> SelectionPlan:
    """What the arc view, family chart and details panel draw for a status."""
    if status is None or status.view != view:
        return SelectionPlan("nothing")
    drawn = drawn if isinstance(drawn, dict) else {}
    if selected:
        # the selected cell needs no grid; its map marker alone waits for the grid
        key = {"view": view, "best": "cell"}
        return SelectionPlan("nothing" if drawn == key else "cell", key)
    if status.phase == "solving":
        key = {"view": view, "best": "waiting"}
        return SelectionPlan("nothing" if drawn == key else "waiting", key)
    if status.phase in ("failed", "cancelled"):
        key = {"view": view, "best": "error"}
        return SelectionPlan("nothing" if drawn == key else "error", key)
    key = {"view": view, "best": status.best}
    return SelectionPlan("nothing" if drawn == key else "best", key)


__all__ = [
    "BEST",
    "CANCELLED",
    "MAX_RESTARTS",
    "PHASES",
    "REFINE_WAIT_POLLS",
    "GridStatus",
    "MapPlan",
    "PollPlan",
    "Progress",
    "SelectionPlan",
    "Shown",
    "plan_map",
    "plan_poll",
    "plan_selection",
    "poll_interval_ms",
    "progress_of",
    "status_from_ticket",
]
