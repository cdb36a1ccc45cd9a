"""Grid dates on the UTC instants the analyst typed, checked against astropy.time.

The rule (solver/window/dates.py): a window's dates are start + k * step counted in UTC, then
converted to TDB node by node, so whole UTC days stay whole UTC days and the end date is kept
whenever the step divides the window. astropy.time (test-only dependency, its own leap-second
table and scale chain) is the independent reference for every UTC <-> TDB conversion here.
"""

from __future__ import annotations

import datetime as dt
import math
import tracemalloc
import warnings
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from astropy.time import Time
from hypothesis import given
from hypothesis import strategies as st

from app.samples import load, sample_case_paths
from solver.errors import InputError
from solver.files.export import write_grid
from solver.window.case import parse_case
from solver.window.cell import solve_cell
from solver.window.dates import axis_count, date_axis, utc_plus_days
from solver.window.grid import check_grid_size, compute_window, grid_axes
from solver.window.launch_period import launch_period
from solver.window.refine import refine_best

MS_DAYS = 1e-3 / 86400.0


def _astropy_utc(jd_tdb) -> list[str]:
    """ISO UTC text of JD TDB epochs, by astropy (to the millisecond)."""
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # ERFA's "dubious year" for future dates
        return list(np.atleast_1d(Time(jd_tdb, format="jd", scale="tdb").utc.isot))


def _astropy_tdb(utc: str) -> float:
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return float(Time(utc.removesuffix("Z"), format="isot", scale="utc").tdb.jd)


def _span_days(start: str, end: str) -> float:
    return (
        dt.datetime.fromisoformat(end.removesuffix("Z"))
        - dt.datetime.fromisoformat(start.removesuffix("Z"))
    ).total_seconds() / 86400.0


