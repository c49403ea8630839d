"""The contact log and what goes with it: contacts, wishes, letters sent, results from other
centres, bookings and discharges (schema revision 0012; docs/contacts-and-letters.md).

Entry points (the CLI and the web forms call these; each runs inside the caller's write
transaction, :func:`tracker.store.database.writing`):

* :func:`record_contact`, :func:`record_booking`, :func:`cancel_booking`, :func:`record_wish`,
  :func:`end_wish`, :func:`record_letter_sent`, :func:`record_letter_reply`,
  :func:`record_external_result`, :func:`record_discharge`: one write each, checked field by field
  exactly as the importer checks a cell of the matching layout (``tracker.io.layouts``), audited
  (:func:`tracker.store.audit.record`, action ``record``), returning the stored record as a dict
  (codes, ISO dates) with its ``audit_id``;
* :func:`contact_state`: one person's current state, derived from the log with its date;
* :func:`load_contact_events`: the log of the families in a scope, as a pandas frame.

Bad input raises :class:`tracker.io.reading.InputRejected` with one :class:`Problem` whose
``column`` is the field name (``on``, ``channel``, ``by``, ``outcome``, ``later``, ``via``,
``notes``, ...) and whose ``file`` names the form (``contact``, ``booking``, ...); nothing is
written.  Every write ends in :func:`_after_write`, which refreshes the family's stored recall
proposals in the same transaction.
"""

from __future__ import annotations

import datetime as dt
from typing import TYPE_CHECKING, Any

from sqlalchemy import Connection, insert, select, update

from tracker.domain import vocabulary as V
from tracker.io.reading import InputRejected, Problem
from tracker.store import audit
from tracker.store.contact_log import append_event
from tracker.store.models import (
    Booking,
    ContactWish,
    Discharge,
    ExternalResult,
    Family,
    GeneticResult,
    LetterSent,
    Person,
    Variant,
    VariantClassification,
)

if TYPE_CHECKING:
    import pandas as pd
    from tracker.store.repository import Scope

# How far ahead a booked visit or a "contact me later" date may be: beyond this a date is taken for a
# typing mistake (engineering limit, not a clinical figure).
MAX_YEARS_AHEAD = 5
MAX_NOTES = 4000  # as the importer's text cells (tracker.io.columns.MAX_TEXT)


# --------------------------------------------------------------------------- checking fields


def _refuse(form: str, field: str, message: str) -> InputRejected:
    return InputRejected([Problem(form, None, field, message)])


def _text(form: str, field: str, value: Any, *, required: bool = False, limit: int = MAX_NOTES,
          today: dt.date | None = None) -> str | None:  # fmt: skip
    """A free-text field checked as the importer checks a text cell (length, control and invisible characters)."""
    import pandas as pd

    from tracker.io.columns import Column, parse

    if value is None:
        value = ""
    if not isinstance(value, str):
        raise _refuse(form, field, "must be text")
    parsed = parse(Column(field, "text", required=required, max_length=limit), pd.Series([value.strip()]),
                   today or dt.date.today())  # fmt: skip
    error = parsed.errors.iloc[0]
    if error is not None:
        raise _refuse(form, field, str(error))
    v = parsed.values.iloc[0]
    return None if v is None or (isinstance(v, float) and pd.isna(v)) else str(v)


def _date(form: str, field: str, value: Any, *, today: dt.date, required: bool = True, future: bool = False,
          not_before: dt.date | None = None, before_what: str = "") -> dt.date | None:  # fmt: skip
    """An ISO 8601 date (text or ``datetime.date``); past or today unless ``future``, then at most
    MAX_YEARS_AHEAD years ahead."""
    from tracker.domain.dates import parse_date

    if value is None or (isinstance(value, str) and not value.strip()):
        if required:
            raise _refuse(form, field, "is empty (a date is required, YYYY-MM-DD)")
        return None
    if isinstance(value, dt.datetime):
        raise _refuse(form, field, "give a calendar date (YYYY-MM-DD), not a date and time")
    if isinstance(value, dt.date):
        day = value
    elif isinstance(value, str):
        try:
            day = parse_date(value)
        except ValueError as exc:
            raise _refuse(form, field, str(exc)) from None
    else:
        raise _refuse(form, field, "is not a date (YYYY-MM-DD)")
    if not future and day > today:
        raise _refuse(form, field, f"{day.isoformat()} is in the future (after {today.isoformat()})")
    if future:
        limit = dt.date(today.year + MAX_YEARS_AHEAD, today.month, min(today.day, 28))
        if day > limit:
            raise _refuse(form, field, f"{day.isoformat()} is more than {MAX_YEARS_AHEAD} years ahead")
    if not_before is not None and day < not_before:
        raise _refuse(form, field, f"{day.isoformat()} is before {before_what} ({not_before.isoformat()})")
    return day


