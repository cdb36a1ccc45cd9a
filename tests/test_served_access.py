"""A served session's defences: the access token, the Host check, same-origin writes, framing and
other headers, the request body limit, POST for every state change, the grid download route
and the per-request grid budget.

Everything runs through the app's own WSGI server object (Flask's test client), with the
requests a browser or another site's page would send.
"""

from __future__ import annotations

import subprocess
import sys
import tracemalloc
from pathlib import Path

import pandas as pd
import pytest

from app.bench.dashboard_bench import DashClient, _test_client_transport
from app.dashboard import Settings, WindowService, create_app
from app.dashboard.access import (
    MAX_REQUEST_BODY_BYTES,
    SECURITY_HEADERS,
    TOKEN_HEADER,
    AccessPolicy,
    is_loopback,
)
from app.dashboard.budget import REQUEST_BYTES_PER_CELL_ARC, request_budget
from solver.files.atomic import verify_checksum
from solver.window.grid import ENV_MAX_CELL_ARCS, check_grid_size

ROOT = Path(__file__).resolve().parents[1]
SAMPLES = ROOT / "sample_cases"
TOKEN = "k3y-for-the-test-session-0123456789"
VIEW = "?case=vesper_venus_orbiter"


@pytest.fixture
def served(tmp_path):
    """An app as `arcwindow serve --host 0.0.0.0 --token ...` builds it."""
    service = WindowService(Settings.resolve(tmp_path / "c", tmp_path / "d", SAMPLES))
    policy = AccessPolicy.for_address("0.0.0.0", 8123, token=TOKEN, allow_hosts=["arc.team"])
    app = create_app(service=service, access=policy)
    yield app, policy
    service.shutdown()


@pytest.fixture
def local(tmp_path):
    """An app as `arcwindow serve` builds it on localhost (no token)."""
    service = WindowService(Settings.resolve(tmp_path / "c", tmp_path / "d", SAMPLES))
    app = create_app(service=service)
    yield app, service
    service.shutdown()


def callback_body(app) -> dict:
    """A real request of the page (the view callback of a page load), built as the page builds
    it (the benchmark's DashClient)."""
    deps = app.server.test_client(use_cookies=False).get(
        "/_dash-dependencies", headers={TOKEN_HEADER: TOKEN}
    )
    assert deps.status_code == 200
    captured: dict = {}

    def capture(path, body):
        captured["body"] = body
        return 599, None

    client = DashClient(capture, deps.get_json())
    client.values["store-page-query.data"] = VIEW
    client.sync("store-page-query.data", redraw=False)
    return captured["body"]


# ---------------------------------------------------------------------------------------------
# The token


def test_loopback_needs_no_token_and_other_addresses_get_one():
    assert is_loopback("127.0.0.1") and is_loopback("::1") and is_loopback("localhost")
    assert not is_loopback("0.0.0.0") and not is_loopback("192.168.1.20")
    assert AccessPolicy.for_address("127.0.0.1", 8050).token is None
    generated = AccessPolicy.for_address("0.0.0.0", 8050).token
    assert generated and len(generated) >= 40  # 32 random bytes
    assert AccessPolicy.for_address("0.0.0.0", 8050).token != generated  # fresh each start
    with pytest.raises(ValueError, match="16"):
        AccessPolicy.for_address("0.0.0.0", 8050, token="short")


def test_without_the_token_only_a_page_that_asks_for_it(served):
    app, _ = served
    client = app.server.test_client()
    page = client.get("/", headers={"Accept": "text/html"})
    assert page.status_code == 401
    text = page.get_data(as_text=True)
    assert 'name="token"' in text and "_dash-config" not in text and "arcwindow" in text
    for path in ("/_dash-layout", "/_dash-dependencies", "/survey/", "/download/grid.csv"):
        assert client.get(path).status_code == 401, path
    assert client.get("/", query_string={"token": "wrong-token-wrong-token"}).status_code == 401


def test_the_shared_link_sets_a_cookie_and_drops_the_token_from_the_address(served):
    app, policy = served
    client = app.server.test_client()
    first = client.get(f"/{VIEW}&token={TOKEN}")
    assert first.status_code == 303
    assert first.headers["Location"] == f"/{VIEW}"  # the view kept, the token gone
    cookie = first.headers["Set-Cookie"]
    assert cookie.startswith(f"{policy.cookie_name}=") and "HttpOnly" in cookie
    assert "SameSite=Lax" in cookie
    assert client.get("/").status_code == 200  # the cookie carries it from now on
    assert client.get("/_dash-layout").status_code == 200


