"""Recall rule sets: the data model and its validation.

A rule set is one guideline's recall rules written as data (one TOML file per
guideline, see the files beside this module).  This module turns the parsed
TOML (a plain ``dict``) into frozen dataclasses and refuses anything that is
incomplete or inconsistent:

* every rule, modifier, trigger and advice item carries a source with a
  confidence tag (``V`` seen in the primary source, ``V2`` seen only in a
  secondary copy, ``M`` from memory -> "from memory, verify",
  ``common_practice`` no single source);
* intervals are whole months, positive, ``min <= max``;
* age bands are whole years, ``[min_age, max_age)``, and two rules with the same
  conditions apart from age must not have overlapping bands;
* every code (genotype, phenotype, family feature, visit need, trigger) is one
  of the vocabularies below;
* one guideline per rule set (:func:`check_single_guideline`): every source
  names the rule set's own guideline and year (or common practice), and no
  title, citation, text, caution, section or note names another year; a study
  or another document cited only for context goes in the source's separate
  ``cross_reference`` field, shown as such;
* phenotype states are kept apart (:func:`check_phenotype_states`): a rule or
  advice item whose text says phenotype-negative (``phenotype negative``,
  ``G+P-``, ``without the phenotype``) must accept phenotype ``negative``
  only; text that permits competitive sport likewise; and a screening rule
  may not accept both ``negative`` and ``borderline`` (the borderline state
  has rows of its own).

Pure: no file access here (see :mod:`tracker.rules` for loading).
"""

from __future__ import annotations

import re
from collections.abc import Iterable, Mapping
from dataclasses import dataclass, field
from typing import Any

# --- vocabularies ---------------------------------------------------------

GENOTYPES: dict[str, str] = {
    "carrier": "carries the family's pathogenic/likely pathogenic (P/LP) variant (G+)",
    "non_carrier": "tested negative for the family's P/LP variant (G-)",
    "at_risk_untested": "blood relative at risk, no predictive test (or no P/LP variant known in the family)",
    "not_at_risk": "not at risk (e.g. descendant of a non-carrier, not a blood relative)",
    "uncertain": "test inconclusive, or only a variant of uncertain significance is known",
}

PHENOTYPES: dict[str, str] = {
    "negative": "clearly negative: does not meet the diagnostic criteria and is not borderline or uncertain",
    "positive": "meets the diagnostic criteria (affected)",
    "borderline": (
        "borderline or uncertain: a non-diagnostic abnormality (e.g. adult wall 13-14 mm without supporting "
        "features, child z near threshold) or affected status recorded as uncertain; neither phenotype-negative "
        "nor affected, with rows of its own"
    ),
}

FAMILY_FEATURES: dict[str, str] = {
    "plp_variant": "a P/LP variant is known in the family",
    "genotype_negative_family": "the proband's genetic test found no P/LP variant",
    "familial_disease": "more than one affected member (familial disease shown)",
    "isolated_case": "the proband is the only affected member",
    "informative_family": "the family is judged informative (enough relatives evaluated) by the clinician",
    "early_onset": "disease onset in childhood in the family",
    "late_onset": "disease onset late in life in the family",
    "sudden_death": "sudden cardiac death in the family",
}

NEEDS: dict[str, str] = {
    "ecg": "12-lead ECG",
    "echo": "transthoracic echocardiogram",
    "cmr": "cardiac magnetic resonance with contrast",
    "counselling": "genetic counselling",
    "ambulatory_ecg": "ambulatory ECG monitoring",
    "risk_assessment": "sudden-cardiac-death risk assessment",
    "clinical_review": "clinical review (history and examination)",
}

TRIGGERS: dict[str, str] = {
    "new_symptoms": "new symptoms (syncope, palpitations, chest pain, breathlessness)",
    "pregnancy": "pregnancy or planned pregnancy",
    "started_competitive_sport": "started competitive sport",
    "puberty": "puberty or growth spurt",
    "variant_reclassified": "the family variant was reclassified",
    "new_family_event": "new family data (a new diagnosis or a sudden death in the family)",
    "new_ecg_abnormality": "a new ECG abnormality",
}

MODIFIERS: dict[str, str] = {
    "progression": "change beyond measurement variability since the previous study",
    "projected_crossing": "a trend projects crossing the diagnostic threshold within the interval",
    "borderline": "borderline (non-diagnostic) phenotype",
}

