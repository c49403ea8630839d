"""The nurse's printable recall worklist for a window, as an A4 landscape PDF (reportlab).

One line per visit: person code, due date, how long the person has waited
(days overdue for a person once seen; "never screened, eligible since D; due
now" for a person never screened), what the visit needs (and what to
consider), the reason (wrapped), the flags in plain words and, when weekly
slots are given, the booked week.  Family screening comes first, most urgent
first (the order of :func:`tracker.engines.worklist.select_due`); affected
members follow in their own table; then the *contact gaps*: people who cannot
be booked until contact is made (not contacted, lost to follow-up, declined),
each with the gap, what they wait for and their flags.

Header on the first page: clinic name (settings), the window, the rule set and
interval policy, the "as of" date and the date printed.  Every page carries the
caution (:data:`PAGE_CAUTION` plus the schedule cautions) and "page N of M" in
the footer.  The list carries person codes only, never a name; the PDF
metadata carry the window and the clinic.

Type: 9 pt table text on 11 pt leading (a desk list, not a letter for the
public; common practice).  Fonts are the PDF standard Helvetica faces
(Latin-1 text).  Pure apart from writing the file it is given.
"""

from __future__ import annotations

import datetime as dt
from dataclasses import dataclass, field
from pathlib import Path

from reportlab.lib import colors
from reportlab.lib.pagesizes import A4, landscape
from reportlab.lib.styles import ParagraphStyle
from reportlab.lib.units import mm
from reportlab.platypus import SimpleDocTemplate, Spacer, Table, TableStyle

from tracker.outputs.ics import needs_words
from tracker.outputs.pdf_pages import numbered_canvas, paragraph

PAGE = landscape(A4)
MARGIN_MM = 14
FOOTER_MM = 22

PAGE_CAUTION = (
    "Decision support only: the treating clinician decides. Follow local protocols and the current guideline."
)

_TEXT = ParagraphStyle("wl_text", fontName="Helvetica", fontSize=9, leading=11)
_HEAD_CELL = ParagraphStyle("wl_head_cell", parent=_TEXT, fontName="Helvetica-Bold")
_TITLE = ParagraphStyle("wl_title", parent=_TEXT, fontName="Helvetica-Bold", fontSize=15, leading=19, spaceAfter=2)
_META = ParagraphStyle("wl_meta", parent=_TEXT, fontSize=10, leading=13)
_SECTION = ParagraphStyle("wl_section", parent=_TEXT, fontName="Helvetica-Bold", fontSize=11, leading=14,
                          spaceBefore=8, spaceAfter=4, keepWithNext=1)  # fmt: skip
_FOOTER = ParagraphStyle("wl_footer", parent=_TEXT, fontSize=7.5, leading=9.5, textColor=colors.HexColor("#333333"))


GAP_WORDS = {
    "not_contacted": "not contacted",
    "lost_to_follow_up": "lost to follow-up",
    "declined": "declined",
    "contactable": "contactable",
    # From the contact log (revision 0012): shown instead of the status when they apply.
    "must_not_approach": "MUST NOT BE APPROACHED (asked for no further contact)",
    "contact_later": "asked to be contacted later",
    "no_response": "informed, no response",
}
# Contact categories shown in place of the contact status (tracker.engines.worklist.contact_category).
GAP_CATEGORIES = ("must_not_approach", "contact_later", "no_response")


def gap_words(row: dict) -> str:
    """The gap of a worklist row in plain words: the contact log's category where it says more."""
    contact = row.get("contact")
    if contact in GAP_CATEGORIES:
        words = GAP_WORDS[contact]
        if contact == "contact_later" and row.get("contact_later_on"):
            words += f" (on {row['contact_later_on']})"
        return words
    words = GAP_WORDS.get(row.get("contact_status") or "", row.get("contact_status"))
    if row.get("contact_via"):
        words = f"{words}; only through {row['contact_via']}"
    return words
FLAG_WORDS = {
    "never_seen": "never screened",
    "not_contacted": "not contacted",
    "lost_to_follow_up": "lost to follow-up",
    "verify": "rule from memory: verify",
    "trigger": "trigger: review now",
    "affected": "affected",
    "age_uncertain": "birth year only: age uncertain",
    "band_crossing": "age band changes",
    "band_changed_since_due": "age band changed since due",
    "band_change_before_visit": "age band changes before the visit",
    "vital_status_unknown": "vital status unknown",
    "no_rule": "no rule: clinician decides",
}


