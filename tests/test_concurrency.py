"""Several users at once, on SQLite and (when configured) PostgreSQL: no lost update, clean refusals.

Writers are serialised on both backends (SQLite: ``BEGIN IMMEDIATE``; PostgreSQL:
one advisory lock per write transaction), so a writer either waits its turn or,
after the busy timeout, fails with one line and writes nothing.
"""

from __future__ import annotations

import json
import sqlite3
import subprocess
import sys

from sqlalchemy import text

from conftest import dump
from tracker.store.database import WRITE_LOCK_KEY_SQL, locate, make_engine

BUSY = "error: the database is busy (another user is writing); nothing was written: try again"


def _start(*args):
    return subprocess.Popen([sys.executable, "-m", "tracker", *map(str, args)], stdout=subprocess.PIPE,
                            stderr=subprocess.PIPE, text=True)  # fmt: skip


def test_writer_waiting_past_the_busy_timeout_writes_nothing(loaded_db, tmp_path):
    src = tmp_path / "families.csv"
    src.write_text("family,condition,notes\nFAM-T9,hypertrophic cardiomyopathy,\n")
    before = dump(loaded_db)
    engine = make_engine(locate(loaded_db))
    pg = engine.dialect.name == "postgresql"
    # Another user is writing: holds the write lock the tool's writers take.
    holder = engine.raw_connection() if pg else sqlite3.connect(loaded_db, isolation_level=None)
    try:
        cur = holder.cursor()
        cur.execute(f"SELECT pg_advisory_lock({WRITE_LOCK_KEY_SQL})" if pg else "BEGIN IMMEDIATE")
        p = _start("import", "families", src, "--db", loaded_db)
        out, err = p.communicate(timeout=60)
    finally:
        cur.execute(f"SELECT pg_advisory_unlock({WRITE_LOCK_KEY_SQL})" if pg else "ROLLBACK")
        holder.close()
        engine.dispose()
    assert p.returncode == 1
    assert err.strip().splitlines() == [BUSY]
    assert dump(loaded_db) == before


def test_concurrent_edits_of_one_field_keep_a_complete_history(loaded_db):
    """Four writers set the same field at once: each change is kept in order, none is lost."""
    values = ["note-a", "note-b", "note-c", "note-d"]
    procs = [_start("edit", "person", "T1-07", "--set", f"notes={v}", "--reason", f"writer {v}", "--json",
                    "--db", loaded_db) for v in values]  # fmt: skip
    results = [p.communicate(timeout=120) for p in procs]
    assert [p.returncode for p in procs] == [0, 0, 0, 0], results
    trail = json.loads(subprocess.run([sys.executable, "-m", "tracker", "audit", "--person", "T1-07", "--json",
                                       "--db", loaded_db], capture_output=True, text=True, check=True).stdout)  # fmt: skip
    notes = [(e["before"]["notes"], e["after"]["notes"]) for e in trail]
    assert len(notes) == 4 and notes[0][0] is None
    # Each writer saw the value the previous one left: a chain, with no lost update.
    for (_, prev_after), (before, _) in zip(notes, notes[1:]):
        assert before == prev_after
    assert sorted(a for _, a in notes) == values


def test_concurrent_importers_lose_nothing(loaded_db, tmp_path):
    header = "person,study_date,modality,site,height_cm,weight_kg,measure,value,unit\n"
    a, b = tmp_path / "a.csv", tmp_path / "b.csv"
    a.write_text(header + "".join(f"T1-05,2020-01-{d:02d},echo,,178,75,mwt_echo,9.{d % 10},mm\n" for d in range(1, 29)))
    b.write_text(header + "".join(f"T1-08,2021-02-{d:02d},echo,,165,60,mwt_echo,8.{d % 10},mm\n" for d in range(1, 29)))
    procs = [_start("import", "studies", f, "--db", loaded_db) for f in (a, b)]
    results = [p.communicate(timeout=120) for p in procs]
    assert [p.returncode for p in procs] == [0, 0], results
    engine = make_engine(locate(loaded_db))
    with engine.connect() as conn:
        n = conn.execute(text("SELECT count(*) FROM study s JOIN person p ON p.id = s.person_id "
                              "WHERE p.code IN ('T1-05', 'T1-08') AND s.study_date >= '2020-01-01'")).scalar()  # fmt: skip
    engine.dispose()
    assert n == 56
