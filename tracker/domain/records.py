"""Rows of a pandas frame as plain records, the way ``DataFrame.to_dict("records")`` gives them.

``to_dict("records")`` costs about a millisecond per call on the small per-family
frames the engines walk (pandas 3); these helpers give the same keys, values and
types from one object array, so they can be used wherever a frame is read row by row.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
from pandas.api.types import is_extension_array_dtype


def _native(v: object) -> object:
    """A cell of an object or extension column as ``DataFrame.to_dict`` gives it: numpy scalars as
    Python scalars (datetime64 as Timestamp), pd.NA as None, anything else unchanged."""
    if isinstance(v, np.generic):
        if isinstance(v, np.datetime64):
            return pd.Timestamp(v)
        if isinstance(v, np.timedelta64):
            return pd.Timedelta(v)
        if isinstance(v, np.bool_):
            return bool(v)
        if isinstance(v, np.integer):
            return int(v)
        if isinstance(v, np.floating):
            return float(v)
        return v
    return None if v is pd.NA else v


def column_values(column: pd.Series) -> list:
    """The values of ``column`` as a list, each as ``DataFrame.to_dict("records")`` gives it."""
    values = column.tolist()
    if column.dtype == object or is_extension_array_dtype(column.dtype):
        return [_native(v) for v in values]
    return values


def frame_records(frame: pd.DataFrame) -> list[dict]:
    """``frame.to_dict("records")`` (same keys, values and types) at a fraction of its cost on the
    small per-family frames: the frame is taken as one object array, whose numeric cells are already
    Python scalars and dates Timestamps; the rest is done by :func:`_native`."""
    columns = list(frame.columns)
    if not columns:
        return [{} for _ in range(len(frame))]
    rows = frame.to_numpy(dtype=object).tolist()
    return [dict(zip(columns, map(_native, row))) for row in rows]
