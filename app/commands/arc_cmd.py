"""``arcwindow arc``: one arc between two dates, with CCSDS OEM and JSON exports."""

from __future__ import annotations

import argparse

from app.commands._common import (
    CAUTION,
    add_arc_choice,
    add_case_argument,
    check_arc_choice,
    output_file,
    prepare_solver,
)


def add_parser(subparsers: argparse._SubParsersAction) -> None:
    parser = subparsers.add_parser(
        "arc",
        description="Solve the arc of a case between a departure and an arrival date (UTC) and "
        "write it as a CCSDS OEM 2.0 message. " + CAUTION,
    )
    add_case_argument(parser)
    parser.add_argument("--depart", required=True, metavar="UTC", help="departure, ISO 8601 UTC")
    parser.add_argument("--arrive", required=True, metavar="UTC", help="arrival, ISO 8601 UTC")
    add_arc_choice(parser, "complete revolutions (default: the best arc by --metric)")
    parser.add_argument(
        "--metric",
        default=None,
        help="without --revs, the arc that minimizes this metric (default: c3_km2_s2 for a "
        "launch, dv_total_km_s for a transfer that starts with a burn)",
    )
    parser.add_argument("--oem", metavar="FILE", help="write the arc as a CCSDS OEM (KVN) file")
    parser.add_argument("--json", action="store_true", help="print JSON")
    parser.set_defaults(run=run)


def run(args: argparse.Namespace) -> int:
    import json

    from app.commands.best_cmd import format_arc_report
    from app.samples import load
    from solver.ephemeris.timescales import utc_to_jd_tdb
    from solver.errors import InputError
    from solver.files.atomic import write_bytes_atomic
    from solver.files.export import arc_json, arc_oem_text
    from solver.reasons import describe
    from solver.window.cell import select_arc, solve_cell
    from solver.window.outputs import case_outputs

    case = load(args.case)
    oem_path = output_file(args.oem, "--oem", None) if args.oem else None
    depart = float(utc_to_jd_tdb(args.depart, field="--depart"))
    arrive = float(utc_to_jd_tdb(args.arrive, field="--arrive"))
    if arrive <= depart:
        raise InputError("--arrive", args.arrive, f"a date after --depart ({args.depart})")
    check_arc_choice(args, case.max_revolutions)
    fit = case_outputs(case)
    metric = fit.check_metric(args.metric) if args.metric else fit.default_metric
    prepare_solver()
    arcs = solve_cell(case, depart, arrive)
    arc = select_arc(arcs, args.revs, args.branch, metric)
    if not arc.ok:
        raise InputError(
            "--depart/--arrive",
            f"{args.depart} -> {args.arrive}",
            f"dates with an arc ({describe(arc.reason)})",
        )
    if oem_path is not None:
        write_bytes_atomic(oem_path, arc_oem_text(case, arc).encode("ascii"), checksum=True)
    report = arc_json(case, arc)
    if args.json:
        print(json.dumps(report, indent=2))
    else:
        print(format_arc_report(report))
        if args.oem:
            print(f"  OEM written to {args.oem}")
        print(CAUTION)
    return 0
