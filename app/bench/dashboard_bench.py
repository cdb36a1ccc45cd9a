"""Dashboard speed: server time of a click and of a redraw, app start, and many viewers at once.

Callbacks are timed through the app's own HTTP endpoint (Flask's test client: Dash's dispatch,
the model, the figure builders and the JSON encoding, no network), with the requests a browser
sends. Baselines, measured in the same run:

* click: the same three updates where the window map is rebuilt and resent in full instead of
  patched (what the page would cost without ``dash.Patch``);
* metric change on a cached grid: the same, full map against the patch;
* app start: a one-line Dash app on the same WSGI server, started the same way;
* 20 viewers: one viewer alone, the same request mix (ratio of the 95th-percentile latencies).

Ratios are baseline / ours (above 1: ours is faster).
"""

from __future__ import annotations

import json
import os
import random
import socket
import statistics
import subprocess
import sys
import tempfile
import threading
import time
import urllib.error
import urllib.request
from pathlib import Path

from app.bench import BenchLine

ROOT = Path(__file__).resolve().parents[2]
SECTION = "dashboard"
CLICKS_FULL, CLICKS_QUICK = 30, 8
VIEWERS = 20
THINK_S = (0.5, 1.5)  # seconds a simulated viewer looks before the next action
LOAD_SECONDS_FULL, LOAD_SECONDS_QUICK = 30.0, 4.0
LARGE_GRID = 1000  # per axis, full size only: a grid that must be decimated for display


# ---------------------------------------------------------------------------------------------
# A minimal Dash client: the requests the page sends, built from the app's own callback list


class DashClient:
    """Builds and posts ``/_dash-update-component`` requests like the browser does.

    Parameters
    ----------
    post : callable(path, body_dict) -> (status, json or None)
        Transport (the Flask test client in-process, or HTTP to a live server).
    dependencies : list of dict
        The app's ``/_dash-dependencies``.
    """

    def __init__(self, post, dependencies: list[dict]) -> None:
        self._post = post
        self._deps = {self._name(d): d for d in dependencies if not d.get("clientside_function")}
        self.values: dict[str, object] = {}  # "id.prop" -> value, as the page holds them

    @staticmethod
    def _name(dep: dict) -> str:
        return dep["output"].strip(".").split("...")[0].split("@")[0]

    def call(self, first_output: str, changed: list[str]) -> tuple[int, dict | None]:
        """Run the callback whose first output is ``first_output`` with ``changed`` inputs."""
        dep = self._deps[first_output]
        outputs = []
        for part in dep["output"].strip(".").split("..."):
            component, _, prop = part.rpartition(".")
            outputs.append({"id": component, "property": prop})

        def spec(item):
            key = f"{item['id']}.{item['property']}"
            if item["id"].startswith("{"):  # pattern-matching: no such buttons in the bench
                return []
            return {"id": item["id"], "property": item["property"], "value": self.values.get(key)}

        body = {
            "output": dep["output"],
            "outputs": outputs if len(outputs) > 1 else outputs[0],
            "inputs": [spec(i) for i in dep["inputs"]],
            "state": [spec(s) for s in dep["state"]],
            "changedPropIds": changed,
        }
        status, reply = self._post("/_dash-update-component", body)
        if status == 200 and reply:
            for component, props in reply.get("response", {}).items():
                for prop, value in props.items():
                    if not (isinstance(value, dict) and "__dash_patch_update" in value):
                        self.values[f"{component}.{prop}"] = value
        return status, reply

    # The page's three steps --------------------------------------------------------------
    def sync(self, changed: str) -> int:
        return self.call("location-page-url.search", [changed])[0]

    def draw_map(self) -> int:
        return self.call("graph-window-map.figure", ["store-view-state.data"])[0]

    def draw_selection(self) -> int:
        return self.call("graph-arc-view.figure", ["store-view-state.data"])[0]

    def poll_shortlist(self) -> int:
        return self.call("div-shortlist-table.children", ["interval-shortlist-poll.n_intervals"])[0]

    def open_page(self, search: str = "") -> list[int]:
        self.values["location-page-url.search"] = search
        return [self.sync("location-page-url.search"), self.draw_map(), self.draw_selection()]

    def click(self, x_ms: float, y_ms: float) -> list[int]:
        self.values["graph-window-map.clickData"] = {"points": [{"x": x_ms, "y": y_ms}]}
        return [self.sync("graph-window-map.clickData"), self.draw_map(), self.draw_selection()]


