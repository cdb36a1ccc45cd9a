"""Running a survey plan: in this process, or on a Dask cluster (local or existing).

One Dask task per chunk still to do (``Client.submit(scan_chunk, ..., retries=, pure=False)``);
the client writes each finished chunk's file as its result arrives (atomically, see
:mod:`solver.survey.store`) and merges them at the end. Writing from the client, not the
workers, means the workers need no shared file system with the client, and a worker that dies
can never leave a half-written file: its task is simply run again elsewhere (Dask reschedules
the tasks of a lost worker; ``retries`` covers tasks that raise). A rerun submits only the
chunks that have no valid file, so an interrupted survey resumes where it stopped.

Workers run one thread each with ``NUMBA_NUM_THREADS=1`` (and the BLAS/OpenMP equivalents):
parallelism comes from processes, and compiled kernels must not oversubscribe the cores.
"""

from __future__ import annotations

import asyncio
import logging
import os
from collections.abc import Callable, Iterator
from contextlib import contextmanager
from dataclasses import asdict, dataclass, field
from pathlib import Path
from typing import Any

import pandas as pd

from solver.errors import InputError
from solver.survey.scan import SURVEY_FORMAT, SurveyPlan, scan_chunk
from solver.survey.store import (
    chunk_done,
    chunk_folder,
    merge_chunks,
    sweep_temporaries,
    write_chunk,
    write_results,
)

WORKER_ENV = {
    "NUMBA_NUM_THREADS": "1",
    "OMP_NUM_THREADS": "1",
    "MKL_NUM_THREADS": "1",
    "OPENBLAS_NUM_THREADS": "1",
}
"""Environment of local worker processes: one thread each (processes give the parallelism)."""

DEFAULT_RETRIES = 2
DEFAULT_CONNECT_TIMEOUT_S = 10.0


def machine_cores() -> int:
    """Cores this process may use (the affinity mask in containers, else ``os.cpu_count``)."""
    try:
        return max(1, len(os.sched_getaffinity(0)))
    except AttributeError:  # not on Linux
        return max(1, os.cpu_count() or 1)


@contextmanager
def one_numba_thread() -> Iterator[None]:
    """Run compiled kernels on one thread in this block, as the survey's workers do.

    A target-year solves small arrays (a grid of ~10,000 cells, then single cells), for which a
    parallel kernel's thread hand-offs cost more than they save: measured 3-4x slower on this
    2-core machine while other work ran. It also keeps the serial run's numbers the workers'.
    """
    import numba

    previous = numba.get_num_threads()
    numba.set_num_threads(1)
    try:
        yield
    finally:
        numba.set_num_threads(previous)


@dataclass
class SurveyRun:
    """What a run did.

    Attributes
    ----------
    results : DataFrame or None
        The ranked results (None when some chunk failed: nothing is merged then).
    out_path : Path
    computed : list of str        keys of the chunks computed in this run
    skipped : list of str         keys of the chunks found done (valid files)
    failed : list of (str, str)   key and error of chunks that failed after their retries
    """

    results: pd.DataFrame | None
    out_path: Path
    computed: list[str] = field(default_factory=list)
    skipped: list[str] = field(default_factory=list)
    failed: list[tuple[str, str]] = field(default_factory=list)

    @property
    def complete(self) -> bool:
        return not self.failed and self.results is not None


# ---------------------------------------------------------------------------------------------
# Clusters


def start_local_cluster(n_workers: int | None = None, *, quiet: bool = True):
    """A ``distributed.LocalCluster`` of single-threaded worker processes.

    Parameters
    ----------
    n_workers : int, optional
        Worker processes (default: one per core, :func:`machine_cores`).
    quiet : bool
        Log only errors (a worker restart is otherwise a warning on stderr).
    """
    from distributed import LocalCluster

    n = machine_cores() if n_workers is None else int(n_workers)
    if n < 1:
        raise InputError("--workers", n_workers, ">= 1 worker process (0 runs in this process)")
    return LocalCluster(
        n_workers=n,
        threads_per_worker=1,
        processes=True,
        dashboard_address=":0",  # any free port: several clusters may share a machine
        silence_logs=logging.ERROR if quiet else logging.WARNING,
        env=dict(WORKER_ENV),
    )


