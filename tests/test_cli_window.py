"""The window subcommands end to end: grid, best, period, arc, cases; errors name the field."""

from __future__ import annotations

import json

import pandas as pd
import pytest

from app.cli import main


def test_cases_lists_samples(capsys):
    assert main(["cases", "--json"]) == 0
    rows = json.loads(capsys.readouterr().out)
    assert {r["name"] for r in rows} >= {
        "tallis_rendezvous",
        "vesper_venus_orbiter",
        "kestrel_relay_leo",
        "orrery_jupiter_flyby",
    }
    assert sum(r["default"] for r in rows) == 1


def test_grid_writes_csv_and_uses_the_cache(tmp_path, capsys):
    out = tmp_path / "grid.csv"
    args = ["grid", "kestrel_relay_leo", "--out", str(out), "--cache-dir", str(tmp_path / "c")]
    assert main(args) == 0
    assert "(computed)" in capsys.readouterr().out
    assert main(args) == 0
    assert "(cache)" in capsys.readouterr().out
    frame = pd.read_csv(out, comment="#")
    assert {
        "departure_utc",
        "arrival_utc",
        "tof_days",
        "revolutions",
        "branch",
        "transfer_type",
        "phase_deg",
        "dv_departure_km_s",
        "dv_arrival_km_s",
        "dv_total_km_s",
    } <= set(frame.columns)


def test_best_json(capsys):
    assert (
        main(
            [
                "best",
                "vesper_venus_orbiter",
                "--metric",
                "vinf_arrival_km_s",
                "--json",
                "--no-cache",
            ]
        )
        == 0
    )
    report = json.loads(capsys.readouterr().out)
    assert report["within_limits"]
    ref = report["refinement"]
    assert ref["refined_value"] <= ref["grid_value"]
    assert report["provenance"]["ephemeris"].startswith("JPL DE423")


def test_period_json(capsys):
    assert main(["period", "vesper_venus_orbiter", "--days", "7", "--json"]) == 0
    report = json.loads(capsys.readouterr().out)
    assert len(report["days"]) == 7 and report["arrival_utc"]
    assert report["max_c3_km2_s2"] == pytest.approx(max(d["c3_km2_s2"] for d in report["days"]))


def test_arc_writes_oem(tmp_path, capsys):
    oem = tmp_path / "arc.oem"
    assert (
        main(
            [
                "arc",
                "vesper_venus_orbiter",
                "--depart",
                "2031-05-15",
                "--arrive",
                "2031-10-23",
                "--oem",
                str(oem),
            ]
        )
        == 0
    )
    assert oem.read_text().startswith("CCSDS_OEM_VERS = 2.0")
    assert "Caution" in capsys.readouterr().out


@pytest.mark.parametrize(
    ("argv", "field"),
    [
        (["grid", "nonexistent_case", "--out", "x.csv"], "CASE"),
        (["grid", "kestrel_relay_leo", "--out", "x.xlsx"], "--out"),
        (
            ["grid", "vesper_venus_orbiter", "--out", "x.csv", "--max-cells", "100", "--no-cache"],
            "window",
        ),
        (
            ["arc", "vesper_venus_orbiter", "--depart", "2031-05-40", "--arrive", "2031-10-23"],
            "--depart",
        ),
        (
            ["arc", "vesper_venus_orbiter", "--depart", "2031-10-23", "--arrive", "2031-05-15"],
            "--arrive",
        ),
        (
            [
                "arc",
                "vesper_venus_orbiter",
                "--depart",
                "2031-05-15",
                "--arrive",
                "2031-10-23",
                "--revs",
                "2",
            ],
            "--revs",
        ),
        (
            ["arc", "vesper_venus_orbiter", "--depart", "2250-05-15", "--arrive", "2250-10-23"],
            "departure date",
        ),
        (["period", "vesper_venus_orbiter", "--days", "0"], "--days"),
    ],
)
def test_errors_exit_2_and_name_the_field(argv, field, capsys, tmp_path, monkeypatch):
    monkeypatch.chdir(tmp_path)
    assert main(argv) == 2
    err = capsys.readouterr().err
    assert field in err and "expected" in err and "Traceback" not in err


def test_bad_case_file_names_the_key(tmp_path, capsys):
    bad = tmp_path / "bad.toml"
    bad.write_text(
        (
            __import__("app.samples", fromlist=["SAMPLE_DIR"]).SAMPLE_DIR
            / "vesper_venus_orbiter.toml"
        )
        .read_text()
        .replace('mode = "capture"', 'mode = "crash"')
    )
    assert main(["best", str(bad), "--no-cache"]) == 2
    assert "arrival_orbit.mode" in capsys.readouterr().err
