"""Dashboard speed and steadiness: server time of a click and of a redraw, app start, many
viewers at once, and a soak of viewers changing their views on a deliberately slowed server.

Callbacks are timed through the app's own HTTP endpoint (Flask's test client: Dash's dispatch,
the service, the figure builders and the JSON encoding, no network), with the requests a browser
sends. Baselines, measured in the same run:

* click: the same updates where the window map is rebuilt and resent in full instead of
  patched (what the page would cost without ``dash.Patch``);
* metric change on a cached grid: the same, full map against the patch;
* app start: a one-line Dash app on the same WSGI server, started the same way;
* 20 viewers: one viewer alone, the same request mix (ratio of the 95th-percentile latencies).

Ratios are baseline / ours (above 1: ours is faster).

The soak (:func:`_soak_lines`) runs 20 simulated viewers for 60 s against a server whose grid
jobs and refinements are slowed down (``ARCWINDOW_TEST_SLOWDOWN``), each changing its view at
random (cells, metrics, steps, revolutions and branches, date windows) while the page's own
loop runs (poll, redraw on a new status). At the end every viewer waits for its view to settle
and is checked: its map must be the map of its final view (a stale view is counted), with no
error response on the way; then the server's CPU must fall back to idle within 5 s, and its
memory growth is reported.
"""

from __future__ import annotations

import base64
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
import uuid
from pathlib import Path

import numpy as np

from app.bench import BenchLine

ROOT = Path(__file__).resolve().parents[2]
SECTION = "dashboard"
CLICKS_FULL, CLICKS_QUICK = 30, 8
VIEWERS = 20
THINK_S = (0.5, 1.5)  # seconds a simulated viewer looks before the next action
LOAD_SECONDS_FULL, LOAD_SECONDS_QUICK = 30.0, 4.0
LARGE_GRID = 1000  # per axis, full size only: a grid that must be decimated for display
SOAK_SECONDS_FULL, SOAK_SECONDS_QUICK = 60.0, 6.0
SOAK_VIEWERS_QUICK = 4
SOAK_SLOWDOWN = "grid=1.5,refine=1.5"
SOAK_SETTLE_S = 120.0  # a viewer's last view must settle within this long after its last action
IDLE_CPU_FRACTION = 0.05  # of one core, over one second
IDLE_WITHIN_S = 5.0


# ---------------------------------------------------------------------------------------------
# A minimal Dash client: the requests the page sends, built from the app's own callback list


