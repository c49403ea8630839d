"""Property-based tests of the parsers: any input gives clean values or a stated reason, never a crash,
and what the exporter writes the importer reads back unchanged."""

from __future__ import annotations

import datetime as dt

import pandas as pd
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from tracker.domain.dates import PartialDate, age_at, completed_years, parse_partial_date
from tracker.io.columns import format_cell, parse
from tracker.io.layouts import LAYOUTS
from tracker.io.reading import InputRejected, read_table

TODAY = dt.date(2026, 12, 1)
ALL_COLUMNS = [c for layout in LAYOUTS.values() for c in layout.columns]
cells = st.lists(st.text(max_size=60), min_size=1, max_size=20)


@settings(max_examples=300, suppress_health_check=[HealthCheck.too_slow])
@given(col=st.sampled_from(ALL_COLUMNS), values=cells)
def test_every_column_type_accepts_or_explains_any_text(col, values):
    series = pd.Series([v.strip() for v in values], index=range(2, 2 + len(values)), dtype=object)
    parsed = parse(col, series, TODAY)
    assert len(parsed.values) == len(series) and len(parsed.errors) == len(series)
    for value, reason in zip(parsed.values, parsed.errors):
        assert reason is None or (isinstance(reason, str) and reason and "\n" not in reason)
        if reason is not None:
            continue
        if col.required:
            assert value is not None and value == value  # not None and not NaN


@given(st.dates(min_value=dt.date(1800, 1, 1), max_value=TODAY))
def test_dates_round_trip(d):
    col = next(c for c in ALL_COLUMNS if c.kind == "date")
    parsed = parse(col, pd.Series([format_cell(d)], dtype=object), TODAY)
    assert parsed.errors.iloc[0] is None
    assert parsed.values.iloc[0] == d.isoformat()


@given(st.dates(min_value=TODAY + dt.timedelta(days=1), max_value=dt.date(9999, 12, 31)))
def test_future_dates_are_refused(d):
    col = next(c for c in ALL_COLUMNS if c.kind == "date")
    parsed = parse(col, pd.Series([d.isoformat()], dtype=object), TODAY)
    assert "in the future" in parsed.errors.iloc[0]


@given(st.floats(allow_nan=False, allow_infinity=False, width=64))
def test_numbers_round_trip_exactly(x):
    col = next(c for c in ALL_COLUMNS if c.kind == "number" and not c.positive)
    parsed = parse(col, pd.Series([format_cell(x)], dtype=object), TODAY)
    assert parsed.errors.iloc[0] is None
    assert parsed.values.iloc[0] == x


@given(st.text(max_size=200).filter(lambda s: s == s.strip()))
def test_text_round_trips_through_formula_protection(s):
    """The exporter's apostrophe before =, +, -, @ is removed again by the importer."""
    col = next(c for c in ALL_COLUMNS if c.kind == "text" and c.max_length >= 200)
    import re

    from tracker.io.columns import PROTECTED

    written = format_cell(s)
    if re.match(PROTECTED, written):
        written = "'" + written
    parsed = parse(col, pd.Series([written], dtype=object), TODAY)
    if parsed.errors.iloc[0] is None:
        assert (parsed.values.iloc[0] or "") == s


@settings(max_examples=200, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(data=st.binary(max_size=400), kind=st.sampled_from(sorted(LAYOUTS)))
def test_any_file_is_read_or_refused_with_reasons(tmp_path, data, kind):
    path = tmp_path / "input.csv"
    path.write_bytes(data)
    try:
        frame = read_table(path, LAYOUTS[kind])
    except InputRejected as exc:
        assert exc.problems and all(str(p).startswith("input.csv") for p in exc.problems)
        assert all("\n" not in p.message for p in exc.problems)
    else:
        assert list(frame.columns) == LAYOUTS[kind].names


@given(st.dates(min_value=dt.date(1900, 1, 1), max_value=dt.date(2030, 12, 31)))
def test_partial_dates_round_trip(d):
    day = PartialDate(d, "day")
    assert parse_partial_date(day.isoformat()) == day
    year = parse_partial_date(str(d.year))
    assert year.precision == "year" and year.earliest() <= d <= year.latest()


@given(st.dates(min_value=dt.date(1900, 1, 1), max_value=dt.date(2010, 12, 31)),
       st.integers(min_value=0, max_value=90))  # fmt: skip
def test_completed_years_change_on_the_birthday(birth, years):
    from tracker.domain.dates import birthday_at_age

    birthday = birthday_at_age(birth, years)
    assert completed_years(birth, birthday) == years
    assert completed_years(birth, birthday - dt.timedelta(days=1)) == years - 1


def test_29_february_birthday_in_a_common_year():
    """Born 2008-02-29: 18 on 2026-03-01 (common practice convention, documented in dates.py)."""
    birth = dt.date(2008, 2, 29)
    assert completed_years(birth, dt.date(2026, 2, 28)) == 17
    assert completed_years(birth, dt.date(2026, 3, 1)) == 18


def test_year_only_birth_gives_an_uncertain_age():
    age = age_at(parse_partial_date("1970"), dt.date(2020, 7, 1))
    assert age.years == pytest.approx(50.0, abs=0.01) and age.uncertainty_years == 0.5
