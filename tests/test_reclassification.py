"""Impact of a change in the family variant's class, both directions.

Rules checked (AHA 2024, ESC 2023): P/LP downgraded to VUS/LB/B -> discharged
variant-negative relatives go back into clinical screening on the
genotype-unknown schedule (AHA 2024 exception [V2]), carriers lose G+ status,
re-counsel; VUS upgraded to LP/P -> offer cascade testing, carriers to G+
recall, non-carriers can be discharged after counselling (ESC 2023 I C [V]);
any reclassification -> unscheduled review (ESC 2023 [V]).  Invented family.
"""

from __future__ import annotations

import pandas as pd
import pytest

from tracker.domain.genetics import genotype_statuses
from tracker.domain.pedigree import Pedigree
from tracker.engines.reclassification import direction, impact, impact_frame, impact_of_reclassification

from pedigrees import COLUMNS, V, ped, results  # noqa: F401

# Invented family for reclassification:
#   GM (tested carrier) x GF
#     |- MUM (untested, deceased: obligate carrier when P/LP) x DAD
#     |     |- PRO (affected, carrier)    -> KID (carrier, G+ surveillance)
#     |     |- NEG (non-carrier, released) -> NEG_KID (not at risk)
#     |     |- UNT (untested)
#     |     |- TW1 = TW2 (MZ twins; TW1 tested non-carrier)
#     |     |- STEP (adopted in)
#     |- AUNT (untested)
ROWS = [
    dict(person="GM", sex_at_birth="female"),
    dict(person="GF", sex_at_birth="male"),
    dict(person="MUM", mother="GM", father="GF", sex_at_birth="female", vital_status="deceased"),
    dict(person="DAD", sex_at_birth="male"),
    dict(person="AUNT", mother="GM", father="GF"),
    dict(person="PRO", mother="MUM", father="DAD", proband=True),
    dict(person="NEG", mother="MUM", father="DAD"),
    dict(person="UNT", mother="MUM", father="DAD"),
    dict(person="TW1", mother="MUM", father="DAD", twin_of="TW2", twin_type="monozygotic"),
    dict(person="TW2", mother="MUM", father="DAD", twin_of="TW1", twin_type="monozygotic"),
    dict(person="KID", mother="PRO"),
    dict(person="NEG_KID", father="NEG"),
    dict(person="STEP", mother="MUM", father="DAD", adoption="in"),
]
RESULTS = results(
    ("GM", "carrier"), ("PRO", "carrier"), ("KID", "carrier"), ("NEG", "non_carrier"), ("TW1", "non_carrier")
)
SCREENING = {"NEG": "released", "TW1": "released", "TW2": "released", "KID": "surveillance",
             "PRO": "surveillance", "UNT": "surveillance"}


def items_by(items):
    out = {}
    for i in items:
        out.setdefault(i.person, set()).add(i.change)
    return out


@pytest.fixture(scope="module")
def pedigree():
    return ped(ROWS)


def test_direction():
    assert direction("pathogenic", "uncertain_significance") == "downgrade"
    assert direction("likely_pathogenic", "benign") == "downgrade"
    assert direction("uncertain_significance", "likely_pathogenic") == "upgrade"
    assert direction(None, "pathogenic") == "upgrade"
    assert direction("likely_pathogenic", "pathogenic") == "within_actionable"
    assert direction("uncertain_significance", "likely_benign") == "within_not_actionable"
    assert direction("pathogenic", "pathogenic") == "none"
    with pytest.raises(ValueError):
        direction("pathogenic", "vus")


