"""Cascade plan: predictive-testing eligibility per rule set, clinical screening, gaps.

Rule sets [V]: HRS 2022 consensus: predictive testing of
children recommended from 10-12 y, earlier may be considered with early-onset
disease in the family; ESC 2023: no minimum age (adults I B, children IIa B);
AHA/ACC: any age.  Screening [V]: all first-degree
relatives of affected members (AHA 2024 §6.8 rec 6; ESC 2023 §6.11); ESC 2023
RT14: a deceased first-degree relative brings in second-degree relatives.
Release of genotype-negative relatives: ESC 2023 I C [V]; HRS 2022 [V].
Age edges use the birthday convention of tracker.domain.dates (a birthday
counts on the day; 29 February -> 1 March in common years) and, for year-only
birth dates, the youngest possible age (31 December).  Invented family.
"""

from __future__ import annotations

import datetime as dt
from fractions import Fraction

import pandas as pd
import pytest

from tracker.domain.genetics import genotype_statuses
from tracker.domain.pedigree import Pedigree
from tracker.engines.cascade import RULE_SETS, age_for_rules, plan_cascade

from pedigrees import COLUMNS, V, ped, results  # noqa: F401

ON = dt.date(2026, 6, 15)


def child(code, born, precision="day", **kw):
    return dict(person=code, mother="CAR", father="PAR", birth_date=born, birth_date_precision=precision, **kw)


def family(extra_children=()):
    rows = [
        dict(person="CAR", sex_at_birth="female", birth_date=dt.date(1985, 3, 2), proband=True,
             contact_status="contactable"),
        dict(person="PAR", sex_at_birth="male", birth_date=dt.date(1984, 1, 1), contact_status="contactable"),
        child("AGE9", dt.date(2017, 1, 10)),
        child("AGE12", dt.date(2014, 3, 1)),
        child("INFANT", dt.date(2025, 12, 1)),
        child("ADULT", dt.date(2005, 5, 5)),
        *extra_children,
    ]
    return ped(rows)


def plan(p, guideline, on=ON, cls="pathogenic", res=None, **kw):
    g = genotype_statuses(p, res if res is not None else results(("CAR", "carrier")), cls)
    return plan_cascade(p, g, cls, on, guideline, affected=kw.pop("affected", {"CAR": "affected"}), **kw)


def by_person(items):
    return {i.person: i for i in items}


# --- HRS 2022: 9 vs 12 y, birthday edges ------------------------------------------------------

def test_hrs_2022_nine_versus_twelve():
    p = family()
    pl = plan(p, "hrs_2022_testing")
    t, d = by_person(pl.testing), by_person(pl.deferred)
    assert "AGE12" in t and t["AGE12"].recommendation.startswith("recommended (12 y or older)")
    assert "AGE9" in d and not d["AGE9"].eligible
    assert d["AGE9"].eligible_from == dt.date(2027, 1, 10)  # 10th birthday
    assert "INFANT" in d
    assert "ADULT" in t
    assert t["AGE12"].probability == Fraction(1, 2)  # child of a carrier: 1/2 (van Velzen 2018)
    assert t["AGE12"].reason.startswith("child of carrier CAR")


def test_hrs_2022_early_onset_exception():
    p = family()
    pl = plan(p, "hrs_2022_testing", early_onset_family=True)
    t = by_person(pl.testing)
    assert "AGE9" in t and t["AGE9"].recommendation.startswith("may be considered")
    assert "INFANT" in t
    assert not pl.deferred


@pytest.mark.parametrize(
    "on, where, words",
    [
        (dt.date(2026, 6, 14), "deferred", "deferred"),              # day before the 10th birthday
        (dt.date(2026, 6, 15), "testing", "recommended (10-12 y band"),  # on the 10th birthday
        (dt.date(2028, 6, 14), "testing", "recommended (10-12 y band"),  # day before the 12th
        (dt.date(2028, 6, 15), "testing", "recommended (12 y or older)"),  # on the 12th birthday
    ],
)
def test_hrs_2022_birthday_edges(on, where, words):
    p = family([child("EDGE", dt.date(2016, 6, 15))])
    pl = plan(p, "hrs_2022_testing", on=on)
    item = by_person(getattr(pl, where))["EDGE"]
    assert item.recommendation.startswith(words)


