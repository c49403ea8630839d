"""Serial-measurement trends for relatives under screening: per-person slopes,
consecutive changes against measurement variability, projected threshold
crossings, phenotype conversion and progression flags.

Input: a long DataFrame, one row per measured value, with columns

    person (str), measure (str, catalogue code), modality (echo/cmr/ecg),
    age_years (float, age at the study, years), study_date (date),
    value (float, catalogue unit: mm, %, cm/s, ms, g/m2),
    optional z (float, may be NaN), z_model (z reference set), sex, genotype.

Series are always grouped by the key (person, measure).  Echo and CMR wall
thickness are different measure codes (mwt_echo, mwt_cmr) and are never pooled;
a (person, measure) series that mixes modalities is refused.  Rows whose age or
analysed variable is missing are not used.

Every function is vectorised (sorting + ``np.add.reduceat``); none loops over
people, so 300,000 series run in one pass.

All outputs are decision support only: the treating clinician decides; follow
local protocols and the current guideline (see ``CAUTION``).
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass

import numpy as np
import pandas as pd
from scipy import special

from tracker.engines import repeatability

GROUP_KEYS = ("person", "measure")

CAUTION = (
    "Decision support only: the treating clinician decides. Follow local protocols and the "
    "current guideline. A straight-line trend assumes the recent rate of change continues."
)

#: Direction of disease per measure code: +1 = higher values are towards disease,
#: -1 = lower values are.  Wall thickness, LV mass, LA size, ECV and LGE rise with
#: HCM; e' falls; GLS (stored negative, "negative = shortening") moves towards
#: zero, i.e. its value rises.  Common practice: hypertrophy defines the phenotype
#: (guidelines.md section 4), strain and tissue-Doppler velocities may be abnormal
#: before wall thickening (2023 ESC cardiomyopathy guideline Table 17 [V]), raised
#: ECV in carriers without hypertrophy (Ho et al. 2013, from memory, verify).
#: Measures not listed have no direction, and no progression flag is raised for them.
DISEASE_DIRECTION: dict[str, int] = {
    "mwt_echo": +1,
    "ivsd": +1,
    "lvpwd": +1,
    "mwt_cmr": +1,
    "lvmi_cmr": +1,
    "lavi": +1,
    "la_diam": +1,
    "ecv": +1,
    "lge_pct": +1,
    "e_prime_septal": -1,
    "e_prime_lateral": -1,
    "gls": +1,
}

#: Default horizon for projected crossings, years beyond the last study.
#: Engineering choice: adult recall intervals are 1-5 years (guidelines.md 2a),
#: and a straight line is not extrapolated much beyond one recall interval.
DEFAULT_HORIZON_YEARS = 3.0

BEYOND = "beyond measurement variability"
WITHIN = "within measurement variability"
NO_LIMIT = "no measurement-variability limit for this measure"

REVIEW_MET_EARLIER = "review: met criteria earlier but not at latest study"
MET = "met criteria"
NEVER_MET = "criteria not met"
NOT_ASSESSED = "no assessable study"

OLS_COLUMNS = [
    "person", "measure", "variable", "n", "first_age", "last_age", "span_years",
    "first_value", "last_value", "first_date", "last_date", "mean_age", "mean_value",
    "sxx", "slope", "intercept", "se_slope", "se_intercept", "resid_sd", "resid_df",
    "ci_low", "ci_high", "t", "p_value",
]


# --------------------------------------------------------------------------- grouping


@dataclass(frozen=True)
class _Series:
    """Rows of a long frame sorted by (person, measure, age), with group bounds."""

    frame: pd.DataFrame  # key, modality, date columns of the rows used, in sorted order
    x: np.ndarray  # age_years, sorted within group
    y: np.ndarray  # analysed variable
    starts: np.ndarray  # first sorted row of each group
    n: np.ndarray  # rows per group
    rep: np.ndarray  # group index of each sorted row

    @property
    def ends(self) -> np.ndarray:
        return self.starts + self.n - 1



def t_quantile(p, df):
    """Student's t quantile (inverse CDF) at probability ``p`` with ``df`` degrees of freedom.

    scipy.special's incomplete-beta inverse, the same function scipy.stats.t.ppf evaluates,
    without loading scipy.stats (tests/test_trends.py checks the two agree to 1e-12)."""
    return special.stdtrit(df, p)


def t_sf(x, df):
    """Student's t upper tail probability P(T > x) with ``df`` degrees of freedom."""
    return special.stdtr(df, -np.asarray(x, dtype=float))

