"""Genotype statuses and carrier probabilities for a familial dominant variant.

Reference values: first-degree 1/2 (van Velzen 2018 editorial [V]); second
1/4, third 1/8 while intervening relatives are untested; a non-carrier in between sets
descendants to 0; the other side drops to 0 once the transmitting parent is
known; a monozygotic co-twin shares the genotype (common practice [M]);
first-degree relatives of obligate carriers at 50% and a variant-negative
relative's descendants leave screening (Dunn 2013, Fig. 5 [V]).  The
adjusted figures are checked against a hand calculation with Bayes' theorem,
and the whole calculation against brute-force enumeration of every genotype
combination on random small pedigrees.  All families are invented.
"""

from __future__ import annotations

import itertools
import random
from fractions import Fraction

import pandas as pd
import pytest

from tracker.domain.genetics import carrier_probabilities, genotype_statuses, probability_text
from tracker.domain.pedigree import Pedigree

from pedigrees import COLUMNS, V, ped, results  # noqa: F401


# Four-generation invented family (Roman numeral codes as in NSGC numbering):
#
#  I-1 x I-2                                   I-3 x I-4 (placeholders)
#   |- II-1 (untested)     -> III-5 -> IV-3        |- II-3 (marries II-2)
#   |- II-2 (carrier) x II-3                       |- II-6 -> III-9
#   |     |- III-1 (inconclusive) -> IV-2
#   |     |- III-2 (carrier) -> IV-1 (carrier) = IV-6 (MZ twin), IV-7
#   |     |- III-11 (adopted in)
#   |- II-4 (untested, deceased) x II-5 -> III-6 (carrier), III-7 -> IV-8
#   |- II-7 (non-carrier) -> III-8 -> IV-5
FOUR_GEN = [
    dict(person="I-1", sex_at_birth="male", vital_status="deceased"),
    dict(person="I-2", sex_at_birth="female"),
    dict(person="I-3", sex_at_birth="male", placeholder=True),
    dict(person="I-4", sex_at_birth="female", placeholder=True),
    dict(person="II-1", mother="I-2", father="I-1", sex_at_birth="male"),
    dict(person="II-2", mother="I-2", father="I-1", sex_at_birth="female", proband=True),
    dict(person="II-3", mother="I-4", father="I-3", sex_at_birth="male"),
    dict(person="II-4", mother="I-2", father="I-1", sex_at_birth="female", vital_status="deceased"),
    dict(person="II-5", sex_at_birth="male"),
    dict(person="II-6", mother="I-4", father="I-3", sex_at_birth="female"),
    dict(person="II-7", mother="I-2", father="I-1", sex_at_birth="male"),
    dict(person="III-1", mother="II-2", father="II-3"),
    dict(person="III-2", mother="II-2", father="II-3", sex_at_birth="female"),
    dict(person="III-5", father="II-1"),
    dict(person="III-6", mother="II-4", father="II-5"),
    dict(person="III-7", mother="II-4", father="II-5"),
    dict(person="III-8", father="II-7"),
    dict(person="III-9", mother="II-6"),
    dict(person="III-11", mother="II-2", father="II-3", adoption="in"),
    dict(person="IV-1", mother="III-2", twin_of="IV-6", twin_type="monozygotic"),
    dict(person="IV-6", mother="III-2", twin_of="IV-1", twin_type="monozygotic"),
    dict(person="IV-7", mother="III-2"),
    dict(person="IV-2", father="III-1"),
    dict(person="IV-3", mother="III-5"),
    dict(person="IV-5", mother="III-8"),
    dict(person="IV-8", mother="III-7"),
]
FOUR_GEN_RESULTS = results(
    ("II-2", "carrier", "2020-01-15"),
    ("III-2", "carrier"),
    ("III-6", "carrier"),
    ("II-7", "non_carrier"),
    ("IV-1", "carrier"),
    ("III-1", "inconclusive"),
)


@pytest.fixture(scope="module")
def four_gen():
    p = ped(FOUR_GEN)
    return p, genotype_statuses(p, FOUR_GEN_RESULTS, "pathogenic", V)


