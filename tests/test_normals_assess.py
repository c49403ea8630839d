"""The cohort (DataFrame) form of the normal-limits assessment gives exactly the
answers of the single-value form, row by row; routing children/adults; errors.
Expected classes are from the guideline tables cited in test_normals_adult.py
(Lang 2015) and the PHN 2017 check values (normal-limits.md section 9)."""

import math

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from tracker.normals.assess import RESULT_COLUMNS, assess, assess_frame, reference_sets_for
from tracker.normals.tables import CATALOGUE_UNITS

MEASURES = sorted(CATALOGUE_UNITS)


def _same(a, b) -> bool:
    if isinstance(a, float) and math.isnan(a):
        return b is None
    return a == b


def _check_rows(out: pd.DataFrame, df: pd.DataFrame, reference_sets=None, paediatric_set="phn2017"):
    for i, row in df.iterrows():
        chosen = (reference_sets or {}).get(row.measure)
        one = assess(
            row.measure,
            row.value,
            row.sex,
            None if pd.isna(row.age_years) else row.age_years,
            None if pd.isna(row.bsa_m2) else row.bsa_m2,
            chosen,
            paediatric_set=paediatric_set,
        )
        got = out.loc[i]
        for c in ("z", "lower", "upper"):
            x, y = got[c], getattr(one, c)
            assert (y is None and np.isnan(x)) or x == pytest.approx(y), (c, row.to_dict())
        for c in ("assessment", "grade", "flag", "reference_set", "source", "note"):
            assert _same(got[c], getattr(one, c)), (c, row.to_dict())


def test_cohort_example():
    # Invented cohort.  Man 45 y IVSd 12 mm: above, mild (Lang 2015); child 10 y IVSd 8 mm at
    # BSA 1.0: PHN z 2.44 (check 10); child at BSA 2.5: outside the reference range.
    df = pd.DataFrame(
        {
            "person": ["P1", "P1", "P2", "P3", "P4", "P5"],
            "measure": ["ivsd", "lvef_echo", "ivsd", "ivsd", "gls", "mv_e"],
            "value": [12.0, 60.0, 8.0, 9.0, -15.0, 80.0],
            "sex": ["male", "male", "female", "male", "female", "unknown"],
            "age_years": [45.0, 45.0, 10.0, 15.0, 50.0, 30.0],
            "bsa_m2": [1.9, 1.9, 1.0, 2.5, np.nan, 1.7],
        },
        index=[5, 3, 1, 0, 2, 4],
    )
    out = assess_frame(df)
    assert list(out.index) == list(df.index) and list(out["person"]) == list(df["person"])
    assert set(RESULT_COLUMNS) <= set(out.columns)
    assert list(out["assessment"]) == [
        "above normal limits",
        "within normal limits",
        "above normal limits",
        "outside the reference range",
        "below normal limits",
        "no reference",
    ]
    assert out.loc[5, "grade"] == "mild"
    assert out.loc[1, "z"] == pytest.approx(2.44, abs=0.01)
    assert np.isnan(out.loc[0, "z"])
    assert "clinician decides" in out.attrs["caution"]
    _check_rows(out, df)


def test_reference_set_choice_in_frame():
    df = pd.DataFrame(
        {
            "person": ["A", "B", "C"],
            "measure": ["ivsd", "ivsd", "ecv"],
            "value": [12.0, 12.0, 35.0],
            "sex": ["male", "male", "female"],
            "age_years": [12.0, 40.0, 40.0],
            "bsa_m2": [1.5, 1.9, 1.7],
        }
    )
    out = assess_frame(df, paediatric_set="detroit2008", reference_sets={"ecv": "dabir2014_molli_1.5t"})
    assert out.loc[0, "z"] == pytest.approx(2.47, abs=0.01)  # check 7, Detroit
    assert out.loc[1, "reference_set"] == "lang2015"
    assert out.loc[2, "assessment"] == "above normal limits"  # 25 +- 2 x 4 % -> upper 33
    df["reference_set"] = ["phn2017", "", None]
    out2 = assess_frame(df, reference_sets={"ecv": "dabir2014_molli_1.5t"})
    assert out2.loc[0, "z"] == pytest.approx(4.89, abs=0.01)  # check 10, PHN named per row
    assert out2.loc[2, "reference_set"] == "dabir2014_molli_1.5t"


def test_errors():
    good = dict(person=["A"], measure=["ivsd"], value=[10.0], sex=["male"], age_years=[40.0], bsa_m2=[1.8])
    with pytest.raises(ValueError):
        assess_frame(pd.DataFrame({k: v for k, v in good.items() if k != "bsa_m2"}))
    with pytest.raises(ValueError):
        assess_frame(pd.DataFrame({**good, "measure": ["not_a_code"]}))
    with pytest.raises(ValueError):
        assess("ivsd", 10.0, "M", 40.0)
    with pytest.raises(ValueError):
        assess("ivsd", 10.0, "male", -1.0)
    with pytest.raises(ValueError):
        assess("ivsd", 10.0, "male", 40.0, reference_set="norre2017")
    with pytest.raises(ValueError):
        assess("lvef_echo", 60.0, "male", 10.0, 1.0, reference_set="phn2017")  # no paediatric LVEF model
    with pytest.raises(ValueError):
        assess("ivsd", 8.0, "male", 10.0, 1.0, paediatric_set="nonexistent")


def test_missing_value_and_age():
    a = assess("ivsd", float("nan"), "male", 40.0)
    assert a.assessment == "no reference" and "value missing" in a.note
    b = assess("ivsd", 12.0, "male", None)
    assert b.assessment == "no reference" and "age unknown" in b.note


def test_reference_sets_listing():
    assert set(reference_sets_for("ivsd")) == {"lang2015", "phn2017", "detroit2008"}
    assert "nagueh2009_age" in reference_sets_for("e_prime_septal")


row = st.fixed_dictionaries(
    {
        "measure": st.sampled_from(MEASURES),
        "value": st.one_of(st.floats(-30, 120), st.just(float("nan"))),
        "sex": st.sampled_from(["female", "male", "unknown"]),
        "age_years": st.one_of(st.floats(0, 90), st.just(float("nan"))),
        "bsa_m2": st.one_of(st.floats(0.05, 2.8), st.just(float("nan"))),
    }
)


@settings(max_examples=60, deadline=None)
@given(rows=st.lists(row, min_size=1, max_size=25), ped=st.sampled_from(["phn2017", "detroit2008"]))
def test_frame_equals_single_value_form(rows, ped):
    df = pd.DataFrame(rows)
    df.insert(0, "person", [f"X{i}" for i in range(len(df))])
    out = assess_frame(df, paediatric_set=ped)
    assert set(out["assessment"]) <= {
        "within normal limits",
        "above normal limits",
        "below normal limits",
        "outside the reference range",
        "no reference",
    }
    _check_rows(out, df, paediatric_set=ped)
