"""The limits of a sequence, written once: the one-leg limits where they apply, plus its own.

A sequence keeps every limit of :data:`solver.window.limits.LIMIT_RULES` (the table itself is
read, so a limit added there is checked here too), applied where it means something in a
sequence: C3 and DLA at the departure, arrival v∞ at the final arrival, TOF on every leg; the
surface rule on every leg's arc. The sequence adds its own rules in :data:`SEQUENCE_LIMIT_RULES`:
each leg's TOF bounds, each stop's stay bounds, each flyby's lowest periapsis altitude, largest
burn and (for unpowered-only sequences) largest v∞ mismatch, the longest total duration and the
departure and arrival windows.

Every consumer (the exact evaluation's breaches, the search's penalties, the grid search's
pruning) reads these tables. A rule's ``scale`` turns a breach into a penalty: the breach
divided by the scale, so that breaches of different units weigh alike in a search.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Literal

import numpy as np
from numpy.typing import NDArray

from solver.sequence.spec import LegSpec, SequenceSpec
from solver.window.case import Case
from solver.window.limits import LIMIT_RULES, SURFACE_RULE_TEXT, LimitRule

Scope = Literal["departure", "arrival", "leg", "flyby", "stop", "resonance", "sequence"]


@dataclass(frozen=True)
class SequenceLimitRule:
    """One bound on one quantity of a candidate.

    Attributes
    ----------
    key : str
        The setting that sets the limit (``"limits.c3_max_km2_s2"``,
        ``"leg.altitude_min_km"``, ``"sequence.duration_max_days"``).
    quantity : str
        The candidate's quantity it bounds (``"c3_km2_s2"``, ``"periapsis_altitude_km"``).
    bound : {"max", "min"}
    scope : {"departure", "arrival", "leg", "flyby", "stop", "resonance", "sequence"}
        Where it applies: once at the departure or arrival, on every leg, every flyby, every
        stop, every resonant leg, or once for the whole sequence.
    label, unit : str
        For breach texts.
    scale : float
        Penalty scale, in ``unit``.
    by_magnitude : bool
        Bound the magnitude (DLA).
    window_rule : LimitRule or None
        The one-leg rule it applies, when it is one.
    """

    key: str
    quantity: str
    bound: Literal["max", "min"]
    scope: Scope
    label: str
    unit: str
    scale: float
    by_magnitude: bool = False
    window_rule: LimitRule | None = None

    def violation(self, value, limit: float):
        """How far ``value`` breaks ``limit``, in units of ``scale`` (0 where it holds, and
        where the value is NaN: a missing arc is reported by its reason, not as a breach)."""
        v = np.abs(value) if self.by_magnitude else np.asarray(value, dtype=float)
        with np.errstate(invalid="ignore"):
            over = (v - limit) if self.bound == "max" else (limit - v)
            return np.where(over > 0.0, over / self.scale, 0.0)

    def text(self, value: float, limit: float, where: str = "") -> str:
        sign = ">" if self.bound == "max" else "<"
        shown = abs(value) if self.by_magnitude else value
        unit = f" {self.unit}" if self.unit else ""
        prefix = f"{where} " if where else ""
        return f"{prefix}{self.label} {shown:.4g} {sign} {limit:g}{unit}"


# Where each one-leg limit applies in a sequence, and the scale of its penalty. A rule added to
# LIMIT_RULES without an entry here is refused at import (tests/test_sequence_spec.py says so).
_WINDOW_SCOPES: dict[str, tuple[Scope, float]] = {
    "c3_max_km2_s2": ("departure", 10.0),
    "vinf_arrival_max_km_s": ("arrival", 1.0),
    "dla_max_deg": ("departure", 10.0),
    "tof_min_days": ("leg", 100.0),
    "tof_max_days": ("leg", 100.0),
    # The mass left after the last burn: in a one-leg sequence the last (only) leg's delivered
    # mass is the window engine's. Sequences do not yet count the mass of flyby and stop burns,
    # so a sequence of several legs with this limit is refused (solver.sequence.spec).
    "delivered_mass_min_kg": ("arrival", 100.0),
}


def _window_rules() -> tuple[SequenceLimitRule, ...]:
    out = []
    for rule in LIMIT_RULES:
        if rule.key not in _WINDOW_SCOPES:
            raise RuntimeError(f"limit {rule.key} has no place in a sequence (_WINDOW_SCOPES)")
        scope, scale = _WINDOW_SCOPES[rule.key]
        out.append(
            SequenceLimitRule(
                key=f"limits.{rule.key}",
                quantity=rule.quantity,
                bound=rule.bound,
                scope=scope,
                label=rule.label,
                unit=rule.unit,
                scale=scale,
                by_magnitude=rule.by_magnitude,
                window_rule=rule,
            )
        )
    return tuple(out)


WINDOW_LIMIT_RULES: tuple[SequenceLimitRule, ...] = _window_rules()
"""The one-leg limits, placed in a sequence."""

SEQUENCE_LIMIT_RULES: tuple[SequenceLimitRule, ...] = (
    SequenceLimitRule("leg.tof_min_days", "tof_days", "min", "leg", "TOF", "days", 100.0),
    SequenceLimitRule("leg.tof_max_days", "tof_days", "max", "leg", "TOF", "days", 100.0),
    SequenceLimitRule("leg.stay_min_days", "stay_days", "min", "stop", "stay", "days", 100.0),
    SequenceLimitRule("leg.stay_max_days", "stay_days", "max", "stop", "stay", "days", 100.0),
    SequenceLimitRule(
        "leg.altitude_min_km",
        "periapsis_altitude_km",
        "min",
        "flyby",
        "flyby periapsis altitude",
        "km",
        1000.0,
    ),
    SequenceLimitRule(
        "sequence.flyby_dv_max_km_s", "dv_km_s", "max", "flyby", "flyby Δv", "km/s", 0.1
    ),
    SequenceLimitRule(
        "sequence.unpowered_tolerance_km_s",
        "vinf_mismatch_km_s",
        "max",
        "flyby",
        "unpowered flyby | |v∞ out| - |v∞ in| |",
        "km/s",
        0.1,
    ),
    SequenceLimitRule(
        "sequence.resonance_miss_max_km",
        "miss_km",
        "max",
        "resonance",
        "resonant return miss",
        "km",
        1.0e6,
    ),
    SequenceLimitRule(
        "sequence.duration_max_days", "duration_days", "max", "sequence", "duration", "days", 100.0
    ),
    SequenceLimitRule(
        "window.departure_start", "departure_jd_tdb", "min", "departure", "departure", "JD", 10.0
    ),
    SequenceLimitRule(
        "window.departure_end", "departure_jd_tdb", "max", "departure", "departure", "JD", 10.0
    ),
    SequenceLimitRule(
        "window.arrival_start", "arrival_jd_tdb", "min", "arrival", "arrival", "JD", 10.0
    ),
    SequenceLimitRule(
        "window.arrival_end", "arrival_jd_tdb", "max", "arrival", "arrival", "JD", 10.0
    ),
)
"""The sequence's own limits, in the order they are reported."""

