"""What the browser tests share: a live `arcwindow serve`, a headless Chromium tab, and the
conditions they wait for on the page.

Tests wait for conditions (never sleep-then-check), save screenshots of their steps to
test-artifacts/browser/ and end by asserting that the browser console logged no errors.

The numbers a map must show come from the engine itself (solver.window.grid.compute_window of
the case the test built), so a map drawn for another view, another grid or another arc slot
fails the comparison.
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
from contextlib import contextmanager
from pathlib import Path
from urllib.parse import parse_qs, urlparse

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
DAY_MS = 86_400_000.0


def free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


@contextmanager
def running_server(folder: Path, env_extra: dict[str, str] | None = None):
    """`arcwindow serve` in a subprocess with its own cache, data and survey folders; yields
    its base URL."""
    port = free_port()
    env = dict(os.environ, PYTHONUNBUFFERED="1", **(env_extra or {}))
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
            raise RuntimeError("server did not start:\n" + (folder / "server.log").read_text())
        time.sleep(0.1)  # polling a socket for readiness, not waiting on the page
    try:
        yield url
    finally:
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


class Tab:
    """One page in its own browser context, with its console errors collected."""

    def __init__(self, browser, name: str, viewport: dict | None = None):
        self.context = browser.new_context(viewport=viewport or VIEWPORT)
        self.context.grant_permissions(["clipboard-read", "clipboard-write"])
        self.page = self.context.new_page()
        self.page.set_default_timeout(TIMEOUT_MS)
        self.errors: list[str] = []
        self.name = name
        self.page.on("console", lambda m: self.errors.append(m.text) if m.type == "error" else None)
        self.page.on("pageerror", lambda e: self.errors.append(str(e)))

    def shot(self, step: str, full_page: bool = True) -> Path:
        ARTIFACTS.mkdir(parents=True, exist_ok=True)
        path = ARTIFACTS / f"{self.name}_{step}.png"
        self.page.screenshot(path=str(path), full_page=full_page)
        return path

    def close(self) -> None:
        self.context.close()


def tab_factory(browser, request):
    """A ``tabs`` fixture body: opens tabs, saves a screenshot of each on failure, closes
    them, and fails the test if any tab's console logged an error."""
    opened: list[Tab] = []

    def open_tab(suffix: str = "", viewport: dict | None = None) -> Tab:
        tab = Tab(browser, request.node.name.split("_")[1] + suffix, viewport)
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
# Conditions on the page

GRAPH = "document.querySelector('#{0} .js-plotly-plot')"


def wait_views_drawn(page, timeout_ms: float = TIMEOUT_MS) -> None:
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
        "      .closest('[data-dash-is-loading=\"true\"]'); }",
        timeout=timeout_ms,
    )


def details_value(page, label: str) -> str:
    row = page.locator("#div-details-arc tr", has=page.locator(f"th:text-is('{label}')")).first
    return row.locator("td").first.inner_text()


def wait_details(page, departure: str, arrival: str, timeout_ms: float = TIMEOUT_MS) -> None:
    """Wait until the details panel shows this cell's dates ("YYYY-MM-DD HH:MM:SS")."""
    page.wait_for_function(
        "([d, a]) => { const t = document.querySelector('#div-details-arc');"
        " return t && t.innerText.includes(d) && t.innerText.includes(a); }",
        arg=[departure, arrival],
        timeout=timeout_ms,
    )


def zoom_to(page, departure_utc: str, arrival_utc: str, half_days: float = 6.0) -> None:
    """Zoom the window map to a few days around a cell, as a user would with the zoom box."""
    page.evaluate(
        "([d, a, h]) => { const gd = " + GRAPH.format("graph-window-map") + ";"
        " const day = 86400000, x = Date.parse(d), y = Date.parse(a);"
        " return Plotly.relayout(gd, {'xaxis.range': [x - h * day, x + h * day],"
        " 'yaxis.range': [y - h * day, y + h * day]}); }",
        [departure_utc, arrival_utc, half_days],
    )


