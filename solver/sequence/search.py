"""Global search of a sequence's encounter dates: vectorized differential evolution.

The variables are the departure date, each leg's TOF and each stop's stay, bounded by the case's
departure window and the legs' TOF and stay bounds. Each generation of
``scipy.optimize.differential_evolution`` (``vectorized=True``, ``updating="deferred"``) hands
its whole population to :meth:`~solver.sequence.evaluate.SequenceModel.score` in one call: one
compiled pass for the states and every leg's Lambert arcs, then the flybys, burns and limits
vectorized over the population. Candidates within limits rank before any outside them
(``score`` = objective + a heavy weight per unit of breach).

The search runs several restarts from independent seeds (spawned from the one seed given, so a
seed gives the same result), keeps every point it evaluated, polishes the best distinct ones
locally (L-BFGS-B on the score with a central-difference gradient evaluated in one batched call),
and returns the K best candidates that differ by more than a date tolerance, each evaluated
exactly (:func:`solver.sequence.result.evaluate_candidate`). Several sequences of one case are
searched in turn and ranked together.

A KeyboardInterrupt (Ctrl+C) or a time limit stops the search cleanly: what was found so far is
returned, flagged as interrupted.
"""

from __future__ import annotations

import math
import time
from collections.abc import Callable
from dataclasses import dataclass, field

import numpy as np
from numpy.typing import NDArray
from scipy.optimize import differential_evolution

from solver.errors import InputError
from solver.sequence.evaluate import MISSING, SequenceModel
from solver.sequence.polish import polish
from solver.sequence.result import Candidate, evaluate_candidate
from solver.sequence.spec import SequenceCase, SequenceSpec
from solver.window.case import Case

Progress = Callable[[str], None]

POLISH_SHARE_COMPLEMENT = 0.85
"""Under a time limit, the global phase ends at this fraction of it; the polish and the exact
evaluation of the candidates use the rest."""
POLISH_DEADLINE_SHARE = 0.95
"""...and the polish stops at this fraction, leaving the rest to the exact evaluations."""


@dataclass(frozen=True)
class SearchSettings:
    """How a global search runs (plain values).

    Attributes
    ----------
    top : int
        Candidates returned (the K best distinct ones).
    seed : int
        Seed of every random choice; the same seed gives the same result.
    restarts : int
        Independent differential-evolution runs.
    population : int
        Population size per variable (scipy's ``popsize``).
    generations : int
        Largest number of generations of one run.
    distinct_days : float
        Two candidates whose encounter dates all lie within this many days are the same one.
    polish : bool
        Polish the best distinct candidates locally.
    time_limit_s : float or None
        Stop after this many seconds (what was found so far is returned).
    tolerance : float
        scipy's relative convergence tolerance of one run.
    """

    top: int = 5
    seed: int = 0
    restarts: int = 8
    population: int = 20
    generations: int = 300
    distinct_days: float = 5.0
    polish: bool = True
    time_limit_s: float | None = None
    tolerance: float = 1e-4
    method: str = "islands"

    def __post_init__(self) -> None:
        if self.method not in METHODS:
            raise InputError("--method", self.method, "one of " + ", ".join(METHODS))
        checks = (
            ("--top", self.top, 1, 1000),
            ("--restarts", self.restarts, 1, 1000),
            ("--population", self.population, 5, 10_000),
            ("--generations", self.generations, 1, 1_000_000),
        )
        for name, value, low, high in checks:
            if isinstance(value, bool) or not isinstance(value, int) or not low <= value <= high:
                raise InputError(name, value, f"an integer from {low} to {high}")
        if isinstance(self.seed, bool) or not isinstance(self.seed, int) or self.seed < 0:
            raise InputError("--seed", self.seed, "an integer >= 0")
        if not (math.isfinite(self.distinct_days) and self.distinct_days > 0):
            raise InputError("--distinct-days", self.distinct_days, "a number of days > 0")
        if self.time_limit_s is not None and not self.time_limit_s > 0:
            raise InputError("--time-limit", self.time_limit_s, "a number of seconds > 0")


