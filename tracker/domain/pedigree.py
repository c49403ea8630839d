"""A family pedigree: people, biological links, relationships and kinship.

Built from a pandas DataFrame of people (one row each) with the columns

    person, family, sex_at_birth ('female'/'male'/'unknown'),
    birth_date (datetime.date or None), birth_date_precision ('day'/'year'/None),
    vital_status ('alive'/'deceased'/'unknown'), mother, father (codes or None),
    placeholder (bool), proband (bool), twin_of (code or None),
    twin_type ('monozygotic'/'dizygotic'/'unknown'/None), adoption ('in'/'out'/None),
    contact_status ('not_contacted'/'contactable'/'declined'/'lost_to_follow_up').

Only ``person`` is required; missing optional columns take neutral defaults.

Conventions (documented because they change numbers):

* **Adopted in** (``adoption == 'in'``): the recorded mother/father are the
  *adoptive* parents.  They are kept (:meth:`Pedigree.adoptive_parents`) but
  take no part in kinship: the person's biological parents are unknown, so the
  person is not a blood relative of the adoptive family.  Their own children
  are their biological children as usual.
* **Adopted out** (``adoption == 'out'``): born into the family, raised
  elsewhere; the recorded links are biological and the person stays a blood
  relative.
* **Placeholders** (members drawn only to connect the pedigree) take part in
  kinship like anyone else.
* **Unrecorded parents** are treated as different, unrelated people: two
  children who share a mother and have no father recorded are half siblings.
  Record a placeholder father to make them full siblings.
* **Twins** (``twin_of``): co-twins share their biological parents; a parent
  recorded for one twin is inferred for the other, and a twin pair with no
  recorded parent gets shared unnamed parents (never shown).  Dizygotic twins
  and twins of unknown zygosity are full siblings.  Monozygotic co-twins are
  one genotype: kinship treats them as the same individual, so their
  coefficient of relationship is 1 and a monozygotic twin's child is
  genetically the co-twin's child too.

Kinship (coefficient of kinship phi, probability that an allele drawn from
each of two people is identical by descent) uses the recursive algorithm in
common practice (from memory, verify): people in topological order,
phi(i, i) = 1/2 (1 + F_i) with F_i = phi(mother_i, father_i), and
phi(i, j) = 1/2 [phi(mother_i, j) + phi(father_i, j)] when i is not an
ancestor of j.  The coefficient of relationship is r = 2 phi (Wright 1922: sum
over paths through common ancestors A of (1/2)^L (1 + F_A); [V]); without
inbreeding r = 1/2 for first-degree, 1/4 second-degree and 1/8 third-degree
relatives (degree table: common clinical-genetics convention [V]).  Values are
exact fractions.

Degree of relationship: counted on the shortest line of descent through a
common ancestor, one degree per meiosis, less one when the two people descend
from a couple (full relationship): parent, child and full sibling 1; half
sibling, grandparent, aunt/uncle 2; first cousin, half aunt/uncle,
great-grandparent 3 (same convention [V]).  Where several lines of descent make
two people as close as a nearer degree (r >= (1/2)^d, e.g. double first
cousins, r = 1/4, conventionally counted with second-degree relatives [V]), the
nearer degree is given.  A monozygotic co-twin is first degree (r = 1).
"""

from __future__ import annotations

from typing import TYPE_CHECKING

import datetime as dt
import math
from collections import deque
from collections.abc import Iterable, Iterator, Mapping
from dataclasses import asdict, dataclass
from fractions import Fraction

from tracker.domain.dates import PRECISIONS
from tracker.domain.vocabulary import ADOPTION as ADOPTIONS
from tracker.domain.vocabulary import CONTACT_STATUS as CONTACT_STATUSES
from tracker.domain.vocabulary import SEX_AT_BIRTH as SEXES
from tracker.domain.vocabulary import TWIN_TYPE as TWIN_TYPES
from tracker.domain.vocabulary import VITAL_STATUS as VITAL_STATUSES

if TYPE_CHECKING:  # for annotations only: loaded where used, so start-up stays light
    import pandas as pd

_VIRTUAL_PREFIX = "~"  # never a valid person code (codes: letters, digits, - _ .)


