"""Accounts of the web interface: the `tracker user` commands, the store's tables (revision 0010),
sessions stored only as hashes, the audit chain after web writes, `tracker demo --serve` and the
[web] settings."""

from __future__ import annotations

import datetime as dt
import json

import pytest
from sqlalchemy import text

from conftest import dump
from tracker.errors import UserError
from tracker.services import accounts as AC
from tracker.store import migrate
from tracker.store.database import locate, make_engine, reading, writing

T0 = dt.datetime(2026, 12, 7, 9, 0, 0)


@pytest.fixture
def store(db_url, run):
    assert run("init", db=db_url).code == 0
    return db_url


def test_user_commands(store, run):
    r = run("user", "add", "a.nurse", "--role", "nurse", "--json", db=store)
    assert r.code == 0, r
    once = json.loads(r.out)["one_time_password"]
    assert len(once) >= 16
    r = run("user", "list", "--json", db=store)
    (acc,) = json.loads(r.out)["accounts"]
    assert acc["name"] == "a.nurse" and acc["role"] == "nurse" and acc["must_change_password"] and not acc["disabled"]
    assert once not in json.dumps(dump(store), default=str)  # only the hash is stored
    r = run("user", "reset-password", "a.nurse", db=store)
    assert r.code == 0 and "one-time password" in r.out and once not in r.out
    r = run("user", "disable", "a.nurse", db=store)
    assert r.code == 0
    assert json.loads(run("user", "list", "--json", db=store).out)["accounts"][0]["disabled"] is True
    actions = [a for (a,) in _rows(store, "SELECT what FROM audit_entry WHERE action = 'account' ORDER BY id")]
    assert actions == ["account a.nurse added (nurse)", "account a.nurse: password reset (one-time password)",
                       "account a.nurse disabled"]


@pytest.mark.parametrize("args,message", [
    (["add", "Bad Name", "--role", "nurse"], "column 'name'"),
    (["add", "ok.name", "--role", "surgeon"], "column 'role': not a role"),
    (["disable", "nobody"], "no account 'nobody'"),
    (["reset-password", "nobody"], "no account 'nobody'"),
])  # fmt: skip
def test_user_command_errors_write_nothing(store, run, args, message):
    before = dump(store)
    r = run("user", *args, db=store)
    assert r.code == 1 and message in r.err and len(r.err.strip().splitlines()) == 1
    assert dump(store) == before


def test_duplicate_and_twice_disabled_are_refused(store, run):
    assert run("user", "add", "x.admin", "--role", "admin", db=store).code == 0
    before = dump(store)
    assert "already exists" in run("user", "add", "x.admin", "--role", "nurse", db=store).err
    assert dump(store) == before
    assert run("user", "disable", "x.admin", db=store).code == 0
    r = run("user", "disable", "x.admin", db=store)
    assert r.code == 1 and "already disabled" in r.err


def test_role_check_constraint_refuses_an_unknown_role(store):
    engine = make_engine(locate(store))
    with pytest.raises(Exception):
        with writing(engine) as conn:
            conn.execute(text("INSERT INTO account (name, role, password_hash, disabled, must_change_password, "
                              "created_at, created_by, failed_count) VALUES ('z', 'surgeon', 'h', false, false, "
                              "'2026-01-01', 't', 0)"))  # fmt: skip
    engine.dispose()


def test_sessions_are_stored_as_hashes_and_end(store):
    engine = make_engine(locate(store))
    with writing(engine) as conn:
        once = AC.add_account(conn, "s.nurse", "nurse", by="t", now=T0)
        user = AC.authenticate(conn, "s.nurse", once, now=T0)
        token = AC.start_session(conn, user, now=T0)
    assert token not in json.dumps(dump(store), default=str)
    with reading(engine) as conn:
        ok = AC.check_session(conn, token, now=T0 + dt.timedelta(minutes=10), idle_minutes=30, absolute_hours=12)
        idle = AC.check_session(conn, token, now=T0 + dt.timedelta(minutes=30), idle_minutes=30, absolute_hours=12)
        wrong = AC.check_session(conn, token + "x", now=T0, idle_minutes=30, absolute_hours=12)
    assert ok.user.name == "s.nurse" and ok.user.must_change_password
    assert idle.user is None and idle.ended == "idle"
    assert wrong.user is None and wrong.ended is None
    with writing(engine) as conn:
        AC.end_session(conn, ok.session_id, "signed_out", now=T0, user="s.nurse")
    with reading(engine) as conn:
        assert AC.check_session(conn, token, now=T0, idle_minutes=30, absolute_hours=12).ended == "signed_out"
    engine.dispose()


def test_web_writes_keep_the_audit_chain_valid(store, run):
    engine = make_engine(locate(store))
    with writing(engine) as conn:
        once = AC.add_account(conn, "c.nurse", "nurse", by="t")
        for _ in range(4):
            try:
                AC.authenticate(conn, "c.nurse", "wrong")
            except AC.SignInRefused:
                pass
        AC.audit_read(conn, "c.nurse", family="HV01", what="day list")
    engine.dispose()
    assert once
    r = run("check", "--json", db=store)
    assert not [f for f in json.loads(r.out)["findings"] if f["check"] == "audit"], r.out


