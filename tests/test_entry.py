"""Data entry by form (tracker.services.entry): the importer's checks and writers, one record at a time.

Each kind stores what the same row in a CSV file would store (compared with a CSV import of that
row into a copy of the database), round-trips through the export, and a bad field is refused with
that field named and nothing written.  Families and values are invented (tests/data/mini).
"""

from __future__ import annotations

import datetime as dt
import shutil

import pytest
from conftest import dump

from tracker.io import export
from tracker.io.reading import InputRejected
from tracker.services import entry as E
from tracker.store import audit
from tracker.store import repository as repo
from tracker.store.database import locate, make_engine, reading, writing

TODAY = dt.date(2026, 12, 1)


def _engine(url):
    return make_engine(locate(url))


def _enter(url, fn, *args, **kw):
    engine = _engine(url)
    try:
        with writing(engine) as conn:
            return fn(conn, *args, user="test-nurse", today=TODAY, **kw)
    finally:
        engine.dispose()


def _refused(url, fn, *args, **kw) -> list:
    before = dump(url)
    with pytest.raises(InputRejected) as exc:
        _enter(url, fn, *args, **kw)
    assert dump(url) == before  # nothing written
    return exc.value.problems


def _export(url, kind):
    engine = _engine(url)
    try:
        with reading(engine) as conn:
            return export.to_csv_text(export.export_frame(conn, kind), kind)
    finally:
        engine.dispose()


RELATIVE = {"person": "T1-20", "sex_at_birth": "female", "birth_date": "2001-04-02", "vital_status": "alive",
            "mother": "T1-03", "contact_status": "not_contacted"}  # fmt: skip
STUDY = {"study_date": "2026-11-20", "modality": "echo", "site": "Invented Vale Hospital", "height_cm": "170",
         "weight_kg": "70"}  # fmt: skip
RESULT = {"test_date": "2026-11-02", "test_type": "predictive", "variant": "NM_000256.3:c.1504C>T",
          "result": "carrier", "lab": "Invented Genomics Lab", "report_reference": "IGL-0999"}  # fmt: skip
ASSESSMENT = {"assessment_date": "2026-11-20", "affected_status": "unaffected", "competitive_athlete": "no",
              "pregnant": "no", "hypertension": "no", "family_history_scd": "no", "nsvt": "no",
              "unexplained_syncope": "no", "prior_arrest_or_sustained_vt": "no", "metabolic_or_syndromic": "no",
              "atrial_fibrillation": "no"}  # fmt: skip


def test_add_relative_stores_and_exports(loaded_db):
    got = _enter(loaded_db, E.add_relative, "FAM-T1", RELATIVE)
    assert got.kind == "people" and got.rows_added == 1 and got.person == "T1-20"
    text = _export(loaded_db, "people")
    line = next(row for row in text.splitlines() if row.startswith("T1-20,"))
    assert ",FAM-T1," in line and ",2001-04-02," in line and ",T1-03," in line
    engine = _engine(loaded_db)
    with reading(engine) as conn:
        trail = audit.load(conn)
    engine.dispose()
    last = trail.iloc[-1]
    assert last["action"] == "entry" and last["person"] == "T1-20" and last["family"] == "FAM-T1"


def test_record_study_stores_values_in_the_catalogue_unit(loaded_db):
    got = _enter(loaded_db, E.record_study, "T1-05", STUDY, {"mwt_echo": "1.1", "lvef_echo": "62"},
                 {"mwt_echo": "cm"})  # fmt: skip
    assert got.rows_added == 2
    engine = _engine(loaded_db)
    with reading(engine) as conn:
        s = repo.load_studies(conn, entered=False)
    engine.dispose()
    mine = s[(s["person"] == "T1-05") & (s["study_date"].astype(str) == "2026-11-20")]
    assert dict(zip(mine["measure"], mine["value"])) == pytest.approx({"mwt_echo": 11.0, "lvef_echo": 62.0})
    text = _export(loaded_db, "studies")
    assert "T1-05,2026-11-20,echo,Invented Vale Hospital,170,70,mwt_echo,1.1,cm" in text  # as entered


