"""``arcwindow serve``: the dashboard on a production WSGI server (waitress)."""

from __future__ import annotations

import argparse


def add_parser(subparsers: argparse._SubParsersAction) -> None:
    parser = subparsers.add_parser(
        "serve",
        help="serve the dashboard (localhost only unless --host says otherwise)",
        description="Serve the dashboard on a production WSGI server.",
    )
    parser.add_argument("--host", default="127.0.0.1", help="interface to bind (default 127.0.0.1)")
    parser.add_argument("--port", type=int, default=8050, help="TCP port (default 8050)")
    parser.add_argument("--open", action="store_true", help="open the dashboard in a web browser")
    parser.set_defaults(run=run)


def run(args: argparse.Namespace) -> int:
    import webbrowser

    import waitress

    from app.dashboard import create_app

    dash_app = create_app()
    url = f"http://{args.host}:{args.port}/"
    print(f"arcwindow dashboard at {url} (Ctrl+C to stop)")
    if args.open:
        webbrowser.open(url)
    waitress.serve(dash_app.server, host=args.host, port=args.port, threads=8)
    return 0
