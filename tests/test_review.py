"""The review engine: measurements with age and BSA, derived indices, limits, criteria, trends.

Sources named beside each check: Mosteller BSA (Mosteller RD, N Engl J Med 1987;317:1098;
normal-limits.md section 9 check 1), Haycock BSA (J Pediatr 1978), Devereux LV mass /
RWT (Lang 2015, normal-limits.md section 2a, check 4), PHN 2017 z-scores (Lopez et al.,
normal-limits.md section 5a), ASE/EACVI 2015 wall thickness (Lang 2015, section 2c, check 20),
least significant change 2.77 x Sw (Bland & Altman 1999, section 7a), ESC 2023 wall-thickness
criteria (Arbelo et al., guidelines.md section 4), statsmodels OLS (reference library).
All people and values are invented.
"""

from __future__ import annotations

import datetime as dt

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm

from tracker.engines import derived, review

ESC = "esc_2023"


def people(*rows):
    return pd.DataFrame(rows, columns=["person", "family", "sex_at_birth", "birth_date"])


def studies(*rows):
    cols = ["person", "study_date", "modality", "site", "height_cm", "weight_kg", "measure", "value", "unit"]
    return pd.DataFrame(rows, columns=cols)


def echo(person, date, h, w, **values):
    units = {"e_prime_septal": "cm/s", "e_prime_lateral": "cm/s", "mv_e": "cm/s"}
    return [(person, date, "echo", "Invented Lab", h, w, m, v, units.get(m, "mm")) for m, v in values.items()]


def _series(person, birth, dates_values, sex="male", modality="echo", measure="mwt_echo", h=175.0, w=75.0):
    """Invented adult series: one value of ``measure`` per study date."""
    p = people((person, "FAM-X", sex, birth))
    s = studies(*[(person, d, modality, "", h, w, measure, v, "mm") for d, v in dates_values])
    return p, s


# --------------------------------------------------------------------------- build


def test_build_measurements_age_bsa_and_derived_lv_mass():
    p = people(("A-1", "FAM-X", "male", "1990-06-15"), ("B-1", "FAM-X", "female", "2010"))
    s = studies(
        *echo("A-1", "2020-06-15", 170, 70, ivsd=10.0, lvidd=50.0, lvpwd=9.0),
        *echo("B-1", "2020-07-01", 140, 35, mwt_echo=7.0),
        ("B-1", "2021-01-05", "clinic", "", None, None, None, None, None),
    )
    m = review.build_measurements(p, s)
    assert list(m.columns) == review.MEASUREMENT_COLUMNS
    assert set(m["modality"]) == {"echo"}  # the clinic visit has no value
    a = m[m["person"] == "A-1"].set_index("measure")
    # age from the date of birth: 10958 days / 365.2425 (exact birth date, no uncertainty)
    assert a.loc["ivsd", "age_years"] == pytest.approx(10958 / 365.2425)
    assert a.loc["ivsd", "age_uncertainty_years"] == 0.0
    assert a.loc["ivsd", "study_date"] == dt.date(2020, 6, 15)
    # Mosteller 170 cm / 70 kg -> 1.818 m2 (Mosteller NEJM 1987; normal-limits.md check 1)
    assert a.loc["ivsd", "bsa_m2"] == pytest.approx(1.818, abs=0.0005)
    assert a.loc["ivsd", "bsa_formula"] == "mosteller"
    # Devereux (ASE-corrected cube) LV mass for IVSd 1.0, LVIDd 5.0, LVPWd 0.9 cm: 169.9 g,
    # LVMI 93.5 g/m2 at BSA 1.818, RWT 0.36 (Lang 2015; normal-limits.md check 4)
    devereux = 0.8 * 1.04 * ((1.0 + 5.0 + 0.9) ** 3 - 5.0**3) + 0.6
    assert a.loc["lv_mass", "value"] == pytest.approx(devereux)
    assert a.loc["lv_mass", "value"] == pytest.approx(169.9, abs=0.05)
    assert a.loc["lvmi_echo", "value"] == pytest.approx(93.5, abs=0.05)
    assert a.loc["rwt", "value"] == pytest.approx(0.36, abs=0.005)
    assert a.loc["lv_mass", "derived"] and not a.loc["ivsd", "derived"]
    assert a.loc["lv_mass", "unit"] == "g" and "Devereux" in a.loc["lv_mass", "derivation"]
    # the vectorised indices equal derive_study for the same inputs
    one = derived.derive_study({"ivsd": 10.0, "lvidd": 50.0, "lvpwd": 9.0}, bsa_m2=a.loc["ivsd", "bsa_m2"])
    for code, value in one.items():
        assert a.loc[code, "value"] == pytest.approx(value)
    # year-only birth date: 1 July, 0.5 y uncertainty (data-layouts.md; dates.age_at)
    b = m[m["person"] == "B-1"].iloc[0]
    assert b["age_years"] == pytest.approx(3653 / 365.2425)
    assert b["age_uncertainty_years"] == 0.5


