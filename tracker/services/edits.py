"""Correcting stored records, and removing or reinstating people and studies.

Every function here runs inside the caller's write transaction
(:func:`tracker.store.database.writing`), checks the new values exactly as the
importer checks a CSV cell (:func:`tracker.io.columns.parse`), refuses a change
that would make the records inconsistent (a new finding of
:mod:`tracker.domain.consistency`), and appends one audit entry holding the
values before and after.  Nothing is destroyed: a correction keeps the old value
in the audit trail, and a removal is a soft delete (``removed_at`` with who and
why) that hides the row from every reading but keeps it.

Fields are named as in the CSV layouts (docs/data-layouts.md): ``person``,
``study_date``, ``birth_date`` ...; values are given as CSV cells (text).
"""

from __future__ import annotations

import datetime as dt
import re
from dataclasses import dataclass

import pandas as pd
from sqlalchemy import Connection, select, update
from sqlalchemy.exc import IntegrityError

from tracker.domain import consistency as dc
from tracker.domain import units
from tracker.errors import UserError
from tracker.io.columns import partial_to_storage, parse
from tracker.io.layouts import ASSESSMENTS, PEOPLE, STUDIES
from tracker.store import audit
from tracker.store import repository as repo
from tracker.store.models import Assessment, Family, Measure, Measurement, Person, Study

PERSON_FIELDS = {c.name: c for c in PEOPLE.columns if c.name not in ("person", "family")}
STUDY_FIELDS = {c.name: c for c in STUDIES.columns if c.name in ("study_date", "site", "height_cm", "weight_kg")}
ASSESSMENT_FIELDS = {c.name: c for c in ASSESSMENTS.columns if c.name not in ("person", "assessment_date")}
_LINKS = {"mother": "mother_id", "father": "father_id", "twin_of": "twin_of_id"}
_QUOTED = re.compile(r"^(?:'[^']*'|the value) ")
_PERSON_COLUMNS = {
    "placeholder": "is_placeholder",
    "proband": "is_proband",
}


@dataclass(frozen=True)
class Change:
    """What an edit did: the audit entry's id and the fields before and after (CSV form)."""

    audit_id: int
    what: str
    before: dict
    after: dict

    def as_dict(self) -> dict:
        return {"audit_id": self.audit_id, "what": self.what, "before": self.before, "after": self.after}


def _reason(reason: str) -> str:
    reason = (reason or "").strip()
    if not reason:
        raise UserError("--reason: give the reason for the change (it is kept in the audit trail)")
    return reason


def _check_fields(changes: dict[str, str], fields: dict, what: str) -> None:
    """At least one change, and only fields that ``what`` (e.g. "a person") has."""
    if not changes:
        raise UserError("--set: give at least one FIELD=VALUE")
    unknown = sorted(set(changes) - set(fields))
    if unknown:
        raise UserError(f"--set {unknown[0]}: not a field of {what}; one of: {', '.join(fields)}")


def _cell(field: str, column, text: str, today: dt.date):
    """The clean value of one CSV cell, or a one-line error naming the field."""
    parsed = parse(column, pd.Series([text.strip()]), today)
    error = parsed.errors.iloc[0]
    if error is not None:
        # The cell is not repeated: it may be a name or a date of birth (messages carry codes only).
        raise UserError(f"{field}: the value given {_QUOTED.sub('', str(error))}")
    value = parsed.values.iloc[0]
    if isinstance(value, float) and pd.isna(value):
        return None
    return value.item() if hasattr(value, "item") else value


def _person_row(conn: Connection, code: str, *, removed: bool | None = False):
    row = conn.execute(
        select(Person.id, Person.removed_at, Family.code.label("family"), Person.family_id)
        .join(Family, Person.family_id == Family.id)
        .where(Person.code == code)
    ).first()
    if row is None:
        raise UserError(f"person {code}: no such person")
    if removed is False and row.removed_at is not None:
        raise UserError(f"person {code}: was removed on {row.removed_at:%Y-%m-%d}; reinstate it first")
    if removed is True and row.removed_at is None:
        raise UserError(f"person {code}: is not removed")
    return row


