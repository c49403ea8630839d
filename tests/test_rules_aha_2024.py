"""The 2024 AHA/ACC/AMSSM/HRS/PACES/SCMR HCM guideline as its own rule set (``aha_acc_2024``).

Checks every age band edge (the day before, on and after each birthday that
starts or ends a band) for each genotype x phenotype state, the release of
genotype-negative relatives, variant re-evaluation, the borderline state,
and that the rule set can be chosen in the settings, with --guideline and as
a cascade rule set.

Guideline rows (Ommen SR, Ho CY, Asif IM, et al. J Am Coll Cardiol
2024;83:2324-2405), named beside each check:
- §6.9 G+P-: children and adolescents every 1-2 y, adults every 3-5 y [V2];
- family-screening table: children of P/LP or early-onset families 1-2 y,
  other children 2-3 y, adults 3-5 y [V2];
- §6.8 rec 13: no ongoing screening of genotype-negative relatives
  (3: No Benefit) unless the variant is downgraded [V2];
- key point 3: reconfirm pathogenicity every 2-3 y [V]; §6.8 rec 8 [V];
- Table 7: affected SCD risk assessment every 1-2 y [V];
- borderline state 6-12 months: common practice (no 2024 number).
The 18 y child/adult boundary is common practice.  All people are invented.
"""

from __future__ import annotations

import datetime as dt
import json
from pathlib import Path

import pytest

from tracker.domain.dates import PartialDate
from tracker.engines.cascade import RULE_SETS as CASCADE_RULE_SETS
from tracker.engines.schedule import PersonState, Policy, matching_rules, propose_recall
from tracker.rules import load_rule_set
from tracker.settings import parse_settings

RS = load_rule_set("aha_acc_2024")
BORN = dt.date(2008, 3, 20)  # invented relative: 18th birthday 2026-03-20, 50th 2058-03-20
EIGHTEEN = dt.date(2026, 3, 20)
FIFTY = dt.date(2058, 3, 20)
ONE_DAY = dt.timedelta(days=1)
SETTINGS = Path(__file__).parent.parent / "demo_family" / "clinic.toml"

# state name -> (PersonState fields, rule before 18, rule from 18, guideline row)
STATES = {
    "carrier, phenotype negative": (
        dict(genotype="carrier", family_features={"plp_variant"}),
        "aha24.child.carrier", "aha24.adult.carrier", "§6.9 G+P-: 1-2 y children, 3-5 y adults [V2]",
    ),
    "untested, P/LP family": (
        dict(genotype="at_risk_untested", family_features={"plp_variant"}),
        "aha24.child.at_risk_variant_or_early_onset", "aha24.adult.at_risk_variant", "table: 1-2 y / 3-5 y [V2]",
    ),
    "untested, early-onset family without a P/LP variant": (
        dict(genotype="at_risk_untested", family_features={"early_onset"}),
        "aha24.child.at_risk_variant_or_early_onset", "aha24.adult.at_risk", "table: 1-2 y / 3-5 y [V2]",
    ),
    "untested, other family": (
        dict(genotype="at_risk_untested"),
        "aha24.child.at_risk_other", "aha24.adult.at_risk", "table: 2-3 y / 3-5 y [V2]",
    ),
    "VUS family (genotype uncertain)": (
        dict(genotype="uncertain", family_features={"familial_disease"}),
        "aha24.child.at_risk_other", "aha24.adult.at_risk", "table: 2-3 y / 3-5 y [V2]",
    ),
    "carrier, borderline phenotype": (
        dict(genotype="carrier", phenotype="borderline", family_features={"plp_variant"}),
        "aha24.borderline", "aha24.borderline", "borderline state 6-12 months (common practice)",
    ),
    "untested, borderline phenotype": (
        dict(genotype="at_risk_untested", phenotype="borderline"),
        "aha24.borderline", "aha24.borderline", "borderline state 6-12 months (common practice)",
    ),
    "affected": (
        dict(genotype="carrier", phenotype="positive", family_features={"plp_variant"}),
        "aha24.affected.scd_risk", "aha24.affected.scd_risk", "Table 7: every 1-2 y [V]",
    ),
}  # fmt: skip

INTERVALS = {
    "aha24.child.carrier": (12, 24),
    "aha24.child.at_risk_variant_or_early_onset": (12, 24),
    "aha24.child.at_risk_other": (24, 36),
    "aha24.adult.carrier": (36, 60),
    "aha24.adult.at_risk": (36, 60),
    "aha24.adult.at_risk_variant": (36, 60),
    "aha24.borderline": (6, 12),
    "aha24.affected.scd_risk": (12, 24),
}


