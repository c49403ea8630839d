"""A pseudonymised research extract of the store: keyed-hash codes, no dates, no free text.

Pure: takes the frames of the export (one per layout kind, as the repository
loaders return them), the secret key and the options, and returns new frames
plus what was done.  Nothing here opens the database or prints; the only file
access is :func:`write_extract`, which writes a finished extract to a folder.

Method
------
* **Codes.** Every person and family code (also in ``mother``, ``father`` and
  ``twin_of``) becomes ``P-`` + 12 hex digits / ``F-`` + 10 hex digits of
  HMAC-SHA256 (RFC 2104; FIPS 198-1) under the secret key, of the message
  ``"person:" + code`` / ``"family:" + code`` (UTF-8).  The same key gives the
  same codes on every run, so extracts can be linked; another key gives
  unrelated codes.  Study sites become ``S-`` + 8 hex of ``"site:" + site``.
  Birthday bound (common approximation p ~ n^2 / 2^(bits+1)): 100,000 people
  in 48 bits give p ~ 1.8e-5; 20,000 families in 40 bits give p ~ 1.8e-4
  (100,000 families: ~ 4.5e-3).  Every extract is checked: a collision is an
  error and nothing is written.
* **Dates** (``dates="ages"``, the default): a person's date becomes their age
  in years at that date (days / 365.2425, three decimals: one day is 0.0027
  years, so distinct days stay distinct and intervals within a person are
  exact to the day).  The birth date itself is dropped; its precision is kept
  (an age from a year-only birth date is counted from 1 July and is uncertain
  by half a year either way, see :mod:`tracker.domain.dates`).  A variant's
  classification dates become years since its first classification.
* **Dates** (``dates="shift"``): every date of a family moves by the same
  number of days, derived from the key and the family code (HMAC-SHA256 of
  ``"shift:" + family code``), between -180 and +180, never 0.  Intervals
  within a family are kept exactly.  A year-only date is written as its year,
  unchanged: a shift of at most 180 days from 1 July never leaves the year,
  and writing the shifted day would give away the family's shift.
* **Free text.** Only the columns in :data:`KEPT` are written; every other
  column (names, notes, symptoms, reasons, gender identity, condition, lab,
  report references, and any column added to the layouts later) is dropped.
* **Small cells.** People are counted by sex at birth x 10-year age band (at
  the extract date, or at death) x the gene(s) of their family's variant; the
  number of cells under a threshold (default 5: common practice for
  small-cell suppression in health statistics, no single source) is reported,
  never the cells' values.  Nothing is suppressed: the warning asks for a
  review before the extract leaves the clinic.

Pseudonymised data are not anonymous: whoever holds the key (or the store)
can link them back.
"""

from __future__ import annotations

from typing import TYPE_CHECKING

import csv
import datetime as dt
import hashlib
import hmac
import io
import re
from dataclasses import dataclass, field
from pathlib import Path

from tracker.domain.dates import DAYS_PER_YEAR, YEAR, PartialDate, parse_partial_date
from tracker.errors import UserError
from tracker.io.columns import PROTECTED, format_cell
from tracker.io.layouts import LAYOUTS
from tracker.io.export import write_private
from tracker.settings import DEFAULT_SMALL_CELL, MIN_KEY_CHARS

if TYPE_CHECKING:  # for annotations only: loaded where used, so start-up stays light
    import numpy as np
    import pandas as pd

PERSON_PREFIX, PERSON_HEX = "P-", 12  # 48 bits
FAMILY_PREFIX, FAMILY_HEX = "F-", 10  # 40 bits
SITE_PREFIX, SITE_HEX = "S-", 8  # 32 bits; sites are few
MAX_SHIFT_DAYS = 180  # choice of this project: the shift is uniform in [-180, -1] U [1, 180]
AGE_DECIMALS = 3  # one day = 0.0027 years: three decimals keep distinct days distinct
AGE_BAND_YEARS = 10  # width of the age bands of the small-cell count
# Small-cell threshold (5: common practice, no single source) and the shortest key (RFC 2104
# section 3) are defined with the settings.
DEFAULT_MIN_CELL = DEFAULT_SMALL_CELL
DATE_MODES = ("ages", "shift")
MANIFEST = "README.txt"