def _worker_engine() -> dict[str, object]:
    """Run on each worker: which arcwindow it imports (the survey module included)."""
    import solver
    from solver.survey.scan import SURVEY_FORMAT

    return {
        "engine": solver.ENGINE_VERSION,
        "survey_format": SURVEY_FORMAT,
        "path": os.path.dirname(solver.__file__),
    }


async def _identity(address: str, timeout_s: float) -> object:
    """The ``identity`` reply of the server at ``address`` (a Dask scheduler says "Scheduler")."""
    from distributed.comm import connect as comm_connect

    comm = await comm_connect(address, timeout=timeout_s)
    try:
        await comm.write({"op": "identity", "reply": True})
        return await asyncio.wait_for(comm.read(), timeout_s)
    finally:
        comm.abort()


def _run_coroutine(coroutine):
    """Run a coroutine to completion, also from a thread whose event loop is running."""
    try:
        asyncio.get_running_loop()
    except RuntimeError:
        return asyncio.run(coroutine)
    from concurrent.futures import ThreadPoolExecutor

    with ThreadPoolExecutor(max_workers=1) as pool:
        return pool.submit(asyncio.run, coroutine).result()


def connect(address: str, timeout_s: float = DEFAULT_CONNECT_TIMEOUT_S):
    """A client of the Dask scheduler at ``address``, checked for usable workers.

    Raises
    ------
    InputError
        Field ``--scheduler``: the address is malformed or unreachable, nothing there speaks
        Dask's protocol, no worker joins within the timeout, or the workers cannot import
        arcwindow or run another engine version.
    """
    from distributed import Client

    import solver

    expected = (
        "the address of a running Dask scheduler, tcp://HOST:PORT (start one with "
        "`dask scheduler` and workers with `dask worker tcp://HOST:PORT` on machines where "
        "arcwindow is installed)"
    )
    # A malformed address is refused before a Client exists: a Client that failed half-way
    # through its construction hangs at interpreter exit trying to close itself.
    try:
        from distributed.comm import parse_address
        from distributed.comm.addressing import parse_host_port
        from distributed.comm.registry import backends

        scheme, location = parse_address(address, strict=False)
        if scheme not in backends:
            raise ValueError(f"unknown scheme '{scheme}' (known: {', '.join(sorted(backends))})")
        parse_host_port(location)
    except (ValueError, TypeError) as exc:
        raise InputError("--scheduler", address, f"{expected}; {exc}") from None
    # Ask whoever listens there who they are before building a Client, for the same reason.
    try:
        identity = _run_coroutine(_identity(address, timeout_s))
    except (OSError, TimeoutError) as exc:
        raise InputError(
            "--scheduler",
            address,
            f"{expected}; no scheduler answered within {timeout_s:g} s ({exc})",
        ) from None
    except Exception as exc:  # something answered, but not in Dask's protocol
        raise InputError(
            "--scheduler",
            address,
            f"{expected}; the server there does not speak Dask's protocol "
            f"({type(exc).__name__}: {str(exc)[:80]})",
        ) from None
    if not isinstance(identity, dict) or identity.get("type") != "Scheduler":
        kind = identity.get("type") if isinstance(identity, dict) else type(identity).__name__
        raise InputError("--scheduler", address, f"{expected}; the server there is a {kind}")
    try:
        client = Client(address, timeout=f"{timeout_s}s", set_as_default=False)
    except (OSError, TimeoutError) as exc:
        raise InputError(
            "--scheduler",
            address,
            f"{expected}; no scheduler answered within {timeout_s:g} s ({exc})",
        ) from None
    try:
        try:
            client.wait_for_workers(1, timeout=timeout_s)
        except (TimeoutError, OSError):
            raise InputError(
                "--scheduler", address, f"a scheduler with workers (none joined in {timeout_s:g} s)"
            ) from None
        # The scheduler unpickles every task too, so it needs arcwindow as much as the workers.
        try:
            engines = {"scheduler": client.run_on_scheduler(_worker_engine)}
        except Exception as exc:
            raise InputError(
                "--scheduler",
                address,
                f"a scheduler that can import arcwindow's solver.survey.scan (install the same "
                f"arcwindow where the scheduler runs): {type(exc).__name__}: {exc}",
            ) from None
        try:
            engines.update(client.run(_worker_engine))
        except Exception as exc:
            raise InputError(
                "--scheduler",
                address,
                f"workers that can import arcwindow's solver.survey.scan (install the same "
                f"arcwindow on every worker): {type(exc).__name__}: {exc}",
            ) from None
        mine = (solver.ENGINE_VERSION, SURVEY_FORMAT)
        wrong = {
            w: (e["engine"], e["survey_format"])
            for w, e in engines.items()
            if (e["engine"], e["survey_format"]) != mine
        }
        if wrong:
            worker, (version, survey_format) = next(iter(wrong.items()))
            raise InputError(
                "--scheduler",
                address,
                f"workers running arcwindow engine {mine[0]}, survey format {mine[1]} "
                f"(worker {worker} runs {version}, survey format {survey_format})",
            )
    except BaseException:
        client.close()
        raise
    return client


