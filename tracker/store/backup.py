"""Backing up and restoring a SQLite store with SQLite's online backup API.

The backup API copies a consistent snapshot page by page while other
connections keep reading and writing, so a backup can be taken during clinic
hours.  A backup is verified (integrity check, schema revision) before it is
reported as made, and again before it is restored.  PostgreSQL stores are
backed up with the server's own tools (``pg_dump``; see docs/operations.md).

Restoring brings back the data of the backup but never the past of the audit
trail: the restored store keeps every entry of the store it replaces (the
backup's own trail is a prefix of it), followed by one ``restore`` entry that
names the backup and the entries carried over.  The restored store is prepared
in a private file beside the database (upgraded to this version's schema if the
backup is older, trail carried over, restore entry appended, verified), then
copied into the database in one step; on any failure (a full disk included)
nothing is changed and nothing is left behind.
"""

from __future__ import annotations

import datetime as dt
import errno
import hashlib
import os
import sqlite3
from contextlib import contextmanager
from dataclasses import dataclass
from pathlib import Path
from typing import Iterator

from tracker.errors import UserError
from tracker.store.database import SQLITE_HEADER, Location, sqlite_connect


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
    return sqlite_connect(path, mode="ro") if readonly else sqlite_connect(path)


def _disk_full(exc: BaseException) -> bool:
    if isinstance(exc, OSError) and exc.errno in (errno.ENOSPC, errno.EDQUOT):
        return True
    low = str(exc).lower()
    return isinstance(exc, sqlite3.Error) and ("full" in low or "no space" in low)


@contextmanager
def _private_file(path: Path, what: str) -> Iterator[Path]:
    """A scratch path for a private file (0600): whatever is left at it is removed when the block ends.

    A full disk becomes one clear line naming the folder.
    """
    leftovers = [path, *(path.with_name(path.name + s) for s in ("-journal", "-wal", "-shm"))]
    for p in leftovers:
        p.unlink(missing_ok=True)
    try:
        yield path
    except BaseException as exc:
        if _disk_full(exc):
            raise UserError(f"{path.parent}: the disk is full; {what}: nothing was written") from None
        raise
    finally:
        for p in leftovers:
            p.unlink(missing_ok=True)


def verify(path: Path) -> BackupInfo:
    """Check that ``path`` is an intact tracker database; return what it holds."""
    if not path.is_file():
        raise UserError(f"{path}: not found")
    with path.open("rb") as fh:
        if fh.read(16) != SQLITE_HEADER:
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
    target = sqlite_connect(target_path)
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
    if out.is_symlink():
        raise UserError(f"{out}: is a symbolic link; give the path of a plain file")
    if not out.parent.is_dir():
        raise UserError(f"{out.parent}: folder does not exist")
    with _private_file(out.with_name(out.name + ".partial"), "the backup was not made") as tmp:
        source = _open(src_path, readonly=False)
        try:
            _copy(source, tmp)
        finally:
            source.close()
        info = verify(tmp)
        os.replace(tmp, out)  # the finished, verified copy appears at once or not at all
    return BackupInfo(str(out), info.revision, info.pages, out.stat().st_size)


@dataclass(frozen=True)
class RestoreInfo:
    file: str
    revision: str | None
    upgraded_from: str | None
    carried_over: int
    restore_entry: int
    previous_file_kept_as: str | None = None

    def as_dict(self) -> dict:
        return {"restored_from": self.file, "revision": self.revision, "upgraded_from": self.upgraded_from,
                "audit_entries_carried_over": self.carried_over, "restore_entry": self.restore_entry,
                "previous_file_kept_as": self.previous_file_kept_as}  # fmt: skip


def _engine(path: Path):
    from tracker.store.database import make_engine

    return make_engine(Location(f"sqlite:///{path}", path))


def _current_trail(target: Path) -> tuple[list[dict] | None, str | None]:
    """Every audit entry of the database being replaced (oldest first), or (None, why not)."""
    from sqlalchemy import inspect, select

    from tracker.store import audit
    from tracker.store.database import reading
    from tracker.store.models import AuditEntry

    if not target.exists():
        return [], None
    try:
        engine = _engine(target)
        try:
            with reading(engine) as conn:
                names = set(inspect(conn).get_table_names())
                if "audit_entry" not in names:
                    return ([], None) if "person" in names else (None, "it holds no tracker audit trail")
                cols = {c["name"] for c in inspect(conn).get_columns("audit_entry")}
                fields = [*audit.HASHED] + (["entry_hash"] if "entry_hash" in cols else [])
                rows = conn.execute(select(*(getattr(AuditEntry, f) for f in fields)).order_by(AuditEntry.id)).all()
        finally:
            engine.dispose()
    except UserError as exc:
        return None, str(exc)
    except Exception as exc:  # a damaged file: restoring is how it is mended
        return None, " ".join(str(getattr(exc, "orig", exc)).split())[:200]
    return [dict(zip(fields, r)) for r in rows], None


def _sha256(path: Path) -> str:
    h = hashlib.sha256()
    with path.open("rb") as fh:
        for block in iter(lambda: fh.read(1 << 20), b""):
            h.update(block)
    return h.hexdigest()


