"""Recall worklist: choose who to book in a window, most urgent first, and fit them into weekly slots.

Pure functions over :class:`~tracker.engines.schedule.Proposal` values; no I/O.

Urgency order (most urgent first):

1. a trigger is recorded (review now);
2. more days waiting: days overdue (``max(0, days_overdue)``) for a person once
   seen; for a person never screened, the days since they became eligible
   (``today - eligible_since``); everyone not yet due ties here;
3. progression beyond measurement variability or a projected threshold crossing;
4. earlier due date;
5. person code (a stable tie-break).

Who is booked: only people who can be reached (contact status
``contactable``, derived from the contact log), with no wish against contact and
not waiting for a day they asked to be contacted on.  People not contacted yet,
lost to follow-up, who declined, who asked to be contacted later or who must not
be approached are never booked: they are returned as *contact gaps*
(:func:`contact_gaps`), with the reason, for the nurse to act on.  Each person
is booked at most once (a person code met twice keeps its most urgent
proposal).

When (:func:`first_bookable_day`): booking starts on the first clinic day
(Monday to Friday unless the caller gives other weekdays; common practice)
on or after both the window's first day and today, so nothing is ever booked
into a week already begun or past.  :func:`plan_bookings` does all of this
for a window ``[window_from, window_to]``.

Booking (:func:`book_into_slots`): weeks start on ``window_start`` and every 7
days after it.  People are taken in urgency order.  Each is placed in the
latest week with a free slot that starts on or before their due date (so early
weeks stay free for the more urgent), else in the earliest free week after
it (booked *late*), else not booked.  A booking is late when the booked week
starts after the due date.  Everyone who cannot be seen by their due date
(booked late or not booked) is in ``unseen``, most urgent and earliest due
first; a late booking stays one booking (``late``), so lists built for people
show each person once: booked (late or not), not booked, or contact gap.
"""

from __future__ import annotations

import datetime as dt
from collections.abc import Iterable
from dataclasses import dataclass

from tracker.engines.schedule import CAUTIONS, Proposal

BOOKABLE = ("due", "overdue")
REACHABLE = "contactable"
CLINIC_WEEKDAYS = (0, 1, 2, 3, 4)  # Monday to Friday (common practice; a clinic may pass its own days)
GAP_ORDER = ("not_contacted", "lost_to_follow_up", "declined")


@dataclass(frozen=True)
class Booking:
    """One person placed in one week.  ``days_late`` = booked week start - due date, at least 0."""

    person_code: str
    week_start: dt.date
    due: dt.date
    late: bool
    days_late: int


@dataclass(frozen=True)
class Unseen:
    """Someone who cannot be seen by their due date: booked late (``week_start``) or not booked (None)."""

    person_code: str
    due: dt.date
    week_start: dt.date | None
    reason: str


@dataclass(frozen=True)
class BookingPlan:
    """Result of :func:`book_into_slots`; bookings are in week order, then urgency."""

    bookings: tuple[Booking, ...]
    unseen: tuple[Unseen, ...]
    window_start: dt.date
    weeks: int
    slots_per_week: int
    cautions: tuple[str, ...] = CAUTIONS
    contact_gaps: tuple[Proposal, ...] = ()


def days_waiting(p: Proposal) -> int:
    """Days overdue for a person once seen; days since eligible for a person never screened; 0 if not yet due."""
    if p.never_screened and p.eligible_since is not None:
        return max(0, (p.today - p.eligible_since).days)
    return max(0, p.days_overdue or 0)


def urgency_key(p: Proposal) -> tuple:
    """Sort key: triggers, then days waiting, then progression, then earliest due, then person code."""
    due = p.due or dt.date.max
    return (0 if p.triggers else 1, -days_waiting(p), 0 if p.progression else 1, due, p.person_code)


# How long after a relative was informed, with nothing back (no visit, test, booking or reply), the nurse
# is prompted to follow up: 6 weeks by default, a clinic setting ([contacts] reply_wait_weeks).  Common
# practice, no single source: cascade-testing services commonly send one reminder some weeks after the first
# letter; the clinic sets its own.
DEFAULT_REPLY_WAIT_WEEKS = 6

# The nurse's contact categories, in the order the gaps are listed (docs/contacts-and-letters.md).
CONTACT_CATEGORIES = ("not_informed", "no_response", "contact_later", "lost_to_follow_up", "declined",
                      "must_not_approach")  # fmt: skip


