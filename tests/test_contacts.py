"""The contact log (revision 0012): recording, the state derived from it, refusals, the migration.

Invented people of tests/data/mini (FAM-T1, FAM-T2); on SQLite and, when configured, PostgreSQL.
"""

from __future__ import annotations

import datetime as dt
from pathlib import Path

import pytest
from sqlalchemy import func, select, text

from conftest import MINI, dump
from tracker.domain.contacts import derive_state, legacy_status
from tracker.io.reading import InputRejected
from tracker.services import contacts as C
from tracker.store import migrate
from tracker.store import repository as repo
from tracker.store.database import locate, make_engine, reading, writing
from tracker.store.models import AuditEntry, ContactEvent

TODAY = dt.date(2026, 12, 1)


@pytest.fixture
def engine(loaded_db):
    e = make_engine(locate(loaded_db))
    yield e
    e.dispose()


def _count(engine, model) -> int:
    with reading(engine) as conn:
        return conn.execute(select(func.count()).select_from(model)).scalar()


# --------------------------------------------------------------------------- derived state


def test_imported_status_is_an_event_and_reads_back_the_same(engine):
    """A people file's contact_status becomes one imported event; the people frame reads the same words."""
    with reading(engine) as conn:
        people = repo.load_people(conn).set_index("person")
        events = repo.load_contact_events(conn)
    assert people.at["T1-08", "contact_status"] == "declined"
    assert people.at["T1-08", "contact_status_date"] == "2020-03-03"
    assert people.at["T1-03", "contact_status"] == "contactable"
    assert people.at["T2-02", "contact_status"] == "lost_to_follow_up"
    t108 = events[events["person"] == "T1-08"]
    assert list(t108["outcome"]) == ["declined"] and list(t108["source"]) == ["imported"]
    # contactable is kept as outcome "informed"
    assert list(events.loc[events["person"] == "T1-03", "outcome"]) == ["informed"]


def test_a_correction_appends_and_the_history_is_kept(engine):
    with writing(engine) as conn:
        C.record_contact(conn, "T1-07", on="2026-10-01", channel="phone", by="nurse", outcome="no_answer",
                         user="nurse-a", today=TODAY)
        C.record_contact(conn, "T1-07", on="2026-10-08", channel="letter", by="counsellor", outcome="informed",
                         user="nurse-a", today=TODAY)
    with reading(engine) as conn:
        state = C.contact_state(conn, "T1-07")
    assert state["status"] == "contactable" and state["status_date"] == "2026-10-08"
    assert state["informed"] is True and state["informed_date"] == "2026-10-08"
    assert [h["outcome"] for h in state["history"]] == ["not_contacted", "no_answer", "informed"]
    # A correction: the relative then declines; nothing earlier is overwritten.
    with writing(engine) as conn:
        C.record_contact(conn, "T1-07", on="2026-11-02", channel="in_clinic", by="cardiologist",
                         outcome="declined", notes="does not want screening now", user="dr-b", today=TODAY)
    with reading(engine) as conn:
        state = C.contact_state(conn, "T1-07")
        people = repo.load_people(conn).set_index("person")
    assert state["status"] == "declined" and len(state["history"]) == 4
    assert people.at["T1-07", "contact_status"] == "declined"
    assert people.at["T1-07", "contact_status_date"] == "2026-11-02"


def test_event_order_is_by_date_not_entry_order():
    events = [
        {"id": 1, "event_date": dt.date(2026, 5, 1), "outcome": "declined", "channel": "phone"},
        {"id": 2, "event_date": dt.date(2026, 3, 1), "outcome": "informed", "channel": "letter"},
    ]
    s = derive_state("P", events)
    assert s.status == "declined" and s.informed_date == dt.date(2026, 3, 1)


@pytest.mark.parametrize(
    "outcomes, wish, expected",
    [
        ([], None, None),
        (["no_answer"], None, "not_contacted"),
        (["informed", "no_answer"], None, "contactable"),
        (["informed", "wrong_address"], None, "contactable"),
        (["informed", "moved_away"], None, "lost_to_follow_up"),
        (["contact_later"], None, "contactable"),
        (["informed"], "no_further_contact", "declined"),
        (["informed"], "only_via_family_member", "contactable"),
        ([None], None, None),
    ],
)
def test_legacy_status_table(outcomes, wish, expected):
    """The table in docs/contacts-and-letters.md (and tracker.domain.contacts.legacy_status)."""
    assert legacy_status(outcomes, wish) == expected


# --------------------------------------------------------------------------- refusals


