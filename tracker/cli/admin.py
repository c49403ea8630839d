"""Administration commands: create or upgrade a database, list the measure catalogue."""

from __future__ import annotations

import typer

from tracker.cli.common import engine_for, DbOption, JsonOption, open_store, print_json, print_table
from tracker.store import migrate
from tracker.store import repository as repo
from tracker.store.database import locate, make_engine, reading


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


def register(app: typer.Typer) -> None:
    app.command("init")(init)
    app.command("measures")(measures)
    app.command("schema")(schema)
