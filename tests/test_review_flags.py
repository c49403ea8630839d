"""Review flags: wall-thickness criteria that cannot be assessed, and progression flags that say
which test fired.

Sources named beside each check: PHN 2017 IVSd z-score model, Z = (X_cm / BSA^0.40 - 0.58) / 0.09,
valid BSA 0.1-2.2 m2 (Lopez et al., Circ Cardiovasc Imaging 2017, coefficient table [V];
normal-limits.md section 5a); Detroit 2008 log-cubic IVSd model (Pettersen et al. 2008 [V2]);
ESC 2023 child rule z > 2 and adult relative rule >= 13 mm (Arbelo et al. [V]; guidelines.md
section 4); least significant change 2.77 x Sw (Bland & Altman 1999 [V]); ASE/EACVI 2015 LAVI
upper limit 34 mL/m2 (Lang et al. [V2]).  All people and values are invented.
"""

from __future__ import annotations

import dataclasses
import datetime as dt

import numpy as np
import pandas as pd
import pytest

from tracker.engines import family_state as fs
from tracker.engines import review
from tracker.normals import paediatric

ESC = "esc_2023"


def people(*rows):
    return pd.DataFrame(rows, columns=["person", "family", "sex_at_birth", "birth_date"])


def studies(*rows):
    cols = ["person", "study_date", "modality", "site", "height_cm", "weight_kg", "measure", "value", "unit"]
    return pd.DataFrame(rows, columns=cols)


def at_age(birth: str, age: float) -> str:
    return (dt.date.fromisoformat(birth) + dt.timedelta(days=round(age * 365.2425))).isoformat()


def _assess(p, s, rel=(), pos=()):
    return review.assess_measurements(review.build_measurements(p, s), guideline=ESC, relative_of_affected=set(rel),
                                      genotype_positive=set(pos))  # fmt: skip


def _table(m, rel=(), pos=(), **kw):
    return review.trend_table(m, guideline=ESC, relative_of_affected=set(rel), genotype_positive=set(pos), **kw)


# --------------------------------------------------------------------------- criteria not assessable


def test_phn_smallest_z_is_at_the_largest_bsa_and_matches_the_published_model():
    # PHN IVSd model (Lopez 2017 [V]): z falls with BSA, so its smallest value is at BSA 2.2 m2
    assert paediatric.smallest_z_bsa("mwt_echo") == 2.2
    got = paediatric.smallest_z("mwt_echo", [20.0, 9.0], [17.5, 10.0])
    by_hand = (np.array([2.0, 0.9]) / 2.2**0.40 - 0.58) / 0.09
    assert got["z_min"] == pytest.approx(by_hand)
    # outside the set's age range (0-18 y): no bound
    assert np.isnan(paediatric.smallest_z("mwt_echo", 20.0, 18.5)["z_min"])


def test_detroit_smallest_z_is_the_minimum_over_its_bsa_range():
    # reference computation: a dense grid over the Detroit BSA range 0.15-2.0 m2 (Pettersen 2008 [V2])
    grid = np.linspace(0.15, 2.0, 20001)
    z = paediatric.z_scores("ivsd", 12.0, grid, 10.0, "detroit2008")["z"]
    got = paediatric.smallest_z("ivsd", 12.0, 10.0, "detroit2008")
    assert float(got["z_min"]) == pytest.approx(z.min(), abs=1e-6)
    assert float(got["bsa_m2"]) == pytest.approx(grid[z.argmin()], abs=1e-3)


def test_a_17_5_year_old_without_height_or_weight_and_a_20_mm_wall_meets_the_criteria():
    birth = "2008-06-01"
    s = studies(("Y-1", at_age(birth, 17.5), "echo", "", None, None, "mwt_echo", 20.0, "mm"))
    a = _assess(people(("Y-1", "F-Y", "female", birth)), s, rel={"Y-1"})
    r = a[a["measure"] == "mwt_echo"].iloc[0]
    # the smallest z a 20 mm wall can have at any BSA PHN covers is 9.77 (at 2.2 m2) > 2 (ESC 2023 child rule [V])
    assert np.isnan(r["z"]) and bool(r["meets_criteria"]) is True
    assert "every body size" in r["criteria_note"] and "9.77" in r["criteria_note"]
    assert "BSA unknown" in r["criteria_note"]
    conv = review.conversions(a).iloc[0]
    assert conv["ever_met"] and conv["first_met_date"] == dt.date.fromisoformat(at_age(birth, 17.5))


