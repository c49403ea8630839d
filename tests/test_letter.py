"""Family letters, pure part: template format, risk wording, who gets a letter, readability.

Invented families only.  Readability is checked against textstat's own
figures and against the published formulas recomputed from textstat's counts:
Flesch reading ease (Flesch, J Appl Psychol 1948) = 206.835 - 1.015 x words per
sentence - 84.6 x syllables per word; Flesch-Kincaid grade (Kincaid et al.,
Naval Technical Training Command report 8-75, 1975) = 0.39 x words per
sentence + 11.8 x syllables per word - 15.59.
"""

from __future__ import annotations

import dataclasses
import datetime as dt
import itertools
from fractions import Fraction

import pandas as pd
import pytest

from tracker.domain.genetics import genotype_statuses
from tracker.domain.pedigree import Pedigree
from tracker.errors import UserError
from tracker.outputs import letter as L
from tracker.settings import Clinic

ON = dt.date(2026, 12, 1)
CLINIC = Clinic(
    name="Quillmere Heart Family Clinic",
    address="Ward 7\nQuillmere Hospital\nQuillmere",
    phone="01632 960999",
    email="heart.family@quillmere.example",
    signatory="Dr Ione Vasquez-Brandt",
    signatory_role="Consultant Cardiologist",
)
VARIANT = L.LetterVariant(
    gene="MYBPC3", transcript="NM_000256.3", hgvs_c="c.1504C>T", hgvs_p="p.(Arg502Trp)",
    zygosity="heterozygous", acmg_class="pathogenic", classified_on=dt.date(2020, 3, 2),
)  # fmt: skip


def _people(rows: list[dict]) -> pd.DataFrame:
    base = {"family": "QF1", "sex_at_birth": "unknown", "birth_date": None, "vital_status": "alive",
            "mother": None, "father": None, "placeholder": False, "proband": False,
            "contact_status": "contactable"}  # fmt: skip
    return pd.DataFrame([{**base, **r} for r in rows])


def _family():
    """Three generations: founder carrier QF1-I-1 (tested), untested child QF1-II-1 and
    grandchild QF1-III-1; a tested carrier and an affected proband; people refused for
    each reason."""
    rows = [
        {"person": "QF1-I-1", "sex_at_birth": "male", "birth_date": dt.date(1940, 1, 5), "proband": True},
        {"person": "QF1-I-2", "sex_at_birth": "female", "birth_date": dt.date(1942, 2, 6)},
        {"person": "QF1-II-1", "sex_at_birth": "female", "birth_date": dt.date(1965, 3, 7), "mother": "QF1-I-2",
         "father": "QF1-I-1"},
        {"person": "QF1-II-2", "sex_at_birth": "male", "birth_date": dt.date(1964, 4, 8)},
        {"person": "QF1-III-1", "sex_at_birth": "male", "birth_date": dt.date(1990, 5, 9), "mother": "QF1-II-1",
         "father": "QF1-II-2"},
        {"person": "QF1-II-3", "sex_at_birth": "male", "birth_date": dt.date(1968, 6, 10), "mother": "QF1-I-2",
         "father": "QF1-I-1", "contact_status": "declined"},
        {"person": "QF1-II-4", "sex_at_birth": "male", "birth_date": dt.date(1970, 7, 11), "mother": "QF1-I-2",
         "father": "QF1-I-1", "vital_status": "deceased"},
        {"person": "QF1-II-5", "sex_at_birth": "female", "birth_date": dt.date(1972, 8, 12), "mother": "QF1-I-2",
         "father": "QF1-I-1"},
        {"person": "QF1-III-2", "sex_at_birth": "female", "birth_date": dt.date(2018, 9, 13), "mother": "QF1-II-5"},
        {"person": "QF1-II-6", "sex_at_birth": "female", "birth_date": dt.date(1974, 10, 14), "mother": "QF1-I-2",
         "father": "QF1-I-1"},
        {"person": "QF1-II-7", "sex_at_birth": "male", "placeholder": True, "mother": "QF1-I-2", "father": "QF1-I-1"},
    ]  # fmt: skip
    results = pd.DataFrame(
        [
            {"person": "QF1-I-1", "test_date": "2020-03-02", "test_type": "diagnostic_panel",
             "variant": "NM_000256.3:c.1504C>T", "result": "carrier"},
            {"person": "QF1-II-5", "test_date": "2021-01-04", "test_type": "predictive",
             "variant": "NM_000256.3:c.1504C>T", "result": "carrier"},
            {"person": "QF1-II-6", "test_date": "2021-01-04", "test_type": "predictive",
             "variant": "NM_000256.3:c.1504C>T", "result": "non_carrier"},
        ]
    )  # fmt: skip
    ped = Pedigree(_people(rows))
    return ped, results, {"QF1-I-1": "affected"}


