"""Chain the audit trail: each entry carries a hash of its content and of the entry before it.

Revision ID: 0006
Revises: 0005

* Column ``audit_entry.entry_hash``: SHA-256 (hex) of the previous entry's hash
  (64 zeros for the first entry), a newline, and the entry's canonical
  serialisation (``docs/corrections-and-audit.md``).  The upgrade hashes the
  existing entries in id order; ``tracker check`` recomputes the chain.
* SQLite: a trigger refuses an INSERT over an existing id (``INSERT OR REPLACE``
  deletes the old row without firing the DELETE trigger).  On PostgreSQL an
  upsert is an UPDATE, which the trigger of 0004 already refuses.

Downgrade drops the column and the trigger; every entry is kept (the hashes are
recomputed, identically, by the next upgrade).

The hashing below is a frozen copy of ``tracker.store.audit.entry_hash`` as of this
revision (a migration never imports project code).
"""

from __future__ import annotations

import hashlib
import json

import sqlalchemy as sa
from alembic import op


revision = "0007"
down_revision = "0006"
branch_labels = None
depends_on = None

_CHAIN_VERSION = "tracker-audit-chain-1"
_GENESIS = "0" * 64
_FIELDS = ("id", "at", "actor", "action", "table_name", "row_id", "family_code", "person_code",
           "what", "before", "after", "reason")  # fmt: skip
_MESSAGE = "audit_entry is append-only: rows are never changed or deleted"
_SQLITE_NO_REPLACE = (
    "CREATE TRIGGER IF NOT EXISTS audit_entry_no_replace BEFORE INSERT ON audit_entry "
    "WHEN EXISTS (SELECT 1 FROM audit_entry WHERE id = NEW.id) "
    f"BEGIN SELECT RAISE(ABORT, '{_MESSAGE}'); END"
)
_SQLITE_NO_UPDATE = (
    "CREATE TRIGGER IF NOT EXISTS audit_entry_no_update BEFORE UPDATE ON audit_entry "
    f"BEGIN SELECT RAISE(ABORT, '{_MESSAGE}'); END"
)


def _hash(previous: str, row) -> str:
    values = [_CHAIN_VERSION, int(row.id), row.at.strftime("%Y-%m-%dT%H:%M:%S.%f")]
    for name in _FIELDS[2:]:
        v = getattr(row, name)
        values.append(int(v) if name == "row_id" and v is not None else v)
    body = json.dumps(values, ensure_ascii=False, separators=(",", ":")).encode("utf-8")
    return hashlib.sha256(previous.encode("ascii") + b"\n" + body).hexdigest()


def upgrade() -> None:
    bind = op.get_bind()
    op.add_column("audit_entry", sa.Column("entry_hash", sa.String(64)))
    table = sa.table("audit_entry", *(sa.column(n, sa.DateTime) if n == "at" else sa.column(n) for n in _FIELDS),
                     sa.column("entry_hash"))  # fmt: skip
    pg = bind.dialect.name == "postgresql"
    # The entries are immutable to everyone else; only this one-off hashing may set the new column.
    if pg:
        op.execute("ALTER TABLE audit_entry DISABLE TRIGGER audit_entry_no_change")
    else:
        op.execute("DROP TRIGGER IF EXISTS audit_entry_no_update")
    previous = _GENESIS
    rows = bind.execute(sa.select(*(table.c[n] for n in _FIELDS)).order_by(table.c.id)).all()
    for row in rows:
        previous = _hash(previous, row)
        bind.execute(table.update().where(table.c.id == row.id).values(entry_hash=previous))
    if pg:
        op.execute("ALTER TABLE audit_entry ENABLE TRIGGER audit_entry_no_change")
    else:
        op.execute(_SQLITE_NO_UPDATE)
        op.execute(_SQLITE_NO_REPLACE)


def downgrade() -> None:
    if op.get_bind().dialect.name != "postgresql":
        op.execute("DROP TRIGGER IF EXISTS audit_entry_no_replace")
    # Plain ALTER TABLE ... DROP COLUMN (SQLite 3.35+ and PostgreSQL): no table rebuild, no UPDATE.
    op.execute("ALTER TABLE audit_entry DROP COLUMN entry_hash")
