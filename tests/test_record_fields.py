"""Cause and age of death, age at diagnosis, device dates and atrial fibrillation as stored fields.

Every family here is invented.  The store tests run on SQLite and, when configured, PostgreSQL.
"""

from __future__ import annotations

import csv
import datetime as dt
import io
import json

import pandas as pd
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
