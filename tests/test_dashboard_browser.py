"""The dashboard in a real headless Chromium against `arcwindow serve` on a free localhost port.

Each test waits for conditions on the page (never sleep-then-check), saves screenshots of its
steps to test-artifacts/browser/ and ends by asserting the browser console logged no errors.
Test names carry short codes (BW01...) to grep for in CI logs.

The expected numbers come from the engine itself (solver.window.solve_cell and
solver.mechanics.families.geometry) at the clicked cell's dates, so a click that landed on another
cell or a view that drew another arc would fail.
"""

from __future__ import annotations

import os
import shutil
import signal
import socket
import subprocess
import sys
import time
import urllib.request
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
ARTIFACTS = ROOT / "test-artifacts" / "browser"
CHROMIUM = shutil.which("chromium") or "/usr/bin/chromium"
CHROMIUM_ARGS = [
    "--no-sandbox",
    "--disable-gpu",
    "--disable-background-networking",
    "--disable-component-update",
    "--disable-sync",
    "--no-first-run",
    "--disable-quic",
]
TIMEOUT_MS = 30_000
VIEWPORT = {"width": 1600, "height": 1000}

pytestmark = [
    pytest.mark.browser,
    pytest.mark.skipif(not Path(CHROMIUM).exists(), reason="Debian's chromium is not installed"),
]
playwright_api = pytest.importorskip("playwright.sync_api")


# ---------------------------------------------------------------------------------------------
# Server and browser


def _free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


@pytest.fixture(scope="module")
def server_folder(tmp_path_factory):
    """The server's own cache, data and survey folders live here."""
    return tmp_path_factory.mktemp("dashboard")


@pytest.fixture(scope="module")
def server(server_folder):
    """`arcwindow serve` in a subprocess with its own cache and data folders."""
    folder = server_folder
    port = _free_port()
    env = dict(os.environ, PYTHONUNBUFFERED="1")
    log = open(folder / "server.log", "w")
    proc = subprocess.Popen(
        [
            sys.executable,
            "-m",
            "app.cli",
            "serve",
            "--port",
            str(port),
            "--cache-dir",
            str(folder / "cache"),
            "--data-dir",
            str(folder / "data"),
            "--survey-dir",
            str(folder / "surveys"),
        ],
        cwd=ROOT,
        env=env,
        stdout=log,
        stderr=subprocess.STDOUT,
    )
    url = f"http://127.0.0.1:{port}/"
    deadline = time.monotonic() + 60.0
    while True:
        try:
            with urllib.request.urlopen(url, timeout=2) as response:
                if response.status == 200:
                    break
        except OSError:
            pass
        if proc.poll() is not None or time.monotonic() > deadline:
            log.close()
            pytest.fail("server did not start:\n" + (folder / "server.log").read_text()[-3000:])
        time.sleep(0.1)  # polling a socket for readiness, not waiting on the page
    yield url
    if os.environ.get("ARCWINDOW_KEEP_SERVER_LOG"):  # debugging aid: stacks of every thread
        proc.send_signal(signal.SIGUSR1)
        time.sleep(1.0)
        shutil.copy(folder / "server.log", os.environ["ARCWINDOW_KEEP_SERVER_LOG"])
    proc.terminate()
    try:
        proc.wait(timeout=10)
    except subprocess.TimeoutExpired:
        proc.kill()
    log.close()


@pytest.fixture(scope="module")
def browser():
    with playwright_api.sync_playwright() as p:
        b = p.chromium.launch(executable_path=CHROMIUM, args=CHROMIUM_ARGS)
        yield b
        b.close()


class Tab:
    """One page with its console errors collected."""

    def __init__(self, browser, name: str):
        self.context = browser.new_context(viewport=VIEWPORT)
        self.context.grant_permissions(["clipboard-read", "clipboard-write"])
        self.page = self.context.new_page()
        self.page.set_default_timeout(TIMEOUT_MS)
        self.errors: list[str] = []
        self.name = name
        self.page.on("console", lambda m: self.errors.append(m.text) if m.type == "error" else None)
        self.page.on("pageerror", lambda e: self.errors.append(str(e)))

    def shot(self, step: str) -> None:
        ARTIFACTS.mkdir(parents=True, exist_ok=True)
        self.page.screenshot(path=str(ARTIFACTS / f"{self.name}_{step}.png"), full_page=True)

    def close(self) -> None:
        self.context.close()


@pytest.fixture
def tabs(browser, request):
    opened: list[Tab] = []

    def open_tab(suffix: str = "") -> Tab:
        tab = Tab(browser, request.node.name.split("_")[1] + suffix)
        opened.append(tab)
        return tab

    yield open_tab
    report = getattr(request.node, "rep_call", None)
    if report is not None and report.failed:
        for t in opened:
            t.shot("failed")
    errors = [(t.name, e) for t in opened for e in t.errors]
    for t in opened:
        t.close()
    assert not errors, f"browser console errors: {errors}"


# ---------------------------------------------------------------------------------------------
# Page helpers (conditions the tests wait for)

