"""Grid tables for download, streamed from files through a route of their own.

``GET /download/grid.csv?<view query>`` (or ``grid.parquet``) answers with the grid of the view
the query describes (the page's own address query, so a link names the same grid), in the format
of ``arcwindow grid --out``: same columns, same provenance header. The table is written once per
grid and format into ``<cache folder>/exports/`` (block by block, atomically, with its SHA-256,
by :func:`solver.files.export.write_grid`) and sent from that file in pieces
(:func:`flask.send_file`), so a grid of millions of rows costs the server about 100 MB while it is
written and nothing while it is sent, instead of the whole table built in memory inside a
callback. The most recent :data:`EXPORTS_KEPT` tables are kept; older ones are removed.

The page's "grid CSV" button asks ``/download/check/grid.csv?<query>`` first (which writes the
file when needed and answers ``{"ok", "message"}``), then lets the browser fetch the file, so a
grid still being solved gives a message on the page instead of a broken download.
"""

from __future__ import annotations

import threading
from collections import OrderedDict
from pathlib import Path
from urllib.parse import parse_qs

from dash import Dash, Input, Output
from flask import jsonify, request, send_file

from solver.errors import InputError
from solver.files.atomic import DamagedFile, sweep_temporaries, verify_checksum
from solver.window.grid import WindowGrid
from solver.window.provenance import window_cache_key

from .exports import view_stem
from .window_service import WindowService

DOWNLOAD_PATH = "/download/grid.<fmt>"
CHECK_PATH = "/download/check/grid.<fmt>"
FORMATS = {"csv": "text/csv", "parquet": "application/vnd.apache.parquet"}
EXPORTS_KEPT = 8
NOT_READY = "The grid of this view is still being solved; download it once the map is drawn."


class GridExports:
    """Exported grid tables of one server: one file per grid and format, written once."""

    def __init__(self, service: WindowService, folder: Path) -> None:
        self.service = service
        self.folder = Path(folder)
        self._locks: OrderedDict[str, threading.Lock] = OrderedDict()
        self._guard = threading.Lock()

    def _lock(self, name: str) -> threading.Lock:
        with self._guard:
            lock = self._locks.setdefault(name, threading.Lock())
            self._locks.move_to_end(name)
            while len(self._locks) > 4 * EXPORTS_KEPT:
                self._locks.popitem(last=False)
            return lock

    def grid_for(self, search: str) -> tuple[WindowGrid | None, str]:
        """(the view's solved grid or None, the view's file-name stem); InputError for a refused
        view."""
        params = parse_qs(search.lstrip("?"))
        if "survey" in params or "target" in params:  # opening a target stores a case: not here
            raise InputError("link", search[:80], "a view of a case (?case=...), not a target")
        view, case, notes = self.service.view_from_url(search)
        if notes:  # a download is of exactly what the link says, or nothing
            raise InputError("link", notes[0][:200], "a view of this server")
        key = window_cache_key(case)
        grid = self.service.grid(case)
        cache = self.service.grids.cache
        if grid is None and cache is not None:
            hit = cache.get(key)
            if hit is not None:
                grid = WindowGrid.from_arrays(case, hit.arrays, hit.metadata)
        return grid, view_stem(case, view)

    def file_for(self, grid: WindowGrid, fmt: str) -> Path:
        """The grid's table in ``fmt``, written if no verified file holds it yet."""
        from solver.files.export import write_grid

        name = f"{window_cache_key(grid.case)}.{fmt}"
        path = self.folder / name
        with self._lock(name):
            try:
                verify_checksum(path)
            except DamagedFile:
                self.folder.mkdir(parents=True, exist_ok=True)
                write_grid(grid, path)
                self._prune(keep=path)
            path.touch()  # most recently used
        return path

    def _prune(self, keep: Path) -> None:
        sweep_temporaries(self.folder)
        tables = sorted(
            (p for p in self.folder.iterdir() if p.suffix in (".csv", ".parquet") and p != keep),
            key=lambda p: p.stat().st_mtime,
            reverse=True,
        )
        for old in tables[EXPORTS_KEPT - 1 :]:
            for path in (old, old.with_name(old.name + ".sha256")):
                path.unlink(missing_ok=True)


def register(app: Dash, service: WindowService) -> GridExports:
    """Add the download routes to ``app``'s server and route the page's grid button to them."""
    exports = GridExports(service, service.settings.cache_dir / "exports")
    server = app.server

    def prepared(fmt: str):
        if fmt not in FORMATS:
            return None, ("Unknown format: grid.csv or grid.parquet.", 404)
        query = request.query_string.decode("utf-8", "replace")
        try:
            grid, stem = exports.grid_for("?" + query if query else "")
        except InputError as exc:
            return None, (str(exc), 400)
        if grid is None:
            return None, (NOT_READY, 409)
        return (exports.file_for(grid, fmt), stem), None

    @server.route(CHECK_PATH, methods=["GET"])
    def check_grid_download(fmt: str):
        _ready, problem = prepared(fmt)
        if problem is not None:
            return jsonify(ok=False, message=problem[0]), problem[1]
        return jsonify(ok=True, message="")

    @server.route(DOWNLOAD_PATH, methods=["GET"])
    def download_grid(fmt: str):
        ready, problem = prepared(fmt)
        if problem is not None:
            return problem[0] + "\n", problem[1], {"Content-Type": "text/plain; charset=utf-8"}
        path, stem = ready
        return send_file(
            path,
            mimetype=FORMATS[fmt],
            as_attachment=True,
            download_name=f"{stem}_grid.{fmt}",
            max_age=0,
        )

    # The page's "grid CSV" button: check, then let the browser stream the file to disk. The
    # message goes into the downloads' message line directly: a second callback output on it
    # (allow_duplicate) stopped the page's grid poll in Dash 4, so the callback's own output
    # is the button's tooltip, as the page's PNG buttons do.
    app.clientside_callback(
        """async function(clicks) {
            if (!clicks) { return window.dash_clientside.no_update; }
            const query = window.location.search || "";
            const line = document.getElementById("div-message-download");
            let info;
            try {
                const answer = await fetch("/download/check/grid.csv" + query,
                                           {credentials: "same-origin"});
                info = await answer.json();
            } catch (error) {
                info = {ok: false, message: "The download could not start (" + error + ")."};
            }
            if (line) { line.textContent = info.ok ? "" : info.message; }
            if (info.ok) {
                const link = document.createElement("a");
                link.href = "/download/grid.csv" + query;
                link.download = "";
                document.body.appendChild(link);
                link.click();
                link.remove();
            }
            return "Every arc of the grid as CSV (the format of arcwindow grid --out)";
        }""",
        Output("button-download-grid-csv", "title"),
        Input("button-download-grid-csv", "n_clicks"),
        prevent_initial_call=True,
    )
    return exports


__all__ = ["CHECK_PATH", "DOWNLOAD_PATH", "EXPORTS_KEPT", "FORMATS", "GridExports", "register"]
