"""Faults: an import killed part way, a writer that cannot get the lock, backups, a read-only file.

Each test shows that the database still opens, passes `tracker check`, and holds
exactly what it held before the fault.
"""

from __future__ import annotations

import os
import signal
import sqlite3
import subprocess
import sys
from pathlib import Path

import pytest

from conftest import MINI, dump

HEADER = "person,study_date,modality,site,height_cm,weight_kg,measure,value,unit\n"


def _tracker(*args, check=False):
    return subprocess.run([sys.executable, "-m", "tracker", *map(str, args)], capture_output=True, text=True,
                          check=check)  # fmt: skip


def _large_studies(path: Path, studies: int) -> int:
    """An invented file of many echo studies for person T1-05 (born 1995), one per day from 2010."""
    import datetime as dt

    start = dt.date(2010, 1, 1)
    rows = []
    for i in range(studies):
        d = (start + dt.timedelta(days=i)).isoformat()
        for measure, value in (("mwt_echo", 9.0 + (i % 7) / 10), ("ivsd", 9.0), ("lvpwd", 8.5), ("lvidd", 48.0)):
            rows.append(f"T1-05,{d},echo,Invented Vale Hospital,178,75,{measure},{value},mm\n")
    path.write_text(HEADER + "".join(rows))
    return len(rows)


@pytest.fixture
def mini_db(sqlite_db, run):
    assert run("init", db=sqlite_db).code == 0
    assert run("import", "all", MINI, db=sqlite_db).code == 0
    return sqlite_db


# Runs the real importer in a child process that kills itself (SIGKILL) after a few
# chunks of measurement rows have been written inside the import transaction. A
# small page cache makes SQLite spill those pages into the write-ahead log first,
# so the kill lands with uncommitted data on disk.
_KILLER = """
import os, signal, sys
from pathlib import Path
from tracker.io import csv_import
from tracker.store.database import locate, make_engine, writing

csv_import.CHUNK = 1000
calls = []

def progress(n):
    calls.append(n)
    if len(calls) == 4:
        os.kill(os.getpid(), signal.SIGKILL)

engine = make_engine(locate(sys.argv[1]))
with writing(engine) as conn:
    conn.exec_driver_sql("PRAGMA cache_size = 8")
    csv_import.import_file(conn, "studies", Path(sys.argv[2]), progress=progress)
"""


def test_import_killed_part_way_leaves_the_database_as_it_was(mini_db, tmp_path):
    big = tmp_path / "studies.csv"
    _large_studies(big, 5000)  # 20,000 values
    before = dump(mini_db)
    conn = sqlite3.connect(mini_db)
    conn.execute("PRAGMA wal_checkpoint(TRUNCATE)")  # an empty log, so its growth shows the writes
    conn.close()
    proc = subprocess.run([sys.executable, "-c", _KILLER, mini_db, str(big)], capture_output=True, text=True)
    assert proc.returncode == -signal.SIGKILL, proc.stderr
    wal = Path(mini_db + "-wal")
    assert wal.exists() and wal.stat().st_size > 64 * 1024  # uncommitted pages had reached the disk
    assert dump(mini_db) == before
    r = _tracker("check", "--db", mini_db)
    assert r.returncode == 0, r.stderr + r.stdout


def test_writer_that_cannot_get_the_lock_fails_cleanly(mini_db, tmp_path):
    src = tmp_path / "families.csv"
    src.write_text("family,condition,notes\nFAM-T9,hypertrophic cardiomyopathy,\n")
    before = dump(mini_db)
    holder = sqlite3.connect(mini_db, isolation_level=None)
    holder.execute("BEGIN IMMEDIATE")  # another user holds the write lock
    try:
        r = _tracker("import", "families", src, "--db", mini_db)
    finally:
        holder.execute("ROLLBACK")
        holder.close()
    assert r.returncode == 1
    assert r.stderr.strip().splitlines() == [
        "error: the database is busy (another user is writing); nothing was written: try again"
    ]
    assert dump(mini_db) == before


