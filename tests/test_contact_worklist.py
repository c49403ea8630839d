"""The worklist and recall read the contact log: wishes, "contact me later", informed with no reply.

Invented proposals and people (no clinical figures here; the 6-week wait is the clinic default, common
practice with no single source: tracker.engines.worklist.DEFAULT_REPLY_WAIT_WEEKS).
"""

from __future__ import annotations

import dataclasses
import datetime as dt

from test_worklist import TODAY, make
from tracker.domain.dates import PartialDate
from tracker.engines.schedule import PersonState, Policy, propose_recall
from tracker.engines.worklist import contact_category, contact_gaps, plan_bookings, reachable
from tracker.rules import load_rule_set


def _with(p, **kw):
    return dataclasses.replace(p, **kw)


def test_no_further_contact_is_never_booked_and_listed_as_must_not_approach():
    p = _with(make("A", TODAY), contact_status="declined", contact_wish="no_further_contact")
    q = make("B", TODAY)
    assert not reachable(p) and reachable(q)
    plan = plan_bookings([p, q], TODAY, TODAY + dt.timedelta(days=13), 5, TODAY)
    assert [b.person_code for b in plan.bookings] == ["B"]
    assert [g.person_code for g in plan.contact_gaps] == ["A"]
    assert contact_category(p) == "must_not_approach"


def test_contact_later_waits_for_the_day_asked():
    later = TODAY + dt.timedelta(days=30)
    p = _with(make("A", TODAY), contact_later_on=later)
    assert not reachable(p) and contact_category(p) == "contact_later"
    plan = plan_bookings([p], TODAY, TODAY + dt.timedelta(days=13), 5, TODAY)
    assert plan.bookings == () and [g.person_code for g in plan.contact_gaps] == ["A"]
    # On the day asked for, the person is bookable again.
    q = _with(make("A", later, today=later), contact_later_on=later)
    assert reachable(q) and contact_category(q) is None


def test_informed_with_no_reply_after_the_wait():
    informed = TODAY - dt.timedelta(weeks=6)
    p = _with(make("A", TODAY), informed_on=informed)
    assert contact_category(p) == "no_response"
    assert contact_category(p, wait_weeks=7) is None
    assert contact_category(_with(p, responded=True)) is None
    assert contact_category(_with(p, informed_on=TODAY - dt.timedelta(weeks=5))) is None


def test_not_informed():
    p = _with(make("A", TODAY), contact_status="not_contacted")
    assert contact_category(p) == "not_informed" and not reachable(p)
    assert contact_gaps([p])[0].person_code == "A"


def test_recall_notes_the_wish_and_the_day_asked():
    rs = load_rule_set("esc_2023")
    on = dt.date(2026, 12, 1)
    person = PersonState("P", PartialDate(dt.date(1990, 5, 1)), contact_status="declined",
                         contact_wish="no_further_contact", genotype="carrier")
    p = propose_recall(person, rs, Policy(), on)
    assert p.status == "not_recalled" and "must not be approached" in " ".join(p.notes)
    later = dataclasses.replace(person, contact_status="contactable", contact_wish=None,
                                contact_later_on=dt.date(2027, 3, 1))
    p = propose_recall(later, rs, Policy(), on)
    assert "contact_later" in p.flags and p.contact_later_on == dt.date(2027, 3, 1)
    via = dataclasses.replace(person, contact_status="contactable", contact_wish="only_via_family_member",
                              contact_via="Q")
    assert "contact only through Q" in " ".join(propose_recall(via, rs, Policy(), on).notes)


def test_worklist_command_uses_the_log(loaded_db, run):
    """End to end on the invented mini families: a wish and a contact-later reach the worklist."""
    import json

    assert run("wish", "set", "T1-06", "--wish", "no_further_contact", "--date", "2026-11-01", db=loaded_db).code == 0
    r = run("worklist", "--from", "2026-12-01", "--to", "2027-02-28", "--as-of", "2026-12-01", "--json", db=loaded_db)
    assert r.code == 0, r
    d = json.loads(r.out)
    assert "T1-06" in d["must_not_approach"]
    assert all(e["person"] != "T1-06" for e in d["due"] + d["affected"])
    gap = next(e for e in d["contact_gaps"] if e["person"] == "T1-06")
    assert gap["contact"] == "must_not_approach"
    text = run("worklist", "--from", "2026-12-01", "--to", "2027-02-28", "--as-of", "2026-12-01", db=loaded_db).out
    assert "Must not be approached (asked for no further contact): T1-06" in text


def test_cascade_gaps_use_the_log(loaded_db, run):
    """T1-07 (invented, never contacted): a gap 'never_contacted'; after a no-further-contact wish, 'must not
    be approached' and never recalled; the wish ended and a contact-later, the day asked for."""
    import json

    def gap():
        d = json.loads(run("cascade", "FAM-T1", "--as-of", "2026-12-01", "--json", db=loaded_db).out)
        return next((g for g in d["gaps"] if g["person"] == "T1-07"), None), d

    g, _ = gap()
    assert g is not None and g["gap"] == "never_contacted"
    assert run("wish", "set", "T1-07", "--wish", "no_further_contact", "--date", "2026-11-01", db=loaded_db).code == 0
    g, d = gap()
    assert g["gap"] == "must_not_approach" and g["recalled"] is False
    listed = [i for k in ("predictive_testing", "deferred", "clinical_screening") for i in d[k] if i["person"] == "T1-07"]
    assert all(i.get("must_not_approach") for i in listed)
    assert run("wish", "end", "T1-07", "--date", "2026-11-15", db=loaded_db).code == 0
    assert run("contact", "add", "T1-07", "--date", "2026-11-20", "--channel", "phone", "--by", "counsellor",
               "--outcome", "contact_later", "--later", "2027-04-01", db=loaded_db).code == 0  # fmt: skip
    g, _ = gap()
    assert g["gap"] == "contact_later" and g["due"] == "2027-04-01"
