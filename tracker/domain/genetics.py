"""Genotype status of each family member for the family's heritable variant.

Input: a :class:`~tracker.domain.pedigree.Pedigree`, a frame of genetic
results (columns ``person, test_date, test_type, variant, result``; result one
of ``carrier``, ``non_carrier``, ``inconclusive``, ``no_variant_found``), and
the family variant's current ACMG/AMP class (``pathogenic``,
``likely_pathogenic``, ``uncertain_significance``, ``likely_benign``,
``benign``, or None when no variant was found / nobody tested yet).

Output (:func:`genotype_statuses`): one :class:`GenotypeStatus` per person,
with a status, the probability of carrying the variant, and a reason a nurse
can read ("child of carrier II-2, untested: 1/2").

Statuses
--------
``carrier``           tested carrier; a monozygotic co-twin of one (inferred);
                      or an untested obligate carrier (inferred).
``non_carrier``       tested non-carrier, or monozygotic co-twin of one (inferred).
``at_risk_untested``  untested, probability of carrying > 0 (given).
``not_at_risk``       untested, probability 0 (descendant of a non-carrier, the
                      other side of the family, not a blood relative).
``uncertain``         the family variant is not P/LP (VUS: no predictive
                      meaning; LB/B: no predictive meaning; none found: the
                      family is screened clinically only), or the results
                      conflict or cannot be explained (see reason).

Only a P/LP variant gives genotypes a predictive meaning (ACMG/AMP 2015
classes; VUS: no cascade testing, ESC 2023 [V]; LB/B: cascade testing of no
benefit, AHA 2024 class 3 and ESC 2023 III C [V]).  Inconclusive results count
as untested.  A diagnostic panel reported "no variant found" for a relative
also counts as untested (the panel may not have covered the family variant:
a conservative choice).  Two different definitive results for one person
(or for monozygotic co-twins) make the person ``uncertain`` until resolved.

How the probability is computed
-------------------------------
The usual rules (1st degree 1/2: van Velzen et al., Circ Genom Precis Med
2018, editorial [V]; the rest common practice, from memory, verify [M]) are: 1/2 per
meiosis along the blood line from the nearest carrier (first-degree 1/2,
second 1/4, third 1/8) while the relatives in between are untested; a
genotype overrides any prior; a non-carrier in between removes the risk of
everyone below them; once the transmitting parent is known the other side
of the family is not at risk; a monozygotic co-twin has the same genotype;
first-degree relatives of an obligate carrier are at 1/2 (Dunn et al., Circ
Cardiovasc Genet 2013, Fig. 5 [V]).

They are applied here as one exact calculation rather than rule by rule
(common practice for pedigree risk calculation; the model's details are from
memory, verify): the variant is rare, so it entered the pedigree once, through
one founder (a person with no recorded parents, or an unrecorded parent of
someone with one recorded parent), each founder equally likely a priori; a
carrier passes it to each child with probability 1/2; a non-carrier passes
nothing.  Given every definitive test result, the probability that each
untested person carries the variant is the posterior under this model
(Mendelian transmission on the pedigree tree, summed over the possible
founders).  Without other results this gives exactly the 1/2 per meiosis
figures above (r with the nearest carrier); it also yields obligate carriers
(probability 1: every way the variant can have reached a tested carrier
passes through them), the zero below a non-carrier, and the zero on the other
side once the transmitting parent is known.  When results on one side make
that side a less likely source, the figure moves accordingly (for example a
tested non-carrier grandparent shifts weight to the other side) and the
reason says "adjusted for the other results in the family".

Obligate carrier rule used (a consequence of the model, stated plainly): an
untested person is an obligate carrier when every founder who could have
brought the variant to the tested carriers is their ancestor or themselves
and every line from those founders to some tested carrier passes through
them, e.g. the untested parent of a carrier whose own parent is a carrier,
or an untested person with carrier children by different partners.  Limits:
the model assumes one entry of the variant (two independent entries, e.g.
a carrier marrying into the family, are ignored), full penetrance plays no
part (affected status is not used: phenocopies exist), and non-paternity,
sample errors and germline mosaicism are not modelled.  When the results can
only be explained by the variant arising anew (both parents of a carrier test
negative), a de novo origin in one member is assumed; siblings of a de novo
carrier then show probability 0 although parental germline mosaicism leaves
a small risk (the reason says so; the clinician decides).  When no
explanation fits, everyone untested is ``uncertain``.

Consanguinity (a person whose parents both descend from a candidate founder)
is handled by exact enumeration over the untested people below that founder
(up to :data:`MAX_LOOP_UNKNOWNS`); larger loops make the untested people
``uncertain`` with a request for manual calculation.  In a loop a carrier
parent is taken to transmit with probability 1/2 (homozygosity ignored).

Decision support only: probabilities are population-genetic estimates; the
treating clinician and genetics team decide, following local protocols and
the current guideline.
"""

