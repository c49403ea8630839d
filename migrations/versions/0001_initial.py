"""Initial schema: families, people, assessments, variants and their class history,
genetic results, studies with measurements, the measure catalogue, import runs.

Revision ID: 0001
Revises:
Create Date: 2026-12-01
"""

import sqlalchemy as sa
from alembic import op

revision = "0001"
down_revision = None
branch_labels = None
depends_on = None

# Plausible ranges are data-entry checks, deliberately wider than any normal
# limit: a value outside them is almost certainly a typing or unit error.
# They are engineering defaults (common practice, from memory, verify), taken
# from the project's data-quality notes (standards.md section 8 [M]) and
# widened at the lower end for infants where noted.
_DQ = "engineering default for data entry (common practice, from memory, verify)"
_DQ_CHILD = _DQ + "; lower end widened for infants"

# code, label, modality, unit, min, max, range source, LOINC (only codes listed
# in the project's terminology notes, standards.md section 4a [V]).
CATALOGUE = [
    ("mwt_echo", "Maximal LV wall thickness (any segment)", "echo", "mm", 2, 60, _DQ_CHILD, None),
    ("ivsd", "Interventricular septum, end-diastole", "echo", "mm", 2, 60, _DQ_CHILD, "79969-2"),
    ("lvpwd", "LV posterior wall, end-diastole", "echo", "mm", 2, 60, _DQ_CHILD, None),
    ("lvidd", "LV internal diameter, end-diastole", "echo", "mm", 10, 100, _DQ_CHILD, "80007-8"),
    ("lvids", "LV internal diameter, end-systole", "echo", "mm", 5, 100, _DQ_CHILD, "80011-0"),
    ("lvef_echo", "LV ejection fraction", "echo", "%", 5, 95, _DQ, "79991-6"),
    ("la_diam", "Left atrial anteroposterior diameter", "echo", "mm", 8, 90, _DQ_CHILD, "79975-9"),
    ("lavi", "Left atrial volume index", "echo", "mL/m2", 5, 200, _DQ, "79984-1"),
    ("lvot_rest", "LVOT peak instantaneous gradient at rest", "echo", "mmHg", 0, 250, _DQ, None),
    (
        "lvot_provoked",
        "LVOT peak instantaneous gradient, provoked (Valsalva or standing)",
        "echo",
        "mmHg",
        0,
        250,
        _DQ,
        None,
    ),
    ("mv_e", "Mitral inflow peak E velocity", "echo", "cm/s", 10, 250, _DQ, "80070-6"),
    ("mv_a", "Mitral inflow peak A velocity", "echo", "cm/s", 10, 250, _DQ, "80066-4"),
    ("e_prime_septal", "Septal mitral annular e' velocity", "echo", "cm/s", 1, 30, _DQ, "79911-4"),
    ("e_prime_lateral", "Lateral mitral annular e' velocity", "echo", "cm/s", 1, 30, _DQ, "80054-0"),
    ("tr_vmax", "Peak tricuspid regurgitation velocity", "echo", "m/s", 0.5, 7, _DQ, None),
    ("gls", "Global longitudinal strain (negative = shortening)", "echo", "%", -40, 5, _DQ, None),
    ("mwt_cmr", "Maximal LV wall thickness (any segment)", "cmr", "mm", 2, 60, _DQ_CHILD, None),
    ("lvmi_cmr", "LV mass index", "cmr", "g/m2", 10, 300, _DQ, None),
    ("lvef_cmr", "LV ejection fraction", "cmr", "%", 5, 95, _DQ, "8811-2"),
    ("lge_pct", "Late gadolinium enhancement extent, % of LV mass", "cmr", "%", 0, 100, _DQ, None),
    ("ecv", "Extracellular volume fraction", "cmr", "%", 10, 80, _DQ, None),
]

_SEX = "sex_at_birth IN ('female','male','unknown')"
_CONTACT = "contact_status IN ('not_contacted','contactable','declined','lost_to_follow_up')"
_ACMG = (
    "acmg_class IN ('pathogenic','likely_pathogenic','uncertain_significance',"
    "'likely_benign','benign')"
)
_MODALITY = "modality IN ('echo','cmr','ecg','clinic')"


