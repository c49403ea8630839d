"""The fast reader (pandas' C parser) reads every file exactly as the csv module does, or steps aside.

The reference is Python's own ``csv`` module (strict mode), which ``read_table`` uses
whenever the fast path declines; so on any text the two must give the same cells,
or the same refusal.
"""

from __future__ import annotations

import pandas as pd
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from tracker.io import reading
from tracker.io.layouts import LAYOUTS
from tracker.io.reading import InputRejected, read_table

FAMILIES = LAYOUTS["families"]
HEADER = "family,condition,notes\n"


def _both(path):
    """(fast result, csv-module result): a frame of text cells, or the refusal's lines.

    The fast result also reads the header from a short prefix (a few characters),
    as it does for a large file; the reference reads everything with the csv module.
    """
    out = []
    for fast in (True, False):
        saved, prefix = reading._read_fast, reading.HEADER_PREFIX
        if fast:
            reading.HEADER_PREFIX = 4
        else:
            reading._read_fast = lambda text, width: None
            reading.HEADER_PREFIX = 1 << 40
        try:
            frame = read_table(path, FAMILIES)
            out.append(frame.astype(object))
        except InputRejected as exc:
            out.append([str(p) for p in exc.problems])
        finally:
            reading._read_fast, reading.HEADER_PREFIX = saved, prefix
    return out


def _same(a, b) -> bool:
    if isinstance(a, pd.DataFrame) and isinstance(b, pd.DataFrame):
        return a.equals(b) and list(a.index) == list(b.index)
    return a == b


# Text made of the characters that matter to CSV syntax, plus a few letters.
records = st.text(alphabet=st.sampled_from(list('ab ,,,"\n\n\r\t\'é')), max_size=80)


@settings(max_examples=400, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(body=records)
def test_fast_reader_agrees_with_the_csv_module(tmp_path, body):
    path = tmp_path / "families.csv"
    path.write_bytes((HEADER + body).encode("utf-8"))
    fast, slow = _both(path)
    assert _same(fast, slow), (body, fast, slow)


headers = st.text(alphabet=st.sampled_from(list('famil,yconditnes "\n\r')), max_size=40)


@settings(max_examples=300, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(header=headers, body=records)
def test_header_read_from_a_prefix_agrees_with_the_csv_module(tmp_path, header, body):
    """Quoted or broken headers, read from a 4-character prefix first, then from more."""
    path = tmp_path / "families.csv"
    path.write_bytes((header + "\n" + body).encode("utf-8"))
    fast, slow = _both(path)
    assert _same(fast, slow), (header, body, fast, slow)


@pytest.mark.parametrize(
    "body",
    [
        'F1,"hcm, familial","said ""hello"""\nF2,hcm,\n',  # quoted commas and quotes
        'F1,hcm,"two\nlines"\nF2,hcm,x\n',  # a quoted line break: one record
        "F1,hcm,x\r\nF2,hcm,y\r\n",  # Windows line ends
        "F1,hcm,x\nF2,hcm\n",  # a short record
        "F1,hcm,x\n\nF2,hcm,y\n",  # a blank line
        "F1,hcm,x,extra\n",  # a long record
        'F1,"hcm"x,y\n',  # text after a closing quote
        'F1,hcm,x\r\nF2,hcm,y\rF3,hcm,z\n',  # a bare carriage return ends a record
        'F1,hcm,"open\n',  # an unterminated quote
        'F1,h"cm,x\n',  # a quote inside an unquoted field (read literally)
        " F1 , hcm ,  \n",  # spaces stripped
        "F1,hcm," + "x" * 140_000 + "\n",  # a field over the csv module's limit
    ],
)
def test_fast_reader_agrees_on_known_cases(tmp_path, body):
    path = tmp_path / "families.csv"
    path.write_bytes((HEADER + body).encode("utf-8"))
    fast, slow = _both(path)
    assert _same(fast, slow), (fast, slow)


def test_fast_reader_is_used_for_a_plain_file(tmp_path):
    path = tmp_path / "families.csv"
    path.write_text(HEADER + 'F1,hcm,"a, b"\nF2,hcm,\n')
    assert reading._read_fast(path.read_text(), 3) is not None
    frame = read_table(path, FAMILIES)
    assert frame.loc[2, "notes"] == "a, b" and frame.loc[3, "notes"] == ""
    assert list(frame.index) == [2, 3]
