"""Letters and the contact log: the kind follows the log, a letter is recorded only with --sent, wishes
are respected.  On the invented demo families."""

from __future__ import annotations

import json

import pytest
from sqlalchemy import func, select

from tracker.cli.app import main
from tracker.store.database import locate, make_engine, reading
from tracker.store.models import LetterSent
from test_letter_cli import DATE, SETTINGS


@pytest.fixture
def demo_db(tmp_path):
    path = str(tmp_path / "demo.sqlite")
    assert main(["demo", "--db", path]) == 0
    return path


def _letter(run, db, person, out, *extra):
    return run("report", "letter", person, "--out", out, "--settings", SETTINGS, "--date", DATE, "--json", *extra,
               db=db)  # fmt: skip


def _letters(db) -> int:
    engine = make_engine(locate(db))
    with reading(engine) as conn:
        n = conn.execute(select(func.count()).select_from(LetterSent)).scalar()
    engine.dispose()
    return n


def test_kind_follows_the_log_and_only_sent_letters_are_recorded(run, demo_db, tmp_path):
    r = _letter(run, demo_db, "HV01-IV-5", tmp_path)
    assert r.code == 0, r
    d = json.loads(r.out)
    assert d["letter_kind"] == "first_contact" and d["recorded_as_sent"] is None
    assert _letters(demo_db) == 0  # generated, not recorded
    r = _letter(run, demo_db, "HV01-IV-5", tmp_path, "--sent", "--user", "nurse.a")
    rec = json.loads(r.out)["recorded_as_sent"]
    assert rec["kind"] == "first_contact" and rec["sent_date"] == DATE and rec["template_version"].startswith("sha256:")
    assert _letters(demo_db) == 1
    # Informed by phone: the next letter is a reminder of the offer, not a second first contact.
    assert run("contact", "add", "HV01-IV-5", "--date", "2026-10-01", "--channel", "phone", "--by", "nurse",
               "--outcome", "informed", db=demo_db).code == 0  # fmt: skip
    d = json.loads(_letter(run, demo_db, "HV01-IV-5", tmp_path).out)
    assert d["letter_kind"] == "reminder" and any("not yet seen" in n for n in d["notes"])
    r = _letter(run, demo_db, "HV01-IV-5", tmp_path, "--kind", "first_contact")
    assert r.code == 1 and "informed on 2026-10-01" in r.err
    # A visit booked: the appointment letter, with the day.
    assert run("book", "HV01-IV-5", "--date", "2027-01-12", "--purpose", "a heart tracing and a scan",
               db=demo_db).code == 0  # fmt: skip
    d = json.loads(_letter(run, demo_db, "HV01-IV-5", tmp_path).out)
    assert d["letter_kind"] == "appointment"


def test_wishes_refuse_or_redirect_letters(run, demo_db, tmp_path):
    assert run("wish", "set", "HV01-IV-5", "--wish", "only_via_family_member", "--via", "HV01-III-4", "--date",
               "2026-09-01", db=demo_db).code == 0  # fmt: skip
    r = _letter(run, demo_db, "HV01-IV-5", tmp_path)
    assert r.code == 1 and "only through HV01-III-4" in r.err and "--via HV01-III-4" in r.err
    r = _letter(run, demo_db, "HV01-IV-5", tmp_path, "--via", "HV01-III-4", "--sent")
    assert r.code == 0, r
    rec = json.loads(r.out)["recorded_as_sent"]
    assert rec["sent_to"] == "via_family" and rec["via"] == "HV01-III-4"
    assert run("wish", "end", "HV01-IV-5", "--date", "2026-10-01", db=demo_db).code == 0
    assert run("wish", "set", "HV01-IV-5", "--wish", "no_further_contact", "--date", "2026-10-02",
               db=demo_db).code == 0  # fmt: skip
    r = _letter(run, demo_db, "HV01-IV-5", tmp_path)
    assert r.code == 1 and "must not be approached" in r.err
    assert _letters(demo_db) == 1
