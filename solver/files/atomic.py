"""Files written whole or not at all, with a checksum that is checked before they are trusted.

Every file arcwindow writes goes through :func:`atomic_output`:

1. the bytes go to a uniquely named temporary file in the destination folder
   (``.NAME.<pid>.<8 hex>.tmp``, so it is on the same file system and a rename is atomic);
2. the file is flushed and fsynced, then renamed over ``NAME`` with ``os.replace``; the folder is
   fsynced so the rename itself survives a power cut;
3. with ``checksum=True``, a SHA-256 of the finished file is written beside it as
   ``NAME.sha256`` (the format of ``sha256sum``: ``<64 hex>  NAME``, so ``sha256sum -c`` checks
   it too), atomically, right after the data file is in place.

A process killed at any moment before step 2 leaves the previous ``NAME`` untouched and at worst a
temporary file, which :func:`sweep_temporaries` removes once it is older than
:data:`STALE_TEMPORARY_AGE_S` (younger ones may belong to a writer still at work). A kill in the
microseconds between the two renames of step 2 and 3 leaves the new file beside the old
checksum: :func:`verify_checksum` then reports a mismatch, and the file is not trusted.

Why SHA-256 and a file beside the data rather than inside it: the formats we export (CSV,
Parquet, CCSDS OEM, JSON) are read by other tools and have no place for a checksum of the whole
file; a side file leaves them standard and is checked with a standard tool. The grid cache has
its own format with checksums inside (:mod:`solver.files.gridfile`) and uses only the atomic
write.
"""

from __future__ import annotations

import contextlib
import hashlib
import io
import logging
import os
import re
import secrets
import time
from collections.abc import Callable, Iterator
from pathlib import Path
from typing import BinaryIO, cast

logger = logging.getLogger(__name__)

STALE_TEMPORARY_AGE_S = 3600.0
"""Temporary files untouched this long belong to writers that died; sweeps remove them."""

CHECKSUM_SUFFIX = ".sha256"
_HASH_BLOCK_BYTES = 4 * 1024**2
_TEMP_RE = re.compile(r"\.(?P<name>.+)\.\d+\.[0-9a-f]{8}\.tmp")
_CHECKSUM_LINE_RE = re.compile(r"([0-9a-f]{64}) [ *](.+)\n?")
_MAX_CHECKSUM_FILE_BYTES = 4096

ENV_TEST_WRITE_PAUSE_S = "ARCWINDOW_TEST_WRITE_PAUSE_S"
"""Test-only: seconds :func:`atomic_output` sleeps after the data is written and before it is
renamed, so a test can kill a writer at that moment deterministically. Unset in normal use."""


class DamagedFile(Exception):
    """A file that must not be trusted (missing or mismatched checksum); the message says why."""


def temporary_path(path: str | os.PathLike[str]) -> Path:
    """A fresh temporary name for ``path`` in its own folder (``.NAME.<pid>.<8 hex>.tmp``)."""
    target = Path(path)
    return target.with_name(f".{target.name}.{os.getpid()}.{secrets.token_hex(4)}.tmp")


def checksum_path(path: str | os.PathLike[str]) -> Path:
    """The checksum file of ``path``: ``NAME.sha256`` beside it."""
    target = Path(path)
    return target.with_name(target.name + CHECKSUM_SUFFIX)


def file_sha256(path: str | os.PathLike[str]) -> str:
    """SHA-256 of a file's bytes, lowercase hex (read in 4 MiB blocks)."""
    digest = hashlib.sha256()
    with open(path, "rb", buffering=0) as handle:
        while block := handle.read(_HASH_BLOCK_BYTES):
            digest.update(block)
    return digest.hexdigest()


@contextlib.contextmanager
def atomic_output(
    path: str | os.PathLike[str], *, checksum: bool = False, buffering: int = -1
) -> Iterator[BinaryIO]:
    """Write ``path`` atomically: yields a binary file; the data replaces ``path`` on exit.

    Parameters
    ----------
    path : path-like
        Final file name. Its folder must exist.
    checksum : bool
        Also write ``NAME.sha256`` (see :func:`verify_checksum`).
    buffering : int
        As for :func:`open`; ``0`` gives an unbuffered file whose ``fileno()`` may be written to
        directly.

    Raises
    ------
    OSError
        If the file cannot be written (disk full, no permission): ``path`` is left as it was and
        the temporary file is removed. Any exception raised inside the ``with`` block does the
        same.
    """
    final = Path(path)
    temp = temporary_path(final)
    handle = open(temp, "xb", buffering=buffering)  # closed below, before the rename
    hashing = _HashingWriter(handle) if checksum else None
    try:
        try:
            yield handle if hashing is None else cast(BinaryIO, hashing)
            handle.flush()
            os.fsync(handle.fileno())
        finally:
            handle.close()
        _test_pause()
        digest = hashing.hexdigest() if hashing is not None else None
        os.replace(temp, final)
    except BaseException:
        _unlink_quietly(temp)
        raise
    if digest is not None:
        write_checksum(final, digest)
    _fsync_folder(final.parent)


