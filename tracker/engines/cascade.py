"""Cascade plan: who to offer predictive testing and clinical screening, and the gaps.

Pure engine.  Input: a :class:`~tracker.domain.pedigree.Pedigree` (vital and
contact status, birth dates), the genotype statuses from
:func:`tracker.domain.genetics.genotype_statuses`, the family variant's
current ACMG/AMP class, the date of the plan, a guideline rule set, each
person's latest affected status ('affected'/'unaffected'/'uncertain'/None),
and the people with any study or genetic test on record.

Each guideline is its own rule set (never blended):

``aha_acc_2020``      2020 AHA/ACC HCM guideline (Ommen et al., Circulation
                      2020): all first-degree relatives are offered clinical
                      screening (ECG + echo) and cascade testing when the
                      proband has a P/LP variant (section 6.8 rec 6, 1 B-NR);
                      screening can start at any age, with expert counselling
                      and shared decisions [M, from memory, verify].
``aha_acc_2024``      2024 AHA/ACC/AMSSM/HRS/PACES/SCMR HCM guideline (Ommen et
                      al., J Am Coll Cardiol 2024): the same offer to
                      first-degree relatives (section 6.8 rec 6, 1 B-NR);
                      screening can begin at any age (key point 3) [V];
                      genotype-negative relatives leave clinical screening
                      unless the variant is downgraded (rec 13) [V2].
``esc_2023``          2023 ESC cardiomyopathy guidelines: first-degree relatives
                      screened with ECG and imaging, cascade testing where a
                      disease-causing variant is known; no minimum age for
                      predictive testing (adults I B, children IIa B, in the
                      child's best interests); a deceased first-degree
                      relative brings the proband's second-degree relatives in
                      (RT14, IIa C) [V].
``hrs_2022_testing``  2022 EHRA/HRS/APHRS/LAHRS expert consensus on genetic
                      testing: predictive testing of children recommended
                      from 10-12 y; below that it may be considered,
                      especially with early-onset disease in the family [V].
                      The consensus is about testing; its clinical-screening
                      list here (first-degree relatives of affected members
                      and at-risk relatives) is common practice.

Age rules (common practice, documented): a child counts as N years old from
the Nth birthday (a 29 February birthday falls on 1 March in common years).
A birth date known only as a year is counted from 31 December of that year
-- the youngest the person can be -- so nobody is offered testing before the
minimum age; the row says so.  ``hrs_2022_testing``: eligible from the 10th
birthday, the 10-12 y band flagged ("timing within the band by counselling"),
'recommended' from the 12th; younger children only with early-onset disease
in the family (a clinician's judgement passed in as ``early_onset_family``),
otherwise they are listed as deferred with the date they become eligible.
``esc_2023`` distinguishes adults (18 y and over; common practice) from
children only in the strength of the recommendation.  An unknown birth date
never blocks a listing; the row asks for the age to be confirmed.

Who is listed: living (or vital status unknown, flagged), not a placeholder,
and contactable or not yet contacted.  People who declined or are lost to
follow-up appear among the gaps (listed for the record, not recalled); the
decline is dated and the clinic's policy says whether to re-approach (default:
not re-approached; with ``declined_reapproach_months`` a relative whose
decline is that old is listed again for testing, with the decline named).
Deceased people are never listed.  People not at risk by pedigree (married or
adopted in, the other side of the family, below a non-carrier) are neither
screened nor gaps once the family variant explains the disease; without a
P/LP variant every first-degree relative of an affected member is screened.

Stepwise cascade (common practice; ESC 2023: testing widens stepwise from
first-degree relatives [V]): first-degree relatives of a carrier are offered
testing directly; an unaffected at-risk relative further out waits for the
at-risk, untested relative one step nearer the carrier (the parent of a
grandchild, the carrier's sibling for a niece) and is listed as deferred with
that name, unless that relative died, declined or is lost to follow-up; see
:func:`tracker.domain.genetics.stepwise_route`.

Releases say what they relied on: the P/LP class in force at max(result date,
date the class last became P/LP), from the class history
(:func:`tracker.domain.genetics.release_basis`).  A VUS, or any class older
than the clinic's re-review interval, gives a re-review reminder.

Decision support only: the treating clinician decides, following local
protocols and the current guideline.
"""

