"""Dates that may be known to the day or only to the year, and ages computed from them.

A date of birth is often known only as a year (a relative described by the
proband, an older family member).  Such a date is stored as the 1 July of
that year with precision ``"year"``; an age computed from it is then
uncertain by up to six months either way, and every function here says so
through :attr:`Age.uncertainty_years`.

All dates are ISO 8601 (``YYYY-MM-DD`` or ``YYYY``).
"""

from __future__ import annotations

import datetime as dt
import re
from dataclasses import dataclass

DAY = "day"
YEAR = "year"
PRECISIONS = (DAY, YEAR)

# ASCII digits only (\d would also take Arabic-Indic or full-width digits, which int() reads).
_YEAR_ONLY = re.compile(r"^([0-9]{4})$")
_FULL = re.compile(r"^([0-9]{4})-([0-9]{2})-([0-9]{2})$")

# Mean length of a Gregorian year in days (365.2425 = 146097 / 400).
DAYS_PER_YEAR = 365.2425


@dataclass(frozen=True)
class PartialDate:
    """A calendar date with the precision it is known to.

    ``value`` is the exact date for ``precision == "day"`` and the 1 July of
    the year (the middle of the year) for ``precision == "year"``.
    """

    value: dt.date
    precision: str = DAY

    def __post_init__(self) -> None:
        if self.precision not in PRECISIONS:
            raise ValueError(f"unknown date precision {self.precision!r}")

    @property
    def year(self) -> int:
        return self.value.year

    def isoformat(self) -> str:
        """``YYYY-MM-DD`` for a full date, ``YYYY`` for a year-only date."""
        return self.value.isoformat() if self.precision == DAY else f"{self.value.year:04d}"

    def earliest(self) -> dt.date:
        """The earliest calendar date this value can stand for."""
        return self.value if self.precision == DAY else dt.date(self.value.year, 1, 1)

    def latest(self) -> dt.date:
        """The latest calendar date this value can stand for."""
        return self.value if self.precision == DAY else dt.date(self.value.year, 12, 31)


def parse_date(text: str) -> dt.date:
    """Parse a full ISO 8601 calendar date (``YYYY-MM-DD``).

    Raises ``ValueError`` with a short reason for anything else, including
    impossible dates such as 2019-02-30.
    """
    m = _FULL.match(text.strip())
    if not m:
        raise ValueError(f"{text!r} is not an ISO 8601 date (YYYY-MM-DD)")
    try:
        return dt.date(int(m[1]), int(m[2]), int(m[3]))
    except ValueError:
        raise ValueError(f"{text!r} is not a real calendar date") from None


def parse_partial_date(text: str) -> PartialDate:
    """Parse ``YYYY-MM-DD`` (precision day) or ``YYYY`` (precision year)."""
    s = text.strip()
    m = _YEAR_ONLY.match(s)
    if m:
        year = int(m[1])
        if year < 1800:
            raise ValueError(f"{text!r} is not a plausible year")
        return PartialDate(dt.date(year, 7, 1), YEAR)
    try:
        return PartialDate(parse_date(s), DAY)
    except ValueError:
        raise ValueError(f"{text!r} is not an ISO 8601 date (YYYY-MM-DD or YYYY)") from None


@dataclass(frozen=True)
class Age:
    """An age in years, with the uncertainty that the date of birth allows."""

    years: float
    uncertainty_years: float = 0.0

    @property
    def exact(self) -> bool:
        return self.uncertainty_years == 0.0


def completed_years(birth: dt.date, on: dt.date) -> int:
    """Whole years of age on ``on`` (a birthday counts on the day itself).

    A person born on 29 February turns a year older on 1 March in a common
    year (the legal convention in most jurisdictions; common practice).
    """
    years = on.year - birth.year
    birthday_this_year = _birthday_in(birth, on.year)
    if on < birthday_this_year:
        years -= 1
    return years


def _birthday_in(birth: dt.date, year: int) -> dt.date:
    try:
        return birth.replace(year=year)
    except ValueError:  # 29 February in a common year
        return dt.date(year, 3, 1)


def birthday_at_age(birth: dt.date, age_years: int) -> dt.date:
    """The date on which a person born on ``birth`` reaches ``age_years``."""
    return _birthday_in(birth, birth.year + age_years)


def age_at(birth: PartialDate, on: dt.date) -> Age:
    """Decimal age in years on ``on`` (days / 365.2425).

    For a year-only birth date the age is computed from 1 July and carries an
    uncertainty of half a year.
    """
    years = (on - birth.value).days / DAYS_PER_YEAR
    return Age(years, 0.0 if birth.precision == DAY else 0.5)


def age_bounds(birth: PartialDate, end: PartialDate | dt.date) -> tuple[int, int]:
    """(least, greatest) whole years of age on ``end`` that a birth date and an end date known to the
    day or the year allow."""
    lo_end, hi_end = (end, end) if isinstance(end, dt.date) else (end.earliest(), end.latest())
    lo = completed_years(birth.latest(), lo_end) if lo_end >= birth.latest() else 0
    hi = completed_years(birth.earliest(), hi_end) if hi_end >= birth.earliest() else 0
    return max(lo, 0), max(hi, 0)


# --------------------------------------------------------------------------- stored form


def partial_to_storage(iso: str | None) -> tuple[dt.date | None, str | None]:
    """ISO text (``YYYY-MM-DD`` or ``YYYY``) -> (date, precision) as stored."""
    if iso is None:
        return None, None
    p = parse_partial_date(iso)
    return p.value, p.precision


def partial_from_storage(value: dt.date | None, precision: str | None) -> str | None:
    """Stored (date, precision) -> ISO text."""
    if value is None:
        return None
    return PartialDate(value, precision or "day").isoformat()