@pytest.mark.parametrize(
    "person, status, probability, basis",
    [
        ("II-2", "carrier", 1, "tested"),
        ("III-1", "at_risk_untested", Fraction(1, 2), "pedigree"),   # van Velzen 2018: 1st degree 1/2 [V]
        ("II-1", "at_risk_untested", Fraction(1, 2), "pedigree"),    # sibling of a carrier
        ("I-1", "at_risk_untested", Fraction(1, 2), "pedigree"),     # either parent could have transmitted
        ("III-5", "at_risk_untested", Fraction(1, 4), "pedigree"),   # 2nd degree 1/4 (untested between)
        ("IV-2", "at_risk_untested", Fraction(1, 4), "pedigree"),    # grandchild through an untested child
        ("IV-3", "at_risk_untested", Fraction(1, 8), "pedigree"),    # 3rd degree 1/8
        ("IV-7", "at_risk_untested", Fraction(1, 2), "pedigree"),
        ("II-7", "non_carrier", 0, "tested"),
        ("III-8", "not_at_risk", 0, "excluded"),                     # below a non-carrier: 0 (Dunn 2013)
        ("IV-5", "not_at_risk", 0, "excluded"),
        ("II-3", "not_at_risk", 0, "excluded"),                      # other side once transmitter known
        ("II-6", "not_at_risk", 0, "excluded"),
        ("III-9", "not_at_risk", 0, "excluded"),
        ("I-3", "not_at_risk", 0, "excluded"),
        ("IV-6", "carrier", 1, "mz_co_twin"),                        # MZ co-twin shares the genotype
        ("II-4", "carrier", 1, "obligate"),                          # obligate carrier
        ("III-7", "at_risk_untested", Fraction(1, 2), "pedigree"),   # FDR of obligate carrier 50% (Dunn 2013 Fig. 5)
        ("IV-8", "at_risk_untested", Fraction(1, 4), "pedigree"),
        ("II-5", "not_at_risk", 0, "excluded"),                      # partner of the obligate carrier
        ("III-11", "not_at_risk", 0, "unrelated"),                   # adopted in
    ],
)
def test_four_generation_priors(four_gen, person, status, probability, basis):
    _, g = four_gen
    s = g[person]
    assert s.status == status
    assert s.probability == probability
    assert s.basis == basis


def test_reason_strings(four_gen):
    _, g = four_gen
    assert g["III-1"].reason.startswith("child of carrier II-2, untested: 1/2")
    assert "inconclusive result" in g["III-1"].reason       # counted as untested
    assert g["IV-3"].reason == "great-niece/nephew of carrier II-2, untested: 1/8"
    assert g["III-7"].reason == "child of obligate carrier II-4, untested: 1/2"
    assert g["III-8"].reason.startswith("descendant of non-carrier II-7")
    assert g["II-6"].reason.startswith("other side of the family: carrier III-2 inherited the variant from II-2")
    assert g["IV-6"].inferred and g["IV-6"].inferred_from == "IV-1"
    assert "III-6" in g["II-4"].reason and g["II-4"].inferred
    assert g["III-11"].reason.startswith("adopted in")
    assert g.mode == "inherited"
    frame = g.frame()
    assert list(frame.columns)[:4] == ["person", "status", "probability", "probability_text"]
    assert frame.set_index("person").loc["IV-3", "probability"] == 0.125


def test_mz_non_carrier_result_applies_to_co_twin():
    rows = [
        dict(person="P", sex_at_birth="female"),
        dict(person="T1", mother="P", twin_of="T2", twin_type="monozygotic"),
        dict(person="T2", mother="P", twin_of="T1", twin_type="monozygotic"),
        dict(person="T2K", father="T2"),
        dict(person="DZ1", mother="P", twin_of="DZ2", twin_type="dizygotic"),
        dict(person="DZ2", mother="P", twin_of="DZ1", twin_type="dizygotic"),
    ]
    p = ped(rows)
    g = genotype_statuses(p, results(("P", "carrier"), ("T1", "non_carrier"), ("DZ1", "carrier")), "likely_pathogenic")
    assert (g["T2"].status, g["T2"].basis, g["T2"].inferred) == ("non_carrier", "mz_co_twin", True)
    assert g["T2K"].status == "not_at_risk"  # below an (inferred) non-carrier
    # dizygotic twins are ordinary full siblings: no inference
    assert (g["DZ2"].status, g["DZ2"].probability) == ("at_risk_untested", Fraction(1, 2))


