"""States of a few bodies at very many epochs, inside compiled kernels (the sequence search).

:func:`solver.ephemeris.states.states` answers any question in numpy; a global search of a
multi-leg sequence asks one narrow question millions of times: where are these five or six bodies
about the central body at these epochs? This module assembles, once per search, each body's state
about the central body as a sum of terms a compiled kernel evaluates per epoch:

* **Chebyshev terms**: DE423's own coefficient sets (the arrays ``jplephem`` reads), cut to the
  dates the search can reach, evaluated with the Chebyshev recurrence and its derivative exactly
  as ``jplephem`` does (position in km, velocity in km/day divided by 86400). The Earth and Moon
  are split from the Earth-Moon barycentre with the file's EMRAT, as in
  :mod:`solver.ephemeris.de`.
* **Kepler terms**: element bodies, as a reference state (computed once by
  :class:`~solver.ephemeris.element_bodies.ElementSet`) moved by the compiled universal-variable
  propagator of :mod:`solver.mechanics.kepler`.

The assembly follows :func:`~solver.ephemeris.states.states` body chain by body chain, so the two
agree to rounding (tests/test_sequence_states.py: within 1e-9 km and 1e-13 km/s per AU-sized
vector). The mean-element source has no compiled form: :func:`compile_states` returns None and
callers use :func:`~solver.ephemeris.states.states`. Epochs outside the cut span give NaN.
"""

from __future__ import annotations

import contextlib
import math
from collections.abc import Sequence
from dataclasses import dataclass

import numba
import numpy as np
from numpy.typing import NDArray

from solver.ephemeris import de as ephem_de
from solver.ephemeris.bodies import DE423, Body, BodyRegistry
from solver.ephemeris.element_bodies import ElementSet
from solver.errors import InputError
from solver.mechanics.kepler import propagate_one_into
from solver.mechanics.parallel import PARALLEL_LOCK
from solver.time_units import SECONDS_PER_DAY

# DE segment name of each built-in body (state about the solar-system barycentre), with its
# factor; the Earth and Moon are EMB plus a share of the geocentric Moon.
_SEGMENT_OF = {
    "sun": "sun",
    "mercury": "mercury",
    "venus": "venus",
    "emb": "earthmoon",
    "mars": "mars",
    "jupiter": "jupiter",
    "saturn": "saturn",
    "uranus": "uranus",
    "neptune": "neptune",
    "pluto": "pluto",
}
# Below this many epochs the serial kernel (no thread-pool start) is the faster one.
_PARALLEL_MIN_EPOCHS = 512


@dataclass(frozen=True)
class CompiledStates:
    """Several bodies' states about one central body, as flat tables for compiled kernels.

    Body ``k`` (in the order of ``names``) is the sum of the Chebyshev terms
    ``cheb_first[k]:cheb_first[k + 1]`` and the Kepler terms ``kep_first[k]:kep_first[k + 1]``.

    Attributes
    ----------
    names : tuple of str
        Body names, in index order.
    central : str
        The central body every state is about (ICRF axes).
    coefficients : ndarray, 1-D
        Every Chebyshev coefficient set used, flattened, each term's block ``(n_sets, 3, n_coef)``.
    cheb_int : ndarray of int64, shape (n_cheb, 3)
        Per Chebyshev term: offset into ``coefficients``, number of sets, coefficients per axis.
    cheb_real : ndarray, shape (n_cheb, 3)
        Per term: JD TDB at the start of its first set, days per set, factor.
    kep_state : ndarray, shape (n_kep, 6)
        Per Kepler term: reference position (km) and velocity (km/s) about its own central body.
    kep_real : ndarray, shape (n_kep, 3)
        Per term: reference epoch (JD TDB), GM of the two-body motion, factor.
    cheb_first, kep_first : ndarray of int64, shape (n_bodies + 1,)
        Where each body's terms start.
    jd_tdb_min, jd_tdb_max : float
        The span the tables cover.
    """

    names: tuple[str, ...]
    central: str
    coefficients: NDArray[np.float64]
    cheb_int: NDArray[np.int64]
    cheb_real: NDArray[np.float64]
    kep_state: NDArray[np.float64]
    kep_real: NDArray[np.float64]
    cheb_first: NDArray[np.int64]
    kep_first: NDArray[np.int64]
    jd_tdb_min: float
    jd_tdb_max: float

    @property
    def tables(self) -> tuple:
        """The arrays a compiled kernel takes, in :func:`body_state_into`'s order."""
        return (
            self.coefficients,
            self.cheb_int,
            self.cheb_real,
            self.kep_state,
            self.kep_real,
            self.cheb_first,
            self.kep_first,
        )

    def index(self, name: str) -> int:
        return self.names.index(name)

    def states(
        self, body_index: NDArray[np.int64], jd_tdb: NDArray[np.float64]
    ) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
        """States of body ``body_index[i]`` at ``jd_tdb[i]`` (same shapes), km and km/s, ICRF."""
        jd = np.ascontiguousarray(jd_tdb, dtype=float)
        which = np.ascontiguousarray(np.broadcast_to(body_index, jd.shape), dtype=np.int64)
        flat_jd = jd.reshape(-1)
        flat_k = which.reshape(-1)
        out = np.empty((flat_jd.size, 6))
        parallel = flat_jd.size >= _PARALLEL_MIN_EPOCHS
        kernel = _states_kernel if parallel else _states_kernel_serial
        with PARALLEL_LOCK if parallel else contextlib.nullcontext():
            kernel(
                flat_k,
                flat_jd,
                self.coefficients,
                self.cheb_int,
                self.cheb_real,
                self.kep_state,
                self.kep_real,
                self.cheb_first,
                self.kep_first,
                out,
            )
        out = out.reshape(*jd.shape, 6)
        return out[..., :3], out[..., 3:]


