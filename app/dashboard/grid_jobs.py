"""Solved grids (and sequence searches) for the dashboard: an in-process LRU in front of the disk
cache, and fair background jobs that make them.

A grid request is answered from memory when the grid was solved recently (a metric change or a
second viewer costs no solving); otherwise a job is queued. The callback that asked returns at
once with a :class:`Ticket` (what the page shows: queued, solving with its progress, ready,
failed, cancelled, lost) and the page polls the ticket.

Fairness, as a shared server needs it:

* **A pool with a queue, in lanes.** Grids up to :data:`LARGE_JOB_CELL_ARCS` cell-arcs go to
  the small lane (two workers), larger ones to the large lane (one worker), so a grid just under
  the cap never holds up another viewer's small grid. Sequence searches (the sequence page's
  :class:`Work`, seconds to a minute each) have a lane of their own (one worker), so a search
  never holds up a grid, nor a grid a search.
* **Jobs are shared and owned by their waiters.** Every viewer (one browser tab) that asks for a
  grid becomes one of its job's waiters. A viewer may cancel only its own wait; the job stops
  when nobody waits for it any more. A viewer that moves on to another grid stops waiting for
  the previous one, and a waiter that stops polling (a closed tab) is dropped after
  :data:`LEASE_S` seconds.
* **Limits per client.** One address may keep at most :data:`MAX_JOBS_PER_ADDRESS` jobs of its
  own in the queue at once, and the queue holds at most :data:`MAX_QUEUED_JOBS`; beyond that the
  request is refused with a message (joining a job that already exists is always allowed).

Jobs never vanish silently: a job whose worker raised, or whose grid was dropped from memory
before anyone drew it, reports so (``failed`` or ``lost``), and the page restarts or reports it.
The disk cache is written after the grid is in memory, on a writer thread of its own, so a large
grid's file write neither delays its map nor holds a lane.

Any other background work joins the same pool as a :class:`Work` (:meth:`GridJobs.submit`): its
key, its lane, how to compute it (with progress and a cancel check), its size in memory and,
optionally, how to read and write it in the disk cache; it gets the same tickets, waiters,
leases, per-address limits and cancellation as a grid.

Why threads and not a task queue: the grid engine spends its time in numpy and compiled kernels
that let other threads run, one server process serves a team, and threads need no broker, no
extra process and no extra dependency. Cancellation is heard between chunks of departure dates,
when the engine reports progress.
"""

from __future__ import annotations

import functools
import logging
import threading
import time
from collections import OrderedDict
from collections.abc import Callable
from concurrent.futures import Future, ThreadPoolExecutor
from dataclasses import dataclass, field
from typing import Any

from solver.errors import InputError
from solver.files.cache import GridCache
from solver.window.case import Case
from solver.window.grid import Cancelled, WindowGrid, check_grid_size, compute_window
from solver.window.provenance import window_cache_key

from .slowdown import Slowdown

DEFAULT_MEMORY_GRIDS = 8
DEFAULT_MEMORY_BYTES = 2 * 1024**3
"""In-memory LRU bounds: a 1000 x 1000 single-revolution grid holds about 0.15 GB of arrays, a
five-slot one about 0.7 GB, so 2 GiB keeps a few large grids and many small ones."""
LARGE_JOB_CELL_ARCS = 2_000_000
"""Grids above this many cell-arcs (a few seconds of solving) go to the large lane."""
SMALL_LANE_WORKERS = 2
LARGE_LANE_WORKERS = 1
SEARCH_LANE_WORKERS = 1
LANES = ("small", "large", "search")
MAX_WITHDRAWN = 4096
"""Cancelled waits remembered (per viewer and job) so a page's later polls see them."""
WITHDRAWN = "Cancelled: this tab no longer waits for it (other viewers may)."
LEASE_S = 30.0
"""A waiter that has not polled for this long is dropped (the page polls every 2 s at most)."""
STALL_S = 120.0
"""A running job that has reported no progress for this long is reported as stalled."""
MAX_JOBS_PER_ADDRESS = 8
MAX_QUEUED_JOBS = 24
_FINISHED_JOBS_KEPT = 64

_LOG = logging.getLogger(__name__)

PHASES = ("ready", "queued", "running", "failed", "cancelled", "lost")


