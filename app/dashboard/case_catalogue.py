"""The cases a dashboard offers: the sample files, and the cases viewers upload or open from a
survey.

**Names, not paths.** A case is asked for by its id: a sample file's stem or ``upload-<12 hex>``.
The id is looked up in the server's own index of its two folders (rebuilt from a listing of the
folders); nothing a page sends is ever joined into a path, so no other file on the server can
be read through a case reference.

**Uploads are content-addressed.** An uploaded (or survey-opened) case is stored under the first
12 hex digits of the SHA-256 of its text (``upload-<hash>.toml``), written through the project's
atomic writer (:func:`solver.files.atomic.atomic_output`: temporary file in the same folder,
fsync, rename), so a link that names it works for every viewer and the
same file uploaded twice is one case. When it is read, its hash is checked again: a damaged file
is refused and reported, never trusted.

**Sequences.** Cases with a ``[sequence]`` section (the sample folder's ``sequences/`` and any
upload that has one) open the sequence page; :meth:`CaseCatalogue.is_sequence` says which, and
:meth:`CaseCatalogue.document` gives a case file's parsed TOML, which the sequence page changes
and validates as a sequence case.

**Per viewer.** The store is shared (that is what makes links work), but the case picker lists
only the sample cases and the uploads of the viewer's own browser (kept in the browser's local
storage, ``store-my-cases``), each removable from that list; one viewer's uploads do not pile up
in everyone's picker.
"""

from __future__ import annotations

import base64
import binascii
import hashlib
import logging
import os
import re
import threading
from collections import OrderedDict
from pathlib import Path

from solver.errors import InputError
from solver.files.atomic import atomic_output, sweep_temporaries
from solver.window.case import Case, dumps_toml, parse_case
from solver.window.grid import check_grid_size

from .view_state import CASE_ID_RE, DEFAULT_CASE_ID, ViewState

MAX_UPLOAD_BYTES = 256 * 1024
UPLOAD_PREFIX = "upload-"
UPLOAD_ID_RE = re.compile(r"upload-[0-9a-f]{12}")
MAX_MY_CASES = 50
"""Uploads a viewer's picker lists at most (the most recent)."""
_EFFECTIVE_CACHE_SIZE = 64

_LOG = logging.getLogger(__name__)


def content_id(raw: bytes) -> str:
    """The id of an uploaded case's text: ``upload-`` and 12 hex digits of its SHA-256."""
    return UPLOAD_PREFIX + hashlib.sha256(raw).hexdigest()[:12]


