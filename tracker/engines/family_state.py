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
  ``early_onset``              an affected member was younger than 18 y (decimal age, from the
                               recorded date of birth) at their first assessment recorded as
                               affected;
  ``sudden_death``             a deceased member whose notes contain "sudden" (any case);
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
  projected_crossing_age, reasons``) when one is given.

Decision support only: the treating clinician decides, following local
protocols and the current guideline.
"""

from __future__ import annotations

import datetime as dt
import re
from collections.abc import Iterable, Mapping
from dataclasses import dataclass, field, replace

import pandas as pd

from tracker.domain.dates import PartialDate, age_at, parse_partial_date
from tracker.domain.genetics import ACMG_CLASSES, ACTIONABLE_CLASSES, FamilyGenotypes, genotype_statuses
from tracker.domain.pedigree import Pedigree
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
    """Family code -> its variants with class history (oldest first), from ``load_variants``."""
    out: dict[str, list[VariantInfo]] = {}
    if variants is None or variants.empty:
        return {}
    frame = variants.assign(on_date=[_date(v) for v in variants["classified_on"]]).sort_values(
        ["family", "transcript", "hgvs_c", "on_date"], kind="stable"
    )
    for (fam, tx, c), rows in frame.groupby(["family", "transcript", "hgvs_c"], sort=True):
        first = rows.iloc[0]
        history = tuple(
            Classification(r.on_date, r.acmg_class, None if _blank(r.reason) else str(r.reason))
            for r in rows.itertuples()
        )
        out.setdefault(fam, []).append(
            VariantInfo(
                family=fam, key=f"{tx}:{c}", gene=first["gene"], transcript=tx, hgvs_c=c,
                hgvs_p=None if _blank(first["hgvs_p"]) else first["hgvs_p"], zygosity=first["zygosity"],
                history=history,
            )
        )  # fmt: skip
    return {k: tuple(v) for k, v in out.items()}


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
    """Latest affected status, flags, new symptoms, last visit and last contact for each person."""
    codes = list(people)
    wanted = set(codes)
    by_person: dict[str, list[dict]] = {}
    if assessments is not None and len(assessments):
        a = assessments[assessments["person"].isin(wanted)]
        for r in a.to_dict("records"):
            r["_on"] = _date(r["assessment_date"])
            by_person.setdefault(r["person"], []).append(r)
    visits: dict[str, dt.date] = {}
    contacts: dict[str, dt.date] = {}
    studied: set[str] = set()
    if studies is not None and len(studies):
        s = studies[studies["person"].isin(wanted)]
        for p, d, m in zip(s["person"], s["study_date"], s["modality"]):
            studied.add(p)
            d = _date(d)
            contacts[p] = _max_date(contacts.get(p), d)
            if m in VISIT_MODALITIES:
                visits[p] = _max_date(visits.get(p), d)
    tested: set[str] = set()
    if results is not None and len(results):
        g = results[results["person"].isin(wanted)]
        for p, d in zip(g["person"], g["test_date"]):
            tested.add(p)
            contacts[p] = _max_date(contacts.get(p), _date(d))
    out: dict[str, PersonFacts] = {}
    for p in codes:
        rows = sorted(by_person.get(p, []), key=lambda r: r["_on"])
        latest = rows[-1] if rows else None
        prev = rows[-2] if len(rows) > 1 else None
        first_aff = next((r["_on"] for r in rows if r["affected_status"] == "affected"), None)
        if latest is not None:
            new = symptom_phrases(latest.get("symptoms")) - (symptom_phrases(prev.get("symptoms")) if prev else frozenset())
            athlete = _flag(latest.get("competitive_athlete"))
            started = athlete and prev is not None and not _flag(prev.get("competitive_athlete"))
            contact = _max_date(contacts.get(p), latest["_on"])
        else:
            new, athlete, started, contact = frozenset(), False, False, contacts.get(p)
        out[p] = PersonFacts(
            person=p,
            affected_status=latest["affected_status"] if latest else None,
            assessed_on=latest["_on"] if latest else None,
            first_affected_on=first_aff,
            athlete=athlete,
            pregnant=_flag(latest.get("pregnant")) if latest else False,
            new_symptoms=tuple(sorted(new)),
            started_sport=started,
            last_visit=visits.get(p),
            last_contact=contact,
            tested=p in tested,
            studied=p in studied,
        )
    return out


# --------------------------------------------------------------------------- family features


def family_features(
    people: pd.DataFrame,
    facts: Mapping[str, PersonFacts],
    variant: VariantInfo | None,
    results: pd.DataFrame,
) -> tuple[frozenset[str], dict[str, str]]:
    """The derived family features and, for each, why (see the module docstring)."""
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
    births = {r["person"]: _partial(r["birth_date"]) for r in people.to_dict("records")}
    early = []
    for p in affected:
        b, on = births.get(p), facts[p].first_affected_on
        if b is not None and on is not None:
            age = age_at(b, on).years
            if age < EARLY_ONSET_AGE_YEARS:
                early.append(f"{p} (affected at {age:.1f} y)")
    if early:
        reasons["early_onset"] = f"affected before {EARLY_ONSET_AGE_YEARS} y: " + ", ".join(early)
    sudden = [
        r["person"]
        for r in people.to_dict("records")
        if _text(r.get("vital_status")) == "deceased" and not _blank(r.get("notes")) and "sudden" in str(r["notes"]).lower()
    ]
    if sudden:
        reasons["sudden_death"] = "deceased member with a sudden death recorded in the notes: " + ", ".join(sudden)
    if variant is None and results is not None and len(results):
        nvf = results[(results["test_type"] == "diagnostic_panel") & (results["result"] == "no_variant_found")]
        if len(nvf):
            reasons["genotype_negative_family"] = (
                "no variant recorded; diagnostic panel found no variant in " + ", ".join(sorted(set(nvf["person"])))
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


def genotype_for_schedule(
    status: str, variant_class: str | None, at_risk_by_blood: bool
) -> str:
    """The scheduler's genotype code (see the module docstring)."""
    if variant_class in ACTIONABLE_CLASSES:
        return status
    if not at_risk_by_blood:
        return "not_at_risk"
    return "uncertain" if variant_class == "uncertain_significance" else "at_risk_untested"


