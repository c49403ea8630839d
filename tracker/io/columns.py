"""Column types of the CSV layouts: vectorised parsing of text cells into clean values.

Each type turns a column of text cells (pandas Series of ``str``; empty string
= not given) into a column of clean values plus, for every cell that cannot be
read, the reason.  Parsing is vectorised so that a file of millions of
measurement rows is checked in seconds.

Clean values: text stays text (``None`` when empty), dates are ISO 8601 text
(``YYYY-MM-DD``, or ``YYYY`` for year-only dates), numbers are floats (NaN
when empty), yes/no cells are booleans.
"""

from __future__ import annotations

from typing import TYPE_CHECKING

import datetime as dt
import functools
import math
import re
from dataclasses import dataclass, field

from tracker.domain.dates import partial_from_storage, partial_to_storage  # noqa: F401  (stored form; kept importable here)

if TYPE_CHECKING:  # for annotations only: loaded where used, so start-up stays light
    import numpy as np
    import pandas as pd

# A text cell starting with one of these is run as a formula by spreadsheets.
FORMULA_START = ("=", "+", "-", "@", "\t", "\r")
# A text cell the exporter protects with one more leading apostrophe: any apostrophes, then a
# formula character.  The importer removes exactly one apostrophe from such a cell, so the
# pair is a round trip for every text.
PROTECTED = r"^'*[=+\-@\t\r]"

MAX_TEXT = 4000  # characters in a free-text cell; longer is refused as a likely paste error

# Digits are ASCII 0-9 in every pattern: Python's \d also matches other scripts' digits (Arabic-Indic,
# full-width ...), which would slip past the date, year and HGVS checks and be stored.
CODE_RE = r"[A-Za-z0-9][A-Za-z0-9._-]{0,39}"
# HGVS syntax pre-check (HGVS nomenclature, varnomen; pattern as in standards.md section 5 [V]).
TRANSCRIPT_RE = r"(?:(?:NM|NR|NC|NG|XM|XR)_[0-9]+\.[0-9]+)|(?:LRG_[0-9]+(?:t[0-9]+)?)|(?:ENST[0-9]{11}\.[0-9]+)"
# A position has at most 9 digits: the longest human chromosome (chromosome 1, GRCh38) is 248,956,422
# bp [M] (Genome Reference Consortium GRCh38 assembly statistics; verify), so a longer number is no position.
_POS = r"[-*]?[0-9]{1,9}(?:[+-][0-9]{1,9})?"
HGVS_C_RE = (
    rf"[cgnm]\.{_POS}(?:_{_POS})?"
    r"(?:[ACGT]>[ACGT]|del(?:[ACGT]+)?|dup(?:[ACGT]+)?|ins[ACGT]+|delins[ACGT]+|inv)"
)
_AA = "Ala|Arg|Asn|Asp|Cys|Gln|Glu|Gly|His|Ile|Leu|Lys|Met|Phe|Pro|Ser|Thr|Trp|Tyr|Val|Sec|Pyl|Ter"
HGVS_P_RE = (
    rf"p\.\(?(?:(?:{_AA})[0-9]+(?:(?:{_AA})|\*|=|fs(?:Ter[0-9]+|\*[0-9]+)?|del|dup|"
    rf"(?:{_AA})fs(?:Ter[0-9]+|\*[0-9]+)?)|\?|=|0)\)?"
)
GENE_RE = r"[A-Z][A-Z0-9-]{0,19}"

_ISO_DAY = r"[0-9]{4}-[0-9]{2}-[0-9]{2}"
_YEAR = r"[0-9]{4}"


@dataclass
class Parsed:
    """Clean values of one column, and the reason for each unreadable cell (None = fine)."""

    values: pd.Series
    errors: pd.Series  # object Series: reason text or None


