"""Cascade and reclassification follow counselling practice, end to end and engine by engine.

Rules checked, each with its source:

* People not at risk by pedigree (married in, the other side of the family) are neither screened
  nor listed as gaps once the family variant explains the disease; without a P/LP variant every
  first-degree relative of an affected member is screened (AHA 2024 §6.8 rec 6; ESC 2023 §6.11 [V]).
* Stepwise cascade: testing starts with first-degree relatives of a carrier and widens as carriers
  are found (ESC 2023 [V]); a relative further out waits for the at-risk relative nearer the
  carrier unless that relative declined, died or cannot be reached (common practice).
* Affected members stay in affected follow-up after a reclassification (ESC 2023 §6.11: carrier
  surveillance is for unaffected carriers [V]).
* A relative who declined is named as such; re-approach follows the clinic's policy (default not
  re-approached: common practice).
* A genotype-negative release relies on the P/LP class in force at max(result date, date the
  class became P/LP); a downgrade recalls those relatives (AHA 2024 exception [V2]).
* Re-review of the class at intervals (AHA 2024 1 B-NR [V]); the 24-month default is common practice.

Invented families only.
"""

from __future__ import annotations

import datetime as dt
import json
from pathlib import Path

import pytest

from tracker.domain.genetics import (
    genotype_statuses,
    release_basis,
    rereview_reminder,
    stepwise_route,
)
from tracker.engines.cascade import plan_cascade
from tracker.engines.reclassification import impact_of_reclassification
from tracker.errors import UserError
from tracker.settings import parse_settings

from pedigrees import ped, results

D = dt.date
ON = D(2026, 11, 30)

# --------------------------------------------------------------------------- invented family PRAC1
# PR-01 (deceased, obligate) x PR-02 (married in; tested non-carrier 2016, while the variant was VUS)
#   |- PR-03 proband, affected carrier  x  PR-04 (married in, never contacted)
#   |     |- PR-07 affected carrier child
#   |- PR-05 untested, contactable          -> PR-06 untested, never contacted (waits for PR-05)
#   |- PR-08 declined 2017-05-01            -> PR-09 untested (offered directly: parent declined)
#   |- PR-10 tested non-carrier 2016 (VUS era) -> released when the class became LP (2019-03-01)
#   |- PR-11 affected, untested (diagnostic test, never deferred)
# Variant: VUS 2015-01-10, LP 2019-03-01.
PEOPLE = """person,family,given_name,family_name,sex_at_birth,gender_identity,birth_date,vital_status,death_date,mother,father,placeholder,proband,twin_of,twin_type,adoption,contact_status,contact_status_date,notes
PR-01,PRAC1,Osric,Fennimore,male,,1940-02-02,deceased,2010-03-03,,,no,no,,,,,,
PR-02,PRAC1,Hilde,Fennimore,female,,1942-04-04,alive,,,,no,no,,,,contactable,2016-01-05,married in
PR-03,PRAC1,Corin,Fennimore,male,,1965-05-05,alive,,PR-02,PR-01,no,yes,,,,contactable,2015-01-05,index case
PR-04,PRAC1,Talia,Fennimore,female,,1966-06-06,alive,,,,no,no,,,,,,married in
PR-05,PRAC1,Bram,Fennimore,male,,1968-07-07,alive,,PR-02,PR-01,no,no,,,,contactable,2016-01-05,
PR-06,PRAC1,Juno,Fennimore,female,,1995-08-08,alive,,,PR-05,no,no,,,,not_contacted,,
PR-07,PRAC1,Lark,Fennimore,female,,1992-09-09,alive,,PR-04,PR-03,no,no,,,,contactable,2016-01-05,
PR-08,PRAC1,Sable,Fennimore,female,,1970-10-10,alive,,PR-02,PR-01,no,no,,,,declined,2017-05-01,declined testing
PR-09,PRAC1,Wynn,Fennimore,male,,1998-11-11,alive,,PR-08,,no,no,,,,contactable,2020-01-05,
PR-10,PRAC1,Ansel,Fennimore,male,,1972-12-12,alive,,PR-02,PR-01,no,no,,,,contactable,2016-01-05,
PR-11,PRAC1,Rhea,Fennimore,female,,1974-01-13,alive,,PR-02,PR-01,no,no,,,,contactable,2016-01-05,
"""
FILES = {
    "families.csv": "family,condition,notes\nPRAC1,hypertrophic cardiomyopathy,invented family\n",
    "people.csv": PEOPLE,
    "variants.csv": """family,gene,transcript,hgvs_c,hgvs_p,zygosity,acmg_class,classified_on,reason
PRAC1,MYH7,NM_000257.4,c.2000A>G,p.(Lys667Arg),heterozygous,uncertain_significance,2015-01-10,invented
PRAC1,MYH7,NM_000257.4,c.2000A>G,p.(Lys667Arg),heterozygous,likely_pathogenic,2019-03-01,invented re-review
""",
    "genetic_results.csv": """person,test_date,test_type,variant,result,lab,report_reference
PR-03,2015-01-10,diagnostic_panel,NM_000257.4:c.2000A>G,carrier,Invented Lab,INV-1
PR-02,2016-02-01,predictive,NM_000257.4:c.2000A>G,non_carrier,Invented Lab,INV-2
PR-10,2016-02-01,predictive,NM_000257.4:c.2000A>G,non_carrier,Invented Lab,INV-3
PR-07,2020-02-01,predictive,NM_000257.4:c.2000A>G,carrier,Invented Lab,INV-4
""",
    "assessments.csv": """person,assessment_date,affected_status,symptoms,competitive_athlete,pregnant,hypertension,notes
PR-03,2015-01-05,affected,,no,no,no,
PR-07,2021-03-01,affected,,no,no,no,
PR-11,2022-03-01,affected,,no,no,no,
PR-05,2022-03-01,unaffected,,no,no,no,
""",
    "studies.csv": """person,study_date,modality,site,height_cm,weight_kg,measure,value,unit
PR-03,2024-11-01,echo,Invented Clinic,180,80,mwt_echo,18.0,mm
PR-05,2022-03-01,echo,Invented Clinic,178,75,mwt_echo,9.0,mm
PR-07,2021-03-01,echo,Invented Clinic,165,60,mwt_echo,16.0,mm
PR-11,2022-03-01,echo,Invented Clinic,165,60,mwt_echo,17.0,mm
""",
}


