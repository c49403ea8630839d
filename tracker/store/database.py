"""Opening the family store: where it is, how SQLite is set up, which schema revision it has.

A plain path means a SQLite file; a URL (``postgresql+psycopg://...``) means
that server.  The same code runs on both.

SQLite connections get: foreign keys on, WAL journal (readers do not block
the writer), a busy timeout, and explicit ``BEGIN`` statements so that a
whole import or migration is one transaction, including its DDL.
"""

from __future__ import annotations

import os
from contextlib import contextmanager
from dataclasses import dataclass
from pathlib import Path
from typing import Iterator

from sqlalchemy import Connection, Engine, create_engine, event, text
from sqlalchemy.engine import make_url
from sqlalchemy.exc import ArgumentError

from tracker.errors import UserError

DEFAULT_FILE = "tracker.sqlite"
ENV_VAR = "TRACKER_DB"
BUSY_TIMEOUT_MS = 5000


@dataclass(frozen=True)
class Location:
    """Where a database is: an SQLAlchemy URL, plus the file for SQLite."""

    url: str
    sqlite_path: Path | None

    @property
    def is_sqlite(self) -> bool:
        return self.sqlite_path is not None

    def describe(self) -> str:
        """A printable name that never shows a password."""
        if self.sqlite_path is not None:
            return str(self.sqlite_path)
        return make_url(self.url).render_as_string(hide_password=True)


def locate(db: str | None) -> Location:
    """Resolve ``--db`` / ``TRACKER_DB`` / the default file into a :class:`Location`."""
    target = db or os.environ.get(ENV_VAR) or DEFAULT_FILE
    if "://" in target:
        try:
            url = make_url(target)
        except ArgumentError:
            raise UserError(f"--db: {target!r} is not a database URL") from None
        if url.get_backend_name() == "sqlite":
            path = Path(url.database or "").expanduser()
            return Location(f"sqlite:///{path}", path)
        return Location(target, None)
    path = Path(target).expanduser()
    return Location(f"sqlite:///{path}", path)


def _make_private(path: Path) -> None:
    """Create an empty SQLite file readable by its owner only (0600)."""
    if path.exists():
        return
    if not path.parent.exists():
        raise UserError(f"--db: folder {path.parent} does not exist")
    fd = os.open(path, os.O_CREAT | os.O_EXCL | os.O_WRONLY, 0o600)
    os.close(fd)


def make_engine(location: Location, *, create: bool = False) -> Engine:
    """An engine for ``location``; with ``create`` a missing SQLite file is made (mode 0600)."""
    if location.sqlite_path is not None:
        if not location.sqlite_path.exists():
            if not create:
                raise UserError(
                    f"no database at {location.sqlite_path}: run `tracker init` "
                    "(or `tracker demo`) first, or give --db"
                )
            _make_private(location.sqlite_path)
        engine = create_engine(location.url, connect_args={"timeout": BUSY_TIMEOUT_MS / 1000})
        _configure_sqlite(engine)
        return engine
    return create_engine(location.url, pool_pre_ping=True)


def _configure_sqlite(engine: Engine) -> None:
    @event.listens_for(engine, "connect")
    def _on_connect(dbapi_conn, _record):  # pragma: no cover - exercised by every test
        # Let SQLAlchemy's BEGIN below, not the driver, open transactions.
        dbapi_conn.isolation_level = None
        cur = dbapi_conn.cursor()
        cur.execute("PRAGMA foreign_keys = ON")
        cur.execute(f"PRAGMA busy_timeout = {BUSY_TIMEOUT_MS}")
        try:
            cur.execute("PRAGMA journal_mode = WAL")
        except Exception:  # a read-only file cannot switch journal mode
            pass
        cur.close()

    @event.listens_for(engine, "begin")
    def _on_begin(conn: Connection):
        mode = conn.get_execution_options().get("sqlite_begin", "DEFERRED")
        conn.exec_driver_sql(f"BEGIN {mode}")


@contextmanager
def writing(engine: Engine) -> Iterator[Connection]:
    """One write transaction: committed on success, rolled back on any error.

    On SQLite the write lock is taken at the start (``BEGIN IMMEDIATE``), so a
    second writer waits up to the busy timeout and then fails cleanly before
    it has read anything it might overwrite.
    """
    with engine.connect() as conn:
        if engine.dialect.name == "sqlite":
            conn = conn.execution_options(sqlite_begin="IMMEDIATE")
        with conn.begin():
            yield conn


@contextmanager
def reading(engine: Engine) -> Iterator[Connection]:
    """A read-only connection (a consistent snapshot for the duration on SQLite WAL)."""
    with engine.connect() as conn:
        with conn.begin():
            yield conn


def table_names(conn: Connection) -> list[str]:
    from sqlalchemy import inspect

    return sorted(inspect(conn).get_table_names())


def scalar(conn: Connection, sql: str, **params):
    return conn.execute(text(sql), params).scalar()
