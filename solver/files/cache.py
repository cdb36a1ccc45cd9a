"""Disk cache for window grids: one file per result, keyed by what produced it.

A window grid is a dict of named numpy arrays plus JSON-able provenance. The window engine asks
``GridCache.get(key)`` before computing and ``GridCache.put(key, ...)`` after; the key comes from
:func:`solver.digest.cache_key` over the normalized case, the ephemeris id and
``solver.ENGINE_VERSION``, so a changed input, ephemeris or engine simply misses.

Guarantees
----------
- **Atomic**: an entry is written to a uniquely named temporary file in the cache folder, flushed,
  fsynced and renamed over its final name with ``os.replace``. Readers only ever open final names,
  so no reader sees a partial file, whatever number of processes write at once.
- **Verified**: every entry carries a magic string, a format version, its own key, the array specs
  (name, dtype, shape, offset) and CRC-32 checksums of the header and of the array bytes (in
  16 MiB blocks). A file that fails any check (truncated, damaged, foreign, written for another
  key) is logged at debug level, removed, and reported as a miss: ``get`` never raises for a bad
  file, and the caller recomputes.
- **Exact**: a hit returns the arrays bit for bit (dtype, byte order, shape, NaN payloads).
- **Bounded**: after every ``put`` the least-recently-used entries are removed until the folder
  holds at most ``max_bytes`` (the entry just written is never removed). A hit refreshes its
  entry's modification time, which is the LRU clock. Temporary files older than an hour (left by
  writers that were killed) are swept at the same time.

The file format, its checks and the checksum choice are described in :mod:`solver.files.gridfile`.
"""

from __future__ import annotations

import logging
import os
import re
import stat as stat_module
import time
from collections.abc import Mapping
from dataclasses import dataclass
from datetime import UTC, datetime
from pathlib import Path
from typing import Any

import numpy as np

from solver.errors import InputError
from solver.files.atomic import STALE_TEMPORARY_AGE_S, atomic_output, sweep_temporaries
from solver.files.gridfile import UnknownFormatVersion, encode_grid, read_grid, write_grid

logger = logging.getLogger(__name__)

ENV_DIRECTORY = "ARCWINDOW_CACHE_DIR"
ENV_MAX_BYTES = "ARCWINDOW_CACHE_MAX_BYTES"

DEFAULT_MAX_BYTES = 4 * 1024**3
"""Default size cap, 4 GiB: a 1000 x 1000 window with five arc slots is about 1 GB, so the cap
keeps the last few large windows and many small ones, while staying small next to a typical
disk. Set ``ARCWINDOW_CACHE_MAX_BYTES`` or ``max_bytes`` to change it."""

_SUFFIX = ".awgrid"
_KEY_RE = re.compile(r"[A-Za-z0-9_-]{1,128}")
_ENTRY_RE = re.compile(r"([A-Za-z0-9_-]{1,128})\.awgrid")


# --------------------------------------------------------------------------------------------
# Results


@dataclass(frozen=True)
class CachedGrid:
    """A cache hit.

    Attributes
    ----------
    key : str
        The key it was stored under.
    arrays : dict[str, numpy.ndarray]
        The stored arrays, in the order they were given to ``put``; C-contiguous, writable views
        into one buffer (changing them does not change the file).
    metadata : dict[str, Any]
        The stored metadata after a JSON round trip (tuples come back as lists).
    path : pathlib.Path
        The entry's file.
    size_bytes : int
        File size, bytes.
    """

    key: str
    arrays: dict[str, np.ndarray]
    metadata: dict[str, Any]
    path: Path
    size_bytes: int


@dataclass(frozen=True)
class CacheEntry:
    """One cached grid, as listed by :meth:`GridCache.entries` (from the file system only).

    Attributes
    ----------
    key : str
        Entry key (taken from the file name; ``get`` checks it against the stored one).
    path : pathlib.Path
        Entry file.
    size_bytes : int
        File size, bytes.
    last_used_utc : datetime.datetime
        Last write or hit, timezone-aware UTC.
    """

    key: str
    path: Path
    size_bytes: int
    last_used_utc: datetime


