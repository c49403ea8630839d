"""The audit trail: one append-only row per write to the store.

Every command that writes calls :func:`record` inside its own transaction, so
an entry exists exactly when its change was committed.  The table refuses
UPDATE and DELETE through a database trigger (migration 0004); nothing in the
tool edits it.

Who is the ``--user`` given to the command, else the operating-system user
(:func:`actor`).  When is UTC, stored without a zone and shown as ISO 8601
with ``Z``.  ``before`` / ``after`` are JSON objects of the changed fields
(dates as ISO text).
"""

from __future__ import annotations

import datetime as dt
import getpass
import json
from typing import Any

import pandas as pd
from sqlalchemy import Connection, insert, select

from tracker.store.models import AuditEntry

ACTIONS = ("import", "edit", "remove", "reinstate", "reclassify", "task_done", "restore")


def actor(user: str | None) -> str:
    """The name recorded as who made a change: ``--user`` if given, else the OS user."""
    if user is not None and user.strip():
        return user.strip()
    try:
        return getpass.getuser()
    except Exception:  # no user name in the environment (some containers)
        return "unknown"


def now_utc() -> dt.datetime:
    return dt.datetime.now(dt.timezone.utc).replace(tzinfo=None, microsecond=0)


def _json(values: dict[str, Any] | None) -> str | None:
    if values is None:
        return None
    return json.dumps(values, sort_keys=True, default=_plain, ensure_ascii=False)


def _plain(v):
    if isinstance(v, (dt.date, dt.datetime)):
        return v.isoformat()
    if hasattr(v, "item"):  # numpy scalars
        return v.item()
    return str(v)


def record(
    conn: Connection,
    *,
    action: str,
    table: str,
    what: str,
    user: str | None = None,
    row_id: int | None = None,
    family: str | None = None,
    person: str | None = None,
    before: dict[str, Any] | None = None,
    after: dict[str, Any] | None = None,
    reason: str | None = None,
    at: dt.datetime | None = None,
) -> int:
    """Append one entry inside the caller's transaction; returns its id."""
    if action not in ACTIONS:
        raise ValueError(f"unknown audit action {action!r}")
    return conn.execute(
        insert(AuditEntry).returning(AuditEntry.id),
        dict(
            at=at or now_utc(),
            actor=actor(user),
            action=action,
            table_name=table,
            row_id=row_id,
            family_code=family,
            person_code=person,
            what=what,
            before=_json(before),
            after=_json(after),
            reason=reason,
        ),
    ).scalar_one()


COLUMNS = ["id", "at", "actor", "action", "table", "family", "person", "what", "before", "after", "reason"]


def load(
    conn: Connection,
    *,
    person: str | None = None,
    family: str | None = None,
    since: dt.date | None = None,
    until: dt.date | None = None,
    action: str | None = None,
) -> pd.DataFrame:
    """Entries oldest first, filtered; ``since``/``until`` are inclusive UTC calendar days.

    A family filter also matches entries about any person of that family (codes
    recorded at the time of the change).
    """
    a = AuditEntry
    stmt = select(a.id, a.at, a.actor, a.action, a.table_name, a.family_code, a.person_code, a.what,
                  a.before, a.after, a.reason).order_by(a.id)  # fmt: skip
    if person is not None:
        stmt = stmt.where(a.person_code == person)
    if family is not None:
        stmt = stmt.where(a.family_code == family)
    if since is not None:
        stmt = stmt.where(a.at >= dt.datetime.combine(since, dt.time()))
    if until is not None:
        stmt = stmt.where(a.at < dt.datetime.combine(until + dt.timedelta(days=1), dt.time()))
    if action is not None:
        stmt = stmt.where(a.action == action)
    rows = conn.execute(stmt).all()
    frame = pd.DataFrame([tuple(r) for r in rows], columns=COLUMNS, dtype=object)
    frame["at"] = [t.isoformat() + "Z" for t in frame["at"]]
    for c in ("before", "after"):
        frame[c] = [json.loads(v) if v else None for v in frame[c]]
    return frame