def relative(**kw) -> PersonState:
    kw.setdefault("person_code", "AHX01-III-4")
    return PersonState(birth=PartialDate(BORN), **kw)


@pytest.mark.parametrize("state", sorted(STATES))
@pytest.mark.parametrize("offset,adult", [(-ONE_DAY, False), (dt.timedelta(0), True), (ONE_DAY, True)])
def test_band_edge_at_18(state, offset, adult):
    fields, child_rule, adult_rule, row = STATES[state]
    on = EIGHTEEN + offset
    got = [r.id for r in matching_rules(relative(**fields), RS, on)]
    want = adult_rule if adult else child_rule
    assert got == [want], (state, on, row)
    assert RS.rule(want).interval_months == INTERVALS[want], row


@pytest.mark.parametrize("state", sorted(STATES))
def test_band_edge_at_birth(state):
    """Screening can begin at any age (key point 3 [V]): a rule covers the day of birth."""
    fields, child_rule, _, row = STATES[state]
    assert [r.id for r in matching_rules(relative(**fields), RS, BORN)] == [child_rule], row


@pytest.mark.parametrize("state", sorted(STATES))
@pytest.mark.parametrize("offset", [-ONE_DAY, dt.timedelta(0), ONE_DAY])
def test_no_band_edge_at_50_or_60(state, offset):
    """No stop age and no 60 y band in AHA/ACC 2024 [M]: the adult row holds either side of 50 and 60."""
    fields, _, adult_rule, row = STATES[state]
    for birthday in (FIFTY, dt.date(2068, 3, 20)):
        assert [r.id for r in matching_rules(relative(**fields), RS, birthday + offset)] == [adult_rule], row


@pytest.mark.parametrize("offset,shown", [(-ONE_DAY, False), (dt.timedelta(0), True), (ONE_DAY, True)])
def test_no_stop_age_advice_from_50(offset, shown):
    p = propose_recall(relative(genotype="carrier", family_features={"plp_variant"}, last_visit=FIFTY - dt.timedelta(days=400)),
                       RS, Policy("shortest"), FIFTY + offset)  # fmt: skip
    assert any(f.code == "aha24.advice.no_stop_age" for f in p.fired) is shown


def test_due_date_across_the_18_band_edge():
    """Carrier seen at 17 y: 1-2 y children's row, then the adult row once the candidate due date is 18 or over."""
    last = dt.date(2025, 9, 1)  # aged 17
    p = propose_recall(relative(genotype="carrier", family_features={"plp_variant"}, last_visit=last),
                       RS, Policy("shortest"), dt.date(2025, 10, 1))  # fmt: skip
    # shortest child interval 12 months -> 2026-09-01, when the person is 18: adult row 3-5 y, shortest 36 months
    assert p.rule_id == "aha24.adult.carrier" and p.due == dt.date(2028, 9, 1)


@pytest.mark.parametrize("offset", [-ONE_DAY, dt.timedelta(0), ONE_DAY])
def test_genotype_negative_relative_is_released_at_any_age(offset):
    """§6.8 rec 13 (3: No Benefit) [V2]: no ongoing screening; the caution names the downgrade and reconfirmation."""
    p = propose_recall(relative(genotype="non_carrier", family_features={"plp_variant"}, last_visit=dt.date(2024, 1, 5)),
                       RS, Policy(), EIGHTEEN + offset)  # fmt: skip
    assert p.status == "released" and p.rule_id == "aha24.release.non_carrier"
    assert any("downgraded" in c for c in p.cautions) and any("2 to 3 years" in c for c in p.cautions)
    assert any(f.code == "aha24.advice.variant_reevaluation" for f in p.fired)


def test_genotype_negative_after_downgrade_returns_to_screening():
    """Without a P/LP variant (downgraded), a negative result does not release [V2]: genotype unknown rows apply."""
    p = propose_recall(relative(genotype="non_carrier", last_visit=dt.date(2024, 1, 5)), RS, Policy(), dt.date(2030, 1, 1))
    assert p.status in ("due", "overdue") and p.rule_id == "aha24.adult.at_risk"


def test_variant_reevaluation_advice_every_two_to_three_years():
    """Key point 3 [V]: reconfirm the reported pathogenicity every 2-3 years."""
    advice = next(a for a in RS.advice if a.id == "aha24.advice.variant_reevaluation")
    assert "every 2 to 3 years" in advice.text and advice.source.tag == "V"
    p = propose_recall(relative(genotype="carrier", family_features={"plp_variant"}, last_visit=dt.date(2024, 1, 5)),
                       RS, Policy(), dt.date(2027, 1, 1))  # fmt: skip
    assert any(f.code == "aha24.advice.variant_reevaluation" for f in p.fired)


