"""Leg maps: one leg's start x end dates with every other encounter date held.

A leg map re-times one leg of a candidate: its start date (the encounter it leaves) runs along
one axis, its end date (the encounter it reaches) along the other, and every other encounter
keeps the candidate's date. Each cell is a whole candidate, evaluated by the sequence engine's
batched evaluation (:meth:`~solver.sequence.evaluate.SequenceModel.arcs` on the fast path, then
:meth:`~solver.sequence.evaluate.SequenceModel.costs`), so its numbers are the whole sequence's:
total Δv, launch energy, arrival v∞, the worst flyby altitude margin, whether it is within
limits.

Only three legs change across a map: the leg itself (every start x end pair), the leg before it
(every start date) and the leg after it (every end date); the others are the candidate's. The
arcs are solved for exactly those (a one-leg model for the pairs, one row per date for the
neighbours, one row for the rest), so a 300 x 300 map solves 90,000 Lambert arcs, not four
times as many. The neighbours' and the held legs' arcs stay shared (:attr:`LegArcs.rows`): the
costs compute their metrics, and every encounter between two of them, once per date, and only
the encounters at the leg's own two dates per cell.
"""

from __future__ import annotations

import dataclasses
import math
import threading
import weakref
from dataclasses import dataclass
from typing import Any

import numpy as np
from numpy.typing import NDArray

from solver.errors import InputError
from solver.reasons import Reason
from solver.sequence.evaluate import BatchArcs, LegArcs, SequenceModel

MAX_AXIS_POINTS = 401
"""Dates per axis of a leg map at most (a 401 x 401 map is 160,801 candidates)."""

LEG_MAP_METRICS: dict[str, tuple[str, str]] = {
    "dv_total_km_s": ("total Δv", "km/s"),
    "c3_km2_s2": ("C3", "km²/s²"),
    "vinf_arrival_km_s": ("arrival v∞", "km/s"),
    "duration_days": ("duration", "days"),
    "flyby_margin_km": ("worst flyby altitude margin", "km"),
    "flyby_dv_max_km_s": ("largest flyby Δv", "km/s"),
    "leg_tof_days": ("leg TOF", "days"),
}
"""What a leg map can be coloured by: (label, unit) of each quantity, all of the whole sequence
on the arcs the evaluation chooses (within limits first, then the objective), but the leg's TOF.
The flyby altitude margin is the smallest of (periapsis altitude - its minimum) over the flybys,
negative below a minimum."""


@dataclass(frozen=True)
class LegMap:
    """A leg map's cells.

    Attributes
    ----------
    leg : int
        The leg re-timed (0-based).
    start_epoch, end_epoch : int
        Columns of the leg's two dates in the candidate's epoch vector.
    epochs_jd_tdb : (E,) float
        The candidate's dates (the held ones are these).
    start_jd_tdb : (nx,) float
    end_jd_tdb : (ny,) float
        The axes, JD TDB.
    values : dict of (ny, nx) float
        Every quantity of :data:`LEG_MAP_METRICS` (NaN where a cell has no arc on some leg).
    within : (ny, nx) bool
        Cells within every limit.
    reason : (ny, nx) int8
        ``Reason.OK``, or why some leg of the cell has no arc.
    """

    leg: int
    start_epoch: int
    end_epoch: int
    epochs_jd_tdb: NDArray[np.float64]
    start_jd_tdb: NDArray[np.float64]
    end_jd_tdb: NDArray[np.float64]
    values: dict[str, NDArray[np.float64]]
    within: NDArray[np.bool_]
    reason: NDArray[np.int8]

    @property
    def shape(self) -> tuple[int, int]:
        return (len(self.end_jd_tdb), len(self.start_jd_tdb))

    def epochs_at(self, i: int, j: int) -> NDArray[np.float64]:
        """The encounter dates of cell (start ``i``, end ``j``)."""
        epochs = np.array(self.epochs_jd_tdb, dtype=float)
        epochs[self.start_epoch] = self.start_jd_tdb[i]
        epochs[self.end_epoch] = self.end_jd_tdb[j]
        return epochs


