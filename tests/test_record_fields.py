"""Cause and age of death, age at diagnosis, device dates and atrial fibrillation as stored fields.

Every family here is invented.  The store tests run on SQLite and, when configured, PostgreSQL.
"""

from __future__ import annotations

import csv
import datetime as dt
import io
import json

import pandas as pd
import pytest
from sqlalchemy import inspect, text

from conftest import MINI, dump
from tracker.domain.consistency import record_problems
from tracker.store import migrate
from tracker.store import repository as repo
from tracker.store.database import locate, make_engine, reading


def _engine(url):
    return make_engine(locate(url))


def _people(url) -> pd.DataFrame:
    engine = _engine(url)
    with reading(engine) as conn:
        people = repo.load_people(conn).set_index("person")
    engine.dispose()
    return people


def _js(r):
    assert r.code == 0, r
    return json.loads(r.out)


# --------------------------------------------------------------------------- store, import, export


def test_fields_are_stored_and_read_back(loaded_db):
    people = _people(loaded_db)
    assert people.at["T1-02", "death_cause"] == "non_cardiac"
    assert people.at["T1-02", "death_age"] == 73
    assert people.at["T1-02", "pacemaker_date"] == "2009"  # known to the year only
    assert people.at["T1-03", "diagnosis_age"] == 45
    assert people.at["T1-03", "diagnosis_place"] == "Invented Moor Infirmary"
    assert pd.isna(people.at["T1-05", "death_age"]) and people.at["T1-05", "icd_date"] is None


def test_downgrade_sets_the_fields_aside_and_upgrade_puts_them_back(loaded_db):
    engine = _engine(loaded_db)
    before = dump(loaded_db)
    migrate.downgrade(engine, "0005")
    with reading(engine) as conn:
        columns = {c["name"] for c in inspect(conn).get_columns("person")}
        assert "death_cause" not in columns and "icd_date" not in columns
        kept = conn.execute(text("SELECT count(*) FROM person_record_kept")).scalar()
        assert kept == 3  # T1-01, T1-02, T1-03
        assert conn.execute(text("SELECT count(*) FROM assessment_af_kept")).scalar() == 1
    migrate.upgrade(engine)
    engine.dispose()
    assert dump(loaded_db) == before


def test_a_file_without_the_new_columns_reimports_without_conflict(loaded_db, run, tmp_path):
    """A column the file leaves out says nothing: the stored values are kept and not compared."""
    out = tmp_path / "out"
    out.mkdir()
    assert run("export", "people", "--out", out / "people.csv", db=loaded_db).code == 0
    rows = list(csv.reader((out / "people.csv").open(encoding="utf-8")))
    keep = rows[0].index("death_cause")
    older = io.StringIO()
    csv.writer(older, lineterminator="\n").writerows([r[:keep] for r in rows])
    path = tmp_path / "people.csv"
    path.write_text(older.getvalue(), encoding="utf-8")
    d = _js(run("import", "people", path, "--json", db=loaded_db))
    assert d["files"][0]["rows_added"] == 0
    assert _people(loaded_db).at["T1-02", "death_cause"] == "non_cardiac"


def test_a_file_with_the_column_empty_is_still_refused_against_a_stored_value(loaded_db, run, tmp_path):
    out = tmp_path / "people.csv"
    assert run("export", "people", "--out", out, db=loaded_db).code == 0
    text_ = out.read_text(encoding="utf-8").replace(",non_cardiac,73,", ",,73,")
    out.write_text(text_, encoding="utf-8")
    r = run("import", "people", out, db=loaded_db)
    assert r.code == 1 and "death_cause" in r.err and "differs from the stored record" in r.err


# --------------------------------------------------------------------------- corrections


def test_edit_records_a_cause_of_death_and_an_icd_with_history(loaded_db, run):
    d = _js(run("edit", "person", "T1-01", "--set", "death_cause=sudden", "--set", "death_age=61",
                "--reason", "death certificate", "--json", db=loaded_db))  # fmt: skip
    assert d["before"] == {"death_cause": "unknown", "death_age": None}
    assert d["after"] == {"death_cause": "sudden", "death_age": 61.0}
    d = _js(run("edit", "person", "T1-03", "--set", "icd_date=2020-03-04", "--reason", "implant letter", "--json",
                db=loaded_db))  # fmt: skip
    assert d["before"] == {"icd_date": None} and d["after"] == {"icd_date": "2020-03-04"}
    people = _people(loaded_db)
    assert people.at["T1-01", "death_cause"] == "sudden" and people.at["T1-03", "icd_date"] == "2020-03-04"
    entries = _js(run("audit", "--person", "T1-01", "--json", db=loaded_db))
    assert any(e["before"] == {"death_cause": "unknown", "death_age": None} for e in entries)


