"""Per-family state assembled from the store frames: pedigree, variant class, genotypes, flags, scheduler input.

Pure: takes the frames the store loaders return (``load_people``,
``load_variants``, ``load_genetic_results``, ``load_assessments``,
``load_studies``: codes, ISO date text) and returns plain dataclasses.  It
never opens the database.  The engines it feeds are
:func:`tracker.engines.cascade.plan_cascade`,
:func:`tracker.engines.reclassification.impact_of_reclassification` and
:func:`tracker.engines.schedule.propose_recall`.

Derivations (engineering choices of this project, documented because they
change who is recalled and when; none is a guideline number):

* **Current variant class**: the classification row with the latest
  ``classified_on`` date (rows are a history and are never overwritten).  A
  family with several variants uses the one with the most actionable current
  class (pathogenic, then likely pathogenic, VUS, likely benign, benign; ties:
  the first classified) and says so in ``notes``.
* **Affected status**: the status at the person's latest assessment
  (``affected`` / ``unaffected`` / ``uncertain``; None without assessment).
* **Flags** from the latest assessment: competitive athlete, pregnant.
  **New symptoms**: the symptom phrases (split at ``;`` and ``,``, compared
  without case) recorded at the latest assessment that were not recorded at
  the previous one; at a person's only assessment every recorded symptom
  counts as new (the safer reading: it asks for a review).
  **Started competitive sport**: athlete at the latest assessment, not at the
  previous one.
* **Family features** (codes of :data:`tracker.rules.model.FAMILY_FEATURES`):

  ``plp_variant``              the current class is pathogenic or likely pathogenic;
  ``familial_disease``         more than one member affected (latest status);
  ``isolated_case``            exactly one member affected;
  ``early_onset``              a member was younger than 18 y at diagnosis: the recorded age at
                               diagnosis (``diagnosis_age``, e.g. diagnosed at another centre) or,
                               for an affected member, the decimal age (from the recorded date of
                               birth) at their first assessment recorded as affected; the younger
                               of the two when both exist;
  ``sudden_death``             a deceased member whose cause of death is recorded as "sudden";
                               for a deceased member with no cause of death recorded, notes
                               containing "sudden" (any case) still count, and the reason says
                               it comes from the notes;
  ``genotype_negative_family`` no variant recorded for the family and a diagnostic panel of a
                               member reported no variant found.

  ``informative_family`` and ``late_onset`` are clinical judgements that the
  store does not record: never derived.
* **Last visit**: the latest echo, CMR or clinic study (an ECG alone is not a
  screening visit here).
* **Scheduler genotype** (:class:`~tracker.engines.schedule.PersonState`):
  with a P/LP variant, the status from
  :func:`~tracker.domain.genetics.genotype_statuses` (carrier, non_carrier,
  at_risk_untested, not_at_risk, uncertain).  Without one (VUS, LB/B or no
  variant found) genotypes have no predictive meaning; relatives are then
  at risk by blood: a blood relative (kinship > 0) of an affected member (or,
  with none recorded, of the proband) is ``uncertain`` in a VUS family and
  ``at_risk_untested`` otherwise; anyone else (married in, adopted in) is
  ``not_at_risk``.
* **Phenotype**: ``positive`` if affected, ``borderline`` if uncertain,
  ``negative`` otherwise (including never assessed).
* **Triggers**: ``new_symptoms``, ``pregnancy`` and
  ``started_competitive_sport`` from the assessments as above;
  ``variant_reclassified`` when the person has an open reclassification task,
  or when the family variant's class changed after the person's latest
  contact on record (visit, assessment or genetic test).
* **Eligible since** (for people never seen): the date the family became
  known to the clinic: the earliest of the first affected assessment, the
  first classification and the first genetic test in the family.
* **Trend modifiers**: ``progression`` and ``projected_crossing_age_years``
  come from a trend frame (columns ``person, progressing,
  projected_crossing_age, reasons``, optionally ``progression_tests`` and
  ``review_flags``) when one is given; the texts go to each person's facts.

Decision support only: the treating clinician decides, following local
protocols and the current guideline.
"""

from __future__ import annotations

import datetime as dt
import re
from collections.abc import Collection, Iterable, Mapping
from dataclasses import dataclass, field, replace

import numpy as np
import pandas as pd

from tracker.domain.dates import PartialDate, age_at, parse_partial_date
from tracker.domain.genetics import ACMG_CLASSES, ACTIONABLE_CLASSES, FamilyGenotypes, genotype_statuses
from tracker.domain.pedigree import Pedigree
from tracker.domain.records import column_values, frame_records
from tracker.engines.schedule import PersonState, Policy, Proposal, propose_recall
from tracker.rules.model import RuleSet

