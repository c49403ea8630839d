"""Importing CSV files into the store: all-or-nothing, idempotent, never rewriting stored values.

The steps for one file are: read the text cells, parse every column, check
the rows against each other and against the store, compare with what is
stored (a row stored with the same values is skipped; a key stored with other
values is refused), and only then write, inside the caller's transaction.
Any problem stops the import before anything is written.
"""

from __future__ import annotations

import datetime as dt
import getpass
import hashlib
from dataclasses import dataclass
from pathlib import Path
from typing import Callable

import numpy as np
import pandas as pd
from sqlalchemy import Connection, insert, select, update

from tracker.io import validation
from tracker.io.columns import partial_to_storage
from tracker.io.layouts import IMPORT_ORDER, LAYOUTS, Layout
from tracker.io.reading import InputRejected, Problem, read_table
from tracker.store import repository as repo
from tracker.store.models import (
    Assessment,
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

    def as_dict(self) -> dict:
        return {
            "kind": self.kind,
            "file": self.file,
            "rows_read": self.rows_read,
            "rows_added": self.rows_added,
            "rows_already_stored": self.rows_already_stored,
        }


def context(conn: Connection, today: dt.date) -> validation.Context:
    return validation.Context(
        families=repo.load_families(conn),
        people=repo.load_people(conn),
        variants=repo.load_variants(conn),
        measures=repo.load_measures(conn),
        today=today,
    )


def check_file(conn: Connection, kind: str, path: Path, today: dt.date) -> validation.Checked:
    """Read and check one file; raise :class:`InputRejected` listing every problem."""
    layout = LAYOUTS[kind]
    cells = read_table(path, layout)
    checked = validation.parse_cells(layout, path.name, cells, today)
    validation.CHECKS[kind](checked, context(conn, today))
    if checked.problems:
        raise InputRejected(checked.problems)
    return checked


def import_file(
    conn: Connection,
    kind: str,
    path: Path,
    *,
    today: dt.date | None = None,
    user: str | None = None,
    progress: Progress | None = None,
) -> ImportSummary:
    """Check and write one file inside the caller's transaction (roll it back for a dry run)."""
    today = today or dt.date.today()
    checked = check_file(conn, kind, path, today)
    writer = _WRITERS[kind]
    added, already = writer(conn, checked, progress or (lambda n: None))
    summary = ImportSummary(kind, path.name, len(checked.rows), added, already)
    conn.execute(
        insert(ImportRun),
        dict(
            kind=kind,
            file_name=path.name,
            sha256=hashlib.sha256(path.read_bytes()).hexdigest(),
            imported_at=dt.datetime.now(dt.timezone.utc).replace(tzinfo=None),
            imported_by=user or getpass.getuser(),
            rows_read=summary.rows_read,
            rows_added=added,
        ),
    )
    return summary


def import_folder(conn: Connection, folder: Path, **kw) -> list[ImportSummary]:
    """Import every layout file present in ``folder``, in dependency order, in one transaction."""
    if not folder.is_dir():
        raise InputRejected([Problem(folder.name, None, None, "is not a folder")])
    found = [(k, folder / LAYOUTS[k].file_name) for k in IMPORT_ORDER if (folder / LAYOUTS[k].file_name).exists()]
    if not found:
        names = ", ".join(LAYOUTS[k].file_name for k in IMPORT_ORDER)
        raise InputRejected([Problem(folder.name, None, None, f"holds none of the files {names}")])
    return [import_file(conn, kind, path, **kw) for kind, path in found]


# --------------------------------------------------------------------------- comparing


def _split(checked: validation.Checked, stored: pd.DataFrame, compare: list[str]) -> tuple[pd.DataFrame, int]:
    """Rows not yet stored; rows stored identically are dropped; stored-but-different is refused."""
    rows = checked.rows
    key = list(checked.layout.key)
    if stored.empty:
        return rows, 0
    left = _keyframe(rows, key)
    right = _keyframe(stored, key)
    stored_idx = pd.MultiIndex.from_frame(right) if len(key) > 1 else pd.Index(right[key[0]])
    file_idx = pd.MultiIndex.from_frame(left) if len(key) > 1 else pd.Index(left[key[0]])
    pos = stored_idx.get_indexer(file_idx)
    present = pos >= 0
    problems = []
    if present.any():
        mine = rows[present]
        theirs = stored.iloc[pos[present]]
        for col in compare:
            a = mine[col].to_numpy(dtype=object)
            b = theirs[col].to_numpy(dtype=object)
            same = np.array([_same(x, y) for x, y in zip(a, b)], dtype=bool)
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


def _keyframe(frame: pd.DataFrame, key: list[str]) -> pd.DataFrame:
    return frame[key].astype(object).where(frame[key].notna(), "").reset_index(drop=True)


def _same(x, y) -> bool:
    xn = x is None or (isinstance(x, float) and np.isnan(x))
    yn = y is None or (isinstance(y, float) and np.isnan(y))
    if xn or yn:
        return xn and yn
    return x == y


def _ids(conn: Connection, model, code_col="code") -> dict:
    return dict(conn.execute(select(getattr(model, code_col), model.id)).all())


def _none(v):
    if v is None or (isinstance(v, float) and np.isnan(v)):
        return None
    return v


def _date(iso):
    return dt.date.fromisoformat(iso) if isinstance(iso, str) else None


def _records(frame: pd.DataFrame) -> list[dict]:
    return [{k: _none(v) for k, v in r.items()} for r in frame.to_dict("records")]


# --------------------------------------------------------------------------- writers


def _write_families(conn, checked, progress):
    new, already = _split(checked, repo.load_families(conn), ["condition", "notes"])
    if len(new):
        conn.execute(insert(Family), [
            dict(code=r["family"], condition=r["condition"], notes=r["notes"]) for r in _records(new)
        ])
    progress(len(checked.rows))
    return len(new), already


def _write_people(conn, checked, progress):
    compare = [c for c in checked.layout.names if c != "person"]
    new, already = _split(checked, repo.load_people(conn), compare)
    if len(new):
        fam = _ids(conn, Family)
        rows = []
        for r in _records(new):
            birth, birth_p = partial_to_storage(r["birth_date"])
            death, death_p = partial_to_storage(r["death_date"])
            rows.append(dict(
                code=r["person"], family_id=fam[r["family"]], given_name=r["given_name"],
                family_name=r["family_name"], sex_at_birth=r["sex_at_birth"],
                gender_identity=r["gender_identity"], birth_date=birth, birth_date_precision=birth_p,
                vital_status=r["vital_status"], death_date=death, death_date_precision=death_p,
                is_placeholder=bool(r["placeholder"]), is_proband=bool(r["proband"]),
                twin_type=r["twin_type"], adoption=r["adoption"], contact_status=r["contact_status"],
                contact_status_date=_date(r["contact_status_date"]), notes=r["notes"],
            ))  # fmt: skip
        conn.execute(insert(Person), rows)
        ids = _ids(conn, Person)
        for r in _records(new):
            links = {
                "mother_id": ids.get(r["mother"]),
                "father_id": ids.get(r["father"]),
                "twin_of_id": ids.get(r["twin_of"]),
            }
            if any(v is not None for v in links.values()):
                conn.execute(update(Person).where(Person.id == ids[r["person"]]).values(**links))
    progress(len(checked.rows))
    return len(new), already


def _write_variants(conn, checked, progress):
    compare = ["gene", "hgvs_p", "zygosity", "acmg_class", "reason"]
    new, already = _split(checked, repo.load_variants(conn), compare)
    if len(new):
        fam = _ids(conn, Family)
        for r in _records(new):
            fid = fam[r["family"]]
            vid = conn.execute(
                select(Variant.id).where(
                    Variant.family_id == fid, Variant.transcript == r["transcript"], Variant.hgvs_c == r["hgvs_c"]
                )
            ).scalar()
            if vid is None:
                vid = conn.execute(
                    insert(Variant).returning(Variant.id),
                    dict(family_id=fid, gene=r["gene"], transcript=r["transcript"], hgvs_c=r["hgvs_c"],
                         hgvs_p=r["hgvs_p"], zygosity=r["zygosity"]),
                ).scalar()
            conn.execute(insert(VariantClassification), dict(
                variant_id=vid, classified_on=_date(r["classified_on"]), acmg_class=r["acmg_class"],
                reason=r["reason"],
            ))  # fmt: skip
    progress(len(checked.rows))
    return len(new), already


def _variant_ids(conn) -> dict:
    stmt = select(Family.code, Variant.transcript, Variant.hgvs_c, Variant.id).join(Family)
    return {(f, f"{t}:{c}"): i for f, t, c, i in conn.execute(stmt).all()}


def _write_genetic_results(conn, checked, progress):
    compare = ["result", "lab", "report_reference"]
    new, already = _split(checked, repo.load_genetic_results(conn), compare)
    if len(new):
        people = repo.load_people(conn).set_index("person")["family"]
        ids = _ids(conn, Person)
        variants = _variant_ids(conn)
        conn.execute(insert(GeneticResult), [
            dict(person_id=ids[r["person"]], test_date=_date(r["test_date"]), test_type=r["test_type"],
                 variant_id=variants.get((people[r["person"]], r["variant"])), result=r["result"],
                 lab=r["lab"], report_reference=r["report_reference"])
            for r in _records(new)
        ])  # fmt: skip
    progress(len(checked.rows))
    return len(new), already


def _write_assessments(conn, checked, progress):
    compare = ["affected_status", "symptoms", "competitive_athlete", "pregnant", "hypertension", "notes"]
    new, already = _split(checked, repo.load_assessments(conn), compare)
    if len(new):
        ids = _ids(conn, Person)
        conn.execute(insert(Assessment), [
            dict(person_id=ids[r["person"]], assessment_date=_date(r["assessment_date"]),
                 affected_status=r["affected_status"], symptoms=r["symptoms"],
                 competitive_athlete=bool(r["competitive_athlete"]), pregnant=bool(r["pregnant"]),
                 hypertension=bool(r["hypertension"]), notes=r["notes"])
            for r in _records(new)
        ])  # fmt: skip
    progress(len(checked.rows))
    return len(new), already


CHUNK = 50_000


def _write_studies(conn, checked, progress):
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
    with_value = rows[rows["measure"].notna()]
    value_check = validation.Checked(checked.layout, checked.file, with_value)
    stored_values = stored[stored["measure"].notna()]
    new_values, already_values = _split(value_check, stored_values, ["value", "unit"])
    study_rows_only = rows[rows["measure"].isna()]
    stored_keys = set(map(tuple, stored_studies[skey].to_numpy()))
    already_empty = sum(tuple(k) in stored_keys for k in study_rows_only[skey].to_numpy())

    ids = _ids(conn, Person)
    if len(new_studies):
        recs = [
            dict(person_id=ids[r["person"]], study_date=_date(r["study_date"]), modality=r["modality"],
                 site=r["site"], height_cm=r["height_cm"], weight_kg=r["weight_kg"])
            for r in _records(new_studies[skey + ["site", "height_cm", "weight_kg"]])
        ]  # fmt: skip
        for i in range(0, len(recs), CHUNK):
            conn.execute(insert(Study), recs[i : i + CHUNK])
    if len(new_values):
        study_ids = {
            (p, d.isoformat(), m): i
            for p, d, m, i in conn.execute(
                select(Person.code, Study.study_date, Study.modality, Study.id).join(Person)
            ).all()
        }
        sid = [study_ids[k] for k in zip(new_values["person"], new_values["study_date"], new_values["modality"])]
        frame = pd.DataFrame({
            "study_id": sid,
            "measure_code": new_values["measure"].to_numpy(),
            "value": new_values["_value"].to_numpy(dtype=float),
            "unit": new_values["_unit"].to_numpy(),
            "entered_value": new_values["value"].to_numpy(dtype=float),
            "entered_unit": new_values["_entered_unit"].to_numpy(),
        })  # fmt: skip
        recs = frame.to_dict("records")
        for i in range(0, len(recs), CHUNK):
            conn.execute(insert(Measurement), recs[i : i + CHUNK])
            progress(min(CHUNK, len(recs) - i))
    added = len(new_values) + (len(study_rows_only) - already_empty)
    return added, already_values + already_empty


_WRITERS = {
    "families": _write_families,
    "people": _write_people,
    "variants": _write_variants,
    "genetic-results": _write_genetic_results,
    "assessments": _write_assessments,
    "studies": _write_studies,
}

__all__ = ["import_file", "import_folder", "check_file", "ImportSummary", "InputRejected", "Layout"]
