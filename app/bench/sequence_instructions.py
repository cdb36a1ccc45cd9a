"""Instructions per five-leg evaluation, counted by valgrind's callgrind: a figure the load of a
shared machine does not move.

``arcwindow bench --section sequence-instructions`` runs this module under
``valgrind --tool=callgrind --dump-before=clock_nanosleep*`` (Debian package valgrind). The module
marks the end of each phase with a short sleep, which makes callgrind write the instructions
counted since the previous mark to a file of its own; the phases are:

1. start-up, the tables, every compiled kernel loaded and run once on the very batches timed
   next (so that no kernel is loaded, let alone compiled, inside a counted phase; not counted);
2. the compiled pass (:mod:`solver.sequence.fused`) on ``BATCH`` candidates;
3. the two numpy stages (``SequenceModel.staged_score``, the pass before it) on the same;
4. the per-evaluation scalar loop (the exact path, one candidate at a time) on ``LOOP``.

One numba thread (``NUMBA_NUM_THREADS=1``): the count is that of the work, not of the thread
pool.

valgrind presents a CPU of its own (fewer instruction-set features than the host's), and numba's
cache is keyed by the CPU: run as it is, every kernel would be compiled again under valgrind,
which takes longer than the whole count. So :func:`count` first asks valgrind which CPU it
presents (a few seconds), compiles the kernels for that CPU natively (``NUMBA_CPU_NAME`` and
``NUMBA_CPU_FEATURES``; a minute or two the first time, nothing once cached) and gives the same
two settings to the run under callgrind, which then loads them from the cache. The counts are
those of code built for the CPU valgrind presents, as before. Under callgrind the run then takes
a few minutes.
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


def main(compile_only: bool = False) -> None:
    import numpy as np

    from app.bench.sequence_bench import _five_leg

    model, spec, bounds = _five_leg()
    rng = np.random.default_rng(5)
    x = bounds[:, 0] + rng.uniform(size=(BATCH, len(bounds))) * np.ptp(bounds, axis=1)
    # The batches of the counted phases, once: a batch's size picks the serial or the parallel
    # kernel, and the one picked must already be loaded when counting starts.
    model.score(x)
    model.staged_score(x)
    model.costs(model.arcs(spec.epochs(x[:1]), fast=False))
    if compile_only:
        return
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
    env = {**os.environ, **_valgrind_cpu(valgrind), "NUMBA_NUM_THREADS": "1"}
    # The kernels compiled (or found in the cache) for that CPU, natively.
    subprocess.run(
        [sys.executable, "-m", "app.bench.sequence_instructions", "--compile-only"],
        env=env,
        check=True,
        capture_output=True,
    )
    with tempfile.TemporaryDirectory() as folder:
        out = Path(folder) / "callgrind.out"
        subprocess.run(
            [
                valgrind,
                "--tool=callgrind",
                # glibc's symbol is versioned (clock_nanosleep@@GLIBC_2.17): a bare name
                # matches nothing, and the run ends with one dump for everything.
                "--dump-before=clock_nanosleep*",
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
    if len(counts) != len(PHASES) + 1:  # one per mark, and the last at the exit
        raise RuntimeError(f"callgrind wrote {len(counts)} dumps, {len(PHASES) + 1} expected")
    return {
        "compiled pass": counts[1] / BATCH,
        "numpy stages": counts[2] / BATCH,
        "scalar loop": counts[3] / LOOP,
    }


_CPU_PROBE = (
    "import llvmlite.binding as ll; "
    "print(ll.get_host_cpu_name(), ll.get_host_cpu_features().flatten())"
)


def _valgrind_cpu(valgrind: str) -> dict[str, str]:
    """The numba settings naming the CPU valgrind presents (its name and features, as numba
    would detect them under valgrind)."""
    probe = subprocess.run(
        [valgrind, "--tool=none", "-q", sys.executable, "-c", _CPU_PROBE],
        check=True,
        capture_output=True,
        text=True,
    )
    name, features = probe.stdout.split()[-2:]
    return {"NUMBA_CPU_NAME": name, "NUMBA_CPU_FEATURES": features}


def _part_number(path: Path) -> int:
    """callgrind.out.1, .2, ... in order (the final dump, without a number, last)."""
    suffix = path.name.rsplit(".", 1)[-1]
    return int(suffix) if suffix.isdigit() else 1 << 30


def run(size: str = "full") -> list:
    """The bench section (``arcwindow bench --section sequence-instructions``)."""
    from app.bench.sequence_bench import instruction_lines

    return instruction_lines(size)


if __name__ == "__main__":
    main(compile_only="--compile-only" in sys.argv[1:])
