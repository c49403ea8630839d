"""Small readers shared by the family files (FHIR, Phenopackets, PED): a cell as text, a family's members."""

from __future__ import annotations

import pandas as pd


def cell_text(v: object) -> str | None:
    """A cell as stripped text; None for None, NaN, NaT, pd.NA and blank text."""
    if v is None:
        return None
    try:
        if pd.isna(v):
            return None
    except (TypeError, ValueError):  # a list or other non-scalar: not blank
        pass
    s = str(v).strip()
    return s or None


def family_members(people: pd.DataFrame, family: str) -> pd.DataFrame:
    """The members of ``family``, in code order (a ValueError when it has none)."""
    members = people[people["family"] == family]
    if members.empty:
        raise ValueError(f"family {family} has no members")
    return members.sort_values("person", kind="stable")