def test_record_genetic_result_and_assessment(loaded_db):
    assert _enter(loaded_db, E.record_genetic_result, "T1-04", RESULT).rows_added == 1
    assert "T1-04,2026-11-02,predictive,NM_000256.3:c.1504C>T,carrier" in _export(loaded_db, "genetic-results")
    assert _enter(loaded_db, E.record_assessment, "T1-04", ASSESSMENT).rows_added == 1
    assert "T1-04,2026-11-20,unaffected" in _export(loaded_db, "assessments")


@pytest.mark.parametrize(
    "fn,args,field",
    [
        (E.add_relative, ("FAM-T1", {**RELATIVE, "sex_at_birth": "f"}), "sex_at_birth"),
        (E.add_relative, ("FAM-T1", {**RELATIVE, "birth_date": "2001-13-02"}), "birth_date"),
        (E.add_relative, ("FAM-T1", {**RELATIVE, "person": ""}), "person"),
        (E.add_relative, ("FAM-T1", {**RELATIVE, "person": "T1-03"}), None),  # stored with other values
        (E.add_relative, ("FAM-T1", {**RELATIVE, "mother": "T2-01"}), "mother"),  # another family
        (E.add_relative, ("FAM-T1", {**RELATIVE, "birth_date": "2030-01-01"}), "birth_date"),  # future
        (E.record_study, ("T1-05", STUDY, {"mwt_echo": "110"}), "value.mwt_echo"),
        (E.record_study, ("T1-05", STUDY, {"mwt_echo": "1,1"}), "value.mwt_echo"),
        (E.record_study, ("T1-05", STUDY, {"mwt_echo": "11"}, {"mwt_echo": "kg"}), "unit.mwt_echo"),
        (E.record_study, ("T1-05", {**STUDY, "study_date": "yesterday"}, {"mwt_echo": "11"}), "study_date"),
        (E.record_study, ("T1-05", {**STUDY, "height_cm": "-170"}, {}), "height_cm"),
        (E.record_study, ("T1-05", {**STUDY, "modality": "xray"}, {}), "modality"),
        (E.record_study, ("T1-05", STUDY, {"lvmi": "90"}), "value.lvmi"),  # computed measure
        (E.record_genetic_result, ("T1-04", {**RESULT, "result": "positive"}), "result"),
        (E.record_genetic_result, ("T1-04", {**RESULT, "variant": "NM_000256.3:c.1C>T"}), "variant"),
        (E.record_assessment, ("T1-04", {**ASSESSMENT, "affected_status": "ill"}), "affected_status"),
        (E.record_assessment, ("T1-04", {**ASSESSMENT, "nsvt": "maybe"}), "nsvt"),
        (E.record_assessment, ("T1-04", {**ASSESSMENT, "assessment_date": "2026-02-30"}), "assessment_date"),
        (E.record_assessment, ("T1-04", {**ASSESSMENT, "colour": "red"}), "colour"),
    ],
)
def test_bad_field_is_refused_naming_it_and_nothing_is_written(loaded_db, fn, args, field):
    problems = _refused(loaded_db, fn, *args)
    assert problems
    if field is not None:
        assert field in {p.column for p in problems}, problems
    for p in problems:  # the value is not repeated if it could be private
        assert "2001-04-02" not in p.message


def test_unknown_person_is_refused(loaded_db):
    problems = _refused(loaded_db, E.record_assessment, "NOPE-1", ASSESSMENT)
    assert problems[0].column == "person"


def test_the_same_entry_twice_is_refused_the_second_time(loaded_db):
    _enter(loaded_db, E.record_assessment, "T1-04", ASSESSMENT)
    problems = _refused(loaded_db, E.record_assessment, "T1-04", ASSESSMENT)
    assert "already recorded" in problems[0].message


