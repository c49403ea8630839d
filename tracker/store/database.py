"""Opening the family store: where it is, how SQLite is set up, which schema revision it has.

A plain path means a SQLite file; a URL (``postgresql+psycopg://...``) means
that server.  The same code runs on both.

SQLite connections get: foreign keys on, a busy timeout, and explicit
``BEGIN`` statements so that a whole import or migration is one transaction,
including its DDL.  A file is switched to the WAL journal (readers do not
block the writer) the first time the tool writes to it; a command that only
reads leaves the file exactly as it found it.  Every SQLite file is opened
through one ``file:`` URI built by :func:`sqlite_uri`, so any character in a
path (``#``, ``?``, ``%``, spaces, non-ASCII) names that file and nothing else.
"""

from __future__ import annotations

import os
import sqlite3
import threading
from contextlib import contextmanager
from dataclasses import dataclass
from pathlib import Path
from typing import TYPE_CHECKING, Iterator
from urllib.parse import quote

from tracker.errors import UserError

if TYPE_CHECKING:  # SQLAlchemy is imported where used, so `tracker --help` does not load it
    from sqlalchemy import Connection, Engine

DEFAULT_FILE = "tracker.sqlite"
ENV_VAR = "TRACKER_DB"
BUSY_TIMEOUT_MS = 5000
SQLITE_HEADER = b"SQLite format 3\x00"
# Row ids are Integer columns: 32-bit on PostgreSQL; SQLite's 64-bit integers hold them too.
ROW_ID_MAX = 2**31 - 1


def check_row_id(value: int, where: str) -> int:
    """Refuse an id no row can have (zero, negative, or beyond a 32-bit integer) before it reaches the store."""
    if not 1 <= value <= ROW_ID_MAX:
        raise UserError(f"{where}: {value} is not a valid number (1 to {ROW_ID_MAX})")
    return value


class DatabaseUnreadable(UserError):
    """The database file is not a SQLite database, or is damaged (named in the message)."""


def unreadable_reason(exc: BaseException) -> str | None:
    """What is wrong with a database file that SQLite cannot read, from its error (else None)."""
    orig = getattr(exc, "orig", exc)
    if not isinstance(orig, sqlite3.DatabaseError):
        return None
    low = str(orig).lower()
    for words, reason in (
        (("malformed", "corrupt"), "the database file is damaged (SQLite: database disk image is malformed)"),
        (("not a database",), "not a SQLite database file"),
        (("disk i/o error",), "the database file cannot be read (disk I/O error)"),
    ):
        if any(w in low for w in words):
            return reason
    return None


def sqlite_uri(path: Path, **params: str) -> str:
    """The ``file:`` URI of ``path`` with every special character percent-encoded.

    SQLite reads ``?`` as the start of the parameters and ``#`` as the end of the
    name, and decodes ``%XX``; an unquoted path holding any of them opens another
    file.  The absolute path is quoted byte by byte (UTF-8), keeping only ``/``.
    """
    uri = "file:" + quote(str(Path(path).absolute()), safe="/")
    if params:
        uri += "?" + "&".join(f"{k}={quote(str(v), safe='')}" for k, v in params.items())
    return uri


def sqlite_connect(path: Path, **params: str) -> sqlite3.Connection:
    """A sqlite3 connection to exactly ``path`` (see :func:`sqlite_uri`), autocommit, busy timeout set."""
    conn = sqlite3.connect(sqlite_uri(path, **params), uri=True, timeout=BUSY_TIMEOUT_MS / 1000,
                           isolation_level=None, check_same_thread=False)  # fmt: skip
    conn.execute(f"PRAGMA busy_timeout = {BUSY_TIMEOUT_MS}")
    return conn


def check_sqlite_file(path: Path, where: str = "--db") -> None:
    """Refuse a file that is not a SQLite database (an empty file is a new database)."""
    try:
        with open(path, "rb") as fh:
            head = fh.read(100)
    except IsADirectoryError:
        raise UserError(f"{where} {path}: is a folder, not a database file") from None
    if head and (len(head) < 100 or not head.startswith(SQLITE_HEADER)):
        raise DatabaseUnreadable(f"{where} {path}: not a SQLite database file (or its header is damaged)")


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
        from sqlalchemy.engine import make_url

        return make_url(self.url).render_as_string(hide_password=True)


