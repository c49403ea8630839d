"""The audit trail, corrections and soft removal, on SQLite and (when configured) PostgreSQL.

Uses the invented mini families of tests/data/mini (FAM-T1, FAM-T2).
"""

from __future__ import annotations

import json

import pytest
from sqlalchemy import text

from conftest import MINI, dump
from tracker.store import audit, migrate
from tracker.store import repository as repo
from tracker.store.database import locate, make_engine, reading, writing


def _engine(url):
    return make_engine(locate(url))


def _js(r):
    assert r.code == 0, r
    return json.loads(r.out)


def _one_line(r):
    assert r.code == 1, r
    assert r.err.startswith("error: ") and r.err.count("\n") == 1 and "Traceback" not in r.err, r.err
    return r.err


# --------------------------------------------------------------------------- append-only


def test_trigger_refuses_update_and_delete_of_audit_entries(loaded_db):
    engine = _engine(loaded_db)
    with writing(engine) as conn:
        entry = audit.record(conn, action="edit", table="person", what="test entry", before={"a": 1},
                             after={"a": 2}, reason="test", user="tester")  # fmt: skip
    statements = [f"UPDATE audit_entry SET actor = 'someone else' WHERE id = {entry}",
                  f"DELETE FROM audit_entry WHERE id = {entry}", "DELETE FROM audit_entry"]  # fmt: skip
    if engine.dialect.name == "postgresql":
        statements.append("TRUNCATE audit_entry")
    for sql in statements:
        with pytest.raises(Exception, match="append-only"):
            with writing(engine) as conn:
                conn.execute(text(sql))
    with reading(engine) as conn:
        row = conn.execute(text(f"SELECT actor, what FROM audit_entry WHERE id = {entry}")).one()
        assert tuple(row) == ("tester", "test entry")
    engine.dispose()


def test_import_is_audited_once_per_file_with_its_hash(loaded_db, run):
    entries = _js(run("audit", "--action", "import", "--json", db=loaded_db))
    files = sorted(e["after"]["file"] for e in entries)
    assert files == sorted(p.name for p in MINI.glob("*.csv"))
    people = next(e for e in entries if e["after"]["file"] == "people.csv")
    assert people["after"]["rows_added"] == 10 and len(people["after"]["sha256"]) == 64
    assert people["before"] is None and people["actor"]


# --------------------------------------------------------------------------- corrections


def test_edit_person_keeps_the_old_value_in_the_audit_trail(loaded_db, run, monkeypatch):
    monkeypatch.setenv("COLUMNS", "200")  # a wide terminal: the table's cells on one line each
    before = dump(loaded_db)
    d = _js(run("edit", "person", "T1-07", "--set", "contact_status=declined", "--set",
                "contact_status_date=2026-11-30", "--reason", "phoned; declines screening", "--user", "nurse.a",
                "--json", db=loaded_db))  # fmt: skip
    assert d["before"] == {"contact_status": "not_contacted", "contact_status_date": None}
    assert d["after"] == {"contact_status": "declined", "contact_status_date": "2026-11-30"}
    engine = _engine(loaded_db)
    with reading(engine) as conn:
        people = repo.load_people(conn).set_index("person")
    engine.dispose()
    assert people.at["T1-07", "contact_status"] == "declined"
    trail = _js(run("audit", "--person", "T1-07", "--json", db=loaded_db))
    assert len(trail) == 1
    e = trail[0]
    assert (e["actor"], e["action"], e["table"], e["family"]) == ("nurse.a", "edit", "person", "FAM-T1")
    assert e["before"]["contact_status"] == "not_contacted" and e["reason"] == "phoned; declines screening"
    table = run("audit", "--person", "T1-07", db=loaded_db)
    assert table.code == 0 and "1 audit entries" in table.out and "nurse.a" in table.out
    assert "contact_status: not_contacted -> declined" in table.out
    # Only the person row, the audit trail and the family's stored recall proposals (derived
    # data, recomputed in the edit's transaction: docs/design.md) changed.
    after = dump(loaded_db)
    assert {t for t in after if after[t] != before[t]} == {"person", "audit_entry", "recall_proposal"}