VISIT_MODALITIES = ("echo", "cmr", "clinic")
EARLY_ONSET_AGE_YEARS = 18  # "early onset" = affected before adulthood: engineering choice (common practice)
_CLASS_RANK = {c: i for i, c in enumerate(ACMG_CLASSES)}  # pathogenic first


@dataclass(frozen=True)
class Classification:
    """One dated ACMG/AMP classification of a variant."""

    classified_on: dt.date
    acmg_class: str
    reason: str | None = None


@dataclass(frozen=True)
class VariantInfo:
    """A family variant with its class history (oldest first); ``key`` is ``transcript:hgvs_c``."""

    family: str
    key: str
    gene: str
    transcript: str
    hgvs_c: str
    hgvs_p: str | None
    zygosity: str
    history: tuple[Classification, ...]

    @property
    def current(self) -> Classification:
        return self.history[-1]

    @property
    def current_class(self) -> str:
        return self.current.acmg_class

    @property
    def classified_on(self) -> dt.date:
        return self.current.classified_on

    @property
    def previous_class(self) -> str | None:
        """The class before the latest change of class (None if it never changed)."""
        for c in reversed(self.history[:-1]):
            if c.acmg_class != self.current_class:
                return c.acmg_class
        return None

    @property
    def class_changed_on(self) -> dt.date | None:
        """Date of the latest classification that changed the class (None if it never changed)."""
        for i in range(len(self.history) - 1, 0, -1):
            if self.history[i].acmg_class != self.history[i - 1].acmg_class:
                return self.history[i].classified_on
        return None


@dataclass(frozen=True)
class PersonFacts:
    """What the assessments, studies and tests say about one person (dates as datetime.date)."""

    person: str
    affected_status: str | None = None
    assessed_on: dt.date | None = None
    first_affected_on: dt.date | None = None
    athlete: bool = False
    pregnant: bool = False
    new_symptoms: tuple[str, ...] = ()
    started_sport: bool = False
    last_visit: dt.date | None = None
    last_contact: dt.date | None = None
    tested: bool = False
    studied: bool = False
    trend_reasons: str = ""
    progression_tests: str = ""  # the progression tests that fired, with their figures
    review_flags: str = ""  # "criteria not assessable: ..." texts joined by " | "


@dataclass(frozen=True)
class FamilyState:
    """Everything the cascade, reclassification and recall engines need for one family."""

    family: str
    pedigree: Pedigree
    variant: VariantInfo | None
    variants: tuple[VariantInfo, ...]
    genotypes: FamilyGenotypes
    facts: Mapping[str, PersonFacts]
    features: frozenset[str]
    feature_reasons: Mapping[str, str]
    eligible_since: dt.date | None
    seen: frozenset[str]
    states: Mapping[str, PersonState]
    not_scheduled: Mapping[str, str]
    results: pd.DataFrame = field(repr=False, default_factory=pd.DataFrame)
    notes: tuple[str, ...] = ()
    blood: frozenset[str] = frozenset()  # at risk by blood (:func:`at_risk_by_blood`)

    @property
    def variant_class(self) -> str | None:
        return self.variant.current_class if self.variant else None

    @property
    def affected(self) -> dict[str, str | None]:
        return {p: f.affected_status for p, f in self.facts.items()}

    @property
    def last_visit(self) -> dict[str, dt.date | None]:
        return {p: f.last_visit for p, f in self.facts.items()}


# --------------------------------------------------------------------------- small helpers


def _blank(v: object) -> bool:
    if v is None:
        return True
    try:
        return bool(pd.isna(v))
    except (TypeError, ValueError):
        return False


def _text(v: object) -> str | None:
    return None if _blank(v) or str(v).strip() == "" else str(v).strip()


def _flag(v: object) -> bool:
    return False if _blank(v) else bool(v)


def _date(v: object) -> dt.date | None:
    if _blank(v):
        return None
    if isinstance(v, dt.datetime):
        return v.date()
    if isinstance(v, dt.date):
        return v
    return dt.date.fromisoformat(str(v).strip())


def _partial(v: object) -> PartialDate | None:
    if _blank(v):
        return None
    if isinstance(v, PartialDate):
        return v
    if isinstance(v, dt.date):
        return PartialDate(v)
    return parse_partial_date(str(v))


def _dates(values: Iterable[object]) -> list[dt.date | None]:
    """:func:`_date` of each value; each distinct value is parsed once (a column repeats its dates)."""
    seen: dict[object, dt.date | None] = {}
    out = []
    for v in values:
        try:
            d = seen[v]
        except KeyError:
            d = seen[v] = _date(v)
        except TypeError:  # unhashable cell
            d = _date(v)
        out.append(d)
    return out


