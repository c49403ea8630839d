"""Pedigree links, relationship words, degrees and kinship.

Reference values: coefficient of relationship r (Wright S, Am Nat 1922: sum
over paths through common ancestors of (1/2)^L) and the degree table in the
usual degree table (1st degree r 1/2, 2nd 1/4 including double first
cousins, 3rd 1/8 [V]); inbreeding coefficients of children of
half-sibs (1/8) and of first cousins (1/16) are the standard textbook values
that follow from Wright's formula.  Random pedigrees are checked against
networkx (lowest common ancestors, path enumeration on the parent->child
DiGraph).  All families are invented.
"""

from __future__ import annotations

import math
import random
from fractions import Fraction

import networkx as nx
import pandas as pd
import pytest

from tracker.domain.pedigree import Pedigree, PedigreeError, find_cycle, relationship_words

COLUMNS = [
    "person", "family", "sex_at_birth", "birth_date", "birth_date_precision", "vital_status",
    "mother", "father", "placeholder", "proband", "twin_of", "twin_type", "adoption", "contact_status",
]


def frame(rows: list[dict]) -> pd.DataFrame:
    full = []
    for r in rows:
        d = {c: None for c in COLUMNS}
        d.update(family="FAM-T", sex_at_birth="unknown", vital_status="alive", placeholder=False,
                 proband=False, contact_status="not_contacted")
        d.update(r)
        full.append(d)
    return pd.DataFrame(full, columns=COLUMNS)


def ped(rows: list[dict]) -> Pedigree:
    return Pedigree(frame(rows))


# Invented three/four-generation family used by several checks:
#
#   GF x GM            (grandparents)      GM x GF2 (second partner of GM)
#   |-- MO x FA                             |-- HA (half aunt of KID)
#   |     |-- KID, SIB, KID's child GKID
#   |-- AU x AUP
#         |-- COU (first cousin of KID)
#               |-- COU_CH (first cousin once removed of KID)
FAMILY = [
    dict(person="GF", sex_at_birth="male"),
    dict(person="GM", sex_at_birth="female"),
    dict(person="GF2", sex_at_birth="male"),
    dict(person="MO", sex_at_birth="female", mother="GM", father="GF"),
    dict(person="FA", sex_at_birth="male"),
    dict(person="AU", sex_at_birth="female", mother="GM", father="GF"),
    dict(person="AUP", sex_at_birth="male"),
    dict(person="HA", sex_at_birth="female", mother="GM", father="GF2"),
    dict(person="KID", sex_at_birth="female", mother="MO", father="FA"),
    dict(person="SIB", sex_at_birth="male", mother="MO", father="FA"),
    dict(person="HSIB", sex_at_birth="male", mother="MO"),  # father unrecorded: half sibling
    dict(person="GKID", mother="KID"),
    dict(person="COU", mother="AU", father="AUP"),
    dict(person="COU_CH", father="COU"),
    dict(person="GGKID", mother="GKID"),
]


@pytest.fixture(scope="module")
def family() -> Pedigree:
    return ped(FAMILY)


# --- Wright 1922 coefficients and the degree table -------------------------

@pytest.mark.parametrize(
    "a, b, label, degree, r",
    [
        ("KID", "MO", "parent", 1, Fraction(1, 2)),                 # Wright 1922; degree table: 1st degree r 1/2
        ("MO", "KID", "child", 1, Fraction(1, 2)),
        ("KID", "SIB", "full sibling", 1, Fraction(1, 2)),          # Wright: 2 paths of L=2
        ("KID", "HSIB", "half sibling", 2, Fraction(1, 4)),         # Wright 1922; degree table: 2nd degree r 1/4
        ("KID", "GM", "grandparent", 2, Fraction(1, 4)),
        ("GM", "KID", "grandchild", 2, Fraction(1, 4)),
        ("KID", "AU", "aunt/uncle", 2, Fraction(1, 4)),
        ("AU", "KID", "niece/nephew", 2, Fraction(1, 4)),
        ("KID", "COU", "first cousin", 3, Fraction(1, 8)),          # Wright 1922; degree table: 3rd degree r 1/8
        ("GKID", "GM", "great-grandparent", 3, Fraction(1, 8)),
        ("KID", "HA", "half aunt/uncle", 3, Fraction(1, 8)),
        ("KID", "COU_CH", "first cousin once removed", 4, Fraction(1, 16)),
        ("GGKID", "GM", "great-great-grandparent", 4, Fraction(1, 16)),
        ("KID", "FA", "parent", 1, Fraction(1, 2)),
        ("KID", "AUP", "not a blood relative", None, Fraction(0)),
        ("KID", "KID", "self", 0, Fraction(1)),
    ],
)
def test_relationship_table(family, a, b, label, degree, r):
    rel = family.relationship(a, b)
    assert rel.label == label
    assert rel.degree == degree
    assert rel.r == r
    assert rel.kinship == r / 2  # Wright 1922: phi = r/2 without inbreeding