def _findings(conn: Connection, family: str) -> set[tuple[str, str, str]]:
    """Consistency findings of one family's records, as comparable tuples."""
    people = repo.load_people(conn)
    people = people[people["family"] == family]
    codes = set(people["person"])
    studies = repo.load_studies(conn, entered=False)
    studies = studies[studies["person"].isin(codes)]
    assessments = repo.load_assessments(conn)
    assessments = assessments[assessments["person"].isin(codes)]
    results = repo.load_genetic_results(conn)
    results = results[results["person"].isin(codes)]
    found = dc.pedigree_findings(people) + dc.date_findings(people, studies, assessments, results)
    found += dc.range_findings(studies, repo.load_measures(conn))
    found += dc.record_findings(people.reset_index(drop=True))
    found += dc.placeholder_findings(people, studies, assessments, results)
    # Every check an import of the edited records would make (row, cross-row and against the store).
    from tracker.services.checks import rule_findings

    found += rule_findings(conn, family)
    return {(f.check, f.where, f.message) for f in found}


def _refuse_new_findings(conn: Connection, family: str, before: set, renamed: tuple[str, str] | None = None) -> None:
    """Refuse the edit if it makes a finding that was not there before (``renamed``: the edited
    record's key (new, old) when the edit changed it, so its old findings are not counted as new)."""
    after = _findings(conn, family)
    if renamed is not None:
        new_key, old_key = renamed
        after = {(c, w.replace(new_key, old_key, 1) if w.startswith(new_key) else w, m) for c, w, m in after}
    # The importer's own messages first (the same words an import of the edited record would give).
    new = sorted(after - before, key=lambda f: (f[0] != "rules", f))
    if new:
        check, where, message = new[0]
        more = f" (and {len(new) - 1} more)" if len(new) > 1 else ""
        raise UserError(f"{where}: {message}{more}; nothing was changed")


def _person_frame_row(conn: Connection, code: str) -> dict:
    people = repo.load_people(conn)
    return people.loc[people["person"] == code].iloc[0].to_dict()


def _plain(v):
    if v is None or (isinstance(v, float) and pd.isna(v)):
        return None
    return v.item() if hasattr(v, "item") else v


# --------------------------------------------------------------------------- people


def edit_person(conn: Connection, code: str, changes: dict[str, str], *, reason: str, user: str | None = None,
                today: dt.date | None = None) -> Change:  # fmt: skip
    """Set fields of one person (CSV field names and cells); returns the audited change."""
    reason = _reason(reason)
    today = today or dt.date.today()
    _check_fields(changes, PERSON_FIELDS, "a person")
    row = _person_row(conn, code)
    family = row.family
    checks_before = _findings(conn, family)
    old = _person_frame_row(conn, code)
    values: dict = {}
    contact: dict = {}
    for field, text in changes.items():
        value = _cell(field, PERSON_FIELDS[field], text, today)
        if field in ("birth_date", "death_date", "icd_date", "pacemaker_date"):
            stored, precision = partial_to_storage(value)
            values[field] = stored
            values[field + "_precision"] = precision
        elif field in _LINKS:
            values[_LINKS[field]] = _linked_person(conn, field, value, code, row.family_id)
        elif field in ("contact_status", "contact_status_date"):
            contact[field] = value
        elif field in ("death_age", "diagnosis_age"):  # whole years
            values[field] = None if value is None else int(value)
        else:
            values[_PERSON_COLUMNS.get(field, field)] = value
    if values.get("external_id") is not None and conn.execute(
        select(Person.code).where(Person.external_id == values["external_id"], Person.id != row.id)
    ).first():
        raise UserError("external_id: belongs to another person in the database")
    if values:
        conn.execute(update(Person).where(Person.id == row.id).values(**values))
    if contact:
        _log_contact_status(conn, row.id, code, contact, reason, user, today)
    _refuse_new_findings(conn, family, checks_before)
    new = _person_frame_row(conn, code)
    before = {f: _plain(old[f]) for f in changes}
    after = {f: _plain(new[f]) for f in changes}
    what = f"person {code}: " + ", ".join(f"{f} changed (private: value not shown)" if PERSON_FIELDS[f].private
                                          else f"{f} {before[f]!r} -> {after[f]!r}" for f in changes)  # fmt: skip
    _refresh(conn, family)
    entry = audit.record(conn, action="edit", table="person", row_id=row.id, family=family, person=code,
                         what=f"corrected {', '.join(changes)} of person {code}", before=before, after=after,
                         reason=reason, user=user)  # fmt: skip
    return Change(entry, what, before, after)