from __future__ import annotations

from typing import TYPE_CHECKING

import datetime as dt
from collections import deque
from collections.abc import Iterator, Mapping
from dataclasses import dataclass, field
from fractions import Fraction

from tracker.domain.pedigree import Pedigree, _blank  # one definition of an empty cell

if TYPE_CHECKING:  # for annotations only: loaded where used, so start-up stays light
    import numpy as np
    import pandas as pd

ACMG_CLASSES = (
    "pathogenic",
    "likely_pathogenic",
    "uncertain_significance",
    "likely_benign",
    "benign",
)
ACTIONABLE_CLASSES = frozenset({"pathogenic", "likely_pathogenic"})
STATUSES = ("carrier", "non_carrier", "at_risk_untested", "not_at_risk", "uncertain")
RESULTS = ("carrier", "non_carrier", "inconclusive", "no_variant_found")

# Consanguineous loops are solved by enumerating 2**k genotype combinations.
MAX_LOOP_UNKNOWNS = 16

CAUTION = (
    "Decision support only: genotype probabilities are estimates from the recorded pedigree and "
    "results under a rare-variant, autosomal-dominant model; the treating clinician and genetics "
    "team decide, following local protocols and the current guideline. Check the variant's "
    "classification date and re-review it."
)

_CLASS_WORDS = {
    "pathogenic": "pathogenic",
    "likely_pathogenic": "likely pathogenic",
    "uncertain_significance": "of uncertain significance (VUS)",
    "likely_benign": "likely benign",
    "benign": "benign",
}

_HALF = Fraction(1, 2)


@dataclass(frozen=True)
class GenotypeStatus:
    """Genotype status of one person for the family variant.

    ``probability`` is P(carrying the variant) as an exact fraction (1 for
    carriers, 0 for non-carriers and people not at risk), None when
    ``uncertain``.  ``basis``: 'tested', 'mz_co_twin', 'obligate',
    'pedigree' (at risk), 'excluded' (blood relative with probability 0),
    'unrelated', 'class' (variant not P/LP), 'conflict', 'no_carrier',
    'unexplained', 'too_complex'.  ``tested_result`` is the person's own
    definitive result ('carrier'/'non_carrier'), ``inferred_from`` the
    monozygotic co-twin whose result is applied, ``nearest_carrier`` the
    carrier the probability is quoted from.
    """

    person: str
    status: str
    probability: Fraction | None
    basis: str
    inferred: bool
    reason: str
    tested_result: str | None = None
    test_date: dt.date | None = None
    inferred_from: str | None = None
    nearest_carrier: str | None = None

    @property
    def probability_text(self) -> str:
        return probability_text(self.probability)

    @property
    def is_carrier(self) -> bool:
        return self.status == "carrier"


def probability_text(p: Fraction | None) -> str:
    """'1/2', '1/8', '1', '0'; a percentage for awkward fractions; '' for None."""
    if p is None:
        return ""
    if p == 0:
        return "0"
    if p == 1:
        return "1"
    if p.denominator <= 1024:
        return f"{p.numerator}/{p.denominator}"
    return f"{float(p):.1%}"


class FamilyGenotypes(Mapping):
    """Statuses by person code, plus what the calculation assumed.

    ``mode``: 'inherited' (single founder), 'de_novo', 'unexplained',
    'too_complex', 'no_carrier' (P/LP class but no carrier recorded) or
    'not_actionable' (class is not P/LP).
    """

    def __init__(
        self,
        statuses: Mapping[str, GenotypeStatus],
        variant_class: str | None,
        variant: str | None,
        mode: str,
        notes: tuple[str, ...] = (),
    ):
        self._statuses = dict(statuses)
        self.variant_class = variant_class
        self.variant = variant
        self.mode = mode
        self.notes = notes
        self.caution = CAUTION

    def __getitem__(self, person: str) -> GenotypeStatus:
        return self._statuses[person]

    def __iter__(self) -> Iterator[str]:
        return iter(self._statuses)

    def __len__(self) -> int:
        return len(self._statuses)

    def carriers(self) -> tuple[str, ...]:
        return tuple(p for p, s in self._statuses.items() if s.status == "carrier")

    def frame(self) -> pd.DataFrame:
        """Columns: person, status, probability (float or NaN), probability_text,
        basis, inferred, reason, tested_result, test_date, inferred_from,
        nearest_carrier."""
        import pandas as pd

        rows = []
        for s in self._statuses.values():
            rows.append(
                {
                    "person": s.person,
                    "status": s.status,
                    "probability": float(s.probability) if s.probability is not None else float("nan"),
                    "probability_text": s.probability_text,
                    "basis": s.basis,
                    "inferred": s.inferred,
                    "reason": s.reason,
                    "tested_result": s.tested_result,
                    "test_date": s.test_date,
                    "inferred_from": s.inferred_from,
                    "nearest_carrier": s.nearest_carrier,
                }
            )
        return pd.DataFrame(rows)