@pytest.fixture
def prac_db(db_url, run, tmp_path):
    folder = tmp_path / "prac1"
    folder.mkdir()
    for name, text in FILES.items():
        (folder / name).write_text(text, encoding="utf-8")
    assert run("init", db=db_url).code == 0
    r = run("import", "all", folder, db=db_url)
    assert r.code == 0, r
    return db_url


def js(run, *args, db):
    r = run(*args, "--json", db=db)
    assert r.code == 0, r
    return json.loads(r.out)


def settings_file(tmp_path: Path, text: str) -> Path:
    p = tmp_path / "clinic.toml"
    p.write_text('[schedule]\nguideline = "esc_2023"\n' + text, encoding="utf-8")
    return p


def test_cascade_counselling_practice(prac_db, run, tmp_path):
    s = settings_file(tmp_path, "")
    d = js(run, "cascade", "PRAC1", "--as-of", "2026-11-30", "--settings", s, db=prac_db)
    screening = {x["person"] for x in d["clinical_screening"]}
    gaps = {g["person"]: g for g in d["gaps"]}
    testing = {t["person"]: t for t in d["predictive_testing"]}
    deferred = {t["person"]: t for t in d["deferred"]}
    # married in, parent of an affected carrier whose disease the variant explains: not at risk
    assert "PR-04" not in screening and "PR-04" not in gaps
    # stepwise (ESC 2023: the cascade widens stepwise [V]): PR-06 waits for her father PR-05
    assert "PR-05" in testing and "PR-06" not in testing
    assert deferred["PR-06"]["recommendation"].startswith("deferred: offer PR-05 first")
    assert any("stepwise cascade" in n for n in deferred["PR-06"]["notes"])
    # the parent declined: the child is offered directly, and the list says why
    assert "PR-09" in testing and any("PR-08 declined" in n for n in testing["PR-09"]["notes"])
    # affected, untested: a diagnostic test, never deferred
    assert testing["PR-11"]["recommendation"].startswith("diagnostic")
    # the decline is dated and the default policy said
    assert "PR-08" not in testing
    assert "declined on 2017-05-01" in gaps["PR-08"]["reason"] and "not re-approached" in gaps["PR-08"]["reason"]
    assert "not re-approached" in d["declined_policy"]
    # releases name the class they relied on: tested while VUS, released when the class became LP
    released = {x["person"]: x for x in d["released"]}
    assert released["PR-10"]["released_on"] == "2019-03-01"
    assert released["PR-10"]["relied_on"] == (
        "released 2019-03-01, relying on the class likely pathogenic (classified 2019-03-01)")
    # re-review (AHA 2024 1 B-NR at intervals [V]; 24-month default: common practice)
    rr = d["variant_rereview"]
    assert rr["overdue"] is True and rr["due"] == "2021-03-01" and rr["acmg_class"] == "likely_pathogenic"
    assert "AHA 2024" in rr["source"]

    # the clinic re-approaches after 24 months: the decline is named beside the offer
    s2 = settings_file(tmp_path, "[cascade]\ndeclined_reapproach_months = 24\n")
    d2 = js(run, "cascade", "PRAC1", "--as-of", "2026-11-30", "--settings", s2, db=prac_db)
    t2 = {t["person"]: t for t in d2["predictive_testing"]}
    assert any("declined on 2017-05-01" in n and "re-approach" in n for n in t2["PR-08"]["notes"])
    # ... and not before 24 months have passed
    d3 = js(run, "cascade", "PRAC1", "--as-of", "2019-04-30", "--settings", s2, db=prac_db)
    assert "PR-08" not in {t["person"] for t in d3["predictive_testing"]}
    assert "not before 2019-05-01" in {g["person"]: g for g in d3["gaps"]}["PR-08"]["reason"]


