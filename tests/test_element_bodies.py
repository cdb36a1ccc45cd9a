"""Element bodies: round trip of their elements, two-body motion against scipy's DOP853, the CSV
reader's errors, the registry, and many bodies at many epochs."""

from __future__ import annotations

import io
import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy.integrate import solve_ivp

from solver.constants import AU_KM, GM_MARS_SYSTEM_KM3_S2, GM_SUN_KM3_S2
from solver.ephemeris.bodies import default_registry
from solver.ephemeris.element_bodies import ElementBody, ElementSet
from solver.ephemeris.element_input import element_body, read_element_csv
from solver.ephemeris.frames import rotate
from solver.ephemeris.states import element_set_states, states
from solver.errors import InputError
from solver.mechanics.kepler import state_to_elements


def _asteroid(**overrides) -> ElementBody:
    values = dict(
        epoch_utc="2031-03-01T00:00:00Z",
        semi_major_axis_au=2.37,
        eccentricity=0.21,
        inclination_deg=7.5,
        raan_deg=103.0,
        arg_periapsis_deg=151.0,
        mean_anomaly_deg=42.0,
    )
    values.update(overrides)
    return element_body("Tessellate", **values)  # invented demo body


def _mars_flyby() -> ElementBody:
    return element_body(
        "Probe-7",  # invented
        central_body="Mars",
        epoch_jd_tdb=2462000.25,
        semi_major_axis_km=-5000.0,
        eccentricity=1.9,
        inclination_deg=65.0,
        raan_deg=20.0,
        arg_periapsis_deg=-40.0,
        true_anomaly_deg=-60.0,
        frame="equator",
    )


def _angle_diff(a, b):
    return abs((a - b + math.pi) % (2 * math.pi) - math.pi)


def _own_frame_state(body: ElementBody, jd):
    reg = default_registry().with_bodies(body)
    frame = "equator" if body.frame == "equator" else body.frame
    return states(body.name, jd, central=body.central_body, frame=frame, registry=reg)


@pytest.mark.parametrize("make", [_asteroid, _mars_flyby], ids=["ellipse-sun", "hyperbola-mars"])
def test_round_trip_at_epoch(make):
    body = make()
    r, v = _own_frame_state(body, body.epoch_jd_tdb)
    el = state_to_elements(r, v, body.mu_km3_s2)
    assert float(el.a_km) == pytest.approx(body.semi_major_axis_km, rel=1e-12)
    assert float(el.e) == pytest.approx(body.eccentricity, rel=1e-12)
    assert math.degrees(float(el.inclination_rad)) == pytest.approx(body.inclination_deg, abs=1e-10)
    for got, want in [
        (el.raan_rad, body.raan_deg),
        (el.arg_periapsis_rad, body.arg_periapsis_deg),
    ]:
        assert _angle_diff(float(got), math.radians(want)) < 1e-11
    if body.name == "Probe-7":
        assert _angle_diff(float(el.true_anomaly_rad), math.radians(-60.0)) < 1e-11


def _integrate(r0, v0, mu, t_s):
    def rhs(_, y):
        r = y[:3]
        return np.concatenate([y[3:], -mu * r / np.linalg.norm(r) ** 3])

    sol = solve_ivp(rhs, (0.0, t_s[-1]), np.concatenate([r0, v0]), method="DOP853",
                    t_eval=t_s, rtol=1e-12, atol=1e-9)  # fmt: skip
    assert sol.success
    return sol.y[:3].T, sol.y[3:].T


@pytest.mark.parametrize(
    ("make", "span_days"), [(_asteroid, 1500.0), (_mars_flyby, 2.0)], ids=["ellipse", "hyperbola"]
)
def test_propagation_matches_independent_integration(make, span_days):
    body = make()
    reg = default_registry().with_bodies(body)
    t_days = np.linspace(0.0, span_days, 9)
    jd = body.epoch_jd_tdb + t_days
    r, v = states(body.name, jd, central=body.central_body, registry=reg)
    r_int, v_int = _integrate(r[0], v[0], body.mu_km3_s2, t_days * 86400.0)
    scale_r = np.linalg.norm(r_int, axis=-1)
    scale_v = np.linalg.norm(v_int, axis=-1)
    assert np.max(np.linalg.norm(r - r_int, axis=-1) / scale_r) < 1e-8
    assert np.max(np.linalg.norm(v - v_int, axis=-1) / scale_v) < 1e-8


def test_period_of_an_ellipse():
    body = _asteroid()
    period_days = 2 * math.pi * math.sqrt((2.37 * AU_KM) ** 3 / GM_SUN_KM3_S2) / 86400.0
    reg = default_registry().with_bodies(body)
    r0, v0 = states(body.name, body.epoch_jd_tdb, registry=reg, central="sun")
    r1, v1 = states(body.name, body.epoch_jd_tdb + period_days, registry=reg, central="sun")
    np.testing.assert_allclose(r1, r0, rtol=0, atol=1e-3)
    np.testing.assert_allclose(v1, v0, rtol=0, atol=1e-9)