def _choice(form: str, field: str, value: Any, choices: tuple[str, ...], *, required: bool = True) -> str | None:
    if value is None or (isinstance(value, str) and not value.strip()):
        if required:
            raise _refuse(form, field, f"is empty (one of: {', '.join(choices)})")
        return None
    if not isinstance(value, str) or value.strip() not in choices:
        shown = repr(value[:40]) if isinstance(value, str) else "the value"
        raise _refuse(form, field, f"{shown} is not one of: {', '.join(choices)}")
    return value.strip()


def _person(conn: Connection, form: str, field: str, code: Any):
    """The stored, not removed, person with this code (id, code, family, birth date and precision, vital status)."""
    if not isinstance(code, str) or not code.strip():
        raise _refuse(form, field, "is empty (a person code is required)")
    row = conn.execute(
        select(Person.id, Person.code, Person.family_id, Family.code.label("family"), Person.birth_date,
               Person.birth_date_precision, Person.vital_status, Person.death_date, Person.removed_at,
               Person.is_placeholder)
        .join(Family, Person.family_id == Family.id)
        .where(Person.code == code.strip())
    ).first()  # fmt: skip
    if row is None:
        raise _refuse(form, field, f"{code.strip()[:40]!r} is not a person in the store")
    if row.removed_at is not None:
        raise _refuse(form, field, f"{row.code} was removed; reinstate the person first")
    return row


def _via(conn: Connection, form: str, field: str, code: Any, prow):
    """The family member through whom contact goes: stored, same family, not the person, alive."""
    via = _person(conn, form, field, code)
    if via.id == prow.id:
        raise _refuse(form, field, f"{via.code} is the person themself; name the family member who passes it on")
    if via.family_id != prow.family_id:
        raise _refuse(form, field, f"{via.code} belongs to another family")
    if via.vital_status == "deceased":
        raise _refuse(form, field, f"{via.code} is recorded as deceased")
    if via.is_placeholder:
        raise _refuse(form, field, f"{via.code} is a placeholder (a pedigree position, not a person to contact)")
    return via


def _birth_day(prow) -> dt.date | None:
    """The earliest day the person can have been alive (a year-only birth date: 1 January)."""
    if prow.birth_date is None:
        return None
    b = prow.birth_date
    return dt.date(b.year, 1, 1) if prow.birth_date_precision == "year" else b


def _user(form: str, user: str | None) -> str:
    from tracker.errors import UserError

    try:
        return audit.actor(user)
    except UserError as exc:
        raise _refuse(form, "user", str(exc).split(": ", 1)[-1]) from None


def _iso(d: dt.date | None) -> str | None:
    return d.isoformat() if d is not None else None


# --------------------------------------------------------------------------- the one place a write finishes


def _after_write(conn: Connection, family: str) -> None:
    """Called once at the end of every write of this module, inside its transaction, with the family
    code written to: the family's stored recall proposals are recomputed here (a wish, a reply or a
    booking changes who is booked and how), in the same transaction."""
    from tracker.services.proposals import refresh_families

    refresh_families(conn, [family])


def _audit(conn: Connection, *, table: str, row_id: int, prow, what: str, after: dict, user: str,
           before: dict | None = None, action: str = "record") -> int:  # fmt: skip
    return audit.record(conn, action=action, table=table, row_id=row_id, family=prow.family, person=prow.code,
                        what=what, before=before, after=after, user=user)  # fmt: skip


# --------------------------------------------------------------------------- contacts