class CaseCatalogue:
    """Sample and uploaded cases by id, and the cases that views make of them."""

    def __init__(
        self, samples_dir: Path, uploads_dir: Path, sequences_dir: Path | None = None
    ) -> None:
        self.samples_dir = Path(samples_dir)
        self.uploads_dir = Path(uploads_dir)
        self.sequences_dir = (
            Path(sequences_dir) if sequences_dir is not None else self.samples_dir / "sequences"
        )
        self._lock = threading.Lock()
        self._loaded: dict[str, tuple[float, Case]] = {}
        self._documents: dict[str, tuple[float, dict]] = {}
        self._effective: OrderedDict[tuple, Case] = OrderedDict()

    # -- the index -------------------------------------------------------------------------
    def sample_ids(self) -> list[str]:
        if not self.samples_dir.is_dir():
            return []
        return sorted(
            p.stem
            for p in self.samples_dir.glob("*.toml")
            if CASE_ID_RE.fullmatch(p.stem) and not p.stem.startswith(UPLOAD_PREFIX)
        )

    def sequence_ids(self) -> list[str]:
        """The sample cases with a ``[sequence]`` section (their own folder)."""
        if not self.sequences_dir.is_dir():
            return []
        return sorted(
            p.stem
            for p in self.sequences_dir.glob("*.toml")
            if CASE_ID_RE.fullmatch(p.stem) and not p.stem.startswith(UPLOAD_PREFIX)
        )

    def upload_ids(self) -> list[str]:
        """Every stored upload, oldest first (the server's store, not any viewer's list)."""
        if not self.uploads_dir.is_dir():
            return []
        files = [p for p in self.uploads_dir.glob(f"{UPLOAD_PREFIX}*.toml")]
        files = [p for p in files if UPLOAD_ID_RE.fullmatch(p.stem)]
        return [p.stem for p in sorted(files, key=os.path.getmtime)]

    def _path(self, case_id: object) -> Path | None:
        """The file of a case id, found in a listing of the folders (never built from the id)."""
        if not isinstance(case_id, str) or not CASE_ID_RE.fullmatch(case_id):
            return None
        if UPLOAD_ID_RE.fullmatch(case_id):
            places = [(self.uploads_dir, self.upload_ids())]
        else:
            places = [
                (self.samples_dir, self.sample_ids()),
                (self.sequences_dir, self.sequence_ids()),
            ]
        for folder, names in places:
            for name in names:
                if name == case_id:
                    return folder / f"{name}.toml"
        return None

    def exists(self, case_id: object) -> bool:
        return self._path(case_id) is not None

    def options(self, my_cases: object = None) -> list[dict[str, str]]:
        """Picker options: sample cases by title, the sequence samples, then this viewer's
        uploads that exist (sequences marked, since they open the sequence page)."""
        out = []
        for case_id in self.sample_ids():
            try:
                out.append({"value": case_id, "label": self.load(case_id).title})
            except InputError:
                continue  # a broken sample file is left out rather than breaking the page
        for case_id in self.sequence_ids():
            try:
                out.append({"value": case_id, "label": f"{self.load(case_id).title} (sequence)"})
            except InputError:
                continue
        for case_id in my_case_ids(my_cases):
            try:
                kind = "sequence, uploaded" if self.is_sequence(case_id) else "uploaded"
                out.append({"value": case_id, "label": f"{self.load(case_id).title} ({kind})"})
            except InputError:
                continue
        return out

    def default_id(self) -> str:
        ids = self.sample_ids()
        return DEFAULT_CASE_ID if DEFAULT_CASE_ID in ids else (ids[0] if ids else DEFAULT_CASE_ID)

    # -- loading ---------------------------------------------------------------------------
    def load(self, case_id: str) -> Case:
        """The case file ``case_id`` as written (InputError if there is no such case, or an
        upload whose content no longer matches its hash)."""
        path = self._path(case_id)
        shown = case_id[:40] if isinstance(case_id, str) else type(case_id).__name__
        if path is None:
            raise InputError("case", shown, "a sample case name or an uploaded case")
        mtime = path.stat().st_mtime
        with self._lock:
            hit = self._loaded.get(case_id)
            if hit and hit[0] == mtime:
                return hit[1]
        raw = path.read_bytes()
        if case_id.startswith(UPLOAD_PREFIX) and content_id(raw) != case_id:
            _LOG.error("uploaded case %s does not match its content hash; refused", case_id)
            raise InputError(
                "case",
                case_id,
                "an intact uploaded case (its stored file no longer matches its content hash; "
                "upload the file again)",
            )
        try:
            text = raw.decode("utf-8")
        except UnicodeDecodeError:
            raise InputError("case", shown, "a UTF-8 text case file") from None
        case = parse_case(text, source_path=f"{case_id}.toml")
        with self._lock:
            self._loaded[case_id] = (mtime, case)
        return case

    def document(self, case_id: str) -> dict:
        """The case file ``case_id`` as parsed TOML (a fresh copy each time: callers change it).
        InputError as :meth:`load`."""
        import copy

        self.load(case_id)  # the same checks: the id, the content hash, a valid case
        path = self._path(case_id)
        assert path is not None
        mtime = path.stat().st_mtime
        with self._lock:
            hit = self._documents.get(case_id)
        if hit is None or hit[0] != mtime:
            hit = (mtime, _toml(path.read_text(encoding="utf-8")))
            with self._lock:
                self._documents[case_id] = hit
        return copy.deepcopy(hit[1])

    def is_sequence(self, case_id: object) -> bool:
        """Whether a case has a ``[sequence]`` section (it opens the sequence page)."""
        if not isinstance(case_id, str) or not self.exists(case_id):
            return False
        try:
            return "sequence" in self.document(case_id)
        except InputError:
            return False

    def effective(self, view: ViewState) -> Case:
        """The case a view shows: its file with the view's changes, validated by the engine
        (window dates within each body's ephemeris or element range, the one rule: solver/
        ephemeris/bodies.py) and its grid size checked (arithmetic, before anything is built)."""
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
    def add_upload(self, filename: object, contents: object) -> str:
        """Validate an uploaded file (a dcc.Upload data URL) and store it; returns its case id.

        Raises
        ------
        InputError
            Empty, too large, not text, not TOML, not a case the engine accepts (its dates
            within each body's ephemeris or element range) or a grid over the cap (the
            message names the key and what is accepted).
        """
        name = clean_filename(filename)
        if not isinstance(contents, str) or "," not in contents:
            raise InputError("upload", name, "one TOML case file")
        _, _, payload = contents.partition(",")
        if len(payload) > 2 * MAX_UPLOAD_BYTES:  # base64: 4 characters per 3 bytes
            raise InputError(
                "upload",
                f"{name} ({_size(len(payload) * 3 // 4)})",
                f"a case file under {MAX_UPLOAD_BYTES // 1024} KiB",
            )
        try:
            raw = base64.b64decode(payload, validate=True)
        except (binascii.Error, ValueError):
            raise InputError("upload", name, "a TOML case file") from None
        if not raw.strip():
            raise InputError(
                "upload", f"{name} (empty)", "a TOML case file with [case] and [window]"
            )
        if len(raw) > MAX_UPLOAD_BYTES:
            raise InputError(
                "upload",
                f"{name} ({_size(len(raw))})",
                f"a case file under {MAX_UPLOAD_BYTES // 1024} KiB",
            )
        if b"\x00" in raw:
            raise InputError("upload", name, "a text TOML case file (this one is binary)")
        try:
            text = raw.decode("utf-8")
        except UnicodeDecodeError:
            raise InputError("upload", name, "a UTF-8 text TOML case file") from None
        case = parse_case(text, source_path=name)
        if "sequence" in _toml(text):
            from solver.sequence.spec import parse_sequence_case

            parse_sequence_case(text, source_path=name)  # a sequence is checked as one
        else:
            check_grid_size(case)
        return self._store(raw)

    def add_case(self, case: Case) -> str:
        """Store a case built by the server (a survey target's window); returns its case id."""
        check_grid_size(case)
        return self._store(dumps_toml(case).encode("utf-8"))

    def _store(self, raw: bytes) -> str:
        """Keep validated case text under its content hash (atomic; the same text, the same id)."""
        case_id = content_id(raw)
        target = self.uploads_dir / f"{case_id}.toml"
        if target.exists():
            try:
                if content_id(target.read_bytes()) == case_id:
                    return case_id
            except OSError:
                pass
            _LOG.warning("replacing damaged upload %s with a fresh copy", case_id)
        self.uploads_dir.mkdir(parents=True, exist_ok=True)
        sweep_temporaries(self.uploads_dir)  # what writers killed mid-write left (hours old)
        with atomic_output(target) as handle:  # whole or not at all; fsynced, then renamed
            handle.write(raw)
        with self._lock:
            self._loaded.pop(case_id, None)
        return case_id


