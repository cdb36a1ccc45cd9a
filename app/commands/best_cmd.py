"""``arcwindow best``: the best arc of a case, refined off the grid to the minute."""

from __future__ import annotations

import argparse

from app.commands._common import (
    CAUTION,
    add_arc_choice,
    add_cache_options,
    add_case_argument,
    check_arc_choice,
    compute_grid,
    metric_choices,
    utc,
)


def add_parser(subparsers: argparse._SubParsersAction) -> None:
    parser = subparsers.add_parser(
        "best",
        description="Solve the window, take its best arc within limits by a metric, and refine "
        "it over continuous departure and arrival times. " + CAUTION,
    )
    add_case_argument(parser)
    parser.add_argument(
        "--metric",
        default=None,
        choices=metric_choices(),
        help="what 'best' optimizes (default: c3_km2_s2 for a launch, dv_total_km_s for a "
        "transfer that starts with a burn; DLA by its magnitude; masses are maximized)",
    )
    add_arc_choice(parser, "only arcs of N revolutions")
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
    from solver.window.outputs import case_outputs
    from solver.window.refine import refine_best

    case = load(args.case)
    check_arc_choice(args, case.max_revolutions)
    fit = case_outputs(case)
    metric = fit.check_metric(args.metric) if args.metric else fit.default_metric
    grid = compute_grid(args, case)
    refined = refine_best(
        case, grid, metric, revolutions=args.revs, branch=args.branch, method=args.refine
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
        "choice": refined.note or f"lowest {refined.metric} within limits",
    }
    if args.json:
        print(json.dumps(report, indent=2))
        return 0
    print(format_arc_report(report))
    if refined.note:
        print(f"  note: {refined.note}")
    ref = report["refinement"]
    print(
        f"  refined from the grid cell {ref['grid_departure_utc']} -> {ref['grid_arrival_utc']}"
        f" ({ref['metric']} {ref['grid_value']:.6g} -> {ref['refined_value']:.6g})"
    )
    print(CAUTION)
    return 0


def format_arc_report(report: dict) -> str:
    """Plain-text summary of an arc (shared with ``arcwindow arc``): the numbers that fit the
    case (solver.window.outputs): a launch's C3 and asymptote, or the burns and phasing of a
    transfer that starts with a burn."""
    from app.commands._mass_text import mass_lines, window_lines
    from solver.window.metrics import METRICS

    lines = [
        f"{report['case_title']}",
        f"  depart {report['departure_utc']}  arrive {report['arrival_utc']}  "
        f"(transfer time {report['transfer_time']})",
        f"  {report['revolutions']} revolution(s), {report['branch']} branch; "
        f"Type {report['transfer_type']}; {report['family']}",
        f"  within limits: {'yes' if report['within_limits'] else 'no'}",
    ]
    burns = report.get("burns")
    if burns:
        lines.append(f"    {'phase angle at departure':<28} {burns['phase_deg']:>14.6f} deg")
        for end in ("departure", "arrival"):
            burn = burns[end]
            parts = burn["components_km_s"]
            lines.append(
                f"    {end + ' burn Δv':<28} {burn['dv_km_s']:>14.6f} km/s  (radial "
                f"{parts['radial']:+.6f}, along-track {parts['along_track']:+.6f}, cross-track "
                f"{parts['cross_track']:+.6f})"
            )
        lines.append(f"    {'total Δv':<28} {burns['total_dv_km_s']:>14.6f} km/s")
    shown_by_burns = {"dv_departure_km_s", "dv_arrival_km_s", "dv_total_km_s"} if burns else set()
    for name, value in report["metrics"].items():
        if name == "tof_days" or value is None or name in shown_by_burns:
            continue
        meta = METRICS[name]
        lines.append(f"    {meta.label:<28} {value:>14.6f} {meta.unit}")
    if "delivered_mass_kg" in report["units"]:  # the case gives a spacecraft mass
        lines.extend(mass_lines(report["mass_budget"], report["vehicles"]))
    if report["launch_window"]["site"] is not None:
        lines.extend(window_lines(report["launch_window"]))
    prov = report["provenance"]
    lines.append(
        f"  ephemeris: {prov['ephemeris']}; {prov['engine']}; case hash {prov['case_hash']}"
    )
    if burns:
        lines.append(f"  burn directions: {burns['frame']}")
    return "\n".join(lines)
