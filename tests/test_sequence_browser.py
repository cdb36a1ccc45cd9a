"""The sequence page in a real headless Chromium against `arcwindow serve` (codes BS01...).

The searches are kept small (a 2-second global search for three candidates, from the link's
settings), so the module costs a few searches' time. Numbers the page must show come from the
engine itself: the candidate a page's link names is evaluated again here
(``solver.sequence.record.candidate_from_link``) and its total Δv and encounter dates compared
with the details panel, so a view drawn for another candidate or another set of dates fails.
"""

from __future__ import annotations

import datetime as dt
import time
from pathlib import Path
from urllib.parse import parse_qsl, urlparse

import pytest
from browser_support import CHROMIUM, GRAPH, ROOT, running_server

pytestmark = [
    pytest.mark.browser,
    pytest.mark.skipif(not Path(CHROMIUM).exists(), reason="Debian's chromium is not installed"),
]
playwright_api = pytest.importorskip("playwright.sync_api")

CASE = "harrow_jupiter_veega"
SMALL = f"sequence?case={CASE}&top=3&time=2"
"""The outer-planet sample with a small search budget (the link's own settings)."""
SEARCH_TIMEOUT_MS = 120_000  # the first load waits for the search (2 s of search, plus compile)
VIEWPORTS = [(1600, 1000), (1280, 800), (1024, 768)]


@pytest.fixture(scope="module")
def server(tmp_path_factory):
    with running_server(tmp_path_factory.mktemp("sequence_page")) as url:
        yield url


# ---------------------------------------------------------------------------------------------
# Conditions on the page


def wait_all_drawn(page, timeout_ms: float = SEARCH_TIMEOUT_MS) -> None:
    """Wait until the candidates, the arc view, encounter chart, leg map, family chart and the
    details panel are drawn for the view in the address bar."""
    page.wait_for_function(
        "() => { const g = (id) => document.querySelector('#' + id + ' .js-plotly-plot');"
        " const a = g('graph-seq-arc-view'), e = g('graph-seq-encounters'),"
        "   m = g('graph-seq-leg-map'), f = g('graph-seq-family');"
        " const d = document.querySelector('#div-seq-details');"
        " return document.querySelectorAll('#div-seq-candidates tr[data-rank]').length > 0"
        " && a && a.data && a.data.some(t => String(t.name).startsWith('leg 1'))"
        " && e && e.data && e.data.some(t => t.name === 'Δv')"
        " && m && m.data && m.data.some(t => t.type === 'heatmap' && t.customdata)"
        " && f && f.data && f.data.some(t => t.name === 'selected arc')"
        " && d && d.innerText.includes('How each Δv is counted')"
        " && window.location.search.includes('&at=')"
        " && !document.querySelector('[data-dash-is-loading=\"true\"]'); }",
        timeout=timeout_ms,
    )


def link_of(page) -> dict[str, str]:
    return dict(parse_qsl(urlparse(page.url).query))


def details_text(page) -> str:
    return page.locator("#div-seq-details").inner_text()


def detail(page, label: str) -> str:
    """The first value the details panel shows beside ``label``."""
    return page.evaluate(
        "(label) => { for (const tr of document.querySelectorAll('#div-seq-details tr')) {"
        "   const th = tr.querySelector('th'); const td = tr.querySelector('td');"
        "   if (th && td && th.innerText.trim() === label) return td.innerText.trim(); }"
        " return null; }",
        label,
    )


def title_of(page, graph_id: str) -> str:
    return page.evaluate(
        "(id) => { const gd = document.querySelector('#' + id + ' .js-plotly-plot');"
        " const t = gd.layout.title; return String((t && (t.text || t)) || ''); }",
        graph_id,
    )


def engine_candidate(link: dict[str, str]):
    """The candidate a link names, evaluated by the engine in this process."""
    from solver.sequence.record import candidate_from_link
    from solver.sequence.spec import load_sequence_case

    sequence_case = load_sequence_case(ROOT / "sample_cases" / "sequences" / f"{CASE}.toml")
    return candidate_from_link(sequence_case, link)


