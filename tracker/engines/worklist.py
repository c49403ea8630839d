"""Recall worklist: choose who to book in a window, most urgent first, and fit them into weekly slots.

Pure functions over :class:`~tracker.engines.schedule.Proposal` values; no I/O.

Urgency order (most urgent first):

1. a trigger is recorded (review now);
2. more days overdue (``max(0, days_overdue)``, so everyone not yet overdue ties here);
3. progression beyond measurement variability or a projected threshold crossing;
4. earlier due date;
5. person code (a stable tie-break).

Booking (:func:`book_into_slots`): weeks start on ``window_start`` and every 7
days after it.  People are taken in urgency order.  Each is placed in the
latest week with a free slot that starts on or before their due date (so early
weeks stay free for the more urgent), else in the earliest free week after
it (booked *late*), else not booked.  A booking is late when the booked week
starts after the due date.  Everyone who cannot be seen by their due date
(booked late or not booked) is reported, most urgent and earliest due first.
"""

from __future__ import annotations

import datetime as dt
from collections.abc import Iterable
from dataclasses import dataclass

from tracker.engines.schedule import CAUTIONS, Proposal

BOOKABLE = ("due", "overdue")


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


def urgency_key(p: Proposal) -> tuple:
    """Sort key: triggers, then days overdue, then progression, then earliest due, then person code."""
    overdue = max(0, p.days_overdue or 0)
    due = p.due or dt.date.max
    return (0 if p.triggers else 1, -overdue, 0 if p.progression else 1, due, p.person_code)


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

    Proposals that are not ``due``/``overdue`` or have no due date are ignored.
    """
    if weeks <= 0 or slots_per_week < 0:
        raise ValueError("weeks must be positive and slots_per_week not negative")
    starts = week_starts(window_start, weeks)
    free = [slots_per_week] * weeks
    ordered = sort_by_urgency(p for p in proposals if p.status in BOOKABLE and p.due is not None)
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
    )
