"""Wall-thickness diagnostic thresholds for HCM in a screened relative, one rule
set per guideline (data file ``data/hcm_criteria.toml``); never blended.

- ``esc_2023``: 2023 ESC cardiomyopathy guidelines (Arbelo et al.) [V]: adult
  >= 15 mm; >= 13 mm in a first-degree relative of a patient with unequivocal
  disease; child z > 2.  13-14 mm in an adult who is not a first-degree
  relative is "borderline": it needs supporting features (family history,
  genetic finding, ECG) [V].
- ``aha_acc_2020``: 2020 AHA/ACC HCM guideline (Ommen et al.) [V2]: adult
  >= 15 mm; 13-14 mm diagnostic in family members or genotype-positive
  people; child z > 2.5 without, z > 2 with family history or a positive
  genetic test.
- ``aha_acc_2024``: 2024 AHA/ACC/AMSSM/HRS/PACES/SCMR HCM guideline (Ommen et
  al.) [V2]: the same thresholds as 2020, kept as a rule set of its own.

Engineering choices: the child rule applies under 18 y (the age of the
paediatric z-score sets; neither guideline text in the project's notes gives
the age); "family member" / "family history" is taken as being a
first-degree relative of an affected person.  Thickness in mm, z unitless,
age in years.  Values are compared after rounding to 1e-6.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from tracker.normals.classes import CAUTION, COMPARE_DECIMALS
from tracker.normals.tables import tag_text, toml_data

ESC_2023 = "esc_2023"
AHA_ACC_2020 = "aha_acc_2020"
RULE_KEYS = ("adult", "adult_relative", "child", "child_relative")
RELATIVE_FLAGS = ("first_degree_relative", "genotype_positive")

NOT_ASSESSABLE = "criteria not assessable"

CRITERIA_CAUTION = (
    CAUTION + " A wall-thickness threshold is not a diagnosis on its own: the hypertrophy must be "
    "unexplained by loading conditions or a phenocopy, and a z-score depends on its reference set."
)


@dataclass(frozen=True)
class Rule:
    key: str
    threshold: float
    unit: str  # "mm" or "z"
    comparison: str  # ">=" or ">"
    tag: str
    text: str


@dataclass(frozen=True)
class RuleSet:
    guideline_id: str
    name: str
    citation: str
    year: int
    section: str
    child_below_years: float
    relative_flags: tuple[str, ...]
    rules: dict[str, Rule]
    borderline_lower_mm: float | None
    borderline_text: str

    def source(self, key: str) -> str:
        r = self.rules[key]
        return f"{self.name} ({self.citation}); {self.section}: {r.text} [{tag_text(r.tag)}]"


def _load() -> dict[str, RuleSet]:
    sets = {}
    for gid, d in toml_data("hcm_criteria.toml").items():
        rules = {
            k: Rule(k, float(d[k]["threshold"]), d[k]["unit"], d[k]["comparison"], d[k]["tag"], d[k]["text"])
            for k in RULE_KEYS
        }
        b = d.get("borderline")
        sets[gid] = RuleSet(
            guideline_id=gid,
            name=d["name"],
            citation=d["citation"],
            year=int(d["year"]),
            section=d["section"],
            child_below_years=float(d["child_below_years"]),
            relative_flags=tuple(d["relative_flags"]),
            rules=rules,
            borderline_lower_mm=None if b is None else float(b["lower"]),
            borderline_text="" if b is None else f"{b['text']} [{tag_text(b['tag'])}]",
        )
    return sets


RULE_SETS: dict[str, RuleSet] = _load()


def rule_set(guideline_id: str) -> RuleSet:
    """The named rule set (ValueError if unknown)."""
    try:
        return RULE_SETS[guideline_id]
    except KeyError:
        raise ValueError(f"unknown guideline {guideline_id!r}; choose from {sorted(RULE_SETS)}") from None


@dataclass(frozen=True)
class CriterionResult:
    """Whether a wall-thickness threshold is met (None: not assessable)."""

    guideline_id: str
    guideline: str
    met: bool | None
    threshold: float | None
    threshold_unit: str | None  # "mm" or "z"
    comparison: str | None
    rule: str | None  # adult, adult_relative, child, child_relative
    borderline: bool
    source: str
    note: str
    caution: str = CRITERIA_CAUTION


_TRUE = ("yes", "true", "y", "1", "1.0")
_FALSE = ("no", "false", "n", "0", "0.0", "")


def _bool_col(df: pd.DataFrame, name: str) -> np.ndarray:
    """A yes/no column (bool, 0/1 or "yes"/"no"); missing = False."""
    if name not in df:
        return np.zeros(len(df), dtype=bool)
    text = df[name].astype("string").fillna("").str.strip().str.lower()
    bad = ~text.isin(_TRUE + _FALSE)
    if bad.any():
        raise ValueError(f"column {name!r}: expected yes/no, got {df[name][bad].iloc[0]!r}")
    return text.isin(_TRUE).to_numpy(dtype=bool)


def _num_col(df: pd.DataFrame, name: str) -> np.ndarray:
    if name not in df:
        return np.full(len(df), np.nan)
    return np.round(pd.to_numeric(df[name], errors="raise").to_numpy(dtype=float), COMPARE_DECIMALS)


def _text_col(df: pd.DataFrame, name: str) -> np.ndarray:
    if name not in df:
        return np.full(len(df), "", dtype=object)
    return df[name].astype(object).where(df[name].notna(), "").to_numpy(dtype=object)


def _meets(x: np.ndarray, r: Rule) -> np.ndarray:
    return x >= r.threshold if r.comparison == ">=" else x > r.threshold


def wall_thickness_criteria_frame(df: pd.DataFrame, guideline_id: str) -> pd.DataFrame:
    """Apply one guideline's thresholds to every row of a DataFrame.

    Columns: ``age_years`` (required), ``mwt_mm`` and/or ``mwt_z``,
    ``first_degree_relative`` and ``genotype_positive`` (yes/no; missing =
    False).  Optional, for a z rule when ``mwt_z`` is missing (body size unknown or outside the
    reference set's range): ``mwt_z_min``, the smallest z-score the value can have at any body size
    the reference set covers (:func:`tracker.normals.paediatric.smallest_z`), ``mwt_z_min_bsa``
    (the BSA, m2, where it is reached) and ``z_reason`` (why there is no z-score).  A value whose
    smallest possible z meets the rule meets it at every body size the set allows and is reported
    as meeting it, with that method in ``note``; otherwise ``met`` is missing and ``note`` starts
    with "criteria not assessable" and gives the reason.  Returns a copy with ``met`` (nullable boolean), ``threshold``,
    ``threshold_unit``, ``comparison``, ``rule``, ``borderline``,
    ``guideline``, ``source``, ``note`` and ``caution`` added.
    """
    rs = rule_set(guideline_id)
    n = len(df)
    age = pd.to_numeric(df["age_years"], errors="raise").to_numpy(dtype=float)
    mm, z = _num_col(df, "mwt_mm"), _num_col(df, "mwt_z")
    relative = np.zeros(n, dtype=bool)
    for flag in rs.relative_flags:
        relative |= _bool_col(df, flag)
    child = age < rs.child_below_years
    key = np.where(child, np.where(relative, "child_relative", "child"), np.where(relative, "adult_relative", "adult"))
    key = np.where(np.isnan(age), None, key)

    threshold = np.full(n, np.nan)
    unit = np.full(n, None, dtype=object)
    comparison = np.full(n, None, dtype=object)
    source = np.full(n, "", dtype=object)
    z_min, z_min_bsa = _num_col(df, "mwt_z_min"), _num_col(df, "mwt_z_min_bsa")
    z_why = _text_col(df, "z_reason")
    met = np.full(n, None, dtype=object)
    note = np.full(n, "", dtype=object)
    note[np.isnan(age)] = f"{NOT_ASSESSABLE}: age unknown"
    for k, r in rs.rules.items():
        m = key == k
        threshold[m], unit[m], comparison[m], source[m] = r.threshold, r.unit, r.comparison, rs.source(k)
        x = z if r.unit == "z" else mm
        has = m & ~np.isnan(x)
        met[has] = _meets(x[has], r)
        what = "a z-score of maximal wall thickness" if r.unit == "z" else "maximal wall thickness in mm"
        missing = m & np.isnan(x)
        why = np.full(n, f"{NOT_ASSESSABLE}: the {k.replace('_', ' ')} rule needs {what}", dtype=object)
        if r.unit == "z":
            # body size unknown or outside the reference set: met if met at every body size the set covers
            bound = missing & np.isfinite(z_min)
            hit = bound.copy()
            hit[bound] = _meets(z_min[bound], r)
            met[hit] = True
            note[hit] = [
                f"met at every body size the reference set covers: smallest possible z {zz:.2f} "
                f"(at BSA {bb:g} m2) {r.comparison} {r.threshold:g}" + (f"; {w}" if w else "")
                for zz, bb, w in zip(z_min[hit], z_min_bsa[hit], z_why[hit])
            ]
            low = bound & ~hit
            why[low] = [
                f"{base}; {w or 'no z-score'}, and the value is not {r.comparison} {r.threshold:g} at every "
                f"body size the reference set covers (smallest possible z {zz:.2f} at BSA {bb:g} m2)"
                for base, zz, bb, w in zip(why[low], z_min[low], z_min_bsa[low], z_why[low])
            ]
            other = missing & ~bound & (z_why != "")
            why[other] = [f"{base}; {w}" for base, w in zip(why[other], z_why[other])]
            missing &= ~hit
        note[missing] = why[missing]
    borderline = np.zeros(n, dtype=bool)
    if rs.borderline_lower_mm is not None:
        borderline = (key == "adult") & (mm >= rs.borderline_lower_mm) & (met == False)  # noqa: E712
        note[borderline] = rs.borderline_text
    out = df.copy()
    out["met"] = pd.array(list(met), dtype="boolean")
    out["threshold"] = threshold
    out["threshold_unit"] = unit
    out["comparison"] = comparison
    out["rule"] = key
    out["borderline"] = borderline
    out["guideline"] = f"{rs.name} ({rs.citation})"
    out["source"] = source
    out["note"] = note
    out["caution"] = CRITERIA_CAUTION
    return out


def wall_thickness_criterion(
    guideline_id: str,
    *,
    age_years: float | None,
    mwt_mm: float | None = None,
    mwt_z: float | None = None,
    first_degree_relative: bool = False,
    genotype_positive: bool = False,
) -> CriterionResult:
    """Apply one guideline's wall-thickness threshold to one person."""
    df = pd.DataFrame(
        {
            "age_years": [np.nan if age_years is None else age_years],
            "mwt_mm": [np.nan if mwt_mm is None else mwt_mm],
            "mwt_z": [np.nan if mwt_z is None else mwt_z],
            "first_degree_relative": [bool(first_degree_relative)],
            "genotype_positive": [bool(genotype_positive)],
        }
    )
    r = wall_thickness_criteria_frame(df, guideline_id).iloc[0]
    t = float(r["threshold"])
    return CriterionResult(
        guideline_id=guideline_id,
        guideline=r["guideline"],
        met=None if pd.isna(r["met"]) else bool(r["met"]),
        threshold=None if np.isnan(t) else t,
        threshold_unit=r["threshold_unit"],
        comparison=r["comparison"],
        rule=r["rule"],
        borderline=bool(r["borderline"]),
        source=r["source"],
        note=r["note"],
    )