def _within_group_change(codes: np.ndarray, same_group: np.ndarray) -> np.ndarray:
    """Positions i (sorted) where codes[i+1] != codes[i] inside one group."""
    return np.flatnonzero(same_group & (codes[1:] != codes[:-1]))


def _series(df: pd.DataFrame, y: str) -> _Series:
    missing = [c for c in ("person", "measure", "age_years", y) if c not in df.columns]
    if missing:
        raise ValueError(f"input frame lacks columns {missing}")
    age = pd.to_numeric(df["age_years"], errors="raise").to_numpy(dtype=float, na_value=np.nan)
    yv = pd.to_numeric(df[y], errors="raise").to_numpy(dtype=float, na_value=np.nan)
    keep = np.isfinite(age) & np.isfinite(yv)
    cols = [c for c in ("person", "measure", "modality", "study_date") if c in df.columns]
    if y == "z" and "z_model" in df.columns:
        cols.append("z_model")
    d = df[cols]
    d = d.iloc[np.flatnonzero(keep)] if not keep.all() else d
    age, yv = age[keep], yv[keep]

    pc, _ = pd.factorize(d["person"], sort=False)
    mc, mu = pd.factorize(d["measure"], sort=False)
    if (pc < 0).any() or (mc < 0).any():
        raise ValueError("person and measure must not be missing")
    g = pc.astype(np.int64) * max(len(mu), 1) + mc
    by_age = np.argsort(age, kind="stable")  # same order as np.lexsort((age, g)), faster
    order = by_age[np.argsort(g[by_age], kind="stable")]
    g, x, yy = g[order], age[order], yv[order]
    d = d.iloc[order]
    same = g[1:] == g[:-1]
    starts = np.flatnonzero(np.r_[True, ~same]) if len(g) else np.zeros(0, dtype=np.int64)
    n = np.diff(np.r_[starts, len(g)])
    rep = np.repeat(np.arange(len(starts)), n)

    def _where(i: np.ndarray) -> str:
        r = d.iloc[int(i[0])]
        return f"person {r['person']!r}, measure {r['measure']!r}"

    if "modality" in d.columns:
        codes, _ = pd.factorize(d["modality"], use_na_sentinel=True)
        bad = _within_group_change(codes, same)
        if len(bad):
            raise ValueError(
                f"a series mixes modalities ({_where(bad)}): echo and CMR values are separate "
                "measure codes and are never pooled"
            )
    dup = np.flatnonzero(same & (x[1:] == x[:-1]))
    if len(dup):
        raise ValueError(
            f"two values at the same age for {_where(dup)}: one value per measure and study is expected"
        )
    if y == "z" and "z_model" in d.columns:
        codes, _ = pd.factorize(d["z_model"], use_na_sentinel=True)
        bad = _within_group_change(codes, same)
        if len(bad):
            raise ValueError(
                f"z-scores from different reference sets in one series ({_where(bad)}): "
                "never trend z across models"
            )
    return _Series(frame=d, x=x, y=yy, starts=starts, n=n, rep=rep)


def _reduce(values: np.ndarray, s: _Series) -> np.ndarray:
    if len(s.starts) == 0:
        return np.zeros(0)
    return np.add.reduceat(values, s.starts)


# --------------------------------------------------------------------------- OLS


