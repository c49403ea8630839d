"""Faults of the storage itself: a full disk, a read-only filesystem, a migration killed part way.

Each test shows a clear one-line error (exit code 1), and that the database still
opens, passes `tracker check` and holds exactly what it held before.

The full-disk and read-only tests mount a small tmpfs (needs root and the mount
command, as on the project's CI machine) and skip cleanly elsewhere; the
portable full-database test uses SQLite's own page limit (``max_page_count``),
which makes SQLite return the same SQLITE_FULL error a full disk gives.
"""

from __future__ import annotations

import os
import subprocess
import sys
from pathlib import Path

import pytest

from conftest import MINI, dump
from tracker.store import migrate
from tracker.store.database import locate, make_engine, reading

HEADER = "person,study_date,modality,site,height_cm,weight_kg,measure,value,unit\n"


def _tracker(*args):
    return subprocess.run([sys.executable, "-m", "tracker", *map(str, args)], capture_output=True, text=True)


def _one_line(r, *expected):
    assert r.returncode == 1, (r.stdout, r.stderr)
    assert r.stderr.count("\n") == 1 and "Traceback" not in r.stderr, r.stderr
    for e in expected:
        assert e in r.stderr, r.stderr


def _big_studies(path: Path, studies: int) -> None:
    """Many invented echo studies of T1-05 (born 1995), one a day from 2010."""
    import datetime as dt

    start = dt.date(2010, 1, 1)
    lines = [HEADER]
    for i in range(studies):
        d = (start + dt.timedelta(days=i)).isoformat()
        for measure, value in (("mwt_echo", 9.0 + (i % 7) / 10), ("ivsd", 9.0), ("lvpwd", 8.5), ("lvidd", 48.0)):
            lines.append(f"T1-05,{d},echo,Invented Vale Hospital With A Long Site Name,178,75,{measure},{value},mm\n")
    path.write_text("".join(lines))


@pytest.fixture
def small_fs(tmp_path):
    """A fresh 4 MB tmpfs mounted under tmp_path (skips unless this process may mount)."""
    mnt = tmp_path / "fs"
    mnt.mkdir()
    if os.geteuid() != 0:
        pytest.skip("mounting a small filesystem needs root")
    r = subprocess.run(["mount", "-t", "tmpfs", "-o", "size=4m", "tmpfs", str(mnt)], capture_output=True, text=True)
    if r.returncode != 0:
        pytest.skip(f"cannot mount a tmpfs here: {r.stderr.strip()}")
    try:
        yield mnt
    finally:
        subprocess.run(["umount", "-l", str(mnt)], capture_output=True)


def _mini_at(path: Path) -> str:
    db = str(path)
    assert _tracker("init", "--db", db).returncode == 0
    r = _tracker("import", "all", MINI, "--db", db)
    assert r.returncode == 0, r.stderr
    return db


def test_full_disk_gives_a_clear_error_and_writes_nothing(small_fs, tmp_path):
    db = _mini_at(small_fs / "clinic.sqlite")
    before = dump(db)
    big = tmp_path / "studies.csv"
    _big_studies(big, 6000)  # ~24,000 values: several MB of pages, more than the disk has left
    filler = small_fs / "filler"
    free = os.statvfs(small_fs).f_bavail * os.statvfs(small_fs).f_frsize
    filler.write_bytes(b"\0" * max(free - 256 * 1024, 0))  # leave 256 kB
    _one_line(_tracker("import", "studies", big, "--db", db), "disk is full", "nothing was written")
    filler.unlink()
    assert dump(db) == before
    assert _tracker("check", "--db", db).returncode == 0


def test_full_database_page_limit_gives_a_clear_error(tmp_path):
    db = _mini_at(tmp_path / "clinic.sqlite")
    before = dump(db)
    big = tmp_path / "studies.csv"
    _big_studies(big, 3000)
    # The child caps the file a few pages above its current size on every connection.
    child = (
        "import sys\n"
        "from sqlalchemy import event\n"
        "from tracker.store import database\n"
        "real = database._configure_sqlite\n"
        "def capped(engine):\n"
        "    real(engine)\n"
        "    @event.listens_for(engine, 'connect')\n"
        "    def _cap(c, _r):\n"
        "        n = c.execute('PRAGMA page_count').fetchone()[0]\n"
        "        c.execute(f'PRAGMA max_page_count = {n + 8}')\n"
        "database._configure_sqlite = capped\n"
        "from tracker.cli.app import main\n"
        "sys.exit(main(sys.argv[1:]))\n"
    )
    r = subprocess.run([sys.executable, "-c", child, "import", "studies", str(big), "--db", db],
                       capture_output=True, text=True)  # fmt: skip
    _one_line(r, "disk is full", "nothing was written")
    assert dump(db) == before
    assert _tracker("check", "--db", db).returncode == 0