def test_second_cousins_and_half_first_cousins():
    # Wright 1922: second cousins share two great-grandparents, 2 paths of L=6 -> r = 1/32, 5th degree
    rows = [
        dict(person="A"), dict(person="B"),
        dict(person="C1", mother="A", father="B"), dict(person="C2", mother="A", father="B"),
        dict(person="D1", mother="C1"), dict(person="D2", father="C2"),
        dict(person="E1", mother="D1"), dict(person="E2", father="D2"),
        dict(person="H"), dict(person="HC1", father="H"), dict(person="HC2", father="H"),
        dict(person="HG1", mother="HC1"), dict(person="HG2", mother="HC2"),
    ]
    p = ped(rows)
    rel = p.relationship("E1", "E2")
    assert (rel.label, rel.degree, rel.r) == ("second cousin", 5, Fraction(1, 32))
    rel = p.relationship("HG1", "HG2")  # half first cousins: one path of L=4 -> 1/16
    assert (rel.label, rel.degree, rel.r) == ("half first cousin", 4, Fraction(1, 16))
    # half siblings HC1/HC2 (father in common, mothers unrecorded)
    assert p.relationship("HC1", "HC2").label == "half sibling"


def test_generic_fallback_label():
    # a chain far beyond the named table: sixth cousins -> generic words with the degree
    rows = [dict(person="A"), dict(person="B")]
    left, right = "L0", "R0"
    rows += [dict(person=left, mother="A", father="B"), dict(person=right, mother="A", father="B")]
    for i in range(1, 7):
        rows += [dict(person=f"L{i}", mother=f"L{i-1}"), dict(person=f"R{i}", father=f"R{i-1}")]
    p = ped(rows)
    rel = p.relationship("L6", "R6")
    # 2 paths of L = 14 -> r = 2^-13 (Wright); degree = 14 meioses - 1 (full) = 13
    assert rel.r == Fraction(1, 2**13)
    assert rel.degree == 13
    assert rel.label == "relative, 13th degree"


def test_relationship_words_unit():
    assert relationship_words(3, 1, True) == "great-aunt/uncle"
    assert relationship_words(1, 3, False) == "half great-niece/nephew"
    assert relationship_words(2, 4, True) == "first cousin twice removed"
    assert relationship_words(3, 4, True) == "second cousin once removed"


# --- links -------------------------------------------------------------------------------------

def test_links(family):
    assert family.parents("KID") == ("MO", "FA")
    assert set(family.children("GM")) == {"MO", "AU", "HA"}
    assert family.ancestors("GKID") == frozenset({"KID", "MO", "FA", "GM", "GF"})
    assert family.descendants("AU") == frozenset({"COU", "COU_CH"})
    assert family.full_siblings("KID") == ("SIB",)
    assert set(family.half_siblings("KID")) == {"HSIB"}
    assert set(family.half_siblings("MO")) == {"HA"}
    # degree table: first-degree = parents, siblings, children
    assert set(family.first_degree_relatives("KID")) == {"MO", "FA", "SIB", "GKID"}


# --- twins ---------------------------------------------------------------------------------------

def twins(kind: str, with_parents: bool = True) -> Pedigree:
    rows = [dict(person="M", sex_at_birth="female"), dict(person="F", sex_at_birth="male")]
    par = dict(mother="M", father="F") if with_parents else {}
    rows += [
        dict(person="T1", twin_of="T2", twin_type=kind, **par),
        dict(person="T2", twin_of="T1", twin_type=kind, **({"mother": "M"} if with_parents else {})),
        dict(person="T1C", mother="T1"),
        dict(person="T2C", father="T2"),
    ]
    return ped(rows)


def test_monozygotic_twin_is_one_genotype():
    p = twins("monozygotic")
    rel = p.relationship("T1", "T2")
    assert rel.r == 1 and rel.degree == 1 and rel.label == "monozygotic co-twin"  # MZ twins one genotype: r = 1
    # the co-twin's child is genetically the twin's child: r 1/2 (Wright on the merged genotype)
    rel = p.relationship("T2", "T1C")
    assert rel.r == Fraction(1, 2) and rel.degree == 1
    assert rel.label.startswith("niece/nephew (genetically child")
    # children of MZ twins are genetically half siblings: r 1/4
    assert p.relationship("T1C", "T2C").r == Fraction(1, 4)
    assert "T1C" in p.first_degree_relatives("T2")
    # father recorded for T1 only is inferred for the co-twin
    assert p.father("T2") == "F"