def _clean_links(people: pd.DataFrame) -> tuple[pd.DataFrame, list[str]]:
    """Drop parent/twin links to people outside the frame (another family), with a note."""
    codes = set(people["person"])
    notes = []
    frame = people.copy()
    for col in ("mother", "father", "twin_of"):
        if col not in frame.columns:
            continue
        outside = frame[col].notna() & ~frame[col].isin(codes)
        for p, q in zip(frame.loc[outside, "person"], frame.loc[outside, col]):
            notes.append(f"{p}: {col} {q} is recorded in another family: link not used here")
        frame.loc[outside, col] = None
    return frame, notes


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
    members, notes = _clean_links(members.reset_index(drop=True))
    ped = Pedigree(members)
    codes = list(members["person"])
    fam_results = results[results["person"].isin(codes)] if results is not None and len(results) else pd.DataFrame(
        columns=["person", "test_date", "test_type", "variant", "result"]
    )
    vs = family_variants(variants[variants["family"] == family]).get(family, ()) if len(variants) else ()
    variant = primary_variant(vs)
    if len(vs) > 1:
        notes.append(
            f"{len(vs)} variants recorded; the family is managed on {variant.gene} {variant.key} "
            f"(the most actionable current class): review the others with the genetics team"
        )
    vclass = variant.current_class if variant else None
    genotypes = genotype_statuses(ped, fam_results, vclass, variant.key if variant else None)
    facts = person_facts(codes, assessments, studies, fam_results)
    features, feature_reasons = family_features(members, facts, variant, fam_results)

    # eligible since: when the family became known to the clinic
    first_dates = [f.first_affected_on for f in facts.values()]
    first_dates += [v.history[0].classified_on for v in vs]
    first_dates += [_date(d) for d in fam_results["test_date"]] if len(fam_results) else []
    present = [d for d in first_dates if d is not None]
    eligible_since = min(present) if present else None

    anchors = [p for p, f in facts.items() if f.affected_status == "affected"]
    if not anchors:
        anchors = [p for p, flag in zip(members["person"], members["proband"]) if _flag(flag)]
    blood = _blood_at_risk(ped, anchors)
    pending = set(reclassification_pending)
    changed_on = variant.class_changed_on if variant else None

    states: dict[str, PersonState] = {}
    not_scheduled: dict[str, str] = {}
    for r in members.to_dict("records"):
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
    state = FamilyState(
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
    )
    return apply_trends(state, trends)


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
    """:func:`build_family_state` for every family in ``people`` (family code order).

    Each frame is split by family once, so the work grows with the cohort, not with its square.
    """
    pending = tuple(reclassification_pending)
    if as_of is not None:
        variants = records_up_to(variants, "classified_on", as_of)
        results = records_up_to(results, "test_date", as_of)
        assessments = records_up_to(assessments, "assessment_date", as_of)
        studies = records_up_to(studies, "study_date", as_of)
    family_of = dict(zip(people["person"], people["family"]))
    members = by_family(people, family_of)
    parts = {name: by_family(frame, family_of) for name, frame in
             (("variants", variants), ("results", results), ("assessments", assessments), ("studies", studies),
              ("trends", trends))}  # fmt: skip
    frames = {"variants": variants, "results": results, "assessments": assessments, "studies": studies,
              "trends": trends}  # fmt: skip

    def part(name: str, fam: str):
        frame = frames[name]
        if frame is None:
            return None
        return parts[name].get(fam, frame.iloc[:0])

    return {
        fam: build_family_state(
            fam, members[fam], part("variants", fam), part("results", fam), part("assessments", fam),
            part("studies", fam), trends=part("trends", fam), reclassification_pending=pending,
        )  # fmt: skip
        for fam in sorted(members)
    }


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
    keep = [d is not None and d <= on for d in (_date(v) for v in frame[column])]
    return frame[keep]


