"""``arcwindow sequence``: search a case's flyby sequences, round trips and tours.

    arcwindow sequence CASE [--top K] [--seed S] [--json] [--out FILE.csv|.parquet]
    arcwindow sequence CASE --evaluate UTC,UTC,... [--arcs 0.0.1h.0] [--json] [--oem FILE]
    arcwindow sequence CASE --grid [--beam N] [--clock-step-deg D]
    arcwindow sequence CASE --years 2031-2040 | --targets TARGETS.csv [--workers N]

Solver modules are imported inside ``run`` so that ``arcwindow --help`` stays fast.
"""

from __future__ import annotations

import argparse
import sys
import time

from app.commands._common import CAUTION, output_file


def add_parser(subparsers: argparse._SubParsersAction) -> None:
    parser = subparsers.add_parser(
        "sequence",
        description="Search the encounter dates of a case's sequences (departure, flybys and "
        "stops, target), rank the K best distinct candidates within limits, or evaluate one set "
        "of dates. A case without a [sequence] section is a sequence of one leg. " + CAUTION,
    )
    parser.add_argument(
        "case",
        metavar="CASE",
        help="a TOML case file, or a sample case name (sample_cases/sequences/, sample_cases/)",
    )
    parser.add_argument("--top", type=int, default=5, metavar="K", help="candidates (default 5)")
    parser.add_argument("--seed", type=int, default=0, metavar="S", help="random seed (default 0)")
    parser.add_argument("--json", action="store_true", help="print JSON")
    parser.add_argument(
        "--out", metavar="FILE", help="write the candidates to FILE.csv or FILE.parquet"
    )
    parser.add_argument(
        "--oem", metavar="FILE", help="write the best (or evaluated) candidate as CCSDS OEM"
    )
    parser.add_argument(
        "--evaluate",
        metavar="UTC,UTC,...",
        help="evaluate one set of encounter dates instead of searching: the departure, each "
        "flyby, each stop's arrival and departure, the final arrival",
    )
    parser.add_argument(
        "--arcs",
        metavar="ARCS",
        help="with --evaluate: each leg's arc, joined by '.': 0 (one revolution or less), Nl "
        "or Nh (N revolutions, low or high branch), * (the best); default: the best of each",
    )
    parser.add_argument(
        "--resonance",
        metavar="PITCH/CLOCK,...",
        help="with --evaluate: each resonant leg's pitch and clock angles, deg (default: the "
        "best for the dates)",
    )
    parser.add_argument(
        "--sequence",
        action="append",
        metavar="NAME",
        help="only this sequence of the case (repeatable; default: every sequence, ranked "
        "together)",
    )
    parser.add_argument(
        "--grid",
        action="store_true",
        help="search a coarse grid of dates with pruning instead (the same result every run)",
    )
    parser.add_argument(
        "--beam",
        type=int,
        default=20_000,
        metavar="N",
        help="grid: partial sequences kept per leg (default 20000)",
    )
    parser.add_argument(
        "--clock-step-deg",
        type=float,
        default=10.0,
        metavar="DEG",
        help="grid: step of a resonant leg's clock angle (default 10)",
    )
    parser.add_argument(
        "--time-limit", type=float, metavar="SECONDS", help="stop the search after this long"
    )
    parser.add_argument(
        "--restarts",
        type=int,
        default=8,
        metavar="N",
        help="populations searched together (default 8)",
    )
    parser.add_argument(
        "--population",
        type=int,
        default=20,
        metavar="N",
        help="population per variable (default 20)",
    )
    parser.add_argument(
        "--generations", type=int, default=300, metavar="N", help="generations (default 300)"
    )
    parser.add_argument(
        "--method",
        choices=["islands", "scipy"],
        default="islands",
        help="populations evolved in lockstep (default) or scipy's differential_evolution",
    )
    parser.add_argument(
        "--years", metavar="Y1-Y2", help="survey: rank launch years by their best candidate"
    )
    parser.add_argument(
        "--targets",
        metavar="TARGETS",
        help="survey: rank targets (an element CSV or a sample catalogue) by their best "
        "candidate, each replacing the case's target",
    )
    parser.add_argument(
        "--workers", type=int, metavar="N", help="survey: local Dask workers (0: this process)"
    )
    parser.add_argument("--scheduler", metavar="ADDRESS", help="survey: an existing Dask cluster")
    parser.add_argument("--quiet", action="store_true", help="no progress on stderr")
    parser.set_defaults(run=run)


