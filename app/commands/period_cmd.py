"""``arcwindow period``: the launch period of L consecutive days whose worst day is best: the
least C3 (default) or the most delivered mass."""

from __future__ import annotations

import argparse

from app.commands._common import CAUTION, add_case_argument, prepare_solver, utc


def add_parser(subparsers: argparse._SubParsersAction) -> None:
    parser = subparsers.add_parser(
        "period",
        description="Place a launch period of L consecutive departure days (and, with a fixed "
        "arrival, the arrival date) to minimize the largest C3 the launch vehicle must deliver, "
        "or with --metric delivered_mass_kg to maximize the smallest mass delivered. With a "
        "launch site in the case, each day's launch window is listed. " + CAUTION,
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
    parser.add_argument(
        "--metric",
        default="c3_km2_s2",
        metavar="METRIC",
        help="what each day's arc and the period's worst day are judged by: c3_km2_s2 (default, "
        "minimized) or delivered_mass_kg (maximized); any ranking metric of `arcwindow best`",
    )
    parser.add_argument("--json", action="store_true", help="print JSON")
    parser.set_defaults(run=run)


def run(args: argparse.Namespace) -> int:
    import json
    from dataclasses import asdict

    from app.commands._mass_text import window_lines
    from app.samples import load
    from solver.errors import InputError
    from solver.window.arc_launch import launch_windows
    from solver.window.launch_period import launch_period
    from solver.window.metrics import RANKING_METRICS
    from solver.window.outputs import case_outputs
    from solver.window.provenance import provenance

    if args.metric not in RANKING_METRICS:
        raise InputError("--metric", args.metric, "one of " + ", ".join(RANKING_METRICS))
    case = load(args.case)
    case_outputs(case).check_launch_periods(case)
    case_outputs(case).check_metric(args.metric)
    prepare_solver()
    period = launch_period(case, args.days, args.strategy, args.metric)
    windows = (
        launch_windows(
            case,
            [
                (d.departure_jd_tdb, d.dla_deg, d.rla_deg, d.vinf_departure_km_s)
                for d in period.days
            ],
        )
        if case.launch_site is not None
        else ()
    )
    days = [
        dict(asdict(d), departure_utc=utc(d.departure_jd_tdb), arrival_utc=utc(d.arrival_jd_tdb))
        for d in period.days
    ]
    for day, window in zip(days, windows, strict=False):
        day["launch_window"] = window.as_dict()
    report = {
        "case_title": case.title,
        "length_days": period.length_days,
        "strategy": period.strategy,
        "metric": period.metric,
        "open_utc": utc(period.open_jd_tdb),
        "close_utc": utc(period.close_jd_tdb),
        "arrival_utc": None if period.arrival_jd_tdb is None else utc(period.arrival_jd_tdb),
        "max_c3_km2_s2": period.max_c3_km2_s2,
        "max_abs_dla_deg": period.max_abs_dla_deg,
        "min_delivered_mass_kg": _clean(period.min_delivered_mass_kg),
        "meets_c3_limit": period.meets_c3_limit,
        "meets_dla_limit": period.meets_dla_limit,
        "meets_mass_limit": period.meets_mass_limit,
        "days": [{k: _clean(v) for k, v in d.items()} for d in days],
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
    goal = (
        "the smallest delivered mass maximized"
        if period.metric == "delivered_mass_kg"
        else f"worst {period.metric} made best"
    )
    print(f"{case.title}: {period.length_days}-day launch period ({period.strategy}; {goal})")
    print(f"  opens {report['open_utc']}, closes {report['close_utc']}{arrival}")

    def verdict(flag):
        return "" if flag is None else (" (within limit)" if flag else " (ABOVE limit)")

    print(
        f"  needs C3 {period.max_c3_km2_s2:.3f} km2/s2{verdict(period.meets_c3_limit)}, "
        f"|DLA| {period.max_abs_dla_deg:.2f} deg{verdict(period.meets_dla_limit)}"
    )
    mass = report["min_delivered_mass_kg"]
    if mass is not None:
        below = (
            ""
            if period.meets_mass_limit is None
            else (" (within limit)" if period.meets_mass_limit else " (BELOW limit)")
        )
        print(f"  delivers at least {mass:,.1f} kg{below}")
    print(
        f"  {'departure (UTC)':<22}{'arrival (UTC)':<22}{'TOF d':>9}{'C3 km2/s2':>11}"
        f"{'DLA deg':>9}{'RLA deg':>9}{'v-inf arr km/s':>15}{'delivered kg':>14}"
        + (f"{'window min':>12}" if windows else "")
    )
    for day, window in zip(days, [*windows] or [None] * len(days), strict=True):
        delivered = day["delivered_mass_kg"]
        row = (
            f"  {day['departure_utc']:<22}{day['arrival_utc']:<22}{day['tof_days']:>9.2f}"
            f"{day['c3_km2_s2']:>11.3f}{day['dla_deg']:>9.2f}{day['rla_deg']:>9.2f}"
            f"{day['vinf_arrival_km_s']:>15.3f}"
            + (f"{delivered:>14.1f}" if delivered is not None else f"{'n/a':>14}")
        )
        if window is not None:
            minutes = window.window.total_minutes if window.window is not None else 0.0
            row += f"{minutes:>12.1f}"
        print(row)
    if windows:
        print("  each day's launch window:")
        for window in windows:
            for line in window_lines(window.as_dict(), left_out=False)[3:]:
                print("  " + line)
        print("  left out of the windows:")
        for item in windows[0].left_out:
            print(f"    - {item}")
    print(
        f"  ephemeris {report['provenance']['ephemeris']}; "
        f"case hash {report['provenance']['case_hash']}"
    )
    print(CAUTION)
    return 0


def _clean(value):
    import math

    return None if isinstance(value, float) and not math.isfinite(value) else value