def test_downgrade_keeps_accounts_and_upgrade_uses_them(store):
    engine = make_engine(locate(store))
    with writing(engine) as conn:
        AC.add_account(conn, "kept.admin", "admin", by="t", now=T0)
    before = dump(store)
    migrate.downgrade(engine, "0009")
    with reading(engine) as conn:
        assert migrate.current_revision(conn) == "0009"
    migrate.upgrade(engine)
    assert dump(store) == before
    engine.dispose()


def test_downgrade_without_accounts_drops_the_tables(store):
    from sqlalchemy import inspect

    engine = make_engine(locate(store))
    migrate.downgrade(engine, "0009")
    with engine.connect() as conn:
        assert not {"account", "web_session"} & set(inspect(conn).get_table_names())
    migrate.upgrade(engine)
    engine.dispose()


def test_demo_serve_adds_one_account_per_role_and_serves(tmp_path, run, monkeypatch):
    from tracker.cli import web

    served = []
    monkeypatch.setattr(web, "run_server", lambda db, settings, host, port: served.append((db, host, port)))
    db = str(tmp_path / "demo.sqlite")
    r = run("demo", "--serve", "--port", "8765", db=db)
    assert r.code == 0, r
    assert served == [(db, "127.0.0.1", 8765)]
    assert "http://127.0.0.1:8765/" in r.out
    lines = [ln for ln in r.out.splitlines() if "one-time password" in ln and ln.strip().startswith("demo.")]
    assert sorted(ln.split()[1] for ln in lines) == ["admin", "cardiologist", "counsellor", "nurse"]
    # again: the demo accounts get new one-time passwords
    r2 = run("demo", "--serve", "--json", db=db)
    data = json.loads(r2.out)
    assert {a["name"] for a in data["accounts"]} == {n for n, _ in AC.DEMO_ACCOUNTS}
    assert not set(a["one_time_password"] for a in data["accounts"]) & {ln.split()[-1] for ln in lines}


@pytest.mark.parametrize("toml,message", [
    ("[web]\nidle_minutes = 0\n", "[web] idle_minutes"),
    ("[web]\nabsolute_hours = 'x'\n", "[web] absolute_hours"),
    ("[web]\ntrust_forwarded_proto = 1\n", "[web] trust_forwarded_proto"),
    ("[web]\ncookie = true\n", "unknown key 'cookie'"),
])  # fmt: skip
def test_web_settings_refuse_bad_values(toml, message):
    import tomllib

    from tracker.settings import parse_settings

    with pytest.raises(UserError) as err:
        parse_settings(tomllib.loads(toml))
    assert message in str(err.value)


def test_web_settings_read():
    import tomllib

    from tracker.settings import parse_settings

    s = parse_settings(tomllib.loads("[web]\nidle_minutes = 15\nabsolute_hours = 8\ntrust_forwarded_proto = true\n"))
    assert (s.web.idle_minutes, s.web.absolute_hours, s.web.trust_forwarded_proto, s.web.secure_cookies) == (15, 8, True, None)


def _rows(db: str, sql: str) -> list:
    engine = make_engine(locate(db))
    try:
        with engine.connect() as conn:
            return conn.execute(text(sql)).all()
    finally:
        engine.dispose()


def test_sign_in_decision_rechecks_the_account_after_the_slow_check(store):
    """The password is verified outside the write lock; the write then re-reads the account: failures
    made in between are counted on top (not overwritten), a password reset in between voids the
    verdict, and a disabled account is refused even with the right password."""
    engine = make_engine(locate(store))
    with writing(engine) as conn:
        once = AC.add_account(conn, "r.nurse", "nurse", by="t", now=T0)
    with reading(engine) as conn:
        wrong1 = AC.check_password(conn, "r.nurse", "wrong-1")
        wrong2 = AC.check_password(conn, "r.nurse", "wrong-2")
        right = AC.check_password(conn, "r.nurse", once)
    assert right.matched and not wrong1.matched
    for check in (wrong1, wrong2):  # two sign-ins verified at the same time, written one after the other
        with writing(engine) as conn:  # the refusal is committed (counted and audited), as the web does
            with pytest.raises(AC.SignInRefused):
                AC.record_sign_in(conn, check, now=T0)
    with reading(engine) as conn:
        assert conn.execute(text("SELECT failed_count FROM account WHERE name = 'r.nurse'")).scalar() == 2
    with writing(engine) as conn:
        AC.reset_password(conn, "r.nurse", by="t", now=T0)
    with writing(engine) as conn:
        with pytest.raises(AC.SignInRefused):  # verified against the old hash: no longer holds
            AC.record_sign_in(conn, right, now=T0 + dt.timedelta(hours=1))
    with reading(engine) as conn:
        row = conn.execute(text("SELECT failed_count, password_hash FROM account WHERE name = 'r.nurse'")).one()
        assert row.password_hash != right.password_hash
        assert "password changed during sign-in" in conn.execute(
            text("SELECT what FROM audit_entry ORDER BY id DESC")).first()[0]  # fmt: skip
    engine.dispose()
