"""Tests of tracker.engines.trends and tracker.engines.repeatability.

References named beside each check: statsmodels OLS (reference library),
Bland & Altman repeatability coefficient (normal-limits.md 7a, check 18),
normal-limits.md 9 check 19 (GLS change), Fieller inverse-prediction interval
checked against statsmodels' confidence band of the mean line.  All data are
invented.
"""

from __future__ import annotations

import datetime as dt
import math

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm

from tracker.engines import repeatability as rep
from tracker.engines import trends


def _series_frame(person, measure, ages, values, modality="echo", **extra):
    base = dt.date(2000, 1, 1)
    return pd.DataFrame(
        {
            "person": person,
            "measure": measure,
            "modality": modality,
            "age_years": np.asarray(ages, dtype=float),
            "study_date": [base + dt.timedelta(days=int(round(a * 365.2425))) for a in ages],
            "value": np.asarray(values, dtype=float),
            **extra,
        }
    )


def _random_cohort(seed=11, people=70):
    rng = np.random.default_rng(seed)
    frames = []
    for i in range(people):
        n = 2 + i % 7  # sizes 2..8, each size present
        ages = np.sort(rng.uniform(8, 60, n))
        vals = 9 + rng.normal(0, 0.3) * ages + rng.normal(0, 1.2, n)
        frames.append(_series_frame(f"R{i:03d}", "mwt_echo", ages, vals))
        if i % 3 == 0:  # a second measure for some people: separate series
            frames.append(_series_frame(f"R{i:03d}", "gls", ages, -20 + 0.1 * ages + rng.normal(0, 1, n)))
    df = pd.concat(frames, ignore_index=True)
    return df.sample(frac=1.0, random_state=seed).reset_index(drop=True)  # shuffled rows


# ---------------------------------------------------------------- per-person OLS


def test_per_person_ols_equals_statsmodels_ols_person_by_person():
    """Reference: statsmodels OLS fitted to each (person, measure) series, tolerance 1e-9."""
    df = _random_cohort()
    out = trends.per_person_ols(df)
    assert len(out) == df.groupby(["person", "measure"]).ngroups
    assert set(out["n"]) == set(range(2, 9))
    checked_n2 = checked_n3 = 0
    for _, r in out.iterrows():
        sub = df[(df["person"] == r["person"]) & (df["measure"] == r["measure"])]
        fit = sm.OLS(sub["value"].to_numpy(), sm.add_constant(sub["age_years"].to_numpy())).fit()
        assert r["n"] == len(sub)
        assert r["slope"] == pytest.approx(fit.params[1], rel=1e-9, abs=1e-9)
        assert r["intercept"] == pytest.approx(fit.params[0], rel=1e-9, abs=1e-9)
        if r["n"] == 2:
            checked_n2 += 1
            for c in ("se_slope", "se_intercept", "ci_low", "ci_high", "p_value", "resid_sd"):
                assert math.isnan(r[c]), c
            continue
        checked_n3 += r["n"] == 3
        ci = fit.conf_int(alpha=0.05)
        assert r["se_slope"] == pytest.approx(fit.bse[1], rel=1e-9, abs=1e-9)
        assert r["se_intercept"] == pytest.approx(fit.bse[0], rel=1e-9, abs=1e-9)
        assert r["ci_low"] == pytest.approx(ci[1, 0], rel=1e-9, abs=1e-9)
        assert r["ci_high"] == pytest.approx(ci[1, 1], rel=1e-9, abs=1e-9)
        assert r["p_value"] == pytest.approx(fit.pvalues[1], rel=1e-9, abs=1e-9)
        assert r["t"] == pytest.approx(fit.tvalues[1], rel=1e-9, abs=1e-9)
        assert r["resid_sd"] == pytest.approx(math.sqrt(fit.scale), rel=1e-9, abs=1e-9)
        assert r["first_age"] == pytest.approx(sub["age_years"].min())
        assert r["last_value"] == pytest.approx(sub.loc[sub["age_years"].idxmax(), "value"])
    assert checked_n2 > 5 and checked_n3 > 5


