"""The cascade, reclassify, tasks, recall and worklist commands, end to end.

Data: the invented demo families (demo_family/README.md tells their stories)
and a small invented family written below (family RCL1), built for a
downgrade of its variant.  The clinic settings are demo_family/clinic.toml
(rule set esc_2023, policy "shortest": the lower end of each interval range).
Each clinical check names its guideline source.
"""

from __future__ import annotations

import csv
import datetime as dt
import json
from pathlib import Path

import pytest
from icalendar import Calendar

from tracker.outputs import worklist_csv

ROOT = Path(__file__).parent.parent
SETTINGS = ROOT / "demo_family" / "clinic.toml"

FILES = {
    "families.csv": """family,condition,notes
RCL1,hypertrophic cardiomyopathy,invented family for a variant downgrade
""",
    "people.csv": """person,family,given_name,family_name,sex_at_birth,gender_identity,birth_date,vital_status,death_date,mother,father,placeholder,proband,twin_of,twin_type,adoption,contact_status,contact_status_date,notes
RC-01,RCL1,Aldous,Quillfeather,male,,1950-03-01,deceased,1995-05-05,,,no,no,,,,,,Sudden death while swimming aged 45
RC-02,RCL1,Maud,Quillfeather,female,,1952-06-01,alive,,,,no,no,,,,contactable,2018-02-01,Tested non-carrier: the variant came from RC-01
RC-03,RCL1,Isolde,Brackwater,female,,1975-04-10,alive,,RC-02,RC-01,no,yes,,,,contactable,2017-11-01,Index case
RC-04,RCL1,Perrin,Brackwater,male,,1973-01-01,alive,,,,no,no,,,,,,Married in
RC-05,RCL1,Lorcan,Quillfeather,male,,1978-08-08,alive,,RC-02,RC-01,no,no,,,,contactable,2018-02-01,Non-carrier; discharged
RC-06,RCL1,Wren,Brackwater,female,,2015-05-05,alive,,RC-03,RC-04,no,no,,,,contactable,2018-02-01,Carrier child
RC-07,RCL1,Tobin,Brackwater,male,,2012-02-02,alive,,RC-03,RC-04,no,no,,,,contactable,2018-02-01,Untested
RC-08,RCL1,Ysolde,Quillfeather,female,,1980-09-09,alive,,RC-02,RC-01,no,no,,,,declined,2018-03-01,Declined
""",
    "variants.csv": """family,gene,transcript,hgvs_c,hgvs_p,zygosity,acmg_class,classified_on,reason
RCL1,MYH7,NM_000257.4,c.1208G>A,p.(Arg403Gln),heterozygous,pathogenic,2018-01-15,invented classification
""",
    "genetic_results.csv": """person,test_date,test_type,variant,result,lab,report_reference
RC-03,2018-01-15,diagnostic_panel,NM_000257.4:c.1208G>A,carrier,Invented Lab,INV-1
RC-02,2018-03-01,predictive,NM_000257.4:c.1208G>A,non_carrier,Invented Lab,INV-4
RC-05,2019-03-01,predictive,NM_000257.4:c.1208G>A,non_carrier,Invented Lab,INV-2
RC-06,2021-04-01,predictive,NM_000257.4:c.1208G>A,carrier,Invented Lab,INV-3
""",
    "assessments.csv": """person,assessment_date,affected_status,symptoms,competitive_athlete,pregnant,hypertension,notes
RC-03,2017-11-01,affected,exertional breathlessness,no,no,no,
RC-03,2024-11-01,affected,exertional breathlessness,no,no,no,
RC-05,2019-04-01,unaffected,,no,no,no,
RC-06,2024-06-01,unaffected,,no,no,no,
RC-07,2024-06-01,unaffected,,no,no,no,
""",
    "studies.csv": """person,study_date,modality,site,height_cm,weight_kg,measure,value,unit
RC-03,2024-11-01,echo,Invented Clinic,165,60,mwt_echo,19.0,mm
RC-05,2019-04-01,echo,Invented Clinic,178,75,mwt_echo,9.0,mm
RC-06,2024-06-01,echo,Invented Clinic,120,22,mwt_echo,6.0,mm
RC-07,2024-06-01,echo,Invented Clinic,145,35,mwt_echo,7.0,mm
""",
}
NAMES = ["Aldous", "Quillfeather", "Isolde", "Brackwater", "Lorcan", "Wren", "Tobin", "Ysolde"]


