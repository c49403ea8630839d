"""Rule sets: every shipped rule against its guideline row, and the loader's validation."""

from __future__ import annotations

import copy
import re
import tomllib
from importlib import resources

import pytest

from tracker.rules import (
    GENOTYPES,
    TAGS,
    TRIGGERS,
    RuleSetError,
    available_rule_sets,
    build_rule_set,
    check_age_bands,
    list_rule_sets,
    load_rule_set,
    load_rule_set_file,
)

# Each row: rule id -> (guideline row it encodes, min_age, max_age, interval months or "release", tag).
# Intervals in months (1 y = 12).  A new rule without a row here fails test_every_rule_has_a_row.
ESC_2023_ROWS = {
    "esc23.child.carrier": ("ESC 2023 §6.11 children G+P-: every 1-3 y", 0, 18, (12, 36), "V"),
    "esc23.child.at_risk_variant_or_early_onset": ("ESC 2023 §6.11 children, G+ / early-onset family: 1-3 y", 0, 18, (12, 36), "V"),
    "esc23.child.at_risk_familial": ("ESC 2023 §6.11 children, familial disease shown: 1-3 y", 0, 18, (12, 36), "V"),
    "esc23.child.at_risk_single_case": ("ESC 2023 §6.11 single-case family: no number (safer default 1-3 y)", 0, 18, (12, 36), "common_practice"),
    "esc23.adult.carrier.to60": ("ESC 2023 §6.11 adult carriers: 1-3 y to 60 y", 18, 60, (12, 36), "V"),
    "esc23.adult.carrier.from60": ("ESC 2023 §6.11 adult carriers: 3-5 y after 60 y", 60, None, (36, 60), "V"),
    "esc23.adult.at_risk_variant_or_early_onset.to60": ("ESC 2023 §6.11 adults at risk: 1-3 y to 60 y", 18, 60, (12, 36), "V"),
    "esc23.adult.at_risk_variant_or_early_onset.from60": ("ESC 2023 §6.11 adults at risk: 3-5 y after 60 y", 60, None, (36, 60), "V"),
    "esc23.adult.at_risk_familial.to60": ("ESC 2023 §6.11 familial disease: 1-3 y to 60 y", 18, 60, (12, 36), "V"),
    "esc23.adult.at_risk_familial.from60": ("ESC 2023 §6.11 familial disease: 3-5 y after 60 y", 60, None, (36, 60), "V"),
    "esc23.adult.at_risk_single_case.to60": ("ESC 2023 single-case family: no number (safer default 1-3 y)", 18, 60, (12, 36), "common_practice"),
    "esc23.adult.at_risk_single_case.from60": ("ESC 2023 single-case family: no number (safer default 3-5 y)", 60, None, (36, 60), "common_practice"),
    "esc23.carrier.competitive_sport": ("ESC 2023 §8.1.3 G+P- in competitive sport: annual", 0, None, (12, 12), "V"),
    "esc23.borderline": ("borderline/uncertain phenotype: closer review 6-12 months (ESC 2023 §7.1.1 closer review [V]; number common practice)", 0, None, (6, 12), "common_practice"),
    "esc23.release.non_carrier": ("ESC 2023 genotype-negative relatives: discharge (I C)", 0, None, "release", "V"),
    "esc23.release.stop_at_50": ("ESC 2023 stop at >= 50 y, isolated genetically negative informative family", 50, None, "release", "V"),
    "esc23.affected.risk_scd": ("ESC 2023 HCM Risk-SCD every 1-2 y, >= 16 y (I B)", 16, None, (12, 24), "V"),
    "esc23.affected.risk_kids": ("ESC 2023 HCM Risk-Kids < 16 y; 1-2 y for children from memory", 0, 16, (12, 24), "M"),
}