@pytest.mark.parametrize(
    "on, where",
    [
        (dt.date(2026, 3, 1), "deferred"),    # could be 10 already (born Jan-Jun 2016) but not surely
        (dt.date(2026, 12, 30), "deferred"),
        (dt.date(2026, 12, 31), "testing"),   # surely 10 (even if born 31 Dec 2016)
    ],
)
def test_year_only_birth_date_counted_conservatively(on, where):
    p = family([child("YEARONLY", dt.date(2016, 7, 1), precision="year")])
    pl = plan(p, "hrs_2022_testing", on=on)
    item = by_person(getattr(pl, where))["YEARONLY"]
    assert "birth year only" in item.age_note
    if where == "deferred":
        assert item.eligible_from == dt.date(2026, 12, 31)


def test_leap_day_birthday():
    # dates.py convention: 29 February birthdays fall on 1 March in common years
    p = family([child("LEAP", dt.date(2016, 2, 29))])
    assert "LEAP" in by_person(plan(p, "hrs_2022_testing", on=dt.date(2026, 2, 28)).deferred)
    assert "LEAP" in by_person(plan(p, "hrs_2022_testing", on=dt.date(2026, 3, 1)).testing)


def test_unknown_birth_date_is_listed_with_age_check():
    p = family([dict(person="NODOB", mother="CAR", father="PAR")])
    item = by_person(plan(p, "hrs_2022_testing").testing)["NODOB"]
    assert "confirm the age" in item.recommendation
    assert "not recorded" in item.age_note


def test_esc_2023_no_minimum_age():
    p = family()
    pl = plan(p, "esc_2023")
    t = by_person(pl.testing)
    assert {"AGE9", "AGE12", "INFANT", "ADULT"} <= set(t)
    assert not pl.deferred
    assert "IIa B" in t["INFANT"].recommendation
    assert "I B" in t["ADULT"].recommendation and "IIa" not in t["ADULT"].recommendation


def test_aha_any_age():
    p = family()
    pl = plan(p, "aha_acc_2020")
    assert {"AGE9", "AGE12", "INFANT", "ADULT"} <= set(pl.people("testing"))
    assert not pl.deferred
    assert "any age" in pl.testing[0].recommendation


def test_rule_sets_are_separate():
    assert RULE_SETS["esc_2023"].min_age_years is None
    assert RULE_SETS["aha_acc_2020"].min_age_years is None
    assert RULE_SETS["hrs_2022_testing"].min_age_years == 10
    with pytest.raises(ValueError):
        plan(family(), "esc_2014")


def test_age_for_rules_year_only():
    p = family([child("Y", dt.date(2016, 1, 1), precision="year")])
    a = age_for_rules(p, "Y", dt.date(2026, 12, 31))
    assert a.years == 10 and a.basis == "year_only"
    assert age_for_rules(p, "Y", dt.date(2016, 5, 1)).years == 0


# --- who is listed -------------------------------------------------------------------------------

def status_family():
    return family([
        child("DEAD", dt.date(2000, 1, 1), vital_status="deceased"),
        child("DECL", dt.date(2001, 1, 1), contact_status="declined"),
        child("LOST", dt.date(2002, 1, 1), contact_status="lost_to_follow_up"),
        child("CONT", dt.date(2003, 1, 1), contact_status="contactable"),
        child("SEEN", dt.date(2003, 2, 1), contact_status="contactable"),
        child("PH", dt.date(2003, 3, 1), placeholder=True),
        child("NEG", dt.date(2004, 1, 1), contact_status="contactable"),
        child("VU", dt.date(2004, 2, 1), vital_status="unknown"),
    ])


def test_listing_filters_and_gaps():
    p = status_family()
    res = results(("CAR", "carrier"), ("NEG", "non_carrier"))
    pl = plan(p, "esc_2023", res=res, seen={"SEEN", "NEG"})
    testing = set(pl.people("testing"))
    assert {"CONT", "SEEN", "ADULT", "VU"} <= testing
    assert not testing & {"DEAD", "DECL", "LOST", "PH", "NEG", "CAR"}
    assert "vital status unknown" in by_person(pl.testing)["VU"].notes[0]
    gaps = {(g.person, g.gap) for g in pl.gaps}
    assert ("ADULT", "never_contacted") in gaps
    assert ("CONT", "contacted_not_seen") in gaps
    assert ("LOST", "lost_to_follow_up") in gaps
    assert ("DECL", "declined") in gaps
    assert not any(g.person in ("SEEN", "DEAD", "PH", "NEG") for g in pl.gaps)
    assert all(g.family == "FAM-T" for g in pl.gaps)
    # the genotype-negative child is released (ESC 2023 I C)
    released = by_person(pl.released)
    assert "NEG" in released and "discharge" in released["NEG"].reason
    assert "NEG" not in pl.people("screening")
    frames = pl.frames()
    assert set(frames) == {"testing", "deferred", "segregation", "screening", "released", "gaps"}
    assert frames["testing"]["probability"].iloc[0] == 0.5


