"""Sequence speed: batched five-leg evaluations and the global search, against baselines.

* **Evaluations**: a five-leg sequence (Earth, Venus, Venus, Earth, Earth, Jupiter), a whole
  population of random candidates scored in one call (compiled states and Lambert arcs, flybys,
  burns, limits, the best arc path). Baseline: the same candidates one at a time through the exact
  path (one ephemeris call per body, one Lambert call per leg, the flybys): the per-evaluation
  scalar loop. Goal: 500,000 evaluations per second and 100 times the loop.
* **Search**: the outer-planet sample case (harrow_jupiter_veega) searched with a 20 s limit for
  ten seeds; each run's best is compared with the best of a long run made in the same bench run
  (many more populations and generations; its length is printed). Goal: within 1 % in at least 9
  of 10 seeds. The same ten seeds with scipy's ``differential_evolution(vectorized=True)`` under
  the same limit show what the lockstep populations buy.
"""

from __future__ import annotations

import os
import time

import numpy as np

from app.bench import BenchLine, best_time_s

FIVE_LEG_CASE = """
[case]
title = "benchmark five-leg sequence"
central_body = "sun"
departure_body = "earth"
target_body = "jupiter"
[window]
departure_start = "2034-01-01"
departure_end = "2034-12-31"
arrival_start = "2036-01-01"
arrival_end = "2046-12-31"
[departure_orbit]
altitude_km = 200
[arrival_orbit]
mode = "capture"
periapsis_altitude_km = 214476
apoapsis_altitude_km = 19000000
[limits]
c3_max_km2_s2 = 25
[sequence]
flyby_dv_max_km_s = 1.0
duration_max_days = 3600
[[sequence.legs]]
to = "venus"
tof_min_days = 80
tof_max_days = 220
[[sequence.legs]]
to = "venus"
tof_min_days = 200
tof_max_days = 500
[[sequence.legs]]
to = "earth"
tof_min_days = 50
tof_max_days = 400
[[sequence.legs]]
to = "earth"
tof_min_days = 300
tof_max_days = 800
[[sequence.legs]]
tof_min_days = 700
tof_max_days = 1500
"""

SEARCH_CASE = "harrow_jupiter_veega"
SEARCH_LIMIT_S = 20.0
WITHIN = 0.01


def _five_leg():
    from solver.sequence.evaluate import SequenceModel
    from solver.sequence.spec import parse_sequence_case

    sequence_case = parse_sequence_case(FIVE_LEG_CASE)
    spec = sequence_case.sequences[0]
    model = SequenceModel(sequence_case.case, spec)
    bounds = np.array(spec.variable_bounds(sequence_case.case))
    return model, spec, bounds


def evaluation_lines(size: str) -> list[BenchLine]:
    model, spec, bounds = _five_leg()
    n = 400_000 if size == "full" else 4_000
    samples = 300 if size == "full" else 20
    rng = np.random.default_rng(5)
    x = bounds[:, 0] + rng.uniform(size=(n, len(bounds))) * np.ptp(bounds, axis=1)
    # Compiled kernels loaded, tables built: not timed. A batch this large picks the parallel
    # kernels the timed calls use (a smaller one would load only the serial ones, leaving the
    # parallel ones to load inside the first timed call).
    warm = x[: min(n, 70_000)]
    model.score(warm)
    model.staged_score(warm)
    load_before = os.getloadavg()[0]
    batched = n / best_time_s(lambda: model.score(x), repeats=3)
    load = max(load_before, os.getloadavg()[0])
    staged = n / best_time_s(lambda: model.staged_score(x), repeats=2)

    def one_at_a_time() -> None:
        for row in x[:samples]:
            epochs = spec.epochs(row[None, :])
            model.costs(model.arcs(epochs, fast=False))

    one_at_a_time()
    loop = samples / best_time_s(one_at_a_time, repeats=2)
    cores = os.cpu_count() or 1
    return [
        BenchLine(
            section="sequence",
            name=f"five-leg evaluations ({' > '.join(spec.bodies)}), {n:,} in one call: "
            "ephemeris, Lambert, flybys, burns, limits",
            value=batched,
            unit="evaluations/s",
            baseline_value=loop,
            ratio=batched / loop,
            goal=">= 500,000 evaluations/s and >= 100x",
            meets_goal=batched >= 500_000 and batched / loop >= 100,
            notes=f"load average {load:.1f} on {cores} cores while timed (the goal is for an "
            "idle machine; `--section sequence-instructions` counts instructions, which the load "
            f"does not move). Baseline: one candidate at a time through the exact path "
            f"({samples} candidates, {1e3 / loop:.2f} ms each)",
            extra={"load_average": load, "cores": cores},
        ),
        BenchLine(
            section="sequence",
            name="the same, the compiled pass against the two numpy stages it replaced",
            value=batched,
            unit="evaluations/s",
            baseline_value=staged,
            ratio=batched / staged,
            notes="baseline: SequenceModel.staged_score (compiled states and Lambert arcs, then "
            "flybys, burns, limits and the best arc path in numpy)",
        ),
    ]