# ---------------------------------------------------------------------------------------------
# Compiled evaluation


_MAX_COEFFICIENTS = 32  # DE423 uses at most 14 per axis
SCRATCH_SIZE = 2 * _MAX_COEFFICIENTS + 6


@numba.njit(cache=True, error_model="numpy")
def _chebyshev_into(coefficients, offset, n_sets, n_coef, jd0, days, factor, jd, acc, t, dt):
    """Add ``factor`` times one DE segment's position and velocity at ``jd`` to acc[0:6].

    ``t`` and ``dt`` are scratch arrays of at least ``n_coef`` values.
    """
    index = math.floor((jd - jd0) / days)
    if index < 0 or index > n_sets:
        for j in range(6):
            acc[j] = math.nan
        return
    if index == n_sets:  # the very end of the span belongs to the last set
        index = n_sets - 1
    offset_days = (jd - jd0) - index * days
    t1 = 2.0 * offset_days / days - 1.0
    twot1 = t1 + t1
    # T_0 = 1, T_1 = t, T_n = 2t T_(n-1) - T_(n-2); dT_0 = 0, dT_1 = 1,
    # dT_n = 2t dT_(n-1) - dT_(n-2) + 2 T_(n-1): the recurrences jplephem uses.
    t[0] = 1.0
    t[1] = t1
    dt[0] = 0.0
    dt[1] = 1.0
    for n in range(2, n_coef):
        t[n] = twot1 * t[n - 1] - t[n - 2]
        dt[n] = twot1 * dt[n - 1] - dt[n - 2] + t[n - 1] + t[n - 1]
    scale = factor * 2.0 / days / SECONDS_PER_DAY
    base = offset + index * 3 * n_coef
    for axis in range(3):
        row = base + axis * n_coef
        position = 0.0
        rate = 0.0
        for n in range(n_coef):
            c = coefficients[row + n]
            position += c * t[n]
            rate += c * dt[n]
        acc[axis] += factor * position
        acc[axis + 3] += scale * rate


