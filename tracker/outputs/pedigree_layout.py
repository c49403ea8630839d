"""Where each symbol and line of a pedigree drawing goes (pure geometry, no drawing).

Input: a :class:`~tracker.domain.pedigree.Pedigree` and, optionally, the size
of the text block printed under each symbol.  Output: a
:class:`PedigreeLayout` holding the centre and size of every symbol, every line
segment with its kind, the twin marks, the generation rows with their Roman
numerals, and a list of warnings.

Units and axes: one layout unit is the width of a symbol (``symbol_size``,
default 1); x runs to the right, y runs **downwards** (generation I at the
top).  A drawing scales the layout to its page.

Rules (pedigree nomenclature, NSGC 1995/2008/2022 [V], see
docs/reference/standards.md section 1b):

* **Generations**: each couple's children are one row below the couple and
  partners share a row.  Rows are found by walking the family links (child =
  parent + 1, partner = partner); in a tree-like pedigree this is the longest
  path from the founders with married-in founders moved down to their
  partner's row.  Where the links contradict each other (e.g. partners from
  different generations) the longest path from the founders is used, partners
  are moved to the lower row, and a warning says so.
* **Partners** are adjacent, joined by a horizontal relationship line between
  their symbols.  A person with children by two partners stands between them.
  A person with children whose other parent is not recorded gets a short
  relationship line ending in nothing; the line of descent starts at its end
  (the drawing does not show whether such children share the unrecorded
  parent).
* **Line of descent**: a vertical line from the middle of the relationship
  line down to the **sibship line**, a horizontal line over the children;
  each child hangs from it on a short vertical line.  The line of descent is
  kept within the sibship line (centred where possible).
* **Siblings** are ordered oldest to youngest, left to right (birth date;
  unknown dates last, then in input order).  When a sibling must stand at the
  end of the sibship so that lines do not cross (a sibling whose partner's own
  family is drawn), the order is changed and a note says so.
* **Twins** hang from one point of the sibship line on two diagonal lines;
  monozygotic twins have a horizontal bar between the diagonals.
* **Adopted in** (``adoption == 'in'``; the recorded parents are the adoptive
  parents, :meth:`Pedigree.adoptive_parents`): the child's own line from the
  sibship line is dashed (kind ``adoption``), and so is the line of descent
  when every child of the couple is adopted in; brackets are drawn round the
  symbol (the symbol's footprint includes them).  An adopted-in person with
  no adoptive parents recorded is drawn apart with a warning.
* **Numbering**: individuals are numbered 1, 2, 3... left to right in each
  generation; generations are numbered I, II, III... from the top (label
  ``II-3``).  Numbers are layout positions, not person codes; the drawing
  does not print them (they read like person codes).
* **Partners clear of sibship lines**: siblings with partners stand at the
  ends of their sibship, partners on the outer side, so that no partner
  stands under a sibship line (a change of birth order is noted); where more
  siblings have partners than there are ends, a note names who stands under
  the line.
* The side on which a partner stands is the layout's choice (the 2022 revision
  dropped "male partner on the left" [V]); the default puts a partner to the
  right of the blood relative.

Geometry guarantee and what counts as a crossing (checked by
:func:`check_layout`, which :func:`layout_pedigree` runs on its own result):

* No two footprints (symbol plus brackets), text blocks or proband arrows
  share any point.
* Segments are grouped by couple (relationship line, line of descent,
  sibship line, the children's own lines, twin lines and bar).  Two segments
  of **different** groups must not share any point.  Two segments of the
  **same** group may share only a single point that is an end point of at
  least one of them (a T or L junction, including two collinear segments that
  meet end to end); a proper crossing or a collinear overlap is a crossing.
* A segment may touch the footprint of a person it connects only at its own
  end point, and must not touch any other footprint, any text block or any
  proband arrow.

What is guaranteed: a tree-like pedigree (no closed loop of family links)
drawn down from its founders, whose married-in partners have no recorded
parents, with up to two partners per person (half siblings), twins,
adopted-in children and single recorded parents, is laid out with no
crossing and no warning, whatever its size and depth (tested on the demo
families and on random pedigrees of up to 40 people).  A married-in
partner's own family (parents, siblings) is drawn beside the partner on the
outer side; this works for the usual "both sides of the family" pedigrees,
but a partner's family can be left with no free side (for example when the
partner's parents share a row with a couple whose other children lie on
both sides); then, and for a consanguineous or other closed loop, a person
with more than two partners, or contradictory generations, ``warnings`` say
so in words.  Any crossing :func:`check_layout` finds is reported there
too: nothing crosses silently.
"""

from __future__ import annotations

import datetime as dt
import math
from collections import defaultdict, deque
from collections.abc import Iterable, Mapping
from dataclasses import dataclass, field

import numpy as np
from scipy.optimize import linprog
from scipy.sparse import coo_matrix

from tracker.domain.pedigree import Pedigree

KINDS = ("relationship", "descent", "sibship", "twin", "adoption")

# Default size of the text block under a symbol (layout units) when the caller gives none.
DEFAULT_LABEL = (2.2, 0.9)

# Spacing, in symbol widths (a drawing choice of this project, not a standard).
_GAP = 0.45  # between the extents of two neighbours
_PARTNER_CLEAR = 0.25  # between a line of descent and a partner's text block
_MIN_RELATIONSHIP = 0.8  # shortest visible relationship line
_BRACKET = 0.16  # brackets of an adopted person, each side
_LABEL_PAD = 0.12  # symbol bottom to text block
_LINE_GAP = 0.3  # text block bottom to the sibship line below
_DROP = 0.6  # sibship line to the top of the child's symbol
_VIRTUAL_HALF = 0.15
# weights of the position objective: centring a line of descent over its sibship against the
# length of rows and of relationship lines (drawing choice)
_CENTRE_WEIGHT = 1.0
_ROW_WEIGHT = 1.0
_PARTNER_WEIGHT = 1.5
_ARROW = 0.75  # horizontal reach of the proband arrow left of the symbol
_EPS = 1e-7

_CORR = "\x00corridor"  # where the rest of the drawing goes, inside a block row
_INNER = "\x00inner"


# ---------------------------------------------------------------------------
# result types
# ---------------------------------------------------------------------------


@dataclass(frozen=True)
class Box:
    """An axis-aligned rectangle (layout units, y downwards)."""

    x0: float
    y0: float
    x1: float
    y1: float

    def meets(self, other: "Box", eps: float = _EPS) -> bool:
        """True when the two closed boxes share a point."""
        return not (
            self.x1 < other.x0 - eps or other.x1 < self.x0 - eps or self.y1 < other.y0 - eps or other.y1 < self.y0 - eps
        )


@dataclass(frozen=True)
class Segment:
    """One straight line.  ``kind`` is one of :data:`KINDS`; ``group`` names
    the couple (or twin set) the line belongs to; ``people`` are the people
    whose footprint the line may touch at its end; ``dashed`` for adoption
    lines; ``double`` for the relationship line of blood-related partners
    (consanguinity); ``partner_unknown`` for the short relationship line of a
    parent whose partner is not recorded."""

    kind: str
    x0: float
    y0: float
    x1: float
    y1: float
    group: str
    people: tuple[str, ...] = ()
    dashed: bool = False
    double: bool = False
    partner_unknown: bool = False

    @property
    def length(self) -> float:
        return float(math.hypot(self.x1 - self.x0, self.y1 - self.y0))


@dataclass(frozen=True)
class PlacedPerson:
    """One symbol: centre (x, y), width ``size``; generation (1 = I) and
    number in it; ``footprint`` (symbol and brackets), ``label_box`` (the text
    block under it), ``arrow`` (proband arrow: tail x, tail y, head x, head y)
    and ``arrow_box`` (the arrow and its letter), both None for others."""

    person: str
    x: float
    y: float
    size: float
    generation: int
    number: int
    footprint: Box
    label_box: Box
    adopted: bool = False
    arrow: tuple[float, float, float, float] | None = None
    arrow_box: Box | None = None

    @property
    def label(self) -> str:
        """Individual number, e.g. ``II-3``."""
        return f"{roman(self.generation)}-{self.number}"


@dataclass(frozen=True)
class TwinMark:
    """Twins hanging from one point (apex) of a sibship line."""

    members: tuple[str, ...]
    zygosity: str  # 'monozygotic', 'dizygotic', 'unknown'
    apex_x: float
    apex_y: float


