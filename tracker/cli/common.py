"""Shared pieces of the command line: the --db and --json options, opening the store, output."""

from __future__ import annotations

import datetime as dt
import json
import sys
from pathlib import Path
from typing import TYPE_CHECKING, Annotated, Any

import typer
from rich.console import Console
from rich.table import Table
from tracker.errors import UserError
from tracker.store import migrate
from tracker.store.database import ENV_VAR, locate, make_engine, reading

if TYPE_CHECKING:  # SQLAlchemy is imported where used, so `tracker --help` does not load it
    from sqlalchemy import Engine

DbOption = Annotated[
    str | None,
    typer.Option(
        "--db",
        envvar=ENV_VAR,
        help="SQLite file path or database URL (postgresql+psycopg://...). "
        f"Default: ${ENV_VAR}, else ./tracker.sqlite",
        show_default=False,
    ),
]
SettingsOption = Annotated[
    Path | None,
    typer.Option(
        "--settings",
        envvar="TRACKER_SETTINGS",
        help="Clinic settings file (TOML). Default: $TRACKER_SETTINGS, else ./tracker.toml, else built-in defaults.",
        show_default=False,
    ),
]
UserOption = Annotated[
    str | None,
    typer.Option("--user", help="Who makes the change, for the audit trail (default: the OS user).", show_default=False),
]
JsonOption = Annotated[bool, typer.Option("--json", help="Print JSON (stable keys) instead of a table.")]
AllOption = Annotated[
    bool,
    typer.Option("--all", help="Print every row of the tables (default: the first rows and a count of the rest; "
                 "[display] table_rows in the settings, 50 unless set). --json always holds every row."),
]

out = Console(highlight=False, soft_wrap=True)
err = Console(stderr=True, highlight=False)


_engines: list[Engine] = []
_databases: list[str] = []


def engine_for(db: str | None, *, create: bool = False) -> Engine:
    """An engine for ``--db``; every engine made here is disposed when the command ends."""
    location = locate(db)
    _databases.append(location.describe())
    engine = make_engine(location, create=create)
    _engines.append(engine)
    return engine


def current_database() -> str:
    """The database the command opened last (for error messages), else "--db"."""
    return _databases[-1] if _databases else "--db"


def dispose_engines() -> None:
    while _engines:
        _engines.pop().dispose()
    _databases.clear()


def open_store(db: str | None) -> Engine:
    """An engine for an existing database at the head schema revision (else a clear error)."""
    location = locate(db)
    engine = engine_for(db)
    with reading(engine) as conn:
        migrate.require_current(conn, location.describe())
    return engine


def print_json(data: Any) -> None:
    sys.stdout.write(json.dumps(data, indent=2, ensure_ascii=False, default=str) + "\n")


def table_limit(show_all: bool, settings_path: Path | None = None) -> int | None:
    """How many rows a terminal table shows: None (every row) with ``--all``, else the settings'
    ``[display] table_rows``."""
    if show_all:
        return None
    from tracker.settings import load_settings

    return load_settings(settings_path).display.table_rows


def more_rows_line(hidden: int, data: str = "--json", what: str = "more") -> str:
    return f"... and {hidden} {what}; --all for every row, {data} for the data"


def print_table(title: str | None, columns: list[str], rows: list[list[Any]], *, limit: int | None = None,
                data: str = "--json", last: bool = False) -> None:
    """A table of ``rows``; with ``limit``, only the first ``limit`` rows (the last ones with ``last``)
    and a line counting the rest. ``data`` names the options that give every row as data."""
    hidden = 0
    if limit is not None and len(rows) > limit:
        hidden = len(rows) - limit
        rows = rows[-limit:] if last else rows[:limit]
    _table(title, columns, rows)
    if hidden:
        typer.echo(more_rows_line(hidden, data, "earlier" if last else "more"))


def _table(title: str | None, columns: list[str], rows: list[list[Any]]) -> None:
    table = Table(title=title, title_justify="left", show_lines=False)
    cells = [["" if v is None else str(v) for v in r] for r in rows]
    for i, c in enumerate(columns):
        # Codes, dates and numbers are never cut or wrapped; only long text wraps.
        short = all(len(r[i]) <= 20 for r in cells) if cells else True
        # Long text folds (never cut with an ellipsis), so a narrow terminal loses nothing.
        table.add_column(c, no_wrap=short, overflow="fold",
                         min_width=max(len(c), max((len(r[i]) for r in cells), default=0)) if short else None)  # fmt: skip
    for r in cells:
        table.add_row(*r)
    out.print(table)


def print_import_report(summaries, dry_run: bool, json_out: bool, lines) -> None:
    """What an import checked and stored (every import path): JSON, else ``lines(summary, verb)`` per file
    and the dry-run note."""
    if json_out:
        print_json({"dry_run": dry_run, "files": [s.as_dict() for s in summaries]})
        return
    verb = "would add" if dry_run else "added"
    for s in summaries:
        for line in lines(s, verb):
            typer.echo(line)
    if dry_run:
        typer.echo("dry run: nothing was written")


def parse_day(text: str | None, option: str, default: dt.date | None = None) -> dt.date:
    """The date an option gives (YYYY-MM-DD), ``default`` when absent, else a one-line error naming the option."""
    from tracker.domain.dates import parse_date

    if text is None:
        if default is None:
            raise UserError(f"{option} is required (YYYY-MM-DD)")
        return default
    try:
        return parse_date(text)
    except ValueError as exc:
        raise UserError(f"{option}: {exc}") from None
