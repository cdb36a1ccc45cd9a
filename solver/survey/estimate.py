"""How long a survey will take: measured on a few of its own target-years before it starts.

A target-year costs from ~15 ms (no arc within limits: the coarse grid only) to ~50 ms (an arc
to refine), more on a loaded machine, so a figure from elsewhere would mislead. The estimate
scans a few target-years of the survey itself, spread over its pending chunks, in this process
on one compiled-kernel thread (as each worker runs), and scales:

    seconds = pending target-years x measured seconds each / (workers x efficiency)
              + worker start-up (a cluster's workers import the engine first)

with the parallel efficiency measured for chunks of ~1 s (0.79-0.80 on 2 local workers,
`arcwindow bench --survey`; docs/cluster.md, "Sizing a survey"). While the survey runs,
:func:`remaining_seconds` replaces the estimate by the rate the finished chunks show.
"""

from __future__ import annotations

import time
from dataclasses import asdict, dataclass

from solver.ephemeris.element_bodies import ElementBody
from solver.survey.scan import SurveyPlan, SurveySettings, scan_target

PARALLEL_EFFICIENCY = 0.8
"""Fraction of ``workers`` times the single-worker rate a cluster delivers (measured 0.79-0.80
with 2 local workers; see docs/cluster.md)."""
DEFAULT_SAMPLES = 3
WORKER_STARTUP_S = 3.0
"""A worker process's first chunk waits for its imports and compiled kernels from numba's cache
(~2 s measured by `arcwindow bench --survey`); a cluster pays it once, in parallel."""


@dataclass(frozen=True)
class SurveyEstimate:
    """The expected length of a survey run.

    Attributes
    ----------
    target_years : int
        Target-years still to scan (finished chunks excluded).
    seconds_per_target_year : float
        Measured here on ``samples`` of them, one thread.
    workers : int
        Worker processes (1 when the survey runs in this process).
    seconds : float
        Expected wall time of the scan.
    samples : int
    """

    target_years: int
    seconds_per_target_year: float
    workers: int
    seconds: float
    samples: int


def estimate_survey(
    plan: SurveyPlan,
    pending: list,
    workers: int,
    *,
    samples: int = DEFAULT_SAMPLES,
    on_cluster: bool = False,
) -> SurveyEstimate:
    """Estimate the scan of the ``pending`` chunks of ``plan`` on ``workers`` workers.

    Parameters
    ----------
    plan : SurveyPlan
    pending : list of Chunk
        The chunks still to run (``solver.survey.cluster.pending_chunks``).
    workers : int
        Worker processes (0 or 1: this process).
    samples : int
        Target-years scanned to measure the cost of one (spread over the pending chunks).
    on_cluster : bool
        The chunks run on Dask workers (add their start-up), not in this process.
    """
    target_years = sum(len(chunk.targets) for chunk in pending)
    workers = max(1, int(workers))
    if target_years == 0:
        return SurveyEstimate(0, 0.0, workers, 0.0, 0)
    picks = [pending[round(k * (len(pending) - 1) / max(1, samples - 1))] for k in range(samples)]
    settings = SurveySettings(**asdict(plan.settings))
    from solver.survey.cluster import one_numba_thread

    with one_numba_thread():
        start = time.perf_counter()
        for chunk in picks:
            scan_target(plan.base_toml, ElementBody(**chunk.targets[0]), chunk.span, settings)
        each = (time.perf_counter() - start) / len(picks)
    rate = workers * PARALLEL_EFFICIENCY if workers > 1 else 1.0
    startup = WORKER_STARTUP_S if on_cluster else 0.0
    seconds = target_years * each / rate + startup
    return SurveyEstimate(target_years, each, workers, seconds, len(picks))


def remaining_seconds(estimate: SurveyEstimate, done_target_years: int, elapsed_s: float) -> float:
    """Seconds left: at the rate shown so far once something is done, else the estimate's."""
    left = max(0, estimate.target_years - done_target_years)
    if done_target_years > 0 and elapsed_s > 0:
        return left * elapsed_s / done_target_years
    if estimate.target_years == 0:
        return 0.0
    return left * estimate.seconds / estimate.target_years


def duration_text(seconds: float) -> str:
    """``"about 9 min"``-style text: whole minutes above two minutes, else seconds."""
    if seconds >= 3600:
        hours, rest = divmod(round(seconds / 60), 60)
        return f"{hours} h {rest:02d} min"
    if seconds >= 120:
        return f"{round(seconds / 60)} min"
    return f"{max(1, round(seconds))} s"


__all__ = [
    "DEFAULT_SAMPLES",
    "PARALLEL_EFFICIENCY",
    "WORKER_STARTUP_S",
    "SurveyEstimate",
    "duration_text",
    "estimate_survey",
    "remaining_seconds",
]