def _prepare(person, *, variant=VARIANT, guideline="esc_2023", family=None, **kw):
    ped, results, affected = family or _family()
    gen = genotype_statuses(ped, results, variant.acmg_class if variant else None,
                            f"{variant.transcript}:{variant.hgvs_c}" if variant else None)  # fmt: skip
    plan = L.prepare_letter(ped, gen, variant, person, ON, guideline, CLINIC, affected=affected, **kw)
    return plan, gen


def _text(letter: L.Letter) -> str:
    f = letter.filled
    return "\n".join([f.subject, f.greeting, *(b.text for b in f.blocks), f.closing])


# --------------------------------------------------------------------------- template format


def _write(tmp_path, text: str, name="own.txt"):
    p = tmp_path / name
    p.write_text(text, encoding="utf-8")
    return p


GOOD = "# a comment\n@subject S\n@greeting Dear {{ recipient_name }},\n@closing Bye,\nHello {{ clinic_name }}.\n"


def test_unknown_placeholder_names_file_and_line(tmp_path):
    p = _write(tmp_path, GOOD + "\nCall {{ clinic_fax }} today.\n", "my-letter.txt")
    with pytest.raises(UserError) as e:
        L.read_template(p)
    msg = str(e.value)
    assert "template my-letter.txt line 7" in msg
    assert "unknown placeholder {{ clinic_fax }}" in msg
    assert "\n" not in msg


def test_unknown_placeholder_in_an_unused_branch_is_still_an_error(tmp_path):
    p = _write(tmp_path, GOOD + "[[ if child ]]\n{{ childs_name }}\n[[ end ]]\n")
    with pytest.raises(UserError, match=r"own\.txt line 7: unknown placeholder"):
        L.read_template(p)


@pytest.mark.parametrize(
    "extra, line, words",
    [
        ("[[ if kid ]]\nx\n[[ end ]]\n", 6, "unknown flag 'kid'"),
        ("[[ if child ]]\nx\n", 6, "never closed"),
        ("[[ end ]]\n", 6, "without an open"),
        ("[[ else ]]\n", 6, "without an open"),
        ("Text {{ gene \n", 6, "without its matching"),
        ("{{ 2bad }}\n", 6, "not a placeholder name"),
        ("@footer x\n", 6, "unknown field '@footer'"),
        ("[[ when child ]]\n", 6, "unknown directive"),
        ("Text [[ if child ]] inline\n", 6, "line of its own"),
    ],
)
def test_format_errors_name_file_and_line(tmp_path, extra, line, words):
    p = _write(tmp_path, GOOD + extra)
    with pytest.raises(UserError) as e:
        L.read_template(p)
    assert f"template own.txt line {line}" in str(e.value)
    assert words in str(e.value)


def test_known_placeholder_without_value_is_an_error_not_a_blank(tmp_path):
    t = L.read_template(_write(tmp_path, GOOD + "\nThe gene is {{ gene }}.\n"))
    with pytest.raises(UserError, match=r"own\.txt line 7: placeholder \{\{ gene \}\} has no value"):
        L.fill_template(t, {"recipient_name": "relative", "clinic_name": "C"}, {})
    with pytest.raises(UserError, match="has no value"):
        L.fill_template(t, {"recipient_name": "relative", "clinic_name": "C", "gene": " "}, {})


