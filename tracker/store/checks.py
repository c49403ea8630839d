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


# The triggers that keep the audit trail append-only (migrations 0004 and 0007), by backend.
AUDIT_TRIGGERS = {
    "sqlite": ("audit_entry_no_update", "audit_entry_no_delete", "audit_entry_no_replace"),
    "postgresql": ("audit_entry_no_change", "audit_entry_no_truncate"),
}


def audit_findings(conn: Connection) -> list[Finding]:
    """The audit trail is present, still guarded by its triggers, and its hash chain is unbroken.

    The chain is recomputed from the first entry (:func:`tracker.store.audit.entry_hash`);
    the first entry whose stored hash differs is reported (a changed, removed or
    inserted entry breaks the chain there).
    """
    from sqlalchemy import select

    from tracker.store import audit
    from tracker.store.models import AuditEntry

    if "audit_entry" not in _existing(conn):
        return [Finding("audit", "table audit_entry", "the audit trail is missing (the table was dropped)")]
    out = _trigger_findings(conn)
    columns = {c["name"] for c in _inspect(conn).get_columns("audit_entry")}
    missing = [c for c in (*audit.HASHED, "entry_hash") if c not in columns]
    if missing:
        return out + [Finding("audit", "table audit_entry", f"columns missing: {', '.join(missing)}")]
    a = AuditEntry
    stmt = select(*(getattr(a, c) for c in audit.HASHED), a.entry_hash).order_by(a.id)
    previous = audit.GENESIS
    for row in conn.execute(stmt.execution_options(yield_per=5000)):
        entry = dict(zip(audit.HASHED, row[:-1]))
        expected = audit.entry_hash(previous, entry)
        if row[-1] != expected:
            out.append(Finding("audit", f"audit entry {entry['id']}",
                               "the hash chain breaks here: this entry, or one before it, was changed, "
                               "removed or inserted outside the tool"))  # fmt: skip
            break
        previous = expected
    return out + _unrecorded_change_findings(conn)


def _unrecorded_change_findings(conn: Connection) -> list[Finding]:
    """Changes the store shows that have no audit entry (entries removed, newest ones included).

    An import writes its ``import_run`` row and its ``import`` entry in one transaction, and a
    removal its ``remove`` entry, so each must have one.  Imports older than the first entry
    (made before the store had an audit trail) are not counted.
    """
    out = []
    existing = _existing(conn)
    first = conn.execute(text("SELECT min(at) FROM audit_entry")).scalar()
    entries = conn.execute(text("SELECT count(*) FROM audit_entry WHERE action = 'import'")).scalar()
    if first is not None and "import_run" in existing:
        if isinstance(first, str):  # SQLite text: compare as stored
            first = first[:19]
        runs = conn.execute(text("SELECT count(*) FROM import_run WHERE imported_at >= :first"),
                            {"first": first}).scalar()  # fmt: skip
        if runs > entries:
            out.append(Finding("audit", "table import_run",
                               f"{runs - entries} imports have no audit entry: entries were removed"))  # fmt: skip
    for table in ("person", "study"):
        if table not in existing:
            continue
        n = conn.execute(text(
            f"SELECT count(*) FROM {table} t WHERE t.removed_at IS NOT NULL AND NOT EXISTS "
            f"(SELECT 1 FROM audit_entry a WHERE a.action = 'remove' AND a.table_name = '{table}' AND a.row_id = t.id)"
        )).scalar()  # fmt: skip
        if n:
            out.append(Finding("audit", f"table {table}",
                               f"{n} removed rows have no audit entry for their removal: entries were removed"))  # fmt: skip
    return out


def _trigger_findings(conn: Connection) -> list[Finding]:
    dialect = conn.dialect.name
    if dialect == "sqlite":
        rows = conn.execute(text("SELECT name, sql FROM sqlite_master WHERE type = 'trigger' "
                                 "AND tbl_name = 'audit_entry'")).all()  # fmt: skip
        guarding = {name for name, sql in rows if "RAISE(ABORT" in (sql or "").upper().replace(" ", "")}
    elif dialect == "postgresql":
        rows = conn.execute(text(
            "SELECT t.tgname, p.prosrc FROM pg_trigger t JOIN pg_class c ON c.oid = t.tgrelid "
            "JOIN pg_proc p ON p.oid = t.tgfoid "
            "WHERE c.relname = 'audit_entry' AND c.relnamespace = current_schema()::regnamespace "
            "AND NOT t.tgisinternal AND t.tgenabled <> 'D'"
        )).all()  # fmt: skip
        guarding = {name for name, src in rows if "RAISE EXCEPTION" in (src or "").upper()}
    else:
        return []
    missing = [t for t in AUDIT_TRIGGERS[dialect] if t not in guarding]
    if not missing:
        return []
    return [Finding("audit", "table audit_entry",
                    f"triggers that keep the trail append-only are missing or disabled: {', '.join(missing)}")]  # fmt: skip


def _inspect(conn: Connection):
    from sqlalchemy import inspect

    return inspect(conn)
