"""Importing echocardiography measurement reports (DICOM Structured Reports) into the store.

Two report forms are read: the Adult Echocardiography Procedure Report (DICOM PS3.16 TID 5200,
root concept DCM 125200, measurements as LOINC or SNOMED CT concepts with modifiers) and the
Simplified Echo Procedure Report (TID 5300, pre-coordinated concepts of CID 12300). Every
numeric (NUM) content item is looked up in the code map ``data/dicom_sr_codes.csv``; the items
it maps become rows of the ``studies`` CSV layout, which are then checked and written by the
same code as a CSV import (:mod:`tracker.io.validation`, :mod:`tracker.io.csv_import`): plausible
ranges, unit conversion, the same study stored with other values refused, a re-import adding
nothing. Items the map does not take are listed, never dropped silently.

The person is the one whose stored ``external_id`` equals the report's Patient ID, or the one
named with ``person=``; a report whose Patient ID differs from that person's stored
``external_id`` is refused. Patient IDs are private like names: messages never repeat them.
"""

from __future__ import annotations

import csv
import datetime as dt
from dataclasses import dataclass, field
from importlib import resources
from pathlib import Path

import pandas as pd
from sqlalchemy import Connection

from tracker.gcpause import gc_paused
from tracker.domain import units
from tracker.io import csv_import, validation
from tracker.io.layouts import LAYOUTS
from tracker.io.reading import InputRejected, Problem

KIND = "dicom-sr"
MAX_FILE_BYTES = 64 * 1024**2  # a measurement report is a few kB to a few MB

# SOP classes of structured reports (DICOM PS3.4 Annex B; common practice for which SR classes hold
# measurement reports): Basic Text, Enhanced, Comprehensive, Comprehensive 3D, Extensible SR.
SR_SOP_CLASSES = {
    "1.2.840.10008.5.1.4.1.1.88.11": "Basic Text SR",
    "1.2.840.10008.5.1.4.1.1.88.22": "Enhanced SR",
    "1.2.840.10008.5.1.4.1.1.88.33": "Comprehensive SR",
    "1.2.840.10008.5.1.4.1.1.88.34": "Comprehensive 3D SR",
    "1.2.840.10008.5.1.4.1.1.88.35": "Extensible SR",
}
# Root concepts (document titles) accepted: DCM 125200 Adult Echocardiography Procedure Report
# (CID 7000) [V] (pydicom.sr); the titles of CID 12245 Cardiac Ultrasound Report Title [V] (pydicom.sr).
ROOT_TITLES = {("DCM", "125200"), ("DCM", "125195"), ("DCM", "125196"), ("DCM", "125197")}
FINDING_SITE = ("SCT", "363698007")  # Finding Site, CID 9000 [V] (pydicom.sr)
PRE_COORDINATED = ("DCM", "125301")  # Pre-coordinated Measurements container, TID 5300 [V] code (pydicom.sr)
# Body height and weight as NUM items of the report (LOINC 8302-2 Body height, 29463-7 Body weight)
# [M] from memory, verify: not in pydicom's CID dictionary. The patient module's Patient's Size
# (0010,1020, metres) and Patient's Weight (0010,1030, kilograms) are read when the items are absent.
BODY_HEIGHT = ("LN", "8302-2")
BODY_WEIGHT = ("LN", "29463-7")
_HEIGHT_TO_CM = {"cm": 1.0, "m": 100.0, "mm": 0.1}  # exact SI factors
_WEIGHT_TO_KG = {"kg": 1.0, "g": 0.001}  # exact SI factors


@dataclass(frozen=True)
class MapRow:
    scheme: str
    code: str
    meaning: str
    cids: tuple[int, ...]
    finding_site: str | None
    unit: str | None
    measure: str
    rank: int
    tag: str


def load_code_map() -> list[MapRow]:
    """The rows of ``data/dicom_sr_codes.csv`` (comment lines start with #)."""
    text = resources.files("tracker.io").joinpath("data/dicom_sr_codes.csv").read_text(encoding="utf-8")
    lines = [ln for ln in text.splitlines() if ln and not ln.startswith("#")]
    return [
        MapRow(r["scheme"], r["code"], r["meaning"], tuple(int(c) for c in r["cids"].split()),
               r["finding_site"] or None, r["unit"] or None, r["measure"], int(r["rank"]), r["tag"])
        for r in csv.DictReader(lines)
    ]  # fmt: skip


