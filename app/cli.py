"""The ``arcwindow`` command: one entry point, one module per subcommand in ``app.commands``."""

from __future__ import annotations

import argparse
import importlib
import sys

from solver.errors import InputError

# Subcommand name -> module in app.commands exposing ``add_parser(subparsers)`` and ``run(args)``.
# Modules are imported lazily so ``arcwindow lambert`` does not pay for Dash or Dask imports.
SUBCOMMANDS: dict[str, str] = {
    "lambert": "app.commands.lambert_cmd",
    "state": "app.commands.state_cmd",
    "bodies": "app.commands.bodies_cmd",
    "cases": "app.commands.cases_cmd",
    "grid": "app.commands.grid_cmd",
    "best": "app.commands.best_cmd",
    "period": "app.commands.period_cmd",
    "arc": "app.commands.arc_cmd",
    "launch": "app.commands.launch_cmd",
    "survey": "app.commands.survey_cmd",
    "serve": "app.commands.serve_cmd",
    "bench": "app.commands.bench_cmd",
}


class UserInputError(Exception):
    """Bad input from the user: printed as one line on stderr, exit status 2, no traceback."""


def build_parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(
        prog="arcwindow",
        description=(
            "Launch and arrival windows from Lambert arcs. Preliminary two-body, patched-conic "
            "design: confirm with high-fidelity tools before committing hardware or launch plans."
        ),
    )
    subparsers = parser.add_subparsers(dest="command", metavar="COMMAND", required=True)
    for module_name in SUBCOMMANDS.values():
        importlib.import_module(module_name).add_parser(subparsers)
    return parser


def main(argv: list[str] | None = None) -> int:
    """Run the command line; return the process exit status."""
    parser = build_parser()
    args = parser.parse_args(argv)
    try:
        return int(args.run(args) or 0)
    except (UserInputError, InputError) as exc:
        print(f"arcwindow {args.command}: error: {exc}", file=sys.stderr)
        return 2
    except KeyboardInterrupt:
        print("arcwindow: interrupted", file=sys.stderr)
        return 130


if __name__ == "__main__":
    sys.exit(main())