def leg_axes(
    epochs_jd_tdb: Any, start_epoch: int, end_epoch: int, half_days: float, step_days: float
) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
    """A leg map's two axes: the candidate's start and end dates, each plus and minus
    ``half_days`` in steps of ``step_days`` (the candidate's own dates are nodes).

    Raises InputError when an axis would hold more than :data:`MAX_AXIS_POINTS` dates.
    """
    if not (math.isfinite(half_days) and half_days > 0):
        raise InputError("leg map span", half_days, "a number of days > 0")
    if not (math.isfinite(step_days) and step_days > 0):
        raise InputError("leg map step", step_days, "a number of days > 0")
    n_half = math.floor(half_days / step_days + 1e-9)
    if 2 * n_half + 1 > MAX_AXIS_POINTS:
        raise InputError(
            "leg map step",
            step_days,
            f"a step of at least {2 * half_days / (MAX_AXIS_POINTS - 1):.3g} days for a span of "
            f"±{half_days:g} days (at most {MAX_AXIS_POINTS} dates per axis)",
        )
    offsets = step_days * np.arange(-n_half, n_half + 1, dtype=float)
    epochs = np.asarray(epochs_jd_tdb, dtype=float)
    return epochs[start_epoch] + offsets, epochs[end_epoch] + offsets


def _shared(leg: LegArcs, rows: NDArray[np.int64]) -> LegArcs:
    """One leg's arcs shared by the map's cells: cell ``n`` flies row ``rows[n]``."""
    return dataclasses.replace(leg, rows=rows)


REACH_MARGIN_DAYS = 400.0
"""A one-leg model's compiled ephemeris reaches this far beyond the sequence's own dates, so
maps around any candidate (whose spans are at most a few hundred days) share it."""

_ONE_LEG_MODELS: weakref.WeakKeyDictionary[SequenceModel, dict[int, SequenceModel]] = (
    weakref.WeakKeyDictionary()
)
_LOCK = threading.Lock()


def _one_leg_model(model: SequenceModel, k: int, start: NDArray, end: NDArray) -> SequenceModel:
    """A model of leg ``k`` alone whose compiled ephemeris covers the map's dates: made once
    per model and leg, over the whole sequence's reach (plus a margin)."""
    spec, case = model.spec, model.case
    with _LOCK:
        own = _ONE_LEG_MODELS.setdefault(model, {})
        alone_model = own.get(k)
    first = float(start.min())
    last = float(end.max())
    if alone_model is not None:
        window = alone_model.case
        reach = window.departure_end_jd_tdb + alone_model.spec.legs[0].tof_max_days
        if window.departure_start_jd_tdb <= first and last <= reach:
            return alone_model
    leg = spec.legs[k]
    lowest = min(case.departure_start_jd_tdb, first) - REACH_MARGIN_DAYS
    highest = case.departure_end_jd_tdb + sum(
        leg.tof_max_days + (leg.stay_max_days or 0.0) for leg in spec.legs
    )
    highest = max(highest, last) + REACH_MARGIN_DAYS
    alone = dataclasses.replace(
        leg, kind="arrival", tof_max_days=max(highest - lowest, leg.tof_min_days)
    )
    cut = dataclasses.replace(spec, departure_body=leg.from_body, legs=(alone,), events=())
    window = dataclasses.replace(
        case, departure_start_jd_tdb=lowest, departure_end_jd_tdb=lowest + 1.0
    )
    alone_model = SequenceModel(window, cut)
    with _LOCK:
        _ONE_LEG_MODELS.setdefault(model, {})[k] = alone_model
    return alone_model


