"""The dashboard's live loop against a deliberately slowed server, in a real headless Chromium.

The server runs with ``ARCWINDOW_TEST_SLOWDOWN`` (app/dashboard/slowdown.py): every grid job
takes seconds longer and every refinement of a best arc too, so a viewer's next action always
lands while the server is still working, and each race below happens on every run instead of
by chance. Each test names the failure it reproduces; the map a view must show comes from the
engine (browser_support.expected_map), never from the page.

Codes BL01... (browser, live loop) are for grepping CI logs.
"""

from __future__ import annotations

import re
from pathlib import Path
from urllib.parse import urlparse

import pytest
from browser_support import (
    CHROMIUM,
    GRAPH,
    cell_point,
    click_cell,
    details_value,
    expected_map,
    hold_departure_thumb_moved,
    map_after_departure_drag,
    running_server,
    wait_details,
    wait_map_shows,
    wait_views_drawn,
    zoom_to,
)

pytestmark = [
    pytest.mark.browser,
    pytest.mark.slow,
    pytest.mark.skipif(not Path(CHROMIUM).exists(), reason="Debian's chromium is not installed"),
]
playwright_api = pytest.importorskip("playwright.sync_api")

GRID_DELAY_S = 2.0
REFINE_DELAY_S = 2.5
SETTLE_S = 45.0  # a view's map must be on screen within this long after the last action

# The controls the tests type into, by what they set.
CONTROL = {name: f"#input-{name}" for name in ("dstep", "astep", "revs", "c3max", "tofmin")}


@pytest.fixture(scope="module")
def slow_folder(tmp_path_factory):
    return tmp_path_factory.mktemp("slow_dashboard")


@pytest.fixture(scope="module")
def slow_server(slow_folder):
    delays = f"grid={GRID_DELAY_S:g},refine={REFINE_DELAY_S:g}"
    with running_server(slow_folder, {"ARCWINDOW_TEST_SLOWDOWN": delays}) as url:
        yield url


def set_number(page, what: str, value: str) -> None:
    page.fill(CONTROL[what], value)
    page.press(CONTROL[what], "Enter")


# ---------------------------------------------------------------------------------------------


def test_bl01_drag_during_a_solve_ends_on_the_new_map(slow_server, tabs):
    """Dragging a date slider while the previous grid is still being solved once left the map
    on "(preview while dragging)" for minutes."""
    tab = tabs()
    page = tab.page
    page.goto(slow_server + "?case=tallis_rendezvous&dstep=2")
    page.locator("#text-grid-progress").get_by_text("Solving").wait_for()
    hold_departure_thumb_moved(page)
    page.wait_for_function(
        "() => { const gd = " + GRAPH.format("graph-window-map") + ";"
        " const t = gd && gd.layout && gd.layout.title;"
        " return !!t && String(t.text || t).includes('preview'); }"
    )
    tab.shot("dragging")
    page.mouse.up()
    want = map_after_departure_drag(page, "tallis_rendezvous", {"window.departure_step_days": 2.0})
    wait_map_shows(page, want, SETTLE_S)
    tab.shot("released")


def test_bl02_two_step_changes_in_a_row_end_on_the_second(slow_server, tabs):
    """Changing both step boxes in a row once left the old map on screen, with no progress,
    while the boxes and the URL named the new steps."""
    tab = tabs()
    page = tab.page
    page.goto(slow_server + "?case=tallis_rendezvous")
    wait_views_drawn(page, timeout_ms=SETTLE_S * 1000)
    set_number(page, "dstep", "2")
    page.wait_for_function("() => window.location.search.includes('dstep=2')")
    set_number(page, "astep", "3")
    page.wait_for_function("() => window.location.search.includes('astep=3')")
    tab.shot("changed")
    want = expected_map(
        "tallis_rendezvous",
        {"window.departure_step_days": 2.0, "window.arrival_step_days": 3.0},
        "c3_km2_s2",
        0,
    )
    wait_map_shows(page, want, SETTLE_S)
    tab.shot("settled")


def test_bl03_a_large_grid_is_drawn_once_solved(slow_server, tabs):
    """A fresh load of a large grid once stayed at "Solving... 100 %" for minutes while the page
    polled every 300 ms (each poll restarted the drawing of the map the last one had begun)."""
    tab = tabs()
    page = tab.page
    page.goto(slow_server + "?case=tallis_rendezvous&dstep=0.25&astep=0.5")
    page.wait_for_function(
        "() => { const gd = " + GRAPH.format("graph-window-map") + ";"
        " return gd && gd.data && gd.data[0] && gd.data[0].type === 'heatmap'"
        " && gd.data[0].customdata; }",
        timeout=90_000,
    )
    tab.shot("drawn")
    width = page.evaluate("() => " + GRAPH.format("graph-window-map") + "._fullData[0].x.length")
    assert width == 600  # 1093 departures drawn at 600 columns