@dataclass(frozen=True)
class GenerationRow:
    number: int  # 1 = I
    y: float

    @property
    def roman(self) -> str:
        return roman(self.number)


@dataclass(frozen=True)
class PedigreeLayout:
    people: tuple[PlacedPerson, ...]
    segments: tuple[Segment, ...]
    twins: tuple[TwinMark, ...]
    generations: tuple[GenerationRow, ...]
    bounds: Box
    symbol_size: float
    warnings: tuple[str, ...] = ()
    notes: tuple[str, ...] = ()
    _index: dict = field(default_factory=dict, compare=False, repr=False)

    def person(self, code: str) -> PlacedPerson:
        if not self._index:
            self._index.update({p.person: p for p in self.people})
        return self._index[code]

    def by_generation(self) -> dict[int, list[PlacedPerson]]:
        """People per generation, left to right."""
        out: dict[int, list[PlacedPerson]] = defaultdict(list)
        for p in sorted(self.people, key=lambda q: (q.generation, q.x)):
            out[p.generation].append(p)
        return dict(out)


def roman(n: int) -> str:
    """Roman numeral for a positive integer (I, II, ..., IX, X, ...)."""
    if n < 1:
        raise ValueError("generation numbers start at 1")
    out = []
    for value, letters in (
        (1000, "M"), (900, "CM"), (500, "D"), (400, "CD"), (100, "C"), (90, "XC"),
        (50, "L"), (40, "XL"), (10, "X"), (9, "IX"), (5, "V"), (4, "IV"), (1, "I"),
    ):  # fmt: skip
        while n >= value:
            out.append(letters)
            n -= value
    return "".join(out)


# ---------------------------------------------------------------------------
# structure: units (a couple or single parent with their children), chains
# (people joined by relationship lines), rows
# ---------------------------------------------------------------------------


@dataclass
class _Unit:
    uid: str
    parents: tuple[str, ...]  # tokens in the parent row (a real person or a virtual slot); () if none
    real_parents: tuple[str, ...]
    children: list[str]
    virtual: str | None = None  # the virtual slot of a single parent


def _birth_key(ped: Pedigree, pos: Mapping[str, int]):
    def key(p: str):
        b = ped.member(p).birth_date
        return (b is None, b or dt.date.max, pos[p])

    return key


class _Structure:
    def __init__(self, ped: Pedigree):
        self.ped = ped
        self.people = list(ped.people)
        self.pos = {p: i for i, p in enumerate(self.people)}
        self.birth_key = _birth_key(ped, self.pos)
        self.warnings: list[str] = []
        self._units()
        self._chains()
        self._rows()

    # -- units ------------------------------------------------------------
    def layout_parents(self, p: str) -> tuple[str | None, str | None]:
        m = self.ped.member(p)
        if m.adoption == "in":
            mo, fa = m.mother, m.father
            for t in self.ped.co_twins(p):
                tm = self.ped.member(t)
                mo = mo or tm.mother
                fa = fa or tm.father
            return mo, fa
        return self.ped.mother(p), self.ped.father(p)

    def _units(self) -> None:
        units: dict[str, _Unit] = {}
        self.parent_unit: dict[str, str] = {}
        for p in sorted(self.people, key=self.birth_key):
            mo, fa = self.layout_parents(p)
            if mo and fa:
                uid = f"u:{mo}|{fa}"
                if uid not in units:
                    units[uid] = _Unit(uid, (mo, fa), (mo, fa), [])
            elif mo or fa:
                q = mo or fa
                uid = f"u:{q}|"
                if uid not in units:
                    v = f"~v:{q}"
                    units[uid] = _Unit(uid, (q, v), (q,), [], virtual=v)
            else:
                twins = self.ped.co_twins(p)
                if not twins:
                    continue
                first = min((p, *twins), key=self.pos.__getitem__)
                uid = f"u:~twins:{first}"
                if uid not in units:
                    units[uid] = _Unit(uid, (), (), [])
            units[uid].children.append(p)
            self.parent_unit[p] = uid
        self.units = units
        self.units_of: dict[str, list[str]] = defaultdict(list)  # token -> units it is a parent in
        for u in units.values():
            for q in u.parents:
                self.units_of[q].append(u.uid)
        self.virtual = {u.virtual: u.uid for u in units.values() if u.virtual}
        self.adopted_in = {p for p in self.people if self.ped.member(p).adoption == "in"}

    # -- chains -------------------------------------------------------------
    def _chains(self) -> None:
        nbrs: dict[str, list[str]] = defaultdict(list)
        tokens = list(self.people) + list(self.virtual)
        for u in self.units.values():
            if len(u.parents) == 2:
                a, b = u.parents
                if b not in nbrs[a]:
                    nbrs[a].append(b)
                    nbrs[b].append(a)
        seen: set[str] = set()
        self.chains: dict[str, list[str]] = {}
        self.chain_of: dict[str, str] = {}
        for t in tokens:
            if t in seen:
                continue
            comp, queue = [], deque([t])
            seen.add(t)
            while queue:
                n = queue.popleft()
                comp.append(n)
                for m in nbrs[n]:
                    if m not in seen:
                        seen.add(m)
                        queue.append(m)
            path = self._as_path(comp, nbrs)
            cid = f"c:{path[0]}"
            self.chains[cid] = path
            for n in path:
                self.chain_of[n] = cid
        self.partner_nbrs = nbrs

    def _as_path(self, comp: list[str], nbrs) -> list[str]:
        if len(comp) == 1:
            return comp
        degree = {n: len(nbrs[n]) for n in comp}
        edges = sum(degree.values()) // 2
        ends = [n for n in comp if degree[n] == 1]
        if max(degree.values()) <= 2 and edges == len(comp) - 1:
            start = min(ends, key=lambda n: self.pos.get(n, len(self.pos)))
            path, prev = [start], None
            while len(path) < len(comp):
                nxt = [m for m in nbrs[path[-1]] if m != prev][0]
                prev = path[-1]
                path.append(nxt)
            return path
        many = sorted((n for n in comp if degree[n] > 2 and not n.startswith("~")), key=self.pos.get)
        if many:
            self.warnings.append(
                f"{', '.join(many)} {'has' if len(many) == 1 else 'have'} children with more than two partners: "
                "the partners cannot all stand next to them, so relationship lines may pass other symbols"
            )
        else:
            self.warnings.append(
                f"partners {', '.join(sorted((n for n in comp if not n.startswith('~')), key=self.pos.get))} "
                "form a closed ring of relationships: a relationship line may pass other symbols"
            )
        # depth-first walk, preferring low degree
        start = min(comp, key=lambda n: (degree[n], self.pos.get(n, len(self.pos))))
        path, seen, stack = [], set(), [start]
        while stack:
            n = stack.pop()
            if n in seen:
                continue
            seen.add(n)
            path.append(n)
            stack.extend(sorted((m for m in nbrs[n] if m not in seen), key=lambda m: -degree[m]))
        return path

    # -- rows ---------------------------------------------------------------
    def _rows(self) -> None:
        tokens = list(self.people) + list(self.virtual)
        adj: dict[str, list[tuple[str, int]]] = defaultdict(list)

        def link(a: str, b: str, d: int) -> None:  # row(b) = row(a) + d
            adj[a].append((b, d))
            adj[b].append((a, -d))

        for u in self.units.values():
            if len(u.parents) == 2:
                link(u.parents[0], u.parents[1], 0)
            for c in u.children:
                if u.parents:
                    link(u.parents[0], c, 1)
                elif c != u.children[0]:
                    link(u.children[0], c, 0)
        row: dict[str, int] = {}
        conflict = False
        for t in tokens:
            if t in row:
                continue
            row[t] = 0
            comp, queue = [t], deque([t])
            while queue:
                n = queue.popleft()
                for m, d in adj[n]:
                    if m not in row:
                        row[m] = row[n] + d
                        comp.append(m)
                        queue.append(m)
                    elif row[m] != row[n] + d:
                        conflict = True
            low = min(row[n] for n in comp)
            for n in comp:
                row[n] -= low
        if conflict:
            row = self._fallback_rows(tokens)
            self.warnings.append(
                "the recorded links put some partners in different generations (or a child less than one "
                "generation below a parent): lines of descent may span more than one generation and cross"
            )
        self.row = row

    def _fallback_rows(self, tokens: list[str]) -> dict[str, int]:
        row = {t: 0 for t in tokens}
        for _ in range(4 * len(tokens) + 4):
            changed = False
            for u in self.units.values():
                for c in u.children:
                    need = max((row[p] + 1 for p in u.parents), default=row[c])
                    if row[c] < need:
                        row[c] = need
                        changed = True
                if len(u.parents) == 2:
                    a, b = u.parents
                    hi = max(row[a], row[b])
                    if row[a] != hi or row[b] != hi:
                        row[a] = row[b] = hi
                        changed = True
                if not u.parents and u.children:
                    hi = max(row[c] for c in u.children)
                    for c in u.children:
                        if row[c] != hi:
                            row[c] = hi
                            changed = True
            if not changed:
                break
        return row


