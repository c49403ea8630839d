"""Per-family state from the store frames (invented family frames, no database).

The derivations checked here are the project's documented engineering choices
(tracker/engines/family_state.py module docstring); where a genotype figure is
checked, the source is named beside it.
"""

from __future__ import annotations

import datetime as dt

import pandas as pd
import pytest

from tracker.engines import family_state as fs
from tracker.engines.schedule import Policy
from tracker.rules import load_rule_set

PEOPLE_COLS = ["person", "family", "given_name", "family_name", "sex_at_birth", "gender_identity", "birth_date",
               "vital_status", "death_date", "mother", "father", "placeholder", "proband", "twin_of", "twin_type",
               "adoption", "contact_status", "contact_status_date", "notes"]  # fmt: skip


def person(code, family, sex, birth, *, vital="alive", mother=None, father=None, proband=False, contact="contactable",
           notes=None, placeholder=False):  # fmt: skip
    return dict(person=code, family=family, given_name=None, family_name=None, sex_at_birth=sex, gender_identity=None,
                birth_date=birth, vital_status=vital, death_date=None, mother=mother, father=father,
                placeholder=placeholder, proband=proband, twin_of=None, twin_type=None, adoption=None,
                contact_status=None if vital == "deceased" else contact, contact_status_date=None, notes=notes)  # fmt: skip


def frames():
    """Two invented families.

    FS-A (MYBPC3, VUS 2014 -> LP 2018, rows stored newest first on purpose):
      A-01 deceased grandfather, "Sudden death at 44" in the notes; A-02 grandmother (married in);
      A-03 proband, affected from 2016; A-04 her husband (married in); A-05 son, affected first at 12 y;
      A-06 daughter, affected in 2015 then unaffected in 2020 (latest counts); A-07 son, untested.
    FS-B (no variant: diagnostic panel found none):
      B-01 proband affected; B-02 her brother; B-03 deceased father ("stroke"); B-04 her husband.
    """
    people = pd.DataFrame(
        [
            person("A-01", "FS-A", "male", "1940", vital="deceased", notes="Sudden death at 44 while cycling"),
            person("A-02", "FS-A", "female", "1942-03-03", contact=None),
            person("A-03", "FS-A", "female", "1968-05-05", mother="A-02", father="A-01", proband=True),
            person("A-04", "FS-A", "male", "1966-06-06", contact=None),
            person("A-05", "FS-A", "male", "2000-01-10", mother="A-03", father="A-04"),
            person("A-06", "FS-A", "female", "2002-02-02", mother="A-03", father="A-04"),
            person("A-07", "FS-A", "male", "2004-04-04", mother="A-03", father="A-04"),
            person("B-01", "FS-B", "female", "1970-07-07", mother=None, father="B-03", proband=True),
            person("B-02", "FS-B", "male", "1973-03-03", father="B-03"),
            person("B-03", "FS-B", "male", "1941", vital="deceased", notes="died after a stroke"),
            person("B-04", "FS-B", "male", "1969-09-09", contact=None),
        ],
        columns=PEOPLE_COLS,
    )
    variants = pd.DataFrame(
        [
            ["FS-A", "MYBPC3", "NM_000256.3", "c.1504C>T", "p.(Arg502Trp)", "heterozygous", "likely_pathogenic", "2018-06-15", "re-review"],
            ["FS-A", "MYBPC3", "NM_000256.3", "c.1504C>T", "p.(Arg502Trp)", "heterozygous", "uncertain_significance", "2014-03-01", "first"],
        ],
        columns=["family", "gene", "transcript", "hgvs_c", "hgvs_p", "zygosity", "acmg_class", "classified_on", "reason"],
    )  # fmt: skip
    results = pd.DataFrame(
        [
            ["A-03", "2014-02-20", "diagnostic_panel", "NM_000256.3:c.1504C>T", "carrier", None, None],
            ["B-01", "2019-02-01", "diagnostic_panel", None, "no_variant_found", None, None],
        ],
        columns=["person", "test_date", "test_type", "variant", "result", "lab", "report_reference"],
    )
    a = ["person", "assessment_date", "affected_status", "symptoms", "competitive_athlete", "pregnant", "hypertension", "notes"]
    assessments = pd.DataFrame(
        [
            ["A-03", "2016-01-10", "affected", "palpitations", False, False, False, None],
            ["A-03", "2019-01-10", "affected", "palpitations; Syncope", False, False, False, None],
            ["A-05", "2012-03-01", "affected", None, False, False, False, None],
            ["A-06", "2015-05-05", "affected", None, False, False, False, None],
            ["A-06", "2020-05-05", "unaffected", None, False, True, False, None],
            ["A-07", "2018-01-01", "unaffected", None, False, False, False, None],
            ["A-07", "2019-01-01", "uncertain", None, True, False, False, None],
            ["B-01", "2019-01-15", "affected", "breathless", False, False, False, None],
            ["B-02", "2019-03-01", "unaffected", None, False, False, False, None],
        ],
        columns=a,
    )
    s = ["person", "study_date", "modality", "site", "height_cm", "weight_kg", "measure", "value", "unit"]
    studies = pd.DataFrame(
        [
            ["A-07", "2019-01-01", "echo", None, 180.0, 70.0, "mwt_echo", 9.0, "mm"],
            ["A-07", "2021-06-01", "ecg", None, None, None, None, float("nan"), None],
            ["B-02", "2019-03-01", "clinic", None, None, None, None, float("nan"), None],
        ],
        columns=s,
    )
    return people, variants, results, assessments, studies