GROUPS = ("screening", "affected")
ACTIONS = ("recall", "release")
TAGS = ("V", "V2", "M", "common_practice")
RELEASE_AGE_BASES = ("today", "last_visit")

_TAG_TEXT = {
    "V": "[V]",
    "V2": "[V2] secondary source",
    "M": "[M] from memory, verify",
    "common_practice": "common practice, verify",
}


class RuleSetError(ValueError):
    """A rule set that is incomplete or inconsistent; ``errors`` lists every problem."""

    def __init__(self, origin: str, errors: list[str]):
        self.origin = origin
        self.errors = list(errors)
        super().__init__(f"{origin}: " + "; ".join(self.errors))


# --- dataclasses ----------------------------------------------------------


@dataclass(frozen=True)
class Source:
    """Where a number comes from, with its confidence tag."""

    guideline: str
    year: int | None
    section: str
    tag: str
    note: str = ""
    cross_reference: str = ""  # a study or other document cited for context only, not the rule's basis

    @property
    def label(self) -> str:
        """Short text for display, e.g. ``ESC 2023, §6.11 [V]``."""
        xref = f" (cross-reference: {self.cross_reference})" if self.cross_reference else ""
        if self.tag == "common_practice":
            return _TAG_TEXT[self.tag] + (f" ({self.section})" if self.section else "") + xref
        head = self.guideline if self.year is None or str(self.year) in self.guideline else f"{self.guideline} {self.year}"
        parts = [head]
        if self.section:
            parts.append(self.section)
        return ", ".join(parts) + " " + _TAG_TEXT[self.tag] + xref

    @property
    def needs_verification(self) -> bool:
        """True for numbers from memory or common practice."""
        return self.tag in ("M", "common_practice")


@dataclass(frozen=True)
class Conditions:
    """When a rule applies.  Ages are whole years, band ``[min_age, max_age)``.

    ``genotype`` and ``phenotype`` are the accepted statuses; ``family_any``
    needs at least one of its features, ``family_all`` all of them,
    ``family_none`` none of them; ``athlete`` ``None`` means either.
    """

    genotype: frozenset[str]
    phenotype: frozenset[str]
    min_age: int = 0
    max_age: int | None = None
    family_any: frozenset[str] = frozenset()
    family_all: frozenset[str] = frozenset()
    family_none: frozenset[str] = frozenset()
    athlete: bool | None = None

    def matches_age(self, age_years: int) -> bool:
        return age_years >= self.min_age and (self.max_age is None or age_years < self.max_age)

    def matches_state(self, genotype: str, phenotype: str, features: Iterable[str], athlete: bool) -> bool:
        """Everything except age."""
        feats = frozenset(features)
        if genotype not in self.genotype or phenotype not in self.phenotype:
            return False
        if self.family_any and not (self.family_any & feats):
            return False
        if not self.family_all <= feats:
            return False
        if self.family_none & feats:
            return False
        if self.athlete is not None and self.athlete != athlete:
            return False
        return True

    def key_without_age(self) -> tuple:
        """Identity of the condition set apart from the age band."""
        return (
            self.genotype,
            self.phenotype,
            self.family_any,
            self.family_all,
            self.family_none,
            self.athlete,
        )

    def describe(self) -> str:
        hi = "" if self.max_age is None else f"{self.max_age}"
        parts = [f"age [{self.min_age}, {hi or 'no limit'}) y", "genotype " + "/".join(sorted(self.genotype))]
        parts.append("phenotype " + "/".join(sorted(self.phenotype)))
        if self.family_any:
            parts.append("family any of " + ", ".join(sorted(self.family_any)))
        if self.family_all:
            parts.append("family all of " + ", ".join(sorted(self.family_all)))
        if self.family_none:
            parts.append("family none of " + ", ".join(sorted(self.family_none)))
        if self.athlete is not None:
            parts.append("competitive athlete" if self.athlete else "not a competitive athlete")
        return "; ".join(parts)