def test_edit_refuses_what_the_importer_refuses(loaded_db, run):
    before = dump(loaded_db)
    cases = [
        (("T1-05", "death_cause=sudden"), "vital_status is not deceased"),
        (("T1-02", "death_age=60"), "does not agree with the dates of birth and death"),
        (("T1-05", "diagnosis_age=50"), "is above the person's age"),
        (("T1-05", "icd_date=1990"), "is before the date of birth"),
        (("T1-02", "pacemaker_date=2016-01-01"), "is after the date of death"),
        (("T1-05", "death_cause=heart"), "is not one of"),
        (("T1-05", "diagnosis_age=12.5"), "not a whole number of years"),
    ]
    for (code, setting), fragment in cases:
        r = run("edit", "person", code, "--set", setting, "--reason", "x", db=loaded_db)
        assert r.code == 1 and fragment in r.err and r.err.count("\n") == 1, (setting, r)
    assert dump(loaded_db) == before


def test_edit_assessment_records_atrial_fibrillation(loaded_db, run):
    d = _js(run("edit", "assessment", "T1-05", "2019-02-10", "--set", "atrial_fibrillation=yes", "--reason",
                "Holter report", "--json", db=loaded_db))  # fmt: skip
    assert d["after"] == {"atrial_fibrillation": True}


def test_check_reports_stored_values_that_disagree(loaded_db, run):
    """Data that reached the store another way (here: SQL) is found by `tracker check`."""
    engine = _engine(loaded_db)
    with engine.begin() as conn:
        conn.execute(text("UPDATE person SET death_cause = 'sudden' WHERE code = 'T1-05'"))
    engine.dispose()
    d = json.loads(run("check", "--json", db=loaded_db).out)
    assert {"check": "record", "where": "person T1-05",
            "message": "death_cause is given but vital_status is not deceased"} in d["findings"]  # fmt: skip


# --------------------------------------------------------------------------- the cross-field checks


def _frame(**cols) -> pd.DataFrame:
    base = dict(person="X-1", vital_status="deceased", birth_date=None, death_date=None, death_cause=None,
                death_age=float("nan"), diagnosis_age=float("nan"), icd_date=None, pacemaker_date=None)  # fmt: skip
    base.update(cols)
    return pd.DataFrame([base])


def test_age_at_death_against_dates_known_to_the_year():
    # Born some time in 1938, died 1979-06-02: 40 (born after 2 June 1938) or 41 years old.
    today = dt.date(2026, 12, 1)
    ok = [record_problems(_frame(birth_date="1938", death_date="1979-06-02", death_age=a), today) for a in (40, 41)]
    assert ok == [[], []]
    bad = record_problems(_frame(birth_date="1938", death_date="1979-06-02", death_age=42), today)
    assert bad == [(0, "death_age", "42 y does not agree with the dates of birth and death (they allow 40-41 y)")]


def test_age_at_death_against_exact_dates_counts_the_birthday():
    today = dt.date(2026, 12, 1)
    assert record_problems(_frame(birth_date="1950-06-02", death_date="1990-06-02", death_age=40), today) == []
    bad = record_problems(_frame(birth_date="1950-06-03", death_date="1990-06-02", death_age=40), today)
    assert bad and bad[0][1] == "death_age"


def test_diagnosis_age_of_the_living_is_bounded_by_their_age_today():
    today = dt.date(2026, 12, 1)
    alive = dict(vital_status="alive", birth_date="2000-12-02")  # 25 years old on 2026-12-01
    assert record_problems(_frame(diagnosis_age=25, **alive), today) == []
    assert record_problems(_frame(diagnosis_age=26, **alive), today)[0][1] == "diagnosis_age"


# --------------------------------------------------------------------------- family features

from tracker.engines import family_state as fs  # noqa: E402
from tracker.engines import risk  # noqa: E402

PEOPLE_COLS = ["person", "family", "given_name", "family_name", "sex_at_birth", "gender_identity", "birth_date",
               "vital_status", "death_date", "mother", "father", "placeholder", "proband", "twin_of", "twin_type",
               "adoption", "contact_status", "contact_status_date", "notes", "death_cause", "death_age",
               "diagnosis_age", "diagnosis_place", "icd_date", "pacemaker_date"]  # fmt: skip
