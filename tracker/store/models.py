"""Tables of the family store (SQLAlchemy 2.x declarative models).

The schema itself is created only by the Alembic migrations in
``migrations/versions``; these classes describe it for queries, and a test
checks that the two agree.

Vocabularies (stored as short lower-case words, checked by CHECK constraints
so that a write from any client cannot store a word the tool does not know)
are defined once in :mod:`tracker.domain.vocabulary`.
"""

from __future__ import annotations

import datetime as dt

from sqlalchemy import (
    Boolean,
    CheckConstraint,
    Date,
    DateTime,
    Float,
    ForeignKey,
    Index,
    Integer,
    MetaData,
    String,
    Text,
    UniqueConstraint,
    text,
)
from sqlalchemy.orm import DeclarativeBase, Mapped, mapped_column

NAMING = {
    "ix": "ix_%(column_0_label)s",
    "uq": "uq_%(table_name)s_%(column_0_name)s",
    "ck": "ck_%(table_name)s_%(constraint_name)s",
    "fk": "fk_%(table_name)s_%(column_0_name)s_%(referred_table_name)s",
    "pk": "pk_%(table_name)s",
}


class Base(DeclarativeBase):
    metadata = MetaData(naming_convention=NAMING)


class Family(Base):
    __tablename__ = "family"

    id: Mapped[int] = mapped_column(Integer, primary_key=True)
    code: Mapped[str] = mapped_column(String(40), unique=True)
    condition: Mapped[str] = mapped_column(String(200))
    notes: Mapped[str | None] = mapped_column(Text)


class Person(Base):
    __tablename__ = "person"
    __table_args__ = (
        CheckConstraint("sex_at_birth IN ('female','male','unknown')", name="sex_at_birth"),
        CheckConstraint("birth_date_precision IN ('day','year')", name="birth_date_precision"),
        CheckConstraint("death_date_precision IN ('day','year')", name="death_date_precision"),
        CheckConstraint("vital_status IN ('alive','deceased','unknown')", name="vital_status"),
        CheckConstraint("twin_type IN ('monozygotic','dizygotic','unknown')", name="twin_type"),
        CheckConstraint("adoption IN ('in','out')", name="adoption"),
        # Removed people only (migration 0013): reads of the living never use it.
        Index("ix_person_removed", "id", sqlite_where=text("removed_at IS NOT NULL"),
              postgresql_where=text("removed_at IS NOT NULL")),
        CheckConstraint(
            "contact_status IN ('not_contacted','contactable','declined','lost_to_follow_up')",
            name="contact_status",
        ),
        # Migration 0006.
        CheckConstraint(
            "death_cause IN ('sudden','cardiac_non_sudden','non_cardiac','unknown')", name="death_cause"
        ),
        CheckConstraint("icd_date_precision IN ('day','year')", name="icd_date_precision"),
        CheckConstraint("pacemaker_date_precision IN ('day','year')", name="pacemaker_date_precision"),
    )

    id: Mapped[int] = mapped_column(Integer, primary_key=True)
    code: Mapped[str] = mapped_column(String(40), unique=True)
    family_id: Mapped[int] = mapped_column(ForeignKey("family.id"), index=True)
    given_name: Mapped[str | None] = mapped_column(String(200))
    family_name: Mapped[str | None] = mapped_column(String(200))
    sex_at_birth: Mapped[str] = mapped_column(String(10))
    gender_identity: Mapped[str | None] = mapped_column(String(100))
    birth_date: Mapped[dt.date | None] = mapped_column(Date)
    birth_date_precision: Mapped[str | None] = mapped_column(String(4))
    vital_status: Mapped[str] = mapped_column(String(10))
    death_date: Mapped[dt.date | None] = mapped_column(Date)
    death_date_precision: Mapped[str | None] = mapped_column(String(4))
    mother_id: Mapped[int | None] = mapped_column(ForeignKey("person.id"), index=True)
    father_id: Mapped[int | None] = mapped_column(ForeignKey("person.id"), index=True)
    is_placeholder: Mapped[bool] = mapped_column(Boolean, default=False)
    is_proband: Mapped[bool] = mapped_column(Boolean, default=False)
    twin_of_id: Mapped[int | None] = mapped_column(ForeignKey("person.id"))
    twin_type: Mapped[str | None] = mapped_column(String(12))
    adoption: Mapped[str | None] = mapped_column(String(3))
    contact_status: Mapped[str | None] = mapped_column(String(20))
    contact_status_date: Mapped[dt.date | None] = mapped_column(Date)
    notes: Mapped[str | None] = mapped_column(Text)
    removed_at: Mapped[dt.datetime | None] = mapped_column(DateTime)
    removed_by: Mapped[str | None] = mapped_column(String(100))
    removed_reason: Mapped[str | None] = mapped_column(Text)
    # Migration 0006: cause and age of death, diagnosis (possibly elsewhere), devices.
    death_cause: Mapped[str | None] = mapped_column(String(20))
    death_age: Mapped[int | None] = mapped_column(Integer)  # whole years
    diagnosis_age: Mapped[int | None] = mapped_column(Integer)  # whole years at diagnosis/onset of HCM
    diagnosis_place: Mapped[str | None] = mapped_column(String(200))
    icd_date: Mapped[dt.date | None] = mapped_column(Date)
    icd_date_precision: Mapped[str | None] = mapped_column(String(4))
    pacemaker_date: Mapped[dt.date | None] = mapped_column(Date)
    pacemaker_date_precision: Mapped[str | None] = mapped_column(String(4))
    # Migration 0009: an identifier from another system (e.g. the hospital number); private like the names.
    external_id: Mapped[str | None] = mapped_column(String(64), index=True, unique=True)


