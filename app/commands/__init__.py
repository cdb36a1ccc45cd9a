"""One module per ``arcwindow`` subcommand: ``add_parser(subparsers)`` (cheap) and ``run(args)``."""
