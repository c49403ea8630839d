"""A family's pedigree as a printable PDF (A4 landscape), in standard pedigree nomenclature.

Nomenclature (NSGC 1995 / 2008 / 2022 recommendations, docs/reference/standards.md
section 1 [V] unless marked):

* **Shapes**: square = male, circle = female, diamond = unknown.  The 2022
  revision draws the shape by *gender identity* and writes the sex assigned at
  birth below (AMAB / AFAB / UAAB) [V].  This store holds the sex at birth as
  a controlled word and gender identity as free text, which cannot be mapped
  to a shape reliably, so the shape here follows ``sex_at_birth`` (the 2008
  convention) and, where a gender identity is recorded, it is printed under
  the symbol together with the sex assigned at birth (e.g. "gender: woman,
  AMAB").  This choice is stated in the legend.
* **Affected** (latest assessment ``affected``) filled; otherwise open.
  Only clinical affection fills a symbol: a genotype-positive relative with a
  normal echo is not shaded [V].  ``?`` inside an open symbol means
  "affection unknown" [V] and is used for one thing only: a person **at risk**
  who has never been evaluated.  At risk: with a pathogenic or likely
  pathogenic family variant, anyone whose genotype is carrier, at risk or
  uncertain (tested or inferred non-carriers and relatives outside the
  variant's line are not); without one, blood relatives of an affected person
  or of the proband.  A married-in or adopted-in relative who is not at risk
  and was never evaluated is drawn open with no evaluation text.
* **Evaluations** (2008: ``E`` defined in the legend, ``E1``, ``E2`` for
  several, result in parentheses, ``u`` uninformative [V]): ``E1`` = the
  latest clinical cardiac evaluation: ``E1+`` affected, ``E1-`` not
  affected, ``E1u`` equivocal (phenotype uncertain; open symbol, no ``?``),
  year in parentheses.  ``E2`` = the genetic test for the family variant:
  ``E2+ (MYBPC3 c.1504C>T)`` carrier, ``E2-`` non-carrier, ``E2u``
  inconclusive, ``E2- (panel: no variant found)``; a variant that is not
  pathogenic or likely pathogenic carries its class (``, VUS``).
* **Deceased**: diagonal slash; under the symbol ``d.`` with the age at death
  (the person field ``death_age``, else worked out from the dates, ``~`` when
  approximate), the year, and the cause (``death_cause``) when recorded:
  ``d. 41 y (1979), sudden``.  **Proband**: arrow at the lower left with "P".
* **Carriers** (2008 marks): a vertical line inside the symbol for a
  presymptomatic carrier (tested carrier, or monozygotic co-twin of one,
  evaluated and not affected) of a pathogenic or likely pathogenic variant (a
  carrier never evaluated shows ``?`` and the ``E2+`` text instead); a dot in the centre
  for an obligate carrier (inferred, untested) who is not affected.  The 2022
  revision changed how carrier status is shown; its new marks were not
  re-read for this project (from memory, verify), so the test result is
  always printed as text as well (standards.md 1a).
* **Every mark legible on its own** (:func:`symbol_marks`): the carrier line
  stops short of the outline (it never runs on from a line of descent); a
  ``?`` beside a carrier mark moves to the left half; the slash is broken
  where it would cross the dot, the ``?`` or the carrier line, stops above
  the text, and shows white across a filled symbol.
* **Text under a symbol**: the name (only with ``names=True``), the person
  code (always: the identifier every other output uses; generation-position
  numbers such as ``II-3`` are not printed because they read like person
  codes), birth year, death, gender identity, evaluations.
  **Placeholders** (drawn only to connect the pedigree) show their code only.
* Generations in Roman numerals at the left; a legend of every symbol used;
  the family code, the date drawn (ISO 8601) and "Drawn by tracker".

Style: black lines and text on white, Helvetica; no colour.

Decision support only: the drawing shows what is recorded; the treating
clinician and genetics team decide, following local protocols and the
current guideline.
"""

from __future__ import annotations

import datetime as dt
import math
from collections.abc import Mapping
from dataclasses import dataclass, field
from pathlib import Path

import pandas as pd

from reportlab.lib.pagesizes import A4, landscape
from reportlab.pdfbase.pdfmetrics import stringWidth
from reportlab.pdfgen import canvas

from tracker.domain.dates import PartialDate, completed_years, parse_partial_date
from tracker.domain.genetics import ACTIONABLE_CLASSES, genotype_statuses
from tracker.domain.pedigree import Pedigree, _blank  # one definition of an empty cell
from tracker.outputs.pedigree_layout import (
    Box,
    PedigreeLayout,
    PlacedPerson,
    clip_interval,
    layout_pedigree,
    roman,
)

FONT = "Helvetica"
FONT_BOLD = "Helvetica-Bold"
LABEL_FONT = 0.27  # text under symbols, in symbol widths
LABEL_LINE = 0.33
MAX_SCALE = 28.0  # points per symbol width (a symbol is at most about 10 mm wide)
PAGE = landscape(A4)
MARGIN = 28.0
LEGEND_WIDTH = 200.0

_CLASS_SHORT = {
    "pathogenic": "P",
    "likely_pathogenic": "LP",
    "uncertain_significance": "VUS",
    "likely_benign": "LB",
    "benign": "B",
}
_SEX_AT_BIRTH_TEXT = {"male": "AMAB", "female": "AFAB", "unknown": "UAAB"}  # 2022 abbreviations [V]

CAUTION = (
    "Decision support only: the drawing shows what is recorded; the treating clinician and genetics team "
    "decide, following local protocols and the current guideline."
)


# ---------------------------------------------------------------------------
# what each symbol shows (pure)
# ---------------------------------------------------------------------------


@dataclass(frozen=True)
class PersonMarks:
    """What is drawn for one person.

    ``shape``: 'square', 'circle', 'diamond'.  ``affection``: 'affected'
    (filled), 'unaffected' (open: latest evaluation normal, or not at risk and
    never evaluated), 'uncertain' (open; latest evaluation equivocal, written
    ``E1u``) or 'unknown' (``?`` inside: at risk and never evaluated).
    ``carrier_mark``: 'presymptomatic' (vertical line), 'obligate' (dot) or
    None.  ``lines``: the text under the symbol, top to bottom (the person
    code is always one of them)."""

    person: str
    shape: str
    affection: str
    deceased: bool
    proband: bool
    placeholder: bool
    adopted: str | None
    carrier_mark: str | None
    lines: tuple[str, ...]
    at_risk: bool = False


