"""The shortlist: candidate arcs a team keeps during a shared session, stored on disk.

Entries live in a small SQLite database in the data folder (``shortlist.sqlite3``, Python's own
``sqlite3``), so every viewer of the server (and a restarted server, and a second server on the
same folder) sees the same list, and nothing kept is ever lost:

* **Transactions**: every add and remove is one transaction (``BEGIN IMMEDIATE``: one writer at
  a time, across threads and processes); the database runs in WAL mode, so readers never wait
  for a writer and never see half a write; ``synchronous=FULL`` makes a finished add survive a
  power cut. A write touches only its own row: an entry that fails validation is never dropped
  by someone else's add.
* **Validated on read**: each entry is checked (fields, types, lengths, a link that is a view
  of this server, and a SHA-256 of the stored record); one that fails is left out of the table,
  kept in the database, and reported with its reason by :meth:`Shortlist.problems`.
* **Never overwritten**: a store that cannot be read (damaged, truncated, not ours) is renamed
  aside (``shortlist.sqlite3.unreadable-<UTC time>``, with its ``-wal`` file) and reported; a
  new store starts beside it. Only one opener sets it aside: the decision is taken again under
  an exclusive lock on ``shortlist.sqlite3.lock``, so a second opener that found the same
  damage keeps the new store the first one started. A new store's tables are created in one
  transaction, so no opener ever sees half of them and takes the store for someone else's; a
  store SQLite cannot reach for a moment (busy, no permission) is never taken for a damaged
  one.
* **Imported once**: the JSON file earlier versions kept (``shortlist.json``) is imported at the
  first use and renamed ``shortlist.json.imported-<UTC time>``; an unreadable one is renamed
  ``.unreadable-<UTC time>`` instead and reported. Temporary files it left are swept.
* **Bounded**: at most :data:`MAX_ENTRIES_PER_AUTHOR` entries per author label and
  :data:`MAX_ENTRIES` in all, each refused with a message saying what to do.

The page polls :meth:`Shortlist.version` every few seconds and re-reads only when it changed.
"""

from __future__ import annotations

import contextlib
import datetime as dt
import hashlib
import json
import logging
import math
import re
import sqlite3
import threading
import time
import uuid
from collections.abc import Callable, Iterator
from dataclasses import asdict, dataclass, field
from pathlib import Path
from typing import Any

from solver.errors import InputError

from .folder_lock import exclusive_lock

MAX_NOTE_CHARS = 500
MAX_AUTHOR_CHARS = 60
MAX_ENTRIES = 5000
MAX_ENTRIES_PER_AUTHOR = 200
FORMAT_VERSION = 2
STORE_NAME = "shortlist.sqlite3"
LEGACY_NAME = "shortlist.json"
_CONTROL_CHARS = re.compile(r"[\x00-\x08\x0b-\x1f\x7f]")
_ID_RE = re.compile(r"[0-9a-f]{12}")
_BRANCHES = frozenset({"single", "low", "high"})
_MAX_TEXT_CHARS = 300
_MAX_VIEW_CHARS = 2000
_BUSY_TIMEOUT_S = 30.0
_MAX_NOTES = 20

_LOG = logging.getLogger(__name__)

_SCHEMA = (
    ("meta", "CREATE TABLE IF NOT EXISTS meta (key TEXT PRIMARY KEY, value TEXT NOT NULL)"),
    (
        "entries",
        """CREATE TABLE IF NOT EXISTS entries (
    seq INTEGER PRIMARY KEY AUTOINCREMENT,
    id TEXT NOT NULL UNIQUE,
    author_key TEXT NOT NULL,
    record TEXT NOT NULL,
    sha256 TEXT NOT NULL
)""",
    ),
    ("entries_author", "CREATE INDEX IF NOT EXISTS entries_author ON entries (author_key)"),
)