class Assessment(Base):
    __tablename__ = "assessment"
    __table_args__ = (
        UniqueConstraint("person_id", "assessment_date"),
        CheckConstraint(
            "affected_status IN ('affected','unaffected','uncertain')", name="affected_status"
        ),
    )

    id: Mapped[int] = mapped_column(Integer, primary_key=True)
    person_id: Mapped[int] = mapped_column(ForeignKey("person.id"))
    assessment_date: Mapped[dt.date] = mapped_column(Date)
    affected_status: Mapped[str] = mapped_column(String(10))
    symptoms: Mapped[str | None] = mapped_column(Text)
    competitive_athlete: Mapped[bool] = mapped_column(Boolean, default=False)
    pregnant: Mapped[bool] = mapped_column(Boolean, default=False)
    hypertension: Mapped[bool] = mapped_column(Boolean, default=False)
    notes: Mapped[str | None] = mapped_column(Text)
    # HCM Risk-SCD answers (migration 0005): True, False, or None = not recorded.
    family_history_scd: Mapped[bool | None] = mapped_column(Boolean)
    nsvt: Mapped[bool | None] = mapped_column(Boolean)
    unexplained_syncope: Mapped[bool | None] = mapped_column(Boolean)
    prior_arrest_or_sustained_vt: Mapped[bool | None] = mapped_column(Boolean)
    metabolic_or_syndromic: Mapped[bool | None] = mapped_column(Boolean)
    # Migration 0006: atrial fibrillation documented (yes), looked for and absent (no), None = not recorded.
    atrial_fibrillation: Mapped[bool | None] = mapped_column(Boolean)


class Variant(Base):
    __tablename__ = "variant"
    __table_args__ = (
        UniqueConstraint("family_id", "transcript", "hgvs_c"),
        CheckConstraint(
            "zygosity IN ('heterozygous','homozygous','hemizygous','compound_heterozygous')",
            name="zygosity",
        ),
    )

    id: Mapped[int] = mapped_column(Integer, primary_key=True)
    family_id: Mapped[int] = mapped_column(ForeignKey("family.id"))
    gene: Mapped[str] = mapped_column(String(20))
    transcript: Mapped[str] = mapped_column(String(40))
    hgvs_c: Mapped[str] = mapped_column(String(200))
    hgvs_p: Mapped[str | None] = mapped_column(String(200))
    zygosity: Mapped[str] = mapped_column(String(24))