def record_contact(conn: Connection, person: str, *, on, channel: str, by: str | None, outcome: str,
                   notes: str | None = None, later=None, via: str | None = None, user: str | None,
                   today: dt.date | None = None) -> dict:  # fmt: skip
    """Append one event to the person's contact log.

    ``on``: the day (ISO text or date; not in the future, not before birth); ``channel``: letter, phone,
    in_clinic, via_family or other; ``by``: the clinic role (nurse, counsellor, cardiologist, other), empty
    when the information went through a family member (``channel`` via_family, ``via`` that member's
    code); ``outcome``: informed, no_answer, wrong_address, declined, contact_later or moved_away;
    ``later``: the day the person asked to be contacted (contact_later only, after ``on``).
    """
    form = "contact"
    today = today or dt.date.today()
    who = _user(form, user)
    prow = _person(conn, form, "person", person)
    birth = _birth_day(prow)
    day = _date(form, "on", on, today=today, not_before=birth, before_what="the date of birth")
    if prow.vital_status == "deceased" and prow.death_date is not None and day > prow.death_date:
        raise _refuse(form, "on", f"{day.isoformat()} is after the recorded death ({prow.death_date.isoformat()})")
    channel = _choice(form, "channel", channel, V.CONTACT_CHANNELS)
    outcome = _choice(form, "outcome", outcome, V.CONTACT_OUTCOMES_ENTERED)
    via_row = None
    if channel == "via_family":
        if by is not None and str(by).strip():
            raise _refuse(form, "by", "leave empty when the information went through a family member (give --via)")
        if via is None or not str(via).strip():
            raise _refuse(form, "via", "is empty: name the family member who passed the information on")
        via_row = _via(conn, form, "via", via, prow)
        role = None
    else:
        role = _choice(form, "by", by, V.CONTACT_ROLES)
        if via is not None and str(via).strip():
            raise _refuse(form, "via", "only with channel via_family (the family member who passed it on)")
    later_day = None
    if outcome == "contact_later":
        later_day = _date(form, "later", later, today=today, future=True)
        if later_day <= day:
            raise _refuse(form, "later", f"{later_day.isoformat()} is not after the contact ({day.isoformat()})")
    elif later is not None and str(later).strip():
        raise _refuse(form, "later", "only with outcome contact_later")
    notes = _text(form, "notes", notes)
    event_id = append_event(conn, person_id=prow.id, event_date=day, channel=channel, outcome=outcome, by_role=role,
                            via_person_id=via_row.id if via_row else None, later_date=later_day, notes=notes,
                            user=who)  # fmt: skip
    record = {"id": event_id, "person": prow.code, "family": prow.family, "event_date": day.isoformat(),
              "channel": channel, "by_role": role, "via": via_row.code if via_row else None, "outcome": outcome,
              "later_date": _iso(later_day), "notes": notes, "source": "entered", "entered_by": who}  # fmt: skip
    audit_id = _audit(conn, table="contact_event", row_id=event_id, prow=prow, user=who,
                      what=f"contact with {prow.code} on {day.isoformat()}: {channel}, {outcome}",
                      after={k: v for k, v in record.items() if k not in ("id", "person", "family")})  # fmt: skip
    _after_write(conn, prow.family)
    return {**record, "audit_id": audit_id}


# --------------------------------------------------------------------------- bookings


def record_booking(conn: Connection, person: str, *, on, purpose: str, user: str | None, notes: str | None = None,
                   today: dt.date | None = None, history: bool = False) -> dict:  # fmt: skip
    """Book a visit for ``on`` (today or later, at most MAX_YEARS_AHEAD years ahead) with its purpose.
    ``history``: an imported past booking (the person's wish and vital status today do not apply)."""
    form = "booking"
    today = today or dt.date.today()
    who = _user(form, user)
    prow = _person(conn, form, "person", person)
    if prow.vital_status == "deceased" and not history:
        raise _refuse(form, "person", f"{prow.code} is recorded as deceased")
    if prow.is_placeholder:
        raise _refuse(form, "person", f"{prow.code} is a placeholder (a pedigree position, not a person)")
    day = _date(form, "on", on, today=today, future=True, not_before=today, before_what="today")
    birth = _birth_day(prow)
    if birth is not None and day < birth:  # an imported past booking: never before the person was born
        raise _refuse(form, "on", f"{day.isoformat()} is before the date of birth ({birth.isoformat()})")
    purpose = _text(form, "purpose", purpose, required=True, limit=Booking.__table__.c.purpose.type.length)
    notes = _text(form, "notes", notes)
    if not history:
        _refuse_if_no_contact(conn, form, prow, today)
    booking_id = int(conn.execute(insert(Booking).returning(Booking.id), dict(
        person_id=prow.id, visit_date=day, purpose=purpose, notes=notes, entered_at=audit.now_utc(),
        entered_by=who)).scalar_one())  # fmt: skip
    record = {"id": booking_id, "person": prow.code, "family": prow.family, "visit_date": day.isoformat(),
              "purpose": purpose, "notes": notes, "entered_by": who, "cancelled_date": None}  # fmt: skip
    audit_id = _audit(conn, table="booking", row_id=booking_id, prow=prow, user=who,
                      what=f"visit of {prow.code} booked for {day.isoformat()}: {purpose}",
                      after={"visit_date": day.isoformat(), "purpose": purpose, "notes": notes})  # fmt: skip
    _after_write(conn, prow.family)
    return {**record, "audit_id": audit_id}


