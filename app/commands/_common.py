"""Options and helpers shared by the window subcommands (grid, best, period, arc)."""

from __future__ import annotations

import argparse
import sys

from solver.caution import CAUTION as _CAUTION

CAUTION = "Caution: " + _CAUTION
# Grids with more cell-arcs than this show a progress bar on stderr.
PROGRESS_MIN_CELL_ARCS = 200_000


def add_case_argument(parser: argparse.ArgumentParser) -> None:
    parser.add_argument(
        "case",
        metavar="CASE",
        help="a TOML case file, or a sample case name (see `arcwindow cases`)",
    )


def add_cache_options(parser: argparse.ArgumentParser) -> None:
    parser.add_argument(
        "--cache-dir",
        metavar="DIR",
        help="grid cache folder (default: $ARCWINDOW_CACHE_DIR, else a per-user cache folder)",
    )
    parser.add_argument("--no-cache", action="store_true", help="neither read nor write the cache")
    parser.add_argument(
        "--max-cells",
        type=int,
        metavar="N",
        help="refuse grids above N cell-arcs (default: $ARCWINDOW_MAX_CELL_ARCS, else 20,000,000)",
    )


def compute_grid(args: argparse.Namespace, case):
    """The case's grid, through the cache unless --no-cache, with a progress bar when long."""
    from solver.files.cache import GridCache
    from solver.window.grid import check_grid_size, compute_window

    n_dep, n_arr, slots = check_grid_size(case, args.max_cells)
    cache = None if args.no_cache else GridCache(args.cache_dir)
    if n_dep * n_arr * slots < PROGRESS_MIN_CELL_ARCS:
        return compute_window(case, cache=cache, max_cells=args.max_cells)
    from tqdm import tqdm

    with tqdm(
        total=n_dep, unit="departure dates", file=sys.stderr, leave=False, desc="solving window"
    ) as bar:

        def progress(done: int, total: int) -> None:
            bar.update(done - bar.n)

        return compute_window(case, cache=cache, progress=progress, max_cells=args.max_cells)


def utc(jd_tdb: float, digits: int = 0) -> str:
    from solver.ephemeris.timescales import jd_tdb_to_utc

    return str(jd_tdb_to_utc(jd_tdb, digits=digits))


def metric_choices() -> list[str]:
    from solver.window.metrics import RANKING_METRICS

    return list(RANKING_METRICS)