def test_obligate_carrier_between_carrier_parent_and_carrier_child():
    rows = [
        dict(person="GM", sex_at_birth="female"), dict(person="GF", sex_at_birth="male"),
        dict(person="SON", mother="GM", father="GF", sex_at_birth="male"),
        dict(person="WIFE", sex_at_birth="female"),
        dict(person="GS", mother="WIFE", father="SON"),
        dict(person="GD", mother="WIFE", father="SON"),
        dict(person="WIFE_SIS"),
    ]
    p = ped(rows)
    g = genotype_statuses(p, results(("GM", "carrier"), ("GS", "carrier")), "pathogenic")
    assert (g["SON"].status, g["SON"].basis) == ("carrier", "obligate")
    assert g["WIFE"].probability == 0
    assert g["GD"].probability == Fraction(1, 2)
    assert g["GF"].probability == 0   # transmitting grandparent known: other side 0


def test_obligate_carrier_with_carrier_children_by_two_partners():
    rows = [
        dict(person="X", sex_at_birth="male"),
        dict(person="P1", sex_at_birth="female"), dict(person="P2", sex_at_birth="female"),
        dict(person="C1", mother="P1", father="X"), dict(person="C2", mother="P2", father="X"),
        dict(person="C3", mother="P2", father="X"),
    ]
    p = ped(rows)
    g = genotype_statuses(p, results(("C1", "carrier"), ("C2", "carrier")), "pathogenic")
    assert (g["X"].status, g["X"].basis) == ("carrier", "obligate")
    assert g["P1"].probability == 0 and g["P2"].probability == 0
    assert g["C3"].probability == Fraction(1, 2)
    # one carrier child only: the parent and partner are each 1/2
    g1 = genotype_statuses(p, results(("C1", "carrier")), "pathogenic")
    assert g1["X"].probability == Fraction(1, 2) and g1["P1"].probability == Fraction(1, 2)


def test_non_carrier_grandparent_shifts_weight_bayes_hand_calculation():
    # Hand calculation (Bayes): founders MGM, MGF, PGM, PGF equally likely a priori.
    # P(results | source): MGM 0 (tested non-carrier), MGF 1/4, PGM 1/4, PGF 1/4.
    # Father's side 2/3, mother's 1/3: paternal aunt 1/3, maternal aunt 1/6, sibling 1/2.
    rows = [
        dict(person="MGM", sex_at_birth="female"), dict(person="MGF", sex_at_birth="male"),
        dict(person="PGM", sex_at_birth="female"), dict(person="PGF", sex_at_birth="male"),
        dict(person="MO", mother="MGM", father="MGF", sex_at_birth="female"),
        dict(person="MA", mother="MGM", father="MGF"),
        dict(person="FA", mother="PGM", father="PGF", sex_at_birth="male"),
        dict(person="PA", mother="PGM", father="PGF"),
        dict(person="PRO", mother="MO", father="FA"),
        dict(person="SIB", mother="MO", father="FA"),
    ]
    p = ped(rows)
    g = genotype_statuses(p, results(("PRO", "carrier"), ("MGM", "non_carrier")), "pathogenic")
    assert g["FA"].probability == Fraction(2, 3)
    assert g["MO"].probability == Fraction(1, 3)
    assert g["PA"].probability == Fraction(1, 3)
    assert g["MA"].probability == Fraction(1, 6)
    assert g["SIB"].probability == Fraction(1, 2)
    assert g["MGF"].probability == Fraction(1, 3)
    assert "adjusted for the other results" in g["PA"].reason
    assert "adjusted" not in g["SIB"].reason
    # without the grandmother's result: the plain 1/4 for an aunt (2nd degree, common practice)
    g0 = genotype_statuses(p, results(("PRO", "carrier")), "pathogenic")
    assert g0["PA"].probability == Fraction(1, 4) == g0["MA"].probability