def cell_point(page, departure_utc: str, arrival_utc: str) -> tuple[float, float]:
    """Page coordinates of a date pair on the window map."""
    return page.evaluate(
        "([d, a]) => { const gd = " + GRAPH.format("graph-window-map") + ";"
        " const fl = gd._fullLayout; const r = gd.getBoundingClientRect();"
        " const x = fl.xaxis._offset + fl.xaxis.l2p(Date.parse(d));"
        " const y = fl.yaxis._offset + fl.yaxis.l2p(Date.parse(a));"
        " return [r.left + x, r.top + y]; }",
        [departure_utc, arrival_utc],
    )


def click_cell(page, departure_utc: str, arrival_utc: str) -> None:
    """Zoom the window map around a cell, then click the cell's centre."""
    zoom_to(page, departure_utc, arrival_utc)
    x, y = cell_point(page, departure_utc, arrival_utc)
    page.mouse.click(x, y)


def figure_title(page, graph_id: str) -> str:
    return page.evaluate(
        "(id) => { const gd = document.querySelector('#' + id + ' .js-plotly-plot');"
        " const t = gd.layout.title; return (t && (t.text || t)) || ''; }",
        graph_id,
    )


def expected_cell(departure: str, arrival: str, case_name: str = "tallis_rendezvous"):
    """The engine's own single-revolution arc of a sample case's cell at these dates, and λ."""
    from solver.ephemeris.timescales import utc_to_jd_tdb
    from solver.mechanics.families import geometry
    from solver.window.case import load_case
    from solver.window.case_bodies import CaseBodies
    from solver.window.cell import select_arc, solve_cell

    case = load_case(ROOT / "sample_cases" / f"{case_name}.toml")
    bodies = CaseBodies.of(case)
    dep = float(utc_to_jd_tdb(departure))
    arr = float(utc_to_jd_tdb(arrival))
    arc = select_arc(solve_cell(case, dep, arr, bodies), 0, "single")
    lam = float(geometry(arc.r1_km, arc.r2_km, bodies.pole_icrf).lam)
    return arc, lam


# ---------------------------------------------------------------------------------------------
# The map a view must show, from the engine


def expected_map(case_name: str, changes: dict, metric: str, slot: int | None, samples: int = 6):
    """What the window map of a view must carry: the axes' first and last dates (ms since 1970,
    UTC), their lengths (grids of at most 600 nodes per axis are drawn whole) and the metric's
    values at a few cells with an arc, on arc ``slot`` (None: the best arc of each cell)."""
    import numpy as np

    from solver.ephemeris.timescales import jd_tdb_to_utc
    from solver.window.case import load_case
    from solver.window.grid import compute_window

    case = load_case(ROOT / "sample_cases" / f"{case_name}.toml")
    if changes:
        case = case.with_changes(**changes)
    grid = compute_window(case)

    def ms(jd):
        text = str(jd_tdb_to_utc(float(jd), digits=3)).rstrip("Z")
        return float(np.datetime64(text, "ms").astype(np.int64))

    if slot is None:
        values = grid.best_values(metric)
    else:
        values = grid.metric(metric)[..., slot]
    if metric == "dla_deg":
        values = np.abs(values)
    finite = np.argwhere(np.isfinite(values))
    rng = np.random.default_rng(5)
    picks = finite[rng.choice(len(finite), size=min(samples, len(finite)), replace=False)]
    return {
        "x": [ms(grid.departure_jd_tdb[0]), ms(grid.departure_jd_tdb[-1])],
        "y": [ms(grid.arrival_jd_tdb[0]), ms(grid.arrival_jd_tdb[-1])],
        "nx": len(grid.departure_jd_tdb),
        "ny": len(grid.arrival_jd_tdb),
        "cells": [[int(i), int(j), float(values[i, j])] for i, j in picks],
    }


