"""Reading the store into DataFrames that use codes, not row ids.

People and studies that were removed (soft delete, see :mod:`tracker.services.edits`)
are left out of every frame, and so are the records of a removed person.

Each ``load_*`` function returns the records of one kind in the clean form of
its CSV layout (see :mod:`tracker.io.layouts`): the same columns, dates as ISO
text, numbers as floats, yes/no as booleans, empty as None/NaN.  The importer
compares incoming rows with these frames, the exporter writes them out, and
the engines read them.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
from sqlalchemy import Connection, String, select, type_coerce
from sqlalchemy.orm import aliased

from tracker.gcpause import gc_paused
from tracker.domain.dates import partial_from_storage
from tracker.store.models import (
    Assessment,
    Booking,
    ContactEvent,
    ContactWish,
    Discharge,
    ExternalResult,
    LetterSent,
    Family,
    GeneticResult,
    Measure,
    Measurement,
    Person,
    Study,
    Variant,
    VariantClassification,
)


def _frame(conn: Connection, stmt, columns: list[str]) -> pd.DataFrame:
    rows = conn.execute(stmt).all()
    return pd.DataFrame([tuple(r) for r in rows], columns=columns, dtype=object)


def _iso(series: pd.Series) -> pd.Series:
    return series.map(lambda d: d.isoformat() if d is not None else None).astype(object)


class Scope:
    """Which records a reader returns: the whole cohort (``Scope()``), or the families with the
    given codes (``Scope.families(...)``; one person's review reads their family, the pedigree
    context, and no one else's records). A family-scoped read goes through the family and
    person indexes (migration 0009) instead of reading every row."""

    __slots__ = ("family_codes",)

    def __init__(self, family_codes: frozenset[str] | None = None) -> None:
        self.family_codes = family_codes

    @classmethod
    def families(cls, codes) -> Scope:
        return cls(frozenset(codes))

    @property
    def cohort(self) -> bool:
        return self.family_codes is None

    def family_ids(self):
        """A sub-select of the family row ids in scope."""
        return select(Family.id).where(Family.code.in_(sorted(self.family_codes))).scalar_subquery()


COHORT = Scope()


def _in_scope(stmt, scope: Scope | None, family_id_column):
    if scope is None or scope.cohort:
        return stmt
    return stmt.where(family_id_column.in_(scope.family_ids()))


def load_families(conn: Connection, scope: Scope | None = None) -> pd.DataFrame:
    stmt = select(Family.code, Family.condition, Family.notes).order_by(Family.code)
    if scope is not None and not scope.cohort:
        stmt = stmt.where(Family.code.in_(sorted(scope.family_codes)))
    return _frame(conn, stmt, ["family", "condition", "notes"])


def load_people(conn: Connection, scope: Scope | None = None) -> pd.DataFrame:
    mother, father, twin = aliased(Person), aliased(Person), aliased(Person)
    stmt = (
        select(
            Person.code,
            Family.code,
            Person.given_name,
            Person.family_name,
            Person.sex_at_birth,
            Person.gender_identity,
            Person.birth_date,
            Person.birth_date_precision,
            Person.vital_status,
            Person.death_date,
            Person.death_date_precision,
            mother.code,
            father.code,
            Person.is_placeholder,
            Person.is_proband,
            twin.code,
            Person.twin_type,
            Person.adoption,
            Person.notes,
            Person.death_cause,
            Person.death_age,
            Person.diagnosis_age,
            Person.diagnosis_place,
            Person.icd_date,
            Person.icd_date_precision,
            Person.pacemaker_date,
            Person.pacemaker_date_precision,
            Person.external_id,
        )
        .join(Family, Person.family_id == Family.id)
        .outerjoin(mother, Person.mother_id == mother.id)
        .outerjoin(father, Person.father_id == father.id)
        .outerjoin(twin, Person.twin_of_id == twin.id)
        .where(Person.removed_at.is_(None))
        .order_by(Person.code)
    )
    stmt = _in_scope(stmt, scope, Person.family_id)
    cols = [
        "person", "family", "given_name", "family_name", "sex_at_birth", "gender_identity",
        "_birth", "_birth_p", "vital_status", "_death", "_death_p", "mother", "father",
        "placeholder", "proband", "twin_of", "twin_type", "adoption",
        "notes", "death_cause", "death_age", "diagnosis_age", "diagnosis_place",
        "_icd", "_icd_p", "_pacemaker", "_pacemaker_p", "external_id",
    ]  # fmt: skip
    df = _frame(conn, stmt, cols)
    df["birth_date"] = [partial_from_storage(d, p) for d, p in zip(df["_birth"], df["_birth_p"])]
    df["death_date"] = [partial_from_storage(d, p) for d, p in zip(df["_death"], df["_death_p"])]
    df["icd_date"] = [partial_from_storage(d, p) for d, p in zip(df["_icd"], df["_icd_p"])]
    df["pacemaker_date"] = [partial_from_storage(d, p) for d, p in zip(df["_pacemaker"], df["_pacemaker_p"])]
    for c in ("death_age", "diagnosis_age"):  # whole years as float, NaN when not recorded (the CSV clean form)
        df[c] = pd.to_numeric(df[c], errors="coerce").astype(float)
    # The contact status is derived from the contact log (migration 0012), not stored with the person.
    states = contact_states(conn, scope)
    df["contact_status"] = pd.Series([states[p].legacy if p in states else None for p in df["person"]],
                                     index=df.index, dtype=object)  # fmt: skip
    df["contact_status_date"] = pd.Series(
        [states[p].status_date.isoformat() if p in states and states[p].status_date else None for p in df["person"]],
        index=df.index, dtype=object)  # fmt: skip
    df["placeholder"] = df["placeholder"].astype(bool)
    df["proband"] = df["proband"].astype(bool)
    df = df.drop(columns=["_birth", "_birth_p", "_death", "_death_p", "_icd", "_icd_p", "_pacemaker", "_pacemaker_p"])
    return df[_PEOPLE_ORDER]


_PEOPLE_ORDER = [
    "person", "family", "given_name", "family_name", "sex_at_birth", "gender_identity",
    "birth_date", "vital_status", "death_date", "mother", "father", "placeholder", "proband",
    "twin_of", "twin_type", "adoption", "contact_status", "contact_status_date", "notes",
    "death_cause", "death_age", "diagnosis_age", "diagnosis_place", "icd_date", "pacemaker_date",
    "external_id",
]  # fmt: skip


def load_variants(conn: Connection, scope: Scope | None = None) -> pd.DataFrame:
    """One row per classification event (the class history), oldest first."""
    stmt = (
        select(
            Family.code,
            Variant.gene,
            Variant.transcript,
            Variant.hgvs_c,
            Variant.hgvs_p,
            Variant.zygosity,
            VariantClassification.acmg_class,
            VariantClassification.classified_on,
            VariantClassification.reason,
        )
        .join(Family, Variant.family_id == Family.id)
        .join(VariantClassification, VariantClassification.variant_id == Variant.id)
        .order_by(Family.code, Variant.transcript, Variant.hgvs_c, VariantClassification.classified_on)
    )
    stmt = _in_scope(stmt, scope, Variant.family_id)
    cols = ["family", "gene", "transcript", "hgvs_c", "hgvs_p", "zygosity", "acmg_class",
            "classified_on", "reason"]  # fmt: skip
    df = _frame(conn, stmt, cols)
    df["classified_on"] = _iso(df["classified_on"])
    return df


def load_genetic_results(conn: Connection, scope: Scope | None = None) -> pd.DataFrame:
    stmt = (
        select(
            Person.code,
            GeneticResult.test_date,
            GeneticResult.test_type,
            Variant.transcript,
            Variant.hgvs_c,
            GeneticResult.result,
            GeneticResult.lab,
            GeneticResult.report_reference,
        )
        .join(Person, GeneticResult.person_id == Person.id)
        .outerjoin(Variant, GeneticResult.variant_id == Variant.id)
        .where(Person.removed_at.is_(None))
        .order_by(Person.code, GeneticResult.test_date, GeneticResult.test_type)
    )
    stmt = _in_scope(stmt, scope, Person.family_id)
    cols = ["person", "test_date", "test_type", "_tx", "_c", "result", "lab", "report_reference"]
    df = _frame(conn, stmt, cols)
    df["test_date"] = _iso(df["test_date"])
    df["variant"] = [f"{t}:{c}" if t is not None else None for t, c in zip(df["_tx"], df["_c"])]
    return df[["person", "test_date", "test_type", "variant", "result", "lab", "report_reference"]]


# HCM Risk-SCD answers of an assessment: True, False or None (not recorded).
RISK_ANSWERS = ("family_history_scd", "nsvt", "unexplained_syncope", "prior_arrest_or_sustained_vt",
                "metabolic_or_syndromic")  # fmt: skip
# Other yes / no / not-recorded answers of an assessment (revision 0006).
OTHER_ANSWERS = ("atrial_fibrillation",)


def load_assessments(conn: Connection, scope: Scope | None = None) -> pd.DataFrame:
    stmt = (
        select(
            Person.code,
            Assessment.assessment_date,
            Assessment.affected_status,
            Assessment.symptoms,
            Assessment.competitive_athlete,
            Assessment.pregnant,
            Assessment.hypertension,
            Assessment.notes,
            *(getattr(Assessment, a) for a in RISK_ANSWERS),
            *(getattr(Assessment, a) for a in OTHER_ANSWERS),
        )
        .join(Person, Assessment.person_id == Person.id)
        .where(Person.removed_at.is_(None))
        .order_by(Person.code, Assessment.assessment_date)
    )
    stmt = _in_scope(stmt, scope, Person.family_id)
    cols = ["person", "assessment_date", "affected_status", "symptoms", "competitive_athlete",
            "pregnant", "hypertension", "notes", *RISK_ANSWERS, *OTHER_ANSWERS]  # fmt: skip
    df = _frame(conn, stmt, cols)
    df["assessment_date"] = _iso(df["assessment_date"])
    for c in ("competitive_athlete", "pregnant", "hypertension"):
        df[c] = df[c].astype(bool)
    return df


def load_studies(conn: Connection, *, entered: bool = True, scope: Scope | None = None) -> pd.DataFrame:
    """Studies in the long layout, one row per value (a study without values: one row).

    With ``entered`` the value and unit are as entered (the CSV layout);
    otherwise they are in the catalogue unit.

    Columns: person, study_date (ISO text), modality, site, measure, unit as
    text (None when empty); height_cm, weight_kg, value as float64 (NaN when
    empty).  The rows are read in batches into integer codes and float arrays,
    so each distinct text is one Python string shared by all its rows (a
    cohort's millions of values cost a few machine words each, not a tuple of
    objects each).
    """
    value = Measurement.entered_value if entered else Measurement.value
    unit = Measurement.entered_unit if entered else Measurement.unit
    stmt = (
        select(
            Person.code,
            # Read as the driver gives it (ISO text on SQLite, a date on PostgreSQL), once per date.
            type_coerce(Study.study_date, String),
            Study.modality,
            Study.site,
            Study.height_cm,
            Study.weight_kg,
            Measurement.measure_code,
            value,
            unit,
        )
        .join(Person, Study.person_id == Person.id)
        .outerjoin(Measurement, Measurement.study_id == Study.id)
        .where(Study.removed_at.is_(None), Person.removed_at.is_(None))
        .order_by(Person.code, Study.study_date, Study.modality, Measurement.measure_code)
    )
    stmt = _in_scope(stmt, scope, Person.family_id)
    return _typed_frame(conn, stmt, _STUDY_TEXT, _STUDY_NUMBERS)


_STUDY_TEXT = ["person", "study_date", "modality", "site", "measure", "unit"]
_STUDY_NUMBERS = ["height_cm", "weight_kg", "value"]
_STUDY_ORDER = ["person", "study_date", "modality", "site", "height_cm", "weight_kg", "measure", "value", "unit"]
_BATCH = 50_000


def _typed_frame(conn: Connection, stmt, text: list[str], numbers: list[str]) -> pd.DataFrame:
    """Run ``stmt`` (columns in ``_STUDY_ORDER``) batch by batch into text codes and float arrays."""
    position = {c: i for i, c in enumerate(_STUDY_ORDER)}
    codes: dict[str, list[np.ndarray]] = {c: [] for c in text}
    seen: dict[str, dict] = {c: {} for c in text}  # distinct value -> code, per text column
    floats: dict[str, list[np.ndarray]] = {c: [] for c in numbers}
    # PostgreSQL: a server-side cursor, so that the client holds one batch, not the whole result
    # (a client-side cursor took the peak from 1.1 to 1.9 GB for 3.2 million rows). A cursor makes the planner
    # favour a fast start (cursor_tuple_fraction 0.1), which was far slower for the whole ordered
    # join; the setting says the whole result is wanted (SET LOCAL: this transaction only).
    # SQLite reads row by row in either case.
    if conn.dialect.name == "postgresql":
        conn.exec_driver_sql("SET LOCAL cursor_tuple_fraction = 1.0")
        stmt = stmt.execution_options(yield_per=_BATCH)  # this statement only
    with gc_paused():  # millions of row tuples, no cycles (see tracker.gcpause)
        result = conn.execute(stmt)
        for batch in result.partitions(_BATCH):
            columns = list(zip(*batch))
            for c in text:
                local, distinct = pd.factorize(np.array(columns[position[c]], dtype=object))
                book = seen[c]
                to_global = np.array([book.setdefault(v, len(book)) for v in distinct] + [-1], dtype=np.int64)
                codes[c].append(to_global[local])  # local -1 (NULL) takes the last entry: -1
            for c in numbers:
                floats[c].append(np.array(columns[position[c]], dtype=float))
    out = {}
    for c in text:
        book = seen[c]
        if c == "study_date":  # ISO text whatever the driver returned
            distinct = [v if isinstance(v, str) else v.isoformat() for v in book]
        else:
            distinct = list(book)
        lookup = np.array(distinct + [None], dtype=object)
        taken = np.concatenate(codes[c]) if codes[c] else np.zeros(0, dtype=np.int64)
        out[c] = lookup[taken]  # -1 -> None
    for c in numbers:
        out[c] = np.concatenate(floats[c]) if floats[c] else np.zeros(0, dtype=float)
    return pd.DataFrame({c: pd.Series(out[c], dtype=object if c in text else float) for c in _STUDY_ORDER})


def load_measures(conn: Connection) -> pd.DataFrame:
    stmt = select(
        Measure.code,
        Measure.label,
        Measure.modality,
        Measure.unit,
        Measure.plausible_min,
        Measure.plausible_max,
        Measure.range_source,
        Measure.derived,
        Measure.loinc,
    ).order_by(Measure.modality, Measure.code)
    cols = ["code", "label", "modality", "unit", "plausible_min", "plausible_max",
            "range_source", "derived", "loinc"]  # fmt: skip
    df = _frame(conn, stmt, cols)
    df["plausible_min"] = df["plausible_min"].astype(float)
    df["plausible_max"] = df["plausible_max"].astype(float)
    df["derived"] = df["derived"].astype(bool)
    return df


# --------------------------------------------------------------------------- the contact log (0012)

_via = aliased(Person)


def _contact_rows(conn: Connection, scope: Scope | None):
    stmt = (
        select(ContactEvent.id, Person.code, ContactEvent.event_date, ContactEvent.channel, ContactEvent.by_role,
               _via.code, ContactEvent.outcome, ContactEvent.later_date, ContactEvent.notes, ContactEvent.source,
               ContactEvent.entered_at, ContactEvent.entered_by)
        .join(Person, ContactEvent.person_id == Person.id)
        .outerjoin(_via, ContactEvent.via_person_id == _via.id)
        .where(Person.removed_at.is_(None))
        .order_by(Person.code, ContactEvent.id)
    )  # fmt: skip
    stmt = _in_scope(stmt, scope, Person.family_id)
    cols = ["id", "person", "event_date", "channel", "by_role", "via", "outcome", "later_date", "notes", "source",
            "entered_at", "entered_by"]  # fmt: skip
    return [dict(zip(cols, r)) for r in conn.execute(stmt).all()]


def _wish_rows(conn: Connection, scope: Scope | None):
    stmt = (
        select(ContactWish.id, Person.code, ContactWish.wish, _via.code, ContactWish.recorded_date,
               ContactWish.notes, ContactWish.ended_date, ContactWish.ended_by, ContactWish.entered_at,
               ContactWish.entered_by)
        .join(Person, ContactWish.person_id == Person.id)
        .outerjoin(_via, ContactWish.via_person_id == _via.id)
        .where(Person.removed_at.is_(None))
        .order_by(Person.code, ContactWish.id)
    )  # fmt: skip
    stmt = _in_scope(stmt, scope, Person.family_id)
    cols = ["id", "person", "wish", "via", "recorded_date", "notes", "ended_date", "ended_by", "entered_at",
            "entered_by"]  # fmt: skip
    return [dict(zip(cols, r)) for r in conn.execute(stmt).all()]


def contact_states(conn: Connection, scope: Scope | None = None, as_of: dt.date | None = None) -> dict:
    """Person code -> :class:`tracker.domain.contacts.ContactState` for everyone in scope with an event or wish,
    as the log stood on ``as_of`` (default: everything recorded)."""
    from tracker.domain.contacts import derive_states

    return derive_states(_contact_rows(conn, scope), _wish_rows(conn, scope), as_of)


def _dated_frame(rows: list[dict], cols: list[str], dates: tuple[str, ...], times: tuple[str, ...] = ()) -> pd.DataFrame:
    df = pd.DataFrame([[r[c] for c in cols] for r in rows], columns=cols, dtype=object)
    for c in dates:
        df[c] = _iso(df[c])
    for c in times:
        df[c] = df[c].map(lambda t: t.isoformat() + "Z" if t is not None else None).astype(object)
    return df


CONTACT_EVENT_COLUMNS = ["person", "event_date", "channel", "by_role", "via", "outcome", "later_date", "notes",
                         "source", "entered_at", "entered_by"]  # fmt: skip


def load_contact_events(conn: Connection, scope: Scope | None = None) -> pd.DataFrame:
    """The contact log, oldest first per person (dates ISO text, ``entered_at`` ISO 8601 UTC with Z)."""
    from tracker.domain.contacts import event_order

    rows = sorted(_contact_rows(conn, scope), key=lambda r: (r["person"], event_order(r)))
    return _dated_frame(rows, CONTACT_EVENT_COLUMNS, ("event_date", "later_date"), ("entered_at",))


CONTACT_WISH_COLUMNS = ["person", "wish", "via", "recorded_date", "notes", "ended_date", "ended_by", "entered_at",
                        "entered_by"]  # fmt: skip


def load_contact_wishes(conn: Connection, scope: Scope | None = None) -> pd.DataFrame:
    """Every wish, open and ended, oldest first per person."""
    return _dated_frame(_wish_rows(conn, scope), CONTACT_WISH_COLUMNS, ("recorded_date", "ended_date"),
                        ("entered_at",))  # fmt: skip


LETTER_COLUMNS = ["person", "kind", "template", "template_version", "sent_date", "sent_to", "via", "reply_date",
                  "notes", "entered_at", "entered_by"]  # fmt: skip


def load_letters(conn: Connection, scope: Scope | None = None) -> pd.DataFrame:
    stmt = (
        select(Person.code, LetterSent.kind, LetterSent.template, LetterSent.template_version, LetterSent.sent_date,
               LetterSent.sent_to, _via.code, LetterSent.reply_date, LetterSent.notes, LetterSent.entered_at,
               LetterSent.entered_by)
        .join(Person, LetterSent.person_id == Person.id)
        .outerjoin(_via, LetterSent.via_person_id == _via.id)
        .where(Person.removed_at.is_(None))
        .order_by(Person.code, LetterSent.sent_date, LetterSent.id)
    )  # fmt: skip
    stmt = _in_scope(stmt, scope, Person.family_id)
    rows = [dict(zip(LETTER_COLUMNS, r)) for r in conn.execute(stmt).all()]
    return _dated_frame(rows, LETTER_COLUMNS, ("sent_date", "reply_date"), ("entered_at",))


EXTERNAL_COLUMNS = ["person", "kind", "result_date", "centre", "variant", "result", "document_ref", "notes",
                    "entered_at", "entered_by"]  # fmt: skip


def load_external_results(conn: Connection, scope: Scope | None = None) -> pd.DataFrame:
    """Genetic tests and screenings at other centres; ``variant`` as ``transcript:hgvs_c``."""
    stmt = (
        select(Person.code, ExternalResult.kind, ExternalResult.result_date, ExternalResult.centre,
               Variant.transcript, Variant.hgvs_c, ExternalResult.result, ExternalResult.document_ref,
               ExternalResult.notes, ExternalResult.entered_at, ExternalResult.entered_by)
        .join(Person, ExternalResult.person_id == Person.id)
        .outerjoin(Variant, ExternalResult.variant_id == Variant.id)
        .where(Person.removed_at.is_(None))
        .order_by(Person.code, ExternalResult.result_date, ExternalResult.kind)
    )  # fmt: skip
    stmt = _in_scope(stmt, scope, Person.family_id)
    rows = []
    for r in conn.execute(stmt).all():
        p, kind, day, centre, tx, c, result, ref, notes, at, by = r
        rows.append(dict(person=p, kind=kind, result_date=day, centre=centre,
                         variant=f"{tx}:{c}" if tx is not None else None, result=result, document_ref=ref,
                         notes=notes, entered_at=at, entered_by=by))  # fmt: skip
    return _dated_frame(rows, EXTERNAL_COLUMNS, ("result_date",), ("entered_at",))


BOOKING_COLUMNS = ["person", "visit_date", "purpose", "notes", "entered_at", "entered_by", "cancelled_date",
                   "cancelled_by"]  # fmt: skip


def load_bookings(conn: Connection, scope: Scope | None = None) -> pd.DataFrame:
    stmt = (
        select(Person.code, Booking.visit_date, Booking.purpose, Booking.notes, Booking.entered_at,
               Booking.entered_by, Booking.cancelled_date, Booking.cancelled_by)
        .join(Person, Booking.person_id == Person.id)
        .where(Person.removed_at.is_(None))
        .order_by(Person.code, Booking.visit_date, Booking.id)
    )  # fmt: skip
    stmt = _in_scope(stmt, scope, Person.family_id)
    rows = [dict(zip(BOOKING_COLUMNS, r)) for r in conn.execute(stmt).all()]
    return _dated_frame(rows, BOOKING_COLUMNS, ("visit_date", "cancelled_date"), ("entered_at",))


DISCHARGE_COLUMNS = ["person", "discharge_date", "variant", "acmg_class", "classified_on", "advice", "notes",
                     "entered_at", "entered_by"]  # fmt: skip


def load_discharges(conn: Connection, scope: Scope | None = None) -> pd.DataFrame:
    stmt = (
        select(Person.code, Discharge.discharge_date, Variant.transcript, Variant.hgvs_c, Discharge.acmg_class,
               Discharge.classified_on, Discharge.advice, Discharge.notes, Discharge.entered_at,
               Discharge.entered_by)
        .join(Person, Discharge.person_id == Person.id)
        .join(Variant, Discharge.variant_id == Variant.id)
        .where(Person.removed_at.is_(None))
        .order_by(Person.code, Discharge.discharge_date)
    )  # fmt: skip
    stmt = _in_scope(stmt, scope, Person.family_id)
    rows = []
    for p, day, tx, c, cls, on, advice, notes, at, by in conn.execute(stmt).all():
        rows.append(dict(person=p, discharge_date=day, variant=f"{tx}:{c}", acmg_class=cls, classified_on=on,
                         advice=advice, notes=notes, entered_at=at, entered_by=by))  # fmt: skip
    return _dated_frame(rows, DISCHARGE_COLUMNS, ("discharge_date", "classified_on"), ("entered_at",))


LOADERS = {
    "families": load_families,
    "people": load_people,
    "variants": load_variants,
    "genetic-results": load_genetic_results,
    "assessments": load_assessments,
    "studies": load_studies,
    # The contact log (revision 0012); the export writes the entered events only (tracker.io.export.contact_frame).
    "contact-events": load_contact_events,
    "contact-wishes": load_contact_wishes,
    "letters-sent": load_letters,
    "external-results": load_external_results,
    "bookings": load_bookings,
    "discharges": load_discharges,
}
