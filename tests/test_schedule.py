"""Recall proposals against guideline rows, age-band edges, modifiers, triggers and statuses.

Guideline rows are named beside each check (ESC 2023 = 2023 ESC cardiomyopathy
guideline; AHA/ACC 2020 = 2020 AHA/ACC HCM guideline alone;
ESC 2014 = 2014 ESC HCM guideline, every value from memory, verify).
All people are invented.
"""

from __future__ import annotations

import copy
import datetime as dt
import tomllib
from importlib import resources

import pandas as pd
import pytest
from hypothesis import given
from hypothesis import strategies as st

from tracker.domain.dates import PartialDate, parse_partial_date
from tracker.engines.schedule import (
    AFFECTED_CAUTION,
    CAUTIONS,
    NO_RULE_CAUTION,
    LocalOverride,
    PersonState,
    Policy,
    add_months,
    interval_point,
    matching_rules,
    never_screened_text,
    possible_ages,
    propose_recall,
)
from tracker.rules import TRIGGERS, build_rule_set, load_rule_set

TODAY = dt.date(2026, 1, 15)
LAST = dt.date(2025, 1, 10)
ESC23 = load_rule_set("esc_2023")
AHA = load_rule_set("aha_acc_2020")
ESC14 = load_rule_set("esc_2014")
PLP = frozenset({"plp_variant"})


def person(age_at_last: int | None = None, *, born: dt.date | None = None, last: dt.date | None = LAST, **kw) -> PersonState:
    """An invented relative; with ``age_at_last`` the birthday is 15 June, so the age on 10 Jan 2025 is exact."""
    if born is None:
        born = dt.date(2025 - age_at_last - 1, 6, 15)
    kw.setdefault("person_code", "FAM01-III-2")
    return PersonState(birth=PartialDate(born), last_visit=last, **kw)


def plan(p: PersonState, rs, point: str = "midpoint", today: dt.date = TODAY):
    return propose_recall(p, rs, Policy(point), today)


# ----------------------------------------------------------- guideline rows


@pytest.mark.parametrize(
    "rs,age,kw,rule_id,months,row",
    [
        (ESC23, 8, dict(genotype="carrier", family_features=PLP), "esc23.child.carrier", (12, 36), "ESC 2023 §6.11 children G+P-: 1-3 y [V]"),
        (ESC23, 30, dict(genotype="carrier", family_features=PLP), "esc23.adult.carrier.to60", (12, 36), "ESC 2023 §6.11 adult carrier 1-3 y to 60 [V]"),
        (ESC23, 65, dict(genotype="carrier", family_features=PLP), "esc23.adult.carrier.from60", (36, 60), "ESC 2023 §6.11 carrier after 60: 3-5 y [V]"),
        (ESC23, 40, dict(family_features={"familial_disease"}), "esc23.adult.at_risk_familial.to60", (12, 36), "ESC 2023 §6.11 familial disease 1-3 y to 60 [V]"),
        (ESC23, 40, dict(family_features=PLP), "esc23.adult.at_risk_variant_or_early_onset.to60", (12, 36), "ESC 2023 §6.11 untested in P/LP family [V]"),
        (AHA, 8, dict(genotype="carrier", family_features=PLP), "aha20.child.carrier", (12, 24), "AHA/ACC 2020 table, child G+: 1-2 y [V2]"),
        (AHA, 8, dict(family_features={"early_onset"}), "aha20.child.at_risk_variant_or_early_onset", (12, 24), "AHA/ACC 2020 table, early-onset family: 1-2 y [V2]"),
        (AHA, 8, dict(), "aha20.child.at_risk_other", (24, 36), "AHA/ACC 2020 table, other children: 2-3 y [V2]"),
        (AHA, 30, dict(genotype="carrier", family_features=PLP), "aha20.adult.carrier", (36, 60), "AHA/ACC 2020 table, adult G+P-: 3-5 y [V2]"),
        (AHA, 30, dict(), "aha20.adult.at_risk", (36, 60), "AHA/ACC 2020 table, adult at risk: 3-5 y [V2]"),
        (ESC14, 12, dict(genotype="carrier", family_features=PLP), "esc14.age10to20", (12, 24), "ESC 2014 1-2 y from 10 to 20 y [M]"),
        (ESC14, 30, dict(genotype="carrier", family_features=PLP), "esc14.adult", (24, 60), "ESC 2014 adults 2-5 y [M]"),
    ],
)
def test_interval_follows_guideline_row(rs, age, kw, rule_id, months, row):
    short = plan(person(age, **kw), rs, "shortest")
    long_ = plan(person(age, **kw), rs, "longest")
    assert short.rule_id == rule_id and long_.rule_id == rule_id, row
    assert (short.interval_months, long_.interval_months) == months, row
    assert short.due == add_months(LAST, months[0]), row
    assert long_.due == add_months(LAST, months[1]), row
    applied = [f for f in short.fired if f.kind == "rule" and f.applied]
    assert [f.code for f in applied] == [rule_id]
    assert applied[0].source  # source shown beside the rule


