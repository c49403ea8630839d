"""Correcting or removing one person from a form: :mod:`tracker.services.edits` (the importer's cell checks,
the consistency checks, one audited change) with its one-line errors given back per form field.

Runs inside the caller's write transaction; on any error nothing is written (the transaction is
rolled back by :func:`tracker.store.database.writing`).
"""

from __future__ import annotations

import re

from sqlalchemy import Connection

from tracker.errors import UserError
from tracker.io.reading import InputRejected, Problem
from tracker.services import edits

SOURCE = "form"
EDITABLE = tuple(f for f in edits.PERSON_FIELDS if f not in ("given_name", "family_name", "external_id"))
_FIELD = re.compile(r"^(--set |--)?([a-z_]+): ")


def _as_fields(exc: UserError) -> InputRejected:
    text = str(exc)
    m = _FIELD.match(text)
    column = None
    if m and (m.group(2) in edits.PERSON_FIELDS or m.group(2) == "reason"):
        column, text = m.group(2), text[m.end():]
    return InputRejected([Problem(SOURCE, None, column, text)])


def _reason(reason: str) -> str:
    reason = " ".join((reason or "").split())
    if not reason:
        raise InputRejected([Problem(SOURCE, None, "reason", "give the reason (it is kept in the audit trail)")])
    return reason


def edit_person(conn: Connection, code: str, field: str, value: str, *, reason: str, user: str) -> edits.Change:
    """Set one field of person ``code`` (CSV field name and cell text) with a reason."""
    reason = _reason(reason)
    if field not in EDITABLE:
        raise InputRejected([Problem(SOURCE, None, "field", "choose a field that can be corrected here")])
    try:
        return edits.edit_person(conn, code, {field: value}, reason=reason, user=user)
    except UserError as exc:
        raise _as_fields(exc) from None


def remove_person(conn: Connection, code: str, *, reason: str, user: str) -> edits.Change:
    """Hide person ``code`` (kept in the store, with who and why), refused while they are a parent or twin."""
    reason = _reason(reason)
    try:
        return edits.remove_person(conn, code, reason=reason, user=user)
    except UserError as exc:
        raise _as_fields(exc) from None