ASSESSMENT_COLS = ["person", "assessment_date", "affected_status", "symptoms", "competitive_athlete", "pregnant",
                   "hypertension", "notes", *repo.RISK_ANSWERS, "atrial_fibrillation"]  # fmt: skip


def _p(code, sex, birth, *, vital="alive", death=None, mother=None, father=None, proband=False, notes=None,
       cause=None, death_age=None, diagnosis_age=None, place=None, icd=None, pacemaker=None, family="RF-A"):  # fmt: skip
    return dict(person=code, family=family, given_name=None, family_name=None, sex_at_birth=sex,
                gender_identity=None, birth_date=birth, vital_status=vital, death_date=death, mother=mother,
                father=father, placeholder=False, proband=proband, twin_of=None, twin_type=None, adoption=None,
                contact_status=None if vital == "deceased" else "contactable", contact_status_date=None, notes=notes,
                death_cause=cause, death_age=float("nan") if death_age is None else float(death_age),
                diagnosis_age=float("nan") if diagnosis_age is None else float(diagnosis_age),
                diagnosis_place=place, icd_date=icd, pacemaker_date=pacemaker)  # fmt: skip


def _a(code, on, status, answers=None):
    answers = answers or {}
    return dict(person=code, assessment_date=on, affected_status=status, symptoms=None, competitive_athlete=False,
                pregnant=False, hypertension=False, notes=None,
                **{k: answers.get(k) for k in repo.RISK_ANSWERS}, atrial_fibrillation=None)  # fmt: skip


def _state(people, assessments, family="RF-A"):
    people = pd.DataFrame(people, columns=PEOPLE_COLS)
    assessments = pd.DataFrame(assessments, columns=ASSESSMENT_COLS)
    empty_v = pd.DataFrame(columns=["family", "gene", "transcript", "hgvs_c", "hgvs_p", "zygosity", "acmg_class",
                                    "classified_on", "reason"])  # fmt: skip
    empty_r = pd.DataFrame(columns=["person", "test_date", "test_type", "variant", "result", "lab",
                                    "report_reference"])  # fmt: skip
    empty_s = pd.DataFrame(columns=["person", "study_date", "modality", "site", "height_cm", "weight_kg", "measure",
                                    "value", "unit"])  # fmt: skip
    return fs.build_family_state(family, people, empty_v, empty_r, assessments, empty_s, as_of=dt.date(2026, 12, 1))


def test_early_onset_from_a_diagnosis_made_elsewhere():
    """A mother diagnosed at 15 at another centre, first seen here at 44: an early-onset family."""
    people = [_p("RF-1", "female", "1980-02-02", diagnosis_age=15, place="Invented Harbour Children's Hospital"),
              _p("RF-2", "male", "2010-03-03", mother="RF-1")]  # fmt: skip
    st = _state(people, [_a("RF-1", "2024-05-05", "affected")])
    assert "early_onset" in st.features
    assert "RF-1 (diagnosed at 15 y (Invented Harbour Children's Hospital)" in st.feature_reasons["early_onset"]


def test_early_onset_from_a_deceased_relative_never_seen_here():
    people = [_p("RF-1", "male", "1950", vital="deceased", death="1975", diagnosis_age=12, cause="cardiac_non_sudden"),
              _p("RF-2", "female", "1975-04-04", father="RF-1", proband=True)]  # fmt: skip
    st = _state(people, [_a("RF-2", "2020-01-01", "affected")])
    assert "early_onset" in st.features and "RF-1" in st.feature_reasons["early_onset"]


def test_no_early_onset_from_an_adult_diagnosis_elsewhere():
    people = [_p("RF-1", "female", "1980-02-02", diagnosis_age=30, place="elsewhere")]
    st = _state(people, [_a("RF-1", "2024-05-05", "affected")])
    assert "early_onset" not in st.features


def test_sudden_death_from_the_recorded_cause_not_the_notes():
    people = [_p("RF-1", "male", "1950", vital="deceased", death="1990-05-05", cause="sudden", death_age=40),
              _p("RF-2", "male", "1950", vital="deceased", death="1992-05-05", cause="non_cardiac",
                 notes="collapsed suddenly after a stroke"),
              _p("RF-3", "female", "1975-04-04", father="RF-1", proband=True)]  # fmt: skip
    st = _state(people, [_a("RF-3", "2020-01-01", "affected")])
    why = st.feature_reasons["sudden_death"]
    assert "RF-1 at 40 y" in why and "recorded as the cause of death" in why
    assert "RF-2" not in why  # a recorded non-cardiac cause is not overridden by a word in the notes