def per_person_ols(df: pd.DataFrame, y: str = "value", level: float = 0.95) -> pd.DataFrame:
    """Straight-line fit of ``y`` on age for every (person, measure) series, in one
    vectorised pass (closed-form least squares from group-wise centred sums).

    Model per series: ``y = intercept + slope * age_years + error``.

    Returns one row per (person, measure), columns (``OLS_COLUMNS``):

    ======================  ==============================================================
    person, measure         group key
    variable                the analysed column (``"value"`` or ``"z"``)
    n                       number of studies used
    first_age, last_age     age at first and last study, years; span_years = last - first
    first_value, last_value observed ``y`` at the first and last study
    first_date, last_date   study_date of the first and last study (NaT if no study_date)
    mean_age, mean_value    group means of age and ``y``
    sxx                     sum of squared age deviations, years^2
    slope                   change of ``y`` per year (catalogue unit / year, or z / year)
    intercept               fitted ``y`` at age 0 (as an ordinary OLS on age)
    se_slope, se_intercept  standard errors
    resid_sd                residual SD, sqrt(SSE / (n - 2)), unit of ``y``
    resid_df                residual degrees of freedom n - 2
    ci_low, ci_high         ``level`` (95%) CI of the slope, t distribution with n - 2 df
    t, p_value              slope / se_slope and its two-sided p-value
    ======================  ==============================================================

    n = 1 gives no slope; n = 2 gives slope and intercept but NaN for every
    standard error, interval and p-value (no residual degrees of freedom).
    """
    s = _series(df, y)
    k = len(s.starts)
    n = s.n.astype(float)
    mx = _reduce(s.x, s) / n if k else np.zeros(0)
    my = _reduce(s.y, s) / n if k else np.zeros(0)
    dx = s.x - mx[s.rep]
    dy = s.y - my[s.rep]
    sxx = _reduce(dx * dx, s)
    sxy = _reduce(dx * dy, s)
    span = s.x[s.ends] - s.x[s.starts] if k else np.zeros(0)
    ok = (s.n >= 2) & (span > 0)
    with np.errstate(divide="ignore", invalid="ignore"):
        slope = np.where(ok, sxy / sxx, np.nan)
        intercept = my - slope * mx
        resid = dy - np.nan_to_num(slope)[s.rep] * dx
        sse = _reduce(resid * resid, s)
        dof = n - 2.0
        has_df = ok & (dof > 0)
        s2 = np.where(has_df, sse / np.where(has_df, dof, 1.0), np.nan)
        se_slope = np.sqrt(s2 / sxx)
        se_int = np.sqrt(s2 * (1.0 / n + mx * mx / sxx))
        tval = slope / se_slope
        dof_safe = np.where(has_df, dof, 1.0)
        tcrit = np.where(has_df, t_quantile(0.5 + level / 2.0, dof_safe), np.nan)
        pval = np.where(has_df, 2.0 * t_sf(np.abs(tval), dof_safe), np.nan)
    frame = s.frame
    if "study_date" in frame.columns:
        dates = frame["study_date"].to_numpy()
        first_date, last_date = dates[s.starts], dates[s.ends]
    else:
        first_date = last_date = np.full(k, pd.NaT)
    person = frame["person"].to_numpy()
    measure = frame["measure"].to_numpy()
    out = pd.DataFrame(
        {
            "person": person[s.starts],
            "measure": measure[s.starts],
            "variable": np.full(k, y, dtype=object),
            "n": s.n.astype(np.int64),
            "first_age": s.x[s.starts],
            "last_age": s.x[s.ends],
            "span_years": span,
            "first_value": s.y[s.starts],
            "last_value": s.y[s.ends],
            "first_date": first_date,
            "last_date": last_date,
            "mean_age": mx,
            "mean_value": my,
            "sxx": sxx,
            "slope": slope,
            "intercept": intercept,
            "se_slope": se_slope,
            "se_intercept": se_int,
            "resid_sd": np.sqrt(s2),
            "resid_df": np.where(ok, dof, np.nan),
            "ci_low": slope - tcrit * se_slope,
            "ci_high": slope + tcrit * se_slope,
            "t": tval,
            "p_value": pval,
        },
        columns=OLS_COLUMNS,
    )
    return out


def per_person_z_ols(
    df: pd.DataFrame, max_age_years: float = 18.0, level: float = 0.95
) -> pd.DataFrame:
    """Per-person slope of the z-score (z units per year) for children.

    In children wall thickness grows with body size, so the z-score is trended,
    not millimetres (normal-limits.md section 8).  Uses rows with age below
    ``max_age_years`` (default 18, the upper age of the paediatric reference
    sets, normal-limits.md 5a) and a non-missing ``z``.  If a ``z_model`` column
    is present, a series mixing reference sets is refused (normal-limits.md 5d).
    Same columns as ``per_person_ols`` with ``variable == "z"``.
    """
    if "z" not in df.columns:
        raise ValueError("input frame lacks column 'z'")
    age = pd.to_numeric(df["age_years"]).to_numpy(dtype=float, na_value=np.nan)
    return per_person_ols(df.iloc[np.flatnonzero(age < max_age_years)], y="z", level=level)


# --------------------------------------------------------------------------- changes


def _per_measure(measures: np.ndarray, table: Mapping, default, dtype) -> np.ndarray:
    """Look up a per-measure value for every row (one lookup per distinct code)."""
    codes, uniq = pd.factorize(pd.Series(measures, dtype=object), use_na_sentinel=True)
    vals = np.array([table.get(m, default) for m in uniq] + [default], dtype=dtype)
    return vals[codes]  # code -1 (missing measure) takes the appended default