AHA_ACC_2020_ROWS = {
    "aha20.child.carrier": ("AHA/ACC 2020 table, children G+ families: 1-2 y (2020 §6.9 G+P-: 1-2 y [M])", 0, 18, (12, 24), "V2"),
    "aha20.child.at_risk_variant_or_early_onset": ("AHA/ACC 2020 table, children G+ or early-onset families: 1-2 y", 0, 18, (12, 24), "V2"),
    "aha20.child.at_risk_other": ("AHA/ACC 2020 table, children of other families: 2-3 y", 0, 18, (24, 36), "V2"),
    "aha20.adult.carrier": ("AHA/ACC 2020 table, adults: 3-5 y (2020 §6.9 G+P-: 3-5 y [M])", 18, None, (36, 60), "V2"),
    "aha20.adult.at_risk": ("AHA/ACC 2020 table, adults at risk (untested): 3-5 y", 18, None, (36, 60), "V2"),
    "aha20.adult.at_risk_variant": ("AHA/ACC 2020 table, adults at risk (untested, P/LP family): 3-5 y", 18, None, (36, 60), "V2"),
    "aha20.borderline": ("borderline/uncertain phenotype: closer review 6-12 months (no AHA/ACC 2020 number; common practice)", 0, None, (6, 12), "common_practice"),
    "aha20.release.non_carrier": ("AHA/ACC 2020 §6.8 rec 13 genotype-negative: no ongoing screening (3: No Benefit)", 0, None, "release", "M"),
    "aha20.affected.scd_risk": ("AHA/ACC 2020 §7.1 SCD risk assessment at the initial evaluation, then every 1-2 y", 0, None, (12, 24), "M"),
}

AHA_ACC_2024_ROWS = {
    "aha24.child.carrier": ("AHA 2024 §6.9 G+P- children and adolescents: 1-2 y", 0, 18, (12, 24), "V2"),
    "aha24.child.at_risk_variant_or_early_onset": ("AHA 2024 table, children of G+ or early-onset families: 1-2 y", 0, 18, (12, 24), "V2"),
    "aha24.child.at_risk_other": ("AHA 2024 table, children of other families: 2-3 y, no later than puberty", 0, 18, (24, 36), "V2"),
    "aha24.adult.carrier": ("AHA 2024 §6.9 G+P- adults: 3-5 y", 18, None, (36, 60), "V2"),
    "aha24.adult.at_risk": ("AHA 2024 table, adults at risk (no P/LP variant): 3-5 y", 18, None, (36, 60), "V2"),
    "aha24.adult.at_risk_variant": ("AHA 2024 table, untested adults in a P/LP family: 3-5 y", 18, None, (36, 60), "V2"),
    "aha24.borderline": ("borderline/uncertain phenotype: closer review 6-12 months (no 2024 number; common practice)", 0, None, (6, 12), "common_practice"),
    "aha24.release.non_carrier": ("AHA 2024 §6.8 rec 13 genotype-negative: no ongoing screening (3: No Benefit)", 0, None, "release", "V2"),
    "aha24.affected.scd_risk": ("AHA 2024 Table 7: SCD risk assessment every 1-2 y", 0, None, (12, 24), "V"),
}

ESC_2014_ROWS = {
    "esc14.child_under10.family_features": ("ESC 2014 < 10 y only with malignant/early-onset family history", 0, 10, (12, 24), "M"),
    "esc14.child_under10.athlete": ("ESC 2014 < 10 y with competitive sport", 0, 10, (12, 24), "M"),
    "esc14.age10to20": ("ESC 2014 every 1-2 y from 10 to 20 y", 10, 20, (12, 24), "M"),
    "esc14.adult": ("ESC 2014 adults every 2-5 y", 20, None, (24, 60), "M"),
    "esc14.adult.non_diagnostic": ("ESC 2014 adults with non-diagnostic abnormalities: 6-12 months", 20, None, (6, 12), "M"),
    "esc14.child.borderline": ("borderline/uncertain phenotype under 20 y: 6-12 months (ESC 2014 adult row extended; common practice)", 0, 20, (6, 12), "common_practice"),
    "esc14.release.non_carrier": ("ESC 2014 genotype-negative: discharge (IIa C)", 0, None, "release", "M"),
    "esc14.affected.risk_scd": ("ESC 2014 SCD risk re-assessed every 1-2 y", 0, None, (12, 24), "M"),
}

ROWS = {
    "esc_2023": ESC_2023_ROWS,
    "aha_acc_2020": AHA_ACC_2020_ROWS,
    "aha_acc_2024": AHA_ACC_2024_ROWS,
    "esc_2014": ESC_2014_ROWS,
}


def _raw(rule_set_id: str) -> dict:
    text = (resources.files("tracker.rules") / f"{rule_set_id}.toml").read_text(encoding="utf-8")
    return tomllib.loads(text)