# ---------------------------------------------------------------------------
# results
# ---------------------------------------------------------------------------




def _as_date(v: object) -> dt.date | None:
    import pandas as pd

    if _blank(v):
        return None
    if isinstance(v, pd.Timestamp):
        return v.date()
    if isinstance(v, dt.datetime):
        return v.date()
    if isinstance(v, dt.date):
        return v
    return dt.date.fromisoformat(str(v).strip())


@dataclass
class _Own:
    value: str | None = None  # 'carrier' / 'non_carrier'
    date: dt.date | None = None
    conflict: bool = False
    seen: dict[str, dt.date | None] = field(default_factory=dict)
    notes: list[str] = field(default_factory=list)


def _read_results(ped: Pedigree, results: pd.DataFrame | None, variant: str | None) -> dict[str, _Own]:
    from tracker.domain.records import frame_records

    own: dict[str, _Own] = {}
    if results is None or len(results) == 0:
        return own
    for col in ("person", "result"):
        if col not in results.columns:
            raise ValueError(f"the results frame needs a {col!r} column")
    for row in frame_records(results):
        person = None if _blank(row.get("person")) else str(row["person"]).strip()
        if person is None or person not in ped:
            continue
        result = None if _blank(row.get("result")) else str(row["result"]).strip()
        if result not in RESULTS:
            raise ValueError(f"person {person}: result {result!r} is not one of {', '.join(RESULTS)}")
        key = None if _blank(row.get("variant")) else str(row["variant"]).strip()
        when = _as_date(row.get("test_date"))
        when_txt = when.isoformat() if when else "undated"
        o = own.setdefault(person, _Own())
        if result == "inconclusive":
            o.notes.append(f"inconclusive result ({when_txt}) counted as untested")
            continue
        if result == "no_variant_found":
            o.notes.append(
                f"diagnostic panel found no variant ({when_txt}): counted as untested; "
                "check the panel covered the family variant"
            )
            continue
        if variant is not None and key is not None and key != variant:
            continue  # a result for another variant
        if variant is not None and key is None:
            o.notes.append(f"{result} result ({when_txt}) names no variant: not used")
            continue
        if row.get("external") in (True,):  # revision 0012: a test at another centre counts, marked as such
            o.notes.append(f"{result} result ({when_txt}) from another centre: {row.get('lab')}")
        prev = o.seen.get(result)
        if result not in o.seen or (when is not None and (prev is None or when > prev)):
            o.seen[result] = when
    for o in own.values():
        if len(o.seen) > 1:
            o.conflict = True
        elif len(o.seen) == 1:
            (o.value, o.date), = o.seen.items()
    return own


# ---------------------------------------------------------------------------
# the single-entry transmission model
# ---------------------------------------------------------------------------


class _TooComplex(Exception):
    pass


def _descendants(ped: Pedigree, root: str) -> set[str]:
    seen = {root}
    queue = deque([root])
    while queue:
        n = queue.popleft()
        for c in ped.genetic_children(n):
            if c not in seen:
                seen.add(c)
                queue.append(c)
    return seen


def _tree_posterior(ped: Pedigree, root: str, order: list[str], obs: Mapping[str, int]):
    """Exact pass on a tree: likelihood of the results with ``root`` a carrier,
    and P(carrier) for each node of the tree."""
    l0: dict[str, Fraction] = {}
    l1: dict[str, Fraction] = {}
    for v in reversed(order):
        o = obs.get(v)
        a0 = Fraction(0) if o == 1 else Fraction(1)
        a1 = Fraction(0) if o == 0 else Fraction(1)
        for c in ped.genetic_children(v):
            a0 *= l0[c]
            a1 *= _HALF * (l1[c] + l0[c])
        l0[v], l1[v] = a0, a1
    lik = l1[root]
    if lik == 0:
        return Fraction(0), {}
    post = {root: Fraction(1)}
    for v in order:
        pv = post[v]
        for c in ped.genetic_children(v):
            if pv == 0:
                post[c] = Fraction(0)
            else:
                post[c] = pv * (_HALF * l1[c]) / (_HALF * (l1[c] + l0[c]))
    return lik, post