def test_dizygotic_twins_are_full_siblings():
    p = twins("dizygotic")
    rel = p.relationship("T1", "T2")
    assert rel.r == Fraction(1, 2) and rel.degree == 1
    assert rel.label == "full sibling (dizygotic co-twin)"
    assert p.relationship("T2", "T1C").r == Fraction(1, 4)


def test_twins_without_recorded_parents_share_unnamed_parents():
    p = twins("dizygotic", with_parents=False)
    assert p.relationship("T1", "T2").r == Fraction(1, 2)
    assert p.parents("T1") == ()  # the shared parents are never shown
    assert p.ancestors("T1C") == frozenset({"T1"})
    q = twins("monozygotic", with_parents=False)
    assert q.relationship("T1", "T2").r == 1


def test_twins_with_different_parents_rejected():
    rows = [dict(person="M1"), dict(person="M2"),
            dict(person="T1", mother="M1", twin_of="T2", twin_type="dizygotic"),
            dict(person="T2", mother="M2", twin_of="T1", twin_type="dizygotic")]
    with pytest.raises(PedigreeError, match="T1, T2"):
        ped(rows)


def test_twin_zygosity_conflict_rejected():
    rows = [dict(person="T1", twin_of="T2", twin_type="monozygotic"),
            dict(person="T2", twin_of="T1", twin_type="dizygotic")]
    with pytest.raises(PedigreeError, match="different zygosity"):
        ped(rows)


# --- adoption ----------------------------------------------------------------------------------

def test_adopted_in_is_not_a_blood_relative():
    rows = [
        dict(person="M", sex_at_birth="female"), dict(person="F", sex_at_birth="male"),
        dict(person="BIO", mother="M", father="F"),
        dict(person="ADI", mother="M", father="F", adoption="in"),
        dict(person="ADO", mother="M", father="F", adoption="out"),
        dict(person="ADI_CH", mother="ADI"),
    ]
    p = ped(rows)
    rel = p.relationship("ADI", "M")
    assert rel.r == 0 and rel.degree is None
    assert rel.label == "adoptive parent (not a blood relative)"
    assert p.relationship("M", "ADI").label == "adopted-in child (not a blood relative)"
    assert p.relationship("BIO", "ADI").degree is None
    assert p.parents("ADI") == ()
    assert p.adoptive_parents("ADI") == ("M", "F")
    assert "ADI" not in p.children("M")
    # adopted out: still a blood relative (NSGC pedigree nomenclature: solid line of descent)
    assert p.relationship("BIO", "ADO").r == Fraction(1, 2)
    # the adopted-in person's own child is their blood relative, not the adoptive grandparents'
    assert p.relationship("ADI", "ADI_CH").r == Fraction(1, 2)
    assert p.relationship("ADI_CH", "M").degree is None


# --- inbreeding and multiple lines ---------------------------------------------------------------

def test_inbreeding_coefficients():
    # child of half siblings: F = 1/8; child of first cousins: F = 1/16 (Wright 1922)
    rows = [
        dict(person="P"), dict(person="Q1"), dict(person="Q2"),
        dict(person="H1", mother="Q1", father="P"), dict(person="H2", mother="Q2", father="P"),
        dict(person="X", mother="H1", father="H2"),
        dict(person="G1"), dict(person="G2"),
        dict(person="S1", mother="G1", father="G2"), dict(person="S2", mother="G1", father="G2"),
        dict(person="C1", mother="S1"), dict(person="C2", father="S2"),
        dict(person="Y", mother="C1", father="C2"),
    ]
    p = ped(rows)
    assert p.inbreeding("X") == Fraction(1, 8)
    assert p.inbreeding("Y") == Fraction(1, 16)
    assert p.kinship("X", "X") == Fraction(1, 2) * (1 + Fraction(1, 8))  # phi(i,i) = 1/2 (1 + F)
    rel = p.relationship("Y", "S1")  # more than one line: note present
    assert rel.note is not None


