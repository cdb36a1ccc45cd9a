"""``arcwindow bench``: speed figures as ratios against simple baselines measured in the same run.

Each section is a module in this package exposing ``run(size: str) -> list[BenchLine]``; ``size`` is
``"full"`` (the figures quoted in issues and notes) or ``"quick"`` (a smoke run for tests).
Absolute times on a shared, noisy machine mean little; the ratio to a baseline measured seconds
earlier on the same machine is the figure to watch.
"""

from __future__ import annotations

import importlib
import json
import time
from collections.abc import Callable
from dataclasses import asdict, dataclass, field

# Section name -> module. Order is the printing order.
SECTIONS: dict[str, str] = {
    "startup": "app.bench.startup_bench",
    "lambert": "app.bench.lambert_bench",
    "ephemeris": "app.bench.ephemeris_bench",
    "cache": "app.bench.cache_bench",
    "grid": "app.bench.grid_bench",
    "launch": "app.bench.launch_bench",
    "dashboard": "app.bench.dashboard_bench",
}
# Sections run only when asked for (``--section NAME`` or their own flag, e.g. ``--survey``).
OPTIONAL_SECTIONS: dict[str, str] = {
    "survey": "app.bench.survey_bench",
    "sequence": "app.bench.sequence_bench",  # about 10 minutes in full: ten 20 s searches twice
    # valgrind's callgrind: a few minutes (the kernels are compiled natively, for the CPU
    # valgrind presents, beforehand; see the module)
    "sequence-instructions": "app.bench.sequence_instructions",
}


@dataclass
class BenchLine:
    """One measured figure.

    ``rate`` is in ``unit`` (higher is better for rates, ``lower_is_better`` for latencies);
    ``baseline_rate`` is the same quantity for the baseline, and ``ratio`` is speed-up over it.
    """

    section: str
    name: str
    value: float
    unit: str
    baseline_value: float | None = None
    ratio: float | None = None
    goal: str = ""
    meets_goal: bool | None = None
    notes: str = ""
    extra: dict = field(default_factory=dict)


def best_time_s(func: Callable[[], object], repeats: int = 3) -> float:
    """Smallest wall time over ``repeats`` calls: the least noisy estimate on a shared machine."""
    best = float("inf")
    for _ in range(repeats):
        start = time.perf_counter()
        func()
        best = min(best, time.perf_counter() - start)
    return best


def run_sections(names: list[str], size: str = "full") -> list[BenchLine]:
    lines: list[BenchLine] = []
    registry = {**SECTIONS, **OPTIONAL_SECTIONS}
    for name in names:
        module = importlib.import_module(registry[name])
        lines.extend(module.run(size))
    return lines


def format_lines(lines: list[BenchLine]) -> str:
    out = []
    for line in lines:
        text = f"[{line.section}] {line.name}: {line.value:,.4g} {line.unit}"
        if line.baseline_value is not None:
            text += f" | baseline {line.baseline_value:,.4g} {line.unit}"
        if line.ratio is not None:
            text += f" | ratio {line.ratio:,.1f}x"
        if line.goal:
            verdict = (
                "" if line.meets_goal is None else (" (met)" if line.meets_goal else " (NOT met)")
            )
            text += f" | goal {line.goal}{verdict}"
        if line.notes:
            text += f"\n    {line.notes}"
        out.append(text)
    return "\n".join(out)


def to_json(lines: list[BenchLine]) -> str:
    return json.dumps([asdict(line) for line in lines], indent=2)
