"""The CSV layouts: for each kind of record, its columns and its key.

The layouts are documented for users in docs/data-layouts.md; a test checks
that the document and this module list the same columns.
"""

from __future__ import annotations

from dataclasses import dataclass, replace

from tracker.domain import vocabulary as V
from tracker.io import kinds
from tracker.io.columns import (
    CODE_RE,
    GENE_RE,
    HGVS_C_RE,
    HGVS_P_RE,
    MAX_TEXT,
    TRANSCRIPT_RE,
    Column,
)


@dataclass(frozen=True)
class Layout:
    kind: str
    file_name: str
    columns: tuple[Column, ...]
    key: tuple[str, ...]

    @property
    def names(self) -> list[str]:
        return [c.name for c in self.columns]


FAMILIES = Layout(
    "families",
    "families.csv",
    (
        Column("family", "code", required=True),
        Column("condition", "text", required=True),
        Column("notes", "text"),
    ),
    key=("family",),
)

PEOPLE = Layout(
    "people",
    "people.csv",
    (
        Column("person", "code", required=True),
        Column("family", "code", required=True),
        Column("given_name", "text", private=True),
        Column("family_name", "text", private=True),
        Column("sex_at_birth", "choice", required=True, choices=V.SEX_AT_BIRTH),
        Column("gender_identity", "text"),
        Column("birth_date", "partial_date", private=True),
        Column("vital_status", "choice", required=True, choices=V.VITAL_STATUS),
        Column("death_date", "partial_date", private=True),
        Column("mother", "code"),
        Column("father", "code"),
        Column("placeholder", "yesno"),
        Column("proband", "yesno"),
        Column("twin_of", "code"),
        Column("twin_type", "choice", choices=V.TWIN_TYPE),
        Column("adoption", "choice", choices=V.ADOPTION),
        Column("contact_status", "choice", choices=V.CONTACT_STATUS),
        Column("contact_status_date", "date"),
        Column("notes", "text"),
        # Added with schema revision 0006; may be left out of older files (every cell is then empty).
        Column("death_cause", "choice", choices=V.DEATH_CAUSES, header_optional=True),
        Column("death_age", "years", header_optional=True),
        Column("diagnosis_age", "years", header_optional=True),
        Column("diagnosis_place", "text", header_optional=True),
        Column("icd_date", "partial_date", header_optional=True),
        Column("pacemaker_date", "partial_date", header_optional=True),
        # Added with schema revision 0009: an identifier from another system (e.g. the hospital number),
        # unique per person, private like the names; it matches imported DICOM reports to the person.
        Column("external_id", "text", max_length=64, private=True, header_optional=True),
    ),
    key=("person",),
)

VARIANTS = Layout(
    "variants",
    "variants.csv",
    (
        Column("family", "code", required=True),
        Column("gene", "regex", required=True, pattern=GENE_RE, what="an HGNC gene symbol"),
        Column(
            "transcript",
            "regex",
            required=True,
            pattern=TRANSCRIPT_RE,
            what="a versioned transcript accession (e.g. NM_000256.3)",
        ),
        Column(
            "hgvs_c",
            "regex",
            required=True,
            pattern=HGVS_C_RE,
            what="an HGVS coding change (e.g. c.1504C>T)",
        ),
        Column(
            "hgvs_p",
            "regex",
            pattern=HGVS_P_RE,
            what="an HGVS protein change with three-letter amino acids (e.g. p.(Arg502Trp))",
        ),
        Column("zygosity", "choice", required=True, choices=V.ZYGOSITY),
        Column("acmg_class", "choice", required=True, choices=V.ACMG_CLASSES),
        Column("classified_on", "date", required=True),
        Column("reason", "text"),
    ),
    key=("family", "transcript", "hgvs_c", "classified_on"),
)