def _prepare(tmp: Path, backup_file: Path, info: BackupInfo, trail: list[dict] | None, why: str | None,
             kept_as: Path | None, user: str | None) -> RestoreInfo:
    """Make ``tmp`` the store to restore: the backup at this schema, the current trail, the restore entry."""
    from sqlalchemy import insert, select

    from tracker.store import audit, migrate
    from tracker.store.database import writing
    from tracker.store.models import AuditEntry

    source = _open(backup_file, readonly=True)
    try:
        _copy(source, tmp)
    finally:
        source.close()
    engine = _engine(tmp)
    try:
        upgraded_from = None
        if info.revision != migrate.head_revision():
            before, _after = migrate.upgrade(engine)
            upgraded_from = before
        with writing(engine) as conn:
            fields = [*audit.HASHED, "entry_hash"]
            restored = [dict(zip(fields, r)) for r in
                        conn.execute(select(*(getattr(AuditEntry, f) for f in fields)).order_by(AuditEntry.id))]  # fmt: skip
            carried = []
            if trail:  # the database being replaced has history: keep all of it
                common = 0
                for old, new in zip(trail, restored):
                    if any(old[f] != new[f] for f in audit.HASHED):
                        break
                    common += 1
                # One trail must begin the other: the backup is older (entries to carry over) or newer
                # (the database's whole trail is already in it); anything else is another database.
                if common < min(len(trail), len(restored)):
                    raise UserError(
                        f"{backup_file}: its audit trail differs from the database's at entry "
                        f"{restored[common]['id']}: it is not a backup of this database (restore it to a new "
                        "--db file instead); nothing was changed"
                    )
                carried = trail[common:]
                for row in carried:  # verbatim, stored hash included: a broken chain stays visible
                    conn.execute(insert(AuditEntry), {**{f: row.get(f) for f in fields}})
            after = {
                "backup": str(backup_file),
                "backup_sha256": _sha256(backup_file),
                "backup_revision": info.revision,
                "backup_last_entry": restored[-1]["id"] if restored else None,
                "carried_over": ({"first": carried[0]["id"], "last": carried[-1]["id"], "count": len(carried)}
                                 if carried else None),
            }  # fmt: skip
            if upgraded_from is not None:
                after["upgraded_from_revision"] = upgraded_from
            if why is not None:
                after["previous_trail_unreadable"] = why
            if kept_as is not None:
                after["previous_file_kept_as"] = str(kept_as)
            what = f"restored from backup {backup_file}"
            what += (f"; audit entries {carried[0]['id']} to {carried[-1]['id']} carried over" if carried
                     else "; no audit entries to carry over")  # fmt: skip
            entry = audit.record(conn, action="restore", table="database", what=what, after=after, user=user)
    finally:
        engine.dispose()
    conn = _open(tmp, readonly=False)
    try:
        conn.execute("PRAGMA journal_mode = DELETE")
    finally:
        conn.close()
    verify(tmp)
    return RestoreInfo(str(backup_file), migrate.head_revision(), upgraded_from, len(carried), entry,
                       str(kept_as) if kept_as else None)  # fmt: skip


def restore(location: Location, backup_file: Path, *, force: bool = False, user: str | None = None) -> RestoreInfo:
    """Replace the store with a verified backup, keeping the current audit trail (refuses without ``force``).

    Steps: verify the backup; read the current trail; build the restored store in a
    private file beside the database; copy it into the database in one step (the
    online backup API, so open connections switch consistently).  A database file
    that cannot be read at all is not overwritten: it is renamed aside and named in
    the restore entry.
    """
    from tracker.store import migrate

    target_path = _require_sqlite(location)
    info = verify(backup_file)
    if target_path.exists() and not force:
        raise UserError(f"{target_path} exists; restoring replaces it: give --force")
    if target_path.exists() and target_path.resolve() == backup_file.resolve():
        raise UserError("the backup file is the database itself")
    if not target_path.parent.is_dir():
        raise UserError(f"--db: folder {target_path.parent} does not exist")
    known = {s.revision for s in migrate.ScriptDirectory.from_config(migrate.alembic_config()).walk_revisions()}
    if info.revision not in known:
        raise UserError(f"{backup_file}: schema revision {info.revision} was written by a newer version of the tool")
    trail, why = _current_trail(target_path)
    kept_as = None
    if trail is None:
        stamp = dt.datetime.now(dt.timezone.utc).strftime("%Y%m%dT%H%M%SZ")
        kept_as = target_path.with_name(f"{target_path.name}.unreadable-{stamp}")
    with _private_file(target_path.with_name(target_path.name + ".restoring"), "the database was not restored") as tmp:
        result = _prepare(tmp, backup_file, info, trail, why, kept_as, user)
        if kept_as is not None:
            for suffix in ("", "-wal", "-shm", "-journal"):
                old = target_path.with_name(target_path.name + suffix)
                if old.exists():
                    os.replace(old, kept_as.with_name(kept_as.name + suffix))
            os.replace(tmp, target_path)
        elif not target_path.exists():
            os.replace(tmp, target_path)
        else:
            _swap_into(tmp, target_path, trail)
    conn = _open(target_path, readonly=False)
    try:
        conn.execute("PRAGMA journal_mode = WAL")
    finally:
        conn.close()
    verify(target_path)
    return result


def _swap_into(tmp: Path, target_path: Path, trail: list[dict]) -> None:
    """Copy the prepared store into the live database in one step, unless its trail grew meanwhile."""
    source = _open(tmp, readonly=True)
    target = _open(target_path, readonly=False)
    try:
        try:
            last = target.execute("SELECT max(id) FROM audit_entry").fetchone()[0]
        except sqlite3.OperationalError:  # a store from before the audit trail existed
            last = None
        if (trail[-1]["id"] if trail else None) != last:
            raise UserError("the database was written to during the restore; nothing was restored: try again")
        source.backup(target, pages=-1)  # one step: other connections see the old store or the new one
    finally:
        target.close()
        source.close()
