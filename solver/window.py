"""The window engine: every departure x arrival date pair of a case, solved and scored.

For each cell (a departure date and an arrival date) and each arc of the cell (the
single-revolution arc and the low- and high-branch arcs of N = 1..max_revolutions) the engine
gives the numbers that decide a mission:

* time of flight, transfer angle, Type I/II, family;
* departure v∞, C3 = v∞², DLA and RLA (declination and right ascension of the departure
  asymptote in ICRF/EME2000), departure Δv from a circular parking orbit;
* arrival v∞, its declination and right ascension (ICRF), arrival Δv into the capture orbit
  (zero for a flyby, |v∞| for a rendezvous), speed at the entry interface;
* total Δv; the arc's periapsis and apoapsis about the central body, a and e;
* whether the arc is within the case's limits, and a reason code for every arc that is missing.

All vectors are in ICRF, the frame of the ephemeris; "prograde" turns about the ecliptic pole for
a Sun-centred case and about the central planet's north pole otherwise.

Conventions (common practice in preliminary design):

* v∞ vectors are the arc velocity minus the body's velocity, both about the central body (the
  patched-conic approximation; the body's own sphere of influence is a point).
* Departure Δv from a circular parking orbit of radius r_p: sqrt(v∞² + 2μ/r_p) - sqrt(μ/r_p)
  (a tangential burn at periapsis of the departure hyperbola). Without a parking orbit the launch
  vehicle is taken to deliver the C3 and the departure Δv is 0; leaving a body with no mass (an
  element body without GM) costs |v∞|.
* Arrival Δv into an orbit of periapsis r_p and apoapsis r_a: sqrt(v∞² + 2μ/r_p) -
  sqrt(2μ r_a / (r_p (r_p + r_a))); flyby 0; rendezvous |v∞|.
* Entry speed at radius R + h: sqrt(v∞² + 2μ/(R + h)).
"""

from __future__ import annotations

import datetime as _dt
import math
import os
from collections.abc import Callable
from dataclasses import dataclass, field
from typing import Any

import numpy as np
from numpy.typing import NDArray

from solver import ENGINE_VERSION
from solver.bodies import Body
from solver.case import Case
from solver.constants import OBLIQUITY_J2000_RAD, SECONDS_PER_DAY
from solver.ephemeris import states
from solver.errors import InputError
from solver.families import family_from_x
from solver.lambert import BRANCH_NAMES, slot_layout, solve_lambert
from solver.reasons import Reason

CAUTION = (
    "Two-body, patched-conic preliminary design: confirm with high-fidelity tools and the "
    "responsible mission authority before committing hardware or launch plans."
)

# One cell-arc holds about 16 float64 results plus temporaries of the solve (~400 bytes in all);
# 20 million cell-arcs stay within about a third of this 24 GiB machine's memory.
DEFAULT_MAX_CELL_ARCS = 20_000_000
ENV_MAX_CELL_ARCS = "ARCWINDOW_MAX_CELL_ARCS"
# Departure rows solved per chunk: small enough for smooth progress, large for vector speed.
_ROWS_PER_CHUNK_TARGET_ARCS = 250_000


@dataclass(frozen=True)
class Metric:
    """A per-arc quantity an analyst can map, rank or limit."""

    column: str
    label: str
    unit: str
    description: str
    rank_by_magnitude: bool = False  # rank |value| (DLA: the launch site cares about |DLA|)


