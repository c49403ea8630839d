"""Builders of small invented pedigrees and genetic results shared by the genetics tests."""

from __future__ import annotations

import pandas as pd

from tracker.domain.pedigree import Pedigree

COLUMNS = [
    "person", "family", "sex_at_birth", "birth_date", "birth_date_precision", "vital_status",
    "mother", "father", "placeholder", "proband", "twin_of", "twin_type", "adoption", "contact_status",
]  # fmt: skip

V = "NM_000256.3:c.1504C>T"  # family variant key (invented family)


def ped(rows: list[dict]) -> Pedigree:
    """Pedigree from short rows; unspecified columns take neutral defaults."""
    full = []
    for r in rows:
        d = {c: None for c in COLUMNS}
        d.update(family="FAM-T", sex_at_birth="unknown", vital_status="alive", placeholder=False,
                 proband=False, contact_status="not_contacted")  # fmt: skip
        d.update(r)
        full.append(d)
    return Pedigree(pd.DataFrame(full, columns=COLUMNS))


def results(*rows) -> pd.DataFrame:
    """Predictive-test results: (person, result[, test_date])."""
    out = []
    for person, result, *rest in rows:
        out.append(dict(person=person, test_date=rest[0] if rest else "2022-03-01",
                        test_type="predictive", variant=V, result=result))  # fmt: skip
    return pd.DataFrame(out, columns=["person", "test_date", "test_type", "variant", "result"])