class ItemProblem(Problem):
    """A problem located by a content item of the report (``column`` holds its description)."""

    def __str__(self) -> str:
        return f"{self.file}: {self.column}: {self.message}" if self.column else f"{self.file}: {self.message}"


@dataclass
class Item:
    """One numeric content item of the report."""

    position: str  # "1.4.2": the item's place in the content tree, counted from 1 at each level
    scheme: str
    code: str
    meaning: str
    value: float | None
    unit: str | None
    finding_site: tuple[str, str] | None

    @property
    def label(self) -> str:
        return f"content item {self.position} '{self.meaning}' ({self.scheme} {self.code})"


@dataclass
class Report:
    file: str
    patient_id: str | None
    study_date: str | None
    form: str  # "TID 5200" or "TID 5300"
    items: list[Item]
    height_cm: float | None = None
    weight_kg: float | None = None
    problems: list[Problem] = field(default_factory=list)


@dataclass
class SrSummary:
    """What one report gave: the import counts, and the values taken and left."""

    summary: csv_import.ImportSummary
    person: str
    study_date: str
    form: str
    taken: list[tuple[str, str]]  # (item label, measure)
    left: list[tuple[str, str]]  # (item label, why)

    def as_dict(self) -> dict:
        return {**self.summary.as_dict(), "person": self.person, "study_date": self.study_date,
                "report_form": self.form, "values_taken": len(self.taken), "values_left": len(self.left),
                "taken": [{"item": i, "measure": m} for i, m in self.taken],
                "left": [{"item": i, "reason": r} for i, r in self.left]}  # fmt: skip


# --------------------------------------------------------------------------- reading a report


def _code(seq) -> tuple[str, str, str] | None:
    if not seq:
        return None
    c = seq[0]
    value = getattr(c, "CodeValue", None) or getattr(c, "LongCodeValue", None) or getattr(c, "URNCodeValue", None)
    return (str(getattr(c, "CodingSchemeDesignator", "") or ""), str(value or ""), str(getattr(c, "CodeMeaning", "")))


def read_report(path: Path) -> Report:
    """Read one file as an echocardiography measurement report; problems are collected, not raised."""
    import pydicom
    from pydicom.errors import InvalidDicomError

    name = path.name
    if not path.is_file():
        raise InputRejected([Problem(name, None, None, "file not found" if not path.exists() else "is not a file")])
    if path.stat().st_size > MAX_FILE_BYTES:
        raise InputRejected([Problem(name, None, None, "file is larger than 64 MiB: not a measurement report")])
    try:
        ds = pydicom.dcmread(path)
    except InvalidDicomError:
        raise InputRejected([Problem(name, None, None, "is not a DICOM file (no DICM preamble)")]) from None
    except Exception as exc:  # truncated or corrupt data elements
        message = f"is not a readable DICOM file ({type(exc).__name__})"
        raise InputRejected([Problem(name, None, None, message)]) from None
    try:
        return _report(name, ds)
    except InputRejected:
        raise
    except Exception as exc:  # a data element whose value cannot be decoded
        message = f"is a malformed structured report ({type(exc).__name__})"
        raise InputRejected([Problem(name, None, None, message)]) from None


def _report(name: str, ds) -> Report:
    sop = str(getattr(ds, "SOPClassUID", "") or "")
    if sop not in SR_SOP_CLASSES:
        what = f"SOP class {sop}" if sop else "no SOP class"
        raise InputRejected([Problem(name, None, None, f"is a DICOM file but not a structured report ({what})")])
    root = _code(getattr(ds, "ConceptNameCodeSequence", None))
    if root is None or (root[0], root[1]) not in ROOT_TITLES:
        title = f"'{root[2]}' ({root[0]} {root[1]})" if root else "no document title"
        raise InputRejected([Problem(name, None, None, f"is not an echocardiography procedure report: root concept "
                                     f"is {title}, expected DCM 125200 (TID 5200 or TID 5300)")])  # fmt: skip
    report = Report(name, str(getattr(ds, "PatientID", "") or "").strip() or None, None, "TID 5200", [])
    date = str(getattr(ds, "StudyDate", "") or "").strip()
    if not date:
        report.problems.append(ItemProblem(name, None, "attribute Study Date (0008,0020)", "is empty"))
    else:
        try:
            report.study_date = dt.datetime.strptime(date, "%Y%m%d").date().isoformat()
        except ValueError:
            report.problems.append(ItemProblem(name, None, "attribute Study Date (0008,0020)",
                                               "is not a date (YYYYMMDD)"))  # fmt: skip
    _walk(report, getattr(ds, "ContentSequence", None) or [], "1")
    _body_size(report, ds)
    return report