def _column(frame: pd.DataFrame, name: str) -> list:
    """``frame[name]`` as ``to_dict("records")`` values, or all None when the column is absent
    (what ``row.get(name)`` gives on those records)."""
    return column_values(frame[name]) if name in frame.columns else [None] * len(frame)


def _is(v: object, text: str) -> bool:
    """``v == text`` for a cell that may be missing (NaN, None, pd.NA) or not text."""
    return isinstance(v, str) and v == text


def _max_date(*dates: dt.date | None) -> dt.date | None:
    present = [d for d in dates if d is not None]
    return max(present) if present else None


def symptom_phrases(text: object) -> frozenset[str]:
    """Symptom phrases of a free-text cell: split at ';' and ',', trimmed, lower case."""
    if _blank(text):
        return frozenset()
    return frozenset(p.strip().lower() for p in re.split(r"[;,]", str(text)) if p.strip())


# --------------------------------------------------------------------------- variants


def family_variants(variants: pd.DataFrame) -> dict[str, tuple[VariantInfo, ...]]:
    """Family code -> its variants with class history (oldest first), from ``load_variants``.

    Rows are sorted by family, transcript, c. change and date (stable: rows of one date keep their
    order); rows missing the family, transcript or c. change are left out.
    """
    if variants is None or variants.empty:
        return {}
    frame = variants.assign(on_date=_dates(variants["classified_on"])).sort_values(
        ["family", "transcript", "hgvs_c", "on_date"], kind="stable"
    )
    cols = {c: frame[c].tolist() for c in
            ("family", "transcript", "hgvs_c", "gene", "hgvs_p", "zygosity", "acmg_class", "on_date", "reason")}  # fmt: skip
    keys = list(zip(cols["family"], cols["transcript"], cols["hgvs_c"]))
    out: dict[str, list[VariantInfo]] = {}
    start = 0
    while start < len(keys):
        end = start + 1
        while end < len(keys) and keys[end] == keys[start]:
            end += 1
        fam, tx, c = keys[start]
        if not (_blank(fam) or _blank(tx) or _blank(c)):
            out.setdefault(fam, []).append(_variant_info(fam, tx, c, cols, start, end))
        start = end
    return {k: tuple(v) for k, v in out.items()}


def _variant_info(fam: str, tx: str, c: str, cols: Mapping[str, list], start: int, end: int) -> VariantInfo:
    """The variant of the sorted rows ``start:end`` of ``cols`` (one family, transcript and c. change)."""
    history = tuple(
        Classification(cols["on_date"][i], cols["acmg_class"][i],
                       None if _blank(cols["reason"][i]) else str(cols["reason"][i]))
        for i in range(start, end)
    )  # fmt: skip
    hgvs_p = cols["hgvs_p"][start]
    return VariantInfo(
        family=fam, key=f"{tx}:{c}", gene=cols["gene"][start], transcript=tx, hgvs_c=c,
        hgvs_p=None if _blank(hgvs_p) else hgvs_p, zygosity=cols["zygosity"][start], history=history,
    )  # fmt: skip


def primary_variant(variants: Iterable[VariantInfo]) -> VariantInfo | None:
    """The variant the family is managed on: most actionable current class, then first classified."""
    vs = list(variants)
    if not vs:
        return None
    return min(vs, key=lambda v: (_CLASS_RANK[v.current_class], v.history[0].classified_on, v.key))


# --------------------------------------------------------------------------- people facts


def person_facts(
    people: Iterable[str],
    assessments: pd.DataFrame,
    studies: pd.DataFrame,
    results: pd.DataFrame,
) -> dict[str, PersonFacts]:
    """Latest affected status, flags, new symptoms, last visit and last contact for each person.

    Each person's facts come from their own rows only, so one call for the whole cohort gives
    every family's facts.
    """
    codes = list(people)
    wanted = set(codes)
    by_person = _assessments_by_person(assessments, wanted)
    studied, visits, contacts = _study_dates(studies, wanted)
    tested: set[str] = set()
    if results is not None and len(results):
        g = results[results["person"].isin(wanted)]
        for p, d in zip(g["person"].tolist(), _dates(g["test_date"].tolist())):
            tested.add(p)
            contacts[p] = _max_date(contacts.get(p), d)
    return {
        p: _person_fact(p, by_person.get(p, []), visits.get(p), contacts.get(p), p in tested, p in studied)
        for p in codes
    }


_ASSESSMENT_FIELDS = ("person", "affected_status", "symptoms", "competitive_athlete", "pregnant")


