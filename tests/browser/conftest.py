"""Fixtures of the browser tests: chromium, a page, the demo store with one account per role, a running app.

Every test here carries the ``browser`` marker (``pytest -m browser`` runs them alone,
``-m "not browser"`` leaves them out).  They skip when /usr/bin/chromium is absent,
except in CI (``CI=true``), where they must run and fail instead.

The app is served by uvicorn in a background thread on a free 127.0.0.1 port, on a
fresh copy of the invented demo store per test, so tests never see each other's writes.
"""

from __future__ import annotations

import contextlib
import secrets
import shutil
import socket
import sqlite3
import threading
import time
from dataclasses import dataclass
from pathlib import Path

import pytest

from browser.browsing import launch, require_chromium

HERE = Path(__file__).parent
DEMO_SETTINGS = HERE.parents[1] / "demo_family" / "clinic.toml"  # the invented demo clinic (letters need it)
ROLES = ("nurse", "cardiologist", "counsellor", "admin")


def pytest_collection_modifyitems(config, items):
    for item in items:
        if HERE in Path(str(item.fspath)).parents:
            item.add_marker(pytest.mark.browser)


# --------------------------------------------------------------------------- chromium


@pytest.fixture(scope="session")
def browser():
    require_chromium()
    from playwright.sync_api import sync_playwright

    with sync_playwright() as pw:
        b = launch(pw)
        yield b
        b.close()


class PageProblems(list):
    """Script errors and refused resources (the page's policy at work) seen while a test ran."""


@pytest.fixture
def page(browser):
    """A page in a fresh browser context (its own cookies); script errors and policy refusals fail the test."""
    context = browser.new_context(viewport={"width": 1280, "height": 900}, locale="en-GB")
    context.set_default_timeout(15_000)
    p = context.new_page()
    problems = PageProblems()
    p.on("pageerror", lambda exc: problems.append(f"script error: {exc}"))
    p.on("console", lambda m: problems.append(f"console {m.type}: {m.text}")
         if m.type == "error" and ("Content Security Policy" in m.text or "Refused" in m.text) else None)  # fmt: skip
    p.problems = problems
    yield p
    context.close()
    assert not problems, "the page reported:\n" + "\n".join(problems)


# --------------------------------------------------------------------------- serving


def free_socket() -> socket.socket:
    """A listening-ready socket bound to a free 127.0.0.1 port (handed to uvicorn: no race for the port)."""
    sock = socket.socket(socket.AF_INET, socket.SOCK_STREAM)
    sock.setsockopt(socket.SOL_SOCKET, socket.SO_REUSEADDR, 1)
    sock.bind(("127.0.0.1", 0))
    return sock


@contextlib.contextmanager
def serve(app, *, start_timeout: float = 20.0):
    """Serve an ASGI app with uvicorn in a background thread; yields the base URL; stops it afterwards."""
    import uvicorn

    sock = free_socket()
    port = sock.getsockname()[1]
    config = uvicorn.Config(app, log_level="warning", lifespan="auto", access_log=False)
    server = uvicorn.Server(config)
    thread = threading.Thread(target=server.run, kwargs={"sockets": [sock]}, name=f"uvicorn-{port}", daemon=True)
    thread.start()
    deadline = time.monotonic() + start_timeout
    while not server.started:
        if not thread.is_alive() or time.monotonic() > deadline:
            server.should_exit = True
            raise RuntimeError(f"the app did not start on 127.0.0.1:{port}")
        time.sleep(0.02)
    try:
        yield f"http://127.0.0.1:{port}"
    finally:
        server.should_exit = True
        thread.join(timeout=15)
        sock.close()


# --------------------------------------------------------------------------- the demo store and its accounts


@dataclass(frozen=True)
class Account:
    name: str
    role: str
    password: str


def add_accounts(db: str, roles=ROLES, *, keep_one_time: bool = False, prefix: str = "demo") -> dict[str, Account]:
    """One invented account per role through the accounts service; each first password replaced, as at a
    first sign-in (``keep_one_time``: left as the one-time password, which must be changed on sign-in)."""
    from tracker.services import accounts
    from tracker.store.database import locate, make_engine, writing

    engine = make_engine(locate(db))
    made = {}
    try:
        for role in roles:
            name = f"{prefix}.{role}"
            with writing(engine) as conn:
                first = accounts.add_account(conn, name, role, by="test-setup")
            password = first
            if not keep_one_time:
                password = "pw-" + secrets.token_urlsafe(15)
                with writing(engine) as conn:
                    user = accounts.authenticate(conn, name, first)
                    accounts.change_password(conn, user, first, password)
            made[role] = Account(name, role, password)
    finally:
        engine.dispose()
    return made


@pytest.fixture(scope="session")
def demo_store(tmp_path_factory):
    """The invented demo store (``tracker demo``) with one account per role: (path, accounts). Never written."""
    from tracker.cli.app import main

    path = tmp_path_factory.mktemp("demo") / "demo.sqlite"
    code = main(["demo", "--db", str(path)])
    assert code == 0, "tracker demo failed"
    return path, add_accounts(str(path))


@dataclass
class Site:
    url: str
    db: str
    accounts: dict[str, Account]
    app: object  # the Starlette app (``app.state.clock`` can be moved by a test)
    audit_start: int = 0  # the last audit entry id of the store as copied (tests look at what follows)

    def at(self, path: str) -> str:
        return self.url + path


@pytest.fixture
def site_factory(demo_store, tmp_path):
    """``site_factory(**create_app_kwargs)``: the app on a fresh copy of the demo store, with the demo
    clinic's settings unless ``settings_path`` is given; a :class:`Site`."""
    with contextlib.ExitStack() as stack:

        def make(**kwargs) -> Site:
            from tracker.web.app import create_app

            template, accounts = demo_store
            db = tmp_path / f"store-{secrets.token_hex(4)}.sqlite"
            shutil.copyfile(template, db)
            with sqlite3.connect(db) as conn:
                audit_start = conn.execute("SELECT coalesce(max(id), 0) FROM audit_entry").fetchone()[0]
            kwargs.setdefault("settings_path", DEMO_SETTINGS)
            app = create_app(db=str(db), secure_cookies=False, **kwargs)
            url = stack.enter_context(serve(app))
            return Site(url, str(db), accounts, app, audit_start)

        yield make


@pytest.fixture
def site(site_factory) -> Site:
    return site_factory()