def _is_damage(exc: sqlite3.DatabaseError) -> bool:
    """Whether SQLite's error says the file's content is bad (damaged pages, not a database),
    as opposed to a moment's trouble reaching it (busy, locked, no permission, I/O)."""
    name = getattr(exc, "sqlite_errorname", "") or ""
    if name:
        return name.startswith(("SQLITE_CORRUPT", "SQLITE_NOTADB"))
    return not isinstance(exc, sqlite3.OperationalError)


def _no_pause(step: str) -> None:
    """The default of :attr:`Shortlist._pause_at`: no pause."""


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
        """An entry from stored data, validated (``ValueError`` naming what is wrong)."""
        return validated_entry(data)


def clean_text(value: str | None, field_name: str, max_chars: int) -> str:
    """Trimmed text without control characters, or InputError if it is too long."""
    text = _CONTROL_CHARS.sub("", (value or "").strip())
    if len(text) > max_chars:
        raise InputError(field_name, text[:40] + "...", f"at most {max_chars} characters")
    return text


def validated_entry(data: Any) -> ShortlistEntry:
    """Check stored data field by field; ``ValueError`` with the first reason it is refused."""
    if not isinstance(data, dict):
        raise ValueError(f"not a record ({type(data).__name__})")
    known = set(ShortlistEntry.__dataclass_fields__)
    values = {k: v for k, v in data.items() if k in known}
    required = known - {"view", "extra"}
    missing = sorted(required - set(values))
    if missing:
        raise ValueError(f"missing field '{missing[0]}'")
    if not isinstance(values["id"], str) or not _ID_RE.fullmatch(values["id"]):
        raise ValueError("id is not 12 hexadecimal digits")
    for name in (
        "case_id",
        "case_title",
        "case_hash",
        "departure_utc",
        "arrival_utc",
        "created_utc",
    ):
        text = values[name]
        if not isinstance(text, str) or not text or len(text) > _MAX_TEXT_CHARS:
            raise ValueError(f"{name} is not text of 1 to {_MAX_TEXT_CHARS} characters")
        if _CONTROL_CHARS.search(text) or "\n" in text:
            raise ValueError(f"{name} holds control characters")
    for name, limit in (("note", MAX_NOTE_CHARS), ("author", MAX_AUTHOR_CHARS)):
        text = values[name]
        if not isinstance(text, str) or len(text) > limit or _CONTROL_CHARS.search(text):
            raise ValueError(f"{name} is not text of at most {limit} characters")
    revolutions = values["revolutions"]
    if (
        isinstance(revolutions, bool)
        or not isinstance(revolutions, int)
        or not 0 <= revolutions <= 20
    ):
        raise ValueError("revolutions is not an integer from 0 to 20")
    if values["branch"] not in _BRANCHES:
        raise ValueError("branch is not single, low or high")
    metrics = values["metrics"]
    if not isinstance(metrics, dict) or len(metrics) > 20:
        raise ValueError("metrics is not a table of numbers")
    for name, number in metrics.items():
        if not isinstance(name, str) or not (
            number is None
            or (
                isinstance(number, int | float)
                and not isinstance(number, bool)
                and math.isfinite(number)
            )
        ):
            raise ValueError(f"metrics.{str(name)[:40]} is not a finite number")
    view = values.get("view", "")
    # The link is put in the page as an address: only a view of this server ("?case=..."), never
    # "javascript:..." or another site.
    if (
        not isinstance(view, str)
        or len(view) > _MAX_VIEW_CHARS
        or (view and not view.startswith("?"))
    ):
        raise ValueError("view is not a link to a view of this server")
    if not isinstance(values.get("extra", {}), dict):
        raise ValueError("extra is not a table")
    return ShortlistEntry(**values)


class ShortlistUnavailable(Exception):
    """The store refused or failed a change (locked, full, read-only, damaged); the message is
    one line for the page, saying what happened and that nothing was half written."""