def _direction(measures: np.ndarray, direction: Mapping[str, int] | None) -> np.ndarray:
    table = DISEASE_DIRECTION if direction is None else direction
    return _per_measure(measures, {k: float(v) for k, v in table.items()}, np.nan, float)


def _lsc_lookup(measures: np.ndarray, lsc_table) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    if lsc_table is None:
        lsc_table = repeatability.lsc_table()
    if isinstance(lsc_table, pd.DataFrame):
        t = lsc_table.set_index("measure")
        abs_map = t["lsc"].astype(float).to_dict() if "lsc" in t else {}
        rel_map = t["lsc_relative"].astype(float).to_dict() if "lsc_relative" in t else {}
        st_map = t["status"].to_dict() if "status" in t else {}
    else:  # mapping measure -> absolute LSC
        abs_map = {k: float(v) for k, v in dict(lsc_table).items()}
        rel_map = {}
        st_map = {k: "given" for k in abs_map}
    a = _per_measure(measures, abs_map, np.nan, float)
    r = _per_measure(measures, rel_map, np.nan, float)
    st = _per_measure(measures, st_map, "none", object)
    return a, r, st


def _key_codes(*frames: pd.DataFrame) -> list[np.ndarray]:
    """Integer codes of (person, measure) shared across frames (hash-based, no sorting)."""
    lens = [len(f) for f in frames]
    person = np.concatenate([f["person"].to_numpy(dtype=object) for f in frames])
    measure = np.concatenate([f["measure"].to_numpy(dtype=object) for f in frames])
    pc, _ = pd.factorize(person)
    mc, mu = pd.factorize(measure)
    key = pc.astype(np.int64) * max(len(mu), 1) + mc
    return np.split(key, np.cumsum(lens)[:-1])


def consecutive_changes(
    df: pd.DataFrame,
    lsc_table: pd.DataFrame | Mapping[str, float] | None = None,
    direction: Mapping[str, int] | None = None,
) -> pd.DataFrame:
    """Change of ``value`` between each pair of consecutive studies of a
    (person, measure) series, judged against the measure's least significant change.

    ``lsc_table``: a DataFrame as returned by ``repeatability.lsc_table()``
    (columns measure, lsc, lsc_relative, status), a mapping measure -> absolute
    LSC in the catalogue unit, or None for the packaged defaults.
    LSC = 2.77 x within-subject SD (Bland & Altman; normal-limits.md 7a).

    A change is "beyond measurement variability" when |delta| > lsc, or when
    |delta| / |earlier value| > lsc_relative (either limit, where defined;
    normal-limits.md 7c.1-7c.3).  Without any limit the change is labelled
    ``NO_LIMIT`` and never flagged.

    Returns one row per consecutive pair, columns: person, measure,
    from_date, to_date, from_age, to_age, interval_years, from_value, to_value,
    delta (to - from, catalogue unit), relative_change (|delta| / |from_value|),
    lsc, lsc_relative, lsc_status (published / provisional / placeholder /
    clinic / given / none), beyond_variability (bool), variability (label),
    direction (+1 / -1 / NaN: direction of disease of the measure),
    towards_disease (bool; False when no direction is defined).
    """
    s = _series(df, "value")
    if len(s.x) < 2:
        pairs = np.zeros(0, dtype=np.int64)
    else:
        pairs = np.flatnonzero(s.rep[1:] == s.rep[:-1])
    i0, i1 = pairs, pairs + 1
    frame = s.frame
    person = frame["person"].to_numpy()[i1]
    measure = frame["measure"].to_numpy()[i1]
    if "study_date" in frame.columns:
        dates = frame["study_date"].to_numpy()
        d0, d1 = dates[i0], dates[i1]
    else:
        d0 = d1 = np.full(len(pairs), pd.NaT)
    v0, v1 = s.y[i0], s.y[i1]
    delta = v1 - v0
    with np.errstate(divide="ignore", invalid="ignore"):
        rel = np.where(v0 != 0, np.abs(delta) / np.abs(v0), np.nan)
    a, r, st = _lsc_lookup(measure, lsc_table)
    beyond_abs = np.isfinite(a) & (np.abs(delta) > a)
    beyond_rel = np.isfinite(r) & np.isfinite(rel) & (rel > r)
    beyond = beyond_abs | beyond_rel
    has_limit = np.isfinite(a) | np.isfinite(r)
    labels = np.array([NO_LIMIT, WITHIN, BEYOND], dtype=object)
    label = labels[np.where(beyond, 2, np.where(has_limit, 1, 0))]
    dirn = _direction(measure, direction)
    towards = np.isfinite(dirn) & (np.nan_to_num(dirn) * delta > 0)
    return pd.DataFrame(
        {
            "person": person,
            "measure": measure,
            "from_date": d0,
            "to_date": d1,
            "from_age": s.x[i0],
            "to_age": s.x[i1],
            "interval_years": s.x[i1] - s.x[i0],
            "from_value": v0,
            "to_value": v1,
            "delta": delta,
            "relative_change": rel,
            "lsc": a,
            "lsc_relative": r,
            "lsc_status": st,
            "beyond_variability": beyond,
            "variability": label,
            "direction": dirn,
            "towards_disease": towards,
        }
    )


