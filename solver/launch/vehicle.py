"""Launch vehicles: injected mass against C3 from a performance table, never extrapolated.

A vehicle is described by a table of C3 (km²/s²) against the mass it injects onto a departure
hyperbola of that energy (kg). Between the table's points the mass is interpolated with scipy's
PCHIP (``PchipInterpolator``, Fritsch & Carlson 1980; docs/references.md 11.2): a piecewise cubic
that keeps the table's monotony (a curve that falls never rises between points, as a cubic
spline may) and passes through every point. Outside the table's C3 range there is no mass, with
a reason: a curve is not extrapolated.

Deductions, in this order: the fraction ``margin_fraction`` of the curve's mass is held back (a
performance reserve), then ``adapter_kg`` (the payload adapter, which flies but is not the
spacecraft) is subtracted.
"""

from __future__ import annotations

import functools
from dataclasses import dataclass
from typing import Any

import numpy as np
from numpy.typing import ArrayLike, NDArray
from scipy.interpolate import PchipInterpolator

from solver.errors import InputError
from solver.launch._input import array_of_tables, known_keys, number, required, table, text
from solver.reasons import MassReason

C3_LIMIT_KM2_S2 = 1.0e4
"""Table C3 values are accepted within plus and minus this."""
MASS_LIMIT_KG = 1.0e7
VEHICLE_KEYS = frozenset({"name", "performance", "adapter_kg", "margin_fraction"})
ROW_KEYS = frozenset({"c3_km2_s2", "mass_kg"})


@dataclass(frozen=True)
class LaunchVehicle:
    """A launch vehicle's performance: injected mass against C3.

    Attributes
    ----------
    name : str
        How the case and the outputs name it.
    c3_km2_s2 : tuple of float
        Table C3 values, strictly increasing, km²/s².
    mass_kg : tuple of float
        Injected mass at each C3, kg: >= 0 and never increasing with C3.
    adapter_kg : float
        Deducted from the curve's mass (payload adapter), kg.
    margin_fraction : float
        Fraction of the curve's mass held back as a reserve, 0 to below 1.
    """

    name: str
    c3_km2_s2: tuple[float, ...]
    mass_kg: tuple[float, ...]
    adapter_kg: float = 0.0
    margin_fraction: float = 0.0

    @property
    def c3_range_km2_s2(self) -> tuple[float, float]:
        """The C3 range the table covers, km²/s² (no mass outside it)."""
        return self.c3_km2_s2[0], self.c3_km2_s2[-1]

    def curve_mass_kg(self, c3_km2_s2: ArrayLike) -> NDArray[np.float64]:
        """The table's mass at each C3, PCHIP-interpolated; NaN outside the table (or for NaN)."""
        c3 = np.asarray(c3_km2_s2, dtype=float)
        return np.asarray(_interpolator(self.c3_km2_s2, self.mass_kg)(c3), dtype=float)

    def injected_mass_kg(self, c3_km2_s2: ArrayLike) -> NDArray[np.float64]:
        """Mass the vehicle injects for the spacecraft at each C3, after the deductions, kg.

        NaN outside the table, and where the deductions leave nothing (see :meth:`reasons`).
        """
        mass = self.curve_mass_kg(c3_km2_s2) * (1.0 - self.margin_fraction) - self.adapter_kg
        with np.errstate(invalid="ignore"):
            return np.where(mass > 0.0, mass, np.nan)

    def reasons(self, c3_km2_s2: ArrayLike) -> NDArray[np.int8]:
        """Why :meth:`injected_mass_kg` has no mass at each C3 (``MassReason``, OK where it has)."""
        c3 = np.asarray(c3_km2_s2, dtype=float)
        low, high = self.c3_range_km2_s2
        mass = self.injected_mass_kg(c3)
        with np.errstate(invalid="ignore"):
            code = np.select(
                [np.isnan(c3), c3 < low, c3 > high, np.isnan(mass)],
                [
                    MassReason.NO_ARC,
                    MassReason.C3_BELOW_TABLE,
                    MassReason.C3_ABOVE_TABLE,
                    MassReason.NOTHING_LEFT_AFTER_DEDUCTIONS,
                ],
                MassReason.OK,
            )
        return code.astype(np.int8)

    def to_toml(self) -> dict[str, Any]:
        """The vehicle as a ``[[vehicles]]`` table (round-trips through
        :func:`vehicles_from_toml`)."""
        out: dict[str, Any] = {"name": self.name}
        if self.adapter_kg:
            out["adapter_kg"] = self.adapter_kg
        if self.margin_fraction:
            out["margin_fraction"] = self.margin_fraction
        out["performance"] = [
            {"c3_km2_s2": c3, "mass_kg": m}
            for c3, m in zip(self.c3_km2_s2, self.mass_kg, strict=True)
        ]
        return out


