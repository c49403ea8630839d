"""Writes the malformed-input corpus (one mistake per file) and its manifest.

Run from anywhere: python tests/bad_inputs/make_corpus.py.  The files are
committed; this script documents how each one was made.  Every file is loaded
on top of the invented families in tests/data/mini.
"""

import json
from pathlib import Path

HERE = Path(__file__).parent
H = {
    "people": "person,family,given_name,family_name,sex_at_birth,gender_identity,birth_date,vital_status,"
    "death_date,mother,father,placeholder,proband,twin_of,twin_type,adoption,contact_status,"
    "contact_status_date,notes",
    "studies": "person,study_date,modality,site,height_cm,weight_kg,measure,value,unit",
    "variants": "family,gene,transcript,hgvs_c,hgvs_p,zygosity,acmg_class,classified_on,reason",
    "genetic-results": "person,test_date,test_type,variant,result,lab,report_reference",
    "assessments": "person,assessment_date,affected_status,symptoms,competitive_athlete,pregnant,hypertension,notes",
    "families": "family,condition,notes",
}


def person(code="T1-20", family="FAM-T1", sex="female", birth="1999-05-05", vital="alive", death="",
           mother="T1-03", father="T1-04", placeholder="no", proband="no", twin="", twin_type="",
           adoption="", contact=None, contact_date="2024-01-01", notes="", given="Zephyrine",
           surname="Quarrendale"):  # fmt: skip
    if contact is None:  # a deceased person or a placeholder is not contactable
        contact = "not_contacted" if vital == "deceased" or placeholder == "yes" else "contactable"
    # Invented, distinctive names: no message may repeat them (tests/test_private_messages.py).
    return ",".join([code, family, given, surname, sex, "", birth, vital, death, mother, father, placeholder,
                     proband, twin, twin_type, adoption, contact, contact_date, notes])  # fmt: skip


# The people layout with the recorded cause and age of death, age at diagnosis and device dates.
H["people_record"] = H["people"] + ",death_cause,death_age,diagnosis_age,diagnosis_place,icd_date,pacemaker_date"


def person_record(cause="", death_age="", diagnosis_age="", place="", icd="", pacemaker="", **kw):
    return person(**kw) + "," + ",".join([cause, death_age, diagnosis_age, place, icd, pacemaker])


def study(person="T1-06", date="2025-01-10", modality="echo", site="Invented Vale Hospital", h="175",
          w="65", measure="mwt_echo", value="12.0", unit="mm"):  # fmt: skip
    return ",".join([person, date, modality, site, h, w, measure, value, unit])


def variant(**kw):
    d = dict(family="FAM-T1", gene="MYBPC3", transcript="NM_000256.3", hgvs_c="c.1504C>T",
             hgvs_p="p.(Arg502Trp)", zyg="heterozygous", cls="pathogenic", on="2023-01-01", reason="review")  # fmt: skip
    d.update(kw)
    return ",".join(d.values())


def gr(person="T1-07", date="2024-02-02", ttype="predictive", variant="NM_000256.3:c.1504C>T",
       result="carrier", lab="Invented Genomics Lab", ref="IGL-0100"):  # fmt: skip
    return ",".join([person, date, ttype, variant, result, lab, ref])


def ass(person="T1-07", date="2024-02-02", status="unaffected", symptoms="", ath="no", preg="no", hyp="no", notes=""):
    return ",".join([person, date, status, symptoms, ath, preg, hyp, notes])


cases = []


def add(name, kind, body, row, column, fragment, header=None, enc=None, link=None):
    """One case; ``link``: the file is a symbolic link to that path instead (a special file)."""
    text = (header if header is not None else H[kind]) + "\n" + body + ("\n" if body else "")
    data = text.encode(enc) if enc else text.encode("utf-8")
    cases.append((name, kind, link if link is not None else data, row, column, fragment))