@pytest.mark.parametrize("path", sample_case_paths(), ids=lambda p: p.stem)
def test_every_sample_window_ends_on_its_end_date(path):
    """Both ends of every sample case's windows are dates of its grid (astropy converts the
    nodes back to UTC). Vesper's departure_end 2031-08-15 used to be dropped."""
    case = load(str(path))
    departures, arrivals = grid_axes(case)
    for axis, start, end, step in (
        (departures, case.departure_start, case.departure_end, case.departure_step_days),
        (arrivals, case.arrival_start, case.arrival_end, case.arrival_step_days),
    ):
        steps = _span_days(start, end) / step
        assert abs(steps - round(steps)) < 1e-9, "sample windows are whole numbers of steps"
        assert len(axis) == round(steps) + 1
        first, last = _astropy_utc(axis[[0, -1]])
        assert first[:19] == dt.datetime.fromisoformat(start.removesuffix("Z")).isoformat()
        assert last[:19] == dt.datetime.fromisoformat(end.removesuffix("Z")).isoformat()
        # every node within a millisecond of start + k step in UTC (astropy's TDB of it)
        k = np.arange(len(axis))
        expected = [
            _astropy_tdb(
                (
                    dt.datetime.fromisoformat(start.removesuffix("Z")) + dt.timedelta(days=step * i)
                ).isoformat()
            )
            for i in k[:: max(1, len(k) // 7)]
        ]
        assert np.abs(axis[k[:: max(1, len(k) // 7)]] - expected).max() < MS_DAYS


@given(
    start=st.dates(min_value=dt.date(1961, 1, 1), max_value=dt.date(2190, 1, 1)),
    steps=st.integers(min_value=1, max_value=400),
    step_days=st.sampled_from([1.0, 2.0, 5.0, 0.25, 1.0 / 24.0, 1.0 / 1440.0]),
)
def test_whole_utc_steps_keep_both_ends_at_every_date(start, steps, step_days):
    """Wherever the TDB - UTC periodic term stands, a window of whole steps has steps + 1 dates,
    the last one the end date (a 1000 x 1000 request used to come out 999 x 1001)."""
    first = dt.datetime(start.year, start.month, start.day)
    last = first + dt.timedelta(days=steps * step_days)
    start_text, end_text = first.isoformat(), last.isoformat()
    assert axis_count(start_text, end_text, step_days) == steps + 1
    axis = date_axis(start_text, end_text, step_days)
    assert len(axis) == steps + 1
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # ERFA's "dubious year" for future dates
        end = Time(end_text, scale="utc")
    utc_last = axis.utc1[-1] + axis.utc2[-1]
    assert abs(utc_last - (end.jd1 + end.jd2)) < 1e-6 / 86400.0


def test_a_thousand_by_thousand_request_is_a_thousand_by_thousand():
    case = parse_case("""
[case]
title = "1000 x 1000"
central_body = "sun"
departure_body = "earth"
target_body = "mars"
[window]
departure_start = "2031-01-01"
departure_end = "2033-09-26"
departure_step_days = 1
arrival_start = "2031-07-01"
arrival_end = "2034-03-26"
arrival_step_days = 1
""")
    assert _span_days(case.departure_start, case.departure_end) == 999
    assert _span_days(case.arrival_start, case.arrival_end) == 999
    assert check_grid_size(case) == (1000, 1000, 1)
    dep, arr = grid_axes(case)
    assert (len(dep), len(arr)) == (1000, 1000)


def test_grid_size_check_counts_without_allocating_the_axes():
    """A 1-minute step over 150 years (79 million dates a side) is counted and refused without
    building anything the size of the grid."""
    case = parse_case("""
[case]
title = "far too many"
central_body = "sun"
departure_body = "earth"
target_body = "mars"
[window]
departure_start = "1900-01-01"
departure_end = "2050-01-01"
departure_step_days = 0.0006944444444444445
arrival_start = "1900-01-01"
arrival_end = "2050-01-01"
arrival_step_days = 0.0006944444444444445
""")
    minutes = round(_span_days(case.departure_start, case.departure_end) * 1440) + 1
    tracemalloc.start()
    try:
        with pytest.raises(InputError, match=f"{minutes} departure x {minutes} arrival"):
            check_grid_size(case)
        _, peak = tracemalloc.get_traced_memory()
    finally:
        tracemalloc.stop()
    assert peak < 1_000_000


def test_whole_day_grids_export_whole_day_tofs(tmp_path):
    """The TOF column is the elapsed time between the two UTC instants: whole days, to 1e-9 day,
    on a grid of whole UTC days; equal to astropy's UTC difference of the exported dates."""
    case = load("vesper_venus_orbiter")
    grid = compute_window(case)
    for name in ("grid.parquet", "grid.csv"):
        path = write_grid(grid, tmp_path / name)
        frame = (
            pd.read_parquet(path) if name.endswith("parquet") else pd.read_csv(path, comment="#")
        )
        tof = frame["tof_days"].to_numpy()
        assert np.abs(tof - np.round(tof)).max() < 1e-9
        sample = frame.iloc[:: max(1, len(frame) // 50)]
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")  # ERFA's "dubious year" for future dates
            dep = Time([t.removesuffix("Z") for t in sample["departure_utc"]], scale="utc")
            arr = Time([t.removesuffix("Z") for t in sample["arrival_utc"]], scale="utc")
            elapsed = (arr - dep).jd
        np.testing.assert_allclose(sample["tof_days"], elapsed, atol=1e-9)
        assert all(t.endswith("T00:00:00Z") for t in sample["departure_utc"])


def test_a_single_arc_has_the_grid_cell_tof():
    """solve_cell at a grid node reports the grid's TOF (to the 40 microseconds of a float64
    JD), while its Lambert solve used the TDB interval (a few ms away)."""
    case = load("vesper_venus_orbiter")
    grid = compute_window(case)
    i, j = 30, 100
    arc = solve_cell(case, grid.departure_jd_tdb[i], grid.arrival_jd_tdb[j])[0]
    assert arc.tof_days == pytest.approx(grid.tof_days[i, j], abs=1e-9)
    assert abs(arc.flight_s / 86400.0 - arc.tof_days) < 4e-3 / 86400.0
    assert abs(arc.flight_s / 86400.0 - arc.tof_days) > 0.0


def test_refined_dates_are_whole_utc_minutes():
    case = load("vesper_venus_orbiter")
    refined = refine_best(case, compute_window(case), "c3_km2_s2")
    for jd in (refined.arc.departure_jd_tdb, refined.arc.arrival_jd_tdb):
        (text,) = _astropy_utc(jd)
        assert text[16:] == ":00.000"


def test_launch_period_counts_every_day_of_the_window():
    """A window of 122 departure days offers periods of up to 122 days (it was 121)."""
    case = load("vesper_venus_orbiter").with_changes(
        **{"window.departure_start": "2031-03-01", "window.departure_end": "2031-06-30"}
    )
    with pytest.raises(InputError, match="from 1 to 122"):
        launch_period(case, 123)


def test_survey_spans_use_utc_calendar_days():
    """utc_plus_days is UTC calendar arithmetic (Python's datetime is the reference)."""
    for start, days in (("2031-01-01", 45), ("2031-12-31T23:59:00Z", 400.5), ("2016-12-31", 1)):
        text = utc_plus_days(start, days)
        expected = dt.datetime.fromisoformat(start.removesuffix("Z")) + dt.timedelta(days=days)
        assert text.startswith(expected.isoformat()[:19]), (text, expected)
    assert math.isclose(
        _span_days("2031-01-01", utc_plus_days("2031-01-01", -1 / 1440)[:19]), -1 / 1440
    )


def test_an_end_date_off_the_step_is_named_with_the_last_date_used(capsys, tmp_path):
    """199 days at a 2-day step: the grid stops at 198 days and says so."""
    from app.cli import main
    from solver.window.grid import window_notes

    case = load("orrery_jupiter_flyby").with_changes(**{"window.departure_end": "2034-09-30"})
    (note,) = window_notes(case)
    assert "departure_end 2034-09-30" in note and "2034-09-29T00:00:00Z" in note
    assert window_notes(load("orrery_jupiter_flyby")) == []
    path = tmp_path / "orrery.toml"
    text = Path(load("orrery_jupiter_flyby").source_path).read_text()
    path.write_text(text.replace('departure_end = "2034-10-01"', 'departure_end = "2034-09-30"'))
    assert main(["grid", str(path), "--out", str(tmp_path / "g.parquet"), "--no-cache"]) == 0
    assert "the last departure date is 2034-09-29" in capsys.readouterr().err
