"""Schema revisions: upgrading with Alembic and refusing to work on an out-of-date database.

The schema is made only by the migrations in ``migrations/versions``.  A
database at an older revision is never migrated silently: commands other than
``tracker init`` stop and say how to upgrade.
"""

from __future__ import annotations

import importlib
from pathlib import Path
from typing import TYPE_CHECKING

import tracker
from tracker.errors import UserError
from tracker.store.database import writing

if TYPE_CHECKING:
    from alembic.config import Config
    from sqlalchemy import Connection, Engine

# Alembic is loaded when a revision is read or changed, not when the command line starts
# (it took about half of `tracker --help`); `migrate.ScriptDirectory` etc. still resolve.
_ALEMBIC = {"Config": "alembic.config", "MigrationContext": "alembic.runtime.migration",
            "ScriptDirectory": "alembic.script"}  # fmt: skip


def __getattr__(name: str):
    if name in _ALEMBIC:
        return getattr(importlib.import_module(_ALEMBIC[name]), name)
    if name == "command":
        return importlib.import_module("alembic.command")
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")


def migrations_dir() -> Path:
    """The migrations folder: bundled in an installed wheel, or at the top of a source checkout."""
    here = Path(tracker.__file__).resolve().parent
    for candidate in (here / "_bundled" / "migrations", here.parent / "migrations"):
        if (candidate / "env.py").exists():
            return candidate
    raise UserError("the migrations folder is missing from this installation")


def alembic_config(connection: Connection | None = None) -> Config:
    from alembic.config import Config

    cfg = Config()
    cfg.set_main_option("script_location", str(migrations_dir()))
    if connection is not None:
        cfg.attributes["connection"] = connection
    return cfg


def head_revision() -> str:
    from alembic.script import ScriptDirectory

    return ScriptDirectory.from_config(alembic_config()).get_current_head()


def current_revision(conn: Connection) -> str | None:
    from alembic.runtime.migration import MigrationContext

    return MigrationContext.configure(conn).get_current_revision()


def upgrade(engine: Engine, target: str = "head") -> tuple[str | None, str]:
    """Upgrade to ``target`` in one transaction; returns (revision before, revision after)."""
    from alembic import command

    with writing(engine) as conn:
        before = current_revision(conn)
        command.upgrade(alembic_config(conn), target)
        after = current_revision(conn)
    return before, after


def downgrade(engine: Engine, target: str) -> tuple[str | None, str | None]:
    """Downgrade to ``target`` (``"base"`` for an empty database) in one transaction."""
    from alembic import command

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
    from alembic.script import ScriptDirectory

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