class _Progress:
    """Progress on stderr: one status line rewritten in place on a terminal, a line every few
    seconds otherwise (a log file)."""

    def __init__(self, quiet: bool) -> None:
        self.quiet = quiet
        self.tty = sys.stderr.isatty()
        self.last = 0.0
        self.width = 0

    def __call__(self, text: str) -> None:
        now = time.monotonic()
        if self.quiet or now - self.last < (0.25 if self.tty else 5.0):
            return
        self.last = now
        line = text[:150]
        if self.tty:
            sys.stderr.write("\r" + line.ljust(self.width))
            self.width = len(line)
        else:
            sys.stderr.write(line + "\n")
        sys.stderr.flush()

    def done(self) -> None:
        if self.width and not self.quiet:
            sys.stderr.write("\r" + " " * self.width + "\r")
            sys.stderr.flush()


def run(args: argparse.Namespace) -> int:
    import json

    from app.samples import resolve_sequence_case_path
    from solver.sequence.spec import load_sequence_case

    sequence_case = load_sequence_case(resolve_sequence_case_path(args.case))
    # Output paths are checked (and their folders made) before any search: a bad path is one
    # line now, not a traceback after minutes of work.
    out_path = output_file(args.out, "--out", (".csv", ".parquet")) if args.out else None
    oem_path = output_file(args.oem, "--oem", None) if args.oem else None
    prepare_sequence_solver()
    if args.years or args.targets:
        from app.commands.sequence_survey import run_survey

        return run_survey(args, sequence_case)
    progress = _Progress(args.quiet or args.json)
    interrupted = False
    notes: list[str] = []
    if args.evaluate:
        candidates = [_evaluate(sequence_case, args)]
    elif args.grid:
        from solver.sequence.grid import GridSettings, grid_search_case

        try:
            result = grid_search_case(
                sequence_case,
                GridSettings(top=args.top, beam=args.beam, clock_step_deg=args.clock_step_deg),
                names=args.sequence,
                progress=progress,
            )
        finally:
            progress.done()
        candidates = result.candidates
        notes.append(f"grid search: {result.evaluations:,} evaluations in {result.seconds:.1f} s")
    else:
        from solver.sequence.search import SearchSettings, search_case

        settings = SearchSettings(
            top=args.top,
            seed=args.seed,
            restarts=args.restarts,
            population=args.population,
            generations=args.generations,
            time_limit_s=args.time_limit,
            method=args.method,
        )
        try:
            found = search_case(sequence_case, settings, names=args.sequence, progress=progress)
        finally:
            progress.done()
        candidates = found.candidates
        interrupted = found.interrupted
        notes.append(
            f"search: {found.evaluations:,} evaluations in {found.seconds:.1f} s (seed "
            f"{args.seed}, {args.method})"
            + ("; stopped early, the best found so far" if interrupted else "")
        )

    if out_path is not None:
        from solver.files.sequence_export import write_candidates

        write_candidates(sequence_case, candidates, out_path)
    if oem_path is not None and candidates:
        from solver.files.atomic import write_bytes_atomic
        from solver.files.sequence_export import candidate_oem_text

        text = candidate_oem_text(sequence_case, candidates[0])
        write_bytes_atomic(oem_path, text.encode("ascii"), checksum=True)

    if args.json:
        from solver.files.sequence_export import candidate_json

        if args.evaluate:
            print(json.dumps(candidate_json(sequence_case, candidates[0]), indent=2))
        else:
            from solver.sequence.provenance import sequence_provenance

            report = {
                "case_title": sequence_case.case.title,
                "interrupted": interrupted,
                "notes": notes,
                "candidates": [
                    {
                        k: v
                        for k, v in candidate_json(sequence_case, c, rank=i).items()
                        if k != "provenance"
                    }
                    for i, c in enumerate(candidates, start=1)
                ],
                "provenance": sequence_provenance(sequence_case),
            }
            print(json.dumps(report, indent=2))
    else:
        print(format_report(sequence_case, candidates, notes))
        print(CAUTION)
    return 130 if interrupted else 0


def prepare_sequence_solver() -> None:
    """The engine's kernels and the sequence search's own, compiled now if this machine has not
    yet (said on stderr, with progress); silent when they are."""
    from app.commands._common import prepare_solver
    from solver.mechanics.kernels import is_compiled_here
    from solver.sequence.kernels import sequence_kernels

    prepare_solver()
    kernels = sequence_kernels()
    pending = [k for k in kernels if not is_compiled_here(k.dispatcher)]
    if not pending:
        return
    print(
        f"arcwindow: preparing the sequence search, once: compiling {len(pending)} kernels "
        "for this machine (up to a minute; later runs load them in under a second)",
        file=sys.stderr,
        flush=True,
    )
    for kernel in kernels:
        kernel.warm()
    print("arcwindow: sequence search ready", file=sys.stderr, flush=True)