def flag_words(flags) -> str:
    """Flag codes in plain words, joined by '; ' (unknown codes shown with spaces)."""
    return "; ".join(FLAG_WORDS.get(f, f.replace("_", " ")) for f in flags or ())


def waiting_text(row: dict) -> str:
    """The never-screened phrase, else 'declined: not recalled', else the days overdue (see :func:`overdue_text`)."""
    if row.get("waiting"):
        return row["waiting"]
    if row.get("status") == "not_recalled":
        return "declined: not recalled"
    return overdue_text(row.get("days_overdue"))


def booked_text(row: dict) -> str:
    """'2026-12-07', '2026-12-07 (late)' or 'not booked'."""
    if not row.get("booked_week"):
        return "not booked"
    return row["booked_week"] + (" (late)" if row.get("late") else "")


@dataclass(frozen=True)
class WorklistLine:
    """One visit on the list.  ``due`` ISO date; ``days_overdue`` negative when not yet due."""

    person: str
    due: str | None
    days_overdue: int | None
    needs: tuple[str, ...]
    consider: tuple[str, ...]
    reason: str
    booked_week: str | None = None
    late: bool | None = None
    waiting: str | None = None
    flags: tuple[str, ...] = ()
    gap: str | None = None


@dataclass(frozen=True)
class WorklistDocument:
    """Everything printed: header facts, the two lists, and the cautions (one per line in the footer)."""

    clinic: str
    window_from: dt.date
    window_to: dt.date
    rule_set: str
    policy: str
    as_of: dt.date
    printed: dt.date
    screening: tuple[WorklistLine, ...]
    affected: tuple[WorklistLine, ...] = ()
    slots_per_week: int | None = None
    cautions: tuple[str, ...] = field(default_factory=tuple)
    notes: tuple[str, ...] = ()
    contact_gaps: tuple[WorklistLine, ...] = ()
    first_bookable_day: dt.date | None = None


def file_name(window_from: dt.date, window_to: dt.date) -> str:
    """``worklist-FROM-TO.pdf`` with ISO dates (codes and dates only, never a name)."""
    return f"worklist-{window_from.isoformat()}-{window_to.isoformat()}.pdf"


def line_from_row(row: dict) -> WorklistLine:
    """A :class:`WorklistLine` from a worklist row dict (the shape the worklist command builds)."""
    return WorklistLine(
        person=row["person"], due=row.get("due"), days_overdue=row.get("days_overdue"),
        needs=tuple(row.get("needs") or ()), consider=tuple(row.get("consider") or ()),
        reason=((row.get("reason") or "") + "".join(f" REVIEW: {f}." for f in row.get("review_flags") or ())).strip(),
        booked_week=row.get("booked_week"), late=row.get("late"),
        waiting=waiting_text(row) if row.get("waiting") or row.get("status") == "not_recalled" else None,
        flags=tuple(row.get("flags") or ()),
        gap=gap_words(row) if row.get("list") == "contact_gap"
        else None,
    )  # fmt: skip


def overdue_text(days: int | None) -> str:
    """'123' when overdue, 'due in 64 d' when not yet due, '0' on the day, '' when unknown."""
    if days is None:
        return ""
    if days < 0:
        return f"due in {-days} d"
    return str(days)


def _needs_text(line: WorklistLine) -> str:
    text = needs_words(line.needs) or "visit"
    if line.consider:
        text += f" (consider: {needs_words(line.consider)})"
    return text


def _booked_text(line: WorklistLine) -> str:
    return booked_text({"booked_week": line.booked_week, "late": line.late})


def _waiting(line: WorklistLine) -> str:
    return line.waiting or overdue_text(line.days_overdue)


