"""The audit trail: one append-only row per write to the store.

Every command that writes calls :func:`record` inside its own transaction, so
an entry exists exactly when its change was committed.  The table refuses
UPDATE and DELETE through a database trigger (migration 0004); nothing in the
tool edits it.

Who is the ``--user`` given to the command, else the operating-system user
(:func:`actor`).  When is UTC, stored without a zone and shown as ISO 8601
with ``Z``.  ``before`` / ``after`` are JSON objects of the changed fields
(dates as ISO text).

The trail is tamper-evident: each entry carries ``entry_hash``, the SHA-256 of
the previous entry's hash and the entry's own content (:func:`entry_hash`,
migration 0007); ``tracker check`` recomputes the chain
(:func:`tracker.store.checks.audit_findings`).  The canonical serialisation is
defined here and in docs/corrections-and-audit.md, and is identical on SQLite
and PostgreSQL because it uses only values both store exactly: integers, text
as stored (``before``/``after`` are the stored JSON text, never re-encoded),
and ``at`` written as ``YYYY-MM-DDTHH:MM:SS.ffffff`` (six fraction digits always).
"""

from __future__ import annotations

import datetime as dt
import getpass
import hashlib
import json
from typing import Any, TYPE_CHECKING

from sqlalchemy import Connection, insert, select

from tracker.errors import UserError
from tracker.store.audit_actions import ACTIONS  # noqa: F401  (audit.ACTIONS for callers)
from tracker.store.models import AuditEntry

if TYPE_CHECKING:  # for annotations only: loaded where used, so start-up stays light
    import pandas as pd


def actor(user: str | None) -> str:
    """The name recorded as who made a change: ``--user`` if given, else the OS user."""
    if user is not None and user.strip():
        limit = AuditEntry.__table__.c.actor.type.length
        if len(user.strip()) > limit:  # refused before any write, the same on every backend
            raise UserError(f"option --user: longer than {limit} characters")
        return user.strip()
    try:
        return getpass.getuser()
    except Exception:  # no user name in the environment (some containers)
        return "unknown"


def now_utc() -> dt.datetime:
    return dt.datetime.now(dt.timezone.utc).replace(tzinfo=None, microsecond=0)


# The hash chain.  Changing any of this breaks every stored chain: it is frozen (a copy lives in
# migration 0007, which hashes the entries written before the chain existed).
CHAIN_VERSION = "tracker-audit-chain-1"
GENESIS = "0" * 64  # the "previous hash" of the first entry
HASHED = ("id", "at", "actor", "action", "table_name", "row_id", "family_code", "person_code",
          "what", "before", "after", "reason")  # fmt: skip


def canonical(entry: dict[str, Any]) -> bytes:
    """The bytes hashed for one entry: a compact JSON array, UTF-8.

    ``[CHAIN_VERSION, id, at, actor, action, table_name, row_id, family_code,
    person_code, what, before, after, reason]`` with ``at`` as
    ``YYYY-MM-DDTHH:MM:SS.ffffff`` (UTC, no zone), integers as integers, absent
    values as ``null``, text exactly as stored; ``json.dumps`` with
    ``ensure_ascii=False`` and separators ``","`` / ``":"``.
    """
    at = entry["at"]
    values = [CHAIN_VERSION, int(entry["id"]), at.strftime("%Y-%m-%dT%H:%M:%S.%f")]
    for k in HASHED[2:]:
        v = entry[k]
        values.append(int(v) if k == "row_id" and v is not None else v)
    return json.dumps(values, ensure_ascii=False, separators=(",", ":")).encode("utf-8")


def entry_hash(previous: str, entry: dict[str, Any]) -> str:
    """SHA-256 (hex) of the previous entry's hash, a newline, and :func:`canonical` of this entry."""
    return hashlib.sha256(previous.encode("ascii") + b"\n" + canonical(entry)).hexdigest()


def last_link(conn: Connection) -> tuple[int, str]:
    """(id, hash) of the newest entry, or (0, GENESIS) for an empty trail."""
    row = conn.execute(select(AuditEntry.id, AuditEntry.entry_hash).order_by(AuditEntry.id.desc()).limit(1)).first()
    if row is None:
        return 0, GENESIS
    return int(row[0]), row[1] or GENESIS


def append_raw(conn: Connection, entry: dict[str, Any]) -> tuple[int, str]:
    """Append one entry (its fields as in :data:`HASHED`, without ``id``) at the end of the chain.

    The caller holds the write lock (:func:`tracker.store.database.writing`), so the
    newest entry cannot change between reading it and appending.
    """
    last_id, previous = last_link(conn)
    row = {k: entry.get(k) for k in HASHED[1:]}
    row["id"] = last_id + 1
    at = row["at"]
    if at.tzinfo is not None:
        at = at.astimezone(dt.timezone.utc).replace(tzinfo=None)
    row["at"] = at
    row["entry_hash"] = entry_hash(previous, row)
    conn.execute(insert(AuditEntry), row)
    return row["id"], row["entry_hash"]


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
    entry_id, _ = append_raw(
        conn,
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
    )
    return entry_id


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
    import pandas as pd

    rows = conn.execute(stmt).all()
    frame = pd.DataFrame([tuple(r) for r in rows], columns=COLUMNS, dtype=object)
    frame["at"] = [t.isoformat() + "Z" for t in frame["at"]]
    for c in ("before", "after"):
        frame[c] = [json.loads(v) if v else None for v in frame[c]]
    return frame
