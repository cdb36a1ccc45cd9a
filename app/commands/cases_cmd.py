"""``arcwindow cases``: the built-in sample cases."""

from __future__ import annotations

import argparse


def add_parser(subparsers: argparse._SubParsersAction) -> None:
    parser = subparsers.add_parser("cases", description="List the built-in sample cases.")
    parser.add_argument("--json", action="store_true", help="print JSON")
    parser.set_defaults(run=run)


def run(args: argparse.Namespace) -> int:
    import json

    from app.samples import DEFAULT_CASE, sample_case_paths
    from solver.window.case import load_case

    rows = []
    for path in sample_case_paths():
        case = load_case(path)
        rows.append(
            {
                "name": path.stem,
                "path": str(path),
                "title": case.title,
                "route": f"{case.departure_body} -> {case.target_body} about {case.central_body}",
                "departure": f"{case.departure_start} to {case.departure_end}",
                "arrival": f"{case.arrival_start} to {case.arrival_end}",
                "max_revolutions": case.max_revolutions,
                "default": path.stem == DEFAULT_CASE,
            }
        )
    from app.samples import sequence_case_paths
    from solver.sequence.provenance import sequence_label
    from solver.sequence.spec import load_sequence_case

    sequence_rows = []
    for path in sequence_case_paths():
        sequence_case = load_sequence_case(path)
        sequence_rows.append(
            {
                "name": path.stem,
                "path": str(path),
                "title": sequence_case.case.title,
                "sequences": [sequence_label(s) for s in sequence_case.sequences],
                "default": False,
            }
        )
    if args.json:
        print(json.dumps(rows + sequence_rows, indent=2))
        return 0
    for row in rows:
        mark = " (default)" if row["default"] else ""
        print(f"{row['name']}{mark}: {row['title']}")
        print(
            f"    {row['route']}; departure {row['departure']}; arrival {row['arrival']}; "
            f"up to {row['max_revolutions']} revolutions"
        )
    if sequence_rows:
        print("Sequences (arcwindow sequence CASE):")
    for row in sequence_rows:
        print(f"{row['name']}: {row['title']}")
        for label in row["sequences"]:
            print(f"    {label}")
    return 0