def test_esc2014_values_carry_verify_caution():
    """ESC 2014 rule set: every interval from memory, verify."""
    p = plan(person(30, genotype="carrier", family_features=PLP), ESC14)
    assert "verify" in p.flags
    assert any("from memory, verify" in c for c in p.cautions)


def test_midpoint_policy():
    """Clinic policy 'midpoint': ESC 2023 1-3 y -> 24 months; AHA/ACC 1-2 y -> 18 months."""
    assert plan(person(30, genotype="carrier", family_features=PLP), ESC23).interval_months == 24
    assert plan(person(8, genotype="carrier", family_features=PLP), AHA).interval_months == 18
    assert interval_point(12, 25, "midpoint") == 18  # rounded down: the shorter side


def test_competitive_sport_annual_check_governs():
    """ESC 2023 §8.1.3: G+P- in competitive sport, annual phenotype check [V] (shorter than 1-3 y)."""
    p = plan(person(25, genotype="carrier", family_features=PLP, athlete=True), ESC23, "longest")
    assert p.rule_id == "esc23.carrier.competitive_sport" and p.interval_months == 12
    codes = {f.code: f.applied for f in p.fired if f.kind == "rule"}
    assert codes == {"esc23.carrier.competitive_sport": True, "esc23.adult.carrier.to60": False}


def test_local_override_is_recorded():
    o = LocalOverride("aha20.adult.carrier", 24, 24, "clinic protocol: 2-yearly in this family")
    p = propose_recall(person(30, genotype="carrier", family_features=PLP), AHA, Policy("midpoint", (o,)), TODAY)
    assert p.interval_months == 24
    assert any(f.kind == "override" and "2-yearly" in f.text for f in p.fired)


# ------------------------------------------------------------- band edges


def test_band_edge_day_before_and_day_of_60th_birthday():
    """ESC 2023 §6.11: 1-3 y to 60, then 3-5 y [V]; the band is read at the age on the due date."""
    born = dt.date(1966, 5, 10)
    kw = dict(born=born, genotype="carrier", family_features=PLP)
    assert [r.id for r in matching_rules(person(**kw), ESC23, dt.date(2026, 5, 9))] == ["esc23.adult.carrier.to60"]
    assert [r.id for r in matching_rules(person(**kw), ESC23, dt.date(2026, 5, 10))] == ["esc23.adult.carrier.from60"]

    before = plan(person(last=dt.date(2025, 5, 9), **kw), ESC23, "shortest")
    assert before.due == dt.date(2026, 5, 9) and before.rule_id == "esc23.adult.carrier.to60"
    assert before.interval_months == 12 and "band_crossing" not in before.flags

    on = plan(person(last=dt.date(2025, 5, 10), **kw), ESC23, "shortest")
    assert on.rule_id == "esc23.adult.carrier.from60" and on.interval_months == 36
    assert on.due == dt.date(2028, 5, 10)
    assert "band_crossing" in on.flags and any("age-band crossing" in n for n in on.notes)


