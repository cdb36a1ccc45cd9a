"""``arcwindow best``: the best arc of a case, refined off the grid to the minute."""

from __future__ import annotations

import argparse

from app.commands._common import (
    CAUTION,
    add_cache_options,
    add_case_argument,
    compute_grid,
    metric_choices,
    utc,
)


def add_parser(subparsers: argparse._SubParsersAction) -> None:
    parser = subparsers.add_parser(
        "best",
        help="the best arc within limits, refined to the minute",
        description="Solve the window, take its best arc within limits by a metric, and refine "
        "it over continuous departure and arrival times. " + CAUTION,
    )
    add_case_argument(parser)
    parser.add_argument(
        "--metric",
        default="c3_km2_s2",
        choices=metric_choices(),
        help="what 'best' optimizes (default c3_km2_s2; DLA by its magnitude; masses are "
        "maximized)",
    )
    parser.add_argument("--revs", type=int, metavar="N", help="only arcs of N revolutions")
    parser.add_argument("--branch", choices=["low", "high"], help="branch of an N-revolution arc")
    parser.add_argument(
        "--refine",
        default="zoom",
        choices=["zoom", "slsqp"],
        help="nested grids down to the minute (default), or SLSQP",
    )
    parser.add_argument("--json", action="store_true", help="print JSON")
    add_cache_options(parser)
    parser.set_defaults(run=run)


def run(args: argparse.Namespace) -> int:
    import json

    from app.samples import load
    from solver.files.export import arc_json
    from solver.window.mass import check_mass_metric
    from solver.window.refine import refine_best

    case = load(args.case)
    check_mass_metric(case, args.metric, "--metric")
    grid = compute_grid(args, case)
    refined = refine_best(
        case, grid, args.metric, revolutions=args.revs, branch=args.branch, method=args.refine
    )
    report = arc_json(case, refined.arc)
    report["refinement"] = {
        "metric": refined.metric,
        "grid_value": refined.grid_arc.metrics[refined.metric],
        "refined_value": refined.arc.metrics[refined.metric],
        "grid_departure_utc": utc(refined.grid_arc.departure_jd_tdb),
        "grid_arrival_utc": utc(refined.grid_arc.arrival_jd_tdb),
        "evaluations": refined.evaluations,
        "message": refined.message,
    }
    if args.json:
        print(json.dumps(report, indent=2))
        return 0
    print(format_arc_report(report))
    ref = report["refinement"]
    print(
        f"  refined from the grid cell {ref['grid_departure_utc']} -> {ref['grid_arrival_utc']}"
        f" ({ref['metric']} {ref['grid_value']:.6g} -> {ref['refined_value']:.6g})"
    )
    print(CAUTION)
    return 0


def format_arc_report(report: dict) -> str:
    """Plain-text summary of an arc (shared with ``arcwindow arc``)."""
    from app.commands._mass_text import mass_lines, window_lines
    from solver.window.metrics import METRICS

    lines = [
        f"{report['case_title']}",
        f"  depart {report['departure_utc']}  arrive {report['arrival_utc']}  "
        f"({report['metrics']['tof_days']:.3f} days)",
        f"  {report['revolutions']} revolution(s), {report['branch']} branch; "
        f"Type {report['transfer_type']}; {report['family']}",
        f"  within limits: {'yes' if report['within_limits'] else 'no'}",
    ]
    for name, value in report["metrics"].items():
        if name == "tof_days" or value is None:
            continue
        meta = METRICS[name]
        lines.append(f"    {meta.label:<28} {value:>14.6f} {meta.unit}")
    if report["mass_budget"]["injected_mass_kg"] is not None or report["vehicles"]:
        lines.extend(mass_lines(report["mass_budget"], report["vehicles"]))
    else:
        lines.append(f"  mass: none ({report['mass_reason']})")
    if report["launch_window"]["site"] is not None:
        lines.extend(window_lines(report["launch_window"]))
    prov = report["provenance"]
    lines.append(
        f"  ephemeris {prov['ephemeris']}; {prov['engine']}; case hash {prov['case_hash']}"
    )
    return "\n".join(lines)