def test_single_study_has_no_slope_and_echo_cmr_stay_separate():
    df = pd.concat(
        [
            _series_frame("A", "mwt_echo", [30.0], [11.0]),
            _series_frame("A", "mwt_cmr", [30.0, 32.0, 34.0], [9.0, 9.5, 10.5], modality="cmr"),
        ]
    )
    out = trends.per_person_ols(df).set_index("measure")
    assert out.loc["mwt_echo", "n"] == 1 and math.isnan(out.loc["mwt_echo", "slope"])
    assert out.loc["mwt_cmr", "n"] == 3
    # slope of (30,9),(32,9.5),(34,10.5): Sxy/Sxx = 6/8 (hand calculation)
    assert out.loc["mwt_cmr", "slope"] == pytest.approx(0.375)


def test_mixed_modalities_in_one_series_are_refused():
    df = _series_frame("A", "mwt_echo", [30.0, 31.0, 32.0], [11.0, 12.0, 12.5])
    df.loc[1, "modality"] = "cmr"
    with pytest.raises(ValueError, match="never pooled"):
        trends.per_person_ols(df)


def test_duplicate_study_is_refused():
    df = _series_frame("A", "ivsd", [30.0, 30.0, 32.0], [11.0, 12.0, 12.5])
    with pytest.raises(ValueError, match="same age"):
        trends.per_person_ols(df)


def test_z_slope_for_children_uses_child_rows_and_one_reference_set():
    ages = [8.0, 10.0, 12.0, 14.0, 19.0]
    z = [0.5, 1.0, np.nan, 2.0, 3.0]
    df = _series_frame("K", "ivsd", ages, [7, 8, 9, 10, 12], z=z, z_model="PHN")
    out = trends.per_person_z_ols(df)
    assert out.loc[0, "variable"] == "z" and out.loc[0, "n"] == 3  # NaN z and the adult study left out
    ref = sm.OLS(np.array([0.5, 1.0, 2.0]), sm.add_constant(np.array([8.0, 10.0, 14.0]))).fit()
    assert out.loc[0, "slope"] == pytest.approx(ref.params[1], rel=1e-9)  # statsmodels OLS
    df.loc[1, "z_model"] = "Detroit"
    with pytest.raises(ValueError, match="reference sets"):
        trends.per_person_z_ols(df)


def test_slope_interval_covers_true_slope_at_nominal_rate():
    """2,000 simulated relatives with slope 0.4 mm/year and noise SD 1.0 mm: the
    95% t interval (n - 2 df) should cover the true slope in ~95%; with 2,000
    people the binomial SE is 0.005, so 0.93-0.97 is +/- 4 SE."""
    rng = np.random.default_rng(20240611)
    people = 2000
    n = rng.integers(3, 9, people)
    person = np.repeat([f"S{i:04d}" for i in range(people)], n)
    start = np.repeat(rng.uniform(10, 50, people), n)
    age = start + rng.uniform(0, 6, n.sum())
    value = 8.0 + 0.4 * (age - start) + rng.normal(0, 1.0, n.sum())
    df = pd.DataFrame({"person": person, "measure": "mwt_echo", "modality": "echo",
                       "age_years": age, "value": value})
    out = trends.per_person_ols(df)
    cover = ((out["ci_low"] <= 0.4) & (0.4 <= out["ci_high"])).mean()
    assert 0.93 <= cover <= 0.97


# ---------------------------------------------------------------- repeatability


def test_lsc_factor_check_18():
    """normal-limits.md 9, check 18: Sw 1.0 mm -> RC 2.77 mm (1.96 x sqrt(2) = 2.772)."""
    assert rep.lsc_from_sw(1.0) == pytest.approx(2.77, abs=0.01)
    assert rep.LSC_FACTOR == pytest.approx(2.7719, abs=1e-4)