def _loop_posterior(ped: Pedigree, root: str, order: list[str], members: set[str], obs: Mapping[str, int]):
    """Exact enumeration when some node has both parents below ``root``."""
    import numpy as np

    if obs.get(root) == 0:
        return Fraction(0), {}
    free = [n for n in order if n != root and obs.get(n) is None]
    if len(free) > MAX_LOOP_UNKNOWNS:
        raise _TooComplex
    idx = {n: i for i, n in enumerate(order)}
    count = 2 ** len(free)
    g = np.zeros((count, len(order)), dtype=np.float64)
    g[:, idx[root]] = 1.0
    for n in order:
        if n != root and obs.get(n) is not None:
            g[:, idx[n]] = float(obs[n])
    codes = np.arange(count)
    for j, n in enumerate(free):
        g[:, idx[n]] = (codes >> j) & 1
    w = np.ones(count)
    for n in order:
        if n == root:
            continue
        not_passed = np.ones(count)
        for p in ped.genetic_parents(n):
            if p is not None and p in members:
                not_passed *= 1.0 - 0.5 * g[:, idx[p]]
        p1 = 1.0 - not_passed
        w *= np.where(g[:, idx[n]] == 1.0, p1, 1.0 - p1)
    total = float(w.sum())
    if total == 0.0:
        return Fraction(0), {}
    post = {}
    for n in order:
        num = float((w * g[:, idx[n]]).sum())
        post[n] = _tidy(num / total, exact_zero=num == 0.0, exact_one=num == total)
    return Fraction(total), post


def _tidy(x: float, exact_zero: bool, exact_one: bool) -> Fraction:
    """A float probability as a short fraction when one matches it closely;
    0 and 1 only when they are exact (so no one becomes an obligate carrier
    or drops out of risk by rounding)."""
    if exact_zero:
        return Fraction(0)
    if exact_one:
        return Fraction(1)
    f = Fraction(x).limit_denominator(1 << 20)
    if f in (0, 1) or abs(float(f) - x) > 1e-12:
        return Fraction(x)
    return f


def _posterior(ped: Pedigree, obs: Mapping[str, int], hypotheses: list[tuple[str, Fraction]]):
    """Sum over the candidate entry points.  Returns (P(carrier) per node,
    roots with positive weight) or (None, []) when nothing explains the results."""
    carriers = {n for n, v in obs.items() if v == 1}
    total = Fraction(0)
    acc: dict[str, Fraction] = {}
    roots: list[str] = []
    for root, weight in hypotheses:
        members = _descendants(ped, root)
        if not carriers <= members:
            continue
        order = [n for n in ped.genetic_nodes() if n in members]
        loop = any(
            sum(1 for p in ped.genetic_parents(n) if p is not None and p in members) == 2
            for n in order
            if n != root
        )
        if loop:
            lik, post = _loop_posterior(ped, root, order, members, obs)
        else:
            lik, post = _tree_posterior(ped, root, order, obs)
        lik *= weight
        if lik == 0:
            continue
        roots.append(root)
        total += lik
        for n, p in post.items():
            acc[n] = acc.get(n, Fraction(0)) + lik * p
    if total == 0:
        return None, []
    return {n: acc.get(n, Fraction(0)) / total for n in ped.genetic_nodes()}, roots


def _founder_hypotheses(ped: Pedigree) -> list[tuple[str, Fraction]]:
    out = []
    for n in ped.genetic_nodes():
        missing = sum(1 for p in ped.genetic_parents(n) if p is None)
        if missing == 2:
            out.append((n, Fraction(1)))
        elif missing == 1:
            # the unrecorded parent is a founder who passes the variant on with 1/2
            out.append((n, _HALF))
    return out


def carrier_probabilities(ped: Pedigree, observed: Mapping[str, int]) -> tuple[dict[str, Fraction] | None, str]:
    """P(carrier) for every genotype node given observed genotypes
    (node -> 1 carrier / 0 non-carrier; at least one carrier).

    Returns (probabilities, mode) with mode 'inherited', 'de_novo',
    'unexplained' (probabilities None) or 'too_complex' (None)."""
    try:
        probs, _ = _posterior(ped, observed, _founder_hypotheses(ped))
        if probs is not None:
            return probs, "inherited"
        probs, _ = _posterior(ped, observed, [(n, Fraction(1)) for n in ped.genetic_nodes()])
        if probs is not None:
            return probs, "de_novo"
        return None, "unexplained"
    except _TooComplex:
        return None, "too_complex"


def _de_novo_roots(ped: Pedigree, observed: Mapping[str, int]) -> list[str]:
    _, roots = _posterior(ped, observed, [(n, Fraction(1)) for n in ped.genetic_nodes()])
    return roots


# ---------------------------------------------------------------------------
# statuses
# ---------------------------------------------------------------------------


def _result_phrase(o: _Own | None) -> str:
    if o is None or o.value is None:
        return "untested"
    when = o.date.isoformat() if o.date else "undated"
    return ("carries the variant" if o.value == "carrier" else "does not carry the variant") + f" (tested {when})"


def _notes_suffix(o: _Own | None) -> str:
    return f" [{'; '.join(o.notes)}]" if o is not None and o.notes else ""


