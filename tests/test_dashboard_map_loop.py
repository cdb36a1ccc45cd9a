"""The window map's live loop as pure functions (app/dashboard/map_loop.py), without a browser.

Each test names the failure of the page it rules out: a map left stale by a late answer, a job
polled for ever, a refined best arc that never reached the tab that asked, a star and details
that disagree.
"""

from __future__ import annotations

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from app.dashboard.map_loop import (
    MAX_RESTARTS,
    REFINE_WAIT_POLLS,
    GridStatus,
    Shown,
    plan_map,
    plan_poll,
    plan_selection,
    poll_interval_ms,
    status_from_ticket,
)

V1, V2 = "?case=a&metric=c3_km2_s2&arcs=0", "?case=a&metric=c3_km2_s2&arcs=0&sel=x~y"
G1, G2 = "grid-one", "grid-two"


def solving(view=V1, grid=G1, **kw) -> GridStatus:
    return GridStatus(view, grid, "solving", **kw)


def ready(view=V1, grid=G1, best="node", **kw) -> GridStatus:
    return GridStatus(view, grid, "ready", best, **kw)


# ---------------------------------------------------------------------------------------------
# The first status of a view


def test_a_views_first_status_follows_its_ticket():
    assert status_from_ticket(V1, G1, 1, "ready", "refined").best == "refined"
    assert status_from_ticket(V1, G1, 1, "ready", "refining").best == "node"
    assert status_from_ticket(V1, G1, 1, "ready", "none").best == "none"
    assert status_from_ticket(V1, G1, 1, "queued", None).phase == "solving"
    failed = status_from_ticket(V1, G1, 1, "failed", None, "disk full")
    assert failed.phase == "failed" and failed.message == "disk full" and failed.settled


def test_a_status_round_trips_and_refuses_garbage():
    status = ready(best="refined", slots=5, restarts=1, polls=3)
    assert GridStatus.from_dict(status.to_dict()) == status
    for bad in (None, "x", {}, {"view": V1, "grid": G1, "phase": "dancing"}, {"view": V1}):
        assert GridStatus.from_dict(bad) is None


# ---------------------------------------------------------------------------------------------
# The poll


def test_polling_backs_off_and_stops_when_settled():
    assert poll_interval_ms(0) == 300 and poll_interval_ms(15) == 600
    assert poll_interval_ms(30) == 1000 and poll_interval_ms(500) == 2000
    plan = plan_poll(ready(best="refined"), V1, None, None)
    assert plan.interval_ms is None and plan.status is None
    plan = plan_poll(GridStatus(V1, G1, "failed", message="x"), V1, None, None)
    assert plan.interval_ms is None


def test_a_running_job_reports_progress_then_becomes_ready():
    status = solving()
    plan = plan_poll(status, V1, {"phase": "running", "fraction": 0.42, "elapsed_s": 3.2}, None)
    assert plan.status is None  # nothing to redraw: only the progress strip moves
    assert plan.progress.visible and "42%" in plan.progress.text and "3.2 s" in plan.progress.text
    assert plan.progress.cancel and not plan.progress.retry
    plan = plan_poll(status, V1, {"phase": "queued", "ahead": 2, "elapsed_s": 1.0}, None)
    assert "2 grids ahead" in plan.progress.text
    plan = plan_poll(status, V1, {"phase": "ready"}, "refining")
    assert plan.status.phase == "ready" and plan.status.best == "node"
    assert plan.interval_ms is not None  # keeps polling for the refined best arc


def test_a_lost_job_is_restarted_then_reported_never_polled_for_ever():
    """Issue: a job whose result was lost left the page at "Solving... 100 %" for minutes."""
    status = solving()
    for restarts in range(MAX_RESTARTS):
        plan = plan_poll(status, V1, {"phase": "lost"}, None)
        assert plan.action == "restart" and plan.status.restarts == restarts + 1
        status = plan.status
    plan = plan_poll(status, V1, {"phase": "lost", "message": "gone"}, None)
    assert plan.action == "" and plan.status.phase == "failed"
    assert "gone" in plan.status.message and plan.interval_ms is None
    assert plan.progress.retry


def test_a_job_cancelled_behind_the_tabs_back_is_asked_for_again():
    plan = plan_poll(solving(), V1, {"phase": "cancelled"}, None)
    assert plan.action == "restart"


def test_a_grid_this_tab_cancelled_stays_cancelled_when_the_cancel_answer_was_lost():
    """A tick in flight can make the browser drop the Cancel's answer; the server's ticket
    says this tab withdrew, and the loop settles instead of solving the grid again."""
    plan = plan_poll(solving(), V1, {"phase": "cancelled", "withdrawn": True}, None)
    assert plan.action == "" and plan.status.phase == "cancelled"
    assert plan.interval_ms is None and plan.progress.retry