def store_problem(exc: BaseException, doing: str) -> str:
    """One line for a failed change of the store, by what SQLite or the system said.

    Parameters
    ----------
    exc : sqlite3.Error or OSError
        What the store raised.
    doing : str
        What was being done ("kept", "removed").
    """
    text = str(exc).lower()
    if "locked" in text or "busy" in text:
        why = "the store is busy with another writer for too long; try again in a moment"
    elif "full" in text or getattr(exc, "errno", None) == 28:
        why = "the server's data folder is full; ask whoever runs the server to free space"
    elif "readonly" in text or "read-only" in text or getattr(exc, "errno", None) in (13, 30):
        why = "the server may not write to its data folder (read-only or no permission)"
    elif "malformed" in text or "not a database" in text or "corrupt" in text:
        why = "the store is damaged; restart the server to set it aside and start a new one"
    else:
        why = str(exc).splitlines()[0][:160] if str(exc) else type(exc).__name__
    return f"Shortlist: not {doing}, {why}. Nothing was half written."


class Shortlist:
    """The shortlist store of one data folder.

    Parameters
    ----------
    path : path
        The store (``shortlist.sqlite3``). Given the earlier ``shortlist.json`` name, the store
        is ``shortlist.sqlite3`` beside it and the JSON file is imported from.
    """

    def __init__(self, path: Path) -> None:
        path = Path(path)
        if path.suffix == ".json":
            self.legacy_path = path
            self.path = path.with_name(STORE_NAME)
        else:
            self.path = path
            self.legacy_path = path.with_name(LEGACY_NAME)
        self._lock = threading.Lock()
        self._ready = False
        self._notes: list[str] = []
        # Test-only: called with each step of opening the store ("judged": found unreadable,
        # not yet set aside; "schema:<name>": a table or index made; "wal:busy": the change to
        # write-ahead logging refused for now), so that a test can stop two openers at chosen
        # steps and drive one interleaving every run.
        self._pause_at: Callable[[str], None] = _no_pause

    # -- the store -------------------------------------------------------------------------
    def _connect(self) -> sqlite3.Connection:
        connection = sqlite3.connect(
            self.path, timeout=_BUSY_TIMEOUT_S, isolation_level=None, check_same_thread=False
        )
        connection.execute("PRAGMA synchronous = FULL")
        return connection

    @contextlib.contextmanager
    def _connection(self) -> Iterator[sqlite3.Connection]:
        connection = self._connect()
        try:
            yield connection
        finally:
            connection.close()

    def _ensure(self, create: bool) -> bool:
        """Open (and if needed create) the store once: set aside an unreadable one, import the
        earlier JSON file. Returns whether a store exists."""
        if self._ready:
            return True
        with self._lock:
            if self._ready:
                return True
            if not create and not self.path.exists() and not self.legacy_path.exists():
                return False
            self.path.parent.mkdir(parents=True, exist_ok=True)
            if self.path.exists() and self._check_store() is not None:
                self._pause_at("judged")
                self._set_aside_if_still_unreadable()
            with self._connection() as connection:
                self._create_schema(connection)
                self._import_legacy(connection)
            self._sweep_legacy_temporaries()
            self._ready = True
            return True

    def _create_schema(self, connection: sqlite3.Connection) -> None:
        """Create the tables and their first rows in one write transaction.

        Another opener of the same file sees either no table (a store not yet created, which it
        then waits to create itself) or all of them, never a store with half its tables, which
        it would take for a file that is not a shortlist store and set aside.
        """
        self._use_wal(connection)
        connection.execute("BEGIN IMMEDIATE")
        try:
            for name, statement in _SCHEMA:
                connection.execute(statement)
                self._pause_at(f"schema:{name}")
            connection.execute(
                "INSERT OR IGNORE INTO meta (key, value) VALUES ('format', ?)",
                (str(FORMAT_VERSION),),
            )
            connection.execute("INSERT OR IGNORE INTO meta (key, value) VALUES ('revision', '0')")
            connection.execute("COMMIT")
        except BaseException:
            connection.execute("ROLLBACK")
            raise

    def _use_wal(self, connection: sqlite3.Connection) -> None:
        """Put the store in write-ahead-log mode (outside a transaction, by SQLite's rule).

        On a new, still empty file that another opener holds a write lock on, SQLite refuses
        the change at once, without waiting as it does for other locks: the first writers of a
        new store then failed with "database is locked" (one add in a hundred with two handles
        and forty writers). So the change is asked again until the busy timeout has passed;
        the store would still work in the rollback mode it is left in, only less concurrently.
        """
        deadline = time.monotonic() + _BUSY_TIMEOUT_S
        wait_s = 0.005
        while True:
            try:
                connection.execute("PRAGMA journal_mode = WAL")
                return
            except sqlite3.OperationalError as exc:
                if "locked" not in str(exc) or time.monotonic() + wait_s > deadline:
                    raise
            self._pause_at("wal:busy")
            time.sleep(wait_s)
            wait_s = min(2 * wait_s, 0.25)

    def _check_store(self) -> str | None:
        """Why the existing store cannot be trusted, or None (a store with no table yet is one
        being created: None).

        Raises
        ------
        sqlite3.OperationalError
            The store could not be asked (busy past the timeout, out of file handles, no
            permission): that says nothing about its content, so it is never set aside for it.
        """
        try:
            with self._connection() as connection:
                rows = connection.execute("PRAGMA quick_check").fetchall()
                if rows != [("ok",)]:
                    return f"integrity check: {rows[0][0] if rows else 'no answer'}"
                tables = {r[0] for r in connection.execute("SELECT name FROM sqlite_master")}
                if tables and not {"meta", "entries"} <= tables:
                    return "not a shortlist store"
                if "meta" in tables:
                    found = connection.execute(
                        "SELECT value FROM meta WHERE key = 'format'"
                    ).fetchone()
                    if found is not None and found[0] != str(FORMAT_VERSION):
                        return f"store format {found[0]}, this version reads {FORMAT_VERSION}"
        except sqlite3.DatabaseError as exc:
            if not _is_damage(exc):
                raise
            return str(exc)
        return None

    def _set_aside_if_still_unreadable(self) -> None:
        """Set the store aside if it is still unreadable once this opener alone may do so.

        Two openers may both find the store damaged; the first to hold the folder's lock sets it
        aside and starts a new one. The second then checks again, finds the new store (or none
        yet) and keeps it: without the second look it would set aside the first one's new store
        and the entries added to it.
        """
        with exclusive_lock(self.path.with_name(f"{self.path.name}.lock")):
            problem = self._check_store() if self.path.exists() else None
            if problem is not None:
                self._set_aside(problem)

    def _set_aside(self, reason: str) -> None:
        stamp = dt.datetime.now(dt.UTC).strftime("%Y%m%dT%H%M%S%fZ")
        aside = self.path.with_name(f"{self.path.name}.unreadable-{stamp}")
        for suffix in ("", "-wal", "-shm"):
            source = Path(str(self.path) + suffix)
            with contextlib.suppress(FileNotFoundError):
                source.rename(Path(str(aside) + suffix))
        self._note(
            f"the shortlist store could not be read ({reason}); it was kept as {aside.name} and "
            "a new store was started"
        )

    def _import_legacy(self, connection: sqlite3.Connection) -> None:
        """Bring the earlier JSON file's entries in, once, in one transaction."""
        if not self.legacy_path.is_file():
            return
        stamp = dt.datetime.now(dt.UTC).strftime("%Y%m%dT%H%M%S%fZ")
        try:
            raw = self.legacy_path.read_bytes()
            data = json.loads(raw.decode("utf-8"))
            items = data.get("entries") if isinstance(data, dict) else None
            if not isinstance(items, list):
                raise ValueError("no list of entries")
        except (OSError, ValueError) as exc:
            aside = self.legacy_path.with_name(f"{self.legacy_path.name}.unreadable-{stamp}")
            with contextlib.suppress(FileNotFoundError):
                self.legacy_path.rename(aside)
            self._note(
                f"the earlier shortlist file could not be read ({str(exc)[:120]}); it was kept "
                f"as {aside.name} and nothing was imported"
            )
            return
        digest = hashlib.sha256(raw).hexdigest()
        connection.execute("BEGIN IMMEDIATE")
        try:
            done = connection.execute(
                "SELECT value FROM meta WHERE key = 'imported_json'"
            ).fetchone()
            if done is None or done[0] != digest:
                for item in items:
                    if not isinstance(item, dict):
                        item = {"record": item}
                    entry_id = item.get("id")
                    if not isinstance(entry_id, str) or not _ID_RE.fullmatch(entry_id):
                        entry_id = uuid.uuid4().hex[:12]  # kept (and reported) all the same
                    self._insert(connection, entry_id, str(item.get("author", "")), item)
                connection.execute(
                    "INSERT OR REPLACE INTO meta (key, value) VALUES ('imported_json', ?)",
                    (digest,),
                )
                self._bump(connection)
            connection.execute("COMMIT")
        except BaseException:
            connection.execute("ROLLBACK")
            raise
        aside = self.legacy_path.with_name(f"{self.legacy_path.name}.imported-{stamp}")
        with contextlib.suppress(FileNotFoundError):
            self.legacy_path.rename(aside)
        self._note(
            f"imported {len(items)} entries from {self.legacy_path.name} (kept as {aside.name})"
        )

    def _sweep_legacy_temporaries(self) -> None:
        """Remove temporary files the JSON version's writers left (older than an hour)."""
        cutoff = time.time() - 3600.0
        for stale in self.path.parent.glob(".shortlist-*.tmp"):
            with contextlib.suppress(OSError):
                if stale.stat().st_mtime < cutoff:
                    stale.unlink()

    @staticmethod
    def _insert(connection: sqlite3.Connection, entry_id: str, author: str, record: Any) -> None:
        text = json.dumps(record, ensure_ascii=False, sort_keys=True)
        connection.execute(
            "INSERT OR IGNORE INTO entries (id, author_key, record, sha256) VALUES (?, ?, ?, ?)",
            (entry_id, author.strip().casefold(), text, hashlib.sha256(text.encode()).hexdigest()),
        )

    @staticmethod
    def _bump(connection: sqlite3.Connection) -> None:
        connection.execute(
            "UPDATE meta SET value = CAST(value AS INTEGER) + 1 WHERE key = 'revision'"
        )

    def _note(self, message: str) -> None:
        _LOG.warning("shortlist: %s", message)
        if message not in self._notes:  # a store that keeps failing is one note, not one a poll
            self._notes = [*self._notes, message][-_MAX_NOTES:]

    # -- reading ---------------------------------------------------------------------------
    def _exists(self) -> bool:
        """Whether there is a store to read (opened once); a store that cannot be opened is
        noted in :meth:`problems` and read as empty."""
        try:
            return self._ensure(create=False)
        except (sqlite3.Error, OSError) as exc:
            self._note(f"Shortlist: the store could not be opened ({str(exc)[:160]}).")
            return False

    def version(self) -> str:
        """Changes whenever an entry is added or removed (a revision counter in the store)."""
        if not self._exists():
            return "empty"
        try:
            with self._connection() as connection:
                row = connection.execute("SELECT value FROM meta WHERE key = 'revision'").fetchone()
        except sqlite3.Error as exc:
            return f"unreadable-{type(exc).__name__}"
        return f"r{row[0]}" if row else "empty"

    def _rows(self) -> list[tuple[str, str, str]]:
        if not self._exists():
            return []
        try:
            with self._connection() as connection:
                return connection.execute(
                    "SELECT id, record, sha256 FROM entries ORDER BY seq"
                ).fetchall()
        except sqlite3.Error as exc:
            self._note(f"Shortlist: the store could not be read ({str(exc)[:160]}).")
            return []

    def entries(self) -> list[ShortlistEntry]:
        """Valid entries, oldest first (see :meth:`problems` for the others)."""
        return [entry for entry, _ in self._checked() if entry is not None]

    def _checked(self) -> list[tuple[ShortlistEntry | None, str]]:
        out: list[tuple[ShortlistEntry | None, str]] = []
        for entry_id, record, digest in self._rows():
            try:
                if hashlib.sha256(record.encode()).hexdigest() != digest:
                    raise ValueError("its stored checksum does not match")
                out.append((validated_entry(json.loads(record)), ""))
            except ValueError as exc:
                out.append((None, f"entry {entry_id} is not shown: {exc}"))
        return out

    def problems(self) -> list[str]:
        """What the store could not use, each with its reason: a store or file set aside, an
        import, entries that fail validation (kept in the store, left out of the table)."""
        checked = self._checked()
        return [*self._notes, *(reason for entry, reason in checked if entry is None)]

    # -- writing ---------------------------------------------------------------------------
    @contextlib.contextmanager
    def _write(self, doing: str) -> Iterator[sqlite3.Connection]:
        """One transaction; a store that refuses or fails it raises ShortlistUnavailable (the
        transaction rolled back: nothing half written), also noted in :meth:`problems`."""
        try:
            self._ensure(create=True)
            with self._connection() as connection:
                connection.execute("BEGIN IMMEDIATE")
                try:
                    yield connection
                    connection.execute("COMMIT")
                except BaseException:
                    with contextlib.suppress(sqlite3.Error):
                        connection.execute("ROLLBACK")
                    raise
        except (sqlite3.Error, OSError) as exc:
            line = store_problem(exc, doing)
            self._note(line)
            raise ShortlistUnavailable(line) from exc

    def add(self, **values) -> ShortlistEntry:
        """Keep an arc; ``values`` are the entry fields but ``id`` and ``created_utc``.

        Raises
        ------
        InputError
            A note or author label too long, or the author (or the whole list) at its bound.
        """
        values["note"] = clean_text(values.get("note"), "note", MAX_NOTE_CHARS)
        values["author"] = clean_text(values.get("author"), "author label", MAX_AUTHOR_CHARS)
        entry = ShortlistEntry(
            id=uuid.uuid4().hex[:12],
            created_utc=dt.datetime.now(dt.UTC).strftime("%Y-%m-%dT%H:%M:%SZ"),
            **values,
        )
        try:
            validated_entry(asdict(entry))
        except ValueError as exc:
            raise InputError("shortlist entry", entry.id, f"a valid entry ({exc})") from None
        author_key = entry.author.strip().casefold()
        with self._write("kept") as connection:
            mine = connection.execute(
                "SELECT COUNT(*) FROM entries WHERE author_key = ?", (author_key,)
            ).fetchone()[0]
            if mine >= MAX_ENTRIES_PER_AUTHOR:
                who = f"'{entry.author}'" if entry.author else "without an author label"
                raise InputError(
                    "shortlist",
                    f"{mine} entries {who}",
                    f"at most {MAX_ENTRIES_PER_AUTHOR} entries per author label; remove some "
                    "of them first",
                )
            total = connection.execute("SELECT COUNT(*) FROM entries").fetchone()[0]
            if total >= MAX_ENTRIES:
                raise InputError(
                    "shortlist",
                    f"{total} entries",
                    f"at most {MAX_ENTRIES} in all; remove entries no longer needed first",
                )
            self._insert(connection, entry.id, entry.author, asdict(entry))
            self._bump(connection)
        return entry

    def remove(self, entry_id: str) -> bool:
        """Drop an entry by id; False if there was none."""
        if not isinstance(entry_id, str) or not self._exists():
            return False
        with self._write("removed") as connection:
            removed = connection.execute("DELETE FROM entries WHERE id = ?", (entry_id,)).rowcount
            if removed:
                self._bump(connection)
        return removed > 0


__all__ = [
    "MAX_AUTHOR_CHARS",
    "MAX_ENTRIES",
    "MAX_ENTRIES_PER_AUTHOR",
    "MAX_NOTE_CHARS",
    "Shortlist",
    "ShortlistEntry",
    "ShortlistUnavailable",
    "clean_text",
    "store_problem",
    "validated_entry",
]