def _assessments_by_person(assessments: pd.DataFrame | None, wanted: set[str]) -> dict[str, list[dict]]:
    """Person -> their assessment rows (the fields used here, as records, with the date in ``_on``)."""
    by_person: dict[str, list[dict]] = {}
    if assessments is None or not len(assessments):
        return by_person
    a = assessments[assessments["person"].isin(wanted)]
    cols = [_column(a, c) for c in _ASSESSMENT_FIELDS] + [_dates(_column(a, "assessment_date"))]
    for values in zip(*cols):
        r = dict(zip(_ASSESSMENT_FIELDS + ("_on",), values))
        by_person.setdefault(r["person"], []).append(r)
    return by_person


def _study_dates(
    studies: pd.DataFrame | None, wanted: set[str]
) -> tuple[set[str], dict[str, dt.date], dict[str, dt.date]]:
    """(people with a study, person -> last visit, person -> last study of any kind)."""
    visits: dict[str, dt.date] = {}
    contacts: dict[str, dt.date] = {}
    studied: set[str] = set()
    if studies is None or not len(studies):
        return studied, visits, contacts
    s = studies[studies["person"].isin(wanted)]
    # one row per study (a study has a row per measure): the same sets and latest dates
    s = s[["person", "study_date", "modality"]].drop_duplicates()
    for p, d, m in zip(s["person"].tolist(), _dates(s["study_date"].tolist()), s["modality"].tolist()):
        studied.add(p)
        contacts[p] = _max_date(contacts.get(p), d)
        if m in VISIT_MODALITIES:
            visits[p] = _max_date(visits.get(p), d)
    return studied, visits, contacts


def _person_fact(
    p: str, rows: list[dict], last_visit: dt.date | None, contact: dt.date | None, tested: bool, studied: bool
) -> PersonFacts:
    """One person's facts from their assessment rows and their latest visit and contact."""
    rows = sorted(rows, key=lambda r: r["_on"])
    latest = rows[-1] if rows else None
    prev = rows[-2] if len(rows) > 1 else None
    first_aff = next((r["_on"] for r in rows if r["affected_status"] == "affected"), None)
    if latest is None:
        return PersonFacts(person=p, last_visit=last_visit, last_contact=contact, tested=tested, studied=studied)
    new = symptom_phrases(latest["symptoms"]) - (symptom_phrases(prev["symptoms"]) if prev else frozenset())
    athlete = _flag(latest["competitive_athlete"])
    return PersonFacts(
        person=p,
        affected_status=latest["affected_status"],
        assessed_on=latest["_on"],
        first_affected_on=first_aff,
        athlete=athlete,
        pregnant=_flag(latest["pregnant"]),
        new_symptoms=tuple(sorted(new)),
        started_sport=athlete and prev is not None and not _flag(prev["competitive_athlete"]),
        last_visit=last_visit,
        last_contact=_max_date(contact, latest["_on"]),
        tested=tested,
        studied=studied,
    )


# --------------------------------------------------------------------------- family features


def family_features(
    people: pd.DataFrame,
    facts: Mapping[str, PersonFacts],
    variant: VariantInfo | None,
    results: pd.DataFrame,
) -> tuple[frozenset[str], dict[str, str]]:
    """The derived family features and, for each, why (see the module docstring)."""
    return _family_features(frame_records(people), facts, variant, results)


def _family_features(
    members: list[dict],
    facts: Mapping[str, PersonFacts],
    variant: VariantInfo | None,
    results: pd.DataFrame,
) -> tuple[frozenset[str], dict[str, str]]:
    """:func:`family_features` from the members' rows (as records)."""
    reasons: dict[str, str] = {}
    if variant is not None and variant.current_class in ACTIONABLE_CLASSES:
        reasons["plp_variant"] = (
            f"{variant.gene} {variant.key} classified {variant.current_class.replace('_', ' ')} "
            f"on {variant.classified_on.isoformat()}"
        )
    affected = [p for p, f in facts.items() if f.affected_status == "affected"]
    if len(affected) > 1:
        reasons["familial_disease"] = f"{len(affected)} affected members: {', '.join(affected)}"
    elif len(affected) == 1:
        reasons["isolated_case"] = f"one affected member: {affected[0]}"
    births = {r["person"]: _partial(r["birth_date"]) for r in members}
    diagnosed = {r["person"]: (int(float(r["diagnosis_age"])), _text(r.get("diagnosis_place")))
                 for r in members if not _blank(r.get("diagnosis_age"))}  # fmt: skip
    early = []
    for p in [*affected, *(p for p in diagnosed if p not in affected)]:
        ages = []  # (age in years, words)
        if p in diagnosed:
            age, place = diagnosed[p]
            ages.append((float(age), f"diagnosed at {age} y" + (f" ({place})" if place else "") + ", recorded age"))
        b, on = births.get(p), facts[p].first_affected_on if p in facts else None
        if p in affected and b is not None and on is not None:
            age = age_at(b, on).years
            ages.append((age, f"affected at {age:.1f} y at the first assessment recorded as affected"))
        if ages:
            age, words = min(ages)
            if age < EARLY_ONSET_AGE_YEARS:
                early.append(f"{p} ({words})")
    if early:
        reasons["early_onset"] = f"affected before {EARLY_ONSET_AGE_YEARS} y: " + ", ".join(early)
    sudden, from_notes = [], []
    for r in members:
        if _text(r.get("vital_status")) != "deceased":
            continue
        cause = _text(r.get("death_cause"))
        if cause == "sudden":
            age = "" if _blank(r.get("death_age")) else f" at {int(float(r['death_age']))} y"
            sudden.append(r["person"] + age)
        elif cause is None and not _blank(r.get("notes")) and "sudden" in str(r["notes"]).lower():
            from_notes.append(r["person"])  # fallback for records without a cause of death
    if sudden or from_notes:
        parts = []
        if sudden:
            parts.append("deceased member with sudden death recorded as the cause of death: " + ", ".join(sudden))
        if from_notes:
            parts.append("from the notes only (cause of death not recorded; record it): " + ", ".join(from_notes))
        reasons["sudden_death"] = "; ".join(parts)
    if variant is None and results is not None and len(results):
        nvf = {
            p for p, test, result in zip(results["person"].tolist(), results["test_type"].tolist(),
                                         results["result"].tolist())
            if _is(test, "diagnostic_panel") and _is(result, "no_variant_found")
        }  # fmt: skip
        if nvf:
            reasons["genotype_negative_family"] = (
                "no variant recorded; diagnostic panel found no variant in " + ", ".join(sorted(nvf))
            )
    return frozenset(reasons), reasons