@pytest.fixture
def states():
    return fs.build_family_states(*frames())


def test_current_class_is_the_latest_classification(states):
    v = states["FS-A"].variant
    assert v.current_class == "likely_pathogenic"  # 2018 row, although stored first
    assert [c.acmg_class for c in v.history] == ["uncertain_significance", "likely_pathogenic"]
    assert v.previous_class == "uncertain_significance"
    assert v.class_changed_on == dt.date(2018, 6, 15)
    assert states["FS-B"].variant is None and states["FS-B"].variant_class is None


def test_as_of_leaves_out_later_records():
    st = fs.build_family_state("FS-A", *frames(), as_of=dt.date(2017, 1, 1))
    assert st.variant_class == "uncertain_significance"  # the 2018 upgrade is not yet on record
    assert st.facts["A-06"].affected_status == "affected"  # the 2020 assessment is later


def test_affected_status_is_the_latest_assessment(states):
    a = states["FS-A"]
    assert a.facts["A-06"].affected_status == "unaffected"  # affected 2015, unaffected 2020
    assert a.states["A-06"].phenotype == "negative"
    assert a.facts["A-07"].affected_status == "uncertain"
    assert a.states["A-07"].phenotype == "borderline"
    assert a.states["A-03"].phenotype == "positive"
    assert a.facts["A-02"].affected_status is None and a.states["A-02"].phenotype == "negative"


def test_family_features_as_documented(states):
    a, b = states["FS-A"], states["FS-B"]
    # plp_variant (LP), familial_disease (A-03 and A-05 affected at their latest assessment),
    # early_onset (A-05 first affected at 12.1 y < 18 y), sudden_death (A-01's notes)
    assert a.features == {"plp_variant", "familial_disease", "early_onset", "sudden_death"}
    assert "A-05" in a.feature_reasons["early_onset"] and "A-01" in a.feature_reasons["sudden_death"]
    # A-06 was affected only earlier: not counted among the affected members
    assert "A-06" not in a.feature_reasons["familial_disease"]
    # one affected member, panel found no variant, a death without "sudden" in the notes
    assert b.features == {"isolated_case", "genotype_negative_family"}
    # clinical judgements never derived
    assert not ({"informative_family", "late_onset"} & (a.features | b.features))


def test_flags_new_symptoms_and_triggers(states):
    a = states["FS-A"]
    assert a.facts["A-03"].new_symptoms == ("syncope",)  # palpitations was recorded before
    assert a.states["A-03"].triggers == {"new_symptoms"}
    assert a.facts["A-06"].pregnant and "pregnancy" in a.states["A-06"].triggers
    assert a.facts["A-07"].started_sport and a.states["A-07"].athlete
    assert "started_competitive_sport" in a.states["A-07"].triggers
    # only assessment, symptoms recorded: counted as new (the safer reading)
    assert states["FS-B"].facts["B-01"].new_symptoms == ("breathless",)