@dataclass(frozen=True)
class Ticket:
    """What a viewer is told about a grid: JSON-able, no live objects.

    Attributes
    ----------
    key : str
        The grid's cache key (``window_cache_key``).
    phase : {"ready", "queued", "running", "failed", "cancelled", "lost"}
        ``lost``: the job is unknown to the server or its grid was dropped from memory before it
        was drawn; ask again.
    fraction : float
        Departure rows solved, 0 to 1.
    elapsed_s : float
        Seconds since the job was queued.
    ahead : int
        Jobs ahead of it in its lane's queue (0 when running).
    stalled : bool
        Running, with no progress for :data:`STALL_S` seconds.
    message : str
        Why a job failed or was cancelled.
    note : str
        How a running job is going, in words (a search's best score so far), when it says.
    withdrawn : bool
        Phase ``cancelled`` because this viewer pressed Cancel (not a lapsed wait): a page that
        lost its Cancel's answer settles on it instead of asking again.
    """

    key: str
    phase: str
    fraction: float = 0.0
    elapsed_s: float = 0.0
    ahead: int = 0
    stalled: bool = False
    message: str = ""
    note: str = ""
    withdrawn: bool = False


Check = Callable[[], None]
"""Called between steps of a job; raises :class:`Cancelled` when nobody waits for it any more."""
Report = Callable[[int, int], None]
"""A job's progress: ``(done, total)`` steps (it also checks for a cancel)."""


@dataclass(frozen=True)
class Work:
    """One piece of background work for the pool.

    Attributes
    ----------
    key : str
        What identifies the result (its cache key): two requests with one key share one job.
    lane : {"small", "large", "search"}
    compute : callable(report, check) -> result
        Does the work; calls ``report(done, total)`` now and then (which raises
        :class:`Cancelled` once nobody waits).
    nbytes : callable(result) -> int
        Memory the result holds (the LRU's bound).
    load : callable() -> result or None, optional
        The result from the disk cache, if it is there.
    store : callable(result) -> None, optional
        Write the result to the disk cache (on the writer thread, after it is in memory).
    pause : callable(check) -> None, optional
        The test-only delay before the work (``slowdown``).
    note : callable() -> str, optional
        A line on how the work is going (shown beside its progress).
    """

    key: str
    lane: str
    compute: Callable[[Report, Check], Any]
    nbytes: Callable[[Any], int]
    load: Callable[[], Any] | None = None
    store: Callable[[Any], None] | None = None
    pause: Callable[[Check], None] | None = None
    note: Callable[[], str] | None = None


@dataclass
class _Job:
    key: str
    work: Work
    lane: str
    address: str
    state: str = "queued"  # queued, running, done, failed, cancelled
    done_rows: int = 0
    total_rows: int = 0
    message: str = ""
    queued_at: float = 0.0
    progress_at: float = 0.0
    finished_at: float | None = None
    waiters: dict[str, float] = field(default_factory=dict)  # viewer -> last seen (monotonic)
    cancel_event: threading.Event = field(default_factory=threading.Event)
    done_event: threading.Event = field(default_factory=threading.Event)

    @property
    def fraction(self) -> float:
        return self.done_rows / self.total_rows if self.total_rows else 0.0

    @property
    def active(self) -> bool:
        return self.state in ("queued", "running")


@functools.lru_cache(maxsize=1024)
def grid_key(case: Case) -> str:
    """The grid's cache key (``window_cache_key``: a SHA-256 of the normalized case), computed
    once per case (cases are frozen and hashable; a view's case is the same object each time)."""
    return window_cache_key(case)


def grid_nbytes(grid: WindowGrid) -> int:
    return sum(a.nbytes for a in grid.to_arrays().values())