def contact_category(p: Proposal, wait_weeks: int = DEFAULT_REPLY_WAIT_WEEKS) -> str | None:
    """Where a relative stands with contact, from the contact log (None: informed and nothing to chase).

    ``must_not_approach`` (asked for no further contact), ``declined``, ``lost_to_follow_up``,
    ``contact_later`` (asked to be contacted on a later day, not yet reached), ``not_informed`` (never
    informed), ``no_response`` (informed ``wait_weeks`` weeks ago or more, nothing back since).
    """
    if p.contact_wish == "no_further_contact":
        return "must_not_approach"
    if p.contact_status in ("declined", "lost_to_follow_up"):
        return p.contact_status
    if p.contact_later_on is not None and p.contact_later_on > p.today:
        return "contact_later"
    if p.contact_status == "not_contacted":
        return "not_informed"
    if (p.informed_on is not None and not p.responded
            and (p.today - p.informed_on).days >= 7 * wait_weeks):  # fmt: skip
        return "no_response"
    return None


def reachable(p: Proposal) -> bool:
    """Can be booked: contactable (not declined, not lost to follow-up, not yet contacted), no wish against
    contact, and not waiting for the day they asked to be contacted."""
    return (p.contact_status == REACHABLE and p.contact_wish != "no_further_contact"
            and not (p.contact_later_on is not None and p.contact_later_on > p.today))  # fmt: skip


def contact_gaps(proposals: Iterable[Proposal]) -> list[Proposal]:
    """People who cannot be booked until contact is made: not contacted, lost to follow-up, declined.

    Listed once each, by gap (not contacted, lost, declined), then urgency.
    Declined people are listed whatever their status; the others only when due
    or overdue.
    """
    seen: set[str] = set()
    out = []

    def order(p: Proposal) -> int:
        if p.contact_wish == "no_further_contact":
            return len(GAP_ORDER) + 1  # listed last: must not be approached
        if reachable(p) is False and p.contact_status == REACHABLE:
            return 0  # asked to be contacted later
        return GAP_ORDER.index(p.contact_status) if p.contact_status in GAP_ORDER else len(GAP_ORDER)

    for p in sorted(proposals, key=lambda p: (order(p), urgency_key(p))):
        if reachable(p) or p.person_code in seen:
            continue
        if p.contact_wish == "no_further_contact" and p.status != "not_scheduled":
            seen.add(p.person_code)  # listed whatever their status: must not be approached
            out.append(p)
            continue
        if p.contact_status != "declined" and p.status not in BOOKABLE:
            continue
        if p.contact_status == "declined" and p.status == "not_scheduled":
            continue
        seen.add(p.person_code)
        out.append(p)
    return out


def first_bookable_day(window_from: dt.date, today: dt.date, weekdays: tuple[int, ...] = CLINIC_WEEKDAYS) -> dt.date:
    """The first clinic day (``weekdays``, Monday = 0) on or after both ``window_from`` and ``today``."""
    if not weekdays or any(not 0 <= d <= 6 for d in weekdays):
        raise ValueError("weekdays must be a non-empty set of 0 (Monday) to 6 (Sunday)")
    day = max(window_from, today)
    while day.weekday() not in weekdays:
        day += dt.timedelta(days=1)
    return day


def plan_bookings(
    proposals: Iterable[Proposal], window_from: dt.date, window_to: dt.date, slots_per_week: int, today: dt.date,
    weekdays: tuple[int, ...] = CLINIC_WEEKDAYS,
) -> BookingPlan:
    """Book the reachable among ``proposals`` into weeks from the first bookable day to ``window_to``.

    The weeks start on :func:`first_bookable_day` and every 7 days after it,
    while they start on or before ``window_to``.  When no bookable day is left
    in the window, nobody is booked (everyone due is in ``unseen``).
    """
    if window_to < window_from:
        raise ValueError("window_to is before window_from")
    start = first_bookable_day(window_from, today, weekdays)
    items = list(proposals)
    if start > window_to:
        gaps = tuple(contact_gaps(items))
        ordered = _unique(sort_by_urgency(p for p in items if p.status in BOOKABLE and p.due is not None and reachable(p)))
        unseen = tuple(Unseen(p.person_code, p.due, None, "no bookable day left in the window") for p in ordered)
        return BookingPlan((), unseen, start, 0, slots_per_week, contact_gaps=gaps)
    weeks = (window_to - start).days // 7 + 1
    return book_into_slots(items, start, weeks, slots_per_week)


