"""Files that are never lost: atomic writes with a SHA-256 beside them, verified before use.

Covers the one helper (solver.files.atomic), `arcwindow grid --out` killed while writing, grid
tables written block by block (byte for byte the same table), `arcwindow arc --oem`, and survey
chunks with single flipped bits (every one detected, recomputed, never a traceback).
"""

from __future__ import annotations

import hashlib
import os
import random
import shutil
import signal
import subprocess
import sys
import time
from pathlib import Path

import pandas as pd
import pytest

from app.cli import main
from app.samples import SAMPLE_DIR, load
from solver.ephemeris.element_input import read_element_csv
from solver.files import export
from solver.files.atomic import (
    ENV_TEST_WRITE_PAUSE_S,
    DamagedFile,
    atomic_output,
    checksum_path,
    sweep_temporaries,
    verify_checksum,
    write_bytes_atomic,
)
from solver.files.export import read_provenance, write_grid
from solver.survey.cluster import run_survey
from solver.survey.scan import SurveySettings, plan_survey
from solver.survey.store import chunk_done, chunk_folder, chunk_path, read_chunk
from solver.window.grid import compute_window

REPO = Path(__file__).resolve().parents[1]


def temporaries(folder: Path) -> list[Path]:
    return sorted(p for p in folder.iterdir() if p.name.startswith(".") and p.suffix == ".tmp")


# ---------------------------------------------------------------------------------------------
# The helper


def test_atomic_output_replaces_whole_and_writes_a_sha256sum_line(tmp_path):
    target = tmp_path / "table.csv"
    write_bytes_atomic(target, b"old\n", checksum=True)
    write_bytes_atomic(target, b"new contents\n", checksum=True)
    assert target.read_bytes() == b"new contents\n"
    digest = hashlib.sha256(b"new contents\n").hexdigest()
    # the format of coreutils' sha256sum (two spaces: text mode), so `sha256sum -c` checks it
    assert checksum_path(target).read_text() == f"{digest}  table.csv\n"
    assert verify_checksum(target) == digest
    if shutil.which("sha256sum"):
        check = subprocess.run(
            ["sha256sum", "-c", checksum_path(target).name], cwd=tmp_path, capture_output=True
        )
        assert check.returncode == 0, check.stdout + check.stderr
    assert temporaries(tmp_path) == []


def test_an_error_inside_the_write_leaves_the_previous_file_and_no_temporary(tmp_path):
    target = tmp_path / "arc.oem"
    write_bytes_atomic(target, b"good\n", checksum=True)
    with pytest.raises(RuntimeError), atomic_output(target, checksum=True) as handle:
        handle.write(b"half a fi")
        raise RuntimeError("killed")
    assert target.read_bytes() == b"good\n"
    verify_checksum(target)
    assert temporaries(tmp_path) == []


@pytest.mark.parametrize(
    "damage",
    ["flip a bit", "truncate", "append", "no checksum file", "checksum of another file"],
)
def test_any_change_to_a_file_or_its_checksum_is_refused(tmp_path, damage):
    target = tmp_path / "grid.parquet"
    write_bytes_atomic(target, bytes(range(256)) * 40, checksum=True)
    side = checksum_path(target)
    if damage == "flip a bit":
        data = bytearray(target.read_bytes())
        data[5000] ^= 0x10
        target.write_bytes(bytes(data))
    elif damage == "truncate":
        target.write_bytes(target.read_bytes()[:-1])
    elif damage == "append":
        target.write_bytes(target.read_bytes() + b"\n")
    elif damage == "no checksum file":
        side.unlink()
    else:
        side.write_text(side.read_text().replace("grid.parquet", "other.parquet"))
    with pytest.raises(DamagedFile, match=r"grid\.parquet"):
        verify_checksum(target)


def test_sweep_removes_only_stale_temporaries_of_the_names_asked(tmp_path):
    old = time.time() - 7200
    stale = tmp_path / ".grid.csv.4242.0badcafe.tmp"
    young = tmp_path / ".grid.csv.4243.0badcaf0.tmp"
    other = tmp_path / ".notes.txt.4244.0badcaf1.tmp"
    unrelated = tmp_path / ".hidden.tmp"
    for path in (stale, young, other, unrelated):
        path.write_bytes(b"partial")
    for path in (stale, other, unrelated):
        os.utime(path, (old, old))
    removed = sweep_temporaries(tmp_path, name_matches=lambda name: name == "grid.csv")
    assert removed == 1
    assert not stale.exists() and young.exists() and other.exists() and unrelated.exists()


# ---------------------------------------------------------------------------------------------
# Grid tables


@pytest.fixture(scope="module")
def small_grid():
    return compute_window(load("kestrel_relay_leo"))


@pytest.mark.parametrize("suffix", [".csv", ".parquet"])
def test_grid_written_in_blocks_is_the_same_table(small_grid, tmp_path, monkeypatch, suffix):
    whole = write_grid(small_grid, tmp_path / f"whole{suffix}")
    rows = len(export.grid_to_frame(small_grid))
    monkeypatch.setattr(export, "ROWS_PER_BLOCK", 997)  # many uneven blocks
    assert len(export.departure_blocks(small_grid, 997)) > 5
    blocks = write_grid(small_grid, tmp_path / f"blocks{suffix}")
    if suffix == ".csv":
        assert blocks.read_bytes() == whole.read_bytes()
        frame = pd.read_csv(blocks, comment="#")
    else:
        frame = pd.read_parquet(blocks)
        pd.testing.assert_frame_equal(frame, pd.read_parquet(whole), check_exact=True)
    assert len(frame) == rows
    assert read_provenance(blocks)["case_hash"]