add("people_unknown_column.csv", "people", person() + ",x", 1, "nickname", "unknown column", header=H["people"] + ",nickname")
add("people_missing_column.csv", "people", person().replace(",female,", ",", 1), 1, "sex_at_birth", "missing column",
    header=H["people"].replace("sex_at_birth,", ""))
add("people_semicolon.csv", "people", "", 1, None, "separated by ';'", header=H["people"].replace(",", ";"))
add("people_tab.csv", "people", "", 1, None, "separated by tabs", header=H["people"].replace(",", "\t"))
add("people_latin1.csv", "people", person(given="Siân"), 2, None, "not UTF-8", enc="latin-1")
add("people_utf16.csv", "people", person(), None, None, "UTF-16", enc="utf-16")
add("people_impossible_date.csv", "people", person(birth="2019-02-30"), 2, "birth_date", "not a real calendar date")
add("people_us_date.csv", "people", person(birth="05/05/1999"), 2, "birth_date", "not an ISO 8601 date")
add("people_future_birth.csv", "people", person(birth="2031-01-01", mother="", father=""), 2, "birth_date", "in the future")
add("people_unknown_family.csv", "people", person(family="FAM-NOPE", mother="", father=""), 2, "family", "not in the database")
add("people_bad_sex.csv", "people", person(sex="F"), 2, "sex_at_birth", "not one of")
add("people_mother_male.csv", "people", person(mother="T1-04", father=""), 2, "mother", "sex at birth male")
add("people_child_before_parent.csv", "people", person(birth="1950-01-01", father=""), 2, "birth_date", "before the birth of the mother")
add("people_own_ancestor.csv", "people",
    person(code="T1-30", birth="", mother="T1-31", father="") + "\n" + person(code="T1-31", birth="", mother="T1-30",
                                                                             father=""),
    2, "mother/father", "own ancestor")
add("people_death_before_birth.csv", "people", person(vital="deceased", death="1990-01-01"), 2, "death_date", "before the date of birth")
add("people_death_but_alive.csv", "people", person(death="2020-01-01"), 2, "death_date", "vital_status is not deceased")
add("people_duplicate_row.csv", "people", person() + "\n" + person(), 3, None, "duplicates row 2")
add("people_conflict_stored.csv", "people",
    "T1-03,FAM-T1,Orla,Penhallow,female,,1969-04-12,alive,,T1-02,T1-01,no,yes,,,,contactable,2019-01-10,",
    2, "birth_date", "differs from the stored record")
add("people_unknown_father.csv", "people", person(father="T9-99"), 2, "father", "not in this file or the database")
add("people_second_proband.csv", "people", person(proband="yes"), 2, "proband", "already has a proband")
add("people_extra_field.csv", "people", person() + ",surplus", 2, None, "has 20 fields")
add("people_bad_code.csv", "people", person(code="T1 20"), 2, "person", "not a valid code")
add("people_twin_type_missing.csv", "people", person(birth="1995-02-28", twin="T1-05"), 2, "twin_type", "required when twin_of")
add("people_mz_twin_other_sex.csv", "people",
    person(code="T1-21", birth="1995-02-28", twin="T1-05", twin_type="monozygotic"), 2, "twin_type", "different sex at birth")
add("people_twin_other_birth.csv", "people",
    person(code="T1-21", sex="male", birth="1996-02-28", twin="T1-05", twin_type="dizygotic"), 2, "birth_date", "co-twin")
add("people_huge_field.csv", "people", person(notes="x" * 5000), 2, "notes", "longer than 4000")
add("people_control_char.csv", "people", person(notes="bell\x07ring"), 2, "notes", "control characters")
add("people_unterminated_quote.csv", "people", person(notes='"never closed'), 2, None, "not well-formed CSV")
add("people_placeholder_proband.csv", "people",
    person(code="T2-09", family="FAM-T2", mother="", father="", placeholder="yes", proband="yes"),
    2, "proband", "placeholder member cannot be the proband")