@pytest.mark.parametrize(
    "kw, column",
    [
        (dict(on="2026-13-01"), "on"),
        (dict(on="2030-01-01"), "on"),  # future
        (dict(on="1990-01-01"), "on"),  # before birth (2008)
        (dict(channel="email"), "channel"),
        (dict(by="porter"), "by"),
        (dict(outcome="maybe"), "outcome"),
        (dict(outcome="contact_later"), "later"),  # later missing
        (dict(outcome="contact_later", later="2026-10-01"), "later"),  # not after the contact
        (dict(later="2027-01-01"), "later"),  # later without contact_later
        (dict(channel="via_family", by=None), "via"),
        (dict(channel="via_family", by=None, via="T2-01"), "via"),  # another family
        (dict(channel="via_family", by=None, via="T1-07"), "via"),  # the person themself
        (dict(channel="via_family", by=None, via="T1-02"), "via"),  # deceased
        (dict(channel="via_family", via="T1-04"), "by"),  # role and via together
        (dict(via="T1-04"), "via"),  # via without via_family
        (dict(notes="a\u202eb"), "notes"),  # bidirectional override
        (dict(notes="x" * 5000), "notes"),
    ],
)
def test_bad_input_names_the_field_and_writes_nothing(engine, kw, column):
    args = dict(on="2026-11-01", channel="phone", by="nurse", outcome="informed", user="nurse-a")
    args.update(kw)
    n_events, n_audit = _count(engine, ContactEvent), _count(engine, AuditEntry)
    with pytest.raises(InputRejected) as exc:
        with writing(engine) as conn:
            C.record_contact(conn, "T1-07", today=TODAY, **args)
    assert exc.value.problems[0].column == column, exc.value.problems
    assert _count(engine, ContactEvent) == n_events and _count(engine, AuditEntry) == n_audit


def test_unknown_person_is_refused(engine):
    with pytest.raises(InputRejected) as exc:
        with writing(engine) as conn:
            C.record_contact(conn, "NOBODY", on="2026-11-01", channel="phone", by="nurse", outcome="informed",
                             user="u", today=TODAY)
    assert exc.value.problems[0].column == "person"


# --------------------------------------------------------------------------- wishes, letters, bookings


def test_wish_blocks_letters_and_bookings_and_is_ended_not_deleted(engine):
    with writing(engine) as conn:
        C.record_wish(conn, "T1-05", wish="no_further_contact", on="2026-09-01", user="gc", today=TODAY)
    with reading(engine) as conn:
        st = C.contact_state(conn, "T1-05")
    assert st["must_not_approach"] is True and st["status"] == "declined"
    for call, kw in ((C.record_letter_sent, dict(kind="reminder", template="t", template_version="1",
                                                 on="2026-11-01")),
                     (C.record_booking, dict(on="2027-01-10", purpose="screening echo"))):  # fmt: skip
        with pytest.raises(InputRejected) as exc:
            with writing(engine) as conn:
                call(conn, "T1-05", user="nurse-a", today=TODAY, **kw)
        assert exc.value.problems[0].column == "person"
    with pytest.raises(InputRejected):  # a second open wish
        with writing(engine) as conn:
            C.record_wish(conn, "T1-05", wish="no_further_contact", on="2026-10-01", user="gc", today=TODAY)
    with writing(engine) as conn:
        C.end_wish(conn, "T1-05", on="2026-11-20", user="gc", today=TODAY)
        booked = C.record_booking(conn, "T1-05", on="2027-01-10", purpose="screening echo", user="nurse-a",
                                  today=TODAY)  # fmt: skip
    assert booked["visit_date"] == "2027-01-10"
    with reading(engine) as conn:
        wishes = repo.load_contact_wishes(conn)
    row = wishes[wishes["person"] == "T1-05"].iloc[0]
    assert row["ended_date"] == "2026-11-20" and row["wish"] == "no_further_contact"


def test_only_via_family_member_redirects_letters(engine):
    with writing(engine) as conn:
        C.record_wish(conn, "T1-05", wish="only_via_family_member", via="T1-04", on="2026-09-01", user="gc",
                      today=TODAY)  # fmt: skip
    with pytest.raises(InputRejected) as exc:
        with writing(engine) as conn:
            C.record_letter_sent(conn, "T1-05", kind="reminder", template="t", template_version="1",
                                 on="2026-11-01", user="n", today=TODAY)  # fmt: skip
    assert exc.value.problems[0].column == "via" and "T1-04" in exc.value.problems[0].message
    with writing(engine) as conn:
        sent = C.record_letter_sent(conn, "T1-05", kind="reminder", template="t", template_version="1",
                                    on="2026-11-01", to="via_family", via="T1-04", user="n", today=TODAY)
        reply = C.record_letter_reply(conn, "T1-05", kind="reminder", sent_date="2026-11-01", on="2026-11-15",
                                      user="n", today=TODAY)  # fmt: skip
    assert sent["via"] == "T1-04" and reply["reply_date"] == "2026-11-15"