def test_two_concurrent_importers_lose_nothing(mini_db, tmp_path):
    """Two processes import different files at once: both land, in full."""
    a, b = tmp_path / "a.csv", tmp_path / "b.csv"
    a.write_text(HEADER + "".join(
        f"T1-05,2020-01-{d:02d},echo,,178,75,mwt_echo,9.{d % 10},mm\n" for d in range(1, 29)))  # fmt: skip
    b.write_text(HEADER + "".join(
        f"T1-08,2021-02-{d:02d},echo,,165,60,mwt_echo,8.{d % 10},mm\n" for d in range(1, 29)))  # fmt: skip
    procs = [subprocess.Popen([sys.executable, "-m", "tracker", "import", "studies", str(f), "--db", mini_db],
                              stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True) for f in (a, b)]  # fmt: skip
    outs = [p.communicate(timeout=120) for p in procs]
    assert [p.returncode for p in procs] == [0, 0], outs
    import tracker.store.repository as repo
    from tracker.store.database import locate, make_engine, reading

    engine = make_engine(locate(mini_db))
    with reading(engine) as conn:
        studies = repo.load_studies(conn)
    engine.dispose()
    assert len(studies[studies["person"] == "T1-05"]) == 28
    assert len(studies[studies["person"] == "T1-08"]) == 28


def test_backup_restore_round_trip(mini_db, tmp_path, run):
    before = dump(mini_db)
    backup = tmp_path / "backup.sqlite"
    r = run("backup", backup, db=mini_db)
    assert r.code == 0, r
    assert oct(os.stat(backup).st_mode & 0o777) == "0o600"
    # Change the live database after the backup, then restore.
    extra = tmp_path / "families.csv"
    extra.write_text("family,condition,notes\nFAM-T9,hypertrophic cardiomyopathy,\n")
    assert run("import", "families", extra, db=mini_db).code == 0
    r = run("restore", backup, db=mini_db)
    assert r.code == 1 and "--force" in r.err  # refuses to overwrite without --force
    r = run("restore", backup, "--force", db=mini_db)
    assert r.code == 0, r
    after = dump(mini_db)
    # Everything as at the backup; the audit trail keeps the later import and notes the restore itself.
    later = [row for row in after["audit_entry"] if row not in before["audit_entry"]]
    assert [row[3] for row in sorted(later)] == ["import", "restore"]
    after["audit_entry"] = [row for row in after["audit_entry"] if row in before["audit_entry"]]
    assert after == before
    assert run("check", db=mini_db).code == 0


def test_restore_verifies_the_backup_first(mini_db, tmp_path, run):
    bad = tmp_path / "bad.sqlite"
    bad.write_bytes(b"this is not a database")
    before = dump(mini_db)
    r = run("restore", bad, "--force", db=mini_db)
    assert r.code == 1 and "not a SQLite database" in r.err
    assert dump(mini_db) == before


def test_check_reports_a_problem_with_where_it_is(mini_db, run):
    conn = sqlite3.connect(mini_db)
    conn.execute("UPDATE measurement SET value = 400 WHERE measure_code = 'mwt_echo' AND value = 11.4")
    conn.commit()
    conn.close()
    r = run("check", "--json", db=mini_db)
    assert r.code == 1
    import json

    findings = json.loads(r.out)["findings"]
    assert any(f["check"] == "range" and "T1-06 2024-05-02 echo mwt_echo" in f["where"] for f in findings)


@pytest.mark.skipif(os.geteuid() == 0, reason="root can write a read-only file")
def test_read_only_database_gives_a_clear_error(mini_db, tmp_path):
    os.chmod(mini_db, 0o400)
    src = tmp_path / "families.csv"
    src.write_text("family,condition,notes\nFAM-T9,hypertrophic cardiomyopathy,\n")
    r = _tracker("import", "families", src, "--db", mini_db)
    assert r.returncode == 1 and "read-only" in r.stderr


# --------------------------------------------------------------------------- paths, history, full disk