def test_edit_refused_when_it_makes_the_records_inconsistent(loaded_db, run):
    before = dump(loaded_db)
    # T1-05 was born 1995-02-28 and has studies: a death date before their studies is refused.
    err = _one_line(run("edit", "person", "T1-05", "--set", "vital_status=deceased", "--set", "death_date=1990-01-01",
                        "--reason", "test", db=loaded_db))  # fmt: skip
    assert "T1-05" in err and "nothing was changed" in err
    assert dump(loaded_db) == before


@pytest.mark.parametrize(
    "args, expected",
    [
        (["person", "T1-05", "--set", "birth_date=2031-05-01", "--reason", "r"], "birth_date: the value given is in the future"),
        (["person", "T1-05", "--set", "given_name=Ann\x07", "--reason", "r"], "given_name: the value given contains control"),
        (["person", "T1-05", "--set", "shoe_size=9", "--reason", "r"], "not a field of a person"),
        (["person", "T1-05", "--set", "mother=T2-01", "--reason", "r"], "belongs to another family"),
        (["person", "T1-05", "--set", "vital_status=alive", "--reason", " "], "--reason"),
        (["person", "NOPE-1", "--set", "vital_status=alive", "--reason", "r"], "no such person"),
        (["study", "T1-03", "2014-01-10", "echo", "--set", "height_cm=-3", "--reason", "r"], "greater than zero"),
        (["study", "T1-03", "2014-01-11", "echo", "--set", "height_cm=160", "--reason", "r"], "no such study"),
        (["value", "T1-03", "2014-01-10", "echo", "mwt_echo", "215", "mm", "--reason", "r"], "outside the plausible range"),
        (["value", "T1-03", "2014-01-10", "echo", "mwt_echo", "21", "furlongs", "--reason", "r"], "not a known unit"),
        (["value", "T1-03", "2014-01-10", "echo", "lvmi", "90", "g/m2", "--reason", "r"], ""),
    ],
)
def test_bad_edits_give_one_line_and_change_nothing(loaded_db, run, args, expected):
    before = dump(loaded_db)
    err = _one_line(run("edit", *args, db=loaded_db))
    assert expected in err
    # Messages never repeat a value typed for a name or a date of birth.
    assert "2031-05-01" not in err and "Ann" not in err
    assert dump(loaded_db) == before


def test_edit_value_converts_units_like_an_import(loaded_db, run):
    d = _js(run("edit", "value", "T1-03", "2014-01-10", "echo", "mwt_echo", "2.2", "cm", "--reason",
                "re-measured from stored images", "--json", db=loaded_db))  # fmt: skip
    assert d["before"] == {"measure": "mwt_echo", "value": 21.5, "unit": "mm"}
    assert d["after"] == {"measure": "mwt_echo", "value": 2.2, "unit": "cm"}
    engine = _engine(loaded_db)
    with reading(engine) as conn:
        v = conn.execute(text(
            "SELECT m.value, m.unit FROM measurement m JOIN study s ON s.id = m.study_id "
            "JOIN person p ON p.id = s.person_id WHERE p.code = 'T1-03' AND m.measure_code = 'mwt_echo' "
            "AND s.study_date = '2014-01-10'")).one()  # fmt: skip
    engine.dispose()
    assert v[0] == pytest.approx(22.0) and v[1] == "mm"  # 2.2 cm x 10 = 22 mm (SI definition)


# --------------------------------------------------------------------------- removal


