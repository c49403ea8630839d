"""The contact log: contacts, wishes, letters sent, results from other centres, bookings, discharges.

Revision ID: 0012
Revises: 0011

New tables (see docs/contacts-and-letters.md):

* ``contact_event``: one attempt or contact with a relative (date, channel, by whom or through
  which family member, outcome, a later date for "contact me later"), never updated: a correction
  is a newer event.  ``source`` says where it came from: ``entered``, ``migrated`` (the single
  status of the lower revision) or ``imported`` (a people file's contact_status column).
* ``contact_wish``: a relative's wish about contact (no further contact; only through a named
  family member); ended, never deleted.
* ``letter_sent``: a letter the user confirmed as sent (kind, template and its version, to the
  person or through a family member, the reply date).
* ``external_result``: a genetic test or a screening done at another centre.
* ``booking``: a visit the nurse booked (cancelled, never deleted).
* ``discharge``: a variant-negative relative discharged from screening, with the variant class
  the discharge relied on and the advice given.

The single status of the lower revision (``person.contact_status`` and ``contact_status_date``)
moves into the log: each person with a status or a date gets one ``migrated`` event with the same
words (``contactable`` -> outcome ``informed``; ``not_contacted``, ``declined`` and
``lost_to_follow_up`` keep their word; a date without a status is an event with no outcome),
dated with the status date (no date when there was none), channel ``other``, and a note saying it
was migrated.  The two columns stay in the table, empty: the log is the one place the status is
kept.

Downgrade: the lower revision reads the single status; it is filled from the log (the newest
event, in the lower revision's words), and the new tables are kept under the names ``*_kept``
(the next upgrade puts them back, and logs a status changed at the lower revision as a migrated
event), so a round trip loses nothing.
"""

from __future__ import annotations

import datetime as dt

import sqlalchemy as sa
from alembic import op

revision = "0012"
down_revision = "0011"
branch_labels = None
depends_on = None

_CHANNELS = "('letter','phone','in_clinic','via_family','other')"
_ROLES = "('nurse','counsellor','cardiologist','other')"
_OUTCOMES = ("('informed','no_answer','wrong_address','declined','contact_later','moved_away',"
             "'not_contacted','lost_to_follow_up')")  # fmt: skip
_SOURCES = "('entered','migrated','imported')"
_GENOTYPE = "('carrier','non_carrier','inconclusive','no_variant_found')"
_PHENOTYPE = "('affected','unaffected','uncertain')"
_ACMG = "('pathogenic','likely_pathogenic','uncertain_significance','likely_benign','benign')"

TABLES = ("contact_event", "contact_wish", "letter_sent", "external_result", "booking", "discharge")
MIGRATED_NOTE = "migrated from the single contact status (revision 0012)"


def _kept(table: str) -> str:
    return f"{table}_kept"


def _entered() -> list[sa.Column]:
    return [sa.Column("entered_at", sa.DateTime, nullable=False),
            sa.Column("entered_by", sa.String(100), nullable=False)]  # fmt: skip


def _person(table: str, column: str = "person_id", nullable: bool = False) -> sa.ForeignKeyConstraint:
    return sa.ForeignKeyConstraint([column], ["person.id"], name=f"fk_{table}_{column}_person")