def test_reclassify_upgrade_then_downgrade(prac_db, run, tmp_path):
    s = settings_file(tmp_path, "")
    # back to VUS (2025-01-10): PR-10 and PR-02 were released on the LP class of 2019-03-01
    down = js(run, "reclassify", "PRAC1", "--to", "uncertain_significance", "--date", "2025-01-10",
              "--reason", "laboratory re-review", "--settings", s, db=prac_db)  # fmt: skip
    items = down["reclassifications"][0]["items"]
    back = {i["person"]: i for i in items if i["change"] == "return_to_surveillance"}
    assert set(back) == {"PR-02", "PR-10"}  # exactly the released relatives (AHA 2024 exception [V2])
    assert "relying on the class likely pathogenic (classified 2019-03-01)" in back["PR-10"]["what_changes"]
    # the affected carrier stays in affected follow-up; no genotype-unknown screening schedule for him
    pro = next(i for i in items if i["person"] == "PR-03" and i["change"] == "loses_genotype_positive")
    assert "stays in affected follow-up" in pro["action"] and "genotype-unknown" not in pro["action"]
    c = js(run, "cascade", "PRAC1", "--as-of", "2025-02-01", "--settings", s, db=prac_db)
    assert c["released"] == []  # a non-carrier result under a VUS releases nobody
    assert c["variant_rereview"]["acmg_class"] == "uncertain_significance"  # a VUS always reminds
    assert c["variant_rereview"]["overdue"] is False and c["variant_rereview"]["due"] == "2027-01-10"

    # up again (2025-06-01): the non-carriers tested while VUS are re-interpreted, not "returned"
    up = js(run, "reclassify", "PRAC1", "--to", "pathogenic", "--date", "2025-06-01",
            "--reason", "segregation", "--settings", s, db=prac_db)  # fmt: skip
    items = up["reclassifications"][0]["items"]
    changes = {(i["person"], i["change"]) for i in items}
    assert ("PR-10", "result_reinterpreted_negative") in changes
    assert not any(ch == "return_to_surveillance" for _, ch in changes)
    by = {(i["person"], i["change"]): i for i in items}
    # affected carriers stay in affected follow-up (ESC 2023 §6.11: carrier surveillance is for unaffected carriers)
    for who in ("PR-03", "PR-07"):
        a = by[(who, "result_reinterpreted_positive")]["action"]
        assert "stays in affected follow-up" in a and "genotype-positive (carrier) surveillance" not in a
    # stepwise: PR-06 waits for PR-05; the declined PR-08 is named and not re-approached (default)
    assert "offer predictive testing to PR-05" in by[("PR-06", "predictive_testing_deferred")]["action"]
    assert ("PR-06", "offer_predictive_testing") not in changes
    dec = by[("PR-08", "declined_not_reapproached")]
    assert "declined on 2017-05-01" in dec["what_changes"] and "do not re-approach" in dec["action"]
    assert ("PR-08", "unscheduled_review") not in changes  # not recalled
    assert ("PR-11", "offer_diagnostic_testing") in changes  # affected, untested
    # the stored task holds the precise code (schema revision 0008)
    tasks = js(run, "tasks", "--family", "PRAC1", db=prac_db)["tasks"]
    stored = {(t["person"], t["change"]) for t in tasks}
    assert {("PR-06", "predictive_testing_deferred"), ("PR-08", "declined_not_reapproached"),
            ("PR-11", "offer_diagnostic_testing")} <= stored  # fmt: skip
    assert not any(t["what_changes"].startswith("[") for t in tasks)

    # Downgrading below 0008 keeps every task: the precise code moves to the front of the text
    # under the nearest older code, and the upgrade moves it back (nothing lost either way).
    from conftest import dump
    from tracker.store import migrate
    from tracker.store.database import locate, make_engine

    before = dump(prac_db)
    engine = make_engine(locate(prac_db))
    migrate.downgrade(engine, "0007")
    with engine.connect() as conn:
        from sqlalchemy import text as sql

        old = {r[0]: r[1] for r in conn.execute(sql("SELECT change, what_changes FROM impact_item "
                                                    "WHERE what_changes LIKE '[predictive_testing_deferred]%'"))}
    assert list(old) == ["offer_predictive_testing"]
    migrate.upgrade(engine)
    engine.dispose()
    assert dump(prac_db) == before

    # released again, now on the class of 2025-06-01; recall says so
    r = js(run, "recall", "PR-10", "--as-of", "2025-07-01", "--settings", s, db=prac_db)
    assert r["release_basis"]["released_on"] == "2025-06-01" and r["release_basis"]["relied_class"] == "pathogenic"