@dataclass(frozen=True)
class FamilyVariant:
    key: str  # transcript:hgvs_c
    gene: str
    hgvs_c: str
    hgvs_p: str | None
    acmg_class: str | None
    classified_on: str | None

    @property
    def actionable(self) -> bool:
        return self.acmg_class in ACTIONABLE_CLASSES

    def describe(self) -> str:
        cls = (self.acmg_class or "unclassified").replace("_", " ")
        p = f" {self.hgvs_p}" if self.hgvs_p else ""
        when = f" ({self.classified_on})" if self.classified_on else ""
        return f"{self.gene} {self.key}{p}, {cls}{when}"




def _text(v: object) -> str | None:
    return None if _blank(v) else str(v).strip()


def _partial(v: object) -> PartialDate | None:
    if _blank(v):
        return None
    if isinstance(v, PartialDate):
        return v
    if isinstance(v, dt.date):
        return PartialDate(v, "day")
    return parse_partial_date(str(v))


def family_variants(variants: pd.DataFrame | None, family: str) -> dict[str, FamilyVariant]:
    """The family's variants by key, each with its current class (latest classification)."""
    out: dict[str, FamilyVariant] = {}
    if variants is None or len(variants) == 0:
        return out
    rows = variants[variants["family"] == family]
    for (tx, c), grp in rows.groupby(["transcript", "hgvs_c"], sort=False):
        last = grp.sort_values("classified_on", kind="stable").iloc[-1]
        out[f"{tx}:{c}"] = FamilyVariant(
            f"{tx}:{c}", str(last["gene"]), str(c), _text(last.get("hgvs_p")),
            _text(last.get("acmg_class")), _text(last.get("classified_on")),
        )
    return out


def family_variant(variants: pd.DataFrame | None, family: str) -> FamilyVariant | None:
    """The family's variant with its current class; with several variants, the
    most actionable current class (ties: the first)."""
    found = list(family_variants(variants, family).values())
    if not found:
        return None
    order = list(_CLASS_SHORT)
    return min(found, key=lambda v: order.index(v.acmg_class) if v.acmg_class in order else len(order))


def _latest_assessment(assessments: pd.DataFrame | None, people: set[str]) -> dict[str, tuple[str, str | None]]:
    """Person -> (affected status, ISO date) of the latest clinical assessment."""
    if assessments is None or len(assessments) == 0:
        return {}
    a = assessments[assessments["person"].isin(people)]
    a = a.sort_values(["person", "assessment_date"], kind="stable")
    out = {}
    for p, grp in a.groupby("person", sort=False):
        last = grp.iloc[-1]
        status = _text(last["affected_status"])
        if status:
            out[p] = (status, _text(last.get("assessment_date")))
    return out


# Cause of death as recorded (person field ``death_cause``) -> words under the symbol.
DEATH_CAUSE_TEXT = {
    "sudden": "sudden",
    "cardiac_non_sudden": "cardiac, not sudden",
    "non_cardiac": "non-cardiac",
    "unknown": "cause unknown",
}


def _death_age(row: Mapping, birth: PartialDate | None, death: PartialDate | None) -> str | None:
    """'41 y' from the recorded age at death; '~41 y' when only worked out from partial dates."""
    recorded = row.get("death_age")
    if not _blank(recorded):
        return f"{int(float(recorded))} y"
    if birth and death:
        exact = birth.precision == "day" and death.precision == "day"
        years = completed_years(birth.value, death.value) if exact else death.year - birth.year
        return f"{'' if exact else '~'}{years} y"
    return None


def _life_lines(row: Mapping) -> list[str]:
    """Birth year; for the deceased 'd. 41 y (1979), sudden' (nomenclature: "d." with the age at
    death, cause after it)."""
    birth = _partial(row.get("birth_date"))
    death = _partial(row.get("death_date"))
    status = _text(row.get("vital_status")) or "unknown"
    lines = [f"b. {birth.year}"] if birth else []
    if status != "deceased":
        return lines
    age = _death_age(row, birth, death)
    text = "d. " + (age or (str(death.year) if death else "age unknown"))
    if age and death:
        text += f" ({death.year})"
    cause = _text(row.get("death_cause"))
    if cause:
        text += f", {DEATH_CAUSE_TEXT.get(cause, cause.replace('_', ' '))}"
    lines.append(text)
    return lines


# Evaluation key (2008 recommendations: E defined in the legend, E1, E2 ... for several, result in
# parentheses, "u" = uninformative [V]).  E1 = clinical cardiac evaluation, E2 = genetic test.
E1_SIGN = {"affected": "E1+", "unaffected": "E1-", "uncertain": "E1u"}
E2_SIGN = {"carrier": "E2+", "non_carrier": "E2-", "inconclusive": "E2u"}


def _evaluation_lines(results: pd.DataFrame | None, person: str, variants: Mapping[str, FamilyVariant]) -> list[str]:
    """E2 lines for the person's genetic results, latest first (at most two)."""
    if results is None or len(results) == 0:
        return []
    rows = results[results["person"] == person].sort_values("test_date", kind="stable")
    lines: list[str] = []
    seen: set[tuple] = set()
    for r in reversed(rows.to_dict("records")):  # latest first
        result = _text(r.get("result"))
        key = _text(r.get("variant"))
        if (result, key) in seen:
            continue
        seen.add((result, key))
        if result == "no_variant_found":
            lines.append("E2- (panel: no variant found)")
            continue
        v = variants.get(key) if key else None
        what = f"{v.gene} {v.hgvs_c}" if v else (key.split(":", 1)[-1] if key else "variant")
        if v is not None and v.acmg_class and not v.actionable:
            what += f", {_CLASS_SHORT.get(v.acmg_class, v.acmg_class)}"
        lines.append(f"{E2_SIGN.get(result or '', 'E2?')} ({what})")
    return lines[:2]


def _at_risk(pedigree: Pedigree, person: str, status, actionable: bool, affected: set[str],
             proband: str | None) -> bool:
    """Could this person have the family's condition?  With a pathogenic or likely pathogenic
    family variant: everyone whose genotype is carrier, at risk or uncertain (a tested or
    inferred non-carrier, or a relative outside the variant's line, is not).  Without one:
    blood relatives of an affected person or of the proband."""
    if actionable and status.basis not in ("conflict", "too_complex", "unexplained"):
        return status.status not in ("non_carrier", "not_at_risk")
    if person in affected or person == proband:
        return True
    return any(pedigree.kinship(person, q) > 0 for q in (*affected, *([proband] if proband else [])) if q != person)


