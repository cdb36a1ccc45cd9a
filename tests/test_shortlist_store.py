"""The shortlist store: nothing kept is ever lost.

A store or an earlier JSON file that cannot be read is kept aside and reported, never
overwritten (an unreadable shortlist.json used to read as empty, and the next add replaced 354
entries with 1); entries are validated on read with a reason and never dropped by another
write (an entry missing one field used to vanish at the next add); each author label has a
bound with a clear message; writers in several processes lose nothing.
"""

from __future__ import annotations

import json
import multiprocessing
import os
import sqlite3
import threading
import uuid
from pathlib import Path

import pytest

from app.dashboard.shortlist import (
    MAX_ENTRIES_PER_AUTHOR,
    STORE_NAME,
    Shortlist,
    validated_entry,
)
from solver.errors import InputError

ENTRY = {
    "case_id": "tallis_rendezvous",
    "case_title": "Tallis rendezvous",
    "case_hash": "abc123",
    "departure_utc": "2036-03-01T00:00:00Z",
    "arrival_utc": "2036-09-01T00:00:00Z",
    "revolutions": 0,
    "branch": "single",
    "metrics": {"c3_km2_s2": 13.2, "dla_deg": None},
    "view": "?case=tallis_rendezvous",
}


def legacy_entry(k: int) -> dict:
    return {
        **ENTRY,
        "id": uuid.UUID(int=k).hex[-12:],
        "note": f"note {k}",
        "author": "RM",
        "created_utc": "2031-01-01T00:00:00Z",
        "extra": {},
    }


def write_legacy(folder: Path, entries: list[dict]) -> Path:
    path = folder / "shortlist.json"
    path.write_text(json.dumps({"format": 1, "entries": entries}, indent=1), encoding="utf-8")
    return path


# ---------------------------------------------------------------------------------------------
# The earlier JSON file


def test_the_json_file_is_imported_once_and_kept(tmp_path):
    write_legacy(tmp_path, [legacy_entry(k) for k in range(354)])
    shortlist = Shortlist(tmp_path / "shortlist.json")
    assert [e.note for e in shortlist.entries()] == [f"note {k}" for k in range(354)]
    assert not (tmp_path / "shortlist.json").exists()
    kept = list(tmp_path.glob("shortlist.json.imported-*"))
    assert len(kept) == 1 and len(json.loads(kept[0].read_text())["entries"]) == 354
    shortlist.add(**ENTRY, note="new", author="AB")
    again = Shortlist(tmp_path / "shortlist.json")  # a restart imports nothing twice
    assert len(again.entries()) == 355