# How each kept column is written.  Every column not listed here is dropped.
PERSON = "person code"  # -> P- keyed-hash code
FAMILY = "family code"  # -> F- keyed-hash code
SITE = "site"  # -> S- keyed-hash code
DATE = "date"  # -> age in years (ages) or shifted date (shift)
KEEP = "kept"  # controlled vocabulary, catalogue code, variant nomenclature, number or yes/no

KEPT: dict[str, dict[str, str]] = {
    "families": {"family": FAMILY},
    "people": {
        "person": PERSON, "family": FAMILY, "sex_at_birth": KEEP, "birth_date": DATE,
        "vital_status": KEEP, "death_date": DATE, "mother": PERSON, "father": PERSON,
        "placeholder": KEEP, "proband": KEEP, "twin_of": PERSON, "twin_type": KEEP,
        "adoption": KEEP, "contact_status": KEEP, "contact_status_date": DATE,
        # Revision 0006: a controlled vocabulary and whole years.  The device dates (which may be
        # year-only) and the free-text place of diagnosis are not kept.
        "death_cause": KEEP, "death_age": KEEP, "diagnosis_age": KEEP,
    },
    "variants": {
        "family": FAMILY, "gene": KEEP, "transcript": KEEP, "hgvs_c": KEEP, "hgvs_p": KEEP,
        "zygosity": KEEP, "acmg_class": KEEP, "classified_on": DATE,
    },
    "genetic-results": {
        "person": PERSON, "test_date": DATE, "test_type": KEEP, "variant": KEEP, "result": KEEP,
    },
    "assessments": {
        "person": PERSON, "assessment_date": DATE, "affected_status": KEEP,
        "competitive_athlete": KEEP, "pregnant": KEEP, "hypertension": KEEP,
        # HCM Risk-SCD answers: yes / no / empty, a controlled vocabulary
        "family_history_scd": KEEP, "nsvt": KEEP, "unexplained_syncope": KEEP,
        "prior_arrest_or_sustained_vt": KEEP, "metabolic_or_syndromic": KEEP, "atrial_fibrillation": KEEP,
    },
    "studies": {
        "person": PERSON, "study_date": DATE, "modality": KEEP, "site": SITE, "height_cm": KEEP,
        "weight_kg": KEEP, "measure": KEEP, "value": KEEP, "unit": KEEP,
    },
    # The contact log (revision 0012): the controlled words, the dates and the family member (hashed)
    # stay; notes, the letter's template name, the other centre, its document reference, a visit's
    # purpose and the discharge advice are free text and are dropped (as every other free text).
    "contact-events": {
        "person": PERSON, "event_date": DATE, "channel": KEEP, "by_role": KEEP, "via": PERSON, "outcome": KEEP,
        "later_date": DATE,
    },
    "contact-wishes": {"person": PERSON, "wish": KEEP, "via": PERSON, "recorded_date": DATE, "ended_date": DATE},
    "letters-sent": {
        "person": PERSON, "kind": KEEP, "sent_date": DATE, "sent_to": KEEP, "via": PERSON, "reply_date": DATE,
    },
    "external-results": {"person": PERSON, "kind": KEEP, "result_date": DATE, "variant": KEEP, "result": KEEP},
    "bookings": {"person": PERSON, "visit_date": DATE, "cancelled_date": DATE},
    "discharges": {
        "person": PERSON, "discharge_date": DATE, "variant": KEEP, "acmg_class": KEEP, "classified_on": DATE,
    },
}  # fmt: skip
# The contact log's kinds: an older caller may leave them out (they are then not written).
CONTACT_KINDS = ("contact-events", "contact-wishes", "letters-sent", "external-results", "bookings", "discharges")