def _create(present: set[str]) -> None:
    """Create the new tables that are not ``present`` (put back from ``*_kept``)."""
    if "contact_event" not in present:
      op.create_table(
        "contact_event",
        sa.Column("id", sa.Integer, nullable=False),
        sa.Column("person_id", sa.Integer, nullable=False),
        sa.Column("event_date", sa.Date),
        sa.Column("channel", sa.String(12), nullable=False),
        sa.Column("by_role", sa.String(14)),
        sa.Column("via_person_id", sa.Integer),
        sa.Column("outcome", sa.String(20)),
        sa.Column("later_date", sa.Date),
        sa.Column("notes", sa.Text),
        sa.Column("source", sa.String(10), nullable=False),
        *_entered(),
        sa.PrimaryKeyConstraint("id", name="pk_contact_event"),
        _person("contact_event"),
        _person("contact_event", "via_person_id"),
        sa.CheckConstraint(f"channel IN {_CHANNELS}", name="ck_contact_event_channel"),
        sa.CheckConstraint(f"by_role IN {_ROLES}", name="ck_contact_event_by_role"),
        sa.CheckConstraint(f"outcome IN {_OUTCOMES}", name="ck_contact_event_outcome"),
        sa.CheckConstraint(f"source IN {_SOURCES}", name="ck_contact_event_source"),
        # Entered events are dated and have an outcome; only a migrated or imported status may lack them.
        sa.CheckConstraint("source <> 'entered' OR (event_date IS NOT NULL AND outcome IS NOT NULL)",
                           name="ck_contact_event_entered_complete"),  # fmt: skip
        sa.CheckConstraint("(outcome = 'contact_later' AND later_date IS NOT NULL) OR "
                           "(outcome IS NULL OR outcome <> 'contact_later') AND later_date IS NULL",
                           name="ck_contact_event_later_date"),  # fmt: skip
        sa.CheckConstraint("(channel = 'via_family' AND via_person_id IS NOT NULL AND by_role IS NULL) OR "
                           "(channel <> 'via_family' AND via_person_id IS NULL)",
                           name="ck_contact_event_via"),  # fmt: skip
    )
      op.create_index("ix_contact_event_person_id", "contact_event", ["person_id"])
    if "contact_wish" not in present:
      op.create_table(
        "contact_wish",
        sa.Column("id", sa.Integer, nullable=False),
        sa.Column("person_id", sa.Integer, nullable=False),
        sa.Column("wish", sa.String(30), nullable=False),
        sa.Column("via_person_id", sa.Integer),
        sa.Column("recorded_date", sa.Date, nullable=False),
        sa.Column("notes", sa.Text),
        sa.Column("ended_date", sa.Date),
        sa.Column("ended_by", sa.String(100)),
        *_entered(),
        sa.PrimaryKeyConstraint("id", name="pk_contact_wish"),
        _person("contact_wish"),
        _person("contact_wish", "via_person_id"),
        sa.CheckConstraint("wish IN ('no_further_contact','only_via_family_member')", name="ck_contact_wish_wish"),
        sa.CheckConstraint("(wish = 'only_via_family_member' AND via_person_id IS NOT NULL) OR "
                           "(wish <> 'only_via_family_member' AND via_person_id IS NULL)",
                           name="ck_contact_wish_via"),  # fmt: skip
        sa.CheckConstraint("(ended_date IS NULL AND ended_by IS NULL) OR "
                           "(ended_date IS NOT NULL AND ended_by IS NOT NULL)", name="ck_contact_wish_ended"),
    )
      op.create_index("ix_contact_wish_person_id", "contact_wish", ["person_id"])
    if "letter_sent" not in present:
      op.create_table(
        "letter_sent",
        sa.Column("id", sa.Integer, nullable=False),
        sa.Column("person_id", sa.Integer, nullable=False),
        sa.Column("kind", sa.String(20), nullable=False),
        sa.Column("template", sa.String(100), nullable=False),
        sa.Column("template_version", sa.String(40), nullable=False),
        sa.Column("sent_date", sa.Date, nullable=False),
        sa.Column("sent_to", sa.String(10), nullable=False),
        sa.Column("via_person_id", sa.Integer),
        sa.Column("reply_date", sa.Date),
        sa.Column("notes", sa.Text),
        *_entered(),
        sa.PrimaryKeyConstraint("id", name="pk_letter_sent"),
        _person("letter_sent"),
        _person("letter_sent", "via_person_id"),
        sa.CheckConstraint("kind IN ('first_contact','reminder','result','reclassification','discharge',"
                           "'appointment')", name="ck_letter_sent_kind"),  # fmt: skip
        sa.CheckConstraint("sent_to IN ('person','via_family')", name="ck_letter_sent_sent_to"),
        sa.CheckConstraint("(sent_to = 'via_family' AND via_person_id IS NOT NULL) OR "
                           "(sent_to = 'person' AND via_person_id IS NULL)", name="ck_letter_sent_via"),
    )
      op.create_index("ix_letter_sent_person_id", "letter_sent", ["person_id"])
    if "external_result" not in present:
      op.create_table(
        "external_result",
        sa.Column("id", sa.Integer, nullable=False),
        sa.Column("person_id", sa.Integer, nullable=False),
        sa.Column("kind", sa.String(12), nullable=False),
        sa.Column("result_date", sa.Date, nullable=False),
        sa.Column("centre", sa.String(200), nullable=False),
        sa.Column("variant_id", sa.Integer),
        sa.Column("result", sa.String(20), nullable=False),
        sa.Column("document_ref", sa.String(200)),
        sa.Column("notes", sa.Text),
        *_entered(),
        sa.PrimaryKeyConstraint("id", name="pk_external_result"),
        _person("external_result"),
        sa.ForeignKeyConstraint(["variant_id"], ["variant.id"], name="fk_external_result_variant_id_variant"),
        sa.UniqueConstraint("person_id", "kind", "result_date", name="uq_external_result_person_id"),
        sa.CheckConstraint("kind IN ('genetic_test','screening')", name="ck_external_result_kind"),
        sa.CheckConstraint(f"(kind = 'genetic_test' AND result IN {_GENOTYPE}) OR "
                           f"(kind = 'screening' AND result IN {_PHENOTYPE} AND variant_id IS NULL)",
                           name="ck_external_result_result"),  # fmt: skip
    )
    if "booking" not in present:
      op.create_table(
        "booking",
        sa.Column("id", sa.Integer, nullable=False),
        sa.Column("person_id", sa.Integer, nullable=False),
        sa.Column("visit_date", sa.Date, nullable=False),
        sa.Column("purpose", sa.String(200), nullable=False),
        sa.Column("notes", sa.Text),
        *_entered(),
        sa.Column("cancelled_date", sa.Date),
        sa.Column("cancelled_by", sa.String(100)),
        sa.PrimaryKeyConstraint("id", name="pk_booking"),
        _person("booking"),
        sa.CheckConstraint("(cancelled_date IS NULL AND cancelled_by IS NULL) OR "
                           "(cancelled_date IS NOT NULL AND cancelled_by IS NOT NULL)", name="ck_booking_cancelled"),
    )
      op.create_index("ix_booking_person_id", "booking", ["person_id"])
    if "discharge" not in present:
      op.create_table(
        "discharge",
        sa.Column("id", sa.Integer, nullable=False),
        sa.Column("person_id", sa.Integer, nullable=False),
        sa.Column("discharge_date", sa.Date, nullable=False),
        sa.Column("variant_id", sa.Integer, nullable=False),
        sa.Column("acmg_class", sa.String(24), nullable=False),
        sa.Column("classified_on", sa.Date, nullable=False),
        sa.Column("advice", sa.Text, nullable=False),
        sa.Column("notes", sa.Text),
        *_entered(),
        sa.PrimaryKeyConstraint("id", name="pk_discharge"),
        _person("discharge"),
        sa.ForeignKeyConstraint(["variant_id"], ["variant.id"], name="fk_discharge_variant_id_variant"),
        sa.UniqueConstraint("person_id", "discharge_date", name="uq_discharge_person_id"),
        sa.CheckConstraint(f"acmg_class IN {_ACMG}", name="ck_discharge_acmg_class"),
    )


