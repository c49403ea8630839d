"""The nurse's day list read a page at a time from the stored proposals (tracker.services.day_list).

The reference is the whole worklist computed from the records (``worklist.worklist_lists``, every
family's proposal for the day) cut by the same filters and order (``day_list.from_lists``): the
page read from the store must give the same rows, in the same order, and the same counts, for
every filter, page size and backend. The demo families are invented; the contact-log entries
added here (a letter with no reply, a wish for no further contact, a decline, a later day) are too.
"""

from __future__ import annotations

import datetime as dt

import pytest
from sqlalchemy import text

from tracker.services import contacts as SC
from tracker.services import day_list as DL
from tracker.services import proposals as SP
from tracker.services import recall as SV
from tracker.services import worklist as SW
from tracker.store.database import locate, make_engine, reading, writing

ON = dt.date(2026, 12, 7)  # a Monday
END = ON + dt.timedelta(weeks=6)


@pytest.fixture
def demo_engine(db_url):
    from tracker.cli.app import main

    assert main(["demo", "--db", db_url]) == 0
    engine = make_engine(locate(db_url))
    yield engine
    engine.dispose()


def _rules():
    return SV.recall_rules(None, None)


def _reference(engine, family="", reason="", limit=None, end=END, section_limit=None):
    """The whole worklist computed afresh from the records, cut as the day list cuts it."""
    from tracker.store.repository import Scope

    conf, rule_set, policy = _rules()
    with reading(engine) as conn:
        frames = SV.load(conn, Scope(), ON)
    lists = SW.worklist_lists(frames, conf, rule_set, policy, ON, end, ON, None)
    return DL.from_lists(lists, ON, family, reason, limit, conf.cascade.reply_wait_weeks, section_limit)


def _page(engine, family="", reason="", limit=50, end=END, section_limit=None):
    conf, rule_set, policy = _rules()
    return DL.day_list(engine, ON, end, ON, conf, rule_set, policy, family, reason, limit, today=ON,
                       section_limit=section_limit)  # fmt: skip


def _same(a: DL.DayList, b: DL.DayList) -> None:
    assert [r["person"] for r in a.rows] == [r["person"] for r in b.rows]
    assert a.rows == b.rows
    assert (a.total, a.no_response_total, a.must_not_total) == (b.total, b.no_response_total, b.must_not_total)
    assert a.no_response == b.no_response and a.must_not == b.must_not


def _contact_log(engine) -> dict[str, str]:
    """Invented contact-log entries on people of the demo's worklist, one per way a row can stand."""
    ref = _reference(engine)
    # never screened first: nothing (no visit, no test) has come back from them since
    reachable = [r["person"] for r in sorted(ref.rows, key=lambda r: not r["never_screened"])
                 if r["list"] != "contact_gap"]  # fmt: skip
    assert len(reachable) >= 5
    who = {"no_reply": reachable[0], "no_reply_2": reachable[1], "stop": reachable[2], "declined": reachable[3],
           "later": reachable[4]}  # fmt: skip
    with writing(engine) as conn:
        for key, weeks in (("no_reply", 12), ("no_reply_2", 9)):
            SC.record_contact(conn, who[key], on=ON - dt.timedelta(weeks=weeks), channel="letter", by="nurse",
                              outcome="informed", user="test", today=ON)  # fmt: skip
        SC.record_wish(conn, who["stop"], wish="no_further_contact", on=ON, user="test", today=ON)
        SC.record_contact(conn, who["declined"], on=ON, channel="phone", by="nurse", outcome="declined", user="test",
                          today=ON)  # fmt: skip
        SC.record_contact(conn, who["later"], on=ON, channel="phone", by="nurse", outcome="contact_later",
                          later=ON + dt.timedelta(days=40), user="test", today=ON)  # fmt: skip
        # The writes stored their families' proposals for the clock's day; these events are dated ON.
        SP.mark_stale(conn)
    return who


FILTERS = [("", ""), ("", "overdue"), ("", "due"), ("", "never_screened"), ("", "contact_gap"), ("", "task"),
           ("HV01", ""), ("HV03", "contact_gap"), ("NOSUCH", "")]  # fmt: skip


def test_a_page_read_from_the_store_is_the_whole_worklist_cut_the_same_way(demo_engine):
    who = _contact_log(demo_engine)
    for family, reason in FILTERS:
        for limit, section in ((None, None), (1, None), (3, None), (50, None), (5, 1), (2, 0)):
            _same(_page(demo_engine, family, reason, limit, section_limit=section),
                  _reference(demo_engine, family, reason, limit, section_limit=section))
    whole = _page(demo_engine, limit=None)
    assert whole.total == len(whole.rows) > 3
    assert who["stop"] not in {r["person"] for r in whole.rows}  # never proposed
    assert [r["person"] for r in whole.must_not] == [who["stop"]] and whole.must_not_total == 1
    assert who["no_reply"] in {r["person"] for r in whole.no_response}
    waits = [r["informed_on"] for r in whole.no_response]
    assert waits == sorted(waits)  # the longest wait first
    gaps = {r["person"]: r for r in whole.rows if r["list"] == "contact_gap"}
    assert who["declined"] in gaps and who["later"] in gaps and gaps[who["later"]]["contact"] == "contact_later"