def _test_client_transport(app):
    client = app.server.test_client()

    def post(path, body):
        response = client.post(path, json=body)
        return response.status_code, (response.get_json() if response.status_code == 200 else None)

    return post


def _http_transport(base_url: str):
    def post(path, body):
        request = urllib.request.Request(
            base_url.rstrip("/") + path,
            data=json.dumps(body).encode(),
            headers={"Content-Type": "application/json"},
        )
        try:
            with urllib.request.urlopen(request, timeout=60) as response:
                data = response.read()
                return response.status, (json.loads(data) if data else None)
        except urllib.error.HTTPError as exc:
            return exc.code, None

    return post


# ---------------------------------------------------------------------------------------------
# Cases


def _large_case_text(n: int) -> str:
    from app.bench.grid_bench import bench_case
    from solver.window.case import dumps_toml

    return dumps_toml(bench_case(n, 0))


def _cells(model, view_search: str, count: int, seed: int = 7) -> list[tuple[float, float]]:
    """Plot coordinates (ms) of random grid nodes of a view's case."""
    from app.dashboard.prepare import jd_tdb_to_unix_ms
    from solver.window.grid import grid_axes

    _, case, _ = model.view_from_url(view_search)
    dep, arr = grid_axes(case)
    rng = random.Random(seed)
    return [
        (
            float(jd_tdb_to_unix_ms(dep[rng.randrange(len(dep))])),
            float(jd_tdb_to_unix_ms(arr[rng.randrange(len(arr))])),
        )
        for _ in range(count)
    ]


def _timed(func) -> float:
    start = time.perf_counter()
    statuses = func()
    elapsed = time.perf_counter() - start
    if any(s != 200 for s in (statuses if isinstance(statuses, list) else [statuses])):
        raise RuntimeError(f"a callback failed: {statuses}")
    return elapsed


def _interaction_lines(case_id: str, label: str, clicks: int, folder: Path) -> list[BenchLine]:
    from app.dashboard import DashboardModel, Settings, create_app

    settings = Settings.resolve(folder / "cache", folder / "data", folder.parent / "cases")
    model = DashboardModel(settings)
    app = create_app(model=model)
    deps = app.server.test_client().get("/_dash-dependencies").get_json()
    client = DashClient(_test_client_transport(app), deps)
    search = f"?case={case_id}"
    client.open_page(search)  # solves the grid; everything after this is a cached grid
    client.open_page(search)
    cells = _cells(model, search, clicks)

    def without_map(action):
        # The same requests from a page that has no map to patch: the map is resent whole.
        client.values["store-map-shown.data"] = None
        return action()

    ours, naive = [], []
    for x, y in cells:
        ours.append(_timed(lambda x=x, y=y: client.click(x, y)))
        naive.append(_timed(lambda x=x, y=y: without_map(lambda: client.click(x, y))))
    click_ms, naive_ms = 1e3 * statistics.median(ours), 1e3 * statistics.median(naive)

    metric_ours, metric_naive = [], []
    for metric in ("vinf_arrival_km_s", "dv_total_km_s", "c3_km2_s2") * 2:
        client.values["dropdown-metric.value"] = metric
        change = lambda: [client.sync("dropdown-metric.value"), client.draw_map()]  # noqa: E731
        metric_ours.append(_timed(change))
        client.values["dropdown-metric.value"] = "dla_deg"
        client.sync("dropdown-metric.value")
        client.values["dropdown-metric.value"] = metric
        metric_naive.append(_timed(lambda change=change: without_map(change)))
    redraw_ms = 1e3 * statistics.median(metric_ours)
    redraw_naive_ms = 1e3 * statistics.median(metric_naive)
    model.shutdown()
    return [
        BenchLine(
            section=SECTION,
            name=f"cell click to the three updated views, server time, {label}",
            value=click_ms,
            unit="ms",
            baseline_value=naive_ms,
            ratio=naive_ms / click_ms,
            goal="<= 150 ms",
            meets_goal=click_ms <= 150.0,
            notes=f"median of {len(ours)} clicks on random cells (max {1e3 * max(ours):.0f} ms): "
            "view update, map markers patched, arc view + family chart + details; baseline: the "
            "same requests with the whole map rebuilt and resent",
        ),
        BenchLine(
            section=SECTION,
            name=f"metric change on a cached grid, server time, {label}",
            value=redraw_ms,
            unit="ms",
            baseline_value=redraw_naive_ms,
            ratio=redraw_naive_ms / redraw_ms,
            goal="<= 100 ms",
            meets_goal=redraw_ms <= 100.0,
            notes="view update and the map's new metric as a patch (values, contours, colour "
            "range, markers); baseline: the whole map figure rebuilt and resent",
        ),
    ]