def test_derived_rows_only_when_all_inputs_present():
    p = people(("A-1", "FAM-X", "male", "1980-01-01"))
    s = studies(*echo("A-1", "2020-01-01", None, None, ivsd=10.0, lvidd=50.0, lvpwd=9.0, mv_e=80.0,
                      e_prime_septal=8.0))  # fmt: skip
    codes = set(review.build_measurements(p, s)["measure"])
    assert {"lv_mass", "rwt", "septal_posterior_ratio"} <= codes
    assert "lvmi_echo" not in codes  # no height and weight: no BSA, no index
    assert "e_over_e_prime" not in codes  # lateral e' missing: average E/e' not computed


# --------------------------------------------------------------------------- limits and criteria


def _assess(p, s, rel=(), pos=(), guideline=ESC):
    m = review.build_measurements(p, s)
    return review.assess_measurements(m, guideline=guideline, relative_of_affected=set(rel), genotype_positive=set(pos))


def _haycock(h, w):
    return 0.024265 * w**0.5378 * h**0.3964  # Haycock 1978 [V]


def test_child_gets_phn_z_with_haycock_bsa_and_is_refused_outside_the_range():
    p = people(("C-1", "FAM-X", "male", "2010-03-01"), ("C-2", "FAM-X", "male", "2004-03-01"))
    s = studies(*echo("C-1", "2020-03-02", 140, 35, ivsd=8.0), *echo("C-2", "2020-03-02", 190, 110, ivsd=9.0))
    a = _assess(p, s).set_index("person")
    # PHN 2017 LVST: z = (X_cm / BSA^0.40 - 0.58) / 0.09, BSA by Haycock (normal-limits.md 5a [V])
    expected = (0.8 / _haycock(140, 35) ** 0.40 - 0.58) / 0.09
    assert a.loc["C-1", "z"] == pytest.approx(expected, abs=1e-9)
    assert a.loc["C-1", "reference_set"] == "phn2017" and "Lopez" in a.loc["C-1", "source"]
    # Haycock BSA 2.43 m2 is outside the PHN range used here (0.1-2.2 m2): no number, nothing extrapolated
    assert _haycock(190, 110) > 2.2
    assert a.loc["C-2", "assessment"] == "outside the reference range" and np.isnan(a.loc["C-2", "z"])


def test_adult_gets_lang_2015_limits():
    p = people(("M-1", "FAM-X", "male", "1970-01-01"), ("F-1", "FAM-X", "female", "1970-01-01"))
    s = studies(*echo("M-1", "2020-01-01", 180, 80, ivsd=12.0), *echo("F-1", "2020-01-01", 165, 60, ivsd=9.0))
    a = _assess(p, s).set_index("person")
    # Lang 2015: IVSd men 0.6-1.0 cm normal, 1.1-1.3 mild (check 20); women 0.6-0.9 cm
    assert a.loc["M-1", "upper"] == pytest.approx(10.0) and a.loc["M-1", "lower"] == pytest.approx(6.0)
    assert a.loc["M-1", "assessment"] == "above normal limits" and a.loc["M-1", "grade"] == "mild"
    assert a.loc["F-1", "upper"] == pytest.approx(9.0) and a.loc["F-1", "assessment"] == "within normal limits"
    assert "Lang" in a.loc["M-1", "source"]