def test_grid_file_with_a_damaged_byte_is_not_trusted(small_grid, tmp_path):
    path = write_grid(small_grid, tmp_path / "grid.csv")
    data = bytearray(path.read_bytes())
    data[len(data) // 2] ^= 0x01
    path.write_bytes(bytes(data))
    with pytest.raises(DamagedFile):
        read_provenance(path)


def test_csv_header_keeps_every_provenance_item_on_one_line():
    header = export.csv_header({"case_title": "two\nlines\r\x00here", "engine": "x"})
    assert header.splitlines()[:2] == ["# case_title: two lines  here", "# engine: x"]


def test_grid_out_killed_while_writing_leaves_the_previous_good_file(tmp_path):
    """A kill at the moment the new table is complete on disk but not yet in place (the writer
    pauses there through a test-only setting, so the kill lands deterministically)."""
    out = tmp_path / "window.csv"
    argv = ["grid", "kestrel_relay_leo", "--out", str(out), "--cache-dir", str(tmp_path / "c")]
    assert main(argv) == 0
    good = out.read_bytes()
    verify_checksum(out)

    env = dict(os.environ, **{ENV_TEST_WRITE_PAUSE_S: "60"})
    script = "import sys; from app.cli import main; sys.exit(main(sys.argv[1:]))"
    child = subprocess.Popen(
        [sys.executable, "-c", script, *argv[:-2], "--no-cache"],
        cwd=REPO,
        env=env,
        stdout=subprocess.DEVNULL,
        stderr=subprocess.DEVNULL,
    )
    try:
        deadline = time.monotonic() + 120
        while not [p for p in temporaries(tmp_path) if p.stat().st_size >= len(good)]:
            assert child.poll() is None, "the writer ended before it paused"
            assert time.monotonic() < deadline, "the writer never wrote its temporary file"
            time.sleep(0.05)
        child.send_signal(signal.SIGKILL)
        child.wait(30)
    finally:
        if child.poll() is None:
            child.kill()
    assert child.returncode == -signal.SIGKILL
    assert out.read_bytes() == good  # the previous file, whole
    verify_checksum(out)
    leftovers = temporaries(tmp_path)
    assert len(leftovers) == 1
    # once stale, the next write of that name sweeps the dead writer's temporary away
    os.utime(leftovers[0], (time.time() - 7200, time.time() - 7200))
    assert main(argv) == 0
    assert temporaries(tmp_path) == [] and out.read_bytes() == good


def test_arc_oem_is_written_with_its_checksum(tmp_path):
    out = tmp_path / "arc.oem"
    argv = [
        "arc",
        "kestrel_relay_leo",
        "--depart",
        "2031-03-01T01:00",
        "--arrive",
        "2031-03-01T03:00",
    ]
    assert main([*argv, "--oem", str(out)]) == 0
    assert out.read_text(encoding="ascii").startswith("CCSDS_OEM_VERS")
    verify_checksum(out)
    assert temporaries(tmp_path) == []


# ---------------------------------------------------------------------------------------------
# Survey chunks


FLIPS = 60


def test_every_single_bit_flip_in_a_chunk_is_detected_and_recomputed(tmp_path):
    """60 single-bit flips spread over two chunk files (header, column data, footer, the
    checksum line itself): each is refused on resume, its chunk computed again and the results
    come out as before, without a traceback."""
    targets = list(read_element_csv(SAMPLE_DIR / "demo_catalogue.csv"))[:4]
    plan = plan_survey(
        load("survey_base"),
        targets,
        "2031-2031",
        settings=SurveySettings(coarse_step_days=20.0, refine="none"),
        targets_per_chunk=2,
    )
    out = tmp_path / "results.parquet"
    reference = run_survey(plan, out)
    assert reference.complete and len(plan.chunks) == 2
    folder = chunk_folder(out)
    pristine = {c.key: chunk_path(folder, c).read_bytes() for c in plan.chunks}
    pristine_sums = {c.key: checksum_path(chunk_path(folder, c)).read_bytes() for c in plan.chunks}

    rng = random.Random(20310611)
    detected = recomputed = 0
    for flip in range(FLIPS):
        chunk = plan.chunks[flip % 2]
        path = chunk_path(folder, chunk)
        # one flip in eight lands in the checksum file, the rest anywhere in the Parquet file
        victim = checksum_path(path) if flip % 8 == 7 else path
        data = bytearray(victim.read_bytes())
        position = rng.randrange(len(data))
        data[position] ^= 1 << rng.randrange(8)
        victim.write_bytes(bytes(data))

        if read_chunk(folder, chunk) is None and not chunk_done(folder, chunk):
            detected += 1
        run = run_survey(plan, out)
        assert run.complete, f"flip {flip} at byte {position} of {victim.name}"
        recomputed += run.computed == [chunk.key]
        pd.testing.assert_frame_equal(run.results, reference.results, check_exact=True)
        assert path.read_bytes() == pristine[chunk.key]  # the same bytes as the first run
        assert checksum_path(path).read_bytes() == pristine_sums[chunk.key]
    assert (detected, recomputed) == (FLIPS, FLIPS)
