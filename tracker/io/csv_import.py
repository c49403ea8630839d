"""Importing CSV files into the store: all-or-nothing, idempotent, never rewriting stored values.

The steps for one file are: read the text cells, parse every column, check
the rows against each other and against the store, compare with what is
stored (a row stored with the same values is skipped; a key stored with other
values is refused), and only then write, inside the caller's transaction.
Any problem stops the import before anything is written.
"""

from __future__ import annotations

import datetime as dt
import hashlib
from dataclasses import dataclass
from pathlib import Path
from typing import Callable

import numpy as np
import pandas as pd
from sqlalchemy import Connection, Date, insert, select

from tracker.gcpause import gc_paused
from tracker.io import validation
from tracker.io.columns import partial_to_storage
from tracker.io.layouts import CONTACT_LAYOUTS, IMPORT_ORDER, LAYOUTS, Layout
from tracker.io.reading import InputRejected, Problem, read_table
from tracker.regular_file import NotReadable, open_regular
from tracker.store import repository as repo
from tracker.store import audit
from tracker.store.models import (
    Assessment,
    Base,
    ContactEvent,
    Family,
    GeneticResult,
    ImportRun,
    Measurement,
    Person,
    Study,
    Variant,
    VariantClassification,
)

Progress = Callable[[int], None]


@dataclass(frozen=True)
class ImportSummary:
    kind: str
    file: str
    rows_read: int
    rows_added: int
    rows_already_stored: int
    families: frozenset[str] = frozenset()  # the families it wrote rows to (recall proposals recomputed)

    def as_dict(self) -> dict:
        return {
            "kind": self.kind,
            "file": self.file,
            "rows_read": self.rows_read,
            "rows_added": self.rows_added,
            "rows_already_stored": self.rows_already_stored,
        }


def context(conn: Connection, today: dt.date) -> validation.Context:
    """What the checks need from the store, loaded once (``import_folder`` keeps it up to date)."""
    return validation.Context(
        families=repo.load_families(conn),
        people=repo.load_people(conn),
        variants=repo.load_variants(conn),
        measures=repo.load_measures(conn),
        today=today,
        results=repo.load_genetic_results(conn),
    )


def check_file(
    conn: Connection, kind: str, path: Path, today: dt.date, ctx: validation.Context | None = None
) -> validation.Checked:
    """Read and check one file; raise :class:`InputRejected` listing every problem."""
    layout = LAYOUTS[kind]
    cells = read_table(path, layout)
    checked = validation.parse_cells(layout, path.name, cells, today)
    del cells
    _note_removed(conn, kind, checked)
    validation.CHECKS[kind](checked, ctx if ctx is not None else context(conn, today))
    if checked.problems:
        raise InputRejected(checked.problems)
    return checked


def _note_removed(conn: Connection, kind: str, checked: validation.Checked) -> None:
    """Rows whose key is a removed person or study: refused, naming the reinstate command.

    A removed record is kept in the store (hidden), so importing it again cannot add it a second
    time; it comes back only with ``tracker reinstate``, which is audited.
    """
    if kind not in ("people", "studies", "assessments", "genetic-results"):
        return
    rows = checked.rows
    gone = dict(conn.execute(select(Person.code, Person.removed_at).where(Person.removed_at.is_not(None))).all())
    columns = ("person", "mother", "father", "twin_of") if kind == "people" else ("person",)
    for col in columns:
        hit = rows[col].isin(list(gone)) if gone else pd.Series(False, index=rows.index)
        for r, code in zip(rows.index[hit.to_numpy()], rows[col][hit]):
            what = "was removed" if col == "person" else f"{col} {code} was removed"
            checked.note(int(r), col, f"{what} on {gone[code]:%Y-%m-%d}; to bring it back: "
                                      f"tracker reinstate person {code} --reason \"...\"")
    if kind != "studies":
        return
    stmt = (select(Person.code, Study.study_date, Study.modality, Study.removed_at)
            .join(Person, Study.person_id == Person.id).where(Study.removed_at.is_not(None)))  # fmt: skip
    studies = {(p, d.isoformat(), m): at for p, d, m, at in conn.execute(stmt).all()}
    if not studies:
        return
    hit = pd.MultiIndex.from_frame(rows[["person", "study_date", "modality"]].astype(object)).isin(list(studies))
    for r, p, d, m in zip(rows.index[hit], rows["person"][hit], rows["study_date"][hit], rows["modality"][hit]):
        checked.note(int(r), "study_date", f"study {p} {d} {m} was removed on {studies[(p, d, m)]:%Y-%m-%d}; "
                                           f"to bring it back: tracker reinstate study {p} {d} {m} --reason \"...\"")


