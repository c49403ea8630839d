"""Accounts and sign-in sessions of the web interface, and the audit of who read what.

Accounts (table ``account``, migration 0010) hold a name, a role and the argon2
hash of a password.  An administrator adds an account or resets its password;
either gives a one-time password, shown once, that must be replaced at the
first sign-in.  Accounts are never deleted, only disabled.

Sign-in slows down after repeated failures: after :data:`FREE_FAILURES` failed
attempts in a row, the account refuses every attempt (even with the right
password) for a window that doubles with each further failure, from
:data:`FIRST_WAIT_SECONDS` up to :data:`MAX_WAIT_SECONDS`.  Every refused and
accepted sign-in is in the audit trail.

Sessions (table ``web_session``) are identified by a random token held only in
the browser's cookie; the store keeps its SHA-256.  A session ends at sign-out,
after ``idle_minutes`` without use, and ``absolute_hours`` after sign-in,
whichever comes first.

Every function takes the time (``now``, UTC without zone) from its caller, so
tests can move the clock.  Writers run inside the caller's
:func:`tracker.store.database.writing` transaction.
"""

from __future__ import annotations

import datetime as dt
import hashlib
import secrets
from dataclasses import dataclass

from sqlalchemy import Connection, func, insert, select, update

from tracker.errors import UserError
from tracker.store import audit
from tracker.store.models import ROLES, Account, WebSession

# Slow-down of failed sign-ins (engineering choices of this project, common practice: a few free
# attempts, then a growing wait, so guessing is slow and a mistyped password costs little).
FREE_FAILURES = 3
FIRST_WAIT_SECONDS = 30
MAX_WAIT_SECONDS = 15 * 60

MIN_PASSWORD_CHARS = 12  # common practice for a typed password (no single source)
MAX_PASSWORD_CHARS = 200
NAME_CHARS = "abcdefghijklmnopqrstuvwxyz0123456789._-"
ONE_TIME_BYTES = 12  # secrets.token_urlsafe(12): 16 characters, 96 random bits


class SignInRefused(UserError):
    """A sign-in was refused; the message never says whether the name or the password was wrong."""


@dataclass(frozen=True)
class User:
    """Who is signed in: the account's name and role."""

    name: str
    role: str
    account_id: int
    must_change_password: bool = False


@dataclass(frozen=True)
class SessionCheck:
    """The result of looking up a session token: the user, or why there is none."""

    user: User | None
    session_id: int | None = None
    ended: str | None = None  # "idle", "absolute", "signed_out", "disabled" or None


def _hasher():
    from argon2 import PasswordHasher

    return PasswordHasher()


def hash_password(password: str) -> str:
    return _hasher().hash(password)


def _verify(password_hash: str, password: str) -> bool:
    from argon2.exceptions import InvalidHashError, VerificationError, VerifyMismatchError

    try:
        return _hasher().verify(password_hash, password)
    except (VerifyMismatchError, VerificationError, InvalidHashError):
        return False


def token_hash(token: str) -> str:
    return hashlib.sha256(token.encode("utf-8")).hexdigest()


def one_time_password() -> str:
    return secrets.token_urlsafe(ONE_TIME_BYTES)


def _rejected(field: str, message: str):
    from tracker.io.reading import InputRejected, Problem

    return InputRejected([Problem("account", None, field, message)])


def check_name(name: str) -> str:
    """An account name: 2 to 100 lower-case letters, digits, dot, dash or underscore."""
    n = (name or "").strip()
    if not 2 <= len(n) <= 100 or any(c not in NAME_CHARS for c in n):
        raise _rejected("name", "2 to 100 characters: lower-case letters, digits, '.', '_' or '-'")
    return n


def check_role(role: str) -> str:
    if role not in ROLES:
        raise _rejected("role", f"not a role: give one of {', '.join(ROLES)}")
    return role


def check_new_password(password: str, field: str = "new_password") -> str:
    if len(password) < MIN_PASSWORD_CHARS:
        raise _rejected(field, f"at least {MIN_PASSWORD_CHARS} characters")
    if len(password) > MAX_PASSWORD_CHARS:
        raise _rejected(field, f"at most {MAX_PASSWORD_CHARS} characters")
    return password


def _account(conn: Connection, name: str):
    return conn.execute(select(Account).where(Account.name == name)).first()


def _require_account(conn: Connection, name: str, field: str = "name"):
    row = _account(conn, name)
    if row is None:
        raise _rejected(field, f"no account {name!r}")
    return row


