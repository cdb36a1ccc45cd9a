"""The window grid: every departure x arrival date pair of a case, solved and scored."""

from __future__ import annotations

import itertools
import math
import os
from collections.abc import Callable
from dataclasses import dataclass, field
from typing import Any

import numpy as np
from numpy.typing import NDArray

from solver.errors import InputError
from solver.mechanics.families import family_from_x
from solver.mechanics.lambert import slot_layout, solve_lambert
from solver.reasons import Reason
from solver.time_units import SECONDS_PER_DAY
from solver.window.case import Case
from solver.window.case_bodies import CaseBodies, body_states, transfer_angle_deg
from solver.window.dates import (
    DateAxis,
    axis_count,
    date_axis,
    elapsed_days_between,
    end_note,
)
from solver.window.limits import within_limits
from solver.window.metrics import METRICS, arc_metrics, ranking_values
from solver.window.provenance import provenance, window_cache_key
from solver.window.ties import TIE_BREAK, ranks_before, tie_tolerance, tied_lowest

# 20 million cell-arcs are about 2.5 GB of arrays (BYTES_PER_CELL_ARC each); solving and writing
# them peaks well within a third of a 24 GiB machine's memory (docs/engine.md, "Budgets").
DEFAULT_MAX_CELL_ARCS = 20_000_000
ENV_MAX_CELL_ARCS = "ARCWINDOW_MAX_CELL_ARCS"
# Departure rows solved per chunk: small enough for smooth progress, large for vector speed.
_ROWS_PER_CHUNK_TARGET_ARCS = 250_000
_ARC_FLOAT_COLUMNS = tuple(m for m in METRICS if m != "tof_days")
BYTES_PER_CELL_ARC = 8 * len(_ARC_FLOAT_COLUMNS) + 3
"""Bytes one cell-arc holds in a solved grid: a float64 per metric (TOF is per cell) and the
family, reason and within flags (one byte each)."""


class Cancelled(Exception):
    """Raised by a progress callback to stop a grid computation."""


@dataclass(frozen=True)
class BestChoice:
    """The best arc of a grid and the rule that chose it (:meth:`WindowGrid.best_choice`).

    Attributes
    ----------
    index : (i_dep, j_arr, slot)
    metric : str
        The metric asked for.
    value : float
        Its lowest value (a magnitude for metrics ranked by magnitude).
    tied : int
        Qualifying arcs sharing that value (1 when the metric alone decided).
    separates : bool
        False when the metric is the same for every qualifying arc: it ranks nothing.
    decided_by : str or None
        The :data:`TIE_BREAK` metric that decided among the tied arcs; None when the metric
        decided, or when the tied arcs were equal in every tie-break too (earliest dates).
    qualifying : int
        Arcs that were ranked.
    """

    index: tuple[int, int, int]
    metric: str
    value: float
    tied: int
    separates: bool
    decided_by: str | None
    qualifying: int

    @property
    def note(self) -> str:
        """One sentence saying how the arc was chosen when the metric alone did not decide;
        empty when it did."""
        if self.tied == 1:
            return ""
        m = METRICS[self.metric]
        unit = f" {m.unit}" if m.unit else ""
        shown = f"|{m.label}|" if m.rank_by_magnitude else m.label
        if not self.separates:
            head = (
                f"{shown} is {self.value:.6g}{unit} for every one of the {self.qualifying:,} "
                "arcs ranked, so it does not rank them"
            )
        else:
            head = f"{self.tied:,} arcs share the lowest {shown}, {self.value:.6g}{unit}"
        if self.decided_by is None:
            return head + "; the earliest departure and arrival of them is taken."
        order = ", then ".join(METRICS[n].label for n in TIE_BREAK if n != self.metric)
        return (
            f"{head}; among them the lowest {METRICS[self.decided_by].label} is taken "
            f"(tie-break: {order}, then the earliest dates)."
        )


