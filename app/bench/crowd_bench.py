"""A crowd on one served dashboard: 50 simulated viewers for 60 s on loopback.

Part of ``arcwindow bench --section dashboard``. A real ``arcwindow serve`` runs in its own
process; each viewer is a thread sending the page's own requests over HTTP (the
``DashClient`` of :mod:`app.bench.dashboard_bench`): it loads the page (the view sync, the map
and the selected arc's views: about 6 MB), then, 0.5 to 1.5 s apart, clicks cells (60 %),
changes the metric (15 %), polls the shortlist (15 %) or loads the page again (10 %).

Reported: error responses (goal 0), the 95th-percentile latency of a cell click and of a page
load, each against one viewer alone measured first on the same server (the baseline), and the
server's resident memory at the end against the start (the start taken after a first crowd of
15 s has warmed every request thread and memo up; goal: within 20 %).
"""

from __future__ import annotations

import json
import os
import random
import threading
import time
import urllib.request
from pathlib import Path

from app.bench import BenchLine
from app.bench.dashboard_bench import (
    SECTION,
    DashClient,
    _cells,
    _free_port,
    _http_transport,
    _serve_command,
    _start,
    _stop,
)

CROWD_VIEWERS = 50
CROWD_SECONDS_FULL, CROWD_SECONDS_QUICK = 60.0, 5.0
CROWD_VIEWERS_QUICK = 8
ALONE_SECONDS = 10.0
WARM_UP_SECONDS = 15.0
THINK_S = (0.5, 1.5)
CASE_SEARCH = "?case=tallis_rendezvous"
MEMORY_GOAL = 1.20


def _rss_bytes(pid: int) -> int:
    """Resident memory of a process, bytes (Linux ``/proc``; 0 elsewhere)."""
    try:
        with open(f"/proc/{pid}/status") as status:
            for line in status:
                if line.startswith("VmRSS:"):
                    return int(line.split()[1]) * 1024
    except OSError:
        pass
    return 0


def _percentile(values: list[float], fraction: float) -> float:
    if not values:
        return float("nan")
    ordered = sorted(values)
    return ordered[min(len(ordered) - 1, int(fraction * (len(ordered) - 1) + 0.5))]


class _Tally:
    """Latencies by kind and error responses, shared by the viewer threads."""

    def __init__(self) -> None:
        self.lock = threading.Lock()
        self.latencies: dict[str, list[float]] = {"page": [], "click": [], "metric": [], "poll": []}
        self.errors = 0
        self.requests = 0

    def record(self, kind: str, elapsed: float, codes: list[int]) -> None:
        with self.lock:
            self.latencies[kind].append(elapsed)
            self.requests += len(codes)
            self.errors += sum(1 for code in codes if code != 200)


def _viewer(base_url: str, deps, cells, stop_at: float, tally: _Tally, seed: int) -> None:
    rng = random.Random(seed)
    client = DashClient(_http_transport(base_url), deps)

    def timed(kind: str, action) -> None:
        # Every request the action sent counts, the redraws that follow a new view included.
        sent = len(client.statuses)
        start = time.perf_counter()
        try:
            action()
            codes = client.statuses[sent:] or [0]
        except Exception:  # a dropped or refused connection is an error response
            codes = [*client.statuses[sent:], 0]
        tally.record(kind, time.perf_counter() - start, codes)

    timed("page", lambda: client.open_page(CASE_SEARCH))
    while time.perf_counter() < stop_at:
        time.sleep(rng.uniform(*THINK_S))  # the viewer looks at the answer before acting again
        roll = rng.random()
        if roll < 0.60:
            x, y = rng.choice(cells)
            timed("click", lambda x=x, y=y: client.click(x, y))
        elif roll < 0.75:
            client.values["dropdown-metric.value"] = rng.choice(
                ["c3_km2_s2", "vinf_arrival_km_s", "dv_total_km_s"]
            )
            timed("metric", lambda: [client.sync("dropdown-metric.value"), client.draw_map()])
        elif roll < 0.90:
            timed("poll", client.poll_shortlist)
        else:
            client.values.clear()  # a reload starts from nothing, as a new tab does
            timed("page", lambda: client.open_page(CASE_SEARCH))