def genotype_statuses(
    pedigree: Pedigree,
    results: pd.DataFrame | None,
    variant_class: str | None,
    variant: str | None = None,
) -> FamilyGenotypes:
    """Genotype status of every person in ``pedigree`` for the family variant.

    ``variant`` (``transcript:hgvs_c`` key) restricts the results used to
    that variant; None uses every carrier/non-carrier result given.
    """
    if variant_class is not None and variant_class not in ACMG_CLASSES:
        raise ValueError(f"unknown ACMG/AMP class {variant_class!r}")
    own = _read_results(pedigree, results, variant)

    if variant_class not in ACTIONABLE_CLASSES:
        return _not_actionable(pedigree, own, variant_class, variant)

    # genotype observations per node (monozygotic co-twins share one node)
    node_values: dict[str, set[str]] = {}
    for person, o in own.items():
        n = pedigree.genotype_node(person)
        if o.conflict:
            node_values.setdefault(n, set()).update(o.seen)
        elif o.value is not None:
            node_values.setdefault(n, set()).add(o.value)
    conflict_nodes = {n for n, v in node_values.items() if len(v) > 1}
    observed = {
        n: (1 if next(iter(v)) == "carrier" else 0) for n, v in node_values.items() if n not in conflict_nodes
    }

    if not any(v == 1 for v in observed.values()):
        probs, mode = None, "no_carrier"
    else:
        probs, mode = carrier_probabilities(pedigree, observed)
    notes: list[str] = []
    de_novo_roots: list[str] = []
    if mode == "de_novo":
        de_novo_roots = _de_novo_roots(pedigree, observed)
        where = ", ".join(p for r in de_novo_roots for p in pedigree.genotype_members(r))
        notes.append(
            f"the results fit only a variant that arose anew (in {where}); parental germline "
            "mosaicism leaves a small risk to siblings that is not shown"
        )

    statuses: dict[str, GenotypeStatus] = {}
    # first pass: tested, twin-inferred, conflicts, and anything without a model
    pending: list[str] = []
    for person in pedigree.people:
        o = own.get(person)
        node = pedigree.genotype_node(person)
        suffix = _notes_suffix(o)
        if node in conflict_nodes:
            statuses[person] = GenotypeStatus(
                person, "uncertain", None, "conflict", False,
                "conflicting results for this person or their monozygotic co-twin "
                f"({', '.join(sorted(node_values[node]))}): resolve with the laboratory" + suffix,
            )
            continue
        if o is not None and o.value is not None:
            when = o.date.isoformat() if o.date else "undated"
            if o.value == "carrier":
                st = GenotypeStatus(person, "carrier", Fraction(1), "tested", False,
                                    f"tested carrier ({when})" + suffix, "carrier", o.date)
            else:
                st = GenotypeStatus(person, "non_carrier", Fraction(0), "tested", False,
                                    f"tested non-carrier ({when})" + suffix, "non_carrier", o.date)
            statuses[person] = st
            continue
        if node in observed:
            twin = next(
                q for q in pedigree.genotype_members(node)
                if own.get(q) is not None and own[q].value is not None
            )
            value = own[twin].value
            word = "carrier" if value == "carrier" else "non-carrier"
            statuses[person] = GenotypeStatus(
                person, "carrier" if value == "carrier" else "non_carrier",
                Fraction(1) if value == "carrier" else Fraction(0), "mz_co_twin", True,
                f"monozygotic co-twin of {twin} (tested {word}): same genotype, inferred" + suffix,
                None, None, twin,
            )
            continue
        if probs is None:
            reason = {
                "no_carrier": "family variant is P/LP but no carrier is recorded in this pedigree: "
                "record the index patient's result",
                "unexplained": "the recorded results cannot be explained by dominant inheritance from a "
                "single source (sample error, non-paternity, mosaicism?): review with the genetics team",
                "too_complex": "consanguineous pedigree too complex for the automatic calculation: "
                "the genetics team calculates the risk",
            }[mode]
            statuses[person] = GenotypeStatus(person, "uncertain", None, mode, False, reason + suffix)
            continue
        pending.append(person)

    assert probs is not None or not pending
    carriers_known = {p for p, s in statuses.items() if s.status == "carrier"}
    obligate = [p for p in pending if probs[pedigree.genotype_node(p)] == 1]  # type: ignore[index]
    for person in obligate:
        statuses[person] = GenotypeStatus(
            person, "carrier", Fraction(1), "obligate", True,
            _obligate_reason(pedigree, person, carriers_known) + _notes_suffix(own.get(person)),
        )
    all_carriers = [p for p in pedigree.people if p in statuses and statuses[p].status == "carrier"]
    non_carriers = {p for p, s in statuses.items() if s.status == "non_carrier"}
    for person in pending:
        if person in statuses:
            continue
        p = probs[pedigree.genotype_node(person)]  # type: ignore[index]
        suffix = _notes_suffix(own.get(person))
        if p == 0:
            basis, reason = _zero_reason(pedigree, person, all_carriers, non_carriers, probs, de_novo_roots)
            statuses[person] = GenotypeStatus(person, "not_at_risk", Fraction(0), basis, False, reason + suffix)
        else:
            nearest, reason = _at_risk_reason(pedigree, person, p, all_carriers, statuses)
            statuses[person] = GenotypeStatus(
                person, "at_risk_untested", p, "pedigree", False, reason + suffix, nearest_carrier=nearest
            )
    ordered = {p: statuses[p] for p in pedigree.people}
    return FamilyGenotypes(ordered, variant_class, variant, mode, tuple(notes))