class DashClient:
    """Builds and posts ``/_dash-update-component`` requests like the browser does, and runs
    the window page's loop: a new grid status redraws the map and the selection; the poll
    moves the status on (the page copies a polled status that is for its current view).

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
        self.values: dict[str, object] = {"store-viewer-id.data": uuid.uuid4().hex}
        self.statuses: list[int] = []
        self.failures: list[str] = []  # "<status> <callback>" of each answer other than 200

    @staticmethod
    def _name(dep: dict) -> str:
        return dep["output"].strip(".").split("...")[0].split("@")[0]

    def call(self, first_output: str, changed: list[str]) -> tuple[int, dict | None]:
        """Run the callback whose first output is ``first_output`` with ``changed`` inputs."""
        dep = self._deps[first_output]
        outputs = []
        for part in dep["output"].strip(".").split("..."):
            component, _, prop = part.rpartition(".")
            outputs.append({"id": component, "property": prop.split("@")[0]})

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
        self.statuses.append(status)
        if status != 200:
            self.failures.append(f"{status} {first_output}")
        if status == 200 and reply:
            for component, props in reply.get("response", {}).items():
                for prop, value in props.items():
                    if not (isinstance(value, dict) and "__dash_patch_update" in value):
                        self.values[f"{component}.{prop}"] = value
                        if prop == "value" and f"{component}.drag_value" in self.values:
                            # a slider given a value copies it to its drag value (dcc's own
                            # effect in the browser)
                            self.values[f"{component}.drag_value"] = value
        return status, reply

    # The page's steps ---------------------------------------------------------------------
    def sync(self, changed: str, redraw: bool = True) -> int:
        """The view callback; with ``redraw``, the map and the selection follow a new status
        (as the page does)."""
        before = self.values.get("store-grid-status.data")
        status, reply = self.call("store-view-state.data", [changed])
        self.accept(reply)
        if redraw and status == 200 and self.values.get("store-grid-status.data") != before:
            self.redraw()
        return status

    def draw_map(self) -> int:
        return self.call("graph-window-map.figure", ["store-grid-status.data"])[0]

    def draw_selection(self) -> int:
        return self.call("graph-arc-view.figure", ["store-grid-status.data"])[0]

    def redraw(self) -> list[int]:
        return [self.draw_map(), self.draw_selection()]

    def poll(self, changed: str = "interval-grid-poll.n_intervals") -> int:
        """One poll; a status it moved on for the current view redraws (as the page does)."""
        self.values["interval-grid-poll.n_intervals"] = (
            int(self.values.get("interval-grid-poll.n_intervals") or 0) + 1
        )
        status, reply = self.call("store-grid-polled.data", [changed])
        if self.accept(reply):
            self.redraw()
        return status

    def accept(self, reply: dict | None) -> bool:
        """Apply a view or poll answer as the page does (``acceptGridAnswer`` in
        assets/arcwindow.js): only for the current view; True if it moved the status on."""
        answer = ((reply or {}).get("response") or {}).get("store-grid-polled", {}).get("data")
        current = self.values.get("store-grid-status.data")
        view = current.get("view", "") if isinstance(current, dict) else ""
        if not isinstance(answer, dict) or answer.get("view") != view:
            return False
        poll_ms = answer.get("poll_ms")
        self.values["interval-grid-poll.disabled"] = not isinstance(poll_ms, int)
        if isinstance(poll_ms, int):
            self.values["interval-grid-poll.interval"] = poll_ms
        from app.dashboard.pages.window_page import PROGRESS_OUTPUTS

        for name, value in (answer.get("progress") or {}).items():
            if name in PROGRESS_OUTPUTS:
                component, prop = PROGRESS_OUTPUTS[name]
                self.values[f"{component}.{prop}"] = value
        status = answer.get("status")
        if isinstance(status, dict) and status != current:
            self.values["store-grid-status.data"] = status
            return True
        return False

    @property
    def polling(self) -> bool:
        return not self.values.get("interval-grid-poll.disabled", True)

    @property
    def poll_interval_s(self) -> float:
        return float(self.values.get("interval-grid-poll.interval") or 300) / 1000.0

    def settle(self, timeout_s: float) -> bool:
        """Poll as the page does until nothing more changes; False if it never settled."""
        deadline = time.monotonic() + timeout_s
        while self.polling:
            if time.monotonic() > deadline:
                return False
            time.sleep(self.poll_interval_s)
            self.poll()
        return True

    def poll_shortlist(self) -> int:
        return self.call("div-shortlist-table.children", ["interval-shortlist-poll.n_intervals"])[0]

    def open_page(self, search: str = "") -> list[int]:
        self.values["store-page-query.data"] = search
        self.values.pop("store-grid-status.data", None)
        return [self.sync("store-page-query.data")]

    def click(self, x_ms: float, y_ms: float) -> list[int]:
        self.values["graph-window-map.clickData"] = {"points": [{"x": x_ms, "y": y_ms}]}
        return [self.sync("graph-window-map.clickData")]


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
            with urllib.request.urlopen(request, timeout=120) as response:
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


def _cells(service, view_search: str, count: int, seed: int = 7) -> list[tuple[float, float]]:
    """Plot coordinates (ms) of random grid nodes of a view's case."""
    from app.dashboard.display_data import display_ms
    from solver.window.grid import grid_axes

    _, case, _ = service.view_from_url(view_search)
    dep, arr = grid_axes(case)
    rng = random.Random(seed)
    return [
        (
            float(display_ms(dep[rng.randrange(len(dep))])),
            float(display_ms(arr[rng.randrange(len(arr))])),
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
    from app.dashboard import Settings, WindowService, create_app
    from app.dashboard.slowdown import Slowdown

    settings = Settings.resolve(folder / "cache", folder / "data", folder.parent / "cases")
    service = WindowService(settings, slowdown=Slowdown())
    app = create_app(service=service)
    deps = app.server.test_client().get("/_dash-dependencies").get_json()
    client = DashClient(_test_client_transport(app), deps)
    search = f"?case={case_id}"
    client.open_page(search)  # solves the grid; everything after this is a cached grid
    client.settle(300.0)
    client.open_page(search)
    client.settle(300.0)
    cells = _cells(service, search, 2 * clicks)

    def without_map(action):
        # The same requests from a page that has no map to patch: the map is resent whole.
        client.values["store-map-shown.data"] = None
        return action()

    ours, naive = [], []
    for (x, y), (u, v) in zip(cells[::2], cells[1::2], strict=True):
        ours.append(_timed(lambda x=x, y=y: client.click(x, y) + client.statuses[-2:]))
        naive.append(
            _timed(lambda u=u, v=v: without_map(lambda: client.click(u, v) + client.statuses[-2:]))
        )
    click_ms, naive_ms = 1e3 * statistics.median(ours), 1e3 * statistics.median(naive)

    metric_ours, metric_naive = [], []
    # The map metrics the case offers, kilograms included where it has a spacecraft mass (a
    # metric where more is better: the scale turns over and cells without mass are patched).
    offered = service.map_metrics(service.view_from_url(search)[1])
    rotation = ("vinf_arrival_km_s", "delivered_mass_kg", "dv_total_km_s", "c3_km2_s2")
    for metric in tuple(m for m in rotation if m in offered) * 2:
        client.values["dropdown-metric.value"] = metric

        def change():
            return [client.sync("dropdown-metric.value", redraw=False), client.draw_map()]

        metric_ours.append(_timed(change))
        client.draw_selection()  # the page redraws it beside the map (not timed)
        client.values["dropdown-metric.value"] = "dla_deg"
        client.sync("dropdown-metric.value")
        client.values["dropdown-metric.value"] = metric
        metric_naive.append(_timed(lambda: without_map(change)))
        client.draw_selection()
    redraw_ms = 1e3 * statistics.median(metric_ours)
    redraw_naive_ms = 1e3 * statistics.median(metric_naive)
    service.shutdown()
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
            "view update with its grid status, map markers patched, arc view + family chart + "
            "details; baseline: the same requests with the whole map rebuilt and resent",
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
            "range, cells without a value, limit line, markers; the selection redrawn beside "
            "it, not counted) over " + ", ".join(m for m in rotation if m in offered) + "; "
            "baseline: the whole map figure rebuilt and resent",
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
    env.pop("ARCWINDOW_TEST_SLOWDOWN", None)
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

    def step(action, kind="action"):
        start = time.perf_counter()
        try:
            result = action()
            codes = result if isinstance(result, list) else [result]
        except Exception:  # a dropped connection counts as an error response
            codes = [0]
        record(time.perf_counter() - start, codes, kind)

    step(
        lambda: [*client.open_page("?case=tallis_rendezvous"), client.settle(60.0) and 200],
        "page",
    )
    while time.perf_counter() < stop_at:
        time.sleep(rng.uniform(*THINK_S))  # a viewer looks at the result before acting again
        roll = rng.random()
        if roll < 0.6:
            x, y = rng.choice(cells)
            step(lambda x=x, y=y: client.click(x, y))
        elif roll < 0.8:
            client.values["dropdown-metric.value"] = rng.choice(
                ["c3_km2_s2", "vinf_arrival_km_s", "dv_total_km_s", "delivered_mass_kg"]
            )
            step(lambda: [client.sync("dropdown-metric.value")])
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
    from app.dashboard import Settings, WindowService
    from app.dashboard.slowdown import Slowdown

    port = _free_port()
    env = dict(os.environ)
    env.pop("ARCWINDOW_TEST_SLOWDOWN", None)
    proc, _ = _start(_serve_command(port, folder), port, env)
    base = f"http://127.0.0.1:{port}"
    try:
        with urllib.request.urlopen(base + "/_dash-dependencies", timeout=10) as response:
            deps = json.loads(response.read())
        service = WindowService(
            Settings.resolve(folder / "cache", folder / "data"), slowdown=Slowdown()
        )
        cells = _cells(service, "?case=tallis_rendezvous", 200)
        service.shutdown()
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
            f"first page loads at once (page loop until settled) took up to "
            f"{many['page_max_s']:.1f} s; baseline: one viewer alone ({one['actions']} actions, "
            f"{one['errors']} errors)",
        )
    ]


