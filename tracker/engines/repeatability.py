"""Measurement repeatability and the least significant change (LSC) per measure.

Definitions (reference notes normal-limits.md section 7a; Bland JM, Altman DG,
Stat Methods Med Res 1999;8:135-60 [V]):

* Sw, the within-subject standard deviation of repeated scans of the same
  person, in the measure's catalogue unit (mm, %, cm/s, g/m2).
* Repeatability coefficient = least significant change between two scans:
  ``LSC = 1.96 * sqrt(2) * Sw = 2.77 * Sw``.  95% of differences between two
  scans of an unchanged person lie within +/- LSC.  Check value: Sw 1.0 mm ->
  LSC 2.77 mm (normal-limits.md section 9, check 18).
* With a coefficient of variation CV instead of Sw: relative LSC = 2.77 * CV
  (a fraction of the earlier value).  Some measures carry a published
  relative limit directly (GLS reference change value ~15%).

Default values, their sources, confidence tags and status (published /
provisional / placeholder / none) live in ``repeatability.toml`` beside this
module.  Wall-thickness values are placeholders until each lab measures its
own Sw (normal-limits.md 7c.1); a clinic's own values, passed in from its
settings, replace the defaults and are marked status ``"clinic"``.
"""

from __future__ import annotations

import math
import tomllib
from collections.abc import Mapping
from dataclasses import dataclass, replace
from importlib import resources

import pandas as pd

#: 1.96 * sqrt(2) = 2.7719...: the factor from Sw to the least significant change
#: between two measurements (Bland & Altman 1999 [V]; normal-limits.md 7a).
LSC_FACTOR = 1.96 * math.sqrt(2.0)

STATUSES = ("published", "provisional", "placeholder", "clinic", "none")

_FIELDS = ("unit", "sw", "cv", "relative_lsc", "status", "source", "tag", "note")


@dataclass(frozen=True)
class Repeatability:
    """Repeatability of one measure.

    ``sw`` is the within-subject SD in the catalogue ``unit``; ``cv`` a
    within-subject coefficient of variation and ``relative_lsc`` a least
    significant relative change, both as fractions (0.15 = 15%).
    """

    measure: str
    status: str
    source: str
    tag: str
    unit: str | None = None
    sw: float | None = None
    cv: float | None = None
    relative_lsc: float | None = None
    note: str = ""

    def __post_init__(self) -> None:
        if self.status not in STATUSES:
            raise ValueError(f"{self.measure}: unknown repeatability status {self.status!r}")
        for name in ("sw", "cv", "relative_lsc"):
            v = getattr(self, name)
            if v is not None and not (math.isfinite(v) and v > 0):
                raise ValueError(f"{self.measure}: {name} must be a positive number, got {v!r}")

    @property
    def lsc(self) -> float | None:
        """Absolute least significant change, 2.77 x Sw, in ``unit``; None without Sw."""
        return None if self.sw is None else lsc_from_sw(self.sw)

    @property
    def lsc_relative(self) -> float | None:
        """Least significant relative change (fraction of the earlier value), or None.

        A published relative limit is used as given; otherwise 2.77 x CV.
        """
        if self.relative_lsc is not None:
            return self.relative_lsc
        if self.cv is not None:
            return LSC_FACTOR * self.cv
        return None


def lsc_from_sw(sw: float) -> float:
    """Least significant change from a within-subject SD: 1.96 x sqrt(2) x Sw (same unit)."""
    if not (math.isfinite(sw) and sw > 0):
        raise ValueError(f"within-subject SD must be a positive number, got {sw!r}")
    return LSC_FACTOR * sw


def _default_table() -> dict[str, dict]:
    text = resources.files("tracker.engines").joinpath("repeatability.toml").read_text("utf-8")
    return tomllib.loads(text)


def load_repeatability(
    clinic_values: Mapping[str, float | Mapping[str, object]] | None = None,
) -> dict[str, Repeatability]:
    """Repeatability of every measure: defaults from ``repeatability.toml``,
    overridden by the clinic's own values.

    ``clinic_values`` maps a measure code either to a within-subject SD (a
    number, catalogue unit) or to a mapping with any of ``sw``, ``cv``,
    ``relative_lsc``, ``unit``, ``source``, ``note``.  A measure the clinic
    sets gets status ``"clinic"``; its ``source`` should say where the lab's
    figure comes from (default text says "clinic setting").  Fields the clinic
    does not give keep their default values.
    """
    out: dict[str, Repeatability] = {}
    for measure, entry in _default_table().items():
        unknown = set(entry) - set(_FIELDS)
        if unknown:
            raise ValueError(f"repeatability.toml [{measure}]: unknown fields {sorted(unknown)}")
        out[measure] = Repeatability(measure=measure, **entry)
    for measure, given in (clinic_values or {}).items():
        fields: dict[str, object] = {"sw": float(given)} if isinstance(given, (int, float)) else dict(given)
        unknown = set(fields) - {"sw", "cv", "relative_lsc", "unit", "source", "note"}
        if unknown:
            raise ValueError(f"clinic repeatability for {measure!r}: unknown fields {sorted(unknown)}")
        fields.setdefault("source", "clinic setting (the lab's own measurement)")
        base = out.get(measure) or Repeatability(measure=measure, status="none", source="", tag="none")
        for k in ("sw", "cv", "relative_lsc"):
            if fields.get(k) is not None:
                fields[k] = float(fields[k])  # type: ignore[arg-type]
        out[measure] = replace(base, status="clinic", tag="clinic", **fields)  # type: ignore[arg-type]
    return out


def lsc(measure: str, table: Mapping[str, Repeatability] | None = None) -> float | None:
    """Absolute least significant change of ``measure`` (2.77 x Sw, catalogue unit).

    None when no within-subject SD is known for the measure (see ``lsc_relative``
    and the status in the table).  Raises KeyError for a measure not in the table.
    """
    table = load_repeatability() if table is None else table
    return table[measure].lsc


def lsc_table(table: Mapping[str, Repeatability] | None = None) -> pd.DataFrame:
    """The repeatability table as a DataFrame, one row per measure.

    Columns: measure, unit, sw, lsc (= 2.77 x sw, unit), cv, lsc_relative
    (fraction of the earlier value), status, tag, source, note.  Missing values
    are NaN.  This is the ``lsc_table`` argument of
    ``tracker.engines.trends.consecutive_changes``.
    """
    table = load_repeatability() if table is None else table
    rows = []
    for r in table.values():
        rows.append(
            {
                "measure": r.measure,
                "unit": r.unit,
                "sw": math.nan if r.sw is None else r.sw,
                "lsc": math.nan if r.lsc is None else r.lsc,
                "cv": math.nan if r.cv is None else r.cv,
                "lsc_relative": math.nan if r.lsc_relative is None else r.lsc_relative,
                "status": r.status,
                "tag": r.tag,
                "source": r.source,
                "note": r.note,
            }
        )
    return pd.DataFrame(rows, columns=["measure", "unit", "sw", "lsc", "cv", "lsc_relative",
                                       "status", "tag", "source", "note"])