def _walk(report: Report, seq, prefix: str) -> None:
    for i, item in enumerate(seq, start=1):
        position = f"{prefix}.{i}"
        concept = _code(getattr(item, "ConceptNameCodeSequence", None))
        kind = str(getattr(item, "ValueType", "") or "")
        if concept is None and kind != "":
            if not getattr(item, "ReferencedContentItemIdentifier", None):
                report.problems.append(ItemProblem(report.file, None, f"content item {position}",
                                                   "has no concept name"))  # fmt: skip
            continue
        if concept and (concept[0], concept[1]) == PRE_COORDINATED:
            report.form = "TID 5300"
        if kind == "NUM":
            report.items.append(_num(report, item, position, concept))
        children = getattr(item, "ContentSequence", None)
        if children and kind != "NUM":
            _walk(report, children, position)


def _num(report: Report, item, position: str, concept) -> Item:
    site = None
    for child in getattr(item, "ContentSequence", None) or []:
        name = _code(getattr(child, "ConceptNameCodeSequence", None))
        if name and (name[0], name[1]) == FINDING_SITE:
            value = _code(getattr(child, "ConceptCodeSequence", None))
            site = (value[0], value[1]) if value else None
    out = Item(position, concept[0], concept[1], concept[2], None, None, site)
    measured = getattr(item, "MeasuredValueSequence", None)
    if not measured:
        report.problems.append(ItemProblem(report.file, None, out.label, "has no measured value"))
        return out
    mv = measured[0]
    raw = getattr(mv, "NumericValue", None)
    try:
        value = float(raw if not isinstance(raw, (list, tuple)) else raw[0])
    except (TypeError, ValueError, IndexError):
        report.problems.append(ItemProblem(report.file, None, out.label, "has no numeric value"))
        return out
    if value != value or value in (float("inf"), float("-inf")):
        report.problems.append(ItemProblem(report.file, None, out.label, "is not a finite number"))
        return out
    unit = _code(getattr(mv, "MeasurementUnitsCodeSequence", None))
    if unit is None or not unit[1]:
        report.problems.append(ItemProblem(report.file, None, out.label, "has no measurement unit"))
        return out
    if unit[0] != "UCUM":
        report.problems.append(ItemProblem(report.file, None, out.label,
                                           f"unit {unit[1]!r} is coded in {unit[0]}, not UCUM"))  # fmt: skip
        return out
    out.value, out.unit = value, unit[1]
    return out


def _body_size(report: Report, ds) -> None:
    """Body height and weight from the report's items, else from the patient module."""
    for item in list(report.items):
        key = (item.scheme, item.code)
        if key not in (BODY_HEIGHT, BODY_WEIGHT):
            continue
        report.items.remove(item)
        if item.value is None:
            continue
        factors = _HEIGHT_TO_CM if key == BODY_HEIGHT else _WEIGHT_TO_KG
        factor = factors.get(item.unit)
        if factor is None:
            report.problems.append(ItemProblem(report.file, None, item.label,
                                               f"unit {item.unit!r} is not one of {', '.join(factors)}"))  # fmt: skip
        elif key == BODY_HEIGHT:
            report.height_cm = item.value * factor
        else:
            report.weight_kg = item.value * factor
    for attr, tag, to, target in (("PatientSize", "(0010,1020)", 100.0, "height_cm"),
                                  ("PatientWeight", "(0010,1030)", 1.0, "weight_kg")):  # fmt: skip
        raw = getattr(ds, attr, None)
        if getattr(report, target) is None and raw not in (None, ""):
            try:
                setattr(report, target, float(raw) * to)
            except (TypeError, ValueError):
                report.problems.append(ItemProblem(report.file, None, f"attribute {attr} {tag}", "is not a number"))


# --------------------------------------------------------------------------- mapping to measures