def test_last_visit_is_latest_echo_cmr_or_clinic(states):
    assert states["FS-A"].facts["A-07"].last_visit == dt.date(2019, 1, 1)  # the 2021 ECG does not count
    assert states["FS-A"].facts["A-07"].last_contact == dt.date(2021, 6, 1)
    assert states["FS-B"].facts["B-02"].last_visit == dt.date(2019, 3, 1)
    assert states["FS-A"].seen == {"A-03", "A-07"}  # a study or a genetic test on record


def test_genotype_mapping_for_the_scheduler(states):
    a, b = states["FS-A"], states["FS-B"]
    # P/LP family: statuses of the genetics engine; child of a carrier 1/2
    # (first-degree relatives 1/2: van Velzen 2018 editorial, as in tracker/domain/genetics.py)
    assert a.states["A-03"].genotype == "carrier"
    assert a.states["A-07"].genotype == "at_risk_untested"
    assert a.genotypes["A-07"].probability == pytest.approx(0.5)
    assert a.states["A-04"].genotype == "not_at_risk"  # married in
    # no variant: blood relatives of the affected proband at risk, the husband not
    assert b.states["B-02"].genotype == "at_risk_untested"
    assert b.states["B-04"].genotype == "not_at_risk"
    assert fs.genotype_for_schedule("uncertain", "uncertain_significance", True) == "uncertain"
    assert fs.genotype_for_schedule("uncertain", "uncertain_significance", False) == "not_at_risk"
    assert fs.genotype_for_schedule("non_carrier", "pathogenic", True) == "non_carrier"


def test_reclassified_since_last_contact_is_a_trigger():
    people, variants, results, assessments, studies = frames()
    # A-07 last seen 2021: no trigger; a class change dated after that contact is one
    later = variants.copy()
    later.loc[0, "classified_on"] = "2022-01-10"
    st = fs.build_family_state("FS-A", people, later, results, assessments, studies)
    assert "variant_reclassified" in st.states["A-07"].triggers
    assert "variant_reclassified" not in st.states["A-04"].triggers  # not at risk: never triggered
    st = fs.build_family_state("FS-A", people, variants, results, assessments, studies,
                               reclassification_pending=["A-05"])  # fmt: skip
    assert "variant_reclassified" in st.states["A-05"].triggers
    assert "variant_reclassified" not in st.states["A-07"].triggers


def test_placeholders_and_missing_birth_dates_are_not_scheduled():
    people, *rest = frames()
    people = people.copy()
    people.loc[people["person"] == "A-02", "birth_date"] = None
    st = fs.build_family_state("FS-A", people, *rest)
    assert "A-02" not in st.states and "date of birth" in st.not_scheduled["A-02"]


def test_trend_frame_fills_the_modifiers(states):
    trends = pd.DataFrame(
        [["A-07", True, 24.5, "mwt_echo: rising"]], columns=["person", "progressing", "projected_crossing_age", "reasons"]
    )
    st = fs.apply_trends(states["FS-A"], trends)
    assert st.states["A-07"].progression is True
    assert st.states["A-07"].projected_crossing_age_years == 24.5
    assert st.facts["A-07"].trend_reasons == "mwt_echo: rising"
    assert st.states["A-05"].progression is False and st.states["A-05"].projected_crossing_age_years is None


def test_screening_states_from_proposals(states):
    # ESC 2023 §6.11: a carrier child is recalled (surveillance); an affected member is followed
    props = fs.propose_for_family(states["FS-A"], load_rule_set("esc_2023"), Policy("shortest"), dt.date(2024, 1, 1))
    s = fs.screening_states(props)
    assert s["A-07"] == "surveillance"
    assert s["A-01"] == "none"  # deceased: never scheduled
    assert s["A-04"] == "none"  # not at risk