def import_file(
    conn: Connection,
    kind: str,
    path: Path,
    *,
    today: dt.date | None = None,
    user: str | None = None,
    progress: Progress | None = None,
    ctx: validation.Context | None = None,
    refresh: bool = True,
) -> ImportSummary:
    """Check and write one file inside the caller's transaction (roll it back for a dry run).

    ``ctx`` is what the store holds (:func:`context`), loaded by the caller once for
    several files; it is brought up to date with the rows this file adds. The recall
    proposals of the families the file wrote to are recomputed in the same transaction
    (``refresh=False``: the caller does it once for several files, see :func:`touched`).
    """
    today = today or (ctx.today if ctx is not None else dt.date.today())
    user = audit.actor(user)  # checked (length) before anything is read or written
    if kind in CONTACT_LAYOUTS:
        return _import_contact_file(conn, kind, path, today=today, user=user, progress=progress, refresh=refresh)
    with gc_paused():  # millions of short-lived cells and tuples, no cycles (see tracker.gcpause)
        ctx = ctx if ctx is not None else context(conn, today)
        checked = check_file(conn, kind, path, today, ctx)
        object.__setattr__(checked, "user", user)  # who entered what the writer logs (the contact log)
        writer = _WRITERS[kind]
        added, already = writer(conn, checked, progress or (lambda n: None), ctx)
    summary = ImportSummary(kind, path.name, len(checked.rows), added, already, touched(checked, ctx, added))
    _record_run(conn, summary, path, user)
    if refresh:
        refresh_proposals(conn, summary.families, today)
    return summary


def _import_contact_file(conn: Connection, kind: str, path: Path, *, today: dt.date, user: str,
                         progress: Progress | None, refresh: bool) -> ImportSummary:  # fmt: skip
    """A contact-log file (revision 0012): each row checked as the matching form checks it
    (:mod:`tracker.io.contact_import`), all or nothing, inside the caller's transaction."""
    from tracker.io.contact_import import import_contacts

    families: set[str] = set()
    counts = import_contacts(conn, kind, path, user=user, today=today, touched=families)
    if progress is not None:
        progress(counts["rows_read"])
    summary = ImportSummary(kind, path.name, counts["rows_read"], counts["rows_added"],
                            counts["rows_already_stored"], frozenset(families))  # fmt: skip
    _record_run(conn, summary, path, user)
    if refresh:
        refresh_proposals(conn, summary.families, today)
    return summary


def import_cells(
    conn: Connection,
    kind: str,
    cells: pd.DataFrame,
    *,
    path: Path,
    ctx: validation.Context,
    user: str | None = None,
    progress: Progress | None = None,
    refresh: bool = True,
) -> ImportSummary:
    """Check and write rows of ``kind`` given as text cells read from another format (``path``).

    The same parsing, checks, comparison with the store and writer as a CSV file of the layout;
    ``cells`` has the layout's columns (text, "" = empty) and any integer index, which problems
    name as their row.  The import run and audit entry carry ``path``'s SHA-256.
    """
    layout = LAYOUTS[kind]
    with gc_paused():
        checked = validation.parse_cells(layout, path.name, cells[layout.names], ctx.today)
        validation.CHECKS[kind](checked, ctx)
        if checked.problems:
            raise InputRejected(checked.problems)
        object.__setattr__(checked, "user", audit.actor(user))
        added, already = _WRITERS[kind](conn, checked, progress or (lambda n: None), ctx)
    summary = ImportSummary(kind, path.name, len(checked.rows), added, already, touched(checked, ctx, added))
    _record_run(conn, summary, path, user)
    if refresh:
        refresh_proposals(conn, summary.families, ctx.today)
    return summary


