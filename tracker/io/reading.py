"""Reading a CSV file into text cells, refusing what is not a well-formed CSV of the layout.

Rows are numbered as a spreadsheet shows them: the header is row 1, the first
record row 2 (a record with a quoted line break still counts as one row).
"""

from __future__ import annotations

import csv
import io
import re
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pandas as pd

from tracker.io.layouts import Layout
from tracker.regular_file import NotReadable, read_regular

MAX_FILE_BYTES = 2 * 1024**3  # 2 GiB; larger files are refused before reading
HEADER_PREFIX = 1 << 16  # characters first tried for reading the header record


@dataclass(frozen=True)
class Problem:
    """One thing wrong with an input file, located by row and column."""

    file: str
    row: int | None
    column: str | None
    message: str

    def __str__(self) -> str:
        where = self.file if self.row is None else f"{self.file}:{self.row}"
        col = f" column '{self.column}':" if self.column else ""
        return f"{where}:{col} {self.message}"


class InputRejected(Exception):
    """The file was refused; ``problems`` lists every reason found."""

    def __init__(self, problems: list[Problem]):
        self.problems = sorted(problems, key=lambda p: (p.file, p.row or 0, p.column or ""))
        super().__init__(str(self.problems[0]) if self.problems else "input rejected")


def read_table(path: Path, layout: Layout) -> pd.DataFrame:
    """Read ``path`` as text cells (stripped) with the layout's columns.

    The returned frame has one column per layout column, in layout order, and
    an integer index equal to the spreadsheet row number.
    """
    name = path.name
    try:  # regular files only: a pipe would block and a device never end
        raw = read_regular(path, MAX_FILE_BYTES)
    except NotReadable as exc:
        reason = "is a folder, not a CSV file" if exc.reason.startswith("is a folder") else exc.reason
        raise InputRejected([Problem(name, None, None, reason)]) from None
    if raw.startswith((b"\xff\xfe", b"\xfe\xff")):
        raise InputRejected([Problem(name, None, None, "file is UTF-16 text; save it as UTF-8")])
    try:
        text = raw.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        line = raw[: exc.start].count(b"\n") + 1
        raise InputRejected(
            [Problem(name, line, None, f"is not UTF-8 text (byte {exc.start}); save the file as UTF-8")]
        ) from None
    if "\x00" in text:
        raise InputRejected([Problem(name, None, None, "contains NUL bytes: not a text CSV file")])
    if not text or text.isspace():  # (not text.strip(): that copies the whole text)
        raise InputRejected([Problem(name, None, None, "file is empty (no header row)")])

    # Blank lines at the very end of a file are not records.
    # (The pattern can only match inside the trailing run of whitespace, so only that run is searched,
    # and the text is copied only when it changes: a file can be hundreds of MB.)
    del raw
    end = len(text)
    while end and text[end - 1] in " \t\r\n":
        end -= 1
    tail = re.sub(r"(?:\r?\n[ \t]*)+\Z", "\n", text[end:])
    if tail != text[end:]:
        text = text[:end] + tail
    try:
        header = _first_record(text)
    except csv.Error as exc:
        raise InputRejected([Problem(name, 1, None, f"is not well-formed CSV ({exc})")]) from None
    header = [h.strip() for h in header]
    _check_header(name, header, layout)

    frame = _read_fast(text, len(header))
    if frame is None:
        # Not certainly well-formed: the csv module finds and names the row at fault (or,
        # for an unusual but valid file, reads it).
        frame = _parse_records(name, text, len(header))
        frame = frame.astype("category")
    frame.columns = header
    frame = frame.apply(_strip)
    frame.index = pd.RangeIndex(2, 2 + len(frame))
    absent = tuple(c for c in layout.names if c not in frame.columns)
    for c in absent:  # a header-optional column left out: every cell empty
        frame[c] = pd.Categorical([""] * len(frame))
    frame = frame[layout.names]
    # The file says nothing about these columns: a stored value is not compared with them.
    frame.attrs["absent_columns"] = absent
    return frame


def _first_record(text: str) -> list[str]:
    """The header record, as ``csv`` (strict) reads it from the whole text.

    Read from a prefix of the text when that surely gives the same record (the
    reader stopped before the prefix's last line): reading a whole large file
    through ``io.StringIO`` would hold four bytes per character.
    """
    size = HEADER_PREFIX
    while size < len(text):
        part = text[:size]
        reader = csv.reader(io.StringIO(part, newline=""), strict=True)
        try:
            record = next(reader)
            if reader.line_num < len(io.StringIO(part, newline="").readlines()):
                return record
        except (csv.Error, StopIteration):
            pass  # perhaps only the cut; the whole text decides
        size *= 4
    return next(csv.reader(io.StringIO(text, newline=""), strict=True))


def _strip(column: pd.Series) -> pd.Series:
    """A categorical text column with its categories stripped (merging those that become equal)."""
    cats = column.cat.categories.to_numpy(dtype=object)
    stripped = np.array([c.strip() for c in cats], dtype=object)
    if (stripped == cats).all():
        return column
    codes, uniques = pd.factorize(stripped)
    old = column.cat.codes.to_numpy()
    new = np.where(old < 0, -1, codes[old])
    return pd.Series(pd.Categorical.from_codes(new, pd.Index(uniques, dtype=object)), index=column.index,
                     name=column.name)  # fmt: skip