def test_29_february_birthday_turns_18_on_1_march():
    """Born 2008-02-29: 17 on 2026-02-28, 18 on 2026-03-01 (common year). AHA/ACC child 1-2 y vs adult 3-5 y [V2]."""
    kw = dict(born=dt.date(2008, 2, 29), genotype="carrier", family_features=PLP)
    assert [r.id for r in matching_rules(person(**kw), AHA, dt.date(2026, 2, 28))] == ["aha20.child.carrier"]
    assert [r.id for r in matching_rules(person(**kw), AHA, dt.date(2026, 3, 1))] == ["aha20.adult.carrier"]

    child = plan(person(last=dt.date(2025, 2, 28), **kw), AHA, "shortest")
    assert (child.due, child.rule_id, child.interval_months) == (dt.date(2026, 2, 28), "aha20.child.carrier", 12)
    adult = plan(person(last=dt.date(2025, 3, 1), **kw), AHA, "shortest")
    assert (adult.due, adult.rule_id, adult.interval_months) == (dt.date(2028, 3, 1), "aha20.adult.carrier", 36)


def test_child_turning_18_gets_adult_interval_from_last_visit():
    """Crossing rule: candidate due date at 18 y falls in the adult band -> adult interval from the last visit."""
    p = plan(person(17, genotype="carrier", family_features=PLP), AHA, "midpoint")
    # 17 y on 2025-01-10; child midpoint 18 months -> 2026-07-10 (18 y) -> adult midpoint 48 months.
    assert p.rule_id == "aha20.adult.carrier" and p.due == add_months(LAST, 48)


def test_bands_that_disagree_use_the_earlier_date():
    """Crossing rule when the recomputed date falls back into the first band: the earliest candidate is used."""
    data = tomllib.loads((resources.files("tracker.rules") / "esc_2014.toml").read_text(encoding="utf-8"))
    data = copy.deepcopy(data)
    next(r for r in data["rules"] if r["id"] == "esc14.child_under10.family_features")["interval_months"] = [60, 60]
    rs = build_rule_set(data, "test")
    p = plan(person(8, genotype="carrier", family_features={"plp_variant", "early_onset"}), rs, "shortest")
    # 8 y at LAST: 60 months -> 13 y (10-20 band, 12 months) -> LAST + 12 = 9 y (back in the < 10 band).
    assert p.due == add_months(LAST, 12)
    assert any("bands disagree" in n for n in p.notes)


# ------------------------------------------------------- year-only birth


def test_year_only_birth_convention():
    """Year-only birth: age from 1 July, uncertainty 0.5 y (birth anywhere in the year)."""
    born = parse_partial_date("1990")
    assert born.value == dt.date(1990, 7, 1)
    assert possible_ages(born, dt.date(2026, 3, 1)) == (35, 36)
    assert possible_ages(born, dt.date(2026, 12, 31)) == (36,)


def test_year_only_birth_straddling_18_uses_shorter_band():
    """AHA/ACC child G+ 1-2 y vs adult 3-5 y [V2]: uncertain age at the due date -> the shorter (child) interval."""
    uncertain = PersonState(
        person_code="FAM02-II-1",
        birth=parse_partial_date("2008"),
        genotype="carrier",
        family_features=PLP,
        last_visit=dt.date(2025, 1, 15),
    )
    p = plan(uncertain, AHA, "midpoint")
    assert p.rule_id == "aha20.child.carrier" and p.interval_months == 18
    assert p.due == dt.date(2026, 7, 15)
    assert "age_uncertain" in p.flags
    assert any("straddles a band edge" in n and "shorter interval" in n for n in p.notes)
    # The same person with an exact 1 January birth is already 18 on that date -> adult interval (later date).
    exact = plan(person(born=dt.date(2008, 1, 1), genotype="carrier", family_features=PLP, last=dt.date(2025, 1, 15)), AHA)
    assert exact.rule_id == "aha20.adult.carrier" and exact.due > p.due


