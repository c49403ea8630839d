"""Worklist selection, urgency order and capacity booking (invented people)."""

from __future__ import annotations

import datetime as dt
from collections import Counter

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from tracker.domain.dates import PartialDate
from tracker.engines.schedule import CAUTIONS, PersonState, Policy, Proposal, propose_recall
from tracker.engines.worklist import (
    book_into_slots,
    first_bookable_day,
    plan_bookings,
    lost_to_follow_up,
    not_recalled,
    select_due,
    sort_by_urgency,
    week_starts,
)
from tracker.rules import load_rule_set

TODAY = dt.date(2026, 2, 2)  # a Monday
WEEK1, WEEK2 = TODAY, TODAY + dt.timedelta(days=7)


def make(code, due, *, status=None, triggers=(), progression=False, flags=(), today=TODAY) -> Proposal:
    """A minimal proposal; status follows the due date unless given."""
    if status is None:
        status = "overdue" if due < today else "due"
    return Proposal(
        person_code=code,
        rule_set_id="esc_2023",
        today=today,
        status=status,
        due=due if status in ("due", "overdue") else None,
        interval_months=12,
        routine_due=due,
        days_overdue=(today - due).days if status in ("due", "overdue") else None,
        rule_id="esc23.adult.carrier.to60",
        needs=("ecg", "echo"),
        consider=(),
        fired=(),
        triggers=tuple(triggers),
        progression=progression,
        flags=tuple(flags),
        notes=(),
        cautions=CAUTIONS,
    )


def test_select_due_window():
    ps = [
        make("A-overdue", dt.date(2025, 11, 1)),
        make("B-in-window", dt.date(2026, 2, 20)),
        make("C-after", dt.date(2026, 4, 1)),
        make("D-released", TODAY, status="released"),
        make("E-declined", TODAY, status="not_recalled"),
        make("F-deceased", TODAY, status="not_scheduled"),
    ]
    got = [p.person_code for p in select_due(ps, TODAY, dt.date(2026, 3, 1))]
    assert got == ["A-overdue", "B-in-window"]
    with pytest.raises(ValueError):
        select_due(ps, dt.date(2026, 3, 1), TODAY)


def test_urgency_order():
    """Triggers, then days overdue, then progression, then earliest due."""
    ps = [
        make("plain-early", dt.date(2026, 2, 10)),
        make("progression-late", dt.date(2026, 3, 20), progression=True),
        make("overdue-10", TODAY - dt.timedelta(days=10)),
        make("trigger", TODAY, triggers=("new_symptoms",)),
        make("overdue-100", TODAY - dt.timedelta(days=100)),
        make("plain-later", dt.date(2026, 2, 24)),
    ]
    assert [p.person_code for p in sort_by_urgency(ps)] == [
        "trigger",
        "overdue-100",
        "overdue-10",
        "progression-late",
        "plain-early",
        "plain-later",
    ]


def test_more_due_than_slots_pushes_least_urgent_past_due():
    """Week 1 has 2 slots and 4 people due on its Wednesday: the 2 least urgent go to week 2, late by 5 days."""
    wed = WEEK1 + dt.timedelta(days=2)
    ps = [
        make("P1", wed),
        make("P2", wed, progression=True),
        make("P3", wed, triggers=("pregnancy",)),
        make("P4", wed - dt.timedelta(days=3)),  # due the Sunday before the window: 1 day overdue
    ]
    plan = book_into_slots(ps, WEEK1, weeks=2, slots_per_week=2)
    by = {b.person_code: b for b in plan.bookings}
    # P4 is due before the window starts (overdue): booked first after the trigger, late whatever the week.
    assert by["P3"].week_start == WEEK1 and not by["P3"].late
    assert by["P4"].week_start == WEEK1 and by["P4"].late
    assert by["P2"].week_start == WEEK2 and by["P2"].late and by["P2"].days_late == 5
    assert by["P1"].week_start == WEEK2 and by["P1"].late
    assert Counter(b.week_start for b in plan.bookings) == {WEEK1: 2, WEEK2: 2}
    # Reported: everyone not seen by the due date, most urgent and earliest due first.
    assert [u.person_code for u in plan.unseen] == ["P4", "P2", "P1"]
    assert plan.unseen[0].reason == "due before the window starts"
    assert plan.cautions == CAUTIONS