def test_check_and_worklist_show_the_rereview_reminder(prac_db, run, tmp_path):
    r = run("check", "--json", db=prac_db)
    assert r.code == 0, r  # a reminder is not a failure
    d = json.loads(r.out)
    assert d["ok"] is True
    (rem,) = d["reminders"]
    assert rem["check"] == "variant_rereview" and "PRAC1" in rem["where"] and "re-review" in rem["message"]
    w = js(run, "worklist", "--from", "2026-12-07", "--to", "2026-12-31", "--as-of", "2026-11-30",
           "--settings", settings_file(tmp_path, ""), db=prac_db)  # fmt: skip
    assert [x["family"] for x in w["variant_rereview"]] == ["PRAC1"]
    # a longer clinic interval: not yet due (LP classified 2019-03-01 + 96 months = 2027-03-01)
    s = settings_file(tmp_path, "[cascade]\nvariant_rereview_months = 96\n")
    w = js(run, "worklist", "--from", "2026-12-07", "--to", "2026-12-31", "--as-of", "2026-11-30",
           "--settings", s, db=prac_db)  # fmt: skip
    assert w["variant_rereview"] == []


# --------------------------------------------------------------------------- engines


def test_not_at_risk_people_are_neither_screened_nor_gaps():
    # SPOUSE married in; AUNT_M is the sister of the deceased non-carrying mother (other side);
    # with a P/LP variant neither is at risk.  ESC 2023 RT14 second-degree rule would otherwise list AUNT_M.
    p = ped([
        dict(person="GPM", sex_at_birth="male"), dict(person="GMM", sex_at_birth="female"),
        dict(person="MUM", mother="GMM", father="GPM", sex_at_birth="female", vital_status="deceased"),
        dict(person="AUNT_M", mother="GMM", father="GPM", contact_status="not_contacted"),
        dict(person="DAD", sex_at_birth="male", contact_status="contactable"),
        dict(person="PRO", mother="MUM", father="DAD", contact_status="contactable"),
        dict(person="SPOUSE", contact_status="not_contacted"),
        dict(person="KID", mother="SPOUSE", father="PRO", contact_status="contactable"),
    ])
    res = results(("PRO", "carrier"), ("DAD", "carrier"), ("KID", "carrier"))
    aff = {"PRO": "affected", "KID": "affected"}
    g = genotype_statuses(p, res, "pathogenic")
    pl = plan_cascade(p, g, "pathogenic", ON, "esc_2023", affected=aff)
    listed = set(pl.people("screening")) | {x.person for x in pl.gaps}
    assert not listed & {"SPOUSE", "AUNT_M", "GPM", "GMM"}
    # no P/LP variant: both parents of an affected child are screened (the disease may come from either side)
    g2 = genotype_statuses(p, res, "uncertain_significance")
    vus = plan_cascade(p, g2, "uncertain_significance", ON, "esc_2023", affected=aff)
    assert "SPOUSE" in vus.people("screening") and "SPOUSE" in {x.person for x in vus.gaps}