def test_shipped_rule_sets_are_listed():
    assert set(available_rule_sets()) == {"aha_acc_2020", "aha_acc_2024", "esc_2014", "esc_2023"}
    summaries = {s.id: s for s in list_rule_sets()}
    assert summaries["esc_2023"].year == 2023 and summaries["aha_acc_2020"].year == 2020
    # ESC 2014 is kept only as an [M] rule set: no rule may claim verification.
    assert summaries["esc_2014"].tags["V"] == 0 and summaries["esc_2014"].tags["V2"] == 0


def test_unknown_rule_set_is_refused():
    with pytest.raises(KeyError):
        load_rule_set("esc_2099")


@pytest.mark.parametrize("rule_set_id", sorted(ROWS))
def test_every_rule_has_a_row(rule_set_id):
    rs = load_rule_set(rule_set_id)
    assert {r.id for r in rs.rules} == set(ROWS[rule_set_id])


@pytest.mark.parametrize(
    "rule_set_id,rule_id",
    [(rs_id, rid) for rs_id, rows in sorted(ROWS.items()) for rid in rows],
)
def test_rule_matches_guideline_row(rule_set_id, rule_id):
    row, min_age, max_age, interval, tag = ROWS[rule_set_id][rule_id]
    rule = load_rule_set(rule_set_id).rule(rule_id)
    assert rule.conditions.min_age == min_age, row
    assert rule.conditions.max_age == max_age, row
    if interval == "release":
        assert rule.action == "release" and rule.interval_months is None, row
        assert "return" in rule.caution.lower(), row
    else:
        assert rule.action == "recall" and rule.interval_months == interval, row
    assert rule.source.tag == tag, row
    if tag == "M":
        assert "from memory, verify" in rule.source.label
    if tag == "common_practice":
        assert "common practice" in rule.source.label


@pytest.mark.parametrize("rule_set_id", sorted(ROWS))
def test_sources_intervals_and_triggers_complete(rule_set_id):
    rs = load_rule_set(rule_set_id)
    for r in rs.rules:
        assert r.source.tag in TAGS and r.source.guideline
        if r.source.tag != "common_practice":
            assert r.source.year and r.source.section
        if r.action == "recall":
            lo, hi = r.interval_months
            assert 0 < lo <= hi
            assert r.needs
    assert set(rs.triggers) == set(TRIGGERS)
    assert all(m.months > 0 for m in rs.modifiers.values())
    assert check_age_bands(rs.rules) == []


@pytest.mark.parametrize("rule_set_id", sorted(ROWS))
def test_file_header_states_confidence(rule_set_id):
    text = (resources.files("tracker.rules") / f"{rule_set_id}.toml").read_text(encoding="utf-8")
    header = text.split("schema = 1")[0]
    assert "Confidence of the numbers" in header
    assert "[V]" in header
    assert ("Not [V]" in header) or ("[M]" in header)
    assert "from memory, verify" in header or "common practice" in header.lower()


def test_esc_2023_stop_rule_conditions_are_explicit():
    """ESC 2023: stop at >= 50 y with normal tests only in an isolated, informative, genetically negative family."""
    r = load_rule_set("esc_2023").rule("esc23.release.stop_at_50")
    c = r.conditions
    assert c.min_age == 50 and r.age_at == "last_visit"
    assert c.phenotype == {"negative"}
    assert {"isolated_case", "genotype_negative_family", "informative_family"} <= c.family_all
    assert "plp_variant" in c.family_none


def test_aha_has_no_stop_rule():
    """AHA/ACC: no stop age (from memory, verify); only ESC 2023 allows stopping."""
    rs = load_rule_set("aha_acc_2020")
    assert [r.id for r in rs.rules if r.action == "release"] == ["aha20.release.non_carrier"]


# ------------------------------------------------------------------ one guideline per rule set

# A year (1900-2099) in free text; ids such as ``esc_2023`` do not match.
YEAR = re.compile(r"\b(?:19|20)\d{2}\b")


def _sources_and_texts(rs):
    """(where, source, [free texts]) for every rule, advice item, modifier and trigger."""
    out = [(f"rule {r.id}", r.source, [r.text, r.caution]) for r in rs.rules]
    out += [(f"advice {a.id}", a.source, [a.text]) for a in rs.advice]
    out += [(f"modifier {c}", m.source, [m.text]) for c, m in rs.modifiers.items()]
    out += [(f"trigger {c}", t.source, [t.text]) for c, t in rs.triggers.items()]
    return out