from __future__ import annotations

from typing import TYPE_CHECKING

import datetime as dt
from collections.abc import Iterable, Mapping
from dataclasses import asdict, dataclass
from fractions import Fraction

from tracker.domain.dates import PartialDate, age_at, birthday_at_age, completed_years
from tracker.domain.genetics import (
    ACTIONABLE_CLASSES,
    DEFAULT_REREVIEW_MONTHS,
    SRC_STEPWISE,
    GenotypeStatus,
    RereviewReminder,
    declined_reapproach,
    history_pairs,
    probability_text,
    release_basis,
    rereview_reminder,
    result_date_for_release,
    stepwise_route,
)
from tracker.domain.pedigree import Pedigree

CAUTION = (
    "Decision support only: this list proposes who to offer testing and screening; it is not a "
    "diagnosis or an instruction. The treating clinician decides with the family, following local "
    "protocols and the current guideline. Advise earlier review for new symptoms or new family events."
)

if TYPE_CHECKING:  # for annotations only: loaded where used, so start-up stays light
    import pandas as pd

# Screening beyond first-degree relatives in a family without a P/LP variant (plan_cascade).
SRC_BLOOD_RELATIVES = (
    "beyond the first degree: common practice, no guideline number (the recall schedule screens every blood "
    "relative of an affected member while the family's cause is unknown); the treating clinician decides "
    "whether to offer it"
)
_ORDINAL = {2: "second", 3: "third", 4: "fourth", 5: "fifth"}


def _degree(pedigree: Pedigree, a: str, q: str) -> int | None:
    """Degree of relationship of ``q`` to ``a`` (None: not related by blood)."""
    if pedigree.kinship(a, q) <= 0:
        return None
    return pedigree.relationship(a, q).degree


ADULT_AGE_YEARS = 18  # adult / child boundary for ESC 2023 strength wording: common practice


@dataclass(frozen=True)
class RuleSet:
    """One guideline's cascade rules.  Ages in completed years."""

    guideline: str
    title: str
    min_age_years: int | None  # predictive testing of unaffected children: lowest age offered
    full_age_years: int | None  # from this age the recommendation is unqualified
    early_onset_exception: bool  # younger children may be considered with early-onset family disease
    testing_source: str
    screening_source: str
    release_source: str
    second_degree_via_deceased: bool = False
    second_degree_source: str = ""
    segregation_source: str | None = None  # VUS families: segregation testing of affected relatives