@pytest.mark.parametrize("kind", ["people", "studies", "genetic-results", "assessments"])
def test_agrees_with_the_csv_importer(loaded_db, run, tmp_path, kind):
    """The same row through the form and through `tracker import` stores the same records."""
    if not loaded_db.endswith(".sqlite"):
        pytest.skip("copies the SQLite file")
    twin = str(tmp_path / "twin.sqlite")
    shutil.copy(loaded_db, twin)
    from tracker.io.layouts import LAYOUTS

    rows = {
        "people": {**RELATIVE, "family": "FAM-T1"},
        "studies": {**STUDY, "person": "T1-05", "measure": "mwt_echo", "value": "1.1", "unit": "cm"},
        "genetic-results": {**RESULT, "person": "T1-04"},
        "assessments": {**ASSESSMENT, "person": "T1-04"},
    }
    names = LAYOUTS[kind].names
    csv = tmp_path / LAYOUTS[kind].file_name
    csv.write_text(",".join(names) + "\n" + ",".join(rows[kind].get(n, "") for n in names) + "\n")
    r = run("import", kind, csv, db=twin)
    assert r.code == 0, r
    if kind == "people":
        _enter(loaded_db, E.add_relative, "FAM-T1", RELATIVE)
    elif kind == "studies":
        _enter(loaded_db, E.record_study, "T1-05", STUDY, {"mwt_echo": "1.1"}, {"mwt_echo": "cm"})
    elif kind == "genetic-results":
        _enter(loaded_db, E.record_genetic_result, "T1-04", RESULT)
    else:
        _enter(loaded_db, E.record_assessment, "T1-04", ASSESSMENT)
    a, b = dump(loaded_db), dump(twin)
    for table in a:
        if table in ("audit_entry", "import_run", "recall_proposal", "contact_event"):
            continue
        assert a[table] == b[table], table
    # the stored recall proposals agree too (all but the time they were computed), and the contact log
    # (all but the note naming where a status came from, a form or a file, and when it was entered)
    assert _proposals(loaded_db) == _proposals(twin) and _proposals(twin)
    assert _contact_events(loaded_db) == _contact_events(twin)
    assert _export(loaded_db, kind) == _export(twin, kind)


def _contact_events(db: str) -> list[tuple]:
    import sqlite3

    with sqlite3.connect(db) as con:
        return con.execute("SELECT person_id, event_date, channel, by_role, via_person_id, outcome, later_date, "
                           "source, entered_by FROM contact_event ORDER BY id").fetchall()


def _proposals(db: str) -> list[tuple]:
    import sqlite3

    with sqlite3.connect(db) as con:
        return con.execute("SELECT person_id, family_id, state, rule_id, interval_months, due_on, as_of, reasons, "
                           "inputs_version, valid_until, stale FROM recall_proposal ORDER BY person_id").fetchall()


# --------------------------------------------------------------------------- as-you-type


@pytest.fixture
def measures(loaded_db):
    engine = _engine(loaded_db)
    with reading(engine) as conn:
        out = repo.load_measures(conn)
    engine.dispose()
    return out


def test_plausible_gives_the_importers_words(measures):
    assert E.plausible(measures, "mwt_echo", "14") is None
    assert E.plausible(measures, "mwt_echo", "") is None
    msg = E.plausible(measures, "mwt_echo", "1.4")
    assert "outside the plausible range of mwt_echo" in msg and "centimetres" in msg
    assert E.plausible(measures, "mwt_echo", "1.4", "cm") is None
    assert "not a known unit" in E.plausible(measures, "mwt_echo", "14", "furlong")
    assert E.plausible(measures, "mwt_echo", "abc") is not None
    assert "not in the measure catalogue" in E.plausible(measures, "nope", "1")
