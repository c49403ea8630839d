"""Let the reclassification to-do list hold four more consequence codes.

Revision ID: 0008
Revises: 0007

The stepwise cascade and the counselling rules name four consequences that the
``impact_item.change`` check of revision 0003 did not allow:

- ``predictive_testing_deferred``: a relative waits until the at-risk relative
  one step nearer the carrier has been offered the test;
- ``offer_diagnostic_testing``: an affected, untested relative is offered a
  diagnostic test (not a predictive one);
- ``declined_not_reapproached``: a relative who declined is not approached
  again under the clinic's policy;
- ``no_longer_at_risk``: after an upgrade, a relative screened only while the
  variant's meaning was unknown is not at risk by pedigree.

Before this revision such an item was stored under the nearest allowed code
with the precise code at the start of ``what_changes`` (``[code] text``).  The
upgrade moves those rows to their precise code and drops the prefix; the
downgrade does the reverse, so no item and no word of one is lost either way.
"""

from __future__ import annotations

import sqlalchemy as sa
from alembic import op

revision = "0008"
down_revision = "0007"
branch_labels = None
depends_on = None

# Frozen copies of the allowed codes (a migration never imports project code).
_OLD = (
    "recounsel_family", "return_to_surveillance", "keep_in_surveillance", "loses_genotype_positive",
    "testing_withdrawn", "exclusion_lifted", "offer_predictive_testing", "result_reinterpreted_positive",
    "result_reinterpreted_negative", "obligate_carrier", "unscheduled_review",
)  # fmt: skip
# New code -> the allowed code it was stored under before this revision.
_NEW = {
    "predictive_testing_deferred": "offer_predictive_testing",
    "offer_diagnostic_testing": "offer_predictive_testing",
    "declined_not_reapproached": "offer_predictive_testing",
    "no_longer_at_risk": "result_reinterpreted_negative",
}

items = sa.table(
    "impact_item", sa.column("id", sa.Integer), sa.column("change", sa.String), sa.column("what_changes", sa.Text)
)


def _check(codes) -> str:
    return "change IN (" + ",".join(f"'{c}'" for c in codes) + ")"


def _swap_check(codes) -> None:
    with op.batch_alter_table("impact_item") as batch:
        batch.drop_constraint("ck_impact_item_change", type_="check")
        batch.create_check_constraint("ck_impact_item_change", _check(codes))


def upgrade() -> None:
    _swap_check(_OLD + tuple(_NEW))
    conn = op.get_bind()
    for new, old in _NEW.items():
        prefix = f"[{new}] "
        rows = conn.execute(
            sa.select(items.c.id, items.c.what_changes).where(items.c.change == old)
        ).all()  # fmt: skip
        for iid, what in rows:
            if what and what.startswith(prefix):
                conn.execute(
                    items.update().where(items.c.id == iid).values(change=new, what_changes=what[len(prefix):])
                )


def downgrade() -> None:
    conn = op.get_bind()
    for new, old in _NEW.items():
        rows = conn.execute(sa.select(items.c.id, items.c.what_changes).where(items.c.change == new)).all()
        for iid, what in rows:
            conn.execute(items.update().where(items.c.id == iid).values(change=old, what_changes=f"[{new}] {what}"))
    _swap_check(_OLD)