add("people_bad_yesno.csv", "people", person(placeholder="maybe"), 2, "placeholder", "not yes or no")
add("people_required_empty.csv", "people", person(sex=""), 2, "sex_at_birth", "is empty")
add("empty.csv", "people", "", None, None, "file is empty", header="")
add("whitespace_only.csv", "families", "", None, None, "file is empty", header="   \n  ")
add("nul_bytes.csv", "families", "FAM-X,hcm\x00,", None, None, "NUL bytes")
add("families_missing_condition.csv", "families", "FAM-T9,,", 2, "condition", "is empty")
add("families_duplicate.csv", "families",
    "FAM-T9,hypertrophic cardiomyopathy,\nFAM-T9,hypertrophic cardiomyopathy,", 3, None, "duplicates row 2")
add("families_blank_line.csv", "families",
    "FAM-T9,hypertrophic cardiomyopathy,\n\nFAM-T8,hypertrophic cardiomyopathy,", 3, None, "empty row")
add("bom_wrong_column.csv", "families", "FAM-T9,hcm,,x", 1, "kindred", "unknown column", header="\ufefffamily,condition,notes,kindred")
add("studies_cm_in_mm.csv", "studies", study(value="1.4"), 2, "value", "looks like centimetres")
add("studies_unknown_unit.csv", "studies", study(unit="inch"), 2, "unit", "not a known unit")
add("studies_unconvertible_unit.csv", "studies", study(unit="ms"), 2, "unit", "cannot be converted")
add("studies_unknown_measure.csv", "studies", study(measure="wall_thick"), 2, "measure", "not in the measure catalogue")
add("studies_before_birth.csv", "studies", study(date="2005-01-01"), 2, "study_date", "before the person's date of birth")
add("studies_after_death.csv", "studies", study(person="T1-02", date="2016-01-01"), 2, "study_date", "after the person's date of death")
add("studies_placeholder.csv", "studies", study(person="T1-01", date="1990-01-01"), 2, "person", "placeholder")
add("studies_wrong_modality.csv", "studies", study(measure="mwt_cmr"), 2, "measure", "is a cmr measure")
add("studies_not_a_number.csv", "studies", study(value="twelve"), 2, "value", "not a number")
add("studies_decimal_comma.csv", "studies", study(value='"12,5"'), 2, "value", "decimal mark")
add("studies_height_in_m.csv", "studies", study(h="1.75"), 2, "height_cm", "outside the plausible range")
add("studies_negative_weight.csv", "studies", study(w="-65"), 2, "weight_kg", "greater than zero")
add("studies_gls_positive.csv", "studies", study(measure="gls", value="19.5", unit="%"), 2, "value", "lost minus sign")
add("studies_ef_fraction.csv", "studies", study(measure="lvef_echo", value="0.62", unit="%"), 2, "value", "fraction")
add("studies_eprime_in_ms.csv", "studies", study(measure="e_prime_septal", value="0.08", unit="cm/s"), 2, "value", "looks like m/s")
add("studies_negative_gradient.csv", "studies", study(measure="lvot_rest", value="-5", unit="mmHg"), 2, "value", "outside the plausible range")
add("studies_inconsistent_study.csv", "studies", study() + "\n" + study(h="180", measure="ivsd"), 3, "height_cm",
    "differs between rows of the same study")
add("studies_unknown_person.csv", "studies", study(person="T7-77"), 2, "person", "not in the database")
add("studies_value_without_measure.csv", "studies", study(measure="", unit=""), 2, "measure", "empty but a value")
add("studies_derived_measure.csv", "studies", study(measure="lv_mass", unit="g", value="150"), 2, "measure", "computed by the tool")
add("studies_future_date.csv", "studies", study(date="2099-01-01"), 2, "study_date", "in the future")
add("studies_conflict_stored.csv", "studies", study(date="2022-05-03", h="165", w="52", value="9.9"), 2, "value",
    "differs from the stored record")