# The column names a date becomes in ages mode.
AGE_NAMES = {
    ("people", "contact_status_date"): "age_at_contact_status",
    ("people", "death_date"): "age_at_death",
    ("variants", "classified_on"): "years_since_first_classification",
    ("genetic-results", "test_date"): "age_at_test",
    ("assessments", "assessment_date"): "age_at_assessment",
    ("studies", "study_date"): "age_at_study",
    ("contact-events", "event_date"): "age_at_contact",
    ("contact-events", "later_date"): "age_at_contact_asked_for",
    ("contact-wishes", "recorded_date"): "age_at_wish",
    ("contact-wishes", "ended_date"): "age_at_wish_ended",
    ("letters-sent", "sent_date"): "age_at_letter",
    ("letters-sent", "reply_date"): "age_at_reply",
    ("external-results", "result_date"): "age_at_external_result",
    ("bookings", "visit_date"): "age_at_booked_visit",
    ("bookings", "cancelled_date"): "age_at_booking_cancelled",
    ("discharges", "discharge_date"): "age_at_discharge",
    ("discharges", "classified_on"): "age_at_class_relied_on",
}


@dataclass(frozen=True)
class SmallCells:
    """How many cells of sex x age band x gene hold fewer people than the threshold."""

    threshold: int
    cells: int  # non-empty cells
    below: int  # cells with 0 < count < threshold
    people_in_below: int

    @property
    def categories(self) -> str:
        return f"sex at birth x {AGE_BAND_YEARS}-year age band x family variant gene"

    def as_dict(self) -> dict:
        return {
            "categories": self.categories,
            "threshold": self.threshold,
            "cells": self.cells,
            "cells_below_threshold": self.below,
            "people_in_cells_below_threshold": self.people_in_below,
        }


@dataclass
class Extract:
    frames: dict[str, pd.DataFrame]
    dates: str
    kept: dict[str, list[str]]  # output columns per kind
    dropped: dict[str, list[str]]  # input columns not written, per kind
    small_cells: SmallCells
    made_on: dt.date
    people: int = 0
    families: int = 0
    rows: dict[str, int] = field(default_factory=dict)


# --------------------------------------------------------------------------- keyed codes


def key_bytes(key: str | bytes) -> bytes:
    """The key as bytes; refused when missing or shorter than :data:`MIN_KEY_CHARS`."""
    raw = key.encode("utf-8") if isinstance(key, str) else bytes(key)
    if len(raw) < MIN_KEY_CHARS:
        raise UserError(f"the pseudonym key is too short: it needs at least {MIN_KEY_CHARS} characters")
    return raw


def keyed_hex(key: bytes, domain: str, value: str) -> str:
    """Hex HMAC-SHA256 (RFC 2104, FIPS 198-1) of ``domain + ":" + value`` under ``key``."""
    return hmac.new(key, f"{domain}:{value}".encode("utf-8"), hashlib.sha256).hexdigest()


def person_code(key: bytes, code: str) -> str:
    return PERSON_PREFIX + keyed_hex(key, "person", code)[:PERSON_HEX]


def family_code(key: bytes, code: str) -> str:
    return FAMILY_PREFIX + keyed_hex(key, "family", code)[:FAMILY_HEX]


def site_code(key: bytes, site: str) -> str:
    return SITE_PREFIX + keyed_hex(key, "site", site)[:SITE_HEX]


def family_shift_days(key: bytes, family: str) -> int:
    """Days every date of ``family`` moves in shift mode: in [-180, -1] or [1, 180]."""
    digest = hmac.new(key, f"shift:{family}".encode("utf-8"), hashlib.sha256).digest()
    n = int.from_bytes(digest[:8], "big") % (2 * MAX_SHIFT_DAYS)  # bias ~ 360 / 2**64: none
    return n - MAX_SHIFT_DAYS if n < MAX_SHIFT_DAYS else n - MAX_SHIFT_DAYS + 1


def code_map(codes, make, what: str) -> dict[str, str]:
    """Original -> pseudonym for every distinct code; two codes sharing one is an error."""
    distinct = sorted({c for c in codes if isinstance(c, str)})
    mapping = {c: make(c) for c in distinct}
    if len(set(mapping.values())) < len(mapping):
        clashes = len(mapping) - len(set(mapping.values()))
        raise UserError(
            f"{clashes} {what} pseudonym collision(s) in this extract; nothing was written: "
            "use another pseudonym key"
        )
    return mapping


