"""Helpers shared by the family, person and entry pages: the clinic's rule set, the read audit entry,
and a form's fields as plain text."""

from __future__ import annotations

from starlette.requests import Request

from tracker.store.database import writing
from tracker.web import auth

MAX_FIELD = 2000  # characters kept of one form field (the importer refuses longer cells with its own limits)


def rules(request: Request):
    """(settings, recall rule set, policy) of the clinic, as the command line reads them."""
    from tracker.services.recall import recall_rules

    return recall_rules(request.app.state.settings_path, None)


def today(request: Request):
    return auth.now(request).date()


def audit_read(request: Request, user, *, family: str | None = None, person: str | None = None, what: str) -> None:
    """Append a read entry naming the family or person shown (the core's helper, in its own transaction)."""
    from tracker.services import accounts as AC

    with writing(auth.engine(request)) as conn:
        AC.audit_read(conn, user, family=family, person=person, what=what, now=auth.now(request))


def posted(request: Request) -> dict[str, str]:
    """The form the CSRF check has read (synchronous handlers run after it)."""
    form = request.state.form
    return {k: v[:MAX_FIELD] for k, v in form.multi_items() if k != "csrf_token" and isinstance(v, str)}
