"""arcwindow front end: the command line, the Dash dashboard and the benchmark."""