def _mapped(series: pd.Series, mapping: dict[str, str]) -> pd.Series:
    mapped = series.map(mapping).astype(object)
    return mapped.where(mapped.notna(), None)


# --------------------------------------------------------------------------- dates


def _partial(text) -> PartialDate | None:
    return parse_partial_date(text) if isinstance(text, str) and text else None


def _days(series: pd.Series) -> pd.Series:
    """ISO day text -> datetime64 (NaT when empty)."""
    import pandas as pd

    return pd.to_datetime(series.where(series.notna(), None), format="%Y-%m-%d", errors="coerce")


def _years(delta: pd.Series) -> pd.Series:
    return (delta.dt.days / DAYS_PER_YEAR).round(AGE_DECIMALS).astype(float)


def _shift_days(series: pd.Series, shift: pd.Series) -> pd.Series:
    import pandas as pd

    moved = _days(series) + pd.to_timedelta(shift.astype(float), unit="D")
    return moved.map(lambda d: d.strftime("%Y-%m-%d") if pd.notna(d) else None).astype(object)


def _shift_partial(text, days: int) -> str | None:
    p = _partial(text)
    if p is None:
        return None
    if p.precision == YEAR:  # +-180 days from 1 July stays in the year; the day would give the shift away
        return f"{p.year:04d}"
    return (p.value + dt.timedelta(days=days)).isoformat()


# --------------------------------------------------------------------------- the extract


def pseudonymise(
    frames: dict[str, pd.DataFrame],
    key: str | bytes,
    *,
    dates: str = "ages",
    min_cell: int = DEFAULT_MIN_CELL,
    today: dt.date,
) -> Extract:
    """The research extract of ``frames`` (kind -> loader frame; every kind of :data:`KEPT`).

    ``today`` is the extract date (for the age bands of the small-cell count).
    Raises :class:`UserError` for a bad key or option, or a pseudonym collision.
    """
    import pandas as pd

    if dates not in DATE_MODES:
        raise UserError(f"--dates must be one of {', '.join(DATE_MODES)}")
    if min_cell < 1:
        raise UserError("the small-cell threshold must be a whole number of at least 1")
    k = key_bytes(key)
    missing = [kind for kind in KEPT if kind not in frames and kind not in CONTACT_KINDS]
    if missing:
        raise ValueError(f"frames missing for {', '.join(missing)}")
    people = frames["people"]
    contact = [kd for kd in CONTACT_KINDS if kd in frames]

    person_codes = pd.concat([people[c] for c in ("person", "mother", "father", "twin_of")]
                             + [frames[kd]["person"] for kd in ("genetic-results", "assessments", "studies")]
                             + [frames[kd][c] for kd in contact for c in ("person", "via")
                                if c in frames[kd].columns])  # fmt: skip
    persons = code_map(person_codes, lambda c: person_code(k, c), "person")
    family_codes = pd.concat([frames[kd]["family"] for kd in ("families", "people", "variants")])
    fams = code_map(family_codes, lambda c: family_code(k, c), "family")
    sites = code_map(frames["studies"]["site"], lambda s: site_code(k, s), "site")

    family_of = dict(zip(people["person"], people["family"]))
    birth = {p: _partial(b) for p, b in zip(people["person"], people["birth_date"])}
    shifts = {f: family_shift_days(k, f) for f in fams}

    out: dict[str, pd.DataFrame] = {}
    kept: dict[str, list[str]] = {}
    dropped: dict[str, list[str]] = {}
    for kind, rules in KEPT.items():
        if kind not in frames:
            continue
        src = frames[kind]
        order = [c for c in LAYOUTS[kind].names if c in rules]
        dropped[kind] = [c for c in src.columns if c not in rules]
        res = {}
        for col in order:
            rule = rules[col]
            s = src[col]
            if rule == PERSON:
                res[col] = _mapped(s, persons)
            elif rule == FAMILY:
                res[col] = _mapped(s, fams)
            elif rule == SITE:
                res[col] = _mapped(s, sites)
            elif rule == KEEP:
                res[col] = s
            elif dates == "shift":
                res[col] = _shift_column(kind, col, src, family_of, shifts)
            else:
                res.update(_age_columns(kind, col, src, birth))
        frame = pd.DataFrame(res, index=src.index)
        # Rows in pseudonym order (the loaders' order follows the original codes); a stable sort
        # keeps each person's or family's rows in date order.
        first = "person" if "person" in frame.columns else "family"
        frame = frame.sort_values(first, kind="stable").reset_index(drop=True)
        out[kind] = frame
        kept[kind] = list(frame.columns)

    small = small_cells(people, frames["variants"], today, min_cell)
    return Extract(
        frames=out, dates=dates, kept=kept, dropped=dropped, small_cells=small, made_on=today,
        people=len(people), families=len(fams), rows={kind: len(f) for kind, f in out.items()},
    )


