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
from urllib.parse import quote

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
        url = _read_only_url(location.sqlite_path) or location.url
        engine = create_engine(url, connect_args={"timeout": BUSY_TIMEOUT_MS / 1000})
        _configure_sqlite(engine)
        return engine
    return create_engine(location.url, pool_pre_ping=True)


def _read_only_url(path: Path) -> str | None:
    """A read-only URL for a file this process cannot write, else None.

    SQLite in WAL mode writes ``-wal`` and ``-shm`` files beside the database even
    to read it.  A file that cannot be written (permissions, a read-only mount) is
    opened with ``mode=ro``, so that reading works and every write fails with
    "read-only"; on a read-only filesystem, where no ``-shm`` can be made, it is
    also opened ``immutable`` (safe only when no ``-wal`` file holds pending pages).
    """
    if os.access(path, os.W_OK) and os.access(path.parent, os.W_OK):
        return None
    params = "mode=ro"
    read_only_fs = bool(os.statvfs(path.parent).f_flag & os.ST_RDONLY)
    wal = path.with_name(path.name + "-wal")
    if read_only_fs and not (wal.exists() and wal.stat().st_size > 0):
        params += "&immutable=1"
    return f"sqlite:///file:{quote(str(path.resolve()))}?{params}&uri=true"


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

    The write lock is taken at the start (SQLite: ``BEGIN IMMEDIATE``;
    PostgreSQL: an advisory lock, :func:`_take_write_lock`), so a second writer
    waits up to the busy timeout and then fails cleanly before it has read
    anything it might overwrite.
    """
    with engine.connect() as conn:
        if engine.dialect.name == "sqlite":
            conn = conn.execution_options(sqlite_begin="IMMEDIATE")
        with conn.begin():
            if engine.dialect.name == "postgresql":
                _take_write_lock(conn)
            yield conn


# The PostgreSQL advisory lock every writer of this tool takes: one per schema (a server may
# hold several stores, for example test schemas, and they must not block each other).
WRITE_LOCK_KEY_SQL = "hashtext('tracker-write:' || current_schema())"


def _take_write_lock(conn: Connection) -> None:
    """Make PostgreSQL writers behave like SQLite's: one at a time, waiting up to the busy timeout.

    Every write transaction takes the same transaction-scoped advisory lock first
    (one per schema: :data:`WRITE_LOCK_KEY_SQL`),
    so two commands never interleave their check-then-write steps (an import's
    comparison with the stored rows, an edit's before values); a writer that cannot
    get it within ``BUSY_TIMEOUT_MS`` fails with "lock timeout" before it has
    written anything.  Readers are never blocked.
    """
    conn.exec_driver_sql(f"SET LOCAL lock_timeout = '{BUSY_TIMEOUT_MS}ms'")
    conn.exec_driver_sql(f"SELECT pg_advisory_xact_lock({WRITE_LOCK_KEY_SQL})")


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
