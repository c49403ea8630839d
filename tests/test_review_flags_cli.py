"""Review flags through the commands: `person`, `trends`, `recall`, `worklist` and the trajectory
report, on an invented family (RFL1) imported from CSV (SQLite and, when configured, PostgreSQL).

Clinical checks: ESC 2023 child rule z > 2 and adult relative rule >= 13 mm (Arbelo et al. [V]);
PHN 2017 IVSd model (Lopez et al. [V]); least significant change 2.77 x Sw (Bland & Altman 1999 [V]).
All people and values are invented.
"""

from __future__ import annotations

import json
from pathlib import Path

import pytest

ROOT = Path(__file__).parent.parent
SETTINGS = ROOT / "demo_family" / "clinic.toml"
AS_OF = "2026-12-01"

_STUDY = "{p},{d},echo,Invented Clinic,{h},{w},{m},{v},mm"
_PEOPLE = "person,family,given_name,family_name,sex_at_birth,gender_identity,birth_date,vital_status,death_date,mother,father,placeholder,proband,twin_of,twin_type,adoption,contact_status,contact_status_date,notes"  # noqa: E501
FILES = {
    "families.csv": "family,condition,notes\nRFL1,hypertrophic cardiomyopathy,invented family for review flags\n",
    "people.csv": _PEOPLE + "\n" + "\n".join([
        "RF-01,RFL1,Osric,Fenwold,male,,1960-01-01,alive,,,,no,yes,,,,contactable,2020-01-01,Index case",
        "RF-02,RFL1,Tamsin,Fenwold,female,,2009-03-01,alive,,,RF-01,no,no,,,,contactable,2020-01-01,Child",
        "RF-03,RFL1,Corin,Fenwold,male,,2009-03-01,alive,,,RF-01,no,no,,,,contactable,2020-01-01,Child",
        "RF-04,RFL1,Linnet,Fenwold,female,,1993-01-01,alive,,,RF-01,no,no,,,,contactable,2020-01-01,Adult",
        "RF-05,RFL1,Bram,Fenwold,male,,1988-01-01,alive,,,RF-01,no,no,,,,contactable,2020-01-01,Adult",
    ]) + "\n",  # fmt: skip
    "variants.csv": "family,gene,transcript,hgvs_c,hgvs_p,zygosity,acmg_class,classified_on,reason\n",
    "genetic_results.csv": "person,test_date,test_type,variant,result,lab,report_reference\n",
    "assessments.csv": "person,assessment_date,affected_status,symptoms,competitive_athlete,pregnant,hypertension,notes\n"
    + "\n".join([
        "RF-01,2020-01-01,affected,,no,no,no,",
        "RF-02,2026-06-15,unaffected,,no,no,no,",
        "RF-03,2026-09-01,unaffected,,no,no,no,",
        "RF-04,2024-01-01,unaffected,,no,no,no,",
        "RF-04,2025-01-02,unaffected,,no,yes,no,22 weeks pregnant",
        "RF-05,2026-01-01,unaffected,,no,no,no,",
    ]) + "\n",  # fmt: skip
    "studies.csv": "person,study_date,modality,site,height_cm,weight_kg,measure,value,unit\n"
    + "\n".join([
        _STUDY.format(p="RF-01", d="2020-01-01", h=175, w=80, m="mwt_echo", v=21.0),
        # a 17.3-year-old without height or weight: 9 mm is not above z 2 at every body size PHN covers
        _STUDY.format(p="RF-02", d="2026-06-15", h="", w="", m="mwt_echo", v=9.0),
        # a 17.5-year-old without height or weight and a 20 mm wall: above z 2 at every body size
        _STUDY.format(p="RF-03", d="2026-09-01", h="", w="", m="mwt_echo", v=20.0),
        # posterior wall steady, then a study during pregnancy
        *[_STUDY.format(p="RF-04", d=d, h=165, w=60, m="lvpwd", v=v) for d, v in
          (("2021-01-02", 8.0), ("2022-01-02", 8.1), ("2023-01-02", 8.0), ("2024-01-01", 8.1), ("2025-01-02", 12.5))],
        # maximal wall thickness rising about 0.46 mm/y; the last change is within the LSC
        *[_STUDY.format(p="RF-05", d=d, h=178, w=78, m="mwt_echo", v=v) for d, v in
          (("2018-01-01", 9.0), ("2020-01-01", 10.1), ("2022-01-01", 11.0), ("2024-01-01", 12.1), ("2026-01-01", 12.6))],
    ]) + "\n",  # fmt: skip
}


@pytest.fixture
def rf_db(db_url, run, tmp_path):
    folder = tmp_path / "rfl1"
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


