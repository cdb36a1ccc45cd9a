"""The search's first stage in one compiled kernel: states and every leg's Lambert arcs.

For each candidate (in parallel over the batch) the kernel reads the body met at each date from
the compiled ephemeris tables (:func:`solver.ephemeris.compiled.body_state_into`) and solves
each leg with the Lambert solver's own compiled routine
(:data:`solver.mechanics.lambert.solve_one_into`, the code behind
:func:`~solver.mechanics.lambert.solve_lambert`). One pass over memory, no temporaries: this is
what makes a population of a global optimizer cheap to evaluate.
"""

from __future__ import annotations

import contextlib

import numba
import numpy as np
from numpy.typing import NDArray

from solver.ephemeris.compiled import SCRATCH_SIZE, CompiledStates, body_state_into
from solver.mechanics.lambert import solve_one_into
from solver.mechanics.parallel import PARALLEL_LOCK
from solver.reasons import Reason
from solver.time_units import SECONDS_PER_DAY

_NOT_REQUESTED = np.int8(Reason.NOT_REQUESTED)
_PARALLEL_MIN = 16_384  # below this the thread hand-offs cost more than they save (measured)


@numba.njit(cache=True, error_model="numpy")
def _one(
    i,
    epochs,
    epoch_body,
    leg_start,
    leg_end,
    leg_revs,
    leg_tol,
    mu,
    pole,
    retrograde,
    coefficients,
    cheb_int,
    cheb_real,
    kep_state,
    kep_real,
    cheb_first,
    kep_first,
    body_r,
    body_v,
    v1,
    v2,
    x,
    iters,
    reason,
):
    acc = np.empty(6)
    scratch = np.empty(SCRATCH_SIZE)
    for e in range(epochs.shape[1]):
        body_state_into(
            epoch_body[e],
            epochs[i, e],
            coefficients,
            cheb_int,
            cheb_real,
            kep_state,
            kep_real,
            cheb_first,
            kep_first,
            acc,
            scratch,
        )
        for j in range(3):
            body_r[i, e, j] = acc[j]
            body_v[i, e, j] = acc[j + 3]
    n_slots = v1.shape[2]
    for k in range(leg_start.shape[0]):
        a = leg_start[k]
        b = leg_end[k]
        tof_s = (epochs[i, b] - epochs[i, a]) * SECONDS_PER_DAY
        solve_one_into(
            body_r[i, a],
            body_r[i, b],
            tof_s,
            mu,
            pole,
            retrograde,
            leg_revs[k],
            leg_tol[k],
            v1[i, k],
            v2[i, k],
            x[i, k],
            iters[i, k],
            reason[i, k],
        )
        for s in range(2 * leg_revs[k] + 1, n_slots):
            for j in range(3):
                v1[i, k, s, j] = np.nan
                v2[i, k, s, j] = np.nan
            x[i, k, s] = np.nan
            iters[i, k, s] = 0
            reason[i, k, s] = _NOT_REQUESTED


@numba.njit(cache=True, parallel=True, error_model="numpy")
def _kernel(
    epochs,
    epoch_body,
    leg_start,
    leg_end,
    leg_revs,
    leg_tol,
    mu,
    pole,
    retrograde,
    coefficients,
    cheb_int,
    cheb_real,
    kep_state,
    kep_real,
    cheb_first,
    kep_first,
    body_r,
    body_v,
    v1,
    v2,
    x,
    iters,
    reason,
):
    for i in numba.prange(epochs.shape[0]):
        _one(
            i,
            epochs,
            epoch_body,
            leg_start,
            leg_end,
            leg_revs,
            leg_tol,
            mu,
            pole,
            retrograde,
            coefficients,
            cheb_int,
            cheb_real,
            kep_state,
            kep_real,
            cheb_first,
            kep_first,
            body_r,
            body_v,
            v1,
            v2,
            x,
            iters,
            reason,
        )


@numba.njit(cache=True, error_model="numpy")
def _kernel_serial(
    epochs,
    epoch_body,
    leg_start,
    leg_end,
    leg_revs,
    leg_tol,
    mu,
    pole,
    retrograde,
    coefficients,
    cheb_int,
    cheb_real,
    kep_state,
    kep_real,
    cheb_first,
    kep_first,
    body_r,
    body_v,
    v1,
    v2,
    x,
    iters,
    reason,
):
    for i in range(epochs.shape[0]):
        _one(
            i,
            epochs,
            epoch_body,
            leg_start,
            leg_end,
            leg_revs,
            leg_tol,
            mu,
            pole,
            retrograde,
            coefficients,
            cheb_int,
            cheb_real,
            kep_state,
            kep_real,
            cheb_first,
            kep_first,
            body_r,
            body_v,
            v1,
            v2,
            x,
            iters,
            reason,
        )