def test_double_first_cousins_are_second_degree():
    # two brothers marry two sisters: double first cousins, r = 1/4 (Wright 1922; degree table: 2nd degree)
    rows = [
        dict(person="A1"), dict(person="A2"), dict(person="B1"), dict(person="B2"),
        dict(person="BRO1", mother="A1", father="A2"), dict(person="BRO2", mother="A1", father="A2"),
        dict(person="SIS1", mother="B1", father="B2"), dict(person="SIS2", mother="B1", father="B2"),
        dict(person="K1", mother="SIS1", father="BRO1"), dict(person="K2", mother="SIS2", father="BRO2"),
    ]
    rel = ped(rows).relationship("K1", "K2")
    assert rel.r == Fraction(1, 4)
    assert rel.degree == 2
    assert rel.label == "double first cousin"


# --- validation ------------------------------------------------------------------------------------

def test_cycle_is_rejected_with_names():
    rows = [dict(person="ANNA", mother="BERT"), dict(person="BERT", father="CARL"), dict(person="CARL", mother="ANNA")]
    with pytest.raises(PedigreeError) as err:
        ped(rows)
    msg = str(err.value)
    assert "own ancestor" in msg
    for who in ("ANNA", "BERT", "CARL"):
        assert who in msg


def test_two_person_cycle_and_cycle_finder():
    with pytest.raises(PedigreeError, match="DORA.*EMIL|EMIL.*DORA"):
        ped([dict(person="DORA", mother="EMIL"), dict(person="EMIL", father="DORA")])
    cyc = find_cycle({"a": ("b", None), "b": (None, "c"), "c": ("a", None), "d": (None, None)})
    assert set(cyc) == {"a", "b", "c"}
    assert find_cycle({"a": (None, None), "b": ("a", None)}) is None


@pytest.mark.parametrize(
    "rows, pattern",
    [
        ([dict(person="A", mother="A")], "own mother"),
        ([dict(person="A", mother="ZZ")], "not in the pedigree"),
        ([dict(person="A"), dict(person="A")], "more than once"),
        ([dict(person="P"), dict(person="A", mother="P", father="P")], "both mother and father"),
        ([dict(person="A", twin_of="B", twin_type=None), dict(person="B")], "needs a twin_type"),
        ([dict(person="A", sex_at_birth="woman")], "sex_at_birth"),
    ],
)
def test_validation_errors(rows, pattern):
    with pytest.raises(PedigreeError, match=pattern):
        ped(rows)


def test_tolerates_nan_and_missing_columns():
    df = pd.DataFrame({"person": ["A", "B"], "mother": [float("nan"), "A"]})
    p = Pedigree(df)
    assert p.parents("B") == ("A",)
    assert p.member("A").contact_status == "not_contacted"


# --- random pedigrees against networkx ---------------------------------------------------------


def _random_outbred_family(seed: int):
    """Descendants of one couple; every partner marries in from outside (no inbreeding,
    no double relationships). Some blood members have children with two partners."""
    rng = random.Random(seed)
    rows = [dict(person="F0", sex_at_birth="male"), dict(person="F1", sex_at_birth="female")]
    generation = [("F1", "F0")]  # couples (mother, father)
    counter = 0
    for _gen in range(4):
        nxt_blood = []
        for mo, fa in generation:
            for _ in range(rng.randint(1, 3)):
                counter += 1
                code = f"P{counter}"
                sex = rng.choice(["female", "male"])
                rows.append(dict(person=code, sex_at_birth=sex, mother=mo, father=fa))
                nxt_blood.append((code, sex))
        generation = []
        for code, sex in nxt_blood:
            for _ in range(rng.choice([0, 1, 1, 2])):
                counter += 1
                partner = f"S{counter}"
                rows.append(dict(person=partner, sex_at_birth="male" if sex == "female" else "female"))
                generation.append((code, partner) if sex == "female" else (partner, code))
        rng.shuffle(generation)
        generation = generation[:4]
    return rows


def _random_mating_family(seed: int):
    """Several founder couples; later couples are drawn at random among unrelated people
    (no inbreeding, but double relationships such as double first cousins can occur)."""
    rng = random.Random(seed)
    rows, people = [], []
    for i in range(6):
        rows.append(dict(person=f"R{i}"))
        people.append(f"R{i}")
    g = nx.DiGraph()
    g.add_nodes_from(people)
    counter = 0
    for _gen in range(3):
        pool = people[:]
        rng.shuffle(pool)
        made = []
        for _ in range(4):
            a, b = rng.sample(pool, 2)
            anc_a = nx.ancestors(g, a) | {a}
            anc_b = nx.ancestors(g, b) | {b}
            if anc_a & anc_b:
                continue  # related: skip to keep the pedigree non-inbred
            for _ in range(rng.randint(1, 3)):
                counter += 1
                code = f"C{counter}"
                rows.append(dict(person=code, mother=a, father=b))
                g.add_edge(a, code)
                g.add_edge(b, code)
                made.append(code)
        people += made
    return rows