# ---------------------------------------------------------------------------------------------
# Servers in subprocesses


def _free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


_BARE_APP = """
import sys, waitress
from dash import Dash, html
app = Dash(__name__)
app.layout = html.Div("hello")
waitress.serve(app.server, host="127.0.0.1", port=int(sys.argv[1]), threads=8)
"""


def _start(command: list[str], port: int, env: dict) -> tuple[subprocess.Popen, float]:
    """Start a server; seconds until both the page and its layout answer 200."""
    start = time.perf_counter()
    proc = subprocess.Popen(
        command, cwd=ROOT, env=env, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL
    )
    base = f"http://127.0.0.1:{port}"
    while True:
        try:
            for path in ("/", "/_dash-layout"):
                with urllib.request.urlopen(base + path, timeout=5) as response:
                    response.read()
            return proc, time.perf_counter() - start
        except OSError:
            if proc.poll() is not None or time.perf_counter() - start > 60:
                proc.kill()
                raise RuntimeError(f"server did not start: {command}") from None
            time.sleep(0.02)  # polling the socket, nothing to wait on


def _stop(proc: subprocess.Popen) -> None:
    proc.terminate()
    try:
        proc.wait(timeout=10)
    except subprocess.TimeoutExpired:
        proc.kill()


def _serve_command(port: int, folder: Path) -> list[str]:
    return [
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
    ]


def _start_lines(folder: Path) -> list[BenchLine]:
    env = dict(os.environ)
    port = _free_port()
    proc, ours = _start(_serve_command(port, folder), port, env)
    _stop(proc)
    folder.mkdir(parents=True, exist_ok=True)
    bare_file = folder / "bare_app.py"
    bare_file.write_text(_BARE_APP)
    port = _free_port()
    proc, bare = _start([sys.executable, str(bare_file), str(port)], port, env)
    _stop(proc)
    return [
        BenchLine(
            section=SECTION,
            name="app start to first page (arcwindow serve, page and layout answered)",
            value=ours,
            unit="s",
            baseline_value=bare,
            ratio=bare / ours,
            goal="<= 3 s",
            meets_goal=ours <= 3.0,
            notes="a fresh Python process each time; baseline: a one-line Dash app on waitress",
        )
    ]


def _viewer_loop(base_url, deps, cells, stop_at, record, seed):
    rng = random.Random(seed)
    client = DashClient(_http_transport(base_url), deps)
    statuses = []

    def step(action, kind="action"):
        start = time.perf_counter()
        try:
            result = action()
            codes = result if isinstance(result, list) else [result]
        except Exception:  # a dropped connection counts as an error response
            codes = [0]
        record(time.perf_counter() - start, codes, kind)
        statuses.extend(codes)

    step(lambda: client.open_page("?case=tallis_rendezvous"), "page")
    while time.perf_counter() < stop_at:
        time.sleep(rng.uniform(*THINK_S))  # a viewer looks at the result before acting again
        roll = rng.random()
        if roll < 0.6:
            x, y = rng.choice(cells)
            step(lambda x=x, y=y: client.click(x, y))
        elif roll < 0.8:
            client.values["dropdown-metric.value"] = rng.choice(
                ["c3_km2_s2", "vinf_arrival_km_s", "dv_total_km_s"]
            )
            step(lambda: [client.sync("dropdown-metric.value"), client.draw_map()])
        else:
            step(client.poll_shortlist)