@dataclass(frozen=True)
class Rule:
    """One guideline row.

    ``action == "recall"``: repeat visit every ``interval_months`` = (min, max)
    months.  ``action == "release"``: no further routine recall; ``caution``
    says when to return.  ``age_at`` (release rules only) is the date the age
    band is read at: ``"today"`` or ``"last_visit"`` (the age at the last,
    normal visit).
    """

    id: str
    group: str
    action: str
    text: str
    conditions: Conditions
    source: Source
    interval_months: tuple[int, int] | None = None
    needs: tuple[str, ...] = ()
    consider: tuple[str, ...] = ()
    caution: str = ""
    age_at: str = "today"


@dataclass(frozen=True)
class Modifier:
    """Shortens the interval to at most ``months`` months when it fires."""

    code: str
    months: int
    text: str
    source: Source


@dataclass(frozen=True)
class Trigger:
    """An event that asks for a review now; ``needs`` are added to the visit."""

    code: str
    text: str
    needs: tuple[str, ...]
    source: Source


@dataclass(frozen=True)
class Advice:
    """Guideline advice without a number (shown, never changes the interval)."""

    id: str
    text: str
    conditions: Conditions
    source: Source


@dataclass(frozen=True)
class RuleSet:
    """One guideline's recall rules."""

    id: str
    title: str
    guideline: str
    year: int
    citation: str
    verification: str
    rules: tuple[Rule, ...]
    modifiers: Mapping[str, Modifier] = field(default_factory=dict)
    triggers: Mapping[str, Trigger] = field(default_factory=dict)
    advice: tuple[Advice, ...] = ()
    child_adult_age: int = 18

    def rule(self, rule_id: str) -> Rule:
        for r in self.rules:
            if r.id == rule_id:
                return r
        raise KeyError(rule_id)

    def select(self, group: str, action: str) -> tuple[Rule, ...]:
        return tuple(r for r in self.rules if r.group == group and r.action == action)

    def tag_counts(self) -> dict[str, int]:
        counts = {t: 0 for t in TAGS}
        for r in self.rules:
            counts[r.source.tag] += 1
        return counts


# --- building and validation ---------------------------------------------


def _codes(value: Any, vocab: Mapping[str, str], what: str, errors: list[str], where: str) -> frozenset[str]:
    if value is None:
        return frozenset()
    if isinstance(value, str) or not isinstance(value, (list, tuple)):
        errors.append(f"{where}: {what} must be a list")
        return frozenset()
    bad = [v for v in value if v not in vocab]
    if bad:
        errors.append(f"{where}: unknown {what} {bad!r}")
    return frozenset(v for v in value if v in vocab)


def _source(data: Any, errors: list[str], where: str) -> Source:
    if not isinstance(data, Mapping):
        errors.append(f"{where}: missing source")
        return Source("?", None, "", "M")
    tag = data.get("tag")
    if tag not in TAGS:
        errors.append(f"{where}: source tag must be one of {TAGS}, got {tag!r}")
        tag = "M"
    guideline = data.get("guideline", "")
    year = data.get("year")
    section = data.get("section", "")
    if not guideline:
        errors.append(f"{where}: source has no guideline")
    if tag != "common_practice":
        if not isinstance(year, int):
            errors.append(f"{where}: source has no year")
            year = None
        if not section:
            errors.append(f"{where}: source has no section/table")
    xref = data.get("cross_reference", "")
    if not isinstance(xref, str):
        errors.append(f"{where}: cross_reference must be text")
        xref = ""
    return Source(
        str(guideline),
        year if isinstance(year, int) else None,
        str(section),
        tag,
        str(data.get("note", "")),
        xref,
    )


