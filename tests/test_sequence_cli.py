"""``arcwindow sequence``: searches, evaluations, exports, bad input and Ctrl+C."""

from __future__ import annotations

import json
import signal
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from oem import OrbitEphemerisMessage

from app.cli import main
from app.samples import resolve_sequence_case_path
from solver.caution import CAUTION

QUICK = ["--restarts", "2", "--population", "8", "--generations", "25", "--quiet"]
EVENT_FIELDS = {
    "kind",
    "body",
    "utc",
    "vinf_in_km_s",
    "vinf_out_km_s",
    "dv_km_s",
    "periapsis_altitude_km",
    "turn_angle_deg",
}
LEG_FIELDS = {"tof_days", "revolutions", "branch"}


def test_search_prints_ranked_candidates_as_json(capsys):
    assert main(["sequence", "quillon_sample_return", "--top", "2", "--json", *QUICK]) == 0
    report = json.loads(capsys.readouterr().out)
    assert report["candidates"] and report["provenance"]["caution"] == CAUTION
    for rank, candidate in enumerate(report["candidates"], start=1):
        assert candidate["rank"] == rank
        assert [e["kind"] for e in candidate["events"]] == ["departure", "stop", "arrival"]
        for event in candidate["events"]:
            assert EVENT_FIELDS <= set(event)
        for leg in candidate["legs"]:
            assert LEG_FIELDS <= set(leg)
        assert candidate["dv_total_km_s"] == pytest.approx(
            sum(e["dv_km_s"] for e in candidate["events"])
        )


def test_evaluate_prints_every_leg_and_event(capsys):
    dates = "2034-08-10,2034-11-01,2035-08-20,2037-08-20,2041-10-01"
    assert main(["sequence", "harrow_jupiter_veega", "--evaluate", dates, "--json"]) == 0
    report = json.loads(capsys.readouterr().out)
    kinds = [e["kind"] for e in report["events"]]
    assert kinds == ["departure", "flyby", "flyby", "flyby", "arrival"]
    assert [e["utc"][:10] for e in report["events"]] == dates.split(",")
    for event in report["events"]:
        assert EVENT_FIELDS <= set(event)
    flybys = [e for e in report["events"] if e["kind"] == "flyby"]
    assert all(e["turn_angle_deg"] > 0 and e["periapsis_altitude_km"] is not None for e in flybys)
    assert [leg["branch"] for leg in report["legs"]][2] == "resonant"
    assert report["dv_total_km_s"] > 0 and "provenance" in report


def test_evaluate_text_names_the_dates_expected(capsys):
    code = main(["sequence", "quillon_sample_return", "--evaluate", "2033-05-15,2034-03-21"])
    assert code == 2
    err = capsys.readouterr().err.strip()
    assert err.count("\n") == 0
    assert "--evaluate" in err and "leave earth, arrive at Quillon, leave Quillon" in err


BAD_SEQUENCES = [
    ('to = "Quillon"', 'to = "Vulcan"', "sequence.legs[1].to"),
    ("stay_max_days = 400", "stay_max_days = 20", "sequence.legs[1].stay_max_days"),
    ('to = "Quillon"\nkind = "stop"', 'to = "sun"\nkind = "flyby"', "sequence.legs[1].to"),
]