def test_bl04_revolutions_then_high_branch_show_that_branch(slow_server, tabs):
    """Setting maximum revolutions to 2 once froze the progress at 100 %; choosing "N = 2, high
    branch" then left the N = 0 map and best-arc star on screen while the details said there
    was no arc. In the default case's window no two-revolution arc exists (two laps about the
    Sun take years): the map must be empty and say so. Between two satellites they exist: the
    map, the star and the details must all be the high branch's."""
    tab = tabs()
    page = tab.page
    page.goto(slow_server + "?case=tallis_rendezvous")
    wait_views_drawn(page, timeout_ms=SETTLE_S * 1000)
    set_number(page, "revs", "2")
    page.locator("#dropdown-arc-slot").click()
    page.get_by_role("option", name="N = 2, high branch").click()
    page.wait_for_function("() => window.location.search.includes('arcs=2H')")
    want = expected_map("tallis_rendezvous", {"transfer.max_revolutions": 2}, "c3_km2_s2", 4)
    assert not want["cells"]  # the engine finds no such arc here
    wait_map_shows(page, want, SETTLE_S)
    page.locator("#div-details-arc").get_by_text("No N = 2, high branch arc").wait_for()
    assert _star(page) is None
    tab.shot("no_such_arc")

    page.goto(slow_server + "?case=kestrel_relay_leo")
    wait_views_drawn(page, timeout_ms=SETTLE_S * 1000)
    set_number(page, "revs", "2")
    page.locator("#dropdown-arc-slot").click()
    page.get_by_role("option", name="N = 2, high branch").click()
    page.wait_for_function("() => window.location.search.includes('arcs=2H')")
    want = expected_map("kestrel_relay_leo", {"transfer.max_revolutions": 2}, "dv_total_km_s", 4)
    assert want["cells"]
    wait_map_shows(page, want, SETTLE_S)
    page.locator("#div-details-arc").get_by_text("N = 2, high").first.wait_for()
    note = page.locator("#div-details-arc .aw-details-note")
    note.get_by_text("refined off the grid").wait_for(timeout=SETTLE_S * 1000)
    assert _star(page) is not None, "no best-arc star on the N = 2 high-branch map"
    wait_star_at_details(page)
    tab.shot("high_branch")


_STAR_AT_DETAILS_JS = """
() => {
  const gd = document.querySelector('#graph-window-map .js-plotly-plot');
  const star = (gd.layout.annotations || []).find(a => a.text === '★');
  const cell = (label) => {
    const row = Array.from(document.querySelectorAll('#div-details-arc tr'))
      .find(r => r.querySelector('th') && r.querySelector('th').innerText === label);
    return row ? Date.parse(row.querySelector('td').innerText.replace(' ', 'T') + 'Z') : NaN;
  };
  return !!star && Math.abs(star.x - cell('departure')) < 60000
    && Math.abs(star.y - cell('arrival')) < 60000;
}
"""


def wait_star_at_details(page) -> None:
    """The map's star and the details panel show the same best arc (the two are redrawn by
    two callbacks from one status, so they agree once both answers have arrived)."""
    page.wait_for_function(_STAR_AT_DETAILS_JS, timeout=10_000)


def _star(page):
    return page.evaluate(
        "() => { const a = " + GRAPH.format("graph-window-map") + ".layout.annotations"
        " .find(a => a.text === '★'); return a ? [a.x, a.y] : null; }"
    )


def test_bl05_refined_best_arc_reaches_the_tab_that_asked_and_a_second_tab(slow_server, tabs):
    """The best arc refined off the grid once never reached the tab that asked for it, while a
    tab opened later showed it: two teammates on one link saw different best arcs."""
    first = tabs("a")
    page = first.page
    page.goto(slow_server + "?case=vesper_venus_orbiter&metric=vinf_arrival_km_s")
    wait_views_drawn(page, timeout_ms=SETTLE_S * 1000)
    note = page.locator("#div-details-arc .aw-details-note")
    note.get_by_text("refined off the grid").wait_for(timeout=SETTLE_S * 1000)
    dates = (details_value(page, "departure"), details_value(page, "arrival"))
    first.shot("refined")
    second = tabs("b")
    second.page.goto(page.url)
    wait_views_drawn(second.page, timeout_ms=SETTLE_S * 1000)
    wait_details(second.page, *dates, timeout_ms=SETTLE_S * 1000)
    second.page.locator("#div-details-arc .aw-details-note").get_by_text(
        "refined off the grid"
    ).wait_for()
    for p in (page, second.page):
        wait_star_at_details(p)
        assert (details_value(p, "departure"), details_value(p, "arrival")) == dates
    second.shot("same_best_arc")