def test_frames_of_elements():
    # Sun-centred: ecliptic by default; an inclination of 0 stays in the ecliptic.
    flat = _asteroid(inclination_deg=0.0)
    r, _ = _own_frame_state(flat, flat.epoch_jd_tdb + np.arange(5.0) * 100.0)
    np.testing.assert_allclose(r[:, 2], 0.0, atol=1e-6)
    # Mars-centred in its equator frame: the orbit normal is at the stated inclination from
    # the Mars pole.
    probe = _mars_flyby()
    reg = default_registry().with_bodies(probe)
    r, v = states("probe-7", probe.epoch_jd_tdb, central="mars", registry=reg)
    h = np.cross(r, v)
    mars = default_registry().get("mars")
    ra, dec = np.radians(mars.pole_ra_deg), np.radians(mars.pole_dec_deg)
    pole = np.array([np.cos(dec) * np.cos(ra), np.cos(dec) * np.sin(ra), np.sin(dec)])
    inc = np.degrees(np.arccos(h @ pole / np.linalg.norm(h)))
    assert inc == pytest.approx(65.0, abs=1e-9)
    assert probe.mu_km3_s2 == GM_MARS_SYSTEM_KM3_S2


def test_default_frames_by_central():
    assert _asteroid().frame == "ecliptic"
    moon_orbiter = element_body(
        "Lantern", central_body="moon", epoch_jd_tdb=2461000.5, semi_major_axis_km=2000.0,
        eccentricity=0.01, inclination_deg=90.0, raan_deg=0.0, arg_periapsis_deg=0.0,
        mean_anomaly_deg=0.0,
    )  # fmt: skip
    assert moon_orbiter.frame == "icrf"


def test_chain_of_centrals():
    # A body about an element body about the Sun: its heliocentric state is the sum.
    planet = element_body(
        "Corvin", epoch_jd_tdb=2461000.5, semi_major_axis_au=3.0, eccentricity=0.05,
        inclination_deg=2.0, raan_deg=10.0, arg_periapsis_deg=20.0, mean_anomaly_deg=30.0,
        gm_km3_s2=5.0e6, radius_km=30000.0,
    )  # fmt: skip
    reg = default_registry().with_bodies(planet)
    moon = element_body(
        "Corvin I", central_body="corvin", epoch_jd_tdb=2461000.5, semi_major_axis_km=4.0e5,
        eccentricity=0.0, inclination_deg=0.0, raan_deg=0.0, arg_periapsis_deg=0.0,
        mean_anomaly_deg=0.0, registry=reg,
    )  # fmt: skip
    reg = reg.with_bodies(moon)
    assert moon.mu_km3_s2 == 5.0e6
    jd = np.array([2461000.5, 2461100.5])
    r_moon, _ = states("corvin i", jd, central="sun", registry=reg)
    r_planet, _ = states("corvin", jd, central="sun", registry=reg)
    r_rel, _ = states("corvin i", jd, central="corvin", registry=reg)
    np.testing.assert_allclose(r_moon, r_planet + r_rel, rtol=1e-14)
    np.testing.assert_allclose(np.linalg.norm(r_rel, axis=-1), 4.0e5, rtol=1e-12)
    r_earth, _ = states("corvin i", jd, central="earth", registry=reg)
    r_e, _ = states("earth", jd, central="sun")
    np.testing.assert_allclose(r_earth, r_moon - r_e, atol=1e-4)


def test_registry_is_not_mutated():
    body = _asteroid()
    reg = default_registry().with_bodies(body)
    assert "tessellate" in reg and "TESSELLATE" in reg
    assert "tessellate" not in default_registry()
    with pytest.raises(InputError, match="Tessellate"):
        reg.with_bodies(_asteroid())
    with pytest.raises(InputError, match="name"):
        default_registry().with_bodies(element_body(
            "Mars", epoch_jd_tdb=2461000.5, semi_major_axis_au=1.5, eccentricity=0.1,
            inclination_deg=1.0, raan_deg=0.0, arg_periapsis_deg=0.0, mean_anomaly_deg=0.0,
        ))  # fmt: skip


def test_with_bodies_rejects_other_things():
    with pytest.raises(InputError, match="ElementBody"):
        default_registry().with_bodies("mars")


