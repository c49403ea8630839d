"""Each person's current recall proposal, kept in the store (the worklist reads it).

Revision ID: 0011
Revises: 0009

Adds the table ``recall_proposal``: one row per person (unique ``person_id``), written in the
same transaction as every write that can change it (import, edit, removal and reinstatement,
reclassification, a task marked done) and by ``tracker recall --refresh``. The rows are derived
data: they can always be recomputed from the records, so the table holds no history and is not
audited. Columns: the person and their family, the proposal's state (``due``, ``overdue``,
``released``, ``not_recalled``, ``not_scheduled``), the governing rule id, the interval in
months, the due date, the whole proposal as JSON text (``reasons``: fired rules, flags, notes,
needs, cautions), the date it is computed for (``as_of``), the inputs' version (a hash of the
rule set, the settings and the family's records), when it was computed (``computed_at``, UTC),
the last day it holds (``valid_until``), a ``stale`` flag, and whether the family had measured
values to trend (``trend_values``).

Indexes for the worklist's query: due date (``ix_recall_proposal_due_on``), family
(``ix_recall_proposal_family_id``), last valid day (``ix_recall_proposal_valid_until``).

The upgrade leaves the table empty: a person with no row is computed (and stored) by the first
read, so a database upgraded from 0009 gives the same worklist. Downgrade drops the table:
nothing is lost, every row is recomputed from the records after the next upgrade.
"""

from __future__ import annotations

import sqlalchemy as sa
from alembic import op

revision = "0011"
down_revision = "0009"
branch_labels = None
depends_on = None


def upgrade() -> None:
    op.create_table(
        "recall_proposal",
        sa.Column("id", sa.Integer, primary_key=True),
        sa.Column("person_id", sa.Integer, sa.ForeignKey("person.id", name="fk_recall_proposal_person_id_person"),
                  nullable=False),
        sa.Column("family_id", sa.Integer, sa.ForeignKey("family.id", name="fk_recall_proposal_family_id_family"),
                  nullable=False),
        sa.Column("state", sa.String(20), nullable=False),
        sa.Column("rule_id", sa.String(80)),
        sa.Column("interval_months", sa.Integer),
        sa.Column("due_on", sa.Date),
        sa.Column("as_of", sa.Date, nullable=False),
        sa.Column("reasons", sa.Text, nullable=False),
        sa.Column("inputs_version", sa.String(80), nullable=False),
        sa.Column("computed_at", sa.DateTime, nullable=False),
        sa.Column("valid_until", sa.Date, nullable=False),
        sa.Column("stale", sa.Boolean, nullable=False),
        sa.Column("trend_values", sa.Boolean, nullable=False),
        sa.CheckConstraint("state IN ('due','overdue','released','not_recalled','not_scheduled')",
                           name="ck_recall_proposal_state"),
        sa.PrimaryKeyConstraint("id", name="pk_recall_proposal"),
        sa.UniqueConstraint("person_id", name="uq_recall_proposal_person_id"),
    )  # fmt: skip
    op.create_index("ix_recall_proposal_due_on", "recall_proposal", ["due_on"])
    op.create_index("ix_recall_proposal_family_id", "recall_proposal", ["family_id"])
    op.create_index("ix_recall_proposal_valid_until", "recall_proposal", ["valid_until"])


def downgrade() -> None:
    """Drop the table: its rows are derived from the records and recomputed after an upgrade."""
    op.drop_index("ix_recall_proposal_valid_until", table_name="recall_proposal")
    op.drop_index("ix_recall_proposal_family_id", table_name="recall_proposal")
    op.drop_index("ix_recall_proposal_due_on", table_name="recall_proposal")
    op.drop_table("recall_proposal")
