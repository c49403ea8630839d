"""HCM Risk-SCD against the worked examples of guidelines.md section 5a."""

from __future__ import annotations

import pytest
from scipy.optimize import minimize_scalar

from tracker.engines import risk

# guidelines.md s5a worked examples:
# (age, MWT, LA, LVOT, FHx, NSVT, syncope, PI, 5-y risk %)
WORKED = [
    (45, 20, 42, 30, 0, 0, 0, 2.4229, 2.23),
    (60, 15, 40, 10, 0, 0, 0, 1.7298, 1.12),
    (40, 18, 38, 0, 0, 1, 0, 3.0067, 3.97),
    (45, 22, 44, 30, 0, 0, 1, 3.2628, 5.10),
    (20, 30, 50, 100, 1, 0, 0, 3.9734, 10.10),
    (30, 25, 45, 50, 1, 1, 1, 4.9959, 25.62),
]

NO_EXCLUSIONS = dict(
    prior_cardiac_arrest_or_sustained_vt=False, competitive_athlete=False, metabolic_infiltrative_or_syndromic=False
)


def _kwargs(age, mwt, la, lvot, fh, ns, sy, **over):
    kw = dict(
        age_years=age, mwt_mm=mwt, la_diameter_mm=la, lvot_max_mmhg=lvot,
        family_history_scd=bool(fh), nsvt=bool(ns), unexplained_syncope=bool(sy), **NO_EXCLUSIONS,
    )
    kw.update(over)
    return kw


@pytest.mark.parametrize("row", WORKED, ids=[f"example{i + 1}" for i in range(len(WORKED))])
def test_equation_worked_examples(row):
    *x, pi, pct = row
    p = risk.prognostic_index(*x)
    assert p == pytest.approx(pi, abs=1e-4)  # guidelines.md s5a, PI column
    assert risk.risk_from_index(p) == pytest.approx(pct, abs=0.01)  # guidelines.md s5a, to 0.01 point


@pytest.mark.parametrize("row", [r for r in WORKED if r[3] >= 2], ids=lambda r: f"age{r[0]}")
def test_checked_estimate_worked_examples(row):
    *x, pi, pct = row
    r = risk.hcm_risk_scd(**_kwargs(*x))
    assert r.computed and r.refusal_reasons == ()
    assert r.risk_5y_pct == pytest.approx(pct, abs=0.01)  # guidelines.md s5a
    assert r.prognostic_index == pytest.approx(pi, abs=1e-4)


def test_example3_lvot_zero_is_outside_validated_range():
    # guidelines.md s5a example 3 uses LVOT 0 mmHg, below the validated 2-154 mmHg range:
    # the equation gives 3.97 %, the checked estimate refuses.
    r = risk.hcm_risk_scd(**_kwargs(40, 18, 38, 0, 0, 1, 0))
    assert not r.computed and r.risk_5y_pct is None
    assert any("lvot_max_mmhg" in s for s in r.refusal_reasons)


def test_boundary_397_is_below_4():
    # guidelines.md s5a: 3.97 % (example 3) is just below the 4 % band limit.
    pct = risk.risk_from_index(risk.prognostic_index(40, 18, 38, 0, 0, 1, 0))
    assert 3.96 < pct < 4.0
    for g in (risk.ESC2014, risk.ESC2023):
        assert risk.band(pct, g).category == risk.LOW
        assert risk.band(4.0, g).category == risk.INTERMEDIATE
        assert risk.band(5.999, g).category == risk.INTERMEDIATE
        assert risk.band(6.0, g).category == risk.HIGH


def test_bands_of_examples_and_guideline_wording():
    low = risk.hcm_risk_scd(**_kwargs(45, 20, 42, 30, 0, 0, 0))  # 2.23 %
    mid = risk.hcm_risk_scd(**_kwargs(45, 22, 44, 30, 0, 0, 1))  # 5.10 %
    high = risk.hcm_risk_scd(**_kwargs(20, 30, 50, 100, 1, 0, 0))  # 10.10 %
    assert [r.esc2014.category for r in (low, mid, high)] == [risk.LOW, risk.INTERMEDIATE, risk.HIGH]
    assert [r.esc2023.category for r in (low, mid, high)] == [risk.LOW, risk.INTERMEDIATE, risk.HIGH]
    # ESC 2014 [V2] and ESC 2023 [V] wording kept apart.
    assert "generally not indicated" in low.esc2014.wording
    assert "LGE" in low.esc2023.wording and "LGE" not in low.esc2014.wording
    assert "IIa B" in high.esc2023.wording and "IIa" not in high.esc2014.wording
    assert low.esc2014.guideline == "ESC 2014" and low.esc2023.guideline == "ESC 2023"


