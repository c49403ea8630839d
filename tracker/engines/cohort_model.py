"""Cohort models of serial measurements: a linear mixed model and a fast
two-stage empirical-Bayes estimate of each person's slope.

Input: the long frame of ``tracker.engines.trends`` (person, measure,
modality, age_years, study_date, value, optional z, sex, genotype).  Series
are keyed by (person, measure); one measure is modelled at a time, so echo
and CMR wall thickness (mwt_echo, mwt_cmr) are never pooled.

Slopes are in the catalogue unit of the measure per year of age (or z per
year for ``y="z"``).  Decision support only: the treating clinician decides;
follow local protocols and the current guideline.
"""

from __future__ import annotations

import warnings
from collections.abc import Sequence
from dataclasses import dataclass, field

import numpy as np
import pandas as pd
import statsmodels.formula.api as smf

from tracker.engines import trends

RANDOM_SLOPE = "random intercept and slope"
RANDOM_INTERCEPT = "random intercept only"
PER_PERSON_OLS = "per-person OLS"

FIXED_COLUMNS = ["term", "estimate", "std_error", "ci_low", "ci_high", "p_value"]
PERSON_COLUMNS = ["person", "n", "random_intercept", "random_slope", "fixed_slope", "slope"]


@dataclass(frozen=True)
class MixedFit:
    """Result of ``fit_mixed``.

    model_used: ``RANDOM_SLOPE``, ``RANDOM_INTERCEPT`` or ``PER_PERSON_OLS``.
    fixed_effects: columns term, estimate, std_error, ci_low, ci_high, p_value
        (95% Wald intervals); the age term ``age_c`` is the population slope per
        year; empty for the per-person OLS fall-back.
    variance_components: intercept_var, slope_var, intercept_slope_cov,
        residual_var (squared units; NaN where not estimated).
    person_effects: one row per person, columns person, n (studies),
        random_intercept, random_slope (BLUPs, deviations from the fixed
        effects), fixed_slope (the population age slope) and slope, the
        person's shrunken slope = fixed_slope + random_slope.  For the
        random-intercept model every slope equals the fixed slope; for the
        OLS fall-back slope is the unshrunken per-person OLS slope.
    warnings: every warning raised while fitting, prefixed by the model tried.
    messages: plain-language account of what was tried and used.
    """

    measure: str
    variable: str
    model_used: str
    converged: bool
    formula: str
    re_formula: str | None
    age_centre_years: float
    n_people: int
    n_observations: int
    fixed_effects: pd.DataFrame
    variance_components: dict[str, float]
    person_effects: pd.DataFrame
    warnings: tuple[str, ...] = ()
    messages: tuple[str, ...] = field(default_factory=tuple)
    caution: str = trends.CAUTION


def _prepare(df, measure, y, covariates, age_centre):
    d = df[df["measure"] == measure]
    age = pd.to_numeric(d["age_years"]).to_numpy(dtype=float, na_value=np.nan)
    yy = pd.to_numeric(d[y]).to_numpy(dtype=float, na_value=np.nan)
    keep = np.isfinite(age) & np.isfinite(yy)
    d = d.iloc[np.flatnonzero(keep)]
    centre = float(np.mean(age[keep])) if age_centre is None else float(age_centre)
    data = pd.DataFrame(
        {"person": d["person"].astype(str).to_numpy(), "age_c": age[keep] - centre, y: yy[keep]}
    )
    terms, notes = [], []
    for c in covariates:
        if c not in d.columns:
            notes.append(f"{c} not in the data: not adjusted for.")
            continue
        col = d[c].astype(object).where(d[c].notna(), "unknown").astype(str).to_numpy()
        if len(set(col)) < 2:
            notes.append(f"{c} has a single level: not adjusted for.")
            continue
        if (col == "unknown").any():
            notes.append(f"{c} missing for some rows: coded as level 'unknown'.")
        data[c] = col
        terms.append(f"C({c})")
    formula = f"{y} ~ age_c" + "".join(f" + {t}" for t in terms)
    return data, centre, formula, notes


#: A random-effect variance below this fraction of its reference (see
#: ``_degenerate``) is treated as zero: the fit sits on the boundary.
#: Engineering choice.
BOUNDARY_FRACTION = 1e-4


