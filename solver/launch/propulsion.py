"""The spacecraft's propulsion systems: a specific impulse each, and the burns each one makes.

A burn is named by where it happens. A single-leg case has two: ``"departure"`` (from the
parking orbit, when the spacecraft and not the launch vehicle makes it, or leaving a body
without mass) and ``"arrival"`` (into the capture orbit, or matching the target's velocity).
Multi-leg sequences add their flybys and stops to :data:`BURNS`. Each burn is made by at most
one system.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

from solver.errors import InputError
from solver.launch._input import array_of_tables, known_keys, number, required, text

BURNS: tuple[str, ...] = ("departure", "arrival")
"""Burns a propulsion system can make, in flight order."""
ISP_MAX_S = 1.0e5
"""Largest specific impulse accepted, s (electric thrusters reach a few thousand)."""
SYSTEM_KEYS = frozenset({"name", "isp_s", "burns"})


@dataclass(frozen=True)
class PropulsionSystem:
    """One propulsion system of the spacecraft.

    Attributes
    ----------
    name : str
    isp_s : float
        Specific impulse, s (> 0).
    burns : tuple of str
        The burns it makes, from :data:`BURNS`.
    """

    name: str
    isp_s: float
    burns: tuple[str, ...]

    def to_toml(self) -> dict[str, Any]:
        return {"name": self.name, "isp_s": self.isp_s, "burns": list(self.burns)}


def propulsion_from_toml(entries: Any, key: str = "propulsion") -> tuple[PropulsionSystem, ...]:
    """Validate ``[[propulsion]]`` tables: ``name``, ``isp_s`` > 0, ``burns`` (from
    :data:`BURNS`, each burn made by one system only)."""
    systems: list[PropulsionSystem] = []
    taken: dict[str, str] = {}
    accepted_burns = "an array of burns from " + ", ".join(f"'{b}'" for b in BURNS)
    for index, entry in enumerate(
        array_of_tables(key, entries, "an array of tables ([[propulsion]])"), start=1
    ):
        where = f"{key}[{index}]"
        known_keys(where, entry, SYSTEM_KEYS)
        name = text(f"{where}.name", required(where, entry, "name", "a name for the system"))
        isp = number(
            f"{where}.isp_s",
            required(where, entry, "isp_s", "the specific impulse, s"),
            low=0.0,
            low_open=True,
            high=ISP_MAX_S,
            unit="s",
        )
        burns = required(where, entry, "burns", accepted_burns)
        if not isinstance(burns, list) or not burns:
            raise InputError(f"{where}.burns", burns, accepted_burns)
        clean: list[str] = []
        for burn in burns:
            if not isinstance(burn, str) or burn.strip().lower() not in BURNS:
                raise InputError(f"{where}.burns", burn, accepted_burns)
            burn = burn.strip().lower()
            if burn in taken:
                raise InputError(
                    f"{where}.burns", burn, f"a burn no other system makes ({taken[burn]} does)"
                )
            taken[burn] = name
            clean.append(burn)
        systems.append(PropulsionSystem(name, isp, tuple(clean)))
    return tuple(systems)


def system_for_burn(systems: tuple[PropulsionSystem, ...], burn: str) -> PropulsionSystem | None:
    """The system that makes ``burn``, or None."""
    return next((s for s in systems if burn in s.burns), None)


__all__ = ["BURNS", "PropulsionSystem", "propulsion_from_toml", "system_for_burn"]