# --------------------------------------------------------------------------------------------
# Configuration


def default_directory() -> Path:
    """Cache folder when neither an argument nor ``ARCWINDOW_CACHE_DIR`` names one.

    Returns
    -------
    pathlib.Path
        ``<per-user cache folder>/arcwindow/grids`` as given by ``platformdirs``
        (e.g. ``~/.cache/arcwindow/grids`` on Linux).
    """
    import platformdirs

    return Path(platformdirs.user_cache_dir("arcwindow")) / "grids"


_SIZE_RE = re.compile(r"\s*(\d+)\s*([kmgt]i?b?|b)?\s*", re.IGNORECASE)
_SIZE_UNITS = {
    "": 1,
    "b": 1,
    "k": 1000,
    "kb": 1000,
    "m": 1000**2,
    "mb": 1000**2,
    "g": 1000**3,
    "gb": 1000**3,
    "t": 1000**4,
    "tb": 1000**4,
    "ki": 1024,
    "kib": 1024,
    "mi": 1024**2,
    "mib": 1024**2,
    "gi": 1024**3,
    "gib": 1024**3,
    "ti": 1024**4,
    "tib": 1024**4,
}


def parse_byte_size(text: str, field: str = ENV_MAX_BYTES) -> int:
    """Parse a size such as ``"4294967296"``, ``"4GiB"`` or ``"500MB"`` to bytes.

    Decimal suffixes (kB, MB, GB, TB) are powers of 1000, binary ones (KiB, MiB, GiB, TiB) powers
    of 1024; case does not matter.

    Parameters
    ----------
    text : str
        The size.
    field : str
        Name used in the error message.

    Returns
    -------
    int
        Size in bytes, >= 0.

    Raises
    ------
    InputError
        If the text is not such a size.
    """
    match = _SIZE_RE.fullmatch(text)
    if match is None or (match.group(2) or "").lower() not in _SIZE_UNITS:
        raise InputError(field, text, "a byte count >= 0 such as 4294967296, 4GiB or 500MB")
    return int(match.group(1)) * _SIZE_UNITS[(match.group(2) or "").lower()]


# --------------------------------------------------------------------------------------------
# The cache