def test_missing_field_is_an_error(tmp_path):
    t = L.read_template(_write(tmp_path, "@subject S\n@greeting G\nBody.\n"))
    with pytest.raises(UserError, match="no @closing"):
        L.fill_template(t, {}, {})


def test_conditions_paragraphs_items_and_details():
    text = (
        "@subject S\n@greeting G\n@closing C\n"
        "One\ntwo.\n\n"
        "[[ if child ]]\nChild.\n[[ if via_proband ]]\nHanded.\n[[ else ]]\nPosted.\n[[ end ]]\n"
        "[[ else ]]\nAdult.\n[[ end ]]\n"
        "[[ if not child ]]\nNot a child.\n[[ end ]]\n"
        "## Head\n- item one\n- item two.\n>> detail {{ gene }}\n"
    )
    t = L.parse_template(text, "inline")
    f = L.fill_template(t, {"gene": "TNNT2"}, {"child": True, "via_proband": False})
    kinds = [(b.kind, b.text) for b in f.blocks]
    assert kinds == [
        ("paragraph", "One two."),
        ("paragraph", "Child. Posted."),
        ("heading", "Head"),
        ("item", "item one"),
        ("item", "item two."),
        ("detail", "detail TNNT2"),
    ]
    f2 = L.fill_template(t, {"gene": "TNNT2"}, {"child": False})
    assert ("paragraph", "Adult. Not a child.") in [(b.kind, b.text) for b in f2.blocks]
    # only paragraphs and items are measured; a list item counts as a sentence
    assert L.measured_text(f) == "One two.\nChild. Posted.\nitem one.\nitem two."


@pytest.mark.parametrize("kind", sorted(L.DEFAULT_TEMPLATES))
def test_default_templates_parse_and_document_the_format(kind):
    path = L.TEMPLATE_DIR / L.DEFAULT_TEMPLATES[kind]
    first = path.read_text(encoding="utf-8").splitlines()[:12]
    assert first[0].startswith("#")
    assert any("Letter template format 1" in ln for ln in first)
    assert any("{{ name }}" in ln for ln in first)
    L.default_template(kind)  # parses: every placeholder and flag is known


# --------------------------------------------------------------------------- risk in words


@pytest.mark.parametrize(
    "p, words",
    [
        (Fraction(1, 2), "about 1 in 2 (50%)"),
        (Fraction(1, 4), "about 1 in 4 (25%)"),
        (Fraction(1, 8), "about 1 in 8 (13%)"),  # 12.5% rounded half up
        (Fraction(3, 8), "about 3 in 8 (38%)"),
        (Fraction(2, 7), "about 2 in 7 (29%)"),
        (Fraction(37, 129), "about 29 in 100 (29%)"),
        (Fraction(1, 1000), "less than 1 in 100 (under 1%)"),
    ],
)
def test_risk_words(p, words):
    assert L.risk_words(p) == words


@pytest.mark.parametrize("p", [Fraction(0), Fraction(1), None])
def test_risk_words_refuses_certainties(p):
    with pytest.raises(ValueError):
        L.risk_words(p)


# --------------------------------------------------------------------------- who gets a letter


def test_grandchild_of_carrier_with_untested_parent_is_quoted_1_in_4():
    # Wright's r for a grandchild is 1/4 (second degree; reference notes §2b):
    # with the parent in between untested, the pedigree computation gives 1/4.
    # Stepwise cascade (ESC 2023: testing widens stepwise [V]): while the parent QF1-II-1 can be
    # asked, she is offered testing first and the grandchild gets no letter yet.
    with pytest.raises(L.LetterRefused, match="offer testing to QF1-II-1 first"):
        _prepare("QF1-III-1")
    ped, results, affected = _family()
    frame = ped.frame()
    frame.loc[frame["person"] == "QF1-II-1", "contact_status"] = "declined"
    plan, gen = _prepare("QF1-III-1", family=(Pedigree(frame), results, affected))  # the parent declined
    assert gen["QF1-III-1"].status == "at_risk_untested"
    assert gen["QF1-III-1"].probability == Fraction(1, 4)
    assert plan.kind == "plp"
    assert plan.probability == gen["QF1-III-1"].probability
    assert plan.values["risk"] == L.risk_words(gen["QF1-III-1"].probability) == "about 1 in 4 (25%)"
    letter = L.compose_letter(plan)
    assert "your chance of having this variant is about 1 in 4 (25%)" in _text(letter)