def test_sport_advice_only_for_a_clearly_negative_phenotype():
    """G+P- athletes: competitive sport of any intensity reasonable (2a) [V2]; borderline: deferred to specialist."""
    last = dt.date(2025, 6, 1)
    neg = propose_recall(relative(genotype="carrier", family_features={"plp_variant"}, athlete=True, last_visit=last),
                         RS, Policy(), dt.date(2026, 1, 1))  # fmt: skip
    brd = propose_recall(relative(genotype="carrier", phenotype="borderline", family_features={"plp_variant"},
                                  athlete=True, last_visit=last), RS, Policy(), dt.date(2026, 1, 1))  # fmt: skip
    assert "aha24.advice.gpn_sport" in {f.code for f in neg.fired}
    assert "aha24.advice.gpn_sport" not in {f.code for f in brd.fired}
    assert "aha24.advice.borderline_sport" in {f.code for f in brd.fired}
    assert brd.rule_id == "aha24.borderline" and brd.interval_months == 9  # midpoint of 6-12 months


def test_rule_set_is_its_own_not_a_copy_of_2020():
    """Never blended: every 2024 row cites the 2024 guideline or common practice, never the 2020 text."""
    for r in RS.rules:
        assert r.source.year in (2024, None), r.id
        assert "2020" not in r.source.section or "Lorenzini" in r.source.section, r.id
    assert RS.year == 2024 and "2324-2405" in RS.citation


# ---------------------------------------------------------------- selection


def test_selectable_in_settings():
    s = parse_settings({"schedule": {"guideline": "aha_acc_2024"}}, "clinic.toml")
    assert s.guideline == "aha_acc_2024"


def test_cascade_rule_set_for_2024():
    """§6.8 rec 6 (1 B-NR) [V]: cascade testing of first-degree relatives at any age, as the 2020 rule set."""
    rules = CASCADE_RULE_SETS["aha_acc_2024"]
    assert rules.min_age_years is None and "2024" in rules.title and "[V]" in rules.testing_source


@pytest.fixture(scope="module")
def demo_db(tmp_path_factory):
    from tracker.cli.app import main

    path = str(tmp_path_factory.mktemp("demo") / "demo.sqlite")
    assert main(["demo", "--db", path]) == 0
    return path


def test_recall_with_guideline_option(demo_db, run):
    # HV02-IV-1 (invented carrier child, 11 y on the date): §6.9 children 1-2 y [V2]; policy shortest -> 12 months
    r = run("recall", "HV02-IV-1", "--as-of", "2019-12-01", "--settings", SETTINGS, "--guideline", "aha_acc_2024",
            "--json", db=demo_db)  # fmt: skip
    assert r.code == 0, r
    d = json.loads(r.out)
    assert d["rule_set"] == "aha_acc_2024" and d["rule_id"] == "aha24.child.carrier" and d["interval_months"] == 12


def test_recall_with_settings_file(demo_db, run, tmp_path):
    settings = tmp_path / "clinic.toml"
    settings.write_text('[schedule]\nguideline = "aha_acc_2024"\npolicy = "shortest"\n', encoding="utf-8")
    r = run("recall", "HV01-IV-2", "--as-of", "2020-07-01", "--settings", settings, "--json", db=demo_db)
    assert r.code == 0, r
    d = json.loads(r.out)
    # carrier with an uncertain phenotype: the borderline row (6-12 months), never a sport clearance
    assert d["rule_set"] == "aha_acc_2024" and d["rule_id"] == "aha24.borderline" and d["interval_months"] == 6


def test_cascade_and_letter_accept_2024(demo_db, run, tmp_path):
    r = run("cascade", "HV01", "--as-of", "2026-11-30", "--guideline", "aha_acc_2024", "--json", db=demo_db)
    assert r.code == 0, r
    d = json.loads(r.out)
    assert d["guideline"] == "aha_acc_2024" and "2024" in d["guideline_title"]
    assert all("2024" in t["source"] for t in d["predictive_testing"])
    # A first-contact letter (HV01-IV-5, never contacted, adult) under the 2024 cascade rule set.
    from pypdf import PdfReader

    out = tmp_path / "letters"
    r = run("report", "letter", "HV01-IV-5", "--out", out, "--settings", SETTINGS, "--date", "2026-12-01",
            "--guideline", "aha_acc_2024", db=demo_db)  # fmt: skip
    assert r.code == 0, r
    assert "rule set aha_acc_2024" in r.out
    text = " ".join(" ".join((pg.extract_text() or "").split()) for f in out.rglob("*.pdf") for pg in PdfReader(str(f)).pages)
    assert "Letter: first contact" in text
