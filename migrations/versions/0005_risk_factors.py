"""Record the clinical risk factors of an assessment, and the Valsalva LVOT gradient.

Revision ID: 0005
Revises: 0004

Adds to table ``assessment`` five answers that HCM Risk-SCD (O'Mahony et al.,
Eur Heart J 2014) needs and the store could not hold before; each is yes, no,
or empty (not recorded), and an empty answer means no risk figure is computed:

- ``family_history_scd``: sudden cardiac death in the family, as the guideline
  in use defines it;
- ``nsvt``: non-sustained ventricular tachycardia on ambulatory monitoring;
- ``unexplained_syncope``;
- ``prior_arrest_or_sustained_vt``: previous cardiac arrest or sustained VT
  (the model does not apply);
- ``metabolic_or_syndromic``: metabolic or infiltrative disease or a syndrome
  (the model does not apply).

Adds to table ``measure`` the code ``lvot_valsalva`` (peak instantaneous LVOT
gradient during the Valsalva manoeuvre, mmHg): the model's provoked input is the
Valsalva gradient; the older code ``lvot_provoked`` does not say how the
gradient was provoked and is kept as it is.
"""

from __future__ import annotations

import sqlalchemy as sa
from alembic import op

revision = "0005"
down_revision = "0004"
branch_labels = None
depends_on = None

ANSWERS = ("family_history_scd", "nsvt", "unexplained_syncope", "prior_arrest_or_sustained_vt",
           "metabolic_or_syndromic")  # fmt: skip

measure = sa.table(
    "measure",
    sa.column("code", sa.String),
    sa.column("label", sa.String),
    sa.column("modality", sa.String),
    sa.column("unit", sa.String),
    sa.column("plausible_min", sa.Float),
    sa.column("plausible_max", sa.Float),
    sa.column("range_source", sa.String),
    sa.column("derived", sa.Boolean),
    sa.column("loinc", sa.String),
)

# Same data-entry limits as lvot_rest and lvot_provoked in revision 0001.
_VALSALVA = {
    "code": "lvot_valsalva",
    "label": "LVOT peak instantaneous gradient during Valsalva",
    "modality": "echo",
    "unit": "mmHg",
    "plausible_min": 0.0,
    "plausible_max": 250.0,
    "range_source": "engineering default for data entry (common practice, from memory, verify)",
    "derived": False,
    "loinc": None,
}


_KEPT = "assessment_risk_kept"


def _has_table(name: str) -> bool:
    return name in sa.inspect(op.get_bind()).get_table_names()


def upgrade() -> None:
    for name in ANSWERS:
        op.add_column("assessment", sa.Column(name, sa.Boolean))
    if _has_table(_KEPT):  # answers set aside by an earlier downgrade: put them back
        for name in ANSWERS:
            op.execute(f"UPDATE assessment SET {name} = (SELECT k.{name} FROM {_KEPT} k "
                       f"WHERE k.assessment_id = assessment.id)")  # fmt: skip
        op.drop_table(_KEPT)
    bind = op.get_bind()
    if not bind.execute(sa.text("SELECT count(*) FROM measure WHERE code = 'lvot_valsalva'")).scalar():
        op.bulk_insert(measure, [_VALSALVA])


def downgrade() -> None:
    """Revision 0004 has no place for the answers: they are set aside in a table of their own
    (``assessment_risk_kept``) that the next upgrade puts back, so a round trip loses nothing.
    The catalogue row ``lvot_valsalva`` stays while values use it."""
    bind = op.get_bind()
    recorded = " OR ".join(f"{a} IS NOT NULL" for a in ANSWERS)
    if bind.execute(sa.text(f"SELECT count(*) FROM assessment WHERE {recorded}")).scalar():
        op.create_table(_KEPT, sa.Column("assessment_id", sa.Integer, primary_key=True),
                        *(sa.Column(a, sa.Boolean) for a in ANSWERS))  # fmt: skip
        names = ", ".join(ANSWERS)
        op.execute(f"INSERT INTO {_KEPT} (assessment_id, {names}) SELECT id, {names} FROM assessment "
                   f"WHERE {recorded}")  # fmt: skip
    for name in reversed(ANSWERS):
        op.execute(f"ALTER TABLE assessment DROP COLUMN {name}")
    if not bind.execute(sa.text("SELECT count(*) FROM measurement WHERE measure_code = 'lvot_valsalva'")).scalar():
        op.execute("DELETE FROM measure WHERE code = 'lvot_valsalva'")