@dataclass
class WindowGrid:
    """A solved window: per-cell and per-arc arrays plus the axes and provenance.

    Shapes: ``n_dep`` departure dates, ``n_arr`` arrival dates, ``S = 2*max_revolutions + 1``
    arc slots (slot 0 single revolution; slots 2N-1, 2N the N-revolution low and high branch).

    Attributes
    ----------
    departure_jd_tdb : (n_dep,)   arrival_jd_tdb : (n_arr,)
    departure_r_km, departure_v_km_s : (n_dep, 3)  departure body about the central body, ICRF
    arrival_r_km, arrival_v_km_s : (n_arr, 3)      target body about the central body, ICRF
    tof_days, transfer_angle_deg : (n_dep, n_arr)
    revolutions, branch : (S,)
    arcs : dict of (n_dep, n_arr, S) float64 arrays, one per ``METRICS`` column but tof_days
    family, reason : (n_dep, n_arr, S) int8
    within : (n_dep, n_arr, S) bool, arcs within limits
    provenance : dict  ephemeris, constants, engine version, case hash, frame, caution
    """

    case: Case
    departure_jd_tdb: NDArray[np.float64]
    arrival_jd_tdb: NDArray[np.float64]
    departure_r_km: NDArray[np.float64]
    departure_v_km_s: NDArray[np.float64]
    arrival_r_km: NDArray[np.float64]
    arrival_v_km_s: NDArray[np.float64]
    tof_days: NDArray[np.float64]
    transfer_angle_deg: NDArray[np.float64]
    revolutions: NDArray[np.int64]
    branch: NDArray[np.int8]
    arcs: dict[str, NDArray[np.float64]]
    family: NDArray[np.int8]
    reason: NDArray[np.int8]
    within: NDArray[np.bool_]
    provenance: dict[str, Any] = field(default_factory=dict)
    from_cache: bool = False

    @property
    def shape(self) -> tuple[int, int, int]:
        return self.reason.shape

    @property
    def converged(self) -> NDArray[np.bool_]:
        return self.reason == Reason.OK

    @property
    def transfer_type(self) -> NDArray[np.int8]:
        """1 for Type I (transfer angle below 180 degrees), 2 for Type II."""
        return np.where(self.transfer_angle_deg < 180.0, 1, 2).astype(np.int8)

    def metric(self, name: str) -> NDArray[np.float64]:
        """(n_dep, n_arr, S) values of a metric (TOF broadcast over the arc slots)."""
        if name == "tof_days":
            return np.broadcast_to(self.tof_days[..., None], self.shape)
        if name not in self.arcs:
            raise InputError("metric", name, "one of " + ", ".join(METRICS))
        return self.arcs[name]

    def best_slot(self, metric: str = "c3_km2_s2") -> NDArray[np.int64]:
        """Per cell, the slot of the best arc by ``metric``: within limits first, -1 if none.

        Among a cell's arcs, the rule of :meth:`best_cell`: the lowest ``metric``, arcs it does
        not separate ranked by :data:`TIE_BREAK` (a TOF, the same for every arc of a cell, is
        decided by the total Δv), then the lowest slot."""
        any_within = self.within.any(axis=-1, keepdims=True)
        qualifies = np.where(any_within, self.within, self.converged)
        best = self._tie_broken(qualifies, metric, axis=-1)[-1][1]
        slot = np.argmax(best, axis=-1)
        return np.where(self.converged.any(axis=-1), slot, -1)

    def _tie_broken(
        self, qualifies: NDArray[np.bool_], metric: str, axis: int | None
    ) -> list[tuple[str, NDArray[np.bool_]]]:
        """The one tie rule, step by step: the arcs of ``qualifies`` with the lowest ``metric``,
        then narrowed by each :data:`TIE_BREAK` metric in turn (along ``axis``: -1 per cell,
        None over the whole grid). Each step is (the metric, the arcs still tied); the first
        arc left in date and slot order is the best."""
        shape = qualifies.shape

        def along(values: NDArray) -> NDArray:
            return values.reshape(-1) if axis is None else values

        def lowest(values: NDArray, among: NDArray[np.bool_]) -> NDArray[np.bool_]:
            # an arc without a value (NaN: no mass where none is given) never ranks first
            score = np.where(among & np.isfinite(values), values, np.inf)
            return tied_lowest(along(score), -1).reshape(shape)

        values = ranking_values(self.metric(metric), metric)
        tied = lowest(values, qualifies)
        steps = [(metric, tied)]
        for name in TIE_BREAK:
            if name == metric:
                continue
            narrowed = lowest(ranking_values(self.metric(name), name), tied)
            if axis is None:
                tied = narrowed if narrowed.any() else tied
            else:  # a cell whose arcs this metric cannot rank (all NaN) keeps its ties
                tied = np.where(narrowed.any(axis=axis, keepdims=True), narrowed, tied)
            steps.append((name, tied))
        return steps

    def best_values(self, metric: str = "c3_km2_s2", by: str | None = None) -> NDArray[np.float64]:
        """(n_dep, n_arr) values of ``metric`` on each cell's best arc ranked ``by`` a metric."""
        slot = self.best_slot(by or metric)
        values = np.take_along_axis(self.metric(metric), np.maximum(slot, 0)[..., None], -1)[..., 0]
        return np.where(slot >= 0, values, np.nan)

    def cell_within(self) -> NDArray[np.bool_]:
        """(n_dep, n_arr) cells with at least one arc within limits."""
        return np.asarray(self.within.any(axis=-1))

    def cell_reason(self) -> NDArray[np.int8]:
        """(n_dep, n_arr) reason a cell has no arc (OK where it has one)."""
        has = self.converged.any(axis=-1)
        return np.where(has, np.int8(Reason.OK), self.reason[..., 0]).astype(np.int8)

    def best_cell(
        self,
        metric: str = "c3_km2_s2",
        *,
        slots: list[int] | None = None,
        mask: NDArray[np.bool_] | None = None,
    ) -> tuple[int, int, int] | None:
        """``(i_dep, j_arr, slot)`` of the best arc of the whole grid, or None if none qualifies.

        The one rule for "the best arc": the lowest ``metric`` (by magnitude where the metric
        ranks so, as DLA) among the arcs within limits (or those of ``mask``), optionally among
        some arc ``slots`` only (one revolution count and branch). Arcs the metric does not
        separate (values within :func:`tie_tolerance` of the lowest; every arc, when the metric
        is the same everywhere) are ranked by :data:`TIE_BREAK`, then by the earliest departure
        and arrival. :meth:`best_choice` says which rule decided.
        """
        choice = self.best_choice(metric, slots=slots, mask=mask)
        return None if choice is None else choice.index

    def best_choice(
        self,
        metric: str = "c3_km2_s2",
        *,
        slots: list[int] | None = None,
        mask: NDArray[np.bool_] | None = None,
    ) -> BestChoice | None:
        """The best arc of :meth:`best_cell` and how it was chosen (None if none qualifies)."""
        qualifies = self.within if mask is None else mask
        if slots is not None:
            keep = np.zeros(qualifies.shape[-1], dtype=bool)
            keep[slots] = True
            qualifies = qualifies & keep
        score = np.where(qualifies, ranking_values(self.metric(metric), metric), np.inf)
        finite = np.isfinite(score)
        if not finite.any():
            return None
        low = float(score[finite].min())
        high = float(score[finite].max())
        steps = self._tie_broken(qualifies, metric, axis=None)
        tied = int(steps[0][1].sum())
        decided_by = None
        for (_, before), (name, after) in itertools.pairwise(steps):
            if int(after.sum()) < int(before.sum()):
                decided_by = name
                break
        first = int(np.flatnonzero(steps[-1][1].reshape(-1))[0])  # earliest dates first
        i, j, k = np.unravel_index(first, score.shape)
        return BestChoice(
            index=(int(i), int(j), int(k)),
            metric=metric,
            value=low,
            tied=tied,
            separates=high - low > tie_tolerance(low),
            decided_by=decided_by,
            qualifying=int(finite.sum()),
        )

    # -- cache round trip ----------------------------------------------------------------------
    def to_arrays(self) -> dict[str, NDArray]:
        arrays: dict[str, NDArray] = {
            "departure_jd_tdb": self.departure_jd_tdb,
            "arrival_jd_tdb": self.arrival_jd_tdb,
            "departure_r_km": self.departure_r_km,
            "departure_v_km_s": self.departure_v_km_s,
            "arrival_r_km": self.arrival_r_km,
            "arrival_v_km_s": self.arrival_v_km_s,
            "tof_days": self.tof_days,
            "transfer_angle_deg": self.transfer_angle_deg,
            "revolutions": self.revolutions,
            "branch": self.branch,
            "family": self.family,
            "reason": self.reason,
            "within": self.within,
        }
        arrays.update({f"arc.{k}": v for k, v in self.arcs.items()})
        return arrays

    @classmethod
    def from_arrays(cls, case: Case, arrays: dict[str, NDArray], provenance: dict) -> WindowGrid:
        arcs = {k[4:]: v for k, v in arrays.items() if k.startswith("arc.")}
        plain = {k: v for k, v in arrays.items() if not k.startswith("arc.")}
        return cls(case=case, arcs=arcs, provenance=dict(provenance), from_cache=True, **plain)


