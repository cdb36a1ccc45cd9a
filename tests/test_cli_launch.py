"""The command line for mass and launch: ``arcwindow launch``, mass in ``arc``, ``best`` and
``period``, and bad mass or launch input (one line naming the key, exit status 2)."""

from __future__ import annotations

import json

import pytest

from app.cli import main
from app.samples import SAMPLE_DIR

VESPER = (SAMPLE_DIR / "vesper_venus_orbiter.toml").read_text(encoding="utf-8")


def test_launch_prints_the_days_window(capsys):
    assert main(["launch", "vesper_venus_orbiter", "--depart", "2031-05-20"]) == 0
    out = capsys.readouterr().out
    assert "daily launch window 2031-05-20 (UTC)" in out
    assert "Marram Point" in out and "opens (UTC)" in out
    assert "the ascent's own arc" in out  # what is left out is said
    assert "mass budget (Corvid 2)" in out and "Caution" in out


def test_launch_json_agrees_with_the_solver(capsys):
    from solver.ephemeris.timescales import utc_to_jd_tdb
    from solver.window.arc_launch import arc_launch_window
    from solver.window.cell import select_arc, solve_cell

    argv = ["launch", "vesper_venus_orbiter", "--depart", "2031-05-20", "--arrive", "2031-10-25"]
    assert main([*argv, "--json"]) == 0
    report = json.loads(capsys.readouterr().out)
    window = report["launch_window"]["window"]
    assert window["day_utc"] == "2031-05-20" and window["openings"]
    from app.samples import load

    case = load("vesper_venus_orbiter")
    arc = select_arc(
        solve_cell(case, float(utc_to_jd_tdb("2031-05-20")), float(utc_to_jd_tdb("2031-10-25")))
    )
    expected = arc_launch_window(case, arc).window
    assert [o["open_utc"] for o in window["openings"]] == [o.open_utc for o in expected.openings]
    assert window["total_minutes"] == pytest.approx(expected.total_minutes)
    assert report["mass_budget"]["delivered_mass_kg"] == pytest.approx(
        arc.metrics["delivered_mass_kg"]
    )


def test_period_by_delivered_mass_lists_each_days_window(capsys):
    argv = ["period", "vesper_venus_orbiter", "--days", "5", "--metric", "delivered_mass_kg"]
    assert main([*argv, "--json"]) == 0
    report = json.loads(capsys.readouterr().out)
    assert report["metric"] == "delivered_mass_kg"
    days = report["days"]
    assert len(days) == 5
    assert report["min_delivered_mass_kg"] == pytest.approx(
        min(d["delivered_mass_kg"] for d in days)
    )
    assert all(d["launch_window"]["window"]["openings"] for d in days)
    assert main(argv) == 0
    out = capsys.readouterr().out
    assert "smallest delivered mass maximized" in out and "window min" in out


def test_best_by_delivered_mass_and_arc_print_the_budget(capsys):
    assert main(["best", "tallis_rendezvous", "--metric", "delivered_mass_kg", "--no-cache"]) == 0
    out = capsys.readouterr().out
    assert "mass budget (Heron M)" in out and "vehicles compared" in out
    assert "daily launch window" in out


def test_ranking_by_mass_needs_a_mass(capsys):
    for argv in (
        ["best", "survey_base", "--metric", "delivered_mass_kg", "--no-cache"],
        ["period", "survey_base", "--days", "3", "--metric", "delivered_mass_kg"],
    ):
        assert main(argv) == 2
        err = capsys.readouterr().err
        assert "--metric" in err and "wet_mass_max_kg" in err


def test_launch_needs_a_site(capsys):
    assert main(["launch", "kestrel_relay_leo", "--depart", "2031-03-01T01:00"]) == 2
    err = capsys.readouterr().err
    assert "launch_site" in err and len(err.strip().splitlines()) == 1


def _bad(old: str, new: str) -> str:
    assert old in VESPER
    return VESPER.replace(old, new, 1)


@pytest.mark.parametrize(
    ("text", "key"),
    [
        (  # a non-monotone table: C3 going back
            _bad("{ c3_km2_s2 = 10.0, mass_kg = 3900.0 }", "{ c3_km2_s2 = 4.0, mass_kg = 3900.0 }"),
            "vehicles[1].performance[4].c3_km2_s2",
        ),
        (  # a non-monotone table: more mass at a higher C3
            _bad(
                "{ c3_km2_s2 = 10.0, mass_kg = 3900.0 }", "{ c3_km2_s2 = 10.0, mass_kg = 4500.0 }"
            ),
            "vehicles[1].performance[4].mass_kg",
        ),
        (  # a negative table
            _bad("{ c3_km2_s2 = 60.0, mass_kg = 780.0 }", "{ c3_km2_s2 = 60.0, mass_kg = -20.0 }"),
            "vehicles[1].performance[10].mass_kg",
        ),
        (  # an empty azimuth range
            _bad("azimuth_max_deg = 115", "azimuth_max_deg = 85"),
            "launch_site.azimuth_max_deg",
        ),
        (  # a latitude out of range
            _bad("latitude_deg = 31.2", "latitude_deg = 95.0"),
            "launch_site.latitude_deg",
        ),
        (_bad("latitude_deg = 31.2\n", ""), "launch_site.latitude_deg"),
        (_bad("isp_s = 321", "isp_s = 0"), "propulsion[1].isp_s"),  # an Isp <= 0
        (_bad("isp_s = 321", "isp_s = -321"), "propulsion[1].isp_s"),
        (_bad('vehicle = "Corvid 2"', 'vehicle = "Corvid 9"'), "spacecraft.vehicle"),
        (_bad("wet_mass_max_kg = 2800", "wet_mass_max_kg = 0"), "spacecraft.wet_mass_max_kg"),
        (_bad('burns = ["arrival"]', 'burns = ["arrival", "landing"]'), "propulsion[1].burns"),
        (
            _bad("[departure_orbit]\naltitude_km = 200\n", "").replace(
                'burns = ["arrival"]', 'burns = ["arrival", "departure"]'
            ),
            "propulsion[1].burns",
        ),
        (
            _bad("[limits]\n", "[limits]\ndelivered_mass_min_kg = -5\n"),
            "limits.delivered_mass_min_kg",
        ),
        (_bad("[[vehicles]]\nname", "[[vehicles]]\nname = 3\nlabel"), "vehicles[1].label"),
    ],
)
def test_bad_mass_and_launch_input_is_one_line_naming_the_key(text, key, tmp_path, capsys):
    path = tmp_path / "bad.toml"
    path.write_text(text, encoding="utf-8")
    assert main(["grid", str(path), "--out", str(tmp_path / "g.csv"), "--no-cache"]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1, err
    assert f"error: {key} = " in err[0] and "expected" in err[0] and "Traceback" not in err[0]