# --------------------------------------------------------------------------- administration


def add_account(conn: Connection, name: str, role: str, *, by: str, now: dt.datetime | None = None) -> str:
    """Add an account; returns its one-time password (shown once, never stored)."""
    now = now or audit.now_utc()
    name, role = check_name(name), check_role(role)
    if _account(conn, name) is not None:
        raise _rejected("name", f"an account {name!r} already exists")
    password = one_time_password()
    aid = conn.execute(
        insert(Account).values(name=name, role=role, password_hash=hash_password(password), disabled=False,
                               must_change_password=True, created_at=now, created_by=by, failed_count=0,
                               last_failed_at=None)  # fmt: skip
    ).inserted_primary_key[0]
    audit.record(conn, action="account", table="account", row_id=aid, what=f"account {name} added ({role})",
                 after={"name": name, "role": role, "disabled": False}, user=by, at=now)  # fmt: skip
    return password


def disable_account(conn: Connection, name: str, *, by: str, now: dt.datetime | None = None) -> None:
    """Disable an account and end its open sessions (the account and its history are kept)."""
    now = now or audit.now_utc()
    row = _require_account(conn, name)
    if row.disabled:
        raise _rejected("name", f"account {name!r} is already disabled")
    conn.execute(update(Account).where(Account.id == row.id).values(disabled=True))
    conn.execute(update(WebSession).where(WebSession.account_id == row.id, WebSession.ended_at.is_(None))
                 .values(ended_at=now, end_reason="disabled"))  # fmt: skip
    audit.record(conn, action="account", table="account", row_id=row.id, what=f"account {name} disabled",
                 before={"disabled": False}, after={"disabled": True}, user=by, at=now)  # fmt: skip


def reset_password(conn: Connection, name: str, *, by: str, now: dt.datetime | None = None) -> str:
    """Give an account a new one-time password (returned, shown once); its open sessions end."""
    now = now or audit.now_utc()
    row = _require_account(conn, name)
    password = one_time_password()
    conn.execute(update(Account).where(Account.id == row.id)
                 .values(password_hash=hash_password(password), must_change_password=True, failed_count=0,
                         last_failed_at=None))  # fmt: skip
    conn.execute(update(WebSession).where(WebSession.account_id == row.id, WebSession.ended_at.is_(None))
                 .values(ended_at=now, end_reason="reset"))  # fmt: skip
    audit.record(conn, action="account", table="account", row_id=row.id,
                 what=f"account {name}: password reset (one-time password)", user=by, at=now)  # fmt: skip
    return password


def change_password(conn: Connection, user: User, current: str, new: str, *, now: dt.datetime | None = None) -> None:
    """The signed-in user replaces their password (the current one is asked again)."""
    now = now or audit.now_utc()
    row = conn.execute(select(Account).where(Account.id == user.account_id)).first()
    if row is None or not _verify(row.password_hash, current):
        raise _rejected("current_password", "not the current password")
    check_new_password(new)
    if new == current:
        raise _rejected("new_password", "must differ from the current password")
    conn.execute(update(Account).where(Account.id == user.account_id)
                 .values(password_hash=hash_password(new), must_change_password=False))  # fmt: skip
    audit.record(conn, action="account", table="account", row_id=user.account_id,
                 what=f"account {user.name}: password changed", user=user.name, at=now)  # fmt: skip


def list_accounts(conn: Connection) -> list[dict]:
    """Every account, by name, without any hash."""
    open_sessions = dict(conn.execute(
        select(WebSession.account_id, func.count()).where(WebSession.ended_at.is_(None)).group_by(WebSession.account_id)
    ).all())  # fmt: skip
    rows = conn.execute(select(Account).order_by(Account.name)).all()
    return [
        {"name": a.name, "role": a.role, "disabled": bool(a.disabled),
         "must_change_password": bool(a.must_change_password), "created_at": a.created_at.isoformat() + "Z",
         "created_by": a.created_by, "failed_sign_ins": a.failed_count,
         "open_sessions": int(open_sessions.get(a.id, 0))}
        for a in rows
    ]  # fmt: skip


# --------------------------------------------------------------------------- sign-in


def wait_seconds(failed_count: int) -> int:
    """How long an account refuses sign-in after ``failed_count`` failures in a row."""
    if failed_count < FREE_FAILURES:
        return 0
    return min(FIRST_WAIT_SECONDS * 2 ** (failed_count - FREE_FAILURES), MAX_WAIT_SECONDS)