GENETIC_RESULTS = Layout(
    "genetic-results",
    "genetic_results.csv",
    (
        Column("person", "code", required=True),
        Column("test_date", "date", required=True),
        Column("test_type", "choice", required=True, choices=V.TEST_TYPES),
        Column(
            "variant",
            "regex",
            pattern=rf"(?:{TRANSCRIPT_RE}):{HGVS_C_RE}",
            what="a variant as transcript:c.change (e.g. NM_000256.3:c.1504C>T)",
        ),
        Column("result", "choice", required=True, choices=V.TEST_RESULTS),
        Column("lab", "text"),
        Column("report_reference", "text"),
    ),
    key=("person", "test_date", "test_type", "variant"),
)

ASSESSMENTS = Layout(
    "assessments",
    "assessments.csv",
    (
        Column("person", "code", required=True),
        Column("assessment_date", "date", required=True),
        Column("affected_status", "choice", required=True, choices=V.AFFECTED_STATUS),
        Column("symptoms", "text"),
        Column("competitive_athlete", "yesno"),
        Column("pregnant", "yesno"),
        Column("hypertension", "yesno"),
        Column("notes", "text"),
        # HCM Risk-SCD answers (yes / no / empty = not recorded); may be left out of older files.
        Column("family_history_scd", "answer", header_optional=True),
        Column("nsvt", "answer", header_optional=True),
        Column("unexplained_syncope", "answer", header_optional=True),
        Column("prior_arrest_or_sustained_vt", "answer", header_optional=True),
        Column("metabolic_or_syndromic", "answer", header_optional=True),
        # Atrial fibrillation documented at or before this assessment (yes / no / empty; revision 0006).
        Column("atrial_fibrillation", "answer", header_optional=True),
    ),
    key=("person", "assessment_date"),
)

STUDIES = Layout(
    "studies",
    "studies.csv",
    (
        Column("person", "code", required=True),
        Column("study_date", "date", required=True),
        Column("modality", "choice", required=True, choices=V.MODALITIES),
        Column("site", "text"),
        Column("height_cm", "number", positive=True),
        Column("weight_kg", "number", positive=True),
        Column("measure", "code"),
        Column("value", "number"),
        Column("unit", "text"),
    ),
    key=("person", "study_date", "modality", "measure"),
)

# The contact log and what goes with it (schema revision 0012; docs/contacts-and-letters.md).
_VARIANT_KEY = Column("variant", "regex", pattern=rf"(?:{TRANSCRIPT_RE}):{HGVS_C_RE}",
                      what="a variant as transcript:c.change (e.g. NM_000256.3:c.1504C>T)")  # fmt: skip

CONTACT_EVENTS = Layout(
    "contact-events",
    "contact_events.csv",
    (
        Column("person", "code", required=True),
        Column("event_date", "date", required=True),
        Column("channel", "choice", required=True, choices=V.CONTACT_CHANNELS),
        Column("by_role", "choice", choices=V.CONTACT_ROLES),
        Column("via", "code"),
        Column("outcome", "choice", required=True, choices=V.CONTACT_OUTCOMES_ENTERED),
        Column("later_date", "date"),
        Column("notes", "text"),
    ),
    key=("person", "event_date", "channel", "by_role", "via", "outcome", "later_date", "notes"),
)

CONTACT_WISHES = Layout(
    "contact-wishes",
    "contact_wishes.csv",
    (
        Column("person", "code", required=True),
        Column("wish", "choice", required=True, choices=V.CONTACT_WISHES),
        Column("via", "code"),
        Column("recorded_date", "date", required=True),
        Column("notes", "text"),
        Column("ended_date", "date"),
    ),
    key=("person", "wish", "recorded_date"),
)

LETTERS_SENT = Layout(
    "letters-sent",
    "letters_sent.csv",
    (
        Column("person", "code", required=True),
        Column("kind", "choice", required=True, choices=V.LETTER_KINDS),
        Column("template", "text", required=True),
        Column("template_version", "text", required=True),
        Column("sent_date", "date", required=True),
        Column("sent_to", "choice", required=True, choices=V.LETTER_SENT_TO),
        Column("via", "code"),
        Column("reply_date", "date"),
        Column("notes", "text"),
    ),
    key=("person", "kind", "sent_date"),
)

