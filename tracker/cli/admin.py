"""Administration commands: create or upgrade a database, list the measure catalogue."""

from __future__ import annotations

import datetime as dt
from pathlib import Path
from typing import Annotated

import typer

from tracker.cli.common import engine_for, DbOption, JsonOption, UserOption, open_store, print_json, print_table
from tracker.cli.common import AllOption, SettingsOption, table_limit
from tracker.store import migrate

from tracker.store.database import DatabaseUnreadable, locate, make_engine, reading, unreadable_reason


def init(db: DbOption = None, json_out: JsonOption = False) -> None:
    """Create a new database, or upgrade an existing one to this version's schema.

    Example: tracker init --db clinic.sqlite
    """
    location = locate(db)
    engine = engine_for(db, create=True)
    before, after = migrate.upgrade(engine)
    result = {"database": location.describe(), "revision_before": before, "revision": after}
    if json_out:
        print_json(result)
    elif before == after:
        typer.echo(f"{location.describe()}: already at schema revision {after}")
    elif before is None:
        typer.echo(f"{location.describe()}: created at schema revision {after}")
    else:
        typer.echo(f"{location.describe()}: upgraded from revision {before} to {after}")


def measures(db: DbOption = None, json_out: JsonOption = False) -> None:
    """List the measure catalogue: codes, units, plausible ranges and their source.

    Example: tracker measures --json
    """
    from tracker.store import repository as repo

    engine = open_store(db)
    with reading(engine) as conn:
        frame = repo.load_measures(conn)
    records = frame.to_dict("records")
    if json_out:
        print_json(records)
        return
    print_table(
        "Measure catalogue",
        ["code", "modality", "unit", "plausible range", "derived", "LOINC", "label"],
        [
            [r["code"], r["modality"], r["unit"], f"{r['plausible_min']:g} to {r['plausible_max']:g}",
             "yes" if r["derived"] else "", r["loinc"], r["label"]]
            for r in records
        ],
    )  # fmt: skip
    typer.echo("Plausible ranges are data-entry checks, not normal limits: " + records[0]["range_source"]
               if records else "")


def schema(db: DbOption = None, json_out: JsonOption = False) -> None:
    """Show the database's schema revision and the revision this tool needs.

    Example: tracker schema
    """
    location = locate(db)
    engine = engine_for(db)
    with reading(engine) as conn:
        current = migrate.current_revision(conn)
    head = migrate.head_revision()
    result = {"database": location.describe(), "revision": current, "tool_revision": head,
              "up_to_date": current == head}  # fmt: skip
    if json_out:
        print_json(result)
    else:
        state = "up to date" if current == head else "run `tracker init` to upgrade"
        typer.echo(f"{location.describe()}: revision {current}; tool needs {head} ({state})")


def check(db: DbOption = None, json_out: JsonOption = False, settings: SettingsOption = None,
          all_: AllOption = False) -> None:
    """Check the database: file integrity, schema revision, orphan rows, and consistency of the
    records (pedigree cycles, dates out of order, values outside plausible ranges, placeholders
    with clinical data, at-risk relatives with no recall). Exit code 1 when anything is found.
    Variant re-review reminders (a VUS, or a class older than the clinic's interval) are listed
    apart and do not change the exit code.

    Example: tracker check --json
    """
    from sqlalchemy.exc import DBAPIError

    from tracker.domain import consistency as dc
    from tracker.domain.genetics import SRC_REREVIEW
    from tracker.settings import load_settings

    location = locate(db)
    reminders = []
    try:
        findings, reminders = _check_findings(db, load_settings(settings).cascade.variant_rereview_months, settings)
    except DatabaseUnreadable as exc:  # not a SQLite file at all: that is the finding
        findings = [dc.Finding("integrity", "database file", str(exc))]
    except DBAPIError as exc:
        reason = unreadable_reason(exc)
        if reason is None:
            raise
        findings = [dc.Finding("integrity", "database file", f"{location.describe()}: {reason}")]
    result = {"database": location.describe(), "ok": not findings,
              "findings": [f.as_dict() for f in findings],
              "reminders": [dict(f.as_dict(), source=SRC_REREVIEW if f.check == "variant_rereview" else None)
                            for f in reminders]}  # fmt: skip
    if json_out:
        print_json(result)
    elif findings:
        print_table(f"{len(findings)} findings", ["check", "where", "finding"],
                    [[f.check, f.where, f.message] for f in findings], limit=table_limit(all_, settings))  # fmt: skip
    else:
        typer.echo(f"{location.describe()}: no problems found")
    if reminders and not json_out:
        rereview = [f for f in reminders if f.check == "variant_rereview"]
        for f in rereview:
            typer.echo(f"reminder: {f.where}: {f.message}")
        if rereview:
            typer.echo(f"  source: {SRC_REREVIEW}")
        for f in reminders:
            if f.check != "variant_rereview":
                typer.echo(f"reminder: {f.where}: {f.message}")
    if findings:
        raise typer.Exit(1)


def _check_findings(db, rereview_months: int, settings=None) -> tuple[list, list]:
    from tracker.services.checks import check_findings

    with reading(engine_for(db)) as conn:
        return check_findings(conn, dt.date.today(), rereview_months, settings)


def backup_(
    out: Annotated[Path, typer.Argument(help="Backup file to write.")],
    force: Annotated[bool, typer.Option("--force", help="Replace an existing backup file.")] = False,
    db: DbOption = None,
    json_out: JsonOption = False,
) -> None:
    """Write a consistent, verified copy of a SQLite database (others may keep working meanwhile).

    PostgreSQL: use pg_dump (docs/operations.md).

    Example: tracker backup backups/clinic-2026-12-01.sqlite
    """
    from tracker.store import backup

    info = backup.backup(locate(db), out, force=force)
    if json_out:
        print_json(info.as_dict())
    else:
        typer.echo(f"backup written and verified: {info.file} (schema revision {info.revision}, {info.bytes} bytes)")


def restore_(
    backup_file: Annotated[Path, typer.Argument(help="Backup file made by `tracker backup`.")],
    force: Annotated[bool, typer.Option("--force", help="Replace the existing database.")] = False,
    db: DbOption = None,
    user: UserOption = None,
    json_out: JsonOption = False,
) -> None:
    """Restore a database from a backup, after verifying the backup. Refuses to replace an
    existing database without --force. The audit trail is never rolled back: every entry of the
    replaced database is kept, followed by a "restore" entry naming the backup.

    Example: tracker restore backups/clinic-2026-12-01.sqlite --db clinic.sqlite --force
    """
    from tracker.store import backup

    location = locate(db)
    info = backup.restore(location, backup_file, force=force, user=user)
    if json_out:
        print_json({"database": location.describe(), **info.as_dict()})
        return
    typer.echo(f"{location.describe()}: restored from {info.file} (schema revision {info.revision}"
               + (f", upgraded from {info.upgraded_from}" if info.upgraded_from else "") + "); "
               f"{info.carried_over} later audit entries kept; restore noted as audit entry {info.restore_entry}")
    if info.previous_file_kept_as:
        typer.echo(f"the replaced file could not be read; it is kept as {info.previous_file_kept_as}")


def register(app: typer.Typer) -> None:
    app.command("init")(init)
    app.command("measures")(measures)
    app.command("schema")(schema)
    app.command("check")(check)
    app.command("backup")(backup_)
    app.command("restore")(restore_)