@functools.lru_cache(maxsize=64)
def _interpolator(c3: tuple[float, ...], mass: tuple[float, ...]) -> PchipInterpolator:
    # Built once per table: the grid evaluates it for every chunk of cells.
    return PchipInterpolator(np.array(c3), np.array(mass), extrapolate=False)


def vehicles_from_toml(entries: Any, key: str = "vehicles") -> tuple[LaunchVehicle, ...]:
    """Validate ``[[vehicles]]`` tables; every error names its key and what is accepted.

    Each vehicle needs a ``name`` (unique) and a ``performance`` array of at least two
    ``{c3_km2_s2, mass_kg}`` rows with C3 strictly increasing and mass >= 0, never increasing
    with C3 (more energy never lifts more mass); optional ``adapter_kg`` (>= 0) and
    ``margin_fraction`` (0 to below 1).
    """
    vehicles: list[LaunchVehicle] = []
    names: set[str] = set()
    for index, entry in enumerate(
        array_of_tables(key, entries, "an array of tables ([[vehicles]])"), start=1
    ):
        where = f"{key}[{index}]"
        known_keys(where, entry, VEHICLE_KEYS)
        name = text(f"{where}.name", required(where, entry, "name", "a vehicle name"))
        if name.lower() in names:
            raise InputError(f"{where}.name", name, "a name no other vehicle of the case has")
        names.add(name.lower())
        rows = required(
            where, entry, "performance", "an array of {c3_km2_s2, mass_kg} rows, C3 increasing"
        )
        c3, mass = _performance(f"{where}.performance", rows)
        adapter = number(
            f"{where}.adapter_kg",
            entry.get("adapter_kg", 0.0),
            low=0.0,
            high=MASS_LIMIT_KG,
            unit="kg",
        )
        margin = entry.get("margin_fraction", 0.0)
        margin = number(f"{where}.margin_fraction", margin, low=0.0, high=0.99)
        vehicles.append(LaunchVehicle(name, c3, mass, adapter, margin))
    return tuple(vehicles)


def _performance(key: str, rows: Any) -> tuple[tuple[float, ...], tuple[float, ...]]:
    what = "an array of at least two {c3_km2_s2, mass_kg} rows, C3 increasing"
    if not isinstance(rows, list) or len(rows) < 2:
        raise InputError(key, rows, what)
    c3: list[float] = []
    mass: list[float] = []
    for index, row in enumerate(rows, start=1):
        where = f"{key}[{index}]"
        row = table(where, row, "a {c3_km2_s2, mass_kg} row")
        known_keys(where, row, ROW_KEYS)
        x = number(
            f"{where}.c3_km2_s2",
            required(where, row, "c3_km2_s2", "C3 of this row, km²/s²"),
            low=-C3_LIMIT_KM2_S2,
            high=C3_LIMIT_KM2_S2,
            unit="km²/s²",
        )
        m = number(
            f"{where}.mass_kg",
            required(where, row, "mass_kg", "injected mass at this C3, kg"),
            low=0.0,
            high=MASS_LIMIT_KG,
            unit="kg",
        )
        if c3 and x <= c3[-1]:
            raise InputError(
                f"{where}.c3_km2_s2", row["c3_km2_s2"], f"above the previous row's C3 ({c3[-1]:g})"
            )
        if mass and m > mass[-1]:
            raise InputError(
                f"{where}.mass_kg",
                row["mass_kg"],
                f"at most the previous row's mass ({mass[-1]:g} kg): more C3 never lifts more",
            )
        c3.append(x)
        mass.append(m)
    if mass[0] <= 0.0:
        raise InputError(f"{key}[1].mass_kg", rows[0]["mass_kg"], "a mass above 0 kg")
    return tuple(c3), tuple(mass)


def vehicle_named(vehicles: tuple[LaunchVehicle, ...], name: str) -> LaunchVehicle | None:
    """The vehicle of that name (case-insensitive), or None."""
    wanted = name.strip().lower()
    return next((v for v in vehicles if v.name.lower() == wanted), None)


__all__ = ["LaunchVehicle", "vehicle_named", "vehicles_from_toml"]
