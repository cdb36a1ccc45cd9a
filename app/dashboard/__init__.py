"""The arcwindow dashboard: window map, arc view, family chart, details and a shared shortlist.

``create_app()`` builds the Dash app; ``arcwindow serve`` runs it on waitress. Modules:

* ``state``: the view state and its URL query;
* ``cases``: sample and uploaded cases; ``jobs``: grids in memory and background jobs;
  ``shortlist``: the shared shortlist store (SQLite); ``exports``: downloads;
* ``prepare``: solver results to display arrays; ``figures``: pure figure builders;
  ``theme``: colours and fonts;
* ``model``: the above put together for the callbacks; ``layout``; ``callbacks``;
* ``surveys`` and ``survey_page``: the survey page at ``/survey/``;
* ``access``: the token, host check and security headers on every request; ``downloads``:
  grid tables streamed from files through a route of their own.
"""

from __future__ import annotations

import os

from dash import Dash

from .access import AccessPolicy
from .config import ASSETS_DIR, Settings
from .model import DashboardModel

__all__ = ["DashboardModel", "Settings", "create_app"]


def create_app(
    *,
    cache_dir: str | os.PathLike | None = None,
    data_dir: str | os.PathLike | None = None,
    cases_dir: str | os.PathLike | None = None,
    surveys_dir: str | os.PathLike | None = None,
    model: DashboardModel | None = None,
    access: AccessPolicy | None = None,
) -> Dash:
    """Build the dashboard app.

    Parameters
    ----------
    cache_dir, data_dir, cases_dir, surveys_dir : path, optional
        Grid cache folder, data folder (shortlist and uploaded cases), sample-case folder and
        survey results folder; each falls back to its environment variable, then its default
        (see ``config``).
    model : DashboardModel, optional
        A ready model (tests pass one with a stand-in grid engine).
    access : AccessPolicy, optional
        Token and served host names (``arcwindow serve`` builds it from ``--host``); default:
        a localhost server without a token. Host check, same-origin writes, the body limit and
        the security headers apply either way.

    Returns
    -------
    dash.Dash
        Serve ``app.server`` (a Flask WSGI app) with a production WSGI server.
    """
    from . import access as access_module
    from . import callbacks, downloads, layout
    from .survey_page import create_survey_app
    from .surveys import SurveyShelf

    if model is None:
        model = DashboardModel(Settings.resolve(cache_dir, data_dir, cases_dir, surveys_dir))
    app = Dash(
        __name__,
        title="arcwindow",
        update_title=None,
        assets_folder=str(ASSETS_DIR),
        serve_locally=True,
        # Maps carry every number of every cell for the hover (several MB as base64 floats);
        # compressed they cross a team's network a few times faster. Applies to the whole
        # server, the survey page included.
        compress=True,
    )
    access_module.install(
        app.server, access or AccessPolicy.for_address("127.0.0.1", 0, token=None)
    )
    app.layout = layout.page()
    callbacks.register(app, model)
    downloads.register(app, model)
    app.server.config["ARCWINDOW_MODEL"] = model
    # What the data folder could not use (a store kept aside, entries refused): `serve` prints it.
    app.server.config["ARCWINDOW_STARTUP_NOTES"] = model.shortlist.problems()
    # The survey page: a second Dash app at /survey/ on the same server.
    create_survey_app(app.server, SurveyShelf(model.settings.surveys_dir, model.catalogue))
    return app
