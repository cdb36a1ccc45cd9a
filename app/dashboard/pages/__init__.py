"""The dashboard's pages: each a module with its path, title, layout and callbacks.

A page module defines ``PATH``, ``TITLE``, ``NAME``, ``page_layout(**query)`` (Dash's router
passes the link's query parameters) and ``register_callbacks(app, ...)``; ``create_app`` registers
each with ``dash.register_page`` and attaches its callbacks. Component ids are unique across
pages (each page's ids name what they hold), so one app serves them all. A new page is a new
module here and one line in ``app.dashboard.create_app``.
"""