def _not_actionable(ped: Pedigree, own: dict[str, _Own], variant_class: str | None, variant: str | None):
    if variant_class is None:
        head = "no P/LP variant identified in the family (or no genetic testing yet)"
    else:
        head = f"family variant classified {_CLASS_WORDS[variant_class]}"
    tail = "genotype has no predictive meaning; clinical screening only"
    statuses = {}
    for person in ped.people:
        o = own.get(person)
        if o is not None and o.conflict:
            phrase = "conflicting results recorded"
        else:
            phrase = _result_phrase(o)
        statuses[person] = GenotypeStatus(
            person, "uncertain", None, "class", False,
            f"{head}: {phrase}; {tail}" + _notes_suffix(o),
            o.value if o is not None and not o.conflict else None,
            o.date if o is not None and not o.conflict else None,
        )
    return FamilyGenotypes(statuses, variant_class, variant, "not_actionable")


def _nearest_carrier(ped: Pedigree, person: str, carriers: list[str]) -> str | None:
    best = None
    best_key = None
    for k in carriers:
        rel = ped.relationship(person, k)
        if rel.degree is None:
            continue
        key = (-rel.r, rel.degree, ped.people.index(k))
        if best_key is None or key < best_key:
            best, best_key = k, key
    return best


def _at_risk_reason(ped: Pedigree, person: str, p: Fraction, carriers: list[str], statuses) -> tuple[str | None, str]:
    k = _nearest_carrier(ped, person, carriers)
    if k is None:  # pragma: no cover - p > 0 implies a related carrier
        return None, f"untested: {probability_text(p)}"
    kind = "obligate carrier" if statuses[k].basis == "obligate" else "carrier"
    words = ped.relationship(k, person).label  # what the person is to the carrier
    reason = f"{words} of {kind} {k}, untested: {probability_text(p)}"
    if p != ped.coefficient_of_relationship(person, k):
        reason += " (adjusted for the other results in the family)"
    return k, reason


def _obligate_reason(ped: Pedigree, person: str, tested_carriers: set[str]) -> str:
    below = [d for d in ped.descendants(person) if d in tested_carriers]
    if below:
        gens = {d: ped.relationship(person, d).meioses or 0 for d in below}
        closest = min(gens.values())
        shown = [d for d in ped.people if d in gens and gens[d] == closest][:3]
        return (
            f"obligate carrier (untested): the variant in carrier {', '.join(shown)} can only have "
            "passed through them"
        )
    return "obligate carrier (untested): the recorded results leave no other route for the variant"


def _zero_reason(ped, person, carriers, non_carriers, probs, de_novo_roots) -> tuple[str, str]:
    m = ped.member(person)
    related = [k for k in carriers if ped.kinship(person, k) > 0]
    if not related:
        if m.adoption == "in":
            return "unrelated", "adopted in: not a blood relative of the carriers: not at risk from this variant"
        return "unrelated", "not a blood relative of a known carrier: not at risk from this variant"
    anc = ped.ancestors(person)
    if de_novo_roots:
        where = [p for r in de_novo_roots for p in ped.genotype_members(r)]
        sibs = {s for w in where for s in ped.full_siblings(w) + ped.half_siblings(w)}
        if person in sibs:
            return "excluded", (
                f"sibling of {', '.join(where)}, in whom the variant appears to have arisen anew: "
                "probability 0 shown, but parental germline mosaicism leaves a small risk (clinician decides)"
            )
    below = [q for q in non_carriers if q in anc]
    if below:
        nearest = min(below, key=lambda q: (ped.relationship(person, q).meioses or 0, ped.people.index(q)))
        return "excluded", f"descendant of non-carrier {nearest}: not at risk from this variant"
    own_line = anc | {person}
    related.sort(key=lambda k: (-ped.coefficient_of_relationship(person, k), ped.people.index(k)))
    for k in related:
        for t in ped.parents(k):
            if t not in own_line and probs[ped.genotype_node(t)] == 1:
                return "excluded", (
                    f"other side of the family: carrier {k} inherited the variant from {t}: "
                    "not at risk from this variant"
                )
    return "excluded", "the recorded results exclude this line of descent: not at risk from this variant"


