"""Structure of a pedigree for layout: units, chains of partners, generation rows."""

from __future__ import annotations

import datetime as dt
from collections import defaultdict, deque
from collections.abc import Mapping
from dataclasses import dataclass

from tracker.domain.pedigree import Pedigree


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
