"""Data entry one record at a time (the web forms): add a relative, record a study, a genetic result,
an assessment.

Each function builds the rows a CSV import of the layout would receive (text cells, the layout's
column names, docs/data-layouts.md) and runs them through the importer's own parsing, checks
across rows and against the store, comparison with what is stored and writer
(:func:`tracker.io.csv_import.store_rows`): one source of truth for what is accepted.  It runs
inside the caller's write transaction (:func:`tracker.store.database.writing`), appends one
``entry`` audit entry there, and raises :class:`tracker.io.reading.InputRejected` on any problem,
before anything is written.  Each problem's ``column`` is the form field's name: the layout
column, or ``value.CODE`` / ``unit.CODE`` for a study value of measure CODE.

A form may only add: a row whose key is already stored with the same values is refused here
("already recorded"), and one stored with other values is refused by the importer (stored values
are corrected one by one, with history: :mod:`tracker.services.edits`).
"""

from __future__ import annotations

import datetime as dt
import math
from collections.abc import Mapping
from dataclasses import dataclass
from typing import TYPE_CHECKING

from sqlalchemy import Connection

from tracker.io.reading import InputRejected, Problem
from tracker.store import audit

if TYPE_CHECKING:
    import pandas as pd

SOURCE = "form"  # what problems name as their file

#: The fields of each form: the layout's columns a person enters (the others are fixed by the page).
RELATIVE_FIELDS = ("person", "sex_at_birth", "gender_identity", "birth_date", "vital_status", "death_date", "mother",
                   "father", "twin_of", "twin_type", "adoption", "contact_status", "contact_status_date", "notes",
                   "death_cause", "death_age", "diagnosis_age", "proband")  # fmt: skip
STUDY_FIELDS = ("study_date", "modality", "site", "height_cm", "weight_kg")
RESULT_FIELDS = ("test_date", "test_type", "variant", "result", "lab", "report_reference")
ASSESSMENT_FIELDS = ("assessment_date", "affected_status", "symptoms", "competitive_athlete", "pregnant",
                     "hypertension", "notes", "family_history_scd", "nsvt", "unexplained_syncope",
                     "prior_arrest_or_sustained_vt", "metabolic_or_syndromic", "atrial_fibrillation")  # fmt: skip


@dataclass(frozen=True)
class Entered:
    """What a form stored: the audit entry's id, the kind, the family and person, rows added."""

    audit_id: int
    kind: str
    family: str
    person: str
    rows_added: int


def _refuse(column: str | None, message: str) -> None:
    raise InputRejected([Problem(SOURCE, None, column, message)])


def _text(v: object) -> str:
    return "" if v is None else str(v).strip()


def _cells(kind: str, rows: list[dict[str, str]]) -> pd.DataFrame:
    import pandas as pd

    from tracker.io.layouts import LAYOUTS

    names = LAYOUTS[kind].names
    frame = pd.DataFrame([{n: _text(r.get(n)) for n in names} for r in rows], columns=names, dtype=object)
    frame.index = range(1, len(rows) + 1)
    return frame


def _unknown_fields(fields: Mapping[str, str], allowed: tuple[str, ...], extra_prefixes: tuple[str, ...] = ()) -> None:
    for k in fields:
        if k not in allowed and not k.startswith(extra_prefixes):
            _refuse(k, "is not a field of this form")


def _person_family(conn: Connection, person: str, column: str = "person") -> str:
    from tracker.errors import UserError
    from tracker.services.recall import person_family

    try:
        return person_family(conn, person)
    except UserError:
        _refuse(column, f"no person {person} is recorded")
        raise AssertionError  # unreachable


def _store(conn: Connection, kind: str, rows: list[dict[str, str]], *, family: str, person: str, user: str | None,
           today: dt.date | None, field_of=lambda row, col: col) -> Entered:  # fmt: skip
    """Check and write ``rows`` with the importer; the form field name in every problem; one audit entry."""
    from tracker.io import csv_import

    who = audit.actor(user)  # checked before anything is written
    ctx = csv_import.context(conn, today or dt.date.today())
    cells = _cells(kind, rows)
    try:
        checked, added, already = csv_import.store_rows(conn, kind, cells, source=SOURCE, ctx=ctx)
    except InputRejected as exc:
        raise InputRejected([Problem(p.file, None, field_of(p.row, p.column) if p.column else None, p.message)
                             for p in exc.problems]) from None  # fmt: skip
    if added == 0:
        _refuse(None, "already recorded with these values: nothing to add")
    entry = audit.record(conn, action="entry", table=kind, user=who, family=family, person=person,
                         what=f"entered by form: {added} {kind} rows added",
                         after={"rows": [{k: v for k, v in r.items() if v != ""} for r in cells.to_dict("records")],
                                "rows_added": added})  # fmt: skip
    from tracker.services.proposals import refresh_families

    refresh_families(conn, [family])  # the stored recall proposals, in the same transaction
    return Entered(entry, kind, family, person, added)


# --------------------------------------------------------------------------- the four forms


