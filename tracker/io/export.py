"""Writing the store back out in the CSV layouts (the inverse of the importer).

Free-text cells that a spreadsheet would run as a formula (starting with
``=``, ``+``, ``-``, ``@``, tab or carriage return) are written with a leading
apostrophe; the importer removes it again, so import -> export -> import is
exact and a file opened in a spreadsheet cannot run anything.
"""

from __future__ import annotations

import csv
import io
from pathlib import Path

import pandas as pd
from sqlalchemy import Connection

import re

from tracker.io.columns import PROTECTED, format_cell
from tracker.outfiles import check_output, write_output
from tracker.io.layouts import CONTACT_LAYOUTS, LAYOUTS
from tracker.store import repository as repo


def export_frame(conn: Connection, kind: str) -> pd.DataFrame:
    """The stored records of ``kind`` in its layout's clean form and column order."""
    if kind in CONTACT_LAYOUTS:
        return contact_frame(conn, kind)
    return repo.LOADERS[kind](conn)[LAYOUTS[kind].names]


def to_csv_text(frame: pd.DataFrame, kind: str) -> str:
    layout = LAYOUTS[kind]
    text_cols = {c.name for c in layout.columns if c.kind == "text"}
    out = io.StringIO()
    writer = csv.writer(out, lineterminator="\n")
    writer.writerow(layout.names)
    for rec in frame.itertuples(index=False):
        cells = []
        for name, value in zip(layout.names, rec):
            cell = format_cell(value)
            if name in text_cols and re.match(PROTECTED, cell):
                cell = "'" + cell
            cells.append(cell)
        writer.writerow(cells)
    return out.getvalue()


def write_private(path: Path, text: str) -> None:
    """Write a UTF-8 text file readable by its owner only (0600): exports hold health data."""
    write_output(path, text)


def export_kind(conn: Connection, kind: str, path: Path) -> int:
    """Write ``kind`` to ``path``; returns the number of rows written."""
    frame = export_frame(conn, kind)
    write_private(path, to_csv_text(frame, kind))
    return len(frame)


def export_all(conn: Connection, folder: Path, *, force: bool = True) -> dict[str, int]:
    """Write every kind (the contact log's six included) into ``folder`` under its layout file name
    (refuses to replace a file without ``force``)."""
    folder.mkdir(parents=True, exist_ok=True)
    for kind in LAYOUTS:
        check_output(folder / LAYOUTS[kind].file_name, force=force)
    return {kind: export_kind(conn, kind, folder / LAYOUTS[kind].file_name) for kind in LAYOUTS}


# --------------------------------------------------------------------------- the contact log (revision 0012)

CONTACT_LOADERS = {
    "contact-events": repo.load_contact_events,
    "contact-wishes": repo.load_contact_wishes,
    "letters-sent": repo.load_letters,
    "external-results": repo.load_external_results,
    "bookings": repo.load_bookings,
    "discharges": repo.load_discharges,
}


def contact_frame(conn: Connection, kind: str, scope=None) -> pd.DataFrame:
    """The stored records of a contact-log kind in its layout's column order (entered events only for
    ``contact-events``: a migrated or imported status is the people layout's contact_status)."""
    frame = CONTACT_LOADERS[kind](conn, scope)
    if kind == "contact-events" and len(frame):
        frame = frame[frame["source"] == "entered"]
    return frame[CONTACT_LAYOUTS[kind].names].reset_index(drop=True)


def export_contacts(conn: Connection, folder: Path, *, force: bool = True) -> dict[str, int]:
    """Write the six contact-log kinds into ``folder`` under their layout file names (0600)."""
    folder.mkdir(parents=True, exist_ok=True)
    for kind in CONTACT_LAYOUTS:
        check_output(folder / CONTACT_LAYOUTS[kind].file_name, force=force)
    counts = {}
    for kind, layout in CONTACT_LAYOUTS.items():
        frame = contact_frame(conn, kind)
        write_private(folder / layout.file_name, to_csv_text(frame, kind))
        counts[kind] = len(frame)
    return counts
