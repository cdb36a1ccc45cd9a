"""The shortlist: candidate arcs a team keeps during a shared session, stored on disk.

One JSON file in the data folder holds every entry, so every viewer of the server (and a
restarted server) sees the same list. Writers take an exclusive lock on a side file, read the
list, change it and replace the file atomically (temporary file, fsync, ``os.replace``), so
concurrent viewers never lose an entry and readers never see half a file. Readers need no lock.

The page polls :meth:`Shortlist.version` every few seconds and re-reads only when it changed.
"""

from __future__ import annotations

import contextlib
import datetime as dt
import json
import os
import re
import tempfile
import threading
import uuid
from collections.abc import Iterator
from dataclasses import asdict, dataclass, field
from pathlib import Path

try:  # POSIX advisory locks; elsewhere the in-process lock still serialises one server
    import fcntl
except ImportError:  # pragma: no cover - Windows
    fcntl = None  # type: ignore[assignment]

from solver.errors import InputError

MAX_NOTE_CHARS = 500
MAX_AUTHOR_CHARS = 60
MAX_ENTRIES = 2000
FORMAT_VERSION = 1
_CONTROL_CHARS = re.compile(r"[\x00-\x08\x0b-\x1f\x7f]")


@dataclass(frozen=True)
class ShortlistEntry:
    """One kept arc.

    ``metrics`` holds the key numbers at the time it was kept (C3, arrival v∞, total Δv, DLA,
    TOF) so the table reads without recomputing; ``view`` is the URL query that shows the arc.
    """

    id: str
    case_id: str
    case_title: str
    case_hash: str
    departure_utc: str
    arrival_utc: str
    revolutions: int
    branch: str
    metrics: dict[str, float]
    note: str
    author: str
    created_utc: str
    view: str = ""
    extra: dict = field(default_factory=dict)

    @classmethod
    def from_dict(cls, data: dict) -> ShortlistEntry:
        known = {f for f in cls.__dataclass_fields__}
        return cls(**{k: v for k, v in data.items() if k in known})


def clean_text(value: str | None, field_name: str, max_chars: int) -> str:
    """Trimmed text without control characters, or InputError if it is too long."""
    text = _CONTROL_CHARS.sub("", (value or "").strip())
    if len(text) > max_chars:
        raise InputError(field_name, text[:40] + "...", f"at most {max_chars} characters")
    return text


class Shortlist:
    """The shortlist file of one data folder."""

    def __init__(self, path: Path) -> None:
        self.path = Path(path)
        self._lock = threading.Lock()

    # -- reading ---------------------------------------------------------------------------
    def version(self) -> str:
        """Changes whenever the file does (modification time and size)."""
        try:
            st = self.path.stat()
        except FileNotFoundError:
            return "empty"
        return f"{st.st_mtime_ns}-{st.st_size}"

    def entries(self) -> list[ShortlistEntry]:
        """All entries, oldest first (an unreadable file reads as empty, never an error)."""
        try:
            data = json.loads(self.path.read_text(encoding="utf-8"))
        except (FileNotFoundError, json.JSONDecodeError, UnicodeDecodeError):
            return []
        out = []
        for item in data.get("entries", []) if isinstance(data, dict) else []:
            try:
                out.append(ShortlistEntry.from_dict(item))
            except TypeError:
                continue
        return out

    # -- writing ---------------------------------------------------------------------------
    @contextlib.contextmanager
    def _locked(self) -> Iterator[None]:
        self.path.parent.mkdir(parents=True, exist_ok=True)
        with self._lock:
            lock_path = self.path.with_name(self.path.name + ".lock")
            with open(lock_path, "a+") as handle:
                if fcntl is not None:
                    fcntl.flock(handle, fcntl.LOCK_EX)
                try:
                    yield
                finally:
                    if fcntl is not None:
                        fcntl.flock(handle, fcntl.LOCK_UN)

    def _write(self, entries: list[ShortlistEntry]) -> None:
        payload = {"format": FORMAT_VERSION, "entries": [asdict(e) for e in entries]}
        fd, tmp = tempfile.mkstemp(dir=self.path.parent, prefix=".shortlist-", suffix=".tmp")
        try:
            with os.fdopen(fd, "w", encoding="utf-8") as handle:
                json.dump(payload, handle, ensure_ascii=False, indent=1)
                handle.flush()
                os.fsync(handle.fileno())
            os.replace(tmp, self.path)
        except BaseException:
            with contextlib.suppress(FileNotFoundError):
                os.unlink(tmp)
            raise

    def add(self, **values) -> ShortlistEntry:
        """Keep an arc; ``values`` are the entry fields but ``id`` and ``created_utc``."""
        values["note"] = clean_text(values.get("note"), "note", MAX_NOTE_CHARS)
        values["author"] = clean_text(values.get("author"), "author label", MAX_AUTHOR_CHARS)
        entry = ShortlistEntry(
            id=uuid.uuid4().hex[:12],
            created_utc=dt.datetime.now(dt.UTC).strftime("%Y-%m-%dT%H:%M:%SZ"),
            **values,
        )
        with self._locked():
            entries = self.entries()
            if len(entries) >= MAX_ENTRIES:
                raise InputError("shortlist", f"{len(entries)} entries", f"at most {MAX_ENTRIES}")
            entries.append(entry)
            self._write(entries)
        return entry

    def remove(self, entry_id: str) -> bool:
        """Drop an entry by id; False if there was none."""
        with self._locked():
            entries = self.entries()
            kept = [e for e in entries if e.id != entry_id]
            if len(kept) == len(entries):
                return False
            self._write(kept)
        return True