def test_a_stalled_or_failed_job_is_reported():
    plan = plan_poll(solving(), V1, {"phase": "running", "stalled": True}, None)
    assert plan.status.phase == "failed" and "no progress" in plan.status.message
    plan = plan_poll(solving(), V1, {"phase": "failed", "message": "grid over the cap"}, None)
    assert plan.status.phase == "failed" and plan.status.message == "grid over the cap"


def test_the_refined_best_arc_reaches_the_tab_that_asked():
    """Issue: the refined best arc never reached the tab that asked for it. The poll keeps
    going while the status shows the grid node, and moves it on when the refinement is done."""
    status = ready(best="node")
    plan = plan_poll(status, V1, None, "refining")
    assert plan.status is None and plan.interval_ms is not None
    plan = plan_poll(status, V1, None, "refined")
    assert plan.status.best == "refined" and plan.interval_ms is None
    plan = plan_poll(status, V1, None, "lost")  # its grid was dropped: solve it again
    assert plan.action == "restart" and plan.status.phase == "solving"


def test_a_refinement_that_never_ends_is_given_up_and_said():
    plan = plan_poll(ready(best="node", polls=REFINE_WAIT_POLLS - 1), V1, None, "refining")
    assert plan.status.best == "unrefined" and plan.interval_ms is None


def test_a_status_for_another_view_is_left_alone():
    plan = plan_poll(solving(view=V1), V2, {"phase": "ready"}, "refined")
    assert plan.status is None and plan.interval_ms is None


# ---------------------------------------------------------------------------------------------
# The map


def test_a_new_views_map_is_drawn_patched_or_kept():
    full = Shown("full", V1, G1, "c3_km2_s2", "0", "node")
    plan = plan_map("status", ready(V1), Shown("empty"), view=V1, metric="c3_km2_s2", arcs="0")
    assert plan.action == "full" and plan.shown.view == V1
    # the same view, already drawn: nothing (a repeated status costs nothing)
    assert plan_map("status", ready(V1), full, view=V1, metric="c3_km2_s2", arcs="0").action == (
        "nothing"
    )
    # a click (a new view on the same grid): the markers move, nothing else is resent
    plan = plan_map("status", ready(V2), full, view=V2, metric="c3_km2_s2", arcs="0")
    assert plan.action == "patch_markers"
    # the refined best arc arrives: the markers move
    plan = plan_map(
        "status", ready(V1, best="refined"), full, view=V1, metric="c3_km2_s2", arcs="0"
    )
    assert plan.action == "patch_markers" and plan.shown.best == "refined"
    # a new metric on the same grid: a patch of the values; with the best arc of each cell
    # among several slots, the whole map (each cell's arc depends on the metric)
    plan = plan_map("status", ready(V1), full, view=V1, metric="dla_deg", arcs="0")
    assert plan.action == "patch_metric"
    best_full = Shown("full", V1, G1, "c3_km2_s2", "best", "node")
    plan = plan_map("status", ready(V1, slots=5), best_full, view=V1, metric="dla_deg", arcs="best")
    assert plan.action == "full"
    # another grid: the whole map
    plan = plan_map("status", ready(V1, grid=G2), full, view=V1, metric="c3_km2_s2", arcs="0")
    assert plan.action == "full"


def test_while_solving_the_map_shows_progress_never_the_old_map():
    """Issue: after two step changes the old map stayed on screen with no progress."""
    full = Shown("full", V1, G1, "c3_km2_s2", "0", "refined")
    plan = plan_map("status", solving(V2, G2), full, view=V2, metric="c3_km2_s2", arcs="0")
    assert plan.action == "solving" and plan.shown.kind == "solving"
    shown = plan.shown
    plan = plan_map("status", solving(V2, G2), shown, view=V2, metric="c3_km2_s2", arcs="0")
    assert plan.action == "nothing"


def test_an_error_names_its_cause_once():
    status = GridStatus(V1, G1, "failed", message="No grid: disk full")
    plan = plan_map("status", status, Shown("solving", V1), view=V1, metric="c3_km2_s2", arcs="0")
    assert plan.action == "error" and plan.shown.message == "No grid: disk full"
    again = plan_map("status", status, plan.shown, view=V1, metric="c3_km2_s2", arcs="0")
    assert again.action == "nothing"


def test_a_late_status_for_an_old_view_never_overwrites_the_new_one():
    """A status or a drawing for a view the tab has left is ignored; what is shown for an old
    view is replaced as soon as the current view's status arrives."""
    full_v2 = Shown("full", V2, G1, "c3_km2_s2", "0", "node")
    assert plan_map("status", ready(V1), full_v2, view=V2, metric="c3_km2_s2", arcs="0").action == (
        "nothing"
    )
    stale = Shown("full", V1, G2, "c3_km2_s2", "0", "node")
    plan = plan_map("status", ready(V2, grid=G1), stale, view=V2, metric="c3_km2_s2", arcs="0")
    assert plan.action == "full"