RULE_SETS: dict[str, RuleSet] = {
    "aha_acc_2020": RuleSet(
        guideline="aha_acc_2020",
        title="2020 AHA/ACC HCM guideline",
        min_age_years=None,
        full_age_years=None,
        early_onset_exception=False,
        testing_source=(
            "AHA/ACC 2020 §6.8 rec 6: cascade genetic testing of first-degree relatives when the "
            "proband has a P/LP variant (1 B-NR); testing or screening can start at any age, with "
            "expert counselling and shared decisions [V2: the later revision restates it unchanged]"
        ),
        screening_source=(
            "AHA/ACC 2020 §6.8 rec 6: clinical screening (ECG + echo) of all first-degree relatives "
            "(1 B-NR) [V2]; more distant at-risk relatives by judgement [M, from memory, verify]"
        ),
        release_source=(
            "AHA/ACC 2020 §6.8 rec 13: no ongoing clinical screening of genotype-negative relatives "
            "(3: No Benefit) [M, from memory, verify]"
        ),
    ),
    "aha_acc_2024": RuleSet(
        guideline="aha_acc_2024",
        title="2024 AHA/ACC/AMSSM/HRS/PACES/SCMR HCM guideline",
        min_age_years=None,
        full_age_years=None,
        early_onset_exception=False,
        testing_source=(
            "AHA/ACC 2024 §6.8 rec 6: cascade genetic testing of first-degree relatives when the "
            "proband has a P/LP variant (1 B-NR); screening, genetic or clinical, can begin at any "
            "age (key point 3), with expert counselling and shared decisions (rec 4, 1 B-NR) [V]"
        ),
        screening_source=(
            "AHA/ACC 2024 §6.8 rec 6: clinical screening (ECG + 2D echo) of all first-degree "
            "relatives (1 B-NR) [V]; more distant at-risk relatives by judgement [M, from memory, verify]"
        ),
        release_source=(
            "AHA/ACC 2024 §6.8 rec 13: no ongoing clinical screening of genotype-negative relatives "
            "(3: No Benefit) [V2], unless the variant is downgraded [V2]; reconfirm the variant's "
            "pathogenicity every 2-3 y (key point 3) [V]"
        ),
    ),
    "esc_2023": RuleSet(
        guideline="esc_2023",
        title="2023 ESC Guidelines for the management of cardiomyopathies",
        min_age_years=None,
        full_age_years=None,
        early_onset_exception=False,
        testing_source=(
            "ESC 2023: cascade testing with pre- and post-test counselling, adults I B, children "
            "IIa B; no minimum age once the family diagnosis is confident; testing must serve the "
            "child's best interests [V]"
        ),
        screening_source=(
            "ESC 2023 §6.11: ECG and cardiac imaging for all first-degree relatives; carriers of the "
            "family variant followed with regular ECG and imaging [V]"
        ),
        release_source=(
            "ESC 2023: genotype-negative relatives discharged, with advice to return for symptoms or "
            "new family data (I C) [V]"
        ),
        second_degree_via_deceased=True,
        second_degree_source="ESC 2023 RT14: first-degree relative deceased: evaluate second-degree relatives (IIa C) [V]",
        segregation_source=(
            "ESC 2023: segregation testing of affected relatives should be considered for a VUS "
            "(IIa C) [V]"
        ),
    ),
    "hrs_2022_testing": RuleSet(
        guideline="hrs_2022_testing",
        title="2022 EHRA/HRS/APHRS/LAHRS expert consensus on genetic testing for cardiac diseases",
        min_age_years=10,
        full_age_years=12,
        early_onset_exception=True,
        testing_source=(
            "HRS 2022 consensus: predictive testing of related children recommended from 10-12 y; "
            "earlier may be considered, especially with early-onset disease in the family [V]"
        ),
        screening_source=(
            "clinical screening of first-degree relatives of affected members and of at-risk "
            "relatives: common practice (the consensus addresses testing)"
        ),
        release_source=(
            "HRS 2022: no ongoing clinical screening for genotype-negative relatives in most "
            "genotype-positive families [V]"
        ),
        segregation_source="HRS 2022: segregation testing of affected relatives may be considered for a VUS [V]",
    ),
}


@dataclass(frozen=True)
class AgeOnDate:
    """Age used by the rules.  ``years`` are completed years counted from
    the latest possible birth date (31 December for a year-only date);
    ``decimal_years`` is the usual decimal age (from 1 July for year-only)."""

    years: int | None
    decimal_years: float | None
    basis: str  # 'day', 'year_only', 'unknown'
    note: str = ""


def date_reaching_age(birth: PartialDate | None, age_years: int) -> dt.date | None:
    """First date on which the person has surely reached ``age_years``
    (the birthday; 31 December of birth year + age for a year-only date)."""
    if birth is None:
        return None
    if birth.precision == "day":
        return birthday_at_age(birth.value, age_years)
    return dt.date(birth.year + age_years, 12, 31)


def _birth(ped: Pedigree, person: str) -> PartialDate | None:
    m = ped.member(person)
    if m.birth_date is None:
        return None
    return PartialDate(m.birth_date, m.birth_date_precision or "day")


def age_for_rules(ped: Pedigree, person: str, on: dt.date) -> AgeOnDate:
    """The age a rule set uses, conservative for year-only birth dates."""
    birth = _birth(ped, person)
    if birth is None:
        return AgeOnDate(None, None, "unknown", "date of birth not recorded: confirm the age")
    decimal = age_at(birth, on).years
    if birth.precision == "day":
        return AgeOnDate(completed_years(birth.value, on), decimal, "day")
    latest = birth.latest()  # 31 December: the youngest the person can be
    years = max(0, completed_years(latest, on))
    return AgeOnDate(
        years, decimal, "year_only",
        f"birth year only ({birth.year}): age counted from 31 December {birth.year} (youngest possible)",
    )


