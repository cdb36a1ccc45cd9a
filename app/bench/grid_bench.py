"""Window grid speed: whole 1000 x 1000 grids against a per-cell loop measured in the same run.

The baseline solves cells one by one through the same public path the dashboard uses for a
single cell (`solve_cell`: ephemeris for the two dates, one Lambert solve, every metric), on a
subsample of the same grid, and is scaled to the grid's cell count. Ratios are baseline time /
grid time.
"""

from __future__ import annotations

import tempfile
import time

import numpy as np

from app.bench import BenchLine, best_time_s

SIZE_FULL = 1000
SIZE_QUICK = 120


def bench_case(n: int, max_revolutions: int):
    """An Earth-Venus case with n departure and n arrival dates (about a year each)."""
    from solver.window.case import parse_case

    return parse_case(f"""
[case]
title = "benchmark grid"
central_body = "sun"
departure_body = "earth"
target_body = "venus"
[window]
departure_start = "2031-01-01"
departure_end = "2031-12-31"
departure_step_days = {364.0 / (n - 1)!r}
arrival_start = "2031-04-01"
arrival_end = "2032-03-31"
arrival_step_days = {365.0 / (n - 1)!r}
[transfer]
max_revolutions = {max_revolutions}
[departure_orbit]
altitude_km = 200
[arrival_orbit]
mode = "capture"
periapsis_altitude_km = 300
apoapsis_altitude_km = 30000
entry_altitude_km = 125
[limits]
c3_max_km2_s2 = 30
vinf_arrival_max_km_s = 6
dla_max_deg = 40
""")


def _per_cell_seconds(case, samples: int) -> float:
    from solver.window.case_bodies import CaseBodies
    from solver.window.cell import solve_cell
    from solver.window.grid import grid_axes

    bodies = CaseBodies.of(case)
    dep, arr = grid_axes(case)
    rng = np.random.default_rng(1)
    i = rng.integers(0, len(dep), samples)
    j = rng.integers(0, len(arr), samples)
    start = time.perf_counter()
    for a, b in zip(i, j, strict=True):
        solve_cell(case, dep[a], arr[b], bodies)
    return (time.perf_counter() - start) / samples


def run(size: str = "full") -> list[BenchLine]:
    from solver.files.cache import GridCache
    from solver.window.grid import compute_window

    n = SIZE_FULL if size == "full" else SIZE_QUICK
    samples = 400 if size == "full" else 50
    lines = []
    for revs, goal in ((0, 1.5), (2, None)):
        case = bench_case(n, revs)
        compute_window(bench_case(20, revs))  # kernels loaded, not timed
        cold = best_time_s(lambda case=case: compute_window(case), repeats=2)
        cells = n * n
        per_cell = _per_cell_seconds(case, samples)
        baseline = per_cell * cells
        lines.append(
            BenchLine(
                section="grid",
                name=f"{n} x {n} grid, max_revolutions = {revs}, every metric, ephemeris included, "
                "cold",
                value=cold,
                unit="s",
                baseline_value=baseline,
                ratio=baseline / cold,
                goal="" if goal is None else f"<= {goal} s",
                meets_goal=None if goal is None else cold <= goal,
                notes=f"baseline: per-cell loop (solve_cell) on {samples} cells, "
                f"{per_cell * 1e3:.2f} ms per cell, scaled to {cells:,} cells",
            )
        )
        if revs == 0:
            with tempfile.TemporaryDirectory() as folder:
                cache = GridCache(folder, max_bytes=8 * 1024**3)
                compute_window(case, cache=cache)  # the put
                hit = best_time_s(
                    lambda case=case, cache=cache: compute_window(case, cache=cache), repeats=3
                )
            lines.append(
                BenchLine(
                    section="grid",
                    name=f"{n} x {n} grid, cache hit",
                    value=hit,
                    unit="s",
                    baseline_value=baseline,
                    ratio=baseline / hit,
                    notes=f"cold compute {cold:.3f} s for comparison; baseline as above",
                )
            )
    return lines