def test_the_token_page_form_sets_the_cookie_and_returns_only_to_this_server(served):
    app, _ = served
    client = app.server.test_client()
    wrong = client.post("/access", data={"token": "not-it-not-it-not-it", "next": "/"})
    assert wrong.status_code == 401 and "not this session" in wrong.get_data(as_text=True)
    for target, expected in (
        ("/survey/?results=x", "/survey/?results=x"),
        ("//evil.example/", "/"),
        ("https://evil.example/", "/"),
    ):
        answer = app.server.test_client().post("/access", data={"token": TOKEN, "next": target})
        assert answer.status_code == 303 and answer.headers["Location"] == expected
    answer = client.post("/access", data={"token": TOKEN, "next": "/"})
    assert client.get("/").status_code == 200


def test_writes_need_the_token_too(served):
    app, _ = served
    body = callback_body(app)
    client = app.server.test_client(use_cookies=False)
    assert client.post("/_dash-update-component", json=body).status_code == 401
    assert client.post("/survey-open?results=a&target=b").status_code == 401
    granted = client.post("/_dash-update-component", json=body, headers={TOKEN_HEADER: TOKEN})
    assert granted.status_code == 200


# ---------------------------------------------------------------------------------------------
# Host, origin, framing and other headers


@pytest.mark.parametrize(
    ("host", "status"),
    [
        ("localhost:8050", 200),
        ("127.0.0.1:8050", 200),
        ("[::1]:8050", 200),
        ("evil.example", 400),
        ("evil.example:8050", 400),
        ("localhost.evil.example", 400),
    ],
)
def test_foreign_host_is_refused_even_on_localhost(local, host, status):
    app, _ = local
    answer = app.server.test_client().get("/", headers={"Host": host})
    assert answer.status_code == status
    if status == 400:
        assert "_dash-config" not in answer.get_data(as_text=True)


def test_names_the_team_uses_are_accepted(served):
    app, _ = served
    headers = {"Host": "arc.team:8123", TOKEN_HEADER: TOKEN}
    assert app.server.test_client().get("/", headers=headers).status_code == 200
    headers["Host"] = "192.168.4.7:8123"  # an address, not a name: no rebinding possible
    assert app.server.test_client().get("/", headers=headers).status_code == 200


def test_a_write_from_another_site_is_refused_even_on_localhost(local):
    app, _ = local
    body = callback_body(app)
    client = app.server.test_client()
    for origin in ("http://evil.example", "null"):
        answer = client.post("/_dash-update-component", json=body, headers={"Origin": origin})
        assert answer.status_code == 403, origin
    answer = client.post(
        "/_dash-update-component", json=body, headers={"Referer": "http://evil.example/x"}
    )
    assert answer.status_code == 403
    same = client.post("/_dash-update-component", json=body, headers={"Origin": "http://localhost"})
    assert same.status_code == 200


@pytest.mark.parametrize(
    "path", ["/", "/_dash-layout", "/survey/", "/no-such-page", "/assets/arcwindow.css"]
)
def test_framing_is_refused_and_security_headers_are_on_every_answer(local, path):
    app, _ = local
    answer = app.server.test_client().get(path)
    assert answer.headers["X-Frame-Options"] == "DENY"
    assert "frame-ancestors 'none'" in answer.headers["Content-Security-Policy"]
    for name, value in SECURITY_HEADERS.items():
        assert answer.headers[name] == value


def test_request_bodies_over_the_limit_are_refused(local):
    app, _ = local
    client = app.server.test_client()
    big = b"{" + b" " * (MAX_REQUEST_BODY_BYTES + 1) + b"}"
    answer = client.post(
        "/_dash-update-component", data=big, headers={"Content-Type": "application/json"}
    )
    assert answer.status_code == 413
    assert client.get("/").status_code == 200  # and the server goes on serving


def test_opening_a_survey_target_changes_state_only_through_a_callback(local):
    """`GET /survey-open` (the address of earlier versions) only redirects; the case is stored
    by the window page's view callback, a POST, so only this server's own pages can do it."""
    from small_survey import write_small_survey

    app, service = local
    write_small_survey(service.settings.surveys_dir / "s.parquet", targets=2)
    target = pd.read_parquet(service.settings.surveys_dir / "s.parquet")["target"].iloc[0]
    client = app.server.test_client()
    uploads = service.settings.uploads_dir
    read = client.get(f"/survey-open?results=s&target={target}")
    assert read.status_code == 302 and read.headers["Location"].startswith("/?survey=s")
    assert not uploads.exists() or not list(uploads.glob("upload-*.toml"))
    assert client.post(f"/survey-open?results=s&target={target}").status_code == 405
    body = callback_body(app)
    body["inputs"] = [
        {**i, "value": f"?survey=s&target={target}"} if i.get("id") == "store-page-query" else i
        for i in body["inputs"]
    ]
    elsewhere = client.post(
        "/_dash-update-component", json=body, headers={"Origin": "http://evil.example"}
    )
    assert elsewhere.status_code == 403
    assert not uploads.exists() or not list(uploads.glob("upload-*.toml"))
    opened = client.post("/_dash-update-component", json=body)
    assert opened.status_code == 200
    assert len(list(uploads.glob("upload-*.toml"))) == 1


