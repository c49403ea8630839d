"""Paediatric z-scores against the check values of the project's reference notes
(normal-limits.md section 9, checks 6-12, computed from the published models:
PHN, Lopez et al. Circ Cardiovasc Imaging 2017, coefficient table [V];
Detroit, Pettersen et al. J Am Soc Echocardiogr 2008, coefficient table [V2]).
Measurements are given in mm (the catalogue unit)."""

import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st

from tracker.normals import paediatric as P
from tracker.normals.assess import assess
from tracker.normals.classes import ABOVE, OUTSIDE, WITHIN

TOL = 0.01

CHECKS = [
    # set, measure, value mm, BSA m2, expected z   (check number in section 9)
    ("detroit2008", "ivsd", 8.0, 1.0, 1.40),  # 6
    ("detroit2008", "ivsd", 12.0, 1.5, 2.47),  # 7
    ("detroit2008", "lvidd", 45.0, 1.0, 1.07),  # 8
    ("detroit2008", "lvidd", 40.0, 1.5, -1.02),  # 8
    ("detroit2008", "lvpwd", 6.0, 1.0, 0.53),  # 9
    ("detroit2008", "lvpwd", 10.0, 1.5, 2.23),  # 9
    ("phn2017", "ivsd", 8.0, 1.0, 2.44),  # 10
    ("phn2017", "ivsd", 12.0, 1.5, 4.89),  # 10
    ("phn2017", "lvidd", 45.0, 1.0, 1.85),  # 11
    ("phn2017", "lvidd", 40.0, 1.5, -1.69),  # 11
    ("phn2017", "lvpwd", 6.0, 1.0, 0.33),  # 12
    ("phn2017", "lvpwd", 10.0, 1.5, 3.11),  # 12
]


@pytest.mark.parametrize(("set_id", "measure", "mm", "bsa", "z"), CHECKS)
def test_z_matches_check_values(set_id, measure, mm, bsa, z):
    r = P.paediatric_z(measure, mm, bsa, 10.0, set_id)
    assert r.z == pytest.approx(z, abs=TOL)
    assert r.set_id == set_id


@pytest.mark.parametrize(("set_id", "measure", "mm", "bsa", "z"), CHECKS)
def test_assess_uses_the_same_z_for_children(set_id, measure, mm, bsa, z):
    a = assess(measure, mm, "female", 10.0, bsa, paediatric_set=set_id)
    assert a.z == pytest.approx(z, abs=TOL)
    assert a.reference_set == set_id
    assert a.assessment == (ABOVE if z > 2 else WITHIN)


def test_phn_is_default_and_mwt_uses_ivsd_model():
    a = assess("mwt_echo", 12.0, "male", 12.0, 1.5)
    assert a.reference_set == "phn2017"
    assert a.z == pytest.approx(4.89, abs=TOL)  # check 10 (IVSd model)
    assert "IVSd model" in a.note


# PHN predicted mean (+2 SD) in cm at BSA 0.5 / 1.0 / 1.5 / 2.0 (notes section 5a, computed
# from the PHN coefficient table), reported to 0.01 cm, so tolerance 0.06 mm.
PHN_PREDICTED = {
    "ivsd": ((0.44, 0.58, 0.68, 0.77), (0.58, 0.76, 0.89, 1.00)),
    "lvpwd": ((0.43, 0.57, 0.67, 0.75), (0.57, 0.75, 0.88, 0.99)),
    "lvidd": ((2.85, 3.89, 4.67, 5.31), (3.33, 4.55, 5.46, 6.22)),
}


@pytest.mark.parametrize("measure", sorted(PHN_PREDICTED))
def test_phn_predicted_mean_and_upper_limit(measure):
    means, uppers = PHN_PREDICTED[measure]
    r = P.z_scores(measure, np.full(4, 5.0), np.array([0.5, 1.0, 1.5, 2.0]), np.full(4, 8.0), "phn2017")
    np.testing.assert_allclose(r["predicted_mm"], np.array(means) * 10, atol=0.06)
    np.testing.assert_allclose(r["upper_mm"], np.array(uppers) * 10, atol=0.06)


def test_detroit_predicted_ivsd_mean():
    # Notes section 5b: Detroit IVSd mean 0.71 cm at BSA 1.5 and 0.92 cm at BSA 2.0 (computed).
    r = P.z_scores("ivsd", np.array([7.0, 9.0]), np.array([1.5, 2.0]), np.array([14.0, 16.0]), "detroit2008")
    np.testing.assert_allclose(r["predicted_mm"], [7.1, 9.2], atol=0.06)


@pytest.mark.parametrize("set_id", ["phn2017", "detroit2008"])
def test_refuses_bsa_25_and_age_25(set_id):
    for bsa, age in ((2.5, 15.0), (1.5, 25.0)):
        r = P.paediatric_z("ivsd", 9.0, bsa, age, set_id)
        assert r.assessment == OUTSIDE
        assert r.z is None and r.lower_mm is None and r.upper_mm is None and r.predicted_mm is None
        assert "outside" in r.reason


def test_assess_child_with_bsa_25_is_outside_with_no_number():
    a = assess("ivsd", 9.0, "male", 15.0, 2.5)
    assert a.assessment == OUTSIDE
    assert a.z is None and a.lower is None and a.upper is None


def test_assess_named_paediatric_set_refuses_age_25():
    a = assess("ivsd", 9.0, "male", 25.0, 1.8, "phn2017")
    assert a.assessment == OUTSIDE and a.z is None


def test_range_edges():
    # PHN: 0-18 y, BSA 0.1-2.2 m2 (engineering default); Detroit: BSA 0.15-2.0 m2 [V2].
    ok = lambda s, b, a: P.paediatric_z("ivsd", 6.0, b, a, s).z is not None  # noqa: E731
    assert ok("phn2017", 2.2, 18.0) and not ok("phn2017", 2.21, 10) and not ok("phn2017", 1.0, 18.01)
    assert ok("phn2017", 0.1, 0.0) and not ok("phn2017", 0.09, 0.5)
    assert ok("detroit2008", 2.0, 17) and not ok("detroit2008", 2.01, 17)
    assert ok("detroit2008", 0.15, 0.1) and not ok("detroit2008", 0.14, 0.1)


def test_missing_bsa_is_no_reference():
    r = P.paediatric_z("lvidd", 40.0, None, 10.0)
    assert r.z is None and r.assessment == "no reference" and "BSA" in r.reason


def test_unknown_set_and_measure():
    with pytest.raises(ValueError):
        P.paediatric_z("ivsd", 8.0, 1.0, 10.0, "nonexistent")
    with pytest.raises(ValueError):
        P.paediatric_z("lvef_echo", 60.0, 1.0, 10.0)


@given(
    mm1=st.floats(1, 80),
    mm2=st.floats(1, 80),
    bsa=st.floats(0.15, 2.0),
    measure=st.sampled_from(["ivsd", "lvpwd", "lvidd"]),
    set_id=st.sampled_from(["phn2017", "detroit2008"]),
)
def test_z_monotone_in_value_and_zero_at_predicted(mm1, mm2, bsa, measure, set_id):
    lo, hi = sorted((mm1, mm2))
    a, b = P.paediatric_z(measure, lo, bsa, 9.0, set_id), P.paediatric_z(measure, hi, bsa, 9.0, set_id)
    assert a.z <= b.z
    assert P.paediatric_z(measure, a.predicted_mm, bsa, 9.0, set_id).z == pytest.approx(0.0, abs=1e-9)
    assert P.paediatric_z(measure, a.upper_mm, bsa, 9.0, set_id).z == pytest.approx(2.0, abs=1e-9)