def test_external_result_and_discharge(engine):
    with writing(engine) as conn:
        ext = C.record_external_result(conn, "T1-07", kind="genetic_test", on="2026-06-01",
                                       centre="Invented Northern Centre", result="non_carrier", user="gc",
                                       today=TODAY)  # fmt: skip
        dis = C.record_discharge(conn, "T1-07", on="2026-07-01", advice="return if symptoms or reclassified",
                                 user="dr", today=TODAY)  # fmt: skip
    assert ext["variant"] == "NM_000256.3:c.1504C>T" and ext["external"] is True
    assert dis["acmg_class"] == "likely_pathogenic" and dis["classified_on"] == "2018-06-15"
    with pytest.raises(InputRejected) as exc:  # a carrier cannot be discharged
        with writing(engine) as conn:
            C.record_discharge(conn, "T1-06", on="2026-07-01", advice="x", user="dr", today=TODAY)
    assert exc.value.problems[0].column == "person"
    with pytest.raises(InputRejected) as exc:  # the opposite result for the same variant
        with writing(engine) as conn:
            C.record_external_result(conn, "T1-05", kind="genetic_test", on="2026-06-01", centre="X",
                                     result="carrier", user="gc", today=TODAY)  # fmt: skip
    assert exc.value.problems[0].column == "result"


def test_every_write_is_audited(engine):
    with writing(engine) as conn:
        r = C.record_contact(conn, "T1-07", on="2026-11-01", channel="phone", by="nurse", outcome="contact_later",
                             later="2027-03-01", user="nurse-a", today=TODAY)  # fmt: skip
        b = C.record_booking(conn, "T1-03", on="2027-01-05", purpose="annual review", user="nurse-a", today=TODAY)
        c = C.cancel_booking(conn, "T1-03", visit_date="2027-01-05", user="nurse-a", today=TODAY)
    with reading(engine) as conn:
        rows = conn.execute(select(AuditEntry.id, AuditEntry.action, AuditEntry.table_name, AuditEntry.actor,
                                   AuditEntry.person_code).order_by(AuditEntry.id)).all()[-3:]  # fmt: skip
    assert [(x.action, x.table_name, x.actor) for x in rows] == [
        ("record", "contact_event", "nurse-a"), ("record", "booking", "nurse-a"), ("edit", "booking", "nurse-a")]
    assert [r["audit_id"], b["audit_id"], c["audit_id"]] == [x.id for x in rows]


def test_edit_person_contact_status_appends_an_event(engine, run, loaded_db):
    r = run("edit", "person", "T1-07", "--set", "contact_status=declined", "--set",
            "contact_status_date=2026-11-30", "--reason", "phoned", db=loaded_db)  # fmt: skip
    assert r.code == 0, r
    with reading(engine) as conn:
        hist = C.contact_state(conn, "T1-07")["history"]
    assert [(h["outcome"], h["event_date"]) for h in hist] == [("not_contacted", None), ("declined", "2026-11-30")]
    r = run("edit", "person", "T1-07", "--set", "contact_status=", "--reason", "clear", db=loaded_db)
    assert r.code == 1 and "tracker contact add" in r.err


def test_load_contact_events_is_family_scoped(engine):
    with reading(engine) as conn:
        frame = C.load_contact_events(conn, repo.Scope.families(["FAM-T2"]))
    assert set(frame["person"]) == {"T2-01", "T2-02"}


# --------------------------------------------------------------------------- migration of the old field