CONTACT_LOG_HINT = "record contacts with `tracker contact add` (the contact log keeps every one)"


def _log_contact_status(conn: Connection, person_id: int, code: str, contact: dict, reason: str,
                        user: str | None, today: dt.date) -> None:  # fmt: skip
    """``--set contact_status=...`` appends an event to the contact log (revision 0012): the history is
    kept, never overwritten.  The date is ``contact_status_date`` if given, else today."""
    from tracker.store.contact_log import STATUS_OUTCOME, append_event

    status = contact.get("contact_status")
    if status is None:
        raise UserError("contact_status: give the new status (it cannot be cleared: the contact log keeps "
                        f"its history); {CONTACT_LOG_HINT}")  # fmt: skip
    day = contact.get("contact_status_date")
    day = dt.date.fromisoformat(day) if day else today
    append_event(conn, person_id=person_id, event_date=day, channel="other", outcome=STATUS_OUTCOME[status],
                 notes=f"recorded with tracker edit person: {reason}", user=user)  # fmt: skip


def _linked_person(conn: Connection, field: str, value: str | None, code: str, family_id: int) -> int | None:
    if value is None:
        return None
    if value == code:
        raise UserError(f"{field}: a person cannot be their own {field.replace('_', ' ')}")
    other = conn.execute(
        select(Person.id, Person.family_id, Person.removed_at).where(Person.code == value)
    ).first()
    if other is None or other.removed_at is not None:
        raise UserError(f"{field}: {value} is not a person in the store")
    if other.family_id != family_id:
        raise UserError(f"{field}: {value} belongs to another family")
    return other.id


# --------------------------------------------------------------------------- studies and values


def _study_row(conn: Connection, person: str, study_date: str, modality: str, *, removed: bool | None = False):
    prow = _person_row(conn, person)
    try:
        day = dt.date.fromisoformat(study_date)
    except ValueError:
        raise UserError(f"study_date: {study_date!r} is not an ISO 8601 date (YYYY-MM-DD)") from None
    row = conn.execute(
        select(Study.id, Study.removed_at).where(
            Study.person_id == prow.id, Study.study_date == day, Study.modality == modality.lower()
        )
    ).first()
    label = f"{person} {study_date} {modality.lower()}"
    if row is None:
        raise UserError(f"study {label}: no such study")
    if removed is False and row.removed_at is not None:
        raise UserError(f"study {label}: was removed on {row.removed_at:%Y-%m-%d}; reinstate it first")
    if removed is True and row.removed_at is None:
        raise UserError(f"study {label}: is not removed")
    return prow, row, label


def _study_fields(conn: Connection, study_id: int) -> dict:
    r = conn.execute(select(Study.study_date, Study.site, Study.height_cm, Study.weight_kg)
                     .where(Study.id == study_id)).one()  # fmt: skip
    return {"study_date": r.study_date.isoformat(), "site": r.site, "height_cm": r.height_cm, "weight_kg": r.weight_kg}