def pedigree_marks(
    pedigree: Pedigree,
    people: pd.DataFrame,
    genetic_results: pd.DataFrame | None = None,
    assessments: pd.DataFrame | None = None,
    variants: pd.DataFrame | None = None,
    *,
    family: str | None = None,
    names: bool = False,
) -> dict[str, PersonMarks]:
    """What to draw for each person of ``pedigree`` (frames as the store loaders return them;
    the people frame's ``death_cause`` and ``death_age`` columns are read when present)."""
    rows = {r["person"]: r for r in people.to_dict("records") if r["person"] in pedigree}
    codes = set(rows)
    fam = family or next((_text(r.get("family")) for r in rows.values()), None)
    fam_variant = family_variant(variants, fam) if fam else None
    all_variants = family_variants(variants, fam) if fam else {}
    fam_results = None
    if genetic_results is not None and len(genetic_results):
        fam_results = genetic_results[genetic_results["person"].isin(codes)]
    latest = _latest_assessment(assessments, codes)
    statuses = genotype_statuses(
        pedigree, fam_results, fam_variant.acmg_class if fam_variant else None,
        fam_variant.key if fam_variant else None,
    )
    actionable = fam_variant is not None and fam_variant.actionable
    proband = next((p for p in pedigree.people if pedigree.member(p).proband), None)
    affected = {p for p, (a, _) in latest.items() if a == "affected" and p in pedigree}
    out: dict[str, PersonMarks] = {}
    for p in pedigree.people:
        m = pedigree.member(p)
        row = rows.get(p, {})
        shape = {"male": "square", "female": "circle"}.get(m.sex_at_birth, "diamond")
        st = statuses[p]
        at_risk = not m.placeholder and _at_risk(pedigree, p, st, actionable, affected, proband)
        seen = latest.get(p)
        if m.placeholder:
            aff = "unaffected"
        elif seen is None:
            aff = "unknown" if at_risk else "unaffected"
        else:
            aff = seen[0]
        lines: list[str] = []
        if names:
            full = " ".join(x for x in (_text(row.get("given_name")), _text(row.get("family_name"))) if x)
            if full:
                lines.append(full)
        lines.append(p)  # the person code: the identifier every other output uses
        mark = None
        if not m.placeholder:
            lines += _life_lines(row)
            gender = _text(row.get("gender_identity"))
            if gender:
                lines.append(f"gender: {gender}, {_SEX_AT_BIRTH_TEXT[m.sex_at_birth]}")
            if seen is not None:
                when = f" ({seen[1][:4]})" if seen[1] else ""
                lines.append(f"{E1_SIGN.get(seen[0], 'E1?')}{when}")
            lines += _evaluation_lines(fam_results, p, all_variants)
            if actionable and st.status == "carrier" and aff != "affected":
                if st.basis == "obligate":
                    mark = "obligate"
                elif aff != "unknown":  # "presymptomatic" says clinically unaffected: only after an evaluation
                    mark = "presymptomatic"
            if st.basis == "obligate":
                lines.append("obligate carrier")
            elif st.basis == "mz_co_twin":
                lines.append(f"{'carrier' if st.status == 'carrier' else 'non-carrier'} (MZ co-twin's result)")
        out[p] = PersonMarks(p, shape, aff, m.vital_status == "deceased", m.proband, m.placeholder,
                             m.adoption, mark, tuple(lines), at_risk)
    return out


# ---------------------------------------------------------------------------
# text sizes -> layout
# ---------------------------------------------------------------------------


def _label_lines(marks: PersonMarks) -> list[str]:
    return list(marks.lines)


def label_sizes(marks: Mapping[str, PersonMarks]) -> dict[str, tuple[float, float]]:
    """Width and height of each text block in symbol widths."""
    out = {}
    for p, m in marks.items():
        widths = [stringWidth(t, FONT, LABEL_FONT) for t in m.lines] or [0.0]
        out[p] = (max(widths) + 0.1, max(len(m.lines), 1) * LABEL_LINE)
    return out


# ---------------------------------------------------------------------------
# where every mark goes (layout units, y downwards): shared by the drawing and its checks
# ---------------------------------------------------------------------------

# Sizes in symbol widths (drawing choices of this project).
SLASH_OVER = 0.18  # the deceased slash reaches this far beyond the symbol's top right corner
SLASH_UNDER = 0.08  # and this far beyond its bottom left corner (less than the gap to the text)
DOT_RADIUS = 0.09  # obligate carrier dot
CARRIER_LINE_GAP = 0.1  # gap between the presymptomatic carrier line and the outline, top and bottom
QUESTION_ALONE = 0.56  # font size of "?" alone in a symbol
QUESTION_SHARED = 0.34  # font size of "?" beside a carrier mark
QUESTION_SHIFT = 0.24  # "?" beside a carrier mark sits this far left of the centre
CLEARANCE = 0.05  # the slash stops this far from any other mark inside the symbol
CAP = 0.72  # Helvetica cap height, in font sizes
DESCENT = 0.21  # Helvetica descender depth, in font sizes
TWIN_QUESTION = 0.3  # font size of the unknown-zygosity "?"
DOUBLE_OFFSET = 0.07  # half the gap of a double relationship line


@dataclass(frozen=True)
class Mark:
    """One drawn mark: an area (``box``) or a straight line (``seg`` = x0, y0, x1, y1), layout units,
    y downwards.  ``meaning`` says what it shows ('symbol', 'carrier_line', 'obligate_dot',
    'unknown_affection', 'deceased', 'adopted', 'text', 'proband_arrow', 'proband_letter',
    'twin_zygosity', 'line')."""

    person: str | None
    meaning: str
    box: Box | None = None
    seg: tuple[float, float, float, float] | None = None
    text: str | None = None


def _clip_interval(seg: tuple[float, float, float, float], box: Box) -> tuple[float, float] | None:
    """Parameter interval of ``seg`` inside the closed ``box`` (Liang-Barsky), or None."""
    return clip_interval(*seg, box)


def _cut(seg: tuple[float, float, float, float], holes: list[Box]) -> list[tuple[float, float, float, float]]:
    """The pieces of ``seg`` outside every box of ``holes``."""
    cuts = sorted(iv for iv in (_clip_interval(seg, b) for b in holes) if iv is not None)
    x0, y0, x1, y1 = seg
    pieces, t = [], 0.0
    for a, b in cuts + [(1.0, 1.0)]:
        if a - t > 1e-6:
            pieces.append((x0 + t * (x1 - x0), y0 + t * (y1 - y0), x0 + a * (x1 - x0), y0 + a * (y1 - y0)))
        t = max(t, b)
    return pieces