@pytest.fixture
def rc_db(db_url, run, tmp_path):
    """A database holding only the invented family RCL1 (SQLite and, when configured, PostgreSQL)."""
    folder = tmp_path / "rcl1"
    folder.mkdir()
    for name, text in FILES.items():
        (folder / name).write_text(text, encoding="utf-8")
    assert run("init", db=db_url).code == 0
    r = run("import", "all", folder, db=db_url)
    assert r.code == 0, r
    return db_url


@pytest.fixture(scope="module")
def demo_db(tmp_path_factory):
    """The demo database, built once for the module with `tracker demo`."""
    from tracker.cli.app import main

    path = str(tmp_path_factory.mktemp("demo") / "demo.sqlite")
    assert main(["demo", "--db", path]) == 0
    return path


def js(run, *args, db):
    r = run(*args, "--json", db=db)
    assert r.code == 0, r
    return json.loads(r.out)


def one_line_error(r, *words):
    assert r.code == 1, r
    assert len(r.err.strip().splitlines()) == 1 and "Traceback" not in r.err
    for w in words:
        assert w in r.err


# --------------------------------------------------------------------------- cascade


CASCADE_KEYS = {"family", "as_of", "guideline", "guideline_title", "variant", "family_features", "predictive_testing",
                "deferred", "segregation_testing", "clinical_screening", "released", "gaps", "notes", "caution",
                "variant_rereview", "declined_policy"}  # fmt: skip


def test_cascade_for_a_plp_family_lists_untested_relatives_and_gaps(demo_db, run):
    d = js(run, "cascade", "HV01", "--as-of", "2026-11-30", "--settings", SETTINGS, db=demo_db)
    assert set(d) == CASCADE_KEYS
    assert d["guideline"] == "esc_2023" and d["variant"]["acmg_class"] == "pathogenic"
    testing = {t["person"]: t for t in d["predictive_testing"]}
    # In HV01 every reachable at-risk relative has been tested: the mother (II-2) tested non-carrier,
    # so the variant is paternal and her son by her second husband (III-6) is not at risk.
    assert "HV01-II-2" not in testing and "HV01-III-6" not in testing
    # ESC 2023 (cascade testing of at-risk relatives, adults I B; children IIa B, no minimum age):
    # HV02-IV-4, untested child of a carrier, is offered testing at 1/2.
    d2 = js(run, "cascade", "HV02", "--as-of", "2026-11-30", "--settings", SETTINGS, db=demo_db)
    offered = {t["person"]: t for t in d2["predictive_testing"]}
    assert offered["HV02-IV-4"]["probability"] == 0.5
    for t in list(testing.values()) + list(offered.values()):
        assert t["reason"] and "ESC 2023" in t["source"] and t["probability"] > 0
    # carriers (HV01-III-3 G+P-) are screened, not offered testing; ESC 2023 §6.11 carrier surveillance
    screening = {s["person"]: s for s in d["clinical_screening"]}
    assert "HV01-III-3" in screening and "HV01-III-3" not in testing
    # the non-carrier mother and nephew are released (ESC 2023 §6.11 discharge of G- relatives, I C)
    assert [r["person"] for r in d["released"]] == ["HV01-II-2", "HV01-IV-3"]  # both tested non-carriers
    gaps = {g["person"]: g for g in d["gaps"]}
    assert gaps["HV01-III-5"]["gap"] == "declined" and gaps["HV01-III-5"]["recalled"] is False  # listed, not recalled
    assert gaps["HV01-IV-4"]["gap"] == "lost_to_follow_up"
    assert "HV01-III-5" not in testing and "HV01-IV-4" not in testing
    # the deceased never appear in any list
    listed = {x["person"] for k in ("predictive_testing", "deferred", "clinical_screening", "released", "gaps")
              for x in d[k]}  # fmt: skip
    assert not listed & {"HV01-I-1", "HV01-I-2", "HV01-II-1", "HV01-II-3", "HV01-II-4"}
    assert {"plp_variant", "familial_disease", "sudden_death"} <= set(d["family_features"])
    assert "Decision support only" in d["caution"]


