"""Recall proposals kept in the store (table ``recall_proposal``, :mod:`tracker.services.proposals`).

- After every write path (import, edit, removal, reinstatement, reclassification, a task done)
  the stored rows equal a fresh recomputation, on the demo and on an invented family (STF1),
  on SQLite and on PostgreSQL (``TRACKER_TEST_POSTGRES_URL``).
- The worklist read from stored rows equals the worklist computed from every family's records,
  on the day they were stored, on later days (rows past ``valid_until`` recomputed) and after an
  upgrade from revision 0009 (empty table).
- ``valid_until``: a person whose birthday crosses a rule band inside the window is recomputed
  (the test fails if ``valid_until`` were ignored: the stored row read on that day differs).
- ``tracker check`` reports a row changed behind the tool's back; ``recall --refresh`` after a
  settings change stores every row under the new settings.

All data are invented. The reference for "right" is the worklist's own computation from the
records (:func:`tracker.cli.recall.worklist_lists`), which tests/test_output_unchanged.py pins.
"""

from __future__ import annotations

import datetime as dt
import json
from pathlib import Path

import pytest
from sqlalchemy import text

from tracker.engines import family_state as fs
from tracker.engines.schedule import propose_recall, redate, valid_until
from tracker.services import proposals as SP
from tracker.services import worklist as SW
from tracker.services.cascade import _variant_rereview
from tracker.services.recall import load, recall_rules
from tracker.store.database import locate, make_engine, reading, writing

ROOT = Path(__file__).parent.parent
DEMO = ROOT / "demo_family"
SETTINGS = str(DEMO / "clinic.toml")
T0 = dt.date(2026, 12, 5)  # the day the rows are computed for in these tests (passed explicitly)

STF1 = {
    "families.csv": """family,condition,notes
STF1,hypertrophic cardiomyopathy,invented family for the stored proposals
""",
    "people.csv": """person,family,given_name,family_name,sex_at_birth,gender_identity,birth_date,vital_status,death_date,mother,father,placeholder,proband,twin_of,twin_type,adoption,contact_status,contact_status_date,notes
ST-01,STF1,Arvid,Pellow,male,,1970-02-02,alive,,,,no,yes,,,,contactable,2015-01-01,Index case
ST-02,STF1,Wenna,Pellow,female,,1972-03-03,alive,,,,no,no,,,,,,Married in
ST-03,STF1,Brann,Pellow,male,,2008-12-20,alive,,ST-02,ST-01,no,no,,,,contactable,2015-01-01,Turns 18 on 2026-12-20
ST-04,STF1,Eira,Pellow,female,,2001-05-05,alive,,ST-02,ST-01,no,no,,,,contactable,2015-01-01,Carrier
ST-05,STF1,Odo,Pellow,male,,2004-07-07,alive,,ST-02,ST-01,no,no,,,,not_contacted,2015-01-01,Never screened
""",
    "variants.csv": """family,gene,transcript,hgvs_c,hgvs_p,zygosity,acmg_class,classified_on,reason
STF1,MYH7,NM_000257.4,c.1208G>A,p.(Arg403Gln),heterozygous,pathogenic,2014-04-01,invented classification
""",
    "genetic_results.csv": """person,test_date,test_type,variant,result,lab,report_reference
ST-01,2014-04-01,diagnostic_panel,NM_000257.4:c.1208G>A,carrier,Invented Lab,STF-1
ST-04,2020-03-01,predictive,NM_000257.4:c.1208G>A,carrier,Invented Lab,STF-2
""",
    "assessments.csv": """person,assessment_date,affected_status,symptoms,competitive_athlete,pregnant,hypertension,notes,family_history_scd,nsvt,unexplained_syncope,prior_arrest_or_sustained_vt,metabolic_or_syndromic,atrial_fibrillation
ST-01,2014-03-01,affected,,no,no,no,,no,no,no,no,no,no
ST-03,2022-01-10,unaffected,,no,no,no,,,,,,,
ST-04,2025-06-01,unaffected,,no,no,no,,,,,,,
""",
    "studies.csv": """person,study_date,modality,site,height_cm,weight_kg,measure,value,unit
ST-01,2014-03-01,echo,Invented Clinic,178,80,mwt_echo,18.0,mm
ST-01,2025-03-01,echo,Invented Clinic,178,81,mwt_echo,19.0,mm
ST-03,2022-01-10,echo,Invented Clinic,160,50,mwt_echo,8.5,mm
ST-04,2021-06-01,echo,Invented Clinic,165,58,mwt_echo,9.0,mm
ST-04,2025-06-01,echo,Invented Clinic,165,59,mwt_echo,9.5,mm
""",
}


