"""Writing to the contact log (migration 0012): one row per event, never updated.

Used by the contacts service (:mod:`tracker.services.contacts`) and by the audited edit of a person
(``tracker edit person --set contact_status=...`` appends an event instead of overwriting).
The caller holds the write transaction and writes the audit entry.
"""

from __future__ import annotations

import datetime as dt

from sqlalchemy import Connection, insert

from tracker.store import audit
from tracker.store.models import ContactEvent


def append_event(conn: Connection, *, person_id: int, event_date: dt.date | None, channel: str,
                 outcome: str | None, by_role: str | None = None, via_person_id: int | None = None,
                 later_date: dt.date | None = None, notes: str | None = None, source: str = "entered",
                 user: str | None = None) -> int:  # fmt: skip
    """Insert one event; returns its id."""
    row = dict(person_id=person_id, event_date=event_date, channel=channel, by_role=by_role,
               via_person_id=via_person_id, outcome=outcome, later_date=later_date, notes=notes, source=source,
               entered_at=audit.now_utc(), entered_by=audit.actor(user))  # fmt: skip
    return int(conn.execute(insert(ContactEvent).returning(ContactEvent.id), row).scalar_one())


# The older single status's words as outcomes (a people file's contact_status, `tracker edit person`).
STATUS_OUTCOME = {"contactable": "informed", "not_contacted": "not_contacted", "declined": "declined",
                  "lost_to_follow_up": "lost_to_follow_up"}  # fmt: skip