def test_cascade_vus_family_offers_no_predictive_testing(demo_db, run):
    d = js(run, "cascade", "HV03", "--settings", SETTINGS, db=demo_db)
    # ESC 2023: VUS in the proband: no cascade testing; relatives on clinical screening
    assert d["predictive_testing"] == [] and d["variant"]["acmg_class"] == "uncertain_significance"
    assert {"HV03-III-1", "HV03-III-2"} <= {s["person"] for s in d["clinical_screening"]}


def test_cascade_errors(demo_db, run):
    one_line_error(run("cascade", "NOPE", "--settings", SETTINGS, db=demo_db), "unknown family", "NOPE")
    one_line_error(run("cascade", "HV01", "--guideline", "esc_2014", db=demo_db), "no cascade rule set")


# --------------------------------------------------------------------------- reclassification


def test_downgrade_returns_released_non_carrier_to_surveillance(rc_db, run, tmp_path):
    before = js(run, "recall", "RC-05", "--as-of", "2025-05-01", "--settings", SETTINGS, db=rc_db)
    # ESC 2023 §6.11: genotype-negative relative in a P/LP family discharged (I C)
    assert before["status"] == "released" and before["rule_id"] == "esc23.release.non_carrier"
    cascade = js(run, "cascade", "RCL1", "--as-of", "2025-05-01", "--settings", SETTINGS, db=rc_db)
    assert "RC-05" in {r["person"] for r in cascade["released"]}

    d = js(run, "reclassify", "RCL1", "--to", "uncertain_significance", "--date", "2025-06-01",
           "--reason", "laboratory re-review", "--settings", SETTINGS, db=rc_db)  # fmt: skip
    assert set(d) == {"dry_run", "reclassifications", "caution"} and d["dry_run"] is False
    (r,) = d["reclassifications"]
    assert set(r) == {"family", "gene", "variant", "from_class", "to_class", "classified_on", "reason",
                      "classification_id", "items", "notes"}  # fmt: skip
    assert (r["from_class"], r["to_class"]) == ("pathogenic", "uncertain_significance")
    changes = {(i["person"], i["change"]) for i in r["items"]}
    # AHA 2024 exception [V2] / project reference notes §6: discharged variant-negative relatives go
    # back into clinical screening after a downgrade; carriers lose G+ status; family re-counselled
    assert (None, "recounsel_family") in changes
    assert ("RC-05", "return_to_surveillance") in changes
    assert ("RC-03", "loses_genotype_positive") in changes and ("RC-06", "loses_genotype_positive") in changes
    assert ("RC-07", "testing_withdrawn") in changes  # ESC 2023: VUS, no cascade testing
    assert not any(p == "RC-01" for p, _ in changes)  # deceased: no task
    assert all(i["id"] is not None for i in r["items"])

    tasks = js(run, "tasks", "--family", "RCL1", db=rc_db)
    assert set(tasks) == {"tasks", "caution"}
    assert {(t["person"], t["change"]) for t in tasks["tasks"]} == changes
    assert set(tasks["tasks"][0]) == {"id", "family", "person", "variant", "gene", "classification", "classified_on",
                                      "change", "what_changes", "action", "source", "created_at", "created_by",
                                      "status", "done_on", "done_by", "done_note"}  # fmt: skip

    # open task: the variant_reclassified trigger asks for a review now (ESC 2023: new family data)
    after = js(run, "recall", "RC-05", "--as-of", "2025-06-10", "--settings", SETTINGS, db=rc_db)
    assert after["status"] == "due" and after["due"] == "2025-06-10"
    assert "variant_reclassified" in after["triggers"]
    assert after["state"]["genotype"] == "uncertain" and "plp_variant" not in after["state"]["family_features"]

    # the nurse closes RC-05's tasks (never deleted: done date, who, note)
    rc05 = [t for t in tasks["tasks"] if t["person"] == "RC-05"]
    for t in rc05:
        done = js(run, "tasks", "done", t["id"], "--note", "recall letter sent", "--user", "nurse1", db=rc_db)
        assert done["status"] == "done" and done["done_by"] == "nurse1" and done["done_note"] == "recall letter sent"
        assert done["done_on"] is not None
    one_line_error(run("tasks", "done", rc05[0]["id"], "--note", "again", db=rc_db), "already done")
    one_line_error(run("tasks", "done", "99999", "--note", "x", db=rc_db), "no task")
    # not seen since the reclassification: the review is still due now
    waiting = js(run, "recall", "RC-05", "--as-of", "2025-06-10", "--settings", SETTINGS, db=rc_db)
    assert waiting["due"] == "2025-06-10" and "variant_reclassified" in waiting["triggers"]
    # he is seen on 2025-06-05: from then on routine surveillance, never released again.
    # ESC 2023 §6.11, single-case family without a P/LP variant: 1-3 y (safer default, common
    # practice); policy shortest = 12 months after the visit
    visit = tmp_path / "visit"
    visit.mkdir()
    (visit / "assessments.csv").write_text(
        "person,assessment_date,affected_status,symptoms,competitive_athlete,pregnant,hypertension,notes\n"
        "RC-05,2025-06-05,unaffected,,no,no,no,reviewed after the downgrade\n", encoding="utf-8")
    (visit / "studies.csv").write_text(
        "person,study_date,modality,site,height_cm,weight_kg,measure,value,unit\n"
        "RC-05,2025-06-05,echo,Invented Clinic,178,76,mwt_echo,9.1,mm\n", encoding="utf-8")
    assert run("import", "all", visit, db=rc_db).code == 0
    later = js(run, "recall", "RC-05", "--as-of", "2025-06-10", "--settings", SETTINGS, db=rc_db)
    assert later["status"] == "due" and "variant_reclassified" not in later["triggers"]
    assert (later["due"], later["interval_months"]) == ("2026-06-05", 12)
    assert later["rule_id"] == "esc23.adult.at_risk_single_case.to60"
    still_open = js(run, "tasks", "--family", "RCL1", db=rc_db)["tasks"]
    assert "RC-05" not in {t["person"] for t in still_open}
    everything = js(run, "tasks", "--all", db=rc_db)["tasks"]
    assert len(everything) == len(tasks["tasks"])  # done tasks are kept, never deleted

    # history kept: both classification rows exported
    out = tmp_path / "variants.csv"
    assert run("export", "variants", "--out", out, db=rc_db).code == 0
    rows = list(csv.DictReader(out.open(encoding="utf-8")))
    assert [(x["acmg_class"], x["classified_on"]) for x in rows] == [
        ("pathogenic", "2018-01-15"), ("uncertain_significance", "2025-06-01")]  # fmt: skip

    # refusals: same class again, a date not after the latest classification
    one_line_error(run("reclassify", "RCL1", "--to", "uncertain_significance", "--date", "2025-07-01",
                       "--reason", "x", db=rc_db), "already classified")  # fmt: skip
    one_line_error(run("reclassify", "NM_000257.4:c.1208G>A", "--to", "pathogenic", "--date", "2025-06-01",
                       "--reason", "x", db=rc_db), "not after the latest classification")  # fmt: skip