# The lower revision's words for the log's newest event (a frozen copy of
# tracker.domain.contacts.legacy_status: a migration never imports project code).
def legacy_status(outcomes: list[str | None], wish: str | None) -> str | None:
    """``outcomes``: the person's events oldest first; ``wish``: the open wish, if any."""
    if wish == "no_further_contact":
        return "declined"
    if not outcomes:
        return None
    informed = any(o in ("informed", "contact_later", "declined") for o in outcomes)
    last = outcomes[-1]
    if last is None:
        return None
    if last in ("informed", "contact_later"):
        return "contactable"
    if last in ("no_answer", "wrong_address"):
        return "contactable" if informed else "not_contacted"
    if last == "moved_away":
        return "lost_to_follow_up"
    return last  # declined, not_contacted, lost_to_follow_up


def _ordered_events(bind) -> dict[int, list[tuple]]:
    rows = bind.execute(sa.text("SELECT person_id, event_date, id, outcome FROM contact_event")).all()
    out: dict[int, list[tuple]] = {}
    for pid, day, eid, outcome in sorted(rows, key=lambda r: (r[0], r[1] is not None, _day(r[1]), r[2])):
        out.setdefault(pid, []).append((_day(day), outcome))
    return out


def _day(v) -> dt.date | None:
    if v is None or isinstance(v, dt.date):
        return v
    return dt.date.fromisoformat(str(v)[:10])