def touched(checked: validation.Checked, ctx: validation.Context, added: int) -> frozenset[str]:
    """The families an import wrote rows to (none when it added nothing): its ``family``
    column, else the family of each ``person`` (``ctx`` holds the people already written)."""
    rows = checked.rows
    if not added or not len(rows):
        return frozenset()
    if "family" in rows.columns:
        return frozenset(rows["family"].dropna().astype(str))
    if "person" not in rows.columns:
        return frozenset()
    family_of = dict(zip(ctx.people["person"], ctx.people["family"]))
    return frozenset(f for p in rows["person"].dropna().unique() if isinstance(f := family_of.get(p), str))


def refresh_proposals(conn: Connection, families, today: dt.date | None = None) -> None:
    """Recompute the stored recall proposals of ``families`` in the import's transaction
    (:func:`tracker.services.proposals.refresh_families`). A bulk import of more than
    :data:`tracker.services.proposals.WRITE_COMPUTE_MAX_FAMILIES` families marks their rows stale
    instead (same transaction), so that the import keeps its speed; the first worklist read
    computes and stores them, and nothing is ever read from a stale row."""
    if families:
        from tracker.services.proposals import refresh_families

        refresh_families(conn, families, today, defer_bulk=True)


def store_rows(
    conn: Connection,
    kind: str,
    cells: pd.DataFrame,
    *,
    source: str,
    ctx: validation.Context,
) -> tuple[validation.Checked, int, int]:
    """Check and write a few rows of ``kind`` given as text cells (a form's fields), inside the caller's
    write transaction: the parsing, the checks across rows and against the store, the removed-record
    refusal, the comparison with what is stored and the writer of a CSV import of the layout.

    ``cells`` has the layout's columns (text, "" = empty); ``source`` names the rows in problems (their
    ``file``).  Raises :class:`InputRejected` before anything is written.  No import run is recorded:
    the caller appends its own audit entry.  Returns (the checked rows, rows added, rows already stored).
    """
    layout = LAYOUTS[kind]
    checked = validation.parse_cells(layout, source, cells[layout.names], ctx.today)
    _note_removed(conn, kind, checked)
    validation.CHECKS[kind](checked, ctx)
    if checked.problems:
        raise InputRejected(checked.problems)
    added, already = _WRITERS[kind](conn, checked, lambda n: None, ctx)
    return checked, added, already


def _record_run(conn: Connection, summary: ImportSummary, path: Path, user: str | None) -> None:
    """The import_run row and the audit entry of one imported file (in the import's transaction)."""
    kind, added, already = summary.kind, summary.rows_added, summary.rows_already_stored
    user = audit.actor(user)  # every import path (CSV, FHIR, DICOM SR) records who imported
    digest = _sha256(path)
    conn.execute(
        insert(ImportRun),
        dict(
            kind=kind,
            file_name=path.name,
            sha256=digest,
            imported_at=dt.datetime.now(dt.timezone.utc).replace(tzinfo=None),
            imported_by=user,
            rows_read=summary.rows_read,
            rows_added=added,
        ),
    )
    audit.record(conn, action="import", table=kind, user=user,
                 what=f"imported {path.name}: {added} rows added, {already} already stored",
                 after={"file": path.name, "sha256": digest, "rows_read": summary.rows_read, "rows_added": added})  # fmt: skip


def _sha256(path: Path) -> str:
    """SHA-256 of a file, read in blocks (an input file can be hundreds of MB); regular files only."""
    h = hashlib.sha256()
    try:
        with open_regular(path) as fh:
            for block in iter(lambda: fh.read(1 << 20), b""):
                h.update(block)
    except NotReadable as exc:  # replaced after it was read
        raise InputRejected([Problem(path.name, None, None, exc.reason)]) from None
    return h.hexdigest()