def test_read_only_filesystem_reads_but_refuses_writes(small_fs, tmp_path):
    db = _mini_at(small_fs / "clinic.sqlite")
    before = dump(db)
    r = subprocess.run(["mount", "-o", "remount,ro", str(small_fs)], capture_output=True, text=True)
    if r.returncode != 0:
        pytest.skip(f"cannot remount read-only: {r.stderr.strip()}")
    try:
        src = tmp_path / "families.csv"
        src.write_text("family,condition,notes\nFAM-T9,hypertrophic cardiomyopathy,\n")
        _one_line(_tracker("import", "families", src, "--db", db), "read-only", "nothing was written")
        _one_line(_tracker("edit", "person", "T1-07", "--set", "notes=x", "--reason", "r", "--db", db), "read-only")
        listed = _tracker("families", "--json", "--db", db)
        assert listed.returncode == 0 and "FAM-T1" in listed.stdout
        assert _tracker("check", "--db", db).returncode == 0
        assert dump(db) == before
    finally:
        subprocess.run(["mount", "-o", "remount,rw", str(small_fs)], capture_output=True)


# Runs the real upgrade in a child that kills itself (SIGKILL) in the middle of the last
# revision: after the earlier revisions' steps and the first DDL of the last one have run
# inside the migration's single transaction.
_KILL_MIGRATION = """
import os, signal, sys
from alembic.operations import Operations
from tracker.store import migrate
from tracker.store.database import locate, make_engine

real = Operations.add_column
def add_column(self, *a, **k):
    real(self, *a, **k)
    os.kill(os.getpid(), signal.SIGKILL)
Operations.add_column = add_column
migrate.upgrade(make_engine(locate(sys.argv[1])))
"""


def test_migration_killed_part_way_leaves_the_database_as_it_was(loaded_db):
    engine = make_engine(locate(loaded_db))
    migrate.downgrade(engine, "0002")
    engine.dispose()
    before = dump(loaded_db)
    r = subprocess.run([sys.executable, "-c", _KILL_MIGRATION, loaded_db], capture_output=True, text=True)
    assert r.returncode == -9, r.stderr  # killed, as planned
    assert dump(loaded_db) == before
    engine = make_engine(locate(loaded_db))
    with reading(engine) as conn:
        assert migrate.current_revision(conn) == "0002"
    engine.dispose()
    # The interrupted upgrade can simply be run again.
    assert _tracker("init", "--db", loaded_db).returncode == 0
    r = _tracker("check", "--db", loaded_db)
    assert r.returncode == 0, r.stdout + r.stderr


def _fill(fs: Path, leave: int) -> Path:
    filler = fs / "filler"
    free = os.statvfs(fs).f_bavail * os.statvfs(fs).f_frsize
    filler.write_bytes(b"\0" * max(free - leave, 0))
    return filler


def test_backup_onto_a_full_disk_is_one_line_and_leaves_nothing(small_fs, tmp_path):
    db = _mini_at(tmp_path / "clinic.sqlite")
    filler = _fill(small_fs, 64 * 1024)  # less than the database's size
    _one_line(_tracker("backup", small_fs / "bk#1.sqlite", "--db", db), "disk is full", "nothing was written")
    assert sorted(p.name for p in small_fs.iterdir()) == ["filler"]
    filler.unlink()
    assert _tracker("backup", small_fs / "bk#1.sqlite", "--db", db).returncode == 0


def test_restore_onto_a_full_disk_is_one_line_and_changes_nothing(small_fs, tmp_path):
    db = _mini_at(small_fs / "clinic.sqlite")
    backup = tmp_path / "backup.sqlite"
    assert _tracker("backup", backup, "--db", db).returncode == 0
    src = tmp_path / "families.csv"
    src.write_text("family,condition,notes\nFAM-T9,hypertrophic cardiomyopathy,\n")
    assert _tracker("import", "families", src, "--db", db).returncode == 0
    before = dump(db)
    names = sorted(p.name for p in small_fs.iterdir())
    filler = _fill(small_fs, 64 * 1024)
    _one_line(_tracker("restore", backup, "--force", "--db", db), "disk is full", "nothing was written")
    filler.unlink()
    assert sorted(p.name for p in small_fs.iterdir()) == names
    assert dump(db) == before
    assert _tracker("check", "--db", db).returncode == 0
