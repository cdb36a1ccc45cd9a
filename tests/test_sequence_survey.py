"""Surveys of sequences: launch years or targets ranked by their best candidate, here or on Dask."""

from __future__ import annotations

import json
import tomllib

import pandas as pd
import pytest

from app.cli import main
from app.samples import SAMPLE_DIR, resolve_sequence_case_path
from solver.ephemeris.element_input import read_element_csv
from solver.errors import InputError
from solver.sequence.spec import sequence_case_from_dict
from solver.survey.sequences import (
    SequenceSurveySettings,
    plan_sequence_survey,
    run_sequence_survey,
    task_case,
)

QUICK = SequenceSurveySettings(seed=0, restarts=2, population=8, generations=30)


def _raw(name: str) -> dict:
    return tomllib.loads(resolve_sequence_case_path(name).read_text())


def test_a_years_survey_ranks_each_launch_year_by_its_best_candidate():
    tasks = plan_sequence_survey(_raw("quillon_sample_return"), years="2033-2034", settings=QUICK)
    assert [t["label"] for t in tasks] == ["2033", "2034"]
    # Each year's case departs in that year and may arrive as late as the legs reach.
    case = sequence_case_from_dict(task_case(tasks[1])).case
    assert case.departure_start.startswith("2034-01-01")
    frame = run_sequence_survey(tasks)
    assert list(frame["rank"]) == [1, 2]
    assert set(frame["label"]) == {"2033", "2034"}
    statuses = list(frame["status"])
    assert statuses == sorted(statuses, key=["within_limits", "outside_limits", "no_arc",
                                             "error"].index)  # fmt: skip
    for _, row in frame.iterrows():
        assert row["departure_utc"].startswith(row["label"])
        assert row["dv_total_km_s"] > 0 and row["evaluations"] > 0


def test_a_targets_survey_replaces_the_target_and_keeps_every_row():
    targets = list(read_element_csv(SAMPLE_DIR / "demo_catalogue.csv"))[:2]
    tasks = plan_sequence_survey(_raw("corrow_lissa_tour"), targets=targets, settings=QUICK)
    case = sequence_case_from_dict(task_case(tasks[0])).case
    assert case.target_body == targets[0].name
    frame = run_sequence_survey(tasks)
    assert sorted(frame["target"]) == sorted(t.name for t in targets)


def test_a_rerun_computes_only_the_missing_or_damaged_year_targets(tmp_path, monkeypatch):
    """Each finished year-target is a chunk file (solver.survey.store: atomic, keyed by the
    task's inputs and the engine version); a rerun reads them instead of searching again."""
    import solver.survey.sequences as sequences

    tasks = plan_sequence_survey(_raw("quillon_sample_return"), years="2033-2034", settings=QUICK)
    folder = tmp_path / "years.parquet.chunks"
    first = run_sequence_survey(tasks, folder=folder)
    files = sorted(folder.glob("chunk-seq-*.parquet"))
    assert len(files) == 2
    ran: list[str] = []
    real = sequences.scan_sequence_task

    def counting(task):
        ran.append(task["label"])
        return real(task)

    monkeypatch.setattr(sequences, "scan_sequence_task", counting)
    again = run_sequence_survey(tasks, folder=folder)
    assert ran == []  # nothing searched twice
    columns = ["label", "status", "objective_value", "encounter_dates_utc", "evaluations"]
    assert again[columns].to_dict("records") == first[columns].to_dict("records")
    # A damaged file, and a file of other inputs under a task's name, are computed again.
    key = sequences.task_key(tasks[1])
    (folder / sequences.task_file_name(key)).write_bytes(b"not parquet")
    run_sequence_survey(tasks, folder=folder)
    assert ran == ["2034"]
    other = dict(tasks[0], settings={**tasks[0]["settings"], "seed": 1})
    assert sequences.task_key(other) != sequences.task_key(tasks[0])
    assert sequences.read_task_row(folder, other) is None


def test_a_survey_needs_years_or_targets_and_names_a_bad_year():
    with pytest.raises(InputError) as info:
        plan_sequence_survey(_raw("quillon_sample_return"))
    assert "--years" in info.value.field
    with pytest.raises(InputError) as info:
        plan_sequence_survey(_raw("quillon_sample_return"), years="2199-2205")
    assert info.value.field == "--years"


def test_the_command_writes_the_ranked_years(tmp_path, capsys):
    out = tmp_path / "years.parquet"
    code = main(["sequence", "quillon_sample_return", "--years", "2033", "--workers", "0",
                 "--restarts", "2", "--population", "8", "--generations", "20", "--quiet",
                 "--out", str(out)])  # fmt: skip
    assert code == 0
    assert "ranked by their best candidate" in capsys.readouterr().out
    frame = pd.read_parquet(out)
    assert list(frame["label"]) == ["2033"]
    import pyarrow.parquet as pq

    assert "caution" in json.loads(pq.read_schema(out).metadata[b"arcwindow.provenance"])


@pytest.mark.slow
def test_a_survey_on_dask_gives_the_rows_of_a_survey_in_this_process():
    from solver.survey.cluster import survey_client

    tasks = plan_sequence_survey(_raw("quillon_sample_return"), years="2033-2034", settings=QUICK)
    here = run_sequence_survey(tasks)
    with survey_client(None, 1) as client:
        there = run_sequence_survey(tasks, client=client)
    columns = ["label", "status", "objective_value", "encounter_dates_utc"]
    assert here[columns].to_dict("records") == there[columns].to_dict("records")
