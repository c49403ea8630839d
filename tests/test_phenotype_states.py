"""Genotype x phenotype states: a borderline or uncertain phenotype is its own state.

A relative whose phenotype is borderline or uncertain (non-diagnostic imaging,
or affected status recorded as uncertain) is neither phenotype-negative nor
affected.  Every rule set gives that state its own rows (closer review,
contrast CMR to clarify, sport decisions deferred to specialist review), no
row labelled phenotype-negative may accept it, and no output tells such a
person that all competitive sport is fine.  The rule model refuses the
mislabelled row at load time.

Guideline rows named beside each check:
- ESC 2023 §8.1.3: carriers without the phenotype (G+P-) may take part in
  all competitive sport with an annual phenotype check [V]; it does not
  cover a borderline phenotype.
- ESC 2023 §7.1.1: borderline imaging is a reason for closer review [V];
  RT5: contrast CMR in G+P- relatives should be considered (IIa B) [V].
- The borderline interval (6-12 months) is common practice in ESC 2023 and
  AHA/ACC; ESC 2014 adults with non-diagnostic abnormalities 6-12 months [M].
All people are invented.
"""

from __future__ import annotations

import copy
import datetime as dt
import re
import tomllib
from importlib import resources

import pytest

from tracker.domain.dates import PartialDate
from tracker.engines.schedule import BORDERLINE_CAUTION, PersonState, Policy, propose_recall
from tracker.rules import RuleSetError, available_rule_sets, build_rule_set, load_rule_set, load_rule_set_file

TODAY = dt.date(2026, 1, 15)
LAST = dt.date(2025, 1, 10)
PLP = frozenset({"plp_variant"})
SPORT_PERMISSION = re.compile(r"all competitive sport|may take part|any intensity", re.I)
NEGATIVE_LABEL = re.compile(r"(?<!not )phenotype[- ]negative|G\+P-|without the phenotype", re.I)


def person(age_at_last: int, **kw) -> PersonState:
    """An invented relative, birthday 15 June, last screening visit 2025-01-10."""
    kw.setdefault("person_code", "BRD01-II-3")
    return PersonState(birth=PartialDate(dt.date(2025 - age_at_last - 1, 6, 15)), last_visit=LAST, **kw)


def _raw(rule_set_id: str) -> dict:
    return tomllib.loads((resources.files("tracker.rules") / f"{rule_set_id}.toml").read_text(encoding="utf-8"))


# ------------------------------------------------------------------ rule sets


@pytest.mark.parametrize("rule_set_id", available_rule_sets())
def test_no_row_labelled_phenotype_negative_accepts_another_phenotype(rule_set_id):
    rs = load_rule_set(rule_set_id)
    for item in list(rs.rules) + list(rs.advice):
        if NEGATIVE_LABEL.search(item.text):
            assert item.conditions.phenotype == {"negative"}, (item.id, sorted(item.conditions.phenotype))


@pytest.mark.parametrize("rule_set_id", available_rule_sets())
def test_screening_rows_keep_negative_and_borderline_apart(rule_set_id):
    """Each state has its own rows: no screening rule mixes phenotype-negative and borderline."""
    for r in load_rule_set(rule_set_id).select("screening", "recall"):
        assert not {"negative", "borderline"} <= r.conditions.phenotype, r.id


@pytest.mark.parametrize("rule_set_id", available_rule_sets())
def test_no_sport_permission_for_a_phenotype_that_is_not_clearly_negative(rule_set_id):
    rs = load_rule_set(rule_set_id)
    for item in list(rs.rules) + list(rs.advice):
        if SPORT_PERMISSION.search(item.text):
            assert item.conditions.phenotype == {"negative"}, item.id


@pytest.mark.parametrize("rule_set_id", available_rule_sets())
@pytest.mark.parametrize("genotype", ["carrier", "at_risk_untested", "uncertain"])
@pytest.mark.parametrize("age", [0, 5, 9, 10, 12, 15, 17, 18, 19, 20, 30, 49, 50, 59, 60, 61, 85])
def test_borderline_state_has_its_own_rows_at_every_age(rule_set_id, genotype, age):
    rs = load_rule_set(rule_set_id)
    rows = [
        r
        for r in rs.select("screening", "recall")
        if r.conditions.matches_age(age) and r.conditions.matches_state(genotype, "borderline", PLP, False)
    ]
    assert rows, (rule_set_id, genotype, age)
    for r in rows:
        assert r.conditions.phenotype == {"borderline"}, r.id
        assert r.interval_months[1] <= 12, r.id  # closer review: at most 12 months (common practice / ESC 2014 [M])
        assert "clinical_review" in r.needs and "cmr" in (r.needs + r.consider), r.id
        assert "specialist" in r.text, r.id  # sport advice deferred to specialist review


