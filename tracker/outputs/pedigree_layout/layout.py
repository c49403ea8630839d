"""The layout entry point: rows, order, positions, result."""

from __future__ import annotations

from collections import defaultdict, deque
from collections.abc import Mapping

import numpy as np

from tracker.domain.pedigree import Pedigree
from tracker.outputs.pedigree_layout.constants import DEFAULT_LABEL
from tracker.outputs.pedigree_layout.results import Box, PedigreeLayout, roman
from tracker.outputs.pedigree_layout.structure import _Structure
from tracker.outputs.pedigree_layout.ordering import _Orderer, _is_marker
from tracker.outputs.pedigree_layout.positions import _solve_x
from tracker.outputs.pedigree_layout.build import _build


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
