"""The recall worklist as CSV text (UTF-8, comma-separated, first line the column names).

Layout (documented in docs/recall-and-cascade.md):

* line 1: the column names (so any CSV reader, ``csv.DictReader`` or a
  spreadsheet, reads the file as it always did);
* one row per person: ``list`` is ``screening``, ``affected`` or
  ``contact_gap`` (not contacted, lost to follow-up or declined: not booked
  until contact is made);
* last, one row per caution: ``list`` = ``caution``, the text in ``reason``,
  every other cell empty.  A reader that wants the people only keeps rows
  whose ``list`` is not ``caution``.

Columns: list, person, family, status, due (ISO 8601), days_overdue
(negative: days until due; 0 for a never-screened person due now),
never_screened (``yes``/``no``), eligible_since (ISO date a never-screened
person became eligible), gap_reason (``not_contacted``, ``lost_to_follow_up``,
``declined``, or ``contactable`` for a never-screened person not yet seen),
interval_months, needs (codes joined by ``;``), reason, flags (codes joined
by ``;``), booked_week (ISO date of the week start, empty when not booked),
late (``yes`` when the booked week starts after the due date or nobody could
be booked).  Pure: returns text; the caller writes it.
"""

from __future__ import annotations

import csv
import io
from collections.abc import Iterable, Mapping

COLUMNS = (
    "list", "person", "family", "status", "due", "days_overdue", "never_screened", "eligible_since", "gap_reason",
    "interval_months", "needs", "reason", "flags", "booked_week", "late",
)  # fmt: skip
CAUTION_LIST = "caution"


def _cell(v) -> str:
    if v is None:
        return ""
    if isinstance(v, bool):
        return "yes" if v else "no"
    if isinstance(v, (list, tuple)):
        return ";".join(str(x) for x in v)
    return str(v)


def worklist_csv(rows: Iterable[Mapping], cautions: Iterable[str] = ()) -> str:
    """CSV text of worklist entries (mappings with the keys of :data:`COLUMNS`; missing keys give empty cells),
    then one ``caution`` row per caution."""
    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    w.writerow(COLUMNS)
    for r in rows:
        w.writerow([_cell(r.get(c)) for c in COLUMNS])
    for text in cautions:
        w.writerow([CAUTION_LIST if c == "list" else text if c == "reason" else "" for c in COLUMNS])
    return buf.getvalue()
