"""Database-level checks for `tracker check`: file integrity, schema revision, orphan rows."""

from __future__ import annotations

from sqlalchemy import Connection, text

from tracker.domain.consistency import Finding
from tracker.store import migrate
from tracker.store.models import Base


def integrity_findings(conn: Connection) -> list[Finding]:
    """SQLite's own integrity check (every page, index and constraint of the file)."""
    if conn.dialect.name != "sqlite":
        return []
    rows = [r[0] for r in conn.execute(text("PRAGMA integrity_check")).all()]
    if rows == ["ok"]:
        return []
    return [Finding("integrity", "database file", r) for r in rows]


def schema_findings(conn: Connection) -> list[Finding]:
    current, head = migrate.current_revision(conn), migrate.head_revision()
    if current == head:
        return []
    return [Finding("schema", "database", f"schema revision {current}; this tool needs {head}: run `tracker init`")]


def orphan_findings(conn: Connection) -> list[Finding]:
    """Rows whose foreign key points at nothing (both backends; SQLite enforces keys, but a file
    written with foreign keys off could still hold them)."""
    out = []
    for table in Base.metadata.sorted_tables:
        if table.name not in _existing(conn):
            continue
        for fk in table.foreign_keys:
            col, parent = fk.parent, fk.column
            sql = (
                f'SELECT count(*) FROM "{table.name}" c LEFT JOIN "{parent.table.name}" p '
                f'ON c."{col.name}" = p."{parent.name}" '
                f'WHERE c."{col.name}" IS NOT NULL AND p."{parent.name}" IS NULL'
            )
            n = conn.execute(text(sql)).scalar()
            if n:
                out.append(Finding("orphans", f"table {table.name}",
                                   f"{n} rows whose {col.name} points to no {parent.table.name}"))  # fmt: skip
    return out


def _existing(conn: Connection) -> set[str]:
    from sqlalchemy import inspect

    return set(inspect(conn).get_table_names())


def variant_rereview_reminders(conn: Connection, on, months: int) -> list[Finding]:
    """Reminders, not failures: each family variant of uncertain significance, and each whose latest
    classification is ``months`` old or more on ``on`` (the clinic's re-review interval;
    see :func:`tracker.domain.genetics.rereview_reminder` for the rule and its source)."""
    from tracker.domain.dates import parse_date
    from tracker.domain.genetics import rereview_reminder
    from tracker.store import repository as repo

    variants = repo.load_variants(conn)
    out = []
    latest: dict[tuple[str, str], tuple] = {}
    for fam, tx, c, cls, when in zip(variants["family"], variants["transcript"], variants["hgvs_c"],
                                     variants["acmg_class"], variants["classified_on"]):  # fmt: skip
        day = parse_date(when) if isinstance(when, str) and when else None
        if day is None or day > on:
            continue
        key = (fam, f"{tx}:{c}")
        if key not in latest or day >= latest[key][1]:
            latest[key] = (cls, day)
    for (fam, key), (cls, day) in sorted(latest.items()):
        r = rereview_reminder(cls, day, on, months, family=fam, variant=key)
        if r is not None:
            out.append(Finding("variant_rereview", f"variant {fam} {key}", r.text))
    return out