METRICS: dict[str, Metric] = {
    m.column: m
    for m in (
        Metric("c3_km2_s2", "C3", "km²/s²", "launch energy, the square of the departure v∞"),
        Metric("vinf_departure_km_s", "departure v∞", "km/s", "hyperbolic excess speed leaving"),
        Metric(
            "dla_deg",
            "DLA",
            "deg",
            "declination of the departure asymptote (ICRF)",
            rank_by_magnitude=True,
        ),
        Metric("rla_deg", "RLA", "deg", "right ascension of the departure asymptote (ICRF)"),
        Metric("vinf_arrival_km_s", "arrival v∞", "km/s", "hyperbolic excess speed arriving"),
        Metric(
            "vinf_arrival_dec_deg",
            "arrival v∞ declination",
            "deg",
            "declination of the arrival asymptote (ICRF)",
            rank_by_magnitude=True,
        ),
        Metric(
            "vinf_arrival_ra_deg",
            "arrival v∞ right ascension",
            "deg",
            "right ascension of the arrival asymptote (ICRF)",
        ),
        Metric("dv_departure_km_s", "departure Δv", "km/s", "burn from the parking orbit"),
        Metric("dv_arrival_km_s", "arrival Δv", "km/s", "burn into the capture orbit"),
        Metric("dv_total_km_s", "total Δv", "km/s", "departure plus arrival Δv"),
        Metric("entry_speed_km_s", "entry speed", "km/s", "speed at the entry interface"),
        Metric("tof_days", "TOF", "days", "time of flight"),
        Metric("periapsis_km", "arc periapsis", "km", "closest approach to the central body"),
        Metric("apoapsis_km", "arc apoapsis", "km", "farthest distance from the central body"),
        Metric("a_km", "arc semi-major axis", "km", "negative for hyperbolic arcs"),
        Metric("e", "arc eccentricity", "", "eccentricity of the transfer arc"),
    )
}
RANKING_METRICS = (
    "c3_km2_s2",
    "vinf_arrival_km_s",
    "dv_total_km_s",
    "tof_days",
    "dla_deg",
    "vinf_departure_km_s",
    "dv_departure_km_s",
    "dv_arrival_km_s",
)
_ARC_FLOAT_COLUMNS = tuple(m for m in METRICS if m != "tof_days")


class Cancelled(Exception):
    """Raised by a progress callback to stop a grid computation."""


# ---------------------------------------------------------------------------------------------
# The geometry of a case: central body, reference pole, departure and arrival physics


@dataclass(frozen=True)
class CaseBodies:
    """The resolved bodies of a case and the constants the metrics need."""

    central: Body
    departure: Body
    target: Body
    mu_central_km3_s2: float
    pole_icrf: NDArray[np.float64]

    @classmethod
    def of(cls, case: Case) -> CaseBodies:
        reg = case.registry()
        central = reg.get(case.central_body, field="case.central_body")
        if central.key == "sun":
            # Ecliptic north pole in ICRF: the ecliptic frame is ICRF turned by ε about x.
            pole = np.array([0.0, -math.sin(OBLIQUITY_J2000_RAD), math.cos(OBLIQUITY_J2000_RAD)])
        elif math.isfinite(central.pole_ra_deg):
            ra, dec = math.radians(central.pole_ra_deg), math.radians(central.pole_dec_deg)
            pole = np.array(
                [math.cos(dec) * math.cos(ra), math.cos(dec) * math.sin(ra), math.sin(dec)]
            )
        else:
            pole = np.array([0.0, 0.0, 1.0])
        if not (math.isfinite(central.gm_km3_s2) and central.gm_km3_s2 > 0):
            raise InputError("case.central_body", case.central_body, "a body with a known GM")
        return cls(
            central,
            reg.get(case.departure_body),
            reg.get(case.target_body),
            float(central.gm_km3_s2),
            pole,
        )

    @property
    def departure_is_launch(self) -> bool:
        """Whether the arc leaves a body with mass and size, so that C3 and DLA describe what a
        launch vehicle must deliver (leaving a satellite given by elements is a plain burn)."""
        return _massive(self.departure)


def _massive(body: Body) -> bool:
    return math.isfinite(body.gm_km3_s2) and body.gm_km3_s2 > 0 and math.isfinite(body.radius_km)


# ---------------------------------------------------------------------------------------------
# Metrics of arcs (any broadcast shape)