def test_remove_study_hides_it_and_reinstate_brings_it_back(loaded_db, run):
    engine = _engine(loaded_db)

    def echo_dates():
        with reading(engine) as conn:
            s = repo.load_studies(conn)
        return sorted(set(s.loc[(s["person"] == "T1-03") & (s["modality"] == "echo"), "study_date"]))

    dates = echo_dates()
    assert "2014-01-10" in dates
    stored = dump(loaded_db)
    d = _js(run("remove", "study", "T1-03", "2014-01-10", "echo", "--reason", "duplicate entry", "--json",
                db=loaded_db))  # fmt: skip
    assert d["after"]["removed_reason"] == "duplicate entry"
    assert echo_dates() == [x for x in dates if x != "2014-01-10"]
    # The rows are kept: the study and its values are all still in the tables.
    kept = dump(loaded_db)
    assert kept["measurement"] == stored["measurement"] and len(kept["study"]) == len(stored["study"])
    listed = _js(run("removed", "--json", db=loaded_db))
    assert [(r["kind"], r["record"], r["reason"]) for r in listed] == [("study", "T1-03 2014-01-10 echo", "duplicate entry")]
    _one_line(run("edit", "value", "T1-03", "2014-01-10", "echo", "mwt_echo", "21", "mm", "--reason", "r", db=loaded_db))
    assert _js(run("reinstate", "study", "T1-03", "2014-01-10", "echo", "--reason", "mistake", "--json",
                   db=loaded_db))["after"]["removed_at"] is None  # fmt: skip
    assert echo_dates() == dates
    actions = [e["action"] for e in _js(run("audit", "--person", "T1-03", "--json", db=loaded_db))]
    assert actions == ["remove", "reinstate"]
    engine.dispose()


def test_remove_person_hides_their_records_and_refuses_a_parent(loaded_db, run):
    err = _one_line(run("remove", "person", "T1-03", "--reason", "test", db=loaded_db))
    assert "parent or twin of T1-05" in err
    _js(run("remove", "person", "T1-08", "--reason", "entered twice", "--json", db=loaded_db))
    engine = _engine(loaded_db)
    with reading(engine) as conn:
        people = repo.load_people(conn)
        results = repo.load_genetic_results(conn)
        studies = repo.load_studies(conn)
        n = conn.execute(text("SELECT count(*) FROM person WHERE code = 'T1-08'")).scalar()
    engine.dispose()
    assert "T1-08" not in set(people["person"]) and n == 1
    assert "T1-08" not in set(results["person"]) and "T1-08" not in set(studies["person"])
    assert run("check", db=loaded_db).code == 0


def test_downgrade_keeps_the_audit_trail_and_refuses_while_rows_are_removed(loaded_db, run):
    engine = _engine(loaded_db)
    _js(run("edit", "person", "T1-07", "--set", "notes=prefers e-mail", "--reason", "r", "--json", db=loaded_db))
    before = dump(loaded_db)
    migrate.downgrade(engine, "0003")
    with reading(engine) as conn:
        assert conn.execute(text("SELECT count(*) FROM audit_entry")).scalar() == len(before["audit_entry"])
    migrate.upgrade(engine)
    assert dump(loaded_db) == before
    _js(run("remove", "person", "T1-08", "--reason", "entered twice", "--json", db=loaded_db))
    with pytest.raises(Exception, match="reinstate them first"):
        migrate.downgrade(engine, "0003")
    with reading(engine) as conn:
        assert migrate.current_revision(conn) == migrate.head_revision()
    engine.dispose()


# --------------------------------------------------------------------------- other writers


def test_reclassification_and_task_done_are_audited(loaded_db, run):
    d = _js(run("reclassify", "FAM-T1", "--to", "pathogenic", "--date", "2025-06-01", "--reason", "lab re-review",
                "--user", "counsellor.b", "--json", db=loaded_db))  # fmt: skip
    items = d["reclassifications"][0]["items"]
    trail = _js(run("audit", "--family", "FAM-T1", "--action", "reclassify", "--json", db=loaded_db))
    cls = [e for e in trail if e["table"] == "variant_classification"]
    assert len(cls) == 1 and cls[0]["before"]["acmg_class"] == "likely_pathogenic"
    assert cls[0]["after"] == {"acmg_class": "pathogenic", "classified_on": "2025-06-01"}
    assert {e["actor"] for e in trail} == {"counsellor.b"}
    assert len([e for e in trail if e["table"] == "impact_item"]) == len(items)
    if items:
        _js(run("tasks", "done", str(items[0]["id"]), "--note", "letter sent", "--user", "nurse.a", "--json",
                db=loaded_db))  # fmt: skip
        done = _js(run("audit", "--action", "task_done", "--json", db=loaded_db))
        assert len(done) == 1 and done[0]["after"]["done_note"] == "letter sent" and done[0]["actor"] == "nurse.a"