class _HashingWriter(io.RawIOBase):
    """A write-only file that hashes what passes through it on the way to the real file.

    Hashing as the bytes are written, rather than reading the file back, keeps an 8 GB table from
    being read twice. It offers no ``fileno`` and no ``seek``: bytes written around it would be
    missing from the hash.
    """

    def __init__(self, handle: BinaryIO) -> None:
        super().__init__()
        self._handle = handle
        self._digest = hashlib.sha256()
        self._position = 0

    def writable(self) -> bool:
        return True

    def write(self, data) -> int:
        view = memoryview(data).cast("B")
        self._digest.update(view)
        self._handle.write(view)
        self._position += view.nbytes
        return view.nbytes

    def tell(self) -> int:
        return self._position

    def flush(self) -> None:
        self._handle.flush()

    def hexdigest(self) -> str:
        return self._digest.hexdigest()


def write_bytes_atomic(
    path: str | os.PathLike[str], data: bytes, *, checksum: bool = False
) -> Path:
    """Write ``data`` to ``path`` atomically (see :func:`atomic_output`); returns the path."""
    with atomic_output(path, checksum=checksum) as handle:
        handle.write(data)
    return Path(path)


def write_checksum(path: str | os.PathLike[str], digest: str | None = None) -> Path:
    """Write ``NAME.sha256`` for ``path`` atomically (its digest computed unless given)."""
    target = Path(path)
    digest = digest or file_sha256(target)
    side = checksum_path(target)
    temp = temporary_path(side)
    try:
        with open(temp, "xb") as handle:
            handle.write(f"{digest}  {target.name}\n".encode())
            handle.flush()
            os.fsync(handle.fileno())
        os.replace(temp, side)
    except BaseException:
        _unlink_quietly(temp)
        raise
    return side


def verify_checksum(path: str | os.PathLike[str]) -> str:
    """Check ``path`` against its ``NAME.sha256``; returns the digest.

    Raises
    ------
    DamagedFile
        The file or its checksum file is missing or unreadable, or they do not match.
    """
    target = Path(path)
    side = checksum_path(target)
    try:
        with open(side, "rb") as handle:
            raw = handle.read(_MAX_CHECKSUM_FILE_BYTES + 1)
    except FileNotFoundError:
        raise DamagedFile(f"{target.name}: no checksum file {side.name}") from None
    except OSError as exc:
        raise DamagedFile(f"{target.name}: checksum file unreadable ({exc.strerror})") from None
    match = _CHECKSUM_LINE_RE.fullmatch(raw.decode("ascii", "replace"))
    if len(raw) > _MAX_CHECKSUM_FILE_BYTES or match is None:
        raise DamagedFile(f"{target.name}: checksum file {side.name} is not a SHA-256 line")
    if match.group(2) != target.name:
        raise DamagedFile(f"{target.name}: checksum file {side.name} names another file")
    try:
        actual = file_sha256(target)
    except FileNotFoundError:
        raise DamagedFile(f"{target.name}: missing") from None
    except OSError as exc:
        raise DamagedFile(f"{target.name}: unreadable ({exc.strerror})") from None
    if actual != match.group(1):
        raise DamagedFile(f"{target.name}: contents do not match {side.name}")
    return actual


def sweep_temporaries(
    folder: str | os.PathLike[str],
    *,
    max_age_s: float = STALE_TEMPORARY_AGE_S,
    name_matches: Callable[[str], bool] | None = None,
) -> int:
    """Remove temporary files left in ``folder`` by writers that died; returns how many.

    Only names of the form :func:`temporary_path` gives are considered, only those untouched for
    ``max_age_s`` seconds are removed, and with ``name_matches`` only those whose final name it
    accepts (so a shared folder's other temporaries are left alone).
    """
    try:
        listing = list(os.scandir(folder))
    except (FileNotFoundError, NotADirectoryError):
        return 0
    oldest_live_ns = time.time_ns() - int(max_age_s * 1e9)
    removed = 0
    for item in listing:
        match = _TEMP_RE.fullmatch(item.name)
        if match is None or (name_matches is not None and not name_matches(match["name"])):
            continue
        try:
            status = item.stat(follow_symlinks=False)
        except FileNotFoundError:
            continue
        if item.is_file(follow_symlinks=False) and status.st_mtime_ns < oldest_live_ns:
            logger.debug("removing stale temporary file %s", item.path)
            removed += _unlink_quietly(Path(item.path))
    return removed


def _test_pause() -> None:
    value = os.environ.get(ENV_TEST_WRITE_PAUSE_S)
    if value:
        time.sleep(float(value))


def _fsync_folder(folder: Path) -> None:
    """Make a rename durable (POSIX); not possible, and not needed, everywhere."""
    try:
        fd = os.open(folder, os.O_RDONLY)
    except OSError:
        return
    try:
        os.fsync(fd)
    except OSError:
        pass
    finally:
        os.close(fd)


def _unlink_quietly(path: Path) -> bool:
    try:
        os.unlink(path)
    except FileNotFoundError:
        return False
    except OSError as exc:
        logger.debug("cannot remove %s: %s", path, exc)
        return False
    return True


__all__ = [
    "CHECKSUM_SUFFIX",
    "ENV_TEST_WRITE_PAUSE_S",
    "STALE_TEMPORARY_AGE_S",
    "DamagedFile",
    "atomic_output",
    "checksum_path",
    "file_sha256",
    "sweep_temporaries",
    "temporary_path",
    "verify_checksum",
    "write_bytes_atomic",
    "write_checksum",
]
