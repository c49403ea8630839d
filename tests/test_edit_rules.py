"""Edits pass the importer's own checks; `tracker check` finds what an edit or import would refuse;
re-importing a removed record names the reinstate command.

All data are the invented mini families (tests/data/mini).
"""

from __future__ import annotations

import pytest
from sqlalchemy import text

from conftest import MINI, dump
from tracker.services.edits import ASSESSMENT_FIELDS, PERSON_FIELDS, STUDY_FIELDS

INVISIBLE = "\u202e"  # right-to-left override


def _one_line(r) -> str:
    assert r.code == 1, r
    assert "Traceback" not in r.err
    lines = r.err.strip().splitlines()
    assert len(lines) == 1, r.err
    return lines[0]


# --------------------------------------------------------------------------- edits


@pytest.mark.parametrize(
    "args, expected",
    [
        (["study", "T1-03", "2014-01-10", "echo", "--set", "height_cm=5000"], "height_cm: 5000 cm is outside the plausible range"),
        (["study", "T1-03", "2014-01-10", "echo", "--set", "weight_kg=0.001"], "weight_kg: 0.001 kg is outside the plausible range"),
        (["study", "T1-03", "2014-01-10", "echo", "--set", "study_date=1960-01-10"], "before the person's date of birth"),
        (["person", "T1-05", "--set", "proband=yes"], "family 'FAM-T1' already has a proband"),
        (["person", "T1-03", "--set", "sex_at_birth=male"], "mother is recorded with sex at birth male"),
        (["person", "T1-04", "--set", "sex_at_birth=female"], "father is recorded with sex at birth female"),
        (["person", "T1-06", "--set", "birth_date=2008-03-01"], "differs from the co-twin's date of birth"),
        (["person", "T1-07", "--set", "twin_type=monozygotic"], "monozygotic twins recorded with different sex"),
        (["person", "T1-07", "--set", "twin_type="], "twin_type: is required when twin_of is given"),
        (["person", "T1-02", "--set", "vital_status=alive"], "vital_status is not deceased"),
        (["person", "T1-05", "--set", "death_date=2020-01-01"], "death_date: is given but vital_status is not deceased"),
        (["person", "T1-05", "--set", "placeholder=yes"], "placeholder"),
        (["person", "T1-03", "--set", "placeholder=yes"], "is a placeholder member"),
        (["person", "T1-05", "--set", "birth_date=1960-01-01"], "is before the birth of the mother"),
        (["person", "T1-03", "--set", "mother=T1-05"], "is before the birth of the mother"),
        (["person", "T1-02", "--set", "contact_status=contactable"], "the person is deceased"),
        (["person", "T1-01", "--set", "contact_status=contactable"], "placeholder member"),
        (["assessment", "T1-05", "2019-02-10", "--set", "pregnant=yes"], "sex at birth is male"),
        (["value", "T1-03", "2014-01-10", "echo", "lvpwd", "100", "cm"], "outside the plausible range"),
    ],
)
def test_edit_is_refused_when_an_import_of_the_edited_record_would_be(loaded_db, run, args, expected):
    before = dump(loaded_db)
    line = _one_line(run("edit", *args, "--reason", "test", db=loaded_db))
    assert expected in line, line
    assert "nothing was changed" in line or args[0] == "value", line
    assert dump(loaded_db) == before


def _invisible_cases():
    cases = [("person", ["T1-05"], f) for f in PERSON_FIELDS]
    cases += [("study", ["T1-03", "2014-01-10", "echo"], f) for f in STUDY_FIELDS]
    cases += [("assessment", ["T1-05", "2019-02-10"], f) for f in ASSESSMENT_FIELDS]
    return cases