def _conditions(data: Any, errors: list[str], where: str) -> Conditions:
    if not isinstance(data, Mapping):
        errors.append(f"{where}: missing conditions ('when')")
        data = {}
    known = {"min_age", "max_age", "genotype", "phenotype", "family_any", "family_all", "family_none", "athlete"}
    extra = set(data) - known
    if extra:
        errors.append(f"{where}: unknown condition keys {sorted(extra)}")
    min_age = data.get("min_age", 0)
    max_age = data.get("max_age")
    if not isinstance(min_age, int) or isinstance(min_age, bool) or min_age < 0:
        errors.append(f"{where}: min_age must be a whole number of years >= 0")
        min_age = 0
    if max_age is not None and (not isinstance(max_age, int) or isinstance(max_age, bool) or max_age <= min_age):
        errors.append(f"{where}: max_age must be a whole number of years > min_age")
        max_age = None
    genotype = _codes(data.get("genotype"), GENOTYPES, "genotype", errors, where)
    phenotype = _codes(data.get("phenotype"), PHENOTYPES, "phenotype", errors, where)
    if not genotype:
        errors.append(f"{where}: conditions need a genotype list")
    if not phenotype:
        errors.append(f"{where}: conditions need a phenotype list")
    athlete = data.get("athlete")
    if athlete is not None and not isinstance(athlete, bool):
        errors.append(f"{where}: athlete must be true or false")
        athlete = None
    return Conditions(
        genotype=genotype,
        phenotype=phenotype,
        min_age=min_age,
        max_age=max_age,
        family_any=_codes(data.get("family_any"), FAMILY_FEATURES, "family feature", errors, where),
        family_all=_codes(data.get("family_all"), FAMILY_FEATURES, "family feature", errors, where),
        family_none=_codes(data.get("family_none"), FAMILY_FEATURES, "family feature", errors, where),
        athlete=athlete,
    )


def _months_pair(value: Any, errors: list[str], where: str) -> tuple[int, int] | None:
    ok = (
        isinstance(value, (list, tuple))
        and len(value) == 2
        and all(isinstance(v, int) and not isinstance(v, bool) for v in value)
    )
    if not ok:
        errors.append(f"{where}: interval_months must be [min, max] in whole months")
        return None
    lo, hi = value
    if lo <= 0 or hi <= 0:
        errors.append(f"{where}: interval months must be positive")
        return None
    if lo > hi:
        errors.append(f"{where}: interval min {lo} > max {hi}")
        return None
    return (lo, hi)


def _rule(data: Any, index: int, errors: list[str]) -> Rule | None:
    where = f"rule #{index + 1}"
    if not isinstance(data, Mapping):
        errors.append(f"{where}: not a table")
        return None
    rid = data.get("id")
    if not rid or not isinstance(rid, str):
        errors.append(f"{where}: missing id")
        rid = f"#{index + 1}"
    where = f"rule {rid}"
    group = data.get("group")
    action = data.get("action")
    if group not in GROUPS:
        errors.append(f"{where}: group must be one of {GROUPS}")
    if action not in ACTIONS:
        errors.append(f"{where}: action must be one of {ACTIONS}")
    text = data.get("text", "")
    if not text:
        errors.append(f"{where}: missing text")
    conditions = _conditions(data.get("when"), errors, where)
    source = _source(data.get("source"), errors, where)
    needs = tuple(sorted(_codes(data.get("needs", []), NEEDS, "need", errors, where), key=list(NEEDS).index))
    consider = tuple(sorted(_codes(data.get("consider", []), NEEDS, "need", errors, where), key=list(NEEDS).index))
    interval = None
    caution = str(data.get("caution", ""))
    age_at = data.get("age_at", "today")
    if action == "recall":
        interval = _months_pair(data.get("interval_months"), errors, where)
        if not needs:
            errors.append(f"{where}: a recall rule must say what the visit needs")
        if "age_at" in data:
            errors.append(f"{where}: recall rules are always read at the age on the due date (no age_at)")
        age_at = "due_date"
    elif action == "release":
        if "interval_months" in data:
            errors.append(f"{where}: a release rule has no interval")
        if not caution:
            errors.append(f"{where}: a release rule needs a caution (when to return)")
        if age_at not in RELEASE_AGE_BASES:
            errors.append(f"{where}: age_at must be one of {RELEASE_AGE_BASES}")
    return Rule(
        id=rid,
        group=str(group),
        action=str(action),
        text=str(text),
        conditions=conditions,
        source=source,
        interval_months=interval,
        needs=needs,
        consider=consider,
        caution=caution,
        age_at=str(age_at),
    )


def _bands_overlap(a: Conditions, b: Conditions) -> bool:
    a_hi = float("inf") if a.max_age is None else a.max_age
    b_hi = float("inf") if b.max_age is None else b.max_age
    return a.min_age < b_hi and b.min_age < a_hi


