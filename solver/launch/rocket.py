"""The rocket equation, vectorized: what each burn costs in propellant.

Tsiolkovsky's equation Δv = Isp·g0·ln(m0/m1) (docs/references.md 11.1), solved for the mass after
an impulsive burn, m1 = m0·exp(-Δv/(Isp·g0)), and for the propellant it uses, m0 - m1. Burns are
impulsive (no finite-burn or gravity losses): the Δv of a patched-conic design.
"""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np
from numpy.typing import ArrayLike, NDArray

from solver.constants import STANDARD_GRAVITY_KM_S2


def mass_after_burn_kg(m0_kg: ArrayLike, dv_km_s: ArrayLike, isp_s: float) -> NDArray[np.float64]:
    """Mass after an impulsive burn of ``dv_km_s`` with specific impulse ``isp_s``.

    Parameters
    ----------
    m0_kg : array_like
        Mass before the burn, kg.
    dv_km_s : array_like
        Velocity change, km/s (>= 0); broadcast with ``m0_kg``.
    isp_s : float
        Specific impulse, s (> 0).

    Returns
    -------
    ndarray
        m0·exp(-Δv/(Isp·g0)), kg; NaN where an input is NaN.
    """
    return np.asarray(m0_kg, dtype=float) * np.exp(
        -np.asarray(dv_km_s, dtype=float) / (isp_s * STANDARD_GRAVITY_KM_S2)
    )


def propellant_kg(m0_kg: ArrayLike, dv_km_s: ArrayLike, isp_s: float) -> NDArray[np.float64]:
    """Propellant an impulsive burn uses, m0·(1 - exp(-Δv/(Isp·g0))), kg.

    Written with ``expm1`` so that small burns keep their digits.
    """
    return -np.asarray(m0_kg, dtype=float) * np.expm1(
        -np.asarray(dv_km_s, dtype=float) / (isp_s * STANDARD_GRAVITY_KM_S2)
    )


def dv_for_mass_ratio_km_s(mass_ratio: ArrayLike, isp_s: float) -> NDArray[np.float64]:
    """The Δv a mass ratio m0/m1 buys at ``isp_s``: Isp·g0·ln(m0/m1), km/s."""
    return isp_s * STANDARD_GRAVITY_KM_S2 * np.log(np.asarray(mass_ratio, dtype=float))


def burn_sequence_kg(
    injected_kg: ArrayLike, burns: Sequence[tuple[ArrayLike, float | None]]
) -> tuple[list[NDArray[np.float64]], NDArray[np.float64]]:
    """Propellant of each burn in turn and the mass left after the last one.

    Parameters
    ----------
    injected_kg : array_like
        Spacecraft mass before the first burn, kg.
    burns : sequence of (dv_km_s, isp_s or None)
        In flight order. ``isp_s`` None means no propulsion system makes this burn: a burn of
        zero Δv then costs nothing, any other gives NaN (and NaN for everything after it).

    Returns
    -------
    propellant_kg : list of ndarray
        One array per burn, broadcast over the inputs.
    final_kg : ndarray
        Mass after the last burn (the delivered mass), kg.
    """
    mass = np.asarray(injected_kg, dtype=float)
    used: list[NDArray[np.float64]] = []
    for dv, isp in burns:
        dv = np.asarray(dv, dtype=float)
        if isp is None:
            spent = np.where(dv == 0.0, 0.0, np.nan) * mass
        else:
            spent = propellant_kg(mass, dv, isp)
        used.append(np.asarray(spent, dtype=float))
        mass = mass - spent
    return used, np.asarray(mass, dtype=float)


__all__ = ["burn_sequence_kg", "dv_for_mass_ratio_km_s", "mass_after_burn_kg", "propellant_kg"]