def locate(db: str | None) -> Location:
    """Resolve ``--db`` / ``TRACKER_DB`` / the default file into a :class:`Location`."""
    target = db or os.environ.get(ENV_VAR) or DEFAULT_FILE
    if "://" in target:
        from sqlalchemy.engine import make_url
        from sqlalchemy.exc import ArgumentError

        try:
            url = make_url(target)
        except ArgumentError:
            raise UserError(f"--db: {target!r} is not a database URL") from None
        if url.get_backend_name() == "sqlite":
            path = Path(url.database or "").expanduser()
            return Location(f"sqlite:///{path}", path)
        if url.get_backend_name() != "postgresql":
            raise UserError(
                f"--db: unknown database kind {url.get_backend_name()!r}: give a SQLite file path "
                "or a postgresql+psycopg://... URL"
            )
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
    from sqlalchemy import create_engine
    from sqlalchemy.engine import URL
    from sqlalchemy.exc import ArgumentError

    if location.sqlite_path is not None:
        if not location.sqlite_path.exists():
            if not create:
                raise UserError(
                    f"no database at {location.sqlite_path}: run `tracker init` "
                    "(or `tracker demo`) first, or give --db"
                )
            _make_private(location.sqlite_path)
        path = location.sqlite_path
        check_sqlite_file(path)
        params = _read_only_params(path)
        # The URL only tells SQLAlchemy a file (not memory) is used; the file itself is opened
        # through its quoted URI, whatever characters its path holds.
        engine = create_engine(URL.create("sqlite", database=str(path.absolute())),
                               creator=lambda: sqlite_connect(path, **params))  # fmt: skip
        _configure_sqlite(engine)
        return engine
    try:
        return create_engine(location.url, pool_pre_ping=True)
    except (ArgumentError, ImportError) as exc:
        raise UserError(f"--db: cannot use {location.describe()} ({' '.join(str(exc).split())})") from None


def _read_only_params(path: Path) -> dict[str, str]:
    """URI parameters for a file this process cannot write (else none).

    SQLite in WAL mode writes ``-wal`` and ``-shm`` files beside the database even
    to read it.  A file that cannot be written (permissions, a read-only mount) is
    opened with ``mode=ro``, so that reading works and every write fails with
    "read-only"; on a read-only filesystem, where no ``-shm`` can be made, it is
    also opened ``immutable`` (safe only when no ``-wal`` file holds pending pages).
    """
    if os.access(path, os.W_OK) and os.access(path.parent, os.W_OK):
        return {}
    params = {"mode": "ro"}
    read_only_fs = bool(os.statvfs(path.parent).f_flag & os.ST_RDONLY)
    wal = path.with_name(path.name + "-wal")
    if read_only_fs and not (wal.exists() and wal.stat().st_size > 0):
        params["immutable"] = "1"
    return params


def _configure_sqlite(engine: Engine) -> None:
    from sqlalchemy import event

    @event.listens_for(engine, "connect")
    def _on_connect(dbapi_conn, _record):  # pragma: no cover - exercised by every test
        # Let SQLAlchemy's BEGIN below, not the driver, open transactions.
        dbapi_conn.isolation_level = None
        cur = dbapi_conn.cursor()
        cur.execute("PRAGMA foreign_keys = ON")
        cur.execute(f"PRAGMA busy_timeout = {BUSY_TIMEOUT_MS}")
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
    lock = _process_lock(engine)
    if not lock.acquire(timeout=PROCESS_WAIT_S):
        raise UserError(f"the store is busy: another write in this process held it for more than {PROCESS_WAIT_S} s; "
                        "try again")  # fmt: skip
    try:
        with engine.connect() as conn:
            if engine.dialect.name == "sqlite":
                use_wal(conn)
                conn = conn.execution_options(sqlite_begin="IMMEDIATE")
            with conn.begin():
                if engine.dialect.name == "postgresql":
                    _take_write_lock(conn)
                yield conn
    finally:
        lock.release()


# Writers in one process (the web app's threads) queue here, in order, before they ask the database
# for its write lock; the busy timeout is then only spent waiting for other processes. Without it,
# twenty threads poll SQLite's lock at once and the one holding it is starved of time.
PROCESS_WAIT_S = 120
_PROCESS_LOCKS: dict[str, threading.RLock] = {}
_PROCESS_LOCKS_GUARD = threading.Lock()


def _process_lock(engine: Engine) -> threading.RLock:
    key = engine.url.render_as_string(hide_password=True)
    with _PROCESS_LOCKS_GUARD:
        return _PROCESS_LOCKS.setdefault(key, threading.RLock())


def use_wal(conn: Connection) -> None:
    """Switch a SQLite file to the WAL journal (kept in the file), before a write transaction.

    Only writers do this: a command that only reads never changes the file's journal mode.
    """
    raw = conn.connection.driver_connection
    try:
        if raw.execute("PRAGMA journal_mode").fetchone()[0] != "wal":
            raw.execute("PRAGMA journal_mode = WAL")
    except sqlite3.OperationalError:  # a read-only file cannot switch; the write then fails clearly
        pass


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
    from sqlalchemy import text

    return conn.execute(text(sql), params).scalar()