def test_the_order_is_most_overdue_first_and_the_counts_hold_past_the_page(demo_engine):
    _contact_log(demo_engine)
    whole = _page(demo_engine, limit=None)
    keys = [DL.order_key(r, ON) for r in whole.rows]
    assert keys == sorted(keys)
    dues = [r["due"] or ON.isoformat() for r in whole.rows]
    assert dues == sorted(dues)  # the longest overdue first
    page = _page(demo_engine, limit=2)
    assert [r["person"] for r in page.rows] == [r["person"] for r in whole.rows[:2]]
    assert page.total == whole.total and page.no_response_total == whole.no_response_total


def test_a_window_ending_later_lists_more_and_never_fewer(demo_engine):
    short, long = _page(demo_engine, limit=None), _page(demo_engine, limit=None, end=ON + dt.timedelta(days=700))
    assert {r["person"] for r in short.rows} <= {r["person"] for r in long.rows}
    _same(long, _reference(demo_engine, limit=None, end=ON + dt.timedelta(days=700)))


def test_rows_that_do_not_hold_are_stored_before_the_page_is_read(demo_engine):
    """A contact written behind the stored rows' back (marked stale) is on the next page read."""
    conf, rule_set, policy = _rules()
    _page(demo_engine)  # every row stored for ON
    with reading(demo_engine) as conn:
        assert SP.all_hold(conn, ON, SP.rules_key(conf, rule_set, policy))
    person = _page(demo_engine).rows[0]["person"]
    with writing(demo_engine) as conn:
        SC.record_wish(conn, person, wish="no_further_contact", on=ON, user="test", today=ON)
        SP.mark_stale(conn)
    with reading(demo_engine) as conn:
        assert not SP.all_hold(conn, ON, SP.rules_key(conf, rule_set, policy))
    page = _page(demo_engine)
    assert person in {r["person"] for r in page.must_not} and person not in {r["person"] for r in page.rows}
    with reading(demo_engine) as conn:
        assert SP.all_hold(conn, ON, SP.rules_key(conf, rule_set, policy))


def test_another_day_is_computed_for_the_read_and_gives_the_same_rows(demo_engine):
    """A day other than today (rows cannot be stored for it): the whole worklist computed for the read."""
    _contact_log(demo_engine)
    conf, rule_set, policy = _rules()
    page = DL.day_list(demo_engine, ON, END, ON, conf, rule_set, policy, limit=5, today=ON + dt.timedelta(days=1))
    assert page.read.get("whole_worklist") is True
    _same(page, _reference(demo_engine, limit=5))


@pytest.mark.parametrize("how", ["stale", "past_valid_until", "other_inputs", "later_day", "missing", "removed"])
def test_all_hold_sees_every_kind_of_row_that_does_not_hold(demo_engine, how):
    """``all_hold`` (index lookups) agrees with ``invalid_families`` (the full query) for each kind."""
    conf, rule_set, policy = _rules()
    key = SP.rules_key(conf, rule_set, policy)
    _page(demo_engine)
    with writing(demo_engine) as conn:
        pid = conn.execute(text("SELECT person_id FROM recall_proposal ORDER BY id LIMIT 1")).scalar()
        if how == "stale":
            conn.execute(text("UPDATE recall_proposal SET stale = true WHERE person_id = :p"), {"p": pid})
        elif how == "past_valid_until":
            conn.execute(text("UPDATE recall_proposal SET valid_until = :d WHERE person_id = :p"),
                         {"d": ON - dt.timedelta(days=1), "p": pid})  # fmt: skip
        elif how == "other_inputs":
            conn.execute(text("UPDATE recall_proposal SET inputs_version = :v WHERE person_id = :p"),
                         {"v": "0" * 16 + "-" + "0" * 16, "p": pid})  # fmt: skip
        elif how == "later_day":
            conn.execute(text("UPDATE recall_proposal SET as_of = :d WHERE person_id = :p"),
                         {"d": ON + dt.timedelta(days=1), "p": pid})  # fmt: skip
        elif how == "missing":
            conn.execute(text("DELETE FROM recall_proposal WHERE person_id = :p"), {"p": pid})
        else:  # a row left for a person since removed
            conn.execute(text("UPDATE person SET removed_at = :t WHERE id = :p"), {"t": dt.datetime(2026, 12, 6), "p": pid})
    with reading(demo_engine) as conn:
        assert SP.invalid_families(conn, ON, key)
        assert not SP.all_hold(conn, ON, key)