@dataclass
class SearchResult:
    """The ranked candidates of a search and what it cost.

    ``candidates`` are ranked: within limits first, then by the objective; ``evaluations`` counts
    every candidate scored; ``best_score`` (per sequence) is the best score seen;
    ``interrupted`` says the search was stopped (Ctrl+C or the time limit) before it finished.
    """

    candidates: list[Candidate]
    evaluations: int = 0
    seconds: float = 0.0
    interrupted: bool = False
    best_score: dict[str, float] = field(default_factory=dict)
    notes: list[str] = field(default_factory=list)


class _Archive:
    """Every point a search scored, kept as arrays (a few MB for a long run)."""

    def __init__(self, n_variables: int) -> None:
        self.points: list[NDArray[np.float64]] = []
        self.scores: list[NDArray[np.float64]] = []
        self.count = 0
        self.n_variables = n_variables

    def add(self, x: NDArray[np.float64], score: NDArray[np.float64]) -> None:
        self.points.append(np.array(x, dtype=float))
        self.scores.append(np.array(score, dtype=float))
        self.count += len(score)

    def arrays(self) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
        if not self.points:
            return np.empty((0, self.n_variables)), np.empty(0)
        return np.concatenate(self.points), np.concatenate(self.scores)


def distinct_best(
    spec: SequenceSpec,
    points: NDArray[np.float64],
    scores: NDArray[np.float64],
    k: int,
    distinct_days: float,
) -> list[int]:
    """Indices of the ``k`` best points whose encounter dates differ by more than
    ``distinct_days`` in at least one date from every better one (ties by index)."""
    order = np.lexsort((np.arange(len(scores)), scores))
    epochs = spec.epochs(points)
    chosen: list[int] = []
    for i in order:
        if not np.isfinite(scores[i]) or scores[i] >= MISSING:
            break
        if all(np.max(np.abs(epochs[i] - epochs[j])) > distinct_days for j in chosen):
            chosen.append(int(i))
            if len(chosen) == k:
                break
    return chosen


def rank_candidates(candidates: list[Candidate]) -> list[Candidate]:
    """Within limits first, then by objective (ties by departure date, then sequence name)."""

    def key(c: Candidate):
        if c.within_limits:
            group, primary = 0, c.objective_value
        elif c.ok:
            group, primary = 1, c.score
        else:
            group, primary = 2, math.inf
        return (
            group,
            primary if math.isfinite(primary) else math.inf,
            c.departure_jd_tdb,
            c.sequence,
        )

    return sorted(candidates, key=key)


METHODS = ("islands", "scipy")
"""``islands``: several differential-evolution populations evolved in lockstep, each generation
of all of them scored in one batched call, a converged population reseeded in place (the
restarts); ``scipy``: ``scipy.optimize.differential_evolution(vectorized=True)`` run once per
restart. Both use best/1/bin with dithered mutation; ``arcwindow bench --section sequence``
compares them."""