add("variants_lowercase_bases.csv", "variants", variant(hgvs_c="c.1504c>t"), 2, "hgvs_c", "not an HGVS coding change")
add("variants_unversioned_transcript.csv", "variants", variant(transcript="NM_000256"), 2, "transcript", "versioned transcript")
add("variants_one_letter_protein.csv", "variants", variant(hgvs_p="p.R502W"), 2, "hgvs_p", "three-letter")
add("variants_bad_class.csv", "variants", variant(cls="VUS"), 2, "acmg_class", "not one of")
add("variants_other_gene.csv", "variants", variant(gene="MYH7"), 2, "gene", "same variant")
add("variants_unknown_family.csv", "variants", variant(family="FAM-NOPE"), 2, "family", "not in the database")
add("genetic_unknown_variant.csv", "genetic-results", gr(variant="NM_000257.4:c.1208G>A"), 2, "variant", "not a variant of family FAM-T1")
add("genetic_predictive_no_variant_found.csv", "genetic-results", gr(variant="", result="no_variant_found"), 2, "result",
    "only for a diagnostic panel")
add("genetic_carrier_without_variant.csv", "genetic-results", gr(variant=""), 2, "variant", "is required")
add("genetic_malformed_variant.csv", "genetic-results", gr(variant="MYBPC3 c.1504C>T"), 2, "variant", "transcript:c.change")
PR = H["people_record"]
add("people_death_cause_alive.csv", "people", person_record(cause="sudden"), 2, "death_cause",
    "vital_status is not deceased", header=PR)
add("people_bad_death_cause.csv", "people", person_record(vital="deceased", death="2020", cause="heart attack"), 2,
    "death_cause", "not one of", header=PR)
add("people_death_age_alive.csv", "people", person_record(death_age="20"), 2, "death_age",
    "vital_status is not deceased", header=PR)
add("people_death_age_against_dates.csv", "people",
    person_record(vital="deceased", death="2020-01-01", cause="sudden", death_age="25"), 2, "death_age",
    "does not agree with the dates of birth and death", header=PR)
add("people_death_age_fraction.csv", "people", person_record(vital="deceased", death="", death_age="20.5"), 2,
    "death_age", "not a whole number of years", header=PR)
add("people_death_age_too_high.csv", "people", person_record(vital="deceased", death="", death_age="140"), 2,
    "death_age", "outside 0-130 years", header=PR)
add("people_diagnosis_age_above_age.csv", "people", person_record(diagnosis_age="40"), 2, "diagnosis_age",
    "is above the person's age", header=PR)
add("people_diagnosis_age_above_death_age.csv", "people",
    person_record(vital="deceased", death="", death_age="19", diagnosis_age="21"), 2, "diagnosis_age",
    "is above the age at death", header=PR)
add("people_icd_before_birth.csv", "people", person_record(icd="1998"), 2, "icd_date", "before the date of birth",
    header=PR)
add("people_icd_future.csv", "people", person_record(icd="2099-01-01"), 2, "icd_date", "in the future", header=PR)
add("people_pacemaker_after_death.csv", "people",
    person_record(vital="deceased", death="2019-03-01", pacemaker="2020-02-02"), 2, "pacemaker_date",
    "after the date of death", header=PR)
add("people_pacemaker_bad_date.csv", "people", person_record(pacemaker="03/2020"), 2, "pacemaker_date",
    "not an ISO 8601 date", header=PR)
add("people_diagnosis_place_too_long.csv", "people", person_record(diagnosis_age="20", place="x" * 201), 2,
    "diagnosis_place", "longer than 200 characters", header=PR)
add("assessments_bad_atrial_fibrillation.csv", "assessments", ass() + ",paroxysmal", 2, "atrial_fibrillation",
    "not yes, no or empty", header=H["assessments"] + ",atrial_fibrillation")
add("assessments_bad_status.csv", "assessments", ass(status="affected?"), 2, "affected_status", "not one of")
add("assessments_bad_yesno.csv", "assessments", ass(ath="sometimes"), 2, "competitive_athlete", "not yes or no")
add("assessments_missing_date.csv", "assessments", ass(date=""), 2, "assessment_date", "is empty")