def test_capacity_exhausted_leaves_people_unbooked():
    wed = WEEK1 + dt.timedelta(days=2)
    ps = [make(f"Q{i}", wed + dt.timedelta(days=i)) for i in range(5)]
    plan = book_into_slots(ps, WEEK1, weeks=2, slots_per_week=2)
    assert len(plan.bookings) == 4
    unbooked = [u for u in plan.unseen if u.week_start is None]
    assert [u.person_code for u in unbooked] == ["Q4"] and unbooked[0].reason == "no free slot in the window"


def test_booked_in_the_week_of_the_due_date_not_earlier():
    ps = [make("R1", WEEK2 + dt.timedelta(days=3)), make("R2", WEEK1 + dt.timedelta(days=1))]
    plan = book_into_slots(ps, WEEK1, weeks=3, slots_per_week=1)
    by = {b.person_code: b for b in plan.bookings}
    assert by["R1"].week_start == WEEK2 and by["R2"].week_start == WEEK1
    assert plan.unseen == ()


def test_non_bookable_are_ignored_and_listed_separately():
    ps = [
        make("S1", TODAY, status="not_recalled"),
        make("S2", TODAY, status="released"),
        make("S3", TODAY + dt.timedelta(days=3), flags=("lost_to_follow_up",)),
    ]
    plan = book_into_slots(ps, WEEK1, weeks=1, slots_per_week=5)
    assert [b.person_code for b in plan.bookings] == ["S3"]
    assert [p.person_code for p in not_recalled(ps)] == ["S1"]
    assert [p.person_code for p in lost_to_follow_up(ps)] == ["S3"]


def test_week_starts():
    assert week_starts(WEEK1, 3) == [WEEK1, WEEK2, WEEK2 + dt.timedelta(days=7)]
    with pytest.raises(ValueError):
        book_into_slots([], WEEK1, weeks=0, slots_per_week=1)


def test_end_to_end_from_proposals():
    """ESC 2023 proposals into a worklist: declined and deceased never booked."""
    rs = load_rule_set("esc_2023")
    plp = {"plp_variant"}
    people = [
        PersonState("FAM9-II-1", PartialDate(dt.date(1980, 5, 5)), genotype="carrier", family_features=plp, last_visit=dt.date(2024, 2, 1)),
        PersonState("FAM9-II-2", PartialDate(dt.date(1982, 5, 5)), genotype="carrier", family_features=plp, last_visit=dt.date(2025, 2, 1), triggers={"new_symptoms"}),
        PersonState("FAM9-II-3", PartialDate(dt.date(1984, 5, 5)), genotype="carrier", family_features=plp, contact_status="declined"),
        PersonState("FAM9-I-1", PartialDate(dt.date(1950, 5, 5)), phenotype="positive", vital_status="deceased"),
    ]
    props = [propose_recall(p, rs, Policy("shortest"), TODAY) for p in people]
    window = select_due(props, TODAY, TODAY + dt.timedelta(days=28))
    assert [p.person_code for p in window] == ["FAM9-II-2", "FAM9-II-1"]
    plan = book_into_slots(window, TODAY, weeks=4, slots_per_week=1)
    assert [b.person_code for b in plan.bookings] == ["FAM9-II-2", "FAM9-II-1"]
    assert [p.person_code for p in not_recalled(props)] == ["FAM9-II-3"]


@settings(max_examples=200, deadline=None)
@given(
    st.lists(
        st.tuples(st.integers(-60, 60), st.booleans(), st.booleans()),
        min_size=0,
        max_size=30,
    ),
    st.integers(1, 6),
    st.integers(0, 4),
)
def test_booking_invariants(items, weeks, slots):
    ps = [
        make(f"X{i}", TODAY + dt.timedelta(days=d), triggers=("new_symptoms",) if t else (), progression=g)
        for i, (d, t, g) in enumerate(items)
    ]
    plan = book_into_slots(ps, WEEK1, weeks=weeks, slots_per_week=slots)
    counts = Counter(b.week_start for b in plan.bookings)
    assert all(n <= slots for n in counts.values())
    booked = [b.person_code for b in plan.bookings]
    assert len(booked) == len(set(booked))
    for b in plan.bookings:
        assert b.late == (b.week_start > b.due)
    unbooked = {p.person_code for p in ps} - set(booked)
    late = {b.person_code for b in plan.bookings if b.late}
    assert {u.person_code for u in plan.unseen} == unbooked | late
    assert len(plan.bookings) == min(len(ps), weeks * slots)