@numba.njit(cache=True, error_model="numpy")
def body_state_into(
    k,
    jd,
    coefficients,
    cheb_int,
    cheb_real,
    kep_state,
    kep_real,
    cheb_first,
    kep_first,
    acc,
    scratch,
):
    """Write body ``k``'s state at ``jd`` (JD TDB) into ``acc[0:6]`` (km, km/s; NaN out of span).

    Compiled; other kernels (the sequence search) call it with a :class:`CompiledStates`'
    ``tables`` and a ``scratch`` array of :data:`SCRATCH_SIZE` values (allocated once per
    thread, not per state).
    """
    for j in range(6):
        acc[j] = 0.0
    t = scratch[:_MAX_COEFFICIENTS]
    dt = scratch[_MAX_COEFFICIENTS : 2 * _MAX_COEFFICIENTS]
    buf = scratch[2 * _MAX_COEFFICIENTS : 2 * _MAX_COEFFICIENTS + 6]
    for term in range(cheb_first[k], cheb_first[k + 1]):
        _chebyshev_into(
            coefficients,
            cheb_int[term, 0],
            cheb_int[term, 1],
            cheb_int[term, 2],
            cheb_real[term, 0],
            cheb_real[term, 1],
            cheb_real[term, 2],
            jd,
            acc,
            t,
            dt,
        )
    for term in range(kep_first[k], kep_first[k + 1]):
        s = kep_state[term]
        propagate_one_into(
            s[0],
            s[1],
            s[2],
            s[3],
            s[4],
            s[5],
            (jd - kep_real[term, 0]) * SECONDS_PER_DAY,
            kep_real[term, 1],
            buf,
        )
        factor = kep_real[term, 2]
        for j in range(6):
            acc[j] += factor * buf[j]


@numba.njit(cache=True, parallel=True, error_model="numpy")
def _states_kernel(which, jd, coefficients, cheb_int, cheb_real, kep_s, kep_r, cf, kf, out):
    for i in numba.prange(jd.shape[0]):
        scratch = np.empty(SCRATCH_SIZE)
        body_state_into(
            which[i],
            jd[i],
            coefficients,
            cheb_int,
            cheb_real,
            kep_s,
            kep_r,
            cf,
            kf,
            out[i],
            scratch,
        )


@numba.njit(cache=True, error_model="numpy")
def _states_kernel_serial(which, jd, coefficients, cheb_int, cheb_real, kep_s, kep_r, cf, kf, out):
    scratch = np.empty(SCRATCH_SIZE)
    for i in range(jd.shape[0]):
        body_state_into(
            which[i],
            jd[i],
            coefficients,
            cheb_int,
            cheb_real,
            kep_s,
            kep_r,
            cf,
            kf,
            out[i],
            scratch,
        )


# ---------------------------------------------------------------------------------------------
# Assembly


class _Builder:
    def __init__(self, registry: BodyRegistry, jd_min: float, jd_max: float, reference: float):
        self.registry = registry
        self.jd_min = jd_min
        self.jd_max = jd_max
        self.reference = reference
        self.blocks: list[NDArray[np.float64]] = []
        self.offset = 0
        self.cheb_int: list[tuple[int, int, int]] = []
        self.cheb_real: list[tuple[float, float, float]] = []
        self.kep_state: list[NDArray[np.float64]] = []
        self.kep_real: list[tuple[float, float, float]] = []
        self._segments: dict[str, tuple[int, int, int, float, float]] = {}

    def segment(self, name: str, factor: float) -> None:
        """Add one DE segment, cut to the span, with ``factor``."""
        if name not in self._segments:
            eph = ephem_de.ephemeris()
            sets = eph.load(name)
            n_sets_all = sets.shape[0]
            days = (eph.jomega - eph.jalpha) / n_sets_all
            first = max(0, math.floor((self.jd_min - eph.jalpha) / days) - 1)
            last = min(n_sets_all, math.floor((self.jd_max - eph.jalpha) / days) + 2)
            block = np.ascontiguousarray(sets[first:last], dtype=float)
            self._segments[name] = (
                self.offset,
                block.shape[0],
                block.shape[2],
                eph.jalpha + first * days,
                days,
            )
            self.blocks.append(block.reshape(-1))
            self.offset += block.size
        offset, n_sets, n_coef, jd0, days = self._segments[name]
        self.cheb_int.append((offset, n_sets, n_coef))
        self.cheb_real.append((jd0, days, factor))

    def barycentric(self, body: Body, factor: float) -> None:
        """Terms of a built-in body's state about the solar-system barycentre (DE423)."""
        key = body.key
        if key == "ssb":
            return
        if key in _SEGMENT_OF:
            self.segment(_SEGMENT_OF[key], factor)
            return
        if key in ("earth", "moon"):
            emrat = float(ephem_de.ephemeris().EMRAT)
            share = 1.0 / (1.0 + emrat) if key == "earth" else -emrat / (1.0 + emrat)
            self.segment("earthmoon", factor)
            self.segment("moon", -share * factor)
            return
        raise KeyError(key)  # pragma: no cover - every DE body is listed above

    def element(self, body: Body, factor: float) -> None:
        """A Kepler term: the element body about its own central body."""
        assert body.elements is not None
        elements = ElementSet([body.elements])
        r, v = elements.states_about_central(np.array([self.reference]))
        self.kep_state.append(np.concatenate([r[0, 0], v[0, 0]]))
        self.kep_real.append((self.reference, float(body.elements.mu_km3_s2), factor))

    def chain(self, body: Body) -> list[Body]:
        chain = [body]
        seen = {body.key}
        while chain[-1].elements is not None:
            central = self.registry.get(chain[-1].elements.central_body, field="central_body")
            if central.key in seen:
                raise InputError("central_body", central.name, "a chain of centrals without a loop")
            seen.add(central.key)
            chain.append(central)
        return chain

    def relative(self, target: Body, center: Body) -> None:
        """Terms of ``target`` about ``center``: the assembly of states._relative_state."""
        t_chain = self.chain(target)
        c_chain = self.chain(center)
        t_keys = [b.key for b in t_chain]
        c_keys = [b.key for b in c_chain]
        if center.key in t_keys:
            for body in t_chain[: t_keys.index(center.key)]:
                self.element(body, 1.0)
            return
        if target.key in c_keys:
            for body in c_chain[: c_keys.index(target.key)]:
                self.element(body, -1.0)
            return
        for body in t_chain[:-1]:
            self.element(body, 1.0)
        for body in c_chain[:-1]:
            self.element(body, -1.0)
        if t_chain[-1].key != c_chain[-1].key:
            self.barycentric(t_chain[-1], 1.0)
            self.barycentric(c_chain[-1], -1.0)


