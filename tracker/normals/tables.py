"""Loading the normal-limit data files in ``tracker/normals/data/``.

Each CSV row carries its provenance: ``source``, ``year``, ``table`` and
``tag`` ([V] seen in the primary source or its abstract, [V2] secondary copy
only, [M] from memory -- verify).  Numbers are written in the files as
published (for example wall thickness in cm, ECV as a fraction) together with
their ``unit``; this module converts them explicitly to the catalogue unit of
the measure (mm, %, ...), so that every limit handed on is in the unit the
store holds.
"""

from __future__ import annotations

import csv
import io
import math
from dataclasses import dataclass
from functools import lru_cache
from importlib import resources

# Catalogue unit of every measure code this layer knows (store catalogue plus
# the derived echo indices computed elsewhere from entered values).
CATALOGUE_UNITS: dict[str, str] = {
    "mwt_echo": "mm",
    "ivsd": "mm",
    "lvpwd": "mm",
    "lvidd": "mm",
    "lvids": "mm",
    "lvef_echo": "%",
    "la_diam": "mm",
    "lavi": "mL/m2",
    "lvot_rest": "mmHg",
    "lvot_provoked": "mmHg",
    "lvot_valsalva": "mmHg",
    "mv_e": "cm/s",
    "mv_a": "cm/s",
    "e_prime_septal": "cm/s",
    "e_prime_lateral": "cm/s",
    "tr_vmax": "m/s",
    "gls": "%",
    "mwt_cmr": "mm",
    "lvmi_cmr": "g/m2",
    "lvef_cmr": "%",
    "lge_pct": "%",
    "ecv": "%",
    # derived (computed from entered values, not typed in)
    "lv_mass": "g",
    "lvmi_echo": "g/m2",
    "rwt": "ratio",
    "e_over_e_prime": "ratio",
}

MM_PER_CM = 10.0
PERCENT_PER_FRACTION = 100.0

# (unit as published, catalogue unit) -> multiplier.  Exact unit conversions.
_FACTORS: dict[tuple[str, str], float] = {
    ("cm", "mm"): MM_PER_CM,
    ("fraction", "%"): PERCENT_PER_FRACTION,
}

PROVENANCE_COLUMNS = ("source", "year", "table", "tag")
TAGS = ("V", "V2", "M")


def to_catalogue_factor(unit: str, measure: str) -> float:
    """Multiplier from a published unit to the measure's catalogue unit."""
    target = CATALOGUE_UNITS[measure]
    if unit == target:
        return 1.0
    try:
        return _FACTORS[(unit, target)]
    except KeyError:
        raise ValueError(f"no conversion from {unit!r} to {target!r} for {measure}") from None


def tag_text(tag: str) -> str:
    """The confidence tag as printed in a ``source`` string."""
    return "M: from memory, verify" if tag == "M" else tag


def source_text(source: str, year: str | int, table: str, tag: str) -> str:
    """``"<paper>, <year>; <table> [<tag>]"``."""
    return f"{source}, {year}; {table} [{tag_text(tag)}]"


@lru_cache(maxsize=None)
def read_rows(filename: str) -> tuple[dict[str, str], ...]:
    """All rows of a data file as dicts of strings; refuses a row without provenance."""
    text = resources.files("tracker.normals").joinpath("data", filename).read_text(encoding="utf-8")
    rows = tuple(csv.DictReader(io.StringIO(text)))
    for i, row in enumerate(rows, start=2):
        for col in PROVENANCE_COLUMNS:
            if not (row.get(col) or "").strip():
                raise ValueError(f"{filename}:{i}: column {col!r} is empty")
        if row["tag"] not in TAGS:
            raise ValueError(f"{filename}:{i}: unknown tag {row['tag']!r}")
    return rows


def _num(text: str | None) -> float | None:
    text = (text or "").strip()
    return float(text) if text else None


def _conv(x: float | None, factor: float) -> float | None:
    # Rounded to 9 decimals so that, e.g., 5.6 cm becomes exactly 56.0 mm.
    return None if x is None else round(x * factor, 9)