def assert_details_match_engine(page) -> None:
    """The details panel shows the engine's total Δv and departure date for the link's dates."""
    link = link_of(page)
    candidate = engine_candidate(link)
    shown_dv = float(detail(page, "total Δv"))
    assert shown_dv == pytest.approx(candidate.dv_total_km_s, abs=6e-5)  # shown to 4 decimals
    from app.dashboard.display_data import utc_text

    first, last = candidate.encounters[0], candidate.encounters[-1]

    def shown(jd_tdb: float) -> str:
        return utc_text(jd_tdb).replace("T", " ").rstrip("Z")

    assert detail(page, "departure") == shown(first.jd_tdb)
    assert detail(page, "arrival") == shown(last.jd_tdb)


def no_sideways_scroll(page) -> bool:
    return page.evaluate(
        "() => document.documentElement.scrollWidth <= document.documentElement.clientWidth"
    )


def click_leg_map_cell(page, di: int, dj: int) -> tuple[float, float]:
    """Click the leg-map cell ``di`` start dates and ``dj`` end dates from the shown
    candidate's (the middle of the map); returns the cell's (x, y) in ms since 1970."""
    x_ms, y_ms, px, py = page.evaluate(
        "([di, dj]) => { const gd = " + GRAPH.format("graph-seq-leg-map") + ";"
        " const h = gd._fullData.find(t => t.type === 'heatmap');"
        " const i = Math.floor(h.x.length / 2) + di, j = Math.floor(h.y.length / 2) + dj;"
        " const x = new Date(h.x[i]).getTime(), y = new Date(h.y[j]).getTime();"
        " const fl = gd._fullLayout, r = gd.getBoundingClientRect();"
        " return [x, y, r.left + fl.xaxis._offset + fl.xaxis.l2p(x),"
        "         r.top + fl.yaxis._offset + fl.yaxis.l2p(y)]; }",
        [di, dj],
    )
    page.mouse.click(px, py)
    return x_ms, y_ms


# ---------------------------------------------------------------------------------------------
# Tests


def test_bs01_outer_planet_case_loads_with_candidates_and_every_view(server, tabs):
    for width, height in VIEWPORTS:
        tab = tabs(f"_{width}", viewport={"width": width, "height": height})
        page = tab.page
        page.goto(server + SMALL)
        wait_all_drawn(page)
        rows = page.locator("#div-seq-candidates tr[data-rank]")
        assert 1 <= rows.count() <= 3
        assert "Earth › Venus › Earth › Earth › Jupiter" in rows.first.inner_text()
        assert "Caution" in page.locator("#div-seq-caution").inner_text()
        assert "Harrow" in page.locator("#text-seq-case-title").inner_text()
        assert_details_match_engine(page)
        # The arc view draws one line per leg and the bodies at the five encounters.
        names = page.evaluate(
            "() => " + GRAPH.format("graph-seq-arc-view") + ".data.map(t => t.name)"
        )
        assert [n for n in names if n.startswith("leg ")][:4] == [
            n for n in names if n.startswith("leg ")
        ]
        assert sum(n.startswith("leg ") for n in names) == 4
        assert no_sideways_scroll(page), f"sideways scroll at {width}x{height}"
        tab.shot("loaded")


def test_bs02_another_candidate_updates_every_view(server, tabs):
    tab = tabs()
    page = tab.page
    page.goto(server + SMALL)
    wait_all_drawn(page)
    if page.locator("#div-seq-candidates tr[data-rank]").count() < 2:
        pytest.skip("the small search found one candidate")
    before = {
        "arc": title_of(page, "graph-seq-arc-view"),
        "map": page.evaluate(
            "() => " + GRAPH.format("graph-seq-leg-map") + "._fullData"
            ".find(t => t.type === 'heatmap').x[0]"
        ),
        "details": details_text(page),
        "at": link_of(page)["at"],
    }
    page.locator("#div-seq-candidates tr[data-rank='2'] button").click()
    page.wait_for_function("() => window.location.search.includes('cand=2')")
    page.wait_for_function("(at) => !window.location.search.includes(at)", arg=before["at"])
    wait_all_drawn(page)
    page.wait_for_function(
        "() => document.querySelector('#div-seq-details').innerText.includes('Candidate 2')"
    )
    assert "aw-current" in page.locator("tr[data-rank='2']").get_attribute("class")
    assert details_text(page) != before["details"]
    assert_details_match_engine(page)
    page.wait_for_function(
        "(x0) => " + GRAPH.format("graph-seq-leg-map") + "._fullData"
        ".find(t => t.type === 'heatmap').x[0] !== x0",
        arg=before["map"],
    )
    encounters = page.evaluate(
        "() => Array.from(" + GRAPH.format("graph-seq-encounters") + "._fullData"
        ".find(t => t.name === 'Δv').y)"
    )
    candidate = engine_candidate(link_of(page))
    assert encounters[0] == pytest.approx(candidate.encounters[0].dv_km_s, abs=1e-9)
    tab.shot("candidate2")