class PedigreeError(ValueError):
    """The people frame cannot form a valid pedigree (the message names the people)."""


@dataclass(frozen=True)
class Member:
    """One person as recorded.  ``mother``/``father`` are the recorded links
    (adoptive links when ``adoption == 'in'``)."""

    person: str
    family: str | None = None
    sex_at_birth: str = "unknown"
    birth_date: dt.date | None = None
    birth_date_precision: str | None = None
    vital_status: str = "unknown"
    mother: str | None = None
    father: str | None = None
    placeholder: bool = False
    proband: bool = False
    twin_of: str | None = None
    twin_type: str | None = None
    adoption: str | None = None
    contact_status: str = "not_contacted"

    @property
    def alive(self) -> bool:
        return self.vital_status == "alive"


@dataclass(frozen=True)
class Relationship:
    """How ``b`` is related to ``a``, in words from ``a``'s point of view.

    ``label`` says what b is *to a* ("parent" means b is a's parent).
    ``degree`` is 1, 2, 3, ... (0 for the same person), None if not blood
    related.  ``r`` is the coefficient of relationship (exact fraction; r = 1
    for a monozygotic co-twin), ``kinship`` the kinship coefficient phi
    (r = 2 phi).  ``meioses`` is the number of parent-child links on the
    shortest recorded line of descent between them (None if none);
    ``common_ancestors`` the nearest common ancestors on that line.
    """

    a: str
    b: str
    label: str
    degree: int | None
    r: Fraction
    kinship: Fraction
    meioses: int | None
    common_ancestors: tuple[str, ...] = ()
    note: str | None = None

    @property
    def blood_related(self) -> bool:
        return self.degree is not None


# ---------------------------------------------------------------------------
# input cleaning
# ---------------------------------------------------------------------------


def _blank(v: object) -> bool:
    import pandas as pd

    if v is None:
        return True
    try:
        if pd.isna(v):  # NaN, NaT, pd.NA
            return True
    except (TypeError, ValueError):
        pass
    return isinstance(v, str) and v.strip() == ""


def _text(v: object) -> str | None:
    return None if _blank(v) else str(v).strip()


def _flag(v: object) -> bool:
    if _blank(v):
        return False
    if isinstance(v, str):
        s = v.strip().lower()
        if s in ("yes", "true", "1", "y"):
            return True
        if s in ("no", "false", "0", "n"):
            return False
        raise PedigreeError(f"not a yes/no value: {v!r}")
    return bool(v)


def _date(v: object, precision: str | None) -> tuple[dt.date | None, str | None]:
    import pandas as pd

    if _blank(v):
        return None, None
    if isinstance(v, pd.Timestamp):
        v = v.date()
    if isinstance(v, dt.datetime):
        v = v.date()
    if isinstance(v, str):
        from tracker.domain.dates import parse_partial_date

        pd_ = parse_partial_date(v)
        return pd_.value, precision or pd_.precision
    if isinstance(v, dt.date):
        return v, precision or "day"
    raise PedigreeError(f"birth_date {v!r} is not a date")


def _choice(v: object, allowed: tuple[str, ...], column: str, person: str, default: str | None):
    s = _text(v)
    if s is None:
        return default
    if s not in allowed:
        raise PedigreeError(f"person {person}: {column} {s!r} is not one of {', '.join(allowed)}")
    return s


def _members_from_frame(people: pd.DataFrame) -> list[Member]:
    from tracker.domain.records import frame_records

    if "person" not in people.columns:
        raise PedigreeError("the people frame needs a 'person' column")
    return _members_from_rows(frame_records(people))