@pytest.mark.parametrize("rule_set_id", sorted(ROWS))
def test_every_row_cites_only_its_own_guideline(rule_set_id):
    """Guidelines are never blended: every source names the rule set's own guideline and year (or is common
    practice), and no title, citation, text, caution, section or note names another year."""
    rs = load_rule_set(rule_set_id)
    assert set(available_rule_sets()) == set(ROWS)  # a new rule set gets this check too
    foreign = []
    for name in ("title", "citation", "verification"):
        foreign += [f"header {name}: {y}" for y in YEAR.findall(getattr(rs, name)) if int(y) != rs.year]
    for where, src, texts in _sources_and_texts(rs):
        if src.tag != "common_practice":
            assert (src.guideline, src.year) == (rs.guideline, rs.year), where
        else:
            assert src.year in (None, rs.year), where
        for text in texts + [src.section, src.note]:
            foreign += [f"{where}: {y}" for y in YEAR.findall(text) if int(y) != rs.year]
    assert foreign == [], foreign


@pytest.mark.parametrize("rule_set_id", sorted(ROWS))
def test_rule_file_names_no_other_year_outside_cross_references(rule_set_id):
    """Comments included: a line naming another year must be an explicit cross-reference."""
    rs = load_rule_set(rule_set_id)
    text = (resources.files("tracker.rules") / f"{rule_set_id}.toml").read_text(encoding="utf-8")
    bad = [
        (n, line)
        for n, line in enumerate(text.splitlines(), 1)
        if any(int(y) != rs.year for y in YEAR.findall(line)) and not re.search(r"cross[-_]reference", line, re.I)
    ]
    assert bad == [], bad


@pytest.mark.parametrize("rule_set_id", sorted(ROWS))
def test_row_ids_carry_the_rule_set_prefix(rule_set_id):
    """Row ids name their own guideline and year (e.g. aha20.* in aha_acc_2020): no row moved in from another set."""
    rs = load_rule_set(rule_set_id)
    prefix = {"aha_acc_2020": "aha20.", "aha_acc_2024": "aha24.", "esc_2014": "esc14.", "esc_2023": "esc23."}[rule_set_id]
    ids = [r.id for r in rs.rules] + [a.id for a in rs.advice]
    assert [i for i in ids if not i.startswith(prefix)] == []


def test_aha_2020_keeps_the_2020_positions():
    """AHA/ACC 2020 alone: the affected row and the release rest on the 2020 text ([M], verify), never on the
    later guideline; the return after a downgrade stays as a caution (common practice)."""
    rs = load_rule_set("aha_acc_2020")
    assert rs.title == "2020 AHA/ACC HCM guideline" and "e558-e631" in rs.citation
    affected = rs.rule("aha20.affected.scd_risk")
    assert (affected.source.guideline, affected.source.year, affected.source.tag) == ("AHA/ACC", 2020, "M")
    assert affected.interval_months == (12, 24)
    release = rs.rule("aha20.release.non_carrier")
    assert release.source.year == 2020 and "rec 13" in release.source.section
    assert "downgraded" in release.caution and "common practice" in release.caution
    for code in ("pregnancy", "variant_reclassified"):
        assert (rs.triggers[code].source.guideline, rs.triggers[code].source.year) == ("AHA/ACC", 2020), code


def _with(data: dict, path: tuple, value) -> dict:
    data = copy.deepcopy(data)
    node = data
    for key in path[:-1]:
        node = node[key] if not isinstance(key, tuple) else next(r for r in node if r["id"] == key[1])
    node[path[-1]] = value
    return data


@pytest.mark.parametrize(
    "path,value,fragment",
    [
        (("rules", ("id", "aha20.adult.carrier"), "source", "year"), 2024, "rule aha20.adult.carrier: source year 2024"),
        (
            ("rules", ("id", "aha20.adult.carrier"), "source", "guideline"),
            "AHA/ACC/AMSSM/HRS/PACES/SCMR",
            "rule aha20.adult.carrier: source guideline",
        ),
        (
            ("rules", ("id", "aha20.adult.carrier"), "source", "section"),
            "adults 3-5 y; same in the 2024 text",
            "rule aha20.adult.carrier: source section names year 2024",
        ),
        (
            ("rules", ("id", "aha20.release.non_carrier"), "caution"),
            "Return if the variant is downgraded (2024 text).",
            "rule aha20.release.non_carrier: caution names year 2024",
        ),
        (("title",), "2020 AHA/ACC HCM guideline (with the 2024 text)", "header: title names year 2024"),
        (("triggers", "pregnancy", "source", "year"), 2024, "trigger pregnancy: source year 2024"),
        (("modifiers", "progression", "source", "section"), "the 2024 text", "modifier progression: source section"),
    ],
)
def test_another_guideline_year_is_refused(path, value, fragment):
    _expect_error(_with(_raw("aha_acc_2020"), path, value), fragment)