def test_year_only_birth_does_not_release_when_uncertain():
    """ESC 2023 stop at >= 50 y: with a year-only birth the rule must hold for every possible age."""
    feats = {"isolated_case", "genotype_negative_family", "informative_family"}
    p = PersonState(
        person_code="FAM03-II-4", birth=parse_partial_date("1975"), family_features=feats, last_visit=dt.date(2025, 3, 1)
    )  # 49 or 50 on 2025-03-01
    assert plan(p, ESC23).status in ("due", "overdue")


# -------------------------------------------------------------- modifiers


def test_progression_shortens_interval():
    """AHA/ACC adult G+P- 3-5 y [V2]; progression beyond variability caps at 12 months (common practice, verify)."""
    base = plan(person(30, genotype="carrier", family_features=PLP), AHA, "shortest")
    prog = plan(person(30, genotype="carrier", family_features=PLP, progression=True), AHA, "shortest")
    assert base.interval_months == 36 and prog.interval_months == 12
    assert prog.due == add_months(LAST, 12) and prog.progression
    mod = [f for f in prog.fired if f.kind == "modifier"]
    assert [m.code for m in mod] == ["progression"] and mod[0].applied and "common practice" in mod[0].source


def test_projected_crossing_within_interval_shortens():
    """Projected threshold crossing before the routine due date caps at 6 months (common practice, verify)."""
    within = plan(person(30, genotype="carrier", family_features=PLP, projected_crossing_age_years=31.5), AHA, "shortest")
    assert within.interval_months == 6 and within.progression
    after = plan(person(30, genotype="carrier", family_features=PLP, projected_crossing_age_years=40.0), AHA, "shortest")
    assert after.interval_months == 36 and not after.progression
    assert any("after the routine due date" in n for n in after.notes)


def test_borderline_phenotype_shortens():
    """Borderline state rows: 6-12 months (common practice); ESC 2014 adult non-diagnostic 6-12 months [M] governs."""
    p = plan(person(30, phenotype="borderline"), AHA, "shortest")
    assert p.rule_id == "aha20.borderline" and p.interval_months == 6
    p = plan(person(30, phenotype="borderline", genotype="carrier", family_features=PLP), ESC14, "shortest")
    assert p.rule_id == "esc14.adult.non_diagnostic" and p.interval_months == 6


def test_modifier_that_does_not_shorten_is_listed_not_applied():
    p = plan(person(25, genotype="carrier", family_features=PLP, athlete=True, progression=True), ESC23)
    assert p.interval_months == 12
    assert [(f.code, f.applied) for f in p.fired if f.kind == "modifier"] == [("progression", False)]


# --------------------------------------------------------------- triggers


@pytest.mark.parametrize("rs", [ESC23, AHA, ESC14], ids=lambda r: r.id)
@pytest.mark.parametrize("trigger", sorted(TRIGGERS))
def test_trigger_gives_review_today(rs, trigger):
    p = plan(person(30, genotype="carrier", family_features=PLP, last=dt.date(2025, 12, 1), triggers={trigger}), rs)
    assert p.status == "due" and p.due == TODAY and p.days_overdue == 0
    assert p.routine_due is not None and p.routine_due > TODAY
    fired = [f for f in p.fired if f.kind == "trigger"]
    assert [f.code for f in fired] == [trigger] and fired[0].source
    assert set(rs.triggers[trigger].needs) <= set(p.needs)


def test_trigger_recalls_released_relative():
    """Variant reclassified: a discharged genotype-negative relative is reviewed now (ESC 2023)."""
    p = plan(person(30, genotype="non_carrier", family_features=PLP, triggers={"variant_reclassified"}), ESC23)
    assert p.status == "due" and p.due == TODAY
    assert any(f.kind == "release" for f in p.fired)


# --------------------------------------------------------------- statuses