class GridJobs:
    """Solved grids (and other :class:`Work`) by key: memory LRU, disk cache, fair background
    jobs.

    Parameters
    ----------
    cache : GridCache or None
        Disk cache read and written by the jobs (None: memory only).
    small_workers, large_workers, search_workers : int
        Workers of each lane.
    large_cell_arcs : int
        Grids above this many cell-arcs go to the large lane.
    max_grids, max_bytes : int
        Bounds of the in-memory LRU.
    compute : callable, optional
        The grid engine (``compute_window``); tests pass a slow or failing stand-in.
    slowdown : Slowdown, optional
        Test-only delay added to every job (default: from ``ARCWINDOW_TEST_SLOWDOWN``).
    clock : callable, optional
        Monotonic seconds (tests pass a fake clock to age leases).
    """

    def __init__(
        self,
        cache: GridCache | None,
        *,
        small_workers: int = SMALL_LANE_WORKERS,
        large_workers: int = LARGE_LANE_WORKERS,
        search_workers: int = SEARCH_LANE_WORKERS,
        large_cell_arcs: int = LARGE_JOB_CELL_ARCS,
        max_grids: int = DEFAULT_MEMORY_GRIDS,
        max_bytes: int = DEFAULT_MEMORY_BYTES,
        compute: Callable[..., WindowGrid] = compute_window,
        slowdown: Slowdown | None = None,
        clock: Callable[[], float] = time.monotonic,
        lease_s: float = LEASE_S,
        max_per_address: int = MAX_JOBS_PER_ADDRESS,
        max_queued: int = MAX_QUEUED_JOBS,
    ) -> None:
        self.cache = cache
        self.max_grids = max_grids
        self.max_bytes = max_bytes
        self.large_cell_arcs = large_cell_arcs
        self.lease_s = lease_s
        self.max_per_address = max_per_address
        self.max_queued = max_queued
        self.slowdown = slowdown or Slowdown.from_environment()
        self._compute = compute
        self._clock = clock
        self._lock = threading.Lock()
        self._grids: OrderedDict[str, tuple[Any, int]] = OrderedDict()
        self._jobs: OrderedDict[str, _Job] = OrderedDict()
        self._interest: dict[str, str] = {}  # viewer -> key of the grid it waits for
        # (viewer, key) of the waits viewers cancelled, until they ask for that key again.
        self._withdrawn: OrderedDict[tuple[str, str], None] = OrderedDict()
        self._lanes = {
            "small": ThreadPoolExecutor(small_workers, thread_name_prefix="arcwindow-grid"),
            "large": ThreadPoolExecutor(large_workers, thread_name_prefix="arcwindow-large"),
            "search": ThreadPoolExecutor(search_workers, thread_name_prefix="arcwindow-search"),
        }
        self._writer = ThreadPoolExecutor(1, thread_name_prefix="arcwindow-cache-write")

    # -- memory ----------------------------------------------------------------------------
    def memory_get(self, key: str) -> Any:
        """The grid (or other result) of ``key`` if it is in memory, else None."""
        with self._lock:
            hit = self._grids.get(key)
            if hit is None:
                return None
            self._grids.move_to_end(key)
            return hit[0]

    def memory_put(self, key: str, grid: Any, nbytes: int | None = None) -> None:
        """Keep a result in memory (a grid's size is measured; other results say theirs)."""
        size = grid_nbytes(grid) if nbytes is None else int(nbytes)
        with self._lock:
            self._grids[key] = (grid, size)
            self._grids.move_to_end(key)
            total = sum(s for _, s in self._grids.values())
            while len(self._grids) > 1 and (
                len(self._grids) > self.max_grids or total > self.max_bytes
            ):
                _, (_, dropped) = self._grids.popitem(last=False)
                total -= dropped

    # -- requests --------------------------------------------------------------------------
    def request(self, case: Case, viewer: str, address: str = "") -> Ticket:
        """The grid of ``case`` for ``viewer``: ready, or the (new or shared) job that makes it.

        The viewer stops waiting for any other grid. Raises InputError when the grid is over the
        cell-arc cap, or when this address or the whole queue already holds too many jobs.
        """
        key = grid_key(case)
        ticket = self._join(key, viewer)
        if ticket is not None:
            return ticket
        n_dep, n_arr, slots = check_grid_size(case)  # arithmetic: no date axis is built
        cell_arcs = n_dep * n_arr * slots
        lane = "large" if cell_arcs > self.large_cell_arcs else "small"
        return self._queue(self._grid_work(case, key, lane), viewer, address)

    def submit(self, work: Work, viewer: str, address: str = "") -> Ticket:
        """Work other than a grid (a sequence search): ready, or the (new or shared) job that
        does it, with the same waiters, limits and cancellation as a grid."""
        if work.lane not in LANES:
            raise ValueError(f"unknown lane {work.lane!r}")
        ticket = self._join(work.key, viewer)
        if ticket is not None:
            return ticket
        return self._queue(work, viewer, address)

    def _join(self, key: str, viewer: str) -> Ticket | None:
        """The ticket when the result is in memory or its job runs (the viewer joins it)."""
        now = self._clock()
        with self._lock:
            self._expire_leases(now)
            self._leave(viewer, keep=key)
            self._withdrawn.pop((viewer, key), None)  # asked again: no longer cancelled
            if key in self._grids:
                self._grids.move_to_end(key)
                self._interest.pop(viewer, None)
                return Ticket(key, "ready")
            job = self._jobs.get(key)
            if job is not None and job.active:
                job.waiters[viewer] = now
                self._interest[viewer] = key
                return self._ticket(job, now)
        return None

    def _queue(self, work: Work, viewer: str, address: str) -> Ticket:
        key, lane = work.key, work.lane
        now = self._clock()
        with self._lock:
            job = self._jobs.get(key)
            if job is not None and job.active:  # another viewer started it meanwhile
                job.waiters[viewer] = now
                self._interest[viewer] = key
                return self._ticket(job, now)
            queued = [j for j in self._jobs.values() if j.active]
            if len(queued) >= self.max_queued:
                raise InputError(
                    "grid",
                    f"{len(queued)} grids being solved",
                    f"at most {self.max_queued} at once on this server; try again in a moment",
                )
            mine = [j for j in queued if address and j.address == address]
            if len(mine) >= self.max_per_address:
                raise InputError(
                    "grid",
                    f"{len(mine)} grids being solved for this address",
                    f"at most {self.max_per_address} at once per address; cancel one or wait",
                )
            job = _Job(
                key=key,
                work=work,
                lane=lane,
                address=address,
                queued_at=now,
                progress_at=now,
            )
            job.waiters[viewer] = now
            self._interest[viewer] = key
            self._jobs[key] = job
            self._jobs.move_to_end(key)
            self._trim_jobs()
        future = self._lanes[lane].submit(self._run, job)
        future.add_done_callback(lambda f, job=job: self._worker_ended(job, f))
        return self._ticket(job, now)

    def _grid_work(self, case: Case, key: str, lane: str) -> Work:
        compute = self._compute

        def run(report: Report, check: Check) -> WindowGrid:
            return compute(case, cache=None, progress=report)

        def load() -> WindowGrid | None:
            return self._cached(case, key)

        def store(grid: WindowGrid) -> None:
            if not grid.from_cache:
                self._store(key, grid)

        return Work(
            key=key,
            lane=lane,
            compute=run,
            nbytes=grid_nbytes,
            load=load if self.cache is not None else None,
            store=store if self.cache is not None else None,
            pause=self.slowdown.grid_pause,
        )

    def ticket(self, key: str, viewer: str) -> Ticket:
        """The state of grid ``key`` for ``viewer`` (refreshes the viewer's wait)."""
        now = self._clock()
        with self._lock:
            self._expire_leases(now)
            if key in self._grids:
                return Ticket(key, "ready")
            if (viewer, key) in self._withdrawn:
                return Ticket(key, "cancelled", message=WITHDRAWN, withdrawn=True)
            job = self._jobs.get(key)
            if job is None:
                return Ticket(key, "lost", message="The server no longer knows this grid job.")
            if job.active and viewer in job.waiters:
                job.waiters[viewer] = now
            if job.state == "done":  # solved, then dropped from memory before it was drawn
                return Ticket(key, "lost", message="The grid was dropped from memory.")
            return self._ticket(job, now)

    def cancel(self, key: str, viewer: str) -> bool:
        """Stop ``viewer`` waiting for grid ``key``; the job stops if nobody else waits.

        Returns False when the viewer was not waiting for it (another viewer's job is never
        touched).
        """
        with self._lock:
            job = self._jobs.get(key)
            if job is None or not job.active or viewer not in job.waiters:
                return False
            del job.waiters[viewer]
            if self._interest.get(viewer) == key:
                del self._interest[viewer]
            self._withdrawn[(viewer, key)] = None
            while len(self._withdrawn) > MAX_WITHDRAWN:
                self._withdrawn.popitem(last=False)
            if not job.waiters:
                job.cancel_event.set()
            return True

    def release(self, viewer: str) -> None:
        """``viewer`` waits for nothing any more (its tab closed or moved to a ready grid)."""
        with self._lock:
            self._leave(viewer, keep=None)

    def waiters(self, key: str) -> int:
        with self._lock:
            job = self._jobs.get(key)
            return len(job.waiters) if job is not None and job.active else 0

    def wait(self, key: str, timeout_s: float) -> Any:
        """Wait up to ``timeout_s`` for grid ``key``; the grid if it is ready by then."""
        with self._lock:
            job = self._jobs.get(key)
        if job is not None and job.active:
            job.done_event.wait(timeout_s)
        return self.memory_get(key)

    def active_jobs(self) -> int:
        with self._lock:
            return sum(1 for j in self._jobs.values() if j.active)

    # -- internals (callers hold the lock) -------------------------------------------------
    def _ticket(self, job: _Job, now: float) -> Ticket:
        ahead = 0
        if job.state == "queued":
            ahead = sum(
                1
                for j in self._jobs.values()
                if j.lane == job.lane and j.state == "queued" and j.queued_at < job.queued_at
            )
        phase = {"done": "ready"}.get(job.state, job.state)
        note = ""
        if job.work.note is not None and job.state == "running":
            try:
                note = job.work.note()[:300]
            except Exception:  # a note is a courtesy; it never breaks a ticket
                note = ""
        return Ticket(
            key=job.key,
            phase=phase,
            fraction=round(job.fraction, 4),
            elapsed_s=round((job.finished_at or now) - job.queued_at, 2),
            ahead=ahead,
            stalled=job.state == "running" and now - job.progress_at > STALL_S,
            message=job.message,
            note=note,
        )

    def _leave(self, viewer: str, keep: str | None) -> None:
        previous = self._interest.get(viewer)
        if previous is None or previous == keep:
            return
        del self._interest[viewer]
        job = self._jobs.get(previous)
        if job is not None and job.active:
            job.waiters.pop(viewer, None)
            if not job.waiters:
                job.cancel_event.set()

    def _expire_leases(self, now: float) -> None:
        for job in self._jobs.values():
            if not job.active:
                continue
            stale = [v for v, seen in job.waiters.items() if now - seen > self.lease_s]
            for viewer in stale:
                del job.waiters[viewer]
                if self._interest.get(viewer) == job.key:
                    del self._interest[viewer]
            if stale and not job.waiters:
                job.cancel_event.set()

    def _trim_jobs(self) -> None:
        finished = [k for k, j in self._jobs.items() if not j.active]
        for k in finished[: max(0, len(finished) - _FINISHED_JOBS_KEPT)]:
            del self._jobs[k]

    # -- the worker ------------------------------------------------------------------------
    def _run(self, job: _Job) -> None:
        with self._lock:
            if job.cancel_event.is_set():  # nobody waits for it any more: do not start
                self._finish(job, "cancelled", "Nobody waits for this grid any more.")
                return
            job.state = "running"
            job.progress_at = self._clock()

        def check() -> None:
            job.progress_at = self._clock()
            if job.cancel_event.is_set():
                raise Cancelled()

        def progress(done: int, total: int) -> None:
            job.done_rows, job.total_rows = done, total
            check()

        work = job.work
        result = None
        try:
            if work.pause is not None:
                work.pause(check)
            result = work.load() if work.load is not None else None
            from_cache = result is not None
            if result is None:
                result = work.compute(progress, check)
        except Cancelled:
            self._finish(job, "cancelled", "Computation cancelled.")
        except InputError as exc:
            self._finish(job, "failed", str(exc))
        except Exception as exc:  # a failed job must be reported, not lost with its thread
            _LOG.exception("background job failed")
            what = "Grid computation" if work.lane != "search" else "The search"
            self._finish(job, "failed", f"{what} failed: {exc!r}"[:300])
        else:
            self.memory_put(job.key, result, work.nbytes(result))
            self._finish(job, "done", "read from the disk cache" if from_cache else "computed")
            if work.store is not None and not from_cache:
                self._writer.submit(self._write_quietly, work, result)

    @staticmethod
    def _write_quietly(work: Work, result: Any) -> None:
        try:
            work.store(result)  # type: ignore[misc]
        except OSError:
            _LOG.warning("could not write %s to the disk cache", work.key[:12])

    def _cached(self, case: Case, key: str) -> WindowGrid | None:
        if self.cache is None:
            return None
        hit = self.cache.get(key)
        return None if hit is None else WindowGrid.from_arrays(case, hit.arrays, hit.metadata)

    def _store(self, key: str, grid: WindowGrid) -> None:
        try:
            self.cache.put(key, grid.to_arrays(), grid.provenance)  # type: ignore[union-attr]
        except OSError:
            _LOG.warning("could not write grid %s to the disk cache", key[:12])

    def _finish(self, job: _Job, state: str, message: str) -> None:
        if job.finished_at is not None:
            return
        job.state, job.message = state, message
        if state == "done":
            job.done_rows = job.total_rows = max(job.total_rows, 1)
        job.finished_at = self._clock()
        job.done_event.set()

    def _worker_ended(self, job: _Job, future: Future) -> None:
        """A worker that ended without settling its job (it raised past every handler, or the
        pool was shut down before it ran) leaves the job failed, never running for ever."""
        if job.finished_at is None:
            error = future.exception() if not future.cancelled() else None
            self._finish(job, "failed", f"The worker stopped: {error!r}"[:300])

    def shutdown(self) -> None:
        with self._lock:
            for job in self._jobs.values():
                job.cancel_event.set()
        for pool in (*self._lanes.values(), self._writer):
            pool.shutdown(wait=False, cancel_futures=True)


__all__ = [
    "LANES",
    "LARGE_JOB_CELL_ARCS",
    "LEASE_S",
    "MAX_JOBS_PER_ADDRESS",
    "PHASES",
    "STALL_S",
    "GridJobs",
    "Ticket",
    "Work",
    "grid_key",
    "grid_nbytes",
]