def arc_metrics(
    case: Case,
    bodies: CaseBodies,
    r1_km: NDArray,
    v1_km_s: NDArray,
    v2_km_s: NDArray,
    departure_v_km_s: NDArray,
    arrival_v_km_s: NDArray,
) -> dict[str, NDArray[np.float64]]:
    """Every per-arc metric from the arc velocities and the bodies' velocities (ICRF).

    Shapes broadcast: vectors (..., 3) give metrics of shape (...). NaN arcs give NaN metrics.
    """
    mu = bodies.mu_central_km3_s2
    vinf_d = v1_km_s - departure_v_km_s
    vinf_a = v2_km_s - arrival_v_km_s
    vd2 = np.einsum("...i,...i->...", vinf_d, vinf_d)
    va2 = np.einsum("...i,...i->...", vinf_a, vinf_a)
    vd = np.sqrt(vd2)
    va = np.sqrt(va2)
    with np.errstate(invalid="ignore", divide="ignore"):
        out: dict[str, NDArray[np.float64]] = {
            "c3_km2_s2": vd2,
            "vinf_departure_km_s": vd,
            "dla_deg": np.degrees(np.arcsin(np.clip(vinf_d[..., 2] / vd, -1.0, 1.0))),
            "rla_deg": np.degrees(np.arctan2(vinf_d[..., 1], vinf_d[..., 0])) % 360.0,
            "vinf_arrival_km_s": va,
            "vinf_arrival_dec_deg": np.degrees(np.arcsin(np.clip(vinf_a[..., 2] / va, -1.0, 1.0))),
            "vinf_arrival_ra_deg": np.degrees(np.arctan2(vinf_a[..., 1], vinf_a[..., 0])) % 360.0,
        }

        dep = bodies.departure
        if case.parking_altitude_km is not None and _massive(dep):
            rp = dep.radius_km + case.parking_altitude_km
            out["dv_departure_km_s"] = np.sqrt(vd2 + 2 * dep.gm_km3_s2 / rp) - math.sqrt(
                dep.gm_km3_s2 / rp
            )
        elif _massive(dep):
            out["dv_departure_km_s"] = np.where(np.isfinite(vd), 0.0, np.nan)
        else:
            out["dv_departure_km_s"] = vd

        tgt = bodies.target
        if case.arrival_mode == "capture":
            rp = tgt.radius_km + case.capture_periapsis_altitude_km
            ra = tgt.radius_km + case.capture_apoapsis_altitude_km
            v_orbit = math.sqrt(2 * tgt.gm_km3_s2 * ra / (rp * (rp + ra)))
            out["dv_arrival_km_s"] = np.sqrt(va2 + 2 * tgt.gm_km3_s2 / rp) - v_orbit
        elif case.arrival_mode == "rendezvous":
            out["dv_arrival_km_s"] = va
        else:
            out["dv_arrival_km_s"] = np.where(np.isfinite(va), 0.0, np.nan)
        out["dv_total_km_s"] = out["dv_departure_km_s"] + out["dv_arrival_km_s"]
        if case.entry_altitude_km is not None:
            out["entry_speed_km_s"] = np.sqrt(
                va2 + 2 * tgt.gm_km3_s2 / (tgt.radius_km + case.entry_altitude_km)
            )
        else:
            out["entry_speed_km_s"] = np.full(va.shape, np.nan)

        # The arc's own conic about the central body, from its departure state.
        r1 = np.broadcast_to(r1_km, v1_km_s.shape)
        r1n = np.sqrt(np.einsum("...i,...i->...", r1, r1))
        v1sq = np.einsum("...i,...i->...", v1_km_s, v1_km_s)
        h = np.cross(r1, v1_km_s)
        p = np.einsum("...i,...i->...", h, h) / mu
        energy = 0.5 * v1sq - mu / r1n
        e = np.sqrt(np.maximum(0.0, 1.0 + 2.0 * energy * p / mu))
        out["a_km"] = -mu / (2.0 * energy)
        out["e"] = e
        out["periapsis_km"] = p / (1.0 + e)
        out["apoapsis_km"] = np.where(e < 1.0, p / (1.0 - e), np.inf)
        out["apoapsis_km"] = np.where(np.isfinite(e), out["apoapsis_km"], np.nan)
    return out


def dv_conventions(case: Case, bodies: CaseBodies) -> dict[str, str]:
    """How this case's departure and arrival Δv are counted, in words (the module's conventions).

    A Δv of 0 means "no burn by the spacecraft here", which a reader must not take for free.
    """
    if case.parking_altitude_km is not None and _massive(bodies.departure):
        departure = f"burn from a circular {case.parking_altitude_km:g} km parking orbit"
    elif _massive(bodies.departure):
        departure = "0: the launch vehicle delivers the C3 (the case has no parking orbit)"
    else:
        departure = "|v∞|: one burn to leave the departure body's orbit"
    if case.arrival_mode == "capture":
        arrival = (
            f"burn at periapsis into a {case.capture_periapsis_altitude_km:g} × "
            f"{case.capture_apoapsis_altitude_km:g} km capture orbit"
        )
    elif case.arrival_mode == "rendezvous":
        arrival = "|v∞|: one burn to match the target's velocity"
    else:
        arrival = "0: a flyby, no burn"
    return {"departure_dv": departure, "arrival_dv": arrival}