@pytest.mark.parametrize("rs", [ESC23, AHA, ESC14], ids=lambda r: r.id)
def test_deceased_never_scheduled(rs):
    p = plan(person(30, genotype="carrier", family_features=PLP, vital_status="deceased", last=None, triggers={"new_symptoms"}), rs)
    assert p.status == "not_scheduled" and p.due is None and p.needs == ()
    assert any("deceased" in n for n in p.notes)


def test_declined_is_listed_not_recalled():
    p = plan(person(30, genotype="carrier", family_features=PLP, contact_status="declined"), ESC23)
    assert p.status == "not_recalled" and p.due is None
    assert "declined: not recalled" in p.notes


def test_lost_to_follow_up_is_flagged():
    p = plan(person(30, genotype="carrier", family_features=PLP, contact_status="lost_to_follow_up"), ESC23)
    assert p.status in ("due", "overdue") and "lost_to_follow_up" in p.flags
    assert any("Lost to follow-up" in c for c in p.cautions)


def test_not_at_risk_is_not_scheduled():
    assert plan(person(30, genotype="not_at_risk"), ESC23).status == "not_scheduled"


@pytest.mark.parametrize(
    "rs,rule_id,row",
    [
        (ESC23, "esc23.release.non_carrier", "ESC 2023 genotype-negative: discharge with advice to return (I C) [V]"),
        (AHA, "aha20.release.non_carrier", "AHA/ACC 2020 genotype-negative: no ongoing screening [M]; return after a downgrade (common practice)"),
        (ESC14, "esc14.release.non_carrier", "ESC 2014 genotype-negative: discharge (IIa C) [M]"),
    ],
)
def test_genotype_negative_released_with_caution(rs, rule_id, row):
    p = plan(person(30, genotype="non_carrier", family_features=PLP, variant_classified_on=dt.date(2024, 3, 1)), rs)
    assert p.status == "released" and p.due is None and p.rule_id == rule_id, row
    text = " ".join(p.cautions).lower()
    assert "reclassif" in text or "downgraded" in text
    assert "symptoms" in text and "new family data" in text
    assert "2024-03-01" in text  # the classification date is shown for re-review


def test_negative_result_without_plp_variant_does_not_release():
    """After a downgrade (no P/LP variant in the family) a negative result is scheduled as genotype unknown."""
    p = plan(person(30, genotype="non_carrier"), ESC23)
    assert p.status in ("due", "overdue") and p.rule_id == "esc23.adult.at_risk_single_case.to60"
    assert any("scheduled as genotype unknown" in n for n in p.notes)


def test_esc2023_stop_at_50_only_in_isolated_genetically_negative_informative_family():
    """ESC 2023: stop at >= 50 y with normal tests if the proband is the only affected member of an informative,
    genetically negative family [V]."""
    feats = {"isolated_case", "genotype_negative_family", "informative_family"}
    stop = plan(person(born=dt.date(1970, 6, 1), last=dt.date(2025, 1, 10), family_features=feats), ESC23)
    assert stop.status == "released" and stop.rule_id == "esc23.release.stop_at_50"
    # 49 at the last visit: not yet.
    young = plan(person(born=dt.date(1975, 6, 1), last=dt.date(2025, 1, 10), family_features=feats), ESC23)
    assert young.status in ("due", "overdue")
    # Not judged informative: not released.
    partial = plan(person(born=dt.date(1970, 6, 1), family_features=feats - {"informative_family"}), ESC23)
    assert partial.status in ("due", "overdue")
    # AHA/ACC has no stop age [M]: still recalled, with the advice shown.
    aha = plan(person(born=dt.date(1970, 6, 1), family_features=feats), AHA)
    assert aha.status in ("due", "overdue")
    assert any(f.code == "aha20.advice.no_stop_age" for f in aha.fired)


def test_no_matching_rule_asks_for_clinician_review_now():
    p = plan(person(30, genotype="non_carrier", phenotype="borderline", family_features=PLP), ESC23)
    assert p.status == "due" and p.due == TODAY and "no_rule" in p.flags
    assert NO_RULE_CAUTION in p.cautions


