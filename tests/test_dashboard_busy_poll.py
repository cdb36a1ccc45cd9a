"""The window page's grid poll against a server whose every poll answer is slower than the
poll interval, in a real headless Chromium.

The server runs with ``ARCWINDOW_TEST_SLOWDOWN`` ``poll`` seconds (app/dashboard/slowdown.py)
longer than the page's quickest poll interval (300 ms), as a busy machine answers. Dash drops
the answer of a request still in flight when the same callback is asked again, so a page that
ticks on a fixed interval never hears any poll answer on such a server: the status never moved
on, the progress strip stayed on "Solving…" and the best arc was never refined (the failures
seen under load). With one poll in flight at a time every answer lands, on every run.

Codes BP01... (browser, busy poll) are for grepping CI logs.
"""

from __future__ import annotations

import json
from pathlib import Path

import pytest
from browser_support import (
    CHROMIUM,
    expected_map,
    running_server,
    wait_map_shows,
    wait_views_drawn,
)

pytestmark = [
    pytest.mark.browser,
    pytest.mark.slow,
    pytest.mark.skipif(not Path(CHROMIUM).exists(), reason="Debian's chromium is not installed"),
]
playwright_api = pytest.importorskip("playwright.sync_api")

POLL_DELAY_S = 0.8  # more than twice the quickest poll interval (300 ms)
REFINE_DELAY_S = 1.0  # the best arc is still being refined when the first polls are sent
SETTLE_S = 45.0


@pytest.fixture(scope="module")
def busy_server(tmp_path_factory):
    folder = tmp_path_factory.mktemp("busy_poll")
    delays = f"poll={POLL_DELAY_S:g},refine={REFINE_DELAY_S:g}"
    with running_server(folder, {"ARCWINDOW_TEST_SLOWDOWN": delays}) as url:
        yield url


def _is_poll(request) -> bool:
    """A request of the grid poll (a tick of its interval), not of the view callback."""
    if "_dash-update-component" not in request.url:
        return False
    try:
        body = json.loads(request.post_data or "{}")
    except ValueError:
        return False
    return body.get("changedPropIds") == ["interval-grid-poll.n_intervals"]


def _refined(page) -> None:
    note = page.locator("#div-details-arc .aw-details-note")
    note.get_by_text("refined off the grid").wait_for(timeout=SETTLE_S * 1000)
    page.wait_for_function(
        "() => getComputedStyle(document.querySelector('#div-grid-progress')).display === 'none'",
        timeout=SETTLE_S * 1000,
    )


def test_bp01_slow_poll_answers_still_move_the_view_on(busy_server, tabs):
    """Every poll answer slower than the poll interval: the refined best arc must still
    arrive and the progress strip go away."""
    tab = tabs()
    page = tab.page
    page.goto(busy_server + "?case=tallis_rendezvous")
    wait_views_drawn(page, timeout_ms=SETTLE_S * 1000)
    _refined(page)
    tab.shot("refined")


def test_bp02_a_change_while_a_slow_poll_is_on_its_way_ends_on_the_new_view(busy_server, tabs):
    """A poll for the old view answers after the new view was set (it was sent before): it
    must neither stop the new view's polling nor overwrite its progress. The view is changed
    the moment a poll request leaves the page, so the old answer lands late on every run."""
    tab = tabs()
    page = tab.page
    # A view of its own, so never settled on arrival: its first poll always leaves the page.
    with page.expect_request(_is_poll, timeout=SETTLE_S * 1000):
        page.goto(busy_server + "?case=tallis_rendezvous&astep=2")
    page.fill("#input-dstep", "2")
    page.press("#input-dstep", "Enter")
    page.wait_for_function("() => window.location.search.includes('dstep=2')")
    want = expected_map(
        "tallis_rendezvous",
        {"window.departure_step_days": 2.0, "window.arrival_step_days": 2.0},
        "c3_km2_s2",
        0,
    )
    wait_map_shows(page, want, SETTLE_S)
    _refined(page)
    tab.shot("new_view")


_ACCEPT = """
([answer, current]) => {
  const keys = ["panel", "text"];
  const out = window.arcwindow.acceptGridAnswer(answer, current, 7, keys);
  const none = window.dash_clientside.no_update;
  return out.map(v => v === none ? "no_update" : v);
}
"""


def test_bp03_the_page_applies_an_answer_only_for_the_view_it_shows(busy_server, tabs):
    """The page's gate (assets/arcwindow.js acceptGridAnswer) on the two interleavings: an answer
    for a view the tab has left changes nothing (it once disabled the new view's poll); an
    answer for the shown view moves the status on and arms exactly one more tick."""
    tab = tabs()
    page = tab.page
    page.goto(busy_server + "?case=tallis_rendezvous")
    page.wait_for_function("() => window.arcwindow && window.dash_clientside")
    current = {"view": "?case=b", "grid": "g2", "phase": "solving"}
    old = {
        "view": "?case=a",
        "status": {"view": "?case=a", "grid": "g1", "phase": "ready", "best": "refined"},
        "poll_ms": None,
        "progress": {"panel": {"display": "none"}, "text": ""},
    }
    assert page.evaluate(_ACCEPT, [old, current]) == ["no_update"] * 6
    moved = {"view": "?case=b", "grid": "g2", "phase": "ready", "best": "node"}
    mine = {
        "view": "?case=b",
        "status": moved,
        "poll_ms": 600,
        "progress": {"panel": {"display": "none"}, "text": ""},
    }
    assert page.evaluate(_ACCEPT, [mine, current]) == [
        moved,
        False,
        600,
        8,
        {"display": "none"},
        "",
    ]
    settled = dict(mine, status=None, poll_ms=None)
    assert page.evaluate(_ACCEPT, [settled, current])[:4] == ["no_update", True, "no_update", 8]


_WATCHDOG = """
([ticks, maxTicks, disabled, stalledMs]) => {
  window.arcwindow.pollWatch = { ticks: 5, since: Date.now() - stalledMs };
  const out = window.arcwindow.pollWatchdog(1, ticks, maxTicks, disabled);
  return out === window.dash_clientside.no_update ? "no_update" : out;
}
"""


def test_bp04_a_poll_whose_answer_never_comes_gets_another_tick(busy_server, tabs):
    """One tick per answer leaves the poll waiting for ever if an answer is lost (a failed or
    dropped request). The watchdog (assets/arcwindow.js pollWatchdog) arms one more tick after
    20 s with no answer, and never while a tick is armed, the poll is off or ticks move on."""
    tab = tabs()
    page = tab.page
    page.goto(busy_server + "?case=tallis_rendezvous")
    page.wait_for_function("() => window.arcwindow && window.dash_clientside")
    assert page.evaluate(_WATCHDOG, [5, 5, False, 21_000]) == 6  # stalled: one more tick
    assert page.evaluate(_WATCHDOG, [5, 5, False, 5_000]) == "no_update"  # not yet
    assert page.evaluate(_WATCHDOG, [5, 6, False, 21_000]) == "no_update"  # a tick is armed
    assert page.evaluate(_WATCHDOG, [5, 5, True, 21_000]) == "no_update"  # polling is off
    assert page.evaluate(_WATCHDOG, [7, 7, False, 21_000]) == "no_update"  # ticks moved on
