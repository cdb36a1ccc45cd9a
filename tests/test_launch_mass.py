"""The rocket equation and launch vehicle performance tables (solver.launch.rocket, .vehicle).

Checks against hand-computed values (docs/references.md 11.1, 11.2) and against scipy's PCHIP used
directly; the parser of ``[[vehicles]]`` tables with hypothesis.
"""

from __future__ import annotations

import itertools
import math

import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st

from solver.errors import InputError
from solver.launch.propulsion import propulsion_from_toml
from solver.launch.rocket import (
    burn_sequence_kg,
    dv_for_mass_ratio_km_s,
    mass_after_burn_kg,
    propellant_kg,
)
from solver.launch.vehicle import LaunchVehicle, vehicles_from_toml
from solver.reasons import MassReason

G0_KM_S2 = 9.80665e-3  # standard gravity, exact by definition (docs/references.md 11.1)


# ---------------------------------------------------------------------------------------------
# Rocket equation, Δv = Isp·g0·ln(m0/m1) [MEMORY, common practice; docs/references.md 11.1]


def test_a_burn_of_isp_times_g0_leaves_m0_over_e():
    # By hand: Δv = 300 s × 9.80665 m/s² = 2941.995 m/s; m1 = 1000 kg / e = 367.8794 kg.
    assert mass_after_burn_kg(1000.0, 2.941995, 300.0) == pytest.approx(367.879441, rel=1e-9)
    assert propellant_kg(1000.0, 2.941995, 300.0) == pytest.approx(632.120559, rel=1e-9)


def test_a_burn_of_isp_g0_ln2_halves_the_mass(validation):
    # By hand: Δv = 300 × 9.80665 × ln 2 = 2941.995 × 0.693147 = 2039.2355 m/s halves the mass.
    dv = 300.0 * 9.80665 * 0.6931471805599453 / 1000.0
    assert dv == pytest.approx(2.0392355, abs=1e-7)
    assert mass_after_burn_kg(1000.0, dv, 300.0) == pytest.approx(500.0, rel=1e-12)
    validation.record(
        "rocket equation: a burn of Isp·g0·ln 2 halves the mass",
        source="Tsiolkovsky's rocket equation, g0 = 9.80665 m/s² (docs/references.md 11.1)",
        tag="MEMORY; common practice",
        measured=abs(float(mass_after_burn_kg(1000.0, dv, 300.0)) - 500.0),
        tolerance=5e-10,
        unit="kg",
    )
    assert dv_for_mass_ratio_km_s(2.0, 300.0) == pytest.approx(dv, rel=1e-15)


def test_no_burn_costs_nothing_and_small_burns_keep_their_digits():
    assert propellant_kg(1000.0, 0.0, 300.0) == 0.0
    # 1 mm/s at 300 s: m0·Δv/(Isp·g0) to first order = 1000 × 1e-6 / 2.941995e-3 kg.
    assert propellant_kg(1000.0, 1e-6, 300.0) == pytest.approx(1e-3 / 2.941995, rel=1e-6)


def test_burns_in_turn_multiply_their_mass_ratios():
    # Two halving burns at different Isp: 1000 -> 500 -> 250 kg.
    dv1 = 300.0 * G0_KM_S2 * math.log(2.0)
    dv2 = 450.0 * G0_KM_S2 * math.log(2.0)
    (p1, p2), final = burn_sequence_kg(1000.0, [(dv1, 300.0), (dv2, 450.0)])
    assert (float(p1), float(p2), float(final)) == pytest.approx((500.0, 250.0, 250.0))


def test_a_burn_nobody_makes_has_no_mass_unless_it_is_zero():
    (p1, p2), final = burn_sequence_kg(
        np.array([1000.0, 1000.0]), [(np.array([0.0, 0.0]), None), (np.array([1.0, 0.0]), None)]
    )
    assert p1.tolist() == [0.0, 0.0]
    assert math.isnan(p2[0]) and p2[1] == 0.0
    assert math.isnan(final[0]) and final[1] == 1000.0