def test_sudden_death_from_notes_only_is_labelled_as_such():
    people = [_p("RF-1", "male", "1950", vital="deceased", death="1990", notes="Sudden death at 40"),
              _p("RF-3", "female", "1975-04-04", father="RF-1", proband=True)]  # fmt: skip
    st = _state(people, [_a("RF-3", "2020-01-01", "affected")])
    assert "from the notes only" in st.feature_reasons["sudden_death"]


def test_no_sudden_death_without_cause_or_note():
    people = [_p("RF-1", "male", "1950", vital="deceased", death="1990", cause="unknown"),
              _p("RF-3", "female", "1975-04-04", father="RF-1", proband=True)]  # fmt: skip
    assert "sudden_death" not in _state(people, [_a("RF-3", "2020-01-01", "affected")]).features


# --------------------------------------------------------------------------- Risk-SCD from the record

NO = dict.fromkeys(repo.RISK_ANSWERS, False)


def _assessed(age=45.0, mwt=20.0, la=42.0, lvot=30.0):
    """One echo as the review engine gives it; the first worked example of guidelines.md 5a (2.23%)."""
    on = dt.date(2026, 6, 1)
    return pd.DataFrame([dict(study_date=on, modality="echo", measure=m, value=v, age_years=age)
                         for m, v in (("mwt_echo", mwt), ("la_diam", la), ("lvot_rest", lvot))])  # fmt: skip


def _person_risk(people, assessments, person, assessed=None, as_of=dt.date(2026, 12, 1)):
    people = pd.DataFrame(people, columns=PEOPLE_COLS)
    assessments = pd.DataFrame(assessments, columns=ASSESSMENT_COLS)
    answers, answered = risk.latest_answers(assessments, person)
    answers["competitive_athlete"] = False
    return risk.person_risk_scd(person, affected_status="affected", assessed=_assessed() if assessed is None
                                else assessed, answers=answers, answered=answered, people=people,
                                hcm=risk.hcm_status(people, assessments), as_of=as_of)  # fmt: skip


def test_figure_with_an_icd_says_so_and_never_advises_not_indicated():
    # 45 y, MWT 20, LA 42, LVOT 30, no risk factors: 2.23% (guidelines.md 5a worked example 1) -> the ESC 2014
    # band wording for <4% is "ICD generally not indicated", which must not reach a person who has an ICD.
    people = [_p("RF-1", "male", "1981-01-01", icd="2019-04-02")]
    r = _person_risk(people, [_a("RF-1", "2026-06-01", "affected", NO)], "RF-1")
    assert r.status == "computed" and r.risk_5y_pct == pytest.approx(2.23, abs=0.005)
    assert r.has_icd and "already has an ICD (ICD implanted 2019-04-02)" in r.headline
    text = json.dumps(r.as_dict())
    assert "not indicated" not in text and "primary-prevention" in text


def test_without_an_icd_the_band_advice_is_shown():
    people = [_p("RF-1", "male", "1981-01-01")]
    r = _person_risk(people, [_a("RF-1", "2026-06-01", "affected", NO)], "RF-1")
    assert not r.has_icd and any("ICD generally not indicated" in b for b in r.bands)


def test_an_icd_after_the_as_of_date_is_not_yet_there():
    people = [_p("RF-1", "male", "1981-01-01", icd="2026-11-20")]
    r = _person_risk(people, [_a("RF-1", "2026-06-01", "affected", NO)], "RF-1", as_of=dt.date(2026, 7, 1))
    assert not r.has_icd


def test_prior_arrest_is_secondary_prevention_and_never_not_indicated():
    people = [_p("RF-1", "male", "1981-01-01")]
    answers = dict(NO, prior_arrest_or_sustained_vt=True)
    r = _person_risk(people, [_a("RF-1", "2026-06-01", "affected", answers)], "RF-1")
    assert r.status == "refused" and r.risk_5y_pct is None and r.secondary_prevention
    assert "secondary prevention applies" in r.headline
    assert "not indicated" not in json.dumps(r.as_dict())


def _family(father_death_age, father_hcm=False, answer=False):
    people = [_p("RF-1", "male", "1940", vital="deceased", death="1985", cause="sudden", death_age=father_death_age,
                 diagnosis_age=30 if father_hcm else None),
              _p("RF-2", "male", "1972-05-05", father="RF-1", proband=True)]  # fmt: skip
    return people, [_a("RF-2", "2026-06-01", "affected", dict(NO, family_history_scd=answer))]