@dataclass(frozen=True)
class Column:
    """One column of a layout: its name, type, and whether a value is required."""

    name: str
    kind: str  # text, code, date, partial_date, choice, yesno, answer, number, years, regex
    required: bool = False
    # The column may be left out of a file's header (every cell is then empty); for
    # columns added to a layout later, so that older files still import.
    header_optional: bool = False
    # A name or a date of birth: error messages never repeat the cell.
    private: bool = False
    choices: tuple[str, ...] = ()
    pattern: str = ""
    what: str = ""  # words for the pattern in error messages, e.g. "an HGVS c. change"
    max_length: int = MAX_TEXT
    positive: bool = False
    extra: dict = field(default_factory=dict)


def _not_ascii(cells: pd.Series) -> pd.Series:
    """True for a cell holding any character outside ASCII."""
    return cells.str.contains(r"[^\x00-\x7f]", regex=True).fillna(False).astype(bool)


def _no_errors(index) -> pd.Series:
    import pandas as pd

    return pd.Series([None] * len(index), index=index, dtype=object)


def parse(col: Column, cells: pd.Series, today: dt.date) -> Parsed:
    """Parse one column of stripped text cells according to ``col``.

    ``cells`` may be text (missing = empty) or categorical text (as
    :func:`tracker.io.reading.read_table` gives).  Each distinct cell is parsed
    once and its value and reason are taken back to every row holding it: a
    long-layout file repeats codes, dates, sites and units on most of its rows.
    """
    import pandas as pd

    codes, distinct = _distinct(cells)
    values, errors = _parse_distinct(col, pd.Series(distinct, dtype=object), today)
    values = pd.Series(values.to_numpy()[codes], index=cells.index, name=cells.name, dtype=values.dtype)
    errors = pd.Series(errors.to_numpy(dtype=object)[codes], index=cells.index, name=cells.name, dtype=object)
    return Parsed(values, errors)


def _distinct(cells: pd.Series) -> tuple[np.ndarray, np.ndarray]:
    """(position of each cell's text in ``distinct``, the distinct texts); missing counts as ""."""
    import numpy as np
    import pandas as pd

    if isinstance(cells.dtype, pd.CategoricalDtype):
        codes = cells.cat.codes.to_numpy()
        distinct = cells.cat.categories.to_numpy(dtype=object)
        if (codes < 0).any():
            codes = np.where(codes < 0, len(distinct), codes)
            distinct = np.append(distinct, np.array([""], dtype=object))
        return codes, distinct
    text = cells.astype(object).where(cells.notna(), "")
    codes, distinct = pd.factorize(text.to_numpy(dtype=object))
    return codes, np.asarray(distinct, dtype=object)


def _parse_distinct(col: Column, cells: pd.Series, today: dt.date) -> tuple[pd.Series, pd.Series]:
    """Values and reasons (None = fine) for a Series of distinct text cells."""
    import pandas as pd

    empty = cells == ""
    errors = _no_errors(cells.index)
    if col.required:
        errors[empty] = "is empty (a value is required)"
    # Longer than the store's column (or the paste-error limit): refused for every kind of cell, so
    # that no backend is ever asked to hold more than it can (the message is the same everywhere).
    too_long = cells.str.len() > col.max_length
    errors[too_long] = f"is longer than {col.max_length} characters"
    handler = _HANDLERS[col.kind]
    values, bad = handler(col, cells, empty, today)
    # Required-but-empty and too long beat a type error; keep the first reason.
    errors = errors.where(errors.notna(), bad)
    if col.private:
        # Never repeat a name or a date of birth: drop a quoted copy of the cell from the reason.
        errors = pd.Series([_unquoted(e, c) for e, c in zip(errors, cells)], index=errors.index, dtype=object)
    return values, errors


def _unquoted(reason: str | None, cell: str) -> str | None:
    if reason is None or not cell:
        return reason
    for shown in (repr(cell), repr(cell[:40]), repr(cell[:60]), cell):
        reason = reason.replace(shown + " ", "the value ").replace(shown, "the value")
    return reason


@functools.cache
def _format_characters() -> str:
    """A regex class of every Unicode format character (category Cf): bidirectional overrides and
    isolates, zero-width spaces and joiners, the byte-order mark, soft hyphen, tags ..."""
    import sys
    import unicodedata

    chars = [chr(i) for i in range(sys.maxunicode + 1) if unicodedata.category(chr(i)) == "Cf"]
    return "[" + "".join(re.escape(c) for c in chars) + "]"


