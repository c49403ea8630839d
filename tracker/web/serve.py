"""The application for a process manager: ``uvicorn --factory tracker.web.serve:app --workers N``.

Reads the store from ``TRACKER_DB`` and the clinic settings from ``TRACKER_SETTINGS`` (as the
command line does), including the ``[web]`` session limits (docs/operations.md, "Serving").
"""

from __future__ import annotations


def app():
    from tracker.settings import load_settings
    from tracker.web.app import create_app

    conf = load_settings(None)
    return create_app(None, None, idle_minutes=conf.web.idle_minutes, absolute_hours=conf.web.absolute_hours,
                      secure_cookies=conf.web.secure_cookies)  # fmt: skip