def _refuse_if_no_contact(conn: Connection, form: str, prow, today: dt.date) -> None:
    """A relative who asked for no further contact is not booked."""
    state = _state(conn, prow)
    if state.must_not_approach:
        raise _refuse(form, "person", f"{prow.code} asked for no further contact (since "
                      f"{_iso(state.wish_date)}); end the wish first if they asked to be seen")  # fmt: skip


def cancel_booking(conn: Connection, person: str, *, visit_date, on=None, user: str | None,
                   today: dt.date | None = None) -> dict:  # fmt: skip
    """Cancel the open booking of ``person`` for ``visit_date`` (kept, marked cancelled ``on``, default today)."""
    form = "booking"
    today = today or dt.date.today()
    who = _user(form, user)
    prow = _person(conn, form, "person", person)
    visit = _date(form, "visit_date", visit_date, today=today, future=True)
    cancelled = _date(form, "on", on, today=today, required=False) or today
    bid = conn.execute(select(Booking.id).where(Booking.person_id == prow.id, Booking.visit_date == visit,
                                                Booking.cancelled_date.is_(None)).order_by(Booking.id)).scalar()  # fmt: skip
    if bid is None:
        raise _refuse(form, "visit_date", f"{prow.code} has no open booking on {visit.isoformat()}")
    conn.execute(update(Booking).where(Booking.id == bid).values(cancelled_date=cancelled, cancelled_by=who))
    audit_id = _audit(conn, table="booking", row_id=bid, prow=prow, user=who, action="edit",
                      what=f"booking of {prow.code} for {visit.isoformat()} cancelled",
                      before={"cancelled_date": None}, after={"cancelled_date": cancelled.isoformat()})  # fmt: skip
    _after_write(conn, prow.family)
    return {"id": bid, "person": prow.code, "family": prow.family, "visit_date": visit.isoformat(),
            "cancelled_date": cancelled.isoformat(), "cancelled_by": who, "audit_id": audit_id}  # fmt: skip


# --------------------------------------------------------------------------- wishes


def record_wish(conn: Connection, person: str, *, wish: str, on, via: str | None = None, notes: str | None = None,
                user: str | None, today: dt.date | None = None) -> dict:  # fmt: skip
    """Record a relative's wish about contact: ``no_further_contact``, or ``only_via_family_member`` with
    ``via`` that member's code.  A person has at most one open wish: end it first (:func:`end_wish`)."""
    form = "wish"
    today = today or dt.date.today()
    who = _user(form, user)
    prow = _person(conn, form, "person", person)
    wish = _choice(form, "wish", wish, V.CONTACT_WISHES)
    day = _date(form, "on", on, today=today, not_before=_birth_day(prow), before_what="the date of birth")
    via_row = None
    if wish == "only_via_family_member":
        if via is None or not str(via).strip():
            raise _refuse(form, "via", "is empty: name the family member contact goes through")
        via_row = _via(conn, form, "via", via, prow)
    elif via is not None and str(via).strip():
        raise _refuse(form, "via", "only with wish only_via_family_member")
    notes = _text(form, "notes", notes)
    open_wish = conn.execute(select(ContactWish.wish, ContactWish.recorded_date).where(
        ContactWish.person_id == prow.id, ContactWish.ended_date.is_(None))).first()  # fmt: skip
    if open_wish is not None:
        raise _refuse(form, "wish", f"{prow.code} has an open wish ({open_wish.wish}, recorded "
                      f"{open_wish.recorded_date.isoformat()}); end it first")  # fmt: skip
    wid = int(conn.execute(insert(ContactWish).returning(ContactWish.id), dict(
        person_id=prow.id, wish=wish, via_person_id=via_row.id if via_row else None, recorded_date=day,
        notes=notes, entered_at=audit.now_utc(), entered_by=who)).scalar_one())  # fmt: skip
    record = {"id": wid, "person": prow.code, "family": prow.family, "wish": wish,
              "via": via_row.code if via_row else None, "recorded_date": day.isoformat(), "notes": notes,
              "ended_date": None, "entered_by": who}  # fmt: skip
    audit_id = _audit(conn, table="contact_wish", row_id=wid, prow=prow, user=who,
                      what=f"wish of {prow.code} recorded on {day.isoformat()}: {wish}",
                      after={"wish": wish, "via": record["via"], "recorded_date": day.isoformat(), "notes": notes})
    _after_write(conn, prow.family)
    return {**record, "audit_id": audit_id}


