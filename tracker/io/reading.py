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

import pandas as pd

from tracker.io.layouts import Layout

MAX_FILE_BYTES = 2 * 1024**3  # 2 GiB; larger files are refused before reading


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
    if not path.exists():
        raise InputRejected([Problem(name, None, None, "file not found")])
    if path.is_dir():
        raise InputRejected([Problem(name, None, None, "is a folder, not a CSV file")])
    if path.stat().st_size > MAX_FILE_BYTES:
        raise InputRejected([Problem(name, None, None, "file is larger than 2 GiB")])
    raw = path.read_bytes()
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
    if not text.strip():
        raise InputRejected([Problem(name, None, None, "file is empty (no header row)")])

    # Blank lines at the very end of a file are not records.
    text = re.sub(r"(?:\r?\n[ \t]*)+\Z", "\n", text)
    try:
        header = next(csv.reader(io.StringIO(text, newline=""), strict=True))
    except csv.Error as exc:
        raise InputRejected([Problem(name, 1, None, f"is not well-formed CSV ({exc})")]) from None
    header = [h.strip() for h in header]
    _check_header(name, header, layout)

    frame = _parse_records(name, text, len(header))
    frame.columns = header
    frame = frame.apply(lambda s: s.str.strip())
    frame.index = pd.RangeIndex(2, 2 + len(frame))
    return frame[layout.names]


def _check_header(name: str, header: list[str], layout: Layout) -> None:
    expected = layout.names
    if len(header) == 1 and any(sep in header[0] for sep in (";", "\t", "|")):
        sep = next(s for s in (";", "\t", "|") if s in header[0])
        shown = {"\t": "tabs"}.get(sep, repr(sep))
        raise InputRejected(
            [Problem(name, 1, None, f"columns look separated by {shown}; the layout uses commas")]
        )
    problems = []
    seen = set()
    for h in header:
        if h in seen:
            problems.append(Problem(name, 1, h, "column appears twice in the header"))
        seen.add(h)
    unknown = [h for h in header if h not in expected]
    missing = [c for c in expected if c not in header]
    for h in unknown:
        label = h if h else "(empty)"
        problems.append(
            Problem(name, 1, label, f"unknown column for {layout.kind} (expected: {', '.join(expected)})")
        )
    for c in missing:
        problems.append(Problem(name, 1, c, f"missing column for {layout.kind}"))
    if problems:
        raise InputRejected(problems)


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