AWKWARD_NAMES = ["bk#1", "what?mode=ro", "100%25 sure", "with space", "Ødegård-été", "a#b?c%d e"]


def _trail(db):
    return sorted(dump(db)["audit_entry"])


@pytest.mark.parametrize("name", AWKWARD_NAMES)
def test_backup_and_restore_with_awkward_characters_in_paths(tmp_path, run, name):
    folder = tmp_path / name
    folder.mkdir()
    db = str(folder / f"{name}.sqlite")
    assert run("init", db=db).code == 0
    assert run("import", "all", MINI, db=db).code == 0
    before = dump(db)
    backup = folder / f"{name}-backup.sqlite"
    r = run("backup", backup, db=db)
    assert r.code == 0, r
    assert oct(os.stat(backup).st_mode & 0o777) == "0o600"
    extra = tmp_path / "families.csv"
    extra.write_text("family,condition,notes\nFAM-T9,hypertrophic cardiomyopathy,\n")
    assert run("import", "families", extra, db=db).code == 0
    r = run("restore", backup, "--force", "--json", db=db)
    assert r.code == 0, r
    after = dump(db)
    assert after["family"] == before["family"]  # FAM-T9 is gone again: the restore took effect
    # Nothing else appears beside the database: no stray copy, no partial file.
    left = sorted(p.name for p in folder.iterdir())
    allowed = {f"{name}.sqlite", f"{name}.sqlite-wal", f"{name}.sqlite-shm", f"{name}-backup.sqlite"}
    assert set(left) <= allowed, left
    assert sorted(p.name for p in tmp_path.iterdir()) == sorted(["families.csv", name])
    assert run("check", db=db).code == 0


def test_restore_keeps_every_later_audit_entry_and_names_them(mini_db, tmp_path, run):
    import json

    backup = tmp_path / "backup.sqlite"
    assert run("backup", backup, db=mini_db).code == 0
    for i in range(3):
        r = run("edit", "person", "T1-07", "--set", f"notes=call {i}", "--reason", "r", "--user", "nurse.a",
                db=mini_db)  # fmt: skip
        assert r.code == 0, r
    trail_before = _trail(mini_db)
    r = run("restore", backup, "--force", "--user", "admin.b", "--json", db=mini_db)
    assert r.code == 0, r
    out = json.loads(r.out)
    trail_after = _trail(mini_db)
    assert trail_after[:-1] == trail_before  # same ids, same content, same hashes
    note = trail_after[-1]
    ids = [row[0] for row in trail_before]
    assert note[0] == max(ids) + 1 and note[2] == "admin.b" and note[3] == "restore"
    after = json.loads(note[10])
    assert after["carried_over"] == {"first": ids[-3], "last": ids[-1], "count": 3}
    assert after["backup"] == str(backup) and len(after["backup_sha256"]) == 64
    assert out["audit_entries_carried_over"] == 3 and out["restore_entry"] == note[0]
    # The data is as at the backup: the edits are undone, their history is not.
    r = run("person", "T1-07", "--json", db=mini_db)
    assert "call 2" not in r.out
    assert run("check", db=mini_db).code == 0
    # A second restore of the same backup keeps the first restore's entry too.
    assert run("restore", backup, "--force", db=mini_db).code == 0
    assert _trail(mini_db)[:-1] == trail_after


def test_restore_refuses_a_backup_of_another_database(mini_db, tmp_path, run):
    other = str(tmp_path / "other.sqlite")
    assert run("init", db=other).code == 0
    extra = tmp_path / "families.csv"
    extra.write_text("family,condition,notes\nFAM-T9,hypertrophic cardiomyopathy,\n")
    assert run("import", "families", extra, db=other).code == 0
    backup = tmp_path / "other-backup.sqlite"
    assert run("backup", backup, db=other).code == 0
    before = dump(mini_db)
    r = run("restore", backup, "--force", db=mini_db)
    assert r.code == 1 and "not a backup of this database" in r.err and r.err.count("\n") == 1, r
    assert dump(mini_db) == before
    assert sorted(p.name for p in tmp_path.iterdir() if "restoring" in p.name) == []


