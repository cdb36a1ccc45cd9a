"""A survey says how long it will take before it starts, and how long is left while it runs."""

from __future__ import annotations

import pytest

from app.cli import main
from app.samples import SAMPLE_DIR, load
from solver.ephemeris.element_input import read_element_csv
from solver.survey.cluster import pending_chunks
from solver.survey.estimate import (
    PARALLEL_EFFICIENCY,
    WORKER_STARTUP_S,
    duration_text,
    estimate_survey,
    remaining_seconds,
)
from solver.survey.scan import SurveySettings, plan_survey

CATALOGUE = SAMPLE_DIR / "demo_catalogue.csv"


@pytest.fixture(scope="module")
def plan():
    targets = list(read_element_csv(CATALOGUE))[:6]
    return plan_survey(
        load("survey_base"),
        targets,
        "2031-2032",
        settings=SurveySettings(coarse_step_days=10.0),
        targets_per_chunk=2,
    )


def test_the_estimate_measures_the_surveys_own_target_years(plan, tmp_path):
    pending = pending_chunks(plan, tmp_path / "r.parquet")
    assert len(pending) == 6  # 3 blocks of 2 targets x 2 years
    here = estimate_survey(plan, pending, 1)
    assert here.target_years == 12 and here.samples == 3
    assert here.seconds_per_target_year > 0
    assert here.seconds == pytest.approx(12 * here.seconds_per_target_year)
    cluster = estimate_survey(plan, pending, 2, on_cluster=True)
    expected = 12 * cluster.seconds_per_target_year / (2 * PARALLEL_EFFICIENCY)
    assert cluster.seconds == pytest.approx(expected + WORKER_STARTUP_S)
    assert estimate_survey(plan, [], 2).seconds == 0.0


def test_remaining_time_follows_the_rate_of_finished_work(plan, tmp_path):
    estimate = estimate_survey(plan, pending_chunks(plan, tmp_path / "r.parquet"), 1)
    assert remaining_seconds(estimate, 0, 0.0) == pytest.approx(estimate.seconds)
    assert remaining_seconds(estimate, 6, 30.0) == pytest.approx(30.0)  # half done in 30 s
    assert remaining_seconds(estimate, 12, 60.0) == 0.0


@pytest.mark.parametrize(
    ("seconds", "text"), [(0.2, "1 s"), (45, "45 s"), (540, "9 min"), (3900, "1 h 05 min")]
)
def test_durations_read_like_a_person_would_say_them(seconds, text):
    assert duration_text(seconds) == text


def test_the_command_prints_an_estimate_and_a_bar_with_time_left(tmp_path, capsys):
    out = tmp_path / "survey.parquet"
    argv = [
        "survey", str(CATALOGUE), "--case", "survey_base", "--years", "2031", "--first", "4",
        "--coarse-step-days", "10", "--targets-per-chunk", "2", "--workers", "0",
        "--out", str(out),
    ]  # fmt: skip
    assert main(argv) == 0
    err = capsys.readouterr().err
    estimate_at = err.index("Estimated time: about")
    assert "4 target-years on 1 worker" in err
    assert "target-years [" in err and "left" in err and estimate_at < err.index("surveying")
    assert main(argv) == 0  # a finished survey: nothing to estimate
    assert "Estimated time" not in capsys.readouterr().err
