"""The stored recall proposal's fields that choose and order the nurse's day list and the cohort page's flagged families, as columns.

Revision ID: 0013
Revises: 0012

The day list (``/day``) shows the most urgent rows of the worklist. To read those rows, and
count the rest, with one indexed query instead of decoding every stored proposal, the fields
that decide whether a row is listed, in which part of the list and in what order are kept as
columns of ``recall_proposal`` beside the whole proposal (``reasons``, unchanged):

* ``person_code`` (the person's code, the last key of the order), ``urgency_flags`` (the order
  after the due date: 0 never screened with a trigger fired, 1 never screened, 2 a trigger, 3
  neither);
* ``flagged``: the proposal carries a trend flag (progression, a projected crossing, criteria not
  assessable) or the person is affected; the cohort page lists their family first;
* ``affected`` (phenotype positive: the affected follow-up list), ``never_screened``,
  ``triggered`` (a trigger fired: review now), ``progression``;
* where the person stands with contact, as the proposal holds it: ``contact_status``,
  ``contact_wish``, ``contact_later_on``, ``informed_on``, ``responded``.

Indexes: one holding the state, the due date, the urgency flags, the person code and the columns
the list chooses by (for each state, the day list's rows in its order, so a page stops after its
rows, and its counts, read from the index alone), one of the unanswered (state, responded, day
informed: the "informed, no response" part in its order), one of the wish (the few who asked for
no further contact), family and ``flagged`` (the cohort page's
flagged families, one lookup per family), and the stale rows and the people removed (partial
indexes), ``as_of`` and ``inputs_version`` (the check that every stored row holds for a day, by
index lookups).

The upgrade adds the columns empty and marks every row stale, so the next read or ``tracker recall
--refresh`` recomputes and fills them (the rows are derived data; nothing else changes).
Downgrade sets the columns aside in ``recall_proposal_lists_kept`` (with the last audit entry's id)
and drops them; the rows stay and hold as before. The next upgrade puts them back, marked stale if
anything was written in between, so a round trip loses nothing.
"""

from __future__ import annotations

import sqlalchemy as sa
from alembic import op

revision = "0013"
down_revision = "0012"
branch_labels = None
depends_on = None

_COLUMNS = (
    ("person_code", sa.String(40)),
    ("urgency_flags", sa.Integer),
    ("flagged", sa.Boolean),
    ("affected", sa.Boolean),
    ("never_screened", sa.Boolean),
    ("triggered", sa.Boolean),
    ("progression", sa.Boolean),
    ("contact_status", sa.String(30)),
    ("contact_wish", sa.String(30)),
    ("contact_later_on", sa.Date),
    ("informed_on", sa.Date),
    ("responded", sa.Boolean),
)


# The day list reads its rows in due-date order and counts them from one index holding every column
# it chooses by; the check that every stored row holds (tracker.services.proposals.all_hold) is a
# handful of index lookups.
_INDEXES = (
    ("ix_recall_proposal_day_list", "recall_proposal",
     ("state", "due_on", "urgency_flags", "person_code", "contact_wish", "contact_status", "contact_later_on",
      "affected", "never_screened", "triggered", "informed_on", "responded")),
    ("ix_recall_proposal_no_response", "recall_proposal",
     ("state", "responded", "informed_on", "due_on", "urgency_flags", "person_code", "contact_status", "contact_wish",
      "contact_later_on", "affected", "never_screened", "triggered")),
    ("ix_recall_proposal_contact_wish", "recall_proposal", ("contact_wish", "state")),
    ("ix_recall_proposal_family_flagged", "recall_proposal", ("family_id", "flagged")),
    ("ix_recall_proposal_as_of", "recall_proposal", ("as_of",)),
    ("ix_recall_proposal_inputs_version", "recall_proposal", ("inputs_version",)),
)
# Removed people only, and (below) stale rows only: partial indexes, so that reads of the living and of
# current rows never choose them.
_REMOVED = ("ix_person_removed", "person", ["id"], "removed_at IS NOT NULL")
_KEPT, _MARK = "recall_proposal_lists_kept", "recall_proposal_lists_kept_mark"
_NAMES = ", ".join(name for name, _kind in _COLUMNS)


def _last_audit_id(bind) -> int:
    return bind.execute(sa.text("SELECT coalesce(max(id), 0) FROM audit_entry")).scalar()


def upgrade() -> None:
    with op.batch_alter_table("recall_proposal") as batch:
        for name, kind in _COLUMNS:
            batch.add_column(sa.Column(name, kind, nullable=True))
    for name, table, columns in _INDEXES:
        op.create_index(name, table, list(columns))
    name, table, columns, where = _REMOVED
    op.create_index(name, table, columns, sqlite_where=sa.text(where), postgresql_where=sa.text(where))
    op.create_index("ix_recall_proposal_stale", "recall_proposal", ["id"], sqlite_where=sa.text("stale IS 1"),
                    postgresql_where=sa.text("stale IS true"))  # stale rows only  # fmt: skip
    bind = op.get_bind()
    if _KEPT in sa.inspect(bind).get_table_names():  # set aside by an earlier downgrade: put back
        for name, _kind in _COLUMNS:
            op.execute(f"UPDATE recall_proposal SET {name} = (SELECT k.{name} FROM {_KEPT} k "
                       f"WHERE k.person_id = recall_proposal.person_id)")  # fmt: skip
        mark = bind.execute(sa.text(f"SELECT audit_id FROM {_MARK}")).scalar()
        op.execute(f"UPDATE recall_proposal SET stale = (SELECT k.stale FROM {_KEPT} k "
                   f"WHERE k.person_id = recall_proposal.person_id) "
                   f"WHERE person_id IN (SELECT person_id FROM {_KEPT})")  # fmt: skip
        if mark != _last_audit_id(bind):  # written at the lower revision: recomputed by the next read
            op.execute("UPDATE recall_proposal SET stale = true")
        op.execute(f"UPDATE recall_proposal SET stale = true WHERE person_id NOT IN (SELECT person_id FROM {_KEPT})")
        op.drop_table(_KEPT)
        op.drop_table(_MARK)
    else:  # the columns are empty: every row is recomputed (and filled) by the next read
        op.execute("UPDATE recall_proposal SET stale = true")


def downgrade() -> None:
    """Set the columns aside (``recall_proposal_lists_kept``, with the last audit id), then drop them."""
    bind = op.get_bind()
    if bind.execute(sa.text("SELECT count(*) FROM recall_proposal")).scalar():
        op.execute(f"CREATE TABLE {_KEPT} AS SELECT person_id, stale, {_NAMES} FROM recall_proposal")
        op.create_table(_MARK, sa.Column("audit_id", sa.Integer))
        op.execute(sa.text(f"INSERT INTO {_MARK} (audit_id) VALUES ({int(_last_audit_id(bind))})"))
    op.drop_index("ix_recall_proposal_stale", table_name="recall_proposal")
    op.drop_index(_REMOVED[0], table_name=_REMOVED[1])
    for name, table, _columns in reversed(_INDEXES):
        op.drop_index(name, table_name=table)
    with op.batch_alter_table("recall_proposal") as batch:
        for name, _kind in reversed(_COLUMNS):
            batch.drop_column(name)