def test_sibling_of_a_de_novo_carrier_stays_listed():
    # both parents tested non-carrier: the variant arose anew; germline mosaicism leaves a small risk
    p = ped([
        dict(person="M", sex_at_birth="female"), dict(person="F", sex_at_birth="male"),
        dict(person="PRO", mother="M", father="F"), dict(person="SIB", mother="M", father="F"),
    ])
    g = genotype_statuses(p, results(("PRO", "carrier"), ("M", "non_carrier"), ("F", "non_carrier")), "pathogenic")
    assert g.mode == "de_novo" and g["SIB"].status == "not_at_risk"
    pl = plan_cascade(p, g, "pathogenic", ON, "esc_2023", affected={"PRO": "affected"})
    assert "SIB" in pl.people("screening")


def cousin_family(**uncle):
    #  GM x GF ; MUM (untested) -> PRO (carrier); UNC (untested) -> COUSIN
    return ped([
        dict(person="GM", sex_at_birth="female"), dict(person="GF", sex_at_birth="male"),
        dict(person="MUM", mother="GM", father="GF", sex_at_birth="female"),
        dict(person="PRO", mother="MUM"),
        dict(person="UNC", mother="GM", father="GF", sex_at_birth="male", **uncle),
        dict(person="COUSIN", father="UNC"),
    ])


def test_stepwise_route_walks_towards_the_carrier():
    p = cousin_family()
    g = genotype_statuses(p, results(("PRO", "carrier")), "pathogenic")
    # PRO's mother is first-degree: offered directly; the uncle waits for her; the cousin for the uncle
    assert stepwise_route(p, g, "MUM").first is None
    assert stepwise_route(p, g, "UNC").first == "MUM"
    assert stepwise_route(p, g, "COUSIN").first == "UNC"
    # the uncle died: the cousin waits for the next relative on the line who can be asked (MUM)
    p2 = cousin_family(vital_status="deceased")
    g2 = genotype_statuses(p2, results(("PRO", "carrier")), "pathogenic")
    r = stepwise_route(p2, g2, "COUSIN")
    assert r.first == "MUM" and r.passed == ("UNC has died",)
    # the uncle is lost to follow-up and the mother declined: offered directly, with both reasons
    p3 = ped([dict(r, contact_status="declined") if r["person"] == "MUM" else r for r in [
        dict(person="GM", sex_at_birth="female"), dict(person="GF", sex_at_birth="male"),
        dict(person="MUM", mother="GM", father="GF", sex_at_birth="female"),
        dict(person="PRO", mother="MUM"),
        dict(person="UNC", mother="GM", father="GF", sex_at_birth="male", contact_status="lost_to_follow_up"),
        dict(person="COUSIN", father="UNC"),
    ]])
    g3 = genotype_statuses(p3, results(("PRO", "carrier")), "pathogenic")
    r3 = stepwise_route(p3, g3, "COUSIN")
    assert r3.first is None and set(r3.passed) == {"UNC is lost to follow-up", "MUM declined"}
    # a parent known to carry (obligate): the grandchild of the carrier is offered directly
    p4 = ped([dict(person="GM", sex_at_birth="female"), dict(person="MID", mother="GM"),
              dict(person="A", father="MID"), dict(person="B", father="MID")])
    g4 = genotype_statuses(p4, results(("GM", "carrier"), ("A", "carrier")), "pathogenic")
    assert g4["MID"].basis == "obligate" and stepwise_route(p4, g4, "B").first is None