def _shift_column(kind, col, src, family_of, shifts) -> pd.Series:
    import pandas as pd

    fam = src["family"] if "family" in src.columns else src["person"].map(family_of)
    shift = fam.map(shifts)
    if kind == "people" and col in ("birth_date", "death_date"):
        return pd.Series([_shift_partial(v, d) if pd.notna(d) else None for v, d in zip(src[col], shift)],
                         index=src.index, dtype=object)
    return _shift_days(src[col], shift)


def _age_columns(kind, col, src, birth) -> dict[str, pd.Series]:
    import pandas as pd

    if kind == "variants":  # a family-level date: years since the variant's first classification
        day = _days(src[col])
        first = day.groupby([src["family"], src["transcript"], src["hgvs_c"]]).transform("min")
        return {AGE_NAMES[(kind, col)]: _years(day - first)}
    if kind == "people" and col == "birth_date":
        prec = src[col].map(lambda b: _partial(b).precision if _partial(b) else None).astype(object)
        return {"birth_date_precision": prec}
    born_on = {p: pd.Timestamp(b.value) for p, b in birth.items() if b is not None}
    born = pd.to_datetime(src["person"].map(born_on), errors="coerce")
    if kind == "people" and col == "death_date":
        parts = src[col].map(_partial)
        when = pd.to_datetime(parts.map(lambda d: d.value if d else None), errors="coerce")
        prec = parts.map(lambda d: d.precision if d else None).astype(object)
        return {AGE_NAMES[(kind, col)]: _years(when - born), "death_date_precision": prec}
    return {AGE_NAMES[(kind, col)]: _years(_days(src[col]) - born)}


# --------------------------------------------------------------------------- small cells