def test_relative_with_13_4_mm_meets_esc_2023_but_not_a_non_relative():
    p = people(("R-1", "FAM-X", "female", "1980-01-01"), ("N-1", "FAM-X", "female", "1980-01-01"))
    s = studies(*echo("R-1", "2020-01-01", 165, 60, mwt_echo=13.4), *echo("N-1", "2020-01-01", 165, 60, mwt_echo=13.4))
    a = _assess(p, s, rel={"R-1"}).set_index("person")
    # ESC 2023: >= 13 mm in a first-degree relative of a patient with unequivocal disease; else >= 15 mm [V]
    assert bool(a.loc["R-1", "meets_criteria"]) is True
    assert a.loc["R-1", "threshold"] == 13.0 and a.loc["R-1", "threshold_unit"] == "mm"
    assert bool(a.loc["N-1", "meets_criteria"]) is False and a.loc["N-1", "threshold"] == 15.0
    assert bool(a.loc["N-1", "borderline"]) is True  # 13-14 mm needs supporting features (ESC 2023 [V])
    assert "2023 ESC" in a.loc["R-1", "guideline"] and "clinician decides" in a.loc["R-1", "caution"]


def test_echo_and_cmr_judged_and_trended_separately():
    p = people(("R-1", "FAM-X", "male", "1980-01-01"))
    s = studies(
        *[("R-1", f"20{y}-01-10", "echo", "", 175, 75, "mwt_echo", v, "mm")
          for y, v in ((18, 11.0), (19, 12.0), (20, 13.5))],
        *[("R-1", f"20{y}-02-10", "cmr", "", 175, 75, "mwt_cmr", v, "mm") for y, v in ((18, 10.0), (20, 11.0))],
    )
    a = _assess(p, s, rel={"R-1"})
    t = review.trend_table(a, guideline=ESC, relative_of_affected={"R-1"}, genotype_positive=set())
    assert sorted(t["measure"]) == ["mwt_cmr", "mwt_echo"]
    assert t.set_index("measure").loc["mwt_cmr", "n"] == 2 and t.set_index("measure").loc["mwt_echo", "n"] == 3


def test_guideline_without_encoded_criteria_is_said_not_applied():
    p = people(("R-1", "FAM-X", "male", "1980-01-01"))
    a = _assess(p, studies(*echo("R-1", "2020-01-01", 175, 75, mwt_echo=16.0)), guideline="esc_2014")
    assert pd.isna(a.loc[0, "meets_criteria"]) and "not applied" in a.loc[0, "criteria_note"]


# --------------------------------------------------------------------------- trends


def _noisy_line(b=0.4, start=30, years=9, base=9.0, seed=5):
    rng = np.random.default_rng(seed)
    ages = np.arange(years) + start + 0.2
    values = base + b * (ages - start) + rng.normal(0, 0.3, years)
    birth = dt.date(1980, 1, 1)
    dates = [(birth + dt.timedelta(days=round(a * 365.2425))).isoformat() for a in ages]
    return people(("R-1", "FAM-X", "male", birth.isoformat())), ages, values, dates


def test_trend_recovers_a_known_slope_within_its_ci_and_matches_statsmodels():
    p, ages, values, dates = _noisy_line()
    s = studies(*[("R-1", d, "echo", "", 175, 75, "mwt_echo", round(v, 2), "mm") for d, v in zip(dates, values)])
    m = review.build_measurements(p, s)
    t = review.trend_table(m, guideline=ESC, relative_of_affected={"R-1"}, genotype_positive=set()).iloc[0]
    assert t["slope_ci_low"] < 0.4 < t["slope_ci_high"]
    fit = sm.OLS(m["value"].to_numpy(), sm.add_constant(m["age_years"].to_numpy())).fit()  # reference library
    assert t["slope_per_year"] == pytest.approx(fit.params[1])
    lo, hi = fit.conf_int(0.05)[1]
    assert (t["slope_ci_low"], t["slope_ci_high"]) == (pytest.approx(lo), pytest.approx(hi))
    assert t["window"] == "all studies" and t["n"] == 9


