"""``arcwindow state`` and ``arcwindow bodies``: output, and one-line errors without traceback."""

from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

from app.cli import main
from solver.ephemeris.states import states
from solver.ephemeris.timescales import utc_to_jd_tdb

REPO = Path(__file__).resolve().parents[1]


def test_state_json_matches_library(capsys):
    assert main(["state", "Mars", "2026-05-01T12:00:00Z", "--central", "earth", "--json"]) == 0
    out = json.loads(capsys.readouterr().out)
    r, v = states("mars", float(utc_to_jd_tdb("2026-05-01T12:00:00Z")), central="earth")
    np.testing.assert_allclose(out["r_km"], r, rtol=1e-15)
    np.testing.assert_allclose(out["v_km_s"], v, rtol=1e-15)
    assert out["source"] == "de423" and out["frame"] == "icrf"


def test_state_text_mentions_units_and_leap_second_note(capsys):
    assert main(["state", "venus", "2030-01-01", "--frame", "ecliptic", "--source", "mean"]) == 0
    out = capsys.readouterr().out
    assert "r_km" in out and "v_km_s" in out and "ecliptic" in out and "mean" in out
    assert "leap second" in out


def test_state_with_elements_csv(tmp_path, capsys):
    path = tmp_path / "targets.csv"
    path.write_text(
        "name,epoch_jd_tdb,semi_major_axis_au,eccentricity,inclination_deg,raan_deg,"
        "arg_periapsis_deg,mean_anomaly_deg\nWren,2461000.5,1.3,0.1,2,3,4,5\n",
        encoding="utf-8",
    )
    assert main(["state", "wren", "2026-01-01", "--elements-csv", str(path), "--json"]) == 0
    assert json.loads(capsys.readouterr().out)["body"] == "Wren"
    assert main(["bodies", "--elements-csv", str(path)]) == 0
    assert "Wren" in capsys.readouterr().out


def test_bodies_lists_sources_and_dates(capsys):
    assert main(["bodies"]) == 0
    out = capsys.readouterr().out
    for fragment in ("mercury", "pluto", "de423 1799-12-16 to 2200-02-01", "mean 1800-01-01"):
        assert fragment in out
    assert main(["bodies", "--json"]) == 0
    rows = json.loads(capsys.readouterr().out)
    assert {r["name"] for r in rows} >= {"sun", "earth", "moon", "emb", "ssb"}


@pytest.mark.parametrize(
    ("argv", "fragment"),
    [
        (["state", "vulcan", "2026-05-01"], "known body: ssb, sun, mercury"),
        (["state", "mars", "2260-05-01"], "1799-12-16 to 2200-02-01"),
        (["state", "mars", "2026-02-30"], "ISO 8601"),
        (["state", "moon", "2026-05-01", "--source", "mean"], "source"),
        (["state", "mars", "2060-05-01", "--source", "mean"], "1800-01-01 to 2050-01-01"),
    ],
)
def test_errors_are_one_line_exit_2(argv, fragment, capsys):
    assert main(argv) == 2
    captured = capsys.readouterr()
    lines = captured.err.strip().splitlines()
    assert len(lines) == 1 and fragment in lines[0]
    assert lines[0].startswith("arcwindow state: error:")


def test_error_without_traceback_in_a_real_process():
    proc = subprocess.run(
        [sys.executable, "-m", "app.cli", "state", "mars", "1700-01-01"],
        cwd=REPO,
        capture_output=True,
        text=True,
        timeout=120,
    )
    assert proc.returncode == 2
    assert "Traceback" not in proc.stderr
    assert len(proc.stderr.strip().splitlines()) == 1
