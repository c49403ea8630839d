"""`--as-of`: the contact log, wishes, bookings, replies and results from other centres as they stood
on the day asked (only what was recorded on or before it).

Invented people of tests/data/mini (FAM-T1): T1-07 (never contacted in the people file) is informed on
2026-10-01; T1-03 asks for no further contact on 2026-10-15; T1-07 has a carrier result from another
(invented) centre on 2026-10-20.
"""

from __future__ import annotations

import datetime as dt
import json

from tracker.domain.contacts import derive_state


def _log(db, run):
    for args in (
        ("contact", "add", "T1-07", "--date", "2026-10-01", "--channel", "phone", "--by", "nurse", "--outcome",
         "informed"),
        ("wish", "set", "T1-03", "--wish", "no_further_contact", "--date", "2026-10-15"),
        ("external", "add", "T1-07", "--kind", "genetic_test", "--date", "2026-10-20", "--centre",
         "Invented Fell Hospital", "--result", "carrier"),
    ):
        r = run(*args, db=db)
        assert r.code == 0, (args, r)


def _json(run, db, *args):
    r = run(*args, "--json", db=db)
    assert r.code == 0, r
    return json.loads(r.out)


def test_cascade_recall_and_worklist_read_the_log_as_it_stood(loaded_db, run):
    _log(loaded_db, run)
    gaps = {d: {g["person"]: g["gap"] for g in _json(run, loaded_db, "cascade", "FAM-T1", "--as-of", d)["gaps"]}
            for d in ("2026-09-01", "2026-11-01")}  # fmt: skip
    assert gaps["2026-09-01"]["T1-07"] == "never_contacted"  # the informing call came later
    assert gaps["2026-11-01"].get("T1-07") != "never_contacted"
    before = _json(run, loaded_db, "recall", "T1-03", "--as-of", "2026-10-01")
    after = _json(run, loaded_db, "recall", "T1-03", "--as-of", "2026-11-01")
    assert before["state"]["contact_status"] == "contactable"
    assert not any("must not be approached" in n for n in before["notes"])
    assert after["state"]["contact_status"] == "declined"
    assert any("must not be approached" in n for n in after["notes"])
    # The result from the other centre counts from its day on.
    r7 = {d: _json(run, loaded_db, "recall", "T1-07", "--as-of", d) for d in ("2026-10-10", "2026-11-01")}
    assert r7["2026-10-10"]["state"]["genotype"] != "carrier"
    assert r7["2026-11-01"]["state"]["genotype"] == "carrier"
    # The worklist's contact column, on both days.
    def contact_of(day):
        doc = _json(run, loaded_db, "worklist", "--from", day, "--to", day, "--as-of", day)
        rows = [r for key in ("due", "contact_gaps") for r in (doc.get(key) or []) if r.get("person") == "T1-03"]
        return {r.get("contact") for r in rows}

    assert "must_not_approach" not in contact_of("2026-10-01")
    assert "must_not_approach" in contact_of("2026-11-01")


def test_derive_state_as_of_reopens_a_wish_ended_later_and_drops_later_events():
    events = [
        {"id": 1, "event_date": None, "outcome": "not_contacted"},
        {"id": 2, "event_date": dt.date(2026, 3, 1), "outcome": "informed", "channel": "phone"},
        {"id": 3, "event_date": dt.date(2026, 5, 1), "outcome": "moved_away", "channel": "letter"},
    ]
    wishes = [{"wish": "no_further_contact", "recorded_date": dt.date(2026, 2, 1), "ended_date": dt.date(2026, 4, 1)}]
    assert derive_state("X", events, wishes).status == "lost_to_follow_up"
    jan = derive_state("X", events, wishes, as_of=dt.date(2026, 1, 15))
    assert jan.status == "not_contacted" and jan.wish is None and not jan.informed  # the undated status counts
    mar = derive_state("X", events, wishes, as_of=dt.date(2026, 3, 15))
    assert mar.wish == "no_further_contact" and mar.status == "declined" and mar.informed  # ended only in April
    apr = derive_state("X", events, wishes, as_of=dt.date(2026, 4, 2))
    assert apr.wish is None and apr.status == "contactable"
