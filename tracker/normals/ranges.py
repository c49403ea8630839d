"""Vectorised classification of values against reference rows (one reference set).

Rules (engineering choices, stated once here):

- A value below ``lower`` is "below normal limits"; above ``upper`` is "above
  normal limits"; on a limit it is within normal limits.
- Severity partitions: a value beyond the published far edge of a band
  belongs to the next, more abnormal band.  The published bands are reported
  at the tables' precision (e.g. IVSd 1.0 cm normal, 1.1-1.3 cm mild): the
  gap between 1.0 and 1.1 cm is reporting precision, so 10.4 mm is mild.
- ``class_on == "magnitude"`` (GLS, negative numbers): the class refers to
  the magnitude of shortening, so a value less negative than the limit is
  "below normal limits" (less shortening than the lower limit of normal).
- z = (value - mean) / SD where the row gives mean and SD.
- A row with a mean only gives no class ("no reference") and states the mean.
- ``flag_at_least`` rows (extensive LGE) give no class but a flag.
"""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np

from tracker.normals.classes import (
    ABOVE,
    BELOW,
    COMPARE_DECIMALS,
    MILD,
    MODERATE,
    NO_REFERENCE,
    OUTSIDE,
    SEVERE,
    WITHIN,
    add_note,
    blank,
)
from tracker.normals.tables import RangeRow


def _sex_mask(row: RangeRow, sex: np.ndarray) -> np.ndarray:
    return np.ones(sex.shape, dtype=bool) if row.sex == "any" else (sex == row.sex)


def _age_mask(row: RangeRow, age: np.ndarray) -> np.ndarray:
    lo = -np.inf if row.age_min is None else row.age_min
    hi = np.inf if row.age_below is None else row.age_below
    return (age >= lo) & (age < hi)


def _age_span(rows: Sequence[RangeRow]) -> str:
    lo = min((r.age_min for r in rows if r.age_min is not None), default=None)
    his = [r.age_below for r in rows]
    hi = None if any(h is None for h in his) else max(his)
    if hi is None:
        return f"{lo:g} y and over" if lo is not None else "all ages"
    return f"{lo or 0:g} to under {hi:g} y"


def _apply_row(row: RangeRow, m: np.ndarray, v: np.ndarray, cols: dict[str, np.ndarray]) -> None:
    vm = v[m]
    cols["reference_set"][m] = row.reference_set
    cols["source"][m] = row.source_text
    add_note(cols, m, row.note)
    if row.mean is not None and row.sd:
        cols["z"][m] = (vm - row.mean) / row.sd
    if row.limit_rule == "mean_only":
        cols["assessment"][m] = NO_REFERENCE
        add_note(cols, m, f"reference mean {row.mean:g} {row.unit}; no limits of normal recorded")
        return
    if row.limit_rule == "flag_at_least":
        cols["assessment"][m] = NO_REFERENCE
        label = f"{row.flag_label} (>= {row.upper:g} {row.unit})"
        cols["flag"][m] = np.where(vm >= row.upper, label, None)
        return
    lower, upper = row.limits
    lower = -np.inf if lower is None else lower
    upper = np.inf if upper is None else upper
    below, above = vm < lower, vm > upper
    low_word, high_word = (ABOVE, BELOW) if row.class_on == "magnitude" else (BELOW, ABOVE)
    cols["assessment"][m] = np.where(below, low_word, np.where(above, high_word, WITHIN))
    cols["lower"][m] = np.nan if np.isinf(lower) else lower
    cols["upper"][m] = np.nan if np.isinf(upper) else upper
    if row.partition_side == "above":
        grade = np.where(vm <= row.mild_edge, MILD, np.where(vm <= row.moderate_edge, MODERATE, SEVERE))
        cols["grade"][m] = np.where(above, grade, None)
    elif row.partition_side == "below":
        grade = np.where(vm >= row.mild_edge, MILD, np.where(vm >= row.moderate_edge, MODERATE, SEVERE))
        cols["grade"][m] = np.where(below, grade, None)


def evaluate(rows: Sequence[RangeRow], value, sex, age_years) -> dict[str, np.ndarray]:
    """Classify arrays of values (catalogue unit) of one measure against one set's rows.

    ``sex``: object array of "female"/"male"/"unknown"; ``age_years``: float
    array (NaN = unknown).  Returns the column bundle of ``classes.blank``.
    """
    v = np.round(np.asarray(value, dtype=float), COMPARE_DECIMALS)
    sex = np.asarray(sex, dtype=object)
    age = np.asarray(age_years, dtype=float)
    cols = blank(v.size)
    done = np.zeros(v.size, dtype=bool)
    sex_covered = np.zeros(v.size, dtype=bool)
    for row in rows:
        s = _sex_mask(row, sex)
        sex_covered |= s
        m = s & _age_mask(row, age) & ~done
        if m.any():
            done |= m
            _apply_row(row, m, v, cols)
    if rows:
        set_id = rows[0].reference_set
        unknown_age = ~done & np.isnan(age)
        add_note(cols, unknown_age, "age unknown")
        no_sex = ~done & ~unknown_age & ~sex_covered
        add_note(cols, no_sex, f"{set_id} limits are sex-specific; sex at birth is not recorded as female or male")
        out_age = ~done & ~unknown_age & sex_covered
        cols["assessment"][out_age] = OUTSIDE
        cols["reference_set"][out_age] = set_id
        cols["source"][out_age] = rows[0].source_text
        add_note(cols, out_age, f"age outside the {set_id} range ({_age_span(rows)})")
    return cols
