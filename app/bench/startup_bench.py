"""Start-up: ``arcwindow --help`` against ``python -c pass``, and the solver's kernels.

``arcwindow --help`` imports no subcommand module, numpy or compiled kernel (app/cli.py), so it
should cost little more than starting Python itself; the goal is under 0.3 s on a warm machine.
The baseline is ``python -c pass`` with the same interpreter, timed in the same run (best of
several: the machine is shared). The kernels line times loading every compiled kernel in a
fresh process (numba's on-disk cache; a compile when it is cold, which is then reported).
"""

from __future__ import annotations

import subprocess
import sys
import time

from app.bench import BenchLine

HELP_GOAL_S = 0.3


def _best_run_s(argv: list[str], repeats: int) -> float:
    best = float("inf")
    for _ in range(repeats):
        start = time.perf_counter()
        subprocess.run(argv, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL, check=True)
        best = min(best, time.perf_counter() - start)
    return best


KERNELS_SCRIPT = """
import time
start = time.perf_counter()
from solver.mechanics.kernels import pending_kernels, prepare_kernels
pending = pending_kernels()
prepare_kernels()
print(len(pending), time.perf_counter() - start)
"""


def run(size: str) -> list[BenchLine]:
    repeats = 3 if size == "quick" else 7
    python = sys.executable
    baseline_s = _best_run_s([python, "-c", "pass"], repeats)
    help_s = _best_run_s([python, "-m", "app.cli", "--help"], repeats)
    lines = [
        BenchLine(
            section="startup",
            name="arcwindow --help, best of runs",
            value=help_s,
            unit="s",
            baseline_value=baseline_s,
            ratio=baseline_s / help_s,
            goal=f"<= {HELP_GOAL_S} s",
            meets_goal=help_s <= HELP_GOAL_S,
            notes="baseline: python -c pass with the same interpreter (ratio below 1: the "
            "extra cost of the command line's imports)",
        )
    ]
    start = time.perf_counter()
    proc = subprocess.run(
        [python, "-c", KERNELS_SCRIPT], capture_output=True, text=True, check=True
    )
    wall_s = time.perf_counter() - start
    compiled, inside_s = proc.stdout.split()
    lines.append(
        BenchLine(
            section="startup",
            name="import and load every compiled kernel, fresh process",
            value=float(inside_s),
            unit="s",
            baseline_value=baseline_s,
            ratio=baseline_s / float(inside_s),
            notes=f"{compiled} kernels compiled (0: all loaded from numba's cache); "
            f"process wall time {wall_s:.2f} s",
        )
    )
    return lines
