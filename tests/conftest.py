"""Shared test fixtures: a fresh database on SQLite and, when configured, on PostgreSQL.

PostgreSQL tests read the server URL from TRACKER_TEST_POSTGRES_URL (for
example ``postgresql+psycopg://root@127.0.0.1:5432/test``) and skip when it is
unset.  Each test gets its own schema on that server, dropped afterwards.
"""

from __future__ import annotations

import os
import uuid
from pathlib import Path

import pytest
from hypothesis import settings as hypothesis_settings
from sqlalchemy import create_engine, inspect, text

from tracker.cli.app import main

# Property tests check results, never speed: no per-example deadline, so a busy machine
# cannot fail them (speed targets live in the benchmark, benchmarks/cohort.py).
hypothesis_settings.register_profile("no_deadline", deadline=None)
hypothesis_settings.load_profile("no_deadline")

PG_ENV = "TRACKER_TEST_POSTGRES_URL"
PG_URL = os.environ.get(PG_ENV)
DATA = Path(__file__).parent / "data"
MINI = DATA / "mini"
BACKENDS = ["sqlite", "postgresql"]


def _pg_schema_url(schema: str) -> str:
    sep = "&" if "?" in PG_URL else "?"
    return f"{PG_URL}{sep}options=-csearch_path%3D{schema}"


@pytest.fixture(params=BACKENDS)
def db_url(request, tmp_path):
    """A URL (or SQLite path) of an empty database on each backend."""
    if request.param == "sqlite":
        yield str(tmp_path / "test.sqlite")
        return
    if not PG_URL:
        pytest.skip(f"{PG_ENV} is not set")
    schema = "t_" + uuid.uuid4().hex[:12]
    admin = create_engine(PG_URL)
    with admin.begin() as conn:
        conn.execute(text(f'CREATE SCHEMA "{schema}"'))
    try:
        yield _pg_schema_url(schema)
    finally:
        with admin.begin() as conn:
            conn.execute(text(f'DROP SCHEMA "{schema}" CASCADE'))
        admin.dispose()


@pytest.fixture
def sqlite_db(tmp_path):
    return str(tmp_path / "test.sqlite")


class Result:
    def __init__(self, code: int, out: str, err: str):
        self.code, self.out, self.err = code, out, err

    def __repr__(self) -> str:
        return f"Result(code={self.code}, out={self.out[:300]!r}, err={self.err[:300]!r})"


@pytest.fixture
def run(capsys):
    """Run the command line in-process: run("import", "people", path, db=url) -> Result."""

    def _run(*args, db: str | None = None) -> Result:
        argv = [str(a) for a in args]
        if db is not None:
            argv += ["--db", db]
        capsys.readouterr()
        code = main(argv)
        captured = capsys.readouterr()
        return Result(code, captured.out, captured.err)

    return _run


def dump(url: str) -> dict[str, list[tuple]]:
    """Every row of every table, sorted: two equal dumps mean two equal databases."""
    from tracker.store.database import locate, make_engine

    engine = make_engine(locate(url))
    result = {}
    with engine.connect() as conn:
        for table in sorted(inspect(conn).get_table_names()):
            rows = conn.execute(text(f'SELECT * FROM "{table}"')).all()
            result[table] = sorted((tuple(r) for r in rows), key=repr)
    engine.dispose()
    return result


@pytest.fixture
def loaded_db(db_url, run):
    """A database holding the invented mini test families."""
    r = run("init", db=db_url)
    assert r.code == 0, r
    r = run("import", "all", MINI, db=db_url)
    assert r.code == 0, r
    return db_url