def search_sequence(
    case: Case,
    spec: SequenceSpec,
    settings: SearchSettings = SearchSettings(),
    *,
    progress: Progress | None = None,
    deadline: float | None = None,
) -> SearchResult:
    """The K best distinct candidates of one sequence (see the module docstring).

    Parameters
    ----------
    case, spec
        The case and one of its sequences.
    settings : SearchSettings
    progress : callable(str), optional
        Called with a one-line status now and then.
    deadline : float, optional
        ``time.perf_counter()`` value after which the search stops (overrides the settings'
        time limit; used when several sequences share one).
    """
    start = time.perf_counter()
    if deadline is None and settings.time_limit_s is not None:
        deadline = start + settings.time_limit_s
    model = SequenceModel(case, spec)
    bounds = spec.variable_bounds(case)
    archive = _Archive(len(bounds))
    interrupted = False
    # With a time limit, the global phase stops early enough to leave the polish and the exact
    # evaluations their share of it.
    global_deadline = None
    if deadline is not None:
        global_deadline = start + POLISH_SHARE_COMPLEMENT * (deadline - start)
    try:
        if settings.method == "scipy":
            interrupted = _run_scipy(model, bounds, settings, archive, progress, global_deadline)
        else:
            interrupted = _run_islands(model, bounds, settings, archive, progress, global_deadline)
    except KeyboardInterrupt:
        interrupted = True
    stopped_by_time = (
        interrupted and deadline is not None and time.perf_counter() > (global_deadline or math.inf)
    )

    points, scores = archive.arrays()
    chosen = distinct_best(spec, points, scores, 2 * settings.top, settings.distinct_days)
    final_points = points[chosen]
    if settings.polish and (not interrupted or stopped_by_time) and len(chosen):
        try:
            polish_deadline = (
                None if deadline is None else start + POLISH_DEADLINE_SHARE * (deadline - start)
            )
            final_points = polish(model, bounds, final_points, deadline=polish_deadline)
        except KeyboardInterrupt:
            interrupted = True
    final_scores = model.score(final_points) if len(final_points) else np.empty(0)
    keep = distinct_best(spec, final_points, final_scores, settings.top, settings.distinct_days)
    candidates = [
        evaluate_candidate(
            model,
            spec.epochs(final_points[i]),
            angles_deg=spec.angles(final_points[i]) if spec.resonant_legs else None,
        )
        for i in keep
    ]
    return SearchResult(
        candidates=rank_candidates(candidates),
        evaluations=archive.count,
        seconds=time.perf_counter() - start,
        interrupted=interrupted,
        best_score={spec.name: float(np.min(final_scores)) if len(final_scores) else math.inf},
    )


def _run_islands(model, bounds, settings, archive, progress, deadline) -> bool:
    """Lockstep differential evolution over ``settings.restarts`` populations; True when the
    deadline stopped it."""
    rng = np.random.default_rng(settings.seed)
    low = np.array([b[0] for b in bounds])
    span = np.array([b[1] for b in bounds]) - low
    n_islands = settings.restarts
    n_var = len(bounds)
    size = max(5, settings.population * n_var)
    shape = (n_islands, size, n_var)

    def score(x):
        flat = x.reshape(-1, n_var)
        values = model.score(flat)
        archive.count += len(values)
        return values.reshape(x.shape[:-1])

    pop = low + span * rng.random(shape)
    energy = score(pop)
    try:
        return _evolve(
            model, settings, archive, progress, deadline, rng, pop, energy, score, low, span
        )
    except KeyboardInterrupt:
        # Keep what the populations hold (a reseeded island was archived when it converged).
        archive.add(pop.reshape(-1, n_var), energy.reshape(-1))
        raise


def _evolve(
    model, settings, archive, progress, deadline, rng, pop, energy, score, low, span
) -> bool:
    """The generations of :func:`_run_islands`; ``pop`` and ``energy`` are updated in place so
    that an interruption leaves the latest populations to the caller."""
    n_islands, size, n_var = pop.shape
    shape = pop.shape
    reseeds = 0
    rows = np.arange(n_islands)[:, None]
    for generation in range(1, settings.generations + 1):
        best = pop[np.arange(n_islands), np.argmin(energy, axis=1)]  # (R, D)
        a = rng.integers(0, size, (n_islands, size))
        b = (a + 1 + rng.integers(0, size - 1, (n_islands, size))) % size
        dither = rng.uniform(0.5, 1.0, (n_islands, 1, 1))
        mutant = best[:, None, :] + dither * (pop[rows, a] - pop[rows, b])
        cross = rng.random(shape) < 0.9
        cross[rows, np.arange(size)[None, :], rng.integers(0, n_var, (n_islands, size))] = True
        trial = np.where(cross, mutant, pop)
        outside = (trial < low) | (trial > low + span)
        trial = np.where(outside, low + span * rng.random(shape), trial)
        trial_energy = score(trial)
        better = trial_energy <= energy
        pop[better] = trial[better]
        energy[better] = trial_energy[better]
        # A population that has converged (or stalled in the no-arc plateau) is kept in the
        # archive and reseeded: the restarts, run inside the same batched calls.
        finite = np.where(energy < MISSING, energy, np.nan)
        with np.errstate(all="ignore"):
            spread = np.nanstd(finite, axis=1)
            level = np.abs(np.nanmean(finite, axis=1))
        done = (spread <= settings.tolerance * level + 1e-12) | np.all(energy >= MISSING, axis=1)
        for island in np.nonzero(done)[0]:
            archive.add(pop[island], energy[island])
            pop[island] = low + span * rng.random((size, n_var))
            energy[island] = score(pop[island][None])[0]
            reseeds += 1
        if progress is not None and generation % 10 == 0:
            progress(
                f"{model.spec.name}: generation {generation}, {reseeds} restarts, best score "
                f"{float(np.min(energy)):.6g}"
            )
        if deadline is not None and time.perf_counter() > deadline:
            archive.add(pop.reshape(-1, n_var), energy.reshape(-1))
            return True
    archive.add(pop.reshape(-1, n_var), energy.reshape(-1))
    return False


