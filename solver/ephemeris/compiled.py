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

A body whose terms are all Chebyshev (a planet about the Sun: its barycentric segment less the
Sun's; the Earth: the Earth-Moon barycentre, a share of the Moon, less the Sun) is then merged
into **one** Chebyshev term: on each interval of the finest of its segments every term is a
polynomial of degree below the largest coefficient count N, so their sum is one such polynomial,
found exactly by interpolation at N Chebyshev nodes (a discrete cosine transform, in extended
precision so that each merged coefficient is the exact one rounded once). One term instead of
three halves the memory a state reads, which is what a state costs in a search (its dates are
scattered over the span, so every set read is a cache miss).

The assembly follows :func:`~solver.ephemeris.states.states` body chain by body chain, so the two
agree to rounding (tests/test_sequence_model.py: within 1e-6 km and 1e-12 km/s; measured 6e-7
km and 1.4e-13 km/s with the merged terms). The mean-element source has no compiled form:
:func:`compile_states` returns None and callers use :func:`~solver.ephemeris.states.states`.
Epochs outside the cut span give NaN.
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


SCRATCH_SIZE = 6  # a Kepler term's state, before its factor


@numba.njit(cache=True, error_model="numpy", inline="always")
def _chebyshev_into(coefficients, offset, n_sets, n_coef, jd0, days, factor, jd, acc):
    """Add ``factor`` times one DE segment's position and velocity at ``jd`` to acc[0:6]."""
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
    scale = factor * 2.0 / days / SECONDS_PER_DAY
    base = offset + index * 3 * n_coef
    y = base + n_coef
    z = base + 2 * n_coef
    # T_0 = 1, T_1 = t, T_n = 2t T_(n-1) - T_(n-2); dT_0 = 0, dT_1 = 1,
    # dT_n = 2t dT_(n-1) - dT_(n-2) + 2 T_(n-1): the recurrences jplephem uses, carried in
    # registers beside the sums (an array of the T_n would make each step wait on a store and
    # a load). The three axes' sums run side by side: six independent chains of additions, each
    # in the order of n, so the same bits as one axis after the other.
    cx = coefficients[base]
    cy = coefficients[y]
    cz = coefficients[z]
    px = 0.0 + cx * 1.0
    py = 0.0 + cy * 1.0
    pz = 0.0 + cz * 1.0
    rx = 0.0 + cx * 0.0
    ry = 0.0 + cy * 0.0
    rz = 0.0 + cz * 0.0
    t_prev, t_n = 1.0, t1
    d_prev, d_n = 0.0, 1.0
    for n in range(1, n_coef):
        cx = coefficients[base + n]
        cy = coefficients[y + n]
        cz = coefficients[z + n]
        px += cx * t_n
        py += cy * t_n
        pz += cz * t_n
        rx += cx * d_n
        ry += cy * d_n
        rz += cz * d_n
        t_prev, t_n = t_n, twot1 * t_n - t_prev
        d_prev, d_n = d_n, twot1 * d_n - d_prev + t_prev + t_prev
    acc[0] += factor * px
    acc[1] += factor * py
    acc[2] += factor * pz
    acc[3] += scale * rx
    acc[4] += scale * ry
    acc[5] += scale * rz


@numba.njit(cache=True, error_model="numpy", inline="always")
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
    thread, not per state). Inlined into its callers (numba's ``inline="always"``): a call of a
    compiled function takes a reference to each array argument and gives it back, two atomic
    operations per array (nine arrays here) on counters the threads share.
    """
    for j in range(6):
        acc[j] = 0.0
    buf = scratch
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


def _merge_chebyshev(
    coefficients: NDArray[np.float64],
    terms: list[tuple[int, int, int, float, float, float]],
) -> tuple[NDArray[np.float64], float, float] | None:
    """One Chebyshev term equal to the sum of ``terms`` (offset, sets, coefficients per axis,
    first JD, days per set, factor) on their common span, as (block of shape (sets, 3, N), first
    JD, days per set); None when the terms' intervals do not nest on one finest grid.

    On each finest interval every term is a polynomial of degree < N (the largest coefficient
    count), so the sum is one: its N coefficients follow exactly from its values at N Chebyshev
    nodes (the discrete cosine transform). Values and transform in extended precision.
    """
    fine = min(t[4] for t in terms)
    start = max(t[3] for t in terms)
    end = min(t[3] + t[1] * t[4] for t in terms)
    n_fine = round((end - start) / fine)
    n = max(t[2] for t in terms)
    if n_fine < 1:
        return None
    for _offset, _n_sets, _n_coef, jd0, days, _factor in terms:
        ratio = days / fine
        shift = (start - jd0) / fine
        if abs(ratio - round(ratio)) > 1e-9 or abs(shift - round(shift)) > 1e-9:
            return None
    wide = np.longdouble
    pi = np.arccos(wide(-1.0))  # π to extended precision (np.pi is a double)
    theta = pi * (np.arange(n, dtype=wide) + 0.5) / n
    nodes = np.cos(theta)  # in the finest interval's own variable, [-1, 1]
    values = np.zeros((n_fine, 3, n), dtype=wide)
    j = np.arange(n_fine)
    for offset, n_sets, n_coef, jd0, days, factor in terms:
        ratio = round(days / fine)
        index = round((start - jd0) / fine) + j  # finest intervals from the term's first set
        which, part = index // ratio, index % ratio
        block = coefficients[offset : offset + n_sets * 3 * n_coef].reshape(n_sets, 3, n_coef)
        # The nodes in the term's own variable, and its Chebyshev polynomials there.
        t = -1.0 + (2.0 * np.arange(ratio, dtype=wide)[:, None] + nodes[None, :] + 1.0) / ratio
        cheb = np.empty((ratio, n, n_coef), dtype=wide)
        cheb[..., 0] = 1.0
        if n_coef > 1:
            cheb[..., 1] = t
        for k in range(2, n_coef):
            cheb[..., k] = 2.0 * t * cheb[..., k - 1] - cheb[..., k - 2]
        values += wide(factor) * np.einsum(
            "jak,jmk->jam", block[which].astype(wide), cheb[part], optimize=False
        )
    transform = np.cos(np.arange(n, dtype=wide)[None, :] * theta[:, None]) * (wide(2.0) / n)
    transform[:, 0] *= 0.5
    merged = np.einsum("jam,mk->jak", values, transform, optimize=False)
    return np.ascontiguousarray(merged, dtype=np.float64), float(start), float(fine)


def _merged(
    coefficients: NDArray[np.float64],
    cheb_int: list[tuple[int, int, int]],
    cheb_real: list[tuple[float, float, float]],
    cheb_first: list[int],
    kep_first: list[int],
) -> tuple[
    NDArray[np.float64], list[tuple[int, int, int]], list[tuple[float, float, float]], list[int]
]:
    """The tables with each all-Chebyshev body of several terms merged into one term."""
    blocks = [coefficients]
    offset = coefficients.size
    new_int: list[tuple[int, int, int]] = []
    new_real: list[tuple[float, float, float]] = []
    new_first = [0]
    for k in range(len(cheb_first) - 1):
        terms = range(cheb_first[k], cheb_first[k + 1])
        merged = None
        if len(terms) > 1 and kep_first[k + 1] == kep_first[k]:
            merged = _merge_chebyshev(coefficients, [(*cheb_int[t], *cheb_real[t]) for t in terms])
        if merged is None:
            new_int.extend(cheb_int[t] for t in terms)
            new_real.extend(cheb_real[t] for t in terms)
        else:
            block, jd0, days = merged
            blocks.append(block.reshape(-1))
            new_int.append((offset, block.shape[0], block.shape[2]))
            new_real.append((jd0, days, 1.0))
            offset += block.size
        new_first.append(len(new_int))
    return np.concatenate(blocks), new_int, new_real, new_first


def compile_states(
    bodies: Sequence[str],
    central: str,
    registry: BodyRegistry,
    jd_tdb_min: float,
    jd_tdb_max: float,
    *,
    source: str | None = None,
    merge: bool = True,
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
    merge : bool
        Merge each body's Chebyshev terms into one (see the module docstring); False keeps
        DE423's own sets, term by term.

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
    cheb_int, cheb_real = builder.cheb_int, builder.cheb_real
    if merge:
        coefficients, cheb_int, cheb_real, cheb_first = _merged(
            coefficients, cheb_int, cheb_real, cheb_first, kep_first
        )
    return CompiledStates(
        names=names,
        central=center.name,
        coefficients=coefficients,
        cheb_int=np.array(cheb_int, dtype=np.int64).reshape(-1, 3),
        cheb_real=np.array(cheb_real, dtype=float).reshape(-1, 3),
        kep_state=np.array(builder.kep_state, dtype=float).reshape(-1, 6),
        kep_real=np.array(builder.kep_real, dtype=float).reshape(-1, 3),
        cheb_first=np.array(cheb_first, dtype=np.int64),
        kep_first=np.array(kep_first, dtype=np.int64),
        jd_tdb_min=float(jd_tdb_min),
        jd_tdb_max=float(jd_tdb_max),
    )


__all__ = ["SCRATCH_SIZE", "CompiledStates", "body_state_into", "compile_states"]