def test_a_drag_previews_and_its_release_never_leaves_the_preview():
    """Issue: dragging a slider during a solve left "(preview while dragging)" for minutes."""
    full = Shown("full", V1, G1, "c3_km2_s2", "0", "node")
    plan = plan_map("drag", ready(V1), full, view=V1, metric="c3_km2_s2", arcs="0", dragging=True)
    assert plan.action == "preview"
    preview = plan.shown
    # the drag ends where the view already is: the view's own map comes back
    plan = plan_map("drag", ready(V1), preview, view=V1, metric="c3_km2_s2", arcs="0")
    assert plan.action == "full"
    # the drag ends on new dates: the view's status (solving) replaces the preview
    plan = plan_map("status", solving(V2, G2), preview, view=V2, metric="c3_km2_s2", arcs="0")
    assert plan.action == "solving"
    # a drag echo with no preview shown: nothing
    assert plan_map("drag", ready(V1), full, view=V1, metric="c3_km2_s2", arcs="0").action == (
        "nothing"
    )


def test_a_status_landing_mid_drag_keeps_the_preview():
    """A thumb held while the view's grid is solved (or its best arc refined): the status's
    answer keeps the preview rather than drawing the view the drag is leaving; once the drag
    has ended, the same status draws the view's map."""
    preview = Shown("preview", V1)
    for status in (ready(V1), ready(V1, best="refined"), solving(V1, G1)):
        plan = plan_map(
            "status", status, preview, view=V1, metric="c3_km2_s2", arcs="0", dragging=True
        )
        assert plan.action == "nothing"
    # the drag's own answer was dropped (Dash asked again for the status): draw the preview
    full = Shown("full", V1, G1, "c3_km2_s2", "0", "node")
    plan = plan_map("status", ready(V1), full, view=V1, metric="c3_km2_s2", arcs="0", dragging=True)
    assert plan.action == "preview" and plan.shown.kind == "preview"
    plan = plan_map("status", ready(V1), preview, view=V1, metric="c3_km2_s2", arcs="0")
    assert plan.action == "full"


@settings(max_examples=300, deadline=None)
@given(
    events=st.lists(
        st.tuples(
            st.sampled_from(["status", "drag"]),
            st.sampled_from([V1, V2]),
            st.sampled_from([G1, G2]),
            st.sampled_from(["solving", "ready", "failed"]),
            st.sampled_from(["node", "refined"]),
            st.sampled_from(["c3_km2_s2", "dla_deg"]),
            st.booleans(),
        ),
        min_size=1,
        max_size=12,
    )
)
def test_after_any_sequence_the_current_views_status_settles_the_map(events):
    """Whatever arrived before, in whatever order, the current view's status alone decides
    what the map ends up showing (a stale map is impossible)."""
    shown = Shown("empty")
    for trigger, view, grid, phase, best, metric, dragging in events:
        status = GridStatus(view, grid, phase, best, message="m" if phase == "failed" else "")
        plan = plan_map(
            trigger, status, shown, view=view, metric=metric, arcs="0", dragging=dragging
        )
        if plan.shown is not None and plan.action != "nothing":
            shown = plan.shown
    _, view, grid, phase, best, metric, _ = events[-1]
    final = GridStatus(view, grid, phase, best, message="m" if phase == "failed" else "")
    plan = plan_map("status", final, shown, view=view, metric=metric, arcs="0")
    if plan.action != "nothing":
        shown = plan.shown
    assert shown.view == view
    expected = {"solving": "solving", "ready": "full", "failed": "error"}[phase]
    assert shown.kind == expected
    if phase == "ready":
        assert (shown.grid, shown.metric, shown.best) == (grid, metric, best)


# ---------------------------------------------------------------------------------------------
# The selection panels


@pytest.mark.parametrize(
    "status, selected, action",
    [
        (solving(), True, "cell"),  # a clicked cell needs no grid
        (solving(), False, "waiting"),
        (ready(best="node"), False, "best"),
        (ready(best="refined"), False, "best"),
        (GridStatus(V1, G1, "failed", message="x"), False, "error"),
        (None, False, "nothing"),
        (solving(view=V2), False, "nothing"),
    ],
)
def test_selection_follows_the_status(status, selected, action):
    assert plan_selection(status, None, view=V1, selected=selected).action == action


def test_star_and_details_follow_the_same_best_arc():
    """The details are redrawn when the status moves from the grid node to the refined arc,
    exactly when the map's star moves (both read the status's ``best``)."""
    node = plan_selection(ready(best="node"), None, view=V1, selected=False)
    assert node.action == "best" and node.drawn == {"view": V1, "best": "node"}
    assert plan_selection(ready(best="node"), node.drawn, view=V1, selected=False).action == (
        "nothing"
    )
    refined = plan_selection(ready(best="refined"), node.drawn, view=V1, selected=False)
    assert refined.action == "best" and refined.drawn["best"] == "refined"