# ---------------------------------------------------------------------------------------------
# Downloads streamed from files


def test_grid_download_streams_a_verified_file_with_the_cli_header(local, tmp_path):
    app, _ = local
    client = DashClient(
        _test_client_transport(app), app.server.test_client().get("/_dash-dependencies").get_json()
    )
    http = app.server.test_client()
    waiting = http.get(f"/download/check/grid.csv{VIEW}")
    assert waiting.status_code == 409 and not waiting.get_json()["ok"]
    client.open_page(VIEW)
    assert client.settle(60.0) and set(client.statuses) == {200}
    search = VIEW + "&metric=c3_km2_s2"  # the page's own address names the same grid
    ready = http.get(f"/download/check/grid.csv{search}")
    assert ready.status_code == 200 and ready.get_json() == {"ok": True, "message": ""}
    answer = http.get(f"/download/grid.csv{search}")
    assert answer.status_code == 200 and answer.is_streamed
    assert answer.headers["Content-Disposition"].startswith("attachment; filename=Vesper")
    text = answer.get_data(as_text=True)
    assert text.startswith("# case_title: Vesper Venus orbiter")
    import io

    from solver.files.export import GRID_COLUMNS

    assert list(pd.read_csv(io.StringIO(text), comment="#", nrows=3).columns) == list(GRID_COLUMNS)
    exported = list((tmp_path / "c" / "exports").glob("*.csv"))
    assert len(exported) == 1 and exported[0].read_text() == text
    verify_checksum(exported[0])
    parquet = http.get(f"/download/grid.parquet{search}")
    assert parquet.status_code == 200 and parquet.data[:4] == b"PAR1"
    assert http.get(f"/download/grid.xlsx{search}").status_code == 404
    assert http.get("/download/grid.csv?case=../../etc/passwd").status_code == 400


def test_grid_button_is_no_longer_built_inside_a_callback(local):
    """The button's only callback runs in the browser: it asks the check route, then follows a
    link to the download route."""
    app, _ = local
    deps = app.server.test_client().get("/_dash-dependencies").get_json()
    on_button = [d for d in deps if "button-download-grid-csv" in str(d["inputs"])]
    assert len(on_button) == 1 and on_button[0].get("clientside_function")
    source = str(app._inline_scripts) + str(on_button[0]["clientside_function"])
    assert "/download/check/grid.csv" in source and "/download/grid.csv" in source


# ---------------------------------------------------------------------------------------------
# The budget of one request


WORST_LINK = (
    "?case=vesper_venus_orbiter&dep=1800-01-01~2199-06-01&arr=1800-01-02~2199-12-31"
    "&dstep=0.000695&astep=0.000695&revs=20"
)


def test_worst_link_is_refused_before_anything_is_allocated(local):
    """The size check counts the dates by arithmetic. It used to build both date axes first: a
    link like this one (210 million dates per axis) cost 3.4 GB before it was refused."""
    _, model = local
    tracemalloc.start()
    try:
        _, case, notes = model.view_from_url(WORST_LINK)
        _, peak = tracemalloc.get_traced_memory()
    finally:
        tracemalloc.stop()
    assert any("cell-arcs" in note for note in notes), notes
    assert peak < 20e6, f"{peak / 1e6:.0f} MB traced"
    assert case.departure_step_days == 1.0  # the case file's own settings, shown instead


def test_size_check_counts_match_the_axes():
    from hypothesis import given, settings
    from hypothesis import strategies as st

    from app.samples import load
    from solver.window.grid import grid_axes

    base = load("vesper_venus_orbiter")

    @settings(max_examples=60, deadline=None)
    @given(
        st.floats(min_value=0.05, max_value=30.0),
        st.floats(min_value=0.05, max_value=30.0),
        st.integers(min_value=0, max_value=2),
    )
    def check(dstep, astep, revs):
        case = base.with_changes(
            **{
                "window.departure_step_days": dstep,
                "window.arrival_step_days": astep,
                "transfer.max_revolutions": revs,
            }
        )
        dep, arr = grid_axes(case)
        assert check_grid_size(case, 10**12) == (len(dep), len(arr), 2 * revs + 1)

    check()