def end_wish(conn: Connection, person: str, *, on, user: str | None, notes: str | None = None,
             today: dt.date | None = None) -> dict:  # fmt: skip
    """End the person's open wish on ``on`` (kept in the history, never deleted)."""
    form = "wish"
    today = today or dt.date.today()
    who = _user(form, user)
    prow = _person(conn, form, "person", person)
    row = conn.execute(select(ContactWish.id, ContactWish.wish, ContactWish.recorded_date, ContactWish.notes).where(
        ContactWish.person_id == prow.id, ContactWish.ended_date.is_(None))).first()  # fmt: skip
    if row is None:
        raise _refuse(form, "person", f"{prow.code} has no open wish")
    day = _date(form, "on", on, today=today, not_before=row.recorded_date, before_what="the wish was recorded")
    notes = _text(form, "notes", notes)
    values = {"ended_date": day, "ended_by": who}
    if notes:
        values["notes"] = f"{row.notes}\n{notes}" if row.notes else notes
    conn.execute(update(ContactWish).where(ContactWish.id == row.id).values(**values))
    audit_id = _audit(conn, table="contact_wish", row_id=row.id, prow=prow, user=who, action="edit",
                      what=f"wish of {prow.code} ({row.wish}) ended on {day.isoformat()}",
                      before={"ended_date": None, "notes": row.notes},
                      after={"ended_date": day.isoformat(), "notes": values.get("notes", row.notes)})  # fmt: skip
    _after_write(conn, prow.family)
    return {"id": row.id, "person": prow.code, "family": prow.family, "wish": row.wish,
            "recorded_date": row.recorded_date.isoformat(), "ended_date": day.isoformat(), "ended_by": who,
            "audit_id": audit_id}  # fmt: skip


# --------------------------------------------------------------------------- letters


def record_letter_sent(conn: Connection, person: str, *, kind: str, template: str, template_version: str, on,
                       to: str = "person", via: str | None = None, notes: str | None = None, user: str | None,
                       today: dt.date | None = None, history: bool = False) -> dict:  # fmt: skip
    """Record a letter the user confirms was sent (never on mere generation).

    ``to``: ``person``, or ``via_family`` with ``via`` the family member it was sent through.  A letter to
    a person who asked for no further contact is refused; to a person who asked for contact only through
    a family member, it must go through that member."""
    form = "letter"
    today = today or dt.date.today()
    who = _user(form, user)
    prow = _person(conn, form, "person", person)
    kind = _choice(form, "kind", kind, V.LETTER_KINDS)
    template = _text(form, "template", template, required=True, limit=LetterSent.__table__.c.template.type.length)
    version = _text(form, "template_version", template_version, required=True,
                    limit=LetterSent.__table__.c.template_version.type.length)  # fmt: skip
    day = _date(form, "on", on, today=today, not_before=_birth_day(prow), before_what="the date of birth")
    to = _choice(form, "to", to, V.LETTER_SENT_TO)
    via_row = None
    if to == "via_family":
        if via is None or not str(via).strip():
            raise _refuse(form, "via", "is empty: name the family member the letter was sent through")
        via_row = _via(conn, form, "via", via, prow)
    elif via is not None and str(via).strip():
        raise _refuse(form, "via", "only when the letter went through a family member (to via_family)")
    notes = _text(form, "notes", notes)
    state = _state(conn, prow)
    if state.must_not_approach and not history:
        raise _refuse(form, "person", f"{prow.code} asked for no further contact (since {_iso(state.wish_date)})")
    if state.wish == "only_via_family_member" and not history and (via_row is None or via_row.code != state.wish_via):
        raise _refuse(form, "via", f"{prow.code} asked to be contacted only through {state.wish_via}")
    lid = int(conn.execute(insert(LetterSent).returning(LetterSent.id), dict(
        person_id=prow.id, kind=kind, template=template, template_version=version, sent_date=day, sent_to=to,
        via_person_id=via_row.id if via_row else None, notes=notes, entered_at=audit.now_utc(),
        entered_by=who)).scalar_one())  # fmt: skip
    record = {"id": lid, "person": prow.code, "family": prow.family, "kind": kind, "template": template,
              "template_version": version, "sent_date": day.isoformat(), "sent_to": to,
              "via": via_row.code if via_row else None, "reply_date": None, "notes": notes,
              "entered_by": who}  # fmt: skip
    audit_id = _audit(conn, table="letter_sent", row_id=lid, prow=prow, user=who,
                      what=f"{kind} letter to {prow.code} sent on {day.isoformat()}",
                      after={k: v for k, v in record.items() if k not in ("id", "person", "family")})  # fmt: skip
    _after_write(conn, prow.family)
    return {**record, "audit_id": audit_id}