def import_folder(conn: Connection, folder: Path, **kw) -> list[ImportSummary]:
    """Import every layout file present in ``folder``, in dependency order, in one transaction."""
    if not folder.is_dir():
        raise InputRejected([Problem(folder.name, None, None, "is not a folder")])
    found = [(k, folder / LAYOUTS[k].file_name) for k in IMPORT_ORDER if (folder / LAYOUTS[k].file_name).exists()]
    if not found:
        names = ", ".join(LAYOUTS[k].file_name for k in IMPORT_ORDER)
        raise InputRejected([Problem(folder.name, None, None, f"holds none of the files {names}")])
    today = kw.pop("today", None) or dt.date.today()
    ctx = context(conn, today)  # loaded once for all the files
    out = [import_file(conn, kind, path, today=today, ctx=ctx, refresh=False, **kw) for kind, path in found]
    refresh_proposals(conn, frozenset().union(*(s.families for s in out)), today)  # once for every file
    return out


# --------------------------------------------------------------------------- comparing


def _split(checked: validation.Checked, stored: pd.DataFrame, compare: list[str]) -> tuple[pd.DataFrame, int]:
    """Rows not yet stored; rows stored identically are dropped; stored-but-different is refused."""
    rows = checked.rows
    key = list(checked.layout.key)
    if stored.empty or rows.empty:
        return rows, 0
    pos = _index(stored, key).get_indexer(_index(rows, key))
    present = pos >= 0
    problems = []
    if present.any():
        mine = rows[present]
        theirs = stored.iloc[pos[present]]
        for col in (c for c in compare if c not in checked.absent):
            same = _same(mine[col].to_numpy(dtype=object), theirs[col].to_numpy(dtype=object))
            for r in mine.index[~same]:
                problems.append(
                    Problem(
                        checked.file,
                        int(r),
                        col,
                        "differs from the stored record with the same key; import never changes "
                        "stored values (stored values are corrected one by one, with history)",
                    )
                )
    if problems:
        raise InputRejected(problems)
    return rows[~present], int(present.sum())


def _index(frame: pd.DataFrame, key: list[str]) -> pd.Index:
    """The key columns of ``frame`` as an index (empty cells as "")."""
    keys = frame[key].astype(object).where(frame[key].notna(), "").reset_index(drop=True)
    return pd.MultiIndex.from_frame(keys) if len(key) > 1 else pd.Index(keys[key[0]])