EXTERNAL_RESULTS = Layout(
    "external-results",
    "external_results.csv",
    (
        Column("person", "code", required=True),
        Column("kind", "choice", required=True, choices=V.EXTERNAL_RESULT_KINDS),
        Column("result_date", "date", required=True),
        Column("centre", "text", required=True),
        _VARIANT_KEY,
        Column("result", "choice", required=True, choices=V.TEST_RESULTS + V.EXTERNAL_PHENOTYPES),
        Column("document_ref", "text"),
        Column("notes", "text"),
    ),
    key=("person", "kind", "result_date"),
)

BOOKINGS = Layout(
    "bookings",
    "bookings.csv",
    (
        Column("person", "code", required=True),
        Column("visit_date", "date", required=True),
        Column("purpose", "text", required=True),
        Column("notes", "text"),
        Column("cancelled_date", "date"),
    ),
    key=("person", "visit_date", "purpose"),
)

DISCHARGES = Layout(
    "discharges",
    "discharges.csv",
    (
        Column("person", "code", required=True),
        Column("discharge_date", "date", required=True),
        _VARIANT_KEY,
        Column("acmg_class", "choice", required=True, choices=V.ACMG_CLASSES),
        Column("classified_on", "date", required=True),
        Column("advice", "text", required=True),
        Column("notes", "text"),
    ),
    key=("person", "discharge_date"),
)

# Where each text-like cell is stored ("table.column"): the store's column length is the cell's limit
# (one source of truth, so a cell the store cannot hold is refused by the check, on every backend).
# Text columns without a length keep the paste-error limit MAX_TEXT.
STORED_AS = {
    "families": {"family": "family.code", "condition": "family.condition", "notes": "family.notes"},
    "people": {
        "person": "person.code", "family": "family.code", "given_name": "person.given_name",
        "family_name": "person.family_name", "sex_at_birth": "person.sex_at_birth",
        "gender_identity": "person.gender_identity", "vital_status": "person.vital_status",
        "mother": "person.code", "father": "person.code", "twin_of": "person.code", "twin_type": "person.twin_type",
        "adoption": "person.adoption", "contact_status": "person.contact_status", "notes": "person.notes",
        "death_cause": "person.death_cause", "diagnosis_place": "person.diagnosis_place",
        "external_id": "person.external_id",
    },
    "variants": {
        "family": "family.code", "gene": "variant.gene", "transcript": "variant.transcript",
        "hgvs_c": "variant.hgvs_c", "hgvs_p": "variant.hgvs_p", "zygosity": "variant.zygosity",
        "acmg_class": "variant_classification.acmg_class", "reason": "variant_classification.reason",
    },
    "genetic-results": {
        "person": "person.code", "variant": ("variant.transcript", "variant.hgvs_c"),
        "test_type": "genetic_result.test_type", "result": "genetic_result.result", "lab": "genetic_result.lab",
        "report_reference": "genetic_result.report_reference",
    },
    "assessments": {
        "person": "person.code", "affected_status": "assessment.affected_status", "symptoms": "assessment.symptoms",
        "notes": "assessment.notes",
    },
    "studies": {
        "person": "person.code", "modality": "study.modality", "site": "study.site",
        "measure": "measurement.measure_code", "unit": "measurement.entered_unit",
    },
    "contact-events": {"person": "person.code", "channel": "contact_event.channel", "by_role": "contact_event.by_role",
                       "via": "person.code", "outcome": "contact_event.outcome", "notes": "contact_event.notes"},
    "contact-wishes": {"person": "person.code", "wish": "contact_wish.wish", "via": "person.code",
                       "notes": "contact_wish.notes"},
    "letters-sent": {"person": "person.code", "kind": "letter_sent.kind", "template": "letter_sent.template",
                     "template_version": "letter_sent.template_version", "sent_to": "letter_sent.sent_to",
                     "via": "person.code", "notes": "letter_sent.notes"},
    "external-results": {"person": "person.code", "kind": "external_result.kind", "centre": "external_result.centre",
                         "variant": ("variant.transcript", "variant.hgvs_c"), "result": "external_result.result",
                         "document_ref": "external_result.document_ref", "notes": "external_result.notes"},
    "bookings": {"person": "person.code", "purpose": "booking.purpose", "notes": "booking.notes"},
    "discharges": {"person": "person.code", "variant": ("variant.transcript", "variant.hgvs_c"),
                   "acmg_class": "discharge.acmg_class", "advice": "discharge.advice", "notes": "discharge.notes"},
}  # fmt: skip
# Kinds of cell held as text (the others are dates, numbers and yes/no, held in typed columns).
TEXT_KINDS = ("text", "code", "regex", "choice")