def map_items(items: list[Item], code_map: list[MapRow]) -> tuple[list[tuple[Item, MapRow]], list[tuple[Item, str]]]:
    """(items taken with their map row, items left with the reason): one item per measure, lowest rank."""
    by_code: dict[tuple[str, str], list[MapRow]] = {}
    for row in code_map:
        by_code.setdefault((row.scheme, row.code), []).append(row)
    candidates: list[tuple[Item, MapRow]] = []
    left: list[tuple[Item, str]] = []
    for item in items:
        if item.value is None:
            continue  # already a problem
        rows = by_code.get((item.scheme, item.code))
        if not rows:
            left.append((item, "concept code not in the code map (no catalogue measure)"))
            continue
        site = item.finding_site[1] if item.finding_site and item.finding_site[0] == "SCT" else None
        fits = [r for r in rows if r.finding_site is None or r.finding_site == site]
        if not fits:
            where = f"SCT {site}" if site else "none"
            left.append((item, f"finding site {where} is not one the code map takes for this code"))
            continue
        fits = [r for r in fits if r.unit is None or r.unit.lower() == (item.unit or "").lower()]
        if not fits:
            left.append((item, f"the code map takes this code only in {rows[0].unit}, not {item.unit}"))
            continue
        candidates.append((item, fits[0]))
    taken: dict[str, tuple[Item, MapRow]] = {}
    for item, row in sorted(candidates, key=lambda c: c[1].rank):
        if row.measure in taken:
            left.append((item, f"{row.measure} is taken from {taken[row.measure][0].label}"))
        else:
            taken[row.measure] = (item, row)
    order = {id(i): n for n, i in enumerate(items)}
    return (sorted(taken.values(), key=lambda t: order[id(t[0])]),
            sorted(left, key=lambda t: order[id(t[0])]))  # fmt: skip


# --------------------------------------------------------------------------- person


def _person(report: Report, people: pd.DataFrame, person: str | None) -> str | None:
    """The person code the report belongs to; adds a problem (and returns None) when it cannot be told."""
    problems = report.problems
    where = "attribute Patient ID (0010,0020)"
    ext = people["external_id"] if "external_id" in people else pd.Series([], dtype=object)
    if person is not None:
        row = people[people["person"] == person]
        if row.empty:
            problems.append(ItemProblem(report.file, None, "option --person",
                                        f"person {person!r} is not in the database"))  # fmt: skip
            return None
        stored = row["external_id"].iloc[0] if "external_id" in row else None
        if isinstance(stored, str) and stored and report.patient_id != stored:
            problems.append(ItemProblem(report.file, None, where,
                                        f"differs from the external_id stored for person {person}: "
                                        "the report is for another patient"))  # fmt: skip
            return None
        if not isinstance(stored, str) and report.patient_id:  # no stored ID: the report's must be no one else's
            other = people[(ext == report.patient_id).to_numpy()] if len(ext) else people.iloc[0:0]
            if len(other):
                holder = other["person"].iloc[0]
                problems.append(ItemProblem(report.file, None, where,
                                            f"is the external_id of person {holder}, not of {person}"))  # fmt: skip
                return None
        return person
    if not report.patient_id:
        problems.append(ItemProblem(report.file, None, where, "is empty: give the person with --person CODE"))
        return None
    match = people[(ext == report.patient_id).to_numpy()] if len(ext) else people.iloc[0:0]
    if match.empty:
        problems.append(ItemProblem(report.file, None, where,
                                    "matches no person's external_id: record it in the people file, "
                                    "or give the person with --person CODE"))  # fmt: skip
        return None
    return str(match["person"].iloc[0])


# --------------------------------------------------------------------------- checking and writing


@dataclass
class _Prepared:
    report: Report
    path: Path
    person: str
    checked: validation.Checked
    taken: list[tuple[Item, MapRow]]
    left: list[tuple[Item, str]]


def _prepare(conn: Connection, path: Path, ctx: validation.Context, person: str | None,
             code_map: list[MapRow]) -> _Prepared:  # fmt: skip
    report = read_report(path)
    who = _person(report, ctx.people, person)
    taken, left = map_items(report.items, code_map)
    if report.problems or who is None:
        raise InputRejected(report.problems)
    layout = LAYOUTS["studies"]
    # The study's site and body size as stored, where the report does not give them (so that the
    # comparison with a stored study does not take "not in the report" for a different value).
    stored = _stored_study(conn, who, report.study_date)
    site = stored.get("site")
    height = report.height_cm if report.height_cm is not None else stored.get("height_cm")
    weight = report.weight_kg if report.weight_kg is not None else stored.get("weight_kg")
    base = {"person": who, "study_date": report.study_date, "modality": "echo", "site": _cell(site),
            "height_cm": _cell(height), "weight_kg": _cell(weight)}  # fmt: skip
    # Units in their canonical spelling (as stored), so that a re-import compares equal.
    records = [{**base, "measure": row.measure, "value": repr(item.value),
                "unit": units.normalise_unit(item.unit or "") or item.unit or ""}
               for item, row in taken] or [{**base, "measure": "", "value": "", "unit": ""}]  # fmt: skip
    cells = pd.DataFrame(records, columns=layout.names, index=range(1, len(records) + 1), dtype=object)
    checked = validation.parse_cells(layout, path.name, cells, ctx.today)
    validation.CHECKS["studies"](checked, ctx)
    if checked.problems:
        raise InputRejected(_locate(checked.problems, taken, path.name))
    return _Prepared(report, path, who, checked, taken, left)