# --------------------------------------------------------------------------- scheduler input


def phenotype_for_schedule(affected_status: str | None) -> str:
    """'positive' if affected, 'borderline' if uncertain, 'negative' otherwise."""
    return {"affected": "positive", "uncertain": "borderline"}.get(affected_status or "", "negative")


def _blood_at_risk(ped: Pedigree, anchors: list[str]) -> set[str]:
    if not anchors:
        return set(ped.people)
    return {p for p in ped.people if any(p == a or ped.kinship(p, a) > 0 for a in anchors)}


def at_risk_by_blood(ped: Pedigree, affected: Mapping[str, str | None]) -> frozenset[str]:
    """Members related by blood to an affected member (latest status in ``affected``), or to the
    proband when nobody is affected: who is at risk when the variant does not predict disease."""
    anchors = [p for p, s in affected.items() if s == "affected" and p in ped]
    if not anchors:
        anchors = [p for p in ped.people if ped.member(p).proband]
    return frozenset(_blood_at_risk(ped, anchors))


def shown_genotype(status: str | None, variant_class: str | None, person: str, blood: Collection[str]) -> str | None:
    """The genotype status every command shows (the scheduler's, :func:`genotype_for_schedule`) from the
    pedigree computation's ``status`` under ``variant_class``; ``blood``: :func:`at_risk_by_blood`."""
    return status if status is None else genotype_for_schedule(status, variant_class, person in blood)


def genotype_for_schedule(
    status: str, variant_class: str | None, at_risk_by_blood: bool
) -> str:
    """The scheduler's genotype code (see the module docstring)."""
    if variant_class in ACTIONABLE_CLASSES:
        return status
    if not at_risk_by_blood:
        return "not_at_risk"
    return "uncertain" if variant_class == "uncertain_significance" else "at_risk_untested"


def _clean_links(members: list[dict]) -> tuple[list[dict], list[str]]:
    """Drop parent/twin links to people outside ``members`` (another family), with a note.

    ``members``: the family's rows (as records); a row is copied only when a link is dropped.
    """
    codes = {r["person"] for r in members}
    notes = []
    dropped: dict[int, list[str]] = {}
    for col in ("mother", "father", "twin_of"):
        for i, r in enumerate(members):
            q = r.get(col)
            if q is not None and not pd.isna(q) and q not in codes:
                notes.append(f"{r['person']}: {col} {q} is recorded in another family: link not used here")
                dropped.setdefault(i, []).append(col)
    if not dropped:
        return members, notes
    rows = list(members)
    for i, cols in dropped.items():
        rows[i] = {**rows[i], **dict.fromkeys(cols)}
    return rows, notes