# Invisible characters that change how text is shown or compared without being seen: refused in
# every text cell (a name that reads the same on screen would be a different name in the store).
# ``INVISIBLE_RE`` is built on first use: the scan of every code point took 0.3-0.9 s of each start.
def __getattr__(name: str):
    if name == "INVISIBLE_RE":
        return _format_characters()
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")


def _invisible_message(cell: str) -> str:
    ch = re.search(_format_characters(), cell).group(0)
    return (f"contains an invisible formatting character (U+{ord(ch):04X}, bidirectional control or "
            "zero-width); retype the text without it")


def _text(col, cells, empty, today):
    bad = _no_errors(cells.index)
    too_long = cells.str.len() > col.max_length
    bad[too_long] = f"is longer than {col.max_length} characters"
    control = cells.str.contains(r"[\x00-\x08\x0b\x0c\x0e-\x1f\x7f]", regex=True)
    bad[control & bad.isna()] = "contains control characters"
    invisible = cells.str.contains(_format_characters(), regex=True)
    if invisible.any():
        bad[invisible & bad.isna()] = [_invisible_message(c) for c in cells[invisible & bad.isna()]]
    # Undo the exporter's protection against spreadsheet formulas ("'=..." -> "=...").
    escaped = cells.str.startswith("'") & cells.str.contains(PROTECTED, regex=True)
    cells = cells.where(~escaped, cells.str[1:])
    values = cells.where(~empty, None)
    return values, bad


def _code(col, cells, empty, today):
    bad = _no_errors(cells.index)
    ok = cells.str.fullmatch(CODE_RE)
    bad[~ok & ~empty] = (
        "is not a valid code (letters, digits, '-', '_', '.'; at most 40 characters)"
    )
    return cells.where(~empty, None), bad


def _regex(col, cells, empty, today):
    bad = _no_errors(cells.index)
    ok = cells.str.fullmatch(col.pattern)
    bad[~ok & ~empty] = [f"{v[:60]!r} is not {col.what}" for v in cells[~ok & ~empty]]
    return cells.where(~empty, None), bad


def _choice(col, cells, empty, today):
    bad = _no_errors(cells.index)
    lowered = cells.str.lower()
    ok = lowered.isin(col.choices)
    wrong = ~ok & ~empty
    allowed = ", ".join(col.choices)
    bad[wrong] = [f"{v[:40]!r} is not one of: {allowed}" for v in cells[wrong]]
    return lowered.where(~empty, None), bad


def _yesno(col, cells, empty, today):
    bad = _no_errors(cells.index)
    lowered = cells.str.lower()
    ok = lowered.isin(("yes", "no")) | empty
    bad[~ok] = [f"{v[:40]!r} is not yes or no" for v in cells[~ok]]
    return lowered == "yes", bad


def _dates(cells: pd.Series, allow_year: bool, today: dt.date):
    """Return (iso text or None, reason or None) for each cell."""
    import pandas as pd

    bad = _no_errors(cells.index)
    day = cells.str.fullmatch(_ISO_DAY)
    year = cells.str.fullmatch(_YEAR) if allow_year else pd.Series(False, index=cells.index)
    empty = cells == ""
    form = "YYYY-MM-DD or YYYY" if allow_year else "YYYY-MM-DD"
    wrong_form = ~day & ~year & ~empty
    bad[wrong_form] = [f"{v[:40]!r} is not an ISO 8601 date ({form})" for v in cells[wrong_form]]
    parsed = pd.to_datetime(cells.where(day, None), format="%Y-%m-%d", errors="coerce")
    impossible = day & parsed.isna()
    bad[impossible] = [f"{v!r} is not a real calendar date" for v in cells[impossible]]
    years = pd.to_numeric(cells.where(year, None), errors="coerce")
    too_old = (day & (parsed.dt.year < 1800)) | (year & (years < 1800))
    bad[too_old & bad.isna()] = "is before 1800"
    ts_today = pd.Timestamp(today)
    future = (day & (parsed > ts_today)) | (year & (years > today.year))
    bad[future & bad.isna()] = [
        f"{v!r} is in the future (after {today.isoformat()})" for v in cells[future & bad.isna()]
    ]
    values = cells.where((day | year) & bad.isna(), None)
    return values, bad


