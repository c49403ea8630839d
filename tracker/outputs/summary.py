"""A short account of what the store holds, per family and in total (pure: DataFrames in, dicts out)."""

from __future__ import annotations

import pandas as pd

from tracker.domain.vocabulary import ACMG_SHORT


def current_classes(variants: pd.DataFrame) -> pd.DataFrame:
    """The latest classification of each variant (the class history keeps every row)."""
    if variants.empty:
        return variants
    ordered = variants.sort_values("classified_on")
    return ordered.groupby(["family", "transcript", "hgvs_c"], as_index=False).tail(1)


def family_rows(
    families: pd.DataFrame,
    people: pd.DataFrame,
    variants: pd.DataFrame,
    results: pd.DataFrame,
    studies: pd.DataFrame,
) -> list[dict]:
    current = current_classes(variants)
    fam_of = people.set_index("person")["family"]
    res = results.assign(family=results["person"].map(fam_of))
    st = studies.drop_duplicates(["person", "study_date", "modality"])
    st = st.assign(family=st["person"].map(fam_of))
    rows = []
    for fam in families.itertuples(index=False):
        members = people[(people["family"] == fam.family) & ~people["placeholder"]]
        v = current[current["family"] == fam.family]
        if len(v):
            variant = "; ".join(
                f"{r.gene} {r.transcript}:{r.hgvs_c} ({ACMG_SHORT[r.acmg_class]})" for r in v.itertuples()
            )
        elif ((res["family"] == fam.family) & (res["result"] == "no_variant_found")).any():
            variant = "no causal variant found"
        else:
            variant = "not tested"
        fr = res[res["family"] == fam.family]
        probands = people[(people["family"] == fam.family) & people["proband"]]["person"]
        fs = st[st["family"] == fam.family]
        rows.append(
            {
                "family": fam.family,
                "condition": fam.condition,
                "proband": probands.iloc[0] if len(probands) else None,
                "variant": variant,
                "members": int(len(members)),
                "carriers": int((fr["result"] == "carrier").sum()),
                "non_carriers": int((fr["result"] == "non_carrier").sum()),
                "studies": int(len(fs)),
                "first_study": fs["study_date"].min() if len(fs) else None,
                "last_study": fs["study_date"].max() if len(fs) else None,
            }
        )
    return rows


def totals(people: pd.DataFrame, studies: pd.DataFrame, families: pd.DataFrame) -> dict:
    st = studies.drop_duplicates(["person", "study_date", "modality"])
    return {
        "families": int(len(families)),
        "people": int((~people["placeholder"]).sum()) if len(people) else 0,
        "placeholders": int(people["placeholder"].sum()) if len(people) else 0,
        "studies": int(len(st)),
        "measurements": int(studies["measure"].notna().sum()),
        "first_study": st["study_date"].min() if len(st) else None,
        "last_study": st["study_date"].max() if len(st) else None,
    }
