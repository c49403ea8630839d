"""A recorded cell as a number: one definition for every reader of optional numeric fields."""

from __future__ import annotations

import math


def finite_number(v) -> float | None:
    """``v`` as a finite float; None for None, booleans, text that is not a number, NaN and infinity."""
    if v is None or isinstance(v, bool):
        return None
    try:
        x = float(v)
    except (TypeError, ValueError):
        return None
    return x if math.isfinite(x) else None
