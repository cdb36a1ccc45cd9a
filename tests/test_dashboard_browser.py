"""The dashboard in a real headless Chromium against `arcwindow serve` on a free localhost port.

Each test waits for conditions on the page (never sleep-then-check), saves screenshots of its
steps to test-artifacts/browser/ and ends by asserting the browser console logged no errors.
Test names carry short codes (BW01...) to grep for in CI logs.

The expected numbers come from the engine itself (solver.window.solve_cell and
solver.mechanics.families.geometry) at the clicked cell's dates, so a click that landed on another
cell or a view that drew another arc would fail.
"""

from __future__ import annotations

import time
from pathlib import Path

import pytest
from browser_support import (
    CHROMIUM,
    GRAPH,
    ROOT,
    click_cell,
    details_value,
    expected_cell,
    figure_title,
    running_server,
    wait_details,
    wait_views_drawn,
)

pytestmark = [
    pytest.mark.browser,
    pytest.mark.skipif(not Path(CHROMIUM).exists(), reason="Debian's chromium is not installed"),
]
playwright_api = pytest.importorskip("playwright.sync_api")


@pytest.fixture(scope="module")
def server_folder(tmp_path_factory):
    """The server's own cache, data and survey folders live here."""
    return tmp_path_factory.mktemp("dashboard")


@pytest.fixture(scope="module")
def server(server_folder):
    """`arcwindow serve` in a subprocess with its own cache and data folders."""
    with running_server(server_folder) as url:
        yield url


# ---------------------------------------------------------------------------------------------
# Tests

CELL = ("2036-03-01", "2036-09-01")  # a cell of the default case within its limits


def test_bw01_page_loads_default_case_with_three_views(server, tabs):
    tab = tabs()
    tab.page.goto(server)
    wait_views_drawn(tab.page)
    assert "case=tallis_rendezvous" in tab.page.url
    assert "Tallis rendezvous" in tab.page.locator("#text-case-title").inner_text()
    assert "Caution" in tab.page.locator("#div-caution-banner").inner_text()
    assert "C3" in tab.page.locator("#div-details-arc").inner_text()
    tab.shot("loaded")


def test_bw02_click_updates_arc_view_family_chart_and_details(server, tabs):
    tab = tabs()
    page = tab.page
    page.goto(server)
    wait_views_drawn(page)
    click_cell(page, *CELL)
    wait_details(page, f"{CELL[0]} 00:00:00", f"{CELL[1]} 00:00:00")
    arc, lam = expected_cell(*CELL)
    page.wait_for_function(
        "(s) => { const gd = document.querySelector('#graph-family-chart .js-plotly-plot');"
        " return gd.layout.title.text.includes(s); }",
        arg=f"λ = {lam:+.3f}",
    )
    page.wait_for_function(
        "(s) => document.querySelector('#graph-arc-view .js-plotly-plot')"
        ".layout.title.text.includes(s)",
        arg=f"{arc.tof_days:.1f} days",
    )
    assert details_value(page, "C3") == f"{arc.metrics['c3_km2_s2']:,.3f}"
    assert arc.within
    assert f"sel={CELL[0]}T00:00:00Z~{CELL[1]}T00:00:00Z" in page.url
    tab.shot("clicked")


def test_bw03_dragging_a_slider_changes_the_grid_dates(server, tabs):
    tab = tabs()
    page = tab.page
    page.goto(server)
    wait_views_drawn(page)
    start_before = page.evaluate(
        "() => " + GRAPH.format("graph-window-map") + ".layout.xaxis.range[0]"
    )
    thumb = page.locator("#slider-departure-range .dash-slider-thumb-1")
    box = thumb.bounding_box()
    x, y = box["x"] + box["width"] / 2, box["y"] + box["height"] / 2
    page.mouse.move(x, y)
    page.mouse.down()
    page.mouse.move(x + 20, y, steps=4)
    page.mouse.move(x + 40, y, steps=4)
    page.wait_for_function(
        "() => " + GRAPH.format("graph-window-map") + ".layout.title.text.includes('preview')"
    )
    tab.shot("dragging")
    page.mouse.up()
    page.wait_for_function(
        "(s) => { const gd = " + GRAPH.format("graph-window-map") + ";"
        " return gd.layout.xaxis.range[0] > s && !gd.layout.title.text.includes('preview')"
        " && gd.data[0].customdata; }",
        arg=start_before,
    )
    page.wait_for_function("() => window.location.search.includes('dep=')")
    tab.shot("released")