def record_letter_reply(conn: Connection, person: str, *, sent_date, kind: str, on, user: str | None,
                        today: dt.date | None = None) -> dict:  # fmt: skip
    """Record the day a reply to a sent letter came (the letter found by person, kind and sent date)."""
    form = "letter"
    today = today or dt.date.today()
    who = _user(form, user)
    prow = _person(conn, form, "person", person)
    kind = _choice(form, "kind", kind, V.LETTER_KINDS)
    sent = _date(form, "sent_date", sent_date, today=today)
    row = conn.execute(select(LetterSent.id, LetterSent.reply_date).where(
        LetterSent.person_id == prow.id, LetterSent.kind == kind, LetterSent.sent_date == sent)
        .order_by(LetterSent.id.desc())).first()  # fmt: skip
    if row is None:
        raise _refuse(form, "sent_date", f"no {kind} letter to {prow.code} recorded as sent on {sent.isoformat()}")
    if row.reply_date is not None:
        raise _refuse(form, "on", f"a reply was already recorded on {row.reply_date.isoformat()}")
    day = _date(form, "on", on, today=today, not_before=sent, before_what="the letter was sent")
    conn.execute(update(LetterSent).where(LetterSent.id == row.id).values(reply_date=day))
    audit_id = _audit(conn, table="letter_sent", row_id=row.id, prow=prow, user=who, action="edit",
                      what=f"reply to the {kind} letter of {sent.isoformat()} from {prow.code} on {day.isoformat()}",
                      before={"reply_date": None}, after={"reply_date": day.isoformat()})  # fmt: skip
    _after_write(conn, prow.family)
    return {"id": row.id, "person": prow.code, "family": prow.family, "kind": kind, "sent_date": sent.isoformat(),
            "reply_date": day.isoformat(), "audit_id": audit_id}  # fmt: skip


# --------------------------------------------------------------------------- results from other centres


def _family_variant(conn: Connection, form: str, field: str, prow, variant: str | None, *, required: bool):
    """The family's variant ``transcript:c.change`` (or its only variant when not given)."""
    rows = conn.execute(select(Variant.id, Variant.transcript, Variant.hgvs_c)
                        .where(Variant.family_id == prow.family_id)).all()  # fmt: skip
    if variant is None or not str(variant).strip():
        if len(rows) == 1:
            return rows[0]
        if required:
            raise _refuse(form, field, "is empty: give the family's variant as transcript:c.change"
                          if rows else f"family {prow.family} has no variant on record")  # fmt: skip
        return None
    for r in rows:
        if f"{r.transcript}:{r.hgvs_c}" == str(variant).strip():
            return r
    raise _refuse(form, field, f"{str(variant).strip()[:60]!r} is not a variant of family {prow.family}")