# Digits of other scripts (Arabic-Indic, full-width) are not digits of a date, number, code or HGVS.
AR = str.maketrans("0123456789", "٠١٢٣٤٥٦٧٨٩")
FW = str.maketrans("0123456789", "０１２３４５６７８９")
add("people_arabic_indic_year.csv", "people", person(birth="2999".translate(AR), mother="", father=""), 2,
    "birth_date", "not an ISO 8601 date")
add("people_fullwidth_death.csv", "people", person(vital="deceased", death="2500-01-01".translate(FW)), 2,
    "death_date", "not an ISO 8601 date")
add("people_arabic_indic_contact_date.csv", "people", person(contact_date="2024-01-01".translate(AR)), 2,
    "contact_status_date", "not an ISO 8601 date")
add("people_fullwidth_death_age.csv", "people", person_record(vital="deceased", death="", death_age="20".translate(FW)),
    2, "death_age", "not a whole number of years", header=H["people_record"])
add("variants_arabic_indic_transcript.csv", "variants", variant(transcript="NM_000256.3".translate(AR)), 2,
    "transcript", "versioned transcript")
add("variants_fullwidth_hgvs.csv", "variants", variant(hgvs_c="c.1504C>T".translate(FW)), 2, "hgvs_c",
    "not an HGVS coding change")
add("variants_arabic_indic_classified_on.csv", "variants", variant(on="2023-01-01".translate(AR)), 2, "classified_on",
    "not an ISO 8601 date")
add("genetic_fullwidth_variant.csv", "genetic-results", gr(variant="NM_000256.3:c.1504C>T".translate(FW)), 2,
    "variant", "transcript:c.change")
add("studies_arabic_indic_value.csv", "studies", study(value="12.0".translate(AR)), 2, "value", "not a number")
add("studies_fullwidth_date.csv", "studies", study(date="2025-01-10".translate(FW)), 2, "study_date",
    "not an ISO 8601 date")
# Plausibility across the pedigree (T1-03 born 1968-04-12; T1-04 born 1966-09-30; T1-02 died 2015-06-01;
# T1-01 died in 2001, a year-only date).
add("people_mother_aged_4.csv", "people", person(birth="1972-06-01", father=""), 2, "mother", "under 5 years old")
add("people_father_aged_2.csv", "people", person(birth="1968-12-01", mother=""), 2, "father", "under 9 years old")
add("people_born_years_after_mother_death.csv", "people", person(birth="2020-01-01", mother="T1-02", father=""), 2,
    "birth_date", "after the death of the mother")
add("people_born_years_after_father_death.csv", "people", person(birth="2003-06-01", mother="", father="T1-01"), 2,
    "birth_date", "after the death of the father")
add("people_contact_before_birth.csv", "people", person(contact_date="1990-01-01"), 2, "contact_status_date",
    "before the date of birth")
add("people_mother_aged_90.csv", "people",
    person(code="T1-21", birth="1990", mother="T1-20", father="") + "\n" + person(birth="1900", mother="", father=""),
    2, "mother", "over 80 years old")
# Longer than the store's column: refused by the check on every backend.
add("variants_long_transcript.csv", "variants", variant(transcript="NM_" + "0" * 4995 + ".3"), 2, "transcript",
    "longer than 40 characters")
add("variants_long_hgvs_position.csv", "variants", variant(hgvs_c="c." + "1" * 300 + "C>T"), 2, "hgvs_c",
    "longer than 200 characters")
add("variants_ten_digit_position.csv", "variants", variant(hgvs_c="c.1234567890C>T"), 2, "hgvs_c",
    "not an HGVS coding change")
add("people_long_family_name.csv", "people", person(surname="Quarrendale" * 20), 2, "family_name",
    "longer than 200 characters")