def _batch(
    model: SequenceModel,
    epochs: NDArray[np.float64],
    angles: NDArray[np.float64] | None,
    k: int,
    start: NDArray[np.float64],
    end: NDArray[np.float64],
) -> BatchArcs:
    """Stage 1 of every cell, solving only what changes across the map."""
    spec = model.spec
    a, b = spec.leg_epochs(k)
    nx, ny = len(start), len(end)
    n = nx * ny
    resonant = spec.resonant_legs

    def rows_with(column: int, dates: NDArray) -> tuple[NDArray, NDArray | None]:
        e = np.repeat(epochs[None, :], len(dates), axis=0)
        e[:, column] = dates
        ang = None if angles is None else np.repeat(angles[None], len(dates), axis=0)
        return e, ang

    held = model.arcs(epochs[None, :], None if angles is None else angles[None], fast=True)
    by_start = model.arcs(*rows_with(a, start), fast=True)
    by_end = model.arcs(*rows_with(b, end), fast=True)
    i = np.tile(np.arange(nx), ny)  # row = j * nx + i
    j = np.repeat(np.arange(ny), nx)
    zero = np.zeros(n, dtype=np.int64)

    pairs = np.repeat(epochs[None, :], n, axis=0)
    pairs[:, a] = start[i]
    pairs[:, b] = end[j]
    alone = _one_leg_model(model, k, start, end)
    leg_angles = None
    if k in resonant and angles is not None:
        leg_angles = np.repeat(angles[None, [resonant.index(k)]], n, axis=0)
    leg_k = alone.arcs(pairs[:, [a, b]], leg_angles, fast=True).legs[0]

    legs = []
    for m in range(len(spec.legs)):
        if m == k:
            legs.append(leg_k)
            continue
        ends = spec.leg_epochs(m)
        if a in ends:
            legs.append(_shared(by_start.legs[m], i))
        elif b in ends:
            legs.append(_shared(by_end.legs[m], j))
        else:
            legs.append(_shared(held.legs[m], zero))
    body_r = np.repeat(held.body_r_km, n, axis=0)
    body_v = np.repeat(held.body_v_km_s, n, axis=0)
    body_r[:, a] = by_start.body_r_km[i, a]
    body_v[:, a] = by_start.body_v_km_s[i, a]
    body_r[:, b] = by_end.body_r_km[j, b]
    body_v[:, b] = by_end.body_v_km_s[j, b]
    return BatchArcs(pairs, body_r, body_v, legs)


def _on_path(
    array: NDArray, slots: NDArray, *axes: int, rows: NDArray[np.int64] | None = None
) -> NDArray[np.float64]:
    """Values of a per-slot array (M, S...) on each cell's chosen slots; ``rows`` maps cells to
    the array's rows where they share them (None: one row per cell)."""
    if rows is None:
        rows = np.arange(slots.shape[0])
    index = tuple(np.maximum(slots[:, axis], 0) for axis in axes)
    return np.asarray(array[(rows, *index)], dtype=float)


