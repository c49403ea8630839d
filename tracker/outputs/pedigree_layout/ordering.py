"""Left-to-right order of each generation row: recursive blocks on the tree of chains and units."""

from __future__ import annotations

from collections import defaultdict, deque
from collections.abc import Iterable, Mapping
from dataclasses import dataclass

from tracker.outputs.pedigree_layout.constants import _CORR, _INNER
from tracker.outputs.pedigree_layout.structure import _Structure


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