@pytest.mark.parametrize("rule_set_id", available_rule_sets())
def test_borderline_rows_carry_sport_deferral_advice(rule_set_id):
    rs = load_rule_set(rule_set_id)
    advice = [a for a in rs.advice if a.conditions.phenotype == {"borderline"} and "sport" in a.text]
    assert advice, rule_set_id
    for a in advice:
        assert "specialist" in a.text and not SPORT_PERMISSION.search(a.text)


# --------------------------------------------------------------- validation


def _sport_row(data: dict) -> dict:
    return next(r for r in data["rules"] if r["id"] == "esc23.carrier.competitive_sport")


@pytest.mark.parametrize("label", [
    "Carrier without the phenotype (G+P-) in competitive sport: annual phenotype check.",
    "Adult carrier, phenotype negative: ECG and imaging every 1-3 years.",
    "Adult carrier, phenotype-negative: ECG and imaging every 1-3 years.",
])  # fmt: skip
def test_model_refuses_a_phenotype_negative_row_that_accepts_borderline(label):
    data = copy.deepcopy(_raw("esc_2023"))
    row = _sport_row(data)
    row["text"] = label
    row["when"]["phenotype"] = ["negative", "borderline"]
    with pytest.raises(RuleSetError) as err:
        build_rule_set(data, origin="test")
    assert any("phenotype-negative" in e and "borderline" in e for e in err.value.errors), err.value.errors


def test_model_refuses_mislabelled_advice():
    data = copy.deepcopy(_raw("esc_2023"))
    data["advice"].append({
        "id": "local.advice.gpn",
        "text": "Phenotype negative carriers: keep active.",
        "when": {"genotype": ["carrier"], "phenotype": ["negative", "borderline"]},
        "source": {"guideline": "common practice", "section": "local", "tag": "common_practice"},
    })  # fmt: skip
    with pytest.raises(RuleSetError) as err:
        build_rule_set(data, origin="test")
    assert any("local.advice.gpn" in e and "phenotype-negative" in e for e in err.value.errors)


def test_model_refuses_sport_permission_for_borderline_without_label():
    data = copy.deepcopy(_raw("esc_2023"))
    row = _sport_row(data)
    row["text"] = "Carrier in competitive sport: may take part in all competitive sport, annual check."
    row["when"]["phenotype"] = ["borderline"]
    with pytest.raises(RuleSetError) as err:
        build_rule_set(data, origin="test")
    assert any("sport" in e and "borderline" in e for e in err.value.errors), err.value.errors


def test_model_refuses_a_trigger_that_permits_sport():
    """Triggers apply to every phenotype, borderline included: none may clear competitive sport."""
    data = copy.deepcopy(_raw("esc_2023"))
    data["triggers"]["started_competitive_sport"]["text"] = "Started competitive sport: may take part in all competitive sport."
    with pytest.raises(RuleSetError) as err:
        build_rule_set(data, origin="test")
    assert any("trigger started_competitive_sport" in e and "sport" in e for e in err.value.errors)


def test_model_refuses_a_screening_row_mixing_negative_and_borderline():
    data = copy.deepcopy(_raw("esc_2023"))
    row = next(r for r in data["rules"] if r["id"] == "esc23.adult.at_risk_single_case.to60")
    row["when"]["phenotype"] = ["negative", "borderline"]
    with pytest.raises(RuleSetError) as err:
        build_rule_set(data, origin="test")
    assert any("esc23.adult.at_risk_single_case.to60" in e and "own rows" in e for e in err.value.errors)


def test_local_protocol_file_with_the_defect_is_refused(tmp_path):
    src = (resources.files("tracker.rules") / "esc_2023.toml").read_text(encoding="utf-8")
    start = src.index('id = "esc23.carrier.competitive_sport"')
    head, tail = src[:start], src[start:]
    tail = tail.replace('phenotype = ["negative"]', 'phenotype = ["negative", "borderline"]', 1)
    bad = tmp_path / "local.toml"
    bad.write_text(head + tail, encoding="utf-8")
    with pytest.raises(RuleSetError) as err:
        load_rule_set_file(bad)
    assert "phenotype-negative" in str(err.value)