def test_screening_lists_carriers_at_risk_and_first_degree():
    p = status_family()
    res = results(("CAR", "carrier"), ("NEG", "non_carrier"), ("CONT", "carrier"))
    pl = plan(p, "aha_acc_2020", res=res)
    s = by_person(pl.screening)
    assert "carrier_surveillance" in s["CONT"].categories
    assert set(s["ADULT"].categories) == {"first_degree_of_affected", "at_risk"}
    # the carrier's partner: first-degree relative? no -- not a blood relative of CAR
    assert "PAR" not in s
    assert "CAR" not in s  # affected: a patient, not a screening candidate


def test_affected_non_carrier_relatives_screened_regardless():
    # an affected relative who tested negative: disease not explained by the family variant
    rows = [
        dict(person="CAR", sex_at_birth="female", contact_status="contactable"),
        dict(person="PHENO", mother="CAR"),
        dict(person="PH_KID", mother="PHENO"),
    ]
    p = ped(rows)
    res = results(("CAR", "carrier"), ("PHENO", "non_carrier"), ("PH_KID", "non_carrier"))
    g = genotype_statuses(p, res, "pathogenic")
    pl = plan_cascade(p, g, "pathogenic", ON, "esc_2023", affected={"CAR": "affected", "PHENO": "affected"})
    s = by_person(pl.screening)
    assert "PH_KID" in s and "not explained by the family variant" in s["PH_KID"].reason


def test_vus_family_clinical_screening_only():
    p = status_family()
    res = results(("CAR", "carrier"))
    pl = plan(p, "esc_2023", cls="uncertain_significance", res=res,
              affected={"CAR": "affected", "ADULT": "affected"})
    assert not pl.testing and not pl.deferred
    s = by_person(pl.screening)
    assert {"AGE9", "AGE12", "INFANT", "CONT"} <= set(s)
    assert all(c.categories == ("first_degree_of_affected",) for c in s.values())
    assert "clinical screening only" in s["AGE9"].reason
    # ESC 2023: segregation testing of affected relatives (ADULT untested, affected)
    assert pl.people("segregation") == ("ADULT",)
    assert any("VUS" in n for n in pl.notes)
    # AHA rule set: no segregation list
    assert not plan(p, "aha_acc_2020", cls="uncertain_significance", res=res,
                    affected={"CAR": "affected", "ADULT": "affected"}).segregation


def test_no_variant_family():
    p = family()
    pl = plan(p, "hrs_2022_testing", cls=None, res=results())
    assert not pl.testing
    assert {"AGE9", "AGE12", "INFANT", "ADULT"} == set(pl.people("screening"))


def test_esc_second_degree_through_deceased_relative():
    # ESC 2023 RT14: first-degree relative deceased -> second-degree relatives evaluated
    rows = [
        dict(person="GM", sex_at_birth="female"), dict(person="GF", sex_at_birth="male"),
        dict(person="DAD", mother="GM", father="GF", vital_status="deceased", sex_at_birth="male"),
        dict(person="UNC", mother="GM", father="GF"),
        dict(person="MUM", sex_at_birth="female"),
        dict(person="PRO", mother="MUM", father="DAD"),
        dict(person="COUSIN", father="UNC"),
    ]
    p = ped(rows)
    g = genotype_statuses(p, None, None)
    esc = plan_cascade(p, g, None, ON, "esc_2023", affected={"PRO": "affected"})
    s = by_person(esc.screening)
    assert s["UNC"].categories == ("second_degree_via_deceased",)
    assert {"GM", "GF"} <= set(s)
    # third degree: not a guideline category; listed only because the family has no P/LP variant, so
    # the recall schedule screens every blood relative of an affected member (common practice, said so)
    assert s["COUSIN"].categories == ("blood_relative_of_affected",)
    assert "third-degree relative of affected PRO" in s["COUSIN"].reason and "common practice" in s["COUSIN"].source
    assert "MUM" in s
    aha = plan_cascade(p, g, None, ON, "aha_acc_2020", affected={"PRO": "affected"})
    # AHA/ACC has no second-degree-through-deceased rule: UNC is listed only as a blood relative of an
    # affected member of a family without a P/LP variant (common practice, said so), never by the ESC rule
    a = by_person(aha.screening)
    assert a["UNC"].categories == ("blood_relative_of_affected",)


