"""The cases a dashboard offers: the sample files and the TOML files viewers upload.

Uploaded cases are validated with the engine's own parser and kept in the data folder under a
name made from their content hash (``upload-<12 hex>``), so a link that names one works for
every viewer of the server, and uploading the same file twice gives the same case.
"""

from __future__ import annotations

import base64
import binascii
import hashlib
import os
import tempfile
import threading
from collections import OrderedDict
from pathlib import Path

from solver.errors import InputError
from solver.window.case import Case, dumps_toml, load_case, parse_case
from solver.window.grid import check_grid_size

from .state import DEFAULT_CASE_ID, ViewState

MAX_UPLOAD_BYTES = 256 * 1024
UPLOAD_PREFIX = "upload-"
_EFFECTIVE_CACHE_SIZE = 64


class CaseCatalogue:
    """Sample and uploaded cases by id, and the cases that views make of them."""

    def __init__(self, samples_dir: Path, uploads_dir: Path) -> None:
        self.samples_dir = Path(samples_dir)
        self.uploads_dir = Path(uploads_dir)
        self._lock = threading.Lock()
        self._loaded: dict[str, tuple[float, Case]] = {}
        self._effective: OrderedDict[tuple, Case] = OrderedDict()

    # -- listing ---------------------------------------------------------------------------
    def _path(self, case_id: str) -> Path | None:
        if case_id.startswith(UPLOAD_PREFIX):
            path = self.uploads_dir / f"{case_id}.toml"
        else:
            path = self.samples_dir / f"{case_id}.toml"
        return path if path.is_file() else None

    def sample_ids(self) -> list[str]:
        return sorted(p.stem for p in self.samples_dir.glob("*.toml"))

    def upload_ids(self) -> list[str]:
        if not self.uploads_dir.is_dir():
            return []
        files = sorted(self.uploads_dir.glob(f"{UPLOAD_PREFIX}*.toml"), key=os.path.getmtime)
        return [p.stem for p in files]

    def options(self) -> list[dict[str, str]]:
        """Dropdown options: sample cases by title, then uploaded cases."""
        out = []
        for case_id in self.sample_ids():
            try:
                out.append({"value": case_id, "label": self.load(case_id).title})
            except InputError:
                continue  # a broken sample file is left out rather than breaking the page
        for case_id in self.upload_ids():
            try:
                out.append({"value": case_id, "label": f"{self.load(case_id).title} (uploaded)"})
            except InputError:
                continue
        return out

    def default_id(self) -> str:
        ids = self.sample_ids()
        return DEFAULT_CASE_ID if DEFAULT_CASE_ID in ids else (ids[0] if ids else DEFAULT_CASE_ID)

    # -- loading ---------------------------------------------------------------------------
    def load(self, case_id: str) -> Case:
        """The case file ``case_id`` as written (InputError if there is no such case)."""
        path = self._path(case_id)
        if path is None:
            raise InputError("case", case_id, "a sample case name or an uploaded case")
        mtime = path.stat().st_mtime
        with self._lock:
            hit = self._loaded.get(case_id)
            if hit and hit[0] == mtime:
                return hit[1]
        case = load_case(path)
        with self._lock:
            self._loaded[case_id] = (mtime, case)
        return case

    def effective(self, view: ViewState) -> Case:
        """The case a view shows: its file with the view's changes, validated, grid size checked."""
        key = view.case_part()
        with self._lock:
            if key in self._effective:
                self._effective.move_to_end(key)
                return self._effective[key]
        base = self.load(view.case)
        case = base.with_changes(**view.change_dict()) if view.changes else base
        check_grid_size(case)
        with self._lock:
            self._effective[key] = case
            while len(self._effective) > _EFFECTIVE_CACHE_SIZE:
                self._effective.popitem(last=False)
        return case

    # -- uploads ---------------------------------------------------------------------------
    def add_upload(self, filename: str, contents: str) -> str:
        """Validate an uploaded file (a dcc.Upload data URL) and store it; returns its case id.

        Raises
        ------
        InputError
            Not a UTF-8 TOML case, too large, or a case the engine refuses (the message names
            the key and what is accepted).
        """
        name = (filename or "upload")[:120]
        _, _, payload = (contents or "").partition(",")
        try:
            raw = base64.b64decode(payload, validate=True)
        except (binascii.Error, ValueError):
            raise InputError("upload", name, "a TOML case file") from None
        if len(raw) > MAX_UPLOAD_BYTES:
            raise InputError("upload", name, f"a case file under {MAX_UPLOAD_BYTES // 1024} KiB")
        try:
            text = raw.decode("utf-8")
        except UnicodeDecodeError:
            raise InputError("upload", name, "a UTF-8 text TOML case file") from None
        case = parse_case(text, source_path=name)
        check_grid_size(case)
        return self._store(raw)

    def add_case(self, case: Case) -> str:
        """Store a case built by the server (a survey target's window); returns its case id."""
        check_grid_size(case)
        return self._store(dumps_toml(case).encode("utf-8"))

    def _store(self, raw: bytes) -> str:
        """Keep validated case text under its content hash (atomic; the same text, the same id)."""
        case_id = UPLOAD_PREFIX + hashlib.sha256(raw).hexdigest()[:12]
        target = self.uploads_dir / f"{case_id}.toml"
        if not target.exists():
            self.uploads_dir.mkdir(parents=True, exist_ok=True)
            fd, tmp = tempfile.mkstemp(dir=self.uploads_dir, prefix=".upload-", suffix=".tmp")
            with os.fdopen(fd, "wb") as handle:
                handle.write(raw)
            os.replace(tmp, target)
        return case_id