def test_de_novo_and_unexplained():
    rows = [
        dict(person="M", sex_at_birth="female"), dict(person="F", sex_at_birth="male"),
        dict(person="PRO", mother="M", father="F"), dict(person="SIB", mother="M", father="F"),
        dict(person="KID", mother="PRO"),
    ]
    p = ped(rows)
    g = genotype_statuses(p, results(("PRO", "carrier"), ("M", "non_carrier"), ("F", "non_carrier")), "pathogenic")
    assert g.mode == "de_novo"
    assert g["KID"].probability == Fraction(1, 2)
    assert g["SIB"].probability == 0 and "germline mosaicism" in g["SIB"].reason
    assert g.notes
    # two carrier siblings of two non-carrier parents: not explainable by one source
    g2 = genotype_statuses(
        p, results(("PRO", "carrier"), ("SIB", "carrier"), ("M", "non_carrier"), ("F", "non_carrier")), "pathogenic"
    )
    assert g2.mode == "unexplained"
    assert g2["KID"].status == "uncertain"
    assert g2["PRO"].status == "carrier"  # a result still stands


def test_conflicting_results_make_uncertain():
    rows = [dict(person="M"), dict(person="K", mother="M")]
    p = ped(rows)
    r = results(("M", "carrier"), ("K", "carrier", "2021-01-01"), ("K", "non_carrier", "2022-01-01"))
    g = genotype_statuses(p, r, "pathogenic")
    assert (g["K"].status, g["K"].basis) == ("uncertain", "conflict")


def test_results_for_other_variants_and_panels_ignored():
    rows = [dict(person="M"), dict(person="K", mother="M"), dict(person="J", mother="M")]
    p = ped(rows)
    r = pd.DataFrame([
        dict(person="M", test_date="2020-01-01", test_type="diagnostic_panel", variant=V, result="carrier"),
        dict(person="K", test_date="2021-01-01", test_type="predictive", variant="NM_000257.4:c.1A>G", result="non_carrier"),
        dict(person="J", test_date="2021-01-01", test_type="diagnostic_panel", variant=None, result="no_variant_found"),
        dict(person="ZZ", test_date="2021-01-01", test_type="predictive", variant=V, result="carrier"),  # other family
    ])
    g = genotype_statuses(p, r, "pathogenic", V)
    assert g["K"].status == "at_risk_untested"
    assert g["J"].status == "at_risk_untested" and "no variant" in g["J"].reason


@pytest.mark.parametrize("cls, words", [
    ("uncertain_significance", "uncertain significance"),
    ("likely_benign", "likely benign"),
    ("benign", "benign"),
    (None, "no P/LP variant"),
])
def test_not_actionable_classes_are_uncertain(four_gen, cls, words):
    # ESC 2023: VUS no cascade testing; AHA 3 / ESC III C for LB/B
    p, _ = four_gen
    g = genotype_statuses(p, FOUR_GEN_RESULTS, cls, V)
    assert {s.status for s in g.values()} == {"uncertain"}
    assert all(s.probability is None for s in g.values())
    assert words in g["III-1"].reason
    assert g["II-2"].tested_result == "carrier"
    assert g["II-7"].tested_result == "non_carrier"
    assert g["IV-6"].tested_result is None


def test_no_carrier_recorded():
    p = ped([dict(person="M"), dict(person="K", mother="M")])
    g = genotype_statuses(p, results(("K", "non_carrier")), "pathogenic")
    assert g["M"].status == "uncertain" and g["M"].basis == "no_carrier"
    assert g["K"].status == "non_carrier"


def test_consanguineous_loop_hand_calculation():
    # G1 carrier; first cousins C (via A) and D (via B) have child E.
    # Given G1 a carrier: A, B 1/2 each; C, D 1/4 each, independent;
    # E = 1 - (1 - 1/8)^2 = 15/64 (each carrier parent passes it with 1/2).
    rows = [
        dict(person="G1", sex_at_birth="male"), dict(person="G2", sex_at_birth="female"),
        dict(person="A", mother="G2", father="G1"), dict(person="B", mother="G2", father="G1"),
        dict(person="C", mother="A", sex_at_birth="male"), dict(person="D", father="B", sex_at_birth="female"),
        dict(person="E", mother="D", father="C"),
    ]
    p = ped(rows)
    g = genotype_statuses(p, results(("G1", "carrier")), "pathogenic")
    assert g["C"].probability == Fraction(1, 4)
    assert g["E"].probability == Fraction(15, 64)