def test_upgrade_from_0009_moves_every_status_into_the_log(db_url, run):
    """A 0009 database holding contact statuses: 0012 logs each one (same words, same date), nothing lost;
    down again restores the same single status."""
    engine = make_engine(locate(db_url), create=True)
    migrate.upgrade(engine, "0009")
    with writing(engine) as conn:
        conn.execute(text("INSERT INTO family (code, condition) VALUES ('F', 'HCM')"))
        fid = conn.execute(text("SELECT id FROM family")).scalar()
        for code, status, day in [("A", "contactable", "2020-01-02"), ("B", "declined", "2021-03-04"),
                                  ("C", "lost_to_follow_up", None), ("D", None, "2022-05-06"),
                                  ("E", "not_contacted", None), ("G", None, None)]:  # fmt: skip
            conn.execute(text("INSERT INTO person (code, family_id, sex_at_birth, vital_status, is_placeholder, "
                              "is_proband, contact_status, contact_status_date) VALUES (:c, :f, 'male', 'alive', "
                              "false, false, :s, :d)"),
                         {"c": code, "f": fid, "s": status, "d": day})  # fmt: skip
    with reading(engine) as conn:
        before = conn.execute(text("SELECT code, contact_status, contact_status_date FROM person ORDER BY code")).all()
    migrate.upgrade(engine)
    with reading(engine) as conn:
        events = repo.load_contact_events(conn).set_index("person")
        people = repo.load_people(conn).set_index("person")
        stored = conn.execute(text("SELECT count(*) FROM person WHERE contact_status IS NOT NULL "
                                   "OR contact_status_date IS NOT NULL")).scalar()  # fmt: skip
    assert stored == 0
    assert sorted(events.index) == ["A", "B", "C", "D", "E"]
    assert events.at["A", "outcome"] == "informed" and events.at["A", "event_date"] == "2020-01-02"
    assert events.at["D", "outcome"] is None and events.at["D", "event_date"] == "2022-05-06"
    assert set(events["source"]) == {"migrated"} and all("migrated" in n for n in events["notes"])
    for code, status, day in before:
        day = day if day is None or isinstance(day, str) else day.isoformat()
        assert (people.at[code, "contact_status"], people.at[code, "contact_status_date"]) == (status, day), code
    migrate.downgrade(engine, "0009")
    with reading(engine) as conn:
        after = conn.execute(text("SELECT code, contact_status, contact_status_date FROM person ORDER BY code")).all()
    assert [tuple(r) for r in after] == [tuple(r) for r in before]
    engine.dispose()


# --------------------------------------------------------------------------- the command line


def test_cli_contact_wish_book_external_discharge(loaded_db, run):
    import json

    r = run("contact", "add", "T1-07", "--date", "2026-11-01", "--channel", "phone", "--by", "nurse", "--outcome",
            "contact_later", "--later", "2027-03-01", "--user", "nurse.a", "--json", db=loaded_db)  # fmt: skip
    assert r.code == 0, r
    assert json.loads(r.out)["later_date"] == "2027-03-01"
    r = run("contact", "list", "T1-07", "--json", db=loaded_db)
    st = json.loads(r.out)
    assert st["status"] == "contactable" and st["contact_later_on"] == "2027-03-01" and len(st["history"]) == 2
    r = run("contact", "list", "T1-07", db=loaded_db)
    assert r.code == 0 and "asked to be contacted on 2027-03-01" in r.out
    # A refused field names its option, one line, exit 1, nothing written.
    r = run("contact", "add", "T1-07", "--date", "2026-02-30", "--channel", "phone", "--by", "nurse", "--outcome",
            "informed", db=loaded_db)  # fmt: skip
    assert r.code == 1 and r.err.startswith("error: --date:") and r.err.count("\n") == 1, r
    r = run("wish", "set", "T1-05", "--wish", "only_via_family_member", "--via", "T1-04", "--date", "2026-09-01",
            db=loaded_db)  # fmt: skip
    assert r.code == 0, r
    assert "through T1-04" in run("contact", "list", "T1-05", db=loaded_db).out
    assert run("wish", "end", "T1-05", "--date", "2026-10-01", db=loaded_db).code == 0
    r = run("book", "T1-03", "--date", "2099-01-01", "--purpose", "echo", db=loaded_db)
    assert r.code == 1 and "--date:" in r.err  # more than 5 years ahead
    r = run("external", "add", "T1-07", "--kind", "genetic_test", "--date", "2026-06-01", "--centre", "Invented Centre",
            "--result", "non_carrier", "--json", db=loaded_db)  # fmt: skip
    assert r.code == 0 and json.loads(r.out)["external"] is True, r
    r = run("discharge", "T1-07", "--date", "2026-07-01", "--advice", "see a doctor with symptoms", db=loaded_db)
    assert r.code == 0 and "likely_pathogenic" in r.out, r


# --------------------------------------------------------------------------- results from other centres


def test_external_results_count_in_genotype_status_and_recall(loaded_db, run):
    import json

    before = json.loads(run("recall", "T1-07", "--as-of", "2026-12-01", "--json", db=loaded_db).out)
    assert run("external", "add", "T1-07", "--kind", "genetic_test", "--date", "2026-06-01", "--centre",
               "Invented Northern Centre", "--result", "carrier", db=loaded_db).code == 0  # fmt: skip
    after = json.loads(run("recall", "T1-07", "--as-of", "2026-12-01", "--json", db=loaded_db).out)
    text = json.dumps(after)
    assert "from another centre: Invented Northern Centre (external)" in text
    assert json.dumps(before) != text
    assert '"carrier"' in text
    # A screening elsewhere counts as a visit (marked external).
    assert run("external", "add", "T1-07", "--kind", "screening", "--date", "2026-07-01", "--centre",
               "Invented Northern Centre", "--result", "unaffected", db=loaded_db).code == 0  # fmt: skip
    again = json.dumps(json.loads(run("recall", "T1-07", "--as-of", "2026-12-01", "--json", db=loaded_db).out))
    assert "2026-07-01" in again