def test_dry_run_writes_nothing(rc_db, run):
    d = js(run, "reclassify", "RCL1", "--to", "likely_pathogenic", "--date", "2025-06-01", "--reason", "r",
           "--dry-run", db=rc_db)  # fmt: skip
    assert d["dry_run"] is True and d["reclassifications"][0]["classification_id"] is None
    assert js(run, "tasks", "--all", db=rc_db)["tasks"] == []
    one_line_error(run("reclassify", "NOFAM", "--to", "benign", "--date", "2025-06-01", "--reason", "r", db=rc_db),
                   "unknown family")  # fmt: skip


def test_upgrade_vus_to_lp_makes_untested_relatives_eligible(demo_db, run, tmp_path):
    import shutil

    db = str(tmp_path / "upgrade.sqlite")
    shutil.copy(demo_db, db)
    d = js(run, "reclassify", "HV03", "--to", "likely_pathogenic", "--date", "2026-11-30",
           "--reason", "second affected carrier; laboratory re-review", "--settings", SETTINGS, db=db)  # fmt: skip
    items = d["reclassifications"][0]["items"]
    offered = {i["person"] for i in items if i["change"] == "offer_predictive_testing"}
    # ESC 2023 (adults I B, children IIa B) / AHA 2024 §6.8: cascade testing once the variant is P/LP
    assert {"HV03-III-1", "HV03-III-2"} <= offered
    assert {"HV03-I-1", "HV03-I-2"}.isdisjoint({i["person"] for i in items})  # placeholders: no task
    reinterpreted = {i["person"] for i in items if i["change"] == "result_reinterpreted_positive"}
    assert reinterpreted == {"HV03-II-1", "HV03-II-3"}
    c = js(run, "cascade", "HV03", "--settings", SETTINGS, db=db)
    testing = {t["person"]: t for t in c["predictive_testing"]}
    assert testing["HV03-III-1"]["probability_text"] == "1/2"  # child of a carrier (first degree: 1/2)
    # grandchild: stepwise (ESC 2023: the cascade widens stepwise [V]): her mother HV03-III-2 first
    deferred = {t["person"]: t for t in c["deferred"]}
    assert "HV03-IV-1" not in testing and deferred["HV03-IV-1"]["probability_text"] == "1/4"
    assert deferred["HV03-IV-1"]["recommendation"].startswith("deferred: offer HV03-III-2 first")
    assert "HV03-II-4" not in testing  # declined: a gap, not recalled
    assert c["variant"]["acmg_class"] == "likely_pathogenic"