def test_repeatability_table_sources_and_placeholders():
    table = rep.load_repeatability()
    # GLS SEM 1.28 points, Am J Cardiol 2016;118:930-5 [V] (normal-limits.md 7b)
    assert table["gls"].sw == 1.28 and table["gls"].tag == "V"
    assert rep.lsc("gls", table) == pytest.approx(2.7719 * 1.28, abs=1e-3)
    for m in ("mwt_echo", "ivsd", "lvpwd", "mwt_cmr"):  # normal-limits.md 7c.1
        assert table[m].status == "placeholder"
    assert rep.lsc("ecv", table) is None
    for r in table.values():
        assert r.source and r.tag
    # LV mass CV 4% (Gommans 2016) -> relative LSC 2.77 x 4%
    assert table["lvmi_cmr"].lsc_relative == pytest.approx(0.1109, abs=1e-4)


def test_clinic_values_replace_defaults():
    table = rep.load_repeatability({"mwt_echo": 0.8, "ecv": {"sw": 1.5, "source": "own lab 2025"}})
    assert table["mwt_echo"].status == "clinic" and table["mwt_echo"].sw == 0.8
    assert table["mwt_echo"].lsc == pytest.approx(0.8 * 2.7719, abs=1e-3)
    assert table["ecv"].source == "own lab 2025" and table["ecv"].lsc == pytest.approx(4.158, abs=1e-3)
    lt = rep.lsc_table(table).set_index("measure")
    assert lt.loc["mwt_echo", "status"] == "clinic"
    with pytest.raises(ValueError):
        rep.load_repeatability({"gls": {"sd": 1.0}})


# ---------------------------------------------------------------- consecutive changes


def test_change_inside_lsc_not_flagged_beyond_flagged():
    """LSC 2.77 mm (Sw 1.0 mm, check 18): +2.0 mm is within, +3.0 mm beyond."""
    df = _series_frame("A", "mwt_echo", [30.0, 31.0, 32.0], [10.0, 12.0, 15.0])
    ch = trends.consecutive_changes(df, {"mwt_echo": rep.lsc_from_sw(1.0)})
    assert list(ch["delta"]) == pytest.approx([2.0, 3.0])
    assert list(ch["beyond_variability"]) == [False, True]
    assert list(ch["variability"]) == [trends.WITHIN, trends.BEYOND]
    assert ch["towards_disease"].all()


def test_gls_change_check_19_and_e_prime_relative_limit():
    """normal-limits.md 9 check 19: GLS -19.0 -> -15.5 = 3.5 points and 18.4% relative: flag.
    e' limit 20% relative (normal-limits.md 7c.3): 10 -> 8.5 within, 8.5 -> 6.5 beyond."""
    df = pd.concat(
        [
            _series_frame("A", "gls", [40.0, 41.0], [-19.0, -15.5]),
            _series_frame("A", "e_prime_septal", [40.0, 41.0, 42.0], [10.0, 8.5, 6.5]),
            _series_frame("A", "lvidd", [40.0, 41.0], [45.0, 60.0]),
        ]
    )
    ch = trends.consecutive_changes(df).set_index(["measure", "to_age"])
    g = ch.loc[("gls", 41.0)]
    assert g["delta"] == pytest.approx(3.5) and g["relative_change"] == pytest.approx(0.184, abs=1e-3)
    assert g["beyond_variability"] and g["towards_disease"]  # towards zero = towards disease
    assert not ch.loc[("e_prime_septal", 41.0), "beyond_variability"]
    e = ch.loc[("e_prime_septal", 42.0)]
    assert e["beyond_variability"] and e["towards_disease"]  # e' falls with disease
    lv = ch.loc[("lvidd", 41.0)]
    assert lv["variability"] == trends.NO_LIMIT and not lv["beyond_variability"]
    assert not lv["towards_disease"]


# ---------------------------------------------------------------- projection


def _line_with_orthogonal_noise(threshold_measure="mwt_echo", b=0.5, a30=10.0):
    # residual pattern orthogonal to (1, age): the OLS line is exactly a30 + b (age - 30)
    ages = np.array([30.0, 31.0, 32.0, 33.0, 34.0])
    noise = 0.05 * np.array([1.0, -2.0, 0.0, 2.0, -1.0])
    return _series_frame("P", threshold_measure, ages, a30 + b * (ages - 30) + noise)


