"""Alembic environment for the family store.

The tool runs migrations programmatically (``tracker init``): it passes an
open connection in ``config.attributes["connection"]`` so that the upgrade
runs inside the tool's own transaction handling (on SQLite the whole upgrade
is one transaction: an interrupted upgrade leaves the database as it was).
"""

from alembic import context
from sqlalchemy import create_engine

config = context.config


def _run(connection) -> None:
    context.configure(
        connection=connection,
        target_metadata=None,
        render_as_batch=connection.dialect.name == "sqlite",
        transaction_per_migration=False,
    )
    with context.begin_transaction():
        context.run_migrations()


def run_migrations_online() -> None:
    connection = config.attributes.get("connection")
    if connection is not None:
        _run(connection)
        return
    engine = create_engine(config.get_main_option("sqlalchemy.url"))
    with engine.connect() as conn:
        _run(conn)


if context.is_offline_mode():
    raise SystemExit("offline (SQL script) migrations are not supported; use `tracker init`")
run_migrations_online()