class VariantClassification(Base):
    """One dated ACMG/AMP classification of a variant; rows are never updated.

    The current class of a variant is the row with the latest date.
    """

    __tablename__ = "variant_classification"
    __table_args__ = (
        UniqueConstraint("variant_id", "classified_on"),
        CheckConstraint(
            "acmg_class IN ('pathogenic','likely_pathogenic','uncertain_significance',"
            "'likely_benign','benign')",
            name="acmg_class",
        ),
    )

    id: Mapped[int] = mapped_column(Integer, primary_key=True)
    variant_id: Mapped[int] = mapped_column(ForeignKey("variant.id"))
    classified_on: Mapped[dt.date] = mapped_column(Date)
    acmg_class: Mapped[str] = mapped_column(String(24))
    reason: Mapped[str | None] = mapped_column(Text)


class GeneticResult(Base):
    __tablename__ = "genetic_result"
    __table_args__ = (
        UniqueConstraint("person_id", "test_date", "test_type", "variant_id"),
        CheckConstraint("test_type IN ('diagnostic_panel','predictive')", name="test_type"),
        CheckConstraint(
            "result IN ('carrier','non_carrier','inconclusive','no_variant_found')", name="result"
        ),
    )

    id: Mapped[int] = mapped_column(Integer, primary_key=True)
    person_id: Mapped[int] = mapped_column(ForeignKey("person.id"))
    variant_id: Mapped[int | None] = mapped_column(ForeignKey("variant.id"))
    test_type: Mapped[str] = mapped_column(String(20))
    result: Mapped[str] = mapped_column(String(20))
    test_date: Mapped[dt.date] = mapped_column(Date)
    lab: Mapped[str | None] = mapped_column(String(200))
    report_reference: Mapped[str | None] = mapped_column(String(200))


class Measure(Base):
    """The catalogue of measures: what a value means, its unit and plausible range."""

    __tablename__ = "measure"
    __table_args__ = (
        CheckConstraint("modality IN ('echo','cmr','ecg','clinic')", name="modality"),
    )

    code: Mapped[str] = mapped_column(String(40), primary_key=True)
    label: Mapped[str] = mapped_column(String(200))
    modality: Mapped[str] = mapped_column(String(10))
    unit: Mapped[str] = mapped_column(String(20))
    plausible_min: Mapped[float] = mapped_column(Float)
    plausible_max: Mapped[float] = mapped_column(Float)
    range_source: Mapped[str] = mapped_column(Text)
    derived: Mapped[bool] = mapped_column(Boolean, default=False)
    loinc: Mapped[str | None] = mapped_column(String(20))


class Study(Base):
    __tablename__ = "study"
    __table_args__ = (
        UniqueConstraint("person_id", "study_date", "modality"),
        CheckConstraint("modality IN ('echo','cmr','ecg','clinic')", name="modality"),
    )

    id: Mapped[int] = mapped_column(Integer, primary_key=True)
    person_id: Mapped[int] = mapped_column(ForeignKey("person.id"), index=True)
    study_date: Mapped[dt.date] = mapped_column(Date)
    modality: Mapped[str] = mapped_column(String(10))
    site: Mapped[str | None] = mapped_column(String(200))
    height_cm: Mapped[float | None] = mapped_column(Float)
    weight_kg: Mapped[float | None] = mapped_column(Float)
    removed_at: Mapped[dt.datetime | None] = mapped_column(DateTime)
    removed_by: Mapped[str | None] = mapped_column(String(100))
    removed_reason: Mapped[str | None] = mapped_column(Text)


