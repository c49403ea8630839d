"""BSA and BMI against the worked values of the project's reference notes
(normal-limits.md section 9, checks 1-3, computed from the published equations:
Mosteller 1987, DuBois & DuBois 1916, Haycock 1978, Gehan & George 1970)."""

import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st

from tracker.normals import bsa as B

TOL = 0.01

# (height cm, weight kg) -> Mosteller, DuBois, Haycock, Gehan-George (m2), BMI
CHECKS = [
    ((170, 70), (1.818, 1.810, 1.826, 1.831, 24.22)),  # check 1
    ((140, 35), (1.167, 1.171, 1.164, 1.181, 17.86)),  # check 2 (BMI from section 1 table)
    ((75, 9), (0.433, 0.418, 0.438, 0.451, 16.00)),  # check 3 (BMI from section 1 table)
]


@pytest.mark.parametrize(("hw", "expected"), CHECKS)
def test_bsa_formulas_match_worked_values(hw, expected):
    h, w = hw
    mosteller, dubois, haycock, gehan, bmi = expected
    assert B.bsa_mosteller(h, w) == pytest.approx(mosteller, abs=TOL)
    assert B.bsa_dubois(h, w) == pytest.approx(dubois, abs=TOL)
    assert B.bsa_haycock(h, w) == pytest.approx(haycock, abs=TOL)
    assert B.bsa_gehan_george(h, w) == pytest.approx(gehan, abs=TOL)
    assert B.bmi(h, w) == pytest.approx(bmi, abs=TOL)


@pytest.mark.parametrize(("hw", "expected"), CHECKS)
def test_registry_names_and_default(hw, expected):
    h, w = hw
    assert B.bsa(h, w) == pytest.approx(expected[0], abs=TOL)  # Mosteller is the default
    for name, exp in zip(("mosteller", "dubois", "haycock", "gehan_george"), expected[:4]):
        assert B.bsa(h, w, name) == pytest.approx(exp, abs=TOL)
    assert set(B.BSA_FORMULAS) == {"mosteller", "dubois", "haycock", "gehan_george"}


def test_dubois_metre_form_agrees():
    # DuBois & DuBois 1916, equivalent form 0.20247 * H(m)^0.725 * W^0.425 (notes section 1).
    for h, w in ((170, 70), (140, 35), (75, 9), (190, 110)):
        assert B.bsa_dubois(h, w) == pytest.approx(0.20247 * (h / 100) ** 0.725 * w**0.425, rel=1e-4)


def test_vectorised_matches_scalar_and_keeps_nan():
    h = np.array([170.0, 140.0, 75.0, np.nan])
    w = np.array([70.0, 35.0, 9.0, 60.0])
    out = B.bsa(h, w, "haycock")
    assert isinstance(out, np.ndarray) and out.shape == (4,)
    for i in range(3):
        assert out[i] == pytest.approx(B.bsa_haycock(float(h[i]), float(w[i])))
    assert np.isnan(out[3])
    assert isinstance(B.bsa(170, 70), float)


@pytest.mark.parametrize("bad", [0, -1, float("inf")])
def test_refuses_non_positive(bad):
    with pytest.raises(ValueError):
        B.bsa(bad, 70)
    with pytest.raises(ValueError):
        B.bsa(170, bad, "dubois")
    with pytest.raises(ValueError):
        B.bmi(np.array([170.0, bad]), 70)


def test_unknown_formula():
    with pytest.raises(ValueError):
        B.bsa(170, 70, "nonexistent")


@given(
    h=st.floats(45, 220),
    w1=st.floats(2, 200),
    w2=st.floats(2, 200),
    name=st.sampled_from(sorted(B.BSA_FORMULAS)),
)
def test_bsa_monotone_in_weight(h, w1, w2, name):
    lo, hi = sorted((w1, w2))
    assert B.bsa(h, lo, name) <= B.bsa(h, hi, name)


@given(h1=st.floats(45, 220), h2=st.floats(45, 220), w=st.floats(2, 200), name=st.sampled_from(sorted(B.BSA_FORMULAS)))
def test_bsa_monotone_in_height(h1, h2, w, name):
    lo, hi = sorted((h1, h2))
    assert B.bsa(lo, w, name) <= B.bsa(hi, w, name)