def symbol_marks(m: PersonMarks, cx: float, cy: float, size: float) -> list[Mark]:
    """The symbol of one person and every mark on it, centred at (cx, cy), y downwards.

    Marks inside the symbol never touch each other: the obligate-carrier dot stays in the
    centre (its standard place), a "?" beside a carrier mark moves to the left half, and the
    deceased slash is broken where it would cross the dot, the "?" or the carrier line."""
    h = size / 2
    who = m.person
    out = [Mark(who, "symbol", Box(cx - h, cy - h, cx + h, cy + h))]
    inner: list[Mark] = []
    if m.carrier_mark == "presymptomatic":
        g = CARRIER_LINE_GAP * size  # kept off the outline, so it never runs on from a line of descent
        inner.append(Mark(who, "carrier_line", seg=(cx, cy - h + g, cx, cy + h - g)))
    elif m.carrier_mark == "obligate":
        r = DOT_RADIUS * size
        inner.append(Mark(who, "obligate_dot", Box(cx - r, cy - r, cx + r, cy + r)))
    if m.affection == "unknown":
        fs = size * (QUESTION_SHARED if m.carrier_mark else QUESTION_ALONE)
        w, ht = stringWidth("?", FONT_BOLD, fs), CAP * fs
        qx = cx - QUESTION_SHIFT * size if m.carrier_mark else cx
        inner.append(Mark(who, "unknown_affection", Box(qx - w / 2, cy - ht / 2, qx + w / 2, cy + ht / 2), text="?"))
    out += inner
    if m.adopted:
        b, t = size * 0.14, size * 0.1
        for sgn in (-1, 1):
            xb = cx + sgn * (h + b)
            out.append(Mark(who, "adopted", seg=(xb, cy - h, xb, cy + h)))
            out.append(Mark(who, "adopted", seg=(xb, cy + h, xb - sgn * t, cy + h)))
            out.append(Mark(who, "adopted", seg=(xb, cy - h, xb - sgn * t, cy - h)))
    if m.deceased:
        full = (cx - h - SLASH_UNDER * size, cy + h + SLASH_UNDER * size,
                cx + h + SLASH_OVER * size, cy - h - SLASH_OVER * size)
        c = CLEARANCE * size
        holes = []
        for k in inner:
            if k.box is not None:
                holes.append(Box(k.box.x0 - c, k.box.y0 - c, k.box.x1 + c, k.box.y1 + c))
            elif k.seg is not None:
                x0, y0, x1, y1 = k.seg
                holes.append(Box(min(x0, x1) - c, min(y0, y1) - c, max(x0, x1) + c, max(y0, y1) + c))
        out += [Mark(who, "deceased", seg=piece) for piece in _cut(full, holes)]
    return out


def text_marks(pp: PlacedPerson, m: PersonMarks) -> list[Mark]:
    """One box per line of text under the symbol (baseline, cap height and descender)."""
    out = []
    for i, line in enumerate(_label_lines(m)):
        base = pp.label_box.y0 + (i + 0.8) * LABEL_LINE
        w = stringWidth(line, FONT, LABEL_FONT)
        out.append(Mark(pp.person, "text", Box(pp.x - w / 2, base - CAP * LABEL_FONT, pp.x + w / 2,
                                               base + DESCENT * LABEL_FONT), text=line))
    return out


def _arrow_marks(pp: PlacedPerson) -> list[Mark]:
    tx, ty, hx, hy = pp.arrow
    s = pp.size
    fs = 0.34 * s
    w = stringWidth("P", FONT_BOLD, fs)
    base = ty + 0.4 * fs
    return [
        Mark(pp.person, "proband_arrow", seg=(tx, ty, hx, hy)),
        Mark(pp.person, "proband_letter", Box(tx - 0.04 * s - w, base - CAP * fs, tx - 0.04 * s, base), text="P"),
    ]


def drawing_marks(layout: PedigreeLayout, marks: Mapping[str, PersonMarks]) -> list[Mark]:
    """Every mark of the pedigree drawing, in layout units (what :func:`draw_pedigree` draws)."""
    out: list[Mark] = []
    for pp in layout.people:
        m = marks[pp.person]
        out += symbol_marks(m, pp.x, pp.y, pp.size)
        out += text_marks(pp, m)
        if pp.arrow:
            out += _arrow_marks(pp)
    for sgm in layout.segments:
        offs = (-DOUBLE_OFFSET, DOUBLE_OFFSET) if sgm.double else (0.0,)
        for o in offs:
            out.append(Mark(None, "line", seg=(sgm.x0, sgm.y0 + o, sgm.x1, sgm.y1 + o)))
    for t in layout.twins:
        if t.zygosity == "unknown":
            fs = TWIN_QUESTION * layout.symbol_size
            w = stringWidth("?", FONT, fs)
            base = t.apex_y + 1.15 * fs
            out.append(Mark(None, "twin_zygosity", Box(t.apex_x - w / 2, base - CAP * fs, t.apex_x + w / 2, base),
                            text="?"))
    return out


# ---------------------------------------------------------------------------
# the PDF
# ---------------------------------------------------------------------------


@dataclass
class PedigreeDrawing:
    """What :func:`write_pedigree_pdf` wrote."""

    path: Path
    family: str
    members: int
    layout: PedigreeLayout
    warnings: tuple[str, ...]
    notes: tuple[str, ...]
    legend: tuple[str, ...] = field(default_factory=tuple)


class _Page:
    """Layout units -> page points."""

    def __init__(self, layout: PedigreeLayout, x0: float, y0: float, w: float, h: float):
        b = layout.bounds
        bw, bh = max(b.x1 - b.x0, 1e-6), max(b.y1 - b.y0, 1e-6)
        self.scale = min(w / bw, h / bh, MAX_SCALE)
        self.bx, self.by = b.x0, b.y0
        # centre horizontally, top-align vertically
        self.ox = x0 + (w - bw * self.scale) / 2
        self.oy = y0 + h

    def x(self, v: float) -> float:
        return self.ox + (v - self.bx) * self.scale

    def y(self, v: float) -> float:
        return self.oy - (v - self.by) * self.scale

    def d(self, v: float) -> float:
        return v * self.scale


def _draw_shape(c: canvas.Canvas, shape: str, cx: float, cy: float, size: float, filled: bool) -> None:
    h = size / 2
    if shape == "square":
        c.rect(cx - h, cy - h, size, size, stroke=1, fill=1 if filled else 0)
    elif shape == "circle":
        c.circle(cx, cy, h, stroke=1, fill=1 if filled else 0)
    else:
        p = c.beginPath()
        p.moveTo(cx, cy + h)
        p.lineTo(cx + h, cy)
        p.lineTo(cx, cy - h)
        p.lineTo(cx - h, cy)
        p.close()
        c.drawPath(p, stroke=1, fill=1 if filled else 0)


def _shape_path(c: canvas.Canvas, shape: str, cx: float, cy: float, size: float):
    h = size / 2
    p = c.beginPath()
    if shape == "square":
        p.rect(cx - h, cy - h, size, size)
    elif shape == "circle":
        p.circle(cx, cy, h)
    else:
        p.moveTo(cx, cy + h)
        p.lineTo(cx + h, cy)
        p.lineTo(cx, cy - h)
        p.lineTo(cx - h, cy)
        p.close()
    return p