def test_projection_and_trend_flags_for_a_relative_approaching_13_mm():
    # 9 + 0.4 mm/y from 30 y reaches 13 mm at 40 y, 1.8 y after the last study (38.2 y)
    p, ages, values, dates = _noisy_line(seed=1)
    s = studies(*[("R-1", d, "echo", "", 175, 75, "mwt_echo", round(v, 2), "mm") for d, v in zip(dates, values)])
    m = review.build_measurements(p, s)
    kw = dict(guideline=ESC, relative_of_affected={"R-1"}, genotype_positive=set())
    t = review.trend_table(m, **kw).iloc[0]
    assert t["threshold"] == 13.0 and t["projection_status"] == "projected"
    assert t["projected_age_ci_low"] < 40.0 < t["projected_age_ci_high"]  # Fieller interval covers the true age
    assert t["crossing_within_horizon"] and t["progressing"]
    f = review.trend_flags(m, **kw)
    assert list(f.columns) == ["person", "progressing", "projected_crossing_age", "reasons", "progression_tests",
                               "review_flags"]
    assert bool(f.loc[0, "progressing"]) and f.loc[0, "projected_crossing_age"] == pytest.approx(t["projected_age"])
    assert "mwt_echo" in f.loc[0, "reasons"]
    # a non-relative's threshold is 15 mm: the crossing is beyond the 3-year horizon, refused
    far = review.trend_table(m, **{**kw, "relative_of_affected": set()}).iloc[0]
    assert far["threshold"] == 15.0 and far["projection_status"] == "refused" and not far["crossing_within_horizon"]


def test_change_inside_the_lsc_is_within_measurement_variability():
    p, s = _series("R-1", "1980-01-01", [("2019-01-01", 10.0), ("2020-01-01", 11.0)])
    m = review.build_measurements(p, s)
    kw = dict(guideline=ESC, relative_of_affected=set(), genotype_positive=set())
    t = review.trend_table(m, **kw).iloc[0]
    # packaged placeholder Sw 1.4 mm -> LSC 2.77 x 1.4 = 3.88 mm (Bland & Altman 1999 [V])
    assert t["lsc"] == pytest.approx(1.96 * np.sqrt(2) * 1.4)
    assert t["last_change"] == pytest.approx(1.0) and t["last_change_vs_lsc"] == "within measurement variability"
    assert not t["progressing"]
    # the clinic's own Sw 0.3 mm -> LSC 0.83 mm: the same 1 mm change is beyond it
    own = review.trend_table(m, **kw, clinic_repeatability={"mwt_echo": 0.3}).iloc[0]
    assert own["lsc_status"] == "clinic" and own["last_change_vs_lsc"] == "beyond measurement variability"
    assert own["progressing"]


def test_growing_child_with_steady_z_is_not_flagged_by_its_mm_slope():
    # wall thickness at PHN z = 0 (+/- 0.02 mm) while the child grows (normal-limits.md 5a and 8:
    # in children trend the z-score, not millimetres)
    birth = dt.date(2008, 1, 1)
    rows = []
    for i, age in enumerate(range(8, 15)):
        h, w = 125 + 6 * i, 25 + 4 * i
        mm = 10 * 0.58 * _haycock(h, w) ** 0.40 + (0.02 if i % 2 else -0.02)
        date = (birth + dt.timedelta(days=round((age + 0.1) * 365.2425))).isoformat()
        rows.append(("K-1", date, "echo", "", h, w, "mwt_echo", mm, "mm"))
    m = review.build_measurements(people(("K-1", "FAM-X", "male", birth.isoformat())), studies(*rows))
    t = review.trend_table(m, guideline=ESC, relative_of_affected={"K-1"}, genotype_positive={"K-1"}).iloc[0]
    assert t["slope_ci_low"] > 0  # millimetres rise with growth
    assert abs(t["z_slope_per_year"]) < 0.05 and t["z_model"] == "phn2017" and t["z_n"] == 7
    assert not t["progressing"]
    assert t["threshold_unit"] == "z" and t["threshold"] == 2.0  # ESC 2023 child rule z > 2 [V]