def edit_study(conn: Connection, person: str, study_date: str, modality: str, changes: dict[str, str], *,
               reason: str, user: str | None = None, today: dt.date | None = None) -> Change:  # fmt: skip
    """Set the date, site, height or weight of one study; returns the audited change."""
    reason = _reason(reason)
    today = today or dt.date.today()
    _check_fields(changes, STUDY_FIELDS, "a study")
    prow, srow, label = _study_row(conn, person, study_date, modality)
    checks_before = _findings(conn, prow.family)
    old = _study_fields(conn, srow.id)
    values = {}
    for field, text in changes.items():
        value = _cell(field, STUDY_FIELDS[field], text, today)
        if field == "study_date":
            if value is None:
                raise UserError("study_date: is empty (a value is required)")
            value = dt.date.fromisoformat(value)
        values[field] = value
    try:
        with conn.begin_nested():
            conn.execute(update(Study).where(Study.id == srow.id).values(**values))
    except IntegrityError:
        raise UserError(f"study {label}: another {modality.lower()} study of {person} is stored on "
                        f"{changes.get('study_date')}; nothing was changed") from None  # fmt: skip
    renamed = None
    if "study_date" in values:
        renamed = (f"study {person} {values['study_date'].isoformat()} ", f"study {person} {study_date} ")
    _refuse_new_findings(conn, prow.family, checks_before, renamed)
    new = _study_fields(conn, srow.id)
    before = {f: old[f] for f in changes}
    after = {f: new[f] for f in changes}
    _refresh(conn, prow.family)
    entry = audit.record(conn, action="edit", table="study", row_id=srow.id, family=prow.family, person=person,
                         what=f"corrected {', '.join(changes)} of study {label}", before=before, after=after,
                         reason=reason, user=user)  # fmt: skip
    return Change(entry, f"study {label}: " + ", ".join(f"{f} {before[f]!r} -> {after[f]!r}" for f in changes),
                  before, after)  # fmt: skip


def edit_value(conn: Connection, person: str, study_date: str, modality: str, measure: str, value: str,
               unit: str, *, reason: str, user: str | None = None) -> Change:  # fmt: skip
    """Correct one stored value of a study (value and unit as entered; converted like an import)."""
    reason = _reason(reason)
    prow, srow, label = _study_row(conn, person, study_date, modality)
    cat = conn.execute(select(Measure.unit, Measure.plausible_min, Measure.plausible_max, Measure.derived)
                       .where(Measure.code == measure)).first()  # fmt: skip
    if cat is None:
        raise UserError(f"measure: {measure!r} is not in the measure catalogue (see `tracker measures`)")
    if cat.derived:
        raise UserError(f"measure: {measure} is computed by the tool from other values; correct those instead")
    m = conn.execute(select(Measurement.id, Measurement.entered_value, Measurement.entered_unit)
                     .where(Measurement.study_id == srow.id, Measurement.measure_code == measure)).first()  # fmt: skip
    if m is None:
        raise UserError(f"study {label}: holds no value of {measure} (add new values by importing a studies file)")
    number = _cell("value", STUDIES.columns[STUDIES.names.index("value")], value, dt.date.today())
    if number is None:
        raise UserError("value: is empty (a value is required)")
    entered_unit = units.normalise_unit(unit)
    if entered_unit is None:
        raise UserError(f"unit: {unit!r} is not a known unit")
    factor = units.conversion_factor(cat.unit, entered_unit)
    if factor is None:
        raise UserError(f"unit: {entered_unit} cannot be converted to {cat.unit}, the unit of {measure}")
    stored = number * factor
    if not cat.plausible_min <= stored <= cat.plausible_max:
        raise UserError(f"value: {number:g} {entered_unit} is outside the plausible range of {measure} "
                        f"({cat.plausible_min:g} to {cat.plausible_max:g} {cat.unit})")  # fmt: skip
    checks_before = _findings(conn, prow.family)
    conn.execute(update(Measurement).where(Measurement.id == m.id).values(
        value=stored, unit=cat.unit, entered_value=number, entered_unit=entered_unit))
    _refuse_new_findings(conn, prow.family, checks_before)
    before = {"measure": measure, "value": m.entered_value, "unit": m.entered_unit}
    after = {"measure": measure, "value": number, "unit": entered_unit}
    _refresh(conn, prow.family)
    entry = audit.record(conn, action="edit", table="measurement", row_id=m.id, family=prow.family, person=person,
                         what=f"corrected {measure} of study {label}", before=before, after=after,
                         reason=reason, user=user)  # fmt: skip
    return Change(entry, f"study {label}: {measure} {m.entered_value:g} {m.entered_unit} -> {number:g} {entered_unit}",
                  before, after)  # fmt: skip


