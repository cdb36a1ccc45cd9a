"""A served session in a real headless Chromium: the token page and the shared link, the grid
CSV streamed from its route, and framing refused by the browser itself.

One `arcwindow serve --token ...` on a free localhost port (loopback, so the Host and origin
checks apply as everywhere; the token because it was given).
"""

from __future__ import annotations

import os
import socket
import subprocess
import sys
import time
import urllib.error
import urllib.request
from pathlib import Path

import pytest

playwright_api = pytest.importorskip("playwright.sync_api")

pytestmark = pytest.mark.browser

ROOT = Path(__file__).resolve().parents[1]
ARTIFACTS = ROOT / "test-artifacts" / "browser"
CHROMIUM = "/usr/bin/chromium"
CHROMIUM_ARGS = [
    "--no-sandbox",
    "--disable-gpu",
    "--disable-background-networking",
    "--disable-component-update",
    "--disable-sync",
    "--no-first-run",
]
TOKEN = "browser-test-token-0123456789abcdef"
TIMEOUT_MS = 60_000


@pytest.fixture(scope="module")
def served(tmp_path_factory):
    folder = tmp_path_factory.mktemp("served")
    with socket.socket() as probe:
        probe.bind(("127.0.0.1", 0))
        port = probe.getsockname()[1]
    command = [sys.executable, "-m", "app.cli", "serve", "--port", str(port), "--token", TOKEN]
    command += ["--cache-dir", str(folder / "cache"), "--data-dir", str(folder / "data")]
    log = open(folder / "server.log", "w")
    proc = subprocess.Popen(command, cwd=ROOT, stdout=log, stderr=subprocess.STDOUT)
    base = f"http://127.0.0.1:{port}/"
    deadline = time.monotonic() + 60.0
    while True:
        try:
            urllib.request.urlopen(base, timeout=2)
        except urllib.error.HTTPError:
            break  # 401: up, and asking for its token
        except OSError:
            if proc.poll() is not None or time.monotonic() > deadline:
                log.close()
                pytest.fail((folder / "server.log").read_text()[-3000:])
            time.sleep(0.1)  # polling a socket for readiness
    yield base
    proc.terminate()
    try:
        proc.wait(timeout=10)
    except subprocess.TimeoutExpired:
        proc.kill()
    log.close()


def shot(page, name: str) -> None:
    ARTIFACTS.mkdir(parents=True, exist_ok=True)
    page.screenshot(path=str(ARTIFACTS / f"served_{name}.png"), full_page=False)


def test_token_page_then_the_link_then_a_streamed_grid_csv(served, browser):
    context = browser.new_context(viewport={"width": 1280, "height": 800}, accept_downloads=True)
    page = context.new_page()
    page.set_default_timeout(TIMEOUT_MS)
    errors: list[str] = []
    page.on("pageerror", lambda e: errors.append(str(e)))
    try:
        answer = page.goto(served)
        assert answer.status == 401
        page.get_by_label("access token").wait_for()
        shot(page, "token_page")
        page.fill("#token", TOKEN)
        with page.expect_navigation():
            page.click("button[type=submit]")
        page.wait_for_selector("#graph-window-map")
        # The grid is ready for download once solved (the page's map drawing is the live loop's
        # business and is tested in test_dashboard_browser.py).
        deadline = time.monotonic() + TIMEOUT_MS / 1000
        check = f"{served}download/check/grid.csv?case=tallis_rendezvous"
        while not page.request.get(check).ok:
            assert time.monotonic() < deadline, "the grid was never solved"
            time.sleep(0.2)  # polling the server for a finished job
        assert "token" not in page.url
        shot(page, "dashboard")
        # What the "grid CSV" button's client-side callback does once the check is ok (the
        # button itself waits on the page's live loop, which test_dashboard_browser.py covers):
        # a link to the route, followed with the session's cookie, saved as a download.
        seen: list[str] = []  # for the failure message: what the download link got
        page.on(
            "response",
            lambda r: seen.append(f"{r.status} {r.url}") if "/download/" in r.url else None,
        )
        with page.expect_download(timeout=2 * TIMEOUT_MS) as pending:
            page.evaluate(
                "(url) => { const a = document.createElement('a'); a.href = url;"
                " a.download = ''; document.body.appendChild(a); a.click(); a.remove(); }",
                f"/download/grid.csv{page.evaluate('window.location.search')}",
            )
        download = pending.value
        assert download.failure() is None, (download.failure(), seen)
        assert download.suggested_filename.endswith("_grid.csv")
        head = Path(download.path()).read_text(encoding="utf-8")[:200]
        assert head.startswith("# case_title: Tallis rendezvous")
    except Exception:
        shot(page, "failed")
        raise
    finally:
        context.close()
    assert not errors, errors


def test_another_site_cannot_frame_the_dashboard(served, browser):
    context = browser.new_context()
    page = context.new_page()
    page.set_default_timeout(TIMEOUT_MS)
    console: list[str] = []
    page.on("console", lambda m: console.append(m.text))
    try:
        page.set_content(f'<iframe id="f" src="{served}?token={TOKEN}"></iframe>')
        page.wait_for_timeout(3000)  # the frame's refusal is logged when its answer arrives
        frame = page.frame_locator("#f")
        assert frame.locator("#graph-window-map").count() == 0
        assert any("frame" in text.lower() for text in console), console
    finally:
        context.close()


if os.environ.get("ARCWINDOW_SKIP_BROWSER"):  # pragma: no cover - a local convenience
    pytestmark = [pytest.mark.browser, pytest.mark.skip(reason="ARCWINDOW_SKIP_BROWSER")]
