"""Diastolic criteria and algorithm against the project's reference notes
(normal-limits.md section 3a, ASE/EACVI 2016, Nagueh et al. [V2]: average E/e' > 14,
septal e' < 7 or lateral e' < 10 cm/s, TR > 2.8 m/s, LAVI > 34 mL/m2; >50% dysfunction,
50% indeterminate, <50% normal; checks 13-14 of section 9; section 3b age table,
EAE/ASE 2009)."""

import numpy as np
import pandas as pd
import pytest
from hypothesis import given
from hypothesis import strategies as st

from tracker.normals import diastolic as D
from tracker.normals.assess import assess
from tracker.normals.classes import BELOW, OUTSIDE, WITHIN


def test_check_13_indeterminate():
    r = D.diastolic_function(e_over_e_prime=15, e_prime_septal=6, tr_vmax=2.6, lavi=30)
    assert (r.n_positive, r.n_available) == (2, 4)
    assert r.conclusion == D.INDETERMINATE
    assert set(r.positive) == {"e_over_e_prime", "e_prime"}


def test_check_14_normal():
    r = D.diastolic_function(e_over_e_prime=12, e_prime_lateral=11, e_prime_septal=8, tr_vmax=2.4, lavi=28)
    assert (r.n_positive, r.n_available) == (0, 4)
    assert r.conclusion == D.NORMAL


def test_three_of_four_is_dysfunction():
    r = D.diastolic_function(e_over_e_prime=15, e_prime_septal=6, tr_vmax=3.0, lavi=30)
    assert r.conclusion == D.DYSFUNCTION


def test_cut_offs_are_strict():
    # On the cut-off the criterion is negative: > 14, < 7, < 10, > 2.8, > 34.
    on = D.diastolic_function(e_over_e_prime=14, e_prime_septal=7, e_prime_lateral=10, tr_vmax=2.8, lavi=34)
    assert on.n_positive == 0
    past = D.diastolic_function(e_over_e_prime=14.1, e_prime_septal=7.5, e_prime_lateral=9.9, tr_vmax=2.81, lavi=34.1)
    assert past.n_positive == 4 and past.conclusion == D.DYSFUNCTION


def test_average_e_over_e_prime_computed_from_e_and_both_e_prime():
    # E 100 cm/s, septal 6, lateral 8 -> average e' 7 -> E/e' 14.3 > 14.
    r = D.diastolic_function(mv_e=100, e_prime_septal=6, e_prime_lateral=8)
    assert r.e_over_e_prime == pytest.approx(100 / 7)
    assert "e_over_e_prime" in r.positive
    # One e' only: E/e' cannot be averaged, so the criterion is missing.
    assert "e_over_e_prime" in D.diastolic_function(mv_e=100, e_prime_septal=6, tr_vmax=2.0).missing


def test_available_criteria_rule_and_minimum():
    r = D.diastolic_function(e_prime_septal=6, tr_vmax=2.5, lavi=40)  # 2 of 3 -> > 50%
    assert r.conclusion == D.DYSFUNCTION
    assert D.diastolic_function(e_prime_septal=8, tr_vmax=3.0, lavi=30).conclusion == D.NORMAL  # 1 of 3
    assert D.diastolic_function(tr_vmax=3.0).conclusion == D.NOT_ASSESSABLE  # fewer than 2 available
    assert D.diastolic_function(tr_vmax=3.0, min_available=1).conclusion == D.DYSFUNCTION


def test_thresholds_from_data_file():
    assert D.thresholds() == {
        "e_over_e_prime": 14.0,
        "e_prime_septal": 7.0,
        "e_prime_lateral": 10.0,
        "tr_vmax": 2.8,
        "lavi": 34.0,
    }
    r = D.diastolic_function(lavi=20, tr_vmax=2)
    assert "Nagueh" in r.source and "2016" in r.source and "normal LVEF" in r.caution


def test_single_values_through_assess():
    assert assess("e_prime_septal", 6.9, "male", 40).assessment == BELOW
    assert assess("e_prime_lateral", 10.0, "female", 40).assessment == WITHIN
    assert assess("tr_vmax", 2.9, "female", 40).assessment == "above normal limits"
    assert assess("e_over_e_prime", 15, "male", 40).assessment == "above normal limits"


def test_age_specific_septal_e_prime():
    # EAE/ASE 2009, septal e' 21-40 y: 15.5 +- 2.7 cm/s [V2] -> limits 10.1-20.9.
    a = assess("e_prime_septal", 10.1, "male", 30.0, reference_set="nagueh2009_age")
    assert a.z == pytest.approx(-2.0) and a.assessment == WITHIN
    assert (a.lower, a.upper) == (pytest.approx(10.1), pytest.approx(20.9))
    # > 60 y: 10.4 +- 2.1
    assert assess("e_prime_septal", 6.1, "female", 70.0, reference_set="nagueh2009_age").assessment == BELOW
    # 16-20 y band covers a 17-year-old; under 16 the table does not apply.
    assert assess("e_prime_septal", 14.9, "male", 17.0, reference_set="nagueh2009_age").z == pytest.approx(0.0)
    young = assess("e_prime_septal", 14.9, "male", 15.0, reference_set="nagueh2009_age")
    assert young.assessment == OUTSIDE and young.z is None
    # band edge in completed years: 20.9 y is still 16-20, 21.0 y is 21-40
    assert D.age_reference("e_prime_septal", 20.9).mean == 14.9
    assert D.age_reference("e_prime_septal", 21.0).mean == 15.5


def test_lateral_age_values_carry_memory_tag():
    a = assess("e_prime_lateral", 16.1, "male", 50.0, reference_set="nagueh2009_age")
    assert a.z == pytest.approx(0.0) and "from memory, verify" in a.source


opt = st.one_of(st.none(), st.floats(0.5, 30))


@given(
    ratio=opt,
    sep=opt,
    lat=opt,
    tr=st.one_of(st.none(), st.floats(0.5, 5)),
    lavi=st.one_of(st.none(), st.floats(5, 80)),
)
def test_frame_and_scalar_agree(ratio, sep, lat, tr, lavi):
    one = D.diastolic_function(e_over_e_prime=ratio, e_prime_septal=sep, e_prime_lateral=lat, tr_vmax=tr, lavi=lavi)
    df = pd.DataFrame(
        {
            "e_over_e_prime": [np.nan if ratio is None else ratio] * 2,
            "e_prime_septal": [np.nan if sep is None else sep] * 2,
            "e_prime_lateral": [np.nan if lat is None else lat] * 2,
            "tr_vmax": [np.nan if tr is None else tr] * 2,
            "lavi": [np.nan if lavi is None else lavi] * 2,
        }
    )
    out = D.diastolic_function_frame(df)
    assert list(out["diastolic_conclusion"]) == [one.conclusion] * 2
    assert 2 * one.n_positive > one.n_available or one.conclusion != D.DYSFUNCTION
