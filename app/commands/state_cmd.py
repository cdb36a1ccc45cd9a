"""``arcwindow state``: position and velocity of one body at one UTC date."""

from __future__ import annotations

import argparse


def add_parser(subparsers: argparse._SubParsersAction) -> None:
    parser = subparsers.add_parser(
        "state",
        description=(
            "Position and velocity of BODY relative to a central body at a UTC date, from the "
            "JPL DE423 ephemeris (default) or the mean-element table."
        ),
    )
    parser.add_argument("body", metavar="BODY", help="body name (see 'arcwindow bodies')")
    parser.add_argument(
        "utc", metavar="UTC", help="ISO 8601 UTC date or date-time, e.g. 2026-05-01T12:00:00Z"
    )
    parser.add_argument("--central", default="sun", help="central body (default: sun)")
    parser.add_argument(
        "--frame",
        default="icrf",
        choices=["icrf", "ecliptic", "ecliptic_iau1976", "equator"],
        help="axes: icrf (equatorial J2000, default), ecliptic (J2000, IAU 2006 obliquity), "
        "ecliptic_iau1976 (J2000, IAU 1976 obliquity) or the central body's equator",
    )
    parser.add_argument(
        "--source",
        default=None,
        choices=["de423", "mean"],
        help="ephemeris for the Sun, planets and Moon (default: de423)",
    )
    parser.add_argument(
        "--case",
        metavar="CASE",
        help="also know the bodies defined in this case (a TOML file or a sample case name)",
    )
    parser.add_argument(
        "--elements-csv",
        metavar="FILE",
        help="also know the element bodies of this CSV (format: docs/case-format.md; rows in the "
        "ecliptic read with the --case's ephemeris.ecliptic, else IAU 2006)",
    )
    parser.add_argument("--json", action="store_true", help="print machine-readable JSON")
    parser.set_defaults(run=run)


def run(args: argparse.Namespace) -> int:
    import json

    import numpy as np

    from solver.constants import AU_KM
    from solver.ephemeris.bodies import default_registry
    from solver.ephemeris.element_input import read_element_csv
    from solver.ephemeris.states import states
    from solver.ephemeris.timescales import FUTURE_UTC_NOTE, LAST_LEAP_SECOND_UTC, utc_to_jd_tdb
    from solver.errors import InputError

    registry = default_registry()
    ecliptic = "iau2006"
    if args.case:
        from app.samples import load

        case = load(args.case)
        registry, ecliptic = case.registry(), case.element_ecliptic
    if args.elements_csv:
        registry = registry.with_bodies(
            read_element_csv(args.elements_csv, registry=registry, ecliptic=ecliptic)
        )
    if (
        registry.get(args.body, field="BODY").key
        == registry.get(args.central, field="--central").key
    ):
        raise InputError(
            "--central",
            args.central,
            f"a body other than BODY ({args.body}): a body's state about itself is zero",
        )
    jd_tdb = float(utc_to_jd_tdb(args.utc, field="UTC"))
    r, v = states(
        args.body,
        jd_tdb,
        central=args.central,
        frame=args.frame,
        source=args.source,
        registry=registry,
        field="UTC",
    )
    entry = registry.get(args.body)
    body = entry.name
    central = registry.get(args.central).name
    source = args.source or entry.default_source
    if args.json:
        print(
            json.dumps(
                {
                    "body": body,
                    "central": central,
                    "frame": args.frame,
                    "source": source,
                    "elements_frame": None if entry.elements is None else entry.elements.frame,
                    "utc": args.utc,
                    "jd_tdb": jd_tdb,
                    "r_km": [float(x) for x in r],
                    "v_km_s": [float(x) for x in v],
                },
                indent=2,
            )
        )
        return 0
    r_norm = float(np.linalg.norm(r))
    print(f"{body} relative to {central}, {args.frame} frame, source {source}")
    if entry.elements is not None:
        print(f"        {entry.note}")
    print(f"epoch   {args.utc} UTC = JD {jd_tdb:.9f} TDB")
    print(f"r_km    {r[0]:+.6e} {r[1]:+.6e} {r[2]:+.6e}   |r| = {r_norm:.6e} km "
          f"({r_norm / AU_KM:.6f} au)")  # fmt: skip
    print(f"v_km_s  {v[0]:+.9f} {v[1]:+.9f} {v[2]:+.9f}   |v| = {np.linalg.norm(v):.9f} km/s")
    if args.utc.strip()[:10] > LAST_LEAP_SECOND_UTC:
        print(f"note: {FUTURE_UTC_NOTE}")
    return 0