def _draw_symbol(c: canvas.Canvas, m: PersonMarks, cx: float, cy: float, size: float, line_w: float) -> None:
    """One symbol with its marks, centred at (cx, cy) in points (positions from :func:`symbol_marks`)."""
    c.setLineWidth(line_w)
    c.setStrokeColorRGB(0, 0, 0)
    filled = m.affection == "affected"
    shade = 0 if filled else 1
    c.setFillColorRGB(shade, shade, shade)
    _draw_shape(c, m.shape, cx, cy, size, filled=True)
    c.setFillColorRGB(0, 0, 0)

    def line(seg):
        x0, y0, x1, y1 = seg
        c.line(cx + x0, cy - y0, cx + x1, cy - y1)

    slash = []
    for k in symbol_marks(m, 0.0, 0.0, size):
        if k.meaning in ("carrier_line", "adopted"):
            line(k.seg)
        elif k.meaning == "obligate_dot":
            b = k.box
            c.circle(cx + (b.x0 + b.x1) / 2, cy - (b.y0 + b.y1) / 2, (b.x1 - b.x0) / 2, stroke=0, fill=1)
        elif k.meaning == "unknown_affection":
            b = k.box
            c.setFont(FONT_BOLD, (b.y1 - b.y0) / CAP)
            c.drawCentredString(cx + (b.x0 + b.x1) / 2, cy - b.y1, "?")
        elif k.meaning == "deceased":
            slash.append(k.seg)
            line(k.seg)
    if slash and filled:  # the slash shows white across a filled symbol
        c.saveState()
        c.clipPath(_shape_path(c, m.shape, cx, cy, size), stroke=0, fill=0)
        c.setStrokeColorRGB(1, 1, 1)
        for seg in slash:
            line(seg)
        c.restoreState()


def _draw_arrow(c: canvas.Canvas, pg: _Page, pp: PlacedPerson, line_w: float) -> None:
    tx, ty, hx, hy = pp.arrow
    x0, y0, x1, y1 = pg.x(tx), pg.y(ty), pg.x(hx), pg.y(hy)
    c.setLineWidth(line_w)
    c.line(x0, y0, x1, y1)
    ang = math.atan2(y1 - y0, x1 - x0)
    L = pg.d(0.22)
    p = c.beginPath()
    p.moveTo(x1, y1)
    for da in (2.7, -2.7):
        p.lineTo(x1 + L * math.cos(ang + da), y1 + L * math.sin(ang + da))
    p.close()
    c.drawPath(p, stroke=0, fill=1)
    fs = pg.d(0.34)
    c.setFont(FONT_BOLD, fs)
    c.drawRightString(x0 - pg.d(0.04), y0 - fs * 0.4, "P")


def _legend_entries(marks: Mapping[str, PersonMarks], layout: PedigreeLayout) -> list[tuple[str, str]]:
    """(kind, words) for every symbol used, in a fixed order."""
    used = list(marks.values())
    shapes = {m.shape for m in used}
    out: list[tuple[str, str]] = []
    for shape, words in (("square", "male"), ("circle", "female"), ("diamond", "sex unknown")):
        if shape in shapes:
            out.append((f"shape:{shape}", words))
    if any(m.affection == "affected" for m in used):
        out.append(("affected", "affected (HCM)"))
    if any(m.affection == "unaffected" for m in used):
        out.append(("unaffected", "not affected at the latest evaluation (E1-), or not at risk and never "
                                  "evaluated (no E1 line)"))
    if any(m.affection == "unknown" for m in used):
        out.append(("unknown", "? = at risk and never evaluated: affection unknown"))
    if any(m.affection == "uncertain" for m in used):
        out.append(("uncertain", "open, E1u = evaluated, phenotype uncertain (equivocal result)"))
    if any(m.deceased for m in used):
        out.append(("deceased", "deceased; d. = age at death (year), cause"))
    if any(m.proband for m in used):
        out.append(("proband", "proband"))
    if any(m.carrier_mark == "presymptomatic" for m in used):
        out.append(("presymptomatic", "presymptomatic carrier (2008 mark)"))
    if any(m.carrier_mark == "obligate" for m in used):
        out.append(("obligate", "obligate carrier, inferred (2008 mark)"))
    kinds = {(s.kind, s.double, s.partner_unknown) for s in layout.segments}
    if any(k == "relationship" and not d and not u for k, d, u in kinds):
        out.append(("relationship", "partners (relationship line)"))
    if any(k == "relationship" and d for k, d, _ in kinds):
        out.append(("consanguinity", "partners related by blood"))
    if any(k == "relationship" and u for k, _, u in kinds):
        out.append(("partner_unknown", "other parent not recorded"))
    zyg = {t.zygosity for t in layout.twins}
    for z, words in (("monozygotic", "monozygotic twins"), ("dizygotic", "dizygotic twins"),
                     ("unknown", "twins, zygosity unknown")):
        if z in zyg:
            out.append((f"twins:{z}", words))
    if any(m.adopted == "in" for m in used):
        out.append(("adopted_in", "adopted in (dashed line of descent)"))
    if any(m.adopted == "out" for m in used):
        out.append(("adopted_out", "adopted out"))
    if any(m.placeholder for m in used):
        out.append(("placeholder", "code only: drawn to connect the pedigree"))
    if any(line.startswith("E1") for m in used for line in m.lines):
        out.append(("text:E1", "E1 = cardiac evaluation (ECG, echo, CMR), latest, year in brackets: "
                               "E1+ affected; E1- not affected; E1u uncertain"))
    if any(line.startswith("E2") for m in used for line in m.lines):
        out.append(("text:E2", "E2 = genetic test for the family variant:\nE2+ carrier; E2- non-carrier; "
                               "E2u inconclusive"))
    return out