def solve_batch(
    compiled: CompiledStates,
    epochs: NDArray[np.float64],
    epoch_body: NDArray[np.int64],
    leg_start: NDArray[np.int64],
    leg_end: NDArray[np.int64],
    leg_revs: NDArray[np.int64],
    leg_tol: NDArray[np.float64],
    mu: float,
    pole: NDArray[np.float64],
    retrograde: bool,
):
    """States and every leg's arcs for a batch of candidates.

    Parameters
    ----------
    compiled : CompiledStates
        Tables of the bodies met.
    epochs : ndarray, shape (N, E)
        Encounter dates, JD TDB.
    epoch_body : ndarray of int, shape (E,)
        Index (in ``compiled``) of the body met at each date.
    leg_start, leg_end : ndarray of int, shape (L,)
        Each leg's first and last date (indices into the epoch vector).
    leg_revs : ndarray of int, shape (L,)
        Largest revolution count solved per leg.
    leg_tol : ndarray, shape (L,)
        Lambert angle tolerance per leg, rad.
    mu, pole, retrograde
        As for :func:`~solver.mechanics.lambert.solve_lambert`.

    Returns
    -------
    body_r, body_v : ndarray, shape (N, E, 3)
    v1, v2 : ndarray, shape (N, L, S, 3) with S = 2 max(leg_revs) + 1
    reason : ndarray of int8, shape (N, L, S) (``NOT_REQUESTED`` past a leg's own slots)
    """
    epochs = np.ascontiguousarray(epochs, dtype=float)
    n, n_epochs = epochs.shape
    n_legs = len(leg_start)
    n_slots = 2 * int(np.max(leg_revs)) + 1
    body_r = np.empty((n, n_epochs, 3))
    body_v = np.empty((n, n_epochs, 3))
    v1 = np.empty((n, n_legs, n_slots, 3))
    v2 = np.empty((n, n_legs, n_slots, 3))
    x = np.empty((n, n_legs, n_slots))
    iters = np.empty((n, n_legs, n_slots), dtype=np.int16)
    reason = np.empty((n, n_legs, n_slots), dtype=np.int8)
    args = (
        epochs,
        np.ascontiguousarray(epoch_body, dtype=np.int64),
        np.ascontiguousarray(leg_start, dtype=np.int64),
        np.ascontiguousarray(leg_end, dtype=np.int64),
        np.ascontiguousarray(leg_revs, dtype=np.int64),
        np.ascontiguousarray(leg_tol, dtype=float),
        float(mu),
        np.ascontiguousarray(pole, dtype=float),
        bool(retrograde),
        *compiled.tables,
        body_r,
        body_v,
        v1,
        v2,
        x,
        iters,
        reason,
    )
    parallel = n >= _PARALLEL_MIN
    with PARALLEL_LOCK if parallel else contextlib.nullcontext():
        (_kernel if parallel else _kernel_serial)(*args)
    return body_r, body_v, v1, v2, reason


def _warm_batch(n: int):
    def call() -> object:
        from solver.ephemeris.bodies import default_registry
        from solver.ephemeris.compiled import compile_states

        compiled = compile_states(["earth", "venus"], "sun", default_registry(), 2462000, 2462400)
        assert compiled is not None
        epochs = np.empty((n, 2))
        epochs[:, 0] = 2462100.0
        epochs[:, 1] = 2462250.0
        return solve_batch(
            compiled,
            epochs,
            np.array([0, 1]),
            np.array([0]),
            np.array([1]),
            np.array([0]),
            np.array([1e-7]),
            1.32712440018e11,
            np.array([0.0, 0.0, 1.0]),
            False,
        )

    return call


def _warm_states(n: int):
    def call() -> object:
        from solver.ephemeris.bodies import default_registry
        from solver.ephemeris.compiled import compile_states

        compiled = compile_states(["earth"], "sun", default_registry(), 2462000, 2462400)
        assert compiled is not None
        return compiled.states(np.zeros(n, dtype=np.int64), np.full(n, 2462100.0))

    return call


def _warm_flybys(n: int):
    def call() -> object:
        from solver.sequence.flyby import solve_flybys

        return solve_flybys(
            np.tile([5.0, 0.0, 0.0], (n, 1)), np.tile([4.0, 3.0, 0.0], (n, 1)), 3.2e5
        )

    return call


def sequence_kernels() -> tuple:
    """The sequence search's compiled entry points, as :data:`solver.mechanics.kernels.KERNELS`
    lists the engine's (the command line compiles both up front and says so)."""
    from solver.ephemeris import compiled as compiled_states
    from solver.mechanics.kernels import Kernel
    from solver.sequence import flyby
    from solver.sequence.fused import fused_kernels

    return (
        *fused_kernels(),
        Kernel("sequence legs, small batches", _kernel_serial, _warm_batch(4)),
        Kernel("sequence legs, populations", _kernel, _warm_batch(_PARALLEL_MIN)),
        Kernel("flybys, small batches", flyby._flyby_kernel_serial, _warm_flybys(4)),
        Kernel("flybys, populations", flyby._flyby_kernel, _warm_flybys(flyby._PARALLEL_MIN)),
        Kernel("compiled states, few", compiled_states._states_kernel_serial, _warm_states(4)),
        Kernel("compiled states, many", compiled_states._states_kernel, _warm_states(1024)),
    )


__all__ = ["sequence_kernels", "solve_batch"]