def _table(lines: tuple[WorklistLine, ...], booked: bool, width: float, gaps: bool = False) -> Table:
    first = ["Gap"] if gaps else []
    heads = ["Person", *first, "Due", "Days overdue / waiting", "Visit needs", "Reason", "Flags"] + (
        ["Booked week"] if booked else [])
    fixed_mm = [28] + ([24] if gaps else []) + [20, 30, 40]
    tail_mm = [34] + ([26] if booked else [])
    reason_w = width - (sum(fixed_mm) + sum(tail_mm)) * mm
    widths = [w * mm for w in fixed_mm] + [reason_w] + [w * mm for w in tail_mm]
    data = [[paragraph(h, _HEAD_CELL) for h in heads]]
    for ln in lines:
        row = [paragraph(ln.person, _TEXT)] + ([paragraph(ln.gap or "", _TEXT)] if gaps else []) + [
            paragraph(ln.due or "", _TEXT), paragraph(_waiting(ln), _TEXT),
            paragraph(_needs_text(ln) if ln.needs or not gaps else "", _TEXT), paragraph(ln.reason, _TEXT),
            paragraph(flag_words(ln.flags), _TEXT)]
        if booked:
            row.append(paragraph(_booked_text(ln), _TEXT))
        data.append(row)
    t = Table(data, colWidths=widths, repeatRows=1)
    t.setStyle(
        TableStyle(
            [
                ("VALIGN", (0, 0), (-1, -1), "TOP"),
                ("BACKGROUND", (0, 0), (-1, 0), colors.HexColor("#E4E4E4")),
                ("ROWBACKGROUNDS", (0, 1), (-1, -1), [colors.white, colors.HexColor("#F6F6F6")]),
                ("LINEBELOW", (0, 0), (-1, -1), 0.3, colors.HexColor("#AAAAAA")),
                ("BOX", (0, 0), (-1, -1), 0.5, colors.HexColor("#888888")),
                ("LEFTPADDING", (0, 0), (-1, -1), 4),
                ("RIGHTPADDING", (0, 0), (-1, -1), 4),
                ("TOPPADDING", (0, 0), (-1, -1), 3),
                ("BOTTOMPADDING", (0, 0), (-1, -1), 3),
            ]
        )
    )
    return t


def build_story(doc: WorklistDocument) -> list:
    """The flowables: header, the screening table, the affected table, notes, the contact gaps."""
    width = PAGE[0] - 2 * MARGIN_MM * mm
    slots = f", {doc.slots_per_week} slots a week" if doc.slots_per_week is not None else ""
    story: list = [
        paragraph(f"Recall worklist: {doc.clinic}", _TITLE),
        paragraph(f"Window {doc.window_from.isoformat()} to {doc.window_to.isoformat()}{slots}. "
           f"Rule set: {doc.rule_set}; interval policy: {doc.policy}.", _META),  # fmt: skip
        paragraph(f"Plan as of {doc.as_of.isoformat()}; printed {doc.printed.isoformat()}. "
           "Person codes only; look the person up in the record.", _META),  # fmt: skip
        Spacer(1, 4),
    ]
    booked = doc.slots_per_week is not None
    story.append(paragraph(f"Family screening: due or overdue by {doc.window_to.isoformat()}, most urgent first "
                    f"({len(doc.screening)})", _SECTION))  # fmt: skip
    story.append(_table(doc.screening, booked, width) if doc.screening else paragraph("None.", _TEXT))
    if booked and doc.first_bookable_day is not None:
        story.append(paragraph(f"Booked from {doc.first_bookable_day.isoformat()}, the first clinic day on or after "
                               "the window start and the plan date.", _TEXT))  # fmt: skip
    if doc.affected:
        story.append(paragraph(f"Affected members: follow-up interval ({len(doc.affected)})", _SECTION))
        story.append(_table(doc.affected, False, width))
    for n in doc.notes:
        story.append(Spacer(1, 3))
        story.append(paragraph(f"Note: {n}", _TEXT))
    story.append(paragraph(f"Contact gaps: not booked until contact is made ({len(doc.contact_gaps)})", _SECTION))
    story.append(paragraph("Not contacted, lost to follow-up or declined. Contact or re-contact them as the local "
                           "protocol says; book only once they can be reached.", _TEXT))  # fmt: skip
    story.append(_table(doc.contact_gaps, False, width, gaps=True) if doc.contact_gaps else paragraph("None.", _TEXT))
    return story


def write_worklist_pdf(doc: WorklistDocument, path: str | Path) -> Path:
    """Write ``doc`` as an A4 landscape PDF at ``path`` (the folder must exist) and return the path."""
    path = Path(path)
    footer = [PAGE_CAUTION] + [c for c in doc.cautions if c != PAGE_CAUTION]
    pdf = SimpleDocTemplate(
        str(path),
        pagesize=PAGE,
        leftMargin=MARGIN_MM * mm,
        rightMargin=MARGIN_MM * mm,
        topMargin=12 * mm,
        bottomMargin=FOOTER_MM * mm + 3 * mm,
        title=f"Recall worklist {doc.window_from.isoformat()} to {doc.window_to.isoformat()}",
        author=doc.clinic,
        subject="Recall worklist (person codes only)",
        creator="hcm-family-tracker",
    )
    pdf.build(build_story(doc), canvasmaker=numbered_canvas(PAGE, MARGIN_MM, FOOTER_MM, _FOOTER, lambda n, total: " ".join(footer)
                                               + f"  Printed {doc.printed.isoformat()}, page {n} of {total}."))  # fmt: skip
    return path
