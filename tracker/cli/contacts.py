"""`tracker contact ...`, `tracker wish ...`, `tracker book`, `tracker external add`, `tracker discharge`:
the contact log and what goes with it (docs/contacts-and-letters.md).

Thin: parses options, calls :mod:`tracker.services.contacts` inside one write transaction, prints
the stored record (or JSON).  A refused field is named by its option (``--date``, ``--channel``...).
"""

from __future__ import annotations

from contextlib import contextmanager
from pathlib import Path
from typing import Annotated

import typer

from tracker.cli.common import DbOption, JsonOption, UserOption, open_store, print_json, print_table
from tracker.errors import UserError
from tracker.lazy import lazy_module
from tracker.store.database import reading, writing

SC = lazy_module("tracker.services.contacts")

contact_app = typer.Typer(
    help="Record and list contacts with a relative: the log keeps every one (a correction is a newer entry).\n\n"
    "Example: tracker contact add HV01-III-4 --date 2026-11-30 --channel phone --by nurse --outcome informed",
    no_args_is_help=True,
)
wish_app = typer.Typer(
    help="A relative's wish about contact: no further contact, or only through a named family member.\n\n"
    "Example: tracker wish set HV01-III-4 --wish no_further_contact --date 2026-11-30",
    no_args_is_help=True,
)
external_app = typer.Typer(
    help="Results from another centre: a genetic test or a screening of a relative.\n\n"
    "Example: tracker external add HV01-III-4 --kind genetic_test --date 2026-05-02 --centre \"Invented Centre\" "
    "--result non_carrier",
    no_args_is_help=True,
)

PersonArg = Annotated[str, typer.Argument(help="Person code.")]
DateOpt = Annotated[str, typer.Option("--date", help="The day, YYYY-MM-DD (ISO 8601).")]
NotesOpt = Annotated[str | None, typer.Option("--notes", help="Free text, kept with the record.")]

# Service field -> the option that gives it.
_OPTIONS = {"on": "--date", "by": "--by", "channel": "--channel", "outcome": "--outcome", "later": "--later",
            "via": "--via", "notes": "--notes", "purpose": "--purpose", "wish": "--wish", "kind": "--kind",
            "centre": "--centre", "result": "--result", "variant": "--variant", "document_ref": "--document",
            "advice": "--advice", "visit_date": "--date", "sent_date": "--sent", "person": "PERSON",
            "user": "--user", "template": "--template", "template_version": "--template", "to": "--via"}  # fmt: skip


@contextmanager
def _options_named():
    """A refused field becomes one line naming its option."""
    from tracker.io.reading import InputRejected

    try:
        yield
    except InputRejected as exc:
        p = exc.problems[0]
        raise UserError(f"{_OPTIONS.get(p.column, p.column)}: {p.message}; nothing was written") from None


def _show(record: dict, json_out: bool, line: str) -> None:
    if json_out:
        print_json(record)
    else:
        typer.echo(f"{line} (audit entry {record['audit_id']})")


@contact_app.command("add")
def contact_add(
    person: PersonArg,
    date: DateOpt,
    channel: Annotated[str, typer.Option("--channel", help="letter, phone, in_clinic, via_family or other.")],
    outcome: Annotated[str, typer.Option("--outcome", help="informed, no_answer, wrong_address, declined, "
                                          "contact_later or moved_away.")],  # fmt: skip
    by: Annotated[str | None, typer.Option("--by", help="Who made the contact: nurse, counsellor, cardiologist or "
                                           "other (leave out with --channel via_family).")] = None,  # fmt: skip
    later: Annotated[str | None, typer.Option("--later", help="With --outcome contact_later: the day the relative "
                                              "asked to be contacted, YYYY-MM-DD.")] = None,  # fmt: skip
    via: Annotated[str | None, typer.Option("--via", help="With --channel via_family: the code of the family member "
                                            "who passed the information on.")] = None,  # fmt: skip
    notes: NotesOpt = None,
    user: UserOption = None,
    db: DbOption = None,
    json_out: JsonOption = False,
) -> None:
    """Add one contact (or attempt) to a relative's log.

    Example: tracker contact add HV01-III-4 --date 2026-11-30 --channel phone --by nurse --outcome contact_later
    --later 2027-03-01 --notes "exams until March"
    """
    engine = open_store(db)
    with _options_named(), writing(engine) as conn:
        r = SC.record_contact(conn, person, on=date, channel=channel, by=by, outcome=outcome, notes=notes,
                              later=later, via=via, user=user)  # fmt: skip
    _show(r, json_out, f"contact with {r['person']} on {r['event_date']}: {r['channel']}, {r['outcome']}")


