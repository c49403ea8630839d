"""The clinic's cascade uptake figures as an A4 PDF (reportlab): tables, a cascade funnel and
time-to-first-contact and time-to-test curves, each with the exact definition it uses.

Page 1: the period, where the dates come from, the counts by degree of relationship (every
percentage with its count and denominator), the informing route and the medians.  Then the
funnel, the two Kaplan-Meier curves (drawn as the proportion who had the event, censored
relatives marked with a tick), the per-family table and the definitions.  The footer of every
page carries the cautions and "page N of M".  Family and person codes only, never a name.

Fonts are the PDF standard Helvetica faces (Latin-1 text).  Pure apart from writing the file
it is given.
"""

from __future__ import annotations

import datetime as dt
import math
from dataclasses import dataclass
from pathlib import Path

from reportlab.graphics.shapes import Drawing, Line, PolyLine, Rect, String
from reportlab.lib import colors
from reportlab.lib.pagesizes import A4
from reportlab.lib.styles import ParagraphStyle
from reportlab.lib.units import mm
from reportlab.platypus import CondPageBreak, KeepTogether, PageBreak, SimpleDocTemplate, Spacer, Table, TableStyle

from tracker.engines import uptake as U
from tracker.outputs.pdf_pages import numbered_canvas, paragraph

PAGE = A4
MARGIN_MM = 16
FOOTER_MM = 24

_TEXT = ParagraphStyle("up_text", fontName="Helvetica", fontSize=9, leading=11.5)
_SMALL = ParagraphStyle("up_small", parent=_TEXT, fontSize=8, leading=10)
_HEAD = ParagraphStyle("up_head", parent=_TEXT, fontName="Helvetica-Bold")
_TITLE = ParagraphStyle("up_title", parent=_TEXT, fontName="Helvetica-Bold", fontSize=15, leading=19, spaceAfter=2)
_META = ParagraphStyle("up_meta", parent=_TEXT, fontSize=9.5, leading=12.5)
_SECTION = ParagraphStyle("up_section", parent=_TEXT, fontName="Helvetica-Bold", fontSize=11, leading=14,
                          spaceBefore=8, spaceAfter=4, keepWithNext=1)  # fmt: skip
_DEF = ParagraphStyle("up_def", parent=_SMALL, textColor=colors.HexColor("#333333"), spaceBefore=2, spaceAfter=4)
_FOOTER = ParagraphStyle("up_footer", parent=_TEXT, fontSize=7.5, leading=9.5, textColor=colors.HexColor("#333333"))

_INK = colors.HexColor("#1F3A5F")
_PALE = colors.HexColor("#C9D6E8")
_GRID = colors.HexColor("#BBBBBB")
_NOTREC = colors.HexColor("#E6E6E6")

STATUS_WORDS = {"informed": "Informed", "counselled": "Counselled", "tested": "Tested", "screened": "Screened",
                "declined": "Declined", "not_reachable": "Not reachable"}  # fmt: skip
ROUTE_WORDS = {"via_family": "Through the family", "direct": "Directly by the clinic",
               "not_recorded": "Route not recorded"}  # fmt: skip


@dataclass(frozen=True)
class UptakeDocument:
    clinic: str
    printed: dt.date
    report: U.UptakeReport
    source: str
    notes: tuple[str, ...] = ()


def file_name(start: dt.date | None, end: dt.date) -> str:
    """``uptake-FROM-TO.pdf`` (``uptake-to-TO.pdf`` without a start): dates only, never a name."""
    return f"uptake-{start.isoformat()}-{end.isoformat()}.pdf" if start else f"uptake-to-{end.isoformat()}.pdf"


def _table(data: list[list], widths: list[float], head_rows: int = 1) -> Table:
    cells = [[paragraph(str(c), _HEAD if i < head_rows or j == 0 else _TEXT) if not hasattr(c, "wrap") else c
              for j, c in enumerate(row)] for i, row in enumerate(data)]  # fmt: skip
    t = Table(cells, colWidths=widths, repeatRows=head_rows)
    t.setStyle(TableStyle([
        ("VALIGN", (0, 0), (-1, -1), "TOP"),
        ("BACKGROUND", (0, 0), (-1, head_rows - 1), colors.HexColor("#E4E4E4")),
        ("LINEBELOW", (0, 0), (-1, -1), 0.3, colors.HexColor("#AAAAAA")),
        ("BOX", (0, 0), (-1, -1), 0.5, colors.HexColor("#888888")),
        ("LEFTPADDING", (0, 0), (-1, -1), 3), ("RIGHTPADDING", (0, 0), (-1, -1), 3),
        ("TOPPADDING", (0, 0), (-1, -1), 2), ("BOTTOMPADDING", (0, 0), (-1, -1), 2),
    ]))  # fmt: skip
    return t