@dataclass(frozen=True)
class TestingCandidate:
    """A relative for predictive (or, if affected, diagnostic) testing of the family variant."""

    person: str
    family: str | None
    probability: Fraction | None
    probability_text: str
    age_years: int | None
    age_note: str
    recommendation: str
    eligible: bool
    eligible_from: dt.date | None
    reason: str
    source: str
    guideline: str
    notes: tuple[str, ...] = ()
    wait_for: str | None = None  # stepwise cascade: the relative to offer testing first


@dataclass(frozen=True)
class ScreeningCandidate:
    """A relative to offer clinical screening (ECG and imaging), or one released from it."""

    person: str
    family: str | None
    categories: tuple[str, ...]
    reason: str
    source: str
    guideline: str
    notes: tuple[str, ...] = ()
    released_on: dt.date | None = None  # released list: the day the release took effect
    relied_on: str = ""  # released list: the P/LP class (and its date) the release relied on


@dataclass(frozen=True)
class Gap:
    """A break in the cascade: ``gap`` is 'never_contacted', 'contacted_not_seen',
    'lost_to_follow_up' or 'declined'."""

    family: str | None
    person: str
    gap: str
    reason: str


@dataclass(frozen=True)
class CascadePlan:
    guideline: str
    variant_class: str | None
    on: dt.date
    testing: tuple[TestingCandidate, ...]
    deferred: tuple[TestingCandidate, ...]
    segregation: tuple[TestingCandidate, ...]
    screening: tuple[ScreeningCandidate, ...]
    released: tuple[ScreeningCandidate, ...]
    gaps: tuple[Gap, ...]
    notes: tuple[str, ...] = ()
    caution: str = CAUTION
    rereview: RereviewReminder | None = None

    def frames(self) -> dict[str, pd.DataFrame]:
        """One frame per list: testing, deferred, segregation, screening,
        released, gaps (columns = the dataclass fields; probability as float)."""
        import pandas as pd


        def frame(items, cls) -> pd.DataFrame:
            cols = list(cls.__dataclass_fields__)
            rows = []
            for it in items:
                d = asdict(it)
                if "probability" in d and d["probability"] is not None:
                    d["probability"] = float(d["probability"])
                rows.append(d)
            return pd.DataFrame(rows, columns=cols)

        return {
            "testing": frame(self.testing, TestingCandidate),
            "deferred": frame(self.deferred, TestingCandidate),
            "segregation": frame(self.segregation, TestingCandidate),
            "screening": frame(self.screening, ScreeningCandidate),
            "released": frame(self.released, ScreeningCandidate),
            "gaps": frame(self.gaps, Gap),
        }

    def people(self, list_name: str) -> tuple[str, ...]:
        return tuple(it.person for it in getattr(self, list_name))


def _listable(ped: Pedigree, person: str) -> bool:
    m = ped.member(person)
    return (not m.placeholder) and m.vital_status != "deceased"


def _reachable(ped: Pedigree, person: str) -> bool:
    return ped.member(person).contact_status in ("contactable", "not_contacted")


def _vital_notes(ped: Pedigree, person: str) -> tuple[str, ...]:
    if ped.member(person).vital_status == "unknown":
        return ("vital status unknown: confirm before contact",)
    return ()


def _testing_recommendation(rules: RuleSet, age: AgeOnDate, birth: PartialDate | None, early_onset: bool):
    """(eligible, recommendation words, eligible_from)."""
    if rules.guideline in ("aha_acc_2020", "aha_acc_2024"):
        return True, "recommended, any age (1 B-NR)", None
    if rules.guideline == "esc_2023":
        if age.years is None:
            return True, "recommended for adults (I B), should be considered for children (IIa B): confirm the age", None
        if age.years >= ADULT_AGE_YEARS:
            return True, "recommended (adult, I B)", None
        return True, "should be considered (child, IIa B): in the child's best interests", None
    # hrs_2022_testing
    assert rules.min_age_years is not None and rules.full_age_years is not None
    if age.years is None:
        return True, "recommended from 10-12 y: confirm the age before offering", None
    if age.years >= rules.full_age_years:
        return True, "recommended (12 y or older)", None
    if age.years >= rules.min_age_years:
        return True, "recommended (10-12 y band: timing within the band by counselling)", None
    if early_onset and rules.early_onset_exception:
        return True, "may be considered (under 10 y, early-onset disease in the family)", None
    return False, "deferred: under 10 y", date_reaching_age(birth, rules.min_age_years)


