"""``arcwindow launch``: the daily launch window of one departure date."""

from __future__ import annotations

import argparse

from app.commands._common import (
    CAUTION,
    add_case_argument,
    metric_choices,
    prepare_solver,
    utc,
)


def add_parser(subparsers: argparse._SubParsersAction) -> None:
    parser = subparsers.add_parser(
        "launch",
        description="Print the launch window of one UTC day for the case's launch site: the "
        "times at which the site lies in a plane containing the departure asymptote with a "
        "launch azimuth in the site's range, each with its azimuth, parking-orbit inclination "
        "and coast, and what the model leaves out. The asymptote is the arc's departing on "
        "--depart and arriving on --arrive, or, without --arrive, the best arc of that "
        "departure date within limits. " + CAUTION,
    )
    add_case_argument(parser)
    parser.add_argument("--depart", required=True, metavar="UTC", help="departure, ISO 8601 UTC")
    parser.add_argument(
        "--arrive", metavar="UTC", help="arrival, ISO 8601 UTC (default: the best by --metric)"
    )
    parser.add_argument(
        "--metric",
        default="c3_km2_s2",
        choices=metric_choices(),
        help="without --arrive, the arrival date whose arc is best by this metric",
    )
    parser.add_argument("--json", action="store_true", help="print JSON")
    parser.set_defaults(run=run)


def run(args: argparse.Namespace) -> int:
    import json

    from app.commands._mass_text import mass_lines, window_lines
    from app.samples import load
    from solver.ephemeris.timescales import utc_to_jd_tdb
    from solver.errors import InputError
    from solver.reasons import describe
    from solver.window.arc_launch import arc_launch_window, mass_budget, vehicle_comparison
    from solver.window.cell import select_arc, solve_cell

    case = load(args.case)
    if case.launch_site is None:
        raise InputError(
            "launch_site",
            "(missing)",
            "a case with a [launch_site] table (latitude_deg, longitude_deg, azimuth_min_deg, "
            "azimuth_max_deg)",
        )
    depart = float(utc_to_jd_tdb(args.depart, field="--depart"))
    prepare_solver()
    if args.arrive is not None:
        arrive = float(utc_to_jd_tdb(args.arrive, field="--arrive"))
        if arrive <= depart:
            raise InputError("--arrive", args.arrive, f"a date after --depart ({args.depart})")
        arc = select_arc(solve_cell(case, depart, arrive), metric=args.metric)
        if not arc.ok:
            raise InputError(
                "--depart/--arrive",
                f"{args.depart} -> {args.arrive}",
                f"dates with an arc ({describe(arc.reason)})",
            )
    else:
        arc = _best_arrival(case, args.depart, depart, args.metric)
    report = arc_launch_window(case, arc).as_dict()
    budget = mass_budget(case, arc).as_dict()
    out = {
        "case_title": case.title,
        "departure_utc": utc(arc.departure_jd_tdb),
        "arrival_utc": utc(arc.arrival_jd_tdb),
        "revolutions": arc.revolutions,
        "branch": arc.branch,
        "within_limits": arc.within,
        "c3_km2_s2": arc.metrics["c3_km2_s2"],
        "launch_window": report,
        "mass_budget": budget,
        "vehicles": [b.as_dict() for b in vehicle_comparison(case, arc)],
    }
    if args.json:
        print(json.dumps(out, indent=2))
        return 0
    print(f"{case.title}: launch on {report['window']['day_utc']} (UTC)")
    print(
        f"  arc: depart {out['departure_utc']}, arrive {out['arrival_utc']} "
        f"({arc.tof_days:.2f} days, {arc.revolutions} rev {arc.branch}); C3 "
        f"{out['c3_km2_s2']:.3f} km2/s2; within limits: {'yes' if arc.within else 'no'}"
    )
    for line in window_lines(report):
        print(line)
    if case.mass.gives_mass:
        for line in mass_lines(budget, out["vehicles"]):
            print(line)
    print(CAUTION)
    return 0


def _best_arrival(case, depart_text: str, depart_jd_tdb: float, metric: str):
    """The best arc within limits departing at ``depart_jd_tdb``, over the case's arrivals."""
    from solver.ephemeris.timescales import jd_tdb_to_utc
    from solver.errors import InputError
    from solver.window.best import best_grid_arc
    from solver.window.grid import compute_window

    text = str(jd_tdb_to_utc(depart_jd_tdb, digits=3))
    row = case.with_changes(**{"window.departure_start": text, "window.departure_end": text})
    arc = best_grid_arc(row, compute_window(row), metric)
    if arc is None:
        raise InputError(
            "--depart",
            depart_text,
            "a departure date with an arc within the case's limits (or give --arrive)",
        )
    return arc
