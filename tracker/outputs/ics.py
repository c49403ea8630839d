"""Proposed recall visits as an iCalendar file (RFC 5545), built with the ``icalendar`` package.

One ``VEVENT`` per proposed visit:

* all-day: ``DTSTART;VALUE=DATE`` on the booked week start (or the due date
  when not booked) and ``DTEND;VALUE=DATE`` the next day (exclusive end,
  RFC 5545 §3.6.1);
* ``UID``: a SHA-256 digest of the person code and the purpose of the visit,
  so that exporting again updates the same event instead of adding a second
  one; the UID shows neither a name nor the code itself;
* ``SEQUENCE``: whole minutes since 2000-01-01 UTC at export time, so every
  later export is taken as the newer revision of the event (RFC 5545
  §3.8.7.4: the sequence grows with each revision); ``DTSTAMP`` the export time;
* ``STATUS:TENTATIVE`` (a proposal until the clinic books it);
* ``SUMMARY``: the person code and what the visit needs only (no names, no
  diagnoses); ``DESCRIPTION``: the reason and the caution.

The calendar carries ``VERSION:2.0`` and a ``PRODID``.  Pure: returns bytes;
the caller writes the file.
"""

from __future__ import annotations

import datetime as dt
import hashlib
from collections.abc import Iterable
from dataclasses import dataclass

from icalendar import Calendar, Event

PRODID = "-//hcm-family-tracker//recall worklist//EN"
UID_DOMAIN = "hcm-family-tracker.invalid"
SEQUENCE_EPOCH = dt.datetime(2000, 1, 1, tzinfo=dt.timezone.utc)

NEED_WORDS = {
    "ecg": "ECG",
    "echo": "echo",
    "cmr": "CMR",
    "counselling": "genetic counselling",
    "ambulatory_ecg": "ambulatory ECG",
    "risk_assessment": "risk review",
    "clinical_review": "clinical review",
}


@dataclass(frozen=True)
class CalendarVisit:
    """One proposed visit.  ``on`` is the day of the all-day event."""

    person_code: str
    on: dt.date
    needs: tuple[str, ...]
    reason: str
    purpose: str = "recall"


def visit_uid(person_code: str, purpose: str = "recall") -> str:
    """Stable, opaque UID: the same person code and purpose give the same UID on every export."""
    digest = hashlib.sha256(f"{person_code}\x1f{purpose}".encode("utf-8")).hexdigest()[:32]
    return f"{digest}@{UID_DOMAIN}"


def sequence_at(stamp: dt.datetime) -> int:
    """SEQUENCE for an export made at ``stamp``: whole minutes since 2000-01-01 UTC."""
    if stamp.tzinfo is None:
        stamp = stamp.replace(tzinfo=dt.timezone.utc)
    return max(0, int((stamp - SEQUENCE_EPOCH).total_seconds() // 60))


def needs_words(needs: Iterable[str]) -> str:
    """'ECG, echo, genetic counselling'."""
    return ", ".join(NEED_WORDS.get(n, n.replace("_", " ")) for n in needs)


def summary_text(visit: CalendarVisit) -> str:
    """SUMMARY: the person code and the visit needs, nothing else."""
    needs = needs_words(visit.needs)
    return f"{visit.person_code}: {needs}" if needs else f"{visit.person_code}: visit"


def calendar_bytes(
    visits: Iterable[CalendarVisit],
    *,
    caution: str,
    stamp: dt.datetime | None = None,
    sequence: int | None = None,
    name: str = "Family screening recalls",
) -> bytes:
    """The iCalendar text (CRLF line ends, folded by the library) for ``visits``."""
    stamp = stamp or dt.datetime.now(dt.timezone.utc)
    if stamp.tzinfo is None:
        stamp = stamp.replace(tzinfo=dt.timezone.utc)
    seq = sequence_at(stamp) if sequence is None else sequence
    cal = Calendar()
    cal.add("prodid", PRODID)
    cal.add("version", "2.0")
    cal.add("calscale", "GREGORIAN")
    cal.add("x-wr-calname", name)
    for v in visits:
        ev = Event()
        ev.add("uid", visit_uid(v.person_code, v.purpose))
        ev.add("dtstamp", stamp)
        ev.add("dtstart", v.on)
        ev.add("dtend", v.on + dt.timedelta(days=1))
        ev.add("sequence", seq)
        ev.add("status", "TENTATIVE")
        ev.add("transp", "TRANSPARENT")
        ev.add("summary", summary_text(v))
        ev.add("description", f"{v.reason}\n\n{caution}")
        cal.add_component(ev)
    return cal.to_ical()