# --------------------------------------------------------------------------- projection


@dataclass(frozen=True)
class Projection:
    """Projected age (years) at which a fitted line reaches a threshold.

    ``age`` is None when no projection is given; ``reason`` then says why.
    ``ci_low`` / ``ci_high``: Fieller 95% interval of that age (see
    ``project_crossings``).
    """

    person: str
    measure: str
    threshold: float
    status: str
    age: float | None
    ci_low: float | None
    ci_high: float | None
    years_after_last: float | None
    reason: str
    caution: str = CAUTION


PROJECTION_COLUMNS = [
    "person", "measure", "threshold", "direction", "status", "projected_age", "ci_low", "ci_high",
    "years_after_last", "reason", "caution",
]


def project_crossings(
    trends: pd.DataFrame,
    threshold: float | Mapping[str, float],
    horizon_years: float = DEFAULT_HORIZON_YEARS,
    level: float = 0.95,
    direction: Mapping[str, int] | None = None,
    meets_if_equal: bool = True,
) -> pd.DataFrame:
    """Projected age at which each person's fitted line reaches the diagnostic
    threshold, with a Fieller interval; vectorised over the rows of ``trends``
    (output of ``per_person_ols`` or ``per_person_z_ols``).

    ``threshold`` is in the unit of the trended variable (e.g. 13 mm for adult
    first-degree relatives under ESC 2023, z 2 for a child: guidelines.md
    section 4), either one number or a mapping measure -> threshold; the
    caller chooses the guideline.  ``meets_if_equal``: True for ">=" criteria
    (">= 13 mm"), False for strict ones ("z > 2").

    A projection is offered only for a person who does not yet meet the
    threshold at the last study and whose slope points towards disease with a
    ``level`` CI excluding zero (n >= 3).

    Interval: the fitted mean line is y(a) = ybar + b (a - abar).  The age a0 at
    which the true mean line reaches T has the Fieller (inverse-prediction)
    confidence set {a : |ybar + b (a - abar) - T| <= t * s * sqrt(1/n + (a - abar)^2 / Sxx)},
    t the t quantile with n - 2 df.  Solving the quadratic with u0 = (T - ybar)/b
    and g = t^2 se_b^2 / b^2:

        a = abar + [u0 +/- (t s / |b|) sqrt(u0^2 / Sxx + (1 - g) / n)] / (1 - g).

    The set is a finite interval exactly when g < 1, i.e. when the slope's CI
    excludes zero, which is the condition for offering a projection.  This
    interval (Fieller EC, Some problems in interval estimation, J R Stat Soc B
    1954;16:175-85, from memory, verify; the usual inverse-prediction or
    calibration interval of linear regression) is used instead of one built
    from the slope CI alone because it accounts for the uncertainty of the intercept and
    its correlation with the slope, and has exact coverage under the straight
    line model with normal errors.  It is for the mean line, not for the next
    single measurement (which scatters further by the residual SD).

    Refused (projected_age NaN, with the reason) when the projected crossing lies
    more than ``horizon_years`` (default 3 y, an engineering choice: about one
    recall interval) after the last study.  A fitted line that is already past
    the threshold at the last study although the last value does not meet it is
    reported with status ``"fitted line already past threshold"`` for review.

    Columns (``PROJECTION_COLUMNS``): person, measure, threshold, direction,
    status, projected_age (years), ci_low, ci_high (years; ci_high may lie
    beyond the horizon, which the reason then says), years_after_last
    (projected_age - last_age), reason, caution.
    """
    t = trends
    k = len(t)
    measure = t["measure"].to_numpy(dtype=object)
    if isinstance(threshold, Mapping):
        thr = pd.Series(measure, dtype=object).map(dict(threshold)).to_numpy(dtype=float, na_value=np.nan)
    else:
        thr = np.full(k, float(threshold))
    dirn = _direction(measure, direction)
    n = t["n"].to_numpy(dtype=float)
    b = t["slope"].to_numpy(dtype=float)
    se = t["se_slope"].to_numpy(dtype=float)
    lo = t["ci_low"].to_numpy(dtype=float)
    hi = t["ci_high"].to_numpy(dtype=float)
    abar = t["mean_age"].to_numpy(dtype=float)
    ybar = t["mean_value"].to_numpy(dtype=float)
    sxx = t["sxx"].to_numpy(dtype=float)
    s = t["resid_sd"].to_numpy(dtype=float)
    last_age = t["last_age"].to_numpy(dtype=float)
    last = t["last_value"].to_numpy(dtype=float)
    dsafe = np.nan_to_num(dirn)
    gap = dsafe * (last - thr)  # >= 0: threshold met at last study (in disease direction)
    meets = (gap >= 0) if meets_if_equal else (gap > 0)
    towards_sig = np.where(dsafe > 0, lo > 0, np.where(dsafe < 0, hi < 0, False))

    with np.errstate(divide="ignore", invalid="ignore"):
        dof = np.where(n > 2, n - 2, 1.0)
        tq = t_quantile(0.5 + level / 2.0, dof)
        u0 = (thr - ybar) / b
        g = (tq * se / b) ** 2
        half = (tq * s / np.abs(b)) * np.sqrt(u0 * u0 / sxx + (1.0 - g) / n)
        a0 = abar + u0
        c_lo = abar + (u0 - half) / (1.0 - g)
        c_hi = abar + (u0 + half) / (1.0 - g)
        after = a0 - last_age

    status = np.full(k, "projected", dtype=object)
    reason = np.full(k, "", dtype=object)
    horizon_txt = f"{horizon_years:g}"

    def _set(mask, st, why):
        free = mask & (status == "projected") & (reason == "")
        status[free] = st
        reason[free] = why

    _set(~np.isfinite(dirn), "not applicable", "no direction of disease defined for this measure")
    _set(~np.isfinite(thr), "not applicable", "no threshold given for this measure")
    _set(meets, "not applicable", "threshold already met at the last study")
    _set(~(n >= 3) | ~np.isfinite(se), "not applicable",
         "fewer than 3 studies: no confidence interval for the slope")
    _set(~towards_sig, "not applicable",
         f"slope {level:.0%} CI does not exclude zero in the direction of disease")
    past = (status == "projected") & (reason == "") & (after < 0)
    _set(past, "fitted line already past threshold",
         "fitted line is past the threshold at the last study although the last value is not: review")
    beyond = (status == "projected") & (reason == "") & (after > horizon_years)
    _set(beyond, "refused",
         f"projected crossing lies more than {horizon_txt} years after the last study; "
         "a straight line is not extrapolated that far")
    ok = (status == "projected") | (status == "fitted line already past threshold")
    proj = ok & (status == "projected")
    reason[proj & (c_hi - last_age > horizon_years)] = (
        f"upper limit of the interval lies beyond the {horizon_txt}-year horizon"
    )
    reason[proj & (reason == "")] = "projected from the straight-line fit"
    return pd.DataFrame(
        {
            "person": t["person"].to_numpy(dtype=object),
            "measure": measure,
            "threshold": thr,
            "direction": dirn,
            "status": status,
            "projected_age": np.where(ok, a0, np.nan),
            "ci_low": np.where(ok, c_lo, np.nan),
            "ci_high": np.where(ok, c_hi, np.nan),
            "years_after_last": np.where(ok, after, np.nan),
            "reason": reason,
            "caution": np.full(k, CAUTION, dtype=object),
        },
        columns=PROJECTION_COLUMNS,
    )


