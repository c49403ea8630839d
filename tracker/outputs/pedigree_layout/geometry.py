"""Geometry check of a layout: overlaps and crossings, segment clipping."""

from __future__ import annotations

import math

from tracker.outputs.pedigree_layout.constants import _EPS
from tracker.outputs.pedigree_layout.results import Box, PedigreeLayout, Segment


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