def test_criteria_not_assessable_reaches_every_output(rf_db, run, tmp_path):
    flag = "criteria not assessable: mwt_echo 9 mm on 2026-06-15 (age 17.3 y)"
    person = js(run, "person", "RF-02", "--settings", SETTINGS, db=rf_db)
    assert len(person["review_flags"]) == 1 and person["review_flags"][0].startswith(flag)
    text = run("person", "RF-02", "--settings", SETTINGS, db=rf_db).out
    assert "REVIEW: " + flag in text
    rows = js(run, "trends", "--family", "RFL1", "--settings", SETTINGS, db=rf_db)["rows"]
    row = next(r for r in rows if r["person"] == "RF-02")
    assert row["n"] == 1 and row["criteria_not_assessable"] and row["criteria_flags"].startswith(flag)
    rec = js(run, "recall", "RF-02", "--as-of", AS_OF, "--settings", SETTINGS, db=rf_db)
    assert "criteria_not_assessable" in rec["flags"] and any(n.startswith(flag) for n in rec["notes"])
    assert rec["state"]["review_flags"][0].startswith(flag)
    assert flag in run("recall", "RF-02", "--as-of", AS_OF, "--settings", SETTINGS, db=rf_db).out
    wl = js(run, "worklist", "--from", "2026-12-01", "--to", "2028-12-31", "--as-of", AS_OF, "--settings", SETTINGS,
            db=rf_db)  # fmt: skip
    entry = next(e for e in wl["due"] if e["person"] == "RF-02")
    assert entry["review_flags"][0].startswith(flag) and "criteria_not_assessable" in entry["flags"]
    text = run("worklist", "--from", "2026-12-01", "--to", "2028-12-31", "--as-of", AS_OF, "--settings", SETTINGS,
               db=rf_db).out  # fmt: skip
    assert "review RF-02: " + flag in text
    rep = js(run, "report", "trajectory", "RF-02", "--out", tmp_path / "rep", "--as-of", AS_OF, "--settings", SETTINGS,
             db=rf_db)  # fmt: skip
    assert rep["review_flags"][0].startswith(flag) and any(flag in f for f in rep["flags"])


def test_a_wall_meeting_the_criteria_at_every_body_size_converts(rf_db, run):
    person = js(run, "person", "RF-03", "--settings", SETTINGS, db=rf_db)
    v = person["studies"][0]["values"][0]
    assert v["measure"] == "mwt_echo" and v["meets_criteria"] is True and "every body size" in v["criteria_note"]
    assert person["conversion"]["ever_met"] and person["review_flags"] == []


def test_a_pregnancy_study_does_not_raise_progression(rf_db, run):
    rec = js(run, "recall", "RF-04", "--as-of", AS_OF, "--settings", SETTINGS, db=rf_db)
    assert rec["state"]["progression"] is False and rec["state"]["progression_tests"] == ""
    rows = js(run, "trends", "--family", "RFL1", "--settings", SETTINGS, db=rf_db)["rows"]
    row = next(r for r in rows if r["person"] == "RF-04" and r["measure"] == "lvpwd")
    assert row["left_out"] == "1 study during pregnancy left out of the trend (2025-01-02)" and row["n"] == 4


def test_the_recall_text_names_the_slope_test_not_a_change_beyond_variability(rf_db, run):
    rec = js(run, "recall", "RF-05", "--as-of", AS_OF, "--settings", SETTINGS, db=rf_db)
    assert rec["state"]["progression"] is True
    fired = next(f for f in rec["fired"] if f["code"] == "progression")
    assert fired["text"].startswith("Progression on the measurement trends (mwt_echo: slope test: +0.46 mm/y")
    assert "Change beyond measurement variability" not in fired["text"]
    assert "placeholder LSC" in fired["text"]  # the packaged wall-thickness LSC is named as a placeholder
    text = run("recall", "RF-05", "--as-of", AS_OF, "--settings", SETTINGS, db=rf_db).out
    assert "Change beyond measurement variability" not in text
    # the demo settings set no wall-thickness Sw: the trend note says the placeholders were used
    assert "mwt_echo" in rec["trend_modifiers"]["lsc_note"] and "packaged placeholders" in rec["trend_modifiers"]["lsc_note"]
    assert "note: " + rec["trend_modifiers"]["lsc_note"] in text


def test_the_clinic_own_repeatability_replaces_the_placeholder(rf_db, run, tmp_path):
    own = tmp_path / "clinic.toml"
    own.write_text(SETTINGS.read_text(encoding="utf-8") + "\n[repeatability]\nmwt_echo = 0.5\nmwt_cmr = 0.5\n"
                   "ivsd = 0.5\nlvpwd = 0.5\n", encoding="utf-8")  # fmt: skip
    rec = js(run, "recall", "RF-05", "--as-of", AS_OF, "--settings", own, db=rf_db)
    fired = next(f for f in rec["fired"] if f["code"] == "progression")
    assert "placeholder" not in fired["text"] and rec["trend_modifiers"]["lsc_note"] == ""
    assert "> one within-subject SD 0.50 mm" in fired["text"]