class GridCache:
    """Folder of verified, atomically written grid files with an LRU size cap.

    Parameters
    ----------
    directory : str or os.PathLike or None
        Cache folder. ``None``: the ``ARCWINDOW_CACHE_DIR`` environment variable if set and not
        empty, else :func:`default_directory`. Created on the first ``put``.
    max_bytes : int or None
        Size cap, bytes (>= 0). ``None``: ``ARCWINDOW_CACHE_MAX_BYTES`` if set (a byte count or
        a size such as ``4GiB``, see :func:`parse_byte_size`), else :data:`DEFAULT_MAX_BYTES`.

    Notes
    -----
    Only files named ``<key>.awgrid`` and temporaries named ``.<key>.awgrid.<pid>.<hex>.tmp`` are
    ever read, listed or removed, so a cache folder shared with other files is safe. Safe for any
    number of threads and processes at once: no locks, only atomic renames.

    Examples
    --------
    >>> import tempfile
    >>> cache = GridCache(tempfile.mkdtemp())
    >>> key = cache_key({"case": {"tof_days": [100, 400]}, "engine": "0.1.0"})
    >>> _ = cache.put(key, {"c3_km2_s2": np.zeros((2, 3))}, {"ephemeris": "DE423"})
    >>> cache.get(key).arrays["c3_km2_s2"].shape
    (2, 3)
    """

    def __init__(
        self, directory: str | os.PathLike[str] | None = None, max_bytes: int | None = None
    ) -> None:
        if directory is None:
            env_dir = os.environ.get(ENV_DIRECTORY, "").strip()
            directory = Path(env_dir).expanduser() if env_dir else default_directory()
        self.directory = Path(directory)
        if max_bytes is None:
            env_max = os.environ.get(ENV_MAX_BYTES, "").strip()
            max_bytes = parse_byte_size(env_max) if env_max else DEFAULT_MAX_BYTES
        if isinstance(max_bytes, bool) or not isinstance(max_bytes, int | np.integer):
            raise InputError("max_bytes", max_bytes, "an integer number of bytes >= 0")
        if max_bytes < 0:
            raise InputError("max_bytes", max_bytes, "an integer number of bytes >= 0")
        self.max_bytes = int(max_bytes)

    def __repr__(self) -> str:
        return f"GridCache({str(self.directory)!r}, max_bytes={self.max_bytes})"

    def path_for(self, key: str) -> Path:
        """File that holds (or would hold) the entry for ``key``."""
        _check_key(key)
        return self.directory / f"{key}{_SUFFIX}"

    # -- reading -------------------------------------------------------------------------------

    def get(self, key: str) -> CachedGrid | None:
        """Stored grid for ``key``, or ``None`` on a miss or an untrustworthy file.

        A hit refreshes the entry's last-used time. A bad file (truncated, damaged, foreign,
        stored for another key) is logged at debug level and removed; it is never an error.

        Parameters
        ----------
        key : str
            Key from :func:`cache_key` (letters, digits, ``-`` and ``_``; 1 to 128 characters).

        Returns
        -------
        CachedGrid or None
        """
        path = self.path_for(key)
        try:
            handle = open(path, "rb", buffering=0)
        except FileNotFoundError:
            return None
        except OSError as exc:
            logger.debug("grid cache: cannot open %s: %s", path, exc)
            return None
        with handle:
            opened = os.fstat(handle.fileno())
            try:
                arrays, metadata = read_grid(handle, opened.st_size, key)
            except UnknownFormatVersion as exc:
                logger.debug("grid cache: ignoring %s: %s", path, exc)
                return None
            except MemoryError:
                logger.debug("grid cache: not enough memory to load %s", path)
                return None
            except Exception as exc:  # any failure to parse means: do not trust, recompute
                logger.debug("grid cache: discarding %s: %s", path, exc)
                _remove_if_same_file(path, opened)
                return None
        now_ns = time.time_ns()
        try:
            os.utime(path, ns=(now_ns, now_ns))
        except OSError:
            pass  # evicted or replaced meanwhile; the data we hold is still complete and valid
        return CachedGrid(key, arrays, metadata, path, opened.st_size)

    def entries(self) -> list[CacheEntry]:
        """Entries on disk, most recently used first (temporaries are not listed).

        Returns
        -------
        list[CacheEntry]
        """
        scanned = sorted(self._scan_entries(), key=lambda found: found[2].st_mtime_ns, reverse=True)
        return [
            CacheEntry(key, path, stat.st_size, datetime.fromtimestamp(stat.st_mtime_ns / 1e9, UTC))
            for path, key, stat in scanned
        ]

    def total_bytes(self) -> int:
        """Total size of the entries on disk, bytes (temporaries not counted)."""
        return sum(stat.st_size for _, _, stat in self._scan_entries())

    # -- writing -------------------------------------------------------------------------------

    def put(self, key: str, arrays: Mapping[str, np.ndarray], metadata: Mapping[str, Any]) -> Path:
        """Store a grid atomically, then evict least-recently-used entries above the cap.

        Parameters
        ----------
        key : str
            Key from :func:`cache_key`.
        arrays : Mapping[str, numpy.ndarray]
            Named arrays of any shape and of any dtype without Python objects (numbers, bools,
            datetimes, fixed-width text, structured). Non-contiguous arrays are stored in C
            order.
        metadata : Mapping[str, Any]
            JSON-able provenance (numpy scalars and arrays are converted).

        Returns
        -------
        pathlib.Path
            The entry file.

        Raises
        ------
        InputError
            If the key, an array or the metadata cannot be stored.
        OSError
            If the file cannot be written (disk full, no permission). Nothing partial is left
            under the entry's name; the caller may carry on without the cache.
        """
        final_path = self.path_for(key)
        encoded = encode_grid(key, arrays, metadata)
        self.directory.mkdir(parents=True, exist_ok=True)
        with atomic_output(final_path, buffering=0) as handle:
            write_grid(handle.fileno(), encoded)
            now_ns = time.time_ns()  # fine-grained clock: file systems' own stamps are coarse
            os.utime(handle.fileno(), ns=(now_ns, now_ns))
        self._evict(protect=final_path)
        return final_path

    def remove(self, key: str) -> bool:
        """Remove one entry. Returns whether a file was removed."""
        return _unlink_quietly(self.path_for(key))

    def clear(self) -> int:
        """Remove every entry and every stale temporary file.

        Temporaries younger than :data:`STALE_TEMPORARY_AGE_S` may belong to a writer still at
        work and are left alone.

        Returns
        -------
        int
            Number of entries removed.
        """
        removed = sum(_unlink_quietly(path) for path, _, _ in self._scan_entries())
        self._sweep_temporaries()
        return removed

    # -- internals -----------------------------------------------------------------------------

    def _scan_entries(self) -> list[tuple[Path, str, os.stat_result]]:
        found: list[tuple[Path, str, os.stat_result]] = []
        try:
            listing = list(os.scandir(self.directory))
        except (FileNotFoundError, NotADirectoryError):
            return found
        for item in listing:
            match = _ENTRY_RE.fullmatch(item.name)
            if match is None:
                continue
            try:
                stat = item.stat(follow_symlinks=False)
            except FileNotFoundError:
                continue  # removed by another process while we looked
            if not _is_regular(stat):
                continue
            found.append((Path(item.path), match.group(1), stat))
        return found

    def _sweep_temporaries(self) -> None:
        sweep_temporaries(
            self.directory,
            max_age_s=STALE_TEMPORARY_AGE_S,
            name_matches=lambda name: _ENTRY_RE.fullmatch(name) is not None,
        )

    def _evict(self, protect: Path) -> None:
        self._sweep_temporaries()
        scanned = self._scan_entries()
        total = sum(stat.st_size for _, _, stat in scanned)
        if total <= self.max_bytes:
            return
        scanned.sort(key=lambda found: (found[2].st_mtime_ns, found[1]))
        for path, _, stat in scanned:
            if total <= self.max_bytes:
                break
            if path == protect:
                continue
            logger.debug("grid cache: evicting %s (%d bytes)", path, stat.st_size)
            _unlink_quietly(path)
            total -= stat.st_size  # counted as gone even if another process removed it first


