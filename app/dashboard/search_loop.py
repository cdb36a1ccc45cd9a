"""The sequence page's live loop as pure functions: what a tab shows while its search runs.

The same rules as the window map's loop (``map_loop``): a tab holds the **search status** of
its current view (``store-seq-status``): which view it is for (the view's URL query, the
request's identity), which search (its job key), and the phase: ``solving``, ``ready``,
``failed`` or ``cancelled``. The view callback writes a fresh status with every new view; the
poll moves it on; nothing else writes it. The candidates, the selected candidate's views and the
leg map are drawn when the status changes, never on a poll tick, and only from a status for the
tab's current view (:func:`plan_draw`): a late answer for an old view draws nothing, so the page
always shows one of: the current view's candidates and views, the search's progress, or an
error naming its cause. :func:`plan_poll` moves a status on from the server's ticket: a lost
search is asked for again (twice at most, then reported), a stalled one reported, and polling
backs off and stops.
"""

from __future__ import annotations

from dataclasses import asdict, dataclass, replace
from typing import Any

from .map_loop import MAX_RESTARTS, PollPlan, Progress, poll_interval_ms

PHASES = ("solving", "ready", "failed", "cancelled")


@dataclass(frozen=True)
class SearchStatus:
    """The search status of a tab's current view (the ``store-seq-status`` data).

    Attributes
    ----------
    view : str
        The view's URL query: the request's identity.
    key : str
        The search's job key.
    phase : {"solving", "ready", "failed", "cancelled"}
    message : str
        Why a search failed or was cancelled.
    restarts : int
        Times the search was asked for again after it was lost.
    polls : int
        Polls since the status last changed (paces the poll).
    """

    view: str
    key: str
    phase: str
    message: str = ""
    restarts: int = 0
    polls: int = 0

    def to_dict(self) -> dict[str, Any]:
        return asdict(self)

    @classmethod
    def from_dict(cls, data: Any) -> SearchStatus | None:
        """The status a page holds, or None when it holds none or something unreadable."""
        if not isinstance(data, dict):
            return None
        try:
            status = cls(
                view=str(data["view"]),
                key=str(data["key"]),
                phase=str(data["phase"]),
                message=str(data.get("message", ""))[:500],
                restarts=int(data.get("restarts", 0)),
                polls=int(data.get("polls", 0)),
            )
        except (KeyError, TypeError, ValueError):
            return None
        return status if status.phase in PHASES else None

    @property
    def settled(self) -> bool:
        """Nothing more will change without a new view or a retry."""
        return self.phase != "solving"


CANCELLED = (
    "Cancelled: this tab no longer waits for the search (other viewers may). "
    "Press “Search again” to run it."
)
"""What the progress strip says once this tab cancelled its search."""


def status_from_ticket(view: str, key: str, phase: str, message: str = "") -> SearchStatus:
    """The first status of a view from its ticket's phase."""
    if phase == "ready":
        return SearchStatus(view, key, "ready")
    if phase in ("failed", "cancelled"):
        return SearchStatus(view, key, phase, message)
    return SearchStatus(view, key, "solving")


def progress_of(status: SearchStatus, ticket: dict | None) -> Progress:
    """The progress strip for a status (and the server's ticket while searching)."""
    if status.phase == "solving":
        ticket = ticket or {}
        elapsed = float(ticket.get("elapsed_s", 0.0))
        if ticket.get("phase") == "queued":
            ahead = int(ticket.get("ahead", 0))
            behind = f"{ahead} search{'es' if ahead != 1 else ''} ahead" if ahead else "next"
            return Progress(True, f"Waiting for a search worker ({behind}, {elapsed:.1f} s)…")
        fraction = float(ticket.get("fraction", 0.0))
        text = f"Searching for candidates… {100 * fraction:.0f}% ({elapsed:.1f} s)"
        note = str(ticket.get("note") or "")
        if note:
            text += f" — {note}"
        return Progress(True, text, fraction, cancel=True)
    if status.phase in ("failed", "cancelled"):
        return Progress(True, status.message or status.phase, 0.0, retry=True)
    return Progress()


def plan_poll(status: SearchStatus | None, view: str, ticket: dict | None) -> PollPlan:
    """One poll tick (a status for another view is left alone: the view's own is on its way)."""
    if status is None or status.view != view or status.settled:
        return PollPlan(None, "", None, Progress() if status is None else progress_of(status, None))
    polls = status.polls + 1
    phase = (ticket or {}).get("phase", "lost")
    if phase == "ready":
        return PollPlan(replace(status, phase="ready", polls=0), "", None, Progress())
    if phase == "cancelled" and (ticket or {}).get("withdrawn"):
        # This tab pressed Cancel (its answer may have been lost to a tick in flight): settle.
        new = replace(status, phase="cancelled", message=CANCELLED, polls=0)
        return PollPlan(new, "", None, progress_of(new, None))
    if phase in ("lost", "cancelled"):
        if status.restarts < MAX_RESTARTS:
            new = replace(status, restarts=status.restarts + 1, polls=0)
            return PollPlan(new, "restart", poll_interval_ms(0), progress_of(new, None))
        reason = (ticket or {}).get("message") or "the search job was lost"
        new = replace(
            status,
            phase="failed",
            message=f"No candidates: {reason} (asked {MAX_RESTARTS + 1} times).",
            polls=0,
        )
        return PollPlan(new, "", None, progress_of(new, None))
    if phase == "failed":
        message = (ticket or {}).get("message") or "the search failed"
        new = replace(status, phase="failed", message=f"No candidates: {message}", polls=0)
        return PollPlan(new, "", None, progress_of(new, None))
    if (ticket or {}).get("stalled"):
        new = replace(
            status,
            phase="failed",
            message="No candidates: the search has reported no progress for minutes; press "
            "“Search again” to start it afresh.",
            polls=0,
        )
        return PollPlan(new, "", None, progress_of(new, None))
    new = replace(status, polls=polls)
    return PollPlan(None, "", poll_interval_ms(polls), progress_of(new, ticket))


def plan_draw(status: SearchStatus | None, view: str) -> str:
    """What a drawing callback does for a status: ``"nothing"`` (a status for another view, or
    none), ``"waiting"`` (the search runs), ``"error"`` (it failed or was cancelled) or
    ``"draw"``."""
    if status is None or status.view != view:
        return "nothing"
    if status.phase == "solving":
        return "waiting"
    if status.phase in ("failed", "cancelled"):
        return "error"
    return "draw"


__all__ = [
    "CANCELLED",
    "PHASES",
    "SearchStatus",
    "plan_draw",
    "plan_poll",
    "progress_of",
    "status_from_ticket",
]