# ---------------------------------------------------------------------------
# ordering: recursive blocks on the tree of chains and units
# ---------------------------------------------------------------------------


def _wrap(outer: list | None, inner: list, sentinel: str = _CORR) -> list:
    """Put ``inner`` into the sentinel slot of ``outer`` (None: nothing there)."""
    if outer is None:
        return list(inner)
    if sentinel in outer:
        i = outer.index(sentinel)
        return outer[:i] + list(inner) + outer[i + 1 :]
    return list(outer) + list(inner)


def _sides(block: Mapping[int, list]) -> tuple[bool, bool]:
    left = right = False
    for tokens in block.values():
        if _CORR in tokens:
            i = tokens.index(_CORR)
            left |= any(not _is_marker(t) for t in tokens[:i])
            right |= any(not _is_marker(t) for t in tokens[i + 1 :])
    return left, right


def _is_marker(t: str) -> bool:
    return t.startswith("\x00")


@dataclass
class _Built:
    rows: dict[int, list]
    issues: tuple[str, ...] = ()
    reach: frozenset = frozenset()  # partners whose own family is drawn in the block's open rows

    @property
    def bad(self) -> int:
        return len(self.issues)


class _Orderer:
    """Left-to-right order of every row, built recursively on a spanning tree
    of the graph whose nodes are chains and units.

    A block is a dict row -> tokens; in rows where the rest of the drawing must
    sit *inside* the block (above the point where the block hangs), the row
    holds the ``_CORR`` marker at that place.  ``issues`` name the places where
    the block could not keep the rules (a crossing is then likely; the
    geometry check decides); ``reach`` names the partners whose own family
    reaches above the block's top row."""

    def __init__(self, s: _Structure):
        self.s = s
        self.memo: dict[tuple, _Built] = {}
        self.tree_parent: dict[str, str | None] = {}
        self.loop_edges: set[frozenset] = set()
        self._graph()

    # -- graph and spanning tree ----------------------------------------------
    def _graph(self) -> None:
        s = self.s
        adj: dict[str, list[str]] = defaultdict(list)
        self.parent_chain: dict[str, str | None] = {}
        self.child_chains: dict[str, list[str]] = {}
        for u in s.units.values():
            pc = s.chain_of[u.parents[0]] if u.parents else None
            self.parent_chain[u.uid] = pc
            if pc is not None:
                adj[pc].append(u.uid)
                adj[u.uid].append(pc)
            ccs = []
            for c in u.children:
                cc = s.chain_of[c]
                if cc not in ccs:
                    ccs.append(cc)
                    adj[u.uid].append(cc)
                    adj[cc].append(u.uid)
            self.child_chains[u.uid] = ccs
        self.adj = adj

    def spanning_tree(self, root: str) -> list[str]:
        """Breadth-first tree from ``root``; returns the nodes reached."""
        order = [root]
        self.tree_parent[root] = None
        queue = deque([root])
        edges_seen = set()
        while queue:
            n = queue.popleft()
            for m in self.adj[n]:
                key = frozenset((n, m))
                if m not in self.tree_parent:
                    self.tree_parent[m] = n
                    edges_seen.add(key)
                    order.append(m)
                    queue.append(m)
                elif key not in edges_seen and self.tree_parent.get(n) != m:
                    edges_seen.add(key)
                    self.loop_edges.add(key)
        return order

    def tree_child(self, parent: str, child: str) -> bool:
        return self.tree_parent.get(child) == parent

    # -- helpers ----------------------------------------------------------------
    def chain_units(self, cid: str) -> list[tuple[int, str]]:
        """Units whose parents are in the chain, with their position along it."""
        members = self.s.chains[cid]
        idx = {m: i for i, m in enumerate(members)}
        out = []
        for uid, pc in self.parent_chain.items():
            if pc == cid:
                u = self.s.units[uid]
                out.append((min(idx[q] for q in u.parents) * 2 + (len(u.parents) - 1), uid))
        return sorted(out)

    def in_law_units(self, cid: str, exclude: str | None) -> dict[str, str]:
        """Chain member -> their parent unit, for parent units hanging off this chain in the tree."""
        out = {}
        for m in self.s.chains[cid]:
            uid = self.s.parent_unit.get(m)
            if uid and uid != exclude and self.tree_child(cid, uid):
                out[m] = uid
        return out

    def co_twins(self, p: str) -> tuple[str, ...]:
        return () if p.startswith("~") else self.s.ped.co_twins(p)

    # -- chain from above ---------------------------------------------------------
    def chain_from_above(self, cid: str, uid: str, allowed: str, anchor: str | None, end: str = "both") -> _Built:
        """``end``: where the chain stands in its sibship ('left', 'right', 'both' = only child,
        'none' = in the middle); partners go to that outer side, clear of the sibship line."""
        key = ("above", cid, uid, allowed, anchor, end)
        if key not in self.memo:
            self.memo[key] = self._chain(cid, uid, allowed, anchor, end)
        return self.memo[key]

    def root_chain(self, cid: str) -> _Built:
        return self._chain(cid, None, "both", None)

    def _chain(self, cid: str, uid: str | None, allowed: str, anchor: str | None, end: str = "both") -> _Built:
        s = self.s
        path = s.chains[cid]
        arrivals = {c for c in s.units[uid].children if s.chain_of[c] == cid} if uid else set()
        in_laws = self.in_law_units(cid, uid)
        best: tuple | None = None
        for flip in (False, True):
            members = list(reversed(path)) if flip else list(path)
            idx = {m: i for i, m in enumerate(members)}
            issues: list[str] = []
            if arrivals:
                lo = min(idx[a] for a in arrivals)
                hi = max(idx[a] for a in arrivals)
            else:
                lo = hi = len(members)  # root: in-laws (none expected) go left
            arr_words = " and ".join(sorted(arrivals, key=s.pos.get))
            if (anchor == "left" and lo != 0) or (anchor == "right" and hi != len(members) - 1) or (
                anchor == "both" and len(members) > 1
            ):
                issues.append(f"the twin {arr_words} has partners on the side of a co-twin, so the twins cannot "
                              "hang from one point without crossing lines")
            left_in = sorted((m for m in in_laws if idx[m] < lo), key=idx.get)
            right_in = sorted((m for m in in_laws if idx[m] > hi), key=idx.get)
            for m in in_laws:
                if lo <= idx[m] <= hi:
                    issues.append(f"the parents of {m} cannot be drawn above {m} without crossing lines "
                                  f"({m} stands between partners from one sibship)")
            for group in (left_in, right_in):
                if len(group) > 1:
                    issues.append(f"the own families of {' and '.join(group)} are both drawn on one side of "
                                  "their partners: lines cross")
            for m in in_laws:  # a member with a co-twin must stand at the end facing the co-twin
                if self.co_twins(m) and idx[m] not in (0, len(members) - 1):
                    issues.append(f"the twin {m} has partners on both sides: the twins cannot hang from one point")
            units = [u for _, u in self.chain_units(cid) if self.tree_child(cid, u)]
            if flip:
                units = list(reversed(units))
            downs = []
            reach: set[str] = set(left_in) | set(right_in)
            for j, du in enumerate(units):
                a = "both" if len(units) == 1 else "left" if j == 0 else "right" if j == len(units) - 1 else "none"
                b = self.down_unit(du, a)
                issues += b.issues
                downs.append(b)
            sides = []
            for m in left_in:
                b = self.side_block(in_laws[m], m, "left")
                issues += b.issues
                sides.append(("L", b))
            for m in right_in:
                b = self.side_block(in_laws[m], m, "right")
                issues += b.issues
                sides.append(("R", b))
            rows = self._assemble(members, s.row[members[0]], downs, sides, [_CORR] if uid else [])
            lft, rgt = _sides(rows)
            for b in downs:
                if any(_sides({r: t})[0] or _sides({r: t})[1] for r, t in b.rows.items() if r < s.row[members[0]]):
                    reach |= b.reach
            if (lft and allowed not in ("left", "both")) or (rgt and allowed not in ("right", "both")):
                issues.append(self._reach_words(reach))
            bad = len(issues)
            if arrivals and end == "left":  # first of the sibship: partners to the left, off the sibship line
                default_rank = 0 if hi == len(members) - 1 else 1
            elif arrivals and end == "right":  # last of the sibship: partners to the right
                default_rank = 0 if lo == 0 else 1
            elif arrivals:  # default: partners to the right of the blood relative
                default_rank = 0 if lo <= len(members) - 1 - hi else 1
            else:
                default_rank = 1 if flip else 0
            cand = (bad, default_rank, flip, rows, tuple(issues), frozenset(reach))
            if best is None or cand[:2] < best[:2]:
                best = cand
        assert best is not None
        return _Built(best[3], best[4], best[5])

    def _reach_words(self, reach: Iterable[str]) -> str:
        who = ", ".join(sorted(reach, key=lambda m: self.s.pos.get(m, 0))) or "a partner"
        return (f"the own family of {who} (drawn above them) has no free side to stand on: "
                "it would have to stand between other branches of the pedigree, so lines cross")

    def _assemble(self, members, r0, downs, sides, core_above) -> dict[int, list]:
        rows_all: set[int] = {r0}
        for b in downs:
            rows_all |= set(b.rows)
        for _, b in sides:
            rows_all |= set(b.rows)
        out: dict[int, list] = {}
        for r in sorted(rows_all):
            if r > r0:
                t: list = []
                for b in downs:
                    t += b.rows.get(r, [])
            else:
                t = list(members) if r == r0 else list(core_above)
                for b in reversed(downs):
                    t = _wrap(b.rows.get(r), t)
            for side, b in reversed(sides):
                t = _wrap(b.rows.get(r), t)
            if t:
                out[r] = t
        return out

    # -- unit seen from its parents ----------------------------------------------------
    def down_unit(self, uid: str, allowed: str) -> _Built:
        key = ("down", uid, allowed)
        if key not in self.memo:
            self.memo[key] = self._down(uid, allowed)
        return self.memo[key]

    def _groups(self, uid: str, exclude: str | None) -> list[tuple[str, list[str]]]:
        """Child chains (tree children of the unit) in birth order, twins together."""
        s = self.s
        u = s.units[uid]
        groups: dict[str, list[str]] = {}
        for c in u.children:  # children are in birth order
            cc = s.chain_of[c]
            if cc == exclude or not self.tree_child(uid, cc):
                continue
            groups.setdefault(cc, []).append(c)
        return list(groups.items())

    def _twin_anchors(self, ordered: list[tuple[str, list[str]]]) -> list[str | None]:
        anchors: list[str | None] = [None] * len(ordered)
        for i, (cc, arr) in enumerate(ordered):
            tw = set()
            for a in arr:
                tw |= set(self.co_twins(a))
            if not tw:
                continue
            left_tw = i > 0 and any(x in tw for x in ordered[i - 1][1])
            right_tw = i + 1 < len(ordered) and any(x in tw for x in ordered[i + 1][1])
            anchors[i] = "both" if left_tw and right_tw else "left" if left_tw else "right" if right_tw else None
        return anchors

    def _order_groups(self, groups: list[tuple[str, list[str]]], uid: str, ends: str,
                      sib_ends: str = "both") -> list[tuple[str, list[str]]]:
        """Move children whose blocks reach above their row to the ends, then children with
        partners to the sibship's remaining ends.

        ``ends``: which ends are free to reach above ('both', 'left', 'right', 'none');
        ``sib_ends``: which ends of the sibship these groups hold ('both', 'left', 'right')."""
        if len(groups) < 2:
            return groups
        # keep twin sets together as one item
        items: list[list[tuple[str, list[str]]]] = []
        for g in groups:
            if items and any(t in items[-1][-1][1] for a in g[1] for t in self.co_twins(a)):
                items[-1].append(g)
            else:
                items.append([g])
        if len(items) < 2:
            return groups

        def needy(item) -> bool:
            # a child whose block must reach beside its parents (an in-law family drawn)
            return any(self.chain_from_above(cc, uid, "none", None).bad >
                       self.chain_from_above(cc, uid, "both", None).bad for cc, _ in item)

        flags = [needy(it) for it in items]
        if not any(flags):
            return [g for it in self._partnered_to_ends(items, flags, sib_ends) for g in it]
        needy_items = [it for it, f in zip(items, flags) if f]
        rest = [it for it, f in zip(items, flags) if not f]
        if len(needy_items) == 1:
            it = needy_items[0]
            i = items.index(it)
            at_free_end = (i == 0 and ends != "right") or (i == len(items) - 1 and ends != "left")
            if at_free_end:
                return groups
            go_left = ends == "left" or (ends == "both" and i < (len(items) - 1) / 2)
            new = [it] + rest if go_left else rest + [it]
        else:
            new = [needy_items[0]] + rest + needy_items[1:]
        new = self._partnered_to_ends(new, [needy(it) for it in new], sib_ends)
        return [g for it in new for g in it]

    def _partnered_to_ends(self, items: list, fixed: list[bool], ends: str) -> list:
        """Move siblings who have partners to the free ends of the sibship, so that no partner
        stands under the sibship line.  Items already placed at an end for another reason
        (``fixed``) stay; siblings with a recorded partner come before those with only an
        unrecorded one; among equals, those already at an end stay; the others keep their
        birth order (a change is noted by the layout).  ``ends``: the ends of the sibship these
        items hold ('both', 'left', 'right')."""
        n = len(items)
        if n < 2:
            return items

        def partnered(item) -> int:  # 2: a recorded partner; 1: only an unrecorded one (a short line)
            return max((2 if any(not t.startswith("~") for t in self.s.chains[cc] if t not in arr) else
                        1 if len(self.s.chains[cc]) > 1 else 0) for cc, arr in item)

        slots = [e for side, e in (("left", 0), ("right", n - 1)) if ends in (side, "both") and not fixed[e]]
        weights = [partnered(it) for it in items]
        cands = [i for i in range(n) if weights[i] > 0 and not fixed[i]]
        if not slots or not cands:
            return items
        chosen = sorted(cands, key=lambda i: (-weights[i], i not in slots, i))[: len(slots)]
        chosen.sort()
        if len(chosen) == len(slots):
            place = dict(zip(sorted(slots), chosen))
        else:  # one sibling for two free ends: the nearer end
            i = chosen[0]
            place = {min(slots, key=lambda e: abs(e - i)): i}
        if all(e == i for e, i in place.items()):
            return items
        left = place.get(0) if 0 in place else None
        right = place.get(n - 1) if (n - 1) in place and n - 1 != 0 else None
        middle = [it for k, it in enumerate(items) if k not in (left, right)]
        out = ([items[left]] if left is not None else []) + middle + ([items[right]] if right is not None else [])
        return out

    def _down(self, uid: str, allowed: str) -> _Built:
        s = self.s
        groups = self._order_groups(self._groups(uid, None), uid, allowed)
        anchors = self._twin_anchors(groups)
        issues: list[str] = []
        reach: set[str] = set()
        blocks = []
        k = len(groups)
        for i, ((cc, _), anc) in enumerate(zip(groups, anchors)):
            if k == 1:
                a = allowed
            elif i == 0:
                a = "left" if allowed in ("left", "both") else "none"
            elif i == k - 1:
                a = "right" if allowed in ("right", "both") else "none"
            else:
                a = "none"
            end = "both" if k == 1 else "left" if i == 0 else "right" if i == k - 1 else "none"
            b = self.chain_from_above(cc, uid, a, anc, end)
            issues += b.issues
            reach |= b.reach
            blocks.append(b)
        rc = s.row[s.units[uid].children[0]] if s.units[uid].children else 0
        rows_all: set[int] = set()
        for b in blocks:
            rows_all |= set(b.rows)
        out: dict[int, list] = {}
        for r in sorted(rows_all):
            if r >= rc:
                t: list = []
                for b in blocks:
                    t += b.rows.get(r, [])
            else:
                t = [_CORR]
                for b in reversed(blocks):
                    t = _wrap(b.rows.get(r), t)
            out[r] = t
        return _Built(out, tuple(issues), frozenset(reach))

    # -- unit seen from one of its children: the block beside that child ---------------------------
    def side_block(self, uid: str, child: str, side: str) -> _Built:
        key = ("side", uid, child, side)
        if key not in self.memo:
            self.memo[key] = self._side(uid, child, side)
        return self.memo[key]

    def _side(self, uid: str, child: str, side: str) -> _Built:
        s = self.s
        u = s.units[uid]
        own_chain = s.chain_of[child]
        groups = self._groups(uid, own_chain)
        twins_of_child = set(self.co_twins(child))
        near = [g for g in groups if any(a in twins_of_child for a in g[1])]
        far = [g for g in groups if g not in near]
        # a sibling whose block reaches above this row (a partner's family drawn) goes to the outer end
        if len(far) > 1:
            ends = "left" if side == "left" else "right"
            far = self._order_groups(far, uid, ends, ends)
        # the child's own place is next to the rest of the drawing
        ordered = far + near if side == "left" else near + far
        issues: list[str] = []
        w_reach: set[str] = set()
        blocks = []
        k = len(ordered)
        for i, (cc, arr) in enumerate(ordered):
            outer = (i == 0) if side == "left" else (i == k - 1)
            a = side if outer else "none"
            anc = None
            if any(x in twins_of_child for x in arr):
                anc = "right" if side == "left" else "left"
            b = self.chain_from_above(cc, uid, a, anc, side if outer else "none")
            issues += b.issues
            w_reach |= b.reach
            blocks.append(b)
        rc = s.row[child]
        w_rows: dict[int, list] = {}
        rows_all: set[int] = {rc}
        for b in blocks:
            rows_all |= set(b.rows)
        for r in sorted(rows_all):
            if r >= rc:
                t: list = []
                for b in blocks:
                    t += b.rows.get(r, [])
                t = t + [_CORR] if side == "left" else [_CORR] + t
            else:
                t = [_INNER]
                for b in reversed(blocks):
                    t = _wrap(b.rows.get(r), t)
            w_rows[r] = t
        pc = self.parent_chain.get(uid)
        if pc is None or not self.tree_child(uid, pc):
            rows = {r: [x for x in t if x != _INNER] for r, t in w_rows.items()}
        else:
            rows, pissues = self._parent_chain_beside(pc, uid, w_rows, side, w_reach)
            issues += pissues
        # every row gets the corridor at its inner end
        final: dict[int, list] = {}
        for r, t in rows.items():
            t = [x for x in t if x != _INNER]
            if _CORR not in t:
                t = t + [_CORR] if side == "left" else [_CORR] + t
            else:
                i = t.index(_CORR)
                stray = t[i + 1 :] if side == "left" else t[:i]
                if any(not _is_marker(x) for x in stray) and not issues:
                    issues.append(self._reach_words([child]))
            final[r] = t
        return _Built(final, tuple(issues))

    def _parent_chain_beside(self, pc: str, uid: str, w_rows: dict[int, list], side: str, w_reach=frozenset()):
        s = self.s
        path = s.chains[pc]
        in_laws = self.in_law_units(pc, None)
        best = None
        for flip in (False, True):
            members = list(reversed(path)) if flip else list(path)
            idx = {m: i for i, m in enumerate(members)}
            units = [x for _, x in self.chain_units(pc) if x == uid or self.tree_child(pc, x)]
            if flip:
                units = list(reversed(units))
            issues: list[str] = []
            wpos = units.index(uid)
            if (side == "left" and wpos != len(units) - 1) or (side == "right" and wpos != 0):
                who = " and ".join(self.s.units[uid].real_parents)
                issues.append(f"{who} stand between two other partners of theirs: their children cannot all "
                              "be placed without crossing lines")
            wpar = self.s.units[uid].parents
            inner_end = max(idx[q] for q in wpar) if side == "left" else min(idx[q] for q in wpar)
            downs = []
            w_outer = any(
                any(not _is_marker(x) for x in (t[: t.index(_INNER)] if side == "left" else t[t.index(_INNER) + 1 :]))
                for t in w_rows.values() if _INNER in t
            )
            if w_outer and len(units) > 1:
                issues.append(self._reach_words(w_reach))
            for j, du in enumerate(units):
                if du == uid:
                    downs.append(_Built(w_rows))
                    continue
                outer = (j == 0) if side == "left" else (j == len(units) - 1)
                b = self.down_unit(du, side if outer else "none")
                issues += b.issues
                downs.append(b)
            sides = []
            # members on the outer side of the couple carry their family outwards; a member at the
            # inner end can only carry a family that stays above the child's row
            inner_start = min(idx[q] for q in wpar)
            for m in sorted(in_laws, key=idx.get):
                if side == "left":
                    mside = "left" if idx[m] < inner_end else "right"
                else:
                    mside = "right" if idx[m] > inner_start else "left"
                b = self.side_block(in_laws[m], m, mside)
                issues += b.issues
                if mside != side:
                    rc = s.row[members[0]] + 1
                    if any(r >= rc and any(not _is_marker(x) for x in t) for r, t in b.rows.items()):
                        issues.append(self._reach_words([m]))
                sides.append(("L" if mside == "left" else "R", b))
            rows = self._assemble_beside(members, s.row[members[0]], downs, sides)
            cand = (len(issues), 1 if flip else 0, rows, tuple(issues))
            if best is None or cand[:2] < best[:2]:
                best = cand
        return best[2], best[3]

    def _assemble_beside(self, members, r0, downs, sides) -> dict[int, list]:
        rows_all: set[int] = {r0}
        for b in downs:
            rows_all |= set(b.rows)
        for _, b in sides:
            rows_all |= set(b.rows)
        out: dict[int, list] = {}
        for r in sorted(rows_all):
            if r > r0:
                t: list = []
                for b in downs:
                    t += [x for x in b.rows.get(r, [])]
            else:
                t = list(members) if r == r0 else []
                for b in reversed(downs):
                    row = b.rows.get(r)
                    if row is not None and _INNER in row:
                        t = _wrap(row, t, _INNER)
                    else:
                        t = _wrap(row, t)
            for _, b in reversed(sides):
                t = _wrap(b.rows.get(r), t)
            out[r] = t
        return out