# A quoted field that starts and ends at field boundaries, with "" for a quote inside it.
_QUOTED_FIELD = re.compile(r'(?:(?<=,)|(?<=\n)|\A)"(?:[^"]|"")*"(?=,|\r?\n|\Z)')


def _read_fast(text: str, width: int) -> pd.DataFrame | None:
    """All records after the header as categorical text, read by pandas' C parser.

    Returns None unless the file is certainly read exactly as the ``csv`` module
    (strict) reads it with every record of ``width`` fields: then the caller falls
    back to :func:`_parse_records`.  The conditions: no bare carriage return; every
    quote belongs to a well-formed quoted field; the C parser saw no record with
    too many fields; and the field separators outside quoted fields number exactly
    ``width - 1`` per record (so no record is short and no line is blank).
    """
    if text.count("\r") != text.count("\r\n"):
        return None
    outside = text
    if '"' in text:
        outside = _QUOTED_FIELD.sub("", text)
        if '"' in outside:
            return None
    records = outside.count("\n") + (0 if outside.endswith("\n") else 1)
    if outside.count(",") != records * (width - 1):
        return None
    try:
        frame = pd.read_csv(  # bytes, not io.StringIO: that would hold four bytes per character
            io.BytesIO(text.encode("utf-8")), encoding="utf-8", header=None, names=range(width), index_col=False,
            dtype="category", keep_default_na=False, na_filter=False, skip_blank_lines=False, engine="c",
        )  # fmt: skip
    except (pd.errors.ParserError, ValueError):
        return None
    if len(frame) != records:
        return None
    for c in frame.columns:
        cats = frame[c].cat.categories
        if len(cats) and cats.str.len().max() > csv.field_size_limit():
            return None  # the csv module refuses such a field; let it say so
    frame = frame.iloc[1:]
    return frame.reset_index(drop=True)


def _check_header(name: str, header: list[str], layout: Layout) -> None:
    expected = layout.names
    if len(header) == 1 and any(sep in header[0] for sep in (";", "\t", "|")):
        sep = next(s for s in (";", "\t", "|") if s in header[0])
        shown = {"\t": "tabs"}.get(sep, repr(sep))
        raise InputRejected(
            [Problem(name, 1, None, f"columns look separated by {shown}; the layout uses commas")]
        )
    known = [h for h in header if h in expected]
    if len(known) * 2 < len(header):
        # Most of row 1 is not column names: a file without its header row (row 1 is then a record,
        # whose names and dates are never repeated in a message).
        raise InputRejected([Problem(
            name, 1, None, f"is not a header row for {layout.kind}: {len(header) - len(known)} of its "
            f"{len(header)} cells are not column names (the first row must name the columns: "
            f"{', '.join(expected)})")])  # fmt: skip
    problems = []
    seen = set()
    for i, h in enumerate(header, start=1):
        if h in seen:
            problems.append(Problem(name, 1, _header_label(h, i), "column appears twice in the header"))
        seen.add(h)
    optional = {c.name for c in layout.columns if c.header_optional}
    missing = [c for c in expected if c not in header and c not in optional]
    for i, h in enumerate(header, start=1):
        if h in expected:
            continue
        problems.append(Problem(
            name, 1, _header_label(h, i), f"unknown column for {layout.kind} (expected: {', '.join(expected)})"))  # fmt: skip
    for c in missing:
        problems.append(Problem(name, 1, c, f"missing column for {layout.kind}"))
    if problems:
        raise InputRejected(problems)


# A header cell shown as itself: it looks like a column name (lowercase letters, digits, '_', '-', '/').
# Anything else (a name, a date: perhaps a record in place of the header) is shown by its position only.
_COLUMN_NAME = re.compile(r"[a-z][a-z0-9_/-]{0,39}")


def _header_label(cell: str, position: int) -> str:
    if not cell:
        return "(empty)"
    return cell if _COLUMN_NAME.fullmatch(cell) else f"header cell {position}"


def _parse_records(name: str, text: str, width: int) -> pd.DataFrame:
    """All records after the header as text, checking each has ``width`` fields."""
    reader = csv.reader(io.StringIO(text, newline=""), strict=True)
    try:
        next(reader)
        rows = []
        problems = []
        for rownum, rec in enumerate(reader, start=2):
            if not rec or (len(rec) == 1 and rec[0].strip() == ""):
                rec = [""] * width  # a blank line: kept so row numbers stay right, refused later
                problems.append(Problem(name, rownum, None, "is an empty row"))
            elif len(rec) != width:
                problems.append(
                    Problem(name, rownum, None, f"has {len(rec)} fields; the header has {width}")
                )
            rows.append(rec[:width] + [""] * (width - len(rec)))
    except csv.Error as exc:
        raise InputRejected(
            [Problem(name, reader.line_num, None, f"is not well-formed CSV ({exc})")]
        ) from None
    if problems:
        raise InputRejected(problems)
    return pd.DataFrame(rows, dtype=str) if rows else pd.DataFrame(columns=range(width), dtype=str)