class Measurement(Base):
    """One value of a study, in the catalogue unit, with the value as entered beside it."""

    __tablename__ = "measurement"
    __table_args__ = (UniqueConstraint("study_id", "measure_code"),)

    id: Mapped[int] = mapped_column(Integer, primary_key=True)
    study_id: Mapped[int] = mapped_column(ForeignKey("study.id"), index=True)
    measure_code: Mapped[str] = mapped_column(ForeignKey("measure.code"))
    value: Mapped[float] = mapped_column(Float)
    unit: Mapped[str] = mapped_column(String(20))
    entered_value: Mapped[float] = mapped_column(Float)
    entered_unit: Mapped[str] = mapped_column(String(20))


class ImportRun(Base):
    """One accepted import: which file, when, by whom, and what it added."""

    __tablename__ = "import_run"

    id: Mapped[int] = mapped_column(Integer, primary_key=True)
    kind: Mapped[str] = mapped_column(String(30))
    file_name: Mapped[str] = mapped_column(String(500))
    sha256: Mapped[str] = mapped_column(String(64))
    imported_at: Mapped[dt.datetime] = mapped_column(DateTime)
    imported_by: Mapped[str] = mapped_column(String(100))
    rows_read: Mapped[int] = mapped_column(Integer)
    rows_added: Mapped[int] = mapped_column(Integer)


# Codes of :class:`tracker.engines.reclassification.ImpactItem.change` (the CHECK constraint of
# migration 0008 holds the same list).
IMPACT_CHANGES = (
    "recounsel_family",
    "return_to_surveillance",
    "keep_in_surveillance",
    "loses_genotype_positive",
    "testing_withdrawn",
    "exclusion_lifted",
    "offer_predictive_testing",
    "result_reinterpreted_positive",
    "result_reinterpreted_negative",
    "obligate_carrier",
    "unscheduled_review",
    "predictive_testing_deferred",
    "offer_diagnostic_testing",
    "declined_not_reapproached",
    "no_longer_at_risk",
)


class ImpactItem(Base):
    """One consequence of a variant reclassification: an item on the nurse's to-do list.

    Belongs to the classification row that caused it; ``person_id`` is None for
    a family-level item.  Open until ``done_on`` is set (with ``done_by``);
    never deleted.
    """

    __tablename__ = "impact_item"
    __table_args__ = (
        CheckConstraint(
            "change IN (" + ",".join(f"'{c}'" for c in IMPACT_CHANGES) + ")",
            name="change",
        ),
        CheckConstraint(
            "(done_on IS NULL AND done_by IS NULL) OR (done_on IS NOT NULL AND done_by IS NOT NULL)",
            name="done_together",
        ),
    )

    id: Mapped[int] = mapped_column(Integer, primary_key=True)
    variant_classification_id: Mapped[int] = mapped_column(ForeignKey("variant_classification.id"), index=True)
    person_id: Mapped[int | None] = mapped_column(ForeignKey("person.id"), index=True)
    change: Mapped[str] = mapped_column(String(40))
    what_changes: Mapped[str] = mapped_column(Text)
    action: Mapped[str] = mapped_column(Text)
    source: Mapped[str] = mapped_column(Text)
    status_before: Mapped[str | None] = mapped_column(String(20))
    status_after: Mapped[str | None] = mapped_column(String(20))
    created_at: Mapped[dt.datetime] = mapped_column(DateTime)
    created_by: Mapped[str] = mapped_column(String(100))
    done_on: Mapped[dt.date | None] = mapped_column(Date)
    done_by: Mapped[str | None] = mapped_column(String(100))
    done_note: Mapped[str | None] = mapped_column(Text)