def compile_states(
    bodies: Sequence[str],
    central: str,
    registry: BodyRegistry,
    jd_tdb_min: float,
    jd_tdb_max: float,
    *,
    source: str | None = None,
) -> CompiledStates | None:
    """Tables for the states of ``bodies`` about ``central`` over a span of dates.

    Parameters
    ----------
    bodies : sequence of str
        Registered names (repeats allowed; each name gets one index).
    central : str
        The central body.
    registry : BodyRegistry
        Where names are looked up (a case's registry, with its element bodies).
    jd_tdb_min, jd_tdb_max : float
        The span the tables must cover (JD TDB); epochs outside give NaN.
    source : {None, "de423", "mean"}
        As for :func:`~solver.ephemeris.states.states`. ``"mean"`` (or a body whose only source
        is not DE423) has no compiled form: the result is None.

    Returns
    -------
    CompiledStates or None
    """
    if not (math.isfinite(jd_tdb_min) and math.isfinite(jd_tdb_max) and jd_tdb_min <= jd_tdb_max):
        raise InputError("jd_tdb span", (jd_tdb_min, jd_tdb_max), "finite, first <= last")
    names = tuple(dict.fromkeys(str(b) for b in bodies))
    center = registry.get(central, field="central")
    builder = _Builder(registry, jd_tdb_min, jd_tdb_max, 0.5 * (jd_tdb_min + jd_tdb_max))
    cheb_first = [0]
    kep_first = [0]
    for name in names:
        target = registry.get(name, field="body")
        for body in (*builder.chain(target), *builder.chain(center)):
            if body.elements is None and body.key != "ssb":
                chosen = source or body.default_source
                if chosen != DE423 or body.source_range(DE423) is None:
                    return None
        builder.relative(target, center)
        cheb_first.append(len(builder.cheb_int))
        kep_first.append(len(builder.kep_state))
    coefficients = np.concatenate(builder.blocks) if builder.blocks else np.zeros(1)
    return CompiledStates(
        names=names,
        central=center.name,
        coefficients=coefficients,
        cheb_int=np.array(builder.cheb_int, dtype=np.int64).reshape(-1, 3),
        cheb_real=np.array(builder.cheb_real, dtype=float).reshape(-1, 3),
        kep_state=np.array(builder.kep_state, dtype=float).reshape(-1, 6),
        kep_real=np.array(builder.kep_real, dtype=float).reshape(-1, 3),
        cheb_first=np.array(cheb_first, dtype=np.int64),
        kep_first=np.array(kep_first, dtype=np.int64),
        jd_tdb_min=float(jd_tdb_min),
        jd_tdb_max=float(jd_tdb_max),
    )


__all__ = ["SCRATCH_SIZE", "CompiledStates", "body_state_into", "compile_states"]
