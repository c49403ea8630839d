"""A short account of what the store holds, per family and in total (pure: DataFrames in, dicts out)."""

from __future__ import annotations

from collections.abc import Mapping

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
    study_stats: Mapping[str, tuple[int, str | None, str | None]],
) -> list[dict]:
    """One row per family. ``study_stats``: family -> (number of studies, first and last study date, ISO).

    Each frame is grouped by family once, so the work grows with the cohort, not with its square."""
    current = current_classes(variants)
    fam_of = people.set_index("person")["family"]
    res = results.assign(family=results["person"].map(fam_of))
    members = people.loc[~people["placeholder"].astype(bool), "family"].value_counts()
    first_proband = people[people["proband"].astype(bool)].drop_duplicates("family").set_index("family")["person"]
    parts: dict[str, list[str]] = {}  # one pass over the rows, in frame order within each family
    for fam, gene, tx, c, cls in zip(current["family"], current["gene"], current["transcript"], current["hgvs_c"],
                                     current["acmg_class"]):  # fmt: skip
        parts.setdefault(fam, []).append(f"{gene} {tx}:{c} ({ACMG_SHORT[cls]})")
    variant_text = {fam: "; ".join(texts) for fam, texts in parts.items()}
    counts = res.groupby(["family", "result"]).size()
    counts = {k: int(n) for k, n in counts.items()}
    rows = []
    for f, condition in zip(families["family"], families["condition"]):
        if f in variant_text:
            variant = variant_text[f]
        elif counts.get((f, "no_variant_found"), 0):
            variant = "no causal variant found"
        else:
            variant = "not tested"
        n_studies, first, last = study_stats.get(f, (0, None, None))
        rows.append(
            {
                "family": f,
                "condition": condition,
                "proband": first_proband.get(f),
                "variant": variant,
                "members": int(members.get(f, 0)),
                "carriers": counts.get((f, "carrier"), 0),
                "non_carriers": counts.get((f, "non_carrier"), 0),
                "studies": int(n_studies),
                "first_study": first,
                "last_study": last,
            }
        )
    return rows


def totals(people: pd.DataFrame, families: pd.DataFrame, study_totals: Mapping[str, object]) -> dict:
    """Counts of the whole store; ``study_totals``: studies, measurements, first_study, last_study."""
    return {
        "families": int(len(families)),
        "people": int((~people["placeholder"]).sum()) if len(people) else 0,
        "placeholders": int(people["placeholder"].sum()) if len(people) else 0,
        "studies": int(study_totals["studies"]),
        "measurements": int(study_totals["measurements"]),
        "first_study": study_totals["first_study"],
        "last_study": study_totals["last_study"],
    }