def test_a_child_value_not_met_at_every_body_size_is_flagged_everywhere():
    birth = "2012-03-01"
    s = studies(
        ("Y-2", at_age(birth, 12.0), "echo", "", 150, 40, "mwt_echo", 8.0, "mm"),
        ("Y-2", at_age(birth, 13.0), "echo", "", None, None, "mwt_echo", 9.0, "mm"),
    )
    p = people(("Y-2", "F-Y", "male", birth))
    a = _assess(p, s, rel={"Y-2"})
    last = a[a["measure"] == "mwt_echo"].iloc[-1]
    assert pd.isna(last["meets_criteria"])
    flags = review.criteria_review_flags(a)
    assert len(flags) == 1 and flags.loc[0, "person"] == "Y-2"
    text = flags.loc[0, "flag"]
    assert text.startswith("criteria not assessable: mwt_echo 9 mm on " + at_age(birth, 13.0))
    assert "BSA unknown" in text and "smallest possible z 0.85" in text  # (0.9 / 2.2^0.4 - 0.58) / 0.09
    m = review.build_measurements(p, s)
    t = _table(m, rel={"Y-2"}).iloc[0]
    assert t["criteria_not_assessable"] and text in t["criteria_flags"] and text in t["reasons"]
    f = review.trend_flags(m, guideline=ESC, relative_of_affected={"Y-2"}, genotype_positive=set())
    assert f.loc[0, "review_flags"] == text


def test_body_size_outside_the_reference_range_uses_the_bound():
    # Haycock BSA of 200 cm / 130 kg is about 2.6 m2, outside PHN's 0.1-2.2 m2: no z-score
    birth = "2009-01-01"
    p = people(("Y-3", "F-Y", "male", birth), ("Y-4", "F-Y", "male", birth))
    s = studies(
        ("Y-3", at_age(birth, 16.0), "echo", "", 200, 130, "mwt_echo", 16.0, "mm"),
        ("Y-4", at_age(birth, 16.0), "echo", "", 200, 130, "mwt_echo", 10.0, "mm"),
    )
    a = _assess(p, s).set_index("person")
    assert bool(a.loc["Y-3", "meets_criteria"]) is True  # (1.6 / 2.2^0.4 - 0.58) / 0.09 = 6.5 > 2
    assert "BSA outside the phn2017 range" in a.loc["Y-3", "criteria_note"]
    assert pd.isna(a.loc["Y-4", "meets_criteria"])  # 10 mm: smallest possible z 1.66, not > 2
    assert a.loc["Y-4", "criteria_note"].startswith("criteria not assessable")


def test_a_child_with_a_cmr_value_only_is_flagged():
    birth = "2011-05-05"
    s = studies(("Y-5", at_age(birth, 15.0), "cmr", "", 170, 60, "mwt_cmr", 18.0, "mm"))
    a = _assess(people(("Y-5", "F-Y", "female", birth)), s)
    flags = review.criteria_review_flags(a)
    assert len(flags) == 1 and "CMR wall thickness" in flags.loc[0, "flag"]


def test_a_not_assessable_value_answered_by_a_later_judged_study_is_not_flagged():
    birth = "2011-05-05"
    p = people(("Y-9", "F-Y", "female", birth))
    cmr = ("Y-9", at_age(birth, 15.0), "cmr", "", None, None, "mwt_cmr", 8.0, "mm")
    echo = ("Y-9", at_age(birth, 15.5), "echo", "", 165, 55, "mwt_echo", 8.5, "mm")
    assert len(review.criteria_review_flags(_assess(p, studies(cmr, echo)))) == 0
    # the same CMR after the echo is the latest word and is flagged
    later = ("Y-9", at_age(birth, 16.0), "cmr", "", None, None, "mwt_cmr", 8.2, "mm")
    flags = review.criteria_review_flags(_assess(p, studies(cmr, echo, later)))
    assert list(flags["study_date"]) == [dt.date.fromisoformat(at_age(birth, 16.0))]


# --------------------------------------------------------------------------- progression flags