def _crowd(base_url: str, deps, cells, viewers: int, seconds: float) -> _Tally:
    tally = _Tally()
    stop_at = time.perf_counter() + seconds
    threads = [
        threading.Thread(target=_viewer, args=(base_url, deps, cells, stop_at, tally, 1000 + k))
        for k in range(viewers)
    ]
    for thread in threads:
        thread.start()
    for thread in threads:
        thread.join()
    return tally


def crowd_lines(folder: Path, size: str = "full") -> list[BenchLine]:
    """The crowd's figures (see the module docstring)."""
    from app.dashboard import Settings, WindowService

    quick = size != "full"
    viewers = CROWD_VIEWERS_QUICK if quick else CROWD_VIEWERS
    seconds = CROWD_SECONDS_QUICK if quick else CROWD_SECONDS_FULL
    port = _free_port()
    proc, _ = _start(_serve_command(port, folder), port, dict(os.environ))
    base = f"http://127.0.0.1:{port}"
    try:
        with urllib.request.urlopen(base + "/_dash-dependencies", timeout=30) as response:
            deps = json.loads(response.read())
        service = WindowService(Settings.resolve(folder / "cache", folder / "data"))
        cells = _cells(service, CASE_SEARCH, 200)
        service.shutdown()
        alone = _crowd(base, deps, cells, 1, min(seconds, ALONE_SECONDS))  # solves the grid
        # A first crowd warms the server up (every request thread has served a page, the
        # memos are full); memory is compared from there, so growth means a leak.
        _crowd(base, deps, cells, viewers, min(seconds, WARM_UP_SECONDS))
        start_rss = _rss_bytes(proc.pid)
        crowd = _crowd(base, deps, cells, viewers, seconds)
        time.sleep(1.0)  # let the last answers leave the server's buffers
        end_rss = _rss_bytes(proc.pid)
    finally:
        _stop(proc)
    growth = end_rss / start_rss if start_rss else float("nan")
    counts = {kind: len(values) for kind, values in crowd.latencies.items()}
    summary = (
        f"{viewers} viewers for {seconds:.0f} s: {crowd.requests} requests, {crowd.errors} error "
        f"responses; {counts['click']} clicks, {counts['page']} page loads, {counts['metric']} "
        f"metric changes, {counts['poll']} shortlist polls ({THINK_S[0]:g}-{THINK_S[1]:g} s "
        "apart per viewer)"
    )
    lines = []
    for kind, label in (("click", "cell click"), ("page", "page load")):
        ours = _percentile(crowd.latencies[kind], 0.95)
        baseline = _percentile(alone.latencies[kind], 0.95)
        lines.append(
            BenchLine(
                section=SECTION,
                name=f"{viewers} viewers at once for {seconds:.0f} s on loopback, "
                f"95th-percentile {label}",
                value=ours,
                unit="s",
                baseline_value=baseline,
                ratio=baseline / ours if ours else None,
                goal="no error responses",
                meets_goal=crowd.errors == 0,
                notes=f"{summary}; median {1e3 * _percentile(crowd.latencies[kind], 0.5):.0f} "
                f"ms; baseline: one viewer alone on the same server "
                f"({len(alone.latencies[kind])} samples)",
            )
        )
    lines.append(
        BenchLine(
            section=SECTION,
            name=f"server memory after {viewers} viewers for {seconds:.0f} s, end / start",
            value=growth,
            unit="x",
            goal=f"<= {MEMORY_GOAL:.2f}",
            meets_goal=growth <= MEMORY_GOAL,
            notes=f"resident memory {start_rss / 2**20:.0f} MiB after a warm-up crowd (grid "
            f"solved and cached, every request thread used), {end_rss / 2**20:.0f} MiB at the end",
            extra={"start_rss_bytes": start_rss, "end_rss_bytes": end_rss},
        )
    )
    return lines


__all__ = ["CROWD_SECONDS_FULL", "CROWD_VIEWERS", "crowd_lines"]
