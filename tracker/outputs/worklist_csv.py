"""The recall worklist as CSV text (UTF-8, comma-separated, first line the column names).

Columns: list (``screening`` or ``affected``), person, family, status, due
(ISO 8601), days_overdue (negative: days until due), interval_months, needs
(codes joined by ``;``), reason, booked_week (ISO date of the week start, empty
when not booked), late (``yes`` when the booked week starts after the due
date or nobody could be booked).  Pure: returns text; the caller writes it.
"""

from __future__ import annotations

import csv
import io
from collections.abc import Iterable, Mapping

COLUMNS = (
    "list", "person", "family", "status", "due", "days_overdue", "interval_months", "needs", "reason",
    "booked_week", "late",
)  # fmt: skip


def _cell(v) -> str:
    if v is None:
        return ""
    if isinstance(v, bool):
        return "yes" if v else "no"
    if isinstance(v, (list, tuple)):
        return ";".join(str(x) for x in v)
    return str(v)


def worklist_csv(rows: Iterable[Mapping]) -> str:
    """CSV text of worklist entries (mappings with at least the keys of :data:`COLUMNS`)."""
    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    w.writerow(COLUMNS)
    for r in rows:
        w.writerow([_cell(r.get(c)) for c in COLUMNS])
    return buf.getvalue()
