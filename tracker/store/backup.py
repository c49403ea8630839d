"""Backing up and restoring a SQLite store with SQLite's online backup API.

The backup API copies a consistent snapshot page by page while other
connections keep reading and writing, so a backup can be taken during clinic
hours.  A backup is verified (integrity check, schema revision) before it is
reported as made, and again before it is restored.  PostgreSQL stores are
backed up with the server's own tools (``pg_dump``; see docs/operations.md).
"""

from __future__ import annotations

import os
import sqlite3
from dataclasses import dataclass
from pathlib import Path

from tracker.errors import UserError
from tracker.store.database import BUSY_TIMEOUT_MS, Location


@dataclass(frozen=True)
class BackupInfo:
    file: str
    revision: str | None
    pages: int
    bytes: int

    def as_dict(self) -> dict:
        return {"file": self.file, "revision": self.revision, "pages": self.pages, "bytes": self.bytes}


def _require_sqlite(location: Location) -> Path:
    if location.sqlite_path is None:
        raise UserError(
            "backup and restore work on SQLite files; for PostgreSQL use pg_dump and pg_restore "
            "(see docs/operations.md)"
        )
    return location.sqlite_path


def _open(path: Path, *, readonly: bool) -> sqlite3.Connection:
    uri = f"file:{path}?mode=ro" if readonly else f"file:{path}"
    conn = sqlite3.connect(uri, uri=True, timeout=BUSY_TIMEOUT_MS / 1000, isolation_level=None)
    conn.execute(f"PRAGMA busy_timeout = {BUSY_TIMEOUT_MS}")
    return conn


def verify(path: Path) -> BackupInfo:
    """Check that ``path`` is an intact tracker database; return what it holds."""
    if not path.is_file():
        raise UserError(f"{path}: not found")
    with path.open("rb") as fh:
        if fh.read(16) != b"SQLite format 3\x00":
            raise UserError(f"{path.name}: not a SQLite database file")
    conn = _open(path, readonly=True)
    try:
        result = conn.execute("PRAGMA integrity_check").fetchall()
        if result != [("ok",)]:
            raise UserError(f"{path.name}: integrity check failed ({result[0][0]})")
        tables = {r[0] for r in conn.execute("SELECT name FROM sqlite_master WHERE type = 'table'")}
        if "alembic_version" not in tables or "person" not in tables:
            raise UserError(f"{path.name}: not a tracker database (no schema revision)")
        revision = conn.execute("SELECT version_num FROM alembic_version").fetchone()
        pages = conn.execute("PRAGMA page_count").fetchone()[0]
    except sqlite3.DatabaseError as exc:
        raise UserError(f"{path.name}: not a readable SQLite database ({exc})") from None
    finally:
        conn.close()
    return BackupInfo(str(path), revision[0] if revision else None, pages, path.stat().st_size)


def _copy(source: sqlite3.Connection, target_path: Path) -> None:
    """Copy ``source`` into a new file ``target_path`` (mode 0600) with the backup API."""
    fd = os.open(target_path, os.O_CREAT | os.O_EXCL | os.O_WRONLY, 0o600)
    os.close(fd)
    target = sqlite3.connect(target_path, isolation_level=None)
    try:
        source.backup(target, pages=256)
        target.execute("PRAGMA journal_mode = DELETE")  # one self-contained file
    finally:
        target.close()


def backup(location: Location, out: Path, *, force: bool = False) -> BackupInfo:
    """Write a consistent copy of the store to ``out`` and verify it."""
    src_path = _require_sqlite(location)
    if not src_path.is_file():
        raise UserError(f"no database at {src_path}")
    if out.exists() and not force:
        raise UserError(f"{out} exists; give --force to replace it")
    if out.resolve() == src_path.resolve():
        raise UserError("the backup file cannot be the database itself")
    tmp = out.with_name(out.name + ".partial")
    tmp.unlink(missing_ok=True)
    source = _open(src_path, readonly=False)
    try:
        _copy(source, tmp)
    finally:
        source.close()
    info = verify(tmp)
    os.replace(tmp, out)  # the finished, verified copy appears at once or not at all
    return BackupInfo(str(out), info.revision, info.pages, out.stat().st_size)


def restore(location: Location, backup_file: Path, *, force: bool = False) -> BackupInfo:
    """Replace the store with a verified backup (refuses to overwrite without ``force``)."""
    target_path = _require_sqlite(location)
    info = verify(backup_file)
    if target_path.exists() and not force:
        raise UserError(f"{target_path} exists; restoring replaces it: give --force")
    source = _open(backup_file, readonly=True)
    try:
        if target_path.exists():
            # Copy into the live file through SQLite, so open connections see a consistent switch.
            target = _open(target_path, readonly=False)
            try:
                source.backup(target, pages=256)
            finally:
                target.close()
        else:
            _copy(source, target_path)
            conn = _open(target_path, readonly=False)
            conn.execute("PRAGMA journal_mode = WAL")
            conn.close()
    finally:
        source.close()
    verify(target_path)
    return info