def projection(
    trend_row: Mapping[str, object] | pd.Series,
    threshold: float,
    horizon_years: float = DEFAULT_HORIZON_YEARS,
    level: float = 0.95,
    direction: Mapping[str, int] | None = None,
    meets_if_equal: bool = True,
) -> Projection:
    """Projection for one row of ``per_person_ols`` output; see ``project_crossings``.

    Returns a ``Projection`` whose ``age`` is None (with the reason) when no
    projection is offered or it is refused beyond the horizon.
    """
    row = pd.DataFrame([dict(trend_row)])
    r = project_crossings(row, threshold, horizon_years, level, direction, meets_if_equal).iloc[0]

    def _f(v) -> float | None:
        return None if not np.isfinite(v) else float(v)

    return Projection(
        person=str(r["person"]),
        measure=str(r["measure"]),
        threshold=float(r["threshold"]),
        status=str(r["status"]),
        age=_f(r["projected_age"]),
        ci_low=_f(r["ci_low"]),
        ci_high=_f(r["ci_high"]),
        years_after_last=_f(r["years_after_last"]),
        reason=str(r["reason"]),
    )


# --------------------------------------------------------------------------- conversion


CONVERSION_COLUMNS = [
    "person", "n_assessed_studies", "ever_met", "first_met_date", "first_met_age",
    "latest_date", "latest_age", "met_at_latest", "n_not_met_after_first", "status", "caution",
]