def _groups(rep: U.UptakeReport) -> list[tuple[str, U.GroupFigures]]:
    out = [("All at-risk relatives", rep.clinic)]
    out += [(U.DEGREE_WORDS[g].capitalize(), f) for g, f in rep.by_degree.items()]
    return out


def counts_table(rep: U.UptakeReport, width: float) -> Table:
    groups = _groups(rep)
    data = [[""] + [name for name, _ in groups], ["At risk (denominator)"] + [str(f.at_risk) for _, f in groups]]
    for s in U.STATUSES:
        data.append([STATUS_WORDS[s]] + [f.counts[s].text() for _, f in groups])
    data.append(["Of the tested: elsewhere"] + [f.tested_elsewhere.text() for _, f in groups])
    first = 42 * mm
    return _table(data, [first] + [(width - first) / len(groups)] * len(groups))


def route_table(rep: U.UptakeReport, width: float) -> Table:
    groups = _groups(rep)
    data = [["Of the informed"] + [name for name, _ in groups]]
    for r in U.ROUTES:
        data.append([ROUTE_WORDS[r]] + [f.routes[r].text() for _, f in groups])
    first = 42 * mm
    return _table(data, [first] + [(width - first) / len(groups)] * len(groups))


def _median_text(t: U.TimeFigure) -> str:
    if t.relatives == 0:
        return "—"
    if t.median_days is None:
        return "not reached"
    return f"{t.median_days:.0f} d ({t.median_months:.1f} mo)"


def times_table(rep: U.UptakeReport, width: float) -> Table:
    groups = _groups(rep)
    data = [[""] + [name for name, _ in groups]]
    for label, attr in (("First contact", "time_to_first_contact"), ("Genetic test", "time_to_test")):
        data.append([f"{label}: median (Kaplan-Meier)"] + [_median_text(getattr(f, attr)) for _, f in groups])
        data.append([f"{label}: relatives / events / censored"] + [
            f"{getattr(f, attr).relatives} / {getattr(f, attr).events} / {getattr(f, attr).censored}"
            for _, f in groups])  # fmt: skip
    first = 42 * mm
    return _table(data, [first] + [(width - first) / len(groups)] * len(groups))


def funnel_drawing(g: U.GroupFigures, width: float) -> Drawing:
    """Horizontal bars: at risk, informed, counselled, tested, screened (each of the at-risk)."""
    stages = [("At risk", U.Proportion(g.at_risk, g.at_risk))] + [
        (STATUS_WORDS[s], g.counts[s]) for s in ("informed", "counselled", "tested", "screened")]
    bar_h, gap, label_w, text_w = 7 * mm, 2.5 * mm, 26 * mm, 46 * mm
    height = len(stages) * (bar_h + gap) + 4 * mm
    d = Drawing(width, height)
    span = width - label_w - text_w
    for i, (name, p) in enumerate(stages):
        y = height - (i + 1) * (bar_h + gap)
        d.add(String(0, y + bar_h / 2 - 3, name, fontName="Helvetica-Bold", fontSize=9))
        d.add(Rect(label_w, y, span, bar_h, fillColor=None, strokeColor=_GRID, strokeWidth=0.5))
        if not p.recorded or p.count is None:
            d.add(Rect(label_w, y, span, bar_h, fillColor=_NOTREC, strokeColor=_GRID, strokeWidth=0.5))
            text = "not recorded"
        else:
            share = p.count / p.of if p.of else 0.0
            w = span * share
            if w > 0:
                d.add(Rect(label_w + (span - w) / 2, y, w, bar_h, fillColor=_INK if i == 0 else _PALE,
                           strokeColor=_INK, strokeWidth=0.5))  # fmt: skip
            text = f"{p.count} of {p.of}" if i == 0 else p.text()
        d.add(String(label_w + span + 3 * mm, y + bar_h / 2 - 3, text, fontName="Helvetica", fontSize=9))
    return d


def _nice_step(span: float, ticks: int = 6) -> float:
    raw = max(span / ticks, 1e-9)
    mag = 10 ** math.floor(math.log10(raw))
    for m in (1, 2, 3, 6, 12):
        if m * mag >= raw:
            return m * mag
    return 12 * mag