# ---------------------------------------------------------------------------
# the layout
# ---------------------------------------------------------------------------


def layout_pedigree(
    pedigree: Pedigree,
    label_sizes: Mapping[str, tuple[float, float]] | None = None,
    *,
    symbol_size: float = 1.0,
) -> PedigreeLayout:
    """Lay out ``pedigree``.

    ``label_sizes``: person -> (width, height) of the text block printed
    under the symbol, in layout units (default :data:`DEFAULT_LABEL`).  The
    result's ``warnings`` name structures that could not be laid out without
    crossings and any crossing or overlap found by :func:`check_layout`;
    ``notes`` name siblings placed out of birth order.
    """
    if len(pedigree) == 0:
        return PedigreeLayout((), (), (), (), Box(0, 0, 0, 0), symbol_size)
    s = _Structure(pedigree)
    sz = float(symbol_size)
    labels = {p: tuple(map(float, (label_sizes or {}).get(p, DEFAULT_LABEL))) for p in s.people}
    warnings = list(s.warnings)
    notes: list[str] = []

    rows_tokens, loose_units = _order(s, warnings)
    xs = _solve_x(s, rows_tokens, labels, sz, loose_units, warnings)
    return _build(s, rows_tokens, xs, labels, sz, warnings, notes)


def _order(s: _Structure, warnings: list[str]) -> tuple[dict[int, list[str]], set[str]]:
    o = _Orderer(s)
    comp_rows: list[dict[int, list[str]]] = []
    isolated: list[str] = []
    ped = s.ped
    proband = next((p for p in s.people if ped.member(p).proband), None)
    proband_anc = set(ped.ancestors(proband)) | {proband} if proband else set()
    # components of the chain/unit graph, biggest (or the proband's) first
    chain_ids = list(s.chains)
    seen: set[str] = set()
    components: list[list[str]] = []
    for cid in chain_ids:
        if cid in seen:
            continue
        comp, queue = [], deque([cid])
        seen.add(cid)
        while queue:
            n = queue.popleft()
            comp.append(n)
            for m in o.adj[n]:
                if m not in seen:
                    seen.add(m)
                    queue.append(m)
        components.append(comp)

    def people_in(comp):
        return [t for n in comp if n.startswith("c:") for t in s.chains[n] if not t.startswith("~")]

    components.sort(key=lambda c: (not any(p in proband_anc for p in people_in(c)), -len(people_in(c)),
                                   min(s.pos[p] for p in people_in(c)) if people_in(c) else 0))
    for comp in components:
        ppl = people_in(comp)
        chains = [n for n in comp if n.startswith("c:")]
        if len(ppl) == 1 and len(comp) == 1:
            isolated.append(ppl[0])
            continue
        top = min(s.row[s.chains[c][0]] for c in chains)
        candidates = [c for c in chains if s.row[s.chains[c][0]] == top]

        def root_key(c):
            mem = [m for m in s.chains[c] if not m.startswith("~")]
            return (not any(m in proband_anc for m in mem), -len(mem), min((s.pos[m] for m in mem), default=0))

        root = min(candidates, key=root_key)
        o.spanning_tree(root)
        built = o.root_chain(root)
        for issue in built.issues:
            if issue not in warnings:
                warnings.append(issue)
        rows = {r: [t for t in toks if not _is_marker(t)] for r, toks in built.rows.items()}
        comp_rows.append(rows)
    loose: set[str] = set()
    for key in o.loop_edges:
        a, b = tuple(key)
        uid = a if a.startswith("u:") else b
        loose.add(uid)
    if o.loop_edges:
        involved = set()
        for uid in loose:
            involved.update(q for q in s.units[uid].real_parents)
        names = ", ".join(sorted(involved, key=s.pos.get))
        warnings.append(
            f"the family links form a closed loop (consanguinity, or relatives of one family marrying relatives "
            f"of another) through the children of {names}: some lines of descent cannot avoid crossing"
        )
    # align further components and isolated people with the main one by birth years
    final: dict[int, list[str]] = defaultdict(list)
    main_years = _row_years(s, comp_rows[0]) if comp_rows else {}
    for i, rows in enumerate(comp_rows):
        shift = 0 if i == 0 else _best_shift(_row_years(s, rows), main_years)
        for r, toks in rows.items():
            final[r + shift].extend(toks)
            for t in toks:
                s.row[t] = r + shift
    for p in isolated:
        b = ped.member(p).birth_date
        r = 0
        if b is not None and main_years:
            r = min(main_years, key=lambda k: (abs(main_years[k] - b.year), k))
        s.row[p] = r
        final[r].append(p)
        if len(s.people) == 1:
            continue
        why = "is adopted in with no adoptive parents recorded" if p in s.adopted_in else \
            "has no parents, partner or children recorded"
        warnings.append(f"{p} {why}: drawn apart at the right of generation {roman(r + 1)}")
    return dict(final), loose


