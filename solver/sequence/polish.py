"""Local polish of search candidates: a compass search, many candidates in lockstep."""

from __future__ import annotations

import time

import numpy as np
from numpy.typing import NDArray

from solver.sequence.evaluate import SequenceModel


def polish(
    model: SequenceModel,
    bounds: list[tuple[float, float]],
    points: NDArray[np.float64],
    *,
    first_step_days: float = 2.0,
    last_step_days: float = 1e-4,
    deadline: float | None = None,
) -> NDArray[np.float64]:
    """Polish several points at once by a compass search (derivative free: the score has kinks
    where a limit starts to bind or the best arc slot changes).

    Each round scores every point moved by plus and minus the step along each variable, all
    points in one batched call; a point moves to its best neighbour when that is better, and the
    step of a point that found none is halved, down to ``last_step_days`` (9 s). Never worse
    than the start. Stops at ``deadline`` (a ``time.perf_counter()`` value) if given.
    """
    low = np.array([b[0] for b in bounds])
    high = np.array([b[1] for b in bounds])
    x = np.array(points, dtype=float)
    n, n_var = x.shape
    value = model.score(x)
    step = np.full(n, first_step_days)
    directions = np.concatenate([np.eye(n_var), -np.eye(n_var)])  # (2D, D)
    for _ in range(2000):
        active = step >= last_step_days
        if not active.any() or (deadline is not None and time.perf_counter() > deadline):
            break
        idx = np.nonzero(active)[0]
        trial = x[idx, None, :] + step[idx, None, None] * directions[None]
        trial = np.clip(trial, low, high)
        scores = model.score(trial.reshape(-1, n_var)).reshape(len(idx), 2 * n_var)
        pick = np.argmin(scores, axis=1)
        best = scores[np.arange(len(idx)), pick]
        improved = best < value[idx]
        moved = idx[improved]
        x[moved] = trial[improved, pick[improved]]
        value[moved] = best[improved]
        step[idx[~improved]] *= 0.5
    return x


__all__ = ["polish"]