def within_limits(
    case: Case,
    bodies: CaseBodies,
    metrics: dict[str, NDArray],
    tof_days: NDArray,
    converged: NDArray,
) -> NDArray[np.bool_]:
    """Arcs that exist, meet every limit of the case, and clear the central body's surface."""
    lim = case.limits
    ok = converged.copy()
    with np.errstate(invalid="ignore"):
        if lim.c3_max_km2_s2 is not None:
            ok &= metrics["c3_km2_s2"] <= lim.c3_max_km2_s2
        if lim.vinf_arrival_max_km_s is not None:
            ok &= metrics["vinf_arrival_km_s"] <= lim.vinf_arrival_max_km_s
        if lim.dla_max_deg is not None:
            ok &= np.abs(metrics["dla_deg"]) <= lim.dla_max_deg
        if lim.tof_min_days is not None:
            ok &= tof_days >= lim.tof_min_days
        if lim.tof_max_days is not None:
            ok &= tof_days <= lim.tof_max_days
        radius = bodies.central.radius_km
        if math.isfinite(radius):
            ok &= metrics["periapsis_km"] > radius
    return ok


# ---------------------------------------------------------------------------------------------
# The grid


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
        return self.reason.shape  # type: ignore[return-value]

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
        """Per cell, the slot of the best arc by ``metric``: within limits first, -1 if none."""
        values = self.metric(metric)
        if METRICS[metric].rank_by_magnitude:
            values = np.abs(values)
        score = np.where(self.converged, values, np.inf)
        score_within = np.where(self.within, score, np.inf)
        any_within = self.within.any(axis=-1)
        slot = np.where(any_within, np.argmin(score_within, axis=-1), np.argmin(score, axis=-1))
        return np.where(self.converged.any(axis=-1), slot, -1)

    def best_values(self, metric: str = "c3_km2_s2", by: str | None = None) -> NDArray[np.float64]:
        """(n_dep, n_arr) values of ``metric`` on each cell's best arc ranked ``by`` a metric."""
        slot = self.best_slot(by or metric)
        values = np.take_along_axis(self.metric(metric), np.maximum(slot, 0)[..., None], -1)[..., 0]
        return np.where(slot >= 0, values, np.nan)

    def cell_within(self) -> NDArray[np.bool_]:
        """(n_dep, n_arr) cells with at least one arc within limits."""
        return self.within.any(axis=-1)

    def cell_reason(self) -> NDArray[np.int8]:
        """(n_dep, n_arr) reason a cell has no arc (OK where it has one)."""
        has = self.converged.any(axis=-1)
        return np.where(has, np.int8(Reason.OK), self.reason[..., 0]).astype(np.int8)

    def best_cell(self, metric: str = "c3_km2_s2") -> tuple[int, int, int] | None:
        """(i_dep, j_arr, slot) of the best arc of the whole grid within limits, or None."""
        values = self.metric(metric)
        if METRICS[metric].rank_by_magnitude:
            values = np.abs(values)
        score = np.where(self.within, values, np.inf)
        if not np.isfinite(score).any():
            return None
        i, j, k = np.unravel_index(int(np.argmin(score)), score.shape)
        return int(i), int(j), int(k)

    # -- cache round trip ----------------------------------------------------------------------
    def to_arrays(self) -> dict[str, NDArray]:
        arrays = {
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


def grid_axes(case: Case) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
    """Departure and arrival epochs (JD TDB): start, start + step, ... up to the end date."""

    def axis(start, end, step):
        n = math.floor((end - start) / step + 1e-9) + 1
        return start + step * np.arange(n)

    return (
        axis(case.departure_start_jd_tdb, case.departure_end_jd_tdb, case.departure_step_days),
        axis(case.arrival_start_jd_tdb, case.arrival_end_jd_tdb, case.arrival_step_days),
    )


def max_cell_arcs(value: int | None = None) -> int:
    """The cell-arc cap: argument, else ``ARCWINDOW_MAX_CELL_ARCS``, else the default."""
    if value is not None:
        return int(value)
    env = os.environ.get(ENV_MAX_CELL_ARCS)
    if env:
        try:
            return int(float(env))
        except ValueError:
            raise InputError(ENV_MAX_CELL_ARCS, env, "a positive integer") from None
    return DEFAULT_MAX_CELL_ARCS


def check_grid_size(case: Case, cap: int | None = None) -> tuple[int, int, int]:
    """(n_dep, n_arr, slots) of the case's grid; InputError if it exceeds the cap."""
    dep, arr = grid_axes(case)
    slots = 2 * case.max_revolutions + 1
    total = len(dep) * len(arr) * slots
    limit = max_cell_arcs(cap)
    if total > limit:
        raise InputError(
            "window",
            f"{len(dep)} departure x {len(arr)} arrival dates x {slots} arcs = {total:,}",
            f"at most {limit:,} cell-arcs (raise the step days, narrow the dates, lower "
            f"max_revolutions, or set {ENV_MAX_CELL_ARCS})",
        )
    return len(dep), len(arr), slots


def body_states(case: Case, bodies: CaseBodies, body: Body, jd_tdb: NDArray, field_name: str):
    """States of a case body about the case's central body in ICRF."""
    return states(
        body.name,
        jd_tdb,
        central=bodies.central.name,
        frame="icrf",
        source=case.ephemeris_source,
        registry=case.registry(),
        field=field_name,
    )


def transfer_angle_deg(r1: NDArray, r2: NDArray, pole: NDArray, retrograde: bool) -> NDArray:
    """Angle swept from r1 to r2 in the sense of motion about ``pole``, deg in [0, 360)."""
    cross = np.cross(r1, r2)
    angle = np.degrees(
        np.arctan2(np.linalg.norm(cross, axis=-1), np.einsum("...i,...i->...", r1, r2))
    )
    ahead = np.einsum("...i,i->...", cross, pole) >= 0.0
    if retrograde:
        ahead = ~ahead
    return np.where(ahead, angle, 360.0 - angle)


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
    cache : solver.cache.GridCache, optional
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
    dep_jd, arr_jd = grid_axes(case)
    r_dep, v_dep = body_states(case, bodies, bodies.departure, dep_jd, "window.departure dates")
    r_arr, v_arr = body_states(case, bodies, bodies.target, arr_jd, "window.arrival dates")

    tof_days = arr_jd[None, :] - dep_jd[:, None]
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
        tof_s = tof_days[sl] * SECONDS_PER_DAY
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
# Single arcs (the dashboard's selected cell, refinement, exports)


@dataclass(frozen=True)
class Arc:
    """One arc between two epochs, with its states and every metric."""

    departure_jd_tdb: float
    arrival_jd_tdb: float
    revolutions: int
    branch: str
    r1_km: NDArray[np.float64]
    v1_km_s: NDArray[np.float64]
    r2_km: NDArray[np.float64]
    v2_km_s: NDArray[np.float64]
    departure_body_v_km_s: NDArray[np.float64]
    arrival_body_v_km_s: NDArray[np.float64]
    metrics: dict[str, float]
    family: int
    reason: int
    within: bool
    transfer_angle_deg: float
    mu_km3_s2: float

    @property
    def tof_days(self) -> float:
        return self.arrival_jd_tdb - self.departure_jd_tdb

    @property
    def ok(self) -> bool:
        return self.reason == Reason.OK


def solve_cell(
    case: Case, departure_jd_tdb: float, arrival_jd_tdb: float, bodies: CaseBodies | None = None
) -> list[Arc]:
    """Every arc slot between two epochs (the same numbers as the grid cell at those dates)."""
    bodies = bodies or CaseBodies.of(case)
    jd = np.array([departure_jd_tdb, arrival_jd_tdb], dtype=float)
    r_d, v_d = body_states(case, bodies, bodies.departure, jd[:1], "departure date")
    r_a, v_a = body_states(case, bodies, bodies.target, jd[1:], "arrival date")
    tof_days = float(jd[1] - jd[0])
    sol = solve_lambert(
        r_d[0],
        r_a[0],
        tof_days * SECONDS_PER_DAY,
        bodies.mu_central_km3_s2,
        max_revs=case.max_revolutions,
        retrograde=case.retrograde,
        pole=bodies.pole_icrf,
    )
    metrics = arc_metrics(case, bodies, r_d[0], sol.v1_km_s, sol.v2_km_s, v_d[0], v_a[0])
    angle = float(transfer_angle_deg(r_d[0], r_a[0], bodies.pole_icrf, case.retrograde))
    reason = np.where(
        (tof_days <= 0) & (sol.reason == Reason.NONPOSITIVE_TOF),
        np.int8(Reason.ARRIVAL_NOT_AFTER_DEPARTURE),
        sol.reason,
    )
    within = within_limits(
        case, bodies, metrics, np.full(reason.shape, tof_days), reason == Reason.OK
    )
    family = family_from_x(sol.x, angle > 180.0)
    arcs = []
    for k in range(len(sol.revolutions)):
        arcs.append(
            Arc(
                departure_jd_tdb=float(jd[0]),
                arrival_jd_tdb=float(jd[1]),
                revolutions=int(sol.revolutions[k]),
                branch=BRANCH_NAMES[int(sol.branch[k])],
                r1_km=r_d[0],
                v1_km_s=sol.v1_km_s[k],
                r2_km=r_a[0],
                v2_km_s=sol.v2_km_s[k],
                departure_body_v_km_s=v_d[0],
                arrival_body_v_km_s=v_a[0],
                metrics={name: float(values[k]) for name, values in metrics.items()}
                | {"tof_days": tof_days},
                family=int(family[k]),
                reason=int(reason[k]),
                within=bool(within[k]),
                transfer_angle_deg=angle,
                mu_km3_s2=bodies.mu_central_km3_s2,
            )
        )
    return arcs


def select_arc(
    arcs: list[Arc],
    revolutions: int | None = None,
    branch: str | None = None,
    metric: str = "c3_km2_s2",
) -> Arc:
    """The arc with these revolutions/branch, or the best by ``metric`` (within limits first)."""
    if revolutions is not None:
        wanted = "single" if revolutions == 0 else (branch or "low")
        for arc in arcs:
            if arc.revolutions == revolutions and arc.branch == wanted:
                return arc
        raise InputError(
            "revolutions",
            revolutions,
            f"0 to {max(a.revolutions for a in arcs)} (the case's max_revolutions)",
        )
    rank = METRICS[metric].rank_by_magnitude

    def score(arc: Arc) -> tuple[int, float]:
        value = arc.metrics.get(metric, math.nan)
        value = abs(value) if rank else value
        return (
            0 if arc.within else 1 if arc.ok else 2,
            value if math.isfinite(value) else math.inf,
        )

    return min(arcs, key=score)


# ---------------------------------------------------------------------------------------------
# Provenance and cache key


def ephemeris_label(case: Case) -> str:
    if case.ephemeris_source == "mean":
        return "JPL approximate mean elements (Standish, Table 1, 1800-2050)"
    return "JPL DE423 (jplephem, de423 package)"


def case_hash(case: Case) -> str:
    from solver.cache import cache_key

    return cache_key({"case": case.normalized()})[:16]


def window_cache_key(case: Case) -> str:
    from solver.cache import cache_key

    return cache_key(
        {
            "case": case.normalized(),
            "ephemeris": ephemeris_label(case),
            "engine": ENGINE_VERSION,
            "grid_format": 1,
        }
    )


def provenance(case: Case) -> dict[str, Any]:
    """What every output states about where its numbers come from."""
    return {
        "case_title": case.title,
        "case_hash": case_hash(case),
        "ephemeris": ephemeris_label(case),
        "constants": "GM from the DE423 header; radii JPL SSD / IAU 2015 (solver/constants.py)",
        "engine": f"arcwindow {ENGINE_VERSION}",
        "lambert_method": "Izzo (2015) with Householder iterations",
        "frame": "ICRF (equatorial J2000); DLA/RLA and arrival asymptote angles in ICRF",
        "time_scales": "dates shown in UTC; computed in TDB",
        **dv_conventions(case, CaseBodies.of(case)),
        "computed_utc": _dt.datetime.now(_dt.UTC).strftime("%Y-%m-%dT%H:%M:%SZ"),
        "caution": CAUTION,
    }


__all__ = [
    "CAUTION",
    "METRICS",
    "RANKING_METRICS",
    "Arc",
    "Cancelled",
    "CaseBodies",
    "Metric",
    "WindowGrid",
    "arc_metrics",
    "check_grid_size",
    "compute_window",
    "dv_conventions",
    "grid_axes",
    "provenance",
    "select_arc",
    "solve_cell",
    "window_cache_key",
]