@contextmanager
def survey_client(
    scheduler: str | None = None,
    workers: int | None = None,
    *,
    connect_timeout_s: float = DEFAULT_CONNECT_TIMEOUT_S,
) -> Iterator[Any]:
    """The client a survey runs on, closed (with its local cluster) on exit.

    ``scheduler`` given: connect to that cluster (``workers`` must be None). Else ``workers``
    = 0 yields None (run in this process); otherwise a local cluster of ``workers`` processes
    (default one per core).
    """
    if scheduler:
        if workers is not None:
            raise InputError(
                "--workers", workers, "no --workers with --scheduler (the cluster's workers run it)"
            )
        client = connect(scheduler, connect_timeout_s)
        try:
            yield client
        finally:
            client.close()
        return
    if workers == 0:
        yield None
        return
    from distributed import Client

    cluster = start_local_cluster(workers)
    try:
        client = Client(cluster, set_as_default=False)
        try:
            yield client
        finally:
            client.close()
    finally:
        cluster.close()


def worker_count(client) -> int:
    """Worker processes that will scan chunks (1 for this process, without Dask)."""
    if client is None:
        return 1
    return max(1, len(client.scheduler_info().get("workers", {})))


def describe_client(client) -> str:
    """``"local cluster, 2 worker processes"``-style text for progress lines."""
    if client is None:
        return "this process (no Dask)"
    info = client.scheduler_info()
    workers = info.get("workers", {})
    threads = sum(w.get("nthreads", 1) for w in workers.values())
    return f"Dask scheduler {info.get('address', '?')}, {len(workers)} workers, {threads} threads"


# ---------------------------------------------------------------------------------------------
# Running


def pending_chunks(plan: SurveyPlan, out_path: str | Path) -> list:
    """The chunks of ``plan`` that have no valid file beside ``out_path`` yet."""
    folder = chunk_folder(out_path)
    return [chunk for chunk in plan.chunks if not chunk_done(folder, chunk)]