def _row_years(s: _Structure, rows: Mapping[int, list[str]]) -> dict[int, float]:
    out = {}
    for r, toks in rows.items():
        years = [s.ped.member(t).birth_date.year for t in toks if not t.startswith("~") and s.ped.member(t).birth_date]
        if years:
            out[r] = float(np.median(years))
    return out


def _best_shift(years: Mapping[int, float], main: Mapping[int, float]) -> int:
    if not years or not main:
        return 0
    best = (float("inf"), 0)
    for shift in range(0, max(main) + 1):
        pairs = [(y, main[r + shift]) for r, y in years.items() if r + shift in main]
        if not pairs:
            continue
        cost = sum(abs(a - b) for a, b in pairs) / len(pairs)
        best = min(best, (cost, shift))
    return best[1]


# -- horizontal positions ---------------------------------------------------------


def _extents(s: _Structure, p: str, labels, sz: float) -> tuple[float, float, float]:
    """(left extent, right extent, half footprint) of token ``p`` from its centre."""
    if p.startswith("~"):
        return _VIRTUAL_HALF, _VIRTUAL_HALF, 0.0
    half = sz / 2 + (_BRACKET * sz if p in s.adopted_in else 0.0)
    lw = labels[p][0] / 2
    left = max(half, lw)
    if s.ped.member(p).proband:
        left = max(left, sz / 2 + _ARROW * sz + 0.35 * sz)
    return left, max(half, lw), half


