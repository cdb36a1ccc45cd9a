"""A transfer between two satellites speaks of burns, phasing and transfer time, not of a
launch (solver/window/outputs.py decides what fits a case).

The burns are checked on the textbook Hohmann transfer between two coplanar circular orbits
(common practice; Curtis, Orbital Mechanics for Engineering Students, section 6.2, from
memory): each burn is purely along-track,
Δv1 = sqrt(μ/r1) (sqrt(2 r2 / (r1 + r2)) - 1), Δv2 = sqrt(μ/r2) (1 - sqrt(2 r1 / (r1 + r2))),
the transfer takes half the period of the ellipse, T = π sqrt(a³/μ) with a = (r1 + r2)/2, and the
target must lead by π - n2 T at departure, n2 = sqrt(μ/r2³).
"""

from __future__ import annotations

import json
import math

import numpy as np
import pandas as pd
import pytest

from app.cli import main
from app.samples import load
from solver.constants import GM_EARTH_KM3_S2
from solver.ephemeris.timescales import utc_to_jd_tdb
from solver.window.case import parse_case
from solver.window.cell import select_arc, solve_cell
from solver.window.grid import compute_window
from solver.window.outputs import arc_burns, case_outputs, phase_angles_deg
from solver.window.provenance import provenance

R1_KM, R2_KM = 7000.0, 8000.0
MU = GM_EARTH_KM3_S2
A_KM = (R1_KM + R2_KM) / 2
T_HOHMANN_S = math.pi * math.sqrt(A_KM**3 / MU)
N2_RAD_S = math.sqrt(MU / R2_KM**3)
LEAD_DEG = math.degrees(math.pi - N2_RAD_S * T_HOHMANN_S)
DV1 = math.sqrt(MU / R1_KM) * (math.sqrt(2 * R2_KM / (R1_KM + R2_KM)) - 1)
DV2 = math.sqrt(MU / R2_KM) * (1 - math.sqrt(2 * R1_KM / (R1_KM + R2_KM)))

HOHMANN = f"""
[case]
title = "Hohmann between two invented satellites"
central_body = "earth"
departure_body = "Lower"
target_body = "Upper"
[window]
departure_start = "2031-03-01T00:00:00"
departure_end = "2031-03-01T01:00:00"
departure_step_days = 0.003472222222222222
arrival_start = "2031-03-01T00:30:00"
arrival_end = "2031-03-01T03:00:00"
arrival_step_days = 0.003472222222222222
[arrival_orbit]
mode = "rendezvous"
[[bodies]]
name = "Lower"
central_body = "earth"
frame = "icrf"
epoch_utc = "2031-03-01T00:00:00"
semi_major_axis_km = {R1_KM}
eccentricity = 0.0
inclination_deg = 0.0
raan_deg = 0.0
arg_periapsis_deg = 0.0
mean_anomaly_deg = 0.0
[[bodies]]
name = "Upper"
central_body = "earth"
frame = "icrf"
epoch_utc = "2031-03-01T00:00:00"
semi_major_axis_km = {R2_KM}
eccentricity = 0.0
inclination_deg = 0.0
raan_deg = 0.0
arg_periapsis_deg = 0.0
mean_anomaly_deg = {LEAD_DEG!r}
"""


@pytest.fixture(scope="module")
def hohmann():
    case = parse_case(HOHMANN)
    t0 = float(utc_to_jd_tdb("2031-03-01T00:00:00"))
    arc = select_arc(solve_cell(case, t0, t0 + T_HOHMANN_S / 86400.0), 0)
    return case, arc


def test_a_transfer_between_satellites_is_not_a_launch(hohmann):
    case, _arc = hohmann
    fit = case_outputs(case)
    assert not fit.launch and fit.planet_centred and not fit.launch_periods
    assert fit.default_metric == "dv_total_km_s"
    for launch_metric in ("c3_km2_s2", "dla_deg", "rla_deg", "vinf_departure_km_s"):
        assert launch_metric not in fit.metrics and launch_metric not in fit.ranking_metrics
    vesper = case_outputs(load("vesper_venus_orbiter"))
    assert vesper.launch and not vesper.planet_centred and vesper.default_metric == "c3_km2_s2"
    # a launch to a rendezvous with a body without mass keeps its arrival v∞ (a limit of Tallis)
    tallis = case_outputs(load("tallis_rendezvous"))
    assert tallis.launch and "vinf_arrival_km_s" in tallis.ranking_metrics


def test_hohmann_burns_are_along_track_with_the_textbook_sizes(hohmann):
    case, arc = hohmann
    assert arc.ok
    burns = arc_burns(case, arc)
    assert burns.departure_dv_km_s == pytest.approx(DV1, rel=1e-7)
    assert burns.arrival_dv_km_s == pytest.approx(DV2, rel=1e-7)
    np.testing.assert_allclose(burns.departure_rtn_km_s, [0.0, DV1, 0.0], atol=1e-7)
    np.testing.assert_allclose(burns.arrival_rtn_km_s, [0.0, DV2, 0.0], atol=1e-7)
    assert burns.phase_deg == pytest.approx(LEAD_DEG, abs=1e-6)
    assert arc.metrics["dv_total_km_s"] == pytest.approx(DV1 + DV2, rel=1e-7)