def add_relative(conn: Connection, family: str, fields: Mapping[str, str], *, user: str | None = None,
                 today: dt.date | None = None) -> Entered:  # fmt: skip
    """Add one person to ``family``; the parents (``mother``, ``father``) and a co-twin are chosen from
    the family's members (a code from another family is refused beside that field)."""
    from tracker.store import repository as repo
    from tracker.services.recall import family_scope

    _unknown_fields(fields, RELATIVE_FIELDS)
    people = repo.load_people(conn, family_scope(family))
    if family not in set(repo.load_families(conn, family_scope(family))["family"]):
        _refuse("family", f"no family {family} is recorded")
    members = set(people["person"])
    for col in ("mother", "father", "twin_of"):
        code = _text(fields.get(col))
        if code and code not in members:
            _refuse(col, f"{code} is not a member of family {family}: choose a member")
    row = {k: _text(v) for k, v in fields.items()}
    row["family"] = family
    return _store(conn, "people", [row], family=family, person=_text(fields.get("person")), user=user, today=today)


def record_study(conn: Connection, person: str, fields: Mapping[str, str], values: Mapping[str, str],
                 units: Mapping[str, str] | None = None, *, user: str | None = None,
                 today: dt.date | None = None) -> Entered:  # fmt: skip
    """One study of ``person`` with its values: ``values`` measure code -> value text, ``units`` measure
    code -> unit text (default: the catalogue unit).  Empty values are left out; a study with no value
    is stored as a study row alone (its body size)."""
    from tracker.store import repository as repo

    _unknown_fields(fields, STUDY_FIELDS)
    family = _person_family(conn, person)
    catalogue = repo.load_measures(conn).set_index("code")
    units = dict(units or {})
    base = {k: _text(v) for k, v in fields.items()}
    base["person"] = person
    rows, measure_of = [], {}
    for code, value in values.items():
        if not _text(value) and not _text(units.get(code)):
            continue
        unit = _text(units.get(code)) or (str(catalogue.loc[code, "unit"]) if code in catalogue.index else "")
        rows.append({**base, "measure": code, "value": _text(value), "unit": unit})
        measure_of[len(rows)] = code
    if not rows:
        rows = [dict(base)]

    def field_of(row: int | None, col: str) -> str:
        if col in ("measure", "value", "unit") and row in measure_of:
            return f"{'value' if col == 'measure' else col}.{measure_of[row]}"
        return col

    return _store(conn, "studies", rows, family=family, person=person, user=user, today=today, field_of=field_of)


def record_genetic_result(conn: Connection, person: str, fields: Mapping[str, str], *, user: str | None = None,
                          today: dt.date | None = None) -> Entered:  # fmt: skip
    """One genetic test result of ``person`` (``variant`` as transcript:hgvs_c of a family variant)."""
    _unknown_fields(fields, RESULT_FIELDS)
    family = _person_family(conn, person)
    row = {k: _text(v) for k, v in fields.items()}
    row["person"] = person
    return _store(conn, "genetic-results", [row], family=family, person=person, user=user, today=today)


def record_assessment(conn: Connection, person: str, fields: Mapping[str, str], *, user: str | None = None,
                      today: dt.date | None = None) -> Entered:  # fmt: skip
    """One clinical assessment of ``person`` with the Risk-SCD answers (yes / no / unknown or empty)."""
    _unknown_fields(fields, ASSESSMENT_FIELDS)
    family = _person_family(conn, person)
    row = {k: _text(v) for k, v in fields.items()}
    row["person"] = person
    return _store(conn, "assessments", [row], family=family, person=person, user=user, today=today)


# --------------------------------------------------------------------------- as-you-type help


def plausible(measures: pd.DataFrame, measure_code: str, value: str, unit: str | None = None) -> str | None:
    """The message the importer would give for ``value`` of ``measure_code`` (unreadable number, unknown
    measure or unit, outside the catalogue's plausible range), or None when it passes.  ``measures`` is
    the catalogue (:func:`tracker.store.repository.load_measures`)."""
    import pandas as pd

    from tracker.domain import units as U
    from tracker.io.columns import parse
    from tracker.io.layouts import STUDIES
    from tracker.io.validation import out_of_range_message

    text = _text(value)
    if not text:
        return None
    catalogue = measures.set_index("code")
    if measure_code not in catalogue.index:
        return f"{measure_code!r} is not in the measure catalogue"
    cat = catalogue.loc[measure_code]
    parsed = parse(next(c for c in STUDIES.columns if c.name == "value"), pd.Series([text]), dt.date.today())
    if parsed.errors.iloc[0] is not None:
        return str(parsed.errors.iloc[0])
    v = float(parsed.values.iloc[0])
    cu = str(cat["unit"])
    eu = U.normalise_unit(unit) if _text(unit) else cu
    if eu is None:
        return f"{unit!r} is not a known unit"
    factor = U.conversion_factor(cu, eu)
    if factor is None:
        return f"{eu} cannot be converted to {cu}, the unit of {measure_code}"
    lo, hi = float(cat["plausible_min"]), float(cat["plausible_max"])
    if lo <= v * factor <= hi:
        return None
    return out_of_range_message(v, eu, cu, measure_code, lo, hi)
