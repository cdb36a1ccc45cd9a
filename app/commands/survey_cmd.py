"""``arcwindow survey``: rank many targets by their best arcs over years, on a Dask cluster."""

from __future__ import annotations

import argparse

from app.commands._common import (
    CAUTION,
    metric_choices,
    output_file,
    positive_int,
    prepare_solver,
)

# Rows of the ranking printed at the end (the file holds every target).
SHOWN_ROWS = 10


def add_parser(subparsers: argparse._SubParsersAction) -> None:
    parser = subparsers.add_parser(
        "survey",
        description="Scan every target of an element CSV over each year of departures with the "
        "window engine (coarse grid, best arc refined), rank the targets by a metric within the "
        "base case's limits, and write one row per target. Runs on a local Dask cluster sized to "
        "the machine, or on an existing one (--scheduler). Finished chunks are kept beside the "
        "output, so a rerun of the same command resumes. " + CAUTION,
    )
    parser.add_argument(
        "targets",
        metavar="TARGETS.csv",
        help="element CSV of the targets (format: solver/ephemeris/element_input.py), or a sample "
        "catalogue name (demo_catalogue)",
    )
    parser.add_argument(
        "--case",
        required=True,
        metavar="BASE_CASE",
        help="base case (TOML file or sample name, e.g. survey_base): departure, central body, "
        "orbits, limits, transfer and coarse steps; its target and dates are replaced",
    )
    parser.add_argument(
        "--years",
        required=True,
        metavar="Y1-Y2",
        help="departure years, both included (e.g. 2031-2045, or 2031)",
    )
    parser.add_argument(
        "--out", required=True, metavar="RESULTS.parquet", help="results file (.parquet)"
    )
    parser.add_argument(
        "--scheduler",
        metavar="tcp://HOST:PORT",
        help="run on this existing Dask cluster (default: start a local one)",
    )
    parser.add_argument(
        "--workers",
        type=int,
        metavar="N",
        help="local cluster size in worker processes (default: one per core; 0 runs in this "
        "process without Dask)",
    )
    parser.add_argument(
        "--metric",
        default="c3_km2_s2",
        choices=metric_choices(),
        help="what ranks the targets (default c3_km2_s2; DLA by its magnitude)",
    )
    parser.add_argument(
        "--coarse-step-days",
        type=float,
        metavar="DAYS",
        help="grid step of each target-year (default: the base case's steps)",
    )
    parser.add_argument(
        "--tof-max-days",
        type=float,
        metavar="DAYS",
        help="longest time of flight (overrides the base case's limits.tof_max_days; required "
        "if it has none)",
    )
    parser.add_argument(
        "--refine",
        choices=["zoom", "slsqp", "none"],
        default="zoom",
        help="how each best grid arc is refined (default zoom: nested grids to about a minute)",
    )
    parser.add_argument(
        "--targets-per-chunk",
        type=int,
        default=None,
        metavar="N",
        help="targets per task (default 20, under a second of work)",
    )
    parser.add_argument("--first", type=int, metavar="N", help="survey only the first N targets")
    parser.add_argument(
        "--retries", type=int, default=2, metavar="N", help="retries of a failed task (default 2)"
    )
    parser.add_argument(
        "--connect-timeout",
        type=float,
        default=10.0,
        metavar="S",
        help="seconds to wait for the scheduler and its first worker (default 10)",
    )
    parser.add_argument(
        "--max-cells",
        type=positive_int,
        metavar="N",
        help="refuse target-year grids above N cell-arcs (default: $ARCWINDOW_MAX_CELL_ARCS, "
        "else 20,000,000)",
    )
    parser.add_argument("--quiet", action="store_true", help="no progress bar")
    parser.set_defaults(run=run)


def resolve_targets_path(argument: str):
    """A CSV path, or the name of a catalogue in sample_cases/ (with or without ``.csv``)."""
    from pathlib import Path

    from app.samples import SAMPLE_DIR
    from solver.errors import InputError

    path = Path(argument)
    if path.is_file():
        return path
    candidate = SAMPLE_DIR / f"{path.name.removesuffix('.csv')}.csv"
    if candidate.is_file():
        return candidate
    names = ", ".join(p.stem for p in sorted(SAMPLE_DIR.glob("*.csv")))
    raise InputError(
        "TARGETS.csv", argument, f"an element CSV file or a sample catalogue name: {names}"
    )


