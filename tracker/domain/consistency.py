"""Consistency of stored records: what `tracker check` looks for beyond database integrity.

Pure: takes the repository frames (layout form, see tracker/store/repository.py)
and returns findings, each naming where it is (kind of record and its key).
The importer refuses these mistakes on entry; a finding here means data that
reached the store some other way, or a rule that has changed since.
"""

from __future__ import annotations

import datetime as dt
import math
from dataclasses import asdict, dataclass

import pandas as pd

from tracker.domain.dates import PartialDate, age_bounds, parse_partial_date
from tracker.domain.numbers import finite_number
from tracker.domain.pedigree import Pedigree, PedigreeError


@dataclass(frozen=True)
class Finding:
    check: str  # short name of the check
    where: str  # kind and key, e.g. "person HV01-II-3" or "study HV01-II-3 2019-04-02 echo"
    message: str

    def as_dict(self) -> dict:
        return asdict(self)


def _earliest(iso):
    return pd.Timestamp(parse_partial_date(iso).earliest()) if isinstance(iso, str) else pd.NaT


def _latest(iso):
    return pd.Timestamp(parse_partial_date(iso).latest()) if isinstance(iso, str) else pd.NaT


def pedigree_findings(people: pd.DataFrame) -> list[Finding]:
    """Cycles and impossible links, family by family."""
    out = []
    for family, members in people.groupby("family"):
        frame = members.copy()
        # Links to people recorded in another family are allowed; check within the family.
        inside = set(frame["person"])
        for col in ("mother", "father", "twin_of"):
            frame[col] = frame[col].where(frame[col].isin(inside), None)
        frame["birth_date"] = [parse_partial_date(d).value if isinstance(d, str) else None for d in frame["birth_date"]]
        try:
            Pedigree(frame)
        except PedigreeError as exc:
            out.append(Finding("pedigree", f"family {family}", str(exc)))
    return out


def date_findings(people: pd.DataFrame, studies: pd.DataFrame, assessments: pd.DataFrame,
                  results: pd.DataFrame) -> list[Finding]:  # fmt: skip
    """Dates out of order: death before birth, child before parent, records outside a life."""
    out = []
    p = people.set_index("person")
    birth_lo = p["birth_date"].map(_earliest)
    birth_hi = p["birth_date"].map(_latest)
    death_hi = p["death_date"].map(_latest)
    for person in p.index[(death_hi < birth_lo).fillna(False)]:
        out.append(Finding("dates", f"person {person}", "date of death is before the date of birth"))
    for link in ("mother", "father"):
        parent = p[link].dropna()
        parent = parent[parent.isin(p.index)]
        before = birth_hi[parent.index] < birth_lo[parent.to_numpy()].to_numpy()
        for child in parent.index[before.fillna(False).to_numpy()]:
            out.append(Finding("dates", f"person {child}", f"born before their {link} {parent[child]}"))
    for frame, date_col, kind in ((studies.drop_duplicates(["person", "study_date", "modality"]), "study_date", "study"),
                                  (assessments, "assessment_date", "assessment"),
                                  (results, "test_date", "genetic result")):  # fmt: skip
        if frame.empty:
            continue
        when = pd.to_datetime(frame[date_col])
        lo = frame["person"].map(birth_lo)
        hi = frame["person"].map(death_hi)
        for (_, row), b, d in zip(frame.iterrows(), (when < lo).to_numpy(), (when > hi).to_numpy()):
            key = f"{kind} {row['person']} {row[date_col]}"
            if b:
                out.append(Finding("dates", key, "is before the person's date of birth"))
            if d:
                out.append(Finding("dates", key, "is after the person's date of death"))
    return out


# --------------------------------------------------------------------------- record fields (revision 0006)

RECORD_FIELDS = ("death_cause", "death_age", "diagnosis_age", "icd_date", "pacemaker_date")


def _pd(v) -> PartialDate | None:
    return parse_partial_date(v) if isinstance(v, str) and v else None


def _years(v) -> int | None:
    """Whole years of a recorded age (None when not a finite number)."""
    x = finite_number(v)
    return None if x is None else int(x)