def _unique(ordered: list[Proposal]) -> list[Proposal]:
    seen: set[str] = set()
    out = []
    for p in ordered:
        if p.person_code not in seen:
            seen.add(p.person_code)
            out.append(p)
    return out


def sort_by_urgency(proposals: Iterable[Proposal]) -> list[Proposal]:
    """Most urgent first (see :func:`urgency_key`)."""
    return sorted(proposals, key=urgency_key)


def select_due(proposals: Iterable[Proposal], window_from: dt.date, window_to: dt.date) -> list[Proposal]:
    """Proposals due or overdue by the end of the window, most urgent first.

    Included: status ``due`` or ``overdue`` with a due date on or before
    ``window_to``; anyone already overdue (due before ``window_from``) is
    included, since they are still waiting.  Released, declined (not
    recalled) and not-scheduled people are left out.
    """
    if window_to < window_from:
        raise ValueError("window_to is before window_from")
    chosen = [p for p in proposals if p.status in BOOKABLE and p.due is not None and p.due <= window_to]
    return sort_by_urgency(chosen)


def not_recalled(proposals: Iterable[Proposal]) -> list[Proposal]:
    """People who declined: listed ("declined: not recalled"), never booked."""
    return sorted((p for p in proposals if p.status == "not_recalled"), key=lambda p: p.person_code)


def lost_to_follow_up(proposals: Iterable[Proposal]) -> list[Proposal]:
    """Bookable people flagged lost to follow-up (re-contact needed), most urgent first."""
    return sort_by_urgency(p for p in proposals if "lost_to_follow_up" in p.flags and p.status in BOOKABLE)


def week_starts(window_start: dt.date, weeks: int) -> list[dt.date]:
    """Start date of each week of the window."""
    return [window_start + dt.timedelta(days=7 * k) for k in range(weeks)]


def book_into_slots(
    proposals: Iterable[Proposal], window_start: dt.date, weeks: int, slots_per_week: int
) -> BookingPlan:
    """Place bookable proposals into ``weeks`` weeks of ``slots_per_week`` slots (see module docstring).

    Proposals that are not ``due``/``overdue`` or have no due date are ignored;
    people who cannot be reached are not booked but returned in
    ``contact_gaps``; a person code met twice is booked once.
    """
    if weeks <= 0 or slots_per_week < 0:
        raise ValueError("weeks must be positive and slots_per_week not negative")
    items = list(proposals)
    starts = week_starts(window_start, weeks)
    free = [slots_per_week] * weeks
    ordered = _unique(sort_by_urgency(p for p in items if p.status in BOOKABLE and p.due is not None and reachable(p)))
    placed: list[tuple[int, int, Booking]] = []
    unseen: list[tuple[tuple, Unseen]] = []

    for rank, p in enumerate(ordered):
        assert p.due is not None
        on_time = [k for k in range(weeks) if starts[k] <= p.due]
        order = list(reversed(on_time)) + [k for k in range(weeks) if starts[k] > p.due]
        week = next((k for k in order if free[k] > 0), None)
        if week is None:
            unseen.append((urgency_key(p), Unseen(p.person_code, p.due, None, "no free slot in the window")))
            continue
        free[week] -= 1
        late = starts[week] > p.due
        days_late = max(0, (starts[week] - p.due).days)
        b = Booking(p.person_code, starts[week], p.due, late, days_late)
        placed.append((week, rank, b))
        if late:
            why = "due before the window starts" if p.due < window_start else "no free slot on or before the due date"
            unseen.append((urgency_key(p), Unseen(p.person_code, p.due, starts[week], why)))

    placed.sort(key=lambda t: (t[0], t[1]))
    unseen.sort(key=lambda t: t[0])
    return BookingPlan(
        bookings=tuple(b for _, _, b in placed),
        unseen=tuple(u for _, u in unseen),
        window_start=window_start,
        weeks=weeks,
        slots_per_week=slots_per_week,
        contact_gaps=tuple(contact_gaps(items)),
    )