class AuditEntry(Base):
    """One write to the store: who, when, what, for whom, the values before and after, why.

    Append-only: a database trigger (migration 0004) refuses every UPDATE and
    DELETE of this table, on SQLite and on PostgreSQL (and, on SQLite, an INSERT
    over an existing id: migration 0007).  ``entry_hash`` chains the entries
    (:func:`tracker.store.audit.entry_hash`).  ``before`` and ``after``
    are JSON objects (text); an import is one entry per file (name, SHA-256 and
    counts), because imported rows are never changed except by audited edits.
    """

    __tablename__ = "audit_entry"

    id: Mapped[int] = mapped_column(Integer, primary_key=True)
    at: Mapped[dt.datetime] = mapped_column(DateTime, index=True)
    actor: Mapped[str] = mapped_column(String(100))
    action: Mapped[str] = mapped_column(String(30))
    table_name: Mapped[str] = mapped_column(String(40))
    row_id: Mapped[int | None] = mapped_column(Integer)
    family_code: Mapped[str | None] = mapped_column(String(40), index=True)
    person_code: Mapped[str | None] = mapped_column(String(40), index=True)
    what: Mapped[str] = mapped_column(Text)
    before: Mapped[str | None] = mapped_column(Text)
    after: Mapped[str | None] = mapped_column(Text)
    reason: Mapped[str | None] = mapped_column(Text)
    entry_hash: Mapped[str | None] = mapped_column(String(64))


# Roles of the web interface's accounts (the CHECK constraint of migration 0010 holds the same list);
# what each role may do is in tracker/web/roles.py.
ROLES = ("nurse", "cardiologist", "counsellor", "admin")


class Account(Base):
    """One person who signs in to the web interface (migration 0010).

    Only the argon2 hash of the password is stored.  Never deleted: an account is
    disabled.  ``failed_count`` / ``last_failed_at`` count failed sign-ins since
    the last success (the slow-down of :mod:`tracker.services.accounts`).
    """

    __tablename__ = "account"
    __table_args__ = (CheckConstraint("role IN (" + ",".join(f"'{r}'" for r in ROLES) + ")", name="role"),)

    id: Mapped[int] = mapped_column(Integer, primary_key=True)
    name: Mapped[str] = mapped_column(String(100), unique=True)
    role: Mapped[str] = mapped_column(String(20))
    password_hash: Mapped[str] = mapped_column(String(200))
    disabled: Mapped[bool] = mapped_column(Boolean)
    must_change_password: Mapped[bool] = mapped_column(Boolean)
    created_at: Mapped[dt.datetime] = mapped_column(DateTime)
    created_by: Mapped[str] = mapped_column(String(100))
    failed_count: Mapped[int] = mapped_column(Integer)
    last_failed_at: Mapped[dt.datetime | None] = mapped_column(DateTime)


class WebSession(Base):
    """One sign-in to the web interface: the SHA-256 of its token, never the token (migration 0010)."""

    __tablename__ = "web_session"

    id: Mapped[int] = mapped_column(Integer, primary_key=True)
    token_sha256: Mapped[str] = mapped_column(String(64), unique=True)
    account_id: Mapped[int] = mapped_column(ForeignKey("account.id"), index=True)
    created_at: Mapped[dt.datetime] = mapped_column(DateTime)
    last_seen_at: Mapped[dt.datetime] = mapped_column(DateTime)
    ended_at: Mapped[dt.datetime | None] = mapped_column(DateTime)
    end_reason: Mapped[str | None] = mapped_column(String(20))