# ---------------------------------------------------------------------------------------------
# Vehicle tables: PCHIP between points, nothing outside (docs/references.md 11.2)

HAND = LaunchVehicle("hand", (0.0, 10.0, 20.0), (1000.0, 800.0, 700.0))


def test_pchip_against_hand_computed_values(validation):
    # By hand (Fritsch-Carlson derivatives as scipy documents them): secants -20 and -10 per
    # km²/s²; interior derivative, equal steps: 60 / (30/-20 + 30/-10) = -40/3; end derivatives
    # ((2h1 + h2)m1 - h1 m2)/(h1 + h2) = (30·-20 - 10·-10)/20 = -25 and (30·-10 - 10·-20)/20 = -5.
    # Cubic Hermite at mid-interval (h = 10): (y0 + y1)/2 + h(d0 - d1)/8.
    #   at 5:  900 + 10·(-25 + 40/3)/8 = 885.416667;  at 15: 750 + 10·(-40/3 + 5)/8 = 739.583333
    values = HAND.curve_mass_kg([0.0, 5.0, 10.0, 15.0, 20.0])
    expected = [1000.0, 885.4166667, 800.0, 739.5833333, 700.0]
    np.testing.assert_allclose(values, expected, rtol=1e-9)
    validation.record(
        "launch vehicle table, PCHIP interpolation: largest difference from hand-computed values",
        source="Fritsch-Carlson derivatives as scipy documents them (docs/references.md 11.2)",
        tag="COMPUTED by hand",
        measured=float(np.abs(values - expected).max()),
        tolerance=1e-6,
        unit="kg",
    )


def test_deductions_margin_then_adapter():
    vehicle = LaunchVehicle(
        "hand", HAND.c3_km2_s2, HAND.mass_kg, adapter_kg=50.0, margin_fraction=0.05
    )
    # 885.416667 × 0.95 - 50 = 791.145833
    assert float(vehicle.injected_mass_kg(5.0)) == pytest.approx(791.1458333, rel=1e-9)


def test_the_table_is_never_extrapolated():
    c3 = np.array([-0.001, 20.001, math.nan, 12.0])
    mass = HAND.injected_mass_kg(c3)
    assert np.isnan(mass[:3]).all() and math.isfinite(mass[3])
    assert HAND.reasons(c3).tolist() == [
        MassReason.C3_BELOW_TABLE,
        MassReason.C3_ABOVE_TABLE,
        MassReason.NO_ARC,
        MassReason.OK,
    ]


def test_deductions_that_leave_nothing_give_no_mass_with_a_reason():
    heavy_adapter = LaunchVehicle("h", HAND.c3_km2_s2, HAND.mass_kg, adapter_kg=750.0)
    assert math.isnan(float(heavy_adapter.injected_mass_kg(20.0)))
    assert int(heavy_adapter.reasons(20.0)) == MassReason.NOTHING_LEFT_AFTER_DEDUCTIONS
    assert float(heavy_adapter.injected_mass_kg(0.0)) == pytest.approx(250.0)


def test_pchip_keeps_a_falling_table_falling_where_a_cubic_spline_would_not():
    """Why PCHIP: a spline through a table with a sharp knee rises between points."""
    from scipy.interpolate import CubicSpline

    c3 = (0.0, 1.0, 2.0, 3.0, 4.0)
    mass = (1000.0, 990.0, 400.0, 390.0, 385.0)
    vehicle = LaunchVehicle("knee", c3, mass)
    x = np.linspace(0.0, 4.0, 4001)
    assert (np.diff(vehicle.curve_mass_kg(x)) <= 1e-9).all()
    assert (np.diff(CubicSpline(c3, mass)(x)) > 0).any()


# ---------------------------------------------------------------------------------------------
# Parsers: one error naming the key


def _vehicle(rows, **extra):
    return [{"name": "V", "performance": rows, **extra}]


def _rows(*pairs):
    return [{"c3_km2_s2": c, "mass_kg": m} for c, m in pairs]


