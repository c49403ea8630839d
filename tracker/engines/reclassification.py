"""What a change in the family variant's ACMG/AMP class means for each relative.

Pure engine.  :func:`impact` compares the genotype statuses computed with the
old class and with the new class (both from
:func:`tracker.domain.genetics.genotype_statuses`) and lists what changes for
each person, with the action for the nurse.  :func:`impact_of_reclassification`
computes the two sets of statuses itself and calls :func:`impact`.

Rules (each item carries its source):

* Serial re-evaluation of the variant is recommended because reclassification
  changes diagnosis and cascade testing (AHA 2024, 1 B-NR) [V]; results of
  reclassification are passed on to families (ESC 2023) [V].
* Any reclassification is new clinically relevant family data: an unscheduled
  review for everyone under follow-up (ESC 2023) [V].
* P/LP downgraded to VUS/LB/B: variant-negative relatives who were discharged
  go back into clinical screening on the genotype-unknown schedule (AHA 2024
  exception [V2]); carriers lose genotype-positive status; re-counsel the
  family; predictive testing is no longer offered (VUS: no cascade testing,
  ESC 2023 [V]; LB/B: no benefit, AHA 3 / ESC III C [V]).
* VUS/LB/B (or none) upgraded to LP/P: cascade testing is offered to untested
  at-risk relatives; earlier results for this variant are re-interpreted:
  carriers move to genotype-positive surveillance, non-carriers may be
  discharged after counselling (ESC 2023 I C [V]).
* LP <-> P, or VUS <-> LB/B: genotype meaning unchanged; record and review.

``screening`` gives each person's screening state before the change:
'released' (discharged as genotype-negative), 'surveillance' (under clinical
follow-up) or 'none'; a mapping person -> state or a frame with columns
``person, screening_state``.  Missing people count as 'none'.

Counselling practice (when the caller gives the family context):

* ``history`` (the class history before the change, oldest first): a
  genotype-negative relative counts as released when the release can be
  derived from it: the P/LP class in force at max(result date, date the class
  last became P/LP) (:func:`tracker.domain.genetics.release_basis`); a
  downgrade recalls exactly those relatives and names what the release relied
  on.  Without a history, ``screening`` decides.
* ``affected``: affected members stay in affected follow-up: an upgrade does
  not move an affected carrier to genotype-positive surveillance, a downgrade
  does not move them to the genotype-unknown schedule, and an affected
  untested relative is offered diagnostic (not predictive) testing.
* ``pedigree`` given to :func:`impact`: the upgrade offers predictive testing
  stepwise (:func:`tracker.domain.genetics.stepwise_route`): a relative whose
  at-risk relative nearer the carrier can be asked first is deferred, with
  that reason.
* ``discharges`` (person -> the recorded discharge: ``discharge_date``, ``acmg_class`` relied on,
  ``classified_on``): a downgrade recalls each discharged variant-negative relative with an item
  naming the discharge and the class it relied on.
* ``contact_dates`` / ``declined_reapproach_months`` / ``on``: a relative who
  declined is named as such, and the clinic's policy decides whether to
  re-approach (default: not re-approached; common practice).

Decision support only: the treating clinician and genetics team decide,
following local protocols and the current guideline.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import asdict, dataclass

import pandas as pd

from tracker.domain.genetics import (
    ACMG_CLASSES,
    ACTIONABLE_CLASSES,
    SRC_STEPWISE,
    GenotypeStatus,
    declined_reapproach,
    genotype_statuses,
    probability_text,
    release_basis,
    result_date_for_release,
    stepwise_route,
)
from tracker.domain.pedigree import Pedigree

CAUTION = (
    "Decision support only: reclassification actions are proposals for the clinical team; the "
    "treating clinician decides, following local protocols and the current guideline. Confirm the "
    "new classification with the laboratory report before acting."
)

SCREENING_STATES = ("released", "surveillance", "none")

SRC_REVIEW = "ESC 2023: any reclassification is new family data: unscheduled review [V]"
SRC_RECOUNSEL = (
    "AHA 2024: re-evaluate variant significance at intervals, reclassification changes cascade "
    "testing (1 B-NR) [V]; ESC 2023: results of reclassification passed on to families [V]"
)
SRC_DOWNGRADE_RELEASED = (
    "AHA 2024: genotype-negative relatives leave screening unless the variant is downgraded to "
    "VUS/LB/B [V2]: discharged variant-negative relatives go back into clinical screening on the "
    "genotype-unknown schedule"
)
SRC_DOWNGRADE_CARRIER = (
    "AHA 2024 (1 B-NR) and ESC 2023: reclassification changes diagnosis and cascade testing [V]: "
    "after a downgrade carriers lose genotype-positive status; re-counsel"
)
SRC_NO_CASCADE_VUS = "ESC 2023: VUS: no cascade testing [V]"
SRC_NO_CASCADE_BENIGN = "AHA 2024: cascade testing of no benefit for LB/B (3); ESC 2023 III C [V]"
SRC_UPGRADE_TEST = "ESC 2023 (adults I B, children IIa B); AHA 2024 §6.8 (1 B-NR): cascade testing for a P/LP variant [V]"
SRC_UPGRADE_NEGATIVE = "ESC 2023: genotype-negative relatives discharged with advice to return (I C) [V]"
SRC_UPGRADE_CARRIER = "ESC 2023 §6.11: carriers followed with regular ECG and imaging [V]"
SRC_UPGRADE_NOT_AT_RISK = (
    "not at risk by pedigree once the variant is P/LP (married or adopted in, the other side, below a "
    "non-carrier): common practice, as for genotype-negative relatives (ESC 2023 I C [V])"
)


def _mosaic_sibling(statuses, person: str, pedigree: Pedigree | None) -> bool:
    """A sibling of a carrier in whom the variant arose anew (parental germline mosaicism: small risk)."""
    if pedigree is None or getattr(statuses, "mode", None) != "de_novo":
        return False
    carriers = [c for c, st in statuses.items() if st.status == "carrier"]
    return any(person in pedigree.full_siblings(c) + pedigree.half_siblings(c) for c in carriers)


@dataclass(frozen=True)
class ImpactItem:
    """One consequence of a reclassification.

    ``person`` is None for a family-level item.  ``change`` is a code:
    'recounsel_family', 'return_to_surveillance', 'keep_in_surveillance',
    'loses_genotype_positive', 'testing_withdrawn', 'exclusion_lifted',
    'offer_predictive_testing', 'predictive_testing_deferred',
    'offer_diagnostic_testing', 'declined_not_reapproached', 'no_longer_at_risk',
    'result_reinterpreted_positive',
    'result_reinterpreted_negative', 'obligate_carrier', 'unscheduled_review'.
    """

    person: str | None
    change: str
    what_changes: str
    action: str
    source: str
    status_before: str | None = None
    status_after: str | None = None


def direction(old_class: str | None, new_class: str | None) -> str:
    """'upgrade' (into P/LP), 'downgrade' (out of P/LP), 'within_actionable'
    (LP <-> P), 'within_not_actionable' (among VUS/LB/B/None) or 'none'."""
    for c in (old_class, new_class):
        if c is not None and c not in ACMG_CLASSES:
            raise ValueError(f"unknown ACMG/AMP class {c!r}")
    if old_class == new_class:
        return "none"
    old_a, new_a = old_class in ACTIONABLE_CLASSES, new_class in ACTIONABLE_CLASSES
    if new_a and not old_a:
        return "upgrade"
    if old_a and not new_a:
        return "downgrade"
    return "within_actionable" if old_a else "within_not_actionable"


def _states(screening) -> dict[str, str]:
    if screening is None:
        return {}
    if isinstance(screening, pd.DataFrame):
        pairs = zip(screening["person"], screening["screening_state"])
    else:
        pairs = screening.items()
    out = {}
    for p, s in pairs:
        if s not in SCREENING_STATES:
            raise ValueError(f"person {p}: screening state {s!r} is not one of {', '.join(SCREENING_STATES)}")
        out[str(p)] = s
    return out


def _class_words(c: str | None) -> str:
    return "none found" if c is None else c.replace("_", " ")


def impact(
    old_class: str | None,
    new_class: str | None,
    statuses_before: Mapping[str, GenotypeStatus],
    statuses_after: Mapping[str, GenotypeStatus],
    screening: Mapping[str, str] | pd.DataFrame | None = None,
    *,
    pedigree: Pedigree | None = None,
    affected: Mapping[str, str | None] | None = None,
    history=None,
    contact_dates: Mapping[str, object] | None = None,
    declined_reapproach_months: int | None = None,
    on=None,
    discharges: Mapping[str, Mapping] | None = None,
) -> list[ImpactItem]:
    """Impact items of a reclassification, family-level items first, then
    people in the order of ``statuses_after``.  Empty when the class is unchanged.

    The keyword arguments give the family context (see the module docstring)."""
    kind = direction(old_class, new_class)
    if kind == "none":
        return []
    states = _states(screening)
    discharges = dict(discharges or {})
    affected = dict(affected or {})
    contact_dates = dict(contact_dates or {})

    def is_affected(p: str) -> bool:
        return affected.get(p) == "affected"

    def declined(p: str) -> bool:
        return pedigree is not None and p in pedigree and pedigree.member(p).contact_status == "declined"

    def released(p: str):
        """(released before the change, words on what the release relied on)."""
        if history is not None:
            basis = release_basis(history, result_date_for_release(statuses_before, p))
            return basis is not None, (f" ({basis.words()})" if basis else "")
        return states.get(p, "none") == "released", ""
    change_txt = f"{_class_words(old_class)} -> {_class_words(new_class)}"
    items: list[ImpactItem] = []

    # ---- family level ----
    if kind == "downgrade":
        extra = (
            " No cascade testing for a likely benign/benign variant."
            if new_class in ("likely_benign", "benign")
            else " Segregation testing of affected relatives may help reclassify the VUS (ESC 2023 IIa C) [V]."
        )
        items.append(ImpactItem(
            None, "recounsel_family",
            f"family variant downgraded ({change_txt}): genotype results no longer predict disease",
            "re-counsel the family; stop predictive testing; record the new class and its date; set a re-review date."
            + extra,
            SRC_RECOUNSEL + "; " + (SRC_NO_CASCADE_BENIGN if new_class in ("likely_benign", "benign") else SRC_NO_CASCADE_VUS),
        ))
    elif kind == "upgrade":
        items.append(ImpactItem(
            None, "recounsel_family",
            f"family variant upgraded ({change_txt}): cascade testing now applies",
            "re-counsel the family; offer predictive testing to at-risk relatives; re-interpret earlier results; "
            "record the new class and its date.",
            SRC_RECOUNSEL + "; " + SRC_UPGRADE_TEST,
        ))
    else:
        items.append(ImpactItem(
            None, "recounsel_family",
            f"family variant reclassified ({change_txt}): predictive meaning of genotypes unchanged",
            "record the new class and its date; inform the family; no change to the cascade lists.",
            SRC_RECOUNSEL,
        ))

    # ---- per person ----
    for person, after in statuses_after.items():
        before = statuses_before.get(person)
        if before is None:
            continue
        state = states.get(person, "none")
        b, a = before.status, after.status
        own: list[ImpactItem] = []
        if kind == "downgrade":
            if b == "non_carrier":
                was_released, relied = released(person)
                gone = discharges.get(person)
                if is_affected(person):
                    pass  # an affected member is never released on a genotype: stays in affected follow-up
                elif gone is not None:
                    own.append(ImpactItem(
                        person, "return_to_surveillance",
                        f"discharged from screening on {gone['discharge_date']}, relying on the variant being "
                        f"{_class_words(gone['acmg_class'])} (classified {gone['classified_on']}); now "
                        f"{_class_words(new_class)}: the discharge no longer holds",
                        "recall: tell them the discharge no longer holds; return to clinical surveillance on the "
                        "genotype-unknown schedule",
                        SRC_DOWNGRADE_RELEASED, b, a))
                elif was_released:
                    own.append(ImpactItem(
                        person, "return_to_surveillance",
                        "genotype-negative result no longer releases from screening (variant no longer P/LP)"
                        + relied,
                        "recall: return to clinical surveillance on the genotype-unknown schedule",
                        SRC_DOWNGRADE_RELEASED, b, a))
                else:
                    own.append(ImpactItem(
                        person, "keep_in_surveillance",
                        "genotype-negative result no longer releases from screening (variant no longer P/LP)",
                        "do not discharge on this result; clinical surveillance on the genotype-unknown schedule "
                        "if a first-degree relative of an affected member (see the recomputed cascade list)",
                        SRC_DOWNGRADE_RELEASED, b, a))
            elif b == "carrier":
                own.append(ImpactItem(
                    person, "loses_genotype_positive",
                    "carrier loses genotype-positive certainty" + (" (obligate carrier)" if before.basis == "obligate" else ""),
                    "re-counsel; remove the genotype-positive label; stays in affected follow-up"
                    if is_affected(person) else
                    "re-counsel; remove the genotype-positive label; clinical surveillance on the genotype-unknown schedule",
                    SRC_DOWNGRADE_CARRIER, b, a))
            elif b == "at_risk_untested":
                own.append(ImpactItem(
                    person, "testing_withdrawn",
                    f"predictive testing no longer offered (prior was {probability_text(before.probability)})",
                    "withdraw pending test offers; stays in affected follow-up" if is_affected(person) else
                    "withdraw pending test offers; clinical screening only, as a relative of affected members",
                    SRC_NO_CASCADE_BENIGN if new_class in ("likely_benign", "benign") else SRC_NO_CASCADE_VUS,
                    b, a))
            elif b == "not_at_risk" and before.basis == "excluded":
                own.append(ImpactItem(
                    person, "exclusion_lifted",
                    "risk exclusion that rested on the variant no longer holds",
                    "review clinical screening eligibility (first-degree relatives of affected members are screened)",
                    SRC_DOWNGRADE_RELEASED, b, a))
        elif kind == "upgrade":
            if a == "at_risk_untested":
                what = f"now at risk of carrying a P/LP variant ({after.reason})"
                if declined(person):
                    again, said = declined_reapproach(
                        contact_dates.get(person), on, declined_reapproach_months)
                    if again:
                        own.append(ImpactItem(
                            person, "offer_predictive_testing", f"{what}; {said}",
                            "re-approach as the clinic's policy allows, acknowledging the earlier decision; offer "
                            + ("diagnostic testing (affected; stays in affected follow-up)" if is_affected(person)
                               else "predictive testing with pre-test counselling (the guideline's age rules apply)"),
                            SRC_UPGRADE_TEST + "; re-approach after a decline: clinic policy", b, a))
                    else:
                        own.append(ImpactItem(
                            person, "declined_not_reapproached", f"{what}; {said}",
                            "do not re-approach (clinic policy); record the new class; offer testing if they ask "
                            "(the family may pass on the news)",
                            "declined relatives: clinic policy (default not re-approached: common practice)", b, a))
                elif is_affected(person):
                    own.append(ImpactItem(
                        person, "offer_diagnostic_testing", what,
                        "affected: offer diagnostic testing for the family variant; stays in affected follow-up",
                        SRC_UPGRADE_TEST, b, a))
                else:
                    route = stepwise_route(pedigree, statuses_after, person) if pedigree is not None else None
                    if route is not None and route.deferred:
                        own.append(ImpactItem(
                            person, "predictive_testing_deferred", what,
                            route.reason(), SRC_UPGRADE_TEST + "; " + SRC_STEPWISE, b, a))
                    else:
                        passed = f" ({route.reason()})" if route is not None and route.passed else ""
                        if pedigree is not None and pedigree.member(person).contact_status == "lost_to_follow_up":
                            passed += "; lost to follow-up: consider another route of contact"
                        own.append(ImpactItem(
                            person, "offer_predictive_testing", what + passed,
                            "offer predictive testing with pre-test counselling (the guideline's age rules apply)",
                            SRC_UPGRADE_TEST, b, a))
            elif a == "carrier" and after.basis == "obligate":
                own.append(ImpactItem(
                    person, "obligate_carrier",
                    "obligate carrier of a P/LP variant",
                    "affected: the variant now explains the disease; stays in affected follow-up; confirmatory "
                    "testing optional (common practice)" if is_affected(person) else
                    "manage as a carrier (genotype-positive surveillance); confirmatory testing optional (common practice)",
                    SRC_UPGRADE_CARRIER, b, a))
            elif a == "carrier":
                own.append(ImpactItem(
                    person, "result_reinterpreted_positive",
                    "earlier carrier result re-interpreted: now genotype-positive"
                    + (f" (inferred from monozygotic co-twin {after.inferred_from})" if after.inferred_from else ""),
                    "inform: the family variant now explains the disease; stays in affected follow-up"
                    if is_affected(person) else "inform; move to genotype-positive (carrier) surveillance",
                    SRC_UPGRADE_CARRIER, b, a))
            elif (a == "not_at_risk" and state == "surveillance" and not is_affected(person)
                  and not _mosaic_sibling(statuses_after, person, pedigree)):
                own.append(ImpactItem(
                    person, "no_longer_at_risk",
                    f"not at risk from the family variant now that it is P/LP ({after.reason})",
                    "counsel; clinical screening as a relative may stop, with advice to return for symptoms or new "
                    "family data",
                    SRC_UPGRADE_NOT_AT_RISK, b, a))
            elif a == "non_carrier":
                own.append(ImpactItem(
                    person, "result_reinterpreted_negative",
                    "earlier non-carrier result re-interpreted: now genotype-negative"
                    + (f" (inferred from monozygotic co-twin {after.inferred_from})" if after.inferred_from else ""),
                    "affected: the family variant does not explain their disease; stays in affected follow-up; "
                    "review with the genetics team (their relatives keep clinical screening)"
                    if is_affected(person) else
                    "counsel; discharge from screening may be offered, with advice to return for symptoms or new family data",
                    SRC_UPGRADE_NEGATIVE, b, a))
        if any(i.change == "declined_not_reapproached" for i in own):
            pass  # not recalled: no unscheduled review
        elif own or state == "surveillance" or "carrier" in (b, a):
            own.append(ImpactItem(
                person, "unscheduled_review",
                f"variant reclassified ({change_txt})",
                "unscheduled review: new family data (ESC 2023)",
                SRC_REVIEW, b, a))
        items.extend(own)
    return items


def impact_of_reclassification(
    pedigree: Pedigree,
    results: pd.DataFrame | None,
    old_class: str | None,
    new_class: str | None,
    screening: Mapping[str, str] | pd.DataFrame | None = None,
    variant: str | None = None,
    **context,
) -> list[ImpactItem]:
    """Compute statuses with the old and the new class, then :func:`impact` (``context``: its
    keyword arguments ``affected``, ``history``, ``contact_dates``,
    ``declined_reapproach_months``, ``on``; the pedigree is passed on)."""
    before = genotype_statuses(pedigree, results, old_class, variant)
    after = genotype_statuses(pedigree, results, new_class, variant)
    return impact(old_class, new_class, before, after, screening, pedigree=pedigree, **context)


def impact_frame(items: list[ImpactItem]) -> pd.DataFrame:
    """Columns: person, change, what_changes, action, source, status_before, status_after."""
    return pd.DataFrame([asdict(i) for i in items], columns=list(ImpactItem.__dataclass_fields__))
