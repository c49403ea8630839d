"""Record what the rules need as fields: cause and age of death, diagnosis elsewhere, devices, AF.

Revision ID: 0006
Revises: 0005

Adds to table ``person``:

- ``death_cause``: sudden, cardiac_non_sudden, non_cardiac or unknown (CHECK
  constraint); only for a deceased person (checked on entry);
- ``death_age``: whole years at death, for when the date of death (or of
  birth) is unknown or approximate;
- ``diagnosis_age``: whole years at the diagnosis (or onset) of HCM, possibly
  made at another centre, and ``diagnosis_place`` (short free text);
- ``icd_date`` / ``pacemaker_date``: the implantation date of an ICD or a
  pacemaker, known to the day or the year (``*_precision``: day or year, as
  for the dates of birth and death).

Adds to table ``assessment`` ``atrial_fibrillation``: yes, no or empty (not
recorded), as the HCM Risk-SCD answers of revision 0005.

Downgrade: revision 0005 has no place for these values; they are set aside in
tables of their own (``person_record_kept``, ``assessment_af_kept``) that the
next upgrade puts back, so a round trip loses nothing.
"""

from __future__ import annotations

import sqlalchemy as sa
from alembic import op

revision = "0006"
down_revision = "0005"
branch_labels = None
depends_on = None

# (name, SQL type, SQLAlchemy type, CHECK of the column or None).  Frozen here: a migration does not
# import the project's vocabulary.
_PERSON = (
    ("death_cause", "VARCHAR(20)", sa.String(20),
     "death_cause IN ('sudden','cardiac_non_sudden','non_cardiac','unknown')"),
    ("death_age", "INTEGER", sa.Integer, None),
    ("diagnosis_age", "INTEGER", sa.Integer, None),
    ("diagnosis_place", "VARCHAR(200)", sa.String(200), None),
    ("icd_date", "DATE", sa.Date, None),
    ("icd_date_precision", "VARCHAR(4)", sa.String(4), "icd_date_precision IN ('day','year')"),
    ("pacemaker_date", "DATE", sa.Date, None),
    ("pacemaker_date_precision", "VARCHAR(4)", sa.String(4), "pacemaker_date_precision IN ('day','year')"),
)  # fmt: skip
_ASSESSMENT = (("atrial_fibrillation", "BOOLEAN", sa.Boolean, None),)

_KEPT = {"person": "person_record_kept", "assessment": "assessment_af_kept"}
_COLUMNS = {"person": _PERSON, "assessment": _ASSESSMENT}


def _has_table(name: str) -> bool:
    return name in sa.inspect(op.get_bind()).get_table_names()


def upgrade() -> None:
    for table, columns in _COLUMNS.items():
        for name, sql_type, _kind, check in columns:
            # Plain ADD COLUMN with the column's own CHECK (SQLite and PostgreSQL): no table rebuild, and a
            # later DROP COLUMN is allowed because the constraint belongs to the column.
            constraint = f" CONSTRAINT ck_{table}_{name} CHECK ({check})" if check else ""
            op.execute(f"ALTER TABLE {table} ADD COLUMN {name} {sql_type}{constraint}")
        kept = _KEPT[table]
        if _has_table(kept):  # values set aside by an earlier downgrade: put them back
            for name, *_ in columns:
                op.execute(f"UPDATE {table} SET {name} = (SELECT k.{name} FROM {kept} k "
                           f"WHERE k.{table}_id = {table}.id)")  # fmt: skip
            op.drop_table(kept)


def downgrade() -> None:
    """Set the values aside (``person_record_kept``, ``assessment_af_kept``), then drop the columns."""
    bind = op.get_bind()
    for table, columns in _COLUMNS.items():
        names = [c[0] for c in columns]
        recorded = " OR ".join(f"{n} IS NOT NULL" for n in names)
        if bind.execute(sa.text(f"SELECT count(*) FROM {table} WHERE {recorded}")).scalar():
            op.create_table(_KEPT[table], sa.Column(f"{table}_id", sa.Integer, primary_key=True),
                            *(sa.Column(n, kind) for n, _sql, kind, _check in columns))  # fmt: skip
            listed = ", ".join(names)
            op.execute(f"INSERT INTO {_KEPT[table]} ({table}_id, {listed}) SELECT id, {listed} FROM {table} "
                       f"WHERE {recorded}")  # fmt: skip
        for name in reversed(names):
            op.execute(f"ALTER TABLE {table} DROP COLUMN {name}")
