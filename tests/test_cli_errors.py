"""The usual mistakes of a new user: each is one line on stderr and exit status 2, in every
subcommand alike; and output that a non-UTF-8 terminal can print."""

from __future__ import annotations

import json
import os
import subprocess
import sys
from pathlib import Path

import pytest

from app.cli import main

REPO = Path(__file__).resolve().parents[1]
CURTIS = ["--mu-km3-s2", "398600", "--r1-km", "5000,10000,2100", "--tof-s", "3600"]


def _one_line_error(capsys, command: str) -> str:
    err = capsys.readouterr().err
    lines = err.strip().splitlines()
    assert len(lines) == 1, err
    assert lines[0].startswith(f"arcwindow {command}: error:") or lines[0].startswith(
        "arcwindow: error:"
    )
    assert "Traceback" not in err
    return lines[0]


# ---------------------------------------------------------------------------------------------
# Output files


def test_output_folders_are_created_like_the_survey_does(tmp_path, capsys):
    grid_out = tmp_path / "new" / "deeper" / "grid.csv"
    assert main(["grid", "kestrel_relay_leo", "--out", str(grid_out), "--no-cache"]) == 0
    assert grid_out.is_file()
    oem_out = tmp_path / "arcs" / "arc.oem"
    argv = ["arc", "vesper_venus_orbiter", "--depart", "2031-05-15", "--arrive", "2031-10-23"]
    assert main([*argv, "--oem", str(oem_out)]) == 0
    assert oem_out.read_text().startswith("CCSDS_OEM_VERS = 2.0")


@pytest.mark.parametrize(
    "argv",
    [
        ["grid", "kestrel_relay_leo", "--no-cache", "--out"],
        [
            "arc",
            "vesper_venus_orbiter",
            "--depart",
            "2031-05-15",
            "--arrive",
            "2031-10-23",
            "--oem",
        ],
        ["survey", "demo_catalogue", "--case", "survey_base", "--years", "2031", "--out"],
    ],
    ids=["grid", "arc", "survey"],
)
def test_an_output_folder_that_cannot_exist_is_one_line_before_any_work(argv, tmp_path, capsys):
    blocker = tmp_path / "a_file"
    blocker.write_text("not a folder")
    name = "results.parquet" if argv[0] == "survey" else "out.csv"
    assert main([*argv, str(blocker / name)]) == 2
    line = _one_line_error(capsys, argv[0])
    assert ("--out" in line or "--oem" in line) and "a_file" in line


def test_a_failed_write_is_one_line(tmp_path, capsys, monkeypatch):
    import solver.files.export as export

    def disk_full(grid, path):
        raise OSError(28, "No space left on device", str(path))

    monkeypatch.setattr(export, "write_grid", disk_full)
    out = tmp_path / "g.csv"
    assert main(["grid", "kestrel_relay_leo", "--out", str(out), "--no-cache"]) == 2
    line = _one_line_error(capsys, "grid")
    assert "No space left on device" in line and "g.csv" in line


# ---------------------------------------------------------------------------------------------
# Values argparse used to take or choke on


@pytest.mark.parametrize(
    "argv",
    [
        ["grid", "vesper_venus_orbiter", "--out", "x.csv", "--max-cells", "-5"],
        ["best", "vesper_venus_orbiter", "--max-cells", "0"],
        [
            "survey",
            "demo_catalogue",
            "--case",
            "survey_base",
            "--years",
            "2031",
            "--out",
            "s.parquet",
            "--max-cells",
            "-5",
        ],
    ],
    ids=["grid", "best", "survey"],
)
def test_max_cells_must_be_positive(argv, capsys, tmp_path, monkeypatch):
    monkeypatch.chdir(tmp_path)
    assert main(argv) == 2
    line = _one_line_error(capsys, argv[0])
    assert "--max-cells" in line and ">= 1" in line
    assert not (tmp_path / "x.csv").exists()


def test_a_negative_vector_after_a_space_is_read(capsys):
    """``--r2-km -14600,2500,7000`` equals ``--r2-km=-14600,...``: Curtis Example 5.2
    (docs/references.md 1.1, from memory, confirmed by recomputation there): v1 = (-5.9925,
    1.9254, 3.2456) km/s."""
    assert main(["lambert", *CURTIS, "--r2-km", "-14600,2500,7000", "--json"]) == 0
    spaced = json.loads(capsys.readouterr().out)
    assert main(["lambert", *CURTIS, "--r2-km=-14600,2500,7000", "--json"]) == 0
    joined = json.loads(capsys.readouterr().out)
    assert spaced == joined
    v1 = spaced["arcs"][0]["v1_km_s"]
    assert v1 == pytest.approx([-5.9925, 1.9254, 3.2456], abs=1e-4)
    assert (
        main(
            [
                "lambert",
                "--mu-km3-s2",
                "398600",
                "--r1-km",
                "-5000,-10000,-2100",
                "--r2-km",
                "-14600,2500,7000",
                "--tof-s",
                "3600",
            ]
        )
        == 0
    )


def test_a_body_about_itself_is_refused(capsys):
    assert main(["state", "mars", "2031-01-01", "--central", "mars"]) == 2
    line = _one_line_error(capsys, "state")
    assert "--central" in line and "mars" in line


@pytest.mark.parametrize(
    "argv",
    [
        ["best", "kestrel_relay_leo", "--branch", "high", "--no-cache"],
        ["best", "kestrel_relay_leo", "--revs", "0", "--branch", "low", "--no-cache"],
        [
            "arc",
            "kestrel_relay_leo",
            "--depart",
            "2031-03-01T01:00",
            "--arrive",
            "2031-03-01T05:00",
            "--branch",
            "high",
        ],
    ],
    ids=["best", "best-revs-0", "arc"],
)
def test_branch_without_revolutions_is_refused(argv, capsys):
    assert main(argv) == 2
    line = _one_line_error(capsys, argv[0])
    assert "--branch" in line and "--revs" in line


@pytest.mark.parametrize(
    "argv",
    [
        ["grid"],
        ["best", "vesper_venus_orbiter", "--metric", "speed"],
        ["bench", "--section", "nosuch"],
        ["nosuchcommand"],
        ["period", "vesper_venus_orbiter", "--days", "many"],
        ["serve", "--port", "99999"],
    ],
)
def test_argument_errors_are_one_line_in_every_subcommand(argv, capsys):
    assert main(argv) == 2
    _one_line_error(capsys, argv[0])


# ---------------------------------------------------------------------------------------------
# Terminals that are not UTF-8


@pytest.mark.parametrize("encoding", ["ascii", "latin-1"])
def test_reports_print_on_a_terminal_without_the_signs(encoding, tmp_path):
    """C3 in km²/s² and v∞ on a terminal that cannot print ² (ascii) or ∞ (latin-1)."""
    env = {**os.environ, "PYTHONIOENCODING": encoding}
    proc = subprocess.run(
        [
            sys.executable,
            "-m",
            "app.cli",
            "arc",
            "vesper_venus_orbiter",
            "--depart",
            "2031-05-15",
            "--arrive",
            "2031-10-23",
        ],
        cwd=REPO,
        env=env,
        capture_output=True,
        timeout=300,
    )
    assert proc.returncode == 0, proc.stderr.decode(encoding, "replace")
    out = proc.stdout.decode(encoding)
    assert "arrival vinf" in out and "Traceback" not in proc.stderr.decode(encoding)
    assert ("km2/s2" in out) if encoding == "ascii" else ("km²/s²" in out)