def phenotype_conversion(df: pd.DataFrame) -> pd.DataFrame:
    """First study at which each person meets the diagnostic criteria.

    Input: rows with person, study_date, age_years and a boolean column
    ``meets_criteria`` (decided elsewhere, by the chosen guideline's rule set).
    Rows sharing person and study_date form one study date (for example an echo
    and a CMR on the same day); it counts as meeting the criteria if any of its
    rows does.  Rows with missing ``meets_criteria`` are not assessed.

    Returns one row per person (``CONVERSION_COLUMNS``): n_assessed_studies,
    ever_met, first_met_date, first_met_age (years), latest_date, latest_age,
    met_at_latest, n_not_met_after_first (later study dates that did not meet
    them), status, caution.  status is ``"met criteria"``, ``"criteria not met"``,
    or ``REVIEW_MET_EARLIER`` ("review: met criteria earlier but not at latest
    study") when the latest study does not meet criteria met before; such a
    person is never re-labelled automatically.
    """
    missing = [c for c in ("person", "study_date", "age_years", "meets_criteria") if c not in df.columns]
    if missing:
        raise ValueError(f"input frame lacks columns {missing}")
    met = df["meets_criteria"].astype("boolean")
    d = pd.DataFrame(
        {
            "person": df["person"].to_numpy(dtype=object),
            "study_date": df["study_date"].to_numpy(),
            "age_years": pd.to_numeric(df["age_years"]).to_numpy(dtype=float, na_value=np.nan),
            "met": met.to_numpy(dtype=object, na_value=None),
        }
    )
    d = d[d["met"].notna()]
    d["met"] = d["met"].astype(bool)
    studies = (
        d.groupby(["person", "study_date"], sort=True, observed=True)
        .agg(met=("met", "max"), age=("age_years", "min"))
        .reset_index()
    )
    g = studies.groupby("person", sort=True)
    last = g.tail(1).set_index("person")
    firsts = studies[studies["met"]].groupby("person", sort=True).head(1).set_index("person")
    out = pd.DataFrame(index=last.index)
    out["n_assessed_studies"] = g.size()
    out["ever_met"] = g["met"].max().astype(bool)
    out["first_met_date"] = firsts["study_date"].reindex(out.index)
    out["first_met_age"] = firsts["age"].reindex(out.index)
    out["latest_date"] = last["study_date"]
    out["latest_age"] = last["age"]
    out["met_at_latest"] = last["met"].astype(bool)
    first_date = studies["person"].map(out["first_met_date"])
    later_not_met = (~studies["met"]) & first_date.notna() & (studies["study_date"] > first_date)
    out["n_not_met_after_first"] = (
        later_not_met.groupby(studies["person"]).sum().reindex(out.index).astype(np.int64)
    )
    out["status"] = np.where(
        ~out["ever_met"], NEVER_MET, np.where(out["met_at_latest"], MET, REVIEW_MET_EARLIER)
    )
    out["caution"] = CAUTION
    return out.reset_index()[CONVERSION_COLUMNS]


# --------------------------------------------------------------------------- flags


FLAG_COLUMNS = [
    "person", "measure", "direction", "n", "slope", "ci_low", "ci_high",
    "last_change_beyond_towards_disease", "slope_ci_towards_disease", "progressing_beyond_variability",
    "projected_age", "projected_crossing_within_years", "reason", "caution",
]