def test_no_variant_family_with_an_affected_partner_who_married_in():
    """Without a P/LP variant every blood relative of an affected member is listed, placed by the
    nearest affected member they are related to by blood; an affected partner who married in is no
    blood relative of the proband's cousin, and must not stop the plan (invented family)."""
    rows = [
        dict(person="GM", sex_at_birth="female"), dict(person="GF", sex_at_birth="male"),
        dict(person="DAD", mother="GM", father="GF", sex_at_birth="male"),
        dict(person="UNC", mother="GM", father="GF", sex_at_birth="male"),
        dict(person="MUM", sex_at_birth="female"),
        dict(person="PRO", mother="MUM", father="DAD", sex_at_birth="male"),
        dict(person="SP", sex_at_birth="female"),  # PRO's partner, affected too
        dict(person="KID", mother="SP", father="PRO"),
        dict(person="COUSIN", father="UNC"),
    ]
    p = ped(rows)
    g = genotype_statuses(p, None, None)
    pl = plan_cascade(p, g, None, ON, "esc_2023", affected={"PRO": "affected", "SP": "affected"})
    s = by_person(pl.screening)
    assert s["COUSIN"].categories == ("blood_relative_of_affected",)
    assert "third-degree relative of affected PRO" in s["COUSIN"].reason
    assert s["KID"].categories == ("first_degree_of_affected",)


def test_new_carrier_extends_the_cascade():
    # recomputing statuses after a sibling tests positive brings in her own children
    rows = [
        dict(person="GM", sex_at_birth="female"), dict(person="GF", sex_at_birth="male"),
        dict(person="PRO", mother="GM", father="GF", birth_date=dt.date(1970, 1, 1)),
        dict(person="SIS", mother="GM", father="GF", sex_at_birth="female", birth_date=dt.date(1972, 1, 1)),
        dict(person="BIL", sex_at_birth="male", birth_date=dt.date(1971, 1, 1)),
        dict(person="NIECE", mother="SIS", father="BIL", birth_date=dt.date(2000, 1, 1)),
    ]
    p = ped(rows)
    before = plan(p, "esc_2023", res=results(("PRO", "carrier")), affected={"PRO": "affected"})
    # stepwise (ESC 2023: the cascade widens stepwise [V]): her mother SIS, alive and untested, first
    t = by_person(before.deferred)
    assert t["NIECE"].probability == Fraction(1, 4)
    assert t["NIECE"].reason.startswith("niece/nephew of carrier PRO")
    assert t["NIECE"].recommendation.startswith("deferred: offer SIS first")
    assert "SIS" in before.people("testing")
    assert "NIECE" in before.people("screening") and "BIL" not in before.people("screening")
    after = plan(p, "esc_2023", res=results(("PRO", "carrier"), ("SIS", "carrier")), affected={"PRO": "affected"})
    t = by_person(after.testing)
    assert "SIS" not in t
    assert t["NIECE"].probability == Fraction(1, 2)
    assert t["NIECE"].reason.startswith("child of carrier SIS")
    s = by_person(after.screening)
    assert "carrier_surveillance" in s["SIS"].categories
    assert "BIL" not in s


def test_obligate_carrier_offered_confirmatory_test():
    rows = [
        dict(person="GM", sex_at_birth="female"),
        dict(person="MID", mother="GM", sex_at_birth="male", birth_date=dt.date(1960, 1, 1)),
        dict(person="GS", father="MID"),
    ]
    p = ped(rows)
    pl = plan(p, "hrs_2022_testing", res=results(("GM", "carrier"), ("GS", "carrier")), affected={})
    t = by_person(pl.testing)
    assert t["MID"].recommendation.startswith("confirmatory, optional")
    assert "carrier_surveillance" in by_person(pl.screening)["MID"].categories


def test_caution_present():
    pl = plan(family(), "esc_2023")
    assert "Decision support only" in pl.caution and "clinician decides" in pl.caution


def test_each_cascade_rule_set_cites_only_its_own_guideline_year():
    # Guidelines are never blended: a cascade rule set's title and sources name its own year only,
    # and the letters' screening-start phrase for that rule set does too.
    import re

    from tracker.engines.cascade import RULE_SETS
    from tracker.outputs.letter import SCREENING_START

    for gid, rs in RULE_SETS.items():
        year = re.search(r"(20\d\d)", gid).group(1)
        texts = [rs.title, rs.testing_source, rs.screening_source, rs.release_source, rs.second_degree_source,
                 rs.segregation_source or ""]  # fmt: skip
        texts.append(SCREENING_START[gid][1] if not gid.startswith("hrs") else "")
        for t in texts:
            years = set(re.findall(r"\b(?:19|20)\d\d\b", t))
            assert years <= {year}, (gid, t)
