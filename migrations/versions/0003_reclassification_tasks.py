"""Add the reclassification to-do list: one row per consequence of a variant reclassification.

Revision ID: 0003
Revises: 0002

Adds table ``impact_item``.  Each row belongs to the classification row that
caused it (``variant_classification_id``); ``person_id`` is empty for an item
about the whole family.  ``change`` is a short code naming what changes
(``return_to_surveillance``, ``offer_predictive_testing``, ...),
``what_changes`` / ``action`` / ``source`` are the words shown to the nurse.
An item is open until ``done_on`` is set; items are never deleted, and
``done_on`` and ``done_by`` are set together.
"""

from __future__ import annotations

import sqlalchemy as sa
from alembic import op

revision = "0003"
down_revision = "0002"
branch_labels = None
depends_on = None

# Frozen copy of the change codes known when this revision was written.
_CHANGE = (
    "change IN ('recounsel_family','return_to_surveillance','keep_in_surveillance',"
    "'loses_genotype_positive','testing_withdrawn','exclusion_lifted','offer_predictive_testing',"
    "'result_reinterpreted_positive','result_reinterpreted_negative','obligate_carrier',"
    "'unscheduled_review')"
)
_DONE = "(done_on IS NULL AND done_by IS NULL) OR (done_on IS NOT NULL AND done_by IS NOT NULL)"


def upgrade() -> None:
    op.create_table(
        "impact_item",
        sa.Column("id", sa.Integer, nullable=False),
        sa.Column("variant_classification_id", sa.Integer, nullable=False),
        sa.Column("person_id", sa.Integer),
        sa.Column("change", sa.String(40), nullable=False),
        sa.Column("what_changes", sa.Text, nullable=False),
        sa.Column("action", sa.Text, nullable=False),
        sa.Column("source", sa.Text, nullable=False),
        sa.Column("status_before", sa.String(20)),
        sa.Column("status_after", sa.String(20)),
        sa.Column("created_at", sa.DateTime, nullable=False),
        sa.Column("created_by", sa.String(100), nullable=False),
        sa.Column("done_on", sa.Date),
        sa.Column("done_by", sa.String(100)),
        sa.Column("done_note", sa.Text),
        sa.PrimaryKeyConstraint("id", name="pk_impact_item"),
        sa.ForeignKeyConstraint(
            ["variant_classification_id"],
            ["variant_classification.id"],
            name="fk_impact_item_variant_classification_id_variant_classification",
        ),
        sa.ForeignKeyConstraint(["person_id"], ["person.id"], name="fk_impact_item_person_id_person"),
        sa.CheckConstraint(_CHANGE, name="ck_impact_item_change"),
        sa.CheckConstraint(_DONE, name="ck_impact_item_done_together"),
    )
    op.create_index("ix_impact_item_variant_classification_id", "impact_item", ["variant_classification_id"])
    op.create_index("ix_impact_item_person_id", "impact_item", ["person_id"])


def downgrade() -> None:
    op.drop_index("ix_impact_item_person_id", "impact_item")
    op.drop_index("ix_impact_item_variant_classification_id", "impact_item")
    op.drop_table("impact_item")