# --------------------------------------------------------------------------- assessments


def _assessment_fields(conn: Connection, assessment_id: int) -> dict:
    row = conn.execute(select(*(getattr(Assessment, f) for f in ASSESSMENT_FIELDS))
                       .where(Assessment.id == assessment_id)).one()  # fmt: skip
    return dict(zip(ASSESSMENT_FIELDS, row))


def edit_assessment(conn: Connection, person: str, assessment_date: str, changes: dict[str, str], *,
                    reason: str, user: str | None = None, today: dt.date | None = None) -> Change:  # fmt: skip
    """Set fields of one assessment (status, symptoms, flags, the HCM Risk-SCD answers, notes)."""
    reason = _reason(reason)
    today = today or dt.date.today()
    _check_fields(changes, ASSESSMENT_FIELDS, "an assessment")
    prow = _person_row(conn, person)
    try:
        day = dt.date.fromisoformat(assessment_date)
    except ValueError:
        raise UserError(f"assessment_date: {assessment_date!r} is not an ISO 8601 date (YYYY-MM-DD)") from None
    aid = conn.execute(select(Assessment.id).where(Assessment.person_id == prow.id,
                                                   Assessment.assessment_date == day)).scalar()  # fmt: skip
    label = f"{person} {assessment_date}"
    if aid is None:
        raise UserError(f"assessment {label}: no such assessment")
    old = _assessment_fields(conn, aid)
    values = {f: _cell(f, ASSESSMENT_FIELDS[f], text, today) for f, text in changes.items()}
    checks_before = _findings(conn, prow.family)
    conn.execute(update(Assessment).where(Assessment.id == aid).values(**values))
    _refuse_new_findings(conn, prow.family, checks_before)
    new = _assessment_fields(conn, aid)
    before = {f: old[f] for f in changes}
    after = {f: new[f] for f in changes}
    _refresh(conn, prow.family)
    entry = audit.record(conn, action="edit", table="assessment", row_id=aid, family=prow.family, person=person,
                         what=f"corrected {', '.join(changes)} of assessment {label}", before=before, after=after,
                         reason=reason, user=user)  # fmt: skip
    return Change(entry, f"assessment {label}: " + ", ".join(f"{f} {before[f]!r} -> {after[f]!r}" for f in changes),
                  before, after)  # fmt: skip


# --------------------------------------------------------------------------- removal


def remove_person(conn: Connection, code: str, *, reason: str, user: str | None = None) -> Change:
    """Hide a person (entered in error, duplicate): kept in the store, left out of every reading."""
    reason = _reason(reason)
    row = _person_row(conn, code)
    linked = conn.execute(
        select(Person.code).where(
            Person.removed_at.is_(None),
            (Person.mother_id == row.id) | (Person.father_id == row.id) | (Person.twin_of_id == row.id),
        ).order_by(Person.code)
    ).scalars().all()
    if linked:
        raise UserError(f"person {code}: is the parent or twin of {', '.join(linked[:5])}; "
                        "correct their mother/father/twin_of first (tracker edit person)")  # fmt: skip
    return _set_removed(conn, Person, row.id, True, reason=reason, user=user, family=row.family, person=code,
                        label=f"person {code}")  # fmt: skip