def _anchors(s: _Structure, uid: str, order_index: Mapping[str, int]) -> list[list[str]]:
    """The children of a unit grouped into anchors (a child, or a twin set), in row order."""
    u = s.units[uid]
    kids = sorted(u.children, key=lambda c: order_index[c])
    groups: list[list[str]] = []
    for c in kids:
        if groups and c in s.ped.co_twins(groups[-1][-1]):
            groups[-1].append(c)
        else:
            groups.append([c])
    return groups


def _solve_x(s, rows_tokens, labels, sz, loose, warnings) -> dict[str, float]:
    """Horizontal positions by linear programming: separations are hard
    constraints; each line of descent is kept within its sibship line (hard,
    unless the order makes that impossible: then a heavy penalty and a
    warning) and pulled to the middle of it; rows are kept short."""
    xs = _lp_x(s, rows_tokens, labels, sz, loose, hard=True)
    if xs is None:
        warnings.append("a line of descent could not be kept above its sibship: lines may cross")
        xs = _lp_x(s, rows_tokens, labels, sz, loose, hard=False)
    assert xs is not None
    return xs


def _lp_x(s, rows_tokens, labels, sz, loose, hard: bool) -> dict[str, float] | None:
    tokens = [t for r in sorted(rows_tokens) for t in rows_tokens[r]]
    col = {t: i for i, t in enumerate(tokens)}
    order_index = {t: i for r in rows_tokens for i, t in enumerate(rows_tokens[r])}
    n = len(tokens)
    ext = {t: _extents(s, t, labels, sz) for t in tokens}
    A_rows: list[tuple[dict[int, float], float]] = []  # sum(coef x) <= b
    A_eq: list[tuple[dict[int, float], float]] = []
    cost = np.zeros(n)
    aux_cost: list[float] = []
    aux_rows: list[tuple[dict[int, float], int]] = []  # (expr, aux index): |expr| <= aux
    slack_rows: list[tuple[dict[int, float], int]] = []  # (expr, aux index): expr <= aux

    partner_pairs = set()
    for u in s.units.values():
        if len(u.parents) == 2:
            partner_pairs.add(frozenset(u.parents))

    for r, toks in rows_tokens.items():
        for a, b in zip(toks, toks[1:]):
            la, ra, ha = ext[a]
            lb, rb, hb = ext[b]
            if frozenset((a, b)) in partner_pairs:
                if a.startswith("~"):
                    need = lb + _PARTNER_CLEAR * sz
                elif b.startswith("~"):
                    need = ra + _PARTNER_CLEAR * sz
                else:
                    need = max(ra + lb + _GAP * sz, 2 * max(ra, lb) + 2 * _PARTNER_CLEAR * sz,
                               ha + hb + _MIN_RELATIONSHIP * sz)
                cost[col[b]] += _PARTNER_WEIGHT
                cost[col[a]] -= _PARTNER_WEIGHT
            else:
                need = ra + lb + _GAP * sz
                cost[col[b]] += _ROW_WEIGHT
                cost[col[a]] -= _ROW_WEIGHT
            A_rows.append(({col[a]: 1.0, col[b]: -1.0}, -need))  # x_a - x_b <= -need

    for uid, u in s.units.items():
        if not u.parents or not u.children:
            continue
        if any(c not in col for c in u.children) or any(q not in col for q in u.parents):
            continue
        if u.virtual:
            top = {col[u.virtual]: 1.0}
        else:
            top = {col[u.parents[0]]: 0.5, col[u.parents[1]]: 0.5}
        groups = _anchors(s, uid, order_index)
        first: dict[int, float] = defaultdict(float)
        last: dict[int, float] = defaultdict(float)
        for end, grp in ((first, groups[0]), (last, groups[-1])):
            end[col[grp[0]]] += 0.5
            end[col[grp[-1]]] += 0.5
        centre = defaultdict(float)
        for k, v in first.items():
            centre[k] += v / 2
        for k, v in last.items():
            centre[k] += v / 2
        dev = dict(top)
        for k, v in centre.items():
            dev[k] = dev.get(k, 0.0) - v
        aux_rows.append((dev, len(aux_cost)))
        aux_cost.append(_CENTRE_WEIGHT)
        if uid in loose:
            continue
        # first <= top <= last
        e1 = dict(first)
        for k, v in top.items():
            e1[k] = e1.get(k, 0.0) - v
        e2 = dict(top)
        for k, v in last.items():
            e2[k] = e2.get(k, 0.0) - v
        if hard:
            A_rows.append((e1, 0.0))
            A_rows.append((e2, 0.0))
        else:
            for e in (e1, e2):
                slack_rows.append((e, len(aux_cost)))
                aux_cost.append(1000.0)

    m_aux = len(aux_cost)
    nv = n + m_aux
    c = np.concatenate([cost * 1.0, np.array(aux_cost)]) if m_aux else cost
    # a small pull towards x = 0 keeps the solution bounded and unique-ish
    c = c.copy()
    c[:n] += 1e-4
    rows_i, cols_i, vals = [], [], []
    b_ub = []
    k = 0
    for expr, rhs in A_rows:
        for j, v in expr.items():
            rows_i.append(k)
            cols_i.append(j)
            vals.append(v)
        b_ub.append(rhs)
        k += 1
    for expr, ai in aux_rows:
        for sign in (1.0, -1.0):
            for j, v in expr.items():
                rows_i.append(k)
                cols_i.append(j)
                vals.append(sign * v)
            rows_i.append(k)
            cols_i.append(n + ai)
            vals.append(-1.0)
            b_ub.append(0.0)
            k += 1
    for expr, ai in slack_rows:
        for j, v in expr.items():
            rows_i.append(k)
            cols_i.append(j)
            vals.append(v)
        rows_i.append(k)
        cols_i.append(n + ai)
        vals.append(-1.0)
        b_ub.append(0.0)
        k += 1
    A = coo_matrix((vals, (rows_i, cols_i)), shape=(k, nv)).tocsr() if k else None
    bounds = [(0, None)] * nv
    res = linprog(c, A_ub=A, b_ub=np.array(b_ub) if k else None, bounds=bounds, method="highs")
    if res.status != 0:
        return None
    x = res.x[:n]
    return {t: float(round(x[col[t]], 9)) for t in tokens}


