"""The web application: one factory, :func:`create_app`, that mounts every page module.

Each module of :mod:`tracker.web.pages` exposes ``routes``; every POST route is
wrapped so that its CSRF token is checked (:func:`tracker.web.csrf.verify`)
before the handler runs, and a synchronous handler runs in a worker thread (the
store is used through synchronous SQLAlchemy).  Every response carries the
security headers (:class:`SecurityHeaders`).
"""

from __future__ import annotations

import datetime as dt
import importlib
from dataclasses import dataclass
from pathlib import Path

from starlette.applications import Starlette
from starlette.concurrency import run_in_threadpool
from starlette.requests import Request
from starlette.responses import RedirectResponse, Response
from starlette.routing import Mount, Route
from starlette.staticfiles import StaticFiles

from tracker.web import auth, csrf

HERE = Path(__file__).resolve().parent
# The page modules mounted, in this order.  Modules not present yet are skipped.
PAGES = ("signin", "day", "cohort", "imports", "admin", "family", "person", "entry", "contacts", "uptake")

CSP = ("default-src 'self'; script-src 'self'; style-src 'self'; img-src 'self' data:; object-src 'none'; "
       "base-uri 'none'; form-action 'self'; frame-ancestors 'none'")  # fmt: skip


@dataclass(frozen=True)
class WebConfig:
    idle_minutes: int = 30
    absolute_hours: int = 12
    secure_cookies: bool | None = None  # None: Secure when the request came over TLS
    trust_forwarded_proto: bool = False


class SecurityHeaders:
    """ASGI middleware: the security headers on every response; no caching except of static files."""

    def __init__(self, app):
        self.app = app

    async def __call__(self, scope, receive, send):
        if scope["type"] != "http":
            return await self.app(scope, receive, send)
        static = scope.get("path", "").startswith("/static/")

        async def send_with_headers(message):
            if message["type"] == "http.response.start":
                headers = [(k, v) for k, v in message.get("headers", []) if k.lower() != b"cache-control"]
                headers += [
                    (b"content-security-policy", CSP.encode()),
                    (b"referrer-policy", b"no-referrer"),
                    (b"x-content-type-options", b"nosniff"),
                    (b"x-frame-options", b"DENY"),
                    (b"cache-control", b"private, max-age=3600" if static else b"no-store"),
                ]
                message = dict(message, headers=headers)
            await send(message)

        await self.app(scope, receive, send_with_headers)


def over_tls(request: Request) -> bool:
    """Whether the browser reached us over TLS (directly, or through a trusted proxy that says so)."""
    if request.url.scheme == "https":
        return True
    if request.app.state.config.trust_forwarded_proto:
        return request.headers.get("x-forwarded-proto", "").split(",")[0].strip().lower() == "https"
    return False


def secure_cookie(request: Request) -> bool:
    setting = request.app.state.config.secure_cookies
    return over_tls(request) if setting is None else setting


def set_cookie(request: Request, response: Response, name: str, value: str) -> None:
    """A cookie as every cookie of the app is set: HttpOnly, SameSite=Strict, Secure over TLS, whole site."""
    response.set_cookie(name, value, httponly=True, samesite="strict", secure=secure_cookie(request), path="/")


def delete_cookie(request: Request, response: Response, name: str) -> None:
    response.delete_cookie(name, path="/", httponly=True, samesite="strict", secure=secure_cookie(request))


def _guard_post(endpoint):
    """Wrap a POST handler: the CSRF check first; a synchronous handler runs in a worker thread."""
    import inspect

    is_async = inspect.iscoroutinefunction(endpoint)

    async def guarded(request: Request):
        if request.method == "POST":
            await csrf.verify(request)
        if is_async:
            return await endpoint(request)
        return await run_in_threadpool(endpoint, request)

    guarded.__name__ = getattr(endpoint, "__name__", "endpoint")
    return guarded


def _mount(routes) -> list:
    out = []
    for r in routes:
        if isinstance(r, Route):
            out.append(Route(r.path, _guard_post(r.endpoint), methods=sorted(r.methods or ["GET"]), name=r.name))
        else:
            out.append(r)
    return out