def _evaluate(sequence_case, args):
    from solver.errors import InputError
    from solver.sequence.record import candidate_from_link

    names = args.sequence or [sequence_case.sequences[0].name]
    if len(names) > 1:
        raise InputError("--sequence", ",".join(names), "one sequence with --evaluate")
    parameters = {"seq": names[0], "at": args.evaluate.replace(",", "~")}
    if args.arcs:
        parameters["arcs"] = args.arcs
    if args.resonance:
        parameters["res"] = args.resonance
    try:
        return candidate_from_link(sequence_case, parameters)
    except InputError as exc:
        field = {"at": "--evaluate", "arcs": "--arcs", "res": "--resonance"}.get(
            exc.field, exc.field
        )
        raise InputError(field, exc.value, exc.accepted) from None


def _f(value: float, digits: int = 3) -> str:
    import math

    return "-" if not math.isfinite(value) else f"{value:.{digits}f}"


def format_report(sequence_case, candidates, notes: list[str]) -> str:
    """Plain-text summary of ranked candidates: one block per candidate."""
    from solver.ephemeris.timescales import jd_tdb_to_utc
    from solver.sequence.provenance import sequence_label, sequence_provenance
    from solver.sequence.result import reason_text

    def utc(jd: float) -> str:
        return str(jd_tdb_to_utc(jd, digits=0))[:16]

    lines = [sequence_case.case.title]
    if not candidates:
        lines.append("  no candidate found")
    for rank, c in enumerate(candidates, start=1):
        spec = sequence_case.sequence(c.sequence)
        status = (
            "within limits"
            if c.within_limits
            else (
                "outside limits: " + "; ".join(c.breaches) if c.ok else "no arc: " + reason_text(c)
            )
        )
        lines.append(
            f"#{rank} {sequence_label(spec)}: total Δv {_f(c.dv_total_km_s)} km/s, "
            f"{_f(c.duration_days, 1)} days, {c.objective} {_f(c.objective_value, 4)}; {status}"
        )
        for e in c.encounters:
            when = utc(e.jd_tdb) + (f" to {utc(e.leave_jd_tdb)}" if e.kind == "stop" else "")
            text = f"    {e.kind:<9} {e.body:<10} {when:<16}"
            if e.kind == "departure":
                text += (
                    f"  v∞ out {_f(e.vinf_out_km_s)}  C3 {_f(e.c3_km2_s2, 2)}  "
                    f"DLA {_f(e.dla_deg, 1)}  Δv {_f(e.dv_km_s)}"
                )
            elif e.kind == "flyby":
                text += (
                    f"  v∞ in {_f(e.vinf_in_km_s)} out {_f(e.vinf_out_km_s)}  turn "
                    f"{_f(e.turn_angle_deg, 1)} deg  periapsis altitude "
                    f"{_f(e.periapsis_altitude_km, 0)} km (min {_f(e.altitude_min_km, 0)})  "
                    f"Δv {_f(e.dv_km_s)}"
                )
            elif e.kind == "stop":
                text += (
                    f"  v∞ in {_f(e.vinf_in_km_s)} out {_f(e.vinf_out_km_s)}  stay "
                    f"{_f(e.stay_days, 1)} d  Δv {_f(e.dv_in_km_s)} + {_f(e.dv_out_km_s)}"
                )
            else:
                text += f"  v∞ in {_f(e.vinf_in_km_s)}  Δv {_f(e.dv_km_s)}"
            lines.append(text)
        lines.append(
            "    legs: "
            + "; ".join(
                f"{leg.tof_days:.1f} d, "
                + ("0 rev" if leg.revolutions == 0 else f"{leg.revolutions} rev {leg.branch}")
                for leg in c.legs
            )
        )
    prov = sequence_provenance(sequence_case)
    lines.extend(f"  {note}" for note in notes)
    lines.append(
        f"  Δv counted: {prov['departure_dv']}; {prov['flyby_dv']}; {prov['stop_dv']}; "
        f"arrival {prov['arrival_dv']}"
    )
    lines.append(
        f"  ephemeris {prov['ephemeris']}; {prov['engine']}; case hash {prov['case_hash']}"
    )
    return "\n".join(lines)
