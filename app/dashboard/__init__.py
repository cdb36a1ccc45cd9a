"""The arcwindow dashboard: window map, arc view, family chart, details, a shared shortlist and
the survey results, as pages of one Dash app.

``create_app()`` builds the app; ``arcwindow serve`` runs it on waitress. Modules:

* ``view_state``: a tab's view and its URL query; ``controls``: the case controls, made from the
  table of case settings; ``view_changes``: how a view changes (pure);
* ``case_catalogue``: sample, uploaded and survey-opened cases by id; ``grid_jobs``: grids in
  memory and fair background jobs; ``best_arcs``: best arcs and their refinement;
  ``shortlist``: the shared shortlist store (SQLite); ``exports``: downloads; ``surveys``:
  results files;
* ``map_loop``: the map's live loop (grid status, poll, what to draw; pure);
* ``display_data``: solver results to display arrays; ``figures``: pure figure builders;
  ``theme``: colours and fonts;
* ``window_service``: the above joined for the window page's callbacks;
* ``pages``: ``window_page`` (``/``, layout in ``window_layout``), ``sequence_page``
  (``/sequence``, layout in ``sequence_layout``) and ``survey_page`` (``/survey``);
* the sequence page's own: ``sequence_view`` (its view, URL and settings), ``search_loop``
  (its live loop, pure), ``sequence_service`` (searches in the job pool, candidates, leg maps,
  figures, shortlist, downloads), ``sequence_display`` and ``sequence_figures`` (its display
  data and pure figure builders);
* ``slowdown``: the test-only setting that slows grid jobs and refinement down;
* ``access``: the token, Host check, same-origin writes and security headers on every request;
  ``budget``: the memory budget of one request; ``downloads``: grid tables streamed from files
  through a route of their own.
"""

from __future__ import annotations

import os
import uuid

import dash
from dash import Dash, dcc, html

from .access import AccessPolicy
from .config import ASSETS_DIR, Settings
from .window_service import WindowService

__all__ = ["Settings", "WindowService", "create_app"]


def _shell() -> html.Div:
    """What every page shares: the viewer's id (one per tab load, so a viewer can cancel only
    its own wait for a grid), the viewer's own case list (browser storage) and the page."""
    return html.Div(
        [
            dcc.Store(id="store-viewer-id", data=uuid.uuid4().hex),
            dcc.Store(id="store-my-cases", storage_type="local"),
            dash.page_container,
        ]
    )


def create_app(
    *,
    cache_dir: str | os.PathLike | None = None,
    data_dir: str | os.PathLike | None = None,
    cases_dir: str | os.PathLike | None = None,
    surveys_dir: str | os.PathLike | None = None,
    service: WindowService | None = None,
    access: AccessPolicy | None = None,
) -> Dash:
    """Build the dashboard app.

    Parameters
    ----------
    cache_dir, data_dir, cases_dir, surveys_dir : path, optional
        Grid cache folder, data folder (shortlist and uploaded cases), sample-case folder and
        survey results folder; each falls back to its environment variable, then its default
        (see ``config``).
    service : WindowService, optional
        A ready service (tests pass one with a stand-in grid engine).
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
    from . import downloads
    from .pages import sequence_page, survey_page, window_page
    from .sequence_service import SequenceService

    if service is None:
        service = WindowService(Settings.resolve(cache_dir, data_dir, cases_dir, surveys_dir))
    app = Dash(
        __name__,
        title="arcwindow",
        update_title=None,
        assets_folder=str(ASSETS_DIR),
        serve_locally=True,
        use_pages=True,
        pages_folder="",
        # Maps carry every number of every cell for the hover (several MB as base64 floats);
        # compressed they cross a team's network a few times faster.
        compress=True,
    )
    access_module.install(
        app.server, access or AccessPolicy.for_address("127.0.0.1", 0, token=None)
    )
    for page in (window_page, sequence_page, survey_page):
        dash.register_page(
            page.__name__,
            path=page.PATH,
            name=page.NAME,
            title=page.TITLE,
            layout=page.page_layout,
        )
    app.layout = _shell
    window_page.register_callbacks(app, service)
    survey_page.register_callbacks(app, service.shelf)
    downloads.register(app, service)
    sequences = SequenceService(service)
    sequence_page.register_callbacks(app, sequences)
    app.server.config["ARCWINDOW_SEQUENCES"] = sequences
    app.server.config["ARCWINDOW_SERVICE"] = service
    # What the data folder could not use (a store kept aside, entries refused): `serve` prints it.
    app.server.config["ARCWINDOW_STARTUP_NOTES"] = service.shortlist.problems()
    return app