def grid_dates(case: Case) -> tuple[DateAxis, DateAxis]:
    """Departure and arrival dates of the case's grid (the rule: :mod:`solver.window.dates`)."""
    return (
        date_axis(
            case.departure_start,
            case.departure_end,
            case.departure_step_days,
            "window.departure",
        ),
        date_axis(case.arrival_start, case.arrival_end, case.arrival_step_days, "window.arrival"),
    )


def window_notes(case: Case) -> list[str]:
    """Sentences for windows whose end date is not a date of the grid (the step does not
    divide them), so an analyst is told which last date was used."""
    notes = [
        end_note(case.departure_start, case.departure_end, case.departure_step_days, "departure"),
        end_note(case.arrival_start, case.arrival_end, case.arrival_step_days, "arrival"),
    ]
    return [note for note in notes if note]


def grid_axes(case: Case) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
    """Departure and arrival epochs (JD TDB): start, start + step, ... up to the end date,
    counted in UTC (see :mod:`solver.window.dates`)."""
    departures, arrivals = grid_dates(case)
    return departures.jd_tdb, arrivals.jd_tdb


def max_cell_arcs(value: int | None = None) -> int:
    """The cell-arc cap: argument, else ``ARCWINDOW_MAX_CELL_ARCS``, else the default."""
    if value is not None:
        if isinstance(value, bool) or int(value) != value or value < 1:
            raise InputError("max_cells", value, "a whole number of cell-arcs >= 1")
        return int(value)
    env = os.environ.get(ENV_MAX_CELL_ARCS)
    if env:
        try:
            cap = float(env)
        except ValueError:
            cap = math.nan
        if not (math.isfinite(cap) and cap >= 1):
            raise InputError(ENV_MAX_CELL_ARCS, env, "a whole number of cell-arcs >= 1")
        return int(cap)
    return DEFAULT_MAX_CELL_ARCS