def page_routes() -> list:
    routes = []
    for name in PAGES:
        try:
            module = importlib.import_module(f"tracker.web.pages.{name}")
        except ModuleNotFoundError as exc:
            if exc.name == f"tracker.web.pages.{name}":
                continue
            raise
        routes += _mount(module.routes)
    return routes


def _utc_now() -> dt.datetime:
    return dt.datetime.now(dt.timezone.utc).replace(tzinfo=None, microsecond=0)


def create_app(db: str | None = None, settings_path=None, *, idle_minutes: int = 30, absolute_hours: int = 12,
               secure_cookies: bool | None = None) -> Starlette:
    """The web application over the store ``db`` (a SQLite path or a database URL, as ``--db``).

    ``settings_path`` is the clinic settings file (as ``--settings``); its ``[web]``
    ``trust_forwarded_proto`` is read from it.  ``idle_minutes`` / ``absolute_hours``
    limit sessions; ``secure_cookies`` forces the Secure flag on (True) or off
    (False); None sets it when the request came over TLS.  The clock is
    ``app.state.clock`` (UTC, no zone), replaceable in tests.
    """
    from tracker.errors import UserError
    from tracker.settings import load_settings
    from tracker.store import migrate
    from tracker.store.database import locate, make_engine, reading
    from tracker.web import templating

    location = locate(db)
    engine = make_engine(location)
    with reading(engine) as conn:
        migrate.require_current(conn, location.describe())
    settings = load_settings(settings_path)
    if idle_minutes < 1 or absolute_hours < 1:
        raise UserError("session limits must be at least 1 minute idle and 1 hour in all")

    app = Starlette(routes=[*page_routes(), Mount("/static", StaticFiles(directory=HERE / "static"), name="static")],
                    exception_handlers={auth.NotSignedIn: _not_signed_in, auth.Refused: _refused,
                                        404: _not_found, UserError: _user_error})  # fmt: skip
    app.add_middleware(SecurityHeaders)
    app.state.engine = engine
    app.state.location = location
    app.state.settings = settings
    app.state.settings_path = settings_path
    app.state.config = WebConfig(idle_minutes, absolute_hours, secure_cookies, settings.web.trust_forwarded_proto)
    app.state.clock = _utc_now
    app.state.templates = templating.make_templates()
    app.state.uploads = {}  # upload id -> kept file (see pages/imports.py)
    return app


# Why a session ended, passed to the sign-in page to say so (its words are in pages/signin.py).
ENDED_REASONS = ("idle", "absolute", "disabled", "reset")


async def _not_signed_in(request: Request, exc: auth.NotSignedIn):
    from urllib.parse import quote

    if exc.must_change:
        return RedirectResponse("/password", status_code=303)
    target = "/signin"
    params = []
    if exc.ended in ENDED_REASONS:
        params.append(f"ended={exc.ended}")
    if request.method == "GET" and request.url.path not in ("/", "/signin"):
        params.append("next=" + quote(request.url.path, safe="/"))
    if params:
        target += "?" + "&".join(params)
    if request.headers.get("hx-request"):  # htmx: a full-page redirect, not a fragment
        return Response(status_code=204, headers={"HX-Redirect": target})
    response = RedirectResponse(target, status_code=303)
    if exc.ended:
        delete_cookie(request, response, auth.SESSION_COOKIE)
    return response


async def _refused(request: Request, exc: auth.Refused):
    from tracker.web.templating import render

    return render(request, "refused.html", {"reason": exc.reason}, status_code=exc.status)


async def _not_found(request: Request, exc):
    from tracker.web.templating import render

    return render(request, "refused.html", {"reason": "There is no such page.", "title": "Not found"},
                  status_code=404)  # fmt: skip


async def _user_error(request: Request, exc):
    from tracker.web.templating import render

    return render(request, "refused.html", {"reason": " ".join(str(exc).split()), "title": "Cannot do that"},
                  status_code=400)  # fmt: skip
