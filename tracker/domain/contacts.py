"""A relative's contact state, derived from the contact log (plain data: no database, no printing).

The log (``contact_event``, migration 0012) is append-only: a correction is a newer event, so the
history stays.  The *current* state is read from the log and the open wish:

* ``informed``: the relative was told about the family's condition (an event with outcome
  ``informed``, ``contact_later`` or ``declined``: in each the information reached them), with the
  first such date and the family member it came through, if any;
* the newest event (date, channel, outcome);
* ``status``: the four words the engines and older outputs use (``not_contacted``,
  ``contactable``, ``declined``, ``lost_to_follow_up``), mapped from the newest event and the
  open wish by :func:`legacy_status` (the table is in docs/contacts-and-letters.md);
* the open wish (``no_further_contact``: the relative must not be approached;
  ``only_via_family_member``: only through the named family member).

Events are ordered by date (an undated event, kept from the single status of an older store,
comes first), then by the order they were entered.
"""

from __future__ import annotations

import datetime as dt
from dataclasses import dataclass, field
from typing import Iterable, Mapping

# The outcomes in which the information reached the relative.
INFORMING = ("informed", "contact_later", "declined")
# The outcomes of an attempt that did not reach them.
NOT_REACHED = ("no_answer", "wrong_address")


def legacy_status(outcomes: list[str | None], wish: str | None) -> str | None:
    """The older single status for a person's outcomes (oldest first) and open wish.

    ========================= ===================================================
    newest outcome             status
    ========================= ===================================================
    (open no_further_contact)  declined (whatever the log says)
    informed, contact_later    contactable
    no_answer, wrong_address   contactable if informed before, else not_contacted
    moved_away                 lost_to_follow_up
    declined, not_contacted,   the same word
    lost_to_follow_up
    none (a date only)         none
    ========================= ===================================================

    Migration 0012 holds a frozen copy (it writes the status back on downgrade).
    """
    if wish == "no_further_contact":
        return "declined"
    if not outcomes:
        return None
    informed = any(o in INFORMING for o in outcomes)
    last = outcomes[-1]
    if last is None:
        return None
    if last in ("informed", "contact_later"):
        return "contactable"
    if last in NOT_REACHED:
        return "contactable" if informed else "not_contacted"
    if last == "moved_away":
        return "lost_to_follow_up"
    return last


def event_order(event: Mapping) -> tuple:
    """Sort key of one event: undated first, then by date, then in the order entered (``id``)."""
    day = event.get("event_date")
    return (day is not None, day or dt.date.min, event.get("id") or 0)


@dataclass(frozen=True)
class ContactState:
    """One relative's current contact state (see the module docstring)."""

    person: str
    status: str  # not_contacted, contactable, declined, lost_to_follow_up
    status_date: dt.date | None  # the date of the newest event
    legacy: str | None = None  # the status as the people layout's contact_status column writes it (None: empty)
    informed: bool = False
    informed_date: dt.date | None = None
    informed_via: str | None = None
    last_outcome: str | None = None
    last_channel: str | None = None
    last_date: dt.date | None = None
    contact_later_on: dt.date | None = None  # the newest event asked to be contacted on this day
    wish: str | None = None
    wish_via: str | None = None
    wish_date: dt.date | None = None
    events: int = 0
    attempts_since_informed: int = 0
    history: tuple = field(default=(), repr=False)

    @property
    def must_not_approach(self) -> bool:
        return self.wish == "no_further_contact"

    def as_dict(self) -> dict:
        iso = lambda d: d.isoformat() if d is not None else None  # noqa: E731
        return {
            "person": self.person, "status": self.status, "status_date": iso(self.status_date),
            "informed": self.informed, "informed_date": iso(self.informed_date), "informed_via": self.informed_via,
            "last_outcome": self.last_outcome, "last_channel": self.last_channel, "last_date": iso(self.last_date),
            "contact_later_on": iso(self.contact_later_on), "wish": self.wish, "wish_via": self.wish_via,
            "wish_date": iso(self.wish_date), "must_not_approach": self.must_not_approach, "events": self.events,
        }  # fmt: skip