def test_downgrade_to_vus(pedigree):
    items = impact_of_reclassification(pedigree, RESULTS, "pathogenic", "uncertain_significance", SCREENING)
    by = items_by(items)
    assert items[0].person is None and items[0].change == "recounsel_family"
    # released non-carriers go back to clinical surveillance (AHA 2024 exception [V2])
    assert "return_to_surveillance" in by["NEG"]
    assert "return_to_surveillance" in by["TW2"]  # MZ-inferred non-carrier, also released
    neg = next(i for i in items if i.person == "NEG" and i.change == "return_to_surveillance")
    assert neg.action == "recall: return to clinical surveillance on the genotype-unknown schedule"
    # carriers (tested and obligate) lose genotype-positive certainty
    for who in ("PRO", "KID", "GM", "MUM"):
        assert "loses_genotype_positive" in by[who], who
    kid = next(i for i in items if i.person == "KID" and i.change == "loses_genotype_positive")
    assert kid.what_changes == "carrier loses genotype-positive certainty"
    assert "re-counsel" in kid.action
    # untested at-risk relatives: predictive testing withdrawn
    assert "testing_withdrawn" in by["UNT"] and "testing_withdrawn" in by["AUNT"]
    # exclusion below a non-carrier no longer rests on a P/LP variant
    assert "exclusion_lifted" in by["NEG_KID"]
    # unscheduled review for everyone affected by the change (ESC 2023)
    assert "unscheduled_review" in by["KID"]
    review = next(i for i in items if i.change == "unscheduled_review")
    assert review.action == "unscheduled review: new family data (ESC 2023)"
    # the other side (DAD) was excluded only through the variant: exclusion lifted too
    assert by["DAD"] == {"exclusion_lifted", "unscheduled_review"}
    # not a blood relative: untouched
    assert "STEP" not in by


def test_downgrade_to_benign_says_no_cascade(pedigree):
    items = impact_of_reclassification(pedigree, RESULTS, "likely_pathogenic", "benign", SCREENING)
    fam = items[0]
    assert "No cascade testing" in fam.action
    assert "III C" in fam.source


def test_non_released_non_carrier_kept_in_surveillance(pedigree):
    items = impact_of_reclassification(pedigree, RESULTS, "pathogenic", "uncertain_significance", {})
    assert "keep_in_surveillance" in items_by(items)["NEG"]


def test_upgrade_vus_to_likely_pathogenic(pedigree):
    before = genotype_statuses(pedigree, RESULTS, "uncertain_significance")
    after = genotype_statuses(pedigree, RESULTS, "likely_pathogenic")
    items = impact("uncertain_significance", "likely_pathogenic", before, after, SCREENING)
    by = items_by(items)
    assert items[0].change == "recounsel_family"
    # untested at-risk relatives become eligible for predictive testing
    assert "offer_predictive_testing" in by["UNT"]
    assert "offer_predictive_testing" in by["AUNT"]
    unt = next(i for i in items if i.person == "UNT" and i.change == "offer_predictive_testing")
    assert "1/2" in unt.what_changes
    # results already on file are re-interpreted
    assert "result_reinterpreted_positive" in by["KID"]
    assert "result_reinterpreted_negative" in by["NEG"]
    tw2 = next(i for i in items if i.person == "TW2" and i.change == "result_reinterpreted_negative")
    assert "TW1" in tw2.what_changes
    assert "obligate_carrier" in by["MUM"]
    # below a non-carrier, and the partner: no action
    assert "NEG_KID" not in by and "DAD" not in by
    # same as the convenience wrapper
    assert impact_of_reclassification(pedigree, RESULTS, "uncertain_significance", "likely_pathogenic",
                                      SCREENING) == items


def test_lateral_changes(pedigree):
    items = impact_of_reclassification(pedigree, RESULTS, "likely_pathogenic", "pathogenic", SCREENING)
    by = items_by(items)
    assert items[0].change == "recounsel_family" and "unchanged" in items[0].what_changes
    assert by["KID"] == {"unscheduled_review"}
    assert "NEG" not in by  # released, meaning unchanged
    assert impact_of_reclassification(pedigree, RESULTS, "pathogenic", "pathogenic", SCREENING) == []


def test_screening_frame_input_and_output_frame(pedigree):
    sc = pd.DataFrame({"person": ["NEG"], "screening_state": ["released"]})
    items = impact_of_reclassification(pedigree, RESULTS, "pathogenic", "likely_benign", sc)
    f = impact_frame(items)
    assert list(f.columns) == ["person", "change", "what_changes", "action", "source", "status_before", "status_after"]
    assert (f.loc[f.person == "NEG", "change"] == "return_to_surveillance").any()
    with pytest.raises(ValueError):
        impact_of_reclassification(pedigree, RESULTS, "pathogenic", "likely_benign", {"NEG": "gone"})
