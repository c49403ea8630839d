"""Who is signed in, and refusing what their role may not do.

:func:`current_user` reads the session cookie, checks the session in the store
(open, not idle too long, not older than the absolute limit, account not
disabled) and returns the user; a page reached without a valid session raises
:class:`NotSignedIn`, which the app turns into a redirect to the sign-in page.
A user who signed in with a one-time password is sent to the change-password
page until they have chosen their own.

:func:`require` / :func:`require_to` raise :class:`Refused`, which the app
renders as a 403 page saying why; they are called before anything is written.
"""

from __future__ import annotations

import datetime as dt

from starlette.requests import Request

from tracker.services import accounts as AC
from tracker.store.database import reading, writing
from tracker.web.roles import ACTION_WORDS, can, roles_for

SESSION_COOKIE = "tracker_session"
PRE_COOKIE = "tracker_pre"  # before sign-in: carries the sign-in form's CSRF token
# Pages a user who must change their password may still reach.
OPEN_WHILE_CHANGING = ("/password", "/signout", "/static/")


class NotSignedIn(Exception):
    """No valid session: the app redirects to the sign-in page (with why, when a session ended)."""

    def __init__(self, ended: str | None = None, must_change: bool = False):
        self.ended = ended
        self.must_change = must_change


class Refused(Exception):
    """The request is refused (403) with a reason shown to the user; nothing was written."""

    def __init__(self, reason: str, status: int = 403):
        self.reason = reason[:1].upper() + reason[1:]  # shown as a sentence
        self.status = status
        super().__init__(self.reason)


def now(request: Request) -> dt.datetime:
    """The app's clock (UTC, no zone): injectable for tests through ``app.state.clock``."""
    return request.app.state.clock()


def engine(request: Request):
    return request.app.state.engine


def optional_user(request: Request) -> AC.User | None:
    """The signed-in user, or None (a session past a limit is ended in the store)."""
    if "user" in request.state._state:
        return request.state.user
    token = request.cookies.get(SESSION_COOKIE)
    user = None
    request.state.ended = None
    request.state.session_id = None
    if token:
        t = now(request)
        cfg = request.app.state.config
        with reading(engine(request)) as conn:
            check = AC.check_session(conn, token, now=t, idle_minutes=cfg.idle_minutes,
                                     absolute_hours=cfg.absolute_hours)  # fmt: skip
            touch = check.user is not None and AC.needs_touch(conn, check.session_id, t)
        if check.user is None and check.session_id is not None and check.ended in ("idle", "absolute", "disabled"):
            with writing(engine(request)) as conn:
                AC.end_session(conn, check.session_id, check.ended, now=t)
        elif touch:
            with writing(engine(request)) as conn:
                AC.touch_session(conn, check.session_id, now=t)
        user = check.user
        request.state.ended = check.ended
        request.state.session_id = check.session_id if user else None
    request.state.user = user
    return user


def current_user(request: Request) -> AC.User:
    """The signed-in user (``.name``, ``.role``); else :class:`NotSignedIn` (a redirect to sign-in)."""
    user = optional_user(request)
    if user is None:
        raise NotSignedIn(request.state.ended)
    if user.must_change_password and not request.url.path.startswith(OPEN_WHILE_CHANGING):
        raise NotSignedIn(must_change=True)
    return user


def require(request: Request, *roles: str) -> AC.User:
    """The signed-in user if their role is one of ``roles`` (no roles: any signed-in user); else :class:`Refused`."""
    user = current_user(request)
    if roles and user.role not in roles:
        raise Refused(f"this needs the role {' or '.join(sorted(roles))}; you are signed in as {user.role}. "
                      "Nothing was changed.")  # fmt: skip
    return user


def require_to(request: Request, action: str) -> AC.User:
    """The signed-in user if their role may do ``action`` (:data:`tracker.web.roles.ALLOWED`); else :class:`Refused`."""
    user = current_user(request)
    if not can(user, action):
        raise Refused(f"only the role {' or '.join(roles_for(action)) or '(none)'} may {ACTION_WORDS.get(action, action)}; "
                      f"you are signed in as {user.role}. Nothing was changed.")  # fmt: skip
    return user


def audit_read(request: Request, *, family: str | None = None, person: str | None = None, what: str) -> None:
    """Append a read entry for the signed-in user (a page showing a family or a person calls this).

    One write transaction of its own; see :func:`tracker.services.accounts.audit_read`.
    """
    user = current_user(request)
    with writing(engine(request)) as conn:
        AC.audit_read(conn, user, family=family, person=person, what=what, now=now(request))