# --------------------------------------------------------------- affected


def test_affected_esc2023_risk_scd_every_1_to_2_years():
    """ESC 2023: HCM Risk-SCD re-estimated every 1-2 y (I B) for >= 16 y [V]."""
    p = plan(person(40, phenotype="positive", genotype="carrier", family_features=PLP), ESC23, "shortest")
    assert p.rule_id == "esc23.affected.risk_scd" and p.interval_months == 12
    assert plan(person(40, phenotype="positive"), ESC23, "longest").interval_months == 24
    assert "risk_assessment" in p.needs and AFFECTED_CAUTION in p.cautions and "affected" in p.flags


def test_affected_child_esc2023_uses_risk_kids_rule_with_verify():
    """ESC 2023: HCM Risk-Kids < 16 y [V]; the 1-2 y interval for children is from memory, verify."""
    p = plan(person(10, phenotype="positive"), ESC23, "shortest")
    assert p.rule_id == "esc23.affected.risk_kids" and "verify" in p.flags


def test_affected_without_visit_or_diagnosis_date_is_due_today():
    """First evaluation of an affected member: due now (ESC 2023 Risk-SCD at first evaluation [V])."""
    p = plan(person(40, phenotype="positive", last=None), ESC23)
    assert p.due == TODAY and p.status == "due"
    dated = plan(person(40, phenotype="positive", last=None, eligible_since=dt.date(2025, 6, 1)), ESC23)
    assert dated.due == TODAY and dated.status == "due" and dated.days_overdue == 0
    assert dated.never_screened and dated.eligible_since == dt.date(2025, 6, 1)


def test_affected_aha_scd_risk_every_1_to_2_years():
    """AHA/ACC 2020 §7.1: SCD risk assessment at the initial evaluation, then every 1-2 y [M, from memory, verify]."""
    p = plan(person(40, phenotype="positive"), AHA, "longest")
    assert p.rule_id == "aha20.affected.scd_risk" and p.interval_months == 24
    assert "verify" in p.flags


# -------------------------------------------------------------- never seen


def test_never_seen_is_due_now_and_eligible_since_identification():
    """Never-seen at-risk relative: eligible since the date identified at risk (ESC 2023 screens at any age);
    said as "never screened, eligible since D; due now", not as days overdue."""
    p = plan(person(born=dt.date(1990, 3, 1), last=None, family_features=PLP, eligible_since=dt.date(2024, 9, 1)), ESC23)
    assert p.due == TODAY and p.status == "due" and p.days_overdue == 0 and "never_seen" in p.flags
    assert p.never_screened and p.eligible_since == dt.date(2024, 9, 1) and p.gap_reason == "contactable"
    assert never_screened_text(p) == "never screened, eligible since 2024-09-01; due now (contactable, no visit yet)"


@pytest.mark.parametrize(
    "contact,gap",
    [("not_contacted", "not contacted"), ("lost_to_follow_up", "lost to follow-up"), ("declined", "declined")],
)
def test_never_screened_carries_the_contact_gap(contact, gap):
    """The reason behind the gap travels with the proposal (declined: not recalled, still never screened)."""
    p = plan(person(born=dt.date(1990, 3, 1), last=None, family_features=PLP, contact_status=contact,
                    eligible_since=dt.date(2024, 9, 1)), ESC23)  # fmt: skip
    assert p.never_screened and p.gap_reason == contact and p.eligible_since == dt.date(2024, 9, 1)
    assert never_screened_text(p).endswith(f"({gap})")
    if contact == "declined":
        assert p.status == "not_recalled" and p.due is None
    else:
        assert p.status == "due" and p.due == TODAY


