"""``arcwindow bodies``: the registry of bodies, with each body's sources and valid dates."""

from __future__ import annotations

import argparse


def add_parser(subparsers: argparse._SubParsersAction) -> None:
    parser = subparsers.add_parser(
        "bodies",
        description="The known bodies: GM, radius, central body, sources and their valid dates.",
    )
    parser.add_argument(
        "--elements-csv", metavar="FILE", help="also list the element bodies of this CSV"
    )
    parser.add_argument("--json", action="store_true", help="print machine-readable JSON")
    parser.set_defaults(run=run)


def _date(jd: float) -> str:
    import math

    from solver.ephemeris.timescales import jd_tdb_to_iso_tdb

    if math.isinf(jd):
        return "any"
    return str(jd_tdb_to_iso_tdb(jd, digits=0))[:10]


def run(args: argparse.Namespace) -> int:
    import json
    import math

    from solver.ephemeris.bodies import default_registry
    from solver.ephemeris.element_input import read_element_csv

    registry = default_registry()
    if args.elements_csv:
        registry = registry.with_bodies(read_element_csv(args.elements_csv))
    rows = []
    for body in registry:
        rows.append(
            {
                "name": body.name,
                "central": body.central_body,
                "gm_km3_s2": None if math.isnan(body.gm_km3_s2) else body.gm_km3_s2,
                "radius_km": None if math.isnan(body.radius_km) else body.radius_km,
                "sources": [
                    {
                        "source": s.source,
                        "from_tdb": _date(s.jd_tdb_min),
                        "to_tdb": _date(s.jd_tdb_max),
                        "accuracy": s.accuracy,
                    }
                    for s in body.sources
                ],
                "note": body.note,
            }
        )
    if args.json:
        print(json.dumps(rows, indent=2))
        return 0
    print(
        f"{'name':16s} {'central':8s} {'GM km^3/s^2':>16s} {'radius km':>10s}  sources (TDB dates)"
    )
    for row in rows:
        gm = "-" if row["gm_km3_s2"] is None else f"{row['gm_km3_s2']:.6e}"
        radius = "-" if row["radius_km"] is None else f"{row['radius_km']:.1f}"
        sources = "; ".join(
            f"{s['source']} {s['from_tdb']} to {s['to_tdb']}" for s in row["sources"]
        )
        print(f"{row['name']:16s} {row['central'] or '-':8s} {gm:>16s} {radius:>10s}  {sources}")
        if row["note"]:
            print(f"{'':16s} {row['note']}")
    print("Default source: de423. Mars to Pluto are system barycentres in DE423.")
    return 0