# ---------------------------------------------------------------- scheduler


@pytest.mark.parametrize("rule_set_id", available_rule_sets())
@pytest.mark.parametrize("age", [8, 16, 19, 35, 64])
def test_borderline_athlete_gets_no_sport_clearance(rule_set_id, age):
    """A competing carrier with a borderline phenotype: closer review, sport deferred, never 'all sport is fine'."""
    p = propose_recall(
        person(age, genotype="carrier", phenotype="borderline", family_features=PLP, athlete=True),
        load_rule_set(rule_set_id),
        Policy("shortest"),
        TODAY,
    )
    assert p.status in ("due", "overdue")
    texts = [f.text for f in p.fired] + list(p.cautions) + list(p.notes)
    assert not any(SPORT_PERMISSION.search(t) for t in texts), [t for t in texts if SPORT_PERMISSION.search(t)]
    assert BORDERLINE_CAUTION in p.cautions
    assert p.interval_months is not None and p.interval_months <= 12
    assert "clinical_review" in p.needs and "cmr" in p.needs + p.consider


@pytest.mark.parametrize("rule_set_id", available_rule_sets())
def test_borderline_interval_never_longer_than_negative(rule_set_id):
    rs = load_rule_set(rule_set_id)
    for point in ("shortest", "midpoint", "longest"):
        for age in (8, 14, 25, 45, 70):
            for kw in (dict(genotype="carrier", family_features=PLP), dict(family_features=PLP), dict()):
                neg = propose_recall(person(age, **kw), rs, Policy(point), TODAY)
                brd = propose_recall(person(age, phenotype="borderline", **kw), rs, Policy(point), TODAY)
                if neg.interval_months is None:
                    continue
                assert brd.interval_months <= neg.interval_months, (rule_set_id, point, age, kw)
                assert brd.rule_id != neg.rule_id, (rule_set_id, point, age, kw)


def test_phenotype_negative_athlete_keeps_the_esc_2023_sport_row():
    """ESC 2023 §8.1.3 [V]: a G+P- carrier in competitive sport: annual phenotype check."""
    p = propose_recall(
        person(25, genotype="carrier", family_features=PLP, athlete=True), load_rule_set("esc_2023"), Policy(), TODAY
    )
    assert p.rule_id == "esc23.carrier.competitive_sport" and p.interval_months == 12
    assert BORDERLINE_CAUTION not in p.cautions


def test_borderline_carrier_esc_2023_closer_review():
    """ESC 2023: borderline state row, 6-12 months (common practice); shortest 6 months after the last visit."""
    p = propose_recall(
        person(19, genotype="carrier", phenotype="borderline", family_features=PLP, athlete=True),
        load_rule_set("esc_2023"),
        Policy("shortest"),
        TODAY,
    )
    assert p.rule_id == "esc23.borderline" and p.interval_months == 6
    assert p.due == dt.date(2025, 7, 10)


# ------------------------------------------------------------ end to end (demo)


@pytest.fixture(scope="module")
def demo_db(tmp_path_factory):
    from tracker.cli.app import main

    path = str(tmp_path_factory.mktemp("demo") / "demo.sqlite")
    assert main(["demo", "--db", path]) == 0
    return path


def test_demo_competing_carrier_with_uncertain_phenotype(demo_db, run):
    """HV01-IV-2 (invented): carrier, wall 12.0 mm rising, competes, assessed 'uncertain' on 2020-06-18."""
    import json
    from pathlib import Path

    settings = Path(__file__).parent.parent / "demo_family" / "clinic.toml"
    r = run("recall", "HV01-IV-2", "--as-of", "2020-07-01", "--settings", settings, "--json", db=demo_db)
    assert r.code == 0, r
    d = json.loads(r.out)
    assert d["state"]["phenotype"] == "borderline" and d["state"]["athlete"] is True
    assert d["rule_id"] == "esc23.borderline"
    assert not SPORT_PERMISSION.search(d["reason"])
    assert not any(SPORT_PERMISSION.search(f["text"]) for f in d["fired"])
    assert BORDERLINE_CAUTION in d["cautions"]
