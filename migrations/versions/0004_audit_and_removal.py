"""Add the append-only audit trail and soft removal of people and studies.

Revision ID: 0004
Revises: 0003

* Table ``audit_entry``: one row per write (import, edit, removal, reinstatement,
  reclassification, task done, restore): who (``actor``), when (``at``, UTC),
  what (``action``, ``table_name``, ``row_id``, ``what``), for whom
  (``family_code``, ``person_code``), the values before and after (JSON text)
  and the reason.  A trigger refuses every UPDATE and DELETE of it (SQLite and
  PostgreSQL; on PostgreSQL TRUNCATE too).
* Columns ``removed_at`` / ``removed_by`` / ``removed_reason`` on ``person``
  and ``study``: a removed row is hidden from every reading but kept.

Downgrade keeps the audit trail: the table (with its triggers) is dropped only
when it is empty, and an upgrade adopts a kept table.  Downgrade refuses while
any person or study is removed, because revision 0003 cannot represent a removal
and those rows would silently reappear.
"""

from __future__ import annotations

import sqlalchemy as sa
from alembic import op


revision = "0004"
down_revision = "0003"
branch_labels = None
depends_on = None

_REMOVABLE = ("person", "study")
_REMOVAL_COLUMNS = (
    ("removed_at", sa.DateTime),
    ("removed_by", sa.String(100)),
    ("removed_reason", sa.Text),
)
_MESSAGE = "audit_entry is append-only: rows are never changed or deleted"

_SQLITE_TRIGGERS = [
    f"CREATE TRIGGER IF NOT EXISTS audit_entry_no_{verb.lower()} BEFORE {verb} ON audit_entry "
    f"BEGIN SELECT RAISE(ABORT, '{_MESSAGE}'); END"
    for verb in ("UPDATE", "DELETE")
]
_PG_FUNCTION = f"""
CREATE OR REPLACE FUNCTION audit_entry_refuse() RETURNS trigger AS $$
BEGIN
    RAISE EXCEPTION '{_MESSAGE}';
END;
$$ LANGUAGE plpgsql
"""
_PG_TRIGGERS = [
    "DROP TRIGGER IF EXISTS audit_entry_no_change ON audit_entry",
    "CREATE TRIGGER audit_entry_no_change BEFORE UPDATE OR DELETE ON audit_entry "
    "FOR EACH ROW EXECUTE FUNCTION audit_entry_refuse()",
    "DROP TRIGGER IF EXISTS audit_entry_no_truncate ON audit_entry",
    "CREATE TRIGGER audit_entry_no_truncate BEFORE TRUNCATE ON audit_entry "
    "FOR EACH STATEMENT EXECUTE FUNCTION audit_entry_refuse()",
]


def _has_table(name: str) -> bool:
    return name in sa.inspect(op.get_bind()).get_table_names()


def upgrade() -> None:
    if not _has_table("audit_entry"):
        op.create_table(
            "audit_entry",
            sa.Column("id", sa.Integer, nullable=False),
            sa.Column("at", sa.DateTime, nullable=False),
            sa.Column("actor", sa.String(100), nullable=False),
            sa.Column("action", sa.String(30), nullable=False),
            sa.Column("table_name", sa.String(40), nullable=False),
            sa.Column("row_id", sa.Integer),
            sa.Column("family_code", sa.String(40)),
            sa.Column("person_code", sa.String(40)),
            sa.Column("what", sa.Text, nullable=False),
            sa.Column("before", sa.Text),
            sa.Column("after", sa.Text),
            sa.Column("reason", sa.Text),
            sa.PrimaryKeyConstraint("id", name="pk_audit_entry"),
        )
        op.create_index("ix_audit_entry_person_code", "audit_entry", ["person_code"])
        op.create_index("ix_audit_entry_family_code", "audit_entry", ["family_code"])
        op.create_index("ix_audit_entry_at", "audit_entry", ["at"])
    if op.get_bind().dialect.name == "postgresql":
        op.execute(_PG_FUNCTION)
        for sql in _PG_TRIGGERS:
            op.execute(sql)
    else:
        for sql in _SQLITE_TRIGGERS:
            op.execute(sql)
    for table in _REMOVABLE:
        for name, kind in _REMOVAL_COLUMNS:
            op.add_column(table, sa.Column(name, kind))


def downgrade() -> None:
    bind = op.get_bind()
    for table in _REMOVABLE:
        n = bind.execute(sa.text(f"SELECT count(*) FROM {table} WHERE removed_at IS NOT NULL")).scalar()
        if n:
            raise RuntimeError(
                f"cannot go below schema revision 0004: {n} {table} rows are removed (kept, hidden), "
                "and revision 0003 would show them again; reinstate them first"
            )
    for table in _REMOVABLE:
        for name, _kind in reversed(_REMOVAL_COLUMNS):
            # Plain ALTER TABLE ... DROP COLUMN (SQLite 3.35+ and PostgreSQL): no table rebuild.
            op.execute(f"ALTER TABLE {table} DROP COLUMN {name}")
    if bind.execute(sa.text("SELECT count(*) FROM audit_entry")).scalar():
        return  # the audit trail outlives a downgrade; the next upgrade adopts it
    if bind.dialect.name == "postgresql":
        op.execute("DROP TRIGGER IF EXISTS audit_entry_no_change ON audit_entry")
        op.execute("DROP TRIGGER IF EXISTS audit_entry_no_truncate ON audit_entry")
        op.execute("DROP FUNCTION IF EXISTS audit_entry_refuse()")
    op.drop_index("ix_audit_entry_at", "audit_entry")
    op.drop_index("ix_audit_entry_family_code", "audit_entry")
    op.drop_index("ix_audit_entry_person_code", "audit_entry")
    op.drop_table("audit_entry")
