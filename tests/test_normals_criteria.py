"""HCM wall-thickness thresholds at the band edges, per guideline, against the project's
guideline notes (guidelines.md section 4): ESC 2023 (Arbelo et al.) adult >= 15 mm,
>= 13 mm in a first-degree relative, child z > 2 [V]; AHA/ACC 2020 (Ommen et al.)
adult >= 15 mm, 13-14 mm in family members or genotype-positive, child z > 2.5 without
and > 2 with family history or positive genetics [V2]."""

import pandas as pd
import pytest

from tracker.normals.criteria import RULE_SETS, wall_thickness_criteria_frame, wall_thickness_criterion

ESC, AHA = "esc_2023", "aha_acc_2020"


@pytest.mark.parametrize("g", [ESC, AHA])
@pytest.mark.parametrize(("mm", "met"), [(14.9, False), (15.0, True), (15.1, True)])
def test_adult_15_mm(g, mm, met):
    r = wall_thickness_criterion(g, age_years=40, mwt_mm=mm)
    assert r.met is met and r.threshold == 15.0 and r.threshold_unit == "mm" and r.rule == "adult"


@pytest.mark.parametrize("g", [ESC, AHA])
@pytest.mark.parametrize(("mm", "met"), [(12.9, False), (13.0, True)])
def test_adult_first_degree_relative_13_mm(g, mm, met):
    r = wall_thickness_criterion(g, age_years=40, mwt_mm=mm, first_degree_relative=True)
    assert r.met is met and r.threshold == 13.0 and r.rule == "adult_relative"


def test_genotype_positive_adult_differs_between_guidelines():
    # AHA/ACC 2020: 13-14 mm diagnostic with a positive genetic test [V2].
    aha = wall_thickness_criterion(AHA, age_years=30, mwt_mm=13.0, genotype_positive=True)
    assert aha.met is True and aha.threshold == 13.0
    # ESC 2023: >= 13 mm applies to first-degree relatives; otherwise 13-14 mm needs
    # supporting features (borderline) [V].
    esc = wall_thickness_criterion(ESC, age_years=30, mwt_mm=13.0, genotype_positive=True)
    assert esc.met is False and esc.threshold == 15.0 and esc.borderline
    assert "supporting features" in esc.note
    assert wall_thickness_criterion(ESC, age_years=30, mwt_mm=12.9).borderline is False


@pytest.mark.parametrize(("z", "met"), [(2.0, False), (2.01, True)])
def test_esc_child_z_above_2(z, met):
    for relative in (False, True):
        r = wall_thickness_criterion(ESC, age_years=10, mwt_z=z, first_degree_relative=relative)
        assert r.met is met and r.threshold == 2.0 and r.threshold_unit == "z"


@pytest.mark.parametrize(("z", "met"), [(2.5, False), (2.51, True)])
def test_aha_child_without_family_history_z_above_2_5(z, met):
    r = wall_thickness_criterion(AHA, age_years=10, mwt_z=z)
    assert r.met is met and r.threshold == 2.5 and r.rule == "child"


@pytest.mark.parametrize(("z", "met"), [(2.0, False), (2.01, True)])
def test_aha_child_with_family_history_or_genotype_z_above_2(z, met):
    for kw in ({"first_degree_relative": True}, {"genotype_positive": True}):
        r = wall_thickness_criterion(AHA, age_years=10, mwt_z=z, **kw)
        assert r.met is met and r.threshold == 2.0 and r.rule == "child_relative"


def test_child_rule_needs_z_and_adult_rule_needs_mm():
    child = wall_thickness_criterion(ESC, age_years=17.9, mwt_mm=20.0)
    assert child.met is None and "z-score" in child.note
    grown = wall_thickness_criterion(ESC, age_years=18.0, mwt_z=3.0)
    assert grown.met is None and grown.rule == "adult"


def test_result_names_guideline_and_caution():
    r = wall_thickness_criterion(AHA, age_years=40, mwt_mm=16)
    assert "2020 AHA/ACC" in r.guideline and "[V2]" in r.source
    assert "clinician decides" in r.caution and "local protocols" in r.caution and "current guideline" in r.caution
    assert "[V]" in wall_thickness_criterion(ESC, age_years=40, mwt_mm=16).source
    assert set(RULE_SETS) == {ESC, AHA, "aha_acc_2024"}


def test_frame_matches_scalar():
    df = pd.DataFrame(
        {
            "age_years": [40, 40, 40, 10, 10, None],
            "mwt_mm": [14.9, 13.0, 13.0, None, None, 20.0],
            "mwt_z": [None, None, None, 2.3, 2.3, None],
            "first_degree_relative": ["no", "yes", "no", "no", "yes", "yes"],
            "genotype_positive": [False, False, True, False, False, False],
        },
        index=[10, 11, 12, 13, 14, 15],
    )
    for g in (ESC, AHA):
        out = wall_thickness_criteria_frame(df, g)
        assert list(out.index) == list(df.index)
        for i, row in df.iterrows():
            one = wall_thickness_criterion(
                g,
                age_years=None if pd.isna(row.age_years) else row.age_years,
                mwt_mm=None if pd.isna(row.mwt_mm) else row.mwt_mm,
                mwt_z=None if pd.isna(row.mwt_z) else row.mwt_z,
                first_degree_relative=row.first_degree_relative == "yes",
                genotype_positive=bool(row.genotype_positive),
            )
            got = out.loc[i, "met"]
            assert (None if pd.isna(got) else bool(got)) is one.met
    aha = wall_thickness_criteria_frame(df, AHA)
    assert list(aha["met"].astype(object).where(aha["met"].notna(), None)) == [False, True, True, False, True, None]


def test_frame_refuses_bad_yes_no():
    with pytest.raises(ValueError):
        bad = pd.DataFrame({"age_years": [40], "mwt_mm": [15], "first_degree_relative": ["maybe"]})
        wall_thickness_criteria_frame(bad, ESC)