def build_family_state(
    family: str,
    people: pd.DataFrame,
    variants: pd.DataFrame,
    results: pd.DataFrame,
    assessments: pd.DataFrame,
    studies: pd.DataFrame,
    *,
    trends: pd.DataFrame | None = None,
    reclassification_pending: Iterable[str] = (),
    as_of: dt.date | None = None,
) -> FamilyState:
    """The state of one family from the store frames (all families' frames may be passed).

    ``trends``: optional frame ``person, progressing, projected_crossing_age,
    reasons``.  ``reclassification_pending``: people with an open
    reclassification task (they get the ``variant_reclassified`` trigger).
    ``as_of``: records dated after this day (assessments, studies, genetic
    results, classifications) are left out, so the state is the record as it
    stood on that day.  Raises ``KeyError`` for a family with no members in
    ``people``.
    """
    members = people[people["family"] == family]
    if members.empty:
        raise KeyError(family)
    if as_of is not None:
        variants = records_up_to(variants, "classified_on", as_of)
        results = records_up_to(results, "test_date", as_of)
        assessments = records_up_to(assessments, "assessment_date", as_of)
        studies = records_up_to(studies, "study_date", as_of)
    rows, notes = _clean_links(frame_records(members))
    ped = Pedigree.from_rows(rows)
    codes = [r["person"] for r in rows]
    fam_results = (
        results[results["person"].isin(codes)] if results is not None and len(results) else _no_results()
    )
    vs = family_variants(variants[variants["family"] == family]).get(family, ()) if len(variants) else ()
    facts = person_facts(codes, assessments, studies, fam_results)
    state = _family_state(family, rows, ped, notes, vs, fam_results, facts, frozenset(reclassification_pending))
    return apply_trends(state, trends)


def _no_results() -> pd.DataFrame:
    """The results frame of a family with no genetic result recorded."""
    return pd.DataFrame(columns=["person", "test_date", "test_type", "variant", "result"])


def _family_state(
    family: str,
    members: list[dict],
    ped: Pedigree,
    notes: list[str],
    vs: tuple[VariantInfo, ...],
    fam_results: pd.DataFrame,
    facts: Mapping[str, PersonFacts],
    pending: frozenset[str],
) -> FamilyState:
    """The state of one family from its members' rows (as records, links cleaned), pedigree,
    variants, genetic results and people's facts (no trend modifiers)."""
    notes = list(notes)
    variant = primary_variant(vs)
    if len(vs) > 1:
        notes.append(
            f"{len(vs)} variants recorded; the family is managed on {variant.gene} {variant.key} "
            f"(the most actionable current class): review the others with the genetics team"
        )
    vclass = variant.current_class if variant else None
    genotypes = genotype_statuses(ped, fam_results, vclass, variant.key if variant else None)
    features, feature_reasons = _family_features(members, facts, variant, fam_results)

    # eligible since: when the family became known to the clinic
    first_dates = [f.first_affected_on for f in facts.values()]
    first_dates += [v.history[0].classified_on for v in vs]
    first_dates += _dates(fam_results["test_date"].tolist()) if len(fam_results) else []
    present = [d for d in first_dates if d is not None]
    eligible_since = min(present) if present else None

    blood = at_risk_by_blood(ped, {p: f.affected_status for p, f in facts.items()})
    changed_on = variant.class_changed_on if variant else None

    states: dict[str, PersonState] = {}
    not_scheduled: dict[str, str] = {}
    for r in members:
        p = r["person"]
        if _flag(r.get("placeholder")):
            not_scheduled[p] = "placeholder (drawn only to connect the pedigree): never scheduled"
            continue
        birth = _partial(r.get("birth_date"))
        if birth is None:
            not_scheduled[p] = "no date of birth recorded: the age rules cannot be applied; record the date of birth"
            continue
        f = facts[p]
        triggers = set()
        if f.new_symptoms:
            triggers.add("new_symptoms")
        if f.pregnant:
            triggers.add("pregnancy")
        if f.started_sport:
            triggers.add("started_competitive_sport")
        genotype = genotype_for_schedule(genotypes[p].status, vclass, p in blood)
        reclassified_since = changed_on is not None and f.last_contact is not None and changed_on > f.last_contact
        if genotype != "not_at_risk" and (p in pending or reclassified_since):
            triggers.add("variant_reclassified")
        states[p] = PersonState(
            person_code=p,
            birth=birth,
            sex=_text(r.get("sex_at_birth")) or "unknown",
            vital_status=_text(r.get("vital_status")) or "unknown",
            contact_status=_text(r.get("contact_status")) or "not_contacted",
            genotype=genotype,
            phenotype=phenotype_for_schedule(f.affected_status),
            family_features=features,
            athlete=f.athlete,
            last_visit=f.last_visit,
            triggers=frozenset(triggers),
            eligible_since=eligible_since,
            variant_classified_on=variant.classified_on if variant else None,
        )
    seen = frozenset(p for p, f in facts.items() if f.tested or f.studied)
    return FamilyState(
        family=family,
        pedigree=ped,
        variant=variant,
        variants=tuple(vs),
        genotypes=genotypes,
        facts=facts,
        features=features,
        feature_reasons=feature_reasons,
        eligible_since=eligible_since,
        seen=seen,
        states=states,
        not_scheduled=not_scheduled,
        results=fam_results,
        notes=tuple(notes) + tuple(genotypes.notes),
        blood=blood,
    )