@contact_app.command("list")
def contact_list(person: PersonArg, db: DbOption = None, json_out: JsonOption = False) -> None:
    """A relative's contact log, oldest first, with the current state derived from it.

    Example: tracker contact list HV01-III-4 --json
    """
    engine = open_store(db)
    with _options_named(), reading(engine) as conn:
        state = SC.contact_state(conn, person)
    if json_out:
        print_json(state)
        return
    rows = [[h["event_date"] or "(no date)", h["channel"], h["by_role"] or "", h["via"] or "", h["outcome"] or "",
             h["later_date"] or "", h["source"], h["notes"] or ""] for h in state["history"]]  # fmt: skip
    print_table(f"contact log of {person}: {len(rows)} entries",
                ["date", "channel", "by", "via", "outcome", "later", "source", "notes"], rows)  # fmt: skip
    informed = f"informed on {state['informed_date']}" + (f" through {state['informed_via']}" if state["informed_via"]
                                                          else "") if state["informed"] else "not informed"  # fmt: skip
    typer.echo(f"now: {state['status']} (since {state['status_date'] or 'no date'}); {informed}")
    if state["contact_later_on"]:
        typer.echo(f"asked to be contacted on {state['contact_later_on']}")
    if state["wish"] == "no_further_contact":
        typer.echo(f"MUST NOT BE APPROACHED: asked for no further contact on {state['wish_date']}")
    elif state["wish"]:
        typer.echo(f"contact only through {state['wish_via']} (wish recorded {state['wish_date']})")


@contact_app.command("reply")
def contact_reply(
    person: PersonArg,
    kind: Annotated[str, typer.Option("--kind", help="The letter's kind (first_contact, reminder, ...).")],
    sent: Annotated[str, typer.Option("--sent", help="The day the letter was sent, YYYY-MM-DD.")],
    date: DateOpt,
    user: UserOption = None,
    db: DbOption = None,
    json_out: JsonOption = False,
) -> None:
    """Record the day a reply to a sent letter came.

    Example: tracker contact reply HV01-III-4 --kind first_contact --sent 2026-10-01 --date 2026-10-20
    """
    engine = open_store(db)
    with _options_named(), writing(engine) as conn:
        r = SC.record_letter_reply(conn, person, sent_date=sent, kind=kind, on=date, user=user)
    _show(r, json_out, f"reply from {r['person']} on {r['reply_date']} to the {r['kind']} letter of {r['sent_date']}")


@wish_app.command("set")
def wish_set(
    person: PersonArg,
    wish: Annotated[str, typer.Option("--wish", help="no_further_contact or only_via_family_member.")],
    date: DateOpt,
    via: Annotated[str | None, typer.Option("--via", help="With only_via_family_member: the family member's code.")]
    = None,
    notes: NotesOpt = None,
    user: UserOption = None,
    db: DbOption = None,
    json_out: JsonOption = False,
) -> None:
    """Record a relative's wish about contact (one open wish per person; end it to change it).

    Example: tracker wish set HV01-III-4 --wish only_via_family_member --via HV01-II-2 --date 2026-11-30
    """
    engine = open_store(db)
    with _options_named(), writing(engine) as conn:
        r = SC.record_wish(conn, person, wish=wish, on=date, via=via, notes=notes, user=user)
    _show(r, json_out, f"wish of {r['person']} from {r['recorded_date']}: {r['wish']}"
          + (f" (through {r['via']})" if r["via"] else ""))  # fmt: skip


@wish_app.command("end")
def wish_end(person: PersonArg, date: DateOpt, notes: NotesOpt = None, user: UserOption = None,
             db: DbOption = None, json_out: JsonOption = False) -> None:  # fmt: skip
    """End a relative's open wish (it stays in the history).

    Example: tracker wish end HV01-III-4 --date 2027-01-15 --notes "asked to be seen after all"
    """
    engine = open_store(db)
    with _options_named(), writing(engine) as conn:
        r = SC.end_wish(conn, person, on=date, notes=notes, user=user)
    _show(r, json_out, f"wish of {r['person']} ({r['wish']}) ended on {r['ended_date']}")


def book(
    person: PersonArg,
    date: Annotated[str, typer.Option("--date", help="The visit day, YYYY-MM-DD (today or later).")],
    purpose: Annotated[str | None, typer.Option("--purpose", help="What the visit is for, e.g. \"screening ECG "
                                                "and echo\".")] = None,  # fmt: skip
    cancel: Annotated[bool, typer.Option("--cancel", help="Cancel the open booking on --date instead.")] = False,
    notes: NotesOpt = None,
    user: UserOption = None,
    db: DbOption = None,
    json_out: JsonOption = False,
) -> None:
    """Book a visit for a relative (or cancel one with --cancel; a booking is never deleted).

    Example: tracker book HV01-III-4 --date 2027-01-12 --purpose "screening ECG and echo"
    """
    engine = open_store(db)
    with _options_named(), writing(engine) as conn:
        if cancel:
            r = SC.cancel_booking(conn, person, visit_date=date, user=user)
            line = f"booking of {r['person']} for {r['visit_date']} cancelled on {r['cancelled_date']}"
        else:
            r = SC.record_booking(conn, person, on=date, purpose=purpose, notes=notes, user=user)
            line = f"visit of {r['person']} booked for {r['visit_date']}: {r['purpose']}"
    _show(r, json_out, line)