def _degenerate(res, data) -> list[str]:
    """Scale-free boundary check of the random-effects covariance.

    Reference for the intercept variance: the residual variance; for the slope
    variance: the sampling variance of a typical person's OLS slope
    (residual variance / median per-person sum of squared age deviations).
    """
    cov = np.asarray(res.cov_re, dtype=float)
    scale = float(res.scale)
    out = []
    if cov[0, 0] < BOUNDARY_FRACTION * scale:
        out.append("random-intercept variance is at zero (boundary)")
    if cov.shape[0] > 1:
        dev = data["age_c"] - data.groupby("person")["age_c"].transform("mean")
        sxx = (dev * dev).groupby(data["person"]).sum()
        ref = scale / float(np.median(sxx[sxx > 0])) if (sxx > 0).any() else scale
        if cov[1, 1] < BOUNDARY_FRACTION * ref:
            out.append("random-slope variance is at zero (boundary)")
        elif cov[0, 0] > 0 and abs(cov[0, 1]) / np.sqrt(cov[0, 0] * cov[1, 1]) > 1 - BOUNDARY_FRACTION:
            out.append("random intercept and slope are perfectly correlated (boundary)")
    return out


def _try_mixed(formula, data, re_formula, reml, method):
    """Fit one MixedLM; return (result or None, warning texts, reasons it is not usable).

    Not usable: an exception, ``converged`` False, a non-positive-definite
    Hessian, non-finite estimates, or a degenerate random-effects covariance.
    Intermediate warnings from optimisers that statsmodels retries are
    reported but do not reject a fit whose final optimiser converged.
    """
    label = RANDOM_SLOPE if re_formula else RANDOM_INTERCEPT
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        try:
            model = smf.mixedlm(formula, data, groups=data["person"], re_formula=re_formula)
            res = model.fit(reml=reml) if method is None else model.fit(reml=reml, method=method)
        except Exception as exc:  # numerical failure: report, fall back
            texts = [f"{label}: {w.category.__name__}: {w.message}" for w in caught]
            return None, texts, [f"{type(exc).__name__}: {exc}"]
    texts = [f"{label}: {w.category.__name__}: {w.message}" for w in caught]
    problems = []
    if not res.converged:
        problems.append("the optimiser did not converge")
    if any("Hessian" in str(w.message) and "not positive definite" in str(w.message) for w in caught):
        problems.append("the Hessian at the estimate is not positive definite")
    if not (np.all(np.isfinite(res.fe_params)) and np.all(np.isfinite(np.asarray(res.cov_re)))):
        problems.append("non-finite estimates")
    if not problems:
        problems.extend(_degenerate(res, data))
    return res, texts, problems


def _fixed_table(res) -> pd.DataFrame:
    names = list(res.fe_params.index)
    ci = res.conf_int().loc[names]
    return pd.DataFrame(
        {
            "term": names,
            "estimate": res.fe_params.to_numpy(dtype=float),
            "std_error": res.bse_fe.loc[names].to_numpy(dtype=float),
            "ci_low": ci.iloc[:, 0].to_numpy(dtype=float),
            "ci_high": ci.iloc[:, 1].to_numpy(dtype=float),
            "p_value": res.pvalues.loc[names].to_numpy(dtype=float),
        },
        columns=FIXED_COLUMNS,
    )


def _person_table(res, data, random_slope: bool) -> pd.DataFrame:
    re = pd.DataFrame.from_dict(res.random_effects, orient="index")
    fixed_slope = float(res.fe_params["age_c"])
    ri = re.iloc[:, 0].to_numpy(dtype=float)
    rs = re["age_c"].to_numpy(dtype=float) if random_slope else np.zeros(len(re))
    n = data.groupby("person").size().reindex(re.index).to_numpy()
    return pd.DataFrame(
        {
            "person": re.index.astype(str).to_numpy(dtype=object),
            "n": n,
            "random_intercept": ri,
            "random_slope": rs,
            "fixed_slope": np.full(len(re), fixed_slope),
            "slope": fixed_slope + rs,
        },
        columns=PERSON_COLUMNS,
    )


