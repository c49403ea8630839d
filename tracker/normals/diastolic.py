"""Diastolic function: ASE/EACVI 2016 criteria and algorithm for normal LVEF,
and age-specific e' (data file ``data/diastolic.csv``).

ASE/EACVI 2016 (Nagueh et al., J Am Soc Echocardiogr 2016;29:277-314) [V2],
for patients with normal LVEF:

1. average E/e' > 14
2. septal e' < 7 cm/s or lateral e' < 10 cm/s
3. TR peak velocity > 2.8 m/s
4. LA volume index > 34 mL/m2

More than half of the available criteria positive: diastolic dysfunction;
exactly half: indeterminate; fewer than half: normal [V2].  Engineering
choices: the e' criterion uses whichever of septal/lateral e' is present;
average E/e' is computed as E / mean(septal e', lateral e') when not given and
both e' are present; with fewer than ``min_available`` (default 2) criteria
available the result is "not assessable" rather than a verdict from one value.

Age-specific e' (EAE/ASE 2009, Nagueh et al., Eur J Echocardiogr 2009;
10:165-93, healthy subjects, mean +- SD by age group): septal e' [V2], lateral
e' [M: from memory, verify].  Set ``nagueh2009_age``; ages in completed years.

Units: velocities cm/s (e', E), TR velocity m/s, LAVI mL/m2.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from tracker.normals.classes import CAUTION, COMPARE_DECIMALS
from tracker.normals.tables import RangeRow, range_rows

FILE = "diastolic.csv"
NAGUEH_2016 = "nagueh2016"
NAGUEH_2009_AGE = "nagueh2009_age"

NORMAL = "normal diastolic function"
INDETERMINATE = "indeterminate"
DYSFUNCTION = "diastolic dysfunction"
NOT_ASSESSABLE = "not assessable"

CRITERIA = ("e_over_e_prime", "e_prime", "tr_vmax", "lavi")
INPUT_COLUMNS = ("e_over_e_prime", "mv_e", "e_prime_septal", "e_prime_lateral", "tr_vmax", "lavi")

DIASTOLIC_CAUTION = (
    CAUTION + " The algorithm is for patients with normal LVEF; it does not grade "
    "diastolic dysfunction and is not an HCM criterion."
)


def rows() -> tuple[RangeRow, ...]:
    """All diastolic reference rows (catalogue units)."""
    return range_rows(FILE)


def _row(measure: str) -> RangeRow:
    return next(r for r in rows() if r.reference_set == NAGUEH_2016 and r.measure == measure)


def thresholds() -> dict[str, float]:
    """ASE/EACVI 2016 cut-offs: E/e' > 14, septal e' < 7, lateral e' < 10 cm/s, TR > 2.8 m/s, LAVI > 34."""
    return {
        "e_over_e_prime": _row("e_over_e_prime").upper,
        "e_prime_septal": _row("e_prime_septal").lower,
        "e_prime_lateral": _row("e_prime_lateral").lower,
        "tr_vmax": _row("tr_vmax").upper,
        "lavi": _row("lavi").upper,
    }


def source() -> str:
    """Source string of the 2016 algorithm."""
    r = _row("e_over_e_prime")
    return f"{r.source}, {r.year}; algorithm for normal LVEF (four criteria, >50% / 50% / <50%) [{r.tag}]"


def age_reference(measure: str, age_years: float) -> RangeRow | None:
    """The EAE/ASE 2009 age-group row for septal or lateral e' (None outside 16 y and over)."""
    for r in rows():
        if r.reference_set == NAGUEH_2009_AGE and r.measure == measure:
            if r.age_min <= age_years and (r.age_below is None or age_years < r.age_below):
                return r
    return None


@dataclass(frozen=True)
class DiastolicResult:
    """Outcome of the 2016 algorithm for one study."""

    conclusion: str  # NORMAL, INDETERMINATE, DYSFUNCTION or NOT_ASSESSABLE
    n_available: int
    n_positive: int
    positive: tuple[str, ...]
    negative: tuple[str, ...]
    missing: tuple[str, ...]
    e_over_e_prime: float | None  # average E/e' used (given or computed)
    source: str
    caution: str


def _col(df: pd.DataFrame, name: str) -> np.ndarray:
    if name not in df:
        return np.full(len(df), np.nan)
    return np.round(pd.to_numeric(df[name], errors="raise").to_numpy(dtype=float), COMPARE_DECIMALS)