def instruction_lines(size: str) -> list[BenchLine]:
    """Instructions per evaluation under callgrind (``--section sequence-instructions``)."""
    from app.bench import sequence_instructions

    counts = sequence_instructions.count()
    if counts is None:
        return [
            BenchLine(
                section="sequence-instructions",
                name="instructions per five-leg evaluation",
                value=float("nan"),
                unit="instructions",
                notes="valgrind is not installed (Debian package valgrind)",
            )
        ]
    fused = counts["compiled pass"]
    return [
        BenchLine(
            section="sequence-instructions",
            name="instructions per five-leg evaluation (callgrind, one thread), compiled pass",
            value=fused,
            unit="instructions",
            baseline_value=counts["scalar loop"],
            ratio=counts["scalar loop"] / fused,
            notes="baseline: the per-evaluation scalar loop (the exact path); ratio = how many "
            "times fewer instructions",
            extra=counts,
        ),
        BenchLine(
            section="sequence-instructions",
            name="instructions per five-leg evaluation, compiled pass against the numpy stages",
            value=fused,
            unit="instructions",
            baseline_value=counts["numpy stages"],
            ratio=counts["numpy stages"] / fused,
            notes="baseline: SequenceModel.staged_score, the evaluation before the compiled pass",
        ),
    ]


def search_lines(size: str) -> list[BenchLine]:
    from app.samples import resolve_sequence_case_path
    from solver.sequence.search import SearchSettings, search_case
    from solver.sequence.spec import load_sequence_case

    sequence_case = load_sequence_case(resolve_sequence_case_path(SEARCH_CASE))
    seeds = 10 if size == "full" else 2
    limit = SEARCH_LIMIT_S if size == "full" else 3.0
    long_settings = (
        SearchSettings(top=1, seed=12345, restarts=12, population=40, generations=3000)
        if size == "full"
        else SearchSettings(top=1, seed=12345, restarts=4, population=10, generations=60)
    )
    start = time.perf_counter()
    long_run = search_case(sequence_case, long_settings)
    long_seconds = time.perf_counter() - start
    reference = long_run.candidates[0].objective_value

    def trial(method: str) -> tuple[int, list[float], list[float]]:
        values, seconds = [], []
        for seed in range(seeds):
            t0 = time.perf_counter()
            found = search_case(
                sequence_case, SearchSettings(top=1, seed=seed, time_limit_s=limit, method=method)
            )
            seconds.append(time.perf_counter() - t0)
            best = found.candidates[0]
            values.append(best.objective_value if best.within_limits else float("inf"))
        hits = sum(v <= (1.0 + WITHIN) * reference for v in values)
        return hits, values, seconds

    hits, values, seconds = trial("islands")
    scipy_hits, scipy_values, _ = trial("scipy")
    need = 9 if size == "full" else seeds
    return [
        BenchLine(
            section="sequence",
            name=f"global search on {SEARCH_CASE}, {limit:g} s limit: seeds within 1 % of the "
            "long run's best",
            value=hits,
            unit=f"of {seeds} seeds",
            baseline_value=scipy_hits,
            ratio=None,
            goal=f">= {need} of {seeds}, each <= {limit:g} s",
            meets_goal=hits >= need and max(seconds) <= limit,
            notes=f"long run: {long_settings.restarts} populations x {long_settings.population} "
            f"per variable, {long_settings.generations} generations, {long_run.evaluations:,} "
            f"evaluations in {long_seconds:.0f} s, best {reference:.5f} km/s; bests "
            + ", ".join(f"{v:.4f}" for v in values)
            + f"; slowest run {max(seconds):.1f} s. Baseline: scipy differential_evolution "
            "(vectorized=True) under the same limit, bests "
            + ", ".join(f"{v:.4f}" for v in scipy_values),
            extra={"reference": reference, "values": values, "scipy_values": scipy_values},
        )
    ]


def run(size: str = "full") -> list[BenchLine]:
    return [*evaluation_lines(size), *search_lines(size)]