def build_family_states(
    people: pd.DataFrame,
    variants: pd.DataFrame,
    results: pd.DataFrame,
    assessments: pd.DataFrame,
    studies: pd.DataFrame,
    *,
    trends: pd.DataFrame | None = None,
    reclassification_pending: Iterable[str] = (),
    as_of: dt.date | None = None,
) -> dict[str, FamilyState]:
    """:func:`build_family_state` for every family in ``people`` (family code order), with the same results.

    What does not depend on the family is computed once for the cohort: the dates, each
    family's variants, every person's facts and the trend rows; the people and genetic
    results are split by family once.  The work grows with the cohort, not with its square.
    """
    pending = frozenset(reclassification_pending)
    if as_of is not None:
        variants = records_up_to(variants, "classified_on", as_of)
        results = records_up_to(results, "test_date", as_of)
        assessments = records_up_to(assessments, "assessment_date", as_of)
        studies = records_up_to(studies, "study_date", as_of)
    family_of = dict(zip(people["person"], people["family"]))
    members_of = _rows_by_family(people)
    results_of = by_family(results, family_of)
    variants_of = family_variants(variants) if variants is not None else {}
    facts_of = person_facts(people["person"].tolist(), assessments, studies, results)
    trend_rows = _trend_rows(trends)
    out = {}
    for fam in sorted(members_of):
        members, notes = _clean_links(members_of[fam])
        ped = Pedigree.from_rows(members)
        facts = {r["person"]: facts_of[r["person"]] for r in members}
        fam_results = results_of[fam] if fam in results_of else _no_results()
        state = _family_state(fam, members, ped, notes, variants_of.get(fam, ()), fam_results, facts, pending)
        out[fam] = _trends_of_members(state, trend_rows)
    return out


def _rows_by_family(people: pd.DataFrame) -> dict[str, list[dict]]:
    """Family code -> its members' rows (as records, in frame order); rows without a family are left out."""
    out: dict[str, list[dict]] = {}
    for r in frame_records(people):
        if not _blank(r["family"]):
            out.setdefault(r["family"], []).append(r)
    return out


def by_family(frame: pd.DataFrame | None, family_of: Mapping[str, str]) -> dict[str, pd.DataFrame]:
    """``frame`` split by family: its own ``family`` column, else the family of its ``person``."""
    if frame is None or not len(frame):
        return {}
    key = frame["family"] if "family" in frame.columns else frame["person"].map(family_of)
    return {fam: group for fam, group in frame.groupby(key, sort=False)}


def records_up_to(frame: pd.DataFrame | None, column: str, on: dt.date) -> pd.DataFrame | None:
    """Rows of ``frame`` whose ISO date in ``column`` is on or before ``on``."""
    if frame is None or frame.empty:
        return frame
    keep = np.fromiter((d is not None and d <= on for d in _dates(frame[column].tolist())), dtype=bool,
                       count=len(frame))  # fmt: skip
    return frame[keep]


def apply_trends(state: FamilyState, trends: pd.DataFrame | None) -> FamilyState:
    """``state`` with each PersonState's ``progression`` and ``projected_crossing_age_years``
    (and each person's ``trend_reasons``) taken from a trend frame
    (``person, progressing, projected_crossing_age, reasons``); people absent from it keep none."""
    if trends is None or trends.empty:
        return state
    return _with_trend_rows(state, _trend_rows(trends))


def apply_trends_to_states(states: Mapping[str, FamilyState], trends: pd.DataFrame | None) -> dict[str, FamilyState]:
    """:func:`apply_trends` for every family of ``states``, each with the rows of its own members
    in ``trends`` (one frame for the whole cohort); a family with none is left as it is."""
    rows = _trend_rows(trends)
    return {fam: _trends_of_members(st, rows) for fam, st in states.items()}


def _trend_rows(trends: pd.DataFrame | None) -> dict[str, dict]:
    """Person -> their row of a trend frame (the last one if several), as records."""
    if trends is None or trends.empty:
        return {}
    return {r["person"]: r for r in frame_records(trends)}


def _trends_of_members(state: FamilyState, rows: Mapping[str, Mapping]) -> FamilyState:
    """:func:`apply_trends` with the rows of the family's members: ``state`` itself when none has one."""
    if not any(p in rows for p in state.facts):
        return state
    return _with_trend_rows(state, rows)