# ------------------------------------------------------- who is booked, when, and once


def test_only_reachable_people_are_booked_and_the_rest_are_contact_gaps():
    """Invented family: the most overdue are not contacted or lost; they are never booked."""
    rs = load_rule_set("esc_2023")
    plp = frozenset({"plp_variant"})
    born = PartialDate(dt.date(1985, 5, 5))

    def st_(code, contact, last):
        return PersonState(code, born, genotype="carrier", family_features=plp, contact_status=contact, last_visit=last)

    people = [
        st_("FAM7-II-1", "not_contacted", None),
        st_("FAM7-II-2", "lost_to_follow_up", dt.date(2015, 3, 1)),
        st_("FAM7-II-3", "contactable", dt.date(2024, 6, 1)),
        st_("FAM7-II-4", "declined", None),
        st_("FAM7-II-5", "contactable", None),
    ]
    props = [propose_recall(p, rs, Policy("shortest"), TODAY) for p in people]
    plan = book_into_slots(props, WEEK1, weeks=2, slots_per_week=3)
    assert [b.person_code for b in plan.bookings] == ["FAM7-II-5", "FAM7-II-3"]
    gaps = [(p.person_code, p.contact_status) for p in plan.contact_gaps]
    assert gaps == [("FAM7-II-1", "not_contacted"), ("FAM7-II-2", "lost_to_follow_up"), ("FAM7-II-4", "declined")]
    assert not {u.person_code for u in plan.unseen} & {g for g, _ in gaps}


def test_a_person_met_twice_is_booked_once():
    ps = [make("D1", TODAY - dt.timedelta(days=40)), make("D1", TODAY - dt.timedelta(days=40)), make("D2", TODAY)]
    plan = book_into_slots(ps, WEEK1, weeks=2, slots_per_week=3)
    assert sorted(b.person_code for b in plan.bookings) == ["D1", "D2"]


def test_never_booked_before_the_next_clinic_day():
    """Run on Saturday 2026-12-05 for a window from Tuesday 2026-12-01: the first week starts Monday 2026-12-07."""
    sat = dt.date(2026, 12, 5)
    assert first_bookable_day(dt.date(2026, 12, 1), sat) == dt.date(2026, 12, 7)
    assert first_bookable_day(dt.date(2026, 12, 9), sat) == dt.date(2026, 12, 9)  # a Wednesday after today
    ps = [make("W1", dt.date(2026, 11, 1), today=sat), make("W2", dt.date(2026, 12, 2), today=sat)]
    plan = plan_bookings(ps, dt.date(2026, 12, 1), dt.date(2027, 3, 1), 4, sat)
    assert plan.window_start == dt.date(2026, 12, 7)
    assert all(b.week_start >= dt.date(2026, 12, 7) for b in plan.bookings) and len(plan.bookings) == 2
    assert plan.weeks == 13  # 2026-12-07 ... 2027-03-01
    over = plan_bookings(ps, dt.date(2026, 11, 1), dt.date(2026, 11, 30), 4, sat)  # window already past
    assert over.bookings == () and {u.person_code for u in over.unseen} == {"W1", "W2"}


def test_never_screened_waiting_counts_from_eligibility():
    """A never-screened person due now ranks by the days since eligible, beside the once-seen overdue."""
    rs = load_rule_set("esc_2023")
    plp = frozenset({"plp_variant"})
    new = PersonState("FAM8-III-1", PartialDate(dt.date(1990, 1, 1)), family_features=plp,
                      eligible_since=dt.date(2020, 1, 1))  # fmt: skip
    seen = PersonState("FAM8-III-2", PartialDate(dt.date(1991, 1, 1)), family_features=plp, last_visit=dt.date(2023, 1, 1))
    props = [propose_recall(p, rs, Policy("shortest"), TODAY) for p in (seen, new)]
    assert props[1].days_overdue == 0 and props[1].never_screened
    assert [p.person_code for p in sort_by_urgency(props)] == ["FAM8-III-1", "FAM8-III-2"]