def curve_drawing(t: U.TimeFigure, width: float, title: str, event_words: str) -> Drawing:
    """A Kaplan-Meier step curve of the proportion with the event, x in months, censoring ticks."""
    height = 56 * mm
    left, bottom, right, top = 14 * mm, 10 * mm, 4 * mm, 8 * mm
    d = Drawing(width, height)
    d.add(String(0, height - 4 * mm, f"{title} (percent {event_words}; Kaplan-Meier)", fontName="Helvetica-Bold",
                 fontSize=9.5))  # fmt: skip
    pw, ph = width - left - right, height - bottom - top
    x0, y0 = left, bottom
    if t.relatives == 0:
        d.add(String(x0, y0 + ph / 2, "— no relatives with a cascade start date in the period", fontName="Helvetica",
                     fontSize=9))  # fmt: skip
        return d
    longest = (t.follow_up_days[1] if t.follow_up_days else 0) / U.DAYS_PER_MONTH
    xmax = max(longest, max((p[0] for p in t.curve), default=0) / U.DAYS_PER_MONTH, 1.0)
    step = _nice_step(xmax)
    xmax = math.ceil(xmax / step) * step

    def X(days: float) -> float:
        return x0 + pw * (days / U.DAYS_PER_MONTH) / xmax

    def Y(p: float) -> float:
        return y0 + ph * p

    for k in range(0, 11, 2):
        yy = Y(k / 10)
        d.add(Line(x0, yy, x0 + pw, yy, strokeColor=_GRID, strokeWidth=0.3))
        d.add(String(x0 - 2, yy - 3, f"{k * 10}%", fontName="Helvetica", fontSize=7, textAnchor="end"))
    m = 0.0
    while m <= xmax + 1e-9:
        xx = x0 + pw * m / xmax
        d.add(Line(xx, y0, xx, y0 - 1.5 * mm, strokeColor=colors.black, strokeWidth=0.5))
        d.add(String(xx, y0 - 4.5 * mm, f"{m:g}", fontName="Helvetica", fontSize=7, textAnchor="middle"))
        m += step
    d.add(Line(x0, y0, x0 + pw, y0, strokeColor=colors.black, strokeWidth=0.6))
    d.add(Line(x0, y0, x0, y0 + ph, strokeColor=colors.black, strokeWidth=0.6))
    d.add(String(x0 + pw / 2, 0.5 * mm, "months from the proband's result", fontName="Helvetica", fontSize=7.5,
                 textAnchor="middle"))  # fmt: skip
    # step curve: hold each proportion until the next event, then to the longest follow-up
    pts: list[float] = []
    last_p = 0.0
    prev_x = 0.0
    for day, p in t.curve:
        pts += [X(prev_x), Y(last_p), X(day), Y(last_p), X(day), Y(p)]
        prev_x, last_p = day, p
    end_day = max(prev_x, float(t.follow_up_days[1]) if t.follow_up_days else prev_x)
    pts += [X(end_day), Y(last_p)]
    d.add(PolyLine(pts, strokeColor=_INK, strokeWidth=1.2))

    def at(day: float) -> float:
        p = 0.0
        for dd, pp in t.curve:
            if dd <= day:
                p = pp
        return p

    for c in t.censor_days:
        xx, yy = X(c), Y(at(c))
        d.add(Line(xx, yy - 1.2 * mm, xx, yy + 1.2 * mm, strokeColor=_INK, strokeWidth=0.7))
    if t.median_days is not None:
        xm = X(t.median_days)
        d.add(Line(x0, Y(0.5), xm, Y(0.5), strokeColor=colors.HexColor("#888888"), strokeWidth=0.5,
                   strokeDashArray=[2, 2]))  # fmt: skip
        d.add(Line(xm, y0, xm, Y(0.5), strokeColor=colors.HexColor("#888888"), strokeWidth=0.5, strokeDashArray=[2, 2]))
    return d