def test_first_degree_relative_is_quoted_1_in_2_and_letter_holds_the_facts():
    plan, gen = _prepare("QF1-II-1")
    assert gen["QF1-II-1"].probability == Fraction(1, 2)
    text = _text(L.compose_letter(plan))
    assert "about 1 in 2 (50%)" in text
    assert "1 in 2 chance of passing it on to each child" in text
    assert "NM_000256.3:c.1504C>T p.(Arg502Trp)" in text  # HGVS line for the doctor
    assert CLINIC.phone in text and CLINIC.email in text and "QF1-II-1" in text
    assert "prefer not to know" in text
    assert "never have any heart problems" in text
    assert "Dear relative," in text
    # nobody else is named or coded: the proband is "a member of your family"
    assert "a member of your family" in text
    assert "QF1-I-1" not in text and "QF1-II-5" not in text


def test_via_proband_wording_and_recipient_name():
    plan, _ = _prepare("QF1-II-1", via_proband=True, recipient_name="Wren Halloway")
    text = _text(L.compose_letter(plan))
    assert "has given you this letter" in text
    assert "Dear Wren Halloway," in text
    posted = _text(L.compose_letter(_prepare("QF1-II-1")[0]))
    assert "has given you this letter" not in posted


def test_child_under_hrs_rules_is_deferred_to_the_tenth_birthday():
    # HRS 2022 consensus: predictive testing of children from 10-12 y (reference notes §3).
    plan, _ = _prepare("QF1-III-2", guideline="hrs_2022_testing")
    assert plan.flags["child"] and plan.flags["testing_deferred"]
    assert plan.values["testing_from"] == "2028-09-13"
    text = _text(L.compose_letter(plan))
    assert "Dear parent or guardian," in text
    assert "from about age 10 to 12" in text
    assert "from 2028-09-13" in text
    assert "If you have children" not in text


def test_child_under_aha_acc_2024_checks_start_at_any_age():
    # AHA/ACC 2024 key point 3: screening can begin at any age [V] (SCREENING_START in letter.py).
    plan, _ = _prepare("QF1-III-2", guideline="aha_acc_2024")
    assert plan.flags["child"]
    text = _text(L.compose_letter(plan))
    assert "For children, the checks can start at any age" in text


def test_child_under_esc_2023_any_age():
    # ESC 2023: no minimum age for predictive testing (reference notes §3).
    plan, _ = _prepare("QF1-III-2", guideline="esc_2023")
    assert plan.flags["child"] and not plan.flags["testing_deferred"]
    assert "the test can be done at any age" in _text(L.compose_letter(plan))


@pytest.mark.parametrize(
    "person, words",
    [
        ("QF1-II-3", "declined contact"),
        ("QF1-II-4", "deceased"),
        ("QF1-II-7", "placeholder"),
        ("QF1-I-1", "affected"),
        ("QF1-II-5", "already knows their result"),
        ("QF1-II-6", "not at risk: tested non-carrier"),
        ("QF1-II-2", "not at risk from the family variant"),
    ],
)
def test_refusals_are_one_line(person, words):
    with pytest.raises(L.LetterRefused) as e:
        _prepare(person)
    assert words in str(e.value)
    assert "\n" not in str(e.value)
    assert str(e.value).startswith(person)


def test_obligate_carrier_gets_no_at_risk_letter():
    ped, results, affected = _family()
    results = pd.concat(
        [results, pd.DataFrame([{"person": "QF1-III-1", "test_date": "2022-01-01", "test_type": "predictive",
                                 "variant": "NM_000256.3:c.1504C>T", "result": "carrier"}])],
        ignore_index=True,
    )  # fmt: skip
    with pytest.raises(L.LetterRefused, match="obligate carrier"):
        _prepare("QF1-II-1", family=(ped, results, affected))