# ---------------------------------------------------------------------------------------------
# The soak: random view changes on a slowed server


def _decode(values) -> np.ndarray:
    """A figure array as sent to the browser (a list, or plotly's base64 typed-array spec)."""
    if isinstance(values, dict) and "bdata" in values:
        dtype = {"f8": np.float64, "f4": np.float32, "i4": np.int32}[values["dtype"]]
        return np.frombuffer(base64.b64decode(values["bdata"]), dtype=dtype)
    return np.asarray(values, dtype=float)


def stale_reason(client: DashClient, catalogue) -> str:
    """Why a viewer's page does not show its view's map ("" when it does).

    The page's records must agree (the grid status, what the map shows and the view are for the
    same view query, and the map shows what the status says) and the map's axes must be the
    axes of the view's case, as the engine makes them.
    """
    from app.dashboard.display_data import display_indices, display_ms
    from app.dashboard.view_state import ViewState, to_query
    from solver.window.grid import grid_axes

    view = ViewState.from_dict(client.values.get("store-view-state.data"))
    query = to_query(view)
    status = client.values.get("store-grid-status.data") or {}
    shown = client.values.get("store-map-shown.data") or {}
    if status.get("view") != query:
        return f"grid status for {status.get('view')!r}, view {query!r}"
    if shown.get("view") != query:
        return f"map shows {shown.get('kind')} for {shown.get('view')!r}, view {query!r}"
    if status.get("phase") in ("failed", "cancelled"):
        return "" if shown.get("kind") == "error" else f"error not shown ({shown.get('kind')})"
    if status.get("phase") != "ready" or shown.get("kind") != "full":
        return f"status {status.get('phase')}, map {shown.get('kind')}"
    if shown.get("best") != status.get("best"):
        return f"best arc {shown.get('best')} on the map, {status.get('best')} in the status"
    if status.get("best") == "node":
        return "the refined best arc never arrived"
    figure = client.values.get("graph-window-map.figure") or {}
    heat = (figure.get("data") or [{}])[0]
    x = _decode(heat.get("x", []))
    dep, _ = grid_axes(catalogue.effective(view))
    want = display_ms(dep[display_indices(len(dep))])
    if len(x) != len(want) or abs(float(x[0]) - float(want[0])) > 1000.0:
        return f"map axes {len(x)} departures from {x[:1]}, view {len(want)} from {want[:1]}"
    return ""