def as_it_stood(events: Iterable[Mapping], wishes: Iterable[Mapping], as_of: dt.date | None) -> tuple[list, list]:
    """The events and wishes as the log stood on ``as_of`` (None: all): events dated on or before it (an
    undated event, kept from an older store's single status, always counts), wishes recorded on or before
    it, a wish ended after it still open."""
    events, wishes = list(events), list(wishes)
    if as_of is None:
        return events, wishes
    events = [e for e in events if e.get("event_date") is None or e["event_date"] <= as_of]
    kept = []
    for w in wishes:
        recorded = w.get("recorded_date")
        if recorded is not None and recorded > as_of:
            continue
        ended = w.get("ended_date")
        kept.append({**w, "ended_date": None} if ended is not None and ended > as_of else w)
    return events, kept


def derive_state(person: str, events: Iterable[Mapping], wishes: Iterable[Mapping] = (),
                 as_of: dt.date | None = None) -> ContactState:  # fmt: skip
    """The state of ``person`` from their events (dicts: event_date (date|None), outcome, channel, via,
    later_date, id) and wishes (dicts: wish, via, recorded_date, ended_date), as the log stood on
    ``as_of`` (default: everything recorded; see :func:`as_it_stood`)."""
    events, wishes = as_it_stood(events, wishes, as_of)
    ordered = sorted(events, key=event_order)
    open_wishes = [w for w in wishes if w.get("ended_date") is None]
    # Two open wishes cannot be recorded (the service refuses); if a store holds them, the stricter wins.
    open_wishes.sort(key=lambda w: (w.get("wish") != "no_further_contact", w.get("recorded_date") or dt.date.min))
    wish = open_wishes[0] if open_wishes else None
    outcomes = [e.get("outcome") for e in ordered]
    legacy = legacy_status(outcomes, wish["wish"] if wish else None)
    status = legacy or "not_contacted"
    informed = [e for e in ordered if e.get("outcome") in INFORMING]
    first = informed[0] if informed else None
    last = ordered[-1] if ordered else None
    attempts = 0
    if first is not None:
        after = ordered[ordered.index(informed[-1]) + 1:]
        attempts = sum(1 for e in after if e.get("outcome") in NOT_REACHED)
    return ContactState(
        person=person,
        status=status,
        legacy=legacy,
        status_date=last.get("event_date") if last else None,
        informed=first is not None,
        informed_date=first.get("event_date") if first else None,
        informed_via=first.get("via") if first else None,
        last_outcome=last.get("outcome") if last else None,
        last_channel=last.get("channel") if last else None,
        last_date=last.get("event_date") if last else None,
        contact_later_on=last.get("later_date") if last and last.get("outcome") == "contact_later" else None,
        wish=wish["wish"] if wish else None,
        wish_via=wish.get("via") if wish else None,
        wish_date=wish.get("recorded_date") if wish else None,
        events=len(ordered),
        attempts_since_informed=attempts,
        history=tuple(ordered),
    )


def derive_states(events: Iterable[Mapping], wishes: Iterable[Mapping] = (),
                  as_of: dt.date | None = None) -> dict[str, ContactState]:  # fmt: skip
    """Person code -> :class:`ContactState`, for every person with an event or a wish (key ``person``),
    as the log stood on ``as_of`` (default: everything recorded)."""
    events, wishes = as_it_stood(events, wishes, as_of)
    by_person: dict[str, list] = {}
    wishes_by: dict[str, list] = {}
    for e in events:
        by_person.setdefault(e["person"], []).append(e)
    for w in wishes:
        wishes_by.setdefault(w["person"], []).append(w)
    return {p: derive_state(p, by_person.get(p, ()), wishes_by.get(p, ()))
            for p in sorted(set(by_person) | set(wishes_by))}  # fmt: skip
