"""One reader of optional numeric cells (tracker.domain.numbers.finite_number), used by the record
checks (whole years of a recorded age) and the Risk-SCD inputs."""

from __future__ import annotations

import math

import pytest

from tracker.domain import consistency
from tracker.domain.numbers import finite_number
from tracker.engines import risk


@pytest.mark.parametrize("v, expected", [
    (None, None), (True, None), (False, None), ("", None), ("abc", None), (float("nan"), None),
    (float("inf"), None), (-math.inf, None), ("12.5", 12.5), (3, 3.0), (0, 0.0), (-2.25, -2.25),
])  # fmt: skip
def test_finite_number(v, expected):
    assert finite_number(v) == expected


def test_recorded_age_of_infinity_is_no_age_not_a_crash():
    # int(float("inf")) raises OverflowError: the record check used to stop there.
    assert consistency._years(float("inf")) is None
    assert consistency._years("41.9") == 41
    assert consistency._years(float("nan")) is None


def test_risk_inputs_read_cells_the_same_way():
    assert risk._number is finite_number
