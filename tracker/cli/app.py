"""The `tracker` command: a thin layer that parses options, calls the store and engines, and prints."""

from __future__ import annotations

import json
import sys

import typer

from tracker import __version__
from tracker.cli import admin, audit, contacts, edits, families, recall, reports, review, uptake, web
from tracker.cli.common import dispose_engines
from tracker.errors import UserError

app = typer.Typer(
    name="tracker",
    help=(
        "Family screening for inherited hypertrophic cardiomyopathy: families, genotypes, "
        "serial measurements and recalls.\n\n"
        "Example: tracker demo && tracker families\n\n"
        "Decision support only: the treating clinician decides; follow local protocols "
        "and the current guideline."
    ),
    no_args_is_help=True,
    add_completion=False,
    pretty_exceptions_enable=False,
    context_settings={"help_option_names": ["-h", "--help"]},
)


def _version(value: bool) -> None:
    if value:
        typer.echo(f"tracker {__version__}")
        raise typer.Exit()


@app.callback()
def _root(
    version: bool = typer.Option(False, "--version", callback=_version, is_eager=True, help="Show the version."),
) -> None:
    """Family screening tracker."""


admin.register(app)
families.register(app)
review.register(app)
recall.register(app)
edits.register(app)
contacts.register(app)
audit.register(app)
reports.register(app)
uptake.register(app)
web.register(app)


def _one_line(message: str) -> str:
    return " ".join(str(message).split())


def main(argv: list[str] | None = None) -> int:
    """Entry point: user errors become one line on stderr and exit code 1, never a traceback."""
    try:
        return _run(argv)
    finally:
        dispose_engines()


def _run(argv: list[str] | None) -> int:
    args = list(sys.argv[1:] if argv is None else argv)
    try:
        code = app(args=argv, standalone_mode=False)
        if isinstance(code, int):  # typer.Exit(n) inside a command, returned by click
            return code
    except _input_rejected() as exc:
        problems = [_one_line(str(p)) for p in exc.problems]
        for p in problems[:50]:
            sys.stderr.write(f"error: {p}\n")
        if len(problems) > 50:
            sys.stderr.write(f"error: ... and {len(problems) - 50} more problems\n")
        summary = problems[0] if len(problems) == 1 else f"{len(problems)} problems; nothing was written"
        if len(problems) > 1:
            sys.stderr.write(f"error: {summary}\n")
        _json_error(args, summary, 1, problems=problems)
        return 1
    except UserError as exc:
        return _fail(args, _one_line(str(exc)))
    except typer.Exit as exc:
        return exc.exit_code
    except typer.Abort:
        return _fail(args, "aborted")
    except KeyboardInterrupt:
        return _fail(args, "interrupted; nothing was written by the interrupted command", 130)
    except _click_errors() as exc:
        exc.show()
        _json_error(args, _one_line(exc.format_message()), exc.exit_code)
        return exc.exit_code
    except OSError as exc:
        return _fail(args, _one_line(_os_message(exc)))
    except Exception as exc:  # the store refused a write (disk full, read-only, lock) or cannot be read
        message = _store_message(exc)
        if message is None:
            raise
        return _fail(args, message)
    return 0


class _NeverRaised(Exception):
    pass


def _input_rejected() -> type[Exception]:
    """The importer's refusal class, if the importer was loaded (only then can it have been raised);
    importing it here would load pandas at every start."""
    module = sys.modules.get("tracker.io.reading")
    return module.InputRejected if module is not None else _NeverRaised


def _fail(args: list[str], message: str, code: int = 1) -> int:
    """One line on stderr; with --json also a JSON object on stdout, so a script can tell failure
    from an empty result."""
    sys.stderr.write(f"error: {message}\n")
    _json_error(args, message, code)
    return code


def _json_error(args: list[str], message: str, code: int, problems: list[str] | None = None) -> None:
    if "--json" not in args[: args.index("--") if "--" in args else len(args)]:
        return
    data = {"error": message, "exit_code": code}
    if problems is not None:
        data["problems"] = problems
    sys.stdout.write(json.dumps(data, ensure_ascii=False) + "\n")


def _click_errors() -> tuple[type, ...]:
    """Command-line usage errors (exit code 2), whichever click the installed typer uses."""
    return tuple(c for c in typer.BadParameter.__mro__ if c.__name__ == "ClickException")


def _os_message(exc: OSError) -> str:
    name = getattr(exc, "filename", None)
    return f"{name}: {exc.strerror}" if name else str(exc.strerror or exc)


def _driver_error(exc: Exception) -> bool:
    """An error class of a database driver (DB-API ``Error``) that reached the command unwrapped."""
    import sqlite3

    classes: list[type] = [sqlite3.Error]
    try:
        import psycopg

        classes.append(psycopg.Error)
    except ImportError:  # PostgreSQL support not installed
        pass
    return isinstance(exc, tuple(classes))


def _store_message(exc: Exception) -> str | None:
    from sqlalchemy.exc import DBAPIError, OperationalError

    from tracker.cli.common import current_database
    from tracker.store.database import unreadable_reason

    raw = _driver_error(exc)  # raised by the driver itself (PostgreSQL COPY), not wrapped by SQLAlchemy
    reason = unreadable_reason(exc) if isinstance(exc, DBAPIError) or raw else None
    if reason is not None:
        return f"{current_database()}: {reason}"
    operational = isinstance(exc, OperationalError) or (
        raw and any(c.__name__ == "OperationalError" for c in type(exc).__mro__))
    if (isinstance(exc, DBAPIError) or raw) and not operational:
        # Data the store refused (a constraint, a type, a length): the server's own words can quote the
        # row, names and dates included, so only the kind of error is shown.
        kind = type(getattr(exc, "orig", None) or exc).__name__
        return f"the database refused the data ({kind}); nothing was written"
    if not operational:
        return None
    text = str(exc.orig) if getattr(exc, "orig", None) is not None else str(exc)
    text = (text.strip().splitlines() or [""])[0]  # the first line: later ones (DETAIL) may quote the row
    low = text.lower()
    if "locked" in low or "busy" in low or "lock timeout" in low:
        return "the database is busy (another user is writing); nothing was written: try again"
    if "readonly" in low or "read-only" in low:
        return "the database is read-only; nothing was written"
    if "disk" in low and "full" in low:
        return "the disk is full; nothing was written"
    if "could not connect" in low or "connection refused" in low:
        return "cannot connect to the database server (" + _one_line(text)[:200] + ")"
    return "the database refused the operation (" + _one_line(text)[:200] + "); nothing was written"


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