def test_restore_over_an_unreadable_database_keeps_the_old_file(mini_db, tmp_path, run):
    backup = tmp_path / "backup.sqlite"
    assert run("backup", backup, db=mini_db).code == 0
    for p in Path(mini_db).parent.glob("test.sqlite-*"):
        p.unlink()
    Path(mini_db).write_bytes(b"garbage that is not a database" * 100)
    r = run("restore", backup, "--force", "--json", db=mini_db)
    assert r.code == 0, r
    import json

    kept = json.loads(r.out)["previous_file_kept_as"]
    assert Path(kept).read_bytes().startswith(b"garbage")
    assert run("check", db=mini_db).code == 0


def test_full_disk_during_backup_or_restore_is_one_line_and_leaves_nothing(mini_db, tmp_path, run, monkeypatch):
    """Injected fault (portable): the copy fails with ENOSPC part way."""
    import errno

    from tracker.store import backup as bk

    good = tmp_path / "good.sqlite"
    assert run("backup", good, db=mini_db).code == 0
    real = bk._copy

    def full(source, target_path):
        real(source, target_path)
        raise OSError(errno.ENOSPC, "No space left on device")

    monkeypatch.setattr(bk, "_copy", full)
    before = dump(mini_db)
    files = sorted(p.name for p in tmp_path.iterdir())
    for args in (("backup", tmp_path / "new.sqlite"), ("restore", good, "--force")):
        r = run(*args, db=mini_db)
        assert r.code == 1 and "disk is full" in r.err and r.err.count("\n") == 1, r
        assert sorted(p.name for p in tmp_path.iterdir()) == files
        assert dump(mini_db) == before


def test_restore_to_a_new_file_and_onto_an_older_copy(mini_db, tmp_path, run):
    """Nothing to carry over (a new file), and a backup whose trail extends the database's."""
    old_copy = tmp_path / "old-copy.sqlite"
    assert run("backup", old_copy, db=mini_db).code == 0
    r = run("edit", "person", "T1-07", "--set", "notes=later", "--reason", "r", db=mini_db)
    assert r.code == 0, r
    newer = tmp_path / "newer.sqlite"
    assert run("backup", newer, db=mini_db).code == 0
    fresh = str(tmp_path / "fresh.sqlite")
    r = run("restore", newer, db=fresh)
    assert r.code == 0, r
    assert _trail(fresh)[:-1] == _trail(str(newer))
    # The older copy's trail is the beginning of the newer backup's: nothing of it is lost.
    target = tmp_path / "target.sqlite"
    assert run("backup", target, db=str(old_copy)).code == 0
    r = run("restore", newer, "--force", db=str(target))
    assert r.code == 0, r
    assert _trail(str(target))[:-1] == _trail(str(newer))
    assert run("check", db=str(target)).code == 0


def test_restore_of_a_backup_from_an_older_schema_upgrades_the_restored_copy(mini_db, tmp_path, run):
    import json

    from tracker.store import migrate
    from tracker.store.database import locate, make_engine

    old = str(tmp_path / "old.sqlite")
    src, dst = sqlite3.connect(mini_db), sqlite3.connect(old)
    src.backup(dst)
    src.close()
    dst.close()
    engine = make_engine(locate(old))
    migrate.downgrade(engine, "0005")
    engine.dispose()
    backup = tmp_path / "at-0005.sqlite"
    assert run("backup", backup, db=old).code == 0
    backup_bytes = backup.read_bytes()
    assert run("edit", "person", "T1-07", "--set", "notes=later", "--reason", "r", db=mini_db).code == 0
    trail = _trail(mini_db)
    r = run("restore", backup, "--force", "--json", db=mini_db)
    assert r.code == 0, r
    out = json.loads(r.out)
    assert out["upgraded_from"] == "0005" and out["revision"] == migrate.head_revision()
    assert _trail(mini_db)[:-1] == trail
    assert backup.read_bytes() == backup_bytes  # the backup itself is never changed
    assert run("check", db=mini_db).code == 0