def _members_from_rows(rows: Iterable[Mapping]) -> list[Member]:
    """Members from people rows (column -> value; a missing column is an empty cell)."""

    def get(row: Mapping, col: str):
        return row[col] if col in row else None

    out: list[Member] = []
    for row in rows:
        code = _text(get(row, "person"))
        if code is None:
            raise PedigreeError("a row has no person code")
        if code.startswith(_VIRTUAL_PREFIX):
            raise PedigreeError(f"person code {code!r} may not start with {_VIRTUAL_PREFIX!r}")
        prec = _choice(get(row, "birth_date_precision"), PRECISIONS, "birth_date_precision", code, None)
        bdate, prec = _date(get(row, "birth_date"), prec)
        out.append(
            Member(
                person=code,
                family=_text(get(row, "family")),
                sex_at_birth=_choice(get(row, "sex_at_birth"), SEXES, "sex_at_birth", code, "unknown"),
                birth_date=bdate,
                birth_date_precision=prec,
                vital_status=_choice(get(row, "vital_status"), VITAL_STATUSES, "vital_status", code, "unknown"),
                mother=_text(get(row, "mother")),
                father=_text(get(row, "father")),
                placeholder=_flag(get(row, "placeholder")),
                proband=_flag(get(row, "proband")),
                twin_of=_text(get(row, "twin_of")),
                twin_type=_choice(get(row, "twin_type"), TWIN_TYPES, "twin_type", code, None),
                adoption=_choice(get(row, "adoption"), ADOPTIONS, "adoption", code, None),
                contact_status=_choice(
                    get(row, "contact_status"), CONTACT_STATUSES, "contact_status", code, "not_contacted"
                ),
            )
        )
    return out


# ---------------------------------------------------------------------------
# graph helpers (parents maps: node -> (mother, father))
# ---------------------------------------------------------------------------


def find_cycle(parents: Mapping[str, tuple[str | None, str | None]]) -> list[str] | None:
    """A list of people forming an ancestry cycle (each a parent of the next,
    the last a parent of the first), or None when there is none."""
    WHITE, GREY, BLACK = 0, 1, 2
    colour = {n: WHITE for n in parents}
    for start in parents:
        if colour[start] != WHITE:
            continue
        stack: list[tuple[str, Iterator[str]]] = [(start, iter([p for p in parents[start] if p]))]
        path = [start]
        colour[start] = GREY
        while stack:
            node, it = stack[-1]
            nxt = next(it, None)
            if nxt is None:
                colour[node] = BLACK
                stack.pop()
                path.pop()
                continue
            if nxt not in colour:
                continue
            if colour[nxt] == GREY:
                cyc = path[path.index(nxt):]
                # path runs child -> parent; report parent -> child
                return list(reversed(cyc))
            if colour[nxt] == WHITE:
                colour[nxt] = GREY
                path.append(nxt)
                stack.append((nxt, iter([p for p in parents[nxt] if p])))
    return None


def _check_acyclic(parents: Mapping[str, tuple[str | None, str | None]], what: str) -> None:
    cyc = find_cycle(parents)
    if cyc:
        shown = [c for c in cyc if not c.startswith(_VIRTUAL_PREFIX)]
        chain = " -> ".join(shown + shown[:1])
        raise PedigreeError(
            f"{what}: a person would be their own ancestor ({chain}; each is recorded as a parent "
            f"of the next): people involved: {', '.join(sorted(shown))}"
        )


def _topological(parents: Mapping[str, tuple[str | None, str | None]]) -> list[str]:
    """Parents before children; ties in input order."""
    children: dict[str, list[str]] = {n: [] for n in parents}
    indeg = {n: 0 for n in parents}
    for n, ps in parents.items():
        for p in ps:
            if p is not None:
                children[p].append(n)
                indeg[n] += 1
    queue = deque(n for n in parents if indeg[n] == 0)
    order: list[str] = []
    while queue:
        n = queue.popleft()
        order.append(n)
        for c in children[n]:
            indeg[c] -= 1
            if indeg[c] == 0:
                queue.append(c)
    return order


def _up_distances(parents: Mapping[str, tuple[str | None, str | None]], start: str) -> dict[str, int]:
    """Each ancestor of ``start`` (and ``start`` itself, 0) -> fewest generations up."""
    dist = {start: 0}
    queue = deque([start])
    while queue:
        n = queue.popleft()
        for p in parents[n]:
            if p is not None and p not in dist:
                dist[p] = dist[n] + 1
                queue.append(p)
    return dist


