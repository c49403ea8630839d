"""Schema revisions: upgrading with Alembic and refusing to work on an out-of-date database.

The schema is made only by the migrations in ``migrations/versions``.  A
database at an older revision is never migrated silently: commands other than
``tracker init`` stop and say how to upgrade.
"""

from __future__ import annotations

from pathlib import Path

from alembic.config import Config
from alembic.runtime.migration import MigrationContext
from alembic.script import ScriptDirectory
from alembic import command
from sqlalchemy import Connection, Engine

import tracker
from tracker.errors import UserError
from tracker.store.database import writing


def migrations_dir() -> Path:
    """The migrations folder: bundled in an installed wheel, or at the top of a source checkout."""
    here = Path(tracker.__file__).resolve().parent
    for candidate in (here / "_bundled" / "migrations", here.parent / "migrations"):
        if (candidate / "env.py").exists():
            return candidate
    raise UserError("the migrations folder is missing from this installation")


def alembic_config(connection: Connection | None = None) -> Config:
    cfg = Config()
    cfg.set_main_option("script_location", str(migrations_dir()))
    if connection is not None:
        cfg.attributes["connection"] = connection
    return cfg


def head_revision() -> str:
    return ScriptDirectory.from_config(alembic_config()).get_current_head()


def current_revision(conn: Connection) -> str | None:
    return MigrationContext.configure(conn).get_current_revision()


def upgrade(engine: Engine, target: str = "head") -> tuple[str | None, str]:
    """Upgrade to ``target`` in one transaction; returns (revision before, revision after)."""
    with writing(engine) as conn:
        before = current_revision(conn)
        command.upgrade(alembic_config(conn), target)
        after = current_revision(conn)
    return before, after


def downgrade(engine: Engine, target: str) -> tuple[str | None, str | None]:
    """Downgrade to ``target`` (``"base"`` for an empty database) in one transaction."""
    try:
        with writing(engine) as conn:
            before = current_revision(conn)
            command.downgrade(alembic_config(conn), target)
            after = current_revision(conn)
    except RuntimeError as exc:  # a revision refusing to drop data it cannot keep (nothing was changed)
        raise UserError(str(exc)) from None
    return before, after


def require_current(conn: Connection, where: str) -> None:
    """Stop with a clear message unless the database is at the head revision."""
    rev = current_revision(conn)
    head = head_revision()
    if rev == head:
        return
    if rev is None:
        raise UserError(f"{where} has no tracker schema: run `tracker init` first")
    known = {s.revision for s in ScriptDirectory.from_config(alembic_config()).walk_revisions()}
    if rev not in known:
        raise UserError(
            f"{where} is at schema revision {rev}, which this version of the tool does not know "
            "(it was written by a newer version): upgrade the tool"
        )
    raise UserError(
        f"{where} is at schema revision {rev}; this tool needs {head}. "
        "Back it up, then run `tracker init` to upgrade it"
    )