def _draw_legend_icon(c: canvas.Canvas, kind: str, x: float, y: float, s: float, lw: float) -> None:
    c.setLineWidth(lw)

    def m(**kw) -> PersonMarks:
        base = dict(person="", shape="square", affection="unaffected", deceased=False, proband=False,
                    placeholder=False, adopted=None, carrier_mark=None, lines=())
        base.update(kw)
        return PersonMarks(**base)

    cx, cy = x + s, y
    if kind.startswith("shape:"):
        _draw_symbol(c, m(shape=kind.split(":")[1]), cx, cy, s, lw)
    elif kind in ("affected", "unaffected", "unknown"):
        _draw_symbol(c, m(affection=kind), cx, cy, s, lw)
    elif kind == "uncertain":
        _draw_symbol(c, m(), cx - s * 0.45, cy, s, lw)
        c.setFont(FONT, s * 0.55)
        c.drawString(cx + s * 0.15, cy - s * 0.2, "E1u")
    elif kind == "deceased":
        _draw_symbol(c, m(deceased=True), cx, cy, s, lw)
    elif kind in ("presymptomatic", "obligate"):
        _draw_symbol(c, m(carrier_mark=kind), cx, cy, s, lw)
    elif kind == "proband":
        _draw_symbol(c, m(), cx + s * 0.4, cy, s, lw)
        x1, y1 = cx + s * 0.4 - s * 0.56, cy - s * 0.12
        x0, y0 = x1 - s * 0.7, y1 - s * 0.35
        c.line(x0, y0, x1, y1)
        c.setFont(FONT_BOLD, s * 0.45)
        c.drawRightString(x0 - 1, y0 - s * 0.18, "P")
    elif kind == "relationship":
        c.line(x, cy, x + 2 * s, cy)
    elif kind == "consanguinity":
        c.line(x, cy + s * 0.1, x + 2 * s, cy + s * 0.1)
        c.line(x, cy - s * 0.1, x + 2 * s, cy - s * 0.1)
    elif kind == "partner_unknown":
        _draw_symbol(c, m(), x + s * 0.5, cy, s * 0.8, lw)
        c.line(x + s * 0.9, cy, x + s * 1.6, cy)
        c.line(x + s * 1.6, cy, x + s * 1.6, cy - s * 0.5)
    elif kind.startswith("twins:"):
        z = kind.split(":")[1]
        ax, ay = x + s, cy + s * 0.55
        for dx in (-0.6, 0.6):
            c.line(ax, ay, ax + dx * s, cy - s * 0.25)
            _draw_symbol(c, m(shape="circle" if z == "monozygotic" else "square"), ax + dx * s, cy - s * 0.45,
                         s * 0.4, lw)
        if z == "monozygotic":
            c.line(ax - 0.3 * s, (ay + cy - s * 0.25) / 2, ax + 0.3 * s, (ay + cy - s * 0.25) / 2)
        if z == "unknown":
            c.setFont(FONT, s * 0.45)
            c.drawCentredString(ax, cy - s * 0.1, "?")
    elif kind == "adopted_in":
        c.setDash(1.5, 1.2)
        c.line(cx, cy + s * 0.7, cx, cy + s * 0.3)
        c.setDash()
        _draw_symbol(c, m(adopted="in"), cx, cy - s * 0.05, s * 0.6, lw)
    elif kind == "adopted_out":
        _draw_symbol(c, m(adopted="out"), cx, cy, s * 0.8, lw)
    elif kind == "placeholder":
        _draw_symbol(c, m(), cx, cy, s, lw)
    elif kind.startswith("text:E"):
        c.setFont(FONT_BOLD, s * 0.7)
        c.drawCentredString(cx, cy - s * 0.25, kind.split(":")[1])


def _wrap_words(text: str, font: str, size: float, width: float) -> list[str]:
    """Greedy word wrap to ``width`` points; ``\\n`` forces a new line."""
    lines: list[str] = []
    for para in text.split("\n"):
        cur = ""
        for w in para.split():
            trial = f"{cur} {w}".strip()
            if stringWidth(trial, font, size) <= width or not cur:
                cur = trial
            else:
                lines.append(cur)
                cur = w
        if cur:
            lines.append(cur)
    return lines


def draw_pedigree(
    c: canvas.Canvas,
    layout: PedigreeLayout,
    marks: Mapping[str, PersonMarks],
    *,
    family: str,
    drawn_on: dt.date,
    subtitle: str | None = None,
    names: bool = False,
) -> list[str]:
    """Draw one A4-landscape page on ``c``; returns the legend words used."""
    W, H = PAGE
    top = H - MARGIN
    c.setTitle(f"Pedigree {family}")
    c.setAuthor("tracker")
    c.setSubject(f"Pedigree of family {family}, drawn {drawn_on.isoformat()}")
    c.setFont(FONT_BOLD, 14)
    c.drawString(MARGIN, top - 12, f"Pedigree of family {family}")
    c.setFont(FONT, 9)
    c.drawRightString(W - MARGIN, top - 10, f"Drawn {drawn_on.isoformat()}")
    c.drawRightString(W - MARGIN, top - 22, "Drawn by tracker")
    if subtitle:
        c.setFont(FONT, 9)
        c.drawString(MARGIN, top - 26, subtitle)
    header_bottom = top - 36
    foot = [
        f"Family {family}. Drawn {drawn_on.isoformat()} by tracker. "
        + ("Names shown on request; handle as identifiable." if names else "Person codes only; no names."),
        CAUTION,
    ]
    if layout.warnings:
        foot.append("Layout warnings: " + " | ".join(layout.warnings))
    if layout.notes:  # e.g. siblings out of birth order so that partners stand clear of a sibship line
        foot.append("Layout notes: " + " | ".join(layout.notes))
    foot_lines: list[str] = []
    for f in foot:
        foot_lines += _wrap_words(f, FONT, 7, W - 2 * MARGIN)
    footer_top = MARGIN + 10 + 8.5 * max(len(foot_lines), 4)

    # legend panel
    lx = W - MARGIN - LEGEND_WIDTH
    c.setLineWidth(0.6)
    c.setFont(FONT_BOLD, 9)
    c.drawString(lx, header_bottom - 10, "Legend")
    entries = _legend_entries(marks, layout)
    ly = header_bottom - 26
    s_icon = 10.0
    for kind, words in entries:
        _draw_legend_icon(c, kind, lx, ly + 3, s_icon, 0.7)
        c.setFont(FONT, 7.2)
        wrapped = _wrap_words(words, FONT, 7.2, LEGEND_WIDTH - 3 * s_icon - 4)
        for i, line in enumerate(wrapped):
            c.drawString(lx + 3 * s_icon + 2, ly + 1 - i * 8.5, line)
        ly -= max(16.0, 8.5 * len(wrapped) + 7.5)
    notes = [
        "Shape follows the sex recorded at birth; a recorded gender identity is written under the symbol "
        "with AMAB/AFAB/UAAB (2022 wording).",
        "Carrier marks follow the 2008 recommendations; the 2022 revision shows carrier status differently, "
        "so the test result is always printed as text.",
        "Under each symbol: " + ("name, " if names else "") + "person code (as in every other tracker "
        "output); birth year; death; evaluations. Generations are numbered at the left.",
    ]
    c.setFont(FONT, 6.5)
    ly -= 4
    for n in notes:
        for line in _wrap_words(n, FONT, 6.5, LEGEND_WIDTH):
            c.drawString(lx, ly, line)
            ly -= 7.6
        ly -= 2

    # pedigree area
    area_x0 = MARGIN + 26
    area_w = lx - 16 - area_x0
    area_h = header_bottom - 8 - footer_top
    pg = _Page(layout, area_x0, footer_top, area_w, area_h)
    lw = max(0.5, min(1.1, pg.d(0.045)))
    sym = pg.d(layout.symbol_size)

    # generation numerals
    c.setFont(FONT_BOLD, max(7.0, min(12.0, pg.d(0.45))))
    for g in layout.generations:
        c.drawString(MARGIN, pg.y(g.y) - 4, g.roman)

    c.setLineWidth(lw)
    for sgm in layout.segments:
        x0, y0, x1, y1 = pg.x(sgm.x0), pg.y(sgm.y0), pg.x(sgm.x1), pg.y(sgm.y1)
        if sgm.dashed:
            c.setDash(max(1.5, pg.d(0.12)), max(1.2, pg.d(0.09)))
        if sgm.double:
            off = pg.d(DOUBLE_OFFSET)
            c.line(x0, y0 + off, x1, y1 + off)
            c.line(x0, y0 - off, x1, y1 - off)
        else:
            c.line(x0, y0, x1, y1)
        if sgm.dashed:
            c.setDash()
    for t in layout.twins:
        if t.zygosity == "unknown":
            fs = pg.d(TWIN_QUESTION * layout.symbol_size)
            c.setFont(FONT, fs)
            c.drawCentredString(pg.x(t.apex_x), pg.y(t.apex_y) - fs * 1.15, "?")

    fs = pg.d(LABEL_FONT)
    for pp in layout.people:
        m = marks[pp.person]
        _draw_symbol(c, m, pg.x(pp.x), pg.y(pp.y), sym, lw)
        if pp.arrow:
            _draw_arrow(c, pg, pp, lw)
        c.setFont(FONT, fs)
        c.setFillColorRGB(0, 0, 0)
        for i, line in enumerate(_label_lines(m)):
            yl = pp.label_box.y0 + (i + 0.8) * LABEL_LINE
            c.drawCentredString(pg.x(pp.x), pg.y(yl), line)

    # footer (every line of it: the pedigree area gives way when there are many)
    c.setFont(FONT, 7)
    fy = footer_top - 10
    for line in foot_lines:
        c.drawString(MARGIN, fy, line)
        fy -= 8.5
    return [w.replace("\n", " ") for _, w in entries]