class _UnionFind:
    def __init__(self, items: Iterable[str]):
        self.parent = {i: i for i in items}

    def find(self, x: str) -> str:
        while self.parent[x] != x:
            self.parent[x] = self.parent[self.parent[x]]
            x = self.parent[x]
        return x

    def union(self, a: str, b: str) -> None:
        ra, rb = self.find(a), self.find(b)
        if ra != rb:
            lo, hi = sorted((ra, rb))
            self.parent[hi] = lo

    def groups(self) -> dict[str, list[str]]:
        out: dict[str, list[str]] = {}
        for i in self.parent:
            out.setdefault(self.find(i), []).append(i)
        return out


# ---------------------------------------------------------------------------
# relationship words
# ---------------------------------------------------------------------------

_ORDINAL_WORDS = {1: "first", 2: "second", 3: "third"}
_REMOVED_WORDS = {1: "once", 2: "twice", 3: "three times"}


def ordinal(n: int) -> str:
    """1st, 2nd, 3rd, 4th, ..., 11th, 12th, 13th, 21st."""
    if 10 <= n % 100 <= 20:
        suffix = "th"
    else:
        suffix = {1: "st", 2: "nd", 3: "rd"}.get(n % 10, "th")
    return f"{n}{suffix}"


def _greats(n: int) -> str:
    return "great-" * n


def relationship_words(up: int, down: int, full: bool) -> str | None:
    """Words for b seen from a, when a is ``up`` generations below the nearest
    common ancestor and b is ``down`` generations below it.  None when no
    common word exists (the caller falls back to "relative, Nth degree")."""
    half = "" if full else "half "
    if up == 0 and down == 0:
        return "self"
    if down == 0:
        return "parent" if up == 1 else _greats(up - 2) + "grandparent"
    if up == 0:
        return "child" if down == 1 else _greats(down - 2) + "grandchild"
    if up == 1 and down == 1:
        return "full sibling" if full else "half sibling"
    if down == 1:
        if up - 2 > 3:
            return None
        return half + _greats(up - 2) + "aunt/uncle"
    if up == 1:
        if down - 2 > 3:
            return None
        return half + _greats(down - 2) + "niece/nephew"
    n = min(up, down) - 1
    removed = abs(up - down)
    if n not in _ORDINAL_WORDS or removed > 3:
        return None
    words = f"{half}{_ORDINAL_WORDS[n]} cousin"
    if removed:
        words += f" {_REMOVED_WORDS[removed]} removed"
    return words


def _expected_r(up: int, down: int, full: bool) -> Fraction:
    """r for a relationship reached along one named line (no inbreeding)."""
    length = up + down
    if up == 0 or down == 0:
        return Fraction(1, 2**length)
    return Fraction(2 if full else 1, 2**length)


# ---------------------------------------------------------------------------
# the pedigree
# ---------------------------------------------------------------------------