def _digraph(rows) -> nx.DiGraph:
    g = nx.DiGraph()
    for r in rows:
        g.add_node(r["person"])
        for role in ("mother", "father"):
            if r.get(role):
                g.add_edge(r[role], r["person"])
    return g


def _wright_r(g: nx.DiGraph, a: str, b: str) -> Fraction:
    """Wright 1922 by path enumeration with networkx (non-inbred: F_A = 0)."""
    anc_a = nx.ancestors(g, a) | {a}
    anc_b = nx.ancestors(g, b) | {b}
    total = Fraction(0)
    for c in anc_a & anc_b:
        paths_a = [[a]] if c == a else list(nx.all_simple_paths(g, c, a))
        paths_b = [[b]] if c == b else list(nx.all_simple_paths(g, c, b))
        for pa in paths_a:
            for pb in paths_b:
                if set(pa) & set(pb) == {c}:
                    total += Fraction(1, 2 ** ((len(pa) - 1) + (len(pb) - 1)))
    return total


@pytest.mark.parametrize("seed", range(12))
def test_outbred_random_pedigree_matches_networkx(seed):
    rows = _random_outbred_family(seed)
    p = ped(rows)
    g = _digraph(rows)
    assert nx.is_directed_acyclic_graph(g)
    codes = [r["person"] for r in rows]
    pairs = [(a, b) for i, a in enumerate(codes) for b in codes[i + 1:]]
    lcas = dict(nx.all_pairs_lowest_common_ancestor(g, pairs))
    for a, b in pairs:
        rel = p.relationship(a, b)
        assert rel.r == _wright_r(g, a, b), (a, b)  # Wright 1922 path sum (networkx paths)
        if (a, b) not in lcas:
            assert rel.degree is None and rel.r == 0
            continue
        lca = lcas[(a, b)]
        meioses = nx.shortest_path_length(g, lca, a) + nx.shortest_path_length(g, lca, b)
        assert lca in rel.common_ancestors
        assert rel.meioses == meioses
        lineal = lca in (a, b)
        common = (nx.ancestors(g, a) | {a}) & (nx.ancestors(g, b) | {b})
        at_min = [c for c in common
                  if nx.shortest_path_length(g, c, a) + nx.shortest_path_length(g, c, b) == meioses]
        full = not lineal and len(at_min) == 2
        # property: degree = meioses on the shortest line through a lowest common ancestor,
        # less one when the line runs through a couple (full relationship)
        assert rel.degree == meioses - (1 if full else 0), (a, b, rel)
        assert rel.r == (Fraction(2 if full else 1, 2**meioses) if not lineal else Fraction(1, 2**meioses))


@pytest.mark.parametrize("seed", range(10))
def test_random_mating_pedigree_matches_networkx(seed):
    rows = _random_mating_family(seed)
    p = ped(rows)
    g = _digraph(rows)
    codes = [r["person"] for r in rows]
    pairs = [(a, b) for i, a in enumerate(codes) for b in codes[i + 1:]]
    lcas = dict(nx.all_pairs_lowest_common_ancestor(g, pairs))
    for a, b in pairs:
        rel = p.relationship(a, b)
        r = _wright_r(g, a, b)
        assert rel.r == r, (a, b)
        assert p.kinship(a, b) == r / 2  # Wright 1922: phi = r/2 without inbreeding
        assert (rel.degree is None) == ((a, b) not in lcas)
        if rel.degree is not None:
            lca = lcas[(a, b)]
            common = (nx.ancestors(g, a) | {a}) & (nx.ancestors(g, b) | {b})
            dist = {c: nx.shortest_path_length(g, c, a) + nx.shortest_path_length(g, c, b) for c in common}
            meioses = min(dist.values())
            assert dist[lca] >= meioses
            assert rel.meioses == meioses
            lineal = any(c in (a, b) for c in common if dist[c] == meioses)
            n_min = sum(1 for c in common if dist[c] == meioses)
            path_degree = meioses - (1 if (not lineal and n_min >= 2) else 0)
            # nearer degree when several lines make them as close (double first cousins)
            expected = max(1, min(path_degree, math.ceil(-math.log2(r) - 1e-9)))
            assert rel.degree == expected
    for c in codes:
        assert p.inbreeding(c) == 0