def test_engine_declined_policy_on_upgrade():
    p = ped([
        dict(person="PRO", contact_status="contactable"),
        dict(person="KID", mother="PRO", contact_status="declined"),
    ])
    res = results(("PRO", "carrier"))
    kw = dict(affected={"PRO": "affected"}, contact_dates={"KID": D(2020, 1, 1)}, on=D(2023, 1, 1))
    never = impact_of_reclassification(p, res, "uncertain_significance", "pathogenic", **kw)
    assert {i.change for i in never if i.person == "KID"} == {"declined_not_reapproached"}
    soon = impact_of_reclassification(p, res, "uncertain_significance", "pathogenic",
                                      declined_reapproach_months=24, **kw)  # fmt: skip
    (offer,) = [i for i in soon if i.person == "KID" and i.change == "offer_predictive_testing"]
    assert "declined on 2020-01-01" in offer.what_changes and "acknowledging the earlier decision" in offer.action


@pytest.mark.parametrize(
    "history, result, expected",
    [
        # LP then P: the release rests on the class in force on the later of result and LP date
        ([(D(2018, 1, 1), "likely_pathogenic"), (D(2020, 1, 1), "pathogenic")], D(2019, 1, 1),
         ("likely_pathogenic", D(2018, 1, 1), D(2019, 1, 1))),
        ([(D(2018, 1, 1), "likely_pathogenic"), (D(2020, 1, 1), "pathogenic")], D(2021, 1, 1),
         ("pathogenic", D(2020, 1, 1), D(2021, 1, 1))),
        # tested before the class became P/LP: released on the day it did
        ([(D(2015, 1, 1), "uncertain_significance"), (D(2018, 1, 1), "likely_pathogenic")], D(2016, 1, 1),
         ("likely_pathogenic", D(2018, 1, 1), D(2018, 1, 1))),
        # P, downgraded, upgraded again: the earlier release ended with the downgrade
        ([(D(2010, 1, 1), "pathogenic"), (D(2012, 1, 1), "uncertain_significance"),
          (D(2015, 1, 1), "likely_pathogenic")], D(2011, 1, 1),
         ("likely_pathogenic", D(2015, 1, 1), D(2015, 1, 1))),
    ],
)
def test_release_basis(history, result, expected):
    b = release_basis(history, result)
    assert (b.relied_class, b.classified_on, b.released_on) == expected


def test_no_release_without_a_plp_class():
    assert release_basis([(D(2015, 1, 1), "uncertain_significance")], D(2016, 1, 1)) is None
    assert release_basis([(D(2015, 1, 1), "pathogenic"), (D(2016, 1, 1), "likely_benign")], D(2015, 6, 1)) is None


def test_rereview_reminder():
    # a VUS always reminds; other classes once the interval has passed (24 months: common practice)
    v = rereview_reminder("uncertain_significance", D(2025, 1, 31), D(2025, 6, 1))
    assert v is not None and not v.overdue and v.due == D(2027, 1, 31)
    assert rereview_reminder("pathogenic", D(2025, 1, 31), D(2027, 1, 30)) is None
    p = rereview_reminder("pathogenic", D(2025, 1, 31), D(2027, 1, 31))
    assert p is not None and p.overdue
    assert rereview_reminder("likely_pathogenic", D(2024, 8, 31), D(2025, 3, 1), 6).due == D(2025, 2, 28)  # month end
    assert rereview_reminder(None, None, D(2025, 1, 1)) is None


def test_cascade_settings_are_checked():
    s = parse_settings({"cascade": {"declined_reapproach_months": 18}})
    assert s.cascade.declined_reapproach_months == 18 and s.cascade.variant_rereview_months == 24
    assert parse_settings({}).cascade.declined_reapproach_months is None  # default: not re-approached
    for bad in ({"variant_rereview_months": 0}, {"declined_reapproach_months": "often"}, {"other": 1}):
        with pytest.raises(UserError, match=r"\[cascade\]"):
            parse_settings({"cascade": bad}, "clinic.toml")