def write_pedigree_pdf(
    out_path: str | Path,
    family: str,
    people: pd.DataFrame,
    genetic_results: pd.DataFrame | None = None,
    assessments: pd.DataFrame | None = None,
    variants: pd.DataFrame | None = None,
    *,
    names: bool = False,
    drawn_on: dt.date | None = None,
) -> PedigreeDrawing:
    """Lay out and draw the pedigree of ``family`` into ``out_path`` (one A4 landscape page).

    Frames are those of :mod:`tracker.store.repository` (all families may be
    passed).  Raises ``KeyError`` when the family has no members.
    """
    layout, marks = family_pedigree(family, people, genetic_results, assessments, variants, names=names)
    members = people[people["family"] == family]
    fv = family_variant(variants, family)
    subtitle = f"Family variant: {fv.describe()}" if fv else "No family variant recorded"
    when = drawn_on or dt.date.today()
    out = Path(out_path)
    c = canvas.Canvas(str(out), pagesize=PAGE, invariant=1)
    legend = draw_pedigree(c, layout, marks, family=family, drawn_on=when, subtitle=subtitle, names=names)
    c.showPage()
    c.save()
    return PedigreeDrawing(out, family, len(members), layout, layout.warnings, layout.notes, tuple(legend))


def render_png(pdf_path: str | Path, png_path: str | Path, *, page: int = 0, scale: float = 2.0) -> Path:
    """Render one page of a PDF to a PNG file (``scale`` 1 = 72 dpi); see letter_pdf.render_png."""
    from tracker.outputs.letter_pdf import render_png as render

    return render(pdf_path, png_path, page=page, scale=scale)


# ---------------------------------------------------------------------------
# the web page (SVG), from the same layout and the same marks as the PDF
# ---------------------------------------------------------------------------

SVG_SCALE = 42.0  # SVG user units (CSS pixels) per symbol width
SVG_PAD = 0.6  # margin around the layout bounds, in symbol widths
SVG_NUMERALS = 0.9  # room at the left for the generation numerals, in symbol widths

_AFFECTION_WORDS = {
    "affected": "affected",
    "unaffected": "not affected",
    "uncertain": "phenotype uncertain",
    "unknown": "at risk, never evaluated",
}


def symbol_title(m: PersonMarks) -> str:
    """The accessible description of a symbol: the person code and what the symbol shows (never a
    name or a date)."""
    words = [m.person]
    if m.placeholder:
        words.append("drawn to connect the pedigree")
    else:
        words.append(_AFFECTION_WORDS.get(m.affection, m.affection))
        if m.carrier_mark == "presymptomatic":
            words.append("presymptomatic carrier")
        elif m.carrier_mark == "obligate":
            words.append("obligate carrier")
    if m.deceased:
        words.append("deceased")
    if m.proband:
        words.append("proband")
    if m.adopted:
        words.append(f"adopted {m.adopted}")
    return ", ".join(words)