def test_probability_text():
    assert probability_text(Fraction(1, 2)) == "1/2"
    assert probability_text(Fraction(0)) == "0"
    assert probability_text(Fraction(1)) == "1"
    assert probability_text(Fraction(1, 3000)) == "0.0%"
    assert probability_text(None) == ""


# --- brute force: every entry point and every genotype combination ----------------------------


def _oracle(p: Pedigree, observed: dict[str, int]) -> dict[str, float]:
    """Single-entry dominant model by full enumeration (independent of the engine):
    each founder, and each unrecorded parent of a person with one recorded parent,
    is equally likely to have brought the variant in."""
    nodes = list(p.genetic_nodes())
    entries = []
    for n in nodes:
        missing = [x is None for x in p.genetic_parents(n)]
        if all(missing):
            entries.append(("founder", n))
        elif any(missing):
            entries.append(("slot", n))
    num = {n: 0.0 for n in nodes}
    den = 0.0
    for bits in itertools.product((0, 1), repeat=len(nodes)):
        g = dict(zip(nodes, bits))
        if any(g[n] != v for n, v in observed.items()):
            continue
        for kind, e in entries:
            w = 1.0
            for n in nodes:
                parents = [x for x in p.genetic_parents(n) if x is not None]
                if not parents:
                    p1 = 1.0 if (kind == "founder" and e == n) else 0.0
                else:
                    miss = 0.5 if (kind == "slot" and e == n) else 1.0
                    for x in parents:
                        miss *= 1 - 0.5 * g[x]
                    p1 = 1 - miss
                w *= p1 if g[n] else 1 - p1
                if w == 0:
                    break
            if w:
                den += w
                for n in nodes:
                    num[n] += w * g[n]
    return {n: num[n] / den for n in nodes}


def _small_random(seed: int, outbred: bool = False):
    """7-10 people; ``outbred``: every child's second parent marries in (a tree per founder),
    otherwise parents are drawn at random (consanguineous loops are common)."""
    rng = random.Random(seed)
    rows = [dict(person="A"), dict(person="B")]
    people = ["A", "B"]
    while len(rows) < rng.randint(7, 10):
        if rng.random() < 0.25:
            code = f"X{len(rows)}"
            rows.append(dict(person=code))
            people.append(code)
            continue
        mo, fa = rng.sample(people, 2)
        if outbred:
            fa = f"Y{len(rows)}"
            rows.append(dict(person=fa))
        code = f"K{len(rows)}"
        row = dict(person=code, mother=mo)
        if rng.random() < 0.8:
            row["father"] = fa
        rows.append(row)
        people.append(code)
    return rows


@pytest.mark.parametrize("outbred", [False, True])
@pytest.mark.parametrize("seed", range(20))
def test_matches_brute_force_enumeration(seed, outbred):
    rng = random.Random(1000 + seed)
    rows = _small_random(seed, outbred)
    p = ped(rows)
    nodes = list(p.genetic_nodes())
    # simulate a true genotype from a random entry point, then reveal a few results
    truth = {n: 0 for n in nodes}
    root = rng.choice([n for n in nodes if None in p.genetic_parents(n)])
    truth[root] = 1
    for n in nodes:
        for x in p.genetic_parents(n):
            if x is not None and truth[x] and rng.random() < 0.5:
                truth[n] = 1
    carriers = [n for n in nodes if truth[n]]
    observed = {rng.choice(carriers): 1}
    for n in rng.sample(nodes, k=min(3, len(nodes))):
        observed[n] = truth[n]
    probs, mode = carrier_probabilities(p, observed)
    assert mode == "inherited"
    expected = _oracle(p, observed)
    for n in nodes:
        assert float(probs[n]) == pytest.approx(expected[n], abs=1e-6), (seed, n)