def test_bl06_a_refused_value_does_not_block_the_next_change(slow_server, tabs):
    """A refused value (C3 limit -5) once stayed in its box and every later change was refused
    with the same message, so a later mistake (TOF min 500 > TOF max 450) was never reported."""
    tab = tabs()
    page = tab.page
    page.goto(slow_server + "?case=tallis_rendezvous")
    wait_views_drawn(page, timeout_ms=SETTLE_S * 1000)
    set_number(page, "c3max", "-5")
    c3_field = page.locator("[data-setting='limits.c3_max_km2_s2']")
    c3_field.get_by_text("0 to 10000").wait_for()
    assert page.locator(CONTROL["c3max"]).get_attribute("aria-invalid") == "true"
    set_number(page, "tofmin", "500")
    page.locator("[data-setting='limits.tof_min_days']").get_by_text("tof_m").first.wait_for()
    c3_field.get_by_text("0 to 10000").wait_for()  # the first mistake is still reported
    tab.shot("two_mistakes")
    set_number(page, "dstep", "2")
    page.wait_for_function("() => window.location.search.includes('dstep=2')")
    want = expected_map("tallis_rendezvous", {"window.departure_step_days": 2.0}, "c3_km2_s2", 0)
    wait_map_shows(page, want, SETTLE_S)
    tab.shot("still_accepting")


def test_bl07_hover_shows_the_cells_own_minute(slow_server, tabs):
    """The map's hover once showed the departure one minute early, on the previous day
    (2036-03-10 read "2036-03-09 23:59")."""
    tab = tabs()
    page = tab.page
    page.goto(slow_server + "?case=tallis_rendezvous")
    wait_views_drawn(page, timeout_ms=SETTLE_S * 1000)
    zoom_to(page, "2036-03-10", "2036-09-01", half_days=3.0)
    x, y = cell_point(page, "2036-03-10", "2036-09-01")
    page.mouse.move(x, y)
    label = page.locator("#graph-window-map .hoverlayer .hovertext").first
    label.wait_for()
    text = " ".join(label.text_content().split())
    tab.shot("hover")
    assert "2036-03-10 00:00" in text, text
    assert "2036-09-01 00:00" in text, text


def test_bl08_an_oversized_upload_is_refused_with_a_message(slow_server, tabs, tmp_path):
    """An upload over 1 MiB once did nothing at all."""
    tab = tabs()
    page = tab.page
    page.goto(slow_server + "?case=tallis_rendezvous")
    wait_views_drawn(page, timeout_ms=SETTLE_S * 1000)
    big = tmp_path / "huge_case.toml"
    big.write_text("# padding\n" * 150_000)  # 1.5 MB
    page.set_input_files("#upload-case-file input[type=file]", str(big))
    message = page.locator("#div-message-upload")
    message.get_by_text("huge_case.toml").wait_for(timeout=15_000)
    assert re.search(r"KiB|MiB", message.inner_text()), message.inner_text()
    tab.shot("refused")


def test_bl09_back_from_a_survey_target_returns_to_the_survey(slow_server, slow_folder, tabs):
    """Back from a survey target once never returned to the survey."""
    from small_survey import write_small_survey

    from solver.survey.results import load_results

    surveys = slow_folder / "surveys"
    surveys.mkdir(exist_ok=True)
    write_small_survey(surveys / "bl09.parquet", targets=3)
    best = load_results(surveys / "bl09.parquet").iloc[0]
    tab = tabs()
    page = tab.page
    page.goto(slow_server + "survey/?results=bl09")
    link = page.locator(f"tr[data-target='{best['target']}'] a:text('open')")
    link.wait_for()
    link.click()
    page.locator("#text-case-title").get_by_text(str(best["target"])).wait_for()
    wait_views_drawn(page, timeout_ms=SETTLE_S * 1000)
    tab.shot("target")
    page.go_back()
    page.locator(f"tr[data-target='{best['target']}']").wait_for(timeout=15_000)
    assert urlparse(page.url).path.rstrip("/") == "/survey"
    tab.shot("back")


