"""`tracker report worklist`: the nurse's printable recall worklist for a window, as a PDF.

Thin: the rows are computed exactly as the ``tracker worklist`` command does
(store frames, family states, trend modifiers, recall proposals, then
:func:`tracker.engines.worklist.select_due` and
:func:`tracker.engines.worklist.book_into_slots`), reusing its helpers from
:mod:`tracker.cli.recall`; the PDF is drawn by
:mod:`tracker.outputs.worklist_pdf`.  The file is DIR/worklist-FROM-TO.pdf.
"""

from __future__ import annotations

import datetime as dt
from pathlib import Path
from typing import Annotated

import typer

from tracker.cli import recall as R
from tracker.cli.common import DbOption, JsonOption, SettingsOption, open_store, print_json
from tracker.outfiles import output_path
from tracker.engines.schedule import CAUTIONS
from tracker.errors import UserError
from tracker.store.database import reading


def worklist_rows(
    frames, conf, rule_set, policy, start: dt.date, end: dt.date, on: dt.date, slots: int | None
) -> tuple[list[dict], list[dict], dict, list[dict], dict | None]:
    """Screening rows, affected rows, the trend note, the contact gaps and the booking, as ``tracker worklist``
    builds them (:func:`tracker.services.worklist.worklist_lists`)."""
    lists = R.worklist_lists(frames, conf, rule_set, policy, start, end, on, slots)
    return lists["due"], lists["affected"], lists["trend"], lists["contact_gaps"], lists["booking"]


def worklist_report(
    from_: Annotated[str, typer.Option("--from", help="First day of the window (YYYY-MM-DD).")],
    to: Annotated[str, typer.Option("--to", help="Last day of the window (YYYY-MM-DD).")],
    out: Annotated[Path, typer.Option("--out", "-o", help="Folder for worklist-FROM-TO.pdf (made if missing).")],
    slots_per_week: Annotated[
        int | None, typer.Option("--slots-per-week", min=0, help="Weekly capacity: book into weeks (default: settings).")
    ] = None,
    as_of: R.AsOfOption = None,
    guideline: R.GuidelineOption = None,
    settings: SettingsOption = None,
    db: DbOption = None,
    json_out: JsonOption = False,
) -> None:
    """Write the printable recall worklist for a window as DIR/worklist-FROM-TO.pdf (A4 landscape).

    One line per visit: person code, due date, days overdue (or "never
    screened, eligible since D; due now"), what the visit needs, the reason,
    the flags and, with a weekly capacity, the booked week; then the contact
    gaps (not contacted, lost to follow-up, declined). The same people and
    order as `tracker worklist`. Person codes only, never names.

    Example: tracker report worklist --from 2026-12-01 --to 2027-03-01 --slots-per-week 4 --out lists/
    """
    from tracker.outputs import worklist_pdf as W

    start, end = R._day(from_, "--from"), R._day(to, "--to")
    if end < start:
        raise UserError("--to is before --from")
    on = R._day(as_of, "--as-of", dt.date.today())
    conf, rule_set, policy = R._recall_rules(settings, guideline)
    slots = slots_per_week if slots_per_week is not None else conf.slots_per_week
    if out.exists() and not out.is_dir():
        raise UserError(f"--out {out} is a file; give a folder")
    engine = open_store(db)
    with reading(engine) as conn:
        frames = R._load(conn, as_of=on)
    due_rows, affected_rows, trend, gap_rows, booking = worklist_rows(frames, conf, rule_set, policy, start, end, on, slots)
    from tracker.services import worklist as SW

    doc = SW.pdf_document({"due": due_rows, "affected": affected_rows, "trend": trend, "contact_gaps": gap_rows,
                           "booking": booking}, clinic=conf.clinic.name, start=start, end=end, rule_set=rule_set,
                          policy=policy, on=on, slots=slots)  # fmt: skip
    out.mkdir(parents=True, exist_ok=True)
    path = out / W.file_name(start, end)
    replaced = path.exists()
    with output_path(path) as tmp:
        W.write_worklist_pdf(doc, tmp)
    if json_out:
        print_json(
            {
                "file": str(path),
                "window": {"from": start.isoformat(), "to": end.isoformat()},
                "as_of": on.isoformat(),
                "rule_set": rule_set.id,
                "policy": policy.point,
                "slots_per_week": slots,
                "screening": [r["person"] for r in due_rows],
                "affected": [r["person"] for r in affected_rows],
                "contact_gaps": [{"person": r["person"], "gap": r["contact_status"]} for r in gap_rows],
                "cautions": [W.PAGE_CAUTION, *CAUTIONS],
            }
        )
        return
    typer.echo(f"{'replaced' if replaced else 'wrote'} {path}")
    typer.echo(f"{len(due_rows)} screening visits, {len(affected_rows)} affected follow-ups; rule set "
               f"{rule_set.title}, policy {policy.point}")  # fmt: skip
    typer.echo(W.PAGE_CAUTION)


def register(report_app: typer.Typer) -> None:
    """Add this module's command to `tracker report`."""
    report_app.command("worklist")(worklist_report)