def test_phasing_over_a_grid_follows_the_mean_motions(hohmann):
    """The lead angle falls by (n1 - n2) per unit time (both circular, coplanar)."""
    case, _arc = hohmann
    grid = compute_window(case)
    from solver.window.case_bodies import CaseBodies

    phase = phase_angles_deg(case, CaseBodies.of(case), grid.departure_jd_tdb)
    n1 = math.sqrt(MU / R1_KM**3)
    dt_s = (grid.departure_jd_tdb - grid.departure_jd_tdb[0]) * 86400.0
    expected = (LEAD_DEG - np.degrees((n1 - N2_RAD_S) * dt_s)) % 360.0
    np.testing.assert_allclose(phase, expected, atol=1e-6)


def test_outputs_of_a_satellite_case_speak_of_burns(tmp_path, capsys):
    assert main(["best", "kestrel_relay_leo", "--no-cache"]) == 0
    text = capsys.readouterr().out
    for word in ("departure burn", "arrival burn", "phase angle", "transfer time", " h "):
        assert word in text
    for word in ("C3", "DLA", "RLA", "v∞", "DE423"):
        assert word not in text
    assert "no ephemeris file" in text

    assert main(["best", "kestrel_relay_leo", "--no-cache", "--json"]) == 0
    report = json.loads(capsys.readouterr().out)
    assert "c3_km2_s2" not in report["metrics"] and "dla_deg" not in report["metrics"]
    burns = report["burns"]
    parts = burns["departure"]["components_km_s"]
    assert math.hypot(*parts.values()) == pytest.approx(burns["departure"]["dv_km_s"])
    assert burns["departure"]["dv_km_s"] == pytest.approx(report["metrics"]["dv_departure_km_s"])
    assert report["refinement"]["metric"] == "dv_total_km_s"

    out = tmp_path / "kestrel.csv"
    assert main(["grid", "kestrel_relay_leo", "--no-cache", "--out", str(out)]) == 0
    capsys.readouterr()
    frame = pd.read_csv(out, comment="#")
    assert {"phase_deg", "dv_departure_along_track_km_s", "tof_hours"} <= set(frame.columns)
    assert not {"c3_km2_s2", "dla_deg", "rla_deg"} & set(frame.columns)
    solved = frame[frame["reason"] == "solved"]
    norm = np.sqrt(
        sum(
            solved[f"dv_departure_{axis}_km_s"] ** 2
            for axis in ("radial", "along_track", "cross_track")
        )
    )
    np.testing.assert_allclose(norm, solved["dv_departure_km_s"], rtol=1e-7)
    np.testing.assert_allclose(frame["tof_hours"], frame["tof_days"] * 24.0)


def test_launch_language_is_refused_for_a_satellite_case(capsys):
    assert main(["period", "kestrel_relay_leo", "--days", "1"]) == 2
    assert "launch period" in capsys.readouterr().err
    assert main(["best", "kestrel_relay_leo", "--metric", "c3_km2_s2", "--no-cache"]) == 2
    assert "describes a launch" in capsys.readouterr().err


def test_provenance_names_what_supplies_the_states():
    assert provenance(load("kestrel_relay_leo"))["ephemeris"].startswith("no ephemeris file")
    tallis = provenance(load("tallis_rendezvous"))["ephemeris"]
    assert "DE423" in tallis and "Tallis" in tallis


def test_dashboard_reads_the_decision_from_the_solver(tmp_path):
    from app.dashboard.config import Settings
    from app.dashboard.detail_rows import detail_rows
    from app.dashboard.display_data import arc_details
    from app.dashboard.window_service import WindowService
    from app.samples import SAMPLE_DIR

    model = WindowService(Settings.resolve(tmp_path / "c", tmp_path / "d", SAMPLE_DIR))
    try:
        kestrel = load("kestrel_relay_leo")
        values = [o["value"] for o in model.metric_options(kestrel)]
        assert "c3_km2_s2" not in values and "dla_deg" not in values
        assert "dv_total_km_s" in values
        assert model.suited_metric(kestrel, "c3_km2_s2") == "dv_total_km_s"
        assert "c3_km2_s2" in [o["value"] for o in model.metric_options(load("tallis_rendezvous"))]
    finally:
        model.shutdown()
    case = load("kestrel_relay_leo")
    grid = compute_window(case)
    i, j, _k = grid.best_cell("dv_total_km_s")
    arc = select_arc(solve_cell(case, grid.departure_jd_tdb[i], grid.arrival_jd_tdb[j]))
    headings = [h for h, _rows in arc_details(case, arc, provenance(case))]
    assert "Departure burn" in headings and "Phasing" in headings
    rows = [label for _h, label in detail_rows(arc_details(case, arc, {}))]
    assert "C3" not in rows and "DLA" not in rows


@pytest.mark.parametrize(
    ("sample", "launch_limits"),
    [("tallis_rendezvous", True), ("vesper_venus_orbiter", True), ("kestrel_relay_leo", False)],
)
def test_launch_limits_fit_only_a_launch_from_a_planet_about_the_sun(sample, launch_limits):
    """A C3 or |DLA| limit and a launch vehicle limit what a launch vehicle delivers (common
    practice); a transfer between satellites of a planet has none to limit."""
    from solver.window.outputs import case_outputs, launch_limit_keys

    assert case_outputs(load(sample)).launch_limits is launch_limits
    assert launch_limit_keys() == ("limits.c3_max_km2_s2", "limits.dla_max_deg")