def test_bw04_copied_link_shows_the_same_arc_in_another_context(server, tabs):
    first = tabs("a")
    page = first.page
    page.goto(server)
    wait_views_drawn(page)
    click_cell(page, *CELL)
    wait_details(page, f"{CELL[0]} 00:00:00", f"{CELL[1]} 00:00:00")
    page.bring_to_front()  # the clipboard needs the focused window, as for a user
    page.locator("#button-copy-link").click()
    page.locator("#button-copy-link").get_by_text("Link copied").wait_for()
    link = page.evaluate("() => navigator.clipboard.readText()")
    assert link == page.url
    first.shot("source")
    second = tabs("b")
    second.page.goto(link)
    wait_views_drawn(second.page)
    wait_details(second.page, f"{CELL[0]} 00:00:00", f"{CELL[1]} 00:00:00")
    for graph in ("graph-family-chart", "graph-arc-view"):
        assert figure_title(second.page, graph) == figure_title(page, graph)
    assert details_value(second.page, "C3") == details_value(page, "C3")
    second.shot("opened")


def test_bw05_shortlist_entry_appears_in_another_context(server, tabs):
    viewer = tabs("viewer")
    viewer.page.goto(server)
    wait_views_drawn(viewer.page)
    author = tabs("author")
    page = author.page
    page.goto(server)
    wait_views_drawn(page)
    click_cell(page, *CELL)
    wait_details(page, f"{CELL[0]} 00:00:00", f"{CELL[1]} 00:00:00")
    note = f"low C3, check DLA {time.time_ns() % 100000}"
    page.fill("#input-shortlist-author", "RM")
    page.fill("#input-shortlist-note", note)
    page.click("#button-shortlist-add")
    page.wait_for_selector(f"#div-shortlist-table td:text-is('{note}')")
    author.shot("added")
    row = viewer.page.locator("#div-shortlist-table tr", has_text=note)
    row.wait_for()
    assert CELL[0] in row.inner_text() and "RM" in row.inner_text()
    viewer.shot("seen")
    # The entry's link opens its arc in the viewer's page.
    row.get_by_role("link", name="open").click()
    wait_details(viewer.page, f"{CELL[0]} 00:00:00", f"{CELL[1]} 00:00:00")
    viewer.shot("opened")


def test_bw06_bad_upload_and_bad_limit_show_messages_and_page_keeps_working(server, tabs, tmp_path):
    tab = tabs()
    page = tab.page
    page.goto(server)
    wait_views_drawn(page)
    bad = tmp_path / "broken_case.toml"
    bad.write_text('[case]\ntitle = "Broken"\ncentral_body = "sun"\n[window]\n')
    page.set_input_files("#upload-case-file input[type=file]", str(bad))
    message = page.locator("#div-message-upload")
    message.get_by_text("was not loaded").wait_for()
    assert "broken_case.toml" in message.inner_text()
    tab.shot("bad_upload")
    page.fill("#input-c3max", "-5")
    page.press("#input-c3max", "Enter")
    field = page.locator("[data-setting='limits.c3_max_km2_s2']")
    field.get_by_text("limits.c3_max_km2_s2").wait_for()
    assert "0 to 10000" in field.inner_text()
    tab.shot("bad_limit")
    # The page still works: a new metric redraws the map.
    page.locator("#dropdown-metric").click()
    page.get_by_role("option", name="arrival v∞ (km/s)").click()
    page.wait_for_function(
        "() => " + GRAPH.format("graph-window-map") + ".layout.title.text.includes('arrival v∞')"
    )
    tab.shot("still_working")