def test_conversion_found_at_the_right_study_and_review_flag():
    p = people(("R-1", "FAM-X", "male", "1990-01-01"), ("R-2", "FAM-X", "male", "1990-01-01"))
    s = studies(
        *[("R-1", d, "echo", "", 180, 75, "mwt_echo", v, "mm")
          for d, v in (("2018-03-01", 11.0), ("2019-03-01", 12.2), ("2020-03-01", 13.1), ("2021-03-01", 13.8))],
        *[("R-2", d, "echo", "", 180, 75, "mwt_echo", v, "mm")
          for d, v in (("2018-03-01", 12.0), ("2019-03-01", 13.2), ("2020-03-01", 12.6))],
    )  # fmt: skip
    a = _assess(p, s, rel={"R-1", "R-2"})
    c = review.conversions(a).set_index("person")
    # ESC 2023 relative threshold >= 13 mm [V]: first met at the third study of R-1
    assert c.loc["R-1", "first_met_date"] == dt.date(2020, 3, 1)
    assert c.loc["R-1", "first_met_age"] == pytest.approx((dt.date(2020, 3, 1) - dt.date(1990, 1, 1)).days / 365.2425)
    assert c.loc["R-1", "first_met_measures"] == "mwt_echo" and not c.loc["R-1", "review_flag"]
    assert c.loc["R-2", "review_flag"] and c.loc["R-2", "status"].startswith("review")
    t = review.trend_table(a, guideline=ESC, relative_of_affected={"R-1", "R-2"}, genotype_positive=set())
    t = t.set_index("person")
    assert t.loc["R-1", "converted"] and t.loc["R-1", "conversion_date"] == dt.date(2020, 3, 1)
    assert t.loc["R-2", "review_flag"] and "review" in t.loc["R-2", "reasons"]
    with pytest.raises(ValueError):
        review.conversions(review.build_measurements(p, s))  # not assessed: refused, not guessed


def test_no_values_give_empty_frames_not_errors():
    p = people(("A-1", "FAM-X", "male", "1980-01-01"))
    s = studies(("A-1", "2020-01-01", "clinic", "", None, None, None, None, None))
    m = review.build_measurements(p, s)
    assert len(m) == 0 and list(m.columns) == review.MEASUREMENT_COLUMNS
    kw = dict(guideline=ESC, relative_of_affected=set(), genotype_positive=set())
    a = review.assess_measurements(m, **kw)
    assert len(a) == 0 and "meets_criteria" in a.columns
    t = review.trend_table(m, **kw)
    assert len(t) == 0 and list(t.columns) == review.TREND_COLUMNS
    f = review.trend_flags(m, **kw)
    assert len(f) == 0 and list(f.columns) == review.FLAG_COLUMNS


def test_ecg_voltage_criteria_are_applied_to_adults_only():
    """Sokolow-Lyon >= 35 mm (Sokolow & Lyon 1949) and Cornell > 28 mm men / > 20 mm women
    (Casale et al. 1985), as encoded in tracker/engines/derived.py."""
    import datetime as dt

    from tracker.engines import review

    frame = pd.DataFrame({
        "person": ["A", "A", "B", "C"], "family": "F", "sex": ["male", "male", "female", "male"],
        "study_date": [dt.date(2020, 1, 1)] * 4, "modality": "ecg",
        "measure": ["sokolow_lyon", "cornell_voltage", "cornell_voltage", "sokolow_lyon"],
        "value": [36.0, 27.0, 21.0, 40.0], "unit": "mm",
        "age_years": [40.0, 40.0, 35.0, 12.0], "height_cm": np.nan, "weight_kg": np.nan, "bsa_m2": np.nan,
    })  # fmt: skip
    out = review.assess_measurements(frame, guideline="esc_2023", relative_of_affected=set(), genotype_positive=set())
    assert list(out["assessment"]) == ["above normal limits", "within normal limits", "above normal limits",
                                       "no reference"]  # fmt: skip
    assert "Sokolow" in out.loc[0, "source"] and "Casale" in out.loc[2, "source"]