def test_bs03_leg_map_click_retimes_details_and_arc_view(server, tabs):
    tab = tabs()
    page = tab.page
    page.goto(server + SMALL)
    wait_all_drawn(page)
    at_before = link_of(page)["at"].split("~")
    arc_before = title_of(page, "graph-seq-arc-view")
    x_ms, _y_ms = click_leg_map_cell(page, 5, -3)
    page.wait_for_function(
        "(a) => { const at = new URLSearchParams(window.location.search).get('at');"
        " return at && at.split('~')[0] !== a; }",
        arg=at_before[0],
    )
    wait_all_drawn(page)
    page.wait_for_function(
        "() => document.querySelector('#div-seq-details').innerText.includes('Re-timed')"
    )
    at_after = link_of(page)["at"].split("~")
    # The new departure is the clicked cell's start date (the map's axis is drawn to the
    # second, the link keeps the millisecond).

    departure = dt.datetime.fromisoformat(at_after[0].replace("Z", "+00:00"))
    assert abs(departure.timestamp() * 1000.0 - x_ms) <= 1000.0
    assert at_after[2:] == at_before[2:]  # the other encounters are held
    assert_details_match_engine(page)
    assert title_of(page, "graph-seq-arc-view") != arc_before
    tab.shot("retimed")


def test_bs04_copied_link_opens_the_same_view_in_another_context(server, tabs):
    first = tabs("a")
    page = first.page
    page.goto(server + SMALL + "&leg=2")
    wait_all_drawn(page)
    click_leg_map_cell(page, -4, 2)
    page.wait_for_function(
        "() => document.querySelector('#div-seq-details').innerText.includes('Re-timed')"
    )
    wait_all_drawn(page)
    page.click("#button-seq-copy-link")
    copied = page.evaluate("() => navigator.clipboard.readText()")
    assert "&at=" in copied and "leg=2" in copied
    second = tabs("b")
    other = second.page
    other.goto(copied)
    wait_all_drawn(other)
    assert details_text(other) == details_text(page)
    assert title_of(other, "graph-seq-arc-view") == title_of(page, "graph-seq-arc-view")
    assert title_of(other, "graph-seq-leg-map") == title_of(page, "graph-seq-leg-map")
    second.shot("opened")


def test_bs05_a_kept_sequence_appears_in_another_context(server, tabs):
    viewer = tabs("viewer")
    viewer.page.goto(server + SMALL)
    wait_all_drawn(viewer.page)
    author = tabs("author")
    page = author.page
    page.goto(server + SMALL)
    wait_all_drawn(page)
    note = f"VEEGA check {time.time_ns() % 100000}"
    page.fill("#input-seq-shortlist-author", "QT")
    page.fill("#input-seq-shortlist-note", note)
    page.click("#button-seq-shortlist-add")
    page.wait_for_selector(f"#div-seq-shortlist-table td:text-is('{note}')")
    row = viewer.page.locator("#div-seq-shortlist-table tr", has_text=note)
    row.wait_for()
    assert "venus (flyby) > earth (flyby) > earth (flyby) > jupiter" in row.inner_text()
    viewer.shot("seen")
    # The window page's shortlist lists it too, and its link opens the sequence page.
    window = tabs("window")
    window.page.goto(server)
    wrow = window.page.locator("#div-shortlist-table tr", has_text=note)
    wrow.wait_for()
    wrow.get_by_role("link", name="open").click()
    window.page.wait_for_url("**/sequence?**")
    wait_all_drawn(window.page)
    assert details_text(window.page) == details_text(page)
    window.shot("opened")