def estimated_grid_bytes(n_dep: int, n_arr: int, slots: int) -> int:
    """Bytes a solved grid of this shape holds (its arrays), from the shape alone.

    Per cell-arc: one float64 per metric but TOF, plus the family, reason and within flags
    (:data:`BYTES_PER_CELL_ARC`); per cell: TOF and transfer angle; per date: its epoch and the
    body's state. Solving adds at most one chunk of departure rows of temporaries
    (``_ROWS_PER_CHUNK_TARGET_ARCS`` cell-arcs, tens of MB).
    """
    cells = n_dep * n_arr
    return cells * slots * BYTES_PER_CELL_ARC + cells * 16 + (n_dep + n_arr) * 56


def check_grid_size(case: Case, cap: int | None = None) -> tuple[int, int, int]:
    """(n_dep, n_arr, slots) of the case's grid; InputError if it exceeds the cap.

    The counts come from the windows and steps by arithmetic (``axis_count``): no axis is built,
    so a refused window costs nothing however large it is.
    """
    n_dep = axis_count(
        case.departure_start, case.departure_end, case.departure_step_days, "window.departure"
    )
    n_arr = axis_count(
        case.arrival_start, case.arrival_end, case.arrival_step_days, "window.arrival"
    )
    slots = 2 * case.max_revolutions + 1
    total = n_dep * n_arr * slots
    limit = max_cell_arcs(cap)
    if total > limit:
        raise InputError(
            "window",
            f"{n_dep} departure x {n_arr} arrival dates x {slots} arcs = {total:,} "
            f"(about {_gigabytes(estimated_grid_bytes(n_dep, n_arr, slots))})",
            f"at most {limit:,} cell-arcs (about {_gigabytes(limit * (BYTES_PER_CELL_ARC + 16))}; "
            "raise the step days, narrow the dates, lower max_revolutions, or set "
            f"{ENV_MAX_CELL_ARCS})",
        )
    return n_dep, n_arr, slots


def _gigabytes(nbytes: float) -> str:
    return f"{nbytes / 1e9:.3g} GB" if nbytes >= 1e8 else f"{nbytes / 1e6:.3g} MB"


