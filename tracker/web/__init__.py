"""The web interface: Starlette pages over the service layer (see docs/operations.md, "Serving").

:func:`tracker.web.app.create_app` builds the application; each page is a module of
:mod:`tracker.web.pages` exposing ``routes``.  Like the command line, pages only parse
the request, call a service and render a template.
"""