def test_affected_non_carrier_is_never_released_nor_discharged():
    # PHENO is affected and tested non-carrier: the variant does not explain her disease (phenocopy
    # or a second cause); an affected member stays in affected follow-up whatever the class does.
    p = ped([dict(person="CAR", contact_status="contactable"), dict(person="PHENO", mother="CAR"),
             dict(person="NEG", mother="CAR")])
    res = results(("CAR", "carrier"), ("PHENO", "non_carrier"), ("NEG", "non_carrier"))
    aff = {"CAR": "affected", "PHENO": "affected"}
    up = impact_of_reclassification(p, res, "uncertain_significance", "pathogenic", affected=aff,
                                    history=[(D(2015, 1, 1), "uncertain_significance")])  # fmt: skip
    pheno = next(i for i in up if i.person == "PHENO" and i.change == "result_reinterpreted_negative")
    assert "stays in affected follow-up" in pheno.action and "discharge" not in pheno.action
    neg = next(i for i in up if i.person == "NEG" and i.change == "result_reinterpreted_negative")
    assert "discharge from screening may be offered" in neg.action
    down = impact_of_reclassification(p, res, "pathogenic", "uncertain_significance", affected=aff,
                                      history=[(D(2015, 1, 1), "pathogenic")])  # fmt: skip
    changes = {(i.person, i.change) for i in down}
    assert ("NEG", "return_to_surveillance") in changes
    assert not {("PHENO", "return_to_surveillance"), ("PHENO", "keep_in_surveillance")} & changes


def test_no_at_risk_letter_while_a_nearer_relative_waits(prac_db, run, tmp_path):
    # stepwise cascade: PR-06's father PR-05 is offered testing first, so no letter goes to PR-06 yet
    s = tmp_path / "clinic.toml"
    s.write_text('[schedule]\nguideline = "esc_2023"\n[clinic]\nname = "Invented clinic"\nphone = "000"\n'
                 'email = "clinic@example.invalid"\nsignatory = "Invented Signatory"\n', encoding="utf-8")
    r = run("report", "letter", "PR-06", "--out", tmp_path, "--settings", s, "--date", "2026-11-30", db=prac_db)
    assert r.code == 1, r
    assert len(r.err.strip().splitlines()) == 1 and "offer testing to PR-05 first" in r.err
    assert not list(tmp_path.glob("*PR-06*"))
    ok = run("report", "letter", "PR-05", "--out", tmp_path, "--settings", s, "--date", "2026-11-30", db=prac_db)
    assert ok.code == 0, ok


def test_upgrade_tells_who_is_no_longer_at_risk():
    # VUS family: SP, married in, is screened as the mother of affected KID (the disease could come
    # from either side).  Once the variant is P/LP and came through PRO, she is not at risk.
    p = ped([dict(person="PRO", sex_at_birth="male"), dict(person="SP", sex_at_birth="female"),
             dict(person="KID", mother="SP", father="PRO")])
    res = results(("PRO", "carrier"), ("KID", "carrier"))
    aff = {"PRO": "affected", "KID": "affected"}
    items = impact_of_reclassification(p, res, "uncertain_significance", "likely_pathogenic",
                                       {"SP": "surveillance"}, affected=aff)  # fmt: skip
    sp = {i.change: i for i in items if i.person == "SP"}
    assert "no_longer_at_risk" in sp and "may stop" in sp["no_longer_at_risk"].action
    # a sibling of a carrier in whom the variant arose anew keeps a small risk (germline mosaicism)
    p2 = ped([dict(person="M", sex_at_birth="female"), dict(person="F", sex_at_birth="male"),
              dict(person="PRO", mother="M", father="F"), dict(person="SIB", mother="M", father="F")])
    res2 = results(("PRO", "carrier"), ("M", "non_carrier"), ("F", "non_carrier"))
    items2 = impact_of_reclassification(p2, res2, "uncertain_significance", "pathogenic",
                                        {"SIB": "surveillance"}, affected={"PRO": "affected"})  # fmt: skip
    assert not any(i.person == "SIB" and i.change == "no_longer_at_risk" for i in items2)


def test_upgrade_offer_to_a_relative_lost_to_follow_up_says_so():
    p = ped([dict(person="M", sex_at_birth="female"), dict(person="F", sex_at_birth="male"),
             dict(person="PRO", mother="M", father="F"),
             dict(person="SIB_L", mother="M", father="F", contact_status="lost_to_follow_up")])
    items = impact_of_reclassification(p, results(("PRO", "carrier")), "uncertain_significance", "pathogenic",
                                       affected={"PRO": "affected"})  # fmt: skip
    (offer,) = [i for i in items if i.person == "SIB_L" and i.change == "offer_predictive_testing"]
    assert "lost to follow-up" in offer.what_changes
