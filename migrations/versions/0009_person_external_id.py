"""An external identifier per person (e.g. the hospital number), to match imported reports.

Revision ID: 0009
Revises: 0008

Adds to table ``person`` the nullable column ``external_id`` (at most 64 characters), unique
among the people who have one (unique index ``ix_person_external_id``). It is private like the
names: never printed in messages, left out of pseudonymised extracts.

Downgrade: the lower revision has no place for the identifiers; they are set aside in the
table ``person_external_id_kept`` that the next upgrade puts back, so a round trip loses nothing.
"""

from __future__ import annotations

import sqlalchemy as sa
from alembic import op

revision = "0009"
down_revision = "0008"
branch_labels = None
depends_on = None

_KEPT = "person_external_id_kept"


def upgrade() -> None:
    op.execute("ALTER TABLE person ADD COLUMN external_id VARCHAR(64)")
    if _KEPT in sa.inspect(op.get_bind()).get_table_names():  # set aside by an earlier downgrade
        op.execute(f"UPDATE person SET external_id = (SELECT k.external_id FROM {_KEPT} k "
                   "WHERE k.person_id = person.id)")  # fmt: skip
        op.drop_table(_KEPT)
    op.execute("CREATE UNIQUE INDEX ix_person_external_id ON person (external_id)")


def downgrade() -> None:
    """Set the identifiers aside (``person_external_id_kept``), then drop the column."""
    bind = op.get_bind()
    if bind.execute(sa.text("SELECT count(*) FROM person WHERE external_id IS NOT NULL")).scalar():
        op.create_table(_KEPT, sa.Column("person_id", sa.Integer, primary_key=True),
                        sa.Column("external_id", sa.String(64)))  # fmt: skip
        op.execute(f"INSERT INTO {_KEPT} (person_id, external_id) SELECT id, external_id FROM person "
                   "WHERE external_id IS NOT NULL")  # fmt: skip
    op.execute("DROP INDEX ix_person_external_id")
    op.execute("ALTER TABLE person DROP COLUMN external_id")