def check_age_bands(rules: Iterable[Rule]) -> list[str]:
    """Problems where two rules with the same conditions (apart from age) overlap in age."""
    errors = []
    rules = list(rules)
    for i, a in enumerate(rules):
        for b in rules[i + 1 :]:
            same = (a.group, a.action, a.conditions.key_without_age()) == (
                b.group,
                b.action,
                b.conditions.key_without_age(),
            )
            if same and _bands_overlap(a.conditions, b.conditions):
                errors.append(f"rules {a.id} and {b.id}: same conditions with overlapping age bands")
    return errors


# Wording that says a row is for phenotype-negative people, and wording that permits competitive sport.
NEGATIVE_PHENOTYPE_WORDING = re.compile(
    r"(?<!not )phenotype[- ]negative|\bG\+\s*/?\s*P-|\bG\+P\u2212|without the phenotype|no phenotype", re.IGNORECASE
)
SPORT_PERMISSION_WORDING = re.compile(
    r"all competitive sport|any (?:competitive )?sport|any intensity|may (?:take part|participate|compete)",
    re.IGNORECASE,
)


def check_phenotype_states(rules: Iterable[Rule], advice: Iterable[Advice] = ()) -> list[str]:
    """Problems where a row's wording and its phenotype conditions disagree.

    * text saying phenotype-negative, but the row also accepts another phenotype;
    * text permitting competitive sport, but the row accepts a phenotype other than negative;
    * a screening rule accepting both ``negative`` and ``borderline`` (each state has its own rows).
    """
    errors = []
    items = [("rule", r.id, r.text, r.conditions, r.group) for r in rules]
    items += [("advice", a.id, a.text, a.conditions, None) for a in advice]
    for kind, rid, text, cond, group in items:
        others = sorted(cond.phenotype - {"negative"})
        if NEGATIVE_PHENOTYPE_WORDING.search(text) and others:
            errors.append(
                f"{kind} {rid}: its text says phenotype-negative but it also accepts phenotype "
                f"{', '.join(others)}; give that state its own rows"
            )
        elif SPORT_PERMISSION_WORDING.search(text) and others:
            errors.append(
                f"{kind} {rid}: its text permits competitive sport but it accepts phenotype "
                f"{', '.join(others)}; sport advice is for phenotype-negative people only"
            )
        if group == "screening" and {"negative", "borderline"} <= cond.phenotype:
            errors.append(
                f"{kind} {rid}: accepts both phenotype negative and borderline; the borderline state has "
                "its own rows"
            )
    return errors


# A year (1900-2099) written in free text; rule-set ids such as ``esc_2023`` do not match.
YEAR_WORDING = re.compile(r"\b(?:19|20)\d{2}\b")


def check_single_guideline(rule_set: RuleSet) -> list[str]:
    """Problems where a rule set draws on a guideline other than its own.

    * a source that is not common practice must name the rule set's guideline
      and year; a common-practice source may carry no year, or the rule set's;
    * the title, citation, verification text, and every rule, caution, advice,
      modifier and trigger text, source section and note may name no year
      other than the rule set's.  Studies or other documents cited for context
      belong in a source's ``cross_reference`` field, which is not checked.
    """
    errors: list[str] = []
    own = rule_set.year

    def years(where: str, field_name: str, text: str) -> None:
        other = sorted({m for m in YEAR_WORDING.findall(text) if int(m) != own})
        if other:
            errors.append(
                f"{where}: {field_name} names year {', '.join(other)}, not this rule set's {own}; "
                "each guideline is its own rule set (put a study cited for context in cross_reference)"
            )

    def source(where: str, src: Source) -> None:
        if src.tag != "common_practice":
            if src.year != own:
                errors.append(f"{where}: source year {src.year} is not this rule set's year {own}")
            if src.guideline != rule_set.guideline:
                errors.append(
                    f"{where}: source guideline {src.guideline!r} is not this rule set's {rule_set.guideline!r}"
                )
        elif src.year is not None and src.year != own:
            errors.append(f"{where}: source year {src.year} is not this rule set's year {own}")
        years(where, "source section", src.section)
        years(where, "source note", src.note)

    for name in ("title", "citation", "verification"):
        years("header", name, getattr(rule_set, name))
    for r in rule_set.rules:
        where = f"rule {r.id}"
        years(where, "text", r.text)
        years(where, "caution", r.caution)
        source(where, r.source)
    for a in rule_set.advice:
        where = f"advice {a.id}"
        years(where, "text", a.text)
        source(where, a.source)
    for kind, items in (("modifier", rule_set.modifiers), ("trigger", rule_set.triggers)):
        for code, item in items.items():
            where = f"{kind} {code}"
            years(where, "text", item.text)
            source(where, item.source)
    return errors