@settings(max_examples=60, deadline=None)
@given(
    a_au=st.floats(0.3, 40.0),
    e=st.floats(0.0, 0.95),
    inc=st.floats(0.5, 179.5),
    raan=st.floats(0.0, 359.9),
    argp=st.floats(0.0, 359.9),
    m0=st.floats(-180.0, 180.0),
)
def test_round_trip_property(a_au, e, inc, raan, argp, m0):
    body = element_body(
        "P", epoch_jd_tdb=2460000.5, semi_major_axis_au=a_au, eccentricity=e,
        inclination_deg=inc, raan_deg=raan, arg_periapsis_deg=argp, mean_anomaly_deg=m0,
    )  # fmt: skip
    r, v = ElementSet([body]).states_about_central(body.epoch_jd_tdb)
    r_ecl = rotate(r[0], "icrf", "ecliptic")
    v_ecl = rotate(v[0], "icrf", "ecliptic")
    el = state_to_elements(r_ecl, v_ecl, body.mu_km3_s2)
    assert float(el.a_km) == pytest.approx(a_au * AU_KM, rel=1e-9)
    assert float(el.e) == pytest.approx(e, abs=1e-9)
    assert math.degrees(float(el.inclination_rad)) == pytest.approx(inc, abs=1e-8)


# ---------------------------------------------------------------------------------------------
# Many bodies at many epochs
# ---------------------------------------------------------------------------------------------
CSV_TEXT = """# invented demo targets
name,epoch_utc,central_body,semi_major_axis_au,eccentricity,inclination_deg,raan_deg,arg_periapsis_deg,mean_anomaly_deg,gm_km3_s2,radius_km
Amberly,2030-01-01T00:00:00Z,sun,1.8,0.12,4.0,80.0,150.0,10.0,,
Brisk,2030-06-01,Sun,2.9,0.31,12.5,200.0,20.0,300.0,1.5,120
Cobble,2031-01-01,SUN,0.9,0.05,1.0,10.0,300.0,180.0,,
"""


def test_csv_and_vectorized_states():
    bodies = read_element_csv(io.StringIO(CSV_TEXT))
    assert len(bodies) == 3
    assert list(bodies.names) == ["Amberly", "Brisk", "Cobble"]
    assert bodies[1].gm_km3_s2 == 1.5 and bodies[1].mu_km3_s2 == GM_SUN_KM3_S2 + 1.5
    jd = np.linspace(2462000.5, 2463000.5, 7)
    r, v = element_set_states(bodies, jd, central="sun")
    assert r.shape == (3, 7, 3) and v.shape == (3, 7, 3)
    reg = default_registry().with_bodies(bodies)
    for k, name in enumerate(bodies.names):
        r_one, v_one = states(name, jd, central="sun", registry=reg)
        np.testing.assert_allclose(r[k], r_one, rtol=1e-14)
        np.testing.assert_allclose(v[k], v_one, rtol=1e-14)
    # About another central body, in the ecliptic frame, and with a 2-D grid of epochs.
    grid = jd.reshape(7, 1) + np.arange(4.0)
    r_e, _ = element_set_states(bodies, grid, central="earth", frame="ecliptic")
    assert r_e.shape == (3, 7, 4, 3)
    r_earth, _ = states("earth", grid, central="sun", frame="ecliptic")
    r_sun, _ = element_set_states(bodies, grid, central="sun", frame="ecliptic")
    np.testing.assert_allclose(r_e, r_sun - r_earth, atol=1e-4)


def test_per_body_epochs():
    bodies = read_element_csv(io.StringIO(CSV_TEXT))
    epochs = np.array([[2462000.5, 2462100.5], [2462200.5, 2462300.5], [2462400.5, 2462500.5]])
    r, _ = element_set_states(bodies, epochs, per_body=True, central="sun")
    assert r.shape == (3, 2, 3)
    r_all, _ = element_set_states(bodies, epochs.reshape(-1), central="sun")
    np.testing.assert_allclose(r[1, 1], r_all[1, 3], rtol=1e-14)
    with pytest.raises(InputError, match="per_body"):
        element_set_states(bodies, epochs[:2], per_body=True)


def test_a_state_does_not_depend_on_the_other_dates_asked_with_it():
    """One date alone and the same date among many give the same bits (the window grid asks
    for whole rows of dates, a single arc for one)."""
    body = ElementSet([_asteroid()])
    jd = np.linspace(2462000.5, 2463000.5, 41)
    r_all, v_all = body.states_about_central(jd)
    for k in (0, 7, 40):
        r_one, v_one = body.states_about_central(jd[k : k + 1])
        assert np.array_equal(r_one[0, 0], r_all[0, k])
        assert np.array_equal(v_one[0, 0], v_all[0, k])


