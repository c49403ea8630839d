"""Fixtures of the web interface's tests: a demo store on each backend, an app with a movable clock,
and browsers signed in with each role.

The store-touching tests run on SQLite and, when TRACKER_TEST_POSTGRES_URL is set, on PostgreSQL
(one schema per test, as tests/conftest.py makes them).  All data are the invented demo families.
"""

from __future__ import annotations

import datetime as dt
import re
import shutil

import pytest
from sqlalchemy import text

from tracker.services import accounts as AC
from tracker.store.database import locate, make_engine, writing

PASSWORD = "correct-horse-battery-7"  # invented test password
T0 = dt.datetime(2026, 12, 7, 9, 0, 0)  # the tests' "now" (UTC), a Monday
ROLES = ("nurse", "cardiologist", "counsellor", "admin")


@pytest.fixture(scope="session")
def demo_template(tmp_path_factory):
    """A SQLite demo store built once; each SQLite test gets a copy."""
    from tracker.cli.app import main

    path = tmp_path_factory.mktemp("webdemo") / "demo.sqlite"
    assert main(["demo", "--db", str(path)]) == 0
    return path


@pytest.fixture
def web_db(request, db_url, demo_template, tmp_path):
    """A store holding the demo families, on each backend (SQLite path or PostgreSQL URL)."""
    if "://" not in db_url:
        path = tmp_path / "web.sqlite"
        shutil.copy(demo_template, path)
        return str(path)
    from tracker.cli.app import main

    assert main(["demo", "--db", db_url]) == 0
    return db_url


class Clock:
    def __init__(self, t: dt.datetime):
        self.t = t

    def __call__(self) -> dt.datetime:
        return self.t

    def advance(self, **kw) -> None:
        self.t += dt.timedelta(**kw)


@pytest.fixture
def clock():
    return Clock(T0)


@pytest.fixture
def app(web_db, clock):
    from tracker.web.app import create_app

    application = create_app(web_db)
    application.state.clock = clock
    yield application
    application.state.engine.dispose()


def add_account(db: str, name: str, role: str, *, ready: bool = True, now: dt.datetime = T0) -> str:
    """Add an account; ``ready``: with PASSWORD already chosen (else returns the one-time password)."""
    engine = make_engine(locate(db))
    try:
        with writing(engine) as conn:
            once = AC.add_account(conn, name, role, by="test", now=now)
            if ready:
                aid = conn.execute(text("SELECT id FROM account WHERE name = :n"), {"n": name}).scalar()
                AC.change_password(conn, AC.User(name, role, aid, True), once, PASSWORD, now=now)
    finally:
        engine.dispose()
    return PASSWORD if ready else once


def csrf_from(html: str) -> str:
    m = re.search(r'name="csrf_token" value="([^"]+)"', html)
    assert m, "no CSRF field on the page"
    return m.group(1)


def sign_in(client, name: str, password: str = PASSWORD):
    page = client.get("/signin")
    return client.post("/signin", data={"name": name, "password": password, "csrf_token": csrf_from(page.text),
                                        "next": "/day"}, follow_redirects=False)  # fmt: skip


@pytest.fixture
def browser(app, web_db):
    """browser(role) -> a TestClient signed in as a new account of that role (``client.token``: its CSRF token)."""
    from starlette.testclient import TestClient

    made = []

    def _make(role: str | None = None):
        client = TestClient(app, base_url="http://testserver")
        made.append(client)
        if role is None:
            return client
        name = f"t.{role}{len(made)}"
        add_account(web_db, name, role)
        r = sign_in(client, name)
        assert r.status_code == 303, r.text
        client.token = csrf_from(client.get("/password").text)
        client.name = name
        return client

    yield _make
    for c in made:
        c.close()


def audit_rows(db: str, action: str | None = None) -> list:
    engine = make_engine(locate(db))
    try:
        with engine.connect() as conn:
            sql = "SELECT actor, action, family_code, person_code, what FROM audit_entry"
            if action:
                return conn.execute(text(sql + " WHERE action = :a ORDER BY id"), {"a": action}).all()
            return conn.execute(text(sql + " ORDER BY id")).all()
    finally:
        engine.dispose()