def stored_length(where: str | tuple[str, ...]) -> int | None:
    """The store's length limit for a "table.column" (a tuple: the parts joined by one ':')."""
    from tracker.store.models import Base

    if isinstance(where, tuple):
        parts = [stored_length(w) for w in where]
        return None if None in parts else sum(parts) + len(parts) - 1
    table, column = where.split(".")
    return getattr(Base.metadata.tables[table].c[column].type, "length", None)


def _with_store_limits(layout: Layout) -> Layout:
    cols = []
    for col in layout.columns:
        where = STORED_AS[layout.kind].get(col.name)
        if col.kind in TEXT_KINDS and where is None:
            raise AssertionError(f"{layout.kind}.{col.name}: no store column named in STORED_AS")
        limit = stored_length(where) if where is not None else None
        cols.append(replace(col, max_length=min(limit or MAX_TEXT, MAX_TEXT)))
    return replace(layout, columns=tuple(cols))


# The records of a family (the layouts FHIR Bundles, the synthetic cohort and the store checks map).
RECORD_KINDS = kinds.RECORD_KINDS
# The contact log's layouts (revision 0012): the service checks a form field as the importer checks a cell.
CONTACT_LAYOUTS = {
    layout.kind: _with_store_limits(layout)
    for layout in (CONTACT_EVENTS, CONTACT_WISHES, LETTERS_SENT, EXTERNAL_RESULTS, BOOKINGS, DISCHARGES)
}
CONTACT_EVENTS, CONTACT_WISHES, LETTERS_SENT, EXTERNAL_RESULTS, BOOKINGS, DISCHARGES = CONTACT_LAYOUTS.values()
# The order a folder's contact-log files are read in, after the people: letters before wishes (a letter
# sent before a later wish stays valid), results before discharges (a discharge needs the negative result).
CONTACT_IMPORT_ORDER = kinds.CONTACT_IMPORT_ORDER
# Every layout: `tracker import all` / `tracker export all` read and write each of them.
LAYOUTS = {
    **{layout.kind: _with_store_limits(layout)
       for layout in (FAMILIES, PEOPLE, VARIANTS, GENETIC_RESULTS, ASSESSMENTS, STUDIES)},
    **CONTACT_LAYOUTS,
}  # fmt: skip
FAMILIES, PEOPLE, VARIANTS, GENETIC_RESULTS, ASSESSMENTS, STUDIES = (LAYOUTS[k] for k in RECORD_KINDS)
IMPORT_ORDER = RECORD_KINDS + CONTACT_IMPORT_ORDER
CONTACT_KINDS = frozenset(CONTACT_LAYOUTS)
if set(LAYOUTS) != set(kinds.IMPORT_ORDER):  # the light list the command line names the kinds with
    raise AssertionError(f"tracker.io.kinds.IMPORT_ORDER {kinds.IMPORT_ORDER} != the layouts {sorted(LAYOUTS)}")

__all__ = ["LAYOUTS", "IMPORT_ORDER", "RECORD_KINDS", "CONTACT_KINDS", "CONTACT_LAYOUTS", "Layout", "CODE_RE"]
