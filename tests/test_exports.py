"""Grid tables, arc JSON and CCSDS OEM exports: contents, provenance, independent readers."""

from __future__ import annotations

import json

import numpy as np
import pandas as pd
import pytest

from app.samples import load
from solver.files.export import (
    GRID_COLUMNS,
    arc_json,
    arc_oem_text,
    grid_columns,
    read_provenance,
    write_grid,
)
from solver.mechanics.kepler import propagate
from solver.window.cell import select_arc, solve_cell
from solver.window.grid import compute_window


@pytest.fixture(scope="module")
def kestrel():
    case = load("kestrel_relay_leo")
    return case, compute_window(case)


@pytest.mark.parametrize("suffix", [".csv", ".parquet"])
def test_grid_table_rows_columns_and_provenance(kestrel, tmp_path, suffix):
    _case, grid = kestrel
    path = write_grid(grid, tmp_path / f"grid{suffix}")
    frame = pd.read_csv(path, comment="#") if suffix == ".csv" else pd.read_parquet(path)
    # a transfer between satellites: burns and phasing, no launch columns (test_case_outputs.py)
    assert list(frame.columns) == list(grid_columns(grid.case))
    assert "c3_km2_s2" not in frame.columns and "c3_km2_s2" in GRID_COLUMNS
    n_dep, n_arr, _ = grid.shape
    # every cell appears; converged arcs are one row each; empty cells one row with a reason
    cells = frame.groupby(["departure_jd_tdb", "arrival_jd_tdb"]).size()
    assert len(cells) == n_dep * n_arr
    assert len(frame) == int(grid.converged.sum()) + int((~grid.converged.any(axis=-1)).sum())
    empty = frame[frame["dv_total_km_s"].isna()]
    assert (empty["reason"] != "solved").all()
    assert set(frame["branch"]) <= {"single", "low", "high"}
    assert set(frame["transfer_type"]) <= {"I", "II"}
    prov = read_provenance(path)
    for key in ("ephemeris", "constants", "engine", "case_hash", "caution"):
        assert prov[key], key
    # values round-trip (CSV to its printed digits)
    row = frame.dropna(subset=["dv_total_km_s"]).iloc[100]
    i = int(np.argmin(np.abs(grid.departure_jd_tdb - row["departure_jd_tdb"])))
    j = int(np.argmin(np.abs(grid.arrival_jd_tdb - row["arrival_jd_tdb"])))
    k = int(
        np.flatnonzero(
            (grid.revolutions == row["revolutions"])
            & (np.array(["single", "low", "high"])[grid.branch] == row["branch"])
        )[0]
    )
    assert row["dv_total_km_s"] == pytest.approx(grid.arcs["dv_total_km_s"][i, j, k], rel=1e-12)


def test_arc_oem_parses_with_independent_reader_and_round_trips(kestrel, tmp_path):
    """The OEM is read back by the `oem` package (an independent CCSDS OEM reader from PyPI);
    its states match our own arc, and its end points are the bodies' positions."""
    from oem import OrbitEphemerisMessage

    case, grid = kestrel
    i, j, k = grid.best_cell("dv_total_km_s")
    arc = select_arc(
        solve_cell(case, grid.departure_jd_tdb[i], grid.arrival_jd_tdb[j]),
        int(grid.revolutions[k]),
        ["single", "low", "high"][grid.branch[k]],
    )
    path = tmp_path / "arc.oem"
    path.write_text(arc_oem_text(case, arc))
    message = OrbitEphemerisMessage.open(path)
    segments = list(message)
    assert len(segments) == 1
    segment = segments[0]
    assert segment.metadata["REF_FRAME"] == "ICRF"
    assert segment.metadata["TIME_SYSTEM"] == "TDB"
    assert segment.metadata["CENTER_NAME"] == "EARTH"
    states = list(segment.states)
    assert len(states) > 100
    first, last = states[0], states[-1]
    np.testing.assert_allclose(first.position, arc.r1_km, rtol=1e-14)
    np.testing.assert_allclose(last.position, arc.r2_km, rtol=1e-14)
    np.testing.assert_allclose(first.velocity, arc.v1_km_s, rtol=1e-14)
    # an interior state: our propagation of the arc to that epoch, from the file's own epoch
    middle = states[len(states) // 2]
    dt = (middle.epoch - first.epoch).sec
    r_mid, _v_mid = propagate(arc.r1_km, arc.v1_km_s, dt, arc.mu_km3_s2)
    np.testing.assert_allclose(middle.position, r_mid, atol=1e-5)  # 1e-5 km: epoch to 1 us
    text = path.read_text()
    assert "CAUTION" in text and "case hash" in text


def test_arc_json_is_complete(kestrel):
    case, grid = kestrel
    i, j, _ = grid.best_cell("dv_total_km_s")
    arc = select_arc(
        solve_cell(case, grid.departure_jd_tdb[i], grid.arrival_jd_tdb[j]), metric="dv_total_km_s"
    )
    data = json.loads(json.dumps(arc_json(case, arc)))
    assert data["solved"] and data["within_limits"]
    assert data["metrics"]["dv_total_km_s"] == pytest.approx(arc.metrics["dv_total_km_s"])
    assert data["units"]["dv_total_km_s"] == "km/s" and "c3_km2_s2" not in data["units"]
    assert len(data["r1_km"]) == 3 and data["frame"] == "ICRF"
    assert data["provenance"]["case_hash"] == grid.provenance["case_hash"]
    assert data["elements"]["e"] == pytest.approx(arc.metrics["e"], rel=1e-9)


@pytest.mark.parametrize(
    "sample", ["kestrel_relay_leo", "vesper_venus_orbiter", "orrery_jupiter_flyby"]
)
def test_every_metric_of_a_case_is_a_grid_column(sample, monkeypatch):
    """A metric registered in METRICS reaches the grid table without a second list: the
    exported columns hold every metric the case's outputs name, a newly registered one too."""
    import solver.files.export as export
    import solver.window.outputs as outputs
    from solver.window.metrics import METRICS, Metric

    case = load(sample)
    columns = grid_columns(case)
    assert set(outputs.case_outputs(case).metrics) <= set(columns)

    new = Metric("c3_arrival_km2_s2", "arrival C3", "km²/s²", "square of the arrival v∞")
    monkeypatch.setitem(METRICS, new.column, new)
    columns = export.grid_columns(case)
    assert "c3_arrival_km2_s2" in columns
    assert columns.index("c3_arrival_km2_s2") < columns.index("within_limits")