def _criteria(df: pd.DataFrame) -> tuple[dict[str, np.ndarray], np.ndarray]:
    """Per criterion: 1.0 positive, 0.0 negative, NaN not available; and E/e' used."""
    t = thresholds()
    e, sep, lat = _col(df, "mv_e"), _col(df, "e_prime_septal"), _col(df, "e_prime_lateral")
    ratio = _col(df, "e_over_e_prime")
    with np.errstate(divide="ignore", invalid="ignore"):
        computed = e / ((sep + lat) / 2.0)
    ratio = np.where(np.isnan(ratio), computed, ratio)
    ratio = np.where(np.isfinite(ratio), ratio, np.nan)

    def test(x: np.ndarray, positive: np.ndarray) -> np.ndarray:
        return np.where(np.isnan(x), np.nan, positive.astype(float))

    sep_pos, lat_pos = test(sep, sep < t["e_prime_septal"]), test(lat, lat < t["e_prime_lateral"])
    e_prime = np.where(
        (sep_pos == 1) | (lat_pos == 1), 1.0, np.where(np.isnan(sep_pos) & np.isnan(lat_pos), np.nan, 0.0)
    )
    tr, lavi = _col(df, "tr_vmax"), _col(df, "lavi")
    crit = {
        "e_over_e_prime": test(ratio, np.round(ratio, COMPARE_DECIMALS) > t["e_over_e_prime"]),
        "e_prime": e_prime,
        "tr_vmax": test(tr, tr > t["tr_vmax"]),
        "lavi": test(lavi, lavi > t["lavi"]),
    }
    return crit, ratio


def diastolic_function_frame(df: pd.DataFrame, *, min_available: int = 2) -> pd.DataFrame:
    """The 2016 algorithm for each row of a wide DataFrame.

    Columns used (any may be absent or NaN): ``e_over_e_prime`` (average),
    ``mv_e`` (cm/s), ``e_prime_septal``, ``e_prime_lateral`` (cm/s),
    ``tr_vmax`` (m/s), ``lavi`` (mL/m2).  Returns a copy with ``crit_<name>``
    (1/0/NaN), ``n_available``, ``n_positive``, ``e_over_e_prime_used`` and
    ``diastolic_conclusion`` added; ``attrs["source"]`` and ``attrs["caution"]`` set.
    """
    crit, ratio = _criteria(df)
    stack = np.vstack([crit[c] for c in CRITERIA])
    n_av = np.sum(~np.isnan(stack), axis=0)
    n_pos = np.nansum(stack, axis=0).astype(int)
    conclusion = np.where(
        n_av < max(min_available, 1),
        NOT_ASSESSABLE,
        np.where(2 * n_pos > n_av, DYSFUNCTION, np.where(2 * n_pos == n_av, INDETERMINATE, NORMAL)),
    )
    out = df.copy()
    for c in CRITERIA:
        out[f"crit_{c}"] = crit[c]
    out["n_available"] = n_av
    out["n_positive"] = n_pos
    out["e_over_e_prime_used"] = ratio
    out["diastolic_conclusion"] = conclusion
    out.attrs["source"] = source()
    out.attrs["caution"] = DIASTOLIC_CAUTION
    return out


def diastolic_function(
    *,
    e_over_e_prime: float | None = None,
    mv_e: float | None = None,
    e_prime_septal: float | None = None,
    e_prime_lateral: float | None = None,
    tr_vmax: float | None = None,
    lavi: float | None = None,
    min_available: int = 2,
) -> DiastolicResult:
    """The 2016 algorithm for one study (units as in the module docstring)."""
    values = dict(
        e_over_e_prime=e_over_e_prime,
        mv_e=mv_e,
        e_prime_septal=e_prime_septal,
        e_prime_lateral=e_prime_lateral,
        tr_vmax=tr_vmax,
        lavi=lavi,
    )
    df = pd.DataFrame({k: [np.nan if v is None else float(v)] for k, v in values.items()})
    r = diastolic_function_frame(df, min_available=min_available).iloc[0]
    state = {c: r[f"crit_{c}"] for c in CRITERIA}
    ratio = r["e_over_e_prime_used"]
    return DiastolicResult(
        conclusion=str(r["diastolic_conclusion"]),
        n_available=int(r["n_available"]),
        n_positive=int(r["n_positive"]),
        positive=tuple(c for c, s in state.items() if s == 1),
        negative=tuple(c for c, s in state.items() if s == 0),
        missing=tuple(c for c, s in state.items() if np.isnan(s)),
        e_over_e_prime=None if np.isnan(ratio) else float(ratio),
        source=source(),
        caution=DIASTOLIC_CAUTION,
    )