def plan_cascade(
    pedigree: Pedigree,
    statuses: Mapping[str, GenotypeStatus],
    variant_class: str | None,
    on: dt.date,
    guideline: str,
    affected: Mapping[str, str | None] | None = None,
    seen: Iterable[str] = (),
    early_onset_family: bool = False,
    *,
    class_history=None,
    contact_dates: Mapping[str, dt.date | None] | None = None,
    declined_reapproach_months: int | None = None,
    rereview_months: int = DEFAULT_REREVIEW_MONTHS,
) -> CascadePlan:
    """The cascade plan for one pedigree on date ``on`` under ``guideline``.

    ``affected``: person -> latest affected status.  ``seen``: people with any
    study or genetic test on record (for the "contacted but never seen" gap).
    ``early_onset_family``: clinician's judgement that the family has
    early-onset disease (opens testing of younger children under
    ``hrs_2022_testing``).  ``class_history``: the variant's classifications,
    oldest first (``(date, class)`` pairs or objects with ``classified_on`` and
    ``acmg_class``; default: the current class, undated).  ``contact_dates``:
    person -> date of the recorded contact status (the date of a decline).
    ``declined_reapproach_months``: the clinic's policy (None: relatives who
    declined are not re-approached).  ``rereview_months``: the clinic's
    variant re-review interval.
    """
    if guideline not in RULE_SETS:
        raise ValueError(f"unknown guideline rule set {guideline!r}; one of {', '.join(RULE_SETS)}")
    rules = RULE_SETS[guideline]
    affected = dict(affected or {})
    seen = set(seen)
    actionable = variant_class in ACTIONABLE_CLASSES
    people = pedigree.people

    def is_affected(p: str) -> bool:
        return affected.get(p) == "affected"

    def fam(p: str) -> str | None:
        return pedigree.member(p).family

    contact_dates = dict(contact_dates or {})
    history = history_pairs(class_history) if class_history is not None else (
        [(None, variant_class)] if variant_class else [])

    def declined_state(p: str) -> tuple[bool, str]:
        """(re-approach now, words) for a relative who declined."""
        return declined_reapproach(contact_dates.get(p), on, declined_reapproach_months)

    mode = getattr(statuses, "mode", None)

    def not_at_risk(q: str) -> bool:
        """Not at risk from the family variant by pedigree (a sibling of a carrier in whom the
        variant arose anew keeps a small risk from parental germline mosaicism: still at risk)."""
        st = statuses[q]
        if st.status != "not_at_risk":
            return False
        if mode == "de_novo":
            carriers = [c for c in people if statuses[c].status == "carrier"]
            if any(q in pedigree.full_siblings(c) + pedigree.half_siblings(c) for c in carriers):
                return False
        return True

    testing: list[TestingCandidate] = []
    deferred: list[TestingCandidate] = []
    segregation: list[TestingCandidate] = []
    indicated: dict[str, list[tuple[str, str, str]]] = {}  # person -> (category, reason, source)
    released: list[ScreeningCandidate] = []
    notes: list[str] = []

    def indicate(p: str, category: str, reason: str, source: str) -> None:
        indicated.setdefault(p, [])
        if all(c != category for c, _, _ in indicated[p]):
            indicated[p].append((category, reason, source))

    # ---- predictive testing (P/LP families only) ----
    testing_indicated: set[str] = set()
    if actionable:
        for p in people:
            st = statuses[p]
            if not _listable(pedigree, p):
                continue
            obligate = st.status == "carrier" and st.basis == "obligate"
            if st.status != "at_risk_untested" and not obligate:
                continue
            testing_indicated.add(p)
            age = age_for_rules(pedigree, p, on)
            birth = _birth(pedigree, p)
            cand_notes = list(_vital_notes(pedigree, p))
            if age.note:
                cand_notes.append(age.note)
            source = rules.testing_source
            if is_affected(p):
                eligible, words, start = True, "diagnostic: affected, test for the family variant", None
            else:
                eligible, words, start = _testing_recommendation(rules, age, birth, early_onset_family)
            if obligate:
                words = f"confirmatory, optional (common practice): {words}"
            wait_for = None
            if not obligate and not is_affected(p):
                route = stepwise_route(pedigree, statuses, p)
                wait_for = route.first
                if route.deferred:
                    words = f"deferred: offer {route.first} first (stepwise cascade)" + (
                        f"; then {words}" if eligible else f"; {words}")
                    eligible, source = False, f"{rules.testing_source}; {SRC_STEPWISE}"
                    cand_notes.append(route.reason())
                elif route.passed:
                    cand_notes.append(route.reason())
            reapproach = False
            if pedigree.member(p).contact_status == "declined":
                reapproach, said = declined_state(p)
                cand_notes.append(said)
            cand = TestingCandidate(
                person=p,
                family=fam(p),
                probability=st.probability,
                probability_text=probability_text(st.probability),
                age_years=age.years,
                age_note=age.note,
                recommendation=words,
                eligible=eligible,
                eligible_from=start,
                reason=st.reason,
                source=source,
                guideline=guideline,
                notes=tuple(cand_notes),
                wait_for=wait_for,
            )
            if not (_reachable(pedigree, p) or reapproach):
                continue
            (testing if eligible else deferred).append(cand)

    # ---- segregation testing of affected relatives (VUS families) ----
    if variant_class == "uncertain_significance" and rules.segregation_source:
        for p in people:
            st = statuses[p]
            if is_affected(p) and st.tested_result is None and _listable(pedigree, p) and _reachable(pedigree, p):
                segregation.append(
                    TestingCandidate(
                        p, fam(p), None, "", age_for_rules(pedigree, p, on).years, "",
                        "segregation testing of an affected relative for the VUS", True, None,
                        st.reason, rules.segregation_source, guideline, _vital_notes(pedigree, p),
                    )
                )

    # ---- clinical screening ----
    affected_people = [p for p in people if is_affected(p)]
    for a in affected_people:
        sa = statuses[a]
        explained = sa.status in ("carrier", "at_risk_untested")
        for q in pedigree.first_degree_relatives(a):
            if is_affected(q) or not _listable(pedigree, q):
                continue
            sq = statuses[q]
            if actionable and sq.status == "non_carrier" and explained:
                continue  # genotype-negative: released below
            if actionable and explained and not_at_risk(q):
                continue  # married in, other side, below a non-carrier: not at risk, not screened
            if actionable and sa.status == "non_carrier":
                why = (f"first-degree relative of affected {a}, whose disease is not explained by the family "
                       f"variant ({a} tested non-carrier): clinical screening")
            elif actionable and sq.status == "not_at_risk":
                why = (f"first-degree relative of affected {a} ({sq.reason}; untested: screening per the "
                       "first-degree rule)")
            elif actionable:
                why = f"first-degree relative of affected {a}"
            else:
                why = f"first-degree relative of affected {a}: clinical screening only ({sq.reason})"
            indicate(q, "first_degree_of_affected", why, rules.screening_source)
        if rules.second_degree_via_deceased:
            for d in pedigree.first_degree_relatives(a):
                if pedigree.member(d).vital_status != "deceased":
                    continue
                for q in pedigree.first_degree_relatives(d):
                    if q == a or is_affected(q) or not _listable(pedigree, q):
                        continue
                    if pedigree.relationship(a, q).degree != 2:
                        continue
                    if actionable and (statuses[q].status == "non_carrier" or (explained and not_at_risk(q))):
                        continue
                    indicate(q, "second_degree_via_deceased",
                             f"second-degree relative of affected {a} through deceased {d}",
                             rules.second_degree_source)
    if not actionable and affected_people:
        # Without a P/LP variant the genotype predicts nothing, so the recall schedule screens
        # every blood relative of an affected member (family_state.at_risk_by_blood); the plan
        # lists the same people, saying where that goes beyond the guideline's first degree.
        for q in people:
            if q in indicated or is_affected(q) or not _listable(pedigree, q):
                continue
            # the nearest affected member q is related to by blood (an affected partner who married in
            # is no blood relative of the other side of the family)
            related = [(d, a) for a in affected_people if (d := _degree(pedigree, a, q)) is not None]
            if not related:
                continue
            degree, nearest = min(related)
            indicate(q, "blood_relative_of_affected",
                     f"{_ORDINAL.get(degree, 'more distant')}-degree relative of affected "
                     f"{nearest} in a family "
                     "without a P/LP variant: a normal screen of a relative in between does not exclude the "
                     "family's cause (age-related penetrance); screened while the cause is unknown",
                     f"{rules.screening_source}; {SRC_BLOOD_RELATIVES}")
    if actionable:
        for p in people:
            st = statuses[p]
            if is_affected(p) or not _listable(pedigree, p):
                continue
            if st.status == "carrier":
                indicate(p, "carrier_surveillance",
                         f"{st.reason}: genotype-positive, clinical surveillance", rules.screening_source)
            elif st.status == "at_risk_untested":
                indicate(p, "at_risk",
                         f"{st.reason}: clinical screening until tested", rules.screening_source)
            elif st.status == "non_carrier":
                basis = release_basis(history, result_date_for_release(statuses, p))
                relied = basis.words() if basis else ""
                released.append(
                    ScreeningCandidate(
                        p, fam(p), ("genotype_negative",),
                        f"{st.reason}: genotype-negative for the family P/LP variant: discharge from "
                        "screening with advice to return for symptoms or new family data"
                        + (f" ({relied}; a downgrade of the class recalls)" if relied else ""),
                        rules.release_source, guideline, _vital_notes(pedigree, p),
                        basis.released_on if basis else None, relied,
                    )
                )
            elif st.status == "uncertain":
                notes.append(f"{p}: {st.reason}")
    elif variant_class in ("likely_benign", "benign"):
        notes.append(
            "variant classified likely benign/benign: no cascade testing (AHA 3: No Benefit; ESC 2023 III C) [V]"
        )
    elif variant_class == "uncertain_significance":
        notes.append(
            "VUS: no cascade testing (ESC 2023) [V]; testing phenotype-negative relatives to reclassify is of "
            "uncertain value (AHA 2b; HRS 2022) [V]"
        )

    screening: list[ScreeningCandidate] = []
    for p in people:
        if p not in indicated or not _reachable(pedigree, p):
            continue
        items = indicated[p]
        screening.append(
            ScreeningCandidate(
                p, fam(p), tuple(c for c, _, _ in items), "; ".join(r for _, r, _ in items),
                "; ".join(dict.fromkeys(s for _, _, s in items)), guideline, _vital_notes(pedigree, p),
            )
        )

    # ---- gaps: anyone indicated for testing or screening ----
    gaps: list[Gap] = []
    for p in people:
        if p not in indicated and p not in testing_indicated:
            continue
        contact = pedigree.member(p).contact_status
        if contact == "not_contacted":
            gaps.append(Gap(fam(p), p, "never_contacted", "indicated for testing or screening, never contacted"))
        elif contact == "contactable" and p not in seen:
            gaps.append(Gap(fam(p), p, "contacted_not_seen",
                            "contacted (contactable) but no study or genetic test on record"))
        elif contact == "lost_to_follow_up":
            gaps.append(Gap(fam(p), p, "lost_to_follow_up", "lost to follow-up: consider another route of contact"))
        elif contact == "declined":
            gaps.append(Gap(fam(p), p, "declined", f"{declined_state(p)[1]}: listed for the record, not recalled"))

    rereview = None
    if history and history[-1][0] is not None:
        when, cls = history[-1]
        rereview = rereview_reminder(cls, when, on, rereview_months, family=pedigree.member(people[0]).family)
        if rereview is not None:
            notes.append(f"re-review reminder: {rereview.text} ({rereview.source})")

    return CascadePlan(
        guideline=guideline,
        variant_class=variant_class,
        on=on,
        testing=tuple(testing),
        deferred=tuple(deferred),
        segregation=tuple(segregation),
        screening=tuple(screening),
        released=tuple(released),
        gaps=tuple(gaps),
        notes=tuple(notes),
        rereview=rereview,
    )
