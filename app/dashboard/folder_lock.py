"""An exclusive lock on a file, held across threads and processes.

The shortlist store takes it before it sets an unreadable store aside, so that of two openers
(two handles in one server, or two servers on one data folder) that both found the store
damaged, only the first renames it: the second, once it holds the lock, finds the new store the
first one started and keeps it.

The lock is the operating system's (``flock`` on POSIX, ``msvcrt.locking`` on Windows) on a
small file that is never removed (removing it would let two openers lock two different files).
It is released when the holder closes the file, and by the operating system if the holder dies,
so a crashed server never leaves the folder locked.
"""

from __future__ import annotations

import contextlib
import os
import time
from collections.abc import Iterator
from pathlib import Path

_WINDOWS_RETRY_S = 0.05


@contextlib.contextmanager
def exclusive_lock(path: Path) -> Iterator[None]:
    """Hold an exclusive lock on ``path`` (created if missing) for the ``with`` block.

    Waits as long as another holder keeps it. Each ``open`` is its own lock, so two threads of
    one process exclude each other as two processes do.
    """
    descriptor = os.open(path, os.O_RDWR | os.O_CREAT, 0o644)
    try:
        _lock(descriptor)
        try:
            yield
        finally:
            _unlock(descriptor)
    finally:
        os.close(descriptor)


try:
    import fcntl

    def _lock(descriptor: int) -> None:
        fcntl.flock(descriptor, fcntl.LOCK_EX)

    def _unlock(descriptor: int) -> None:
        fcntl.flock(descriptor, fcntl.LOCK_UN)

except ImportError:  # Windows
    import msvcrt

    def _lock(descriptor: int) -> None:
        os.lseek(descriptor, 0, os.SEEK_SET)  # the lock covers the file's first byte
        while True:
            try:
                msvcrt.locking(descriptor, msvcrt.LK_NBLCK, 1)  # type: ignore[attr-defined]
                return
            except OSError:
                time.sleep(_WINDOWS_RETRY_S)

    def _unlock(descriptor: int) -> None:
        os.lseek(descriptor, 0, os.SEEK_SET)
        msvcrt.locking(descriptor, msvcrt.LK_UNLCK, 1)  # type: ignore[attr-defined]


__all__ = ["exclusive_lock"]
