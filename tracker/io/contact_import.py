"""Importing the contact log's CSV layouts (revision 0012; docs/data-layouts.md, docs/contacts-and-letters.md).

Each row goes through the same checks as a form (:mod:`tracker.services.contacts`), so a file can hold
nothing a user could not enter; a refused row names the file, the spreadsheet row and the column, and
nothing is written (the caller's transaction is rolled back).  A row equal to a stored record is skipped,
so importing an exported folder again adds nothing.  Past bookings and letters are history: they are
accepted whatever today is (a form books only today or later).
"""

from __future__ import annotations

import datetime as dt
from pathlib import Path

from sqlalchemy import Connection

from tracker.io import validation
from tracker.io.columns import format_cell
from tracker.io.layouts import CONTACT_IMPORT_ORDER, CONTACT_LAYOUTS
from tracker.io.reading import InputRejected, Problem, read_table


# Service field -> layout column, per kind (for the problem's column).
_COLUMN = {
    "contact-events": {"on": "event_date", "by": "by_role", "later": "later_date"},
    "contact-wishes": {"on": "recorded_date"},
    "letters-sent": {"on": "sent_date", "to": "sent_to"},
    "external-results": {"on": "result_date"},
    "bookings": {"on": "visit_date"},
    "discharges": {"on": "discharge_date"},
}


def _plain(v):
    """A clean cell as text or None (NaN and empty: None)."""
    if v is None or (isinstance(v, float) and v != v) or (isinstance(v, str) and not v):
        return None
    return v


def _key(values, names) -> tuple:
    return tuple(format_cell(v) for v in values)


def import_contacts(conn: Connection, kind: str, path: Path, *, user: str | None = None,
                    today: dt.date | None = None, touched: set | None = None) -> dict:  # fmt: skip
    """Check and write one contact-log file inside the caller's transaction; returns the counts.
    ``touched``: the codes of the families written to are added to it (each write has already
    refreshed its family's stored recall proposals, :func:`tracker.services.contacts._after_write`)."""
    from tracker.io.export import contact_frame
    from tracker.services import contacts as SC

    today = today or dt.date.today()
    layout = CONTACT_LAYOUTS[kind]
    cells = read_table(path, layout)
    checked = validation.parse_cells(layout, path.name, cells, today)
    # A booked visit and a "contact me later" day may be ahead (the service bounds how far).
    checked.problems = [p for p in checked.problems
                        if not (p.column in ("visit_date", "later_date") and "in the future" in p.message)]
    validation.check_duplicates(checked)
    if checked.problems:
        raise InputRejected(checked.problems)
    stored = contact_frame(conn, kind)
    known = {_key(r, layout.names) for r in stored.itertuples(index=False)}
    added = already = 0
    for row_no, row in zip(checked.rows.index, checked.rows.to_dict("records")):
        v = {c: _plain(row[c]) for c in layout.names}
        for c in ("visit_date", "later_date"):  # ahead of today: the cell as written (the service checks it)
            if c in v and v[c] is None and cells.at[row_no, c] != "":
                v[c] = str(cells.at[row_no, c])
        if _key([v[c] for c in layout.names], layout.names) in known:
            already += 1
            continue
        try:
            family = _write(SC, conn, kind, v, user, today)
        except InputRejected as exc:
            p = exc.problems[0]
            column = _COLUMN[kind].get(p.column, p.column)
            raise InputRejected([Problem(path.name, int(row_no), column, p.message)]) from None
        added += 1
        if touched is not None and family:
            touched.add(family)
    return {"kind": kind, "file": path.name, "rows_read": len(checked.rows), "rows_added": added,
            "rows_already_stored": already}  # fmt: skip


def _write(SC, conn, kind: str, v: dict, user, today: dt.date) -> str | None:
    """Write one row through the service; returns the family code written to."""
    r: dict = {}
    if kind == "contact-events":
        r = SC.record_contact(conn, v["person"], on=v["event_date"], channel=v["channel"], by=v["by_role"],
                          outcome=v["outcome"], notes=v["notes"], later=v["later_date"], via=v["via"], user=user,
                          today=today)  # fmt: skip
    elif kind == "contact-wishes":
        r = SC.record_wish(conn, v["person"], wish=v["wish"], on=v["recorded_date"], via=v["via"], notes=v["notes"],
                       user=user, today=today)  # fmt: skip
        if v["ended_date"]:
            SC.end_wish(conn, v["person"], on=v["ended_date"], user=user, today=today)
    elif kind == "letters-sent":
        r = SC.record_letter_sent(conn, v["person"], kind=v["kind"], template=v["template"],
                              template_version=v["template_version"], on=v["sent_date"], to=v["sent_to"],
                              via=v["via"], notes=v["notes"], user=user, today=today, history=True)  # fmt: skip
        if v["reply_date"]:
            SC.record_letter_reply(conn, v["person"], sent_date=v["sent_date"], kind=v["kind"], on=v["reply_date"],
                                   user=user, today=today)  # fmt: skip
    elif kind == "external-results":
        r = SC.record_external_result(conn, v["person"], kind=v["kind"], on=v["result_date"], centre=v["centre"],
                                  result=v["result"], variant=v["variant"], document_ref=v["document_ref"],
                                  notes=v["notes"], user=user, today=today)  # fmt: skip
    elif kind == "bookings":
        visit = dt.date.fromisoformat(v["visit_date"])
        r = SC.record_booking(conn, v["person"], on=visit, purpose=v["purpose"], notes=v["notes"], user=user,
                          today=min(today, visit), history=True)  # fmt: skip
        if v["cancelled_date"]:
            SC.cancel_booking(conn, v["person"], visit_date=visit, on=v["cancelled_date"], user=user,
                              today=max(today, visit))  # fmt: skip
    elif kind == "discharges":
        r = SC.record_discharge(conn, v["person"], on=v["discharge_date"], advice=v["advice"], variant=v["variant"],
                                notes=v["notes"], user=user, today=today)  # fmt: skip
        if (r["acmg_class"], r["classified_on"]) != (v["acmg_class"], v["classified_on"]):
            raise InputRejected([Problem("discharge", None, "acmg_class",
                                         f"the store has the variant {r['acmg_class']} since {r['classified_on']} "
                                         f"on that day, not {v['acmg_class']} since {v['classified_on']}")])
    return r.get("family")


def import_contact_folder(conn: Connection, folder: Path, *, user: str | None = None) -> list[dict]:
    """Import every contact-log file present in ``folder`` (by layout file name), in dependency order."""
    out = []
    for kind in CONTACT_IMPORT_ORDER:
        path = folder / CONTACT_LAYOUTS[kind].file_name
        if path.exists():
            out.append(import_contacts(conn, kind, path, user=user))
    return out