def test_once_seen_keeps_the_overdue_count():
    """A person seen before keeps "N days overdue" (ESC 2023 §6.11 adult at risk, 1-3 y [V])."""
    p = plan(person(40, family_features=PLP, last=dt.date(2020, 1, 10)), ESC23, "shortest")
    assert p.status == "overdue" and p.due == dt.date(2021, 1, 10)
    assert p.days_overdue == (TODAY - dt.date(2021, 1, 10)).days and not p.never_screened
    assert never_screened_text(p) is None


def test_never_screened_grown_up_child_gets_the_adult_rule():
    """Invented family: eligible at 8 y (2004), never seen, 30 y today. The rule is that of the age today
    (ESC 2023 §6.11: adult at risk in a P/LP family, 1-3 y to 60 [V]), not the child rule of 2004."""
    p = plan(person(born=dt.date(1996, 2, 20), last=None, family_features=PLP, contact_status="not_contacted",
                    eligible_since=dt.date(2004, 5, 1)), ESC23, "longest")  # fmt: skip
    assert p.rule_id == "esc23.adult.at_risk_variant_or_early_onset.to60"
    assert p.interval_months == 36 and p.due == TODAY
    assert any("esc23.child.at_risk_variant_or_early_onset" in n for n in p.notes)  # says what it was then
    # AHA/ACC 2020 table [V2]: adult at risk every 3-5 y, children 2-3 y; the adult row today
    a = plan(person(born=dt.date(1996, 2, 20), last=None, eligible_since=dt.date(2004, 5, 1)), AHA, "longest")
    assert a.rule_id == "aha20.adult.at_risk" and a.interval_months == 60


def test_overdue_once_seen_follows_the_rule_of_the_age_today():
    """Last seen at 16 (child rule, ESC 2023 §6.11 1-3 y [V]), overdue since 17, 26 today: the visit now
    follows the adult rule; the due date and the days overdue stay those of the child interval."""
    born = dt.date(2000, 3, 3)
    p = plan(person(born=born, last=dt.date(2016, 6, 1), family_features={"familial_disease"}), ESC23, "shortest")
    assert p.due == dt.date(2017, 6, 1) and p.status == "overdue"
    assert p.rule_id == "esc23.adult.at_risk_familial.to60" and "band_changed_since_due" in p.flags
    assert p.days_overdue == (TODAY - dt.date(2017, 6, 1)).days


def test_band_change_before_the_visit_is_named():
    """17 today, next visit after the 18th birthday: the visit follows the adult rule and the note names
    both rules (ESC 2023 §6.11 children / adults 1-3 y [V]; AHA/ACC 2020 table, child 2-3 y, adult 3-5 y [V2])."""
    born = dt.date(2008, 9, 1)
    p = plan(person(born=born, last=dt.date(2025, 12, 1)), AHA, "shortest")
    assert p.due > dt.date(2026, 9, 1) and p.rule_id == "aha20.adult.at_risk"
    assert "band_change_before_visit" in p.flags
    note = next(n for n in p.notes if n.startswith("age band changes before the visit"))
    assert "aha20.child.at_risk_other" in note and "aha20.adult.at_risk" in note


def test_never_screened_child_due_later_says_eligible_from():
    """ESC 2014 [M]: children from 10 y; a 7-year-old never seen is eligible from the 10th birthday."""
    p = plan(person(born=dt.date(2018, 4, 2), last=None), ESC14)
    assert p.due == dt.date(2028, 4, 2) and p.never_screened and p.eligible_since == dt.date(2028, 4, 2)
    assert never_screened_text(p).startswith("never screened, eligible from 2028-04-02")


def test_never_seen_child_due_at_start_age_esc2014():
    """ESC 2014 [M]: children from 10 y unless early onset / malignant family history."""
    later = plan(person(born=dt.date(2018, 4, 2), last=None), ESC14)
    assert later.due == dt.date(2028, 4, 2) and later.status == "due" and later.days_overdue < 0
    past = plan(person(born=dt.date(2012, 4, 2), last=None), ESC14)
    assert past.due == TODAY and past.status == "due" and past.eligible_since == dt.date(2022, 4, 2)
    early = plan(person(born=dt.date(2018, 4, 2), last=None, family_features={"early_onset"}), ESC14)
    assert early.due == TODAY and early.status == "due" and early.eligible_since == dt.date(2018, 4, 2)