def _write(folder: Path, files: dict[str, str]) -> Path:
    folder.mkdir(parents=True, exist_ok=True)
    for name, body in files.items():
        (folder / name).write_text(body)
    return folder


@pytest.fixture
def store(db_url, run, tmp_path):
    """The demo families and STF1, imported (each import stores the proposals)."""
    assert run("init", db=db_url).code == 0
    r = run("import", "all", DEMO, db=db_url)
    assert r.code == 0, r
    r = run("import", "all", _write(tmp_path / "stf1", STF1), db=db_url)
    assert r.code == 0, r
    return db_url


def _engine(url):
    return make_engine(locate(url))


def _rules(settings=SETTINGS):
    return recall_rules(settings, None)


def _fresh_rows(engine, on, conf, rule_set, policy) -> dict[str, tuple]:
    with reading(engine) as conn:
        computed, _ = SP.compute(load(conn), SP.all_families(conn), on, conf, rule_set, policy)
    return {c.person: (c.state, c.reasons(), c.valid_until) for c in computed}


def _stored_rows(engine) -> dict[str, tuple]:
    sql = ("SELECT p.code, r.state, r.reasons, r.valid_until, r.stale FROM recall_proposal r "
           "JOIN person p ON p.id = r.person_id")
    with reading(engine) as conn:
        rows = conn.execute(text(sql)).all()
    assert not any(r.stale for r in rows)
    return {r[0]: (r[1], r[2], r[3] if isinstance(r[3], dt.date) else dt.date.fromisoformat(r[3])) for r in rows}


def _old_worklist(engine, start, end, on, conf, rule_set, policy, slots=4) -> dict:
    from tracker.services.worklist import worklist_lists

    with reading(engine) as conn:
        frames = load(conn)
    out = worklist_lists(frames, conf, rule_set, policy, start, end, on, slots)
    out["variant_rereview"] = _variant_rereview(frames, on, conf.cascade.variant_rereview_months)
    return out


def _same(a: dict, b: dict) -> bool:
    return json.dumps(a, sort_keys=True, default=str) == json.dumps(b, sort_keys=True, default=str)


# --------------------------------------------------------------------------- every write path


def test_stored_after_import_equals_recomputation(store):
    """Every person (demo and STF1) has one row, equal to a fresh recomputation for its day."""
    engine = _engine(store)
    conf, rule_set, policy = recall_rules(None, None)  # the imports used the default settings
    today = dt.date.today()
    stored, fresh = _stored_rows(engine), _fresh_rows(engine, today, conf, rule_set, policy)
    assert {"ST-01", "ST-03", "HV01-III-1"} <= set(stored)
    assert stored == fresh
    with reading(engine) as conn:
        assert SP.differing(conn, conf, rule_set, policy) == []


def test_stored_after_edit_removal_reinstatement_reclassification(store, run):
    engine = _engine(store)
    conf, rule_set, policy = recall_rules(None, None)
    today = dt.date.today()

    def same():
        assert _stored_rows(engine) == _fresh_rows(engine, today, conf, rule_set, policy)

    before = _stored_rows(engine)["ST-05"]
    r = run("edit", "person", "ST-05", "--set", "contact_status=declined", "--reason", "phoned", db=store)
    assert r.code == 0, r
    same()
    assert _stored_rows(engine)["ST-05"] != before and _stored_rows(engine)["ST-05"][0] == "not_recalled"

    r = run("remove", "person", "ST-05", "--reason", "entered twice", db=store)
    assert r.code == 0, r
    same()
    assert "ST-05" not in _stored_rows(engine)
    r = run("reinstate", "person", "ST-05", "--reason", "removed by mistake", db=store)
    assert r.code == 0, r
    same()
    assert "ST-05" in _stored_rows(engine)

    r = run("remove", "study", "ST-04", "2025-06-01", "echo", "--reason", "another patient's", db=store)
    assert r.code == 0, r
    same()

    r = run("reclassify", "STF1", "--to", "uncertain_significance", "--date", today.isoformat(),
            "--reason", "laboratory re-review", db=store)  # fmt: skip
    assert r.code == 0, r
    same()
    r = run("tasks", "--family", "STF1", "--json", db=store)
    task = json.loads(r.out)["tasks"][0]["id"]
    r = run("tasks", "done", task, "--note", "letter sent", db=store)
    assert r.code == 0, r
    same()


# --------------------------------------------------------------------------- the worklist read


