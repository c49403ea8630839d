"""Reading the store into DataFrames that use codes, not row ids.

Each ``load_*`` function returns the records of one kind in the clean form of
its CSV layout (see :mod:`tracker.io.layouts`): the same columns, dates as ISO
text, numbers as floats, yes/no as booleans, empty as None/NaN.  The importer
compares incoming rows with these frames, the exporter writes them out, and
the engines read them.
"""

from __future__ import annotations

import pandas as pd
from sqlalchemy import Connection, select
from sqlalchemy.orm import aliased

from tracker.io.columns import partial_from_storage
from tracker.store.models import (
    Assessment,
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


def load_families(conn: Connection) -> pd.DataFrame:
    stmt = select(Family.code, Family.condition, Family.notes).order_by(Family.code)
    return _frame(conn, stmt, ["family", "condition", "notes"])


def load_people(conn: Connection) -> pd.DataFrame:
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
            Person.contact_status,
            Person.contact_status_date,
            Person.notes,
        )
        .join(Family, Person.family_id == Family.id)
        .outerjoin(mother, Person.mother_id == mother.id)
        .outerjoin(father, Person.father_id == father.id)
        .outerjoin(twin, Person.twin_of_id == twin.id)
        .order_by(Person.code)
    )
    cols = [
        "person", "family", "given_name", "family_name", "sex_at_birth", "gender_identity",
        "_birth", "_birth_p", "vital_status", "_death", "_death_p", "mother", "father",
        "placeholder", "proband", "twin_of", "twin_type", "adoption", "contact_status",
        "contact_status_date", "notes",
    ]  # fmt: skip
    df = _frame(conn, stmt, cols)
    df["birth_date"] = [partial_from_storage(d, p) for d, p in zip(df["_birth"], df["_birth_p"])]
    df["death_date"] = [partial_from_storage(d, p) for d, p in zip(df["_death"], df["_death_p"])]
    df["contact_status_date"] = _iso(df["contact_status_date"])
    df["placeholder"] = df["placeholder"].astype(bool)
    df["proband"] = df["proband"].astype(bool)
    df = df.drop(columns=["_birth", "_birth_p", "_death", "_death_p"])
    return df[_PEOPLE_ORDER]


_PEOPLE_ORDER = [
    "person", "family", "given_name", "family_name", "sex_at_birth", "gender_identity",
    "birth_date", "vital_status", "death_date", "mother", "father", "placeholder", "proband",
    "twin_of", "twin_type", "adoption", "contact_status", "contact_status_date", "notes",
]  # fmt: skip


def load_variants(conn: Connection) -> pd.DataFrame:
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
    cols = ["family", "gene", "transcript", "hgvs_c", "hgvs_p", "zygosity", "acmg_class",
            "classified_on", "reason"]  # fmt: skip
    df = _frame(conn, stmt, cols)
    df["classified_on"] = _iso(df["classified_on"])
    return df


def load_genetic_results(conn: Connection) -> pd.DataFrame:
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
        .order_by(Person.code, GeneticResult.test_date, GeneticResult.test_type)
    )
    cols = ["person", "test_date", "test_type", "_tx", "_c", "result", "lab", "report_reference"]
    df = _frame(conn, stmt, cols)
    df["test_date"] = _iso(df["test_date"])
    df["variant"] = [f"{t}:{c}" if t is not None else None for t, c in zip(df["_tx"], df["_c"])]
    return df[["person", "test_date", "test_type", "variant", "result", "lab", "report_reference"]]


def load_assessments(conn: Connection) -> pd.DataFrame:
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
        )
        .join(Person, Assessment.person_id == Person.id)
        .order_by(Person.code, Assessment.assessment_date)
    )
    cols = ["person", "assessment_date", "affected_status", "symptoms", "competitive_athlete",
            "pregnant", "hypertension", "notes"]  # fmt: skip
    df = _frame(conn, stmt, cols)
    df["assessment_date"] = _iso(df["assessment_date"])
    for c in ("competitive_athlete", "pregnant", "hypertension"):
        df[c] = df[c].astype(bool)
    return df


def load_studies(conn: Connection, *, entered: bool = True) -> pd.DataFrame:
    """Studies in the long layout, one row per value (a study without values: one row).

    With ``entered`` the value and unit are as entered (the CSV layout);
    otherwise they are in the catalogue unit.
    """
    value = Measurement.entered_value if entered else Measurement.value
    unit = Measurement.entered_unit if entered else Measurement.unit
    stmt = (
        select(
            Person.code,
            Study.study_date,
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
        .order_by(Person.code, Study.study_date, Study.modality, Measurement.measure_code)
    )
    cols = ["person", "study_date", "modality", "site", "height_cm", "weight_kg", "measure",
            "value", "unit"]  # fmt: skip
    df = _frame(conn, stmt, cols)
    df["study_date"] = _iso(df["study_date"])
    for c in ("height_cm", "weight_kg", "value"):
        df[c] = pd.to_numeric(df[c], errors="coerce").astype(float)
    return df


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


LOADERS = {
    "families": load_families,
    "people": load_people,
    "variants": load_variants,
    "genetic-results": load_genetic_results,
    "assessments": load_assessments,
    "studies": load_studies,
}