def _cell(v) -> str:
    if v is None or (isinstance(v, float) and v != v):
        return ""
    return repr(float(v)) if isinstance(v, (int, float)) else str(v)


def _stored_study(conn: Connection, person: str, study_date: str) -> dict:
    from tracker.store import repository as repo

    studies = repo.load_studies(conn)
    if studies.empty:
        return {}
    same = (studies["person"] == person) & (studies["study_date"] == study_date) & (studies["modality"] == "echo")
    mine = studies[same]
    return {} if mine.empty else {k: mine[k].iloc[0] for k in ("site", "height_cm", "weight_kg")}


_STUDY_ITEMS = {
    "person": "the report's person",
    "study_date": "attribute Study Date (0008,0020)",
    "height_cm": "body height (LN 8302-2 or Patient's Size (0010,1020))",
    "weight_kg": "body weight (LN 29463-7 or Patient's Weight (0010,1030))",
    "site": "the stored study's site",
}


def _locate(problems: list[Problem], taken: list[tuple[Item, MapRow]], file: str) -> list[Problem]:
    """Problems of the studies rows, located by content item (values) or attribute (study level)."""
    out, seen = [], set()
    for p in problems:
        if p.column in _STUDY_ITEMS or p.column is None and not taken:
            where = _STUDY_ITEMS.get(p.column, "the report")
        else:
            item, row = taken[p.row - 1] if p.row and 0 < p.row <= len(taken) else (None, None)
            where = f"{item.label} -> {row.measure}" if item else "the report"
        if (where, p.message) not in seen:
            seen.add((where, p.message))
            out.append(ItemProblem(file, None, where, p.message))
    return out


def _conflicts(prepared: list[_Prepared]) -> list[Problem]:
    """Reports of one import that give the same study's value differently (checked before any write)."""
    out, first = [], {}
    for p in prepared:
        rows = p.checked.rows
        for n, (item, row) in enumerate(p.taken, start=1):
            key = (p.person, p.report.study_date, row.measure)
            mine = (rows.at[n, "_value"], p.report.file, item.label)
            seen = first.setdefault(key, mine)
            if seen is not mine and seen[0] != mine[0]:
                out.append(ItemProblem(p.report.file, None, f"{item.label} -> {row.measure}",
                                       f"differs from {seen[2]} of {seen[1]} (same person, study date and measure)"))
    return out


def import_reports(
    conn: Connection,
    paths: list[Path],
    *,
    person: str | None = None,
    today: dt.date | None = None,
    user: str | None = None,
) -> list[SrSummary]:
    """Check every report, then write them all inside the caller's transaction (all or nothing)."""
    today = today or dt.date.today()
    code_map = load_code_map()
    with gc_paused():
        ctx = csv_import.context(conn, today)
        prepared, problems = [], []
        for path in paths:
            try:
                prepared.append(_prepare(conn, path, ctx, person, code_map))
            except InputRejected as exc:
                problems.extend(exc.problems)
        problems.extend(_conflicts(prepared))
        if problems:
            raise InputRejected(problems)
        out = []
        for p in prepared:
            try:
                added, already = csv_import._WRITERS["studies"](conn, p.checked, lambda n: None, ctx)
            except InputRejected as exc:  # a value stored before with another value
                raise InputRejected(_locate(exc.problems, p.taken, p.report.file)) from None
            rows_read = len(p.taken)
            summary = csv_import.ImportSummary(KIND, p.report.file, rows_read, added if p.taken else 0,
                                               already if p.taken else 0,
                                               csv_import.touched(p.checked, ctx, added if p.taken else 0))  # fmt: skip
            csv_import._record_run(conn, summary, p.path, user)
            out.append(SrSummary(summary, p.person, p.report.study_date, p.report.form,
                                 [(i.label, r.measure) for i, r in p.taken],
                                 [(i.label, why) for i, why in p.left]))  # fmt: skip
        csv_import.refresh_proposals(conn, frozenset().union(*(s.summary.families for s in out)), today)
    return out
