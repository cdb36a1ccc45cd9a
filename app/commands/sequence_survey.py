"""``arcwindow sequence CASE --years Y1-Y2 | --targets TARGETS``: rank years or targets by their
best sequence candidate, in this process or on Dask (``--workers``, ``--scheduler``)."""

from __future__ import annotations

import argparse
import sys
import tomllib

from app.commands._common import CAUTION

FIRST_ROWS = 20


def run_survey(args: argparse.Namespace, sequence_case) -> int:
    from app.commands.survey_cmd import resolve_targets_path
    from app.samples import resolve_sequence_case_path
    from solver.ephemeris.element_input import read_element_csv
    from solver.sequence.provenance import sequence_provenance
    from solver.survey.cluster import describe_client, survey_client
    from solver.survey.sequences import (
        SequenceSurveySettings,
        plan_sequence_survey,
        read_task_row,
        run_sequence_survey,
        write_sequence_survey,
    )
    from solver.survey.store import chunk_folder

    path = resolve_sequence_case_path(args.case)
    raw = tomllib.loads(path.read_text(encoding="utf-8"))
    targets = None
    if args.targets:
        targets = list(
            read_element_csv(
                resolve_targets_path(args.targets), registry=sequence_case.case.registry()
            )
        )
    settings = SequenceSurveySettings(
        seed=args.seed,
        restarts=args.restarts,
        population=args.population,
        generations=args.generations,
        time_limit_s=args.time_limit,
        method=args.method,
        grid=args.grid,
        beam=args.beam,
    )
    tasks = plan_sequence_survey(raw, years=args.years, targets=targets, settings=settings)
    quiet = args.quiet or args.json

    def progress(done: int, total: int) -> None:
        if not quiet:
            sys.stderr.write(f"\r{done}/{total} year-targets searched")
            sys.stderr.flush()

    # With --out, each year-target's row is kept as a chunk file beside it: a rerun of the same
    # survey (same case, settings and engine) runs only what is missing.
    folder = chunk_folder(args.out) if args.out else None
    with survey_client(args.scheduler, args.workers) as client:
        if not quiet:
            print(
                f"Sequence survey of {len(tasks)} year-targets on {describe_client(client)}",
                file=sys.stderr,
            )
            if folder is not None:
                done = sum(read_task_row(folder, task) is not None for task in tasks)
                if done:
                    print(
                        f"{done} of {len(tasks)} already done in {folder} (kept)", file=sys.stderr
                    )
        frame = run_sequence_survey(tasks, client=client, progress=progress, folder=folder)
    if not quiet:
        sys.stderr.write("\n")
    prov = {
        **sequence_provenance(sequence_case),
        "survey_years": args.years or "",
        "survey_targets": args.targets or "",
    }
    if args.out:
        write_sequence_survey(frame, args.out, prov)
    if args.json:
        import json

        print(
            json.dumps(
                {"rows": frame.to_dict(orient="records"), "provenance": prov}, indent=2, default=str
            )
        )
        return 0
    print(f"{sequence_case.case.title}: {len(frame)} year-targets ranked by their best candidate")
    for _, row in frame.head(FIRST_ROWS).iterrows():
        value = row["objective_value"]
        shown = f"{value:.4f}" if isinstance(value, float) else "-"
        print(
            f"  #{row['rank']:<3} {row['label'] or row['target']:<20} {row['status']:<15} "
            f"{row['sequence'] or '-':<32} {row['objective'] or '':<15} {shown:>10}  "
            f"{row['departure_utc'] or row['reason'] or ''}"
        )
    print(CAUTION)
    return 0