def _open_wishes(bind) -> dict[int, str]:
    rows = bind.execute(sa.text("SELECT person_id, wish FROM contact_wish WHERE ended_date IS NULL")).all()
    out: dict[int, str] = {}
    for pid, wish in rows:
        if wish == "no_further_contact" or pid not in out:
            out[pid] = wish
    return out


def _migrate_statuses(bind) -> None:
    """Log each person's single status that the log does not already say, then empty the columns."""
    events = _ordered_events(bind)
    wishes = _open_wishes(bind)
    people = bind.execute(sa.text("SELECT id, contact_status, contact_status_date FROM person "
                                  "WHERE contact_status IS NOT NULL OR contact_status_date IS NOT NULL")).all()  # fmt: skip
    now = dt.datetime.now(dt.timezone.utc).replace(tzinfo=None, microsecond=0)
    rows = []
    for pid, status, day in people:
        day = _day(day)
        logged = events.get(pid, [])
        said = legacy_status([o for _, o in logged], wishes.get(pid))
        if (said, logged[-1][0] if logged else None) == (status, day):
            continue  # written by the downgrade from this log: nothing new
        outcome = {"contactable": "informed"}.get(status, status)
        rows.append({"person_id": pid, "event_date": day, "channel": "other", "outcome": outcome,
                     "notes": MIGRATED_NOTE, "source": "migrated", "entered_at": now, "entered_by": "migration 0012"})
    if rows:
        table = sa.table("contact_event", *(sa.column(c) for c in rows[0]))
        bind.execute(table.insert(), rows)
    bind.execute(sa.text("UPDATE person SET contact_status = NULL, contact_status_date = NULL "
                         "WHERE contact_status IS NOT NULL OR contact_status_date IS NOT NULL"))  # fmt: skip


def upgrade() -> None:
    bind = op.get_bind()
    existing = set(sa.inspect(bind).get_table_names())
    present = set()
    for t in TABLES:
        if _kept(t) in existing:  # set aside by an earlier downgrade: put it back
            op.execute(f"ALTER TABLE {_kept(t)} RENAME TO {t}")
            present.add(t)
    _create(present)
    _migrate_statuses(bind)


def downgrade() -> None:
    """Fill the single status from the log, then keep the new tables that hold rows as ``*_kept``."""
    bind = op.get_bind()
    events = _ordered_events(bind)
    wishes = _open_wishes(bind)
    for pid in sorted(set(events) | set(wishes)):
        logged = events.get(pid, [])
        status = legacy_status([o for _, o in logged], wishes.get(pid))
        day = logged[-1][0] if logged else None
        bind.execute(sa.text("UPDATE person SET contact_status = :s, contact_status_date = :d WHERE id = :p"),
                     {"s": status, "d": day, "p": pid})  # fmt: skip
    for t in TABLES:
        if bind.execute(sa.text(f"SELECT count(*) FROM {t}")).scalar():
            op.execute(f"ALTER TABLE {t} RENAME TO {_kept(t)}")
        else:
            op.drop_table(t)