def fit_mixed(
    df: pd.DataFrame,
    measure: str,
    y: str = "value",
    covariates: Sequence[str] = ("sex", "genotype"),
    age_centre: float | None = None,
    reml: bool = True,
    method: str | Sequence[str] | None = None,
) -> MixedFit:
    """Linear mixed model of one measure over age, with fall-backs.

    Model (statsmodels MixedLM, REML by default), rows of ``measure`` only,
    grouped by person (the key is (person, measure)):

        y ~ age_c + C(sex) + C(genotype),  random intercept and random age_c slope
        per person (re_formula "~age_c", unstructured 2x2 covariance),

    age_c = age_years - ``age_centre`` (default: mean age of the rows used),
    years.  sex / genotype enter only when present with at least two levels;
    missing values are coded "unknown".  The person's shrunken slope is the
    fixed age slope plus the person's random-slope BLUP.

    Convergence: every warning is captured and returned.  The fit is taken as
    failed (and the next model tried) when the optimiser does not converge,
    raises, statsmodels reports a non-positive-definite Hessian, or a
    random-effect variance is at zero (or the intercept-slope correlation at
    +/-1) by a scale-free check (``BOUNDARY_FRACTION``).  statsmodels' own
    "MLE may be on the boundary" warning uses an absolute threshold (a
    variance below 0.01 squared units, which depends on the unit), so it is
    reported but does not by itself reject the fit.
    Order: random intercept and slope -> random intercept only -> per-person
    OLS (``trends.per_person_ols``, unshrunken); ``model_used`` and
    ``messages`` say which was used.
    ``method`` is passed to ``MixedLM.fit`` (statsmodels' default when None).
    """
    data, centre, formula, notes = _prepare(df, measure, y, covariates, age_centre)
    n_people = int(data["person"].nunique())
    all_warnings: list[str] = []
    messages: list[str] = list(notes)
    fit_kw = {} if method is None else {"method": method}

    if n_people >= 2 and len(data) > n_people:
        for re_formula, label in (("~age_c", RANDOM_SLOPE), (None, RANDOM_INTERCEPT)):
            res, texts, problems = _try_mixed(formula, data, re_formula, reml, fit_kw.get("method"))
            all_warnings.extend(texts)
            if res is not None and not problems:
                messages.append(f"Used the {label} mixed model.")
                cov = np.asarray(res.cov_re, dtype=float)
                vc = {
                    "intercept_var": float(cov[0, 0]),
                    "slope_var": float(cov[1, 1]) if cov.shape[0] > 1 else float("nan"),
                    "intercept_slope_cov": float(cov[0, 1]) if cov.shape[0] > 1 else float("nan"),
                    "residual_var": float(res.scale),
                }
                if label == RANDOM_INTERCEPT:
                    messages.append(
                        "No between-person slope variation was estimated: every person's slope "
                        "equals the population slope."
                    )
                return MixedFit(
                    measure=measure, variable=y, model_used=label, converged=True, formula=formula,
                    re_formula=re_formula, age_centre_years=centre, n_people=n_people,
                    n_observations=len(data), fixed_effects=_fixed_table(res),
                    variance_components=vc,
                    person_effects=_person_table(res, data, random_slope=re_formula is not None),
                    warnings=tuple(all_warnings), messages=tuple(messages),
                )
            messages.append(f"The {label} mixed model was not usable: " + "; ".join(problems) + ".")
    else:
        messages.append("Too few people or repeat studies for a mixed model.")

    ols_input = pd.DataFrame(
        {"person": data["person"], "measure": measure, "age_years": data["age_c"] + centre, y: data[y]}
    )
    ols = trends.per_person_ols(ols_input, y=y)
    messages.append("Used per-person OLS slopes (not shrunk towards the population).")
    person = pd.DataFrame(
        {
            "person": ols["person"].to_numpy(dtype=object),
            "n": ols["n"].to_numpy(),
            "random_intercept": np.nan,
            "random_slope": np.nan,
            "fixed_slope": np.nan,
            "slope": ols["slope"].to_numpy(dtype=float),
        },
        columns=PERSON_COLUMNS,
    )
    nan = float("nan")
    return MixedFit(
        measure=measure, variable=y, model_used=PER_PERSON_OLS, converged=False, formula=formula,
        re_formula=None, age_centre_years=centre, n_people=n_people, n_observations=len(data),
        fixed_effects=pd.DataFrame(columns=FIXED_COLUMNS),
        variance_components={"intercept_var": nan, "slope_var": nan, "intercept_slope_cov": nan,
                             "residual_var": nan},
        person_effects=person, warnings=tuple(all_warnings), messages=tuple(messages),
    )


