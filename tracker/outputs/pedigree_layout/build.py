"""Building the layout result: symbols, lines, twin marks, rows, notes."""

from __future__ import annotations

from collections.abc import Mapping

from tracker.domain.pedigree import Pedigree
from tracker.outputs.pedigree_layout.constants import _ARROW, _BRACKET, _DROP, _EPS, _LABEL_PAD, _LINE_GAP
from tracker.outputs.pedigree_layout.results import Box, GenerationRow, PedigreeLayout, PlacedPerson, Segment, TwinMark
from tracker.outputs.pedigree_layout.structure import _Structure
from tracker.outputs.pedigree_layout.positions import _anchors
from tracker.outputs.pedigree_layout.geometry import check_layout


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
