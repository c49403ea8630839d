"""Cross-site request forgery protection: every POST carries a token only our pages know.

The token is derived from the session cookie (or, before sign-in, from a random
pre-session cookie): ``SHA-256("tracker-csrf\\n" + cookie value)``.  The cookie is
HttpOnly and SameSite=Strict, so another site can neither read it nor compute
the token; several server processes agree on the token without sharing a
secret.  Forms carry it as the hidden field ``csrf_token`` (template global
``csrf_field()``); htmx requests send it as the ``X-CSRF-Token`` header, read
from ``<meta name="csrf-token">`` by ``static/tracker.js`` (no inline script).

:func:`verify` runs before every POST handler (the app wraps each POST route),
so a request without a valid token is refused (403) before anything is read or
written.
"""

from __future__ import annotations

import hashlib
import hmac
import secrets

from markupsafe import Markup, escape
from starlette.requests import Request

from tracker.web.auth import PRE_COOKIE, SESSION_COOKIE, Refused

FIELD = "csrf_token"
HEADER = "x-csrf-token"
MAX_FORM_BYTES = 64 * 1024 * 1024  # an upload larger than this is refused (engineering limit)


def _derive(cookie: str) -> str:
    return hashlib.sha256(b"tracker-csrf\n" + cookie.encode("utf-8")).hexdigest()


def pre_token(request: Request) -> str:
    """The pre-session cookie value, made (and set on the response by the page) when missing."""
    value = request.cookies.get(PRE_COOKIE) or request.state._state.get("new_pre")
    if not value:
        value = secrets.token_urlsafe(32)
        request.state.new_pre = value
    return value


def token_for(request: Request) -> str:
    """The CSRF token of this browser: from its session, else from its pre-session cookie."""
    session = request.cookies.get(SESSION_COOKIE)
    if session and getattr(request.state, "user", None) is not None:
        return _derive(session)
    return _derive(pre_token(request))


def field(request: Request) -> Markup:
    return Markup('<input type="hidden" name="%s" value="%s">') % (FIELD, escape(token_for(request)))


async def verify(request: Request) -> None:
    """Refuse (403) a POST whose token does not match this browser's session or pre-session cookie."""
    length = request.headers.get("content-length")
    if length is not None and length.isdigit() and int(length) > MAX_FORM_BYTES:
        raise Refused("the upload is too large; nothing was changed", status=413)
    sent = request.headers.get(HEADER)
    form = await request.form(max_part_size=MAX_FORM_BYTES)
    request.state.form = form
    if sent is None:
        value = form.get(FIELD)
        sent = value if isinstance(value, str) else None
    candidates = [c for c in (request.cookies.get(SESSION_COOKIE), request.cookies.get(PRE_COOKIE)) if c]
    if not sent or not any(hmac.compare_digest(sent, _derive(c)) for c in candidates):
        raise Refused("the form's security token is missing or out of date (open the page again and resubmit); "
                      "nothing was changed")  # fmt: skip