class Pedigree:
    """An immutable pedigree built from a people frame (see module docstring).

    Raises :class:`PedigreeError` for duplicate codes, links to people not in
    the frame, a person recorded as their own parent, the same person as
    mother and father, contradictory twin records, and ancestry cycles (the
    message names the people in the cycle).
    """

    def __init__(self, people: pd.DataFrame):
        self._build(_members_from_frame(people))

    @classmethod
    def from_rows(cls, rows: Iterable[Mapping]) -> Pedigree:
        """The pedigree of people rows as :func:`frame_records` gives them (one mapping per person,
        the people frame's columns as keys): the same pedigree as from the frame."""
        ped = cls.__new__(cls)
        ped._build(_members_from_rows(rows))
        return ped

    def _build(self, members: list[Member]) -> None:
        self._members: dict[str, Member] = {}
        for m in members:
            if m.person in self._members:
                raise PedigreeError(f"person {m.person} appears more than once")
            self._members[m.person] = m
        self._order = tuple(m.person for m in members)
        self._pos = {p: i for i, p in enumerate(self._order)}
        self._validate_links()
        recorded = {p: (m.mother, m.father) for p, m in self._members.items()}
        _check_acyclic(recorded, "recorded parent links")
        self._build_twins()
        self._build_biological()
        self._build_genetic()
        self._kin_cache: dict[tuple[str, str], Fraction] = {}
        self._bio_up_cache: dict[str, dict[str, int]] = {}
        self._gen_up_cache: dict[str, dict[str, int]] = {}
        self._rel_cache: dict[tuple[str, str], Relationship] = {}

    # -- construction ---------------------------------------------------

    def _validate_links(self) -> None:
        for p, m in self._members.items():
            for role, q in (("mother", m.mother), ("father", m.father), ("twin_of", m.twin_of)):
                if q is None:
                    continue
                if q == p:
                    raise PedigreeError(f"person {p} is recorded as their own {role}")
                if q not in self._members:
                    raise PedigreeError(f"person {p}: {role} {q} is not in the pedigree")
            if m.mother is not None and m.mother == m.father:
                raise PedigreeError(f"person {p}: {m.mother} is recorded as both mother and father")
            if m.twin_of is not None and m.twin_type is None:
                raise PedigreeError(f"person {p}: twin_of {m.twin_of} needs a twin_type")

    def _build_twins(self) -> None:
        twins = _UnionFind(self._members)
        mz = _UnionFind(self._members)
        link_type: dict[frozenset[str], str] = {}
        for p, m in self._members.items():
            if m.twin_of is None:
                continue
            key = frozenset((p, m.twin_of))
            seen = link_type.get(key)
            if seen is not None and seen != m.twin_type:
                raise PedigreeError(
                    f"twins {p} and {m.twin_of} are recorded with different zygosity ({seen} and {m.twin_type})"
                )
            link_type[key] = m.twin_type  # type: ignore[assignment]
            twins.union(p, m.twin_of)
            if m.twin_type == "monozygotic":
                mz.union(p, m.twin_of)
        self._twin_group: dict[str, tuple[str, ...]] = {}
        for grp in twins.groups().values():
            if len(grp) < 2:
                continue
            grp_t = tuple(sorted(grp, key=self._pos.__getitem__))
            adopted_in = {self._members[g].adoption == "in" for g in grp}
            if len(adopted_in) > 1:
                raise PedigreeError(
                    f"twins {', '.join(grp_t)}: some are recorded as adopted in and some not"
                )
            for g in grp:
                self._twin_group[g] = grp_t
        self._mz_group: dict[str, tuple[str, ...]] = {}
        for grp in mz.groups().values():
            grp_t = tuple(sorted(grp, key=self._pos.__getitem__))
            for g in grp:
                self._mz_group[g] = grp_t
        self._link_type = link_type

    def _build_biological(self) -> None:
        bio: dict[str, tuple[str | None, str | None]] = {}
        for p, m in self._members.items():
            bio[p] = (None, None) if m.adoption == "in" else (m.mother, m.father)
        virtual: list[str] = []
        done: set[tuple[str, ...]] = set()
        for p, grp in self._twin_group.items():
            if grp in done:
                continue
            done.add(grp)
            shared: list[str | None] = []
            for idx, role in ((0, "mother"), (1, "father")):
                found = {bio[g][idx] for g in grp if bio[g][idx] is not None}
                if len(found) > 1:
                    raise PedigreeError(
                        f"twins {', '.join(grp)} have different {role}s recorded: {', '.join(sorted(found))}"
                    )
                if found:
                    shared.append(found.pop())
                else:
                    v = f"{_VIRTUAL_PREFIX}twins:{grp[0]}:{role}"
                    virtual.append(v)
                    shared.append(v)
            for g in grp:
                bio[g] = (shared[0], shared[1])
        for v in virtual:
            bio[v] = (None, None)
        _check_acyclic(bio, "biological links (after joining co-twins' parents)")
        self._bio = bio
        self._bio_children: dict[str, list[str]] = {n: [] for n in bio}
        for n, ps in bio.items():
            for q in ps:
                if q is not None:
                    self._bio_children[q].append(n)

    def _build_genetic(self) -> None:
        node_of: dict[str, str] = {}
        for p in self._bio:
            node_of[p] = self._mz_group[p][0] if p in self._mz_group else p
        gen: dict[str, tuple[str | None, str | None]] = {}
        members: dict[str, list[str]] = {}
        for p, (mo, fa) in self._bio.items():
            n = node_of[p]
            pair = (node_of[mo] if mo else None, node_of[fa] if fa else None)
            if n in gen and gen[n] != pair:  # pragma: no cover - twins share parents by construction
                raise PedigreeError(f"monozygotic twins in {n}'s group have different parents")
            gen[n] = pair
            if not p.startswith(_VIRTUAL_PREFIX):
                members.setdefault(n, []).append(p)
        _check_acyclic(gen, "links after joining monozygotic twins")
        self._node_of = node_of
        self._gen = gen
        self._gen_members = {n: tuple(v) for n, v in members.items()}
        self._gen_order = tuple(_topological(gen))
        self._gen_index = {n: i for i, n in enumerate(self._gen_order)}
        self._gen_children: dict[str, list[str]] = {n: [] for n in gen}
        for n, ps in gen.items():
            for q in ps:
                if q is not None and n not in self._gen_children[q]:
                    self._gen_children[q].append(n)

    # -- basic access ---------------------------------------------------

    def __contains__(self, person: object) -> bool:
        return person in self._members

    def __len__(self) -> int:
        return len(self._members)

    def __iter__(self) -> Iterator[str]:
        return iter(self._order)

    @property
    def people(self) -> tuple[str, ...]:
        """Person codes in input order."""
        return self._order

    def member(self, person: str) -> Member:
        self._need(person)
        return self._members[person]

    @property
    def members(self) -> Mapping[str, Member]:
        return dict(self._members)

    def _need(self, *people: str) -> None:
        for p in people:
            if p not in self._members:
                raise PedigreeError(f"person {p} is not in the pedigree")

    @staticmethod
    def is_virtual(node: str) -> bool:
        """True for the unnamed shared parents made for a twin pair with none recorded."""
        return node.startswith(_VIRTUAL_PREFIX)

    def _real(self, nodes: Iterable[str]) -> list[str]:
        return [n for n in nodes if not n.startswith(_VIRTUAL_PREFIX)]

    # -- family links -----------------------------------------------------

    def parents(self, person: str) -> tuple[str, ...]:
        """Biological parents (mother first) that are recorded; none for an
        adopted-in person."""
        self._need(person)
        return tuple(self._real(q for q in self._bio[person] if q is not None))

    def mother(self, person: str) -> str | None:
        self._need(person)
        q = self._bio[person][0]
        return None if q is None or self.is_virtual(q) else q

    def father(self, person: str) -> str | None:
        self._need(person)
        q = self._bio[person][1]
        return None if q is None or self.is_virtual(q) else q

    def adoptive_parents(self, person: str) -> tuple[str, ...]:
        """Recorded (adoptive) parents of an adopted-in person; () otherwise."""
        m = self.member(person)
        if m.adoption != "in":
            return ()
        return tuple(q for q in (m.mother, m.father) if q is not None)

    def children(self, person: str) -> tuple[str, ...]:
        """Biological children (adopted-in children excluded), input order."""
        self._need(person)
        return tuple(self._real(self._bio_children[person]))

    def ancestors(self, person: str) -> frozenset[str]:
        """All biological ancestors (recorded people only)."""
        self._need(person)
        return frozenset(self._real(n for n in self._bio_up(person) if n != person))

    def descendants(self, person: str) -> frozenset[str]:
        """All biological descendants."""
        self._need(person)
        seen: set[str] = set()
        queue = deque(self._bio_children[person])
        while queue:
            n = queue.popleft()
            if n not in seen:
                seen.add(n)
                queue.extend(self._bio_children[n])
        return frozenset(self._real(seen))

    def _bio_parent_nodes(self, person: str) -> tuple[str | None, str | None]:
        return self._bio[person]

    def full_siblings(self, person: str) -> tuple[str, ...]:
        """People sharing both recorded biological parents (co-twins included)."""
        self._need(person)
        mo, fa = self._bio[person]
        if mo is None or fa is None:
            return ()
        return tuple(
            q for q in self._order if q != person and self._bio[q] == (mo, fa)
        )

    def half_siblings(self, person: str) -> tuple[str, ...]:
        """People sharing exactly one recorded biological parent."""
        self._need(person)
        mo, fa = self._bio[person]
        out = []
        for q in self._order:
            if q == person:
                continue
            qm, qf = self._bio[q]
            shared = (mo is not None and qm == mo) + (fa is not None and qf == fa)
            if shared == 1:
                out.append(q)
        return tuple(out)

    def co_twins(self, person: str) -> tuple[str, ...]:
        """Co-twins (any zygosity)."""
        self._need(person)
        return tuple(q for q in self._twin_group.get(person, ()) if q != person)

    def monozygotic_co_twins(self, person: str) -> tuple[str, ...]:
        self._need(person)
        return tuple(q for q in self._mz_group.get(person, (person,)) if q != person)

    def twin_type(self, a: str, b: str) -> str | None:
        """'monozygotic', 'dizygotic', 'unknown' for co-twins, else None."""
        self._need(a, b)
        if a == b or b not in self._twin_group.get(a, ()):
            return None
        if self._mz_group.get(a) is not None and b in self._mz_group[a]:
            return "monozygotic"
        t = self._link_type.get(frozenset((a, b)))
        return t or "unknown"

    def first_degree_relatives(self, person: str) -> tuple[str, ...]:
        """Everyone whose :meth:`relationship` degree to ``person`` is 1:
        parents, children, full siblings, co-twins, and (through a
        monozygotic twin) the co-twin's children and the parent's co-twin."""
        return self.relatives_of_degree(person, 1)

    def relatives_of_degree(self, person: str, degree: int) -> tuple[str, ...]:
        self._need(person)
        out = []
        for q in self._order:
            if q != person and self.relationship(person, q).degree == degree:
                out.append(q)
        return tuple(out)

    def blood_relatives(self, person: str) -> tuple[str, ...]:
        """Everyone with r > 0 to ``person`` (excluding the person)."""
        self._need(person)
        return tuple(q for q in self._order if q != person and self.kinship(person, q) > 0)

    # -- genetic (twin-merged) graph, for the genetics layer ---------------

    def genotype_node(self, person: str) -> str:
        """Identifier of the person's genotype: shared by monozygotic co-twins."""
        self._need(person)
        return self._node_of[person]

    def genotype_members(self, node: str) -> tuple[str, ...]:
        """People carrying the genotype ``node`` (one, or a monozygotic set)."""
        return self._gen_members.get(node, ())

    def genetic_nodes(self) -> tuple[str, ...]:
        """All genotype nodes, parents before children (virtual nodes included)."""
        return self._gen_order

    def genetic_parents(self, node: str) -> tuple[str | None, str | None]:
        """(mother, father) genotype nodes of ``node`` (None if unrecorded)."""
        return self._gen[node]

    def genetic_children(self, node: str) -> tuple[str, ...]:
        return tuple(self._gen_children[node])

    # -- kinship ------------------------------------------------------------

    def _phi(self, i: str | None, j: str | None) -> Fraction:
        if i is None or j is None:
            return Fraction(0)
        if i == j:
            key = (i, i)
            if key not in self._kin_cache:
                mo, fa = self._gen[i]
                self._kin_cache[key] = Fraction(1, 2) * (1 + self._phi(mo, fa))
            return self._kin_cache[key]
        # recurse on the later one in topological order: it cannot be an ancestor of the other
        if self._gen_index[i] < self._gen_index[j]:
            i, j = j, i
        key = (i, j)
        if key not in self._kin_cache:
            mo, fa = self._gen[i]
            self._kin_cache[key] = Fraction(1, 2) * (self._phi(mo, j) + self._phi(fa, j))
        return self._kin_cache[key]

    def kinship(self, a: str, b: str) -> Fraction:
        """Kinship coefficient phi(a, b) (exact; 1/2 (1 + F) for a with itself
        or a monozygotic co-twin)."""
        self._need(a, b)
        return self._phi(self._node_of[a], self._node_of[b])

    def inbreeding(self, person: str) -> Fraction:
        """Inbreeding coefficient F = phi(mother, father) (0 if a parent is unrecorded)."""
        self._need(person)
        mo, fa = self._gen[self._node_of[person]]
        return self._phi(mo, fa)

    def coefficient_of_relationship(self, a: str, b: str) -> Fraction:
        """Wright's r = 2 phi(a, b)."""
        return 2 * self.kinship(a, b)

    # -- relationships --------------------------------------------------------

    def _bio_up(self, n: str) -> dict[str, int]:
        if n not in self._bio_up_cache:
            self._bio_up_cache[n] = _up_distances(self._bio, n)
        return self._bio_up_cache[n]

    def _gen_up(self, n: str) -> dict[str, int]:
        if n not in self._gen_up_cache:
            self._gen_up_cache[n] = _up_distances(self._gen, n)
        return self._gen_up_cache[n]

    @staticmethod
    def _nearest(up_a: dict[str, int], up_b: dict[str, int]):
        common = up_a.keys() & up_b.keys()
        if not common:
            return None
        length = min(up_a[c] + up_b[c] for c in common)
        at_min = sorted((c for c in common if up_a[c] + up_b[c] == length), key=lambda c: (up_a[c], c))
        lineal = any(up_a[c] == 0 or up_b[c] == 0 for c in at_min)
        full = (not lineal) and len(at_min) >= 2
        first = at_min[0]
        return length, at_min, lineal, full, up_a[first], up_b[first]

    def relationship(self, a: str, b: str) -> Relationship:
        """How ``b`` is related to ``a`` (words from ``a``'s point of view)."""
        self._need(a, b)
        key = (a, b)
        if key in self._rel_cache:
            return self._rel_cache[key]
        rel = self._relationship(a, b)
        self._rel_cache[key] = rel
        return rel

    def _relationship(self, a: str, b: str) -> Relationship:
        kin = self.kinship(a, b)
        r = 2 * kin
        if a == b:
            return Relationship(a, b, "self", 0, r, kin, 0)
        twin = self.twin_type(a, b)
        bio = self._nearest(self._bio_up(a), self._bio_up(b))
        if r == 0 or bio is None:
            return Relationship(a, b, self._unrelated_words(a, b), None, Fraction(0), Fraction(0), None)
        length, at_min, lineal, full, up, down = bio
        shown = tuple(self._real(at_min))

        # degree on the genetic graph (monozygotic twins merged), then capped by r
        na, nb = self._node_of[a], self._node_of[b]
        if na == nb:
            path_degree = 1
            g_words = None
        else:
            gen = self._nearest(self._gen_up(na), self._gen_up(nb))
            assert gen is not None  # r > 0 implies a common ancestor
            g_len, g_at, g_lineal, g_full, g_up, g_down = gen
            path_degree = g_len - (1 if g_full else 0)
            g_words = relationship_words(g_up, g_down, g_full)
        r_degree = max(0, math.ceil(-math.log2(r) - 1e-9))
        degree = max(1, min(path_degree, r_degree))

        words = relationship_words(up, down, full)
        note = None
        if twin == "monozygotic":
            words = "monozygotic co-twin"
        elif twin == "dizygotic":
            words = "full sibling (dizygotic co-twin)"
        elif twin == "unknown":
            words = "full sibling (co-twin, zygosity unknown)"
        elif up == 2 and down == 2 and len(at_min) == 4:
            words = "double first cousin"
        if words is None:
            words = f"relative, {ordinal(degree)} degree"
        if twin is None and g_words is not None and g_words != relationship_words(up, down, full):
            words = f"{words} (genetically {g_words}, through a monozygotic twin)"
        elif twin is None and words != "double first cousin" and r != _expected_r(up, down, full):
            note = f"related through more than one line of descent (r = {r})"
        return Relationship(a, b, words, degree, r, kin, length, shown, note)

    def _unrelated_words(self, a: str, b: str) -> str:
        ma, mb = self._members[a], self._members[b]
        if b in self.adoptive_parents(a):
            return "adoptive parent (not a blood relative)"
        if a in self.adoptive_parents(b):
            return "adopted-in child (not a blood relative)"
        if ma.adoption == "in" or mb.adoption == "in":
            return "not a blood relative (adopted in)"
        return "not a blood relative"

    # -- presentation ------------------------------------------------------------

    def frame(self) -> pd.DataFrame:
        """The members as a frame (recorded links), input order."""
        import pandas as pd

        return pd.DataFrame([asdict(self._members[p]) for p in self._order])