@dataclass(frozen=True)
class PasswordCheck:
    """What :func:`check_password` found, outside any write transaction: the account as read
    (None: unknown name) and whether the password matched the hash read."""

    name: str
    account_id: int | None
    password_hash: str | None
    matched: bool


def check_password(conn: Connection, name: str, password: str) -> PasswordCheck:
    """Read the account and verify the password against its hash (the slow argon2 step).

    Reads only: call it before taking the write lock, then :func:`record_sign_in` in a short
    write transaction, which re-checks what the verdict depends on."""
    name = (name or "").strip()
    row = _account(conn, name) if name and len(name) <= 100 else None
    if row is None:
        _verify(_dummy_hash(), password)  # the same work as for a real account
        return PasswordCheck(name, None, None, False)
    return PasswordCheck(name, row.id, row.password_hash, _verify(row.password_hash, password))


def record_sign_in(conn: Connection, check: PasswordCheck, *, now: dt.datetime | None = None,
                   client: str | None = None) -> User:
    """Inside the caller's write transaction: re-read the account and decide from the stored row
    (failures counted so far, waiting window, disabled) and ``check``; write the failed count or
    clear it. Audited either way; :class:`SignInRefused` on refusal. If the password hash changed
    since ``check`` read it (a reset or change in between), the verdict no longer holds: refused."""
    now = now or audit.now_utc()
    where = f" from {client}" if client else ""
    a = _account(conn, check.name) if check.account_id is not None else None
    if a is None or a.id != check.account_id:
        audit.record(conn, action="sign_in_refused", table="account", what=f"sign-in refused: unknown name{where}",
                     user="web", at=now)  # fmt: skip
        raise SignInRefused("name or password not recognised")
    wait = wait_seconds(a.failed_count)
    if wait and a.last_failed_at is not None and now < a.last_failed_at + dt.timedelta(seconds=wait):
        until = a.last_failed_at + dt.timedelta(seconds=wait)
        audit.record(conn, action="sign_in_refused", table="account", row_id=a.id,
                     what=f"sign-in refused: {a.name} waiting after {a.failed_count} failures{where}",
                     user=a.name, at=now)  # fmt: skip
        raise SignInRefused(f"too many failed sign-ins: try again after {until.isoformat(timespec='seconds')}Z")
    changed = a.password_hash != check.password_hash
    if a.disabled or changed or not check.matched:
        failed = a.failed_count + (0 if changed else 1)
        if not changed:
            conn.execute(update(Account).where(Account.id == a.id).values(failed_count=failed, last_failed_at=now))
        why = ("account disabled" if a.disabled else "password changed during sign-in" if changed
               else f"wrong password (failure {failed})")  # fmt: skip
        audit.record(conn, action="sign_in_refused", table="account", row_id=a.id,
                     what=f"sign-in refused: {a.name}: {why}{where}", user=a.name, at=now)  # fmt: skip
        raise SignInRefused("name or password not recognised")
    conn.execute(update(Account).where(Account.id == a.id).values(failed_count=0, last_failed_at=None))
    return User(a.name, a.role, a.id, bool(a.must_change_password))


def authenticate(conn: Connection, name: str, password: str, *, now: dt.datetime | None = None,
                 client: str | None = None) -> User:
    """The account's user when the password is right and the account may sign in; else :class:`SignInRefused`.

    Audited either way.  The refusal says the same for an unknown name and a wrong
    password; it says when to try again while the account waits.  One connection for both
    steps (the CLI and tests); the web verifies first, outside the write lock
    (:func:`check_password`, then :func:`record_sign_in`).
    """
    return record_sign_in(conn, check_password(conn, name, password), now=now, client=client)


_DUMMY: list[str] = []


def _dummy_hash() -> str:
    if not _DUMMY:
        _DUMMY.append(hash_password(secrets.token_hex(16)))
    return _DUMMY[0]


# --------------------------------------------------------------------------- sessions


def start_session(conn: Connection, user: User, *, now: dt.datetime | None = None, client: str | None = None) -> str:
    """A new session for a user who has just signed in; returns the token (for the cookie only)."""
    now = now or audit.now_utc()
    token = secrets.token_urlsafe(32)
    sid = conn.execute(insert(WebSession).values(token_sha256=token_hash(token), account_id=user.account_id,
                                                 created_at=now, last_seen_at=now)).inserted_primary_key[0]  # fmt: skip
    audit.record(conn, action="sign_in", table="web_session", row_id=sid,
                 what=f"signed in ({user.role})" + (f" from {client}" if client else ""), user=user.name, at=now)
    return token