def test_projection_crosses_at_expected_age_with_fieller_interval():
    df = _line_with_orthogonal_noise()
    t = trends.per_person_ols(df)
    assert t.loc[0, "slope"] == pytest.approx(0.5, abs=1e-12)
    p = trends.projection(t.iloc[0], 13.0)  # 10 + 0.5 (a - 30) = 13  ->  a = 36
    assert p.status == "projected" and p.age == pytest.approx(36.0, abs=1e-9)
    assert p.years_after_last == pytest.approx(2.0, abs=1e-9)
    # Reference: statsmodels' 95% confidence band of the mean line reaches 13 mm
    # exactly at the Fieller limits (the definition of the inverse-prediction interval).
    fit = sm.OLS(df["value"].to_numpy(), sm.add_constant(df["age_years"].to_numpy())).fit()
    band = fit.get_prediction(np.array([[1.0, p.ci_low], [1.0, p.ci_high]])).summary_frame(alpha=0.05)
    assert band["mean_ci_upper"].iloc[0] == pytest.approx(13.0, abs=1e-9)
    assert band["mean_ci_lower"].iloc[1] == pytest.approx(13.0, abs=1e-9)
    assert p.ci_low < p.age < p.ci_high
    assert "clinician" in p.caution


def test_projection_beyond_horizon_refused_and_preconditions():
    t = trends.per_person_ols(_line_with_orthogonal_noise())
    far = trends.projection(t.iloc[0], 16.0)  # crossing at 42 y = 8 y after the last study
    assert far.age is None and far.status == "refused" and "3 years" in far.reason
    longer = trends.projection(t.iloc[0], 16.0, horizon_years=10.0)
    assert longer.age == pytest.approx(42.0, abs=1e-9)
    met = trends.projection(t.iloc[0], 11.0)
    assert met.age is None and "already met" in met.reason
    flat = trends.per_person_ols(_line_with_orthogonal_noise(b=0.0))
    assert trends.projection(flat.iloc[0], 13.0).age is None
    two = trends.per_person_ols(_series_frame("Q", "mwt_echo", [30.0, 31.0], [10.0, 12.0]))
    assert "fewer than 3" in trends.projection(two.iloc[0], 13.0).reason


def test_projection_for_a_falling_measure():
    """e' falls with disease: line 12 - 0.5 (a - 30) reaches 9 cm/s at 36 y."""
    df = _line_with_orthogonal_noise("e_prime_septal", b=-0.5, a30=12.0)
    t = trends.per_person_ols(df)
    pr = trends.project_crossings(t, {"e_prime_septal": 9.0})
    assert pr.loc[0, "status"] == "projected"
    assert pr.loc[0, "projected_age"] == pytest.approx(36.0, abs=1e-9)
    fit = sm.OLS(df["value"].to_numpy(), sm.add_constant(df["age_years"].to_numpy())).fit()
    band = fit.get_prediction(np.array([[1.0, pr.loc[0, "ci_low"]], [1.0, pr.loc[0, "ci_high"]]]))
    frame = band.summary_frame(alpha=0.05)
    assert frame["mean_ci_lower"].iloc[0] == pytest.approx(9.0, abs=1e-9)
    assert frame["mean_ci_upper"].iloc[1] == pytest.approx(9.0, abs=1e-9)


# ---------------------------------------------------------------- conversion


