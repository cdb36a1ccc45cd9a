"""Solver results turned into the plain arrays the figure builders draw.

The figure builders (``figures.py``) know nothing of cases, grids or ephemerides: they take the
dataclasses made here. This module calls the engine (``solver.window``,
``solver.mechanics.kepler``, ``solver.ephemeris.states``, ``solver.mechanics.families``) and does
the unit conversions for display, so the figures stay pure and fast to test.

Dates on the plots are milliseconds since 1970-01-01 UTC, the number a plotly date axis reads,
rounded to the second (:func:`display_ms`): grid nodes are evenly spaced in TDB, so a node on a
UTC midnight can fall a few milliseconds before it, and a date axis printing hours and minutes
would show it one minute early, on the previous day.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np
from numpy.typing import NDArray

from solver.constants import AU_KM
from solver.ephemeris.frames import ECLIPTIC, ICRF, equator_frame, rotate
from solver.ephemeris.states import states
from solver.ephemeris.timescales import jd_tdb_to_utc, split_jd, tdb_jd_to_utc_jd
from solver.errors import InputError
from solver.mechanics.families import (
    FamilyCurve,
    classify,
    family_curves,
    family_label,
    geometry,
    minimum_energy_tau,
    parabolic_tau,
)
from solver.mechanics.kepler import sample_arc, state_to_elements
from solver.mechanics.lambert import BRANCH_NAMES
from solver.reasons import describe
from solver.time_units import JD_UNIX_EPOCH, MS_PER_DAY, SECONDS_PER_DAY
from solver.window.case import Case
from solver.window.case_bodies import CaseBodies
from solver.window.cell import Arc
from solver.window.grid import WindowGrid
from solver.window.limits import LIMIT_RULES, LimitRule, breaches, site_reach_deg
from solver.window.mass import MASS_METRICS
from solver.window.metrics import METRICS, dv_conventions
from solver.window.outputs import arc_burns, case_outputs

from .detail_rows import DetailRow, Section, fmt
from .launch_details import launch_window_sections, mass_sections, mass_summary
from .view_state import arcs_label, parse_arcs, slot_label

DISPLAY_MAX_POINTS = 600
"""Largest number of heat-map columns or rows sent to the browser. A map panel is about 900 x
520 pixels; more points than pixels only cost transfer time. Clicks map back to exact dates."""

CONTOUR_MAX_POINTS = 160
"""Grid size per axis that contour lines are traced on: the browser traces contours itself and
its time grows with the cell count; lines drawn from 160 x 160 cells are smooth at map size."""

PREVIEW_MAX_POINTS = 60
"""Grid size per axis of the coarse preview computed while a date slider is dragged."""

# The numbers every heat-map cell carries for its hover label: (metric column, label, unit,
# format), float32 each. Every number of the cell's arc; large responses go out gzip-compressed
# (see ``app.dashboard.compression``), which keeps a 600 x 600 map to a few MB on the wire.
HOVER_FIELDS: tuple[tuple[str, str, str, str], ...] = (
    ("tof_days", "TOF", "days", ".1f"),
    ("transfer_angle_deg", "transfer angle", "deg", ".1f"),
    ("c3_km2_s2", "C3", "km²/s²", ".2f"),
    ("dla_deg", "DLA", "deg", ".1f"),
    ("rla_deg", "RLA", "deg", ".1f"),
    ("dv_departure_km_s", "departure Δv", "km/s", ".3f"),
    ("vinf_arrival_km_s", "arrival v∞", "km/s", ".3f"),
    ("vinf_arrival_dec_deg", "arrival v∞ declination", "deg", ".1f"),
    ("dv_arrival_km_s", "arrival Δv", "km/s", ".3f"),
    ("dv_total_km_s", "total Δv", "km/s", ".3f"),
)
ENTRY_HOVER_FIELD = ("entry_speed_km_s", "entry speed", "km/s", ".3f")
"""Added when the case asks for an entry speed (an entry altitude)."""
MASS_HOVER_FIELDS: tuple[tuple[str, str, str, str], ...] = (
    ("injected_mass_kg", "injected mass", "kg", ",.0f"),
    ("delivered_mass_kg", "delivered mass", "kg", ",.0f"),
    ("mass_margin_kg", "mass margin", "kg", ",.0f"),
)
"""Added when the case computes them (a spacecraft mass; the margin with a required mass)."""

MAP_LIMIT_RULES: dict[str, LimitRule] = {
    rule.quantity: rule
    for rule in LIMIT_RULES
    if sum(r.quantity == rule.quantity for r in LIMIT_RULES) == 1
}
"""The limit drawn on the map of each metric bounded on one side (C3 max, delivered mass min):
the colour scale ends there and a line marks it. TOF, bounded on both sides, is coloured over
its whole range."""


# ---------------------------------------------------------------------------------------------
# Dates


def jd_tdb_to_unix_ms(jd_tdb: NDArray[np.float64] | float) -> NDArray[np.float64]:
    """JD TDB to milliseconds since 1970-01-01 UTC (the plot's date coordinate), to the
    millisecond: a float64 JD carries ~20 microseconds, so a midnight node would otherwise read
    as 23:59:59.997 on a date axis."""
    day, frac = split_jd(np.asarray(jd_tdb, dtype=float))
    utc1, utc2 = tdb_jd_to_utc_jd(day, frac)
    return np.round(((utc1 - JD_UNIX_EPOCH) + utc2) * MS_PER_DAY)


def display_ms(jd_tdb: NDArray[np.float64] | float) -> NDArray[np.float64]:
    """The plot coordinate of a grid date: :func:`jd_tdb_to_unix_ms` rounded to the second.

    Grid dates are whole seconds of UTC (whole minutes or days in practice), but the nodes are
    evenly spaced in TDB and the periodic TDB-TT term puts a node up to ~2 ms before its UTC
    second; shown to the minute, 00:00:00 would read as 23:59 of the day before.
    """
    return np.round(jd_tdb_to_unix_ms(jd_tdb) / 1000.0) * 1000.0


def display_name(name: str) -> str:
    """A body's name for the screen: built-in names capitalised, element bodies as written."""
    return name if any(c.isupper() for c in name) else name.capitalize()


def utc_text(jd_tdb: float) -> str:
    """ISO 8601 UTC to the second, for labels and the details panel."""
    return str(jd_tdb_to_utc(float(jd_tdb), digits=0))


def display_indices(n: int, max_points: int = DISPLAY_MAX_POINTS) -> NDArray[np.int64]:
    """Indices of the grid rows (or columns) drawn: all of them, or the one nearest each of
    ``max_points`` evenly spaced display positions."""
    if n <= max_points:
        return np.arange(n)
    return np.unique(np.round(np.linspace(0.0, n - 1.0, max_points)).astype(np.int64))


# ---------------------------------------------------------------------------------------------
# Window map


@dataclass(frozen=True)
class MapPoint:
    """A marked point of the window map (the best arc, the selected cell)."""

    departure_ms: float
    arrival_ms: float
    value: float
    label: str


@dataclass(frozen=True)
class MapLayer:
    """One sampling of the map: the cells drawn at some resolution.

    Attributes
    ----------
    departure_ms : (nx,)  arrival_ms : (ny,)
        Plot coordinates of the sampled columns and rows.
    values : (ny, nx) float32
        The metric on the arcs shown (|value| for DLA), NaN where a cell has none.
    transfer_angle_deg : (ny, nx) float32
        For the Type I / Type II boundary.
    """

    departure_ms: NDArray[np.float64]
    arrival_ms: NDArray[np.float64]
    values: NDArray[np.float32]
    transfer_angle_deg: NDArray[np.float32]


@dataclass(frozen=True)
class MapData:
    """What the window map draws.

    ``heat`` is sampled at up to ``DISPLAY_MAX_POINTS`` per axis; ``lines`` (contours and the
    Type boundary, which the browser traces itself) at up to ``CONTOUR_MAX_POINTS``.

    Attributes
    ----------
    outside : (ny, nx) bool
        Cells of ``heat`` whose arc exists but breaks a limit.
    no_value : (ny, nx) bool
        Cells of ``heat`` with no value of the metric: no arc shown, or an arc without one (no
        delivered mass beyond the vehicle's table); a click there asks why.
    no_value_text : str
        What the hover says over such a cell.
    hover : (ny, nx, len(hover_fields)) float32 or None
        Every number of a ``heat`` cell, for its hover label (None for previews).
    hover_fields : tuple of (column, label, unit, format)
        What ``hover`` holds: ``HOVER_FIELDS``, with TOF in hours for windows of hours.
    arc_text : (ny, nx) str or None
        Which arc a cell shows, when the case has several per cell.
    limit : float or None
        The case's limit on the metric (:data:`MAP_LIMIT_RULES`), ``limit_bound`` "max" or
        "min", ``limit_label`` its words for the legend (``"C3 max 30 km²/s²"``).
    higher_is_better : bool
        More is better (kilograms): the colour scale runs the other way, its pale end on the
        highest values.
    """

    metric: str
    metric_label: str
    unit: str
    heat: MapLayer
    lines: MapLayer
    outside: NDArray[np.bool_]
    no_value: NDArray[np.bool_]
    hover: NDArray[np.float32] | None
    arc_text: NDArray[np.str_] | None
    limit: float | None
    tof_days_min: float
    tof_days_max: float
    best: MapPoint | None = None
    selected: MapPoint | None = None
    full_shape: tuple[int, int] = (0, 0)
    arcs_label: str = ""
    preview: bool = False
    title: str = ""
    note: str = ""  # shown on the map (no arc within the limits)
    hover_fields: tuple[tuple[str, str, str, str], ...] = HOVER_FIELDS
    limit_bound: str = "max"
    limit_label: str = ""
    higher_is_better: bool = False
    no_value_text: str = "no arc here: click to see why"

    # The heat layer's axes, used by the markers, TOF lines and ranges.
    @property
    def departure_ms(self) -> NDArray[np.float64]:
        return self.heat.departure_ms

    @property
    def arrival_ms(self) -> NDArray[np.float64]:
        return self.heat.arrival_ms

    @property
    def values(self) -> NDArray[np.float32]:
        return self.heat.values


_BRANCH_CODES = {name: code for code, name in BRANCH_NAMES.items()}


def shown_slot(grid: WindowGrid, arcs: str) -> int | None:
    """Slot index for an arcs choice: None for "best" (the best slot of each cell), -1 when the
    grid has no such revolution count and branch (never another slot in its place)."""
    revolutions, branch = parse_arcs(arcs)
    if revolutions is None:
        return None
    branch_code = _BRANCH_CODES[branch or "single"]
    for k in range(len(grid.revolutions)):
        if int(grid.revolutions[k]) == revolutions and int(grid.branch[k]) == branch_code:
            return k
    return -1


def any_arc_shown(grid: WindowGrid, arcs: str) -> bool:
    """Whether the grid has any arc of the kind shown (a revolution count and branch, or any)."""
    slot = shown_slot(grid, arcs)
    if slot == -1:
        return False
    return bool(grid.converged.any() if slot is None else grid.converged[..., slot].any())


class _Sampler:
    """Values of the arcs shown in a set of sampled cells (display orientation: rows are
    arrival dates)."""

    def __init__(self, grid: WindowGrid, slot: int | None, slot_per_cell, max_points: int):
        self.grid = grid
        self.slot = slot
        self.i = display_indices(len(grid.departure_jd_tdb), max_points)
        self.j = display_indices(len(grid.arrival_jd_tdb), max_points)
        self.cells = np.ix_(self.i, self.j)
        self.slot_shown = slot_per_cell[self.cells]
        self.exists = self.slot_shown >= 0

    def field(self, name: str) -> NDArray[np.float32]:
        grid, cells = self.grid, self.cells
        if name in ("tof_days", "transfer_angle_deg"):
            values = getattr(grid, name)[cells]
        elif self.slot is None:
            picked = np.take_along_axis(
                grid.metric(name)[cells], np.maximum(self.slot_shown, 0)[..., None], -1
            )
            values = picked[..., 0]
        else:
            values = grid.metric(name)[(*cells, self.slot)]
        return np.where(self.exists, values, np.nan).T.astype(np.float32)

    def layer(self, metric: str) -> MapLayer:
        values = self.field(metric)
        if METRICS[metric].rank_by_magnitude:
            values = np.abs(values)
        return MapLayer(
            departure_ms=display_ms(self.grid.departure_jd_tdb[self.i]),
            arrival_ms=display_ms(self.grid.arrival_jd_tdb[self.j]),
            values=values,
            transfer_angle_deg=self.field("transfer_angle_deg"),
        )


def map_data(
    grid: WindowGrid,
    metric: str,
    arcs: str = "best",
    *,
    max_points: int = DISPLAY_MAX_POINTS,
    contour_points: int = CONTOUR_MAX_POINTS,
    best: MapPoint | None = None,
    selected: MapPoint | None = None,
    preview: bool = False,
    title: str = "",
) -> MapData:
    """Display arrays of one metric over a grid, decimated to at most ``max_points`` per axis.

    Raises InputError when the grid has no arc slot for ``arcs`` (a grid of fewer revolutions).
    """
    slot = shown_slot(grid, arcs)
    if slot == -1:
        raise InputError(
            "arcs", arcs, f"an arc the grid holds (up to {int(grid.revolutions.max())} revolutions)"
        )
    if slot is None:
        slot_per_cell = grid.best_slot(metric)
        within = grid.cell_within()
    else:
        slot_per_cell = np.where(grid.converged[..., slot], slot, -1)
        within = grid.within[..., slot]
    heat = _Sampler(grid, slot, slot_per_cell, max_points)
    lines = _Sampler(grid, slot, slot_per_cell, min(contour_points, max_points))
    hover = None
    fields = hover_fields(grid.case)
    tof_days_max = float(np.nanmax(grid.tof_days))
    if not preview:
        hover = np.stack([heat.field(name) for name, *_ in fields], axis=-1)
        if tof_days_max < 2.0:  # a window of hours: TOF in hours reads better than 0.2 days
            k = [f[0] for f in fields].index("tof_days")
            hover[..., k] *= np.float32(24.0)
            fields = tuple(
                ("tof_hours", "TOF", "h", ".2f") if f[0] == "tof_days" else f for f in fields
            )
    arc_text = None
    if len(grid.revolutions) > 1:
        labels = np.array(
            [
                slot_label(int(n), BRANCH_NAMES[int(b)])
                for n, b in zip(grid.revolutions, grid.branch, strict=True)
            ]
            + ["no arc"]
        )
        arc_text = labels[np.where(heat.exists, heat.slot_shown, -1)].T
    rule = MAP_LIMIT_RULES.get(metric)
    limit = rule.limit(grid.case.limits) if rule is not None else None
    m = METRICS[metric]
    rank = m.rank_by_magnitude
    label = f"|{m.label}|" if rank else m.label
    heat_layer = heat.layer(metric)
    mass = metric in MASS_METRICS
    return MapData(
        metric=metric,
        metric_label=label,
        unit=m.unit,
        heat=heat_layer,
        lines=lines.layer(metric),
        outside=(heat.exists & ~within[heat.cells]).T,
        no_value=np.isnan(heat_layer.values),
        no_value_text=f"no arc, or no {m.label} for its arc, here: click to see why"
        if mass
        else "no arc here: click to see why",
        limit_bound=rule.bound if rule is not None else "max",
        limit_label="" if limit is None or rule is None else limit_text(rule, limit),
        higher_is_better=m.higher_is_better,
        hover=hover,
        arc_text=arc_text,
        limit=limit,
        tof_days_min=float(np.nanmin(grid.tof_days)),
        tof_days_max=tof_days_max,
        best=best,
        selected=selected,
        full_shape=(len(grid.departure_jd_tdb), len(grid.arrival_jd_tdb)),
        arcs_label=arcs_label(arcs),
        preview=preview,
        title=title,
        hover_fields=fields,
    )


def limit_text(rule: LimitRule, limit: float) -> str:
    """A limit in words for the map's legend: ``"C3 max 30 km²/s²"``."""
    number = f"{limit:,.0f}" if float(limit).is_integer() else f"{limit:,.6g}"
    return f"{rule.label} {rule.bound} {number} {rule.unit}".strip()


def hover_fields(case: Case) -> tuple[tuple[str, str, str, str], ...]:
    """What a map cell's hover lists for ``case``: :data:`HOVER_FIELDS`, the entry speed when
    the case asks for it, and the kilograms the case computes."""
    fields = HOVER_FIELDS
    if case.entry_altitude_km is not None:
        fields = (*fields, ENTRY_HOVER_FIELD)
    computed = case_outputs(case).metrics
    return (*fields, *(f for f in MASS_HOVER_FIELDS if f[0] in computed))


def map_point(arc: Arc, metric: str, label: str) -> MapPoint:
    """A map marker at an arc's dates carrying its value of ``metric``."""
    value = arc.metrics.get(metric, math.nan)
    if METRICS[metric].rank_by_magnitude:
        value = abs(value)
    return MapPoint(
        float(display_ms(arc.departure_jd_tdb)),
        float(display_ms(arc.arrival_jd_tdb)),
        float(value),
        label,
    )


# ---------------------------------------------------------------------------------------------
# Arc view


@dataclass(frozen=True)
class BodyTrack:
    """A body's path during the transfer and its full orbit, in display units."""

    name: str
    path: NDArray[np.float64]  # (n, 3) over the transfer interval
    orbit: NDArray[np.float64] | None  # (m, 3) one full period, None if not closed or covered
    at_departure: NDArray[np.float64]  # (3,)
    at_arrival: NDArray[np.float64]  # (3,)


@dataclass(frozen=True)
class ArcScene:
    """What the arc view draws, in the display frame and unit."""

    central_name: str
    central_radius: float  # display units; 0 when the body is a point at this scale
    unit: str  # "au" or "10³ km"
    plane_label: str  # "ecliptic J2000" / "Earth equator (ICRF)"
    arc: NDArray[np.float64]  # (n, 3)
    departure: BodyTrack
    target: BodyTrack
    title: str = ""
    extent: float = field(default=1.0)


def _display_frame(bodies: CaseBodies):
    central = bodies.central
    if central.key == "sun":
        return ECLIPTIC, "ecliptic J2000", AU_KM, "au"
    if central.key == "earth" or not math.isfinite(central.pole_ra_deg):
        return ICRF, f"{display_name(central.name)} equator (ICRF)", 1000.0, "10³ km"
    frame = equator_frame(central.pole_ra_deg, central.pole_dec_deg, central.key)
    return frame, f"{display_name(central.name)} equator", 1000.0, "10³ km"


def _tof_text(tof_days: float) -> str:
    return f"{tof_days * 24.0:.2f} h" if tof_days < 2.0 else f"{tof_days:.1f} days"


def _period_s(r_km: NDArray, v_km_s: NDArray, mu: float) -> float:
    r = float(np.linalg.norm(r_km))
    energy = 0.5 * float(np.dot(v_km_s, v_km_s)) - mu / r
    if energy >= 0:
        return math.inf
    a = -mu / (2.0 * energy)
    return 2.0 * math.pi * math.sqrt(a**3 / mu)


def _track(case: Case, bodies: CaseBodies, body, arc: Arc, frame, scale: float) -> BodyTrack:
    mu = bodies.mu_central_km3_s2
    r0, v0 = states(
        body.name,
        arc.departure_jd_tdb,
        central=bodies.central.name,
        frame=ICRF,
        source=case.ephemeris_source,
        registry=case.registry(),
    )
    period_s = _period_s(np.asarray(r0), np.asarray(v0), mu)
    tof_s = max(arc.tof_days, 1e-9) * SECONDS_PER_DAY
    laps = tof_s / period_s if math.isfinite(period_s) else 0.0
    n_path = int(np.clip(math.ceil(laps * 180.0) + 2, 120, 4000))
    jd_path = np.linspace(arc.departure_jd_tdb, arc.arrival_jd_tdb, n_path)
    orbit = None
    if math.isfinite(period_s) and laps < 1.0:
        jd_orbit = arc.departure_jd_tdb + np.linspace(0.0, period_s / SECONDS_PER_DAY, 241)
        jd_all = np.concatenate([jd_path, jd_orbit])
    else:
        jd_all = jd_path
    r, _ = states(
        body.name,
        jd_all,
        central=bodies.central.name,
        frame=frame,
        source=case.ephemeris_source,
        registry=case.registry(),
        out_of_range="nan",
    )
    r = np.asarray(r) / scale
    path = r[:n_path]
    if len(jd_all) > n_path:
        orbit = r[n_path:]
    return BodyTrack(body.name, path, orbit, path[0], path[-1])


def arc_scene(case: Case, arc: Arc, bodies: CaseBodies | None = None) -> ArcScene:
    """Transfer arc, both bodies' paths and orbits, in the display frame of the case."""
    bodies = bodies or CaseBodies.of(case)
    frame, plane_label, scale, unit = _display_frame(bodies)
    if arc.ok:
        _, r_arc = sample_arc(arc.r1_km, arc.v1_km_s, arc.flight_s, arc.mu_km3_s2)
        arc_xyz = rotate(r_arc, ICRF, frame) / scale
    else:
        arc_xyz = np.empty((0, 3))
    dep = _track(case, bodies, bodies.departure, arc, frame, scale)
    tgt = _track(case, bodies, bodies.target, arc, frame, scale)
    pieces = [p for p in (arc_xyz, dep.path, tgt.path, dep.orbit, tgt.orbit) if p is not None]
    extent = float(np.nanmax(np.abs(np.concatenate(pieces)))) if pieces else 1.0
    radius = bodies.central.radius_km / scale if math.isfinite(bodies.central.radius_km) else 0.0
    return ArcScene(
        central_name=display_name(bodies.central.name),
        central_radius=radius if radius > 0.01 * extent else 0.0,
        unit=unit,
        plane_label=plane_label,
        arc=arc_xyz,
        departure=dep,
        target=tgt,
        title=f"{display_name(dep.name)} to {display_name(tgt.name)}, {_tof_text(arc.tof_days)}",
        extent=extent if math.isfinite(extent) and extent > 0 else 1.0,
    )


# ---------------------------------------------------------------------------------------------
# Family chart


@dataclass(frozen=True)
class FamilyPoint:
    tau: float
    epsilon: float
    label: str
    revolutions: int


@dataclass(frozen=True)
class FamilyData:
    """What the family chart draws for one cell's geometry."""

    lam: float
    transfer_angle_deg: float
    curves: list[FamilyCurve]
    parabolic_tau: float
    minimum_energy: list[FamilyPoint]  # one per N
    cell_arcs: list[FamilyPoint]  # every solved arc of the cell
    selected: FamilyPoint | None
    max_revolutions: int
    title: str = ""


def family_data(case: Case, arcs: list[Arc], selected: Arc, bodies: CaseBodies | None = None):
    """Family curves for the selected cell's geometry, its arcs and the selected arc."""
    bodies = bodies or CaseBodies.of(case)
    geo = geometry(selected.r1_km, selected.r2_km, bodies.pole_icrf, case.retrograde)
    lam = float(geo.lam)
    points = []
    chosen = None
    for arc in arcs:
        if not arc.ok:
            continue
        c = classify(
            arc.r1_km,
            arc.v1_km_s,
            arc.r2_km,
            arc.flight_s,
            arc.mu_km3_s2,
            arc.revolutions,
        )
        family = int(c.family) or arc.family
        label = family_label(family, arc.revolutions, arc.branch) if family else "unclassified"
        point = FamilyPoint(float(c.tau), float(c.epsilon), label, arc.revolutions)
        points.append(point)
        if arc is selected:
            chosen = point
    max_revs = case.max_revolutions
    taus = [p.tau for p in points if math.isfinite(p.tau)]
    default_max = 1.6 * minimum_energy_tau(lam, max_revs) + 2.0
    tau_max = max([default_max, *(1.15 * t for t in taus)])
    eps_max = max([1.5, *(1.15 * p.epsilon for p in points if math.isfinite(p.epsilon))])
    curves = family_curves(lam, max_revs, epsilon_max=eps_max, tau_max=tau_max)
    minimum = [
        FamilyPoint(minimum_energy_tau(lam, n), -1.0, f"minimum-energy ellipse, N = {n}", n)
        for n in range(max_revs + 1)
    ]
    way = "long way" if lam < 0 else "short way"
    return FamilyData(
        lam=lam,
        transfer_angle_deg=float(np.degrees(geo.transfer_angle_rad)),
        curves=curves,
        parabolic_tau=parabolic_tau(lam),
        minimum_energy=minimum,
        cell_arcs=points,
        selected=chosen,
        max_revolutions=max_revs,
        title=f"λ = {lam:+.3f} ({way}, transfer angle {np.degrees(geo.transfer_angle_rad):.1f}°)",
    )


# ---------------------------------------------------------------------------------------------
# Details panel


_fmt = fmt


def limit_breaches(case: Case, arc: Arc, bodies: CaseBodies | None = None) -> list[str]:
    """Plain-language list of the limits an arc breaks (empty when within limits)."""
    return [b.text for b in breaches(case, bodies or CaseBodies.of(case), arc.metrics)]


def _launch_sections(case: Case, arc: Arc, bodies: CaseBodies) -> list[tuple[str, list[DetailRow]]]:
    """A launch: C3 and the departure asymptote, the arrival v∞ and burns."""
    m = arc.metrics
    rows: list[tuple[str, list[DetailRow]]] = []
    counted = dv_conventions(case, bodies)
    rows.append(
        (
            "Departure",
            [
                DetailRow("C3", _fmt(m["c3_km2_s2"], 3), "km²/s²"),
                DetailRow("v∞", _fmt(m["vinf_departure_km_s"], 4), "km/s"),
                DetailRow("DLA", _fmt(m["dla_deg"], 2), "deg"),
                DetailRow("RLA", _fmt(m["rla_deg"], 2), "deg"),
                DetailRow("Δv", _fmt(m["dv_departure_km_s"], 4), "km/s"),
                DetailRow("Δv counted as", counted["departure_dv"]),
            ],
        )
    )
    arrival_rows = [
        DetailRow("v∞", _fmt(m["vinf_arrival_km_s"], 4), "km/s"),
        DetailRow("asymptote declination", _fmt(m["vinf_arrival_dec_deg"], 2), "deg"),
        DetailRow("asymptote right ascension", _fmt(m["vinf_arrival_ra_deg"], 2), "deg"),
        DetailRow("Δv", _fmt(m["dv_arrival_km_s"], 4), "km/s"),
        DetailRow("Δv counted as", counted["arrival_dv"]),
    ]
    if math.isfinite(m.get("entry_speed_km_s", math.nan)):
        arrival_rows.append(DetailRow("entry speed", _fmt(m["entry_speed_km_s"], 3), "km/s"))
    rows.append(("Arrival", arrival_rows))
    rows.append(("Total", [DetailRow("Δv", _fmt(m["dv_total_km_s"], 4), "km/s")]))
    return rows


def _burn_sections(case: Case, arc: Arc, bodies: CaseBodies) -> list[tuple[str, list[DetailRow]]]:
    """A transfer that starts with a burn: phasing, each burn and its direction (no launch)."""
    burns = arc_burns(case, arc, bodies)
    counted = dv_conventions(case, bodies)

    def direction(rtn) -> list[DetailRow]:
        return [
            DetailRow("radial", _fmt(float(rtn[0]), 4), "km/s"),
            DetailRow("along-track", _fmt(float(rtn[1]), 4), "km/s"),
            DetailRow("cross-track", _fmt(float(rtn[2]), 4), "km/s"),
        ]

    return [
        ("Phasing", [DetailRow("target ahead at departure", _fmt(burns.phase_deg, 2), "deg")]),
        (
            "Departure burn",
            [
                DetailRow("Δv", _fmt(burns.departure_dv_km_s, 4), "km/s"),
                *direction(burns.departure_rtn_km_s),
                DetailRow("Δv counted as", counted["departure_dv"]),
            ],
        ),
        (
            "Arrival burn",
            [
                DetailRow("Δv", _fmt(burns.arrival_dv_km_s, 4), "km/s"),
                *direction(burns.arrival_rtn_km_s),
                DetailRow("Δv counted as", counted["arrival_dv"]),
            ],
        ),
        ("Total", [DetailRow("Δv", _fmt(arc.metrics["dv_total_km_s"], 4), "km/s")]),
    ]


def arc_details(
    case: Case, arc: Arc, provenance: dict, bodies: CaseBodies | None = None
) -> list[Section]:
    """Sections of the details panel: (heading, rows), and for a case with mass or a launch
    site, the mass budget, the vehicles compared and the day's launch window
    (:mod:`launch_details`)."""
    bodies = bodies or CaseBodies.of(case)
    frame, plane_label, _scale, unit = _display_frame(bodies)
    arc_label = (
        "single revolution" if arc.revolutions == 0 else f"N = {arc.revolutions}, {arc.branch}"
    )
    kind = "Type I" if arc.transfer_angle_deg < 180.0 else "Type II"
    if arc.revolutions:
        kind += f" geometry, {arc.revolutions}-revolution"
    status = "within limits" if arc.within else ("outside limits" if arc.ok else "no arc")
    breaches = limit_breaches(case, arc, bodies) if arc.ok else []
    tof_rows = [DetailRow("TOF", _fmt(arc.tof_days, 2 if arc.tof_days >= 2.0 else 4), "days")]
    if arc.tof_days < 2.0:
        tof_rows.append(DetailRow("TOF", _fmt(arc.tof_days * 24.0, 3), "h"))
    sections: list[Section] = [
        (
            "Arc",
            [
                DetailRow("departure", utc_text(arc.departure_jd_tdb), "UTC"),
                DetailRow("arrival", utc_text(arc.arrival_jd_tdb), "UTC"),
                *tof_rows,
                DetailRow("transfer angle", _fmt(arc.transfer_angle_deg, 1), "deg"),
                DetailRow("type", kind),
                DetailRow("arc", arc_label),
                DetailRow(
                    "family",
                    family_label(arc.family, arc.revolutions, arc.branch)
                    if arc.family
                    else describe(arc.reason),
                ),
                DetailRow("status", status + (": " + "; ".join(breaches) if breaches else "")),
            ],
        )
    ]
    if not arc.ok:
        sections.append(("Why no arc", [DetailRow("reason", describe(arc.reason))]))
    else:
        fit = case_outputs(case, bodies)
        sections.extend(
            _burn_sections(case, arc, bodies) if fit.burns else _launch_sections(case, arc, bodies)
        )
        sections.extend(mass_sections(case, arc, bodies))
        sections.extend(launch_window_sections(case, arc, bodies))
        r1 = rotate(arc.r1_km, ICRF, frame)
        v1 = rotate(arc.v1_km_s, ICRF, frame)
        el = state_to_elements(r1, v1, arc.mu_km3_s2)
        length_scale, length_unit = (AU_KM, "au") if unit == "au" else (1.0, "km")
        digits = 5 if length_unit == "au" else 1
        sections.append(
            (
                f"Transfer orbit at departure ({plane_label})",
                [
                    DetailRow("a", _fmt(float(el.a_km) / length_scale, digits), length_unit),
                    DetailRow("e", _fmt(float(el.e), 5)),
                    DetailRow("i", _fmt(math.degrees(float(el.inclination_rad)), 3), "deg"),
                    DetailRow("Ω", _fmt(math.degrees(float(el.raan_rad)), 3), "deg"),
                    DetailRow("ω", _fmt(math.degrees(float(el.arg_periapsis_rad)), 3), "deg"),
                    DetailRow("ν", _fmt(math.degrees(float(el.true_anomaly_rad)), 3), "deg"),
                    DetailRow(
                        "periapsis",
                        _fmt(float(el.periapsis_km) / length_scale, digits),
                        length_unit,
                    ),
                    DetailRow(
                        "apoapsis",
                        _fmt(float(el.apoapsis_km) / length_scale, digits),
                        length_unit,
                    ),
                ],
            )
        )
    sections.append(
        (
            "Provenance",
            [
                DetailRow("case", str(provenance.get("case_title", case.title))),
                DetailRow("case hash", str(provenance.get("case_hash", ""))),
                DetailRow("ephemeris", str(provenance.get("ephemeris", ""))),
                DetailRow("engine", str(provenance.get("engine", ""))),
                DetailRow("Lambert method", str(provenance.get("lambert_method", ""))),
                DetailRow("frames", str(provenance.get("frame", ""))),
                DetailRow("time scales", str(provenance.get("time_scales", ""))),
            ],
        )
    )
    return sections


@dataclass(frozen=True)
class LimitsBlock:
    """Why a view has no arc within limits.

    Attributes
    ----------
    closest : Arc or None
        The best arc by the view's metric among the arcs shown, limits ignored (None when the
        grid has no arc at all).
    breaches : list of str
        The limits ``closest`` breaks, in words.
    excluded_by : list of (str, int)
        Each limit in force with the number of arcs that lifting it alone would admit, most
        first (limits whose lifting admits nothing are left out).
    breaking : list of (str, int)
        Each limit in force with the number of arcs that break it, most first.
    arcs : int
        Arcs of the kind shown in the grid.
    ranked_by : str
        The metric ``closest`` is best by: the view's, or the case's default metric when no arc
        has a value of the view's (no delivered mass anywhere).
    """

    closest: Arc | None
    breaches: list[str]
    excluded_by: list[tuple[str, int]]
    breaking: list[tuple[str, int]] = field(default_factory=list)
    arcs: int = 0
    ranked_by: str = ""


def limits_block(
    case: Case, grid: WindowGrid, metric: str, arcs: str, bodies: CaseBodies
) -> LimitsBlock:
    """Which limits keep every arc of the view out, and the closest arc they exclude."""
    from solver.window.best import slot_arc

    slot = shown_slot(grid, arcs)
    slots = list(range(grid.shape[2])) if slot is None else [max(slot, 0)]
    exists = grid.converged[..., slots]
    closest = None
    ranked_by = metric
    found = grid.best_cell(metric, slots=None if slot is None else slots, mask=grid.converged)
    if found is None and exists.any():  # arcs, but none with a value (no mass anywhere)
        ranked_by = case_outputs(case, bodies).default_metric
        found = grid.best_cell(
            ranked_by, slots=None if slot is None else slots, mask=grid.converged
        )
    if found is not None:
        closest = slot_arc(case, bodies, grid, *found)
    wanted = {rule.quantity for rule in LIMIT_RULES} | {"periapsis_km", "dla_deg"}
    values = {name: grid.metric(name)[..., slots] for name in wanted}
    meets = []
    for rule in LIMIT_RULES:
        limit = rule.limit(case.limits)
        if limit is not None:
            meets.append(
                (
                    f"{rule.label} {'max' if rule.bound == 'max' else 'min'}",
                    rule.meets(values[rule.quantity], limit),
                )
            )
    radius = bodies.central.radius_km
    if math.isfinite(radius):
        with np.errstate(invalid="ignore"):
            meets.append(("periapsis above the surface", values["periapsis_km"] > radius))
    reach = site_reach_deg(case)
    if reach is not None:  # a rule of physics too: the parking orbits the site reaches
        with np.errstate(invalid="ignore"):
            meets.append(("the launch site's reach", np.abs(values["dla_deg"]) <= reach))
    excluded = []
    for k, (label, _) in enumerate(meets):
        others = exists.copy()
        for m, (_, ok) in enumerate(meets):
            if m != k:
                others &= ok
        admitted = int(others.sum())
        if admitted:
            excluded.append((label, admitted))
    excluded.sort(key=lambda item: -item[1])
    breaking = [(label, int((exists & ~ok).sum())) for label, ok in meets]
    breaking = sorted([b for b in breaking if b[1]], key=lambda item: -item[1])
    closest_breaches = []
    if closest is not None:
        closest_breaches = limit_breaches(case, closest, bodies)
    return LimitsBlock(closest, closest_breaches, excluded, breaking, int(exists.sum()), ranked_by)


__all__ = [
    "CONTOUR_MAX_POINTS",
    "DISPLAY_MAX_POINTS",
    "ENTRY_HOVER_FIELD",
    "HOVER_FIELDS",
    "MAP_LIMIT_RULES",
    "MASS_HOVER_FIELDS",
    "PREVIEW_MAX_POINTS",
    "ArcScene",
    "BodyTrack",
    "DetailRow",
    "FamilyData",
    "FamilyPoint",
    "LimitsBlock",
    "MapData",
    "MapLayer",
    "MapPoint",
    "any_arc_shown",
    "arc_details",
    "arc_scene",
    "display_indices",
    "display_ms",
    "display_name",
    "family_data",
    "hover_fields",
    "jd_tdb_to_unix_ms",
    "limit_breaches",
    "limit_text",
    "limits_block",
    "map_data",
    "map_point",
    "mass_summary",
    "shown_slot",
    "utc_text",
]