# -- building the result --------------------------------------------------------------------


def _build(s: _Structure, rows_tokens, xs, labels, sz, warnings, notes) -> PedigreeLayout:
    ped = s.ped
    rows = sorted(rows_tokens)
    # vertical positions: each row as tall as its tallest text block
    row_y: dict[int, float] = {}
    y = 0.0
    last = None
    for r in range(min(rows), max(rows) + 1):
        if last is not None:
            lh = max((labels[t][1] for t in rows_tokens.get(last, []) if not t.startswith("~")), default=0.0)
            y += sz / 2 + _LABEL_PAD * sz + lh + _LINE_GAP * sz + _DROP * sz + sz / 2
        row_y[r] = y
        last = r
    order_index = {t: i for r in rows_tokens for i, t in enumerate(rows_tokens[r])}
    row_of = {t: r for r in rows_tokens for t in rows_tokens[r]}

    placed: list[PlacedPerson] = []
    number: dict[str, int] = {}
    for r in rows:
        people = [t for t in rows_tokens[r] if not t.startswith("~")]
        for i, p in enumerate(sorted(people, key=lambda q: xs[q]), start=1):
            number[p] = i
    for p in s.people:
        if p not in xs:
            continue
        r = row_of[p]
        x, yy = xs[p], row_y[r]
        half = sz / 2 + (_BRACKET * sz if p in s.adopted_in else 0.0)
        fp = Box(x - half, yy - sz / 2, x + half, yy + sz / 2)
        lw, lh = labels[p]
        ly0 = yy + sz / 2 + _LABEL_PAD * sz
        lb = Box(x - lw / 2, ly0, x + lw / 2, ly0 + lh)
        arrow = abox = None
        if ped.member(p).proband:
            hx, hy = x - half - 0.06 * sz, yy + 0.12 * sz
            tx, ty = hx - _ARROW * sz, yy + 0.45 * sz
            arrow = (tx, ty, hx, hy)
            abox = Box(tx - 0.3 * sz, hy - 0.02 * sz, hx, ty + 0.02 * sz)
        placed.append(PlacedPerson(p, x, yy, sz, r + 1, number[p], fp, lb, p in s.adopted_in, arrow, abox))
    by_code = {pp.person: pp for pp in placed}

    segs: list[Segment] = []
    twins: list[TwinMark] = []
    for uid, u in s.units.items():
        kids = [c for c in u.children if c in xs]
        if not kids:
            continue
        g = uid
        all_adopted = all(c in s.adopted_in for c in kids)
        ysib = row_y[row_of[kids[0]]] - sz / 2 - _DROP * sz
        top_x = None
        if u.parents and all(q in xs for q in u.parents):
            ypar = row_y[row_of[u.parents[0]]]
            if u.virtual:
                p = u.real_parents[0]
                pp = by_code[p]
                vx = xs[u.virtual]
                edge = pp.footprint.x1 if vx > pp.x else pp.footprint.x0
                segs.append(Segment("relationship", edge, ypar, vx, ypar, g, (p,), partner_unknown=True))
                top_x = vx
            else:
                a, b = sorted(u.parents, key=lambda q: xs[q])
                pa, pb = by_code[a], by_code[b]
                double = ped.kinship(a, b) > 0
                segs.append(Segment("relationship", pa.footprint.x1, ypar, pb.footprint.x0, ypar, g, (a, b),
                                    double=double))
                top_x = (pa.x + pb.x) / 2
            segs.append(Segment("adoption" if all_adopted else "descent", top_x, ypar, top_x, ysib, g, (),
                                dashed=all_adopted))
        groups = _anchors(s, uid, order_index)
        anchor_x = []
        for grp in groups:
            if len(grp) == 1:
                c = grp[0]
                pc = by_code[c]
                kind = "adoption" if c in s.adopted_in else "descent"
                segs.append(Segment(kind, pc.x, ysib, pc.x, pc.footprint.y0, g, (c,), dashed=kind == "adoption"))
                anchor_x.append(pc.x)
            else:
                members = [by_code[c] for c in grp]
                ax = (members[0].x + members[-1].x) / 2
                anchor_x.append(ax)
                for pc in members:
                    segs.append(Segment("twin", ax, ysib, pc.x, pc.footprint.y0, g, (pc.person,),
                                        dashed=pc.person in s.adopted_in))
                zyg = _zygosity(ped, grp)
                twins.append(TwinMark(tuple(grp), zyg, ax, ysib))
                if zyg == "monozygotic":
                    ybar = ysib + 0.5 * (members[0].footprint.y0 - ysib)
                    t = (ybar - ysib) / (members[0].footprint.y0 - ysib)
                    pts = [ax + t * (pc.x - ax) for pc in members]
                    for x0, x1 in zip(pts, pts[1:]):
                        segs.append(Segment("twin", x0, ybar, x1, ybar, g, ()))
        span = anchor_x + ([top_x] if top_x is not None else [])
        lo, hi = min(span), max(span)
        if hi - lo > _EPS:
            segs.append(Segment("sibship", lo, ysib, hi, ysib, g, ()))

    xs_all = [b for pp in placed for b in (pp.footprint.x0, pp.label_box.x0, pp.footprint.x1, pp.label_box.x1)]
    xs_all += [pp.arrow_box.x0 for pp in placed if pp.arrow_box]
    ys_all = [pp.footprint.y0 for pp in placed] + [pp.label_box.y1 for pp in placed]
    bounds = Box(min(xs_all), min(ys_all), max(xs_all), max(ys_all))
    gens = tuple(GenerationRow(r + 1, row_y[r]) for r in range(min(rows), max(rows) + 1))
    notes.extend(_order_notes(s, by_code))
    notes.extend(_under_sibship_notes(s, by_code))
    layout = PedigreeLayout(tuple(placed), tuple(segs), tuple(twins), gens, bounds, sz, (), ())
    problems = check_layout(layout)
    if problems:
        shown = problems[:8]
        more = f" (and {len(problems) - 8} more)" if len(problems) > 8 else ""
        warnings.append("the drawing has crossings or overlaps: " + "; ".join(shown) + more)
    return PedigreeLayout(tuple(placed), tuple(segs), tuple(twins), gens, bounds, sz, tuple(warnings), tuple(notes))


def _zygosity(ped: Pedigree, grp: list[str]) -> str:
    kinds = {ped.twin_type(a, b) for a in grp for b in grp if a != b}
    kinds.discard(None)
    if kinds == {"monozygotic"}:
        return "monozygotic"
    if "unknown" in kinds or not kinds:
        return "unknown"
    return "dizygotic"


