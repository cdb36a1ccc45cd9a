"""The ``arcwindow`` command: one entry point, one module per subcommand in ``app.commands``.

Start-up is kept light: ``arcwindow --help`` imports no subcommand module, and a subcommand
imports only its own module (numpy, the compiled kernels, Dash and Dask load when a command needs
them). Bad input of every kind ends as one line on stderr and exit status 2.
"""

from __future__ import annotations

import argparse
import codecs
import importlib
import re
import sys

from solver.caution import CAUTION
from solver.errors import InputError

# Subcommand name -> (module in app.commands exposing ``add_parser(subparsers)`` and
# ``run(args)``, the one-line help listed by ``arcwindow --help``). Modules are imported only
# for the subcommand that runs.
SUBCOMMANDS: dict[str, tuple[str, str]] = {
    "lambert": (
        "app.commands.lambert_cmd",
        "solve Lambert's problem: all arcs between two positions in a given time",
    ),
    "state": (
        "app.commands.state_cmd",
        "position (km) and velocity (km/s) of a body at a UTC date",
    ),
    "bodies": ("app.commands.bodies_cmd", "list the known bodies, their sources and valid dates"),
    "cases": ("app.commands.cases_cmd", "list the sample cases"),
    "grid": ("app.commands.grid_cmd", "solve a window and write it as CSV or Parquet"),
    "best": ("app.commands.best_cmd", "the best arc within limits, refined to the minute"),
    "period": (
        "app.commands.period_cmd",
        "place a launch period of L days to minimize its largest C3 (or maximize its smallest "
        "delivered mass)",
    ),
    "arc": ("app.commands.arc_cmd", "one arc between two dates (OEM and JSON exports)"),
    "launch": (
        "app.commands.launch_cmd",
        "the daily launch window of a departure date (UTC open/close, azimuths, coast)",
    ),
    "survey": ("app.commands.survey_cmd", "rank many targets by their best arcs over years (Dask)"),
    "sequence": (
        "app.commands.sequence_cmd",
        "search flyby sequences, round trips and tours (multi-leg arcs)",
    ),
    "serve": (
        "app.commands.serve_cmd",
        "serve the dashboard (localhost only unless --host says otherwise)",
    ),
    "bench": (
        "app.commands.bench_cmd",
        "measure solver and dashboard speed against simple baselines",
    ),
}

DESCRIPTION = "Launch and arrival windows from Lambert arcs. " + CAUTION


class UserInputError(Exception):
    """Bad input from the user: printed as one line on stderr, exit status 2, no traceback."""


class OneLineParser(argparse.ArgumentParser):
    """argparse's errors as one line (no usage block), naming where to find the options."""

    def error(self, message: str):  # type: ignore[override]
        self.exit(2, f"{self.prog}: error: {message} (see '{self.prog} --help')\n")


ALL = "*"


def build_parser(command: str | None = ALL) -> argparse.ArgumentParser:
    """The parser: every subcommand listed, only ``command``'s own options built (its module
    imported); with ``command`` None no subcommand module is imported at all, with the default
    every one is."""
    parser = OneLineParser(prog="arcwindow", description=DESCRIPTION)
    subparsers = parser.add_subparsers(dest="command", metavar="COMMAND", required=True)
    for name, (module_name, help_text) in SUBCOMMANDS.items():
        if command in (name, ALL):
            importlib.import_module(module_name).add_parser(_WithHelp(subparsers, help_text))
        else:
            subparsers.add_parser(name, help=help_text)
    return parser


class _WithHelp:
    """The subparsers as a command module sees them: its parser gets the table's help line."""

    def __init__(self, subparsers: argparse._SubParsersAction, help_text: str) -> None:
        self._subparsers = subparsers
        self._help = help_text

    def add_parser(self, name: str, **kwargs) -> argparse.ArgumentParser:
        return self._subparsers.add_parser(name, help=self._help, **kwargs)


def _command_of(argv: list[str]) -> str | None:
    """The subcommand named in ``argv`` (its first word that is not an option), if known."""
    for token in argv:
        if not token.startswith("-"):
            return token if token in SUBCOMMANDS else None
    return None


_NEGATIVE_VALUE = re.compile(r"^-(\d|\.\d)")