def test_result_carries_model_ranges_and_caution():
    r = risk.hcm_risk_scd(**_kwargs(45, 20, 42, 30, 0, 0, 0))
    assert "O'Mahony" in r.model and "2014" in r.model
    assert "16-115" in r.validated_ranges and "2-154" in r.validated_ranges
    for phrase in ("Decision support only", "clinician decides", "local", "current guideline",
                   "5-year population estimate", "late gadolinium enhancement", "ejection fraction", "aneurysm"):
        assert phrase in r.caution


@pytest.mark.parametrize(
    "field, value, ok",
    [
        ("age_years", 16, True), ("age_years", 115, True), ("age_years", 115.5, False),
        ("mwt_mm", 10, True), ("mwt_mm", 9.9, False), ("mwt_mm", 35, True), ("mwt_mm", 35.1, False),
        ("la_diameter_mm", 28, True), ("la_diameter_mm", 27.9, False), ("la_diameter_mm", 67, True),
        ("la_diameter_mm", 68, False),
        ("lvot_max_mmhg", 2, True), ("lvot_max_mmhg", 1.9, False), ("lvot_max_mmhg", 154, True),
        ("lvot_max_mmhg", 155, False),
    ],
)
def test_validated_ranges(field, value, ok):
    # Ranges: guidelines.md s5a "Input ranges" [V2], inclusive.
    r = risk.hcm_risk_scd(**_kwargs(45, 20, 42, 30, 0, 0, 0, **{field: value}))
    assert r.computed is ok
    if not ok:
        assert r.risk_5y_pct is None and r.esc2014 is None and r.esc2023 is None
        assert any(field in s and "outside validated range" in s for s in r.refusal_reasons)


@pytest.mark.parametrize("field", ["age_years", "mwt_mm", "la_diameter_mm", "lvot_max_mmhg",
                                   "family_history_scd", "nsvt", "unexplained_syncope"])
def test_missing_input_refused(field):
    r = risk.hcm_risk_scd(**_kwargs(45, 20, 42, 30, 0, 0, 0, **{field: None}))
    assert not r.computed and r.risk_5y_pct is None
    assert f"missing: {field}" in r.refusal_reasons


def test_nan_is_missing():
    r = risk.hcm_risk_scd(**_kwargs(45, float("nan"), 42, 30, 0, 0, 0))
    assert not r.computed and "missing: mwt_mm" in r.refusal_reasons


@pytest.mark.parametrize("field", list(NO_EXCLUSIONS))
def test_exclusions_refused(field):
    # guidelines.md s5a "Do not apply".
    r = risk.hcm_risk_scd(**_kwargs(45, 20, 42, 30, 0, 0, 0, **{field: True}))
    assert not r.computed and any(s.startswith("exclusion applies") for s in r.refusal_reasons)
    r = risk.hcm_risk_scd(**_kwargs(45, 20, 42, 30, 0, 0, 0, **{field: None}))
    assert not r.computed and f"exclusion not recorded: {field}" in r.refusal_reasons


def test_age_under_16_is_exclusion():
    r = risk.hcm_risk_scd(**_kwargs(15, 20, 42, 30, 0, 0, 0))
    assert not r.computed
    assert any("under 16" in s for s in r.refusal_reasons)


def test_mwt_term_peaks_near_27_1_mm():
    # guidelines.md s5a computed property: 0.15939858 / (2 * 0.00294271) = 27.08 mm.
    opt = minimize_scalar(lambda x: -risk.mwt_term(x), bounds=(10, 35), method="bounded")
    assert opt.x == pytest.approx(27.08, abs=0.01)
    assert risk.mwt_term(30) < risk.mwt_term(27.1) > risk.mwt_term(24)
    a = risk.hcm_risk_scd(**_kwargs(45, 27, 42, 30, 0, 0, 0)).risk_5y_pct
    b = risk.hcm_risk_scd(**_kwargs(45, 35, 42, 30, 0, 0, 0)).risk_5y_pct
    assert b < a


def test_lvot_max_helper():
    assert risk.lvot_max_for_risk_scd(12.0, 64.0) == 64.0
    assert risk.lvot_max_for_risk_scd(12.0, None) == 12.0
    assert risk.lvot_max_for_risk_scd(None, None) is None