def run_survey(
    plan: SurveyPlan,
    out_path: str | Path,
    *,
    client: Any = None,
    retries: int = DEFAULT_RETRIES,
    progress: Callable[[int, int], None] | None = None,
    submit_options: dict[str, Any] | None = None,
) -> SurveyRun:
    """Run the chunks of ``plan`` that have no valid file yet, then merge all into the results.

    Parameters
    ----------
    plan : SurveyPlan
        From :func:`solver.survey.scan.plan_survey`.
    out_path : path
        The results file (``.parquet``); chunks go to ``<out_path>.chunks/``.
    client : distributed.Client, optional
        Run the chunks as Dask tasks on this client's cluster; None runs them here, in order.
    retries : int
        Dask retries of a chunk task that raises (a lost worker's tasks are rescheduled by the
        scheduler anyway, up to its ``allowed-failures``).
    progress : callable(done, total), optional
        Called once with the chunks already done, then after each chunk finishes.
    submit_options : dict, optional
        Extra keywords for ``Client.submit`` (e.g. ``workers=[address]`` to pin the chunks to
        some workers, as the benchmark does).

    Returns
    -------
    SurveyRun
        With ``results`` None if any chunk failed (the finished ones are kept for a rerun).
    """
    out = Path(out_path)
    folder = chunk_folder(out)
    folder.mkdir(parents=True, exist_ok=True)
    sweep_temporaries(folder)
    run = SurveyRun(results=None, out_path=out)
    todo = []
    for chunk in plan.chunks:
        if chunk_done(folder, chunk):
            run.skipped.append(chunk.key)
        else:
            todo.append(chunk)
    total = len(plan.chunks)
    if progress is not None:
        progress(len(run.skipped), total)
    settings = asdict(plan.settings)

    def finished(chunk, rows) -> None:
        write_chunk(folder, chunk, rows)
        run.computed.append(chunk.key)
        if progress is not None:
            progress(len(run.skipped) + len(run.computed), total)

    if client is None:
        with one_numba_thread():
            for chunk in todo:
                finished(chunk, scan_chunk(plan.base_toml, chunk.targets, chunk.span, settings))
    elif todo:
        _run_on_dask(client, plan, todo, settings, retries, finished, run, submit_options or {})

    if run.failed:
        return run
    run.results = write_results(plan, merge_chunks(plan, folder), out)
    return run


def _run_on_dask(client, plan, todo, settings, retries, finished, run, options) -> None:
    from distributed import as_completed

    # The base case goes inside every task (a few kB): scattering it once would save little and
    # would tie every task to the workers holding the copy.
    def submit(chunk):
        return client.submit(
            scan_chunk,
            plan.base_toml,
            list(chunk.targets),
            chunk.span,
            settings,
            retries=retries,
            pure=False,
            **options,
        )

    futures = {submit(chunk): chunk for chunk in todo}
    resubmitted: dict[str, int] = {}
    pending = as_completed(list(futures), loop=client.loop)
    try:
        for future in pending:
            chunk = futures.pop(future)
            outcome = future.status
            if outcome == "finished":
                try:
                    result = future.result()
                except Exception:  # the worker holding the result died before we fetched it
                    outcome = "lost"
                else:
                    finished(chunk, result)
            if outcome == "error":
                exc = future.exception()
                run.failed.append((chunk.key, f"{type(exc).__name__}: {exc}"))
            elif outcome != "finished":
                # Lost with its worker (or cancelled by the cluster): submit the chunk again, as
                # Dask's own retries only cover tasks that raise.
                tries = resubmitted.get(chunk.key, 0)
                if tries <= retries:
                    resubmitted[chunk.key] = tries + 1
                    again = submit(chunk)
                    futures[again] = chunk
                    pending.add(again)
                else:
                    run.failed.append((chunk.key, f"task {outcome} {tries + 1} times"))
            future.release()
    finally:
        for future in futures:  # interrupted: leave nothing running on a shared cluster
            future.cancel()


__all__ = [
    "DEFAULT_RETRIES",
    "WORKER_ENV",
    "SurveyRun",
    "connect",
    "describe_client",
    "machine_cores",
    "one_numba_thread",
    "pending_chunks",
    "run_survey",
    "start_local_cluster",
    "survey_client",
]