def test_worklist_from_stored_rows_equals_recomputation(store):
    """Read on the day stored, on later days (rows past valid_until recomputed), and for a
    past day (computed for the read only): the same as computing every family."""
    engine = _engine(store)
    conf, rule_set, policy = _rules()
    with writing(engine) as conn:
        SP.refresh_all(conn, T0, conf, rule_set, policy)
    for on in (T0, T0 + dt.timedelta(days=1), T0 + dt.timedelta(days=16), T0 + dt.timedelta(days=300),
               dt.date(2026, 6, 1)):  # fmt: skip
        for end in (on + dt.timedelta(days=90), on + dt.timedelta(days=2500)):
            got = SW.nurse_worklist(engine, on, end, on, conf, rule_set, policy, 4, today=T0)
            how = got.pop("read")
            assert _same(got, _old_worklist(engine, on, end, on, conf, rule_set, policy)), (on, end)
            if on == T0:
                assert how["recomputed_families"] == 0 and how["read"] > 0


def test_valid_until_boundary_birthday_inside_window(store):
    """ST-03, overdue child (last seen 2022-01-10) of a P/LP family, turns 18 on 2026-12-20:
    the row stored on T0 holds until 2026-12-19; read on 2026-12-21 it is recomputed under the
    adult rule. Were valid_until ignored, the stored child rule would be listed."""
    engine = _engine(store)
    conf, rule_set, policy = _rules()
    with writing(engine) as conn:
        SP.refresh_all(conn, T0, conf, rule_set, policy)
    row = _stored_rows(engine)["ST-03"]
    assert row[2] == dt.date(2026, 12, 19)
    stored = SP.proposal_from_json(json.loads(row[1])["proposal"])
    t1 = dt.date(2026, 12, 21)
    with reading(engine) as conn:
        st = fs.build_family_state("STF1", *(getattr(load(conn), f) for f in
                                             ("people", "variants", "results", "assessments", "studies")), as_of=t1)
    fresh = propose_recall(st.states["ST-03"], rule_set, policy, t1)
    assert fresh.status == "overdue" and stored.status == "overdue"
    assert redate(stored, t1).rule_id != fresh.rule_id  # the stored row is wrong on t1
    got = SW.nurse_worklist(engine, t1, t1 + dt.timedelta(days=90), t1, conf, rule_set, policy, 4, today=t1)
    got.pop("read")
    assert _same(got, _old_worklist(engine, t1, t1 + dt.timedelta(days=90), t1, conf, rule_set, policy))
    entry = next(r for r in got["due"] if r["person"] == "ST-03")
    assert entry["rule_id"] == fresh.rule_id != stored.rule_id
    assert _stored_rows(engine)["ST-03"][2] >= t1  # recomputed on t1 and stored