GRAPH = "document.querySelector('#{0} .js-plotly-plot')"


def wait_views_drawn(page) -> None:
    """Wait until the full window map, the arc view and the family chart are drawn."""
    page.wait_for_function(
        "() => { const m = " + GRAPH.format("graph-window-map") + ";"
        " const a = " + GRAPH.format("graph-arc-view") + ";"
        " const f = " + GRAPH.format("graph-family-chart") + ";"
        " return m && m.data && m.data.length > 0 && m.data[0].type === 'heatmap'"
        " && m.data[0].customdata"
        " && a && a.data && a.data.some(t => t.name === 'transfer arc')"
        " && f && f.data && f.data.some(t => t.name === 'selected arc')"
        " && !document.querySelector('#graph-window-map')"
        "      .closest('[data-dash-is-loading=\"true\"]'); }"
    )


def details_value(page, label: str) -> str:
    row = page.locator("#div-details-arc tr", has=page.locator(f"th:text-is('{label}')")).first
    return row.locator("td").first.inner_text()


def wait_details(page, departure: str, arrival: str) -> None:
    """Wait until the details panel shows this cell's dates ("YYYY-MM-DD HH:MM:SS")."""
    page.wait_for_function(
        "([d, a]) => { const t = document.querySelector('#div-details-arc');"
        " return t && t.innerText.includes(d) && t.innerText.includes(a); }",
        arg=[departure, arrival],
    )


def click_cell(page, departure_utc: str, arrival_utc: str) -> None:
    """Zoom the window map to a few days around a cell (as a user would with the zoom box),
    then click the cell's centre."""
    page.evaluate(
        "([d, a]) => { const gd = " + GRAPH.format("graph-window-map") + ";"
        " const day = 86400000, x = Date.parse(d), y = Date.parse(a);"
        " return Plotly.relayout(gd, {'xaxis.range': [x - 6 * day, x + 6 * day],"
        " 'yaxis.range': [y - 6 * day, y + 6 * day]}); }",
        [departure_utc, arrival_utc],
    )
    point = page.evaluate(
        "([d, a]) => { const gd = " + GRAPH.format("graph-window-map") + ";"
        " const fl = gd._fullLayout; const r = gd.getBoundingClientRect();"
        " const x = fl.xaxis._offset + fl.xaxis.l2p(Date.parse(d));"
        " const y = fl.yaxis._offset + fl.yaxis.l2p(Date.parse(a));"
        " return [r.left + x, r.top + y]; }",
        [departure_utc, arrival_utc],
    )
    page.mouse.click(point[0], point[1])


def figure_title(page, graph_id: str) -> str:
    return page.evaluate(
        "(id) => { const gd = document.querySelector('#' + id + ' .js-plotly-plot');"
        " const t = gd.layout.title; return (t && (t.text || t)) || ''; }",
        graph_id,
    )


def expected_cell(departure: str, arrival: str):
    """The engine's own numbers for the default case's cell at these dates."""
    from solver.ephemeris.timescales import utc_to_jd_tdb
    from solver.mechanics.families import geometry
    from solver.window.case import load_case
    from solver.window.case_bodies import CaseBodies
    from solver.window.cell import select_arc, solve_cell

    case = load_case(ROOT / "sample_cases" / "tallis_rendezvous.toml")
    bodies = CaseBodies.of(case)
    dep = float(utc_to_jd_tdb(departure))
    arr = float(utc_to_jd_tdb(arrival))
    arc = select_arc(solve_cell(case, dep, arr, bodies), 0, "single")
    lam = float(geometry(arc.r1_km, arc.r2_km, bodies.pole_icrf).lam)
    return arc, lam


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
    page.locator("#clipboard-view-link").click()
    page.locator("#clipboard-view-link").get_by_text("Link copied").wait_for()
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
    page.fill("#input-limit-c3", "-5")
    page.press("#input-limit-c3", "Enter")
    view_message = page.locator("#div-message-view")
    view_message.get_by_text("limits.c3_max_km2_s2").wait_for()
    assert "0 to 10000" in view_message.inner_text()
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
        "() => "
        + GRAPH.format("graph-arc-view")
        + ".layout.title.text.startsWith('Earth to Venus')"
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
    page.wait_for_selector(f"tr[data-target='{best['target']}'] button:text('open')")
    assert page.locator(".aw-survey-table tbody tr").count() == 4
    tab.shot("listed")
    page.locator(f"tr[data-target='{best['target']}'] button:text('open')").click()
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
    # "open" is a POST (it stores a case); an unknown target comes back to the survey page with
    # a clear message
    page.evaluate(
        "() => { const form = document.createElement('form'); form.method = 'post';"
        " form.action = '/survey-open?results=bw08&target=nobody';"
        " document.body.appendChild(form); form.submit(); }"
    )
    page.wait_for_function(
        "() => (document.querySelector('#div-survey-message') || {}).innerText?.includes('target')"
    )
    tab.shot("unknown_target")