def run(args: argparse.Namespace) -> int:
    import sys
    import time

    from app.samples import load
    from solver.ephemeris.element_input import read_element_csv
    from solver.errors import InputError
    from solver.survey.cluster import (
        describe_client,
        pending_chunks,
        run_survey,
        survey_client,
        worker_count,
    )
    from solver.survey.estimate import duration_text, estimate_survey, remaining_seconds
    from solver.survey.scan import DEFAULT_TARGETS_PER_CHUNK, SurveySettings, plan_survey
    from solver.survey.store import chunk_folder

    out = output_file(args.out, "--out", (".parquet",))
    if args.workers is not None and args.workers < 0:
        raise InputError("--workers", args.workers, ">= 0 (0 runs in this process)")
    if args.retries < 0:
        raise InputError("--retries", args.retries, ">= 0")
    if not args.connect_timeout > 0:
        raise InputError("--connect-timeout", args.connect_timeout, "> 0 s")
    if args.first is not None and args.first < 1:
        raise InputError("--first", args.first, ">= 1 target")
    targets_path = resolve_targets_path(args.targets)
    base = load(args.case)
    targets = list(
        read_element_csv(targets_path, registry=base.registry(), ecliptic=base.element_ecliptic)
    )
    if args.first is not None:
        targets = targets[: args.first]
    settings = SurveySettings(
        metric=args.metric,
        coarse_step_days=args.coarse_step_days,
        tof_max_days=args.tof_max_days,
        refine=args.refine,
        max_cells=args.max_cells,
    )
    plan = plan_survey(
        base,
        targets,
        args.years,
        settings=settings,
        targets_per_chunk=args.targets_per_chunk or DEFAULT_TARGETS_PER_CHUNK,
        targets_label=targets_path.name,
    )
    first, last = plan.years
    years = f"{first}" if first == last else f"{first}-{last}"
    pending = pending_chunks(plan, out)
    # Nothing left to compute (a finished survey run again): merge without starting a cluster.
    workers = 0 if not pending and not args.scheduler else args.workers
    if pending:
        prepare_solver()  # compiled once here, so neither the estimate nor the workers wait
    with survey_client(args.scheduler, workers, connect_timeout_s=args.connect_timeout) as client:
        print(
            f"Survey of {len(plan.target_names):,} targets x {len(plan.spans)} "
            f"year{'' if len(plan.spans) == 1 else 's'} ({years}) = "
            f"{plan.target_years:,} target-years in {len(plan.chunks):,} chunks, on "
            f"{describe_client(client)}",
            file=sys.stderr,
        )
        estimate = estimate_survey(
            plan, pending, worker_count(client), on_cluster=client is not None
        )
        if pending:
            print(format_estimate(estimate, len(plan.chunks) - len(pending)), file=sys.stderr)
        start = time.perf_counter()
        skipped = len(plan.chunks) - len(pending)
        per_chunk = estimate.target_years / max(1, len(pending))
        bar = None
        if not args.quiet and pending:
            from tqdm import tqdm

            bar = tqdm(
                total=estimate.target_years,
                file=sys.stderr,
                desc="surveying",
                bar_format="{desc}: {percentage:3.0f}%|{bar}| {n_fmt}/{total_fmt} target-years "
                "[{elapsed} elapsed{postfix}]",
                postfix=f"about {duration_text(estimate.seconds)} left",
            )

        def progress(done: int, total: int) -> None:
            if bar is None:
                return
            done_target_years = min(estimate.target_years, round((done - skipped) * per_chunk))
            left = remaining_seconds(estimate, done_target_years, time.perf_counter() - start)
            text = f"about {duration_text(left)} left" if done_target_years < bar.total else "done"
            bar.set_postfix_str(text, refresh=False)
            bar.update(done_target_years - bar.n)

        try:
            result = run_survey(plan, out, client=client, retries=args.retries, progress=progress)
        finally:
            if bar is not None:
                bar.close()
    elapsed = time.perf_counter() - start
    folder = chunk_folder(out)
    if not result.complete:
        key, message = result.failed[0]
        if not result.computed:
            message += (
                " - every chunk failed: check that the scheduler and the workers run the same "
                "arcwindow and packages as this client"
            )
        print(
            f"arcwindow survey: {len(result.failed)} of {len(plan.chunks)} chunks failed after "
            f"{args.retries} retries (first: chunk {key[:12]}: {message}). The "
            f"{len(result.skipped) + len(result.computed)} finished chunks are kept in {folder}; "
            "rerun the same command to finish the rest.",
            file=sys.stderr,
        )
        return 1
    print(format_ranking(result.results, plan, SHOWN_ROWS))
    print(
        f"{len(result.computed)} chunks computed in {elapsed:.1f} s, {len(result.skipped)} "
        f"already done (in {folder}) -> {out}"
    )
    print(CAUTION)
    return 0


def format_estimate(estimate, done_chunks: int) -> str:
    """The line printed before a survey starts: how long it should take, and why."""
    from solver.survey.estimate import duration_text

    workers = f"{estimate.workers} worker{'s' if estimate.workers > 1 else ''}"
    resumed = f"; {done_chunks:,} chunks already done are kept" if done_chunks else ""
    return (
        f"Estimated time: about {duration_text(estimate.seconds)} for "
        f"{estimate.target_years:,} target-years on {workers} "
        f"({1000 * estimate.seconds_per_target_year:.0f} ms each, measured here on "
        f"{estimate.samples} of them){resumed}. Finished chunks are kept: stop with Ctrl+C and "
        "rerun the same command to resume."
    )


def format_ranking(results, plan, rows: int) -> str:
    """The head of the ranking as a plain-text table."""
    from solver.window.metrics import METRICS

    metric = METRICS[plan.settings.metric]
    within = int(results["within_limits"].sum())
    lines = [
        f"{plan.base_case.title}: ranked by {metric.label} ({metric.unit}); {within:,} of "
        f"{len(results):,} targets have an arc within limits",
        f"{'rank':>5}  {'target':<14} {'departure UTC':<20} {'arrival UTC':<20} {'TOF d':>7} "
        f"{'C3':>8} {'DLA':>6} {'v∞ arr':>7} {'Δv tot':>7}  status",
    ]
    for row in results.head(rows).itertuples():
        lines.append(
            f"{row.rank:>5}  {row.target[:14]:<14} {row.departure_utc[:19]:<20} "
            f"{row.arrival_utc[:19]:<20} {row.tof_days:>7.1f} {row.c3_km2_s2:>8.3f} "
            f"{row.dla_deg:>6.1f} {row.vinf_arrival_km_s:>7.3f} {row.dv_total_km_s:>7.3f}  "
            f"{row.status}"
        )
    if len(results) > rows:
        lines.append(f"  ... {len(results) - rows:,} more in the results file")
    return "\n".join(lines)