ALL_RULES: tuple[SequenceLimitRule, ...] = WINDOW_LIMIT_RULES + SEQUENCE_LIMIT_RULES

SURFACE_SCALE = 0.1
"""Penalty scale of the surface rule, in central-body radii below the surface."""


def limit_value(
    rule: SequenceLimitRule, case: Case, spec: SequenceSpec, leg: LegSpec | None = None
) -> float | None:
    """The limit ``rule`` sets in this case and sequence (for a leg or node rule, on ``leg``);
    None where it is not set."""
    section, name = rule.key.split(".", 1)
    if rule.window_rule is not None:
        return rule.window_rule.limit(case.limits)
    if section == "leg":
        if leg is None:
            return None
        value = getattr(leg, name, None)
        return None if value is None else float(value)
    if section == "sequence":
        if name == "unpowered_tolerance_km_s":
            return spec.unpowered_tolerance_km_s if spec.unpowered_only else None
        value = getattr(spec, name)
        return None if value is None else float(value)
    if section == "window":
        return float(getattr(case, f"{name}_jd_tdb"))
    raise KeyError(rule.key)  # pragma: no cover - every table key is one of the above


def rules_for(scope: Scope) -> tuple[SequenceLimitRule, ...]:
    """Every rule of ``scope``, one-leg rules first."""
    return tuple(rule for rule in ALL_RULES if rule.scope == scope)


def surface_violation(periapsis_km: NDArray, radius_km: float) -> NDArray[np.float64]:
    """The surface rule as a penalty: how far (in radii, per :data:`SURFACE_SCALE`) an arc's
    periapsis lies inside the central body; 0 when it clears it or the body has no radius."""
    if not math.isfinite(radius_km):
        return np.zeros(np.shape(periapsis_km))
    with np.errstate(invalid="ignore"):
        depth = (radius_km - np.asarray(periapsis_km, float)) / radius_km
        return np.where(depth >= 0.0, depth / SURFACE_SCALE + 1e-3, 0.0)


__all__ = [
    "ALL_RULES",
    "SEQUENCE_LIMIT_RULES",
    "SURFACE_RULE_TEXT",
    "SURFACE_SCALE",
    "WINDOW_LIMIT_RULES",
    "SequenceLimitRule",
    "limit_value",
    "rules_for",
    "surface_violation",
]