def _same(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """Elementwise: equal values, or both empty (None/NaN)."""
    an, bn = pd.isna(a), pd.isna(b)
    both = ~an & ~bn
    eq = np.zeros(len(a), dtype=bool)
    if both.any():
        eq[both] = np.asarray(a[both] == b[both], dtype=bool)
    return (an & bn) | eq


def _ids(conn: Connection, model, code_col="code") -> dict:
    return dict(conn.execute(select(getattr(model, code_col), model.id)).all())


def _py(column: pd.Series) -> list:
    """A column as a list of plain Python values, empty (None/NaN) as None."""
    return column.astype(object).where(column.notna(), None).tolist()


def _dates(column: pd.Series) -> list:
    """ISO day text -> datetime.date (None when empty), converted once per distinct text."""
    memo = {v: dt.date.fromisoformat(v) for v in pd.unique(column.dropna().to_numpy(dtype=object))}
    return [memo.get(v) if isinstance(v, str) else None for v in column.tolist()]


def _append(frame: pd.DataFrame, new: pd.DataFrame, bools: tuple[str, ...] = ()) -> pd.DataFrame:
    """``frame`` (a ``load_*`` frame of the context) with the rows just written added."""
    out = pd.concat([frame.astype(object), new[list(frame.columns)].astype(object)], ignore_index=True)
    for c in bools:
        out[c] = out[c].astype(bool)
    return out


def _bulk_insert(conn: Connection, table: str, columns: list[str], rows: list[tuple]) -> None:
    """Insert parameter tuples with the driver's bulk path, inside the caller's transaction.

    PostgreSQL: ``COPY ... FROM STDIN`` (psycopg ``cursor.copy``); SQLite and others:
    the DB-API ``executemany``.  Dates are given as ISO text, which is how the store's
    SQLite dates are written and what PostgreSQL reads into a date column.
    """
    if not rows:
        return
    # Columns left out get what an ORM insert would give them: their Python-side default.
    table_def = Base.metadata.tables[table]
    defaults = [c for c in table_def.columns if c.name not in columns and c.default is not None]
    if any(not c.default.is_scalar for c in defaults):  # a computed default: let SQLAlchemy apply it
        dates = [i for i, c in enumerate(columns) if isinstance(table_def.c[c].type, Date)]
        recs = [dict(zip(columns, r)) for r in rows]
        for rec in recs:
            for i in dates:
                v = rec[columns[i]]
                rec[columns[i]] = dt.date.fromisoformat(v) if isinstance(v, str) else v
        conn.execute(table_def.insert(), recs)
        return
    if defaults:
        columns = [*columns, *(c.name for c in defaults)]
        extra = tuple(c.default.arg for c in defaults)
        rows = [(*r, *extra) for r in rows]
    names = ", ".join(columns)
    if conn.dialect.name == "postgresql":
        with conn.connection.dbapi_connection.cursor() as cur:
            with cur.copy(f"COPY {table} ({names}) FROM STDIN") as copy:
                for r in rows:
                    copy.write_row(r)
    else:
        marks = ", ".join(["?" if conn.dialect.paramstyle == "qmark" else "%s"] * len(columns))
        conn.exec_driver_sql(f"INSERT INTO {table} ({names}) VALUES ({marks})", rows)


def _bulk_update(conn: Connection, table: str, columns: list[str], key: str, rows: list[tuple]) -> None:
    """``UPDATE table SET columns... WHERE key = ...`` for each tuple (values, then key): one executemany."""
    if not rows:
        return
    mark = "?" if conn.dialect.paramstyle == "qmark" else "%s"
    sets = ", ".join(f"{c} = {mark}" for c in columns)
    conn.exec_driver_sql(f"UPDATE {table} SET {sets} WHERE {key} = {mark}", rows)


# --------------------------------------------------------------------------- writers


def _write_families(conn, checked, progress, ctx):
    new, already = _split(checked, ctx.families, ["condition", "notes"])
    if len(new):
        conn.execute(insert(Family), [
            dict(code=f, condition=c, notes=n) for f, c, n in zip(_py(new["family"]), _py(new["condition"]),
                                                                 _py(new["notes"]))
        ])  # fmt: skip
        ctx.families = _append(ctx.families, new)
    progress(len(checked.rows))
    return len(new), already


_PERSON_COLUMNS = [
    "code", "family_id", "given_name", "family_name", "sex_at_birth", "gender_identity", "birth_date",
    "birth_date_precision", "vital_status", "death_date", "death_date_precision", "is_placeholder", "is_proband",
    "twin_type", "adoption", "contact_status", "contact_status_date", "notes",
    "death_cause", "death_age", "diagnosis_age", "diagnosis_place", "icd_date", "icd_date_precision",
    "pacemaker_date", "pacemaker_date_precision", "external_id",
]  # fmt: skip


def _whole(values: list) -> list:
    """Whole years (floats from the CSV) as int, None when empty."""
    return [None if v is None else int(v) for v in values]


def _write_people(conn, checked, progress, ctx):
    compare = [c for c in checked.layout.names if c != "person"]
    new, already = _split(checked, ctx.people, compare)
    if len(new):
        fam = _ids(conn, Family)
        c = {name: _py(new[name]) for name in checked.layout.names}
        stored_form = {}  # ISO partial date -> (ISO day text as stored, precision)
        for v in set(c["birth_date"]) | set(c["death_date"]) | set(c["icd_date"]) | set(c["pacemaker_date"]):
            day, precision = partial_to_storage(v)
            stored_form[v] = (day.isoformat() if day else None, precision)
        birth, birth_p = zip(*(stored_form[v] for v in c["birth_date"]))
        death, death_p = zip(*(stored_form[v] for v in c["death_date"]))
        icd, icd_p = zip(*(stored_form[v] for v in c["icd_date"]))
        pacemaker, pacemaker_p = zip(*(stored_form[v] for v in c["pacemaker_date"]))
        cols = [
            c["person"], [fam[f] for f in c["family"]], c["given_name"], c["family_name"], c["sex_at_birth"],
            c["gender_identity"], birth, birth_p, c["vital_status"], death, death_p,
            [bool(v) for v in c["placeholder"]], [bool(v) for v in c["proband"]], c["twin_type"], c["adoption"],
            [None] * len(new), [None] * len(new), c["notes"],
            c["death_cause"], _whole(c["death_age"]), _whole(c["diagnosis_age"]), c["diagnosis_place"],
            icd, icd_p, pacemaker, pacemaker_p, c["external_id"],
        ]  # fmt: skip
        _bulk_insert(conn, "person", _PERSON_COLUMNS, list(zip(*cols)))
        ids = _ids(conn, Person)
        _log_imported_statuses(conn, ids, c["person"], c["contact_status"], c["contact_status_date"], checked)
        # Parent and twin links, now that every person has an id: one executemany.
        links = []
        for person, m, f, t in zip(c["person"], c["mother"], c["father"], c["twin_of"]):
            link = (ids.get(m), ids.get(f), ids.get(t))
            if any(v is not None for v in link):
                links.append((*link, ids[person]))
        _bulk_update(conn, "person", ["mother_id", "father_id", "twin_of_id"], "id", links)
        ctx.people = _append(ctx.people, new, bools=("placeholder", "proband"))
    progress(len(checked.rows))
    return len(new), already


IMPORTED_NOTE = "contact status read from the people file {file}"


def _log_imported_statuses(conn, ids: dict, people: list, statuses: list, dates: list, checked) -> None:
    """A people file's contact_status (and its date) is one event of the contact log (migration 0012), in the
    same words (``contactable`` is outcome ``informed``), channel ``other``, source ``imported``."""
    now = audit.now_utc()
    who = audit.actor(getattr(checked, "user", None))
    note = IMPORTED_NOTE.format(file=getattr(checked, "file", None) or "imported")
    rows = [dict(person_id=ids[p], event_date=dt.date.fromisoformat(d) if d else None, channel="other",
                 outcome={"contactable": "informed"}.get(s, s), notes=note, source="imported",
                 entered_at=now, entered_by=who)
            for p, s, d in zip(people, statuses, dates) if s is not None or d is not None]  # fmt: skip
    if rows:
        conn.execute(insert(ContactEvent), rows)


def _write_variants(conn, checked, progress, ctx):
    compare = ["gene", "hgvs_p", "zygosity", "acmg_class", "reason"]
    new, already = _split(checked, ctx.variants, compare)
    if len(new):
        fam = _ids(conn, Family)
        c = {name: _py(new[name]) for name in checked.layout.names}
        keys = [(fam[f], t, h) for f, t, h in zip(c["family"], c["transcript"], c["hgvs_c"])]
        stmt = select(Variant.family_id, Variant.transcript, Variant.hgvs_c, Variant.id)
        known = {(f, t, h): i for f, t, h, i in conn.execute(stmt).all()}
        # Variants not yet stored, in the order they first appear (attributes of that row).
        first = {}
        for i, k in enumerate(keys):
            if k not in known and k not in first:
                first[k] = i
        if first:
            conn.execute(insert(Variant), [
                dict(family_id=k[0], gene=c["gene"][i], transcript=k[1], hgvs_c=k[2], hgvs_p=c["hgvs_p"][i],
                     zygosity=c["zygosity"][i])
                for k, i in first.items()
            ])  # fmt: skip
            known = {(f, t, h): i for f, t, h, i in conn.execute(stmt).all()}
        conn.execute(insert(VariantClassification), [
            dict(variant_id=known[k], classified_on=d, acmg_class=a, reason=r)
            for k, d, a, r in zip(keys, _dates(new["classified_on"]), c["acmg_class"], c["reason"])
        ])  # fmt: skip
        ctx.variants = _append(ctx.variants, new)
    progress(len(checked.rows))
    return len(new), already


def _variant_ids(conn) -> dict:
    stmt = select(Family.code, Variant.transcript, Variant.hgvs_c, Variant.id).join(Family)
    return {(f, f"{t}:{c}"): i for f, t, c, i in conn.execute(stmt).all()}


_RESULT_COLUMNS = ["person_id", "test_date", "test_type", "variant_id", "result", "lab", "report_reference"]


def _write_genetic_results(conn, checked, progress, ctx):
    compare = ["result", "lab", "report_reference"]
    new, already = _split(checked, repo.load_genetic_results(conn), compare)
    if len(new):
        family = ctx.people.set_index("person")["family"]
        ids = _ids(conn, Person)
        variants = _variant_ids(conn)
        c = {name: _py(new[name]) for name in checked.layout.names}
        cols = [
            [ids[p] for p in c["person"]], c["test_date"], c["test_type"],
            [variants.get((family[p], v)) for p, v in zip(c["person"], c["variant"])],
            c["result"], c["lab"], c["report_reference"],
        ]  # fmt: skip
        _bulk_insert(conn, "genetic_result", _RESULT_COLUMNS, list(zip(*cols)))
    progress(len(checked.rows))
    return len(new), already


_ASSESSMENT_COLUMNS = ["person_id", "assessment_date", "affected_status", "symptoms", "competitive_athlete",
                       "pregnant", "hypertension", "notes", *repo.RISK_ANSWERS, *repo.OTHER_ANSWERS]  # fmt: skip


def _write_assessments(conn, checked, progress, ctx):
    compare = ["affected_status", "symptoms", "competitive_athlete", "pregnant", "hypertension", "notes",
               *repo.RISK_ANSWERS, *repo.OTHER_ANSWERS]  # fmt: skip
    new, already = _split(checked, repo.load_assessments(conn), compare)
    if len(new):
        ids = _ids(conn, Person)
        c = {name: _py(new[name]) for name in checked.layout.names}
        flags = [[bool(v) for v in c[k]] for k in ("competitive_athlete", "pregnant", "hypertension")]
        cols = [[ids[p] for p in c["person"]], c["assessment_date"], c["affected_status"], c["symptoms"], *flags,
                c["notes"], *(c[a] for a in (*repo.RISK_ANSWERS, *repo.OTHER_ANSWERS))]  # fmt: skip
        _bulk_insert(conn, "assessment", _ASSESSMENT_COLUMNS, list(zip(*cols)))
    progress(len(checked.rows))
    return len(new), already


CHUNK = 50_000  # measurement rows per executemany / COPY batch (progress is reported per batch)

_STUDY_COLUMNS = ["person_id", "study_date", "modality", "site", "height_cm", "weight_kg"]
_VALUE_COLUMNS = ["study_id", "measure_code", "value", "unit", "entered_value", "entered_unit"]


def _write_studies(conn, checked, progress, ctx):
    rows = checked.rows
    stored = repo.load_studies(conn)
    skey = ["person", "study_date", "modality"]

    # Study level: the same study stored with other site or body size is refused.
    studies = rows.drop_duplicates(skey)
    stored_studies = stored.drop_duplicates(skey)
    study_check = validation.Checked(
        validation.Layout("studies", checked.file, checked.layout.columns, tuple(skey)),
        checked.file,
        studies,
    )
    new_studies, _ = _split(study_check, stored_studies, ["site", "height_cm", "weight_kg"])

    # Value level: rows with a measure, keyed by study + measure.
    has_value = rows["measure"].notna()
    with_value = rows[has_value] if not has_value.all() else rows
    value_check = validation.Checked(checked.layout, checked.file, with_value)
    stored_values = stored[stored["measure"].notna()]
    new_values, already_values = _split(value_check, stored_values, ["value", "unit"])
    study_rows_only = rows[~has_value]
    already_empty = 0
    if len(study_rows_only) and len(stored_studies):
        already_empty = int(_index(study_rows_only, skey).isin(_index(stored_studies, skey)).sum())
    del stored, stored_values, with_value

    person_ids = pd.Series(_ids(conn, Person), dtype="int64")
    s = new_studies
    written = (_reserve_ids(conn, "study", len(s)), person_ids.reindex(s["person"].to_numpy(dtype=object)).to_numpy(),
               s["study_date"].to_numpy(dtype=object), s["modality"].to_numpy(dtype=object))  # fmt: skip
    if len(s):
        cols = [written[0].tolist(), written[1].tolist(), _py(s["study_date"]), _py(s["modality"]), _py(s["site"]),
                _py(s["height_cm"]), _py(s["weight_kg"])]  # fmt: skip
        _bulk_insert(conn, "study", ["id", *_STUDY_COLUMNS], list(zip(*cols)))
    if len(new_values):
        study_id = _study_ids(conn, new_values, person_ids, written)
        cols = [
            study_id,
            new_values["measure"].to_numpy(dtype=object),
            new_values["_value"].to_numpy(dtype=float),
            new_values["_unit"].to_numpy(dtype=object),
            new_values["value"].to_numpy(dtype=float),
            new_values["_entered_unit"].to_numpy(dtype=object),
        ]
        for i in range(0, len(new_values), CHUNK):
            part = [c[i : i + CHUNK].tolist() for c in cols]
            _bulk_insert(conn, "measurement", _VALUE_COLUMNS, list(zip(*part)))
            progress(min(CHUNK, len(new_values) - i))
    added = len(new_values) + (len(study_rows_only) - already_empty)
    return added, already_values + already_empty


def _reserve_ids(conn: Connection, table: str, n: int) -> np.ndarray:
    """``n`` new primary keys for ``table``, taken inside the import's write transaction.

    SQLite: the ids after the largest stored one (the transaction holds the write lock,
    so no other writer can take them). PostgreSQL: ``n`` values of the id column's sequence.
    """
    if n == 0:
        return np.empty(0, dtype=np.int64)
    if conn.dialect.name == "postgresql":
        got = conn.exec_driver_sql(
            f"SELECT nextval(pg_get_serial_sequence('{table}', 'id')) FROM generate_series(1, {int(n)})"
        ).scalars().all()
        return np.array(got, dtype=np.int64)
    top = conn.exec_driver_sql(f"SELECT coalesce(max(id), 0) FROM {table}").scalar_one()
    return np.arange(top + 1, top + 1 + n, dtype=np.int64)


def _study_ids(conn: Connection, values: pd.DataFrame, person_ids: pd.Series, written: tuple) -> np.ndarray:
    """The study id of each value row (person, study_date, modality).

    ``written`` holds the studies this import just wrote (ids, person ids, ISO dates,
    modalities); rows of a study stored before are looked up with one SELECT. The
    three key columns become one integer per study (the person id, then codes for
    the file's dates and modalities), so the lookup is on integers.
    """
    dates = pd.Index(pd.unique(values["study_date"].to_numpy(dtype=object)))
    modalities = pd.Index(pd.unique(values["modality"].to_numpy(dtype=object)))

    def key(person, date, mod):
        return (np.asarray(person, dtype=np.int64) * len(dates) + dates.get_indexer(date)) * len(modalities) + (
            modalities.get_indexer(mod))

    def lookup(study_id, person_id, study_date, modality, wanted):
        # Only studies on one of the file's dates and modalities can be looked up.
        mine = (dates.get_indexer(study_date) >= 0) & (modalities.get_indexer(modality) >= 0)
        keys = pd.Index(key(person_id[mine], study_date[mine], modality[mine]))
        if not len(keys):
            return np.full(len(wanted), -1, dtype=np.int64)
        if not keys.is_unique:
            raise RuntimeError("two studies share person, date and modality")
        pos = keys.get_indexer(wanted)
        return np.where(pos >= 0, np.asarray(study_id, dtype=np.int64)[mine][np.maximum(pos, 0)], -1)

    wanted = key(person_ids.reindex(values["person"].to_numpy(dtype=object)).to_numpy(),
                 values["study_date"].to_numpy(dtype=object), values["modality"].to_numpy(dtype=object))  # fmt: skip
    out = lookup(*written, wanted)
    before = out < 0
    if before.any():  # values added to studies stored by an earlier import
        stmt = select(Study.id, Study.person_id, Study.study_date, Study.modality).where(Study.removed_at.is_(None))
        found = list(zip(*conn.execute(stmt).all())) or [(), (), (), ()]
        study_id, person_id, study_date, modality = (np.array(c, dtype=object) for c in found)
        iso = {d: d.isoformat() for d in pd.unique(study_date)}
        study_date = np.array([iso[d] for d in study_date], dtype=object)
        out[before] = lookup(study_id, person_id, study_date, modality, wanted[before])
        if (out < 0).any():
            raise RuntimeError("a study just written was not found")
    return out


_WRITERS = {
    "families": _write_families,
    "people": _write_people,
    "variants": _write_variants,
    "genetic-results": _write_genetic_results,
    "assessments": _write_assessments,
    "studies": _write_studies,
}

__all__ = ["import_file", "import_folder", "import_cells", "store_rows", "check_file", "ImportSummary", "InputRejected", "Layout"]