def apply_trends(state: FamilyState, trends: pd.DataFrame | None) -> FamilyState:
    """``state`` with each PersonState's ``progression`` and ``projected_crossing_age_years``
    (and each person's ``trend_reasons``) taken from a trend frame
    (``person, progressing, projected_crossing_age, reasons``); people absent from it keep none."""
    if trends is None or trends.empty:
        return state
    rows = {r["person"]: r for r in trends.to_dict("records")}
    states = {}
    for p, s in state.states.items():
        t = rows.get(p)
        if t is None:
            states[p] = s
            continue
        crossing = None if _blank(t.get("projected_crossing_age")) else float(t["projected_crossing_age"])
        progressing = False if _blank(t.get("progressing")) else bool(t["progressing"])
        states[p] = replace(s, progression=progressing, projected_crossing_age_years=crossing)
    facts = {
        p: replace(f, trend_reasons="" if p not in rows or _blank(rows[p].get("reasons")) else str(rows[p]["reasons"]))
        for p, f in state.facts.items()
    }
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


def unscheduled_at_risk(state: FamilyState, people: pd.DataFrame) -> list[tuple[str, str]]:
    """At-risk living relatives whom the scheduler could not give a recall, with the reason.

    At risk: any genotype status but ``non_carrier`` / ``not_at_risk``.  Placeholders,
    deceased people and people who declined contact are never recalled on purpose
    and are not listed.  Used by ``tracker check``.
    """
    rows = people.set_index("person")
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