class RecallProposal(Base):
    """Each person's current recall proposal (migration 0011): derived data, kept for the worklist.

    Written by :func:`tracker.services.proposals.refresh_families` in the transaction of every
    write that can change it; read by the worklist (:mod:`tracker.services.worklist`), which
    recomputes the rows that are stale, computed under other inputs or past ``valid_until``.
    ``reasons`` is the whole proposal as JSON text; ``inputs_version`` is
    ``<rule set and settings hash>-<family records hash>``.
    """

    __tablename__ = "recall_proposal"
    __table_args__ = (
        CheckConstraint("state IN ('due','overdue','released','not_recalled','not_scheduled')", name="state"),
        Index("ix_recall_proposal_day_list", "state", "due_on", "urgency_flags", "person_code", "contact_wish",
              "contact_status", "contact_later_on", "affected", "never_screened", "triggered", "informed_on",
              "responded"),
        Index("ix_recall_proposal_no_response", "state", "responded", "informed_on", "due_on", "urgency_flags",
              "person_code", "contact_status", "contact_wish", "contact_later_on", "affected", "never_screened",
              "triggered"),
        Index("ix_recall_proposal_contact_wish", "contact_wish", "state"),
        Index("ix_recall_proposal_family_flagged", "family_id", "flagged"),
        # Stale rows only (migration 0013): reads of current rows (stale IS false) never choose it.
        Index("ix_recall_proposal_stale", "id", sqlite_where=text("stale IS 1"), postgresql_where=text("stale IS true")),
    )

    id: Mapped[int] = mapped_column(Integer, primary_key=True)
    person_id: Mapped[int] = mapped_column(ForeignKey("person.id"), unique=True)
    family_id: Mapped[int] = mapped_column(ForeignKey("family.id"), index=True)
    state: Mapped[str] = mapped_column(String(20))
    rule_id: Mapped[str | None] = mapped_column(String(80))
    interval_months: Mapped[int | None] = mapped_column(Integer)
    due_on: Mapped[dt.date | None] = mapped_column(Date, index=True)
    as_of: Mapped[dt.date] = mapped_column(Date, index=True)
    reasons: Mapped[str] = mapped_column(Text)
    inputs_version: Mapped[str] = mapped_column(String(80), index=True)
    computed_at: Mapped[dt.datetime] = mapped_column(DateTime)
    valid_until: Mapped[dt.date] = mapped_column(Date, index=True)
    stale: Mapped[bool] = mapped_column(Boolean)
    trend_values: Mapped[bool] = mapped_column(Boolean)
    # The fields that choose and order the day list (migration 0013), copies of the proposal's own.
    person_code: Mapped[str | None] = mapped_column(String(40))
    urgency_flags: Mapped[int | None] = mapped_column(Integer)  # 0 never screened + trigger, 1 never screened, 2 trigger, 3 neither
    flagged: Mapped[bool | None] = mapped_column(Boolean)  # a trend flag or affected (services.proposals.FLAG_MARKS)
    affected: Mapped[bool | None] = mapped_column(Boolean)
    never_screened: Mapped[bool | None] = mapped_column(Boolean)
    triggered: Mapped[bool | None] = mapped_column(Boolean)
    progression: Mapped[bool | None] = mapped_column(Boolean)
    contact_status: Mapped[str | None] = mapped_column(String(30))
    contact_wish: Mapped[str | None] = mapped_column(String(30))
    contact_later_on: Mapped[dt.date | None] = mapped_column(Date)
    informed_on: Mapped[dt.date | None] = mapped_column(Date)
    responded: Mapped[bool | None] = mapped_column(Boolean)


# --------------------------------------------------------------------------- the contact log (migration 0012)
# person.contact_status / contact_status_date above are retired: 0012 moved them into ``contact_event``
# and leaves them empty; the current state is derived from the log (tracker.domain.contacts).

_CHANNELS = "('letter','phone','in_clinic','via_family','other')"
_ROLES = "('nurse','counsellor','cardiologist','other')"
_OUTCOMES = ("('informed','no_answer','wrong_address','declined','contact_later','moved_away',"
             "'not_contacted','lost_to_follow_up')")  # fmt: skip


