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
        type=positive_int,
        metavar="N",
        help="refuse grids above N cell-arcs (default: $ARCWINDOW_MAX_CELL_ARCS, else 20,000,000)",
    )


def positive_int(text: str) -> int:
    """argparse type: a whole number >= 1 (``--max-cells -5`` is refused, not obeyed)."""
    try:
        value = int(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"'{text}' is not a whole number >= 1") from None
    if value < 1:
        raise argparse.ArgumentTypeError(f"'{text}' is not accepted; expected a whole number >= 1")
    return value


def add_arc_choice(parser: argparse.ArgumentParser, revs_help: str) -> None:
    """--revs and --branch, shared by best and arc (check them with :func:`check_arc_choice`)."""
    parser.add_argument("--revs", type=int, metavar="N", help=revs_help)
    parser.add_argument(
        "--branch",
        choices=["low", "high"],
        help="branch of an N-revolution arc (with --revs N, N >= 1)",
    )


def check_arc_choice(args: argparse.Namespace, max_revolutions: int) -> None:
    """--revs within the case's revolutions; --branch only with --revs N >= 1 (it was ignored)."""
    from solver.errors import InputError

    if args.revs is not None and not 0 <= args.revs <= max_revolutions:
        raise InputError(
            "--revs", args.revs, f"0 to {max_revolutions} (the case's transfer.max_revolutions)"
        )
    if args.branch is not None and args.revs is None:
        raise InputError(
            "--branch",
            args.branch,
            "--branch together with --revs N (N >= 1): the branch of an N-revolution arc",
        )
    if args.branch is not None and args.revs == 0:
        raise InputError(
            "--branch", args.branch, "no --branch with --revs 0 (a single-revolution arc has none)"
        )


def output_file(text: str, field: str, suffixes: tuple[str, ...] | None):
    """An output file named on the command line, checked and its folder created up front."""
    from solver.files.paths import prepare_output

    return prepare_output(text, field=field, suffixes=suffixes)


PREPARING = (
    "arcwindow: preparing the solver, once: compiling its kernels for this machine ({n} of "
    "{total}; up to a minute or two, once; later runs load them in under a second)"
)


def prepare_solver(stream=None) -> bool:
    """Compile the solver's kernels now if this machine has not yet, saying so with progress
    (solver.mechanics.kernels); silent when they are compiled. Returns whether it compiled."""
    from solver.mechanics.kernels import KERNELS, pending_kernels, prepare_kernels

    stream = stream or sys.stderr
    pending = pending_kernels()
    if not pending:
        return False
    print(PREPARING.format(n=len(pending), total=len(KERNELS)), file=stream, flush=True)
    from tqdm import tqdm

    with tqdm(
        total=len(KERNELS), unit="kernel", file=stream, desc="preparing the solver", leave=True
    ) as bar:

        def progress(done: int, total: int, name: str) -> None:
            bar.update(done - bar.n)
            bar.set_postfix_str(name, refresh=True)

        prepare_kernels(progress)
    print("arcwindow: solver ready", file=stream, flush=True)
    return True


def compute_grid(args: argparse.Namespace, case):
    """The case's grid, through the cache unless --no-cache, with a progress bar when long."""
    from solver.files.cache import GridCache
    from solver.window.grid import check_grid_size, compute_window, window_notes

    n_dep, n_arr, slots = check_grid_size(case, args.max_cells)
    for note in window_notes(case):
        print(f"note: {note}", file=sys.stderr)
    prepare_solver()
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
