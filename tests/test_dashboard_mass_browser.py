"""Kilograms and launch minutes on the dashboard, in a real headless Chromium against `arcwindow
serve` on a free localhost port: the window map switched to delivered mass, a click on a cell,
and the details showing that cell's mass budget and its day's launch window; the launch vehicle
picker and the minimum delivered mass as a user sets them; the page at the team's screen sizes.

Each test waits for conditions on the page (never sleep-then-check), saves screenshots of its
steps to test-artifacts/browser/ and ends by asserting the browser console logged no errors.
The numbers the page must show come from the engine (solver.window.arc_launch and the grid of
browser_support.expected_map), so a map of another metric or a panel of another cell or vehicle
fails. Codes BM01... (browser, mass) are for grepping CI logs.
"""

from __future__ import annotations

from pathlib import Path

import pytest
from browser_support import (
    CHROMIUM,
    GRAPH,
    ROOT,
    cell_point,
    click_cell,
    details_value,
    expected_map,
    running_server,
    wait_details,
    wait_map_shows,
    wait_views_drawn,
)

pytestmark = [
    pytest.mark.browser,
    pytest.mark.skipif(not Path(CHROMIUM).exists(), reason="Debian's chromium is not installed"),
]
playwright_api = pytest.importorskip("playwright.sync_api")

CASE = "vesper_venus_orbiter"
CELL = ("2031-06-01", "2031-11-01")  # a cell of the Vesper case within its limits
SETTLE_S = 90.0


@pytest.fixture(scope="module")
def server(tmp_path_factory):
    with running_server(tmp_path_factory.mktemp("dashboard_mass")) as url:
        yield url


def engine_reports(changes: dict | None = None):
    """The engine's mass budget and launch window of the test cell (``as_dict()``)."""
    from solver.ephemeris.timescales import utc_to_jd_tdb
    from solver.window.arc_launch import arc_launch_window, mass_budget
    from solver.window.case import load_case
    from solver.window.cell import select_arc, solve_cell

    case = load_case(ROOT / "sample_cases" / f"{CASE}.toml")
    if changes:
        case = case.with_changes(**changes)
    dep, arr = (float(utc_to_jd_tdb(d)) for d in CELL)
    arc = select_arc(solve_cell(case, dep, arr), 0, "single")
    return mass_budget(case, arc).as_dict(), arc_launch_window(case, arc).as_dict()


def pick(page, dropdown: str, option: str) -> None:
    page.locator(f"#{dropdown}").click()
    page.get_by_role("option", name=option, exact=True).click()


def details_text(page) -> str:
    return page.locator("#div-details-arc").inner_text()


def wait_details_include(page, text: str) -> None:
    page.wait_for_function(
        "(s) => document.querySelector('#div-details-arc').innerText.includes(s)", arg=text
    )


def limit_line(page) -> dict:
    """The map's limit line: whether it is shown, its legend name and its level."""
    return page.evaluate(
        "() => { const gd = " + GRAPH.format("graph-window-map") + ";"
        " const t = gd._fullData.find(d => d.type === 'contour' && d.index === 10);"
        " return {visible: t.visible === true, name: t.name,"
        " level: t.contours ? t.contours.start : null}; }"
    )


def no_sideways_scroll(page) -> bool:
    return page.evaluate(
        "() => document.documentElement.scrollWidth <= window.innerWidth"
        " && document.querySelector('.aw-card-details').scrollWidth"
        "    <= document.querySelector('.aw-card-details').clientWidth"
    )


# ---------------------------------------------------------------------------------------------