def join_negative_values(parser: argparse.ArgumentParser, argv: list[str]) -> list[str]:
    """``--r2-km -14600,2500,7000`` as ``--r2-km=-14600,2500,7000``.

    argparse reads a word starting with ``-`` after an option as another option unless it is a
    plain negative number, so a negative vector needed the ``=`` form. A word that starts with
    a minus and a digit can never be an option here, so it is joined to the option before it
    when that option takes a value.
    """
    takes_value: set[str] = set()
    for action in _all_actions(parser):
        if (
            action.option_strings
            and action.nargs is None
            and not isinstance(action, argparse._StoreConstAction)
        ):
            takes_value.update(action.option_strings)
    out: list[str] = []
    tokens = iter(range(len(argv)))
    for k in tokens:
        token = argv[k]
        if token in takes_value and k + 1 < len(argv) and _NEGATIVE_VALUE.match(argv[k + 1]):
            out.append(f"{token}={argv[k + 1]}")
            next(tokens, None)
        else:
            out.append(token)
    return out


def _all_actions(parser: argparse.ArgumentParser) -> list[argparse.Action]:
    actions = list(parser._actions)
    for action in parser._actions:
        if isinstance(action, argparse._SubParsersAction):
            for sub in action.choices.values():
                actions.extend(_all_actions(sub))
    return actions


# ---------------------------------------------------------------------------------------------
# Terminals that cannot print every sign


PLAIN_SPELLINGS = {
    "∞": "inf",
    "²": "2",
    "³": "3",
    "Δ": "d",
    "μ": "mu",
    "°": " deg",
    "≤": "<=",
    "≥": ">=",
    "×": "x",
    "−": "-",
    "–": "-",
    "—": "-",
    "→": "->",
    "ε": "eps",
    "λ": "lambda",
    "τ": "tau",
    "Ω": "Omega",
    "ω": "omega",
    "ν": "nu",
    "″": '"',
    "′": "'",
    "·": "*",
    "…": "...",
    "█": "#",
    "▏": "|",
    "▎": "|",
    "▍": "|",
    "▌": "|",
    "▋": "|",
    "▊": "|",
    "▉": "|",
}
"""How signs the terminal's encoding lacks are written instead (v∞ as vinf, km²/s² as km2/s2)."""

PLAIN_ERRORS = "arcwindow-plain"


def _plain(error: UnicodeError) -> tuple[str, int]:
    if not isinstance(error, UnicodeEncodeError):
        raise error
    text = error.object[error.start : error.end]
    return "".join(PLAIN_SPELLINGS.get(ch, "?") for ch in text), error.end


codecs.register_error(PLAIN_ERRORS, _plain)


def use_plain_spellings_where_needed(*streams) -> None:
    """Streams whose encoding is not UTF-8 (a C locale, ``PYTHONIOENCODING=ascii``, a Windows
    console) write :data:`PLAIN_SPELLINGS` for the signs they cannot encode, instead of raising
    ``UnicodeEncodeError`` halfway through a report."""
    for stream in streams or (sys.stdout, sys.stderr):
        encoding = getattr(stream, "encoding", None)
        if not encoding or not hasattr(stream, "reconfigure"):
            continue
        try:
            if codecs.lookup(encoding).name != "utf-8":
                stream.reconfigure(errors=PLAIN_ERRORS)
        except (LookupError, ValueError, OSError):
            continue


# ---------------------------------------------------------------------------------------------


def main(argv: list[str] | None = None) -> int:
    """Run the command line; return the process exit status."""
    use_plain_spellings_where_needed()
    argv = list(sys.argv[1:] if argv is None else argv)
    parser = build_parser(_command_of(argv))
    try:
        args = parser.parse_args(join_negative_values(parser, argv))
    except SystemExit as stop:  # --help (0) or an argument error, already printed (2)
        return stop.code if isinstance(stop.code, int) else 2
    try:
        return int(args.run(args) or 0)
    except (UserInputError, InputError) as exc:
        print(f"arcwindow {args.command}: error: {exc}", file=sys.stderr)
        return 2
    except OSError as exc:
        # A file that cannot be read or written (no permission, disk full, a folder in the
        # way): one line naming it; whatever was computed before is reported above.
        where = f" {exc.filename}" if exc.filename else ""
        print(f"arcwindow {args.command}: error: cannot use{where}: {exc.strerror or exc}",
              file=sys.stderr)  # fmt: skip
        return 2
    except KeyboardInterrupt:
        print("arcwindow: interrupted", file=sys.stderr)
        return 130


if __name__ == "__main__":
    sys.exit(main())