class ContactEvent(Base):
    """One contact or attempt with a relative; never updated (a correction is a newer event)."""

    __tablename__ = "contact_event"
    __table_args__ = (
        CheckConstraint(f"channel IN {_CHANNELS}", name="channel"),
        CheckConstraint(f"by_role IN {_ROLES}", name="by_role"),
        CheckConstraint(f"outcome IN {_OUTCOMES}", name="outcome"),
        CheckConstraint("source IN ('entered','migrated','imported')", name="source"),
        CheckConstraint("source <> 'entered' OR (event_date IS NOT NULL AND outcome IS NOT NULL)",
                        name="entered_complete"),  # fmt: skip
        CheckConstraint("(outcome = 'contact_later' AND later_date IS NOT NULL) OR "
                        "(outcome IS NULL OR outcome <> 'contact_later') AND later_date IS NULL",
                        name="later_date"),  # fmt: skip
        CheckConstraint("(channel = 'via_family' AND via_person_id IS NOT NULL AND by_role IS NULL) OR "
                        "(channel <> 'via_family' AND via_person_id IS NULL)", name="via"),
    )

    id: Mapped[int] = mapped_column(Integer, primary_key=True)
    person_id: Mapped[int] = mapped_column(ForeignKey("person.id"), index=True)
    event_date: Mapped[dt.date | None] = mapped_column(Date)
    channel: Mapped[str] = mapped_column(String(12))
    by_role: Mapped[str | None] = mapped_column(String(14))
    via_person_id: Mapped[int | None] = mapped_column(ForeignKey("person.id"))
    outcome: Mapped[str | None] = mapped_column(String(20))
    later_date: Mapped[dt.date | None] = mapped_column(Date)
    notes: Mapped[str | None] = mapped_column(Text)
    source: Mapped[str] = mapped_column(String(10))
    entered_at: Mapped[dt.datetime] = mapped_column(DateTime)
    entered_by: Mapped[str] = mapped_column(String(100))


class ContactWish(Base):
    """A relative's wish about contact; open until ``ended_date`` (with ``ended_by``), never deleted."""

    __tablename__ = "contact_wish"
    __table_args__ = (
        CheckConstraint("wish IN ('no_further_contact','only_via_family_member')", name="wish"),
        CheckConstraint("(wish = 'only_via_family_member' AND via_person_id IS NOT NULL) OR "
                        "(wish <> 'only_via_family_member' AND via_person_id IS NULL)", name="via"),
        CheckConstraint("(ended_date IS NULL AND ended_by IS NULL) OR "
                        "(ended_date IS NOT NULL AND ended_by IS NOT NULL)", name="ended"),
    )

    id: Mapped[int] = mapped_column(Integer, primary_key=True)
    person_id: Mapped[int] = mapped_column(ForeignKey("person.id"), index=True)
    wish: Mapped[str] = mapped_column(String(30))
    via_person_id: Mapped[int | None] = mapped_column(ForeignKey("person.id"))
    recorded_date: Mapped[dt.date] = mapped_column(Date)
    notes: Mapped[str | None] = mapped_column(Text)
    ended_date: Mapped[dt.date | None] = mapped_column(Date)
    ended_by: Mapped[str | None] = mapped_column(String(100))
    entered_at: Mapped[dt.datetime] = mapped_column(DateTime)
    entered_by: Mapped[str] = mapped_column(String(100))


class LetterSent(Base):
    """A letter the user confirmed as sent (never recorded on mere generation)."""

    __tablename__ = "letter_sent"
    __table_args__ = (
        CheckConstraint("kind IN ('first_contact','reminder','result','reclassification','discharge',"
                        "'appointment')", name="kind"),  # fmt: skip
        CheckConstraint("sent_to IN ('person','via_family')", name="sent_to"),
        CheckConstraint("(sent_to = 'via_family' AND via_person_id IS NOT NULL) OR "
                        "(sent_to = 'person' AND via_person_id IS NULL)", name="via"),
    )

    id: Mapped[int] = mapped_column(Integer, primary_key=True)
    person_id: Mapped[int] = mapped_column(ForeignKey("person.id"), index=True)
    kind: Mapped[str] = mapped_column(String(20))
    template: Mapped[str] = mapped_column(String(100))
    template_version: Mapped[str] = mapped_column(String(40))
    sent_date: Mapped[dt.date] = mapped_column(Date)
    sent_to: Mapped[str] = mapped_column(String(10))
    via_person_id: Mapped[int | None] = mapped_column(ForeignKey("person.id"))
    reply_date: Mapped[dt.date | None] = mapped_column(Date)
    notes: Mapped[str | None] = mapped_column(Text)
    entered_at: Mapped[dt.datetime] = mapped_column(DateTime)
    entered_by: Mapped[str] = mapped_column(String(100))


