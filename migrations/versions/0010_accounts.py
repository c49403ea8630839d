"""Accounts and sign-in sessions of the web interface.

Revision ID: 0010
Revises: 0009

Adds two tables:

- ``account``: one row per person who signs in to the web interface: a unique
  ``name``, a ``role`` (nurse, cardiologist, counsellor, admin; a CHECK holds
  the list), the argon2 hash of the password (never the password), whether the
  account is ``disabled``, whether the next sign-in must set a new password
  (``must_change_password``: after a one-time password), when and by whom it was
  created, and the count and time of failed sign-ins since the last success.
- ``web_session``: one row per sign-in: the SHA-256 of the session token (the
  token itself is only in the browser's cookie), the account, when it began,
  when it was last used and when (and why) it ended.

Downgrade: when there are no accounts, both tables are dropped.  When there are
accounts, both tables are kept as they are (nothing reads them at the lower
revision) and the next upgrade uses them again, so no account and no record of
a sign-in is lost.
"""

from __future__ import annotations

import sqlalchemy as sa
from alembic import op

revision = "0010"
down_revision = "0009"
branch_labels = None
depends_on = None

# Frozen copy of the roles (a migration never imports project code).
_ROLES = ("nurse", "cardiologist", "counsellor", "admin")


def upgrade() -> None:
    bind = op.get_bind()
    if "account" in sa.inspect(bind).get_table_names():  # kept by an earlier downgrade, with web_session
        return
    op.create_table(
        "account",
        sa.Column("id", sa.Integer, primary_key=True),
        sa.Column("name", sa.String(100), nullable=False),
        sa.Column("role", sa.String(20), nullable=False),
        sa.Column("password_hash", sa.String(200), nullable=False),
        sa.Column("disabled", sa.Boolean(create_constraint=False), nullable=False),
        sa.Column("must_change_password", sa.Boolean(create_constraint=False), nullable=False),
        sa.Column("created_at", sa.DateTime, nullable=False),
        sa.Column("created_by", sa.String(100), nullable=False),
        sa.Column("failed_count", sa.Integer, nullable=False),
        sa.Column("last_failed_at", sa.DateTime, nullable=True),
        sa.PrimaryKeyConstraint("id", name="pk_account"),
        sa.UniqueConstraint("name", name="uq_account_name"),
        sa.CheckConstraint("role IN (" + ",".join(f"'{r}'" for r in _ROLES) + ")", name="ck_account_role"),
    )
    op.create_table(
        "web_session",
        sa.Column("id", sa.Integer, primary_key=True),
        sa.Column("token_sha256", sa.String(64), nullable=False),
        sa.Column("account_id", sa.Integer, nullable=False),
        sa.Column("created_at", sa.DateTime, nullable=False),
        sa.Column("last_seen_at", sa.DateTime, nullable=False),
        sa.Column("ended_at", sa.DateTime, nullable=True),
        sa.Column("end_reason", sa.String(20), nullable=True),
        sa.PrimaryKeyConstraint("id", name="pk_web_session"),
        sa.UniqueConstraint("token_sha256", name="uq_web_session_token_sha256"),
        sa.ForeignKeyConstraint(["account_id"], ["account.id"], name="fk_web_session_account_id_account"),
    )
    op.create_index("ix_web_session_account_id", "web_session", ["account_id"])


def downgrade() -> None:
    """Drop both tables when there are no accounts; else keep them for the next upgrade (see above)."""
    if op.get_bind().execute(sa.text("SELECT count(*) FROM account")).scalar():
        return
    op.drop_index("ix_web_session_account_id", table_name="web_session")
    op.drop_table("web_session")
    op.drop_table("account")