def _check_key(key: str) -> None:
    if not isinstance(key, str) or _KEY_RE.fullmatch(key) is None:
        raise InputError("key", key, "1 to 128 letters, digits, '-' or '_' (see cache_key)")


# --------------------------------------------------------------------------------------------
# File-system helpers


def _is_regular(status: os.stat_result) -> bool:
    return stat_module.S_ISREG(status.st_mode)


def _unlink_quietly(path: Path) -> bool:
    try:
        os.unlink(path)
    except FileNotFoundError:
        return False
    except OSError as exc:  # e.g. open by a reader on Windows: try again at the next eviction
        logger.debug("grid cache: cannot remove %s: %s", path, exc)
        return False
    return True


def _remove_if_same_file(path: Path, opened: os.stat_result) -> None:
    """Remove a bad entry unless another process has meanwhile replaced it with a new file."""
    try:
        current = os.stat(path)
    except OSError:
        return
    if (current.st_ino, current.st_dev) == (opened.st_ino, opened.st_dev):
        _unlink_quietly(path)


__all__ = [
    "DEFAULT_MAX_BYTES",
    "ENV_DIRECTORY",
    "ENV_MAX_BYTES",
    "STALE_TEMPORARY_AGE_S",
    "CacheEntry",
    "CachedGrid",
    "GridCache",
    "default_directory",
    "parse_byte_size",
]
