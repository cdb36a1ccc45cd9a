"""Leaving a page while one of its answers is on its way, in a real headless Chromium.

The window map's answer to a metric change is a patch of the figure on the page. A viewer who
goes to another page of the app before that answer lands leaves no figure to patch; with
in-page navigation the answer still arrived and Dash logged "Cannot patch undefined" (seen in
the sequence page's shortlist test, where a window tab followed a shortlist link at once). The
server here adds ``map`` seconds to every map answer (``ARCWINDOW_TEST_SLOWDOWN``,
app/dashboard/slowdown.py), so the answer lands after the page is left on every run.

Codes BN01... (browser, navigation) are for grepping CI logs.
"""

from __future__ import annotations

from pathlib import Path

import pytest
from browser_support import (
    CHROMIUM,
    GRAPH,
    running_server,
    wait_views_drawn,
)

pytestmark = [
    pytest.mark.browser,
    pytest.mark.slow,
    pytest.mark.skipif(not Path(CHROMIUM).exists(), reason="Debian's chromium is not installed"),
]
playwright_api = pytest.importorskip("playwright.sync_api")

MAP_DELAY_S = 2.0


@pytest.fixture(scope="module")
def slow_map_server(tmp_path_factory):
    folder = tmp_path_factory.mktemp("page_switch")
    with running_server(folder, {"ARCWINDOW_TEST_SLOWDOWN": f"map={MAP_DELAY_S:g}"}) as url:
        yield url


def test_bn01_leaving_the_window_page_with_a_map_patch_on_its_way_logs_no_error(
    slow_map_server, tabs
):
    """Change the metric (answered by a patch, 2 s late), go to the survey page at once: the
    survey page shows, and no console error is logged when the late answer lands (the tabs
    fixture fails the test on any)."""
    tab = tabs()
    page = tab.page
    page.goto(slow_map_server + "?case=tallis_rendezvous")
    wait_views_drawn(page, timeout_ms=60_000)
    page.locator("#dropdown-metric").click()
    with page.expect_request(lambda r: "_dash-update-component" in r.url):
        page.get_by_role("option", name="arrival v∞ (km/s)").click()
    page.get_by_role("link", name="Survey results").click()
    page.wait_for_url("**/survey**")
    page.wait_for_timeout(MAP_DELAY_S * 1000 + 1500)  # the late answer lands meanwhile
    assert page.locator("#graph-window-map").count() == 0
    tab.shot("survey")


def test_bn02_the_window_page_still_patches_its_map_when_it_stays(slow_map_server, tabs):
    """The same change without leaving: the late patch is applied (the test above is not
    passing because answers are lost)."""
    tab = tabs()
    page = tab.page
    page.goto(slow_map_server + "?case=tallis_rendezvous")
    wait_views_drawn(page, timeout_ms=60_000)
    page.locator("#dropdown-metric").click()
    page.get_by_role("option", name="arrival v∞ (km/s)").click()
    page.wait_for_function(
        "() => " + GRAPH.format("graph-window-map") + ".layout.title.text.includes('arrival v∞')",
        timeout=30_000,
    )
    tab.shot("patched")