def _run_scipy(model, bounds, settings, archive, progress, deadline) -> bool:
    """``scipy.optimize.differential_evolution`` once per restart; True when stopped early."""

    def objective(x: NDArray[np.float64], /) -> NDArray[np.float64]:
        points = np.atleast_2d(x.T)
        score = model.score(points)
        archive.add(points, score)
        return score

    seeds = np.random.SeedSequence(settings.seed).spawn(settings.restarts)
    for restart, seed in enumerate(seeds, start=1):
        differential_evolution(
            objective,  # type: ignore[arg-type]  # vectorized: the stubs know the scalar form
            bounds,
            strategy="best1bin",
            maxiter=settings.generations,
            popsize=settings.population,
            tol=settings.tolerance,
            mutation=(0.5, 1.0),
            recombination=0.9,
            rng=np.random.default_rng(seed),
            callback=_callback(model.spec, settings, restart, progress, deadline),
            polish=False,
            init="sobol",
            updating="deferred",
            vectorized=True,
        )
        if deadline is not None and time.perf_counter() > deadline:
            return True
    return False


def _callback(spec, settings, restart, progress, deadline):
    """The per-generation callback of one scipy run: progress, and the time limit."""
    generation = 0

    def callback(intermediate_result) -> bool:
        nonlocal generation
        generation += 1
        if progress is not None and generation % 10 == 0:
            progress(
                f"{spec.name}: restart {restart}/{settings.restarts}, generation {generation}, "
                f"best score {float(intermediate_result.fun):.6g}"
            )
        return deadline is not None and time.perf_counter() > deadline

    return callback


def search_case(
    sequence_case: SequenceCase,
    settings: SearchSettings = SearchSettings(),
    *,
    names: list[str] | None = None,
    progress: Progress | None = None,
) -> SearchResult:
    """Search every sequence of a case (or those named) and rank their candidates together.

    Each sequence gets ``settings.top`` candidates and its own seed (spawned from the one given);
    the merged list keeps the ``top`` best. A time limit is shared by all sequences.
    """
    sequences = (
        [sequence_case.sequence(name) for name in names] if names else sequence_case.sequences
    )
    start = time.perf_counter()
    deadline = None if settings.time_limit_s is None else start + settings.time_limit_s
    seeds = np.random.SeedSequence(settings.seed).generate_state(len(sequences))
    merged = SearchResult(candidates=[])
    for spec, seed in zip(sequences, seeds, strict=True):
        own = SearchSettings(**{**settings.__dict__, "seed": int(seed)})
        try:
            result = search_sequence(
                sequence_case.case, spec, own, progress=progress, deadline=deadline
            )
        except KeyboardInterrupt:
            merged.interrupted = True
            break
        merged.candidates.extend(result.candidates)
        merged.evaluations += result.evaluations
        merged.best_score.update(result.best_score)
        if result.interrupted:
            merged.interrupted = True
            break
    merged.candidates = rank_candidates(merged.candidates)[: settings.top]
    merged.seconds = time.perf_counter() - start
    return merged


__all__ = [
    "METHODS",
    "SearchResult",
    "SearchSettings",
    "distinct_best",
    "polish",
    "rank_candidates",
    "search_case",
    "search_sequence",
]