LIMIT_RULES = ("published", "mean_2sd", "mean_only", "flag_at_least")
# Limits computed from mean +- SD use 2 SD, the convention of the adult chamber
# guideline's normal ranges (e.g. LVIDd 50.2 +- 4.1 -> 42.0-58.4 mm, Lang 2015 [V2]).
SD_MULTIPLIER = 2.0


@dataclass(frozen=True)
class RangeRow:
    """One reference row, all numbers in the measure's catalogue unit.

    ``mild_edge``/``moderate_edge`` are the far edges of the mild and moderate
    bands on the abnormal side named by ``partition_side`` (``"above"`` or
    ``"below"``); beyond the moderate edge is severe.  ``age_min`` (inclusive)
    and ``age_below`` (exclusive) in years; None = open.
    """

    reference_set: str
    default: bool
    measure: str
    sex: str  # "female", "male" or "any"
    unit: str
    lower: float | None
    upper: float | None
    partition_side: str | None
    mild_edge: float | None
    moderate_edge: float | None
    mean: float | None
    sd: float | None
    limit_rule: str
    class_on: str  # "value" or "magnitude" (GLS: magnitude of a negative number)
    flag_label: str  # flag_at_least rows: the flag given at or above ``upper``
    age_min: float | None
    age_below: float | None
    source: str
    year: int
    table: str
    tag: str
    note: str

    @property
    def limits(self) -> tuple[float | None, float | None]:
        """(lower, upper) normal limits in catalogue unit; (None, None) if none apply."""
        if self.limit_rule == "published":
            return self.lower, self.upper
        if self.limit_rule == "mean_2sd":
            half = SD_MULTIPLIER * self.sd
            return round(self.mean - half, 9), round(self.mean + half, 9)
        return None, None

    @property
    def source_text(self) -> str:
        text = source_text(self.source, self.year, self.table, self.tag)
        if self.limit_rule == "mean_2sd":
            text += "; limits computed as mean +- 2 SD"
        return text


@lru_cache(maxsize=None)
def range_rows(filename: str) -> tuple[RangeRow, ...]:
    """The reference rows of one range file, converted to catalogue units."""
    out = []
    for row in read_rows(filename):
        measure = row["measure"]
        f = to_catalogue_factor(row["unit"], measure)
        f_msd = to_catalogue_factor(row["mean_sd_unit"] or row["unit"], measure)
        rule = row["limit_rule"]
        if rule not in LIMIT_RULES:
            raise ValueError(f"{filename}: unknown limit_rule {rule!r}")
        mean, sd = _conv(_num(row["mean"]), f_msd), _conv(_num(row["sd"]), f_msd)
        if rule == "mean_2sd" and (mean is None or sd is None or not math.isfinite(sd)):
            raise ValueError(f"{filename}: {measure} mean_2sd needs mean and sd")
        out.append(
            RangeRow(
                reference_set=row["reference_set"],
                default=row["default"] == "yes",
                measure=measure,
                sex=row["sex"],
                unit=CATALOGUE_UNITS[measure],
                lower=_conv(_num(row["lower"]), f),
                upper=_conv(_num(row["upper"]), f),
                partition_side=row["partition_side"] or None,
                mild_edge=_conv(_num(row["mild_edge"]), f),
                moderate_edge=_conv(_num(row["moderate_edge"]), f),
                mean=mean,
                sd=sd,
                limit_rule=rule,
                class_on=row["class_on"],
                flag_label=row["flag_label"],
                age_min=_num(row["age_min"]),
                age_below=_num(row["age_below"]),
                source=row["source"],
                year=int(row["year"]),
                table=row["table"],
                tag=row["tag"],
                note=row["note"],
            )
        )
    return tuple(out)


@lru_cache(maxsize=None)
def toml_data(filename: str) -> dict:
    """A TOML data file as a dict."""
    import tomllib

    text = resources.files("tracker.normals").joinpath("data", filename).read_text(encoding="utf-8")
    return tomllib.loads(text)