# --------------------------------------------------------------------------- recall


RECALL_KEYS = {"person", "family", "as_of", "rule_set", "rule_set_title", "policy", "status", "due", "days_overdue",
               "interval_months", "routine_due", "rule_id", "needs", "consider", "reason", "source", "fired",
               "triggers", "flags", "notes", "state", "cautions", "trend_modifiers", "never_screened", "eligible_since",
               "gap_reason", "waiting", "release_basis", "risk_scd"}  # fmt: skip


def test_recall_carrier_child(rc_db, run):
    d = js(run, "recall", "RC-06", "--as-of", "2025-01-10", "--settings", SETTINGS, db=rc_db)
    assert set(d) == RECALL_KEYS
    # ESC 2023 §6.11: child carrying the family variant, phenotype negative: ECG and imaging every
    # 1-3 y; policy shortest: 12 months after the 2024-06-01 echo
    assert d["rule_id"] == "esc23.child.carrier"
    assert (d["status"], d["due"], d["interval_months"]) == ("due", "2025-06-01", 12)
    assert d["needs"] == ["ecg", "echo"]
    rule = next(f for f in d["fired"] if f["code"] == "esc23.child.carrier")
    assert rule["applied"] and "ESC 2023" in rule["source"] and rule["tag"] == "V"
    assert any("Decision support only" in c for c in d["cautions"])
    assert d["trend_modifiers"]["note"]