def test_vus_family_letter_offers_no_predictive_test():
    vus = L.LetterVariant("TNNI3", "NM_000363.5", "c.508C>T", "p.(Arg170Trp)", "heterozygous",
                          "uncertain_significance", dt.date(2019, 1, 1))  # fmt: skip
    plan, _ = _prepare("QF1-II-1", variant=vus)
    assert plan.kind == "vus" and plan.flags["first_degree"]
    text = _text(L.compose_letter(plan))
    assert "we do not offer relatives a gene test to predict who will get it" in text
    assert "uncertain significance" in text
    assert "No predictive (cascade) testing for a VUS" in text
    assert "your chance of having this variant" not in text
    # a grandchild is beyond the guideline's first degree, but without a P/LP variant every blood relative
    # of an affected member is screened (common practice, as the recall schedule): the letter is written
    plan, _ = _prepare("QF1-III-1", variant=vus)
    assert plan.kind == "vus" and not plan.flags["first_degree"]


def test_no_variant_family_letter_is_screening_only():
    plan, _ = _prepare("QF1-II-1", variant=None)
    assert plan.kind == "no_variant"
    text = _text(L.compose_letter(plan))
    assert "did not find a variant that explains their HCM" in text
    assert "no gene test we can offer to relatives" in text
    assert "found no disease-causing variant" in text
    benign = L.LetterVariant("MYH7", "NM_000257.4", "c.100A>G", None, "heterozygous", "likely_benign",
                             dt.date(2019, 1, 1))  # fmt: skip
    plan_b, _ = _prepare("QF1-II-1", variant=benign)
    assert plan_b.kind == "no_variant"
    assert "classified likely benign" in _text(L.compose_letter(plan_b))


def test_settings_without_contact_details_are_refused():
    ped, results, affected = _family()
    gen = genotype_statuses(ped, results, "pathogenic")
    with pytest.raises(UserError, match=r"\[clinic\] phone is empty"):
        L.prepare_letter(ped, gen, VARIANT, "QF1-II-1", ON, "esc_2023", Clinic(), affected=affected)


def test_rule_set_must_be_a_cascade_rule_set():
    with pytest.raises(UserError, match="no cascade rule set"):
        _prepare("QF1-II-1", guideline="esc_2014")


# --------------------------------------------------------------------------- readability

VALUES = {
    "clinic_name": CLINIC.name, "clinic_phone": CLINIC.phone, "clinic_email": CLINIC.email,
    "signatory": CLINIC.signatory, "signatory_role": CLINIC.signatory_role, "person_code": "QF1-II-1",
    "recipient_name": "relative", "letter_date": "2026-12-01", "risk": "about 1 in 8 (13%)", "gene": "MYBPC3",
    "variant_hgvs": VARIANT.hgvs, "variant_zygosity": "heterozygous", "variant_class": "pathogenic",
    "classified_on": "2020-03-02", "testing_start": "from about age 10 to 12", "testing_from": "2028-09-13",
    "screening_start": "in childhood", "guideline_title": "a rule set",
    "visit_date": "2027-01-12", "visit_purpose": "a heart tracing and a scan", "informed_on": "2026-09-01",
}  # fmt: skip


def _check_against_textstat(filled: L.FilledTemplate) -> L.Readability:
    r = L.readability(filled)
    text = L.measured_text(filled)
    t, _ = L.meter()
    assert r.flesch_reading_ease == round(t.flesch_reading_ease(text), 1)
    assert r.flesch_kincaid_grade == round(t.flesch_kincaid_grade(text), 1)
    words, sentences, syllables = t.lexicon_count(text), t.sentence_count(text), t.syllable_count(text)
    assert r.words == words and r.sentences == sentences
    # the published formulas from textstat's counts
    fre = 206.835 - 1.015 * words / sentences - 84.6 * syllables / words  # Flesch 1948
    fk = 0.39 * words / sentences + 11.8 * syllables / words - 15.59  # Kincaid et al. 1975
    assert r.flesch_reading_ease == pytest.approx(fre, abs=0.051)
    assert r.flesch_kincaid_grade == pytest.approx(fk, abs=0.051)
    return r