@pytest.mark.parametrize("kind, key, field", _invisible_cases(), ids=lambda v: v if isinstance(v, str) else None)
def test_every_editable_field_refuses_an_invisible_formatting_character(loaded_db, run, kind, key, field):
    # Text fields say why; other fields refuse the cell as not one of their values.
    before = dump(loaded_db)
    line = _one_line(run("edit", kind, *key, "--set", f"{field}=Ab{INVISIBLE}c", "--reason", "test", db=loaded_db))
    assert line.startswith(f"error: {field}:"), line
    assert "Ab" not in line
    assert dump(loaded_db) == before


def test_edit_value_refuses_an_invisible_character_in_value_and_unit(loaded_db, run):
    before = dump(loaded_db)
    _one_line(run("edit", "value", "T1-03", "2014-01-10", "echo", "mwt_echo", f"2{INVISIBLE}1", "mm",
                  "--reason", "test", db=loaded_db))  # fmt: skip
    _one_line(run("edit", "value", "T1-03", "2014-01-10", "echo", "mwt_echo", "21", f"m{INVISIBLE}m",
                  "--reason", "test", db=loaded_db))  # fmt: skip
    assert dump(loaded_db) == before


def test_valid_edits_still_pass(loaded_db, run):
    for args in (["person", "T1-04", "--set", "notes=partner, seen 2026"],
                 ["person", "T1-06", "--set", "birth_date=2008-02-29"],
                 ["study", "T1-03", "2014-01-10", "echo", "--set", "height_cm=166"],
                 ["study", "T1-03", "2014-01-10", "echo", "--set", "study_date=2014-01-11"],
                 ["assessment", "T1-03", "2014-01-10", "--set", "pregnant=yes"],
                 ["value", "T1-03", "2014-01-11", "echo", "mwt_echo", "21.0", "mm"]):  # fmt: skip
        r = run("edit", *args, "--reason", "test", db=loaded_db)
        assert r.code == 0, (args, r)
    assert run("check", db=loaded_db).code == 0


# --------------------------------------------------------------------------- check


def _sql(url: str, statement: str, **params) -> None:
    from tracker.store.database import locate, make_engine

    engine = make_engine(locate(url))
    with engine.begin() as conn:
        conn.execute(text(statement), params)
    engine.dispose()


def _id(code: str) -> str:
    return f"(SELECT id FROM person WHERE code = '{code}')"


@pytest.mark.parametrize(
    "statement, where, expected",
    [
        ("UPDATE study SET height_cm = 5000", "study T1-03 2014-01-10 echo", "outside the plausible range 30-250 cm"),
        ("UPDATE study SET weight_kg = 0.001", "study T1-03 2014-01-10 echo", "outside the plausible range 1-350 kg"),
        ("UPDATE person SET is_proband = true WHERE code = 'T1-05'", "person T1-05", "already has a proband"),
        ("UPDATE person SET sex_at_birth = 'male' WHERE code = 'T1-03'", "person T1-05",
         "mother is recorded with sex at birth male"),
        ("UPDATE person SET birth_date = '2008-03-01' WHERE code = 'T1-06'", "person T1-06",
         "differs from the co-twin's date of birth"),
        ("UPDATE person SET vital_status = 'alive', death_age = NULL, death_cause = NULL WHERE code = 'T1-02'",
         "person T1-02", "death_date: is given but vital_status is not deceased"),
        ("UPDATE person SET is_placeholder = true WHERE code = 'T1-05'", "assessment T1-05",
         "is a placeholder member"),
        ("INSERT INTO contact_event (person_id, event_date, channel, outcome, source, entered_at, entered_by) "
         "VALUES (" + _id("T1-02") + ", '2014-01-01', 'phone', 'informed', 'entered', '2026-01-01 00:00:00', 'x')", "person T1-02",
         "the person is deceased"),
        ("INSERT INTO contact_event (person_id, event_date, channel, outcome, source, entered_at, entered_by) "
         "VALUES (" + _id("T1-01") + ", '2014-01-01', 'phone', 'informed', 'entered', '2026-01-01 00:00:00', 'x')", "person T1-01",
         "placeholder member"),
        ("UPDATE assessment SET pregnant = true WHERE person_id = " + _id("T1-05"), "assessment T1-05 2019-02-10",
         "sex at birth is male"),
        ("UPDATE person SET code = 't1-05' WHERE code = 'T1-08'", "person t1-05", "differs only by case"),
        ("UPDATE person SET twin_of_id = " + _id("T2-01") + ", twin_type = 'monozygotic', sex_at_birth = 'female', "
         "birth_date = '1975-05-05' WHERE code = 'T1-08'", "person T1-08", "twins are recorded in one family"),
        ("UPDATE genetic_result SET person_id = " + _id("T1-06") + ", test_date = '2020-04-01', "
         "test_type = 'diagnostic_panel' WHERE person_id = " + _id("T1-05"), "genetic result T1-06 2020-04-01",
         "carrier and non_carrier results"),
        ("UPDATE person SET notes = :bad WHERE code = 'T1-04'", "person T1-04", "invisible formatting character"),
        ("UPDATE person SET mother_id = " + _id("T1-05") + " WHERE code = 'T1-03'", "person T1-03",
         "would become their own ancestor"),
    ],
)
def test_check_finds_what_an_import_would_refuse_when_written_directly(loaded_db, run, statement, where, expected):
    assert run("check", db=loaded_db).code == 0
    _sql(loaded_db, statement, **({"bad": f"partner {INVISIBLE}x"} if ":bad" in statement else {}))
    r = run("check", "--json", db=loaded_db)
    assert r.code == 1, r
    import json

    found = json.loads(r.out)["findings"]
    assert any(f["where"].startswith(where) and expected in f["message"] for f in found), found


