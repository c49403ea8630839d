"""Each person's current recall proposal, kept in the store (the worklist reads it).

Revision ID: 0011
Revises: 0010

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

The upgrade from 0009 leaves the table empty: a person with no row is computed (and stored) by
the first read, so a database upgraded from 0009 gives the same worklist. Downgrade sets the rows
aside in ``recall_proposal_kept`` with the last audit entry's id (``recall_proposal_kept_mark``);
the next upgrade puts them back, marked stale if anything was written in between (the lower
revision does not keep them up to date), so a round trip loses nothing.
"""

from __future__ import annotations

import sqlalchemy as sa
from alembic import op

revision = "0011"
down_revision = "0010"
branch_labels = None
depends_on = None


_KEPT, _MARK = "recall_proposal_kept", "recall_proposal_kept_mark"
_COLUMNS = ("id, person_id, family_id, state, rule_id, interval_months, due_on, as_of, reasons, inputs_version, "
            "computed_at, valid_until, stale, trend_values")


def _last_audit_id(bind) -> int:
    return bind.execute(sa.text("SELECT coalesce(max(id), 0) FROM audit_entry")).scalar()


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
    bind = op.get_bind()
    if _KEPT in sa.inspect(bind).get_table_names():  # set aside by an earlier downgrade
        op.execute(f"INSERT INTO recall_proposal ({_COLUMNS}) SELECT {_COLUMNS} FROM {_KEPT}")
        mark = bind.execute(sa.text(f"SELECT audit_id FROM {_MARK}")).scalar()
        if mark != _last_audit_id(bind):  # written at the lower revision: recomputed by the next read
            op.execute("UPDATE recall_proposal SET stale = true")
        op.drop_table(_KEPT)
        op.drop_table(_MARK)


def downgrade() -> None:
    """Set the rows aside (``recall_proposal_kept``, with the last audit id), then drop the table."""
    bind = op.get_bind()
    if bind.execute(sa.text("SELECT count(*) FROM recall_proposal")).scalar():
        op.execute(f"CREATE TABLE {_KEPT} AS SELECT {_COLUMNS} FROM recall_proposal")
        op.create_table(_MARK, sa.Column("audit_id", sa.Integer))
        op.execute(sa.text(f"INSERT INTO {_MARK} (audit_id) VALUES ({int(_last_audit_id(bind))})"))
    op.drop_index("ix_recall_proposal_valid_until", table_name="recall_proposal")
    op.drop_index("ix_recall_proposal_family_id", table_name="recall_proposal")
    op.drop_index("ix_recall_proposal_due_on", table_name="recall_proposal")
    op.drop_table("recall_proposal")