def test_child_z_slope_flags_across_the_change_to_adult():
    # PHN z rising by 0.5 a year from 13 y to 17 y, then one study at 18.3 y: the adult window has one
    # study (no slope), so the z-score slope of the studies under 18 y is the test
    birth = "2006-01-01"
    rows = []
    for i, age in enumerate([13.0, 14.0, 15.0, 16.0, 17.0]):
        h, w = 150 + 4 * i, 40 + 5 * i
        b = 0.024265 * h**0.3964 * w**0.5378  # Haycock (J Pediatr 1978)
        z = 0.5 + 0.5 * i
        rows.append(("Y-6", at_age(birth, age), "echo", "", h, w, "mwt_echo", 10 * (0.58 + z * 0.09) * b**0.40, "mm"))
    rows.append(("Y-6", at_age(birth, 18.3), "echo", "", 172, 66, "mwt_echo", 12.0, "mm"))
    m = review.build_measurements(people(("Y-6", "F-Y", "male", birth)), studies(*rows))
    t = _table(m).iloc[0]
    assert t["window"] == "studies from 18 y" and t["n"] == 1
    assert t["z_slope_per_year"] == pytest.approx(0.5, abs=0.01) and t["z_ci_low"] > 0
    assert t["progressing"] and t["tests_fired"] == "z-score slope test"
    assert "z-score slope test: +0.50 z/y" in t["progression_tests"]


def test_a_growing_child_with_a_large_mm_change_but_steady_z_is_not_flagged():
    # PHN z = 1.9 at BSA about 0.42 and about 2.03 m2: the wall grows by more than the echo LSC (3.88 mm)
    # with growth alone; under 18 y a change in mm is not a test
    birth = "2010-01-01"
    rows = []
    for age, h, w in ((1.0, 75, 9), (17.0, 185, 80)):
        b = 0.024265 * h**0.3964 * w**0.5378
        rows.append(("Y-7", at_age(birth, age), "echo", "", h, w, "mwt_echo", 10 * (0.58 + 1.9 * 0.09) * b**0.40, "mm"))
    m = review.build_measurements(people(("Y-7", "F-Y", "female", birth)), studies(*rows))
    t = _table(m).iloc[0]
    assert t["last_change"] > 3.88 and t["last_change_vs_lsc"] == "beyond measurement variability"
    assert not t["progressing"] and t["reasons"] == ""


def _adult(person, birth, sex, series, h=170.0, w=70.0):
    """series: {measure: [(age, value), ...]} -> measurements."""
    rows = []
    for measure, pts in series.items():
        unit = {"lavi": "mL/m2", "e_prime_septal": "cm/s", "e_prime_lateral": "cm/s"}.get(measure, "mm")
        rows += [(person, at_age(birth, a), "echo", "", h, w, measure, v, unit) for a, v in pts]
    return review.build_measurements(people((person, "F-A", sex, birth)), studies(*rows))


def test_age_expected_change_in_an_old_person_is_not_progression():
    # 80-year-old: LAVI rising within normal limits (<= 34 mL/m2, Lang 2015) and e' falling with age
    ages = [69.0, 72.0, 75.0, 78.0, 80.0]
    m = _adult("A-1", "1940-01-01", "male", {
        "lavi": list(zip(ages, [22.0, 23.5, 25.0, 26.8, 28.0])),
        "e_prime_septal": list(zip(ages, [8.0, 7.6, 7.1, 6.7, 6.2])),
        "e_prime_lateral": list(zip(ages, [10.5, 10.0, 9.4, 8.9, 8.4])),
        "mwt_echo": list(zip(ages, [10.4, 10.3, 10.5, 10.4, 10.5])),
    })  # fmt: skip
    t = _table(m).set_index("measure")
    assert t.loc["lavi", "slope_ci_low"] > 0 and t.loc["e_prime_septal", "slope_ci_high"] < 0
    assert not t["progressing"].any()
    assert t.loc["e_prime_septal", "flag_role"] == "not a progression-flag measure"
    f = review.trend_flags(m, guideline=ESC, relative_of_affected=set(), genotype_positive=set())
    assert not f.loc[0, "progressing"] and f.loc[0, "progression_tests"] == ""