# --------------------------------------------------------------------------- empirical Bayes

EB_COLUMNS = [
    "person", "measure", "n", "slope_ols", "se_used", "se_source", "population_slope", "tau2",
    "shrinkage_weight", "slope_eb", "se_eb", "k_people",
]


def empirical_bayes_slopes(
    df: pd.DataFrame,
    measure: str | None = None,
    by: Sequence[str] = (),
    y: str = "value",
    se_source: str = "pooled",
) -> pd.DataFrame:
    """Two-stage empirical-Bayes slopes per (person, measure), vectorised.

    Stage 1: per-person OLS slope b_i over age (``trends.per_person_ols``),
    with sampling variance v_i = s^2 / Sxx_i.  s^2 is

    * ``se_source="pooled"`` (default): the measure's pooled residual variance
      sum(SSE_i) / sum(n_i - 2) over people with >= 3 studies, for everybody.
      Measurement error is a property of the method, not the person (the same
      assumption as the single Sw behind the LSC and as MixedLM's one residual
      variance), and a person's own s^2 from 1-2 degrees of freedom is too noisy
      to weight by;
    * ``se_source="own"``: the person's own residual variance when n_i >= 3.

    People with exactly 2 studies always use the pooled variance (they have no
    residual degrees of freedom).  People with fewer than 2 studies are left out.

    Stage 2, per measure (and per covariate group given by the ``by`` columns,
    e.g. ``("sex", "genotype")``): w_i = 1 / v_i; fixed-effect group means
    m_g = sum(w b) / sum(w); Q = sum w_i (b_i - m_g(i))^2 with k people and G
    groups; the method-of-moments between-person slope variance

        tau^2 = max(0, (Q - (k - G)) / (sum w - sum_g [sum_g w^2 / sum_g w]))

    which for G = 1 is the DerSimonian-Laird estimator (DerSimonian R, Laird N,
    Meta-analysis in clinical trials, Control Clin Trials 1986;7:177-88) and for
    G > 1 its usual meta-regression form with group indicators (method of
    moments; e.g. Thompson SG, Sharp SJ, Stat Med 1999;18:2693-708, from memory,
    verify).  Population (group) mean mu_g = sum(b / (v + tau^2)) / sum(1 / (v + tau^2)).
    Shrinkage weight B_i = tau^2 / (tau^2 + v_i) and

        slope_eb_i = mu_g + B_i (b_i - mu_g),   se_eb_i = sqrt(B_i v_i)

    (se_eb ignores the uncertainty of mu_g and tau^2, so it is a little small
    for small cohorts).  With tau^2 = 0 every slope equals mu_g.  A measure with
    k <= G people (or no person with >= 3 studies for the pooled variance) has
    NaN tau^2 and slope_eb.

    Columns (``EB_COLUMNS`` plus the ``by`` columns after measure): person,
    measure, n, slope_ols, se_used, se_source ("own"/"pooled"),
    population_slope (mu_g), tau2, shrinkage_weight (B_i), slope_eb, se_eb,
    k_people (people with a slope in the measure).  Units: catalogue unit per
    year (z per year for ``y="z"``).
    """
    if se_source not in ("pooled", "own"):
        raise ValueError("se_source must be 'pooled' or 'own'")
    d = df if measure is None else df[df["measure"] == measure]
    return empirical_bayes_from_ols(trends.per_person_ols(d, y=y), d, by, se_source)