def test_phenotype_conversion_first_meeting_and_review_flag():
    d = dt.date
    df = pd.DataFrame(
        {
            "person": ["A", "A", "B", "B", "B", "C", "C", "C", "C", "D"],
            "study_date": [d(2018, 1, 5), d(2021, 1, 5), d(2015, 3, 1), d(2017, 3, 1), d(2019, 3, 1),
                           d(2016, 6, 1), d(2018, 6, 1), d(2018, 6, 1), d(2020, 6, 1), d(2020, 1, 1)],
            "age_years": [30.0, 33.0, 12.0, 14.0, 16.0, 40.0, 42.0, 42.0, 44.0, 20.0],
            "meets_criteria": [False, False, False, True, True, False, False, True, False, None],
        }
    )
    out = trends.phenotype_conversion(df).set_index("person")
    assert out.loc["A", "status"] == trends.NEVER_MET and pd.isna(out.loc["A", "first_met_date"])
    assert out.loc["B", "status"] == trends.MET
    assert out.loc["B", "first_met_date"] == d(2017, 3, 1) and out.loc["B", "first_met_age"] == 14.0
    # C met at 2018 (CMR row of that date), not at the latest study: review, not re-labelled
    assert out.loc["C", "status"] == trends.REVIEW_MET_EARLIER
    assert out.loc["C", "ever_met"] and not out.loc["C", "met_at_latest"]
    assert out.loc["C", "first_met_date"] == d(2018, 6, 1) and out.loc["C", "n_not_met_after_first"] == 1
    assert "D" not in out.index  # no assessable study
    assert out["caution"].str.contains("clinician").all()


# ---------------------------------------------------------------- flags


def test_progression_flags():
    df = pd.concat(
        [
            _series_frame("UP", "mwt_echo", [30.0, 31.0, 32.0], [10.0, 10.5, 13.6]),  # last +3.1 > 2.77
            _series_frame("DOWN", "mwt_echo", [30.0, 31.0, 32.0], [13.6, 10.5, 10.0]),  # away from disease
            _series_frame("EP", "e_prime_septal", [40.0, 42.0, 44.0, 46.0], [12.0, 11.0, 10.1, 9.0]),
            _series_frame("EF", "lvef_echo", [40.0, 42.0, 44.0], [70.0, 60.0, 50.0]),  # no direction
            _line_with_orthogonal_noise(),  # person P, crosses 13 mm at 36 y
        ],
        ignore_index=True,
    )
    t = trends.per_person_ols(df)
    ch = trends.consecutive_changes(df, {"mwt_echo": rep.lsc_from_sw(1.0)})
    pr = trends.project_crossings(t, {"mwt_echo": 13.0})
    fl = trends.progression_flags(t, ch, pr, within_years=3.0).set_index("person")
    assert fl.loc["UP", "last_change_beyond_towards_disease"]
    assert fl.loc["UP", "progressing_beyond_variability"]
    assert not fl.loc["DOWN", "progressing_beyond_variability"]
    assert fl.loc["EP", "slope_ci_towards_disease"] and fl.loc["EP", "progressing_beyond_variability"]
    assert not fl.loc["EF", "progressing_beyond_variability"]
    assert "no direction" in fl.loc["EF", "reason"]
    assert fl.loc["P", "projected_crossing_within_years"]
    assert fl.loc["P", "projected_age"] == pytest.approx(36.0)
    assert not trends.progression_flags(t, ch, pr, within_years=1.0).set_index("person").loc[
        "P", "projected_crossing_within_years"]


def test_t_quantile_and_tail_agree_with_scipy_stats():
    """The t quantile and upper tail used for slope intervals (scipy.special, which keeps
    scipy.stats out of start-up) equal scipy.stats.t.ppf / t.sf to 1e-12 over a grid of
    degrees of freedom and probabilities (reference library: scipy.stats)."""
    import numpy as np
    from scipy import stats

    from tracker.engines.trends import t_quantile, t_sf

    for df in (1, 2, 3, 4, 5, 7, 10, 15, 20, 30, 50, 100, 1000, 2.5, 17.3):
        for p in (0.5, 0.6, 0.75, 0.9, 0.95, 0.975, 0.99, 0.995, 0.999, 0.025, 0.1):
            assert abs(t_quantile(p, df) - stats.t.ppf(p, df)) <= 1e-12 * max(1.0, abs(stats.t.ppf(p, df)))
        for x in (0.0, 0.1, 0.5, 1.0, 1.96, 2.5, 4.0, 8.0):
            assert abs(float(t_sf(x, df)) - stats.t.sf(x, df)) <= 1e-12
    # arrays, as the trend table passes them
    dfs = np.array([2.0, 5.0, 30.0])
    assert np.allclose(t_quantile(0.975, dfs), stats.t.ppf(0.975, dfs), rtol=1e-12, atol=0)