@pytest.mark.parametrize("kind", sorted(L.DEFAULT_TEMPLATES))
def test_every_default_template_in_every_variant_meets_the_target(kind):
    t = L.default_template(kind)
    for combo in itertools.product([False, True], repeat=len(L.FLAGS)):
        flags = dict(zip(L.FLAGS, combo))
        r = _check_against_textstat(L.fill_template(t, VALUES, flags))
        assert r.flesch_kincaid_grade <= L.TARGET_FK_GRADE == 7.0, (kind, flags, r)
        assert r.flesch_reading_ease >= 60, (kind, flags, r)  # Flesch 1948: 60-70 is plain English
        assert r.words > 250


def test_measurement_leaves_out_address_hgvs_headings_and_signature():
    letter = L.compose_letter(_prepare("QF1-II-1")[0])
    measured = L.measured_text(letter.filled)
    for absent in ("c.1504C>T", CLINIC.phone, CLINIC.email, "Dear", "Yours sincerely", "What is HCM?",
                   CLINIC.signatory, "Heart checks and a gene test for your family"):  # fmt: skip
        assert absent not in measured
    assert "hypertrophic cardiomyopathy" in measured
    assert "address block" in letter.readability.not_measured
    assert "HGVS" in letter.readability.not_measured and "signature" in letter.readability.not_measured


def test_readability_never_downloads(monkeypatch):
    import nltk

    def refuse(*a, **k):
        raise AssertionError("a download was attempted")

    monkeypatch.setattr(nltk, "download", refuse)
    plan, _ = _prepare("QF1-II-1")
    r = L.compose_letter(plan).readability
    assert r.syllable_counter
    assert 0 < r.flesch_kincaid_grade <= L.TARGET_FK_GRADE


def test_a_hard_letter_is_flagged():
    t = L.parse_template(
        "@subject S\n@greeting G\n@closing C\n"
        "Notwithstanding considerable interindividual heterogeneity regarding phenotypic manifestation, "
        "asymptomatic heterozygous individuals necessitate comprehensive longitudinal echocardiographic "
        "surveillance commencing during adolescence.\n",
        "hard",
    )
    letter = L.compose_letter(_prepare("QF1-II-1")[0], t)
    assert letter.readability.flesch_kincaid_grade > 15
    assert not letter.readability.meets_target
    assert letter.warnings and "above the target" in letter.warnings[0]


# --------------------------------------------------------------------------- letter kind


D = dt.date


@pytest.mark.parametrize(
    "standing, kind",
    [
        (L.Standing(), "first_contact"),  # nothing on record
        (L.Standing(studied=True, last_visit=D(2024, 5, 1), last_contact=D(2024, 5, 1)), "reminder"),
        (L.Standing(last_visit=D(2024, 5, 1)), "reminder"),  # in surveillance
        (L.Standing(tested=True, result_on=D(2025, 2, 1), last_contact=D(2025, 2, 1)), "result"),  # result, no visit
        (L.Standing(studied=True, tested=True, last_visit=D(2024, 5, 1), result_on=D(2025, 2, 1),
                    last_contact=D(2025, 2, 1)), "result"),  # result newer than the last visit
        (L.Standing(studied=True, tested=True, last_visit=D(2025, 5, 1), result_on=D(2025, 2, 1),
                    last_contact=D(2025, 5, 1)), "reminder"),  # the result was before the last visit
        (L.Standing(studied=True, last_visit=D(2024, 5, 1), last_contact=D(2024, 5, 1),
                    reclassified_on=D(2025, 9, 1)), "reclassification"),
        (L.Standing(studied=True, last_visit=D(2024, 5, 1), last_contact=D(2024, 5, 1),
                    reclassified_on=D(2023, 9, 1)), "reminder"),  # reclassified before the last contact
        (L.Standing(reclassified_on=D(2025, 9, 1)), "first_contact"),  # newly at risk, never in screening
    ],
)  # fmt: skip
def test_letter_kind_follows_where_the_person_stands(standing, kind):
    assert L.choose_letter_kind(standing) == kind