def _soak_viewer(base_url, deps, stop_at, seed, record, finals):
    rng = random.Random(seed)
    client = DashClient(_http_transport(base_url), deps)
    client.open_page(rng.choice(["?case=tallis_rendezvous", "?case=vesper_venus_orbiter"]))
    actions = 0

    def act():
        roll = rng.random()
        if roll < 0.35:  # a cell
            heat = ((client.values.get("graph-window-map.figure") or {}).get("data") or [{}])[0]
            x, y = _decode(heat.get("x", [])), _decode(heat.get("y", []))
            if len(x) and len(y):
                client.click(float(rng.choice(x)), float(rng.choice(y)))
        elif roll < 0.5:  # the metric
            client.values["dropdown-metric.value"] = rng.choice(
                [
                    "c3_km2_s2",
                    "vinf_arrival_km_s",
                    "dv_total_km_s",
                    "dla_deg",
                    "tof_days",
                    "delivered_mass_kg",
                ]
            )
            client.sync("dropdown-metric.value")
        elif roll < 0.7:  # a step: a new grid, solved slowly
            key = rng.choice(["input-dstep.value", "input-astep.value"])
            client.values[key] = rng.choice([1, 2, 3, 4, 5])
            client.sync(key)
        elif roll < 0.8:  # revolutions, then a branch
            client.values["input-revs.value"] = rng.choice([0, 1, 2])
            client.sync("input-revs.value")
            options = client.values.get("dropdown-arc-slot.options") or []
            if options:
                client.values["dropdown-arc-slot.value"] = rng.choice(options)["value"]
                client.sync("dropdown-arc-slot.value")
        elif roll < 0.9:  # drag a date window, then release it
            value = client.values.get("slider-departure-range.value")
            if isinstance(value, list) and len(value) == 2:
                shift = rng.choice([-20.0, -10.0, 10.0, 20.0])
                moved = [value[0] + shift, value[1] + shift]
                client.values["slider-departure-range.drag_value"] = moved
                client.call("graph-window-map.figure", ["slider-departure-range.drag_value"])
                client.values["slider-departure-range.value"] = moved
                client.sync("slider-departure-range.value")
        else:  # a new page on another case
            client.open_page(rng.choice(["?case=tallis_rendezvous", "?case=kestrel_relay_leo"]))

    next_action = time.monotonic() + rng.uniform(0.3, 1.5)
    next_poll = time.monotonic()
    while time.perf_counter() < stop_at:
        now = time.monotonic()
        if now >= next_action:
            act()
            actions += 1
            next_action = time.monotonic() + rng.uniform(0.3, 1.5)
        elif client.polling and now >= next_poll:
            client.poll()
            next_poll = time.monotonic() + client.poll_interval_s
        else:
            time.sleep(0.05)
    settled = client.settle(SOAK_SETTLE_S)
    record(client.statuses, actions)
    finals.append((client, settled))


def _process_cpu_s(pid: int) -> float:
    fields = Path(f"/proc/{pid}/stat").read_text().rsplit(")", 1)[1].split()
    return (int(fields[11]) + int(fields[12])) / os.sysconf("SC_CLK_TCK")


def _process_rss_mb(pid: int) -> float:
    for line in Path(f"/proc/{pid}/status").read_text().splitlines():
        if line.startswith("VmRSS:"):
            return int(line.split()[1]) / 1024.0
    return float("nan")