@external_app.command("add")
def external_add(
    person: PersonArg,
    kind: Annotated[str, typer.Option("--kind", help="genetic_test or screening.")],
    date: DateOpt,
    centre: Annotated[str, typer.Option("--centre", help="Where it was done.")],
    result: Annotated[str, typer.Option("--result", help="genetic_test: carrier, non_carrier, inconclusive or "
                                        "no_variant_found; screening: affected, unaffected or uncertain.")],  # fmt: skip
    variant: Annotated[str | None, typer.Option("--variant", help="The family variant tested, transcript:c.change "
                                                "(default: the family's only variant).")] = None,  # fmt: skip
    document: Annotated[str | None, typer.Option("--document", help="Reference of the report received.")] = None,
    notes: NotesOpt = None,
    user: UserOption = None,
    db: DbOption = None,
    json_out: JsonOption = False,
) -> None:
    """Record a relative's genetic test or screening done at another centre (counted, marked external).

    Example: tracker external add HV01-III-4 --kind genetic_test --date 2026-05-02 --centre "Invented Centre"
    --result non_carrier --document "INV-2026-117"
    """
    engine = open_store(db)
    with _options_named(), writing(engine) as conn:
        r = SC.record_external_result(conn, person, kind=kind, on=date, centre=centre, result=result, variant=variant,
                                      document_ref=document, notes=notes, user=user)  # fmt: skip
    _show(r, json_out, f"{r['kind']} of {r['person']} at {r['centre']} ({r['result_date']}): {r['result']} [external]")


def discharge(
    person: PersonArg,
    date: DateOpt,
    advice: Annotated[str, typer.Option("--advice", help="The advice given (e.g. come back with symptoms or if the "
                                        "variant is reclassified).")],  # fmt: skip
    variant: Annotated[str | None, typer.Option("--variant", help="The family variant, transcript:c.change "
                                                "(default: the family's only variant).")] = None,  # fmt: skip
    notes: NotesOpt = None,
    user: UserOption = None,
    db: DbOption = None,
    json_out: JsonOption = False,
) -> None:
    """Discharge a variant-negative relative from screening, recording the variant class relied on.

    Example: tracker discharge HV01-III-5 --date 2026-11-30 --advice "no further checks; see a doctor with
    symptoms; we will write if the variant is reclassified"
    """
    engine = open_store(db)
    with _options_named(), writing(engine) as conn:
        r = SC.record_discharge(conn, person, on=date, advice=advice, variant=variant, notes=notes, user=user)
    _show(r, json_out, f"{r['person']} discharged from screening on {r['discharge_date']} (variant {r['acmg_class']} "
          f"since {r['classified_on']})")  # fmt: skip


@contact_app.command("export")
def contact_export(
    folder: Annotated[Path, typer.Argument(help="Folder to write the six contact-log CSV files into (made if missing).")],
    db: DbOption = None,
    json_out: JsonOption = False,
) -> None:
    """Write the contact log, wishes, letters sent, external results, bookings and discharges as CSV
    (layouts in docs/data-layouts.md; files readable by their owner only).

    Example: tracker contact export exports/contacts
    """
    from tracker.io.export import export_contacts

    engine = open_store(db)
    with reading(engine) as conn:
        counts = export_contacts(conn, folder)
    if json_out:
        print_json({"folder": str(folder), "rows": counts})
    else:
        for kind, n in counts.items():
            typer.echo(f"{kind}: {n} rows")


@contact_app.command("import")
def contact_import(
    folder: Annotated[Path, typer.Argument(help="Folder holding contact-log CSV files (any of the six).")],
    user: UserOption = None,
    db: DbOption = None,
    json_out: JsonOption = False,
) -> None:
    """Import contact-log CSV files: every row checked as a form is; one refused row and nothing is written;
    rows already stored are skipped.

    Example: tracker contact import exports/contacts
    """
    from tracker.io.contact_import import import_contact_folder

    engine = open_store(db)
    with writing(engine) as conn:
        done = import_contact_folder(conn, folder, user=user)
    if json_out:
        print_json(done)
    elif not done:
        typer.echo("no contact-log files in the folder")
    else:
        for d in done:
            typer.echo(f"{d['file']}: {d['rows_added']} added, {d['rows_already_stored']} already stored")


def register(app: typer.Typer) -> None:
    app.add_typer(contact_app, name="contact")
    app.add_typer(wish_app, name="wish")
    app.add_typer(external_app, name="external")
    app.command("book")(book)
    app.command("discharge")(discharge)