def record_external_result(conn: Connection, person: str, *, kind: str, on, centre: str, result: str,
                           variant: str | None = None, document_ref: str | None = None, notes: str | None = None,
                           user: str | None, today: dt.date | None = None) -> dict:  # fmt: skip
    """Record a genetic test (``kind`` genetic_test; ``result`` carrier, non_carrier, inconclusive or
    no_variant_found; ``variant`` the family's variant tested) or a screening (``kind`` screening;
    ``result`` affected, unaffected or uncertain) done at another centre."""
    form = "external result"
    today = today or dt.date.today()
    who = _user(form, user)
    prow = _person(conn, form, "person", person)
    kind = _choice(form, "kind", kind, V.EXTERNAL_RESULT_KINDS)
    day = _date(form, "on", on, today=today, not_before=_birth_day(prow), before_what="the date of birth")
    centre = _text(form, "centre", centre, required=True, limit=ExternalResult.__table__.c.centre.type.length)
    vrow = None
    if kind == "genetic_test":
        result = _choice(form, "result", result, V.TEST_RESULTS)
        if result in ("carrier", "non_carrier"):
            vrow = _family_variant(conn, form, "variant", prow, variant, required=True)
        elif variant is not None and str(variant).strip():
            vrow = _family_variant(conn, form, "variant", prow, variant, required=False)
    else:
        result = _choice(form, "result", result, V.EXTERNAL_PHENOTYPES)
        if variant is not None and str(variant).strip():
            raise _refuse(form, "variant", "only for a genetic test")
    document_ref = _text(form, "document_ref", document_ref,
                         limit=ExternalResult.__table__.c.document_ref.type.length)  # fmt: skip
    notes = _text(form, "notes", notes)
    if conn.execute(select(ExternalResult.id).where(ExternalResult.person_id == prow.id,
                    ExternalResult.kind == kind, ExternalResult.result_date == day)).first():  # fmt: skip
        raise _refuse(form, "on", f"{prow.code} already has a {kind} result from another centre on {day.isoformat()}")
    if vrow is not None and result in ("carrier", "non_carrier"):
        # The same person cannot be both carrier and non-carrier of the variant (local or external).
        other = "non_carrier" if result == "carrier" else "carrier"
        clash = conn.execute(select(GeneticResult.test_date).where(
            GeneticResult.person_id == prow.id, GeneticResult.variant_id == vrow.id,
            GeneticResult.result == other)).first() or conn.execute(select(ExternalResult.result_date).where(
            ExternalResult.person_id == prow.id, ExternalResult.variant_id == vrow.id,
            ExternalResult.result == other)).first()  # fmt: skip
        if clash:
            raise _refuse(form, "result", f"{prow.code} has a {other} result for this variant on "
                          f"{clash[0].isoformat()}; check both reports")  # fmt: skip
    rid = int(conn.execute(insert(ExternalResult).returning(ExternalResult.id), dict(
        person_id=prow.id, kind=kind, result_date=day, centre=centre, variant_id=vrow.id if vrow else None,
        result=result, document_ref=document_ref, notes=notes, entered_at=audit.now_utc(),
        entered_by=who)).scalar_one())  # fmt: skip
    record = {"id": rid, "person": prow.code, "family": prow.family, "kind": kind, "result_date": day.isoformat(),
              "centre": centre, "variant": f"{vrow.transcript}:{vrow.hgvs_c}" if vrow else None, "result": result,
              "document_ref": document_ref, "notes": notes, "external": True, "entered_by": who}  # fmt: skip
    audit_id = _audit(conn, table="external_result", row_id=rid, prow=prow, user=who,
                      what=f"{kind} result of {prow.code} from another centre ({day.isoformat()}): {result}",
                      after={k: v for k, v in record.items() if k not in ("id", "person", "family", "external")})
    _after_write(conn, prow.family)
    return {**record, "audit_id": audit_id}


# --------------------------------------------------------------------------- discharge


def _class_on(conn: Connection, variant_id: int, day: dt.date):
    return conn.execute(select(VariantClassification.acmg_class, VariantClassification.classified_on).where(
        VariantClassification.variant_id == variant_id, VariantClassification.classified_on <= day)
        .order_by(VariantClassification.classified_on.desc())).first()  # fmt: skip