def test_la_size_above_the_upper_limit_and_rising_is_flagged_with_its_figures():
    ages = [50.0, 52.0, 54.0, 56.0, 58.0]
    m = _adult("A-2", "1960-01-01", "male", {"lavi": list(zip(ages, [33.0, 35.5, 38.0, 40.2, 43.0]))})
    t = _table(m).iloc[0]
    assert t["progressing"] and t["tests_fired"] == "slope test"
    assert t["progression_tests"].startswith("slope test: +1.23 mL/m2/y (95% CI")
    assert "fitted change +9.9 mL/m2" in t["progression_tests"]


def test_a_pregnancy_study_is_left_out_of_the_trend():
    birth = "1993-01-01"
    ages = [28.0, 29.0, 30.0, 31.0, 32.0]
    m = _adult("A-3", birth, "female", {"lvpwd": list(zip(ages, [8.0, 8.1, 8.0, 8.1, 12.5]))})
    preg = pd.DataFrame({"person": ["A-3", "A-3"], "assessment_date": [at_age(birth, 31.0), at_age(birth, 32.0)],
                         "pregnant": [False, True]})  # fmt: skip
    unmarked = _table(m).iloc[0]
    assert unmarked["progressing"] and "last-change test: +4.40 mm" in unmarked["reasons"]
    marked = review.mark_pregnancy(m, preg)
    assert list(marked["pregnant"]) == [False, False, False, False, True]
    t = _table(marked).iloc[0]
    assert t["n"] == 4 and not t["progressing"]
    assert t["left_out"] == f"1 study during pregnancy left out of the trend ({at_age(birth, 32.0)})"
    # the pregnancy study is still judged against the limits
    assert bool(review.assess_measurements(marked, guideline=ESC, relative_of_affected=set(),
                                           genotype_positive=set())["pregnant"].iloc[-1])  # fmt: skip


def test_a_tiny_but_clear_slope_is_not_progression():
    # +0.08 mm/y over 10 years: the slope's CI excludes zero but 0.8 mm is less than one Sw (1.4 mm)
    ages = np.arange(11) + 20.0
    values = 7.0 + 0.08 * (ages - 20) + np.tile([0.02, -0.02], 6)[:11]
    m = _adult("A-4", "1990-01-01", "female", {"lvpwd": list(zip(ages, values))})
    t = _table(m).iloc[0]
    assert t["slope_ci_low"] > 0 and not t["progressing"]


def test_the_reasons_name_the_slope_test_when_the_last_change_is_within_the_lsc():
    ages = [30.0, 32.0, 34.0, 36.0, 38.0]
    m = _adult("A-5", "1985-01-01", "male", {"mwt_echo": list(zip(ages, [9.0, 10.1, 11.0, 12.1, 12.6]))})
    t = _table(m).iloc[0]
    assert t["last_change_vs_lsc"] == "within measurement variability"
    assert t["progressing"] and t["tests_fired"] == "slope test"
    assert "last-change test" not in t["reasons"] and "beyond measurement variability" not in t["reasons"]
    # the packaged placeholder LSC is named as such beside the figure
    assert "placeholder LSC, not a published figure" in t["progression_tests"]
    # with the clinic's own Sw the note goes
    own = _table(m, clinic_repeatability={"mwt_echo": 0.5}).iloc[0]
    assert own["lsc"] == pytest.approx(2.77 * 0.5, abs=0.01) and "placeholder" not in own["progression_tests"]


# --------------------------------------------------------------------------- recall text


def test_recall_progression_text_names_the_test_and_review_flags_reach_the_notes():
    from tracker.cli.recall import with_trend_texts
    from tracker.engines.schedule import Fired, Proposal

    rule_text = "Change beyond measurement variability since the previous study: interval shortened to at most 12 months."
    p = Proposal(
        person_code="A-5", rule_set_id=ESC, today=dt.date(2026, 1, 1), status="due", due=dt.date(2026, 6, 1),
        interval_months=12, routine_due=dt.date(2027, 1, 1), days_overdue=-151, rule_id="r", needs=(), consider=(),
        fired=(Fired("modifier", "progression", rule_text, "common practice", "common_practice", True),),
        triggers=(), progression=True, flags=(), notes=(), cautions=(),
    )  # fmt: skip
    facts = dataclasses.replace(
        fs.PersonFacts(person="A-5"),
        progression_tests="mwt_echo: slope test: +0.90 mm/y (95% CI +0.70 to +1.10; 5 studies, 30.0-38.0 y)",
        review_flags="criteria not assessable: mwt_cmr 14 mm on 2025-01-01 (age 15.0 y): no z-score",
    )
    q = with_trend_texts(p, facts)
    text = q.fired[0].text
    assert text.startswith("Progression on the measurement trends (mwt_echo: slope test: +0.90 mm/y")
    assert "Change beyond measurement variability" not in text and text.endswith("at most 12 months.")
    assert "criteria_not_assessable" in q.flags and q.notes[-1].startswith("criteria not assessable: mwt_cmr")