def build_rule_set(data: Mapping[str, Any], origin: str = "<data>") -> RuleSet:
    """Validate parsed rule-set data and return a :class:`RuleSet`.

    Raises :class:`RuleSetError` listing every problem found.
    """
    errors: list[str] = []
    for key in ("id", "title", "guideline", "year", "citation", "verification"):
        if not data.get(key):
            errors.append(f"header: missing {key}")
    rules_data = data.get("rules")
    if not isinstance(rules_data, list) or not rules_data:
        errors.append("no rules")
        rules_data = []
    rules = [r for r in (_rule(d, i, errors) for i, d in enumerate(rules_data)) if r is not None]
    ids = [r.id for r in rules]
    dupes = sorted({i for i in ids if ids.count(i) > 1})
    if dupes:
        errors.append(f"duplicate rule ids {dupes}")
    errors.extend(check_age_bands(rules))

    modifiers: dict[str, Modifier] = {}
    mod_data = data.get("modifiers", {})
    for code in MODIFIERS:
        m = mod_data.get(code) if isinstance(mod_data, Mapping) else None
        where = f"modifier {code}"
        if not isinstance(m, Mapping):
            errors.append(f"{where}: missing")
            continue
        months = m.get("months")
        if not isinstance(months, int) or isinstance(months, bool) or months <= 0:
            errors.append(f"{where}: months must be a positive whole number")
            months = 1
        modifiers[code] = Modifier(code, months, str(m.get("text", MODIFIERS[code])), _source(m.get("source"), errors, where))
    if isinstance(mod_data, Mapping):
        for code in set(mod_data) - set(MODIFIERS):
            errors.append(f"unknown modifier {code!r}")

    triggers: dict[str, Trigger] = {}
    trig_data = data.get("triggers", {})
    for code in TRIGGERS:
        t = trig_data.get(code) if isinstance(trig_data, Mapping) else None
        where = f"trigger {code}"
        if not isinstance(t, Mapping):
            errors.append(f"{where}: missing (every trigger must be defined so none is ignored)")
            continue
        needs = tuple(sorted(_codes(t.get("needs", []), NEEDS, "need", errors, where), key=list(NEEDS).index))
        triggers[code] = Trigger(code, str(t.get("text", TRIGGERS[code])), needs, _source(t.get("source"), errors, where))
    if isinstance(trig_data, Mapping):
        for code in set(trig_data) - set(TRIGGERS):
            errors.append(f"unknown trigger {code!r}")

    advice = []
    for i, a in enumerate(data.get("advice", []) or []):
        where = f"advice #{i + 1}"
        if not isinstance(a, Mapping) or not a.get("id") or not a.get("text"):
            errors.append(f"{where}: needs id and text")
            continue
        advice.append(
            Advice(str(a["id"]), str(a["text"]), _conditions(a.get("when"), errors, where), _source(a.get("source"), errors, where))
        )

    errors.extend(check_phenotype_states(rules, advice))
    for kind, items in (("trigger", triggers), ("modifier", modifiers)):
        for code, item in items.items():
            if SPORT_PERMISSION_WORDING.search(item.text):
                errors.append(
                    f"{kind} {code}: applies to every phenotype, so its text may not permit competitive sport "
                    "(sport advice is for phenotype-negative rows only)"
                )

    child_adult = data.get("child_adult_age", 18)
    if not isinstance(child_adult, int) or child_adult <= 0:
        errors.append("child_adult_age must be a positive whole number")
        child_adult = 18

    if errors:
        raise RuleSetError(origin, errors)
    rule_set = RuleSet(
        id=str(data["id"]),
        title=str(data["title"]),
        guideline=str(data["guideline"]),
        year=int(data["year"]),
        citation=str(data["citation"]),
        verification=str(data["verification"]),
        rules=tuple(rules),
        modifiers=modifiers,
        triggers=triggers,
        advice=tuple(advice),
        child_adult_age=child_adult,
    )
    errors.extend(check_single_guideline(rule_set))
    if errors:
        raise RuleSetError(origin, errors)
    return rule_set