add("people_long_gender_identity.csv", "people", person() .replace(",female,,", ",female," + "g" * 101 + ",", 1), 2,
    "gender_identity", "longer than 100 characters")
add("genetic_long_lab.csv", "genetic-results", gr(lab="L" * 201), 2, "lab", "longer than 200 characters")
add("studies_long_unit.csv", "studies", study(unit="m" * 21), 2, "unit", "longer than 20 characters")
add("families_long_condition.csv", "families", "FAM-T9," + "c" * 201 + ",", 2, "condition", "longer than 200")
# Special files: only regular files are read (a device never ends, a pipe blocks).
add("people_device.csv", "people", "", None, None, "is a device", link="/dev/zero")
# A file without its header row: the first record is never shown as column names.
add("people_no_header.csv", "people", person(code="T1-21"), 1, None, "is not a header row",
    header=person(birth="1987-03-19"))
add("people_name_as_column.csv", "people", person() + ",x", 1, "header cell 20", "unknown column",
    header=H["people"] + ",Zephyrine Quarrendale")
add("people_date_as_column.csv", "people", person() + ",x", 1, "header cell 20", "unknown column",
    header=H["people"] + ",1987-03-19")
# Edits and imports share one set of checks: the body size an edit may not store either.
add("studies_height_5000.csv", "studies", study(h="5000"), 2, "height_cm", "outside the plausible range")
add("studies_weight_tiny.csv", "studies", study(w="0.001"), 2, "weight_kg", "outside the plausible range")
# Refused on purpose (docs/data-layouts.md, "Refused on purpose").
add("people_code_case_only.csv", "people", person(code="t1-05"), 2, "person", "differs only by case")
add("people_code_case_in_file.csv", "people", person(code="T1-21") + "\n" + person(code="t1-21"), 3, "person",
    "differs only by case")
add("families_code_case_only.csv", "families", "fam-t2,hypertrophic cardiomyopathy,", 2, "family",
    "differs only by case")
add("people_mz_twins_two_families.csv", "people",
    person(code="T1-22", birth="1975-05-05", mother="", father="", twin="T2-01", twin_type="monozygotic"), 2, "twin_of",
    "twins are recorded in one family")
add("people_contactable_deceased.csv", "people", person(vital="deceased", death="2020-01-01", contact="contactable"),
    2, "contact_status", "person is deceased")
add("people_contactable_placeholder.csv", "people", person(placeholder="yes", contact="contactable"), 2,
    "contact_status", "placeholder member")
add("genetic_carrier_and_non_carrier_stored.csv", "genetic-results",
    gr(person="T1-06", date="2020-04-01", ttype="diagnostic_panel", result="non_carrier"), 2, "result",
    "carrier and non_carrier results for the same variant on the same day")
add("genetic_carrier_and_non_carrier_in_file.csv", "genetic-results",
    gr(person="T1-07", date="2024-02-02") + "\n" + gr(person="T1-07", date="2024-02-02", ttype="diagnostic_panel",
                                                        result="non_carrier", ref="IGL-0101"), 3, "result",
    "carrier and non_carrier results for the same variant on the same day")
add("assessments_pregnant_male.csv", "assessments", ass(person="T1-05", date="2020-01-01", preg="yes"), 2,
    "pregnant", "sex at birth is male")
add("people_bidi_override_name.csv", "people", person(given="Ann\u202eeB"), 2, "given_name", "invisible formatting")
add("people_zero_width_name.csv", "people", person(given="Ca\u200bi"), 2, "given_name", "invisible formatting")
add("people_bidi_isolate_notes.csv", "people", person(notes="see \u2067letter\u2069"), 2, "notes",
    "invisible formatting")
add("studies_zero_width_site.csv", "studies", study(site="Invented\ufeff Vale"), 2, "site", "invisible formatting")
add("assessments_bidi_symptoms.csv", "assessments", ass(symptoms="\u202adyspnoea"), 2, "symptoms",
    "invisible formatting")
