"""Tests of tracker.engines.cohort_model.

References: statsmodels MixedLM (direct call on the same data), statsmodels
``combine_effects(method_re="dl")`` (DerSimonian-Laird), statsmodels WLS for
the meta-regression Q statistic.  All data are invented.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm
import statsmodels.formula.api as smf
from statsmodels.stats.meta_analysis import combine_effects

from tracker.engines import cohort_model as cm
from tracker.engines import trends

TRUE_SLOPE_SD = 0.3  # mm/year, between-person SD of the simulated slopes


def _cohort(seed=0, people=60, slope_sd=TRUE_SLOPE_SD, intercept_sd=1.5, noise_sd=0.8):
    """Relatives aged 20-30 y with 3-6 echo studies; slope 0.3 +/- slope_sd mm/year."""
    rng = np.random.default_rng(seed)
    rows = []
    for i in range(people):
        n = rng.integers(3, 7)
        ages = np.sort(rng.uniform(20, 30, n))
        sex = rng.choice(["female", "male"])
        genotype = rng.choice(["carrier", "non_carrier"])
        b = 0.3 + slope_sd * rng.normal()
        a = 10 + intercept_sd * rng.normal() + (1.0 if sex == "male" else 0.0)
        for x in ages:
            rows.append(
                {"person": f"F{i:03d}", "measure": "mwt_echo", "modality": "echo", "age_years": x,
                 "value": a + b * (x - 25) + noise_sd * rng.normal(), "sex": sex, "genotype": genotype}
            )
    return pd.DataFrame(rows)


@pytest.fixture(scope="module")
def cohort():
    return _cohort()


@pytest.fixture(scope="module")
def mixed(cohort):
    return cm.fit_mixed(cohort, "mwt_echo")


def test_fit_mixed_equals_direct_statsmodels_call(cohort, mixed):
    """Reference: statsmodels MixedLM called directly, same formula and data; 1e-6."""
    assert mixed.model_used == cm.RANDOM_SLOPE and mixed.converged
    data = cohort.copy()
    data["age_c"] = data["age_years"] - data["age_years"].mean()
    ref = smf.mixedlm("value ~ age_c + C(sex) + C(genotype)", data, groups=data["person"],
                      re_formula="~age_c").fit(reml=True)
    assert mixed.age_centre_years == pytest.approx(data["age_years"].mean())
    fe = mixed.fixed_effects.set_index("term")
    for term, est in ref.fe_params.items():
        assert fe.loc[term, "estimate"] == pytest.approx(est, abs=1e-6)
        assert fe.loc[term, "std_error"] == pytest.approx(ref.bse_fe[term], abs=1e-6)
    cov = np.asarray(ref.cov_re)
    vc = mixed.variance_components
    assert vc["intercept_var"] == pytest.approx(cov[0, 0], abs=1e-6)
    assert vc["slope_var"] == pytest.approx(cov[1, 1], abs=1e-6)
    assert vc["intercept_slope_cov"] == pytest.approx(cov[0, 1], abs=1e-6)
    assert vc["residual_var"] == pytest.approx(ref.scale, abs=1e-6)
    pe = mixed.person_effects.set_index("person")
    for person, re in ref.random_effects.items():
        assert pe.loc[person, "random_intercept"] == pytest.approx(re.iloc[0], abs=1e-6)
        assert pe.loc[person, "random_slope"] == pytest.approx(re["age_c"], abs=1e-6)
        assert pe.loc[person, "slope"] == pytest.approx(ref.fe_params["age_c"] + re["age_c"], abs=1e-6)


def test_empirical_bayes_agrees_with_mixed_model_slopes(cohort, mixed):
    """Two-stage empirical Bayes vs MixedLM BLUP slopes on a cohort where MixedLM converges.

    The estimators differ by design (the two-stage one ignores intercept-slope
    covariance and plugs in tau^2), so agreement is approximate.  Tolerances:
    correlation > 0.95, mean absolute difference < 0.1 x the true between-person
    slope SD (0.03 mm/year, a tenth of the spread being estimated), and
    population slopes within 0.02 mm/year.  Seeds 0-7 of this design give
    correlation 0.986-0.996 and mean absolute difference 0.014-0.022.
    """
    eb = cm.empirical_bayes_slopes(cohort)
    m = mixed.person_effects.merge(eb, on="person")
    assert len(m) == cohort["person"].nunique()
    assert np.corrcoef(m["slope"], m["slope_eb"])[0, 1] > 0.95
    assert np.mean(np.abs(m["slope"] - m["slope_eb"])) < 0.1 * TRUE_SLOPE_SD
    fixed_slope = mixed.fixed_effects.set_index("term").loc["age_c", "estimate"]
    assert eb["population_slope"].iloc[0] == pytest.approx(fixed_slope, abs=0.02)
    # shrinkage: EB slopes are less spread than the raw OLS slopes
    assert eb["slope_eb"].std() < eb["slope_ols"].std()


def test_dersimonian_laird_matches_statsmodels(cohort):
    """Reference: statsmodels combine_effects(method_re="dl") on the stage-1 slopes
    and variances (DerSimonian & Laird 1986): tau^2 and random-effects mean, 1e-10."""
    eb = cm.empirical_bayes_slopes(cohort)
    res = combine_effects(eb["slope_ols"].to_numpy(), eb["se_used"].to_numpy() ** 2, method_re="dl")
    assert eb["tau2"].iloc[0] == pytest.approx(res.tau2, rel=1e-10)
    assert eb["population_slope"].iloc[0] == pytest.approx(res.mean_effect_re, rel=1e-10)
    b, v, tau2, mu = eb["slope_ols"], eb["se_used"] ** 2, eb["tau2"], eb["population_slope"]
    expected = mu + tau2 / (tau2 + v) * (b - mu)
    assert np.allclose(eb["slope_eb"], expected, rtol=0, atol=1e-12)


def test_group_means_use_meta_regression_moment_estimator(cohort):
    """With covariate groups, tau^2 = (Q_E - (k - p)) / (tr W - tr((X'WX)^-1 X'W^2X)).
    Reference: Q_E is the weighted residual sum of squares of a statsmodels WLS
    of the slopes on group indicators; the trace term by numpy linear algebra."""
    eb = cm.empirical_bayes_slopes(cohort, by=("sex", "genotype"))
    b = eb["slope_ols"].to_numpy()
    w = 1.0 / eb["se_used"].to_numpy() ** 2
    groups = eb["sex"] + "/" + eb["genotype"]
    x = pd.get_dummies(groups).to_numpy(dtype=float)
    q = sm.WLS(b, x, weights=w).fit().ssr
    k, p = x.shape
    xtwx = x.T @ (w[:, None] * x)
    xtw2x = x.T @ ((w * w)[:, None] * x)
    tau2 = max(0.0, (q - (k - p)) / (w.sum() - np.trace(np.linalg.solve(xtwx, xtw2x))))
    assert eb["tau2"].iloc[0] == pytest.approx(tau2, rel=1e-10)
    wr = 1.0 / (1.0 / w + tau2)
    for g in groups.unique():
        sel = (groups == g).to_numpy()
        mu = np.sum(wr[sel] * b[sel]) / np.sum(wr[sel])
        assert eb.loc[sel, "population_slope"].iloc[0] == pytest.approx(mu, rel=1e-10)


def test_two_study_people_use_pooled_variance_and_own_option():
    df = _cohort(seed=3, people=30)
    first_two = df.groupby("person").head(2)
    df = pd.concat([df[df["person"] != "F000"], first_two[first_two["person"] == "F000"]])
    t = trends.per_person_ols(df)
    dof = t["n"] - 2
    pooled = (t["resid_sd"].fillna(0) ** 2 * dof).sum() / dof.sum()
    for source in ("pooled", "own"):
        eb = cm.empirical_bayes_slopes(df, se_source=source).set_index("person")
        row = t.set_index("person").loc["F000"]
        assert eb.loc["F000", "n"] == 2 and eb.loc["F000", "se_source"] == "pooled"
        assert eb.loc["F000", "se_used"] == pytest.approx(np.sqrt(pooled / row["sxx"]), rel=1e-12)
    own = cm.empirical_bayes_slopes(df, se_source="own").set_index("person")
    assert own.loc["F001", "se_source"] == "own"
    assert own.loc["F001", "se_used"] == pytest.approx(t.set_index("person").loc["F001", "se_slope"], rel=1e-12)


def test_identical_slopes_shrink_fully_to_the_mean():
    """All persons share one exact slope: Q = 0, tau^2 truncated at 0, EB slope = mean."""
    rows = []
    for i in range(10):
        for j, age in enumerate([20.0, 21.0, 22.0, 23.5]):
            rows.append({"person": f"S{i}", "measure": "mwt_echo", "age_years": age + i,
                         "value": 9 + 0.1 * i + 0.2 * (age + i) + 0.01 * (j % 2) * (-1) ** i})
    eb = cm.empirical_bayes_slopes(pd.DataFrame(rows))
    assert (eb["tau2"] == 0).all()
    assert np.allclose(eb["slope_eb"], eb["population_slope"])


def test_fall_back_to_random_intercept_when_slope_model_fails(cohort, monkeypatch):
    real = smf.mixedlm

    def failing(formula, data, groups, re_formula=None):
        if re_formula is not None:
            raise np.linalg.LinAlgError("Singular matrix")
        return real(formula, data, groups=groups, re_formula=re_formula)

    monkeypatch.setattr(cm.smf, "mixedlm", failing)
    fit = cm.fit_mixed(cohort, "mwt_echo")
    assert fit.model_used == cm.RANDOM_INTERCEPT
    assert any("not usable" in m and "Singular matrix" in m for m in fit.messages)
    fixed = fit.fixed_effects.set_index("term").loc["age_c", "estimate"]
    assert np.allclose(fit.person_effects["slope"], fixed)


def test_fall_back_to_per_person_ols(cohort, monkeypatch):
    """Both mixed models fail: unshrunken per-person OLS slopes, said plainly."""

    def failing(formula, data, groups, re_formula=None):
        raise np.linalg.LinAlgError("Singular matrix")

    monkeypatch.setattr(cm.smf, "mixedlm", failing)
    fit = cm.fit_mixed(cohort, "mwt_echo")
    assert fit.model_used == cm.PER_PERSON_OLS and not fit.converged
    assert sum("not usable" in m for m in fit.messages) == 2
    assert any("per-person OLS" in m for m in fit.messages)
    ols = trends.per_person_ols(cohort).set_index("person")
    pe = fit.person_effects.set_index("person")
    assert np.allclose(pe["slope"], ols.loc[pe.index, "slope"], rtol=1e-12)
    assert fit.fixed_effects.empty


def test_boundary_fit_is_rejected_and_warnings_reported():
    """No between-person variation at all: statsmodels returns a random-intercept
    variance of 0 (converged), which the scale-free boundary check rejects."""
    rng = np.random.default_rng(0)
    rows = []
    for i in range(30):
        for x in np.sort(rng.uniform(20, 30, 3)):
            rows.append({"person": f"N{i}", "age_c": x - 25, "value": 10 + 0.5 * rng.normal()})
    data = pd.DataFrame(rows)
    res, texts, problems = cm._try_mixed("value ~ age_c", data, None, True, None)
    assert res.converged and float(np.asarray(res.cov_re)[0, 0]) < 1e-6
    assert any("boundary" in p for p in problems)
    assert any("boundary" in t for t in texts)  # statsmodels' own warning is kept


def test_too_few_repeat_studies_for_a_mixed_model():
    single = pd.DataFrame({"person": ["A", "B"], "measure": "ivsd", "age_years": [30.0, 40.0],
                           "value": [9.0, 10.0]})
    fit = cm.fit_mixed(single, "ivsd")
    assert fit.model_used == cm.PER_PERSON_OLS
    assert any("Too few" in m for m in fit.messages)
    assert fit.person_effects["slope"].isna().all()
