"""A grid status that lands while a date slider is held, in a real headless Chromium.

The grid status of a view moves on when its grid is solved and again when its best arc is
refined, and each move asks the map callback again. A viewer who held a date slider's thumb at
that moment lost the preview of the dragged dates: the status's answer drew the old view's map
(and when a drag's answer was still on its way, Dash dropped it for the status's). The preview
came back only when the mouse moved again; seen once under load as a failure of BL01 ("drag
during a solve ends on the new map"). The server here adds ``grid`` seconds to every grid job
and ``map`` seconds to every map answer (``ARCWINDOW_TEST_SLOWDOWN``,
app/dashboard/slowdown.py), so the drag is held across the status's move on every run.

Codes BD01... (browser, drag) are for grepping CI logs.
"""

from __future__ import annotations

from pathlib import Path

import pytest
from browser_support import (
    CHROMIUM,
    figure_title,
    hold_departure_thumb_moved,
    map_after_departure_drag,
    running_server,
    wait_map_shows,
)

pytestmark = [
    pytest.mark.browser,
    pytest.mark.slow,
    pytest.mark.skipif(not Path(CHROMIUM).exists(), reason="Debian's chromium is not installed"),
]
playwright_api = pytest.importorskip("playwright.sync_api")

GRID_DELAY_S = 6.0  # long enough to start a drag while the grid is being solved
MAP_DELAY_S = 0.6  # the map's answers land late, as on a busy server
SETTLE_S = 60.0


@pytest.fixture(scope="module")
def slow_server(tmp_path_factory):
    folder = tmp_path_factory.mktemp("drag_race")
    delays = f"grid={GRID_DELAY_S:g},map={MAP_DELAY_S:g}"
    with running_server(folder, {"ARCWINDOW_TEST_SLOWDOWN": delays}) as url:
        yield url


def test_bd01_a_status_landing_mid_drag_keeps_the_preview(slow_server, tabs):
    """Hold a departure thumb while the old view's grid is solved: the map keeps the dragged
    dates' preview (it drew the old view's map before); on release it ends on the new view's
    map."""
    tab = tabs()
    page = tab.page
    page.goto(slow_server + "?case=tallis_rendezvous&dstep=2")
    page.locator("#text-grid-progress").get_by_text("Solving").wait_for()
    hold_departure_thumb_moved(page)
    # Held still while the old view's grid is solved: its status moves from solving to ready
    # (and on to the refined best arc), and the map callback is asked again for each.
    page.wait_for_function(
        "() => { const e = document.querySelector('#text-grid-progress');"
        " return !!e && !e.innerText.includes('Solving'); }",
        timeout=(GRID_DELAY_S + SETTLE_S) * 1000,
    )
    # What is checked is an absence (the preview not replaced), so no condition can be waited
    # for: give the map answers behind the status three of their delays to land.
    page.wait_for_timeout(3 * MAP_DELAY_S * 1000)
    tab.shot("held")
    title = figure_title(page, "graph-window-map")
    assert "preview" in title, f"the map left the preview while the thumb was held: {title!r}"
    page.mouse.up()
    want = map_after_departure_drag(page, "tallis_rendezvous", {"window.departure_step_days": 2.0})
    wait_map_shows(page, want, SETTLE_S)
    tab.shot("released")