def test_recall_demo_carrier_child(demo_db, run):
    # HV02-IV-1 (carrier, aged 11 at the date): ESC 2023 §6.11 children every 1-3 y; shortest 12 months
    d = js(run, "recall", "HV02-IV-1", "--as-of", "2019-12-01", "--settings", SETTINGS, db=demo_db)
    assert d["rule_id"] == "esc23.child.carrier" and d["interval_months"] == 12
    last = dt.date.fromisoformat(d["state"]["last_visit"])
    assert d["due"] == last.replace(year=last.year + 1).isoformat()


def test_recall_deceased_and_declined(demo_db, run):
    d = js(run, "recall", "HV01-II-1", "--settings", SETTINGS, db=demo_db)
    assert d["status"] == "not_scheduled" and d["due"] is None and "deceased" in " ".join(d["notes"])
    d = js(run, "recall", "HV01-III-5", "--settings", SETTINGS, db=demo_db)
    assert d["status"] == "not_recalled" and d["due"] is None
    d = js(run, "recall", "HV01-I-1", "--settings", SETTINGS, db=demo_db)  # placeholder
    assert set(d) == RECALL_KEYS and d["status"] == "not_scheduled"
    one_line_error(run("recall", "NO-ONE", "--settings", SETTINGS, db=demo_db), "unknown person", "NO-ONE")


# --------------------------------------------------------------------------- worklist


WORKLIST_KEYS = {"window", "as_of", "rule_set", "rule_set_title", "policy", "slots_per_week", "due", "affected",
                 "booking", "contact_gaps", "not_recalled", "lost_to_follow_up", "trend_modifiers", "files",
                 "cautions", "variant_rereview", "no_response", "must_not_approach"}  # fmt: skip
ENTRY_KEYS = {"list", "person", "family", "status", "due", "days_overdue", "interval_months", "rule_id", "needs",
              "consider", "reason", "source", "triggers", "flags", "booked_week", "late", "never_screened",
              "eligible_since", "gap_reason", "waiting", "contact_status", "review_flags",
              # from the contact log (revision 0012)
              "contact", "contact_later_on", "contact_via", "informed_on"}  # fmt: skip


def test_worklist_capacity_reports_who_cannot_be_seen_by_the_due_date(rc_db, run):
    # RC-06 (carrier child) and RC-07 (untested child at risk) both had an echo on 2024-06-01:
    # both due 2025-06-01 (ESC 2023 §6.11, 12 months under policy shortest). One slot a week.
    d = js(run, "worklist", "--from", "2025-05-26", "--to", "2025-06-08", "--slots-per-week", "1",
           "--as-of", "2025-05-01", "--settings", SETTINGS, db=rc_db)  # fmt: skip
    assert set(d) == WORKLIST_KEYS and all(set(e) == ENTRY_KEYS for e in d["due"] + d["affected"])
    due = {e["person"]: e for e in d["due"]}
    assert due["RC-06"]["due"] == due["RC-07"]["due"] == "2025-06-01"
    weeks = {w["week_start"]: w["booked"] for w in d["booking"]["weeks"]}
    assert weeks == {"2025-05-26": ["RC-06"], "2025-06-02": ["RC-07"]}  # ties broken by person code
    (late,) = d["booking"]["booked_late"]
    assert late == {"person": "RC-07", "due": "2025-06-01", "booked_week": "2025-06-02", "days_late": 1}
    assert d["booking"]["not_booked"] == []
    assert due["RC-07"]["late"] is True and due["RC-06"]["late"] is False
    # the affected proband is listed apart with her follow-up interval, not among screening recalls;
    # the declined sister is listed as not recalled; the deceased grandfather never appears
    assert "RC-03" not in due
    assert [n["person"] for n in d["not_recalled"]] == ["RC-08"]
    everyone = {e["person"] for e in d["due"] + d["affected"]} | {n["person"] for n in d["not_recalled"]}
    assert "RC-01" not in everyone


