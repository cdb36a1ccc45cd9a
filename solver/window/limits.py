"""The limits of a case, written once: the mask of arcs within them and, in words, what breaks.

Every consumer (the grid's ``within`` mask, single arcs, refinement, surveys, launch periods and
the dashboard's details) reads :data:`LIMIT_RULES`, so a limit added here is checked, reported and
shaded everywhere at once. Besides the analyst's bounds, two rules of physics rather than of the
analyst: an arc must clear the central body's surface (its periapsis above the radius), and,
when the case has a launch site, its departure asymptote must be one a parking orbit from that
site contains (|DLA| within the site's reach, :mod:`solver.launch.site`).
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass
from typing import Literal

import numpy as np
from numpy.typing import NDArray

from solver.window.case import Case, Limits
from solver.window.case_bodies import CaseBodies
from solver.window.metrics import METRICS


@dataclass(frozen=True)
class LimitRule:
    """One bound of :class:`~solver.window.case.Limits` on one per-arc quantity.

    Attributes
    ----------
    key : str
        Field of ``Limits`` (and key of the case file's ``[limits]`` table).
    quantity : str
        The ``METRICS`` column it bounds.
    bound : {"max", "min"}
        Whether the quantity must stay at or below (max) or at or above (min) the limit.
    by_magnitude : bool
        Bound the magnitude (DLA: a launch site reaches declinations of either sign alike).
    """

    key: str
    quantity: str
    bound: Literal["max", "min"]
    by_magnitude: bool = False

    @property
    def label(self) -> str:
        label = METRICS[self.quantity].label
        return f"|{label}|" if self.by_magnitude else label

    @property
    def unit(self) -> str:
        return METRICS[self.quantity].unit

    def limit(self, limits: Limits) -> float | None:
        value = getattr(limits, self.key)
        return None if value is None else float(value)

    def meets(self, value: NDArray | float, limit: float) -> NDArray[np.bool_] | bool:
        """Whether ``value`` meets ``limit`` (NaN never does)."""
        v = np.abs(value) if self.by_magnitude else value
        with np.errstate(invalid="ignore"):
            return (v <= limit) if self.bound == "max" else (v >= limit)


LIMIT_RULES: tuple[LimitRule, ...] = (
    LimitRule("c3_max_km2_s2", "c3_km2_s2", "max"),
    LimitRule("vinf_arrival_max_km_s", "vinf_arrival_km_s", "max"),
    LimitRule("dla_max_deg", "dla_deg", "max", by_magnitude=True),
    LimitRule("tof_min_days", "tof_days", "min"),
    LimitRule("tof_max_days", "tof_days", "max"),
    LimitRule("delivered_mass_min_kg", "delivered_mass_kg", "min"),
)
"""Every bound a case can set, in the order they are reported."""

SURFACE_RULE_TEXT = "arc periapsis inside the central body"
SITE_RULE_TEXT = "beyond the launch site's reach"


def site_reach_deg(case: Case) -> float | None:
    """Largest |DLA| the case's launch site reaches without a plane change, deg (None: no site)."""
    return None if case.launch_site is None else case.launch_site.max_reachable_dla_deg


@dataclass(frozen=True)
class Breach:
    """One limit an arc breaks: the rule, the arc's value and the limit."""

    rule: LimitRule | None  # None: a rule of physics, named by ``physical``
    value: float
    limit: float
    physical: str = "surface"  # "surface" (central body) or "site" (launch site's reach)

    @property
    def text(self) -> str:
        if self.rule is None and self.physical == "site":
            return f"|DLA| {abs(self.value):.4g} > {self.limit:.4g} deg, {SITE_RULE_TEXT}"
        if self.rule is None:
            return SURFACE_RULE_TEXT
        sign = ">" if self.rule.bound == "max" else "<"
        shown = abs(self.value) if self.rule.by_magnitude else self.value
        unit = f" {self.rule.unit}" if self.rule.unit else ""
        return f"{self.rule.label} {shown:.4g} {sign} {self.limit:g}{unit}"


def within_limits(
    case: Case,
    bodies: CaseBodies,
    metrics: Mapping[str, NDArray],
    tof_days: NDArray,
    converged: NDArray,
) -> NDArray[np.bool_]:
    """Arcs that exist, meet every limit of the case, and clear the central body's surface.

    Parameters
    ----------
    metrics : mapping of METRICS column -> array
        Per-arc values (``periapsis_km`` and every bounded quantity but TOF).
    tof_days : array
        TOF of each arc, broadcastable against the metrics.
    converged : bool array
        Arcs that exist.
    """
    ok = np.array(converged, dtype=bool, copy=True)
    values = {**metrics, "tof_days": tof_days}
    for rule in LIMIT_RULES:
        limit = rule.limit(case.limits)
        if limit is not None:
            ok &= rule.meets(values[rule.quantity], limit)
    radius = bodies.central.radius_km
    if math.isfinite(radius):
        with np.errstate(invalid="ignore"):
            ok &= metrics["periapsis_km"] > radius
    reach = site_reach_deg(case)
    if reach is not None:
        with np.errstate(invalid="ignore"):
            ok &= np.abs(metrics["dla_deg"]) <= reach
    return ok


def breaches(case: Case, bodies: CaseBodies, values: Mapping[str, float]) -> list[Breach]:
    """The limits one arc breaks, in :data:`LIMIT_RULES` order (empty when within limits).

    ``values`` holds the arc's metrics and ``tof_days``. Quantities that are NaN (no arc) are
    skipped: an arc that does not exist breaks nothing, it is missing.
    """
    out: list[Breach] = []
    for rule in LIMIT_RULES:
        limit = rule.limit(case.limits)
        value = float(values.get(rule.quantity, math.nan))
        if limit is not None and math.isfinite(value) and not rule.meets(value, limit):
            out.append(Breach(rule, value, limit))
    radius = bodies.central.radius_km
    periapsis = float(values.get("periapsis_km", math.nan))
    if math.isfinite(radius) and math.isfinite(periapsis) and not periapsis > radius:
        out.append(Breach(None, periapsis, radius))
    reach = site_reach_deg(case)
    dla = float(values.get("dla_deg", math.nan))
    if reach is not None and math.isfinite(dla) and not abs(dla) <= reach:
        out.append(Breach(None, dla, reach, physical="site"))
    return out


def margins(case: Case, bodies: CaseBodies, values: Mapping[str, float]) -> list[float]:
    """Signed margin of every limit in force (>= 0 where it holds), for optimizers' constraints.

    In each limit's unit; the surface rule as periapsis over radius minus one. NaN (no arc)
    gives a large negative margin, so an optimizer steps away from it.
    """
    out: list[float] = []
    for rule in LIMIT_RULES:
        limit = rule.limit(case.limits)
        if limit is None:
            continue
        value = float(values.get(rule.quantity, math.nan))
        value = abs(value) if rule.by_magnitude else value
        out.append(limit - value if rule.bound == "max" else value - limit)
    radius = bodies.central.radius_km
    if math.isfinite(radius):
        out.append(float(values.get("periapsis_km", math.nan)) / radius - 1.0)
    reach = site_reach_deg(case)
    if reach is not None:
        out.append(reach - abs(float(values.get("dla_deg", math.nan))))
    return [x if math.isfinite(x) else -1e6 for x in out]


def breach_text(case: Case, bodies: CaseBodies, values: Mapping[str, float]) -> str:
    """The limits one arc breaks as one line (``"C3 41.2 > 30 km²/s²; |DLA| 31 > 28.5 deg"``)."""
    return "; ".join(b.text for b in breaches(case, bodies, values))


__all__ = [
    "LIMIT_RULES",
    "SITE_RULE_TEXT",
    "SURFACE_RULE_TEXT",
    "Breach",
    "LimitRule",
    "breach_text",
    "breaches",
    "margins",
    "site_reach_deg",
    "within_limits",
]