def test_audit_filters_by_date(loaded_db, run):
    all_entries = _js(run("audit", "--json", db=loaded_db))
    day = all_entries[0]["at"][:10]
    assert len(_js(run("audit", "--from", day, "--to", day, "--json", db=loaded_db))) == len(all_entries)
    assert _js(run("audit", "--to", "2000-01-01", "--json", db=loaded_db)) == []
    _one_line(run("audit", "--from", "2026-02-30", db=loaded_db))
    _one_line(run("audit", "--action", "delete", db=loaded_db))


def test_edit_assessment_records_a_risk_answer(loaded_db, run):
    d = _js(run("edit", "assessment", "T2-01", "2021-01-20", "--set", "nsvt=yes", "--reason", "48-h Holter",
                "--json", db=loaded_db))  # fmt: skip
    assert d["before"] == {"nsvt": None} and d["after"] == {"nsvt": True}
    engine = _engine(loaded_db)
    with reading(engine) as conn:
        a = repo.load_assessments(conn).set_index("person")
    engine.dispose()
    assert a.at["T2-01", "nsvt"] is True or a.at["T2-01", "nsvt"] == True  # noqa: E712
    err = _one_line(run("edit", "assessment", "T2-01", "2021-01-20", "--set", "nsvt=perhaps", "--reason", "r",
                        db=loaded_db))  # fmt: skip
    assert "nsvt: the value given" in err and "not yes, no or empty" in err


# --------------------------------------------------------------------------- tamper evidence


def _check(run, db):
    r = run("check", "--json", db=db)
    return r.code, json.loads(r.out)["findings"]


def _audit_found(findings):
    return [f for f in findings if f["check"] == "audit"]


def _raw(engine, *statements):
    """Run statements outside the tool, as someone editing the database by hand would."""
    with engine.begin() as conn:
        for sql in statements:
            conn.execute(text(sql))


def _drop_triggers(engine):
    if engine.dialect.name == "postgresql":
        _raw(engine, "DROP TRIGGER audit_entry_no_change ON audit_entry",
             "DROP TRIGGER audit_entry_no_truncate ON audit_entry")  # fmt: skip
    else:
        _raw(engine, "DROP TRIGGER audit_entry_no_update", "DROP TRIGGER audit_entry_no_delete",
             "DROP TRIGGER audit_entry_no_replace")  # fmt: skip


def _trail_with_edits(db, run):
    for i in range(3):
        _js(run("edit", "person", "T1-07", "--set", f"notes=call {i}", "--reason", "r", "--json", db=db))
    engine = _engine(db)
    with reading(engine) as conn:
        ids = [r[0] for r in conn.execute(text("SELECT id FROM audit_entry ORDER BY id"))]
    return engine, ids


def test_check_passes_on_an_untouched_trail(loaded_db, run):
    engine, ids = _trail_with_edits(loaded_db, run)
    assert len(ids) >= 5
    assert _check(run, loaded_db) == (0, [])
    engine.dispose()


def test_check_finds_missing_triggers(loaded_db, run):
    engine, _ids = _trail_with_edits(loaded_db, run)
    _drop_triggers(engine)
    code, findings = _check(run, loaded_db)
    assert code == 1 and len(_audit_found(findings)) == 1
    assert "triggers" in findings[0]["message"] and findings[0]["where"] == "table audit_entry"
    engine.dispose()