def test_worklist_demo_exports_calendar_and_csv(demo_db, run, tmp_path):
    ics_path, csv_path = tmp_path / "recalls.ics", tmp_path / "recalls.csv"
    args = ("worklist", "--from", "2026-12-07", "--to", "2027-03-28", "--slots-per-week", "3", "--as-of",
            "2026-12-01", "--settings", SETTINGS, "--ics", ics_path, "--csv", csv_path)  # fmt: skip
    d = js(run, *args, db=demo_db)
    entries = d["due"] + d["affected"]
    assert entries and d["files"] == {"csv": str(csv_path), "ics": str(ics_path)}
    persons = [e["person"] for e in d["due"]]
    # deceased never listed; declined listed apart (HV01-III-5, HV03-II-4)
    assert not {"HV01-II-1", "HV01-II-3", "HV05-I-1"} & set(persons)
    assert {n["person"] for n in d["not_recalled"]} == {"HV01-III-5", "HV03-II-4"}
    assert not {"HV01-III-5", "HV03-II-4"} & set(persons)
    # affected members apart with their interval (ESC 2023 Risk-SCD review every 1-2 y: 12 months, shortest)
    assert d["affected"] and all(e["interval_months"] == 12 for e in d["affected"])
    assert not {e["person"] for e in d["affected"]} & set(persons)
    # most urgent first: days overdue never increase down the list (no triggers in the demo window)
    # (a never-screened person waits from the day they became eligible, not "days overdue")
    as_of = dt.date.fromisoformat(d["as_of"])
    overdue = [(as_of - dt.date.fromisoformat(e["eligible_since"])).days if e["never_screened"]
               else max(0, e["days_overdue"]) for e in d["due"]]  # fmt: skip
    assert overdue == sorted(overdue, reverse=True)
    for e in d["due"]:
        assert e["needs"] and e["reason"]
        assert dt.date.fromisoformat(e["due"]) <= dt.date(2027, 3, 28)

    cal = Calendar.from_ical(ics_path.read_bytes())
    events = [c for c in cal.walk() if c.name == "VEVENT"]
    assert len(events) == len(entries)
    text = ics_path.read_text(encoding="utf-8")
    for name in ("Graham", "Thornbury", "Kerensa", "Penhallow"):
        assert name not in text  # no names in the calendar
    by_person = {str(e["SUMMARY"]).split(":")[0]: e for e in events}
    for e in d["due"]:
        ev = by_person[e["person"]]
        assert ev.decoded("DTSTART").isoformat() == (e["booked_week"] or e["due"])
    uids = sorted(str(e["UID"]) for e in events)
    assert len(set(uids)) == len(uids)
    js(run, *args, db=demo_db)  # a second export
    again = [c for c in Calendar.from_ical(ics_path.read_bytes()).walk() if c.name == "VEVENT"]
    assert sorted(str(e["UID"]) for e in again) == uids

    rows = list(csv.DictReader(csv_path.open(encoding="utf-8")))
    assert set(rows[0]) == set(worklist_csv.COLUMNS)
    people = [r for r in rows if r["list"] != "caution"]
    assert [r["person"] for r in people] == [e["person"] for e in entries + d["contact_gaps"]]
    cautions = [r["reason"] for r in rows if r["list"] == "caution"]
    assert rows[-len(cautions):] == [r for r in rows if r["list"] == "caution"]  # the caution rows come last
    assert any("Decision support only" in c for c in cautions) and any("current guideline" in c for c in cautions)


def test_worklist_errors(demo_db, run):
    one_line_error(run("worklist", "--from", "2027-01-10", "--to", "2027-01-01", db=demo_db), "--to is before --from")
    one_line_error(run("worklist", "--from", "2027-13-01", "--to", "2027-01-01", db=demo_db), "--from")