def test_cross_reference_field_is_allowed_and_shown():
    """A study cited for context goes in cross_reference: loaded, and shown in the source label."""
    data = _with(
        _raw("aha_acc_2020"),
        ("rules", ("id", "aha20.adult.carrier"), "source", "cross_reference"),
        "invented study, 2019",
    )
    rule = build_rule_set(data, origin="test").rule("aha20.adult.carrier")
    assert rule.source.cross_reference == "invented study, 2019"
    assert "cross-reference: invented study, 2019" in rule.source.label


# ------------------------------------------------------------------ validation


def _minimal() -> dict:
    return copy.deepcopy(_raw("esc_2023"))


def _expect_error(data: dict, fragment: str):
    with pytest.raises(RuleSetError) as err:
        build_rule_set(data, origin="test")
    assert any(fragment in e for e in err.value.errors), err.value.errors


def test_overlapping_age_bands_are_refused():
    data = _minimal()
    extra = copy.deepcopy(next(r for r in data["rules"] if r["id"] == "esc23.adult.carrier.to60"))
    extra["id"] = "esc23.adult.carrier.overlap"
    extra["when"]["min_age"] = 55
    extra["when"]["max_age"] = 65
    data["rules"].append(extra)
    _expect_error(data, "overlapping age bands")


def test_adjacent_age_bands_are_accepted():
    # [18, 60) and [60, no limit) touch at 60 without overlapping.
    rs = load_rule_set("esc_2023")
    assert check_age_bands([rs.rule("esc23.adult.carrier.to60"), rs.rule("esc23.adult.carrier.from60")]) == []


def test_same_ages_with_different_conditions_are_accepted():
    rs = load_rule_set("esc_2023")
    assert check_age_bands([rs.rule("esc23.child.carrier"), rs.rule("esc23.carrier.competitive_sport")]) == []


@pytest.mark.parametrize(
    "mutate,fragment",
    [
        (lambda r: r.pop("source"), "missing source"),
        (lambda r: r["source"].update(tag="X"), "source tag"),
        (lambda r: r["source"].pop("section"), "no section"),
        (lambda r: r.update(interval_months=[36, 12]), "min 36 > max 12"),
        (lambda r: r.update(interval_months=[0, 12]), "positive"),
        (lambda r: r.update(interval_months=[12]), "[min, max]"),
        (lambda r: r["when"].update(genotype=["cousin"]), "unknown genotype"),
        (lambda r: r["when"].update(max_age=0), "max_age"),
        (lambda r: r.update(needs=[]), "what the visit needs"),
    ],
)
def test_invalid_rules_are_refused(mutate, fragment):
    data = _minimal()
    mutate(next(r for r in data["rules"] if r["id"] == "esc23.child.carrier"))
    _expect_error(data, fragment)


def test_release_rule_needs_a_caution():
    data = _minimal()
    next(r for r in data["rules"] if r["id"] == "esc23.release.non_carrier").pop("caution")
    _expect_error(data, "needs a caution")


def test_missing_trigger_is_refused():
    data = _minimal()
    data["triggers"].pop("pregnancy")
    _expect_error(data, "trigger pregnancy")


def test_duplicate_rule_id_is_refused():
    data = _minimal()
    data["rules"].append(copy.deepcopy(data["rules"][0]))
    _expect_error(data, "duplicate rule ids")


def test_local_file_is_validated(tmp_path):
    src = (resources.files("tracker.rules") / "esc_2023.toml").read_text(encoding="utf-8")
    good = tmp_path / "local.toml"
    good.write_text(src, encoding="utf-8")
    assert load_rule_set_file(good).id == "esc_2023"
    bad = tmp_path / "bad.toml"
    bad.write_text(src.replace("interval_months = [36, 60]", "interval_months = [60, 36]", 1), encoding="utf-8")
    with pytest.raises(RuleSetError):
        load_rule_set_file(bad)


def test_vocabulary_matches_spec():
    assert set(GENOTYPES) == {"carrier", "non_carrier", "at_risk_untested", "not_at_risk", "uncertain"}