def record_discharge(conn: Connection, person: str, *, on, advice: str, variant: str | None = None,
                     notes: str | None = None, user: str | None, today: dt.date | None = None) -> dict:  # fmt: skip
    """Discharge a relative who tested negative for the family's P/LP variant from screening.

    Records the variant's class on ``on`` (the class the discharge relied on, with its date) and the
    advice given (e.g. to come back if symptoms appear or the variant is reclassified).  Refused unless
    the person has a non-carrier result for that variant (here or at another centre), on or before ``on``,
    and the variant is pathogenic or likely pathogenic on that day."""
    form = "discharge"
    today = today or dt.date.today()
    who = _user(form, user)
    prow = _person(conn, form, "person", person)
    day = _date(form, "on", on, today=today, not_before=_birth_day(prow), before_what="the date of birth")
    vrow = _family_variant(conn, form, "variant", prow, variant, required=True)
    advice = _text(form, "advice", advice, required=True)
    notes = _text(form, "notes", notes)
    negative = conn.execute(select(GeneticResult.test_date).where(
        GeneticResult.person_id == prow.id, GeneticResult.variant_id == vrow.id,
        GeneticResult.result == "non_carrier", GeneticResult.test_date <= day)).first() or conn.execute(
        select(ExternalResult.result_date).where(
            ExternalResult.person_id == prow.id, ExternalResult.variant_id == vrow.id,
            ExternalResult.result == "non_carrier", ExternalResult.result_date <= day)).first()  # fmt: skip
    if negative is None:
        raise _refuse(form, "person", f"{prow.code} has no non-carrier result for {vrow.transcript}:{vrow.hgvs_c} "
                      f"on or before {day.isoformat()}; only a variant-negative relative is discharged")  # fmt: skip
    cls = _class_on(conn, vrow.id, day)
    if cls is None or cls.acmg_class not in V.ACTIONABLE_CLASSES:
        shown = cls.acmg_class if cls else "not classified"
        raise _refuse(form, "variant", f"the variant is {shown} on {day.isoformat()}; a negative predictive "
                      "result releases from screening only for a pathogenic or likely pathogenic variant")  # fmt: skip
    if conn.execute(select(Discharge.id).where(Discharge.person_id == prow.id,
                                               Discharge.discharge_date == day)).first():  # fmt: skip
        raise _refuse(form, "on", f"{prow.code} already has a discharge recorded on {day.isoformat()}")
    did = int(conn.execute(insert(Discharge).returning(Discharge.id), dict(
        person_id=prow.id, discharge_date=day, variant_id=vrow.id, acmg_class=cls.acmg_class,
        classified_on=cls.classified_on, advice=advice, notes=notes, entered_at=audit.now_utc(),
        entered_by=who)).scalar_one())  # fmt: skip
    record = {"id": did, "person": prow.code, "family": prow.family, "discharge_date": day.isoformat(),
              "variant": f"{vrow.transcript}:{vrow.hgvs_c}", "acmg_class": cls.acmg_class,
              "classified_on": cls.classified_on.isoformat(), "advice": advice, "notes": notes,
              "entered_by": who}  # fmt: skip
    audit_id = _audit(conn, table="discharge", row_id=did, prow=prow, user=who,
                      what=f"{prow.code} discharged from screening on {day.isoformat()} "
                           f"(variant {cls.acmg_class} since {cls.classified_on.isoformat()})",
                      after={k: v for k, v in record.items() if k not in ("id", "person", "family")})  # fmt: skip
    _after_write(conn, prow.family)
    return {**record, "audit_id": audit_id}


# --------------------------------------------------------------------------- reading


def _state(conn: Connection, prow):
    from tracker.domain.contacts import derive_state
    from tracker.store import repository as repo

    scope = repo.Scope.families([prow.family])
    events = [r for r in repo._contact_rows(conn, scope) if r["person"] == prow.code]
    wishes = [r for r in repo._wish_rows(conn, scope) if r["person"] == prow.code]
    return derive_state(prow.code, events, wishes)


def contact_state(conn: Connection, person: str) -> dict:
    """The person's current contact state derived from the log, with its date (``status_date``: the
    newest event's day), the open wish, and the history (oldest first)."""
    prow = _person(conn, "contact", "person", person)
    state = _state(conn, prow)
    out = state.as_dict()
    out["family"] = prow.family
    out["history"] = [{"event_date": _iso(e.get("event_date")), "channel": e.get("channel"),
                       "by_role": e.get("by_role"), "via": e.get("via"), "outcome": e.get("outcome"),
                       "later_date": _iso(e.get("later_date")), "notes": e.get("notes"), "source": e.get("source"),
                       "entered_by": e.get("entered_by")} for e in state.history]  # fmt: skip
    return out


def load_contact_events(conn: Connection, scope: Scope | None = None) -> pd.DataFrame:
    """The contact log of the families in ``scope`` (default: the cohort), oldest first per person."""
    from tracker.store import repository as repo

    return repo.load_contact_events(conn, scope)