def _toml(text: str) -> dict:
    """A case file's TOML as a dict (the text was validated as a case before)."""
    import tomllib

    try:
        return tomllib.loads(text)
    except tomllib.TOMLDecodeError:
        raise InputError("case file", text[:40], "valid TOML (see sample_cases/)") from None


def my_case_ids(my_cases: object) -> list[str]:
    """The upload ids a viewer's browser lists (anything else in its list is dropped)."""
    if not isinstance(my_cases, list):
        return []
    out: list[str] = []
    for item in my_cases[-MAX_MY_CASES:]:
        if isinstance(item, str) and UPLOAD_ID_RE.fullmatch(item) and item not in out:
            out.append(item)
    return out


def remember(my_cases: object, case_id: str) -> list[str]:
    """A viewer's list with ``case_id`` added (uploads only; samples are always listed)."""
    ids = [i for i in my_case_ids(my_cases) if i != case_id]
    if UPLOAD_ID_RE.fullmatch(case_id):
        ids.append(case_id)
    return ids[-MAX_MY_CASES:]


def forget(my_cases: object, case_id: object) -> list[str]:
    return [i for i in my_case_ids(my_cases) if i != case_id]


def clean_filename(filename: object) -> str:
    """A file name as a message may show it: printable, at most 60 characters."""
    text = filename if isinstance(filename, str) else "the file"
    text = "".join(c for c in text if c.isprintable()).strip() or "the file"
    return text if len(text) <= 60 else text[:57] + "..."


def _size(n: int) -> str:
    return f"{n / 1024**2:.1f} MiB" if n >= 1024**2 else f"{n / 1024:.0f} KiB"


__all__ = [
    "MAX_UPLOAD_BYTES",
    "UPLOAD_ID_RE",
    "UPLOAD_PREFIX",
    "CaseCatalogue",
    "clean_filename",
    "content_id",
    "forget",
    "my_case_ids",
    "remember",
]