def age_band(age_years: float | None) -> str:
    """``"30-39"`` for 34.2; ``"unknown"`` without an age."""
    import numpy as np

    if age_years is None or not np.isfinite(age_years):
        return "unknown"
    lo = int(age_years // AGE_BAND_YEARS) * AGE_BAND_YEARS
    return f"{lo}-{lo + AGE_BAND_YEARS - 1}"


def small_cells(people: pd.DataFrame, variants: pd.DataFrame, today: dt.date, threshold: int) -> SmallCells:
    """Count people by sex x age band x family gene; cells under ``threshold`` are reported."""
    import pandas as pd

    genes = variants.groupby("family")["gene"].agg(lambda g: "+".join(sorted(set(g)))).to_dict()
    keys = []
    for sex, b, d, fam in zip(people["sex_at_birth"], people["birth_date"], people["death_date"], people["family"]):
        born, died = _partial(b), _partial(d)
        age = None
        if born is not None:
            on = died.value if died is not None else today
            age = (on - born.value).days / DAYS_PER_YEAR
        keys.append((sex, age_band(age), genes.get(fam, "none")))
    counts = pd.Series(keys, dtype=object).value_counts() if keys else pd.Series(dtype=int)
    below = counts[counts < threshold]
    return SmallCells(threshold, int(len(counts)), int(len(below)), int(below.sum()))


# --------------------------------------------------------------------------- writing


def csv_text(frame: pd.DataFrame) -> str:
    """CSV text of an extract frame; a text cell a spreadsheet would run gets a leading apostrophe."""
    out = io.StringIO()
    writer = csv.writer(out, lineterminator="\n")
    writer.writerow(list(frame.columns))
    for rec in frame.itertuples(index=False):
        cells = []
        for value in rec:
            cell = format_cell(value)
            if isinstance(value, str) and re.match(PROTECTED, cell):
                cell = "'" + cell
            cells.append(cell)
        writer.writerow(cells)
    return out.getvalue()


def manifest_text(ex: Extract) -> str:
    """The README of the extract folder: what was done, without the key."""
    from tracker import __version__

    date_lines = {
        "ages": [
            "Dates (mode 'ages'): each date is replaced by the person's age in years on that date",
            "(days / 365.2425, three decimals). Birth dates are not written; birth_date_precision",
            "says whether ages count from a full birth date (day) or from 1 July of a year-only",
            "one (year: uncertain by half a year). A person without a birth date has no ages.",
            "A variant's classification dates are years since its first classification.",
        ],
        "shift": [
            "Dates (mode 'shift'): every date of a family is moved by the same whole number of",
            f"days, between -{MAX_SHIFT_DAYS} and +{MAX_SHIFT_DAYS} (never 0), derived from the key and the",
            "family code. Intervals within a family are exact; calendar dates and weekdays are",
            "not the real ones. Year-only dates are written as their year, unchanged.",
        ],
    }[ex.dates]
    lines = [
        "Pseudonymised research extract",
        "==============================",
        "",
        f"Made on {ex.made_on.isoformat()} by tracker {__version__}: {ex.people} people, {ex.families} families.",
        "",
        f"Codes: person codes are {PERSON_PREFIX} + {PERSON_HEX} hex digits, family codes {FAMILY_PREFIX} + {FAMILY_HEX},",
        f"study sites {SITE_PREFIX} + {SITE_HEX}, all from HMAC-SHA256 (RFC 2104, FIPS 198-1) under the",
        "clinic's secret key. The key is not in this folder. The same key gives the same codes,",
        "so extracts made with it can be linked; parent and twin references use the same codes.",
        "",
        *date_lines,
        "",
        "Free text: only the columns listed below are written; every other column was dropped.",
        "Formula-like text cells start with an apostrophe (spreadsheet safety).",
        "",
    ]
    for kind in ex.frames:
        lines.append(f"{LAYOUTS[kind].file_name} ({ex.rows[kind]} rows)")
        lines.append(f"  columns: {', '.join(ex.kept[kind])}")
        lines.append(f"  dropped: {', '.join(ex.dropped[kind]) or 'none'}")
    s = ex.small_cells
    lines += [
        "",
        f"Small cells: people counted by {s.categories}:",
        f"{s.cells} cells, {s.below} with fewer than {s.threshold} people ({s.people_in_below} people in them).",
        "Review small cells before the extract is released.",
        "",
        "Pseudonymised data are not anonymous: with the key or the clinic's store they can be",
        "linked back to people. Handle this folder as the personal health data it is.",
    ]
    return "\n".join(lines) + "\n"


def check_folder(folder: Path) -> None:
    """Refuse a file, or a non-empty folder that does not hold an earlier extract."""
    if folder.exists() and not folder.is_dir():
        raise UserError(f"--out {folder} is a file; give a folder for the extract")
    if folder.is_dir() and any(folder.iterdir()) and not (folder / MANIFEST).is_file():
        raise UserError(f"--out {folder} is not empty and holds no extract; give a new or empty folder")


def write_extract(ex: Extract, folder: Path) -> dict[str, int]:
    """Write the extract's CSV files (layout file names) and its README into ``folder``."""
    check_folder(folder)
    texts = {LAYOUTS[kind].file_name: csv_text(frame) for kind, frame in ex.frames.items()}
    texts[MANIFEST] = manifest_text(ex)
    folder.mkdir(parents=True, exist_ok=True)
    for name, text in texts.items():
        write_private(folder / name, text)
    return dict(ex.rows)