def _under_sibship_notes(s: _Structure, by_code: Mapping[str, PlacedPerson]) -> list[str]:
    """Name anyone whose symbol stands under the sibship line of a sibship they do not belong to
    (the siblings with partners could not all stand at its ends)."""
    out = []
    for u in s.units.values():
        kids = [c for c in u.children if c in by_code]
        if len(kids) < 2:
            continue
        lo, hi = min(by_code[c].x for c in kids), max(by_code[c].x for c in kids)
        row = by_code[kids[0]].generation
        under = sorted((q for q in by_code.values() if q.person not in kids and q.generation == row
                        and lo + _EPS < q.x < hi - _EPS), key=lambda q: q.x)
        if under:
            who = " and ".join(u.real_parents) or "unrecorded parents"
            out.append(f"{', '.join(q.person for q in under)} {'stands' if len(under) == 1 else 'stand'} under the "
                       f"sibship line of the children of {who}: their siblings with partners cannot all stand "
                       "at its ends")
    return out


def _order_notes(s: _Structure, by_code: Mapping[str, PlacedPerson]) -> list[str]:
    out = []
    for u in s.units.values():
        kids = [c for c in u.children if c in by_code]
        dated = [c for c in kids if s.ped.member(c).birth_date is not None]
        by_x = sorted(dated, key=lambda c: by_code[c].x)
        by_birth = sorted(dated, key=s.birth_key)
        if [s.ped.member(c).birth_date for c in by_x] != [s.ped.member(c).birth_date for c in by_birth]:
            who = " and ".join(u.real_parents) or "unrecorded parents"
            out.append(f"children of {who} are not all in birth order, so that lines do not cross and partners "
                       "stand clear of the sibship line")
    return out


# ---------------------------------------------------------------------------
# geometry check
# ---------------------------------------------------------------------------


def _cross(ax, ay, bx, by) -> float:
    return ax * by - ay * bx


def segment_intersection(a: Segment, b: Segment, eps: float = 1e-9):
    """Common points of two segments: None, ('point', (x, y)) or ('overlap', ((x, y), (x, y)))."""
    px, py = a.x0, a.y0
    rx, ry = a.x1 - a.x0, a.y1 - a.y0
    qx, qy = b.x0, b.y0
    sx, sy = b.x1 - b.x0, b.y1 - b.y0
    scale = max(1.0, abs(px), abs(py), abs(qx), abs(qy))
    tol = eps * scale
    d = _cross(rx, ry, sx, sy)
    wx, wy = qx - px, qy - py
    la = math.hypot(rx, ry)
    lb = math.hypot(sx, sy)
    if abs(d) <= tol * max(la, lb, 1.0):
        # parallel: collinear?
        if la > 0 and abs(_cross(wx, wy, rx, ry)) / la > tol:
            return None
        if la == 0 and lb == 0:
            return ("point", (px, py)) if math.hypot(wx, wy) <= tol else None
        if la == 0:
            return _point_on(b, px, py, tol)
        rr = rx * rx + ry * ry
        t0 = (wx * rx + wy * ry) / rr
        t1 = t0 + (sx * rx + sy * ry) / rr
        lo, hi = max(0.0, min(t0, t1)), min(1.0, max(t0, t1))
        if hi < lo - tol / max(la, 1e-12):
            return None
        p0 = (px + lo * rx, py + lo * ry)
        p1 = (px + hi * rx, py + hi * ry)
        if math.hypot(p1[0] - p0[0], p1[1] - p0[1]) <= tol:
            return ("point", p0)
        return ("overlap", (p0, p1))
    t = _cross(wx, wy, sx, sy) / d
    u = _cross(wx, wy, rx, ry) / d
    ta = tol / max(la, 1e-12)
    tb = tol / max(lb, 1e-12)
    if -ta <= t <= 1 + ta and -tb <= u <= 1 + tb:
        return ("point", (px + t * rx, py + t * ry))
    return None


def _point_on(seg: Segment, x: float, y: float, tol: float):
    rx, ry = seg.x1 - seg.x0, seg.y1 - seg.y0
    rr = rx * rx + ry * ry
    t = ((x - seg.x0) * rx + (y - seg.y0) * ry) / rr
    t = min(1.0, max(0.0, t))
    cx, cy = seg.x0 + t * rx, seg.y0 + t * ry
    return ("point", (x, y)) if math.hypot(cx - x, cy - y) <= tol else None


def _is_end(seg: Segment, pt, tol: float) -> bool:
    return math.hypot(seg.x0 - pt[0], seg.y0 - pt[1]) <= tol or math.hypot(seg.x1 - pt[0], seg.y1 - pt[1]) <= tol


def segments_cross(a: Segment, b: Segment) -> bool:
    """True when the two segments cross in the sense of this module (see the module docstring)."""
    hit = segment_intersection(a, b)
    if hit is None:
        return False
    if a.group != b.group:
        return True
    if hit[0] == "overlap":
        return True
    tol = 1e-6 * max(1.0, abs(a.x0), abs(a.y0))
    return not (_is_end(a, hit[1], tol) or _is_end(b, hit[1], tol))


def clip_interval(x0: float, y0: float, x1: float, y1: float, box: Box,
                  eps: float = 0.0) -> tuple[float, float] | None:
    """Parameter interval [t0, t1] of the segment (x0, y0)-(x1, y1) inside the closed box, grown by
    ``eps`` on every side (Liang-Barsky), or None."""
    t0, t1 = 0.0, 1.0
    dx, dy = x1 - x0, y1 - y0
    for p, q in ((-dx, x0 - (box.x0 - eps)), (dx, (box.x1 + eps) - x0),
                 (-dy, y0 - (box.y0 - eps)), (dy, (box.y1 + eps) - y0)):
        if abs(p) < 1e-15:
            if q < 0:
                return None
            continue
        r = q / p
        if p < 0:
            t0 = max(t0, r)
        else:
            t1 = min(t1, r)
        if t0 > t1:
            return None
    return t0, t1


def _clip(seg: Segment, box: Box, eps: float = _EPS) -> tuple[float, float] | None:
    """Parameter interval [t0, t1] of the segment inside the closed box (Liang-Barsky), or None."""
    return clip_interval(seg.x0, seg.y0, seg.x1, seg.y1, box, eps)


def segment_meets_box(seg: Segment, box: Box) -> bool:
    return _clip(seg, box) is not None


def _touches_only_at_end(seg: Segment, box: Box) -> bool:
    """The segment meets the closed box only in a very short piece at one of its end points."""
    hit = _clip(seg, box)
    if hit is None:
        return True
    t0, t1 = hit
    length = max(seg.length, 1e-12)
    short = (t1 - t0) * length <= 1e-5
    return short and (t0 * length <= 1e-5 or (1 - t1) * length <= 1e-5)


def check_layout(layout: PedigreeLayout) -> list[str]:
    """Every overlap and crossing in ``layout`` (empty when there is none)."""
    problems: list[str] = []
    boxes: list[tuple[str, str, Box]] = []
    for p in layout.people:
        boxes.append(("symbol", p.person, p.footprint))
        boxes.append(("text", p.person, p.label_box))
        if p.arrow_box is not None:
            boxes.append(("arrow", p.person, p.arrow_box))
    for i in range(len(boxes)):
        ki, pi, bi = boxes[i]
        for j in range(i + 1, len(boxes)):
            kj, pj, bj = boxes[j]
            if pi == pj:
                continue
            if bi.meets(bj):
                problems.append(f"{ki} of {pi} overlaps {kj} of {pj}")
    segs = layout.segments
    sboxes = [_seg_box(g) for g in segs]
    for i in range(len(segs)):
        for j in range(i + 1, len(segs)):
            if not sboxes[i].meets(sboxes[j]):
                continue
            if segments_cross(segs[i], segs[j]):
                problems.append(
                    f"{segs[i].kind} line of {_group_words(segs[i].group)} crosses "
                    f"{segs[j].kind} line of {_group_words(segs[j].group)}"
                )
    for seg, sbox in zip(segs, sboxes):
        for kind, person, box in boxes:
            if not sbox.meets(box):
                continue
            if kind == "symbol" and person in seg.people:
                if not _touches_only_at_end(seg, box):
                    problems.append(f"{seg.kind} line of {_group_words(seg.group)} runs into the symbol of {person}")
            elif segment_meets_box(seg, box):
                problems.append(f"{seg.kind} line of {_group_words(seg.group)} touches the {kind} of {person}")
    return problems


def _seg_box(seg: Segment) -> Box:
    return Box(min(seg.x0, seg.x1), min(seg.y0, seg.y1), max(seg.x0, seg.x1), max(seg.y0, seg.y1))


def _group_words(group: str) -> str:
    g = group[2:] if group.startswith("u:") else group
    if g.startswith("~twins:"):
        return f"the twins of {g.split(':', 1)[1]}"
    a, _, b = g.partition("|")
    return f"{a} and {b}" if a and b else f"{a or b}"