def empirical_bayes_from_ols(
    ols: pd.DataFrame, d: pd.DataFrame | None = None, by: Sequence[str] = (), se_source: str = "pooled"
) -> pd.DataFrame:
    """Stage 2 of :func:`empirical_bayes_slopes` from the stage-1 table (``trends.per_person_ols``
    output: person, measure, n, slope, sxx, resid_sd), so that a cohort's stage-1 rows computed a
    batch of families at a time give the same result as one pass (given in the same row order).
    ``d`` (the measurement frame) is needed only for ``by`` columns."""
    if se_source not in ("pooled", "own"):
        raise ValueError("se_source must be 'pooled' or 'own'")
    by = list(by)
    t = ols[(ols["n"] >= 2) & np.isfinite(ols["slope"])].reset_index(drop=True)
    if by:
        missing = [c for c in by if c not in d.columns]
        if missing:
            raise ValueError(f"input frame lacks columns {missing}")
        tkey, dkey = trends._key_codes(t, d)
        attrs = d[by].groupby(dkey).first().reindex(tkey)  # first non-missing value per series
        for c in by:
            t[c] = attrs[c].astype(object).where(attrs[c].notna(), "unknown").to_numpy(dtype=object)

    n = t["n"].to_numpy(dtype=float)
    dof = np.where(n >= 3, n - 2.0, 0.0)
    own_s2 = t["resid_sd"].to_numpy(dtype=float) ** 2
    sse = np.where(n >= 3, own_s2 * dof, 0.0)
    meas = t["measure"]
    pooled_s2 = (
        pd.Series(sse).groupby(meas).transform("sum") / pd.Series(dof).groupby(meas).transform("sum")
    ).to_numpy(dtype=float)
    sxx = t["sxx"].to_numpy(dtype=float)
    use_own = (se_source == "own") & (n >= 3) & (own_s2 > 0)
    s2 = np.where(use_own, own_s2, pooled_s2)
    with np.errstate(divide="ignore", invalid="ignore"):
        v = s2 / sxx
        w = 1.0 / v
    b = t["slope"].to_numpy(dtype=float)

    gkeys = [meas] + [t[c] for c in by]
    work = pd.DataFrame({"w": w, "wb": w * b, "w2": w * w})
    sw_g = work["w"].groupby(gkeys).transform("sum").to_numpy()
    swb_g = work["wb"].groupby(gkeys).transform("sum").to_numpy()
    sw2_g = work["w2"].groupby(gkeys).transform("sum").to_numpy()
    m_fe = swb_g / sw_g
    q_i = w * (b - m_fe) ** 2
    gsize = work["w"].groupby(gkeys).transform("size").to_numpy(dtype=float)
    per = pd.DataFrame(
        {
            "q": q_i,
            "w": w,
            "one": 1.0,
            "g_term": (sw2_g / sw_g) / gsize,  # sums to sum_g(sum w^2 / sum w) within a measure
            "g_count": 1.0 / gsize,  # sums to the number of groups G within a measure
        }
    )
    tot = per.groupby(meas).transform("sum")
    k = tot["one"].to_numpy()
    n_groups = tot["g_count"].to_numpy()
    denom = tot["w"].to_numpy() - tot["g_term"].to_numpy()
    with np.errstate(divide="ignore", invalid="ignore"):
        tau2 = np.where(k - n_groups > 0, np.maximum(0.0, (tot["q"].to_numpy() - (k - n_groups)) / denom), np.nan)
        w_re = 1.0 / (v + tau2)
    re = pd.DataFrame({"w": w_re, "wb": w_re * b})
    mu = (re["wb"].groupby(gkeys).transform("sum") / re["w"].groupby(gkeys).transform("sum")).to_numpy()
    with np.errstate(divide="ignore", invalid="ignore"):
        shrink = np.where(tau2 + v > 0, tau2 / (tau2 + v), np.nan)
    slope_eb = mu + shrink * (b - mu)
    se_eb = np.sqrt(shrink * v)
    out = pd.DataFrame(
        {
            "person": t["person"].to_numpy(dtype=object),
            "measure": meas.to_numpy(dtype=object),
            **{c: t[c].to_numpy(dtype=object) for c in by},
            "n": t["n"].to_numpy(),
            "slope_ols": b,
            "se_used": np.sqrt(v),
            "se_source": np.where(use_own, "own", "pooled").astype(object),
            "population_slope": mu,
            "tau2": tau2,
            "shrinkage_weight": shrink,
            "slope_eb": slope_eb,
            "se_eb": se_eb,
            "k_people": k.astype(np.int64),
        }
    )
    return out[EB_COLUMNS[:2] + by + EB_COLUMNS[2:]]