class ExternalResult(Base):
    """A genetic test (genotype words of ``genetic_result``) or a screening (phenotype) at another centre."""

    __tablename__ = "external_result"
    __table_args__ = (
        UniqueConstraint("person_id", "kind", "result_date"),
        CheckConstraint("kind IN ('genetic_test','screening')", name="kind"),
        CheckConstraint("(kind = 'genetic_test' AND result IN ('carrier','non_carrier','inconclusive',"
                        "'no_variant_found')) OR (kind = 'screening' AND result IN ('affected','unaffected',"
                        "'uncertain') AND variant_id IS NULL)", name="result"),  # fmt: skip
    )

    id: Mapped[int] = mapped_column(Integer, primary_key=True)
    person_id: Mapped[int] = mapped_column(ForeignKey("person.id"))
    kind: Mapped[str] = mapped_column(String(12))
    result_date: Mapped[dt.date] = mapped_column(Date)
    centre: Mapped[str] = mapped_column(String(200))
    variant_id: Mapped[int | None] = mapped_column(ForeignKey("variant.id"))
    result: Mapped[str] = mapped_column(String(20))
    document_ref: Mapped[str | None] = mapped_column(String(200))
    notes: Mapped[str | None] = mapped_column(Text)
    entered_at: Mapped[dt.datetime] = mapped_column(DateTime)
    entered_by: Mapped[str] = mapped_column(String(100))


class Booking(Base):
    """A visit the nurse booked; cancelled (with who), never deleted."""

    __tablename__ = "booking"
    __table_args__ = (
        CheckConstraint("(cancelled_date IS NULL AND cancelled_by IS NULL) OR "
                        "(cancelled_date IS NOT NULL AND cancelled_by IS NOT NULL)", name="cancelled"),
    )

    id: Mapped[int] = mapped_column(Integer, primary_key=True)
    person_id: Mapped[int] = mapped_column(ForeignKey("person.id"), index=True)
    visit_date: Mapped[dt.date] = mapped_column(Date)
    purpose: Mapped[str] = mapped_column(String(200))
    notes: Mapped[str | None] = mapped_column(Text)
    entered_at: Mapped[dt.datetime] = mapped_column(DateTime)
    entered_by: Mapped[str] = mapped_column(String(100))
    cancelled_date: Mapped[dt.date | None] = mapped_column(Date)
    cancelled_by: Mapped[str | None] = mapped_column(String(100))


class Discharge(Base):
    """A variant-negative relative discharged from screening: the class relied on and the advice given."""

    __tablename__ = "discharge"
    __table_args__ = (
        UniqueConstraint("person_id", "discharge_date"),
        CheckConstraint("acmg_class IN ('pathogenic','likely_pathogenic','uncertain_significance',"
                        "'likely_benign','benign')", name="acmg_class"),  # fmt: skip
    )

    id: Mapped[int] = mapped_column(Integer, primary_key=True)
    person_id: Mapped[int] = mapped_column(ForeignKey("person.id"))
    discharge_date: Mapped[dt.date] = mapped_column(Date)
    variant_id: Mapped[int] = mapped_column(ForeignKey("variant.id"))
    acmg_class: Mapped[str] = mapped_column(String(24))
    classified_on: Mapped[dt.date] = mapped_column(Date)
    advice: Mapped[str] = mapped_column(Text)
    notes: Mapped[str | None] = mapped_column(Text)
    entered_at: Mapped[dt.datetime] = mapped_column(DateTime)
    entered_by: Mapped[str] = mapped_column(String(100))
