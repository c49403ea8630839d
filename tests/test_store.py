"""The store: migrations up and down on both backends, schema agrees with the models, SQLite set-up."""

from __future__ import annotations

import os
import stat

import pytest
from alembic.autogenerate import compare_metadata
from alembic.runtime.migration import MigrationContext
from sqlalchemy import inspect, text

from conftest import dump
from tracker.domain import vocabulary as V
from tracker.errors import UserError
from tracker.store import migrate
from tracker.store.database import locate, make_engine, reading, writing
from tracker.store.models import Base

TABLES = {
    "alembic_version", "assessment", "family", "genetic_result", "import_run", "measure",
    "measurement", "person", "study", "variant", "variant_classification",
}  # fmt: skip


def _engine(url, create=False):
    return make_engine(locate(url), create=create)


def test_upgrade_empty_to_head_and_back(db_url):
    engine = _engine(db_url, create=True)
    before, after = migrate.upgrade(engine)
    assert before is None and after == migrate.head_revision()
    with reading(engine) as conn:
        assert TABLES <= set(inspect(conn).get_table_names())
        assert conn.execute(text("SELECT count(*) FROM measure")).scalar() >= 21
    migrate.downgrade(engine, "base")
    with reading(engine) as conn:
        assert set(inspect(conn).get_table_names()) <= {"alembic_version"}
        assert migrate.current_revision(conn) is None
    migrate.upgrade(engine)
    with reading(engine) as conn:
        assert migrate.current_revision(conn) == migrate.head_revision()
    engine.dispose()


def test_each_revision_downgrades_and_upgrades_with_data(loaded_db):
    """Walking down one revision at a time and back up keeps the imported records."""
    engine = _engine(loaded_db)
    before = dump(loaded_db)
    script = migrate.ScriptDirectory.from_config(migrate.alembic_config())
    revisions = [s.revision for s in script.walk_revisions()]  # head first
    for rev in revisions[1:]:
        migrate.downgrade(engine, rev)
        migrate.upgrade(engine)
        assert dump(loaded_db) == before
    engine.dispose()


def test_models_match_migrations(db_url):
    """The SQLAlchemy models describe exactly the schema the migrations build."""
    engine = _engine(db_url, create=True)
    migrate.upgrade(engine)
    with engine.connect() as conn:
        ctx = MigrationContext.configure(conn, opts={"compare_type": True})
        diff = compare_metadata(ctx, Base.metadata)
    engine.dispose()
    assert diff == []


def test_check_constraints_match_vocabulary(db_url):
    """The CHECK constraints of the migrations refuse a word the vocabulary does not know."""
    engine = _engine(db_url, create=True)
    migrate.upgrade(engine)
    with pytest.raises(Exception):
        with writing(engine) as conn:
            conn.execute(text("INSERT INTO family (code, condition) VALUES ('F', 'x')"))
            fid = conn.execute(text("SELECT id FROM family")).scalar()
            conn.execute(
                text(
                    "INSERT INTO person (code, family_id, sex_at_birth, vital_status, is_placeholder, "
                    "is_proband, contact_status) VALUES ('P', :f, 'male', 'alive', false, false, 'phoned')"
                ),
                {"f": fid},
            )
    for status in V.CONTACT_STATUS:
        with writing(engine) as conn:
            conn.execute(text("INSERT INTO family (code, condition) VALUES (:c, 'x')"), {"c": status})
            fid = conn.execute(text("SELECT id FROM family WHERE code = :c"), {"c": status}).scalar()
            conn.execute(
                text(
                    "INSERT INTO person (code, family_id, sex_at_birth, vital_status, is_placeholder, "
                    "is_proband, contact_status) VALUES (:c, :f, 'male', 'alive', false, false, :s)"
                ),
                {"c": "P" + status, "f": fid, "s": status},
            )
    engine.dispose()


def test_sqlite_connection_settings(sqlite_db):
    engine = _engine(sqlite_db, create=True)
    migrate.upgrade(engine)
    with reading(engine) as conn:
        assert conn.execute(text("PRAGMA foreign_keys")).scalar() == 1
        assert conn.execute(text("PRAGMA journal_mode")).scalar() == "wal"
        assert conn.execute(text("PRAGMA busy_timeout")).scalar() == 5000
    engine.dispose()
    mode = stat.S_IMODE(os.stat(sqlite_db).st_mode)
    assert mode == 0o600


def test_foreign_keys_enforced_on_sqlite(sqlite_db):
    engine = _engine(sqlite_db, create=True)
    migrate.upgrade(engine)
    with pytest.raises(Exception, match="FOREIGN KEY"):
        with writing(engine) as conn:
            conn.execute(
                text(
                    "INSERT INTO person (code, family_id, sex_at_birth, vital_status, is_placeholder, "
                    "is_proband, contact_status) VALUES ('P', 999, 'male', 'alive', 0, 0, 'contactable')"
                )
            )
    engine.dispose()


def test_older_revision_is_refused_not_migrated(db_url, run):
    assert run("init", db=db_url).code == 0
    engine = _engine(db_url)
    migrate.downgrade(engine, "0001")
    r = run("families", db=db_url)
    assert r.code == 1
    assert "revision 0001" in r.err and "tracker init" in r.err
    with reading(engine) as conn:
        assert migrate.current_revision(conn) == "0001"  # nothing migrated silently
    r = run("init", db=db_url)
    assert r.code == 0 and "upgraded from revision 0001" in r.out
    engine.dispose()


def test_missing_database_is_a_clear_error(tmp_path, run):
    r = run("families", db=str(tmp_path / "nothing.sqlite"))
    assert r.code == 1
    assert "tracker init" in r.err
    assert not (tmp_path / "nothing.sqlite").exists()


def test_uninitialised_database_is_refused(sqlite_db):
    engine = _engine(sqlite_db, create=True)
    with reading(engine) as conn:
        with pytest.raises(UserError, match="tracker init"):
            migrate.require_current(conn, "x")
    engine.dispose()