def _with_trend_rows(state: FamilyState, rows: Mapping[str, Mapping]) -> FamilyState:
    """``state`` with the trend modifiers of ``rows`` (person -> trend row, as records)."""
    states = {}
    for p, s in state.states.items():
        t = rows.get(p)
        if t is None:
            states[p] = s
            continue
        crossing = None if _blank(t.get("projected_crossing_age")) else float(t["projected_crossing_age"])
        progressing = False if _blank(t.get("progressing")) else bool(t["progressing"])
        states[p] = replace(s, progression=progressing, projected_crossing_age_years=crossing)
    def text(p: str, column: str) -> str:
        return "" if p not in rows or _blank(rows[p].get(column)) else str(rows[p][column])

    facts = {
        p: replace(f, trend_reasons=text(p, "reasons"), progression_tests=text(p, "progression_tests"),
                   review_flags=text(p, "review_flags"))
        for p, f in state.facts.items()
    }  # fmt: skip
    return replace(state, states=states, facts=facts)


def first_degree_of_affected(state: FamilyState) -> set[str]:
    """Members who are first-degree relatives of an affected member (for the trend thresholds)."""
    out: set[str] = set()
    for p, f in state.facts.items():
        if f.affected_status == "affected":
            out.update(state.pedigree.first_degree_relatives(p))
    return out


def genotype_positive(state: FamilyState) -> set[str]:
    """Carriers of a P/LP family variant (tested, obligate or by monozygotic co-twin)."""
    if state.variant_class not in ACTIONABLE_CLASSES:
        return set()
    return set(state.genotypes.carriers())


# --------------------------------------------------------------------------- proposals


def propose_for_family(
    state: FamilyState, rule_set: RuleSet, policy: Policy, today: dt.date
) -> dict[str, Proposal]:
    """A recall proposal for every schedulable member (placeholders and people without a birth date are left out)."""
    return {p: propose_recall(s, rule_set, policy, today) for p, s in state.states.items()}


def screening_states(proposals: Mapping[str, Proposal]) -> dict[str, str]:
    """Screening state before a reclassification, for
    :func:`~tracker.engines.reclassification.impact`: 'released' (discharged
    by a release rule), 'surveillance' (due or overdue for recall) or 'none'."""
    out = {}
    for p, prop in proposals.items():
        if prop.status == "released":
            out[p] = "released"
        elif prop.status in ("due", "overdue"):
            out[p] = "surveillance"
        else:
            out[p] = "none"
    return out


def task_items(items: Iterable, state: FamilyState) -> tuple[list, list[str]]:
    """Reclassification impact items worth a task: family-level items and items for living,
    non-placeholder members (a placeholder or deceased member cannot be recalled; the family-level
    item covers the family record).  Returns (kept items, notes on what was left out)."""
    kept, left = [], []
    for it in items:
        if it.person is None or it.person not in state.pedigree:
            kept.append(it)
            continue
        m = state.pedigree.member(it.person)
        if m.placeholder or m.vital_status == "deceased":
            left.append(it.person)
            continue
        kept.append(it)
    notes = []
    if left:
        who = ", ".join(dict.fromkeys(left))
        notes.append(f"no tasks for placeholders or deceased members ({who}): the family-level task covers the record")
    return kept, notes


def with_shown_statuses(items: Iterable, state: FamilyState, old_class: str | None, new_class: str | None) -> list:
    """Reclassification items with ``status_before``/``status_after`` as the recall shows them before and
    after the change (:func:`shown_genotype`: a married-in member of a family whose variant no longer
    predicts disease is not at risk, a blood relative is uncertain or at risk, untested)."""
    return [
        replace(it, status_before=shown_genotype(it.status_before, old_class, it.person, state.blood),
                status_after=shown_genotype(it.status_after, new_class, it.person, state.blood))
        if it.person else it
        for it in items
    ]  # fmt: skip


def unscheduled_at_risk(state: FamilyState, people: pd.DataFrame) -> list[tuple[str, str]]:
    """At-risk living relatives whom the scheduler could not give a recall, with the reason.

    At risk: any genotype status but ``non_carrier`` / ``not_at_risk``.  Placeholders,
    deceased people and people who declined contact are never recalled on purpose
    and are not listed.  Used by ``tracker check``.  ``people`` may be already indexed by
    person code (``people.set_index("person")``, built once for a cohort of families).
    """
    rows = people.set_index("person") if "person" in people.columns else people
    out = []
    for p, why in sorted(state.not_scheduled.items()):
        if p not in rows.index or _flag(rows.at[p, "placeholder"]):
            continue
        if _text(rows.at[p, "vital_status"]) == "deceased" or _text(rows.at[p, "contact_status"]) == "declined":
            continue
        status = state.genotypes[p].status if p in state.genotypes else "at_risk_untested"
        if status in ("non_carrier", "not_at_risk"):
            continue
        out.append((p, why))
    return out