add("variants_zero_width_reason.csv", "variants", variant(reason="re\u2060view", on="2024-01-01"), 2, "reason",
    "invisible formatting")

# The contact log's layouts (revision 0012), loaded with `tracker import KIND FILE` or in a folder with
# `tracker import all`: each row is checked as the matching form checks it.
H["contact-events"] = "person,event_date,channel,by_role,via,outcome,later_date,notes"
H["contact-wishes"] = "person,wish,via,recorded_date,notes,ended_date"
H["letters-sent"] = "person,kind,template,template_version,sent_date,sent_to,via,reply_date,notes"
H["external-results"] = "person,kind,result_date,centre,variant,result,document_ref,notes"
H["bookings"] = "person,visit_date,purpose,notes,cancelled_date"
H["discharges"] = "person,discharge_date,variant,acmg_class,classified_on,advice,notes"


def ce(person="T1-07", date="2024-03-01", channel="phone", by="nurse", via="", outcome="informed", later="",
       notes=""):  # fmt: skip
    return ",".join([person, date, channel, by, via, outcome, later, notes])


def cw(person="T1-05", wish="only_via_family_member", via="T1-03", on="2024-03-01", notes="", ended=""):
    return ",".join([person, wish, via, on, notes, ended])


def ls(person="T1-05", kind="first_contact", template="first_contact", version="sha256:0123456789ab",
       on="2024-03-01", to="person", via="", reply="", notes=""):  # fmt: skip
    return ",".join([person, kind, template, version, on, to, via, reply, notes])


def er(person="T1-07", kind="genetic_test", on="2024-03-01", centre="Invented Fell Hospital",
       variant="NM_000256.3:c.1504C>T", result="carrier", ref="IFH-0001", notes=""):  # fmt: skip
    return ",".join([person, kind, on, centre, variant, result, ref, notes])


def bk(person="T1-07", on="2024-03-01", purpose="first screening", notes="", cancelled=""):
    return ",".join([person, on, purpose, notes, cancelled])


def dc(person="T1-05", on="2024-03-01", variant="NM_000256.3:c.1504C>T", cls="likely_pathogenic", since="2018-06-15",
       advice="come back with symptoms or if the variant is reclassified", notes=""):  # fmt: skip
    return ",".join([person, on, variant, cls, since, advice, notes])


add("contact_events_bad_channel.csv", "contact-events", ce(channel="fax"), 2, "channel", "not one of")
add("contact_events_bad_outcome.csv", "contact-events", ce(outcome="reached"), 2, "outcome", "not one of")
add("contact_events_later_missing.csv", "contact-events", ce(outcome="contact_later"), 2, "later_date", "is empty")
add("contact_events_via_other_family.csv", "contact-events", ce(channel="via_family", by="", via="T2-01"), 2, "via",
    "belongs to another family")
add("contact_events_before_birth.csv", "contact-events", ce(date="2005-01-01"), 2, "event_date",
    "before the date of birth")
add("contact_events_future.csv", "contact-events", ce(date="2099-01-01"), 2, "event_date", "in the future")
add("contact_events_duplicate.csv", "contact-events", ce() + "\n" + ce(), 3, None, "duplicates row 2")
add("contact_events_unknown_person.csv", "contact-events", ce(person="T7-77"), 2, "person", "not a person in the store")
add("contact_wishes_bad_wish.csv", "contact-wishes", cw(wish="letters_only"), 2, "wish", "not one of")
add("contact_wishes_via_other_family.csv", "contact-wishes", cw(via="T2-01"), 2, "via", "belongs to another family")
add("contact_wishes_before_birth.csv", "contact-wishes", cw(on="1990-01-01"), 2, "recorded_date",
    "before the date of birth")