# ---------------------------------------------------------------------------
# counselling practice: stepwise cascade, release by class, re-review
# ---------------------------------------------------------------------------

SRC_STEPWISE = (
    "ESC 2023: cascade testing starts with first-degree relatives and widens stepwise as carriers are "
    "found [V]; offering the at-risk parent first (the child's risk depends on the parent's result) is "
    "common practice"
)


@dataclass(frozen=True)
class StepwiseRoute:
    """Who to offer predictive testing before ``person``.

    ``first``: the at-risk, untested relative between the person and the nearest carrier who
    can be offered testing now (None: offer the person directly).  ``passed``: relatives on the line
    who were passed over, with why (declined, deceased, lost to follow-up, placeholder)."""

    person: str
    first: str | None
    passed: tuple[str, ...] = ()

    @property
    def deferred(self) -> bool:
        return self.first is not None

    def reason(self) -> str:
        if self.first is not None:
            return (
                f"stepwise cascade: offer predictive testing to {self.first} (at risk, untested) first; "
                f"if {self.first} does not carry the variant, {self.person} is not at risk. "
                f"Offer {self.person} directly if {self.first} declines or dies"
            )
        if self.passed:
            return "offered directly: " + "; ".join(self.passed)
        return ""


def _passed_over(m) -> str | None:
    """Why an at-risk relative cannot be offered testing first (None: they can)."""
    if m.placeholder:
        return f"{m.person} is drawn only to connect the pedigree"
    if m.vital_status == "deceased":
        return f"{m.person} has died"
    if m.contact_status == "declined":
        return f"{m.person} declined"
    if m.contact_status == "lost_to_follow_up":
        return f"{m.person} is lost to follow-up"
    return None


def stepwise_route(pedigree: Pedigree, statuses: Mapping[str, GenotypeStatus], person: str) -> StepwiseRoute:
    """The stepwise-cascade route of an at-risk untested person (see :class:`StepwiseRoute`).

    A first-degree relative of a carrier (tested, obligate or by monozygotic co-twin) is
    offered testing directly.  A more distant relative of degree d from the nearest carrier
    waits for their first-degree relatives of degree d-1 from that carrier who are at risk
    and untested (the parent of a grandchild, the sibling of the carrier for a niece): the
    first one who is alive (or of unknown vital status), not a placeholder, and has neither
    declined nor been lost to follow-up is offered testing first.  Those who cannot be asked
    are passed over and the walk goes on through them towards the carrier; when nobody is
    left the person is offered testing directly.  Common practice (ESC 2023: cascade testing
    starts with first-degree relatives and widens stepwise [V])."""
    k = statuses[person].nearest_carrier
    if k is None:
        return StepwiseRoute(person, None)
    degree = pedigree.relationship(person, k).degree
    if degree is None or degree <= 1:
        return StepwiseRoute(person, None)
    passed: list[str] = []
    frontier, seen = [person], {person}
    while degree > 1 and frontier:
        nxt = []
        for f in frontier:
            for q in pedigree.first_degree_relatives(f):
                if q in seen or q not in statuses or statuses[q].status != "at_risk_untested":
                    continue
                if pedigree.relationship(q, k).degree != degree - 1:
                    continue
                seen.add(q)
                why = _passed_over(pedigree.member(q))
                if why is None:
                    return StepwiseRoute(person, q, tuple(passed))
                passed.append(why)
                nxt.append(q)
        frontier, degree = nxt, degree - 1
    return StepwiseRoute(person, None, tuple(passed))


@dataclass(frozen=True)
class ReleaseBasis:
    """What a genotype-negative discharge relied on: the P/LP class in force on ``released_on``
    = max(result date, the date the class last became P/LP)."""

    relied_class: str
    classified_on: dt.date | None  # date of the classification relied on
    plp_since: dt.date | None  # date the class last became P/LP (None: unknown)
    released_on: dt.date | None

    def words(self) -> str:
        cls = _CLASS_WORDS[self.relied_class]
        when = f" (classified {self.classified_on.isoformat()})" if self.classified_on else ""
        on = f"released {self.released_on.isoformat()}" if self.released_on else "released (undated)"
        return f"{on}, relying on the class {cls}{when}"


def history_pairs(history) -> list[tuple[dt.date | None, str]]:
    out = []
    for h in history:
        if isinstance(h, tuple):
            out.append((h[0], h[1]))
        else:
            out.append((h.classified_on, h.acmg_class))
    return out