def test_trend_rows_carry_tests_and_review_flags_to_the_facts():
    birth = "2012-03-01"
    s = studies(("Y-8", at_age(birth, 13.0), "echo", "", None, None, "mwt_echo", 9.0, "mm"))
    p = people(("Y-8", "F-Y", "male", birth))
    f = review.trend_flags(review.build_measurements(p, s), guideline=ESC, relative_of_affected=set(),
                           genotype_positive=set())  # fmt: skip
    rows = fs._trend_rows(f)
    assert rows["Y-8"]["review_flags"].startswith("criteria not assessable: mwt_echo 9 mm")


@pytest.mark.parametrize("flags", [["no", "yes", "no", "no"], [False, True, False, False]])
def test_pregnancy_window_is_bounded_by_the_visits_that_record_no_pregnancy(flags):
    # window: 280 days either side of the visit recording the pregnancy (engineering choice), cut at
    # the visits recording none; yes/no text and booleans read alike
    days = ["2023-10-04", "2023-10-05", "2024-03-06", "2024-12-11", "2024-12-12", "2025-11-10", "2022-01-01"]
    m = pd.DataFrame({"person": ["P"] * 7 + ["Q"], "study_date": [dt.date.fromisoformat(d) for d in days + ["2024-03-06"]]})
    a = pd.DataFrame({"person": ["P", "P", "P", "Q"], "assessment_date": ["2023-10-04", "2024-03-06", "2025-11-10",
                      "2024-03-06"], "pregnant": flags})  # fmt: skip
    got = review.mark_pregnancy(m, a)
    assert got["pregnant"].tolist() == [False, True, True, True, False, False, False, False]
    assert "pregnant" not in m.columns  # the input is not changed


def test_echo_lv_mass_index_rising_within_normal_limits_is_not_progression():
    # IVSd and LVPWd +1 mm over 10 years in a young woman: LVMI (linear method, Lang 2015) rises but
    # stays within normal limits (43-95 g/m2 women [V2]); the wall-thickness tests decide
    ages = [20.0, 22.0, 24.0, 26.0, 28.0, 30.0]
    walls = [7.0, 7.2, 7.4, 7.6, 7.8, 8.0]
    m = _adult("A-6", "1995-01-01", "female", {"ivsd": list(zip(ages, walls)), "lvpwd": list(zip(ages, walls)),
                                                "lvidd": [(a, 45.0) for a in ages]}, h=165, w=60)  # fmt: skip
    t = _table(m).set_index("measure")
    lvmi = m.loc[m["measure"] == "lvmi_echo", "value"]
    assert t.loc["lvmi_echo", "slope_ci_low"] > 0 and lvmi.iloc[-1] < 95 and lvmi.iloc[-1] - lvmi.iloc[0] > 5
    assert not t.loc["lvmi_echo", "progressing"] and not t["progressing"].any()


def test_worklist_pdf_line_carries_the_review_flags():
    from tracker.outputs.worklist_pdf import line_from_row

    row = {"person": "Y-2", "reason": "Child carrier: ECG and echo every 1-2 years.",
           "review_flags": ["criteria not assessable: mwt_echo 9 mm on 2026-06-15 (age 17.3 y): BSA unknown"]}
    line = line_from_row(row)
    assert line.reason == ("Child carrier: ECG and echo every 1-2 years. REVIEW: criteria not assessable: "
                           "mwt_echo 9 mm on 2026-06-15 (age 17.3 y): BSA unknown.")
    assert line_from_row({"person": "Y-1", "reason": "r."}).reason == "r."
