"""One entry point for judging measured values against normal limits.

``assess`` judges one value; ``assess_frame`` judges a long DataFrame (one row
per value), grouped by measure and vectorised, and gives the same answers.

Routing (engineering choices):

- Children are < 18 y.  Children get the paediatric z-score set (PHN 2017 by
  default, Detroit 2008 selectable) for IVSd, LVPWd, LVIDd and maximal wall
  thickness (scored with the IVSd model); other measures have no paediatric
  reference here ("no reference").
- Adults (>= 18 y) get the default adult set of the measure: ASE/EACVI 2015
  chamber quantification, ASE/EACVI 2016 diastolic cut-offs, NORRE 2017 GLS,
  UK Biobank 2017 CMR, and so on (see ``adult``, ``diastolic``, ``cmr``).
  Maximal wall thickness on echo is judged against the IVSd range
  (engineering choice).  ECV has no default (ranges are site-, field- and
  sequence-specific).
- A ``reference_set`` named explicitly is applied as asked; if it does not
  cover the person (e.g. an adult set for a child, a paediatric set over 18 y)
  the result is "outside the reference range".

Values are in the catalogue unit of the measure (``tables.CATALOGUE_UNITS``),
sex is sex at birth ("female", "male", "unknown"), age in years, BSA in m2
(Haycock for the paediatric sets).  Limits are returned in the catalogue unit.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass

import numpy as np
import pandas as pd

from tracker.normals import adult, cmr, diastolic, paediatric, ranges
from tracker.normals.classes import CAUTION, add_note, blank
from tracker.normals.tables import CATALOGUE_UNITS, RangeRow

SEXES = ("female", "male", "unknown")
ADULT_FROM_YEARS = 18.0  # engineering boundary: children are < 18 y

# Measures judged with another measure's limits (engineering choice, see docstring).
ADULT_ALIASES = {"mwt_echo": "ivsd"}
ALIAS_NOTE = {"mwt_echo": "maximal wall thickness judged against the IVSd range (engineering choice)"}
NO_DEFAULT_NOTE = {"ecv": cmr.ECV_NOTE}

FRAME_COLUMNS = ("person", "measure", "value", "sex", "age_years", "bsa_m2")
RESULT_COLUMNS = ("z", "lower", "upper", "assessment", "grade", "flag", "reference_set", "source", "note")


def _all_rows() -> tuple[RangeRow, ...]:
    return adult.rows() + diastolic.rows() + cmr.rows()


def _index() -> tuple[dict[tuple[str, str], tuple[RangeRow, ...]], dict[str, str]]:
    by_set: dict[tuple[str, str], list[RangeRow]] = {}
    default: dict[str, str] = {}
    for r in _all_rows():
        by_set.setdefault((r.measure, r.reference_set), []).append(r)
        if r.default:
            if default.setdefault(r.measure, r.reference_set) != r.reference_set:
                raise ValueError(f"two default reference sets for {r.measure}")
    return {k: tuple(v) for k, v in by_set.items()}, default


RANGE_SETS, DEFAULT_ADULT_SET = _index()


def reference_sets_for(measure: str) -> tuple[str, ...]:
    """Every reference set that can judge ``measure`` (adult and paediatric)."""
    key = ADULT_ALIASES.get(measure, measure)
    sets = [s for (m, s) in RANGE_SETS if m == key]
    if measure in paediatric.MODEL_MEASURE:
        sets += list(paediatric.PAEDIATRIC_SETS)
    return tuple(sets)


@dataclass(frozen=True)
class Assessment:
    """A judged value.  ``lower``/``upper`` in ``unit``; ``grade`` mild/moderate/severe or None."""

    measure: str
    value: float
    unit: str
    z: float | None
    lower: float | None
    upper: float | None
    assessment: str
    grade: str | None
    flag: str | None
    reference_set: str | None
    source: str
    note: str
    caution: str = CAUTION


def _check_set(set_id: str, measure: str) -> None:
    if set_id not in reference_sets_for(measure):
        raise ValueError(
            f"reference set {set_id!r} does not cover {measure!r}; choose from {reference_sets_for(measure)}"
        )


def _apply_paediatric(set_id, measure, m, v, age, bsa, cols) -> None:
    r = paediatric.z_scores(measure, v[m], bsa[m], age[m], set_id)
    cols["z"][m] = r["z"]
    cols["lower"][m] = r["lower_mm"]
    cols["upper"][m] = r["upper_mm"]
    cols["assessment"][m] = r["assessment"]
    cols["reference_set"][m] = set_id
    cols["source"][m] = paediatric.source_for(measure, set_id)
    sub = cols["note"][m]
    reason = r["reason"]
    cols["note"][m] = np.where(reason == "", sub, np.where(sub == "", reason, sub + "; " + reason))
    if paediatric.MODEL_MEASURE[measure] != measure:
        add_note(cols, m, paediatric.MWT_NOTE)


def _apply_set(set_id, measure, m, v, sex, age, bsa, cols) -> None:
    if not m.any():
        return
    if set_id in paediatric.PAEDIATRIC_SETS:
        _apply_paediatric(set_id, measure, m, v, age, bsa, cols)
        return
    rows = RANGE_SETS[(ADULT_ALIASES.get(measure, measure), set_id)]
    sub = ranges.evaluate(rows, v[m], sex[m], age[m])
    for c in cols:
        cols[c][m] = sub[c]
    add_note(cols, m, ALIAS_NOTE.get(measure, ""))


def _evaluate(measure, v, sex, age, bsa, reference_set, paediatric_set) -> dict[str, np.ndarray]:
    """Core: arrays of one measure -> result columns (the only implementation)."""
    if measure not in CATALOGUE_UNITS:
        raise ValueError(f"unknown measure code {measure!r}")
    bad_sex = ~np.isin(sex, SEXES)
    if bad_sex.any():
        raise ValueError(f"sex must be one of {SEXES}; got {sex[bad_sex][0]!r}")
    if np.any(age < 0) or np.any(bsa <= 0):
        raise ValueError("age_years must be >= 0 and bsa_m2 > 0 (or missing)")
    paediatric.reference_set(paediatric_set)  # ValueError if unknown
    if reference_set is not None:
        _check_set(reference_set, measure)
    cols = blank(v.size)
    valid = np.isfinite(v)
    add_note(cols, ~valid, "value missing")
    known_age = valid & ~np.isnan(age)
    add_note(cols, valid & np.isnan(age), "age unknown")
    if reference_set is not None:
        _apply_set(reference_set, measure, known_age, v, sex, age, bsa, cols)
        return cols
    child = known_age & (age < ADULT_FROM_YEARS)
    grown = known_age & (age >= ADULT_FROM_YEARS)
    if measure in paediatric.MODEL_MEASURE:
        _apply_set(paediatric_set, measure, child, v, sex, age, bsa, cols)
    else:
        add_note(cols, child, "no paediatric reference encoded for this measure; adult limits do not apply under 18 y")
    adult_set = DEFAULT_ADULT_SET.get(ADULT_ALIASES.get(measure, measure))
    if adult_set is None:
        add_note(cols, grown, NO_DEFAULT_NOTE.get(measure, "no normal range encoded for this measure"))
    else:
        _apply_set(adult_set, measure, grown, v, sex, age, bsa, cols)
    return cols


def _arr(x, dtype) -> np.ndarray:
    return np.atleast_1d(np.asarray(x, dtype=dtype))


def assess(
    measure: str,
    value: float,
    sex: str,
    age_years: float | None,
    bsa_m2: float | None = None,
    reference_set: str | None = None,
    *,
    paediatric_set: str = paediatric.DEFAULT_SET,
) -> Assessment:
    """Judge one value (catalogue unit) of ``measure`` for a person."""
    nan = np.nan
    cols = _evaluate(
        measure,
        _arr(value, float),
        _arr(sex, object),
        _arr(nan if age_years is None else age_years, float),
        _arr(nan if bsa_m2 is None else bsa_m2, float),
        reference_set,
        paediatric_set,
    )

    def num(c: str) -> float | None:
        x = float(cols[c][0])
        return None if np.isnan(x) else x

    return Assessment(
        measure=measure,
        value=float(value),
        unit=CATALOGUE_UNITS[measure],
        z=num("z"),
        lower=num("lower"),
        upper=num("upper"),
        assessment=cols["assessment"][0],
        grade=cols["grade"][0],
        flag=cols["flag"][0],
        reference_set=cols["reference_set"][0],
        source=cols["source"][0],
        note=cols["note"][0],
    )


def assess_frame(
    df: pd.DataFrame,
    *,
    paediatric_set: str = paediatric.DEFAULT_SET,
    reference_sets: Mapping[str, str] | None = None,
) -> pd.DataFrame:
    """Judge every row of a long DataFrame (columns ``FRAME_COLUMNS``).

    ``reference_sets`` maps a measure code to a set applied to all its rows;
    a ``reference_set`` column, if present, overrides it per row (empty =
    routing by age).  Returns a copy with ``RESULT_COLUMNS`` added, in the
    same row order; ``attrs["caution"]`` holds the caution text.
    """
    missing = [c for c in FRAME_COLUMNS if c not in df.columns]
    if missing:
        raise ValueError(f"missing columns: {missing}")
    n = len(df)
    measure = df["measure"].astype(object).to_numpy()
    value = pd.to_numeric(df["value"], errors="raise").to_numpy(dtype=float)
    sex = df["sex"].astype(object).where(df["sex"].notna(), "unknown").to_numpy(dtype=object)
    age = pd.to_numeric(df["age_years"], errors="raise").to_numpy(dtype=float)
    bsa = pd.to_numeric(df["bsa_m2"], errors="raise").to_numpy(dtype=float)
    chosen = pd.Series(measure).map(dict(reference_sets or {}))
    if "reference_set" in df.columns:
        col = df["reference_set"].astype(object).to_numpy()
        has = pd.notna(col) & (col != "")
        chosen = chosen.where(~has, pd.Series(col))
    chosen = chosen.astype(object).where(chosen.notna(), "").to_numpy(dtype=object)

    out = blank(n)
    groups = pd.DataFrame({"m": measure, "s": chosen}).groupby(["m", "s"], sort=False).indices
    for (m_code, set_id), idx in groups.items():
        cols = _evaluate(m_code, value[idx], sex[idx], age[idx], bsa[idx], set_id or None, paediatric_set)
        for c in out:
            out[c][idx] = cols[c]
    result = df.copy()
    for c in RESULT_COLUMNS:
        result[c] = out[c]
    result.attrs["caution"] = CAUTION
    return result