# --------------------------------------------------------------------------- re-import after removal


def test_reimport_after_removing_a_person_names_the_reinstate_command(loaded_db, run):
    assert run("remove", "person", "T1-05", "--reason", "entered twice", db=loaded_db).code == 0
    before = dump(loaded_db)
    line = _one_line(run("import", "people", MINI / "people.csv", db=loaded_db))
    assert "people.csv:6: column 'person': was removed on" in line, line
    assert 'tracker reinstate person T1-05 --reason "..."' in line
    assert "Bryn" not in line and "1995-02-28" not in line
    assert dump(loaded_db) == before
    # The records linked to the removed person say so too, and nothing is written.
    r = run("import", "all", MINI, db=loaded_db)
    assert r.code == 1 and "Traceback" not in r.err and "IntegrityError" not in r.err, r
    assert "was removed on" in r.err and "Bryn" not in r.err and "1995-02-28" not in r.err
    assert dump(loaded_db) == before
    # Reinstated, the same import adds nothing.
    assert run("reinstate", "person", "T1-05", "--reason", "removed by mistake", db=loaded_db).code == 0
    assert run("import", "all", MINI, db=loaded_db).code == 0


def test_reimport_after_removing_a_study_names_the_reinstate_command(loaded_db, run):
    assert run("remove", "study", "T1-06", "2020-05-01", "echo", "--reason", "other patient", db=loaded_db).code == 0
    before = dump(loaded_db)
    r = run("import", "studies", MINI / "studies.csv", db=loaded_db)
    assert r.code == 1 and "Traceback" not in r.err, r
    assert "column 'study_date': study T1-06 2020-05-01 echo was removed on" in r.err, r.err
    assert 'tracker reinstate study T1-06 2020-05-01 echo --reason "..."' in r.err
    assert dump(loaded_db) == before


def test_demo_again_after_a_removal_says_removed(db_url, run):
    assert run("demo", db=db_url).code == 0
    assert run("remove", "person", "HV01-IV-3", "--reason", "test", db=db_url).code == 0
    before = dump(db_url)
    line = _one_line(run("demo", db=db_url))
    assert "was removed on" in line and "tracker reinstate person HV01-IV-3" in line, line
    assert dump(db_url) == before
