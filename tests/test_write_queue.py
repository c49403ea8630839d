"""Writers in one process (the web app's threads) wait their turn for the store instead of failing.

Without the in-process queue every thread polls SQLite's write lock by itself, and a writer that
waits longer than the busy timeout fails with "database is locked" (a 500 in the web app). Here the
busy timeout is cut to 50 ms and eight threads each hold the lock for 100 ms: all must succeed and
every row must be written.
"""

from __future__ import annotations

import threading
import time

import pytest
from sqlalchemy import text

from tracker.store import database
from tracker.store.database import locate, make_engine, reading, writing


@pytest.fixture
def engine(tmp_path, monkeypatch):
    monkeypatch.setattr(database, "BUSY_TIMEOUT_MS", 50)
    eng = make_engine(locate(str(tmp_path / "queue.sqlite")), create=True)
    with writing(eng) as conn:
        conn.execute(text("CREATE TABLE t (n INTEGER)"))
    yield eng
    eng.dispose()


def test_threads_that_write_at_once_all_succeed(engine):
    errors: list[BaseException] = []

    def write(n: int) -> None:
        try:
            with writing(engine) as conn:
                conn.execute(text("INSERT INTO t (n) VALUES (:n)"), {"n": n})
                time.sleep(0.1)  # longer than the busy timeout
        except BaseException as exc:  # noqa: BLE001 - every failure is the finding
            errors.append(exc)

    threads = [threading.Thread(target=write, args=(n,)) for n in range(8)]
    for t in threads:
        t.start()
    for t in threads:
        t.join()
    assert errors == []
    with reading(engine) as conn:
        assert sorted(r[0] for r in conn.execute(text("SELECT n FROM t"))) == list(range(8))


def test_a_write_that_fails_releases_the_queue(engine):
    with pytest.raises(RuntimeError):
        with writing(engine) as conn:
            conn.execute(text("INSERT INTO t (n) VALUES (1)"))
            raise RuntimeError("refused")
    with writing(engine) as conn:  # not left waiting for a lock the failed write kept
        conn.execute(text("INSERT INTO t (n) VALUES (2)"))
    with reading(engine) as conn:
        assert [r[0] for r in conn.execute(text("SELECT n FROM t"))] == [2]