def test_many_bodies_chunked_like_one_call():
    rng = np.random.default_rng(5)
    n = 300
    bodies = ElementSet([
        element_body(
            f"T{k}", epoch_jd_tdb=2461000.5, semi_major_axis_au=float(a), eccentricity=float(e),
            inclination_deg=float(i), raan_deg=10.0 * k, arg_periapsis_deg=3.0 * k,
            mean_anomaly_deg=float(m),
        )
        for k, (a, e, i, m) in enumerate(zip(
            rng.uniform(0.5, 5, n), rng.uniform(0, 0.9, n), rng.uniform(0, 40, n),
            rng.uniform(-180, 180, n), strict=True,
        ))
    ])  # fmt: skip
    jd = np.linspace(2461000.5, 2465000.5, 1000)  # 300 000 states: more than one chunk
    r, _ = bodies.states_about_central(jd)
    r_one, _ = ElementSet([bodies[257]]).states_about_central(jd)
    np.testing.assert_allclose(r[257], r_one[0], rtol=1e-14)  # Newton stops set-wide


# ---------------------------------------------------------------------------------------------
# Errors: one clear message naming the field, the value and the accepted range
# ---------------------------------------------------------------------------------------------
HEADER = (
    "name,epoch_jd_tdb,semi_major_axis_km,eccentricity,inclination_deg,raan_deg,"
    "arg_periapsis_deg,mean_anomaly_deg"
)


@pytest.mark.parametrize(
    ("row", "expect"),
    [
        ("X,2461000.5,1.5e8,1.2,1,2,3,4", ["row 2", "semi_major_axis_km", "150000000.0", "< 0"]),
        ("X,2461000.5,1.5e8,1.0,1,2,3,4", ["row 2", "eccentricity", "not exactly 1"]),
        ("X,2461000.5,1.5e8,-0.1,1,2,3,4", ["row 2", "eccentricity", "-0.1", ">= 0"]),
        ("X,2461000.5,1.5e8,abc,1,2,3,4", ["row 2", "eccentricity", "'abc'", "finite number"]),
        ("X,2461000.5,-1.5e8,0.5,1,2,3,4", ["row 2", "semi_major_axis_km", "> 0"]),
        ("X,2461000.5,1.5e8,0.5,200,2,3,4", ["row 2", "inclination_deg", "0 to 180"]),
        ("X,2461000.5,1.5e8,0.5,1,2,3", ["row 2", "8 comma-separated cells"]),
        ("X,,1.5e8,0.5,1,2,3,4", ["row 2", "epoch_jd_tdb", "exactly one"]),
        ("X,nan,1.5e8,0.5,1,2,3,4", ["row 2", "epoch_jd_tdb", "finite number"]),
    ],
)
def test_csv_row_errors(row, expect):
    with pytest.raises(InputError) as info:
        read_element_csv(io.StringIO(HEADER + "\n" + row + "\n"), label="targets.csv")
    message = str(info.value)
    assert message.startswith("targets.csv")
    for fragment in expect:
        assert fragment in message


def test_csv_header_errors():
    missing = HEADER.replace(",eccentricity", "")
    with pytest.raises(InputError, match="'eccentricity' column"):
        read_element_csv(io.StringIO(missing + "\nX,1,2,3,4,5,6\n"))
    both = HEADER + ",semi_major_axis_au"
    with pytest.raises(InputError, match="semi_major_axis_km or semi_major_axis_au"):
        read_element_csv(io.StringIO(both + "\nX,1,2,0.1,4,5,6,7,8\n"))
    with pytest.raises(InputError, match="columns"):
        read_element_csv(io.StringIO(HEADER + ",colour\nX,1,2,0.1,4,5,6,7,red\n"))
    with pytest.raises(InputError, match="central_body"):
        read_element_csv(io.StringIO(HEADER + ",central_body\nX,1,2,0.1,4,5,6,7,vulcan\n"))
    with pytest.raises(InputError, match="epoch_utc"):
        text = HEADER.replace("epoch_jd_tdb", "epoch_utc")
        read_element_csv(io.StringIO(text + "\nX,2031-02-30,2,0.1,4,5,6,7\n"))


def test_hyperbola_true_anomaly_beyond_asymptote():
    with pytest.raises(InputError) as info:
        element_body(
            "H", central_body="earth", epoch_jd_tdb=2461000.5, semi_major_axis_km=-10000.0,
            eccentricity=1.5, inclination_deg=0.0, raan_deg=0.0, arg_periapsis_deg=0.0,
            true_anomaly_deg=140.0,
        )  # fmt: skip
    assert "true_anomaly_deg" in str(info.value) and "131.8" in str(info.value)


def test_csv_file_on_disk(tmp_path):
    path = tmp_path / "targets.csv"
    path.write_text(CSV_TEXT, encoding="utf-8")
    assert len(read_element_csv(path)) == 3
    with pytest.raises(InputError, match="readable"):
        read_element_csv(tmp_path / "missing.csv")