@pytest.mark.parametrize("which", ["first", "middle", "last"])
def test_check_finds_a_rewritten_entry_with_its_id(loaded_db, run, which):
    engine, ids = _trail_with_edits(loaded_db, run)
    target = {"first": ids[0], "middle": ids[len(ids) // 2], "last": ids[-1]}[which]
    _drop_triggers(engine)
    _raw(engine, f"UPDATE audit_entry SET what = 'nothing happened' WHERE id = {target}")
    code, findings = _check(run, loaded_db)
    assert code == 1
    chain = [f for f in _audit_found(findings) if "hash chain" in f["message"]]
    assert [f["where"] for f in chain] == [f"audit entry {target}"]
    engine.dispose()


@pytest.mark.parametrize("which", ["first", "middle"])
def test_check_finds_a_deleted_entry_at_the_next_id(loaded_db, run, which):
    engine, ids = _trail_with_edits(loaded_db, run)
    k = {"first": 0, "middle": len(ids) // 2}[which]
    _drop_triggers(engine)
    _raw(engine, f"DELETE FROM audit_entry WHERE id = {ids[k]}")
    code, findings = _check(run, loaded_db)
    chain = [f for f in _audit_found(findings) if "hash chain" in f["message"]]
    assert code == 1 and [f["where"] for f in chain] == [f"audit entry {ids[k + 1]}"]
    engine.dispose()


@pytest.mark.parametrize("change", ["entry_hash = '0000000000000000000000000000000000000000000000000000000000000000'",
                                    "at = '2020-01-01 00:00:00'", "actor = actor || ' '", "before = NULL"])
def test_check_finds_any_changed_column(loaded_db, run, change):
    engine, ids = _trail_with_edits(loaded_db, run)
    _drop_triggers(engine)
    _raw(engine, f"UPDATE audit_entry SET {change} WHERE id = {ids[-2]}")
    chain = [f["where"] for f in _audit_found(_check(run, loaded_db)[1]) if "hash chain" in f["message"]]
    assert chain == [f"audit entry {ids[-2]}"]
    engine.dispose()


def test_sqlite_insert_or_replace_is_refused_and_found_when_forced(sqlite_db, run):
    assert run("init", db=sqlite_db).code == 0
    assert run("import", "all", MINI, db=sqlite_db).code == 0
    engine, ids = _trail_with_edits(sqlite_db, run)
    replace = (f"INSERT OR REPLACE INTO audit_entry (id, at, actor, action, table_name, what, entry_hash) "
               f"SELECT id, at, 'someone', action, table_name, 'nothing', entry_hash FROM audit_entry "
               f"WHERE id = {ids[2]}")  # fmt: skip
    with pytest.raises(Exception, match="append-only"):
        _raw(engine, replace)
    assert _check(run, sqlite_db) == (0, [])
    _raw(engine, "DROP TRIGGER audit_entry_no_replace")
    _raw(engine, replace)
    code, findings = _check(run, sqlite_db)
    wheres = [f["where"] for f in _audit_found(findings)]
    assert code == 1 and wheres == ["table audit_entry", f"audit entry {ids[2]}"]
    engine.dispose()


def test_postgresql_upsert_over_an_entry_is_refused(db_url, run):
    if not db_url.startswith("postgresql"):
        pytest.skip("PostgreSQL's upsert")
    assert run("init", db=db_url).code == 0
    assert run("import", "all", MINI, db=db_url).code == 0
    engine = _engine(db_url)
    with pytest.raises(Exception, match="append-only"):
        _raw(engine, "INSERT INTO audit_entry (id, at, actor, action, table_name, what) "
                     "SELECT id, at, 'someone', action, table_name, 'nothing' FROM audit_entry WHERE id = 1 "
                     "ON CONFLICT (id) DO UPDATE SET what = EXCLUDED.what")  # fmt: skip
    assert _check(run, db_url) == (0, [])
    engine.dispose()


def test_check_finds_a_dropped_audit_table(loaded_db, run):
    engine = _engine(loaded_db)
    _raw(engine, "DROP TABLE audit_entry")
    code, findings = _check(run, loaded_db)
    assert code == 1 and _audit_found(findings) == [
        {"check": "audit", "where": "table audit_entry", "message": "the audit trail is missing (the table was dropped)"}
    ]
    engine.dispose()


def test_chain_hash_is_the_documented_serialisation_on_both_backends(db_url, run):
    """Known answer: the first entry's hash from the bytes docs/corrections-and-audit.md defines,
    spelled out here by hand (microseconds, non-ASCII text, JSON text and nulls)."""
    import datetime as dt
    import hashlib

    assert run("init", db=db_url).code == 0
    engine = _engine(db_url)
    with writing(engine) as conn:
        audit.record(conn, action="edit", table="person", what="notes of T9-01 changed", user="nurse.ä",
                     row_id=7, family="FAM-T9", person="T9-01", before={"notes": "old"},
                     after={"notes": "née 2001-02-03"}, reason=None, at=dt.datetime(2026, 1, 2, 3, 4, 5, 678901))  # fmt: skip
        audit.record(conn, action="edit", table="person", what="second", user="x", at=dt.datetime(2026, 1, 2))
    body = ('["tracker-audit-chain-1",1,"2026-01-02T03:04:05.678901","nurse.ä","edit","person",7,"FAM-T9",'
            '"T9-01","notes of T9-01 changed","{\\"notes\\": \\"old\\"}","{\\"notes\\": \\"née 2001-02-03\\"}",null]')
    first = hashlib.sha256(("0" * 64 + "\n").encode() + body.encode("utf-8")).hexdigest()
    body2 = ('["tracker-audit-chain-1",2,"2026-01-02T00:00:00.000000","x","edit","person",null,null,null,'
             '"second",null,null,null]')
    second = hashlib.sha256((first + "\n").encode() + body2.encode("utf-8")).hexdigest()
    with reading(engine) as conn:
        stored = [tuple(r) for r in conn.execute(text("SELECT id, entry_hash FROM audit_entry ORDER BY id"))]
    assert stored == [(1, first), (2, second)]
    assert _check(run, db_url) == (0, [])
    engine.dispose()


def test_upgrade_hashes_existing_entries_in_order(loaded_db, run):
    engine, ids = _trail_with_edits(loaded_db, run)
    with reading(engine) as conn:
        before = [tuple(r) for r in conn.execute(text("SELECT id, entry_hash FROM audit_entry ORDER BY id"))]
    migrate.downgrade(engine, "0005")
    with reading(engine) as conn:
        assert conn.execute(text("SELECT count(*) FROM audit_entry")).scalar() == len(ids)
    migrate.upgrade(engine)
    with reading(engine) as conn:
        after = [tuple(r) for r in conn.execute(text("SELECT id, entry_hash FROM audit_entry ORDER BY id"))]
    assert after == before and all(h and len(h) == 64 for _i, h in after)
    assert _check(run, loaded_db) == (0, [])
    engine.dispose()


@pytest.mark.parametrize("newest", [1, 2])
def test_check_finds_the_newest_entries_removed(loaded_db, run, newest):
    """Removing the newest entries leaves a valid chain; the imports and removals they recorded show it."""
    _js(run("remove", "person", "T1-08", "--reason", "entered twice", "--json", db=loaded_db))
    engine = _engine(loaded_db)
    assert _check(run, loaded_db) == (0, [])
    with reading(engine) as conn:
        ids = [r[0] for r in conn.execute(text("SELECT id FROM audit_entry ORDER BY id"))]
    _drop_triggers(engine)
    _raw(engine, *[f"DELETE FROM audit_entry WHERE id = {i}" for i in ids[-newest:]])
    # Put the triggers back, as someone covering their tracks would.
    if engine.dialect.name == "postgresql":
        _raw(engine, "CREATE TRIGGER audit_entry_no_change BEFORE UPDATE OR DELETE ON audit_entry "
                     "FOR EACH ROW EXECUTE FUNCTION audit_entry_refuse()",
             "CREATE TRIGGER audit_entry_no_truncate BEFORE TRUNCATE ON audit_entry "
             "FOR EACH STATEMENT EXECUTE FUNCTION audit_entry_refuse()")  # fmt: skip
    else:
        msg = "audit_entry is append-only: rows are never changed or deleted"
        _raw(engine, *[f"CREATE TRIGGER audit_entry_no_{v.lower()} BEFORE {v} ON audit_entry "
                       f"BEGIN SELECT RAISE(ABORT, '{msg}'); END" for v in ("UPDATE", "DELETE")],
             "CREATE TRIGGER audit_entry_no_replace BEFORE INSERT ON audit_entry WHEN EXISTS "
             f"(SELECT 1 FROM audit_entry WHERE id = NEW.id) BEGIN SELECT RAISE(ABORT, '{msg}'); END")  # fmt: skip
    code, findings = _check(run, loaded_db)
    wheres = {f["where"] for f in _audit_found(findings)}
    assert code == 1 and "table person" in wheres
    if newest == 2:
        assert "table import_run" in wheres
    engine.dispose()