def upgrade() -> None:
    op.create_table(
        "family",
        sa.Column("id", sa.Integer, nullable=False),
        sa.Column("code", sa.String(40), nullable=False),
        sa.Column("condition", sa.String(200), nullable=False),
        sa.Column("notes", sa.Text),
        sa.PrimaryKeyConstraint("id", name="pk_family"),
        sa.UniqueConstraint("code", name="uq_family_code"),
    )
    op.create_table(
        "person",
        sa.Column("id", sa.Integer, nullable=False),
        sa.Column("code", sa.String(40), nullable=False),
        sa.Column("family_id", sa.Integer, nullable=False),
        sa.Column("given_name", sa.String(200)),
        sa.Column("family_name", sa.String(200)),
        sa.Column("sex_at_birth", sa.String(10), nullable=False),
        sa.Column("gender_identity", sa.String(100)),
        sa.Column("birth_date", sa.Date),
        sa.Column("birth_date_precision", sa.String(4)),
        sa.Column("vital_status", sa.String(10), nullable=False),
        sa.Column("death_date", sa.Date),
        sa.Column("death_date_precision", sa.String(4)),
        sa.Column("mother_id", sa.Integer),
        sa.Column("father_id", sa.Integer),
        sa.Column("is_placeholder", sa.Boolean, nullable=False),
        sa.Column("is_proband", sa.Boolean, nullable=False),
        sa.Column("twin_of_id", sa.Integer),
        sa.Column("twin_type", sa.String(12)),
        sa.Column("adoption", sa.String(3)),
        sa.Column("contact_status", sa.String(20)),
        sa.Column("contact_status_date", sa.Date),
        sa.Column("notes", sa.Text),
        sa.PrimaryKeyConstraint("id", name="pk_person"),
        sa.UniqueConstraint("code", name="uq_person_code"),
        sa.ForeignKeyConstraint(["family_id"], ["family.id"], name="fk_person_family_id_family"),
        sa.ForeignKeyConstraint(["mother_id"], ["person.id"], name="fk_person_mother_id_person"),
        sa.ForeignKeyConstraint(["father_id"], ["person.id"], name="fk_person_father_id_person"),
        sa.ForeignKeyConstraint(["twin_of_id"], ["person.id"], name="fk_person_twin_of_id_person"),
        sa.CheckConstraint(_SEX, name="ck_person_sex_at_birth"),
        sa.CheckConstraint("birth_date_precision IN ('day','year')", name="ck_person_birth_date_precision"),
        sa.CheckConstraint("death_date_precision IN ('day','year')", name="ck_person_death_date_precision"),
        sa.CheckConstraint("vital_status IN ('alive','deceased','unknown')", name="ck_person_vital_status"),
        sa.CheckConstraint("twin_type IN ('monozygotic','dizygotic','unknown')", name="ck_person_twin_type"),
        sa.CheckConstraint("adoption IN ('in','out')", name="ck_person_adoption"),
        sa.CheckConstraint(_CONTACT, name="ck_person_contact_status"),
    )
    op.create_index("ix_person_family_id", "person", ["family_id"])
    op.create_index("ix_person_mother_id", "person", ["mother_id"])
    op.create_index("ix_person_father_id", "person", ["father_id"])

    op.create_table(
        "assessment",
        sa.Column("id", sa.Integer, nullable=False),
        sa.Column("person_id", sa.Integer, nullable=False),
        sa.Column("assessment_date", sa.Date, nullable=False),
        sa.Column("affected_status", sa.String(10), nullable=False),
        sa.Column("symptoms", sa.Text),
        sa.Column("competitive_athlete", sa.Boolean, nullable=False),
        sa.Column("pregnant", sa.Boolean, nullable=False),
        sa.Column("hypertension", sa.Boolean, nullable=False),
        sa.Column("notes", sa.Text),
        sa.PrimaryKeyConstraint("id", name="pk_assessment"),
        sa.ForeignKeyConstraint(["person_id"], ["person.id"], name="fk_assessment_person_id_person"),
        sa.UniqueConstraint("person_id", "assessment_date", name="uq_assessment_person_id"),
        sa.CheckConstraint(
            "affected_status IN ('affected','unaffected','uncertain')",
            name="ck_assessment_affected_status",
        ),
    )
    op.create_table(
        "variant",
        sa.Column("id", sa.Integer, nullable=False),
        sa.Column("family_id", sa.Integer, nullable=False),
        sa.Column("gene", sa.String(20), nullable=False),
        sa.Column("transcript", sa.String(40), nullable=False),
        sa.Column("hgvs_c", sa.String(200), nullable=False),
        sa.Column("hgvs_p", sa.String(200)),
        sa.Column("zygosity", sa.String(24), nullable=False),
        sa.PrimaryKeyConstraint("id", name="pk_variant"),
        sa.ForeignKeyConstraint(["family_id"], ["family.id"], name="fk_variant_family_id_family"),
        sa.UniqueConstraint("family_id", "transcript", "hgvs_c", name="uq_variant_family_id"),
        sa.CheckConstraint(
            "zygosity IN ('heterozygous','homozygous','hemizygous','compound_heterozygous')",
            name="ck_variant_zygosity",
        ),
    )
    op.create_table(
        "variant_classification",
        sa.Column("id", sa.Integer, nullable=False),
        sa.Column("variant_id", sa.Integer, nullable=False),
        sa.Column("classified_on", sa.Date, nullable=False),
        sa.Column("acmg_class", sa.String(24), nullable=False),
        sa.Column("reason", sa.Text),
        sa.PrimaryKeyConstraint("id", name="pk_variant_classification"),
        sa.ForeignKeyConstraint(
            ["variant_id"], ["variant.id"], name="fk_variant_classification_variant_id_variant"
        ),
        sa.UniqueConstraint("variant_id", "classified_on", name="uq_variant_classification_variant_id"),
        sa.CheckConstraint(_ACMG, name="ck_variant_classification_acmg_class"),
    )
    op.create_table(
        "genetic_result",
        sa.Column("id", sa.Integer, nullable=False),
        sa.Column("person_id", sa.Integer, nullable=False),
        sa.Column("variant_id", sa.Integer),
        sa.Column("test_type", sa.String(20), nullable=False),
        sa.Column("result", sa.String(20), nullable=False),
        sa.Column("test_date", sa.Date, nullable=False),
        sa.Column("lab", sa.String(200)),
        sa.Column("report_reference", sa.String(200)),
        sa.PrimaryKeyConstraint("id", name="pk_genetic_result"),
        sa.ForeignKeyConstraint(["person_id"], ["person.id"], name="fk_genetic_result_person_id_person"),
        sa.ForeignKeyConstraint(["variant_id"], ["variant.id"], name="fk_genetic_result_variant_id_variant"),
        sa.UniqueConstraint(
            "person_id", "test_date", "test_type", "variant_id", name="uq_genetic_result_person_id"
        ),
        sa.CheckConstraint("test_type IN ('diagnostic_panel','predictive')", name="ck_genetic_result_test_type"),
        sa.CheckConstraint(
            "result IN ('carrier','non_carrier','inconclusive','no_variant_found')",
            name="ck_genetic_result_result",
        ),
    )
    measure = op.create_table(
        "measure",
        sa.Column("code", sa.String(40), nullable=False),
        sa.Column("label", sa.String(200), nullable=False),
        sa.Column("modality", sa.String(10), nullable=False),
        sa.Column("unit", sa.String(20), nullable=False),
        sa.Column("plausible_min", sa.Float, nullable=False),
        sa.Column("plausible_max", sa.Float, nullable=False),
        sa.Column("range_source", sa.Text, nullable=False),
        sa.Column("derived", sa.Boolean, nullable=False),
        sa.Column("loinc", sa.String(20)),
        sa.PrimaryKeyConstraint("code", name="pk_measure"),
        sa.CheckConstraint(_MODALITY, name="ck_measure_modality"),
    )
    op.create_table(
        "study",
        sa.Column("id", sa.Integer, nullable=False),
        sa.Column("person_id", sa.Integer, nullable=False),
        sa.Column("study_date", sa.Date, nullable=False),
        sa.Column("modality", sa.String(10), nullable=False),
        sa.Column("site", sa.String(200)),
        sa.Column("height_cm", sa.Float),
        sa.Column("weight_kg", sa.Float),
        sa.PrimaryKeyConstraint("id", name="pk_study"),
        sa.ForeignKeyConstraint(["person_id"], ["person.id"], name="fk_study_person_id_person"),
        sa.UniqueConstraint("person_id", "study_date", "modality", name="uq_study_person_id"),
        sa.CheckConstraint(_MODALITY, name="ck_study_modality"),
    )
    op.create_index("ix_study_person_id", "study", ["person_id"])
    op.create_table(
        "measurement",
        sa.Column("id", sa.Integer, nullable=False),
        sa.Column("study_id", sa.Integer, nullable=False),
        sa.Column("measure_code", sa.String(40), nullable=False),
        sa.Column("value", sa.Float, nullable=False),
        sa.Column("unit", sa.String(20), nullable=False),
        sa.Column("entered_value", sa.Float, nullable=False),
        sa.Column("entered_unit", sa.String(20), nullable=False),
        sa.PrimaryKeyConstraint("id", name="pk_measurement"),
        sa.ForeignKeyConstraint(["study_id"], ["study.id"], name="fk_measurement_study_id_study"),
        sa.ForeignKeyConstraint(
            ["measure_code"], ["measure.code"], name="fk_measurement_measure_code_measure"
        ),
        sa.UniqueConstraint("study_id", "measure_code", name="uq_measurement_study_id"),
    )
    op.create_index("ix_measurement_study_id", "measurement", ["study_id"])
    op.create_table(
        "import_run",
        sa.Column("id", sa.Integer, nullable=False),
        sa.Column("kind", sa.String(30), nullable=False),
        sa.Column("file_name", sa.String(500), nullable=False),
        sa.Column("sha256", sa.String(64), nullable=False),
        sa.Column("imported_at", sa.DateTime, nullable=False),
        sa.Column("imported_by", sa.String(100), nullable=False),
        sa.Column("rows_read", sa.Integer, nullable=False),
        sa.Column("rows_added", sa.Integer, nullable=False),
        sa.PrimaryKeyConstraint("id", name="pk_import_run"),
    )
    op.bulk_insert(
        measure,
        [
            dict(
                code=c,
                label=label,
                modality=mod,
                unit=unit,
                plausible_min=float(lo),
                plausible_max=float(hi),
                range_source=src,
                derived=False,
                loinc=loinc,
            )
            for c, label, mod, unit, lo, hi, src, loinc in CATALOGUE
        ],
    )


def downgrade() -> None:
    for table in (
        "import_run",
        "measurement",
        "study",
        "measure",
        "genetic_result",
        "variant_classification",
        "variant",
        "assessment",
    ):
        op.drop_table(table)
    op.drop_index("ix_person_father_id", "person")
    op.drop_index("ix_person_mother_id", "person")
    op.drop_index("ix_person_family_id", "person")
    op.drop_table("person")
    op.drop_table("family")
