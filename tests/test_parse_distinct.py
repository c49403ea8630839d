"""columns.parse reads each distinct cell once: the result must equal parsing every cell on its own."""

from __future__ import annotations

import datetime as dt

import pandas as pd
from hypothesis import given, settings
from hypothesis import strategies as st

from tracker.io.columns import parse
from tracker.io.layouts import LAYOUTS

TODAY = dt.date(2026, 12, 1)
ALL_COLUMNS = [c for layout in LAYOUTS.values() for c in layout.columns]
# Few distinct texts, many repeats: valid and invalid codes, dates, numbers, choices.
POOL = ["", "T1-01", "2020-02-30", "2020-02-29", "1999", "12.5", "1,5", "echo", "ECHO", "yes", "x y", "'=1",
        "NM_000256.3", "c.1504C>T", "mm", "9999-01-01", "inf"]  # fmt: skip


def _same(a, b) -> bool:
    return (a is None and b is None) or (a != a and b != b) or a == b  # None, NaN, or equal


@settings(max_examples=200)
@given(col=st.sampled_from(ALL_COLUMNS), values=st.lists(st.sampled_from(POOL), min_size=1, max_size=30),
       categorical=st.booleans())  # fmt: skip
def test_parsing_distinct_cells_equals_parsing_each_cell(col, values, categorical):
    cells = pd.Series(values, index=range(2, 2 + len(values)), dtype=object)
    whole = parse(col, cells.astype("category") if categorical else cells, TODAY)
    assert list(whole.values.index) == list(cells.index) == list(whole.errors.index)
    for i, v in zip(cells.index, values):
        one = parse(col, pd.Series([v], index=[i], dtype=object), TODAY)
        assert _same(whole.values[i], one.values[i]), (col.name, v)
        assert whole.errors[i] == one.errors[i], (col.name, v)


# Cells as the parsers give them: text, None, NaN, "", numbers (a float equal to an int counts as equal).
CELLS = ["T1-01", "T1-02", None, float("nan"), "", 165.0, 165, 52.5, "echo"]


@settings(max_examples=300)
@given(rows=st.lists(st.tuples(*[st.sampled_from(CELLS)] * 3), min_size=1, max_size=40))
def test_row_keys_group_rows_as_pandas_does(rows):
    from tracker.io.validation import row_keys

    frame = pd.DataFrame(rows, columns=["a", "b", "c"], dtype=object)
    cols = ["a", "b", "c"]
    # Empty and "" the same (as the duplicate check reads keys): pandas on the cells filled with "".
    filled = frame.astype(object).where(frame.notna(), "")
    keys = row_keys(frame, cols)
    assert list(pd.Series(keys).duplicated()) == list(filled.duplicated())
    assert list(pd.factorize(keys)[0]) == list(filled.groupby(cols, sort=False).ngroup())
    # Empty and "" apart (as the study grouping reads keys): pandas' own grouping, empty cells as one group.
    apart = row_keys(frame, cols, blank_is_empty=False)
    assert list(pd.factorize(apart)[0]) == list(frame.groupby(cols, dropna=False, sort=False).ngroup())