def test_request_budget_sets_the_grid_cap(monkeypatch):
    monkeypatch.delenv(ENV_MAX_CELL_ARCS, raising=False)
    budget = request_budget("1GiB")
    assert budget.max_cell_arcs == 2**30 // REQUEST_BYTES_PER_CELL_ARC
    monkeypatch.setenv(ENV_MAX_CELL_ARCS, "1000")  # an operator's own smaller cap still holds
    assert request_budget("1GiB").max_cell_arcs == 1000


def test_serve_help_states_the_budget_and_the_token():
    text = subprocess.run(
        [sys.executable, "-m", "app.cli", "serve", "--help"],
        cwd=ROOT,
        capture_output=True,
        text=True,
        check=True,
    ).stdout
    flat = " ".join(text.split())
    for phrase in ("--request-budget", "1GiB", "access token", "--token", "--allow-host", "1 MiB"):
        assert phrase in flat, phrase


# ---------------------------------------------------------------------------------------------
# Text from a case in figures


MARKUP = "<a href='https://evil.example'>Ka</a>"


def test_names_from_a_case_show_as_text_in_figures():
    """Plotly reads links and other tags in titles, legends and hover labels; a body named with
    markup must show those characters, not a link."""
    from dataclasses import replace

    from app.dashboard.display_data import arc_scene, map_data
    from app.dashboard.figures import arc_view_figure, window_map_figure
    from solver.window.case import parse_case
    from solver.window.case_bodies import CaseBodies
    from solver.window.cell import solve_cell
    from solver.window.grid import compute_window

    text = (SAMPLES / "kestrel_relay_leo.toml").read_text()
    text = text.replace('"Kestrel-A"', f'"{MARKUP}"')
    case = parse_case(text)
    arcs = solve_cell(case, case.departure_start_jd_tdb, case.departure_start_jd_tdb + 0.08)
    figure = arc_view_figure(arc_scene(case, arcs[0], CaseBodies.of(case)))
    shown = figure.to_json()
    assert "&lt;a href='https://evil.example'&gt;Ka&lt;/a&gt;" in figure.layout.title.text
    assert "<a href" not in shown
    small = case.with_changes(
        **{"window.departure_step_days": 0.05, "window.arrival_step_days": 0.05}
    )
    data = replace(map_data(compute_window(small), "dv_total_km_s", "best"), title=MARKUP)
    assert window_map_figure(data).layout.title.text.startswith("&lt;a href=")


def test_a_live_server_with_a_token_asks_for_it(tmp_path):
    """`arcwindow serve --token` (here on loopback, where a token is optional): the printed link
    carries the token; without it only the token page answers."""
    import socket
    import time
    import urllib.error
    import urllib.request

    with socket.socket() as probe:
        probe.bind(("127.0.0.1", 0))
        port = probe.getsockname()[1]
    command = [sys.executable, "-m", "app.cli", "serve", "--port", str(port), "--token", TOKEN]
    command += ["--cache-dir", str(tmp_path / "c"), "--data-dir", str(tmp_path / "d")]
    log = tmp_path / "serve.log"
    with open(log, "w") as out:
        server = subprocess.Popen(command, cwd=ROOT, stdout=out, stderr=subprocess.STDOUT)
    try:
        base = f"http://127.0.0.1:{port}/"
        deadline = time.monotonic() + 60
        while f"token={TOKEN}" not in log.read_text():
            assert server.poll() is None and time.monotonic() < deadline, log.read_text()
            time.sleep(0.1)
        while True:
            try:
                urllib.request.urlopen(base, timeout=5)
            except urllib.error.HTTPError as exc:
                assert exc.code == 401 and 'name="token"' in exc.read().decode()
                break
            except OSError:
                assert server.poll() is None and time.monotonic() < deadline, log.read_text()
                time.sleep(0.1)
        request = urllib.request.Request(base + "_dash-layout", headers={TOKEN_HEADER: TOKEN})
        with urllib.request.urlopen(request, timeout=10) as answer:
            assert answer.status == 200 and answer.headers["X-Frame-Options"] == "DENY"
        printed = log.read_text()
        assert f"{base}?token={TOKEN}" in printed and "request budget 1 GiB" in printed
    finally:
        server.terminate()
        server.wait(10)
