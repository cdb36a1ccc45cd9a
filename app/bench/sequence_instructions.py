"""Instructions per five-leg evaluation, counted by valgrind's callgrind: a figure the load of a
shared machine does not move.

``arcwindow bench --section sequence-instructions`` runs this module under
``valgrind --tool=callgrind --dump-before=clock_nanosleep`` (Debian package valgrind). The module
marks the end of each phase with a short sleep, which makes callgrind write the instructions
counted since the previous mark to a file of its own; the phases are:

1. start-up, the tables, the compiled kernels loaded and run once (not counted);
2. the compiled pass (:mod:`solver.sequence.fused`) on ``BATCH`` candidates;
3. the two numpy stages (``SequenceModel.staged_score``, the pass before it) on the same;
4. the per-evaluation scalar loop (the exact path, one candidate at a time) on ``LOOP``.

One numba thread (``NUMBA_NUM_THREADS=1``): the count is that of the work, not of the thread
pool. Under callgrind the run takes several minutes.
"""

from __future__ import annotations

import os
import re
import shutil
import subprocess
import sys
import tempfile
import time
from pathlib import Path

BATCH = 20_000
LOOP = 20
PHASES = ("start-up", "compiled pass", "numpy stages", "scalar loop")


def _mark() -> None:
    time.sleep(0.001)  # clock_nanosleep: callgrind dumps the counts of the phase that ended


def main() -> None:
    import numpy as np

    from app.bench.sequence_bench import _five_leg

    model, spec, bounds = _five_leg()
    rng = np.random.default_rng(5)
    x = bounds[:, 0] + rng.uniform(size=(BATCH, len(bounds))) * np.ptp(bounds, axis=1)
    model.score(x[:1000])
    model.staged_score(x[:1000])
    model.costs(model.arcs(spec.epochs(x[:1]), fast=False))
    _mark()
    model.score(x)
    _mark()
    model.staged_score(x)
    _mark()
    for row in x[:LOOP]:
        model.costs(model.arcs(spec.epochs(row[None, :]), fast=False))
    _mark()


def count() -> dict[str, float] | None:
    """Instructions per evaluation of each phase (None when valgrind is not installed)."""
    valgrind = shutil.which("valgrind")
    if valgrind is None:
        return None
    with tempfile.TemporaryDirectory() as folder:
        out = Path(folder) / "callgrind.out"
        env = {**os.environ, "NUMBA_NUM_THREADS": "1"}
        subprocess.run(
            [
                valgrind,
                "--tool=callgrind",
                "--dump-before=clock_nanosleep",
                f"--callgrind-out-file={out}",
                sys.executable,
                "-m",
                "app.bench.sequence_instructions",
            ],
            env=env,
            check=True,
            capture_output=True,
        )
        counts = []
        for path in sorted(Path(folder).glob("callgrind.out*"), key=_part_number):
            found = re.search(r"^(?:summary|totals):\s*(\d+)", path.read_text(), re.MULTILINE)
            counts.append(int(found.group(1)) if found else 0)
    if len(counts) < 4:
        raise RuntimeError(f"callgrind wrote {len(counts)} dumps, 4 or more expected")
    return {
        "compiled pass": counts[1] / BATCH,
        "numpy stages": counts[2] / BATCH,
        "scalar loop": counts[3] / LOOP,
    }


def _part_number(path: Path) -> int:
    """callgrind.out.1, .2, ... in order (the final dump, without a number, last)."""
    suffix = path.name.rsplit(".", 1)[-1]
    return int(suffix) if suffix.isdigit() else 1 << 30


def run(size: str = "full") -> list:
    """The bench section (``arcwindow bench --section sequence-instructions``)."""
    from app.bench.sequence_bench import instruction_lines

    return instruction_lines(size)


if __name__ == "__main__":
    main()