def test_bw07_valid_upload_becomes_the_shown_case(server, tabs, tmp_path):
    tab = tabs()
    page = tab.page
    page.goto(server)
    wait_views_drawn(page)
    text = (ROOT / "sample_cases" / "vesper_venus_orbiter.toml").read_text()
    text = text.replace("Vesper Venus orbiter, 2031 opportunity", "Uploaded Vesper variant")
    case_file = tmp_path / "vesper_variant.toml"
    case_file.write_text(text)
    page.set_input_files("#upload-case-file input[type=file]", str(case_file))
    page.locator("#text-case-title").get_by_text("Uploaded Vesper variant").wait_for()
    page.wait_for_function("() => window.location.search.includes('case=upload-')")
    page.wait_for_function(
        "() => { const t = " + GRAPH.format("graph-arc-view") + ".layout.title;"
        " return String((t && t.text) || '').startsWith('Earth to Venus'); }"
    )
    tab.shot("uploaded")


def test_bw08_survey_page_lists_targets_and_opens_one(server, server_folder, tabs):
    """A survey's ranked targets are listed; "open" shows that target's window map with its
    best arc selected."""
    from small_survey import write_small_survey

    surveys = server_folder / "surveys"
    surveys.mkdir(exist_ok=True)
    write_small_survey(surveys / "bw08.parquet", targets=4)
    from solver.survey.results import load_results

    best = load_results(surveys / "bw08.parquet").iloc[0]
    tab = tabs()
    page = tab.page
    page.goto(server + "survey/?results=bw08")
    page.wait_for_selector(f"tr[data-target='{best['target']}'] a:text('open')")
    assert page.locator(".aw-survey-table tbody tr").count() == 4
    tab.shot("listed")
    page.locator(f"tr[data-target='{best['target']}'] a:text('open')").click()
    page.wait_for_function(
        "(t) => (document.querySelector('#text-case-title') || {}).innerText?.includes(t)",
        arg=str(best["target"]),
    )
    wait_views_drawn(page)
    departure = str(best["departure_utc"])[:10]
    page.wait_for_function(
        "(d) => { const t = document.querySelector('#div-details-arc');"
        " return t && t.innerText.includes(d); }",
        arg=departure,
    )
    tab.shot("opened")
    # an unknown target (here through a link of earlier versions) says so on the window page
    page.goto(server + "survey-open?results=bw08&target=nobody")
    page.wait_for_function(
        "() => (document.querySelector('#div-message-view') || {}).innerText?.includes('target')"
    )
    tab.shot("unknown_target")


def test_bw09_downloads_are_named_after_the_view_and_carry_the_caution(server, tabs):
    """Figure downloads are named after the case and the view; the PNG carries the caution
    (printed under the figure by the page) and the grid CSV the command line's provenance."""
    tab = tabs()
    page = tab.page
    page.goto(server + "?case=tallis_rendezvous&sel=2036-03-01T00:00:00Z~2036-09-01T00:00:00Z")
    wait_views_drawn(page)
    # Record what the page asks plotly to draw into the image.
    page.evaluate(
        "() => { const draw = Plotly.toImage; Plotly.toImage = (fig, opts) => {"
        " window.imageTexts = (fig.layout.annotations || []).map(a => String(a.text));"
        " return draw(fig, opts); }; }"
    )
    with page.expect_download() as info:
        page.click("#button-png-map")
    download = info.value
    texts = page.evaluate("() => window.imageTexts")
    assert any("high-fidelity" in t and "Caution" in t for t in texts), texts
    assert download.suggested_filename == (
        "Tallis_rendezvous_2036_opportunity_c3_N0_2036-03-01_2036-09-01_window_map.png"
    )
    png = Path(download.path()).read_bytes()
    assert png.startswith(b"\x89PNG") and len(png) > 10_000
    caution = page.evaluate(
        "() => { const gd = " + GRAPH.format("graph-window-map") + ";"
        " return gd.layout.annotations.some(a => String(a.text).includes('high-fidelity'));"
        " }"
    )
    assert caution is False  # the caution is added to the image only, not to the live map
    with page.expect_download() as info:
        page.click("#button-download-grid-csv")
    text = Path(info.value.path()).read_text()
    assert info.value.suggested_filename.endswith("_2036-03-01_2036-09-01_grid.csv")
    assert text.startswith("# case_title: Tallis rendezvous") and "# caution: " in text
    tab.shot("downloaded")