def record_problems(people: pd.DataFrame, today: dt.date) -> list[tuple[object, str, str]]:
    """Cross-field checks of the recorded cause and age of death, age at diagnosis and device dates.

    ``people``: rows in the people layout's clean form (a CSV file or ``load_people``).  Returns
    (row index label, column, message) for each problem, at most one per cell:

    - a cause or an age of death only for a deceased person;
    - an age at death that the dates of birth and death (when both are recorded) do not allow;
    - an age at diagnosis above the person's age (today, or at death);
    - an ICD or pacemaker date before the date of birth or after the date of death.

    Pure; the importer (:mod:`tracker.io.validation`), ``tracker check`` and ``tracker edit`` use it.
    """
    present = [c for c in RECORD_FIELDS if c in people.columns]
    if not present or people.empty:
        return []
    given = pd.Series(False, index=people.index)
    for c in present:
        given |= people[c].notna()
    out: list[tuple[object, str, str]] = []
    for idx, r in people[given].iterrows():
        deceased = r.get("vital_status") == "deceased"
        birth, death = _pd(r.get("birth_date")), _pd(r.get("death_date"))
        death_age, diag_age = _years(r.get("death_age")), _years(r.get("diagnosis_age"))
        cause = r.get("death_cause")
        if isinstance(cause, str) and cause and not deceased:
            out.append((idx, "death_cause", "is given but vital_status is not deceased"))
        if death_age is not None and not deceased:
            out.append((idx, "death_age", "is given but vital_status is not deceased"))
        elif death_age is not None and birth is not None and death is not None:
            lo, hi = age_bounds(birth, death)
            if not lo <= death_age <= hi:
                allowed = f"{lo} y" if lo == hi else f"{lo}-{hi} y"
                out.append((idx, "death_age", f"{death_age} y does not agree with the dates of birth and death "
                                              f"(they allow {allowed})"))  # fmt: skip
        if diag_age is not None:
            limit, what = None, ""
            if death_age is not None and deceased:
                limit, what = death_age, "the age at death"
            elif birth is not None and deceased and death is not None:
                limit, what = age_bounds(birth, death)[1], "the age at death"
            elif birth is not None and not deceased:
                limit, what = age_bounds(birth, today)[1], f"the person's age on {today.isoformat()}"
            if limit is not None and diag_age > limit:
                out.append((idx, "diagnosis_age", f"{diag_age} y is above {what} ({limit} y)"))
        for col in ("icd_date", "pacemaker_date"):
            when = _pd(r.get(col))
            if when is None:
                continue
            if birth is not None and when.latest() < birth.earliest():
                out.append((idx, col, "is before the date of birth"))
            elif death is not None and when.earliest() > death.latest():
                out.append((idx, col, "is after the date of death"))
    return out


def record_findings(people: pd.DataFrame, today: dt.date | None = None) -> list[Finding]:
    """:func:`record_problems` of stored people, as findings."""
    today = today or dt.date.today()
    return [Finding("record", f"person {people.at[i, 'person']}", f"{col} {msg}")
            for i, col, msg in record_problems(people, today)]  # fmt: skip


def range_findings(values: pd.DataFrame, measures: pd.DataFrame) -> list[Finding]:
    """Stored values (catalogue units) outside the catalogue's plausible range."""
    cat = measures.set_index("code")
    v = values[values["measure"].notna()]
    lo = v["measure"].map(cat["plausible_min"])
    hi = v["measure"].map(cat["plausible_max"])
    bad = v[(v["value"] < lo) | (v["value"] > hi)]
    return [
        Finding("range", f"study {r.person} {r.study_date} {r.modality} {r.measure}",
                f"{r.value:g} {r.unit} is outside the plausible range {cat.at[r.measure, 'plausible_min']:g}"
                f" to {cat.at[r.measure, 'plausible_max']:g}")
        for r in bad.itertuples()
    ]  # fmt: skip


def placeholder_findings(people: pd.DataFrame, studies: pd.DataFrame, assessments: pd.DataFrame,
                         results: pd.DataFrame) -> list[Finding]:  # fmt: skip
    """Placeholders carry no clinical data."""
    holders = set(people.loc[people["placeholder"], "person"])
    out = []
    for frame, kind in ((studies, "studies"), (assessments, "assessments"), (results, "genetic results")):
        for person in sorted(set(frame["person"]) & holders):
            out.append(Finding("placeholder", f"person {person}", f"is a placeholder but has {kind}"))
    return out


def never_seen_findings(people: pd.DataFrame, studies: pd.DataFrame, results: pd.DataFrame,
                        at_risk: set[str]) -> list[Finding]:  # fmt: skip
    """At-risk living relatives who have no study and no genetic test: nobody has recalled them."""
    seen = set(studies["person"]) | set(results["person"])
    p = people.set_index("person")
    out = []
    for person in sorted(at_risk - seen):
        if person not in p.index or p.at[person, "vital_status"] == "deceased":
            continue
        if p.at[person, "contact_status"] == "declined":
            continue
        out.append(Finding("recall", f"person {person}", "is at risk and has never been tested or screened"))
    return out
