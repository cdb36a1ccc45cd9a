"""``arcwindow grid``: solve a case's window and write one row per cell and arc."""

from __future__ import annotations

import argparse

from app.commands._common import (
    CAUTION,
    add_cache_options,
    add_case_argument,
    compute_grid,
    output_file,
)


def add_parser(subparsers: argparse._SubParsersAction) -> None:
    parser = subparsers.add_parser(
        "grid",
        description="Solve every departure x arrival cell of a case and write one row per cell "
        "and arc (columns carry their units). " + CAUTION,
    )
    add_case_argument(parser)
    parser.add_argument(
        "--out", required=True, metavar="FILE", help="output file ending in .csv or .parquet"
    )
    add_cache_options(parser)
    parser.set_defaults(run=run)


def run(args: argparse.Namespace) -> int:
    from app.samples import load
    from solver.files.export import write_grid

    out = output_file(args.out, "--out", (".csv", ".parquet"))
    case = load(args.case)
    grid = compute_grid(args, case)
    write_grid(grid, out)
    n_dep, n_arr, slots = grid.shape
    source = "cache" if grid.from_cache else "computed"
    print(
        f"{case.title}: {n_dep} departure x {n_arr} arrival dates x {slots} arcs ({source}); "
        f"{int(grid.cell_within().sum()):,} cells within limits -> {out}"
    )
    print(CAUTION)
    return 0