# ----------------------------------------------------------------- cautions


@pytest.mark.parametrize(
    "kw",
    [
        dict(genotype="carrier", family_features=PLP),
        dict(genotype="non_carrier", family_features=PLP),
        dict(contact_status="declined"),
        dict(vital_status="deceased"),
        dict(phenotype="positive"),
    ],
)
def test_every_proposal_carries_the_cautions(kw):
    p = plan(person(30, **kw), ESC23)
    for c in CAUTIONS:
        assert c in p.cautions
    text = " ".join(p.cautions)
    assert "Decision support only" in text and "does not replace" in text
    assert "current guideline" in text and "local protocol" in text
    assert "symptoms" in text and "new family" in text


def test_person_state_refuses_unknown_codes():
    with pytest.raises(ValueError):
        person(30, genotype="cousin")
    with pytest.raises(ValueError):
        person(30, triggers={"full_moon"})


# ------------------------------------------------------------ add_months


@given(
    st.dates(min_value=dt.date(1900, 1, 1), max_value=dt.date(2100, 12, 31)),
    st.integers(min_value=0, max_value=240),
)
def test_add_months_matches_pandas_dateoffset(start, months):
    """Reference: pandas DateOffset(months=n), which also clips to the month's last day."""
    expected = (pd.Timestamp(start) + pd.DateOffset(months=months)).date()
    assert add_months(start, months) == expected


def test_add_months_clips_month_end():
    assert add_months(dt.date(2024, 1, 31), 1) == dt.date(2024, 2, 29)
    assert add_months(dt.date(2025, 1, 31), 1) == dt.date(2025, 2, 28)


# ----------------------------------------------- the rule follows the age at the visit (any invented person)


@given(
    born=st.dates(min_value=dt.date(1935, 1, 1), max_value=dt.date(2025, 12, 31)),
    seen_after_years=st.one_of(st.none(), st.integers(min_value=0, max_value=70)),
    identified=st.one_of(st.none(), st.dates(min_value=dt.date(1990, 1, 1), max_value=dt.date(2026, 1, 1))),
    features=st.sets(st.sampled_from(["plp_variant", "familial_disease", "early_onset", "isolated_case"])),
    genotype=st.sampled_from(["at_risk_untested", "carrier"]),
    rs=st.sampled_from([ESC23, AHA, ESC14]),
    contact=st.sampled_from(["contactable", "not_contacted", "lost_to_follow_up"]),
)
def test_governing_rule_covers_the_age_on_the_visit_day(born, seen_after_years, identified, features, genotype, rs,
                                                         contact):
    """Whatever the person, the governing rule's age band holds the age on the day the visit is wanted:
    the due date if still ahead, else today. A never-screened person is never shown as days overdue."""
    last = None
    if seen_after_years is not None:
        last = add_months(born, 12 * seen_after_years)
        if last >= TODAY:
            last = None
    if genotype == "carrier":
        features = set(features) | {"plp_variant"}
    p = PersonState("INV1-II-1", PartialDate(born), genotype=genotype, family_features=frozenset(features),
                    last_visit=last, eligible_since=identified, contact_status=contact)  # fmt: skip
    prop = propose_recall(p, rs, Policy("midpoint"), TODAY)
    if prop.rule_id is None or prop.routine_due is None:
        return
    visit = max(prop.routine_due, TODAY)
    rule = rs.rule(prop.rule_id)
    ages = possible_ages(PartialDate(born), visit)
    assert any(rule.conditions.matches_age(a) for a in ages), (prop.rule_id, ages, prop.notes)
    if last is None:
        assert prop.never_screened and (prop.days_overdue or 0) <= 0 and prop.eligible_since is not None
        assert prop.gap_reason == contact
