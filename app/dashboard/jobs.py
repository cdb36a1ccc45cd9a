"""Grids for the dashboard: an in-process LRU in front of the disk cache, and background jobs.

A grid request is answered from memory when the grid was solved recently (a metric change or a
second viewer costs no solving), else a job is started on a worker thread that reads the disk
cache or computes the grid. The callback that asked returns at once; the page polls the job's
progress and may cancel it (the job's progress callback then raises
``solver.window.Cancelled``). Two viewers who ask for the same grid share one job.

Why a thread and not a task queue: the grid engine spends its time in numpy and compiled
kernels that let other threads run, a single server process serves a team, and a thread needs no
broker, no extra process and no extra dependency. Cancellation is checked between chunks of
departure dates, when the engine reports progress.
"""

from __future__ import annotations

import threading
import time
from collections import OrderedDict
from collections.abc import Callable
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass, field

from solver.errors import InputError
from solver.files.cache import GridCache
from solver.window.case import Case
from solver.window.grid import Cancelled, WindowGrid, compute_window
from solver.window.provenance import window_cache_key

from .slowdown import Slowdown

DEFAULT_MEMORY_GRIDS = 8
DEFAULT_MEMORY_BYTES = 2 * 1024**3
"""In-memory LRU bounds: a 1000 x 1000 single-revolution grid holds about 0.15 GB of arrays, a
five-slot one about 0.7 GB, so 2 GiB keeps a few large grids and many small ones."""
_FINISHED_JOBS_KEPT = 32


@dataclass
class Job:
    """One grid computation and what the page shows about it."""

    key: str
    title: str
    state: str = "running"  # running, done, failed, cancelled
    done_rows: int = 0
    total_rows: int = 0
    message: str = ""
    started: float = field(default_factory=time.monotonic)
    finished: float | None = None
    cancel_event: threading.Event = field(default_factory=threading.Event)
    done_event: threading.Event = field(default_factory=threading.Event)

    @property
    def fraction(self) -> float:
        return self.done_rows / self.total_rows if self.total_rows else 0.0

    def status(self) -> dict:
        """JSON-able status for the page."""
        return {
            "key": self.key,
            "state": self.state,
            "fraction": round(self.fraction, 4),
            "message": self.message,
            "elapsed_s": round((self.finished or time.monotonic()) - self.started, 2),
        }


def grid_nbytes(grid: WindowGrid) -> int:
    return sum(a.nbytes for a in grid.to_arrays().values())


class GridStore:
    """Solved grids by cache key: memory LRU, disk cache, background jobs.

    Parameters
    ----------
    cache : GridCache or None
        Disk cache read and written by the jobs (None: memory only).
    workers : int
        Grid jobs run at once; more wait in line.
    max_grids, max_bytes : int
        Bounds of the in-memory LRU.
    compute : callable, optional
        The grid engine (``compute_window``); tests pass a slow or failing stand-in.
    """

    def __init__(
        self,
        cache: GridCache | None,
        *,
        workers: int = 1,
        max_grids: int = DEFAULT_MEMORY_GRIDS,
        max_bytes: int = DEFAULT_MEMORY_BYTES,
        compute: Callable[..., WindowGrid] = compute_window,
        slowdown: Slowdown | None = None,
    ) -> None:
        self.slowdown = slowdown or Slowdown.from_environment()
        self.cache = cache
        self.max_grids = max_grids
        self.max_bytes = max_bytes
        self._compute = compute
        self._lock = threading.Lock()
        self._grids: OrderedDict[str, tuple[WindowGrid, int]] = OrderedDict()
        self._jobs: OrderedDict[str, Job] = OrderedDict()
        self._pool = ThreadPoolExecutor(max_workers=workers, thread_name_prefix="arcwindow-grid")

    # -- memory ----------------------------------------------------------------------------
    def memory_get(self, key: str) -> WindowGrid | None:
        with self._lock:
            hit = self._grids.get(key)
            if hit is None:
                return None
            self._grids.move_to_end(key)
            return hit[0]

    def memory_put(self, key: str, grid: WindowGrid) -> None:
        size = grid_nbytes(grid)
        with self._lock:
            self._grids[key] = (grid, size)
            self._grids.move_to_end(key)
            total = sum(s for _, s in self._grids.values())
            while len(self._grids) > 1 and (
                len(self._grids) > self.max_grids or total > self.max_bytes
            ):
                _, (_, dropped) = self._grids.popitem(last=False)
                total -= dropped

    # -- jobs ------------------------------------------------------------------------------
    def request(self, case: Case) -> tuple[WindowGrid | None, Job | None]:
        """The grid if it is in memory, else the (new or shared) job that makes it."""
        key = window_cache_key(case)
        grid = self.memory_get(key)
        if grid is not None:
            return grid, None
        with self._lock:
            job = self._jobs.get(key)
            if job is not None and job.state in ("running", "done"):
                if job.state == "done" and key not in self._grids:
                    job = None  # evicted since: solve again
                else:
                    return None, job
            job = Job(key=key, title=case.title)
            self._jobs[key] = job
            self._jobs.move_to_end(key)
            self._trim_jobs()
        self._pool.submit(self._run, job, case)
        return None, job

    def job(self, key: str) -> Job | None:
        with self._lock:
            return self._jobs.get(key)

    def cancel(self, key: str) -> bool:
        job = self.job(key)
        if job is None or job.state != "running":
            return False
        job.cancel_event.set()
        return True

    def wait(self, job: Job, timeout_s: float) -> WindowGrid | None:
        """Wait up to ``timeout_s`` for a job; its grid if it finished, else None."""
        job.done_event.wait(timeout_s)
        return self.memory_get(job.key) if job.state == "done" else None

    def _trim_jobs(self) -> None:
        finished = [k for k, j in self._jobs.items() if j.state != "running"]
        for k in finished[: max(0, len(finished) - _FINISHED_JOBS_KEPT)]:
            del self._jobs[k]

    def _run(self, job: Job, case: Case) -> None:
        def progress(done: int, total: int) -> None:
            job.done_rows, job.total_rows = done, total
            if job.cancel_event.is_set():
                raise Cancelled()

        def check() -> None:
            if job.cancel_event.is_set():
                raise Cancelled()

        try:
            self.slowdown.grid_pause(check)
            grid = self._compute(case, cache=self.cache, progress=progress)
        except Cancelled:
            job.state, job.message = "cancelled", "Computation cancelled."
        except InputError as exc:
            job.state, job.message = "failed", str(exc)
        except Exception as exc:  # a failed job must be reported, not lost with its thread
            job.state, job.message = "failed", f"Grid computation failed: {exc!r}"
        else:
            self.memory_put(job.key, grid)
            job.state = "done"
            job.message = "read from the disk cache" if grid.from_cache else "computed"
        finally:
            job.finished = time.monotonic()
            job.done_event.set()

    def shutdown(self) -> None:
        with self._lock:
            for job in self._jobs.values():
                job.cancel_event.set()
        self._pool.shutdown(wait=False, cancel_futures=True)
