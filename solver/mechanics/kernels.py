"""The compiled kernels: which there are, whether this machine has them compiled, compile them.

The Lambert and Kepler kernels are compiled by numba on their first call and kept in numba's
on-disk cache (``cache=True``), so only the first run on a machine (or after a change to their
source or an upgrade of numba) pays for compiling them: a minute or two of one core. Later runs
load them in well under a second. This module lets a front end do that work up front and say
so, instead of leaving the first grid silent for minutes::

    from solver.mechanics.kernels import pending_kernels, prepare_kernels

    if pending_kernels():
        print("preparing the solver, once")
        prepare_kernels(progress=lambda done, total, name: print(done, total, name))

Each kernel is compiled for the argument types the engine passes it (C-contiguous float64
arrays, the same for every grid, cell, refinement and export), so nothing compiles again later.
Importing this module imports numba and the kernel modules (their small ufuncs load or compile
at import).
"""

from __future__ import annotations

import time
from collections.abc import Callable
from dataclasses import dataclass
from typing import Any

import numpy as np

from solver.mechanics import kepler, lambert

# Enough cases for the parallel kernels (solve_lambert and propagate switch at 512).
_PARALLEL_CASES = 512


@dataclass(frozen=True)
class Kernel:
    """One compiled entry point of the engine.

    Attributes
    ----------
    name : str
        What it does, for progress messages.
    dispatcher : numba dispatcher
        The compiled function.
    warm : callable
        A call through the engine's own Python API that compiles (or loads) it with the
        argument types the engine uses.
    """

    name: str
    dispatcher: Any
    warm: Callable[[], object]


def _lambert(n: int) -> Callable[[], object]:
    def call() -> object:
        r1 = np.tile([7000.0, 0.0, 0.0], (n, 1))
        r2 = np.tile([0.0, 8000.0, 100.0], (n, 1))
        return lambert.solve_lambert(r1, r2, np.full(n, 5000.0), 398600.4418, max_revs=1)

    return call


def _propagate(n: int) -> Callable[[], object]:
    def call() -> object:
        r0 = np.tile([7000.0, 0.0, 0.0], (n, 1))
        v0 = np.tile([0.0, 7.5, 0.1], (n, 1))
        return kepler.propagate(r0, v0, np.full(n, 600.0), 398600.4418)

    return call


KERNELS: tuple[Kernel, ...] = (
    Kernel("Lambert arcs, single cells", lambert._solve_kernel_serial, _lambert(1)),
    Kernel("Lambert arcs, whole grids", lambert._solve_kernel, _lambert(_PARALLEL_CASES)),
    Kernel("Kepler propagation, single arcs", kepler._propagate_kernel_serial, _propagate(1)),
    Kernel("Kepler propagation, many states", kepler._propagate_kernel, _propagate(512)),
    Kernel(
        "multi-revolution time bounds",
        lambert._minimum_tof_x,
        lambda: lambert.minimum_tof_nondim(0.5, 1),
    ),
    Kernel("time of flight of an arc", lambert.tof_of_x, lambda: lambert.tof_of_x(0.5, 0.5, 0)),
)
"""Every entry point the engine calls from Python, in the order :func:`prepare_kernels` takes."""


def is_compiled_here(dispatcher: Any) -> bool:
    """Whether numba's on-disk cache holds ``dispatcher`` compiled for this machine's CPU and
    current source (so its first call loads rather than compiles).

    Reads numba's cache index (``numba.core.caching``, not a public API): any failure to read
    it counts as "not compiled", which at worst announces a preparation that turns out quick.
    """
    try:
        index = dispatcher._cache._cache_file._load_index()
        magic = dispatcher.targetctx.codegen().magic_tuple()
    except Exception:
        return False
    return any(key[1] == magic for key in index)


def pending_kernels() -> list[str]:
    """Names of the kernels this machine would have to compile (empty when all are cached)."""
    return [k.name for k in KERNELS if not is_compiled_here(k.dispatcher)]


@dataclass(frozen=True)
class PreparedKernel:
    name: str
    compiled: bool  # False: loaded from numba's cache
    seconds: float


def prepare_kernels(
    progress: Callable[[int, int, str], None] | None = None,
) -> list[PreparedKernel]:
    """Compile (or load) every kernel now.

    Parameters
    ----------
    progress : callable(done, total, name), optional
        Called before each kernel with the number done so far and the name of the next one,
        and once at the end with ``done == total`` and an empty name.

    Returns
    -------
    list of PreparedKernel
        Per kernel: whether it had to be compiled, and how long it took.
    """
    out = []
    total = len(KERNELS)
    for done, kernel in enumerate(KERNELS):
        if progress is not None:
            progress(done, total, kernel.name)
        compiled = not is_compiled_here(kernel.dispatcher)
        start = time.perf_counter()
        kernel.warm()
        out.append(PreparedKernel(kernel.name, compiled, time.perf_counter() - start))
    if progress is not None:
        progress(total, total, "")
    return out


__all__ = [
    "KERNELS",
    "Kernel",
    "PreparedKernel",
    "is_compiled_here",
    "pending_kernels",
    "prepare_kernels",
]
