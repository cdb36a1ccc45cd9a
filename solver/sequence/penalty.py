"""How a search ranks candidates: the objective plus weighted breaches, one set of constants.

Read by the numpy stages (:mod:`solver.sequence.evaluate`) and the compiled pass
(:mod:`solver.sequence.fused`) alike.
"""

from __future__ import annotations

PENALTY_WEIGHT = 1.0e4
"""Objective units one unit of breach (a limit's scale) costs a search: large enough that any
candidate within limits ranks before any outside them."""

MISSING = 1.0e12
"""What a search sees for a candidate with a leg that has no arc at all."""

TURN_SCALE_DEG = 10.0
"""Penalty scale of the turn a flyby lacks below its lowest periapsis altitude, deg."""

OBJECTIVE_SCALE = {
    "dv_total_km_s": 1.0,
    "c3_km2_s2": 10.0,
    "vinf_arrival_km_s": 1.0,
    "duration_days": 100.0,
}
"""Each objective's unit of penalty weight (a C3 of 10 km²/s² weighs as 1 km/s of Δv)."""

__all__ = ["MISSING", "OBJECTIVE_SCALE", "PENALTY_WEIGHT", "TURN_SCALE_DEG"]