def _idle_after_s(pid: int, limit_s: float = 30.0) -> float:
    """Seconds until the server's CPU use over one second falls under the idle threshold."""
    start = time.monotonic()
    window: list[tuple[float, float]] = [(start, _process_cpu_s(pid))]
    while time.monotonic() - start < limit_s:
        time.sleep(0.25)
        window.append((time.monotonic(), _process_cpu_s(pid)))
        while len(window) > 1 and window[-1][0] - window[0][0] > 1.0:
            span = window[-1][0] - window[1][0]
            if span < 1.0:
                break
            window.pop(0)
        elapsed = window[-1][0] - window[0][0]
        if elapsed >= 1.0 and (window[-1][1] - window[0][1]) / elapsed < IDLE_CPU_FRACTION:
            return window[0][0] - start
    return float("inf")


def _soak_lines(folder: Path, seconds: float, viewers: int) -> list[BenchLine]:
    from app.dashboard.case_catalogue import CaseCatalogue
    from app.samples import SAMPLE_DIR

    port = _free_port()
    env = dict(os.environ, ARCWINDOW_TEST_SLOWDOWN=SOAK_SLOWDOWN)
    proc, _ = _start(_serve_command(port, folder), port, env)
    base = f"http://127.0.0.1:{port}"
    statuses: list[int] = []
    finals: list = []
    actions = [0]
    lock = threading.Lock()

    def record(codes, n):
        with lock:
            statuses.extend(codes)
            actions[0] += n

    try:
        with urllib.request.urlopen(base + "/_dash-dependencies", timeout=10) as response:
            deps = json.loads(response.read())
        rss_start = _process_rss_mb(proc.pid)
        stop_at = time.perf_counter() + seconds
        threads = [
            threading.Thread(target=_soak_viewer, args=(base, deps, stop_at, k, record, finals))
            for k in range(viewers)
        ]
        for t in threads:
            t.start()
        for t in threads:
            t.join()
        idle_s = _idle_after_s(proc.pid)
        rss_end = _process_rss_mb(proc.pid)
    finally:
        _stop(proc)
    catalogue = CaseCatalogue(SAMPLE_DIR, folder / "data" / "uploaded_cases")
    stale = []
    for client, settled in finals:
        reason = stale_reason(client, catalogue) if settled else "never settled"
        if reason:
            stale.append(reason)
    errors = sum(1 for s in statuses if s != 200)
    failures = [f for client, _ in finals for f in client.failures]
    requests = len(statuses)
    ok = not stale and errors == 0 and idle_s <= IDLE_WITHIN_S
    return [
        BenchLine(
            section=SECTION,
            name=f"soak: {viewers} viewers changing views for {seconds:.0f} s on a slowed server "
            "(stale views, error responses)",
            value=float(len(stale)),
            unit="stale views",
            goal=f"0 stale, 0 errors, CPU idle within {IDLE_WITHIN_S:g} s",
            meets_goal=ok,
            notes=f"{actions[0]} view changes (cells, metrics, steps, revolutions and branches, "
            f"date drags, other cases) and {requests} requests with the page's own poll; "
            f"{errors} error responses; server slowed by {SOAK_SLOWDOWN}; CPU idle "
            f"{idle_s:.1f} s after the last viewer settled; memory {rss_start:.0f} -> "
            f"{rss_end:.0f} MB (+{rss_end - rss_start:.0f} MB)"
            + (f"; stale: {stale[:3]}" if stale else "")
            + (f"; failed: {failures[:3]}" if failures else ""),
            extra={
                "stale": len(stale),
                "errors": errors,
                "requests": requests,
                "actions": actions[0],
                "idle_after_s": idle_s,
                "rss_start_mb": rss_start,
                "rss_end_mb": rss_end,
            },
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
        lines += _soak_lines(
            folder / "soak",
            SOAK_SECONDS_QUICK if quick else SOAK_SECONDS_FULL,
            SOAK_VIEWERS_QUICK if quick else VIEWERS,
        )
        lines += _crowd_lines(folder / "crowd", size)
        lines += _sequence_page_lines(size)
    return lines


def _sequence_page_lines(size: str) -> list[BenchLine]:
    """Candidate selection and leg maps on the sequence page (sequence_page_bench)."""
    from app.bench.sequence_page_bench import run as sequence_page_run

    return sequence_page_run(size)


def _crowd_lines(folder: Path, size: str) -> list[BenchLine]:
    """50 viewers for 60 s: errors, p95 click and page load, server memory (crowd_bench)."""
    from app.bench.crowd_bench import crowd_lines

    return crowd_lines(folder, size)


__all__ = ["DashClient", "run", "stale_reason"]
