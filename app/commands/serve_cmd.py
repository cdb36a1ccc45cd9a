"""``arcwindow serve``: the dashboard on a production WSGI server (waitress)."""

from __future__ import annotations

import argparse


def add_parser(subparsers: argparse._SubParsersAction) -> None:
    parser = subparsers.add_parser(
        "serve",
        description=(
            "Serve the dashboard on a production WSGI server. Everyone who can reach the address "
            "sees the same shortlist; bind to another interface with --host only on a trusted "
            "network."
        ),
    )
    parser.add_argument("--host", default="127.0.0.1", help="interface to bind (default 127.0.0.1)")
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
    import signal
    import sys
    import webbrowser

    import waitress

    from app.commands._common import prepare_solver
    from app.dashboard import create_app
    from solver.errors import InputError

    if not 0 < args.port < 65536:
        raise InputError("--port", args.port, "1 to 65535")
    if args.threads < 1:
        raise InputError("--threads", args.threads, "at least 1")
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
        cache_dir=args.cache_dir, data_dir=args.data_dir, surveys_dir=args.survey_dir
    )
    url = f"http://{args.host}:{args.port}/"
    print(f"arcwindow dashboard at {url} (Ctrl+C to stop)", flush=True)
    if args.open:
        webbrowser.open(url)
    waitress.serve(dash_app.server, host=args.host, port=args.port, threads=args.threads)
    return 0