def test_a_truncated_json_file_is_kept_aside_and_never_overwritten(tmp_path):
    whole = write_legacy(tmp_path, [legacy_entry(k) for k in range(354)]).read_bytes()
    damaged = whole[: len(whole) // 2]
    (tmp_path / "shortlist.json").write_bytes(damaged)
    shortlist = Shortlist(tmp_path / "shortlist.json")
    assert shortlist.entries() == []
    shortlist.add(**ENTRY, note="first after the damage", author="AB")
    aside = list(tmp_path.glob("shortlist.json.unreadable-*"))
    assert len(aside) == 1 and aside[0].read_bytes() == damaged  # every byte kept
    problems = shortlist.problems()
    assert any("could not be read" in p and aside[0].name in p for p in problems), problems
    assert [e.note for e in shortlist.entries()] == ["first after the damage"]


def test_a_truncated_store_is_kept_aside_and_a_new_one_started(tmp_path):
    shortlist = Shortlist(tmp_path / STORE_NAME)
    for k in range(120):
        shortlist.add(**ENTRY, note=f"n{k}", author=f"a{k % 3}")
    store = tmp_path / STORE_NAME
    with sqlite3.connect(store) as connection:  # fold the write-ahead log in, as on a clean stop
        connection.execute("PRAGMA wal_checkpoint(TRUNCATE)")
    data = store.read_bytes()
    damaged = data[: len(data) // 2]
    store.write_bytes(damaged)
    for side in ("-wal", "-shm"):
        Path(str(store) + side).unlink(missing_ok=True)

    restarted = Shortlist(tmp_path / STORE_NAME)
    restarted.add(**ENTRY, note="after", author="AB")
    aside = list(tmp_path.glob(f"{STORE_NAME}.unreadable-*"))
    assert [p.read_bytes() for p in aside if not p.name.endswith(("-wal", "-shm"))] == [damaged]
    assert any("kept as" in p for p in restarted.problems())
    assert [e.note for e in restarted.entries()] == ["after"]


def test_a_file_that_is_not_a_store_is_kept_aside(tmp_path):
    (tmp_path / STORE_NAME).write_bytes(b"these are someone's notes, not a database\n" * 100)
    shortlist = Shortlist(tmp_path / STORE_NAME)
    shortlist.add(**ENTRY, note="x", author="")
    aside = list(tmp_path.glob(f"{STORE_NAME}.unreadable-*"))
    assert len(aside) == 1 and aside[0].read_bytes().startswith(b"these are someone's notes")


# ---------------------------------------------------------------------------------------------
# Entries validated on read


@pytest.mark.parametrize(
    ("change", "reason"),
    [
        ({"note": None}, "note"),
        ({"revolutions": "two"}, "revolutions"),
        ({"view": "javascript:alert(1)"}, "view"),
        ({"view": "https://evil.example/"}, "view"),
        ({"metrics": {"c3_km2_s2": "13"}}, "metrics.c3_km2_s2"),
        ({"case_title": "two\nlines"}, "case_title"),
        ({"branch": "sideways"}, "branch"),
    ],
)
def test_invalid_entries_are_reported_with_a_reason(change, reason):
    bad = {**legacy_entry(1), **change}
    with pytest.raises(ValueError, match=reason):
        validated_entry(bad)


def test_an_entry_missing_a_field_is_reported_and_survives_other_writes(tmp_path):
    entries = [legacy_entry(k) for k in range(5)]
    del entries[2]["note"]
    write_legacy(tmp_path, entries)
    shortlist = Shortlist(tmp_path / "shortlist.json")
    assert [e.note for e in shortlist.entries()] == ["note 0", "note 1", "note 3", "note 4"]
    broken_id = entries[2]["id"]
    assert any(broken_id in p and "missing field 'note'" in p for p in shortlist.problems())
    added = shortlist.add(**ENTRY, note="new", author="AB")
    shortlist.remove(added.id)
    # still in the store, still reported: nobody's write dropped it
    assert any(broken_id in p for p in Shortlist(tmp_path / STORE_NAME).problems())


def test_a_changed_record_fails_its_checksum(tmp_path):
    shortlist = Shortlist(tmp_path / STORE_NAME)
    entry = shortlist.add(**ENTRY, note="original", author="AB")
    with sqlite3.connect(tmp_path / STORE_NAME) as connection:
        connection.execute(
            "UPDATE entries SET record = replace(record, 'original', 'changed!') WHERE id = ?",
            (entry.id,),
        )
    assert shortlist.entries() == []
    assert any("checksum" in p for p in shortlist.problems())


# ---------------------------------------------------------------------------------------------
# Bounds and versions


def test_each_author_label_has_a_bound_with_a_clear_message(tmp_path):
    shortlist = Shortlist(tmp_path / STORE_NAME)
    for k in range(MAX_ENTRIES_PER_AUTHOR):
        shortlist.add(**ENTRY, note=f"{k}", author="Flood" if k % 2 else "flood ")
    with pytest.raises(InputError) as refused:
        shortlist.add(**ENTRY, note="one more", author="FLOOD")
    message = str(refused.value)
    assert message.startswith("shortlist = ") and f"at most {MAX_ENTRIES_PER_AUTHOR}" in message
    assert "remove some" in message
    shortlist.add(**ENTRY, note="another author", author="RM")  # others are not refused
    assert len(shortlist.entries()) == MAX_ENTRIES_PER_AUTHOR + 1


def test_version_changes_with_every_add_and_remove_only(tmp_path):
    shortlist = Shortlist(tmp_path / STORE_NAME)
    assert shortlist.version() == "empty" and not (tmp_path / STORE_NAME).exists()
    entry = shortlist.add(**ENTRY, note="a", author="")
    first = shortlist.version()
    assert not shortlist.remove("000000000000") and shortlist.version() == first
    assert shortlist.remove(entry.id) and shortlist.version() != first


# ---------------------------------------------------------------------------------------------
# Two handles opening one store at once, driven step by step through the interleavings that
# once lost entries or set a healthy store aside (a second server, or a second handle, on the
# same data folder).


class _PauseOnce:
    """A handle's test-only pause point: the first time ``step`` is reached the handle's thread
    says so and waits until the test lets it go on."""

    def __init__(self, step: str) -> None:
        self.step = step
        self.reached = threading.Event()
        self.go_on = threading.Event()

    def __call__(self, step: str) -> None:
        if step == self.step and not self.reached.is_set():
            self.reached.set()
            assert self.go_on.wait(30), f"never let go on after {step}"


def _adding(shortlist: Shortlist, note: str, errors: list) -> threading.Thread:
    def add() -> None:
        try:
            shortlist.add(**ENTRY, note=note, author="")
        except Exception as exc:  # reported by the test, with the interleaving that caused it
            errors.append(f"{note}: {type(exc).__name__}: {exc}")

    thread = threading.Thread(target=add)
    thread.start()
    return thread


def test_a_store_being_created_is_not_taken_for_a_foreign_one(tmp_path):
    # A starts the store and stops after its first table; B opens the folder then. B used to see
    # a store with one table, set it aside as "not a shortlist store" and start another, and A's
    # add then failed with "no such table: entries" in B's half-made store (or wrote into the
    # store set aside).
    first, second = Shortlist(tmp_path / STORE_NAME), Shortlist(tmp_path / STORE_NAME)
    first._pause_at = first_pause = _PauseOnce("schema:meta")
    second._pause_at = second_pause = _PauseOnce("schema:meta")
    errors: list[str] = []
    first_thread = _adding(first, "first", errors)
    assert first_pause.reached.wait(30)
    second_thread = _adding(second, "second", errors)
    # B should wait for A's schema (one write transaction); if it gets into a schema of its own
    # instead, A goes on while B is halfway, the interleaving that failed.
    if not second_pause.reached.wait(2.0):
        second_pause.go_on.set()
    first_pause.go_on.set()
    first_thread.join(60)
    second_pause.go_on.set()
    second_thread.join(60)
    assert errors == []
    assert list(tmp_path.glob(f"{STORE_NAME}.unreadable-*")) == []
    assert first.problems() == [] and second.problems() == []
    assert sorted(e.note for e in Shortlist(tmp_path / STORE_NAME).entries()) == [
        "first",
        "second",
    ]


def test_a_damaged_store_is_set_aside_once_when_two_open_it_at_once(tmp_path):
    # Both handles find the damaged store before either sets it aside. A sets it aside, starts a
    # new store and adds; B then used to set A's new store aside as well, and A's entry was gone
    # from the list.
    damaged = b"these are someone's notes, not a database\n" * 100
    (tmp_path / STORE_NAME).write_bytes(damaged)
    first, second = Shortlist(tmp_path / STORE_NAME), Shortlist(tmp_path / STORE_NAME)
    first._pause_at = first_pause = _PauseOnce("judged")
    second._pause_at = second_pause = _PauseOnce("judged")
    errors: list[str] = []
    first_thread = _adding(first, "first", errors)
    second_thread = _adding(second, "second", errors)
    assert first_pause.reached.wait(30) and second_pause.reached.wait(30)
    first_pause.go_on.set()
    first_thread.join(60)
    second_pause.go_on.set()
    second_thread.join(60)
    assert errors == []
    aside = sorted(tmp_path.glob(f"{STORE_NAME}.unreadable-*"))
    assert [p.read_bytes() for p in aside] == [damaged]  # set aside once, every byte kept
    assert any(aside[0].name in p for p in first.problems())
    assert sorted(e.note for e in Shortlist(tmp_path / STORE_NAME).entries()) == [
        "first",
        "second",
    ]


def test_a_new_store_held_by_another_opener_is_waited_for(tmp_path):
    # Another opener (another handle or server) holds a write lock on the new, still empty
    # file. SQLite refuses the change to write-ahead logging at once in that state instead of
    # waiting, and an add failed with "database is locked" (one in a hundred runs of
    # test_concurrent_writers_lose_no_entry under load). The add must wait for the lock.
    path = tmp_path / STORE_NAME
    holder = sqlite3.connect(path, isolation_level=None)
    holder.execute("BEGIN IMMEDIATE")
    shortlist = Shortlist(path)
    refused = threading.Event()
    shortlist._pause_at = lambda step: refused.set() if step == "wal:busy" else None
    errors: list[str] = []
    thread = _adding(shortlist, "after the lock", errors)
    try:
        held = refused.wait(30)  # the add met the lock (and is waiting, not failed)
    finally:
        holder.execute("ROLLBACK")
        holder.close()
    thread.join(60)
    assert errors == [] and held
    assert [e.note for e in Shortlist(path).entries()] == ["after the lock"]
    assert shortlist.problems() == []


def _add_many(folder: str, writer: int, count: int) -> None:
    shortlist = Shortlist(Path(folder) / STORE_NAME)
    for k in range(count):
        shortlist.add(**ENTRY, note=f"w{writer}-{k}", author=f"writer {writer}")


def test_writers_in_several_processes_lose_nothing(tmp_path):
    # fork where there is one: a spawned child would spend seconds importing the dashboard
    ctx = multiprocessing.get_context("fork" if hasattr(os, "fork") else "spawn")
    Shortlist(tmp_path / STORE_NAME).add(**ENTRY, note="seed", author="")
    writers = [ctx.Process(target=_add_many, args=(str(tmp_path), w, 40)) for w in range(4)]
    for process in writers:
        process.start()
    for process in writers:
        process.join(120)
        assert process.exitcode == 0
    notes = {e.note for e in Shortlist(tmp_path / STORE_NAME).entries()}
    assert notes == {"seed"} | {f"w{w}-{k}" for w in range(4) for k in range(40)}


# ---------------------------------------------------------------------------------------------
# A store that refuses a change


def test_a_locked_store_refuses_with_one_line_and_keeps_what_it_had(tmp_path, monkeypatch):
    """Another writer holding the store's lock past the busy timeout: the add is refused with
    one line saying so (it once reached the page as a server error), the entries are as they
    were, and the line is among the store's problems."""
    import app.dashboard.shortlist as module

    store = Shortlist(tmp_path / STORE_NAME)
    store.add(**ENTRY, note="first", author="RM")
    monkeypatch.setattr(module, "_BUSY_TIMEOUT_S", 0.2)
    other = sqlite3.connect(tmp_path / STORE_NAME, isolation_level=None)
    other.execute("BEGIN IMMEDIATE")  # holds the write lock
    try:
        with pytest.raises(module.ShortlistUnavailable) as info:
            store.add(**ENTRY, note="second", author="RM")
        with pytest.raises(module.ShortlistUnavailable):
            store.remove(store.entries()[0].id)
    finally:
        other.execute("ROLLBACK")
        other.close()
    line = str(info.value)
    assert "\n" not in line and "not kept" in line and "busy" in line
    assert [e.note for e in store.entries()] == ["first"]
    assert line in store.problems()


@pytest.mark.parametrize(
    ("error", "words"),
    [
        (sqlite3.OperationalError("database or disk is full"), "full"),
        (sqlite3.OperationalError("attempt to write a readonly database"), "read-only"),
        (sqlite3.DatabaseError("database disk image is malformed"), "damaged"),
        (OSError(28, "No space left on device"), "full"),
    ],
)
def test_each_store_failure_is_named_in_one_line(error, words):
    from app.dashboard.shortlist import store_problem

    line = store_problem(error, "kept")
    assert words in line and "\n" not in line and line.startswith("Shortlist: not kept")
