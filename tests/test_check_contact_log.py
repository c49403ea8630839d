"""`tracker check` on the contact log's tables (revision 0012).

Invented people of tests/data/mini. Rows the forms would refuse are written straight into the store
(as an older tool or a change made outside the tool could have left them).
"""

from __future__ import annotations

import datetime as dt
import json

from sqlalchemy import insert, select

from tracker.store.database import locate, make_engine, writing
from tracker.store.models import Booking, ContactEvent, Person

NOW = dt.datetime(2026, 11, 1, 9, 0)


def _ids(conn) -> dict[str, int]:
    return dict(conn.execute(select(Person.code, Person.id)).all())


def _contact_findings(doc) -> list[dict]:
    return [f for f in doc["findings"] if f["check"] == "contact log"]


def test_check_reports_the_contact_log(loaded_db, run):
    assert run("check", db=loaded_db).code == 0
    for args in (
        ("contact", "add", "T1-08", "--date", "2026-10-01", "--channel", "phone", "--by", "nurse", "--outcome",
         "informed"),
        ("wish", "set", "T1-05", "--wish", "only_via_family_member", "--via", "T1-08", "--date", "2026-10-02"),
        ("remove", "person", "T1-08", "--reason", "entered in error"),
    ):
        r = run(*args, db=loaded_db)
        assert r.code == 0, (args, r)
    engine = make_engine(locate(loaded_db))
    with writing(engine) as conn:
        ids = _ids(conn)
        base = dict(entered_at=NOW, entered_by="someone", source="entered")
        conn.execute(insert(ContactEvent), [
            dict(person_id=ids["T1-07"], event_date=dt.date(2026, 10, 1), channel="via_family",
                 via_person_id=ids["T2-01"], by_role=None, outcome="informed", **base),
            dict(person_id=ids["T1-06"], event_date=dt.date(2000, 1, 1), channel="phone", by_role="nurse",
                 via_person_id=None, outcome="informed", **base),
        ])  # fmt: skip
        conn.execute(insert(Booking), [
            dict(person_id=ids["T1-07"], visit_date=dt.date(2026, 1, 10), purpose="first screening",
                 entered_at=dt.datetime(2025, 12, 1), entered_by="someone"),
            dict(person_id=ids["T1-06"], visit_date=dt.date(2020, 5, 1), purpose="first echo",
                 entered_at=dt.datetime(2020, 3, 1), entered_by="someone"),  # attended: an echo that day
        ])  # fmt: skip
    engine.dispose()
    r = run("check", "--json", db=loaded_db)
    assert r.code == 1, r
    doc = json.loads(r.out)
    found = {(f["where"], f["message"]) for f in _contact_findings(doc)}
    text = "\n".join(f"{w}: {m}" for w, m in sorted(found))
    assert "person T1-08: 1 contact event row(s) of a removed person" in text, text  # the entered one only
    assert "only through T1-08, who was removed" in text and "person T1-05:" in text, text
    assert "person T1-07: contact event of 2026-10-01 names T2-01" in text and "another family" in text, text
    assert "person T1-06: contact event dated 2000-01-01, before the date of birth (2008-02-29)" in text, text
    reminders = [f for f in doc["reminders"] if f["check"] == "booking"]
    assert [f["where"] for f in reminders] == ["person T1-07"], reminders
    assert "2026-01-10" in reminders[0]["message"] and reminders[0]["source"] is None
    # Not an error on its own: the text output lists it as a reminder.
    plain = run("check", db=loaded_db)
    assert "reminder: person T1-07: visit booked for 2026-01-10" in plain.out