# Reads the heat map's axes and a few values from the drawn figure, and says how it differs
# from what the view needs ("" when it shows exactly that map).
_MAP_DIFFERENCE_JS = """
(want) => {
  const gd = document.querySelector('#graph-window-map .js-plotly-plot');
  if (!gd || !gd._fullData || !gd._fullData.length) return 'no map drawn';
  const heat = gd._fullData[0];
  if (heat.type !== 'heatmap') return 'no heat map';
  const title = (gd.layout.title && (gd.layout.title.text || gd.layout.title)) || '';
  if (String(title).includes('preview')) return 'a preview is shown: ' + title;
  if (!heat.customdata) return 'no hover numbers (a preview or an empty map)';
  const x = heat.x, y = heat.y, z = heat.z;
  if (x.length !== want.nx || y.length !== want.ny)
    return `axes ${x.length} x ${y.length}, want ${want.nx} x ${want.ny}`;
  const off = (a, b) => Math.abs(a - b) > 1000;
  if (off(x[0], want.x[0]) || off(x[x.length - 1], want.x[1]))
    return `departures from ${new Date(x[0]).toISOString()}, `
      + `want ${new Date(want.x[0]).toISOString()}`;
  if (off(y[0], want.y[0]) || off(y[y.length - 1], want.y[1]))
    return `arrivals from ${new Date(y[0]).toISOString()}, `
      + `want ${new Date(want.y[0]).toISOString()}`;
  if (!want.cells.length) {  // the view has no such arc anywhere: every cell must be empty
    for (const row of z) for (const v of row) if (Number.isFinite(v)) return `a cell shows ${v}`;
  }
  for (const [i, j, v] of want.cells) {
    const got = z[j][i];
    if (!(Math.abs(got - v) <= 1e-5 * Math.max(1, Math.abs(v))))
      return `cell (${i}, ${j}) shows ${got}, want ${v}`;
  }
  return '';
}
"""


def map_difference(page, want: dict) -> str:
    return page.evaluate(_MAP_DIFFERENCE_JS, want)


def wait_map_shows(page, want: dict, timeout_s: float) -> None:
    """Wait until the window map is exactly the map ``want`` describes; on timeout, fail
    naming how the map on screen differs."""
    deadline = time.monotonic() + timeout_s
    difference = "not checked"
    while time.monotonic() < deadline:
        difference = map_difference(page, want)
        if not difference:
            return
        page.wait_for_timeout(250)
    raise AssertionError(f"after {timeout_s:.0f} s the map is not the view's map: {difference}")


__all__ = [
    "ARTIFACTS",
    "CHROMIUM",
    "CHROMIUM_ARGS",
    "DAY_MS",
    "GRAPH",
    "ROOT",
    "TIMEOUT_MS",
    "VIEWPORT",
    "Tab",
    "cell_point",
    "click_cell",
    "details_value",
    "expected_cell",
    "expected_map",
    "figure_title",
    "free_port",
    "map_difference",
    "running_server",
    "tab_factory",
    "wait_details",
    "wait_map_shows",
    "wait_views_drawn",
    "zoom_to",
]


# ---------------------------------------------------------------------------------------------
# Gestures


def hold_departure_thumb_moved(page, pixels: float = 30.0) -> None:
    """Press the departure slider's start thumb and drag it right by ``pixels`` (in two moves,
    as a hand would); the mouse stays down until the test calls ``page.mouse.up()``."""
    box = page.locator("#slider-departure-range .dash-slider-thumb-1").bounding_box()
    x, y = box["x"] + box["width"] / 2, box["y"] + box["height"] / 2
    page.mouse.move(x, y)
    page.mouse.down()
    page.mouse.move(x + pixels / 2, y, steps=3)
    page.mouse.move(x + pixels, y, steps=3)


def map_after_departure_drag(page, case_name: str, changes: dict) -> dict:
    """The map a released departure drag must end on: the engine's map of ``case_name`` with
    ``changes`` and the departure window the address bar now names (``dep=START~END``)."""
    page.wait_for_function("() => window.location.search.includes('dep=')")
    query = {k: v[0] for k, v in parse_qs(urlparse(page.url).query).items()}
    start, end = query["dep"].split("~")
    changes = dict(changes)
    if start:
        changes["window.departure_start"] = start
    if end:
        changes["window.departure_end"] = end
    return expected_map(case_name, changes, "c3_km2_s2", 0)
