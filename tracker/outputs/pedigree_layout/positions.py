"""Horizontal positions of every symbol (a linear programme)."""

from __future__ import annotations

from collections import defaultdict
from collections.abc import Mapping

import numpy as np
from scipy.optimize import linprog
from scipy.sparse import coo_matrix

from tracker.outputs.pedigree_layout.constants import _ARROW, _BRACKET, _CENTRE_WEIGHT, _GAP, _MIN_RELATIONSHIP, _PARTNER_CLEAR, _PARTNER_WEIGHT, _ROW_WEIGHT, _VIRTUAL_HALF
from tracker.outputs.pedigree_layout.structure import _Structure


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