def release_basis(history, result_date: dt.date | None) -> ReleaseBasis | None:
    """The class a genotype-negative result released the person on, from the variant's class
    history (oldest first; ``(date, class)`` pairs or objects with ``classified_on`` and
    ``acmg_class``) as it stands.  None when the latest class is not P/LP (no release: a
    non-carrier result under a VUS/LB/B class releases nobody)."""
    pairs = history_pairs(history)
    if not pairs or pairs[-1][1] not in ACTIONABLE_CLASSES:
        return None
    i = len(pairs) - 1
    while i > 0 and pairs[i - 1][1] in ACTIONABLE_CLASSES:
        i -= 1
    plp_since = pairs[i][0]
    if result_date is None:
        released = plp_since
    elif plp_since is None:
        released = result_date
    else:
        released = max(result_date, plp_since)
    relied = pairs[i]
    for d, c in pairs[i:]:
        if d is None or released is None or d <= released:
            relied = (d, c)
    return ReleaseBasis(relied[1], relied[0], plp_since, released)


def result_date_for_release(statuses: Mapping[str, GenotypeStatus], person: str) -> dt.date | None:
    """The date of the non-carrier result a person's status rests on (a monozygotic co-twin's
    result for an inferred status)."""
    st = statuses[person]
    if st.inferred_from is not None and st.inferred_from in statuses:
        return statuses[st.inferred_from].test_date
    return st.test_date


# Re-review of the variant's class.  AHA 2024 (1 B-NR): re-evaluate the variant's significance at
# intervals [V]; ESC 2023: systematic reclassification, results passed on to families [V].  Neither
# gives an interval: the 24-month default is common practice (the clinic sets its own in
# [cascade] variant_rereview_months).
DEFAULT_REREVIEW_MONTHS = 24
SRC_REREVIEW = (
    "AHA 2024 (1 B-NR): re-evaluate the variant's significance at intervals [V]; ESC 2023: systematic "
    "reclassification, results passed on to families [V]; the interval is the clinic's setting "
    "(default 24 months: common practice)"
)


@dataclass(frozen=True)
class RereviewReminder:
    """A reminder to re-review the family variant's class."""

    family: str | None
    variant: str | None
    acmg_class: str
    classified_on: dt.date
    due: dt.date
    overdue: bool
    text: str
    source: str = SRC_REREVIEW


def add_months(d: dt.date, months: int) -> dt.date:
    y, m = divmod(d.month - 1 + months, 12)
    year, month = d.year + y, m + 1
    for day in (d.day, 30, 29, 28):
        try:
            return dt.date(year, month, day)
        except ValueError:
            continue
    raise AssertionError("unreachable")  # pragma: no cover


def rereview_reminder(
    acmg_class: str | None,
    classified_on: dt.date | None,
    on: dt.date,
    months: int = DEFAULT_REREVIEW_MONTHS,
    family: str | None = None,
    variant: str | None = None,
) -> RereviewReminder | None:
    """A re-review reminder on ``on``: always for a VUS (re-review due ``months`` after its latest
    classification, and meanwhile a standing reminder), and for any other class once its latest
    classification is ``months`` old or more.  None otherwise (or without a class)."""
    if acmg_class is None or classified_on is None:
        return None
    if months < 1:
        raise ValueError("the re-review interval must be at least 1 month")
    due = add_months(classified_on, months)
    overdue = on >= due
    words = _CLASS_WORDS[acmg_class]
    if overdue:
        text = (f"variant classified {words} on {classified_on.isoformat()}, {months} months or more ago: "
                f"re-review of the class due since {due.isoformat()}")
    elif acmg_class == "uncertain_significance":
        text = (f"variant of uncertain significance (classified {classified_on.isoformat()}): may be "
                f"reclassified; re-review the class by {due.isoformat()} and act on any change")
    else:
        return None
    return RereviewReminder(family, variant, acmg_class, classified_on, due, overdue, text)


def declined_reapproach(
    declined_on: dt.date | None, on: dt.date | None, months: int | None
) -> tuple[bool, str]:
    """(may be re-approached on ``on``, words) for a relative who declined, under the clinic's
    policy: ``months`` None = not re-approached (the default: common practice, the decision is
    respected and the family passes on news); else re-approached once the decline is that old."""
    said = f"declined on {declined_on.isoformat()}" if declined_on else "declined (date not recorded)"
    if months is None:
        return False, f"{said}; clinic policy: not re-approached (default)"
    if declined_on is None or on is None:
        return False, (f"{said}; clinic policy: re-approach {months} months after a decline: record the date "
                       "of the decline")
    start = add_months(declined_on, months)
    if on >= start:
        return True, (f"{said}; clinic policy: re-approach after {months} months: may be re-approached "
                      f"(since {start.isoformat()}), acknowledging the earlier decision")
    return False, f"{said}; clinic policy: re-approach after {months} months: not before {start.isoformat()}"