def test_bl10_no_control_sends_anything_off_the_machine(slow_server, tabs):
    """Each plot's toolbar once offered to send the chart to an outside cloud service."""
    tab = tabs()
    page = tab.page
    outside: list[str] = []
    page.on(
        "request",
        lambda r: (
            outside.append(r.url)
            if urlparse(r.url).hostname not in ("127.0.0.1", "localhost", None)
            and not r.url.startswith(("data:", "blob:"))
            else None
        ),
    )
    page.goto(slow_server + "?case=tallis_rendezvous")
    wait_views_drawn(page, timeout_ms=SETTLE_S * 1000)
    for graph in ("graph-window-map", "graph-arc-view", "graph-family-chart"):
        page.hover(f"#{graph} .js-plotly-plot")
        titles = page.evaluate(
            "(id) => Array.from(document.querySelectorAll('#' + id + ' .modebar-btn'))"
            ".map(b => b.getAttribute('data-title') || '')",
            graph,
        )
        assert titles, f"{graph} shows no toolbar"
        assert not [t for t in titles if re.search(r"cloud|share|chart studio", t, re.I)], titles
        config = page.evaluate(
            "(id) => { const gd = document.querySelector('#' + id + ' .js-plotly-plot');"
            " return [gd._context.showSendToCloud, gd._context.showEditInChartStudio,"
            " gd._context.plotlyServerURL]; }",
            graph,
        )
        assert config[0] is False and not config[1] and not config[2], config
    tab.shot("toolbar")
    assert not outside, outside


def test_bl11_a_cell_with_no_arc_says_why(slow_server, tabs):
    """Clicking a cell with no arc once did nothing and said nothing."""
    tab = tabs()
    page = tab.page
    page.goto(slow_server + "?case=tallis_rendezvous")
    wait_views_drawn(page, timeout_ms=SETTLE_S * 1000)
    click_cell(page, "2036-06-20", "2036-03-01")  # arrival before departure: no arc
    page.wait_for_function("() => window.location.search.includes('sel=2036-06-20')")
    details = page.locator("#div-details-arc")
    details.get_by_text("no arc", exact=False).first.wait_for()
    assert "arrival" in details.inner_text().lower() and "departure" in details.inner_text()
    tab.shot("no_arc")


def test_bl12_no_arc_within_limits_names_the_blocking_limit(slow_server, tabs):
    """The small-body sample once opened with no arc within limits and no hint which limit
    blocks it."""
    tab = tabs()
    page = tab.page
    page.goto(slow_server + "?case=survey_base")
    page.locator("#div-details-arc").get_by_text("No arc within").wait_for(timeout=SETTLE_S * 1000)
    text = page.locator("#div-details-arc").inner_text()
    assert re.search(r"C3 [\d.]+ > 30|arrival v∞ [\d.]+ > ", text), text
    tab.shot("blocked")


def test_bl13_pages_are_readable_at_team_screen_sizes(slow_server, tabs):
    """At 1280 x 800 and 1024 x 768 the map sits above the fold, the shortlist form shows
    without scrolling inside a card, the copy-link button takes the keyboard focus, slider
    handles are named for what they move and every input has a label."""
    for width, height in ((1280, 800), (1024, 768)):
        tab = tabs(f"_{width}", viewport={"width": width, "height": height})
        page = tab.page
        page.goto(slow_server + "?case=tallis_rendezvous")
        wait_views_drawn(page, timeout_ms=SETTLE_S * 1000)
        tab.shot("page", full_page=False)
        tab.shot("full")
        top = page.locator("#graph-window-map").bounding_box()["y"]
        assert top < height * 0.5, f"map starts at {top} px of {height}"
        for card in (".aw-card-details", ".aw-card-map", ".aw-controls"):
            overflow = page.evaluate(
                "(s) => { const e = document.querySelector(s);"
                " return e.scrollHeight - e.clientHeight; }",
                card,
            )
            assert overflow <= 1, f"{card} scrolls inside itself by {overflow} px"
        assert page.locator("#button-shortlist-add").is_visible()
        page.focus("#button-copy-link")
        assert page.evaluate("() => document.activeElement.id === 'button-copy-link'")
        names = page.evaluate(
            "() => Array.from(document.querySelectorAll('[role=slider]'))"
            ".map(e => e.getAttribute('aria-label') || '')"
        )
        assert len(names) == 4 and all(n for n in names), names
        unlabeled = page.evaluate(
            """() => Array.from(document.querySelectorAll('input, textarea, select'))
              .filter(e => e.type !== 'hidden' && e.type !== 'file' && e.offsetParent !== null)
              .filter(e => e.getAttribute('aria-hidden') !== 'true')
              .filter(e => !(e.labels && e.labels.length) && !e.getAttribute('aria-label')
                           && !e.getAttribute('aria-labelledby'))
              .map(e => e.id || e.outerHTML.slice(0, 80))"""
        )
        assert not unlabeled, unlabeled