@pytest.mark.parametrize(
    ("entries", "key"),
    [
        (_vehicle(_rows((0, 900), (10, 800), (5, 700))), "vehicles[1].performance[3].c3_km2_s2"),
        (_vehicle(_rows((0, 900), (10, 950))), "vehicles[1].performance[2].mass_kg"),
        (_vehicle(_rows((0, 900), (10, 800), (20, -1))), "vehicles[1].performance[3].mass_kg"),
        (_vehicle(_rows((0, 900))), "vehicles[1].performance"),
        (_vehicle(_rows((0, 0), (10, 0))), "vehicles[1].performance[1].mass_kg"),
        (_vehicle(_rows((0, 900), (10, 800)), margin_fraction=1.2), "vehicles[1].margin_fraction"),
        (_vehicle(_rows((0, 900), (10, 800)), adapter_kg=-3), "vehicles[1].adapter_kg"),
        (_vehicle(_rows((0, 900), (10, 800)), colour="red"), "vehicles[1].colour"),
        ([{"performance": _rows((0, 900), (10, 800))}], "vehicles[1].name"),
        (
            _vehicle([{"c3_km2_s2": 0, "mass_kg": 9}, {"c3": 1, "mass_kg": 8}]),
            "vehicles[1].performance[2].c3",
        ),
        (_vehicle(_rows((0, 900), (10, 800))) * 2, "vehicles[2].name"),
        ({"name": "V"}, "vehicles"),
    ],
)
def test_bad_vehicle_tables_name_their_key(entries, key):
    with pytest.raises(InputError) as info:
        vehicles_from_toml(entries)
    assert info.value.field == key


@pytest.mark.parametrize(
    ("entries", "key"),
    [
        ([{"name": "main", "isp_s": 0, "burns": ["arrival"]}], "propulsion[1].isp_s"),
        ([{"name": "main", "isp_s": -310, "burns": ["arrival"]}], "propulsion[1].isp_s"),
        ([{"name": "main", "isp_s": 310, "burns": ["landing"]}], "propulsion[1].burns"),
        ([{"name": "main", "isp_s": 310, "burns": []}], "propulsion[1].burns"),
        ([{"name": "main", "isp_s": 310}], "propulsion[1].burns"),
        (
            [
                {"name": "a", "isp_s": 310, "burns": ["arrival"]},
                {"name": "b", "isp_s": 220, "burns": ["arrival"]},
            ],
            "propulsion[2].burns",
        ),
    ],
)
def test_bad_propulsion_names_its_key(entries, key):
    with pytest.raises(InputError) as info:
        propulsion_from_toml(entries)
    assert info.value.field == key


@st.composite
def tables(draw):
    n = draw(st.integers(min_value=0, max_value=7))
    c3 = draw(st.lists(st.floats(-100, 200, allow_nan=False), min_size=n, max_size=n))
    mass = draw(st.lists(st.floats(-10, 20000, allow_nan=False), min_size=n, max_size=n))
    return c3, mass


@given(tables())
def test_the_parser_accepts_exactly_the_valid_tables(table):
    c3, mass = table
    valid = (
        len(c3) >= 2
        and all(b > a for a, b in itertools.pairwise(c3))
        and all(b <= a for a, b in itertools.pairwise(mass))
        and all(m >= 0 for m in mass)
        and mass[0] > 0
    )
    entries = _vehicle([{"c3_km2_s2": c, "mass_kg": m} for c, m in zip(c3, mass, strict=True)])
    if not valid:
        with pytest.raises(InputError) as info:
            vehicles_from_toml(entries)
        assert info.value.field.startswith("vehicles[1].performance")
        return
    (vehicle,) = vehicles_from_toml(entries)
    np.testing.assert_allclose(vehicle.curve_mass_kg(c3), mass, rtol=1e-12, atol=1e-9)
    between = np.linspace(c3[0], c3[-1], 200)
    assert (np.diff(vehicle.curve_mass_kg(between)) <= 1e-9 * max(mass)).all()  # monotone
    assert again_round_trips(vehicle)


def again_round_trips(vehicle: LaunchVehicle) -> bool:
    return vehicles_from_toml([vehicle.to_toml()]) == (vehicle,)