def test_answer_no_against_a_sudden_death_of_the_father_under_40_is_a_conflict():
    # ESC 2023 definition [V]: SCD of a first-degree relative under 40 y.
    r = _person_risk(*_family(35), "RF-2")
    assert r.status == "computed"  # the figure uses the recorded answer; the conflict stands beside it
    assert len(r.conflicts) == 2 and r.conflicts[0].startswith("CONFLICT: family history of SCD answered no")
    assert "father RF-1" in r.conflicts[0] and "at 35 y" in r.conflicts[0]


def test_sudden_death_at_41_without_hcm_recorded_asks_to_verify():
    r = _person_risk(*_family(41), "RF-2")
    assert len(r.conflicts) == 2 and r.conflicts[0].startswith("CHECK:")
    assert "counts only if under 40 y or with confirmed HCM" in r.conflicts[0]


def test_sudden_death_at_any_age_with_confirmed_hcm_is_a_conflict():
    r = _person_risk(*_family(62, father_hcm=True), "RF-2")
    assert r.conflicts and r.conflicts[0].startswith("CONFLICT:")


def test_answer_yes_is_not_contradicted_by_a_record_without_deaths():
    people = [_p("RF-2", "male", "1972-05-05", proband=True)]
    r = _person_risk(people, [_a("RF-2", "2026-06-01", "affected", dict(NO, family_history_scd=True))], "RF-2")
    assert r.conflicts == ()


def test_sudden_death_of_a_second_degree_relative_is_not_first_degree():
    people = [_p("RF-0", "male", "1915", vital="deceased", death="1950", cause="sudden", death_age=35),
              _p("RF-1", "male", "1940", father="RF-0", vital="deceased", death="2010", cause="non_cardiac"),
              _p("RF-2", "male", "1972-05-05", father="RF-1", proband=True)]  # fmt: skip
    r = _person_risk(people, [_a("RF-2", "2026-06-01", "affected", NO)], "RF-2")
    assert r.conflicts == ()


def test_sudden_death_of_a_full_sibling_and_of_a_child_count():
    people = [_p("RF-M", "female", "1945"), _p("RF-F", "male", "1943"),
              _p("RF-2", "male", "1972-05-05", mother="RF-M", father="RF-F", proband=True),
              _p("RF-3", "male", "1975", mother="RF-M", father="RF-F", vital="deceased", death="2005", cause="sudden"),
              _p("RF-4", "female", "1999", father="RF-2", vital="deceased", death="2016", cause="sudden")]  # fmt: skip
    r = _person_risk(people, [_a("RF-2", "2026-06-01", "affected", NO)], "RF-2")
    assert len(r.conflicts) == 3 and all(c.startswith("CONFLICT") for c in r.conflicts[:2])
    assert "sibling RF-3: sudden death at 29-30 y" in r.conflicts[0]


def test_conflict_shows_what_the_disputed_answer_is_worth():
    # 45 y, MWT 20, LA 42, LVOT 30: PI 2.4229 without family history (guidelines.md 5a worked example 1);
    # with it the PI gains the coefficient 0.4583082 (O'Mahony 2014 [V2]): 1 - 0.998^exp(2.8812) = 3.51%.
    r = _person_risk(*_family(35), "RF-2")
    expected = risk.risk_from_index(risk.prognostic_index(45, 20, 42, 30, True, False, False))
    assert expected == pytest.approx(3.51, abs=0.01)
    assert f"Answered yes, the estimate would be {expected:.2f}%" in r.conflicts[-1]


# --------------------------------------------------------------------------- the commands, on the demo families

SETTINGS = MINI.parents[2] / "demo_family" / "clinic.toml"
AS_OF = "2026-12-01"


@pytest.fixture(scope="module")
def demo_db(tmp_path_factory):
    from tracker.cli.app import main

    db = tmp_path_factory.mktemp("record") / "demo.sqlite"
    assert main(["demo", "--db", str(db)]) == 0
    return str(db)


def _cli(capsys, *args):
    from tracker.cli.app import main

    capsys.readouterr()
    code = main([str(a) for a in args])
    out = capsys.readouterr()
    assert code == 0, out.err
    return out.out


