"""``arcwindow serve``: the dashboard on a production WSGI server (waitress)."""

from __future__ import annotations

import argparse


def add_parser(subparsers: argparse._SubParsersAction) -> None:
    parser = subparsers.add_parser(
        "serve",
        description=(
            "Serve the dashboard on a production WSGI server. Everyone who holds the link sees "
            "the same shortlist. On any address other than loopback (--host) every request needs "
            "an access token: one is generated at start and printed with the link to share "
            "(or give your own with --token). Each request may solve a grid of at most "
            "--request-budget bytes (default 1GiB, about 3.9 million cell-arcs) and send a body "
            "of at most 1 MiB. See docs/threat-model.md."
        ),
    )
    parser.add_argument("--host", default="127.0.0.1", help="interface to bind (default 127.0.0.1)")
    parser.add_argument(
        "--token",
        default=None,
        metavar="TOKEN",
        help="access token (at least 16 characters; default: $ARCWINDOW_TOKEN, else a new random "
        "one off loopback, none on loopback)",
    )
    parser.add_argument(
        "--allow-host",
        action="append",
        default=[],
        metavar="NAME",
        help="a host name the team uses to reach the server (repeatable; localhost, IP addresses "
        "and this machine's names are always accepted)",
    )
    parser.add_argument(
        "--request-budget",
        default=None,
        metavar="SIZE",
        help="memory one request may use for its grid, e.g. 1GiB or 500MB (default: "
        "$ARCWINDOW_REQUEST_BUDGET, else 1GiB); larger grids are refused with a message, "
        "before anything is allocated",
    )
    parser.add_argument("--port", type=int, default=8050, help="TCP port (default 8050)")
    parser.add_argument(
        "--cache-dir",
        default=None,
        help="grid cache folder (default: $ARCWINDOW_CACHE_DIR, else the per-user cache folder)",
    )
    parser.add_argument(
        "--data-dir",
        default=None,
        help="shortlist and uploaded cases (default: $ARCWINDOW_DATA_DIR, else the per-user "
        "data folder)",
    )
    parser.add_argument(
        "--survey-dir",
        default=None,
        help="folder of survey results (*.parquet) for the survey page (default: "
        "$ARCWINDOW_SURVEY_DIR, else <data folder>/surveys)",
    )
    parser.add_argument(
        "--threads", type=int, default=8, help="request threads of the server (default 8)"
    )
    parser.add_argument("--open", action="store_true", help="open the dashboard in a web browser")
    parser.set_defaults(run=run)


def run(args: argparse.Namespace) -> int:
    import faulthandler
    import os
    import signal
    import sys
    import webbrowser

    import waitress

    from app.commands._common import prepare_solver
    from app.dashboard import create_app
    from app.dashboard.access import MAX_REQUEST_BODY_BYTES, MIN_TOKEN_CHARS, AccessPolicy
    from app.dashboard.budget import apply_request_budget
    from solver.errors import InputError

    if not 0 < args.port < 65536:
        raise InputError("--port", args.port, "1 to 65535")
    if args.threads < 1:
        raise InputError("--threads", args.threads, "at least 1")
    token = args.token or os.environ.get("ARCWINDOW_TOKEN") or None
    try:
        policy = AccessPolicy.for_address(
            args.host, args.port, token=token, allow_hosts=args.allow_host
        )
    except ValueError:  # the token itself is never echoed
        raise InputError(
            "--token", f"a token of {len(token or '')} characters", f"at least {MIN_TOKEN_CHARS}"
        ) from None
    budget = apply_request_budget(args.request_budget)
    _fewer_malloc_arenas()
    # `kill -USR1 <pid>` prints every thread's stack to stderr: how to see what a stuck
    # request is waiting on, without stopping the session.
    # Compile the kernels before serving, with progress here, rather than leaving the first
    # viewer's map blank for the minutes it takes on a new machine.
    prepare_solver()
    if hasattr(signal, "SIGUSR1"):
        try:
            faulthandler.register(signal.SIGUSR1, file=sys.stderr, all_threads=True)
        except (OSError, ValueError):
            pass  # a stderr without a file descriptor (captured, redirected): no stack dumps
    dash_app = create_app(
        cache_dir=args.cache_dir,
        data_dir=args.data_dir,
        surveys_dir=args.survey_dir,
        access=policy,
    )
    url = f"http://{_display_host(args.host)}:{args.port}/"
    link = policy.share_link(url)
    print(f"arcwindow dashboard at {url} (Ctrl+C to stop)", flush=True)
    print(f"  {budget.describe()}", flush=True)
    if policy.token is not None:
        print(f"  access token required; share this link with the team: {link}", flush=True)
    for problem in getattr(dash_app.server, "config", {}).get("ARCWINDOW_STARTUP_NOTES", []):
        print(f"  note: {problem}", flush=True)
    if args.open:
        webbrowser.open(link)
    waitress.serve(
        dash_app.server,
        host=args.host,
        port=args.port,
        threads=args.threads,
        max_request_body_size=MAX_REQUEST_BODY_BYTES,
    )
    return 0


def _display_host(host: str) -> str:
    """The address to print: the machine's name for a wildcard bind, brackets for IPv6."""
    import socket

    if host in ("0.0.0.0", "::", ""):
        return socket.getfqdn() or socket.gethostname()
    return f"[{host}]" if ":" in host else host


def _fewer_malloc_arenas(arenas: int = 2) -> None:
    """Let glibc keep two heap arenas for the whole server instead of up to eight per core.

    Each request thread that allocates while another does gets an arena of its own, and an arena
    keeps the high-water mark of what its thread ever built (a page's several-MB figure, a
    grid's temporaries). Measured with 50 simulated viewers (``arcwindow bench --section
    dashboard``): with the default the server's memory swung between 640 and 830 MB and kept
    creeping up; with two arenas it settled at 690 MB and stayed there. Same as starting the
    server with ``MALLOC_ARENA_MAX=2``, which, when set, is left as it is. No-op off glibc.
    """
    import ctypes
    import os
    import sys

    if not sys.platform.startswith("linux") or os.environ.get("MALLOC_ARENA_MAX"):
        return
    try:
        libc = ctypes.CDLL(None)
        libc.mallopt(ctypes.c_int(-8), ctypes.c_int(arenas))  # -8: M_ARENA_MAX (malloc.h)
    except (OSError, AttributeError):
        pass