def _date(col, cells, empty, today):
    return _dates(cells, allow_year=False, today=today)


def _answer(col, cells, empty, today):
    """yes / no / empty (not recorded) -> True / False / None."""
    import pandas as pd

    bad = _no_errors(cells.index)
    lowered = cells.str.lower()
    ok = lowered.isin(("yes", "no")) | empty
    bad[~ok] = [f"{v[:40]!r} is not yes, no or empty (not recorded)" for v in cells[~ok]]
    values = pd.Series([True if v == "yes" else False if v == "no" else None for v in lowered],
                       index=cells.index, dtype=object)  # fmt: skip
    return values, bad


def _partial_date(col, cells, empty, today):
    return _dates(cells, allow_year=True, today=today)


def _number(col, cells, empty, today):
    import numpy as np
    import pandas as pd

    bad = _no_errors(cells.index)
    numbers = pd.to_numeric(cells.where(~empty, None), errors="coerce").astype(float)
    numbers[_not_ascii(cells)] = np.nan  # digits of other scripts are not read as numbers
    not_number = numbers.isna() & ~empty
    hint = cells[not_number].str.contains(",", regex=False)
    bad[not_number] = [
        f"{v[:40]!r} is not a number" + (" (use '.' as the decimal mark)" if h else "")
        for v, h in zip(cells[not_number], hint)
    ]
    infinite = ~np.isfinite(numbers) & numbers.notna()
    bad[infinite] = "is not a finite number"
    if col.positive:
        nonpos = (numbers <= 0) & bad.isna()
        bad[nonpos] = "must be greater than zero"
    return numbers.where(bad.isna()), bad


# Whole years of age entered as a field (age at death, at diagnosis): data-entry limit only
# (engineering default, common practice).
MAX_AGE_YEARS = 130


def _years(col, cells, empty, today):
    """Whole years of age, 0 to MAX_AGE_YEARS -> float (NaN when empty)."""
    import numpy as np
    import pandas as pd

    bad = _no_errors(cells.index)
    numbers = pd.to_numeric(cells.where(~empty, None), errors="coerce").astype(float)
    numbers[_not_ascii(cells)] = np.nan  # digits of other scripts are not read as numbers
    not_number = numbers.isna() & ~empty
    bad[not_number] = [f"{v[:40]!r} is not a whole number of years" for v in cells[not_number]]
    finite = numbers.notna() & np.isfinite(numbers)
    bad[numbers.notna() & ~finite] = "is not a finite number"
    fraction = finite & (numbers != np.floor(numbers.where(finite, 0)))
    bad[fraction & bad.isna()] = [f"{v[:40]!r} is not a whole number of years" for v in cells[fraction & bad.isna()]]
    out = finite & ((numbers < 0) | (numbers > MAX_AGE_YEARS)) & bad.isna()
    bad[out] = [f"{v[:40]!r} is outside 0-{MAX_AGE_YEARS} years" for v in cells[out]]
    return numbers.where(bad.isna()), bad


_HANDLERS = {
    "text": _text,
    "code": _code,
    "regex": _regex,
    "choice": _choice,
    "yesno": _yesno,
    "answer": _answer,
    "date": _date,
    "partial_date": _partial_date,
    "number": _number,
    "years": _years,
}


def format_cell(value) -> str:
    """Clean value -> CSV text (the inverse of :func:`parse`)."""
    import numpy as np

    if value is None:
        return ""
    if isinstance(value, (bool, np.bool_)):
        return "yes" if value else "no"
    if isinstance(value, float):
        if math.isnan(value):
            return ""
        return str(int(value)) if value.is_integer() and abs(value) < 1e15 else repr(value)
    if isinstance(value, dt.date):
        return value.isoformat()
    return str(value)