def test_valid_until_holds_on_every_day_it_covers(store):
    """Between the day a proposal is computed and its valid_until, redating it gives exactly what
    propose_recall gives on that day (every person of the demo and STF1; days sampled)."""
    engine = _engine(store)
    conf, rule_set, policy = _rules()
    with reading(engine) as conn:
        frames = load(conn)
    states = fs.build_family_states(frames.people, frames.variants, frames.results, frames.assessments,
                                    frames.studies, as_of=T0)  # fmt: skip
    checked = 0
    for st in states.values():
        for s in st.states.values():
            p = propose_recall(s, rule_set, policy, T0)
            end = valid_until(s, rule_set, p)
            days = {end, min(end, T0 + dt.timedelta(days=1)), T0 + (end - T0) // 2} if end < dt.date(9000, 1, 1) \
                else {T0 + dt.timedelta(days=400)}
            for d in days:
                assert redate(p, d) == propose_recall(s, rule_set, policy, d), (s.person_code, d, end)
                checked += 1
    assert checked > 50


def test_upgrade_from_0009_gives_the_same_worklist(store):
    from tracker.store import migrate

    engine = _engine(store)
    conf, rule_set, policy = _rules()
    with writing(engine) as conn:
        conn.execute(text("DELETE FROM recall_proposal"))  # as after an upgrade from 0009: an empty table
    migrate.downgrade(engine, "0009")
    migrate.upgrade(engine)
    with reading(engine) as conn:
        assert conn.execute(text("SELECT count(*) FROM recall_proposal")).scalar() == 0
    end = T0 + dt.timedelta(days=90)
    got = SW.nurse_worklist(engine, T0, end, T0, conf, rule_set, policy, 4, today=T0)
    assert got.pop("read")["stored_families"] > 0
    assert _same(got, _old_worklist(engine, T0, end, T0, conf, rule_set, policy))
    got = SW.nurse_worklist(engine, T0, end, T0, conf, rule_set, policy, 4, today=T0)
    assert got.pop("read")["recomputed_families"] == 0
    assert _same(got, _old_worklist(engine, T0, end, T0, conf, rule_set, policy))


def test_stale_rows_are_never_read(store):
    engine = _engine(store)
    conf, rule_set, policy = _rules()
    with writing(engine) as conn:
        SP.refresh_all(conn, T0, conf, rule_set, policy)
        conn.execute(text("UPDATE recall_proposal SET reasons = replace(reasons, '\"status\":\"overdue\"', "
                          "'\"status\":\"due\"')"))  # wrong on purpose
        SP.mark_stale(conn, ["STF1", "HV01", "HV02", "HV03", "HV04", "HV05"])
    end = T0 + dt.timedelta(days=90)
    got = SW.nurse_worklist(engine, T0, end, T0, conf, rule_set, policy, 4, today=T0)
    got.pop("read")
    assert _same(got, _old_worklist(engine, T0, end, T0, conf, rule_set, policy))


# --------------------------------------------------------------------------- check and refresh


def test_check_reports_a_tampered_proposal(store, run):
    r = run("check", db=store)
    assert r.code == 0, r
    engine = _engine(store)
    with writing(engine) as conn:
        conn.execute(text("UPDATE recall_proposal SET due_on = :d WHERE person_id = "
                          "(SELECT id FROM person WHERE code = 'ST-04')"), {"d": dt.date(2031, 1, 1)})  # fmt: skip
    r = run("check", "--json", db=store)
    assert r.code == 1
    found = [f for f in json.loads(r.out)["findings"] if f["check"] == "recall proposal"]
    assert [f["where"] for f in found] == ["person ST-04"]
    assert "due_on 2031-01-01 stored" in found[0]["message"]


def test_refresh_after_a_settings_change(store, run, tmp_path):
    """Rows stored under the default settings are stale for the clinic's settings; `recall
    --refresh --settings` stores them all under the new ones, and the worklist then reads them."""
    engine = _engine(store)
    conf, rule_set, policy = _rules()
    key = SP.rules_key(conf, rule_set, policy)
    with reading(engine) as conn:
        assert SP.invalid_families(conn, dt.date.today(), key) == set(SP.all_families(conn))
    r = run("recall", "--refresh", "--settings", SETTINGS, "--json", db=store)
    assert r.code == 0, r
    assert json.loads(r.out)["inputs"] == key
    with reading(engine) as conn:
        assert SP.invalid_families(conn, dt.date.today(), key) == set()
        other = SP.rules_key(*recall_rules(None, None))
        assert other != key and SP.invalid_families(conn, dt.date.today(), other) == set(SP.all_families(conn))
    today = dt.date.today()
    got = SW.nurse_worklist(engine, today, today + dt.timedelta(days=90), today, conf, rule_set, policy, 4)
    assert got.pop("read")["recomputed_families"] == 0
    assert _same(got, _old_worklist(engine, today, today + dt.timedelta(days=90), today, conf, rule_set, policy))
    r = run("recall", "HV01-III-1", "--refresh", db=store)
    assert r.code == 1 and "no PERSON" in r.err


def test_bulk_import_marks_stale_and_the_first_read_computes(db_url, run, tmp_path, monkeypatch):
    """An import of more families than WRITE_COMPUTE_MAX_FAMILIES marks their rows stale (here
    the limit is lowered to 1); the first worklist read on the day computes and stores them."""
    monkeypatch.setattr(SP, "WRITE_COMPUTE_MAX_FAMILIES", 1)
    assert run("init", db=db_url).code == 0
    assert run("import", "all", DEMO, db=db_url).code == 0
    engine = _engine(db_url)
    with reading(engine) as conn:
        assert conn.execute(text("SELECT count(*) FROM recall_proposal")).scalar() == 0
    monkeypatch.setattr(SP, "WRITE_COMPUTE_MAX_FAMILIES", 500)
    r = run("import", "all", _write(tmp_path / "stf1", STF1), db=db_url)  # one family: computed
    assert r.code == 0, r
    with reading(engine) as conn:
        assert conn.execute(text("SELECT count(*) FROM recall_proposal")).scalar() == 5
    conf, rule_set, policy = _rules()
    end = T0 + dt.timedelta(days=90)
    got = SW.nurse_worklist(engine, T0, end, T0, conf, rule_set, policy, 4, today=T0)
    assert got.pop("read")["stored_families"] == 6
    assert _same(got, _old_worklist(engine, T0, end, T0, conf, rule_set, policy))
    with reading(engine) as conn:
        assert SP.invalid_families(conn, T0, SP.rules_key(conf, rule_set, policy)) == set()