def _load(base_url: str, deps, cells, viewers: int, seconds: float) -> dict:
    latencies: list[float] = []
    pages: list[float] = []
    errors = [0]
    lock = threading.Lock()

    def record(elapsed, codes, kind):
        with lock:
            (pages if kind == "page" else latencies).append(elapsed)
            errors[0] += sum(1 for c in codes if c != 200)

    stop_at = time.perf_counter() + seconds
    threads = [
        threading.Thread(target=_viewer_loop, args=(base_url, deps, cells, stop_at, record, k))
        for k in range(viewers)
    ]
    for t in threads:
        t.start()
    for t in threads:
        t.join()
    latencies.sort()
    return {
        "page_max_s": max(pages) if pages else float("nan"),
        "actions": len(latencies),
        "errors": errors[0],
        "p50_s": latencies[len(latencies) // 2] if latencies else float("nan"),
        "p95_s": latencies[int(0.95 * (len(latencies) - 1))] if latencies else float("nan"),
    }


def _viewer_lines(folder: Path, seconds: float) -> list[BenchLine]:
    from app.dashboard import DashboardModel, Settings

    port = _free_port()
    proc, _ = _start(_serve_command(port, folder), port, dict(os.environ))
    base = f"http://127.0.0.1:{port}"
    try:
        with urllib.request.urlopen(base + "/_dash-dependencies", timeout=10) as response:
            deps = json.loads(response.read())
        model = DashboardModel(Settings.resolve(folder / "cache", folder / "data"))
        cells = _cells(model, "?case=tallis_rendezvous", 200)
        model.shutdown()
        one = _load(base, deps, cells, 1, min(seconds, 10.0))
        many = _load(base, deps, cells, VIEWERS, seconds)
    finally:
        _stop(proc)
    return [
        BenchLine(
            section=SECTION,
            name=f"{VIEWERS} viewers at once for {seconds:.0f} s on loopback, 95th-percentile "
            "action latency",
            value=many["p95_s"],
            unit="s",
            baseline_value=one["p95_s"],
            ratio=one["p95_s"] / many["p95_s"],
            goal="no error responses",
            meets_goal=many["errors"] == 0,
            notes=f"{many['actions']} actions (60% cell clicks, 20% metric changes, 20% "
            f"shortlist polls, {THINK_S[0]:g}-{THINK_S[1]:g} s apart per viewer), "
            f"{many['errors']} error responses, median {1e3 * many['p50_s']:.0f} ms; the 20 "
            f"first page loads at once (3 requests, ~6 MB each) took up to "
            f"{many['page_max_s']:.1f} s; baseline: one viewer alone ({one['actions']} actions, "
            f"{one['errors']} errors)",
        )
    ]


# ---------------------------------------------------------------------------------------------


def run(size: str = "full") -> list[BenchLine]:
    quick = size != "full"
    lines: list[BenchLine] = []
    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(tmp)
        cases = folder / "cases"
        cases.mkdir()
        sample = ROOT / "sample_cases" / "tallis_rendezvous.toml"
        (cases / "tallis_rendezvous.toml").write_text(sample.read_text())
        lines += _interaction_lines(
            "tallis_rendezvous",
            "default case (274 x 425 cells)",
            CLICKS_QUICK if quick else CLICKS_FULL,
            folder / "tallis",
        )
        if not quick:
            (cases / "large.toml").write_text(_large_case_text(LARGE_GRID))
            lines += _interaction_lines(
                "large",
                f"{LARGE_GRID} x {LARGE_GRID} grid (drawn at 600 x 600)",
                CLICKS_FULL,
                folder / "large",
            )
        lines += _start_lines(folder / "start")
        lines += _viewer_lines(
            folder / "viewers", LOAD_SECONDS_QUICK if quick else LOAD_SECONDS_FULL
        )
        lines += _crowd_lines(folder / "crowd", size)
    return lines


def _crowd_lines(folder: Path, size: str) -> list[BenchLine]:
    """50 viewers for 60 s: errors, p95 click and page load, server memory (crowd_bench)."""
    from app.bench.crowd_bench import crowd_lines

    return crowd_lines(folder, size)