@pytest.mark.parametrize(("old", "new", "field"), BAD_SEQUENCES)
def test_bad_sequences_get_one_line_naming_the_key_and_exit_2(tmp_path, capsys, old, new, field):
    text = resolve_sequence_case_path("quillon_sample_return").read_text()
    assert old in text
    path = tmp_path / "bad.toml"
    path.write_text(text.replace(old, new, 1))
    assert main(["sequence", str(path)]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and field in err and "Traceback" not in err


def test_zero_legs_is_refused_naming_the_key(tmp_path, capsys):
    text = resolve_sequence_case_path("quillon_sample_return").read_text()
    head = text.split("[[sequence.legs]]")[0]
    bodies = "[[bodies]]" + text.split("[[bodies]]", 1)[1]
    path = tmp_path / "none.toml"
    path.write_text(head + bodies)
    assert main(["sequence", str(path)]) == 2
    assert "sequence.legs" in capsys.readouterr().err


def test_out_writes_candidates_with_provenance(tmp_path):
    csv = tmp_path / "found.csv"
    parquet = tmp_path / "found.parquet"
    for path in (csv, parquet):
        assert (
            main(["sequence", "corrow_lissa_tour", "--top", "2", "--out", str(path), *QUICK]) == 0
        )
    head = [line for line in csv.read_text().splitlines() if line.startswith("# ")]
    assert any(line.startswith("# caution: ") for line in head)
    assert any(line.startswith("# sequences: ") for line in head)
    table = pd.read_csv(csv, comment="#")
    assert list(table["rank"]) == list(range(1, len(table) + 1))
    assert {"e1_kind", "e1_body", "e1_stay_days", "leg2_tof_days", "dv_total_km_s"} <= set(table)
    import pyarrow.parquet as pq

    meta = json.loads(pq.read_schema(parquet).metadata[b"arcwindow.provenance"])
    assert meta["caution"] == CAUTION and meta["flyby_model"]


def test_oem_has_one_segment_per_leg_read_by_an_independent_reader(tmp_path, capsys):
    path = tmp_path / "candidate.oem"
    dates = "2034-08-10,2034-11-01,2035-08-20,2037-08-20,2041-10-01"
    code = main(["sequence", "harrow_jupiter_veega", "--evaluate", dates, "--oem", str(path),
                 "--json"])  # fmt: skip
    assert code == 0
    report = json.loads(capsys.readouterr().out)
    message = OrbitEphemerisMessage.open(path)
    segments = list(message)
    assert len(segments) == len(report["legs"]) == 4
    for segment, leg in zip(segments, report["legs"], strict=True):
        states = list(segment.states)
        assert np.allclose(states[0].position, leg["r1_km"], rtol=1e-15, atol=1e-6)
        assert np.allclose(states[0].velocity, leg["v1_km_s"], rtol=1e-15, atol=1e-12)
        assert np.allclose(states[-1].position, leg["r2_km"], rtol=1e-15, atol=1e-6)
    text = path.read_text()
    assert text.count("META_START") == 4 and "CAUTION" in text


def _arcwindow() -> str:
    return str(Path(sys.executable).with_name("arcwindow"))


@pytest.mark.slow
def test_ctrl_c_stops_cleanly_with_the_best_found_so_far():
    process = subprocess.Popen(
        [
            _arcwindow(),
            "sequence",
            "harrow_jupiter_veega",
            "--generations",
            "100000",
            "--restarts",
            "2",
            "--population",
            "10",
        ],
        stdout=subprocess.PIPE,
        stderr=subprocess.PIPE,
        text=True,
    )
    # Wait for the search to report progress (stderr is not a terminal: a line every 5 s).
    deadline = time.monotonic() + 120
    assert process.stderr is not None
    first = process.stderr.readline()
    assert "generation" in first and time.monotonic() < deadline
    process.send_signal(signal.SIGINT)
    out, err = process.communicate(timeout=120)
    assert process.returncode == 130, err[-2000:]
    assert "#1 " in out and "stopped early, the best found so far" in out
    assert "Traceback" not in err


def test_out_and_oem_make_missing_folders(tmp_path):
    """Like `grid --out`: the folders of --out and --oem are made (they once failed with a
    traceback after the whole search)."""
    out = tmp_path / "new" / "deeper" / "found.csv"
    oem = tmp_path / "other" / "best.oem"
    code = main(
        ["sequence", "corrow_lissa_tour", "--top", "1", "--out", str(out), "--oem", str(oem),
         *QUICK]
    )  # fmt: skip
    assert code == 0 and out.is_file() and oem.is_file()
    assert "CCSDS_OEM_VERS" in oem.read_text()


@pytest.mark.parametrize("option", ["--out", "--oem"])
def test_bad_output_paths_get_one_line_before_any_search(tmp_path, capsys, option):
    blocker = tmp_path / "a_file"
    blocker.write_text("in the way")
    cases = [str(blocker / "x.csv"), str(tmp_path)]  # a file where a folder must go; a folder
    if option == "--out":
        cases.append(str(tmp_path / "found.txt"))  # neither .csv nor .parquet
    for bad in cases:
        code = main(["sequence", "corrow_lissa_tour", option, bad, *QUICK])
        err = capsys.readouterr().err
        assert code == 2, err
        lines = [line for line in err.splitlines() if line.strip()]
        assert len(lines) == 1 and option in lines[0] and bad in lines[0], err