# --------------------------------------------------------------------------- age on the as-of date, never screened


def test_recall_never_screened_adult_gets_the_adult_rule_and_plain_words(demo_db, run):
    # HV01-IV-5 (invented; 30 y on 2026-12-05, never screened, not contacted): eligible since childhood.
    # ESC 2023 §6.11: untested adult in a P/LP family, every 1-3 y to 60 [V]; not the child row.
    d = js(run, "recall", "HV01-IV-5", "--as-of", "2026-12-05", "--settings", SETTINGS, db=demo_db)
    assert d["rule_id"] == "esc23.adult.at_risk_variant_or_early_onset.to60"
    assert d["status"] == "due" and d["due"] == "2026-12-05" and d["days_overdue"] == 0
    assert d["never_screened"] is True and d["gap_reason"] == "not_contacted"
    assert d["eligible_since"] < "2026-12-05"
    assert d["waiting"] == f"never screened, eligible since {d['eligible_since']}; due now (not contacted)"
    r = run("recall", "HV01-IV-5", "--as-of", "2026-12-05", "--settings", SETTINGS, db=demo_db)
    assert r.code == 0 and f"status: never screened, eligible since {d['eligible_since']}; due now" in r.out
    assert "days overdue" not in r.out
    # HV01-IV-4 (28 y, once seen as a child, lost to follow-up): keeps the days overdue, adult rule now
    d = js(run, "recall", "HV01-IV-4", "--as-of", "2026-12-05", "--settings", SETTINGS, db=demo_db)
    assert d["never_screened"] is False and d["days_overdue"] > 0
    assert d["rule_id"].startswith("esc23.adult.") and "band_changed_since_due" in d["flags"]


def test_worklist_books_only_reachable_people_once_from_the_next_clinic_day(demo_db, run, tmp_path):
    # Run on Saturday 2026-12-05 for a window from Tuesday 2026-12-01: first bookable day Monday 2026-12-07.
    csv_path, ics_path = tmp_path / "w.csv", tmp_path / "w.ics"
    d = js(run, "worklist", "--from", "2026-12-01", "--to", "2027-03-01", "--slots-per-week", "4", "--as-of",
           "2026-12-05", "--settings", SETTINGS, "--csv", csv_path, "--ics", ics_path, db=demo_db)  # fmt: skip
    b = d["booking"]
    assert b["first_bookable_day"] == "2026-12-07" and b["weeks"][0]["week_start"] == "2026-12-07"
    booked = [p for w in b["weeks"] for p in w["booked"]]
    assert len(booked) == len(set(booked))  # each person once
    gaps = {g["person"]: g["contact_status"] for g in d["contact_gaps"]}
    assert set(gaps.values()) == {"not_contacted", "lost_to_follow_up", "declined"}
    assert not set(booked) & set(gaps)  # nobody who cannot be reached is booked
    assert not {e["person"] for e in d["due"] + d["affected"]} & set(gaps)  # listed once
    assert all(e["contact_status"] == "contactable" for e in d["due"])
    never = [g for g in d["contact_gaps"] if g["never_screened"]]
    assert never and all(g["waiting"].startswith("never screened, eligible since") for g in never)
    rows = list(csv.DictReader(csv_path.open(encoding="utf-8")))
    assert {r["person"]: r["gap_reason"] for r in rows if r["list"] == "contact_gap"}.keys() == gaps.keys()
    assert rows[-1]["list"] == "caution"
    # the calendar: reachable people only, the never-screened said plainly in the description
    events = [c for c in Calendar.from_ical(ics_path.read_bytes()).walk() if c.name == "VEVENT"]
    summaries = {str(e["SUMMARY"]).split(":")[0]: str(e["DESCRIPTION"]) for e in events}
    assert not set(summaries) & set(gaps)
    for e in d["due"]:
        if e["never_screened"]:
            assert summaries[e["person"]].startswith(f"Never screened, eligible since {e['eligible_since']}")
