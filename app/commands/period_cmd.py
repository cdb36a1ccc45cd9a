"""``arcwindow period``: the launch period of L consecutive days that needs the least C3."""

from __future__ import annotations

import argparse

from app.commands._common import CAUTION, add_case_argument, prepare_solver, utc


def add_parser(subparsers: argparse._SubParsersAction) -> None:
    parser = subparsers.add_parser(
        "period",
        description="Place a launch period of L consecutive departure days (and, with a fixed "
        "arrival, the arrival date) to minimize the largest C3 the launch vehicle "
        "must deliver. " + CAUTION,
    )
    add_case_argument(parser)
    parser.add_argument(
        "--days", required=True, type=int, metavar="L", help="length of the launch period, days"
    )
    parser.add_argument(
        "--strategy",
        default="fixed-arrival",
        choices=["fixed-arrival", "free-arrival"],
        help="one arrival date for the whole period (default), or each day's own",
    )
    parser.add_argument("--json", action="store_true", help="print JSON")
    parser.set_defaults(run=run)


def run(args: argparse.Namespace) -> int:
    import json
    from dataclasses import asdict

    from app.samples import load
    from solver.window.launch_period import launch_period
    from solver.window.outputs import case_outputs
    from solver.window.provenance import provenance

    case = load(args.case)
    case_outputs(case).check_launch_periods(case)
    prepare_solver()
    period = launch_period(case, args.days, args.strategy)
    days = [
        dict(asdict(d), departure_utc=utc(d.departure_jd_tdb), arrival_utc=utc(d.arrival_jd_tdb))
        for d in period.days
    ]
    report = {
        "case_title": case.title,
        "length_days": period.length_days,
        "strategy": period.strategy,
        "open_utc": utc(period.open_jd_tdb),
        "close_utc": utc(period.close_jd_tdb),
        "arrival_utc": None if period.arrival_jd_tdb is None else utc(period.arrival_jd_tdb),
        "max_c3_km2_s2": period.max_c3_km2_s2,
        "max_abs_dla_deg": period.max_abs_dla_deg,
        "meets_c3_limit": period.meets_c3_limit,
        "meets_dla_limit": period.meets_dla_limit,
        "days": days,
        "provenance": provenance(case),
    }
    if args.json:
        print(json.dumps(report, indent=2))
        return 0
    arrival = (
        f", arriving {report['arrival_utc']}"
        if report["arrival_utc"]
        else ", each day with its own best arrival"
    )
    print(f"{case.title}: {period.length_days}-day launch period ({period.strategy})")
    print(f"  opens {report['open_utc']}, closes {report['close_utc']}{arrival}")

    def verdict(flag):
        return "" if flag is None else (" (within limit)" if flag else " (ABOVE limit)")

    print(
        f"  needs C3 {period.max_c3_km2_s2:.3f} km2/s2{verdict(period.meets_c3_limit)}, "
        f"|DLA| {period.max_abs_dla_deg:.2f} deg{verdict(period.meets_dla_limit)}"
    )
    print(
        f"  {'departure (UTC)':<22}{'arrival (UTC)':<22}{'TOF d':>9}{'C3 km2/s2':>11}"
        f"{'DLA deg':>9}{'RLA deg':>9}{'v-inf arr km/s':>15}"
    )
    for d in days:
        print(
            f"  {d['departure_utc']:<22}{d['arrival_utc']:<22}{d['tof_days']:>9.2f}"
            f"{d['c3_km2_s2']:>11.3f}{d['dla_deg']:>9.2f}{d['rla_deg']:>9.2f}"
            f"{d['vinf_arrival_km_s']:>15.3f}"
        )
    print(
        f"  ephemeris {report['provenance']['ephemeris']}; "
        f"case hash {report['provenance']['case_hash']}"
    )
    print(CAUTION)
    return 0