def compute_window(
    case: Case,
    *,
    cache: Any = None,
    progress: Callable[[int, int], None] | None = None,
    max_cells: int | None = None,
) -> WindowGrid:
    """Solve and score every cell of a case's window.

    Parameters
    ----------
    case : Case
        The validated case.
    cache : solver.files.cache.GridCache, optional
        Look the grid up here first; store it after computing.
    progress : callable(done_rows, total_rows), optional
        Called after each chunk of departure dates; raise :class:`Cancelled` in it to stop.
    max_cells : int, optional
        Cell-arc cap (see :func:`max_cell_arcs`).

    Returns
    -------
    WindowGrid

    Raises
    ------
    InputError
        Grid over the cap; dates outside the ephemeris (caught when the case is parsed).
    """
    n_dep, n_arr, slots = check_grid_size(case, max_cells)
    key = None
    if cache is not None:
        key = window_cache_key(case)
        hit = cache.get(key)
        if hit is not None:
            if progress is not None:
                progress(n_dep, n_dep)
            return WindowGrid.from_arrays(case, hit.arrays, hit.metadata)

    bodies = CaseBodies.of(case)
    departures, arrivals = grid_dates(case)
    dep_jd, arr_jd = departures.jd_tdb, arrivals.jd_tdb
    r_dep, v_dep = body_states(case, bodies, bodies.departure, dep_jd, "window.departure dates")
    r_arr, v_arr = body_states(case, bodies, bodies.target, arr_jd, "window.arrival dates")

    # Reported and limited: elapsed time between the UTC instants. Solved: the TDB interval
    # between the epochs of the positions (they differ by milliseconds; solver.window.dates).
    tof_days = elapsed_days_between(departures, arrivals)
    flight_s = (arr_jd[None, :] - dep_jd[:, None]) * SECONDS_PER_DAY
    angle = transfer_angle_deg(
        r_dep[:, None, :], r_arr[None, :, :], bodies.pole_icrf, case.retrograde
    )
    revolutions, branch = slot_layout(case.max_revolutions)
    arcs = {name: np.empty((n_dep, n_arr, slots)) for name in _ARC_FLOAT_COLUMNS}
    family = np.empty((n_dep, n_arr, slots), dtype=np.int8)
    reason = np.empty((n_dep, n_arr, slots), dtype=np.int8)
    within = np.empty((n_dep, n_arr, slots), dtype=bool)

    rows = max(1, _ROWS_PER_CHUNK_TARGET_ARCS // max(1, n_arr * slots))
    for start in range(0, n_dep, rows):
        sl = slice(start, min(n_dep, start + rows))
        tof_s = flight_s[sl]
        sol = solve_lambert(
            r_dep[sl, None, :],
            r_arr[None, :, :],
            tof_s,
            bodies.mu_central_km3_s2,
            max_revs=case.max_revolutions,
            retrograde=case.retrograde,
            pole=bodies.pole_icrf,
        )
        metrics = arc_metrics(
            case,
            bodies,
            r_dep[sl, None, None, :],
            sol.v1_km_s,
            sol.v2_km_s,
            v_dep[sl, None, None, :],
            v_arr[None, :, None, :],
        )
        for name, values in metrics.items():
            arcs[name][sl] = values
        chunk_reason = np.where(
            (tof_s <= 0)[..., None] & (sol.reason == Reason.NONPOSITIVE_TOF),
            np.int8(Reason.ARRIVAL_NOT_AFTER_DEPARTURE),
            sol.reason,
        )
        reason[sl] = chunk_reason
        family[sl] = family_from_x(sol.x, (angle[sl] > 180.0)[..., None])
        within[sl] = within_limits(
            case, bodies, metrics, tof_days[sl][..., None], chunk_reason == Reason.OK
        )
        if progress is not None:
            progress(sl.stop, n_dep)

    grid = WindowGrid(
        case=case,
        departure_jd_tdb=dep_jd,
        arrival_jd_tdb=arr_jd,
        departure_r_km=r_dep,
        departure_v_km_s=v_dep,
        arrival_r_km=r_arr,
        arrival_v_km_s=v_arr,
        tof_days=tof_days,
        transfer_angle_deg=angle,
        revolutions=revolutions,
        branch=branch,
        arcs=arcs,
        family=family,
        reason=reason,
        within=within,
        provenance=provenance(case),
    )
    if cache is not None and key is not None:
        try:
            cache.put(key, grid.to_arrays(), grid.provenance)
        except OSError:
            pass  # a full or read-only cache folder must not cost the user the grid
    return grid


# ---------------------------------------------------------------------------------------------


__all__ = [
    "BYTES_PER_CELL_ARC",
    "DEFAULT_MAX_CELL_ARCS",
    "ENV_MAX_CELL_ARCS",
    "TIE_BREAK",
    "BestChoice",
    "Cancelled",
    "WindowGrid",
    "check_grid_size",
    "compute_window",
    "estimated_grid_bytes",
    "grid_axes",
    "grid_dates",
    "max_cell_arcs",
    "ranks_before",
    "tie_tolerance",
    "tied_lowest",
    "window_notes",
]