def test_trajectory_of_a_person_with_an_icd_never_says_not_indicated(demo_db, capsys, tmp_path):
    import pypdf

    out = _cli(capsys, "report", "trajectory", "HV04-III-1", "--out", tmp_path, "--as-of", AS_OF, "--settings",
               SETTINGS, "--db", demo_db, "--json")  # fmt: skip
    info = json.loads(out)
    assert info["risk"]["has_icd"] is True and "already has an ICD" in info["risk"]["headline"]
    text = " ".join((p.extract_text() or "") for p in pypdf.PdfReader(info["file"]).pages)
    text = " ".join(text.split())
    assert "already has an ICD" in text
    assert "not indicated" not in text and "not indicated" not in out


def test_person_and_recall_show_risk_scd_with_the_family_history_check(demo_db, capsys):
    person = json.loads(_cli(capsys, "person", "HV01-III-1", "--db", demo_db, "--settings", SETTINGS, "--json"))
    recall = json.loads(_cli(capsys, "recall", "HV01-III-1", "--as-of", AS_OF, "--db", demo_db, "--settings", SETTINGS,
                             "--json"))  # fmt: skip
    for d in (person["risk_scd"], recall["risk_scd"]):
        assert d["status"] == "computed" and d["risk_5y_pct"] is not None
        assert d["conflicts"] and "father HV01-II-1: sudden death at 41 y" in d["conflicts"][0]
        assert d["inputs"]["family_history_scd"] is False and "Decision support only" in d["caution"]
    assert person["record"]["atrial_fibrillation"]["first_recorded_on"] == "2024-09-09"
    text = _cli(capsys, "person", "HV01-III-1", "--db", demo_db, "--settings", SETTINGS)
    assert "HCM Risk-SCD (computed)" in text and "CHECK: family history of SCD answered no" in text
    text = _cli(capsys, "recall", "HV01-III-1", "--as-of", AS_OF, "--db", demo_db, "--settings", SETTINGS)
    assert "HCM Risk-SCD (computed)" in text and "CHECK: family history of SCD answered no" in text


def test_person_shows_a_diagnosis_made_elsewhere(demo_db, capsys):
    d = json.loads(_cli(capsys, "person", "HV02-III-1", "--db", demo_db, "--settings", SETTINGS, "--json"))
    assert d["record"]["diagnosis_age"] == 34 and "Carnmoor" in d["record"]["diagnosis_place"]


def test_recall_of_the_demo_family_reads_the_recorded_sudden_death(demo_db, capsys):
    d = json.loads(_cli(capsys, "cascade", "HV01", "--as-of", AS_OF, "--db", demo_db, "--settings", SETTINGS,
                        "--json"))  # fmt: skip
    why = d["family_features"]["sudden_death"]
    assert "HV01-II-1 at 41 y" in why and "from the notes" not in why


def test_trajectory_shows_the_family_history_check_beside_the_figure(demo_db, capsys, tmp_path):
    import pypdf

    info = json.loads(_cli(capsys, "report", "trajectory", "HV01-III-1", "--out", tmp_path, "--as-of", AS_OF,
                           "--settings", SETTINGS, "--db", demo_db, "--json"))  # fmt: skip
    text = " ".join(" ".join((p.extract_text() or "") for p in pypdf.PdfReader(info["file"]).pages).split())
    assert "Estimated 5-year risk of sudden cardiac death" in text
    assert "CHECK: family history of SCD answered no" in text and "father HV01-II-1" in text
    assert info["risk"]["conflicts"] and info["risk"]["status"] == "computed"


def test_never_assessed_reads_as_such(demo_db, capsys):
    d = json.loads(_cli(capsys, "person", "HV01-II-1", "--db", demo_db, "--settings", SETTINGS, "--json"))
    assert d["risk_scd"]["status"] == "not applicable" and "never assessed" in d["risk_scd"]["headline"]
    assert d["record"]["death_cause"] == "sudden" and d["record"]["death_age"] == 41
    r = risk.person_risk_scd("X", affected_status=float("nan"), assessed=None, answers={}, answered=[],
                             people=pd.DataFrame(columns=PEOPLE_COLS), hcm={})  # fmt: skip
    assert "never assessed" in r.headline


def test_a_sudden_death_only_in_the_notes_asks_to_record_and_verify():
    people = [_p("RF-1", "male", "1940", vital="deceased", death="1975", notes="Sudden death at 35 while running"),
              _p("RF-2", "male", "1972-05-05", father="RF-1", proband=True)]  # fmt: skip
    r = _person_risk(people, [_a("RF-2", "2026-06-01", "affected", NO)], "RF-2")
    assert r.conflicts[0].startswith("CHECK:") and "notes say sudden death (cause of death not recorded)" in r.conflicts[0]