def progression_flags(
    trends: pd.DataFrame,
    changes: pd.DataFrame,
    projections: pd.DataFrame | None = None,
    within_years: float = DEFAULT_HORIZON_YEARS,
    direction: Mapping[str, int] | None = None,
) -> pd.DataFrame:
    """Flags per (person, measure).

    * progressing_beyond_variability: the last consecutive change is beyond
      measurement variability in the direction of disease (``consecutive_changes``),
      or the slope CI excludes zero in the direction of disease (n >= 3;
      normal-limits.md 7a: with 3 or more scans test the slope).
    * projected_crossing_within_years: ``project_crossings`` gives a crossing no
      later than ``within_years`` after the last study, or reports the fitted line
      already past the threshold.

    Direction of disease per measure: ``DISEASE_DIRECTION`` (wall thickness,
    mass, LA size, ECV, LGE up; e' down; GLS towards zero, i.e. up).  A measure
    without a direction is never flagged.

    Columns (``FLAG_COLUMNS``): person, measure, direction, n, slope, ci_low,
    ci_high, last_change_beyond_towards_disease, slope_ci_towards_disease,
    progressing_beyond_variability, projected_age, projected_crossing_within_years,
    reason (plain text), caution.
    """
    key = list(GROUP_KEYS)
    t = trends[key + ["n", "slope", "ci_low", "ci_high"]].reset_index(drop=True)
    dirn = _direction(t["measure"].to_numpy(dtype=object), direction)
    d = np.nan_to_num(dirn)
    lo = t["ci_low"].to_numpy(dtype=float)
    hi = t["ci_high"].to_numpy(dtype=float)
    slope_flag = np.where(d > 0, lo > 0, np.where(d < 0, hi < 0, False))

    k = len(t)
    proj_frame = projections if projections is not None else t.iloc[:0]
    tkey, ckey, pkey = _key_codes(t, changes, proj_frame)
    tindex = pd.Index(tkey)

    change_flag = np.zeros(k, dtype=bool)
    if len(changes):
        # last change of each series = the one with the greatest to_age
        order = np.lexsort((changes["to_age"].to_numpy(dtype=float), ckey))
        ck = ckey[order]
        last = order[np.r_[ck[1:] != ck[:-1], True]]
        flag = changes["beyond_variability"].to_numpy(dtype=bool)[last] & changes[
            "towards_disease"].to_numpy(dtype=bool)[last]
        pos = tindex.get_indexer(ckey[last])
        change_flag[pos[pos >= 0]] = flag[pos >= 0]
    change_flag &= np.isfinite(dirn)

    proj_age = np.full(k, np.nan)
    proj_flag = np.zeros(k, dtype=bool)
    if len(proj_frame):
        pos = pd.Index(pkey).get_indexer(tkey)  # projections: one row per series
        hit = pos >= 0
        st = np.full(k, "", dtype=object)
        after = np.full(k, np.nan)
        st[hit] = proj_frame["status"].to_numpy(dtype=object)[pos[hit]]
        after[hit] = proj_frame["years_after_last"].to_numpy(dtype=float)[pos[hit]]
        proj_age[hit] = proj_frame["projected_age"].to_numpy(dtype=float)[pos[hit]]
        proj_flag = ((st == "projected") & (after <= within_years)) | (
            st == "fitted line already past threshold")

    progressing = change_flag | slope_flag
    texts = (
        "last change beyond measurement variability towards disease",
        "slope CI excludes zero towards disease",
        f"projected to reach the threshold within {within_years:g} years",
    )
    combos = ["; ".join(x for x, on in zip(texts, (c & 1, c & 2, c & 4)) if on) for c in range(8)]
    combos.append("no direction of disease defined for this measure")
    code = change_flag * 1 + slope_flag * 2 + proj_flag * 4
    code = np.where(np.isfinite(dirn), code, 8)
    reason = np.array(combos, dtype=object)[code]
    return pd.DataFrame(
        {
            "person": t["person"].to_numpy(dtype=object),
            "measure": t["measure"].to_numpy(dtype=object),
            "direction": dirn,
            "n": t["n"].to_numpy(),
            "slope": t["slope"].to_numpy(dtype=float),
            "ci_low": lo,
            "ci_high": hi,
            "last_change_beyond_towards_disease": change_flag,
            "slope_ci_towards_disease": slope_flag,
            "progressing_beyond_variability": progressing,
            "projected_age": proj_age,
            "projected_crossing_within_years": proj_flag,
            "reason": reason,
            "caution": np.full(len(t), CAUTION, dtype=object),
        },
        columns=FLAG_COLUMNS,
    )