def pedigree_svg(layout: PedigreeLayout, marks: Mapping[str, PersonMarks], *, family: str,
                 href=lambda code: f"/person/{code}") -> str:  # fmt: skip
    """The pedigree as inline SVG: every symbol a link (``href(code)``, the code only) with a title.

    Positions, symbols, marks and lines come from the layout and :func:`symbol_marks`, exactly as
    :func:`draw_pedigree` draws them on the PDF; text lines are those of the PDF without names."""
    from tracker.outputs.svg import Svg, num

    b = layout.bounds
    S = SVG_SCALE
    ox = (SVG_PAD + SVG_NUMERALS - b.x0) * S
    oy = (SVG_PAD - b.y0) * S
    width = (b.x1 - b.x0 + 2 * SVG_PAD + SVG_NUMERALS) * S
    height = (b.y1 - b.y0 + 2 * SVG_PAD) * S

    def X(v: float) -> float:  # noqa: N802
        return ox + v * S

    def Y(v: float) -> float:  # noqa: N802
        return oy + v * S

    lw = 0.045 * S
    s = Svg(width, height, label=f"Pedigree of family {family}", css_class="pedigree", role="group")  # symbols are links
    s.el("rect", x=0.0, y=0.0, width=width, height=height, fill="#FFFFFF", stroke="none")
    s.open("g", class_="generations", font_weight="bold", font_size=0.42 * S, fill="#000000")
    for g in layout.generations:
        s.el("text", g.roman, x=0.15 * S, y=Y(g.y) + 0.15 * S)
    s.close()
    s.open("g", class_="lines", stroke="#000000", stroke_width=lw, fill="none")
    for sgm in layout.segments:
        dash = f"{num(0.12 * S)} {num(0.09 * S)}" if sgm.dashed else None
        offs = (-DOUBLE_OFFSET, DOUBLE_OFFSET) if sgm.double else (0.0,)
        for o in offs:
            s.el("line", x1=X(sgm.x0), y1=Y(sgm.y0 + o), x2=X(sgm.x1), y2=Y(sgm.y1 + o), stroke_dasharray=dash,
                 class_=sgm.kind)  # fmt: skip
    s.close()
    for t in layout.twins:
        if t.zygosity == "unknown":
            fs = TWIN_QUESTION * layout.symbol_size
            s.el("text", "?", x=X(t.apex_x), y=Y(t.apex_y + 1.15 * fs), font_size=fs * S, text_anchor="middle",
                 class_="twin-zygosity")  # fmt: skip

    def shape_el(shape: str, cx: float, cy: float, h: float, **attrs) -> None:
        if shape == "square":
            s.el("rect", x=cx - h, y=cy - h, width=2 * h, height=2 * h, **attrs)
        elif shape == "circle":
            s.el("circle", cx=cx, cy=cy, r=h, **attrs)
        else:
            pts = f"{num(cx)},{num(cy - h)} {num(cx + h)},{num(cy)} {num(cx)},{num(cy + h)} {num(cx - h)},{num(cy)}"
            s.el("polygon", points=pts, **attrs)

    for i, pp in enumerate(layout.people):
        m = marks[pp.person]
        filled = m.affection == "affected"
        cx, cy, h = X(pp.x), Y(pp.y), pp.size * S / 2
        s.open("a", href=href(pp.person), class_="person")
        s.el("title", text=symbol_title(m))
        s.open("g", class_="symbol affected" if filled else "symbol", stroke="#000000", stroke_width=lw)
        shape_el(m.shape, cx, cy, h, fill="#000000" if filled else "#FFFFFF")
        slash = []
        for k in symbol_marks(m, pp.x, pp.y, pp.size):
            if k.meaning in ("carrier_line", "adopted"):
                x0, y0, x1, y1 = k.seg
                s.el("line", x1=X(x0), y1=Y(y0), x2=X(x1), y2=Y(y1), class_=k.meaning.replace("_", "-"))
            elif k.meaning == "obligate_dot":
                bx = k.box
                s.el("circle", cx=X((bx.x0 + bx.x1) / 2), cy=Y((bx.y0 + bx.y1) / 2), r=(bx.x1 - bx.x0) / 2 * S,
                     fill="#000000", stroke="none", class_="obligate-dot")  # fmt: skip
            elif k.meaning == "unknown_affection":
                bx = k.box
                s.el("text", "?", x=X((bx.x0 + bx.x1) / 2), y=Y(bx.y1), font_size=(bx.y1 - bx.y0) / CAP * S,
                     font_weight="bold", text_anchor="middle", stroke="none", fill="#000000",
                     class_="unknown-affection")  # fmt: skip
            elif k.meaning == "deceased":
                slash.append(k.seg)
                x0, y0, x1, y1 = k.seg
                s.el("line", x1=X(x0), y1=Y(y0), x2=X(x1), y2=Y(y1), class_="deceased")
        if slash and filled:  # the slash shows white across a filled symbol
            clip = f"clip-{i}"
            s.open("clipPath", id=clip)
            shape_el(m.shape, cx, cy, h)
            s.close()
            for x0, y0, x1, y1 in slash:
                s.el("line", x1=X(x0), y1=Y(y0), x2=X(x1), y2=Y(y1), stroke="#FFFFFF", clip_path=f"url(#{clip})")
        s.close()  # g
        s.close()  # a
        if pp.arrow:
            k = _arrow_marks(pp)
            tx, ty, hx, hy = pp.arrow
            s.el("line", x1=X(tx), y1=Y(ty), x2=X(hx), y2=Y(hy), stroke="#000000", stroke_width=lw,
                 class_="proband-arrow")  # fmt: skip
            ang = math.atan2(Y(hy) - Y(ty), X(hx) - X(tx))
            L = 0.22 * S
            pts = [(X(hx), Y(hy))] + [(X(hx) - L * math.cos(ang + da), Y(hy) - L * math.sin(ang + da))
                                      for da in (0.44, -0.44)]  # fmt: skip
            s.el("polygon", points=" ".join(f"{num(a)},{num(c)}" for a, c in pts), fill="#000000", stroke="none")
            letter = k[1].box
            s.el("text", "P", x=X(letter.x1), y=Y(letter.y1), font_size=0.34 * pp.size * S, font_weight="bold",
                 text_anchor="end", class_="proband-letter")  # fmt: skip
        s.open("g", class_="label", font_size=LABEL_FONT * S, text_anchor="middle", fill="#000000")
        for t in text_marks(pp, m):
            s.el("text", t.text, x=X(pp.x), y=Y(t.box.y1 - DESCENT * LABEL_FONT))
        s.close()
    return s.text()


def family_pedigree(family: str, people: pd.DataFrame, genetic_results: pd.DataFrame | None = None,
                    assessments: pd.DataFrame | None = None, variants: pd.DataFrame | None = None,
                    *, names: bool = False) -> tuple[PedigreeLayout, dict[str, PersonMarks]]:  # fmt: skip
    """The layout and the marks of ``family`` (links into another family are not drawn): what the PDF and
    the SVG both draw.  Raises ``KeyError`` when the family has no members."""
    members = people[people["family"] == family].reset_index(drop=True)
    if members.empty:
        raise KeyError(family)
    codes = set(members["person"])
    frame = members.copy()
    for col in ("mother", "father", "twin_of"):  # links into another family are not drawn
        if col in frame.columns:
            frame.loc[frame[col].notna() & ~frame[col].isin(codes), col] = None
    ped = Pedigree(frame)
    marks = pedigree_marks(ped, frame, genetic_results, assessments, variants, family=family, names=names)
    return layout_pedigree(ped, label_sizes(marks)), marks


def write_pedigree_svg(family: str, people: pd.DataFrame, genetic_results: pd.DataFrame | None = None,
                       assessments: pd.DataFrame | None = None, variants: pd.DataFrame | None = None,
                       *, href=lambda code: f"/person/{code}") -> tuple[str, PedigreeLayout]:  # fmt: skip
    """The pedigree of ``family`` as SVG text (codes only, no names) and the layout it was drawn from."""
    layout, marks = family_pedigree(family, people, genetic_results, assessments, variants)
    return pedigree_svg(layout, marks, family=family, href=href), layout