def reinstate_person(conn: Connection, code: str, *, reason: str, user: str | None = None) -> Change:
    reason = _reason(reason)
    row = _person_row(conn, code, removed=True)
    return _set_removed(conn, Person, row.id, False, reason=reason, user=user, family=row.family, person=code,
                        label=f"person {code}")  # fmt: skip


def remove_study(conn: Connection, person: str, study_date: str, modality: str, *, reason: str,
                 user: str | None = None) -> Change:  # fmt: skip
    """Hide one study and its values (kept in the store, left out of every reading)."""
    reason = _reason(reason)
    prow, srow, label = _study_row(conn, person, study_date, modality)
    return _set_removed(conn, Study, srow.id, True, reason=reason, user=user, family=prow.family, person=person,
                        label=f"study {label}")  # fmt: skip


def reinstate_study(conn: Connection, person: str, study_date: str, modality: str, *, reason: str,
                    user: str | None = None) -> Change:  # fmt: skip
    reason = _reason(reason)
    prow, srow, label = _study_row(conn, person, study_date, modality, removed=True)
    return _set_removed(conn, Study, srow.id, False, reason=reason, user=user, family=prow.family, person=person,
                        label=f"study {label}")  # fmt: skip


def _set_removed(conn, model, row_id: int, remove: bool, *, reason, user, family, person, label) -> Change:
    old = conn.execute(select(model.removed_at, model.removed_by, model.removed_reason).where(model.id == row_id)).one()
    before = {"removed_at": old.removed_at, "removed_by": old.removed_by, "removed_reason": old.removed_reason}
    if remove:
        values = {"removed_at": audit.now_utc(), "removed_by": audit.actor(user), "removed_reason": reason}
    else:
        values = {"removed_at": None, "removed_by": None, "removed_reason": None}
    conn.execute(update(model).where(model.id == row_id).values(**values))
    _refresh(conn, family)
    action = "remove" if remove else "reinstate"
    entry = audit.record(conn, action=action, table=model.__tablename__, row_id=row_id, family=family,
                         person=person, what=f"{'removed' if remove else 'reinstated'} {label}",
                         before=before, after=values, reason=reason, user=user)  # fmt: skip
    return Change(entry, f"{label}: {'removed' if remove else 'reinstated'}", before, values)


def _refresh(conn: Connection, family: str) -> None:
    """Recompute the family's stored recall proposals in the edit's transaction (every write that
    can change a proposal does: :func:`tracker.services.proposals.refresh_families`)."""
    from tracker.services.proposals import refresh_families

    refresh_families(conn, [family])


def removed(conn: Connection) -> pd.DataFrame:
    """Removed people and studies: what, when, by whom and why (for `tracker removed`)."""
    people = conn.execute(
        select(Person.code, Person.removed_at, Person.removed_by, Person.removed_reason)
        .where(Person.removed_at.is_not(None))
    ).all()
    studies = conn.execute(
        select(Person.code, Study.study_date, Study.modality, Study.removed_at, Study.removed_by,
               Study.removed_reason)  # fmt: skip
        .join(Person, Study.person_id == Person.id)
        .where(Study.removed_at.is_not(None))
    ).all()
    rows = [("person", c, at, by, why) for c, at, by, why in people]
    rows += [("study", f"{c} {d.isoformat()} {m}", at, by, why) for c, d, m, at, by, why in studies]
    frame = pd.DataFrame(rows, columns=["kind", "record", "removed_at", "removed_by", "reason"])
    frame["removed_at"] = [t.isoformat() + "Z" for t in frame["removed_at"]]
    return frame.sort_values(["removed_at", "kind", "record"]).reset_index(drop=True)