def leg_map(
    model: SequenceModel,
    epochs_jd_tdb: Any,
    leg: int,
    start_jd_tdb: Any,
    end_jd_tdb: Any,
    *,
    angles_deg: Any = None,
) -> LegMap:
    """Every cell of one leg's map, evaluated in one batch.

    Parameters
    ----------
    model : SequenceModel
        The candidate's sequence.
    epochs_jd_tdb : array_like, shape (E,)
        The candidate's encounter dates (the held ones).
    leg : int
        The leg re-timed, 0-based.
    start_jd_tdb, end_jd_tdb : array_like, shapes (nx,), (ny,)
        The dates of the leg's start and end (:func:`leg_axes` makes them around the
        candidate's).
    angles_deg : array_like, shape (R, 2), optional
        Each resonant leg's (pitch, clock), deg, held across the map (required when the
        sequence has resonant legs).
    """
    spec = model.spec
    if not 0 <= leg < len(spec.legs):
        raise InputError("leg", leg + 1, f"a leg from 1 to {len(spec.legs)}")
    epochs = np.asarray(epochs_jd_tdb, dtype=float).reshape(-1)
    if len(epochs) != spec.n_epochs:
        raise InputError("dates", len(epochs), f"{spec.n_epochs} encounter dates")
    start = np.asarray(start_jd_tdb, dtype=float).reshape(-1)
    end = np.asarray(end_jd_tdb, dtype=float).reshape(-1)
    if max(len(start), len(end)) > MAX_AXIS_POINTS:
        raise InputError("leg map", f"{len(start)} x {len(end)}", f"at most {MAX_AXIS_POINTS}")
    angles = None
    if spec.resonant_legs:
        if angles_deg is None:
            raise InputError("angles", "none", "each resonant leg's pitch and clock angles")
        angles = np.asarray(angles_deg, dtype=float).reshape(len(spec.resonant_legs), 2)
    a, b = spec.leg_epochs(leg)
    batch = _batch(model, epochs, angles, leg, start, end)
    costs = model.costs(batch, detail=True, every_leg=False)
    slots = costs.slots
    values = costs.values
    shape = (len(end), len(start))

    last = len(spec.legs) - 1
    first_rows, last_rows = values["leg_rows"][0], values["leg_rows"][last]
    dv = _on_path(values["legs"][0]["dv_departure_km_s"], slots, 0, rows=first_rows)
    dv = dv + _on_path(values["legs"][last]["dv_arrival_km_s"], slots, last, rows=last_rows)
    margin = np.full(len(dv), np.inf)
    flyby_dv = np.full(len(dv), -np.inf)
    for event in spec.events[1:-1]:
        ev = values[f"event{event.index}"]
        rows = ev["rows"]
        if event.kind == "flyby":
            burn = _on_path(ev["dv_km_s"], slots, event.leg_in, event.leg_out, rows=rows)
            altitude = _on_path(
                ev["periapsis_altitude_km"], slots, event.leg_in, event.leg_out, rows=rows
            )
            lowest = spec.legs[event.leg_in].altitude_min_km or 0.0
            dv = dv + burn
            margin = np.fmin(margin, altitude - lowest)
            flyby_dv = np.fmax(flyby_dv, burn)
        else:
            dv = dv + _on_path(ev["dv_in_km_s"], slots, event.leg_in, rows=rows)
            dv = dv + _on_path(ev["dv_out_km_s"], slots, event.leg_out, rows=rows)
    has_arc = (costs.reason == Reason.OK) & np.isfinite(costs.objective)
    no_flyby = np.isinf(margin)
    out: dict[str, NDArray[np.float64]] = {
        "dv_total_km_s": dv,
        "c3_km2_s2": _on_path(values["legs"][0]["c3_km2_s2"], slots, 0, rows=first_rows),
        "vinf_arrival_km_s": _on_path(
            values["legs"][last]["vinf_arrival_km_s"], slots, last, rows=last_rows
        ),
        "duration_days": np.asarray(values["duration_days"], dtype=float),
        "flyby_margin_km": np.where(no_flyby, np.nan, margin),
        "flyby_dv_max_km_s": np.where(no_flyby, np.nan, flyby_dv),
        "leg_tof_days": np.asarray(batch.legs[leg].tof_days, dtype=float),
    }
    for name, array in out.items():
        if name != "leg_tof_days":
            array = np.where(has_arc, array, np.nan)
        out[name] = np.asarray(array, dtype=float).reshape(shape)
    return LegMap(
        leg=leg,
        start_epoch=a,
        end_epoch=b,
        epochs_jd_tdb=epochs,
        start_jd_tdb=start,
        end_jd_tdb=end,
        values=out,
        within=np.asarray(costs.within, dtype=bool).reshape(shape),
        reason=np.asarray(costs.reason, dtype=np.int8).reshape(shape),
    )


__all__ = ["LEG_MAP_METRICS", "MAX_AXIS_POINTS", "LegMap", "leg_axes", "leg_map"]