def test_bm01_delivered_mass_map_then_a_cell_shows_its_mass_budget_and_launch_window(server, tabs):
    """Switch the map to delivered mass, click a cell, and the details show its mass budget and
    launch window."""
    tab = tabs()
    page = tab.page
    page.goto(server + f"?case={CASE}")
    wait_views_drawn(page)
    pick(page, "dropdown-metric", "delivered mass (kg)")
    page.wait_for_function("() => window.location.search.includes('metric=delivered_mass_kg')")
    wait_map_shows(page, expected_map(CASE, {}, "delivered_mass_kg", 0), SETTLE_S)
    colour_bar = page.evaluate(
        "() => " + GRAPH.format("graph-window-map") + "._fullData[0].colorbar.title.text"
    )
    assert colour_bar == "delivered mass (kg)"
    tab.shot("delivered_mass_map")

    click_cell(page, *CELL)
    wait_details(page, f"{CELL[0]} 00:00:00", f"{CELL[1]} 00:00:00")
    budget, report = engine_reports()
    wait_details_include(page, "Mass budget")
    assert details_value(page, "launch vehicle") == budget["vehicle"] == "Corvid 2"
    for label, key in (
        ("injected mass", "injected_mass_kg"),
        ("delivered mass", "delivered_mass_kg"),
        ("margin", "mass_margin_kg"),
    ):
        assert details_value(page, label) == f"{budget[key]:,.1f}", label
    row = page.locator("#div-details-arc tr", has=page.locator("th:text-is('delivered mass')"))
    assert row.first.locator("td.aw-unit").inner_text() == "kg"
    window = report["window"]
    assert window["openings"], "the test cell's day has a launch window"
    text = details_text(page)
    assert f"Launch window {CELL[0]} (UTC)" in text
    assert f"Opening 1 of {len(window['openings'])}" in text
    assert details_value(page, "opens") == window["openings"][0]["open_utc"][11:19]
    assert details_value(page, "closes") == window["openings"][0]["close_utc"][11:19]
    assert details_value(page, "open in all") == f"{window['total_minutes']:,.1f}"
    # What the model leaves out is one click away.
    page.get_by_text("What this launch window leaves out").click()
    page.get_by_text("range safety, lighting, weather").wait_for()
    assert no_sideways_scroll(page)
    tab.shot("cell_mass_budget")

    # The cell's hover carries its kilograms with their unit.
    page.locator("#graph-window-map").scroll_into_view_if_needed()
    page.mouse.move(*cell_point(page, *CELL))
    label = page.locator("#graph-window-map .hoverlayer .hovertext").first
    label.get_by_text(f"{CELL[0]} 00:00").wait_for()  # this cell's label, not one passed over
    text = " ".join(label.text_content().split())
    assert f"delivered mass {budget['delivered_mass_kg']:,.0f} kg" in text, text
    assert f"injected mass {budget['injected_mass_kg']:,.0f} kg" in text, text
    tab.shot("hover", full_page=False)


def test_bm02_vehicle_picker_and_minimum_mass_change_the_map_and_the_budget(server, tabs):
    """Picking another launch vehicle changes the map and the budget to that vehicle's; a
    minimum delivered mass draws its line on the map and travels in the link."""
    tab = tabs()
    page = tab.page
    sel = f"{CELL[0]}T00:00:00Z~{CELL[1]}T00:00:00Z"
    page.goto(server + f"?case={CASE}&metric=delivered_mass_kg&arcs=0&sel={sel}")
    wait_views_drawn(page)
    wait_details_include(page, "Mass budget")
    assert not limit_line(page)["visible"]  # the case sets no minimum mass
    pick(page, "dropdown-vehicle", "Heron M")
    page.wait_for_function("() => window.location.search.includes('vehicle=Heron%20M')")
    changes = {"spacecraft.vehicle": "Heron M"}
    wait_map_shows(page, expected_map(CASE, changes, "delivered_mass_kg", 0), SETTLE_S)
    budget, _ = engine_reports(changes)
    page.wait_for_function(
        "(v) => document.querySelector('#div-details-arc').innerText.includes(v)",
        arg=f"{budget['delivered_mass_kg']:,.1f}",
    )
    assert details_value(page, "launch vehicle") == "Heron M"
    bold = page.locator("#div-details-arc .aw-compare-table tr.aw-current th").inner_text()
    assert bold == "Heron M"
    tab.shot("heron")

    page.fill("#input-massmin", "800")
    page.press("#input-massmin", "Enter")
    page.wait_for_function("() => window.location.search.includes('massmin=800')")
    page.wait_for_function(
        "() => { const gd = " + GRAPH.format("graph-window-map") + ";"
        " const t = gd._fullData.find(d => d.index === 10);"
        " return t && t.visible === true && t.contours.start === 800; }",
        timeout=SETTLE_S * 1000,
    )
    assert limit_line(page)["name"] == "delivered mass min 800 kg"
    page.locator("#graph-window-map .legend").get_by_text("delivered mass min 800 kg").wait_for()
    tab.shot("minimum_mass")


@pytest.mark.parametrize("width, height", [(1600, 1000), (1280, 800), (1024, 768)])
def test_bm03_the_budget_and_window_read_at_team_screen_sizes(server, tabs, width, height):
    """The details panel with a mass budget, the vehicles compared and a three-opening launch
    window fits its column: no sideways scroll, no cell wider than its table."""
    tab = tabs(f"_{width}", viewport={"width": width, "height": height})
    page = tab.page
    sel = "2034-06-23T00:00:00Z~2037-06-20T00:00:00Z"
    page.goto(server + f"?case=orrery_jupiter_flyby&metric=delivered_mass_kg&arcs=0&sel={sel}")
    wait_views_drawn(page)
    wait_details_include(page, "Opening 3 of 3")
    assert no_sideways_scroll(page)
    overflowing = page.evaluate(
        """() => Array.from(document.querySelectorAll('#div-details-arc table'))
          .filter(t => t.scrollWidth > t.parentElement.clientWidth + 1).length"""
    )
    assert overflowing == 0
    assert page.locator("#dropdown-vehicle").is_visible()
    page.locator("#div-details-arc").get_by_text("Launch vehicles").scroll_into_view_if_needed()
    tab.shot("details", full_page=False)
    tab.shot("full")