def family_table(rep: U.UptakeReport, width: float) -> Table:
    data = [["Family", "Cascade start", "At risk", "Informed", "Tested", "Screened", "First contact: median",
             "In the clinic figures"]]  # fmt: skip
    for f in rep.families:
        g = f.figures
        data.append([
            f.family, f.proband_result_date.isoformat() if f.proband_result_date else "none",
            str(g.at_risk), g.counts["informed"].text(), g.counts["tested"].text(), g.counts["screened"].text(),
            _median_text(g.time_to_first_contact) if f.proband_result_date else "—",
            "yes" if f.in_period else f"no: {f.left_out_reason}",
        ])  # fmt: skip
    fixed = [18, 22, 13, 25, 25, 25, 25]
    widths = [w * mm for w in fixed] + [width - sum(fixed) * mm]
    return _table(data, widths)


def build_story(doc: UptakeDocument) -> list:
    rep = doc.report
    width = PAGE[0] - 2 * MARGIN_MM * mm
    p = rep.period
    period = f"{p.start.isoformat() if p.start else 'the first cascade'} to {p.end.isoformat()}"
    story: list = [
        paragraph(f"Cascade uptake: {doc.clinic}", _TITLE),
        paragraph(f"Families whose cascade started from {period}; events counted up to {p.end.isoformat()}. "
                  f"{rep.families_counted} families, {rep.clinic.at_risk} at-risk relatives. "
                  f"Printed {doc.printed.isoformat()}. Codes only, never names.", _META),  # fmt: skip
        paragraph(U.SMALL_NUMBERS, _META),
        paragraph(doc.source, _DEF),
        paragraph("Counts by degree of relationship to the proband", _SECTION),
        counts_table(rep, width),
        paragraph(" ".join([U.DEF_AT_RISK, U.DEF_DEGREE]), _DEF),
        paragraph("How the informed relatives were told", _SECTION),
        route_table(rep, width),
        paragraph(U.DEF_ROUTE, _DEF),
        paragraph("Time from the proband's result", _SECTION),
        times_table(rep, width),
        paragraph(U.DEF_PROBAND_RESULT, _DEF),
        PageBreak(),
        paragraph("Cascade funnel (all at-risk relatives in the period)", _SECTION),
        funnel_drawing(rep.clinic, width),
        paragraph(U.DEF_FUNNEL + " " + " ".join(U.DEFINITIONS[s] for s in ("informed", "counselled", "tested",
                                                                         "screened")), _DEF),  # fmt: skip
        CondPageBreak(80 * mm),
        KeepTogether([
            curve_drawing(rep.clinic.time_to_first_contact, width, "Time to first contact", "contacted"),
            paragraph(rep.clinic.time_to_first_contact.text() + ".", _SMALL),
            paragraph(U.DEF_TIME_TO_CONTACT + " Ticks: relatives censored (not yet contacted).", _DEF),
        ]),
        CondPageBreak(80 * mm),
        KeepTogether([
            curve_drawing(rep.clinic.time_to_test, width, "Time to genetic test", "tested"),
            paragraph(rep.clinic.time_to_test.text() + ".", _SMALL),
            paragraph(U.DEF_TIME_TO_TEST + " Ticks: relatives censored (not yet tested).", _DEF),
        ]),
        PageBreak(),
        paragraph("Families", _SECTION),
        family_table(rep, width),
    ]
    notes = list(doc.notes) + list(rep.notes)
    if notes:
        story.append(paragraph("Notes", _SECTION))
        story += [paragraph(n, _SMALL) for n in notes]
    story.append(paragraph("Definitions", _SECTION))
    for key, words in U.DEFINITIONS.items():
        story.append(paragraph(words, _DEF))
    return story


def write_uptake_pdf(doc: UptakeDocument, path: str | Path) -> Path:
    """Write ``doc`` as an A4 PDF at ``path`` (the folder must exist) and return the path."""
    path = Path(path)
    footer = f"{U.CAUTION} {U.SMALL_NUMBERS}"
    p = doc.report.period
    pdf = SimpleDocTemplate(
        str(path), pagesize=PAGE, leftMargin=MARGIN_MM * mm, rightMargin=MARGIN_MM * mm, topMargin=12 * mm,
        bottomMargin=FOOTER_MM * mm + 3 * mm,
        title=f"Cascade uptake {p.start.isoformat() if p.start else ''} to {p.end.isoformat()}".replace("  ", " "),
        author=doc.clinic, subject="Cascade uptake figures (codes only)", creator="hcm-family-tracker",
    )  # fmt: skip
    pdf.build(build_story(doc), canvasmaker=numbered_canvas(
        PAGE, MARGIN_MM, FOOTER_MM, _FOOTER,
        lambda n, total: f"{footer}  Printed {doc.printed.isoformat()}, page {n} of {total}."))  # fmt: skip
    return path