def test_nobody_in_screening_gets_a_first_contact_letter():
    """Invented family QF1: QF1-II-1 (untested, at risk) has had an echo: a reminder, never a first contact."""
    seen = L.Standing(studied=True, last_visit=D(2025, 3, 1), last_contact=D(2025, 3, 1))
    plan, _ = _prepare("QF1-II-1", standing=seen)
    assert plan.letter_kind == "reminder" and plan.default_template == L.KIND_TEMPLATES["reminder"]
    assert "risk" not in plan.values
    with pytest.raises(L.LetterRefused) as err:
        _prepare("QF1-II-1", standing=seen, letter_kind="first_contact")
    msg = str(err.value)
    assert "already in screening" in msg and "\n" not in msg and "--kind reminder" in msg
    first, _ = _prepare("QF1-II-1")  # nothing on record: the first-contact letter with the risk figure
    assert first.letter_kind == "first_contact" and first.values["risk"]


def test_result_and_reclassification_letters_for_a_tested_carrier():
    """QF1-II-5: predictive test 2021-01-04, carrier. A result letter (the result is never printed);
    after a reclassification of the family variant, the reclassification letter names the new class."""
    tested = L.Standing(tested=True, result_on=D(2021, 1, 4), last_contact=D(2021, 1, 4))
    plan, _ = _prepare("QF1-II-5", standing=tested)
    assert plan.letter_kind == "result"
    text = _text(L.compose_letter(plan))
    assert "Your gene test result is ready" in text and "We do not put gene test results in a letter" in text
    assert "carrier" not in text.lower()
    moved = L.Standing(tested=True, result_on=D(2021, 1, 4), last_contact=D(2021, 1, 4), reclassified_on=D(2026, 6, 1))
    lp = dataclasses.replace(VARIANT, acmg_class="likely_pathogenic", classified_on=D(2026, 6, 1))
    plan, _ = _prepare("QF1-II-5", variant=lp, standing=moved)
    assert plan.letter_kind == "reclassification"
    letter = L.compose_letter(plan)
    assert "They now call it likely pathogenic." in _text(letter)
    with pytest.raises(L.LetterRefused, match="never changed"):
        _prepare("QF1-II-5", standing=tested, letter_kind="reclassification")


def test_no_reminder_for_a_released_non_carrier():
    """QF1-II-6: predictive test non-carrier (released): a result letter may go, a reminder may not."""
    tested = L.Standing(tested=True, result_on=D(2021, 1, 4), last_contact=D(2021, 1, 4))
    assert _prepare("QF1-II-6", standing=tested)[0].letter_kind == "result"
    with pytest.raises(L.LetterRefused, match="not at risk"):
        _prepare("QF1-II-6", standing=tested, letter_kind="reminder")


@pytest.mark.parametrize("kind", sorted(L.KIND_TEMPLATES))
def test_every_follow_up_template_in_every_variant_meets_the_target(kind):
    """Same targets as the first-contact letters: Flesch-Kincaid grade <= 7 (Kincaid et al. 1975) and
    Flesch reading ease >= 60 (Flesch 1948), checked against textstat."""
    path = L.TEMPLATE_DIR / L.KIND_TEMPLATES[kind]
    first = path.read_text(encoding="utf-8").splitlines()[:12]
    assert any("Letter template format 1" in ln for ln in first)
    t = L.kind_template(kind)
    for combo in itertools.product([False, True], repeat=len(L.FLAGS)):
        flags = dict(zip(L.FLAGS, combo))
        r = _check_against_textstat(L.fill_template(t, VALUES, flags))
        assert r.flesch_kincaid_grade <= L.TARGET_FK_GRADE == 7.0, (kind, flags, r)
        assert r.flesch_reading_ease >= 60, (kind, flags, r)
        assert r.words > 250
