"""``arcwindow bench``: print speed figures as ratios to baselines measured in the same run."""

from __future__ import annotations

import argparse


def add_parser(subparsers: argparse._SubParsersAction) -> None:
    from app.bench import OPTIONAL_SECTIONS, SECTIONS

    parser = subparsers.add_parser(
        "bench",
        description="Speed figures, each beside a simple baseline measured in the same run.",
    )
    parser.add_argument(
        "--section",
        action="append",
        choices=list(SECTIONS) + list(OPTIONAL_SECTIONS),
        help="run only this section (repeatable); default: all standard sections",
    )
    parser.add_argument("--json", action="store_true", help="print machine-readable JSON")
    parser.add_argument(
        "--quick", action="store_true", help="small sizes: a smoke run, not figures to quote"
    )
    if "survey" in OPTIONAL_SECTIONS:
        parser.add_argument("--survey", action="store_true", help="also run the survey benchmark")
    parser.set_defaults(run=run)


def run(args: argparse.Namespace) -> int:
    from app.bench import OPTIONAL_SECTIONS, SECTIONS, format_lines, run_sections, to_json
    from app.commands._common import prepare_solver

    prepare_solver()  # the first figure must not be the compiler's
    names = args.section or list(SECTIONS)
    if getattr(args, "survey", False) and "survey" in OPTIONAL_SECTIONS and "survey" not in names:
        names.append("survey")
    lines = run_sections(names, size="quick" if args.quick else "full")
    print(to_json(lines) if args.json else format_lines(lines))
    return 0