def check_session(conn: Connection, token: str | None, *, now: dt.datetime, idle_minutes: int,
                  absolute_hours: int) -> SessionCheck:
    """Who the token belongs to, if its session is open and within its limits (reads only)."""
    if not token or len(token) > 200:
        return SessionCheck(None)
    s = conn.execute(
        select(WebSession.id, WebSession.created_at, WebSession.last_seen_at, WebSession.ended_at,
               WebSession.end_reason, Account.id.label("account_id"), Account.name, Account.role, Account.disabled,
               Account.must_change_password)
        .join(Account, WebSession.account_id == Account.id)
        .where(WebSession.token_sha256 == token_hash(token))
    ).first()  # fmt: skip
    if s is None:
        return SessionCheck(None)
    if s.ended_at is not None:
        return SessionCheck(None, s.id, s.end_reason or "ended")
    if s.disabled:
        return SessionCheck(None, s.id, "disabled")
    if now >= s.created_at + dt.timedelta(hours=absolute_hours):
        return SessionCheck(None, s.id, "absolute")
    if now >= s.last_seen_at + dt.timedelta(minutes=idle_minutes):
        return SessionCheck(None, s.id, "idle")
    return SessionCheck(User(s.name, s.role, s.account_id, bool(s.must_change_password)), s.id)


TOUCH_EVERY_SECONDS = 30  # last_seen_at is written at most this often (fewer writes; idle limit in minutes)


def touch_session(conn: Connection, session_id: int, *, now: dt.datetime) -> None:
    """Record that the session was used now (skipped when it was used in the last few seconds)."""
    conn.execute(update(WebSession).where(
        WebSession.id == session_id, WebSession.ended_at.is_(None),
        WebSession.last_seen_at < now - dt.timedelta(seconds=TOUCH_EVERY_SECONDS),
    ).values(last_seen_at=now))  # fmt: skip


def needs_touch(conn: Connection, session_id: int, now: dt.datetime) -> bool:
    seen = conn.execute(select(WebSession.last_seen_at).where(WebSession.id == session_id)).scalar()
    return seen is not None and seen < now - dt.timedelta(seconds=TOUCH_EVERY_SECONDS)


def end_session(conn: Connection, session_id: int, reason: str, *, now: dt.datetime, user: str | None = None) -> None:
    """End a session (sign-out, or a limit reached); a sign-out is audited."""
    done = conn.execute(update(WebSession).where(WebSession.id == session_id, WebSession.ended_at.is_(None))
                        .values(ended_at=now, end_reason=reason)).rowcount  # fmt: skip
    if done and reason == "signed_out":
        audit.record(conn, action="sign_out", table="web_session", row_id=session_id, what="signed out",
                     user=user or "web", at=now)  # fmt: skip


# --------------------------------------------------------------------------- reads


def audit_read(conn: Connection, user: User | str, family: str | None = None, person: str | None = None, *,
               what: str, now: dt.datetime | None = None) -> int:
    """Append a read entry (who, which family/person, what was shown, when) to the audit trail.

    Runs inside the caller's write transaction (the chain is appended under the write lock).
    """
    name = user.name if isinstance(user, User) else user
    return audit.record(conn, action="read", table="person" if person else "family", family=family, person=person,
                        what=what, user=name, at=now)  # fmt: skip


# Invented demonstration accounts, one per role (`tracker demo --serve`).
DEMO_ACCOUNTS = (("demo.nurse", "nurse"), ("demo.cardiologist", "cardiologist"), ("demo.counsellor", "counsellor"),
                 ("demo.admin", "admin"))  # fmt: skip


def demo_accounts(conn: Connection, *, by: str = "demo", now: dt.datetime | None = None) -> list[dict]:
    """One invented account per role, each with a fresh one-time password (an existing one is reset)."""
    out = []
    for name, role in DEMO_ACCOUNTS:
        row = _account(conn, name)
        if row is None:
            password = add_account(conn, name, role, by=by, now=now)
        else:
            if row.disabled or row.role != role:
                raise UserError(f"the database already has an account {name!r} that is not the demo's: use another --db")
            password = reset_password(conn, name, by=by, now=now)
        out.append({"name": name, "role": role, "one_time_password": password})
    return out