def test_bs06_invalid_sequence_upload_is_one_line_and_the_page_keeps_working(
    server, tabs, tmp_path
):
    tab = tabs()
    page = tab.page
    page.goto(server + SMALL)
    wait_all_drawn(page)
    text = (ROOT / "sample_cases" / "sequences" / f"{CASE}.toml").read_text()
    bad = tmp_path / "bad_sequence.toml"
    bad.write_text(text.replace("tof_min_days = 80", "tof_min_days = -80", 1))
    page.set_input_files("#upload-seq-case-file input[type=file]", str(bad))
    message = page.locator("#div-seq-message-upload")
    message.get_by_text("was not loaded").wait_for()
    shown = message.inner_text().strip()
    assert "\n" not in shown and "bad_sequence.toml" in shown and "tof_min_days" in shown
    tab.shot("bad_upload")
    # The page still works: another candidate is drawn.
    rank = page.locator("#div-seq-candidates tr[data-rank]").count()
    page.locator(f"#div-seq-candidates tr[data-rank='{rank}'] button").click()
    page.wait_for_function(f"() => window.location.search.includes('cand={rank}&')")
    wait_all_drawn(page)
    page.locator("#div-seq-details").get_by_text(f"Candidate {rank} as").wait_for()
    assert_details_match_engine(page)
    tab.shot("still_working")


def test_bs07_downloads_carry_every_leg_and_the_caution(server, tabs):
    from solver.caution import CAUTION

    tab = tabs()
    page = tab.page
    page.goto(server + SMALL)
    wait_all_drawn(page)
    candidate = engine_candidate(link_of(page))
    caution_start = CAUTION.split(":")[0].lower()  # in the ASCII lines of an OEM too

    def download(button: str) -> tuple[str, str]:
        with page.expect_download() as info:
            page.click(f"#{button}")
        d = info.value
        return d.suggested_filename, Path(d.path()).read_text(encoding="utf-8")

    name, csv_text = download("button-seq-download-csv")
    assert name.endswith("_candidates.csv") and name.startswith("Harrow_Jupiter")
    rows = [r for r in csv_text.splitlines() if r and not r.startswith("#")]
    assert len(rows) == 1 + page.locator("#div-seq-candidates tr[data-rank]").count()
    assert caution_start in csv_text.lower()
    name, oem = download("button-seq-download-oem")
    assert name.endswith("_candidate.oem")
    # CCSDS OEM 2.0: one segment (META_START ... data) per leg, each starting at its encounter.
    assert oem.count("META_START") == len(candidate.legs) == 4
    starts = [line.split("=")[1].strip() for line in oem.splitlines() if line.startswith("START")]
    encounters = link_of(page)["at"].split("~")
    assert [s[:10] for s in starts] == [d[:10] for d in encounters[:4]]
    assert caution_start in oem.lower()
    name, json_text = download("button-seq-download-json")
    assert name.endswith("_candidate.json") and caution_start in json_text.lower()
    name, html_text = download("button-seq-download-encounters-html")
    assert name.endswith("_encounter_chart.html") and caution_start in html_text.lower()
    with page.expect_download() as info:
        page.click("#button-seq-png-legmap")
    assert info.value.suggested_filename.endswith(".png")
    tab.shot("downloads")


def test_bs08_the_window_page_opens_a_sequence_case_on_the_sequence_page(server, tabs):
    """A link to the window page that names a sequence case, and the window page's case
    picker, both open the sequence page (the search settings travel with the link)."""
    tab = tabs()
    page = tab.page
    page.goto(server + f"?case={CASE}&top=3&time=2")
    page.wait_for_url("**/sequence?**")
    assert f"case={CASE}" in page.url and "time=2" in page.url
    wait_all_drawn(page)
    page.goto(server)
    page.locator("#text-case-title").get_by_text("Tallis").wait_for()
    page.locator("#dropdown-case").click()
    page.get_by_role("option", name="Harrow Jupiter probe via Venus and Earth flybys").click()
    page.wait_for_url(f"**/sequence?case={CASE}**")
    page.locator("#text-seq-case-title").get_by_text("Harrow").wait_for()
    tab.shot("picked")