add("contact_wishes_future.csv", "contact-wishes", cw(on="2099-01-01"), 2, "recorded_date", "in the future")
add("contact_wishes_duplicate.csv", "contact-wishes", cw() + "\n" + cw(), 3, None, "duplicates row 2")
add("contact_wishes_unknown_person.csv", "contact-wishes", cw(person="T7-77"), 2, "person", "not a person in the store")
add("letters_sent_bad_kind.csv", "letters-sent", ls(kind="postcard"), 2, "kind", "not one of")
add("letters_sent_via_other_family.csv", "letters-sent", ls(to="via_family", via="T2-01"), 2, "via",
    "belongs to another family")
add("letters_sent_before_birth.csv", "letters-sent", ls(on="1990-01-01"), 2, "sent_date", "before the date of birth")
add("letters_sent_future.csv", "letters-sent", ls(on="2099-01-01"), 2, "sent_date", "in the future")
add("letters_sent_duplicate.csv", "letters-sent", ls() + "\n" + ls(), 3, None, "duplicates row 2")
add("letters_sent_unknown_person.csv", "letters-sent", ls(person="T7-77"), 2, "person", "not a person in the store")
add("external_results_bad_result.csv", "external-results", er(kind="screening", variant="", result="carrier"), 2,
    "result", "not one of")
add("external_results_other_family_variant.csv", "external-results", er(person="T2-02"), 2, "variant",
    "not a variant of family FAM-T2")
add("external_results_before_birth.csv", "external-results", er(on="2005-01-01"), 2, "result_date",
    "before the date of birth")
add("external_results_future.csv", "external-results", er(on="2099-01-01"), 2, "result_date", "in the future")
add("external_results_duplicate.csv", "external-results", er() + "\n" + er(), 3, None, "duplicates row 2")
add("external_results_unknown_person.csv", "external-results", er(person="T7-77"), 2, "person",
    "not a person in the store")
add("bookings_missing_purpose.csv", "bookings", bk(purpose=""), 2, "purpose", "is empty")
add("bookings_before_birth.csv", "bookings", bk(on="2005-01-01"), 2, "visit_date", "before the date of birth")
add("bookings_too_far_ahead.csv", "bookings", bk(on="2099-01-01"), 2, "visit_date", "years ahead")
add("bookings_duplicate.csv", "bookings", bk() + "\n" + bk(), 3, None, "duplicates row 2")
add("bookings_unknown_person.csv", "bookings", bk(person="T7-77"), 2, "person", "not a person in the store")
add("discharges_bad_class.csv", "discharges", dc(cls="benign-ish"), 2, "acmg_class", "not one of")
add("discharges_carrier.csv", "discharges", dc(person="T1-06"), 2, "person", "no non-carrier result")
add("discharges_class_differs.csv", "discharges", dc(cls="pathogenic"), 2, "acmg_class",
    "the store has the variant likely_pathogenic")
add("discharges_future.csv", "discharges", dc(on="2099-01-01"), 2, "discharge_date", "in the future")
add("discharges_duplicate.csv", "discharges", dc() + "\n" + dc(), 3, None, "duplicates row 2")
add("discharges_unknown_person.csv", "discharges", dc(person="T7-77"), 2, "person", "not a person in the store")

if __name__ == "__main__":
    for old in HERE.glob("*.csv"):
        old.unlink()
    with open(HERE / "manifest.toml", "w", encoding="utf-8") as fh:
        fh.write("# Malformed inputs, one mistake per file (written by make_corpus.py).\n")
        fh.write("# Each must be refused with one line naming the file, row and column, exit 1,\n")
        fh.write("# and leave the database unchanged.\n\n")
        for name, kind, data, row, column, frag in cases:
            if isinstance(data, str):
                (HERE / name).symlink_to(data)
            else:
                (HERE / name).write_bytes(data)
            fh.write(f"[[case]]\nfile = {json.dumps(name)}\nkind = {json.dumps(kind)}\n")
            if row is not None:
                fh.write(f"row = {row}\n")
            if column is not None:
                fh.write(f"column = {json.dumps(column)}\n")
            fh.write(f"message = {json.dumps(frag)}\n\n")
    print(f"{len(cases)} cases written")