# --------------------------------------------------------------------------- export and import


def _fill(db, run, letters):
    for args in (
        ("contact", "add", "T1-07", "--date", "2026-10-01", "--channel", "phone", "--by", "nurse", "--outcome",
         "no_answer"),
        ("contact", "add", "T1-07", "--date", "2026-10-08", "--channel", "via_family", "--via", "T1-04", "--outcome",
         "contact_later", "--later", "2027-02-01", "--notes", "=starts like a formula"),
        ("wish", "set", "T1-05", "--wish", "only_via_family_member", "--via", "T1-04", "--date", "2026-09-01"),
        ("wish", "end", "T1-05", "--date", "2026-09-20"),
        ("external", "add", "T1-07", "--kind", "genetic_test", "--date", "2026-06-01", "--centre", "Invented Centre",
         "--result", "non_carrier", "--document", "INV-1"),
        ("discharge", "T1-07", "--date", "2026-07-01", "--advice", "see a doctor with symptoms"),
        ("book", "T1-03", "--date", "2027-01-12", "--purpose", "annual review"),
        ("report", "letter", "T1-07", "--out", letters, "--date", "2026-07-02", "--kind", "discharge", "--sent",
         "--settings", Path(__file__).resolve().parent.parent / "demo_family" / "clinic.toml"),
    ):
        r = run(*args, db=db)
        assert r.code == 0, (args, r)


def test_contact_export_import_round_trip(loaded_db, run, tmp_path):
    _fill(loaded_db, run, tmp_path / "letters")
    first = tmp_path / "first"
    assert run("contact", "export", first, db=loaded_db).code == 0
    # A second store with the same people: importing the folder gives the same export.
    other = str(tmp_path / "other.sqlite")
    assert run("init", db=other).code == 0 and run("import", "all", MINI, db=other).code == 0
    r = run("contact", "import", first, "--json", db=other)
    assert r.code == 0, r
    second = tmp_path / "second"
    assert run("contact", "export", second, db=other).code == 0
    for f in sorted(first.iterdir()):
        assert f.read_text() == (second / f.name).read_text(), f.name
    assert "'=starts like a formula" in (first / "contact_events.csv").read_text()
    # Again: nothing added.
    again = __import__("json").loads(run("contact", "import", first, "--json", db=other).out)
    assert all(d["rows_added"] == 0 for d in again)


@pytest.mark.parametrize(
    "file, text, row, column",
    [
        ("contact_events.csv", "person,event_date,channel,by_role,via,outcome,later_date,notes\n"
         "T1-07,2026-10-01,phone,nurse,,informed,,\nT1-07,2026-10-02,fax,nurse,,informed,,\n", 3, "channel"),
        ("contact_events.csv", "person,event_date,channel,by_role,via,outcome,later_date,notes\n"
         "T1-07,2026-10-01,phone,nurse,,contact_later,,\n", 2, "later_date"),
        ("contact_events.csv", "person,event_date,channel,by_role,via,outcome,later_date,notes\n"
         "T1-07,2026-10-01,via_family,,T2-01,informed,,\n", 2, "via"),
        ("contact_wishes.csv", "person,wish,via,recorded_date,notes,ended_date\n"
         "T1-05,only_via_family_member,,2026-09-01,,\n", 2, "via"),
        ("bookings.csv", "person,visit_date,purpose,notes,cancelled_date\nT1-03,2027-01-12,,,\n", 2, "purpose"),
        ("external_results.csv", "person,kind,result_date,centre,variant,result,document_ref,notes\n"
         "T1-07,screening,2026-06-01,X,,carrier,,\n", 2, "result"),
    ],
)
def test_contact_import_refuses_bad_rows_and_writes_nothing(loaded_db, run, tmp_path, file, text, row, column):
    folder = tmp_path / "in"
    folder.mkdir()
    (folder / file).write_text(text)
    before = dump(loaded_db)
    r = run("contact", "import", folder, db=loaded_db)
    assert r.code == 1 and f"{file}:{row}: column '{column}'" in r.err, r
    assert dump(loaded_db) == before
